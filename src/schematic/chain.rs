//! The three-op-amp state-variable stage's layout and its matcher: the damped integrator (U1),
//! the integrator (U2) and the inverter (U3) left to right, the loop resistor from U3's output
//! back to U1's inverting input drawn as a return wire along the bottom, and the feed-forward
//! parts from the input (Ca or Rb to U1, Rd to U2) present or absent.
//!
//! The single-op-amp matcher binds one op amp's pins; this stage has three, so it is matched by
//! its own rule: each op amp is told by its feedback (R and C for U1, C alone for U2, R alone for
//! U3), then the loop resistors and the input parts are found between the pins they must join.

use super::layouts::{Inputs, Layout, Slot, Sym};
use crate::netlist::{Node, PartKind, StageNetlist};
use PartKind::{Capacitor as C, Resistor as R};

/// The left edges of the three op amps (grid units); each has its inputs at y = 3 and 5 and its
/// output 3.5 to the right at y = 4, like the single op amp of the other layouts.
pub(super) const CHAIN_OPAMP_X: [f64; 3] = [8.0, 19.0, 30.0];

const FEED_M1: &[(f64, f64)] = &[(0.0, 3.0), (4.0, 3.0), (6.5, 3.0)];
const FEED_M2: &[(f64, f64)] = &[(0.0, 3.0), (0.0, 7.5), (4.5, 7.5), (17.5, 7.5), (17.5, 3.0)];
const RQ: &[(f64, f64)] = &[(6.5, 3.0), (6.5, 1.4), (12.5, 1.4), (12.5, 4.0)];
const C1: &[(f64, f64)] = &[(6.5, 1.4), (6.5, -0.6), (12.5, -0.6), (12.5, 1.4)];
const R1_RETURN: &[(f64, f64)] = &[(34.5, 4.0), (34.5, 9.0), (6.5, 9.0), (6.5, 3.0)];
const R2: &[(f64, f64)] = &[(12.5, 4.0), (14.0, 4.0), (14.0, 3.0), (17.5, 3.0)];
const C2: &[(f64, f64)] = &[(17.5, 3.0), (17.5, 1.4), (23.5, 1.4), (23.5, 4.0)];
const RI: &[(f64, f64)] = &[(23.5, 4.0), (25.0, 4.0), (25.0, 3.0), (28.5, 3.0)];
const RF: &[(f64, f64)] = &[(28.5, 3.0), (28.5, 1.4), (34.5, 1.4), (34.5, 4.0)];

const WIRES: [&[(f64, f64)]; 10] = [
    &[(6.5, 3.0), (8.0, 3.0)],
    &[(11.5, 4.0), (12.5, 4.0)],
    &[(17.5, 3.0), (19.0, 3.0)],
    &[(22.5, 4.0), (23.5, 4.0)],
    &[(28.5, 3.0), (30.0, 3.0)],
    &[(33.5, 4.0), (34.5, 4.0)],
    &[(8.0, 5.0), (7.4, 5.0), (7.4, 6.0)],
    &[(19.0, 5.0), (18.4, 5.0), (18.4, 6.0)],
    &[(30.0, 5.0), (29.4, 5.0), (29.4, 6.0)],
    // The output is U1's: a tap from its output down to the terminal.
    &[(13.2, 4.0), (13.2, 6.5)],
];

fn slot(kind: PartKind, path: &'static [(f64, f64)], body: usize, optional: bool) -> Slot {
    Slot {
        kind,
        // The chain matcher places parts by their place in the loop, not by these points.
        ends: (Sym::In, Sym::Gnd),
        path,
        body_segment: body,
        optional,
    }
}

/// The state-variable layout. Slot order is the order [`match_chain`] returns: Ca, Rb, Rd, Rq,
/// C1, R1, R2, C2, Ri, Rf.
pub(super) fn chain_layout() -> Layout {
    Layout {
        name: "state-variable",
        inputs: Inputs::Chain,
        slots: vec![
            slot(C, FEED_M1, 0, true),
            slot(R, FEED_M1, 0, true),
            slot(R, FEED_M2, 1, true),
            slot(R, RQ, 1, false),
            slot(C, C1, 1, false),
            slot(R, R1_RETURN, 1, false),
            slot(R, R2, 2, false),
            slot(C, C2, 1, false),
            slot(R, RI, 2, false),
            slot(R, RF, 1, false),
        ],
        wires: WIRES.to_vec(),
        dots: &[
            (6.5, 3.0),
            (6.5, 1.4),
            (12.5, 1.4),
            (12.5, 4.0),
            (13.2, 4.0),
            (17.5, 3.0),
            (23.5, 4.0),
            (28.5, 3.0),
            (34.5, 4.0),
        ],
        grounds: &[(7.4, 6.0), (18.4, 6.0), (29.4, 6.0)],
        input_at: (0.0, 3.0),
        output_at: (13.2, 6.5),
    }
}

/// Places a state-variable netlist's parts in [`chain_layout`]'s slots, or `None` when the
/// netlist is not that stage (every passive part must find its place, each place at most once).
pub(super) fn match_chain(net: &StageNetlist) -> Option<Vec<Option<usize>>> {
    let mut amps: Vec<(Node, Node)> = Vec::new();
    for part in net.parts.iter().filter(|p| p.kind == PartKind::OpAmp) {
        match part.nodes.as_slice() {
            [None, minus @ Some(_), out @ Some(_)] if minus != out => amps.push((*minus, *out)),
            _ => return None,
        }
    }
    if amps.len() != 3 {
        return None;
    }
    let joining = |kind: PartKind, a: Node, b: Node| -> Vec<usize> {
        net.parts
            .iter()
            .enumerate()
            .filter(|(_, p)| {
                p.kind == kind && (p.nodes.as_slice() == [a, b] || p.nodes.as_slice() == [b, a])
            })
            .map(|(i, _)| i)
            .collect()
    };
    let one = |found: Vec<usize>| -> Option<Option<usize>> {
        match found.as_slice() {
            [] => Some(None),
            [i] => Some(Some(*i)),
            _ => None,
        }
    };
    // Each op amp by its feedback: (has R, has C).
    let feedback =
        |&(m, o): &(Node, Node)| (!joining(R, m, o).is_empty(), !joining(C, m, o).is_empty());
    let find = |want: (bool, bool)| amps.iter().copied().find(|a| feedback(a) == want);
    let (u1, u2, u3) = (
        find((true, true))?,
        find((false, true))?,
        find((true, false))?,
    );
    if u1.1 != Some(net.output) {
        return None;
    }
    let input = Some(net.input);
    let placed = vec![
        one(joining(C, input, u1.0))?,
        one(joining(R, input, u1.0))?,
        one(joining(R, input, u2.0))?,
        Some(one(joining(R, u1.0, u1.1))??),
        Some(one(joining(C, u1.0, u1.1))??),
        Some(one(joining(R, u3.1, u1.0))??),
        Some(one(joining(R, u1.1, u2.0))??),
        Some(one(joining(C, u2.0, u2.1))??),
        Some(one(joining(R, u2.1, u3.0))??),
        Some(one(joining(R, u3.0, u3.1))??),
    ];
    let n_passive = net
        .parts
        .iter()
        .filter(|p| p.kind != PartKind::OpAmp)
        .count();
    // Ca and Rb share a place on the drawing; a netlist with both is not one of ours.
    let both_feeds = placed[0].is_some() && placed[1].is_some();
    (placed.iter().flatten().count() == n_passive && !both_feeds).then_some(placed)
}

#[cfg(test)]
mod tests {
    use crate::board::{Board, BuildChoices};
    use crate::plot::{Look, Theme};
    use crate::schematic::{draw, layout_name, Drawn};
    use crate::section::{Section, SectionKind};
    use crate::topology::{Circuit, Topology};

    /// The four state-variable stages as the board builds them under `topo=statevar`.
    fn stages() -> Vec<(Circuit, crate::netlist::StageNetlist)> {
        let choices = BuildChoices {
            topology: Topology::StateVariable,
            ..BuildChoices::default()
        };
        let section = |kind, fz_hz| Section {
            kind,
            f0_hz: 1e3,
            q: Some(2.0),
            gain: 1.0,
            fz_hz,
        };
        [
            section(SectionKind::LowPass, None),
            section(SectionKind::HighPass, None),
            section(SectionKind::BandPass, None),
            section(SectionKind::Notch, Some(2.2e3)),
        ]
        .iter()
        .map(|s| {
            let board = Board::build(&[*s], &choices).expect("the stage builds");
            let stage = &board.stages[0];
            (stage.circuit, stage.netlist.clone())
        })
        .collect()
    }

    #[test]
    fn every_state_variable_stage_is_drawn_from_the_three_op_amp_layout() {
        // Source: the stage's own netlist (topology::state_variable): U1 damped integrator with
        // Rq ∥ C1, U2 integrator with C2, U3 inverter with Rf, loop resistors R1, R2, Ri, and the
        // feed-forward parts from the input; every part must be drawn and labelled.
        let look = Look {
            theme: Theme::Light,
            scale: 1.0,
            compact: false,
        };
        let circuits: Vec<Circuit> = stages().iter().map(|(c, _)| *c).collect();
        assert_eq!(
            circuits,
            [
                Circuit::StateVariableLowPass,
                Circuit::StateVariableHighPass,
                Circuit::StateVariableBandPass,
                Circuit::StateVariableNotch
            ]
        );
        for (circuit, net) in stages() {
            assert_eq!(layout_name(&net), Some("state-variable"), "{circuit:?}");
            let mut svg = String::new();
            {
                let mut backend = plotters::prelude::SVGBackend::with_string(&mut svg, (720, 240));
                let drawn = draw(&mut backend, &net, &[], &look);
                assert_eq!(drawn, Ok(Drawn::Layout("state-variable")), "{circuit:?}");
            }
            crate::plot::dump_for_review(&format!("schematic-{}.svg", circuit.key()), &svg);
            for part in net
                .parts
                .iter()
                .filter(|p| p.kind != crate::netlist::PartKind::OpAmp)
            {
                assert!(
                    svg.contains(&part.reference),
                    "{circuit:?}: {} is not labelled",
                    part.reference
                );
            }
        }
    }

    #[test]
    fn a_state_variable_netlist_missing_a_loop_part_is_not_drawn_as_one() {
        // Source: the same netlist with the loop resistor R1 removed is no longer a closed
        // two-integrator loop, so it must fall back to the connection list.
        for (circuit, mut net) in stages() {
            let r1 = net.parts.iter().position(|p| p.role == "loop resistor");
            assert!(
                r1.is_some(),
                "{circuit:?}: the netlist names its loop resistor"
            );
            net.parts.retain(|p| p.role != "loop resistor");
            assert_eq!(layout_name(&net), None, "{circuit:?}");
        }
    }
}

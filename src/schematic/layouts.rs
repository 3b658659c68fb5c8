//! The layouts we know, one per circuit shape: where each part sits, the fixed wires, junction
//! dots and grounds, on a grid with the op amp at x = 10 (grid units, y down).
//!
//! A layout names its part positions by the circuit points they join ([`Sym`]), not by netlist
//! nodes; [`super::matching`] binds those points to a netlist's nodes.

use crate::netlist::PartKind;

/// A circuit point that a layout slot connects to, before it is bound to a netlist node.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Sym {
    /// The stage input.
    In,
    /// Inner node A.
    A,
    /// The op-amp non-inverting input.
    P,
    /// The op-amp inverting input.
    M,
    /// The op-amp output (or the stage output of a passive stage).
    O,
    /// Ground.
    Gnd,
}

/// A part position in a layout: what kind of part, which two points it joins, the wire path from
/// the first point to the second (grid units, y down) and which segment carries the part body.
pub(super) struct Slot {
    pub(super) kind: PartKind,
    pub(super) ends: (Sym, Sym),
    pub(super) path: &'static [(f64, f64)],
    pub(super) body_segment: usize,
    /// A slot that may be absent (the damping resistor of some band-pass stages).
    pub(super) optional: bool,
}

/// How the op amp's inputs are wired in a layout.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Inputs {
    /// Non-inverting stage, `+` on top: the inverting input is tied to the output.
    Follower,
    /// Non-inverting stage with gain: the inverting input has its own node (Rf, Rg slots).
    WithGain,
    /// Inverting stage, `−` on top: the non-inverting input is grounded.
    Inverting,
    /// No op amp (a passive RC stage).
    Passive,
    /// Inverting-style network, `−` on top, whose non-inverting input has its own node (the
    /// single-op-amp notch, its `+` input on a divider from the stage input).
    Lifted,
    /// Three inverting op amps in a loop (the state-variable stage, [`super::chain`]).
    Chain,
}

pub(super) struct Layout {
    pub(super) name: &'static str,
    pub(super) inputs: Inputs,
    pub(super) slots: Vec<Slot>,
    /// Fixed wires (pins to junctions, ties, the output lead).
    pub(super) wires: Vec<&'static [(f64, f64)]>,
    /// Junction dots.
    pub(super) dots: &'static [(f64, f64)],
    /// Ground symbols at these points.
    pub(super) grounds: &'static [(f64, f64)],
    /// Input and output terminals.
    pub(super) input_at: (f64, f64),
    pub(super) output_at: (f64, f64),
}

/// Op-amp placement shared by all layouts: left edge x = 10, centre y = 4, inputs at y = 3 and 5,
/// output at (13.5, 4).
pub(super) const OPAMP_X: f64 = 10.0;
pub(super) const OPAMP_Y: f64 = 4.0;
const OUT_LEAD: &[(f64, f64)] = &[(13.5, 4.0), (16.5, 4.0)];

// Non-inverting second-order stages (Sallen-Key).
const SK_IN: &[(f64, f64)] = &[(0.0, 3.0), (4.0, 3.0)];
const SK_MID: &[(f64, f64)] = &[(4.0, 3.0), (8.0, 3.0), (10.0, 3.0)];
const SK_FEEDBACK: &[(f64, f64)] = &[(4.0, 3.0), (4.0, 0.8), (15.0, 0.8), (15.0, 4.0)];
const SK_SHUNT: &[(f64, f64)] = &[(8.0, 3.0), (8.0, 6.3)];
// Non-inverting first-order stage.
const FO_IN: &[(f64, f64)] = &[(0.0, 3.0), (6.0, 3.0), (10.0, 3.0)];
const FO_SHUNT: &[(f64, f64)] = &[(7.5, 3.0), (7.5, 6.3)];
// The follower tie and the gain network of non-inverting stages.
const TIE: &[(f64, f64)] = &[
    (10.0, 5.0),
    (9.0, 5.0),
    (9.0, 7.5),
    (15.0, 7.5),
    (15.0, 4.0),
];
const GAIN_RF: &[(f64, f64)] = &[
    (15.0, 4.0),
    (15.0, 7.5),
    (9.0, 7.5),
    (9.0, 5.0),
    (10.0, 5.0),
];
const GAIN_RG: &[(f64, f64)] = &[(9.0, 7.5), (9.0, 10.3)];
// Inverting stages (multiple feedback).
const MFB_IN: &[(f64, f64)] = &[(0.0, 3.0), (4.0, 3.0)];
const MFB_SHUNT: &[(f64, f64)] = &[(4.0, 3.0), (4.0, 6.3)];
const MFB_SERIES: &[(f64, f64)] = &[(4.0, 3.0), (8.5, 3.0), (10.0, 3.0)];
const MFB_INNER: &[(f64, f64)] = &[(8.5, 3.0), (8.5, 1.4), (15.0, 1.4), (15.0, 4.0)];
const MFB_OUTER: &[(f64, f64)] = &[(4.0, 3.0), (4.0, -0.6), (15.0, -0.6), (15.0, 1.4)];
const PLUS_TO_GROUND: &[(f64, f64)] = &[(10.0, 5.0), (9.0, 5.0), (9.0, 6.0)];
// Inverting first-order stages.
const INV_IN: &[(f64, f64)] = &[(0.0, 3.0), (5.5, 3.0), (10.0, 3.0)];
const INV_IN_SPLIT_A: &[(f64, f64)] = &[(0.0, 3.0), (3.8, 3.0)];
const INV_IN_SPLIT_B: &[(f64, f64)] = &[(3.8, 3.0), (7.2, 3.0), (10.0, 3.0)];
const INV_FEEDBACK_R: &[(f64, f64)] = &[(8.5, 3.0), (8.5, 1.4), (15.0, 1.4), (15.0, 4.0)];
const INV_FEEDBACK_C: &[(f64, f64)] = &[(8.5, 1.4), (8.5, -0.6), (15.0, -0.6), (15.0, 1.4)];
// Passive RC.
const RC_SERIES: &[(f64, f64)] = &[(0.0, 3.0), (5.0, 3.0)];
const RC_SHUNT: &[(f64, f64)] = &[(6.5, 3.0), (6.5, 6.3)];
const RC_OUT: &[(f64, f64)] = &[(5.0, 3.0), (9.0, 3.0)];

// The single-op-amp notch: the band-pass network around the inverting input, the divider to
// the non-inverting input below it, and the zero-setting resistor at the inverting input.
const NOTCH_IN: &[(f64, f64)] = &[(0.0, 3.0), (4.0, 3.0)];
const NOTCH_SHUNT: &[(f64, f64)] = &[(4.0, 3.0), (4.0, 5.3)];
const NOTCH_ZERO_TO_GROUND: &[(f64, f64)] = &[(8.5, 3.0), (8.5, 5.8)];
const NOTCH_ZERO_FEED: &[(f64, f64)] = &[(0.0, 3.0), (0.0, 7.2), (8.5, 7.2), (8.5, 3.0)];
const NOTCH_DIVIDER_UPPER: &[(f64, f64)] = &[(0.0, 3.0), (0.0, 9.0), (9.2, 9.0)];
const NOTCH_DIVIDER_LOWER: &[(f64, f64)] = &[(9.2, 9.0), (9.2, 11.3)];
const NOTCH_PLUS: &[(f64, f64)] = &[(9.2, 9.0), (9.2, 5.0), (10.0, 5.0)];

/// A fixed list of grid points (dots, grounds).
type Points = &'static [(f64, f64)];

fn slot(kind: PartKind, ends: (Sym, Sym), path: &'static [(f64, f64)], body: usize) -> Slot {
    Slot {
        kind,
        ends,
        path,
        body_segment: body,
        optional: false,
    }
}

use PartKind::{Capacitor as C, Resistor as R};

/// Every layout we know, most specific first.
pub(super) fn layouts() -> Vec<Layout> {
    let mut all = vec![super::chain::chain_layout()];
    // Sallen-Key: low-pass has R in series and C in feedback/shunt; high-pass the other way round.
    for (name, series, shunt) in [
        ("Sallen-Key low-pass", R, C),
        ("Sallen-Key high-pass", C, R),
    ] {
        for gain in [false, true] {
            let mut slots = vec![
                slot(series, (Sym::In, Sym::A), SK_IN, 0),
                slot(series, (Sym::A, Sym::P), SK_MID, 0),
                slot(shunt, (Sym::A, Sym::O), SK_FEEDBACK, 1),
                slot(shunt, (Sym::P, Sym::Gnd), SK_SHUNT, 0),
            ];
            let mut wires: Vec<&'static [(f64, f64)]> = vec![OUT_LEAD];
            if gain {
                slots.push(slot(R, (Sym::O, Sym::M), GAIN_RF, 1));
                slots.push(slot(R, (Sym::M, Sym::Gnd), GAIN_RG, 0));
            } else {
                wires.push(TIE);
            }
            all.push(Layout {
                name,
                inputs: if gain {
                    Inputs::WithGain
                } else {
                    Inputs::Follower
                },
                slots,
                wires,
                dots: if gain {
                    &[(4.0, 3.0), (8.0, 3.0), (15.0, 4.0), (9.0, 7.5)]
                } else {
                    &[(4.0, 3.0), (8.0, 3.0), (15.0, 4.0)]
                },
                grounds: if gain {
                    &[(8.0, 6.3), (9.0, 10.3)]
                } else {
                    &[(8.0, 6.3)]
                },
                input_at: (0.0, 3.0),
                output_at: (16.5, 4.0),
            });
        }
    }
    // Buffered first-order RC.
    for (name, series, shunt) in [
        ("buffered RC low-pass", R, C),
        ("buffered RC high-pass", C, R),
    ] {
        for gain in [false, true] {
            let mut slots = vec![
                slot(series, (Sym::In, Sym::P), FO_IN, 0),
                slot(shunt, (Sym::P, Sym::Gnd), FO_SHUNT, 0),
            ];
            let mut wires: Vec<&'static [(f64, f64)]> = vec![OUT_LEAD];
            if gain {
                slots.push(slot(R, (Sym::O, Sym::M), GAIN_RF, 1));
                slots.push(slot(R, (Sym::M, Sym::Gnd), GAIN_RG, 0));
            } else {
                wires.push(TIE);
            }
            all.push(Layout {
                name,
                inputs: if gain {
                    Inputs::WithGain
                } else {
                    Inputs::Follower
                },
                slots,
                wires,
                dots: if gain {
                    &[(7.5, 3.0), (15.0, 4.0), (9.0, 7.5)]
                } else {
                    &[(7.5, 3.0), (15.0, 4.0)]
                },
                grounds: if gain {
                    &[(7.5, 6.3), (9.0, 10.3)]
                } else {
                    &[(7.5, 6.3)]
                },
                input_at: (0.0, 3.0),
                output_at: (16.5, 4.0),
            });
        }
    }
    // Multiple feedback: input part, shunt at A, series A→M, inner M→O, outer A→O.
    for (name, kinds, shunt_optional) in [
        ("multiple-feedback low-pass", [R, C, R, C, R], false),
        ("multiple-feedback high-pass", [C, R, C, R, C], false),
        ("multiple-feedback band-pass", [R, R, C, R, C], true),
    ] {
        let mut shunt = slot(kinds[1], (Sym::A, Sym::Gnd), MFB_SHUNT, 0);
        shunt.optional = shunt_optional;
        all.push(Layout {
            name,
            inputs: Inputs::Inverting,
            slots: vec![
                slot(kinds[0], (Sym::In, Sym::A), MFB_IN, 0),
                shunt,
                slot(kinds[2], (Sym::A, Sym::M), MFB_SERIES, 0),
                slot(kinds[3], (Sym::M, Sym::O), MFB_INNER, 1),
                slot(kinds[4], (Sym::A, Sym::O), MFB_OUTER, 1),
            ],
            wires: vec![OUT_LEAD, PLUS_TO_GROUND],
            dots: &[(4.0, 3.0), (8.5, 3.0), (15.0, 4.0), (15.0, 1.4)],
            grounds: &[(4.0, 6.3), (9.0, 6.0)],
            input_at: (0.0, 3.0),
            output_at: (16.5, 4.0),
        });
    }
    // The single-op-amp notch, one layout per shape (the zero-setting resistor to ground, from
    // the input, or none).
    for (name, zero) in [
        (
            "single-op-amp low-pass notch",
            Some(((Sym::M, Sym::Gnd), NOTCH_ZERO_TO_GROUND, 0)),
        ),
        (
            "single-op-amp high-pass notch",
            Some(((Sym::In, Sym::M), NOTCH_ZERO_FEED, 1)),
        ),
        ("single-op-amp symmetric notch", None),
    ] {
        let mut slots = vec![
            slot(R, (Sym::In, Sym::A), NOTCH_IN, 0),
            slot(R, (Sym::A, Sym::Gnd), NOTCH_SHUNT, 0),
            slot(C, (Sym::A, Sym::M), MFB_SERIES, 0),
            slot(C, (Sym::A, Sym::O), MFB_OUTER, 1),
            slot(R, (Sym::M, Sym::O), MFB_INNER, 1),
        ];
        if let Some((ends, path, body)) = zero {
            slots.push(slot(R, ends, path, body));
        }
        slots.push(slot(R, (Sym::In, Sym::P), NOTCH_DIVIDER_UPPER, 1));
        slots.push(slot(R, (Sym::P, Sym::Gnd), NOTCH_DIVIDER_LOWER, 0));
        let (dots, grounds): (Points, Points) = match zero {
            Some(((Sym::M, Sym::Gnd), _, _)) => (
                &[(4.0, 3.0), (8.5, 3.0), (15.0, 4.0), (15.0, 1.4), (9.2, 9.0)],
                &[(4.0, 5.3), (8.5, 5.8), (9.2, 11.3)],
            ),
            Some(_) => (
                &[
                    (4.0, 3.0),
                    (8.5, 3.0),
                    (15.0, 4.0),
                    (15.0, 1.4),
                    (9.2, 9.0),
                    (0.0, 7.2),
                ],
                &[(4.0, 5.3), (9.2, 11.3)],
            ),
            None => (
                &[(4.0, 3.0), (8.5, 3.0), (15.0, 4.0), (15.0, 1.4), (9.2, 9.0)],
                &[(4.0, 5.3), (9.2, 11.3)],
            ),
        };
        all.push(Layout {
            name,
            inputs: Inputs::Lifted,
            slots,
            wires: vec![OUT_LEAD, NOTCH_PLUS],
            dots,
            grounds,
            input_at: (0.0, 3.0),
            output_at: (16.5, 4.0),
        });
    }
    // Inverting first-order low-pass: R in, R ∥ C in feedback.
    all.push(Layout {
        name: "inverting RC low-pass",
        inputs: Inputs::Inverting,
        slots: vec![
            slot(R, (Sym::In, Sym::M), INV_IN, 0),
            slot(R, (Sym::M, Sym::O), INV_FEEDBACK_R, 1),
            slot(C, (Sym::M, Sym::O), INV_FEEDBACK_C, 1),
        ],
        wires: vec![OUT_LEAD, PLUS_TO_GROUND],
        dots: &[(8.5, 3.0), (8.5, 1.4), (15.0, 1.4), (15.0, 4.0)],
        grounds: &[(9.0, 6.0)],
        input_at: (0.0, 3.0),
        output_at: (16.5, 4.0),
    });
    // Inverting first-order high-pass: C and R in series at the input, R in feedback.
    for (first, second) in [(C, R), (R, C)] {
        all.push(Layout {
            name: "inverting RC high-pass",
            inputs: Inputs::Inverting,
            slots: vec![
                slot(first, (Sym::In, Sym::A), INV_IN_SPLIT_A, 0),
                slot(second, (Sym::A, Sym::M), INV_IN_SPLIT_B, 0),
                slot(R, (Sym::M, Sym::O), INV_FEEDBACK_R, 1),
            ],
            wires: vec![OUT_LEAD, PLUS_TO_GROUND],
            dots: &[(8.5, 3.0), (15.0, 4.0)],
            grounds: &[(9.0, 6.0)],
            input_at: (0.0, 3.0),
            output_at: (16.5, 4.0),
        });
    }
    // Passive RC (no op amp): series part to the output node, shunt part to ground.
    for (name, series, shunt) in [("RC low-pass", R, C), ("RC high-pass", C, R)] {
        all.push(Layout {
            name,
            inputs: Inputs::Passive,
            slots: vec![
                slot(series, (Sym::In, Sym::O), RC_SERIES, 0),
                slot(shunt, (Sym::O, Sym::Gnd), RC_SHUNT, 0),
            ],
            wires: vec![RC_OUT],
            dots: &[(6.5, 3.0)],
            grounds: &[(6.5, 6.3)],
            input_at: (0.0, 3.0),
            output_at: (9.0, 3.0),
        });
    }
    all
}

//! Stage schematics drawn by our own code from the stage netlist, with every part labelled by its
//! reference and value.
//!
//! A stage netlist says only which nodes each part joins. To draw it the way an engineer expects
//! (signal left to right, op amp in the middle, feedback parts above it), the netlist is matched
//! against a small set of layouts, one per circuit shape: Sallen-Key low- and high-pass, multiple
//! feedback low-, high- and band-pass, the first-order buffered and inverting RC stages and a
//! passive RC. Matching is by connectivity alone (which part joins the input, the op-amp pins,
//! ground or an inner node), so it does not depend on how the netlist numbers its nodes or orders
//! its parts. A netlist that fits no layout is drawn as a labelled list of its connections, so
//! every stage still shows its parts.

use plotters::prelude::{DrawingBackend, ShapeStyle};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{FontStyle, RGBAColor};
use serde::Serialize;

use crate::netlist::{Node, PartKind, StageNetlist};
use crate::plot::figure::{backend_err, round, text_style, text_style_with, Coord};
use crate::plot::{Look, PlotError};
use crate::units::format_si;

/// A circuit point that a layout slot connects to, before it is bound to a netlist node.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Sym {
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
struct Slot {
    kind: PartKind,
    ends: (Sym, Sym),
    path: &'static [(f64, f64)],
    body_segment: usize,
    /// A slot that may be absent (the damping resistor of some band-pass stages).
    optional: bool,
}

/// How the op amp's inputs are wired in a layout.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Inputs {
    /// Non-inverting stage, `+` on top: the inverting input is tied to the output.
    Follower,
    /// Non-inverting stage with gain: the inverting input has its own node (Rf, Rg slots).
    WithGain,
    /// Inverting stage, `−` on top: the non-inverting input is grounded.
    Inverting,
    /// No op amp (a passive RC stage).
    Passive,
}

struct Layout {
    name: &'static str,
    inputs: Inputs,
    slots: Vec<Slot>,
    /// Fixed wires (pins to junctions, ties, the output lead).
    wires: Vec<&'static [(f64, f64)]>,
    /// Junction dots.
    dots: &'static [(f64, f64)],
    /// Ground symbols at these points.
    grounds: &'static [(f64, f64)],
    /// Input and output terminals.
    input_at: (f64, f64),
    output_at: (f64, f64),
}

/// Op-amp placement shared by all layouts: left edge x = 10, centre y = 4, inputs at y = 3 and 5,
/// output at (13.5, 4).
const OPAMP_X: f64 = 10.0;
const OPAMP_Y: f64 = 4.0;
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
fn layouts() -> Vec<Layout> {
    let mut all = Vec::new();
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

/// The op-amp pins of a netlist: `(plus, minus, out)`, or `None` when it has no op amp.
fn op_amp_pins(net: &StageNetlist) -> Option<(Node, Node, Node)> {
    let part = net.parts.iter().find(|p| p.kind == PartKind::OpAmp)?;
    match part.nodes.as_slice() {
        [plus, minus, out] => Some((*plus, *minus, *out)),
        _ => None,
    }
}

/// Binds the layout's symbols to netlist nodes and each passive part to a slot. Returns, for each
/// slot, the index of the part placed there (`None` for an absent optional slot).
fn match_layout(layout: &Layout, net: &StageNetlist) -> Option<Vec<Option<usize>>> {
    let pins = op_amp_pins(net);
    let mut bind: [Option<Node>; 6] = [None; 6];
    let index = |s: Sym| s as usize;
    bind[index(Sym::In)] = Some(Some(net.input));
    bind[index(Sym::Gnd)] = Some(None);
    match (layout.inputs, pins) {
        (Inputs::Passive, None) => {
            bind[index(Sym::O)] = Some(Some(net.output));
        }
        (Inputs::Passive, Some(_)) | (_, None) => return None,
        (inputs, Some((plus, minus, out))) => {
            if out != Some(net.output) {
                return None;
            }
            bind[index(Sym::O)] = Some(out);
            match inputs {
                Inputs::Follower => {
                    if minus != out {
                        return None;
                    }
                    bind[index(Sym::P)] = Some(plus);
                }
                Inputs::WithGain => {
                    if minus == out || minus.is_none() {
                        return None;
                    }
                    bind[index(Sym::P)] = Some(plus);
                    bind[index(Sym::M)] = Some(minus);
                }
                Inputs::Inverting => {
                    if plus.is_some() {
                        return None;
                    }
                    bind[index(Sym::P)] = Some(None);
                    bind[index(Sym::M)] = Some(minus);
                }
                Inputs::Passive => return None,
            }
        }
    }
    let passives: Vec<usize> = net
        .parts
        .iter()
        .enumerate()
        .filter(|(_, p)| p.kind != PartKind::OpAmp)
        .map(|(i, _)| i)
        .collect();
    let n_required = layout.slots.iter().filter(|s| !s.optional).count();
    if passives.len() < n_required || passives.len() > layout.slots.len() {
        return None;
    }
    let mut placed: Vec<Option<usize>> = vec![None; layout.slots.len()];
    let mut used = vec![false; net.parts.len()];
    if search(layout, net, 0, &mut bind, &mut placed, &mut used) {
        // Every passive part must have found a slot.
        let n_placed = placed.iter().flatten().count();
        (n_placed == passives.len()).then_some(placed)
    } else {
        None
    }
}

/// Depth-first assignment of parts to slots with symbol binding; layouts have at most seven
/// slots, so the search is small.
fn search(
    layout: &Layout,
    net: &StageNetlist,
    slot_idx: usize,
    bind: &mut [Option<Node>; 6],
    placed: &mut Vec<Option<usize>>,
    used: &mut Vec<bool>,
) -> bool {
    let Some(slot) = layout.slots.get(slot_idx) else {
        return true;
    };
    for (part_idx, part) in net.parts.iter().enumerate() {
        if used[part_idx] || part.kind != slot.kind {
            continue;
        }
        let [a, b] = match part.nodes.as_slice() {
            [a, b] => [*a, *b],
            _ => continue,
        };
        for (first, second) in [(a, b), (b, a)] {
            let saved = *bind;
            if try_bind(bind, slot.ends.0, first) && try_bind(bind, slot.ends.1, second) {
                used[part_idx] = true;
                placed[slot_idx] = Some(part_idx);
                if search(layout, net, slot_idx + 1, bind, placed, used) {
                    return true;
                }
                used[part_idx] = false;
                placed[slot_idx] = None;
            }
            *bind = saved;
        }
    }
    if slot.optional {
        placed[slot_idx] = None;
        return search(layout, net, slot_idx + 1, bind, placed, used);
    }
    false
}

fn try_bind(bind: &mut [Option<Node>; 6], sym: Sym, node: Node) -> bool {
    let slot = &mut bind[sym as usize];
    match slot {
        Some(bound) => *bound == node,
        None => {
            // An inner node is a node of its own: not ground and not already another symbol.
            if node.is_none() {
                return false;
            }
            let taken = [Sym::In, Sym::A, Sym::P, Sym::M, Sym::O]
                .iter()
                .any(|&other| other != sym && bind[other as usize] == Some(node));
            if taken {
                return false;
            }
            bind[sym as usize] = Some(node);
            true
        }
    }
}

/// Which layout a netlist was drawn with.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub enum Drawn {
    /// A known circuit shape, named.
    Layout(&'static str),
    /// No layout fitted; the parts were drawn as a list of connections.
    ConnectionList,
}

/// Names the layout a netlist matches, or `None` when it fits none (it is then drawn as a list).
pub fn layout_name(net: &StageNetlist) -> Option<&'static str> {
    layouts()
        .into_iter()
        .find(|layout| match_layout(layout, net).is_some())
        .map(|layout| layout.name)
}

/// The label written beside a part: its value in engineering notation with the unit symbol
/// (`4.99kΩ`, `22nF`).
pub fn value_label(kind: PartKind, value: f64) -> String {
    match kind {
        PartKind::Resistor => format!("{}Ω", format_si(value, 3)),
        PartKind::Capacitor => format!("{}F", format_si(value, 3)),
        PartKind::OpAmp => String::new(),
    }
}

struct Pen {
    unit: f64,
    origin: (f64, f64),
}

impl Pen {
    fn at(&self, p: (f64, f64)) -> Coord {
        round((
            self.origin.0 + p.0 * self.unit,
            self.origin.1 + p.1 * self.unit,
        ))
    }
}

/// Renders the schematic of one stage as an SVG document of `width` × `height` pixels (reports
/// and the native page benchmark).
///
/// # Errors
/// [`PlotError`] when the SVG backend fails.
pub fn render_svg(
    net: &StageNetlist,
    width: u32,
    height: u32,
    look: &Look,
) -> Result<String, PlotError> {
    let mut svg = String::new();
    {
        let mut backend = plotters::prelude::SVGBackend::with_string(&mut svg, (width, height));
        draw(&mut backend, net, &[], look)?;
    }
    Ok(svg)
}

/// Draws the schematic of one stage onto `backend`. Parts whose reference is in `highlight` (the
/// values typed over by the user) are drawn in the target colour.
///
/// # Errors
/// [`PlotError`] when the backend fails.
pub fn draw<DB: DrawingBackend>(
    backend: &mut DB,
    net: &StageNetlist,
    highlight: &[String],
    look: &Look,
) -> Result<Drawn, PlotError> {
    backend.ensure_prepared().map_err(backend_err)?;
    let (width, height) = backend.get_size();
    let palette = look.palette();
    backend
        .draw_rect(
            (0, 0),
            (width as i32, height as i32),
            &palette.background,
            true,
        )
        .map_err(backend_err)?;
    let all = layouts();
    let found = all
        .iter()
        .find_map(|layout| match_layout(layout, net).map(|placed| (layout, placed)));
    let drawn = match found {
        Some((layout, placed)) => {
            draw_layout(backend, layout, &placed, net, highlight, look)?;
            Drawn::Layout(layout.name)
        }
        None => {
            draw_list(backend, net, look)?;
            Drawn::ConnectionList
        }
    };
    backend.present().map_err(backend_err)?;
    Ok(drawn)
}

fn draw_layout<DB: DrawingBackend>(
    backend: &mut DB,
    layout: &Layout,
    placed: &[Option<usize>],
    net: &StageNetlist,
    highlight: &[String],
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let s = look.scale_clamped();
    let (width, height) = backend.get_size();
    // Fit the layout's bounding box (plus room for labels and grounds) into the canvas.
    let mut points: Vec<(f64, f64)> = Vec::new();
    for (slot, part) in layout.slots.iter().zip(placed) {
        if part.is_some() {
            points.extend_from_slice(slot.path);
        }
    }
    for wire in &layout.wires {
        points.extend_from_slice(wire);
    }
    points.extend_from_slice(layout.grounds);
    let (min_x, max_x) = points.iter().fold((f64::MAX, f64::MIN), |(lo, hi), p| {
        (lo.min(p.0), hi.max(p.0))
    });
    let (min_y, max_y) = points.iter().fold((f64::MAX, f64::MIN), |(lo, hi), p| {
        (lo.min(p.1), hi.max(p.1))
    });
    let (pad_l, pad_r, pad_t, pad_b) = (1.2, 1.6, 1.4, 1.2);
    let span_x = max_x - min_x + pad_l + pad_r;
    let span_y = max_y - min_y + pad_t + pad_b;
    let unit = (f64::from(width) / span_x).min(f64::from(height) / span_y);
    let used_w = span_x * unit;
    let used_h = span_y * unit;
    let pen = Pen {
        unit,
        origin: (
            (f64::from(width) - used_w) / 2.0 + (pad_l - min_x) * unit,
            (f64::from(height) - used_h) / 2.0 + (pad_t - min_y) * unit,
        ),
    };
    let stroke = ((unit / 9.0).max(1.0 * s)).round().max(1.0) as u32;
    let wire = ShapeStyle::from(palette.ink).stroke_width(stroke);
    let font = (unit * 0.62 / s).clamp(7.5, 13.0);

    for path in &layout.wires {
        let coords: Vec<Coord> = path.iter().map(|&p| pen.at(p)).collect();
        backend.draw_path(coords, &wire).map_err(backend_err)?;
    }
    for (slot, part_idx) in layout.slots.iter().zip(placed) {
        let Some(part) = part_idx.and_then(|i| net.parts.get(i)) else {
            continue;
        };
        let marked = highlight.contains(&part.reference);
        let color = if marked { palette.target } else { palette.ink };
        draw_slot(backend, &pen, slot, color, stroke, look)?;
        // Label beside the body: above a horizontal body, left of a vertical one.
        let (a, b) = match (
            slot.path.get(slot.body_segment),
            slot.path.get(slot.body_segment + 1),
        ) {
            (Some(&a), Some(&b)) => (a, b),
            _ => continue,
        };
        let centre = ((a.0 + b.0) / 2.0, (a.1 + b.1) / 2.0);
        let horizontal = (a.1 - b.1).abs() < 1e-9;
        let label_color = if marked { palette.target } else { palette.ink };
        let value = value_label(part.kind, part.value);
        if horizontal {
            let at = pen.at((centre.0, centre.1 - 0.55));
            let text = format!("{} {}", part.reference, value);
            let style = text_style(
                look,
                font,
                label_color,
                Pos::new(HPos::Center, VPos::Bottom),
            );
            backend.draw_text(&text, &style, at).map_err(backend_err)?;
        } else {
            // Left of the body: the space right of a shunt part holds the op amp's wiring.
            let style = text_style(look, font, label_color, Pos::new(HPos::Right, VPos::Bottom));
            backend
                .draw_text(&part.reference, &style, pen.at((centre.0 - 0.6, centre.1)))
                .map_err(backend_err)?;
            let style = text_style(look, font, label_color, Pos::new(HPos::Right, VPos::Top));
            backend
                .draw_text(&value, &style, pen.at((centre.0 - 0.6, centre.1 + 0.05)))
                .map_err(backend_err)?;
        }
    }
    if layout.inputs != Inputs::Passive {
        draw_op_amp(backend, &pen, layout.inputs, stroke, look)?;
    }
    for &dot in layout.dots {
        backend
            .draw_circle(
                pen.at(dot),
                (unit * 0.14).round().max(2.0) as u32,
                &ShapeStyle::from(palette.ink).filled(),
                true,
            )
            .map_err(backend_err)?;
    }
    for &ground in layout.grounds {
        draw_ground(backend, &pen, ground, &wire)?;
    }
    for (at, text, anchor, offset) in [
        (layout.input_at, "in", HPos::Right, -0.35),
        (layout.output_at, "out", HPos::Left, 0.35),
    ] {
        backend
            .draw_circle(
                pen.at(at),
                (unit * 0.16).round().max(2.0) as u32,
                &wire,
                false,
            )
            .map_err(backend_err)?;
        let style = text_style(look, font, palette.muted, Pos::new(anchor, VPos::Center));
        backend
            .draw_text(text, &style, pen.at((at.0 + offset, at.1)))
            .map_err(backend_err)?;
    }
    Ok(())
}

/// Draws a slot's wire path with the part body on its body segment.
fn draw_slot<DB: DrawingBackend>(
    backend: &mut DB,
    pen: &Pen,
    slot: &Slot,
    color: RGBAColor,
    stroke: u32,
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let wire = ShapeStyle::from(palette.ink).stroke_width(stroke);
    let body = ShapeStyle::from(color).stroke_width(stroke);
    let n = slot.path.len();
    for segment in 0..n.saturating_sub(1) {
        let (a, b) = (slot.path[segment], slot.path[segment + 1]);
        if segment != slot.body_segment {
            backend
                .draw_line(pen.at(a), pen.at(b), &wire)
                .map_err(backend_err)?;
            continue;
        }
        let length = (b.0 - a.0).hypot(b.1 - a.1);
        if length < 1e-9 {
            continue;
        }
        let dir = ((b.0 - a.0) / length, (b.1 - a.1) / length);
        let normal = (-dir.1, dir.0);
        let centre = ((a.0 + b.0) / 2.0, (a.1 + b.1) / 2.0);
        let half = match slot.kind {
            PartKind::Resistor => 0.8,
            _ => 0.14,
        };
        let start = (centre.0 - dir.0 * half, centre.1 - dir.1 * half);
        let end = (centre.0 + dir.0 * half, centre.1 + dir.1 * half);
        backend
            .draw_line(pen.at(a), pen.at(start), &wire)
            .map_err(backend_err)?;
        backend
            .draw_line(pen.at(end), pen.at(b), &wire)
            .map_err(backend_err)?;
        match slot.kind {
            PartKind::Resistor => {
                // A rectangular body (IEC 60617 style).
                let w = 0.28;
                let corners = [
                    (start.0 + normal.0 * w, start.1 + normal.1 * w),
                    (end.0 + normal.0 * w, end.1 + normal.1 * w),
                    (end.0 - normal.0 * w, end.1 - normal.1 * w),
                    (start.0 - normal.0 * w, start.1 - normal.1 * w),
                    (start.0 + normal.0 * w, start.1 + normal.1 * w),
                ];
                let fill: Vec<Coord> = corners.iter().map(|&p| pen.at(p)).collect();
                backend
                    .fill_polygon(fill.clone(), &palette.background)
                    .map_err(backend_err)?;
                backend.draw_path(fill, &body).map_err(backend_err)?;
            }
            _ => {
                let plate = 0.5;
                for p in [start, end] {
                    let q0 = (p.0 + normal.0 * plate, p.1 + normal.1 * plate);
                    let q1 = (p.0 - normal.0 * plate, p.1 - normal.1 * plate);
                    let thick = ShapeStyle::from(color).stroke_width(stroke + stroke / 2 + 1);
                    backend
                        .draw_line(pen.at(q0), pen.at(q1), &thick)
                        .map_err(backend_err)?;
                }
            }
        }
    }
    Ok(())
}

fn draw_op_amp<DB: DrawingBackend>(
    backend: &mut DB,
    pen: &Pen,
    inputs: Inputs,
    stroke: u32,
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let style = ShapeStyle::from(palette.ink).stroke_width(stroke);
    let triangle = [
        (OPAMP_X, OPAMP_Y - 2.0),
        (OPAMP_X + 3.5, OPAMP_Y),
        (OPAMP_X, OPAMP_Y + 2.0),
        (OPAMP_X, OPAMP_Y - 2.0),
    ];
    let coords: Vec<Coord> = triangle.iter().map(|&p| pen.at(p)).collect();
    backend
        .fill_polygon(coords.clone(), &palette.background)
        .map_err(backend_err)?;
    backend.draw_path(coords, &style).map_err(backend_err)?;
    let (top, bottom) = if inputs == Inputs::Inverting {
        ("−", "+")
    } else {
        ("+", "−")
    };
    let font = (pen.unit * 0.8 / look.scale_clamped()).clamp(8.0, 15.0);
    for (text, y) in [(top, OPAMP_Y - 1.0), (bottom, OPAMP_Y + 1.0)] {
        let style = text_style_with(
            look,
            font,
            palette.ink,
            Pos::new(HPos::Center, VPos::Center),
            FontStyle::Bold,
        );
        backend
            .draw_text(text, &style, pen.at((OPAMP_X + 0.5, y)))
            .map_err(backend_err)?;
    }
    Ok(())
}

fn draw_ground<DB: DrawingBackend>(
    backend: &mut DB,
    pen: &Pen,
    at: (f64, f64),
    wire: &ShapeStyle,
) -> Result<(), PlotError> {
    for (i, half) in [0.55, 0.35, 0.15].iter().enumerate() {
        let y = at.1 + i as f64 * 0.22;
        backend
            .draw_line(pen.at((at.0 - half, y)), pen.at((at.0 + half, y)), wire)
            .map_err(backend_err)?;
    }
    Ok(())
}

/// The fallback drawing: one line per part with its connections.
fn draw_list<DB: DrawingBackend>(
    backend: &mut DB,
    net: &StageNetlist,
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let s = look.scale_clamped();
    let name = |node: &Node| -> String {
        match node {
            None => "ground".to_string(),
            Some(i) => net
                .node_names
                .get(*i)
                .cloned()
                .unwrap_or_else(|| format!("n{i}")),
        }
    };
    let mut y = 8.0 * s;
    let line = 15.0 * s;
    for part in &net.parts {
        let nodes: Vec<String> = part.nodes.iter().map(name).collect();
        let text = match part.kind {
            PartKind::OpAmp => format!(
                "{}  op amp  + {}  − {}  out {}",
                part.reference,
                nodes.first().cloned().unwrap_or_default(),
                nodes.get(1).cloned().unwrap_or_default(),
                nodes.get(2).cloned().unwrap_or_default()
            ),
            kind => format!(
                "{}  {}  {}",
                part.reference,
                value_label(kind, part.value),
                nodes.join(" – ")
            ),
        };
        let style = text_style(look, 11.0, palette.ink, Pos::new(HPos::Left, VPos::Top));
        backend
            .draw_text(&text, &style, round((8.0 * s, y)))
            .map_err(backend_err)?;
        y += line;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::netlist::Part;
    use crate::plot::Theme;
    use plotters::prelude::SVGBackend;

    fn part(reference: &str, kind: PartKind, value: f64, nodes: &[Node]) -> Part {
        Part {
            reference: reference.into(),
            kind,
            value,
            ideal: value,
            role: String::new(),
            nodes: nodes.to_vec(),
        }
    }

    /// A unity-gain Sallen-Key low-pass with deliberately scrambled node numbers and part order:
    /// in = 3, A = 0, + = 2, out = 1.
    fn sallen_key_low_pass() -> StageNetlist {
        StageNetlist {
            n_nodes: 4,
            input: 3,
            output: 1,
            node_names: vec!["a".into(), "o".into(), "p".into(), "i".into()],
            parts: vec![
                part("C2", C, 10e-9, &[None, Some(2)]),
                part("U1", PartKind::OpAmp, 0.0, &[Some(2), Some(1), Some(1)]),
                part("R2", R, 4.7e3, &[Some(0), Some(2)]),
                part("C1", C, 22e-9, &[Some(1), Some(0)]),
                part("R1", R, 10e3, &[Some(3), Some(0)]),
            ],
        }
    }

    #[test]
    fn a_scrambled_sallen_key_netlist_matches_its_layout() {
        let net = sallen_key_low_pass();
        assert_eq!(layout_name(&net), Some("Sallen-Key low-pass"));
    }

    #[test]
    fn swapping_r_and_c_makes_it_a_high_pass() {
        let mut net = sallen_key_low_pass();
        for p in &mut net.parts {
            p.kind = match p.kind {
                R => C,
                C => R,
                other => other,
            };
        }
        assert_eq!(layout_name(&net), Some("Sallen-Key high-pass"));
    }

    #[test]
    fn multiple_feedback_band_pass_with_and_without_the_shunt_resistor() {
        // in = 0, A = 1, − = 2, out = 3; + grounded.
        let mut net = StageNetlist {
            n_nodes: 4,
            input: 0,
            output: 3,
            node_names: vec!["in".into(), "a".into(), "m".into(), "out".into()],
            parts: vec![
                part("R1", R, 10e3, &[Some(0), Some(1)]),
                part("R2", R, 1e3, &[Some(1), None]),
                part("C1", C, 10e-9, &[Some(1), Some(3)]),
                part("C2", C, 10e-9, &[Some(1), Some(2)]),
                part("R3", R, 100e3, &[Some(2), Some(3)]),
                part("U1", PartKind::OpAmp, 0.0, &[None, Some(2), Some(3)]),
            ],
        };
        assert_eq!(layout_name(&net), Some("multiple-feedback band-pass"));
        net.parts.remove(1);
        assert_eq!(layout_name(&net), Some("multiple-feedback band-pass"));
    }

    #[test]
    fn an_unknown_shape_falls_back_to_the_connection_list() {
        let mut net = sallen_key_low_pass();
        // An extra resistor from the output to ground fits no layout.
        net.parts.push(part("R9", R, 1e3, &[Some(1), None]));
        assert_eq!(layout_name(&net), None);
        let mut svg = String::new();
        {
            let mut backend = SVGBackend::with_string(&mut svg, (320, 160));
            let look = Look {
                theme: Theme::Light,
                scale: 1.0,
                compact: false,
            };
            let drawn = draw(&mut backend, &net, &[], &look);
            assert_eq!(drawn, Ok(Drawn::ConnectionList));
        }
        assert!(svg.contains("R9  1kΩ"), "the list names every part");
    }

    #[test]
    fn the_drawing_labels_every_part_with_its_value() {
        let net = sallen_key_low_pass();
        let mut svg = String::new();
        {
            let mut backend = SVGBackend::with_string(&mut svg, (340, 170));
            let look = Look {
                theme: Theme::Dark,
                scale: 1.0,
                compact: false,
            };
            let drawn = draw(&mut backend, &net, &["R2".to_string()], &look);
            assert_eq!(drawn, Ok(Drawn::Layout("Sallen-Key low-pass")));
        }
        crate::plot::dump_for_review("schematic-sk-lp.svg", &svg);
        for label in ["R1 10kΩ", "R2 4.7kΩ", "C1 22nF", "\nC2\n", "\n10nF\n"] {
            assert!(svg.contains(label), "missing label {label:?}");
        }
    }
}

//! Drawing a matched layout (wires, part bodies, op amp, grounds, labels) onto any plotters
//! backend, and the fallback list of connections for a netlist that fits no layout.

use crate::fmath;
use plotters::prelude::{DrawingBackend, ShapeStyle};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{FontStyle, RGBAColor};

use super::chain::CHAIN_OPAMP_X;
use super::layouts::{Inputs, Layout, Slot, OPAMP_X, OPAMP_Y};
use super::value_label;
use crate::netlist::{Node, PartKind, StageNetlist};
use crate::plot::render::{backend_err, round, text_style, text_style_with, Coord};
use crate::plot::{Look, PlotError};

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

/// Draws the parts of a matched layout, its fixed wires, dots, grounds and terminals, scaled to
/// fit the backend.
pub(super) fn draw_layout<DB: DrawingBackend>(
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
    if layout.inputs == Inputs::Chain {
        for x in CHAIN_OPAMP_X {
            draw_op_amp(backend, &pen, x, layout.inputs, stroke, look)?;
        }
    } else if layout.inputs != Inputs::Passive {
        draw_op_amp(backend, &pen, OPAMP_X, layout.inputs, stroke, look)?;
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
        let length = fmath::hypot(b.0 - a.0, b.1 - a.1);
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
    x: f64,
    inputs: Inputs,
    stroke: u32,
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let style = ShapeStyle::from(palette.ink).stroke_width(stroke);
    let triangle = [
        (x, OPAMP_Y - 2.0),
        (x + 3.5, OPAMP_Y),
        (x, OPAMP_Y + 2.0),
        (x, OPAMP_Y - 2.0),
    ];
    let coords: Vec<Coord> = triangle.iter().map(|&p| pen.at(p)).collect();
    backend
        .fill_polygon(coords.clone(), &palette.background)
        .map_err(backend_err)?;
    backend.draw_path(coords, &style).map_err(backend_err)?;
    let (top, bottom) = if matches!(inputs, Inputs::Inverting | Inputs::Lifted | Inputs::Chain) {
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
            .draw_text(text, &style, pen.at((x + 0.5, y)))
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
pub(super) fn draw_list<DB: DrawingBackend>(
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

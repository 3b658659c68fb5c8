//! Drawing one layer of a figure inside its frame: lines clipped at the frame edges (Liang–Barsky),
//! bands, hatched forbidden regions, bars, marks, dashed guides.

use crate::fmath;
use plotters::prelude::{DrawingBackend, ShapeStyle};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::Color;

use super::axis::Axis;
use super::figure::{Frame, Layer, Orientation, Shape, Weight};
use super::render::{backend_err, round, text_style, Coord};
use super::{Look, PlotError};

/// Clips the segment a–b to the frame (Liang–Barsky); `None` when it lies wholly outside.
pub(super) fn clip_segment(
    frame: &Frame,
    a: (f64, f64),
    b: (f64, f64),
) -> Option<((f64, f64), (f64, f64))> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let mut t0: f64 = 0.0;
    let mut t1: f64 = 1.0;
    let checks = [
        (-dx, a.0 - frame.left),
        (dx, frame.right - a.0),
        (-dy, a.1 - frame.top),
        (dy, frame.bottom - a.1),
    ];
    for (p, q) in checks {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let r = q / p;
            if p < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
            if t0 > t1 {
                return None;
            }
        }
    }
    Some((
        (a.0 + t0 * dx, a.1 + t0 * dy),
        (a.0 + t1 * dx, a.1 + t1 * dy),
    ))
}

/// Splits a polyline in pixel space into runs that lie inside the frame, clipping at the edges.
pub(super) fn clipped_runs(frame: &Frame, pixels: &[Option<(f64, f64)>]) -> Vec<Vec<Coord>> {
    let mut runs: Vec<Vec<Coord>> = Vec::new();
    let mut current: Vec<Coord> = Vec::new();
    for pair in pixels.windows(2) {
        match (pair[0], pair[1]) {
            (Some(a), Some(b)) => match clip_segment(frame, a, b) {
                Some((ca, cb)) => {
                    let (ra, rb) = (round(ca), round(cb));
                    if current.last() != Some(&ra) {
                        if current.len() > 1 {
                            runs.push(std::mem::take(&mut current));
                        }
                        current.clear();
                        current.push(ra);
                    }
                    if current.last() != Some(&rb) {
                        current.push(rb);
                    }
                    // A segment that left the frame ends the run.
                    if cb != b {
                        if current.len() > 1 {
                            runs.push(std::mem::take(&mut current));
                        }
                        current.clear();
                    }
                }
                None => {
                    if current.len() > 1 {
                        runs.push(std::mem::take(&mut current));
                    }
                    current.clear();
                }
            },
            _ => {
                if current.len() > 1 {
                    runs.push(std::mem::take(&mut current));
                }
                current.clear();
            }
        }
    }
    if current.len() > 1 {
        runs.push(current);
    }
    runs
}

/// Draws one layer inside the frame: lines clipped at its edges, bands, hatched forbidden
/// regions, bars, marks and guides.
pub(super) fn draw_layer<DB: DrawingBackend>(
    backend: &mut DB,
    layer: &Layer,
    frame: &Frame,
    x_axis: &Axis,
    y_axis: &Axis,
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let s = look.scale_clamped();
    // A value beyond the axis maps to a pixel beyond the frame; infinite ends map to the edge.
    let clamp_x = |v: f64| -> Option<f64> {
        if v == f64::NEG_INFINITY {
            Some(frame.left)
        } else if v == f64::INFINITY {
            Some(frame.right)
        } else {
            frame
                .px(x_axis, v)
                .map(|p| p.clamp(frame.left, frame.right))
        }
    };
    let clamp_y = |v: f64| -> Option<f64> {
        if v == f64::NEG_INFINITY {
            Some(frame.bottom)
        } else if v == f64::INFINITY {
            Some(frame.top)
        } else {
            frame
                .py(y_axis, v)
                .map(|p| p.clamp(frame.top, frame.bottom))
        }
    };
    match layer {
        Layer::Line {
            ink,
            weight,
            points,
            ..
        } => {
            let color = palette.ink_color(*ink);
            let width = match weight {
                Weight::Thin => 1.2 * s,
                Weight::Bold => 2.5 * s,
                Weight::Dashed => 1.5 * s,
            };
            let style = ShapeStyle::from(color).stroke_width(width.round().max(1.0) as u32);
            // A thumbnail is about a hundred pixels wide: every third sample is plenty, and each
            // vertex is a call into the canvas.
            let stride = if look.compact && points.len() > 150 {
                3
            } else {
                1
            };
            let last = points.len().saturating_sub(1);
            let pixels: Vec<Option<(f64, f64)>> = points
                .iter()
                .enumerate()
                .filter(|(i, _)| i % stride == 0 || *i == last)
                .map(|(_, &(x, y))| Some((frame.px(x_axis, x)?, frame.py(y_axis, y)?)))
                .collect();
            for run in clipped_runs(frame, &pixels) {
                if *weight == Weight::Dashed {
                    draw_dashed(backend, &run, &style, 6.0 * s, 4.0 * s)?;
                } else {
                    backend.draw_path(run, &style).map_err(backend_err)?;
                }
            }
        }
        Layer::Band {
            ink,
            x,
            lower,
            upper,
            ..
        } => {
            let color = palette.ink_color(*ink).mix(0.22);
            // One polygon per run of finite samples: the upper edge forward, the lower back.
            let mut run: Vec<(f64, f64, f64)> = Vec::new();
            let samples = x
                .iter()
                .zip(lower.iter().zip(upper.iter()))
                .map(|(&x, (&lo, &hi))| {
                    let px = frame.px(x_axis, x)?;
                    if px < frame.left - 0.5 || px > frame.right + 0.5 {
                        return None;
                    }
                    Some((px, clamp_y(lo)?, clamp_y(hi)?))
                })
                .chain(std::iter::once(None));
            for sample in samples {
                match sample {
                    Some(point) => run.push(point),
                    None => {
                        if run.len() > 1 {
                            let polygon: Vec<Coord> = run
                                .iter()
                                .map(|&(px, _, hi)| round((px, hi)))
                                .chain(run.iter().rev().map(|&(px, lo, _)| round((px, lo))))
                                .collect();
                            backend.fill_polygon(polygon, &color).map_err(backend_err)?;
                        }
                        run.clear();
                    }
                }
            }
        }
        Layer::Region { x0, x1, y0, y1, .. } => {
            let corners = (clamp_x(*x0), clamp_x(*x1), clamp_y(*y0), clamp_y(*y1));
            if let (Some(a), Some(b), Some(c), Some(d)) = corners {
                let (left, right) = (a.min(b), a.max(b));
                let (top, bottom) = (c.min(d), c.max(d));
                if right - left >= 1.0 && bottom - top >= 1.0 {
                    backend
                        .draw_rect(
                            round((left, top)),
                            round((right, bottom)),
                            &palette.forbidden_fill,
                            true,
                        )
                        .map_err(backend_err)?;
                    draw_hatch(backend, (left, top, right, bottom), look)?;
                    backend
                        .draw_rect(
                            round((left, top)),
                            round((right, bottom)),
                            &ShapeStyle::from(palette.forbidden_edge).stroke_width(1),
                            false,
                        )
                        .map_err(backend_err)?;
                }
            }
        }
        Layer::Bars {
            ink, edges, counts, ..
        } => {
            let fill = palette.ink_color(*ink).mix(0.55);
            let edge = ShapeStyle::from(palette.ink_color(*ink)).stroke_width(1);
            for (pair, &count) in edges.windows(2).zip(counts.iter()) {
                let (Some(a), Some(b)) = (clamp_x(pair[0]), clamp_x(pair[1])) else {
                    continue;
                };
                let (Some(top), Some(base)) = (clamp_y(count), clamp_y(y_axis.min)) else {
                    continue;
                };
                if count <= 0.0 {
                    continue;
                }
                // A bin narrower than a pixel still shows as a 2 px bar around its centre.
                let (a, b) = if b - a < 3.0 {
                    let centre = (a + b) / 2.0;
                    (centre - 1.5, centre + 1.5)
                } else {
                    (a, b)
                };
                let ul = round((a + 0.5, top));
                let br = round((b - 0.5, base));
                backend
                    .draw_rect(ul, br, &fill, true)
                    .map_err(backend_err)?;
                backend
                    .draw_rect(ul, br, &edge, false)
                    .map_err(backend_err)?;
            }
        }
        Layer::Marks {
            ink, shape, points, ..
        } => {
            let color = palette.ink_color(*ink);
            let r = 4.5 * s;
            let style = ShapeStyle::from(color).stroke_width((1.8 * s).round().max(1.0) as u32);
            for &(x, y) in points {
                let (Some(px), Some(py)) = (frame.px(x_axis, x), frame.py(y_axis, y)) else {
                    continue;
                };
                if !frame.contains(px, py) {
                    continue;
                }
                match shape {
                    Shape::Cross => {
                        backend
                            .draw_line(round((px - r, py - r)), round((px + r, py + r)), &style)
                            .map_err(backend_err)?;
                        backend
                            .draw_line(round((px - r, py + r)), round((px + r, py - r)), &style)
                            .map_err(backend_err)?;
                    }
                    Shape::Ring => backend
                        .draw_circle(round((px, py)), r.round() as u32, &style, false)
                        .map_err(backend_err)?,
                    Shape::Dot => backend
                        .draw_circle(
                            round((px, py)),
                            (r * 0.7).round() as u32,
                            &ShapeStyle::from(color).filled(),
                            true,
                        )
                        .map_err(backend_err)?,
                }
            }
        }
        Layer::Guide {
            label,
            ink,
            orientation,
            at,
        } => {
            let color = palette.ink_color(*ink);
            let style = ShapeStyle::from(color).stroke_width(1);
            let (a, b, text_at, anchor) = match orientation {
                Orientation::Vertical => {
                    let Some(x) = frame.px(x_axis, *at) else {
                        return Ok(());
                    };
                    if x < frame.left || x > frame.right {
                        return Ok(());
                    }
                    (
                        (x, frame.top),
                        (x, frame.bottom),
                        (x + 3.0 * s, frame.top + 3.0 * s),
                        Pos::new(HPos::Left, VPos::Top),
                    )
                }
                Orientation::Horizontal => {
                    let Some(y) = frame.py(y_axis, *at) else {
                        return Ok(());
                    };
                    if y < frame.top || y > frame.bottom {
                        return Ok(());
                    }
                    (
                        (frame.left, y),
                        (frame.right, y),
                        (frame.right - 3.0 * s, y - 2.0 * s),
                        Pos::new(HPos::Right, VPos::Bottom),
                    )
                }
            };
            draw_dashed(backend, &[round(a), round(b)], &style, 4.0 * s, 3.0 * s)?;
            if !label.is_empty() && !look.compact {
                let text = text_style(look, 10.0, color, anchor);
                backend
                    .draw_text(label, &text, round(text_at))
                    .map_err(backend_err)?;
            }
        }
    }
    Ok(())
}

/// Diagonal hatching inside a forbidden region, so the mask reads without colour too.
fn draw_hatch<DB: DrawingBackend>(
    backend: &mut DB,
    rect: (f64, f64, f64, f64),
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let s = look.scale_clamped();
    let (left, top, right, bottom) = rect;
    let spacing = 9.0 * s;
    let style = ShapeStyle::from(palette.forbidden_hatch).stroke_width(1);
    let clip = Frame {
        left,
        top,
        right,
        bottom,
    };
    let height = bottom - top;
    // Lines of slope +1 (pixel space) starting every `spacing` along the bottom edge extended left.
    let mut start = left - height;
    while start < right {
        let a = (start, bottom);
        let b = (start + height, top);
        if let Some((ca, cb)) = clip_segment(&clip, a, b) {
            backend
                .draw_line(round(ca), round(cb), &style)
                .map_err(backend_err)?;
        }
        start += spacing;
    }
    Ok(())
}

/// Draws a dashed polyline: `on` pixels drawn, `off` pixels skipped, along the path's length.
fn draw_dashed<DB: DrawingBackend>(
    backend: &mut DB,
    path: &[Coord],
    style: &ShapeStyle,
    on: f64,
    off: f64,
) -> Result<(), PlotError> {
    let period = (on + off).max(1.0);
    let mut phase = 0.0_f64;
    for pair in path.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let (ax, ay) = (f64::from(a.0), f64::from(a.1));
        let (dx, dy) = (f64::from(b.0) - ax, f64::from(b.1) - ay);
        let length = fmath::hypot(dx, dy);
        if length < 0.5 {
            continue;
        }
        let mut t = 0.0;
        while t < length {
            let in_period = phase % period;
            let (drawing, remaining) = if in_period < on {
                (true, on - in_period)
            } else {
                (false, period - in_period)
            };
            let step = remaining.min(length - t);
            if drawing {
                let p = (ax + dx * t / length, ay + dy * t / length);
                let q = (ax + dx * (t + step) / length, ay + dy * (t + step) / length);
                backend
                    .draw_line(round(p), round(q), style)
                    .map_err(backend_err)?;
            }
            t += step;
            phase += step;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clipping_cuts_a_segment_at_the_frame_edge() {
        let frame = Frame {
            left: 0.0,
            top: 0.0,
            right: 100.0,
            bottom: 100.0,
        };
        let clipped = clip_segment(&frame, (50.0, 50.0), (150.0, 50.0));
        assert_eq!(clipped, Some(((50.0, 50.0), (100.0, 50.0))));
        assert_eq!(clip_segment(&frame, (150.0, 0.0), (200.0, 50.0)), None);
    }
}

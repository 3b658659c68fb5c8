//! A figure: axes plus layers (lines, bands, forbidden regions, bars, marks, guides), drawn onto any
//! plotters [`DrawingBackend`] with our own layout, and read back at a pointer position for the
//! crosshair readout.
//!
//! The drawing uses only the backend's primitive calls (lines, paths, rectangles, polygons, circles
//! and anchored text). Nothing here measures text, so the same code needs no font files natively
//! and no DOM layout in the browser; label widths are estimated from the character count where the
//! legend needs them.

use plotters::prelude::{DrawingBackend, RGBAColor, ShapeStyle};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{Color, FontFamily, FontStyle, FontTransform, IntoFont, TextStyle};
use serde::Serialize;

use super::axis::Axis;
use super::{Ink, Look, PlotError};

/// Stroke weight of a line layer.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Weight {
    /// A reference curve (the ideal response): 1 px.
    Thin,
    /// The curve that matters (the board as built): 2.5 px.
    Bold,
    /// A dashed 1.5 px line for secondary curves.
    Dashed,
}

/// The shape of a point mark.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Shape {
    /// × (a pole, by the usual convention of pole-zero maps).
    Cross,
    /// ○ (a zero).
    Ring,
    /// A filled dot.
    Dot,
}

/// Direction of a guide line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Orientation {
    /// A line at constant x.
    Vertical,
    /// A line at constant y.
    Horizontal,
}

/// One drawable layer. Coordinates are in data units of the figure's axes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum Layer {
    /// A polyline through `points`; non-finite points break the line.
    Line {
        /// Legend and readout label.
        label: String,
        /// Colour role.
        ink: Ink,
        /// Stroke weight.
        weight: Weight,
        /// `(x, y)` samples in ascending x for the readout's interpolation.
        points: Vec<(f64, f64)>,
    },
    /// A filled band between `lower` and `upper`, sampled at the same `x` (a tolerance envelope).
    Band {
        /// Legend label.
        label: String,
        /// Colour role (drawn translucent).
        ink: Ink,
        /// Sample positions, ascending.
        x: Vec<f64>,
        /// Lower edge at each `x`.
        lower: Vec<f64>,
        /// Upper edge at each `x`.
        upper: Vec<f64>,
    },
    /// A shaded rectangle the response must stay out of (a limit of the specification). Infinite
    /// ends extend to the plot edge.
    Region {
        /// Legend label.
        label: String,
        /// Left edge, data units (−∞ allowed).
        x0: f64,
        /// Right edge, data units (+∞ allowed).
        x1: f64,
        /// Bottom edge, data units (−∞ allowed).
        y0: f64,
        /// Top edge, data units (+∞ allowed).
        y1: f64,
    },
    /// Histogram bars: `counts[i]` between `edges[i]` and `edges[i + 1]`.
    Bars {
        /// Legend and readout label.
        label: String,
        /// Colour role.
        ink: Ink,
        /// Bin edges, ascending, one more than `counts`.
        edges: Vec<f64>,
        /// Height of each bar, data units of the y axis.
        counts: Vec<f64>,
    },
    /// Point marks (poles, zeros).
    Marks {
        /// Legend and readout label.
        label: String,
        /// Colour role.
        ink: Ink,
        /// Mark shape.
        shape: Shape,
        /// Mark positions.
        points: Vec<(f64, f64)>,
    },
    /// A straight guide line with a short label at its end (a cutoff, a limit, a mean).
    Guide {
        /// Text written beside the line.
        label: String,
        /// Colour role.
        ink: Ink,
        /// Vertical (constant x) or horizontal (constant y).
        orientation: Orientation,
        /// The constant coordinate, data units.
        at: f64,
    },
}

impl Layer {
    fn legend(&self) -> Option<(&str, Ink, LegendGlyph)> {
        let (label, ink, glyph) = match self {
            Layer::Line {
                label, ink, weight, ..
            } => (label, *ink, LegendGlyph::Line(*weight)),
            Layer::Band { label, ink, .. } => (label, *ink, LegendGlyph::Patch),
            Layer::Region { label, .. } => (label, Ink::Forbidden, LegendGlyph::Patch),
            Layer::Bars { label, ink, .. } => (label, *ink, LegendGlyph::Patch),
            Layer::Marks {
                label, ink, shape, ..
            } => (label, *ink, LegendGlyph::Mark(*shape)),
            Layer::Guide { .. } => return None,
        };
        (!label.is_empty()).then_some((label.as_str(), ink, glyph))
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum LegendGlyph {
    Line(Weight),
    Patch,
    Mark(Shape),
}

/// A complete figure: what the page draws onto one canvas.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Figure {
    /// Title in the top-left corner.
    pub title: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// Layers, drawn in this order after the grid.
    pub layers: Vec<Layer>,
    /// A line of text shown in the middle of the plot when there is nothing to draw (for example
    /// "no limits set"); `None` otherwise.
    pub empty_note: Option<String>,
}

/// The plot rectangle inside the canvas, in backend pixels.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Frame {
    /// Left edge of the plot area.
    pub left: f64,
    /// Top edge of the plot area.
    pub top: f64,
    /// Right edge of the plot area.
    pub right: f64,
    /// Bottom edge of the plot area.
    pub bottom: f64,
}

impl Frame {
    /// The plot area for a canvas of `width` × `height` backend pixels drawn with `look`: fixed
    /// margins (in CSS pixels, times the look's scale) for the tick labels, the axis titles and the
    /// figure title; a compact look (thumbnails) keeps only room for tick labels.
    pub fn new(width: u32, height: u32, look: &Look) -> Frame {
        let s = look.scale_clamped();
        let (w, h) = (f64::from(width), f64::from(height));
        let (l, r, t, b) = if look.compact {
            (26.0, 4.0, 5.0, 13.0)
        } else {
            (50.0, 12.0, 24.0, 32.0)
        };
        let left = (l * s).min(w * 0.4);
        let right = (w - r * s).max(left + 1.0);
        let top = (t * s).min(h * 0.3);
        let bottom = (h - b * s).max(top + 1.0);
        Frame {
            left,
            top,
            right,
            bottom,
        }
    }

    fn px(&self, axis: &Axis, value: f64) -> Option<f64> {
        axis.fraction(value)
            .map(|t| self.left + t * (self.right - self.left))
    }

    fn py(&self, axis: &Axis, value: f64) -> Option<f64> {
        axis.fraction(value)
            .map(|t| self.bottom - t * (self.bottom - self.top))
    }

    /// Pixel x to data x (unclipped).
    fn x_value(&self, axis: &Axis, px: f64) -> f64 {
        axis.value_at((px - self.left) / (self.right - self.left))
    }

    /// Pixel y to data y (unclipped).
    fn y_value(&self, axis: &Axis, py: f64) -> f64 {
        axis.value_at((self.bottom - py) / (self.bottom - self.top))
    }

    fn contains(&self, x: f64, y: f64) -> bool {
        x >= self.left - 0.5
            && x <= self.right + 0.5
            && y >= self.top - 0.5
            && y <= self.bottom + 0.5
    }
}

/// What the crosshair shows at a pointer position.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Readout {
    /// The x axis value under the pointer, formatted with its unit.
    pub x: String,
    /// The y axis value under the pointer, formatted with its unit.
    pub y: String,
    /// One entry per line, bar or nearby mark layer.
    pub entries: Vec<ReadoutEntry>,
}

/// One line of the readout.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReadoutEntry {
    /// The layer's label.
    pub label: String,
    /// The value, formatted with its unit.
    pub value: String,
}

/// Reads the figure at backend pixel `(px, py)` of a `width` × `height` canvas: the axis values
/// under the pointer and each line's value interpolated at that x (linear in the axis scales).
/// `None` when the pointer is outside the plot area.
pub fn readout(
    figure: &Figure,
    width: u32,
    height: u32,
    look: &Look,
    px: f64,
    py: f64,
) -> Option<Readout> {
    let scale = look.scale_clamped();
    let frame = Frame::new(width, height, look);
    if !frame.contains(px, py) {
        return None;
    }
    let x_axis = figure.x.sanitized();
    let y_axis = figure.y.sanitized();
    let x = frame.x_value(&x_axis, px);
    let y = frame.y_value(&y_axis, py);
    let mut entries = Vec::new();
    for layer in &figure.layers {
        match layer {
            Layer::Line { label, points, .. } if !label.is_empty() => {
                if let Some(value) = interpolate(&x_axis, points, x) {
                    entries.push(ReadoutEntry {
                        label: label.clone(),
                        value: y_axis.readout(value),
                    });
                }
            }
            Layer::Band {
                label,
                x: xs,
                lower,
                upper,
                ..
            } if !label.is_empty() => {
                let lo: Vec<(f64, f64)> = xs.iter().copied().zip(lower.iter().copied()).collect();
                let hi: Vec<(f64, f64)> = xs.iter().copied().zip(upper.iter().copied()).collect();
                if let (Some(a), Some(b)) =
                    (interpolate(&x_axis, &lo, x), interpolate(&x_axis, &hi, x))
                {
                    entries.push(ReadoutEntry {
                        label: label.clone(),
                        value: format!("{} … {}", y_axis.readout(a), y_axis.readout(b)),
                    });
                }
            }
            Layer::Bars {
                label,
                edges,
                counts,
                ..
            } => {
                let bin = edges.windows(2).position(|w| x >= w[0] && x < w[1]);
                if let (Some(index), Some(w)) = (bin, bin.and_then(|i| edges.get(i..i + 2))) {
                    let count = counts.get(index).copied().unwrap_or(0.0);
                    entries.push(ReadoutEntry {
                        label: format!(
                            "{label} {} … {}",
                            x_axis.readout(w[0]),
                            x_axis.readout(w[1])
                        ),
                        value: y_axis.readout(count),
                    });
                }
            }
            Layer::Marks { label, points, .. } => {
                let near = 10.0 * scale.clamp(0.5, 4.0);
                let nearest = points
                    .iter()
                    .filter_map(|&(mx, my)| {
                        let (qx, qy) = (frame.px(&x_axis, mx)?, frame.py(&y_axis, my)?);
                        let d = (qx - px).hypot(qy - py);
                        (d <= near).then_some((d, mx, my))
                    })
                    .min_by(|a, b| a.0.total_cmp(&b.0));
                if let Some((_, mx, my)) = nearest {
                    entries.push(ReadoutEntry {
                        label: label.clone(),
                        value: format!("{}, {}", x_axis.readout(mx), y_axis.readout(my)),
                    });
                }
            }
            _ => {}
        }
    }
    Some(Readout {
        x: x_axis.readout(x),
        y: y_axis.readout(y),
        entries,
    })
}

/// Linear interpolation of y at `x` between the samples around it, with x measured in the axis
/// scale (log10 for a log axis) so that straight segments on the plot read straight. `None`
/// outside the sampled range or across a gap (non-finite sample).
fn interpolate(axis: &Axis, points: &[(f64, f64)], x: f64) -> Option<f64> {
    let t = axis.fraction(x)?;
    for pair in points.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let (ta, tb) = (axis.fraction(a.0)?, axis.fraction(b.0)?);
        if t >= ta.min(tb) && t <= ta.max(tb) {
            if !(a.1.is_finite() && b.1.is_finite()) {
                return None;
            }
            if (tb - ta).abs() < 1e-15 {
                return Some(a.1);
            }
            let u = (t - ta) / (tb - ta);
            return Some(a.1 + u * (b.1 - a.1));
        }
    }
    None
}

pub(crate) type Coord = (i32, i32);

pub(crate) fn round(p: (f64, f64)) -> Coord {
    (p.0.round() as i32, p.1.round() as i32)
}

/// Clips the segment a–b to the frame (Liang–Barsky); `None` when it lies wholly outside.
fn clip_segment(frame: &Frame, a: (f64, f64), b: (f64, f64)) -> Option<((f64, f64), (f64, f64))> {
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
fn clipped_runs(frame: &Frame, pixels: &[Option<(f64, f64)>]) -> Vec<Vec<Coord>> {
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

/// Backend errors differ by backend; the page only needs their message.
pub(crate) fn backend_err<E: std::fmt::Display>(error: E) -> PlotError {
    PlotError(error.to_string())
}

pub(crate) fn text_style(
    look: &Look,
    size_css: f64,
    color: RGBAColor,
    anchor: Pos,
) -> TextStyle<'static> {
    text_style_with(look, size_css, color, anchor, FontStyle::Normal)
}

pub(crate) fn text_style_with(
    look: &Look,
    size_css: f64,
    color: RGBAColor,
    anchor: Pos,
    font_style: FontStyle,
) -> TextStyle<'static> {
    let font = (FontFamily::SansSerif, size_css * look.scale_clamped())
        .into_font()
        .style(font_style);
    TextStyle {
        font,
        color: color.to_backend_color(),
        pos: anchor,
    }
}

/// Draws `figure` onto `backend`, filling the whole backend area.
///
/// # Errors
/// [`PlotError`] when the backend fails (for example a canvas that went away).
pub fn draw<DB: DrawingBackend>(
    backend: &mut DB,
    figure: &Figure,
    look: &Look,
) -> Result<(), PlotError> {
    backend.ensure_prepared().map_err(backend_err)?;
    let (width, height) = backend.get_size();
    let palette = look.palette();
    let s = look.scale_clamped();
    let frame = Frame::new(width, height, look);
    let x_axis = figure.x.sanitized();
    let y_axis = figure.y.sanitized();

    // Background over the whole canvas, plot area slightly set off.
    backend
        .draw_rect(
            (0, 0),
            (width as i32, height as i32),
            &palette.background,
            true,
        )
        .map_err(backend_err)?;
    let area = (
        round((frame.left, frame.top)),
        round((frame.right, frame.bottom)),
    );
    backend
        .draw_rect(area.0, area.1, &palette.plot_area, true)
        .map_err(backend_err)?;

    // Grid and tick labels.
    let tick_font = if look.compact { 8.5 } else { 10.5 };
    let grid_minor = ShapeStyle::from(palette.grid_minor).stroke_width(1);
    let grid_major = ShapeStyle::from(palette.grid_major).stroke_width(1);
    let (x_target, y_target) = if look.compact { (3, 3) } else { (8, 6) };
    for tick in x_axis.ticks_about(x_target) {
        let Some(x) = frame.px(&x_axis, tick.value) else {
            continue;
        };
        let style = if tick.label.is_some() {
            grid_major
        } else {
            grid_minor
        };
        backend
            .draw_line(round((x, frame.top)), round((x, frame.bottom)), &style)
            .map_err(backend_err)?;
        if let Some(label) = tick.label {
            let style = text_style(
                look,
                tick_font,
                palette.muted,
                Pos::new(HPos::Center, VPos::Top),
            );
            backend
                .draw_text(&label, &style, round((x, frame.bottom + 2.0 * s)))
                .map_err(backend_err)?;
        }
    }
    for tick in y_axis.ticks_about(y_target) {
        let Some(y) = frame.py(&y_axis, tick.value) else {
            continue;
        };
        let style = if tick.label.is_some() {
            grid_major
        } else {
            grid_minor
        };
        backend
            .draw_line(round((frame.left, y)), round((frame.right, y)), &style)
            .map_err(backend_err)?;
        if let Some(label) = tick.label {
            let style = text_style(
                look,
                tick_font,
                palette.muted,
                Pos::new(HPos::Right, VPos::Center),
            );
            backend
                .draw_text(&label, &style, round((frame.left - 5.0 * s, y)))
                .map_err(backend_err)?;
        }
    }

    for layer in &figure.layers {
        draw_layer(backend, layer, &frame, &x_axis, &y_axis, look)?;
    }

    // Frame border on top of the data.
    backend
        .draw_rect(
            area.0,
            area.1,
            &ShapeStyle::from(palette.axis).stroke_width(1),
            false,
        )
        .map_err(backend_err)?;

    if look.compact {
        backend.present().map_err(backend_err)?;
        return Ok(());
    }

    // Axis titles: x below the tick labels at the right end; y rotated along the left edge.
    let x_title = axis_title(&x_axis);
    let style = text_style(
        look,
        11.0,
        palette.muted,
        Pos::new(HPos::Right, VPos::Bottom),
    );
    backend
        .draw_text(
            &x_title,
            &style,
            round((frame.right, f64::from(height) - 2.0 * s)),
        )
        .map_err(backend_err)?;
    let y_title = axis_title(&y_axis);
    let style = text_style(look, 11.0, palette.muted, Pos::new(HPos::Center, VPos::Top))
        .transform(FontTransform::Rotate270);
    backend
        .draw_text(
            &y_title,
            &style,
            round((3.0 * s, (frame.top + frame.bottom) / 2.0)),
        )
        .map_err(backend_err)?;

    // Title and legend in the top margin.
    let style = text_style_with(
        look,
        12.5,
        palette.ink,
        Pos::new(HPos::Left, VPos::Center),
        FontStyle::Bold,
    );
    backend
        .draw_text(&figure.title, &style, round((frame.left, frame.top / 2.0)))
        .map_err(backend_err)?;
    draw_legend(backend, figure, &frame, look)?;

    if let Some(note) = &figure.empty_note {
        let style = text_style(
            look,
            12.0,
            palette.muted,
            Pos::new(HPos::Center, VPos::Center),
        );
        backend
            .draw_text(
                note,
                &style,
                round((
                    (frame.left + frame.right) / 2.0,
                    (frame.top + frame.bottom) / 2.0,
                )),
            )
            .map_err(backend_err)?;
    }
    backend.present().map_err(backend_err)?;
    Ok(())
}

fn axis_title(axis: &Axis) -> String {
    if axis.unit.is_empty() {
        axis.label.clone()
    } else {
        format!("{} ({})", axis.label, axis.unit)
    }
}

fn draw_layer<DB: DrawingBackend>(
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
        let length = dx.hypot(dy);
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

fn draw_legend<DB: DrawingBackend>(
    backend: &mut DB,
    figure: &Figure,
    frame: &Frame,
    look: &Look,
) -> Result<(), PlotError> {
    let palette = look.palette();
    let s = look.scale_clamped();
    let mut seen: Vec<&str> = Vec::new();
    let mut entries = Vec::new();
    for layer in &figure.layers {
        if let Some((label, ink, glyph)) = layer.legend() {
            if !seen.contains(&label) {
                seen.push(label);
                entries.push((label, ink, glyph));
            }
        }
    }
    // Right to left from the frame's right edge; widths estimated at 0.56 em per character.
    let font = 10.5;
    let em = font * s;
    let y = frame.top / 2.0;
    let mut x = frame.right;
    let title_end = frame.left + figure.title.chars().count() as f64 * 0.62 * 12.5 * s + 12.0 * s;
    for (label, ink, glyph) in entries.into_iter().rev() {
        let text_width = label.chars().count() as f64 * 0.56 * em;
        let glyph_width = 16.0 * s;
        let start = x - text_width - glyph_width - 4.0 * s;
        if start < title_end {
            break;
        }
        let color = palette.ink_color(ink);
        let gx = start;
        match glyph {
            LegendGlyph::Line(weight) => {
                let width = match weight {
                    Weight::Thin => 1.2 * s,
                    Weight::Bold => 2.5 * s,
                    Weight::Dashed => 1.5 * s,
                };
                let style = ShapeStyle::from(color).stroke_width(width.round().max(1.0) as u32);
                backend
                    .draw_line(
                        round((gx, y)),
                        round((gx + glyph_width - 3.0 * s, y)),
                        &style,
                    )
                    .map_err(backend_err)?;
            }
            LegendGlyph::Patch => {
                let fill = if ink == Ink::Forbidden {
                    palette.forbidden_fill
                } else {
                    color.mix(0.35)
                };
                let edge = if ink == Ink::Forbidden {
                    palette.forbidden_edge
                } else {
                    color
                };
                let ul = round((gx, y - 4.0 * s));
                let br = round((gx + glyph_width - 4.0 * s, y + 4.0 * s));
                backend
                    .draw_rect(ul, br, &fill, true)
                    .map_err(backend_err)?;
                backend
                    .draw_rect(ul, br, &ShapeStyle::from(edge).stroke_width(1), false)
                    .map_err(backend_err)?;
            }
            LegendGlyph::Mark(shape) => {
                let r = 3.5 * s;
                let c = (gx + 6.0 * s, y);
                let style = ShapeStyle::from(color).stroke_width((1.6 * s).round().max(1.0) as u32);
                match shape {
                    Shape::Cross => {
                        backend
                            .draw_line(round((c.0 - r, c.1 - r)), round((c.0 + r, c.1 + r)), &style)
                            .map_err(backend_err)?;
                        backend
                            .draw_line(round((c.0 - r, c.1 + r)), round((c.0 + r, c.1 - r)), &style)
                            .map_err(backend_err)?;
                    }
                    Shape::Ring | Shape::Dot => backend
                        .draw_circle(round(c), r.round() as u32, &style, shape == Shape::Dot)
                        .map_err(backend_err)?,
                }
            }
        }
        let style = text_style(
            look,
            font,
            palette.muted,
            Pos::new(HPos::Left, VPos::Center),
        );
        backend
            .draw_text(label, &style, round((gx + glyph_width, y)))
            .map_err(backend_err)?;
        x = start - 10.0 * s;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::{Theme, TickFormat};
    use plotters::prelude::SVGBackend;

    const LOOK: Look = Look {
        theme: Theme::Light,
        scale: 1.0,
        compact: false,
    };

    fn sample_figure() -> Figure {
        let points: Vec<(f64, f64)> = (0..=40)
            .map(|i| {
                let f = 10f64.powf(1.0 + i as f64 / 10.0);
                // First-order low-pass at 1 kHz: |H| = 1/√(1 + (f/fc)²) (circuit theory).
                (f, -10.0 * (1.0 + (f / 1e3).powi(2)).log10())
            })
            .collect();
        Figure {
            title: "gain".into(),
            x: Axis::log("frequency", "Hz", 10.0, 100e3),
            y: Axis::linear("gain", "dB", -40.0, 5.0, TickFormat::Plain),
            layers: vec![
                Layer::Region {
                    label: "limits".into(),
                    x0: 1e4,
                    x1: f64::INFINITY,
                    y0: -20.0,
                    y1: f64::INFINITY,
                },
                Layer::Line {
                    label: "built".into(),
                    ink: Ink::Built,
                    weight: Weight::Bold,
                    points,
                },
            ],
            empty_note: None,
        }
    }

    #[test]
    fn readout_interpolates_the_line_under_the_pointer() {
        let figure = sample_figure();
        let (w, h) = (600u32, 300u32);
        let frame = Frame::new(w, h, &LOOK);
        // The pointer at the 1 kHz column, which is exactly half-way along the log axis.
        let px = (frame.left + frame.right) / 2.0;
        let read = readout(&figure, w, h, &LOOK, px, frame.top + 10.0);
        let read = read.unwrap_or_else(|| panic!("pointer inside the frame gave no readout"));
        assert_eq!(read.x, "1 kHz");
        let built = read.entries.iter().find(|e| e.label == "built");
        // A first-order low-pass is 3.01 dB down at its corner (10·log10 2, circuit theory).
        assert_eq!(built.map(|e| e.value.as_str()), Some("−3.010 dB"));
        assert_eq!(
            readout(&figure, w, h, &LOOK, 1.0, 1.0),
            None,
            "margin is outside"
        );
    }

    #[test]
    fn svg_rendering_places_the_mask_and_keeps_lines_inside_the_frame() {
        let figure = sample_figure();
        let mut svg = String::new();
        {
            let mut backend = SVGBackend::with_string(&mut svg, (600, 300));
            let result = draw(&mut backend, &figure, &LOOK);
            assert!(result.is_ok(), "{result:?}");
        }
        crate::plot::dump_for_review("figure-gain.svg", &svg);
        assert!(svg.contains("\ngain\n</text>"), "title missing");
        assert!(svg.contains("\n1k\n</text>"), "decade label missing");
        // Every polyline vertex lies inside the frame (the line is clipped, not drawn in margins).
        let frame = Frame::new(600, 300, &LOOK);
        let mut n_vertices = 0;
        for chunk in svg.split("points=\"").skip(1) {
            let list = chunk.split('"').next().unwrap_or("");
            for pair in list.split_whitespace() {
                let mut it = pair
                    .split(',')
                    .map(|v| v.parse::<f64>().unwrap_or(f64::NAN));
                let (x, y) = (it.next().unwrap_or(f64::NAN), it.next().unwrap_or(f64::NAN));
                n_vertices += 1;
                assert!(frame.contains(x, y), "vertex {x},{y} outside {frame:?}");
            }
        }
        assert!(
            n_vertices > 20,
            "the built line was not drawn ({n_vertices} vertices)"
        );
    }

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

//! Drawing a figure onto any plotters [`DrawingBackend`] with our own layout: frame, grid, tick
//! labels, axis titles, the layers (drawn by the private `layers` module) and the legend.
//!
//! The drawing uses only the backend's primitive calls (lines, paths, rectangles, polygons, circles
//! and anchored text). Nothing here measures text, so the same code needs no font files natively
//! and no DOM layout in the browser; label widths are estimated from the character count where the
//! legend needs them.

use plotters::prelude::{DrawingBackend, RGBAColor, ShapeStyle};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{Color, FontFamily, FontStyle, FontTransform, IntoFont, TextStyle};

use super::axis::Axis;
use super::figure::{Figure, Frame, LegendGlyph, Shape, Weight};
use super::layers::draw_layer;
use super::{Ink, Look, PlotError};

/// A backend pixel position.
pub(crate) type Coord = (i32, i32);

/// Rounds a position in pixels to the nearest backend pixel.
pub(crate) fn round(p: (f64, f64)) -> Coord {
    (p.0.round() as i32, p.1.round() as i32)
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
    use crate::plot::figure::fixture::{sample_figure, LOOK};
    use plotters::prelude::SVGBackend;

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
}

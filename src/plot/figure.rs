//! A figure as data: axes plus layers (lines, bands, forbidden regions, bars, marks, guides), and
//! the plot rectangle ([`Frame`]) that maps axis values to backend pixels.
//!
//! A figure is backend-free: [`super::render`] draws it onto any plotters backend (its layers in
//! the private `layers` module) and [`super::crosshair`] reads it back under a pointer.

use serde::Serialize;

use super::axis::Axis;
use super::{Ink, Look};

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
    pub(super) fn legend(&self) -> Option<(&str, Ink, LegendGlyph)> {
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
pub(super) enum LegendGlyph {
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

    pub(super) fn px(&self, axis: &Axis, value: f64) -> Option<f64> {
        axis.fraction(value)
            .map(|t| self.left + t * (self.right - self.left))
    }

    pub(super) fn py(&self, axis: &Axis, value: f64) -> Option<f64> {
        axis.fraction(value)
            .map(|t| self.bottom - t * (self.bottom - self.top))
    }

    /// Pixel x to data x (unclipped).
    pub(super) fn x_value(&self, axis: &Axis, px: f64) -> f64 {
        axis.value_at((px - self.left) / (self.right - self.left))
    }

    /// Pixel y to data y (unclipped).
    pub(super) fn y_value(&self, axis: &Axis, py: f64) -> f64 {
        axis.value_at((self.bottom - py) / (self.bottom - self.top))
    }

    pub(super) fn contains(&self, x: f64, y: f64) -> bool {
        x >= self.left - 0.5
            && x <= self.right + 0.5
            && y >= self.top - 0.5
            && y <= self.bottom + 0.5
    }
}

/// A sample figure shared by the drawing and readout tests: a first-order low-pass line under a
/// forbidden region.
#[cfg(test)]
pub(crate) mod fixture {
    use super::*;
    use crate::fmath;
    use crate::plot::{Theme, TickFormat};

    /// The look the figure tests draw with.
    pub(crate) const LOOK: Look = Look {
        theme: Theme::Light,
        scale: 1.0,
        compact: false,
    };

    pub(crate) fn sample_figure() -> Figure {
        let points: Vec<(f64, f64)> = (0..=40)
            .map(|i| {
                let f = fmath::powf(10f64, 1.0 + i as f64 / 10.0);
                // First-order low-pass at 1 kHz: |H| = 1/√(1 + (f/fc)²) (circuit theory).
                (f, -10.0 * fmath::log10(1.0 + fmath::powi(f / 1e3, 2)))
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
}

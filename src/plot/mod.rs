//! Plots drawn by Rust, generic over the plotters backend (canvas in the browser, SVG natively).
//!
//! [`figure::Figure`] is a backend-free description of one plot (axes and layers);
//! [`render::draw`] renders it onto any [`plotters::prelude::DrawingBackend`] using only primitive
//! calls (each layer drawn by the private `layers` module), and [`crosshair::readout`] reads it
//! back under a pointer for the crosshair. [`figures`] builds each family of plots from the
//! analysis data; [`axis`] holds scales, ticks and readout numbers. The look (colours for light and
//! dark pages, line weights) lives here, so the page and the SVG files look alike.

pub mod axis;
pub mod crosshair;
pub mod figure;
pub mod figures;
mod layers;
pub mod render;

pub use axis::{Axis, Scale, TickFormat};
pub use crosshair::{readout, Readout, ReadoutEntry};
pub use figure::{Figure, Frame, Layer, Orientation, Shape, Weight};
pub use figures::{PlotData, PlotKind};
pub use render::draw;

use plotters::prelude::RGBAColor;
use serde::Serialize;
use std::fmt;

/// Renders `figure` as an SVG document of `width` × `height` pixels (for the command line's
/// `plot` and for reports).
///
/// # Errors
/// [`PlotError`] when the SVG backend fails.
pub fn render_svg(
    figure: &Figure,
    width: u32,
    height: u32,
    theme: Theme,
) -> Result<String, PlotError> {
    let mut svg = String::new();
    {
        let mut backend = plotters::prelude::SVGBackend::with_string(&mut svg, (width, height));
        let look = Look {
            theme,
            scale: 1.0,
            compact: false,
        };
        draw(&mut backend, figure, &look)?;
    }
    Ok(svg)
}

/// A drawing failure reported by the backend (for example a canvas that is no longer there).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlotError(pub String);

impl fmt::Display for PlotError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "drawing failed: {}", self.0)
    }
}

impl std::error::Error for PlotError {}

/// Light or dark page (the page follows the system's `prefers-color-scheme`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Theme {
    /// Dark ink on a light sheet.
    Light,
    /// Light ink on a dark sheet.
    Dark,
}

/// The colour role of a layer; the palette turns it into a colour for the theme.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Ink {
    /// The board as built (the one accent colour of the sheet).
    Built,
    /// The ideal response (neutral).
    Ideal,
    /// Target values where achieved values are drawn beside them.
    Target,
    /// The specification's forbidden regions.
    Forbidden,
    /// Secondary annotation.
    Muted,
    /// A warning (a limit crossed, headroom exceeded).
    Warn,
    /// The n-th curve of a family of curves (one per stage, one per noise source …).
    Series(u8),
}

/// How to draw: theme and device pixel ratio.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Look {
    /// Light or dark.
    pub theme: Theme,
    /// Backend pixels per CSS pixel (the browser's devicePixelRatio; 1 for SVG files).
    pub scale: f64,
    /// A thumbnail: tick labels only, no title, legend or axis titles.
    pub compact: bool,
}

impl Look {
    /// The scale limited to 0.5–4, so that a wild devicePixelRatio cannot make lines vanish or
    /// fill the plot.
    pub fn scale_clamped(&self) -> f64 {
        if self.scale.is_finite() {
            self.scale.clamp(0.5, 4.0)
        } else {
            1.0
        }
    }

    /// The colours for this look's theme.
    pub fn palette(&self) -> Palette {
        Palette::for_theme(self.theme)
    }
}

/// The colours of one theme.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Palette {
    /// Canvas background (matches the page's card colour).
    pub background: RGBAColor,
    /// Plot area fill.
    pub plot_area: RGBAColor,
    /// Main text.
    pub ink: RGBAColor,
    /// Tick labels and secondary text.
    pub muted: RGBAColor,
    /// Labelled grid lines.
    pub grid_major: RGBAColor,
    /// Unlabelled grid lines.
    pub grid_minor: RGBAColor,
    /// Frame border.
    pub axis: RGBAColor,
    /// Built board accent.
    pub built: RGBAColor,
    /// Ideal response.
    pub ideal: RGBAColor,
    /// Targets beside achieved values.
    pub target: RGBAColor,
    /// Warning colour.
    pub warn: RGBAColor,
    /// Fill of forbidden regions.
    pub forbidden_fill: RGBAColor,
    /// Border of forbidden regions.
    pub forbidden_edge: RGBAColor,
    /// Hatching of forbidden regions.
    pub forbidden_hatch: RGBAColor,
    /// Colours for families of curves, cycled.
    pub series: [RGBAColor; 6],
}

const fn rgb(r: u8, g: u8, b: u8) -> RGBAColor {
    RGBAColor(r, g, b, 1.0)
}

impl Palette {
    /// The palette of `theme`. Text colours keep at least 4.5:1 contrast against the background
    /// (WCAG 2 AA for normal text).
    pub fn for_theme(theme: Theme) -> Palette {
        match theme {
            Theme::Light => Palette {
                background: rgb(0xff, 0xff, 0xff),
                plot_area: rgb(0xff, 0xff, 0xff),
                ink: rgb(0x1d, 0x23, 0x2a),
                muted: rgb(0x50, 0x5a, 0x66),
                grid_major: rgb(0xdc, 0xe0, 0xe5),
                grid_minor: rgb(0xee, 0xf0, 0xf3),
                axis: rgb(0x9a, 0xa3, 0xad),
                built: rgb(0x0a, 0x6a, 0x86),
                ideal: rgb(0x6b, 0x74, 0x80),
                target: rgb(0x9a, 0x5b, 0x00),
                warn: rgb(0xb4, 0x35, 0x09),
                forbidden_fill: RGBAColor(0xd6, 0x5c, 0x3c, 0.10),
                forbidden_edge: RGBAColor(0xbe, 0x46, 0x28, 0.65),
                forbidden_hatch: RGBAColor(0xbe, 0x46, 0x28, 0.28),
                series: [
                    rgb(0x0a, 0x6a, 0x86),
                    rgb(0xc2, 0x57, 0x0c),
                    rgb(0x6d, 0x4f, 0xc2),
                    rgb(0x2f, 0x7d, 0x32),
                    rgb(0xb8, 0x32, 0x6b),
                    rgb(0x5b, 0x64, 0x70),
                ],
            },
            Theme::Dark => Palette {
                background: rgb(0x1a, 0x1f, 0x25),
                plot_area: rgb(0x1a, 0x1f, 0x25),
                ink: rgb(0xe4, 0xe7, 0xeb),
                muted: rgb(0xa7, 0xb0, 0xba),
                grid_major: rgb(0x33, 0x3b, 0x44),
                grid_minor: rgb(0x25, 0x2b, 0x32),
                axis: rgb(0x55, 0x60, 0x6b),
                built: rgb(0x4c, 0xc3, 0xe0),
                ideal: rgb(0x9a, 0xa4, 0xaf),
                target: rgb(0xe8, 0xb0, 0x54),
                warn: rgb(0xf5, 0x8a, 0x5c),
                forbidden_fill: RGBAColor(0xf0, 0x6e, 0x50, 0.12),
                forbidden_edge: RGBAColor(0xf0, 0x78, 0x5a, 0.65),
                forbidden_hatch: RGBAColor(0xf0, 0x78, 0x5a, 0.30),
                series: [
                    rgb(0x4c, 0xc3, 0xe0),
                    rgb(0xf2, 0x8c, 0x4b),
                    rgb(0xa8, 0x94, 0xf0),
                    rgb(0x6c, 0xc7, 0x7a),
                    rgb(0xf0, 0x7a, 0xa8),
                    rgb(0x9a, 0xa4, 0xaf),
                ],
            },
        }
    }

    /// The colour of an ink role.
    pub fn ink_color(&self, ink: Ink) -> RGBAColor {
        match ink {
            Ink::Built => self.built,
            Ink::Ideal => self.ideal,
            Ink::Target => self.target,
            Ink::Forbidden => self.forbidden_edge,
            Ink::Muted => self.muted,
            Ink::Warn => self.warn,
            Ink::Series(index) => self.series[usize::from(index) % self.series.len()],
        }
    }
}

/// Writes a rendered test image into the folder named by `ROLLOFF_PLOT_DUMP`, when that variable
/// is set, so a person can look at what the tests drew. Does nothing otherwise.
#[cfg(test)]
pub(crate) fn dump_for_review(name: &str, contents: &str) {
    if let Some(dir) = std::env::var_os("ROLLOFF_PLOT_DUMP") {
        let path = std::path::Path::new(&dir).join(name);
        if let Err(error) = std::fs::write(&path, contents) {
            eprintln!("could not write {}: {error}", path.display());
        }
    }
}

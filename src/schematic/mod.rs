//! Stage schematics drawn by our own code from the stage netlist, with every part labelled by its
//! reference and value.
//!
//! A stage netlist says only which nodes each part joins. To draw it the way an engineer expects
//! (signal left to right, op amp in the middle, feedback parts above it), the netlist is matched
//! against a small set of layouts, one per circuit shape: Sallen-Key low- and high-pass, multiple
//! feedback low-, high- and band-pass, the first-order buffered and inverting RC stages and a
//! passive RC, the single-op-amp notch (low-pass, high-pass, symmetric) and the three-op-amp
//! state-variable stage ([`chain`]). Matching is by
//! connectivity alone (which part joins the input, the op-amp pins,
//! ground or an inner node), so it does not depend on how the netlist numbers its nodes or orders
//! its parts. A netlist that fits no layout is drawn as a labelled list of its connections, so
//! every stage still shows its parts.
//!
//! The pieces: [`layouts`] (one per circuit), [`matching`] (netlist to layout by connectivity),
//! [`draw`] (the drawing itself); this file holds the entry points.

mod chain;
mod draw;
mod layouts;
mod matching;

use plotters::prelude::DrawingBackend;
use serde::Serialize;

use crate::netlist::{PartKind, StageNetlist};
use crate::plot::render::backend_err;
use crate::plot::{Look, PlotError};
use crate::units::format_si;
use draw::{draw_layout, draw_list};
use layouts::layouts;
use matching::match_layout;

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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::netlist::{Node, Part};
    use crate::plot::Theme;
    use plotters::prelude::SVGBackend;
    use PartKind::{Capacitor as C, Resistor as R};

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

//! The circuit of the board: one netlist type that serves the nodal analysis, the SPICE export,
//! the parts list, the noise and tolerance analyses and the schematic drawing.
//!
//! Nodes are indices; ground is "no index" (`None`). Parts carry their reference designator,
//! value and the ideal value before rounding.

use serde::Serialize;

/// A circuit node: `Some(index)` or ground (`None`).
pub type Node = Option<usize>;

/// What kind of part an element is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum PartKind {
    /// A resistor, value in Ω.
    Resistor,
    /// A capacitor, value in F.
    Capacitor,
    /// An op amp (value unused).
    OpAmp,
}

/// One part of the board.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Part {
    /// Reference designator, unique over the board: `R1`, `C1`, `U1` … in signal order.
    #[serde(rename = "ref")]
    pub reference: String,
    /// What it is.
    pub kind: PartKind,
    /// Value on the board in SI base units (Ω, F); after rounding and overrides.
    pub value: f64,
    /// Value the synthesis asked for, before rounding.
    pub ideal: f64,
    /// What the part does in its stage, in words ("input resistor", "feedback capacitor" …).
    pub role: String,
    /// Where the part connects: two nodes for R and C; `[plus, minus, out]` for an op amp.
    pub nodes: Vec<Node>,
}

/// The netlist of one stage. Node 0 … `n_nodes - 1`; `input` is driven by the previous stage (or
/// the source), `output` drives the next stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageNetlist {
    /// Number of non-ground nodes.
    pub n_nodes: usize,
    /// The stage input node.
    pub input: usize,
    /// The stage output node (an op-amp output, or an RC node).
    pub output: usize,
    /// Names for the nodes, used in the SPICE export (`in`, `out` are reserved for the board).
    pub node_names: Vec<String>,
    /// The parts, in drawing order.
    pub parts: Vec<Part>,
}

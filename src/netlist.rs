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

impl Part {
    /// A resistor of `value_ohm` between nodes `a` and `b`; `ideal_ohm` is the value the synthesis
    /// asked for. The reference starts as `R?` until the board numbers its parts.
    pub fn resistor(role: &str, a: Node, b: Node, value_ohm: f64, ideal_ohm: f64) -> Part {
        Part {
            reference: "R?".into(),
            kind: PartKind::Resistor,
            value: value_ohm,
            ideal: ideal_ohm,
            role: role.into(),
            nodes: vec![a, b],
        }
    }

    /// A capacitor of `value_f` between nodes `a` and `b` (reference `C?` until numbered).
    pub fn capacitor(role: &str, a: Node, b: Node, value_f: f64, ideal_f: f64) -> Part {
        Part {
            reference: "C?".into(),
            kind: PartKind::Capacitor,
            value: value_f,
            ideal: ideal_f,
            role: role.into(),
            nodes: vec![a, b],
        }
    }

    /// An op amp with its non-inverting input, inverting input and output (reference `U?`).
    pub fn op_amp(role: &str, plus: Node, minus: Node, out: Node) -> Part {
        Part {
            reference: "U?".into(),
            kind: PartKind::OpAmp,
            value: 0.0,
            ideal: 0.0,
            role: role.into(),
            nodes: vec![plus, minus, out],
        }
    }

    /// The letter its reference designator starts with: `R`, `C` or `U`.
    pub fn ref_letter(&self) -> char {
        match self.kind {
            PartKind::Resistor => 'R',
            PartKind::Capacitor => 'C',
            PartKind::OpAmp => 'U',
        }
    }
}

impl StageNetlist {
    /// The values of the resistors and capacitors in part order (op amps skipped), SI units.
    /// The topology modules read a stage's achieved f0 and Q from this list.
    pub fn passive_values(&self) -> Vec<f64> {
        self.parts
            .iter()
            .filter(|p| p.kind != PartKind::OpAmp)
            .map(|p| p.value)
            .collect()
    }

    /// The op amps, in part order (the index used by `mna::Drive::OpAmpInputVoltage`).
    pub fn op_amps(&self) -> impl Iterator<Item = &Part> {
        self.parts.iter().filter(|p| p.kind == PartKind::OpAmp)
    }

    /// The part with reference designator `reference` (exact match), if any.
    pub fn part(&self, reference: &str) -> Option<&Part> {
        self.parts.iter().find(|p| p.reference == reference)
    }
}

/// The whole board as one netlist: stage k's input node is stage k−1's output node, so each stage
/// loads the one before it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BoardNetlist {
    /// Node 0 is `in` (the board input), the last stage's output is named `out`; other nodes are
    /// `s{k}_{name}` for stage k (1-based).
    pub netlist: StageNetlist,
    /// The node of each stage's output, in stage order.
    pub stage_outputs: Vec<usize>,
    /// For each part of `netlist.parts`, its stage (0-based) and its index in that stage's parts.
    pub part_origin: Vec<(usize, usize)>,
}

/// Merges stage netlists (in signal order) into one board netlist: the one board merger, used by
/// the analyses, the SPICE export and the dense reference analysis alike.
///
/// # Errors
/// A message when there are no stages or a stage's nodes are out of range.
pub fn merge(stages: &[&StageNetlist]) -> Result<BoardNetlist, String> {
    if stages.is_empty() {
        return Err("the board has no stages".into());
    }
    let mut node_names = vec!["in".to_string()];
    let mut parts = Vec::new();
    let mut part_origin = Vec::new();
    let mut stage_outputs = Vec::with_capacity(stages.len());
    let mut previous_output = 0usize;
    let last = stages.len() - 1;
    for (k, net) in stages.iter().enumerate() {
        if net.input >= net.n_nodes || net.output >= net.n_nodes {
            return Err(format!(
                "stage {}: input or output node outside 0..{}",
                k + 1,
                net.n_nodes
            ));
        }
        let mut map = vec![0usize; net.n_nodes];
        for (local, slot) in map.iter_mut().enumerate() {
            if local == net.input {
                *slot = previous_output;
                continue;
            }
            let local_name = net.node_names.get(local).map_or("n", String::as_str);
            let name = if local == net.output && k == last {
                "out".to_string()
            } else {
                format!("s{}_{}", k + 1, local_name)
            };
            *slot = node_names.len();
            node_names.push(name);
        }
        for (part_idx, part) in net.parts.iter().enumerate() {
            let mut p = part.clone();
            let mut nodes = Vec::with_capacity(part.nodes.len());
            for node in &part.nodes {
                match node {
                    None => nodes.push(None),
                    Some(i) => match map.get(*i) {
                        Some(&m) => nodes.push(Some(m)),
                        None => {
                            return Err(format!(
                                "stage {}: {} uses node {i} outside 0..{}",
                                k + 1,
                                part.reference,
                                net.n_nodes
                            ))
                        }
                    },
                }
            }
            p.nodes = nodes;
            parts.push(p);
            part_origin.push((k, part_idx));
        }
        previous_output = map[net.output];
        stage_outputs.push(previous_output);
    }
    Ok(BoardNetlist {
        netlist: StageNetlist {
            n_nodes: node_names.len(),
            input: 0,
            output: previous_output,
            node_names,
            parts,
        },
        stage_outputs,
        part_origin,
    })
}

//! Complex modified nodal analysis of stage netlists (and of a whole board) with the op-amp model.
//!
//! Unknowns: the node voltages (ground is "no index"), then for each op amp the current of its
//! output source and, when Rout > 0, the voltage of the internal node behind Rout, then the
//! current of the source that drives the input. Every device returns its stamp as data
//! ([`Stamp`]); one assembler adds them into a dense complex matrix, solved by LU with partial
//! pivoting ([`solve_dense`]).
//!
//! Op-amp model (see [`crate::opamp::OpAmp`]): open-loop gain A(s) with
//! 1/A(s) = 1/A0 + s/(2π·GBW) (a single pole at GBW/A0 that crosses unity gain at GBW), an ideal
//! voltage source `x = A(s)·(V+ − V−)` behind Rout. The branch equation is written as
//! (1/A(s))·V(x) − V+ + V− = 0, so the ideal op amp (1/A = 0, a nullor) is the exact limit rather
//! than a large number.

use crate::board::Board;
use crate::fmath;
use crate::netlist::BoardNetlist;
use crate::netlist::{Node, PartKind, StageNetlist};
use crate::opamp::OpAmp;
use num_complex::Complex64;
use std::fmt;

/// A failed analysis: a sentence that names the likely cause.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MnaError {
    /// What went wrong, e.g. "singular circuit equations at s = …: node `s1_a` has no DC path".
    pub message: String,
}

impl MnaError {
    fn new(message: impl Into<String>) -> Self {
        MnaError {
            message: message.into(),
        }
    }
}

impl fmt::Display for MnaError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for MnaError {}

impl From<MnaError> for String {
    fn from(e: MnaError) -> String {
        e.message
    }
}

/// What excites the circuit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Drive {
    /// A voltage source of this (complex) amplitude at the netlist's input node.
    Input(Complex64),
    /// A current source that takes `amps` out of node `from` and pushes it into node `to` (the
    /// SPICE `I from to` direction). The input node is held at 0 V (grounded source), as for a
    /// noise analysis.
    Current {
        /// Node the current leaves.
        from: Node,
        /// Node the current enters.
        to: Node,
        /// Amplitude, A.
        amps: Complex64,
    },
    /// A voltage source in series with the + input of op amp number `opamp_index` (counted in
    /// part order over the netlist's op amps, from 0), as the op amp's input voltage noise sees
    /// it: the op amp amplifies V+ + `volts` − V−. The input node is held at 0 V.
    OpAmpInputVoltage {
        /// Which op amp (0-based over the op amps in part order).
        opamp_index: usize,
        /// Amplitude, V.
        volts: Complex64,
    },
}

/// One device's contribution to the equations: matrix entries and right-hand-side entries, by
/// unknown index. Ground entries are simply never produced.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Stamp {
    /// `(row, column, value)` added to the matrix.
    pub matrix: Vec<(usize, usize, Complex64)>,
    /// `(row, value)` added to the right-hand side.
    pub rhs: Vec<(usize, Complex64)>,
}

impl Stamp {
    fn add(&mut self, row: Node, col: Node, value: Complex64) {
        if let (Some(r), Some(c)) = (row, col) {
            self.matrix.push((r, c, value));
        }
    }

    fn add_rhs(&mut self, row: Node, value: Complex64) {
        if let Some(r) = row {
            self.rhs.push((r, value));
        }
    }
}

/// An admittance `y` (S) between nodes `a` and `b`: +y on the diagonal, −y off it.
pub fn admittance_stamp(a: Node, b: Node, y: Complex64) -> Stamp {
    let mut st = Stamp::default();
    st.add(a, a, y);
    st.add(b, b, y);
    st.add(a, b, -y);
    st.add(b, a, -y);
    st
}

/// The unknowns an op amp adds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OpAmpUnknowns {
    /// Index of the output-source current.
    pub branch: usize,
    /// Index of the node behind Rout, or `None` when Rout = 0 (the source drives the output).
    pub internal: Option<usize>,
}

/// The op-amp stamp: source current into the internal node (or the output), branch row
/// (1/A)·V(x) − V+ + V− = `offset` (the offset is a series source at the + input), and Rout
/// between the internal node and the output.
pub fn opamp_stamp(
    pins: [Node; 3],
    unknowns: OpAmpUnknowns,
    inverse_gain: Complex64,
    rout_ohm: f64,
    offset: Complex64,
) -> Stamp {
    let [plus, minus, out] = pins;
    let one = Complex64::new(1.0, 0.0);
    let k = Some(unknowns.branch);
    let x = unknowns.internal.or(out);
    let mut st = Stamp::default();
    // KCL at x: the source delivers the branch current into x.
    st.add(x, k, -one);
    st.add(k, x, inverse_gain);
    st.add(k, plus, -one);
    st.add(k, minus, one);
    st.add_rhs(k, offset);
    if unknowns.internal.is_some() && rout_ohm > 0.0 {
        let rout = admittance_stamp(x, out, Complex64::new(1.0 / rout_ohm, 0.0));
        st.matrix.extend(rout.matrix);
    }
    st
}

/// A voltage source of `volts` from ground to `node`, with its current as unknown `branch`
/// (positive when it flows from the source into the node).
pub fn voltage_source_stamp(node: usize, branch: usize, volts: Complex64) -> Stamp {
    let one = Complex64::new(1.0, 0.0);
    let mut st = Stamp::default();
    st.add(Some(node), Some(branch), -one);
    st.add(Some(branch), Some(node), one);
    st.add_rhs(Some(branch), volts);
    st
}

/// A current source taking `amps` out of `from` and into `to`.
pub fn current_source_stamp(from: Node, to: Node, amps: Complex64) -> Stamp {
    let mut st = Stamp::default();
    st.add_rhs(to, amps);
    st.add_rhs(from, -amps);
    st
}

/// Where every unknown sits.
struct Unknowns {
    n_nodes: usize,
    op_amps: Vec<OpAmpUnknowns>,
    source_branch: usize,
    size: usize,
}

fn check_netlist(net: &StageNetlist) -> Result<(), MnaError> {
    let ok_node = |n: &Node| n.map_or(true, |i| i < net.n_nodes);
    if net.input >= net.n_nodes || net.output >= net.n_nodes {
        return Err(MnaError::new(format!(
            "netlist input {} or output {} is not one of its {} nodes",
            net.input, net.output, net.n_nodes
        )));
    }
    for part in &net.parts {
        let pins = match part.kind {
            PartKind::OpAmp => 3,
            _ => 2,
        };
        if part.nodes.len() != pins || !part.nodes.iter().all(ok_node) {
            return Err(MnaError::new(format!(
                "part {} has {} connections ({} expected) or a node outside 0…{}",
                part.reference,
                part.nodes.len(),
                pins,
                net.n_nodes.saturating_sub(1)
            )));
        }
        if part.kind == PartKind::OpAmp && part.nodes[2].is_none() {
            return Err(MnaError::new(format!(
                "op amp {} has its output on ground",
                part.reference
            )));
        }
        if part.kind != PartKind::OpAmp && !(part.value.is_finite() && part.value > 0.0) {
            return Err(MnaError::new(format!(
                "part {} has value {}; resistors and capacitors need a finite positive value",
                part.reference, part.value
            )));
        }
    }
    Ok(())
}

fn layout(net: &StageNetlist, op: &OpAmp) -> Unknowns {
    let mut next = net.n_nodes;
    let mut op_amps = Vec::new();
    for _ in net.op_amps() {
        let branch = next;
        next += 1;
        let internal = if op.rout_ohm > 0.0 {
            next += 1;
            Some(next - 1)
        } else {
            None
        };
        op_amps.push(OpAmpUnknowns { branch, internal });
    }
    let source_branch = next;
    Unknowns {
        n_nodes: net.n_nodes,
        op_amps,
        source_branch,
        size: next + 1,
    }
}

/// Solves the netlist for one drive at complex frequency `s`; returns every unknown.
fn solve_all(
    net: &StageNetlist,
    op: &OpAmp,
    s: Complex64,
    drive: &Drive,
) -> Result<(Vec<Complex64>, Unknowns), MnaError> {
    check_netlist(net)?;
    if !(op.rout_ohm.is_finite() && op.rout_ohm >= 0.0) {
        return Err(MnaError::new(format!(
            "op-amp output resistance {} Ω must be finite and ≥ 0",
            op.rout_ohm
        )));
    }
    let unknowns = layout(net, op);
    let inv_a = op.inverse_gain(s);
    let zero = Complex64::new(0.0, 0.0);
    let mut stamps: Vec<Stamp> = Vec::with_capacity(net.parts.len() + 2);
    let mut opamp_no = 0;
    for part in &net.parts {
        match part.kind {
            PartKind::Resistor => stamps.push(admittance_stamp(
                part.nodes[0],
                part.nodes[1],
                Complex64::new(1.0 / part.value, 0.0),
            )),
            PartKind::Capacitor => stamps.push(admittance_stamp(
                part.nodes[0],
                part.nodes[1],
                s * part.value,
            )),
            PartKind::OpAmp => {
                let offset = match drive {
                    Drive::OpAmpInputVoltage { opamp_index, volts } if *opamp_index == opamp_no => {
                        *volts
                    }
                    _ => zero,
                };
                let pins = [part.nodes[0], part.nodes[1], part.nodes[2]];
                stamps.push(opamp_stamp(
                    pins,
                    unknowns.op_amps[opamp_no],
                    inv_a,
                    op.rout_ohm,
                    offset,
                ));
                opamp_no += 1;
            }
        }
    }
    if let Drive::OpAmpInputVoltage { opamp_index, .. } = drive {
        if *opamp_index >= opamp_no {
            return Err(MnaError::new(format!(
                "op amp index {opamp_index} asked, the netlist has {opamp_no} op amps"
            )));
        }
    }
    let source_volts = match drive {
        Drive::Input(v) => *v,
        _ => zero,
    };
    stamps.push(voltage_source_stamp(
        net.input,
        unknowns.source_branch,
        source_volts,
    ));
    if let Drive::Current { from, to, amps } = drive {
        let ok = |n: &Node| n.map_or(true, |i| i < net.n_nodes);
        if !ok(from) || !ok(to) {
            return Err(MnaError::new(format!(
                "current source nodes {from:?} → {to:?} are not nodes of the netlist"
            )));
        }
        stamps.push(current_source_stamp(*from, *to, *amps));
    }
    let (matrix, rhs) = assemble(unknowns.size, &stamps);
    match solve_dense(matrix, rhs, unknowns.size) {
        Ok(x) => Ok((x, unknowns)),
        Err(Singular { column }) => Err(MnaError::new(format!(
            "singular circuit equations at s = {s} (unknown {column}): {}",
            diagnose(net, s)
        ))),
    }
}

/// Adds the stamps into a dense row-major `size × size` matrix and right-hand side.
pub fn assemble(size: usize, stamps: &[Stamp]) -> (Vec<Complex64>, Vec<Complex64>) {
    let mut matrix = vec![Complex64::new(0.0, 0.0); size * size];
    let mut rhs = vec![Complex64::new(0.0, 0.0); size];
    for st in stamps {
        for &(r, c, v) in &st.matrix {
            if r < size && c < size {
                matrix[r * size + c] += v;
            }
        }
        for &(r, v) in &st.rhs {
            if r < size {
                rhs[r] += v;
            }
        }
    }
    (matrix, rhs)
}

/// A zero pivot: the matrix is singular at elimination column `column`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Singular {
    /// The column (unknown index) that found no usable pivot.
    pub column: usize,
}

/// Solves `A·x = b` for a dense row-major `n × n` complex matrix by LU decomposition with partial
/// pivoting. Rows are first scaled to a largest entry of 1 (so that nodes with very different
/// admittance levels compare fairly); a pivot below 1e-14 of its scaled row is taken as singular.
///
/// # Errors
/// [`Singular`] with the column where elimination stopped.
pub fn solve_dense(
    mut a: Vec<Complex64>,
    mut b: Vec<Complex64>,
    n: usize,
) -> Result<Vec<Complex64>, Singular> {
    assert_eq!(
        a.len(),
        n * n,
        "matrix size: expected {} got {}",
        n * n,
        a.len()
    );
    assert_eq!(
        b.len(),
        n,
        "right-hand side: expected {} got {}",
        n,
        b.len()
    );
    for r in 0..n {
        let scale = (0..n)
            .map(|c| fmath::cnorm(a[r * n + c]))
            .fold(0.0, f64::max);
        if scale == 0.0 || !scale.is_finite() {
            return Err(Singular { column: r });
        }
        for c in 0..n {
            a[r * n + c] /= scale;
        }
        b[r] /= scale;
    }
    for k in 0..n {
        let (pivot_row, pivot_norm) =
            (k..n)
                .map(|r| (r, fmath::cnorm(a[r * n + k])))
                .fold(
                    (k, -1.0),
                    |best, cur| if cur.1 > best.1 { cur } else { best },
                );
        if pivot_norm.is_nan() || pivot_norm <= 1e-14 {
            return Err(Singular { column: k });
        }
        if pivot_row != k {
            for c in 0..n {
                a.swap(k * n + c, pivot_row * n + c);
            }
            b.swap(k, pivot_row);
        }
        let pivot = a[k * n + k];
        for r in k + 1..n {
            let factor = a[r * n + k] / pivot;
            if factor == Complex64::new(0.0, 0.0) {
                continue;
            }
            a[r * n + k] = Complex64::new(0.0, 0.0);
            for c in k + 1..n {
                let upper = a[k * n + c];
                a[r * n + c] -= factor * upper;
            }
            let bk = b[k];
            b[r] -= factor * bk;
        }
    }
    let mut x = vec![Complex64::new(0.0, 0.0); n];
    for k in (0..n).rev() {
        let mut sum = b[k];
        for c in k + 1..n {
            sum -= a[k * n + c] * x[c];
        }
        x[k] = sum / a[k * n + k];
    }
    Ok(x)
}

/// Names a likely cause of a singular matrix from the netlist's structure.
fn diagnose(net: &StageNetlist, s: Complex64) -> String {
    let name = |i: usize| {
        net.node_names
            .get(i)
            .cloned()
            .unwrap_or_else(|| format!("{i}"))
    };
    let dc = fmath::cnorm(s) == 0.0;
    // Adjacency through parts that conduct at this s (capacitors are open at DC), ground excluded.
    let mut touches = vec![0usize; net.n_nodes];
    let mut adjacency: Vec<Vec<usize>> = vec![Vec::new(); net.n_nodes];
    let mut anchored = vec![false; net.n_nodes];
    anchored[net.input] = true;
    for part in &net.parts {
        for n in part.nodes.iter().flatten() {
            if let Some(t) = touches.get_mut(*n) {
                *t += 1;
            }
        }
        match part.kind {
            PartKind::OpAmp => {
                if let Some(Some(o)) = part.nodes.get(2) {
                    if let Some(a) = anchored.get_mut(*o) {
                        *a = true;
                    }
                }
            }
            PartKind::Capacitor if dc => {}
            _ => match (part.nodes[0], part.nodes[1]) {
                (Some(a), Some(b)) => {
                    adjacency[a].push(b);
                    adjacency[b].push(a);
                }
                (Some(a), None) | (None, Some(a)) => anchored[a] = true,
                (None, None) => {}
            },
        }
    }
    for (i, &t) in touches.iter().enumerate() {
        if t == 0 {
            return format!(
                "node `{}` is connected to nothing (a floating node)",
                name(i)
            );
        }
    }
    // Nodes with no conducting path to ground, the source or an op-amp output float.
    let mut reached = anchored.clone();
    let mut stack: Vec<usize> = (0..net.n_nodes).filter(|&i| anchored[i]).collect();
    while let Some(i) = stack.pop() {
        for &j in &adjacency[i] {
            if !reached[j] {
                reached[j] = true;
                stack.push(j);
            }
        }
    }
    if let Some(i) = reached.iter().position(|r| !r) {
        return format!(
            "node `{}` has no {}path to ground, the input or an op-amp output (a floating node)",
            name(i),
            if dc { "DC " } else { "" }
        );
    }
    // An op amp whose output cannot reach its − input without passing through ground has no
    // feedback; with a very high gain its equations are singular.
    for part in net.op_amps() {
        let (Some(Some(minus)), Some(Some(out))) = (part.nodes.get(1), part.nodes.get(2)) else {
            continue;
        };
        let mut seen = vec![false; net.n_nodes];
        let mut stack = vec![*out];
        seen[*out] = true;
        while let Some(i) = stack.pop() {
            for &j in &adjacency[i] {
                if !seen[j] {
                    seen[j] = true;
                    stack.push(j);
                }
            }
        }
        if !seen[*minus] {
            return format!(
                "op amp {} has no feedback path from its output to its − input",
                part.reference
            );
        }
    }
    "check for a floating node or an op amp without feedback".to_string()
}

/// The transfer function V(output)/V(input) with 1 V at the netlist's input, at complex
/// frequency `s` (rad/s; s = j·2πf for a sweep).
///
/// # Errors
/// [`MnaError`] for a malformed netlist or singular equations (with the likely cause).
pub fn transfer(net: &StageNetlist, op: &OpAmp, s: Complex64) -> Result<Complex64, MnaError> {
    let (x, _) = solve_all(net, op, s, &Drive::Input(Complex64::new(1.0, 0.0)))?;
    Ok(x[net.output])
}

/// Every node voltage (index = node, length `net.n_nodes`) for a drive at complex frequency `s`.
///
/// # Errors
/// As [`transfer`]; also for a drive that names a node or op amp the netlist does not have.
pub fn node_voltages(
    net: &StageNetlist,
    op: &OpAmp,
    s: Complex64,
    drive: &Drive,
) -> Result<Vec<Complex64>, MnaError> {
    let (mut x, unknowns) = solve_all(net, op, s, drive)?;
    x.truncate(unknowns.n_nodes);
    Ok(x)
}

/// The impedance seen by the source at the input, Ω: Zin = V / I with V = 1 V at the input.
///
/// # Errors
/// As [`transfer`]; a circuit that draws no current at this `s` (open input) is an error, since
/// its impedance is infinite.
pub fn input_impedance(
    net: &StageNetlist,
    op: &OpAmp,
    s: Complex64,
) -> Result<Complex64, MnaError> {
    let (x, unknowns) = solve_all(net, op, s, &Drive::Input(Complex64::new(1.0, 0.0)))?;
    let current = x[unknowns.source_branch];
    if fmath::cnorm(current) == 0.0 {
        return Err(MnaError::new(format!(
            "the input draws no current at s = {s}: its impedance is infinite"
        )));
    }
    Ok(Complex64::new(1.0, 0.0) / current)
}

/// The whole board as one netlist (stages connected, so each stage loads the one before it):
/// returns the overall transfer function and every stage's output voltage, for 1 V at `in`.
///
/// # Errors
/// As [`transfer`].
pub fn board_response(
    board: &Board,
    s: Complex64,
) -> Result<(Complex64, Vec<Complex64>), MnaError> {
    let merged = board.netlist().map_err(MnaError::new)?;
    netlist_response(&merged, &board.op_amp, s)
}

/// [`board_response`] on an already merged board netlist ([`Board::netlist`]), for sweeps that
/// evaluate many frequencies of one board without merging it again each time.
///
/// # Errors
/// As [`transfer`].
pub fn netlist_response(
    merged: &BoardNetlist,
    op: &OpAmp,
    s: Complex64,
) -> Result<(Complex64, Vec<Complex64>), MnaError> {
    let v = node_voltages(
        &merged.netlist,
        op,
        s,
        &Drive::Input(Complex64::new(1.0, 0.0)),
    )?;
    let outputs: Vec<Complex64> = merged
        .stage_outputs
        .iter()
        .map(|&i| v.get(i).copied().unwrap_or_default())
        .collect();
    let h = v.get(merged.netlist.output).copied().unwrap_or_default();
    Ok((h, outputs))
}

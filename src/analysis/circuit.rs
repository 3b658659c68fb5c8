//! A compact nodal assembler used by the analyses: a stage netlist (or a whole board merged into
//! one netlist) becomes two real matrices, `M(s) = G + s·C`, so that the tolerance study can
//! restamp part values cheaply and the polynomial fit can solve at a handful of complex points.
//!
//! Formulation (modified nodal analysis, reduced):
//! - the unknowns are the node voltages except the input node, plus one internal node per op amp
//!   with a non-zero output resistance (numbered right after the op amp's output pin, so that a
//!   board's matrix is banded);
//! - the input node is driven by an ideal source: its column moves to the right-hand side and its
//!   current equation is dropped;
//! - an op amp is `v_int · (1/A(s)) = V+ − V−` with `1/A(s) = 1/A0 + s/(2π·GBW)` (the single-pole
//!   model of [`crate::opamp::OpAmp`]), `Rout` from `v_int` to the output pin. The ideal source
//!   inside the op amp is grounded, so its current appears only in the current equation of its
//!   own node; that equation is replaced by the gain constraint. With `Rout = 0` the internal node
//!   is the output pin itself and the output pin's current equation is the one replaced. With an
//!   ideal op amp (`1/A = 0`) the constraint is the nullor `V+ = V−`.
//!
//! This is an independent implementation of the same model as [`crate::mna`]; the tests check one
//! against the other.

use crate::error::InputError;
use crate::fmath;
use crate::netlist::{BoardNetlist, Node, PartKind, StageNetlist};
use crate::opamp::OpAmp;
use num_complex::Complex64;
use std::fmt;

/// Why an analysis could not produce a value.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub enum AnalysisError {
    /// A setting of the analysis is out of range (names the link key).
    Input(InputError),
    /// The circuit equations are singular at some frequency; the text names the likely cause.
    Singular(String),
    /// The netlist breaks an invariant of the netlist type (a node out of range, a part with the
    /// wrong number of pins, a non-positive value).
    BadNetlist(String),
    /// An iteration did not converge (root finder, bisection); the text says which.
    NoConvergence(String),
}

impl fmt::Display for AnalysisError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            AnalysisError::Input(e) => write!(f, "{e}"),
            AnalysisError::Singular(m) => write!(f, "singular circuit equations: {m}"),
            AnalysisError::BadNetlist(m) => write!(f, "netlist: {m}"),
            AnalysisError::NoConvergence(m) => write!(f, "no convergence: {m}"),
        }
    }
}

impl std::error::Error for AnalysisError {}

impl From<InputError> for AnalysisError {
    fn from(e: InputError) -> Self {
        AnalysisError::Input(e)
    }
}

/// Where one stamp of a part value lands.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Slot {
    /// `G[idx]` (row-major index into an `n×n` matrix) or `C[idx]`, by the part kind.
    Matrix(usize),
    /// The input-coupling vector at `row` (the input node's column, moved to the right side).
    Input(usize),
}

/// The stamps of one resistor or capacitor: up to four `(slot, sign)` pairs.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct PartStamp {
    /// Index of the part in the netlist's `parts`.
    pub part_idx: usize,
    /// True for capacitors (stamps go to `C`, value `C`), false for resistors (to `G`, `1/R`).
    pub is_capacitor: bool,
    /// Where the admittance goes, with its sign.
    pub slots: Vec<(Slot, f64)>,
}

/// A netlist compiled for repeated assembly.
#[derive(Debug, Clone, PartialEq)]
pub struct Compiled {
    /// Number of unknowns.
    pub n: usize,
    /// Netlist node → unknown index (`None` for the input node).
    pub node_col: Vec<Option<usize>>,
    /// Whether row `r` is a current equation (true) or an op-amp constraint (false).
    pub row_is_kcl: Vec<bool>,
    /// Unknown index of the output node.
    pub output_col: usize,
    /// The op-amp constant part of `G` (constraints, `1/A0`, `1/Rout`), row-major `n×n`.
    pub(crate) base_g: Vec<f64>,
    /// The op-amp part of `C` (`1/(2π·GBW)`), row-major `n×n`.
    pub(crate) base_c: Vec<f64>,
    /// Op-amp constant coupling of the input node into the rows (an op-amp input on the input node).
    pub(crate) base_g_in: Vec<f64>,
    /// Stamps of every resistor and capacitor.
    pub(crate) stamps: Vec<PartStamp>,
    /// Constraint row of each op amp (in netlist order of op amps) and its `(plus, minus)` columns.
    pub(crate) opamp_rows: Vec<usize>,
    /// Number of capacitors plus op amps with a finite GBW: an upper bound on the degree in s.
    pub degree_bound: usize,
    /// Geometric mean of 1/(R·C) over the stage's parts, rad/s: the natural frequency scale.
    pub scale_rad_s: f64,
}

/// The assembled matrices for one set of part values.
#[derive(Debug, Clone, PartialEq)]
pub struct Assembled {
    /// `G`, row-major `n×n`.
    pub g: Vec<f64>,
    /// `C`, row-major `n×n`.
    pub c: Vec<f64>,
    /// Coupling of the input voltage into each row, conductive part (moved to the right side with
    /// a minus sign).
    pub g_in: Vec<f64>,
    /// Coupling of the input voltage into each row, capacitive part.
    pub c_in: Vec<f64>,
}

fn check_node(node: Node, n_nodes: usize, what: &str) -> Result<(), AnalysisError> {
    match node {
        Some(i) if i >= n_nodes => Err(AnalysisError::BadNetlist(format!(
            "{what}: node {i} is outside 0..{n_nodes}"
        ))),
        _ => Ok(()),
    }
}

impl Compiled {
    /// Compiles `net` with the op-amp model `op`.
    ///
    /// # Errors
    /// [`AnalysisError::BadNetlist`] when a node index is out of range, a part has the wrong number
    /// of pins, or two op amps drive the same pin.
    pub fn new(net: &StageNetlist, op: &OpAmp) -> Result<Compiled, AnalysisError> {
        let n_nodes = net.n_nodes;
        if net.input >= n_nodes || net.output >= n_nodes {
            return Err(AnalysisError::BadNetlist(format!(
                "input {} or output {} outside 0..{}",
                net.input, net.output, n_nodes
            )));
        }
        if net.input == net.output {
            return Err(AnalysisError::BadNetlist(
                "input and output are the same node".into(),
            ));
        }
        let (inv_a, inv_b) = op.inverse_gain_coefficients();
        let rout = if op.rout_ohm.is_finite() && op.rout_ohm > 0.0 {
            op.rout_ohm
        } else {
            0.0
        };
        let opamps: Vec<&crate::netlist::Part> = net
            .parts
            .iter()
            .filter(|p| p.kind == PartKind::OpAmp)
            .collect();
        for p in &opamps {
            if p.nodes.len() != 3 {
                return Err(AnalysisError::BadNetlist(format!(
                    "{} has {} pins, an op amp has 3 (plus, minus, out)",
                    p.reference,
                    p.nodes.len()
                )));
            }
            for &node in &p.nodes {
                check_node(node, n_nodes, &p.reference)?;
            }
        }
        // Unknown indices: every node but the input, in netlist order, each op amp's internal node
        // (when Rout > 0) right after its output pin. A board's equations then stay banded: an
        // op amp's rows and columns sit beside those of its own stage.
        let mut node_col = vec![None; n_nodes];
        let mut internal_col = vec![usize::MAX; opamps.len()];
        let mut n = 0;
        for (i, col) in node_col.iter_mut().enumerate() {
            if i != net.input {
                *col = Some(n);
                n += 1;
                if rout > 0.0 {
                    for (k, p) in opamps.iter().enumerate() {
                        if p.nodes[2] == Some(i) {
                            internal_col[k] = n;
                            n += 1;
                        }
                    }
                }
            }
        }
        if rout > 0.0 {
            // An op amp whose output is not a node of its own (refused below) still gets a column.
            for slot in internal_col.iter_mut().filter(|c| **c == usize::MAX) {
                *slot = n;
                n += 1;
            }
        }
        let mut row_is_kcl = vec![true; n];
        let mut base_g = vec![0.0; n * n];
        let mut base_c = vec![0.0; n * n];
        let mut base_g_in = vec![0.0; n];
        let mut opamp_rows = Vec::with_capacity(opamps.len());
        let col_of = |node: Node| -> Option<usize> { node.and_then(|i| node_col[i]) };
        for (k, p) in opamps.iter().enumerate() {
            let (plus, minus, out) = (p.nodes[0], p.nodes[1], p.nodes[2]);
            let out_idx = match out {
                Some(i) if i != net.input => i,
                _ => {
                    return Err(AnalysisError::BadNetlist(format!(
                        "{}: the output pin must be a non-ground node other than the stage input",
                        p.reference
                    )))
                }
            };
            let out_col = node_col[out_idx].unwrap_or(0);
            let row = if rout > 0.0 {
                let v = internal_col[k];
                base_g[out_col * n + out_col] += 1.0 / rout;
                base_g[out_col * n + v] -= 1.0 / rout;
                v
            } else {
                out_col
            };
            if !row_is_kcl[row] {
                return Err(AnalysisError::BadNetlist(format!(
                    "{}: two op amps drive the same node",
                    p.reference
                )));
            }
            row_is_kcl[row] = false;
            base_g[row * n + row] += inv_a;
            base_c[row * n + row] += inv_b;
            // −V+ + V−: an input pin on the stage input node couples through the input vector.
            for (node, sign) in [(plus, -1.0), (minus, 1.0)] {
                match node {
                    None => {}
                    Some(i) if i == net.input => base_g_in[row] += sign,
                    Some(_) => {
                        if let Some(c) = col_of(node) {
                            base_g[row * n + c] += sign;
                        }
                    }
                }
            }
            opamp_rows.push(row);
        }
        // Resistor and capacitor stamps; rows that are op-amp constraints take no current stamps.
        let mut stamps = Vec::new();
        let mut log_rate_sum = 0.0;
        let mut n_r = 0usize;
        let mut n_c = 0usize;
        let mut log_r = 0.0;
        let mut log_c = 0.0;
        for (part_idx, p) in net.parts.iter().enumerate() {
            let is_capacitor = match p.kind {
                PartKind::OpAmp => continue,
                PartKind::Resistor => false,
                PartKind::Capacitor => true,
            };
            if p.nodes.len() != 2 {
                return Err(AnalysisError::BadNetlist(format!(
                    "{} has {} pins, expected 2",
                    p.reference,
                    p.nodes.len()
                )));
            }
            for &node in &p.nodes {
                check_node(node, n_nodes, &p.reference)?;
            }
            if !(p.value.is_finite() && p.value > 0.0) {
                return Err(AnalysisError::BadNetlist(format!(
                    "{} has value {}, expected a positive finite number",
                    p.reference, p.value
                )));
            }
            if is_capacitor {
                n_c += 1;
                log_c += fmath::ln(p.value);
            } else {
                n_r += 1;
                log_r += fmath::ln(p.value);
            }
            let (a, b) = (p.nodes[0], p.nodes[1]);
            let mut slots = Vec::with_capacity(4);
            for (row_node, col_node, sign) in [(a, a, 1.0), (a, b, -1.0), (b, a, -1.0), (b, b, 1.0)]
            {
                let row = match col_of(row_node) {
                    Some(r) if row_is_kcl[r] => r,
                    _ => continue,
                };
                match col_node {
                    None => {}
                    Some(i) if i == net.input => slots.push((Slot::Input(row), sign)),
                    Some(_) => {
                        if let Some(c) = col_of(col_node) {
                            slots.push((Slot::Matrix(row * n + c), sign));
                        }
                    }
                }
            }
            stamps.push(PartStamp {
                part_idx,
                is_capacitor,
                slots,
            });
        }
        let output_col = node_col[net.output].unwrap_or(0);
        let finite_gbw = usize::from(inv_b > 0.0) * opamps.len();
        if n_r > 0 && n_c > 0 {
            log_rate_sum = -(log_r / n_r as f64 + log_c / n_c as f64);
        }
        let scale_rad_s = if n_r > 0 && n_c > 0 {
            fmath::exp(log_rate_sum)
        } else {
            1.0
        };
        Ok(Compiled {
            n,
            node_col,
            row_is_kcl,
            output_col,
            base_g,
            base_c,
            base_g_in,
            stamps,
            opamp_rows,
            degree_bound: n_c + finite_gbw,
            scale_rad_s,
        })
    }

    /// An empty set of matrices of the right size.
    pub fn blank(&self) -> Assembled {
        let n = self.n;
        Assembled {
            g: vec![0.0; n * n],
            c: vec![0.0; n * n],
            g_in: vec![0.0; n],
            c_in: vec![0.0; n],
        }
    }

    /// Assembles the matrices for part values `values` (indexed like the netlist's parts; op-amp
    /// entries are ignored) into `out`.
    ///
    /// Internal invariant: `values` has one entry per netlist part.
    pub fn assemble_into(&self, values: &[f64], out: &mut Assembled) {
        out.g.copy_from_slice(&self.base_g);
        out.c.copy_from_slice(&self.base_c);
        out.g_in.copy_from_slice(&self.base_g_in);
        out.c_in.iter_mut().for_each(|v| *v = 0.0);
        for st in &self.stamps {
            let value = values.get(st.part_idx).copied().unwrap_or(f64::NAN);
            let (mat, vec, y) = if st.is_capacitor {
                (&mut out.c, &mut out.c_in, value)
            } else {
                (&mut out.g, &mut out.g_in, 1.0 / value)
            };
            for &(slot, sign) in &st.slots {
                match slot {
                    Slot::Matrix(i) => mat[i] += sign * y,
                    Slot::Input(r) => vec[r] += sign * y,
                }
            }
        }
    }

    /// Assembles with the netlist's own part values.
    pub fn assemble(&self, net: &StageNetlist) -> Assembled {
        let values: Vec<f64> = net.parts.iter().map(|p| p.value).collect();
        let mut out = self.blank();
        self.assemble_into(&values, &mut out);
        out
    }
}

/// Complex work space for solving `M(s)·x = b` by Gaussian elimination with partial pivoting.
///
/// The matrix is stored dense, but a board is a chain of stages, so its matrix is banded and most
/// of each row is zero. Every row keeps the span of columns outside which it is exactly zero:
/// loading writes and clears only the spans, and elimination and the pivot search touch only
/// the rows and columns a span can reach (a row's span grows to the pivot row's end when it is
/// eliminated). Skipped terms are exact zeros, so the result is the same to the bit as the dense
/// loop's.
#[derive(Debug, Clone, PartialEq)]
pub struct Solver {
    n: usize,
    m: Vec<Complex64>,
    rhs: Vec<Complex64>,
    /// First column of each row (as stored now) that may be non-zero. Elimination leaves the
    /// eliminated entries as they are (only the upper triangle is read afterwards), so a row's
    /// start never moves.
    row_start: Vec<usize>,
    /// One past the last column of each row that may be non-zero.
    row_end: Vec<usize>,
    /// The row chosen as pivot at each step of the last [`Solver::solve`], so that
    /// [`Solver::solve_again`] replays the same row exchanges on another right-hand side.
    pivots: Vec<usize>,
    /// One past the last row that step k of the last solve eliminated (its multipliers end
    /// there), so the replay skips the rows a banded board never reaches.
    lower_end: Vec<usize>,
    /// One past the last row whose span starts at or before each column, found at the start of
    /// each solve: the rows beyond it hold exact zeros in that column, so the pivot search and
    /// the elimination stop there. A row exchange at step k swaps two rows below `reach[k]`,
    /// which stays below `reach` of every later column, so the bound holds throughout.
    reach: Vec<usize>,
}

impl Solver {
    /// A work space for `n` unknowns.
    pub fn new(n: usize) -> Solver {
        Solver {
            n,
            m: vec![Complex64::new(0.0, 0.0); n * n],
            rhs: vec![Complex64::new(0.0, 0.0); n],
            row_start: vec![0; n],
            row_end: vec![n; n],
            pivots: (0..n).collect(),
            lower_end: vec![0; n],
            reach: vec![n; n],
        }
    }

    /// Clears what the last load and solve left in the rows' spans.
    fn clear(&mut self) {
        let n = self.n;
        for r in 0..n {
            let (lo, hi) = (self.row_start[r], self.row_end[r]);
            if lo < hi {
                self.m[r * n + lo..r * n + hi].fill(Complex64::new(0.0, 0.0));
            }
        }
    }

    /// Loads `M(s) = G + s·C`, and the right-hand side `−(g_in + s·c_in)·v_in` (the input source).
    pub fn load(&mut self, a: &Assembled, s: Complex64, v_in: Complex64) {
        let n = self.n;
        self.load_rows(s, |r, k| (a.g[r * n + k], a.c[r * n + k]));
        input_drive(a, s, v_in, &mut self.rhs);
    }

    /// Loads the transpose `M(s)ᵀ` (for adjoint solves) and a zero right-hand side.
    pub fn load_transposed(&mut self, a: &Assembled, s: Complex64) {
        let n = self.n;
        self.load_rows(s, |r, k| (a.g[k * n + r], a.c[k * n + r]));
        self.rhs.fill(Complex64::new(0.0, 0.0));
    }

    /// Loads `g + s·c` for the entries `(g, c) = entry(row, column)`, and every row's span.
    fn load_rows(&mut self, s: Complex64, entry: impl Fn(usize, usize) -> (f64, f64)) {
        let n = self.n;
        let spans: Vec<(usize, usize)> = (0..n)
            .map(|r| {
                let used = |k: &usize| {
                    let (g, c) = entry(r, *k);
                    g != 0.0 || c != 0.0
                };
                let lo = (0..n).find(used).unwrap_or(n);
                (lo, (lo..n).rfind(used).map_or(lo, |k| k + 1))
            })
            .collect();
        self.load_spans(s, &spans, entry);
    }

    /// The span of columns outside which each row of `M(s) = G + s·C` is exactly zero, for
    /// [`Solver::load_in_spans`]: a board solved at many frequencies finds them once.
    pub fn spans_of(a: &Assembled) -> Vec<(usize, usize)> {
        let n = a.g_in.len();
        (0..n)
            .map(|r| {
                let used = |k: &usize| a.g[r * n + *k] != 0.0 || a.c[r * n + *k] != 0.0;
                let lo = (0..n).find(used).unwrap_or(n);
                (lo, (lo..n).rfind(used).map_or(lo, |k| k + 1))
            })
            .collect()
    }

    /// [`Solver::load`] with the row spans given ([`Solver::spans_of`] of the same `a`), so the
    /// load writes each row's span without searching for it; the loaded matrix is the same.
    pub fn load_in_spans(
        &mut self,
        a: &Assembled,
        spans: &[(usize, usize)],
        s: Complex64,
        v_in: Complex64,
    ) {
        let n = self.n;
        self.load_spans(s, spans, |r, k| (a.g[r * n + k], a.c[r * n + k]));
        input_drive(a, s, v_in, &mut self.rhs);
    }

    /// Loads `g + s·c` over each row's span `spans[row]`.
    fn load_spans(
        &mut self,
        s: Complex64,
        spans: &[(usize, usize)],
        entry: impl Fn(usize, usize) -> (f64, f64),
    ) {
        self.clear();
        let n = self.n;
        for (r, &(lo, hi)) in spans.iter().enumerate().take(n) {
            for k in lo..hi {
                let (g, c) = entry(r, k);
                self.m[r * n + k] = Complex64::new(g, 0.0) + s * c;
            }
            self.row_start[r] = lo;
            self.row_end[r] = hi;
        }
    }

    /// Mutable access to the right-hand side (to add injected currents after [`Solver::load`]).
    pub fn rhs_mut(&mut self) -> &mut [Complex64] {
        &mut self.rhs
    }

    /// Eliminates and back-substitutes. Returns the determinant of the loaded matrix; the solution
    /// is left in [`Solver::solution`]. A zero pivot returns a zero determinant and leaves the
    /// solution undefined (NaN).
    pub fn solve(&mut self) -> Complex64 {
        let n = self.n;
        let mut det = Complex64::new(1.0, 0.0);
        self.reach.fill(0);
        for r in 0..n {
            let start = self.row_start[r].min(n.saturating_sub(1));
            self.reach[start] = self.reach[start].max(r + 1);
        }
        for k in 1..n {
            self.reach[k] = self.reach[k].max(self.reach[k - 1]);
        }
        for k in 0..n {
            // Partial pivoting by the largest |·|₁ in column k (rows whose span misses column k
            // hold an exact zero there).
            let mut best = k;
            let mut best_mag = -1.0;
            let reach = self.reach[k].max(k + 1);
            for r in k..reach {
                if self.row_start[r] > k || self.row_end[r] <= k {
                    continue;
                }
                let v = self.m[r * n + k];
                let mag = v.re.abs() + v.im.abs();
                if mag > best_mag {
                    best_mag = mag;
                    best = r;
                }
            }
            if best_mag <= 0.0 || !best_mag.is_finite() {
                self.rhs
                    .iter_mut()
                    .for_each(|v| *v = Complex64::new(f64::NAN, f64::NAN));
                return Complex64::new(0.0, 0.0);
            }
            if best != k {
                let lo = self.row_start[k].min(self.row_start[best]);
                let hi = self.row_end[k].max(self.row_end[best]);
                for c in lo..hi {
                    self.m.swap(k * n + c, best * n + c);
                }
                self.rhs.swap(k, best);
                self.row_start.swap(k, best);
                self.row_end.swap(k, best);
                det = -det;
                // Row k's multipliers of the earlier columns moved to row `best`.
                for end in self.lower_end[..k].iter_mut() {
                    if *end > k && best >= *end {
                        *end = best + 1;
                    }
                }
            }
            self.pivots[k] = best;
            self.lower_end[k] = k + 1;
            let pivot = self.m[k * n + k];
            det *= pivot;
            let inv = 1.0 / pivot;
            let end_k = self.row_end[k].max(k + 1);
            for r in (k + 1)..reach {
                if self.row_start[r] > k || self.row_end[r] <= k {
                    continue;
                }
                let factor = self.m[r * n + k] * inv;
                // The multiplier stays where the eliminated entry was (the lower triangle is not
                // read by this solve), so that `solve_again` can replay the elimination.
                self.m[r * n + k] = factor;
                if factor.re == 0.0 && factor.im == 0.0 {
                    continue;
                }
                self.lower_end[k] = r + 1;
                let (upper, lower) = self.m.split_at_mut(r * n);
                let pivot_row = &upper[k * n + k + 1..k * n + end_k];
                let row = &mut lower[k + 1..end_k];
                for (dst, &v) in row.iter_mut().zip(pivot_row) {
                    *dst -= factor * v;
                }
                self.row_end[r] = self.row_end[r].max(end_k);
                let v = self.rhs[k];
                self.rhs[r] -= factor * v;
            }
        }
        for k in (0..n).rev() {
            let mut acc = self.rhs[k];
            for c in (k + 1)..self.row_end[k].max(k + 1) {
                acc -= self.m[k * n + c] * self.rhs[c];
            }
            self.rhs[k] = acc / self.m[k * n + k];
        }
        det
    }

    /// The solution after [`Solver::solve`].
    pub fn solution(&self) -> &[Complex64] {
        &self.rhs
    }

    /// Solves the matrix of the last [`Solver::solve`] for another right-hand side `b`, in place,
    /// from the factors that solve left (row exchanges, multipliers below the diagonal, the upper
    /// triangle): no new elimination. Call it only after a `solve` whose determinant was not zero.
    pub fn solve_again(&self, b: &mut [Complex64]) {
        let n = self.n;
        // The row exchanges moved whole rows, multipliers included, so they come first.
        for k in 0..n {
            b.swap(k, self.pivots[k]);
        }
        for k in 0..n {
            let v = b[k];
            if v.re == 0.0 && v.im == 0.0 {
                continue;
            }
            // Rows past `lower_end[k]` had no multiplier; rows before it that start after column
            // k hold an exact zero there.
            for r in (k + 1)..self.lower_end[k] {
                if self.row_start[r] <= k {
                    let factor = self.m[r * n + k];
                    b[r] -= factor * v;
                }
            }
        }
        for k in (0..n).rev() {
            let mut acc = b[k];
            for c in (k + 1)..self.row_end[k].max(k + 1) {
                acc -= self.m[k * n + c] * b[c];
            }
            b[k] = acc / self.m[k * n + k];
        }
    }
}

/// The right-hand side `−(g_in + s·c_in)·v_in` of the input source, into `out`.
pub fn input_drive(a: &Assembled, s: Complex64, v_in: Complex64, out: &mut [Complex64]) {
    for ((r, &g), &c) in out.iter_mut().zip(&a.g_in).zip(&a.c_in) {
        *r = -(Complex64::new(g, 0.0) + s * c) * v_in;
    }
}

/// Merges stage netlists (in signal order) into one board netlist with
/// [`crate::netlist::merge`], the one board merger.
///
/// # Errors
/// [`AnalysisError::BadNetlist`] when there are no stages or a stage's nodes are out of range.
pub fn merge_stages(stages: &[&StageNetlist]) -> Result<BoardNetlist, AnalysisError> {
    crate::netlist::merge(stages).map_err(AnalysisError::BadNetlist)
}

/// The transfer `V(output)/V(input)` of a compiled netlist at complex frequency `s` (rad/s).
///
/// # Errors
/// [`AnalysisError::Singular`] when the equations are singular at `s`.
pub fn transfer_at(
    compiled: &Compiled,
    assembled: &Assembled,
    solver: &mut Solver,
    s: Complex64,
) -> Result<Complex64, AnalysisError> {
    solver.load(assembled, s, Complex64::new(1.0, 0.0));
    let det = solver.solve();
    if det.re == 0.0 && det.im == 0.0 {
        return Err(AnalysisError::Singular(format!(
            "at s = {s}: a node without a DC path, a capacitor loop or an op amp without feedback"
        )));
    }
    Ok(solver.solution()[compiled.output_col])
}

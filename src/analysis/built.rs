//! The built board's frequency response: the one production path from a board to H(jω).
//!
//! The stages are merged into one netlist ([`merge_stages`], stage k's input is stage k−1's
//! output, so each stage loads the one before it), compiled once and solved at each frequency by
//! the banded solver of [`super::circuit`]. One solve gives the board's transfer, every stage's
//! output and the current drawn from the source, so the sweep, the stage levels, the slew need
//! and the input impedance all come from the same numbers. The dense nodal analysis in
//! `crate::mna` is the independent reference these solves are tested against; it is not used
//! here.

use super::circuit::{merge_stages, AnalysisError, Assembled, Compiled, Solver};
use crate::board::Board;
use crate::fmath;
use crate::netlist::{PartKind, StageNetlist};
use crate::opamp::OpAmp;
use num_complex::Complex64;
use std::f64::consts::PI;

/// A board compiled for repeated solves.
pub struct BoardSolver {
    compiled: Compiled,
    assembled: Assembled,
    solver: Solver,
    /// Solution column of each stage's output, in signal order.
    stage_cols: Vec<usize>,
    /// The op amps whose output is not their stage's output (the inner op amps of a
    /// multi-op-amp stage): stage index, reference and the column of the output pin.
    inner_cols: Vec<(usize, String, usize)>,
    /// The parts on the input node: admittance kind, value and the column of the other pin
    /// (`None` for ground).
    on_input: Vec<(PartKind, f64, Option<usize>)>,
    /// The complex frequency of the last solve, rad/s.
    last_s: Complex64,
    /// Each row's span of non-zero columns ([`Solver::spans_of`]), found once.
    spans: Vec<(usize, usize)>,
    /// The non-zero entries `(row, column, value)` of `C`, for the derivative's `C·x`.
    c_entries: Vec<(usize, usize, f64)>,
    /// Work space of [`BoardSolver::solve_with_slope`]'s second right-hand side.
    slope_rhs: Vec<Complex64>,
}

impl BoardSolver {
    /// Compiles the board of `stages` (signal order) with op amp `op`.
    ///
    /// # Errors
    /// [`AnalysisError::BadNetlist`] for a malformed netlist or a board without stages.
    pub fn new(stages: &[&StageNetlist], op: &OpAmp) -> Result<BoardSolver, AnalysisError> {
        let merged = merge_stages(stages)?;
        let compiled = Compiled::new(&merged.netlist, op)?;
        let assembled = compiled.assemble(&merged.netlist);
        let column = |node: usize| compiled.node_col.get(node).copied().flatten();
        let stage_cols = merged
            .stage_outputs
            .iter()
            .map(|&node| {
                column(node).ok_or_else(|| {
                    AnalysisError::BadNetlist(format!("stage output node {node} has no equation"))
                })
            })
            .collect::<Result<Vec<usize>, _>>()?;
        let net = &merged.netlist;
        let mut inner_cols = Vec::new();
        for (k, stage) in stages.iter().enumerate() {
            for p in stage.parts.iter().filter(|p| p.kind == PartKind::OpAmp) {
                if p.nodes.get(2).copied().flatten() == Some(stage.output) {
                    continue;
                }
                let merged_out = net
                    .parts
                    .iter()
                    .find(|q| q.kind == PartKind::OpAmp && q.reference == p.reference)
                    .and_then(|q| q.nodes.get(2).copied().flatten())
                    .and_then(column);
                if let Some(col) = merged_out {
                    inner_cols.push((k, p.reference.clone(), col));
                }
            }
        }
        let on_input = net
            .parts
            .iter()
            .filter(|p| p.kind != PartKind::OpAmp && p.nodes.len() == 2)
            .filter_map(|p| {
                let (a, b) = (p.nodes[0], p.nodes[1]);
                let other = match (a == Some(net.input), b == Some(net.input)) {
                    (true, false) => b,
                    (false, true) => a,
                    // A part with both pins on the input carries no current.
                    _ => return None,
                };
                Some((p.kind, p.value, other.and_then(column)))
            })
            .collect();
        let solver = Solver::new(compiled.n);
        let spans = Solver::spans_of(&assembled);
        let n = compiled.n;
        let c_entries = (0..n * n)
            .filter(|&i| assembled.c[i] != 0.0)
            .map(|i| (i / n, i % n, assembled.c[i]))
            .collect();
        Ok(BoardSolver {
            compiled,
            assembled,
            solver,
            stage_cols,
            inner_cols,
            on_input,
            last_s: Complex64::new(0.0, 0.0),
            spans,
            c_entries,
            slope_rhs: Vec::with_capacity(n),
        })
    }

    /// Compiles `board` with its own op amp.
    ///
    /// # Errors
    /// As [`BoardSolver::new`].
    pub fn of_board(board: &Board) -> Result<BoardSolver, AnalysisError> {
        let nets: Vec<&StageNetlist> = board.stages.iter().map(|s| &s.netlist).collect();
        BoardSolver::new(&nets, &board.op_amp)
    }

    /// Number of stages.
    pub fn n_stages(&self) -> usize {
        self.stage_cols.len()
    }

    /// Solves the board at `f_hz` (0 = DC) and returns V(out)/V(in).
    ///
    /// # Errors
    /// [`AnalysisError::Singular`] when the equations are singular there.
    pub fn solve_at(&mut self, f_hz: f64) -> Result<Complex64, AnalysisError> {
        let s = Complex64::new(0.0, 2.0 * PI * f_hz);
        self.last_s = s;
        self.solver
            .load_in_spans(&self.assembled, &self.spans, s, Complex64::new(1.0, 0.0));
        let det = self.solver.solve();
        if det.re == 0.0 && det.im == 0.0 {
            return Err(AnalysisError::Singular(format!(
                "at s = {s}: a node without a DC path, a capacitor loop or an op amp without feedback"
            )));
        }
        Ok(self.solver.solution()[self.compiled.output_col])
    }

    /// Solves the board at `f_hz` and returns V(out)/V(in) and its derivative with respect to
    /// the complex frequency, dH/ds (s). The derivative comes from the same factorization: with
    /// `M(s)·x = b(s)`, `M = G + s·C` and `b = −(g_in + s·c_in)`, differentiating gives
    /// `M·dx/ds = −c_in − C·x`, one more pair of triangular solves. The group delay is then
    /// `−Re(H'/H)` (`−d arg H/dω` with `dH/dω = j·dH/ds`).
    ///
    /// # Errors
    /// As [`BoardSolver::solve_at`].
    pub fn solve_with_slope(&mut self, f_hz: f64) -> Result<(Complex64, Complex64), AnalysisError> {
        let h = self.solve_at(f_hz)?;
        let x = self.solver.solution();
        // The right-hand side is built in a buffer kept between points (no allocation per point).
        let rhs = &mut self.slope_rhs;
        rhs.clear();
        rhs.extend(self.assembled.c_in.iter().map(|&c| Complex64::new(-c, 0.0)));
        for &(r, k, v) in &self.c_entries {
            rhs[r] -= x[k] * v;
        }
        self.solver.solve_again(rhs);
        Ok((h, rhs[self.compiled.output_col]))
    }

    /// The inner op amps (stage index, reference), in the order [`BoardSolver::inner_output`]
    /// takes them.
    pub fn inner_op_amps(&self) -> Vec<(usize, String)> {
        self.inner_cols
            .iter()
            .map(|(k, r, _)| (*k, r.clone()))
            .collect()
    }

    /// Inner op amp `i`'s output relative to the board input at the last solve.
    pub fn inner_output(&self, i: usize) -> Complex64 {
        self.inner_cols
            .get(i)
            .and_then(|&(_, _, c)| self.solver.solution().get(c).copied())
            .unwrap_or(Complex64::new(f64::NAN, 0.0))
    }

    /// Stage `k`'s output relative to the board input at the last solve.
    pub fn stage_output(&self, k: usize) -> Complex64 {
        self.stage_cols
            .get(k)
            .and_then(|&c| self.solver.solution().get(c).copied())
            .unwrap_or(Complex64::new(f64::NAN, 0.0))
    }

    /// |Z| seen by the source at the last solve, Ω: 1 V over the sum, over the parts on the
    /// input node, of `y·(V_in − V_other)`; NaN where the input draws no current.
    pub fn input_impedance_ohm(&self) -> f64 {
        let s = self.last_s;
        let solution = self.solver.solution();
        let current: Complex64 = self
            .on_input
            .iter()
            .map(|&(kind, value, col)| {
                let y = match kind {
                    PartKind::Capacitor => s * value,
                    _ => Complex64::new(1.0 / value, 0.0),
                };
                let v_other = col.map_or(Complex64::new(0.0, 0.0), |c| solution[c]);
                y * (Complex64::new(1.0, 0.0) - v_other)
            })
            .sum();
        if fmath::cnorm(current) > 0.0 {
            1.0 / fmath::cnorm(current)
        } else {
            f64::NAN
        }
    }
}

/// The built board on a frequency grid.
#[derive(Debug, Clone, PartialEq)]
pub struct BuiltSweep {
    /// Frequencies, Hz.
    pub freq_hz: Vec<f64>,
    /// V(out)/V(in) at each frequency.
    pub h: Vec<Complex64>,
    /// Each stage's output relative to the input, dB (`levels_db[stage][frequency]`).
    pub levels_db: Vec<Vec<f64>>,
    /// Each inner op amp's output relative to the input, dB, in the order of
    /// [`BoardSolver::inner_op_amps`] (`inner_db[op amp][frequency]`).
    pub inner_db: Vec<Vec<f64>>,
    /// |Z| seen by the source at the input, Ω (NaN where the input draws no current).
    pub z_in_ohm: Vec<f64>,
}

/// Solves `solver`'s board at every frequency of `freqs_hz`.
///
/// # Errors
/// [`AnalysisError::Singular`] at the first frequency where the equations are singular.
pub fn sweep(solver: &mut BoardSolver, freqs_hz: &[f64]) -> Result<BuiltSweep, AnalysisError> {
    let n_stages = solver.n_stages();
    let mut out = BuiltSweep {
        freq_hz: freqs_hz.to_vec(),
        h: Vec::with_capacity(freqs_hz.len()),
        levels_db: vec![Vec::with_capacity(freqs_hz.len()); n_stages],
        inner_db: vec![Vec::with_capacity(freqs_hz.len()); solver.inner_cols.len()],
        z_in_ohm: Vec::with_capacity(freqs_hz.len()),
    };
    for &f in freqs_hz {
        let h = solver.solve_at(f)?;
        out.h.push(h);
        out.z_in_ohm.push(solver.input_impedance_ohm());
        for (k, level) in out.levels_db.iter_mut().enumerate() {
            level.push(20.0 * fmath::log10(fmath::cnorm(solver.stage_output(k))));
        }
        for (j, level) in out.inner_db.iter_mut().enumerate() {
            level.push(20.0 * fmath::log10(fmath::cnorm(solver.inner_output(j))));
        }
    }
    Ok(out)
}

/// The maximum of `value(solver, f)` for f in `[lo_hz, hi_hz]`, by golden-section search in ln f
/// to a relative width of 10⁻⁶, starting from a bracket around a grid maximum. Returns `(f, value)`
/// of the best point seen (the bracket ends included), so a refined peak is never below the
/// grid's. A solve that fails counts as −∞.
pub fn refine_max(
    solver: &mut BoardSolver,
    lo_hz: f64,
    hi_hz: f64,
    mut value: impl FnMut(&mut BoardSolver, f64) -> f64,
) -> (f64, f64) {
    let mut eval = |solver: &mut BoardSolver, f: f64| {
        let v = value(solver, f);
        if v.is_nan() {
            f64::NEG_INFINITY
        } else {
            v
        }
    };
    let (mut a, mut b) = (fmath::ln(lo_hz), fmath::ln(hi_hz));
    let mut best = (lo_hz, eval(solver, lo_hz));
    let at_hi = eval(solver, hi_hz);
    if at_hi > best.1 {
        best = (hi_hz, at_hi);
    }
    if !(a.is_finite() && b.is_finite()) || b <= a {
        return best;
    }
    let ratio = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - ratio * (b - a);
    let mut d = a + ratio * (b - a);
    let mut fc = eval(solver, fmath::exp(c));
    let mut fd = eval(solver, fmath::exp(d));
    for _ in 0..60 {
        if b - a < 1e-6 {
            break;
        }
        if fc >= fd {
            b = d;
            d = c;
            fd = fc;
            c = b - ratio * (b - a);
            fc = eval(solver, fmath::exp(c));
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + ratio * (b - a);
            fd = eval(solver, fmath::exp(d));
        }
        for (x, v) in [(c, fc), (d, fd)] {
            if v > best.1 {
                best = (fmath::exp(x), v);
            }
        }
    }
    best
}

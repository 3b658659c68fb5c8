//! Step and impulse response of the built board, loaded, with overshoot, rise time (10–90 %) and
//! settling time (to 1 % and 0.1 %).
//!
//! Method: the stages are merged into one netlist ([`crate::netlist::merge`], each stage loads the
//! one before it and the op amps keep their output resistance and finite gain) and compiled into
//! the same real matrices `G + s·C` that the frequency analyses solve
//! ([`super::circuit::Compiled`]). In time this is the descriptor system
//! `C·x' + G·x = −(g_in·u + c_in·u')` for the input `u`. With the charge-like quantity
//! `q = C·x + c_in·u` it reads `q' = −G·x − g_in·u`, so the input's jump through a capacitor
//! enters `q` without a derivative of the step, and `q` is continuous at the step (`q(0+) = 0`
//! from rest).
//!
//! The system is integrated by TR-BDF2 (a trapezoidal stage to `t + γ·h`, `γ = 2 − √2`, then a
//! second-order backward difference over the step). Both stages solve with the one matrix
//! `C + (1 − 1/√2)·h·G`, factored once per step size as a real banded LU with partial pivoting,
//! and the scheme is L-stable: the op-amp poles, orders of magnitude faster than the filter's,
//! are damped in one step instead of ringing, and rows without a capacitor (op-amp constraints,
//! resistive nodes) are satisfied exactly at every step. The first step is a backward-Euler step,
//! which makes the algebraic part of the state consistent after the input's jump.
//!
//! Grids: the internal step is `h = 0.02/ω_max`, with `ω_max` the fastest filter pole (the stage
//! poles with an ideal op amp), but at most the output spacing and at most 1/2000 of the span
//! (and at least 1/400,000 of it). TR-BDF2's phase error on a mode `ω` is about `0.03·(ωh)²` of
//! its phase, so `ωh = 0.02` keeps the times within about 1e-5 (relative) and the overshoot within
//! about 1e-3 pp, below the digits the report shows. The run starts with steps of `h/2^L` (down
//! to a hundredth of the time constant of the fastest pole with the real op amp, at least `L = 10`
//! levels), 32 steps at each level before the step doubles, so a high-pass's initial spike is
//! resolved. The automatic span is at most 14 time constants of the slowest pole (its share then
//! is below 1e-6), at least 8 periods of the lowest pole; the run ends earlier, once the output
//! has stayed inside the 0.1 % band for two time constants of the slowest pole (at least two
//! periods of the lowest pole), and the plotted span is where it ended. The figures are taken on
//! the internal grid (level crossings on the parabola through three samples); the largest
//! excursion is then integrated again from the step before it with a step 16 times smaller.
//! The curves the page plots are the internal response interpolated linearly onto the
//! `n_points` output instants; the impulse response is the central difference of the step.
//!
//! Cost: each step is two banded forward/back substitutions with factors made once per step size
//! (packed flat, no allocation per step) and two products with the sparse `C`; `G·x` comes from the
//! stage equation itself.
//!
//! Accuracy (`tests/ngspice_step.rs`): against ngspice `.tran` of our own export (16 boards,
//! loaded, with the op amp's GBW, A0 and Rout) the overshoot agreed to 7e-4 pp and the times to
//! 6.4e-5 (the band-pass's 1 % settling); against `scipy.signal.step` of scipy's own prototypes
//! (ideal op amp, exact parts, up to the 14th-order Chebyshev) to 9e-4 pp and 2.8e-5; halving
//! every internal step moves the figures by less than the digits shown.

use super::circuit::{merge_stages, AnalysisError, Assembled, Compiled};
use super::poly::stage_transfer;
use crate::board::Board;
use crate::error::InputError;
use crate::fmath;
use crate::netlist::StageNetlist;
use crate::opamp::OpAmp;
use serde::Serialize;

/// Settings of the time response.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TimeSettings {
    /// Number of output samples, 100–200,000 (spaced `t_end / (n_points − 1)`); the figures come
    /// from the finer internal grid whatever this is.
    pub n_points: usize,
    /// End time, s; `None` = automatic: where the output has stayed inside the 0.1 % band for two
    /// time constants of the slowest pole, at most 14 of them, at least 8 periods of the lowest
    /// pole.
    pub t_end_s: Option<f64>,
}

impl Default for TimeSettings {
    /// 4000 points, automatic end time.
    fn default() -> Self {
        TimeSettings {
            n_points: 4000,
            t_end_s: None,
        }
    }
}

/// Figures of the step response.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StepFigures {
    /// Final value (DC gain of the loaded board), V/V.
    pub final_value: f64,
    /// Peak excursion beyond the final value, % of the final value; `None` when the final value is
    /// zero (high-pass, band-pass).
    pub overshoot_pct: Option<f64>,
    /// Time from 10 % to 90 % of the final value, s; `None` when the final value is zero.
    pub rise_time_s: Option<f64>,
    /// Time after which the output stays within 1 % of the step height, s (the step height is the
    /// final value, or the peak |y| when the final value is zero); `None` when it does not settle
    /// within the computed span.
    pub settling_1pct_s: Option<f64>,
    /// Same to 0.1 %.
    pub settling_01pct_s: Option<f64>,
}

/// Step and impulse response of the loaded board.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TimeResponse {
    /// Output sample instants, s.
    pub t_s: Vec<f64>,
    /// Step response, V per V of step.
    pub step: Vec<f64>,
    /// Impulse response, V per V·s of impulse (1/s), for t > 0.
    pub impulse: Vec<f64>,
    /// Weight of a Dirac impulse in the impulse response at t = 0 (the direct feed-through, the
    /// step's jump at 0+), V/V.
    pub impulse_direct: f64,
    /// Step figures (from the internal grid).
    pub figures: StepFigures,
    /// Number of internal integration steps.
    pub internal_steps: usize,
}

/// `γ` of TR-BDF2.
const GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;
/// The matrix coefficient of both TR-BDF2 stages, `γ/2 = (1 − γ)/(2 − γ) = 1 − 1/√2`.
const STAGE_COEF: f64 = 1.0 - std::f64::consts::FRAC_1_SQRT_2;
/// Internal step times the fastest filter pole, rad (see the module docs for the error bound).
const STEP_PER_POLE: f64 = 0.02;
/// Steps at each level of the graded start.
const STEPS_PER_LEVEL: usize = 32;
/// Fewest levels of the graded start (the first step is `h/2^10` or smaller).
const MIN_LEVELS: u32 = 10;
/// Most levels of the graded start.
const MAX_LEVELS: u32 = 40;
/// Fewest and most internal steps over the span.
const MIN_STEPS: f64 = 2000.0;
const MAX_STEPS: f64 = 400_000.0;
/// How much finer the step is when the largest excursion is integrated again.
const PEAK_REFINE: usize = 16;
/// The band of the early stop, fraction of the step height: the 0.1 % settling band.
const SETTLE_STOP_BAND: f64 = 1e-3;
/// Time constants of the slowest pole the response must stay in the band before the run stops.
const SETTLE_HOLD_TAUS: f64 = 2.0;
/// Periods of the lowest pole it must stay there, at least.
const SETTLE_HOLD_PERIODS: f64 = 2.0;
/// Fewest periods of the lowest pole in an automatic span.
const SPAN_MIN_PERIODS: f64 = 8.0;

/// A sparse real matrix in compressed rows: row r's entries are
/// `cols/vals[row_start[r]..row_start[r + 1]]`.
#[derive(Debug, Clone)]
struct Sparse {
    row_start: Vec<usize>,
    cols: Vec<usize>,
    vals: Vec<f64>,
}

impl Sparse {
    fn of_dense(m: &[f64], n: usize) -> Sparse {
        let mut out = Sparse {
            row_start: Vec::with_capacity(n + 1),
            cols: Vec::new(),
            vals: Vec::new(),
        };
        for r in 0..n {
            out.row_start.push(out.cols.len());
            for c in 0..n {
                if m[r * n + c] != 0.0 {
                    out.cols.push(c);
                    out.vals.push(m[r * n + c]);
                }
            }
        }
        out.row_start.push(out.cols.len());
        out
    }

    /// `out = self·x`.
    fn mul(&self, x: &[f64], out: &mut [f64]) {
        for (o, w) in out.iter_mut().zip(self.row_start.windows(2)) {
            *o = self.cols[w[0]..w[1]]
                .iter()
                .zip(&self.vals[w[0]..w[1]])
                .map(|(&c, &v)| v * x[c])
                .sum();
        }
    }
}

/// A real LU factorization with partial pivoting that keeps each row's span of columns (a board's
/// matrix is banded), for many solves with one matrix. The factors are packed once into flat
/// arrays so that a solve is a pass over contiguous memory with no allocation.
#[derive(Debug, Clone)]
struct BandedLu {
    n: usize,
    /// Row swapped with row k at elimination step k.
    pivots: Vec<usize>,
    /// Elimination step k's multipliers are `elim_rows/elim_vals[elim_start[k]..elim_start[k + 1]]`.
    elim_start: Vec<usize>,
    elim_rows: Vec<usize>,
    elim_vals: Vec<f64>,
    /// U's row k right of the diagonal, columns `k + 1 ..`, is
    /// `upper[upper_start[k]..upper_start[k + 1]]`.
    upper_start: Vec<usize>,
    upper: Vec<f64>,
    /// 1 / U's diagonal.
    inv_diag: Vec<f64>,
}

impl BandedLu {
    /// Factors `a + coef·b` (dense row-major `n×n`). `None` when a pivot is zero (singular).
    fn factor(a: &[f64], b: &[f64], coef: f64, n: usize) -> Option<BandedLu> {
        let mut m: Vec<f64> = a.iter().zip(b).map(|(x, y)| x + coef * y).collect();
        let mut row_start = vec![n; n];
        let mut row_end = vec![0; n];
        for r in 0..n {
            let row = &m[r * n..(r + 1) * n];
            if let Some(lo) = row.iter().position(|v| *v != 0.0) {
                row_start[r] = lo;
                row_end[r] = row.iter().rposition(|v| *v != 0.0).map_or(lo, |k| k + 1);
            }
        }
        let mut pivots = vec![0; n];
        let mut elim = vec![Vec::new(); n];
        for k in 0..n {
            let mut best = k;
            let mut best_mag = -1.0;
            for r in k..n {
                if row_start[r] > k || row_end[r] <= k {
                    continue;
                }
                let mag = m[r * n + k].abs();
                if mag > best_mag {
                    best_mag = mag;
                    best = r;
                }
            }
            if best_mag <= 0.0 || !best_mag.is_finite() {
                return None;
            }
            pivots[k] = best;
            if best != k {
                let lo = row_start[k].min(row_start[best]);
                let hi = row_end[k].max(row_end[best]);
                for c in lo..hi {
                    m.swap(k * n + c, best * n + c);
                }
                row_start.swap(k, best);
                row_end.swap(k, best);
            }
            let inv = 1.0 / m[k * n + k];
            let end_k = row_end[k].max(k + 1);
            for r in (k + 1)..n {
                if row_start[r] > k || row_end[r] <= k {
                    continue;
                }
                let factor = m[r * n + k] * inv;
                if factor == 0.0 {
                    continue;
                }
                let (upper, lower) = m.split_at_mut(r * n);
                let pivot_row = &upper[k * n + k + 1..k * n + end_k];
                for (dst, &v) in lower[k + 1..end_k].iter_mut().zip(pivot_row) {
                    *dst -= factor * v;
                }
                row_end[r] = row_end[r].max(end_k);
                elim[k].push((r, factor));
            }
        }
        let mut elim_start = Vec::with_capacity(n + 1);
        let (mut elim_rows, mut elim_vals) = (Vec::new(), Vec::new());
        let mut upper_start = Vec::with_capacity(n + 1);
        let mut upper = Vec::new();
        let mut inv_diag = Vec::with_capacity(n);
        for k in 0..n {
            elim_start.push(elim_rows.len());
            for &(r, f) in &elim[k] {
                elim_rows.push(r);
                elim_vals.push(f);
            }
            upper_start.push(upper.len());
            upper.extend_from_slice(&m[k * n + k + 1..k * n + row_end[k].max(k + 1)]);
            inv_diag.push(1.0 / m[k * n + k]);
        }
        elim_start.push(elim_rows.len());
        upper_start.push(upper.len());
        Some(BandedLu {
            n,
            pivots,
            elim_start,
            elim_rows,
            elim_vals,
            upper_start,
            upper,
            inv_diag,
        })
    }

    /// Solves in place: `x` holds the right-hand side on entry, the solution on return.
    fn solve(&self, x: &mut [f64]) {
        let n = self.n;
        for k in 0..n {
            x.swap(k, self.pivots[k]);
            let v = x[k];
            if v != 0.0 {
                let span = self.elim_start[k]..self.elim_start[k + 1];
                for (&r, &f) in self.elim_rows[span.clone()]
                    .iter()
                    .zip(&self.elim_vals[span])
                {
                    x[r] -= f * v;
                }
            }
        }
        for k in (0..n).rev() {
            let row = &self.upper[self.upper_start[k]..self.upper_start[k + 1]];
            let acc = row
                .iter()
                .zip(&x[k + 1..k + 1 + row.len()])
                .fold(x[k], |acc, (u, xc)| acc - u * xc);
            x[k] = acc * self.inv_diag[k];
        }
    }
}

/// The state of the integration at one instant.
#[derive(Debug, Clone)]
struct State {
    t: f64,
    x: Vec<f64>,
    q: Vec<f64>,
    /// `q' = −G·x − g_in` (unit step input).
    f: Vec<f64>,
}

/// The loaded board's equations for a unit step, with the work space of the integrator.
struct Integrator<'a> {
    a: &'a Assembled,
    n: usize,
    g: Sparse,
    c: Sparse,
    /// Factorizations by step size (bit pattern of h).
    lus: Vec<(u64, BandedLu)>,
    rhs: Vec<f64>,
    tmp: Vec<f64>,
}

fn singular() -> AnalysisError {
    AnalysisError::Singular(
        "the time-step matrix C + h·G is singular: a node without a DC path, a capacitor loop or \
         an op amp without feedback"
            .into(),
    )
}

impl<'a> Integrator<'a> {
    fn new(a: &'a Assembled, n: usize) -> Integrator<'a> {
        Integrator {
            a,
            n,
            g: Sparse::of_dense(&a.g, n),
            c: Sparse::of_dense(&a.c, n),
            lus: Vec::new(),
            rhs: vec![0.0; n],
            tmp: vec![0.0; n],
        }
    }

    /// The factorization of `C + coef·h·G`, made once per distinct product.
    fn lu(&mut self, coef_h: f64) -> Result<usize, AnalysisError> {
        let key = coef_h.to_bits();
        if let Some(i) = self.lus.iter().position(|(k, _)| *k == key) {
            return Ok(i);
        }
        let lu = BandedLu::factor(&self.a.c, &self.a.g, coef_h, self.n).ok_or_else(singular)?;
        self.lus.push((key, lu));
        Ok(self.lus.len() - 1)
    }

    /// Fills `q = C·x + c_in` and `f = −G·x − g_in` of `s` from its `x`.
    fn complete(&mut self, s: &mut State) {
        self.c.mul(&s.x, &mut s.q);
        for (q, ci) in s.q.iter_mut().zip(&self.a.c_in) {
            *q += ci;
        }
        self.g.mul(&s.x, &mut s.f);
        for (f, gi) in s.f.iter_mut().zip(&self.a.g_in) {
            *f = -*f - gi;
        }
    }

    /// A state at rest before the step, at t = 0.
    fn rest(&self) -> State {
        State {
            t: 0.0,
            x: vec![0.0; self.n],
            q: vec![0.0; self.n],
            f: vec![0.0; self.n],
        }
    }

    /// One backward-Euler step of size `h` from rest (q = 0) into `out`:
    /// `(C + h·G)·x = −h·g_in − c_in`.
    fn euler_from_rest(&mut self, h: f64, out: &mut State) -> Result<(), AnalysisError> {
        let i = self.lu(h)?;
        for ((r, gi), ci) in out.x.iter_mut().zip(&self.a.g_in).zip(&self.a.c_in) {
            *r = -h * gi - ci;
        }
        self.lus[i].1.solve(&mut out.x);
        out.t = h;
        self.complete(out);
        Ok(())
    }

    /// One TR-BDF2 step of size `h` from `s` into `out`.
    fn step(&mut self, h: f64, s: &State, out: &mut State) -> Result<(), AnalysisError> {
        let coef = STAGE_COEF * h;
        let i = self.lu(coef)?;
        // Trapezoidal stage to t + γh: (C + coef·G)·x_g = q_n + coef·f_n − coef·g_in − c_in.
        for k in 0..self.n {
            self.rhs[k] = s.q[k] + coef * (s.f[k] - self.a.g_in[k]) - self.a.c_in[k];
        }
        self.lus[i].1.solve(&mut self.rhs);
        // q_g = C·x_g + c_in.
        self.c.mul(&self.rhs, &mut self.tmp);
        let w1 = 1.0 / (GAMMA * (2.0 - GAMMA));
        let w0 = (1.0 - GAMMA) * (1.0 - GAMMA) / (GAMMA * (2.0 - GAMMA));
        // BDF2 stage: (C + coef·G)·x = w1·q_g − w0·q_n − coef·g_in − c_in.
        for k in 0..self.n {
            let q_g = self.tmp[k] + self.a.c_in[k];
            out.x[k] = w1 * q_g - w0 * s.q[k] - coef * self.a.g_in[k] - self.a.c_in[k];
        }
        // Keep the right-hand side: the BDF2 equation gives `G·x` without a product with G.
        out.f.copy_from_slice(&out.x);
        self.lus[i].1.solve(&mut out.x);
        out.t = s.t + h;
        // q = C·x + c_in; from (C + coef·G)·x = r: G·x = (r − C·x)/coef, so
        // f = −G·x − g_in = (q − c_in − r)/coef − g_in.
        self.c.mul(&out.x, &mut out.q);
        let inv = 1.0 / coef;
        for k in 0..self.n {
            let cx = out.q[k];
            out.q[k] = cx + self.a.c_in[k];
            out.f[k] = (cx - out.f[k]) * inv - self.a.g_in[k];
        }
        Ok(())
    }
}

/// Pole scales of the board that set the grids, rad/s.
struct Scales {
    /// Fastest filter pole (ideal op amp).
    fastest_filter: f64,
    /// Fastest pole with the real op amp.
    fastest: f64,
    /// Smallest decay rate −Re p.
    slowest_decay: f64,
    /// Smallest |p|.
    lowest: f64,
}

fn scales(stages: &[&StageNetlist], op: &OpAmp) -> Result<Scales, AnalysisError> {
    let mut out = Scales {
        fastest_filter: 0.0,
        fastest: 0.0,
        slowest_decay: f64::INFINITY,
        lowest: f64::INFINITY,
    };
    for net in stages {
        for p in stage_transfer(net, op)?.poles()? {
            if !(p.re < 0.0) {
                return Err(AnalysisError::Singular(format!(
                    "the cascade has an unstable pole at {:.4e} {:+.4e}j rad/s",
                    p.re, p.im
                )));
            }
            out.fastest = out.fastest.max(fmath::cnorm(p));
            out.slowest_decay = out.slowest_decay.min(-p.re);
            out.lowest = out.lowest.min(fmath::cnorm(p));
        }
        for p in stage_transfer(net, &OpAmp::ideal())?.poles()? {
            out.fastest_filter = out.fastest_filter.max(fmath::cnorm(p));
        }
    }
    if !out.slowest_decay.is_finite() {
        out.slowest_decay = 1.0;
        out.lowest = 1.0;
    }
    if !(out.fastest_filter > 0.0) {
        out.fastest_filter = out.fastest.max(out.lowest);
    }
    out.fastest = out.fastest.max(out.fastest_filter);
    Ok(out)
}

/// The internal response: instants and outputs, and the largest excursions refined.
struct Fine {
    t: Vec<f64>,
    y: Vec<f64>,
    /// Largest `y/final` (with a final value) and largest `|y|`, each refined.
    peak_norm: f64,
    peak_abs: f64,
    steps: usize,
}

/// Integrates the unit step of `compiled`/`assembled` to `t_end` with main step `h`.
fn integrate(
    compiled: &Compiled,
    assembled: &Assembled,
    scales: &Scales,
    h: f64,
    t_end: f64,
    final_value: f64,
    settle_stop: bool,
) -> Result<Fine, AnalysisError> {
    let n = compiled.n;
    let out_col = compiled.output_col;
    let mut integ = Integrator::new(assembled, n);
    // Levels of the graded start: from a hundredth of the fastest time constant (real op amp).
    let h_start = (STEP_PER_POLE / scales.fastest).min(h);
    let levels = (fmath::log2(h / h_start).ceil().max(0.0) as u32).clamp(MIN_LEVELS, MAX_LEVELS);
    let sign = if final_value != 0.0 {
        final_value.signum() / final_value.abs()
    } else {
        0.0
    };
    let mut prev = integ.rest();
    let mut cur = integ.rest();
    let h0 = h * fmath::powi(0.5, levels as i32);
    integ.euler_from_rest(h0, &mut cur)?;
    let capacity = ((t_end / h) as usize).saturating_add(STEPS_PER_LEVEL * levels as usize + 8);
    let mut t = Vec::with_capacity(capacity.min(1 << 22));
    let mut y = Vec::with_capacity(capacity.min(1 << 22));
    // The jump at 0+ (the direct feed-through) is the first internal value.
    t.push(0.0);
    y.push(cur.x[out_col]);
    t.push(cur.t);
    y.push(cur.x[out_col]);
    // Checkpoints: the state before the largest excursion, and the step that reached it.
    let mut best_norm = (f64::NEG_INFINITY, None::<(State, f64)>);
    let mut best_abs = (cur.x[out_col].abs(), None::<(State, f64)>);
    if sign != 0.0 {
        best_norm.0 = cur.x[out_col] * sign;
    }
    let mut steps = 1usize;
    // The early stop: the last instant outside the 0.1 % band, and how long the response must then
    // stay inside it (two time constants of the slowest pole, at least two periods of the
    // lowest pole) before the run ends.
    let hold = (SETTLE_HOLD_TAUS / scales.slowest_decay)
        .max(SETTLE_HOLD_PERIODS * std::f64::consts::TAU / scales.lowest);
    let t_min = SPAN_MIN_PERIODS * std::f64::consts::TAU / scales.lowest;
    let mut last_out = 0.0f64;
    let mut running_abs = best_abs.0;
    // The graded start: STEPS_PER_LEVEL steps at each of h/2^L … h/2, then a whole number of
    // steps of one size (about h) to t_end, so that the whole run uses L + 1 factorizations.
    let mut schedule: Vec<(f64, usize)> = (0..levels)
        .map(|j| (h0 * fmath::powi(2.0, j as i32), STEPS_PER_LEVEL))
        .collect();
    let graded: f64 = h0 + schedule.iter().map(|&(hj, k)| hj * k as f64).sum::<f64>();
    if graded < t_end {
        let left = t_end - graded;
        let n_main = (left / h).ceil().max(1.0);
        schedule.push((left / n_main, n_main as usize));
    }
    'run: for (h_now, n_steps) in schedule {
        for _ in 0..n_steps {
            if cur.t >= t_end * (1.0 - 1e-12) {
                break 'run;
            }
            std::mem::swap(&mut prev, &mut cur);
            integ.step(h_now, &prev, &mut cur)?;
            steps += 1;
            let v = cur.x[out_col];
            if !v.is_finite() {
                return Err(AnalysisError::NoConvergence(
                    "the step response grew without bound (an unstable loaded board)".into(),
                ));
            }
            t.push(cur.t);
            y.push(v);
            if sign != 0.0 && v * sign > best_norm.0 {
                best_norm = (v * sign, Some((prev.clone(), h_now)));
            }
            if v.abs() > best_abs.0 {
                best_abs = (v.abs(), Some((prev.clone(), h_now)));
            }
            if settle_stop {
                running_abs = running_abs.max(v.abs());
                let out_of_band = if sign != 0.0 {
                    (v * sign - 1.0).abs() > SETTLE_STOP_BAND
                } else {
                    v.abs() > SETTLE_STOP_BAND * running_abs
                };
                if out_of_band {
                    last_out = cur.t;
                } else if cur.t >= t_min && cur.t - last_out >= hold {
                    break 'run;
                }
            }
        }
    }
    // Integrate again over the two steps around each largest excursion with a finer step.
    let mut refine = |best: (f64, Option<(State, f64)>), metric: &dyn Fn(f64) -> f64| {
        let (mut peak, check) = best;
        if let Some((start, h_peak)) = check {
            let hf = h_peak / PEAK_REFINE as f64;
            let mut a = start.clone();
            let mut b = start;
            for _ in 0..2 * PEAK_REFINE {
                integ.step(hf, &a, &mut b)?;
                peak = peak.max(metric(b.x[out_col]));
                std::mem::swap(&mut a, &mut b);
            }
        }
        Ok::<f64, AnalysisError>(peak)
    };
    let peak_norm = if sign != 0.0 {
        refine(best_norm, &|v| v * sign)?
    } else {
        f64::NAN
    };
    let peak_abs = refine(best_abs, &|v: f64| v.abs())?;
    Ok(Fine {
        t,
        y,
        peak_norm,
        peak_abs,
        steps,
    })
}

/// Step and impulse response of the board of `stages` (signal order, merged and loaded) with op
/// amp `op`.
///
/// # Errors
/// `points` when `n_points` is outside 100–200,000; `tend` when the end time is not positive;
/// [`AnalysisError::Singular`] for a stage without a proper, stable transfer function or a
/// singular time-step matrix; [`AnalysisError::NoConvergence`] when the loaded board is unstable.
pub fn stages_response(
    stages: &[&StageNetlist],
    op: &OpAmp,
    settings: &TimeSettings,
) -> Result<TimeResponse, AnalysisError> {
    if !(100..=200_000).contains(&settings.n_points) {
        return Err(AnalysisError::Input(InputError::new(
            "points",
            format!("{} time points; accepted 100 to 200000", settings.n_points),
        )));
    }
    if stages.is_empty() {
        return Err(AnalysisError::BadNetlist("the board has no stages".into()));
    }
    let sc = scales(stages, op)?;
    let t_end = match settings.t_end_s {
        Some(t) if t.is_finite() && t > 0.0 => t,
        Some(t) => {
            return Err(AnalysisError::Input(InputError::new(
                "tend",
                format!("end time {t} s; accepted a positive time"),
            )))
        }
        None => (14.0 / sc.slowest_decay).max(8.0 * 2.0 * std::f64::consts::PI / sc.lowest),
    };
    let merged = merge_stages(stages)?;
    let compiled = Compiled::new(&merged.netlist, op)?;
    let assembled = compiled.assemble(&merged.netlist);
    // The final value is the loaded board's DC gain.
    let mut solver = super::circuit::Solver::new(compiled.n);
    let final_value = super::circuit::transfer_at(
        &compiled,
        &assembled,
        &mut solver,
        num_complex::Complex64::new(0.0, 0.0),
    )?
    .re;
    let n_points = settings.n_points;
    let dt_out = t_end / (n_points - 1) as f64;
    let h = (STEP_PER_POLE / sc.fastest_filter)
        .min(dt_out)
        .min(t_end / MIN_STEPS)
        .max(t_end / MAX_STEPS);
    let fine = integrate(
        &compiled,
        &assembled,
        &sc,
        h,
        t_end,
        final_value,
        settings.t_end_s.is_none(),
    )?;
    // With the early stop the span ends where the run did.
    let t_end = fine.t.last().copied().unwrap_or(t_end).min(t_end);
    let dt_out = t_end / (n_points - 1) as f64;
    let figures = figures_of(&fine, final_value);
    // Output samples: linear interpolation of the internal response; the impulse response is the
    // central difference of the internal step response.
    let slope = |i: usize| -> f64 {
        let lo = i.saturating_sub(1).max(1);
        let hi = (i + 1).min(fine.t.len() - 1);
        if hi > lo {
            (fine.y[hi] - fine.y[lo]) / (fine.t[hi] - fine.t[lo])
        } else {
            0.0
        }
    };
    let mut t_s = Vec::with_capacity(n_points);
    let mut step = Vec::with_capacity(n_points);
    let mut impulse = Vec::with_capacity(n_points);
    let mut seg = 1usize;
    for k in 0..n_points {
        let tk = k as f64 * dt_out;
        while seg + 1 < fine.t.len() && fine.t[seg] < tk {
            seg += 1;
        }
        let (t0, t1) = (fine.t[seg - 1], fine.t[seg]);
        let frac = if t1 > t0 {
            ((tk - t0) / (t1 - t0)).clamp(0.0, 1.0)
        } else {
            0.0
        };
        t_s.push(tk);
        step.push(fine.y[seg - 1] + frac * (fine.y[seg] - fine.y[seg - 1]));
        impulse.push(slope(seg - 1) + frac * (slope(seg) - slope(seg - 1)));
    }
    let impulse_direct = fine.y[0];
    Ok(TimeResponse {
        t_s,
        step,
        impulse,
        impulse_direct,
        figures,
        internal_steps: fine.steps,
    })
}

/// Step and impulse response of `board` (merged and loaded, with its own op amp).
///
/// # Errors
/// As [`stages_response`].
pub fn board_response(
    board: &Board,
    settings: &TimeSettings,
) -> Result<TimeResponse, AnalysisError> {
    let nets: Vec<&StageNetlist> = board.stages.iter().map(|s| &s.netlist).collect();
    stages_response(&nets, &board.op_amp, settings)
}

fn figures_of(fine: &Fine, fv: f64) -> StepFigures {
    figures_with_peaks(
        &fine.t,
        &fine.y,
        fv,
        Some(fine.peak_norm),
        Some(fine.peak_abs),
    )
}

/// The instant where `y` crosses `level` between samples i−1 and i: the root of the parabola
/// through those two samples and the next one (the one before at the end), from the linear
/// interpolation by Newton's method. The parabola's error falls with the cube of the spacing
/// instead of the square, which matters where the crossing is near an extremum (a settling
/// band's last exit); the linear value is kept when the parabola has no root in the interval.
fn cross_time(t: &[f64], y: &[f64], i: usize, level: f64) -> f64 {
    if i == 0 {
        return t[0];
    }
    let (y0, y1) = (y[i - 1], y[i]);
    let frac = if y1 != y0 {
        (level - y0) / (y1 - y0)
    } else {
        0.0
    };
    let (ta, tb) = (t[i - 1], t[i]);
    let linear = ta + frac.clamp(0.0, 1.0) * (tb - ta);
    let k = if i + 1 < t.len() {
        i + 1
    } else if i >= 2 {
        i - 2
    } else {
        return linear;
    };
    let (tc, yc) = (t[k], y[k]);
    if !(tb > ta) || tc == ta || tc == tb {
        return linear;
    }
    // Newton form: p(s) = y0 + d1·(s − ta) + d2·(s − ta)·(s − tb).
    let d1 = (y1 - y0) / (tb - ta);
    let d2 = ((yc - y0) / (tc - ta) - d1) / (tc - tb);
    let mut s = linear;
    for _ in 0..4 {
        let value = y0 + d1 * (s - ta) + d2 * (s - ta) * (s - tb) - level;
        let slope = d1 + d2 * (2.0 * s - ta - tb);
        if slope == 0.0 || !slope.is_finite() {
            return linear;
        }
        s -= value / slope;
    }
    if s.is_finite() && s >= ta && s <= tb {
        s
    } else {
        linear
    }
}

/// Overshoot, rise and settling figures of a sampled step response with final value `fv` (the
/// peak by a parabola through the largest sample and its neighbours).
pub fn step_figures(t: &[f64], y: &[f64], fv: f64) -> StepFigures {
    figures_with_peaks(t, y, fv, None, None)
}

/// [`step_figures`] with the largest `y/fv` and the largest `|y|` given (refined elsewhere);
/// a given peak below the samples' is not used.
fn figures_with_peaks(
    t: &[f64],
    y: &[f64],
    fv: f64,
    peak_norm: Option<f64>,
    peak_abs_refined: Option<f64>,
) -> StepFigures {
    let sampled_abs = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let peak_abs = peak_abs_refined
        .filter(|p| p.is_finite())
        .map_or(sampled_abs, |p| p.max(sampled_abs));
    let has_final = fv.abs() > 1e-9 * peak_abs.max(1e-300);
    // Work with the response normalized to a positive final value.
    let (yn, height): (Vec<f64>, f64) = if has_final {
        (y.iter().map(|v| v / fv).collect(), 1.0)
    } else {
        (y.to_vec(), peak_abs)
    };
    let target = if has_final { 1.0 } else { 0.0 };
    let settle = |tol: f64| -> Option<f64> {
        let band = tol * height;
        let last_out = yn.iter().rposition(|v| (v - target).abs() > band)?;
        if last_out + 1 >= yn.len() {
            return None;
        }
        let i = last_out + 1;
        let level = if yn[last_out] > target {
            target + band
        } else {
            target - band
        };
        Some(cross_time(t, &yn, i, level))
    };
    let (overshoot, rise) = if has_final {
        // Peak by a parabola through the largest sample and its neighbours.
        let (imax, &vmax) =
            yn.iter()
                .enumerate()
                .fold((0, &f64::NEG_INFINITY), |(bi, bv), (i, v)| {
                    if v > bv {
                        (i, v)
                    } else {
                        (bi, bv)
                    }
                });
        let peak = if imax > 0 && imax + 1 < yn.len() {
            let (a, b, c) = (yn[imax - 1], vmax, yn[imax + 1]);
            let den = a - 2.0 * b + c;
            if den < 0.0 {
                b - (a - c) * (a - c) / (8.0 * den)
            } else {
                b
            }
        } else {
            vmax
        };
        let peak = match peak_norm.filter(|p| p.is_finite()) {
            Some(p) => p.max(vmax),
            None => peak,
        };
        let overshoot = ((peak - 1.0) * 100.0).max(0.0);
        let i10 = yn.iter().position(|&v| v >= 0.1);
        let i90 = yn.iter().position(|&v| v >= 0.9);
        let rise = match (i10, i90) {
            (Some(a), Some(b)) => Some(cross_time(t, &yn, b, 0.9) - cross_time(t, &yn, a, 0.1)),
            _ => None,
        };
        (Some(overshoot), rise)
    } else {
        (None, None)
    };
    StepFigures {
        final_value: fv,
        overshoot_pct: overshoot,
        rise_time_s: rise,
        settling_1pct_s: settle(0.01),
        settling_01pct_s: settle(0.001),
    }
}

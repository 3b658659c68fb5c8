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

mod figures;
mod tr_bdf2;

use figures::figures_with_peaks;
pub use figures::step_figures;
use tr_bdf2::{Integrator, State};

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

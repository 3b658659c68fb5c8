//! Step and impulse response of the built cascade, with overshoot, rise time (10–90 %) and
//! settling time (to 1 % and 0.1 %).
//!
//! Method: each stage's transfer function (op amp included, [`super::poly::stage_transfer`]) is
//! written as a state-space system in controllable canonical form, in the dimensionless time
//! `τ = ω_t·t`; the stages are chained into one system (stage k's output drives stage k+1), and the
//! system is advanced by its exact zero-order-hold discretization `x_{n+1} = Φ·x_n + Γ·u_n` with
//! `[Φ Γ; 0 1] = exp([A B; 0 0]·Δτ)` (matrix exponential by scaling and squaring of a Taylor
//! series). For a step input this is exact at the sample instants (no integration error), and it
//! stays stable however far apart the slow filter poles and the fast op-amp poles are. No partial
//! fractions are formed, so coincident poles (critically damped, Linkwitz-Riley) are no problem.
//! The impulse response is `C·exp(Aτ)·B` sampled the same way (a direct feed-through D·δ(t),
//! present only with an ideal op amp and a high-pass, is reported separately).
//!
//! As in the tolerance study, the cascade is the product of the stage transfer functions (each
//! stage unloaded); `tests/ngspice_analysis.rs` compares with a transient analysis of the whole
//! exported board.

use super::circuit::AnalysisError;
use super::poly::{stage_transfer, Rational};
use crate::board::Board;
use crate::error::InputError;
use crate::fmath;
use crate::netlist::StageNetlist;
use crate::opamp::OpAmp;
use num_complex::Complex64;
use serde::Serialize;

/// Settings of the time response.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TimeSettings {
    /// Number of samples, 100–200,000 (the time step is `t_end / (n_points − 1)`).
    pub n_points: usize,
    /// End time, s; `None` = 14 time constants of the slowest pole, at least 8 periods of the
    /// lowest-frequency pole pair.
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
    /// Final value (DC gain of the cascade), V/V.
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

/// Step and impulse response of a cascade.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TimeResponse {
    /// Sample instants, s.
    pub t_s: Vec<f64>,
    /// Step response, V per V of step.
    pub step: Vec<f64>,
    /// Impulse response, V per V·s of impulse (1/s).
    pub impulse: Vec<f64>,
    /// Weight of a Dirac impulse in the impulse response at t = 0 (the direct feed-through), V/V.
    pub impulse_direct: f64,
    /// Step figures.
    pub figures: StepFigures,
}

/// A real state-space system `x' = A·x + B·u, y = C·x + D·u` (dimensionless time).
#[derive(Debug, Clone, PartialEq)]
struct StateSpace {
    n: usize,
    a: Vec<f64>,
    b: Vec<f64>,
    c: Vec<f64>,
    d: f64,
}

/// Controllable canonical form of N(s)/D(s) (ascending coefficients in the scaled variable).
fn canonical(num: &[f64], den: &[f64]) -> Result<StateSpace, AnalysisError> {
    let n = den.iter().rposition(|&v| v != 0.0).unwrap_or(0);
    let lead = den[n];
    if lead == 0.0 {
        return Err(AnalysisError::Singular(
            "a stage denominator is zero".into(),
        ));
    }
    let a_coef: Vec<f64> = den[..=n].iter().map(|v| v / lead).collect();
    let mut b_coef: Vec<f64> = num.iter().map(|v| v / lead).collect();
    let deg_n = b_coef.iter().rposition(|&v| v != 0.0).unwrap_or(0);
    if deg_n > n {
        return Err(AnalysisError::Singular(
            "a stage transfer function is improper (numerator degree above denominator)".into(),
        ));
    }
    b_coef.resize(n + 1, 0.0);
    let d = b_coef[n];
    let c: Vec<f64> = (0..n).map(|i| b_coef[i] - d * a_coef[i]).collect();
    let mut a = vec![0.0; n * n];
    for i in 0..n.saturating_sub(1) {
        a[i * n + i + 1] = 1.0;
    }
    if n > 0 {
        for j in 0..n {
            a[(n - 1) * n + j] = -a_coef[j];
        }
    }
    let mut b = vec![0.0; n];
    if n > 0 {
        b[n - 1] = 1.0;
    }
    Ok(StateSpace { n, a, b, c, d })
}

/// Chains systems: the output of each drives the next.
fn chain(stages: &[StateSpace]) -> StateSpace {
    let n: usize = stages.iter().map(|s| s.n).sum();
    let mut a = vec![0.0; n * n];
    let mut b = vec![0.0; n];
    // u_k = L·x + M·u.
    let mut l = vec![0.0; n];
    let mut m = 1.0;
    let mut off = 0;
    for s in stages {
        for i in 0..s.n {
            for j in 0..s.n {
                a[(off + i) * n + off + j] = s.a[i * s.n + j];
            }
            for j in 0..n {
                a[(off + i) * n + j] += s.b[i] * l[j];
            }
            b[off + i] = s.b[i] * m;
        }
        // y_k = C_k x_k + D_k (L x + M u).
        for v in l.iter_mut() {
            *v *= s.d;
        }
        for i in 0..s.n {
            l[off + i] += s.c[i];
        }
        m *= s.d;
        off += s.n;
    }
    StateSpace {
        n,
        a,
        b,
        c: l,
        d: m,
    }
}

fn mat_mul(x: &[f64], y: &[f64], n: usize) -> Vec<f64> {
    let mut out = vec![0.0; n * n];
    for i in 0..n {
        for k in 0..n {
            let v = x[i * n + k];
            if v == 0.0 {
                continue;
            }
            for j in 0..n {
                out[i * n + j] += v * y[k * n + j];
            }
        }
    }
    out
}

/// exp(M) for a dense n×n matrix: scale to ‖M‖∞ ≤ 1/2, Taylor series to rounding, square back.
pub fn expm(m: &[f64], n: usize) -> Vec<f64> {
    let norm = (0..n)
        .map(|i| (0..n).map(|j| m[i * n + j].abs()).sum::<f64>())
        .fold(0.0f64, f64::max);
    let mut squarings = 0u32;
    let mut scale = 1.0;
    while norm * scale > 0.5 && squarings < 200 {
        scale *= 0.5;
        squarings += 1;
    }
    let ms: Vec<f64> = m.iter().map(|v| v * scale).collect();
    let mut result = vec![0.0; n * n];
    for i in 0..n {
        result[i * n + i] = 1.0;
    }
    let mut term = result.clone();
    for k in 1..=30 {
        term = mat_mul(&term, &ms, n);
        let inv = 1.0 / k as f64;
        term.iter_mut().for_each(|v| *v *= inv);
        let mut small = true;
        for (r, t) in result.iter_mut().zip(&term) {
            *r += t;
            if t.abs() > 1e-18 * r.abs().max(1e-300) {
                small = false;
            }
        }
        if small {
            break;
        }
    }
    for _ in 0..squarings {
        result = mat_mul(&result, &result, n);
    }
    result
}

/// The step and impulse response of a cascade of rational functions (rad/s).
///
/// # Errors
/// `points` when `n_points` is outside 100–200,000; `tend` when the end time is not positive;
/// [`AnalysisError::Singular`] for a stage without a proper, stable transfer function.
pub fn cascade_response(
    stages: &[Rational],
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
    // Slowest and lowest poles set the span and the time scale.
    let mut slowest_decay = f64::INFINITY;
    let mut lowest_mag = f64::INFINITY;
    for r in stages {
        for p in r.poles()? {
            if p.re >= 0.0 {
                return Err(AnalysisError::Singular(format!(
                    "the cascade has an unstable pole at {:.4e} {:+.4e}j rad/s",
                    p.re, p.im
                )));
            }
            slowest_decay = slowest_decay.min(-p.re);
            lowest_mag = lowest_mag.min(fmath::cnorm(p));
        }
    }
    if !slowest_decay.is_finite() {
        slowest_decay = 1.0;
        lowest_mag = 1.0;
    }
    let w_t = lowest_mag;
    let t_end = match settings.t_end_s {
        Some(t) if t.is_finite() && t > 0.0 => t,
        Some(t) => {
            return Err(AnalysisError::Input(InputError::new(
                "tend",
                format!("end time {t} s; accepted a positive time"),
            )))
        }
        None => (14.0 / slowest_decay).max(8.0 * 2.0 * std::f64::consts::PI / lowest_mag),
    };
    let systems: Vec<StateSpace> = stages
        .iter()
        .map(|r| {
            let s = r.with_scale(w_t);
            canonical(&s.num.c, &s.den.c)
        })
        .collect::<Result<_, _>>()?;
    let sys = chain(&systems);
    let n = sys.n;
    let n_points = settings.n_points;
    let dtau = t_end * w_t / (n_points - 1) as f64;
    // Augmented exponential for the zero-order hold.
    let na = n + 1;
    let mut aug = vec![0.0; na * na];
    for i in 0..n {
        for j in 0..n {
            aug[i * na + j] = sys.a[i * n + j] * dtau;
        }
        aug[i * na + n] = sys.b[i] * dtau;
    }
    let e = expm(&aug, na);
    let phi: Vec<f64> = (0..n)
        .flat_map(|i| (0..n).map(move |j| (i, j)))
        .map(|(i, j)| e[i * na + j])
        .collect();
    let gamma: Vec<f64> = (0..n).map(|i| e[i * na + n]).collect();
    // The chain is block lower triangular (a stage hears only the stages before it), and so is
    // Φ: each row's products run over the columns its exact zeros leave (the same sums, less
    // the terms that are exact zeros).
    let spans: Vec<(usize, usize)> = (0..n)
        .map(|i| {
            let row = &phi[i * n..(i + 1) * n];
            let lo = row.iter().position(|v| *v != 0.0).unwrap_or(0);
            let hi = row.iter().rposition(|v| *v != 0.0).map_or(lo, |j| j + 1);
            (lo, hi)
        })
        .collect();
    let mut t_s = Vec::with_capacity(n_points);
    let mut step = Vec::with_capacity(n_points);
    let mut impulse = Vec::with_capacity(n_points);
    let mut xs = vec![0.0; n];
    let mut xi = sys.b.clone();
    let mut tmp = vec![0.0; n];
    for k in 0..n_points {
        t_s.push(k as f64 * dtau / w_t);
        let ys: f64 = sys.c.iter().zip(&xs).map(|(c, x)| c * x).sum::<f64>() + sys.d;
        let yi: f64 = sys.c.iter().zip(&xi).map(|(c, x)| c * x).sum::<f64>() * w_t;
        step.push(ys);
        impulse.push(yi);
        for (i, &(lo, hi)) in spans.iter().enumerate() {
            tmp[i] = (lo..hi).map(|j| phi[i * n + j] * xs[j]).sum::<f64>() + gamma[i];
        }
        std::mem::swap(&mut xs, &mut tmp);
        for (i, &(lo, hi)) in spans.iter().enumerate() {
            tmp[i] = (lo..hi).map(|j| phi[i * n + j] * xi[j]).sum::<f64>();
        }
        std::mem::swap(&mut xi, &mut tmp);
    }
    let dc: f64 = stages
        .iter()
        .map(|r| (r.eval(Complex64::new(0.0, 0.0))).re)
        .product();
    let figures = step_figures(&t_s, &step, dc);
    Ok(TimeResponse {
        t_s,
        step,
        impulse,
        impulse_direct: sys.d,
        figures,
    })
}

/// Linear interpolation of the instant where `y` crosses `level` between samples i−1 and i.
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
    t[i - 1] + frac.clamp(0.0, 1.0) * (t[i] - t[i - 1])
}

/// Overshoot, rise and settling figures of a sampled step response with final value `fv`.
pub fn step_figures(t: &[f64], y: &[f64], fv: f64) -> StepFigures {
    let peak_abs = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
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

/// Step and impulse response of stage netlists in signal order with op amp `op`.
///
/// # Errors
/// As [`stage_transfer`] and [`cascade_response`].
pub fn stages_response(
    stages: &[&StageNetlist],
    op: &OpAmp,
    settings: &TimeSettings,
) -> Result<TimeResponse, AnalysisError> {
    let rats: Vec<Rational> = stages
        .iter()
        .map(|n| stage_transfer(n, op))
        .collect::<Result<_, _>>()?;
    cascade_response(&rats, settings)
}

/// Step and impulse response of `board`.
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

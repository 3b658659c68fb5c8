//! What the op amp must do for each stage: the gain-bandwidth below which the stage's f0 or Q
//! drifts past a chosen limit, and the slew rate a chosen output amplitude needs at the highest
//! passband frequency.
//!
//! GBW: the stage is analysed with the op-amp model (the board's A0 and Rout, GBW varied) and
//! its f0 and Q (dominant poles, [`super::poles::stage_factor`]) are compared with the same stage
//! on an ideal op amp. The drift `max(|f0/f0_ideal − 1|, |Q/Q_ideal − 1|)` falls as GBW rises;
//! the least GBW that keeps it within the limit is found by bisection on log(GBW) between 1 Hz
//! and 1 THz, to 0.1 % — no rule of thumb. A stage that has lost its pole pair (or turned
//! unstable) at a trial GBW counts as drifted.
//!
//! Slew rate: a sine of peak amplitude V at frequency f needs `2π·f·V` V/s. The caller gives each
//! stage's worst point over the signal band, from the same per-stage levels of the whole loaded
//! board that the headroom uses ([`SlewPoint`]): the frequency where `f·|V_k|` is largest for a
//! full-scale input, and the stage's amplitude there. So an internal stage that peaks is asked
//! for more, and a band-pass stage is asked for what it really carries.

use super::built::{self, refine_max, BoardSolver, BuiltSweep};
use super::circuit::AnalysisError;
use super::poles::{stage_factor, StageFactor};
use crate::board::Board;
use crate::error::InputError;
use crate::fmath;
use crate::netlist::StageNetlist;
use crate::opamp::OpAmp;
use serde::Serialize;
use std::f64::consts::PI;

/// Requirements of one stage on its op amp.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageNeed {
    /// Stage number, from 1.
    pub stage: usize,
    /// f0 and Q on an ideal op amp.
    pub ideal: StageFactor,
    /// Drift of f0 or Q with the board's op amp, fraction (0.01 = 1 %).
    pub drift_with_board_opamp: f64,
    /// Least GBW that keeps the drift within the limit, Hz; `None` when even 1 THz does not
    /// (A0 or Rout alone drift it past the limit).
    pub min_gbw_hz: Option<f64>,
    /// Where over the signal band the stage needs the most slew rate, Hz.
    pub slew_at_hz: f64,
    /// The stage's output amplitude there for a full-scale input, V peak.
    pub out_pk_v: f64,
    /// Slew rate that amplitude needs, V/s: 2π·f·V.
    pub slew_v_per_s: f64,
    /// Whether the board's op amp meets both (GBW at or above `min_gbw_hz`, slew at or above).
    pub board_opamp_ok: bool,
}

/// Requirements of every stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OpAmpNeeds {
    /// Drift limit, %.
    pub drift_limit_pct: f64,
    /// Top of the signal band over which the slew need was sought, Hz.
    pub slew_freq_hz: f64,
    /// The board's output amplitude in the passband for a full-scale input, V peak (the input
    /// amplitude times the built board's measured passband gain).
    pub vout_pk: f64,
    /// One entry per stage.
    pub stages: Vec<StageNeed>,
}

fn drift(net: &StageNetlist, op: &OpAmp, ideal: &StageFactor) -> f64 {
    match stage_factor(net, op) {
        Ok(f) => {
            let df = (f.f0_hz / ideal.f0_hz - 1.0).abs();
            let dq = match (f.q, ideal.q) {
                (Some(q), Some(qi)) => (q / qi - 1.0).abs(),
                _ => 0.0,
            };
            if df.is_finite() && dq.is_finite() {
                df.max(dq)
            } else {
                f64::INFINITY
            }
        }
        Err(_) => f64::INFINITY,
    }
}

/// Lowest and highest GBW searched, Hz.
const GBW_RANGE_HZ: (f64, f64) = (1.0, 1e12);
/// Width of the final bracket in ln(GBW): the least GBW is found to 0.1 %.
const GBW_TOLERANCE_LN: f64 = 1e-3;

/// The least GBW at which `drift(gbw) ≤ limit`, to [`GBW_TOLERANCE_LN`] (the bracket's upper
/// end, which passes), or `None` when even [`GBW_RANGE_HZ`]'s top fails. The drift falls as the
/// GBW rises (it goes as 1/GBW once the GBW is well above the stage's f0), so the search starts
/// from the guess `GBW·drift/limit` made from the board's own op amp, brackets it by factors of
/// two, and closes the bracket by the Illinois variant of regula falsi on `ln drift − ln limit`
/// over `ln GBW`, which is nearly linear there.
fn least_gbw(
    drift: impl Fn(f64) -> f64,
    limit: f64,
    board_gbw_hz: f64,
    board_drift: f64,
) -> Option<f64> {
    let (lo_hz, hi_hz) = GBW_RANGE_HZ;
    let excess = |u: f64| {
        let d = drift(fmath::exp(u));
        if d.is_nan() {
            f64::INFINITY
        } else {
            fmath::ln(d) - fmath::ln(limit)
        }
    };
    let (u_min, u_max) = (fmath::ln(lo_hz), fmath::ln(hi_hz));
    let guess = if board_gbw_hz.is_finite() && board_drift.is_finite() && board_drift > 0.0 {
        (fmath::ln(board_gbw_hz) + fmath::ln(board_drift) - fmath::ln(limit)).clamp(u_min, u_max)
    } else {
        0.5 * (u_min + u_max)
    };
    // Bracket: `a` fails (excess > 0), `b` passes (excess ≤ 0).
    let (mut b, mut eb) = (guess, excess(guess));
    let (mut a, mut ea);
    if eb <= 0.0 {
        loop {
            a = (b - std::f64::consts::LN_2).max(u_min);
            ea = excess(a);
            if ea > 0.0 {
                break;
            }
            if a <= u_min {
                return Some(lo_hz);
            }
            (b, eb) = (a, ea);
        }
    } else {
        loop {
            (a, ea) = (b, eb);
            if a >= u_max {
                return None;
            }
            b = (a + std::f64::consts::LN_2).min(u_max);
            eb = excess(b);
            if eb <= 0.0 {
                break;
            }
        }
    }
    let mut side = 0i8;
    while b - a > GBW_TOLERANCE_LN {
        let width = b - a;
        let secant = if ea.is_finite() && eb.is_finite() && ea != eb {
            (a * eb - b * ea) / (eb - ea)
        } else {
            0.5 * (a + b)
        };
        // Stay a little inside the bracket so that each step shrinks it.
        let inset = 0.25 * GBW_TOLERANCE_LN.min(width / 2.0);
        let m = secant.clamp(a + inset, b - inset);
        let em = excess(m);
        if em <= 0.0 {
            (b, eb) = (m, em);
            if side == 1 {
                ea *= 0.5;
            }
            side = 1;
        } else {
            (a, ea) = (m, em);
            if side == -1 {
                eb *= 0.5;
            }
            side = -1;
        }
    }
    Some(fmath::exp(b))
}

/// Where a stage needs the most slew rate and its output amplitude there.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SlewPoint {
    /// Frequency, Hz.
    pub f_hz: f64,
    /// The stage's output amplitude there, V peak.
    pub out_pk_v: f64,
}

/// The requirements for the board of `stages` with op amp `op`; `slew[k]` is stage k's worst
/// slew point over the signal band, whose top is `slew_freq_hz`, and `vout_pk` the board's
/// passband output amplitude (both recorded as given).
///
/// # Errors
/// `drift` when the limit is not within 0.001–50 %; `vin` when a stage amplitude is negative or
/// not finite; `points` when `slew` does not have one point per stage; [`AnalysisError`] when a
/// stage cannot be analysed on an ideal op amp.
pub fn stages_needs(
    stages: &[&StageNetlist],
    op: &OpAmp,
    drift_limit_pct: f64,
    slew: &[SlewPoint],
    slew_freq_hz: f64,
    vout_pk: f64,
) -> Result<OpAmpNeeds, AnalysisError> {
    if !(drift_limit_pct.is_finite() && (0.001..=50.0).contains(&drift_limit_pct)) {
        return Err(AnalysisError::Input(InputError::new(
            "drift",
            format!("drift limit {drift_limit_pct} %; accepted 0.001 to 50 %"),
        )));
    }
    if slew.len() != stages.len() {
        return Err(AnalysisError::Input(InputError::new(
            "points",
            format!(
                "{} slew points for {} stages; one per stage is needed",
                slew.len(),
                stages.len()
            ),
        )));
    }
    if slew
        .iter()
        .any(|p| !(p.out_pk_v.is_finite() && p.out_pk_v >= 0.0 && p.f_hz.is_finite()))
    {
        return Err(AnalysisError::Input(InputError::new(
            "vin",
            "a stage amplitude for the slew need is not a finite, non-negative voltage",
        )));
    }
    let limit = drift_limit_pct / 100.0;
    let mut out = Vec::with_capacity(stages.len());
    for (k, (net, point)) in stages.iter().zip(slew).enumerate() {
        let ideal = stage_factor(net, &OpAmp::ideal())?;
        let with = |gbw_hz: f64| OpAmp { gbw_hz, ..*op };
        let board_drift = drift(net, op, &ideal);
        let min_gbw_hz = least_gbw(
            |gbw| drift(net, &with(gbw), &ideal),
            limit,
            op.gbw_hz,
            board_drift,
        );
        let slew_v_per_s = 2.0 * PI * point.f_hz * point.out_pk_v;
        out.push(StageNeed {
            stage: k + 1,
            ideal,
            drift_with_board_opamp: board_drift,
            board_opamp_ok: min_gbw_hz.is_some_and(|g| op.gbw_hz >= g)
                && op.slew_v_per_s >= slew_v_per_s,
            min_gbw_hz,
            slew_at_hz: point.f_hz,
            out_pk_v: point.out_pk_v,
            slew_v_per_s,
        });
    }
    Ok(OpAmpNeeds {
        drift_limit_pct,
        slew_freq_hz,
        vout_pk,
        stages: out,
    })
}

/// Each stage's worst slew point over the band `(lo_hz, hi_hz)` of the board in `solver`, for a
/// full-scale input of `vin_pk`: the grid point of `sweep` (inside the band, the band's ends
/// added) where `f·|V_k(f)|` is largest, refined between its neighbours by
/// [`built::refine_max`], so a narrow peak between grid points is not missed.
pub fn slew_points(
    solver: &mut BoardSolver,
    sweep: &BuiltSweep,
    band_hz: (f64, f64),
    vin_pk: f64,
) -> Vec<SlewPoint> {
    let (lo, hi) = band_hz;
    let mut grid: Vec<f64> = vec![lo];
    grid.extend(sweep.freq_hz.iter().copied().filter(|&f| f > lo && f < hi));
    grid.push(hi);
    (0..solver.n_stages())
        .map(|k| {
            let metric = |solver: &mut BoardSolver, f: f64| match solver.solve_at(f) {
                Ok(_) => f * fmath::cnorm(solver.stage_output(k)),
                Err(_) => f64::NAN,
            };
            let values: Vec<f64> = grid.iter().map(|&f| metric(solver, f)).collect();
            let i_best = values
                .iter()
                .enumerate()
                .filter(|(_, v)| v.is_finite())
                .max_by(|a, b| a.1.total_cmp(b.1))
                .map_or(grid.len() - 1, |(i, _)| i);
            let from = grid[i_best.saturating_sub(1)];
            let to = grid[(i_best + 1).min(grid.len() - 1)];
            let (f, v) = refine_max(solver, from, to, metric);
            SlewPoint {
                f_hz: f,
                out_pk_v: if f > 0.0 && v.is_finite() {
                    vin_pk * v / f
                } else {
                    0.0
                },
            }
        })
        .collect()
}

/// The requirements for `board` over the signal band `band_hz` for a full-scale input `vin_pk`:
/// the stage levels on 40 points a decade over the band, then [`slew_points`] and
/// [`stages_needs`]; the board's passband amplitude is `vin_pk·|gain|`.
///
/// # Errors
/// As [`stages_needs`]; `noiseband` for a band that is not `0 < lo < hi`.
pub fn board_needs(
    board: &Board,
    drift_limit_pct: f64,
    band_hz: (f64, f64),
    vin_pk: f64,
    gain: f64,
) -> Result<OpAmpNeeds, AnalysisError> {
    let (lo, hi) = band_hz;
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return Err(AnalysisError::Input(InputError::new(
            "noiseband",
            format!("signal band {lo} … {hi} Hz; accepted 0 < lo < hi"),
        )));
    }
    let n = (fmath::log10(hi / lo) * 40.0).ceil().clamp(2.0, 4000.0) as usize;
    let freqs: Vec<f64> = (0..n)
        .map(|i| lo * fmath::powf(hi / lo, i as f64 / (n - 1) as f64))
        .collect();
    let mut solver = BoardSolver::of_board(board)?;
    let sweep = built::sweep(&mut solver, &freqs)?;
    let slew = slew_points(&mut solver, &sweep, band_hz, vin_pk);
    let nets: Vec<&StageNetlist> = board.stages.iter().map(|s| &s.netlist).collect();
    stages_needs(
        &nets,
        &board.op_amp,
        drift_limit_pct,
        &slew,
        hi,
        vin_pk * gain.abs(),
    )
}

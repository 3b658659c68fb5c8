//! What the op amp must do: the gain-bandwidth the whole built board needs to keep its response
//! within a chosen limit of the same board on an ideal op amp, each stage's own share of it, and
//! the slew rate a full-scale input needs at each stage's output.
//!
//! Board GBW (the headline): the whole built board (rounded parts, every stage loading the one
//! before it, the board's A0 and Rout; the GBW of every op amp varied together) is solved on a
//! grid over the band the signal occupies and compared with the same board on an ideal op amp.
//! The deviation `max_f | |H_gbw(f)| / |H_ideal(f)| − 1 |` is what a user sees on a response plot
//! and what the limits check; it is magnitude only, because the mask checks magnitude and the
//! phase an op amp adds is a group-delay concern the step response already shows. The grid has
//! 40 points a decade plus the band's edges, and the worst grid point is refined between its
//! neighbours ([`built::refine_max`]), so a narrow peak of the deviation is not missed. The least
//! GBW that keeps it within the limit is found on ln(GBW) between 1 Hz and 1 THz, to 0.1 %.
//!
//! Stage GBW (secondary): each stage is analysed alone with the op-amp model and its f0 and Q
//! (dominant poles, [`super::poles::stage_factor`]) are compared with the same stage on an ideal
//! op amp; the drift `max(|f0/f0_ideal − 1|, |Q/Q_ideal − 1|)` falls as GBW rises and the least
//! GBW that keeps it within the limit is found the same way. A stage that has lost its pole pair
//! (or turned unstable) at a trial GBW counts as drifted. It says which stage asks the most; it
//! is not the board's need (a first-order stage at 10 kHz keeps its f0 within 1 % on a 10 kHz op
//! amp, while the board's −3 dB point has moved to about 6.4 kHz).
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
    /// Least GBW that keeps this stage's own f0 and Q drift within the limit, Hz (the stage alone,
    /// secondary to the board's [`OpAmpNeeds::min_gbw_hz`]); `None` when even 1 THz does not (A0
    /// or Rout alone drift it past the limit).
    pub min_gbw_hz: Option<f64>,
    /// Where over the signal band the stage needs the most slew rate, Hz.
    pub slew_at_hz: f64,
    /// The stage's output amplitude there for a full-scale input, V peak.
    pub out_pk_v: f64,
    /// Slew rate that amplitude needs, V/s: 2π·f·V.
    pub slew_v_per_s: f64,
    /// Whether the board's op amp meets both: the board's GBW need ([`OpAmpNeeds::min_gbw_hz`],
    /// not this stage's own) and this stage's slew need.
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
    /// Least GBW, Hz, at which the whole built board stays within `drift_limit_pct` of the same
    /// board on an ideal op amp over `gbw_band_hz` (magnitude); `None` when even 1 THz does not
    /// (the board's A0 or Rout alone take it past the limit).
    pub min_gbw_hz: Option<f64>,
    /// The band over which the board's deviation was checked, Hz.
    pub gbw_band_hz: (f64, f64),
    /// The board's deviation over that band with its own op amp, fraction (0.01 = 1 %).
    pub deviation_with_board_opamp: f64,
    /// Where over the band that deviation is largest, Hz.
    pub deviation_at_hz: f64,
    /// Whether the board's op amp meets the board's GBW need and every stage's slew need.
    pub board_opamp_ok: bool,
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
    mut drift: impl FnMut(f64) -> f64,
    limit: f64,
    board_gbw_hz: f64,
    board_drift: f64,
) -> Option<f64> {
    let (lo_hz, hi_hz) = GBW_RANGE_HZ;
    let mut excess = |u: f64| {
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

/// Points a decade of the grid on which the board's deviation is sought.
const DEVIATION_POINTS_PER_DECADE: f64 = 40.0;

/// The board's deviation from its ideal-op-amp self over a band: the grid and the ideal board's
/// magnitude on it, computed once and reused at every trial GBW.
struct Deviation<'a> {
    stages: &'a [&'a StageNetlist],
    ideal: BoardSolver,
    grid_hz: Vec<f64>,
    ideal_mag: Vec<f64>,
}

impl<'a> Deviation<'a> {
    /// The grid over `band_hz` (both ends included) and the ideal-op-amp board on it.
    fn new(stages: &'a [&'a StageNetlist], band_hz: (f64, f64)) -> Result<Self, AnalysisError> {
        let (lo, hi) = band_hz;
        let n = (fmath::log10(hi / lo) * DEVIATION_POINTS_PER_DECADE)
            .ceil()
            .clamp(1.0, 4000.0) as usize;
        let grid_hz: Vec<f64> = (0..=n)
            .map(|i| lo * fmath::powf(hi / lo, i as f64 / n as f64))
            .collect();
        let mut ideal = BoardSolver::new(stages, &OpAmp::ideal())?;
        let ideal_mag = grid_hz
            .iter()
            .map(|&f| ideal.solve_at(f).map(fmath::cnorm))
            .collect::<Result<Vec<f64>, _>>()?;
        Ok(Deviation {
            stages,
            ideal,
            grid_hz,
            ideal_mag,
        })
    }

    /// `(max deviation, where)` of the board on op amp `op`: the worst grid point, refined
    /// between its neighbours. A board that cannot be solved counts as infinitely far.
    fn worst(&mut self, op: &OpAmp) -> (f64, f64) {
        let Ok(mut solver) = BoardSolver::new(self.stages, op) else {
            return (f64::INFINITY, self.grid_hz[0]);
        };
        let one = |h: Result<num_complex::Complex64, AnalysisError>, ideal: f64| match h {
            Ok(h) if ideal > 0.0 => (fmath::cnorm(h) / ideal - 1.0).abs(),
            _ => f64::INFINITY,
        };
        let values: Vec<f64> = self
            .grid_hz
            .iter()
            .zip(&self.ideal_mag)
            .map(|(&f, &m)| one(solver.solve_at(f), m))
            .collect();
        let i_best = values
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.total_cmp(b.1))
            .map_or(0, |(i, _)| i);
        if !values[i_best].is_finite() {
            return (f64::INFINITY, self.grid_hz[i_best]);
        }
        let from = self.grid_hz[i_best.saturating_sub(1)];
        let to = self.grid_hz[(i_best + 1).min(self.grid_hz.len() - 1)];
        let ideal = &mut self.ideal;
        let (f, v) = refine_max(&mut solver, from, to, |solver, f| {
            let m = ideal.solve_at(f).map_or(f64::NAN, fmath::cnorm);
            one(solver.solve_at(f), m)
        });
        if v >= values[i_best] {
            (v, f)
        } else {
            (values[i_best], self.grid_hz[i_best])
        }
    }
}

/// The board's GBW need: `(least GBW, deviation with the board's op amp, where)`.
fn board_gbw(
    stages: &[&StageNetlist],
    op: &OpAmp,
    limit: f64,
    band_hz: (f64, f64),
) -> Result<(Option<f64>, f64, f64), AnalysisError> {
    let mut deviation = Deviation::new(stages, band_hz)?;
    let (board_dev, board_at) = deviation.worst(op);
    let least = least_gbw(
        |gbw_hz| deviation.worst(&OpAmp { gbw_hz, ..*op }).0,
        limit,
        op.gbw_hz,
        board_dev,
    );
    Ok((least, board_dev, board_at))
}

/// Where a stage needs the most slew rate and its output amplitude there.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SlewPoint {
    /// Frequency, Hz.
    pub f_hz: f64,
    /// The stage's output amplitude there, V peak.
    pub out_pk_v: f64,
}

/// The requirements for the board of `stages` with op amp `op`: the board's GBW need over
/// `gbw_band_hz` (see the module docs), each stage's own f0/Q need, and the slew needs; `slew[k]`
/// is stage k's worst slew point over the signal band, whose top is `slew_freq_hz`, and `vout_pk`
/// the board's passband output amplitude (both recorded as given).
///
/// # Errors
/// `drift` when the limit is not within 0.001–50 %; `vin` when a stage amplitude is negative or
/// not finite; `points` when `slew` does not have one point per stage; `noiseband` for a GBW band
/// that is not `0 < lo < hi`; [`AnalysisError`] when the board cannot be analysed on an ideal op
/// amp.
pub fn stages_needs(
    stages: &[&StageNetlist],
    op: &OpAmp,
    drift_limit_pct: f64,
    slew: &[SlewPoint],
    gbw_band_hz: (f64, f64),
    slew_freq_hz: f64,
    vout_pk: f64,
) -> Result<OpAmpNeeds, AnalysisError> {
    let (band_lo, band_hi) = gbw_band_hz;
    if !(band_lo > 0.0 && band_hi > band_lo && band_hi.is_finite()) {
        return Err(AnalysisError::Input(InputError::new(
            "noiseband",
            format!("GBW band {band_lo} … {band_hi} Hz; accepted 0 < lo < hi"),
        )));
    }
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
    let (min_gbw_hz, deviation, deviation_at_hz) = board_gbw(stages, op, limit, gbw_band_hz)?;
    let gbw_ok = min_gbw_hz.is_some_and(|g| op.gbw_hz >= g);
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
            board_opamp_ok: gbw_ok && op.slew_v_per_s >= slew_v_per_s,
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
        min_gbw_hz,
        gbw_band_hz,
        deviation_with_board_opamp: deviation,
        deviation_at_hz,
        board_opamp_ok: gbw_ok && out.iter().all(|s| s.board_opamp_ok),
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
/// [`stages_needs`] (the GBW need checked over the same band); the board's passband amplitude is
/// `vin_pk·|gain|`.
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
        band_hz,
        hi,
        vin_pk * gain.abs(),
    )
}

#[cfg(test)]
mod tests {
    use crate::pipeline::{analyses, compose};

    fn design(link: &str) -> crate::pipeline::Design {
        let report = crate::link::parse(link);
        assert!(report.errors.is_empty(), "{link}: {:?}", report.errors);
        compose(&report.state).unwrap_or_else(|e| panic!("{link}: {e}"))
    }

    /// A first-order RC behind a unity-gain follower: the follower's closed-loop gain on a
    /// single-pole op amp is `1/(1 + jf/GBW)` (physics, to first order in 1/A0; A0 = 100 dB adds
    /// 1e-5), so the board stays within 1 % of its ideal-op-amp self up to the 10 kHz edge from
    /// `GBW = f/√(1/0.99² − 1)` = 70.18 kHz — not the 9.87 kHz at which the stage's own f0 stays
    /// within 1 %. Tolerance 0.2 % (the search's 0.1 % bracket plus A0's share).
    #[test]
    fn first_order_board_need_is_the_follower_closed_form() {
        let d = design("?v=2&order=1&fc=10k");
        let a = analyses(&d);
        let needs = a.opamp_needs.expect("needs");
        let edge = needs.gbw_band_hz.1;
        assert_eq!(edge, 10e3, "the band ends at the cutoff");
        let expect = edge / (1.0 / (0.99f64 * 0.99) - 1.0).sqrt();
        let got = needs.min_gbw_hz.expect("a need");
        assert!(
            (got / expect - 1.0).abs() < 2e-3,
            "board need {got} Hz, follower closed form {expect} Hz"
        );
        let stage = needs.stages[0].min_gbw_hz.expect("a stage need");
        assert!(stage < 0.2 * got, "stage share {stage} Hz, board {got} Hz");
    }

    /// A board whose op amp's DC gain alone breaks the allowance has no GBW need, and says so in
    /// words. Source: a 60 dB stage on A0 = 100 dB has a loop gain of 40 dB, so its closed-loop
    /// gain is 1/(1 + 10⁻²) of the ideal's (0.99 % low), and the Sallen-Key's Q hangs on that gain;
    /// ngspice on the export puts the board 18 % off even at GBW = 1 THz (tests/ngspice_figures.rs).
    #[test]
    fn no_gbw_suffices_when_the_dc_gain_alone_breaks_it() {
        let d = design("?v=2&order=2&fc=10k&gain=60");
        let a = analyses(&d);
        let needs = a.opamp_needs.expect("needs");
        assert_eq!(needs.min_gbw_hz, None);
        assert!(!needs.board_opamp_ok);
        let words = crate::export::words::board_gbw_sentence(&needs, d.board.op_amp.gbw_hz);
        assert!(words.starts_with("No GBW up to 1 THz"), "{words}");
        assert!(!words.contains("GBW ≥ -"), "{words}");
    }
}

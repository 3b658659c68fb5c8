//! The as-built verdict: the nominal built board (op amp, rounded parts, overrides, loading)
//! measured against the design and against the limits.
//!
//! - `passband_gain_db`: the built board's gain at the passband reference frequency.
//! - `corner_hz`: where the built response crosses the family's cutoff level below the design's
//!   passband gain (−3.01 dB; −6.02 dB for Linkwitz-Riley; the ripple for Chebyshev, so the
//!   ripple-band edges), found on the grid and closed by bisection in ln f.
//! - `peaking_db`: the largest gain of the built board over the span, above the design's gain.
//! - `meets_mask` and `worst_margin_db`: the same limits the tolerance study's yield checks (the
//!   passband no lower than gain − passloss, the stopband no higher than gain − stopdepth), over
//!   the span on 40 points a decade plus the mask's edges, the worst point of each band refined
//!   between its neighbours. A negative margin is a violation, at `worst_at_hz`.

use super::Design;
use crate::analysis::built::{refine_max, BoardSolver};
use crate::fmath;
use crate::spec::{Edge, Family, Mask};
use serde::Serialize;

/// The verdict on the board as built.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AsBuilt {
    /// Gain at the passband reference frequency, dB.
    pub passband_gain_db: f64,
    /// The cutoff-level crossings of the built response, Hz (one for lp/hp, two for bp).
    pub corner_hz: Vec<f64>,
    /// The largest gain over the span above the design's passband gain, dB.
    pub peaking_db: f64,
    /// Whether the built board meets the limits; `None` without limits.
    pub meets_mask: Option<bool>,
    /// The smallest margin to the limits, dB (negative: violated); `None` without limits.
    pub worst_margin_db: Option<f64>,
    /// Where the smallest margin is, Hz.
    pub worst_at_hz: Option<f64>,
}

/// How far below the passband gain the family's cutoff lies, dB.
pub fn cutoff_level_db(family: Family) -> f64 {
    match family {
        Family::Chebyshev { ripple_db } | Family::Elliptic { ripple_db, .. } => ripple_db,
        // The cutoff of an inverse Chebyshev is where its stopband depth is first reached.
        Family::InverseChebyshev { astop_db } => astop_db,
        Family::LinkwitzRiley => 20.0 * fmath::log10(2f64),
        _ => 10.0 * fmath::log10(2f64),
    }
}

fn gain_db(solver: &mut BoardSolver, f: f64) -> f64 {
    match solver.solve_at(f) {
        Ok(h) => 20.0 * fmath::log10(fmath::cnorm(h)),
        Err(_) => f64::NAN,
    }
}

/// Where `gain_db(f) − level` changes sign on `grid`, each crossing closed by bisection.
pub fn crossings(solver: &mut BoardSolver, grid: &[f64], level_db: f64) -> Vec<f64> {
    let values: Vec<f64> = grid
        .iter()
        .map(|&f| gain_db(solver, f) - level_db)
        .collect();
    let mut out = Vec::new();
    for i in 1..grid.len() {
        let (a, b) = (values[i - 1], values[i]);
        if !(a.is_finite() && b.is_finite()) || (a > 0.0) == (b > 0.0) {
            continue;
        }
        let (mut lo, mut hi, mut at_lo) = (fmath::ln(grid[i - 1]), fmath::ln(grid[i]), a);
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            let v = gain_db(solver, fmath::exp(mid)) - level_db;
            if (v > 0.0) == (at_lo > 0.0) {
                lo = mid;
                at_lo = v;
            } else {
                hi = mid;
            }
            if hi - lo < 1e-12 {
                break;
            }
        }
        out.push(fmath::exp(0.5 * (lo + hi)));
    }
    out
}

/// The margin of the built board to `mask` at `f`, dB (`None` outside both bands).
fn margin_at(solver: &mut BoardSolver, mask: &Mask, gain_req_db: f64, f: f64) -> Option<f64> {
    let (pass, stop) = crate::analysis::tolerance::bands(mask, f);
    let g = gain_db(solver, f);
    if pass {
        Some(g - (gain_req_db - mask.apass_db))
    } else if stop {
        Some((gain_req_db - mask.astop_db) - g)
    } else {
        None
    }
}

/// The verdict of `design`'s board, from a compiled `solver` of it; `passband_gain_db` as
/// measured by the analysis plan.
pub fn as_built(design: &Design, solver: &mut BoardSolver, passband_gain_db: f64) -> AsBuilt {
    let req = &design.state.requirement;
    let (lo, hi) = design.span_hz;
    let n = (fmath::log10(hi / lo) * 40.0).ceil().clamp(2.0, 2000.0) as usize;
    let mut grid: Vec<f64> = (0..n)
        .map(|i| lo * fmath::powf(hi / lo, i as f64 / (n - 1) as f64))
        .collect();
    if let Some(m) = &req.mask {
        for e in [m.pass, m.stop] {
            match e {
                Edge::Single(f) => grid.push(f),
                Edge::Pair(a, b) => grid.extend([a, b]),
            }
        }
    }
    grid.retain(|f| f.is_finite() && *f > 0.0);
    crate::sort::sort_floats(&mut grid);
    grid.dedup();
    // The band's outer edges: inside an equiripple passband the troughs touch the cutoff level
    // (and, built, may dip through it), which is not a corner.
    let all = crossings(
        solver,
        &grid,
        req.gain_db - cutoff_level_db(design.synthesis.family),
    );
    let corner_hz = match (req.class, all.first(), all.last()) {
        (_, None, _) | (_, _, None) => Vec::new(),
        (crate::spec::ResponseClass::LowPass, _, Some(&hi)) => vec![hi],
        (crate::spec::ResponseClass::HighPass, Some(&lo), _) => vec![lo],
        (crate::spec::ResponseClass::BandPass, Some(&lo), Some(&hi)) if all.len() > 1 => {
            vec![lo, hi]
        }
        (crate::spec::ResponseClass::BandPass, Some(&lo), _) => vec![lo],
        (crate::spec::ResponseClass::BandStop, Some(&lo), Some(&hi)) if all.len() > 1 => {
            vec![lo, hi]
        }
        (crate::spec::ResponseClass::BandStop, Some(&lo), _) => vec![lo],
    };
    // An inverse Chebyshev reaches its depth first next to the passband, and its stopband then
    // touches that level again at every ripple: the corner is the crossing nearest the passband.
    let corner_hz = match (design.synthesis.family, req.class) {
        (Family::InverseChebyshev { .. }, crate::spec::ResponseClass::LowPass) => {
            all.first().map(|&f| vec![f]).unwrap_or_default()
        }
        (Family::InverseChebyshev { .. }, crate::spec::ResponseClass::HighPass) => {
            all.last().map(|&f| vec![f]).unwrap_or_default()
        }
        (Family::InverseChebyshev { .. }, crate::spec::ResponseClass::BandPass) => {
            let centre = design.synthesis.fc_hz;
            let below = all.iter().rev().find(|&&f| f < centre);
            let above = all.iter().find(|&&f| f > centre);
            below.into_iter().chain(above).copied().collect()
        }
        _ => corner_hz,
    };
    let (i_peak, _) = grid
        .iter()
        .map(|&f| gain_db(solver, f))
        .enumerate()
        .filter(|(_, g)| g.is_finite())
        .fold((0, f64::NEG_INFINITY), |best, (i, g)| {
            if g > best.1 {
                (i, g)
            } else {
                best
            }
        });
    let (_, peak_db) = refine_max(
        solver,
        grid[i_peak.saturating_sub(1)],
        grid[(i_peak + 1).min(grid.len() - 1)],
        gain_db,
    );
    let (mut meets_mask, mut worst_margin_db, mut worst_at_hz) = (None, None, None);
    if let Some(mask) = req.mask {
        let margins: Vec<Option<f64>> = grid
            .iter()
            .map(|&f| margin_at(solver, &mask, req.gain_db, f))
            .collect();
        let worst = margins
            .iter()
            .enumerate()
            .filter_map(|(i, m)| m.map(|m| (i, m)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        if let Some((i, _)) = worst {
            // Refine between the neighbours that lie in the same band.
            let from = grid[i.saturating_sub(1)];
            let to = grid[(i + 1).min(grid.len() - 1)];
            let (f, neg) = refine_max(solver, from, to, |solver, f| {
                margin_at(solver, &mask, req.gain_db, f).map_or(f64::NAN, |m| -m)
            });
            let m = -neg;
            // The study's own allowance for rounding at a limit met exactly (1e-12 relative).
            meets_mask = Some(m >= -1e-9);
            worst_margin_db = Some(m);
            worst_at_hz = Some(f);
        }
    }
    AsBuilt {
        passband_gain_db,
        corner_hz,
        peaking_db: peak_db - req.gain_db,
        meets_mask,
        worst_margin_db,
        worst_at_hz,
    }
}

/// Warnings where the built board departs from the design: a corner more than 2 % off the ideal
/// design's, peaking more than 0.5 dB above the ideal's, limits missed; each names its likely
/// cause by rebuilding the comparison with the op amp made ideal.
pub fn departures(design: &Design, built: &AsBuilt) -> Vec<String> {
    use super::ideal_board;
    let mut out = Vec::new();
    let board = &design.board;
    let verdict_of = |b: &crate::board::Board| {
        BoardSolver::of_board(b).ok().map(|mut solver| {
            let gain = solver
                .solve_at(super::passband_ref_hz(design))
                .map(|h| 20.0 * fmath::log10(fmath::cnorm(h)))
                .unwrap_or(f64::NAN);
            as_built(design, &mut solver, gain)
        })
    };
    let Some(ideal) = verdict_of(&ideal_board(board)) else {
        return out;
    };
    // The board with its parts but an ideal op amp tells the op amp's share apart; it is only
    // built when there is a departure to explain.
    let parts_only = std::cell::OnceCell::new();
    let cause = |off: &dyn Fn(&AsBuilt) -> bool| -> &'static str {
        let parts_only = parts_only.get_or_init(|| {
            let mut b = board.clone();
            b.op_amp = crate::opamp::OpAmp::ideal();
            verdict_of(&b)
        });
        match parts_only {
            Some(p) if !off(p) => "the op amp's finite GBW, gain and output resistance",
            _ if !design.state.overrides.is_empty() => "the parts typed over and the rounding",
            _ => "the rounding to standard values",
        }
    };
    let corner_off = |v: &AsBuilt| {
        v.corner_hz.len() != ideal.corner_hz.len()
            || v.corner_hz
                .iter()
                .zip(&ideal.corner_hz)
                .any(|(b, i)| (b / i - 1.0).abs() > 0.02)
    };
    if corner_off(built) {
        let list = |v: &[f64]| {
            v.iter()
                .map(|f| crate::units::format_si_unit(*f, 4, "Hz"))
                .collect::<Vec<_>>()
                .join(" and ")
        };
        out.push(format!(
            "as built, the cutoff lies at {} against the design's {} (more than 2 % off); likely \
             cause: {}",
            if built.corner_hz.is_empty() {
                "no frequency in the span".to_string()
            } else {
                list(&built.corner_hz)
            },
            list(&ideal.corner_hz),
            cause(&corner_off)
        ));
    }
    let peaks = |v: &AsBuilt| v.peaking_db > ideal.peaking_db + 0.5;
    if peaks(built) {
        out.push(format!(
            "as built, the response peaks {:.1} dB above the passband gain, {:.1} dB more than the \
             design; likely cause: {}",
            built.peaking_db,
            built.peaking_db - ideal.peaking_db,
            cause(&peaks)
        ));
    }
    if let (Some(false), Some(m), Some(f)) =
        (built.meets_mask, built.worst_margin_db, built.worst_at_hz)
    {
        out.push(format!(
            "as built, the board misses its limits by {:.2} dB at {}",
            -m,
            crate::units::format_si_unit(f, 4, "Hz")
        ));
    }
    out
}

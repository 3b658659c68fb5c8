//! The depth of the built board's notches: for every stage whose section has a pair of jω-axis
//! zeros, where near that stage's zero frequency the whole built board (rounded parts, the op-amp
//! model, loading) is least, and how far that is below the board's passband gain.
//!
//! With exact parts and an ideal op amp the zeros sit on the jω axis and the notch is bottomless;
//! rounded parts move the zero frequency, and a finite GBW moves the zeros off the axis, which is
//! what leaves a finite depth. The search is the built board's own solve: a grid of
//! [`GRID_POINTS`] in ln f over ±[`BRACKET`] around the stage's zero frequency (parts, ideal op
//! amp), then the least point refined by golden section between its grid neighbours.

use crate::analysis::built::{refine_max, BoardSolver};
use crate::board::Board;
use crate::fmath;
use serde::Serialize;

/// Half-width of the search around a stage's zero frequency, as a ratio: the op amp and the
/// neighbouring stages move a notch by far less than ±10 %.
pub const BRACKET: f64 = 1.1;

/// Grid points over the bracket before the refinement.
pub const GRID_POINTS: usize = 41;

/// One notch of the built board.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct NotchDepth {
    /// Stage number along the signal path, from 1.
    pub stage: usize,
    /// The stage's zero frequency from its parts on an ideal op amp, Hz.
    pub fz_hz: f64,
    /// Where the built board's gain is least near it, Hz.
    pub at_hz: f64,
    /// The built board's gain there, dB (−∞ when the solve gives an exact zero).
    pub gain_db: f64,
    /// Passband gain minus `gain_db`, dB: how deep the notch is.
    pub depth_db: f64,
}

/// The notches of `board`, one per stage with zeros, measured on the built board through
/// `solver` against the passband gain `passband_gain_db`. Stages without zeros give nothing; a
/// stage whose zero frequency is not a positive finite number is skipped.
pub fn notch_depths(
    board: &Board,
    solver: &mut BoardSolver,
    passband_gain_db: f64,
) -> Vec<NotchDepth> {
    let mut out = Vec::new();
    for (index, stage) in board.stages.iter().enumerate() {
        let fz = match stage.achieved_fz_hz.or(stage.section.fz_hz) {
            Some(fz) if fz.is_finite() && fz > 0.0 => fz,
            _ => continue,
        };
        let (at_hz, gain_db) = least_gain_near(solver, fz);
        out.push(NotchDepth {
            stage: index + 1,
            fz_hz: fz,
            at_hz,
            gain_db,
            depth_db: passband_gain_db - gain_db,
        });
    }
    out
}

/// `(f, gain dB)` of the least built-board gain within `fz/BRACKET … fz·BRACKET`.
fn least_gain_near(solver: &mut BoardSolver, fz: f64) -> (f64, f64) {
    let loss_db = |solver: &mut BoardSolver, f: f64| match solver.solve_at(f) {
        Ok(h) => -20.0 * fmath::log10(fmath::cnorm(h)),
        Err(_) => f64::NAN,
    };
    let (lo, hi) = (fz / BRACKET, fz * BRACKET);
    let step = fmath::ln(hi / lo) / (GRID_POINTS - 1) as f64;
    let grid: Vec<f64> = (0..GRID_POINTS)
        .map(|i| lo * fmath::exp(step * i as f64))
        .chain(std::iter::once(fz))
        .collect();
    let mut best = (fz, f64::NEG_INFINITY);
    for &f in &grid {
        let v = loss_db(solver, f);
        if v > best.1 {
            best = (f, v);
        }
    }
    let (a, b) = (best.0 * fmath::exp(-step), best.0 * fmath::exp(step));
    let refined = refine_max(solver, a, b, loss_db);
    let best = if refined.1 > best.1 { refined } else { best };
    (best.0, -best.1)
}

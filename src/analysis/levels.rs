//! Signal levels inside the cascade: each stage's output relative to the board input over
//! frequency (a high-Q stage peaks above the overall response), and the headroom of each stage
//! against the op amp's output swing for a chosen input amplitude.
//!
//! Computed on the whole board as one netlist (the loading of each stage by the next included):
//! one nodal solve per frequency gives every stage output. Headroom is
//! `20·log10(swing / (vin · max_f |V_k/V_in|))` dB; negative headroom means the stage clips for an
//! input of that amplitude at its worst frequency.

use super::circuit::{merge_stages, transfer_at, AnalysisError, Compiled, Solver};
use crate::board::Board;
use crate::error::InputError;
use crate::fmath;
use crate::netlist::StageNetlist;
use crate::opamp::OpAmp;
use crate::units::format_si_unit;
use num_complex::Complex64;
use serde::Serialize;
use std::f64::consts::PI;

/// One stage's level curve and headroom.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageLevel {
    /// Stage number, from 1.
    pub stage: usize,
    /// |V_out,k / V_in| per frequency, dB.
    pub gain_db: Vec<f64>,
    /// Largest |V_out,k / V_in| over the frequencies, dB.
    pub peak_db: f64,
    /// Frequency of that peak, Hz.
    pub peak_hz: f64,
    /// Peak output amplitude for the chosen input amplitude, V.
    pub peak_out_v: f64,
    /// Swing over the peak output, dB (negative: the stage clips).
    pub headroom_db: f64,
}

/// Levels of every stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Levels {
    /// Frequencies, Hz.
    pub freqs_hz: Vec<f64>,
    /// Input amplitude used, V peak.
    pub vin_pk: f64,
    /// Op-amp output swing, V peak.
    pub swing_pk: f64,
    /// One entry per stage in signal order.
    pub stages: Vec<StageLevel>,
    /// Stages that clip (negative headroom), as sentences.
    pub warnings: Vec<String>,
}

/// `vin` and `swing` must be positive finite amplitudes.
fn check_amplitudes(vin_pk: f64, swing_pk: f64) -> Result<(), AnalysisError> {
    for (key, v) in [("vin", vin_pk), ("swing", swing_pk)] {
        if !(v.is_finite() && v > 0.0) {
            return Err(AnalysisError::Input(InputError::new(
                key,
                format!("{v} V; accepted a positive amplitude"),
            )));
        }
    }
    Ok(())
}

/// Every stage output relative to the input, over `freqs_hz`, for the board of `stages`.
///
/// # Errors
/// `vin` / `swing` when not positive and finite; `points` for an empty or non-positive frequency
/// list; [`AnalysisError::Singular`] for singular equations.
pub fn stages_levels(
    stages: &[&StageNetlist],
    op: &OpAmp,
    freqs_hz: &[f64],
    vin_pk: f64,
    swing_pk: f64,
) -> Result<Levels, AnalysisError> {
    check_amplitudes(vin_pk, swing_pk)?;
    if freqs_hz.is_empty() || freqs_hz.iter().any(|f| !(f.is_finite() && *f > 0.0)) {
        return Err(AnalysisError::Input(InputError::new(
            "points",
            "level frequencies must be positive and finite, at least one",
        )));
    }
    let merged = merge_stages(stages)?;
    let compiled = Compiled::new(&merged.netlist, op)?;
    let assembled = compiled.assemble(&merged.netlist);
    let mut solver = Solver::new(compiled.n);
    let cols: Vec<usize> = merged
        .stage_outputs
        .iter()
        .map(|&node| compiled.node_col.get(node).copied().flatten().unwrap_or(0))
        .collect();
    let mut curves: Vec<Vec<f64>> = vec![Vec::with_capacity(freqs_hz.len()); cols.len()];
    for &f in freqs_hz {
        transfer_at(
            &compiled,
            &assembled,
            &mut solver,
            Complex64::new(0.0, 2.0 * PI * f),
        )?;
        let x = solver.solution();
        for (curve, &c) in curves.iter_mut().zip(&cols) {
            curve.push(20.0 * fmath::log10(fmath::cnorm(x[c])));
        }
    }
    from_curves(freqs_hz, curves, vin_pk, swing_pk)
}

/// The levels of a board from its stage curves already computed: `curves[k][i]` is stage k's
/// output relative to the input in dB at `freqs_hz[i]` (the page's built sweep gives them on
/// the way). Peak, peak output for `vin_pk` and headroom against `swing_pk` as in
/// [`stages_levels`].
///
/// # Errors
/// `vin` / `swing` when not positive and finite; `points` when a curve's length differs from the
/// frequency list's or the list is empty.
pub fn from_curves(
    freqs_hz: &[f64],
    curves: Vec<Vec<f64>>,
    vin_pk: f64,
    swing_pk: f64,
) -> Result<Levels, AnalysisError> {
    check_amplitudes(vin_pk, swing_pk)?;
    if freqs_hz.is_empty() || curves.iter().any(|c| c.len() != freqs_hz.len()) {
        return Err(AnalysisError::Input(InputError::new(
            "points",
            "each stage curve needs one level per frequency, at least one",
        )));
    }
    let stages_out = curves
        .into_iter()
        .enumerate()
        .map(|(k, gain_db)| {
            let (i_peak, &peak_db) =
                gain_db
                    .iter()
                    .enumerate()
                    .fold((0, &f64::NEG_INFINITY), |(bi, bv), (i, v)| {
                        if v > bv {
                            (i, v)
                        } else {
                            (bi, bv)
                        }
                    });
            let mut level = StageLevel {
                stage: k + 1,
                peak_hz: freqs_hz[i_peak],
                gain_db,
                peak_db: f64::NEG_INFINITY,
                peak_out_v: 0.0,
                headroom_db: f64::INFINITY,
            };
            level.set_peak(freqs_hz[i_peak], peak_db, vin_pk, swing_pk);
            level
        })
        .collect();
    let mut levels = Levels {
        freqs_hz: freqs_hz.to_vec(),
        vin_pk,
        swing_pk,
        stages: stages_out,
        warnings: Vec::new(),
    };
    levels.recheck();
    Ok(levels)
}

/// Headroom below which a stage is called out, dB: at 1 dB a swing figure's own spread (supply
/// sag, load, temperature; common practice) already eats the margin.
pub const HEADROOM_WARN_DB: f64 = 1.0;

impl StageLevel {
    /// Sets the peak (a refined one, found between grid points) and the figures that follow.
    pub fn set_peak(&mut self, peak_hz: f64, peak_db: f64, vin_pk: f64, swing_pk: f64) {
        self.peak_hz = peak_hz;
        self.peak_db = peak_db;
        self.peak_out_v = vin_pk * fmath::powf(10f64, peak_db / 20.0);
        self.headroom_db = 20.0 * fmath::log10(swing_pk / self.peak_out_v);
    }
}

impl Levels {
    /// Rewrites the warnings from the stages' peaks: one sentence per stage whose headroom is
    /// below [`HEADROOM_WARN_DB`].
    pub fn recheck(&mut self) {
        self.warnings = self
            .stages
            .iter()
            .filter(|st| st.headroom_db < HEADROOM_WARN_DB)
            .map(|st| {
                let what = if st.headroom_db < 0.0 {
                    "beyond"
                } else {
                    "within 1 dB of"
                };
                format!(
                    "stage {} reaches {} peak at {} for {} in, {what} the {} swing \
                     (headroom {:.1} dB); lower the input or the gain of the stages before it",
                    st.stage,
                    format_si_unit(st.peak_out_v, 4, "V"),
                    format_si_unit(st.peak_hz, 4, "Hz"),
                    format_si_unit(self.vin_pk, 4, "V"),
                    format_si_unit(self.swing_pk, 4, "V"),
                    st.headroom_db
                )
            })
            .collect();
    }
}

/// Levels of `board`.
///
/// # Errors
/// As [`stages_levels`].
pub fn board_levels(
    board: &Board,
    freqs_hz: &[f64],
    vin_pk: f64,
    swing_pk: f64,
) -> Result<Levels, AnalysisError> {
    let nets: Vec<&StageNetlist> = board.stages.iter().map(|s| &s.netlist).collect();
    stages_levels(&nets, &board.op_amp, freqs_hz, vin_pk, swing_pk)
}

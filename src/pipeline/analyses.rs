//! The one analysis plan: a composed design → every analysed figure of the board as built.
//!
//! The page, the design JSON, the text report and the command line all present the result of
//! [`analyses`]; none of them runs an analysis of its own, so a figure is the same wherever it is
//! shown. The grids and the methods are the named constants below.
//!
//! Definitions, chosen as an analog engineer reads a board:
//! - **Passband gain** is measured on the built board's own response (the banded nodal solve of
//!   the whole loaded cascade, with the op amp and the rounded parts) at the passband reference
//!   frequency [`passband_ref_hz`], not taken as the product of the sections' gains: a band-pass
//!   section's gain is its peak at its own f0, and the product of those is not the board's gain.
//! - **Signal band** ([`signal_band_hz`]) is the band the signal occupies: `noiseband` when given,
//!   else the passband (low-pass: from the span's start to the pass edge or cutoff; band-pass:
//!   between the pass edges; high-pass: from the pass edge to [`HIGH_PASS_TOP`] times it). Noise
//!   is integrated over it and the SNR uses the measured passband gain.
//! - **Slew need** of a stage is the largest `2π·f·|V_k(f)|·vin` over the signal band, from the
//!   same per-stage levels of the loaded board that the headroom uses, refined between grid
//!   points.
//! - **Levels**: each stage's peak on the plot grid, refined between its neighbours, so a narrow
//!   peak is not missed.

use super::{ideal_board, Design};
use crate::analysis::built::{self, refine_max, BoardSolver, BuiltSweep};
use crate::analysis::circuit::AnalysisError;
use crate::analysis::noise::{self, NoiseKind, NoiseReport};
use crate::analysis::poles::{self, StagePoles};
use crate::analysis::sensitivity::{self, StageSensitivity};
use crate::analysis::timeresp::{self, StepFigures, TimeResponse, TimeSettings};
use crate::analysis::{levels, notch, opamp_need};
use crate::board::Board;
use crate::fmath;
use crate::netlist::StageNetlist;
use crate::spec::{Edge, ResponseClass};
use serde::Serialize;

/// Frequencies of the plots, the stage levels, the input impedance and the tolerance study's
/// envelope: log-spaced over the design's span.
pub const PLOT_POINTS: usize = 241;

/// The noise densities are computed on every second plot frequency: they are smooth on a log axis,
/// and the noise solve (one adjoint solve per frequency) is the largest analysis of an edit. The
/// band integral does not use this grid (it integrates adaptively).
pub const NOISE_EVERY: usize = 2;

/// Samples of the step responses.
pub const STEP_POINTS: usize = 600;

/// Top of a high-pass's signal band, as a multiple of its pass edge (two decades), when
/// `noiseband` does not say.
pub const HIGH_PASS_TOP: f64 = 100.0;

/// The least |Z| a source is expected to drive, Ω: a typical op-amp or sensor output drives
/// 1–2 kΩ and more (common practice; below that its output stage current-limits or loses
/// linearity). A board whose input impedance falls below this over the signal band is warned of.
pub const SOURCE_LOAD_MIN_OHM: f64 = 1e3;

/// The frequency at which the passband gain is read: DC for a low-pass, the centre for a
/// band-pass, a decade above the cutoff for a high-pass (in the passband, and well below where
/// the op amp's gain-bandwidth takes gain away). The tolerance study reads its runs' gain here too.
pub fn passband_ref_hz(design: &Design) -> f64 {
    match design.state.requirement.class {
        ResponseClass::LowPass | ResponseClass::BandStop => 0.0,
        ResponseClass::HighPass => design.synthesis.fc_hz * 10.0,
        ResponseClass::BandPass => design.synthesis.fc_hz,
    }
}

/// The depth the limits ask of a notch, dB below the passband gain: the stopband depth of a
/// band-stop's mask (its stopband is the notch); `None` for the other classes, whose zeros only
/// serve the stopband the verdict checks as a whole.
pub fn required_notch_depth_db(design: &Design) -> Option<f64> {
    match design.state.requirement.class {
        ResponseClass::BandStop => design.state.requirement.mask.map(|m| m.astop_db),
        ResponseClass::LowPass | ResponseClass::HighPass | ResponseClass::BandPass => None,
    }
}

/// The band the signal occupies, Hz (see the module docs).
pub fn signal_band_hz(design: &Design) -> (f64, f64) {
    if let Some(band) = design.state.signal.noise_band_hz {
        return band;
    }
    let syn = &design.synthesis;
    let pass = design.state.requirement.mask.map(|m| m.pass);
    let (span_lo, _) = design.span_hz;
    match (syn.class, pass) {
        (ResponseClass::LowPass, Some(Edge::Single(f))) => (span_lo.min(f / 10.0), f),
        (ResponseClass::LowPass, _) => (span_lo.min(syn.fc_hz / 10.0), syn.fc_hz),
        (ResponseClass::BandPass, _) => band_pass_edges_hz(design),
        (ResponseClass::HighPass, Some(Edge::Single(f))) => (f, f * HIGH_PASS_TOP),
        (ResponseClass::HighPass, _) => (syn.fc_hz, syn.fc_hz * HIGH_PASS_TOP),
        // A band-stop passes everything outside its notch: the whole span.
        (ResponseClass::BandStop, _) => design.span_hz,
    }
}

/// A band-pass's pass edges, Hz: the limits' when given, else the edges `f0²/hi` and
/// `hi = bw/2 + √(bw²/4 + f0²)` of its bandwidth around its centre (geometric symmetry).
fn band_pass_edges_hz(design: &Design) -> (f64, f64) {
    let syn = &design.synthesis;
    if let Some(Edge::Pair(lo, hi)) = design.state.requirement.mask.map(|m| m.pass) {
        return (lo, hi);
    }
    let bw = syn.bw_hz.unwrap_or(syn.fc_hz);
    let hi = bw / 2.0 + (bw * bw / 4.0 + syn.fc_hz * syn.fc_hz).sqrt();
    (syn.fc_hz * syn.fc_hz / hi, hi)
}

/// The band over which the board's GBW need is checked, Hz: the passband as the signal uses it.
/// Low-pass: from the bottom of the signal band to the pass edge (the cutoff without limits);
/// band-pass: between its pass edges; high-pass: from its pass edge (the cutoff) to the top of the
/// signal band. A signal band that does not reach past the edge falls back to a decade below the
/// low-pass edge, or [`HIGH_PASS_TOP`] times the high-pass edge.
pub fn gbw_band_hz(design: &Design) -> (f64, f64) {
    let syn = &design.synthesis;
    let (signal_lo, signal_hi) = signal_band_hz(design);
    let edge = match design.state.requirement.mask.map(|m| m.pass) {
        Some(Edge::Single(f)) => f,
        _ => syn.fc_hz,
    };
    match syn.class {
        ResponseClass::LowPass if signal_lo < edge => (signal_lo, edge),
        ResponseClass::LowPass => (edge / 10.0, edge),
        ResponseClass::BandPass => band_pass_edges_hz(design),
        ResponseClass::HighPass if signal_hi > edge => (edge, signal_hi),
        ResponseClass::HighPass => (edge, edge * HIGH_PASS_TOP),
        ResponseClass::BandStop => (signal_lo, signal_hi),
    }
}

/// The noise contribution of one part, for the summary.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseShare {
    /// Part reference, or `U1 en` style for op-amp sources.
    #[serde(rename = "ref")]
    pub reference: String,
    /// What kind of source.
    pub kind: NoiseKind,
    /// RMS output noise over the band from this source, V.
    pub rms_v: f64,
    /// Share of the total output noise power, 0–1.
    pub share: f64,
}

/// The noise in a few numbers.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseSummary {
    /// Integration band, Hz (the signal band).
    pub band_hz: (f64, f64),
    /// Total RMS output noise over the band, V.
    pub rms_v: f64,
    /// Signal-to-noise ratio for the input amplitude `vin` through the measured passband gain, dB.
    pub snr_db: Option<f64>,
    /// The sources, largest first.
    pub sources: Vec<NoiseShare>,
}

/// One stage's largest output level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LevelSummary {
    /// Stage number, 1-based.
    pub stage: usize,
    /// Largest gain from the board input to this stage's output, dB.
    pub peak_db: f64,
    /// Where it peaks, Hz.
    pub peak_hz: f64,
    /// Output amplitude there for `vin`, V peak.
    pub peak_out_v: f64,
    /// Margin to the swing `swing`, dB (negative: clips).
    pub headroom_db: f64,
}

/// Everything the views show beyond the synthesis: each part computed on the board as built.
/// A part that cannot be computed is `None`, with its reason in `errors`. The curves the page
/// plots are kept beside the figures but are not part of the JSON.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Analyses {
    /// The built board's passband gain, dB, measured at `passband_ref_hz`.
    pub passband_gain_db: Option<f64>,
    /// Where the passband gain is read, Hz (0 = DC).
    pub passband_ref_hz: f64,
    /// The signal band: noise band and slew band, Hz.
    pub signal_band_hz: (f64, f64),
    /// The verdict on the board as built (the design JSON writes it at the top level, `as_built`).
    #[serde(skip)]
    pub as_built: Option<super::verdict::AsBuilt>,
    /// Normalized sensitivities of each stage's f0 and Q to every part.
    pub sensitivities: Option<Vec<StageSensitivity>>,
    /// Noise summary over the signal band.
    pub noise: Option<NoiseSummary>,
    /// Step response figures of the built board.
    pub step: Option<StepFigures>,
    /// Step response figures of the ideal design (exact parts, ideal op amp).
    pub step_ideal: Option<StepFigures>,
    /// Op-amp requirements: the board's GBW need over [`gbw_band_hz`], each stage's own GBW share
    /// and slew rate.
    pub opamp_needs: Option<opamp_need::OpAmpNeeds>,
    /// Each stage's peak level and headroom.
    pub levels: Option<Vec<LevelSummary>>,
    /// The board's least input impedance over the signal band and where.
    pub input_impedance: Option<InputImpedance>,
    /// The output level of every op amp inside a multi-op-amp stage (the stage's own output is
    /// in `levels`), with its headroom against the swing.
    pub inner_levels: Option<Vec<InnerLevel>>,
    /// The built board's notch near each stage's zero frequency: where, and its depth below the
    /// passband gain (empty without stages with zeros).
    pub notches: Option<Vec<notch::NotchDepth>>,
    /// Target and achieved poles per stage.
    pub poles: Option<Vec<StagePoles>>,
    /// The output's DC offset from the op amps' `vos` and `ib`, each source's share.
    pub dc: Option<crate::analysis::dc::DcErrors>,
    /// Soft problems found by the analyses (a stage that clips, …).
    pub warnings: Vec<String>,
    /// Analyses that could not be done, with the reason.
    pub errors: Vec<String>,
    /// The built board on the plot grid (response, stage levels, input impedance).
    #[serde(skip)]
    pub sweep: Option<BuiltSweep>,
    /// The noise densities of the total and of every source.
    #[serde(skip)]
    pub noise_report: Option<NoiseReport>,
    /// The built board's step response.
    #[serde(skip)]
    pub step_response: Option<TimeResponse>,
    /// The ideal design's step response on the same time span.
    #[serde(skip)]
    pub step_response_ideal: Option<TimeResponse>,
}

/// The value of an analysis, or `None` with its reason added to `errors`. A singular board is
/// diagnosed by the dense reference analysis, whose message names the likely cause.
fn keep<T>(
    errors: &mut Vec<String>,
    board: &Board,
    what: &str,
    result: Result<T, AnalysisError>,
) -> Option<T> {
    match result {
        Ok(v) => Some(v),
        Err(AnalysisError::Singular(message)) => {
            let cause = super::diagnose_singular(board).unwrap_or(message);
            errors.push(format!("{what}: singular circuit equations: {cause}"));
            None
        }
        Err(e) => {
            errors.push(format!("{what}: {e}"));
            None
        }
    }
}

/// The plot grid of a design.
pub fn plot_grid(design: &Design) -> Vec<f64> {
    let (lo, hi) = design.span_hz;
    crate::response::log_frequencies(lo, hi, PLOT_POINTS).unwrap_or_default()
}

/// Runs every analysis of the board as built.
pub fn analyses(design: &Design) -> Analyses {
    let board = &design.board;
    let signal = &design.state.signal;
    let mut errors = Vec::new();
    let mut warnings = Vec::new();
    let freqs = plot_grid(design);
    let band = signal_band_hz(design);
    let ref_hz = passband_ref_hz(design);

    // One compiled board serves the sweep, the passband gain, the levels and the slew need.
    let mut solver = keep(
        &mut errors,
        board,
        "board response",
        BoardSolver::of_board(board),
    );
    let sweep = solver.as_mut().and_then(|solver| {
        keep(
            &mut errors,
            board,
            "board response",
            built::sweep(solver, &freqs),
        )
    });
    let gain = solver.as_mut().and_then(|solver| {
        keep(
            &mut errors,
            board,
            "passband gain",
            solver.solve_at(ref_hz).map(fmath::cnorm),
        )
    });

    let noise_report = gain.and_then(|gain| {
        let settings = noise::NoiseSettings {
            freqs_hz: freqs.iter().copied().step_by(NOISE_EVERY).collect(),
            band_hz: band,
            signal_v_rms: Some(signal.vin_pk * gain / std::f64::consts::SQRT_2),
        };
        keep(
            &mut errors,
            board,
            "noise",
            noise::board_noise(board, &settings),
        )
    });
    let noise = noise_report.as_ref().map(|report| {
        let mut sources: Vec<NoiseShare> = report
            .sources
            .iter()
            .map(|s| NoiseShare {
                reference: s.reference.clone(),
                kind: s.kind,
                rms_v: s.rms_v,
                share: s.share,
            })
            .collect();
        crate::sort::sort_by(&mut sources, |a, b| b.share.total_cmp(&a.share));
        NoiseSummary {
            band_hz: report.band_hz,
            rms_v: report.rms_v,
            snr_db: report.snr_db,
            sources,
        }
    });

    let time = TimeSettings {
        n_points: STEP_POINTS,
        t_end_s: None,
    };
    let step_response = keep(
        &mut errors,
        board,
        "step response",
        timeresp::board_response(board, &time),
    );
    // The ideal step on the built one's time span, so the two curves share an axis.
    let ideal_time = TimeSettings {
        n_points: STEP_POINTS,
        t_end_s: step_response.as_ref().and_then(|r| r.t_s.last().copied()),
    };
    let step_response_ideal = keep(
        &mut errors,
        board,
        "ideal step response",
        timeresp::board_response(&ideal_board(board), &ideal_time),
    );

    let levels = match (solver.as_mut(), sweep.as_ref()) {
        (Some(solver), Some(sweep)) => keep(
            &mut errors,
            board,
            "stage levels",
            refined_levels(solver, sweep, signal.vin_pk, signal.swing_pk),
        ),
        _ => None,
    };
    if let Some(l) = &levels {
        warnings.extend(l.warnings.iter().cloned());
    }
    let input_impedance = solver
        .as_mut()
        .and_then(|solver| least_input_impedance(solver, &freqs, band));
    warnings.extend(input_impedance.as_ref().and_then(input_impedance_warning));
    let inner_levels = match (solver.as_mut(), sweep.as_ref()) {
        (Some(solver), Some(sweep)) => Some(inner_op_amp_levels(
            solver,
            sweep,
            signal.vin_pk,
            signal.swing_pk,
        )),
        _ => None,
    };
    for inner in inner_levels.iter().flatten() {
        if inner.level.headroom_db < 0.0 {
            warnings.push(format!(
                "stage {}: {} inside the stage clips: {}",
                inner.level.stage,
                inner.reference,
                crate::export::words::headroom_line(&inner.level)
            ));
        }
    }
    let notches = match (solver.as_mut(), gain) {
        (Some(solver), Some(gain)) => Some(notch::notch_depths(
            board,
            solver,
            20.0 * fmath::log10(gain),
        )),
        _ => None,
    };
    let opamp_needs = match (solver.as_mut(), sweep.as_ref(), gain) {
        (Some(solver), Some(sweep), Some(gain)) => {
            let slew = opamp_need::slew_points(solver, sweep, band, signal.vin_pk);
            let nets: Vec<&StageNetlist> = board.stages.iter().map(|s| &s.netlist).collect();
            keep(
                &mut errors,
                board,
                "op-amp requirements",
                opamp_need::stages_needs(
                    &nets,
                    &board.op_amp,
                    signal.drift_pct,
                    &slew,
                    gbw_band_hz(design),
                    band.1,
                    signal.vin_pk * gain,
                ),
            )
        }
        _ => None,
    };
    let as_built = match (solver.as_mut(), gain) {
        (Some(solver), Some(gain)) => Some(super::verdict::as_built(
            design,
            solver,
            20.0 * fmath::log10(gain),
        )),
        _ => None,
    };
    if let Some(verdict) = &as_built {
        warnings.extend(super::verdict::departures(design, verdict));
    }
    let sensitivities = keep(
        &mut errors,
        board,
        "sensitivities",
        sensitivity::board_sensitivities(board),
    );
    let poles = keep(&mut errors, board, "poles", poles::board_poles(board));
    Analyses {
        passband_gain_db: gain.map(|g| 20.0 * fmath::log10(g)),
        passband_ref_hz: ref_hz,
        signal_band_hz: band,
        as_built,
        sensitivities,
        noise,
        step: step_response.as_ref().map(|r| r.figures),
        step_ideal: step_response_ideal.as_ref().map(|r| r.figures),
        opamp_needs,
        levels: levels.map(|l| {
            l.stages
                .iter()
                .map(|s| LevelSummary {
                    stage: s.stage,
                    peak_db: s.peak_db,
                    peak_hz: s.peak_hz,
                    peak_out_v: s.peak_out_v,
                    headroom_db: s.headroom_db,
                })
                .collect()
        }),
        input_impedance,
        inner_levels,
        notches,
        poles,
        dc: keep(
            &mut errors,
            board,
            "DC errors",
            crate::analysis::dc::board_dc(board),
        ),
        warnings,
        errors,
        sweep,
        noise_report,
        step_response,
        step_response_ideal,
    }
}

/// The stage levels on the plot grid, each stage's peak refined between its grid neighbours.
fn refined_levels(
    solver: &mut BoardSolver,
    sweep: &BuiltSweep,
    vin_pk: f64,
    swing_pk: f64,
) -> Result<levels::Levels, AnalysisError> {
    let mut levels =
        levels::from_curves(&sweep.freq_hz, sweep.levels_db.clone(), vin_pk, swing_pk)?;
    let freqs = &sweep.freq_hz;
    for (k, stage) in levels.stages.iter_mut().enumerate() {
        let Some(i) = freqs.iter().position(|&f| f == stage.peak_hz) else {
            continue;
        };
        let from = freqs[i.saturating_sub(1)];
        let to = freqs[(i + 1).min(freqs.len() - 1)];
        let (f, db) = refine_max(solver, from, to, |solver, f| match solver.solve_at(f) {
            Ok(_) => 20.0 * fmath::log10(fmath::cnorm(solver.stage_output(k))),
            Err(_) => f64::NAN,
        });
        if db > stage.peak_db {
            stage.set_peak(f, db, vin_pk, swing_pk);
        }
    }
    levels.recheck();
    Ok(levels)
}

/// The level of an op amp inside a multi-op-amp stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InnerLevel {
    /// The op amp's reference (`U2`).
    pub reference: String,
    /// Its output's peak and headroom, as a stage's (`stage` is the stage it sits in).
    #[serde(flatten)]
    pub level: LevelSummary,
}

/// Each inner op amp's largest output over the plot grid of `sweep`, refined between the
/// neighbours of the grid's largest, for an input of `vin_pk` against `swing_pk`.
fn inner_op_amp_levels(
    solver: &mut BoardSolver,
    sweep: &BuiltSweep,
    vin_pk: f64,
    swing_pk: f64,
) -> Vec<InnerLevel> {
    let freqs_hz = &sweep.freq_hz;
    solver
        .inner_op_amps()
        .into_iter()
        .zip(&sweep.inner_db)
        .enumerate()
        .filter_map(|(j, ((stage, reference), curve))| {
            // The first grid point of the largest level.
            let (i, grid_db) = curve.iter().copied().enumerate().fold(
                None,
                |best: Option<(usize, f64)>, (i, db)| match best {
                    Some((_, b)) if !(db > b) => best,
                    _ if db.is_nan() => best,
                    _ => Some((i, db)),
                },
            )?;
            let from = freqs_hz[i.saturating_sub(1)];
            let to = freqs_hz[(i + 1).min(freqs_hz.len() - 1)];
            let (f, db) = refine_max(solver, from, to, |solver, f| match solver.solve_at(f) {
                Ok(_) => 20.0 * fmath::log10(fmath::cnorm(solver.inner_output(j))),
                Err(_) => f64::NAN,
            });
            let (peak_hz, peak_db) = if db > grid_db {
                (f, db)
            } else {
                (freqs_hz[i], grid_db)
            };
            let peak_out_v = vin_pk * fmath::powf(10f64, peak_db / 20.0);
            Some(InnerLevel {
                reference,
                level: LevelSummary {
                    stage: stage + 1,
                    peak_db,
                    peak_hz,
                    peak_out_v,
                    headroom_db: 20.0 * fmath::log10(swing_pk / peak_out_v),
                },
            })
        })
        .collect()
}

/// The board's least input impedance over the signal band.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct InputImpedance {
    /// The least |Z_in| over the signal band, Ω.
    pub min_ohm: f64,
    /// Where it is least, Hz.
    pub at_hz: f64,
}

/// The board's least input impedance over the signal band `band_hz`: the plot grid's points
/// inside it and its ends, refined between the neighbours of the least; `None` when the board
/// cannot be solved anywhere in the band.
fn least_input_impedance(
    solver: &mut BoardSolver,
    grid_hz: &[f64],
    band_hz: (f64, f64),
) -> Option<InputImpedance> {
    let (lo, hi) = band_hz;
    let mut points = vec![lo];
    points.extend(grid_hz.iter().copied().filter(|&f| f > lo && f < hi));
    points.push(hi);
    let neg_z = |solver: &mut BoardSolver, f: f64| match solver.solve_at(f) {
        Ok(_) => -solver.input_impedance_ohm(),
        Err(_) => f64::NAN,
    };
    let values: Vec<f64> = points.iter().map(|&f| neg_z(solver, f)).collect();
    let i_best = values
        .iter()
        .enumerate()
        .filter(|(_, v)| v.is_finite())
        .max_by(|a, b| a.1.total_cmp(b.1))
        .map(|(i, _)| i)?;
    let from = points[i_best.saturating_sub(1)];
    let to = points[(i_best + 1).min(points.len() - 1)];
    let (f, v) = refine_max(solver, from, to, neg_z);
    (v.is_finite()).then_some(InputImpedance {
        min_ohm: -v,
        at_hz: f,
    })
}

/// A warning when the board's least input impedance is below [`SOURCE_LOAD_MIN_OHM`], with the
/// value, where, and what raises it.
fn input_impedance_warning(z: &InputImpedance) -> Option<String> {
    (z.min_ohm < SOURCE_LOAD_MIN_OHM).then(|| {
        format!(
            "the board's input impedance falls to {} at {}, below the {} a typical op-amp or \
             sensor output drives; raise the impedance level (rlevel) or put a buffer before the \
             filter",
            crate::units::format_si_unit(z.min_ohm, 3, "Ω"),
            crate::units::format_si_unit(z.at_hz, 4, "Hz"),
            crate::units::format_si_unit(SOURCE_LOAD_MIN_OHM, 3, "Ω")
        )
    })
}

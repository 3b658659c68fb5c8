//! The composer: a link's state → a [`Design`] with everything the views show.
//!
//! It reads like the path a design takes:
//! 1. [`crate::design::synthesize`]: requirement → order → prototype → transform → sections;
//! 2. [`crate::board::Board::build`]: sections → stages with standard values and overrides;
//! 3. the plot span, the family comparison and the warnings gathered from every step.
//! Sweeps ([`sweep`]) and the tolerance study ([`spread`]) run on a composed design.

use crate::analysis::tolerance::{
    CutoffDefinition, MonteCarlo, MonteCarloSettings, PartDistribution, PartTolerance, Summary,
    Tolerances,
};
use crate::board::{Board, BuildChoices, ImpedanceLevel};
use crate::design::{self, Synthesis};
use crate::error::InputError;
use crate::link::{Distribution, LinkState};
use crate::mna;
use crate::opamp::OpAmp;
use crate::order::{self, FamilyOrder};
use crate::spec::{Edge, Family, Mask, ResponseClass};
use num_complex::Complex64;

const TWO_PI: f64 = 2.0 * std::f64::consts::PI;

/// A composed design: the state it came from, the synthesis, the board and its context.
#[derive(Debug, Clone)]
pub struct Design {
    /// The validated link state.
    pub state: LinkState,
    /// Poles and sections.
    pub synthesis: Synthesis,
    /// The board as built (rounded parts, overrides, op-amp model).
    pub board: Board,
    /// Frequency span of the plots and sweeps, Hz.
    pub span_hz: (f64, f64),
    /// Minimum order of every family for the mask, when there is one.
    pub family_orders: Option<Vec<FamilyOrder>>,
    /// Every soft problem of every step, in pipeline order.
    pub warnings: Vec<String>,
}

/// One row of a sweep.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SweepRow {
    /// Frequency, Hz.
    pub freq_hz: f64,
    /// 20·log10|H|, dB.
    pub gain_db: f64,
    /// Phase, degrees, unwrapped along the sweep.
    pub phase_deg: f64,
    /// Group delay −d(arg H)/dω, s.
    pub delay_s: f64,
}

/// The build choices the link asks for.
pub fn build_choices(state: &LinkState) -> BuildChoices {
    BuildChoices {
        topology: state.topology,
        r_series: state.r_series,
        c_series: state.c_series,
        impedance: state
            .r_level_ohm
            .map_or(ImpedanceLevel::Auto, ImpedanceLevel::Ohms),
        c_ratio: state.c_ratio,
        r_ratio: state.r_ratio,
        rounding: state.rounding,
        overrides: state.overrides.clone(),
        op_amp: state.op_amp,
    }
}

/// Composes the design a link state describes.
///
/// # Errors
/// The first hard problem of any step, naming its link key (an infeasible stage, an order above
/// 20, an unknown part in `set` …).
pub fn compose(state: &LinkState) -> Result<Design, InputError> {
    let synthesis = design::synthesize(&state.requirement, &state.stage_order)?;
    let board = Board::build(&synthesis.sections, &build_choices(state))?;
    let family_orders = state.requirement.mask.as_ref().map(|mask| {
        let ripple = match state.requirement.family {
            Family::Chebyshev { ripple_db } => Some(ripple_db),
            _ => None,
        };
        family_comparison(state.requirement.class, mask, ripple)
    });
    let mut warnings = synthesis.warnings.clone();
    warnings.extend(board.warnings.iter().cloned());
    for stage in &board.stages {
        // Stage warnings already name their stage.
        warnings.extend(stage.warnings.iter().cloned());
    }
    let span_hz = state
        .span_hz
        .unwrap_or_else(|| auto_span(&synthesis, state.requirement.mask.as_ref()));
    Ok(Design {
        state: state.clone(),
        synthesis,
        board,
        span_hz,
        family_orders,
        warnings,
    })
}

/// The family comparison for a mask, remembered for the last mask asked about: the page
/// recomposes on every keystroke, and the comparison (a search over orders for three families)
/// is most of the composer's time while the limits themselves rarely change.
fn family_comparison(class: ResponseClass, mask: &Mask, ripple: Option<f64>) -> Vec<FamilyOrder> {
    type Key = (ResponseClass, Mask, Option<f64>);
    thread_local! {
        static LAST: std::cell::RefCell<Option<(Key, Vec<FamilyOrder>)>> = const { std::cell::RefCell::new(None) };
    }
    let key: Key = (class, *mask, ripple);
    LAST.with(|last| {
        if let Some((k, rows)) = last.borrow().as_ref() {
            if *k == key {
                return rows.clone();
            }
        }
        let rows = order::compare_families(class, mask, ripple);
        *last.borrow_mut() = Some((key, rows.clone()));
        rows
    })
}

/// The plot span: two decades below and above the frequencies that matter, on decade bounds.
fn auto_span(synthesis: &Synthesis, mask: Option<&Mask>) -> (f64, f64) {
    let mut key = vec![synthesis.fc_hz];
    if let Some(bw) = synthesis.bw_hz {
        key.push(synthesis.fc_hz + bw / 2.0);
        key.push((synthesis.fc_hz - bw / 2.0).max(synthesis.fc_hz / 10.0));
    }
    if let Some(m) = mask {
        for edge in [m.pass, m.stop] {
            match edge {
                Edge::Single(f) => key.push(f),
                Edge::Pair(lo, hi) => key.extend([lo, hi]),
            }
        }
    }
    let lo = key.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = key.iter().cloned().fold(0.0, f64::max);
    // A small allowance keeps 999.9999… Hz on the decade of 1 kHz.
    let lo = 10f64.powf(((lo / 100.0).log10() + 1e-9).floor());
    let hi = 10f64.powf(((hi * 100.0).log10() - 1e-9).ceil());
    (lo.max(1e-4), hi.min(1e11))
}

/// The board with exact (unrounded) part values and an ideal op amp: the design as synthesized.
pub fn ideal_board(board: &Board) -> Board {
    let mut ideal = board.with_ideal_parts();
    ideal.op_amp = OpAmp::ideal();
    ideal
}

/// Gain, unwrapped phase and group delay of the board (or, with `ideal`, of [`ideal_board`]) at
/// `n_points` log-spaced frequencies.
///
/// The group delay is −Δarg H/Δω over a symmetric step of ±10⁻⁴·ω around each point, with the
/// phase difference taken from the ratio H(ω+δ)/H(ω−δ) so it never wraps.
///
/// # Errors
/// A message when the nodal analysis meets a singular circuit.
pub fn sweep(
    design: &Design,
    from_hz: f64,
    to_hz: f64,
    n_points: usize,
    ideal: bool,
) -> Result<Vec<SweepRow>, String> {
    let freqs =
        crate::response::log_frequencies(from_hz, to_hz, n_points).map_err(|e| e.to_string())?;
    let board = if ideal {
        ideal_board(&design.board)
    } else {
        design.board.clone()
    };
    let merged = board.netlist();
    let h_at = |f: f64| -> Result<Complex64, String> {
        mna::netlist_response(&merged, &board.op_amp, Complex64::new(0.0, TWO_PI * f))
            .map(|(h, _)| h)
            .map_err(|e| e.message)
    };
    let mut rows = Vec::with_capacity(freqs.len());
    let mut previous: Option<(Complex64, f64)> = None;
    for f in freqs {
        let h = h_at(f)?;
        let step = 1e-4;
        let ratio = h_at(f * (1.0 + step))? / h_at(f * (1.0 - step))?;
        let delay_s = -ratio.arg() / (TWO_PI * f * 2.0 * step);
        // Unwrap: add the phase change from the last point, which is small on a fine sweep.
        let phase_rad = match previous {
            Some((h_prev, phase_prev)) => phase_prev + (h / h_prev).arg(),
            None => h.arg(),
        };
        previous = Some((h, phase_rad));
        rows.push(SweepRow {
            freq_hz: f,
            gain_db: 20.0 * h.norm().log10(),
            phase_deg: phase_rad.to_degrees(),
            delay_s,
        });
    }
    Ok(rows)
}

/// How the tolerance study reads a run's cutoff for this family: the ripple-band edge for
/// Chebyshev, −6.02 dB for Linkwitz-Riley, −3.01 dB otherwise.
pub fn cutoff_definition(family: Family) -> CutoffDefinition {
    let db = match family {
        Family::Chebyshev { ripple_db } => ripple_db,
        Family::LinkwitzRiley => 20.0 * 2f64.log10(),
        _ => 10.0 * 2f64.log10(),
    };
    CutoffDefinition::Attenuation { db }
}

/// The settings of the tolerance study the link asks for, over `n_points` frequencies.
pub fn study_settings(design: &Design, n_points: usize) -> Result<MonteCarloSettings, String> {
    let state = &design.state;
    let (lo, hi) = design.span_hz;
    let freqs_hz = crate::response::log_frequencies(lo, hi, n_points).map_err(|e| e.to_string())?;
    let distribution = match state.study.distribution {
        Distribution::Gaussian => PartDistribution::Gaussian {
            sigmas: state.study.sigmas,
        },
        Distribution::Uniform => PartDistribution::Uniform,
    };
    let class = state.requirement.class;
    let passband_ref_hz = match class {
        ResponseClass::LowPass => 0.0,
        // A decade above the cutoff: in the passband, and well below where the op amp's
        // gain-bandwidth starts to take gain away.
        ResponseClass::HighPass => design.synthesis.fc_hz * 10.0,
        ResponseClass::BandPass => design.synthesis.fc_hz,
    };
    Ok(MonteCarloSettings {
        runs: state.study.runs,
        seed: state.study.seed,
        tolerances: Tolerances {
            distribution,
            resistor_pct: state.rtol_pct,
            capacitor_pct: state.ctol_pct,
            overrides: state
                .tolerance_overrides
                .iter()
                .map(|(reference, pct)| PartTolerance {
                    reference: reference.clone(),
                    pct: *pct,
                })
                .collect(),
        },
        freqs_hz,
        percentiles: vec![5.0, 50.0, 95.0],
        cutoff: cutoff_definition(state.requirement.family),
        class,
        reference_gain: 10f64.powf(state.requirement.gain_db / 20.0),
        passband_ref_hz,
    })
}

/// Prepares the tolerance study of a design (chunked: call `step` until done, then `finish`).
///
/// # Errors
/// A message naming the setting or the circuit problem.
pub fn start_spread(design: &Design, n_points: usize) -> Result<MonteCarlo, String> {
    let settings = study_settings(design, n_points)?;
    MonteCarlo::new(
        &design.board,
        design.state.requirement.mask.as_ref(),
        settings,
    )
    .map_err(|e| e.to_string())
}

/// Runs the whole tolerance study of a design at 200 frequencies.
///
/// # Errors
/// As [`start_spread`].
pub fn spread(design: &Design) -> Result<Summary, String> {
    let mut study = start_spread(design, 200)?;
    while !study.is_done() {
        study.step(1000);
    }
    Ok(study.finish())
}

/// The part tolerances the parts list states (`rtol`, `ctol`).
pub fn bom_tolerances(design: &Design) -> crate::export::bom::Tolerances {
    crate::export::bom::Tolerances {
        resistor_pct: design.state.rtol_pct,
        capacitor_pct: design.state.ctol_pct,
    }
}

/// The `.ac` sweep written into the SPICE netlist: the plot span at 50 points per decade.
pub fn spice_sweep(design: &Design) -> crate::export::spice::AcSweep {
    crate::export::spice::AcSweep {
        points_per_decade: 50,
        f_start_hz: design.span_hz.0,
        f_stop_hz: design.span_hz.1,
    }
}

/// The highest frequency of the passband, Hz: where slew rate matters most (lp: the passband
/// edge or cutoff; bp: the upper edge; hp: the top of the plot span, since a high-pass passes on).
pub fn top_of_passband_hz(design: &Design) -> f64 {
    let syn = &design.synthesis;
    let mask_pass = design.state.requirement.mask.map(|m| m.pass);
    match (syn.class, mask_pass) {
        (ResponseClass::LowPass, Some(Edge::Single(f))) => f.max(syn.fc_hz),
        (ResponseClass::LowPass, _) => syn.fc_hz,
        (ResponseClass::BandPass, Some(Edge::Pair(_, hi))) => hi,
        (ResponseClass::BandPass, _) => {
            let bw = syn.bw_hz.unwrap_or(syn.fc_hz);
            bw / 2.0 + (bw * bw / 4.0 + syn.fc_hz * syn.fc_hz).sqrt()
        }
        (ResponseClass::HighPass, _) => design.span_hz.1,
    }
}

/// The noise contribution of one part, for the summary.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NoiseShare {
    /// Part reference, or `U1 en` style for op-amp sources.
    #[serde(rename = "ref")]
    pub reference: String,
    /// What kind of source.
    pub kind: crate::analysis::noise::NoiseKind,
    /// RMS output noise over the band from this source, V.
    pub rms_v: f64,
    /// Share of the total output noise power, 0–1.
    pub share: f64,
}

/// The noise in a few numbers.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NoiseSummary {
    /// Integration band, Hz.
    pub band_hz: (f64, f64),
    /// Total RMS output noise over the band, V.
    pub rms_v: f64,
    /// Signal-to-noise ratio for the input amplitude `vin` through the passband gain, dB.
    pub snr_db: Option<f64>,
    /// The sources, largest first.
    pub sources: Vec<NoiseShare>,
}

/// One stage's largest output level.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
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

/// Everything the views show beyond the response: each part computed on the board as built.
/// A part that cannot be computed is `None`, with its reason in `errors`.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Analyses {
    /// Normalized sensitivities of each stage's f0 and Q to every part.
    pub sensitivities: Option<Vec<crate::analysis::sensitivity::StageSensitivity>>,
    /// Noise summary over the noise band.
    pub noise: Option<NoiseSummary>,
    /// Step response figures of the built board.
    pub step: Option<crate::analysis::timeresp::StepFigures>,
    /// Step response figures of the ideal design (exact parts, ideal op amp).
    pub step_ideal: Option<crate::analysis::timeresp::StepFigures>,
    /// Op-amp requirements per stage (GBW for the drift limit, slew rate).
    pub opamp_needs: Option<crate::analysis::opamp_need::OpAmpNeeds>,
    /// Each stage's peak level and headroom.
    pub levels: Option<Vec<LevelSummary>>,
    /// Target and achieved poles per stage.
    pub poles: Option<Vec<crate::analysis::poles::StagePoles>>,
    /// Soft problems found by the analyses (a stage that clips, …).
    pub warnings: Vec<String>,
    /// Analyses that could not be done, with the reason.
    pub errors: Vec<String>,
}

/// Frequencies (log-spaced over the span) used by the noise and level analyses.
pub const ANALYSIS_POINTS: usize = 200;

/// The value of an analysis, or `None` with its reason added to `errors`.
fn keep<T>(
    errors: &mut Vec<String>,
    what: &str,
    result: Result<T, crate::analysis::circuit::AnalysisError>,
) -> Option<T> {
    match result {
        Ok(v) => Some(v),
        Err(e) => {
            errors.push(format!("{what}: {e}"));
            None
        }
    }
}

/// Runs every analysis of the board as built.
pub fn analyses(design: &Design) -> Analyses {
    use crate::analysis::{levels, noise, opamp_need, poles, sensitivity, timeresp};
    let board = &design.board;
    let signal = &design.state.signal;
    let mut errors = Vec::new();
    let mut warnings = Vec::new();
    let (lo, hi) = design.span_hz;
    let freqs = crate::response::log_frequencies(lo, hi, ANALYSIS_POINTS).unwrap_or_default();
    let gain = board.passband_gain().abs();
    let settings = noise::NoiseSettings {
        freqs_hz: freqs.clone(),
        band_hz: signal.noise_band_hz.unwrap_or((lo, hi)),
        signal_v_rms: Some(signal.vin_pk * gain / std::f64::consts::SQRT_2),
    };
    let noise = keep(&mut errors, "noise", noise::board_noise(board, &settings)).map(|report| {
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
        sources.sort_by(|a, b| b.share.total_cmp(&a.share));
        NoiseSummary {
            band_hz: report.band_hz,
            rms_v: report.rms_v,
            snr_db: report.snr_db,
            sources,
        }
    });
    let time = timeresp::TimeSettings {
        n_points: 400,
        t_end_s: None,
    };
    let step = keep(
        &mut errors,
        "step response",
        timeresp::board_response(board, &time),
    )
    .map(|r| r.figures);
    let step_ideal = keep(
        &mut errors,
        "ideal step response",
        timeresp::board_response(&ideal_board(board), &time),
    )
    .map(|r| r.figures);
    let vout_pk = signal.vin_pk * gain;
    let opamp_needs = keep(
        &mut errors,
        "op-amp requirements",
        opamp_need::board_needs(board, signal.drift_pct, top_of_passband_hz(design), vout_pk),
    );
    let levels = keep(
        &mut errors,
        "stage levels",
        levels::board_levels(board, &freqs, signal.vin_pk, signal.swing_pk),
    )
    .map(|l| {
        warnings.extend(l.warnings.iter().cloned());
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
    });
    let sensitivities = keep(
        &mut errors,
        "sensitivities",
        sensitivity::board_sensitivities(board),
    );
    let poles = keep(&mut errors, "poles", poles::board_poles(board));
    Analyses {
        sensitivities,
        noise,
        step,
        step_ideal,
        opamp_needs,
        levels,
        poles,
        warnings,
        errors,
    }
}

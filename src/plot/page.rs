//! The page's model: everything the design sheet shows for one link, computed natively.
//!
//! [`evaluate`] reads a link leniently (valid keys load, bad ones are listed), composes the design
//! (synthesis → board → analyses), and returns a [`View`] (text for the form, the summary, the
//! stage cards and the family comparison, ready to serialize for the page) together with the
//! [`PageModel`] that the plots, the exports and the tolerance study are drawn from. The wasm
//! facade only keeps the last good model and converts values at the boundary; the same functions
//! run in native tests, so the page shows exactly what the core computes.

use num_complex::Complex64;
use serde::Serialize;
use std::f64::consts::PI;

use super::figure::Figure;
use super::figures::{self, Curve, Histogram, PlotData, PlotKind, Sweep};
use crate::analysis::tolerance::{MonteCarlo, Summary};
use crate::board::Board;
use crate::design::Synthesis;
use crate::error::InputError;
use crate::export;
use crate::link::{self, LinkReport, LinkState};
use crate::mna;
use crate::netlist::PartKind;
use crate::order;
use crate::pipeline::{self, Design};
use crate::schematic;
use crate::spec::{Edge, Family, OrderChoice, ResponseClass};
use crate::topology::Topology;
use crate::units::format_si;

use super::axis::engineering_unit;

/// Frequencies of the plots and of the tolerance envelope.
pub const N_POINTS: usize = 241;

/// The percentiles of the tolerance band drawn on the gain plot ([`pipeline::study_settings`]
/// asks the study for these).
pub const STUDY_BAND: (f64, f64) = (5.0, 95.0);

/// An error shown beside its field.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FieldError {
    /// The link key (or `set:R3`) the message belongs to.
    pub key: String,
    /// What is wrong and what is accepted.
    pub message: String,
}

impl From<&InputError> for FieldError {
    fn from(e: &InputError) -> Self {
        FieldError {
            key: e.key.clone(),
            message: e.message.clone(),
        }
    }
}

/// One row of a stage card's target table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TargetRow {
    /// `f0`, `Q` or `gain`.
    pub what: String,
    /// The section's target, formatted.
    pub target: String,
    /// The value of the parts on the board, formatted.
    pub achieved: String,
    /// The relative error, formatted (`+0.12 %`).
    pub error: String,
    /// True when the error is large enough to call out (above 2 %).
    pub large: bool,
}

/// One part of a stage card.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PartRow {
    /// Reference designator.
    pub reference: String,
    /// Value on the board in engineering notation without unit (`4.99k`, `22n`), as the field
    /// shows it and the link's `set` key reads it.
    pub value: String,
    /// The value the synthesis asked for, with unit.
    pub ideal: String,
    /// What the part does.
    pub role: String,
}

/// Sensitivities of a stage's f0 and Q to one part, formatted.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SensitivityRow {
    /// Reference designator.
    pub reference: String,
    /// `S f0`, two decimals.
    pub f0: String,
    /// `S Q`, two decimals, or `–` for first order.
    pub q: String,
}

/// A stage card.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageView {
    /// Changes when the card's structure (circuit and part list) changes.
    pub key: String,
    /// 0-based index.
    pub index: usize,
    /// 1-based number.
    pub number: usize,
    /// "Stage 2 · second order".
    pub title: String,
    /// The circuit in words.
    pub circuit: String,
    /// f0, Q and gain: target against the board.
    pub rows: Vec<TargetRow>,
    /// The parts, in netlist order (op amps left out).
    pub parts: Vec<PartRow>,
    /// Sensitivities (empty when not computed).
    pub sensitivities: Vec<SensitivityRow>,
    /// What the op amp must have, in words (empty when not computed).
    pub needs: String,
    /// The stage's warnings.
    pub warnings: Vec<String>,
}

/// One family of the comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FamilyRow {
    /// Family name (Chebyshev with its ripple).
    pub family: String,
    /// Minimum order, or `—`.
    pub order: String,
    /// Why there is none, or a remark.
    pub note: String,
    /// True for the family of the design.
    pub current: bool,
}

/// What the page shows in text for one evaluation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct View {
    /// True when this evaluation replaced the drawn design (set by the caller that keeps models).
    pub committed: bool,
    /// True when the link is refused as a whole (its `v` is newer than this build).
    pub refused: bool,
    /// Problems with fields, each naming its key.
    pub errors: Vec<FieldError>,
    /// Link keys that were not used (unknown keys and notes), as sentences.
    pub ignored: Vec<String>,
    /// The design in one sentence.
    pub summary: String,
    /// Figures of merit in one line (cutoff, overshoot, noise …).
    pub figures: String,
    /// Design and board warnings.
    pub warnings: Vec<String>,
    /// One card per stage, in signal order.
    pub stages: Vec<StageView>,
    /// Minimum order per family for the mask.
    pub comparison: Vec<FamilyRow>,
    /// A line above the comparison.
    pub comparison_hint: String,
}

/// A design that was composed successfully, with everything the plots and exports need.
#[derive(Debug, Clone)]
pub struct PageModel {
    /// The composed design (link state, synthesis, board, span, family comparison), as the
    /// command line composes it.
    pub design: Design,
    /// The plot curves.
    pub data: PlotData,
    /// The text view.
    pub view: View,
    /// The last finished tolerance study of this design.
    pub study: Option<Summary>,
}

/// The outcome of [`evaluate`].
#[derive(Debug, Clone)]
pub struct Evaluation {
    /// The text view (errors included).
    pub view: View,
    /// The composed design, when there is one (also when some keys fell back to defaults).
    pub model: Option<PageModel>,
    /// True when the link must be refused as a whole (a `v` newer than this build).
    pub refused: bool,
}

/// Reads `query` and composes the design.
///
/// Never fails: problems are in `view.errors` (one per bad key, plus the design's own error);
/// `model` is `None` when no design could be made.
pub fn evaluate(query: &str) -> Evaluation {
    let report = link::parse(query);
    let mut errors: Vec<FieldError> = report.errors.iter().map(FieldError::from).collect();
    let ignored = ignored_of(&report);
    if report.refused() {
        let mut view = empty_view(errors, ignored);
        view.refused = true;
        return Evaluation {
            view,
            model: None,
            refused: true,
        };
    }
    match compose(&report.state) {
        Ok(mut model) => {
            model.view.errors = errors;
            model.view.ignored = ignored;
            Evaluation {
                view: model.view.clone(),
                model: Some(model),
                refused: false,
            }
        }
        Err(error) => {
            errors.push(FieldError::from(&error));
            Evaluation {
                view: empty_view(errors, ignored),
                model: None,
                refused: false,
            }
        }
    }
}

/// Reads `query` without composing: its bad values, its ignored keys and whether it is refused
/// as a whole (what the page needs to know before it fills the form from a link). The view has
/// no design (`committed: false`).
pub fn check(query: &str) -> View {
    let report = link::parse(query);
    let errors: Vec<FieldError> = report.errors.iter().map(FieldError::from).collect();
    let mut view = empty_view(errors, ignored_of(&report));
    view.refused = report.refused();
    view
}

fn empty_view(errors: Vec<FieldError>, ignored: Vec<String>) -> View {
    View {
        committed: false,
        refused: false,
        errors,
        ignored,
        summary: String::new(),
        figures: String::new(),
        warnings: Vec::new(),
        stages: Vec::new(),
        comparison: Vec::new(),
        comparison_hint: String::new(),
    }
}

fn ignored_of(report: &LinkReport) -> Vec<String> {
    let mut out: Vec<String> = report
        .unknown_keys
        .iter()
        .map(|key| format!("“{key}” is not a key this version knows"))
        .collect();
    out.extend(report.notes.iter().cloned());
    out
}

/// Unwraps a phase sequence (degrees) so that no step exceeds 180°.
fn unwrap_deg(phase: &mut [f64]) {
    let mut offset = 0.0;
    for i in 1..phase.len() {
        let raw = phase[i] + offset;
        let step = raw - phase[i - 1];
        let turns = (step / 360.0).round();
        offset -= turns * 360.0;
        phase[i] = raw - turns * 360.0;
    }
}

/// Group delay −dφ/dω from an unwrapped phase (degrees) on a frequency grid (Hz), by central
/// differences (one-sided at the ends).
fn delay_of(freq_hz: &[f64], phase_deg: &[f64]) -> Vec<f64> {
    let n = freq_hz.len();
    (0..n)
        .map(|i| {
            let (a, b) = (i.saturating_sub(1), (i + 1).min(n - 1));
            if a == b {
                return f64::NAN;
            }
            let dphi = (phase_deg[b] - phase_deg[a]).to_radians();
            let dw = 2.0 * PI * (freq_hz[b] - freq_hz[a]);
            -dphi / dw
        })
        .collect()
}

/// The ideal response of the synthesized sections on `freqs`.
fn ideal_sweep(synthesis: &Synthesis, freqs: &[f64]) -> Sweep {
    let points: Vec<_> = freqs
        .iter()
        .map(|&f| crate::response::point(&synthesis.sections, f))
        .collect();
    Sweep {
        freq_hz: freqs.to_vec(),
        gain_db: points.iter().map(|p| p.gain_db).collect(),
        phase_deg: points.iter().map(|p| p.phase_deg).collect(),
        delay_s: points.iter().map(|p| p.delay_s).collect(),
    }
}

/// The board's response by nodal analysis of the whole cascade (each stage loads the one before
/// it), with each stage's output level: the stages are merged into one netlist, compiled once
/// and solved at every frequency ([`crate::analysis::circuit`], the tolerance study's solver).
/// The same solves give the input impedance: the source's current is the sum, over the
/// resistors and capacitors on the input node, of `y·(V_in − V_other)`.
/// Falls back to [`mna::board_response`] and [`mna::input_impedance`] if the fast path cannot
/// compile the board.
fn built_sweep(board: &Board, freqs: &[f64]) -> Result<BuiltSweep, InputError> {
    use crate::analysis::circuit::{merge_stages, transfer_at, Compiled, Solver};
    let mut z_in_ohm = Vec::with_capacity(freqs.len());
    let mut gain_db = Vec::with_capacity(freqs.len());
    let mut phase_deg = Vec::with_capacity(freqs.len());
    let mut levels = vec![Vec::with_capacity(freqs.len()); board.stages.len()];
    let nets: Vec<_> = board.stages.iter().map(|s| &s.netlist).collect();
    let fast = merge_stages(&nets).ok().and_then(|merged| {
        let compiled = Compiled::new(&merged.netlist, &board.op_amp).ok()?;
        let assembled = compiled.assemble(&merged.netlist);
        let columns: Option<Vec<usize>> = merged
            .stage_outputs
            .iter()
            .map(|&node| compiled.node_col.get(node).copied().flatten())
            .collect();
        Some((merged.netlist, compiled, assembled, columns?))
    });
    let analysis_error =
        |e: String| InputError::new("topo", format!("the board cannot be analysed: {e}"));
    match fast {
        Some((net, compiled, assembled, columns)) => {
            let mut solver = Solver::new(compiled.n);
            // The parts on the input node: admittance kind, value and the column of the other
            // pin (`None` for ground; a part with both pins on the input carries no current).
            let on_input: Vec<(PartKind, f64, Option<usize>)> = net
                .parts
                .iter()
                .filter(|p| p.kind != PartKind::OpAmp && p.nodes.len() == 2)
                .filter_map(|p| {
                    let (a, b) = (p.nodes[0], p.nodes[1]);
                    let other = match (a == Some(net.input), b == Some(net.input)) {
                        (true, false) => b,
                        (false, true) => a,
                        _ => return None,
                    };
                    let col = other.and_then(|i| compiled.node_col.get(i).copied().flatten());
                    Some((p.kind, p.value, col))
                })
                .collect();
            for &f in freqs {
                let s = Complex64::new(0.0, 2.0 * PI * f);
                let h = transfer_at(&compiled, &assembled, &mut solver, s)
                    .map_err(|e| analysis_error(e.to_string()))?;
                gain_db.push(20.0 * h.norm().log10());
                phase_deg.push(h.arg().to_degrees());
                let solution = solver.solution();
                let current: Complex64 = on_input
                    .iter()
                    .map(|&(kind, value, col)| {
                        let y = match kind {
                            PartKind::Capacitor => s * value,
                            _ => Complex64::new(1.0 / value, 0.0),
                        };
                        let v_other = col.map_or(Complex64::new(0.0, 0.0), |c| solution[c]);
                        y * (Complex64::new(1.0, 0.0) - v_other)
                    })
                    .sum();
                z_in_ohm.push(if current.norm() > 0.0 {
                    1.0 / current.norm()
                } else {
                    f64::NAN
                });
                for (level, &col) in levels.iter_mut().zip(&columns) {
                    let v = solution
                        .get(col)
                        .copied()
                        .unwrap_or(Complex64::new(f64::NAN, 0.0));
                    level.push(20.0 * v.norm().log10());
                }
            }
        }
        None => {
            let merged = board.netlist();
            for &f in freqs {
                let s = Complex64::new(0.0, 2.0 * PI * f);
                let (h, outputs) =
                    mna::board_response(board, s).map_err(|e| analysis_error(e.message))?;
                gain_db.push(20.0 * h.norm().log10());
                phase_deg.push(h.arg().to_degrees());
                for (level, v) in levels.iter_mut().zip(&outputs) {
                    level.push(20.0 * v.norm().log10());
                }
                z_in_ohm.push(
                    mna::input_impedance(&merged.netlist, &board.op_amp, s)
                        .map(|z| z.norm())
                        .unwrap_or(f64::NAN),
                );
            }
        }
    }
    unwrap_deg(&mut phase_deg);
    let delay_s = delay_of(freqs, &phase_deg);
    Ok(BuiltSweep {
        sweep: Sweep {
            freq_hz: freqs.to_vec(),
            gain_db,
            phase_deg,
            delay_s,
        },
        levels,
        z_in_ohm,
    })
}

/// What [`built_sweep`] gives at each frequency.
struct BuiltSweep {
    /// The board's response.
    sweep: Sweep,
    /// Each stage's output relative to the input, dB (`levels[stage][frequency]`).
    levels: Vec<Vec<f64>>,
    /// |Z| seen by the source at the input, Ω (NaN where the input draws no current).
    z_in_ohm: Vec<f64>,
}

/// Composes the design of `state` with [`pipeline::compose`] (the command line's composer) and
/// computes the plot curves and the text view.
///
/// # Errors
/// The first [`InputError`] of the composer or of the analysis of the board.
pub fn compose(state: &LinkState) -> Result<PageModel, InputError> {
    compose_timed(state, &mut Stopwatch::off())
}

/// Laps of a computation, read from a clock the caller supplies (the browser's
/// `performance.now()` in the page's benchmark; nothing natively in tests).
pub struct Stopwatch<'a> {
    clock: Option<&'a dyn Fn() -> f64>,
    last: f64,
    /// Each step's name and duration, in the clock's unit.
    pub laps: Vec<(&'static str, f64)>,
}

impl<'a> Stopwatch<'a> {
    /// A stopwatch that records nothing.
    pub fn off() -> Stopwatch<'static> {
        Stopwatch {
            clock: None,
            last: 0.0,
            laps: Vec::new(),
        }
    }

    /// A stopwatch reading `clock`.
    pub fn new(clock: &'a dyn Fn() -> f64) -> Stopwatch<'a> {
        Stopwatch {
            last: clock(),
            clock: Some(clock),
            laps: Vec::new(),
        }
    }

    /// Ends the step `name`.
    pub fn lap(&mut self, name: &'static str) {
        if let Some(clock) = self.clock {
            let now = clock();
            self.laps.push((name, now - self.last));
            self.last = now;
        }
    }
}

/// [`compose`] with the time of each step recorded on `watch`.
///
/// # Errors
/// As [`compose`].
pub fn compose_timed(state: &LinkState, watch: &mut Stopwatch) -> Result<PageModel, InputError> {
    let design = pipeline::compose(state)?;
    watch.lap("compose (synthesis, board, search)");
    let (lo, hi) = design.span_hz;
    // The same grid as the tolerance study's (pipeline::study_settings), so the envelope lines up.
    let freqs = crate::response::log_frequencies(lo, hi, N_POINTS)?;
    let synthesis = &design.synthesis;
    let board = &design.board;
    let ideal = ideal_sweep(synthesis, &freqs);
    watch.lap("ideal sweep");
    let BuiltSweep {
        sweep: built,
        levels: level_curves,
        z_in_ohm,
    } = built_sweep(board, &freqs)?;
    watch.lap("built sweep");
    let analyses = Analyses::of(&design, &freqs, &level_curves, watch);
    let to_hz = |p: &Complex64| p / (2.0 * PI);
    let data = PlotData {
        class: Some(synthesis.class),
        gain_db: state.requirement.gain_db,
        mask: state.requirement.mask,
        ideal,
        built: Some(built),
        envelope_db: None,
        envelope_label: String::new(),
        target_poles_hz: synthesis.poles.iter().map(to_hz).collect(),
        built_poles_hz: analyses.built_poles_hz.clone(),
        zeros_hz: if analyses.zeros_hz.is_empty() {
            vec![Complex64::new(0.0, 0.0); synthesis.zeros_at_origin.min(1)]
        } else {
            analyses.zeros_hz.clone()
        },
        step_ideal: analyses.step_ideal.clone(),
        step_built: analyses.step_built.clone(),
        impedance: Some(Curve {
            label: "|Z in|".into(),
            x: freqs.clone(),
            y: z_in_ohm,
        }),
        noise_total: analyses.noise_total.clone(),
        noise_parts: analyses.noise_parts.clone(),
        levels: if analyses.levels.is_empty() {
            level_curves
                .into_iter()
                .enumerate()
                .map(|(k, y)| Curve {
                    label: format!("stage {}", k + 1),
                    x: freqs.clone(),
                    y,
                })
                .collect()
        } else {
            analyses.levels.clone()
        },
        level_limit_db: Some(20.0 * (state.signal.swing_pk / state.signal.vin_pk).log10()),
        hist_cutoff: None,
        hist_gain: None,
    };
    let mut view = text_view(&design, &data);
    analyses.fill(&mut view);
    watch.lap("text view");
    Ok(PageModel {
        design,
        data,
        view,
        study: None,
    })
}

/// The analyses of the built board beyond its frequency response: poles, step response,
/// sensitivities. Each is optional: one that fails leaves its plot or table with a note and its
/// reason among the warnings, and the rest of the sheet still shows.
struct Analyses {
    noise_total: Option<Curve>,
    noise_parts: Vec<Curve>,
    noise_line: String,
    levels: Vec<Curve>,
    headroom: Vec<String>,
    needs: Vec<String>,
    built_poles_hz: Vec<Complex64>,
    zeros_hz: Vec<Complex64>,
    step_ideal: Option<Curve>,
    step_built: Option<Curve>,
    step_figures: Option<crate::analysis::timeresp::StepFigures>,
    sensitivities: Vec<Vec<SensitivityRow>>,
    problems: Vec<String>,
}

impl Analyses {
    fn of(
        design: &Design,
        freqs: &[f64],
        built_levels: &[Vec<f64>],
        watch: &mut Stopwatch,
    ) -> Analyses {
        use crate::analysis::{levels, noise, opamp_need, poles, sensitivity, timeresp};
        let board = &design.board;
        let state = &design.state;
        let mut problems = Vec::new();
        let gain = 10f64.powf(state.requirement.gain_db / 20.0);
        let first_freq = freqs.first().copied().unwrap_or(design.span_hz.0);
        let last_freq = freqs.last().copied().unwrap_or(design.span_hz.1);

        // Noise: density at the output, the largest contributors, rms over the band.
        let band_hz = state
            .signal
            .noise_band_hz
            .unwrap_or((first_freq, last_freq));
        let signal_v_rms = Some(state.signal.vin_pk * gain / 2f64.sqrt());
        let (mut noise_total, mut noise_parts, mut noise_line) = (None, Vec::new(), String::new());
        // Every second plot frequency: the densities are smooth on a log axis, and the noise
        // solve (one adjoint solve per frequency and source) is the largest analysis of an edit.
        let settings = noise::NoiseSettings {
            freqs_hz: freqs.iter().copied().step_by(2).collect(),
            band_hz,
            signal_v_rms,
        };
        match noise::board_noise(board, &settings) {
            Ok(report) => {
                noise_total = Some(Curve {
                    label: "total".into(),
                    x: report.freqs_hz.clone(),
                    y: report.output_density_v_per_rthz.clone(),
                });
                noise_parts = report
                    .sources
                    .iter()
                    .take(4)
                    .map(|source| Curve {
                        label: format!(
                            "{}{} {:.0} %",
                            source.reference,
                            match source.kind {
                                noise::NoiseKind::Resistor => "",
                                noise::NoiseKind::OpAmpVoltage => " eₙ",
                                noise::NoiseKind::OpAmpCurrentPlus => " iₙ+",
                                noise::NoiseKind::OpAmpCurrentMinus => " iₙ−",
                            },
                            source.share * 100.0
                        ),
                        x: report.freqs_hz.clone(),
                        y: source.density_v_per_rthz.clone(),
                    })
                    .collect();
                noise_line = format!(
                    "output noise {} rms over {} … {}",
                    engineering_unit(report.rms_v, 3, "V"),
                    engineering_unit(report.band_hz.0, 3, "Hz"),
                    engineering_unit(report.band_hz.1, 3, "Hz")
                );
                if let Some(snr) = report.snr_db {
                    noise_line.push_str(&format!(" · SNR {snr:.1} dB"));
                }
            }
            Err(e) => problems.push(format!("noise: {e}")),
        }
        watch.lap("noise");

        // Stage levels and headroom against the op amp's swing.
        let (mut level_curves, mut headroom) = (Vec::new(), Vec::new());
        // The built sweep solved the whole board at these frequencies already: its stage
        // outputs (one curve per stage on either of its paths) are the levels.
        match levels::from_curves(
            freqs,
            built_levels.to_vec(),
            state.signal.vin_pk,
            state.signal.swing_pk,
        ) {
            Ok(report) => {
                for stage in &report.stages {
                    level_curves.push(Curve {
                        label: format!("stage {}", stage.stage),
                        x: report.freqs_hz.clone(),
                        y: stage.gain_db.clone(),
                    });
                    headroom.push(format!(
                        "peak {} out at {} ({} headroom)",
                        engineering_unit(stage.peak_out_v, 3, "V"),
                        engineering_unit(stage.peak_hz, 3, "Hz"),
                        format!("{:+.1} dB", stage.headroom_db).replace('-', "−")
                    ));
                }
                problems.extend(report.warnings.iter().cloned());
            }
            Err(e) => problems.push(format!("stage levels: {e}")),
        }
        watch.lap("levels");

        // What each stage asks of its op amp.
        let slew_freq_hz = match (design.synthesis.class, design.synthesis.bw_hz) {
            (ResponseClass::BandPass, Some(bw)) => {
                let half = bw / 2.0;
                half + (half * half + design.synthesis.fc_hz.powi(2)).sqrt()
            }
            (ResponseClass::HighPass, _) => last_freq,
            _ => design.synthesis.fc_hz,
        };
        let vout_pk = state.signal.vin_pk * gain;
        let mut needs = Vec::new();
        match opamp_need::board_needs(board, state.signal.drift_pct, slew_freq_hz, vout_pk) {
            Ok(report) => {
                for need in &report.stages {
                    let gbw = match need.min_gbw_hz {
                        Some(g) => format!(
                            "GBW ≥ {} for {} % drift",
                            engineering_unit(g, 3, "Hz"),
                            state.signal.drift_pct
                        ),
                        None => "no GBW keeps the drift in bounds".to_string(),
                    };
                    let verdict = if need.board_opamp_ok {
                        "the chosen op amp does"
                    } else {
                        "the chosen op amp falls short"
                    };
                    needs.push(format!(
                        "Needs {gbw} and slew ≥ {} ({} peak at {}); {verdict}.",
                        engineering_unit(need.slew_v_per_s, 3, "V/s"),
                        engineering_unit(need.out_pk_v, 3, "V"),
                        engineering_unit(report.slew_freq_hz, 3, "Hz")
                    ));
                }
            }
            Err(e) => problems.push(format!("op-amp requirements: {e}")),
        }
        watch.lap("op-amp needs");

        let mut built_poles_hz = Vec::new();
        let mut zeros_hz = Vec::new();
        match poles::board_poles(board) {
            Ok(stages) => {
                for stage in stages {
                    let hz = |p: &poles::PlanePoint| Complex64::new(p.re_hz, p.im_hz);
                    built_poles_hz.extend(stage.achieved.iter().map(hz));
                    zeros_hz.extend(stage.zeros.iter().map(hz));
                }
            }
            Err(e) => problems.push(format!("poles of the built board: {e}")),
        }
        watch.lap("poles");
        let settings = timeresp::TimeSettings {
            n_points: 600,
            t_end_s: None,
        };
        let (mut step_built, mut step_ideal, mut step_figures) = (None, None, None);
        match timeresp::board_response(board, &settings) {
            Ok(built) => {
                let t_end = built.t_s.last().copied();
                step_figures = Some(built.figures);
                step_built = Some(Curve {
                    label: "built".into(),
                    x: built.t_s,
                    y: built.step,
                });
                let ideal_settings = timeresp::TimeSettings {
                    n_points: settings.n_points,
                    t_end_s: t_end,
                };
                if let Ok(ideal) =
                    timeresp::board_response(&pipeline::ideal_board(board), &ideal_settings)
                {
                    step_ideal = Some(Curve {
                        label: "ideal".into(),
                        x: ideal.t_s,
                        y: ideal.step,
                    });
                }
            }
            Err(e) => problems.push(format!("step response: {e}")),
        }
        watch.lap("step response");
        let sensitivities = match sensitivity::board_sensitivities(board) {
            Ok(stages) => stages
                .into_iter()
                .map(|stage| {
                    stage
                        .parts
                        .into_iter()
                        .map(|p| SensitivityRow {
                            reference: p.reference,
                            f0: signed(p.f0),
                            q: p.q.map_or_else(|| "–".to_string(), signed),
                        })
                        .collect()
                })
                .collect(),
            Err(e) => {
                problems.push(format!("sensitivities: {e}"));
                Vec::new()
            }
        };
        watch.lap("sensitivities");
        Analyses {
            noise_total,
            noise_parts,
            noise_line,
            levels: level_curves,
            headroom,
            needs,
            built_poles_hz,
            zeros_hz,
            step_ideal,
            step_built,
            step_figures,
            sensitivities,
            problems,
        }
    }

    /// Puts the tables and figures into the text view.
    fn fill(&self, view: &mut View) {
        for (stage, rows) in view.stages.iter_mut().zip(&self.sensitivities) {
            stage.sensitivities = rows.clone();
        }
        for (index, stage) in view.stages.iter_mut().enumerate() {
            let mut needs = Vec::new();
            if let Some(need) = self.needs.get(index) {
                needs.push(need.clone());
            }
            if let Some(room) = self.headroom.get(index) {
                needs.push(format!("Output {room}."));
            }
            stage.needs = needs.join(" ");
        }
        if let Some(f) = &self.step_figures {
            let mut parts = Vec::new();
            if let Some(overshoot) = f.overshoot_pct {
                parts.push(format!("overshoot {overshoot:.1} %"));
            }
            if let Some(settle) = f.settling_1pct_s {
                parts.push(format!(
                    "settles to 1 % in {}",
                    engineering_unit(settle, 3, "s")
                ));
            }
            if !parts.is_empty() {
                if !view.figures.is_empty() {
                    view.figures.push_str(" · ");
                }
                view.figures.push_str(&parts.join(" · "));
            }
        }
        if !self.noise_line.is_empty() {
            if !view.figures.is_empty() {
                view.figures.push_str(" · ");
            }
            view.figures.push_str(&self.noise_line);
        }
        view.warnings.extend(self.problems.iter().cloned());
    }
}

/// A sensitivity with its sign and two decimals, typographic minus.
fn signed(value: f64) -> String {
    format!("{value:+.2}").replace('-', "−")
}

fn ordinal(n: usize) -> String {
    let suffix = match (n % 10, n % 100) {
        (1, 11) | (2, 12) | (3, 13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{n}{suffix}")
}

fn class_words(class: ResponseClass) -> &'static str {
    match class {
        ResponseClass::LowPass => "low-pass",
        ResponseClass::HighPass => "high-pass",
        ResponseClass::BandPass => "band-pass",
    }
}

fn topology_words(topology: Topology, n: usize) -> String {
    let name = match topology {
        Topology::SallenKey => "Sallen-Key",
        Topology::MultipleFeedback => "multiple-feedback",
    };
    if n == 1 {
        format!("1 {name} stage")
    } else {
        format!("{n} {name} stages")
    }
}

/// Where the design's cutoff sits, in words: "−3 dB at 1 kHz", "ripple band to 20 kHz",
/// "centred on 6.3 kHz, 18 kHz wide".
fn cutoff_words(synthesis: &Synthesis) -> String {
    let fc = engineering_unit(synthesis.fc_hz, 4, "Hz");
    if let Some(bw) = synthesis.bw_hz {
        return format!("centred on {fc}, {} wide", engineering_unit(bw, 3, "Hz"));
    }
    match synthesis.family {
        Family::Chebyshev { .. } => format!("ripple band edge {fc}"),
        Family::LinkwitzRiley => format!("−6 dB at {fc}"),
        _ => format!("−3 dB at {fc}"),
    }
}

fn pct(x: f64) -> String {
    format!("{:+.2} %", x * 100.0)
}

fn text_view(design: &Design, data: &PlotData) -> View {
    let state = &design.state;
    let synthesis = &design.synthesis;
    let board = &design.board;
    let n_parts = board.parts().len();
    let mut summary = format!(
        "{}-order {} {} · {} · {} · {} parts",
        ordinal(synthesis.order),
        order::family_name(synthesis.family),
        class_words(synthesis.class),
        cutoff_words(synthesis),
        topology_words(state.topology, board.stages.len()),
        n_parts
    );
    if state.requirement.gain_db != 0.0 {
        summary.push_str(&format!(
            " · gain {} dB",
            format_si(state.requirement.gain_db, 3)
        ));
    }
    if let OrderChoice::FromMask = state.requirement.order {
        summary.push_str(" · order from the limits");
    }

    let mut warnings = synthesis.warnings.clone();
    warnings.extend(board.warnings.iter().cloned());

    let stages = board
        .stages
        .iter()
        .enumerate()
        .map(|(index, stage)| {
            let section = &stage.section;
            let mut rows = vec![TargetRow {
                what: "f0".into(),
                target: engineering_unit(section.f0_hz, 4, "Hz"),
                achieved: engineering_unit(stage.achieved_f0_hz, 4, "Hz"),
                error: pct(stage.f0_error),
                large: stage.f0_error.abs() > 0.02,
            }];
            if let (Some(q), Some(aq)) = (section.q, stage.achieved_q) {
                let q_error = stage.q_error.unwrap_or(f64::NAN);
                rows.push(TargetRow {
                    what: "Q".into(),
                    target: format!("{q:.4}"),
                    achieved: format!("{aq:.4}"),
                    error: pct(q_error),
                    large: q_error.abs() > 0.02,
                });
            }
            rows.push(TargetRow {
                what: "gain".into(),
                target: format!("{:.4} V/V", section.gain),
                achieved: format!("{:.4} V/V", stage.achieved_gain),
                error: pct(stage.gain_error),
                large: stage.gain_error.abs() > 0.02,
            });
            let parts: Vec<PartRow> = stage
                .netlist
                .parts
                .iter()
                .filter(|p| p.kind != PartKind::OpAmp)
                .map(|p| PartRow {
                    reference: p.reference.clone(),
                    value: format_si(p.value, 4),
                    ideal: schematic::value_label(p.kind, p.ideal),
                    role: p.role.clone(),
                })
                .collect();
            let key = format!(
                "{}:{}",
                stage.circuit.key(),
                parts
                    .iter()
                    .map(|p| p.reference.as_str())
                    .collect::<Vec<_>>()
                    .join(",")
            );
            let order_words = if section.q.is_some() {
                "2nd order"
            } else {
                "1st order"
            };
            StageView {
                key,
                index,
                number: index + 1,
                title: format!("Stage {}", index + 1),
                circuit: format!("{} · {order_words}", stage.circuit.describe()),
                rows,
                parts,
                sensitivities: Vec::new(),
                needs: String::new(),
                warnings: stage.warnings.clone(),
            }
        })
        .collect();

    let (comparison, comparison_hint) = match &design.family_orders {
        Some(rows) => {
            let rows = rows
                .iter()
                .map(|row| {
                    let current = row.family.key() == synthesis.family.key();
                    let (order_text, note) = match &row.result {
                        Ok(min) => (
                            min.order.to_string(),
                            if current && min.order != synthesis.order {
                                format!("this design has order {}", synthesis.order)
                            } else {
                                String::new()
                            },
                        ),
                        Err(e) => ("—".to_string(), e.to_input_error().message),
                    };
                    FamilyRow {
                        family: order::family_name(row.family),
                        order: order_text,
                        note,
                        current,
                    }
                })
                .collect();
            (
                rows,
                "The fewest poles each family needs to meet these limits.".to_string(),
            )
        }
        None => (
            Vec::new(),
            "Give limits (pass edge, stop edge and the depth needed) to see the order each \
             family needs."
                .to_string(),
        ),
    };

    View {
        committed: false,
        refused: false,
        errors: Vec::new(),
        ignored: Vec::new(),
        summary,
        figures: figures_line(data),
        warnings,
        stages,
        comparison,
        comparison_hint,
    }
}

/// The frequencies where a sweep's gain crosses `level_db`, interpolated linearly in log f.
pub fn level_crossings(sweep: &Sweep, level_db: f64) -> Vec<f64> {
    sweep
        .freq_hz
        .windows(2)
        .zip(sweep.gain_db.windows(2))
        .filter_map(|(f, g)| {
            let (a, b) = (g[0] - level_db, g[1] - level_db);
            if !(a.is_finite() && b.is_finite()) || a.signum() == b.signum() || a == b {
                return None;
            }
            let t = a / (a - b);
            Some((f[0].ln() + t * (f[1].ln() - f[0].ln())).exp())
        })
        .collect()
}

/// Figures of merit read off the built response: the frequency where it has fallen 3 dB below
/// the passband gain, and the peaking above it.
fn figures_line(data: &PlotData) -> String {
    let Some(built) = &data.built else {
        return String::new();
    };
    let peak = built
        .gain_db
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    let mut parts = Vec::new();
    let reference = data.gain_db;
    let crossings = level_crossings(built, reference - 10.0 * 2f64.log10());
    if !crossings.is_empty() {
        let list: Vec<String> = crossings
            .iter()
            .map(|f| engineering_unit(*f, 4, "Hz"))
            .collect();
        parts.push(format!("built −3 dB at {}", list.join(" and ")));
    }
    if peak.is_finite() {
        parts.push(format!(
            "peak {} dB re passband",
            format!("{:+.2}", peak - reference).replace('-', "−")
        ));
    }
    parts.join(" · ")
}

impl PageModel {
    /// The figure of `kind` for this design.
    pub fn figure(&self, kind: PlotKind) -> Figure {
        figures::build(kind, &self.data)
    }

    /// Prepares the tolerance study of this design with the link's settings, on the plot grid
    /// ([`pipeline::start_spread`], as the command line's `spread`).
    ///
    /// # Errors
    /// An [`InputError`] on `runs` with the reason the study cannot start.
    pub fn start_study(&self) -> Result<MonteCarlo, InputError> {
        pipeline::start_spread(&self.design, N_POINTS).map_err(|message| {
            InputError::new(
                "runs",
                format!("the tolerance study cannot start: {message}"),
            )
        })
    }

    /// Takes a finished study into the plots (envelope, histograms) and the summary.
    pub fn apply_study(&mut self, summary: Summary) {
        let envelope = &summary.envelope;
        let pick = |p: f64| {
            envelope
                .percentiles
                .iter()
                .find(|c| (c.percentile - p).abs() < 1e-9)
                .map(|c| c.db.clone())
        };
        let (lo_p, hi_p) = (STUDY_BAND.0, STUDY_BAND.1);
        if let (Some(lo), Some(hi)) = (pick(lo_p), pick(hi_p)) {
            if lo.len() == self.data.ideal.freq_hz.len() {
                self.data.envelope_db = Some((lo, hi));
                self.data.envelope_label = format!("{lo_p}–{hi_p} % of runs");
            }
        }
        let mask = self.design.state.requirement.mask;
        if let Some(cut) = summary.cutoffs.first() {
            let mut limits = Vec::new();
            if let Some(m) = mask {
                let (lo, hi) = match m.pass {
                    Edge::Single(f) => (f, f),
                    Edge::Pair(a, b) => (a, b),
                };
                let edge = match cut.side {
                    crate::analysis::tolerance::CutoffSide::Lower => lo,
                    crate::analysis::tolerance::CutoffSide::Upper => hi,
                };
                limits.push(("pass edge".to_string(), edge));
            }
            self.data.hist_cutoff = Some(Histogram {
                edges: cut.hz.histogram.edges.clone(),
                counts: cut.hz.histogram.counts.iter().map(|&c| c as f64).collect(),
                nominal: Some(cut.hz.nominal),
                limits,
            });
        }
        let gain = &summary.passband_gain_db;
        let mut limits = Vec::new();
        if let Some(m) = mask {
            limits.push((
                "loss limit".to_string(),
                self.design.state.requirement.gain_db - m.apass_db,
            ));
        }
        self.data.hist_gain = Some(Histogram {
            edges: gain.histogram.edges.clone(),
            counts: gain.histogram.counts.iter().map(|&c| c as f64).collect(),
            nominal: Some(gain.nominal),
            limits,
        });
        self.study = Some(summary);
    }

    /// One line about the finished study: yield and the cutoff's spread.
    pub fn study_line(&self) -> String {
        let Some(summary) = &self.study else {
            return String::new();
        };
        let mut parts = Vec::new();
        match summary.yield_fraction {
            Some(y) => parts.push(format!(
                "yield {:.1} % ({} of {} runs meet the limits)",
                y * 100.0,
                summary.n_pass.unwrap_or(0),
                summary.runs
            )),
            None => parts.push(format!("{} runs (no limits to check)", summary.runs)),
        }
        if let Some(cut) = summary.cutoffs.first() {
            let p = |q: f64| {
                cut.hz
                    .percentiles
                    .iter()
                    .find(|v| (v.percentile - q).abs() < 1e-9)
                    .map(|v| v.value)
            };
            if let (Some(lo), Some(hi)) = (p(STUDY_BAND.0), p(STUDY_BAND.1)) {
                parts.push(format!(
                    "cutoff {} … {} ({}–{} % of runs)",
                    engineering_unit(lo, 4, "Hz"),
                    engineering_unit(hi, 4, "Hz"),
                    STUDY_BAND.0,
                    STUDY_BAND.1
                ));
            }
        }
        parts.join(" · ")
    }

    /// The summary sentence with the study's yield appended once a study has finished.
    pub fn summary_with_study(&self) -> String {
        match self.study.as_ref().and_then(|s| s.yield_fraction) {
            Some(y) => format!(
                "{} · yield {:.1} % ({} runs)",
                self.view.summary,
                y * 100.0,
                self.study.as_ref().map_or(0, |s| s.runs)
            ),
            None => self.view.summary.clone(),
        }
    }

    /// A download: `bom` (parts list CSV), `spice` (netlist) or `json` (design), made by the same
    /// functions with the same arguments as `rolloff design --format bom|spice|json`.
    ///
    /// # Errors
    /// `format` for an unknown kind; the exporter's own errors.
    pub fn export(&self, kind: &str) -> Result<String, InputError> {
        let design = &self.design;
        match kind {
            "bom" => Ok(export::bom::csv(
                &design.board,
                &pipeline::bom_tolerances(design),
            )),
            "spice" => export::spice::netlist(&design.board, &pipeline::spice_sweep(design)),
            "json" => Ok(export::json::design_json(design)),
            other => Err(InputError::new(
                "format",
                format!("'{other}' is not a download this page offers (bom, spice, json)"),
            )),
        }
    }
}

/// The shortest engineering notation of `value` that reads back as exactly `value` (`12k`,
/// `4.99k`, `2.2n`), so a typed-over part survives the round trip through a link to the bit.
fn exact_si(value: f64) -> String {
    (1..=17)
        .map(|digits| format_si(value, digits))
        .find(|text| crate::units::parse_si(text) == Ok(value))
        .unwrap_or_else(|| format!("{value:e}"))
}

/// The link a design JSON file describes.
///
/// A `link` field (a query string or a whole URL) is used as it is. Otherwise the link is rebuilt
/// from the JSON's contract fields (class, family, ripple, order, cutoff, bandwidth, gain, mask,
/// op amp, series, tolerances, title, and the topology read off the stages), and every part whose
/// value in the file differs from what that link designs is typed over (`set`), so the board that
/// opens is the board that was saved.
///
/// # Errors
/// `json` when the text is not JSON, lacks the fields a design needs, or does not design.
pub fn link_of_json(text: &str) -> Result<String, InputError> {
    use serde_json::Value;
    let value: Value = serde_json::from_str(text)
        .map_err(|e| InputError::new("json", format!("the file is not JSON: {e}")))?;
    if let Some(link) = value.get("link").and_then(Value::as_str) {
        return Ok(link::query_of(link).to_string());
    }
    let missing = |what: &str| {
        InputError::new(
            "json",
            format!("the file has no “{what}”; open a design saved by Rolloff"),
        )
    };
    let number = |v: &Value| v.as_f64().map(|x| format!("{x}"));
    let edge = |v: &Value| match v {
        Value::Array(pair) => {
            let parts: Option<Vec<String>> = pair.iter().map(number).collect();
            parts.map(|p| p.join(","))
        }
        other => number(other),
    };
    let mut pairs: Vec<(&str, String)> = vec![("v", "1".into())];
    let get = |key: &str| value.get(key).filter(|v| !v.is_null());
    if let Some(title) = get("title").and_then(Value::as_str) {
        pairs.push(("title", title.to_string()));
    }
    let resp = get("resp")
        .and_then(Value::as_str)
        .ok_or_else(|| missing("resp"))?;
    pairs.push(("resp", resp.to_string()));
    let family = get("family")
        .and_then(Value::as_str)
        .ok_or_else(|| missing("family"))?;
    pairs.push(("family", family.to_string()));
    if let Some(ripple) = get("ripple_db").and_then(number) {
        pairs.push(("ripple", ripple));
    }
    let from_mask = get("order_from_mask")
        .and_then(Value::as_bool)
        .unwrap_or(false);
    if !from_mask {
        let order = get("order")
            .and_then(number)
            .ok_or_else(|| missing("order"))?;
        pairs.push(("order", order));
        if let Some(fc) = get("fc_hz").and_then(number) {
            pairs.push(("fc", fc));
        }
        if let Some(bw) = get("bw_hz").and_then(number) {
            pairs.push(("bw", bw));
        }
    }
    if let Some(gain) = get("gain_db").and_then(number) {
        pairs.push(("gain", gain));
    }
    if let Some(mask) = get("mask") {
        for (from, to) in [
            ("fpass_hz", "fpass"),
            ("apass_db", "apass"),
            ("fstop_hz", "fstop"),
            ("astop_db", "astop"),
        ] {
            if let Some(v) = mask.get(from).and_then(edge) {
                pairs.push((to, v));
            }
        }
    }
    if let Some(op) = get("op_amp") {
        for (from, to, ideal) in [
            ("gbw_hz", "gbw", true),
            ("a0_db", "a0", true),
            ("rout_ohm", "rout", false),
            ("vnoise_v_per_rthz", "vnoise", false),
            ("inoise_a_per_rthz", "inoise", false),
            ("slew_v_per_s", "slew", true),
        ] {
            match op.get(from) {
                Some(Value::Null) if ideal => pairs.push((to, "ideal".into())),
                Some(v) => {
                    if let Some(x) = number(v) {
                        pairs.push((to, x));
                    }
                }
                None => {}
            }
        }
    }
    if let Some(series) = get("series") {
        for (from, to) in [("resistors", "rser"), ("capacitors", "cser")] {
            if let Some(v) = series.get(from).and_then(Value::as_str) {
                pairs.push((to, v.to_string()));
            }
        }
    }
    if let Some(tol) = get("tolerance_pct") {
        for (from, to) in [("resistors", "rtol"), ("capacitors", "ctol")] {
            if let Some(v) = tol.get(from).and_then(number) {
                pairs.push((to, v));
            }
        }
    }
    let stages = get("stages")
        .and_then(Value::as_array)
        .cloned()
        .unwrap_or_default();
    let topologies: Vec<&str> = stages
        .iter()
        .filter_map(|s| s.get("topology").and_then(Value::as_str))
        .collect();
    if topologies
        .iter()
        .any(|t| matches!(*t, "mfb-lp" | "mfb-hp" | "inv-lp" | "inv-hp"))
    {
        pairs.push(("topo", "mfb".into()));
    }
    let encode = |pairs: &[(&str, String)]| {
        let mut out = form_urlencoded::Serializer::new(String::new());
        for (k, v) in pairs {
            out.append_pair(k, v);
        }
        out.finish()
    };
    // Type over every part whose saved value is not what the rebuilt link designs.
    let base = encode(&pairs);
    let evaluation = evaluate(&base);
    let model = evaluation.model.ok_or_else(|| {
        let reason = evaluation
            .view
            .errors
            .first()
            .map(|e| format!("{}: {}", e.key, e.message))
            .unwrap_or_default();
        InputError::new(
            "json",
            format!("the saved design does not design again: {reason}"),
        )
    })?;
    let saved: Vec<(String, f64)> = get("parts")
        .and_then(Value::as_array)
        .map(|parts| {
            parts
                .iter()
                .filter_map(|p| {
                    let reference = p.get("ref")?.as_str()?.to_string();
                    let value = p.get("value")?.as_f64()?;
                    Some((reference, value))
                })
                .collect()
        })
        .unwrap_or_default();
    let mut typed = Vec::new();
    for part in model.design.board.parts() {
        if part.kind == PartKind::OpAmp {
            continue;
        }
        if let Some((_, value)) = saved.iter().find(|(r, _)| *r == part.reference) {
            if (value - part.value).abs() > 1e-12 * part.value.abs() {
                typed.push(format!("{}:{}", part.reference, exact_si(*value)));
            }
        }
    }
    if !typed.is_empty() {
        pairs.push(("set", typed.join(",")));
    }
    Ok(encode(&pairs))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_demo_link_composes_and_names_every_stage() {
        let ev = evaluate("v=1&resp=lp&family=butterworth&order=4&fc=1k");
        assert!(ev.view.errors.is_empty(), "{:?}", ev.view.errors);
        let model = ev.model.unwrap_or_else(|| panic!("no design"));
        assert_eq!(model.view.stages.len(), 2);
        assert!(model
            .view
            .summary
            .starts_with("4th-order Butterworth low-pass"));
        // A Butterworth low-pass is 3.01 dB down at its cutoff (definition of the family); the
        // built board with E96/E12 parts lands within a few percent of 1 kHz.
        assert!(
            model.view.figures.contains("built −3 dB at 9")
                || model.view.figures.contains("built −3 dB at 1"),
            "{}",
            model.view.figures
        );
        for kind in PlotKind::ALL {
            let _ = model.figure(kind);
        }
    }

    #[test]
    fn a_bad_value_is_reported_on_its_key_and_the_rest_loads() {
        let ev = evaluate("v=1&fc=abc&order=4&family=bessel&zzz=1");
        assert!(
            ev.view.errors.iter().any(|e| e.key == "fc"),
            "{:?}",
            ev.view.errors
        );
        assert!(ev.view.ignored.iter().any(|t| t.contains("zzz")));
        let model = ev
            .model
            .unwrap_or_else(|| panic!("the defaults still design"));
        assert!(model.view.summary.contains("Bessel"));
    }

    #[test]
    fn a_saved_json_opens_as_the_same_board() {
        let query =
            "v=1&resp=lp&family=chebyshev&ripple=0.5&order=5&fc=3k&topo=mfb&rser=e24&set=R2:4k7";
        let model = evaluate(query)
            .model
            .unwrap_or_else(|| panic!("the demo link designs"));
        let json = model.export("json").unwrap_or_else(|e| panic!("{e}"));
        let reopened = link_of_json(&json).unwrap_or_else(|e| panic!("{e}"));
        let again = evaluate(&reopened)
            .model
            .unwrap_or_else(|| panic!("the rebuilt link {reopened} designs"));
        let values = |m: &PageModel| -> Vec<(String, f64)> {
            m.design
                .board
                .parts()
                .iter()
                .map(|p| (p.reference.clone(), p.value))
                .collect()
        };
        assert_eq!(values(&again), values(&model), "rebuilt link: {reopened}");
        assert!(
            reopened.contains("R2:4.7k"),
            "the override is kept: {reopened}"
        );
    }

    #[test]
    fn the_fast_board_sweep_equals_the_plain_nodal_solution() {
        // Naive oracle: mna::board_response assembles and solves the merged board from scratch at
        // each frequency. The compiled path must give the same gain to 1e-9 dB and phase to 1e-9°
        // (both are direct solves of the same equations; only rounding differs).
        let links = [
            "v=1&title=Geophone&fsample=2k&adcbits=24&fsignal=200&topo=mfb",
            "v=1&resp=bp&fpass=2k,20k&apass=1&fstop=400,100k&astop=30&topo=mfb",
            "v=1&resp=hp&family=bessel&order=5&fc=300&gain=12",
        ];
        for link in links {
            let model = evaluate(link)
                .model
                .unwrap_or_else(|| panic!("{link} designs"));
            let board = &model.design.board;
            let freqs: Vec<f64> = model
                .data
                .ideal
                .freq_hz
                .iter()
                .copied()
                .step_by(20)
                .collect();
            let BuiltSweep {
                sweep: fast,
                levels,
                z_in_ohm,
            } = built_sweep(board, &freqs).unwrap_or_else(|e| panic!("{e}"));
            for (i, &f) in freqs.iter().enumerate() {
                let s = Complex64::new(0.0, 2.0 * PI * f);
                let (h, outputs) =
                    mna::board_response(board, s).unwrap_or_else(|e| panic!("{}", e.message));
                let gain = 20.0 * h.norm().log10();
                assert!((fast.gain_db[i] - gain).abs() < 1e-9, "{link} at {f} Hz");
                // Phases agree modulo whole turns.
                let d = (fast.phase_deg[i] - h.arg().to_degrees()).rem_euclid(360.0);
                assert!(d < 1e-9 || 360.0 - d < 1e-9, "{link} phase at {f} Hz: {d}");
                for (k, v) in outputs.iter().enumerate() {
                    assert!((levels[k][i] - 20.0 * v.norm().log10()).abs() < 1e-9);
                }
                // The input impedance from the same solve equals the general nodal analysis'
                // source current.
                let merged = board.netlist();
                let z = mna::input_impedance(&merged.netlist, &board.op_amp, s)
                    .unwrap_or_else(|e| panic!("{}", e.message))
                    .norm();
                assert!(
                    (z_in_ohm[i] / z - 1.0).abs() < 1e-9,
                    "{link} |Zin| at {f} Hz: {} vs {z}",
                    z_in_ohm[i]
                );
            }
        }
    }

    #[test]
    fn extreme_links_never_panic_anywhere_on_the_sheet() {
        // Every view of the page (text, every figure drawn to SVG, every schematic, a short
        // tolerance study, the downloads) for links at the edges of each key's range and beyond.
        // The assertion is that all of it returns: a panic in wasm would kill the page.
        let links = [
            "v=1&order=20&fc=1G&family=chebyshev&ripple=3",
            "v=1&order=1&fc=0.001",
            "v=1&resp=hp&order=19&family=bessel&fc=1m&gain=60&topo=mfb",
            "v=1&resp=bp&order=20&fc=1k&bw=1&family=critical",
            "v=1&resp=bp&order=2&fc=1k&bw=1G",
            "v=1&fpass=1k&fstop=1.001k&apass=0.001&astop=300",
            "v=1&gbw=1&a0=0&rout=100k&order=8&fc=100k",
            "v=1&rser=e6&cser=e6&rlevel=10&order=6&fc=10",
            "v=1&rlevel=10M&order=6&fc=1M&topo=mfb&cratio=10000",
            "v=1&order=4&fc=1k&set=R1:1,C1:1,R2:1e12",
            "v=1&order=4&fc=1k&set=U1:1k,R99:1k",
            "v=1&order=4&fc=1k&span=1e-3,1e11&noiseband=1,2",
            "v=1&order=4&fc=1k&vin=1e-9&swing=1e9&drift=0.01&gain=-40",
            "v=1&fsample=1&adcbits=32&fsignal=0.4",
            "v=1&stageorder=3,1,2&order=6&fc=1k&dist=uniform&sigmas=6&rtol=50&ctol=50",
            "v=2&order=4",
            "",
            "%%%&&&===",
        ];
        let look = crate::plot::Look {
            theme: crate::plot::Theme::Dark,
            scale: 2.0,
            compact: false,
        };
        for link in links {
            let evaluation = evaluate(&format!("{link}&runs=50"));
            let Some(mut model) = evaluation.model else {
                assert!(
                    !evaluation.view.errors.is_empty() || evaluation.refused,
                    "{link}: no design and no reason"
                );
                continue;
            };
            for kind in PlotKind::ALL {
                let figure = model.figure(kind);
                let svg = crate::plot::render_svg(&figure, 500, 260, look.theme);
                assert!(svg.is_ok(), "{link} {kind:?}: {svg:?}");
                let _ = crate::plot::readout(&figure, 500, 260, &look, 250.0, 130.0);
            }
            for stage in &model.design.board.stages {
                let mut svg = String::new();
                let mut backend = plotters::prelude::SVGBackend::with_string(&mut svg, (320, 150));
                assert!(schematic::draw(&mut backend, &stage.netlist, &[], &look).is_ok());
            }
            for kind in ["bom", "spice", "json"] {
                let _ = model.export(kind);
            }
            if let Ok(mut study) = model.start_study() {
                study.step(50);
                assert!(study.is_done(), "{link}: 50 runs asked, 50 run");
                model.apply_study(study.finish());
                for kind in [
                    PlotKind::Magnitude,
                    PlotKind::HistCutoff,
                    PlotKind::HistGain,
                ] {
                    assert!(
                        crate::plot::render_svg(&model.figure(kind), 400, 200, look.theme).is_ok()
                    );
                }
            }
        }
    }

    #[test]
    fn phase_unwrapping_removes_wraps() {
        let mut phase = vec![170.0, -170.0, -150.0, 179.0];
        unwrap_deg(&mut phase);
        assert_eq!(phase, vec![170.0, 190.0, 210.0, 179.0]);
    }
}

//! The page's model: everything the design sheet shows for one link, computed natively.
//!
//! [`evaluate`] reads a link leniently (valid keys load, bad ones are listed), composes the design
//! (synthesis → board → analyses), and returns a [`View`] (text for the form, the summary, the
//! stage cards and the family comparison, ready to serialize for the page) together with the
//! [`PageModel`] that the plots, the exports and the tolerance study are drawn from. The wasm
//! facade only keeps the last good model and converts values at the boundary; the same functions
//! run in native tests, so the page shows exactly what the core computes.

use crate::fmath;
use num_complex::Complex64;
use serde::Serialize;
use std::f64::consts::PI;

use crate::analysis::tolerance::Summary;
use crate::design::Synthesis;
use crate::error::InputError;
use crate::link::{self, LinkReport, LinkState};
use crate::pipeline::{self, Design};
use crate::plot::figures::{Curve, PlotData, Sweep};

/// Frequencies of the plots and of the tolerance envelope: the one plot grid of the analysis plan.
pub const N_POINTS: usize = pipeline::PLOT_POINTS;

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
    /// The part's tolerance as the study uses it (`rtol`/`ctol`, or its `tolset` entry), e.g.
    /// `±1 %` ([`crate::export::bom::part_tolerance_pct`], the parts list's own figure).
    pub tolerance: String,
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
    /// The whole state as the link writer writes it ([`link::to_query`]): what the address bar,
    /// Copy link and the exports carry. Empty when no design was made.
    pub link: String,
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
            model.view.link = link::to_query(&report.state);
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
        link: String::new(),
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
    // Every figure comes from the one analysis plan; the page only arranges it.
    let analyses = pipeline::analyses(&design);
    watch.lap("analyses");
    let Some(built) = analyses.sweep.clone() else {
        let reason = analyses.errors.first().cloned().unwrap_or_default();
        return Err(InputError::new(
            "topo",
            format!("the board cannot be analysed: {reason}"),
        ));
    };
    let synthesis = &design.synthesis;
    let freqs = built.freq_hz.clone();
    let ideal = ideal_sweep(synthesis, &freqs);
    let mut phase_deg: Vec<f64> = built
        .h
        .iter()
        .map(|h| fmath::carg(*h).to_degrees())
        .collect();
    unwrap_deg(&mut phase_deg);
    let delay_s = delay_of(&freqs, &phase_deg);
    let built_curve = Sweep {
        freq_hz: freqs.clone(),
        gain_db: built
            .h
            .iter()
            .map(|h| 20.0 * fmath::log10(fmath::cnorm(*h)))
            .collect(),
        phase_deg,
        delay_s,
    };
    let words = PageWords::of(&design, &analyses);
    let to_hz = |p: &Complex64| p / (2.0 * PI);
    let hz = |p: &crate::analysis::poles::PlanePoint| Complex64::new(p.re_hz, p.im_hz);
    let stage_poles = analyses.poles.as_deref().unwrap_or_default();
    let built_poles_hz: Vec<Complex64> = stage_poles
        .iter()
        .flat_map(|st| st.achieved.iter().map(hz))
        .collect();
    let zeros_hz: Vec<Complex64> = stage_poles
        .iter()
        .flat_map(|st| st.zeros.iter().map(hz))
        .collect();
    let step_curve = |r: &Option<crate::analysis::timeresp::TimeResponse>, label: &str| {
        r.as_ref().map(|r| Curve {
            label: label.into(),
            x: r.t_s.clone(),
            y: r.step.clone(),
        })
    };
    let (noise_total, noise_parts) = match &analyses.noise_report {
        Some(report) => (
            Some(Curve {
                label: "total".into(),
                x: report.freqs_hz.clone(),
                y: report.output_density_v_per_rthz.clone(),
            }),
            report
                .sources
                .iter()
                .take(4)
                .map(|source| Curve {
                    label: format!(
                        "{}{} {:.0} %",
                        source.reference,
                        match source.kind {
                            crate::analysis::noise::NoiseKind::Resistor => "",
                            crate::analysis::noise::NoiseKind::OpAmpVoltage => " eₙ",
                            crate::analysis::noise::NoiseKind::OpAmpCurrentPlus => " iₙ+",
                            crate::analysis::noise::NoiseKind::OpAmpCurrentMinus => " iₙ−",
                        },
                        source.share * 100.0
                    ),
                    x: report.freqs_hz.clone(),
                    y: source.density_v_per_rthz.clone(),
                })
                .collect(),
        ),
        None => (None, Vec::new()),
    };
    let data = PlotData {
        class: Some(synthesis.class),
        gain_db: state.requirement.gain_db,
        mask: state.requirement.mask,
        ideal,
        built: Some(built_curve),
        envelope_db: None,
        envelope_label: String::new(),
        target_poles_hz: synthesis.poles.iter().map(to_hz).collect(),
        built_poles_hz,
        zeros_hz: if zeros_hz.is_empty() {
            vec![Complex64::new(0.0, 0.0); synthesis.zeros_at_origin.min(1)]
        } else {
            zeros_hz
        },
        step_ideal: step_curve(&analyses.step_response_ideal, "ideal"),
        step_built: step_curve(&analyses.step_response, "built"),
        impedance: Some(Curve {
            label: "|Z in|".into(),
            x: freqs.clone(),
            y: built.z_in_ohm.clone(),
        }),
        noise_total,
        noise_parts,
        levels: built
            .levels_db
            .iter()
            .enumerate()
            .map(|(k, y)| Curve {
                label: format!("stage {}", k + 1),
                x: freqs.clone(),
                y: y.clone(),
            })
            .collect(),
        level_limit_db: Some(20.0 * fmath::log10(state.signal.swing_pk / state.signal.vin_pk)),
        hist_cutoff: None,
        hist_cutoff_is_depth: false,
        hist_gain: None,
    };
    let mut view = text_view(&design, &data);
    words.fill(&mut view);
    if let Some(v) = &analyses.as_built {
        view.summary.push_str(" · ");
        view.summary.push_str(&crate::export::words::verdict(v));
    }
    watch.lap("text view");
    Ok(PageModel {
        design,
        data,
        view,
        study: None,
    })
}

/// The part of `query` that a form with the fields `form_keys` cannot show: every pair whose key
/// is a link key (`link::KEYS`) but not one of the form's, in the order given, as a query string
/// (no `?`). The page sends it back with every edit, so a key without a field (`tolset`, a seed
/// set by hand …) survives editing; unknown keys are not kept (they are listed as ignored).
pub fn link_extras(query: &str, form_keys: &[&str]) -> String {
    let mut out = form_urlencoded::Serializer::new(String::new());
    for (key, value) in form_urlencoded::parse(link::query_of(query).as_bytes()) {
        if key != "v" && link::KEYS.contains(&key.as_ref()) && !form_keys.contains(&key.as_ref()) {
            out.append_pair(&key, &value);
        }
    }
    out.finish()
}

/// What the page's form shows for a link: the value of every key as the link writer writes it
/// for the state the link reads as (so a version-1 link fills the form with today's names, and a
/// bad value shows the default the design uses), the parts typed over, the order mode and the
/// keys the form has no field for.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FormFill {
    /// `(key, text)` for every key the writer writes, except `v`, `set` and the extras.
    pub values: Vec<(String, String)>,
    /// Parts typed over: `(reference, value text)`.
    pub overrides: Vec<(String, String)>,
    /// `fixed` when the order is fixed, `limits` when it follows from the limits.
    pub order_mode: &'static str,
    /// True when the converter helper's keys are set.
    pub converter: bool,
    /// The design's title, when it has one (shown as text only).
    pub title: Option<String>,
    /// The keys without a field, as a query string ([`link_extras`]).
    pub extra: String,
}

/// The form's values for `query` (see [`FormFill`]); `form_keys` are the form's field names.
pub fn form_of_link(query: &str, form_keys: &[&str]) -> FormFill {
    let report = link::parse(query);
    let state = &report.state;
    let written = link::to_query(state);
    let values = form_urlencoded::parse(link::query_of(&written).as_bytes())
        .filter(|(k, _)| k != "v" && k != "set" && form_keys.contains(&k.as_ref()))
        .map(|(k, v)| (k.into_owned(), v.into_owned()))
        .collect();
    let overrides = form_urlencoded::parse(link::query_of(&written).as_bytes())
        .filter(|(k, _)| k == "set")
        .flat_map(|(_, v)| {
            v.split(',')
                .filter_map(|pair| pair.split_once(':'))
                .map(|(r, t)| (r.to_string(), t.to_string()))
                .collect::<Vec<_>>()
        })
        .collect();
    FormFill {
        values,
        overrides,
        order_mode: match state.requirement.order {
            crate::spec::OrderChoice::Fixed(_) => "fixed",
            crate::spec::OrderChoice::FromMask => "limits",
        },
        converter: state.converter.is_some(),
        title: state.title.clone(),
        extra: link_extras(&written, form_keys),
    }
}

/// The default of every key that has one, as the form's placeholders show it
/// ([`link::defaults`], the link table's own defaults): an empty field leaves the key to the core,
/// which uses this value. Keys without a default (`title`, the limits, `set` …) are left out.
pub fn form_defaults() -> Vec<(String, String)> {
    link::defaults()
        .into_iter()
        .filter(|(_, text)| !text.is_empty())
        .map(|(key, text)| (key.to_string(), text))
        .collect()
}

mod import;
mod model;
mod words;

pub use import::link_of_json;
pub use words::level_crossings;
use words::{text_view, PageWords};

#[cfg(test)]
mod tests;

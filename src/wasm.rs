//! The wasm facade: the only module that knows JavaScript types.
//!
//! One export per page action. Each converts its arguments by hand, calls the native core
//! ([`crate::app`], [`crate::plot`], [`crate::schematic`], the tolerance study) and returns
//! plain values: errors cross the boundary as `{ ok: false, message }` objects or as rejected
//! `Result`s with a message, never as panics. A panic hook writes any defect into the page's
//! `#defect` element and the console, so a broken page says so.
//!
//! The facade keeps the last good design (the one drawn) and the running tolerance study.

use std::cell::RefCell;

use serde::Serialize;
use wasm_bindgen::prelude::*;
use web_sys::HtmlCanvasElement;

use crate::analysis::tolerance::MonteCarlo;
use crate::app::{self as page, PageModel, View};
use crate::fmath;
use crate::plot::{self, Look, PlotKind, Theme};
use crate::schematic;

#[derive(Default)]
struct Sheet {
    /// The design on screen (the last evaluation that was committed).
    model: Option<PageModel>,
    /// The tolerance study in progress, for `model`.
    study: Option<MonteCarlo>,
}

thread_local! {
    static SHEET: RefCell<Sheet> = RefCell::new(Sheet::default());
}

fn to_js<T: Serialize>(value: &T) -> JsValue {
    let serializer = serde_wasm_bindgen::Serializer::json_compatible();
    value
        .serialize(&serializer)
        .unwrap_or_else(|e| JsValue::from_str(&format!("serialization failed: {e}")))
}

/// A large value (the page's view model) as one JSON text read by the browser's `JSON.parse`:
/// one call across the boundary instead of one per field and array element, which made the view
/// the slowest part of an edit after the analyses themselves. Non-finite numbers become `null`
/// either way.
fn to_js_via_json<T: Serialize>(value: &T) -> JsValue {
    match serde_json::to_string(value) {
        Ok(text) => js_sys::JSON::parse(&text).unwrap_or_else(|_| to_js(value)),
        Err(_) => to_js(value),
    }
}

#[derive(Serialize)]
struct Outcome<'a> {
    ok: bool,
    message: &'a str,
}

fn failure(message: &str) -> JsValue {
    to_js(&Outcome { ok: false, message })
}

fn look(dark: bool, dpr: f64, compact: bool) -> Look {
    Look {
        theme: if dark { Theme::Dark } else { Theme::Light },
        scale: dpr,
        compact,
    }
}

/// Installs the panic hook. Runs once when the module starts.
#[wasm_bindgen(start)]
pub fn start() {
    std::panic::set_hook(Box::new(|info| {
        let message = format!("internal defect (please report): {info}");
        web_sys::console::error_1(&JsValue::from_str(&message));
        if let Some(element) = web_sys::window()
            .and_then(|w| w.document())
            .and_then(|d| d.get_element_by_id("defect"))
        {
            element.set_text_content(Some(&message));
            let _ = element.remove_attribute("hidden");
        }
    }));
}

/// Evaluates a link (query string) and returns the page's view model.
///
/// The design replaces the one on screen (`committed: true`) when it composed and either the link
/// had no bad value or `accept_errors` is set (opening a link: what is valid loads). Otherwise the
/// last good design stays and the view carries the errors.
#[wasm_bindgen]
pub fn evaluate(query: &str, accept_errors: bool) -> JsValue {
    let evaluation = page::evaluate(query);
    let mut view: View = evaluation.view;
    if let Some(model) = evaluation.model {
        if accept_errors || view.errors.is_empty() {
            view.committed = true;
            SHEET.with(|sheet| {
                let mut sheet = sheet.borrow_mut();
                sheet.model = Some(model);
                sheet.study = None;
            });
        }
    }
    to_js_via_json(&view)
}

/// The part of a link that the page's form cannot show (`form_keys`: its field names, comma
/// separated), as a query string the page appends to the form's own ([`page::link_extras`]).
#[wasm_bindgen]
pub fn link_extras(query: &str, form_keys: &str) -> String {
    let keys: Vec<&str> = form_keys.split(',').map(str::trim).collect();
    page::link_extras(query, &keys)
}

/// What the form shows for a link ([`page::form_of_link`]); `form_keys` are the form's field
/// names, comma separated.
#[wasm_bindgen]
pub fn form_of_link(query: &str, form_keys: &str) -> JsValue {
    let keys: Vec<&str> = form_keys.split(',').map(str::trim).collect();
    to_js(&page::form_of_link(query, &keys))
}

/// The defaults the form's placeholders show ([`page::form_defaults`]): `[[key, text], …]`.
#[wasm_bindgen]
pub fn form_defaults() -> JsValue {
    to_js(&page::form_defaults())
}

/// Reads a link without composing its design: the view carries its bad values (`errors`), its
/// ignored keys and `refused`, and no design. The design on screen is not changed.
#[wasm_bindgen]
pub fn check_link(query: &str) -> JsValue {
    to_js(&page::check(query))
}

/// Draws plot `kind` (`magnitude`, `phase`, … see [`PlotKind::key`]) of the design on screen onto
/// `canvas` (sized by the caller in device pixels).
///
/// # Errors
/// A message for an unknown kind, no design yet, or a canvas without a 2D context.
#[wasm_bindgen]
pub fn draw_plot(
    kind: &str,
    canvas: HtmlCanvasElement,
    dark: bool,
    dpr: f64,
    compact: bool,
) -> Result<(), JsValue> {
    let kind = PlotKind::from_key(kind)
        .ok_or_else(|| JsValue::from_str(&format!("unknown plot '{kind}'")))?;
    let figure = SHEET.with(|sheet| sheet.borrow().model.as_ref().map(|m| m.figure(kind)));
    let figure = figure.ok_or_else(|| JsValue::from_str("no design to draw yet"))?;
    let mut backend = crate::canvas::StyledCanvas::new(canvas)
        .ok_or_else(|| JsValue::from_str("the canvas has no 2D context"))?;
    plot::draw(&mut backend, &figure, &look(dark, dpr, compact))
        .map_err(|e| JsValue::from_str(&e.to_string()))
}

/// The crosshair readout of plot `kind` at device pixel `(x, y)` of a `width` × `height` canvas;
/// `null` outside the plot area or with no design.
#[wasm_bindgen]
pub fn read_plot(
    kind: &str,
    width: u32,
    height: u32,
    dpr: f64,
    compact: bool,
    x: f64,
    y: f64,
) -> JsValue {
    let Some(kind) = PlotKind::from_key(kind) else {
        return JsValue::NULL;
    };
    let read = SHEET.with(|sheet| {
        let sheet = sheet.borrow();
        let model = sheet.model.as_ref()?;
        plot::readout(
            &model.figure(kind),
            width,
            height,
            &look(false, dpr, compact),
            x,
            y,
        )
    });
    match read {
        Some(r) => to_js(&r),
        None => JsValue::NULL,
    }
}

/// Draws the schematic of stage `stage` (0-based) of the design on screen onto `canvas`. Parts
/// the link types over are drawn in the target colour.
///
/// # Errors
/// A message for a stage that does not exist or a canvas without a 2D context.
#[wasm_bindgen]
pub fn draw_schematic(
    stage: usize,
    canvas: HtmlCanvasElement,
    dark: bool,
    dpr: f64,
) -> Result<(), JsValue> {
    SHEET.with(|sheet| {
        let sheet = sheet.borrow();
        let model = sheet
            .model
            .as_ref()
            .ok_or_else(|| JsValue::from_str("no design to draw yet"))?;
        let netlist = &model
            .design
            .board
            .stages
            .get(stage)
            .ok_or_else(|| JsValue::from_str(&format!("there is no stage {}", stage + 1)))?
            .netlist;
        let typed: Vec<String> = model
            .design
            .state
            .overrides
            .iter()
            .map(|(reference, _)| reference.clone())
            .collect();
        let mut backend = crate::canvas::StyledCanvas::new(canvas)
            .ok_or_else(|| JsValue::from_str("the canvas has no 2D context"))?;
        schematic::draw(&mut backend, netlist, &typed, &look(dark, dpr, false))
            .map(|_| ())
            .map_err(|e| JsValue::from_str(&e.to_string()))
    })
}

#[derive(Serialize)]
struct StudyStart {
    ok: bool,
    total: usize,
    message: String,
}

/// Starts the tolerance study of the design on screen with the link's settings. Returns
/// `{ ok, total, message }`.
#[wasm_bindgen]
pub fn study_start() -> JsValue {
    SHEET.with(|sheet| {
        let mut sheet = sheet.borrow_mut();
        // The study it replaces goes first, so that two studies' readings never share the heap.
        sheet.study = None;
        let Some(model) = sheet.model.as_ref() else {
            return failure("no design to study yet");
        };
        match model.start_study() {
            Ok(study) => {
                let total = study.progress().total;
                sheet.study = Some(study);
                to_js(&StudyStart {
                    ok: true,
                    total,
                    message: String::new(),
                })
            }
            Err(e) => to_js(&StudyStart {
                ok: false,
                total: 0,
                message: format!("{}: {}", e.key, e.message),
            }),
        }
    })
}

#[derive(Serialize)]
struct StudyProgress {
    done: usize,
    total: usize,
    finished: bool,
    status: String,
    summary: String,
}

/// Runs up to `n_runs` more runs of the study in progress and reports
/// `{ done, total, finished: false, status }`. When every run is done, [`study_finish`] turns
/// the runs into the results (a separate call, so the page can paint in between).
#[wasm_bindgen]
pub fn study_step(n_runs: usize) -> JsValue {
    SHEET.with(|sheet| {
        let mut sheet = sheet.borrow_mut();
        let Some(study) = sheet.study.as_mut() else {
            return to_js(&StudyProgress {
                done: 0,
                total: 0,
                finished: true,
                status: "no study running".into(),
                summary: String::new(),
            });
        };
        let progress = study.step(n_runs.max(1));
        to_js(&StudyProgress {
            done: progress.done,
            total: progress.total,
            finished: false,
            status: if study.is_done() {
                format!("{} runs done; summarizing", progress.total)
            } else {
                format!("{} of {} runs", progress.done, progress.total)
            },
            summary: String::new(),
        })
    })
}

/// Works out the percentile curves of up to `n_points` more frequencies of the finished study
/// (see [`MonteCarlo::summarize`]); returns how many are left (0 also when there is no study).
/// The page calls it in short pieces before [`study_finish`], so that no task runs long.
#[wasm_bindgen]
pub fn study_summarize(n_points: usize) -> usize {
    SHEET.with(|sheet| {
        sheet
            .borrow_mut()
            .study
            .as_mut()
            .map_or(0, |study| study.summarize(n_points))
    })
}

/// Summarizes the finished study (percentiles, envelope, histograms, yield) into the plots and
/// the summary sentence; returns `{ done, total, finished: true, status, summary }`.
#[wasm_bindgen]
pub fn study_finish() -> JsValue {
    SHEET.with(|sheet| {
        let mut sheet = sheet.borrow_mut();
        let progress = sheet.study.as_ref().map(MonteCarlo::progress);
        let summary = sheet.study.take().map(MonteCarlo::finish);
        let (status, line) = match (sheet.model.as_mut(), summary) {
            (Some(model), Some(summary)) => {
                model.apply_study(summary);
                (model.study_line(), model.summary_with_study())
            }
            _ => ("no study to summarize".to_string(), String::new()),
        };
        to_js(&StudyProgress {
            done: progress.map_or(0, |p| p.done),
            total: progress.map_or(0, |p| p.total),
            finished: true,
            status,
            summary: line,
        })
    })
}

/// Stops the study in progress; its partial results are dropped.
#[wasm_bindgen]
pub fn study_cancel() {
    SHEET.with(|sheet| sheet.borrow_mut().study = None);
}

/// The size of the page's wasm memory, bytes (`memory.buffer.byteLength`): it grows when the
/// heap needs more and is never given back, so it is the most the page has held at once. Read
/// by the memory test (`tests/browser/memory.test.js`).
#[wasm_bindgen]
pub fn heap_bytes() -> f64 {
    (core::arch::wasm32::memory_size::<0>() as f64) * 65536.0
}

#[derive(Serialize)]
struct Text {
    ok: bool,
    text: String,
    message: String,
}

/// A download of the design on screen: `bom` (parts list CSV), `spice` (netlist) or `json`.
/// Returns `{ ok, text, message }`.
#[wasm_bindgen]
pub fn export_text(kind: &str) -> JsValue {
    SHEET.with(|sheet| {
        let sheet = sheet.borrow();
        let Some(model) = sheet.model.as_ref() else {
            return failure("no design to save yet");
        };
        match model.export(kind) {
            Ok(text) => to_js(&Text {
                ok: true,
                text,
                message: String::new(),
            }),
            Err(e) => to_js(&Text {
                ok: false,
                text: String::new(),
                message: e.message,
            }),
        }
    })
}

#[derive(Serialize)]
struct Imported {
    ok: bool,
    query: String,
    message: String,
}

/// Reads a design JSON file and returns the link it was made from: `{ ok, query, message }`.
#[wasm_bindgen]
pub fn import_json(text: &str) -> JsValue {
    match page::link_of_json(text) {
        Ok(query) => to_js(&Imported {
            ok: true,
            query,
            message: String::new(),
        }),
        Err(e) => to_js(&Imported {
            ok: false,
            query: String::new(),
            message: e.message,
        }),
    }
}

#[derive(Serialize)]
struct Lap {
    step: &'static str,
    ms: f64,
}

/// The time each step of an evaluation takes in this browser, ms (for the page's benchmark). The
/// design on screen is not changed.
#[wasm_bindgen]
pub fn profile_evaluate(query: &str) -> JsValue {
    let performance = web_sys::window().and_then(|w| w.performance());
    let clock = move || performance.as_ref().map_or(0.0, |p| p.now());
    let report = crate::link::parse(query);
    let mut watch = page::Stopwatch::new(&clock);
    let _ = page::compose_timed(&report.state, &mut watch);
    let laps: Vec<Lap> = watch
        .laps
        .iter()
        .map(|&(step, ms)| Lap { step, ms })
        .collect();
    to_js(&laps)
}

/// The study-kernel benchmark's board: an 8th-order Butterworth low-pass as four unity-gain
/// Sallen-Key stages at 1 kHz, the same as the native benchmark's (`benches/montecarlo.rs`), so
/// that the two figures are of one computation.
fn kernel_bench_study(runs: usize) -> Option<(MonteCarlo, usize, usize)> {
    use crate::analysis::tolerance::{
        CutoffDefinition, MonteCarloSettings, PartDistribution, Tolerances,
    };
    use crate::board::{Board, BuildChoices};
    use crate::section::{Section, SectionKind};
    use crate::spec::{Edge, Mask, ResponseClass};
    const N_POINTS: usize = 200;
    // Butterworth pole Q values of order 8: 1 / (2 sin((2k − 1)π/16)), k = 1..4.
    let sections: Vec<Section> = (1..=4)
        .map(|k| Section {
            kind: SectionKind::LowPass,
            f0_hz: 1000.0,
            q: Some(1.0 / (2.0 * fmath::sin((2 * k - 1) as f64 * std::f64::consts::PI / 16.0))),
            gain: 1.0,
            fz_hz: None,
        })
        .rev()
        .collect();
    let board = Board::build(&sections, &BuildChoices::default()).ok()?;
    let settings = MonteCarloSettings {
        runs,
        seed: 1,
        tolerances: Tolerances {
            distribution: PartDistribution::Gaussian { sigmas: 3.0 },
            resistor_pct: 1.0,
            capacitor_pct: 5.0,
            overrides: vec![],
        },
        freqs_hz: (0..N_POINTS)
            .map(|i| fmath::powf(10.0, 1.0 + 4.0 * i as f64 / (N_POINTS - 1) as f64))
            .collect(),
        percentiles: vec![5.0, 50.0, 95.0],
        cutoff: CutoffDefinition::Attenuation { db: 3.0103 },
        class: ResponseClass::LowPass,
        reference_gain: 1.0,
        passband_ref_hz: 0.0,
    };
    let mask = Mask {
        pass: Edge::Single(800.0),
        apass_db: 1.0,
        stop: Edge::Single(3000.0),
        astop_db: 60.0,
    };
    let n_stages = board.stages.len();
    let study = MonteCarlo::new(&board, Some(&mask), settings).ok()?;
    Some((study, n_stages, N_POINTS))
}

#[derive(Serialize)]
struct KernelBench {
    runs: usize,
    stages: usize,
    points: usize,
    /// The time of each `step(runs)`, ms, in order: the first ones run before V8 has optimised
    /// the kernel.
    ms: Vec<f64>,
}

/// Times the tolerance-study kernel as the native criterion benchmark `montecarlo_kernel` does:
/// `repeats` fresh studies of the benchmark board, each timed over one `step(runs)` (set-up
/// excluded). Stage-evaluations per second = runs × stages × points / time, the figure the
/// native benchmark prints (for the page's benchmark, tests/browser/bench.js).
#[wasm_bindgen]
pub fn bench_study_kernel(runs: usize, repeats: usize) -> JsValue {
    let performance = web_sys::window().and_then(|w| w.performance());
    let clock = move || performance.as_ref().map_or(0.0, |p| p.now());
    let mut out = KernelBench {
        runs,
        stages: 0,
        points: 0,
        ms: Vec::new(),
    };
    for _ in 0..repeats {
        let Some((mut study, n_stages, n_points)) = kernel_bench_study(runs) else {
            return failure("the benchmark board does not build");
        };
        out.stages = n_stages;
        out.points = n_points;
        let t0 = clock();
        let progress = study.step(runs);
        out.ms.push(clock() - t0);
        if progress.done != runs {
            return failure("the benchmark study did not run every run");
        }
    }
    to_js(&out)
}

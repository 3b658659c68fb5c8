//! Tests of the page model: links compose, bad values are reported on their keys, saved designs
//! reopen, the fast board sweep equals the dense reference, and no link panics anywhere.

use super::*;
use crate::fmath;
use crate::plot::figures::PlotKind;
use crate::schematic;

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
        let mut solver =
            crate::analysis::built::BoardSolver::of_board(board).unwrap_or_else(|e| panic!("{e}"));
        let sweep =
            crate::analysis::built::sweep(&mut solver, &freqs).unwrap_or_else(|e| panic!("{e}"));
        let (levels, z_in_ohm) = (&sweep.levels_db, &sweep.z_in_ohm);
        for (i, &f) in freqs.iter().enumerate() {
            let s = Complex64::new(0.0, 2.0 * PI * f);
            let (h, outputs) =
                crate::mna::board_response(board, s).unwrap_or_else(|e| panic!("{}", e.message));
            let gain = 20.0 * fmath::log10(fmath::cnorm(h));
            let fast = sweep.h[i];
            assert!(
                (20.0 * fmath::log10(fmath::cnorm(fast)) - gain).abs() < 1e-9,
                "{link} at {f} Hz"
            );
            // Phases agree modulo whole turns.
            let d =
                (fmath::carg(fast).to_degrees() - fmath::carg(h).to_degrees()).rem_euclid(360.0);
            assert!(d < 1e-9 || 360.0 - d < 1e-9, "{link} phase at {f} Hz: {d}");
            for (k, v) in outputs.iter().enumerate() {
                assert!((levels[k][i] - 20.0 * fmath::log10(fmath::cnorm(*v))).abs() < 1e-9);
            }
            // The input impedance from the same solve equals the general nodal analysis'
            // source current.
            let merged = board.netlist().unwrap_or_else(|e| panic!("{e}"));
            let z = fmath::cnorm(
                crate::mna::input_impedance(&merged.netlist, &board.op_amp, s)
                    .unwrap_or_else(|e| panic!("{}", e.message)),
            );
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
                assert!(crate::plot::render_svg(&model.figure(kind), 400, 200, look.theme).is_ok());
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

/// The page keeps the keys its form cannot show (issue: a `tolset` typed into a link was lost by
/// the page's own link writer), and fills the form from the link writer's text for the state, so
/// a cutoff equal to the default stays in the link (`fc=1k` with limits and a fixed order).
#[test]
fn the_form_keeps_every_key_of_the_link() {
    let form_keys = ["resp", "family", "order", "fc", "rtol", "ctol"];
    let query = "v=1&order=4&fc=1k&ctol=10&tolset=C1:50,C2:50&seed=9";
    let fill = form_of_link(query, &form_keys);
    assert!(fill.values.contains(&("fc".to_string(), "1k".to_string())));
    assert!(fill
        .values
        .contains(&("order".to_string(), "4".to_string())));
    assert!(fill
        .values
        .contains(&("ctol".to_string(), "10".to_string())));
    assert_eq!(fill.order_mode, "fixed");
    assert!(
        fill.extra.contains("tolset=C1%3A50%2CC2%3A50"),
        "{}",
        fill.extra
    );
    assert!(fill.extra.contains("seed=9"), "{}", fill.extra);
    assert!(!fill.extra.contains("ctol"), "{}", fill.extra);
    // The form's own values plus the extras read back as the same state as the link.
    let mut back: Vec<String> = fill
        .values
        .iter()
        .map(|(k, v)| format!("{k}={v}"))
        .collect();
    back.push(fill.extra.clone());
    assert_eq!(
        link::parse(&back.join("&")).state,
        link::parse(query).state,
        "{back:?}"
    );
    // A fixed order with limits and no fc: the cutoff follows from the limits, so the form's
    // cutoff stays empty rather than showing a default that would change the design.
    let fill = form_of_link("v=1&order=6&fpass=500&fstop=5k&astop=40", &["order", "fc"]);
    assert!(
        !fill.values.iter().any(|(k, _)| k == "fc"),
        "{:?}",
        fill.values
    );
}

/// Every default the form shows reads back as the link reader's default (the placeholders are the
/// core's, not the markup's).
#[test]
fn the_form_defaults_are_the_readers() {
    let defaults = form_defaults();
    assert!(
        defaults.contains(&("fc".to_string(), "1k".to_string())),
        "{defaults:?}"
    );
    // `passloss` alone is a limit without the others (it only has a meaning with them).
    let query: Vec<String> = defaults
        .iter()
        .filter(|(k, _)| k != "passloss")
        .map(|(k, v)| format!("{k}={v}"))
        .collect();
    let report = link::parse(&format!("v=2&{}", query.join("&")));
    assert!(report.errors.is_empty(), "{:?}", report.errors);
    // `ripple` and `apass` take effect only with a Chebyshev family and limits; the rest of the
    // state, the requirement included, is the default.
    assert_eq!(report.state, LinkState::default());
}

/// The converter helper's limits stay the helper's: the link writer leaves them out, so the form
/// shows the converter and an edited resolution moves the stopband depth (README: the helper
/// fills the limits "where those keys are absent").
#[test]
fn limits_filled_by_the_converter_are_left_to_it() {
    let query = "v=2&fsample=2k&adcbits=24&fsignal=200";
    let written = link::to_query(&link::parse(query).state);
    assert!(
        !written.contains("stopdepth") && !written.contains("passedge"),
        "{written}"
    );
    assert_eq!(link::parse(&written).state, link::parse(query).state);
    let fill = form_of_link(query, &["stopdepth", "passedge", "stopedge", "adcbits"]);
    assert_eq!(fill.values, vec![("adcbits".to_string(), "24".to_string())]);
}

#[test]
fn a_mains_notch_shows_its_zero_frequency_and_the_built_board_depth() {
    // A second-order band-stop at 50 Hz is one notch section with its zeros at 50 Hz
    // (lp → bs transform: the zeros sit at the centre, physics of the transform); the page's
    // stage table carries fz beside f0 and Q, and the figures line and the stage card the built
    // board's notch (`analysis::notch`), deeper than 40 dB with E96/E12 parts and the generic
    // op amp (ngspice agrees on this board: tests/ngspice_zeros.rs).
    let ev = evaluate("v=2&resp=bs&order=2&fc=50&bw=5");
    let model = ev
        .model
        .unwrap_or_else(|| panic!("no design: {:?}", ev.view.errors));
    let stage = &model.view.stages[0];
    let fz = stage
        .rows
        .iter()
        .find(|r| r.what == "fz")
        .expect("an fz row");
    assert_eq!(fz.target, "50 Hz");
    assert!(
        model.view.figures.contains("notch "),
        "{}",
        model.view.figures
    );
    assert!(stage.needs.contains("Board notch "), "{}", stage.needs);
    let depth: f64 = model
        .view
        .figures
        .split("notch ")
        .nth(1)
        .and_then(|t| t.split(" dB").next())
        .and_then(|t| t.parse().ok())
        .expect("a depth in dB");
    assert!(depth > 40.0, "{}", model.view.figures);
    assert!(
        model.view.summary.contains("band-stop"),
        "{}",
        model.view.summary
    );
}

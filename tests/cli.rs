//! The command line as a script uses it: exit status, the stable output shapes of the brief
//! (JSON fields, sweep CSV header, spread JSON), and the sweep checked against the independent
//! section-cascade response.

mod cli_run;
use cli_run::rolloff;

fn json(args: &[&str]) -> serde_json::Value {
    let (code, out, err) = rolloff(args);
    assert_eq!(code, 0, "{args:?}: {err}");
    serde_json::from_str(&out).unwrap_or_else(|e| panic!("{args:?}: not JSON ({e}): {out}"))
}

const DEMO: &str =
    "?v=1&resp=lp&family=chebyshev&ripple=0.5&order=6&fc=2k&rser=e96&cser=e12&topo=mfb";

#[test]
fn design_json_has_the_fields_of_the_brief() {
    let v = json(&["design", DEMO, "--format", "json"]);
    assert_eq!(v["order"], 6);
    assert_eq!(v["family"], "chebyshev");
    assert_eq!(v["resp"], "lp");
    let stages = v["stages"].as_array().expect("stages");
    assert_eq!(stages.len(), 3, "6th order = three second-order stages");
    let mut refs = std::collections::BTreeSet::new();
    for stage in stages {
        assert_eq!(stage["order"], 2);
        assert!(stage["f0_hz"].as_f64().is_some_and(|f| f > 0.0));
        assert!(stage["q"].as_f64().is_some_and(|q| q > 0.5));
        assert!(stage["gain"].as_f64().is_some());
        assert!(stage["topology"].is_string());
        assert!(stage["achieved"]["f0_hz"].as_f64().is_some());
        assert!(stage["achieved"]["q"].as_f64().is_some());
        for part in stage["parts"].as_array().expect("parts") {
            assert!(part["ref"].is_string());
            assert!(part.get("value").is_some() && part.get("ideal").is_some());
        }
    }
    for part in v["parts"].as_array().expect("top-level parts") {
        let r = part["ref"].as_str().expect("ref").to_string();
        assert!(refs.insert(r.clone()), "{r} appears twice on the board");
    }
    for prefix in ["R1", "C1", "U1"] {
        assert!(refs.contains(prefix), "{prefix} missing from {refs:?}");
    }
    assert!(v["warnings"].is_array());
}

#[test]
fn first_order_stage_has_null_q() {
    let v = json(&["design", "?v=2&order=3&fc=1k", "--format", "json"]);
    let stages = v["stages"].as_array().expect("stages");
    assert_eq!(
        stages[0]["order"], 1,
        "ascending Q puts the first-order section first"
    );
    assert!(stages[0]["q"].is_null());
    assert_eq!(stages[1]["order"], 2);
}

#[test]
fn ideal_sweep_equals_the_section_cascade() {
    // Oracle: the nodal analysis of the board with exact parts and an ideal op amp must equal the
    // product of the section transfer functions (an independent closed-form evaluation).
    let link = "?v=1&resp=lp&family=butterworth&order=5&fc=3k&gain=6";
    let (code, out, err) = rolloff(&[
        "sweep", link, "--from", "10", "--to", "1M", "--points", "61", "--ideal",
    ]);
    assert_eq!(code, 0, "{err}");
    let mut lines = out.lines();
    assert_eq!(lines.next(), Some("freq_hz,gain_db,phase_deg,delay_s"));
    let state = rolloff::link::parse(link).state;
    let synthesis =
        rolloff::design::synthesize(&state.requirement, &state.stage_order).expect("design");
    let mut n = 0;
    for line in lines {
        let cols: Vec<f64> = line
            .split(',')
            .map(|c| c.parse().expect("number"))
            .collect();
        let point = rolloff::response::point(&synthesis.sections, cols[0]);
        assert!(
            (cols[1] - point.gain_db).abs() < 1e-6,
            "gain at {} Hz: {} vs {}",
            cols[0],
            cols[1],
            point.gain_db
        );
        assert!(
            (cols[2] - point.phase_deg).abs() < 1e-4,
            "phase at {} Hz: {} vs {}",
            cols[0],
            cols[2],
            point.phase_deg
        );
        assert!(
            ((cols[3] - point.delay_s) / point.delay_s).abs() < 1e-4,
            "delay at {} Hz",
            cols[0]
        );
        n += 1;
    }
    assert_eq!(n, 61);
}

#[test]
fn built_sweep_differs_from_ideal_where_the_op_amp_runs_out() {
    // Common practice: with a 1 MHz op amp a Sallen-Key low-pass at 20 kHz no longer follows the
    // ideal response far above f0 (its stopband bottoms out).
    let link = "?v=2&order=2&fc=20k&gbw=1M";
    let read = |ideal: bool| -> Vec<f64> {
        let mut args = vec!["sweep", link, "--from", "1M", "--to", "5M", "--points", "3"];
        if ideal {
            args.push("--ideal");
        }
        let (code, out, err) = rolloff(&args);
        assert_eq!(code, 0, "{err}");
        out.lines()
            .skip(1)
            .map(|l| l.split(',').nth(1).unwrap_or("0").parse().unwrap_or(0.0))
            .collect()
    };
    let (ideal, built) = (read(true), read(false));
    assert!(
        built[2] > ideal[2] + 10.0,
        "built {built:?} vs ideal {ideal:?}"
    );
}

#[test]
fn bad_input_exits_2_with_one_line_naming_the_key() {
    for (args, key) in [
        (vec!["design", "?v=1&fc=abc"], "fc"),
        (vec!["design", "?v=1&order=25"], "order"),
        // A version-1 link's limits are reported under their version-2 names (README, "Version
        // 1 links").
        (
            vec!["design", "?v=1&fpass=2k&fstop=1k&astop=40"],
            "stopedge",
        ),
        (
            vec!["design", "?v=1&fpass=1k&fstop=2k&apass=3&astop=2"],
            "stopdepth",
        ),
        (
            vec!["design", "?v=2&passedge=2k&stopedge=1k&stopdepth=40"],
            "stopedge",
        ),
        (
            vec![
                "design",
                "?v=2&passedge=1k&stopedge=2k&passloss=3&stopdepth=2",
            ],
            "stopdepth",
        ),
        (vec!["design", "?v=1&set=R1:xyz"], "set"),
        (vec!["design", "?v=1", "--format", "pdf"], "--format"),
        (vec!["sweep", "?v=1", "--points", "1"], "--points"),
        (vec!["spread", "?v=1", "--runs", "0"], "--runs"),
        (vec!["design", "?v=3"], "v"),
    ] {
        let (code, _out, err) = rolloff(&args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert_eq!(err.lines().count(), 1, "{args:?}: {err}");
        assert!(
            err.contains(key),
            "{args:?}: message should name {key}: {err}"
        );
    }
}

#[test]
fn unknown_keys_warn_and_still_design() {
    let (code, out, err) = rolloff(&["design", "?v=1&fc=1k&colour=teal"]);
    assert_eq!(code, 0);
    assert!(!out.is_empty());
    assert!(err.contains("colour") && err.contains("warning"), "{err}");
}

#[test]
fn spread_json_has_runs_seed_and_yield() {
    let with_mask = json(&[
        "spread",
        "?v=1&fpass=1k&apass=1&fstop=4k&astop=30",
        "--runs",
        "200",
        "--seed",
        "7",
        "--format",
        "json",
    ]);
    assert_eq!(with_mask["runs"], 200);
    assert_eq!(with_mask["seed"], 7);
    let y = with_mask["yield"]
        .as_f64()
        .expect("yield is a number with a mask");
    assert!((0.0..=1.0).contains(&y));
    let without = json(&["spread", "?v=1&fc=1k", "--runs", "50", "--format", "json"]);
    assert!(without["yield"].is_null(), "no mask → yield null");
}

#[test]
fn a_whole_url_works_like_its_query() {
    let a = rolloff(&[
        "design",
        "https://rolloff.invalid/www/index.html?v=1&fc=2k2&order=3#x",
        "--format",
        "json",
    ]);
    let b = rolloff(&["design", "v=1&fc=2k2&order=3", "--format", "json"]);
    assert_eq!(a.0, 0);
    assert_eq!(a.1, b.1);
}

#[test]
fn design_json_carries_the_analyses_of_the_built_board() {
    // Equal-component unity-gain Sallen-Key low-pass (cratio=1 is refused for Q > 0.5, so use a
    // Bessel order-2 Q = 0.577 with exact parts): f0 sensitivity to each R and C is −1/2
    // (textbook identity for f0 = 1/(2π√(R1R2C1C2))).
    let v = json(&[
        "design",
        "?v=1&order=2&fc=1k&family=bessel&rser=exact&cser=exact&gbw=ideal&a0=ideal&rout=0",
        "--format",
        "json",
    ]);
    let a = &v["analysis"];
    assert!(
        a["errors"].as_array().is_some_and(|e| e.is_empty()),
        "{}",
        a["errors"]
    );
    for part in a["sensitivities"][0]["parts"]
        .as_array()
        .expect("sensitivities")
    {
        let s = part["f0"].as_f64().expect("f0 sensitivity");
        assert!((s + 0.5).abs() < 1e-6, "{part}");
    }
    assert!(a["noise"]["rms_v"].as_f64().is_some_and(|x| x > 0.0));
    assert!(a["step"]["overshoot_pct"].is_number() || a["step"]["overshoot_pct"].is_null());
    assert!(a["opamp_needs"]["stages"][0]["slew_v_per_s"]
        .as_f64()
        .is_some_and(|x| x > 0.0));
    assert!(a["levels"][0]["headroom_db"].is_number());
    assert_eq!(
        a["poles"][0]["achieved"].as_array().map(|p| p.len()),
        Some(2)
    );
}

#[test]
fn plot_writes_an_svg_for_every_kind_and_refuses_an_unknown_one() {
    let link = "?v=2&order=4&fc=1k&passedge=800&stopedge=4k&stopdepth=30";
    for kind in [
        "magnitude",
        "phase",
        "delay",
        "step",
        "poles",
        "impedance",
        "noise",
        "levels",
    ] {
        let (code, out, err) = rolloff(&["plot", link, "--kind", kind]);
        assert_eq!(code, 0, "{kind}: {err}");
        assert!(
            out.starts_with("<svg") && out.trim_end().ends_with("</svg>"),
            "{kind}: not an SVG document"
        );
        assert!(
            out.matches("<path").count()
                + out.matches("<polyline").count()
                + out.matches("<line").count()
                > 3,
            "{kind}: nothing drawn"
        );
    }
    let (code, _, err) = rolloff(&["plot", link, "--kind", "sparkles"]);
    assert_eq!(code, 2);
    assert!(err.contains("--kind"), "{err}");
}

/// `margin` accepts split, pass and stop; anything else is bad input (exit 2, one line naming
/// the key and the accepted values).
#[test]
fn margin_takes_split_pass_or_stop() {
    let mask = "?v=2&passedge=1k&passloss=1&stopedge=3k&stopdepth=40";
    for value in ["split", "pass", "stop"] {
        let (code, _out, err) = rolloff(&["design", &format!("{mask}&margin={value}")]);
        assert_eq!(code, 0, "margin={value}: {err}");
    }
    let (code, _out, err) = rolloff(&["design", &format!("{mask}&margin=xyz")]);
    assert_eq!(code, 2, "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("margin"), "message should name margin: {err}");
    for accepted in ["split", "pass", "stop"] {
        assert!(
            err.contains(accepted),
            "message should list {accepted}: {err}"
        );
    }
}

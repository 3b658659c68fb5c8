//! A `span` from the link is narrowed to the bounds of the automatic span (1e-4 Hz … 1e11 Hz)
//! and the design says so in its warnings.
//!
//! Source: physics of the floating-point format — below about 1e-4 Hz the powers of ω in a
//! stage's polynomials underflow, so a span from 1e-300 Hz made every figure of the tolerance
//! study NaN; the bounds themselves are the automatic span's (`pipeline::compose`).

mod cli_run;
use cli_run::rolloff;

fn json(args: &[&str]) -> serde_json::Value {
    let (code, out, err) = rolloff(args);
    assert_eq!(code, 0, "{args:?}: {err}");
    serde_json::from_str(&out).unwrap_or_else(|e| panic!("{args:?}: not JSON ({e}): {out}"))
}

#[test]
fn a_span_from_1e_300_hz_gives_a_finite_study() {
    let (code, out, err) = rolloff(&["spread", "?v=2&span=1e-300,1e10", "--runs", "200"]);
    assert_eq!(code, 0, "{err}");
    // The text writes NaN as an en dash; the nominal cutoff was one before the bounds.
    assert!(!out.contains('–'), "a figure is NaN:\n{out}");
    assert!(out.contains("Cutoff"), "{out}");

    let v = json(&[
        "spread",
        "?v=2&span=1e-300,1e10",
        "--runs",
        "200",
        "--format",
        "json",
    ]);
    let freqs = v["freqs_hz"].as_array().expect("freqs_hz");
    assert_eq!(freqs.first().and_then(|f| f.as_f64()), Some(1e-4));
    assert_eq!(freqs.last().and_then(|f| f.as_f64()), Some(1e10));
    let nominal = v["nominal_db"].as_array().expect("nominal_db");
    assert!(
        nominal
            .iter()
            .all(|x| x.as_f64().is_some_and(f64::is_finite)),
        "a nominal gain is not finite"
    );
    // A Butterworth's fc is its −3 dB point by definition; rounded parts and the generic op amp
    // move the built board's by a few per cent at most.
    let cutoff = &v["cutoffs"][0]["hz"]["nominal"];
    assert!(
        cutoff
            .as_f64()
            .is_some_and(|f| (f / 1e3 - 1.0).abs() < 0.05),
        "nominal cutoff {cutoff} of the 1 kHz Butterworth"
    );
}

#[test]
fn a_narrowed_span_studies_exactly_the_bounded_span() {
    // The yield of a masked design: the narrowed span gives the study of the bounds themselves,
    // byte for byte (the same grid, the same draws).
    let masked = "&passedge=1k&stopedge=3k&stopdepth=30";
    let study = |span: &str| {
        let (code, out, err) = rolloff(&[
            "spread",
            &format!("?v=2&span={span}{masked}"),
            "--runs",
            "200",
            "--format",
            "json",
        ]);
        assert_eq!(code, 0, "{span}: {err}");
        out
    };
    let narrowed = study("1e-300,1e10");
    assert_eq!(narrowed, study("1e-4,1e10"));
    let v: serde_json::Value = serde_json::from_str(&narrowed).expect("JSON");
    let y = v["yield"].as_f64().expect("a yield");
    assert!((0.0..=1.0).contains(&y) && y > 0.5, "yield {y}");
}

#[test]
fn the_design_says_the_span_was_narrowed_and_to_what() {
    let v = json(&["design", "?v=2&span=1e-300,1e10", "--format", "json"]);
    let warnings: Vec<&str> = v["warnings"]
        .as_array()
        .expect("warnings")
        .iter()
        .filter_map(|w| w.as_str())
        .collect();
    assert!(
        warnings.iter().any(|w| w.contains("span")
            && w.contains("1e-300 Hz")
            && w.contains("100 µHz … 10 GHz")),
        "{warnings:?}"
    );
    let (code, text, err) = rolloff(&["design", "?v=2&span=1e-300,1e10"]);
    assert_eq!(code, 0, "{err}");
    assert!(text.contains("narrowed to 100 µHz … 10 GHz"), "{text}");

    // A span inside the bounds is left as asked, without a word.
    let v = json(&["design", "?v=2&span=10,100k", "--format", "json"]);
    let warnings = v["warnings"].as_array().expect("warnings");
    assert!(
        warnings
            .iter()
            .all(|w| !w.as_str().unwrap_or("").contains("span")),
        "{warnings:?}"
    );
}

//! The command line's hardening: what it refuses (exit 2, one line naming the key and the range),
//! how its messages quote the user's text, the per-part tolerance in the parts list, and the sweep
//! (phase independent of `--points`, group delay from the same factorization as the gain).
//!
//! Sources: the README's "Link keys" table and "Command line" section (ranges, exit status), the
//! brief's stable contracts (parts CSV keeps `tolerance_pct` per part), the IEEE 754 binary64
//! format (normal numbers start at 2.2250738585072014e-308; 5e-324 is the smallest subnormal),
//! ECMA-48 (ESC, BEL and the other C0/C1 codes are control functions a terminal acts on), and
//! physics (a follower of open-loop gain A has closed-loop gain A/(1+A)).

mod cli_run;
use cli_run::rolloff;

/// Runs `args`, expects exit 2 with one line on stderr that contains every one of `words`.
fn refused(args: &[&str], words: &[&str]) {
    let (code, _out, err) = rolloff(args);
    assert_eq!(code, 2, "{args:?} should be bad input: {err}");
    let lines: Vec<&str> = err.lines().filter(|l| !l.contains("warning:")).collect();
    assert_eq!(lines.len(), 1, "{args:?}: one line on stderr, got {err:?}");
    for word in words {
        assert!(
            lines[0].contains(word),
            "{args:?}: {word:?} missing in {err:?}"
        );
    }
}

/// True when `text` holds a control character other than a line end (ECMA-48 C0, DEL, C1).
fn has_raw_control(text: &str) -> bool {
    text.chars()
        .any(|c| c.is_control() && c != '\n' && c != '\r')
}

#[test]
fn a_tolset_naming_a_missing_part_is_bad_input_everywhere() {
    // README: "tolset: per-part tolerance, REF:pct"; a reference the board lacks is refused as
    // `set=R99:1k` is (exit 2 naming the key), for every command.
    refused(&["spread", "tolset=C99:1"], &["tolset", "C99", "C1"]);
    refused(&["design", "tolset=C99:1"], &["tolset", "C99"]);
    refused(&["design", "tolset=C99:1", "--format", "bom"], &["tolset"]);
    let (code, _, err) = rolloff(&["design", "tolset=C2:1"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn subnormal_and_absurd_frequencies_are_refused_with_the_range() {
    // IEEE 754: 5e-324 is subnormal. README: fc, bw, edges 1 mHz–1 GHz; the sweep and the noise
    // band stay inside what the analyses cover, 100 µHz–100 GHz.
    let link = "order=2&fc=1k";
    refused(
        &["sweep", link, "--from", "5e-324", "--to", "1e4"],
        &["--from", "100 µHz", "100 GHz"],
    );
    refused(&["sweep", link, "--to", "1e300"], &["--to", "100 GHz"]);
    refused(&["sweep", "order=2&fc=1k&span=5e-324,1e10"], &["span"]);
    refused(&["design", "fc=5e-324"], &["fc", "1 mHz", "1 GHz"]);
    refused(&["design", "resp=bp&fc=1k&bw=5e-324"], &["bw", "1 mHz"]);
    refused(&["design", "noiseband=1e-300,1"], &["noiseband", "100 µHz"]);
    refused(
        &["design", "passedge=1k&stopedge=5e-324&stopdepth=40"],
        &["stopedge", "1 mHz"],
    );
    refused(
        &["design", "fsample=1e300&adcbits=12&fsignal=1k"],
        &["fsample", "1 GHz"],
    );
    refused(
        &["design", "fsample=10k&adcbits=12&fsignal=5e-324"],
        &["fsignal"],
    );
    // A value the range accepts still designs, and a wide span is still narrowed, not refused.
    let (code, out, err) = rolloff(&[
        "sweep", link, "--from", "1e-4", "--to", "1e11", "--points", "3",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("inf") && !out.contains("NaN"), "{out}");
    let (code, _, err) = rolloff(&["design", "order=2&fc=1k&span=1e-300,1e10"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn op_amp_figures_are_zero_or_inside_their_documented_range() {
    // README: rout 0–100 kΩ, vnoise 0–10 µV/√Hz, inoise 0–10 nA/√Hz, gbw 1 Hz–100 GHz, slew above
    // 1 V/s, swing above 0: a tiny positive value is neither zero nor a figure any part has.
    for key in ["rout", "vnoise", "inoise", "gbw", "slew", "swing", "a0"] {
        // 1e-308 lies below the smallest normal number (IEEE 754), as 5e-324 does.
        for tiny in ["1e-308", "5e-324"] {
            let link = format!("order=4&fc=1k&{key}={tiny}");
            refused(&["design", &link], &[key, tiny]);
        }
    }
    // A tiny normal value of a figure whose zero means "none" is still no figure a part has.
    for key in ["rout", "vnoise", "inoise"] {
        let link = format!("order=4&fc=1k&{key}=1e-300");
        refused(&["design", &link], &[key, "is 0 or from"]);
    }
    for link in ["rout=0", "vnoise=0", "inoise=0"] {
        let (code, _, err) = rolloff(&["design", &format!("order=4&fc=1k&{link}")]);
        assert_eq!(code, 0, "{link}: {err}");
    }
}

#[test]
fn a0_of_0_db_designs_a_board_of_halved_followers() {
    // README: a0 accepts 0–300 dB. Physics: a follower with open-loop gain A = 1 (0 dB) has a
    // closed-loop gain A/(1+A) = 1/2, so two unity-gain Sallen-Key stages pass 1/4 = −12.04 dB.
    let (code, out, err) = rolloff(&["design", "order=4&fc=1k&a0=0", "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).expect("design JSON");
    let gain_db = v["as_built"]["passband_gain_db"]
        .as_f64()
        .expect("passband gain");
    let expected = 20.0 * 0.25f64.log10();
    assert!(
        (gain_db - expected).abs() < 0.01,
        "{gain_db} dB vs {expected} dB"
    );
    for command in [
        &["spread", "order=4&fc=1k&a0=0", "--runs", "50"][..],
        &["sweep", "order=4&fc=1k&a0=0"],
    ] {
        let (code, _, err) = rolloff(command);
        assert_eq!(code, 0, "{command:?}: {err}");
    }
}

#[test]
fn control_characters_are_escaped_and_long_values_cut() {
    // ECMA-48: ESC ] 0 ; … BEL sets a terminal's title; echoed raw, a link would drive the
    // terminal. Every quoted value comes back escaped (\u{1b}) and cut after 60 characters.
    let osc = "\u{1b}]0;owned\u{7}";
    let bad_value = format!("order={osc}");
    let (code, _out, err) = rolloff(&["design", &bad_value]);
    assert_eq!(code, 2, "{err}");
    assert!(!has_raw_control(&err), "raw control character in {err:?}");
    assert!(err.contains("\\u{1b}") && err.contains("\\u{7}"), "{err}");

    let unknown_key = format!("order=4&x{osc}=1");
    let (code, _out, err) = rolloff(&["design", &unknown_key]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("warning") && !has_raw_control(&err), "{err:?}");

    let titled = format!("order=4&title=a{osc}b");
    for format in ["text", "bom", "spice", "json"] {
        let (code, out, err) = rolloff(&["design", &titled, "--format", format]);
        assert_eq!(code, 0, "{err}");
        assert!(
            !has_raw_control(&out),
            "{format}: raw control character in the output"
        );
    }

    let long = format!("fc={}", "9".repeat(100_000));
    let (code, _out, err) = rolloff(&["design", &long]);
    assert_eq!(code, 2);
    assert!(
        err.len() < 400,
        "a 100 kB value is echoed whole ({} bytes)",
        err.len()
    );
    assert!(err.contains("(100000 characters)"), "{err}");

    let flag = format!("--points={osc}");
    let (code, _out, err) = rolloff(&["sweep", "order=2", &flag]);
    assert_eq!(code, 2);
    assert!(!has_raw_control(&err), "{err:?}");
}

#[test]
fn an_argument_without_a_known_key_is_not_a_link() {
    // README: LINK is the query string or a whole URL. A file name or `-` names no key; read as a
    // link it would design the default filter, so it is refused saying what a link looks like.
    for argument in [
        "-",
        "parts.csv",
        "https://example.invalid/rolloff/",
        "colour=teal",
    ] {
        refused(
            &["design", argument],
            &["LINK", "a link is a query string", "v=2"],
        );
    }
    // Known keys beside an unknown one keep the warning and design.
    let (code, _out, err) = rolloff(&["design", "order=4&colour=teal"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("warning") && err.contains("colour"), "{err}");
}

#[test]
fn an_error_on_a_key_the_link_never_set_names_what_to_change() {
    // The 1 GHz stage is out of reach of the part ranges (README: parts 1 Ω–10 MΩ, 1 pF–100 µF)
    // whatever the impedance level: the user typed fc, not rlevel.
    refused(
        &["design", "order=20&fc=1G"],
        &["rolloff: fc:", "rlevel", "part ranges"],
    );
    // With an rlevel of the user's, the message stays on rlevel.
    refused(
        &["design", "order=20&fc=1G&rlevel=1k"],
        &["rolloff: rlevel:"],
    );
}

#[test]
fn a_low_q_stage_whose_far_pole_meets_the_op_amp_still_has_its_figures() {
    // R2 typed down to 10 Ω splits stage 1's poles far apart (Q ≈ 0.03); with a 1 MHz op amp the
    // far one pairs with the op amp's pole. Physics: two real poles make a Q below 0.5.
    let link = "order=4&fc=1k&set=R2:10";
    let (code, out, err) = rolloff(&["design", link, "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("no convergence"), "{out}");
    let v: serde_json::Value = serde_json::from_str(&out).expect("design JSON");
    let q = v["analysis"]["poles"][0]["factor"]["q"]
        .as_f64()
        .expect("stage 1 Q");
    assert!(q > 0.0 && q < 0.5, "{q}");
    let (code, out, err) = rolloff(&["spread", link, "--runs", "100"]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("Cutoff"), "{out}");
}

#[test]
fn the_parts_list_and_the_report_state_each_parts_own_tolerance() {
    // Brief: "parts CSV keeps tolerance_pct per part (per-part tolerances included)".
    let link = "order=4&fc=1k&rtol=1&ctol=5&tolset=C1:50,R3:0.1";
    let (code, out, err) = rolloff(&["design", link, "--format", "bom"]);
    assert_eq!(code, 0, "{err}");
    let mut lines = out.lines();
    let header: Vec<&str> = lines.next().expect("header").split(',').collect();
    let tol = header
        .iter()
        .position(|h| *h == "tolerance_pct")
        .expect("tolerance_pct");
    let mut seen = 0;
    for line in lines {
        let fields: Vec<&str> = line.split(',').collect();
        let expected = match fields[0] {
            "C1" => "50",
            "R3" => "0.1",
            r if r.starts_with('R') => "1",
            r if r.starts_with('C') => "5",
            _ => continue,
        };
        assert_eq!(fields[tol], expected, "{line}");
        seen += 1;
    }
    assert_eq!(seen, 8, "four resistors and four capacitors");
    let (code, out, err) = rolloff(&["design", link]);
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains("C1=15nF±50%") && out.contains("±0.1%") && out.contains("R1=21.5kΩ±1%"),
        "{out}"
    );
}

/// The sweep's rows: frequency, gain, phase, delay.
fn sweep_rows(args: &[&str]) -> Vec<[f64; 4]> {
    let (code, out, err) = rolloff(args);
    assert_eq!(code, 0, "{args:?}: {err}");
    out.lines()
        .skip(1)
        .map(|line| {
            let v: Vec<f64> = line
                .split(',')
                .map(|c| c.parse().expect("number"))
                .collect();
            [v[0], v[1], v[2], v[3]]
        })
        .collect()
}

#[test]
fn sweep_phase_does_not_depend_on_the_number_of_points() {
    // The phase at 100 kHz is one number whatever grid reaches it: unwrapped on the internal
    // 200-per-decade grid from the same start.
    for link in [
        "order=20&fc=1k",
        "order=20&fc=1k&family=bessel&gbw=1M",
        "order=8&fc=1k&topo=mfb",
    ] {
        let few = sweep_rows(&[
            "sweep", link, "--from", "10", "--to", "100k", "--points", "3",
        ]);
        let many = sweep_rows(&[
            "sweep", link, "--from", "10", "--to", "100k", "--points", "200",
        ]);
        let (a, b) = (few.last().expect("row"), many.last().expect("row"));
        assert_eq!(a[0], b[0]);
        assert!(
            (a[2] - b[2]).abs() < 1e-9 * b[2].abs(),
            "{link}: {} vs {}",
            a[2],
            b[2]
        );
        // Two points over 15 decades still unwrap (the ideal 20th-order phase ends near −1800°).
        let wide = sweep_rows(&[
            "sweep", link, "--from", "1e-4", "--to", "1e11", "--points", "2", "--ideal",
        ]);
        assert!(wide[1][2] < -700.0, "{link}: {}", wide[1][2]);
    }
}

#[test]
fn sweep_delay_equals_the_analytic_group_delay_of_the_ideal_cascade() {
    // Oracle: the section cascade's closed-form group delay (response::point), an independent
    // evaluation of −d(arg H)/dω. The derivative of the banded factorization meets it to 1e-9
    // relative (a ±1e-4 central difference carries an error of order 1e-8 relative).
    for link in [
        "?v=2&order=20&fc=1k",
        "?v=2&resp=hp&family=chebyshev&ripple=1&order=7&fc=3k&topo=mfb",
        "?v=2&resp=bp&family=bessel&order=8&fc=10k&bw=2k&topo=mfb",
    ] {
        let rows = sweep_rows(&["sweep", link, "--points", "301", "--ideal"]);
        let state = rolloff::link::parse(link).state;
        let synthesis =
            rolloff::design::synthesize(&state.requirement, &state.stage_order).expect("design");
        let peak = rows.iter().map(|r| r[3].abs()).fold(0.0, f64::max);
        for row in &rows {
            let point = rolloff::response::point(&synthesis.sections, row[0]);
            assert!(
                (row[3] - point.delay_s).abs() <= 1e-9 * point.delay_s.abs() + 1e-12 * peak,
                "{link} at {} Hz: {} vs {}",
                row[0],
                row[3],
                point.delay_s
            );
        }
    }
}

//! Filters with zeros on the jω axis end to end: the link → sections → stages → parts → our own
//! SPICE export, run by ngspice.
//!
//! Source: ngspice (the Debian package `ngspice`) in batch mode on the netlist of
//! `rolloff design LINK --format spice` (`rolloff::export::spice::netlist`), its `.ac` card
//! replaced by a `.control` block that writes `vdb(out)` with `wrdata` at 15 digits.
//!
//! - **Limits met with exact parts and an ideal op amp** (`rser=exact&cser=exact&gbw=ideal&a0=ideal&rout=0`):
//!   an elliptic low-pass and an inverse-Chebyshev high-pass designed from limits keep ngspice's
//!   gain at least `gain − passloss` over the passband and at most `gain − stopdepth` over the
//!   stopband, on a grid of 400 points a decade plus the edges (1e-6 dB of slack for the
//!   simulators' rounding).
//! - **The mains notch**: a second-order band-stop at 50 Hz, exact parts, is at least 40 dB
//!   below its passband gain at 50 Hz in ngspice.
//! - **E-series boards on a real op amp**: ngspice's gain equals `rolloff::pipeline::sweep` (the
//!   command line's `sweep`) within 0.05 dB wherever it is above −90 dB, and each notch of the
//!   board (`analysis.notches`) sits where ngspice's least gain near it sits, within 0.5 %.
//!
//! When ngspice is missing the test fails and says what to install.

use rolloff::export::spice::{self, AcSweep};
use rolloff::pipeline::Design;

mod ngspice_deck;

const EXACT_IDEAL: &str = "&rser=exact&cser=exact&gbw=ideal&a0=ideal&rout=0";

fn compose(link: &str) -> Design {
    let report = rolloff::link::parse(link);
    assert!(report.errors.is_empty(), "{link}: {:?}", report.errors);
    rolloff::pipeline::compose(&report.state).unwrap_or_else(|e| panic!("{link}: {e}"))
}

/// ngspice's `(f, gain dB)` of the board's output over `lo … hi` at `per_decade` points a
/// decade (`ac dec`).
fn ngspice_gain_db(
    design: &Design,
    name: &str,
    per_decade: usize,
    lo: f64,
    hi: f64,
) -> Vec<(f64, f64)> {
    let netlist = spice::netlist(&design.board, &AcSweep::default()).expect("exports");
    let body = ngspice_deck::body(&netlist, None);
    let dir = ngspice_deck::scratch("ngspice-zeros", name);
    let data = dir.join("gain.txt");
    let control = format!(
        "set wr_singlescale\nset wr_vecnames\noption numdgt=15\nac dec {per_decade} {lo:e} {hi:e}\nwrdata {} vdb(out)",
        data.display()
    );
    let log = ngspice_deck::run(&dir, &body, &control);
    let text =
        std::fs::read_to_string(&data).unwrap_or_else(|e| panic!("{name}: no data ({e}):\n{log}"));
    let rows = ngspice_deck::rows(&text);
    assert!(rows.len() > 10, "{name}: too few rows:\n{log}");
    rows.iter().map(|r| (r[0], r[1])).collect()
}

/// The mask's passband and stopband as closed frequency intervals, from the design's own mask.
fn bands(design: &Design) -> (Vec<(f64, f64)>, Vec<(f64, f64)>) {
    use rolloff::spec::{Edge, ResponseClass};
    let mask = design.state.requirement.mask.expect("limits given");
    let single = |e: Edge| match e {
        Edge::Single(f) => f,
        Edge::Pair(..) => panic!("a single edge"),
    };
    match design.synthesis.class {
        ResponseClass::LowPass => (
            vec![(0.0, single(mask.pass))],
            vec![(single(mask.stop), f64::INFINITY)],
        ),
        ResponseClass::HighPass => (
            vec![(single(mask.pass), f64::INFINITY)],
            vec![(0.0, single(mask.stop))],
        ),
        other => panic!("not used here: {other:?}"),
    }
}

#[test]
fn elliptic_low_pass_and_inverse_chebyshev_high_pass_meet_their_limits_in_ngspice() {
    // Our own scenarios: an anti-alias edge (1 dB to 1 kHz, 80 dB from 1.2 kHz) and a rumble
    // filter (flat above 200 Hz within 0.5 dB, 60 dB down below 50 Hz).
    for (name, link) in [
        (
            "elliptic-lp",
            "?v=2&resp=lp&family=elliptic&passedge=1k&passloss=1&stopedge=1.2k&stopdepth=80",
        ),
        (
            "invcheb-hp",
            "?v=2&resp=hp&family=inverse-chebyshev&passedge=200&passloss=0.5&stopedge=50&stopdepth=60",
        ),
    ] {
        let design = compose(&format!("{link}{EXACT_IDEAL}"));
        let mask = design.state.requirement.mask.expect("limits");
        let gain = design.state.requirement.gain_db;
        let (pass, stop) = bands(&design);
        let edges: Vec<f64> = pass.iter().chain(&stop).flat_map(|&(a, b)| [a, b]).filter(|f| f.is_finite() && *f > 0.0).collect();
        let lo = edges.iter().cloned().fold(f64::INFINITY, f64::min) / 20.0;
        let hi = edges.iter().cloned().fold(0.0, f64::max) * 20.0;
        let rows = ngspice_gain_db(&design, name, 400, lo, hi);
        let mut worst_pass = f64::INFINITY;
        let mut worst_stop = f64::NEG_INFINITY;
        for &(f, db) in &rows {
            if pass.iter().any(|&(a, b)| f >= a && f <= b) {
                worst_pass = worst_pass.min(db);
            }
            if stop.iter().any(|&(a, b)| f >= a && f <= b) {
                worst_stop = worst_stop.max(db);
            }
        }
        assert!(
            worst_pass >= gain - mask.apass_db - 1e-6,
            "{name}: ngspice passband falls to {worst_pass} dB, limit {} dB",
            gain - mask.apass_db
        );
        assert!(
            worst_stop <= gain - mask.astop_db + 1e-6,
            "{name}: ngspice stopband rises to {worst_stop} dB, limit {} dB",
            gain - mask.astop_db
        );
    }
}

#[test]
fn the_mains_notch_is_at_least_40_db_deep_at_50_hz_in_ngspice() {
    let design = compose(&format!("?v=2&resp=bs&order=2&fc=50&bw=5{EXACT_IDEAL}"));
    // ngspice at 50 Hz exactly (a one-point linear sweep) and in the passband at 5 Hz.
    let netlist = spice::netlist(&design.board, &AcSweep::default()).expect("exports");
    let body = ngspice_deck::body(&netlist, None);
    let dir = ngspice_deck::scratch("ngspice-zeros", "mains");
    let (at, pass) = (dir.join("at.txt"), dir.join("pass.txt"));
    let control = format!(
        "set wr_singlescale\noption numdgt=15\nac lin 1 50 50\nwrdata {} vdb(out)\nac lin 1 5 5\nwrdata {} vdb(out)",
        at.display(),
        pass.display()
    );
    let log = ngspice_deck::run(&dir, &body, &control);
    let read = |p: &std::path::Path| {
        let rows = ngspice_deck::rows(
            &std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{e}:\n{log}")),
        );
        rows[0][1]
    };
    let (at_db, pass_db) = (read(&at), read(&pass));
    assert!(
        pass_db - at_db >= 40.0,
        "ngspice: {at_db} dB at 50 Hz against {pass_db} dB at 5 Hz"
    );
}

#[test]
fn e_series_boards_on_a_real_op_amp_agree_with_the_sweep_and_place_their_notches() {
    // Our own scenarios, default E96/E12 parts and the generic 1 MHz op amp unless stated.
    for (name, link) in [
        (
            "elliptic-lp-6",
            "?v=2&resp=lp&family=elliptic&order=6&fc=2k&ripple=0.5&stopdepth=50",
        ),
        (
            "invcheb-hp-5",
            "?v=2&resp=hp&family=inverse-chebyshev&order=5&fc=300&stopdepth=45",
        ),
        ("mains-e24", "?v=2&resp=bs&order=2&fc=50&bw=8&rser=e24"),
        (
            "bs-cheb-4",
            "?v=2&resp=bs&family=chebyshev&ripple=0.5&order=4&fc=1k&bw=300&gbw=10M",
        ),
        (
            "elliptic-bp-4",
            "?v=2&resp=bp&family=elliptic&order=4&fc=10k&bw=2k&ripple=1&stopdepth=40&gbw=10M",
        ),
    ] {
        let design = compose(link);
        let (lo, hi) = design.span_hz;
        let rows = ngspice_gain_db(&design, name, 200, lo, hi);
        // ngspice's points are lo·10^(k/200); the sweep between its first and last point with
        // as many points lands on the same frequencies.
        let (first, last) = (rows[0].0, rows[rows.len() - 1].0);
        let ours =
            rolloff::pipeline::sweep(&design, first, last, rows.len(), false).expect("sweep");
        assert_eq!(ours.len(), rows.len(), "{name}: same grid");
        let mut worst = 0f64;
        for (row, &(f, db)) in ours.iter().zip(&rows) {
            assert!(
                (row.freq_hz / f - 1.0).abs() < 1e-9,
                "{name}: grid {} vs {f}",
                row.freq_hz
            );
            if db > -90.0 {
                worst = worst.max((row.gain_db - db).abs());
            }
        }
        assert!(
            worst <= 0.05,
            "{name}: sweep differs from ngspice by {worst} dB"
        );

        let analyses = rolloff::pipeline::analyses(&design);
        let notches = analyses.notches.expect("notches computed");
        let n_zero_stages = design
            .board
            .stages
            .iter()
            .filter(|s| s.section.fz_hz.is_some())
            .count();
        assert_eq!(
            notches.len(),
            n_zero_stages,
            "{name}: one notch per stage with zeros"
        );
        for notch in notches {
            // ngspice's least gain within ±2 % of our notch, at 20,000 points a decade (a
            // window narrow enough that a neighbouring stage's zeros stay outside it; the
            // least point must lie inside the window, not on its edge).
            let near = ngspice_gain_db(
                &design,
                &format!("{name}-notch{}", notch.stage),
                20_000,
                notch.at_hz / 1.02,
                notch.at_hz * 1.02,
            );
            let (f_min, _) = near
                .iter()
                .cloned()
                .fold((0.0, f64::INFINITY), |best, (f, db)| {
                    if db < best.1 {
                        (f, db)
                    } else {
                        best
                    }
                });
            assert!(
                f_min > near[0].0 && f_min < near[near.len() - 1].0,
                "{name} stage {}: ngspice's gain keeps falling to the window's edge ({f_min} Hz)",
                notch.stage
            );
            assert!(
                (f_min / notch.at_hz - 1.0).abs() <= 0.005,
                "{name} stage {}: ngspice's notch at {f_min} Hz, ours at {} Hz",
                notch.stage,
                notch.at_hz
            );
        }
    }
}

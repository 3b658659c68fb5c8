//! The DC-error keys `vos` and `ib`: what the command line refuses, what a link without them
//! reports, and the offset of the simplest boards against their closed forms.
//!
//! Sources: the README's "Link keys" table (`vos` −100 m to 100 m V, `ib` −1 m to 1 m A, default
//! 0; exit 2 with one line naming the key and the range); physics: a follower of open-loop gain A
//! has closed-loop gain A/(1+A), so an offset in series with its input appears at its output
//! times A/(1+A); a bias current drawn from a node that reaches the grounded input through
//! resistors alone makes the node −ib·R (Ohm's law). The ngspice checks of the same figures are
//! in `tests/ngspice_dc.rs`.

use rolloff::analysis::dc::{board_dc, DcSource, Pin};
use rolloff::netlist::PartKind;

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

#[test]
fn out_of_range_offsets_and_bias_currents_are_refused_with_the_range() {
    // README: vos −100 m to 100 m (V), ib −1 m to 1 m (A); a bad value exits 2 naming the key.
    for link in ["vos=0.5", "vos=-200m", "vos=abc", "vos=1e-310", "vos=inf"] {
        refused(&["design", link], &["vos", "offset voltage"]);
    }
    refused(&["design", "vos=0.5"], &["-0.1", "0.1"]);
    for link in ["ib=2m", "ib=-1", "ib=NaN", "ib=1k"] {
        refused(&["design", link], &["ib", "bias current"]);
    }
    refused(&["design", "ib=-2m"], &["-0.001", "0.001"]);
    // The ends of the ranges are accepted, signed values and engineering notation too.
    for link in [
        "vos=100m&ib=-1m",
        "vos=-100m&ib=1m",
        "vos=-2m5&ib=20n",
        "vos=0&ib=0",
    ] {
        let (code, _, err) = rolloff(&["design", link]);
        assert_eq!(code, 0, "{link}: {err}");
    }
}

fn board_of(link: &str) -> rolloff::board::Board {
    let report = rolloff::link::parse(link);
    assert!(report.errors.is_empty(), "{link}: {:?}", report.errors);
    rolloff::pipeline::compose(&report.state)
        .unwrap_or_else(|e| panic!("{link}: {e}"))
        .board
}

#[test]
fn a_link_without_dc_errors_reports_zero_and_the_gains_per_unit() {
    // README: vos and ib default to 0 (not modelled); the shares are then 0 and the per-unit
    // gains remain. Physics: two followers of A = 10^(100/20) in cascade pass the first one's
    // offset at (A/(1+A))² and the second one's at A/(1+A) (no DC current flows in a
    // Sallen-Key low-pass's resistors with its input at 0 V, so Rout drops nothing).
    let board = board_of("?order=4&fc=1k&topo=sk");
    let dc = board_dc(&board).expect("solves");
    assert!(!dc.modelled);
    assert_eq!((dc.offset_v, dc.worst_v), (0.0, 0.0));
    assert!(dc.sources.iter().all(|s| s.share_v == 0.0));
    let a = 1e5;
    let follower = a / (1.0 + a);
    let vos: Vec<f64> = dc
        .sources
        .iter()
        .filter(|s| s.what == DcSource::Vos)
        .map(|s| s.per_unit)
        .collect();
    assert_eq!(vos.len(), 2);
    assert!(
        (vos[0] / (follower * follower) - 1.0).abs() < 1e-12,
        "{vos:?}"
    );
    assert!((vos[1] / follower - 1.0).abs() < 1e-12, "{vos:?}");
}

#[test]
fn an_ideal_follower_stage_matches_its_closed_form() {
    // Physics: a unity-gain Sallen-Key low-pass on an ideal op amp is a follower whose
    // non-inverting input reaches the grounded input through both series resistors (the
    // capacitors are open at DC): vos appears at the output as it is, ib+ makes it −ib·(R1+R2),
    // ib− is drawn from the ideal output and moves nothing. The resistor that balances it is
    // R1+R2 in series with the inverting input.
    let vos = 1e-3;
    let ib = 100e-9;
    let board = board_of("?order=2&fc=1k&topo=sk&a0=ideal&gbw=ideal&rout=0&vos=1m&ib=100n");
    let r_sum: f64 = board.stages[0]
        .netlist
        .parts
        .iter()
        .filter(|p| p.kind == PartKind::Resistor)
        .map(|p| p.value)
        .sum();
    let dc = board_dc(&board).expect("solves");
    let expect = vos - ib * r_sum;
    assert!(
        (dc.offset_v - expect).abs() <= 1e-12,
        "{} vs {expect}",
        dc.offset_v
    );
    let worst = vos + ib * r_sum;
    assert!(
        (dc.worst_v - worst).abs() <= 1e-12,
        "{} vs {worst}",
        dc.worst_v
    );
    let share = |what| {
        dc.sources
            .iter()
            .find(|s| s.what == what)
            .map(|s| s.share_v)
            .expect("share")
    };
    assert!((share(DcSource::Vos) - vos).abs() <= 1e-15);
    assert!((share(DcSource::IbPlus) + ib * r_sum).abs() <= 1e-12);
    assert_eq!(share(DcSource::IbMinus), 0.0);
    assert_eq!(dc.balance.len(), 1);
    assert_eq!(dc.balance[0].pin, Pin::Minus);
    assert!((dc.balance[0].ohm / r_sum - 1.0).abs() < 1e-12);
}

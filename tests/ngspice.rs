//! Our SPICE export, run by ngspice, against our own nodal analysis of the same board.
//!
//! Source: ngspice (the Debian package `ngspice`, version 39 on the build machine), batch mode
//! (`ngspice -b`), with a `.control` block that runs the exported `.ac` card and writes
//! real and imaginary parts of V(out) with `wrdata` at 15 digits. Tolerance: gain within 1e-8 dB
//! and phase within 2e-8° from 10 Hz to 10 MHz (just above the worst measured on ngspice 39,
//! see [`GAIN_TOL_DB`]), with the ideal op amp and with three finite op-amp models, for both the
//! reference nodal solve and the production path of the figures.
//! When ngspice is missing the tests fail and say what to install.
//!
//! The cases cover every circuit, the input-divider shapes of the non-inverting stages (gain
//! below 1) and whole boards: hand-made section lists and boards composed from demo links.

mod common_circuits;

use common_circuits::*;
use num_complex::Complex64;
use rolloff::analysis::built::{self, BoardSolver};
use rolloff::board::{Board, BuildChoices};
use rolloff::export::spice::{self, AcSweep};
use rolloff::mna;
use rolloff::opamp::OpAmp;
use rolloff::section::{Section, SectionKind};
use rolloff::topology::Topology;
use std::path::PathBuf;
use std::process::Command;

fn require_ngspice() {
    let found = Command::new("ngspice").arg("--version").output();
    match found {
        Ok(out) if out.status.success() || !out.stdout.is_empty() => {}
        _ => panic!(
            "ngspice is not installed or not on PATH; install the Debian package with \
             `apt-get install -y ngspice` and run the tests again"
        ),
    }
}

fn op_amps() -> Vec<(&'static str, OpAmp)> {
    vec![
        ("ideal", OpAmp::ideal()),
        ("generic", OpAmp::GENERIC),
        (
            "fast",
            OpAmp {
                gbw_hz: 10e6,
                a0_db: 80.0,
                rout_ohm: 100.0,
                ..OpAmp::GENERIC
            },
        ),
        (
            "integrator",
            OpAmp {
                gbw_hz: 3e6,
                a0_db: f64::INFINITY,
                rout_ohm: 0.0,
                ..OpAmp::GENERIC
            },
        ),
    ]
}

/// Runs ngspice on the board's export and returns (frequency, V(out)) rows.
fn run_ngspice(board: &Board, name: &str) -> Vec<(f64, Complex64)> {
    let sweep = AcSweep {
        points_per_decade: 10,
        f_start_hz: 10.0,
        f_stop_hz: 10e6,
    };
    let netlist = spice::netlist(board, &sweep).expect("exports");
    let dir: PathBuf =
        std::env::temp_dir().join(format!("rolloff-ngspice-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let data = dir.join("out.txt");
    let control = format!(
        ".control\nset wr_singlescale\nset wr_vecnames\noption numdgt=15\nrun\nwrdata {} real(v(out)) imag(v(out))\n.endc\n.end\n",
        data.display()
    );
    let body = netlist
        .trim_end()
        .strip_suffix(".end")
        .unwrap_or_else(|| panic!("export must end with .end:\n{netlist}"));
    let cir = dir.join("board.cir");
    std::fs::write(&cir, format!("{body}{control}")).expect("write netlist");
    let out = Command::new("ngspice")
        .arg("-b")
        .arg(&cir)
        .current_dir(&dir)
        .output()
        .expect("ngspice runs");
    let log =
        String::from_utf8_lossy(&out.stdout).to_string() + &String::from_utf8_lossy(&out.stderr);
    assert!(
        out.status.success(),
        "ngspice failed on {name}:\n{log}\n{netlist}"
    );
    assert!(
        !log.to_lowercase().contains("error"),
        "ngspice reported an error on {name}:\n{log}"
    );
    let text = std::fs::read_to_string(&data)
        .unwrap_or_else(|e| panic!("no wrdata output for {name} ({e}):\n{log}"));
    let rows: Vec<(f64, Complex64)> = text
        .lines()
        .filter_map(|line| {
            let cols: Vec<f64> = line
                .split_whitespace()
                .map(|c| c.parse::<f64>())
                .collect::<Result<_, _>>()
                .ok()?;
            (cols.len() == 3).then(|| (cols[0], Complex64::new(cols[1], cols[2])))
        })
        .collect();
    let _ = std::fs::remove_dir_all(&dir);
    assert_eq!(
        rows.len(),
        61,
        "{name}: 6 decades × 10 points + 1, got {}",
        rows.len()
    );
    rows
}

/// Gain tolerance, dB. Source: ngspice 39 on our own export, 15 digits (`option numdgt=15`),
/// 10 Hz … 10 MHz at 10 points a decade, every case of this file with the four op-amp models:
/// the worst difference measured was 2.4e-9 dB (sk-lp-divider-high-q, ideal op amp) against
/// the reference solve and the same against the production path; the bound leaves a factor of
/// about four for the round-off of a different build.
const GAIN_TOL_DB: f64 = 1e-8;
/// Phase tolerance, degrees. Source: as [`GAIN_TOL_DB`]; the worst measured was 7.1e-9°
/// (sk-lp-divider-high-q, integrator op amp).
const PHASE_TOL_DEG: f64 = 2e-8;

/// Compares ngspice with both of our solves of the board — the reference dense nodal analysis
/// (`mna`) and the production banded solve that every figure uses (`analysis::built`) — within
/// [`GAIN_TOL_DB`] and [`PHASE_TOL_DEG`]. Returns the worst differences (dB, degrees) over both.
fn compare(board: &Board, name: &str) -> (f64, f64) {
    let rows = run_ngspice(board, name);
    let freqs: Vec<f64> = rows.iter().map(|(f, _)| *f).collect();
    let mut solver = BoardSolver::of_board(board).expect("the production solver takes the board");
    let built = built::sweep(&mut solver, &freqs).expect("the production path solves");
    assert_eq!(
        built.h.len(),
        rows.len(),
        "{name}: one production point per row"
    );
    let (mut worst_db, mut worst_deg) = (0.0f64, 0.0f64);
    for ((f, theirs), production) in rows.into_iter().zip(built.h) {
        let (reference, _) = mna::board_response(board, jw(f)).expect("solves");
        for (path, ours) in [("reference", reference), ("production", production)] {
            let d_db = (db(ours) - db(theirs)).abs();
            let d_deg = (ours / theirs).arg().to_degrees().abs();
            assert!(
                d_db < GAIN_TOL_DB && d_deg < PHASE_TOL_DEG,
                "{name} at {f} Hz ({path} solve): ours {ours} ({:.12} dB), ngspice {theirs} \
                 ({:.12} dB), gain difference {d_db:.3e} dB, phase difference {d_deg:.3e}°",
                db(ours),
                db(theirs)
            );
            worst_db = worst_db.max(d_db);
            worst_deg = worst_deg.max(d_deg);
        }
    }
    eprintln!("{name}: worst {worst_db:.2e} dB, {worst_deg:.2e}°");
    (worst_db, worst_deg)
}

#[test]
fn every_topology_agrees_with_ngspice() {
    require_ngspice();
    for (name, section, topology) in circuit_cases() {
        for (op_name, op) in op_amps() {
            let board = Board::build(&[section], &choices(topology, op)).expect("builds");
            compare(&board, &format!("{name}-{op_name}"));
        }
    }
}

#[test]
fn multi_stage_boards_agree_with_ngspice() {
    require_ngspice();
    // A 5th-order low-pass (Butterworth Q values 1/(2·cos(π/5)) and 1/(2·cos(2π/5)), analytic, plus
    // the real pole) with 20 dB of gain, in both topologies; a two-stage band-pass; a high-pass.
    let pi = std::f64::consts::PI;
    let q1 = 1.0 / (2.0 * (pi / 5.0).cos());
    let q2 = 1.0 / (2.0 * (2.0 * pi / 5.0).cos());
    let lp5: Vec<Section> = vec![
        section(SectionKind::LowPass, 2e3, None, 1.0),
        section(SectionKind::LowPass, 2e3, Some(q1), 10f64.sqrt()),
        section(SectionKind::LowPass, 2e3, Some(q2), 10f64.sqrt()),
    ];
    let bp: Vec<Section> = vec![
        section(SectionKind::BandPass, 9e3, Some(7.1), 1.0),
        section(SectionKind::BandPass, 11e3, Some(7.1), 1.0),
    ];
    let hp: Vec<Section> = vec![
        section(SectionKind::HighPass, 300.0, Some(0.5412), 1.0),
        section(SectionKind::HighPass, 300.0, Some(1.3066), 2.0),
    ];
    for (name, sections, topology) in [
        ("lp5-sk", &lp5, Topology::SallenKey),
        ("lp5-mfb", &lp5, Topology::MultipleFeedback),
        ("bp-mfb", &bp, Topology::MultipleFeedback),
        ("hp-sk", &hp, Topology::SallenKey),
    ] {
        for (op_name, op) in op_amps() {
            let ch = BuildChoices {
                topology,
                op_amp: op,
                ..BuildChoices::default()
            };
            let board = Board::build(sections, &ch).expect("builds");
            assert!(board.stages.len() >= 2);
            compare(&board, &format!("{name}-{op_name}"));
        }
    }
}

#[test]
fn input_divider_stages_agree_with_ngspice() {
    require_ngspice();
    // One stage per divider shape (gain below 1 on Sallen-Key and buffered RC stages): resistor
    // legs (low-pass) and capacitor legs (high-pass), second and first order.
    let half_db = 10f64.powf(-0.5 / 20.0);
    let cases = [
        (
            "sk-lp-divider",
            section(
                SectionKind::LowPass,
                1e3,
                Some(std::f64::consts::FRAC_1_SQRT_2),
                0.5,
            ),
        ),
        (
            "sk-lp-divider-half-db",
            section(SectionKind::LowPass, 7.9e3, Some(0.68), half_db),
        ),
        (
            "sk-lp-divider-high-q",
            section(SectionKind::LowPass, 20e3, Some(6.5), 0.1),
        ),
        (
            "sk-hp-divider",
            section(SectionKind::HighPass, 570.0, Some(0.78), 0.8913),
        ),
        (
            "sk-hp-divider-half",
            section(SectionKind::HighPass, 2e3, Some(2.0), 0.5),
        ),
        (
            "rc-lp-divider",
            section(SectionKind::LowPass, 1e3, None, 0.3),
        ),
        (
            "rc-hp-divider",
            section(SectionKind::HighPass, 100.0, None, 0.8),
        ),
    ];
    for (name, sec) in cases {
        for (op_name, op) in op_amps() {
            let board = Board::build(&[sec], &choices(Topology::SallenKey, op)).expect("builds");
            assert!(
                board.stages[0]
                    .netlist
                    .parts
                    .iter()
                    .any(|p| p.role == "input divider, lower"),
                "{name}: the stage has its divider"
            );
            compare(&board, &format!("{name}-{op_name}"));
        }
    }
}

#[test]
fn boards_from_attenuating_demo_links_agree_with_ngspice() {
    // Whole boards composed from links whose overall gain is below 1 with topo=sk: the
    // even-order Chebyshev low-pass of 0.5 dB ripple from a specification, the 4th-order 1 dB
    // Chebyshev high-pass, a 2nd-order 3 dB Chebyshev at −6 dB and a 5th-order one at −6 dB (its
    // divider is on the first-order stage).
    require_ngspice();
    for (name, link) in [
        (
            "cheb-lp-spec",
            "?v=1&resp=lp&family=chebyshev&fpass=20k&apass=0.5&fstop=40k&astop=50",
        ),
        (
            "cheb-hp4",
            "?v=1&resp=hp&family=chebyshev&ripple=1&order=4&fc=300",
        ),
        (
            "cheb-lp2-minus6",
            "?v=1&resp=lp&family=chebyshev&ripple=3&order=2&fc=1k&gain=-6",
        ),
        (
            "cheb-lp5-minus6",
            "?v=1&resp=lp&family=chebyshev&ripple=1&order=5&fc=1k&gain=-6",
        ),
    ] {
        let report = rolloff::link::parse(link);
        assert!(report.errors.is_empty(), "{link}: {:?}", report.errors);
        let design =
            rolloff::pipeline::compose(&report.state).unwrap_or_else(|e| panic!("{link}: {e}"));
        assert!(
            design
                .board
                .parts()
                .iter()
                .any(|p| p.role == "input divider, upper"),
            "{name}: the board has an input divider"
        );
        for (op_name, op) in op_amps() {
            let mut board = design.board.clone();
            board.op_amp = op;
            compare(&board, &format!("{name}-{op_name}"));
        }
    }
}

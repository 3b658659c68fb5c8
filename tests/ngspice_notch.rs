//! The single-op-amp notch against ngspice running our own export of boards built from notch
//! sections.
//!
//! Source: ngspice (the Debian package `ngspice`) in batch mode on
//! `rolloff::export::spice::netlist` of each board, its `.ac` card replaced by a `.control` block
//! that runs `ac dec` and writes V(out) with `wrdata` at 15 digits (`tests/ngspice_deck`).
//! The boards are built from hand-made sections (`SectionKind::Notch`, `Board::build`):
//! - a 50 Hz symmetric notch with exact parts and an ideal op amp: ngspice's depth at 50 Hz is
//!   at least 40 dB below the passband gain (the mains-notch figure);
//! - the same notch and a three-stage board (low-pass, high-pass and symmetric notch) with
//!   E24/E12 parts and the generic op amp (GBW 1 MHz): ngspice agrees with our production
//!   (banded) nodal response within 0.05 dB wherever the gain is above −90 dB, and the frequency
//!   of each null (the least |H| on a 0.05 % grid) within 0.5 %.

use num_complex::Complex64;
use rolloff::analysis::built::{self, BoardSolver};
use rolloff::board::{Board, BuildChoices};
use rolloff::eseries::Series;
use rolloff::export::spice::{self, AcSweep};
use rolloff::opamp::OpAmp;
use rolloff::section::Section;
use rolloff::topology::{Circuit, Topology};

mod common_circuits;
mod ngspice_deck;

use common_circuits::notch;

fn build(sections: &[Section], series: Option<(Series, Series)>, op_amp: OpAmp) -> Board {
    let (r_series, c_series) = series.unwrap_or((Series::Exact, Series::Exact));
    let choices = BuildChoices {
        topology: Topology::SallenKey,
        r_series,
        c_series,
        op_amp,
        ..BuildChoices::default()
    };
    Board::build(sections, &choices).expect("the notch board builds")
}

/// ngspice's V(out) over the `ac` sweep `ac` (the card's arguments): (frequency, V(out)) rows.
fn ngspice_ac(board: &Board, name: &str, ac: &str) -> Vec<(f64, Complex64)> {
    let sweep = AcSweep::default();
    let netlist = spice::netlist(board, &sweep).expect("exports");
    let dir = ngspice_deck::scratch("notch", name);
    let data = dir.join("out.txt");
    let control = format!(
        "set wr_singlescale\noption numdgt=15\nac {ac}\nwrdata {} real(v(out)) imag(v(out))",
        data.display()
    );
    let log = ngspice_deck::run(&dir, &ngspice_deck::body(&netlist, None), &control);
    let text = std::fs::read_to_string(&data)
        .unwrap_or_else(|e| panic!("{name}: no ngspice output ({e}):\n{log}\n{netlist}"));
    let rows: Vec<(f64, Complex64)> = ngspice_deck::rows(&text)
        .into_iter()
        .filter(|r| r.len() == 3)
        .map(|r| (r[0], Complex64::new(r[1], r[2])))
        .collect();
    let _ = std::fs::remove_dir_all(&dir);
    assert!(!rows.is_empty(), "{name}: ngspice gave no rows:\n{log}");
    rows
}

fn db(h: Complex64) -> f64 {
    20.0 * h.norm().log10()
}

/// The frequency of the least |H| among the rows inside `lo`–`hi`.
fn null_at(rows: &[(f64, Complex64)], lo: f64, hi: f64) -> f64 {
    rows.iter()
        .filter(|(f, _)| (lo..=hi).contains(f))
        .min_by(|a, b| a.1.norm().total_cmp(&b.1.norm()))
        .map(|(f, _)| *f)
        .expect("rows in the band")
}

#[test]
fn mains_notch_with_exact_parts_is_at_least_40_db_deep_in_ngspice() {
    // Source: ngspice on our export; the figure (≥ 40 dB at the centre).
    let section = notch(50.0, 2.0, 50.0, 0.9);
    let board = build(&[section], None, OpAmp::ideal());
    assert_eq!(board.stages[0].circuit, Circuit::NotchSymmetric);
    let rows = ngspice_ac(&board, "mains-exact", "lin 3 49.99 50.01");
    assert_eq!(rows.len(), 3, "three points");
    let (f, h) = rows[1];
    assert!((f / 50.0 - 1.0).abs() < 1e-9, "first row at {f} Hz");
    let depth = 20.0 * 0.9f64.log10() - db(h);
    assert!(depth >= 40.0, "ngspice depth at 50 Hz {depth:.1} dB");
    eprintln!("mains notch, exact parts, ideal op amp: ngspice depth at 50 Hz {depth:.1} dB");
}

#[test]
fn e_series_notch_boards_on_a_real_op_amp_agree_with_ngspice() {
    // Source: ngspice on our export; tolerances from the issue (0.05 dB above −90 dB, the null's
    // frequency within 0.5 %).
    let cases: [(&str, Vec<Section>); 2] = [
        ("mains", vec![notch(50.0, 2.0, 50.0, 0.9)]),
        (
            "three-shapes",
            vec![
                notch(1e3, 2.0, 2.2e3, 1.2),
                notch(1.5e3, 1.5, 600.0, 0.8),
                notch(1.2e3, 2.0, 1.2e3, 0.95),
            ],
        ),
    ];
    for (name, sections) in cases {
        let board = build(&sections, Some((Series::E24, Series::E12)), OpAmp::GENERIC);
        let f_min = sections
            .iter()
            .map(|s| s.f0_hz.min(s.fz_hz.unwrap()))
            .fold(f64::INFINITY, f64::min)
            / 20.0;
        let f_max = sections
            .iter()
            .map(|s| s.f0_hz.max(s.fz_hz.unwrap()))
            .fold(0.0, f64::max)
            * 20.0;
        let rows = ngspice_ac(&board, name, &format!("dec 2000 {f_min} {f_max}"));
        let freqs: Vec<f64> = rows.iter().map(|(f, _)| *f).collect();
        let mut solver = BoardSolver::of_board(&board).expect("the production solver takes it");
        let ours = built::sweep(&mut solver, &freqs).expect("solves").h;
        let mut worst = 0.0f64;
        for ((f, theirs), ours) in rows.iter().zip(&ours) {
            if db(*ours) > -90.0 {
                let d = (db(*ours) - db(*theirs)).abs();
                assert!(
                    d < 0.05,
                    "{name} at {f} Hz: ours {:.4} dB, ngspice {:.4} dB",
                    db(*ours),
                    db(*theirs)
                );
                worst = worst.max(d);
            }
        }
        let ours_rows: Vec<(f64, Complex64)> = freqs.iter().copied().zip(ours).collect();
        for (k, section) in sections.iter().enumerate() {
            let fz = board.stages[k]
                .achieved_fz_hz
                .expect("a notch stage has zeros");
            let (lo, hi) = (fz / 1.05, fz * 1.05);
            let theirs = null_at(&rows, lo, hi);
            let mine = null_at(&ours_rows, lo, hi);
            assert!(
                (theirs / mine - 1.0).abs() < 0.005,
                "{name} stage {}: null at {mine} Hz ours, {theirs} Hz ngspice",
                k + 1
            );
            eprintln!(
                "{name} stage {}: asked fz {} Hz, achieved fz {fz} Hz, null at {mine} Hz (ours), \
                 {theirs} Hz (ngspice)",
                k + 1,
                section.fz_hz.unwrap()
            );
        }
        eprintln!("{name}: worst difference {worst:.2e} dB above −90 dB");
    }
}

//! The analyses of the built board against ngspice running our exported netlist.
//!
//! Source: ngspice (the Debian package `ngspice`, version 39 on the build machine) in batch mode,
//! on the netlist of `rolloff::export::spice` with its `.ac` card replaced by a `.control` block
//! that runs `noise` (output noise density) or `tran` (step response) and writes the vectors with
//! `wrdata`. Tolerances (just above the worst measured on ngspice 39, see [`NOISE_TOL_DB`] and
//! [`STEP_TOL`]): noise density within 5e-6 dB; step response within 2.5e-5 of the step height.
//! When ngspice is missing the tests fail and say what to install.
//!
//! ngspice's op-amp subcircuit has no input noise sources, so these comparisons set the op amp's
//! `en` and `in` to zero and its `Rout` to zero (ngspice would count the thermal noise of the
//! model's `Rout`, which our model treats as noiseless); its internal gain resistor of A0 Ω adds
//! noise of about √(4kT/A0) V/√Hz referred to the input, far below the resistors' noise.

use rolloff::analysis::noise::{board_noise, NoiseSettings};
use rolloff::analysis::timeresp::{board_response, TimeSettings};
use rolloff::board::{Board, BuildChoices};
use rolloff::design::synthesize;
use rolloff::export::spice::{self, AcSweep};
use rolloff::opamp::OpAmp;
use rolloff::sections::StageOrder;
use rolloff::spec::{Family, MarginPlacement, OrderChoice, Requirement, ResponseClass};
use rolloff::topology::Topology;

mod ngspice_deck;
use std::process::Command;

fn require_ngspice() {
    match Command::new("ngspice").arg("--version").output() {
        Ok(out) if out.status.success() || !out.stdout.is_empty() => {}
        _ => panic!(
            "ngspice is not installed or not on PATH; install the Debian package with \
             `apt-get install -y ngspice` and run the tests again"
        ),
    }
}

/// Noise density tolerance, dB. Source: ngspice 39 `.noise` on our own export (12 digits), 41
/// points from 10 Hz to 100 kHz on the three boards below: the worst difference measured was
/// 2.35e-6 dB (mfb-bp4), about what the A0 Ω gain resistor of ngspice's op-amp subcircuit adds
/// (see the module docs); the bound leaves a factor of two.
const NOISE_TOL_DB: f64 = 5e-6;
/// Step response tolerance, fraction of the step height. Source: ngspice 39 `.tran` on our own
/// export (reltol 1e-6, at most 1 µs steps) against our 50,001-point response interpolated
/// linearly: the worst difference measured was 1.11e-5 (sk-lp4; mfb-bessel3 9.0e-6), most of it
/// the interpolation between our points; the bound leaves a factor of about two.
const STEP_TOL: f64 = 2.5e-5;

fn quiet_opamp() -> OpAmp {
    OpAmp {
        rout_ohm: 0.0,
        en_v_per_rthz: 0.0,
        in_a_per_rthz: 0.0,
        ..OpAmp::GENERIC
    }
}

fn board(class: ResponseClass, family: Family, order: usize, topo: Topology, op: OpAmp) -> Board {
    let req = Requirement {
        class,
        family,
        order: OrderChoice::Fixed(order),
        fc_hz: Some(1000.0),
        bw_hz: (class == ResponseClass::BandPass).then_some(500.0),
        mask: None,
        gain_db: 6.0,
        margin: MarginPlacement::Split,
    };
    let syn = synthesize(&req, &StageOrder::AscendingQ).expect("synthesizes");
    let choices = BuildChoices {
        topology: topo,
        op_amp: op,
        ..BuildChoices::default()
    };
    Board::build(&syn.sections, &choices).expect("builds")
}

/// Runs the exported netlist with `control` in place of its analysis cards; returns the rows of
/// the `wrdata` file as numbers.
fn run(board: &Board, name: &str, source: Option<&str>, control: &str) -> Vec<Vec<f64>> {
    let netlist = spice::netlist(board, &AcSweep::default()).expect("exports");
    let dir = ngspice_deck::scratch("ngspice-analysis", name);
    let data = dir.join("out.txt");
    let body = ngspice_deck::body(&netlist, source);
    let control = control.replace("DATA", &data.display().to_string());
    let log = ngspice_deck::run(&dir, &body, &control);
    // Batch mode exits non-zero when the netlist has no `.print` card even though the `.control`
    // block ran; the data file and the log tell whether it worked.
    assert!(
        !log.to_lowercase().contains("error"),
        "ngspice reported an error on {name}:\n{log}"
    );
    let text = std::fs::read_to_string(&data)
        .unwrap_or_else(|e| panic!("no wrdata output for {name} ({e}):\n{log}\n{body}"));
    let rows = ngspice_deck::rows(&text);
    let _ = std::fs::remove_dir_all(&dir);
    assert!(
        rows.len() > 10,
        "{name}: only {} rows from ngspice:\n{log}",
        rows.len()
    );
    rows
}

/// Output noise density of multi-stage boards vs ngspice `.noise`: within [`NOISE_TOL_DB`] from 10 Hz to
/// 100 kHz (4th-order Sallen-Key low-pass, 5th-order MFB low-pass, 4th-order MFB band-pass).
#[test]
fn noise_density_matches_ngspice() {
    require_ngspice();
    let boards = [
        (
            "sk-lp4",
            board(
                ResponseClass::LowPass,
                Family::Butterworth,
                4,
                Topology::SallenKey,
                quiet_opamp(),
            ),
        ),
        (
            "mfb-lp5",
            board(
                ResponseClass::LowPass,
                Family::Chebyshev { ripple_db: 0.5 },
                5,
                Topology::MultipleFeedback,
                quiet_opamp(),
            ),
        ),
        (
            "mfb-bp4",
            board(
                ResponseClass::BandPass,
                Family::Butterworth,
                4,
                Topology::MultipleFeedback,
                quiet_opamp(),
            ),
        ),
    ];
    for (name, b) in &boards {
        let rows = run(
            b,
            &format!("noise-{name}"),
            None,
            "set wr_singlescale\noption numdgt=12\noption temp=26.85 tnom=26.85\nnoise v(out) V1 dec 10 10 100k\nsetplot noise1\nwrdata DATA onoise_spectrum",
        );
        let freqs: Vec<f64> = rows.iter().map(|r| r[0]).collect();
        let ours = board_noise(
            b,
            &NoiseSettings {
                freqs_hz: freqs.clone(),
                band_hz: (10.0, 100e3),
                signal_v_rms: None,
            },
        )
        .unwrap();
        // ngspice writes 10 points a decade over four decades, ends included.
        assert_eq!(rows.len(), 41, "{name}: ngspice rows");
        assert_eq!(
            ours.output_density_v_per_rthz.len(),
            rows.len(),
            "{name}: one density of ours per ngspice frequency"
        );
        let mut worst = 0.0f64;
        for (row, &mine) in rows.iter().zip(&ours.output_density_v_per_rthz) {
            let theirs = row[1];
            let d_db = 20.0 * (mine / theirs).log10();
            assert!(
                theirs > 0.0 && d_db.abs() < NOISE_TOL_DB,
                "{name} at {} Hz: ours {mine:e}, ngspice {theirs:e} V/√Hz ({d_db:.3} dB)",
                row[0]
            );
            worst = worst.max(d_db.abs());
        }
        eprintln!(
            "{name}: worst noise difference {worst:.3e} dB over {} points",
            rows.len()
        );
    }
}

/// Step response vs ngspice `.tran` of the whole exported board (a 1 V step with 1 ns rise):
/// within [`STEP_TOL`] of the step height at every ngspice time point. Boards: 4th-order Butterworth
/// Sallen-Key low-pass with the generic op amp, 3rd-order Bessel MFB low-pass.
#[test]
fn step_response_matches_ngspice() {
    require_ngspice();
    let boards = [
        (
            "sk-lp4",
            board(
                ResponseClass::LowPass,
                Family::Butterworth,
                4,
                Topology::SallenKey,
                OpAmp::GENERIC,
            ),
        ),
        (
            "mfb-bessel3",
            board(
                ResponseClass::LowPass,
                Family::Bessel,
                3,
                Topology::MultipleFeedback,
                OpAmp::GENERIC,
            ),
        ),
    ];
    for (name, b) in &boards {
        let t_end = 5e-3;
        let ours = board_response(
            b,
            &TimeSettings {
                n_points: 50_001,
                t_end_s: Some(t_end),
            },
        )
        .unwrap();
        let height = ours.figures.final_value.abs();
        let rows = run(
            b,
            &format!("step-{name}"),
            Some("V1 in 0 PULSE(0 1 0 1n 1n 1 2)"),
            &format!(
                "set wr_singlescale\noption numdgt=12\noption reltol=1e-6 abstol=1e-14 vntol=1e-9\ntran 1e-7 {t_end:e} 0 1e-6\nwrdata DATA v(out)"
            ),
        );
        // A 6 dB low-pass settles near 10^(6/20) times the step (its DC gain): the gain network's
        // resistors are rounded to the series, which moves it by a few per cent (mfb-bessel3 has
        // 1.960, −1.8 %), so a step that never rose would fail here rather than pass as "close".
        let dc_gain = 10f64.powf(6.0 / 20.0);
        assert!(
            (height / dc_gain - 1.0).abs() < 0.05,
            "{name}: final value {height} of a 6 dB low-pass"
        );
        let mut worst = 0.0f64;
        let mut n_compared = 0;
        let dt = ours.t_s[1] - ours.t_s[0];
        for row in &rows {
            let (t, theirs) = (row[0], row[1]);
            if t > t_end {
                continue;
            }
            let pos = t / dt;
            let i = (pos.floor() as usize).min(ours.step.len() - 2);
            let frac = pos - i as f64;
            let mine = ours.step[i] * (1.0 - frac) + ours.step[i + 1] * frac;
            let d = (mine - theirs).abs() / height;
            n_compared += 1;
            assert!(
                d < STEP_TOL,
                "{name} at t = {t:e} s: ours {mine}, ngspice {theirs} (step height {height})"
            );
            worst = worst.max(d);
        }
        assert!(
            n_compared > 1000,
            "{name}: only {n_compared} ngspice points inside the window"
        );
        eprintln!(
            "{name}: worst step difference {:.3e} of the step height over {} points",
            worst,
            rows.len()
        );
    }
}

//! Checks of the analyses of the built board (tolerance study, sensitivities, noise, time
//! response, poles, stage levels, op-amp requirements) against sources outside the project. Each
//! expected number names its source and tolerance.

use num_complex::Complex64;
use rand_core::{RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use rolloff::analysis::circuit::Compiled;
use rolloff::analysis::fastfit::{magnitude_squared_into, FastFit};
use rolloff::analysis::montecarlo::{
    CutoffDefinition, CutoffSide, MonteCarlo, MonteCarloSettings, PartDistribution, Summary,
    Tolerances,
};
use rolloff::analysis::poles::{board_poles, section_poles, stage_factor};
use rolloff::analysis::poly::stage_transfer;
use rolloff::analysis::sensitivity::stage_sensitivities;
use rolloff::analysis::timeresp::{board_response, TimeSettings};
use rolloff::board::{Board, BuildChoices};
use rolloff::design::synthesize;
use rolloff::eseries::Series;
use rolloff::netlist::{Part, PartKind, StageNetlist};
use rolloff::opamp::OpAmp;
use rolloff::sections::StageOrder;
use rolloff::spec::{Edge, Family, Mask, OrderChoice, Requirement, ResponseClass};
use rolloff::topology::Topology;
use std::f64::consts::PI;

fn part(reference: &str, kind: PartKind, value: f64, nodes: Vec<Option<usize>>) -> Part {
    Part {
        reference: reference.into(),
        kind,
        value,
        ideal: value,
        role: String::new(),
        nodes,
    }
}

/// A passive RC low-pass: in —R— out, C from out to ground.
fn rc_lowpass(r: f64, c: f64) -> StageNetlist {
    StageNetlist {
        n_nodes: 2,
        input: 0,
        output: 1,
        node_names: vec!["a".into(), "b".into()],
        parts: vec![
            part("R1", PartKind::Resistor, r, vec![Some(0), Some(1)]),
            part("C1", PartKind::Capacitor, c, vec![Some(1), None]),
        ],
    }
}

/// A unity-gain Sallen-Key low-pass: in —R1— m —R2— p, C1 from m to out (feedback), C2 from p to
/// ground, follower op amp from p to out. Hand-built so the tests do not depend on the topology code.
fn sk_lowpass(prefix: usize, r1: f64, r2: f64, c1: f64, c2: f64) -> StageNetlist {
    let r = |i: usize| format!("R{}", 2 * prefix + i);
    let c = |i: usize| format!("C{}", 2 * prefix + i);
    StageNetlist {
        n_nodes: 4,
        input: 0,
        output: 3,
        node_names: vec!["i".into(), "m".into(), "p".into(), "o".into()],
        parts: vec![
            part(&r(1), PartKind::Resistor, r1, vec![Some(0), Some(1)]),
            part(&r(2), PartKind::Resistor, r2, vec![Some(1), Some(2)]),
            part(&c(1), PartKind::Capacitor, c1, vec![Some(1), Some(3)]),
            part(&c(2), PartKind::Capacitor, c2, vec![Some(2), None]),
            part(
                &format!("U{}", prefix + 1),
                PartKind::OpAmp,
                0.0,
                vec![Some(2), Some(3), Some(3)],
            ),
        ],
    }
}

/// Equal resistors R, and capacitors chosen for (f0, Q): ω0 = 1/(R·√(C1·C2)), Q = ½·√(C1/C2)
/// (unity-gain Sallen-Key with equal resistors; derived from the nodal equations).
fn sk_for(prefix: usize, f0_hz: f64, q: f64, r: f64) -> StageNetlist {
    let w0 = 2.0 * PI * f0_hz;
    let ratio = 4.0 * q * q; // C1/C2
    let c2 = 1.0 / (w0 * r * ratio.sqrt());
    sk_lowpass(prefix, r, r, ratio * c2, c2)
}

/// A uniform number in [0, 1) from the test's seeded stream.
fn unit(rng: &mut Xoshiro256PlusPlus) -> f64 {
    (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64
}

fn requirement(class: ResponseClass, family: Family, order: usize, fc_hz: f64) -> Requirement {
    Requirement {
        class,
        family,
        order: OrderChoice::Fixed(order),
        fc_hz: Some(fc_hz),
        bw_hz: (class == ResponseClass::BandPass).then_some(fc_hz / 2.0),
        mask: None,
        gain_db: 0.0,
    }
}

/// The board of a requirement through the real pipeline (synthesis, topology, rounding).
fn board_of(req: &Requirement, topology: Topology, exact: bool, op_amp: OpAmp) -> Board {
    let syn = synthesize(req, &StageOrder::AscendingQ).expect("the requirement synthesizes");
    let choices = BuildChoices {
        topology,
        r_series: if exact { Series::Exact } else { Series::E96 },
        c_series: if exact { Series::Exact } else { Series::E12 },
        op_amp,
        ..BuildChoices::default()
    };
    Board::build(&syn.sections, &choices).expect("the board builds")
}

fn log_grid(lo_hz: f64, hi_hz: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| lo_hz * (hi_hz / lo_hz).powf(i as f64 / (n - 1) as f64))
        .collect()
}

fn mc_settings(
    runs: usize,
    seed: u64,
    r_pct: f64,
    c_pct: f64,
    class: ResponseClass,
) -> MonteCarloSettings {
    MonteCarloSettings {
        runs,
        seed,
        tolerances: Tolerances {
            distribution: PartDistribution::Gaussian { sigmas: 3.0 },
            resistor_pct: r_pct,
            capacitor_pct: c_pct,
            overrides: vec![],
        },
        freqs_hz: log_grid(10.0, 100e3, 120),
        percentiles: vec![5.0, 50.0, 95.0],
        // Half power: 10·log10(2) dB.
        cutoff: CutoffDefinition::Attenuation {
            db: 10.0 * 2f64.log10(),
        },
        class,
        reference_gain: 1.0,
        passband_ref_hz: 0.0,
    }
}

fn run_all(mut mc: MonteCarlo, chunk: usize) -> Summary {
    while !mc.is_done() {
        mc.step(chunk);
    }
    mc.finish()
}

/// A spread of designs through the real topologies: Sallen-Key and MFB, low-, high- and
/// band-pass, odd orders (first-order stages), with rounded parts.
fn design_zoo() -> Vec<Board> {
    let mut boards = Vec::new();
    let ops = [
        OpAmp::GENERIC,
        OpAmp::ideal(),
        OpAmp {
            gbw_hz: 10e6,
            a0_db: 120.0,
            rout_ohm: 0.0,
            ..OpAmp::GENERIC
        },
    ];
    let cases = [
        (
            ResponseClass::LowPass,
            Family::Butterworth,
            5,
            Topology::SallenKey,
        ),
        (
            ResponseClass::LowPass,
            Family::Chebyshev { ripple_db: 1.0 },
            6,
            Topology::MultipleFeedback,
        ),
        (
            ResponseClass::HighPass,
            Family::Bessel,
            4,
            Topology::SallenKey,
        ),
        (
            ResponseClass::HighPass,
            Family::Butterworth,
            3,
            Topology::MultipleFeedback,
        ),
        (
            ResponseClass::BandPass,
            Family::Butterworth,
            4,
            Topology::MultipleFeedback,
        ),
    ];
    for (i, &(class, family, order, topo)) in cases.iter().enumerate() {
        let req = requirement(class, family, order, 2000.0);
        boards.push(board_of(&req, topo, false, ops[i % ops.len()]));
    }
    boards
}

// ---------------------------------------------------------------------------------------------
// Polynomial fit of a stage against the nodal analysis.

/// Oracle: `mna::transfer`, a dense complex solve at each frequency (the project's nodal
/// analysis, written independently of the polynomial fit). Tolerance 1e-9 relative, with a floor
/// of 1e-14 of the stage's passband gain (rounding of the fit, reached only where the response is
/// more than 140 dB down).
#[test]
fn stage_polynomials_match_the_nodal_analysis() {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(11);
    let mut n_checked = 0;
    for board in design_zoo() {
        for stage in &board.stages {
            for _ in 0..3 {
                let op = OpAmp {
                    gbw_hz: 10f64.powf(5.0 + 3.0 * unit(&mut rng)),
                    a0_db: 60.0 + 80.0 * unit(&mut rng),
                    rout_ohm: 200.0 * unit(&mut rng),
                    ..OpAmp::GENERIC
                };
                let rat = stage_transfer(&stage.netlist, &op).unwrap();
                for f in log_grid(stage.section.f0_hz / 100.0, stage.section.f0_hz * 1e4, 40) {
                    let s = Complex64::new(0.0, 2.0 * PI * f);
                    let want = rolloff::mna::transfer(&stage.netlist, &op, s).unwrap();
                    let got = rat.eval(s);
                    assert!(
                        (got - want).norm()
                            <= 1e-9 * want.norm() + 1e-14 * stage.section.gain.abs(),
                        "stage {:?} at {f} Hz with {op:?}: fit {got}, nodal analysis {want}",
                        stage.section
                    );
                    n_checked += 1;
                }
            }
        }
    }
    assert!(n_checked > 1000, "only {n_checked} points checked");
}

/// Oracle: the circle fit above (itself checked against the nodal analysis). The tolerance
/// study's real-point fit gives the same |H|² within 1e-9 relative.
#[test]
fn real_point_fit_matches_the_circle_fit() {
    for board in design_zoo() {
        for stage in &board.stages {
            let compiled = Compiled::new(&stage.netlist, &board.op_amp).unwrap();
            let assembled = compiled.assemble(&stage.netlist);
            let w_g = 2.0 * PI * 1000.0;
            let mut fast = FastFit::new(&compiled, compiled.scale_rad_s * 1.1, w_g);
            // Both elimination paths: partial pivoting, then the static pivot order.
            assert!(fast.fit(&assembled));
            let partial = (fast.num_u.clone(), fast.den_u.clone());
            fast.choose_pivots(&assembled);
            assert!(fast.fit(&assembled));
            for (a, b) in partial.1.iter().zip(&fast.den_u) {
                assert!(
                    (a - b).abs() <= 1e-12 * partial.1.iter().fold(0.0f64, |m, v| m.max(v.abs()))
                );
            }
            fast.trim();
            let k = fast.n_coef();
            let mut pn = vec![0.0; k];
            let mut pd = vec![0.0; k];
            magnitude_squared_into(&fast.num_u, &mut pn);
            magnitude_squared_into(&fast.den_u, &mut pd);
            let rat = stage_transfer(&stage.netlist, &board.op_amp).unwrap();
            for f in log_grid(stage.section.f0_hz / 100.0, stage.section.f0_hz * 1e3, 40) {
                let x = (2.0 * PI * f / w_g).powi(2);
                let horner = |c: &[f64]| c.iter().rev().fold(0.0, |a, &v| a * x + v);
                let got = horner(&pn) / horner(&pd);
                let want = rat.eval_hz(f).norm_sqr();
                assert!(
                    (got - want).abs() <= 1e-9 * want,
                    "stage {:?} at {f} Hz: real-point fit {got}, circle fit {want}",
                    stage.section
                );
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Tolerance study.

/// Identity: with zero tolerance every run is the nominal board, so the envelope collapses onto
/// the nominal response and every cutoff equals the nominal one (exactly: same arithmetic).
#[test]
fn zero_tolerance_runs_equal_the_nominal_board() {
    let req = requirement(ResponseClass::LowPass, Family::Butterworth, 4, 1000.0);
    let board = board_of(&req, Topology::SallenKey, false, OpAmp::GENERIC);
    let mc = MonteCarlo::new(
        &board,
        None,
        mc_settings(50, 3, 0.0, 0.0, ResponseClass::LowPass),
    )
    .unwrap();
    let s = run_all(mc, 7);
    assert_eq!(s.runs, 50);
    for i in 0..s.freqs_hz.len() {
        assert_eq!(
            s.envelope.min_db[i], s.nominal_db[i],
            "min at {} Hz",
            s.freqs_hz[i]
        );
        assert_eq!(
            s.envelope.max_db[i], s.nominal_db[i],
            "max at {} Hz",
            s.freqs_hz[i]
        );
        for c in &s.envelope.percentiles {
            // Percentiles are kept in single precision: 1e-6 dB.
            assert!(
                (c.db[i] - s.nominal_db[i]).abs() < 1e-5,
                "percentile {}",
                c.percentile
            );
        }
    }
    let cut = &s.cutoffs[0].hz;
    assert!(
        cut.samples.iter().all(|&v| v == cut.nominal),
        "cutoffs {:?}",
        &cut.samples[..5]
    );
    assert!(cut.std_dev <= 1e-12 * cut.mean, "std dev {}", cut.std_dev);
    for st in &s.stages {
        assert!(st.f0_hz.samples.iter().all(|&v| v == st.f0_hz.nominal));
    }
    assert_eq!(s.yield_fraction, None, "no mask: yield is null");
}

/// Identity: the same seed gives the same numbers, however the runs are cut into chunks; another
/// seed gives other numbers.
#[test]
fn same_seed_gives_identical_output() {
    let req = requirement(
        ResponseClass::LowPass,
        Family::Chebyshev { ripple_db: 0.5 },
        5,
        1000.0,
    );
    let board = board_of(&req, Topology::MultipleFeedback, false, OpAmp::GENERIC);
    let mask = Mask {
        pass: Edge::Single(900.0),
        apass_db: 0.8,
        stop: Edge::Single(3000.0),
        astop_db: 40.0,
    };
    let mk = |seed| {
        MonteCarlo::new(
            &board,
            Some(&mask),
            mc_settings(300, seed, 1.0, 5.0, ResponseClass::LowPass),
        )
        .unwrap()
    };
    let a = run_all(mk(42), 300);
    let b = run_all(mk(42), 17);
    let c = run_all(mk(43), 300);
    let ja = serde_json::to_string(&a).unwrap();
    assert_eq!(ja, serde_json::to_string(&b).unwrap());
    assert_eq!(a.cutoffs[0].hz.samples, b.cutoffs[0].hz.samples);
    assert_ne!(ja, serde_json::to_string(&c).unwrap());
    let y = a.yield_fraction.expect("a mask gives a yield");
    assert!((0.0..=1.0).contains(&y));
    assert!(ja.contains("\"yield\":"), "the JSON names the yield");
}

/// Analytic: the cutoff of an RC low-pass is 1/(2πRC); for small independent Gaussian spreads
/// its relative standard deviation is √(σR² + σC²) (first-order propagation; the second-order
/// term adds ~σ² ≈ 5e-4 relative). Sampling error of a standard deviation over n = 20,000 runs is
/// 1/√(2n) = 0.5 % relative; the check allows 2 %.
#[test]
fn rc_cutoff_spread_matches_propagation_of_errors() {
    let (r, c) = (10e3, 10e-9);
    let (sigma_r, sigma_c) = (0.01, 0.02);
    let mut settings = mc_settings(
        20_000,
        5,
        3.0 * 100.0 * sigma_r,
        3.0 * 100.0 * sigma_c,
        ResponseClass::LowPass,
    );
    settings.freqs_hz = log_grid(10.0, 1e5, 200);
    let mc = MonteCarlo::from_stages(&[rc_lowpass(r, c)], &OpAmp::ideal(), None, settings).unwrap();
    let s = run_all(mc, 5000);
    let cut = &s.cutoffs[0];
    assert_eq!(cut.side, CutoffSide::Upper);
    let fc = 1.0 / (2.0 * PI * r * c);
    assert!(
        (cut.hz.nominal - fc).abs() < 1e-9 * fc,
        "nominal cutoff {} vs {fc}",
        cut.hz.nominal
    );
    let rel = cut.hz.std_dev / cut.hz.mean;
    let want = (sigma_r * sigma_r + sigma_c * sigma_c).sqrt();
    assert!(
        (rel / want - 1.0).abs() < 0.02,
        "relative spread {rel}, expected {want}"
    );
    assert_eq!(cut.hz.n_missing, 0);
}

// ---------------------------------------------------------------------------------------------
// Poles.

/// Identity: with an ideal op amp and exact (unrounded) parts the built stages realize the
/// synthesized poles; tolerance 1e-9 relative to the pole magnitude.
#[test]
fn achieved_poles_equal_target_poles_with_ideal_parts() {
    let cases = [
        (
            ResponseClass::LowPass,
            Family::Butterworth,
            6,
            Topology::SallenKey,
        ),
        (
            ResponseClass::LowPass,
            Family::Chebyshev { ripple_db: 1.0 },
            7,
            Topology::MultipleFeedback,
        ),
        (
            ResponseClass::LowPass,
            Family::Bessel,
            5,
            Topology::SallenKey,
        ),
        (
            ResponseClass::HighPass,
            Family::Butterworth,
            4,
            Topology::SallenKey,
        ),
        (
            ResponseClass::HighPass,
            Family::Chebyshev { ripple_db: 0.5 },
            4,
            Topology::MultipleFeedback,
        ),
        (
            ResponseClass::BandPass,
            Family::Butterworth,
            6,
            Topology::MultipleFeedback,
        ),
    ];
    for (class, family, order, topo) in cases {
        let board = board_of(
            &requirement(class, family, order, 1500.0),
            topo,
            true,
            OpAmp::ideal(),
        );
        let poles = board_poles(&board).unwrap();
        for (sp, st) in poles.iter().zip(&board.stages) {
            let target = section_poles(&st.section);
            assert_eq!(
                sp.achieved.len(),
                target.len(),
                "{class:?} {family:?} stage {}",
                sp.stage
            );
            for t in &target {
                let nearest = sp
                    .achieved
                    .iter()
                    .map(|a| (a.to_rad() - t).norm())
                    .fold(f64::INFINITY, f64::min);
                assert!(
                    nearest <= 1e-9 * t.norm(),
                    "{class:?} {family:?} stage {}: target {t}, off by {nearest}",
                    sp.stage
                );
            }
        }
    }
}

/// Common practice: a finite GBW raises the Q of a Sallen-Key low-pass stage (Q enhancement) and
/// adds a pole far above f0.
#[test]
fn finite_gbw_enhances_q_and_adds_a_pole() {
    let net = sk_for(0, 10e3, 2.0, 10e3);
    let ideal = stage_factor(&net, &OpAmp::ideal()).unwrap();
    let slow = OpAmp {
        gbw_hz: 1e6,
        ..OpAmp::GENERIC
    };
    let real = stage_factor(&net, &slow).unwrap();
    assert!((ideal.q.unwrap() - 2.0).abs() < 1e-9);
    assert!(
        real.q.unwrap() > ideal.q.unwrap() * 1.01,
        "Q {:?} vs {:?}",
        real.q,
        ideal.q
    );
    let rat = stage_transfer(&net, &slow).unwrap();
    let poles = rat.poles().unwrap();
    assert_eq!(poles.len(), 3);
    assert!(poles[2].norm() > 2.0 * PI * 100e3);
}

// ---------------------------------------------------------------------------------------------
// Sensitivities.

/// Textbook identity: for the equal-component unity-gain Sallen-Key low-pass,
/// f0 = 1/(2π·√(R1·R2·C1·C2)), so S(f0, x) = −1/2 for each R and C. Ideal op amp; 1e-9.
#[test]
fn equal_component_sallen_key_f0_sensitivities_are_minus_one_half() {
    let net = sk_lowpass(0, 10e3, 10e3, 10e-9, 10e-9);
    let s = stage_sensitivities(&net, &OpAmp::ideal(), 1).unwrap();
    assert_eq!(s.parts.len(), 4);
    for p in &s.parts {
        assert!((p.f0 + 0.5).abs() < 1e-9, "{}: S = {}", p.reference, p.f0);
    }
    assert!((s.q.unwrap() - 0.5).abs() < 1e-12);
}

/// Oracle: central finite differences of f0 and Q recomputed from the roots (relative step
/// 1e-5, truncation ~1e-10), within 1e-4 of the analytic sensitivities, over the design zoo with
/// real op amps.
#[test]
fn sensitivities_match_finite_differences() {
    let h = 1e-5;
    let mut n_checked = 0;
    for board in design_zoo() {
        for (k, stage) in board.stages.iter().enumerate() {
            let sens = stage_sensitivities(&stage.netlist, &board.op_amp, k + 1).unwrap();
            for ps in &sens.parts {
                let idx = stage
                    .netlist
                    .parts
                    .iter()
                    .position(|p| p.reference == ps.reference)
                    .unwrap();
                let mut up = stage.netlist.clone();
                up.parts[idx].value *= 1.0 + h;
                let mut dn = stage.netlist.clone();
                dn.parts[idx].value *= 1.0 - h;
                let fu = stage_factor(&up, &board.op_amp).unwrap();
                let fd = stage_factor(&dn, &board.op_amp).unwrap();
                let s_f0 = (fu.f0_hz.ln() - fd.f0_hz.ln()) / ((1.0 + h).ln() - (1.0 - h).ln());
                assert!(
                    (s_f0 - ps.f0).abs() < 1e-4,
                    "{}: f0 sensitivity {} vs difference {s_f0}",
                    ps.reference,
                    ps.f0
                );
                if let (Some(qu), Some(qd), Some(sq)) = (fu.q, fd.q, ps.q) {
                    let s_q = (qu.ln() - qd.ln()) / ((1.0 + h).ln() - (1.0 - h).ln());
                    assert!(
                        (s_q - sq).abs() < 1e-4,
                        "{}: Q sensitivity {sq} vs difference {s_q}",
                        ps.reference
                    );
                }
                n_checked += 1;
            }
        }
    }
    assert!(n_checked > 30);
}

// ---------------------------------------------------------------------------------------------
// Time response.

/// Analytic: a second-order low-pass with damping ζ overshoots by exp(−πζ/√(1−ζ²)); Butterworth
/// ζ = 1/√2 gives e^(−π) = 4.3214 %. Ideal op amp, exact parts; tolerance 0.002 percentage points.
#[test]
fn second_order_butterworth_overshoots_4_32_percent() {
    let board = board_of(
        &requirement(ResponseClass::LowPass, Family::Butterworth, 2, 1000.0),
        Topology::SallenKey,
        true,
        OpAmp::ideal(),
    );
    let tr = board_response(&board, &TimeSettings::default()).unwrap();
    let os = tr.figures.overshoot_pct.unwrap();
    let want = 100.0 * (-PI).exp();
    assert!(
        (os - want).abs() < 0.002,
        "overshoot {os} %, expected {want} %"
    );
    assert!((tr.figures.final_value - 1.0).abs() < 1e-9);
    // The 1 % settling time must lie after the peak at π/ω_d (analytic).
    let wd = 2.0 * PI * 1000.0 / 2f64.sqrt();
    assert!(tr.figures.settling_1pct_s.unwrap() > PI / wd);
}

/// Fact of the trade (common practice): a Bessel response overshoots far less than a
/// Butterworth of the same order (4th order: Bessel ~0.8 %, Butterworth ~10.8 %, from memory).
#[test]
fn bessel_overshoots_far_less_than_butterworth() {
    let os = |family| {
        let board = board_of(
            &requirement(ResponseClass::LowPass, family, 4, 1000.0),
            Topology::SallenKey,
            false,
            OpAmp::GENERIC,
        );
        board_response(&board, &TimeSettings::default())
            .unwrap()
            .figures
            .overshoot_pct
            .unwrap()
    };
    let (bessel, butter) = (os(Family::Bessel), os(Family::Butterworth));
    assert!(
        bessel < butter / 5.0,
        "Bessel {bessel} %, Butterworth {butter} %"
    );
    assert!(butter > 8.0 && butter < 13.0, "Butterworth {butter} %");
}

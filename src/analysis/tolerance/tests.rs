//! Checks of the batch work against plain scalar arithmetic and against itself on every
//! compiled path (identities: the lanes must not change any number).

use super::*;
use crate::analysis::lanes::{Isa, Lane8, Plain};
use crate::analysis::magnitude::{magnitude_squared_into, magnitude_squared_lanes};
use crate::analysis::roots::split_cubic_lanes;
use crate::board::{Board, BuildChoices};
use crate::fmath;
use crate::section::{Section, SectionKind};
use crate::spec::{Edge, Mask};
use rand_core::{RngCore, SeedableRng};
use std::f64::consts::PI;

/// Seeded test values with the awkward cases among them: NaN, ±∞, ±0, tiny and huge.
fn values(seed: u64, n: usize) -> Vec<RunLanes> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let special = [
        f64::NAN,
        f64::INFINITY,
        f64::NEG_INFINITY,
        0.0,
        -0.0,
        1e-310,
        1e300,
        -2.5,
    ];
    (0..n)
        .map(|i| {
            let mut v = [0.0; RUN_LANES];
            for (l, x) in v.iter_mut().enumerate() {
                let u = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
                *x = if (i + l) % 5 == 0 {
                    special[(i * 3 + l) % special.len()]
                } else {
                    (u - 0.3) * fmath::powi(10f64, (i % 7) as i32 - 3)
                };
            }
            v
        })
        .collect()
}

/// Every lane operation of `V` on `a`, `b`, written out as bits (NaN as one pattern, since
/// the payload of a NaN result is not specified).
#[inline(always)]
fn lane_ops<V: Lane8>(a: &RunLanes, b: &RunLanes) -> Vec<u64> {
    let (x, y) = (V::load(a), V::load(b));
    let mut out = Vec::new();
    let mut push = |v: V| {
        let mut r = [0.0; RUN_LANES];
        v.store(&mut r);
        out.extend(r.iter().map(|f| if f.is_nan() { 1 } else { f.to_bits() }));
    };
    push(x.add(y));
    push(x.sub(y));
    push(x.mul(y));
    push(x.div(y));
    push(x.min_keep(y));
    push(x.max_keep(y));
    let one = V::splat(1.0);
    let zero = V::splat(0.0);
    push(V::select(x.lt(y), one, zero));
    push(V::select(x.le(y), one, zero));
    push(V::select(x.ge(y), one, zero));
    push(V::select(V::and(x.ge(y), x.le(y)), x, y));
    let mask = V::from_bools([true, false, false, true, true, false, true, false]);
    push(V::select(mask, x, y));
    let mut f = [0.0f32; RUN_LANES];
    x.store_f32(&mut f);
    out.extend(f.iter().map(|v| u64::from(v.to_bits())));
    out
}

/// The same operations in scalar Rust, the reference of every path.
// `x >= y && x <= y` is written out: it is the reference of `and(ge, le)`.
#[allow(clippy::double_comparisons)]
fn scalar_ops(a: &RunLanes, b: &RunLanes) -> Vec<u64> {
    let mut out = Vec::new();
    let bits = |f: f64| if f.is_nan() { 1 } else { f.to_bits() };
    let ops: [fn(f64, f64) -> f64; 11] = [
        |x, y| x + y,
        |x, y| x - y,
        |x, y| x * y,
        |x, y| x / y,
        |x, y| if x < y { x } else { y },
        |x, y| if x > y { x } else { y },
        |x, y| if x < y { 1.0 } else { 0.0 },
        |x, y| if x <= y { 1.0 } else { 0.0 },
        |x, y| if x >= y { 1.0 } else { 0.0 },
        |x, y| if x >= y && x <= y { x } else { y },
        |_, _| 0.0,
    ];
    let mask = [true, false, false, true, true, false, true, false];
    for (i, op) in ops.iter().enumerate() {
        for l in 0..RUN_LANES {
            let v = if i == 10 {
                if mask[l] {
                    a[l]
                } else {
                    b[l]
                }
            } else {
                op(a[l], b[l])
            };
            out.push(bits(v));
        }
    }
    out.extend((0..RUN_LANES).map(|l| u64::from((a[l] as f32).to_bits())));
    out
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn lane_ops_avx2(a: &RunLanes, b: &RunLanes) -> Vec<u64> {
    lane_ops::<crate::analysis::lanes::Avx2>(a, b)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
unsafe fn lane_ops_avx512(a: &RunLanes, b: &RunLanes) -> Vec<u64> {
    lane_ops::<crate::analysis::lanes::Avx512>(a, b)
}

/// Identity: each lane operation equals scalar IEEE arithmetic bit for bit, on the plain path
/// and on every x86-64 path this processor has (these paths exist only when it has them).
#[test]
fn lane_operations_equal_scalar_arithmetic_on_every_path() {
    let a = values(1, 64);
    let b = values(2, 64);
    let mut n_paths = 0;
    for (x, y) in a.iter().zip(&b) {
        let want = scalar_ops(x, y);
        assert_eq!(lane_ops::<Plain>(x, y), want, "plain lanes on {x:?}, {y:?}");
        n_paths = 1;
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx2") {
                // SAFETY: AVX2 was detected on the line above.
                let got = unsafe { lane_ops_avx2(x, y) };
                assert_eq!(got, want, "AVX2 lanes on {x:?}, {y:?}");
                n_paths = 2;
            }
            if std::arch::is_x86_feature_detected!("avx512f") {
                // SAFETY: AVX-512F was detected on the line above.
                let got = unsafe { lane_ops_avx512(x, y) };
                assert_eq!(got, want, "AVX-512 lanes on {x:?}, {y:?}");
                n_paths = 3;
            }
        }
    }
    eprintln!("lane paths checked: {n_paths}");
}

/// Analytic: a cubic built as `(z − r)(z² + u·z + v)` gives back `u`, `v` (relative 1e-12),
/// lane by lane, and a lane that is not asked for reports no factor.
#[test]
fn cubic_split_recovers_the_quadratic_factor() {
    let mut d = vec![[0.0; RUN_LANES]; 4];
    let mut want = [(0.0, 0.0); RUN_LANES];
    for l in 0..RUN_LANES {
        // The far real pole, well above the pair, spread ±4 % around the start as the runs of
        // a study spread around the nominal one.
        let r = -20.0 * (1.0 + 0.01 * (l as f64 - 4.0));
        let u = 0.3 + 0.2 * l as f64;
        let v = 0.5 + 0.25 * l as f64;
        let lead = 2.0 + l as f64;
        // (z − r)(z² + u z + v) = z³ + (u − r) z² + (v − r u) z − r v
        d[0][l] = lead * (-r * v);
        d[1][l] = lead * (v - r * u);
        d[2][l] = lead * (u - r);
        d[3][l] = lead;
        want[l] = (u, v);
    }
    let mut use_lane = [true; RUN_LANES];
    use_lane[5] = false;
    let (u, v, ok) = split_cubic_lanes(&d, -20.0, use_lane);
    for l in 0..RUN_LANES {
        if l == 5 {
            assert!(!ok[l], "lane {l} was not asked for");
            continue;
        }
        assert!(ok[l], "lane {l} did not converge");
        let (wu, wv) = want[l];
        assert!(
            ((u[l] - wu) / wu).abs() < 1e-12,
            "lane {l}: u {} vs {wu}",
            u[l]
        );
        assert!(
            ((v[l] - wv) / wv).abs() < 1e-12,
            "lane {l}: v {} vs {wv}",
            v[l]
        );
    }
}

/// Identity: the lane forms of |P(jy)|² equal the scalar helper bit for bit, for every length
/// 1–9.
#[test]
fn magnitude_squared_lanes_equal_the_scalar_helper() {
    for len in 1..=9 {
        let p = values(10 + len as u64, len);
        let mut out = vec![[0.0; RUN_LANES]; len];
        assert_eq!(magnitude_squared_lanes(&p, &mut out), len);
        for l in 0..RUN_LANES {
            let scalar: Vec<f64> = p.iter().map(|c| c[l]).collect();
            let mut want = vec![0.0; len];
            magnitude_squared_into(&scalar, &mut want);
            for (j, w) in want.iter().enumerate() {
                let got = out[j][l];
                assert!(
                    got.to_bits() == w.to_bits() || (got.is_nan() && w.is_nan()),
                    "length {len}, lane {l}, coefficient {j}: {got} vs {w}"
                );
            }
        }
    }
}

/// One board of the checks below and the study settings around it.
struct Case {
    /// What the case is, for the failure messages.
    name: &'static str,
    class: ResponseClass,
    sections: Vec<Section>,
    mask: Option<Mask>,
    /// The design's passband gain, V/V.
    gain: f64,
    distribution: PartDistribution,
    rtol_pct: f64,
    ctol_pct: f64,
    /// Envelope grid ends, Hz.
    span_hz: (f64, f64),
    /// Where each run's passband gain is read, Hz.
    passband_ref_hz: f64,
}

/// Butterworth pole Q values of order `n`: 1 / (2 sin((2k − 1)π/(2n))) for k = 1..n/2 (analytic,
/// handbook), with `None` for the real pole of an odd order.
fn butterworth_q(n: usize) -> Vec<Option<f64>> {
    let mut q: Vec<Option<f64>> = (1..=n / 2)
        .map(|k| Some(1.0 / (2.0 * fmath::sin((2 * k - 1) as f64 * PI / (2 * n) as f64))))
        .collect();
    if n % 2 == 1 {
        q.insert(0, None);
    }
    q
}

/// Sections of a Butterworth low- or high-pass of order `n` at `fc_hz` with the gain `gain` split
/// evenly over them.
fn butterworth(kind: SectionKind, n: usize, fc_hz: f64, gain: f64) -> Vec<Section> {
    let qs = butterworth_q(n);
    let g = fmath::powf(gain, 1.0 / qs.len() as f64);
    qs.into_iter()
        .map(|q| Section {
            kind,
            f0_hz: fc_hz,
            q,
            gain: g,
            fz_hz: None,
        })
        .collect()
}

/// Band-pass sections of a Butterworth band-pass of `2·n` poles centred on `f0_hz` with
/// bandwidth `bw_hz`: each low-pass prototype pole `p` maps to the roots of
/// `s² − p·B·s + ω0² = 0` (the low-pass to band-pass substitution, handbook), a pair per root in
/// the upper half-plane; unity gain at each section's own f0.
fn butterworth_band_pass(n: usize, f0_hz: f64, bw_hz: f64) -> Vec<Section> {
    let (w0, b) = (2.0 * PI * f0_hz, 2.0 * PI * bw_hz);
    let mut out = Vec::new();
    for k in 0..n {
        let theta = PI * (2 * k + n + 1) as f64 / (2 * n) as f64;
        let p = fmath::from_polar(1.0, theta);
        let disc = fmath::csqrt(p * p * b * b - 4.0 * w0 * w0);
        for s in [(p * b + disc) / 2.0, (p * b - disc) / 2.0] {
            if s.im > 0.0 {
                out.push(Section {
                    kind: SectionKind::BandPass,
                    f0_hz: fmath::cnorm(s) / (2.0 * PI),
                    q: Some(fmath::cnorm(s) / (-2.0 * s.re)),
                    gain: 1.0,
                    fz_hz: None,
                });
            }
        }
    }
    out
}

/// The boards of the checks below: low-pass with a mask (Sallen-Key), band-pass (multiple
/// feedback, both cutoffs, wide capacitor spread), high-pass with gain and uniform parts, an odd
/// order (first-order stage).
fn cases() -> Vec<Case> {
    let gain_hp = fmath::powf(10f64, 12.0 / 20.0);
    vec![
        Case {
            name: "low-pass, order 8, with a mask",
            class: ResponseClass::LowPass,
            sections: butterworth(SectionKind::LowPass, 8, 1000.0, 1.0),
            mask: Some(Mask {
                pass: Edge::Single(800.0),
                apass_db: 1.0,
                stop: Edge::Single(3000.0),
                astop_db: 60.0,
            }),
            gain: 1.0,
            distribution: PartDistribution::Gaussian { sigmas: 3.0 },
            rtol_pct: 1.0,
            ctol_pct: 5.0,
            span_hz: (100.0, 10_000.0),
            passband_ref_hz: 0.0,
        },
        Case {
            name: "band-pass, six poles",
            class: ResponseClass::BandPass,
            sections: butterworth_band_pass(3, 1000.0, 300.0),
            mask: None,
            gain: 1.0,
            distribution: PartDistribution::Gaussian { sigmas: 3.0 },
            rtol_pct: 2.0,
            ctol_pct: 20.0,
            span_hz: (100.0, 10_000.0),
            passband_ref_hz: 1000.0,
        },
        Case {
            name: "high-pass, order 6, 12 dB, uniform parts, with a mask",
            class: ResponseClass::HighPass,
            sections: butterworth(SectionKind::HighPass, 6, 100.0, gain_hp),
            mask: Some(Mask {
                pass: Edge::Single(150.0),
                apass_db: 3.0,
                stop: Edge::Single(20.0),
                astop_db: 40.0,
            }),
            gain: gain_hp,
            distribution: PartDistribution::Uniform,
            rtol_pct: 1.0,
            ctol_pct: 5.0,
            span_hz: (10.0, 1000.0),
            passband_ref_hz: 1000.0,
        },
        Case {
            name: "low-pass, order 5",
            class: ResponseClass::LowPass,
            sections: butterworth(SectionKind::LowPass, 5, 2000.0, 1.0),
            mask: None,
            gain: 1.0,
            distribution: PartDistribution::Gaussian { sigmas: 3.0 },
            rtol_pct: 1.0,
            ctol_pct: 5.0,
            span_hz: (200.0, 20_000.0),
            passband_ref_hz: 0.0,
        },
    ]
}

/// A study of `case` with `runs` runs, seed 77, at 241 log-spaced frequencies (the page's grid
/// size), cutoff at 3.01 dB.
fn study(case: &Case, runs: usize) -> MonteCarlo {
    let board = Board::build(&case.sections, &BuildChoices::default())
        .unwrap_or_else(|e| panic!("{}: the board builds: {e:?}", case.name));
    let (lo, hi) = case.span_hz;
    let n_points = 241;
    let freqs_hz = (0..n_points)
        .map(|i| lo * fmath::powf(hi / lo, i as f64 / (n_points - 1) as f64))
        .collect();
    let settings = MonteCarloSettings {
        runs,
        seed: 77,
        tolerances: Tolerances {
            distribution: case.distribution,
            resistor_pct: case.rtol_pct,
            capacitor_pct: case.ctol_pct,
            overrides: Vec::new(),
        },
        freqs_hz,
        percentiles: vec![5.0, 50.0, 95.0],
        cutoff: CutoffDefinition::Attenuation {
            db: 10.0 * fmath::log10(2f64),
        },
        class: case.class,
        reference_gain: case.gain,
        passband_ref_hz: case.passband_ref_hz,
    };
    MonteCarlo::new(&board, case.mask.as_ref(), settings)
        .unwrap_or_else(|e| panic!("{}: the study starts: {e}", case.name))
}

/// Every number of a summary, the per-run samples included, as bits.
fn fingerprint(s: &Summary) -> Vec<u64> {
    let mut v: Vec<f64> = Vec::new();
    let mut spread = |sp: &Spread| {
        v.extend([sp.nominal, sp.mean, sp.std_dev, sp.min, sp.max]);
        v.extend(sp.percentiles.iter().map(|p| p.value));
        v.extend(&sp.samples);
    };
    for c in &s.cutoffs {
        spread(&c.hz);
    }
    spread(&s.passband_gain_db);
    if let Some(a) = &s.stopband_attenuation_db {
        spread(a);
    }
    for st in &s.stages {
        spread(&st.f0_hz);
        if let Some(q) = &st.q {
            spread(q);
        }
    }
    v.extend(&s.nominal_db);
    v.extend(&s.envelope.min_db);
    v.extend(&s.envelope.max_db);
    for c in &s.envelope.percentiles {
        v.extend(&c.db);
    }
    v.push(s.yield_fraction.unwrap_or(-1.0));
    v.iter()
        .map(|f| if f.is_nan() { 1 } else { f.to_bits() })
        .collect()
}

/// Identity: the plain path (what wasm runs) gives the same summary, bit for bit, as the
/// path this processor runs natively, for every shape of study.
#[test]
fn the_plain_path_gives_the_native_numbers() {
    for case in cases() {
        let name = case.name;
        let native = study(&case, 300);
        let mut plain = study(&case, 300);
        plain.isa = Isa::Portable;
        let (mut native, mut plain) = (native, plain);
        native.step(300);
        plain.step(300);
        let (a, b) = (native.finish(), plain.finish());
        assert_eq!(fingerprint(&a), fingerprint(&b), "{name}");
        assert!(a.runs == 300 && a.passband_gain_db.std_dev > 0.0, "{name}");
    }
}

/// Identity: a run's numbers do not depend on its lane or its batch: uneven steps (batches
/// that start and end inside a lane group) give the summary of one step, bit for bit.
#[test]
fn batches_do_not_change_any_run() {
    for case in cases() {
        let name = case.name;
        let mut whole = study(&case, 203);
        whole.step(203);
        let mut pieces = study(&case, 203);
        let mut chunk = 1;
        while !pieces.is_done() {
            pieces.step(chunk);
            chunk = chunk % 11 + 2;
        }
        let (a, b) = (whole.finish(), pieces.finish());
        assert_eq!(fingerprint(&a), fingerprint(&b), "{name}");
    }
}

/// Identity: the lane evaluation of the multilinear expansion equals the scalar one bit for
/// bit, lane by lane, with every lane's parts moved differently.
#[test]
fn multilinear_lanes_equal_the_scalar_evaluation() {
    let mut n_checked = 0;
    for case in cases() {
        let name = case.name;
        let mc = study(&case, 1);
        for st in &mc.stages {
            let Some(ml) = st.multi.as_ref() else {
                continue;
            };
            let nominal = &mc.nominal_values[st.value_offset..st.value_offset + st.n_parts];
            let factors = values(3 + n_checked as u64, st.n_parts);
            let lanes_in: Vec<RunLanes> = nominal
                .iter()
                .zip(&factors)
                .map(|(&v, f)| f.map(|x| v * (1.0 + 0.1 * x.clamp(-1.0, 1.0))))
                .collect();
            let k = st.num_l.len();
            let mut mono = vec![[0.0; RUN_LANES]; ml.n_terms()];
            let (mut nl, mut dl) = (vec![[0.0; RUN_LANES]; k], vec![[0.0; RUN_LANES]; k]);
            ml.evaluate_lanes::<Plain>(&lanes_in, &mut mono, &mut nl, &mut dl);
            let mut scalar = ml.clone();
            for l in 0..RUN_LANES {
                let vals: Vec<f64> = lanes_in.iter().map(|v| v[l]).collect();
                let (mut n, mut d) = (vec![0.0; k], vec![0.0; k]);
                scalar.evaluate(&vals, &mut n, &mut d);
                for j in 0..k {
                    assert_eq!(n[j].to_bits(), nl[j][l].to_bits(), "{name} N[{j}] lane {l}");
                    assert_eq!(d[j].to_bits(), dl[j][l].to_bits(), "{name} D[{j}] lane {l}");
                }
            }
            n_checked += 1;
        }
    }
    assert!(n_checked >= 8, "only {n_checked} stages had an expansion");
}

/// Identity: a study too large for the table of every run's |H|² finds the envelope's
/// percentiles by replaying its runs (`envelope.rs`); the order statistics, so every number of
/// the summary, are the table's bit for bit — summarized in uneven pieces, with a bucket limit
/// that forces several counting passes, and for a study stopped early.
#[test]
fn the_replayed_envelope_equals_the_table() {
    for case in cases() {
        let name = case.name;
        for (runs, done, cap) in [(1203, 1203, 2048), (1203, 1203, 3), (900, 517, 40)] {
            let mut table = study(&case, runs);
            table.step(done);
            let mut replay = study(&case, runs);
            replay.replay_always(cap);
            replay.step(done);
            let mut piece = 1;
            let mut n_pieces = 0;
            while replay.summarize(piece) > 0 {
                piece = piece % 7 + 1;
                n_pieces += 1;
            }
            assert!(n_pieces > 10, "{name}: {n_pieces} pieces");
            let (a, b) = (table.finish(), replay.finish());
            assert_eq!(
                fingerprint(&a),
                fingerprint(&b),
                "{name}, {runs} runs, cap {cap}"
            );
            assert_eq!(a.runs, done, "{name}");
        }
        // The command line's way: finish straight after the runs.
        let mut table = study(&case, 1203);
        table.step(1203);
        let mut replay = study(&case, 1203);
        replay.replay_always(5);
        replay.step(1203);
        assert_eq!(
            fingerprint(&table.finish()),
            fingerprint(&replay.finish()),
            "{name}"
        );
    }
}

/// Oracle: the banded nodal solve of the whole merged, loaded board (`BoardSolver`, checked
/// against the dense nodal analysis and ngspice in tests/analysis.rs and tests/as_built.rs), of a
/// board rebuilt with run k's drawn values, redrawn here from the documented stream (one
/// xoshiro256++ stream from the seed, one standard-normal draw per resistor and capacitor in
/// signal order, factor `1 + t·z` clamped at 0.001). On the 8th-order Chebyshev 0.5 dB at
/// 100 kHz on a 1 MHz op amp the loading residual is above the threshold, so the study solves each
/// run on the loaded board: run k's passband gain, |H| at its cutoff and the envelope's min and
/// max equal the rebuilt board's to 1e-9 dB, however the runs are cut into steps.
#[test]
fn loaded_runs_equal_the_board_built_with_their_drawn_values() {
    use crate::analysis::built::BoardSolver;
    use crate::netlist::PartKind;
    use rand_distr::{Distribution, StandardNormal};
    let link = "?v=2&resp=lp&family=chebyshev&ripple=0.5&order=8&fc=100k&gbw=1M&runs=21";
    let report = crate::link::parse(link);
    assert!(report.errors.is_empty(), "{:?}", report.errors);
    let design = crate::pipeline::compose(&report.state).expect("composes");
    let mut mc = crate::pipeline::start_spread(&design, 61).expect("study");
    assert!(
        mc.loaded_runs.is_some(),
        "the residual calls for the loaded path"
    );
    assert!(matches!(
        mc.settings.tolerances.distribution,
        PartDistribution::Gaussian { .. }
    ));
    while !mc.is_done() {
        // Steps of five cut the lane groups of eight in different places.
        mc.step(5);
    }
    let runs = mc.settings.runs;
    let (gain_db, cut_hi) = (mc.gain_db.clone(), mc.cut_hi.clone());
    let (f_ref, level) = (mc.settings.passband_ref_hz, mc.cutoff_level);
    let spread = mc.spread.clone();
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(mc.settings.seed);
    let summary = mc.finish();
    assert!(summary.loaded_runs);
    assert!(!summary.warnings.iter().any(|w| w.contains("loading")));
    let n_f = summary.freqs_hz.len();
    let (mut env_min, mut env_max) = (vec![f64::INFINITY; n_f], vec![f64::NEG_INFINITY; n_f]);
    for k in 0..runs {
        let mut board = design.board.clone();
        let mut i = 0;
        for stage in board.stages.iter_mut() {
            for p in stage.netlist.parts.iter_mut() {
                if p.kind != PartKind::OpAmp {
                    let z: f64 = StandardNormal.sample(&mut rng);
                    p.value *= (1.0 + spread[i] * z).max(1e-3);
                }
                i += 1;
            }
        }
        let mut solver = BoardSolver::of_board(&board).expect("board");
        let mut db = |f: f64| 20.0 * fmath::log10(fmath::cnorm(solver.solve_at(f).expect("solve")));
        let gain = db(f_ref);
        assert!(
            (gain - gain_db[k]).abs() < 1e-9,
            "run {k}: gain {} vs board {gain} dB",
            gain_db[k]
        );
        let at_cut = db(cut_hi[k]) - 10.0 * fmath::log10(level);
        assert!(
            at_cut.abs() < 1e-9,
            "run {k}: |H| at its cutoff off by {at_cut:e} dB"
        );
        for (j, &f) in summary.freqs_hz.iter().enumerate() {
            let v = db(f);
            env_min[j] = env_min[j].min(v);
            env_max[j] = env_max[j].max(v);
        }
    }
    for j in 0..n_f {
        let (lo, hi) = (summary.envelope.min_db[j], summary.envelope.max_db[j]);
        assert!(
            (lo - env_min[j]).abs() < 1e-9 && (hi - env_max[j]).abs() < 1e-9,
            "{} Hz: envelope {lo} … {hi} vs boards {} … {} dB",
            summary.freqs_hz[j],
            env_min[j],
            env_max[j]
        );
    }
}

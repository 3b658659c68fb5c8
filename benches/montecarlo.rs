//! How fast is the tolerance study, and the command-line sweep?
//!
//! `montecarlo_kernel`: the stage-evaluations per second (runs × points × stages / time; criterion
//! reports them as "elements/s") of `step(2000)` on an 8th-order Butterworth low-pass built as four
//! unity-gain Sallen-Key stages with exact parts (the board of `?v=2&order=8&fc=1k&rser=exact&
//! cser=exact`, generic op amp), 200 log-spaced frequencies from 10 Hz to 100 kHz, 1 % resistors
//! and 5 % capacitors: the cascade product with the nominal loading correction (the bench prints
//! the board's loading residual; it stays below the threshold, so the runs are not solved loaded).
//! `montecarlo_eseries`: the same study on the board built from the four sections with E96/E12
//! parts (the board the first version of this bench used).
//! `cascade_kernel_only`: the per-frequency kernel alone for one batch of eight runs side by side.
//! `montecarlo_whole`: `pipeline::spread` of 20,000 runs of the first board, new + step + finish,
//! the work of one `rolloff spread` without start-up and output. `sweep`: `pipeline::sweep` of
//! 100,000 points of a 20th-order Butterworth (`?v=2&order=20&fc=1k`), one banded factorization
//! per point. `tools/bench_numpy.py` and `tools/bench_sweep.py` time numpy's vectorised magnitude
//! kernel and scipy's `freqs_zpk` for the ratios.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use rolloff::analysis::tolerance::{
    CutoffDefinition, MonteCarlo, MonteCarloSettings, PartDistribution, RunLanes, Tolerances,
    RUN_LANES,
};
use rolloff::board::{Board, BuildChoices};
use rolloff::section::{Section, SectionKind};
use rolloff::spec::{Edge, Mask, ResponseClass};
use std::time::{Duration, Instant};

const N_POINTS: usize = 200;

fn board() -> Board {
    // Butterworth pole Q values of order 8: 1 / (2 sin((2k − 1)π/16)), k = 1..4 (analytic).
    let sections: Vec<Section> = (1..=4)
        .map(|k| {
            let q = 1.0 / (2.0 * ((2 * k - 1) as f64 * std::f64::consts::PI / 16.0).sin());
            Section {
                kind: SectionKind::LowPass,
                f0_hz: 1000.0,
                q: Some(q),
                gain: 1.0,
                fz_hz: None,
            }
        })
        .rev()
        .collect();
    Board::build(&sections, &BuildChoices::default()).expect("the benchmark board builds")
}

fn settings(runs: usize) -> MonteCarloSettings {
    MonteCarloSettings {
        runs,
        seed: 1,
        tolerances: Tolerances {
            distribution: PartDistribution::Gaussian { sigmas: 3.0 },
            resistor_pct: 1.0,
            capacitor_pct: 5.0,
            overrides: vec![],
        },
        freqs_hz: (0..N_POINTS)
            .map(|i| 10f64.powf(1.0 + 4.0 * i as f64 / (N_POINTS - 1) as f64))
            .collect(),
        percentiles: vec![5.0, 50.0, 95.0],
        cutoff: CutoffDefinition::Attenuation { db: 3.0103 },
        class: ResponseClass::LowPass,
        reference_gain: 1.0,
        passband_ref_hz: 0.0,
    }
}

fn mask() -> Mask {
    Mask {
        pass: Edge::Single(800.0),
        apass_db: 1.0,
        stop: Edge::Single(3000.0),
        astop_db: 60.0,
    }
}

/// The composed design of `link`.
fn design(link: &str) -> rolloff::pipeline::Design {
    let report = rolloff::link::parse(link);
    assert!(report.errors.is_empty(), "{link}: {:?}", report.errors);
    rolloff::pipeline::compose(&report.state).expect("the benchmark design composes")
}

/// `step(chunk)` of a fresh study of `board`, timed without the set-up.
fn bench_step(c: &mut Criterion, name: &str, label: &str, board: &Board, chunk: usize) {
    let n_stages = board.stages.len();
    let probe = MonteCarlo::new(board, Some(&mask()), settings(16)).expect("the study starts");
    let summary = probe.finish();
    eprintln!(
        "{name}: loading residual {:?} dB, every run solved loaded: {}",
        summary.loading_residual_db, summary.loaded_runs
    );
    let mut group = c.benchmark_group(name);
    group.throughput(Throughput::Elements((chunk * N_POINTS * n_stages) as u64));
    group.sample_size(20);
    group.bench_function(label, |b| {
        b.iter_custom(|iters| {
            let mut total = Duration::ZERO;
            for _ in 0..iters {
                let mut mc = MonteCarlo::new(board, Some(&mask()), settings(chunk))
                    .expect("the study starts");
                let t = Instant::now();
                mc.step(chunk);
                total += t.elapsed();
                criterion::black_box(mc.progress());
            }
            total
        })
    });
    group.finish();
}

fn bench(c: &mut Criterion) {
    let exact = design("?v=2&order=8&fc=1k&rser=exact&cser=exact");
    let n_stages = exact.board.stages.len();
    bench_step(
        c,
        "montecarlo_kernel",
        "8th-order SK low-pass, exact parts, 200 points, step(2000)",
        &exact.board,
        2000,
    );
    bench_step(
        c,
        "montecarlo_eseries",
        "8th-order SK low-pass, E96/E12 parts, 200 points, step(2000)",
        &board(),
        2000,
    );

    // The per-frequency kernel alone (what each run spends on its 200 points once its stage
    // polynomials are formed), for one batch of RUN_LANES runs side by side: |N|² of degree 2
    // and |D|² of degree 3 in x per stage, as the Sallen-Key stages with the op-amp model have.
    let n_eval = 203; // 200 points, the two mask edges and the passband reference
    let lanes = RUN_LANES;
    let x: Vec<f64> = (0..n_eval)
        .map(|i| 10f64.powf(-4.0 + 8.0 * i as f64 / n_eval as f64))
        .collect();
    let width = 4;
    let coef_n: Vec<RunLanes> = (0..n_stages * width)
        .map(|i| {
            let mut row = [0.0; RUN_LANES];
            for (l, v) in row.iter_mut().enumerate() {
                if i % width < 3 {
                    *v = 1.0 / (1 + i + l) as f64;
                }
            }
            row
        })
        .collect();
    let coef_d: Vec<RunLanes> = (0..n_stages * width)
        .map(|i| {
            let mut row = [0.0; RUN_LANES];
            for (l, v) in row.iter_mut().enumerate() {
                *v = 0.5 + ((i + l) % 7) as f64;
            }
            row
        })
        .collect();
    let deg_n = vec![2usize; n_stages];
    let deg_d = vec![3usize; n_stages];
    let mut out = vec![[0.0; RUN_LANES]; n_eval];
    let mut den = vec![[0.0; RUN_LANES]; n_eval];
    let mut kernel = c.benchmark_group("cascade_kernel_only");
    kernel.throughput(Throughput::Elements((n_eval * n_stages * lanes) as u64));
    kernel.bench_function("4 stages, 203 points, 8 runs in lanes", |b| {
        b.iter(|| {
            rolloff::analysis::tolerance::cascade_kernel_lanes(
                criterion::black_box(&x),
                &coef_n,
                &coef_d,
                &deg_n,
                &deg_d,
                width,
                &mut den,
                &mut out,
            );
            criterion::black_box(out[0][0])
        })
    });
    kernel.finish();

    let mut whole_design = design("?v=2&order=8&fc=1k&rser=exact&cser=exact&runs=20000");
    whole_design.state.study.runs = 20_000;
    let mut whole = c.benchmark_group("montecarlo_whole");
    whole.throughput(Throughput::Elements(
        (20_000 * rolloff::pipeline::PLOT_POINTS * n_stages) as u64,
    ));
    whole.sample_size(10);
    whole.bench_function("pipeline::spread, 20000 runs: new + step + finish", |b| {
        b.iter(|| criterion::black_box(rolloff::pipeline::spread(&whole_design).expect("study")))
    });
    whole.finish();

    let butterworth = design("?v=2&order=20&fc=1k");
    let (from, to) = butterworth.span_hz;
    let mut sweep = c.benchmark_group("sweep");
    sweep.throughput(Throughput::Elements(100_000));
    sweep.sample_size(10);
    sweep.bench_function("20th-order Butterworth, 100000 points", |b| {
        b.iter(|| {
            criterion::black_box(
                rolloff::pipeline::sweep(&butterworth, from, to, 100_000, false).expect("sweep"),
            )
        })
    });
    sweep.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

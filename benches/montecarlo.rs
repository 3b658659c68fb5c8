//! How fast is the tolerance-study kernel? An 8th-order Butterworth low-pass built as four
//! unity-gain Sallen-Key stages (1 kHz, generic op amp, E96/E12 parts), 200 log-spaced frequencies
//! from 10 Hz to 100 kHz, 1 % resistors and 5 % capacitors. The figure of merit is
//! stage-evaluations per second = runs × points × stages / time (criterion reports it as
//! "elements/s"). `tools/bench_numpy.py` runs the same textbook computation vectorised in numpy
//! for comparison. A second group times a whole study of 20,000 runs including set-up and the
//! statistics of `finish()`, the work behind one `rolloff spread`; a third times the
//! per-frequency kernel alone for one batch of eight runs side by side (the study works its runs
//! in batches of eight SIMD lanes), to show how the time of a run divides between its 200 points
//! and its per-run work (draws, stage polynomials, f0 and Q, cutoff search, statistics).

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

fn bench(c: &mut Criterion) {
    let board = board();
    let n_stages = board.stages.len();
    let chunk = 2000;
    let mut group = c.benchmark_group("montecarlo_kernel");
    group.throughput(Throughput::Elements((chunk * N_POINTS * n_stages) as u64));
    group.sample_size(20);
    group.bench_function("8th-order SK low-pass, 200 points, step(2000)", |b| {
        b.iter_custom(|iters| {
            let mut total = Duration::ZERO;
            for _ in 0..iters {
                let mut mc = MonteCarlo::new(&board, Some(&mask()), settings(chunk))
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

    let mut whole = c.benchmark_group("montecarlo_whole");
    whole.throughput(Throughput::Elements((20_000 * N_POINTS * n_stages) as u64));
    whole.sample_size(10);
    whole.bench_function("20000 runs: new + step + finish", |b| {
        b.iter(|| {
            let mut mc =
                MonteCarlo::new(&board, Some(&mask()), settings(20_000)).expect("the study starts");
            mc.step(20_000);
            criterion::black_box(mc.finish())
        })
    });
    whole.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

//! Tolerance study (Monte Carlo): many copies of the board with part values drawn around their
//! values on the board, each analysed with the same op-amp model as the built board.
//!
//! Per run: every resistor and capacitor gets a factor `1 + t·z` (Gaussian: `z` standard normal
//! and `t` the tolerance divided by the chosen number of standard deviations; uniform: `z` uniform
//! on [−1, 1) and `t` the tolerance). The draws come from one xoshiro256++ stream seeded with the
//! seed, one draw per part in signal order (stage by stage, parts in netlist order), runs one after
//! another, so the same seed gives the same numbers on every platform and however the runs are cut
//! into chunks. A drawn factor below 0.001 (a Gaussian tail beyond 1/t standard deviations) is
//! clamped to 0.001 so that no part value turns non-positive.
//!
//! Runs are worked in batches of [`RUN_LANES`] (eight) side by side, one run per SIMD lane: run
//! `r` sits in lane `r mod 8`, so a batch is the runs of one aligned group of eight that fall in
//! the current [`MonteCarlo::step`] (a step that starts or ends inside a group fills only some
//! lanes; the others are computed and thrown away). The draws stay in the order above — a batch
//! draws its runs one after another — and every lane does the same operations in the same order
//! as a run worked alone, so a run's numbers do not depend on its batch or on how the runs are
//! cut into steps. The batch work is compiled three times, for AVX-512F, for AVX2 and as plain
//! code (wasm, other processors), and chosen at run time; each operation is a single IEEE
//! operation per lane (Rust does not fuse multiplies and adds), so all three give bit-identical
//! results.
//!
//! Each stage's transfer function `N(s)/D(s)` (op amp included, see [`super::poly`]) is formed once
//! per run — from its precomputed multilinear expansion in the part admittances
//! ([`super::multilinear`], exact, eight runs at a time), or for large stages by nodal solves at a
//! few real frequencies ([`super::fastfit`], run by run). `|N(jω)|²` and `|D(jω)|²` are then
//! polynomials in `x = (ω/ω_g)²`, and the response of the cascade at each frequency is a few
//! multiply-adds per stage and one division, for the eight runs of a batch at once without
//! branches. The yield compares `|H|²` with the mask bounds in linear terms (no logarithms). Each
//! stage's f0 and Q come from the dominant quadratic factor of its denominator (the op amp's far
//! pole split off by Halley's iteration from the nominal one, in lanes, or Bairstow's iteration
//! for other shapes, run by run); each run's cutoff from the grid crossing refined by regula falsi
//! (Illinois) to about 1e-11, in lanes, each lane stopping when it has converged.
//!
//! Loading: the product of the stage transfer functions treats each stage as driven by an ideal
//! source and unloaded; with an op amp that has output resistance the stages load each other
//! (the op amp's `Rout`, reduced by its loop gain, in series with the next stage's input). When
//! `Rout > 0` the plan solves the nominal board merged and loaded (the same banded solve as the
//! frequency analyses, [`crate::analysis::circuit`]) at every evaluation point and every run's
//! |H|² is multiplied by the nominal correction `|H_loaded|²/|H_product|²` there (between grid
//! points, for the cutoff search, interpolated linearly in ln x of ln correction). The nominal
//! run then equals the loaded board at the evaluation points. The part the correction cannot
//! follow (how loading changes with the drawn parts) is measured: the first [`LOADING_PROBE_RUNS`]
//! runs of the stream are solved loaded with their own drawn values on a copy of the study (the
//! stream of the study itself is not touched), and the largest difference from the kernel's
//! corrected |H| over the evaluation points within 120 dB of the reference gain is the summary's
//! `loading_residual_db`, with a warning above [`LOADING_RESIDUAL_WARN_DB`]. With `Rout = 0` the
//! product is exact (an op amp's output is then an ideal source), no correction is applied and
//! the study is bit for bit what it was.
//!
//! When the residual is above the threshold, the product path would report a board that is not
//! the one built, so the study takes the loaded path instead: every run (and the nominal board)
//! is solved on the merged, loaded board with its own drawn values, the matrices restamped once
//! per run and solved at every evaluation point and at every step of the cutoff search. The
//! draws, the run order and everything read from |H|² (yield, cutoffs, gain, attenuation,
//! envelope) are as on the product path; each stage's f0 and Q stay those of the stage's own
//! transfer function (a property of the stage, not of the board). The summary then says
//! `loaded_runs`, and `loading_residual_db` keeps its meaning: what the product path would have
//! missed. The loaded path costs a banded solve per run and point, so it is taken only when needed.
//!
//! Memory: the envelope's percentiles are exact order statistics of every run's |H|² in single
//! precision. A study of up to 2^20 values on the page (runs × frequencies, 4 MB), 2^23 natively
//! (32 MB), keeps them all, in blocks
//! of sixteen runs stored frequency-major (a batch writes eight contiguous values per frequency);
//! a larger one keeps only each frequency's key range and finds the order statistics by replaying
//! the runs (`envelope.rs`: a bound of 4096 counts per frequency, then at most 2048 values or 256
//! counts per wanted rank). What grows with the runs is the few readings per run kept for the
//! distributions: cutoffs, gain, attenuation, and each stage's f0 and Q (8 bytes each). The
//! envelope's min and max are kept per lane (2 × 8 × 8 bytes per frequency) and reduced at the
//! end.
//!
//! The mask is checked at the frequencies of the grid that lie in the passband or the stopband and
//! at the band edges themselves: the passband needs `|H|² ≥ G²·10^(−apass/10)`, the stopband
//! `|H|² ≤ G²·10^(−astop/10)`, with G the reference gain (the design's passband gain). Gain above G
//! in the passband is not a violation: the mask states only the attenuation allowed.
//!
//! Layout: this file holds the study type and its settings; `plan.rs` builds what is fixed for the
//! whole study (stages, evaluation grid, mask bounds, instruction set), `batch.rs` the per-batch
//! scratch and the steps that fill it (draws, stage polynomials, f0 and Q, storing),
//! `kernel.rs` the lane kernels that evaluate a batch (cascade response, yield, cutoff search),
//! and `summary.rs` the statistics of the runs (percentiles, histograms, yield, `summarize` and
//! `finish`). The SIMD lanes are `lanes.rs` beside this module, the root finders `roots.rs`.

mod batch;
mod envelope;
mod kernel;
mod plan;
mod summary;
#[cfg(test)]
mod tests;

pub use self::kernel::cascade_kernel_lanes;
pub use self::plan::bands;
pub use self::summary::{
    percentile_sorted, percentiles_by_selection, percentiles_f32_by_histogram, spread_of,
    CutoffSide, CutoffSpread, Envelope, Histogram, PercentileCurve, PercentileValue, Spread,
    StageSpread, Summary,
};
pub use super::lanes::{RunLanes, RUN_LANES};

use self::batch::Batch;
use self::plan::StageRun;
use super::lanes::Isa;
use crate::spec::ResponseClass;
use rand_xoshiro::Xoshiro256PlusPlus;
use serde::Serialize;

/// Runs of the stream solved loaded with their own drawn values to measure what the nominal
/// loading correction leaves (see the module docs).
pub const LOADING_PROBE_RUNS: usize = 16;
/// The loading residual above which the study warns, dB: the last digit of the passband gain
/// figures the report shows (0.001 dB), so a residual below it cannot change a shown number.
pub const LOADING_RESIDUAL_WARN_DB: f64 = 0.001;
/// Largest number of runs accepted.
pub const MAX_RUNS: usize = 100_000;
/// Largest part tolerance accepted, %.
pub const MAX_TOLERANCE_PCT: f64 = 50.0;
/// Runs per block of the single-precision sample table: sixteen f32 are one 64-byte cache line,
/// so a run writes one line per frequency into an L1-resident block, and a frequency is read as
/// one line per block.
const SAMPLE_BLOCK: usize = 16;
// A lane group of a batch must lie inside one sample block.
const _: () = assert!(SAMPLE_BLOCK % RUN_LANES == 0);

/// How part values are spread around their nominal value.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum PartDistribution {
    /// Gaussian; the tolerance is `sigmas` standard deviations (3 is the usual reading of a
    /// tolerance band, common practice). Accepted 1–6.
    Gaussian {
        /// Standard deviations spanned by the tolerance.
        sigmas: f64,
    },
    /// Uniform over ± the tolerance.
    Uniform,
}

/// A tolerance for one named part that replaces its class tolerance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PartTolerance {
    /// Reference designator (`R3`, `C2` …).
    pub reference: String,
    /// Tolerance, %.
    pub pct: f64,
}

/// Part tolerances of the study.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Tolerances {
    /// Gaussian or uniform.
    pub distribution: PartDistribution,
    /// Resistor tolerance, % (`rtol`), 0–50.
    pub resistor_pct: f64,
    /// Capacitor tolerance, % (`ctol`), 0–50.
    pub capacitor_pct: f64,
    /// Per-part tolerances that replace the class tolerance.
    pub overrides: Vec<PartTolerance>,
}

/// Where the cutoff of a run is read.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum CutoffDefinition {
    /// The frequency where `|H|` has fallen `db` below the reference gain on the transition side of
    /// the passband: 3.01 dB for Butterworth-like responses, the ripple for Chebyshev (its
    /// ripple-band edge), 6.02 dB for Linkwitz-Riley.
    Attenuation {
        /// Attenuation relative to the reference gain, dB (> 0).
        db: f64,
    },
}

/// Settings of a tolerance study.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MonteCarloSettings {
    /// Number of runs, 1–100,000 (`runs`).
    pub runs: usize,
    /// Seed of the random stream (`seed`).
    pub seed: u64,
    /// Part tolerances.
    pub tolerances: Tolerances,
    /// Frequencies of the envelope, Hz, ascending and positive.
    pub freqs_hz: Vec<f64>,
    /// Percentiles of the envelope and of the distributions, each 0–100 (e.g. 5, 50, 95).
    pub percentiles: Vec<f64>,
    /// How the cutoff of a run is read.
    pub cutoff: CutoffDefinition,
    /// Low-, high- or band-pass: on which side the cutoff is searched.
    pub class: ResponseClass,
    /// The design's passband gain |G|, V/V: the reference of the mask and of the cutoff level.
    pub reference_gain: f64,
    /// Frequency at which each run's passband gain is read, Hz (0 allowed: DC for a low-pass).
    pub passband_ref_hz: f64,
}

/// How far a study has got.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Progress {
    /// Runs done.
    pub done: usize,
    /// Runs asked for.
    pub total: usize,
}

/// A tolerance study in progress. Create with [`MonteCarlo::new`], advance with
/// [`MonteCarlo::step`] (the caller may stop at any time), read with [`MonteCarlo::finish`].
#[derive(Debug, Clone)]
pub struct MonteCarlo {
    settings: MonteCarloSettings,
    rng: Xoshiro256PlusPlus,
    stages: Vec<StageRun>,
    /// Nominal values of every part of the board in draw order (op amps hold 0, not drawn).
    nominal_values: Vec<f64>,
    /// Relative spread `t` per part (0 for op amps), see the module docs.
    spread: Vec<f64>,
    /// Indices of the parts that get a draw (every resistor and capacitor), in draw order.
    drawn: Vec<usize>,
    /// Evaluation frequencies as `x = (f/f_g)²`: grid, then edge points and the passband
    /// reference.
    x_eval: Vec<f64>,
    n_grid: usize,
    ref_idx: usize,
    lo_bound: Vec<f64>,
    hi_bound: Vec<f64>,
    stop_weight: Vec<f64>,
    has_mask: bool,
    has_stop: bool,
    /// The stopband depth the mask asks, dB (`None` without a stopband check point).
    required_stop_db: Option<f64>,
    w_g: f64,
    width: usize,
    /// Which compiled form of the batch work runs on this processor.
    isa: Isa,
    batch: Batch,
    // Accumulated results.
    done: usize,
    n_pass: usize,
    /// Smallest and largest |H|² per grid point, per lane (reduced over the lanes at the end).
    env_min: Vec<RunLanes>,
    env_max: Vec<RunLanes>,
    /// What is kept of every run's |H|² for the envelope's percentiles: the table of a small
    /// study, the key ranges of a large one ([`envelope`]).
    envelope: envelope::EnvelopeStore,
    /// Percentile curves of the grid points summarized so far ([`MonteCarlo::summarize`]).
    curves: Vec<PercentileCurve>,
    cut_lo: Vec<f64>,
    cut_hi: Vec<f64>,
    gain_db: Vec<f64>,
    atten_db: Vec<f64>,
    stage_f0: Vec<Vec<f64>>,
    stage_q: Vec<Vec<f64>>,
    nominal: RunResult,
    nominal_h2: Vec<f64>,
    nominal_f0q: Vec<(f64, f64)>,
    fallbacks: usize,
    /// |H|² at the cutoff: G²·10^(−a/10).
    cutoff_level: f64,
    /// The nominal loading correction |H_loaded|²/|H_product|² at each evaluation point (`None`
    /// with `Rout = 0`, where the product is exact).
    loading_h2: Option<Vec<f64>>,
    /// The logarithms the correction is interpolated with between grid points, per interval
    /// (`kernel::loading_logs`; empty without a correction).
    loading_logs: Vec<[f64; 3]>,
    /// The largest difference of the probe runs from their loaded solves, dB (see the module docs).
    loading_residual_db: Option<f64>,
    /// Set when the residual is above [`LOADING_RESIDUAL_WARN_DB`]: every run is then solved on
    /// the loaded board with its drawn values instead of the corrected product (see the module
    /// docs).
    loaded_runs: Option<plan::LoadedRuns>,
}

/// The readings of one run (the nominal board's are kept for the summary).
#[derive(Debug, Clone, Copy, Default)]
struct RunResult {
    cut_lo_hz: f64,
    cut_hi_hz: f64,
    gain_db: f64,
    atten_db: f64,
}

impl MonteCarlo {
    /// Runs up to `n_runs` more runs (fewer at the end) and reports the progress.
    pub fn step(&mut self, n_runs: usize) -> Progress {
        let todo = n_runs.min(self.settings.runs - self.done);
        if todo > 0 {
            // New runs change every percentile curve summarized so far.
            self.curves.clear();
        }
        let end = self.done + todo;
        while self.done < end {
            // Lane = run index modulo the lane count, so a batch never straddles a lane group
            // and the runs of a group land side by side in the sample table.
            let first = self.done % RUN_LANES;
            let last = (first + (end - self.done)).min(RUN_LANES);
            self.run_batch(Some((first, last)));
        }
        self.progress()
    }

    /// Runs done and asked for.
    pub fn progress(&self) -> Progress {
        Progress {
            done: self.done,
            total: self.settings.runs,
        }
    }

    /// True when every run asked for is done.
    pub fn is_done(&self) -> bool {
        self.done >= self.settings.runs
    }
}

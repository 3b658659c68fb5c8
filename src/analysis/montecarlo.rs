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
//! Approximation: the cascade is the product of the stage transfer functions, each stage driven
//! by an ideal source and unloaded. The loading of an op-amp output (its `Rout`, reduced by the
//! loop gain) by the next stage's input is left out. `tests/analysis.rs` measures the difference
//! from the whole-board nodal solution ([`crate::mna::board_response`]) on the 8th-order
//! Sallen-Key benchmark board with the generic op amp: 2.9e-4 dB up to 10 kHz (10·fc), 1.0e-3 dB
//! up to 100 kHz; it grows towards the op amp's GBW, where the loop gain is gone.
//!
//! Memory: the envelope's percentiles are exact order statistics of every run's |H|², kept in
//! single precision: 4 bytes × runs × frequencies (16 MB for 20,000 runs of 200 points), in
//! blocks of sixteen runs stored frequency-major (a batch writes eight contiguous values per
//! frequency). The envelope's min and max are kept per lane (2 × 8 × 8 bytes per frequency) and
//! reduced at the end.
//!
//! The mask is checked at the frequencies of the grid that lie in the passband or the stopband and
//! at the band edges themselves: the passband needs `|H|² ≥ G²·10^(−apass/10)`, the stopband
//! `|H|² ≤ G²·10^(−astop/10)`, with G the reference gain (the design's passband gain). Gain above G
//! in the passband is not a violation: the mask states only the attenuation allowed.

use self::lanes::Lane8;
use super::circuit::{AnalysisError, Assembled, Compiled};
use super::fastfit::{magnitude_squared_lanes, FastFit};
use super::multilinear::Multilinear;
use super::poly::{FitWork, Poly};
use crate::board::Board;
use crate::error::InputError;
use crate::netlist::{PartKind, StageNetlist};
use crate::opamp::OpAmp;
use crate::spec::{Edge, Mask, ResponseClass};
use num_complex::Complex64;
use rand_core::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use serde::Serialize;
use std::f64::consts::PI;

/// Largest number of runs accepted.
pub const MAX_RUNS: usize = 100_000;
/// Largest part tolerance accepted, %.
pub const MAX_TOLERANCE_PCT: f64 = 50.0;
/// Runs per block of the single-precision sample table: sixteen f32 are one 64-byte cache line,
/// so a run writes one line per frequency into an L1-resident block, and a frequency is read as
/// one line per block.
const SAMPLE_BLOCK: usize = 16;
/// Runs evaluated side by side in the lanes of the batch work (eight f64 are one AVX-512
/// register or two AVX2 registers; wasm runs the lanes as plain code).
pub const RUN_LANES: usize = 8;
/// One f64 per run of a batch.
pub type RunLanes = [f64; RUN_LANES];
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

/// A histogram of samples: `counts[i]` samples fall in `[edges[i], edges[i+1])` (the last bin is
/// closed).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Histogram {
    /// Bin edges, `counts.len() + 1` of them.
    pub edges: Vec<f64>,
    /// Samples per bin.
    pub counts: Vec<usize>,
}

/// One percentile of a set of samples.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PercentileValue {
    /// Percentile, 0–100.
    pub percentile: f64,
    /// Value (linear interpolation between order statistics).
    pub value: f64,
}

/// The spread of one quantity over the runs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Spread {
    /// Value of the nominal board.
    pub nominal: f64,
    /// Mean over the runs that have a value.
    pub mean: f64,
    /// Sample standard deviation (n − 1).
    pub std_dev: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
    /// The chosen percentiles.
    pub percentiles: Vec<PercentileValue>,
    /// A 40-bin histogram between min and max.
    pub histogram: Histogram,
    /// Runs where the quantity was not found (no crossing on the grid, no pole pair).
    pub n_missing: usize,
    /// Every run's value, in run order (not in the JSON: the histogram is).
    #[serde(skip)]
    pub samples: Vec<f64>,
}

/// Which edge a cutoff is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum CutoffSide {
    /// The edge below the passband (high-pass, lower band-pass edge).
    Lower,
    /// The edge above the passband (low-pass, upper band-pass edge).
    Upper,
}

/// The spread of one cutoff, Hz.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CutoffSpread {
    /// Lower or upper edge.
    pub side: CutoffSide,
    /// The frequency, Hz.
    pub hz: Spread,
}

/// A percentile of the magnitude per frequency.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PercentileCurve {
    /// Percentile, 0–100.
    pub percentile: f64,
    /// Magnitude, dB, one per frequency.
    pub db: Vec<f64>,
}

/// The envelope of the magnitude over the runs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Envelope {
    /// Smallest |H| per frequency, dB.
    pub min_db: Vec<f64>,
    /// Largest |H| per frequency, dB.
    pub max_db: Vec<f64>,
    /// Chosen percentiles per frequency (kept in single precision during the runs: ±1e-6 dB).
    pub percentiles: Vec<PercentileCurve>,
}

/// The spread of one stage's f0 and Q (the dominant pole pair of its denominator, op amp
/// included).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageSpread {
    /// Natural frequency (first order: pole frequency), Hz.
    pub f0_hz: Spread,
    /// Pole Q; `None` for a first-order stage.
    pub q: Option<Spread>,
}

/// A power ratio (|H|²) in dB.
fn power_db(v: f64) -> f64 {
    10.0 * v.log10()
}

/// Results of a tolerance study.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    /// Runs done (fewer than asked for when the study was stopped early).
    pub runs: usize,
    /// Runs asked for.
    pub runs_requested: usize,
    /// Seed of the random stream.
    pub seed: u64,
    /// The tolerances used.
    pub tolerances: Tolerances,
    /// Share of runs that meet the mask, 0–1; `None` when there is no mask.
    #[serde(rename = "yield")]
    pub yield_fraction: Option<f64>,
    /// Runs that meet the mask; `None` when there is no mask.
    pub n_pass: Option<usize>,
    /// Frequencies of the envelope, Hz.
    pub freqs_hz: Vec<f64>,
    /// Magnitude of the nominal board, dB.
    pub nominal_db: Vec<f64>,
    /// Envelope of the magnitude.
    pub envelope: Envelope,
    /// Cutoff spread: one entry for low- and high-pass, two for band-pass.
    pub cutoffs: Vec<CutoffSpread>,
    /// Gain at the passband reference frequency, dB.
    pub passband_gain_db: Spread,
    /// Smallest attenuation over the stopband check points relative to the reference gain, dB;
    /// `None` without a mask.
    pub stopband_attenuation_db: Option<Spread>,
    /// Per-stage f0 and Q, in signal order.
    pub stages: Vec<StageSpread>,
    /// Soft problems (runs without a cutoff crossing on the grid, fallbacks).
    pub warnings: Vec<String>,
}

/// One stage prepared for repeated fitting.
#[derive(Debug, Clone)]
struct StageRun {
    compiled: Compiled,
    assembled: Assembled,
    fast: FastFit,
    /// The multilinear expansion of N and D (stages of up to eight parts), used instead of
    /// solving per run.
    multi: Option<Multilinear>,
    /// Index into the run's value vector of this stage's first part.
    value_offset: usize,
    n_parts: usize,
    /// 0, 1 or 2 (degree of the denominator with an ideal op amp, at most 2).
    order: usize,
    /// Nominal f0 (rad/s) and Q of the dominant factor, the start of each run's iteration.
    nominal_w0: f64,
    nominal_q: f64,
    /// The nominal far real pole of a third-degree denominator (the op amp's), in u = s/ω_g;
    /// each run finds it by Halley's iteration and splits off the filter's quadratic factor.
    far_root_u: Option<f64>,
    /// N and D in u of the batch's runs (K coefficients, one lane per run).
    num_l: Vec<RunLanes>,
    den_l: Vec<RunLanes>,
    /// |N|², |D|² in x of the batch's runs.
    sq_n: Vec<RunLanes>,
    sq_d: Vec<RunLanes>,
    /// Monomials of the multilinear expansion, one lane per run.
    mono: Vec<RunLanes>,
    /// One run's part values, for the per-run solve of stages without an expansion.
    scalar_values: Vec<f64>,
}

/// The runs of one batch, side by side in [`RUN_LANES`] lanes (lane `l` holds the run whose index
/// is `l` modulo [`RUN_LANES`]), and the working values they share.
#[derive(Debug, Clone)]
struct Batch {
    /// Lanes holding a run of this batch.
    active: [bool; RUN_LANES],
    /// Lanes whose run hit a singular matrix (a failed board without readings).
    failed: [bool; RUN_LANES],
    /// Part values of every part of the board in draw order, one lane per run.
    values: Vec<RunLanes>,
    /// Per-stage |N|², |D|² coefficients in x, `width` each, normalized by max |D|² coefficient.
    coef_n: Vec<RunLanes>,
    coef_d: Vec<RunLanes>,
    /// Per stage, the highest degree of |N|², |D|² over the batch's runs (the Horner loops start
    /// there; a higher coefficient of a lane is zero, which Horner's rule passes exactly).
    deg_n: Vec<usize>,
    deg_d: Vec<usize>,
    /// Per stage, the dominant factor's f0 (rad/s) and Q.
    w0: Vec<RunLanes>,
    q: Vec<RunLanes>,
    /// |H|² at every evaluation point.
    h2: Vec<RunLanes>,
    /// The kernel's running denominator products.
    den: Vec<RunLanes>,
    /// The readings of each lane's run.
    pass: [bool; RUN_LANES],
    cut_lo_hz: RunLanes,
    cut_hi_hz: RunLanes,
    gain_db: RunLanes,
    atten_db: RunLanes,
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
    /// |H|² of every run in single precision, in blocks of [`SAMPLE_BLOCK`] runs stored
    /// frequency-major inside each block: a batch writes contiguous lanes per frequency, and
    /// reading one frequency over all runs reads contiguous stretches.
    samples_h2: Vec<f32>,
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
}

/// Instruction-set extension the batch work is compiled for (chosen at run time; every path gives
/// bit-identical results).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Isa {
    /// Plain code (wasm, other processors).
    Portable,
    /// x86-64 with AVX2.
    #[cfg(target_arch = "x86_64")]
    Avx2,
    /// x86-64 with AVX-512F.
    #[cfg(target_arch = "x86_64")]
    Avx512,
}

impl Isa {
    fn detect() -> Isa {
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx512f") {
                return Isa::Avx512;
            }
            if std::arch::is_x86_feature_detected!("avx2") {
                return Isa::Avx2;
            }
        }
        Isa::Portable
    }
}

#[derive(Debug, Clone, Copy, Default)]
struct RunResult {
    cut_lo_hz: f64,
    cut_hi_hz: f64,
    gain_db: f64,
    atten_db: f64,
}

fn input(key: &str, message: String) -> AnalysisError {
    AnalysisError::Input(InputError::new(key, message))
}

fn validate(settings: &MonteCarloSettings) -> Result<(), AnalysisError> {
    if settings.runs == 0 || settings.runs > MAX_RUNS {
        return Err(input(
            "runs",
            format!("{} runs asked for; accepted 1 to {MAX_RUNS}", settings.runs),
        ));
    }
    let t = &settings.tolerances;
    for (key, v) in [("rtol", t.resistor_pct), ("ctol", t.capacitor_pct)] {
        if !(v.is_finite() && (0.0..=MAX_TOLERANCE_PCT).contains(&v)) {
            return Err(input(
                key,
                format!("tolerance {v} %; accepted 0 to {MAX_TOLERANCE_PCT} %"),
            ));
        }
    }
    for o in &t.overrides {
        if !(o.pct.is_finite() && (0.0..=MAX_TOLERANCE_PCT).contains(&o.pct)) {
            return Err(input(
                &format!("tol:{}", o.reference),
                format!("tolerance {} %; accepted 0 to {MAX_TOLERANCE_PCT} %", o.pct),
            ));
        }
    }
    if let PartDistribution::Gaussian { sigmas } = t.distribution {
        if !(sigmas.is_finite() && (1.0..=6.0).contains(&sigmas)) {
            return Err(input(
                "sigmas",
                format!("{sigmas} standard deviations; accepted 1 to 6"),
            ));
        }
    }
    let f = &settings.freqs_hz;
    if f.is_empty() || f.len() > 100_000 {
        return Err(input(
            "points",
            format!("{} frequencies; accepted 1 to 100000", f.len()),
        ));
    }
    if f.iter().any(|v| !(v.is_finite() && *v > 0.0)) || f.windows(2).any(|w| w[1] <= w[0]) {
        return Err(input(
            "from",
            "frequencies must be positive, finite and ascending".into(),
        ));
    }
    if settings
        .percentiles
        .iter()
        .any(|p| !(p.is_finite() && (0.0..=100.0).contains(p)))
    {
        return Err(input("percentiles", "percentiles are 0 to 100".into()));
    }
    let CutoffDefinition::Attenuation { db } = settings.cutoff;
    if !(db.is_finite() && db > 0.0 && db < 100.0) {
        return Err(input(
            "cutoff",
            format!("cutoff attenuation {db} dB; accepted above 0 and below 100 dB"),
        ));
    }
    if !(settings.reference_gain.is_finite() && settings.reference_gain > 0.0) {
        return Err(input(
            "gain",
            format!(
                "reference gain {} V/V; accepted a positive finite number",
                settings.reference_gain
            ),
        ));
    }
    if !(settings.passband_ref_hz.is_finite() && settings.passband_ref_hz >= 0.0) {
        return Err(input(
            "fc",
            "passband reference frequency must be 0 or positive".into(),
        ));
    }
    Ok(())
}

/// In-band test of one frequency against a mask: `(in passband, in stopband)`.
fn bands(mask: &Mask, f: f64) -> (bool, bool) {
    match (mask.pass, mask.stop) {
        (Edge::Single(fp), Edge::Single(fs)) => {
            if fp <= fs {
                (f <= fp, f >= fs)
            } else {
                (f >= fp, f <= fs)
            }
        }
        (Edge::Pair(pl, ph), Edge::Pair(sl, sh)) => (f >= pl && f <= ph, f <= sl || f >= sh),
        // Mixed edge kinds do not pass the link's validation; they check nothing.
        _ => (false, false),
    }
}

fn mask_edges(mask: &Mask) -> Vec<f64> {
    let mut v = Vec::new();
    for e in [mask.pass, mask.stop] {
        match e {
            Edge::Single(f) => v.push(f),
            Edge::Pair(a, b) => {
                v.push(a);
                v.push(b);
            }
        }
    }
    v
}

/// The dominant quadratic factor `z² + u·z + v` of `d` (ascending coefficients) by Bairstow's
/// iteration from `(u, v)`. Returns `None` when it does not converge.
pub(crate) fn bairstow(d: &[f64], u: f64, v: f64) -> Option<(f64, f64)> {
    const MAXN: usize = 32;
    let n = d.iter().rposition(|&c| c != 0.0)?;
    if !(2..MAXN).contains(&n) {
        return None;
    }
    let lead = d[n];
    if n == 2 {
        return Some((d[1] / lead, d[0] / lead));
    }
    let mut a = [0.0; MAXN];
    for (dst, src) in a.iter_mut().zip(&d[..=n]) {
        *dst = src / lead;
    }
    let mut b = [0.0; MAXN];
    let mut c = [0.0; MAXN];
    // Divisor z² − r·z − s with r = −u, s = −v.
    let (mut r, mut s) = (-u, -v);
    for _ in 0..60 {
        b[n] = a[n];
        b[n - 1] = a[n - 1] + r * b[n];
        for i in (0..n - 1).rev() {
            b[i] = a[i] + r * b[i + 1] + s * b[i + 2];
        }
        c[n] = b[n];
        c[n - 1] = b[n - 1] + r * c[n];
        for i in (1..n - 1).rev() {
            c[i] = b[i] + r * c[i + 1] + s * c[i + 2];
        }
        let det = c[2] * c[2] - c[3] * c[1];
        if det == 0.0 || !det.is_finite() {
            return None;
        }
        let dr = (-b[1] * c[2] + b[0] * c[3]) / det;
        let ds = (-b[0] * c[2] + b[1] * c[1]) / det;
        r += dr;
        s += ds;
        if !(r.is_finite() && s.is_finite()) {
            return None;
        }
        if dr.abs() <= 1e-14 * (r.abs() + s.abs().sqrt()) && ds.abs() <= 1e-14 * s.abs() {
            return Some((-r, -s));
        }
    }
    // Accept a factor whose remainder is negligible even if the last steps dithered.
    let scale = a[..=n].iter().fold(0.0f64, |m, x| m.max(x.abs()));
    (b[1].abs() + b[0].abs() <= 1e-12 * scale).then_some((-r, -s))
}

/// The dominant real root of `d` near `z0` by Newton's iteration.
pub(crate) fn newton_real(d: &[f64], mut z: f64) -> Option<f64> {
    let scale = d.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let mut value = f64::NAN;
    for _ in 0..60 {
        let mut p = 0.0;
        let mut dp = 0.0;
        for &c in d.iter().rev() {
            dp = dp * z + p;
            p = p * z + c;
        }
        value = p;
        let step = p / dp;
        if !step.is_finite() {
            return None;
        }
        z -= step;
        if step.abs() <= 1e-15 * z.abs() {
            return Some(z);
        }
    }
    (value.abs() <= 1e-10 * scale).then_some(z)
}

/// f0 (rad/s) and Q of the `order` smallest poles among `poles` (rad/s). Q is NaN for order 1.
pub(crate) fn dominant_w0_q(poles: &[Complex64], order: usize) -> Option<(f64, f64)> {
    let mut p: Vec<Complex64> = poles.to_vec();
    p.sort_by(|a, b| {
        a.norm()
            .partial_cmp(&b.norm())
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    match order {
        1 => {
            let r = p.iter().find(|z| z.im == 0.0)?;
            Some((-r.re, f64::NAN))
        }
        _ => {
            if p.len() < 2 {
                return None;
            }
            // The smallest pole and its partner (its conjugate, or the next real pole).
            let first = p[0];
            let second = if first.im != 0.0 {
                first.conj()
            } else {
                *p.iter().skip(1).find(|z| z.im == 0.0)?
            };
            let v = (first * second).re;
            let u = -(first + second).re;
            if v <= 0.0 || u == 0.0 {
                return None;
            }
            Some((v.sqrt(), v.sqrt() / u))
        }
    }
}

impl MonteCarlo {
    /// Prepares a study of `board` (its stages as built, its op-amp model).
    ///
    /// # Errors
    /// As [`MonteCarlo::from_stages`].
    pub fn new(
        board: &Board,
        mask: Option<&Mask>,
        settings: MonteCarloSettings,
    ) -> Result<MonteCarlo, AnalysisError> {
        let stages: Vec<StageNetlist> = board.stages.iter().map(|s| s.netlist.clone()).collect();
        MonteCarlo::from_stages(&stages, &board.op_amp, mask, settings)
    }

    /// Prepares a study of the board made of `stages` (in signal order) with op amp `op`.
    ///
    /// # Errors
    /// [`AnalysisError::Input`] naming the setting out of range (`runs` 1–100,000, `rtol`/`ctol`
    /// 0–50 %, `sigmas` 1–6, frequencies positive and ascending, percentiles 0–100, an override for
    /// a part that is not on the board: key `tol:REF`); [`AnalysisError::BadNetlist`] or
    /// [`AnalysisError::Singular`] when the nominal board cannot be analysed.
    pub fn from_stages(
        stages: &[StageNetlist],
        op: &OpAmp,
        mask: Option<&Mask>,
        settings: MonteCarloSettings,
    ) -> Result<MonteCarlo, AnalysisError> {
        validate(&settings)?;
        if stages.is_empty() {
            return Err(AnalysisError::BadNetlist("the board has no stages".into()));
        }
        let t = &settings.tolerances;
        for o in &t.overrides {
            let found = stages.iter().any(|s| {
                s.parts
                    .iter()
                    .any(|p| p.reference == o.reference && p.kind != PartKind::OpAmp)
            });
            if !found {
                return Err(input(
                    &format!("tol:{}", o.reference),
                    format!("no resistor or capacitor {} on the board", o.reference),
                ));
            }
        }
        let divisor = match t.distribution {
            PartDistribution::Gaussian { sigmas } => sigmas,
            PartDistribution::Uniform => 1.0,
        };
        let f = &settings.freqs_hz;
        let n_grid = f.len();
        let f_g = (f[0] * f[n_grid - 1]).sqrt();
        let w_g = 2.0 * PI * f_g;
        let mut nominal_values = Vec::new();
        let mut spread = Vec::new();
        let mut drawn = Vec::new();
        let mut runs = Vec::with_capacity(stages.len());
        let ideal = OpAmp::ideal();
        for net in stages {
            let compiled = Compiled::new(net, op)?;
            let assembled = compiled.assemble(net);
            let mut work = FitWork::new(&compiled);
            let value_offset = nominal_values.len();
            for p in &net.parts {
                let pct = match p.kind {
                    PartKind::OpAmp => 0.0,
                    PartKind::Resistor => t.resistor_pct,
                    PartKind::Capacitor => t.capacitor_pct,
                };
                let pct = t
                    .overrides
                    .iter()
                    .find(|o| o.reference == p.reference && p.kind != PartKind::OpAmp)
                    .map_or(pct, |o| o.pct);
                if p.kind != PartKind::OpAmp {
                    drawn.push(nominal_values.len());
                }
                nominal_values.push(if p.kind == PartKind::OpAmp {
                    0.0
                } else {
                    p.value
                });
                spread.push(pct / 100.0 / divisor);
            }
            // The stage order from the ideal-op-amp denominator; the nominal dominant factor from
            // the real one.
            let ideal_rat = super::poly::stage_transfer(net, &ideal)?;
            // Order 0: a stage without frequency-setting poles (a gain stage); it has no f0 or Q.
            let order = ideal_rat.den.degree().min(2);
            let rat = super::poly::fitted_rational(&compiled, &assembled, &mut work)?;
            let poles = rat.poles()?;
            let (w0, q) = if order == 0 {
                (f64::NAN, f64::NAN)
            } else {
                dominant_w0_q(&poles, order).ok_or_else(|| {
                    AnalysisError::NoConvergence(format!(
                        "no dominant pole {} found in a stage of order {order}",
                        if order == 2 { "pair" } else { "" }
                    ))
                })?
            };
            let mut fast = FastFit::new(&compiled, rat.scale_rad_s, w_g);
            fast.choose_pivots(&compiled, &assembled);
            let k = fast.n_coef();
            // A cubic denominator with one real pole well above the dominant pair: the fast split.
            let far_root_u = (order == 2 && rat.den.degree() == 3)
                .then(|| {
                    poles
                        .iter()
                        .filter(|p| p.im == 0.0 && p.norm() > 2.0 * w0)
                        .map(|p| p.re / w_g)
                        .next()
                })
                .flatten();
            let multi = Multilinear::new(&compiled, net, rat.scale_rad_s, w_g);
            let n_terms = multi.as_ref().map_or(0, Multilinear::n_terms);
            runs.push(StageRun {
                multi,
                far_root_u,
                compiled,
                assembled,
                fast,
                num_l: vec![[0.0; RUN_LANES]; k],
                den_l: vec![[0.0; RUN_LANES]; k],
                sq_n: vec![[0.0; RUN_LANES]; k],
                sq_d: vec![[0.0; RUN_LANES]; k],
                mono: vec![[0.0; RUN_LANES]; n_terms],
                scalar_values: vec![0.0; net.parts.len()],
                value_offset,
                n_parts: net.parts.len(),
                order,
                nominal_w0: w0,
                nominal_q: q,
            });
        }
        let mut eval_f: Vec<f64> = f.clone();
        let edges = mask.map(mask_edges).unwrap_or_default();
        eval_f.extend(edges.iter().copied());
        let ref_idx = eval_f.len();
        eval_f.push(settings.passband_ref_hz);
        let g2 = settings.reference_gain * settings.reference_gain;
        let mut lo_bound = Vec::with_capacity(eval_f.len());
        let mut hi_bound = Vec::with_capacity(eval_f.len());
        let mut stop_weight = Vec::with_capacity(eval_f.len());
        let mut has_stop = false;
        for (i, &fr) in eval_f.iter().enumerate() {
            let (in_pass, in_stop) = match mask {
                Some(m) if i != ref_idx => bands(m, fr),
                _ => (false, false),
            };
            let m = mask.copied();
            lo_bound.push(match (in_pass, m) {
                (true, Some(m)) => g2 * 10f64.powf(-m.apass_db / 10.0) * (1.0 - 1e-12),
                _ => 0.0,
            });
            hi_bound.push(match (in_stop, m) {
                (true, Some(m)) => g2 * 10f64.powf(-m.astop_db / 10.0) * (1.0 + 1e-12),
                _ => f64::INFINITY,
            });
            stop_weight.push(if in_stop { 1.0 } else { 0.0 });
            has_stop |= in_stop;
        }
        let x_eval: Vec<f64> = eval_f.iter().map(|fr| (fr / f_g) * (fr / f_g)).collect();
        let width = runs
            .iter()
            .map(|s| s.compiled.degree_bound + 1)
            .max()
            .unwrap_or(1);
        let n_stages = runs.len();
        let n_eval = x_eval.len();
        let runs_total = settings.runs;
        let batch = Batch {
            active: [false; RUN_LANES],
            failed: [false; RUN_LANES],
            values: nominal_values.iter().map(|&v| [v; RUN_LANES]).collect(),
            coef_n: vec![[0.0; RUN_LANES]; n_stages * width],
            coef_d: vec![[0.0; RUN_LANES]; n_stages * width],
            deg_n: vec![0; n_stages],
            deg_d: vec![0; n_stages],
            w0: vec![[f64::NAN; RUN_LANES]; n_stages],
            q: vec![[f64::NAN; RUN_LANES]; n_stages],
            h2: vec![[0.0; RUN_LANES]; n_eval],
            den: vec![[0.0; RUN_LANES]; n_eval],
            pass: [false; RUN_LANES],
            cut_lo_hz: [f64::NAN; RUN_LANES],
            cut_hi_hz: [f64::NAN; RUN_LANES],
            gain_db: [f64::NAN; RUN_LANES],
            atten_db: [f64::NAN; RUN_LANES],
        };
        let mut mc = MonteCarlo {
            rng: Xoshiro256PlusPlus::seed_from_u64(settings.seed),
            nominal_values,
            spread,
            drawn,
            stages: runs,
            x_eval,
            n_grid,
            ref_idx,
            lo_bound,
            hi_bound,
            stop_weight,
            has_mask: mask.is_some(),
            has_stop,
            w_g,
            width,
            isa: Isa::detect(),
            batch,
            done: 0,
            n_pass: 0,
            env_min: vec![[f64::INFINITY; RUN_LANES]; n_grid],
            env_max: vec![[0.0; RUN_LANES]; n_grid],
            samples_h2: Vec::new(),
            curves: Vec::new(),
            cut_lo: Vec::with_capacity(runs_total),
            cut_hi: Vec::with_capacity(runs_total),
            gain_db: Vec::with_capacity(runs_total),
            atten_db: Vec::with_capacity(runs_total),
            stage_f0: vec![Vec::with_capacity(runs_total); n_stages],
            stage_q: vec![Vec::with_capacity(runs_total); n_stages],
            nominal: RunResult::default(),
            nominal_h2: Vec::new(),
            nominal_f0q: Vec::new(),
            fallbacks: 0,
            cutoff_level: {
                let CutoffDefinition::Attenuation { db } = settings.cutoff;
                g2 * 10f64.powf(-db / 10.0)
            },
            settings,
        };
        // The nominal board: the same path, in lane 0, with every part at its nominal value.
        mc.batch.active[0] = true;
        mc.run_batch(None);
        if mc.batch.failed[0] {
            return Err(AnalysisError::Singular("a stage of a tolerance run".into()));
        }
        let b = &mc.batch;
        mc.nominal = RunResult {
            cut_lo_hz: b.cut_lo_hz[0],
            cut_hi_hz: b.cut_hi_hz[0],
            gain_db: b.gain_db[0],
            atten_db: b.atten_db[0],
        };
        mc.nominal_h2 = b.h2[..n_grid].iter().map(|v| v[0]).collect();
        mc.nominal_f0q = b.w0.iter().zip(&b.q).map(|(w, q)| (w[0], q[0])).collect();
        Ok(mc)
    }

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

    /// One batch: with `Some((first, last))` the runs of lanes `first..last` are drawn, analysed
    /// and recorded; with `None` the batch's current values are analysed for the lanes already
    /// marked active (the nominal board), and nothing is recorded.
    fn run_batch(&mut self, lanes: Option<(usize, usize)>) {
        match self.isa {
            #[cfg(target_arch = "x86_64")]
            // SAFETY: `Isa::detect` chose AVX-512 only when the processor supports AVX-512F.
            Isa::Avx512 => unsafe { self.run_batch_avx512(lanes) },
            #[cfg(target_arch = "x86_64")]
            // SAFETY: `Isa::detect` chose AVX2 only when the processor supports AVX2.
            Isa::Avx2 => unsafe { self.run_batch_avx2(lanes) },
            _ => self.run_batch_body::<lanes::Plain>(lanes),
        }
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx512f")]
    unsafe fn run_batch_avx512(&mut self, lanes: Option<(usize, usize)>) {
        self.run_batch_body::<lanes::Avx512>(lanes);
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn run_batch_avx2(&mut self, lanes: Option<(usize, usize)>) {
        self.run_batch_body::<lanes::Avx2>(lanes);
    }

    /// The batch work, inlined into each compiled form of [`MonteCarlo::run_batch`].
    #[inline(always)]
    fn run_batch_body<V: Lane8>(&mut self, lanes: Option<(usize, usize)>) {
        if let Some((first, last)) = lanes {
            self.draw(first, last);
        }
        self.form_batch::<V>();
        cascade_kernel_lanes_body::<V>(
            &self.x_eval,
            &self.batch.coef_n,
            &self.batch.coef_d,
            &self.batch.deg_n,
            &self.batch.deg_d,
            self.width,
            &mut self.batch.den,
            &mut self.batch.h2,
        );
        self.evaluate_batch::<V>();
        if let Some((first, last)) = lanes {
            self.record_batch::<V>(first, last);
        }
    }

    /// Draws the runs of lanes `first..last`, run after run, part after part (the order of the
    /// module docs). The other lanes keep values of earlier runs: they are analysed (the lanes are
    /// computed together) but not recorded.
    #[inline(always)]
    fn draw(&mut self, first: usize, last: usize) {
        let b = &mut self.batch;
        for l in 0..RUN_LANES {
            b.active[l] = (first..last).contains(&l);
            b.failed[l] = false;
        }
        let rng = &mut self.rng;
        // The distribution is chosen once per batch, not per draw.
        match self.settings.tolerances.distribution {
            PartDistribution::Gaussian { .. } => {
                for l in first..last {
                    for &i in &self.drawn {
                        let z: f64 = StandardNormal.sample(rng);
                        let factor = (1.0 + self.spread[i] * z).max(1e-3);
                        b.values[i][l] = self.nominal_values[i] * factor;
                    }
                }
            }
            PartDistribution::Uniform => {
                for l in first..last {
                    for &i in &self.drawn {
                        let u: f64 = rand_distr::Standard.sample(rng);
                        let z = 2.0 * u - 1.0;
                        let factor = (1.0 + self.spread[i] * z).max(1e-3);
                        b.values[i][l] = self.nominal_values[i] * factor;
                    }
                }
            }
        }
    }

    /// Forms every stage for the batch's values: N and D, the dominant factor's f0 and Q, and the
    /// |N|², |D|² coefficient table of the kernel.
    #[inline(always)]
    fn form_batch<V: Lane8>(&mut self) {
        let MonteCarlo {
            stages,
            batch,
            fallbacks,
            w_g,
            width,
            ..
        } = self;
        let (w_g, width) = (*w_g, *width);
        for (k, st) in stages.iter_mut().enumerate() {
            let vals = &batch.values[st.value_offset..st.value_offset + st.n_parts];
            if let Some(ml) = st.multi.as_ref() {
                ml.evaluate_lanes::<V>(vals, &mut st.mono, &mut st.num_l, &mut st.den_l);
            } else {
                for l in 0..RUN_LANES {
                    if !batch.active[l] || batch.failed[l] {
                        continue;
                    }
                    for (dst, v) in st.scalar_values.iter_mut().zip(vals) {
                        *dst = v[l];
                    }
                    if !st
                        .fast
                        .fit_values(&st.compiled, &st.scalar_values, &mut st.assembled)
                    {
                        batch.failed[l] = true;
                        continue;
                    }
                    for ((n, d), (&nu, &du)) in st
                        .num_l
                        .iter_mut()
                        .zip(st.den_l.iter_mut())
                        .zip(st.fast.num_u.iter().zip(&st.fast.den_u))
                    {
                        n[l] = nu;
                        d[l] = du;
                    }
                }
            }
            st.fast.trim_lanes(&mut st.num_l);
            st.fast.trim_lanes(&mut st.den_l);
            let live = live_lanes(batch);
            // Dominant factor, in u = s/ω_g, from the nominal one: the cubic split in lanes where
            // the denominator is a cubic, the scalar iterations elsewhere.
            let mut w0 = [f64::NAN; RUN_LANES];
            let mut q = [f64::NAN; RUN_LANES];
            let mut solved = [false; RUN_LANES];
            if let (2, Some(r0), true) = (st.order, st.far_root_u, st.den_l.len() >= 4) {
                let mut cubic = [false; RUN_LANES];
                for (l, c) in cubic.iter_mut().enumerate() {
                    *c = live[l] && st.den_l.iter().rposition(|v| v[l] != 0.0) == Some(3);
                }
                let (u, v, ok) = split_cubic_lanes(&st.den_l, r0, cubic);
                for l in 0..RUN_LANES {
                    if ok[l] {
                        w0[l] = v[l].sqrt() * w_g;
                        q[l] = v[l].sqrt() / u[l];
                        solved[l] = true;
                    }
                }
            }
            for l in 0..RUN_LANES {
                if solved[l] || !live[l] || st.order == 0 {
                    continue;
                }
                let d: Vec<f64> = st.den_l.iter().map(|v| v[l]).collect();
                (w0[l], q[l]) = if st.order == 2 {
                    let u0 = st.nominal_w0 / st.nominal_q / w_g;
                    let v0 = (st.nominal_w0 / w_g) * (st.nominal_w0 / w_g);
                    match bairstow(&d, u0, v0) {
                        Some((u, v)) if v > 0.0 && u != 0.0 => (v.sqrt() * w_g, v.sqrt() / u),
                        _ => {
                            *fallbacks += 1;
                            let poles: Vec<Complex64> = Poly::new(d)
                                .roots()
                                .unwrap_or_default()
                                .into_iter()
                                .map(|p| p * w_g)
                                .collect();
                            dominant_w0_q(&poles, 2).unwrap_or((f64::NAN, f64::NAN))
                        }
                    }
                } else {
                    match newton_real(&d, -st.nominal_w0 / w_g) {
                        Some(z) => (-z * w_g, f64::NAN),
                        None => (f64::NAN, f64::NAN),
                    }
                };
            }
            batch.w0[k] = w0;
            batch.q[k] = q;
            let n_coef = magnitude_squared_lanes(&st.num_l, &mut st.sq_n);
            magnitude_squared_lanes(&st.den_l, &mut st.sq_d);
            let mut norm = [0.0f64; RUN_LANES];
            for c in &st.sq_d {
                for l in 0..RUN_LANES {
                    norm[l] = norm[l].max(c[l].abs());
                }
            }
            for v in norm.iter_mut() {
                *v = if *v > 0.0 { 1.0 / *v } else { 1.0 };
            }
            let n_used = n_coef.min(width);
            let row_n = &mut batch.coef_n[k * width..(k + 1) * width];
            let row_d = &mut batch.coef_d[k * width..(k + 1) * width];
            for (j, (rn, rd)) in row_n.iter_mut().zip(row_d.iter_mut()).enumerate() {
                if j < n_used {
                    for l in 0..RUN_LANES {
                        rn[l] = st.sq_n[j][l] * norm[l];
                        rd[l] = st.sq_d[j][l] * norm[l];
                    }
                } else {
                    *rn = [0.0; RUN_LANES];
                    *rd = [0.0; RUN_LANES];
                }
            }
            batch.deg_n[k] = batch_degree(row_n, &live);
            batch.deg_d[k] = batch_degree(row_d, &live);
        }
    }

    /// Yield, cutoffs, passband gain and stopband attenuation of the batch's runs from their |H|².
    #[inline(always)]
    fn evaluate_batch<V: Lane8>(&mut self) {
        let level = V::splat(self.cutoff_level);
        let n_grid = self.n_grid;
        let b = &self.batch;
        let live = live_lanes(b);
        // Yield: linear comparisons only, without branches.
        let (zero, one) = (V::splat(0.0), V::splat(1.0));
        let mut viol = zero;
        let mut worst = zero;
        for (((v, &lo), &hi), &w) in
            b.h2.iter()
                .zip(&self.lo_bound)
                .zip(&self.hi_bound)
                .zip(&self.stop_weight)
        {
            let v = V::load(v);
            // A NaN fails both comparisons and so counts as a violation.
            let inside = V::and(v.ge(V::splat(lo)), v.le(V::splat(hi)));
            viol = viol.add(V::select(inside, zero, one));
            worst = v.mul(V::splat(w)).max_keep(worst);
        }
        let grid = &b.h2[..n_grid];
        let want_upper = matches!(
            self.settings.class,
            ResponseClass::LowPass | ResponseClass::BandPass
        );
        let want_lower = matches!(
            self.settings.class,
            ResponseClass::HighPass | ResponseClass::BandPass
        );
        // Grid indices are carried as f64 lanes (exact), −1 for none.
        let mut cut_hi = [f64::NAN; RUN_LANES];
        if want_upper {
            // Upper edge: the highest grid point still at or above the level, then the next one.
            let mut last = V::splat(-1.0);
            for (i, v) in grid.iter().enumerate() {
                last = V::select(V::load(v).ge(level), V::splat(i as f64), last);
            }
            let last = index_of::<V>(last);
            let mut a = [1.0; RUN_LANES];
            let mut bx = [1.0; RUN_LANES];
            let mut go = [false; RUN_LANES];
            for l in 0..RUN_LANES {
                if let (true, Some(i)) = (live[l], last[l]) {
                    if i + 1 < n_grid {
                        a[l] = self.x_eval[i];
                        bx[l] = self.x_eval[i + 1];
                        go[l] = true;
                    }
                }
            }
            cut_hi = self.refine_crossing_lanes::<V>(a, bx, go);
        }
        let mut cut_lo = [f64::NAN; RUN_LANES];
        if want_lower {
            let mut end = V::splat(n_grid as f64);
            if want_upper {
                // Band-pass: the lower edge lies below the (first) peak.
                let mut bi = zero;
                let mut bv = zero;
                for (i, v) in grid.iter().enumerate() {
                    let v = V::load(v);
                    let higher = bv.lt(v);
                    bi = V::select(higher, V::splat(i as f64), bi);
                    bv = V::select(higher, v, bv);
                }
                end = bi.add(one);
            }
            // The first grid point at or above the level below the end.
            let mut first = V::splat(-1.0);
            for (i, v) in grid.iter().enumerate().rev() {
                let at = V::splat(i as f64);
                let hit = V::and(V::load(v).ge(level), at.lt(end));
                first = V::select(hit, at, first);
            }
            let first = index_of::<V>(first);
            let mut a = [1.0; RUN_LANES];
            let mut bx = [1.0; RUN_LANES];
            let mut go = [false; RUN_LANES];
            for l in 0..RUN_LANES {
                if let (true, Some(i)) = (live[l], first[l]) {
                    if i > 0 {
                        a[l] = self.x_eval[i - 1];
                        bx[l] = self.x_eval[i];
                        go[l] = true;
                    }
                }
            }
            cut_lo = self.refine_crossing_lanes::<V>(a, bx, go);
        }
        let g2 = self.settings.reference_gain * self.settings.reference_gain;
        let gain =
            b.h2.get(self.ref_idx)
                .copied()
                .unwrap_or([f64::NAN; RUN_LANES]);
        let has_stop = self.has_stop;
        let (mut viol_l, mut worst_l) = ([0.0; RUN_LANES], [0.0; RUN_LANES]);
        viol.store(&mut viol_l);
        worst.store(&mut worst_l);
        let b = &mut self.batch;
        for l in 0..RUN_LANES {
            b.pass[l] = viol_l[l] == 0.0;
            b.cut_lo_hz[l] = cut_lo[l];
            b.cut_hi_hz[l] = cut_hi[l];
            if live[l] {
                b.gain_db[l] = 10.0 * gain[l].log10();
                b.atten_db[l] = if has_stop {
                    10.0 * (g2 / worst_l[l]).log10()
                } else {
                    f64::NAN
                };
            }
        }
    }

    /// The crossing of `level` between `a[l]` and `b[l]` (values of `x = (f/f_g)²` with |H|² on
    /// either side of it) for every lane with `go[l]`, in Hz (NaN elsewhere), to a relative
    /// accuracy of about 1e-11 in frequency: the Illinois variant of regula falsi on
    /// `|H|²/level − 1` over x, with `level` the cutoff level (smooth there, and no exponentials per step). The lanes iterate
    /// together, each one frozen once it has converged, so each lane's result is the one a
    /// scalar iteration of that run gives.
    #[inline(always)]
    fn refine_crossing_lanes<V: Lane8>(
        &self,
        mut a: RunLanes,
        mut b: RunLanes,
        go: [bool; RUN_LANES],
    ) -> RunLanes {
        let inv = V::splat(1.0 / self.cutoff_level);
        let fg = self.w_g / (2.0 * PI);
        let mut out = [f64::NAN; RUN_LANES];
        if !go.iter().any(|&v| v) {
            return out;
        }
        let mut ga = self.level_gap::<V>(&a, inv);
        let mut gb = self.level_gap::<V>(&b, inv);
        let mut live = go;
        for l in 0..RUN_LANES {
            if !live[l] {
                continue;
            }
            if !(ga[l].is_finite() && gb[l].is_finite()) || ga[l] * gb[l] > 0.0 {
                live[l] = false;
            } else if ga[l] == 0.0 {
                out[l] = fg * a[l].sqrt();
                live[l] = false;
            }
        }
        let mut side = [0i32; RUN_LANES];
        let mut c = a;
        for _ in 0..100 {
            if !live.iter().any(|&v| v) {
                break;
            }
            let mut converged = [false; RUN_LANES];
            for l in 0..RUN_LANES {
                let c_new = (a[l] * gb[l] - b[l] * ga[l]) / (gb[l] - ga[l]);
                converged[l] = (c_new - c[l]).abs() <= 2e-11 * c_new.abs();
                c[l] = if live[l] { c_new } else { c[l] };
            }
            let gc = self.level_gap::<V>(&c, inv);
            for l in 0..RUN_LANES {
                if !live[l] {
                    continue;
                }
                if !gc[l].is_finite() {
                    live[l] = false;
                } else if gc[l] == 0.0 || converged[l] {
                    out[l] = fg * c[l].sqrt();
                    live[l] = false;
                } else if gc[l] * gb[l] > 0.0 {
                    b[l] = c[l];
                    gb[l] = gc[l];
                    if side[l] == -1 {
                        ga[l] *= 0.5;
                    }
                    side[l] = -1;
                } else {
                    a[l] = c[l];
                    ga[l] = gc[l];
                    if side[l] == 1 {
                        gb[l] *= 0.5;
                    }
                    side[l] = 1;
                }
            }
        }
        for l in 0..RUN_LANES {
            if live[l] {
                out[l] = fg * c[l].sqrt();
            }
        }
        out
    }

    /// `|H|²·inv − 1` of the batch's cascades, each lane at its own `x[l]` (the function whose
    /// zero the cutoff search finds, with `inv` the inverse of the cutoff level).
    #[inline(always)]
    fn level_gap<V: Lane8>(&self, x: &RunLanes, inv: V) -> RunLanes {
        let b = &self.batch;
        let h = h2_lanes::<V>(&b.coef_n, &b.coef_d, &b.deg_n, &b.deg_d, self.width, x);
        let mut out = [0.0; RUN_LANES];
        h.mul(inv).sub(V::splat(1.0)).store(&mut out);
        out
    }

    /// Adds the batch's runs of lanes `first..last` to the results, in run order.
    #[inline(always)]
    fn record_batch<V: Lane8>(&mut self, first: usize, last: usize) {
        let n_grid = self.n_grid;
        let live = live_lanes(&self.batch);
        let grid = &mut self.batch.h2[..n_grid];
        if live.iter().any(|&v| !v) {
            // Lanes without a finished run must not reach the envelope: NaN never wins a
            // comparison below.
            let keep = V::from_bools(live);
            let nan = V::splat(f64::NAN);
            for v in grid.iter_mut() {
                V::select(keep, V::load(v), nan).store(v);
            }
        }
        for ((mn, mx), v) in self
            .env_min
            .iter_mut()
            .zip(self.env_max.iter_mut())
            .zip(grid.iter())
        {
            let v = V::load(v);
            v.min_keep(V::load(mn)).store(mn);
            v.max_keep(V::load(mx)).store(mx);
        }
        // The lane group of this batch inside its sample block (blocks start NaN-filled, which
        // marks a run without readings).
        let group_run = self.done - first;
        let block = group_run / SAMPLE_BLOCK;
        let base = block * SAMPLE_BLOCK * n_grid + group_run % SAMPLE_BLOCK;
        if self.samples_h2.len() < (block + 1) * SAMPLE_BLOCK * n_grid {
            self.samples_h2
                .resize((block + 1) * SAMPLE_BLOCK * n_grid, f32::NAN);
        }
        let samples = &mut self.samples_h2[base..];
        if first == 0 && last == RUN_LANES && live.iter().all(|&v| v) {
            for (dst, v) in samples.chunks_mut(SAMPLE_BLOCK).zip(grid.iter()) {
                if let Some(d) = dst.get_mut(..RUN_LANES).and_then(|d| d.try_into().ok()) {
                    V::load(v).store_f32(d);
                }
            }
        } else {
            for (dst, v) in samples.chunks_mut(SAMPLE_BLOCK).zip(grid.iter()) {
                for l in first..last {
                    if live[l] {
                        if let Some(d) = dst.get_mut(l) {
                            *d = v[l] as f32;
                        }
                    }
                }
            }
        }
        let b = &self.batch;
        for l in first..last {
            if b.failed[l] {
                // A run whose matrices turn singular counts as a failed board with no readings.
                self.cut_lo.push(f64::NAN);
                self.cut_hi.push(f64::NAN);
                self.gain_db.push(f64::NAN);
                self.atten_db.push(f64::NAN);
                for k in 0..self.stages.len() {
                    self.stage_f0[k].push(f64::NAN);
                    self.stage_q[k].push(f64::NAN);
                }
                self.fallbacks += 1;
            } else {
                self.n_pass += usize::from(b.pass[l]);
                self.cut_lo.push(b.cut_lo_hz[l]);
                self.cut_hi.push(b.cut_hi_hz[l]);
                self.gain_db.push(b.gain_db[l]);
                self.atten_db.push(b.atten_db[l]);
                for (k, (w0, q)) in b.w0.iter().zip(&b.q).enumerate() {
                    self.stage_f0[k].push(w0[l] / (2.0 * PI));
                    self.stage_q[k].push(q[l]);
                }
            }
            self.done += 1;
        }
    }

    /// Works out the percentile curves of up to `max_points` more grid points of the finished
    /// runs, and returns how many grid points are left. [`MonteCarlo::finish`] does what is
    /// left; summarizing a few points at a time first keeps each piece of work short (the page
    /// stays responsive) and gives the same numbers. A [`MonteCarlo::step`] afterwards makes the
    /// summary start over, since its runs change every curve.
    pub fn summarize(&mut self, max_points: usize) -> usize {
        let n = self.done;
        let n_grid = self.n_grid;
        let pct = &self.settings.percentiles;
        if self.curves.is_empty() {
            self.curves = pct
                .iter()
                .map(|&p| PercentileCurve {
                    percentile: p,
                    db: Vec::with_capacity(n_grid),
                })
                .collect();
        }
        let start = self.curves.first().map_or(n_grid, |c| c.db.len());
        let end = start.saturating_add(max_points).min(n_grid);
        // Frequencies are gathered a group at a time: a block's rows of the group are contiguous,
        // so the table is read front to back instead of one line per block and frequency.
        const GROUP: usize = 8;
        let mut columns: Vec<Vec<f32>> = vec![Vec::with_capacity(n); GROUP.min(end - start)];
        let mut scratch = PercentileScratch::default();
        let n_blocks = n.div_ceil(SAMPLE_BLOCK);
        for f0 in (start..end).step_by(GROUP) {
            let group = GROUP.min(end - f0);
            for c in columns.iter_mut() {
                c.clear();
            }
            for b in 0..n_blocks {
                let count = SAMPLE_BLOCK.min(n - b * SAMPLE_BLOCK);
                let row0 = b * SAMPLE_BLOCK * n_grid + f0 * SAMPLE_BLOCK;
                let rows = &self.samples_h2[row0..row0 + group * SAMPLE_BLOCK];
                for (c, row) in columns.iter_mut().zip(rows.chunks_exact(SAMPLE_BLOCK)) {
                    c.extend_from_slice(&row[..count]);
                }
            }
            for c in columns.iter_mut().take(group) {
                // NaN marks a run without readings (and a reading that is not a number).
                if c.iter().any(|v| v.is_nan()) {
                    c.retain(|v| !v.is_nan());
                }
                let values = percentiles_f32_with(c, pct, &mut scratch);
                for (curve, v) in self.curves.iter_mut().zip(values) {
                    curve.db.push(power_db(v));
                }
            }
        }
        n_grid - end
    }

    /// The results of the runs done so far.
    pub fn finish(mut self) -> Summary {
        self.summarize(usize::MAX);
        let n = self.done;
        let pct = &self.settings.percentiles;
        let curves = std::mem::take(&mut self.curves);
        let nominal_db: Vec<f64> = self.nominal_h2.iter().map(|&v| power_db(v)).collect();
        let (env_min, env_max) = if n == 0 {
            (nominal_db.clone(), nominal_db.clone())
        } else {
            // The lanes' extremes reduced with the comparisons of the runs themselves.
            (
                self.env_min
                    .iter()
                    .map(|v| {
                        power_db(
                            v.iter()
                                .fold(f64::INFINITY, |m, &x| if x < m { x } else { m }),
                        )
                    })
                    .collect(),
                self.env_max
                    .iter()
                    .map(|v| power_db(v.iter().fold(0.0, |m, &x| if x > m { x } else { m })))
                    .collect(),
            )
        };
        let mut warnings = Vec::new();
        let mut cutoffs = Vec::new();
        let class = self.settings.class;
        if matches!(class, ResponseClass::HighPass | ResponseClass::BandPass) {
            cutoffs.push(CutoffSpread {
                side: CutoffSide::Lower,
                hz: spread_of(self.nominal.cut_lo_hz, self.cut_lo, pct),
            });
        }
        if matches!(class, ResponseClass::LowPass | ResponseClass::BandPass) {
            cutoffs.push(CutoffSpread {
                side: CutoffSide::Upper,
                hz: spread_of(self.nominal.cut_hi_hz, self.cut_hi, pct),
            });
        }
        for c in &cutoffs {
            if c.hz.n_missing > 0 {
                warnings.push(format!(
                    "{} of {n} runs have no {} cutoff crossing inside the frequency range",
                    c.hz.n_missing,
                    match c.side {
                        CutoffSide::Lower => "lower",
                        CutoffSide::Upper => "upper",
                    }
                ));
            }
        }
        if self.fallbacks > 0 {
            warnings.push(format!(
                "{} stage fits needed the slow root finder or failed",
                self.fallbacks
            ));
        }
        let stages = self
            .stage_f0
            .into_iter()
            .zip(self.stage_q)
            .zip(self.stages.iter().zip(&self.nominal_f0q))
            .map(|((f0, q), (st, &(w0n, qn)))| StageSpread {
                f0_hz: spread_of(w0n / (2.0 * PI), f0, pct),
                q: (st.order == 2).then(|| spread_of(qn, q, pct)),
            })
            .collect();
        Summary {
            runs: n,
            runs_requested: self.settings.runs,
            seed: self.settings.seed,
            tolerances: self.settings.tolerances.clone(),
            yield_fraction: (self.has_mask && n > 0).then(|| self.n_pass as f64 / n as f64),
            n_pass: self.has_mask.then_some(self.n_pass),
            freqs_hz: self.settings.freqs_hz.clone(),
            nominal_db,
            envelope: Envelope {
                min_db: env_min,
                max_db: env_max,
                percentiles: curves,
            },
            cutoffs,
            passband_gain_db: spread_of(self.nominal.gain_db, self.gain_db, pct),
            stopband_attenuation_db: self
                .has_stop
                .then(|| spread_of(self.nominal.atten_db, self.atten_db, pct)),
            stages,
            warnings,
        }
    }
}

/// Lanes holding a run of the batch that has not failed.
#[inline(always)]
fn live_lanes(b: &Batch) -> [bool; RUN_LANES] {
    let mut live = [false; RUN_LANES];
    for (l, v) in live.iter_mut().enumerate() {
        *v = b.active[l] && !b.failed[l];
    }
    live
}

/// The highest index of a nonzero coefficient of `row` over the `live` lanes (0 when none).
#[inline(always)]
fn batch_degree(row: &[RunLanes], live: &[bool; RUN_LANES]) -> usize {
    (0..RUN_LANES)
        .filter(|&l| live[l])
        .map(|l| row.iter().rposition(|c| c[l] != 0.0).unwrap_or(0))
        .max()
        .unwrap_or(0)
}

/// The quadratic factor `z² + u·z + v` of the cubic `d` (ascending, `d[j][l]` coefficient `j` of
/// lane `l`) that remains when its real root near `r0` is divided out, for every lane with
/// `use_lane[l]`: Halley's iteration for the root (cubic convergence, two or three steps from the
/// nominal root), then backward deflation (`v = −d0/(d3·r)`, `u = (v − d1/d3)/r`), which is the
/// stable direction for a root larger than the others. Returns `(u, v, ok)`; `ok[l]` is false
/// when the iteration failed or the factor is not a stable pair. The lanes iterate together, each
/// one frozen once converged, so a lane's result does not depend on the others.
#[inline(always)]
fn split_cubic_lanes(
    d: &[RunLanes],
    r0: f64,
    use_lane: [bool; RUN_LANES],
) -> (RunLanes, RunLanes, [bool; RUN_LANES]) {
    let (mut a0, mut a1, mut a2) = ([0.0; RUN_LANES], [0.0; RUN_LANES], [0.0; RUN_LANES]);
    if let [d0, d1, d2, d3, ..] = d {
        for l in 0..RUN_LANES {
            let lead = d3[l];
            a0[l] = d0[l] / lead;
            a1[l] = d1[l] / lead;
            a2[l] = d2[l] / lead;
        }
    } else {
        return ([0.0; RUN_LANES], [0.0; RUN_LANES], [false; RUN_LANES]);
    }
    let mut r = [r0; RUN_LANES];
    let mut live = use_lane;
    let mut done = [false; RUN_LANES];
    for _ in 0..40 {
        if !live.iter().any(|&v| v) {
            break;
        }
        for l in 0..RUN_LANES {
            let rl = r[l];
            let p = ((rl + a2[l]) * rl + a1[l]) * rl + a0[l];
            let dp = (3.0 * rl + 2.0 * a2[l]) * rl + a1[l];
            let ddp = 6.0 * rl + 2.0 * a2[l];
            let step = 2.0 * p * dp / (2.0 * dp * dp - p * ddp);
            let moving = live[l] & step.is_finite();
            let r_new = rl - step;
            r[l] = if moving { r_new } else { rl };
            let converged = moving & (step.abs() <= 1e-15 * r_new.abs());
            done[l] |= converged;
            live[l] = moving & !converged;
        }
    }
    let (mut u, mut v, mut ok) = ([0.0; RUN_LANES], [0.0; RUN_LANES], [false; RUN_LANES]);
    for l in 0..RUN_LANES {
        v[l] = -a0[l] / r[l];
        u[l] = (v[l] - a1[l]) / r[l];
        ok[l] = done[l] & (v[l] > 0.0) & (u[l] > 0.0) & u[l].is_finite();
    }
    (u, v, ok)
}

/// Grid indices carried in f64 lanes (exact), −1 for none, as indices.
#[inline(always)]
fn index_of<V: Lane8>(lanes: V) -> [Option<usize>; RUN_LANES] {
    let mut f = [0.0; RUN_LANES];
    lanes.store(&mut f);
    f.map(|v| (v >= 0.0).then_some(v as usize))
}

/// Horner's rule from coefficient `deg` of `row` (ascending) down, each lane at its own `x`.
#[inline(always)]
fn horner_lanes<V: Lane8>(row: &[RunLanes], deg: usize, x: V) -> V {
    let top = deg.min(row.len().saturating_sub(1));
    let mut p = match row.get(top) {
        Some(c) => V::load(c),
        None => V::splat(1.0),
    };
    for c in row[..top].iter().rev() {
        p = p.mul(x).add(V::load(c));
    }
    p
}

/// |H|² of the batch's cascades, each lane at its own `x[l] = (f/f_g)²` (the cutoff search's
/// evaluations). The stages are multiplied in groups of four, `(P1·P2)·(P3·P4)`, the order the
/// study has always used for these evaluations.
#[inline(always)]
fn h2_lanes<V: Lane8>(
    coef_n: &[RunLanes],
    coef_d: &[RunLanes],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    x: &RunLanes,
) -> V {
    let x = V::load(x);
    let one = V::splat(1.0);
    let mut num = one;
    let mut den = one;
    let n_stages = deg_n.len().min(deg_d.len());
    for chunk in (0..n_stages).step_by(4) {
        let mut pn = [one; 4];
        let mut pd = [one; 4];
        for s in 0..4 {
            let k = chunk + s;
            if k < n_stages {
                pn[s] = horner_lanes(&coef_n[k * width..(k + 1) * width], deg_n[k], x);
                pd[s] = horner_lanes(&coef_d[k * width..(k + 1) * width], deg_d[k], x);
            }
        }
        num = num.mul(pn[0].mul(pn[1]).mul(pn[2].mul(pn[3])));
        den = den.mul(pd[0].mul(pd[1]).mul(pd[2].mul(pd[3])));
    }
    num.div(den)
}

/// The branch-free cascade kernel, [`RUN_LANES`] runs side by side:
/// `out[f][l] = Π_k Pn_k,l(x_f) / Π_k Pd_k,l(x_f)`, where stage `k`'s polynomials of run `l` are
/// `coef_n[k·width + j][l]` (ascending in x, `width` coefficients per stage; Horner's rule starts
/// at degree `deg_n[k]`, `deg_d[k]`, and any higher coefficient must be zero). `den` is scratch
/// of the length of `out`.
///
/// The work goes stage by stage over all frequencies (the products so far wait in `out` and
/// `den`), so each pass has a fixed degree and no branches, and its frequencies are independent.
/// The products are formed in stage order and divided at the end, as a frequency-by-frequency
/// evaluation would. On x86-64 processors with AVX-512F or AVX2 it runs on those registers
/// (selected at run time), elsewhere (wasm) as plain code. Rust does not fuse multiplies and
/// adds, and every lane does the same IEEE operations in the same order, so the results are
/// bit-identical on every path.
#[allow(clippy::too_many_arguments)]
pub fn cascade_kernel_lanes(
    x: &[f64],
    coef_n: &[RunLanes],
    coef_d: &[RunLanes],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    den: &mut [RunLanes],
    out: &mut [RunLanes],
) {
    match Isa::detect() {
        #[cfg(target_arch = "x86_64")]
        // SAFETY: the processor supports AVX-512F (`Isa::detect`).
        Isa::Avx512 => unsafe {
            cascade_kernel_lanes_avx512(x, coef_n, coef_d, deg_n, deg_d, width, den, out)
        },
        #[cfg(target_arch = "x86_64")]
        // SAFETY: the processor supports AVX2 (`Isa::detect`).
        Isa::Avx2 => unsafe {
            cascade_kernel_lanes_avx2(x, coef_n, coef_d, deg_n, deg_d, width, den, out)
        },
        _ => cascade_kernel_lanes_body::<lanes::Plain>(
            x, coef_n, coef_d, deg_n, deg_d, width, den, out,
        ),
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
#[allow(clippy::too_many_arguments)]
unsafe fn cascade_kernel_lanes_avx2(
    x: &[f64],
    coef_n: &[RunLanes],
    coef_d: &[RunLanes],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    den: &mut [RunLanes],
    out: &mut [RunLanes],
) {
    cascade_kernel_lanes_body::<lanes::Avx2>(x, coef_n, coef_d, deg_n, deg_d, width, den, out);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
#[allow(clippy::too_many_arguments)]
unsafe fn cascade_kernel_lanes_avx512(
    x: &[f64],
    coef_n: &[RunLanes],
    coef_d: &[RunLanes],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    den: &mut [RunLanes],
    out: &mut [RunLanes],
) {
    cascade_kernel_lanes_body::<lanes::Avx512>(x, coef_n, coef_d, deg_n, deg_d, width, den, out);
}

/// Where a stage's pass stands in the cascade.
#[derive(Clone, Copy, PartialEq, Eq)]
enum StagePass {
    /// The only stage: `out = Pn/Pd`.
    Only,
    /// The first of several: `out = Pn`, `den = Pd`.
    First,
    /// A middle one: `out ·= Pn`, `den ·= Pd`.
    Middle,
    /// The last of several: `out = (out·Pn)/(den·Pd)`.
    Last,
}

#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn cascade_kernel_lanes_body<V: Lane8>(
    x: &[f64],
    coef_n: &[RunLanes],
    coef_d: &[RunLanes],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    den: &mut [RunLanes],
    out: &mut [RunLanes],
) {
    let n_stages = deg_n.len().min(deg_d.len());
    if width == 0 || coef_n.len() < n_stages * width || coef_d.len() < n_stages * width {
        return;
    }
    let n = x.len().min(den.len()).min(out.len());
    let (x, den, out) = (&x[..n], &mut den[..n], &mut out[..n]);
    for k in 0..n_stages {
        let pass = match (k, n_stages) {
            (_, 1) => StagePass::Only,
            (0, _) => StagePass::First,
            (k, n) if k + 1 == n => StagePass::Last,
            _ => StagePass::Middle,
        };
        let row_n = &coef_n[k * width..(k + 1) * width];
        let row_d = &coef_d[k * width..(k + 1) * width];
        let nn = deg_n[k].min(width - 1) + 1;
        let nd = deg_d[k].min(width - 1) + 1;
        // The common sizes with fixed coefficient counts (unrolled Horner loops).
        macro_rules! fixed {
            ($($a:literal, $b:literal);*) => {
                match (nn, nd) {
                    $(($a, $b) => stage_pass::<V, $a, $b>(x, row_n, row_d, pass, den, out),)*
                    _ => stage_pass_any::<V>(x, &row_n[..nn], &row_d[..nd], pass, den, out),
                }
            };
        }
        fixed!(1, 1; 1, 2; 1, 3; 1, 4; 2, 1; 2, 2; 2, 3; 2, 4;
               3, 1; 3, 2; 3, 3; 3, 4; 4, 1; 4, 2; 4, 3; 4, 4);
    }
}

/// One stage's pass of [`cascade_kernel_lanes`] with `NN` numerator and `ND` denominator
/// coefficients.
#[inline(always)]
fn stage_pass<V: Lane8, const NN: usize, const ND: usize>(
    x: &[f64],
    row_n: &[RunLanes],
    row_d: &[RunLanes],
    pass: StagePass,
    den: &mut [RunLanes],
    out: &mut [RunLanes],
) {
    let mut cn = [V::splat(0.0); NN];
    for (c, r) in cn.iter_mut().zip(row_n) {
        *c = V::load(r);
    }
    let mut cd = [V::splat(0.0); ND];
    for (c, r) in cd.iter_mut().zip(row_d) {
        *c = V::load(r);
    }
    for ((&xf, o), d) in x.iter().zip(out.iter_mut()).zip(den.iter_mut()) {
        let xv = V::splat(xf);
        let mut pn = cn[NN - 1];
        for j in (0..NN - 1).rev() {
            pn = pn.mul(xv).add(cn[j]);
        }
        let mut pd = cd[ND - 1];
        for j in (0..ND - 1).rev() {
            pd = pd.mul(xv).add(cd[j]);
        }
        combine(pass, pn, pd, d, o);
    }
}

/// [`stage_pass`] for any coefficient counts.
#[inline(always)]
fn stage_pass_any<V: Lane8>(
    x: &[f64],
    row_n: &[RunLanes],
    row_d: &[RunLanes],
    pass: StagePass,
    den: &mut [RunLanes],
    out: &mut [RunLanes],
) {
    let (Some((top_n, rest_n)), Some((top_d, rest_d))) = (row_n.split_last(), row_d.split_last())
    else {
        return;
    };
    for ((&xf, o), d) in x.iter().zip(out.iter_mut()).zip(den.iter_mut()) {
        let xv = V::splat(xf);
        let mut pn = V::load(top_n);
        for c in rest_n.iter().rev() {
            pn = pn.mul(xv).add(V::load(c));
        }
        let mut pd = V::load(top_d);
        for c in rest_d.iter().rev() {
            pd = pd.mul(xv).add(V::load(c));
        }
        combine(pass, pn, pd, d, o);
    }
}

/// Folds one stage's `Pn`, `Pd` at one frequency into the running products.
#[inline(always)]
fn combine<V: Lane8>(pass: StagePass, pn: V, pd: V, den: &mut RunLanes, out: &mut RunLanes) {
    match pass {
        StagePass::Only => pn.div(pd).store(out),
        StagePass::First => {
            pn.store(out);
            pd.store(den);
        }
        StagePass::Middle => {
            V::load(out).mul(pn).store(out);
            V::load(den).mul(pd).store(den);
        }
        StagePass::Last => V::load(out).mul(pn).div(V::load(den).mul(pd)).store(out),
    }
}

/// Eight f64 lanes side by side, one run of a batch per lane: the operations the batch work
/// needs, implemented for AVX-512F, for AVX2 and in plain code. Every operation is a single IEEE
/// operation per lane (no fused multiply-add, no reassociation), so all three give bit-identical
/// results, and the plain code is what wasm runs.
///
/// Crate-private: the AVX types may only be used inside code compiled for their extension and
/// entered after detecting it (see the x86 module), which safe code outside could not promise.
pub(crate) mod lanes {
    /// Eight f64 lanes.
    pub trait Lane8: Copy {
        /// A per-lane truth value.
        type Mask: Copy;
        /// Every lane `v`.
        fn splat(v: f64) -> Self;
        /// Lanes from memory.
        fn load(a: &[f64; 8]) -> Self;
        /// Lanes to memory.
        fn store(self, a: &mut [f64; 8]);
        /// Lanes rounded to f32 (to nearest, ties to even) into `a[..8]`.
        fn store_f32(self, a: &mut [f32; 8]);
        /// `self + o` per lane.
        fn add(self, o: Self) -> Self;
        /// `self − o` per lane.
        fn sub(self, o: Self) -> Self;
        /// `self · o` per lane.
        fn mul(self, o: Self) -> Self;
        /// `self / o` per lane.
        fn div(self, o: Self) -> Self;
        /// `if self < o { self } else { o }` per lane (a NaN in `self` keeps `o`).
        fn min_keep(self, o: Self) -> Self;
        /// `if self > o { self } else { o }` per lane (a NaN in `self` keeps `o`).
        fn max_keep(self, o: Self) -> Self;
        /// `self < o` (false for NaN).
        fn lt(self, o: Self) -> Self::Mask;
        /// `self <= o` (false for NaN).
        fn le(self, o: Self) -> Self::Mask;
        /// `self >= o` (false for NaN).
        fn ge(self, o: Self) -> Self::Mask;
        /// `a && b`.
        fn and(a: Self::Mask, b: Self::Mask) -> Self::Mask;
        /// `if m { a } else { b }` per lane.
        fn select(m: Self::Mask, a: Self, b: Self) -> Self;
        /// Booleans as a mask.
        fn from_bools(b: [bool; 8]) -> Self::Mask;
    }

    /// Plain code (wasm, processors without AVX2).
    #[derive(Clone, Copy, Debug)]
    pub struct Plain([f64; 8]);

    impl Plain {
        #[inline(always)]
        fn map2(self, o: Plain, f: impl Fn(f64, f64) -> f64) -> Plain {
            let mut r = [0.0; 8];
            for (l, v) in r.iter_mut().enumerate() {
                *v = f(self.0[l], o.0[l]);
            }
            Plain(r)
        }

        #[inline(always)]
        fn cmp(self, o: Plain, f: impl Fn(f64, f64) -> bool) -> [bool; 8] {
            let mut r = [false; 8];
            for (l, v) in r.iter_mut().enumerate() {
                *v = f(self.0[l], o.0[l]);
            }
            r
        }
    }

    impl Lane8 for Plain {
        type Mask = [bool; 8];
        #[inline(always)]
        fn splat(v: f64) -> Self {
            Plain([v; 8])
        }
        #[inline(always)]
        fn load(a: &[f64; 8]) -> Self {
            Plain(*a)
        }
        #[inline(always)]
        fn store(self, a: &mut [f64; 8]) {
            *a = self.0;
        }
        #[inline(always)]
        fn store_f32(self, a: &mut [f32; 8]) {
            for (d, &s) in a.iter_mut().zip(&self.0) {
                *d = s as f32;
            }
        }
        #[inline(always)]
        fn add(self, o: Self) -> Self {
            self.map2(o, |a, b| a + b)
        }
        #[inline(always)]
        fn sub(self, o: Self) -> Self {
            self.map2(o, |a, b| a - b)
        }
        #[inline(always)]
        fn mul(self, o: Self) -> Self {
            self.map2(o, |a, b| a * b)
        }
        #[inline(always)]
        fn div(self, o: Self) -> Self {
            self.map2(o, |a, b| a / b)
        }
        #[inline(always)]
        fn min_keep(self, o: Self) -> Self {
            self.map2(o, |a, b| if a < b { a } else { b })
        }
        #[inline(always)]
        fn max_keep(self, o: Self) -> Self {
            self.map2(o, |a, b| if a > b { a } else { b })
        }
        #[inline(always)]
        fn lt(self, o: Self) -> [bool; 8] {
            self.cmp(o, |a, b| a < b)
        }
        #[inline(always)]
        fn le(self, o: Self) -> [bool; 8] {
            self.cmp(o, |a, b| a <= b)
        }
        #[inline(always)]
        fn ge(self, o: Self) -> [bool; 8] {
            self.cmp(o, |a, b| a >= b)
        }
        #[inline(always)]
        fn and(a: [bool; 8], b: [bool; 8]) -> [bool; 8] {
            let mut r = a;
            for (x, &y) in r.iter_mut().zip(&b) {
                *x &= y;
            }
            r
        }
        #[inline(always)]
        fn select(m: [bool; 8], a: Self, b: Self) -> Self {
            let mut r = b.0;
            for (l, v) in r.iter_mut().enumerate() {
                if m[l] {
                    *v = a.0[l];
                }
            }
            Plain(r)
        }
        #[inline(always)]
        fn from_bools(b: [bool; 8]) -> [bool; 8] {
            b
        }
    }

    #[cfg(target_arch = "x86_64")]
    pub use x86::{Avx2, Avx512};

    /// The x86-64 forms. SAFETY (for every `unsafe` block in this module): values of these types
    /// exist only inside the batch work compiled for the matching extension
    /// (`#[target_feature(enable = ...)]`), which is entered only after run-time detection of
    /// that extension.
    #[cfg(target_arch = "x86_64")]
    mod x86 {
        use super::Lane8;
        use std::arch::x86_64::*;

        /// One AVX-512 register.
        #[derive(Clone, Copy, Debug)]
        pub struct Avx512(__m512d);

        impl Lane8 for Avx512 {
            type Mask = __mmask8;
            #[inline(always)]
            fn splat(v: f64) -> Self {
                unsafe { Avx512(_mm512_set1_pd(v)) }
            }
            #[inline(always)]
            fn load(a: &[f64; 8]) -> Self {
                unsafe { Avx512(_mm512_loadu_pd(a.as_ptr())) }
            }
            #[inline(always)]
            fn store(self, a: &mut [f64; 8]) {
                unsafe { _mm512_storeu_pd(a.as_mut_ptr(), self.0) }
            }
            #[inline(always)]
            fn store_f32(self, a: &mut [f32; 8]) {
                unsafe { _mm256_storeu_ps(a.as_mut_ptr(), _mm512_cvtpd_ps(self.0)) }
            }
            #[inline(always)]
            fn add(self, o: Self) -> Self {
                unsafe { Avx512(_mm512_add_pd(self.0, o.0)) }
            }
            #[inline(always)]
            fn sub(self, o: Self) -> Self {
                unsafe { Avx512(_mm512_sub_pd(self.0, o.0)) }
            }
            #[inline(always)]
            fn mul(self, o: Self) -> Self {
                unsafe { Avx512(_mm512_mul_pd(self.0, o.0)) }
            }
            #[inline(always)]
            fn div(self, o: Self) -> Self {
                unsafe { Avx512(_mm512_div_pd(self.0, o.0)) }
            }
            #[inline(always)]
            fn min_keep(self, o: Self) -> Self {
                // MINPD returns the first operand where it is the smaller, else the second.
                unsafe { Avx512(_mm512_min_pd(self.0, o.0)) }
            }
            #[inline(always)]
            fn max_keep(self, o: Self) -> Self {
                unsafe { Avx512(_mm512_max_pd(self.0, o.0)) }
            }
            #[inline(always)]
            fn lt(self, o: Self) -> __mmask8 {
                unsafe { _mm512_cmp_pd_mask::<_CMP_LT_OQ>(self.0, o.0) }
            }
            #[inline(always)]
            fn le(self, o: Self) -> __mmask8 {
                unsafe { _mm512_cmp_pd_mask::<_CMP_LE_OQ>(self.0, o.0) }
            }
            #[inline(always)]
            fn ge(self, o: Self) -> __mmask8 {
                unsafe { _mm512_cmp_pd_mask::<_CMP_GE_OQ>(self.0, o.0) }
            }
            #[inline(always)]
            fn and(a: __mmask8, b: __mmask8) -> __mmask8 {
                a & b
            }
            #[inline(always)]
            fn select(m: __mmask8, a: Self, b: Self) -> Self {
                unsafe { Avx512(_mm512_mask_blend_pd(m, b.0, a.0)) }
            }
            #[inline(always)]
            fn from_bools(b: [bool; 8]) -> __mmask8 {
                b.iter()
                    .enumerate()
                    .fold(0, |m, (l, &v)| m | (u8::from(v) << l))
            }
        }

        /// Two AVX2 registers.
        #[derive(Clone, Copy, Debug)]
        pub struct Avx2([__m256d; 2]);

        /// One AVX2 operation on both halves.
        macro_rules! halves {
            ($f:ident, $a:expr, $b:expr) => {
                unsafe { [$f($a[0], $b[0]), $f($a[1], $b[1])] }
            };
        }

        impl Lane8 for Avx2 {
            type Mask = [__m256d; 2];
            #[inline(always)]
            fn splat(v: f64) -> Self {
                unsafe { Avx2([_mm256_set1_pd(v); 2]) }
            }
            #[inline(always)]
            fn load(a: &[f64; 8]) -> Self {
                unsafe {
                    Avx2([
                        _mm256_loadu_pd(a.as_ptr()),
                        _mm256_loadu_pd(a.as_ptr().add(4)),
                    ])
                }
            }
            #[inline(always)]
            fn store(self, a: &mut [f64; 8]) {
                unsafe {
                    _mm256_storeu_pd(a.as_mut_ptr(), self.0[0]);
                    _mm256_storeu_pd(a.as_mut_ptr().add(4), self.0[1]);
                }
            }
            #[inline(always)]
            fn store_f32(self, a: &mut [f32; 8]) {
                unsafe {
                    _mm_storeu_ps(a.as_mut_ptr(), _mm256_cvtpd_ps(self.0[0]));
                    _mm_storeu_ps(a.as_mut_ptr().add(4), _mm256_cvtpd_ps(self.0[1]));
                }
            }
            #[inline(always)]
            fn add(self, o: Self) -> Self {
                Avx2(halves!(_mm256_add_pd, self.0, o.0))
            }
            #[inline(always)]
            fn sub(self, o: Self) -> Self {
                Avx2(halves!(_mm256_sub_pd, self.0, o.0))
            }
            #[inline(always)]
            fn mul(self, o: Self) -> Self {
                Avx2(halves!(_mm256_mul_pd, self.0, o.0))
            }
            #[inline(always)]
            fn div(self, o: Self) -> Self {
                Avx2(halves!(_mm256_div_pd, self.0, o.0))
            }
            #[inline(always)]
            fn min_keep(self, o: Self) -> Self {
                Avx2(halves!(_mm256_min_pd, self.0, o.0))
            }
            #[inline(always)]
            fn max_keep(self, o: Self) -> Self {
                Avx2(halves!(_mm256_max_pd, self.0, o.0))
            }
            #[inline(always)]
            fn lt(self, o: Self) -> [__m256d; 2] {
                unsafe {
                    [
                        _mm256_cmp_pd::<_CMP_LT_OQ>(self.0[0], o.0[0]),
                        _mm256_cmp_pd::<_CMP_LT_OQ>(self.0[1], o.0[1]),
                    ]
                }
            }
            #[inline(always)]
            fn le(self, o: Self) -> [__m256d; 2] {
                unsafe {
                    [
                        _mm256_cmp_pd::<_CMP_LE_OQ>(self.0[0], o.0[0]),
                        _mm256_cmp_pd::<_CMP_LE_OQ>(self.0[1], o.0[1]),
                    ]
                }
            }
            #[inline(always)]
            fn ge(self, o: Self) -> [__m256d; 2] {
                unsafe {
                    [
                        _mm256_cmp_pd::<_CMP_GE_OQ>(self.0[0], o.0[0]),
                        _mm256_cmp_pd::<_CMP_GE_OQ>(self.0[1], o.0[1]),
                    ]
                }
            }
            #[inline(always)]
            fn and(a: [__m256d; 2], b: [__m256d; 2]) -> [__m256d; 2] {
                halves!(_mm256_and_pd, a, b)
            }
            #[inline(always)]
            fn select(m: [__m256d; 2], a: Self, b: Self) -> Self {
                unsafe {
                    Avx2([
                        _mm256_blendv_pd(b.0[0], a.0[0], m[0]),
                        _mm256_blendv_pd(b.0[1], a.0[1], m[1]),
                    ])
                }
            }
            #[inline(always)]
            fn from_bools(b: [bool; 8]) -> [__m256d; 2] {
                let lane = |v: bool| if v { -1i64 } else { 0 };
                unsafe {
                    [
                        _mm256_castsi256_pd(_mm256_set_epi64x(
                            lane(b[3]),
                            lane(b[2]),
                            lane(b[1]),
                            lane(b[0]),
                        )),
                        _mm256_castsi256_pd(_mm256_set_epi64x(
                            lane(b[7]),
                            lane(b[6]),
                            lane(b[5]),
                            lane(b[4]),
                        )),
                    ]
                }
            }
        }
    }
}

/// A key of an f32 whose unsigned order is the float's total order (negative values have every
/// bit flipped, the others only the sign bit; written without a branch so the passes over the
/// samples vectorise).
#[inline(always)]
fn order_key(v: f32) -> u32 {
    let b = v.to_bits();
    let flip = ((b as i32) >> 31) as u32 | 0x8000_0000;
    b ^ flip
}

/// Buckets of the histogram in [`percentiles_f32_by_histogram`].
const PCT_BUCKETS: usize = 4096;

/// Reusable working memory of [`percentiles_f32_by_histogram`].
#[derive(Debug, Default)]
struct PercentileScratch {
    /// Four interleaved count tables (`counts[b·4 + t]`): runs of equal buckets update different
    /// tables, so the increments do not wait on each other.
    counts: Vec<u32>,
    /// Samples before each bucket.
    starts: Vec<usize>,
    /// Per bucket, 1 + its slot among the wanted buckets, 0 when not wanted.
    slot_of: Vec<u16>,
    /// The samples of each wanted bucket.
    members: Vec<Vec<f32>>,
}

/// Linear-interpolation percentiles (as [`percentile_sorted`]) of f32 samples, exactly, in three
/// passes: the keys' range, a 4096-bucket histogram of the keys, then only the samples in the
/// buckets that hold the wanted order statistics are collected and sorted. The samples of one
/// frequency cluster closely, and this avoids a selection per percentile over all of them.
pub fn percentiles_f32_by_histogram(data: &[f32], percentiles: &[f64]) -> Vec<f64> {
    percentiles_f32_with(data, percentiles, &mut PercentileScratch::default())
}

/// [`percentiles_f32_by_histogram`] with reusable working memory.
fn percentiles_f32_with(
    data: &[f32],
    percentiles: &[f64],
    scratch: &mut PercentileScratch,
) -> Vec<f64> {
    let n = data.len();
    if n == 0 {
        return vec![f64::NAN; percentiles.len()];
    }
    let (kmin, kmax) = data.iter().fold((u32::MAX, 0u32), |(lo, hi), &v| {
        let k = order_key(v);
        (lo.min(k), hi.max(k))
    });
    let mut shift = 0u32;
    while ((kmax - kmin) >> shift) as usize >= PCT_BUCKETS {
        shift += 1;
    }
    let bucket = |v: f32| ((order_key(v) - kmin) >> shift) as usize;
    let counts = &mut scratch.counts;
    counts.clear();
    counts.resize(4 * PCT_BUCKETS, 0);
    let mut quads = data.chunks_exact(4);
    for q in quads.by_ref() {
        for (t, &v) in q.iter().enumerate() {
            counts[bucket(v) * 4 + t] += 1;
        }
    }
    for &v in quads.remainder() {
        counts[bucket(v) * 4] += 1;
    }
    // Ranks wanted: floor(pos) and, when interpolating, the next one.
    let plan: Vec<(usize, usize, f64)> = percentiles
        .iter()
        .map(|&p| {
            let pos = (p / 100.0).clamp(0.0, 1.0) * (n - 1) as f64;
            let i = pos.floor() as usize;
            (i, (i + 1).min(n - 1), pos - i as f64)
        })
        .collect();
    // Bucket of each rank, and the rank's place inside its bucket.
    let starts = &mut scratch.starts;
    starts.clear();
    starts.push(0);
    let mut total = 0usize;
    for c in counts.chunks_exact(4) {
        total += c.iter().map(|&v| v as usize).sum::<usize>();
        starts.push(total);
    }
    let starts = &scratch.starts;
    let bucket_of = |rank: usize| -> usize { starts.partition_point(|&s| s <= rank) - 1 };
    let mut wanted: Vec<usize> = plan
        .iter()
        .flat_map(|&(i, j, _)| [bucket_of(i), bucket_of(j)])
        .collect();
    wanted.sort_unstable();
    wanted.dedup();
    let slot_of = &mut scratch.slot_of;
    slot_of.clear();
    slot_of.resize(PCT_BUCKETS, 0);
    for (slot, &b) in wanted.iter().enumerate() {
        slot_of[b] = (slot + 1) as u16;
    }
    let members = &mut scratch.members;
    members.resize_with(wanted.len().max(members.len()), Vec::new);
    for m in members.iter_mut() {
        m.clear();
    }
    for &v in data {
        let slot = slot_of[bucket(v)];
        if slot != 0 {
            members[usize::from(slot) - 1].push(v);
        }
    }
    for m in members.iter_mut().take(wanted.len()) {
        m.sort_unstable_by(|a, b| a.total_cmp(b));
    }
    let value_at = |rank: usize| -> f64 {
        let b = bucket_of(rank);
        let slot = wanted.binary_search(&b).unwrap_or(0);
        members[slot]
            .get(rank - starts[b])
            .copied()
            .map_or(f64::NAN, f64::from)
    };
    plan.iter()
        .map(|&(i, j, t)| {
            let lo = value_at(i);
            let hi = if t > 0.0 { value_at(j) } else { lo };
            lo * (1.0 - t) + hi * t
        })
        .collect()
}

/// Linear-interpolation percentiles (as [`percentile_sorted`]) without sorting: each needed order
/// statistic is placed by selection (`select_nth_unstable`, linear time), the ranks in ascending
/// order so each selection works on what is left above the previous one.
pub fn percentiles_by_selection<T: Copy + Into<f64>>(
    data: &mut [T],
    percentiles: &[f64],
    cmp: impl Fn(&T, &T) -> std::cmp::Ordering + Copy,
) -> Vec<f64> {
    let n = data.len();
    if n == 0 {
        return vec![f64::NAN; percentiles.len()];
    }
    // (position, index in the request) sorted by position.
    let mut wanted: Vec<(f64, usize)> = percentiles
        .iter()
        .enumerate()
        .map(|(i, &p)| ((p / 100.0).clamp(0.0, 1.0) * (n - 1) as f64, i))
        .collect();
    wanted.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out = vec![f64::NAN; percentiles.len()];
    let mut placed = 0usize; // data[..placed] holds order statistics below the next rank.
    let mut last_rank: Option<usize> = None;
    for (pos, idx) in wanted {
        let i = pos.floor() as usize;
        let t = pos - i as f64;
        if last_rank != Some(i) {
            let start = placed.min(i);
            data[start..].select_nth_unstable_by(i - start, cmp);
            placed = i;
            last_rank = Some(i);
        }
        let lo: f64 = data[i].into();
        let hi: f64 = if t > 0.0 && i + 1 < n {
            data[i + 1..]
                .iter()
                .copied()
                .min_by(cmp)
                .map_or(lo, Into::into)
        } else {
            lo
        };
        out[idx] = lo * (1.0 - t) + hi * t;
    }
    out
}

/// Linear-interpolation percentile of sorted samples (the common "linear" definition).
pub fn percentile_sorted(sorted: &[f64], p: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let pos = (p / 100.0).clamp(0.0, 1.0) * (sorted.len() - 1) as f64;
    let i = pos.floor() as usize;
    let j = (i + 1).min(sorted.len() - 1);
    let t = pos - i as f64;
    sorted[i] * (1.0 - t) + sorted[j] * t
}

/// Statistics of `samples` (NaN entries count as missing).
pub fn spread_of(nominal: f64, samples: Vec<f64>, percentiles: &[f64]) -> Spread {
    let mut finite: Vec<f64> = samples.iter().copied().filter(|v| v.is_finite()).collect();
    let m = finite.len();
    let n_missing = samples.len() - m;
    let mean = if m > 0 {
        finite.iter().sum::<f64>() / m as f64
    } else {
        f64::NAN
    };
    let std_dev = if m > 1 {
        (finite.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (m - 1) as f64).sqrt()
    } else {
        0.0
    };
    let (min, max) = if m > 0 {
        finite
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                (a.min(v), b.max(v))
            })
    } else {
        (f64::NAN, f64::NAN)
    };
    let n_bins = 40;
    let mut counts = vec![0usize; n_bins];
    let edges: Vec<f64> = if m > 0 && max > min {
        (0..=n_bins)
            .map(|i| min + (max - min) * i as f64 / n_bins as f64)
            .collect()
    } else if m > 0 {
        vec![min, max]
    } else {
        vec![]
    };
    if m > 0 {
        if max > min {
            for &v in &finite {
                let b = (((v - min) / (max - min)) * n_bins as f64) as usize;
                counts[b.min(n_bins - 1)] += 1;
            }
        } else {
            counts.truncate(1);
            counts[0] = m;
        }
    } else {
        counts.clear();
    }
    let values = percentiles_by_selection(&mut finite, percentiles, |a, b| a.total_cmp(b));
    Spread {
        nominal,
        mean,
        std_dev,
        min,
        max,
        percentiles: percentiles
            .iter()
            .zip(values)
            .map(|(&p, value)| PercentileValue {
                percentile: p,
                value,
            })
            .collect(),
        histogram: Histogram { edges, counts },
        n_missing,
        samples,
    }
}

#[cfg(test)]
mod tests {
    //! Checks of the batch work against plain scalar arithmetic and against itself on every
    //! compiled path (identities: the lanes must not change any number).

    use super::lanes::{Lane8, Plain};
    use super::*;
    use rand_core::RngCore;

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
                        (u - 0.3) * 10f64.powi((i % 7) as i32 - 3)
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
        lane_ops::<lanes::Avx2>(a, b)
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx512f")]
    unsafe fn lane_ops_avx512(a: &RunLanes, b: &RunLanes) -> Vec<u64> {
        lane_ops::<lanes::Avx512>(a, b)
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
                super::super::fastfit::magnitude_squared_into(&scalar, &mut want);
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

    /// The links of the checks below: low-pass with a mask (Sallen-Key), band-pass (multiple
    /// feedback, both cutoffs), high-pass with uniform parts, an odd order (first-order stage).
    const LINKS: [&str; 4] = [
        "v=1&resp=lp&family=butterworth&order=8&fc=1000&fpass=800&apass=1&fstop=3000&astop=60",
        "v=1&resp=bp&family=chebyshev&ripple=0.5&order=6&fc=1k&bw=300&rtol=2&ctol=20",
        "v=1&resp=hp&family=butterworth&order=6&fc=100&gain=12&dist=uniform&fpass=150&apass=3&fstop=20&astop=40",
        "v=1&resp=lp&family=bessel&order=5&fc=2k&topo=mfb",
    ];

    fn study(link: &str, runs: usize) -> MonteCarlo {
        let evaluation = crate::app::evaluate(&format!("{link}&runs={runs}&seed=77"));
        let model = evaluation
            .model
            .unwrap_or_else(|| panic!("{link} designs: {:?}", evaluation.view.errors));
        model
            .start_study()
            .unwrap_or_else(|e| panic!("{link}: {e}"))
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
        for link in LINKS {
            let native = study(link, 300);
            let mut plain = study(link, 300);
            plain.isa = Isa::Portable;
            let (mut native, mut plain) = (native, plain);
            native.step(300);
            plain.step(300);
            let (a, b) = (native.finish(), plain.finish());
            assert_eq!(fingerprint(&a), fingerprint(&b), "{link}");
            assert!(a.runs == 300 && a.passband_gain_db.std_dev > 0.0, "{link}");
        }
    }

    /// Identity: a run's numbers do not depend on its lane or its batch: uneven steps (batches
    /// that start and end inside a lane group) give the summary of one step, bit for bit.
    #[test]
    fn batches_do_not_change_any_run() {
        for link in LINKS {
            let mut whole = study(link, 203);
            whole.step(203);
            let mut pieces = study(link, 203);
            let mut chunk = 1;
            while !pieces.is_done() {
                pieces.step(chunk);
                chunk = chunk % 11 + 2;
            }
            let (a, b) = (whole.finish(), pieces.finish());
            assert_eq!(fingerprint(&a), fingerprint(&b), "{link}");
        }
    }

    /// Identity: the lane evaluation of the multilinear expansion equals the scalar one bit for
    /// bit, lane by lane, with every lane's parts moved differently.
    #[test]
    fn multilinear_lanes_equal_the_scalar_evaluation() {
        let mut n_checked = 0;
        for link in LINKS {
            let mc = study(link, 1);
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
                        assert_eq!(n[j].to_bits(), nl[j][l].to_bits(), "{link} N[{j}] lane {l}");
                        assert_eq!(d[j].to_bits(), dl[j][l].to_bits(), "{link} D[{j}] lane {l}");
                    }
                }
                n_checked += 1;
            }
        }
        assert!(n_checked >= 8, "only {n_checked} stages had an expansion");
    }
}

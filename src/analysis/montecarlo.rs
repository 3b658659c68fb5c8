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
//! Each stage's transfer function `N(s)/D(s)` (op amp included, see [`super::poly`]) is formed once
//! per run — from its precomputed multilinear expansion in the part admittances
//! ([`super::multilinear`], exact), or for large stages by nodal solves at a few real frequencies
//! ([`super::fastfit`]). `|N(jω)|²` and `|D(jω)|²` are then polynomials in `x = (ω/ω_g)²`, and the
//! response of the cascade at each frequency is a few multiply-adds per stage and one division,
//! evaluated 32 frequencies at a time without branches (compiled for AVX-512 or AVX2 when the
//! processor has them; the results are bit-identical on every path). The yield compares `|H|²`
//! with the mask bounds in linear terms (no logarithms). Each stage's f0 and Q come from the
//! dominant quadratic factor of its denominator (the op amp's far pole split off by Halley's
//! iteration from the nominal one, or Bairstow's iteration for other shapes); each run's cutoff
//! from the grid crossing refined by regula falsi (Illinois) to about 1e-11.
//!
//! Approximation: the cascade is the product of the stage transfer functions, each stage driven
//! by an ideal source and unloaded. The loading of an op-amp output (its `Rout`, reduced by the
//! loop gain) by the next stage's input is left out. `tests/analysis.rs` measures the difference
//! from the whole-board nodal solution ([`crate::mna::board_response`]) on the 8th-order
//! Sallen-Key benchmark board with the generic op amp: 2.9e-4 dB up to 10 kHz (10·fc), 1.0e-3 dB
//! up to 100 kHz; it grows towards the op amp's GBW, where the loop gain is gone.
//!
//! Memory: the envelope's percentiles are exact order statistics of every run's |H|², kept in
//! single precision: 4 bytes × runs × frequencies (16 MB for 20,000 runs of 200 points).
//!
//! The mask is checked at the frequencies of the grid that lie in the passband or the stopband and
//! at the band edges themselves: the passband needs `|H|² ≥ G²·10^(−apass/10)`, the stopband
//! `|H|² ≤ G²·10^(−astop/10)`, with G the reference gain (the design's passband gain). Gain above G
//! in the passband is not a violation: the mask states only the attenuation allowed.

use super::circuit::{AnalysisError, Assembled, Compiled};
use super::fastfit::{magnitude_squared_into, FastFit};
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
/// Frequencies evaluated together in the branch-free kernel.
const LANES: usize = 32;

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
    /// Scratch for |N|², |D|².
    sq_n: Vec<f64>,
    sq_d: Vec<f64>,
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
    is_drawn: Vec<bool>,
    values: Vec<f64>,
    /// Evaluation frequencies: grid, then edge points and the passband reference, padded to LANES.
    x_eval: Vec<f64>,
    n_grid: usize,
    ref_idx: usize,
    lo_bound: Vec<f64>,
    hi_bound: Vec<f64>,
    stop_weight: Vec<f64>,
    has_mask: bool,
    has_stop: bool,
    w_g: f64,
    /// Per-stage |N|², |D|² coefficients in x, `width` each, and their degrees.
    coef_n: Vec<f64>,
    /// The same coefficients, four stages side by side (`[(chunk·width + j)·4 + lane]`), padded
    /// with unit stages, for the scalar evaluations of the cutoff search.
    lane_n: Vec<f64>,
    lane_d: Vec<f64>,
    coef_d: Vec<f64>,
    deg_n: Vec<usize>,
    deg_d: Vec<usize>,
    width: usize,
    h2: Vec<f64>,
    // Accumulated results.
    done: usize,
    n_pass: usize,
    env_min: Vec<f64>,
    env_max: Vec<f64>,
    /// |H|² of every run in single precision, in blocks of [`SAMPLE_BLOCK`] runs stored
    /// frequency-major inside each block: writing a run stays within one block (cache-resident)
    /// and reading one frequency over all runs reads contiguous stretches.
    samples_h2: Vec<f32>,
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

#[derive(Debug, Clone, Copy, Default)]
struct RunResult {
    pass: bool,
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

/// Lane tables for `n_stages` stages of `width` coefficients, every lane a unit stage (constant
/// 1) until a stage's coefficients are written into it.
fn unit_lanes(n_stages: usize, width: usize) -> Vec<f64> {
    let n_chunks = n_stages.div_ceil(4);
    let mut v = vec![0.0; n_chunks * width * 4];
    for chunk in 0..n_chunks {
        for lane in 0..4 {
            v[chunk * width * 4 + lane] = 1.0;
        }
    }
    v
}

/// The quadratic factor `z² + u·z + v` of the cubic `d` (ascending) that remains when its real
/// root near `r0` is divided out: Halley's iteration for the root, then backward deflation
/// (`v = −d0/(d3·r)`, `u = (v − d1/d3)/r`), which is the stable direction for a root larger than
/// the others. `None` when the iteration fails or the factor is not a stable pair.
pub(crate) fn split_cubic(d: &[f64], r0: f64) -> Option<(f64, f64)> {
    let lead = d[3];
    let (a0, a1, a2) = (d[0] / lead, d[1] / lead, d[2] / lead);
    let mut r = r0;
    // Halley's iteration (cubic convergence): two or three steps from the nominal root.
    for _ in 0..40 {
        let p = ((r + a2) * r + a1) * r + a0;
        let dp = (3.0 * r + 2.0 * a2) * r + a1;
        let ddp = 6.0 * r + 2.0 * a2;
        let step = 2.0 * p * dp / (2.0 * dp * dp - p * ddp);
        if !step.is_finite() {
            return None;
        }
        r -= step;
        if step.abs() <= 1e-15 * r.abs() {
            let v = -a0 / r;
            let u = (v - a1) / r;
            return (v > 0.0 && u > 0.0 && u.is_finite()).then_some((u, v));
        }
    }
    None
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
        let mut is_drawn = Vec::new();
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
                nominal_values.push(if p.kind == PartKind::OpAmp {
                    0.0
                } else {
                    p.value
                });
                spread.push(pct / 100.0 / divisor);
                is_drawn.push(p.kind != PartKind::OpAmp);
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
            runs.push(StageRun {
                multi,
                far_root_u,
                compiled,
                assembled,
                fast,
                sq_n: vec![0.0; k],
                sq_d: vec![0.0; k],
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
        // Pad to a multiple of LANES by repeating the last point with no mask bounds.
        while eval_f.len() % LANES != 0 {
            eval_f.push(settings.passband_ref_hz);
            lo_bound.push(0.0);
            hi_bound.push(f64::INFINITY);
            stop_weight.push(0.0);
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
        let mut mc = MonteCarlo {
            rng: Xoshiro256PlusPlus::seed_from_u64(settings.seed),
            values: nominal_values.clone(),
            nominal_values,
            spread,
            is_drawn,
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
            coef_n: vec![0.0; n_stages * width],
            lane_n: unit_lanes(n_stages, width),
            lane_d: unit_lanes(n_stages, width),
            coef_d: vec![0.0; n_stages * width],
            deg_n: vec![0; n_stages],
            deg_d: vec![0; n_stages],
            width,
            h2: vec![0.0; n_eval],
            done: 0,
            n_pass: 0,
            env_min: vec![f64::INFINITY; n_grid],
            env_max: vec![0.0; n_grid],
            samples_h2: Vec::new(),
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
        // The nominal board: the same path with every factor 1.
        let mut f0q = vec![(0.0, 0.0); n_stages];
        mc.form_stages(&mut f0q)?;
        mc.kernel();
        mc.nominal = mc.evaluate_run();
        mc.nominal_h2 = mc.h2[..n_grid].to_vec();
        mc.nominal_f0q = f0q;
        Ok(mc)
    }

    /// Runs up to `n_runs` more runs (fewer at the end) and reports the progress.
    pub fn step(&mut self, n_runs: usize) -> Progress {
        let todo = n_runs.min(self.settings.runs - self.done);
        let n_stages = self.stages.len();
        let mut f0q = vec![(0.0, 0.0); n_stages];
        for _ in 0..todo {
            self.draw();
            if self.form_stages(&mut f0q).is_err() {
                // A run whose matrices turn singular counts as a failed board with no readings.
                self.record_failed_run();
                continue;
            }
            self.kernel();
            let r = self.evaluate_run();
            self.record(r, &f0q);
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

    fn draw(&mut self) {
        for i in 0..self.values.len() {
            if !self.is_drawn[i] {
                continue;
            }
            let z: f64 = match self.settings.tolerances.distribution {
                PartDistribution::Gaussian { .. } => StandardNormal.sample(&mut self.rng),
                PartDistribution::Uniform => {
                    let u: f64 = rand_distr::Standard.sample(&mut self.rng);
                    2.0 * u - 1.0
                }
            };
            let factor = (1.0 + self.spread[i] * z).max(1e-3);
            self.values[i] = self.nominal_values[i] * factor;
        }
    }

    /// Fits every stage for the current values, fills the |N|², |D|² coefficient table and each
    /// stage's (f0 rad/s, Q).
    fn form_stages(&mut self, f0q: &mut [(f64, f64)]) -> Result<(), AnalysisError> {
        let width = self.width;
        let w_g = self.w_g;
        for (k, st) in self.stages.iter_mut().enumerate() {
            let vals = &self.values[st.value_offset..st.value_offset + st.n_parts];
            if let Some(ml) = st.multi.as_mut() {
                ml.evaluate(vals, &mut st.fast.num_u, &mut st.fast.den_u);
            } else if !st.fast.fit_values(&st.compiled, vals, &mut st.assembled) {
                return Err(AnalysisError::Singular("a stage of a tolerance run".into()));
            }
            st.fast.trim();
            let d = &st.fast.den_u;
            // Dominant factor, in u = s/ω_g, from the nominal one.
            let cubic = match (st.far_root_u, d.iter().rposition(|&c| c != 0.0)) {
                (Some(r0), Some(3)) if st.order == 2 => split_cubic(d, r0),
                _ => None,
            };
            let (w0, q) = if let Some((u, v)) = cubic {
                (v.sqrt() * w_g, v.sqrt() / u)
            } else if st.order == 2 {
                let u0 = st.nominal_w0 / st.nominal_q / w_g;
                let v0 = (st.nominal_w0 / w_g) * (st.nominal_w0 / w_g);
                match bairstow(d, u0, v0) {
                    Some((u, v)) if v > 0.0 && u != 0.0 => (v.sqrt() * w_g, v.sqrt() / u),
                    _ => {
                        self.fallbacks += 1;
                        let poles: Vec<Complex64> = Poly::new(d.clone())
                            .roots()
                            .unwrap_or_default()
                            .into_iter()
                            .map(|p| p * w_g)
                            .collect();
                        dominant_w0_q(&poles, 2).unwrap_or((f64::NAN, f64::NAN))
                    }
                }
            } else if st.order == 1 {
                match newton_real(d, -st.nominal_w0 / w_g) {
                    Some(z) => (-z * w_g, f64::NAN),
                    None => (f64::NAN, f64::NAN),
                }
            } else {
                (f64::NAN, f64::NAN)
            };
            f0q[k] = (w0, q);
            let n_coef = magnitude_squared_into(&st.fast.num_u, &mut st.sq_n);
            magnitude_squared_into(&st.fast.den_u, &mut st.sq_d);
            let norm = st.sq_d.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            let norm = if norm > 0.0 { 1.0 / norm } else { 1.0 };
            let row_n = &mut self.coef_n[k * width..(k + 1) * width];
            let row_d = &mut self.coef_d[k * width..(k + 1) * width];
            row_n.iter_mut().for_each(|v| *v = 0.0);
            row_d.iter_mut().for_each(|v| *v = 0.0);
            for j in 0..n_coef.min(width) {
                row_n[j] = st.sq_n[j] * norm;
                row_d[j] = st.sq_d[j] * norm;
            }
            self.deg_n[k] = row_n.iter().rposition(|&v| v != 0.0).unwrap_or(0);
            self.deg_d[k] = row_d.iter().rposition(|&v| v != 0.0).unwrap_or(0);
            let (chunk, lane) = (k / 4, k % 4);
            for j in 0..width {
                self.lane_n[(chunk * width + j) * 4 + lane] = row_n[j];
                self.lane_d[(chunk * width + j) * 4 + lane] = row_d[j];
            }
        }
        Ok(())
    }

    /// |H|² of the cascade at every evaluation point: the branch-free kernel.
    fn kernel(&mut self) {
        cascade_kernel(
            &self.x_eval,
            &self.coef_n,
            &self.coef_d,
            &self.deg_n,
            &self.deg_d,
            self.width,
            &mut self.h2,
        );
    }

    /// |H|² of the current run's cascade at `x = (f/f_g)²` (scalar path for the cutoff search):
    /// four stages at a time in the lanes of small arrays.
    fn h2_x(&self, x: f64) -> f64 {
        let w = self.width;
        let mut num = 1.0;
        let mut den = 1.0;
        for (cn, cd) in self
            .lane_n
            .chunks_exact(4 * w)
            .zip(self.lane_d.chunks_exact(4 * w))
        {
            let mut pn = [0.0f64; 4];
            let mut pd = [0.0f64; 4];
            for j in (0..w).rev() {
                for l in 0..4 {
                    pn[l] = pn[l] * x + cn[j * 4 + l];
                    pd[l] = pd[l] * x + cd[j * 4 + l];
                }
            }
            num *= (pn[0] * pn[1]) * (pn[2] * pn[3]);
            den *= (pd[0] * pd[1]) * (pd[2] * pd[3]);
        }
        num / den
    }

    /// The crossing of `level` between grid points `i` and `j` (|H|² on either side of it), to a
    /// relative accuracy of about 1e-11 in frequency: the Illinois variant of regula falsi on
    /// `|H|²/level − 1` over `x = (f/f_g)²` (smooth there, and no exponentials per step).
    fn refine_crossing(&self, i: usize, j: usize, level: f64) -> f64 {
        let xs = &self.x_eval;
        let inv = 1.0 / level;
        let g = |x: f64| self.h2_x(x) * inv - 1.0;
        let (mut a, mut b) = (xs[i], xs[j]);
        let (mut ga, mut gb) = (g(a), g(b));
        let fg = self.w_g / (2.0 * PI);
        if !(ga.is_finite() && gb.is_finite()) || ga * gb > 0.0 {
            return f64::NAN;
        }
        if ga == 0.0 {
            return fg * a.sqrt();
        }
        let mut side = 0i32;
        let mut c = a;
        for _ in 0..100 {
            let c_new = (a * gb - b * ga) / (gb - ga);
            let converged = (c_new - c).abs() <= 2e-11 * c_new.abs();
            c = c_new;
            let gc = g(c);
            if !gc.is_finite() {
                return f64::NAN;
            }
            if gc == 0.0 || converged {
                break;
            }
            if gc * gb > 0.0 {
                b = c;
                gb = gc;
                if side == -1 {
                    ga *= 0.5;
                }
                side = -1;
            } else {
                a = c;
                ga = gc;
                if side == 1 {
                    gb *= 0.5;
                }
                side = 1;
            }
        }
        fg * c.sqrt()
    }

    fn evaluate_run(&self) -> RunResult {
        let h2 = &self.h2;
        // Yield: linear comparisons only, accumulated without branches in eight lanes (the
        // evaluation arrays are padded to a multiple of the kernel's lane count).
        let mut viol = [0.0f64; 8];
        let mut worst = [0.0f64; 8];
        for (((v, lo), hi), w) in h2
            .chunks_exact(8)
            .zip(self.lo_bound.chunks_exact(8))
            .zip(self.hi_bound.chunks_exact(8))
            .zip(self.stop_weight.chunks_exact(8))
        {
            for l in 0..8 {
                // A NaN fails both comparisons and so counts as a violation.
                let inside = (v[l] >= lo[l]) & (v[l] <= hi[l]);
                viol[l] += if inside { 0.0 } else { 1.0 };
                let s = v[l] * w[l];
                worst[l] = if s > worst[l] { s } else { worst[l] };
            }
        }
        let violations: f64 = viol.iter().sum();
        let worst_stop = worst.iter().fold(0.0f64, |m, &v| if v > m { v } else { m });
        let g2 = self.settings.reference_gain * self.settings.reference_gain;
        let level = self.cutoff_level;
        let grid = &h2[..self.n_grid];
        let want_upper = matches!(
            self.settings.class,
            ResponseClass::LowPass | ResponseClass::BandPass
        );
        let want_lower = matches!(
            self.settings.class,
            ResponseClass::HighPass | ResponseClass::BandPass
        );
        let mut cut_hi = f64::NAN;
        if want_upper {
            // Upper edge: the highest grid point still at or above the level, then the next one.
            if let Some(i) = grid.iter().rposition(|&v| v >= level) {
                if i + 1 < grid.len() {
                    cut_hi = self.refine_crossing(i, i + 1, level);
                }
            }
        }
        let mut cut_lo = f64::NAN;
        if want_lower {
            let search_end = if want_upper {
                // Band-pass: the lower edge lies below the peak.
                grid.iter()
                    .enumerate()
                    .fold(
                        (0, 0.0),
                        |(bi, bv), (i, &v)| if v > bv { (i, v) } else { (bi, bv) },
                    )
                    .0
                    + 1
            } else {
                grid.len()
            };
            if let Some(i) = grid[..search_end].iter().position(|&v| v >= level) {
                if i > 0 {
                    cut_lo = self.refine_crossing(i - 1, i, level);
                }
            }
        }
        let gain = h2[self.ref_idx];
        RunResult {
            pass: violations == 0.0,
            cut_lo_hz: cut_lo,
            cut_hi_hz: cut_hi,
            gain_db: 10.0 * gain.log10(),
            atten_db: if self.has_stop {
                10.0 * (g2 / worst_stop).log10()
            } else {
                f64::NAN
            },
        }
    }

    fn record(&mut self, r: RunResult, f0q: &[(f64, f64)]) {
        let grid = &self.h2[..self.n_grid];
        for ((mn, mx), &v) in self
            .env_min
            .iter_mut()
            .zip(self.env_max.iter_mut())
            .zip(grid)
        {
            *mn = if v < *mn { v } else { *mn };
            *mx = if v > *mx { v } else { *mx };
        }
        let (base, j) = self.sample_slot();
        let grid = &self.h2[..self.n_grid];
        let samples = &mut self.samples_h2[base..base + SAMPLE_BLOCK * self.n_grid];
        for (f, &v) in grid.iter().enumerate() {
            samples[f * SAMPLE_BLOCK + j] = v as f32;
        }
        self.n_pass += usize::from(r.pass);
        self.cut_lo.push(r.cut_lo_hz);
        self.cut_hi.push(r.cut_hi_hz);
        self.gain_db.push(r.gain_db);
        self.atten_db.push(r.atten_db);
        for (k, &(w0, q)) in f0q.iter().enumerate() {
            self.stage_f0[k].push(w0 / (2.0 * PI));
            self.stage_q[k].push(q);
        }
        self.done += 1;
    }

    fn record_failed_run(&mut self) {
        let n = self.n_grid;
        // The block starts filled with NaN, which marks a run without readings.
        let _ = self.sample_slot();
        let _ = n;
        self.cut_lo.push(f64::NAN);
        self.cut_hi.push(f64::NAN);
        self.gain_db.push(f64::NAN);
        self.atten_db.push(f64::NAN);
        for k in 0..self.stages.len() {
            self.stage_f0[k].push(f64::NAN);
            self.stage_q[k].push(f64::NAN);
        }
        self.fallbacks += 1;
        self.done += 1;
    }

    /// Start of the current run's block in `samples_h2` and the run's lane in it (the block is
    /// added, NaN-filled, when the run is its first).
    fn sample_slot(&mut self) -> (usize, usize) {
        let block = self.done / SAMPLE_BLOCK;
        let j = self.done % SAMPLE_BLOCK;
        let base = block * SAMPLE_BLOCK * self.n_grid;
        if self.samples_h2.len() < base + SAMPLE_BLOCK * self.n_grid {
            self.samples_h2
                .resize(base + SAMPLE_BLOCK * self.n_grid, f32::NAN);
        }
        (base, j)
    }

    /// The results of the runs done so far.
    pub fn finish(self) -> Summary {
        let n = self.done;
        let n_grid = self.n_grid;
        let pct = &self.settings.percentiles;
        let to_db = |v: f64| 10.0 * v.log10();
        let mut curves: Vec<PercentileCurve> = pct
            .iter()
            .map(|&p| PercentileCurve {
                percentile: p,
                db: Vec::with_capacity(n_grid),
            })
            .collect();
        let mut column: Vec<f32> = Vec::with_capacity(n);
        let n_blocks = n.div_ceil(SAMPLE_BLOCK);
        for f in 0..n_grid {
            column.clear();
            for b in 0..n_blocks {
                let start = b * SAMPLE_BLOCK * n_grid + f * SAMPLE_BLOCK;
                let count = SAMPLE_BLOCK.min(n - b * SAMPLE_BLOCK);
                column.extend(
                    self.samples_h2[start..start + count]
                        .iter()
                        .filter(|v| !v.is_nan()),
                );
            }
            let values = percentiles_f32_by_histogram(&column, pct);
            for (c, v) in curves.iter_mut().zip(values) {
                c.db.push(to_db(v));
            }
        }
        let nominal_db: Vec<f64> = self.nominal_h2.iter().map(|&v| to_db(v)).collect();
        let (env_min, env_max) = if n == 0 {
            (nominal_db.clone(), nominal_db.clone())
        } else {
            (
                self.env_min.iter().map(|&v| to_db(v)).collect(),
                self.env_max.iter().map(|&v| to_db(v)).collect(),
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

/// The branch-free cascade kernel: `out[f] = Π_k Pn_k(x_f) / Π_k Pd_k(x_f)`, with each stage's
/// polynomials in a row of `width` coefficients. `x.len()` must be a multiple of 8.
///
/// On x86-64 processors with AVX-512F or AVX2 the same code is run compiled for that extension
/// (selected at run time).
/// Rust does not fuse multiplies and adds, and every lane does the same operations in the same
/// order, so the results are bit-identical on every path and on wasm.
pub fn cascade_kernel(
    x: &[f64],
    coef_n: &[f64],
    coef_d: &[f64],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    out: &mut [f64],
) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx512f") {
            // SAFETY: the processor supports AVX-512F, checked on the line above.
            unsafe { cascade_kernel_avx512(x, coef_n, coef_d, deg_n, deg_d, width, out) };
            return;
        }
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor supports AVX2, checked on the line above.
            unsafe { cascade_kernel_avx2(x, coef_n, coef_d, deg_n, deg_d, width, out) };
            return;
        }
    }
    cascade_kernel_portable(x, coef_n, coef_d, deg_n, deg_d, width, out);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn cascade_kernel_avx2(
    x: &[f64],
    coef_n: &[f64],
    coef_d: &[f64],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    out: &mut [f64],
) {
    cascade_kernel_portable(x, coef_n, coef_d, deg_n, deg_d, width, out);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
unsafe fn cascade_kernel_avx512(
    x: &[f64],
    coef_n: &[f64],
    coef_d: &[f64],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    out: &mut [f64],
) {
    cascade_kernel_portable(x, coef_n, coef_d, deg_n, deg_d, width, out);
}

#[inline(always)]
fn cascade_kernel_portable(
    x: &[f64],
    coef_n: &[f64],
    coef_d: &[f64],
    deg_n: &[usize],
    deg_d: &[usize],
    width: usize,
    out: &mut [f64],
) {
    for (xb, ob) in x.chunks_exact(LANES).zip(out.chunks_exact_mut(LANES)) {
        // A fixed-size view of the chunk: no copy, no bounds checks in the lane loops.
        let xv: &[f64; LANES] = match xb.try_into() {
            Ok(v) => v,
            Err(_) => continue,
        };
        let mut num = [1.0; LANES];
        let mut den = [1.0; LANES];
        for (k, (&dn, &dd)) in deg_n.iter().zip(deg_d).enumerate() {
            let row_n = &coef_n[k * width..k * width + width];
            let row_d = &coef_d[k * width..k * width + width];
            let mut pn = [row_n[dn.min(width - 1)]; LANES];
            for j in (0..dn.min(width - 1)).rev() {
                let c = row_n[j];
                for l in 0..LANES {
                    pn[l] = pn[l] * xv[l] + c;
                }
            }
            let mut pd = [row_d[dd.min(width - 1)]; LANES];
            for j in (0..dd.min(width - 1)).rev() {
                let c = row_d[j];
                for l in 0..LANES {
                    pd[l] = pd[l] * xv[l] + c;
                }
            }
            for l in 0..LANES {
                num[l] *= pn[l];
                den[l] *= pd[l];
            }
        }
        for l in 0..LANES {
            ob[l] = num[l] / den[l];
        }
    }
}

/// A key of an f32 whose unsigned order is the float's total order.
fn order_key(v: f32) -> u32 {
    let b = v.to_bits();
    if b & 0x8000_0000 != 0 {
        !b
    } else {
        b | 0x8000_0000
    }
}

/// Linear-interpolation percentiles (as [`percentile_sorted`]) of f32 samples, exactly, in three
/// passes: the keys' range, a 4096-bucket histogram of the keys, then only the samples in the
/// buckets that hold the wanted order statistics are collected and sorted. The samples of one
/// frequency cluster closely, and this avoids a selection per percentile over all of them.
pub fn percentiles_f32_by_histogram(data: &[f32], percentiles: &[f64]) -> Vec<f64> {
    const BUCKETS: usize = 4096;
    let n = data.len();
    if n == 0 {
        return vec![f64::NAN; percentiles.len()];
    }
    let (kmin, kmax) = data.iter().fold((u32::MAX, 0u32), |(lo, hi), &v| {
        let k = order_key(v);
        (lo.min(k), hi.max(k))
    });
    let mut shift = 0u32;
    while ((kmax - kmin) >> shift) as usize >= BUCKETS {
        shift += 1;
    }
    let mut counts = vec![0usize; BUCKETS];
    for &v in data {
        counts[((order_key(v) - kmin) >> shift) as usize] += 1;
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
    let mut starts = vec![0usize; BUCKETS + 1];
    for b in 0..BUCKETS {
        starts[b + 1] = starts[b] + counts[b];
    }
    let bucket_of = |rank: usize| -> usize { starts.partition_point(|&s| s <= rank) - 1 };
    let mut wanted: Vec<usize> = plan
        .iter()
        .flat_map(|&(i, j, _)| [bucket_of(i), bucket_of(j)])
        .collect();
    wanted.sort_unstable();
    wanted.dedup();
    let mut members: Vec<Vec<f32>> = vec![Vec::new(); wanted.len()];
    for &v in data {
        let b = ((order_key(v) - kmin) >> shift) as usize;
        if let Ok(slot) = wanted.binary_search(&b) {
            members[slot].push(v);
        }
    }
    for m in members.iter_mut() {
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

//! The statistics of a tolerance study: the result types ([`Summary`] and its parts), the
//! percentiles (exact order statistics, by histogram for the single-precision envelope table and
//! by selection for the per-run readings), the 40-bin histograms, the yield, and
//! [`MonteCarlo::summarize`] / [`MonteCarlo::finish`], which work them out from the runs done.

use super::envelope::order_key;
use super::Tolerances;
use super::{MonteCarlo, SAMPLE_BLOCK};
use crate::fmath;
use crate::spec::ResponseClass;
use serde::Serialize;
use std::f64::consts::PI;

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
    10.0 * fmath::log10(v)
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
    /// Share of runs whose stopband keeps at least the depth the mask asks (0–1): for a
    /// band-stop, the boards whose notch stays deep enough across its stop band; `None` without
    /// a stopband in the mask.
    pub stopband_kept: Option<f64>,
    /// Per-stage f0 and Q, in signal order.
    pub stages: Vec<StageSpread>,
    /// Soft problems (runs without a cutoff crossing on the grid, fallbacks).
    pub warnings: Vec<String>,
    /// Largest difference of sampled runs from their loaded-board solves, dB (`None` when the
    /// op amp has no output resistance and the cascade product is exact); see the module docs.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub loading_residual_db: Option<f64>,
    /// True when the residual was above the threshold and every run was therefore solved on the
    /// loaded board with its drawn values (the figures are the loaded board's); written only
    /// when true, so the studies that do not need it read as before.
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub loaded_runs: bool,
}

impl MonteCarlo {
    /// Works out the percentile curves of up to `max_points` more grid points of the finished
    /// runs, and returns how many grid points are left. [`MonteCarlo::finish`] does what is
    /// left; summarizing a few points at a time first keeps each piece of work short (the page
    /// stays responsive) and gives the same numbers. A [`MonteCarlo::step`] afterwards makes the
    /// summary start over, since its runs change every curve.
    ///
    /// A study too large to keep every run's |H|² replays its runs instead (`envelope.rs`); then
    /// `max_points` counts pieces of eight replayed runs, and the number
    /// returned is the pieces left in the current pass (0 when the curves are done).
    pub fn summarize(&mut self, max_points: usize) -> usize {
        if !self.keeps_table() {
            return self.summarize_by_replay(max_points);
        }
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
                let rows = &self.envelope.table[row0..row0 + group * SAMPLE_BLOCK];
                for (c, row) in columns.iter_mut().zip(rows.chunks_exact(SAMPLE_BLOCK)) {
                    // A whole block is one fixed-size copy (inlined), not a call to memmove
                    // for 64 bytes.
                    match <&[f32; SAMPLE_BLOCK]>::try_from(row) {
                        Ok(full) if count == SAMPLE_BLOCK => c.extend_from_slice(full),
                        _ => c.extend_from_slice(&row[..count]),
                    }
                }
            }
            for c in columns.iter_mut().take(group) {
                // NaN marks a run without readings (and a reading that is not a number). Its
                // order key lies outside the keys of ±∞, so the key range found first tells
                // whether there is one, without a pass of its own.
                let mut keys = key_range(c);
                if keys.0 < order_key(f32::NEG_INFINITY) || keys.1 > order_key(f32::INFINITY) {
                    c.retain(|v| !v.is_nan());
                    keys = key_range(c);
                }
                let values = percentiles_f32_keyed(c, pct, &mut scratch, keys);
                for (curve, v) in self.curves.iter_mut().zip(values) {
                    curve.db.push(power_db(v));
                }
            }
        }
        n_grid - end
    }

    /// [`MonteCarlo::summarize`] for a study without the table: the exact order statistics of
    /// each grid point by replaying the runs, then every curve at once.
    fn summarize_by_replay(&mut self, max_points: usize) -> usize {
        let n_grid = self.n_grid;
        if self.curves.first().is_some_and(|c| c.db.len() == n_grid) {
            return 0;
        }
        let pct = self.settings.percentiles.clone();
        let ranks = |n: usize| -> Vec<usize> {
            pct.iter()
                .flat_map(|&p| {
                    let (i, j, t) = rank_plan(p, n);
                    if t > 0.0 {
                        vec![i, j]
                    } else {
                        vec![i]
                    }
                })
                .collect()
        };
        let runs = max_points.saturating_mul(REPLAY_RUNS_PER_POINT);
        let points = match self.select_by_replay(&ranks, runs) {
            Ok(points) => points,
            Err(runs_left) => return runs_left.div_ceil(REPLAY_RUNS_PER_POINT).max(1),
        };
        let mut curves: Vec<PercentileCurve> = pct
            .iter()
            .map(|&p| PercentileCurve {
                percentile: p,
                db: Vec::with_capacity(n_grid),
            })
            .collect();
        for (f, found) in points.iter().enumerate() {
            let n_valid = self.envelope_readings(f);
            let value_at = |rank: usize| -> f64 {
                found
                    .iter()
                    .find(|&&(r, _)| r == rank)
                    .map_or(f64::NAN, |&(_, v)| f64::from(v))
            };
            for (curve, &p) in curves.iter_mut().zip(&pct) {
                let v = if n_valid == 0 {
                    f64::NAN
                } else {
                    // As in `percentiles_f32_with`: interpolated between ranks i and j.
                    let (i, j, t) = rank_plan(p, n_valid);
                    let lo = value_at(i);
                    let hi = if t > 0.0 { value_at(j) } else { lo };
                    lo * (1.0 - t) + hi * t
                };
                curve.db.push(power_db(v));
            }
        }
        self.curves = curves;
        0
    }

    /// The results of the runs done so far.
    pub fn finish(mut self) -> Summary {
        // One call does the table's points, or one replayed pass; a pass narrows every rank by
        // at least eight of its 32 key bits, so a few passes finish (the bound guards a defect).
        for _ in 0..64 {
            if self.summarize(usize::MAX) == 0 {
                break;
            }
        }
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
        let loaded_runs = self.loaded_runs.is_some();
        if let Some(r) = self
            .loading_residual_db
            .filter(|&r| r > super::LOADING_RESIDUAL_WARN_DB && !loaded_runs)
        {
            warnings.push(format!(
                "the runs' loading by the op amps' output resistance is followed to {r:.4} dB \
                 (the nominal correction; checked on {} runs solved as loaded boards)",
                super::LOADING_PROBE_RUNS
            ));
        }
        Summary {
            loading_residual_db: self.loading_residual_db,
            loaded_runs,
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
            stopband_kept: self.required_stop_db.filter(|_| n > 0).map(|required| {
                // The same 1e-12 slack as the mask's bound on |H|² (plan.rs), in dB.
                let floor = required - 10.0 * 1e-12 / std::f64::consts::LN_10;
                self.atten_db.iter().filter(|&&a| a >= floor).count() as f64 / n as f64
            }),
            stopband_attenuation_db: self
                .has_stop
                .then(|| spread_of(self.nominal.atten_db, self.atten_db, pct)),
            stages,
            warnings,
        }
    }
}

/// Replayed runs per unit of [`MonteCarlo::summarize`]'s work for a study without the table.
const REPLAY_RUNS_PER_POINT: usize = 8;

/// The ranks of percentile `p` of `n > 0` samples: the order statistics `i` and `j = i + 1`
/// (the last one at the top) and the weight `t` of `j` (linear interpolation).
fn rank_plan(p: f64, n: usize) -> (usize, usize, f64) {
    let pos = (p / 100.0).clamp(0.0, 1.0) * (n - 1) as f64;
    let i = pos.floor() as usize;
    (i, (i + 1).min(n - 1), pos - i as f64)
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
    percentiles_f32_keyed(data, percentiles, scratch, key_range(data))
}

/// The smallest and largest order key of `data` (`(u32::MAX, 0)` when empty).
fn key_range(data: &[f32]) -> (u32, u32) {
    data.iter().fold((u32::MAX, 0u32), |(lo, hi), &v| {
        let k = order_key(v);
        (lo.min(k), hi.max(k))
    })
}

/// [`percentiles_f32_with`] with the key range of `data` ([`key_range`]) already known.
fn percentiles_f32_keyed(
    data: &[f32],
    percentiles: &[f64],
    scratch: &mut PercentileScratch,
    (kmin, kmax): (u32, u32),
) -> Vec<f64> {
    let n = data.len();
    if n == 0 {
        return vec![f64::NAN; percentiles.len()];
    }
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
    let plan: Vec<(usize, usize, f64)> = percentiles.iter().map(|&p| rank_plan(p, n)).collect();
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

//! The envelope's percentile curves in bounded memory: the exact order statistics of every run's
//! |H|² (in single precision) at each grid point, without keeping every run's curve.
//!
//! A study small enough (runs × grid points ≤ [`TABLE_VALUES`]: 4 MB of f32 on the page, 32 MB
//! natively) keeps the table of every run's |H|² and selects from it ([`super::summary`]). A larger study keeps, per grid
//! point, only the smallest and largest order key and the count of readings; its summary then
//! replays the runs — the draws come from the seed, and a run's numbers do not depend on its
//! batch or on how the runs are cut into steps (module docs of [`super`]) — and finds each wanted
//! order statistic by radix selection on the f32 order keys: a first pass counts the readings of
//! each grid point in up to 4096 buckets between its smallest and largest key, a second collects
//! the readings of the buckets that hold a wanted rank (at most [`COLLECT_CAP`] per bucket, or that
//! bucket is counted again in 256 narrower buckets first) and sorts them. Both ways give the same
//! order statistics, so the same percentiles to the bit (`tests` below compare them).
//!
//! Memory of the replay: per grid point 4096 counts (4 bytes) in the first pass; afterwards at most
//! one collection of [`COLLECT_CAP`] readings or 256 counts per wanted rank (two ranks per
//! percentile). For the page's 241 points and three percentiles: 3.9 MB, then at most 11.8 MB,
//! whatever the number of runs. The time: each pass costs about as much as the runs themselves,
//! and a smooth distribution needs two.

use super::MonteCarlo;
use crate::analysis::lanes::{RunLanes, RUN_LANES};
use rand_core::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;

/// Largest table of every run's |H|² (f32 values) a study keeps; past it the summary replays.
/// The page keeps 4 MB (its heap is bounded, issue 13); the command line 32 MB, so that a
/// 20,000-run study on 200 points (16 MB) is worked once instead of two or three times.
#[cfg(target_arch = "wasm32")]
pub(super) const TABLE_VALUES: usize = 1 << 20;
/// Largest table of every run's |H|² (f32 values) a study keeps; past it the summary replays.
/// The page keeps 4 MB (its heap is bounded, issue 13); the command line 32 MB, so that a
/// 20,000-run study on 200 points (16 MB) is worked once instead of two or three times.
#[cfg(not(target_arch = "wasm32"))]
pub(super) const TABLE_VALUES: usize = 1 << 23;
/// Buckets of the first counting pass per grid point.
const FIRST_BUCKETS: u64 = 4096;
/// Sub-buckets when a bucket is counted again.
const NEXT_BITS: u32 = 8;
/// Most readings collected for one bucket; a fuller bucket is counted again first.
pub(super) const COLLECT_CAP: usize = 2048;

/// A key of an f32 whose unsigned order is the float's total order (negative values have every
/// bit flipped, the others only the sign bit; written without a branch so the passes over the
/// samples vectorise).
#[inline(always)]
pub(super) fn order_key(v: f32) -> u32 {
    let b = v.to_bits();
    let flip = ((b as i32) >> 31) as u32 | 0x8000_0000;
    b ^ flip
}

/// The f32 of an order key (the inverse of [`order_key`]).
fn from_order_key(k: u32) -> f32 {
    f32::from_bits(if k & 0x8000_0000 != 0 {
        k ^ 0x8000_0000
    } else {
        !k
    })
}

/// What the study keeps of every run's |H|² for the envelope's percentiles.
#[derive(Debug, Clone)]
pub(super) struct EnvelopeStore {
    /// Whether this study keeps the table (decided on the first run from the runs asked for).
    keep_table: Option<bool>,
    /// Largest table kept, f32 values ([`TABLE_VALUES`]; the tests lower it).
    table_limit: usize,
    /// Most readings collected per bucket ([`COLLECT_CAP`]; the tests lower it).
    collect_cap: usize,
    /// |H|² of every run in single precision, in blocks of `SAMPLE_BLOCK` runs stored
    /// frequency-major inside each block (when the table is kept).
    pub(super) table: Vec<f32>,
    /// Per grid point, the smallest and largest order key of the readings (when it is not).
    key_min: Vec<u32>,
    key_max: Vec<u32>,
    /// Per grid point, the readings that are numbers.
    n_valid: Vec<usize>,
    /// The replayed selection in progress.
    selection: Option<Selection>,
    /// True while the runs being worked are a replay (they are fed to the selection only).
    pub(super) replaying: bool,
}

impl Default for EnvelopeStore {
    fn default() -> Self {
        EnvelopeStore {
            keep_table: None,
            table_limit: TABLE_VALUES,
            collect_cap: COLLECT_CAP,
            table: Vec::new(),
            key_min: Vec::new(),
            key_max: Vec::new(),
            n_valid: Vec::new(),
            selection: None,
            replaying: false,
        }
    }
}

/// A replay of the runs that narrows every wanted rank down to its value.
#[derive(Debug, Clone)]
struct Selection {
    /// Runs done when the selection began (more runs start it over).
    runs: usize,
    /// Runs replayed in the current pass.
    replayed: usize,
    /// The random stream of the replay (swapped with the study's own around each piece).
    rng: Xoshiro256PlusPlus,
    /// Per grid point, the wanted ranks and the buckets they are in.
    points: Vec<PointSelection>,
}

/// The wanted ranks of one grid point.
#[derive(Debug, Clone, Default)]
struct PointSelection {
    /// Per wanted rank: its rank, and its value once found.
    targets: Vec<(usize, Option<f32>)>,
    /// Disjoint key ranges being counted or collected in this pass.
    groups: Vec<Group>,
}

/// A key range `[lo, lo + span)` of one grid point, counted in buckets of `2^shift` keys or
/// collected, and the targets inside it: (index into `targets`, rank among the range's readings).
#[derive(Debug, Clone)]
struct Group {
    lo: u32,
    span: u64,
    shift: u32,
    work: GroupWork,
    members: Vec<(usize, usize)>,
}

#[derive(Debug, Clone)]
enum GroupWork {
    Count(Vec<u32>),
    Collect(Vec<f32>),
}

impl Group {
    /// A range holding `n` readings: collected when few enough, else counted in up to
    /// `2^bits` buckets.
    fn new(
        lo: u32,
        span: u64,
        (n, cap): (usize, usize),
        bits: u32,
        members: Vec<(usize, usize)>,
    ) -> Group {
        if n <= cap || span <= 1 {
            return Group {
                lo,
                span,
                shift: 0,
                work: GroupWork::Collect(Vec::with_capacity(if span <= 1 { 0 } else { n })),
                members,
            };
        }
        let mut shift = 0u32;
        while ((span - 1) >> shift) >= (1u64 << bits) {
            shift += 1;
        }
        let n_buckets = ((span - 1) >> shift) as usize + 1;
        Group {
            lo,
            span,
            shift,
            work: GroupWork::Count(vec![0; n_buckets]),
            members,
        }
    }

    /// Whether the key falls in the range.
    #[inline(always)]
    fn holds(&self, k: u32) -> bool {
        k >= self.lo && u64::from(k - self.lo) < self.span
    }
}

impl MonteCarlo {
    /// Makes this study replay its runs for the envelope however small it is, collecting at
    /// most `cap` readings per bucket (the checks of the replay against the table).
    #[cfg(test)]
    pub(super) fn replay_always(&mut self, cap: usize) {
        self.envelope.table_limit = 0;
        self.envelope.collect_cap = cap;
    }

    /// Whether this study keeps the table of every run's |H|².
    pub(super) fn keeps_table(&mut self) -> bool {
        let limit = self.envelope.table_limit;
        let runs = self.settings.runs;
        let n_grid = self.n_grid;
        *self
            .envelope
            .keep_table
            .get_or_insert_with(|| runs.saturating_mul(n_grid) <= limit)
    }

    /// Records the key range and count of the lanes `first..last` of the batch's grid (for a
    /// study without the table).
    pub(super) fn record_key_range(&mut self, first: usize, last: usize, live: [bool; RUN_LANES]) {
        let n_grid = self.n_grid;
        let store = &mut self.envelope;
        if store.key_min.len() != n_grid {
            store.key_min = vec![u32::MAX; n_grid];
            store.key_max = vec![0; n_grid];
            store.n_valid = vec![0; n_grid];
        }
        for (f, v) in self.batch.h2[..n_grid].iter().enumerate() {
            for l in first..last {
                let x = v[l] as f32;
                if live[l] && !x.is_nan() {
                    let k = order_key(x);
                    store.key_min[f] = store.key_min[f].min(k);
                    store.key_max[f] = store.key_max[f].max(k);
                    store.n_valid[f] += 1;
                }
            }
        }
    }

    /// Feeds the lanes `first..last` of a replayed batch to the selection.
    pub(super) fn feed_replay(&mut self, first: usize, last: usize, live: [bool; RUN_LANES]) {
        let n_grid = self.n_grid;
        let grid: &[RunLanes] = &self.batch.h2[..n_grid];
        let Some(sel) = self.envelope.selection.as_mut() else {
            return;
        };
        for (point, v) in sel.points.iter_mut().zip(grid) {
            if point.groups.is_empty() {
                continue;
            }
            for l in first..last {
                let x = v[l] as f32;
                if !live[l] || x.is_nan() {
                    continue;
                }
                let k = order_key(x);
                if let Some(g) = point.groups.iter_mut().find(|g| g.holds(k)) {
                    match &mut g.work {
                        GroupWork::Count(counts) => {
                            if let Some(c) = counts.get_mut(((k - g.lo) >> g.shift) as usize) {
                                *c += 1;
                            }
                        }
                        GroupWork::Collect(values) => {
                            if g.span > 1 {
                                values.push(x);
                            }
                        }
                    }
                }
            }
        }
        sel.replayed += last - first;
    }

    /// The readings that are numbers at grid point `f` (a study without the table).
    pub(super) fn envelope_readings(&self, f: usize) -> usize {
        self.envelope.n_valid.get(f).copied().unwrap_or(0)
    }

    /// The replayed selection's next piece: up to `max_runs` more replayed runs. Returns the
    /// wanted order statistics per grid point (each rank with its value) once every rank is
    /// found, else the runs left in the current pass.
    ///
    /// # Errors
    /// The runs left to replay in the current pass (more passes may follow) when not done.
    pub(super) fn select_by_replay(
        &mut self,
        ranks: &dyn Fn(usize) -> Vec<usize>,
        max_runs: usize,
    ) -> Result<Vec<Vec<(usize, f32)>>, usize> {
        let n = self.done;
        if self.envelope.selection.as_ref().map(|s| s.runs) != Some(n) {
            self.envelope.selection = Some(self.start_selection(ranks));
        }
        let unfinished = |s: &Selection| s.points.iter().any(|p| !p.groups.is_empty());
        if self.envelope.selection.as_ref().is_some_and(unfinished) {
            self.replay_piece(max_runs);
        }
        let Some(sel) = self.envelope.selection.as_ref() else {
            return Err(n);
        };
        if unfinished(sel) {
            return Err((sel.runs - sel.replayed).max(1));
        }
        Ok(sel
            .points
            .iter()
            .map(|p| {
                p.targets
                    .iter()
                    .map(|&(r, v)| (r, v.unwrap_or(f32::NAN)))
                    .collect()
            })
            .collect())
    }

    /// The first pass's ranges: per grid point the readings' whole key range.
    fn start_selection(&self, ranks: &dyn Fn(usize) -> Vec<usize>) -> Selection {
        let store = &self.envelope;
        let points = (0..self.n_grid)
            .map(|f| {
                let n_valid = store.n_valid.get(f).copied().unwrap_or(0);
                if n_valid == 0 {
                    return PointSelection::default();
                }
                let mut wanted = ranks(n_valid);
                wanted.sort_unstable();
                wanted.dedup();
                let (lo, hi) = (store.key_min[f], store.key_max[f]);
                let members = wanted.iter().enumerate().map(|(t, &r)| (t, r)).collect();
                let span = u64::from(hi - lo) + 1;
                let bits = FIRST_BUCKETS.trailing_zeros();
                let mut point = PointSelection {
                    targets: wanted.iter().map(|&r| (r, None)).collect(),
                    groups: vec![Group::new(
                        lo,
                        span,
                        (n_valid, store.collect_cap),
                        bits,
                        members,
                    )],
                };
                resolve_single_keys(&mut point);
                point
            })
            .collect();
        Selection {
            runs: self.done,
            replayed: 0,
            rng: Xoshiro256PlusPlus::seed_from_u64(self.settings.seed),
            points,
        }
    }

    /// Replays up to `max_runs` runs into the current pass, and narrows the ranges when the pass
    /// is complete. The study's random stream, fallback count and progress are left as they were.
    fn replay_piece(&mut self, max_runs: usize) {
        let Some(sel) = self.envelope.selection.as_mut() else {
            return;
        };
        let end = sel.replayed.saturating_add(max_runs.max(1)).min(sel.runs);
        std::mem::swap(&mut self.rng, &mut sel.rng);
        let fallbacks = self.fallbacks;
        self.envelope.replaying = true;
        loop {
            let replayed = self.envelope.selection.as_ref().map_or(end, |s| s.replayed);
            if replayed >= end {
                break;
            }
            let first = replayed % RUN_LANES;
            let last = (first + (end - replayed)).min(RUN_LANES);
            self.run_batch(Some((first, last)));
        }
        self.envelope.replaying = false;
        self.fallbacks = fallbacks;
        let Some(sel) = self.envelope.selection.as_mut() else {
            return;
        };
        std::mem::swap(&mut self.rng, &mut sel.rng);
        if sel.replayed >= sel.runs {
            for point in sel.points.iter_mut() {
                narrow(point, self.envelope.collect_cap);
            }
            sel.replayed = 0;
            sel.rng = Xoshiro256PlusPlus::seed_from_u64(self.settings.seed);
        }
    }
}

/// A range of a single key holds one value: its targets are found without a pass.
fn resolve_single_keys(point: &mut PointSelection) {
    let PointSelection { targets, groups } = point;
    groups.retain(|g| {
        if g.span > 1 {
            return true;
        }
        for &(t, _) in &g.members {
            targets[t].1 = Some(from_order_key(g.lo));
        }
        false
    });
}

/// After a complete pass: collected ranges give their targets' values; each counted range hands
/// its targets to the bucket holding their rank, to be collected or counted again.
fn narrow(point: &mut PointSelection, cap: usize) {
    let mut next: Vec<Group> = Vec::new();
    for g in std::mem::take(&mut point.groups) {
        match g.work {
            GroupWork::Collect(mut values) => {
                values.sort_unstable_by(|a, b| a.total_cmp(b));
                for &(t, r) in &g.members {
                    point.targets[t].1 = Some(values.get(r).copied().unwrap_or(f32::NAN));
                }
            }
            GroupWork::Count(counts) => {
                let mut starts = Vec::with_capacity(counts.len() + 1);
                let mut total = 0usize;
                starts.push(0usize);
                for &c in &counts {
                    total += c as usize;
                    starts.push(total);
                }
                for &(t, r) in &g.members {
                    // The bucket b with starts[b] ≤ r < starts[b + 1].
                    let b = starts.partition_point(|&s| s <= r).saturating_sub(1);
                    let b = b.min(counts.len().saturating_sub(1));
                    let lo = u64::from(g.lo) + ((b as u64) << g.shift);
                    let lo = u32::try_from(lo).unwrap_or(u32::MAX);
                    let span = (1u64 << g.shift).min(g.span - (u64::from(lo) - u64::from(g.lo)));
                    let rank = r - starts[b];
                    match next.iter_mut().find(|n| n.lo == lo && n.span == span) {
                        Some(n) => n.members.push((t, rank)),
                        None => next.push(Group::new(
                            lo,
                            span,
                            (counts.get(b).map_or(0, |&c| c as usize), cap),
                            NEXT_BITS,
                            vec![(t, rank)],
                        )),
                    }
                }
            }
        }
    }
    point.groups = next;
    resolve_single_keys(point);
}

//! The per-batch scratch of a tolerance study ([`Batch`]: eight runs side by side, one per lane)
//! and the steps that fill it and empty it: the draws, each stage's N and D with the dominant
//! factor's f0 and Q and the |N|², |D|² table of the kernel, and the storing of the finished
//! runs into the study's results.

use super::{MonteCarlo, PartDistribution, SAMPLE_BLOCK};
use crate::analysis::lanes::{Lane8, RunLanes, RUN_LANES};
use crate::analysis::magnitude::magnitude_squared_lanes;
use crate::analysis::poly::Poly;
use crate::analysis::roots::{bairstow, dominant_w0_q, newton_real, split_cubic_lanes};
use num_complex::Complex64;
use rand_distr::{Distribution, StandardNormal};
use std::f64::consts::PI;

/// The runs of one batch, side by side in [`RUN_LANES`] lanes (lane `l` holds the run whose index
/// is `l` modulo [`RUN_LANES`]), and the working values they share.
#[derive(Debug, Clone)]
pub(super) struct Batch {
    /// Lanes holding a run of this batch.
    pub(super) active: [bool; RUN_LANES],
    /// Lanes whose run hit a singular matrix (a failed board without readings).
    pub(super) failed: [bool; RUN_LANES],
    /// Part values of every part of the board in draw order, one lane per run.
    pub(super) values: Vec<RunLanes>,
    /// Per-stage |N|², |D|² coefficients in x, `width` each, normalized by max |D|² coefficient.
    pub(super) coef_n: Vec<RunLanes>,
    pub(super) coef_d: Vec<RunLanes>,
    /// Per stage, the highest degree of |N|², |D|² over the batch's runs (the Horner loops start
    /// there; a higher coefficient of a lane is zero, which Horner's rule passes exactly).
    pub(super) deg_n: Vec<usize>,
    pub(super) deg_d: Vec<usize>,
    /// Per stage, the dominant factor's f0 (rad/s) and Q.
    pub(super) w0: Vec<RunLanes>,
    pub(super) q: Vec<RunLanes>,
    /// |H|² at every evaluation point.
    pub(super) h2: Vec<RunLanes>,
    /// The kernel's running denominator products.
    pub(super) den: Vec<RunLanes>,
    /// The readings of each lane's run.
    pub(super) pass: [bool; RUN_LANES],
    pub(super) cut_lo_hz: RunLanes,
    pub(super) cut_hi_hz: RunLanes,
    pub(super) gain_db: RunLanes,
    pub(super) atten_db: RunLanes,
}

impl MonteCarlo {
    /// Draws the runs of lanes `first..last`, run after run, part after part (the order of the
    /// module docs). The other lanes keep values of earlier runs: they are analysed (the lanes are
    /// computed together) but not recorded. Scalar work, so a call of its own (it is used by the
    /// batch and by the loading probe) rather than a copy in each.
    pub(super) fn draw(&mut self, first: usize, last: usize) {
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
    pub(super) fn form_batch<V: Lane8>(&mut self) {
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

    /// Adds the batch's runs of lanes `first..last` to the results, in run order.
    #[inline(always)]
    pub(super) fn record_batch<V: Lane8>(&mut self, first: usize, last: usize) {
        let n_grid = self.n_grid;
        let live = live_lanes(&self.batch);
        if self.envelope.replaying {
            // A replay for the envelope's percentiles: the runs are already recorded.
            self.feed_replay(first, last, live);
            return;
        }
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
        if self.keeps_table() {
            self.record_table::<V>(first, last, live);
        } else {
            self.record_key_range(first, last, live);
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

    /// Stores the |H|² of the lanes `first..last` into the table of every run (a small study).
    #[inline(always)]
    fn record_table<V: Lane8>(&mut self, first: usize, last: usize, live: [bool; RUN_LANES]) {
        let n_grid = self.n_grid;
        let grid = &self.batch.h2[..n_grid];
        // The lane group of this batch inside its sample block (blocks start NaN-filled, which
        // marks a run without readings).
        let group_run = self.done - first;
        let block = group_run / SAMPLE_BLOCK;
        let base = block * SAMPLE_BLOCK * n_grid + group_run % SAMPLE_BLOCK;
        let table = &mut self.envelope.table;
        if table.capacity() == 0 {
            // The whole table at once, from the runs asked for: grown block by block it would be
            // copied and faulted in again at every doubling.
            table.reserve_exact(self.settings.runs.div_ceil(SAMPLE_BLOCK) * SAMPLE_BLOCK * n_grid);
        }
        if table.len() < (block + 1) * SAMPLE_BLOCK * n_grid {
            table.resize((block + 1) * SAMPLE_BLOCK * n_grid, f32::NAN);
        }
        let samples = &mut table[base..];
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
    }
}

/// Lanes holding a run of the batch that has not failed.
#[inline(always)]
pub(super) fn live_lanes(b: &Batch) -> [bool; RUN_LANES] {
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

//! The lane kernels of a tolerance study: one batch run end to end in the compiled form chosen
//! for this processor, the branch-free cascade kernel (|H|² of eight runs at every evaluation
//! point), and the readings taken from it: the mask check for the yield, the cutoff crossings
//! refined by regula falsi, the passband gain and the stopband attenuation.

use super::batch::live_lanes;
use super::plan::LoadedRuns;
use super::MonteCarlo;
use crate::analysis::lanes::{self, Isa, Lane8, RunLanes, RUN_LANES};
use crate::fmath;
use crate::spec::ResponseClass;
use std::f64::consts::PI;

impl MonteCarlo {
    /// One batch: with `Some((first, last))` the runs of lanes `first..last` are drawn, analysed
    /// and recorded; with `None` the batch's current values are analysed for the lanes already
    /// marked active (the nominal board), and nothing is recorded.
    pub(super) fn run_batch(&mut self, lanes: Option<(usize, usize)>) {
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
        if let Some(corr) = &self.loading_h2 {
            // The nominal loading correction, the same multiplication in every lane.
            for (h, &c) in self.batch.h2.iter_mut().zip(corr) {
                for v in h.iter_mut() {
                    *v *= c;
                }
            }
        }
        // The loaded path: the study's loaded board is taken out for the batch so that the
        // cutoff search can solve on it while reading the study.
        let mut loaded = self.loaded_runs.take();
        if let Some(lr) = loaded.as_mut() {
            let live = live_lanes(&self.batch);
            lr.solve_batch(&mut self.batch, live);
        }
        self.evaluate_batch::<V>(loaded.as_mut());
        self.loaded_runs = loaded;
        if let Some((first, last)) = lanes {
            self.record_batch::<V>(first, last);
        }
    }

    /// Yield, cutoffs, passband gain and stopband attenuation of the batch's runs from their |H|²
    /// (with `loaded`, the cutoff search solves each lane's loaded board).
    #[inline(always)]
    fn evaluate_batch<V: Lane8>(&mut self, mut loaded: Option<&mut LoadedRuns>) {
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
            // Upper edge: the highest grid point still at or above the level, then the next one,
            // searched from the passband's last peak on (the last local maximum within 6 dB
            // of the level; a stopband bump lies far below it). When that peak itself has
            // dropped below the level (a ripple of an equiripple board lowered by the parts),
            // the edge is the peak: the reading then moves on with the peak instead of jumping
            // back to an earlier ripple trough.
            let peak = self.last_peak::<V>(grid, false);
            let mut last = V::splat(-1.0);
            for (i, v) in grid.iter().enumerate() {
                let at = V::splat(i as f64);
                let hit = V::and(V::load(v).ge(level), at.ge(peak));
                last = V::select(hit, at, last);
            }
            let last = index_of::<V>(last);
            let peak = index_of::<V>(peak);
            let mut a = [1.0; RUN_LANES];
            let mut bx = [1.0; RUN_LANES];
            let mut go = [false; RUN_LANES];
            let mut at_peak = [None; RUN_LANES];
            for l in 0..RUN_LANES {
                match (live[l], last[l]) {
                    (true, Some(i)) if i + 1 < n_grid => {
                        a[l] = self.x_eval[i];
                        bx[l] = self.x_eval[i + 1];
                        go[l] = true;
                    }
                    (true, None) => at_peak[l] = peak[l],
                    _ => {}
                }
            }
            cut_hi = self.refine_crossing_lanes::<V>(a, bx, go, loaded.as_deref_mut());
            self.edge_at_peak(&mut cut_hi, at_peak);
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
            // The first grid point at or above the level below the end, searched up to the
            // passband's first peak (as for the upper edge, mirrored).
            let peak = self.last_peak::<V>(grid, true);
            let none = V::splat(-1.0);
            let limit = V::select(peak.lt(V::splat(0.0)), V::splat(n_grid as f64), peak);
            let mut first = none;
            for (i, v) in grid.iter().enumerate().rev() {
                let at = V::splat(i as f64);
                let hit = V::and(V::and(V::load(v).ge(level), at.lt(end)), at.le(limit));
                first = V::select(hit, at, first);
            }
            let first = index_of::<V>(first);
            let peak = index_of::<V>(peak);
            let mut a = [1.0; RUN_LANES];
            let mut bx = [1.0; RUN_LANES];
            let mut go = [false; RUN_LANES];
            let mut at_peak = [None; RUN_LANES];
            for l in 0..RUN_LANES {
                match (live[l], first[l]) {
                    (true, Some(i)) if i > 0 => {
                        a[l] = self.x_eval[i - 1];
                        bx[l] = self.x_eval[i];
                        go[l] = true;
                    }
                    (true, None) => at_peak[l] = peak[l],
                    _ => {}
                }
            }
            cut_lo = self.refine_crossing_lanes::<V>(a, bx, go, loaded.as_deref_mut());
            self.edge_at_peak(&mut cut_lo, at_peak);
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
                b.gain_db[l] = 10.0 * fmath::log10(gain[l]);
                b.atten_db[l] = if has_stop {
                    10.0 * fmath::log10(g2 / worst_l[l])
                } else {
                    f64::NAN
                };
            }
        }
    }

    /// Each lane's grid index of the passband's outermost peak: the last (or, with `first`,
    /// the first) interior local maximum of |H|² that lies within 6 dB of the cutoff level;
    /// without one, the grid's end on that side (a monotone response has no ripple to follow).
    // Inlined into each compiled form natively (it must run with the form's instruction set);
    // on wasm, where there is one form, a call: it is used in several places.
    #[cfg_attr(not(target_arch = "wasm32"), inline(always))]
    fn last_peak<V: Lane8>(&self, grid: &[RunLanes], first: bool) -> V {
        let n = grid.len();
        let floor = V::splat(0.25 * self.cutoff_level);
        let mut peak = V::splat(-1.0);
        if n >= 3 {
            if first {
                for i in (1..n - 1).rev() {
                    peak = peak_step(grid, i, floor, peak);
                }
            } else {
                for i in 1..n - 1 {
                    peak = peak_step(grid, i, floor, peak);
                }
            }
        }
        peak
    }

    /// Where a lane found no crossing after (or before) its outermost peak because the peak
    /// itself is below the level, its edge is the peak: the vertex of the parabola through the
    /// peak's grid point and its two neighbours (ln |H|² over ln x), so the reading is not held
    /// to grid points.
    fn edge_at_peak(&self, cut: &mut RunLanes, at_peak: [Option<usize>; RUN_LANES]) {
        let fg = self.w_g / (2.0 * PI);
        let h2 = &self.batch.h2;
        for (l, (c, p)) in cut.iter_mut().zip(at_peak).enumerate() {
            let Some(i) = p else { continue };
            let u = |k: usize| fmath::ln(self.x_eval[k]);
            let y = |k: usize| fmath::ln(h2[k][l]);
            let (u0, u1, u2) = (u(i - 1), u(i), u(i + 1));
            let (y0, y1, y2) = (y(i - 1), y(i), y(i + 1));
            // Vertex of the parabola through three points (Lagrange form, unequal spacing).
            let num = (u1 - u0) * (u1 - u0) * (y1 - y2) - (u1 - u2) * (u1 - u2) * (y1 - y0);
            let den = (u1 - u0) * (y1 - y2) - (u1 - u2) * (y1 - y0);
            let vertex = u1 - 0.5 * num / den;
            let x = if vertex.is_finite() && vertex > u0 && vertex < u2 {
                fmath::exp(vertex)
            } else {
                self.x_eval[i]
            };
            *c = fg * x.sqrt();
        }
    }

    /// The crossing of `level` between `a[l]` and `b[l]` (values of `x = (f/f_g)²` with |H|² on
    /// either side of it) for every lane with `go[l]`, in Hz (NaN elsewhere), to a relative
    /// accuracy of about 1e-11 in frequency: the Illinois variant of regula falsi on
    /// `|H|²/level − 1` over x, with `level` the cutoff level (smooth there, and no exponentials per step). The lanes iterate
    /// together, each one frozen once it has converged, so each lane's result is the one a
    /// scalar iteration of that run gives.
    // Inlined into each compiled form natively (it must run with the form's instruction set);
    // on wasm, where there is one form, a call: it is used in several places.
    #[cfg_attr(not(target_arch = "wasm32"), inline(always))]
    fn refine_crossing_lanes<V: Lane8>(
        &self,
        mut a: RunLanes,
        mut b: RunLanes,
        go: [bool; RUN_LANES],
        mut loaded: Option<&mut LoadedRuns>,
    ) -> RunLanes {
        let inv = V::splat(1.0 / self.cutoff_level);
        let fg = self.w_g / (2.0 * PI);
        let mut out = [f64::NAN; RUN_LANES];
        if !go.iter().any(|&v| v) {
            return out;
        }
        let mut ga = self.level_gap::<V>(&a, inv, &go, loaded.as_deref_mut());
        let mut gb = self.level_gap::<V>(&b, inv, &go, loaded.as_deref_mut());
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
            let gc = self.level_gap::<V>(&c, inv, &live, loaded.as_deref_mut());
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
    /// zero the cutoff search finds, with `inv` the inverse of the cutoff level). With `loaded`
    /// the lanes in `want` are solved on their loaded boards (the others are NaN: the search
    /// does not read them), without it every lane comes from the corrected product.
    // Inlined into each compiled form natively (it must run with the form's instruction set);
    // on wasm, where there is one form, a call: it is used in several places.
    #[cfg_attr(not(target_arch = "wasm32"), inline(always))]
    fn level_gap<V: Lane8>(
        &self,
        x: &RunLanes,
        inv: V,
        want: &[bool; RUN_LANES],
        loaded: Option<&mut LoadedRuns>,
    ) -> RunLanes {
        if let Some(lr) = loaded {
            let fg = self.w_g / (2.0 * PI);
            let mut hv = [f64::NAN; RUN_LANES];
            for l in 0..RUN_LANES {
                if want[l] {
                    hv[l] = lr.h2_at(l, fg * x[l].sqrt());
                }
            }
            let mut out = [0.0; RUN_LANES];
            V::load(&hv).mul(inv).sub(V::splat(1.0)).store(&mut out);
            return out;
        }
        let b = &self.batch;
        let h = h2_lanes::<V>(&b.coef_n, &b.coef_d, &b.deg_n, &b.deg_d, self.width, x);
        let mut out = [0.0; RUN_LANES];
        match &self.loading_h2 {
            None => h.mul(inv).sub(V::splat(1.0)).store(&mut out),
            Some(corr) => {
                let mut hv = [0.0; RUN_LANES];
                h.store(&mut hv);
                for l in 0..RUN_LANES {
                    hv[l] *= self.loading_at(corr, x[l]);
                }
                V::load(&hv).mul(inv).sub(V::splat(1.0)).store(&mut out);
            }
        }
        out
    }

    /// The loading correction at `x = (f/f_g)²` between grid points: linear in ln x of its
    /// logarithm, the end values outside the grid.
    fn loading_at(&self, corr: &[f64], x: f64) -> f64 {
        let grid = &self.x_eval[..self.n_grid];
        let i = grid.partition_point(|&g| g < x);
        if i == 0 {
            return corr[0];
        }
        if i >= grid.len() {
            return corr[grid.len() - 1];
        }
        let (x0, x1) = (grid[i - 1], grid[i]);
        let (c0, c1) = (corr[i - 1], corr[i]);
        if !(x > x0 && x1 > x0 && c0 > 0.0 && c1 > 0.0) {
            return c1;
        }
        // The logarithms of the interval's ends, worked out once per study (the same numbers
        // as taking them here).
        let [ln_dx, ln_c0, ln_dc] = self
            .loading_logs
            .get(i)
            .copied()
            .unwrap_or_else(|| [fmath::ln(x1 / x0), fmath::ln(c0), fmath::ln(c1 / c0)]);
        let w = fmath::ln(x / x0) / ln_dx;
        fmath::exp(ln_c0 + w * ln_dc)
    }
}

/// Per grid interval `i` (between points `i − 1` and `i`; entry 0 unused), the logarithms
/// [`MonteCarlo::loading_at`] interpolates with: `ln(x_i/x_{i−1})`, `ln c_{i−1}`,
/// `ln(c_i/c_{i−1})` of the correction `corr` on the grid `grid`.
pub(super) fn loading_logs(grid: &[f64], corr: &[f64]) -> Vec<[f64; 3]> {
    let mut out = vec![[f64::NAN; 3]; grid.len().min(corr.len())];
    for (i, v) in out.iter_mut().enumerate().skip(1) {
        *v = [
            fmath::ln(grid[i] / grid[i - 1]),
            fmath::ln(corr[i - 1]),
            fmath::ln(corr[i] / corr[i - 1]),
        ];
    }
    out
}

/// One grid point of [`MonteCarlo::last_peak`]: index `i` replaces `peak` in the lanes where
/// `grid[i]` is an interior local maximum at or above `floor`. A function rather than a closure
/// so that it is inlined into each compiled form of the batch (a closure is compiled once without
/// the form's instruction set, and every lane operation in it becomes a call).
#[inline(always)]
fn peak_step<V: Lane8>(grid: &[RunLanes], i: usize, floor: V, peak: V) -> V {
    let v = V::load(&grid[i]);
    let is_max = V::and(
        V::and(v.ge(V::load(&grid[i - 1])), v.ge(V::load(&grid[i + 1]))),
        v.ge(floor),
    );
    V::select(is_max, V::splat(i as f64), peak)
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
        // Natively the common sizes get fixed coefficient counts (unrolled Horner loops). The
        // page's wasm takes the one loop for any size: sixteen copies of the pass were most of
        // the study's code there, and the loop's count costs little beside eight lanes of work.
        // Both do the same operations in the same order, so the results are the same bits.
        #[cfg(not(target_arch = "wasm32"))]
        {
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
        #[cfg(target_arch = "wasm32")]
        stage_pass_any::<V>(x, &row_n[..nn], &row_d[..nd], pass, den, out);
    }
}

/// One stage's pass of [`cascade_kernel_lanes`] with `NN` numerator and `ND` denominator
/// coefficients (native builds; see `cascade_kernel_lanes_body`).
#[cfg(not(target_arch = "wasm32"))]
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

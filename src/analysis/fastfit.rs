//! The tolerance study's per-run fit of a stage: N(s) and D(s) from real-valued nodal solves at
//! K positive real frequencies, then `|N(jω)|²` and `|D(jω)|²` as polynomials in
//! `x = (ω/ω_g)²`, without allocating.
//!
//! Why positive real sample points: a stable circuit has no pole in the right half-plane, so the
//! nodal matrix `G + s·C` is regular for every real `s > 0`, and solving it needs only real
//! arithmetic (a quarter of the work of a complex solve). The points `z_i = s_i/ρ` are spread
//! geometrically over [1/4, 4] around the stage's frequency scale ρ; for the K ≤ 8 coefficients
//! of a stage the interpolation is well conditioned (checked against the circle fit of
//! [`super::poly`] in `tests/analysis.rs`). The output unknown is moved to the last position, so
//! the Cramer numerator is `±Π u_ii (i < n) · y_n` of the LU factors and needs no division.

use super::circuit::{Assembled, Compiled};
use crate::fmath;

/// One stage prepared for repeated real-point fits.
#[derive(Debug, Clone)]
pub struct FastFit {
    n: usize,
    k: usize,
    /// Sample frequencies s_i (rad/s, real, positive).
    s_points: Vec<f64>,
    /// `coef_u[j] = Σ_i interp[j·K + i] · p(s_i)`: coefficients in u = s/ω_g.
    interp: Vec<f64>,
    /// Unknown permutation that puts the output last.
    perm: Vec<usize>,
    /// Static pivot order: after the output-last permutation, row `row_order[k]` is eliminated at
    /// step k (chosen once from the nominal matrix, see [`FastFit::choose_pivots`]).
    row_order: Vec<usize>,
    /// Sign of the static row permutation.
    order_sign: f64,
    /// Whether the static pivot order may be used.
    static_ok: bool,
    /// Row-major index of `G`/`C` → its place after both permutations; row → its place.
    slot_map: Vec<usize>,
    row_map: Vec<usize>,
    /// The op-amp base matrices, already permuted, and a work copy stamped per run.
    perm_base: Option<Assembled>,
    perm_work: Option<Assembled>,
    m: Vec<f64>,
    rhs: Vec<f64>,
    num_samples: Vec<f64>,
    den_samples: Vec<f64>,
    /// Fitted numerator coefficients in u (ascending).
    pub num_u: Vec<f64>,
    /// Fitted denominator coefficients in u (ascending).
    pub den_u: Vec<f64>,
    /// `(ρ/ω_g)^j`: converts a coefficient in u back to the stage's own scale z = s/ρ.
    to_z: Vec<f64>,
}

/// Inverse of a small dense matrix by Gauss–Jordan elimination with partial pivoting; `None` when
/// singular.
fn invert(a: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut m = a.to_vec();
    let mut inv = vec![0.0; n * n];
    for i in 0..n {
        inv[i * n + i] = 1.0;
    }
    for col in 0..n {
        let piv = (col..n).max_by(|&x, &y| {
            m[x * n + col]
                .abs()
                .partial_cmp(&m[y * n + col].abs())
                .unwrap_or(std::cmp::Ordering::Equal)
        })?;
        if m[piv * n + col] == 0.0 {
            return None;
        }
        for c in 0..n {
            m.swap(col * n + c, piv * n + c);
            inv.swap(col * n + c, piv * n + c);
        }
        let d = 1.0 / m[col * n + col];
        for c in 0..n {
            m[col * n + c] *= d;
            inv[col * n + c] *= d;
        }
        for r in 0..n {
            if r != col {
                let f = m[r * n + col];
                if f != 0.0 {
                    for c in 0..n {
                        m[r * n + c] -= f * m[col * n + c];
                        inv[r * n + c] -= f * inv[col * n + c];
                    }
                }
            }
        }
    }
    Some(inv)
}

impl FastFit {
    /// Prepares the fit of `compiled` at frequency scale `rho_rad_s`, coefficients in
    /// `u = s/w_g_rad_s`.
    pub fn new(compiled: &Compiled, rho_rad_s: f64, w_g_rad_s: f64) -> FastFit {
        let n = compiled.n;
        let k = compiled.degree_bound + 1;
        let z: Vec<f64> = (0..k)
            .map(|i| {
                if k == 1 {
                    1.0
                } else {
                    fmath::powf(4f64, -1.0 + 2.0 * i as f64 / (k - 1) as f64)
                }
            })
            .collect();
        let mut vander = vec![0.0; k * k];
        for (i, &zi) in z.iter().enumerate() {
            let mut p = 1.0;
            for j in 0..k {
                vander[i * k + j] = p;
                p *= zi;
            }
        }
        // The geometric points of [1/4, 4] always give a regular Vandermonde matrix.
        let vinv = invert(&vander, k).unwrap_or_else(|| vec![0.0; k * k]);
        // Coefficients in z to coefficients in u: c_u,j = c_z,j · (ω_g/ρ)^j.
        let ratio = w_g_rad_s / rho_rad_s;
        let mut interp = vinv;
        let mut f = 1.0;
        for j in 0..k {
            for i in 0..k {
                interp[j * k + i] *= f;
            }
            f *= ratio;
        }
        let mut perm: Vec<usize> = (0..n).collect();
        if n > 0 {
            perm.swap(compiled.output_col, n - 1);
        }
        FastFit {
            n,
            k,
            s_points: z.iter().map(|zi| zi * rho_rad_s).collect(),
            interp,
            perm,
            row_order: (0..n).collect(),
            order_sign: 1.0,
            static_ok: false,
            slot_map: Vec::new(),
            row_map: Vec::new(),
            perm_base: None,
            perm_work: None,
            m: vec![0.0; n * n],
            rhs: vec![0.0; n],
            num_samples: vec![0.0; k],
            den_samples: vec![0.0; k],
            num_u: vec![0.0; k],
            den_u: vec![0.0; k],
            to_z: (0..k).map(|j| fmath::powi(ratio, -(j as i32))).collect(),
        }
    }

    /// Sets to zero the coefficients of N and D that are rounding noise: smaller than
    /// [`super::poly::FIT_TRIM_REL`] times the largest, compared in the stage's own scale z = s/ρ
    /// (the scale in which the coefficients are balanced).
    pub fn trim(&mut self) {
        for poly in [&mut self.num_u, &mut self.den_u] {
            let max = poly
                .iter()
                .zip(&self.to_z)
                .fold(0.0f64, |m, (c, t)| m.max((c * t).abs()));
            let thr = super::poly::FIT_TRIM_REL * max;
            for (c, t) in poly.iter_mut().zip(&self.to_z) {
                if (*c * t).abs() <= thr {
                    *c = 0.0;
                }
            }
        }
    }

    /// [`FastFit::trim`] for `L` runs side by side: `poly[j][l]` is coefficient `j` (in u) of run
    /// `l`. Each lane is trimmed exactly as the scalar version trims that run.
    #[inline(always)]
    pub fn trim_lanes<const L: usize>(&self, poly: &mut [[f64; L]]) {
        let mut max = [0.0f64; L];
        for (c, &t) in poly.iter().zip(&self.to_z) {
            for l in 0..L {
                max[l] = max[l].max((c[l] * t).abs());
            }
        }
        let mut thr = [0.0f64; L];
        for l in 0..L {
            thr[l] = super::poly::FIT_TRIM_REL * max[l];
        }
        for (c, &t) in poly.iter_mut().zip(&self.to_z) {
            for l in 0..L {
                c[l] = if (c[l] * t).abs() <= thr[l] {
                    0.0
                } else {
                    c[l]
                };
            }
        }
    }

    /// Number of coefficients K.
    pub fn n_coef(&self) -> usize {
        self.k
    }

    /// Chooses a static pivot order from the nominal matrices: partial pivoting at the middle
    /// sample point, accepted when at every sample point each pivot is at least 1e-2 of the
    /// largest candidate in its column (threshold pivoting). Part tolerances move the entries by
    /// tens of percent, not by orders of magnitude, so the order stays good for every run; a run
    /// whose pivot vanishes anyway falls back to partial pivoting.
    pub fn choose_pivots(&mut self, compiled: &Compiled, assembled: &Assembled) {
        let n = self.n;
        if n == 0 {
            return;
        }
        let load = |s: f64| -> Vec<f64> {
            let mut m = vec![0.0; n * n];
            for r in 0..n {
                for c in 0..n {
                    m[self.perm[r] * n + self.perm[c]] =
                        assembled.g[r * n + c] + s * assembled.c[r * n + c];
                }
            }
            m
        };
        let mid = self.s_points[self.s_points.len() / 2];
        let mut m = load(mid);
        let mut rows: Vec<usize> = (0..n).collect();
        let mut sign = 1.0;
        for col in 0..n {
            let best = (col..n)
                .max_by(|&a, &b| {
                    m[rows[a] * n + col]
                        .abs()
                        .partial_cmp(&m[rows[b] * n + col].abs())
                        .unwrap_or(std::cmp::Ordering::Equal)
                })
                .unwrap_or(col);
            if best != col {
                rows.swap(col, best);
                sign = -sign;
            }
            let p = m[rows[col] * n + col];
            if p == 0.0 {
                self.static_ok = false;
                return;
            }
            for r in (col + 1)..n {
                let f = m[rows[r] * n + col] / p;
                for c in col..n {
                    m[rows[r] * n + c] -= f * m[rows[col] * n + c];
                }
            }
        }
        // Validate the order at every sample point.
        for &s in &self.s_points {
            let mut m = load(s);
            for col in 0..n.saturating_sub(1) {
                let p = m[rows[col] * n + col];
                let biggest = (col..n).fold(0.0f64, |acc, r| acc.max(m[rows[r] * n + col].abs()));
                if !(p.abs() >= 1e-2 * biggest && p != 0.0) {
                    self.static_ok = false;
                    return;
                }
                for r in (col + 1)..n {
                    let f = m[rows[r] * n + col] / p;
                    for c in col..n {
                        m[rows[r] * n + c] -= f * m[rows[col] * n + c];
                    }
                }
            }
        }
        // The permutation's sign is that of the pivoting sequence.
        let mut inv_order = vec![0usize; n];
        for (step, &row) in rows.iter().enumerate() {
            inv_order[row] = step;
        }
        self.row_map = (0..n).map(|r| inv_order[self.perm[r]]).collect();
        self.slot_map = (0..n * n)
            .map(|i| self.row_map[i / n] * n + self.perm[i % n])
            .collect();
        let mut base = compiled.blank();
        for i in 0..n * n {
            base.g[self.slot_map[i]] = compiled.base_g[i];
            base.c[self.slot_map[i]] = compiled.base_c[i];
        }
        for r in 0..n {
            base.g_in[self.row_map[r]] = compiled.base_g_in[r];
        }
        self.perm_work = Some(base.clone());
        self.perm_base = Some(base);
        self.row_order = rows;
        self.order_sign = sign;
        self.static_ok = true;
    }

    /// Stamps the part `values` straight into the permuted matrices and fits; falls back to
    /// [`Compiled::assemble_into`] into `scratch` and [`FastFit::fit`] when the static order is
    /// not available or a pivot vanished. False when the matrices are singular.
    pub fn fit_values(
        &mut self,
        compiled: &Compiled,
        values: &[f64],
        scratch: &mut Assembled,
    ) -> bool {
        if let (true, Some(base), Some(mut work)) = (
            self.static_ok,
            self.perm_base.as_ref(),
            self.perm_work.take(),
        ) {
            work.g.copy_from_slice(&base.g);
            work.c.copy_from_slice(&base.c);
            work.g_in.copy_from_slice(&base.g_in);
            work.c_in.iter_mut().for_each(|v| *v = 0.0);
            for st in &compiled.stamps {
                let value = values.get(st.part_idx).copied().unwrap_or(f64::NAN);
                let (mat, vec, y) = if st.is_capacitor {
                    (&mut work.c, &mut work.c_in, value)
                } else {
                    (&mut work.g, &mut work.g_in, 1.0 / value)
                };
                for &(slot, sign) in &st.slots {
                    match slot {
                        super::circuit::Slot::Matrix(i) => mat[self.slot_map[i]] += sign * y,
                        super::circuit::Slot::Input(r) => vec[self.row_map[r]] += sign * y,
                    }
                }
            }
            let ok = match self.n {
                2 => self.sample_static::<2>(&work, true),
                3 => self.sample_static::<3>(&work, true),
                4 => self.sample_static::<4>(&work, true),
                5 => self.sample_static::<5>(&work, true),
                6 => self.sample_static::<6>(&work, true),
                _ => false,
            };
            self.perm_work = Some(work);
            if ok {
                self.interpolate();
                return true;
            }
        }
        compiled.assemble_into(values, scratch);
        self.fit(scratch)
    }

    /// Fits `assembled`; false when a sample point hit a singular matrix.
    pub fn fit(&mut self, assembled: &Assembled) -> bool {
        let fast = self.static_ok
            && match self.n {
                2 => self.sample_static::<2>(assembled, false),
                3 => self.sample_static::<3>(assembled, false),
                4 => self.sample_static::<4>(assembled, false),
                5 => self.sample_static::<5>(assembled, false),
                6 => self.sample_static::<6>(assembled, false),
                _ => false,
            };
        if fast {
            self.interpolate();
            return true;
        }
        // Fixed sizes let the compiler unroll the elimination completely; the common stages have
        // 2 to 6 unknowns.
        let ok = match self.n {
            1 => self.sample_fixed::<1>(assembled),
            2 => self.sample_fixed::<2>(assembled),
            3 => self.sample_fixed::<3>(assembled),
            4 => self.sample_fixed::<4>(assembled),
            5 => self.sample_fixed::<5>(assembled),
            6 => self.sample_fixed::<6>(assembled),
            7 => self.sample_fixed::<7>(assembled),
            8 => self.sample_fixed::<8>(assembled),
            _ => self.sample_any(assembled),
        };
        if !ok {
            return false;
        }
        self.interpolate();
        true
    }

    /// Sample values to coefficients.
    fn interpolate(&mut self) {
        let k = self.k;
        for j in 0..k {
            let row = &self.interp[j * k..(j + 1) * k];
            let mut an = 0.0;
            let mut ad = 0.0;
            for ((w, pn), pd) in row.iter().zip(&self.num_samples).zip(&self.den_samples) {
                an += w * pn;
                ad += w * pd;
            }
            self.num_u[j] = an;
            self.den_u[j] = ad;
        }
    }

    /// Samples D and N with the static pivot order, four sample points at a time in the lanes of
    /// fixed-size arrays (no branches inside the elimination, so it vectorises). False when a
    /// pivot vanished (the caller then pivots partially).
    fn sample_static<const N: usize>(&mut self, a: &Assembled, permuted: bool) -> bool {
        const L: usize = 4;
        let mut g = [[0.0f64; N]; N];
        let mut c = [[0.0f64; N]; N];
        let mut g_in = [0.0f64; N];
        let mut c_in = [0.0f64; N];
        if permuted {
            for r in 0..N {
                g[r].copy_from_slice(&a.g[r * N..(r + 1) * N]);
                c[r].copy_from_slice(&a.c[r * N..(r + 1) * N]);
            }
            g_in.copy_from_slice(&a.g_in[..N]);
            c_in.copy_from_slice(&a.c_in[..N]);
        } else {
            // Output-last column permutation, then the static row order.
            let mut inv_order = [0usize; N];
            for (step, &row) in self.row_order.iter().enumerate() {
                inv_order[row] = step;
            }
            for r in 0..N {
                let pr = inv_order[self.perm[r]];
                for col in 0..N {
                    let pc = self.perm[col];
                    g[pr][pc] = a.g[r * N + col];
                    c[pr][pc] = a.c[r * N + col];
                }
                g_in[pr] = a.g_in[r];
                c_in[pr] = a.c_in[r];
            }
        }
        let k = self.k;
        let mut start = 0;
        while start < k {
            let mut s = [0.0f64; L];
            for (l, sl) in s.iter_mut().enumerate() {
                *sl = self.s_points[(start + l).min(k - 1)];
            }
            let mut m = [[[0.0f64; L]; N]; N];
            let mut rhs = [[0.0f64; L]; N];
            for r in 0..N {
                for col in 0..N {
                    for l in 0..L {
                        m[r][col][l] = g[r][col] + s[l] * c[r][col];
                    }
                }
                for l in 0..L {
                    rhs[r][l] = -(g_in[r] + s[l] * c_in[r]);
                }
            }
            let mut det = [self.order_sign; L];
            for col in 0..N - 1 {
                let p = m[col][col];
                if p.iter().any(|v| *v == 0.0 || !v.is_finite()) {
                    return false;
                }
                let mut inv = [0.0f64; L];
                for l in 0..L {
                    det[l] *= p[l];
                    inv[l] = 1.0 / p[l];
                }
                let pivot_row = m[col];
                let pivot_rhs = rhs[col];
                for r in (col + 1)..N {
                    let mut f = [0.0f64; L];
                    for l in 0..L {
                        f[l] = m[r][col][l] * inv[l];
                    }
                    for cc in (col + 1)..N {
                        for l in 0..L {
                            m[r][cc][l] -= f[l] * pivot_row[cc][l];
                        }
                    }
                    for l in 0..L {
                        rhs[r][l] -= f[l] * pivot_rhs[l];
                    }
                }
            }
            for l in 0..L.min(k - start) {
                self.den_samples[start + l] = det[l] * m[N - 1][N - 1][l];
                self.num_samples[start + l] = det[l] * rhs[N - 1][l];
            }
            start += L;
        }
        true
    }

    /// Samples D and N at every point for a stage of exactly `N` unknowns.
    // The elimination indexes several arrays by the same row and column numbers; index loops
    // read more plainly here than iterator chains.
    #[allow(clippy::needless_range_loop)]
    fn sample_fixed<const N: usize>(&mut self, a: &Assembled) -> bool {
        let mut g = [[0.0f64; N]; N];
        let mut c = [[0.0f64; N]; N];
        let mut g_in = [0.0f64; N];
        let mut c_in = [0.0f64; N];
        for r in 0..N {
            let pr = self.perm[r];
            for col in 0..N {
                let pc = self.perm[col];
                g[pr][pc] = a.g[r * N + col];
                c[pr][pc] = a.c[r * N + col];
            }
            g_in[pr] = a.g_in[r];
            c_in[pr] = a.c_in[r];
        }
        for (si, &s) in self.s_points.iter().enumerate() {
            let mut m = [[0.0f64; N]; N];
            let mut rhs = [0.0f64; N];
            for r in 0..N {
                for col in 0..N {
                    m[r][col] = g[r][col] + s * c[r][col];
                }
                rhs[r] = -(g_in[r] + s * c_in[r]);
            }
            let mut det_head = 1.0;
            for col in 0..N {
                let mut piv = col;
                let mut best = m[col][col].abs();
                for r in (col + 1)..N {
                    let v = m[r][col].abs();
                    if v > best {
                        best = v;
                        piv = r;
                    }
                }
                if piv != col {
                    m.swap(col, piv);
                    rhs.swap(col, piv);
                    det_head = -det_head;
                }
                if col + 1 == N {
                    break;
                }
                let pivot = m[col][col];
                if pivot == 0.0 {
                    return false;
                }
                det_head *= pivot;
                let inv = 1.0 / pivot;
                let pivot_row = m[col];
                for r in (col + 1)..N {
                    let f = m[r][col] * inv;
                    for cc in (col + 1)..N {
                        m[r][cc] -= f * pivot_row[cc];
                    }
                    rhs[r] -= f * rhs[col];
                }
            }
            self.den_samples[si] = det_head * m[N - 1][N - 1];
            self.num_samples[si] = det_head * rhs[N - 1];
        }
        true
    }

    /// Samples D and N at every point, any size.
    fn sample_any(&mut self, assembled: &Assembled) -> bool {
        let n = self.n;
        for (si, &s) in self.s_points.iter().enumerate() {
            for r in 0..n {
                let pr = self.perm[r];
                for c in 0..n {
                    let pc = self.perm[c];
                    self.m[pr * n + pc] = assembled.g[r * n + c] + s * assembled.c[r * n + c];
                }
                self.rhs[pr] = -(assembled.g_in[r] + s * assembled.c_in[r]);
            }
            let mut det_head = 1.0; // Π u_ii for i < n−1, with the pivoting sign.
            for col in 0..n {
                let mut piv = col;
                let mut best = self.m[col * n + col].abs();
                for r in (col + 1)..n {
                    let v = self.m[r * n + col].abs();
                    if v > best {
                        best = v;
                        piv = r;
                    }
                }
                if piv != col {
                    for c in col..n {
                        self.m.swap(col * n + c, piv * n + c);
                    }
                    self.rhs.swap(col, piv);
                    det_head = -det_head;
                }
                let pivot = self.m[col * n + col];
                if col + 1 == n {
                    break;
                }
                if pivot == 0.0 {
                    return false;
                }
                det_head *= pivot;
                let inv = 1.0 / pivot;
                for r in (col + 1)..n {
                    let f = self.m[r * n + col] * inv;
                    for c in (col + 1)..n {
                        self.m[r * n + c] -= f * self.m[col * n + c];
                    }
                    self.rhs[r] -= f * self.rhs[col];
                }
            }
            let last = if n > 0 { self.m[n * n - 1] } else { 1.0 };
            let y_last = if n > 0 { self.rhs[n - 1] } else { 0.0 };
            self.den_samples[si] = det_head * last;
            self.num_samples[si] = det_head * y_last;
        }
        true
    }
}

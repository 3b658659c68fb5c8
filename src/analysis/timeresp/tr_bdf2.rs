//! The TR-BDF2 integrator of the board's descriptor system `C·x' + G·x = −(g_in·u + c_in·u')`
//! (the method and its accuracy are in the parent module's docs): a sparse product, the real
//! banded LU the two stages share, and one step from a state to the next.

use crate::analysis::circuit::{AnalysisError, Assembled};

/// `γ` of TR-BDF2.
const GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;
/// The matrix coefficient of both TR-BDF2 stages, `γ/2 = (1 − γ)/(2 − γ) = 1 − 1/√2`.
const STAGE_COEF: f64 = 1.0 - std::f64::consts::FRAC_1_SQRT_2;

/// A sparse real matrix in compressed rows: row r's entries are
/// `cols/vals[row_start[r]..row_start[r + 1]]`.
#[derive(Debug, Clone)]
struct Sparse {
    row_start: Vec<usize>,
    cols: Vec<usize>,
    vals: Vec<f64>,
}

impl Sparse {
    fn of_dense(m: &[f64], n: usize) -> Sparse {
        let mut out = Sparse {
            row_start: Vec::with_capacity(n + 1),
            cols: Vec::new(),
            vals: Vec::new(),
        };
        for r in 0..n {
            out.row_start.push(out.cols.len());
            for c in 0..n {
                if m[r * n + c] != 0.0 {
                    out.cols.push(c);
                    out.vals.push(m[r * n + c]);
                }
            }
        }
        out.row_start.push(out.cols.len());
        out
    }

    /// `out = self·x`.
    fn mul(&self, x: &[f64], out: &mut [f64]) {
        for (o, w) in out.iter_mut().zip(self.row_start.windows(2)) {
            *o = self.cols[w[0]..w[1]]
                .iter()
                .zip(&self.vals[w[0]..w[1]])
                .map(|(&c, &v)| v * x[c])
                .sum();
        }
    }
}

/// A real LU factorization with partial pivoting that keeps each row's span of columns (a board's
/// matrix is banded), for many solves with one matrix. The factors are packed once into flat
/// arrays so that a solve is a pass over contiguous memory with no allocation.
#[derive(Debug, Clone)]
struct BandedLu {
    n: usize,
    /// Row swapped with row k at elimination step k.
    pivots: Vec<usize>,
    /// Elimination step k's multipliers are `elim_rows/elim_vals[elim_start[k]..elim_start[k + 1]]`.
    elim_start: Vec<usize>,
    elim_rows: Vec<usize>,
    elim_vals: Vec<f64>,
    /// U's row k right of the diagonal, columns `k + 1 ..`, is
    /// `upper[upper_start[k]..upper_start[k + 1]]`.
    upper_start: Vec<usize>,
    upper: Vec<f64>,
    /// 1 / U's diagonal.
    inv_diag: Vec<f64>,
}

impl BandedLu {
    /// Factors `a + coef·b` (dense row-major `n×n`). `None` when a pivot is zero (singular).
    fn factor(a: &[f64], b: &[f64], coef: f64, n: usize) -> Option<BandedLu> {
        let mut m: Vec<f64> = a.iter().zip(b).map(|(x, y)| x + coef * y).collect();
        let mut row_start = vec![n; n];
        let mut row_end = vec![0; n];
        for r in 0..n {
            let row = &m[r * n..(r + 1) * n];
            if let Some(lo) = row.iter().position(|v| *v != 0.0) {
                row_start[r] = lo;
                row_end[r] = row.iter().rposition(|v| *v != 0.0).map_or(lo, |k| k + 1);
            }
        }
        let mut pivots = vec![0; n];
        let mut elim = vec![Vec::new(); n];
        for k in 0..n {
            let mut best = k;
            let mut best_mag = -1.0;
            for r in k..n {
                if row_start[r] > k || row_end[r] <= k {
                    continue;
                }
                let mag = m[r * n + k].abs();
                if mag > best_mag {
                    best_mag = mag;
                    best = r;
                }
            }
            if best_mag <= 0.0 || !best_mag.is_finite() {
                return None;
            }
            pivots[k] = best;
            if best != k {
                let lo = row_start[k].min(row_start[best]);
                let hi = row_end[k].max(row_end[best]);
                for c in lo..hi {
                    m.swap(k * n + c, best * n + c);
                }
                row_start.swap(k, best);
                row_end.swap(k, best);
            }
            let inv = 1.0 / m[k * n + k];
            let end_k = row_end[k].max(k + 1);
            for r in (k + 1)..n {
                if row_start[r] > k || row_end[r] <= k {
                    continue;
                }
                let factor = m[r * n + k] * inv;
                if factor == 0.0 {
                    continue;
                }
                let (upper, lower) = m.split_at_mut(r * n);
                let pivot_row = &upper[k * n + k + 1..k * n + end_k];
                for (dst, &v) in lower[k + 1..end_k].iter_mut().zip(pivot_row) {
                    *dst -= factor * v;
                }
                row_end[r] = row_end[r].max(end_k);
                elim[k].push((r, factor));
            }
        }
        let mut elim_start = Vec::with_capacity(n + 1);
        let (mut elim_rows, mut elim_vals) = (Vec::new(), Vec::new());
        let mut upper_start = Vec::with_capacity(n + 1);
        let mut upper = Vec::new();
        let mut inv_diag = Vec::with_capacity(n);
        for k in 0..n {
            elim_start.push(elim_rows.len());
            for &(r, f) in &elim[k] {
                elim_rows.push(r);
                elim_vals.push(f);
            }
            upper_start.push(upper.len());
            upper.extend_from_slice(&m[k * n + k + 1..k * n + row_end[k].max(k + 1)]);
            inv_diag.push(1.0 / m[k * n + k]);
        }
        elim_start.push(elim_rows.len());
        upper_start.push(upper.len());
        Some(BandedLu {
            n,
            pivots,
            elim_start,
            elim_rows,
            elim_vals,
            upper_start,
            upper,
            inv_diag,
        })
    }

    /// Solves in place: `x` holds the right-hand side on entry, the solution on return.
    fn solve(&self, x: &mut [f64]) {
        let n = self.n;
        for k in 0..n {
            x.swap(k, self.pivots[k]);
            let v = x[k];
            if v != 0.0 {
                let span = self.elim_start[k]..self.elim_start[k + 1];
                for (&r, &f) in self.elim_rows[span.clone()]
                    .iter()
                    .zip(&self.elim_vals[span])
                {
                    x[r] -= f * v;
                }
            }
        }
        for k in (0..n).rev() {
            let row = &self.upper[self.upper_start[k]..self.upper_start[k + 1]];
            let acc = row
                .iter()
                .zip(&x[k + 1..k + 1 + row.len()])
                .fold(x[k], |acc, (u, xc)| acc - u * xc);
            x[k] = acc * self.inv_diag[k];
        }
    }
}

/// The state of the integration at one instant.
#[derive(Debug, Clone)]
pub(super) struct State {
    pub(super) t: f64,
    pub(super) x: Vec<f64>,
    pub(super) q: Vec<f64>,
    /// `q' = −G·x − g_in` (unit step input).
    f: Vec<f64>,
}

/// The loaded board's equations for a unit step, with the work space of the integrator.
pub(super) struct Integrator<'a> {
    a: &'a Assembled,
    n: usize,
    g: Sparse,
    c: Sparse,
    /// Factorizations by step size (bit pattern of h).
    lus: Vec<(u64, BandedLu)>,
    rhs: Vec<f64>,
    tmp: Vec<f64>,
}

pub(super) fn singular() -> AnalysisError {
    AnalysisError::Singular(
        "the time-step matrix C + h·G is singular: a node without a DC path, a capacitor loop or \
         an op amp without feedback"
            .into(),
    )
}

impl<'a> Integrator<'a> {
    pub(super) fn new(a: &'a Assembled, n: usize) -> Integrator<'a> {
        Integrator {
            a,
            n,
            g: Sparse::of_dense(&a.g, n),
            c: Sparse::of_dense(&a.c, n),
            lus: Vec::new(),
            rhs: vec![0.0; n],
            tmp: vec![0.0; n],
        }
    }

    /// The factorization of `C + coef·h·G`, made once per distinct product.
    pub(super) fn lu(&mut self, coef_h: f64) -> Result<usize, AnalysisError> {
        let key = coef_h.to_bits();
        if let Some(i) = self.lus.iter().position(|(k, _)| *k == key) {
            return Ok(i);
        }
        let lu = BandedLu::factor(&self.a.c, &self.a.g, coef_h, self.n).ok_or_else(singular)?;
        self.lus.push((key, lu));
        Ok(self.lus.len() - 1)
    }

    /// Fills `q = C·x + c_in` and `f = −G·x − g_in` of `s` from its `x`.
    pub(super) fn complete(&mut self, s: &mut State) {
        self.c.mul(&s.x, &mut s.q);
        for (q, ci) in s.q.iter_mut().zip(&self.a.c_in) {
            *q += ci;
        }
        self.g.mul(&s.x, &mut s.f);
        for (f, gi) in s.f.iter_mut().zip(&self.a.g_in) {
            *f = -*f - gi;
        }
    }

    /// A state at rest before the step, at t = 0.
    pub(super) fn rest(&self) -> State {
        State {
            t: 0.0,
            x: vec![0.0; self.n],
            q: vec![0.0; self.n],
            f: vec![0.0; self.n],
        }
    }

    /// One backward-Euler step of size `h` from rest (q = 0) into `out`:
    /// `(C + h·G)·x = −h·g_in − c_in`.
    pub(super) fn euler_from_rest(&mut self, h: f64, out: &mut State) -> Result<(), AnalysisError> {
        let i = self.lu(h)?;
        for ((r, gi), ci) in out.x.iter_mut().zip(&self.a.g_in).zip(&self.a.c_in) {
            *r = -h * gi - ci;
        }
        self.lus[i].1.solve(&mut out.x);
        out.t = h;
        self.complete(out);
        Ok(())
    }

    /// One TR-BDF2 step of size `h` from `s` into `out`.
    pub(super) fn step(&mut self, h: f64, s: &State, out: &mut State) -> Result<(), AnalysisError> {
        let coef = STAGE_COEF * h;
        let i = self.lu(coef)?;
        // Trapezoidal stage to t + γh: (C + coef·G)·x_g = q_n + coef·f_n − coef·g_in − c_in.
        for k in 0..self.n {
            self.rhs[k] = s.q[k] + coef * (s.f[k] - self.a.g_in[k]) - self.a.c_in[k];
        }
        self.lus[i].1.solve(&mut self.rhs);
        // q_g = C·x_g + c_in.
        self.c.mul(&self.rhs, &mut self.tmp);
        let w1 = 1.0 / (GAMMA * (2.0 - GAMMA));
        let w0 = (1.0 - GAMMA) * (1.0 - GAMMA) / (GAMMA * (2.0 - GAMMA));
        // BDF2 stage: (C + coef·G)·x = w1·q_g − w0·q_n − coef·g_in − c_in.
        for k in 0..self.n {
            let q_g = self.tmp[k] + self.a.c_in[k];
            out.x[k] = w1 * q_g - w0 * s.q[k] - coef * self.a.g_in[k] - self.a.c_in[k];
        }
        // Keep the right-hand side: the BDF2 equation gives `G·x` without a product with G.
        out.f.copy_from_slice(&out.x);
        self.lus[i].1.solve(&mut out.x);
        out.t = s.t + h;
        // q = C·x + c_in; from (C + coef·G)·x = r: G·x = (r − C·x)/coef, so
        // f = −G·x − g_in = (q − c_in − r)/coef − g_in.
        self.c.mul(&out.x, &mut out.q);
        let inv = 1.0 / coef;
        for k in 0..self.n {
            let cx = out.q[k];
            out.q[k] = cx + self.a.c_in[k];
            out.f[k] = (cx - out.f[k]) * inv - self.a.g_in[k];
        }
        Ok(())
    }
}

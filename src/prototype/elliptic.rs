//! Elliptic (Cauer) prototype: equiripple passband and stopband, from the Jacobi elliptic
//! functions.
//!
//! With the ripple factor `ε = √(10^(Ap/10) − 1)`, the stopband factor `εs = √(10^(As/10) − 1)`
//! and the discrimination modulus `k1 = ε/εs`, the degree equation
//! `n·K'(k)/K(k) = K'(k1)/K(k1)` gives the selectivity modulus `k` (the stopband begins at
//! `1/k` rad/s); it is solved through the nomes `q = exp(−πK'/K)`, `q = q1^(1/n)`, and the
//! theta-series `k² = 16q·(Σ q^(m(m+1)) / (1 + 2Σ q^(m²)))⁴`. With `u_j = j·K(k)/n`
//! (`j = n−1, n−3, …`) and `v0 = K(k)·F(atan(1/ε) | 1 − k1²) / (n·K(k1))`:
//!
//! * zeros `±j / (k·sn(u_j, k))` (the `j = 0` term of an odd order is the zero at infinity);
//! * poles `−(cn·dn·sn'·cn' + j·sn·dn') / (1 − dn²·sn'²)` with `sn, cn, dn` at `(u_j, k)` and
//!   `sn', cn', dn'` at `(v0, k')`.
//!
//! These are the expressions of scipy.signal's `ellipap` (its `_ellipdeg` with seven theta terms,
//! `ellipj` by the descending Landen / AGM sequence, `ellipk`), so that the poles and zeros agree
//! with it to about 1e-14. The complete integral comes from the arithmetic-geometric mean,
//! `K(m) = π / (2·AGM(1, √(1 − m)))`; the incomplete one from Carlson's symmetric `R_F`.

use crate::fmath;
use num_complex::Complex64;

use super::{sort_pairs, PoleGroup};

/// Machine epsilon as the Landen sequence's stopping test uses it.
const MACHEP: f64 = 1.110_223_024_625_156_5e-16;

/// Arithmetic-geometric mean of `a, b > 0`, to double precision.
fn agm(mut a: f64, mut b: f64) -> f64 {
    for _ in 0..64 {
        if (a - b).abs() <= 2.0 * MACHEP * a {
            break;
        }
        let next = 0.5 * (a + b);
        b = (a * b).sqrt();
        a = next;
    }
    0.5 * (a + b)
}

/// Complete elliptic integral of the first kind `K(m)`, parameter `m = k²` in `[0, 1)`:
/// `π / (2·AGM(1, √(1 − m)))`. Infinite at `m = 1`, NaN outside.
pub fn ellipk(m: f64) -> f64 {
    ellipkm1(1.0 - m)
}

/// `K(1 − p)` for the complementary parameter `p = 1 − m` (so a tiny `p` keeps its digits, as
/// scipy's `ellipkm1`).
pub fn ellipkm1(p: f64) -> f64 {
    if !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    if p == 0.0 {
        return f64::INFINITY;
    }
    std::f64::consts::FRAC_PI_2 / agm(1.0, p.sqrt())
}

/// Carlson's symmetric integral `R_F(x, y, z)` by the duplication theorem (error below 1e-16
/// once the arguments agree to 1e-4).
fn carlson_rf(mut x: f64, mut y: f64, mut z: f64) -> f64 {
    for _ in 0..200 {
        let mean = (x + y + z) / 3.0;
        let dev = ((mean - x).abs())
            .max((mean - y).abs())
            .max((mean - z).abs());
        if dev <= 1e-4 * mean.abs() {
            let dx = 1.0 - x / mean;
            let dy = 1.0 - y / mean;
            let dz = -(dx + dy);
            let e2 = dx * dy - dz * dz;
            let e3 = dx * dy * dz;
            return (1.0 - e2 / 10.0 + e3 / 14.0 + e2 * e2 / 24.0 - 3.0 * e2 * e3 / 44.0)
                / mean.sqrt();
        }
        let (sx, sy, sz) = (x.sqrt(), y.sqrt(), z.sqrt());
        let lambda = sx * sy + sx * sz + sy * sz;
        x = 0.25 * (x + lambda);
        y = 0.25 * (y + lambda);
        z = 0.25 * (z + lambda);
    }
    f64::NAN
}

/// The `u` with `sc(u | 1 − m) = w` for real `w ≥ 0` (scipy's `_arc_jac_sc1`):
/// `F(atan w | 1 − m) = sin φ · R_F(cos²φ, cos²φ + m·sin²φ, 1)` with `φ = atan w`.
fn arc_sc_complementary(w: f64, m: f64) -> f64 {
    let phi = fmath::atan(w);
    let (s, c) = (fmath::sin(phi), fmath::cos(phi));
    s * carlson_rf(c * c, c * c + m * s * s, 1.0)
}

/// Jacobi elliptic functions `(sn, cn, dn)` of real `u` and parameter `m` in `[0, 1]`, by the
/// descending Landen (AGM) sequence, with the series of cephes' `ellpj` for `m` within 1e-9 of 0
/// or 1.
pub fn ellipj(u: f64, m: f64) -> (f64, f64, f64) {
    if !(0.0..=1.0).contains(&m) || !u.is_finite() {
        return (f64::NAN, f64::NAN, f64::NAN);
    }
    if m < 1e-9 {
        let t = fmath::sin(u);
        let b = fmath::cos(u);
        let ai = 0.25 * m * (u - t * b);
        return (t - ai * b, b + ai * t, 1.0 - 0.5 * m * t * t);
    }
    if m >= 0.999_999_999_9 {
        let ai = 0.25 * (1.0 - m);
        let b = fmath::cosh(u);
        let t = fmath::tanh(u);
        let phi = 1.0 / b;
        let twon = b * fmath::sinh(u);
        let sn = t + ai * (twon - u) / (b * b);
        let ai = ai * t * phi;
        return (sn, phi - ai * (twon - u), phi + ai * (twon + u));
    }
    let mut a = [0.0f64; 10];
    let mut c = [0.0f64; 10];
    a[0] = 1.0;
    let mut b = (1.0 - m).sqrt();
    c[0] = m.sqrt();
    let mut twon = 1.0;
    let mut i = 0;
    while (c[i] / a[i]).abs() > MACHEP && i < 8 {
        let ai = a[i];
        i += 1;
        c[i] = 0.5 * (ai - b);
        let t = (ai * b).sqrt();
        a[i] = 0.5 * (ai + b);
        b = t;
        twon *= 2.0;
    }
    let mut phi = twon * a[i] * u;
    let mut previous = phi;
    while i > 0 {
        let t = c[i] * fmath::sin(phi) / a[i];
        previous = phi;
        phi = 0.5 * (fmath::asin(t) + phi);
        i -= 1;
    }
    let (sn, cn) = (fmath::sin(phi), fmath::cos(phi));
    (sn, cn, cn / fmath::cos(phi - previous))
}

/// Solves the degree equation `n·K(m)/K'(m) = K(m1)/K'(m1)` for the parameter `m = k²`
/// through the nomes (seven theta terms, as scipy's `_ellipdeg`).
pub fn degree_parameter(n: usize, m1: f64) -> f64 {
    let q1 = fmath::exp(-std::f64::consts::PI * ellipkm1(m1) / ellipk(m1));
    let q = fmath::powf(q1, 1.0 / n as f64);
    let mut num = 0.0;
    let mut den = 0.0;
    for j in 0..=7i32 {
        num += fmath::powf(q, (j * (j + 1)) as f64);
        let jd = j + 1;
        den += fmath::powf(q, (jd * jd) as f64);
    }
    let ratio = num / (1.0 + 2.0 * den);
    16.0 * q * ratio * ratio * ratio * ratio
}

/// The elliptic prototype of order `n ≥ 1` with passband ripple `ripple_db` (its band ends at
/// 1 rad/s) and stopband depth `astop_db`: pole groups (pairs first, by increasing `Im p`, the
/// real pole last), the zero frequencies (rad/s, ascending), and the selectivity parameter `m`
/// (the stopband begins at `1/√m`; 0 for order 1, whose stopband is a monotone roll-off).
pub(super) fn elliptic(n: usize, ripple_db: f64, astop_db: f64) -> (Vec<PoleGroup>, Vec<f64>, f64) {
    let eps_sq = fmath::exp_m1(ripple_db / 10.0 * std::f64::consts::LN_10);
    if n == 1 {
        return (
            vec![PoleGroup::Real(-(1.0 / eps_sq).sqrt())],
            Vec::new(),
            0.0,
        );
    }
    let eps = eps_sq.sqrt();
    let ck1_sq = eps_sq / fmath::exp_m1(astop_db / 10.0 * std::f64::consts::LN_10);
    let k_ck1 = ellipk(ck1_sq);
    let m = degree_parameter(n, ck1_sq);
    let capk = ellipk(m);
    let r = arc_sc_complementary(1.0 / eps, ck1_sq);
    let v0 = capk * r / (n as f64 * k_ck1);
    let (sv, cv, dv) = ellipj(v0, 1.0 - m);
    let mut groups = Vec::with_capacity(n / 2 + 1);
    let mut zeros = Vec::with_capacity(n / 2);
    let mut j = 1 - n % 2;
    while j < n {
        let (s, c, d) = ellipj(j as f64 * capk / n as f64, m);
        let den = 1.0 - (d * sv) * (d * sv);
        let p = Complex64::new(-(c * d * sv * cv) / den, -(s * dv) / den);
        if s.abs() > 2.220_446_049_250_313e-16 {
            zeros.push(1.0 / (m.sqrt() * s));
            groups.push(PoleGroup::Conjugate(p.conj()));
        } else {
            groups.push(PoleGroup::Real(p.re));
        }
        j += 2;
    }
    sort_pairs(&mut groups);
    zeros.sort_by(f64::total_cmp);
    (groups, zeros, m)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn complete_integral_known_values() {
        // Handbook values (Abramowitz & Stegun table 17.1): K(0) = π/2, K(0.5) = 1.854074677301372.
        assert!((ellipk(0.0) - std::f64::consts::FRAC_PI_2).abs() < 1e-15);
        assert!((ellipk(0.5) - 1.854_074_677_301_372).abs() < 1e-14);
    }

    #[test]
    fn jacobi_functions_obey_their_identities() {
        // Identities of the Jacobi functions: sn² + cn² = 1, dn² + m·sn² = 1, sn(K) = 1.
        for m in [1e-12, 0.1, 0.5, 0.9, 0.999_999] {
            for u in [0.1, 0.7, 1.3] {
                let (s, c, d) = ellipj(u, m);
                assert!((s * s + c * c - 1.0).abs() < 1e-14);
                assert!((d * d + m * s * s - 1.0).abs() < 1e-14);
            }
            let (s, _, _) = ellipj(ellipk(m), m);
            assert!((s - 1.0).abs() < 1e-12, "m {m}: sn(K) = {s}");
        }
    }
}

//! Inverse Chebyshev (Chebyshev type II) prototype: monotone passband, equiripple stopband that
//! first reaches its depth at 1 rad/s.
//!
//! `|H(jω)|² = 1 / (1 + 1/(δ²·T_n²(1/ω)))` with `δ = 1/√(10^(As/10) − 1)`: the poles are the
//! reciprocals of the Chebyshev type I poles for ripple factor `δ`
//! (`1/(−sinh μ·cos θ_m − j·cosh μ·sin θ_m)`, `μ = asinh(1/δ)/n`, `θ_m = πm/2n`), and the zeros
//! are where `T_n(1/ω)` vanishes, `±j/sin(πm/2n)` for `m = n−1, n−3, … > 0` — the expressions of
//! scipy.signal's `cheb2ap`.

use crate::fmath;
use num_complex::Complex64;

use super::{sort_pairs, PoleGroup};

/// Pole groups (pairs by increasing `Im p`, the real pole last) and zero frequencies (rad/s,
/// ascending) of the order-`n` inverse Chebyshev prototype with stopband depth `astop_db`.
pub(super) fn inverse_chebyshev(n: usize, astop_db: f64) -> (Vec<PoleGroup>, Vec<f64>) {
    let nf = n as f64;
    let delta = 1.0 / fmath::exp_m1(astop_db / 10.0 * std::f64::consts::LN_10).sqrt();
    let mu = fmath::asinh(1.0 / delta) / nf;
    let mut groups = Vec::with_capacity(n / 2 + 1);
    let mut zeros = Vec::with_capacity(n / 2);
    for pair_idx in 0..n / 2 {
        let m = (n - 1 - 2 * pair_idx) as f64;
        let theta = std::f64::consts::PI * m / (2.0 * nf);
        // The type I pole with Im < 0, inverted: its reciprocal has Im > 0.
        let p = Complex64::new(
            -fmath::sinh(mu) * fmath::cos(theta),
            -fmath::cosh(mu) * fmath::sin(theta),
        );
        groups.push(PoleGroup::Conjugate(Complex64::new(1.0, 0.0) / p));
        zeros.push(1.0 / fmath::sin(theta));
    }
    if n % 2 == 1 {
        groups.push(PoleGroup::Real(-1.0 / fmath::sinh(mu)));
    }
    sort_pairs(&mut groups);
    zeros.sort_by(f64::total_cmp);
    (groups, zeros)
}

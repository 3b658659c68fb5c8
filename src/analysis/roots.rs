//! Root finders of the analyses on a stage's denominator: the dominant quadratic factor by
//! Bairstow's iteration, a dominant real root by Newton's, the dominant pole pair's f0 and Q from a
//! list of poles, and the tolerance study's split of a cubic into its far real root and the
//! filter's quadratic factor, eight runs side by side. (All the roots of a polynomial, by
//! Aberth–Ehrlich, are [`super::poly::Poly::roots`].)
//!
//! A leaf: it imports only the lane width of [`super::lanes`], so the study, the poles and the
//! sensitivities share these without importing each other.

use super::lanes::{RunLanes, RUN_LANES};
use crate::fmath;
use num_complex::Complex64;

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
    crate::sort::sort_by(&mut p, |a, b| {
        fmath::cnorm(*a)
            .partial_cmp(&fmath::cnorm(*b))
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
            // The smallest pole and its partner: its conjugate, or the next real pole. A real
            // smallest pole with no other real pole happens when a low-Q stage's far pole has
            // merged with the op amp's pole into a complex pair; the stage then behaves like the
            // real pole and a far one at that pair's magnitude, which stands in as the partner.
            let first = p[0];
            let second = if first.im != 0.0 {
                first.conj()
            } else {
                match p.iter().skip(1).find(|z| z.im == 0.0) {
                    Some(real) => *real,
                    None => Complex64::new(-fmath::cnorm(p[1]), 0.0),
                }
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

/// The quadratic factor `z² + u·z + v` of the cubic `d` (ascending, `d[j][l]` coefficient `j` of
/// lane `l`) that remains when its real root near `r0` is divided out, for every lane with
/// `use_lane[l]`: Halley's iteration for the root (cubic convergence, two or three steps from the
/// nominal root), then backward deflation (`v = −d0/(d3·r)`, `u = (v − d1/d3)/r`), which is the
/// stable direction for a root larger than the others. Returns `(u, v, ok)`; `ok[l]` is false
/// when the iteration failed or the factor is not a stable pair. The lanes iterate together, each
/// one frozen once converged, so a lane's result does not depend on the others.
#[inline(always)]
pub(crate) fn split_cubic_lanes(
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

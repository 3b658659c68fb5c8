//! The quadratics the circuits' closed forms solve: their positive roots, found without
//! cancellation, and the pick among two roots (nearest a hinted ratio, or the best balanced).

use crate::fmath;

/// Solves `a·x² − b·x + c = 0` for positive roots, stably (no cancellation). Returns the positive
/// roots, possibly none.
pub(crate) fn positive_roots(a: f64, b: f64, c: f64) -> Vec<f64> {
    let mut roots = Vec::with_capacity(2);
    if a == 0.0 {
        // Linear: b·x = c.
        if b != 0.0 {
            roots.push(c / b);
        }
    } else {
        let disc = b * b - 4.0 * a * c;
        if disc < 0.0 {
            // A double root that rounding pushed just below zero still counts.
            if disc > -1e-12 * b * b {
                roots.push(b / (2.0 * a));
            }
        } else {
            // q has the sign of b, so neither root suffers cancellation.
            let q = 0.5 * (b + b.signum() * disc.sqrt());
            if q != 0.0 {
                roots.push(q / a);
                roots.push(c / q);
            }
        }
    }
    roots.retain(|x| x.is_finite() && *x > 0.0);
    roots
}

/// Picks the root whose measured ratio is closest (in log) to `hint`, or, without a hint, the
/// one `balance` scores lowest (ties keep the first).
pub(crate) fn pick_root(
    roots: &[f64],
    hint: Option<f64>,
    ratio_of: impl Fn(f64) -> f64,
    balance: impl Fn(f64) -> f64,
) -> Option<f64> {
    let score = |x: f64| match hint {
        Some(h) => fmath::ln(ratio_of(x) / h).abs(),
        None => balance(x),
    };
    let mut best: Option<(f64, f64)> = None;
    for &x in roots {
        let s = score(x);
        if best.map_or(true, |(_, bs)| s < bs - 1e-12) {
            best = Some((x, s));
        }
    }
    best.map(|(x, _)| x)
}

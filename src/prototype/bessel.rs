//! Bessel poles, computed: the roots of the reverse Bessel polynomial `θ_n` by an Aberth
//! iteration started on a Butterworth-like half circle, with `θ_n` evaluated by its three-term
//! recurrence in double-double arithmetic (plain `f64` leaves about 1e-7 relative error at order
//! 20; the double-double values give about 1e-14 against scipy), finished with Newton steps, then
//! scaled so that `|H(j1)|² = 1/2` (scipy `besselap(norm='mag')`).

use crate::fmath;
use num_complex::Complex64;

use super::{bisect_log_increasing, sort_pairs, PoleGroup};

/// Reverse Bessel polynomial `θ_n(s)` and its derivative by the recurrence
/// `θ_k = (2k − 1)·θ_{k−1} + s²·θ_{k−2}`, `θ_0 = 1`, `θ_1 = s + 1`.
fn reverse_bessel(order: usize, s: Complex64) -> (Complex64, Complex64) {
    let one = Complex64::new(1.0, 0.0);
    let mut prev = one; // θ_0
    let mut prev_d = Complex64::new(0.0, 0.0);
    let mut cur = s + 1.0; // θ_1
    let mut cur_d = one;
    if order == 0 {
        return (prev, prev_d);
    }
    let s2 = s * s;
    for k in 2..=order {
        let c = (2 * k - 1) as f64;
        let next = cur * c + s2 * prev;
        let next_d = cur_d * c + s * 2.0 * prev + s2 * prev_d;
        prev = cur;
        prev_d = cur_d;
        cur = next;
        cur_d = next_d;
    }
    (cur, cur_d)
}

/// `θ_n(0) = (2n)! / (2^n · n!)`, the constant term of the reverse Bessel polynomial.
fn reverse_bessel_constant(order: usize) -> f64 {
    (1..=order).fold(1.0, |acc, k| acc * (2 * k - 1) as f64)
}

/// A double-double number `hi + lo` (about 106 bits), enough to evaluate the reverse Bessel
/// polynomial near its roots without the rounding noise that limits plain `f64` to about 1e-7
/// relative root accuracy at order 20.
#[derive(Clone, Copy)]
struct DoubleDouble {
    hi: f64,
    lo: f64,
}

impl DoubleDouble {
    fn from(x: f64) -> Self {
        Self { hi: x, lo: 0.0 }
    }

    /// Knuth's error-free sum: `a + b = s + e` exactly.
    fn two_sum(a: f64, b: f64) -> (f64, f64) {
        let s = a + b;
        let bb = s - a;
        (s, (a - (s - bb)) + (b - bb))
    }

    /// Dekker's error-free product: `a·b = p + e` exactly (barring overflow), from Veltkamp's
    /// split of each factor into two 26-bit halves. The same pair as `a.mul_add(b, −p)` gives,
    /// without the fused multiply-add, which wasm and baseline x86-64 lack and emulate slowly.
    fn two_prod(a: f64, b: f64) -> (f64, f64) {
        let p = a * b;
        let (a_hi, a_lo) = Self::split(a);
        let (b_hi, b_lo) = Self::split(b);
        let e = ((a_hi * b_hi - p) + a_hi * b_lo + a_lo * b_hi) + a_lo * b_lo;
        (p, e)
    }

    /// Veltkamp's split: `x = hi + lo` exactly, each half with at most 26 significant bits.
    fn split(x: f64) -> (f64, f64) {
        const FACTOR: f64 = 134_217_729.0; // 2^27 + 1
        let t = FACTOR * x;
        let hi = t - (t - x);
        (hi, x - hi)
    }

    fn normalize(s: f64, e: f64) -> Self {
        let hi = s + e;
        Self {
            hi,
            lo: e - (hi - s),
        }
    }

    fn add(self, other: Self) -> Self {
        let (s1, s2) = Self::two_sum(self.hi, other.hi);
        let (t1, t2) = Self::two_sum(self.lo, other.lo);
        let a = Self::normalize(s1, s2 + t1);
        Self::normalize(a.hi, a.lo + t2)
    }

    fn neg(self) -> Self {
        Self {
            hi: -self.hi,
            lo: -self.lo,
        }
    }

    fn mul(self, other: Self) -> Self {
        let (p, e) = Self::two_prod(self.hi, other.hi);
        Self::normalize(p, e + (self.hi * other.lo + self.lo * other.hi))
    }
}

/// A complex number with double-double parts.
#[derive(Clone, Copy)]
struct ComplexDd {
    re: DoubleDouble,
    im: DoubleDouble,
}

impl ComplexDd {
    fn from(z: Complex64) -> Self {
        Self {
            re: DoubleDouble::from(z.re),
            im: DoubleDouble::from(z.im),
        }
    }

    fn add(self, o: Self) -> Self {
        Self {
            re: self.re.add(o.re),
            im: self.im.add(o.im),
        }
    }

    fn mul(self, o: Self) -> Self {
        Self {
            re: self.re.mul(o.re).add(self.im.mul(o.im).neg()),
            im: self.re.mul(o.im).add(self.im.mul(o.re)),
        }
    }

    fn scale(self, c: f64) -> Self {
        let c = DoubleDouble::from(c);
        Self {
            re: self.re.mul(c),
            im: self.im.mul(c),
        }
    }

    fn to_complex(self) -> Complex64 {
        Complex64::new(self.re.hi + self.re.lo, self.im.hi + self.im.lo)
    }
}

/// `θ_n(s)` by the same recurrence as [`reverse_bessel`], in double-double arithmetic; the
/// derivative (needed only to moderate accuracy) comes from the `f64` recurrence.
fn reverse_bessel_precise(order: usize, s: Complex64) -> (Complex64, Complex64) {
    let (_, slope) = reverse_bessel(order, s);
    if order == 0 {
        return (Complex64::new(1.0, 0.0), slope);
    }
    let sz = ComplexDd::from(s);
    let s2 = sz.mul(sz);
    let mut prev = ComplexDd::from(Complex64::new(1.0, 0.0));
    let mut cur = sz.add(prev);
    for k in 2..=order {
        let next = cur.scale((2 * k - 1) as f64).add(s2.mul(prev));
        prev = cur;
        cur = next;
    }
    (cur.to_complex(), slope)
}

/// Roots of the reverse Bessel polynomial (delay-normalized Bessel poles), sorted upper-half
/// members by increasing imaginary part, the real root (odd orders) last.
fn bessel_delay_roots(order: usize) -> Vec<Complex64> {
    // Start on a left half circle of radius θ_n(0)^(1/n), the geometric mean of the root
    // magnitudes, spread like Butterworth poles; Aberth's repulsion keeps the estimates apart.
    let radius = fmath::powf(reverse_bessel_constant(order), 1.0 / order as f64);
    let n = order as f64;
    let mut roots: Vec<Complex64> = (0..order)
        .map(|k| {
            let angle = std::f64::consts::FRAC_PI_2 + std::f64::consts::PI * (k as f64 + 0.5) / n;
            fmath::from_polar(radius, angle)
        })
        .collect();
    // Aberth iteration with the double-double evaluation: plain f64 stalls at its noise floor
    // (about 1e-7 relative at order 20), the precise values converge cubically to 1e-15.
    for _ in 0..100 {
        let mut largest_step = 0.0f64;
        for k in 0..order {
            let z = roots[k];
            let (value, slope) = reverse_bessel_precise(order, z);
            if fmath::cnorm(value) == 0.0 {
                continue;
            }
            let newton = value / slope;
            let repulsion: Complex64 = roots
                .iter()
                .enumerate()
                .filter(|(j, _)| *j != k)
                .map(|(_, other)| (z - other).inv())
                .sum();
            let step = newton / (Complex64::new(1.0, 0.0) - newton * repulsion);
            if step.is_finite() {
                roots[k] = z - step;
                largest_step =
                    largest_step.max(fmath::cnorm(step) / fmath::cnorm(roots[k]).max(1e-300));
            }
        }
        if largest_step < 1e-15 {
            break;
        }
    }
    // Two Newton steps finish each root, then exact conjugate symmetry is enforced: keep the
    // upper-half members and make the middle root of an odd order real.
    for root in roots.iter_mut() {
        for _ in 0..2 {
            let (value, slope) = reverse_bessel_precise(order, *root);
            let step = value / slope;
            if step.is_finite() {
                *root -= step;
            }
        }
    }
    crate::sort::sort_by(&mut roots, |a, b| a.im.total_cmp(&b.im));
    let mut out: Vec<Complex64> = roots[order - order / 2..].to_vec();
    if order % 2 == 1 {
        let middle = roots[order / 2];
        out.push(Complex64::new(middle.re, 0.0));
    }
    out
}

/// Bessel poles as groups, magnitude-normalized so that `|H(j1)|² = 1/2` (scipy
/// `besselap(norm='mag')`).
pub(super) fn bessel_groups(order: usize) -> Vec<PoleGroup> {
    // The roots depend on the order alone, and the family comparison asks for many orders on
    // every edit of a mask: each order is computed once per thread and remembered.
    thread_local! {
        static KNOWN: std::cell::RefCell<Vec<Option<Vec<PoleGroup>>>> =
            const { std::cell::RefCell::new(Vec::new()) };
    }
    KNOWN.with(|known| {
        if let Some(Some(groups)) = known.borrow().get(order) {
            return groups.clone();
        }
        let groups = bessel_groups_computed(order);
        let mut known = known.borrow_mut();
        if known.len() <= order {
            known.resize(order + 1, None);
        }
        known[order] = Some(groups.clone());
        groups
    })
}

fn bessel_groups_computed(order: usize) -> Vec<PoleGroup> {
    let roots = bessel_delay_roots(order);
    let mut all: Vec<Complex64> = Vec::with_capacity(order);
    for r in &roots {
        all.push(*r);
        if r.im != 0.0 {
            all.push(r.conj());
        }
    }
    // ln|H(jw)| = Σ ln|p| − Σ ln|jw − p| is strictly decreasing in w; find where it is −ln2/2.
    let log_dc: f64 = all.iter().map(|p| fmath::ln(fmath::cnorm(*p))).sum();
    let half_power = |w: f64| {
        let jw = Complex64::new(0.0, w);
        all.iter()
            .map(|p| fmath::ln(fmath::cnorm(jw - p)))
            .sum::<f64>()
            - log_dc
            - 0.5 * std::f64::consts::LN_2
    };
    let mut w3 = bisect_log_increasing(half_power);
    // Two Newton steps remove the last bisection rounding; d/dw ln|jw − p| = (w − Im p)/|jw − p|².
    for _ in 0..2 {
        let jw = Complex64::new(0.0, w3);
        let slope: f64 = all.iter().map(|p| (w3 - p.im) / (jw - p).norm_sqr()).sum();
        let step = half_power(w3) / slope;
        if step.is_finite() && step.abs() < 0.1 * w3 {
            w3 -= step;
        }
    }
    let mut groups: Vec<PoleGroup> = roots
        .iter()
        .map(|r| {
            let p = r / w3;
            if r.im == 0.0 {
                PoleGroup::Real(p.re)
            } else {
                PoleGroup::Conjugate(p)
            }
        })
        .collect();
    sort_pairs(&mut groups);
    groups
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prototype::MAX_ORDER;

    #[test]
    fn dekker_product_equals_the_fused_multiply_add() {
        // Both give the exact rounding error of a·b (IEEE 754 arithmetic, common practice), so
        // they must agree to the bit wherever nothing overflows or underflows.
        let mut x = 0.123_456_789_f64;
        for i in 0..10_000 {
            x = (x * 3.987_654_321 + 0.271_828).fract();
            let a = (x - 0.5) * fmath::powi(10f64, i % 40 - 20);
            let b = (0.75 - x) * fmath::powi(10f64, 17 - i % 35);
            let (p, e) = DoubleDouble::two_prod(a, b);
            assert_eq!(p, a * b);
            // libm's fma is the correctly rounded fused multiply-add in software, the same on
            // every target (the crate's own code never fuses).
            assert_eq!(e.to_bits(), libm::fma(a, b, -p).to_bits(), "{a} × {b}");
        }
    }

    #[test]
    fn reverse_bessel_recurrence_matches_coefficients() {
        // Coefficients of θ_4(s) = s⁴ + 10s³ + 45s² + 105s + 105 (the defining formula
        // (2n−k)!/(2^(n−k)·k!·(n−k)!)).
        let s = Complex64::new(-0.7, 1.3);
        let direct = s.powu(4) + s.powu(3) * 10.0 + s * s * 45.0 + s * 105.0 + 105.0;
        let (value, slope) = reverse_bessel(4, s);
        assert!(fmath::cnorm(value - direct) < 1e-12 * fmath::cnorm(direct));
        let direct_slope = s.powu(3) * 4.0 + s * s * 30.0 + s * 90.0 + 105.0;
        assert!(fmath::cnorm(slope - direct_slope) < 1e-12 * fmath::cnorm(direct_slope));
        assert_eq!(reverse_bessel_constant(4), 105.0);
    }

    #[test]
    fn bessel_roots_satisfy_polynomial_and_sum() {
        // θ_n is monic with s^(n−1) coefficient (n+1)!/(2·(n−1)!) = n(n+1)/2 (the coefficient
        // formula at k = n−1), so its roots sum to −n(n+1)/2.
        for order in 1..=MAX_ORDER {
            let roots = bessel_delay_roots(order);
            let mut sum = 0.0;
            for r in &roots {
                sum += if r.im == 0.0 { r.re } else { 2.0 * r.re };
                let (v, d) = reverse_bessel_precise(order, *r);
                assert!(
                    fmath::cnorm(v / d) < 1e-14 * fmath::cnorm(*r),
                    "order {order}: residual step {}",
                    fmath::cnorm(v / d)
                );
            }
            let expected = -((order * (order + 1)) as f64) / 2.0;
            assert!(
                (sum - expected).abs() < 1e-10 * expected.abs(),
                "order {order}: sum {sum} expected {expected}"
            );
        }
    }
}

//! Normalized low-pass prototypes: the poles of each family at 1 rad/s.
//!
//! Every prototype is an all-pole low-pass `H(s) = k / ∏(s − p_i)` with its characteristic
//! frequency at 1 rad/s:
//!
//! | family | what sits at 1 rad/s | poles |
//! |---|---|---|
//! | Butterworth | −3.01 dB point | `p_m = −exp(jπm/2n)`, `m = −n+1, −n+3, …, n−1` |
//! | Chebyshev I | edge of the ripple band (attenuation = ripple) | `p_m = −sinh(μ + jπm/2n)`, `μ = asinh(1/ε)/n` |
//! | Bessel | −3.01 dB point (magnitude normalization) | roots of the reverse Bessel polynomial, scaled |
//! | Linkwitz-Riley | −6.02 dB point | each pole of Butterworth(n/2) twice |
//! | critically damped | −3.01 dB point | n poles at `−a`, `a = 1/√(2^(1/n) − 1)` |
//!
//! The Butterworth, Chebyshev and Bessel poles and gains agree with `scipy.signal.buttap`,
//! `cheb1ap` and `besselap(norm='mag')`. Every prototype is scaled so that its passband *maximum*
//! is 1 (0 dB), because the link key `gain` names the passband maximum; an even-order Chebyshev
//! then has its DC gain at −ripple dB (see [`Prototype::gain`]).
//!
//! Poles are computed, not tabulated. Bessel roots come from an Aberth iteration on the reverse
//! Bessel polynomial `θ_n`, started on a Butterworth-like half circle and evaluated by its
//! three-term recurrence in double-double arithmetic (plain `f64` leaves about 1e-7 relative
//! error at order 20; the double-double values give about 1e-14 against scipy), finished with
//! Newton steps, and scaled so that `|H(j1)|² = 1/2` by a one-dimensional root find.

use num_complex::Complex64;

use crate::error::InputError;
use crate::spec::Family;

/// Highest order Rolloff designs (link key `order`, 1–20).
pub const MAX_ORDER: usize = 20;

/// Smallest Chebyshev ripple accepted, dB (link key `ripple`).
pub const MIN_RIPPLE_DB: f64 = 0.01;

/// Largest Chebyshev ripple accepted, dB (link key `ripple`).
pub const MAX_RIPPLE_DB: f64 = 3.0;

/// How the poles of a filter group into sections.
///
/// Poles of a real filter come as real poles or conjugate pairs; each group becomes one section.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PoleGroup {
    /// One real pole `p` (negative), rad/s: a first-order section `1/(s − p)`.
    Real(f64),
    /// A conjugate pair `p, p*`, stored as the member with `Im p > 0`: a second-order section
    /// `1/((s − p)(s − p*))` with `w0 = |p|`, `Q = |p| / (2·|Re p|)`.
    Conjugate(Complex64),
    /// Two real poles `(a, b)` (both negative) that form one second-order section with
    /// `w0 = √(ab)`, `Q = √(ab)/|a + b| ≤ 0.5`. Arises when a wide band-pass transforms a real
    /// prototype pole.
    RealPair(f64, f64),
}

impl PoleGroup {
    /// The poles of the group: one (real) or two.
    pub fn poles(&self) -> Vec<Complex64> {
        match *self {
            Self::Real(p) => vec![Complex64::new(p, 0.0)],
            Self::Conjugate(p) => vec![p, p.conj()],
            Self::RealPair(a, b) => vec![Complex64::new(a, 0.0), Complex64::new(b, 0.0)],
        }
    }

    /// Number of poles in the group (1 or 2).
    pub fn order(&self) -> usize {
        match self {
            Self::Real(_) => 1,
            Self::Conjugate(_) | Self::RealPair(..) => 2,
        }
    }

    /// Natural frequency `w0` of the group, rad/s: `|p|` for a real pole or a pair, `√(ab)` for
    /// two real poles.
    pub fn w0(&self) -> f64 {
        match *self {
            Self::Real(p) => p.abs(),
            Self::Conjugate(p) => p.norm(),
            Self::RealPair(a, b) => (a * b).abs().sqrt(),
        }
    }

    /// Pole quality factor `Q = w0 / (−(sum of the poles))`; `None` for a single real pole.
    pub fn q(&self) -> Option<f64> {
        match *self {
            Self::Real(_) => None,
            Self::Conjugate(p) => Some(p.norm() / (2.0 * p.re.abs())),
            Self::RealPair(a, b) => Some((a * b).abs().sqrt() / (a + b).abs()),
        }
    }
}

/// Flattens pole groups into a list of poles (each pair as `p, p*`).
pub fn flatten(groups: &[PoleGroup]) -> Vec<Complex64> {
    groups.iter().flat_map(PoleGroup::poles).collect()
}

/// A normalized low-pass prototype: `H(s) = gain / ∏(s − p_i)`, characteristic frequency 1 rad/s.
#[derive(Debug, Clone, PartialEq)]
pub struct Prototype {
    /// The family (Chebyshev carries its ripple).
    pub family: Family,
    /// Number of poles, 1–20.
    pub order: usize,
    /// The poles grouped into conjugate pairs (upper member stored) and real poles, pairs first
    /// in order of increasing `Im p`, real poles last.
    pub groups: Vec<PoleGroup>,
    /// Gain constant `k` of `H(s) = k / ∏(s − p_i)`, chosen so that the passband maximum of
    /// `|H(jω)|` is 1 (the link key `gain` names the passband maximum). For every family but
    /// even-order Chebyshev that is `k = ∏(−p_i)` (DC gain 1); an even-order Chebyshev peaks
    /// inside the ripple band and has its DC gain at `1/√(1 + ε²)` (−ripple dB), so
    /// `k = ∏(−p_i)/√(1 + ε²)` — the same `k` as scipy's `cheb1ap`.
    pub gain: f64,
}

impl Prototype {
    /// All poles, rad/s (normalized), each conjugate pair as `p, p*`.
    pub fn poles(&self) -> Vec<Complex64> {
        flatten(&self.groups)
    }

    /// `H(jw)` of the prototype at normalized angular frequency `w` (rad/s).
    pub fn response(&self, w: f64) -> Complex64 {
        let jw = Complex64::new(0.0, w);
        self.groups
            .iter()
            .fold(Complex64::new(self.gain, 0.0), |h, g| match *g {
                PoleGroup::Real(p) => h / (jw - p),
                PoleGroup::Conjugate(p) => h / (jw - p) / (jw - p.conj()),
                PoleGroup::RealPair(a, b) => h / (jw - a) / (jw - b),
            })
    }

    /// `|H(j0)|`, the DC gain relative to the passband maximum: 1 for every family except
    /// even-order Chebyshev, where it is `1/√(1 + ε²)` (−ripple dB).
    pub fn reference_gain(&self) -> f64 {
        match self.family {
            Family::Chebyshev { ripple_db } if self.order % 2 == 0 => {
                (-ripple_db / 20.0 * std::f64::consts::LN_10).exp()
            }
            _ => 1.0,
        }
    }

    /// Attenuation at normalized angular frequency `w`, dB, relative to the passband maximum:
    /// `A(w) = 10·log10(∏|jw − p_i|²) − 20·log10(k)`. The product is taken in steps of at most
    /// 10^±100 so that it neither overflows nor underflows at high orders and frequencies, and
    /// needs one logarithm (the order searches call this hundreds of times per mask).
    pub fn attenuation_db(&self, w: f64) -> f64 {
        const STEP: f64 = 1e100;
        let mut product = 1.0f64;
        let mut decades = 0.0f64;
        for g in &self.groups {
            let factor = match *g {
                PoleGroup::Real(p) => w * w + p * p,
                PoleGroup::Conjugate(p) => {
                    // |jw − p|²·|jw − p*|² = (re² + (w − im)²)·(re² + (w + im)²)
                    let re2 = p.re * p.re;
                    (re2 + (w - p.im) * (w - p.im)) * (re2 + (w + p.im) * (w + p.im))
                }
                PoleGroup::RealPair(a, b) => (w * w + a * a) * (w * w + b * b),
            };
            product *= factor;
            while product > STEP {
                product /= STEP;
                decades += 100.0;
            }
            while product < 1.0 / STEP && product > 0.0 {
                product *= STEP;
                decades -= 100.0;
            }
        }
        10.0 * (product.log10() + decades) - 20.0 * self.gain.log10()
    }

    /// The normalized frequency `w_p` at which the attenuation first reaches `apass_db`, so that
    /// the passband edge of a mask can be placed there.
    ///
    /// Closed forms: Butterworth `w_p = (10^(A/10) − 1)^(1/2n)`; Chebyshev
    /// `w_p = cosh(acosh(√(10^(A/10) − 1)/ε)/n)` (1 when `A` equals the ripple); Linkwitz-Riley
    /// `w_p = (10^(A/20) − 1)^(1/n)`; critically damped `w_p = a·√(10^(A/10n) − 1)`. Bessel:
    /// bisection on `ln w` of the monotone attenuation.
    ///
    /// # Errors
    /// `apass` when `apass_db` is not a positive finite number; `ripple` when a Chebyshev ripple
    /// is larger than `apass_db` (the ripple band would already dip below the allowed attenuation).
    pub fn passband_edge(&self, apass_db: f64) -> Result<f64, InputError> {
        if !(apass_db.is_finite() && apass_db > 0.0) {
            return Err(InputError::new(
                "passloss",
                format!("passloss must be a positive attenuation in dB, got {apass_db}"),
            ));
        }
        let n = self.order as f64;
        // 10^(A/10) − 1 without cancellation for small A.
        let power_minus_one = (apass_db / 10.0 * std::f64::consts::LN_10).exp_m1();
        let edge = match self.family {
            Family::Butterworth => power_minus_one.powf(1.0 / (2.0 * n)),
            Family::Chebyshev { ripple_db } => {
                let eps = chebyshev_epsilon(ripple_db);
                let mut x = power_minus_one.sqrt() / eps;
                // The link may set ripple = apass exactly; rounding must not turn that into an error.
                if x < 1.0 && (ripple_db - apass_db).abs() <= 1e-9 * ripple_db.max(1.0) {
                    x = 1.0;
                }
                if x < 1.0 {
                    return Err(InputError::new(
                        "ripple",
                        format!(
                            "ripple {ripple_db} dB is larger than passloss {apass_db} dB, so the \
                             passband ripple alone breaks the mask; set ripple between \
                             {MIN_RIPPLE_DB} dB and passloss"
                        ),
                    ));
                }
                (x.acosh() / n).cosh()
            }
            Family::LinkwitzRiley => (apass_db / 20.0 * std::f64::consts::LN_10)
                .exp_m1()
                .powf(1.0 / n),
            Family::Critical => {
                let a = critical_pole_magnitude(self.order);
                a * (apass_db / (10.0 * n) * std::f64::consts::LN_10)
                    .exp_m1()
                    .sqrt()
            }
            Family::Bessel => {
                let target = apass_db;
                bisect_log_increasing(|w| self.attenuation_db(w) - target)
            }
        };
        Ok(edge)
    }
}

/// Checks a family and order against what Rolloff designs.
///
/// # Errors
/// `order` when the order is 0, above [`MAX_ORDER`], or odd for Linkwitz-Riley; `ripple` when a
/// Chebyshev ripple is outside 0.01–3 dB.
pub fn validate(family: Family, order: usize) -> Result<(), InputError> {
    if order == 0 || order > MAX_ORDER {
        return Err(InputError::new(
            "order",
            format!("order must be 1–{MAX_ORDER}, got {order}"),
        ));
    }
    if family == Family::LinkwitzRiley && order % 2 != 0 {
        return Err(InputError::new(
            "order",
            format!("Linkwitz-Riley needs an even order (2–{MAX_ORDER}), got {order}"),
        ));
    }
    if let Family::Chebyshev { ripple_db } = family {
        if !(MIN_RIPPLE_DB..=MAX_RIPPLE_DB).contains(&ripple_db) {
            return Err(InputError::new(
                "ripple",
                format!(
                    "Chebyshev ripple must be {MIN_RIPPLE_DB}–{MAX_RIPPLE_DB} dB, got {ripple_db}"
                ),
            ));
        }
    }
    Ok(())
}

/// The normalized prototype of `family` with `order` poles.
///
/// # Errors
/// As [`validate`]: `order` out of 1–20 or odd for Linkwitz-Riley, `ripple` out of 0.01–3 dB.
pub fn prototype(family: Family, order: usize) -> Result<Prototype, InputError> {
    validate(family, order)?;
    let groups = match family {
        Family::Butterworth => butterworth_groups(order),
        Family::Chebyshev { ripple_db } => chebyshev_groups(order, ripple_db),
        Family::Bessel => bessel_groups(order),
        Family::LinkwitzRiley => {
            let half = butterworth_groups(order / 2);
            let mut doubled: Vec<PoleGroup> = half
                .iter()
                .filter(|g| matches!(g, PoleGroup::Conjugate(_)))
                .flat_map(|g| [*g, *g])
                .collect();
            // The doubled real Butterworth pole becomes one second-order section with Q = 0.5,
            // the usual realization of a second-order Linkwitz-Riley.
            doubled.extend(half.iter().filter_map(|g| match g {
                PoleGroup::Real(p) => Some(PoleGroup::RealPair(*p, *p)),
                _ => None,
            }));
            doubled
        }
        Family::Critical => {
            let a = critical_pole_magnitude(order);
            let mut groups = vec![PoleGroup::RealPair(-a, -a); order / 2];
            if order % 2 == 1 {
                groups.push(PoleGroup::Real(-a));
            }
            groups
        }
    };
    let poles = flatten(&groups);
    debug_assert_eq!(poles.len(), order, "prototype pole count");
    // ∏(−p) is real because the poles come in conjugate pairs; it would set |H(0)| = 1. The
    // reference gain lowers it for even-order Chebyshev so that the ripple peaks reach 1.
    let dc_unity = poles
        .iter()
        .fold(Complex64::new(1.0, 0.0), |acc, p| acc * (-p))
        .re;
    let mut proto = Prototype {
        family,
        order,
        groups,
        gain: dc_unity,
    };
    proto.gain = dc_unity * proto.reference_gain();
    Ok(proto)
}

/// Chebyshev ripple factor `ε = √(10^(ripple/10) − 1)`.
pub fn chebyshev_epsilon(ripple_db: f64) -> f64 {
    (ripple_db / 10.0 * std::f64::consts::LN_10).exp_m1().sqrt()
}

/// Magnitude `a` of the critically damped prototype's poles: `|H(j1)|² = (1 + 1/a²)^(−n) = 1/2`
/// gives `a = 1/√(2^(1/n) − 1)`.
pub fn critical_pole_magnitude(order: usize) -> f64 {
    let n = order.max(1) as f64;
    1.0 / (std::f64::consts::LN_2 / n).exp_m1().sqrt()
}

/// Butterworth poles as groups: `p_m = −exp(jπm/2n)` for `m = n−1, n−3, …` (pairs), and `−1`
/// when `n` is odd.
fn butterworth_groups(order: usize) -> Vec<PoleGroup> {
    let n = order as f64;
    let mut groups = Vec::with_capacity(order / 2 + 1);
    // m runs over the negative odd/even offsets whose pole has Im p > 0, from the pole nearest the
    // real axis outwards (increasing imaginary part).
    for pair_idx in (0..order / 2).rev() {
        let m = (order - 1 - 2 * pair_idx) as f64;
        let theta = -std::f64::consts::PI * m / (2.0 * n);
        groups.push(PoleGroup::Conjugate(Complex64::new(
            -theta.cos(),
            -theta.sin(),
        )));
    }
    if order % 2 == 1 {
        groups.push(PoleGroup::Real(-1.0));
    }
    sort_pairs(&mut groups);
    groups
}

/// Chebyshev type I poles as groups: `p_m = −sinh(μ + jθ_m)`, `θ_m = πm/2n`,
/// `μ = asinh(1/ε)/n`; the ripple band ends at 1 rad/s.
fn chebyshev_groups(order: usize, ripple_db: f64) -> Vec<PoleGroup> {
    let n = order as f64;
    let eps = chebyshev_epsilon(ripple_db);
    let mu = (1.0 / eps).asinh() / n;
    let mut groups = Vec::with_capacity(order / 2 + 1);
    for pair_idx in 0..order / 2 {
        let m = (order - 1 - 2 * pair_idx) as f64;
        let theta = -std::f64::consts::PI * m / (2.0 * n);
        // −sinh(μ + jθ) = −sinh μ cos θ − j cosh μ sin θ
        groups.push(PoleGroup::Conjugate(Complex64::new(
            -mu.sinh() * theta.cos(),
            -mu.cosh() * theta.sin(),
        )));
    }
    if order % 2 == 1 {
        groups.push(PoleGroup::Real(-mu.sinh()));
    }
    sort_pairs(&mut groups);
    groups
}

/// Orders conjugate pairs by increasing imaginary part and puts real poles last.
fn sort_pairs(groups: &mut [PoleGroup]) {
    groups.sort_by(|a, b| {
        let key = |g: &PoleGroup| match g {
            PoleGroup::Conjugate(p) => (0, p.im),
            PoleGroup::RealPair(x, _) => (1, -x),
            PoleGroup::Real(x) => (2, -x),
        };
        let (ka, kb) = (key(a), key(b));
        ka.0.cmp(&kb.0).then(ka.1.total_cmp(&kb.1))
    });
}

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
    let radius = reverse_bessel_constant(order).powf(1.0 / order as f64);
    let n = order as f64;
    let mut roots: Vec<Complex64> = (0..order)
        .map(|k| {
            let angle = std::f64::consts::FRAC_PI_2 + std::f64::consts::PI * (k as f64 + 0.5) / n;
            Complex64::from_polar(radius, angle)
        })
        .collect();
    // Aberth iteration with the double-double evaluation: plain f64 stalls at its noise floor
    // (about 1e-7 relative at order 20), the precise values converge cubically to 1e-15.
    for _ in 0..100 {
        let mut largest_step = 0.0f64;
        for k in 0..order {
            let z = roots[k];
            let (value, slope) = reverse_bessel_precise(order, z);
            if value.norm() == 0.0 {
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
                largest_step = largest_step.max(step.norm() / roots[k].norm().max(1e-300));
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
    roots.sort_by(|a, b| a.im.total_cmp(&b.im));
    let mut out: Vec<Complex64> = roots[order - order / 2..].to_vec();
    if order % 2 == 1 {
        let middle = roots[order / 2];
        out.push(Complex64::new(middle.re, 0.0));
    }
    out
}

/// Bessel poles as groups, magnitude-normalized so that `|H(j1)|² = 1/2` (scipy
/// `besselap(norm='mag')`).
fn bessel_groups(order: usize) -> Vec<PoleGroup> {
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
    let log_dc: f64 = all.iter().map(|p| p.norm().ln()).sum();
    let half_power = |w: f64| {
        let jw = Complex64::new(0.0, w);
        all.iter().map(|p| (jw - p).norm().ln()).sum::<f64>()
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

/// Finds `w > 0` with `f(w) = 0` for an increasing `f` with `f(0+) < 0`, by bracketing in `ln w`
/// and bisecting to double precision. Returns the bracket end if `f` never changes sign within
/// `[1e-12, 1e12]`.
pub(crate) fn bisect_log_increasing(f: impl Fn(f64) -> f64) -> f64 {
    let mut lo = 1.0f64;
    let mut hi = 1.0f64;
    while f(lo) > 0.0 && lo > 1e-12 {
        lo /= 4.0;
    }
    while f(hi) < 0.0 && hi < 1e12 {
        hi *= 4.0;
    }
    bisect_ln(&f, lo, hi)
}

/// Bisection of an increasing `f` on `ln w` over `[lo, hi]` (`f(lo) < 0 ≤ f(hi)` expected) until
/// the midpoint no longer moves (double precision); returns the last midpoint.
pub(crate) fn bisect_ln(f: impl Fn(f64) -> f64, lo: f64, hi: f64) -> f64 {
    let (mut a, mut b) = (lo.ln(), hi.ln());
    // The midpoint stops moving after about 60 halvings; the cap only guards against NaN ends.
    for _ in 0..400 {
        let mid = 0.5 * (a + b);
        if mid <= a || mid >= b {
            break;
        }
        if f(mid.exp()) < 0.0 {
            a = mid;
        } else {
            b = mid;
        }
    }
    (0.5 * (a + b)).exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dekker_product_equals_the_fused_multiply_add() {
        // Both give the exact rounding error of a·b (IEEE 754 arithmetic, common practice), so
        // they must agree to the bit wherever nothing overflows or underflows.
        let mut x = 0.123_456_789_f64;
        for i in 0..10_000 {
            x = (x * 3.987_654_321 + 0.271_828).fract();
            let a = (x - 0.5) * 10f64.powi(i % 40 - 20);
            let b = (0.75 - x) * 10f64.powi(17 - i % 35);
            let (p, e) = DoubleDouble::two_prod(a, b);
            assert_eq!(p, a * b);
            assert_eq!(e.to_bits(), a.mul_add(b, -p).to_bits(), "{a} × {b}");
        }
    }

    #[test]
    fn reverse_bessel_recurrence_matches_coefficients() {
        // Coefficients of θ_4(s) = s⁴ + 10s³ + 45s² + 105s + 105 (the defining formula
        // (2n−k)!/(2^(n−k)·k!·(n−k)!)).
        let s = Complex64::new(-0.7, 1.3);
        let direct = s.powu(4) + s.powu(3) * 10.0 + s * s * 45.0 + s * 105.0 + 105.0;
        let (value, slope) = reverse_bessel(4, s);
        assert!((value - direct).norm() < 1e-12 * direct.norm());
        let direct_slope = s.powu(3) * 4.0 + s * s * 30.0 + s * 90.0 + 105.0;
        assert!((slope - direct_slope).norm() < 1e-12 * direct_slope.norm());
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
                    (v / d).norm() < 1e-14 * r.norm(),
                    "order {order}: residual step {}",
                    (v / d).norm()
                );
            }
            let expected = -((order * (order + 1)) as f64) / 2.0;
            assert!(
                (sum - expected).abs() < 1e-10 * expected.abs(),
                "order {order}: sum {sum} expected {expected}"
            );
        }
    }

    #[test]
    fn every_prototype_has_its_characteristic_attenuation_at_one() {
        // By definition of the normalizations in the module table.
        for order in 1..=MAX_ORDER {
            let three_db = 10.0 * 2f64.log10();
            for family in [Family::Butterworth, Family::Bessel, Family::Critical] {
                let p = prototype(family, order).unwrap();
                assert!(
                    (p.attenuation_db(1.0) - three_db).abs() < 1e-9,
                    "{family:?} {order}"
                );
            }
            let cheb = prototype(Family::Chebyshev { ripple_db: 0.5 }, order).unwrap();
            assert!((cheb.attenuation_db(1.0) - 0.5).abs() < 1e-9);
            if order % 2 == 0 {
                let lr = prototype(Family::LinkwitzRiley, order).unwrap();
                assert!((lr.attenuation_db(1.0) - 2.0 * three_db).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn passband_edge_inverts_attenuation() {
        let families = [
            Family::Butterworth,
            Family::Chebyshev { ripple_db: 0.25 },
            Family::Bessel,
            Family::LinkwitzRiley,
            Family::Critical,
        ];
        for family in families {
            for order in [2, 4, 9, 20] {
                if family == Family::LinkwitzRiley && order % 2 == 1 {
                    continue;
                }
                let p = prototype(family, order).unwrap();
                for apass in [0.25, 1.0, 3.0, 7.5] {
                    let w = p.passband_edge(apass).unwrap();
                    assert!(
                        (p.attenuation_db(w) - apass).abs() < 1e-9,
                        "{family:?} order {order} apass {apass}: {}",
                        p.attenuation_db(w)
                    );
                }
            }
        }
    }

    #[test]
    fn invalid_inputs_name_their_key() {
        assert_eq!(prototype(Family::Butterworth, 0).unwrap_err().key, "order");
        assert_eq!(prototype(Family::Butterworth, 21).unwrap_err().key, "order");
        assert_eq!(
            prototype(Family::LinkwitzRiley, 5).unwrap_err().key,
            "order"
        );
        let bad = Family::Chebyshev { ripple_db: 3.5 };
        assert_eq!(prototype(bad, 4).unwrap_err().key, "ripple");
        let nan = Family::Chebyshev {
            ripple_db: f64::NAN,
        };
        assert_eq!(prototype(nan, 4).unwrap_err().key, "ripple");
        let cheb = prototype(Family::Chebyshev { ripple_db: 1.0 }, 4).unwrap();
        assert_eq!(cheb.passband_edge(0.5).unwrap_err().key, "ripple");
        assert_eq!(cheb.passband_edge(f64::NAN).unwrap_err().key, "passloss");
    }
}

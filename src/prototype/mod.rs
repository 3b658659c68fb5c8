//! Normalized low-pass prototypes: the poles of each family at 1 rad/s.
//!
//! Every prototype is a low-pass `H(s) = k·∏(s² + ωz_j²) / ∏(s − p_i)` with its characteristic
//! frequency at 1 rad/s; the all-pole families have no finite zeros, inverse Chebyshev and
//! elliptic have `⌊n/2⌋` pairs on the jω axis:
//!
//! | family | what sits at 1 rad/s | poles |
//! |---|---|---|
//! | Butterworth | −3.01 dB point | `p_m = −exp(jπm/2n)`, `m = −n+1, −n+3, …, n−1` |
//! | Chebyshev I | edge of the ripple band (attenuation = ripple) | `p_m = −sinh(μ + jπm/2n)`, `μ = asinh(1/ε)/n` |
//! | Bessel | −3.01 dB point (magnitude normalization) | roots of the reverse Bessel polynomial, scaled |
//! | Linkwitz-Riley | −6.02 dB point | each pole of Butterworth(n/2) twice |
//! | critically damped | −3.01 dB point | n poles at `−a`, `a = 1/√(2^(1/n) − 1)` |
//! | inverse Chebyshev | where the stopband depth is first reached | submodule `inverse_chebyshev` |
//! | elliptic | edge of the ripple band | submodule `elliptic` (Jacobi elliptic functions) |
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
//! Newton steps, and scaled so that `|H(j1)|² = 1/2` by a one-dimensional root find. That root
//! finding lives in the submodule `bessel`; this file holds the prototype types, the closed-form
//! families and the one-dimensional root finds the design step shares.

mod bessel;
pub mod elliptic;
mod inverse_chebyshev;

use crate::fmath;
use num_complex::Complex64;

use crate::error::InputError;
use crate::spec::Family;
use bessel::bessel_groups;

/// Highest order Rolloff designs (link key `order`, 1–20).
pub const MAX_ORDER: usize = 20;

/// Smallest Chebyshev ripple accepted, dB (link key `ripple`).
pub const MIN_RIPPLE_DB: f64 = 0.01;

/// Largest Chebyshev ripple accepted, dB (link key `ripple`).
pub const MAX_RIPPLE_DB: f64 = 3.0;

/// Equiripple stopband depth of inverse Chebyshev and elliptic when neither the link nor a mask
/// sets it, dB (link key `stopdepth`, v1 `astop`).
pub const DEFAULT_STOP_DEPTH_DB: f64 = 40.0;

/// Largest equiripple stopband depth designed, dB.
pub const MAX_STOP_DEPTH_DB: f64 = 200.0;

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
            Self::Conjugate(p) => fmath::cnorm(p),
            Self::RealPair(a, b) => (a * b).abs().sqrt(),
        }
    }

    /// Pole quality factor `Q = w0 / (−(sum of the poles))`; `None` for a single real pole.
    pub fn q(&self) -> Option<f64> {
        match *self {
            Self::Real(_) => None,
            Self::Conjugate(p) => Some(fmath::cnorm(p) / (2.0 * p.re.abs())),
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
    /// `k = ∏(−p_i)/√(1 + ε²)` — the same `k` as scipy's `cheb1ap`. With zeros,
    /// `k = ∏(−p_i)/∏ωz_j²` (and the same `1/√(1 + ε²)` for an even-order elliptic), scipy's
    /// `cheb2ap` and `ellipap`.
    pub gain: f64,
    /// Frequencies `ωz` of the pairs of zeros `±jωz` on the jω axis, rad/s (normalized),
    /// ascending; empty for the all-pole families.
    pub zeros: Vec<f64>,
    /// Where the equiripple stopband begins, rad/s (normalized): 1 for inverse Chebyshev, `1/k`
    /// for elliptic (`None` for the all-pole families and for a first-order elliptic, whose
    /// stopband rises monotonically).
    pub stop_edge: Option<f64>,
}

impl Prototype {
    /// All poles, rad/s (normalized), each conjugate pair as `p, p*`.
    pub fn poles(&self) -> Vec<Complex64> {
        flatten(&self.groups)
    }

    /// All finite zeros, rad/s (normalized), each pair as `+jωz, −jωz`.
    pub fn zeros_complex(&self) -> Vec<Complex64> {
        self.zeros
            .iter()
            .flat_map(|&w| [Complex64::new(0.0, w), Complex64::new(0.0, -w)])
            .collect()
    }

    /// `H(jw)` of the prototype at normalized angular frequency `w` (rad/s).
    pub fn response(&self, w: f64) -> Complex64 {
        let jw = Complex64::new(0.0, w);
        let numerator = self
            .zeros
            .iter()
            .fold(self.gain, |acc, wz| acc * (wz * wz - w * w));
        self.groups
            .iter()
            .fold(Complex64::new(numerator, 0.0), |h, g| match *g {
                PoleGroup::Real(p) => h / (jw - p),
                PoleGroup::Conjugate(p) => h / (jw - p) / (jw - p.conj()),
                PoleGroup::RealPair(a, b) => h / (jw - a) / (jw - b),
            })
    }

    /// `|H(j0)|`, the DC gain relative to the passband maximum: 1 for every family except
    /// even-order Chebyshev, where it is `1/√(1 + ε²)` (−ripple dB).
    pub fn reference_gain(&self) -> f64 {
        match self.family {
            Family::Chebyshev { ripple_db } | Family::Elliptic { ripple_db, .. }
                if self.order % 2 == 0 =>
            {
                fmath::exp(-ripple_db / 20.0 * std::f64::consts::LN_10)
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
        let mut zero_product = 1.0f64;
        let mut zero_decades = 0.0f64;
        for wz in &self.zeros {
            let factor = (wz * wz - w * w) * (wz * wz - w * w);
            zero_product *= factor;
            while zero_product > STEP {
                zero_product /= STEP;
                zero_decades += 100.0;
            }
            while zero_product < 1.0 / STEP && zero_product > 0.0 {
                zero_product *= STEP;
                zero_decades -= 100.0;
            }
        }
        let zeros_db = if self.zeros.is_empty() {
            0.0
        } else {
            10.0 * (fmath::log10(zero_product) + zero_decades)
        };
        10.0 * (fmath::log10(product) + decades) - 20.0 * fmath::log10(self.gain) - zeros_db
    }

    /// The equiripple stopband depth of inverse Chebyshev and elliptic, dB; `None` for the
    /// all-pole families.
    pub fn stop_depth_db(&self) -> Option<f64> {
        match self.family {
            Family::InverseChebyshev { astop_db } | Family::Elliptic { astop_db, .. } => {
                Some(astop_db)
            }
            _ => None,
        }
    }

    /// The smallest attenuation at or above `w` (rad/s, normalized, past the passband), dB: what
    /// a stopband that begins at `w` gets. The all-pole families roll off monotonically, so it is
    /// [`Prototype::attenuation_db`]; with zeros the attenuation rises to the depth at
    /// [`Prototype::stop_edge`] and then ripples between the depth and the zeros, so from there
    /// on it is the depth.
    pub fn stopband_floor_db(&self, w: f64) -> f64 {
        match (self.stop_edge, self.stop_depth_db()) {
            (Some(edge), Some(depth)) if w >= edge => depth,
            _ => self.attenuation_db(w),
        }
    }

    /// The normalized frequency at which the attenuation first reaches `astop_db` past the
    /// passband: bisection on `ln w` of the monotone rise (for families with zeros, the rise
    /// between the passband and [`Prototype::stop_edge`]; a depth at or above the family's own
    /// depth gives the stop edge).
    pub fn stop_edge_for(&self, astop_db: f64) -> f64 {
        match (self.stop_edge, self.stop_depth_db()) {
            (Some(edge), Some(depth)) => {
                if astop_db >= depth {
                    return edge;
                }
                let lo = if matches!(self.family, Family::Elliptic { .. }) {
                    1.0
                } else {
                    1e-30
                };
                if self.attenuation_db(lo) >= astop_db {
                    return lo;
                }
                bisect_ln(|w| self.attenuation_db(w) - astop_db, lo, edge)
            }
            _ => {
                let f = |w: f64| self.attenuation_db(w) - astop_db;
                if f(1e-30) >= 0.0 {
                    1e-30
                } else if f(1e30) <= 0.0 {
                    1e30
                } else {
                    bisect_ln(f, 1e-30, 1e30)
                }
            }
        }
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
        let power_minus_one = fmath::exp_m1(apass_db / 10.0 * std::f64::consts::LN_10);
        let edge = match self.family {
            Family::Butterworth => fmath::powf(power_minus_one, 1.0 / (2.0 * n)),
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
                fmath::cosh(fmath::acosh(x) / n)
            }
            Family::LinkwitzRiley => fmath::powf(
                fmath::exp_m1(apass_db / 20.0 * std::f64::consts::LN_10),
                1.0 / n,
            ),
            Family::Critical => {
                let a = critical_pole_magnitude(self.order);
                a * fmath::exp_m1(apass_db / (10.0 * n) * std::f64::consts::LN_10).sqrt()
            }
            Family::Bessel => {
                let target = apass_db;
                bisect_log_increasing(|w| self.attenuation_db(w) - target)
            }
            Family::InverseChebyshev { astop_db } => {
                // A(w) = 10·log10(1 + 1/(δ²·T_n²(1/w))): T_n(1/w_p) = √(10^(As/10) − 1)/√(10^(A/10) − 1).
                let stop = fmath::exp_m1(astop_db / 10.0 * std::f64::consts::LN_10);
                let x = (stop / power_minus_one).sqrt();
                if x <= 1.0 {
                    return Err(InputError::new(
                        "passloss",
                        format!(
                            "passloss {apass_db} dB is not below the stopband depth {astop_db} dB"
                        ),
                    ));
                }
                1.0 / fmath::cosh(fmath::acosh(x) / n)
            }
            Family::Elliptic { ripple_db, .. } => {
                if (ripple_db - apass_db).abs() <= 1e-9 * ripple_db.max(1.0) {
                    1.0
                } else if ripple_db > apass_db {
                    return Err(InputError::new(
                        "ripple",
                        format!(
                            "ripple {ripple_db} dB is larger than passloss {apass_db} dB, so the \
                             passband ripple alone breaks the mask; set ripple between \
                             {MIN_RIPPLE_DB} dB and passloss"
                        ),
                    ));
                } else {
                    // Past the ripple band the attenuation rises monotonically to the first zero.
                    let hi = self
                        .zeros
                        .first()
                        .copied()
                        .or(self.stop_edge)
                        .unwrap_or(1e30);
                    let f = |w: f64| self.attenuation_db(w) - apass_db;
                    if f(hi) <= 0.0 {
                        hi
                    } else {
                        bisect_ln(f, 1.0, hi)
                    }
                }
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
    if let Family::Chebyshev { ripple_db } | Family::Elliptic { ripple_db, .. } = family {
        if !(MIN_RIPPLE_DB..=MAX_RIPPLE_DB).contains(&ripple_db) {
            return Err(InputError::new(
                "ripple",
                format!(
                    "{} ripple must be {MIN_RIPPLE_DB}–{MAX_RIPPLE_DB} dB, got {ripple_db}",
                    if matches!(family, Family::Elliptic { .. }) {
                        "elliptic"
                    } else {
                        "Chebyshev"
                    }
                ),
            ));
        }
    }
    if let Family::InverseChebyshev { astop_db } | Family::Elliptic { astop_db, .. } = family {
        let floor = match family {
            Family::Elliptic { ripple_db, .. } => ripple_db,
            _ => 0.0,
        };
        if !(astop_db.is_finite() && astop_db > floor && astop_db <= MAX_STOP_DEPTH_DB) {
            return Err(InputError::new(
                "stopdepth",
                format!(
                    "the stopband depth must be above {floor} dB and at most \
                     {MAX_STOP_DEPTH_DB} dB, got {astop_db}"
                ),
            ));
        }
    }
    Ok(())
}

/// The normalized prototype of `family` with `order` poles.
///
/// # Errors
/// As [`validate`]: `order` out of 1–20 or odd for Linkwitz-Riley, `ripple` out of 0.01–3 dB,
/// `stopdepth` out of range.
pub fn prototype(family: Family, order: usize) -> Result<Prototype, InputError> {
    validate(family, order)?;
    let mut zeros = Vec::new();
    let mut stop_edge = None;
    let groups = match family {
        Family::InverseChebyshev { astop_db } => {
            let (groups, z) = inverse_chebyshev::inverse_chebyshev(order, astop_db);
            zeros = z;
            stop_edge = Some(1.0);
            groups
        }
        Family::Elliptic {
            ripple_db,
            astop_db,
        } => {
            let (groups, z, m) = elliptic::elliptic(order, ripple_db, astop_db);
            zeros = z;
            stop_edge = (m > 0.0).then(|| 1.0 / m.sqrt());
            groups
        }
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
        .re
        / zeros.iter().fold(1.0, |acc, wz| acc * wz * wz);
    let mut proto = Prototype {
        family,
        order,
        groups,
        gain: dc_unity,
        zeros,
        stop_edge,
    };
    proto.gain = dc_unity * proto.reference_gain();
    Ok(proto)
}

/// Chebyshev ripple factor `ε = √(10^(ripple/10) − 1)`.
pub fn chebyshev_epsilon(ripple_db: f64) -> f64 {
    fmath::exp_m1(ripple_db / 10.0 * std::f64::consts::LN_10).sqrt()
}

/// Magnitude `a` of the critically damped prototype's poles: `|H(j1)|² = (1 + 1/a²)^(−n) = 1/2`
/// gives `a = 1/√(2^(1/n) − 1)`.
pub fn critical_pole_magnitude(order: usize) -> f64 {
    let n = order.max(1) as f64;
    1.0 / fmath::exp_m1(std::f64::consts::LN_2 / n).sqrt()
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
            -fmath::cos(theta),
            -fmath::sin(theta),
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
    let mu = fmath::asinh(1.0 / eps) / n;
    let mut groups = Vec::with_capacity(order / 2 + 1);
    for pair_idx in 0..order / 2 {
        let m = (order - 1 - 2 * pair_idx) as f64;
        let theta = -std::f64::consts::PI * m / (2.0 * n);
        // −sinh(μ + jθ) = −sinh μ cos θ − j cosh μ sin θ
        groups.push(PoleGroup::Conjugate(Complex64::new(
            -fmath::sinh(mu) * fmath::cos(theta),
            -fmath::cosh(mu) * fmath::sin(theta),
        )));
    }
    if order % 2 == 1 {
        groups.push(PoleGroup::Real(-fmath::sinh(mu)));
    }
    sort_pairs(&mut groups);
    groups
}

/// Orders conjugate pairs by increasing imaginary part and puts real poles last.
pub(super) fn sort_pairs(groups: &mut [PoleGroup]) {
    crate::sort::sort_by(groups, |a, b| {
        let key = |g: &PoleGroup| match g {
            PoleGroup::Conjugate(p) => (0, p.im),
            PoleGroup::RealPair(x, _) => (1, -x),
            PoleGroup::Real(x) => (2, -x),
        };
        let (ka, kb) = (key(a), key(b));
        ka.0.cmp(&kb.0).then(ka.1.total_cmp(&kb.1))
    });
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
    let (mut a, mut b) = (fmath::ln(lo), fmath::ln(hi));
    // The midpoint stops moving after about 60 halvings; the cap only guards against NaN ends.
    for _ in 0..400 {
        let mid = 0.5 * (a + b);
        if mid <= a || mid >= b {
            break;
        }
        if f(fmath::exp(mid)) < 0.0 {
            a = mid;
        } else {
            b = mid;
        }
    }
    fmath::exp(0.5 * (a + b))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_prototype_has_its_characteristic_attenuation_at_one() {
        // By definition of the normalizations in the module table.
        for order in 1..=MAX_ORDER {
            let three_db = 10.0 * fmath::log10(2f64);
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

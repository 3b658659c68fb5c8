//! Frequency transforms of the normalized low-pass prototype: low-pass, high-pass, band-pass,
//! band-stop.
//!
//! With the prototype variable `S` (characteristic frequency 1 rad/s) and the target `s` (rad/s):
//!
//! * low-pass at `wc`: `S = s/wc`, each pole `p → p·wc`, no finite zeros;
//! * high-pass at `wc`: `S = wc/s`, each pole `p → wc/p`, `n` zeros at the origin;
//! * band-pass with centre `W0` and bandwidth `B`: `S = (s² + W0²)/(B·s)`; each prototype pole `p`
//!   becomes the two roots of `s² − p·B·s + W0² = 0`, and `n` zeros sit at the origin (and `n` at
//!   infinity);
//! * band-stop with centre `W0` and bandwidth `B`: `S = B·s/(s² + W0²)`; each prototype pole `p`
//!   becomes the two roots of `s² − (B/p)·s + W0² = 0`.
//!
//! The prototype's jω-axis zeros `±jωz` move the same way: low-pass to `±jωz·wc`, high-pass to
//! `±j·wc/ωz`, band-pass to the two pairs `±jy` with `y² ∓ ωz·B·y − W0² = 0`, band-stop to the two
//! pairs with `y² ∓ (B/ωz)·y − W0² = 0` (in each case `y_a·y_b = W0²`). The prototype's zeros at
//! infinity (`n − 2·⌊zeros⌋` of them) go to infinity (low-pass), the origin (high-pass), the origin
//! and infinity (band-pass, one each) and `±jW0` (band-stop, one pair each).
//!
//! Band-pass pairing: a complex prototype pair `p, p*` gives four poles `q1, q2, q1*, q2*`; the
//! sections are `{q1, q1*}` and `{q2, q2*}` (conjugate pairs, so each is a real second-order
//! section). A real prototype pole gives one second-order section (a conjugate pair when
//! `σB < 2·W0`, two real poles otherwise). Each band-pass section takes one zero at the origin
//! and one at infinity: `H = g·(w0/Q)·s / (s² + s·w0/Q + w0²)`.

use crate::fmath;
use num_complex::Complex64;

use crate::prototype::{PoleGroup, Prototype};
use crate::spec::ResponseClass;

/// Where the prototype is moved to, in rad/s.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Band {
    /// Low-pass with the prototype's 1 rad/s at `wc` rad/s.
    LowPass {
        /// Cutoff, rad/s.
        wc: f64,
    },
    /// High-pass with the prototype's 1 rad/s at `wc` rad/s.
    HighPass {
        /// Cutoff, rad/s.
        wc: f64,
    },
    /// Band-pass with geometric centre `w0` and bandwidth `bw` (both rad/s): the prototype's
    /// ±1 rad/s map to the two edges `w_lo·w_hi = w0²`, `w_hi − w_lo = bw`.
    BandPass {
        /// Geometric centre, rad/s.
        w0: f64,
        /// Bandwidth between the edges the prototype's 1 rad/s maps to, rad/s.
        bw: f64,
    },
    /// Band-stop with geometric centre `w0` and bandwidth `bw` (both rad/s): the prototype's
    /// ±1 rad/s map to the two edges `w_lo·w_hi = w0²`, `w_hi − w_lo = bw`, between which the
    /// filter stops.
    BandStop {
        /// Geometric centre, rad/s.
        w0: f64,
        /// Bandwidth between the edges the prototype's 1 rad/s maps to, rad/s.
        bw: f64,
    },
}

impl Band {
    /// The response class this band produces.
    pub fn class(&self) -> ResponseClass {
        match self {
            Self::LowPass { .. } => ResponseClass::LowPass,
            Self::HighPass { .. } => ResponseClass::HighPass,
            Self::BandPass { .. } => ResponseClass::BandPass,
            Self::BandStop { .. } => ResponseClass::BandStop,
        }
    }
}

/// The transformed filter: poles in rad/s grouped into sections, and its zeros.
#[derive(Debug, Clone, PartialEq)]
pub struct Target {
    /// What the filter passes.
    pub class: ResponseClass,
    /// The band it was transformed to (carries the cutoff or the centre and bandwidth, rad/s).
    pub band: Band,
    /// One group per section (conjugate pair, real pair or single real pole), rad/s.
    pub groups: Vec<PoleGroup>,
    /// Zeros at the origin: the prototype's zeros at infinity `n − 2·m` (`m` its jω-axis pairs)
    /// for hp and bp, none for lp and bs. All zeros not here or in `zero_pairs` are at infinity.
    pub zeros_at_origin: usize,
    /// Frequencies `ω` of the pairs of zeros `±jω` on the jω axis, rad/s, ascending.
    pub zero_pairs: Vec<f64>,
}

impl Target {
    /// All poles, rad/s, each conjugate pair as `p, p*`.
    pub fn poles(&self) -> Vec<Complex64> {
        crate::prototype::flatten(&self.groups)
    }

    /// All finite zeros, rad/s: the origin ones first, then each jω-axis pair as `+jω, −jω`
    /// (the zeros scipy's `zpk` output lists).
    pub fn zeros(&self) -> Vec<Complex64> {
        let mut out = vec![Complex64::new(0.0, 0.0); self.zeros_at_origin];
        out.extend(
            self.zero_pairs
                .iter()
                .flat_map(|&w| [Complex64::new(0.0, w), Complex64::new(0.0, -w)]),
        );
        out
    }
}

/// Applies `band` to the prototype's poles.
///
/// The caller guarantees positive finite `wc`, `w0`, `bw` (see `design::synthesize`); a zero
/// or non-finite value gives non-finite poles, never a panic.
pub fn transform(proto: &Prototype, band: Band) -> Target {
    let at_infinity = proto.order - 2 * proto.zeros.len();
    let mut target = match band {
        Band::LowPass { wc } => Target {
            class: ResponseClass::LowPass,
            band,
            groups: proto.groups.iter().map(|g| scale(*g, wc)).collect(),
            zeros_at_origin: 0,
            zero_pairs: proto.zeros.iter().map(|wz| wz * wc).collect(),
        },
        Band::HighPass { wc } => Target {
            class: ResponseClass::HighPass,
            band,
            groups: proto.groups.iter().map(|g| invert(*g, wc)).collect(),
            zeros_at_origin: at_infinity,
            zero_pairs: proto.zeros.iter().map(|wz| wc / wz).collect(),
        },
        Band::BandPass { w0, bw } => Target {
            class: ResponseClass::BandPass,
            band,
            groups: proto
                .groups
                .iter()
                .flat_map(|g| bandpass_group(*g, w0, bw))
                .collect(),
            zeros_at_origin: at_infinity,
            zero_pairs: proto
                .zeros
                .iter()
                .flat_map(|wz| axis_pair(wz * bw, w0))
                .collect(),
        },
        Band::BandStop { w0, bw } => {
            let mut zero_pairs: Vec<f64> = proto
                .zeros
                .iter()
                .flat_map(|wz| axis_pair(bw / wz, w0))
                .collect();
            zero_pairs.extend(std::iter::repeat(w0).take(at_infinity));
            Target {
                class: ResponseClass::BandStop,
                band,
                groups: proto
                    .groups
                    .iter()
                    .flat_map(|g| bandstop_group(*g, w0, bw))
                    .collect(),
                zeros_at_origin: 0,
                zero_pairs,
            }
        }
    };
    target.zero_pairs.sort_by(f64::total_cmp);
    target
}

/// The two positive roots `y` of `y² ∓ c·y − W0² = 0` (one for each sign; their product is
/// `W0²`): where a band transform puts the pair of prototype zeros whose image coefficient is
/// `c` (band-pass `c = ωz·B`, band-stop `c = B/ωz`). The larger from the formula, the smaller
/// from the product, without cancellation.
fn axis_pair(c: f64, w0: f64) -> [f64; 2] {
    let big = 0.5 * (c + (c * c + 4.0 * w0 * w0).sqrt());
    [w0 * w0 / big, big]
}

/// Band-stop images of one prototype group: the band-pass images of the group's reciprocal
/// (`s² − (B/p)·s + W0²` is the band-pass quadratic for `1/p`).
fn bandstop_group(group: PoleGroup, w0: f64, bw: f64) -> Vec<PoleGroup> {
    let reciprocal = match group {
        PoleGroup::Real(p) => PoleGroup::Real(1.0 / p),
        PoleGroup::Conjugate(p) => PoleGroup::Conjugate((Complex64::new(1.0, 0.0) / p).conj()),
        PoleGroup::RealPair(a, b) => PoleGroup::RealPair(1.0 / a, 1.0 / b),
    };
    bandpass_group(reciprocal, w0, bw)
}

/// `p → p·wc`.
fn scale(group: PoleGroup, wc: f64) -> PoleGroup {
    match group {
        PoleGroup::Real(p) => PoleGroup::Real(p * wc),
        PoleGroup::Conjugate(p) => PoleGroup::Conjugate(p * wc),
        PoleGroup::RealPair(a, b) => PoleGroup::RealPair(a * wc, b * wc),
    }
}

/// `p → wc/p`; the image of an upper-half pole is in the lower half, so the stored member is
/// conjugated back.
fn invert(group: PoleGroup, wc: f64) -> PoleGroup {
    match group {
        PoleGroup::Real(p) => PoleGroup::Real(wc / p),
        PoleGroup::Conjugate(p) => PoleGroup::Conjugate((wc / p).conj()),
        PoleGroup::RealPair(a, b) => PoleGroup::RealPair(wc / a, wc / b),
    }
}

/// The two roots of `s² − p·B·s + W0² = 0`, computed without cancellation: the root of larger
/// magnitude from the quadratic formula, the other from the product `q1·q2 = W0²`.
pub fn bandpass_roots(p: Complex64, w0: f64, bw: f64) -> (Complex64, Complex64) {
    let b = p * bw;
    let disc = fmath::csqrt(b * b - 4.0 * w0 * w0);
    // Pick the sign that adds magnitudes: Re(conj(b)·disc) ≥ 0.
    let big = if (b.conj() * disc).re >= 0.0 {
        (b + disc) / 2.0
    } else {
        (b - disc) / 2.0
    };
    let small = Complex64::new(w0 * w0, 0.0) / big;
    (big, small)
}

/// Band-pass images of one prototype group, one group per second-order section.
fn bandpass_group(group: PoleGroup, w0: f64, bw: f64) -> Vec<PoleGroup> {
    let upper = |q: Complex64| {
        if q.im < 0.0 {
            q.conj()
        } else {
            q
        }
    };
    let real_pole_section = |sigma: f64| {
        // s² + σB·s + W0² = 0: complex pair when σB < 2·W0, two real poles otherwise.
        let b = sigma * bw;
        let disc = b * b - 4.0 * w0 * w0;
        if disc < 0.0 {
            PoleGroup::Conjugate(Complex64::new(-b / 2.0, (-disc).sqrt() / 2.0))
        } else {
            let big = -(b + disc.sqrt()) / 2.0;
            PoleGroup::RealPair(big, w0 * w0 / big)
        }
    };
    match group {
        PoleGroup::Conjugate(p) => {
            let (q1, q2) = bandpass_roots(p, w0, bw);
            vec![
                PoleGroup::Conjugate(upper(q1)),
                PoleGroup::Conjugate(upper(q2)),
            ]
        }
        PoleGroup::Real(p) => vec![real_pole_section(-p)],
        PoleGroup::RealPair(a, b) => vec![real_pole_section(-a), real_pole_section(-b)],
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prototype::prototype;
    use crate::spec::Family;

    #[test]
    fn bandpass_roots_solve_their_quadratic() {
        // Narrow band (W0 ≫ |p|·B) is where the naive formula cancels.
        for (w0, bw) in [(1.0, 0.3), (1e4, 1.0), (3.0, 20.0)] {
            let p = Complex64::new(-0.3827, 0.9239);
            let (q1, q2) = bandpass_roots(p, w0, bw);
            for q in [q1, q2] {
                let residual = q * q - p * bw * q + w0 * w0;
                assert!(fmath::cnorm(residual) < 1e-12 * (w0 * w0), "{residual}");
            }
        }
    }

    #[test]
    fn bandpass_sections_keep_centre_product() {
        // The two sections from one prototype pair sit geometrically around W0 (w0a·w0b = W0²)
        // with equal Q — a property of the transform that follows from q1·q2 = W0².
        let proto = prototype(Family::Butterworth, 4).unwrap();
        let target = transform(&proto, Band::BandPass { w0: 10.0, bw: 2.0 });
        assert_eq!(target.groups.len(), 4);
        assert_eq!(target.zeros_at_origin, 4);
        for pair in target.groups.chunks(2) {
            let (a, b) = (pair[0], pair[1]);
            assert!((a.w0() * b.w0() - 100.0).abs() < 1e-9);
            assert!((a.q().unwrap() - b.q().unwrap()).abs() < 1e-9);
        }
    }

    #[test]
    fn wide_band_real_pole_gives_real_pair() {
        let proto = prototype(Family::Butterworth, 1).unwrap();
        let target = transform(&proto, Band::BandPass { w0: 1.0, bw: 5.0 });
        match target.groups.as_slice() {
            [PoleGroup::RealPair(a, b)] => {
                assert!((a * b - 1.0).abs() < 1e-12 && (a + b + 5.0).abs() < 1e-12)
            }
            other => panic!("expected one real pair, got {other:?}"),
        }
    }

    #[test]
    fn highpass_inverts() {
        let proto = prototype(Family::Chebyshev { ripple_db: 1.0 }, 5).unwrap();
        let target = transform(&proto, Band::HighPass { wc: 7.0 });
        for (g, h) in proto.groups.iter().zip(&target.groups) {
            assert!((g.w0() * h.w0() - 7.0).abs() < 1e-12);
            assert_eq!(g.q().is_some(), h.q().is_some());
            if let (Some(a), Some(b)) = (g.q(), h.q()) {
                assert!((a - b).abs() < 1e-12);
            }
        }
    }
}

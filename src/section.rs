//! One section of the cascade and its own ideal response: what it passes, f0, Q, gain, and
//! `H(jω)`, phase and group delay from its transfer function.
//!
//! A leaf: [`crate::sections`] (building and ordering sections) and [`crate::response`] (the
//! cascade's response) both import it, and it imports neither. Phase and group delay are
//! analytic: the denominator `w0² − ω² + jω·w0/Q` of a second-order section has a positive
//! imaginary part for every `ω > 0`, so its argument runs continuously from 0 to π (a first-order
//! `w0 + jω` from 0 to π/2), and `τ = −dφ/dω` is the derivative of that argument (see
//! [`crate::response`] for the cascade).

use crate::fmath;
use num_complex::Complex64;
use serde::Serialize;

const TWO_PI: f64 = 2.0 * std::f64::consts::PI;

/// What a section passes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum SectionKind {
    /// H(s) = g·w0² / (s² + s·w0/Q + w0²), or g·w0 / (s + w0) for first order.
    LowPass,
    /// H(s) = g·s² / (s² + s·w0/Q + w0²), or g·s / (s + w0) for first order.
    HighPass,
    /// H(s) = g·(w0/Q)·s / (s² + s·w0/Q + w0²): gain g at f0. Second order only.
    BandPass,
    /// A pair of zeros on the jω axis at `wz = 2π·fz_hz`:
    /// H(s) = g·k·(s² + wz²) / (s² + s·w0/Q + w0²) with `k = min(1, w0²/wz²)`, so that `g` is the
    /// larger of the two far-side gains: the DC gain of a low-pass notch (fz > f0), the
    /// high-frequency gain of a high-pass notch (fz < f0), both for a symmetric notch (fz = f0).
    /// Second order only; [`Section::fz_hz`] holds the zero frequency.
    Notch,
}

/// Which side of its pole frequency a notch section's zeros sit on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum NotchSide {
    /// fz > f0: passes low frequencies at the full gain (the zeros of an elliptic or inverse
    /// Chebyshev low-pass, the upper half of a band-stop).
    LowPassNotch,
    /// fz < f0: passes high frequencies at the full gain.
    HighPassNotch,
    /// fz = f0 (within 1e-9 relative): the same gain on both sides, as a mains notch.
    Symmetric,
}

/// One section of the cascade.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Section {
    /// What the section passes.
    pub kind: SectionKind,
    /// Natural frequency (second order) or pole frequency (first order), Hz.
    pub f0_hz: f64,
    /// Pole quality factor; `None` for a first-order section.
    pub q: Option<f64>,
    /// Passband gain, V/V, signed: DC gain (low-pass), high-frequency gain (high-pass), gain at f0
    /// (band-pass), the larger far-side gain (notch, see [`SectionKind::Notch`]).
    pub gain: f64,
    /// Frequency of the section's pair of jω-axis zeros, Hz: `Some` exactly for
    /// [`SectionKind::Notch`].
    pub fz_hz: Option<f64>,
}

impl Section {
    /// 1 or 2.
    pub fn order(&self) -> usize {
        if self.q.is_some() {
            2
        } else {
            1
        }
    }

    /// Where a notch section's zeros sit against its pole frequency; `None` for other kinds.
    pub fn notch_side(&self) -> Option<NotchSide> {
        let fz = self.fz_hz?;
        if self.kind != SectionKind::Notch {
            return None;
        }
        let relative = (fz - self.f0_hz) / self.f0_hz;
        Some(if relative.abs() <= 1e-9 {
            NotchSide::Symmetric
        } else if relative > 0.0 {
            NotchSide::LowPassNotch
        } else {
            NotchSide::HighPassNotch
        })
    }

    /// The notch numerator's scale `k = min(1, w0²/wz²)` (see [`SectionKind::Notch`]), with
    /// `wz² = (2π·fz)²`; 1 without a zero frequency.
    pub fn notch_scale(&self) -> f64 {
        match self.fz_hz {
            Some(fz) if fz > self.f0_hz => (self.f0_hz / fz) * (self.f0_hz / fz),
            _ => 1.0,
        }
    }

    /// `H(jω)` of one section at `f_hz` (ω = 2π·f).
    pub fn response(&self, f_hz: f64) -> Complex64 {
        let w = TWO_PI * f_hz;
        let w0 = TWO_PI * self.f0_hz;
        let s = Complex64::new(0.0, w);
        match self.q {
            Some(q) => {
                let den = s * s + s * (w0 / q) + w0 * w0;
                let num = match self.kind {
                    SectionKind::LowPass => Complex64::new(w0 * w0, 0.0),
                    SectionKind::HighPass => s * s,
                    SectionKind::BandPass => s * (w0 / q),
                    SectionKind::Notch => {
                        let wz = TWO_PI * self.fz_hz.unwrap_or(self.f0_hz);
                        Complex64::new((wz * wz - w * w) * self.notch_scale(), 0.0)
                    }
                };
                num * self.gain / den
            }
            None => {
                let den = s + w0;
                let num = match self.kind {
                    SectionKind::LowPass => Complex64::new(w0, 0.0),
                    // A first-order band-pass does not exist; a first-order section in a band-pass
                    // cascade can only be a high-pass (s) piece, so treat it like one; a notch
                    // needs two zeros, so a first-order one cannot be built and is read the same.
                    SectionKind::HighPass | SectionKind::BandPass | SectionKind::Notch => s,
                };
                num * self.gain / den
            }
        }
    }

    /// Phase of one section at `f_hz`, radians, continuous in frequency (see the module docs).
    pub fn phase_rad(&self, f_hz: f64) -> f64 {
        let w = TWO_PI * f_hz;
        let w0 = TWO_PI * self.f0_hz;
        let (numerator, denominator) = match self.q {
            Some(q) => {
                let num = match self.kind {
                    SectionKind::LowPass => 0.0,
                    SectionKind::HighPass => std::f64::consts::PI,
                    SectionKind::BandPass => std::f64::consts::FRAC_PI_2,
                    // The real numerator wz² − ω² changes sign at the zero: the phase steps up by
                    // π there (a jump, not a slope, so it adds nothing to the group delay).
                    SectionKind::Notch => {
                        let wz = TWO_PI * self.fz_hz.unwrap_or(self.f0_hz);
                        if w > wz {
                            std::f64::consts::PI
                        } else {
                            0.0
                        }
                    }
                };
                (num, fmath::atan2(w * w0 / q, w0 * w0 - w * w))
            }
            None => {
                let num = match self.kind {
                    SectionKind::LowPass => 0.0,
                    SectionKind::HighPass | SectionKind::BandPass | SectionKind::Notch => {
                        std::f64::consts::FRAC_PI_2
                    }
                };
                (num, fmath::atan2(w, w0))
            }
        };
        let sign = if self.gain < 0.0 {
            -std::f64::consts::PI
        } else {
            0.0
        };
        numerator - denominator + sign
    }

    /// Group delay of one section at `f_hz`, seconds (analytic, see the module docs).
    pub fn group_delay_s(&self, f_hz: f64) -> f64 {
        let w = TWO_PI * f_hz;
        let w0 = TWO_PI * self.f0_hz;
        match self.q {
            Some(q) => {
                let a = w0 / q;
                let re = w0 * w0 - w * w;
                a * (w0 * w0 + w * w) / (re * re + a * a * w * w)
            }
            None => w0 / (w0 * w0 + w * w),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sec(kind: SectionKind, q: Option<f64>) -> Section {
        Section {
            kind,
            f0_hz: 1000.0,
            q,
            gain: 1.0,
            fz_hz: (kind == SectionKind::Notch).then_some(1300.0),
        }
    }

    #[test]
    fn analytic_phase_agrees_with_complex_argument() {
        // Naive oracle: arg H(jω) from the complex value, compared modulo 360°.
        let kinds = [
            sec(SectionKind::LowPass, Some(3.0)),
            sec(SectionKind::HighPass, Some(0.6)),
            sec(SectionKind::BandPass, Some(5.0)),
            sec(SectionKind::LowPass, None),
            sec(SectionKind::HighPass, None),
            sec(SectionKind::Notch, Some(8.0)),
            Section {
                fz_hz: Some(700.0),
                ..sec(SectionKind::Notch, Some(2.0))
            },
        ];
        for s in kinds {
            for f in [
                1.0, 300.0, 699.0, 701.0, 999.0, 1000.0, 1001.0, 1299.0, 1301.0, 5e4,
            ] {
                let analytic = s.phase_rad(f);
                let direct = fmath::carg(s.response(f));
                let diff = (analytic - direct).rem_euclid(2.0 * std::f64::consts::PI);
                assert!(diff < 1e-9 || (2.0 * std::f64::consts::PI - diff) < 1e-9);
            }
        }
    }
}

#[cfg(test)]
mod notch_tests {
    use super::*;

    /// The notch's gain convention (physics of the transfer function written in
    /// [`SectionKind::Notch`]): the DC gain of a low-pass notch and the high-frequency gain of a
    /// high-pass notch equal `g`, the other side is `g·(fz/f0)²` or `g·(f0/fz)²`, and the zero
    /// frequency gives exactly 0.
    #[test]
    fn far_side_gains_and_the_zero() {
        let low = Section {
            kind: SectionKind::Notch,
            f0_hz: 1000.0,
            q: Some(4.0),
            gain: 2.0,
            fz_hz: Some(2000.0),
        };
        assert_eq!(low.notch_side(), Some(NotchSide::LowPassNotch));
        assert!((fmath::cnorm(low.response(1e-3)) - 2.0).abs() < 1e-9);
        assert!((fmath::cnorm(low.response(1e9)) - 2.0 * 0.25).abs() < 1e-6);
        assert_eq!(fmath::cnorm(low.response(2000.0)), 0.0);
        let high = Section {
            fz_hz: Some(500.0),
            ..low
        };
        assert_eq!(high.notch_side(), Some(NotchSide::HighPassNotch));
        assert!((fmath::cnorm(high.response(1e9)) - 2.0).abs() < 1e-6);
        assert!((fmath::cnorm(high.response(1e-3)) - 2.0 * 0.25).abs() < 1e-9);
        let both = Section {
            fz_hz: Some(1000.0),
            ..low
        };
        assert_eq!(both.notch_side(), Some(NotchSide::Symmetric));
        assert!((fmath::cnorm(both.response(1e-3)) - 2.0).abs() < 1e-9);
        assert!((fmath::cnorm(both.response(1e9)) - 2.0).abs() < 1e-6);
    }
}

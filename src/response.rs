//! The ideal response of a cascade of sections: gain, unwrapped phase, group delay.
//!
//! Each section is evaluated from its own transfer function (see [`Section::response`]) with
//! `s = jω`, `ω = 2πf`. Phase and group delay are analytic rather than numerical:
//!
//! * the denominator `w0² − ω² + jω·w0/Q` of a second-order section has a positive imaginary part
//!   for every `ω > 0`, so its argument `atan2(ω·w0/Q, w0² − ω²)` runs continuously from 0 to π;
//!   a first-order denominator `w0 + jω` runs from 0 to π/2. Numerators are constant in phase
//!   (0 for low-pass, π for `s²`, π/2 for `s` and `s` of a first-order high-pass). Summing these
//!   gives a phase that is unwrapped by construction, at any single frequency, and that starts
//!   from 0° at DC for a low-pass; a negative section gain adds −180°.
//! * group delay `τ = −dφ/dω` is the sum over sections of the derivative of the denominator's
//!   argument: `(w0/Q)(w0² + ω²) / ((w0² − ω²)² + (ω·w0/Q)²)` for second order and
//!   `w0 / (w0² + ω²)` for first order. This equals `Σ −Re p / |jω − p|²` over the section's
//!   poles (the zeros at the origin and at infinity add none).

use crate::fmath;
use num_complex::Complex64;

use crate::error::InputError;
use crate::section::Section;

/// `H(jω)` of the cascade at `f_hz`: the product of its sections.
pub fn cascade_response(sections: &[Section], f_hz: f64) -> Complex64 {
    sections
        .iter()
        .fold(Complex64::new(1.0, 0.0), |h, s| h * s.response(f_hz))
}

/// Gain of the cascade at `f_hz`, dB: `20·log10|H(jω)|` (−∞ where `H` is 0).
pub fn gain_db(sections: &[Section], f_hz: f64) -> f64 {
    20.0 * fmath::log10(fmath::cnorm(cascade_response(sections, f_hz)))
}

/// Unwrapped phase of the cascade at `f_hz`, degrees (the sum of the section phases).
pub fn phase_deg(sections: &[Section], f_hz: f64) -> f64 {
    sections
        .iter()
        .map(|s| s.phase_rad(f_hz))
        .sum::<f64>()
        .to_degrees()
}

/// Group delay of the cascade at `f_hz`, seconds: `τ = −dφ/dω`, summed over sections.
pub fn group_delay_s(sections: &[Section], f_hz: f64) -> f64 {
    sections.iter().map(|s| s.group_delay_s(f_hz)).sum()
}

/// Attenuation of the cascade at `f_hz` relative to its intended passband gain, dB:
/// `passband_gain_db − gain_db(f)` (positive in the stopband).
pub fn attenuation_db(sections: &[Section], f_hz: f64, passband_gain_db: f64) -> f64 {
    passband_gain_db - gain_db(sections, f_hz)
}

/// One point of a sweep.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ResponsePoint {
    /// Frequency, Hz.
    pub freq_hz: f64,
    /// `H(jω)`.
    pub h: Complex64,
    /// `20·log10|H|`, dB.
    pub gain_db: f64,
    /// Unwrapped phase, degrees.
    pub phase_deg: f64,
    /// Group delay, seconds.
    pub delay_s: f64,
}

/// `n_points` log-spaced frequencies from `from_hz` to `to_hz`, both included.
///
/// # Errors
/// `from` or `to` when a limit is not a positive finite frequency or `to ≤ from`; `points` when
/// `n_points` is below 2 or above 100 000.
pub fn log_frequencies(from_hz: f64, to_hz: f64, n_points: usize) -> Result<Vec<f64>, InputError> {
    if !(from_hz.is_finite() && from_hz > 0.0) {
        return Err(InputError::new(
            "from",
            format!("the sweep start must be a positive frequency in Hz, got {from_hz}"),
        ));
    }
    if !(to_hz.is_finite() && to_hz > from_hz) {
        return Err(InputError::new(
            "to",
            format!(
                "the sweep end must be a frequency above the start ({from_hz} Hz), got {to_hz}"
            ),
        ));
    }
    if !(2..=100_000).contains(&n_points) {
        return Err(InputError::new(
            "points",
            format!("a sweep needs 2–100000 points, got {n_points}"),
        ));
    }
    let (a, b) = (fmath::ln(from_hz), fmath::ln(to_hz));
    let last = (n_points - 1) as f64;
    Ok((0..n_points)
        .map(|i| match i {
            0 => from_hz,
            _ if i == n_points - 1 => to_hz,
            _ => fmath::exp(a + (b - a) * i as f64 / last),
        })
        .collect())
}

/// The response of the cascade over log-spaced frequencies, with unwrapped phase.
///
/// The phase is unwrapped by construction (see the module docs), so it is continuous over the
/// sweep whatever the point spacing.
///
/// # Errors
/// As [`log_frequencies`].
pub fn sweep(
    sections: &[Section],
    from_hz: f64,
    to_hz: f64,
    n_points: usize,
) -> Result<Vec<ResponsePoint>, InputError> {
    Ok(log_frequencies(from_hz, to_hz, n_points)?
        .into_iter()
        .map(|f| point(sections, f))
        .collect())
}

/// The response of the cascade at one frequency.
pub fn point(sections: &[Section], f_hz: f64) -> ResponsePoint {
    let h = cascade_response(sections, f_hz);
    ResponsePoint {
        freq_hz: f_hz,
        h,
        gain_db: 20.0 * fmath::log10(fmath::cnorm(h)),
        phase_deg: phase_deg(sections, f_hz),
        delay_s: group_delay_s(sections, f_hz),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::section::SectionKind;

    fn sec(kind: SectionKind, q: Option<f64>) -> Section {
        Section {
            kind,
            f0_hz: 1000.0,
            q,
            gain: 1.0,
            fz_hz: None,
        }
    }

    #[test]
    fn analytic_delay_agrees_with_central_difference() {
        // Naive oracle: −Δφ/Δω with a small step on the analytic (continuous) phase.
        let cascade = [
            sec(SectionKind::LowPass, Some(2.0)),
            sec(SectionKind::BandPass, Some(0.4)),
        ];
        for f in [10.0, 800.0, 1000.0, 3000.0] {
            let h = f * 1e-6;
            let dphi = (phase_deg(&cascade, f + h) - phase_deg(&cascade, f - h)).to_radians();
            let numeric = -dphi / (2.0 * std::f64::consts::PI * 2.0 * h);
            let analytic = group_delay_s(&cascade, f);
            assert!(
                (numeric - analytic).abs() < 1e-6 * analytic.abs(),
                "{numeric} {analytic}"
            );
        }
    }

    #[test]
    fn sweep_rejects_bad_ranges() {
        assert_eq!(log_frequencies(0.0, 10.0, 10).unwrap_err().key, "from");
        assert_eq!(log_frequencies(10.0, 10.0, 10).unwrap_err().key, "to");
        assert_eq!(log_frequencies(1.0, 10.0, 1).unwrap_err().key, "points");
        let f = log_frequencies(1.0, 1000.0, 4).unwrap();
        assert_eq!(f.first(), Some(&1.0));
        assert_eq!(f.last(), Some(&1000.0));
        assert!((f[1] - 10.0).abs() < 1e-12);
    }
}

//! Sections: the filter split into second-order and first-order pieces (f0, Q, gain).
//!
//! [`from_target`] turns the transformed pole groups into sections (one per conjugate pair, real
//! pair or real pole), [`distribute_gain`] spreads the overall passband gain evenly in dB, and
//! [`arrange`] puts them in the chosen [`StageOrder`] (ascending Q by default).
//!
//! Zeros on the jω axis (inverse Chebyshev, elliptic, every band-stop) are assigned to pole
//! pairs the way a designer pairs them: the pole pairs are taken from the highest Q down, and
//! each takes the unassigned zero pair nearest to it in frequency (on a log scale, `|ln(fz/f0)|`).
//! The high-Q pairs get the zeros that sit close to them, which keeps each stage's peaking and
//! the gain it needs away from its notch moderate (common practice). A pole pair with a zero pair
//! becomes a [`SectionKind::Notch`] section; the pairs left over stay low-pass, high-pass or
//! band-pass as the class makes them.

use crate::fmath;
use serde::Serialize;

use crate::error::InputError;
use crate::section::{Section, SectionKind};

/// The order of the sections along the signal path.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub enum StageOrder {
    /// First-order sections first, then ascending Q (ties: ascending f0). The default: the
    /// low-Q sections go first so that the high-Q peaking is met by a signal already band-limited,
    /// which keeps internal levels inside the cascade lower (common practice).
    AscendingQ,
    /// The reverse of [`StageOrder::AscendingQ`]: highest Q first, first-order sections last.
    DescendingQ,
    /// An explicit order: position `i` holds the 1-based number of a section in the
    /// ascending-Q order, as typed in a link (`stageorder=2,1,3`). Must be a permutation of
    /// `1..=n` for `n` sections.
    Explicit(Vec<usize>),
}

/// Turns the transformed poles into sections with unit gain, in ascending-Q order.
///
/// Each pole group becomes one section: `f0 = |p|/2π`, `Q = |p|/(2·|Re p|)` for a conjugate pair,
/// `f0 = √(ab)/2π`, `Q = √(ab)/|a + b|` for two real poles, `f0 = |p|/2π` and no Q for one real
/// pole. The kind follows the class: low-pass, high-pass or band-pass sections (see
/// [`SectionKind`]); every section of a band-pass without zeros takes one zero at the origin.
/// Zero pairs go to pole pairs as the module docs say, making notch sections.
pub fn from_target(target: &crate::transform::Target) -> Vec<Section> {
    let kind = match target.class {
        crate::spec::ResponseClass::LowPass => SectionKind::LowPass,
        crate::spec::ResponseClass::HighPass => SectionKind::HighPass,
        crate::spec::ResponseClass::BandPass => SectionKind::BandPass,
        // Every pole pair of a band-stop gets a zero pair; a leftover would be a defect, and is
        // given the low-pass form rather than a panic.
        crate::spec::ResponseClass::BandStop => SectionKind::LowPass,
    };
    let mut sections: Vec<Section> = target
        .groups
        .iter()
        .map(|g| Section {
            kind,
            f0_hz: g.w0() / (2.0 * std::f64::consts::PI),
            q: g.q(),
            gain: 1.0,
            fz_hz: None,
        })
        .collect();
    assign_zeros(&mut sections, &target.zero_pairs);
    sort_ascending_q(&mut sections);
    sections
}

/// Gives each second-order section, from the highest Q down, the unassigned zero pair
/// (rad/s) nearest to its f0 on a log scale, making it a notch section.
fn assign_zeros(sections: &mut [Section], zero_pairs: &[f64]) {
    let mut free: Vec<f64> = zero_pairs
        .iter()
        .map(|w| w / (2.0 * std::f64::consts::PI))
        .collect();
    let mut by_q: Vec<usize> = (0..sections.len())
        .filter(|&i| sections[i].q.is_some())
        .collect();
    by_q.sort_by(|&a, &b| {
        let (qa, qb) = (sections[a].q.unwrap_or(0.0), sections[b].q.unwrap_or(0.0));
        qb.total_cmp(&qa)
            .then(sections[a].f0_hz.total_cmp(&sections[b].f0_hz))
    });
    for i in by_q {
        let f0 = sections[i].f0_hz;
        let nearest = (0..free.len()).min_by(|&a, &b| {
            let da = fmath::ln(free[a] / f0).abs();
            let db = fmath::ln(free[b] / f0).abs();
            da.total_cmp(&db)
        });
        let Some(j) = nearest else { break };
        let fz = free.remove(j);
        sections[i].kind = SectionKind::Notch;
        sections[i].fz_hz = Some(fz);
    }
}

/// What a unit-gain section passes at the reference point of the class: at DC (`dc = true`) or
/// at infinite frequency. Low-pass 1 at DC, high-pass 1 at infinity, band-pass 0 at both, a notch
/// `k·wz²/w0²` at DC and `k` at infinity ([`SectionKind::Notch`]).
fn unit_far_gain(section: &Section, dc: bool) -> f64 {
    match (section.kind, dc) {
        (SectionKind::LowPass, true) | (SectionKind::HighPass, false) => 1.0,
        (SectionKind::LowPass, false) | (SectionKind::HighPass, true) => 0.0,
        (SectionKind::BandPass, _) => 0.0,
        (SectionKind::Notch, true) => {
            let ratio = section.fz_hz.unwrap_or(section.f0_hz) / section.f0_hz;
            section.notch_scale() * ratio * ratio
        }
        (SectionKind::Notch, false) => section.notch_scale(),
    }
}

/// Sorts sections first-order first, then by ascending Q, ties by ascending f0.
///
/// Q values equal but for rounding count as a tie: the band-pass transform makes pairs of
/// sections with the same Q in exact arithmetic, and which of the pair rounds a bit higher
/// depends on the platform's libm (native and wasm differ), so the Q is compared with the last
/// 20 of its 52 mantissa bits rounded away (2e-10 relative) and the pair is then ordered by f0.
pub fn sort_ascending_q(sections: &mut [Section]) {
    fn coarse(q: f64) -> f64 {
        if !q.is_finite() {
            return q;
        }
        const LOW: u64 = (1 << 20) - 1;
        f64::from_bits((q.to_bits() + (1 << 19)) & !LOW)
    }
    crate::sort::sort_by(sections, |a, b| {
        let qa = coarse(a.q.unwrap_or(f64::NEG_INFINITY));
        let qb = coarse(b.q.unwrap_or(f64::NEG_INFINITY));
        qa.total_cmp(&qb).then(a.f0_hz.total_cmp(&b.f0_hz))
    });
}

/// Distributes an overall passband gain over the sections, split evenly in dB.
///
/// The cascade of unit-gain sections has the magnitude `|H_1(j w_ref)|` at its reference frequency
/// (DC for low-pass and band-stop, infinity for high-pass — 1 without zeros, the product of the
/// notch sections' far-side gains with them — and the geometric centre `W0` for band-pass, where
/// off-centre sections contribute less than 1). The prototype's reference
/// gain `r` (its DC gain relative to its passband maximum, below 1 only for even-order
/// Chebyshev) is where the passband maximum sits relative to that point. The total linear gain is
/// therefore `G = 10^(gain_db/20) · r / |H_1(j w_ref)|`, so that the passband *maximum* is
/// `gain_db`, and each of the `m` sections gets `G^(1/m)` (equal dB per section, positive).
pub fn distribute_gain(
    sections: &mut [Section],
    band: crate::transform::Band,
    reference_gain: f64,
    gain_db: f64,
) {
    if sections.is_empty() {
        return;
    }
    for s in sections.iter_mut() {
        s.gain = 1.0;
    }
    let unit_at_reference = match band {
        crate::transform::Band::BandPass { w0, .. } => fmath::cnorm(
            crate::response::cascade_response(sections, w0 / (2.0 * std::f64::consts::PI)),
        ),
        crate::transform::Band::LowPass { .. } | crate::transform::Band::BandStop { .. } => {
            sections.iter().map(|s| unit_far_gain(s, true)).product()
        }
        crate::transform::Band::HighPass { .. } => {
            sections.iter().map(|s| unit_far_gain(s, false)).product()
        }
    };
    let total = fmath::powf(10f64, gain_db / 20.0) * reference_gain / unit_at_reference;
    let each = fmath::powf(total, 1.0 / sections.len() as f64);
    for s in sections.iter_mut() {
        s.gain = each;
    }
}

/// Puts ascending-Q sections into the chosen stage order.
///
/// # Errors
/// `stageorder` when an explicit order is not a permutation of `1..=n` (wrong length, a number
/// out of range, or a repeat).
pub fn arrange(ascending: &[Section], order: &StageOrder) -> Result<Vec<Section>, InputError> {
    match order {
        StageOrder::AscendingQ => Ok(ascending.to_vec()),
        StageOrder::DescendingQ => Ok(ascending.iter().rev().copied().collect()),
        StageOrder::Explicit(positions) => {
            let n = ascending.len();
            let bad = |what: String| {
                InputError::new(
                    "stageorder",
                    format!(
                        "{what}; stageorder lists each stage number 1–{n} once, in signal order \
                         (numbers count the stages in ascending-Q order)"
                    ),
                )
            };
            if positions.len() != n {
                return Err(bad(format!(
                    "{} numbers given for {n} stages",
                    positions.len()
                )));
            }
            let mut seen = vec![false; n];
            let mut out = Vec::with_capacity(n);
            for &number in positions {
                match number
                    .checked_sub(1)
                    .and_then(|i| ascending.get(i).map(|s| (i, s)))
                {
                    Some((i, section)) => {
                        if seen[i] {
                            return Err(bad(format!("stage {number} appears twice")));
                        }
                        seen[i] = true;
                        out.push(*section);
                    }
                    None => return Err(bad(format!("stage {number} does not exist"))),
                }
            }
            Ok(out)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn q_values_equal_but_for_rounding_are_ordered_by_f0() {
        // The pair a band-pass transform makes: one Q, two f0 (1 ulp apart either way).
        let q = 4.123_456_789_f64;
        let up = f64::from_bits(q.to_bits() + 1);
        let down = f64::from_bits(q.to_bits() - 1);
        for (qa, qb) in [(up, q), (q, up), (down, q), (q, down)] {
            let mut s = vec![lp(Some(qa), 2000.0), lp(Some(qb), 1000.0)];
            sort_ascending_q(&mut s);
            assert_eq!(s[0].f0_hz, 1000.0, "Q {qa} vs {qb}");
        }
        // A real difference in Q still decides.
        let mut s = vec![lp(Some(q * 1.000_001), 1000.0), lp(Some(q), 2000.0)];
        sort_ascending_q(&mut s);
        assert_eq!(s[0].f0_hz, 2000.0);
    }

    fn lp(q: Option<f64>, f0_hz: f64) -> Section {
        Section {
            kind: SectionKind::LowPass,
            f0_hz,
            q,
            gain: 1.0,
            fz_hz: None,
        }
    }

    #[test]
    fn ascending_puts_first_order_first() {
        let mut s = vec![lp(Some(1.3), 1.0), lp(None, 2.0), lp(Some(0.54), 3.0)];
        sort_ascending_q(&mut s);
        assert_eq!(s[0].q, None);
        assert_eq!(s[1].q, Some(0.54));
        let d = arrange(&s, &StageOrder::DescendingQ).unwrap();
        assert_eq!(d[0].q, Some(1.3));
    }

    #[test]
    fn explicit_order_is_validated() {
        let s = vec![lp(None, 1.0), lp(Some(0.7), 1.0), lp(Some(2.0), 1.0)];
        let ok = arrange(&s, &StageOrder::Explicit(vec![3, 1, 2])).unwrap();
        assert_eq!(ok[0].q, Some(2.0));
        for bad in [vec![1, 2], vec![1, 1, 2], vec![0, 1, 2], vec![1, 2, 4]] {
            let err = arrange(&s, &StageOrder::Explicit(bad)).unwrap_err();
            assert_eq!(err.key, "stageorder");
        }
    }

    #[test]
    fn zero_pairs_go_to_the_nearest_pole_pair_highest_q_first() {
        // scipy.signal.ellipap(4, 1, 40): pole pairs |p| = 0.6015 (Q 0.826) and 0.9993 (Q 4.75),
        // zero pairs at 1.610 and 3.525 rad/s. The Q 4.75 pair takes the nearer zero, 1.610.
        let family = crate::spec::Family::Elliptic {
            ripple_db: 1.0,
            astop_db: 40.0,
        };
        let proto = crate::prototype::prototype(family, 4).unwrap();
        let target =
            crate::transform::transform(&proto, crate::transform::Band::LowPass { wc: 1.0 });
        let sections = from_target(&target);
        let to_rad = |f: f64| f * 2.0 * std::f64::consts::PI;
        assert_eq!(sections.len(), 2);
        assert!(sections.iter().all(|s| s.kind == SectionKind::Notch));
        // Ascending Q: the second section is the high-Q one.
        assert!((to_rad(sections[1].f0_hz) - 0.999_272_395_792_773_4).abs() < 1e-9);
        assert!((to_rad(sections[1].fz_hz.unwrap()) - 1.609_550_401_225_153_8).abs() < 1e-9);
        assert!((to_rad(sections[0].fz_hz.unwrap()) - 3.525_287_432_996_002).abs() < 1e-9);
    }

    #[test]
    fn gain_is_split_evenly_in_db() {
        let mut s = vec![lp(None, 1.0), lp(Some(0.7), 1.0), lp(Some(2.0), 1.0)];
        distribute_gain(
            &mut s,
            crate::transform::Band::LowPass { wc: 1.0 },
            1.0,
            12.0,
        );
        for sec in &s {
            assert!((20.0 * fmath::log10(sec.gain) - 4.0).abs() < 1e-12);
        }
    }
}

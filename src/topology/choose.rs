//! Choosing the circuit for a section under a topology choice, after checking that the section
//! can be built at all (finite positive f0 and Q, a finite non-zero gain), and how a
//! non-inverting stage sets its gain (follower, gain network or input divider).

use super::{Circuit, Topology};
use crate::error::InputError;
use crate::section::{NotchSide, Section, SectionKind};

/// A gain within this of 1 is built as a follower.
const UNITY_TOLERANCE: f64 = 1e-3;

/// How a non-inverting stage (Sallen-Key, buffered RC) sets its passband gain K.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum GainShape {
    /// K = 1: the op amp is a follower (also for |K − 1| ≤ 10⁻³, with a warning when K ≠ 1).
    Follower,
    /// K = 1 + Rf/Rg > 1: a resistor from the output to the − input and one to ground.
    Amplifier,
    /// K < 1: the input part split into a divider with the same Thevenin value ([`super::divider`]).
    InputDivider,
}

impl GainShape {
    /// The shape for a passband gain magnitude `k` on a circuit that has the choice.
    pub(crate) fn for_gain(k: f64) -> GainShape {
        if k > 1.0 + UNITY_TOLERANCE {
            GainShape::Amplifier
        } else if k < 1.0 - UNITY_TOLERANCE {
            GainShape::InputDivider
        } else {
            GainShape::Follower
        }
    }
}

/// The circuit for a section under a topology choice, and a note when the choice had to be
/// changed (a band-pass section under `topo=sk` is built as multiple feedback: there is no
/// Sallen-Key band-pass here).
///
/// Every circuit takes any gain magnitude > 0: inverting ones through their resistor (or
/// capacitor) ratio, non-inverting ones (Sallen-Key, buffered RC) as a follower (|gain| = 1),
/// with a two-resistor gain network (|gain| > 1) or with an input divider (|gain| < 1, see
/// [`super::divider`]).
///
/// # Errors
/// `order` for a first-order band-pass section; `gain` for a zero or non-finite gain; `fc` for a
/// frequency that is not finite and positive; `order` for a Q that is not finite and positive.
pub fn choose(
    topology: Topology,
    section: &Section,
    stage_no: usize,
) -> Result<(Circuit, Option<String>), InputError> {
    if !(section.f0_hz.is_finite() && section.f0_hz > 0.0) {
        return Err(InputError::new(
            "fc",
            format!(
                "stage {stage_no}: f0 = {} Hz is not a positive frequency",
                section.f0_hz
            ),
        ));
    }
    if let Some(q) = section.q {
        if !(q.is_finite() && q > 0.0) {
            return Err(InputError::new(
                "order",
                format!("stage {stage_no}: Q = {q} is not a positive number"),
            ));
        }
    }
    if !(section.gain.is_finite() && section.gain != 0.0) {
        return Err(InputError::new(
            "gain",
            format!(
                "stage {stage_no}: gain {} V/V cannot be built; a stage gain must be finite and non-zero",
                section.gain
            ),
        ));
    }
    let mut note = None;
    let circuit = match (section.order(), section.kind, topology) {
        (2, SectionKind::LowPass, Topology::SallenKey) => Circuit::SallenKeyLowPass,
        (2, SectionKind::LowPass, Topology::MultipleFeedback) => Circuit::MfbLowPass,
        (2, SectionKind::HighPass, Topology::SallenKey) => Circuit::SallenKeyHighPass,
        (2, SectionKind::HighPass, Topology::MultipleFeedback) => Circuit::MfbHighPass,
        (2, SectionKind::BandPass, topology) => {
            if topology == Topology::SallenKey {
                note = Some(format!(
                    "stage {stage_no}: there is no Sallen-Key band-pass here; built as a \
                     multiple-feedback band-pass (it inverts)"
                ));
            }
            Circuit::MfbBandPass
        }
        (_, SectionKind::LowPass, Topology::SallenKey) => Circuit::BufferedLowPass,
        (_, SectionKind::LowPass, Topology::MultipleFeedback) => Circuit::InvertingLowPass,
        (_, SectionKind::HighPass, Topology::SallenKey) => Circuit::BufferedHighPass,
        (_, SectionKind::HighPass, Topology::MultipleFeedback) => Circuit::InvertingHighPass,
        (_, SectionKind::BandPass, _) => {
            return Err(InputError::new(
                "order",
                format!("stage {stage_no}: a band-pass section must be second order"),
            ))
        }
        (order, SectionKind::Notch, topology) => {
            let (circuit, side_note) = notch_circuit(section, order, stage_no)?;
            note = Some(format!(
                "stage {stage_no}: {} cannot place a pair of zeros; built as a {} ({}, {side_note})",
                match topology {
                    Topology::SallenKey => "a Sallen-Key stage",
                    Topology::MultipleFeedback => "a multiple-feedback stage",
                },
                circuit.describe(),
                circuit.key()
            ));
            circuit
        }
    };
    Ok((circuit, note))
}

/// The single-op-amp notch for a notch section ([`super::notch`]): its shape from the side of
/// the zeros, and the words for the note. The high-pass and symmetric notch pass at most the
/// ratio of their input divider (a gain below 1), a low-pass notch at most (fz/f0)² times it.
///
/// # Errors
/// `order` for a first-order notch section; `fc` for a zero frequency that is not finite and
/// positive; `gain` for a gain the circuit cannot reach.
fn notch_circuit(
    section: &Section,
    order: usize,
    stage_no: usize,
) -> Result<(Circuit, &'static str), InputError> {
    if order != 2 {
        return Err(InputError::new(
            "order",
            format!("stage {stage_no}: a notch section must be second order"),
        ));
    }
    let fz = section.fz_hz.unwrap_or(f64::NAN);
    if !(fz.is_finite() && fz > 0.0) {
        return Err(InputError::new(
            "fc",
            format!(
                "stage {stage_no}: the zero frequency fz = {fz} Hz is not a positive frequency"
            ),
        ));
    }
    let (circuit, words) = match section.notch_side() {
        Some(NotchSide::LowPassNotch) => (Circuit::NotchLowPass, "zeros above f0"),
        Some(NotchSide::HighPassNotch) => (Circuit::NotchHighPass, "zeros below f0"),
        _ => (Circuit::NotchSymmetric, "zeros at f0"),
    };
    // α = |g|·min(1, (f0/fz)²) is the divider's ratio; it must stay below 1.
    let alpha = section.gain.abs() * section.notch_scale();
    if alpha >= 1.0 {
        let most = 1.0 / section.notch_scale();
        return Err(InputError::new(
            "gain",
            format!(
                "stage {stage_no} ({}): a gain of {:.4} dB is out of its reach: {} the ratio \
                 of a resistor divider, so the gain stays below {:.4} dB; ask for less gain \
                 (gain)",
                circuit.describe(),
                20.0 * crate::fmath::log10(section.gain.abs()),
                if circuit == Circuit::NotchLowPass {
                    "its DC gain is (fz/f0)² times"
                } else {
                    "its gain on either side of the notch is"
                },
                20.0 * crate::fmath::log10(most)
            ),
        ));
    }
    Ok((circuit, words))
}

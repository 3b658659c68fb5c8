//! Choosing the circuit for a section under a topology choice, after checking that the section
//! can be built at all (finite positive f0 and Q, a finite non-zero gain), and how a
//! non-inverting stage sets its gain (follower, gain network or input divider).

use super::{Circuit, Topology};
use crate::error::InputError;
use crate::section::{NotchSide, Section, SectionKind};

/// A gain within this of 1 is built as a follower.
const UNITY_TOLERANCE: f64 = 1e-3;

/// The highest band-pass Q the multiple-feedback band-pass is given by default. Its resistor
/// spread is 4Q² with equal capacitors (R3 over R1‖R2, from w0²·C²·R3² = 4Q²), so above Q = 10
/// it passes 400:1, four times what the 1 kΩ–100 kΩ habit holds, and its Q needs an open-loop
/// gain well above 2Q² at f0; the state-variable stage needs a spread of only Q.
pub const MFB_BAND_PASS_MAX_Q: f64 = 10.0;

/// Highest pole Q of a notch section built on the single-op-amp notch. Its null rests on a
/// cancellation between two resistor paths whose error grows as Q²·(1 + C1/C2) times the parts'
/// rounding (module docs of [`super::notch`]): with E96 resistors and E12 capacitors a Q = 11.5
/// pair of a sixth-order elliptic low-pass loses its null altogether (ngspice on our export,
/// `tests/ngspice_zeros.rs`). Above it the state-variable notch places its zeros with a separate
/// capacitor and resistor, so rounding moves the zeros along the jω axis but never off it.
pub const SINGLE_NOTCH_MAX_Q: f64 = 2.0;

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
/// Sallen-Key band-pass here; above Q = [`MFB_BAND_PASS_MAX_Q`] it is built as a state-variable
/// band-pass instead, and under `topo=mfb` such a section stays multiple feedback with a note
/// that suggests `topo=statevar`). Under `topo=statevar` every second-order section is a
/// state-variable stage and first-order sections get the buffered RC stages.
///
/// Every circuit takes any gain magnitude > 0: inverting ones through their resistor (or
/// capacitor) ratio, non-inverting ones (Sallen-Key, buffered RC) as a follower (|gain| = 1),
/// with a two-resistor gain network (|gain| > 1) or with an input divider (|gain| < 1, see
/// [`super::divider`]).
///
/// # Errors
/// `order` for a first-order band-pass section; `gain` for a zero or non-finite gain; `fc` for a
/// frequency that is not finite and positive (under `topo=statevar` also a notch's fz);
/// `order` for a Q that is not finite and positive.
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
    if topology == Topology::StateVariable && section.order() == 2 {
        let circuit = match section.kind {
            SectionKind::LowPass => Circuit::StateVariableLowPass,
            SectionKind::HighPass => Circuit::StateVariableHighPass,
            SectionKind::BandPass => Circuit::StateVariableBandPass,
            SectionKind::Notch => {
                if !section.fz_hz.is_some_and(|fz| fz.is_finite() && fz > 0.0) {
                    return Err(InputError::new(
                        "fc",
                        format!(
                            "stage {stage_no}: a notch section needs the frequency of its zeros \
                             as a positive number (fz = {:?})",
                            section.fz_hz
                        ),
                    ));
                }
                Circuit::StateVariableNotch
            }
        };
        return Ok((circuit, None));
    }
    let circuit = match (section.order(), section.kind, topology) {
        (2, SectionKind::LowPass, Topology::SallenKey | Topology::StateVariable) => {
            Circuit::SallenKeyLowPass
        }
        (2, SectionKind::LowPass, Topology::MultipleFeedback) => Circuit::MfbLowPass,
        (2, SectionKind::HighPass, Topology::SallenKey | Topology::StateVariable) => {
            Circuit::SallenKeyHighPass
        }
        (2, SectionKind::HighPass, Topology::MultipleFeedback) => Circuit::MfbHighPass,
        (2, SectionKind::BandPass, topology) => {
            let q = section.q.unwrap_or(0.5);
            let high_q = q > MFB_BAND_PASS_MAX_Q;
            match topology {
                Topology::MultipleFeedback if high_q => {
                    note = Some(format!(
                        "stage {stage_no}: a multiple-feedback band-pass at Q = {q:.3} needs a \
                         resistor spread of about 4Q² = {:.0}:1 and an op amp with open-loop \
                         gain well above 2Q² = {:.0} at f0; topo=statevar builds it with a \
                         spread of Q",
                        4.0 * q * q,
                        2.0 * q * q
                    ));
                    Circuit::MfbBandPass
                }
                Topology::MultipleFeedback => Circuit::MfbBandPass,
                _ if high_q => {
                    note = Some(format!(
                        "stage {stage_no}: there is no Sallen-Key band-pass here, and at Q = \
                         {q:.3} (above {MFB_BAND_PASS_MAX_Q}) a multiple-feedback band-pass \
                         would need a resistor spread of about 4Q² = {:.0}:1; built as a \
                         state-variable band-pass (three op amps, it inverts)",
                        4.0 * q * q
                    ));
                    Circuit::StateVariableBandPass
                }
                _ => {
                    note = Some(format!(
                        "stage {stage_no}: there is no Sallen-Key band-pass here; built as a \
                         multiple-feedback band-pass (it inverts)"
                    ));
                    Circuit::MfbBandPass
                }
            }
        }
        (_, SectionKind::LowPass, Topology::SallenKey | Topology::StateVariable) => {
            Circuit::BufferedLowPass
        }
        (_, SectionKind::LowPass, Topology::MultipleFeedback) => Circuit::InvertingLowPass,
        (_, SectionKind::HighPass, Topology::SallenKey | Topology::StateVariable) => {
            Circuit::BufferedHighPass
        }
        (_, SectionKind::HighPass, Topology::MultipleFeedback) => Circuit::InvertingHighPass,
        (_, SectionKind::BandPass, _) => {
            return Err(InputError::new(
                "order",
                format!("stage {stage_no}: a band-pass section must be second order"),
            ))
        }
        (order, SectionKind::Notch, topology) => {
            let asked = match topology {
                Topology::SallenKey => "a Sallen-Key stage",
                Topology::MultipleFeedback => "a multiple-feedback stage",
                Topology::StateVariable => "this stage",
            };
            let q = section.q.unwrap_or(0.5);
            match notch_circuit(section, order, stage_no) {
                Ok(_) if q > SINGLE_NOTCH_MAX_Q => {
                    note = Some(format!(
                        "stage {stage_no}: {asked} cannot place a pair of zeros, and at Q = \
                         {q:.3} (above {SINGLE_NOTCH_MAX_Q}) the single-op-amp notch's null would \
                         not survive standard part values; built as a state-variable notch \
                         (sv-notch, three op amps, it inverts), whose zeros stay on the jω axis"
                    ));
                    Circuit::StateVariableNotch
                }
                Ok((circuit, side_note)) => {
                    note = Some(format!(
                        "stage {stage_no}: {asked} cannot place a pair of zeros; built as a {} \
                         ({}, {side_note})",
                        circuit.describe(),
                        circuit.key()
                    ));
                    circuit
                }
                // The single-op-amp notch passes only a divider's share of its input; the
                // state-variable notch reaches any gain, with two more op amps.
                Err(e) if e.key == "gain" => {
                    note = Some(format!(
                        "stage {stage_no}: {asked} cannot place a pair of zeros, and the \
                         single-op-amp notch passes less than the {:.4} V/V this stage needs; \
                         built as a state-variable notch (sv-notch, three op amps, it inverts)",
                        section.gain.abs()
                    ));
                    Circuit::StateVariableNotch
                }
                Err(e) => return Err(e),
            }
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

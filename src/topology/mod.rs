//! Topologies: from a section and the design freedoms to a stage with part values and a netlist.
//!
//! The path of one stage:
//! 1. [`choose`] picks the circuit for a section ([`Circuit`]): Sallen-Key or multiple-feedback
//!    for second-order sections, a buffered or an inverting RC stage for first-order ones.
//! 2. The circuit's capacitors (and the ground resistor of a gain-setting divider) are the free
//!    choices; every other resistor is solved from them in closed form (ideal op amp), so f0, Q and
//!    gain are met exactly by the "ideal" values. The capacitor that sets the impedance level is
//!    taken from the capacitor series and scanned so that the resistors land near the impedance
//!    level (10 kΩ when automatic, keeping resistors in 1 kΩ–100 kΩ and capacitors ≥ 100 pF as
//!    common practice asks).
//! 3. The values are rounded to the series ([`search`]): nearest value each, or a search over
//!    neighbouring standard values that re-solves the dependent resistors and keeps f0, Q and gain
//!    closest to target.
//!
//! The circuits and their closed forms live in [`sallen_key`], [`mfb`] and [`first_order`]; a
//! non-inverting stage with a gain below 1 splits its input part into a divider ([`divider`]).

pub mod divider;
pub mod first_order;
pub mod mfb;
pub mod sallen_key;
pub mod search;

use crate::error::InputError;
use crate::eseries::{PartClass, Series};
use crate::choices::Rounding;
use crate::netlist::{Node, Part, StageNetlist};
use crate::sections::{Section, SectionKind};
use serde::Serialize;
use std::f64::consts::PI;

/// The circuit family used for the second-order stages (first-order sections get the matching
/// RC stage: a buffered RC for Sallen-Key, an inverting RC for multiple feedback).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Topology {
    /// Sallen-Key (voltage-controlled voltage source), link value `sk`.
    SallenKey,
    /// Multiple feedback (infinite-gain), link value `mfb`.
    MultipleFeedback,
}

impl Topology {
    /// The link value: `sk` or `mfb`.
    pub fn key(self) -> &'static str {
        match self {
            Topology::SallenKey => "sk",
            Topology::MultipleFeedback => "mfb",
        }
    }
}

/// The circuit of one stage. Each has its closed-form transfer function (ideal op amp) in the
/// module that builds it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Circuit {
    /// Sallen-Key low-pass, unity gain, gain set by two resistors, or gain below 1 through an
    /// input divider ([`sallen_key`], [`divider`]).
    SallenKeyLowPass,
    /// Sallen-Key high-pass, unity gain, gain set by two resistors, or gain below 1 through an
    /// input capacitor divider ([`sallen_key`], [`divider`]).
    SallenKeyHighPass,
    /// Multiple-feedback low-pass, inverting ([`mfb`]).
    MfbLowPass,
    /// Multiple-feedback high-pass, inverting ([`mfb`]).
    MfbHighPass,
    /// Multiple-feedback band-pass, inverting ([`mfb`]).
    MfbBandPass,
    /// First-order RC low-pass with a follower, a non-inverting gain, or an input divider for a
    /// gain below 1 ([`first_order`], [`divider`]).
    BufferedLowPass,
    /// First-order CR high-pass with a follower, a non-inverting gain, or a capacitor divider
    /// for a gain below 1 ([`first_order`], [`divider`]).
    BufferedHighPass,
    /// First-order inverting low-pass: R in, R ‖ C feedback ([`first_order`]).
    InvertingLowPass,
    /// First-order inverting high-pass: series C–R in, R feedback ([`first_order`]).
    InvertingHighPass,
}

impl Circuit {
    /// A short stable name for JSON and reports: `sk-lp`, `sk-hp`, `mfb-lp`, `mfb-hp`, `mfb-bp`,
    /// `rc-lp`, `rc-hp`, `inv-lp`, `inv-hp`.
    pub fn key(self) -> &'static str {
        match self {
            Circuit::SallenKeyLowPass => "sk-lp",
            Circuit::SallenKeyHighPass => "sk-hp",
            Circuit::MfbLowPass => "mfb-lp",
            Circuit::MfbHighPass => "mfb-hp",
            Circuit::MfbBandPass => "mfb-bp",
            Circuit::BufferedLowPass => "rc-lp",
            Circuit::BufferedHighPass => "rc-hp",
            Circuit::InvertingLowPass => "inv-lp",
            Circuit::InvertingHighPass => "inv-hp",
        }
    }

    /// Words for a report: "Sallen-Key low-pass" …
    pub fn describe(self) -> &'static str {
        match self {
            Circuit::SallenKeyLowPass => "Sallen-Key low-pass",
            Circuit::SallenKeyHighPass => "Sallen-Key high-pass",
            Circuit::MfbLowPass => "multiple-feedback low-pass",
            Circuit::MfbHighPass => "multiple-feedback high-pass",
            Circuit::MfbBandPass => "multiple-feedback band-pass",
            Circuit::BufferedLowPass => "buffered RC low-pass",
            Circuit::BufferedHighPass => "buffered CR high-pass",
            Circuit::InvertingLowPass => "inverting first-order low-pass",
            Circuit::InvertingHighPass => "inverting first-order high-pass",
        }
    }

    /// 1 or 2.
    pub fn order(self) -> usize {
        match self {
            Circuit::BufferedLowPass
            | Circuit::BufferedHighPass
            | Circuit::InvertingLowPass
            | Circuit::InvertingHighPass => 1,
            _ => 2,
        }
    }

    /// True when the stage inverts (its passband gain is negative).
    pub fn inverting(self) -> bool {
        matches!(
            self,
            Circuit::MfbLowPass
                | Circuit::MfbHighPass
                | Circuit::MfbBandPass
                | Circuit::InvertingLowPass
                | Circuit::InvertingHighPass
        )
    }

    /// True when the circuit can have a two-resistor gain network (non-inverting stages); the
    /// same circuits take a gain below 1 through an input divider ([`divider`]).
    pub fn has_gain_network_option(self) -> bool {
        matches!(
            self,
            Circuit::SallenKeyLowPass
                | Circuit::SallenKeyHighPass
                | Circuit::BufferedLowPass
                | Circuit::BufferedHighPass
        )
    }

    fn realization(self) -> &'static dyn Realization {
        match self {
            Circuit::SallenKeyLowPass => &sallen_key::LowPass,
            Circuit::SallenKeyHighPass => &sallen_key::HighPass,
            Circuit::MfbLowPass => &mfb::LowPass,
            Circuit::MfbHighPass => &mfb::HighPass,
            Circuit::MfbBandPass => &mfb::BandPass,
            Circuit::BufferedLowPass => &first_order::BufferedLowPass,
            Circuit::BufferedHighPass => &first_order::BufferedHighPass,
            Circuit::InvertingLowPass => &first_order::InvertingLowPass,
            Circuit::InvertingHighPass => &first_order::InvertingHighPass,
        }
    }
}

/// What a stage must do, in the units the closed forms use.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Target {
    /// Natural (or pole) frequency, rad/s: w0 = 2π·f0.
    pub w0: f64,
    /// Pole Q; `None` for first order.
    pub q: Option<f64>,
    /// Magnitude of the passband gain, V/V (> 0). The sign follows from the circuit.
    pub gain: f64,
}

impl Target {
    /// w0 = 2π·f0, Q and |gain| of a section.
    pub fn from_section(section: &Section) -> Target {
        Target {
            w0: 2.0 * PI * section.f0_hz,
            q: section.q,
            gain: section.gain.abs(),
        }
    }

    /// f0 = w0 / 2π, Hz.
    pub fn f0_hz(&self) -> f64 {
        self.w0 / (2.0 * PI)
    }

    /// Q, or 0.5 for first order (only used where a first-order stage has no Q anyway).
    pub(crate) fn q_or_half(&self) -> f64 {
        self.q.unwrap_or(0.5)
    }
}

/// What a stage's parts give with an ideal op amp.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Achieved {
    /// Natural (or pole) frequency, Hz.
    pub f0_hz: f64,
    /// Pole Q; `None` for first order. A negative value means poles in the right half-plane (an
    /// unstable stage, possible only after part overrides).
    pub q: Option<f64>,
    /// Passband gain, V/V, signed (negative for inverting stages): DC gain (low-pass),
    /// high-frequency gain (high-pass), gain at f0 (band-pass).
    pub gain: f64,
}

impl Achieved {
    /// Relative errors against a target: (f0/f0_target − 1, Q/Q_target − 1, |gain|/gain − 1).
    pub fn errors(&self, target: &Target) -> (f64, Option<f64>, f64) {
        let f0_error = self.f0_hz / target.f0_hz() - 1.0;
        let q_error = match (self.q, target.q) {
            (Some(q), Some(qt)) => Some(q / qt - 1.0),
            _ => None,
        };
        let gain_error = self.gain.abs() / target.gain - 1.0;
        (f0_error, q_error, gain_error)
    }

    /// The figure the combination search minimizes: e_f0² + e_Q² + e_gain² (relative errors).
    pub fn cost(&self, target: &Target) -> f64 {
        let (ef, eq, eg) = self.errors(target);
        let cost = ef * ef + eq.map_or(0.0, |e| e * e) + eg * eg;
        if cost.is_finite() {
            cost
        } else {
            f64::INFINITY
        }
    }
}

/// One resistor or capacitor position of a circuit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Slot {
    pub class: PartClass,
    pub role: &'static str,
    pub nodes: [Node; 2],
    /// Chosen (a capacitor, or the ground resistor of a gain divider) rather than solved.
    pub free: bool,
    /// Scales with the impedance level (the gain-divider resistors do not).
    pub scaled: bool,
}

pub(crate) const fn slot(
    class: PartClass,
    role: &'static str,
    a: Node,
    b: Node,
    free: bool,
    scaled: bool,
) -> Slot {
    Slot {
        class,
        role,
        nodes: [a, b],
        free,
        scaled,
    }
}

/// A resistor position of the usual kind: solved from the free values, and scaling with the
/// impedance level (every resistor but those of a gain network or an input divider).
pub(crate) const fn resistor(role: &'static str, a: Node, b: Node) -> Slot {
    slot(PartClass::Resistor, role, a, b, false, true)
}

/// A capacitor position of the usual kind: a free choice of the level scan, which does not scale
/// with the impedance level (the resistors solved from it do).
pub(crate) const fn capacitor(role: &'static str, a: Node, b: Node) -> Slot {
    slot(PartClass::Capacitor, role, a, b, true, false)
}

/// The wiring of a circuit: node names, stage input and output, its passives and its op amp.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Layout {
    pub node_names: Vec<&'static str>,
    pub input: usize,
    pub output: usize,
    pub slots: Vec<Slot>,
    /// Op amp `[plus, minus, out]`.
    pub op_amp: [Node; 3],
    /// Position in the part list where the op amp is drawn (parts before it come first).
    pub op_amp_position: usize,
    /// The input divider of a non-inverting stage with gain below 1, if any.
    pub divider: Option<divider::Divider>,
}

impl Layout {
    /// The stage netlist for these values (`values` and `ideal` in slot order).
    pub(crate) fn netlist(&self, values: &[f64], ideal: &[f64]) -> StageNetlist {
        let mut parts = Vec::with_capacity(self.slots.len() + 1);
        for (idx, slot) in self.slots.iter().enumerate() {
            if idx == self.op_amp_position {
                parts.push(self.op_amp_part());
            }
            let value = values.get(idx).copied().unwrap_or(f64::NAN);
            let ideal = ideal.get(idx).copied().unwrap_or(value);
            parts.push(match slot.class {
                PartClass::Resistor => {
                    Part::resistor(slot.role, slot.nodes[0], slot.nodes[1], value, ideal)
                }
                PartClass::Capacitor => {
                    Part::capacitor(slot.role, slot.nodes[0], slot.nodes[1], value, ideal)
                }
            });
        }
        if self.op_amp_position >= self.slots.len() {
            parts.push(self.op_amp_part());
        }
        StageNetlist {
            n_nodes: self.node_names.len(),
            input: self.input,
            output: self.output,
            node_names: self.node_names.iter().map(|s| s.to_string()).collect(),
            parts,
        }
    }

    fn op_amp_part(&self) -> Part {
        let [p, m, o] = self.op_amp;
        Part::op_amp("op amp", p, m, o)
    }
}

/// The rule for a circuit's capacitor ratio (`cratio`).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct RatioRule {
    /// Which capacitors the ratio divides, for messages ("C1/C2, feedback over ground").
    pub meaning: &'static str,
    /// The least ratio that gives real, positive resistors, with the formula in words; the ratio
    /// must be strictly above it when `strict`.
    pub min: Option<(f64, String)>,
    pub strict: bool,
    /// The ratio used when `cratio` is not given.
    pub auto: f64,
    /// A note when the automatic ratio departs from the usual one (equal capacitors).
    pub auto_note: Option<String>,
}

/// The capacitors of one trial of the level scan, for [`Realization::set_capacitors`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct CapacitorTrial {
    /// The level-setting capacitor, F.
    pub c_ref: f64,
    /// The ratio capacitor, F: already `n · c_ref` or a series value near it.
    pub c_ratio: f64,
    /// The capacitor series; it rounds a capacitor whose value sets the gain (the MFB high-pass
    /// C3 = C1/K), so the gain rests on standard parts.
    pub c_series: Series,
}

/// What each circuit module provides: its wiring, its closed forms and its ratio rules.
pub(crate) trait Realization: Sync {
    /// The wiring; `gain_network` adds the two gain-setting resistors (non-inverting circuits).
    fn layout(&self, gain_network: bool) -> Layout;
    /// Fills the dependent (solved) values from the free ones, in place. `hint` prefers, where
    /// two solutions exist, the one whose resistor ratio (as [`Realization::hint_of`] measures it)
    /// is closest to it. Returns false when no real, positive solution exists.
    fn solve(&self, target: &Target, values: &mut [f64], hint: Option<f64>) -> bool;
    /// f0, Q and gain of these values with an ideal op amp; `None` for a wrong-length slice or
    /// values that are not positive.
    fn achieved(&self, values: &[f64]) -> Option<Achieved>;
    /// The capacitor-ratio rule; `None` for circuits without a ratio freedom (the default, which
    /// the first-order stages keep).
    fn ratio_rule(&self, _target: &Target) -> Option<RatioRule> {
        None
    }
    /// The capacitor ratio that gives resistor ratio `r_ratio`, and the root hint for
    /// [`Realization::solve`]. `Err` holds the sentence on why it cannot (with the bound). The
    /// default is for circuits without a ratio freedom: [`design_stage`] asks only circuits that
    /// have a [`Realization::ratio_rule`], so the sentence is a safeguard.
    fn cratio_for_rratio(
        &self,
        _target: &Target,
        _r_ratio: f64,
    ) -> Result<(f64, Option<f64>), String> {
        Err("a first-order stage has no resistor ratio to set".into())
    }
    /// What `rratio` divides, in words; "none" by default (no ratio freedom).
    fn rratio_meaning(&self) -> &'static str {
        "none"
    }
    /// The ratio measured for root choice, when the circuit has two solutions; `None` by default
    /// (one solution, or none to choose between).
    fn hint_of(&self, _values: &[f64]) -> Option<f64> {
        None
    }
    /// Sets the free capacitors from one trial of the level scan ([`CapacitorTrial`]).
    fn set_capacitors(&self, target: &Target, values: &mut [f64], trial: &CapacitorTrial);
}

/// The design freedoms a stage needs (the board's choices without the op amp and overrides).
#[derive(Debug, Clone, PartialEq)]
pub struct Freedoms {
    /// Which family the second-order stages use.
    pub topology: Topology,
    /// Resistor series.
    pub r_series: Series,
    /// Capacitor series.
    pub c_series: Series,
    /// Resistor level the stage aims at, Ω; `None` = automatic (10 kΩ, kept in 1 kΩ–100 kΩ with
    /// capacitors ≥ 100 pF).
    pub level_ohm: Option<f64>,
    /// Capacitor ratio; `None` = the circuit's default.
    pub c_ratio: Option<f64>,
    /// Resistor ratio; `None` = the circuit's default.
    pub r_ratio: Option<f64>,
    /// Nearest-value rounding or the combination search.
    pub rounding: Rounding,
}

/// A stage with its part values, before the board numbers the parts.
#[derive(Debug, Clone, PartialEq)]
pub struct StageDesign {
    /// The circuit used.
    pub circuit: Circuit,
    /// Values the synthesis asked for, in part order (op amp skipped), SI units.
    pub ideal: Vec<f64>,
    /// Values after rounding to the series, same order.
    pub values: Vec<f64>,
    /// The netlist with those values (references `R?`, `C?`, `U?` until the board numbers them).
    pub netlist: StageNetlist,
    /// What had to give, in sentences.
    pub warnings: Vec<String>,
}

/// Automatic impedance level, Ω: the geometric middle of the 1 kΩ–100 kΩ habit.
pub const AUTO_LEVEL_OHM: f64 = 10.0e3;
/// Usual resistor window (common practice), Ω.
pub const PREFERRED_R_OHM: (f64, f64) = (1.0e3, 100.0e3);
/// Usual least capacitor (common practice), F.
pub const PREFERRED_C_MIN_F: f64 = 100.0e-12;
/// A gain within this of 1 is built as a follower.
const UNITY_TOLERANCE: f64 = 1e-3;

/// How a non-inverting stage (Sallen-Key, buffered RC) sets its passband gain K.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum GainShape {
    /// K = 1: the op amp is a follower (also for |K − 1| ≤ 10⁻³, with a warning when K ≠ 1).
    Follower,
    /// K = 1 + Rf/Rg > 1: a resistor from the output to the − input and one to ground.
    Amplifier,
    /// K < 1: the input part split into a divider with the same Thevenin value ([`divider`]).
    InputDivider,
}

impl GainShape {
    /// The shape for a passband gain magnitude `k` on a circuit that has the choice.
    fn for_gain(k: f64) -> GainShape {
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
/// [`divider`]).
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
    };
    Ok((circuit, note))
}

/// Designs one stage: chooses the circuit, its free values, solves the rest and rounds them.
///
/// A non-inverting circuit with |gain| < 1 gets an input divider ([`divider`]): its f0 and Q are
/// those of the unity-gain design with the divider's Thevenin value, its gain the divider ratio.
///
/// # Errors
/// As [`choose`]; `cratio` when the capacitor ratio is out of the circuit's feasible range (the
/// message gives the bound and suggests a gain or another topology); `rratio` likewise, or when
/// both ratios are given; `rlevel` when no impedance level keeps every part inside the buildable
/// ranges (resistors 1 Ω–10 MΩ, capacitors 1 pF–100 µF); `gain` when only the legs of an input
/// divider leave those ranges (an attenuation too deep for one divider).
pub fn design_stage(
    section: &Section,
    freedoms: &Freedoms,
    stage_no: usize,
) -> Result<StageDesign, InputError> {
    let (circuit, note) = choose(freedoms.topology, section, stage_no)?;
    let mut warnings: Vec<String> = note.into_iter().collect();
    let target = Target::from_section(section);
    let unity_realization = circuit.realization();

    // A gain network only when the gain is really above 1, a divider only when it is really
    // below 1; in between a follower.
    let shape = if circuit.has_gain_network_option() {
        GainShape::for_gain(target.gain)
    } else {
        GainShape::Follower
    };
    let gain_network = shape == GainShape::Amplifier;
    let divided = divider::Divided(unity_realization);
    let realization: &dyn Realization = if shape == GainShape::InputDivider {
        &divided
    } else {
        unity_realization
    };
    let mut target = target;
    if circuit.has_gain_network_option() && shape == GainShape::Follower {
        if (target.gain - 1.0).abs() > 1e-9 {
            warnings.push(format!(
                "stage {stage_no}: gain {:.5} V/V is built as a follower (gain 1, error {:.4} dB)",
                target.gain,
                -20.0 * target.gain.log10()
            ));
        }
        target.gain = 1.0;
    }
    let layout = realization.layout(gain_network);

    // The capacitor ratio: from rratio, from cratio, or the circuit's default.
    let rule = realization.ratio_rule(&target);
    let (ratio, ratio_exact, hint) =
        match (&rule, freedoms.r_ratio, freedoms.c_ratio) {
            (None, _, _) => (1.0, false, None),
            (Some(_), Some(_), Some(_)) => return Err(InputError::new(
                "rratio",
                "give either a resistor ratio (rratio) or a capacitor ratio (cratio), not both: \
                 one fixes the other",
            )),
            (Some(_), Some(m), None) => {
                check_ratio_value("rratio", m)?;
                let (n, hint) = realization.cratio_for_rratio(&target, m).map_err(|why| {
                    InputError::new(
                        "rratio",
                        format!(
                            "stage {stage_no} ({}, rratio = {}): {why}",
                            circuit.describe(),
                            realization.rratio_meaning()
                        ),
                    )
                })?;
                (n, true, hint)
            }
            (Some(rule), None, Some(n)) => {
                check_ratio_value("cratio", n)?;
                if let Some((min, why)) = &rule.min {
                    let bad = if rule.strict {
                        n <= *min
                    } else {
                        n < *min * (1.0 - 1e-12)
                    };
                    if bad {
                        return Err(InputError::new(
                            "cratio",
                            format!(
                            "stage {stage_no} ({}, Q = {:.4}, gain {:.4}): cratio = {n} ({}) must \
                             be {} {:.4} ({why}); use a larger cratio, {}",
                            circuit.describe(),
                            target.q_or_half(),
                            target.gain,
                            rule.meaning,
                            if rule.strict { "above" } else { "at least" },
                            min,
                            suggestion(circuit)
                        ),
                        ));
                    }
                }
                (n, true, None)
            }
            (Some(rule), None, None) => {
                if let Some(text) = &rule.auto_note {
                    warnings.push(format!("stage {stage_no}: {text}"));
                }
                (rule.auto, false, None)
            }
        };

    let level = freedoms.level_ohm.unwrap_or(AUTO_LEVEL_OHM);
    let auto_level = freedoms.level_ohm.is_none();
    let ideal = choose_level(
        realization,
        &layout,
        &target,
        freedoms,
        level,
        auto_level,
        ratio,
        ratio_exact,
        hint,
    )
    .ok_or_else(|| {
        // When the follower version of the stage fits the part ranges, it is the divider's legs
        // that do not: say so under the key that asked for the attenuation.
        if shape == GainShape::InputDivider {
            let unity_target = Target {
                gain: 1.0,
                ..target
            };
            let follower = unity_realization.layout(false);
            let fits = choose_level(
                unity_realization,
                &follower,
                &unity_target,
                freedoms,
                level,
                auto_level,
                ratio,
                ratio_exact,
                hint,
            )
            .is_some();
            if fits {
                return InputError::new(
                    "gain",
                    format!(
                        "stage {stage_no} ({}): a gain of {:.4} dB through an input divider \
                         (ratio k = {:.4e}) needs legs that no impedance level keeps inside \
                         1 Ω–10 MΩ and 1 pF–100 µF; ask for less attenuation (gain)",
                        circuit.describe(),
                        20.0 * target.gain.log10(),
                        target.gain
                    ),
                );
            }
        }
        InputError::new(
            "rlevel",
            format!(
                "stage {stage_no} ({}, f0 = {}): no impedance level {}keeps every part \
                 inside 1 Ω–10 MΩ and 1 pF–100 µF{}",
                circuit.describe(),
                crate::units::format_si_unit(target.f0_hz(), 4, "Hz"),
                if auto_level {
                    String::new()
                } else {
                    format!("near rlevel = {level} Ω ")
                },
                if auto_level {
                    "; the frequency is outside what these part ranges can reach".to_string()
                } else {
                    "; try an rlevel between 1 kΩ and 100 kΩ".to_string()
                }
            ),
        )
    })?;

    warnings.extend(level_warnings(&layout, &ideal, &target, freedoms, stage_no));

    let hint = hint.or_else(|| realization.hint_of(&ideal));
    let (values, round_warnings) = search::round(
        realization,
        &layout,
        &target,
        &ideal,
        freedoms.r_series,
        freedoms.c_series,
        freedoms.rounding,
        hint,
        stage_no,
    );
    warnings.extend(round_warnings);
    let netlist = layout.netlist(&values, &ideal);
    Ok(StageDesign {
        circuit,
        ideal,
        values,
        netlist,
        warnings,
    })
}

fn suggestion(circuit: Circuit) -> &'static str {
    match circuit {
        Circuit::SallenKeyLowPass => "a stage gain above 1 (gain), or topo=mfb",
        Circuit::MfbLowPass => "a lower gain, or topo=sk",
        Circuit::MfbBandPass => "a lower gain at f0 (gain)",
        _ => "or leave cratio to its default",
    }
}

fn check_ratio_value(key: &str, value: f64) -> Result<(), InputError> {
    if value.is_finite() && (1e-3..=1e4).contains(&value) {
        Ok(())
    } else {
        Err(InputError::new(
            key,
            format!("{key} = {value} is outside the accepted range 0.001–10000"),
        ))
    }
}

/// Scans the level-setting capacitor over its series (or a fine grid for `exact`) and keeps the
/// design whose resistors sit best around the level. Returns the ideal values, or `None` when no
/// candidate keeps every part in its buildable range.
#[allow(clippy::too_many_arguments)]
fn choose_level(
    realization: &dyn Realization,
    layout: &Layout,
    target: &Target,
    freedoms: &Freedoms,
    level: f64,
    auto_level: bool,
    ratio: f64,
    ratio_exact: bool,
    hint: Option<f64>,
) -> Option<Vec<f64>> {
    let attempt = |c_ref: f64| -> Option<Vec<f64>> {
        let mut values = vec![f64::NAN; layout.slots.len()];
        let c_ratio = if ratio_exact || (ratio - 1.0).abs() < 1e-12 {
            ratio * c_ref
        } else {
            freedoms.c_series.ceil(ratio * c_ref)
        };
        let trial = CapacitorTrial {
            c_ref,
            c_ratio,
            c_series: freedoms.c_series,
        };
        realization.set_capacitors(target, &mut values, &trial);
        set_gain_ground_resistor(layout, &mut values, target, level, freedoms.r_series);
        if !realization.solve(target, &mut values, hint) {
            return None;
        }
        Some(values)
    };
    // First estimate: resistors scale as 1/c_ref, so one trial gives the capacitor for the level.
    let probe_c = 1.0e-9;
    let probe = attempt(probe_c)?;
    let (lo, hi) = scaled_resistor_span(layout, &probe)?;
    let c_est = probe_c * (lo * hi).sqrt() / level;
    let (c_lo, c_hi) = (c_est / 30.0, c_est * 30.0);
    let mut candidates: Vec<f64> = match freedoms.c_series {
        Series::Exact => {
            let n = 200;
            let mut grid: Vec<f64> = (0..=n)
                .map(|k| c_lo * (c_hi / c_lo).powf(k as f64 / n as f64))
                .collect();
            grid.push(c_est);
            grid
        }
        series => series.values_between(c_lo, c_hi),
    };
    candidates.retain(|c| PartClass::Capacitor.in_range(*c));
    let mut best: Option<(f64, Vec<f64>)> = None;
    for c_ref in candidates {
        let Some(values) = attempt(c_ref) else {
            continue;
        };
        let Some(mut cost) = level_cost(layout, &values, level, auto_level) else {
            continue;
        };
        // Where a capacitor ratio sets the gain, the standard values chosen here decide the
        // gain error: weigh it so that 1 % of gain counts like a 10 % step of level.
        if let Some(achieved) = realization.achieved(&values) {
            cost += 1000.0 * achieved.cost(target);
        }
        if best.as_ref().map_or(true, |(b, _)| cost < *b) {
            best = Some((cost, values));
        }
    }
    best.map(|(_, v)| v)
}

fn set_gain_ground_resistor(
    layout: &Layout,
    values: &mut [f64],
    target: &Target,
    level: f64,
    r_series: Series,
) {
    // The divider Rf/Rg = K − 1 is centred on the level: Rg = level/√(K−1), Rf = level·√(K−1).
    for (idx, slot) in layout.slots.iter().enumerate() {
        if slot.free && slot.class == PartClass::Resistor {
            let k_minus_1 = (target.gain - 1.0).max(1e-6);
            if let Some(v) = values.get_mut(idx) {
                *v = r_series.nearest(level / k_minus_1.sqrt());
            }
        }
    }
}

/// The resistors that set the impedance level: every scaled resistor and, for a resistive input
/// divider, its Thevenin value Ra‖Rb in place of the two legs (the rest of the stage sees only
/// that value; the legs' own spread is fixed by the gain).
fn level_resistors(layout: &Layout, values: &[f64]) -> Vec<f64> {
    let mut resistors: Vec<f64> = layout
        .slots
        .iter()
        .zip(values)
        .filter(|(slot, _)| slot.class == PartClass::Resistor && slot.scaled)
        .map(|(_, &v)| v)
        .collect();
    if let Some(d) = layout.divider.filter(|d| d.class == PartClass::Resistor) {
        if let (Some(&u), Some(&l)) = (values.get(d.upper), values.get(d.lower)) {
            resistors.push(d.thevenin(u, l));
        }
    }
    resistors
}

/// True for the slot of a resistive divider leg.
fn is_resistor_leg(layout: &Layout, idx: usize) -> bool {
    layout
        .divider
        .is_some_and(|d| d.class == PartClass::Resistor && (idx == d.upper || idx == d.lower))
}

fn scaled_resistor_span(layout: &Layout, values: &[f64]) -> Option<(f64, f64)> {
    let mut lo = f64::INFINITY;
    let mut hi = 0.0f64;
    for v in level_resistors(layout, values) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    (lo.is_finite() && lo > 0.0 && hi.is_finite()).then_some((lo, hi))
}

/// How far the resistors sit from the level (max |ln(R/level)|), plus, for the automatic level,
/// penalties for leaving 1 kΩ–100 kΩ or going below 100 pF. A resistive input divider counts
/// by its Thevenin value (a lower leg far above 100 kΩ is what a gain close to 1 needs, not a
/// sign of a bad level); capacitor legs count each (a small leg is at the mercy of stray
/// capacitance). `None` when a part is outside the buildable range.
fn level_cost(layout: &Layout, values: &[f64], level: f64, auto_level: bool) -> Option<f64> {
    let mut cost = 0.0f64;
    let mut penalty = 0.0;
    let window_penalty =
        |v: f64| (PREFERRED_R_OHM.0 / v).ln().max(0.0) + (v / PREFERRED_R_OHM.1).ln().max(0.0);
    for r in level_resistors(layout, values) {
        cost = cost.max((r / level).ln().abs());
    }
    if let (Some(d), true) = (layout.divider, auto_level) {
        if d.class == PartClass::Resistor {
            if let (Some(&u), Some(&l)) = (values.get(d.upper), values.get(d.lower)) {
                penalty += window_penalty(d.thevenin(u, l));
            }
        }
    }
    for (idx, (slot, &v)) in layout.slots.iter().zip(values).enumerate() {
        if !(v.is_finite() && v > 0.0 && slot.class.in_range(v)) {
            return None;
        }
        match slot.class {
            PartClass::Resistor => {
                if auto_level && !is_resistor_leg(layout, idx) {
                    penalty += window_penalty(v);
                }
            }
            PartClass::Capacitor => {
                if auto_level {
                    penalty += (PREFERRED_C_MIN_F / v).ln().max(0.0);
                }
            }
        }
    }
    Some(cost + 4.0 * penalty)
}

/// Warnings for parts outside the usual windows, each with the reason.
fn level_warnings(
    layout: &Layout,
    values: &[f64],
    target: &Target,
    freedoms: &Freedoms,
    stage_no: usize,
) -> Vec<String> {
    let mut warnings = Vec::new();
    let span = scaled_resistor_span(layout, values);
    let spread = span.map_or(1.0, |(lo, hi)| hi / lo);
    let c_min = layout
        .slots
        .iter()
        .zip(values)
        .filter(|(s, _)| s.class == PartClass::Capacitor)
        .map(|(_, &v)| v)
        .fold(f64::INFINITY, f64::min);
    let f0 = target.f0_hz();
    for (idx, (slot, &v)) in layout.slots.iter().zip(values).enumerate() {
        let is_leg = layout
            .divider
            .is_some_and(|d| idx == d.upper || idx == d.lower);
        let (low, high) = match slot.class {
            PartClass::Resistor => (v < PREFERRED_R_OHM.0, v > PREFERRED_R_OHM.1),
            PartClass::Capacitor => (v < PREFERRED_C_MIN_F, false),
        };
        if !(low || high) {
            continue;
        }
        let what = match (slot.class, low) {
            (PartClass::Resistor, true) => "is below the usual 1 kΩ",
            (PartClass::Resistor, false) => "is above the usual 100 kΩ",
            (PartClass::Capacitor, _) => "is below the usual 100 pF",
        };
        let reason = if is_leg {
            format!(
                "the gain of {:.4} V/V ({:.2} dB) needs this input divider ratio",
                target.gain,
                20.0 * target.gain.log10()
            )
        } else if let Some(level) = freedoms.level_ohm {
            format!("the impedance level rlevel = {level} Ω puts it there")
        } else if !slot.scaled && slot.class == PartClass::Resistor {
            // A resistor of the gain network (capacitors never scale with the level).
            format!(
                "the gain of {:.4} V/V needs this divider ratio",
                target.gain
            )
        } else if spread > 100.0 {
            format!(
                "this Q and gain need a resistor spread of {spread:.0}:1, more than 1 kΩ–100 kΩ \
                 holds; a different cratio or rratio narrows it"
            )
        } else if slot.class == PartClass::Capacitor || c_min <= PREFERRED_C_MIN_F * 1.5 {
            format!(
                "at f0 = {}, resistors ≥ 1 kΩ and capacitors ≥ 100 pF cannot both hold",
                crate::units::format_si_unit(f0, 4, "Hz")
            )
        } else {
            format!(
                "at f0 = {} the capacitors would otherwise exceed 100 µF",
                crate::units::format_si_unit(f0, 4, "Hz")
            )
        };
        warnings.push(format!(
            "stage {stage_no}: {} ({}) {what}: {reason}",
            slot.role,
            crate::units::format_si_unit(
                v,
                3,
                if slot.class == PartClass::Resistor {
                    "Ω"
                } else {
                    "F"
                }
            ),
        ));
    }
    warnings
}

/// f0, Q and signed gain of a circuit's part values with an ideal op amp (the closed forms of the
/// circuit's module). `values` are the resistors and capacitors in netlist part order
/// ([`StageNetlist::passive_values`]).
///
/// The part count tells a non-inverting circuit's gain shape: the follower's parts; one more
/// (the input part split into a divider, [`divider`]: f0 and Q of the follower with the
/// divider's Thevenin value Ra‖Rb or Ca + Cb, gain times the divider ratio Rb/(Ra + Rb) or
/// Ca/(Ca + Cb)); or two more (the gain network, K = 1 + Rf/Rg).
///
/// Returns `None` when the list does not fit the circuit (wrong length) or holds a value that is
/// not finite and positive.
pub fn achieved(circuit: Circuit, values: &[f64]) -> Option<Achieved> {
    if values.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
        return None;
    }
    let realization = circuit.realization();
    if circuit.has_gain_network_option()
        && values.len() == realization.layout(false).slots.len() + 1
    {
        return divider::Divided(realization).achieved(values);
    }
    realization.achieved(values)
}

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
        Some(h) => (ratio_of(x) / h).ln().abs(),
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

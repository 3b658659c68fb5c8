//! Topologies: from a section and the design freedoms to a stage with part values and a netlist.
//!
//! The path of one stage:
//! 1. [`choose()`] picks the circuit for a section ([`Circuit`]): Sallen-Key or multiple-feedback
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
//!
//! This file is the registry ([`Topology`], [`Circuit`] and its realization, [`achieved`]) and the
//! shared types (targets, layouts, the [`Realization`] trait, the design freedoms). The steps live
//! beside it: `choose.rs` (circuit choice and the section checks), `stage.rs`
//! ([`design_stage`]), `level.rs` (the impedance level and its warnings) and `roots.rs` (the
//! quadratic roots the closed forms share).

mod choose;
pub mod divider;
pub mod first_order;
mod level;
pub mod mfb;
pub mod notch;
mod roots;
pub mod sallen_key;
pub mod search;
mod stage;
pub mod state_variable;

pub use choose::choose;
pub(crate) use roots::{pick_root, positive_roots};
pub use stage::design_stage;

use crate::choices::Rounding;
use crate::eseries::{PartClass, Series};
use crate::netlist::{Node, Part, StageNetlist};
use crate::section::Section;
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
    /// The three-op-amp state-variable (two-integrator loop) biquad for every second-order
    /// section, link value `statevar` ([`state_variable`]).
    StateVariable,
}

impl Topology {
    /// The link value: `sk` or `mfb`.
    pub fn key(self) -> &'static str {
        match self {
            Topology::SallenKey => "sk",
            Topology::MultipleFeedback => "mfb",
            Topology::StateVariable => "statevar",
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
    /// State-variable (two-integrator loop) low-pass, three op amps, inverting
    /// ([`state_variable`]).
    StateVariableLowPass,
    /// State-variable high-pass, three op amps, inverting ([`state_variable`]).
    StateVariableHighPass,
    /// State-variable band-pass, three op amps, inverting; any Q ([`state_variable`]).
    StateVariableBandPass,
    /// State-variable notch (zeros above, below or at f0), three op amps, inverting
    /// ([`state_variable`]).
    StateVariableNotch,
    /// Single-op-amp low-pass notch (fz > f0): the band-pass-derived notch with a zero-setting
    /// resistor from the inverting input to ground ([`notch`]).
    NotchLowPass,
    /// Single-op-amp high-pass notch (fz < f0): the band-pass-derived notch with a zero-setting
    /// resistor from the input to the inverting input ([`notch`]).
    NotchHighPass,
    /// Single-op-amp symmetric notch (fz = f0), as for mains hum ([`notch`]).
    NotchSymmetric,
}

impl Circuit {
    /// A short stable name for JSON and reports: `sk-lp`, `sk-hp`, `mfb-lp`, `mfb-hp`, `mfb-bp`,
    /// `rc-lp`, `rc-hp`, `inv-lp`, `inv-hp`, `sv-lp`, `sv-hp`, `sv-bp`, `sv-notch`, `notch-lp`,
    /// `notch-hp`, `notch-sym`.
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
            Circuit::StateVariableLowPass => "sv-lp",
            Circuit::StateVariableHighPass => "sv-hp",
            Circuit::StateVariableBandPass => "sv-bp",
            Circuit::StateVariableNotch => "sv-notch",
            Circuit::NotchLowPass => "notch-lp",
            Circuit::NotchHighPass => "notch-hp",
            Circuit::NotchSymmetric => "notch-sym",
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
            Circuit::StateVariableLowPass => "state-variable low-pass",
            Circuit::StateVariableHighPass => "state-variable high-pass",
            Circuit::StateVariableBandPass => "state-variable band-pass",
            Circuit::StateVariableNotch => "state-variable notch",
            Circuit::NotchLowPass => "single-op-amp low-pass notch",
            Circuit::NotchHighPass => "single-op-amp high-pass notch",
            Circuit::NotchSymmetric => "single-op-amp symmetric notch",
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
                | Circuit::StateVariableLowPass
                | Circuit::StateVariableHighPass
                | Circuit::StateVariableBandPass
                | Circuit::StateVariableNotch
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
            Circuit::StateVariableLowPass => &state_variable::LOW_PASS,
            Circuit::StateVariableHighPass => &state_variable::HIGH_PASS,
            Circuit::StateVariableBandPass => &state_variable::BAND_PASS,
            Circuit::StateVariableNotch => &state_variable::NOTCH,
            Circuit::NotchLowPass => &notch::LOW_PASS,
            Circuit::NotchHighPass => &notch::HIGH_PASS,
            Circuit::NotchSymmetric => &notch::SYMMETRIC,
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
    /// Frequency of the pair of jω-axis zeros, rad/s (wz = 2π·fz); `None` without.
    pub wz: Option<f64>,
}

impl Target {
    /// w0 = 2π·f0, Q, |gain| and wz = 2π·fz of a section.
    pub fn from_section(section: &Section) -> Target {
        Target {
            w0: 2.0 * PI * section.f0_hz,
            q: section.q,
            gain: section.gain.abs(),
            wz: section.fz_hz.map(|fz| 2.0 * PI * fz),
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
    /// high-frequency gain (high-pass), gain at f0 (band-pass), the larger far-side gain (notch,
    /// see [`crate::section::SectionKind::Notch`]).
    pub gain: f64,
    /// Frequency of the stage's pair of jω-axis zeros, Hz; `None` for circuits without.
    pub fz_hz: Option<f64>,
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

    /// fz/fz_target − 1 when both the stage and the target have zeros.
    pub fn fz_error(&self, target: &Target) -> Option<f64> {
        match (self.fz_hz, target.wz) {
            (Some(fz), Some(wz)) => Some(fz * 2.0 * PI / wz - 1.0),
            _ => None,
        }
    }

    /// The figure the combination search minimizes: e_f0² + e_Q² + e_gain² + e_fz² (relative
    /// errors; the last only for stages with zeros).
    pub fn cost(&self, target: &Target) -> f64 {
        let (ef, eq, eg) = self.errors(target);
        let ez = self.fz_error(target).unwrap_or(0.0);
        let cost = ef * ef + eq.map_or(0.0, |e| e * e) + eg * eg + ez * ez;
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
    /// The stage netlist for these values; the default places the layout's one op amp
    /// ([`Layout::netlist`]), a circuit with several op amps places them all.
    fn netlist(&self, layout: &Layout, values: &[f64], ideal: &[f64]) -> StageNetlist {
        layout.netlist(values, ideal)
    }
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

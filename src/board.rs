//! The board as built: sections become stages (a circuit, part values, a netlist), the parts are
//! numbered over the whole board in signal order, the user's part overrides are applied, and each
//! stage's achieved f0, Q and gain are read back from the values actually on the board.
//!
//! [`Board::build`] is the pure function sections → board; [`Board::netlist`] merges the stages
//! into one netlist (each stage's input is the previous stage's output) for the nodal analysis
//! of the cascade and the SPICE export.
//!
//! ## Where the attenuation goes
//! The synthesis spreads the overall passband gain evenly in dB over the sections. When that
//! overall gain is below 1 (a gain below 0 dB, or an even-order Chebyshev, whose DC gain is the
//! ripple below the passband maximum), the non-inverting stages (Sallen-Key, buffered RC) take
//! it through an input divider ([`crate::topology::divider`]). Rather than one thin divider per
//! stage, [`place_gains`] gives the whole factor to the first non-inverting stage in signal
//! order (with the default ascending-Q order, the lowest-Q stage) and runs the others at unity:
//! - a divider of ratio k needs a lower leg R/(1 − k): thin slices close to 1 need the most
//!   extreme legs (−0.17 dB is k = 0.981 and a lower leg of 53·R; −0.5 dB in one place is
//!   k = 0.944 and 18·R), and each slice costs a part;
//! - attenuating at the input keeps every later node at or below the level a unity-gain
//!   cascade would have, so the high-Q stages that follow have the most headroom (common
//!   practice). The price is a signal smaller by k in front of the later stages' noise, which for
//!   the fractions of a dB of a ripple is negligible.
//!
//! Inverting stages (multiple feedback) set any gain by a part ratio at no cost, so their gains
//! are left as the synthesis spread them; the overall gain is unchanged either way.

use crate::choices::Rounding;
use crate::error::InputError;
use crate::eseries::{PartClass, Series};
use crate::netlist::{BoardNetlist, Part, PartKind, StageNetlist};
use crate::opamp::OpAmp;
use crate::section::Section;
use crate::topology::{self, Circuit, Freedoms, Target, Topology};
use crate::units::format_si_unit;
use serde::Serialize;

/// Where the stages aim their resistors (`rlevel`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum ImpedanceLevel {
    /// 10 kΩ, moved as needed to keep resistors in 1 kΩ–100 kΩ and capacitors ≥ 100 pF (common
    /// practice); a warning names each part that still falls outside and why.
    Auto,
    /// Aim the frequency-setting resistors at this value, Ω (10 Ω–10 MΩ).
    Ohms(f64),
}

/// The design freedoms of the board. Each field names the link key it comes from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BuildChoices {
    /// `topo`: Sallen-Key or multiple feedback for the second-order stages (first-order stages
    /// follow: buffered RC for `sk`, inverting RC for `mfb`; band-pass stages are always multiple
    /// feedback). Default `sk`.
    pub topology: Topology,
    /// `rser`: resistor series. Default E96 (1 % resistors, common practice).
    pub r_series: Series,
    /// `cser`: capacitor series. Default E12.
    pub c_series: Series,
    /// `rlevel`: impedance level. Default automatic.
    pub impedance: ImpedanceLevel,
    /// `cratio`: capacitor ratio of the second-order stages (0.001–10000); its meaning per
    /// circuit: Sallen-Key low-pass C1/C2 (feedback over ground, ≥ 4Q²/(1 + 4Q²(K − 1))),
    /// Sallen-Key high-pass C1/C2 (input over second), MFB low-pass C1/C2 (ground over feedback,
    /// ≥ 4Q²(1 + K)), MFB high-pass C2/C1 (to the − input over input), MFB band-pass C1/C2 (to
    /// the − input over feedback, > K/Q² − 1). Default `None`: the circuit's own default (10 %
    /// above the least ratio where there is one, else equal capacitors). On a stage with an
    /// input divider (gain below 1), C1 of the high-pass is the legs' sum Ca + Cb and K = 1.
    pub c_ratio: Option<f64>,
    /// `rratio`: resistor ratio of the second-order stages instead of `cratio` (0.001–10000):
    /// Sallen-Key low-pass R2/R1, Sallen-Key high-pass R2/R1 (ground over feedback), MFB low-pass
    /// R3/R2 (feedback over the resistor to the − input), MFB high-pass R2/R1, MFB band-pass
    /// R3/R1. Default `None`. On a stage with an input divider, R1 of the low-pass is the legs'
    /// Thevenin value Ra‖Rb.
    pub r_ratio: Option<f64>,
    /// `round`: nearest-value rounding or the combination search. Default search.
    pub rounding: Rounding,
    /// `set`: parts typed over by the user, (reference, value in Ω or F), applied after the
    /// design. Default none.
    pub overrides: Vec<(String, f64)>,
    /// `gbw`, `a0`, `rout` (and the noise keys): the op-amp model. Default [`OpAmp::GENERIC`].
    pub op_amp: OpAmp,
}

impl Default for BuildChoices {
    /// `topo=sk`, `rser=e96`, `cser=e12`, automatic level and ratios, `round=search`, no
    /// overrides, the generic op amp.
    fn default() -> Self {
        BuildChoices {
            topology: Topology::SallenKey,
            r_series: Series::E96,
            c_series: Series::E12,
            impedance: ImpedanceLevel::Auto,
            c_ratio: None,
            r_ratio: None,
            rounding: Rounding::Search,
            overrides: Vec::new(),
            op_amp: OpAmp::GENERIC,
        }
    }
}

/// One op-amp stage of the board.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stage {
    /// The section it realizes (target f0, Q, gain), with the gain [`place_gains`] gave this
    /// stage.
    pub section: Section,
    /// The circuit used.
    pub circuit: Circuit,
    /// Its parts and nodes, with board-wide references.
    pub netlist: StageNetlist,
    /// f0 of the parts on the board (ideal op amp), Hz.
    pub achieved_f0_hz: f64,
    /// Q of the parts on the board; `None` for first order.
    pub achieved_q: Option<f64>,
    /// Passband gain of the parts on the board, V/V, signed.
    pub achieved_gain: f64,
    /// Frequency of the jω-axis zeros of the parts on the board, Hz; `None` without zeros.
    pub achieved_fz_hz: Option<f64>,
    /// achieved f0 / target f0 − 1.
    pub f0_error: f64,
    /// achieved Q / target Q − 1; `None` for first order.
    pub q_error: Option<f64>,
    /// |achieved gain| / |target gain| − 1.
    pub gain_error: f64,
    /// achieved fz / target fz − 1; `None` without zeros.
    pub fz_error: Option<f64>,
    /// What had to give for this stage, in sentences.
    pub warnings: Vec<String>,
}

/// The board: stages in signal order and the op amp every stage uses.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Board {
    /// The stages in signal order.
    pub stages: Vec<Stage>,
    /// The op-amp model of every stage.
    pub op_amp: OpAmp,
    /// Resistor series the board was built with.
    pub r_series: Series,
    /// Capacitor series the board was built with.
    pub c_series: Series,
    /// Board-level notes (overall sign, overrides …).
    pub warnings: Vec<String>,
}

fn check_choices(choices: &BuildChoices) -> Result<(), InputError> {
    if let ImpedanceLevel::Ohms(r) = choices.impedance {
        if !(r.is_finite() && (10.0..=10.0e6).contains(&r)) {
            return Err(InputError::new(
                "rlevel",
                format!("rlevel = {r} Ω is outside the accepted range 10 Ω–10 MΩ"),
            ));
        }
    }
    let op = &choices.op_amp;
    if op.gbw_hz.is_nan() || op.gbw_hz <= 0.0 {
        return Err(InputError::new(
            "gbw",
            format!(
                "gbw = {} Hz: the gain-bandwidth must be a positive frequency (or ideal)",
                op.gbw_hz
            ),
        ));
    }
    // 0 dB (unity open-loop gain) is accepted, as the README's 0–300 dB says: 1/A(s) stays finite.
    if op.a0_db.is_nan() || op.a0_db < 0.0 {
        return Err(InputError::new(
            "a0",
            format!(
                "a0 = {} dB: the open-loop DC gain must be 0 dB or more (or ideal)",
                op.a0_db
            ),
        ));
    }
    if !(op.rout_ohm.is_finite() && op.rout_ohm >= 0.0) {
        return Err(InputError::new(
            "rout",
            format!(
                "rout = {} Ω: the output resistance must be finite and ≥ 0 Ω",
                op.rout_ohm
            ),
        ));
    }
    Ok(())
}

/// The sections with their gains placed for the board (see the module docs): when the
/// non-inverting stages' gains multiply to less than 1, the first of them (in signal order)
/// takes that whole product and the others get magnitude 1; signs, inverting stages and every
/// other case are left as they are. The product of all gains is unchanged (to rounding of the
/// product, 1e-15 relative).
///
/// A section that no circuit can take (zero or non-finite gain, bad f0 or Q) leaves the gains
/// untouched, so that [`Board::build`] reports it as the synthesis made it.
pub fn place_gains(sections: &[Section], topology: Topology) -> Vec<Section> {
    let mut placed = sections.to_vec();
    let mut non_inverting = Vec::new();
    for (idx, section) in sections.iter().enumerate() {
        match topology::choose(topology, section, idx + 1) {
            Ok((circuit, _)) => {
                // The circuits with an input-divider option (a notch sets its gain by its own
                // divider, as an inverting stage does by a ratio).
                if circuit.has_gain_network_option() {
                    non_inverting.push(idx);
                }
            }
            Err(_) => return placed,
        }
    }
    let product: f64 = non_inverting
        .iter()
        .map(|&idx| sections[idx].gain.abs())
        .product();
    if non_inverting.len() < 2 || product.is_nan() || product >= 1.0 {
        return placed;
    }
    for (n, &idx) in non_inverting.iter().enumerate() {
        let magnitude = if n == 0 { product } else { 1.0 };
        placed[idx].gain = magnitude.copysign(sections[idx].gain);
    }
    placed
}

impl Stage {
    /// Reads f0, Q, gain and fz back from the stage's netlist values and updates the errors.
    fn analyse(&mut self) {
        let target = Target::from_section(&self.section);
        match topology::achieved(self.circuit, &self.netlist.passive_values()) {
            Some(a) => {
                let (ef, eq, eg) = a.errors(&target);
                self.achieved_f0_hz = a.f0_hz;
                self.achieved_q = a.q;
                self.achieved_gain = a.gain;
                self.achieved_fz_hz = a.fz_hz;
                self.f0_error = ef;
                self.q_error = eq;
                self.gain_error = eg;
                self.fz_error = a.fz_error(&target);
            }
            None => {
                self.achieved_f0_hz = f64::NAN;
                self.achieved_q = self.section.q.map(|_| f64::NAN);
                self.achieved_gain = f64::NAN;
                self.achieved_fz_hz = self.section.fz_hz.map(|_| f64::NAN);
                self.f0_error = f64::NAN;
                self.q_error = self.section.q.map(|_| f64::NAN);
                self.gain_error = f64::NAN;
                self.fz_error = self.section.fz_hz.map(|_| f64::NAN);
            }
        }
    }
}

impl Board {
    /// Builds the board for `sections` (in signal order) with the design freedoms `choices`.
    ///
    /// The gains are first placed for the board ([`place_gains`]: an overall attenuation goes to
    /// one input divider). Each section becomes one stage ([`topology::design_stage`]); parts are
    /// numbered R1…, C1…, U1… over the board in signal order; the overrides of `choices.overrides` replace values by
    /// reference; achieved f0, Q and gain are computed from the final values (closed forms,
    /// ideal op amp — the nodal analysis in [`crate::mna`] adds the real op amp).
    ///
    /// # Errors
    /// `order` for no sections; `rlevel`, `gbw`, `a0`, `rout` for values out of range; the
    /// errors of [`topology::design_stage`] (`cratio`, `rratio`, `gain`, `rlevel`, …); `set` for an
    /// override naming a part the board does not have, an op amp, or a value outside the
    /// buildable range.
    pub fn build(sections: &[Section], choices: &BuildChoices) -> Result<Board, InputError> {
        check_choices(choices)?;
        if sections.is_empty() {
            return Err(InputError::new(
                "order",
                "there are no sections to build: the filter needs at least order 1",
            ));
        }
        let freedoms = Freedoms {
            topology: choices.topology,
            r_series: choices.r_series,
            c_series: choices.c_series,
            level_ohm: match choices.impedance {
                ImpedanceLevel::Auto => None,
                ImpedanceLevel::Ohms(r) => Some(r),
            },
            c_ratio: choices.c_ratio,
            r_ratio: choices.r_ratio,
            rounding: choices.rounding,
        };
        let placed = place_gains(sections, choices.topology);
        let mut stages = Vec::with_capacity(placed.len());
        for (idx, section) in placed.iter().enumerate() {
            let design = topology::design_stage(section, &freedoms, idx + 1)?;
            let mut stage = Stage {
                section: *section,
                circuit: design.circuit,
                netlist: design.netlist,
                achieved_f0_hz: 0.0,
                achieved_q: None,
                achieved_gain: 0.0,
                achieved_fz_hz: None,
                f0_error: 0.0,
                q_error: None,
                gain_error: 0.0,
                fz_error: None,
                warnings: design.warnings,
            };
            stage.analyse();
            stages.push(stage);
        }
        let mut board = Board {
            stages,
            op_amp: choices.op_amp,
            r_series: choices.r_series,
            c_series: choices.c_series,
            warnings: Vec::new(),
        };
        board.number_parts();
        board.apply_overrides(&choices.overrides)?;
        board.sign_note(sections);
        if choices.c_ratio.is_some() || choices.r_ratio.is_some() {
            let any_second_order = board.stages.iter().any(|s| s.circuit.order() == 2);
            if !any_second_order {
                board.warnings.push(
                    "cratio and rratio apply to second-order stages; this board has none".into(),
                );
            }
        }
        Ok(board)
    }

    /// Numbers R, C and U parts over the board in signal order (stage by stage, part order).
    fn number_parts(&mut self) {
        let (mut r, mut c, mut u) = (0, 0, 0);
        for stage in &mut self.stages {
            for part in &mut stage.netlist.parts {
                let n = match part.kind {
                    PartKind::Resistor => {
                        r += 1;
                        r
                    }
                    PartKind::Capacitor => {
                        c += 1;
                        c
                    }
                    PartKind::OpAmp => {
                        u += 1;
                        u
                    }
                };
                part.reference = format!("{}{n}", part.ref_letter());
            }
        }
    }

    fn sign_note(&mut self, sections: &[Section]) {
        let gain = self.passband_gain();
        let asked: f64 = sections.iter().map(|s| s.gain).product();
        let inverting: Vec<String> = self
            .stages
            .iter()
            .enumerate()
            .filter(|(_, s)| s.circuit.inverting())
            .map(|(i, _)| (i + 1).to_string())
            .collect();
        // A band-pass section's gain is its peak at its own f0, so the product of those is not
        // the board's gain at the centre: only the sign is stated (the analyses measure the
        // gain on the built board).
        let band_pass = sections
            .iter()
            .any(|s| s.kind == crate::section::SectionKind::BandPass);
        if gain < 0.0 && band_pass {
            self.warnings.push(format!(
                "the board inverts (inverting stages: {})",
                inverting.join(", ")
            ));
        } else if gain < 0.0 {
            self.warnings.push(format!(
                "the board inverts: overall passband gain {gain:.4} V/V (inverting stages: {})",
                inverting.join(", ")
            ));
        } else if asked < 0.0 {
            self.warnings.push(format!(
                "the sections ask for an inverting filter but the board does not invert (overall \
                 gain {gain:.4} V/V)"
            ));
        }
    }

    /// Replaces part values by reference ("the part I have in the drawer") and re-analyses every
    /// stage. References match without regard to letter case. Returns nothing; each change is
    /// noted in its stage's warnings.
    ///
    /// # Errors
    /// `set` for a reference the board does not have, for an op amp, or for a value outside the
    /// buildable range (resistors 1 Ω–10 MΩ, capacitors 1 pF–100 µF).
    pub fn apply_overrides(&mut self, overrides: &[(String, f64)]) -> Result<(), InputError> {
        for (reference, value) in overrides {
            let wanted = reference.trim().to_ascii_uppercase();
            let mut found = false;
            for stage in &mut self.stages {
                for part in &mut stage.netlist.parts {
                    if part.reference != wanted {
                        continue;
                    }
                    found = true;
                    let (class, unit) = match part.kind {
                        PartKind::Resistor => (PartClass::Resistor, "Ω"),
                        PartKind::Capacitor => (PartClass::Capacitor, "F"),
                        PartKind::OpAmp => {
                            return Err(InputError::new(
                                "set",
                                format!(
                                    "{wanted} is an op amp; its model is set by gbw, a0 and rout"
                                ),
                            ))
                        }
                    };
                    if !(value.is_finite() && *value > 0.0 && class.in_range(*value)) {
                        let (lo, hi) = class.range();
                        return Err(InputError::new(
                            "set",
                            format!(
                                "{wanted} = {value} {unit} is outside the accepted range {}–{}",
                                format_si_unit(lo, 3, unit),
                                format_si_unit(hi, 3, unit)
                            ),
                        ));
                    }
                    stage.warnings.push(format!(
                        "{wanted} set to {} by hand (designed {})",
                        format_si_unit(*value, 4, unit),
                        format_si_unit(part.ideal, 4, unit)
                    ));
                    part.value = *value;
                }
            }
            if !found {
                return Err(InputError::new(
                    "set",
                    format!(
                        "{} is not a part of this board (it has {})",
                        reference.trim(),
                        self.reference_summary()
                    ),
                ));
            }
        }
        for stage in &mut self.stages {
            stage.analyse();
            if let Some(q) = stage.achieved_q {
                if q < 0.0 {
                    stage.warnings.push(
                        "these values put the stage's poles in the right half-plane: it oscillates"
                            .into(),
                    );
                }
            }
        }
        Ok(())
    }

    pub(crate) fn reference_summary(&self) -> String {
        let count = |k: PartKind| self.parts().iter().filter(|p| p.kind == k).count();
        let mut groups = Vec::new();
        for (kind, letter) in [
            (PartKind::Resistor, 'R'),
            (PartKind::Capacitor, 'C'),
            (PartKind::OpAmp, 'U'),
        ] {
            match count(kind) {
                0 => {}
                1 => groups.push(format!("{letter}1")),
                n => groups.push(format!("{letter}1–{letter}{n}")),
            }
        }
        groups.join(", ")
    }

    /// Every part of the board in signal order.
    pub fn parts(&self) -> Vec<&Part> {
        self.stages
            .iter()
            .flat_map(|s| s.netlist.parts.iter())
            .collect()
    }

    /// The product of the stages' achieved passband gains, V/V, signed. For a band-pass board
    /// this is the gain at the centre only when every stage is tuned to it.
    pub fn passband_gain(&self) -> f64 {
        self.stages.iter().map(|s| s.achieved_gain).product()
    }

    /// The same board with every resistor and capacitor at its ideal (unrounded) value,
    /// re-analysed. Overrides are undone too.
    pub fn with_ideal_parts(&self) -> Board {
        let mut board = self.clone();
        for stage in &mut board.stages {
            for part in &mut stage.netlist.parts {
                if part.kind != PartKind::OpAmp {
                    part.value = part.ideal;
                }
            }
            stage.analyse();
        }
        board
    }

    /// Merges the stages into one netlist ([`crate::netlist::merge`]): node 0 is `in`, stage k's
    /// input is stage k−1's output, the last output is `out`.
    ///
    /// # Errors
    /// A message when a stage's netlist breaks the netlist invariants (never for a built board).
    pub fn netlist(&self) -> Result<BoardNetlist, String> {
        let nets: Vec<&StageNetlist> = self.stages.iter().map(|s| &s.netlist).collect();
        crate::netlist::merge(&nets)
    }
}

//! The two-integrator loop biquad (a state-variable stage of three op amps) with feed-forward
//! from the input, which realises any second-order section: low-pass, high-pass, band-pass of
//! any Q, and the notch with its zeros below, above or at f0.
//!
//! Wiring (every op amp has its + input grounded, so every − input is a virtual ground):
//! - U1, the damped integrator: − input m1, output v1 (the stage output); Rq (damping) and C1 in
//!   parallel from m1 to v1; the loop resistor R1 from v3 to m1.
//! - U2, the integrator: R2 from v1 to its − input m2, C2 from m2 to v2.
//! - U3, the inverter: Ri from v2 to m3, Rf from m3 to v3, so v3 = −(Rf/Ri)·v2.
//! - The feed-forward from the input picks the numerator: Ca from the input to m1 (the s²
//!   term), Rb from the input to m1 (the s term), Rd from the input to m2 (the constant term).
//!   Low-pass: Rd; high-pass: Ca; band-pass: Rb; notch: Ca and Rd.
//!
//! The node equations at m1 and m2 (V− = 0), with v3 = −(Rf/Ri)·v2 and G = Rf/(Ri·R1), give
//!
//! H(s) = v1/vin = −(s²·Ca/C1 + s/(Rb·C1) + G/(Rd·C1·C2)) / (s² + s/(Rq·C1) + G/(R2·C1·C2)),
//!
//! so w0² = G/(R2·C1·C2), Q = w0·Rq·C1, and (the absent feed-forward parts are left out of the
//! numerator) the gains: DC −R2/Rd, high frequency −Ca/C1, at f0 −Rq/Rb; the notch zeros sit at
//! wz² = G/(Rd·C2·Ca).
//!
//! Design (the trade's habit): equal integrator capacitors C1 = C2 = C and equal resistors
//! R1 = R2 = Ri = Rf = R = 1/(w0·C); then Rq = Q·R, so the resistor spread grows only as Q (a
//! multiple-feedback band-pass needs about 4Q²), and the Q rests on one resistor ratio. The
//! feed-forward parts set the gain: Rd = R/K (low-pass), Rb = Rq/K (band-pass), Ca = K·C
//! (high-pass); a notch takes Ca = K_hf·C for its high-frequency gain K_hf and Rd = 1/(wz²·R·C·Ca)
//! for its zeros. Ca is a standard value (the level scan picks C so that it divides well) and
//! Rd is re-solved from it, so the rounding holds fz.

use super::{capacitor, resistor, Achieved, CapacitorTrial, Layout, Realization, Slot, Target};
use crate::eseries::PartClass;
use crate::netlist::{Node, Part, StageNetlist};
use std::f64::consts::PI;

/// Which numerator the feed-forward gives.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Rd only: a constant numerator.
    LowPass,
    /// Ca only: an s² numerator.
    HighPass,
    /// Rb only: an s numerator.
    BandPass,
    /// Ca and Rd: s² + wz².
    Notch,
}

/// The state-variable stage realising one [`Shape`].
pub struct StateVariable(pub Shape);

/// The low-pass stage.
pub static LOW_PASS: StateVariable = StateVariable(Shape::LowPass);
/// The high-pass stage.
pub static HIGH_PASS: StateVariable = StateVariable(Shape::HighPass);
/// The band-pass stage.
pub static BAND_PASS: StateVariable = StateVariable(Shape::BandPass);
/// The notch stage (zeros above, below or at f0).
pub static NOTCH: StateVariable = StateVariable(Shape::Notch);

const IN: Node = Some(0);
const M1: Node = Some(1);
const V1: Node = Some(2);
const M2: Node = Some(3);
const V2: Node = Some(4);
const M3: Node = Some(5);
const V3: Node = Some(6);
const GND: Node = None;

/// Part roles, shared with the tests and the schematic.
pub mod roles {
    /// Ca, input to m1.
    pub const CA: &str = "feed-forward capacitor";
    /// Rb, input to m1.
    pub const RB: &str = "band-pass input resistor";
    /// Rd, input to m2.
    pub const RD: &str = "low-pass input resistor";
    /// Rq, m1 to v1.
    pub const RQ: &str = "damping resistor";
    /// C1, m1 to v1.
    pub const C1: &str = "first integrator capacitor";
    /// R1, v3 to m1.
    pub const R1: &str = "loop resistor";
    /// R2, v1 to m2.
    pub const R2: &str = "integrator resistor";
    /// C2, m2 to v2.
    pub const C2: &str = "second integrator capacitor";
    /// Ri, v2 to m3.
    pub const RI: &str = "inverter input resistor";
    /// Rf, m3 to v3.
    pub const RF: &str = "inverter feedback resistor";
}

/// The op amps `[plus, minus, out]` and where each is drawn: before the slot with that index.
const OP_AMPS: [([Node; 3], usize, &str); 3] = [
    ([GND, M1, V1], 3, "damped integrator"),
    ([GND, M2, V2], 5, "integrator"),
    ([GND, M3, V3], 7, "inverter"),
];

/// The parts by name (absent feed-forward parts are `None`).
#[derive(Debug, Clone, Copy)]
struct Parts {
    ca: Option<f64>,
    rb: Option<f64>,
    rd: Option<f64>,
    rq: f64,
    c1: f64,
    r1: f64,
    r2: f64,
    c2: f64,
    ri: f64,
    rf: f64,
}

impl Shape {
    /// Number of feed-forward parts, which come first in the part list.
    fn n_inputs(self) -> usize {
        match self {
            Shape::Notch => 2,
            _ => 1,
        }
    }

    fn input_slots(self) -> Vec<Slot> {
        let ca = super::slot(PartClass::Capacitor, roles::CA, IN, M1, true, false);
        match self {
            Shape::LowPass => vec![resistor(roles::RD, IN, M2)],
            Shape::HighPass => vec![ca],
            Shape::BandPass => vec![resistor(roles::RB, IN, M1)],
            Shape::Notch => vec![ca, resistor(roles::RD, IN, M2)],
        }
    }

    fn parts(self, v: &[f64]) -> Option<Parts> {
        let n = self.n_inputs();
        if v.len() != n + 7 {
            return None;
        }
        let core = &v[n..];
        let (ca, rb, rd) = match self {
            Shape::LowPass => (None, None, Some(v[0])),
            Shape::HighPass => (Some(v[0]), None, None),
            Shape::BandPass => (None, Some(v[0]), None),
            Shape::Notch => (Some(v[0]), None, Some(v[1])),
        };
        Some(Parts {
            ca,
            rb,
            rd,
            rq: core[0],
            c1: core[1],
            r1: core[2],
            r2: core[3],
            c2: core[4],
            ri: core[5],
            rf: core[6],
        })
    }

    /// The high-frequency gain a notch (or high-pass) asks of Ca/C1: K for a high-pass, K·k with
    /// k = min(1, w0²/wz²) for a notch (the larger far side carries K).
    fn hf_gain(self, t: &Target) -> f64 {
        match (self, t.wz) {
            (Shape::Notch, Some(wz)) => t.gain * (t.w0 * t.w0 / (wz * wz)).min(1.0),
            _ => t.gain,
        }
    }
}

impl StateVariable {
    /// The stage netlist with its three op amps (the shared [`Layout::netlist`] places one).
    fn build_netlist(&self, layout: &Layout, values: &[f64], ideal: &[f64]) -> StageNetlist {
        let n_in = self.0.n_inputs();
        let mut parts = Vec::with_capacity(layout.slots.len() + 3);
        let mut op_amps = OP_AMPS.iter().peekable();
        for (idx, slot) in layout.slots.iter().enumerate() {
            while let Some(&&(pins, _, role)) = op_amps.peek().filter(|o| o.1 + n_in == idx) {
                parts.push(Part::op_amp(role, pins[0], pins[1], pins[2]));
                op_amps.next();
            }
            let value = values.get(idx).copied().unwrap_or(f64::NAN);
            let ideal = ideal.get(idx).copied().unwrap_or(value);
            let [a, b] = slot.nodes;
            parts.push(match slot.class {
                PartClass::Resistor => Part::resistor(slot.role, a, b, value, ideal),
                PartClass::Capacitor => Part::capacitor(slot.role, a, b, value, ideal),
            });
        }
        for &(pins, _, role) in op_amps {
            parts.push(Part::op_amp(role, pins[0], pins[1], pins[2]));
        }
        StageNetlist {
            n_nodes: layout.node_names.len(),
            input: layout.input,
            output: layout.output,
            node_names: layout.node_names.iter().map(|s| s.to_string()).collect(),
            parts,
        }
    }
}

/// f0, Q, the signed gain and fz of a state-variable stage's parts (the closed forms above).
fn achieved_of(shape: Shape, p: &Parts) -> Option<Achieved> {
    let loop_g = p.rf / (p.ri * p.r1);
    let w0 = (loop_g / (p.r2 * p.c1 * p.c2)).sqrt();
    let q = w0 * p.rq * p.c1;
    let dc = p.rd.map(|rd| p.r2 / rd);
    let hf = p.ca.map(|ca| ca / p.c1);
    let (gain, fz_hz) = match shape {
        Shape::LowPass => (dc?, None),
        Shape::HighPass => (hf?, None),
        Shape::BandPass => (p.rq / p.rb?, None),
        Shape::Notch => {
            let wz = (loop_g / (p.rd? * p.c2 * p.ca?)).sqrt();
            (dc?.max(hf?), Some(wz / (2.0 * PI)))
        }
    };
    Some(Achieved {
        f0_hz: w0 / (2.0 * PI),
        q: Some(q),
        gain: -gain,
        fz_hz,
    })
}

impl Realization for StateVariable {
    fn layout(&self, _gain_network: bool) -> Layout {
        let mut slots = self.0.input_slots();
        slots.extend([
            resistor(roles::RQ, M1, V1),
            capacitor(roles::C1, M1, V1),
            resistor(roles::R1, V3, M1),
            resistor(roles::R2, V1, M2),
            capacitor(roles::C2, M2, V2),
            resistor(roles::RI, V2, M3),
            resistor(roles::RF, M3, V3),
        ]);
        Layout {
            node_names: vec!["in", "m1", "v1", "m2", "v2", "m3", "v3"],
            input: 0,
            output: 2,
            op_amp: OP_AMPS[0].0,
            op_amp_position: self.0.n_inputs() + OP_AMPS[0].1,
            divider: None,
            slots,
        }
    }

    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        let shape = self.0;
        let (Some(q), Some(p)) = (t.q, shape.parts(v)) else {
            return false;
        };
        let n = shape.n_inputs();
        let r = 1.0 / (t.w0 * (p.c1 * p.c2).sqrt());
        let rq = q / (t.w0 * p.c1);
        v[n] = rq;
        v[n + 2] = r;
        v[n + 3] = r;
        v[n + 5] = r;
        v[n + 6] = r;
        match shape {
            Shape::LowPass => v[0] = r / t.gain,
            Shape::HighPass => {}
            Shape::BandPass => v[0] = rq / t.gain,
            Shape::Notch => {
                let (Some(wz), Some(ca)) = (t.wz, p.ca) else {
                    return false;
                };
                v[1] = 1.0 / (wz * wz * r * p.c2 * ca);
            }
        }
        v.iter().all(|x| x.is_finite() && *x > 0.0)
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        achieved_of(self.0, &self.0.parts(v)?)
    }

    fn set_capacitors(&self, t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        let n = self.0.n_inputs();
        if v.len() != n + 7 {
            return;
        }
        v[n + 1] = trial.c_ref;
        v[n + 4] = trial.c_ref;
        if matches!(self.0, Shape::HighPass | Shape::Notch) {
            // The gain is Ca/C1: Ca from the series, the level scan picks a C that divides well.
            v[0] = trial.c_series.nearest(self.0.hf_gain(t) * trial.c_ref);
        }
    }

    fn netlist(&self, layout: &Layout, values: &[f64], ideal: &[f64]) -> StageNetlist {
        self.build_netlist(layout, values, ideal)
    }
}

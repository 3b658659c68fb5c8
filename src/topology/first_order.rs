//! First-order stages: a buffered RC (or CR) with a follower or a non-inverting gain for
//! Sallen-Key builds, and an inverting stage with gain for multiple-feedback builds.
//!
//! Buffered low-pass (R1 in→a, C1 a→ground, op amp + at a): H(s) = K / (1 + s·R1·C1).
//! Buffered high-pass (C1 in→a, R1 a→ground): H(s) = K·s·R1·C1 / (1 + s·R1·C1).
//! K = 1 (follower) or 1 + R2/R3 (divider R2 out→−, R3 −→ground). w0 = 1/(R1·C1).
//! K < 1: the series part is split into an input divider with the same Thevenin value
//! ([`super::divider`]).
//!
//! Inverting low-pass (R1 in→−, R2 ‖ C1 from − to out):
//! H(s) = −(R2/R1) / (1 + s·R2·C1), w0 = 1/(R2·C1).
//! Inverting high-pass (C1 in→x, R1 x→−, R2 −→out):
//! H(s) = −(R2/R1)·s·R1·C1 / (1 + s·R1·C1), w0 = 1/(R1·C1).

use super::sallen_key::{divider_gain, gain_divider, solve_divider};
use super::{capacitor, resistor, Achieved, CapacitorTrial, Layout, Realization, Slot, Target};
use std::f64::consts::PI;

/// RC low-pass with a follower or non-inverting gain.
pub struct BufferedLowPass;
/// CR high-pass with a follower or non-inverting gain.
pub struct BufferedHighPass;
/// Inverting first-order low-pass.
pub struct InvertingLowPass;
/// Inverting first-order high-pass.
pub struct InvertingHighPass;

const GND: Option<usize> = None;

fn buffered_layout(gain_network: bool, first: [Slot; 2]) -> Layout {
    let (a, out, m) = (Some(1), Some(2), Some(3));
    let mut slots = first.to_vec();
    let mut node_names = vec!["in", "a", "out"];
    let minus = if gain_network {
        slots.extend(gain_divider(out, m));
        node_names.push("m");
        m
    } else {
        out
    };
    Layout {
        node_names,
        input: 0,
        output: 2,
        slots,
        op_amp: [a, minus, out],
        op_amp_position: 2,
        divider: None,
    }
}

impl Realization for BufferedLowPass {
    fn layout(&self, gain_network: bool) -> Layout {
        buffered_layout(
            gain_network,
            [
                resistor("series resistor", Some(0), Some(1)),
                capacitor("ground capacitor", Some(1), GND),
            ],
        )
    }
    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        if v.len() < 2 {
            return false;
        }
        v[0] = 1.0 / (t.w0 * v[1]);
        solve_divider(t, v, 2)
    }
    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        if v.len() < 2 {
            return None;
        }
        Some(Achieved {
            f0_hz: 1.0 / (2.0 * PI * v[0] * v[1]),
            q: None,
            gain: divider_gain(v, 2)?,
            fz_hz: None,
        })
    }
    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[1] = trial.c_ref;
    }
}

impl Realization for BufferedHighPass {
    fn layout(&self, gain_network: bool) -> Layout {
        buffered_layout(
            gain_network,
            [
                capacitor("series capacitor", Some(0), Some(1)),
                resistor("ground resistor", Some(1), GND),
            ],
        )
    }
    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        if v.len() < 2 {
            return false;
        }
        v[1] = 1.0 / (t.w0 * v[0]);
        solve_divider(t, v, 2)
    }
    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        if v.len() < 2 {
            return None;
        }
        Some(Achieved {
            f0_hz: 1.0 / (2.0 * PI * v[0] * v[1]),
            q: None,
            gain: divider_gain(v, 2)?,
            fz_hz: None,
        })
    }
    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[0] = trial.c_ref;
    }
}

impl Realization for InvertingLowPass {
    fn layout(&self, _gain_network: bool) -> Layout {
        let (input, m, out) = (Some(0), Some(1), Some(2));
        Layout {
            node_names: vec!["in", "m", "out"],
            input: 0,
            output: 2,
            slots: vec![
                resistor("input resistor", input, m),
                resistor("feedback resistor", m, out),
                capacitor("feedback capacitor", m, out),
            ],
            op_amp: [GND, m, out],
            op_amp_position: 3,
            divider: None,
        }
    }
    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        if v.len() != 3 {
            return false;
        }
        v[1] = 1.0 / (t.w0 * v[2]);
        v[0] = v[1] / t.gain;
        v[0].is_finite() && v[0] > 0.0
    }
    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        let &[r1, r2, c1] = v else {
            return None;
        };
        Some(Achieved {
            f0_hz: 1.0 / (2.0 * PI * r2 * c1),
            q: None,
            gain: -r2 / r1,
            fz_hz: None,
        })
    }
    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[2] = trial.c_ref;
    }
}

impl Realization for InvertingHighPass {
    fn layout(&self, _gain_network: bool) -> Layout {
        let (input, x, m, out) = (Some(0), Some(1), Some(2), Some(3));
        Layout {
            node_names: vec!["in", "x", "m", "out"],
            input: 0,
            output: 3,
            slots: vec![
                capacitor("input capacitor", input, x),
                resistor("input resistor", x, m),
                resistor("feedback resistor", m, out),
            ],
            op_amp: [GND, m, out],
            op_amp_position: 3,
            divider: None,
        }
    }
    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        if v.len() != 3 {
            return false;
        }
        v[1] = 1.0 / (t.w0 * v[0]);
        v[2] = t.gain * v[1];
        v[2].is_finite() && v[2] > 0.0
    }
    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        let &[c1, r1, r2] = v else {
            return None;
        };
        Some(Achieved {
            f0_hz: 1.0 / (2.0 * PI * r1 * c1),
            q: None,
            gain: -r2 / r1,
            fz_hz: None,
        })
    }
    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[0] = trial.c_ref;
    }
}

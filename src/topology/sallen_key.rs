//! Sallen-Key second-order stages (low-pass and high-pass), unity gain or with the gain K set by a
//! two-resistor divider (K = 1 + R3/R4).
//!
//! Low-pass (R1 in→a, R2 a→b, C1 a→out, C2 b→ground, op amp + at b):
//!
//! H(s) = K / (s²·R1R2C1C2 + s·[(R1 + R2)·C2 + R1·C1·(1 − K)] + 1),
//! so w0 = 1/√(R1R2C1C2) and 1/Q = w0·[(R1 + R2)·C2 + (1 − K)·R1·C1].
//!
//! Given the capacitors, R1 solves a·R1² − R1/(Q·w0·C2) + 1/(w0²C1C2) = 0 with
//! a = 1 + (C1/C2)(1 − K), R2 = 1/(w0²C1C2R1). Real resistors need
//! C1/C2 ≥ 4Q² / (1 + 4Q²(K − 1)) — the well-known C1/C2 ≥ 4Q² of the unity-gain stage.
//!
//! High-pass (C1 in→a, C2 a→b, R1 a→out, R2 b→ground, op amp + at b):
//!
//! H(s) = K·s² / (s² + s·[(C1 + C2)/(R2·C1·C2) + (1 − K)/(R1·C1)] + 1/(R1R2C1C2)).
//!
//! Given the capacitors, R1 solves (C1 + C2)·w0²·R1² − (w0/Q)·R1 + (1 − K)/C1 = 0, which has one
//! positive root for every K ≥ 1 (unity gain: R1 = 1/(Q·w0·(C1 + C2))); R2 = 1/(w0²C1C2R1).
//!
//! Both transfer functions follow from the node equations at a and b with an ideal op amp
//! (V− = V+, Vout = K·V+); the tests check them against the nodal analysis.
//!
//! A gain k < 1 is not built here: the follower circuit's input part (R1 of the low-pass, C1 of
//! the high-pass) is split into an input divider with the same Thevenin value, see
//! [`super::divider`].

use super::{
    capacitor, pick_root, positive_roots, resistor, slot, Achieved, CapacitorTrial, Layout,
    RatioRule, Realization, Slot, Target,
};
use crate::eseries::PartClass::Resistor;
use crate::fmath;
use std::f64::consts::PI;

/// The Sallen-Key low-pass.
pub struct LowPass;
/// The Sallen-Key high-pass.
pub struct HighPass;

const IN: Option<usize> = Some(0);
const A: Option<usize> = Some(1);
const B: Option<usize> = Some(2);
const OUT: Option<usize> = Some(3);
const M: Option<usize> = Some(4);
const GND: Option<usize> = None;

/// The gain divider, appended after the four frequency-setting parts.
pub(crate) fn gain_divider(out: Option<usize>, m: Option<usize>) -> [Slot; 2] {
    [
        slot(Resistor, "gain-set feedback resistor", out, m, false, false),
        slot(Resistor, "gain-set ground resistor", m, None, true, false),
    ]
}

/// K = 1 + Rf/Rg when the divider is present (values after `base`), else 1.
pub(crate) fn divider_gain(values: &[f64], base: usize) -> Option<f64> {
    match values.len().checked_sub(base)? {
        0 => Some(1.0),
        2 => Some(1.0 + values[base] / values[base + 1]),
        _ => None,
    }
}

/// Sets Rf = (K − 1)·Rg when the divider is present.
pub(crate) fn solve_divider(target: &Target, values: &mut [f64], base: usize) -> bool {
    if values.len() == base + 2 {
        let rg = values[base + 1];
        values[base] = (target.gain - 1.0) * rg;
        values[base].is_finite() && values[base] > 0.0
    } else {
        values.len() == base
    }
}

fn layout(gain_network: bool, first: [Slot; 4]) -> Layout {
    let mut slots: Vec<Slot> = first.to_vec();
    let mut node_names = vec!["in", "a", "b", "out"];
    let minus = if gain_network {
        slots.extend(gain_divider(OUT, M));
        node_names.push("m");
        M
    } else {
        OUT
    };
    Layout {
        node_names,
        input: 0,
        output: 3,
        slots,
        op_amp: [B, minus, OUT],
        op_amp_position: 4,
        divider: None,
    }
}

impl Realization for LowPass {
    fn layout(&self, gain_network: bool) -> Layout {
        layout(
            gain_network,
            [
                resistor("input resistor", IN, A),
                resistor("second resistor", A, B),
                capacitor("feedback capacitor", A, OUT),
                capacitor("ground capacitor", B, GND),
            ],
        )
    }

    fn solve(&self, t: &Target, v: &mut [f64], hint: Option<f64>) -> bool {
        let (Some(q), true) = (t.q, v.len() >= 4) else {
            return false;
        };
        let (c1, c2, k) = (v[2], v[3], t.gain);
        let p = 1.0 / (t.w0 * t.w0 * c1 * c2);
        let b = 1.0 / (q * t.w0 * c2);
        let a = 1.0 + (c1 / c2) * (1.0 - k);
        let roots = positive_roots(a, b, p);
        // Without a hint: the more balanced pair, and for the symmetric unity-gain case the
        // larger input resistor (higher input impedance).
        let ratio = |x: f64| x * x / p;
        let balance = |x: f64| fmath::ln(ratio(x)).abs() + if ratio(x) < 1.0 { 1e-9 } else { 0.0 };
        let Some(r1) = pick_root(&roots, hint, ratio, balance) else {
            return false;
        };
        v[0] = r1;
        v[1] = p / r1;
        solve_divider(t, v, 4)
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        if v.len() < 4 {
            return None;
        }
        let (r1, r2, c1, c2) = (v[0], v[1], v[2], v[3]);
        let k = divider_gain(v, 4)?;
        let w0 = 1.0 / (r1 * r2 * c1 * c2).sqrt();
        let s1 = (r1 + r2) * c2 + r1 * c1 * (1.0 - k);
        Some(Achieved {
            f0_hz: w0 / (2.0 * PI),
            q: Some(1.0 / (w0 * s1)),
            gain: k,
            fz_hz: None,
        })
    }

    fn ratio_rule(&self, t: &Target) -> Option<RatioRule> {
        let q = t.q_or_half();
        let k = t.gain;
        let min = 4.0 * q * q / (1.0 + 4.0 * q * q * (k - 1.0));
        let auto = if k > 1.0 && 1.0 >= 1.1 * min {
            1.0
        } else {
            1.1 * min
        };
        Some(RatioRule {
            meaning: "C1/C2, feedback capacitor over ground capacitor",
            min: Some((
                min,
                format!(
                    "4Q²/(1 + 4Q²(K − 1)) for Q = {q:.4}, K = {k:.4}{}",
                    if k <= 1.0 {
                        ", i.e. 4Q² at unity gain"
                    } else {
                        ""
                    }
                ),
            )),
            strict: false,
            auto,
            auto_note: None,
        })
    }

    fn cratio_for_rratio(&self, t: &Target, m: f64) -> Result<(f64, Option<f64>), String> {
        // R1 = 1 Ω, R2 = m Ω: C2 solves (1 + m)·C2² − C2/(Q·w0) + (1 − K)/(w0²·m) = 0.
        let q = t.q_or_half();
        let w0 = t.w0;
        let roots = positive_roots(1.0 + m, 1.0 / (q * w0), (1.0 - t.gain) / (w0 * w0 * m));
        let c2 = roots
            .iter()
            .copied()
            .fold(None, |acc: Option<f64>, x| {
                Some(acc.map_or(x, |a| a.max(x)))
            })
            .ok_or_else(|| format!("rratio = {m} gives no real capacitor pair"))?;
        let c1 = 1.0 / (w0 * w0 * m * c2);
        Ok((c1 / c2, Some(1.0 / m)))
    }

    fn rratio_meaning(&self) -> &'static str {
        "R2/R1, second resistor over input resistor"
    }

    fn hint_of(&self, v: &[f64]) -> Option<f64> {
        (v.len() >= 2).then(|| v[0] / v[1])
    }

    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[2] = trial.c_ratio;
        v[3] = trial.c_ref;
    }
}

impl Realization for HighPass {
    fn layout(&self, gain_network: bool) -> Layout {
        layout(
            gain_network,
            [
                capacitor("input capacitor", IN, A),
                capacitor("second capacitor", A, B),
                resistor("feedback resistor", A, OUT),
                resistor("ground resistor", B, GND),
            ],
        )
    }

    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        let (Some(q), true) = (t.q, v.len() >= 4) else {
            return false;
        };
        let (c1, c2, k) = (v[0], v[1], t.gain);
        let p = 1.0 / (t.w0 * t.w0 * c1 * c2);
        let roots = positive_roots((c1 + c2) * t.w0 * t.w0, t.w0 / q, (1.0 - k) / c1);
        // For K ≥ 1 there is exactly one positive root.
        let Some(&r1) = roots.first() else {
            return false;
        };
        v[2] = r1;
        v[3] = p / r1;
        solve_divider(t, v, 4)
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        if v.len() < 4 {
            return None;
        }
        let (c1, c2, r1, r2) = (v[0], v[1], v[2], v[3]);
        let k = divider_gain(v, 4)?;
        let w0 = 1.0 / (r1 * r2 * c1 * c2).sqrt();
        let w0_over_q = (c1 + c2) / (c1 * c2 * r2) + (1.0 - k) / (r1 * c1);
        Some(Achieved {
            f0_hz: w0 / (2.0 * PI),
            q: Some(w0 / w0_over_q),
            gain: k,
            fz_hz: None,
        })
    }

    fn ratio_rule(&self, _t: &Target) -> Option<RatioRule> {
        Some(RatioRule {
            meaning: "C1/C2, input capacitor over second capacitor",
            min: None,
            strict: false,
            auto: 1.0,
            auto_note: None,
        })
    }

    fn cratio_for_rratio(&self, t: &Target, m: f64) -> Result<(f64, Option<f64>), String> {
        // R1 = 1 Ω, R2 = m Ω, P = C1·C2 = 1/(w0²·m): C1 solves
        // C1² − (w0·P·m/Q)·C1 + P·(1 + (1 − K)·m) = 0.
        let q = t.q_or_half();
        let k = t.gain;
        let p = 1.0 / (t.w0 * t.w0 * m);
        let roots = positive_roots(1.0, t.w0 * p * m / q, p * (1.0 + (1.0 - k) * m));
        let n_of = |u: f64| u * u / p;
        let u = pick_root(&roots, Some(1.0), n_of, |_| 0.0).ok_or_else(|| {
            let min = 4.0 * q * q / (1.0 + 4.0 * q * q * (k - 1.0));
            format!(
                "rratio = {m} (R2/R1, ground resistor over feedback resistor) must be at least \
                 4Q²/(1 + 4Q²(K − 1)) = {min:.4} for Q = {q:.4}, K = {k:.4}; use a larger rratio, \
                 a stage gain above 1, or leave rratio to its default"
            )
        })?;
        let n = n_of(u);
        // For the symmetric unity-gain case prefer the larger input capacitor.
        let n = if (k - 1.0).abs() < 1e-9 {
            n.max(1.0 / n)
        } else {
            n
        };
        Ok((n, None))
    }

    fn rratio_meaning(&self) -> &'static str {
        "R2/R1, ground resistor over feedback resistor"
    }

    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[0] = trial.c_ratio;
        v[1] = trial.c_ref;
    }
}

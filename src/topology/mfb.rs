//! Multiple-feedback (infinite-gain) second-order stages: low-pass, high-pass, band-pass. All
//! three invert; the op amp's + input is grounded and its − input is a virtual ground.
//!
//! Low-pass (R1 in→a, R2 a→−, R3 out→a, C1 a→ground, C2 −→out):
//!
//! H(s) = −(R3/R1) / (s²·R2R3C1C2 + s·C2·(R2 + R3 + R2R3/R1) + 1),
//! so w0 = 1/√(R2R3C1C2), 1/Q = w0·C2·(R2 + R3 + R2R3/R1), gain −K with K = R3/R1.
//! Given C1, C2, the feedback resistor R3 solves R3² − R3/(Q·w0·C2) + (1 + K)/(w0²C1C2) = 0;
//! real roots need C1/C2 ≥ 4Q²(1 + K).
//!
//! High-pass (C1 in→a, C2 a→−, C3 a→out, R1 a→ground, R2 −→out):
//!
//! H(s) = −(C1/C3)·s² / (s² + s·(C1 + C2 + C3)/(C2·C3·R2) + 1/(R1R2C2C3)),
//! so R2 = Q·(C1 + C2 + C3)/(w0·C2·C3) and R1 = 1/(w0²·R2·C2·C3) for any capacitors; the gain
//! K = C1/C3 is a capacitor ratio.
//!
//! Band-pass (R1 in→a, R2 a→ground, C1 a→−, C2 a→out, R3 −→out):
//!
//! H(s) = −(s/(R1·C2)) / (s² + s·(C1 + C2)/(C1·C2·R3) + (1/R1 + 1/R2)/(C1·C2·R3)),
//! gain at f0 −R3·C1/(R1·(C1 + C2)). Given C1, C2: R3 = Q·(C1 + C2)/(w0·C1·C2),
//! 1/R1 = K·(C1 + C2)/(C1·R3), 1/R2 = w0²·C1·C2·R3 − 1/R1, positive only for K < Q²·(1 + C1/C2)
//! (K < 2Q² with equal capacitors).
//!
//! Each follows from the node equations at a and at the − input (held at 0 V); the tests check
//! them against the nodal analysis.

use super::{
    capacitor, pick_root, positive_roots, resistor, Achieved, CapacitorTrial, Layout, RatioRule,
    Realization, Target,
};
use crate::fmath;
use std::f64::consts::PI;

/// The multiple-feedback low-pass.
pub struct LowPass;
/// The multiple-feedback high-pass.
pub struct HighPass;
/// The multiple-feedback band-pass.
pub struct BandPass;

const IN: Option<usize> = Some(0);
const A: Option<usize> = Some(1);
const M: Option<usize> = Some(2);
const OUT: Option<usize> = Some(3);
const GND: Option<usize> = None;

fn layout(slots: Vec<super::Slot>) -> Layout {
    Layout {
        node_names: vec!["in", "a", "m", "out"],
        input: 0,
        output: 3,
        op_amp_position: slots.len(),
        divider: None,
        slots,
        op_amp: [GND, M, OUT],
    }
}

impl Realization for LowPass {
    fn layout(&self, _gain_network: bool) -> Layout {
        layout(vec![
            resistor("input resistor", IN, A),
            resistor("resistor to the inverting input", A, M),
            resistor("feedback resistor", OUT, A),
            capacitor("ground capacitor", A, GND),
            capacitor("feedback capacitor", M, OUT),
        ])
    }

    fn solve(&self, t: &Target, v: &mut [f64], hint: Option<f64>) -> bool {
        let (Some(q), 5) = (t.q, v.len()) else {
            return false;
        };
        let (cg, cf, k) = (v[3], v[4], t.gain);
        let p = 1.0 / (t.w0 * t.w0 * cf * cg);
        let b = 1.0 / (q * t.w0 * cf);
        let roots = positive_roots(1.0, b, (1.0 + k) * p);
        let ratio = |x: f64| x * x / p;
        let spread = |x: f64| {
            let r = [x / k, p / x, x];
            let hi = r.iter().copied().fold(0.0, f64::max);
            let lo = r.iter().copied().fold(f64::INFINITY, f64::min);
            fmath::ln(hi / lo)
        };
        let Some(rf) = pick_root(&roots, hint, ratio, spread) else {
            return false;
        };
        v[0] = rf / k;
        v[1] = p / rf;
        v[2] = rf;
        true
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        let &[r1, r2, r3, c1, c2] = v else {
            return None;
        };
        let w0 = 1.0 / (r2 * r3 * c1 * c2).sqrt();
        let inv_q = w0 * c2 * (r2 + r3 + r2 * r3 / r1);
        Some(Achieved {
            f0_hz: w0 / (2.0 * PI),
            q: Some(1.0 / inv_q),
            gain: -r3 / r1,
            fz_hz: None,
        })
    }

    fn ratio_rule(&self, t: &Target) -> Option<RatioRule> {
        let q = t.q_or_half();
        let min = 4.0 * q * q * (1.0 + t.gain);
        Some(RatioRule {
            meaning: "C1/C2, ground capacitor over feedback capacitor",
            min: Some((min, format!("4Q²(1 + K) for Q = {q:.4}, K = {:.4}", t.gain))),
            strict: false,
            auto: 1.1 * min,
            auto_note: None,
        })
    }

    fn cratio_for_rratio(&self, t: &Target, m: f64) -> Result<(f64, Option<f64>), String> {
        // With R3 = m·R2: C1/C2 = Q²·(m + 1 + K)²/m, always feasible.
        let q = t.q_or_half();
        let n = q * q * fmath::powi(m + 1.0 + t.gain, 2) / m;
        Ok((n, Some(m)))
    }

    fn rratio_meaning(&self) -> &'static str {
        "R3/R2, feedback resistor over the resistor to the inverting input"
    }

    fn hint_of(&self, v: &[f64]) -> Option<f64> {
        (v.len() == 5).then(|| v[2] / v[1])
    }

    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[3] = trial.c_ratio;
        v[4] = trial.c_ref;
    }
}

impl Realization for HighPass {
    fn layout(&self, _gain_network: bool) -> Layout {
        layout(vec![
            capacitor("input capacitor", IN, A),
            capacitor("capacitor to the inverting input", A, M),
            capacitor("feedback capacitor", A, OUT),
            resistor("ground resistor", A, GND),
            resistor("feedback resistor", M, OUT),
        ])
    }

    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        let (Some(q), 5) = (t.q, v.len()) else {
            return false;
        };
        let (ci, cm, cf) = (v[0], v[1], v[2]);
        let rf = q * (ci + cm + cf) / (t.w0 * cf * cm);
        let rg = 1.0 / (t.w0 * t.w0 * rf * cf * cm);
        v[3] = rg;
        v[4] = rf;
        rf.is_finite() && rg.is_finite() && rf > 0.0 && rg > 0.0
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        let &[ci, cm, cf, rg, rf] = v else {
            return None;
        };
        let w0 = 1.0 / (rg * rf * cf * cm).sqrt();
        let w0_over_q = (ci + cf + cm) / (cf * cm * rf);
        Some(Achieved {
            f0_hz: w0 / (2.0 * PI),
            q: Some(w0 / w0_over_q),
            gain: -ci / cf,
            fz_hz: None,
        })
    }

    fn ratio_rule(&self, _t: &Target) -> Option<RatioRule> {
        Some(RatioRule {
            meaning: "C2/C1, capacitor to the inverting input over input capacitor",
            min: None,
            strict: false,
            auto: 1.0,
            auto_note: None,
        })
    }

    fn cratio_for_rratio(&self, t: &Target, m: f64) -> Result<(f64, Option<f64>), String> {
        // C1 = 1, C3 = 1/K, C2 = n: R2/R1 = Q²·K·(a + n)²/n with a = 1 + 1/K, so n solves
        // Q²K·n² − (m − 2aQ²K)·n + Q²K·a² = 0; its least value is 4Q²(1 + K).
        let q = t.q_or_half();
        let k = t.gain;
        let a = 1.0 + 1.0 / k;
        let qk = q * q * k;
        let roots = positive_roots(qk, m - 2.0 * a * qk, qk * a * a);
        let n = pick_root(&roots, Some(1.0), |n| n, |_| 0.0).ok_or_else(|| {
            format!(
                "rratio = {m} (R2/R1, feedback resistor over ground resistor) must be at least \
                 4Q²(1 + K) = {:.4} for Q = {q:.4}, K = {k:.4}; use a larger rratio or leave it \
                 to its default",
                4.0 * q * q * (1.0 + k)
            )
        })?;
        Ok((n, None))
    }

    fn rratio_meaning(&self) -> &'static str {
        "R2/R1, feedback resistor over ground resistor"
    }

    fn set_capacitors(&self, t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[0] = trial.c_ref;
        v[1] = trial.c_ratio;
        // The gain is C1/C3: C3 from the series, the level scan picks a C1 that divides well.
        v[2] = trial.c_series.nearest(trial.c_ref / t.gain);
    }
}

impl Realization for BandPass {
    fn layout(&self, _gain_network: bool) -> Layout {
        layout(vec![
            resistor("input resistor", IN, A),
            resistor("ground resistor", A, GND),
            capacitor("capacitor to the inverting input", A, M),
            capacitor("feedback capacitor", A, OUT),
            resistor("feedback resistor", M, OUT),
        ])
    }

    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        let (Some(q), 5) = (t.q, v.len()) else {
            return false;
        };
        let (cm, cf, k) = (v[2], v[3], t.gain);
        let rf = q * (cf + cm) / (t.w0 * cf * cm);
        let g1 = k * (cf + cm) / (cm * rf);
        let g2 = t.w0 * t.w0 * cf * cm * rf - g1;
        if !(g2 > 0.0 && g1 > 0.0 && rf > 0.0) {
            return false;
        }
        v[0] = 1.0 / g1;
        v[1] = 1.0 / g2;
        v[4] = rf;
        v.iter().all(|x| x.is_finite())
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        let &[r1, r2, cm, cf, rf] = v else {
            return None;
        };
        let (g1, g2) = (1.0 / r1, 1.0 / r2);
        let w0 = ((g1 + g2) / (cf * cm * rf)).sqrt();
        let w0_over_q = (cf + cm) / (cf * cm * rf);
        Some(Achieved {
            f0_hz: w0 / (2.0 * PI),
            q: Some(w0 / w0_over_q),
            gain: -g1 * cm * rf / (cf + cm),
            fz_hz: None,
        })
    }

    fn ratio_rule(&self, t: &Target) -> Option<RatioRule> {
        let q = t.q_or_half();
        let k = t.gain;
        let min = k / (q * q) - 1.0;
        let (auto, auto_note) = if min < 0.8 {
            (1.0, None)
        } else {
            let n = 1.25 * min;
            (
                n,
                Some(format!(
                    "equal capacitors cannot give gain {k:.4} at Q = {q:.4} (they need a gain \
                     below 2Q² = {:.4}); capacitor ratio C1/C2 ≈ {n:.3} used",
                    2.0 * q * q
                )),
            )
        };
        Some(RatioRule {
            meaning: "C1/C2, capacitor to the inverting input over feedback capacitor",
            min: (min > 0.0).then(|| {
                (
                    min,
                    format!("K/Q² − 1 for Q = {q:.4}, gain at f0 K = {k:.4}"),
                )
            }),
            strict: true,
            auto,
            auto_note,
        })
    }

    fn cratio_for_rratio(&self, t: &Target, m: f64) -> Result<(f64, Option<f64>), String> {
        // R3/R1 = K·(1 + C2/C1), so C1/C2 = K/(m − K); then K < Q²(1 + C1/C2) must hold.
        let q = t.q_or_half();
        let k = t.gain;
        let bound = if m > k {
            let n = k / (m - k);
            if k < q * q * (1.0 + n) {
                return Ok((n, None));
            }
            // K < Q²(1 + K/(m − K)) ⇔ m < K²/(K − Q²) when K > Q².
            k * k / (k - q * q)
        } else {
            k
        };
        Err(format!(
            "rratio = {m} (R3/R1, feedback resistor over input resistor) does not fit gain \
             {k:.4} at Q = {q:.4}: it must be above {k:.4}{}; or lower the gain",
            if k > q * q {
                format!(" and below {bound:.4}")
            } else {
                String::new()
            }
        ))
    }

    fn rratio_meaning(&self) -> &'static str {
        "R3/R1, feedback resistor over input resistor"
    }

    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        v[2] = trial.c_ratio;
        v[3] = trial.c_ref;
    }
}

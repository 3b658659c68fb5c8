//! The single-op-amp notch: a multiple-feedback band-pass whose non-inverting input is lifted to
//! a fraction α of the input (the band-pass-derived notch of Delyiannis and Friend), with one
//! resistor at the inverting input that moves the zeros off the pole frequency.
//!
//! Parts (nodes `in`, `a`, `m` the inverting input, `out`, `p` the non-inverting input):
//! R1 in→a, R2 a→ground, C1 a→m, C2 a→out, R3 m→out, the divider Ra in→p, Rb p→ground
//! (α = Rb/(Ra + Rb)), and for the two lopsided shapes R4: from m to ground for a low-pass notch
//! (fz > f0, conductance G5), from the input to m for a high-pass notch (fz < f0, conductance
//! G4). With an ideal op amp (V(m) = V(p) = α·Vin) the node equations at a and m give, with
//! G1' = G1 + G2, S = C1 + C2 and Gx = G3 + G4 + G5:
//!
//! H(s) = [α·C1C2·s² + (α·(G1'C1 + S·Gx) − S·G4 − G1C1)·s + G1'·(α·Gx − G4)]
//!        / [C1C2·s² + G3·S·s + G3·G1'],
//!
//! so the poles are those of the band-pass, w0² = G3·G1'/(C1C2) and w0/Q = G3·S/(C1C2), and
//! the zeros sit on the jω axis when the s term of the numerator vanishes. Given C1, C2 (ratio
//! n = C1/C2) and ρ = wz²/w0²: G3 = w0·C1C2/(Q·S), G1' = w0·Q·S; the shape sets the rest:
//! - low-pass notch (ρ > 1): G5 = (ρ − 1)·G3, α = g/ρ (the DC gain is α·ρ = g);
//! - high-pass notch (ρ < 1): α = g (the high-frequency gain), G4 = α·G3·(1 − ρ)/(1 − α);
//! - symmetric (ρ = 1): neither resistor, α = g;
//!
//! and in every shape the null asks G1 = α·(G1' + (S/C1)·ρ·G3), leaving G2 = G1' − G1, which is
//! positive only for α < Q²(1 + n)/(Q²(1 + n) + ρ). The gain g of the high-pass and symmetric
//! notch is therefore below 1 (it is the divider's ratio), and a low-pass notch reaches
//! g < ρ·Q²(1 + n)/(Q²(1 + n) + ρ); a larger capacitor ratio raises both bounds.
//!
//! The depth of the null rests on the cancellation in the s term of the numerator, which
//! [`crate::topology::Achieved`] does not hold (it carries the zeros' frequency √(n0/n2)): with
//! standard values the zeros leave the jω axis a little and the notch is finite; the nodal
//! analysis shows how deep.

use super::divider::Divider;
use super::{
    capacitor, positive_roots, resistor, slot, Achieved, CapacitorTrial, Layout, RatioRule,
    Realization, Slot, Target,
};
use crate::eseries::PartClass;
use std::f64::consts::PI;

/// Which side of f0 the zeros sit on, and so which zero-setting resistor the circuit has.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// fz > f0: R4 from the inverting input to ground.
    LowPass,
    /// fz < f0: R4 from the input to the inverting input.
    HighPass,
    /// fz = f0: no R4.
    Symmetric,
}

/// The single-op-amp notch of one shape.
pub struct Notch(pub Shape);

/// The low-pass notch (fz > f0).
pub(crate) static LOW_PASS: Notch = Notch(Shape::LowPass);
/// The high-pass notch (fz < f0).
pub(crate) static HIGH_PASS: Notch = Notch(Shape::HighPass);
/// The symmetric notch (fz = f0).
pub(crate) static SYMMETRIC: Notch = Notch(Shape::Symmetric);

const IN: Option<usize> = Some(0);
const A: Option<usize> = Some(1);
const M: Option<usize> = Some(2);
const OUT: Option<usize> = Some(3);
const P: Option<usize> = Some(4);
const GND: Option<usize> = None;

/// Role of the zero-setting resistor of the low-pass notch.
pub const ZERO_GROUND_ROLE: &str = "zero-setting resistor to ground";
/// Role of the zero-setting resistor of the high-pass notch.
pub const ZERO_FEED_ROLE: &str = "zero-setting feed-forward resistor";

/// The closed forms' conductances and α for a target and the capacitors; `None` when the
/// target has no zeros or no positive solution.
struct Solved {
    g1: f64,
    g2: f64,
    g3: f64,
    /// G5 (low-pass notch) or G4 (high-pass notch); 0 for the symmetric one.
    g_zero: f64,
    alpha: f64,
}

impl Notch {
    fn has_zero_resistor(&self) -> bool {
        self.0 != Shape::Symmetric
    }

    /// Index of the first divider leg (after the network's parts).
    fn divider_at(&self) -> usize {
        if self.has_zero_resistor() {
            6
        } else {
            5
        }
    }

    /// ρ = wz²/w0² and α for a target.
    fn rho_alpha(&self, t: &Target) -> Option<(f64, f64)> {
        let wz = t.wz?;
        let rho = match self.0 {
            Shape::Symmetric => 1.0,
            _ => (wz / t.w0) * (wz / t.w0),
        };
        let alpha = if rho > 1.0 { t.gain / rho } else { t.gain };
        Some((rho, alpha))
    }

    fn solve_conductances(&self, t: &Target, c1: f64, c2: f64) -> Option<Solved> {
        let q = t.q?;
        let (rho, alpha) = self.rho_alpha(t)?;
        let s = c1 + c2;
        let g3 = t.w0 * c1 * c2 / (q * s);
        let g1p = t.w0 * q * s;
        let g1 = alpha * (g1p + (s / c1) * rho * g3);
        let g2 = g1p - g1;
        let g_zero = match self.0 {
            Shape::LowPass => (rho - 1.0) * g3,
            Shape::HighPass => alpha * g3 * (1.0 - rho) / (1.0 - alpha),
            Shape::Symmetric => 0.0,
        };
        let ok = [g1, g2, g3, alpha, 1.0 - alpha]
            .iter()
            .all(|x| x.is_finite() && *x > 0.0)
            && (g_zero > 0.0 || self.0 == Shape::Symmetric)
            && g_zero.is_finite();
        ok.then_some(Solved {
            g1,
            g2,
            g3,
            g_zero,
            alpha,
        })
    }

    /// The least capacitor ratio n = C1/C2 for which the null leaves R2 positive:
    /// n > α·ρ/(Q²·(1 − α)) − 1 (see the module docs).
    fn min_ratio(&self, t: &Target) -> Option<f64> {
        let q = t.q?;
        let (rho, alpha) = self.rho_alpha(t)?;
        (alpha < 1.0).then(|| alpha * rho / (q * q * (1.0 - alpha)) - 1.0)
    }
}

/// The numerator and denominator coefficients `[n2, n1, n0]`, `[d2, d1, d0]` of a notch stage's
/// transfer function (module docs) from its part values, for `shape`.
pub fn coefficients(shape: Shape, v: &[f64]) -> Option<([f64; 3], [f64; 3])> {
    let (net, divider) = match (shape, v.len()) {
        (Shape::Symmetric, 7) => (&v[..5], &v[5..]),
        (Shape::LowPass | Shape::HighPass, 8) => (&v[..6], &v[6..]),
        _ => return None,
    };
    let (g1, g2, c1, c2, g3) = (1.0 / net[0], 1.0 / net[1], net[2], net[3], 1.0 / net[4]);
    let (g4, g5) = match shape {
        Shape::LowPass => (0.0, 1.0 / net[5]),
        Shape::HighPass => (1.0 / net[5], 0.0),
        Shape::Symmetric => (0.0, 0.0),
    };
    let alpha = divider[0].recip() / (divider[0].recip() + divider[1].recip());
    let g1p = g1 + g2;
    let s = c1 + c2;
    let gx = g3 + g4 + g5;
    let num = [
        alpha * c1 * c2,
        alpha * (g1p * c1 + s * gx) - s * g4 - g1 * c1,
        g1p * (alpha * gx - g4),
    ];
    let den = [c1 * c2, g3 * s, g3 * g1p];
    Some((num, den))
}

impl Realization for Notch {
    fn layout(&self, _gain_network: bool) -> Layout {
        let mut slots: Vec<Slot> = vec![
            resistor("input resistor", IN, A),
            resistor("ground resistor", A, GND),
            capacitor("capacitor to the inverting input", A, M),
            capacitor("feedback capacitor", A, OUT),
            resistor("feedback resistor", M, OUT),
        ];
        match self.0 {
            Shape::LowPass => slots.push(resistor(ZERO_GROUND_ROLE, M, GND)),
            Shape::HighPass => slots.push(resistor(ZERO_FEED_ROLE, IN, M)),
            Shape::Symmetric => {}
        }
        let upper = slots.len();
        slots.push(slot(
            PartClass::Resistor,
            "non-inverting input divider, upper",
            IN,
            P,
            false,
            false,
        ));
        slots.push(slot(
            PartClass::Resistor,
            "non-inverting input divider, lower",
            P,
            GND,
            false,
            false,
        ));
        Layout {
            node_names: vec!["in", "a", "m", "out", "p"],
            input: 0,
            output: 3,
            op_amp_position: slots.len(),
            divider: Some(Divider {
                upper,
                lower: upper + 1,
                class: PartClass::Resistor,
            }),
            slots,
            op_amp: [P, M, OUT],
        }
    }

    fn solve(&self, t: &Target, v: &mut [f64], _hint: Option<f64>) -> bool {
        let at = self.divider_at();
        if v.len() != at + 2 {
            return false;
        }
        let Some(x) = self.solve_conductances(t, v[2], v[3]) else {
            return false;
        };
        v[0] = 1.0 / x.g1;
        v[1] = 1.0 / x.g2;
        v[4] = 1.0 / x.g3;
        if self.has_zero_resistor() {
            v[5] = 1.0 / x.g_zero;
        }
        // The divider's Thevenin resistance equals R3, so its legs sit near the level.
        let thevenin = v[4];
        v[at] = thevenin / x.alpha;
        v[at + 1] = thevenin / (1.0 - x.alpha);
        v.iter().all(|x| x.is_finite() && *x > 0.0)
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        let ([n2, _, n0], [d2, d1, d0]) = coefficients(self.0, v)?;
        let w0 = (d0 / d2).sqrt();
        let wz2 = n0 / n2;
        if !(wz2 > 0.0 && w0.is_finite()) {
            return None;
        }
        let wz = wz2.sqrt();
        // The larger far-side gain: DC for zeros above the poles, high frequency below.
        let gain = if wz >= w0 { n0 / d0 } else { n2 / d2 };
        Some(Achieved {
            f0_hz: w0 / (2.0 * PI),
            q: Some(w0 * d2 / d1),
            gain,
            fz_hz: Some(wz / (2.0 * PI)),
        })
    }

    fn ratio_rule(&self, t: &Target) -> Option<RatioRule> {
        let q = t.q_or_half();
        let (rho, alpha) = self.rho_alpha(t).unwrap_or((1.0, 0.5));
        let min = self.min_ratio(t).unwrap_or(f64::INFINITY);
        // Equal capacitors where they leave room; otherwise a quarter above the bound, kept low
        // because the null's cancellation grows with Q²(1 + n).
        let (auto, auto_note) = if min < 0.8 {
            (1.0, None)
        } else {
            let n = 1.25 * (min + 1.0) - 1.0;
            (
                n,
                Some(format!(
                    "equal capacitors cannot give a notch gain of {:.4} at Q = {q:.4} (the \
                     divider ratio α = {alpha:.4} must stay below 2Q²/(2Q² + ρ) = {:.4}); \
                     capacitor ratio C1/C2 ≈ {n:.3} used",
                    t.gain,
                    2.0 * q * q / (2.0 * q * q + rho)
                )),
            )
        };
        Some(RatioRule {
            meaning: "C1/C2, capacitor to the inverting input over feedback capacitor",
            min: (min > 0.0).then(|| {
                (
                    min,
                    format!(
                        "α·ρ/(Q²(1 − α)) − 1 for Q = {q:.4}, α = {alpha:.4}, ρ = (fz/f0)² = \
                         {rho:.4}"
                    ),
                )
            }),
            strict: true,
            auto,
            auto_note,
        })
    }

    fn cratio_for_rratio(&self, t: &Target, m: f64) -> Result<(f64, Option<f64>), String> {
        // R3/(R1‖R2) = G1'/G3 = Q²(1 + n)²/n, so n solves Q²n² + (2Q² − m)·n + Q² = 0; its
        // roots are n and 1/n, and the larger leaves more room for the gain.
        let q = t.q_or_half();
        let roots = positive_roots(q * q, m - 2.0 * q * q, q * q);
        let n = roots.iter().copied().fold(0.0, f64::max);
        if n <= 0.0 {
            return Err(format!(
                "rratio = {m} (R3/(R1‖R2)) must be at least 4Q² = {:.4} for Q = {q:.4}; use a \
                 larger rratio or leave it to its default",
                4.0 * q * q
            ));
        }
        if let Some(min) = self.min_ratio(t) {
            if n <= min {
                return Err(format!(
                    "rratio = {m} gives C1/C2 = {n:.4}, which must be above {min:.4} for this \
                     gain; use a larger rratio or a lower gain"
                ));
            }
        }
        Ok((n, None))
    }

    fn rratio_meaning(&self) -> &'static str {
        "R3/(R1‖R2), feedback resistor over the input pair"
    }

    fn set_capacitors(&self, _t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        if v.len() >= 4 {
            v[2] = trial.c_ratio;
            v[3] = trial.c_ref;
        }
    }
}

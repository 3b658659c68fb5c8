//! Input dividers: how a non-inverting stage (Sallen-Key, buffered RC) gets a passband gain
//! k < 1.
//!
//! The stage's input part (the part from the stage input to the first inner node `a`) is split
//! into two legs: the upper leg from the input to `a`, the lower leg from `a` to ground. Seen
//! from `a`, the source and the two legs are a Thevenin source k·Vin behind one part of the
//! original kind (circuit theory):
//! - a resistor R1 becomes Ra = R1/k (input → a) and Rb = R1/(1 − k) (a → ground):
//!   Ra‖Rb = R1 and Rb/(Ra + Rb) = k;
//! - a capacitor C1 becomes Ca = k·C1 (input → a) and Cb = (1 − k)·C1 (a → ground):
//!   Ca + Cb = C1 and Ca/(Ca + Cb) = k.
//!
//! The rest of the stage is the unity-gain (follower) circuit, so with an ideal op amp
//! H(s) = k·H_unity(s): the same f0 and Q as the unity-gain design with the Thevenin value, and
//! passband gain k. `Divided` wraps a circuit's `Realization` this way: it reduces the two
//! legs to their Thevenin value, lets the circuit solve or read back its unity-gain closed forms,
//! and splits the value again.
//!
//! Rounding a divider pair: `pair_choices` gives the combination search the standard values
//! near each leg and, for each of them, the other leg re-solved so that either the Thevenin
//! value or the ratio k stays as designed (then rounded either side), so the search can trade a
//! little gain error against a little f0/Q error instead of rounding both legs blindly.

use super::{Achieved, CapacitorTrial, Layout, RatioRule, Realization, Slot, Target};
use crate::eseries::{PartClass, Series};

/// The role of the upper leg (stage input → inner node).
pub const UPPER_ROLE: &str = "input divider, upper";
/// The role of the lower leg (inner node → ground).
pub const LOWER_ROLE: &str = "input divider, lower";

/// Where a divider sits in a layout's slot list and what its legs are.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Divider {
    /// Slot index of the upper leg (input → a).
    pub upper: usize,
    /// Slot index of the lower leg (a → ground).
    pub lower: usize,
    /// Resistors or capacitors.
    pub class: PartClass,
}

fn positive(x: f64) -> Option<f64> {
    (x.is_finite() && x > 0.0).then_some(x)
}

impl Divider {
    /// The value the legs present to node `a`: Ra‖Rb (Ω) or Ca + Cb (F).
    pub fn thevenin(&self, upper: f64, lower: f64) -> f64 {
        match self.class {
            PartClass::Resistor => upper * lower / (upper + lower),
            PartClass::Capacitor => upper + lower,
        }
    }

    /// The divider's voltage ratio k: Rb/(Ra + Rb) or Ca/(Ca + Cb).
    pub fn ratio(&self, upper: f64, lower: f64) -> f64 {
        match self.class {
            PartClass::Resistor => lower / (upper + lower),
            PartClass::Capacitor => upper / (upper + lower),
        }
    }

    /// The legs (upper, lower) for Thevenin value `thevenin` and ratio `k` (0 < k < 1).
    pub fn split(&self, thevenin: f64, k: f64) -> (f64, f64) {
        match self.class {
            PartClass::Resistor => (thevenin / k, thevenin / (1.0 - k)),
            PartClass::Capacitor => (k * thevenin, (1.0 - k) * thevenin),
        }
    }

    /// The lower leg that, with this upper leg, gives the Thevenin value (none when the upper
    /// leg alone already passes it).
    fn lower_for_thevenin(&self, upper: f64, thevenin: f64) -> Option<f64> {
        positive(match self.class {
            PartClass::Resistor => upper * thevenin / (upper - thevenin),
            PartClass::Capacitor => thevenin - upper,
        })
    }

    /// The upper leg that, with this lower leg, gives the Thevenin value.
    fn upper_for_thevenin(&self, lower: f64, thevenin: f64) -> Option<f64> {
        match self.class {
            // Ra‖Rb is symmetric in the legs.
            PartClass::Resistor => self.lower_for_thevenin(lower, thevenin),
            PartClass::Capacitor => positive(thevenin - lower),
        }
    }

    /// The lower leg that, with this upper leg, gives the ratio k.
    fn lower_for_ratio(&self, upper: f64, k: f64) -> Option<f64> {
        positive(match self.class {
            PartClass::Resistor => upper * k / (1.0 - k),
            PartClass::Capacitor => upper * (1.0 - k) / k,
        })
    }

    /// The upper leg that, with this lower leg, gives the ratio k.
    fn upper_for_ratio(&self, lower: f64, k: f64) -> Option<f64> {
        positive(match self.class {
            PartClass::Resistor => lower * (1.0 - k) / k,
            PartClass::Capacitor => lower * k / (1.0 - k),
        })
    }
}

impl Layout {
    /// This (follower) layout with its first slot, the input part from the stage input to node
    /// `a`, split into an upper leg (input → a) and a lower leg (a → ground) right after it.
    /// Legs of a capacitor are free choices, legs of a resistor are solved; neither scales with
    /// the impedance level on its own (their Thevenin value does).
    pub(crate) fn with_input_divider(mut self) -> Layout {
        let Some(&first) = self.slots.first() else {
            return self;
        };
        assert_eq!(
            first.nodes[0],
            Some(self.input),
            "the first slot of a divided layout must start at the stage input (expected node {}, \
             got {:?})",
            self.input,
            first.nodes[0]
        );
        let free = first.class == PartClass::Capacitor;
        let upper = Slot {
            role: UPPER_ROLE,
            free,
            scaled: false,
            ..first
        };
        let lower = Slot {
            role: LOWER_ROLE,
            nodes: [first.nodes[1], None],
            free,
            scaled: false,
            ..first
        };
        self.slots[0] = upper;
        self.slots.insert(1, lower);
        if self.op_amp_position >= 1 {
            self.op_amp_position += 1;
        }
        self.divider = Some(Divider {
            upper: 0,
            lower: 1,
            class: first.class,
        });
        self
    }
}

/// A non-inverting circuit fed through an input divider (see the module docs). It wraps the
/// circuit's own [`Realization`]: values in the divided part order (upper leg, lower leg, then
/// the follower circuit's parts after its input part).
pub(crate) struct Divided(pub &'static dyn Realization);

impl Divided {
    /// The class of the split input part.
    fn class(&self) -> PartClass {
        self.0
            .layout(false)
            .slots
            .first()
            .map_or(PartClass::Resistor, |s| s.class)
    }

    fn divider(&self) -> Divider {
        Divider {
            upper: 0,
            lower: 1,
            class: self.class(),
        }
    }

    /// The follower circuit's values: the legs reduced to their Thevenin value. `None` for a
    /// list shorter than two.
    fn collapse(&self, values: &[f64]) -> Option<Vec<f64>> {
        let (&upper, &lower) = (values.first()?, values.get(1)?);
        let mut unity = Vec::with_capacity(values.len() - 1);
        unity.push(self.divider().thevenin(upper, lower));
        unity.extend_from_slice(&values[2..]);
        Some(unity)
    }

    /// Writes the follower values back (everything after the input part) and splits the input
    /// part into legs of ratio `k` when `split` is set.
    fn expand(&self, unity: &[f64], values: &mut [f64], k: f64, split: bool) {
        if split {
            if let (Some(&thevenin), true) = (unity.first(), values.len() >= 2) {
                let (upper, lower) = self.divider().split(thevenin, k);
                values[0] = upper;
                values[1] = lower;
            }
        }
        for (dst, src) in values.iter_mut().skip(2).zip(unity.iter().skip(1)) {
            *dst = *src;
        }
    }
}

fn unity(t: &Target) -> Target {
    Target { gain: 1.0, ..*t }
}

impl Realization for Divided {
    fn layout(&self, _gain_network: bool) -> Layout {
        self.0.layout(false).with_input_divider()
    }

    fn solve(&self, t: &Target, v: &mut [f64], hint: Option<f64>) -> bool {
        let k = t.gain;
        if !(k > 0.0 && k < 1.0) {
            return false;
        }
        let Some(mut unity_values) = self.collapse(v) else {
            return false;
        };
        if !self.0.solve(&unity(t), &mut unity_values, hint) {
            return false;
        }
        // Resistor legs are solved (split the solved Thevenin resistor); capacitor legs are
        // free choices and stay as they are.
        let split = self.class() == PartClass::Resistor;
        self.expand(&unity_values, v, k, split);
        v.iter().all(|x| x.is_finite() && *x > 0.0)
    }

    fn achieved(&self, v: &[f64]) -> Option<Achieved> {
        let unity_values = self.collapse(v)?;
        let a = self.0.achieved(&unity_values)?;
        Some(Achieved {
            gain: a.gain * self.divider().ratio(v[0], v[1]),
            ..a
        })
    }

    fn ratio_rule(&self, t: &Target) -> Option<RatioRule> {
        self.0.ratio_rule(&unity(t))
    }

    fn cratio_for_rratio(&self, t: &Target, m: f64) -> Result<(f64, Option<f64>), String> {
        self.0.cratio_for_rratio(&unity(t), m)
    }

    fn rratio_meaning(&self) -> &'static str {
        self.0.rratio_meaning()
    }

    fn hint_of(&self, v: &[f64]) -> Option<f64> {
        self.0.hint_of(&self.collapse(v)?)
    }

    fn set_capacitors(&self, t: &Target, v: &mut [f64], trial: &CapacitorTrial) {
        let Some(mut unity_values) = self.collapse(v) else {
            return;
        };
        self.0.set_capacitors(&unity(t), &mut unity_values, trial);
        let split = self.class() == PartClass::Capacitor;
        self.expand(&unity_values, v, t.gain, split);
    }
}

/// Standard values either side of a divider leg over which the other leg is re-solved, for
/// capacitor legs. The resistors of the stage are re-solved from the capacitors' sum, so moving
/// the pair along the series costs no f0 or Q, and the ratio of two coarse-series capacitors
/// (E12 steps are 21 %) is found only by looking at several pairs: three steps each way.
const CAPACITOR_LEG_REACH: usize = 7;

/// The (upper, lower) leg pairs the combination search tries for a divider whose designed legs
/// are `upper` and `lower`: the `n_near` standard values near each leg in every combination, and
/// for each standard value near a leg (the `n_near` nearest for resistors, [`CAPACITOR_LEG_REACH`]
/// for capacitors) the other leg re-solved to keep the designed Thevenin value or the designed
/// ratio, then taken at the standard values just below and above. Ascending, no repeats; each
/// pair as slot assignments.
pub(crate) fn pair_choices(
    divider: &Divider,
    upper: f64,
    lower: f64,
    n_near: usize,
    series: Series,
) -> Vec<Vec<(usize, f64)>> {
    let thevenin = divider.thevenin(upper, lower);
    let k = divider.ratio(upper, lower);
    let near = |v: f64, n: usize| series.candidates(v, n, divider.class);
    let reach = match divider.class {
        PartClass::Resistor => n_near,
        PartClass::Capacitor => n_near.max(CAPACITOR_LEG_REACH),
    };
    let mut pairs: Vec<(f64, f64)> = Vec::new();
    for &u in &near(upper, n_near) {
        for &l in &near(lower, n_near) {
            pairs.push((u, l));
        }
    }
    for &u in &near(upper, reach) {
        let resolved = [
            divider.lower_for_thevenin(u, thevenin),
            divider.lower_for_ratio(u, k),
        ];
        for l_star in resolved.into_iter().flatten() {
            pairs.extend(near(l_star, 2).into_iter().map(|l| (u, l)));
        }
    }
    for &l in &near(lower, reach) {
        let resolved = [
            divider.upper_for_thevenin(l, thevenin),
            divider.upper_for_ratio(l, k),
        ];
        for u_star in resolved.into_iter().flatten() {
            pairs.extend(near(u_star, 2).into_iter().map(|u| (u, l)));
        }
    }
    crate::sort::sort_by(&mut pairs, |a, b| {
        a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1))
    });
    pairs.dedup();
    pairs
        .into_iter()
        .map(|(u, l)| vec![(divider.upper, u), (divider.lower, l)])
        .collect()
}

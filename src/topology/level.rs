//! Choosing the impedance level of a stage: the level-setting capacitor scanned over its series,
//! the design whose resistors sit best around the level kept, and warnings for parts outside the
//! usual ranges.

use super::{
    CapacitorTrial, Freedoms, Layout, Realization, Target, PREFERRED_C_MIN_F, PREFERRED_R_OHM,
};
use crate::eseries::{PartClass, Series};
use crate::fmath;

/// Scans the level-setting capacitor over its series (or a fine grid for `exact`) and keeps the
/// design whose resistors sit best around the level. Returns the ideal values, or `None` when no
/// candidate keeps every part in its buildable range.
#[allow(clippy::too_many_arguments)]
pub(super) fn choose_level(
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
                .map(|k| c_lo * fmath::powf(c_hi / c_lo, k as f64 / n as f64))
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
    let window_penalty = |v: f64| {
        fmath::ln(PREFERRED_R_OHM.0 / v).max(0.0) + fmath::ln(v / PREFERRED_R_OHM.1).max(0.0)
    };
    for r in level_resistors(layout, values) {
        cost = cost.max(fmath::ln(r / level).abs());
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
                    penalty += fmath::ln(PREFERRED_C_MIN_F / v).max(0.0);
                }
            }
        }
    }
    Some(cost + 4.0 * penalty)
}

/// Warnings for parts outside the usual windows, each with the reason.
pub(super) fn level_warnings(
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
                20.0 * fmath::log10(target.gain)
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

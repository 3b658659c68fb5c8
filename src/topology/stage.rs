//! Designing one stage: the circuit chosen, the gain shape, the ratio rule checked against
//! `rratio`/`cratio`, the impedance level chosen, then the values rounded to the series.

use super::choose::{choose, GainShape};
use super::level::{choose_level, level_warnings};
use super::{divider, search, Circuit, Freedoms, Realization, StageDesign, Target, AUTO_LEVEL_OHM};
use crate::error::InputError;
use crate::fmath;
use crate::section::Section;

/// Designs one stage: chooses the circuit, its free values, solves the rest and rounds them.
///
/// A non-inverting circuit with |gain| < 1 gets an input divider ([`super::divider`]): its f0 and Q are
/// those of the unity-gain design with the divider's Thevenin value, its gain the divider ratio.
///
/// # Errors
/// As [`choose()`]; `cratio` when the capacitor ratio is out of the circuit's feasible range (the
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
                -20.0 * fmath::log10(target.gain)
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
                        20.0 * fmath::log10(target.gain),
                        target.gain
                    ),
                );
            }
        }
        // Without an rlevel of the user's, the level is not what failed: the frequency is, so
        // the message names the key that sets it first and the part ranges as the lever.
        if auto_level {
            return InputError::new(
                "fc",
                format!(
                    "stage {stage_no} ({}, f0 = {}) is out of reach of the part ranges: no \
                     impedance level keeps every part inside 1 Ω–10 MΩ and 1 pF–100 µF; move \
                     the cutoff (fc, or the limits that set it), or widen the stage with \
                     rlevel, cratio or rratio",
                    circuit.describe(),
                    crate::units::format_si_unit(target.f0_hz(), 4, "Hz"),
                ),
            );
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
    let netlist = realization.netlist(&layout, &values, &ideal);
    Ok(StageDesign {
        circuit,
        ideal,
        values,
        netlist,
        warnings,
    })
}

/// What to change when a capacitor ratio is below the circuit's bound.
fn suggestion(circuit: Circuit) -> &'static str {
    match circuit {
        Circuit::SallenKeyLowPass => "a stage gain above 1 (gain), or topo=mfb",
        Circuit::MfbLowPass => "a lower gain, or topo=sk",
        Circuit::MfbBandPass => "a lower gain at f0 (gain)",
        _ => "or leave cratio to its default",
    }
}

/// Refuses a ratio outside 0.001–10000 under its own key.
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

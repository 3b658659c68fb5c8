//! Report words shared by the text report and the page, so both say a thing the same way.

/// An English ordinal: `1st`, `2nd`, `3rd`, `4th`, `11th`, `21st`.
pub fn ordinal(n: usize) -> String {
    let suffix = match (n % 10, n % 100) {
        (1, 11) | (2, 12) | (3, 13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{n}{suffix}")
}

/// The as-built verdict in one sentence: the measured passband gain, the corners, the peaking
/// and, with limits, whether the board meets them and by how much.
pub fn verdict(v: &crate::pipeline::verdict::AsBuilt) -> String {
    let hz = |f: f64| crate::units::format_si_unit(f, 4, "Hz");
    let mut parts = vec![format!("passband {:+.2} dB", v.passband_gain_db)];
    if !v.corner_hz.is_empty() {
        let list: Vec<String> = v.corner_hz.iter().map(|&f| hz(f)).collect();
        parts.push(format!("corner {}", list.join(" and ")));
    }
    parts.push(format!("peaking {:+.2} dB", v.peaking_db));
    match (v.meets_mask, v.worst_margin_db, v.worst_at_hz) {
        (Some(true), Some(m), Some(f)) => parts.push(format!(
            "meets its limits (worst margin {m:.2} dB at {})",
            hz(f)
        )),
        (Some(false), Some(m), Some(f)) => {
            parts.push(format!("MISSES its limits by {:.2} dB at {}", -m, hz(f)))
        }
        _ => parts.push("no limits to check".to_string()),
    }
    format!("as built: {}", parts.join(", "))
}

/// A figure in dB with plain decimals (never an SI prefix: "0.5", not "500m"), typographic minus,
/// up to three decimals and no trailing zeros.
pub fn decibels(db: f64) -> String {
    let text = format!("{db:.3}");
    let text = if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    };
    text.replace('-', "−")
}

/// A value with three significant digits and its unit, typographic minus (text read by people).
fn eng(value: f64, unit: &str) -> String {
    crate::units::format_si_unit_with(value, 3, unit, crate::units::Minus::Typographic)
}

/// The noise in one line: RMS over the signal band and the SNR.
pub fn noise_line(noise: &crate::pipeline::NoiseSummary) -> String {
    let mut line = format!(
        "output noise {} rms over the signal band {} … {}",
        eng(noise.rms_v, "V"),
        eng(noise.band_hz.0, "Hz"),
        eng(noise.band_hz.1, "Hz")
    );
    if let Some(snr) = noise.snr_db {
        line.push_str(&format!(" · SNR {snr:.1} dB"));
    }
    line
}

/// A stage's peak output level and headroom in words.
pub fn headroom_line(level: &crate::pipeline::LevelSummary) -> String {
    format!(
        "peak {} out at {} ({} headroom)",
        eng(level.peak_out_v, "V"),
        eng(level.peak_hz, "Hz"),
        format!("{:+.1} dB", level.headroom_db).replace('-', "−")
    )
}

/// The board's GBW need in one sentence, with the band it holds over and whether the chosen op
/// amp gives it: "GBW ≥ 2.1 MHz keeps the built board within 1 % of its ideal-op-amp response
/// from 20 Hz to 20 kHz; the chosen op amp (10 MHz) does."
pub fn board_gbw_sentence(needs: &crate::analysis::opamp_need::OpAmpNeeds, gbw_hz: f64) -> String {
    let (lo, hi) = needs.gbw_band_hz;
    let pct = needs.drift_limit_pct;
    let band = format!("from {} to {}", eng(lo, "Hz"), eng(hi, "Hz"));
    match needs.min_gbw_hz {
        Some(need) => {
            let verdict = if gbw_hz >= need {
                "does"
            } else {
                "falls short"
            };
            format!(
                "GBW ≥ {} keeps the built board within {pct} % of its ideal-op-amp response {band}; \
                 the chosen op amp ({}) {verdict}.",
                eng(need, "Hz"),
                eng(gbw_hz, "Hz")
            )
        }
        None => format!(
            "No GBW up to 1 THz keeps the built board within {pct} % of its ideal-op-amp response \
             {band}: the op amp's DC gain or output resistance alone keeps it beyond that (with \
             the chosen op amp it is {} off at {}); a larger drift allowance, less gain per stage \
             or an op amp with more DC gain is needed.",
            percent(needs.deviation_with_board_opamp),
            eng(needs.deviation_at_hz, "Hz")
        ),
    }
}

/// A fraction as a percentage with three significant digits.
fn percent(fraction: f64) -> String {
    if fraction.is_finite() {
        let pct = fraction * 100.0;
        let decimals = if pct >= 100.0 {
            0
        } else if pct >= 10.0 {
            1
        } else {
            2
        };
        format!("{pct:.decimals$} %")
    } else {
        "without bound".to_string()
    }
}

/// What a stage asks of its op amp: its slew need, and the GBW at which the stage alone keeps its
/// f0 and Q within the drift allowance (its share of the board's need); and whether the chosen op
/// amp gives the board's GBW need and this slew.
pub fn needs_sentence(
    need: &crate::analysis::opamp_need::StageNeed,
    drift_pct: f64,
    op: &crate::opamp::OpAmp,
) -> String {
    let share = match need.min_gbw_hz {
        Some(g) => format!(
            "alone it keeps f0 and Q within {drift_pct} % from GBW ≥ {}",
            eng(g, "Hz")
        ),
        None => format!("alone no GBW up to 1 THz keeps its f0 and Q within {drift_pct} %"),
    };
    // The stage's own two figures against the chosen op amp; the board's GBW need has its own
    // sentence (`board_gbw_sentence`).
    let slew_ok = op.slew_v_per_s >= need.slew_v_per_s;
    let gbw_ok = need.min_gbw_hz.is_some_and(|g| op.gbw_hz >= g);
    let verdict = match (slew_ok, gbw_ok) {
        (true, true) => "the chosen op amp has both",
        (true, false) => "the chosen op amp has the slew rate but not this GBW",
        (false, true) => "the chosen op amp has this GBW but not the slew rate",
        (false, false) => "the chosen op amp has neither",
    };
    format!(
        "Needs slew ≥ {} ({} peak at {}); {share}; {verdict}.",
        eng(need.slew_v_per_s, "V/s"),
        eng(need.out_pk_v, "V"),
        eng(need.slew_at_hz, "Hz")
    )
}

#[cfg(test)]
mod tests {
    #[test]
    fn decibels_are_plain_decimals() {
        // Common practice (dB figures are written in decimals; an SI prefix on a logarithmic
        // unit, "500m dB", is not read by anyone).
        let got: Vec<String> = [0.5, -0.25, 3.0, 60.0, 0.001, -12.5]
            .iter()
            .map(|&db| super::decibels(db))
            .collect();
        assert_eq!(got, ["0.5", "−0.25", "3", "60", "0.001", "−12.5"]);
    }

    #[test]
    fn ordinals_follow_english() {
        // Common practice (English ordinal suffixes).
        let got: Vec<String> = [1, 2, 3, 4, 11, 12, 13, 21, 22, 101, 111]
            .iter()
            .map(|&n| super::ordinal(n))
            .collect();
        assert_eq!(
            got,
            [
                "1st", "2nd", "3rd", "4th", "11th", "12th", "13th", "21st", "22nd", "101st",
                "111th"
            ]
        );
    }
}

/// A notch of the built board in words: its depth below the passband gain, where, the stage's
/// zero frequency from its parts, and against the depth the limits ask for when they ask:
/// "notch 52.3 dB deep at 49.97 Hz (parts on an ideal op amp: 50 Hz); the limits ask 40 dB:
/// met".
pub fn notch_sentence(
    notch: &crate::analysis::notch::NotchDepth,
    required_db: Option<f64>,
) -> String {
    let depth = if notch.depth_db.is_finite() {
        format!("{:.1} dB deep", notch.depth_db)
    } else {
        "bottomless (an exact zero)".to_string()
    };
    let mut line = format!(
        "notch {depth} at {} (parts on an ideal op amp: {})",
        crate::units::format_si_unit_with(notch.at_hz, 4, "Hz", crate::units::Minus::Typographic),
        crate::units::format_si_unit_with(notch.fz_hz, 4, "Hz", crate::units::Minus::Typographic)
    );
    if let Some(required) = required_db {
        let verdict = if notch.depth_db >= required {
            "met".to_string()
        } else {
            format!("short by {:.1} dB", required - notch.depth_db)
        };
        line.push_str(&format!(
            "; the limits ask {} dB: {verdict}",
            decibels(required)
        ));
    }
    line
}

/// The board's DC errors in one line: the output offset for the given `vos` and `ib`, the worst
/// case over their signs and the largest share; when they are not modelled, what one millivolt of
/// offset and one nanoampere of bias current would do at most.
pub fn dc_line(dc: &crate::analysis::dc::DcErrors) -> String {
    if !dc.modelled {
        let (per_volt, per_amp) = dc.worst_per_unit();
        return format!(
            "DC errors not modelled (vos = ib = 0): at most {} out per 1 mV of offset, {} per \
             1 nA of bias current",
            eng(per_volt * 1e-3, "V"),
            eng(per_amp * 1e-9, "V")
        );
    }
    let mut line = format!(
        "DC offset {} out for vos = {}, ib = {} (worst case ±{} over signs",
        signed_eng(dc.offset_v, "V"),
        eng(dc.vos_v, "V"),
        eng(dc.ib_a, "A"),
        eng(dc.worst_v, "V")
    );
    let largest = dc
        .sources
        .iter()
        .max_by(|a, b| a.share_v.abs().total_cmp(&b.share_v.abs()));
    if let Some(s) = largest.filter(|s| s.share_v != 0.0) {
        line.push_str(&format!(
            "; largest {} {}, {}",
            s.reference,
            s.what.label(),
            eng(s.share_v, "V")
        ));
    }
    line.push(')');
    line
}

/// A value as [`eng`] writes it, with a `+` before a positive one.
fn signed_eng(value: f64, unit: &str) -> String {
    if value > 0.0 {
        format!("+{}", eng(value, unit))
    } else {
        eng(value, unit)
    }
}

/// A balancing resistor as a suggestion: its value, where it goes and what it cancels.
pub fn dc_balance_line(b: &crate::analysis::dc::Balance) -> String {
    format!(
        "a {} resistor (nearest standard {}) in series with {}'s {} input makes the DC \
         resistances its inputs see equal and cancels its bias-current share ({} now)",
        eng(b.ohm, "Ω"),
        eng(b.standard_ohm, "Ω"),
        b.reference,
        b.pin.label(),
        eng(b.nulls_v, "V")
    )
}

/// The board's stages by the kind of circuit, as the design's first line says them: "4
/// Sallen-Key stages" when every stage is of one kind (a first-order RC stage counts with the
/// Sallen-Key stages, a first-order inverting one with the multiple-feedback stages), else "5
/// stages: 1 Sallen-Key, 1 single-op-amp notch, 3 state-variable" in signal order of first
/// appearance.
pub fn stages_words(board: &crate::board::Board) -> String {
    use crate::topology::Circuit;
    let kind = |c: Circuit| match c {
        Circuit::SallenKeyLowPass
        | Circuit::SallenKeyHighPass
        | Circuit::BufferedLowPass
        | Circuit::BufferedHighPass => "Sallen-Key",
        Circuit::MfbLowPass
        | Circuit::MfbHighPass
        | Circuit::MfbBandPass
        | Circuit::InvertingLowPass
        | Circuit::InvertingHighPass => "multiple-feedback",
        Circuit::StateVariableLowPass
        | Circuit::StateVariableHighPass
        | Circuit::StateVariableBandPass
        | Circuit::StateVariableNotch => "state-variable",
        Circuit::NotchLowPass | Circuit::NotchHighPass | Circuit::NotchSymmetric => {
            "single-op-amp notch"
        }
    };
    let mut counts: Vec<(&str, usize)> = Vec::new();
    for stage in &board.stages {
        let k = kind(stage.circuit);
        match counts.iter_mut().find(|(name, _)| *name == k) {
            Some((_, n)) => *n += 1,
            None => counts.push((k, 1)),
        }
    }
    let n = board.stages.len();
    let noun = if n == 1 { "stage" } else { "stages" };
    match counts.as_slice() {
        [] => format!("0 {noun}"),
        [(name, _)] => format!("{n} {name} {noun}"),
        _ => format!(
            "{n} {noun}: {}",
            counts
                .iter()
                .map(|(name, k)| format!("{k} {name}"))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// The share of a tolerance study's boards whose stopband keeps the depth the limits ask, in
/// words: "notch ≥ 40 dB across the stop band in 97.3 % of runs" for a band-stop,
/// "stopband ≥ 60 dB in 88.1 % of runs" otherwise; `None` without a stopband in the limits.
pub fn stopband_kept_line(
    summary: &crate::analysis::tolerance::Summary,
    class: crate::spec::ResponseClass,
    required_db: Option<f64>,
) -> Option<String> {
    let (kept, required) = (summary.stopband_kept?, required_db?);
    let what = match class {
        crate::spec::ResponseClass::BandStop => "notch",
        _ => "stopband",
    };
    let place = match class {
        crate::spec::ResponseClass::BandStop => " across the stop band",
        _ => "",
    };
    Some(format!(
        "{what} ≥ {} dB{place} in {:.1} % of runs",
        decibels(required),
        100.0 * kept
    ))
}

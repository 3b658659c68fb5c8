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

#[cfg(test)]
mod tests {
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

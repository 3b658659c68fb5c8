//! Engineering notation: SI prefixes and the IEC 60062 resistor/capacitor code.
//!
//! Accepted input (case matters for the prefixes, as in the SI):
//! - plain and scientific numbers: `1000`, `1.5e3`, `-3`;
//! - an SI prefix after the number: `p n u µ m k M G` (also `f` and `T`), e.g. `10n`, `2.2k`;
//! - the IEC 60062 code, where the prefix letter stands in for the decimal point: `4k7`, `2n2`,
//!   `1R5` (R marks the decimal point of a plain value), `R47`, `4M7`;
//! - an optional unit after that: `Hz`, `Ω`/`ohm`/`ohms`, `F`, `dB`, `V`, `A`, `%`, with or
//!   without a space: `10 nF`, `4k7Ω`, `2 kHz`.
//!
//! Formatting goes the other way: [`format_si`] writes a value to a chosen number of significant
//! digits with the prefix that keeps the mantissa in 1 ≤ m < 1000, and [`format_si_unit`] adds a
//! unit after one space. They are the crate's one SI formatter (the plots' axis labels and
//! readouts call them too): NaN is `–`, infinities `∞`, prefixes run from f to T, and the minus
//! sign follows one rule, [`Minus`] (ASCII in text that is read back, U+2212 on figures).

use crate::fmath;

/// The SI prefixes we read and write, with their powers of ten.
const PREFIXES: [(char, i32); 10] = [
    ('f', -15),
    ('p', -12),
    ('n', -9),
    ('u', -6),
    ('µ', -6),
    ('m', -3),
    ('k', 3),
    ('M', 6),
    ('G', 9),
    ('T', 12),
];

/// Units that may follow a value. Longer spellings first so `ohms` is not read as `ohm` + `s`.
const UNITS: [&str; 11] = [
    "ohms", "ohm", "Ohm", "Hz", "hz", "dB", "Ω", "F", "V", "A", "%",
];

fn prefix_exponent(c: char) -> Option<i32> {
    // 'μ' (Greek mu, U+03BC) is accepted beside the micro sign 'µ' (U+00B5).
    let c = if c == 'μ' { 'µ' } else { c };
    PREFIXES.iter().find(|(p, _)| *p == c).map(|(_, e)| *e)
}

/// Reads a number written in engineering notation.
///
/// Returns the value in SI base units (`4k7` → 4700.0, `2n2` → 2.2e-9, `1R5` → 1.5).
///
/// # Errors
/// A sentence saying what could not be read, for the caller to attach to its link key.
pub fn parse_si(text: &str) -> Result<f64, String> {
    let trimmed = text.trim();
    if trimmed.is_empty() {
        return Err("is empty; expected a number such as 4k7, 2.2n or 1e3".into());
    }
    let body = strip_unit(trimmed).trim_end();
    if body.is_empty() {
        return Err(format!("'{trimmed}' has a unit but no number"));
    }
    let value = parse_body(body).ok_or_else(|| {
        format!("'{trimmed}' is not a number; expected a form such as 4k7, 2.2n, 1R5 or 1e3")
    })?;
    if !value.is_finite() {
        return Err(format!("'{trimmed}' is not a finite number"));
    }
    Ok(value)
}

/// Removes one trailing unit, keeping a prefix that looks like a unit (`F` never means femto,
/// `m` before nothing stays milli).
fn strip_unit(text: &str) -> &str {
    for unit in UNITS {
        if let Some(rest) = text.strip_suffix(unit) {
            if !rest.trim_end().is_empty() {
                return rest;
            }
        }
    }
    text
}

/// Parses the number part: plain float, float + prefix, or IEC 60062 code.
fn parse_body(body: &str) -> Option<f64> {
    if let Some(v) = parse_plain(body) {
        return Some(v);
    }
    let chars: Vec<(usize, char)> = body.char_indices().collect();
    // Exactly one letter may act as prefix or decimal marker.
    let letters: Vec<&(usize, char)> = chars.iter().filter(|(_, c)| c.is_alphabetic()).collect();
    // Scientific notation with a prefix (1e3k) is not accepted: one letter only.
    if letters.len() != 1 {
        return None;
    }
    let (pos, letter) = *letters[0];
    let exponent = if letter == 'R' || letter == 'r' {
        0
    } else {
        prefix_exponent(letter)?
    };
    // A space may separate the number from its prefix (`100 nF`), not a code's digits (`4 k7`).
    let head = body[..pos].trim_end();
    let tail = &body[pos + letter.len_utf8()..];
    let scale = fmath::powi(10f64, exponent);
    if tail.is_empty() {
        // Suffix form: 2.2k, 10n, 5R (= 5 Ω).
        return parse_plain(head).map(|v| v * scale);
    }
    // Code form: the letter is the decimal point (4k7, 1R5, R47). The tail is digits only.
    if !tail.chars().all(|c| c.is_ascii_digit()) || head.contains('.') || head.len() != pos {
        return None;
    }
    let (sign, digits) = match head.strip_prefix('-') {
        Some(rest) => (-1.0, rest),
        None => (1.0, head.strip_prefix('+').unwrap_or(head)),
    };
    if !digits.chars().all(|c| c.is_ascii_digit()) {
        return None;
    }
    let whole = if digits.is_empty() { "0" } else { digits };
    let mantissa: f64 = format!("{whole}.{tail}").parse().ok()?;
    Some(sign * mantissa * scale)
}

/// A plain decimal or scientific number; rejects Rust's extras such as `inf` and `nan`.
fn parse_plain(text: &str) -> Option<f64> {
    let ok = !text.is_empty()
        && text
            .chars()
            .all(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E'))
        && text.chars().any(|c| c.is_ascii_digit());
    if !ok {
        return None;
    }
    text.parse::<f64>().ok()
}

/// Which minus sign a formatted negative value carries: the one rule of every SI formatter here.
///
/// Text that is read back or handed to other programs (links, the text report, the parts list,
/// SPICE, CSV, error messages) writes the ASCII hyphen-minus, which [`parse_si`] and every tool
/// read; text drawn on a figure or shown in a readout writes the typographic minus sign U+2212,
/// which is as wide as a digit and as long as the plus sign (Unicode, "MINUS SIGN"). The choice
/// applies to every minus in the text, the mantissa's and an exponent's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Minus {
    /// `-` (U+002D): text that is read back.
    Ascii,
    /// `−` (U+2212): text that is only read by people (figures, readouts).
    Typographic,
}

/// What [`format_si`] writes for NaN: an en dash, "no value", in every style.
pub const NOT_A_NUMBER: &str = "–";

/// Writes `value` with `digits` significant digits (1–15) and an SI prefix, with the ASCII minus
/// ([`Minus::Ascii`], so [`parse_si`] reads it back).
///
/// The mantissa stays in 1 ≤ |m| < 1000 with a prefix from f (1e-15) to T (1e12); trailing zeros
/// are dropped (`4700` → `4.7k`, `2.2e-9` → `2.2n`, `1e-6` → `1µ`, `999.96` at 4 digits → `1k`).
/// Values below 1e-15 or from 1e15 up use scientific notation (`1.5e15`); zero is `0`; infinities
/// are `∞` and `-∞`; NaN is [`NOT_A_NUMBER`] (`–`).
pub fn format_si(value: f64, digits: usize) -> String {
    format_si_with(value, digits, Minus::Ascii)
}

/// [`format_si`] with the minus sign chosen by `minus`: the one SI formatter of the crate.
///
/// The value is first rounded to `digits` significant digits in decimal (so `999.96` at four
/// digits is `1k`, not `1000`), then the prefix is chosen from the rounded value.
pub fn format_si_with(value: f64, digits: usize, minus: Minus) -> String {
    let text = format_si_ascii(value, digits);
    match minus {
        Minus::Ascii => text,
        Minus::Typographic => text.replace('-', "−"),
    }
}

/// The formatter itself, with ASCII minus signs.
fn format_si_ascii(value: f64, digits: usize) -> String {
    let digits = digits.clamp(1, 15);
    if value == 0.0 {
        return "0".into();
    }
    if value.is_nan() {
        return NOT_A_NUMBER.into();
    }
    if value.is_infinite() {
        return if value > 0.0 {
            "∞".into()
        } else {
            "-∞".into()
        };
    }
    let magnitude = value.abs();
    // Round to the significant digits first, so 999.96 with 4 digits becomes 1k, not 1000.
    let rounded: f64 = format!("{:.*e}", digits - 1, magnitude)
        .parse()
        .unwrap_or(magnitude);
    let decade = fmath::log10(rounded).floor() as i32;
    let engineering = decade.div_euclid(3) * 3;
    let sign = if value < 0.0 { "-" } else { "" };
    if !(-15..=12).contains(&engineering) {
        return format!(
            "{sign}{}",
            trim_zeros(&format!("{:.*e}", digits - 1, rounded))
        );
    }
    let mantissa = rounded / fmath::powi(10f64, engineering);
    let decimals = (digits as i32 - 1 - (decade - engineering)).max(0) as usize;
    let prefix = match engineering {
        0 => String::new(),
        e => PREFIXES
            .iter()
            .find(|(p, x)| *x == e && *p != 'u')
            .map(|(p, _)| p.to_string())
            .unwrap_or_default(),
    };
    format!(
        "{sign}{}{prefix}",
        trim_zeros(&format!("{mantissa:.decimals$}"))
    )
}

/// A value in engineering notation with its unit, prefix and unit together after one space:
/// `14.7 kΩ`, `22 nF`, `470 Ω`, `1.59 kHz` ([`format_si`]: up to `digits` significant digits,
/// trailing zeros dropped, ASCII minus). An empty unit gives the number and prefix alone (`4.7k`).
pub fn format_si_unit(value: f64, digits: usize, unit: &str) -> String {
    format_si_unit_with(value, digits, unit, Minus::Ascii)
}

/// [`format_si_unit`] with the minus sign chosen by `minus` (figures and readouts use
/// [`Minus::Typographic`]).
pub fn format_si_unit_with(value: f64, digits: usize, unit: &str, minus: Minus) -> String {
    let text = format_si_with(value, digits, minus);
    if unit.is_empty() {
        return text;
    }
    match text.chars().last() {
        Some(c) if "fpnµmkMGT".contains(c) => {
            let number = &text[..text.len() - c.len_utf8()];
            format!("{number} {c}{unit}")
        }
        _ => format!("{text} {unit}"),
    }
}

fn trim_zeros(text: &str) -> String {
    // Only strip zeros after a decimal point, and keep an exponent part intact.
    let (number, exponent) = match text.find('e') {
        Some(i) => (&text[..i], &text[i..]),
        None => (text, ""),
    };
    let number = if number.contains('.') {
        number.trim_end_matches('0').trim_end_matches('.')
    } else {
        number
    };
    format!("{number}{exponent}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_unit_follows_the_prefix_after_one_space() {
        // SI writing (common practice): number, space, prefix and unit together.
        assert_eq!(format_si_unit(4700.0, 3, "Ω"), "4.7 kΩ");
        assert_eq!(format_si_unit(1.0e8, 4, "Hz"), "100 MHz");
        assert_eq!(format_si_unit(2.2e-11, 3, "F"), "22 pF");
        assert_eq!(format_si_unit(470.0, 3, "Ω"), "470 Ω");
    }

    fn check(text: &str, expect: f64) {
        let got = parse_si(text).unwrap_or_else(|e| panic!("{text}: {e}"));
        assert!(
            (got - expect).abs() <= 1e-12 * expect.abs(),
            "{text}: expected {expect}, got {got}"
        );
    }

    #[test]
    fn reads_prefixes_codes_and_units() {
        // IEC 60062 letter codes: the letter stands for the decimal point.
        check("4k7", 4700.0);
        check("2n2", 2.2e-9);
        check("1R5", 1.5);
        check("R47", 0.47);
        check("4M7", 4.7e6);
        check("10µ", 10e-6);
        check("10μF", 10e-6);
        check("10u", 10e-6);
        check("2.2k", 2200.0);
        check("1.5e3", 1500.0);
        check("100 nF", 100e-9);
        check("4k7Ω", 4700.0);
        check("10 kohm", 10e3);
        check("2 kHz", 2000.0);
        check("3dB", 3.0);
        check("-3 dB", -3.0);
        check("1m", 1e-3);
        check("1M", 1e6);
        check("33p", 33e-12);
        check("1F", 1.0);
        check("5%", 5.0);
    }

    #[test]
    fn refuses_what_is_not_a_number() {
        for bad in [
            "", "k", "4k7k", "abc", "1e3k", "inf", "NaN", "1..2", "4x7", "Hz", "1e999",
        ] {
            assert!(parse_si(bad).is_err(), "{bad:?} should be refused");
        }
    }

    #[test]
    fn formats_with_prefix() {
        assert_eq!(format_si(4700.0, 3), "4.7k");
        assert_eq!(format_si(2.2e-9, 3), "2.2n");
        assert_eq!(format_si(1e-6, 3), "1µ");
        assert_eq!(format_si(999.96, 4), "1k");
        assert_eq!(format_si(1591.549, 4), "1.592k");
        assert_eq!(format_si(-0.5, 3), "-500m");
        assert_eq!(format_si(0.0, 3), "0");
        assert_eq!(format_si(12.0, 3), "12");
    }

    #[test]
    fn negatives_take_the_minus_of_their_style() {
        // ASCII hyphen-minus U+002D for text read back; MINUS SIGN U+2212 for figures (Unicode).
        assert_eq!(format_si(-4700.0, 3), "-4.7k");
        assert_eq!(format_si_with(-4700.0, 3, Minus::Typographic), "−4.7k");
        assert_eq!(format_si_with(-0.25, 3, Minus::Typographic), "−250m");
        assert_eq!(format_si_unit(-20.0, 3, "dB"), "-20 dB");
        assert_eq!(
            format_si_unit_with(-2.2e-9, 3, "F", Minus::Typographic),
            "−2.2 nF"
        );
        // The exponent of the scientific form follows the same rule.
        assert_eq!(format_si(-1.5e-18, 3), "-1.5e-18");
        assert_eq!(format_si_with(-1.5e-18, 3, Minus::Typographic), "−1.5e−18");
    }

    #[test]
    fn round_values_and_the_t_prefix() {
        // SI prefixes (BIPM SI brochure, table 7): k = 1e3, M = 1e6, G = 1e9, T = 1e12,
        // f = 1e-15; outside f … T the scientific form.
        assert_eq!(format_si(1000.0, 3), "1k");
        assert_eq!(format_si(1.5e6, 3), "1.5M");
        assert_eq!(format_si(2.0e9, 3), "2G");
        assert_eq!(format_si(1.0e12, 3), "1T");
        assert_eq!(format_si(999.96e9, 4), "1T");
        assert_eq!(format_si(4.7e-15, 3), "4.7f");
        assert_eq!(format_si(1.5e15, 3), "1.5e15");
        assert_eq!(format_si(123.456, 4), "123.5");
        assert_eq!(format_si_unit(3.3e12, 3, "Hz"), "3.3 THz");
        assert_eq!(format_si_unit(4700.0, 3, ""), "4.7k");
        assert_eq!(format_si_unit(470.0, 3, ""), "470");
    }

    #[test]
    fn nan_is_a_dash_and_infinities_are_signed() {
        // IEEE 754 non-finite values: NaN has no value to show (en dash), ±∞ keep their sign.
        assert_eq!(format_si(f64::NAN, 3), "–");
        assert_eq!(format_si_with(f64::NAN, 3, Minus::Typographic), "–");
        assert_eq!(format_si(f64::INFINITY, 3), "∞");
        assert_eq!(format_si(f64::NEG_INFINITY, 3), "-∞");
        assert_eq!(
            format_si_with(f64::NEG_INFINITY, 3, Minus::Typographic),
            "−∞"
        );
        assert_eq!(format_si_unit(f64::NAN, 3, "Hz"), "– Hz");
        assert_eq!(format_si_unit(f64::INFINITY, 3, "Ω"), "∞ Ω");
    }

    #[test]
    fn round_trips_over_decades() {
        // parse(format(x)) equals x to the printed digits, over 1e-14 … 1e11.
        let mut x = 1.234_567_89e-14;
        while x < 1e11 {
            for digits in [3, 6, 12] {
                let text = format_si(x, digits);
                let back = parse_si(&text).unwrap_or_else(|e| panic!("{text}: {e}"));
                let tolerance = 0.6 * fmath::powi(10f64, 1 - digits as i32);
                assert!(((back - x) / x).abs() < tolerance, "{x} → {text} → {back}");
            }
            x *= 3.7;
        }
    }
}

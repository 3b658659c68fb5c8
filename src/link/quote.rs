//! How the link reader shows the user's text and reads frequencies: quoting with control
//! characters escaped, short numbers, and the one frequency check (moved out of
//! [`super::read`], not changed).

use crate::units::parse_si;

/// The longest stretch of the user's text a message quotes, in characters.
pub const QUOTE_CHARS: usize = 60;

/// One character as a message shows it: control characters (C0, DEL, C1) and the bidirectional
/// formatting characters, which a terminal or a page would act on rather than show, are written
/// as a Rust-style escape `\u{1b}`; everything else is itself.
fn push_escaped(out: &mut String, c: char) {
    let bidi =
        matches!(c, '\u{200e}' | '\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}');
    if c.is_control() || bidi {
        out.push_str(&format!("\\u{{{:x}}}", c as u32));
    } else {
        out.push(c);
    }
}

/// `text` with every control and bidirectional formatting character escaped as `\u{…}`, and
/// nothing cut: the last guard the command line puts on every line it writes to stderr.
pub fn escape_controls(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        push_escaped(&mut out, c);
    }
    out
}

/// The user's text as every message quotes it: between single quotes, control characters
/// escaped as in [`escape_controls`] (`'a\u{1b}]0;x\u{7}'`), and a text longer than
/// [`QUOTE_CHARS`] characters cut to its first [`QUOTE_CHARS`] followed by
/// `… (N characters)`, so a 100 kB value is never echoed whole.
pub fn quoted(text: &str) -> String {
    let n_chars = text.chars().count();
    let mut out = String::from("'");
    for c in text.chars().take(QUOTE_CHARS) {
        push_escaped(&mut out, c);
    }
    out.push('\'');
    if n_chars > QUOTE_CHARS {
        out.push_str(&format!("… ({n_chars} characters)"));
    }
    out
}

/// A number as a message shows it: plain when it is short (`0.5`, `1000`), in scientific form
/// otherwise (`1e-308`), so an extreme value never prints hundreds of digits.
pub fn shown_number(v: f64) -> String {
    if v == 0.0 || !v.is_finite() || (1e-4..1e9).contains(&v.abs()) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// [`parse_si`] with the user's text in its message quoted by [`quoted`].
pub(super) fn si(text: &str) -> Result<f64, String> {
    parse_si(text).map_err(|e| {
        let trimmed = text.trim();
        e.replacen(&format!("'{trimmed}'"), &quoted(trimmed), 1)
    })
}

/// The one check of every frequency-like value (the link's cutoff, bandwidth, edges, converter
/// rates, noise band and span, and the sweep's `--from` and `--to`): a number in engineering
/// notation that is normal (not zero, subnormal, infinite or NaN) and lies within `range`, Hz.
/// `what` names the value in the message, which gives the accepted range.
///
/// # Errors
/// A message quoting the text (through [`quoted`]) and naming the range.
pub fn check_frequency(text: &str, range: (f64, f64), what: &str) -> Result<f64, String> {
    let v = si(text)?;
    if v.is_normal() && v >= range.0 && v <= range.1 {
        Ok(v)
    } else {
        Err(format!(
            "{} is not accepted; {what} is a frequency in Hz from {}",
            quoted(text.trim()),
            range_text(range)
        ))
    }
}

/// A frequency range as messages give it: `1 mHz to 1 GHz`.
pub(super) fn range_text((lo, hi): (f64, f64)) -> String {
    let hz = |f: f64| crate::units::format_si_unit(f, 4, "Hz");
    if lo <= f64::MIN_POSITIVE {
        // The span's reading range: any normal number, which no SI prefix writes.
        return format!("above 0 Hz (not a subnormal number) to {}", hz(hi));
    }
    format!("{} to {}", hz(lo), hz(hi))
}

//! The link writer: [`LinkState`] → query string, and the texts a form shows for a state.
//!
//! Both walk [`TABLE`]: each row gives its key's text for a state, so the written link, the form
//! values and the form defaults cannot disagree about a key's name or its notation.

use super::keys::{Row, Written, TABLE};
use super::LinkState;
use crate::spec::Edge;
use crate::units::parse_si;

/// Characters kept as they are in a written link: letters, digits, `-._~` and the `,` and `:`
/// that separate our lists (`passedge=2k,20k`, `set=R3:4k7`). Everything else is percent-encoded.
const LINK_SAFE: &percent_encoding::AsciiSet = &percent_encoding::NON_ALPHANUMERIC
    .remove(b'-')
    .remove(b'.')
    .remove(b'_')
    .remove(b'~')
    .remove(b',')
    .remove(b':');

/// A number as a link writes it: engineering notation when that reads back exactly, else the
/// shortest decimal that does (`4700` → `4.7k`, `1e-9` → `1n`).
pub(crate) fn number_text(value: f64) -> String {
    // −0 reads back as 0 and equals it; writing it as 0 keeps it out of links like any default.
    let value = if value == 0.0 { 0.0 } else { value };
    if value.is_infinite() && value > 0.0 {
        return "ideal".into();
    }
    // Plain decimals read best between 1 m and 1 k (ripple=0.5, gain=20).
    if (1e-3..1e3).contains(&value.abs()) {
        let plain = format!("{value}");
        if plain.len() <= 8 {
            return plain;
        }
    }
    // `u` rather than `µ` keeps written links plain ASCII.
    let si = crate::units::format_si(value, 15).replace('µ', "u");
    if parse_si(&si).ok() == Some(value) {
        si
    } else {
        format!("{value}")
    }
}

/// An edge as a link writes it: `1k`, or `2k,20k` for a pair.
pub(crate) fn edge_text(edge: Edge) -> String {
    match edge {
        Edge::Single(f) => number_text(f),
        Edge::Pair(lo, hi) => format!("{},{}", number_text(lo), number_text(hi)),
    }
}

/// A `lo,hi` band, when there is one.
pub(crate) fn band_text(band: Option<(f64, f64)>) -> Option<String> {
    band.map(|(lo, hi)| format!("{},{}", number_text(lo), number_text(hi)))
}

/// `REF:value` pairs joined by commas, when there are any.
pub(crate) fn list_text(items: &[(String, f64)]) -> Option<String> {
    let text = items
        .iter()
        .map(|(r, v)| format!("{r}:{}", number_text(*v)))
        .collect::<Vec<_>>()
        .join(",");
    Some(text).filter(|t| !t.is_empty())
}

/// The keys a link for `state` carries, with their texts, in the table's order.
fn written_pairs(state: &LinkState) -> Vec<(&'static str, String)> {
    let default = LinkState::default();
    TABLE
        .iter()
        .filter_map(|row: &Row| {
            let text = (row.write)(state)?;
            let keep = match row.written {
                Written::Always => true,
                Written::WhenNotDefault => (row.write)(&default).as_ref() != Some(&text),
            };
            keep.then_some((row.name, text))
        })
        .collect()
}

/// See [`super::to_query`].
pub(super) fn to_query(state: &LinkState) -> String {
    let body: Vec<String> = written_pairs(state)
        .iter()
        .map(|(k, v)| {
            format!(
                "{k}={}",
                percent_encoding::utf8_percent_encode(v, LINK_SAFE)
            )
        })
        .collect();
    format!("?{}", body.join("&"))
}

/// See [`super::form_values`].
pub(super) fn form_values(state: &LinkState) -> Vec<(&'static str, String)> {
    TABLE
        .iter()
        .map(|row| {
            let text = (row.write)(state).unwrap_or_else(|| row.default_text());
            (row.name, text)
        })
        .collect()
}

/// See [`super::defaults`].
pub(super) fn defaults() -> Vec<(&'static str, String)> {
    TABLE
        .iter()
        .map(|row| (row.name, row.default_text()))
        .collect()
}

//! The link reader: query string → [`LinkReport`].
//!
//! Reading goes in three steps. The version comes first, because it decides the key names: a
//! version-1 link names the four limit keys `fpass`, `apass`, `fstop`, `astop`, a version-2 link
//! `passedge`, `passloss`, `stopedge`, `stopdepth` (README, "Version 1 links"). Then every pair
//! is matched to a [`Key`] by the names of that version, and the rest are unknown keys. Last, each
//! key's text is read the way its row in [`super::keys::TABLE`] says; the simple keys set their
//! field through the row, and the requirement keys (class, family, order, cutoff, limits,
//! converter) are combined here, because each one's meaning depends on the others.
//!
//! Messages always use the version-2 names, so that they match the page's form and the README.
//! Every message that quotes the user's text quotes it through [`quoted`] (control characters
//! escaped, long values cut), and every frequency-like key passes the one [`check_frequency`].

use super::keys::{self, name, row_of, Key, Parse, Value, FAMILY_NAMES, MARGINS, TABLE, TARGET_HZ};
pub use super::quote::{check_frequency, escape_controls, quoted, shown_number};
use super::quote::{range_text, si};
use super::{
    Converter, LinkReport, LinkState, DEFAULT_APASS_DB, DEFAULT_FC_HZ, DEFAULT_ORDER,
    DEFAULT_RIPPLE_DB, FORMAT_VERSION, MAX_ORDER,
};
use crate::error::InputError;
use crate::sections::StageOrder;
use crate::spec::{Edge, Family, Mask, OrderChoice, ResponseClass};

/// The longest part reference the reader takes (`R12345`): longer ones are refused rather than
/// carried into messages and the parts list.
const MAX_REFERENCE_CHARS: usize = 8;

/// The link format a link is read in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Version {
    /// `v=1`: the limit keys have their first names.
    One,
    /// `v=2` (the current format).
    Two,
}

/// Reads a link; see [`super::parse`].
pub(super) fn parse(query: &str) -> LinkReport {
    let mut raw: Vec<(String, String)> = Vec::new();
    for (key, value) in form_urlencoded::parse(query.as_bytes()) {
        if key.is_empty() && value.is_empty() {
            continue;
        }
        // A repeated key: the last one counts, as in most query-string readers.
        raw.retain(|(k, _)| *k != key);
        raw.push((key.into_owned(), value.into_owned()));
    }
    let mut reader = Reader {
        pairs: Vec::new(),
        class: ResponseClass::LowPass,
        errors: Vec::new(),
        notes: Vec::new(),
    };
    let version = reader.version(&raw);
    let names: &[&str] = match version {
        Version::One => &keys::V1_KEYS,
        Version::Two => &keys::KEYS,
    };
    let mut unknown_keys = Vec::new();
    for (key, value) in raw {
        match names.iter().position(|n| *n == key) {
            Some(i) => reader.pairs.push((TABLE[i].key, value)),
            None => unknown_keys.push(key),
        }
    }
    let state = reader.read_state();
    LinkReport {
        state,
        errors: reader.errors,
        unknown_keys,
        notes: reader.notes,
    }
}

struct Reader {
    pairs: Vec<(Key, String)>,
    /// The response class, once read: it decides whether an edge is one frequency or two.
    class: ResponseClass,
    errors: Vec<InputError>,
    notes: Vec<String>,
}

impl Reader {
    /// The version the link is read in. A `v` newer than this build is an error on `v` (the
    /// link is refused); a link without `v` is read as version 2 unless it names limits only by
    /// their version-1 names, so that a hand-typed old link does not lose its limits.
    fn version(&mut self, raw: &[(String, String)]) -> Version {
        if let Some((_, text)) = raw.iter().find(|(k, _)| k == "v") {
            return match text.trim().parse::<u32>() {
                Ok(1) => Version::One,
                Ok(2) => Version::Two,
                Ok(v) if v > FORMAT_VERSION => {
                    self.fail(
                        Key::V,
                        format!("this link has format v={v}, made by a newer Rolloff; this version reads v={FORMAT_VERSION}"),
                    );
                    Version::Two
                }
                _ => {
                    self.fail(Key::V, format!("{} is not accepted; the format version is {FORMAT_VERSION} (or 1 for older links)", quoted(text)));
                    Version::Two
                }
            };
        }
        let renamed: Vec<_> = TABLE.iter().filter(|r| r.name != r.v1_name).collect();
        let has = |n: &str| raw.iter().any(|(k, _)| k == n);
        let old: Vec<&str> = renamed
            .iter()
            .map(|r| r.v1_name)
            .filter(|n| has(n))
            .collect();
        if old.is_empty() || renamed.iter().any(|r| has(r.name)) {
            return Version::Two;
        }
        let mapping: Vec<String> = renamed
            .iter()
            .map(|r| format!("{} → {}", r.v1_name, r.name))
            .collect();
        self.notes.push(format!(
            "v: this link has no version and names its limits {}, so it is read as a version-1 link ({})",
            old.join(", "),
            mapping.join(", ")
        ));
        Version::One
    }

    fn raw(&self, key: Key) -> Option<&str> {
        self.pairs
            .iter()
            .find(|(k, _)| *k == key)
            .map(|(_, v)| v.as_str())
    }

    fn given(&self, key: Key) -> bool {
        self.raw(key).is_some()
    }

    fn fail(&mut self, key: Key, message: String) {
        self.errors.push(InputError::new(name(key), message));
    }

    /// Reads a key's text the way its row says; `None` when absent or bad (bad is reported).
    fn read(&mut self, key: Key) -> Option<Value> {
        let text = self.raw(key)?.to_string();
        match row_of(key).parse {
            Parse::Version => None,
            Parse::Number { lo, hi, what } => self.number(key, &text, lo, hi, what),
            Parse::Frequency { range, what } => match check_frequency(&text, range, what) {
                Ok(v) => Some(Value::Number(v)),
                Err(message) => {
                    self.fail(key, message);
                    None
                }
            },
            Parse::ZeroOr { least, hi, what } => match si(&text) {
                Ok(v) if v == 0.0 || (v >= least && v <= hi) => Some(Value::Number(v)),
                Ok(_) => {
                    self.fail(
                        key,
                        format!(
                            "{} is not accepted; {what} is 0 or from {} to {}",
                            quoted(text.trim()),
                            shown_number(least),
                            shown_number(hi)
                        ),
                    );
                    None
                }
                Err(e) => {
                    self.fail(key, format!("{e} ({what})"));
                    None
                }
            },
            Parse::NumberOrIdeal { lo, hi, what } => {
                if text.trim().eq_ignore_ascii_case("ideal") {
                    Some(Value::Number(f64::INFINITY))
                } else {
                    self.number(key, &text, lo, hi, what)
                }
            }
            Parse::Integer { lo, hi, what } => {
                let text = text.trim();
                match text.parse::<u64>() {
                    Ok(v) if v >= lo && v <= hi => Some(Value::Integer(v)),
                    _ => {
                        self.fail(
                            key,
                            format!(
                                "{} is not accepted; {what} is a whole number from {lo} to {hi}",
                                quoted(text)
                            ),
                        );
                        None
                    }
                }
            }
            Parse::Choice(names) => {
                let text = text.trim();
                let lower = text.to_ascii_lowercase();
                match names.iter().position(|n| *n == lower) {
                    Some(i) => Some(Value::Choice(i)),
                    None => {
                        self.fail(
                            key,
                            format!(
                                "{} is not accepted; use one of {}",
                                quoted(text),
                                names.join(", ")
                            ),
                        );
                        None
                    }
                }
            }
            Parse::Edge => self.edge(key, &text).map(Value::Edge),
            Parse::Band { range, what } => {
                let parts: Vec<Result<f64, String>> = text
                    .split(',')
                    .map(|t| check_frequency(t, range, what))
                    .collect();
                match parts.as_slice() {
                    [Ok(lo), Ok(hi)] if lo < hi => Some(Value::Band(*lo, *hi)),
                    [Err(message), _] | [_, Err(message)] => {
                        self.fail(key, format!("{message} (lo,hi)"));
                        None
                    }
                    _ => {
                        self.fail(
                            key,
                            format!(
                                "{} is not accepted; {what} is lo,hi in Hz with lo < hi, each from {}",
                                quoted(&text),
                                range_text(range)
                            ),
                        );
                        None
                    }
                }
            }
            Parse::Parts { lo, hi, what } => {
                Some(Value::Parts(self.part_list(key, &text, lo, hi, what)))
            }
            Parse::StageOrder => self.stage_order(&text).map(Value::StageOrder),
            Parse::Title => {
                // A title is only ever shown as text: control characters (which could retitle
                // or clear a terminal) are dropped and the length is held to 120 characters,
                // and the reader says so rather than changing the title silently.
                let kept: String = text.chars().filter(|c| !c.is_control()).take(120).collect();
                let controls = text.chars().filter(|c| c.is_control()).count();
                let long = text.chars().filter(|c| !c.is_control()).count() > 120;
                if controls > 0 || long {
                    let mut what = Vec::new();
                    if controls > 0 {
                        what.push(format!("{controls} control character(s) removed"));
                    }
                    if long {
                        what.push("cut to 120 characters".to_string());
                    }
                    self.notes.push(format!("title: {}", what.join(", ")));
                }
                Some(Value::Text(kept))
            }
        }
    }

    fn number(&mut self, key: Key, text: &str, lo: f64, hi: f64, what: &str) -> Option<Value> {
        match si(text) {
            Ok(v) if v != 0.0 && !v.is_normal() => {
                self.fail(
                    key,
                    format!(
                        "{} is too small to compute with (a subnormal number); {what} accepts {} to {}",
                        quoted(text.trim()),
                        shown_number(lo),
                        shown_number(hi)
                    ),
                );
                None
            }
            Ok(v) if v >= lo && v <= hi => Some(Value::Number(v)),
            Ok(v) => {
                self.fail(
                    key,
                    format!(
                        "{} is out of range; {what} accepts {} to {}",
                        shown_number(v),
                        shown_number(lo),
                        shown_number(hi)
                    ),
                );
                None
            }
            Err(e) => {
                self.fail(key, format!("{e} ({what})"));
                None
            }
        }
    }

    /// A key read as a number (numbers and whole numbers alike).
    fn read_number(&mut self, key: Key) -> Option<f64> {
        match self.read(key)? {
            Value::Number(v) => Some(v),
            Value::Integer(n) => Some(n as f64),
            _ => None,
        }
    }

    fn read_choice(&mut self, key: Key) -> Option<usize> {
        match self.read(key)? {
            Value::Choice(i) => Some(i),
            _ => None,
        }
    }

    fn read_edge(&mut self, key: Key) -> Option<Edge> {
        match self.read(key)? {
            Value::Edge(e) => Some(e),
            _ => None,
        }
    }

    /// A frequency edge: one value, or `lo,hi` for band-pass.
    fn edge(&mut self, key: Key, text: &str) -> Option<Edge> {
        let parts: Vec<&str> = text.split(',').collect();
        let read = |t: &str| check_frequency(t, TARGET_HZ, "an edge").ok();
        let range = range_text(TARGET_HZ);
        let text = quoted(text);
        match (self.class, parts.as_slice()) {
            (ResponseClass::BandPass | ResponseClass::BandStop, [lo, hi]) => {
                match (read(lo), read(hi)) {
                    (Some(lo), Some(hi)) if lo < hi => Some(Edge::Pair(lo, hi)),
                    _ => {
                        self.fail(key, format!("{text} is not accepted; band-pass and band-stop need two edges lo,hi in Hz with lo < hi ({range})"));
                        None
                    }
                }
            }
            (ResponseClass::BandPass | ResponseClass::BandStop, _) => {
                self.fail(
                    key,
                    format!("{text} is not accepted; band-pass and band-stop need two edges lo,hi in Hz"),
                );
                None
            }
            (_, [one]) => match read(one) {
                Some(v) => Some(Edge::Single(v)),
                None => {
                    self.fail(key, format!("{text} is not accepted; low- and high-pass take one edge in Hz, {range}"));
                    None
                }
            },
            _ => {
                self.fail(key, format!("{text} is not accepted; low- and high-pass take one edge in Hz (two edges lo,hi are for band-pass)"));
                None
            }
        }
    }

    /// `REF:value` pairs separated by commas (`R3:4k7,C2:10n`).
    fn part_list(
        &mut self,
        key: Key,
        text: &str,
        lo: f64,
        hi: f64,
        what: &str,
    ) -> Vec<(String, f64)> {
        let mut list: Vec<(String, f64)> = Vec::new();
        for item in text.split(',').filter(|s| !s.trim().is_empty()) {
            let Some((reference, value)) = item.split_once(':') else {
                self.fail(
                    key,
                    format!(
                        "{} is not accepted; write REF:value, for example R3:4k7",
                        quoted(item)
                    ),
                );
                continue;
            };
            let reference = reference.trim().to_ascii_uppercase();
            let ref_ok = reference.len() >= 2
                && reference.len() <= MAX_REFERENCE_CHARS
                && matches!(reference.as_bytes()[0], b'R' | b'C')
                && reference[1..].chars().all(|c| c.is_ascii_digit());
            if !ref_ok {
                self.fail(
                    key,
                    format!(
                        "{} is not a part reference; use R1, C2 … (at most {MAX_REFERENCE_CHARS} characters)",
                        quoted(&reference)
                    ),
                );
                continue;
            }
            match si(value) {
                Ok(v) if v != 0.0 && !v.is_normal() => self.fail(
                    key,
                    format!(
                        "{reference}: {} is too small to compute with (a subnormal number); {what} accepts {} to {}",
                        quoted(value.trim()),
                        shown_number(lo),
                        shown_number(hi)
                    ),
                ),
                Ok(v) if v >= lo && v <= hi => {
                    list.retain(|(r, _)| *r != reference);
                    list.push((reference, v));
                }
                Ok(v) => self.fail(
                    key,
                    format!(
                        "{reference}: {} is out of range; {what} accepts {} to {}",
                        shown_number(v),
                        shown_number(lo),
                        shown_number(hi)
                    ),
                ),
                Err(e) => self.fail(key, format!("{reference}: {e}")),
            }
        }
        list
    }

    fn stage_order(&mut self, text: &str) -> Option<StageOrder> {
        match text.trim().to_ascii_lowercase().as_str() {
            "q-up" => Some(StageOrder::AscendingQ),
            "q-down" => Some(StageOrder::DescendingQ),
            list => {
                let numbers: Result<Vec<usize>, _> =
                    list.split(',').map(|s| s.trim().parse::<usize>()).collect();
                match numbers {
                    Ok(n) if !n.is_empty() && n.len() <= MAX_ORDER => Some(StageOrder::Explicit(n)),
                    _ => {
                        self.fail(Key::StageOrder, format!("{} is not accepted; use q-up, q-down or a list of stage numbers such as 2,1,3", quoted(text)));
                        None
                    }
                }
            }
        }
    }

    fn read_state(&mut self) -> LinkState {
        let mut state = LinkState::default();
        let class = self
            .read_choice(Key::Resp)
            .map(|i| keys::CLASSES[i].1)
            .unwrap_or(ResponseClass::LowPass);
        self.class = class;
        let ripple = self.read_number(Key::Ripple);
        let family_index = self.read_choice(Key::Family);
        let order = self.read_number(Key::Order).map(|n| n as usize);
        let fc = self.read_number(Key::Fc);
        let bw = self.read_number(Key::Bw);
        let with_zeros = matches!(
            family_index.map(|i| FAMILY_NAMES[i]),
            Some("inverse-chebyshev" | "elliptic")
        );
        // Inverse Chebyshev and elliptic read stopdepth alone (no edges) as their equiripple
        // depth; with edges it is the mask's depth, as for every family.
        let edges_given = [
            Key::PassEdge,
            Key::StopEdge,
            Key::Fsample,
            Key::Adcbits,
            Key::Fsignal,
        ]
        .iter()
        .any(|k| self.given(*k));
        let family_depth = if with_zeros && !edges_given {
            self.read_number(Key::StopDepth)
        } else {
            None
        };
        let mask = if family_depth.is_some() {
            None
        } else {
            self.read_mask(class, &mut state)
        };
        if let Some(i) = self.read_choice(Key::Margin) {
            state.requirement.margin = MARGINS[i].1;
        }

        let ripple_db = match (ripple, &mask) {
            (Some(r), _) => r,
            // In specification mode the ripple takes half the loss allowed at the passband edge:
            // a ripple equal to the allowance leaves nothing for part tolerances, so the board
            // as built sits on its limit (the composer says how much margin is left).
            (None, Some(m)) if (0.02..=6.0).contains(&m.apass_db) => m.apass_db / 2.0,
            _ => DEFAULT_RIPPLE_DB,
        };
        let astop_db = family_depth
            .or(mask.map(|m| m.astop_db))
            .unwrap_or(crate::prototype::DEFAULT_STOP_DEPTH_DB);
        let family = match family_index.map(|i| FAMILY_NAMES[i]) {
            Some("chebyshev") => Family::Chebyshev { ripple_db },
            Some("bessel") => Family::Bessel,
            Some("linkwitz-riley") => Family::LinkwitzRiley,
            Some("critical") => Family::Critical,
            Some("inverse-chebyshev") => Family::InverseChebyshev { astop_db },
            Some("elliptic") => Family::Elliptic {
                ripple_db,
                astop_db,
            },
            _ => Family::Butterworth,
        };
        if let Family::Elliptic {
            ripple_db,
            astop_db,
        } = family
        {
            if astop_db <= ripple_db {
                self.fail(
                    Key::StopDepth,
                    format!("{astop_db} dB is not above the ripple {ripple_db} dB; an elliptic stopband must be deeper than its passband ripple"),
                );
            }
        }
        if ripple.is_some() && family.ripple_db().is_none() {
            self.notes
                .push("ripple: only Chebyshev and elliptic use a ripple; ignored".into());
        }
        let order = match order {
            Some(n) if class.is_band() && n % 2 == 1 => {
                self.fail(Key::Order, format!("{n} is not accepted; a band-pass or band-stop order counts the poles of the whole filter and is even, 2 to {MAX_ORDER}"));
                None
            }
            Some(n)
                if family == Family::LinkwitzRiley
                    && class != ResponseClass::BandPass
                    && n % 2 == 1 =>
            {
                self.fail(
                    Key::Order,
                    format!(
                        "{n} is not accepted; Linkwitz-Riley orders are even, 2 to {MAX_ORDER}"
                    ),
                );
                None
            }
            Some(n)
                if family == Family::LinkwitzRiley
                    && class == ResponseClass::BandPass
                    && n % 4 != 0 =>
            {
                self.fail(Key::Order, format!("{n} is not accepted; a Linkwitz-Riley band-pass needs an even prototype, so its order is a multiple of 4, up to {MAX_ORDER}"));
                None
            }
            other => other,
        };
        state.requirement.class = class;
        state.requirement.family = family;
        state.requirement.mask = mask;
        state.requirement.order = match (order, &mask) {
            (Some(n), _) => OrderChoice::Fixed(n),
            // A bad order with a mask still designs from the mask; without one, the default.
            (None, Some(_)) => OrderChoice::FromMask,
            (None, None) => OrderChoice::Fixed(match class {
                ResponseClass::BandPass if family == Family::LinkwitzRiley => 8,
                _ => DEFAULT_ORDER,
            }),
        };
        let from_mask = state.requirement.order == OrderChoice::FromMask;
        state.requirement.fc_hz = match (fc, from_mask, mask.is_some()) {
            (_, true, _) => {
                if fc.is_some() {
                    self.notes.push(format!(
                        "{}: the limits set the cutoff when the order follows from them; ignored",
                        name(Key::Fc)
                    ));
                }
                None
            }
            (Some(f), false, _) => Some(f),
            // A fixed order with a mask and no fc: the cutoff follows from the mask.
            (None, false, true) => None,
            (None, false, false) => Some(DEFAULT_FC_HZ),
        };
        state.requirement.bw_hz = match class {
            ResponseClass::BandPass | ResponseClass::BandStop
                if state.requirement.fc_hz.is_some() =>
            {
                Some(bw.unwrap_or_else(|| state.requirement.fc_hz.unwrap_or(DEFAULT_FC_HZ)))
            }
            ResponseClass::BandPass | ResponseClass::BandStop => None,
            _ => {
                if bw.is_some() {
                    self.notes.push(format!(
                        "{}: only band-pass and band-stop use a bandwidth; ignored",
                        name(Key::Bw)
                    ));
                }
                None
            }
        };

        // The margin only moves a band that follows from the limits.
        if self.given(Key::Margin) && state.requirement.fc_hz.is_some() {
            self.notes.push(format!(
                "{}: the band is set by {} (or there are no limits); ignored",
                name(Key::Margin),
                name(Key::Fc)
            ));
        }

        // Every other key sets one field, as its row says.
        for row in TABLE.iter() {
            if let Some(apply) = row.apply {
                if let Some(value) = self.read(row.key) {
                    apply(&mut state, value);
                }
            }
        }
        state
    }

    /// The specification mask: explicit keys, filled by the anti-alias helper where absent.
    fn read_mask(&mut self, class: ResponseClass, state: &mut LinkState) -> Option<Mask> {
        let fsample = self.read_number(Key::Fsample);
        let bits = self.read_number(Key::Adcbits);
        let fsignal = self.read_number(Key::Fsignal);
        let helper = [Key::Fsample, Key::Adcbits, Key::Fsignal];
        let converter = match (fsample, bits, fsignal) {
            (Some(fs), Some(n), Some(b)) if fs > 2.0 * b => Some(Converter {
                sample_rate_hz: fs,
                bits: n as u32,
                signal_band_hz: b,
            }),
            (Some(fs), Some(_), Some(b)) => {
                self.fail(Key::Fsignal, format!("{b} Hz is not below half the sample rate ({} Hz); the helper needs fsample > 2·fsignal", fs / 2.0));
                None
            }
            (None, None, None) => None,
            _ => {
                if !self.failed_on(&helper) {
                    let missing: Vec<Key> = [
                        (Key::Fsample, fsample.is_none()),
                        (Key::Adcbits, bits.is_none()),
                        (Key::Fsignal, fsignal.is_none()),
                    ]
                    .iter()
                    .filter(|(_, m)| *m)
                    .map(|(k, _)| *k)
                    .collect();
                    self.fail(
                        missing[0],
                        format!(
                            "the converter helper needs fsample, adcbits and fsignal together; missing {}",
                            names(&missing)
                        ),
                    );
                }
                None
            }
        };
        if converter.is_some() && class != ResponseClass::LowPass {
            self.notes.push("fsample, adcbits, fsignal: the converter helper fills low-pass limits only; ignored".into());
        }
        let converter = converter.filter(|_| class == ResponseClass::LowPass);
        state.converter = converter;

        let limits = [Key::PassEdge, Key::StopEdge, Key::PassLoss, Key::StopDepth];
        let pass = self
            .read_edge(Key::PassEdge)
            .or(converter.map(|c| Edge::Single(c.signal_band_hz)));
        let stop = self
            .read_edge(Key::StopEdge)
            .or(converter.map(|c| Edge::Single(c.stop_edge_hz())));
        let apass = self.read_number(Key::PassLoss);
        let astop = self
            .read_number(Key::StopDepth)
            .or(converter.map(|c| c.stop_depth_db()));
        let any_given = limits.iter().any(|k| self.given(*k));
        let (pass, stop, astop) = match (pass, stop, astop) {
            (Some(p), Some(s), Some(a)) => (p, s, a),
            _ => {
                if any_given && !self.failed_on(&limits) {
                    let missing: Vec<Key> = [
                        (Key::PassEdge, pass.is_none()),
                        (Key::StopEdge, stop.is_none()),
                        (Key::StopDepth, astop.is_none()),
                    ]
                    .iter()
                    .filter(|(_, m)| *m)
                    .map(|(k, _)| *k)
                    .collect();
                    self.fail(
                        missing[0],
                        format!(
                            "the limits need {}, {} and {} together ({} defaults to {DEFAULT_APASS_DB} dB); missing {}",
                            name(Key::PassEdge),
                            name(Key::StopEdge),
                            name(Key::StopDepth),
                            name(Key::PassLoss),
                            names(&missing)
                        ),
                    );
                }
                return None;
            }
        };
        let apass_db = apass.unwrap_or(DEFAULT_APASS_DB);
        if astop <= apass_db {
            self.fail(
                Key::StopDepth,
                format!(
                    "{astop} dB is not above the passband loss {} = {apass_db} dB; the stopband must be attenuated more than the passband",
                    name(Key::PassLoss)
                ),
            );
            return None;
        }
        let consistent = match (class, pass, stop) {
            (ResponseClass::LowPass, Edge::Single(p), Edge::Single(s)) => s > p,
            (ResponseClass::HighPass, Edge::Single(p), Edge::Single(s)) => s < p,
            (ResponseClass::BandPass, Edge::Pair(pl, ph), Edge::Pair(sl, sh)) => sl < pl && sh > ph,
            (ResponseClass::BandStop, Edge::Pair(pl, ph), Edge::Pair(sl, sh)) => pl < sl && sh < ph,
            _ => false,
        };
        if !consistent {
            let rule = match class {
                ResponseClass::LowPass => {
                    "a low-pass stopband edge lies above the passband edge".to_string()
                }
                ResponseClass::HighPass => {
                    "a high-pass stopband edge lies below the passband edge".to_string()
                }
                ResponseClass::BandPass => format!(
                    "band-pass stopband edges lie outside the passband edges ({s} lo < {p} lo, {s} hi > {p} hi)",
                    s = name(Key::StopEdge),
                    p = name(Key::PassEdge)
                ),
                ResponseClass::BandStop => format!(
                    "band-stop stopband edges lie inside the passband edges ({p} lo < {s} lo, {s} hi < {p} hi)",
                    s = name(Key::StopEdge),
                    p = name(Key::PassEdge)
                ),
            };
            self.fail(
                Key::StopEdge,
                if class == ResponseClass::BandStop {
                    format!("the stopband edges do not lie inside the passband edges; {rule}")
                } else {
                    format!("the stopband edge lies inside the passband; {rule}")
                },
            );
            return None;
        }
        Some(Mask {
            pass,
            apass_db,
            stop,
            astop_db: astop,
        })
    }

    /// True when one of `keys` already has an error (so a summary error would repeat it).
    fn failed_on(&self, keys: &[Key]) -> bool {
        self.errors
            .iter()
            .any(|e| keys.iter().any(|k| e.key == name(*k)))
    }
}

/// Key names joined for a message.
fn names(keys: &[Key]) -> String {
    keys.iter().map(|k| name(*k)).collect::<Vec<_>>().join(", ")
}

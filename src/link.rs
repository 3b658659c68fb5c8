//! The share link: the query string that carries a whole design, read into validated values.
//!
//! The page and the command line read the same keys with the same [`parse`]. Parsing never stops
//! at the first problem: every key is read, a bad value falls back to its default and is reported
//! as an [`InputError`] naming the key, and unknown keys are listed. The page loads what is valid
//! and lists the rest; the command line refuses a link with any error (exit 2) and warns about
//! unknown keys. A link whose `v` is newer than [`FORMAT_VERSION`] is refused by both.
//!
//! Keys, their accepted values and defaults are documented in the README (section "Link keys").

use crate::choices::Rounding;
use crate::error::InputError;
use crate::eseries::Series;
use crate::opamp::OpAmp;
use crate::sections::StageOrder;
use crate::spec::{Edge, Family, MarginPlacement, Mask, OrderChoice, Requirement, ResponseClass};
use crate::topology::Topology;
use crate::units::parse_si;
use serde::Serialize;

/// The link format this build reads and writes (`v=1`).
pub const FORMAT_VERSION: u32 = 1;

/// Highest order a design may have (brief: orders 1–20).
pub const MAX_ORDER: usize = 20;

/// Order used when neither `order` nor a specification is given.
pub const DEFAULT_ORDER: usize = 4;

/// Cutoff used when neither `fc` nor a specification is given, Hz.
pub const DEFAULT_FC_HZ: f64 = 1000.0;

/// Attenuation allowed at the passband edge when `apass` is absent, dB.
pub const DEFAULT_APASS_DB: f64 = 1.0;

/// The distribution of part values in the tolerance study (`dist`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Distribution {
    /// Gaussian with the tolerance at `sigmas` standard deviations (`gauss`, the default).
    Gaussian,
    /// Uniform over ± the tolerance (`uniform`).
    Uniform,
}

/// The tolerance study settings.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Study {
    /// Number of Monte Carlo runs, 1–100,000 (`runs`, default 1000).
    pub runs: usize,
    /// Seed of the random generator (`seed`, default 1).
    pub seed: u64,
    /// Distribution of part values (`dist`).
    pub distribution: Distribution,
    /// How many standard deviations the tolerance spans for Gaussian parts (`sigmas`, default 3).
    pub sigmas: f64,
}

/// Signal levels and limits used by the headroom, slew, noise and op-amp checks.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Signal {
    /// Input amplitude, V peak (`vin`, default 1 V).
    pub vin_pk: f64,
    /// Largest output swing of an op amp, V peak (`swing`, default 10 V).
    pub swing_pk: f64,
    /// Allowed drift of f0 or Q caused by the op amp, % (`drift`, default 1 %).
    pub drift_pct: f64,
    /// Band over which noise is integrated, Hz (`noiseband=lo,hi`); `None` = the plot span.
    pub noise_band_hz: Option<(f64, f64)>,
}

/// The converter that the anti-alias helper fills the specification from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Converter {
    /// Sample rate, Hz (`fsample`).
    pub sample_rate_hz: f64,
    /// Resolution, bits (`adcbits`).
    pub bits: u32,
    /// Signal bandwidth to keep, Hz (`fsignal`).
    pub signal_band_hz: f64,
}

impl Converter {
    /// Stopband edge: the lowest frequency that aliases into the signal band, fs − B (common
    /// practice).
    pub fn stop_edge_hz(&self) -> f64 {
        self.sample_rate_hz - self.signal_band_hz
    }

    /// Attenuation that brings an alias below one LSB: 6.02·N + 1.76 dB (the ideal converter's
    /// SNR; common practice).
    pub fn stop_depth_db(&self) -> f64 {
        6.02 * self.bits as f64 + 1.76
    }
}

/// Everything a link says, validated.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LinkState {
    /// The filter requirement.
    pub requirement: Requirement,
    /// Second-order topology (`topo`, default `sk`).
    pub topology: Topology,
    /// Resistor series (`rser`, default `e96`).
    pub r_series: Series,
    /// Capacitor series (`cser`, default `e12`).
    pub c_series: Series,
    /// Resistor tolerance, % (`rtol`, default 1).
    pub rtol_pct: f64,
    /// Capacitor tolerance, % (`ctol`, default 5).
    pub ctol_pct: f64,
    /// The op-amp model (`gbw`, `a0`, `rout`, `vnoise`, `inoise`, `slew`).
    pub op_amp: OpAmp,
    /// Resistor impedance level the stages aim at, Ω (`rlevel`); `None` = automatic.
    pub r_level_ohm: Option<f64>,
    /// Capacitor ratio of the second-order stages (`cratio`); `None` = the topology's default.
    pub c_ratio: Option<f64>,
    /// Resistor ratio of the second-order stages (`rratio`); `None` = the topology's default.
    pub r_ratio: Option<f64>,
    /// How standard values are chosen (`round`).
    pub rounding: Rounding,
    /// Parts typed over by the user (`set=R3:4k7,C2:10n`): reference and value in SI units.
    pub overrides: Vec<(String, f64)>,
    /// Per-part tolerance overrides (`tolset=R3:0.1,C2:1`): reference and tolerance in %.
    pub tolerance_overrides: Vec<(String, f64)>,
    /// Stage order (`stageorder`).
    pub stage_order: StageOrder,
    /// Tolerance study settings (`runs`, `seed`, `dist`, `sigmas`).
    pub study: Study,
    /// Signal levels (`vin`, `swing`, `drift`, `noiseband`).
    pub signal: Signal,
    /// Frequency span of the plots and the sweep, Hz (`span=lo,hi`); `None` = automatic.
    pub span_hz: Option<(f64, f64)>,
    /// The converter behind the anti-alias helper, when given (`fsample`, `adcbits`, `fsignal`).
    pub converter: Option<Converter>,
    /// A name for the design (`title`), at most 120 characters; only ever shown as text.
    pub title: Option<String>,
}

impl Default for LinkState {
    fn default() -> Self {
        LinkState {
            requirement: Requirement {
                class: ResponseClass::LowPass,
                family: Family::Butterworth,
                order: OrderChoice::Fixed(DEFAULT_ORDER),
                fc_hz: Some(DEFAULT_FC_HZ),
                bw_hz: None,
                mask: None,
                gain_db: 0.0,
                margin: MarginPlacement::Split,
            },
            topology: Topology::SallenKey,
            r_series: Series::E96,
            c_series: Series::E12,
            rtol_pct: 1.0,
            ctol_pct: 5.0,
            op_amp: OpAmp::GENERIC,
            r_level_ohm: None,
            c_ratio: None,
            r_ratio: None,
            rounding: Rounding::Search,
            overrides: Vec::new(),
            tolerance_overrides: Vec::new(),
            stage_order: StageOrder::AscendingQ,
            study: Study {
                runs: 1000,
                seed: 1,
                distribution: Distribution::Gaussian,
                sigmas: 3.0,
            },
            signal: Signal {
                vin_pk: 1.0,
                swing_pk: 10.0,
                drift_pct: 1.0,
                noise_band_hz: None,
            },
            span_hz: None,
            converter: None,
            title: None,
        }
    }
}

/// The outcome of reading a link: the state (with defaults where a value was bad), the problems,
/// the unknown keys and notes about keys that were read but had no effect.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LinkReport {
    /// The state built from every valid key.
    pub state: LinkState,
    /// One error per bad key (the key's default was used instead).
    pub errors: Vec<InputError>,
    /// Keys this version does not know (ignored).
    pub unknown_keys: Vec<String>,
    /// Keys that were valid but had no effect, with the reason.
    pub notes: Vec<String>,
}

impl LinkReport {
    /// True when the link must be refused as a whole (a `v` newer than this build).
    pub fn refused(&self) -> bool {
        self.errors.iter().any(|e| e.key == "v")
    }
}

/// Every key this version reads.
pub const KEYS: [&str; 44] = [
    "v",
    "resp",
    "family",
    "order",
    "fc",
    "bw",
    "ripple",
    "fpass",
    "apass",
    "fstop",
    "astop",
    "margin",
    "gain",
    "topo",
    "rser",
    "cser",
    "rtol",
    "ctol",
    "gbw",
    "a0",
    "rout",
    "vnoise",
    "inoise",
    "slew",
    "rlevel",
    "cratio",
    "rratio",
    "round",
    "set",
    "tolset",
    "stageorder",
    "runs",
    "seed",
    "dist",
    "sigmas",
    "vin",
    "swing",
    "drift",
    "noiseband",
    "span",
    "fsample",
    "adcbits",
    "fsignal",
    "title",
];

/// Takes the query part of a link: everything after the first `?` (or the whole text when it has
/// none), without a `#fragment`.
pub fn query_of(link: &str) -> &str {
    let link = link.trim();
    let after = match link.find('?') {
        Some(i) => &link[i + 1..],
        None => link,
    };
    match after.find('#') {
        Some(i) => &after[..i],
        None => after,
    }
}

/// Reads a link (a whole URL or only its query string).
///
/// Never fails and never panics: problems are collected in the report.
pub fn parse(link: &str) -> LinkReport {
    let mut pairs: Vec<(String, String)> = Vec::new();
    let mut unknown_keys = Vec::new();
    for (key, value) in form_urlencoded::parse(query_of(link).as_bytes()) {
        if key.is_empty() && value.is_empty() {
            continue;
        }
        if KEYS.contains(&key.as_ref()) {
            // A repeated key: the last one counts, as in most query-string readers.
            pairs.retain(|(k, _)| *k != key);
            pairs.push((key.into_owned(), value.into_owned()));
        } else if !unknown_keys.contains(&key.to_string()) {
            unknown_keys.push(key.into_owned());
        }
    }
    let mut reader = Reader {
        pairs,
        errors: Vec::new(),
        notes: Vec::new(),
    };
    let state = reader.read_state();
    LinkReport {
        state,
        errors: reader.errors,
        unknown_keys,
        notes: reader.notes,
    }
}

struct Reader {
    pairs: Vec<(String, String)>,
    errors: Vec<InputError>,
    notes: Vec<String>,
}

impl Reader {
    fn raw(&self, key: &str) -> Option<&str> {
        self.pairs
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.as_str())
    }

    fn fail(&mut self, key: &str, message: String) {
        self.errors.push(InputError::new(key, message));
    }

    /// A number within `[lo, hi]`, in engineering notation.
    fn number(&mut self, key: &str, lo: f64, hi: f64, what: &str) -> Option<f64> {
        let text = self.raw(key)?.to_string();
        match parse_si(&text) {
            Ok(v) if v >= lo && v <= hi => Some(v),
            Ok(v) => {
                self.fail(
                    key,
                    format!("{v} is out of range; {what} accepts {lo} to {hi}"),
                );
                None
            }
            Err(e) => {
                self.fail(key, format!("{e} ({what})"));
                None
            }
        }
    }

    /// A number that may also be `ideal` (infinite).
    fn number_or_ideal(&mut self, key: &str, lo: f64, hi: f64, what: &str) -> Option<f64> {
        match self.raw(key) {
            Some(t) if t.trim().eq_ignore_ascii_case("ideal") => Some(f64::INFINITY),
            _ => self.number(key, lo, hi, what),
        }
    }

    fn integer(&mut self, key: &str, lo: u64, hi: u64, what: &str) -> Option<u64> {
        let text = self.raw(key)?.trim().to_string();
        match text.parse::<u64>() {
            Ok(v) if v >= lo && v <= hi => Some(v),
            _ => {
                self.fail(
                    key,
                    format!("'{text}' is not accepted; {what} is a whole number from {lo} to {hi}"),
                );
                None
            }
        }
    }

    fn choice<T: Copy>(&mut self, key: &str, options: &[(&str, T)]) -> Option<T> {
        let text = self.raw(key)?.trim().to_string();
        let lower = text.to_ascii_lowercase();
        match options.iter().find(|(name, _)| *name == lower) {
            Some((_, v)) => Some(*v),
            None => {
                let names: Vec<&str> = options.iter().map(|(n, _)| *n).collect();
                self.fail(
                    key,
                    format!("'{text}' is not accepted; use one of {}", names.join(", ")),
                );
                None
            }
        }
    }

    /// A frequency edge: one value, or `lo,hi` for band-pass.
    fn edge(&mut self, key: &str, class: ResponseClass) -> Option<Edge> {
        let text = self.raw(key)?.to_string();
        let parts: Vec<&str> = text.split(',').collect();
        let read = |t: &str| parse_si(t).ok().filter(|v| *v >= 1e-3 && *v <= 1e9);
        match (class, parts.as_slice()) {
            (ResponseClass::BandPass, [lo, hi]) => match (read(lo), read(hi)) {
                (Some(lo), Some(hi)) if lo < hi => Some(Edge::Pair(lo, hi)),
                _ => {
                    self.fail(key, format!("'{text}' is not accepted; band-pass needs two edges lo,hi in Hz with lo < hi (1 mHz to 1 GHz)"));
                    None
                }
            },
            (ResponseClass::BandPass, _) => {
                self.fail(
                    key,
                    format!("'{text}' is not accepted; band-pass needs two edges lo,hi in Hz"),
                );
                None
            }
            (_, [one]) => match read(one) {
                Some(v) => Some(Edge::Single(v)),
                None => {
                    self.fail(key, format!("'{text}' is not accepted; low- and high-pass take one edge in Hz, 1 mHz to 1 GHz"));
                    None
                }
            },
            _ => {
                self.fail(key, format!("'{text}' is not accepted; low- and high-pass take one edge in Hz (two edges lo,hi are for band-pass)"));
                None
            }
        }
    }

    /// A pair `lo,hi` of positive frequencies.
    fn band(&mut self, key: &str, what: &str) -> Option<(f64, f64)> {
        let text = self.raw(key)?.to_string();
        let parts: Vec<Result<f64, String>> = text.split(',').map(parse_si).collect();
        match parts.as_slice() {
            [Ok(lo), Ok(hi)] if *lo > 0.0 && lo < hi && *hi <= 1e10 => Some((*lo, *hi)),
            _ => {
                self.fail(
                    key,
                    format!("'{text}' is not accepted; {what} is lo,hi in Hz with 0 < lo < hi"),
                );
                None
            }
        }
    }

    /// `REF:value` pairs separated by commas (`R3:4k7,C2:10n`).
    fn part_list(&mut self, key: &str, lo: f64, hi: f64, what: &str) -> Vec<(String, f64)> {
        let Some(text) = self.raw(key).map(str::to_string) else {
            return Vec::new();
        };
        let mut list: Vec<(String, f64)> = Vec::new();
        for item in text.split(',').filter(|s| !s.trim().is_empty()) {
            let Some((reference, value)) = item.split_once(':') else {
                self.fail(
                    key,
                    format!("'{item}' is not accepted; write REF:value, for example R3:4k7"),
                );
                continue;
            };
            let reference = reference.trim().to_ascii_uppercase();
            let ref_ok = reference.len() >= 2
                && matches!(reference.as_bytes()[0], b'R' | b'C')
                && reference[1..].chars().all(|c| c.is_ascii_digit());
            if !ref_ok {
                self.fail(
                    key,
                    format!("'{reference}' is not a part reference; use R1, C2 …"),
                );
                continue;
            }
            match parse_si(value) {
                Ok(v) if v >= lo && v <= hi => {
                    list.retain(|(r, _)| *r != reference);
                    list.push((reference, v));
                }
                Ok(v) => self.fail(
                    key,
                    format!("{reference}: {v} is out of range; {what} accepts {lo} to {hi}"),
                ),
                Err(e) => self.fail(key, format!("{reference}: {e}")),
            }
        }
        list
    }

    fn read_state(&mut self) -> LinkState {
        let mut state = LinkState::default();
        if let Some(text) = self.raw("v").map(str::to_string) {
            match text.trim().parse::<u32>() {
                Ok(FORMAT_VERSION) => {}
                Ok(v) if v > FORMAT_VERSION => self.fail(
                    "v",
                    format!("this link has format v={v}, made by a newer Rolloff; this version reads v={FORMAT_VERSION}"),
                ),
                _ => self.fail("v", format!("'{text}' is not accepted; the format version is {FORMAT_VERSION}")),
            }
        }
        let class = self
            .choice(
                "resp",
                &[
                    ("lp", ResponseClass::LowPass),
                    ("hp", ResponseClass::HighPass),
                    ("bp", ResponseClass::BandPass),
                ],
            )
            .unwrap_or(ResponseClass::LowPass);
        let ripple = self.number("ripple", 0.01, 3.0, "Chebyshev passband ripple in dB");
        let family_key = self.choice(
            "family",
            &[
                ("butterworth", 0),
                ("chebyshev", 1),
                ("bessel", 2),
                ("linkwitz-riley", 3),
                ("critical", 4),
            ],
        );
        let order = self
            .integer("order", 1, MAX_ORDER as u64, "order")
            .map(|n| n as usize);
        let fc = self.number("fc", 1e-3, 1e9, "cutoff in Hz");
        let bw = self.number("bw", 1e-3, 1e9, "bandwidth in Hz");
        let gain = self.number("gain", -40.0, 60.0, "overall passband gain in dB");
        state.requirement.gain_db = gain.unwrap_or(0.0);
        let mask = self.read_mask(class, &mut state);
        if let Some(m) = self.choice(
            "margin",
            &[
                ("split", MarginPlacement::Split),
                ("pass", MarginPlacement::Pass),
                ("stop", MarginPlacement::Stop),
            ],
        ) {
            state.requirement.margin = m;
        }

        let ripple_db = match (ripple, &mask) {
            (Some(r), _) => r,
            // In specification mode the ripple is the loss allowed at the passband edge, when
            // that is a valid ripple.
            (None, Some(m)) if (0.01..=3.0).contains(&m.apass_db) => m.apass_db,
            _ => 0.5,
        };
        let family = match family_key {
            Some(1) => Family::Chebyshev { ripple_db },
            Some(2) => Family::Bessel,
            Some(3) => Family::LinkwitzRiley,
            Some(4) => Family::Critical,
            _ => Family::Butterworth,
        };
        if ripple.is_some() && !matches!(family, Family::Chebyshev { .. }) {
            self.notes
                .push("ripple: only Chebyshev uses a ripple; ignored".into());
        }
        let order = match order {
            Some(n) if class == ResponseClass::BandPass && n % 2 == 1 => {
                self.fail("order", format!("{n} is not accepted; a band-pass order counts the poles of the whole filter and is even, 2 to {MAX_ORDER}"));
                None
            }
            Some(n)
                if family == Family::LinkwitzRiley
                    && class != ResponseClass::BandPass
                    && n % 2 == 1 =>
            {
                self.fail(
                    "order",
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
                self.fail("order", format!("{n} is not accepted; a Linkwitz-Riley band-pass needs an even prototype, so its order is a multiple of 4, up to {MAX_ORDER}"));
                None
            }
            other => other,
        };
        state.requirement.class = class;
        state.requirement.family = family;
        state.requirement.mask = mask;
        state.requirement.order = match (order, &mask) {
            (Some(n), _) => OrderChoice::Fixed(n),
            (None, Some(_)) if self.raw("order").is_none() => OrderChoice::FromMask,
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
                    self.notes.push(
                        "fc: the limits set the cutoff when the order follows from them; ignored"
                            .into(),
                    );
                }
                None
            }
            (Some(f), false, _) => Some(f),
            // A fixed order with a mask and no fc: the cutoff follows from the mask.
            (None, false, true) => None,
            (None, false, false) => Some(DEFAULT_FC_HZ),
        };
        state.requirement.bw_hz = match class {
            ResponseClass::BandPass if state.requirement.fc_hz.is_some() => {
                Some(bw.unwrap_or_else(|| state.requirement.fc_hz.unwrap_or(DEFAULT_FC_HZ)))
            }
            ResponseClass::BandPass => None,
            _ => {
                if bw.is_some() {
                    self.notes
                        .push("bw: only band-pass uses a bandwidth; ignored".into());
                }
                None
            }
        };

        // The margin only moves a band that follows from the limits.
        if self.raw("margin").is_some() && state.requirement.fc_hz.is_some() {
            self.notes
                .push("margin: the band is set by fc (or there are no limits); ignored".into());
        }

        self.read_build(&mut state);
        state
    }

    /// The specification mask: explicit keys, filled by the anti-alias helper where absent.
    fn read_mask(&mut self, class: ResponseClass, state: &mut LinkState) -> Option<Mask> {
        let fsample = self.number("fsample", 1e-3, 1e10, "converter sample rate in Hz");
        let bits = self.integer("adcbits", 1, 32, "converter resolution in bits");
        let fsignal = self.number("fsignal", 1e-3, 1e10, "signal bandwidth in Hz");
        let converter = match (fsample, bits, fsignal) {
            (Some(fs), Some(n), Some(b)) if fs > 2.0 * b => Some(Converter {
                sample_rate_hz: fs,
                bits: n as u32,
                signal_band_hz: b,
            }),
            (Some(fs), Some(_), Some(b)) => {
                self.fail("fsignal", format!("{b} Hz is not below half the sample rate ({} Hz); the helper needs fsample > 2·fsignal", fs / 2.0));
                None
            }
            (None, None, None) => None,
            _ => {
                if !self
                    .errors
                    .iter()
                    .any(|e| ["fsample", "adcbits", "fsignal"].contains(&e.key.as_str()))
                {
                    let missing: Vec<&str> = [
                        ("fsample", fsample.is_none()),
                        ("adcbits", bits.is_none()),
                        ("fsignal", fsignal.is_none()),
                    ]
                    .iter()
                    .filter(|(_, m)| *m)
                    .map(|(k, _)| *k)
                    .collect();
                    self.fail(missing[0], format!("the converter helper needs fsample, adcbits and fsignal together; missing {}", missing.join(", ")));
                }
                None
            }
        };
        if converter.is_some() && class != ResponseClass::LowPass {
            self.notes.push("fsample, adcbits, fsignal: the converter helper fills low-pass limits only; ignored".into());
        }
        let converter = converter.filter(|_| class == ResponseClass::LowPass);
        state.converter = converter;

        let pass = self
            .edge("fpass", class)
            .or(converter.map(|c| Edge::Single(c.signal_band_hz)));
        let stop = self
            .edge("fstop", class)
            .or(converter.map(|c| Edge::Single(c.stop_edge_hz())));
        let apass = self.number(
            "apass",
            1e-3,
            20.0,
            "attenuation allowed at the passband edge in dB",
        );
        let astop = self
            .number(
                "astop",
                1e-3,
                300.0,
                "attenuation required in the stopband in dB",
            )
            .or(converter.map(|c| c.stop_depth_db()));
        let any_given = ["fpass", "fstop", "apass", "astop"]
            .iter()
            .any(|k| self.raw(k).is_some());
        let (pass, stop, astop) = match (pass, stop, astop) {
            (Some(p), Some(s), Some(a)) => (p, s, a),
            _ => {
                let failed_already = self
                    .errors
                    .iter()
                    .any(|e| ["fpass", "fstop", "apass", "astop"].contains(&e.key.as_str()));
                if any_given && !failed_already {
                    let missing: Vec<&str> = [
                        ("fpass", pass.is_none()),
                        ("fstop", stop.is_none()),
                        ("astop", astop.is_none()),
                    ]
                    .iter()
                    .filter(|(_, m)| *m)
                    .map(|(k, _)| *k)
                    .collect();
                    self.fail(missing[0], format!("the limits need fpass, fstop and astop together (apass defaults to {DEFAULT_APASS_DB} dB); missing {}", missing.join(", ")));
                }
                return None;
            }
        };
        let apass_db = apass.unwrap_or(DEFAULT_APASS_DB);
        if astop <= apass_db {
            self.fail("astop", format!("{astop} dB is not above the passband loss apass = {apass_db} dB; the stopband must be attenuated more than the passband"));
            return None;
        }
        let consistent = match (class, pass, stop) {
            (ResponseClass::LowPass, Edge::Single(p), Edge::Single(s)) => s > p,
            (ResponseClass::HighPass, Edge::Single(p), Edge::Single(s)) => s < p,
            (ResponseClass::BandPass, Edge::Pair(pl, ph), Edge::Pair(sl, sh)) => sl < pl && sh > ph,
            _ => false,
        };
        if !consistent {
            let rule = match class {
                ResponseClass::LowPass => "a low-pass stopband edge lies above the passband edge",
                ResponseClass::HighPass => "a high-pass stopband edge lies below the passband edge",
                ResponseClass::BandPass => "band-pass stopband edges lie outside the passband edges (fstop lo < fpass lo, fstop hi > fpass hi)",
            };
            self.fail(
                "fstop",
                format!("the stopband edge lies inside the passband; {rule}"),
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

    fn read_build(&mut self, state: &mut LinkState) {
        if let Some(t) = self.choice(
            "topo",
            &[
                ("sk", Topology::SallenKey),
                ("mfb", Topology::MultipleFeedback),
            ],
        ) {
            state.topology = t;
        }
        let series = [
            ("e6", Series::E6),
            ("e12", Series::E12),
            ("e24", Series::E24),
            ("e48", Series::E48),
            ("e96", Series::E96),
            ("e192", Series::E192),
            ("exact", Series::Exact),
        ];
        if let Some(s) = self.choice("rser", &series) {
            state.r_series = s;
        }
        if let Some(s) = self.choice("cser", &series) {
            state.c_series = s;
        }
        if let Some(v) = self.number("rtol", 0.0, 50.0, "resistor tolerance in %") {
            state.rtol_pct = v;
        }
        if let Some(v) = self.number("ctol", 0.0, 50.0, "capacitor tolerance in %") {
            state.ctol_pct = v;
        }
        let op = &mut state.op_amp;
        let gbw = self.number_or_ideal("gbw", 1.0, 1e11, "op-amp gain-bandwidth in Hz (or ideal)");
        let a0 = self.number_or_ideal(
            "a0",
            0.0,
            300.0,
            "op-amp open-loop DC gain in dB (or ideal)",
        );
        let rout = self.number("rout", 0.0, 1e5, "op-amp output resistance in Ω");
        let vnoise = self.number("vnoise", 0.0, 1e-5, "op-amp voltage noise in V/√Hz");
        let inoise = self.number("inoise", 0.0, 1e-8, "op-amp current noise in A/√Hz");
        let slew = self.number_or_ideal("slew", 1.0, 1e12, "op-amp slew rate in V/s (or ideal)");
        op.gbw_hz = gbw.unwrap_or(op.gbw_hz);
        op.a0_db = a0.unwrap_or(op.a0_db);
        op.rout_ohm = rout.unwrap_or(op.rout_ohm);
        op.en_v_per_rthz = vnoise.unwrap_or(op.en_v_per_rthz);
        op.in_a_per_rthz = inoise.unwrap_or(op.in_a_per_rthz);
        op.slew_v_per_s = slew.unwrap_or(op.slew_v_per_s);

        state.r_level_ohm = self.number("rlevel", 10.0, 1e7, "resistor impedance level in Ω");
        state.c_ratio = self.number("cratio", 1e-3, 1e4, "capacitor ratio");
        state.r_ratio = self.number("rratio", 1e-3, 1e4, "resistor ratio");
        if let Some(r) = self.choice(
            "round",
            &[("nearest", Rounding::Nearest), ("search", Rounding::Search)],
        ) {
            state.rounding = r;
        }
        state.overrides = self.part_list("set", 1e-15, 1e9, "a part value (Ω or F)");
        state.tolerance_overrides = self.part_list("tolset", 0.0, 50.0, "a part tolerance in %");
        if let Some(text) = self.raw("stageorder").map(str::to_string) {
            match text.trim().to_ascii_lowercase().as_str() {
                "q-up" => state.stage_order = StageOrder::AscendingQ,
                "q-down" => state.stage_order = StageOrder::DescendingQ,
                list => {
                    let numbers: Result<Vec<usize>, _> =
                        list.split(',').map(|s| s.trim().parse::<usize>()).collect();
                    match numbers {
                        Ok(n) if !n.is_empty() && n.len() <= MAX_ORDER => state.stage_order = StageOrder::Explicit(n),
                        _ => self.fail("stageorder", format!("'{text}' is not accepted; use q-up, q-down or a list of stage numbers such as 2,1,3")),
                    }
                }
            }
        }
        if let Some(n) = self.integer("runs", 1, 100_000, "number of tolerance runs") {
            state.study.runs = n as usize;
        }
        if let Some(n) = self.integer("seed", 0, u64::MAX, "random seed") {
            state.study.seed = n;
        }
        if let Some(d) = self.choice(
            "dist",
            &[
                ("gauss", Distribution::Gaussian),
                ("uniform", Distribution::Uniform),
            ],
        ) {
            state.study.distribution = d;
        }
        if let Some(v) = self.number(
            "sigmas",
            1.0,
            6.0,
            "standard deviations spanned by the tolerance",
        ) {
            state.study.sigmas = v;
        }
        if let Some(v) = self.number("vin", 1e-9, 1e3, "input amplitude in V peak") {
            state.signal.vin_pk = v;
        }
        if let Some(v) = self.number("swing", 1e-3, 1e3, "op-amp output swing in V peak") {
            state.signal.swing_pk = v;
        }
        if let Some(v) = self.number("drift", 0.01, 50.0, "allowed f0 or Q drift in %") {
            state.signal.drift_pct = v;
        }
        state.signal.noise_band_hz = self.band("noiseband", "the noise band");
        state.span_hz = self.band("span", "the plot span");
        if let Some(text) = self.raw("title").map(str::to_string) {
            let title: String = text.chars().filter(|c| !c.is_control()).take(120).collect();
            state.title = Some(title).filter(|t| !t.trim().is_empty());
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(link: &str, expect: impl Fn(&LinkReport)) {
        let report = parse(link);
        expect(&report);
    }

    #[test]
    fn defaults_without_keys() {
        check("", |r| {
            assert!(r.errors.is_empty());
            assert_eq!(r.state, LinkState::default());
        });
    }

    #[test]
    fn reads_a_whole_url_with_a_fragment() {
        check(
            "https://example.invalid/rolloff/?v=1&resp=hp&fc=2k2&order=3#stages",
            |r| {
                assert!(r.errors.is_empty(), "{:?}", r.errors);
                assert_eq!(r.state.requirement.class, ResponseClass::HighPass);
                assert_eq!(r.state.requirement.fc_hz, Some(2200.0));
                assert_eq!(r.state.requirement.order, OrderChoice::Fixed(3));
            },
        );
    }

    #[test]
    fn a_mask_without_order_sets_order_mode() {
        check(
            "fpass=1k&apass=0.5&fstop=3k&astop=40&family=chebyshev",
            |r| {
                assert!(r.errors.is_empty(), "{:?}", r.errors);
                assert_eq!(r.state.requirement.order, OrderChoice::FromMask);
                assert_eq!(
                    r.state.requirement.family,
                    Family::Chebyshev { ripple_db: 0.5 }
                );
                assert_eq!(r.state.requirement.fc_hz, None);
            },
        );
    }

    #[test]
    fn the_converter_helper_fills_the_mask() {
        // 2 kS/s, 24 bits, 500 Hz band: stop edge 1500 Hz, depth 6.02·24 + 1.76 = 146.24 dB.
        check("fsample=2k&adcbits=24&fsignal=500", |r| {
            assert!(r.errors.is_empty(), "{:?}", r.errors);
            let mask = r.state.requirement.mask.expect("mask");
            assert_eq!(mask.pass, Edge::Single(500.0));
            assert_eq!(mask.stop, Edge::Single(1500.0));
            assert!((mask.astop_db - 146.24).abs() < 1e-9);
        });
    }

    #[test]
    fn bad_values_name_their_key_and_keep_defaults() {
        for (link, key) in [
            ("fc=abc", "fc"),
            ("order=21", "order"),
            ("order=0", "order"),
            ("resp=bp&order=5", "order"),
            ("family=linkwitz-riley&order=3", "order"),
            ("ripple=4&family=chebyshev", "ripple"),
            ("fpass=2k&fstop=1k&astop=40", "fstop"),
            ("resp=hp&fpass=1k&fstop=2k&astop=40", "fstop"),
            ("fpass=1k&fstop=2k&astop=0.5&apass=1", "astop"),
            ("fpass=1k&fstop=2k", "astop"),
            ("resp=bp&fpass=1k&fstop=500,2k&astop=30", "fpass"),
            ("topo=xyz", "topo"),
            ("rser=e7", "rser"),
            ("set=R3:abc", "set"),
            ("set=Q1:1k", "set"),
            ("v=2", "v"),
            ("runs=0", "runs"),
            ("fsample=1k&adcbits=16&fsignal=600", "fsignal"),
            ("fsample=1k", "adcbits"),
        ] {
            check(link, |r| {
                assert!(
                    r.errors.iter().any(|e| e.key == key),
                    "{link}: expected an error on {key}, got {:?}",
                    r.errors
                );
            });
        }
    }

    #[test]
    fn unknown_keys_are_listed_not_fatal() {
        check("fc=1k&colour=blue&fc2=3", |r| {
            assert!(r.errors.is_empty());
            assert_eq!(
                r.unknown_keys,
                vec!["colour".to_string(), "fc2".to_string()]
            );
        });
    }

    #[test]
    fn overrides_and_stage_order() {
        check("set=R3:4k7,c2:10n&stageorder=2,1&gbw=ideal", |r| {
            assert!(r.errors.is_empty(), "{:?}", r.errors);
            assert_eq!(
                r.state.overrides,
                vec![("R3".to_string(), 4700.0), ("C2".to_string(), 10e-9)]
            );
            assert_eq!(r.state.stage_order, StageOrder::Explicit(vec![2, 1]));
            assert!(r.state.op_amp.gbw_hz.is_infinite());
        });
    }
}

/// Characters kept as they are in a written link: letters, digits, `-._~` and the `,` and `:`
/// that separate our lists (`fpass=2k,20k`, `set=R3:4k7`). Everything else is percent-encoded.
const LINK_SAFE: &percent_encoding::AsciiSet = &percent_encoding::NON_ALPHANUMERIC
    .remove(b'-')
    .remove(b'.')
    .remove(b'_')
    .remove(b'~')
    .remove(b',')
    .remove(b':');

/// A number as a link writes it: engineering notation when that reads back exactly, else the
/// shortest decimal that does (`4700` → `4.7k`, `1e-9` → `1n`).
fn number_text(value: f64) -> String {
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

fn edge_text(edge: Edge) -> String {
    match edge {
        Edge::Single(f) => number_text(f),
        Edge::Pair(lo, hi) => format!("{},{}", number_text(lo), number_text(hi)),
    }
}

/// Writes a state as a query string (starting with `?v=1`) that [`parse`] reads back to the same
/// state. Keys at their default are left out, so links stay short.
pub fn to_query(state: &LinkState) -> String {
    let default = LinkState::default();
    let req = &state.requirement;
    let mut pairs: Vec<(&str, String)> = vec![("v", FORMAT_VERSION.to_string())];
    if let Some(title) = &state.title {
        pairs.push(("title", title.clone()));
    }
    pairs.push(("resp", req.class.key().into()));
    pairs.push(("family", req.family.key().into()));
    if let Family::Chebyshev { ripple_db } = req.family {
        pairs.push(("ripple", number_text(ripple_db)));
    }
    if let OrderChoice::Fixed(n) = req.order {
        pairs.push(("order", n.to_string()));
    }
    if let Some(fc) = req.fc_hz {
        pairs.push(("fc", number_text(fc)));
    }
    if let Some(bw) = req.bw_hz {
        pairs.push(("bw", number_text(bw)));
    }
    if let Some(m) = &req.mask {
        pairs.push(("fpass", edge_text(m.pass)));
        pairs.push(("apass", number_text(m.apass_db)));
        pairs.push(("fstop", edge_text(m.stop)));
        pairs.push(("astop", number_text(m.astop_db)));
    }
    if req.margin != default.requirement.margin {
        pairs.push(("margin", req.margin.key().into()));
    }
    if let Some(c) = &state.converter {
        pairs.push(("fsample", number_text(c.sample_rate_hz)));
        pairs.push(("adcbits", c.bits.to_string()));
        pairs.push(("fsignal", number_text(c.signal_band_hz)));
    }
    if req.gain_db != 0.0 {
        pairs.push(("gain", number_text(req.gain_db)));
    }
    let mut differs = |key: &'static str, same: bool, text: String| {
        if !same {
            pairs.push((key, text));
        }
    };
    differs(
        "topo",
        state.topology == default.topology,
        state.topology.key().into(),
    );
    differs(
        "rser",
        state.r_series == default.r_series,
        state.r_series.key().into(),
    );
    differs(
        "cser",
        state.c_series == default.c_series,
        state.c_series.key().into(),
    );
    differs(
        "rtol",
        state.rtol_pct == default.rtol_pct,
        number_text(state.rtol_pct),
    );
    differs(
        "ctol",
        state.ctol_pct == default.ctol_pct,
        number_text(state.ctol_pct),
    );
    let (op, op_default) = (&state.op_amp, &default.op_amp);
    differs(
        "gbw",
        op.gbw_hz == op_default.gbw_hz,
        number_text(op.gbw_hz),
    );
    differs("a0", op.a0_db == op_default.a0_db, number_text(op.a0_db));
    differs(
        "rout",
        op.rout_ohm == op_default.rout_ohm,
        number_text(op.rout_ohm),
    );
    differs(
        "vnoise",
        op.en_v_per_rthz == op_default.en_v_per_rthz,
        number_text(op.en_v_per_rthz),
    );
    differs(
        "inoise",
        op.in_a_per_rthz == op_default.in_a_per_rthz,
        number_text(op.in_a_per_rthz),
    );
    differs(
        "slew",
        op.slew_v_per_s == op_default.slew_v_per_s,
        number_text(op.slew_v_per_s),
    );
    let optional = |v: Option<f64>| v.map(number_text).unwrap_or_default();
    differs(
        "rlevel",
        state.r_level_ohm.is_none(),
        optional(state.r_level_ohm),
    );
    differs("cratio", state.c_ratio.is_none(), optional(state.c_ratio));
    differs("rratio", state.r_ratio.is_none(), optional(state.r_ratio));
    let rounding = match state.rounding {
        Rounding::Nearest => "nearest",
        Rounding::Search => "search",
    };
    differs("round", state.rounding == default.rounding, rounding.into());
    let list = |items: &[(String, f64)]| {
        items
            .iter()
            .map(|(r, v)| format!("{r}:{}", number_text(*v)))
            .collect::<Vec<_>>()
            .join(",")
    };
    differs("set", state.overrides.is_empty(), list(&state.overrides));
    differs(
        "tolset",
        state.tolerance_overrides.is_empty(),
        list(&state.tolerance_overrides),
    );
    let stage_order = match &state.stage_order {
        StageOrder::AscendingQ => "q-up".to_string(),
        StageOrder::DescendingQ => "q-down".to_string(),
        StageOrder::Explicit(n) => n
            .iter()
            .map(|i| i.to_string())
            .collect::<Vec<_>>()
            .join(","),
    };
    differs(
        "stageorder",
        state.stage_order == default.stage_order,
        stage_order,
    );
    let study = &state.study;
    differs(
        "runs",
        study.runs == default.study.runs,
        study.runs.to_string(),
    );
    differs(
        "seed",
        study.seed == default.study.seed,
        study.seed.to_string(),
    );
    let dist = match study.distribution {
        Distribution::Gaussian => "gauss",
        Distribution::Uniform => "uniform",
    };
    differs(
        "dist",
        study.distribution == default.study.distribution,
        dist.into(),
    );
    differs(
        "sigmas",
        study.sigmas == default.study.sigmas,
        number_text(study.sigmas),
    );
    let signal = &state.signal;
    differs(
        "vin",
        signal.vin_pk == default.signal.vin_pk,
        number_text(signal.vin_pk),
    );
    differs(
        "swing",
        signal.swing_pk == default.signal.swing_pk,
        number_text(signal.swing_pk),
    );
    differs(
        "drift",
        signal.drift_pct == default.signal.drift_pct,
        number_text(signal.drift_pct),
    );
    let band = |b: Option<(f64, f64)>| {
        b.map(|(lo, hi)| format!("{},{}", number_text(lo), number_text(hi)))
            .unwrap_or_default()
    };
    differs(
        "noiseband",
        signal.noise_band_hz.is_none(),
        band(signal.noise_band_hz),
    );
    differs("span", state.span_hz.is_none(), band(state.span_hz));
    let body: Vec<String> = pairs
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

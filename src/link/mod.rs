//! The share link: the query string that carries a whole design, read into validated values.
//!
//! The page and the command line read the same keys with the same [`parse`]. Parsing never stops
//! at the first problem: every key is read, a bad value falls back to its default and is reported
//! as an [`InputError`] naming the key, and unknown keys are listed. The page loads what is valid
//! and lists the rest; the command line refuses a link with any error (exit 2) and warns about
//! unknown keys. A link whose `v` is newer than [`FORMAT_VERSION`] is refused by both.
//!
//! The keys are one table ([`keys`]): the reader ([`read`]), the writer ([`write`]), [`KEYS`] and
//! the form texts ([`form_values`], [`defaults`]) all come from it. Version-1 links, whose four
//! limit keys had other names, keep opening and are written back as version 2.
//!
//! Keys, their accepted values and defaults are documented in the README (section "Link keys").

mod keys;
mod quote;
mod read;
mod write;

pub(crate) use keys::V1_KEYS;
pub use keys::{ANALYSIS_HZ, KEYS};
pub use read::{check_frequency, escape_controls, quoted, shown_number};

use crate::choices::Rounding;
use crate::error::InputError;
use crate::eseries::Series;
use crate::opamp::OpAmp;
use crate::sections::StageOrder;
use crate::spec::{Family, MarginPlacement, OrderChoice, Requirement, ResponseClass};
use crate::topology::Topology;
use serde::Serialize;

/// The link format this build writes (`v=2`); it also reads version 1.
///
/// Version 2 renamed the four limit keys: `fpass` → `passedge`, `apass` → `passloss`,
/// `fstop` → `stopedge`, `astop` → `stopdepth` (README, "Version 1 links").
pub const FORMAT_VERSION: u32 = 2;

/// Highest order a design may have (brief: orders 1–20).
pub const MAX_ORDER: usize = 20;

/// Order used when neither `order` nor a specification is given.
pub const DEFAULT_ORDER: usize = 4;

/// Cutoff used when neither `fc` nor a specification is given, Hz.
pub const DEFAULT_FC_HZ: f64 = 1000.0;

/// Attenuation allowed at the passband edge when `passloss` is absent, dB.
pub const DEFAULT_APASS_DB: f64 = 1.0;

/// Chebyshev ripple when neither `ripple` nor a usable `passloss` is given, dB.
pub const DEFAULT_RIPPLE_DB: f64 = 0.5;

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
    /// The op-amp model (`gbw`, `a0`, `rout`, `vnoise`, `inoise`, `slew`, `vos`, `ib`).
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
/// Never fails and never panics: problems are collected in the report. A version-1 link (`v=1`)
/// is read with its own key names; a link without `v` is read as version 2, or as version 1 when
/// it names its limits only by their version-1 names (with a note saying so). See the README,
/// "Version 1 links".
pub fn parse(link: &str) -> LinkReport {
    read::parse(query_of(link))
}

/// Writes a state as a query string (starting with `?v=2`) that [`parse`] reads back to the same
/// state. Keys at their default are left out, so links stay short; the requirement keys (class,
/// family, ripple, order, cutoff, bandwidth, limits) are always written when they have a value.
pub fn to_query(state: &LinkState) -> String {
    write::to_query(state)
}

/// The text each form field shows for `state`: every key of [`KEYS`], in that order, with the
/// value a link for `state` would carry, or the key's default text (see [`defaults`]) when such
/// a link leaves the key out because the state has nothing to say for it (no limits, a
/// Butterworth's ripple, no title, an order that follows from the limits).
///
/// The page fills its form from this, so that JavaScript never parses a link or repeats a
/// default. Keys at their default carry the default's text (`rtol` → `1`), not an empty text.
/// `v` gives the current [`FORMAT_VERSION`]. Two texts are only shown, not meant to be written
/// back alone: without limits `passloss` still shows its default (the reader takes it only with
/// `passedge`, `stopedge` and `stopdepth`), and with an order that follows from the limits
/// `order` and `fc` show their defaults (a link then carries neither).
pub fn form_values(state: &LinkState) -> Vec<(&'static str, String)> {
    write::form_values(state)
}

/// The text each form field shows when its key is absent from the link: every key of [`KEYS`],
/// in that order. The text is the value [`LinkState::default`] writes (`order` → `4`,
/// `fc` → `1k`, `gbw` → `1M`), or for a key that state does not write, the value the reader falls
/// back to (`ripple` → `0.5`, `passloss` → `1`), or `""` when the key has no default (`title`,
/// `passedge`, `stopedge`, `stopdepth`, `set` …). Read back as a link, each default text gives
/// the default state.
pub fn defaults() -> Vec<(&'static str, String)> {
    write::defaults()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::Edge;

    fn check(link: &str, expect: impl Fn(&LinkReport)) {
        let report = parse(link);
        expect(&report);
    }

    #[test]
    fn defaults_without_keys() {
        check("", |r| {
            assert!(r.errors.is_empty());
            assert!(r.notes.is_empty());
            assert_eq!(r.state, LinkState::default());
        });
    }

    #[test]
    fn reads_a_whole_url_with_a_fragment() {
        check(
            "https://example.invalid/rolloff/?v=2&resp=hp&fc=2k2&order=3#stages",
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
            "v=2&passedge=1k&passloss=0.5&stopedge=3k&stopdepth=40&family=chebyshev",
            |r| {
                assert!(r.errors.is_empty(), "{:?}", r.errors);
                assert_eq!(r.state.requirement.order, OrderChoice::FromMask);
                // The ripple takes half the allowed loss, leaving the rest as margin (README).
                assert_eq!(
                    r.state.requirement.family,
                    Family::Chebyshev { ripple_db: 0.25 }
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
        // A version-1 link's bad limit is reported under the limit's current name, which is the
        // name of the page's field (README, "Version 1 links").
        for (link, key) in [
            ("fc=abc", "fc"),
            ("order=21", "order"),
            ("order=0", "order"),
            ("resp=bp&order=5", "order"),
            ("family=linkwitz-riley&order=3", "order"),
            ("ripple=4&family=chebyshev", "ripple"),
            ("passedge=2k&stopedge=1k&stopdepth=40", "stopedge"),
            ("resp=hp&passedge=1k&stopedge=2k&stopdepth=40", "stopedge"),
            (
                "passedge=1k&stopedge=2k&stopdepth=0.5&passloss=1",
                "stopdepth",
            ),
            ("passedge=1k&stopedge=2k", "stopdepth"),
            (
                "resp=bp&passedge=1k&stopedge=500,2k&stopdepth=30",
                "passedge",
            ),
            ("v=1&fpass=2k&fstop=1k&astop=40", "stopedge"),
            ("v=1&fpass=1k&fstop=2k&astop=0.5&apass=1", "stopdepth"),
            ("v=1&fpass=1k&fstop=2k&apass=30&astop=40", "passloss"),
            ("v=1&fpass=1k&fstop=2k", "stopdepth"),
            ("fpass=1k&fstop=2k", "stopdepth"),
            ("topo=xyz", "topo"),
            ("rser=e7", "rser"),
            ("set=R3:abc", "set"),
            ("set=Q1:1k", "set"),
            ("v=3", "v"),
            ("v=0", "v"),
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
    fn messages_name_the_limits_by_their_current_names() {
        // Source: README "Version 1 links" — every text names the limits passedge, passloss,
        // stopedge, stopdepth, also when the link itself is version 1.
        for link in [
            "v=1&fpass=1k&fstop=2k",
            "v=1&fpass=1k&fstop=2k&astop=0.5&apass=1",
            "passedge=1k",
            "passedge=1k&stopedge=2k&stopdepth=0.5",
        ] {
            let r = parse(link);
            let message = &r.errors.first().expect(link).message;
            for old in ["fpass", "apass", "fstop", "astop"] {
                assert!(!message.contains(old), "{link}: {message}");
            }
            assert!(
                message.contains("passedge") || message.contains("passloss"),
                "{link}: {message}"
            );
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

    // The version rules below come from the README's "Version 1 links": the four limits were
    // fpass, apass, fstop, astop and are passedge, passloss, stopedge, stopdepth; every other
    // key is the same; v1 links open and are written back as v2.

    #[test]
    fn a_version_1_link_reads_like_its_version_2_rewrite() {
        let v1 = parse("?v=1&resp=bp&fpass=2k,20k&apass=1&fstop=400,100k&astop=30&topo=mfb");
        let v2 = parse(
            "?v=2&resp=bp&passedge=2k,20k&passloss=1&stopedge=400,100k&stopdepth=30&topo=mfb",
        );
        assert!(v1.errors.is_empty() && v1.unknown_keys.is_empty() && v1.notes.is_empty());
        assert!(v2.errors.is_empty() && v2.unknown_keys.is_empty() && v2.notes.is_empty());
        assert_eq!(v1.state, v2.state);
        assert!(v1.state.requirement.mask.is_some());
    }

    #[test]
    fn a_version_1_link_is_written_back_as_version_2() {
        let state = parse("?v=1&fpass=1k&apass=0.5&fstop=3k&astop=40").state;
        assert_eq!(
            to_query(&state),
            "?v=2&resp=lp&family=butterworth&passedge=1k&passloss=0.5&stopedge=3k&stopdepth=40"
        );
    }

    #[test]
    fn new_names_are_unknown_in_a_version_1_link_and_old_names_in_a_version_2_link() {
        check("?v=1&passedge=1k&stopedge=2k&stopdepth=40&order=3", |r| {
            assert!(r.errors.is_empty(), "{:?}", r.errors);
            assert_eq!(r.unknown_keys, ["passedge", "stopedge", "stopdepth"]);
            assert_eq!(r.state.requirement.mask, None);
        });
        check("?v=2&fpass=1k&order=3", |r| {
            assert!(r.errors.is_empty(), "{:?}", r.errors);
            assert_eq!(r.unknown_keys, ["fpass"]);
            assert_eq!(r.state.requirement.mask, None);
        });
    }

    #[test]
    fn a_link_without_version_and_only_old_limit_names_is_read_as_version_1() {
        check("?fpass=1k&fstop=3k&astop=40", |r| {
            assert!(r.errors.is_empty(), "{:?}", r.errors);
            assert!(r.unknown_keys.is_empty(), "{:?}", r.unknown_keys);
            assert_eq!(r.notes.len(), 1, "{:?}", r.notes);
            let note = &r.notes[0];
            assert!(
                note.contains("version-1") && note.contains("fpass, fstop, astop"),
                "{note}"
            );
            assert_eq!(
                r.state,
                parse("?v=2&passedge=1k&stopedge=3k&stopdepth=40").state
            );
        });
        // One new name makes it a version-2 link: the old names are unknown keys then.
        check("?fpass=1k&stopedge=3k&astop=40&order=3", |r| {
            assert!(r.notes.is_empty(), "{:?}", r.notes);
            assert_eq!(r.unknown_keys, ["fpass", "astop"]);
        });
        // Without any limit the version does not matter and nothing is noted.
        check("?order=3&fc=2k", |r| assert!(r.notes.is_empty()));
    }

    #[test]
    fn a_newer_version_is_refused() {
        for link in ["?v=3&order=2", "?v=3&fpass=1k", "?v=99"] {
            let r = parse(link);
            assert!(r.refused(), "{link}");
            assert!(
                r.errors[0].message.contains("newer Rolloff"),
                "{link}: {}",
                r.errors[0]
            );
        }
        assert!(!parse("?v=2&order=2").refused());
        assert!(!parse("?v=1&order=2").refused());
    }

    #[test]
    fn form_texts_cover_every_key_in_order() {
        let d = defaults();
        let names: Vec<&str> = d.iter().map(|(k, _)| *k).collect();
        assert_eq!(names, KEYS);
        let text = |list: &[(&str, String)], key: &str| {
            list.iter()
                .find(|(k, _)| *k == key)
                .map(|(_, v)| v.clone())
                .unwrap_or_else(|| panic!("{key}"))
        };
        // The defaults the README's key table gives.
        for (key, expect) in [
            ("v", "2"),
            ("resp", "lp"),
            ("family", "butterworth"),
            ("ripple", "0.5"),
            ("order", "4"),
            ("fc", "1k"),
            ("passedge", ""),
            ("passloss", "1"),
            ("stopdepth", ""),
            ("margin", "split"),
            ("gain", "0"),
            ("topo", "sk"),
            ("rser", "e96"),
            ("cser", "e12"),
            ("rtol", "1"),
            ("ctol", "5"),
            ("gbw", "1M"),
            ("a0", "100"),
            ("rout", "50"),
            ("vnoise", "10n"),
            ("inoise", "1p"),
            ("slew", "500k"),
            ("vos", "0"),
            ("ib", "0"),
            ("round", "search"),
            ("stageorder", "q-up"),
            ("runs", "1000"),
            ("seed", "1"),
            ("dist", "gauss"),
            ("sigmas", "3"),
            ("vin", "1"),
            ("swing", "10"),
            ("drift", "1"),
            ("title", ""),
            ("set", ""),
            ("span", ""),
        ] {
            assert_eq!(text(&d, key), expect, "default of {key}");
        }
        let state = parse("?v=1&resp=hp&family=chebyshev&ripple=0.25&fpass=1k&fstop=300&astop=45&rtol=0.1&title=Bench").state;
        let f = form_values(&state);
        assert_eq!(f.iter().map(|(k, _)| *k).collect::<Vec<_>>(), KEYS);
        for (key, expect) in [
            ("resp", "hp"),
            ("family", "chebyshev"),
            ("ripple", "0.25"),
            ("order", "4"),
            ("passedge", "1k"),
            ("passloss", "1"),
            ("stopedge", "300"),
            ("stopdepth", "45"),
            ("rtol", "0.1"),
            ("ctol", "5"),
            ("title", "Bench"),
        ] {
            assert_eq!(text(&f, key), expect, "form value of {key}");
        }
    }

    #[test]
    fn form_values_read_back_to_the_same_state() {
        // The page may write every field as a link; that link must say what the state says.
        for link in [
            "?v=2&resp=bp&family=butterworth&passedge=2k,20k&passloss=1&stopedge=400,100k&stopdepth=30&topo=mfb",
            "?v=2&order=6&fc=1k&passedge=500&stopedge=5k&stopdepth=40&set=R1:4k7&span=10,100k",
            "?v=1&title=x&family=chebyshev&ripple=1&order=7&fc=50k&round=nearest",
        ] {
            let state = parse(link).state;
            let mut fields: Vec<(&str, String)> = form_values(&state)
                .into_iter()
                .filter(|(_, v)| !v.is_empty())
                .collect();
            // An order that follows from the limits shows the default order, but the page's
            // order field is then not part of the link.
            if state.requirement.order == OrderChoice::FromMask {
                fields.retain(|(k, _)| *k != "order" && *k != "fc");
            }
            // The passband loss shows its default without limits too, but counts only with the
            // other three limits.
            if state.requirement.mask.is_none() {
                fields.retain(|(k, _)| *k != "passloss");
            }
            let query: String = fields
                .iter()
                .map(|(k, v)| format!("{k}={v}"))
                .collect::<Vec<_>>()
                .join("&");
            let again = parse(&query);
            assert!(again.errors.is_empty(), "{query}: {:?}", again.errors);
            assert_eq!(again.state, state, "{link} → {query}");
        }
    }
}

//! The one table of link keys: for each key its name (and its name in a version-1 link), how its
//! value is read, how it is written, and the text a form field shows when the key is absent.
//!
//! The reader ([`super::read`]), the writer ([`super::write`]), the list of known keys
//! [`KEYS`] and the form defaults ([`super::defaults`]) all come from [`TABLE`], so renaming a key
//! is one edit of its row, and adding a simple key (one that sets one field of the state) is one
//! row. Keys whose meaning depends on other keys (the class, family, order, cutoff and limits)
//! have no `apply` here: [`super::read`] combines them, but still reads and names them through
//! their rows.
//!
//! The rows are in the order the writer puts the keys in a link.

use super::write::{band_text, edge_text, list_text, number_text};
use super::{Distribution, LinkState, DEFAULT_APASS_DB, DEFAULT_RIPPLE_DB, FORMAT_VERSION};
use crate::choices::Rounding;
use crate::eseries::Series;
use crate::sections::StageOrder;
use crate::spec::{Edge, MarginPlacement, OrderChoice, ResponseClass};
use crate::topology::Topology;

/// A link key, by what it means; its name lives only in its [`TABLE`] row.
///
/// The discriminant is the index of the key's row (checked when the crate compiles).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Key {
    V,
    Title,
    Resp,
    Family,
    Ripple,
    Order,
    Fc,
    Bw,
    PassEdge,
    PassLoss,
    StopEdge,
    StopDepth,
    Margin,
    Fsample,
    Adcbits,
    Fsignal,
    Gain,
    Topo,
    Rser,
    Cser,
    Rtol,
    Ctol,
    Gbw,
    A0,
    Rout,
    Vnoise,
    Inoise,
    Slew,
    Vos,
    Ib,
    Rlevel,
    Cratio,
    Rratio,
    Round,
    Set,
    Tolset,
    StageOrder,
    Runs,
    Seed,
    Dist,
    Sigmas,
    Vin,
    Swing,
    Drift,
    NoiseBand,
    Span,
}

/// The largest |vos| a link accepts, V: ten times a poor general-purpose part's worst offset
/// (a few millivolts, common practice), so a typing slip of a unit is refused.
pub(crate) const MAX_VOS_V: f64 = 0.1;

/// The largest |ib| a link accepts, A: far beyond any op amp's input bias current (bipolar inputs
/// draw up to a microampere, common practice), so a typing slip of a unit is refused.
pub(crate) const MAX_IB_A: f64 = 1e-3;

/// How a key's text is read; [`super::read`] implements each way once.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Parse {
    /// The format version, read before everything else (it decides the key names).
    Version,
    /// A number in engineering notation within `[lo, hi]`; `what` names it in messages.
    Number {
        lo: f64,
        hi: f64,
        what: &'static str,
    },
    /// A frequency in Hz within `range` (one of [`TARGET_HZ`], [`ANALYSIS_HZ`]), checked by the
    /// reader's one frequency check; `what` names it in messages.
    Frequency {
        range: (f64, f64),
        what: &'static str,
    },
    /// Zero, or a number from `least` to `hi` (an op-amp figure whose zero means "none"): a
    /// tiny positive value such as 1e-308 is refused rather than carried into the analyses,
    /// where it is neither zero nor a figure any part has.
    ZeroOr {
        least: f64,
        hi: f64,
        what: &'static str,
    },
    /// A [`Parse::Number`] that may also be `ideal` (infinite).
    NumberOrIdeal {
        lo: f64,
        hi: f64,
        what: &'static str,
    },
    /// A whole number within `[lo, hi]`.
    Integer {
        lo: u64,
        hi: u64,
        what: &'static str,
    },
    /// One of the names (case-insensitive); the value is the name's index.
    Choice(&'static [&'static str]),
    /// A frequency edge: one value, or `lo,hi` for band-pass (the class is read first).
    Edge,
    /// A pair `lo,hi` of frequencies within `range`, lo < hi.
    Band {
        range: (f64, f64),
        what: &'static str,
    },
    /// `REF:value` pairs separated by commas, each value within `[lo, hi]`.
    Parts {
        lo: f64,
        hi: f64,
        what: &'static str,
    },
    /// `q-up`, `q-down` or a list of stage numbers.
    StageOrder,
    /// Free text without control characters, at most 120 characters.
    Title,
}

/// A value read by a [`Parse`].
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Value {
    Number(f64),
    Integer(u64),
    Choice(usize),
    Edge(Edge),
    Band(f64, f64),
    Parts(Vec<(String, f64)>),
    StageOrder(StageOrder),
    Text(String),
}

/// The text a form field shows when its key is absent.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Shown {
    /// What the writer gives for [`LinkState::default`] (empty when it gives nothing).
    FromDefaultState,
    /// This number, for a key the default state does not write (the ripple of a Butterworth, the
    /// passband loss without limits) although the reader falls back to it.
    Number(f64),
}

/// Whether the writer puts a key in every link that has a value for it, or only when the value
/// differs from the default state's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Written {
    /// Written whenever [`Row::write`] gives a value (the requirement keys, so that a link says
    /// what it designs even when that is the default).
    Always,
    /// Written when it differs from the default state's text, so that links stay short.
    WhenNotDefault,
}

/// One key: everything the reader, the writer and the form need to know about it.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Row {
    /// Which key this row describes.
    pub key: Key,
    /// The key's name in a current (version 2) link.
    pub name: &'static str,
    /// The key's name in a version-1 link.
    pub v1_name: &'static str,
    /// How its text is read.
    pub parse: Parse,
    /// Sets the state from a value read; `None` for keys [`super::read`] combines with others.
    pub apply: Option<fn(&mut LinkState, Value)>,
    /// The key's text for a state, `None` when the state has nothing to say for it.
    pub write: fn(&LinkState) -> Option<String>,
    /// When the writer puts it in a link.
    pub written: Written,
    /// The form's text when the key is absent.
    pub shown: Shown,
}

impl Row {
    /// The text of this key in the default state, or `""` when it has none there.
    pub fn default_text(&self) -> String {
        match self.shown {
            Shown::FromDefaultState => (self.write)(&LinkState::default()).unwrap_or_default(),
            Shown::Number(v) => number_text(v),
        }
    }
}

/// A row of a key with the same name in both versions.
const fn row(
    key: Key,
    name: &'static str,
    parse: Parse,
    apply: Option<fn(&mut LinkState, Value)>,
    write: fn(&LinkState) -> Option<String>,
) -> Row {
    Row {
        key,
        name,
        v1_name: name,
        parse,
        apply,
        write,
        written: Written::WhenNotDefault,
        shown: Shown::FromDefaultState,
    }
}

impl Row {
    const fn v1(mut self, v1_name: &'static str) -> Row {
        self.v1_name = v1_name;
        self
    }
    const fn always(mut self) -> Row {
        self.written = Written::Always;
        self
    }
    const fn shown(mut self, shown: Shown) -> Row {
        self.shown = shown;
        self
    }
}

/// The names of a choice table, for [`Parse::Choice`].
const fn names<T: Copy, const N: usize>(table: &[(&'static str, T); N]) -> [&'static str; N] {
    let mut out = [""; N];
    let mut i = 0;
    while i < N {
        out[i] = table[i].0;
        i += 1;
    }
    out
}

/// The name a choice table gives `value`.
fn name_of<T: PartialEq>(table: &[(&'static str, T)], value: &T) -> Option<String> {
    table
        .iter()
        .find(|(_, v)| v == value)
        .map(|(n, _)| n.to_string())
}

pub(crate) const CLASSES: [(&str, ResponseClass); 4] = [
    ("lp", ResponseClass::LowPass),
    ("hp", ResponseClass::HighPass),
    ("bp", ResponseClass::BandPass),
    ("bs", ResponseClass::BandStop),
];
const CLASS_NAMES: [&str; 4] = names(&CLASSES);

/// The family names, by index; [`super::read`] builds the [`crate::spec::Family`] (Chebyshev and elliptic need
/// their ripple, inverse Chebyshev and elliptic their stopband depth).
pub(crate) const FAMILY_NAMES: [&str; 7] = [
    "butterworth",
    "chebyshev",
    "bessel",
    "linkwitz-riley",
    "critical",
    "inverse-chebyshev",
    "elliptic",
];

pub(crate) const MARGINS: [(&str, MarginPlacement); 3] = [
    ("split", MarginPlacement::Split),
    ("pass", MarginPlacement::Pass),
    ("stop", MarginPlacement::Stop),
];
const MARGIN_NAMES: [&str; 3] = names(&MARGINS);

const TOPOLOGIES: [(&str, Topology); 3] = [
    ("sk", Topology::SallenKey),
    ("mfb", Topology::MultipleFeedback),
    ("statevar", Topology::StateVariable),
];
const TOPOLOGY_NAMES: [&str; 3] = names(&TOPOLOGIES);

const SERIES: [(&str, Series); 7] = [
    ("e6", Series::E6),
    ("e12", Series::E12),
    ("e24", Series::E24),
    ("e48", Series::E48),
    ("e96", Series::E96),
    ("e192", Series::E192),
    ("exact", Series::Exact),
];
const SERIES_NAMES: [&str; 7] = names(&SERIES);

const ROUNDINGS: [(&str, Rounding); 2] =
    [("nearest", Rounding::Nearest), ("search", Rounding::Search)];
const ROUNDING_NAMES: [&str; 2] = names(&ROUNDINGS);

const DISTRIBUTIONS: [(&str, Distribution); 2] = [
    ("gauss", Distribution::Gaussian),
    ("uniform", Distribution::Uniform),
];
const DISTRIBUTION_NAMES: [&str; 2] = names(&DISTRIBUTIONS);

/// The frequencies a design may be asked for, Hz: the cutoff, the bandwidth, the limit edges and
/// the converter helper's rates. The reader checks every one of these keys against this range
/// (README, "Link keys": 1 mHz–1 GHz).
pub(crate) const TARGET_HZ: (f64, f64) = (1e-3, 1e9);

/// The frequencies the analyses cover, Hz: the noise band, and the sweep's `--from` and `--to`.
/// Below about 1e-4 Hz the powers of ω in a stage's polynomials underflow and above 1e11 Hz they
/// overflow (the automatic plot span stops at the same bounds, `pipeline::compose`).
pub const ANALYSIS_HZ: (f64, f64) = (1e-4, 1e11);

/// What the reader accepts for `span` before the composer narrows it to [`ANALYSIS_HZ`] (with a
/// warning): any normal positive frequency up to 10 GHz, so an old link with a wide span still
/// opens; subnormal numbers are refused like everywhere else.
pub(crate) const SPAN_READ_HZ: (f64, f64) = (f64::MIN_POSITIVE, 1e10);

const fn freq(range: (f64, f64), what: &'static str) -> Parse {
    Parse::Frequency { range, what }
}

const fn zero_or(least: f64, hi: f64, what: &'static str) -> Parse {
    Parse::ZeroOr { least, hi, what }
}

const fn num(lo: f64, hi: f64, what: &'static str) -> Parse {
    Parse::Number { lo, hi, what }
}

const fn num_or_ideal(lo: f64, hi: f64, what: &'static str) -> Parse {
    Parse::NumberOrIdeal { lo, hi, what }
}

const fn int(lo: u64, hi: u64, what: &'static str) -> Parse {
    Parse::Integer { lo, hi, what }
}

const fn parts_of(lo: f64, hi: f64, what: &'static str) -> Parse {
    Parse::Parts { lo, hi, what }
}

/// The number a value carries (the reader only hands a row the value its parse makes).
fn number(value: &Value) -> f64 {
    match value {
        Value::Number(v) => *v,
        Value::Integer(n) => *n as f64,
        _ => f64::NAN,
    }
}

fn integer(value: &Value) -> u64 {
    match value {
        Value::Integer(n) => *n,
        _ => 0,
    }
}

fn index(value: &Value) -> usize {
    match value {
        Value::Choice(i) => *i,
        _ => 0,
    }
}

fn band(value: &Value) -> Option<(f64, f64)> {
    match value {
        Value::Band(lo, hi) => Some((*lo, *hi)),
        _ => None,
    }
}

fn parts(value: Value) -> Vec<(String, f64)> {
    match value {
        Value::Parts(list) => list,
        _ => Vec::new(),
    }
}

/// Every key, in the order the writer puts them in a link.
pub(crate) const TABLE: [Row; 46] = [
    row(Key::V, "v", Parse::Version, None, |_| {
        Some(FORMAT_VERSION.to_string())
    })
    .always(),
    row(
        Key::Title,
        "title",
        Parse::Title,
        Some(|s, v| {
            if let Value::Text(t) = v {
                s.title = Some(t).filter(|t| !t.trim().is_empty());
            }
        }),
        |s| s.title.clone(),
    ),
    row(Key::Resp, "resp", Parse::Choice(&CLASS_NAMES), None, |s| {
        name_of(&CLASSES, &s.requirement.class)
    })
    .always(),
    row(
        Key::Family,
        "family",
        Parse::Choice(&FAMILY_NAMES),
        None,
        |s| Some(s.requirement.family.key().into()),
    )
    .always(),
    row(
        Key::Ripple,
        "ripple",
        num(0.01, 3.0, "Chebyshev or elliptic passband ripple in dB"),
        None,
        |s| s.requirement.family.ripple_db().map(number_text),
    )
    .always()
    .shown(Shown::Number(DEFAULT_RIPPLE_DB)),
    row(
        Key::Order,
        "order",
        int(1, super::MAX_ORDER as u64, "order"),
        None,
        |s| match s.requirement.order {
            OrderChoice::Fixed(n) => Some(n.to_string()),
            OrderChoice::FromMask => None,
        },
    )
    .always(),
    row(Key::Fc, "fc", freq(TARGET_HZ, "the cutoff"), None, |s| {
        s.requirement.fc_hz.map(number_text)
    })
    .always(),
    row(Key::Bw, "bw", freq(TARGET_HZ, "the bandwidth"), None, |s| {
        s.requirement.bw_hz.map(number_text)
    })
    .always(),
    // A limit the converter helper fills is left to it, so the link keeps saying where the limit
    // comes from (and a changed converter moves it).
    row(Key::PassEdge, "passedge", Parse::Edge, None, |s| {
        let filled = s.converter.map(|c| Edge::Single(c.signal_band_hz));
        s.requirement
            .mask
            .filter(|m| Some(m.pass) != filled)
            .map(|m| edge_text(m.pass))
    })
    .v1("fpass")
    .always(),
    row(
        Key::PassLoss,
        "passloss",
        num(1e-3, 20.0, "attenuation allowed at the passband edge in dB"),
        None,
        |s| s.requirement.mask.map(|m| number_text(m.apass_db)),
    )
    .v1("apass")
    .always()
    .shown(Shown::Number(DEFAULT_APASS_DB)),
    row(Key::StopEdge, "stopedge", Parse::Edge, None, |s| {
        let filled = s.converter.map(|c| Edge::Single(c.stop_edge_hz()));
        s.requirement
            .mask
            .filter(|m| Some(m.stop) != filled)
            .map(|m| edge_text(m.stop))
    })
    .v1("fstop")
    .always(),
    row(
        Key::StopDepth,
        "stopdepth",
        num(1e-3, 300.0, "attenuation required in the stopband in dB"),
        None,
        |s| {
            let filled = s.converter.map(|c| c.stop_depth_db());
            match s.requirement.mask {
                Some(m) => Some(m)
                    .filter(|m| Some(m.astop_db) != filled)
                    .map(|m| number_text(m.astop_db)),
                // Without limits the key is the equiripple depth of inverse Chebyshev and elliptic.
                None => s.requirement.family.stop_depth_db().map(number_text),
            }
        },
    )
    .v1("astop")
    .always(),
    row(
        Key::Margin,
        "margin",
        Parse::Choice(&MARGIN_NAMES),
        None,
        |s| name_of(&MARGINS, &s.requirement.margin),
    ),
    row(
        Key::Fsample,
        "fsample",
        freq(TARGET_HZ, "the converter sample rate"),
        None,
        |s| s.converter.map(|c| number_text(c.sample_rate_hz)),
    ),
    row(
        Key::Adcbits,
        "adcbits",
        int(1, 32, "converter resolution in bits"),
        None,
        |s| s.converter.map(|c| c.bits.to_string()),
    ),
    row(
        Key::Fsignal,
        "fsignal",
        freq(TARGET_HZ, "the signal bandwidth"),
        None,
        |s| s.converter.map(|c| number_text(c.signal_band_hz)),
    ),
    row(
        Key::Gain,
        "gain",
        num(-40.0, 60.0, "overall passband gain in dB"),
        Some(|s, v| s.requirement.gain_db = number(&v)),
        |s| Some(number_text(s.requirement.gain_db)),
    ),
    row(
        Key::Topo,
        "topo",
        Parse::Choice(&TOPOLOGY_NAMES),
        Some(|s, v| s.topology = TOPOLOGIES[index(&v)].1),
        |s| name_of(&TOPOLOGIES, &s.topology),
    ),
    row(
        Key::Rser,
        "rser",
        Parse::Choice(&SERIES_NAMES),
        Some(|s, v| s.r_series = SERIES[index(&v)].1),
        |s| name_of(&SERIES, &s.r_series),
    ),
    row(
        Key::Cser,
        "cser",
        Parse::Choice(&SERIES_NAMES),
        Some(|s, v| s.c_series = SERIES[index(&v)].1),
        |s| name_of(&SERIES, &s.c_series),
    ),
    row(
        Key::Rtol,
        "rtol",
        num(0.0, 50.0, "resistor tolerance in %"),
        Some(|s, v| s.rtol_pct = number(&v)),
        |s| Some(number_text(s.rtol_pct)),
    ),
    row(
        Key::Ctol,
        "ctol",
        num(0.0, 50.0, "capacitor tolerance in %"),
        Some(|s, v| s.ctol_pct = number(&v)),
        |s| Some(number_text(s.ctol_pct)),
    ),
    row(
        Key::Gbw,
        "gbw",
        num_or_ideal(1.0, 1e11, "op-amp gain-bandwidth in Hz (or ideal)"),
        Some(|s, v| s.op_amp.gbw_hz = number(&v)),
        |s| Some(number_text(s.op_amp.gbw_hz)),
    ),
    row(
        Key::A0,
        "a0",
        num_or_ideal(0.0, 300.0, "op-amp open-loop DC gain in dB (or ideal)"),
        Some(|s, v| s.op_amp.a0_db = number(&v)),
        |s| Some(number_text(s.op_amp.a0_db)),
    ),
    row(
        Key::Rout,
        "rout",
        zero_or(1e-3, 1e5, "op-amp output resistance in Ω"),
        Some(|s, v| s.op_amp.rout_ohm = number(&v)),
        |s| Some(number_text(s.op_amp.rout_ohm)),
    ),
    row(
        Key::Vnoise,
        "vnoise",
        zero_or(1e-12, 1e-5, "op-amp voltage noise in V/√Hz"),
        Some(|s, v| s.op_amp.en_v_per_rthz = number(&v)),
        |s| Some(number_text(s.op_amp.en_v_per_rthz)),
    ),
    row(
        Key::Inoise,
        "inoise",
        zero_or(1e-18, 1e-8, "op-amp current noise in A/√Hz"),
        Some(|s, v| s.op_amp.in_a_per_rthz = number(&v)),
        |s| Some(number_text(s.op_amp.in_a_per_rthz)),
    ),
    row(
        Key::Slew,
        "slew",
        num_or_ideal(1.0, 1e12, "op-amp slew rate in V/s (or ideal)"),
        Some(|s, v| s.op_amp.slew_v_per_s = number(&v)),
        |s| Some(number_text(s.op_amp.slew_v_per_s)),
    ),
    row(
        Key::Vos,
        "vos",
        num(
            -MAX_VOS_V,
            MAX_VOS_V,
            "signed op-amp input offset voltage in V",
        ),
        Some(|s, v| s.op_amp.vos_v = number(&v)),
        |s| Some(number_text(s.op_amp.vos_v)),
    ),
    row(
        Key::Ib,
        "ib",
        num(
            -MAX_IB_A,
            MAX_IB_A,
            "signed op-amp input bias current into each input in A",
        ),
        Some(|s, v| s.op_amp.ib_a = number(&v)),
        |s| Some(number_text(s.op_amp.ib_a)),
    ),
    row(
        Key::Rlevel,
        "rlevel",
        num(10.0, 1e7, "resistor impedance level in Ω"),
        Some(|s, v| s.r_level_ohm = Some(number(&v))),
        |s| s.r_level_ohm.map(number_text),
    ),
    row(
        Key::Cratio,
        "cratio",
        num(1e-3, 1e4, "capacitor ratio"),
        Some(|s, v| s.c_ratio = Some(number(&v))),
        |s| s.c_ratio.map(number_text),
    ),
    row(
        Key::Rratio,
        "rratio",
        num(1e-3, 1e4, "resistor ratio"),
        Some(|s, v| s.r_ratio = Some(number(&v))),
        |s| s.r_ratio.map(number_text),
    ),
    row(
        Key::Round,
        "round",
        Parse::Choice(&ROUNDING_NAMES),
        Some(|s, v| s.rounding = ROUNDINGS[index(&v)].1),
        |s| name_of(&ROUNDINGS, &s.rounding),
    ),
    row(
        Key::Set,
        "set",
        parts_of(1e-15, 1e9, "a part value (Ω or F)"),
        Some(|s, v| s.overrides = parts(v)),
        |s| list_text(&s.overrides),
    ),
    row(
        Key::Tolset,
        "tolset",
        parts_of(0.0, 50.0, "a part tolerance in %"),
        Some(|s, v| s.tolerance_overrides = parts(v)),
        |s| list_text(&s.tolerance_overrides),
    ),
    row(
        Key::StageOrder,
        "stageorder",
        Parse::StageOrder,
        Some(|s, v| {
            if let Value::StageOrder(order) = v {
                s.stage_order = order;
            }
        }),
        |s| {
            Some(match &s.stage_order {
                StageOrder::AscendingQ => "q-up".to_string(),
                StageOrder::DescendingQ => "q-down".to_string(),
                StageOrder::Explicit(n) => n
                    .iter()
                    .map(|i| i.to_string())
                    .collect::<Vec<_>>()
                    .join(","),
            })
        },
    ),
    row(
        Key::Runs,
        "runs",
        int(1, 100_000, "number of tolerance runs"),
        Some(|s, v| s.study.runs = integer(&v) as usize),
        |s| Some(s.study.runs.to_string()),
    ),
    row(
        Key::Seed,
        "seed",
        int(0, u64::MAX, "random seed"),
        Some(|s, v| s.study.seed = integer(&v)),
        |s| Some(s.study.seed.to_string()),
    ),
    row(
        Key::Dist,
        "dist",
        Parse::Choice(&DISTRIBUTION_NAMES),
        Some(|s, v| s.study.distribution = DISTRIBUTIONS[index(&v)].1),
        |s| name_of(&DISTRIBUTIONS, &s.study.distribution),
    ),
    row(
        Key::Sigmas,
        "sigmas",
        num(1.0, 6.0, "standard deviations spanned by the tolerance"),
        Some(|s, v| s.study.sigmas = number(&v)),
        |s| Some(number_text(s.study.sigmas)),
    ),
    row(
        Key::Vin,
        "vin",
        num(1e-9, 1e3, "input amplitude in V peak"),
        Some(|s, v| s.signal.vin_pk = number(&v)),
        |s| Some(number_text(s.signal.vin_pk)),
    ),
    row(
        Key::Swing,
        "swing",
        num(1e-3, 1e3, "op-amp output swing in V peak"),
        Some(|s, v| s.signal.swing_pk = number(&v)),
        |s| Some(number_text(s.signal.swing_pk)),
    ),
    row(
        Key::Drift,
        "drift",
        num(
            0.01,
            50.0,
            "allowed deviation of the built board from its ideal-op-amp gain in %",
        ),
        Some(|s, v| s.signal.drift_pct = number(&v)),
        |s| Some(number_text(s.signal.drift_pct)),
    ),
    row(
        Key::NoiseBand,
        "noiseband",
        Parse::Band {
            range: ANALYSIS_HZ,
            what: "the noise band",
        },
        Some(|s, v| s.signal.noise_band_hz = band(&v)),
        |s| band_text(s.signal.noise_band_hz),
    ),
    row(
        Key::Span,
        "span",
        Parse::Band {
            range: SPAN_READ_HZ,
            what: "the plot span",
        },
        Some(|s, v| s.span_hz = band(&v)),
        |s| band_text(s.span_hz),
    ),
];

// Each row sits at its key's index, so `row_of` needs no search.
const _: () = {
    let mut i = 0;
    while i < TABLE.len() {
        assert!(TABLE[i].key as usize == i, "TABLE rows out of Key order");
        i += 1;
    }
};

/// The row of a key.
pub(crate) fn row_of(key: Key) -> &'static Row {
    &TABLE[key as usize]
}

/// A key's name in a current link (for messages).
pub(crate) fn name(key: Key) -> &'static str {
    row_of(key).name
}

/// Every key this version reads, by its current (version 2) name, in the writer's order.
pub const KEYS: [&str; TABLE.len()] = {
    let mut out = [""; TABLE.len()];
    let mut i = 0;
    while i < TABLE.len() {
        out[i] = TABLE[i].name;
        i += 1;
    }
    out
};

/// The names a version-1 link uses for the same keys (the four limits had other names).
pub(crate) const V1_KEYS: [&str; TABLE.len()] = {
    let mut out = [""; TABLE.len()];
    let mut i = 0;
    while i < TABLE.len() {
        out[i] = TABLE[i].v1_name;
        i += 1;
    }
    out
};

#[cfg(test)]
mod tests {
    use super::*;
    use crate::link::parse;

    #[test]
    fn names_are_unique_in_each_version() {
        for names in [&KEYS, &V1_KEYS] {
            for (i, a) in names.iter().enumerate() {
                assert!(
                    !names[i + 1..].contains(a),
                    "{a} appears twice in {names:?}"
                );
            }
        }
    }

    #[test]
    fn only_the_four_limits_were_renamed() {
        // Source: README "Version 1 links" (fpass → passedge, apass → passloss,
        // fstop → stopedge, astop → stopdepth; every other key is the same).
        let renamed: Vec<(&str, &str)> = TABLE
            .iter()
            .filter(|r| r.name != r.v1_name)
            .map(|r| (r.v1_name, r.name))
            .collect();
        assert_eq!(
            renamed,
            vec![
                ("fpass", "passedge"),
                ("apass", "passloss"),
                ("fstop", "stopedge"),
                ("astop", "stopdepth"),
            ]
        );
    }

    #[test]
    fn choice_names_agree_with_the_values_own_keys() {
        // The link names of the enums that carry a key of their own must be the same words.
        for (name, class) in CLASSES {
            assert_eq!(name, class.key());
        }
        for (name, margin) in MARGINS {
            assert_eq!(name, margin.key());
        }
        for (name, topology) in TOPOLOGIES {
            assert_eq!(name, topology.key());
        }
        for (name, series) in SERIES {
            assert_eq!(name, series.key());
        }
    }

    #[test]
    fn every_default_text_reads_back_to_the_default_state() {
        // A form that shows the defaults, read as a link, designs what an empty link designs.
        // Keys that only count together with others are read in that company: the ripple with a
        // Chebyshev, the passband loss with the other three limits.
        for row in TABLE.iter().filter(|r| r.key != Key::V) {
            let text = row.default_text();
            if text.is_empty() {
                continue;
            }
            let company = match row.key {
                Key::Ripple => "family=chebyshev&",
                Key::PassLoss => "passedge=1k&stopedge=2k&stopdepth=40&",
                _ => "",
            };
            let with = parse(&format!("?{company}{}={text}", row.name));
            let without = parse(&format!("?{company}"));
            assert!(with.errors.is_empty(), "{}: {:?}", row.name, with.errors);
            assert_eq!(with.state, without.state, "{}={text}", row.name);
        }
    }
}

//! Minimum order of each family for a specification mask.
//!
//! A mask is first reduced to the normalized low-pass problem (scipy.signal `buttord`/`cheb1ord`
//! with `analog=True` do the same): the passband edge maps to 1 and the stopband edge to the
//! *selectivity* `ν`:
//!
//! * low-pass: `ν = f_stop / f_pass`;
//! * high-pass: `ν = f_pass / f_stop`;
//! * band-pass with passband edges `(p_lo, p_hi)`: each stopband edge `f_s` maps to
//!   `|(f_s² − p_lo·p_hi) / (f_s·(p_lo − p_hi))|` under the low-pass → band-pass transform centred
//!   on `√(p_lo·p_hi)` with bandwidth `p_hi − p_lo`, and `ν` is the smaller of the two, so that
//!   asymmetric stopband edges are handled as scipy does;
//! * band-stop with passband edges `(p_lo, p_hi)` (outer) and stopband edges (inner): each
//!   stopband edge maps to `|f_s·(p_lo − p_hi) / (f_s² − p_lo·p_hi)|` under the low-pass →
//!   band-stop transform, `ν` the smaller; as scipy's `buttord` … `ellipord` do, each passband
//!   edge is first moved towards its stopband edge (the other held where the mask puts it) to the
//!   place that makes `ν` largest, because an asymmetric mask is met by a geometrically symmetric
//!   band-stop with a lower order when its centre moves (see [`bandstop_passband`]).
//!
//! Butterworth and Chebyshev (ripple = `apass`) then have closed forms:
//! `n = ⌈log10((10^(As/10) − 1)/(10^(Ap/10) − 1)) / (2·log10 ν)⌉` and
//! `n = ⌈acosh(√((10^(As/10) − 1)/(10^(Ap/10) − 1))) / acosh ν⌉`; inverse Chebyshev (its depth
//! = `astop`) has the Chebyshev form too, and elliptic (ripple = `apass`, depth = `astop`) the
//! degree equation `n = ⌈K(1/ν²)·K'(k1²) / (K'(1/ν²)·K(k1²))⌉` with
//! `k1² = (10^(Ap/10) − 1)/(10^(As/10) − 1)` (scipy `cheb2ord`, `ellipord`).
//! Bessel, Linkwitz-Riley (even orders), critically damped, and Chebyshev with a ripple below
//! `apass` are found by a search over the orders: for each order the prototype's passband edge
//! `w_p` (where its attenuation is `apass`) is placed on the mask's passband edge, and the order is
//! accepted when the attenuation at `ν·w_p` reaches `astop`.
//!
//! Inverse Chebyshev and elliptic take their stopband depth from the mask's `astop`.
//!
//! Orders are counted as the link key `order` counts them: a band-pass or band-stop filter has
//! twice the poles of its prototype, so its prototype order is at most 10.

use crate::error::InputError;
use crate::fmath;
use crate::prototype::{self, MAX_ORDER};
use crate::spec::{Edge, Family, Mask, ResponseClass};

/// A minimum order that meets the mask.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub struct MinOrder {
    /// Poles of the whole filter (link key `order`): `prototype_order` for low- and high-pass,
    /// twice that for band-pass.
    pub order: usize,
    /// Order of the normalized low-pass prototype (what scipy's `buttord` returns).
    pub prototype_order: usize,
}

/// Why no order is given for a family.
#[derive(Debug, Clone, PartialEq)]
pub enum OrderError {
    /// No order up to 20 (poles of the whole filter) meets the mask. `needed` is the order the
    /// closed form asks for (Butterworth, Chebyshev with ripple = apass), counted like
    /// [`MinOrder::order`]; `None` when a search up to the limit found none.
    AboveLimit {
        /// The family that was asked for.
        family: Family,
        /// Poles the mask would need, when a closed form tells.
        needed: Option<usize>,
        /// The highest order that was allowed (20, counted like `order`).
        limit: usize,
    },
    /// The mask (or the ripple against it) is not usable.
    Input(InputError),
}

impl OrderError {
    /// The error as the user sees it: `AboveLimit` is reported on `astop`, with a message that
    /// names `fstop`, `astop` and `order`.
    pub fn to_input_error(&self) -> InputError {
        match self {
            Self::Input(e) => e.clone(),
            Self::AboveLimit {
                family,
                needed,
                limit,
            } => {
                let need = match needed {
                    Some(n) => format!("needs order {n}"),
                    None => format!("needs more than order {limit}"),
                };
                InputError::new(
                    "stopdepth",
                    format!(
                        "{} {need} to reach stopdepth at stopedge, and orders above {limit} are not \
                         designed; move stopedge away from the passband, lower stopdepth, raise passloss, \
                         or set a fixed order",
                        family_name(*family)
                    ),
                )
            }
        }
    }
}

impl From<InputError> for OrderError {
    fn from(e: InputError) -> Self {
        Self::Input(e)
    }
}

impl From<OrderError> for InputError {
    fn from(e: OrderError) -> Self {
        e.to_input_error()
    }
}

/// One row of the family comparison: a family and its minimum order, or the reason there is none.
#[derive(Debug, Clone, PartialEq)]
pub struct FamilyOrder {
    /// The family (Chebyshev with the ripple used for the comparison).
    pub family: Family,
    /// Its minimum order for the mask, or why there is none.
    pub result: Result<MinOrder, OrderError>,
}

/// A readable family name for messages (`Chebyshev 0.5 dB`, `Linkwitz-Riley`, …).
pub fn family_name(family: Family) -> String {
    match family {
        Family::Butterworth => "Butterworth".into(),
        Family::Chebyshev { ripple_db } => format!("Chebyshev {ripple_db} dB"),
        Family::Bessel => "Bessel".into(),
        Family::LinkwitzRiley => "Linkwitz-Riley".into(),
        Family::Critical => "critically damped".into(),
        Family::InverseChebyshev { .. } => "inverse Chebyshev".into(),
        Family::Elliptic { ripple_db, .. } => format!("elliptic {ripple_db} dB"),
    }
}

/// The selectivity `ν > 1` of a mask: where its stopband edge falls in the low-pass prototype
/// whose passband edge is at 1 (formulas in the module docs, as in scipy's `_find_nat_freq`).
///
/// # Errors
/// `fpass` or `fstop` when an edge is not a positive finite frequency, has the wrong form for the
/// class (one value for lp/hp, `lo,hi` for bp), or the stopband is not outside the passband;
/// `apass`/`astop` when the attenuations are not `0 < apass < astop`.
pub fn selectivity(class: ResponseClass, mask: &Mask) -> Result<f64, InputError> {
    check_attenuations(mask)?;
    match (class, mask.pass, mask.stop) {
        (ResponseClass::LowPass, Edge::Single(fp), Edge::Single(fs)) => {
            check_frequency("passedge", fp)?;
            check_frequency("stopedge", fs)?;
            if fs <= fp {
                return Err(InputError::new(
                    "stopedge",
                    format!(
                        "a low-pass stopband edge must lie above passedge ({fp} Hz), got {fs} Hz"
                    ),
                ));
            }
            Ok(fs / fp)
        }
        (ResponseClass::HighPass, Edge::Single(fp), Edge::Single(fs)) => {
            check_frequency("passedge", fp)?;
            check_frequency("stopedge", fs)?;
            if fs >= fp {
                return Err(InputError::new(
                    "stopedge",
                    format!(
                        "a high-pass stopband edge must lie below passedge ({fp} Hz), got {fs} Hz"
                    ),
                ));
            }
            Ok(fp / fs)
        }
        (ResponseClass::BandPass, Edge::Pair(p_lo, p_hi), Edge::Pair(s_lo, s_hi)) => {
            for (key, f) in [
                ("passedge", p_lo),
                ("passedge", p_hi),
                ("stopedge", s_lo),
                ("stopedge", s_hi),
            ] {
                check_frequency(key, f)?;
            }
            if p_lo >= p_hi {
                return Err(InputError::new(
                    "passedge",
                    format!("band-pass edges must be lo,hi with lo < hi, got {p_lo},{p_hi}"),
                ));
            }
            if !(s_lo < p_lo && s_hi > p_hi) {
                return Err(InputError::new(
                    "stopedge",
                    format!(
                        "band-pass stopband edges must lie outside the passband \
                         ({p_lo}–{p_hi} Hz): lo below {p_lo} Hz, hi above {p_hi} Hz; got \
                         {s_lo},{s_hi}"
                    ),
                ));
            }
            // Same expression and order of operations as scipy's band-pass branch.
            let map = |ws: f64| ((ws * ws - p_lo * p_hi) / (ws * (p_lo - p_hi))).abs();
            Ok(map(s_lo).min(map(s_hi)))
        }
        (ResponseClass::BandStop, Edge::Pair(..), Edge::Pair(s_lo, s_hi)) => {
            let (p_lo, p_hi) = check_bandstop(mask)?;
            let (q_lo, q_hi) = bandstop_passband(p_lo, p_hi, s_lo, s_hi);
            Ok(bandstop_selectivity(q_lo, q_hi, s_lo, s_hi))
        }
        (ResponseClass::BandPass | ResponseClass::BandStop, _, _) => Err(InputError::new(
            if matches!(mask.pass, Edge::Pair(..)) {
                "stopedge"
            } else {
                "passedge"
            },
            "a band-pass or band-stop mask needs two edges, lo,hi, for passedge and for stopedge",
        )),
        (_, _, _) => Err(InputError::new(
            if matches!(mask.pass, Edge::Single(_)) {
                "stopedge"
            } else {
                "passedge"
            },
            "a low-pass or high-pass mask needs one frequency for passedge and one for stopedge",
        )),
    }
}

/// Checks a band-stop mask's edges: four positive frequencies, the stopband edges strictly inside
/// the passband edges. Returns the passband edges.
fn check_bandstop(mask: &Mask) -> Result<(f64, f64), InputError> {
    let (Edge::Pair(p_lo, p_hi), Edge::Pair(s_lo, s_hi)) = (mask.pass, mask.stop) else {
        return Err(InputError::new(
            "passedge",
            "a band-stop mask needs two edges, lo,hi, for passedge and for stopedge",
        ));
    };
    for (key, f) in [
        ("passedge", p_lo),
        ("passedge", p_hi),
        ("stopedge", s_lo),
        ("stopedge", s_hi),
    ] {
        check_frequency(key, f)?;
    }
    if p_lo >= p_hi || s_lo >= s_hi {
        return Err(InputError::new(
            if p_lo >= p_hi { "passedge" } else { "stopedge" },
            "band-stop edges must be lo,hi with lo < hi",
        ));
    }
    if !(p_lo < s_lo && s_hi < p_hi) {
        return Err(InputError::new(
            "stopedge",
            format!(
                "band-stop stopband edges must lie inside the passband edges ({p_lo}–{p_hi} Hz): \
                 lo above {p_lo} Hz, hi below {p_hi} Hz; got {s_lo},{s_hi}"
            ),
        ));
    }
    Ok((p_lo, p_hi))
}

/// `ν` of a band-stop with passband edges `(p_lo, p_hi)` and stopband edges `(s_lo, s_hi)`:
/// the smaller of `|f_s·(p_lo − p_hi) / (f_s² − p_lo·p_hi)|` over both stopband edges (scipy's
/// expression).
pub fn bandstop_selectivity(p_lo: f64, p_hi: f64, s_lo: f64, s_hi: f64) -> f64 {
    let map = |ws: f64| (ws * (p_lo - p_hi) / (ws * ws - p_lo * p_hi)).abs();
    map(s_lo).min(map(s_hi))
}

/// The passband edges a band-stop is designed for: `p_lo` moved within `[p_lo, s_lo)` (with
/// `p_hi` where the mask puts it) and `p_hi` within `(s_hi, p_hi]` (with `p_lo` where the mask
/// puts it) to where [`bandstop_selectivity`] is largest, then both moved — the procedure of
/// scipy's `_find_nat_freq` for band-stop. Each search is a scan of 64 points refined by golden
/// sections; the moved edges lie inside the mask's passband edges, so a filter that meets them
/// meets the mask.
pub fn bandstop_passband(p_lo: f64, p_hi: f64, s_lo: f64, s_hi: f64) -> (f64, f64) {
    let q_lo = maximize(
        |x| bandstop_selectivity(x, p_hi, s_lo, s_hi),
        p_lo,
        s_lo - 1e-12 * s_lo,
    );
    let q_hi = maximize(
        |x| bandstop_selectivity(p_lo, x, s_lo, s_hi),
        s_hi + 1e-12 * s_hi,
        p_hi,
    );
    (q_lo, q_hi)
}

/// The `x` in `[a, b]` where `f` is largest: a scan, then golden sections around the best point.
fn maximize(f: impl Fn(f64) -> f64, a: f64, b: f64) -> f64 {
    if !(a < b) {
        return a;
    }
    const SCAN: usize = 64;
    let at = |i: usize| a + (b - a) * i as f64 / SCAN as f64;
    let mut best = 0;
    for i in 1..=SCAN {
        if f(at(i)) > f(at(best)) {
            best = i;
        }
    }
    let (mut lo, mut hi) = (at(best.saturating_sub(1)), at((best + 1).min(SCAN)));
    let ratio = 0.618_033_988_749_894_9;
    for _ in 0..200 {
        if hi - lo <= 1e-15 * hi.abs() {
            break;
        }
        let x1 = hi - ratio * (hi - lo);
        let x2 = lo + ratio * (hi - lo);
        if f(x1) < f(x2) {
            lo = x1;
        } else {
            hi = x2;
        }
    }
    let mid = 0.5 * (lo + hi);
    if f(at(best)) > f(mid) {
        at(best)
    } else {
        mid
    }
}

fn check_frequency(key: &str, f: f64) -> Result<(), InputError> {
    if f.is_finite() && f > 0.0 {
        Ok(())
    } else {
        Err(InputError::new(
            key,
            format!("{key} must be a positive frequency in Hz, got {f}"),
        ))
    }
}

fn check_attenuations(mask: &Mask) -> Result<(), InputError> {
    if !(mask.apass_db.is_finite() && mask.apass_db > 0.0) {
        return Err(InputError::new(
            "passloss",
            format!(
                "passloss must be a positive attenuation in dB, got {}",
                mask.apass_db
            ),
        ));
    }
    if !(mask.astop_db.is_finite() && mask.astop_db > mask.apass_db) {
        return Err(InputError::new(
            "stopdepth",
            format!(
                "stopdepth must be a finite attenuation above passloss ({} dB), got {}",
                mask.apass_db, mask.astop_db
            ),
        ));
    }
    Ok(())
}

/// Largest prototype order for a class: 20 for lp/hp, 10 for band-pass and band-stop (20 poles
/// in all).
pub fn max_prototype_order(class: ResponseClass) -> usize {
    if class.is_band() {
        MAX_ORDER / 2
    } else {
        MAX_ORDER
    }
}

/// Poles of the whole filter for a prototype order (×2 for band-pass and band-stop).
pub fn total_order(class: ResponseClass, prototype_order: usize) -> usize {
    if class.is_band() {
        2 * prototype_order
    } else {
        prototype_order
    }
}

/// The minimum order of `family` that meets `mask` for `class`.
///
/// Closed forms for Butterworth and for Chebyshev whose ripple equals `apass` (scipy `buttord`,
/// `cheb1ord`, `analog=True`); a search over orders 1–20 (even only for Linkwitz-Riley; prototype
/// orders up to 10 for band-pass) for the others. See the module docs.
///
/// # Errors
/// [`OrderError::Input`] for an unusable mask (see [`selectivity`]) or a Chebyshev ripple outside
/// 0.01–3 dB or above `apass`; [`OrderError::AboveLimit`] when no allowed order meets the mask.
pub fn min_order(
    family: Family,
    class: ResponseClass,
    mask: &Mask,
) -> Result<MinOrder, OrderError> {
    let family = family.with_stop_depth(mask.astop_db);
    let nu = selectivity(class, mask)?;
    let max_proto = max_prototype_order(class);
    let too_high = |needed: Option<usize>| OrderError::AboveLimit {
        family,
        needed: needed.map(|n| total_order(class, n)),
        limit: MAX_ORDER,
    };
    let accept = |n: usize| {
        if n <= max_proto {
            Ok(MinOrder {
                order: total_order(class, n),
                prototype_order: n,
            })
        } else {
            Err(too_high(Some(n)))
        }
    };
    // Same expressions as scipy so that the rounding up agrees to the last bit.
    let g_stop = fmath::powf(10f64, 0.1 * mask.astop_db);
    let g_pass = fmath::powf(10f64, 0.1 * mask.apass_db);
    match family {
        Family::Butterworth => {
            let real = fmath::log10((g_stop - 1.0) / (g_pass - 1.0)) / (2.0 * fmath::log10(nu));
            accept(closed_form_order(real))
        }
        Family::Chebyshev { ripple_db } => {
            prototype::validate(family, 1)?;
            let same = (ripple_db - mask.apass_db).abs() <= 1e-9 * ripple_db.max(1.0);
            if same {
                let real =
                    fmath::acosh(((g_stop - 1.0) / (g_pass - 1.0)).sqrt()) / fmath::acosh(nu);
                accept(closed_form_order(real))
            } else if ripple_db > mask.apass_db {
                Err(OrderError::Input(InputError::new(
                    "ripple",
                    format!(
                        "ripple {ripple_db} dB is larger than passloss {} dB, so the passband \
                         ripple alone breaks the mask; set ripple at most passloss",
                        mask.apass_db
                    ),
                )))
            } else {
                search(family, 1, 1, max_proto, nu, mask).map_or(Err(too_high(None)), accept)
            }
        }
        Family::LinkwitzRiley => {
            search(family, 2, 2, max_proto, nu, mask).map_or(Err(too_high(None)), accept)
        }
        Family::Bessel | Family::Critical => {
            search(family, 1, 1, max_proto, nu, mask).map_or(Err(too_high(None)), accept)
        }
        Family::InverseChebyshev { .. } => {
            prototype::validate(family, 1)?;
            let real = fmath::acosh(((g_stop - 1.0) / (g_pass - 1.0)).sqrt()) / fmath::acosh(nu);
            accept(closed_form_order(real))
        }
        Family::Elliptic { ripple_db, .. } => {
            prototype::validate(family, 1)?;
            let same = (ripple_db - mask.apass_db).abs() <= 1e-9 * ripple_db.max(1.0);
            if same {
                accept(closed_form_order(elliptic_degree(nu, mask)))
            } else if ripple_db > mask.apass_db {
                Err(OrderError::Input(InputError::new(
                    "ripple",
                    format!(
                        "ripple {ripple_db} dB is larger than passloss {} dB, so the passband \
                         ripple alone breaks the mask; set ripple at most passloss",
                        mask.apass_db
                    ),
                )))
            } else {
                search(family, 1, 1, max_proto, nu, mask).map_or(Err(too_high(None)), accept)
            }
        }
    }
}

/// The real order the elliptic degree equation asks for (scipy's `ellipord`):
/// `K(1/ν²)·K'(k1²) / (K'(1/ν²)·K(k1²))`, `k1² = (10^(Ap/10) − 1)/(10^(As/10) − 1)`.
fn elliptic_degree(nu: f64, mask: &Mask) -> f64 {
    use prototype::elliptic::{ellipk, ellipkm1};
    let ln10 = std::f64::consts::LN_10;
    let arg1_sq =
        fmath::exp_m1(0.1 * mask.apass_db * ln10) / fmath::exp_m1(0.1 * mask.astop_db * ln10);
    let arg0 = 1.0 / nu;
    let m0 = arg0 * arg0;
    ellipk(m0) * ellipkm1(arg1_sq) / (ellipkm1(m0) * ellipk(arg1_sq))
}

/// `⌈x⌉` as an order, at least 1; saturates for absurd values instead of wrapping.
fn closed_form_order(real: f64) -> usize {
    if real.is_nan() {
        return usize::MAX;
    }
    let up = real.ceil().max(1.0);
    if up > 1e6 {
        usize::MAX
    } else {
        up as usize
    }
}

/// The first prototype order in `first, first+step, … ≤ last` whose attenuation at `ν·w_p`
/// reaches `astop`, `w_p` being where it reaches `apass`.
fn search(
    family: Family,
    first: usize,
    step: usize,
    last: usize,
    nu: f64,
    mask: &Mask,
) -> Option<usize> {
    (first..=last).step_by(step).find(|&n| {
        prototype::prototype(family, n)
            .ok()
            .and_then(|proto| {
                let w_pass = proto.passband_edge(mask.apass_db).ok()?;
                Some(proto.stopband_floor_db(nu * w_pass) >= mask.astop_db)
            })
            .unwrap_or(false)
    })
}

/// The minimum order of all seven families for one mask, side by side (the family comparison).
///
/// Chebyshev and elliptic use `chebyshev_ripple_db`, or when `None` the mask's `apass` clamped to
/// 0.01–3 dB (the usual choice: the ripple band is the allowed passband loss); inverse Chebyshev
/// and elliptic take the mask's `astop` as their depth.
pub fn compare_families(
    class: ResponseClass,
    mask: &Mask,
    chebyshev_ripple_db: Option<f64>,
) -> Vec<FamilyOrder> {
    let ripple_db = chebyshev_ripple_db.unwrap_or_else(|| {
        mask.apass_db
            .clamp(prototype::MIN_RIPPLE_DB, prototype::MAX_RIPPLE_DB)
    });
    [
        Family::Butterworth,
        Family::Chebyshev { ripple_db },
        Family::Bessel,
        Family::LinkwitzRiley,
        Family::Critical,
        Family::InverseChebyshev {
            astop_db: mask.astop_db,
        },
        Family::Elliptic {
            ripple_db,
            astop_db: mask.astop_db,
        },
    ]
    .into_iter()
    .map(|family| FamilyOrder {
        family,
        result: min_order(family, class, mask),
    })
    .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lp_mask(fp: f64, fs: f64, ap: f64, a_s: f64) -> Mask {
        Mask {
            pass: Edge::Single(fp),
            apass_db: ap,
            stop: Edge::Single(fs),
            astop_db: a_s,
        }
    }

    #[test]
    fn bad_masks_name_their_key() {
        let lp = ResponseClass::LowPass;
        let key = |m: Mask, c| selectivity(c, &m).unwrap_err().key;
        assert_eq!(key(lp_mask(1e3, 500.0, 1.0, 40.0), lp), "stopedge");
        assert_eq!(key(lp_mask(1e3, 2e3, 0.0, 40.0), lp), "passloss");
        assert_eq!(key(lp_mask(1e3, 2e3, 3.0, 2.0), lp), "stopdepth");
        assert_eq!(key(lp_mask(f64::NAN, 2e3, 1.0, 40.0), lp), "passedge");
        assert_eq!(
            key(lp_mask(1e3, 2e3, 1.0, 40.0), ResponseClass::HighPass),
            "stopedge"
        );
        assert_eq!(
            key(lp_mask(1e3, 2e3, 1.0, 40.0), ResponseClass::BandPass),
            "passedge"
        );
    }

    #[test]
    fn too_tight_a_mask_reports_above_limit() {
        let mask = lp_mask(1e3, 1.01e3, 0.1, 100.0);
        for row in compare_families(ResponseClass::LowPass, &mask, None) {
            let err = row.result.unwrap_err();
            assert!(matches!(err, OrderError::AboveLimit { .. }), "{err:?}");
            let input = err.to_input_error();
            assert_eq!(input.key, "stopdepth");
            assert!(input.message.contains("stopedge") && input.message.contains("order"));
        }
    }

    #[test]
    fn linkwitz_riley_orders_are_even() {
        let mask = lp_mask(1e3, 3e3, 3.0, 33.0);
        let got = min_order(Family::LinkwitzRiley, ResponseClass::LowPass, &mask).unwrap();
        assert_eq!(got.order % 2, 0);
    }
}

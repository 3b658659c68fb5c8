//! The synthesis: requirement → response → sections (the composer, [`crate::pipeline`], takes it
//! on to stages, standard values, the board and its analyses).
//!
//! [`synthesize`]: requirement → order → prototype →
//! transform → sections. It reads like the pipeline:
//!
//! 1. the prototype order: the fixed `order`, or the minimum for the mask ([`crate::order`]);
//! 2. the prototype at 1 rad/s ([`crate::prototype`]);
//! 3. the band: `fc` (and `bw`) from the requirement, or placed from the mask with its spare
//!    selectivity shared between the edges, given to the stopband (the passband edge gets exactly
//!    `apass`) or given to the passband, as link key `margin` says (see [`band_from_mask`]);
//! 4. the transform ([`crate::transform`]) and the sections ([`crate::sections`]), with the overall
//!    gain split evenly in dB and the chosen stage order.

use crate::fmath;
use num_complex::Complex64;

use crate::error::InputError;
use crate::order;
use crate::prototype::{self, Prototype};
use crate::response;
use crate::section::Section;
use crate::sections::{self, StageOrder};
use crate::spec::{Edge, Family, MarginPlacement, Mask, OrderChoice, Requirement, ResponseClass};
use crate::transform::{self, Band};

const TWO_PI: f64 = 2.0 * std::f64::consts::PI;

/// The synthesized response: poles, zeros and sections, before any circuit is chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct Synthesis {
    /// Poles of the whole filter (link key `order`; a band-pass has twice its prototype's).
    pub order: usize,
    /// The family (Chebyshev with its ripple).
    pub family: Family,
    /// Low-pass, high-pass or band-pass.
    pub class: ResponseClass,
    /// lp/hp: the frequency the prototype's 1 rad/s maps to, Hz (the −3.01 dB point for
    /// Butterworth, Bessel and critically damped, −6.02 dB for Linkwitz-Riley, the ripple-band edge
    /// for Chebyshev); bp: the geometric centre, Hz.
    pub fc_hz: f64,
    /// bp: the bandwidth between the two frequencies the prototype's 1 rad/s maps to, Hz
    /// (`None` for lp/hp).
    pub bw_hz: Option<f64>,
    /// Poles of the normalized prototype (1 rad/s), conjugate pairs as `p, p*`.
    pub prototype_poles: Vec<Complex64>,
    /// Poles of the filter, rad/s, conjugate pairs as `p, p*`.
    pub poles: Vec<Complex64>,
    /// Number of zeros at the origin (lp and bs 0, hp `order`, bp `order/2`, less the
    /// prototype's jω-axis zeros); the zeros not here or in `zeros` are at infinity.
    pub zeros_at_origin: usize,
    /// Every finite zero of the filter, rad/s: the ones at the origin, then each jω-axis pair as
    /// `+jω, −jω` (as scipy's `zpk` output lists them).
    pub zeros: Vec<Complex64>,
    /// The sections in stage (signal) order, with the overall gain distributed.
    pub sections: Vec<Section>,
    /// Soft problems: values that were ignored, a fixed order that misses its mask, and the like.
    pub warnings: Vec<String>,
}

/// Designs the response for a requirement.
///
/// The cutoff follows the requirement: with a fixed order and `fc` (and `bw` for band-pass) the
/// given values are used; otherwise the band is placed from the mask by [`band_from_mask`]. In
/// mask mode (`order` absent) a given `fc`/`bw` is ignored with a warning, because the minimum
/// order is only minimal for the band the mask implies. When a fixed order comes with a mask,
/// the mask is checked and a miss is reported as a warning.
///
/// The overall gain `gain_db` is the passband maximum (an even-order Chebyshev has its DC or
/// centre gain `ripple` dB below it) and is split evenly in dB over the sections
/// ([`sections::distribute_gain`]).
///
/// # Errors
/// `order` (out of 1–20, odd for band-pass or Linkwitz-Riley, or absent with no mask), `ripple`,
/// `fc`, `bw`, `gain`, the mask keys `passedge`, `passloss`, `stopedge`, `stopdepth` (see
/// [`order::selectivity`]; no order up to 20 is reported on `stopdepth`), and `stageorder` (see
/// [`sections::arrange`]).
pub fn synthesize(req: &Requirement, stage_order: &StageOrder) -> Result<Synthesis, InputError> {
    let mut warnings = Vec::new();
    if !req.gain_db.is_finite() || req.gain_db.abs() > 200.0 {
        return Err(InputError::new(
            "gain",
            format!(
                "gain must be a finite passband gain in dB (−200 to 200), got {}",
                req.gain_db
            ),
        ));
    }
    let class = req.class;
    // With limits, inverse Chebyshev and elliptic take their stopband depth from the mask.
    let family = match req.mask.as_ref() {
        Some(mask) => req.family.with_stop_depth(mask.astop_db),
        None => req.family,
    };

    // 1. Prototype order.
    let prototype_order = match req.order {
        OrderChoice::Fixed(n) => fixed_prototype_order(class, family, n)?,
        OrderChoice::FromMask => {
            let mask = req.mask.as_ref().ok_or_else(|| {
                InputError::new(
                    "order",
                    "give an order (1–20), or a specification (passedge, passloss, stopedge, stopdepth) \
                     from which the order follows",
                )
            })?;
            order::min_order(family, class, mask)?.prototype_order
        }
    };

    // 2. Prototype.
    let proto = prototype::prototype(family, prototype_order)?;

    // 3. Band.
    let given = given_band(req)?;
    let band = match (req.order, given, req.mask.as_ref()) {
        (OrderChoice::Fixed(_), Some(band), _) => band,
        (OrderChoice::Fixed(_), None, Some(mask)) => {
            if req.fc_hz.is_some() || req.bw_hz.is_some() {
                warnings.push(
                    "fc or bw alone does not fix a band-pass; centre and bandwidth follow from \
                     the specification"
                        .to_string(),
                );
            }
            band_from_mask(&proto, class, mask, req.margin)?
        }
        (OrderChoice::Fixed(_), None, None) => {
            return Err(missing_band_error(class, req));
        }
        (OrderChoice::FromMask, _, Some(mask)) => {
            if req.fc_hz.is_some() || req.bw_hz.is_some() {
                warnings.push(
                    "fc/bw ignored: with no fixed order the cutoff follows from the \
                     specification"
                        .to_string(),
                );
            }
            band_from_mask(&proto, class, mask, req.margin)?
        }
        (OrderChoice::FromMask, _, None) => {
            // Unreachable after step 1, which already demanded a mask; kept as an error, not a
            // panic, for a hand-built requirement.
            return Err(InputError::new(
                "order",
                "give an order (1–20), or a specification (passedge, passloss, stopedge, stopdepth)",
            ));
        }
    };

    // 4. Transform and sections.
    let target = transform::transform(&proto, band);
    let mut ascending = sections::from_target(&target);
    sections::distribute_gain(&mut ascending, band, proto.reference_gain(), req.gain_db);
    let staged = sections::arrange(&ascending, stage_order)?;

    if let (OrderChoice::Fixed(_), Some(mask)) = (req.order, req.mask.as_ref()) {
        warnings.extend(mask_misses(&staged, mask, req.gain_db));
        if let Ok(min) = order::min_order(family, class, mask) {
            if min.order > order::total_order(class, prototype_order) {
                warnings.push(format!(
                    "order {} is below the {} minimum of {} for the specification",
                    order::total_order(class, prototype_order),
                    order::family_name(family),
                    min.order
                ));
            }
        }
    }

    let (fc_hz, bw_hz) = match band {
        Band::LowPass { wc } | Band::HighPass { wc } => (wc / TWO_PI, None),
        Band::BandPass { w0, bw } | Band::BandStop { w0, bw } => (w0 / TWO_PI, Some(bw / TWO_PI)),
    };
    Ok(Synthesis {
        order: order::total_order(class, prototype_order),
        family,
        class,
        fc_hz,
        bw_hz,
        prototype_poles: proto.poles(),
        poles: target.poles(),
        zeros_at_origin: target.zeros_at_origin,
        zeros: target.zeros(),
        sections: staged,
        warnings,
    })
}

/// The prototype order for a fixed `order` (poles of the whole filter).
fn fixed_prototype_order(
    class: ResponseClass,
    family: Family,
    n: usize,
) -> Result<usize, InputError> {
    if n == 0 || n > prototype::MAX_ORDER {
        return Err(InputError::new(
            "order",
            format!("order must be 1–{}, got {n}", prototype::MAX_ORDER),
        ));
    }
    if class.is_band() {
        if n % 2 != 0 {
            return Err(InputError::new(
                "order",
                format!(
                    "a band-pass or band-stop order counts the poles of the whole filter and \
                     must be even (2–20), got {n}"
                ),
            ));
        }
        if family == Family::LinkwitzRiley && n % 4 != 0 {
            return Err(InputError::new(
                "order",
                format!(
                    "a Linkwitz-Riley band-pass needs an order that is a multiple of 4 (4–20), \
                     got {n}"
                ),
            ));
        }
        Ok(n / 2)
    } else {
        Ok(n)
    }
}

/// The band given by `fc` (and `bw`), when complete.
fn given_band(req: &Requirement) -> Result<Option<Band>, InputError> {
    let positive = |key: &str, v: f64| {
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(InputError::new(
                key,
                format!("{key} must be a positive frequency in Hz, got {v}"),
            ))
        }
    };
    Ok(match req.class {
        ResponseClass::LowPass => match req.fc_hz {
            Some(fc) => Some(Band::LowPass {
                wc: TWO_PI * positive("fc", fc)?,
            }),
            None => None,
        },
        ResponseClass::HighPass => match req.fc_hz {
            Some(fc) => Some(Band::HighPass {
                wc: TWO_PI * positive("fc", fc)?,
            }),
            None => None,
        },
        ResponseClass::BandPass => match (req.fc_hz, req.bw_hz) {
            (Some(fc), Some(bw)) => Some(Band::BandPass {
                w0: TWO_PI * positive("fc", fc)?,
                bw: TWO_PI * positive("bw", bw)?,
            }),
            _ => None,
        },
        ResponseClass::BandStop => match (req.fc_hz, req.bw_hz) {
            (Some(fc), Some(bw)) => Some(Band::BandStop {
                w0: TWO_PI * positive("fc", fc)?,
                bw: TWO_PI * positive("bw", bw)?,
            }),
            _ => None,
        },
    })
}

fn missing_band_error(class: ResponseClass, req: &Requirement) -> InputError {
    match class {
        ResponseClass::BandPass | ResponseClass::BandStop if req.fc_hz.is_some() => {
            InputError::new(
                "bw",
                "a band-pass or band-stop with a fixed order needs bw (Hz) beside fc, or a \
                 specification",
            )
        }
        ResponseClass::BandPass | ResponseClass::BandStop => InputError::new(
            "fc",
            "a band-pass or band-stop with a fixed order needs fc (geometric centre, Hz) and bw \
             (Hz), or a specification",
        ),
        _ => InputError::new(
            "fc",
            "a fixed order needs fc (cutoff, Hz), or a specification (passedge, passloss, stopedge, stopdepth)",
        ),
    }
}

/// Places the band from the mask; `margin` decides which edge keeps the spare selectivity.
///
/// Every class reduces to one number, the prototype frequency `u` (rad/s, normalized) that the
/// passband edge maps to: low-pass `fc = fpass / u`; high-pass `fc = fpass · u`; band-pass centre
/// `√(fpass_lo · fpass_hi)` and bandwidth `(fpass_hi − fpass_lo) / u`, so that `u` lands on both
/// passband edges. The nearer stopband edge then maps to `Ω·u`, with `Ω` the selectivity of
/// [`order::selectivity`] (band-pass: the worse of the two stopband edges). With `A(w)` the
/// prototype attenuation in dB ([`Prototype::attenuation_db`]) the two margins, in dB, are
///
/// `m_pass(u) = apass − A(u)` and `m_stop(u) = A(Ω·u) − astop`.
///
/// * [`MarginPlacement::Pass`]: `u = w_p` with `A(w_p) = apass` ([`Prototype::passband_edge`]),
///   so `m_pass = 0` and all spare goes to the stopband (scipy's `buttord` places Butterworth
///   bands this way). For Chebyshev with ripple = apass, `w_p = 1` and the ripple band ends at
///   fpass.
/// * [`MarginPlacement::Stop`]: `u = w_s / Ω` with `A(w_s) = astop`, so `m_stop = 0` and all spare
///   goes to the passband edge.
/// * [`MarginPlacement::Split`]: with `S = m_stop(w_p)` (the stopband's margin under `Pass`) and
///   `P = m_pass(u_lo)` (the passband edge's margin at the other end of the range, `u_lo = w_s/Ω`),
///   the `u` between `u_lo` and `w_p` at which `m_pass(u) / P = m_stop(u) / S`: each edge keeps
///   the same fraction `t` of the margin it would have if it got all of it
///   (`m_pass = t·P`, `m_stop = t·S`). Both margins are monotone in `u` there, so bisection on
///   `ln u` finds the one root. For Chebyshev `u_lo` is at least 1 (the ripple-band edge): below it
///   the worst passband loss stays at the ripple, so moving further only spends stopband margin;
///   a Chebyshev whose ripple equals apass therefore has nothing to share and is placed as `Pass`.
///   When a fixed order is too low for the mask, `P` and `S` are negative and `Split` shares the
///   shortfall by the same rule.
///
/// # Errors
/// The mask keys as in [`order::selectivity`], and `ripple` for a Chebyshev ripple above apass.
pub fn band_from_mask(
    proto: &Prototype,
    class: ResponseClass,
    mask: &Mask,
    margin: MarginPlacement,
) -> Result<Band, InputError> {
    let selectivity = order::selectivity(class, mask)?;
    let w_pass = proto.passband_edge(mask.apass_db)?;
    let u = match margin {
        MarginPlacement::Pass => w_pass,
        MarginPlacement::Stop => stop_edge(proto, mask.astop_db) / selectivity,
        MarginPlacement::Split => split_edge(proto, mask, selectivity, w_pass),
    };
    Ok(match (class, mask.pass) {
        (ResponseClass::LowPass, Edge::Single(fp)) => Band::LowPass {
            wc: TWO_PI * fp / u,
        },
        (ResponseClass::HighPass, Edge::Single(fp)) => Band::HighPass {
            wc: TWO_PI * fp * u,
        },
        (ResponseClass::BandPass, Edge::Pair(lo, hi)) => Band::BandPass {
            w0: TWO_PI * (lo * hi).sqrt(),
            bw: TWO_PI * (hi - lo) / u,
        },
        (ResponseClass::BandStop, Edge::Pair(lo, hi)) => {
            // The passband edges the minimum order was found for (order::bandstop_passband).
            let (s_lo, s_hi) = match mask.stop {
                Edge::Pair(a, b) => (a, b),
                Edge::Single(f) => (f, f),
            };
            let (q_lo, q_hi) = order::bandstop_passband(lo, hi, s_lo, s_hi);
            Band::BandStop {
                w0: TWO_PI * (q_lo * q_hi).sqrt(),
                bw: TWO_PI * (q_hi - q_lo) * u,
            }
        }
        // selectivity() has already rejected every other combination.
        _ => {
            return Err(InputError::new(
                "passedge",
                "the passband edge does not match the response class",
            ))
        }
    })
}

/// The normalized frequency `w_s` at which the prototype's attenuation reaches `astop_db` (its
/// attenuation rises monotonically past the passband for every family).
fn stop_edge(proto: &Prototype, astop_db: f64) -> f64 {
    proto.stop_edge_for(astop_db)
}

/// The `Split` placement of [`band_from_mask`]: the `u` where `m_pass(u)/P = m_stop(u)/S`.
fn split_edge(proto: &Prototype, mask: &Mask, selectivity: f64, w_pass: f64) -> f64 {
    if proto.stop_edge.is_some() {
        // With zeros the depth is the mask's own, so the stopband has no dB to spare: the spare
        // is frequency room, shared as the geometric mean of the two placements.
        return (w_pass * stop_edge(proto, mask.astop_db) / selectivity).sqrt();
    }
    let m_pass = |u: f64| mask.apass_db - proto.attenuation_db(u);
    let m_stop = |u: f64| proto.attenuation_db(selectivity * u) - mask.astop_db;
    let mut u_lo = stop_edge(proto, mask.astop_db) / selectivity;
    if matches!(proto.family, Family::Chebyshev { .. }) {
        u_lo = u_lo.max(1.0);
    }
    let spare_pass = m_pass(u_lo);
    let spare_stop = m_stop(w_pass);
    // A mask met with nothing to spare on either side leaves nothing to share.
    let tiny = 1e-12;
    if spare_pass.abs() <= tiny
        || spare_stop.abs() <= tiny
        || fmath::ln(u_lo / w_pass).abs() <= tiny
    {
        return w_pass;
    }
    // g runs from −1 at w_pass to about +1 at u_lo and is monotone between them.
    let g = |u: f64| m_pass(u) / spare_pass - m_stop(u) / spare_stop;
    let (a, b) = if u_lo < w_pass {
        (u_lo, w_pass)
    } else {
        (w_pass, u_lo)
    };
    // solve_in_ln wants a function that rises with u.
    if g(a) > g(b) {
        solve_in_ln(|u| -g(u), a, b)
    } else {
        solve_in_ln(g, a, b)
    }
}

/// Finds `w` in `[lo, hi]` (both positive) where the increasing `f` changes sign, by bisection
/// on `ln w` to double precision. Returns an end of the bracket when `f` keeps one sign on it.
fn solve_in_ln(f: impl Fn(f64) -> f64, lo: f64, hi: f64) -> f64 {
    if f(lo) >= 0.0 {
        return lo;
    }
    if f(hi) <= 0.0 {
        return hi;
    }
    crate::prototype::bisect_ln(f, lo, hi)
}

/// Warnings for the mask edges a designed cascade misses (attenuation above `apass` at a
/// passband edge, below `astop` at a stopband edge), relative to the passband gain `gain_db`.
pub fn mask_misses(cascade: &[Section], mask: &Mask, gain_db: f64) -> Vec<String> {
    let mut out = Vec::new();
    let edges = |e: Edge| match e {
        Edge::Single(f) => vec![f],
        Edge::Pair(a, b) => vec![a, b],
    };
    for f in edges(mask.pass) {
        let a = response::attenuation_db(cascade, f, gain_db);
        if a > mask.apass_db + 1e-6 {
            out.push(format!(
                "the passband edge {f} Hz is {a:.3} dB down, more than passloss {} dB",
                mask.apass_db
            ));
        }
    }
    for f in edges(mask.stop) {
        let a = response::attenuation_db(cascade, f, gain_db);
        if a < mask.astop_db - 1e-6 {
            out.push(format!(
                "the stopband edge {f} Hz is only {a:.3} dB down, less than stopdepth {} dB",
                mask.astop_db
            ));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn req(class: ResponseClass, order: OrderChoice) -> Requirement {
        Requirement {
            class,
            family: Family::Butterworth,
            order,
            fc_hz: None,
            bw_hz: None,
            mask: None,
            gain_db: 0.0,
            margin: MarginPlacement::Split,
        }
    }

    #[test]
    fn missing_inputs_name_their_key() {
        let asc = StageOrder::AscendingQ;
        let r = req(ResponseClass::LowPass, OrderChoice::FromMask);
        assert_eq!(synthesize(&r, &asc).unwrap_err().key, "order");
        let r = req(ResponseClass::LowPass, OrderChoice::Fixed(4));
        assert_eq!(synthesize(&r, &asc).unwrap_err().key, "fc");
        let mut r = req(ResponseClass::BandPass, OrderChoice::Fixed(4));
        r.fc_hz = Some(1e3);
        assert_eq!(synthesize(&r, &asc).unwrap_err().key, "bw");
        r.bw_hz = Some(100.0);
        r.order = OrderChoice::Fixed(5);
        assert_eq!(synthesize(&r, &asc).unwrap_err().key, "order");
        r.order = OrderChoice::Fixed(4);
        r.gain_db = f64::INFINITY;
        assert_eq!(synthesize(&r, &asc).unwrap_err().key, "gain");
        r.gain_db = 0.0;
        r.fc_hz = Some(-1.0);
        assert_eq!(synthesize(&r, &asc).unwrap_err().key, "fc");
    }

    #[test]
    fn fixed_order_with_fc_uses_fc() {
        let mut r = req(ResponseClass::HighPass, OrderChoice::Fixed(3));
        r.fc_hz = Some(250.0);
        let s = synthesize(&r, &StageOrder::AscendingQ).unwrap();
        assert_eq!(s.order, 3);
        assert!((s.fc_hz - 250.0).abs() < 1e-9);
        assert_eq!(s.zeros_at_origin, 3);
        assert_eq!(s.sections.len(), 2);
        assert!(s.warnings.is_empty());
    }
}

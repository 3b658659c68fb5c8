//! The requirement: what the user asks of the filter, as validated values.
//!
//! A [`Requirement`] is what [`crate::link`] parses from the query string. Everything downstream
//! (order, prototype, transform, sections) reads only this type.

use serde::Serialize;

/// Which band the filter passes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum ResponseClass {
    /// Passes below the cutoff (link value `lp`).
    LowPass,
    /// Passes above the cutoff (link value `hp`).
    HighPass,
    /// Passes between two edges around a geometric centre (link value `bp`).
    BandPass,
    /// Stops between two edges around a geometric centre, passes below and above (link value
    /// `bs`); a second-order band-stop is a single notch.
    BandStop,
}

impl ResponseClass {
    /// The link value: `lp`, `hp`, `bp` or `bs`.
    pub fn key(self) -> &'static str {
        match self {
            Self::LowPass => "lp",
            Self::HighPass => "hp",
            Self::BandPass => "bp",
            Self::BandStop => "bs",
        }
    }

    /// Whether the class is a band (pass or stop) whose edges come in pairs and whose order
    /// counts twice the prototype's poles.
    pub fn is_band(self) -> bool {
        matches!(self, Self::BandPass | Self::BandStop)
    }
}

/// The response family of the normalized low-pass prototype.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum Family {
    /// Maximally flat magnitude; −3.01 dB at the cutoff.
    Butterworth,
    /// Chebyshev type I: equiripple passband of `ripple_db`; the cutoff is the ripple-band edge.
    Chebyshev {
        /// Peak-to-peak passband ripple in dB, 0.01–3.
        ripple_db: f64,
    },
    /// Maximally flat group delay, normalized so the cutoff is the −3.01 dB point.
    Bessel,
    /// A squared Butterworth of half the order: even orders only, −6.02 dB at the cutoff.
    LinkwitzRiley,
    /// Coincident real poles (critically damped), scaled so the cutoff is the −3.01 dB point.
    Critical,
    /// Inverse Chebyshev (Chebyshev type II): monotone passband, equiripple stopband of depth
    /// `astop_db`; the cutoff is where that depth is first reached.
    InverseChebyshev {
        /// Equiripple stopband depth in dB (`stopdepth`, default 40; from the mask when there is one).
        astop_db: f64,
    },
    /// Elliptic (Cauer): equiripple passband of `ripple_db` and stopband of depth `astop_db`; the
    /// cutoff is the ripple-band edge.
    Elliptic {
        /// Peak-to-peak passband ripple in dB, 0.01–3.
        ripple_db: f64,
        /// Equiripple stopband depth in dB (`stopdepth`, default 40; from the mask when there is one).
        astop_db: f64,
    },
}

impl Family {
    /// The link value: `butterworth`, `chebyshev`, `bessel`, `linkwitz-riley`, `critical`,
    /// `inverse-chebyshev`, `elliptic`.
    pub fn key(self) -> &'static str {
        match self {
            Self::Butterworth => "butterworth",
            Self::Chebyshev { .. } => "chebyshev",
            Self::Bessel => "bessel",
            Self::LinkwitzRiley => "linkwitz-riley",
            Self::Critical => "critical",
            Self::InverseChebyshev { .. } => "inverse-chebyshev",
            Self::Elliptic { .. } => "elliptic",
        }
    }

    /// The passband ripple of Chebyshev and elliptic, dB; `None` for the other families.
    pub fn ripple_db(self) -> Option<f64> {
        match self {
            Self::Chebyshev { ripple_db } | Self::Elliptic { ripple_db, .. } => Some(ripple_db),
            _ => None,
        }
    }

    /// The equiripple stopband depth of inverse Chebyshev and elliptic, dB; `None` otherwise.
    pub fn stop_depth_db(self) -> Option<f64> {
        match self {
            Self::InverseChebyshev { astop_db } | Self::Elliptic { astop_db, .. } => Some(astop_db),
            _ => None,
        }
    }

    /// The family with its stopband depth set to `astop_db` (a mask's depth); the all-pole
    /// families are returned unchanged.
    pub fn with_stop_depth(self, astop_db: f64) -> Self {
        match self {
            Self::InverseChebyshev { .. } => Self::InverseChebyshev { astop_db },
            Self::Elliptic { ripple_db, .. } => Self::Elliptic {
                ripple_db,
                astop_db,
            },
            other => other,
        }
    }
}

/// A frequency edge of the specification: one frequency for low- and high-pass, a pair for
/// band-pass and band-stop (band-stop: the passband edges are the outer pair, the stopband edges
/// the inner pair).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum Edge {
    /// Low-pass or high-pass edge, Hz.
    Single(f64),
    /// Band edges `(lo, hi)`, Hz, `lo < hi`.
    Pair(f64, f64),
}

/// The specification mask: the passband edge with the attenuation allowed there, and the
/// stopband edge with the attenuation required there. Attenuations are positive dB relative to
/// the passband gain.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Mask {
    /// Passband edge (link key `passedge`).
    pub pass: Edge,
    /// Largest attenuation allowed anywhere in the passband, dB (`passloss`).
    pub apass_db: f64,
    /// Stopband edge (`stopedge`).
    pub stop: Edge,
    /// Smallest attenuation required anywhere in the stopband, dB (`stopdepth`).
    pub astop_db: f64,
}

/// How the order is set.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum OrderChoice {
    /// The user fixed the order (`order`); for band-pass it counts the poles of the whole filter.
    Fixed(usize),
    /// The order is the minimum that meets the mask.
    FromMask,
}

/// Where the spare selectivity of a mask goes when the band follows from the mask (link key
/// `margin`).
///
/// The minimum order meets a mask with some attenuation to spare; the band placement decides
/// which edge keeps it. See [`crate::design::band_from_mask`] for the formulas.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub enum MarginPlacement {
    /// The spare is shared: each edge keeps the same fraction of the margin it would have if it
    /// got all of it (link value `split`, the default).
    #[default]
    Split,
    /// The passband edge gets exactly `apass`, all spare goes to the stopband (link value `pass`;
    /// the placement of scipy's `buttord`).
    Pass,
    /// The stopband edge gets exactly `astop`, all spare goes to the passband (link value `stop`).
    Stop,
}

impl MarginPlacement {
    /// The link value: `split`, `pass` or `stop`.
    pub fn key(self) -> &'static str {
        match self {
            Self::Split => "split",
            Self::Pass => "pass",
            Self::Stop => "stop",
        }
    }
}

/// A validated requirement.
///
/// Invariants (established by [`crate::link`]): `FromMask` implies `mask.is_some()`; a fixed
/// order is 1–20 (even for band-pass and Linkwitz-Riley); band-pass has either `fc_hz` and `bw_hz`
/// or a mask; the mask's edges are consistent with the class (stopband outside the passband,
/// `astop_db > apass_db`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Requirement {
    /// Low-pass, high-pass or band-pass.
    pub class: ResponseClass,
    /// Response family (Chebyshev carries its ripple).
    pub family: Family,
    /// Fixed order or order from the mask.
    pub order: OrderChoice,
    /// lp/hp: cutoff, Hz (Chebyshev: ripple-band edge); bp: geometric centre, Hz. `None` when it
    /// follows from the mask.
    pub fc_hz: Option<f64>,
    /// bp: bandwidth between the passband edges, Hz.
    pub bw_hz: Option<f64>,
    /// The specification mask, when the link has one.
    pub mask: Option<Mask>,
    /// Overall passband gain, dB.
    pub gain_db: f64,
    /// Where the spare selectivity goes when the band follows from the mask (`margin`).
    pub margin: MarginPlacement,
}

//! Pole-zero data: the target poles of each section beside the achieved poles and zeros of the
//! built stage (roots of the stage's denominator and numerator with the op-amp model, see
//! [`super::poly::stage_transfer`]), and each stage's achieved f0 and Q read from its dominant
//! poles.
//!
//! A second-order section with natural frequency ω0 and quality factor Q has the poles
//! `ω0·(−1/(2Q) ± j·√(1 − 1/(4Q²)))` (Q > ½; two real poles `ω0·(−1/(2Q) ± √(1/(4Q²) − 1))` for
//! Q ≤ ½); a first-order section the pole `−ω0`. The finite gain-bandwidth of the op amp adds a
//! pole near GBW (divided by the noise gain) and moves the filter poles, which is what this
//! comparison shows.

use super::circuit::AnalysisError;
use super::poly::{stage_transfer, Rational};
use super::roots::dominant_w0_q;
use crate::board::Board;
use crate::netlist::StageNetlist;
use crate::opamp::OpAmp;
use crate::section::Section;
use num_complex::Complex64;
use serde::Serialize;
use std::f64::consts::PI;

/// A point of the s-plane in Hz: `s/(2π)`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PlanePoint {
    /// Real part, Hz (negative for a stable pole).
    pub re_hz: f64,
    /// Imaginary part, Hz.
    pub im_hz: f64,
}

impl PlanePoint {
    /// From s in rad/s.
    pub fn from_rad(s: Complex64) -> PlanePoint {
        PlanePoint {
            re_hz: s.re / (2.0 * PI),
            im_hz: s.im / (2.0 * PI),
        }
    }

    /// Back to s in rad/s.
    pub fn to_rad(self) -> Complex64 {
        Complex64::new(self.re_hz * 2.0 * PI, self.im_hz * 2.0 * PI)
    }
}

/// A stage's f0 and Q as built, from the dominant poles of its denominator.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StageFactor {
    /// Natural frequency (first order: pole frequency), Hz.
    pub f0_hz: f64,
    /// Pole Q; `None` for a first-order stage.
    pub q: Option<f64>,
}

/// Target and achieved poles of one stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StagePoles {
    /// Stage number along the signal path, from 1.
    pub stage: usize,
    /// Poles the synthesis asked for (from the section's f0 and Q).
    pub target: Vec<PlanePoint>,
    /// Every pole of the built stage with the op-amp model, sorted by magnitude.
    pub achieved: Vec<PlanePoint>,
    /// Every finite zero of the built stage, sorted by magnitude.
    pub zeros: Vec<PlanePoint>,
    /// f0 and Q read from the dominant achieved poles.
    pub factor: StageFactor,
}

/// The poles of a section (rad/s): see the module docs.
pub fn section_poles(section: &Section) -> Vec<Complex64> {
    let w0 = 2.0 * PI * section.f0_hz;
    match section.q {
        None => vec![Complex64::new(-w0, 0.0)],
        Some(q) => {
            let a = -1.0 / (2.0 * q);
            let d = 1.0 - 1.0 / (4.0 * q * q);
            if d >= 0.0 {
                let b = d.sqrt();
                vec![
                    Complex64::new(w0 * a, -w0 * b),
                    Complex64::new(w0 * a, w0 * b),
                ]
            } else {
                let b = (-d).sqrt();
                vec![
                    Complex64::new(w0 * (a + b), 0.0),
                    Complex64::new(w0 * (a - b), 0.0),
                ]
            }
        }
    }
}

/// The filter order of a stage: the degree of its denominator with an ideal op amp (1 or 2 for
/// the stages Rolloff builds).
///
/// # Errors
/// As [`stage_transfer`].
pub fn stage_order(net: &StageNetlist) -> Result<usize, AnalysisError> {
    Ok(stage_transfer(net, &OpAmp::ideal())?.den.degree().max(1))
}

/// f0 and Q of a fitted stage transfer function, read from its `order` smallest poles.
///
/// # Errors
/// [`AnalysisError::NoConvergence`] when no dominant pole (pair) exists.
pub fn factor_of(rat: &Rational, order: usize) -> Result<StageFactor, AnalysisError> {
    let poles = rat.poles()?;
    let (w0, q) = dominant_w0_q(&poles, order.min(2)).ok_or_else(|| {
        AnalysisError::NoConvergence("no dominant stable pole pair in the stage".into())
    })?;
    Ok(StageFactor {
        f0_hz: w0 / (2.0 * PI),
        q: (order >= 2).then_some(q),
    })
}

/// f0 and Q of a stage as built with the op amp `op`.
///
/// # Errors
/// As [`stage_transfer`] and [`factor_of`].
pub fn stage_factor(net: &StageNetlist, op: &OpAmp) -> Result<StageFactor, AnalysisError> {
    let order = stage_order(net)?;
    factor_of(&stage_transfer(net, op)?, order)
}

/// Target and achieved poles of every stage of `board`.
///
/// # Errors
/// As [`stage_transfer`] and [`factor_of`].
pub fn board_poles(board: &Board) -> Result<Vec<StagePoles>, AnalysisError> {
    board
        .stages
        .iter()
        .enumerate()
        .map(|(k, st)| {
            let rat = stage_transfer(&st.netlist, &board.op_amp)?;
            let order = stage_order(&st.netlist)?;
            Ok(StagePoles {
                stage: k + 1,
                target: section_poles(&st.section)
                    .into_iter()
                    .map(PlanePoint::from_rad)
                    .collect(),
                achieved: rat.poles()?.into_iter().map(PlanePoint::from_rad).collect(),
                zeros: rat.zeros()?.into_iter().map(PlanePoint::from_rad).collect(),
                factor: factor_of(&rat, order)?,
            })
        })
        .collect()
}

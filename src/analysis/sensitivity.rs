//! Normalized sensitivities `S = (x/y)·∂y/∂x` of each stage's f0 and Q (as built, op amp
//! included) to every resistor and capacitor of the stage.
//!
//! Method: the stage determinant D(s) is affine in each part's admittance (a resistor or
//! capacitor stamps a rank-one pattern into the nodal matrix), so `∂D/∂ln y` is obtained exactly,
//! coefficient by coefficient, from the central difference of the fitted determinant at
//! `y·(1 ± h)` (the difference of an affine function has no truncation error). For a
//! second-order stage the dominant pole pair is the quadratic factor `z² + u·z + v` of D
//! (f0 = √v, Q = √v/u in the scaled variable); writing `D = Q·R`, the remainder of D modulo the
//! factor stays zero, which gives `rem(z·R)·∂u + rem(R)·∂v = rem(∂D)`, a 2×2 linear system that
//! is regular even for a double pole (the equal-component Sallen-Key stage, Q = ½). Then
//! `S_f0 = ∂v/(2v)` and `S_Q = S_f0 − ∂u/u`. For a first-order stage the real pole moves by
//! `∂p = −(∂D)(p)/D'(p)` and `S_f0 = ∂p/p`. A resistor's sensitivity is minus that of its
//! conductance.
//!
//! A stage with a pair of jω-axis zeros (a notch, `fz_hz` on the stage) gets the sensitivities
//! of fz the same way from the numerator N: its quadratic factor `z² + u·z + v` near
//! `v = (wz/ρ)²`, and `S_fz = ∂v/(2v)`.

use super::circuit::{AnalysisError, Compiled};
use super::poles::stage_order;
use super::poly::{FitWork, Poly, FIT_TRIM_REL};
use super::roots::{bairstow, dominant_w0_q};
use crate::board::Board;
use crate::fmath;
use crate::netlist::{PartKind, StageNetlist};
use crate::opamp::OpAmp;
use serde::Serialize;
use std::f64::consts::PI;

/// Relative step of the admittance difference (the determinant is affine in it, so the size only
/// sets the rounding error).
const STEP: f64 = 1e-3;

/// Sensitivities of a stage's f0 and Q to one part.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PartSensitivity {
    /// Reference designator.
    #[serde(rename = "ref")]
    pub reference: String,
    /// Resistor or capacitor.
    pub kind: PartKind,
    /// `S = (x/f0)·∂f0/∂x`.
    pub f0: f64,
    /// `S = (x/Q)·∂Q/∂x`; `None` for a first-order stage.
    pub q: Option<f64>,
    /// `S = (x/fz)·∂fz/∂x` for a stage with a pair of zeros; absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fz: Option<f64>,
}

/// Sensitivities of one stage.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageSensitivity {
    /// Stage number along the signal path, from 1.
    pub stage: usize,
    /// f0 as built, Hz.
    pub f0_hz: f64,
    /// Q as built; `None` for first order.
    pub q: Option<f64>,
    /// Frequency of the pair of zeros as built, Hz, for a stage with zeros; absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fz_hz: Option<f64>,
    /// One entry per resistor and capacitor of the stage, in netlist order.
    pub parts: Vec<PartSensitivity>,
}

fn fit_raw(
    compiled: &Compiled,
    values: &[f64],
    work: &mut FitWork,
    rho: f64,
) -> Result<(Vec<f64>, Vec<f64>), AnalysisError> {
    let mut a = compiled.blank();
    compiled.assemble_into(values, &mut a);
    if !work.fit(compiled, &a, rho) {
        return Err(AnalysisError::Singular(
            "the stage equations are singular at a sample frequency".into(),
        ));
    }
    Ok((work.den.clone(), work.num.clone()))
}

/// Sensitivities of the f0 and Q of one stage netlist with op amp `op`.
///
/// # Errors
/// [`AnalysisError`] when the stage cannot be analysed or has no dominant pole (pair).
pub fn stage_sensitivities(
    net: &StageNetlist,
    op: &OpAmp,
    stage: usize,
) -> Result<StageSensitivity, AnalysisError> {
    stage_sensitivities_with_zeros(net, op, stage, None)
}

/// Sensitivities of the f0, Q and, for a stage whose pair of jω-axis zeros sits near
/// `fz_hz`, of fz (see the module docs).
///
/// # Errors
/// As [`stage_sensitivities`]; [`AnalysisError::NoConvergence`] when the zeros' factor cannot
/// be followed.
pub fn stage_sensitivities_with_zeros(
    net: &StageNetlist,
    op: &OpAmp,
    stage: usize,
    fz_hz: Option<f64>,
) -> Result<StageSensitivity, AnalysisError> {
    let compiled = Compiled::new(net, op)?;
    let order = stage_order(net)?.min(2);
    let mut work = FitWork::new(&compiled);
    let values: Vec<f64> = net.parts.iter().map(|p| p.value).collect();
    let rho = compiled.scale_rad_s * 1.1;
    let (d0, n0) = fit_raw(&compiled, &values, &mut work, rho)?;
    let d0p = Poly::new(d0.clone());
    // The zeros' factor z² + u·z + v of N, started from the stage's own fz on the axis.
    let n_trim = Poly::new(n0).trimmed(FIT_TRIM_REL);
    let zeros = match fz_hz {
        Some(fz) => {
            let v0 = fmath::powi(2.0 * PI * fz / rho, 2);
            let found = bairstow(&n_trim.c, 1e-6 * v0.sqrt(), v0).ok_or_else(|| {
                AnalysisError::NoConvergence("the stage's pair of zeros cannot be found".into())
            })?;
            Some(found)
        }
        None => None,
    };
    let roots = d0p.trimmed(FIT_TRIM_REL).roots()?;
    let (w0, q) = dominant_w0_q(&roots, order).ok_or_else(|| {
        AnalysisError::NoConvergence("no dominant stable pole pair in the stage".into())
    })?;
    // The dominant poles themselves (in z = s/ρ).
    let mut sorted = roots.clone();
    crate::sort::sort_by(&mut sorted, |a, b| {
        fmath::cnorm(*a)
            .partial_cmp(&fmath::cnorm(*b))
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let d_trim = d0p.trimmed(FIT_TRIM_REL);
    // The dominant factor: a real root (first order) or z² + u·z + v (second order).
    let real_root = sorted.iter().find(|z| z.im == 0.0).map(|z| z.re);
    let quad = if order == 2 {
        let u0 = w0 / q;
        let v0 = w0 * w0;
        Some(bairstow(&d_trim.c, u0, v0).unwrap_or((u0, v0)))
    } else {
        None
    };
    let dd = d_trim.derivative();
    let mut parts = Vec::new();
    for (i, p) in net.parts.iter().enumerate() {
        if p.kind == PartKind::OpAmp {
            continue;
        }
        // Perturb the admittance y: C itself, or 1/R.
        let (up, down) = match p.kind {
            PartKind::Capacitor => (p.value * (1.0 + STEP), p.value * (1.0 - STEP)),
            _ => (p.value / (1.0 + STEP), p.value / (1.0 - STEP)),
        };
        let mut v = values.clone();
        v[i] = up;
        let (dp_up, np_up) = fit_raw(&compiled, &v, &mut work, rho)?;
        v[i] = down;
        let (dp_dn, np_dn) = fit_raw(&compiled, &v, &mut work, rho)?;
        let s_fz = match zeros {
            Some((u, vz)) => {
                let n_dlny: Vec<f64> = np_up
                    .iter()
                    .zip(&np_dn)
                    .map(|(a, b)| (a - b) / (2.0 * STEP))
                    .collect();
                let (_, dv) =
                    quadratic_factor_derivative(&n_trim.c, &n_dlny, u, vz).ok_or_else(|| {
                        AnalysisError::NoConvergence(
                            "the stage's pair of zeros shares a root with the rest of N".into(),
                        )
                    })?;
                Some(0.5 * dv / vz)
            }
            None => None,
        };
        let d_dlny: Vec<f64> = dp_up
            .iter()
            .zip(&dp_dn)
            .map(|(a, b)| (a - b) / (2.0 * STEP))
            .collect();
        let sign = if p.kind == PartKind::Capacitor {
            1.0
        } else {
            -1.0
        };
        let (s_f0, s_q) = match (quad, real_root) {
            (Some((u, vq)), _) => {
                let (du, dv) =
                    quadratic_factor_derivative(&d_trim.c, &d_dlny, u, vq).ok_or_else(|| {
                        AnalysisError::NoConvergence(
                            "the dominant pole pair shares a root with the rest of the stage"
                                .into(),
                        )
                    })?;
                // f0 = √v·ρ, Q = √v/u.
                let s_f0 = 0.5 * dv / vq;
                (s_f0, Some(s_f0 - du / u))
            }
            (None, Some(r)) => {
                let dr = -Poly::new(d_dlny.clone()).eval(r) / dd.eval(r);
                (dr / r, None)
            }
            (None, None) => {
                return Err(AnalysisError::NoConvergence(
                    "a first-order stage without a real pole".into(),
                ))
            }
        };
        parts.push(PartSensitivity {
            reference: p.reference.clone(),
            kind: p.kind,
            f0: sign * s_f0,
            q: s_q.map(|s| sign * s),
            fz: s_fz.map(|s| sign * s),
        });
    }
    Ok(StageSensitivity {
        stage,
        f0_hz: w0 * rho / (2.0 * PI),
        q: (order == 2).then_some(q),
        fz_hz: zeros.map(|(_, v)| v.sqrt() * rho / (2.0 * PI)),
        parts,
    })
}

/// Divides `p` (ascending) by the monic `z² + u·z + v`: returns the quotient and the remainder
/// `(r1, r0)` of `r1·z + r0`.
fn divide_quadratic(p: &[f64], u: f64, v: f64) -> (Vec<f64>, (f64, f64)) {
    let n = p.iter().rposition(|&c| c != 0.0).unwrap_or(0);
    if n < 2 {
        return (vec![0.0], (p.get(1).copied().unwrap_or(0.0), p[0]));
    }
    let mut rem: Vec<f64> = p[..=n].to_vec();
    let mut quot = vec![0.0; n - 1];
    for k in (2..=n).rev() {
        let c = rem[k];
        quot[k - 2] = c;
        rem[k] = 0.0;
        rem[k - 1] -= c * u;
        rem[k - 2] -= c * v;
    }
    (quot, (rem[1], rem[0]))
}

/// Derivative of the dominant quadratic factor `z² + u·z + v` of `d` when `d` moves by `dd`.
///
/// With `d = Q·R` and `rem(·)` the remainder modulo Q (linear in its argument), `rem(d) = 0` for
/// all parameter values gives `rem(z·R)·du + rem(R)·dv = rem(dd)`: a 2×2 system that stays
/// regular for a double root of Q, as long as Q and R share no root.
fn quadratic_factor_derivative(d: &[f64], dd: &[f64], u: f64, v: f64) -> Option<(f64, f64)> {
    let (r, _) = divide_quadratic(d, u, v);
    let mut zr = vec![0.0];
    zr.extend_from_slice(&r);
    let (_, (a1, a0)) = divide_quadratic(&zr, u, v);
    let (_, (b1, b0)) = divide_quadratic(&r, u, v);
    let (_, (c1, c0)) = divide_quadratic(dd, u, v);
    let det = a1 * b0 - b1 * a0;
    if det == 0.0 || !det.is_finite() {
        return None;
    }
    Some(((c1 * b0 - b1 * c0) / det, (a1 * c0 - c1 * a0) / det))
}

/// Sensitivities of every stage of `board`.
///
/// # Errors
/// As [`stage_sensitivities`].
pub fn board_sensitivities(board: &Board) -> Result<Vec<StageSensitivity>, AnalysisError> {
    board
        .stages
        .iter()
        .enumerate()
        .map(|(k, st)| {
            stage_sensitivities_with_zeros(&st.netlist, &board.op_amp, k + 1, st.achieved_fz_hz)
        })
        .collect()
}

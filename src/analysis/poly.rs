//! Polynomials in s with real coefficients, their roots, and a stage's transfer function
//! N(s)/D(s) formed from its netlist with the op-amp model.
//!
//! Forming the rational function: with the op amp written as `v·(1/A0 + s/(2π·GBW)) = V+ − V−`
//! (see [`super::circuit`]), every entry of the nodal matrix is affine in s, so the determinant
//! D(s) = det M(s) and the Cramer numerator N(s) = D(s)·V_out(s) are polynomials of degree at most
//! the number of capacitors plus the number of op amps with a finite GBW. Both are sampled at K
//! points on a circle of radius ρ in the s-plane (ρ near the stage's own frequency scale) and
//! recovered exactly (up to rounding) by a K-point discrete Fourier transform. The points sit at
//! the half-step angles `π(2k+1)/K`, a set closed under conjugation that avoids the real axis, so
//! only half of them need solving and a real pole never lands on a sample point.
//!
//! Roots: Aberth–Ehrlich simultaneous iteration with starting radii from the Newton polygon of the
//! coefficient magnitudes, evaluated through the reversed polynomial outside the unit circle. The
//! polynomials are kept in the scaled variable `z = s/ρ`, so their coefficients stay near 1 even for
//! orders of 12 and more.

use super::circuit::{AnalysisError, Assembled, Compiled, Solver};
use crate::fmath;
use crate::netlist::StageNetlist;
use crate::opamp::OpAmp;
use num_complex::Complex64;
use serde::Serialize;
use std::f64::consts::PI;

/// A polynomial with real coefficients in ascending powers: `c[0] + c[1]·z + c[2]·z² + …`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Poly {
    /// Coefficients, constant term first.
    pub c: Vec<f64>,
}

impl Poly {
    /// A polynomial from its ascending coefficients.
    pub fn new(c: Vec<f64>) -> Poly {
        Poly { c }
    }

    /// The degree (index of the last non-zero coefficient; 0 for the zero polynomial).
    pub fn degree(&self) -> usize {
        self.c.iter().rposition(|&v| v != 0.0).unwrap_or(0)
    }

    /// Value at a real point, by Horner's rule.
    pub fn eval(&self, z: f64) -> f64 {
        self.c.iter().rev().fold(0.0, |acc, &v| acc * z + v)
    }

    /// Value at a complex point, by Horner's rule.
    pub fn eval_c(&self, z: Complex64) -> Complex64 {
        self.c
            .iter()
            .rev()
            .fold(Complex64::new(0.0, 0.0), |acc, &v| acc * z + v)
    }

    /// The product of two polynomials.
    pub fn mul(&self, other: &Poly) -> Poly {
        if self.c.is_empty() || other.c.is_empty() {
            return Poly::new(vec![]);
        }
        let mut c = vec![0.0; self.c.len() + other.c.len() - 1];
        for (i, &a) in self.c.iter().enumerate() {
            for (j, &b) in other.c.iter().enumerate() {
                c[i + j] += a * b;
            }
        }
        Poly::new(c)
    }

    /// The derivative.
    pub fn derivative(&self) -> Poly {
        Poly::new(
            self.c
                .iter()
                .enumerate()
                .skip(1)
                .map(|(k, &v)| k as f64 * v)
                .collect(),
        )
    }

    /// The same polynomial in `w = z/factor`, i.e. coefficients `c_k·factor^k`.
    pub fn rescaled(&self, factor: f64) -> Poly {
        let mut f = 1.0;
        Poly::new(
            self.c
                .iter()
                .map(|&v| {
                    let out = v * f;
                    f *= factor;
                    out
                })
                .collect(),
        )
    }

    /// `|P(jy)|²` as a polynomial in `x = y²` (real coefficients, degree = deg P):
    /// with `P(jy) = E(−y²) + jy·O(−y²)`, `|P|² = E(−x)² + x·O(−x)²`.
    pub fn magnitude_squared_in_x(&self) -> Poly {
        let even: Vec<f64> = self
            .c
            .iter()
            .step_by(2)
            .enumerate()
            .map(|(k, &v)| if k % 2 == 0 { v } else { -v })
            .collect();
        let odd: Vec<f64> = self
            .c
            .iter()
            .skip(1)
            .step_by(2)
            .enumerate()
            .map(|(k, &v)| if k % 2 == 0 { v } else { -v })
            .collect();
        let e2 = Poly::new(even.clone()).mul(&Poly::new(even));
        let o2 = Poly::new(odd.clone()).mul(&Poly::new(odd));
        let len = e2.c.len().max(o2.c.len() + 1).max(1);
        let mut c = vec![0.0; len];
        for (k, &v) in e2.c.iter().enumerate() {
            c[k] += v;
        }
        for (k, &v) in o2.c.iter().enumerate() {
            c[k + 1] += v;
        }
        Poly::new(c)
    }

    /// Drops trailing coefficients whose size is below `rel` times the largest, and sets leading
    /// (low-order) ones below that size to exactly zero, so that rounding noise of a fit is not
    /// mistaken for a far-away root or a root near zero.
    pub fn trimmed(&self, rel: f64) -> Poly {
        let max = self.c.iter().fold(0.0f64, |m, &v| m.max(v.abs()));
        let thr = rel * max;
        let mut c: Vec<f64> = self
            .c
            .iter()
            .map(|&v| if v.abs() <= thr { 0.0 } else { v })
            .collect();
        while c.len() > 1 && c.last() == Some(&0.0) {
            c.pop();
        }
        Poly::new(c)
    }

    /// All complex roots (with multiplicity), sorted by magnitude then by imaginary part.
    ///
    /// Aberth–Ehrlich iteration; roots closer together than 1e-6 of their magnitude are replaced
    /// by their mean, because a multiple root is only determined to about the k-th root of the
    /// rounding error while the mean of the cluster is well determined.
    ///
    /// # Errors
    /// [`AnalysisError::NoConvergence`] when the iteration does not settle in 800 sweeps, or the
    /// coefficients are not finite.
    pub fn roots(&self) -> Result<Vec<Complex64>, AnalysisError> {
        roots(&self.c)
    }
}

/// Upper convex hull of `(k, log|c_k|)` over the non-zero coefficients: the Newton polygon that
/// gives the magnitudes of the roots to within a factor of the degree.
fn initial_guesses(c: &[f64]) -> Vec<Complex64> {
    let n = c.len() - 1;
    let pts: Vec<(usize, f64)> = c
        .iter()
        .enumerate()
        .filter(|(_, &v)| v != 0.0)
        .map(|(k, &v)| (k, fmath::ln(v.abs())))
        .collect();
    let mut hull: Vec<(usize, f64)> = Vec::new();
    for &p in &pts {
        while hull.len() >= 2 {
            let a = hull[hull.len() - 2];
            let b = hull[hull.len() - 1];
            // Keep the chain concave: drop b when it lies on or below the segment a–p.
            let cross =
                (b.0 as f64 - a.0 as f64) * (p.1 - a.1) - (b.1 - a.1) * (p.0 as f64 - a.0 as f64);
            if cross >= 0.0 {
                hull.pop();
            } else {
                break;
            }
        }
        hull.push(p);
    }
    let mut guesses = Vec::with_capacity(n);
    let mut offset = 0.4;
    for w in hull.windows(2) {
        let (i, li) = w[0];
        let (j, lj) = w[1];
        let m = j - i;
        let r = fmath::exp((li - lj) / m as f64);
        for k in 0..m {
            let ang = 2.0 * PI * k as f64 / m as f64 + offset;
            guesses.push(fmath::from_polar(r, ang));
        }
        offset += 0.7;
    }
    guesses
}

/// `p(z)/p'(z)` evaluated stably: Horner inside the unit circle, the reversed polynomial outside.
fn newton_ratio(c: &[f64], z: Complex64) -> Complex64 {
    let n = c.len() - 1;
    if z.norm_sqr() <= 1.0 {
        let mut p = Complex64::new(c[n], 0.0);
        let mut d = Complex64::new(0.0, 0.0);
        for &v in c[..n].iter().rev() {
            d = d * z + p;
            p = p * z + v;
        }
        p / d
    } else {
        let w = 1.0 / z;
        // q(w) = Σ c_k w^(n−k) = w^n p(1/w).
        let mut q = Complex64::new(c[0], 0.0);
        let mut dq = Complex64::new(0.0, 0.0);
        for &v in c[1..].iter() {
            dq = dq * w + q;
            q = q * w + v;
        }
        // p(z) = z^n q(w); p'(z) = z^(n−1) (n q − w q').
        z * q / (n as f64 * q - w * dq)
    }
}

/// Roots of the polynomial with ascending coefficients `c`.
///
/// # Errors
/// See [`Poly::roots`].
pub fn roots(c: &[f64]) -> Result<Vec<Complex64>, AnalysisError> {
    if c.iter().any(|v| !v.is_finite()) {
        return Err(AnalysisError::NoConvergence(
            "polynomial coefficients are not finite".into(),
        ));
    }
    let mut c: Vec<f64> = c.to_vec();
    while c.len() > 1 && c.last() == Some(&0.0) {
        c.pop();
    }
    // Roots at zero come off exactly.
    let n_zero = c.iter().position(|&v| v != 0.0).unwrap_or(0);
    let c: Vec<f64> = c[n_zero..].to_vec();
    let mut out = vec![Complex64::new(0.0, 0.0); n_zero];
    let n = c.len().saturating_sub(1);
    if n == 0 {
        return Ok(out);
    }
    if n == 1 {
        out.push(Complex64::new(-c[0] / c[1], 0.0));
        return Ok(sorted(out));
    }
    // Scale the variable so the extreme roots' geometric mean is 1.
    let scale = fmath::powf(c[0].abs() / c[n].abs(), 1.0 / n as f64);
    let cs: Vec<f64> = {
        let mut f = 1.0;
        let raw: Vec<f64> = c
            .iter()
            .map(|&v| {
                let o = v * f;
                f *= scale;
                o
            })
            .collect();
        let m = raw.iter().fold(0.0f64, |m, &v| m.max(v.abs()));
        raw.iter().map(|v| v / m).collect()
    };
    let mut z = initial_guesses(&cs);
    let mut done = vec![false; n];
    let mut converged = false;
    for _sweep in 0..800 {
        let mut all_done = true;
        for i in 0..n {
            if done[i] {
                continue;
            }
            let ratio = newton_ratio(&cs, z[i]);
            let mut sum = Complex64::new(0.0, 0.0);
            for j in 0..n {
                if j != i {
                    sum += 1.0 / (z[i] - z[j]);
                }
            }
            let w = ratio / (1.0 - ratio * sum);
            let step = if w.is_finite() { w } else { ratio };
            if step.is_finite() {
                z[i] -= step;
            }
            if fmath::cnorm(step) <= 4.0 * f64::EPSILON * fmath::cnorm(z[i]) || !step.is_finite() {
                done[i] = true;
            } else {
                all_done = false;
            }
        }
        if all_done {
            converged = true;
            break;
        }
    }
    if !converged && z.iter().any(|v| !v.is_finite()) {
        return Err(AnalysisError::NoConvergence(format!(
            "root finder on a degree-{n} polynomial"
        )));
    }
    let mut found: Vec<Complex64> = z.iter().map(|v| v * scale).collect();
    merge_clusters(&mut found);
    for r in found.iter_mut() {
        if r.im.abs() <= 1e-12 * fmath::cnorm(*r) {
            r.im = 0.0;
        }
    }
    out.extend(found);
    Ok(sorted(out))
}

fn merge_clusters(z: &mut [Complex64]) {
    let n = z.len();
    let mut group = vec![usize::MAX; n];
    for i in 0..n {
        if group[i] != usize::MAX {
            continue;
        }
        group[i] = i;
        for j in (i + 1)..n {
            if group[j] == usize::MAX
                && fmath::cnorm(z[i] - z[j]) <= 1e-6 * fmath::cnorm(z[i]).max(fmath::cnorm(z[j]))
            {
                group[j] = i;
            }
        }
    }
    for g in 0..n {
        let members: Vec<usize> = (0..n).filter(|&k| group[k] == g).collect();
        if members.len() > 1 {
            let mean = members.iter().map(|&k| z[k]).sum::<Complex64>() / members.len() as f64;
            for &k in &members {
                z[k] = mean;
            }
        }
    }
}

fn sorted(mut v: Vec<Complex64>) -> Vec<Complex64> {
    crate::sort::sort_by(&mut v, |a, b| {
        fmath::cnorm(*a)
            .partial_cmp(&fmath::cnorm(*b))
            .unwrap_or(std::cmp::Ordering::Equal)
            .then(a.im.partial_cmp(&b.im).unwrap_or(std::cmp::Ordering::Equal))
    });
    v
}

/// A rational function `H(s) = N(z)/D(z)` with `z = s/scale_rad_s`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Rational {
    /// The frequency scale ρ of the variable z = s/ρ, rad/s.
    pub scale_rad_s: f64,
    /// Numerator in z.
    pub num: Poly,
    /// Denominator in z, scaled so its largest coefficient has magnitude 1.
    pub den: Poly,
}

impl Rational {
    /// `H(s)` at a complex frequency `s` in rad/s.
    pub fn eval(&self, s: Complex64) -> Complex64 {
        let z = s / self.scale_rad_s;
        self.num.eval_c(z) / self.den.eval_c(z)
    }

    /// `H(j·2π·f)`.
    pub fn eval_hz(&self, f_hz: f64) -> Complex64 {
        self.eval(Complex64::new(0.0, 2.0 * PI * f_hz))
    }

    /// Poles in rad/s (roots of the denominator).
    ///
    /// # Errors
    /// See [`Poly::roots`].
    pub fn poles(&self) -> Result<Vec<Complex64>, AnalysisError> {
        Ok(self
            .den
            .roots()?
            .into_iter()
            .map(|p| p * self.scale_rad_s)
            .collect())
    }

    /// Zeros in rad/s (roots of the numerator).
    ///
    /// # Errors
    /// See [`Poly::roots`].
    pub fn zeros(&self) -> Result<Vec<Complex64>, AnalysisError> {
        Ok(self
            .num
            .roots()?
            .into_iter()
            .map(|p| p * self.scale_rad_s)
            .collect())
    }

    /// The same function expressed with another scale ρ'.
    pub fn with_scale(&self, scale_rad_s: f64) -> Rational {
        let factor = scale_rad_s / self.scale_rad_s;
        Rational {
            scale_rad_s,
            num: self.num.rescaled(factor),
            den: self.den.rescaled(factor),
        }
    }

    /// The product of two rational functions (a cascade), in the scale of `self`.
    pub fn cascade(&self, other: &Rational) -> Rational {
        let o = other.with_scale(self.scale_rad_s);
        let den = self.den.mul(&o.den);
        let num = self.num.mul(&o.num);
        let m = den.c.iter().fold(0.0f64, |m, &v| m.max(v.abs()));
        let m = if m > 0.0 { m } else { 1.0 };
        Rational {
            scale_rad_s: self.scale_rad_s,
            num: Poly::new(num.c.iter().map(|v| v / m).collect()),
            den: Poly::new(den.c.iter().map(|v| v / m).collect()),
        }
    }
}

/// Relative size below which a fitted coefficient counts as rounding noise (see
/// [`Poly::trimmed`]).
pub const FIT_TRIM_REL: f64 = 1e-13;

/// Reusable work space for fitting a compiled netlist's transfer function; the tolerance study
/// keeps one per stage so that a run allocates nothing.
#[derive(Debug, Clone, PartialEq)]
pub struct FitWork {
    solver: Solver,
    /// Number of sample points K.
    k: usize,
    /// `e^{iπ(2k+1)/K}` for k = 0..K.
    unit_points: Vec<Complex64>,
    /// `e^{−iπm/K}` for m = 0..2K.
    twiddles: Vec<Complex64>,
    num_samples: Vec<Complex64>,
    den_samples: Vec<Complex64>,
    /// Raw fitted coefficients (in z = s/ρ) of N and D.
    pub num: Vec<f64>,
    /// See `num`.
    pub den: Vec<f64>,
}

impl FitWork {
    /// Work space for `compiled`.
    pub fn new(compiled: &Compiled) -> FitWork {
        let k = compiled.degree_bound + 1;
        let unit_points = (0..k)
            .map(|i| fmath::from_polar(1.0, PI * (2 * i + 1) as f64 / k as f64))
            .collect();
        let twiddles = (0..2 * k)
            .map(|m| fmath::from_polar(1.0, -PI * m as f64 / k as f64))
            .collect();
        FitWork {
            solver: Solver::new(compiled.n),
            k,
            unit_points,
            twiddles,
            num_samples: vec![Complex64::new(0.0, 0.0); k],
            den_samples: vec![Complex64::new(0.0, 0.0); k],
            num: vec![0.0; k],
            den: vec![0.0; k],
        }
    }

    /// Fits N and D (raw, unnormalized determinant scale) at radius `rho` into `self.num`,
    /// `self.den`. Returns false when a sample point hit a singular matrix (the caller retries
    /// with another radius).
    pub fn fit(&mut self, compiled: &Compiled, assembled: &Assembled, rho: f64) -> bool {
        let k = self.k;
        let half = k.div_ceil(2);
        for i in 0..half {
            let s = self.unit_points[i] * rho;
            self.solver.load(assembled, s, Complex64::new(1.0, 0.0));
            let det = self.solver.solve();
            if det.re == 0.0 && det.im == 0.0 {
                return false;
            }
            let x = self.solver.solution()[compiled.output_col];
            self.den_samples[i] = det;
            self.num_samples[i] = det * x;
            // The point at index k−1−i is the conjugate of point i.
            self.den_samples[k - 1 - i] = det.conj();
            self.num_samples[k - 1 - i] = (det * x).conj();
        }
        // The samples are p(u_i) for p(z) = P(ρz), so c_j = (1/K) Σ_i p(u_i) · u_i^(−j) are the
        // coefficients in z directly.
        let inv_k = 1.0 / k as f64;
        for j in 0..k {
            let mut acc_n = Complex64::new(0.0, 0.0);
            let mut acc_d = Complex64::new(0.0, 0.0);
            for i in 0..k {
                // u_i^(-j) = e^{-iπ(2i+1)j/K}: (2i+1)j mod 2K indexes the 2K-th roots of unity.
                let uij = self.twiddles[((2 * i + 1) * j) % (2 * k)];
                acc_n += self.num_samples[i] * uij;
                acc_d += self.den_samples[i] * uij;
            }
            self.num[j] = acc_n.re * inv_k;
            self.den[j] = acc_d.re * inv_k;
        }
        true
    }
}

/// The transfer function of a stage netlist with the op-amp model, as N(z)/D(z), z = s/ρ.
///
/// ρ is first the stage's own frequency scale (the geometric mean of 1/(R·C) over its parts,
/// times an arbitrary 1.1 so that designed pole magnitudes do not coincide with it), then the
/// geometric mean of the denominator's root magnitudes when that differs by more than 2×. The result agrees with
/// a direct nodal solve at any frequency to about 1e-12 relative (tests check 1e-9 against
/// [`crate::mna::transfer`]).
///
/// # Errors
/// [`AnalysisError::BadNetlist`] for a malformed netlist; [`AnalysisError::Singular`] when the
/// equations are singular at every radius tried.
pub fn stage_transfer(net: &StageNetlist, op: &OpAmp) -> Result<Rational, AnalysisError> {
    let compiled = Compiled::new(net, op)?;
    let assembled = compiled.assemble(net);
    let mut work = FitWork::new(&compiled);
    fitted_rational(&compiled, &assembled, &mut work)
}

/// Fits an already assembled netlist (see [`stage_transfer`]).
///
/// # Errors
/// [`AnalysisError::Singular`] when the equations are singular at every radius tried.
pub fn fitted_rational(
    compiled: &Compiled,
    assembled: &Assembled,
    work: &mut FitWork,
) -> Result<Rational, AnalysisError> {
    let first = fit_at_some_radius(compiled, assembled, work, compiled.scale_rad_s * 1.1)?;
    // Refit at the radius that balances the denominator's extreme coefficients (the geometric
    // mean of its root magnitudes): the rounding error of each coefficient is then smallest
    // relative to the coefficients that dominate at the highest and lowest frequencies (the
    // op-amp poles sit far above the filter poles).
    let d = &first.den.c;
    let n = first.den.degree();
    if n >= 1 && d[0] != 0.0 {
        let ratio = fmath::powf(d[0].abs() / d[n].abs(), 1.0 / n as f64);
        if ratio.is_finite() && !(0.5..=2.0).contains(&ratio) {
            if let Ok(second) =
                fit_at_some_radius(compiled, assembled, work, first.scale_rad_s * ratio)
            {
                return Ok(second);
            }
        }
    }
    Ok(first)
}

fn fit_at_some_radius(
    compiled: &Compiled,
    assembled: &Assembled,
    work: &mut FitWork,
    base: f64,
) -> Result<Rational, AnalysisError> {
    for attempt in 0..4 {
        let rho = base * (1.0 + 0.173 * attempt as f64);
        if work.fit(compiled, assembled, rho) {
            let den = Poly::new(work.den.clone());
            let num = Poly::new(work.num.clone());
            let scale = den.c.iter().fold(0.0f64, |m, &v| m.max(v.abs()));
            if !(scale > 0.0 && scale.is_finite()) {
                return Err(AnalysisError::Singular(
                    "the circuit determinant vanishes identically: a node without a DC path, a \
                     capacitor loop or an op amp without feedback"
                        .into(),
                ));
            }
            let num_scale = num.c.iter().fold(0.0f64, |m, &v| m.max(v.abs()));
            let num = Poly::new(num.c.iter().map(|v| v / scale).collect());
            let den = Poly::new(den.c.iter().map(|v| v / scale).collect());
            // Trim each polynomial relative to its own size.
            let num = if num_scale > 0.0 {
                num.trimmed(FIT_TRIM_REL)
            } else {
                Poly::new(vec![0.0])
            };
            return Ok(Rational {
                scale_rad_s: rho,
                num,
                den: den.trimmed(FIT_TRIM_REL),
            });
        }
    }
    Err(AnalysisError::Singular(
        "the circuit equations are singular at every sample frequency: a node without a DC path, \
         a capacitor loop or an op amp without feedback"
            .into(),
    ))
}

//! The tolerance study's per-run stage polynomials without solving any equations: N(s) and D(s)
//! are multilinear in the parts' admittances, so they are precomputed once as a multilinear
//! expansion around the nominal values and each run only evaluates that expansion.
//!
//! Why it is exact: a resistor or capacitor stamps its admittance `y` (1/R or C) into the nodal
//! matrix as a rank-one pattern, so the determinant D is affine in each `y` separately; the
//! Cramer numerator N is the determinant of the matrix with one column replaced by the input
//! coupling, which is affine in each `y` too. With `δ_i = y_i/y_i,nom − 1`,
//! `D(s) = Σ_S a_S(s)·Π_{i∈S} δ_i` over all subsets S of the P parts, where the coefficient
//! polynomials follow by inclusion–exclusion from D at the 2^P corners `y_i ∈ {y_i,nom,
//! 2·y_i,nom}`: `a_S = Σ_{T⊆S} (−1)^{|S|−|T|} D(corner T)` (each corner fitted once by the circle
//! fit of [`super::poly`]). A run costs 2^P products for the monomials and 2^P multiply-adds per
//! coefficient. Used for stages of up to [`MAX_PARTS`] resistors and capacitors; larger stages use
//! the real-point solve of [`super::fastfit`].

use super::circuit::Compiled;
use super::poly::FitWork;
use crate::netlist::{PartKind, StageNetlist};

/// Largest number of resistors and capacitors in a stage for the multilinear expansion (2^8 = 256
/// terms per coefficient).
pub const MAX_PARTS: usize = 8;

/// A stage's N and D as multilinear expansions in the relative admittance changes of its parts.
#[derive(Debug, Clone)]
pub struct Multilinear {
    /// Netlist indices of the varied parts.
    part_idx: Vec<usize>,
    /// True for capacitors (δ from C), false for resistors (δ from 1/R).
    is_capacitor: Vec<bool>,
    /// Nominal values.
    nominal: Vec<f64>,
    /// Coefficients per polynomial.
    k: usize,
    /// `a_num[j·2^P + S]`: coefficient j (in u = s/ω_g) of the term S.
    a_num: Vec<f64>,
    a_den: Vec<f64>,
    mono: Vec<f64>,
}

impl Multilinear {
    /// Precomputes the expansion of `net` (compiled as `compiled`) with the fit radius `rho_rad_s`
    /// and coefficients in `u = s/w_g_rad_s`. `None` when the stage has more than [`MAX_PARTS`]
    /// parts or a corner cannot be fitted (the caller then solves per run).
    pub fn new(
        compiled: &Compiled,
        net: &StageNetlist,
        rho_rad_s: f64,
        w_g_rad_s: f64,
    ) -> Option<Multilinear> {
        let part_idx: Vec<usize> = net
            .parts
            .iter()
            .enumerate()
            .filter(|(_, p)| p.kind != PartKind::OpAmp)
            .map(|(i, _)| i)
            .collect();
        let p = part_idx.len();
        if p > MAX_PARTS {
            return None;
        }
        let is_capacitor: Vec<bool> = part_idx
            .iter()
            .map(|&i| net.parts[i].kind == PartKind::Capacitor)
            .collect();
        let nominal: Vec<f64> = part_idx.iter().map(|&i| net.parts[i].value).collect();
        let mut work = FitWork::new(compiled);
        let k = compiled.degree_bound + 1;
        let n_terms = 1usize << p;
        let mut a_num = vec![0.0; k * n_terms];
        let mut a_den = vec![0.0; k * n_terms];
        let mut values: Vec<f64> = net.parts.iter().map(|q| q.value).collect();
        let mut assembled = compiled.blank();
        let ratio = w_g_rad_s / rho_rad_s;
        for corner in 0..n_terms {
            for (bit, (&idx, &cap)) in part_idx.iter().zip(&is_capacitor).enumerate() {
                let doubled = corner & (1 << bit) != 0;
                // Doubling the admittance: 2·C, or R/2.
                values[idx] = match (doubled, cap) {
                    (false, _) => nominal[bit],
                    (true, true) => 2.0 * nominal[bit],
                    (true, false) => nominal[bit] / 2.0,
                };
            }
            compiled.assemble_into(&values, &mut assembled);
            if !work.fit(compiled, &assembled, rho_rad_s) {
                return None;
            }
            let mut f = 1.0;
            for j in 0..k {
                a_num[j * n_terms + corner] = work.num[j] * f;
                a_den[j * n_terms + corner] = work.den[j] * f;
                f *= ratio;
            }
        }
        // Inclusion–exclusion (the subset Möbius transform), coefficient by coefficient.
        for table in [&mut a_num, &mut a_den] {
            for j in 0..k {
                let row = &mut table[j * n_terms..(j + 1) * n_terms];
                for bit in 0..p {
                    for s in 0..n_terms {
                        if s & (1 << bit) != 0 {
                            row[s] -= row[s ^ (1 << bit)];
                        }
                    }
                }
            }
        }
        Some(Multilinear {
            part_idx,
            is_capacitor,
            nominal,
            k,
            a_num,
            a_den,
            mono: vec![0.0; n_terms],
        })
    }

    /// Evaluates N and D (coefficients in u, ascending) for the stage's part `values` (indexed
    /// like the netlist's parts) into `num_u` and `den_u` (length ≥ K).
    pub fn evaluate(&mut self, values: &[f64], num_u: &mut [f64], den_u: &mut [f64]) {
        let n_terms = self.mono.len();
        self.mono[0] = 1.0;
        for (bit, ((&idx, &cap), &nom)) in self
            .part_idx
            .iter()
            .zip(&self.is_capacitor)
            .zip(&self.nominal)
            .enumerate()
        {
            let v = values.get(idx).copied().unwrap_or(f64::NAN);
            let delta = if cap { v / nom - 1.0 } else { nom / v - 1.0 };
            let half = 1usize << bit;
            let (lo, hi) = self.mono[..2 * half].split_at_mut(half);
            for (h, &l) in hi.iter_mut().zip(lo.iter()) {
                *h = l * delta;
            }
        }
        for j in 0..self.k {
            let rn = &self.a_num[j * n_terms..(j + 1) * n_terms];
            let rd = &self.a_den[j * n_terms..(j + 1) * n_terms];
            // Eight partial sums break the dependency chain of the dot product (and let it
            // vectorise); they are added in a fixed order, so the result does not depend on the
            // platform.
            let mut an = [0.0f64; 8];
            let mut ad = [0.0f64; 8];
            let chunks = rn
                .chunks_exact(8)
                .zip(rd.chunks_exact(8))
                .zip(self.mono.chunks_exact(8));
            for ((cn, cd), m) in chunks {
                for l in 0..8 {
                    an[l] += cn[l] * m[l];
                    ad[l] += cd[l] * m[l];
                }
            }
            let tail = n_terms - n_terms % 8;
            for i in tail..n_terms {
                an[0] += rn[i] * self.mono[i];
                ad[0] += rd[i] * self.mono[i];
            }
            num_u[j] = ((an[0] + an[1]) + (an[2] + an[3])) + ((an[4] + an[5]) + (an[6] + an[7]));
            den_u[j] = ((ad[0] + ad[1]) + (ad[2] + ad[3])) + ((ad[4] + ad[5]) + (ad[6] + ad[7]));
        }
    }
}

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
//! coefficient; the tolerance study evaluates eight runs at a time, one per SIMD lane
//! ([`Multilinear::evaluate_lanes`], bit-identical to [`Multilinear::evaluate`] lane by lane).
//! Used for stages of up to [`MAX_PARTS`] resistors and capacitors; larger stages use the
//! real-point solve of [`super::fastfit`].

use super::circuit::Compiled;
use super::lanes::Lane8;
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

impl Multilinear {
    /// Number of terms of the expansion, 2^P: the length of the monomial scratch that
    /// [`Multilinear::evaluate_lanes`] needs.
    pub fn n_terms(&self) -> usize {
        1usize << self.part_idx.len()
    }

    /// [`Multilinear::evaluate`] for eight runs side by side: `values[i][l]` is part `i` of run
    /// `l` (indexed like the netlist's parts), `num_u[j][l]` and `den_u[j][l]` receive
    /// coefficient `j` of run `l` (length ≥ K), `mono` is scratch of length ≥
    /// [`Multilinear::n_terms`]. `V` is the lane arithmetic
    /// ([`super::lanes::Lane8`]).
    ///
    /// Each lane does the operations of [`Multilinear::evaluate`] in the same order (the same
    /// eight partial sums, added in the same tree), so every lane's result is bit-identical to a
    /// scalar evaluation of that run.
    #[inline(always)]
    pub(crate) fn evaluate_lanes<V: Lane8>(
        &self,
        values: &[[f64; 8]],
        mono: &mut [[f64; 8]],
        num_u: &mut [[f64; 8]],
        den_u: &mut [[f64; 8]],
    ) {
        let n_terms = self.n_terms();
        let mono = &mut mono[..n_terms];
        mono[0] = [1.0; 8];
        let one = V::splat(1.0);
        for (bit, ((&idx, &cap), &nom)) in self
            .part_idx
            .iter()
            .zip(&self.is_capacitor)
            .zip(&self.nominal)
            .enumerate()
        {
            let v = V::load(values.get(idx).unwrap_or(&[f64::NAN; 8]));
            let delta = if cap {
                v.div(V::splat(nom)).sub(one)
            } else {
                V::splat(nom).div(v).sub(one)
            };
            let half = 1usize << bit;
            let (lo, hi) = mono[..2 * half].split_at_mut(half);
            for (h, m) in hi.iter_mut().zip(lo.iter()) {
                V::load(m).mul(delta).store(h);
            }
        }
        // N and D one after the other: eight partial sums of one polynomial fit the registers of
        // every path.
        for (table, out) in [(&self.a_num, num_u), (&self.a_den, den_u)] {
            dot_lanes::<V>(table, mono, self.k, out);
        }
    }
}

/// `out[j] = Σ_S table[j·2^P + S]·mono[S]` for `j < k`, lane by lane, with the eight partial
/// sums (term `S` into sum `S mod 8`, the terms after the last full eight into sum 0) of
/// [`Multilinear::evaluate`].
#[inline(always)]
fn dot_lanes<V: Lane8>(table: &[f64], mono: &[[f64; 8]], k: usize, out: &mut [[f64; 8]]) {
    let n_terms = mono.len();
    let full = n_terms - n_terms % 8;
    for (j, o) in out.iter_mut().enumerate().take(k) {
        let row = &table[j * n_terms..(j + 1) * n_terms];
        let mut acc = [V::splat(0.0); 8];
        for (c, m) in row[..full]
            .chunks_exact(8)
            .zip(mono[..full].chunks_exact(8))
        {
            for q in 0..8 {
                acc[q] = acc[q].add(V::splat(c[q]).mul(V::load(&m[q])));
            }
        }
        for (&c, m) in row[full..].iter().zip(&mono[full..]) {
            acc[0] = acc[0].add(V::splat(c).mul(V::load(m)));
        }
        tree(&acc).store(o);
    }
}

/// The fixed addition tree of the eight partial sums, `((s0 + s1) + (s2 + s3)) + ((s4 + s5) +
/// (s6 + s7))`, as in [`Multilinear::evaluate`].
#[inline(always)]
fn tree<V: Lane8>(a: &[V; 8]) -> V {
    (a[0].add(a[1]).add(a[2].add(a[3]))).add(a[4].add(a[5]).add(a[6].add(a[7])))
}

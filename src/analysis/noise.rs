//! Output noise of the built board: the thermal noise of every resistor and the op amps' input
//! voltage and current noise, carried to the board output through the whole board (later stages
//! and the loading between stages included).
//!
//! Sources (one-sided power spectral densities, uncorrelated):
//! - a resistor R: a current `4kT/R` A²/Hz across it (Johnson–Nyquist), with T = 300 K and
//!   k = 1.380649e-23 J/K (exact in the SI since 2019, CODATA);
//! - an op amp: `en²` V²/Hz in series with its + input and `in²` A²/Hz into each input (the two
//!   inputs uncorrelated), white, from [`crate::opamp::OpAmp`]. The op amp's `Rout` is a model of
//!   its output stage, not a physical resistor, and is taken as noiseless.
//!
//! Method: the transimpedance from every source to the output at once, from one adjoint solve
//! per frequency: with `M·x = J` the board's nodal equations, `V_out = yᵀ·J` where `Mᵀ·y = e_out`
//! (the signal gain, for the input-referred density, is `yᵀ·b` with `b` the input's drive).
//! A current injected into node b is `y_b`; a voltage in an op amp's gain constraint is `y_row`.
//! The board input is held at 0 V by its (ideal) source. The integrated noise is
//! `√(∫ v²(f) df)` over the band, by globally adaptive Gauss–Kronrod (7–15 point) quadrature in
//! ln f ([`integrate_log_f`]) to a relative accuracy of 1e-7, each peak of the density on the
//! curve's frequencies being a panel edge.

use super::circuit::{input_drive, merge_stages, AnalysisError, Compiled, Solver};
use crate::board::Board;
use crate::error::InputError;
use crate::fmath;
use crate::netlist::{PartKind, StageNetlist};
use crate::opamp::OpAmp;
use num_complex::Complex64;
use serde::Serialize;
use std::f64::consts::PI;

/// Boltzmann constant, J/K (exact, SI 2019; CODATA).
pub const BOLTZMANN_J_PER_K: f64 = 1.380649e-23;
/// Temperature of the resistors, K (300 K, a warm room or a board in an enclosure).
pub const TEMPERATURE_K: f64 = 300.0;

/// What kind of noise source.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum NoiseKind {
    /// Thermal noise of a resistor.
    Resistor,
    /// An op amp's input voltage noise.
    OpAmpVoltage,
    /// An op amp's input current noise at its + input.
    OpAmpCurrentPlus,
    /// An op amp's input current noise at its − input.
    OpAmpCurrentMinus,
}

/// One noise source and what it puts at the output.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseSource {
    /// Reference designator of the part (`R3`, `U2`).
    #[serde(rename = "ref")]
    pub reference: String,
    /// Which mechanism.
    pub kind: NoiseKind,
    /// Stage number, from 1.
    pub stage: usize,
    /// Output noise density from this source, V/√Hz, one per frequency.
    pub density_v_per_rthz: Vec<f64>,
    /// RMS output noise from this source over the band, V.
    pub rms_v: f64,
    /// Share of the total output noise power over the band, 0–1.
    pub share: f64,
}

/// Settings of the noise analysis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseSettings {
    /// Frequencies of the density curves, Hz (positive).
    pub freqs_hz: Vec<f64>,
    /// Band of the integrated noise, Hz, `(lo, hi)` with 0 < lo < hi.
    pub band_hz: (f64, f64),
    /// Signal level at the output for the signal-to-noise ratio, V rms; `None` = no ratio.
    pub signal_v_rms: Option<f64>,
}

/// Noise of the board.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseReport {
    /// Frequencies of the curves, Hz.
    pub freqs_hz: Vec<f64>,
    /// Total output noise density, V/√Hz.
    pub output_density_v_per_rthz: Vec<f64>,
    /// Output density divided by the board's |H|: the input-referred noise, V/√Hz.
    pub input_density_v_per_rthz: Vec<f64>,
    /// Integration band, Hz.
    pub band_hz: (f64, f64),
    /// RMS output noise over the band, V.
    pub rms_v: f64,
    /// Every source, largest contribution first.
    pub sources: Vec<NoiseSource>,
    /// Output signal level used for the ratio, V rms.
    pub signal_v_rms: Option<f64>,
    /// Signal-to-noise ratio, dB: 20·log10(signal / rms noise).
    pub snr_db: Option<f64>,
    /// Resistor temperature, K.
    pub temperature_k: f64,
}

struct Source {
    reference: String,
    kind: NoiseKind,
    stage: usize,
    /// Power density of the source (A²/Hz or V²/Hz).
    psd: f64,
    /// Row of the equation the source enters, with its sign: (+row) for a current into a node,
    /// (−row) for one leaving it; `None` entries are ground, the board input, or an op-amp output
    /// with no output resistance (a current there flows into the ideal source).
    rows: Vec<(usize, f64)>,
}

/// Noise of a board made of `stages` (signal order) with op amp `op`.
///
/// # Errors
/// `noiseband` when the band is not `0 < lo < hi` (finite); `points` for an empty or
/// non-positive frequency list; [`AnalysisError::Singular`] when the board equations are singular.
pub fn stages_noise(
    stages: &[&StageNetlist],
    op: &OpAmp,
    settings: &NoiseSettings,
) -> Result<NoiseReport, AnalysisError> {
    let (lo, hi) = settings.band_hz;
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo) {
        return Err(AnalysisError::Input(InputError::new(
            "noiseband",
            format!("noise band {lo}–{hi} Hz; accepted two frequencies 0 < lo < hi"),
        )));
    }
    if settings.freqs_hz.is_empty()
        || settings
            .freqs_hz
            .iter()
            .any(|f| !(f.is_finite() && *f > 0.0))
    {
        return Err(AnalysisError::Input(InputError::new(
            "points",
            "noise frequencies must be positive and finite, at least one",
        )));
    }
    if let Some(v) = settings.signal_v_rms {
        if !(v.is_finite() && v > 0.0) {
            return Err(AnalysisError::Input(InputError::new(
                "vin",
                format!("signal level {v} V rms; accepted a positive level"),
            )));
        }
    }
    let merged = merge_stages(stages)?;
    let net = &merged.netlist;
    let compiled = Compiled::new(net, op)?;
    let assembled = compiled.assemble(net);
    let kcl_row = |node: Option<usize>| -> Option<usize> {
        let col = node.and_then(|i| compiled.node_col.get(i).copied().flatten())?;
        compiled
            .row_is_kcl
            .get(col)
            .copied()
            .unwrap_or(false)
            .then_some(col)
    };
    let four_kt = 4.0 * BOLTZMANN_J_PER_K * TEMPERATURE_K;
    let mut sources = Vec::new();
    let mut opamp_k = 0;
    for (idx, p) in net.parts.iter().enumerate() {
        let stage = merged.part_origin.get(idx).map_or(0, |o| o.0) + 1;
        match p.kind {
            PartKind::Resistor => {
                let mut rows = Vec::new();
                if let Some(r) = kcl_row(p.nodes[0]) {
                    rows.push((r, -1.0));
                }
                if let Some(r) = kcl_row(p.nodes[1]) {
                    rows.push((r, 1.0));
                }
                sources.push(Source {
                    reference: p.reference.clone(),
                    kind: NoiseKind::Resistor,
                    stage,
                    psd: four_kt / p.value,
                    rows,
                });
            }
            PartKind::Capacitor => {}
            PartKind::OpAmp => {
                let row = compiled.opamp_rows.get(opamp_k).copied();
                opamp_k += 1;
                if let Some(r) = row {
                    sources.push(Source {
                        reference: p.reference.clone(),
                        kind: NoiseKind::OpAmpVoltage,
                        stage,
                        psd: op.en_v_per_rthz * op.en_v_per_rthz,
                        rows: vec![(r, 1.0)],
                    });
                }
                for (pin, kind) in [
                    (p.nodes[0], NoiseKind::OpAmpCurrentPlus),
                    (p.nodes[1], NoiseKind::OpAmpCurrentMinus),
                ] {
                    sources.push(Source {
                        reference: p.reference.clone(),
                        kind,
                        stage,
                        psd: op.in_a_per_rthz * op.in_a_per_rthz,
                        rows: kcl_row(pin).map(|r| vec![(r, 1.0)]).unwrap_or_default(),
                    });
                }
            }
        }
    }
    let mut solver = Solver::new(compiled.n);
    let mut drive = vec![Complex64::new(0.0, 0.0); compiled.n];
    // Output power density of each source at frequency f, and |H(f)|. The same adjoint solution
    // gives the signal gain: with `M·x = b` driven by the board input, `V_out = yᵀ·b`.
    let mut eval = |f: f64, out: &mut Vec<f64>| -> Result<f64, AnalysisError> {
        let s = Complex64::new(0.0, 2.0 * PI * f);
        input_drive(&assembled, s, Complex64::new(1.0, 0.0), &mut drive);
        solver.load_transposed(&assembled, s);
        solver.rhs_mut()[compiled.output_col] = Complex64::new(1.0, 0.0);
        let det = solver.solve();
        if fmath::cnorm(det) == 0.0 {
            return Err(AnalysisError::Singular(format!(
                "board equations at {f} Hz: a node without a DC path or an op amp without feedback"
            )));
        }
        let y = solver.solution();
        out.clear();
        for src in &sources {
            let z: Complex64 = src.rows.iter().map(|&(r, sign)| y[r] * sign).sum();
            out.push(z.norm_sqr() * src.psd);
        }
        let gain: Complex64 = y.iter().zip(&drive).map(|(a, b)| a * b).sum();
        Ok(fmath::cnorm(gain))
    };
    // Curves.
    let n_f = settings.freqs_hz.len();
    let mut per_source: Vec<Vec<f64>> = vec![Vec::with_capacity(n_f); sources.len()];
    let mut total = Vec::with_capacity(n_f);
    let mut input_ref = Vec::with_capacity(n_f);
    let mut buf = Vec::with_capacity(sources.len());
    for &f in &settings.freqs_hz {
        let h = eval(f, &mut buf)?;
        let sum: f64 = buf.iter().sum();
        for (dst, &p) in per_source.iter_mut().zip(&buf) {
            dst.push(p.sqrt());
        }
        total.push(sum.sqrt());
        input_ref.push(if h > 0.0 {
            sum.sqrt() / h
        } else {
            f64::INFINITY
        });
    }
    // Band integral: adaptive Gauss–Kronrod in ln f, with a panel edge at every peak of the
    // density on the curve's frequencies, so that a narrow resonance is not stepped over.
    let peaks: Vec<f64> = total
        .windows(3)
        .zip(settings.freqs_hz.windows(3))
        .filter(|(v, _)| v[1] > v[0] && v[1] >= v[2])
        .map(|(_, f)| f[1])
        .collect();
    let power = integrate_log_f(
        lo,
        hi,
        &peaks,
        sources.len(),
        |f, out| -> Result<(), AnalysisError> {
            eval(f, &mut buf)?;
            out.copy_from_slice(&buf);
            Ok(())
        },
    )?;
    let total_power: f64 = power.iter().sum();
    let rms_v = total_power.sqrt();
    let mut out_sources: Vec<NoiseSource> = sources
        .iter()
        .zip(per_source)
        .zip(&power)
        .map(|((src, density), &p)| NoiseSource {
            reference: src.reference.clone(),
            kind: src.kind,
            stage: src.stage,
            density_v_per_rthz: density,
            rms_v: p.sqrt(),
            share: if total_power > 0.0 {
                p / total_power
            } else {
                0.0
            },
        })
        .collect();
    crate::sort::sort_by(&mut out_sources, |a, b| {
        b.share
            .partial_cmp(&a.share)
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let snr_db = settings
        .signal_v_rms
        .filter(|_| rms_v > 0.0)
        .map(|v| 20.0 * fmath::log10(v / rms_v));
    Ok(NoiseReport {
        freqs_hz: settings.freqs_hz.clone(),
        output_density_v_per_rthz: total,
        input_density_v_per_rthz: input_ref,
        band_hz: settings.band_hz,
        rms_v,
        sources: out_sources,
        signal_v_rms: settings.signal_v_rms,
        snr_db,
        temperature_k: TEMPERATURE_K,
    })
}

/// Noise of `board`.
///
/// # Errors
/// As [`stages_noise`].
pub fn board_noise(board: &Board, settings: &NoiseSettings) -> Result<NoiseReport, AnalysisError> {
    let nets: Vec<&StageNetlist> = board.stages.iter().map(|s| &s.netlist).collect();
    stages_noise(&nets, &board.op_amp, settings)
}

/// Nodes of the 15-point Kronrod rule on [−1, 1], non-negative half, descending; the odd
/// entries and the centre are the nodes of the 7-point Gauss rule. (Piessens et al., QUADPACK
/// `qk15`; checked by `gauss_kronrod_rules_are_exact_to_their_degree`.)
const KRONROD_NODES: [f64; 8] = [
    0.991_455_371_120_812_6,
    0.949_107_912_342_758_5,
    0.864_864_423_359_769_1,
    0.741_531_185_599_394_4,
    0.586_087_235_467_691_1,
    0.405_845_151_377_397_2,
    0.207_784_955_007_898_5,
    0.0,
];
/// Weights of the 15-point Kronrod rule for [`KRONROD_NODES`].
const KRONROD_WEIGHTS: [f64; 8] = [
    0.022_935_322_010_529_22,
    0.063_092_092_629_978_55,
    0.104_790_010_322_250_2,
    0.140_653_259_715_525_9,
    0.169_004_726_639_267_9,
    0.190_350_578_064_785_4,
    0.204_432_940_075_298_9,
    0.209_482_141_084_727_8,
];
/// Weights of the 7-point Gauss rule for nodes 1, 3, 5 and 7 (the centre) of [`KRONROD_NODES`].
const GAUSS_WEIGHTS: [f64; 4] = [
    0.129_484_966_168_869_7,
    0.279_705_391_489_276_7,
    0.381_830_050_505_118_9,
    0.417_959_183_673_469_4,
];
/// Relative accuracy asked of the band integral (of the sum of its components).
const INTEGRAL_REL_TOL: f64 = 1e-7;
/// Most panels the band integral may use (15 evaluations each).
const INTEGRAL_MAX_PANELS: usize = 400;

/// One panel of the band integral: its ends in ln f, the Kronrod estimate of each component and
/// the error estimate of their sum (|Kronrod − Gauss|).
struct Panel {
    a: f64,
    b: f64,
    kronrod: Vec<f64>,
    error: f64,
}

/// `∫ g_k(f) df` from `lo` to `hi` for every component `k < n` of a vector function
/// (`eval(f, out)` writes `g(f)` into `out`), by globally adaptive 7–15 point Gauss–Kronrod
/// quadrature in `u = ln f` (`df = f du`): panels one to a decade, cut also at `breaks`
/// (inside the band), and the panel of largest error halved until the error estimate of the sum
/// is below [`INTEGRAL_REL_TOL`] of it, or [`INTEGRAL_MAX_PANELS`] are used.
///
/// # Errors
/// The first error of `eval`.
pub(crate) fn integrate_log_f<E>(
    lo: f64,
    hi: f64,
    breaks: &[f64],
    n: usize,
    mut eval: impl FnMut(f64, &mut [f64]) -> Result<(), E>,
) -> Result<Vec<f64>, E> {
    let (ua, ub) = (fmath::ln(lo), fmath::ln(hi));
    let n0 = ((ub - ua) / std::f64::consts::LN_10).ceil().max(2.0) as usize;
    let mut edges: Vec<f64> = (0..=n0)
        .map(|i| ua + (ub - ua) * i as f64 / n0 as f64)
        .chain(
            breaks
                .iter()
                .map(|f| fmath::ln(*f))
                .filter(|u| *u > ua && *u < ub),
        )
        .collect();
    crate::sort::sort_floats(&mut edges);
    edges.dedup_by(|x, y| (*x - *y).abs() <= 1e-12 * (ub - ua));
    let mut value = vec![0.0; n];
    let mut panel = |a: f64, b: f64| -> Result<Panel, E> {
        let (c, h) = (0.5 * (a + b), 0.5 * (b - a));
        let mut kronrod = vec![0.0; n];
        let mut gauss_sum = 0.0;
        for (j, (&x, &w)) in KRONROD_NODES.iter().zip(&KRONROD_WEIGHTS).enumerate() {
            let points: &[f64] = if x == 0.0 { &[0.0] } else { &[-x, x] };
            for &t in points {
                let f = fmath::exp(c + h * t);
                eval(f, &mut value)?;
                let mut sum = 0.0;
                for (k, v) in kronrod.iter_mut().zip(&value) {
                    *k += w * v * f;
                    sum += v * f;
                }
                if j % 2 == 1 {
                    gauss_sum += GAUSS_WEIGHTS[j / 2] * sum;
                }
            }
        }
        kronrod.iter_mut().for_each(|k| *k *= h);
        let kronrod_sum: f64 = kronrod.iter().sum();
        Ok(Panel {
            a,
            b,
            error: (kronrod_sum - h * gauss_sum).abs(),
            kronrod,
        })
    };
    let mut panels = Vec::with_capacity(edges.len() + 16);
    for pair in edges.windows(2) {
        panels.push(panel(pair[0], pair[1])?);
    }
    loop {
        let total: f64 = panels.iter().map(|p| p.kronrod.iter().sum::<f64>()).sum();
        let error: f64 = panels.iter().map(|p| p.error).sum();
        if !(error > INTEGRAL_REL_TOL * total.abs()) || panels.len() >= INTEGRAL_MAX_PANELS {
            break;
        }
        let worst = panels
            .iter()
            .enumerate()
            .fold((0, -1.0), |(bi, be), (i, p)| {
                if p.error > be {
                    (i, p.error)
                } else {
                    (bi, be)
                }
            })
            .0;
        let old = panels.swap_remove(worst);
        let mid = 0.5 * (old.a + old.b);
        panels.push(panel(old.a, mid)?);
        panels.push(panel(mid, old.b)?);
    }
    let mut out = vec![0.0; n];
    for p in &panels {
        for (o, k) in out.iter_mut().zip(&p.kronrod) {
            *o += k;
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gauss_kronrod_rules_are_exact_to_their_degree() {
        // A 15-point Kronrod rule integrates polynomials of degree ≤ 22 exactly and its 7-point
        // Gauss rule those of degree ≤ 13 (properties of the rules, common practice): ∫ x^m
        // over [−1, 1] is 2/(m+1) for even m.
        for m in (0..=22).step_by(2) {
            let exact = 2.0 / (m as f64 + 1.0);
            let mut kronrod = 0.0;
            let mut gauss = 0.0;
            for (j, (&x, &w)) in KRONROD_NODES.iter().zip(&KRONROD_WEIGHTS).enumerate() {
                let both = if x == 0.0 {
                    if m == 0 {
                        1.0
                    } else {
                        0.0
                    }
                } else {
                    2.0 * fmath::powi(x, m)
                };
                kronrod += w * both;
                if j % 2 == 1 {
                    gauss += GAUSS_WEIGHTS[j / 2] * both;
                }
            }
            assert!((kronrod - exact).abs() < 1e-15, "Kronrod, x^{m}: {kronrod}");
            if m <= 13 {
                assert!((gauss - exact).abs() < 1e-15, "Gauss, x^{m}: {gauss}");
            }
        }
    }

    #[test]
    fn a_narrow_resonance_integrates_to_its_noise_bandwidth() {
        // The power response of a second-order band-pass, 1/(1 + Q²(f/f0 − f0/f)²), has the
        // noise bandwidth (π/2)·f0/Q (common practice). Over f0/10⁸ … 10⁸·f0 the tails left out,
        // about f0/(Q²·10⁸) on each side, are below 2e-8 of it. The peak sits between two of
        // the panel edges the decade grid gives, and no break is given: the adaptive
        // halving must find it.
        for &(f0, q) in &[(1234.5, 0.7), (1234.5, 30.0), (777.0, 300.0)] {
            let got = integrate_log_f::<()>(f0 / 1e8, f0 * 1e8, &[], 1, |f, out| {
                let x = f / f0 - f0 / f;
                out[0] = 1.0 / (1.0 + q * q * x * x);
                Ok(())
            })
            .unwrap_or_default();
            let want = std::f64::consts::FRAC_PI_2 * f0 / q;
            assert!(
                (got[0] / want - 1.0).abs() < 1e-6,
                "f0 {f0} Q {q}: {} vs {want}",
                got[0]
            );
        }
    }
}

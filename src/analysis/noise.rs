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
//! `√(∫ v²(f) df)` over the band, by composite Simpson's rule in ln f on at least 100 points per
//! decade.

use super::circuit::{merge_stages, AnalysisError, Compiled, Solver};
use crate::board::Board;
use crate::error::InputError;
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
        solver.load(&assembled, s, Complex64::new(1.0, 0.0));
        drive.copy_from_slice(solver.rhs_mut());
        solver.transpose();
        for v in solver.rhs_mut().iter_mut() {
            *v = Complex64::new(0.0, 0.0);
        }
        solver.rhs_mut()[compiled.output_col] = Complex64::new(1.0, 0.0);
        let det = solver.solve();
        if det.norm() == 0.0 {
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
        Ok(gain.norm())
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
    // Band integral, Simpson in ln f.
    let decades = (hi / lo).log10();
    let mut n_int = ((decades * 100.0).ceil() as usize).max(200);
    if n_int % 2 == 1 {
        n_int += 1;
    }
    let du = (hi / lo).ln() / n_int as f64;
    let mut power = vec![0.0; sources.len()];
    for i in 0..=n_int {
        let f = lo * (du * i as f64).exp();
        eval(f, &mut buf)?;
        let w = if i == 0 || i == n_int {
            1.0
        } else if i % 2 == 1 {
            4.0
        } else {
            2.0
        };
        // ∫ v² df = ∫ v²·f d(ln f).
        for (acc, &p) in power.iter_mut().zip(&buf) {
            *acc += w * p * f;
        }
    }
    power.iter_mut().for_each(|p| *p *= du / 3.0);
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
    out_sources.sort_by(|a, b| {
        b.share
            .partial_cmp(&a.share)
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let snr_db = settings
        .signal_v_rms
        .filter(|_| rms_v > 0.0)
        .map(|v| 20.0 * (v / rms_v).log10());
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

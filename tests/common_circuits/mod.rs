//! Helpers shared by the circuit tests: sections, boards, part lookup by role, sweeps.
#![allow(dead_code)]

use num_complex::Complex64;
use rolloff::board::{Board, BuildChoices};
use rolloff::netlist::StageNetlist;
use rolloff::opamp::OpAmp;
use rolloff::section::{Section, SectionKind};
use rolloff::topology::Topology;
use std::f64::consts::{FRAC_1_SQRT_2, PI};

/// A section with the given kind, f0, Q (None for first order) and gain.
pub fn section(kind: SectionKind, f0_hz: f64, q: Option<f64>, gain: f64) -> Section {
    Section {
        kind,
        f0_hz,
        q,
        gain,
        fz_hz: None,
    }
}

/// A notch section (`SectionKind::Notch`): zeros at `fz_hz`, `gain` the larger far-side gain.
pub fn notch(f0_hz: f64, q: f64, fz_hz: f64, gain: f64) -> Section {
    Section {
        kind: SectionKind::Notch,
        f0_hz,
        q: Some(q),
        gain,
        fz_hz: Some(fz_hz),
    }
}

/// Default choices with a topology and an op amp.
pub fn choices(topology: Topology, op_amp: OpAmp) -> BuildChoices {
    BuildChoices {
        topology,
        op_amp,
        ..BuildChoices::default()
    }
}

/// A one-stage board (panics with the error if the build fails: tests only).
pub fn one_stage(section: Section, topology: Topology, op_amp: OpAmp) -> Board {
    Board::build(&[section], &choices(topology, op_amp))
        .unwrap_or_else(|e| panic!("build {section:?}: {e}"))
}

/// The value of the part with this role in a stage netlist (panics when absent: tests only).
pub fn role(net: &StageNetlist, role: &str) -> f64 {
    net.parts
        .iter()
        .find(|p| p.role == role)
        .unwrap_or_else(|| panic!("no part with role {role:?} in {:?}", net.parts))
        .value
}

/// The value of an optional part (the gain divider).
pub fn role_opt(net: &StageNetlist, role: &str) -> Option<f64> {
    net.parts.iter().find(|p| p.role == role).map(|p| p.value)
}

/// s = j·2πf.
pub fn jw(f_hz: f64) -> Complex64 {
    Complex64::new(0.0, 2.0 * PI * f_hz)
}

/// `n` log-spaced frequencies from `lo` to `hi`, inclusive.
pub fn log_sweep(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|k| lo * (hi / lo).powf(k as f64 / (n - 1) as f64))
        .collect()
}

/// |a − b| / |b|.
pub fn rel_err(a: Complex64, b: Complex64) -> f64 {
    (a - b).norm() / b.norm()
}

/// 20·log10|h|.
pub fn db(h: Complex64) -> f64 {
    20.0 * h.norm().log10()
}

/// One section per circuit (with the topology choice that selects it), gains chosen to exercise
/// the gain networks.
pub fn circuit_cases() -> Vec<(&'static str, Section, Topology)> {
    use SectionKind::*;
    use Topology::*;
    vec![
        (
            "sk-lp-unity",
            section(LowPass, 1e3, Some(FRAC_1_SQRT_2), 1.0),
            SallenKey,
        ),
        (
            "sk-lp-gain",
            section(LowPass, 2e3, Some(1.3), 2.5),
            SallenKey,
        ),
        (
            "sk-hp-unity",
            section(HighPass, 1e3, Some(FRAC_1_SQRT_2), 1.0),
            SallenKey,
        ),
        (
            "sk-hp-gain",
            section(HighPass, 500.0, Some(2.0), 3.0),
            SallenKey,
        ),
        (
            "mfb-lp",
            section(LowPass, 1e3, Some(FRAC_1_SQRT_2), 2.0),
            MultipleFeedback,
        ),
        (
            "mfb-hp",
            section(HighPass, 3e3, Some(0.9), 1.5),
            MultipleFeedback,
        ),
        (
            "mfb-bp",
            section(BandPass, 10e3, Some(5.0), 2.0),
            MultipleFeedback,
        ),
        ("rc-lp", section(LowPass, 1e3, None, 1.0), SallenKey),
        ("rc-lp-gain", section(LowPass, 1e3, None, 2.0), SallenKey),
        ("rc-hp", section(HighPass, 100.0, None, 1.0), SallenKey),
        ("inv-lp", section(LowPass, 5e3, None, 3.0), MultipleFeedback),
        (
            "inv-hp",
            section(HighPass, 50.0, None, 0.5),
            MultipleFeedback,
        ),
    ]
}

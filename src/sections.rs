//! Sections: the filter split into second-order and first-order pieces (f0, Q, gain).

use serde::Serialize;

/// What a section passes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum SectionKind {
    /// H(s) = g·w0² / (s² + s·w0/Q + w0²), or g·w0 / (s + w0) for first order.
    LowPass,
    /// H(s) = g·s² / (s² + s·w0/Q + w0²), or g·s / (s + w0) for first order.
    HighPass,
    /// H(s) = g·(w0/Q)·s / (s² + s·w0/Q + w0²): gain g at f0. Second order only.
    BandPass,
}

/// One section of the cascade.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Section {
    /// What the section passes.
    pub kind: SectionKind,
    /// Natural frequency (second order) or pole frequency (first order), Hz.
    pub f0_hz: f64,
    /// Pole quality factor; `None` for a first-order section.
    pub q: Option<f64>,
    /// Passband gain, V/V, signed: DC gain (low-pass), high-frequency gain (high-pass), gain at f0
    /// (band-pass).
    pub gain: f64,
}

impl Section {
    /// 1 or 2.
    pub fn order(&self) -> usize {
        if self.q.is_some() {
            2
        } else {
            1
        }
    }
}

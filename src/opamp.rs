//! The op-amp model shared by the nodal analysis, the SPICE export and the noise analysis.

use crate::fmath;
use serde::Serialize;

/// A voltage-feedback op amp: open-loop gain A(s) = A0 / (1 + s/wp) with wp = 2π·GBW/A0 (one pole,
/// so |A| falls through 1 at GBW), an output resistance in series with the ideal output, and
/// input-referred noise densities. `OpAmp::ideal()` is the limit A0 → ∞, GBW → ∞, Rout → 0.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OpAmp {
    /// Gain-bandwidth product, Hz (`gbw`). `f64::INFINITY` for ideal.
    pub gbw_hz: f64,
    /// Open-loop DC gain, dB (`a0`). `f64::INFINITY` for ideal.
    pub a0_db: f64,
    /// Open-loop output resistance, Ω (`rout`).
    pub rout_ohm: f64,
    /// Input voltage noise density, V/√Hz (white).
    pub en_v_per_rthz: f64,
    /// Input current noise density, A/√Hz (white), at each input.
    pub in_a_per_rthz: f64,
    /// Slew rate, V/s, used for the slew check.
    pub slew_v_per_s: f64,
    /// Input offset voltage, V, signed (`vos`): the op amp amplifies `V+ + vos − V−`, as if a
    /// source of `vos` sat in series with its non-inverting input. 0 when not modelled.
    pub vos_v: f64,
    /// Input bias current, A, signed (`ib`): the current each input draws from its node (positive
    /// into the pin). Both inputs draw the same current; the offset current between them is not
    /// modelled. 0 when not modelled.
    pub ib_a: f64,
}

impl OpAmp {
    /// The documented default: a generic general-purpose part (1 MHz GBW, 100 dB, 50 Ω, 10 nV/√Hz,
    /// 1 pA/√Hz, 0.5 V/µs). Not any vendor's part. Its DC errors are not modelled (`vos = 0`,
    /// `ib = 0`): offset and bias current differ by a factor of a thousand between part families
    /// (a chopper's microvolts, a general-purpose bipolar part's millivolts; a CMOS input's
    /// picoamperes, a bipolar input's hundreds of nanoamperes), so a default would invent the
    /// figure that decides the DC report. The report still gives each source's gain per volt or
    /// ampere, so the board's DC sensitivity shows without a part chosen.
    pub const GENERIC: OpAmp = OpAmp {
        gbw_hz: 1.0e6,
        a0_db: 100.0,
        rout_ohm: 50.0,
        en_v_per_rthz: 10.0e-9,
        in_a_per_rthz: 1.0e-12,
        slew_v_per_s: 0.5e6,
        vos_v: 0.0,
        ib_a: 0.0,
    };

    /// The ideal op amp: infinite gain and bandwidth, zero output resistance, noiseless, without
    /// offset or bias current.
    pub fn ideal() -> OpAmp {
        OpAmp {
            gbw_hz: f64::INFINITY,
            a0_db: f64::INFINITY,
            rout_ohm: 0.0,
            en_v_per_rthz: 0.0,
            in_a_per_rthz: 0.0,
            slew_v_per_s: f64::INFINITY,
            vos_v: 0.0,
            ib_a: 0.0,
        }
    }

    /// True when the DC errors are modelled: a non-zero offset or bias current.
    pub fn has_dc_errors(&self) -> bool {
        self.vos_v != 0.0 || self.ib_a != 0.0
    }

    /// True when the gain is infinite (the nodal analysis then uses a nullor).
    pub fn is_ideal_gain(&self) -> bool {
        !self.a0_db.is_finite() && !self.gbw_hz.is_finite()
    }

    /// Open-loop DC gain as a ratio, V/V.
    pub fn a0(&self) -> f64 {
        fmath::powf(10f64, self.a0_db / 20.0)
    }
}

impl OpAmp {
    /// The coefficients of the model's `1/A(s) = a + b·s`: `a = 1/A0` (0 when A0 is infinite),
    /// `b = 1/(2π·GBW)` in s (0 when GBW is infinite or not positive). The one formula of the op
    /// amp's gain: the banded solver stamps these coefficients, the dense reference evaluates
    /// [`OpAmp::inverse_gain`] from them.
    pub fn inverse_gain_coefficients(&self) -> (f64, f64) {
        let a = if self.a0_db.is_finite() {
            1.0 / self.a0()
        } else {
            0.0
        };
        let b = if self.gbw_hz.is_finite() && self.gbw_hz > 0.0 {
            1.0 / (2.0 * std::f64::consts::PI * self.gbw_hz)
        } else {
            0.0
        };
        (a, b)
    }

    /// `1/A(s) = 1/A0 + s/(2π·GBW)` at complex frequency `s` (rad/s); 0 for the ideal op amp.
    pub fn inverse_gain(&self, s: num_complex::Complex64) -> num_complex::Complex64 {
        let (a, b) = self.inverse_gain_coefficients();
        num_complex::Complex64::new(a, 0.0) + s * b
    }
}

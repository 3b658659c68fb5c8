//! The board's DC errors: the output offset that the op amps' input offset voltage and input bias
//! currents cause, each source's share, the worst case over their signs, and the resistor that
//! would cancel each op amp's bias-current share.
//!
//! The board is the merged netlist the AC analyses solve, assembled by [`super::circuit`] and
//! solved at s = 0: capacitors open, each op amp with its finite DC gain A0 and its output
//! resistance. The sources enter only the right-hand side, and the board input is held at 0 V
//! (the signal source is an ideal source of no DC value), so one factorization serves them all:
//! - an offset `vos` in series with the non-inverting input makes an op amp's constraint
//!   `v_int/A0 = V+ + vos − V−`, so `vos` is added to the right-hand side of its constraint row;
//! - a bias current `ib` drawn from an input node (positive into the pin) is a current sink
//!   there, `−ib` on that node's current equation. An input on the board input node, or on an
//!   output pin driven by an ideal output (Rout = 0), draws its current from that source, so it
//!   moves nothing.
//!
//! The board is linear in the sources, so each source's share is its gain to the output times its
//! value, the offset is the sum of the shares, and the worst case over signs is the sum of the
//! shares' magnitudes. Both inputs of one op amp draw bias current of one sign (one input pair of
//! one kind of transistor), so an op amp's two bias shares are summed before their magnitude is
//! taken: that is what lets equal resistances seen by the two inputs cancel them.

use super::circuit::{merge_stages, AnalysisError, Compiled, Solver};
use crate::board::Board;
use crate::netlist::{PartKind, StageNetlist};
use num_complex::Complex64;
use serde::Serialize;

/// The largest balancing resistor suggested, Ω: above it the resistor's own noise and the drift
/// of the bias current with temperature outweigh what it cancels (common practice keeps the
/// resistances seen by an op amp's inputs well below a few megohms).
pub const BALANCE_MAX_OHM: f64 = 10e6;

/// Below this a balancing resistor is not suggested, Ω: the inputs already see equal
/// resistances to within a resistor's tolerance of any value on the board.
pub const BALANCE_MIN_OHM: f64 = 1.0;

/// What causes a share of the output offset.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum DcSource {
    /// The op amp's input offset voltage.
    #[serde(rename = "vos")]
    Vos,
    /// The bias current into the non-inverting input.
    #[serde(rename = "ib+")]
    IbPlus,
    /// The bias current into the inverting input.
    #[serde(rename = "ib-")]
    IbMinus,
}

impl DcSource {
    /// The source as the reports name it: `vos`, `ib+`, `ib−`.
    pub fn label(self) -> &'static str {
        match self {
            DcSource::Vos => "vos",
            DcSource::IbPlus => "ib+",
            DcSource::IbMinus => "ib−",
        }
    }
}

/// One source's share of the output offset.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DcShare {
    /// The op amp's reference designator (`U1` …).
    #[serde(rename = "ref")]
    pub reference: String,
    /// Stage number, from 1.
    pub stage: usize,
    /// Which source of that op amp.
    pub what: DcSource,
    /// The output's DC change per unit of the source: V/V for `vos`, V/A (Ω) for a bias current.
    pub per_unit: f64,
    /// The output's DC change for the source's value, V (`per_unit` times `vos` or `ib`).
    pub share_v: f64,
}

/// Which input of an op amp a balancing resistor goes in series with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Pin {
    /// The non-inverting input.
    #[serde(rename = "+")]
    Plus,
    /// The inverting input.
    #[serde(rename = "-")]
    Minus,
}

impl Pin {
    /// The pin as the reports name it: `+` or `−`.
    pub fn label(self) -> &'static str {
        match self {
            Pin::Plus => "+",
            Pin::Minus => "−",
        }
    }
}

/// A resistor that cancels one op amp's bias-current share.
///
/// A resistor `R` between an input's node and the pin carries only that pin's bias current, so it
/// leaves the filter's response as it is and shifts the pin by `−ib·R`: on the non-inverting pin
/// that is an offset of `−ib·R`, on the inverting pin one of `+ib·R`. With `a+`, `a−` the output's
/// change per ampere into each input and `g` its change per volt of offset, the resistor in the
/// non-inverting pin that cancels `ib·(a+ + a−)` is `R = (a+ + a−)/g`; a negative `R` goes in the
/// inverting pin instead. For a single op amp with ideal gain this is the familiar rule: make the
/// DC resistance seen by each input equal.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Balance {
    /// The op amp's reference designator.
    #[serde(rename = "ref")]
    pub reference: String,
    /// Stage number, from 1.
    pub stage: usize,
    /// The input the resistor goes in series with.
    pub pin: Pin,
    /// The resistor, Ω.
    pub ohm: f64,
    /// The nearest value of the board's resistor series, Ω.
    pub standard_ohm: f64,
    /// The bias-current share it cancels at the given `ib`, V.
    pub nulls_v: f64,
}

/// The board's DC errors (`analysis.dc` of the design JSON).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DcErrors {
    /// Whether the op amp's DC errors are modelled (`vos` or `ib` not zero). When not, every
    /// share is zero and `per_unit` still gives the board's DC sensitivity to each source.
    pub modelled: bool,
    /// The offset voltage of every op amp, V.
    pub vos_v: f64,
    /// The bias current into each input of every op amp, A.
    pub ib_a: f64,
    /// The output's DC offset for the given signed `vos` and `ib`, V.
    pub offset_v: f64,
    /// The largest |offset| over the signs of every op amp's `vos` and `ib`, V.
    pub worst_v: f64,
    /// Each op amp's `vos`, `ib+` and `ib-` share, in signal order.
    pub sources: Vec<DcShare>,
    /// The balancing resistors, one for each op amp whose bias-current share a resistor of a
    /// sensible value cancels.
    pub balance: Vec<Balance>,
}

impl DcErrors {
    /// The worst case per volt of offset and per ampere of bias current, `(V/V, V/A)`: the sums
    /// of the magnitudes of the `vos` gains and of each op amp's summed bias gains.
    pub fn worst_per_unit(&self) -> (f64, f64) {
        let mut per_volt = 0.0;
        let mut per_amp = 0.0;
        for chunk in self.sources.chunks(3) {
            for share in chunk {
                if share.what == DcSource::Vos {
                    per_volt += share.per_unit.abs();
                }
            }
            let bias: f64 = chunk
                .iter()
                .filter(|s| s.what != DcSource::Vos)
                .map(|s| s.per_unit)
                .sum();
            per_amp += bias.abs();
        }
        (per_volt, per_amp)
    }
}

/// The DC errors of `board` for its op amp's `vos` and `ib`.
///
/// # Errors
/// [`AnalysisError::BadNetlist`] for a malformed board; [`AnalysisError::Singular`] when the DC
/// equations are singular (a node whose only paths are capacitors, an op amp without DC
/// feedback).
pub fn board_dc(board: &Board) -> Result<DcErrors, AnalysisError> {
    let op = &board.op_amp;
    for (key, value) in [("vos", op.vos_v), ("ib", op.ib_a)] {
        if !value.is_finite() {
            return Err(AnalysisError::Input(crate::error::InputError::new(
                key,
                format!("{key} = {value}: expected a finite number"),
            )));
        }
    }
    let nets: Vec<&StageNetlist> = board.stages.iter().map(|s| &s.netlist).collect();
    let merged = merge_stages(&nets)?;
    let net = &merged.netlist;
    let compiled = Compiled::new(net, op)?;
    let assembled = compiled.assemble(net);
    let mut solver = Solver::new(compiled.n);
    let zero = Complex64::new(0.0, 0.0);
    solver.load(&assembled, zero, zero);
    let det = solver.solve();
    if det.re == 0.0 && det.im == 0.0 {
        return Err(AnalysisError::Singular(
            "at DC: a node reached only through capacitors, or an op amp without DC feedback"
                .into(),
        ));
    }
    // The output's change for a unit right-hand side at `row`, from the one factorization.
    let gain_of = |row: usize, sign: f64| -> f64 {
        let mut b = vec![zero; compiled.n];
        b[row] = Complex64::new(sign, 0.0);
        solver.solve_again(&mut b);
        b[compiled.output_col].re
    };
    // The current equation of an input pin's node; `None` where a source absorbs the current.
    let kcl_row = |node: Option<usize>| -> Option<usize> {
        let col = node.and_then(|i| compiled.node_col.get(i).copied().flatten())?;
        compiled
            .row_is_kcl
            .get(col)
            .copied()
            .unwrap_or(false)
            .then_some(col)
    };
    let mut sources = Vec::new();
    let mut balance = Vec::new();
    let mut offset_v = 0.0;
    let mut worst_v = 0.0;
    let opamps = net
        .parts
        .iter()
        .zip(&merged.part_origin)
        .filter(|(p, _)| p.kind == PartKind::OpAmp);
    for ((part, &(stage_idx, _)), &row) in opamps.zip(&compiled.opamp_rows) {
        let stage = stage_idx + 1;
        let (plus, minus) = (part.nodes[0], part.nodes[1]);
        let per_volt = gain_of(row, 1.0);
        let per_amp_plus = kcl_row(plus).map_or(0.0, |r| gain_of(r, -1.0));
        let per_amp_minus = kcl_row(minus).map_or(0.0, |r| gain_of(r, -1.0));
        for (what, per_unit, value) in [
            (DcSource::Vos, per_volt, op.vos_v),
            (DcSource::IbPlus, per_amp_plus, op.ib_a),
            (DcSource::IbMinus, per_amp_minus, op.ib_a),
        ] {
            sources.push(DcShare {
                reference: part.reference.clone(),
                stage,
                what,
                per_unit,
                share_v: per_unit * value,
            });
        }
        let vos_share = per_volt * op.vos_v;
        let bias_share = (per_amp_plus + per_amp_minus) * op.ib_a;
        offset_v += vos_share + bias_share;
        worst_v += vos_share.abs() + bias_share.abs();
        if per_volt != 0.0 && per_volt.is_finite() {
            let r = (per_amp_plus + per_amp_minus) / per_volt;
            let ohm = r.abs();
            if (BALANCE_MIN_OHM..=BALANCE_MAX_OHM).contains(&ohm) {
                balance.push(Balance {
                    reference: part.reference.clone(),
                    stage,
                    pin: if r > 0.0 { Pin::Plus } else { Pin::Minus },
                    ohm,
                    standard_ohm: board.r_series.nearest(ohm),
                    nulls_v: bias_share,
                });
            }
        }
    }
    Ok(DcErrors {
        modelled: op.has_dc_errors(),
        vos_v: op.vos_v,
        ib_a: op.ib_a,
        offset_v,
        worst_v,
        sources,
        balance,
    })
}

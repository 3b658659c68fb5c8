//! Parts list as CSV (RFC 4180: comma-separated, CRLF line ends, fields with a comma, quote or
//! line break quoted, quotes doubled), one row per part in signal order, with the header
//! `ref,value,formatted,series,tolerance_pct,stage,role`.
//!
//! `value` is in SI base units (Ω, F) written in shortest round-trip scientific form, so a script
//! reads it back exactly; `formatted` is engineering notation with the unit (`4.87 kΩ`);
//! `tolerance_pct` is the part's own tolerance ([`part_tolerance_pct`]: its `tolset` override, else
//! `rtol` or `ctol`), the value the tolerance study draws it with. An op amp row leaves value,
//! series and tolerance empty and describes the model in `formatted`.

use crate::board::Board;
use crate::eseries::Series;
use crate::netlist::{Part, PartKind};
use crate::units::format_si_unit;

/// Part tolerances written into the list (`rtol`, `ctol`, `tolset`).
#[derive(Debug, Clone, PartialEq)]
pub struct Tolerances {
    /// Resistor tolerance, %.
    pub resistor_pct: f64,
    /// Capacitor tolerance, %.
    pub capacitor_pct: f64,
    /// Per-part tolerances, % (`tolset=C2:1`), by reference; they replace the class's.
    pub overrides: Vec<(String, f64)>,
}

impl Default for Tolerances {
    /// 1 % resistors and 5 % capacitors (typical parts, common practice).
    fn default() -> Self {
        Tolerances {
            resistor_pct: 1.0,
            capacitor_pct: 5.0,
            overrides: Vec::new(),
        }
    }
}

/// The CSV header line (without the line end).
pub const HEADER: &str = "ref,value,formatted,series,tolerance_pct,stage,role";

/// One field, quoted when RFC 4180 asks for it.
pub fn field(text: &str) -> String {
    if text.contains([',', '"', '\r', '\n']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// The series a value belongs to: the board's series when it holds the value, else the
/// coarsest IEC 60063 series that does, else `exact`.
fn series_of(board_series: Series, value: f64) -> &'static str {
    if board_series != Series::Exact && board_series.contains(value) {
        return board_series.key();
    }
    Series::ALL
        .iter()
        .find(|s| s.contains(value))
        .map_or("exact", |s| s.key())
}

/// The tolerance of one part, %: its override when `tolerances` has one for its reference (the
/// first, as the study takes; the link reader keeps one per reference), else the tolerance of its class; `None` for an op
/// amp. The tolerance study draws each part with the same rule
/// (`analysis::tolerance::Tolerances`), and the parts list, the text report and the page's parts
/// table all state it through this function.
pub fn part_tolerance_pct(part: &Part, tolerances: &Tolerances) -> Option<f64> {
    let class_pct = match part.kind {
        PartKind::Resistor => tolerances.resistor_pct,
        PartKind::Capacitor => tolerances.capacitor_pct,
        PartKind::OpAmp => return None,
    };
    Some(
        tolerances
            .overrides
            .iter()
            .find(|(reference, _)| *reference == part.reference)
            .map_or(class_pct, |(_, pct)| *pct),
    )
}

/// The parts list of `board`.
pub fn csv(board: &Board, tolerances: &Tolerances) -> String {
    let mut out = String::new();
    out.push_str(HEADER);
    out.push_str("\r\n");
    for (k, stage) in board.stages.iter().enumerate() {
        for part in &stage.netlist.parts {
            let row: Vec<String> = match part.kind {
                PartKind::Resistor | PartKind::Capacitor => {
                    let (unit, series) = if part.kind == PartKind::Resistor {
                        ("Ω", board.r_series)
                    } else {
                        ("F", board.c_series)
                    };
                    let tol = part_tolerance_pct(part, tolerances).unwrap_or(f64::NAN);
                    vec![
                        part.reference.clone(),
                        format!("{:e}", part.value),
                        format_si_unit(part.value, 4, unit),
                        series_of(series, part.value).to_string(),
                        format!("{tol}"),
                        (k + 1).to_string(),
                        part.role.clone(),
                    ]
                }
                PartKind::OpAmp => vec![
                    part.reference.clone(),
                    String::new(),
                    describe_op_amp(board),
                    String::new(),
                    String::new(),
                    (k + 1).to_string(),
                    part.role.clone(),
                ],
            };
            let fields: Vec<String> = row.iter().map(|f| field(f)).collect();
            out.push_str(&fields.join(","));
            out.push_str("\r\n");
        }
    }
    out
}

fn describe_op_amp(board: &Board) -> String {
    let op = &board.op_amp;
    if op.is_ideal_gain() && op.rout_ohm == 0.0 {
        return "ideal op amp".into();
    }
    let gbw = if op.gbw_hz.is_finite() {
        format_si_unit(op.gbw_hz, 3, "Hz")
    } else {
        "∞".into()
    };
    let a0 = if op.a0_db.is_finite() {
        format!("{} dB", op.a0_db)
    } else {
        "∞".into()
    };
    format!(
        "op amp: GBW {gbw}, A0 {a0}, Rout {}",
        format_si_unit(op.rout_ohm, 3, "Ω")
    )
}

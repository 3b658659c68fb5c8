//! SPICE netlist of the whole board, self-contained: an AC source of magnitude 1 drives node
//! `in`, the filter output is node `out`, every op amp is an instance of one subcircuit built
//! from the op-amp model, an `.ac` card covers the sweep, and `.end` closes it. Written for
//! ngspice (tested with ngspice 39) and kept to cards any SPICE3-compatible simulator reads; the
//! file is plain ASCII.
//!
//! The op-amp subcircuit realizes A(s) = A0 / (1 + s·A0/(2π·GBW)): a transconductance of 1 S
//! drives R = A0 Ω in parallel with C = 1/(2π·GBW) F (DC gain A0, pole at GBW/A0, unity gain at
//! GBW), a unity-gain E source buffers that node, and Rout sits in series with the output.
//! An infinite A0 is written as 1e12 (240 dB), since a capacitor alone would leave the node
//! without a DC path; an infinite GBW leaves the capacitor out.
//!
//! When the op amp's DC errors are set (`vos`, `ib`), the subcircuit also carries them: a DC
//! source `Vos` between the pin `inp` and the amplifier's own non-inverting node (`inq` = `inp` +
//! vos) and a DC current source `Ibp`, `Ibn` from each input pin to ground (positive `ib` flows
//! into the pin), so `.op` shows the board's output offset. Without them the subcircuit is the
//! plain one.

use crate::board::Board;
use crate::error::InputError;
use crate::netlist::{Node, PartKind};
use std::f64::consts::PI;
use std::fmt::Write;

/// Stand-in for an infinite open-loop DC gain in the SPICE model, V/V.
pub const IDEAL_GAIN: f64 = 1.0e12;

/// The `.ac` sweep written into the netlist.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AcSweep {
    /// Points per decade (1–10000).
    pub points_per_decade: u32,
    /// First frequency, Hz (> 0).
    pub f_start_hz: f64,
    /// Last frequency, Hz (> start).
    pub f_stop_hz: f64,
}

impl Default for AcSweep {
    /// 10 Hz to 10 MHz, 50 points per decade.
    fn default() -> Self {
        AcSweep {
            points_per_decade: 50,
            f_start_hz: 10.0,
            f_stop_hz: 10.0e6,
        }
    }
}

/// A number as SPICE reads it (shortest round-trip form, e.g. `4.87e3`).
fn num(value: f64) -> String {
    format!("{value:e}")
}

/// The SPICE netlist of `board` with an `.ac` card for `sweep`.
///
/// # Errors
/// `from` / `to` / `points` when the sweep is not a positive, increasing range with 1–10000
/// points per decade.
pub fn netlist(board: &Board, sweep: &AcSweep) -> Result<String, InputError> {
    if !(sweep.f_start_hz.is_finite() && sweep.f_start_hz > 0.0) {
        return Err(InputError::new(
            "from",
            format!(
                "sweep start {} Hz must be a positive frequency",
                sweep.f_start_hz
            ),
        ));
    }
    if !(sweep.f_stop_hz.is_finite() && sweep.f_stop_hz > sweep.f_start_hz) {
        return Err(InputError::new(
            "to",
            format!(
                "sweep stop {} Hz must be above the start {} Hz",
                sweep.f_stop_hz, sweep.f_start_hz
            ),
        ));
    }
    if !(1..=10000).contains(&sweep.points_per_decade) {
        return Err(InputError::new(
            "points",
            format!(
                "{} points per decade is outside 1–10000",
                sweep.points_per_decade
            ),
        ));
    }
    let merged = board
        .netlist()
        .map_err(|e| InputError::new("topo", format!("the board cannot be written: {e}")))?;
    let net = &merged.netlist;
    let name = |n: &Node| match n {
        None => "0".to_string(),
        Some(i) => net
            .node_names
            .get(*i)
            .cloned()
            .unwrap_or_else(|| format!("n{i}")),
    };
    let op = &board.op_amp;
    let mut out = String::new();
    // The first line of a SPICE file is its title.
    let _ = writeln!(
        out,
        "* Rolloff board: {} stage(s), op amp {}",
        board.stages.len(),
        describe_op_amp(op)
    );
    for (k, stage) in board.stages.iter().enumerate() {
        let _ = writeln!(
            out,
            "* stage {}: {}, f0 = {} Hz{}, gain {}",
            k + 1,
            stage.circuit.describe(),
            num(stage.achieved_f0_hz),
            stage
                .achieved_q
                .map_or(String::new(), |q| format!(", Q = {}", num(q))),
            num(stage.achieved_gain)
        );
    }
    let _ = writeln!(out, "V1 in 0 DC 0 AC 1");
    let mut last_stage = usize::MAX;
    for (part, &(stage_idx, _)) in net.parts.iter().zip(&merged.part_origin) {
        if stage_idx != last_stage {
            let _ = writeln!(out, "* stage {}", stage_idx + 1);
            last_stage = stage_idx;
        }
        let nodes: Vec<String> = part.nodes.iter().map(name).collect();
        match part.kind {
            PartKind::Resistor | PartKind::Capacitor => {
                let _ = writeln!(
                    out,
                    "{} {} {} {}",
                    part.reference,
                    nodes.first().map_or("0", String::as_str),
                    nodes.get(1).map_or("0", String::as_str),
                    num(part.value)
                );
            }
            PartKind::OpAmp => {
                // Subcircuit pins: + input, − input, output.
                let _ = writeln!(
                    out,
                    "X{} {} {} {} rolloff_opamp",
                    part.reference,
                    nodes.first().map_or("0", String::as_str),
                    nodes.get(1).map_or("0", String::as_str),
                    nodes.get(2).map_or("0", String::as_str)
                );
            }
        }
    }
    out.push_str(&subcircuit(op));
    let _ = writeln!(
        out,
        ".ac dec {} {} {}",
        sweep.points_per_decade,
        num(sweep.f_start_hz),
        num(sweep.f_stop_hz)
    );
    let _ = writeln!(out, ".print ac vdb(out) vp(out)");
    let _ = writeln!(out, ".end");
    Ok(out)
}

fn describe_op_amp(op: &crate::opamp::OpAmp) -> String {
    let dc = if op.has_dc_errors() {
        format!(", Vos {} V, Ib {} A", num(op.vos_v), num(op.ib_a))
    } else {
        String::new()
    };
    if op.is_ideal_gain() && op.rout_ohm == 0.0 {
        return format!("ideal{dc}");
    }
    let gbw = if op.gbw_hz.is_finite() {
        format!("{} Hz", num(op.gbw_hz))
    } else {
        "infinite".into()
    };
    let a0 = if op.a0_db.is_finite() {
        format!("{} dB", num(op.a0_db))
    } else {
        "infinite".into()
    };
    format!("GBW {gbw}, A0 {a0}, Rout {} Ohm{dc}", num(op.rout_ohm))
}

/// The op-amp subcircuit `rolloff_opamp inp inn out`.
fn subcircuit(op: &crate::opamp::OpAmp) -> String {
    let mut s = String::new();
    let a0 = if op.a0_db.is_finite() {
        op.a0()
    } else {
        IDEAL_GAIN
    };
    let _ = writeln!(s, ".subckt rolloff_opamp inp inn out");
    let _ = writeln!(
        s,
        "* A(s) = A0/(1 + s*A0/(2*pi*GBW)): 1 S into R = A0 Ohm || C = 1/(2*pi*GBW) F"
    );
    // The DC errors, only when set (so a board without them exports as before): the offset in
    // series with the non-inverting input, and each input's bias current drawn from its pin.
    let plus = if op.has_dc_errors() {
        let _ = writeln!(
            s,
            "* DC errors: Vos in series with inp, Ib drawn from each input"
        );
        let _ = writeln!(s, "Vos inq inp DC {}", num(op.vos_v));
        let _ = writeln!(s, "Ibp inp 0 DC {}", num(op.ib_a));
        let _ = writeln!(s, "Ibn inn 0 DC {}", num(op.ib_a));
        "inq"
    } else {
        "inp"
    };
    let _ = writeln!(s, "Gamp 0 int {plus} inn 1");
    let _ = writeln!(s, "Ramp int 0 {}", num(a0));
    if op.gbw_hz.is_finite() {
        let _ = writeln!(s, "Camp int 0 {}", num(1.0 / (2.0 * PI * op.gbw_hz)));
    }
    if op.rout_ohm > 0.0 {
        let _ = writeln!(s, "Ebuf buf 0 int 0 1");
        let _ = writeln!(s, "Rout buf out {}", num(op.rout_ohm));
    } else {
        let _ = writeln!(s, "Ebuf out 0 int 0 1");
    }
    let _ = writeln!(s, ".ends rolloff_opamp");
    s
}

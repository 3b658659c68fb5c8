//! Design JSON: the `rolloff design --format json` output and the page's export (same bytes).
//!
//! The shape is a contract (see the README): top-level `order`, `family`, `resp`, `stages` in
//! signal order (each with `order`, `f0_hz`, `q`, `fz_hz` (`null` without zeros), `gain`, `topology`, `parts`, `achieved`), `parts`
//! (every part of the board) and `warnings`, plus the requirement, the mask, the poles and the
//! zeros (`zeros`: every finite zero, rad/s, the origin ones first, as `re`/`im` like `poles`), the family
//! comparison and the analyses. Non-finite numbers are written as `null`.

use crate::analysis::tolerance::Summary;
use crate::link::FORMAT_VERSION;
use crate::netlist::{Part, PartKind};
use crate::order::family_name;
use crate::pipeline::Design;
use crate::spec::{Edge, Family, OrderChoice};
use serde::Serialize;
use serde_json::{json, Value};

/// A part as the JSON shows it.
#[derive(Serialize)]
struct PartDto<'a> {
    #[serde(rename = "ref")]
    reference: &'a str,
    kind: &'static str,
    value: Option<f64>,
    ideal: Option<f64>,
    formatted: String,
    role: &'a str,
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

fn part_dto(part: &Part) -> PartDto<'_> {
    let (kind, unit) = match part.kind {
        PartKind::Resistor => ("resistor", "Ω"),
        PartKind::Capacitor => ("capacitor", "F"),
        PartKind::OpAmp => ("opamp", ""),
    };
    let is_opamp = part.kind == PartKind::OpAmp;
    PartDto {
        reference: &part.reference,
        kind,
        value: if is_opamp { None } else { finite(part.value) },
        ideal: if is_opamp { None } else { finite(part.ideal) },
        formatted: if is_opamp {
            "op amp".into()
        } else {
            crate::units::format_si_unit(part.value, 3, unit)
        },
        role: &part.role,
    }
}

fn edge_json(edge: Edge) -> Value {
    match edge {
        Edge::Single(f) => json!(f),
        Edge::Pair(lo, hi) => json!([lo, hi]),
    }
}

/// The design as a JSON value.
pub fn design_value(design: &Design) -> Value {
    let req = &design.state.requirement;
    let syn = &design.synthesis;
    let ripple = match req.family {
        Family::Chebyshev { ripple_db } | Family::Elliptic { ripple_db, .. } => Some(ripple_db),
        _ => None,
    };
    let stages: Vec<Value> = design
        .board
        .stages
        .iter()
        .enumerate()
        .map(|(index, stage)| {
            let parts: Vec<PartDto> = stage.netlist.parts.iter().map(part_dto).collect();
            json!({
                "index": index + 1,
                "order": stage.section.order(),
                "kind": section_kind_key(&stage.section),
                "f0_hz": finite(stage.section.f0_hz),
                "q": stage.section.q.and_then(finite),
                "fz_hz": stage.section.fz_hz.and_then(finite),
                "gain": finite(stage.section.gain),
                "topology": stage.circuit.key(),
                "parts": parts,
                "achieved": {
                    "f0_hz": finite(stage.achieved_f0_hz),
                    "q": stage.achieved_q.and_then(finite),
                    "fz_hz": stage.achieved_fz_hz.and_then(finite),
                    "gain": finite(stage.achieved_gain),
                    "f0_error": finite(stage.f0_error),
                    "q_error": stage.q_error.and_then(finite),
                    "gain_error": finite(stage.gain_error),
                    "fz_error": stage.fz_error.and_then(finite),
                },
                "warnings": stage.warnings,
            })
        })
        .collect();
    let parts: Vec<PartDto> = design.board.parts().into_iter().map(part_dto).collect();
    let poles: Vec<Value> = syn
        .poles
        .iter()
        .map(|p| json!({"re": p.re, "im": p.im}))
        .collect();
    let zeros: Vec<Value> = syn
        .zeros
        .iter()
        .map(|z| json!({"re": z.re, "im": z.im}))
        .collect();
    let mask = req.mask.map(|m| {
        json!({
            "passedge_hz": edge_json(m.pass),
            "passloss_db": m.apass_db,
            "stopedge_hz": edge_json(m.stop),
            "stopdepth_db": m.astop_db,
        })
    });
    let family_orders: Option<Vec<Value>> = design.family_orders.as_ref().map(|rows| {
        rows.iter()
            .map(|row| match &row.result {
                Ok(min) => json!({"family": row.family.key(), "name": family_name(row.family), "order": min.order, "reason": null}),
                Err(e) => json!({"family": row.family.key(), "name": family_name(row.family), "order": null, "reason": e.to_input_error().message}),
            })
            .collect()
    });
    let op = &design.board.op_amp;
    let analyses = crate::pipeline::analyses(design);
    json!({
        "format": FORMAT_VERSION,
        "link": crate::link::to_query(&design.state),
        "title": design.state.title,
        "resp": req.class.key(),
        "family": req.family.key(),
        "ripple_db": ripple,
        "order": syn.order,
        "order_from_mask": req.order == OrderChoice::FromMask,
        "margin": req.margin.key(),
        "fc_hz": finite(syn.fc_hz),
        "bw_hz": syn.bw_hz.and_then(finite),
        "gain_db": req.gain_db,
        "mask": mask,
        "family_orders": family_orders,
        "poles": poles,
        "zeros": zeros,
        "op_amp": {
            "gbw_hz": finite(op.gbw_hz),
            "a0_db": finite(op.a0_db),
            "rout_ohm": finite(op.rout_ohm),
            "vnoise_v_per_rthz": op.en_v_per_rthz,
            "inoise_a_per_rthz": op.in_a_per_rthz,
            "slew_v_per_s": finite(op.slew_v_per_s),
            "vos_v": op.vos_v,
            "ib_a": op.ib_a,
        },
        "series": {"resistors": design.board.r_series.key(), "capacitors": design.board.c_series.key()},
        "tolerance_pct": {"resistors": design.state.rtol_pct, "capacitors": design.state.ctol_pct},
        "stages": stages,
        "parts": parts,
        "warnings": design.warnings,
        "as_built": analyses.as_built,
        "analysis": analyses,
    })
}

/// The design JSON text (pretty-printed, with a final newline).
pub fn design_json(design: &Design) -> String {
    to_text(&design_value(design))
}

/// The tolerance study as JSON: `runs`, `seed`, `yield` (0–1 or null) and the full summary.
pub fn spread_json(design: &Design, summary: &Summary) -> String {
    let mut value = serde_json::to_value(summary).unwrap_or(Value::Null);
    if let Value::Object(map) = &mut value {
        map.insert("title".into(), json!(design.state.title));
        map.insert("order".into(), json!(design.synthesis.order));
        map.insert(
            "family".into(),
            json!(design.state.requirement.family.key()),
        );
        map.insert("resp".into(), json!(design.state.requirement.class.key()));
    }
    to_text(&value)
}

/// Significant digits of every non-integer number in the JSON. Nine is far beyond what any part
/// or measurement carries, and rounding there makes the page's export (wasm's maths library) and
/// the command line's (the native one) the same bytes, although the two differ in the last bits.
pub const JSON_DIGITS: usize = 9;

fn round_numbers(value: &mut Value) {
    match value {
        Value::Number(n) if n.is_f64() => {
            if let Some(x) = n.as_f64() {
                let rounded: f64 = format!("{:.*e}", JSON_DIGITS - 1, x).parse().unwrap_or(x);
                if let Some(r) = serde_json::Number::from_f64(rounded) {
                    *n = r;
                }
            }
        }
        Value::Array(items) => items.iter_mut().for_each(round_numbers),
        Value::Object(map) => map.values_mut().for_each(round_numbers),
        _ => {}
    }
}

fn to_text(value: &Value) -> String {
    let mut value = value.clone();
    round_numbers(&mut value);
    let value = &value;
    // serde_json writes non-finite floats as null already; pretty printing cannot fail on a Value.
    let mut text =
        serde_json::to_string_pretty(value).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"));
    text.push('\n');
    text
}

/// The stage JSON's `kind`: `lowpass`, `highpass`, `bandpass`, and for a section with zeros the
/// side they sit on: `lowpassnotch` (fz > f0), `highpassnotch` (fz < f0) or `notch` (fz = f0).
fn section_kind_key(section: &crate::section::Section) -> &'static str {
    use crate::section::{NotchSide, SectionKind};
    match (section.kind, section.notch_side()) {
        (SectionKind::LowPass, _) => "lowpass",
        (SectionKind::HighPass, _) => "highpass",
        (SectionKind::BandPass, _) => "bandpass",
        (SectionKind::Notch, Some(NotchSide::LowPassNotch)) => "lowpassnotch",
        (SectionKind::Notch, Some(NotchSide::HighPassNotch)) => "highpassnotch",
        (SectionKind::Notch, _) => "notch",
    }
}

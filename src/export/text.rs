//! The text report of `rolloff design` and `rolloff spread`: the design in words and tables.

use crate::analysis::noise::NoiseKind;
use crate::analysis::tolerance::Summary;
use crate::netlist::PartKind;
use crate::order::family_name;
use crate::pipeline::Design;
use crate::spec::{Edge, OrderChoice, ResponseClass};
use crate::units::format_si;
use crate::units::format_si_unit;
use std::fmt::Write;

/// The one-line summary of a design: "4th-order Butterworth low-pass at 1 kHz, 2 Sallen-Key
/// stages, 9 parts".
pub fn summary_line(design: &Design) -> String {
    let syn = &design.synthesis;
    let class = match syn.class {
        ResponseClass::LowPass => "low-pass",
        ResponseClass::HighPass => "high-pass",
        ResponseClass::BandPass => "band-pass",
        ResponseClass::BandStop => "band-stop",
    };
    let place = match syn.bw_hz {
        Some(bw) => format!("centred on {}Hz, {}Hz wide", spaced(syn.fc_hz), spaced(bw)),
        None => format!("at {}Hz", spaced(syn.fc_hz)),
    };
    let n_parts = design.board.parts().len();
    let stages = super::words::stages_words(&design.board);
    format!(
        "{} {} {class} {place}, {stages}, {n_parts} parts",
        ordinal(syn.order),
        family_name(syn.family)
    )
}

fn spaced(value: f64) -> String {
    let text = format_si(value, 4);
    match text.chars().last() {
        Some(c) if c.is_alphabetic() || c == 'µ' => {
            let number = &text[..text.len() - c.len_utf8()];
            format!("{number} {c}")
        }
        _ => format!("{text} "),
    }
}

fn ordinal(n: usize) -> String {
    format!("{}-order", super::words::ordinal(n))
}

fn edge_text(edge: Edge) -> String {
    match edge {
        Edge::Single(f) => format!("{}Hz", spaced(f)),
        Edge::Pair(lo, hi) => format!("{}Hz … {}Hz", spaced(lo), spaced(hi)),
    }
}

/// The text report of a design.
pub fn design_text(design: &Design) -> String {
    let mut out = String::new();
    let req = &design.state.requirement;
    if let Some(title) = &design.state.title {
        let _ = writeln!(out, "{title}");
    }
    let _ = writeln!(out, "{}", summary_line(design));
    match (&req.mask, req.order) {
        (Some(m), choice) => {
            let how = if choice == OrderChoice::FromMask {
                "order from these limits"
            } else {
                "checked against these limits"
            };
            let _ = writeln!(
                out,
                "\nLimits ({how}): at most {} dB loss up to {}, at least {} dB from {}",
                m.apass_db,
                edge_text(m.pass),
                m.astop_db,
                edge_text(m.stop)
            );
        }
        (None, _) => {}
    }
    if let Some(rows) = &design.family_orders {
        let _ = writeln!(out, "\nOrder each family needs for these limits:");
        for row in rows {
            let text = match &row.result {
                Ok(min) => format!("{}", min.order),
                Err(e) => format!("none up to 20 ({})", e.to_input_error().message),
            };
            let _ = writeln!(out, "  {:<24} {text}", family_name(row.family));
        }
    }
    // The jω-axis zeros (inverse Chebyshev, elliptic, band-stop): where the response goes to
    // nothing, one frequency per pair.
    let notches: Vec<String> = design
        .synthesis
        .zeros
        .iter()
        .filter(|z| z.im > 0.0)
        .map(|z| format!("{}Hz", spaced(z.im / (2.0 * std::f64::consts::PI))))
        .collect();
    if !notches.is_empty() {
        let _ = writeln!(
            out,
            "\nZeros (pairs on the jω axis): {}",
            notches.join(", ")
        );
    }
    let _ = writeln!(out, "\nStages (signal order; f0 and Q parts: the rounded parts on an ideal op amp, the board as built below):");
    let _ = writeln!(
        out,
        "  {:<3} {:<7} {:>11} {:>11} {:>8} {:>8} {:>9}  parts",
        "#", "circuit", "f0 target", "f0 parts", "Q target", "Q parts", "gain V/V"
    );
    // Each part with its own tolerance, as the parts list and the tolerance study have it.
    let tolerances = crate::pipeline::bom_tolerances(design);
    for (index, stage) in design.board.stages.iter().enumerate() {
        let q_target = stage.section.q.map_or("-".into(), |q| format!("{q:.4}"));
        let q_built = stage.achieved_q.map_or("-".into(), |q| format!("{q:.4}"));
        let parts: Vec<String> = stage
            .netlist
            .parts
            .iter()
            .filter(|p| p.kind != PartKind::OpAmp)
            .map(|p| {
                let unit = if p.kind == PartKind::Resistor {
                    "Ω"
                } else {
                    "F"
                };
                let tolerance = crate::export::bom::part_tolerance_pct(p, &tolerances)
                    .map_or(String::new(), |pct| format!("±{pct}%"));
                format!(
                    "{}={}{tolerance}",
                    p.reference,
                    format_si_unit(p.value, 3, unit).replace(' ', "")
                )
            })
            .collect();
        let _ = writeln!(
            out,
            "  {:<3} {:<7} {:>11} {:>11} {:>8} {:>8} {:>9.4}  {}",
            index + 1,
            stage.circuit.key(),
            format!("{}Hz", spaced(stage.section.f0_hz)),
            format!("{}Hz", spaced(stage.achieved_f0_hz)),
            q_target,
            q_built,
            stage.achieved_gain,
            parts.join(" ")
        );
    }
    let op = &design.board.op_amp;
    let _ = writeln!(
        out,
        "\nOp amp: GBW {}Hz, A0 {} dB, Rout {}Ω",
        spaced(op.gbw_hz),
        if op.a0_db.is_finite() {
            format!("{}", op.a0_db)
        } else {
            "∞".into()
        },
        spaced(op.rout_ohm)
    );
    if op.has_dc_errors() {
        // The DC errors extend the op-amp line only when set, so a report without them is as it
        // was.
        out.pop();
        let _ = writeln!(out, ", vos {}V, ib {}A", spaced(op.vos_v), spaced(op.ib_a));
    }
    analysis_text(&mut out, design);
    if !design.warnings.is_empty() {
        let _ = writeln!(out, "\nWarnings:");
        for w in &design.warnings {
            let _ = writeln!(out, "  - {w}");
        }
    }
    let _ = writeln!(
        out,
        "\nRolloff computes; it does not certify. Verify on a prototype."
    );
    out
}

/// The text report of a tolerance study.
pub fn spread_text(design: &Design, summary: &Summary) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{}", summary_line(design));
    let _ = writeln!(
        out,
        "Tolerance study: {} runs, seed {}",
        summary.runs, summary.seed
    );
    match summary.yield_fraction {
        Some(y) => {
            let _ = writeln!(
                out,
                "Yield against the limits: {:.2} % ({} of {} runs pass)",
                100.0 * y,
                summary.n_pass.unwrap_or(0),
                summary.runs
            );
        }
        None => {
            let _ = writeln!(
                out,
                "Yield: no limits in the link (add passedge, stopedge, stopdepth)"
            );
        }
    }
    for cutoff in &summary.cutoffs {
        let s = &cutoff.hz;
        let _ = writeln!(
            out,
            "Cutoff ({:?} edge): nominal {}Hz, mean {}Hz, σ {}Hz, range {}Hz … {}Hz",
            cutoff.side,
            spaced(s.nominal),
            spaced(s.mean),
            spaced(s.std_dev),
            spaced(s.min),
            spaced(s.max)
        );
    }
    let g = &summary.passband_gain_db;
    let _ = writeln!(
        out,
        "Passband gain: nominal {:.3} dB, mean {:.3} dB, σ {:.3} dB, range {:.3} … {:.3} dB",
        g.nominal, g.mean, g.std_dev, g.min, g.max
    );
    if let Some(line) = super::words::stopband_kept_line(
        summary,
        design.synthesis.class,
        design.state.requirement.mask.map(|m| m.astop_db),
    ) {
        let _ = writeln!(out, "Depth kept: {line}");
    }
    if let (true, Some(r)) = (summary.loaded_runs, summary.loading_residual_db) {
        let _ = writeln!(
            out,
            "Loading: each run solved on the loaded board (the nominal board's loading correction \
             would have missed up to {r:.3} dB on {} runs)",
            crate::analysis::tolerance::LOADING_PROBE_RUNS
        );
    } else if let Some(r) = summary.loading_residual_db {
        let _ = writeln!(
            out,
            "Loading: every run carries the nominal board's loading correction; {} runs solved as \
             loaded boards differ from it by at most {r:.2e} dB",
            crate::analysis::tolerance::LOADING_PROBE_RUNS
        );
    }
    if let Some(a) = &summary.stopband_attenuation_db {
        let _ = writeln!(
            out,
            "Stopband attenuation: nominal {:.2} dB, worst {:.2} dB",
            a.nominal, a.min
        );
    }
    for (index, stage) in summary.stages.iter().enumerate() {
        let q = stage.q.as_ref().map_or(String::new(), |q| {
            format!(", Q σ {:.3} %", 100.0 * q.std_dev / q.nominal)
        });
        let _ = writeln!(
            out,
            "  stage {}: f0 σ {:.3} %{q}",
            index + 1,
            100.0 * stage.f0_hz.std_dev / stage.f0_hz.nominal
        );
    }
    for w in &summary.warnings {
        let _ = writeln!(out, "  - {w}");
    }
    out
}

/// The analyses of the built board in a few lines.
fn analysis_text(out: &mut String, design: &Design) {
    let a = crate::pipeline::analyses(design);
    let _ = writeln!(out, "\nThe board as built:");
    if let Some(v) = &a.as_built {
        let _ = writeln!(out, "  {}", super::words::verdict(v));
    }
    if let Some(g) = a.passband_gain_db {
        let at = if a.passband_ref_hz > 0.0 {
            format!("at {}Hz", spaced(a.passband_ref_hz))
        } else {
            "at DC".to_string()
        };
        let _ = writeln!(
            out,
            "  passband gain: {g:+.2} dB {at}, measured on the built board"
        );
    }
    if let Some(step) = &a.step {
        let pct = |x: Option<f64>| x.map_or("-".into(), |v| format!("{v:.2} %"));
        let time = |x: Option<f64>| x.map_or("-".into(), |v| format!("{}s", spaced(v)));
        let _ = writeln!(
            out,
            "  step (of the loaded board): overshoot {}, rise {}, settles to 1 % in {}, to 0.1 % in {}",
            pct(step.overshoot_pct),
            time(step.rise_time_s),
            time(step.settling_1pct_s),
            time(step.settling_01pct_s)
        );
    }
    if let Some(noise) = &a.noise {
        let top: Vec<String> = noise
            .sources
            .iter()
            .take(3)
            .map(|s| {
                let what = match s.kind {
                    NoiseKind::Resistor => "",
                    NoiseKind::OpAmpVoltage => " voltage noise",
                    NoiseKind::OpAmpCurrentPlus => " current noise at +",
                    NoiseKind::OpAmpCurrentMinus => " current noise at −",
                };
                format!("{}{what} {:.0} %", s.reference, 100.0 * s.share)
            })
            .collect();
        let _ = writeln!(
            out,
            "  {} for vin = {} V peak; largest: {}",
            super::words::noise_line(noise),
            design.state.signal.vin_pk,
            top.join(", ")
        );
    }
    if let Some(levels) = &a.levels {
        for l in levels {
            let _ = writeln!(
                out,
                "  stage {} level: {}",
                l.stage,
                super::words::headroom_line(l)
            );
        }
    }
    for inner in a.inner_levels.iter().flatten() {
        let _ = writeln!(
            out,
            "  stage {} {} level: {}",
            inner.level.stage,
            inner.reference,
            super::words::headroom_line(&inner.level)
        );
    }
    for n in a.notches.iter().flatten() {
        let _ = writeln!(
            out,
            "  stage {} {}",
            n.stage,
            super::words::notch_sentence(n, crate::pipeline::required_notch_depth_db(design))
        );
    }
    if let Some(needs) = &a.opamp_needs {
        let _ = writeln!(
            out,
            "  op amp: {}",
            super::words::board_gbw_sentence(needs, design.board.op_amp.gbw_hz)
        );
        for n in &needs.stages {
            let _ = writeln!(
                out,
                "  stage {} op amp: {}",
                n.stage,
                super::words::needs_sentence(n, needs.drift_limit_pct, &design.board.op_amp)
            );
        }
    }
    if let Some(dc) = &a.dc {
        let _ = writeln!(out, "  {}", super::words::dc_line(dc));
        for b in dc.balance.iter().filter(|_| dc.ib_a != 0.0) {
            let _ = writeln!(out, "  DC balance: {}", super::words::dc_balance_line(b));
        }
    }
    for w in &a.warnings {
        let _ = writeln!(out, "  - {w}");
    }
    for e in &a.errors {
        let _ = writeln!(out, "  - not computed: {e}");
    }
}

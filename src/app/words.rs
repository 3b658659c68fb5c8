//! The page's words: the design sentence, the stage cards' tables and the sentences about the
//! analyses, worded from the composed design and [`pipeline::Analyses`] alone (nothing here
//! computes a figure).

use super::{FamilyRow, PartRow, SensitivityRow, StageView, TargetRow, View};
use crate::design::Synthesis;
use crate::export::words::{self, ordinal};
use crate::fmath;
use crate::netlist::PartKind;
use crate::order;
use crate::pipeline::{self, Design};
use crate::plot::axis::engineering_unit;
use crate::plot::figures::{PlotData, Sweep};
use crate::schematic;
use crate::spec::{Family, OrderChoice, ResponseClass};
use crate::units::format_si;

/// The sentences and tables the page shows about the analyses, worded from
/// [`pipeline::Analyses`] alone (nothing here computes a figure).
pub(super) struct PageWords {
    noise_line: String,
    headroom: Vec<String>,
    needs: Vec<String>,
    step_figures: Option<crate::analysis::timeresp::StepFigures>,
    sensitivities: Vec<Vec<SensitivityRow>>,
    /// Each stage's notch sentence (empty for a stage without zeros), by stage index.
    notches: Vec<String>,
    /// Each inner op amp's level (stage index, sentence), for its stage card.
    inner_levels: Vec<(usize, String)>,
    /// The board's notches for the figures line under the plot: "notch 57.4 dB at 50.01 Hz".
    notch_figures: Vec<String>,
    problems: Vec<String>,
}

impl PageWords {
    pub(super) fn of(design: &Design, analyses: &pipeline::Analyses) -> PageWords {
        let state = &design.state;
        let mut problems = analyses.warnings.clone();
        problems.extend(analyses.errors.iter().cloned());
        // The sentences are the report's own (`export::words`), so the text report and the
        // page say each figure the same way.
        let noise_line = analyses
            .noise
            .as_ref()
            .map(words::noise_line)
            .into_iter()
            .chain(
                analyses
                    .opamp_needs
                    .as_ref()
                    .map(|needs| words::board_gbw_sentence(needs, design.board.op_amp.gbw_hz)),
            )
            .chain(analyses.dc.as_ref().map(words::dc_line))
            .collect::<Vec<String>>()
            .join(" · ");
        let headroom = analyses
            .levels
            .iter()
            .flatten()
            .map(words::headroom_line)
            .collect();
        let needs = analyses
            .opamp_needs
            .iter()
            .flat_map(|report| report.stages.iter())
            .map(|need| words::needs_sentence(need, state.signal.drift_pct, &design.board.op_amp))
            .collect();
        let sensitivities = analyses
            .sensitivities
            .iter()
            .flatten()
            .map(|stage| {
                stage
                    .parts
                    .iter()
                    .map(|p| SensitivityRow {
                        reference: p.reference.clone(),
                        f0: signed(p.f0),
                        q: p.q.map_or_else(|| "–".to_string(), signed),
                    })
                    .collect()
            })
            .collect();
        let required = pipeline::required_notch_depth_db(design);
        let mut notches = vec![String::new(); design.board.stages.len()];
        for n in analyses.notches.iter().flatten() {
            if let Some(slot) = notches.get_mut(n.stage.wrapping_sub(1)) {
                *slot = words::notch_sentence(n, required);
            }
        }
        let notch_figures = analyses
            .notches
            .iter()
            .flatten()
            .map(|n| {
                let depth = if n.depth_db.is_finite() {
                    format!("{:.1} dB", n.depth_db)
                } else {
                    "bottomless".to_string()
                };
                format!("notch {depth} at {}", engineering_unit(n.at_hz, 4, "Hz"))
            })
            .collect();
        let inner_levels = analyses
            .inner_levels
            .iter()
            .flatten()
            .map(|inner| {
                (
                    inner.level.stage.wrapping_sub(1),
                    format!(
                        "{} {}.",
                        inner.reference,
                        words::headroom_line(&inner.level)
                    ),
                )
            })
            .collect();
        PageWords {
            noise_line,
            headroom,
            needs,
            notches,
            inner_levels,
            notch_figures,
            step_figures: analyses.step,
            sensitivities,
            problems,
        }
    }

    /// Puts the tables and figures into the text view.
    pub(super) fn fill(&self, view: &mut View) {
        for (stage, rows) in view.stages.iter_mut().zip(&self.sensitivities) {
            stage.sensitivities = rows.clone();
        }
        for (index, stage) in view.stages.iter_mut().enumerate() {
            let mut needs = Vec::new();
            if let Some(need) = self.needs.get(index) {
                needs.push(need.clone());
            }
            if let Some(room) = self.headroom.get(index) {
                needs.push(format!("Output {room}."));
            }
            for (_, line) in self.inner_levels.iter().filter(|(k, _)| *k == index) {
                needs.push(line.clone());
            }
            if let Some(notch) = self.notches.get(index).filter(|n| !n.is_empty()) {
                needs.push(format!("Board {notch}."));
            }
            stage.needs = needs.join(" ");
        }
        if let Some(f) = &self.step_figures {
            let mut parts = Vec::new();
            if let Some(overshoot) = f.overshoot_pct {
                parts.push(format!("overshoot {overshoot:.1} %"));
            }
            if let Some(settle) = f.settling_1pct_s {
                parts.push(format!(
                    "settles to 1 % in {}",
                    engineering_unit(settle, 3, "s")
                ));
            }
            if !parts.is_empty() {
                if !view.figures.is_empty() {
                    view.figures.push_str(" · ");
                }
                view.figures.push_str(&parts.join(" · "));
            }
        }
        for notch in &self.notch_figures {
            if !view.figures.is_empty() {
                view.figures.push_str(" · ");
            }
            view.figures.push_str(notch);
        }
        if !self.noise_line.is_empty() {
            if !view.figures.is_empty() {
                view.figures.push_str(" · ");
            }
            view.figures.push_str(&self.noise_line);
        }
        view.warnings.extend(self.problems.iter().cloned());
    }
}

/// A sensitivity with its sign and two decimals, typographic minus.
pub(super) fn signed(value: f64) -> String {
    format!("{value:+.2}").replace('-', "−")
}

fn class_words(class: ResponseClass) -> &'static str {
    match class {
        ResponseClass::LowPass => "low-pass",
        ResponseClass::HighPass => "high-pass",
        ResponseClass::BandPass => "band-pass",
        ResponseClass::BandStop => "band-stop",
    }
}

/// Where the design's cutoff sits, in words: "−3 dB at 1 kHz", "ripple band to 20 kHz",
/// "centred on 6.3 kHz, 18 kHz wide".
fn cutoff_words(synthesis: &Synthesis) -> String {
    let fc = engineering_unit(synthesis.fc_hz, 4, "Hz");
    if let Some(bw) = synthesis.bw_hz {
        return format!("centred on {fc}, {} wide", engineering_unit(bw, 3, "Hz"));
    }
    match synthesis.family {
        Family::Chebyshev { .. } => format!("ripple band edge {fc}"),
        Family::LinkwitzRiley => format!("−6 dB at {fc}"),
        _ => format!("−3 dB at {fc}"),
    }
}

fn pct(x: f64) -> String {
    format!("{:+.2} %", x * 100.0)
}

pub(super) fn text_view(design: &Design, data: &PlotData) -> View {
    let state = &design.state;
    let synthesis = &design.synthesis;
    let board = &design.board;
    let n_parts = board.parts().len();
    let mut summary = format!(
        "{}-order {} {} · {} · {} · {} parts",
        ordinal(synthesis.order),
        order::family_name(synthesis.family),
        class_words(synthesis.class),
        cutoff_words(synthesis),
        words::stages_words(board),
        n_parts
    );
    if state.requirement.gain_db != 0.0 {
        summary.push_str(&format!(
            " · gain {} dB",
            crate::export::words::decibels(state.requirement.gain_db)
        ));
    }
    if let OrderChoice::FromMask = state.requirement.order {
        summary.push_str(" · order from the limits");
    }

    let mut warnings = synthesis.warnings.clone();
    warnings.extend(board.warnings.iter().cloned());

    let stages = board
        .stages
        .iter()
        .enumerate()
        .map(|(index, stage)| {
            let section = &stage.section;
            let mut rows = vec![TargetRow {
                what: "f0".into(),
                target: engineering_unit(section.f0_hz, 4, "Hz"),
                achieved: engineering_unit(stage.achieved_f0_hz, 4, "Hz"),
                error: pct(stage.f0_error),
                large: stage.f0_error.abs() > 0.02,
            }];
            if let (Some(q), Some(aq)) = (section.q, stage.achieved_q) {
                let q_error = stage.q_error.unwrap_or(f64::NAN);
                rows.push(TargetRow {
                    what: "Q".into(),
                    target: format!("{q:.4}"),
                    achieved: format!("{aq:.4}"),
                    error: pct(q_error),
                    large: q_error.abs() > 0.02,
                });
            }
            if let Some(fz) = section.fz_hz {
                let fz_error = stage.fz_error.unwrap_or(f64::NAN);
                rows.push(TargetRow {
                    what: "fz".into(),
                    target: engineering_unit(fz, 4, "Hz"),
                    achieved: stage
                        .achieved_fz_hz
                        .map_or_else(|| "–".to_string(), |a| engineering_unit(a, 4, "Hz")),
                    error: pct(fz_error),
                    // A notch is only as deep as its zero frequency is right: with the zero
                    // δ off, |H| at the intended frequency is about 2·δ·Q of the passband
                    // (physics of the second-order section), so 0.5 % off leaves a Q = 10
                    // notch there only some 20 dB deep.
                    large: fz_error.abs() > 0.005,
                });
            }
            rows.push(TargetRow {
                what: "gain".into(),
                target: format!("{:.4} V/V", section.gain),
                achieved: format!("{:.4} V/V", stage.achieved_gain),
                error: pct(stage.gain_error),
                large: stage.gain_error.abs() > 0.02,
            });
            let tolerances = crate::pipeline::bom_tolerances(design);
            let parts: Vec<PartRow> = stage
                .netlist
                .parts
                .iter()
                .filter(|p| p.kind != PartKind::OpAmp)
                .map(|p| PartRow {
                    reference: p.reference.clone(),
                    value: format_si(p.value, 4),
                    ideal: schematic::value_label(p.kind, p.ideal),
                    role: p.role.clone(),
                    tolerance: crate::export::bom::part_tolerance_pct(p, &tolerances)
                        .map_or_else(String::new, |pct| format!("±{pct} %")),
                })
                .collect();
            let key = format!(
                "{}:{}",
                stage.circuit.key(),
                parts
                    .iter()
                    .map(|p| p.reference.as_str())
                    .collect::<Vec<_>>()
                    .join(",")
            );
            let order_words = if section.q.is_some() {
                "2nd order"
            } else {
                "1st order"
            };
            StageView {
                key,
                index,
                number: index + 1,
                title: format!("Stage {}", index + 1),
                circuit: format!("{} · {order_words}", stage.circuit.describe()),
                rows,
                parts,
                sensitivities: Vec::new(),
                needs: String::new(),
                warnings: stage.warnings.clone(),
            }
        })
        .collect();

    let (comparison, comparison_hint) = match &design.family_orders {
        Some(rows) => {
            let rows = rows
                .iter()
                .map(|row| {
                    let current = row.family.key() == synthesis.family.key();
                    let (order_text, note) = match &row.result {
                        Ok(min) => (
                            min.order.to_string(),
                            if current && min.order != synthesis.order {
                                format!("this design has order {}", synthesis.order)
                            } else {
                                String::new()
                            },
                        ),
                        Err(e) => ("—".to_string(), e.to_input_error().message),
                    };
                    FamilyRow {
                        family: order::family_name(row.family),
                        order: order_text,
                        note,
                        current,
                    }
                })
                .collect();
            (
                rows,
                "The fewest poles each family needs to meet these limits.".to_string(),
            )
        }
        None => (
            Vec::new(),
            "Give limits (pass edge, stop edge and the depth needed) to see the order each \
             family needs."
                .to_string(),
        ),
    };

    View {
        committed: false,
        refused: false,
        errors: Vec::new(),
        ignored: Vec::new(),
        summary,
        figures: figures_line(data),
        warnings,
        stages,
        comparison,
        comparison_hint,
        link: String::new(),
    }
}

/// The frequencies where a sweep's gain crosses `level_db`, interpolated linearly in log f.
pub fn level_crossings(sweep: &Sweep, level_db: f64) -> Vec<f64> {
    sweep
        .freq_hz
        .windows(2)
        .zip(sweep.gain_db.windows(2))
        .filter_map(|(f, g)| {
            let (a, b) = (g[0] - level_db, g[1] - level_db);
            if !(a.is_finite() && b.is_finite()) || a.signum() == b.signum() || a == b {
                return None;
            }
            let t = a / (a - b);
            Some(fmath::exp(
                fmath::ln(f[0]) + t * (fmath::ln(f[1]) - fmath::ln(f[0])),
            ))
        })
        .collect()
}

/// Figures of merit read off the built response: the frequency where it has fallen 3 dB below
/// the passband gain, and the peaking above it.
fn figures_line(data: &PlotData) -> String {
    let Some(built) = &data.built else {
        return String::new();
    };
    let peak = built
        .gain_db
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    let mut parts = Vec::new();
    let reference = data.gain_db;
    let crossings = level_crossings(built, reference - 10.0 * fmath::log10(2f64));
    if !crossings.is_empty() {
        let list: Vec<String> = crossings
            .iter()
            .map(|f| engineering_unit(*f, 4, "Hz"))
            .collect();
        parts.push(format!("built −3 dB at {}", list.join(" and ")));
    }
    if peak.is_finite() {
        parts.push(format!(
            "peak {} dB re passband",
            format!("{:+.2}", peak - reference).replace('-', "−")
        ));
    }
    parts.join(" · ")
}

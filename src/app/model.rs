//! What a composed page model does after it is drawn: its figures, its tolerance study (start,
//! take the result into the plots, word it) and its downloads, made by the same functions as the
//! command line.

use super::{PageModel, N_POINTS, STUDY_BAND};
use crate::analysis::tolerance::{MonteCarlo, Summary};
use crate::error::InputError;
use crate::export;
use crate::pipeline;
use crate::plot::axis::engineering_unit;
use crate::plot::figure::Figure;
use crate::plot::figures::{self, Histogram, PlotKind};
use crate::spec::Edge;

impl PageModel {
    /// The figure of `kind` for this design.
    pub fn figure(&self, kind: PlotKind) -> Figure {
        figures::build(kind, &self.data)
    }

    /// Prepares the tolerance study of this design with the link's settings, on the plot grid
    /// ([`pipeline::start_spread`], as the command line's `spread`).
    ///
    /// # Errors
    /// An [`InputError`] on `runs` with the reason the study cannot start.
    pub fn start_study(&self) -> Result<MonteCarlo, InputError> {
        pipeline::start_spread(&self.design, N_POINTS).map_err(|message| {
            InputError::new(
                "runs",
                format!("the tolerance study cannot start: {message}"),
            )
        })
    }

    /// Takes a finished study into the plots (envelope, histograms) and the summary.
    pub fn apply_study(&mut self, summary: Summary) {
        let envelope = &summary.envelope;
        let pick = |p: f64| {
            envelope
                .percentiles
                .iter()
                .find(|c| (c.percentile - p).abs() < 1e-9)
                .map(|c| c.db.clone())
        };
        let (lo_p, hi_p) = (STUDY_BAND.0, STUDY_BAND.1);
        if let (Some(lo), Some(hi)) = (pick(lo_p), pick(hi_p)) {
            if lo.len() == self.data.ideal.freq_hz.len() {
                self.data.envelope_db = Some((lo, hi));
                self.data.envelope_label = format!("{lo_p}–{hi_p} % of runs");
            }
        }
        let mask = self.design.state.requirement.mask;
        if let Some(cut) = summary.cutoffs.first() {
            let mut limits = Vec::new();
            if let Some(m) = mask {
                let (lo, hi) = match m.pass {
                    Edge::Single(f) => (f, f),
                    Edge::Pair(a, b) => (a, b),
                };
                let edge = match cut.side {
                    crate::analysis::tolerance::CutoffSide::Lower => lo,
                    crate::analysis::tolerance::CutoffSide::Upper => hi,
                };
                limits.push(("pass edge".to_string(), edge));
            }
            self.data.hist_cutoff = Some(Histogram {
                edges: cut.hz.histogram.edges.clone(),
                counts: cut.hz.histogram.counts.iter().map(|&c| c as f64).collect(),
                nominal: Some(cut.hz.nominal),
                limits,
            });
        }
        // A study without a cutoff (a band-stop) shows how deep its stopband stays instead.
        if let (true, Some(depth)) = (
            summary.cutoffs.is_empty(),
            summary.stopband_attenuation_db.as_ref(),
        ) {
            self.data.hist_cutoff = Some(Histogram {
                edges: depth.histogram.edges.clone(),
                counts: depth.histogram.counts.iter().map(|&c| c as f64).collect(),
                nominal: Some(depth.nominal),
                limits: mask
                    .map(|m| vec![("depth needed".to_string(), m.astop_db)])
                    .unwrap_or_default(),
            });
            self.data.hist_cutoff_is_depth = true;
        }
        let gain = &summary.passband_gain_db;
        let mut limits = Vec::new();
        if let Some(m) = mask {
            limits.push((
                "loss limit".to_string(),
                self.design.state.requirement.gain_db - m.apass_db,
            ));
        }
        self.data.hist_gain = Some(Histogram {
            edges: gain.histogram.edges.clone(),
            counts: gain.histogram.counts.iter().map(|&c| c as f64).collect(),
            nominal: Some(gain.nominal),
            limits,
        });
        // Every run's readings (kept in the summary for the command line's callers) are not
        // shown by the page: dropped, so a finished study holds no memory per run.
        let mut summary = summary;
        let mut spreads: Vec<&mut crate::analysis::tolerance::Spread> = Vec::new();
        spreads.extend(summary.cutoffs.iter_mut().map(|c| &mut c.hz));
        spreads.push(&mut summary.passband_gain_db);
        spreads.extend(summary.stopband_attenuation_db.as_mut());
        for stage in summary.stages.iter_mut() {
            spreads.push(&mut stage.f0_hz);
            spreads.extend(stage.q.as_mut());
        }
        for spread in spreads {
            spread.samples = Vec::new();
        }
        self.study = Some(summary);
    }

    /// One line about the finished study: yield and the cutoff's spread.
    pub fn study_line(&self) -> String {
        let Some(summary) = &self.study else {
            return String::new();
        };
        let mut parts = Vec::new();
        match summary.yield_fraction {
            Some(y) => parts.push(format!(
                "yield {:.1} % ({} of {} runs meet the limits)",
                y * 100.0,
                summary.n_pass.unwrap_or(0),
                summary.runs
            )),
            None => parts.push(format!("{} runs (no limits to check)", summary.runs)),
        }
        if let Some(cut) = summary.cutoffs.first() {
            let p = |q: f64| {
                cut.hz
                    .percentiles
                    .iter()
                    .find(|v| (v.percentile - q).abs() < 1e-9)
                    .map(|v| v.value)
            };
            if let (Some(lo), Some(hi)) = (p(STUDY_BAND.0), p(STUDY_BAND.1)) {
                parts.push(format!(
                    "cutoff {} … {} ({}–{} % of runs)",
                    engineering_unit(lo, 4, "Hz"),
                    engineering_unit(hi, 4, "Hz"),
                    STUDY_BAND.0,
                    STUDY_BAND.1
                ));
            }
        }
        parts.extend(crate::export::words::stopband_kept_line(
            summary,
            self.design.synthesis.class,
            self.design.state.requirement.mask.map(|m| m.astop_db),
        ));
        // Where the runs' responses come from, in the words of the command line's study.
        if summary.loaded_runs {
            parts.push("each run solved on the loaded board".to_string());
        }
        parts.extend(summary.warnings.iter().cloned());
        parts.join(" · ")
    }

    /// The summary sentence with the study's yield appended once a study has finished.
    pub fn summary_with_study(&self) -> String {
        match self.study.as_ref().and_then(|s| s.yield_fraction) {
            Some(y) => format!(
                "{} · yield {:.1} % ({} runs)",
                self.view.summary,
                y * 100.0,
                self.study.as_ref().map_or(0, |s| s.runs)
            ),
            None => self.view.summary.clone(),
        }
    }

    /// A download: `bom` (parts list CSV), `spice` (netlist) or `json` (design), made by the same
    /// functions with the same arguments as `rolloff design --format bom|spice|json`.
    ///
    /// # Errors
    /// `format` for an unknown kind; the exporter's own errors.
    pub fn export(&self, kind: &str) -> Result<String, InputError> {
        let design = &self.design;
        match kind {
            "bom" => Ok(export::bom::csv(
                &design.board,
                &pipeline::bom_tolerances(design),
            )),
            "spice" => export::spice::netlist(&design.board, &pipeline::spice_sweep(design)),
            "json" => Ok(export::json::design_json(design)),
            other => Err(InputError::new(
                "format",
                format!("'{other}' is not a download this page offers (bom, spice, json)"),
            )),
        }
    }
}

//! What a tolerance study builds once: each stage compiled and fitted at its nominal values (with
//! its multilinear expansion where it has one), the draw table (nominal values, spreads), the
//! evaluation grid with the mask bounds at each point, the instruction set, and the nominal
//! board's readings, worked out by the same batch path as every run.

use super::batch::Batch;
use super::{
    CutoffDefinition, MonteCarlo, MonteCarloSettings, PartDistribution, RunResult, MAX_RUNS,
    MAX_TOLERANCE_PCT,
};
use crate::analysis::circuit::{
    merge_stages, transfer_at, AnalysisError, Assembled, Compiled, Solver,
};
use crate::analysis::fastfit::FastFit;
use crate::analysis::lanes::{Isa, RunLanes, RUN_LANES};
use crate::analysis::multilinear::Multilinear;
use crate::analysis::poly::FitWork;
use crate::analysis::roots::dominant_w0_q;
use crate::board::Board;
use crate::error::InputError;
use crate::fmath;
use crate::netlist::{PartKind, StageNetlist};
use crate::opamp::OpAmp;
use crate::spec::{Edge, Mask};
use num_complex::Complex64;
use rand_core::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;
use std::f64::consts::PI;

/// One stage prepared for repeated fitting.
#[derive(Debug, Clone)]
pub(super) struct StageRun {
    pub(super) compiled: Compiled,
    pub(super) assembled: Assembled,
    pub(super) fast: FastFit,
    /// The multilinear expansion of N and D (stages of up to eight parts), used instead of
    /// solving per run.
    pub(super) multi: Option<Multilinear>,
    /// Index into the run's value vector of this stage's first part.
    pub(super) value_offset: usize,
    pub(super) n_parts: usize,
    /// 0, 1 or 2 (degree of the denominator with an ideal op amp, at most 2).
    pub(super) order: usize,
    /// Nominal f0 (rad/s) and Q of the dominant factor, the start of each run's iteration.
    pub(super) nominal_w0: f64,
    pub(super) nominal_q: f64,
    /// The nominal far real pole of a third-degree denominator (the op amp's), in u = s/ω_g;
    /// each run finds it by Halley's iteration and splits off the filter's quadratic factor.
    pub(super) far_root_u: Option<f64>,
    /// N and D in u of the batch's runs (K coefficients, one lane per run).
    pub(super) num_l: Vec<RunLanes>,
    pub(super) den_l: Vec<RunLanes>,
    /// |N|², |D|² in x of the batch's runs.
    pub(super) sq_n: Vec<RunLanes>,
    pub(super) sq_d: Vec<RunLanes>,
    /// Monomials of the multilinear expansion, one lane per run.
    pub(super) mono: Vec<RunLanes>,
    /// One run's part values, for the per-run solve of stages without an expansion.
    pub(super) scalar_values: Vec<f64>,
}

fn input(key: &str, message: String) -> AnalysisError {
    AnalysisError::Input(InputError::new(key, message))
}

fn validate(settings: &MonteCarloSettings) -> Result<(), AnalysisError> {
    if settings.runs == 0 || settings.runs > MAX_RUNS {
        return Err(input(
            "runs",
            format!("{} runs asked for; accepted 1 to {MAX_RUNS}", settings.runs),
        ));
    }
    let t = &settings.tolerances;
    for (key, v) in [("rtol", t.resistor_pct), ("ctol", t.capacitor_pct)] {
        if !(v.is_finite() && (0.0..=MAX_TOLERANCE_PCT).contains(&v)) {
            return Err(input(
                key,
                format!("tolerance {v} %; accepted 0 to {MAX_TOLERANCE_PCT} %"),
            ));
        }
    }
    for o in &t.overrides {
        if !(o.pct.is_finite() && (0.0..=MAX_TOLERANCE_PCT).contains(&o.pct)) {
            return Err(input(
                &format!("tol:{}", o.reference),
                format!("tolerance {} %; accepted 0 to {MAX_TOLERANCE_PCT} %", o.pct),
            ));
        }
    }
    if let PartDistribution::Gaussian { sigmas } = t.distribution {
        if !(sigmas.is_finite() && (1.0..=6.0).contains(&sigmas)) {
            return Err(input(
                "sigmas",
                format!("{sigmas} standard deviations; accepted 1 to 6"),
            ));
        }
    }
    let f = &settings.freqs_hz;
    if f.is_empty() || f.len() > 100_000 {
        return Err(input(
            "points",
            format!("{} frequencies; accepted 1 to 100000", f.len()),
        ));
    }
    if f.iter().any(|v| !(v.is_finite() && *v > 0.0)) || f.windows(2).any(|w| w[1] <= w[0]) {
        return Err(input(
            "from",
            "frequencies must be positive, finite and ascending".into(),
        ));
    }
    if settings
        .percentiles
        .iter()
        .any(|p| !(p.is_finite() && (0.0..=100.0).contains(p)))
    {
        return Err(input("percentiles", "percentiles are 0 to 100".into()));
    }
    let CutoffDefinition::Attenuation { db } = settings.cutoff;
    if !(db.is_finite() && db > 0.0 && db < 100.0) {
        return Err(input(
            "cutoff",
            format!("cutoff attenuation {db} dB; accepted above 0 and below 100 dB"),
        ));
    }
    if !(settings.reference_gain.is_finite() && settings.reference_gain > 0.0) {
        return Err(input(
            "gain",
            format!(
                "reference gain {} V/V; accepted a positive finite number",
                settings.reference_gain
            ),
        ));
    }
    if !(settings.passband_ref_hz.is_finite() && settings.passband_ref_hz >= 0.0) {
        return Err(input(
            "fc",
            "passband reference frequency must be 0 or positive".into(),
        ));
    }
    Ok(())
}

/// In-band test of one frequency against a mask: `(in passband, in stopband)`. The one rule of
/// which band a frequency is in, shared by the study's yield and the as-built verdict.
pub fn bands(mask: &Mask, f: f64) -> (bool, bool) {
    match (mask.pass, mask.stop) {
        (Edge::Single(fp), Edge::Single(fs)) => {
            if fp <= fs {
                (f <= fp, f >= fs)
            } else {
                (f >= fp, f <= fs)
            }
        }
        // A band-stop's passband edges lie outside its stopband edges.
        (Edge::Pair(pl, ph), Edge::Pair(sl, sh)) if pl < sl => {
            (f <= pl || f >= ph, f >= sl && f <= sh)
        }
        (Edge::Pair(pl, ph), Edge::Pair(sl, sh)) => (f >= pl && f <= ph, f <= sl || f >= sh),
        // Mixed edge kinds do not pass the link's validation; they check nothing.
        _ => (false, false),
    }
}

fn mask_edges(mask: &Mask) -> Vec<f64> {
    let mut v = Vec::new();
    for e in [mask.pass, mask.stop] {
        match e {
            Edge::Single(f) => v.push(f),
            Edge::Pair(a, b) => {
                v.push(a);
                v.push(b);
            }
        }
    }
    v
}

impl MonteCarlo {
    /// Prepares a study of `board` (its stages as built, its op-amp model).
    ///
    /// # Errors
    /// As [`MonteCarlo::from_stages`].
    pub fn new(
        board: &Board,
        mask: Option<&Mask>,
        settings: MonteCarloSettings,
    ) -> Result<MonteCarlo, AnalysisError> {
        let stages: Vec<StageNetlist> = board.stages.iter().map(|s| s.netlist.clone()).collect();
        MonteCarlo::from_stages(&stages, &board.op_amp, mask, settings)
    }

    /// Prepares a study of the board made of `stages` (in signal order) with op amp `op`.
    ///
    /// # Errors
    /// [`AnalysisError::Input`] naming the setting out of range (`runs` 1–100,000, `rtol`/`ctol`
    /// 0–50 %, `sigmas` 1–6, frequencies positive and ascending, percentiles 0–100, an override for
    /// a part that is not on the board: key `tol:REF`); [`AnalysisError::BadNetlist`] or
    /// [`AnalysisError::Singular`] when the nominal board cannot be analysed.
    pub fn from_stages(
        stages: &[StageNetlist],
        op: &OpAmp,
        mask: Option<&Mask>,
        settings: MonteCarloSettings,
    ) -> Result<MonteCarlo, AnalysisError> {
        validate(&settings)?;
        if stages.is_empty() {
            return Err(AnalysisError::BadNetlist("the board has no stages".into()));
        }
        let t = &settings.tolerances;
        for o in &t.overrides {
            let found = stages.iter().any(|s| {
                s.parts
                    .iter()
                    .any(|p| p.reference == o.reference && p.kind != PartKind::OpAmp)
            });
            if !found {
                return Err(input(
                    &format!("tol:{}", o.reference),
                    format!("no resistor or capacitor {} on the board", o.reference),
                ));
            }
        }
        let divisor = match t.distribution {
            PartDistribution::Gaussian { sigmas } => sigmas,
            PartDistribution::Uniform => 1.0,
        };
        let f = &settings.freqs_hz;
        let n_grid = f.len();
        let f_g = (f[0] * f[n_grid - 1]).sqrt();
        let w_g = 2.0 * PI * f_g;
        let mut nominal_values = Vec::new();
        let mut spread = Vec::new();
        let mut drawn = Vec::new();
        let mut runs = Vec::with_capacity(stages.len());
        let ideal = OpAmp::ideal();
        for net in stages {
            let compiled = Compiled::new(net, op)?;
            let assembled = compiled.assemble(net);
            let mut work = FitWork::new(&compiled);
            let value_offset = nominal_values.len();
            for p in &net.parts {
                let pct = match p.kind {
                    PartKind::OpAmp => 0.0,
                    PartKind::Resistor => t.resistor_pct,
                    PartKind::Capacitor => t.capacitor_pct,
                };
                let pct = t
                    .overrides
                    .iter()
                    .find(|o| o.reference == p.reference && p.kind != PartKind::OpAmp)
                    .map_or(pct, |o| o.pct);
                if p.kind != PartKind::OpAmp {
                    drawn.push(nominal_values.len());
                }
                nominal_values.push(if p.kind == PartKind::OpAmp {
                    0.0
                } else {
                    p.value
                });
                spread.push(pct / 100.0 / divisor);
            }
            // The stage order from the ideal-op-amp denominator; the nominal dominant factor from
            // the real one.
            let ideal_rat = crate::analysis::poly::stage_transfer(net, &ideal)?;
            // Order 0: a stage without frequency-setting poles (a gain stage); it has no f0 or Q.
            let order = ideal_rat.den.degree().min(2);
            let rat = crate::analysis::poly::fitted_rational(&compiled, &assembled, &mut work)?;
            let poles = rat.poles()?;
            let (w0, q) = if order == 0 {
                (f64::NAN, f64::NAN)
            } else {
                dominant_w0_q(&poles, order).ok_or_else(|| {
                    AnalysisError::NoConvergence(format!(
                        "no dominant pole {} found in a stage of order {order}",
                        if order == 2 { "pair" } else { "" }
                    ))
                })?
            };
            let mut fast = FastFit::new(&compiled, rat.scale_rad_s, w_g);
            fast.choose_pivots(&compiled, &assembled);
            let k = fast.n_coef();
            // A cubic denominator with one real pole well above the dominant pair: the fast split.
            let far_root_u = (order == 2 && rat.den.degree() == 3)
                .then(|| {
                    poles
                        .iter()
                        .filter(|p| p.im == 0.0 && fmath::cnorm(**p) > 2.0 * w0)
                        .map(|p| p.re / w_g)
                        .next()
                })
                .flatten();
            let multi = Multilinear::new(&compiled, net, rat.scale_rad_s, w_g);
            let n_terms = multi.as_ref().map_or(0, Multilinear::n_terms);
            runs.push(StageRun {
                multi,
                far_root_u,
                compiled,
                assembled,
                fast,
                num_l: vec![[0.0; RUN_LANES]; k],
                den_l: vec![[0.0; RUN_LANES]; k],
                sq_n: vec![[0.0; RUN_LANES]; k],
                sq_d: vec![[0.0; RUN_LANES]; k],
                mono: vec![[0.0; RUN_LANES]; n_terms],
                scalar_values: vec![0.0; net.parts.len()],
                value_offset,
                n_parts: net.parts.len(),
                order,
                nominal_w0: w0,
                nominal_q: q,
            });
        }
        let mut eval_f: Vec<f64> = f.clone();
        let edges = mask.map(mask_edges).unwrap_or_default();
        eval_f.extend(edges.iter().copied());
        let ref_idx = eval_f.len();
        eval_f.push(settings.passband_ref_hz);
        let g2 = settings.reference_gain * settings.reference_gain;
        let mut lo_bound = Vec::with_capacity(eval_f.len());
        let mut hi_bound = Vec::with_capacity(eval_f.len());
        let mut stop_weight = Vec::with_capacity(eval_f.len());
        let mut has_stop = false;
        for (i, &fr) in eval_f.iter().enumerate() {
            let (in_pass, in_stop) = match mask {
                Some(m) if i != ref_idx => bands(m, fr),
                _ => (false, false),
            };
            let m = mask.copied();
            lo_bound.push(match (in_pass, m) {
                (true, Some(m)) => g2 * fmath::powf(10f64, -m.apass_db / 10.0) * (1.0 - 1e-12),
                _ => 0.0,
            });
            hi_bound.push(match (in_stop, m) {
                (true, Some(m)) => g2 * fmath::powf(10f64, -m.astop_db / 10.0) * (1.0 + 1e-12),
                _ => f64::INFINITY,
            });
            stop_weight.push(if in_stop { 1.0 } else { 0.0 });
            has_stop |= in_stop;
        }
        let x_eval: Vec<f64> = eval_f.iter().map(|fr| (fr / f_g) * (fr / f_g)).collect();
        let width = runs
            .iter()
            .map(|s| s.compiled.degree_bound + 1)
            .max()
            .unwrap_or(1);
        let n_stages = runs.len();
        let n_eval = x_eval.len();
        let runs_total = settings.runs;
        let batch = Batch {
            active: [false; RUN_LANES],
            failed: [false; RUN_LANES],
            values: nominal_values.iter().map(|&v| [v; RUN_LANES]).collect(),
            coef_n: vec![[0.0; RUN_LANES]; n_stages * width],
            coef_d: vec![[0.0; RUN_LANES]; n_stages * width],
            deg_n: vec![0; n_stages],
            deg_d: vec![0; n_stages],
            w0: vec![[f64::NAN; RUN_LANES]; n_stages],
            q: vec![[f64::NAN; RUN_LANES]; n_stages],
            h2: vec![[0.0; RUN_LANES]; n_eval],
            den: vec![[0.0; RUN_LANES]; n_eval],
            pass: [false; RUN_LANES],
            cut_lo_hz: [f64::NAN; RUN_LANES],
            cut_hi_hz: [f64::NAN; RUN_LANES],
            gain_db: [f64::NAN; RUN_LANES],
            atten_db: [f64::NAN; RUN_LANES],
        };
        let mut mc = MonteCarlo {
            rng: Xoshiro256PlusPlus::seed_from_u64(settings.seed),
            nominal_values,
            spread,
            drawn,
            stages: runs,
            x_eval,
            n_grid,
            ref_idx,
            lo_bound,
            hi_bound,
            stop_weight,
            has_mask: mask.is_some(),
            has_stop,
            required_stop_db: mask.filter(|_| has_stop).map(|m| m.astop_db),
            w_g,
            width,
            isa: Isa::detect(),
            batch,
            done: 0,
            n_pass: 0,
            env_min: vec![[f64::INFINITY; RUN_LANES]; n_grid],
            env_max: vec![[0.0; RUN_LANES]; n_grid],
            envelope: Default::default(),
            curves: Vec::new(),
            cut_lo: Vec::with_capacity(runs_total),
            cut_hi: Vec::with_capacity(runs_total),
            gain_db: Vec::with_capacity(runs_total),
            atten_db: Vec::with_capacity(runs_total),
            stage_f0: vec![Vec::with_capacity(runs_total); n_stages],
            stage_q: vec![Vec::with_capacity(runs_total); n_stages],
            nominal: RunResult::default(),
            nominal_h2: Vec::new(),
            nominal_f0q: Vec::new(),
            fallbacks: 0,
            cutoff_level: {
                let CutoffDefinition::Attenuation { db } = settings.cutoff;
                g2 * fmath::powf(10f64, -db / 10.0)
            },
            settings,
            loading_h2: None,
            loading_logs: Vec::new(),
            loading_residual_db: None,
            loaded_runs: None,
        };
        // The nominal board: the same path, in lane 0, with every part at its nominal value.
        mc.batch.active[0] = true;
        mc.run_batch(None);
        if mc.batch.failed[0] {
            return Err(AnalysisError::Singular("a stage of a tolerance run".into()));
        }
        if op.rout_ohm.is_finite() && op.rout_ohm > 0.0 {
            let offsets: Vec<usize> = mc.stages.iter().map(|s| s.value_offset).collect();
            let mut loaded = LoadedBoard::new(stages, op, &offsets)?;
            let target = loaded.h2(&mc.nominal_values, &eval_f)?;
            let corr: Vec<f64> = target
                .iter()
                .zip(&mc.batch.h2)
                .map(|(&t, p)| {
                    let ratio = t / p[0];
                    if ratio.is_finite() && ratio > 0.0 {
                        ratio
                    } else {
                        1.0
                    }
                })
                .collect();
            mc.loading_logs = super::kernel::loading_logs(&mc.x_eval[..n_grid], &corr);
            mc.loading_h2 = Some(corr);
            mc.run_batch(None);
            if mc.batch.failed[0] {
                return Err(AnalysisError::Singular("a stage of a tolerance run".into()));
            }
            let residual = loading_residual_db(&mc, &mut loaded, &eval_f)?;
            mc.loading_residual_db = Some(residual);
            if residual > super::LOADING_RESIDUAL_WARN_DB {
                // The correction does not follow the runs: every run (the nominal board again
                // first, so that its cutoff is the loaded board's too) is solved loaded.
                mc.loaded_runs = Some(LoadedRuns::new(loaded, eval_f.clone()));
                mc.run_batch(None);
                if mc.batch.failed[0] {
                    return Err(AnalysisError::Singular("the loaded nominal board".into()));
                }
            }
        }
        let b = &mc.batch;
        mc.nominal = RunResult {
            cut_lo_hz: b.cut_lo_hz[0],
            cut_hi_hz: b.cut_hi_hz[0],
            gain_db: b.gain_db[0],
            atten_db: b.atten_db[0],
        };
        mc.nominal_h2 = b.h2[..n_grid].iter().map(|v| v[0]).collect();
        mc.nominal_f0q = b.w0.iter().zip(&b.q).map(|(w, q)| (w[0], q[0])).collect();
        Ok(mc)
    }
}

/// The whole board merged and loaded, for solves with a run's part values.
#[derive(Debug, Clone)]
struct LoadedBoard {
    compiled: Compiled,
    assembled: Assembled,
    solver: Solver,
    /// For each part of the merged netlist, its index in the study's value vector.
    value_idx: Vec<usize>,
    values: Vec<f64>,
}

impl LoadedBoard {
    fn new(
        stages: &[StageNetlist],
        op: &OpAmp,
        offsets: &[usize],
    ) -> Result<LoadedBoard, AnalysisError> {
        let refs: Vec<&StageNetlist> = stages.iter().collect();
        let merged = merge_stages(&refs)?;
        let compiled = Compiled::new(&merged.netlist, op)?;
        let assembled = compiled.assemble(&merged.netlist);
        let value_idx = merged
            .part_origin
            .iter()
            .map(|&(stage, idx)| offsets.get(stage).copied().unwrap_or(0) + idx)
            .collect();
        let solver = Solver::new(compiled.n);
        Ok(LoadedBoard {
            values: vec![0.0; merged.netlist.parts.len()],
            compiled,
            assembled,
            solver,
            value_idx,
        })
    }

    /// |H|² of the loaded board with the study's part values `run_values` (draw order) at each
    /// frequency of `freqs_hz`.
    fn h2(&mut self, run_values: &[f64], freqs_hz: &[f64]) -> Result<Vec<f64>, AnalysisError> {
        for (v, &i) in self.values.iter_mut().zip(&self.value_idx) {
            *v = run_values.get(i).copied().unwrap_or(f64::NAN);
        }
        self.compiled
            .assemble_into(&self.values, &mut self.assembled);
        freqs_hz
            .iter()
            .map(|&f| {
                let s = Complex64::new(0.0, 2.0 * PI * f);
                transfer_at(&self.compiled, &self.assembled, &mut self.solver, s)
                    .map(|h| h.norm_sqr())
            })
            .collect()
    }
}

/// The loaded board of a study whose runs are each solved loaded (the loading residual above
/// [`super::LOADING_RESIDUAL_WARN_DB`]): the merged board and one assembled matrix set per lane,
/// restamped with each batch's drawn values, so that the cutoff search can solve any lane at any
/// frequency. Its size is fixed by the board (eight matrix sets), not by the runs.
#[derive(Debug, Clone)]
pub(super) struct LoadedRuns {
    board: LoadedBoard,
    lanes: Vec<Assembled>,
    /// The evaluation frequencies, Hz (the points of `x_eval`, kept in Hz so that the solves are
    /// at exactly the frequencies the nominal correction was taken at).
    eval_f: Vec<f64>,
}

impl LoadedRuns {
    fn new(board: LoadedBoard, eval_f: Vec<f64>) -> LoadedRuns {
        LoadedRuns {
            lanes: vec![board.assembled.clone(); RUN_LANES],
            board,
            eval_f,
        }
    }

    /// Restamps the matrices of every lane in `live` with that lane's values and overwrites its
    /// |H|² at every evaluation point by the loaded solve; a lane whose matrices are singular is
    /// marked failed.
    pub(super) fn solve_batch(&mut self, batch: &mut Batch, live: [bool; RUN_LANES]) {
        let LoadedRuns {
            board,
            lanes,
            eval_f,
        } = self;
        for (l, assembled) in lanes.iter_mut().enumerate() {
            if !live[l] {
                continue;
            }
            for (v, &i) in board.values.iter_mut().zip(&board.value_idx) {
                *v = batch.values.get(i).map_or(f64::NAN, |lane| lane[l]);
            }
            board.compiled.assemble_into(&board.values, assembled);
            for (h, &f) in batch.h2.iter_mut().zip(eval_f.iter()) {
                let s = Complex64::new(0.0, 2.0 * PI * f);
                match transfer_at(&board.compiled, assembled, &mut board.solver, s) {
                    Ok(t) => h[l] = t.norm_sqr(),
                    Err(_) => {
                        batch.failed[l] = true;
                        break;
                    }
                }
            }
        }
    }

    /// |H|² of lane `l`'s loaded board (as last restamped by [`LoadedRuns::solve_batch`]) at
    /// `f_hz`; NaN when singular there.
    pub(super) fn h2_at(&mut self, l: usize, f_hz: f64) -> f64 {
        let s = Complex64::new(0.0, 2.0 * PI * f_hz);
        match self.lanes.get(l) {
            Some(assembled) => {
                transfer_at(&self.board.compiled, assembled, &mut self.board.solver, s)
                    .map_or(f64::NAN, |t| t.norm_sqr())
            }
            None => f64::NAN,
        }
    }
}

/// The largest |dB| difference, over the evaluation points within 120 dB of the reference gain,
/// between the kernel's corrected |H| and the loaded solve of the first
/// [`super::LOADING_PROBE_RUNS`] runs of the stream, worked on a copy of the study so that the
/// study's own stream is not advanced.
fn loading_residual_db(
    mc: &MonteCarlo,
    loaded: &mut LoadedBoard,
    eval_f: &[f64],
) -> Result<f64, AnalysisError> {
    let mut probe = mc.clone();
    let g2 = mc.settings.reference_gain * mc.settings.reference_gain;
    let floor = g2 * 1e-12;
    let mut worst = 0.0f64;
    let mut run_values = vec![0.0; mc.nominal_values.len()];
    for _ in 0..super::LOADING_PROBE_RUNS.div_ceil(RUN_LANES) {
        probe.draw(0, RUN_LANES);
        probe.run_batch(None);
        for l in 0..RUN_LANES {
            if probe.batch.failed[l] {
                continue;
            }
            for (v, lanes) in run_values.iter_mut().zip(&probe.batch.values) {
                *v = lanes[l];
            }
            let exact = loaded.h2(&run_values, eval_f)?;
            for (e, k) in exact.iter().zip(&probe.batch.h2) {
                if *e >= floor && k[l] > 0.0 {
                    worst = worst.max((10.0 * fmath::log10(k[l] / e)).abs());
                }
            }
        }
    }
    Ok(worst)
}

#[cfg(test)]
mod loading_tests {
    use crate::analysis::built::BoardSolver;
    use crate::analysis::tolerance::{Summary, LOADING_RESIDUAL_WARN_DB};
    use crate::fmath;

    fn study(link: &str) -> (crate::pipeline::Design, Summary) {
        let report = crate::link::parse(link);
        assert!(report.errors.is_empty(), "{link}: {:?}", report.errors);
        let design = crate::pipeline::compose(&report.state).expect("composes");
        let summary = crate::pipeline::spread(&design).expect("study");
        (design, summary)
    }

    /// Oracle: the banded nodal solve of the whole merged, loaded board (`BoardSolver`, itself
    /// checked against the dense nodal analysis and ngspice in tests/analysis.rs and
    /// tests/as_built.rs). The study's nominal curve and nominal passband gain equal it to 1e-6 dB
    /// on the 8th-order Chebyshev 0.5 dB at 100 kHz on a 1 MHz op amp (Rout 50 Ω), a board the
    /// loading moves by decibels. That board's parts move its loading as well: the residual of
    /// the sampled runs is recorded and, being above the threshold, makes the study solve every
    /// run on the loaded board.
    #[test]
    fn nominal_study_equals_the_loaded_board() {
        let (design, summary) =
            study("?v=2&resp=lp&family=chebyshev&ripple=0.5&order=8&fc=100k&gbw=1M&runs=50");
        let mut solver = BoardSolver::of_board(&design.board).expect("board");
        let mut worst = 0.0f64;
        for (&f, &db) in summary.freqs_hz.iter().zip(&summary.nominal_db) {
            let loaded = 20.0 * fmath::log10(fmath::cnorm(solver.solve_at(f).expect("solve")));
            worst = worst.max((db - loaded).abs());
        }
        assert!(worst < 1e-6, "nominal curve vs loaded board: {worst:e} dB");
        let gain = 20.0 * fmath::log10(fmath::cnorm(solver.solve_at(0.0).expect("dc")));
        let got = summary.passband_gain_db.nominal;
        assert!(
            (got - gain).abs() < 1e-6,
            "passband gain {got} vs loaded {gain} dB"
        );
        let residual = summary.loading_residual_db.expect("Rout > 0: checked");
        assert!(
            residual > LOADING_RESIDUAL_WARN_DB,
            "residual {residual} dB"
        );
        // Above the threshold the study solves every run loaded instead of warning.
        assert!(summary.loaded_runs, "residual {residual} dB: loaded path");
        assert!(
            !summary.warnings.iter().any(|w| w.contains("loading")),
            "{:?}",
            summary.warnings
        );
    }

    /// Oracle as above: on boards whose op amps are fast against the filter (the generic op amp,
    /// 6th-order Butterworth at 1 kHz; a 10 MHz op amp under a 3 kHz Linkwitz-Riley) the sampled
    /// runs follow their loaded solves to within the threshold and the study does not warn;
    /// with Rout = 0 (an op amp output is an ideal source, the product is exact) nothing is
    /// corrected or recorded.
    #[test]
    fn loading_residual_is_small_on_fast_op_amps_and_absent_without_rout() {
        for link in [
            "?v=2&order=6&fc=1k&runs=50",
            "?v=2&resp=lp&family=linkwitz-riley&order=8&fc=3k&gbw=10M&runs=50",
        ] {
            let (_, summary) = study(link);
            let residual = summary.loading_residual_db.expect("Rout > 0: checked");
            assert!(
                residual < LOADING_RESIDUAL_WARN_DB,
                "{link}: residual {residual} dB"
            );
            assert!(
                !summary.warnings.iter().any(|w| w.contains("loading")),
                "{link}"
            );
            assert!(!summary.loaded_runs, "{link}: the product path");
        }
        let (_, summary) = study("?v=2&order=6&fc=1k&runs=50&rout=0");
        assert_eq!(summary.loading_residual_db, None);
    }
}

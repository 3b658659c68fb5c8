//! The composer: a link's state → a [`Design`] with everything the views show.
//!
//! It reads like the path a design takes:
//! 1. [`crate::design::synthesize`]: requirement → order → prototype → transform → sections;
//! 2. [`crate::board::Board::build`]: sections → stages with standard values and overrides;
//! 3. the plot span, the family comparison and the warnings gathered from every step.
//! Sweeps ([`sweep`]) and the tolerance study ([`spread`]) run on a composed design.

use crate::analysis::built::BoardSolver;
use crate::analysis::tolerance::{
    CutoffDefinition, MonteCarlo, MonteCarloSettings, PartDistribution, PartTolerance, Summary,
    Tolerances,
};
use crate::board::{Board, BuildChoices, ImpedanceLevel};
use crate::design::{self, Synthesis};
use crate::error::InputError;
use crate::fmath;
use crate::link::{Distribution, LinkState};
use crate::mna;
use crate::opamp::OpAmp;
use crate::order::{self, FamilyOrder};
use crate::spec::{Edge, Family, Mask, ResponseClass};
use num_complex::Complex64;

mod analyses;
pub mod verdict;

pub use analyses::{
    analyses, gbw_band_hz, passband_ref_hz, plot_grid, required_notch_depth_db, signal_band_hz,
    Analyses, LevelSummary, NoiseShare, NoiseSummary, HIGH_PASS_TOP, NOISE_EVERY, PLOT_POINTS,
    STEP_POINTS,
};

/// A composed design: the state it came from, the synthesis, the board and its context.
#[derive(Debug, Clone)]
pub struct Design {
    /// The validated link state.
    pub state: LinkState,
    /// Poles and sections.
    pub synthesis: Synthesis,
    /// The board as built (rounded parts, overrides, op-amp model).
    pub board: Board,
    /// Frequency span of the plots and sweeps, Hz.
    pub span_hz: (f64, f64),
    /// Minimum order of every family for the mask, when there is one.
    pub family_orders: Option<Vec<FamilyOrder>>,
    /// Every soft problem of every step, in pipeline order.
    pub warnings: Vec<String>,
}

/// One row of a sweep.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SweepRow {
    /// Frequency, Hz.
    pub freq_hz: f64,
    /// 20·log10|H|, dB.
    pub gain_db: f64,
    /// Phase, degrees, unwrapped along the sweep.
    pub phase_deg: f64,
    /// Group delay −d(arg H)/dω, s.
    pub delay_s: f64,
}

/// The build choices the link asks for.
pub fn build_choices(state: &LinkState) -> BuildChoices {
    BuildChoices {
        topology: state.topology,
        r_series: state.r_series,
        c_series: state.c_series,
        impedance: state
            .r_level_ohm
            .map_or(ImpedanceLevel::Auto, ImpedanceLevel::Ohms),
        c_ratio: state.c_ratio,
        r_ratio: state.r_ratio,
        rounding: state.rounding,
        overrides: state.overrides.clone(),
        op_amp: state.op_amp,
    }
}

/// Composes the design a link state describes.
///
/// # Errors
/// The first hard problem of any step, naming its link key (an infeasible stage, an order above
/// 20, an unknown part in `set` …).
pub fn compose(state: &LinkState) -> Result<Design, InputError> {
    let synthesis = design::synthesize(&state.requirement, &state.stage_order)?;
    let board = Board::build(&synthesis.sections, &build_choices(state))?;
    check_tolerance_parts(&board, &state.tolerance_overrides)?;
    let family_orders = state.requirement.mask.as_ref().map(|mask| {
        let ripple = state.requirement.family.ripple_db();
        family_comparison(state.requirement.class, mask, ripple)
    });
    let mut warnings = synthesis.warnings.clone();
    warnings.extend(realism_warnings(state, &board));
    if let (Some(ripple_db), Some(mask)) =
        (state.requirement.family.ripple_db(), state.requirement.mask)
    {
        let margin = mask.apass_db - ripple_db;
        if margin > 0.0 {
            warnings.push(format!(
                "the ripple ({ripple_db} dB) leaves {} dB of the {} dB loss allowed at the pass \
                 edge as margin for part tolerances and the op amp",
                (margin * 1e6).round() / 1e6,
                mask.apass_db
            ));
        } else {
            warnings.push(format!(
                "the ripple ({ripple_db} dB) uses all of the {} dB loss allowed at the pass edge: \
                 no margin is left for part tolerances and the op amp; a smaller ripple keeps some",
                mask.apass_db
            ));
        }
    }
    warnings.extend(board.warnings.iter().cloned());
    for stage in &board.stages {
        // Stage warnings already name their stage.
        warnings.extend(stage.warnings.iter().cloned());
    }
    let span_hz = match state.span_hz {
        Some(asked) => {
            let (span, note) = clamp_span(asked);
            warnings.extend(note);
            span
        }
        None => auto_span(&synthesis, state.requirement.mask.as_ref()),
    };
    Ok(Design {
        state: state.clone(),
        synthesis,
        board,
        span_hz,
        family_orders,
        warnings,
    })
}

/// Stopband depth a board achieves in practice, dB: beyond about 100–120 dB, layout coupling,
/// supply rejection and the op amp's own feed-through set the floor (common practice).
pub const PRACTICAL_DEPTH_DB: f64 = 120.0;

/// Capacitance above which a part comes only as electrolytic, tantalum or high-K ceramic, whose
/// voltage and temperature coefficients and loss move f0 and Q (common practice: stable C0G/NP0
/// ceramics and film parts for frequency-setting capacitors reach about 1 µF).
pub const STABLE_CAPACITOR_MAX_F: f64 = 1e-6;

/// Ratio of a stage's two capacitors beyond which the stage is hard to build well (one part
/// near the board's stray capacitance or the other impractically large), common practice.
pub const CAPACITOR_SPREAD_MAX: f64 = 100.0;

/// Q above which a second-order stage's f0 and Q hang on part tolerances and the op amp more than
/// any E-series rounding can hold (common practice: single op-amp stages are used to Q ≈ 20–30).
pub const PRACTICAL_Q_MAX: f64 = 30.0;

/// Warnings about a requirement or a board that no real board achieves as drawn, each with its
/// number and a suggestion.
fn realism_warnings(state: &LinkState, board: &Board) -> Vec<String> {
    let mut out = Vec::new();
    if let Some(mask) = state.requirement.mask {
        if mask.astop_db > PRACTICAL_DEPTH_DB {
            out.push(format!(
                "a stopband depth of {} dB is beyond what a board achieves in practice (about \
                 {PRACTICAL_DEPTH_DB} dB: layout coupling, supply rejection and op-amp \
                 feed-through set the floor); measure the prototype's floor, or lower stopdepth",
                (mask.astop_db * 100.0).round() / 100.0
            ));
        }
    }
    for (k, stage) in board.stages.iter().enumerate() {
        let caps: Vec<&crate::netlist::Part> = stage
            .netlist
            .parts
            .iter()
            .filter(|p| p.kind == crate::netlist::PartKind::Capacitor)
            .collect();
        for c in &caps {
            if c.value > STABLE_CAPACITOR_MAX_F {
                out.push(format!(
                    "stage {}: {} = {} is larger than stable capacitors come (about 1 µF): an \
                     electrolytic or high-K part drifts with voltage and temperature; raise the \
                     impedance level (rlevel) to make it smaller",
                    k + 1,
                    c.reference,
                    crate::units::format_si_unit(c.value, 3, "F")
                ));
            }
        }
        if caps.len() >= 2 {
            let max = caps.iter().map(|c| c.value).fold(0.0, f64::max);
            let min = caps.iter().map(|c| c.value).fold(f64::INFINITY, f64::min);
            if min > 0.0 && max / min > CAPACITOR_SPREAD_MAX {
                out.push(format!(
                    "stage {}: its capacitors spread {:.0}:1 (more than {CAPACITOR_SPREAD_MAX}:1); \
                     the small one is near the board's stray capacitance; try a resistor ratio \
                     (rratio) or the other topology",
                    k + 1,
                    max / min
                ));
            }
        }
        if let Some(q) = stage.section.q.filter(|q| *q > PRACTICAL_Q_MAX) {
            out.push(format!(
                "stage {}: Q = {q:.1} is beyond what one op-amp stage holds in practice (about \
                 {PRACTICAL_Q_MAX}); its f0 and Q follow every part's tolerance; use tighter parts, \
                 or split the band",
                k + 1
            ));
        }
    }
    out
}

/// The family comparison for a mask, remembered for the last mask asked about: the page
/// recomposes on every keystroke, and the comparison (a search over orders for three families)
/// is most of the composer's time while the limits themselves rarely change.
fn family_comparison(class: ResponseClass, mask: &Mask, ripple: Option<f64>) -> Vec<FamilyOrder> {
    type Key = (ResponseClass, Mask, Option<f64>);
    thread_local! {
        static LAST: std::cell::RefCell<Option<(Key, Vec<FamilyOrder>)>> = const { std::cell::RefCell::new(None) };
    }
    let key: Key = (class, *mask, ripple);
    LAST.with(|last| {
        if let Some((k, rows)) = last.borrow().as_ref() {
            if *k == key {
                return rows.clone();
            }
        }
        let rows = order::compare_families(class, mask, ripple);
        *last.borrow_mut() = Some((key, rows.clone()));
        rows
    })
}

/// The widest plot span, Hz: the automatic span stops here, and a `span` from the link is
/// narrowed to it. Below 1e-4 Hz and above 1e11 Hz the analyses' powers of ω underflow or
/// overflow (a span from 1e-300 Hz made the whole tolerance study NaN).
const SPAN_BOUNDS_HZ: (f64, f64) = (1e-4, 1e11);

/// A span the link asked for, narrowed to [`SPAN_BOUNDS_HZ`], with a warning that says so and
/// to what when anything changed. A span wholly outside the bounds becomes the decade at the
/// bound it lies beyond.
fn clamp_span(asked: (f64, f64)) -> ((f64, f64), Option<String>) {
    let (min_hz, max_hz) = SPAN_BOUNDS_HZ;
    let (lo, hi) = asked;
    let mut span = (lo.clamp(min_hz, max_hz), hi.clamp(min_hz, max_hz));
    // Also false for a NaN bound, which then takes the top decade rather than staying NaN.
    let ordered = span.0 < span.1;
    if !ordered {
        span = if hi <= min_hz {
            (min_hz, 10.0 * min_hz)
        } else {
            (max_hz / 10.0, max_hz)
        };
    }
    if span == asked {
        return (span, None);
    }
    let hz = |f: f64| crate::units::format_si_unit(f, 4, "Hz");
    let note = format!(
        "span: {} … {} was narrowed to {} … {}, the widest span the analyses cover",
        hz(lo),
        hz(hi),
        hz(span.0),
        hz(span.1)
    );
    (span, Some(note))
}

/// The plot span: two decades below and above the frequencies that matter, on decade bounds.
fn auto_span(synthesis: &Synthesis, mask: Option<&Mask>) -> (f64, f64) {
    let mut key = vec![synthesis.fc_hz];
    if let Some(bw) = synthesis.bw_hz {
        key.push(synthesis.fc_hz + bw / 2.0);
        key.push((synthesis.fc_hz - bw / 2.0).max(synthesis.fc_hz / 10.0));
    }
    if let Some(m) = mask {
        for edge in [m.pass, m.stop] {
            match edge {
                Edge::Single(f) => key.push(f),
                Edge::Pair(lo, hi) => key.extend([lo, hi]),
            }
        }
    }
    let lo = key.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = key.iter().cloned().fold(0.0, f64::max);
    // A small allowance keeps 999.9999… Hz on the decade of 1 kHz.
    let lo = fmath::powf(10f64, (fmath::log10(lo / 100.0) + 1e-9).floor());
    let hi = fmath::powf(10f64, (fmath::log10(hi * 100.0) - 1e-9).ceil());
    (lo.max(SPAN_BOUNDS_HZ.0), hi.min(SPAN_BOUNDS_HZ.1))
}

/// The board with exact (unrounded) part values and an ideal op amp: the design as synthesized.
pub fn ideal_board(board: &Board) -> Board {
    let mut ideal = board.with_ideal_parts();
    ideal.op_amp = OpAmp::ideal();
    ideal
}

/// Internal points per decade on which the sweep's phase is unwrapped, whatever the requested
/// spacing: between neighbours 1/200 of a decade apart the phase of a 20th-order board moves far
/// less than half a turn.
pub const UNWRAP_POINTS_PER_DECADE: f64 = 200.0;

/// Gain, unwrapped phase and group delay of the board (or, with `ideal`, of [`ideal_board`]) at
/// `n_points` log-spaced frequencies, from the banded solve of the whole board
/// ([`BoardSolver::solve_with_slope`]: one factorization per point).
///
/// The phase is unwrapped along an internal grid of [`UNWRAP_POINTS_PER_DECADE`] from the first
/// frequency, so it does not depend on how many points are asked for (where the points are
/// closer than the grid, no extra solve is made). The group delay is −d(arg H)/dω = −Re(H'/H)
/// with H' = dH/ds from the same factorization as H.
///
/// # Errors
/// A message when the board equations are singular (the dense reference analysis names the
/// likely cause).
pub fn sweep(
    design: &Design,
    from_hz: f64,
    to_hz: f64,
    n_points: usize,
    ideal: bool,
) -> Result<Vec<SweepRow>, String> {
    let freqs =
        crate::response::log_frequencies(from_hz, to_hz, n_points).map_err(|e| e.to_string())?;
    let board = if ideal {
        ideal_board(&design.board)
    } else {
        design.board.clone()
    };
    let failed = |e: crate::analysis::circuit::AnalysisError| match e {
        crate::analysis::circuit::AnalysisError::Singular(m) => diagnose_singular(&board)
            .map(|cause| format!("singular circuit equations: {cause}"))
            .unwrap_or_else(|| format!("singular circuit equations: {m}")),
        other => other.to_string(),
    };
    let mut solver = BoardSolver::of_board(&board).map_err(failed)?;
    let mut rows = Vec::with_capacity(freqs.len());
    let mut previous: Option<(f64, Complex64, f64)> = None;
    for f in freqs {
        // One factorization per point gives H and dH/ds, so the delay −Re(H'/H) needs no
        // neighbouring solves.
        let (h, slope) = solver.solve_with_slope(f).map_err(failed)?;
        let delay_s = -(slope / h).re;
        let phase_rad = match previous {
            Some((f_prev, h_prev, phase_prev)) => {
                // Walk from the last point on the internal grid, adding each small change.
                let n_sub = (fmath::log10(f / f_prev) * UNWRAP_POINTS_PER_DECADE)
                    .ceil()
                    .max(1.0) as usize;
                let (mut phase, mut h_last) = (phase_prev, h_prev);
                for j in 1..n_sub {
                    let f_j = f_prev * fmath::powf(f / f_prev, j as f64 / n_sub as f64);
                    let h_j = solver.solve_at(f_j).map_err(failed)?;
                    phase += fmath::carg(h_j / h_last);
                    h_last = h_j;
                }
                phase + fmath::carg(h / h_last)
            }
            None => fmath::carg(h),
        };
        previous = Some((f, h, phase_rad));
        rows.push(SweepRow {
            freq_hz: f,
            gain_db: 20.0 * fmath::log10(fmath::cnorm(h)),
            phase_deg: phase_rad.to_degrees(),
            delay_s,
        });
    }
    Ok(rows)
}

/// The cause of a singular board, as the dense reference analysis names it (a node without a DC
/// path, a capacitor loop, an op amp without feedback); `None` when it finds the board solvable.
pub fn diagnose_singular(board: &Board) -> Option<String> {
    [0.0, 1.0, 1e3]
        .iter()
        .find_map(|&w| mna::board_response(board, Complex64::new(0.0, w)).err())
        .map(|e| e.message)
}

/// How the tolerance study reads a run's cutoff for this family: the ripple-band edge for
/// Chebyshev, −6.02 dB for Linkwitz-Riley, −3.01 dB otherwise.
pub fn cutoff_definition(family: Family) -> CutoffDefinition {
    CutoffDefinition::Attenuation {
        db: verdict::cutoff_level_db(family),
    }
}

/// The settings of the tolerance study the link asks for, over `n_points` frequencies.
pub fn study_settings(design: &Design, n_points: usize) -> Result<MonteCarloSettings, String> {
    let state = &design.state;
    let (lo, hi) = design.span_hz;
    let freqs_hz = crate::response::log_frequencies(lo, hi, n_points).map_err(|e| e.to_string())?;
    let distribution = match state.study.distribution {
        Distribution::Gaussian => PartDistribution::Gaussian {
            sigmas: state.study.sigmas,
        },
        Distribution::Uniform => PartDistribution::Uniform,
    };
    let class = state.requirement.class;
    let passband_ref_hz = passband_ref_hz(design);
    Ok(MonteCarloSettings {
        runs: state.study.runs,
        seed: state.study.seed,
        tolerances: Tolerances {
            distribution,
            resistor_pct: state.rtol_pct,
            capacitor_pct: state.ctol_pct,
            overrides: state
                .tolerance_overrides
                .iter()
                .map(|(reference, pct)| PartTolerance {
                    reference: reference.clone(),
                    pct: *pct,
                })
                .collect(),
        },
        freqs_hz,
        percentiles: vec![5.0, 50.0, 95.0],
        cutoff: cutoff_definition(state.requirement.family),
        class,
        reference_gain: fmath::powf(10f64, state.requirement.gain_db / 20.0),
        passband_ref_hz,
    })
}

/// Prepares the tolerance study of a design (chunked: call `step` until done, then `finish`).
///
/// # Errors
/// A message naming the setting or the circuit problem.
pub fn start_spread(design: &Design, n_points: usize) -> Result<MonteCarlo, String> {
    let settings = study_settings(design, n_points)?;
    MonteCarlo::new(
        &design.board,
        design.state.requirement.mask.as_ref(),
        settings,
    )
    .map_err(|e| e.to_string())
}

/// Runs the whole tolerance study of a design on the plot grid ([`PLOT_POINTS`]), as the page
/// does.
///
/// # Errors
/// As [`start_spread`].
pub fn spread(design: &Design) -> Result<Summary, String> {
    let mut study = start_spread(design, PLOT_POINTS)?;
    while !study.is_done() {
        study.step(1000);
    }
    Ok(study.finish())
}

/// The part tolerances the parts list states: `rtol`, `ctol` and each `tolset` override, the
/// values the tolerance study draws with ([`study_settings`]).
pub fn bom_tolerances(design: &Design) -> crate::export::bom::Tolerances {
    crate::export::bom::Tolerances {
        resistor_pct: design.state.rtol_pct,
        capacitor_pct: design.state.ctol_pct,
        overrides: design.state.tolerance_overrides.clone(),
    }
}

/// Every `tolset` reference must be a resistor or capacitor of the board, as every `set`
/// reference must (`Board::apply_overrides`): a tolerance for a part the board does not have is
/// bad input wherever the design is used, not only when the tolerance study starts.
///
/// # Errors
/// An [`InputError`] on `tolset` naming the reference and the parts the board has.
fn check_tolerance_parts(board: &Board, overrides: &[(String, f64)]) -> Result<(), InputError> {
    for (reference, _) in overrides {
        let part = board
            .parts()
            .into_iter()
            .find(|p| p.reference == *reference);
        match part.map(|p| p.kind) {
            Some(crate::netlist::PartKind::Resistor | crate::netlist::PartKind::Capacitor) => {}
            Some(crate::netlist::PartKind::OpAmp) => {
                return Err(InputError::new(
                    "tolset",
                    format!(
                        "{reference} is an op amp; tolerances are for resistors and capacitors"
                    ),
                ))
            }
            None => {
                return Err(InputError::new(
                    "tolset",
                    format!(
                        "{} is not a part of this board (it has {})",
                        crate::link::quoted(reference),
                        board.reference_summary()
                    ),
                ))
            }
        }
    }
    Ok(())
}

/// The `.ac` sweep written into the SPICE netlist: the plot span at 50 points per decade.
pub fn spice_sweep(design: &Design) -> crate::export::spice::AcSweep {
    crate::export::spice::AcSweep {
        points_per_decade: 50,
        f_start_hz: design.span_hz.0,
        f_stop_hz: design.span_hz.1,
    }
}

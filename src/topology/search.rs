//! Rounding a stage's ideal values to standard values: nearest value each, or a combination
//! search.
//!
//! The search takes, for each free part (the capacitors and a gain divider's ground resistor),
//! the nearest standard value and one neighbour either side; for every combination it re-solves
//! the dependent resistors exactly from the closed forms, then tries the standard values just
//! below and just above each of them. The combination with the least
//! e_f0² + e_Q² + e_gain² (relative errors, [`super::Achieved::cost`]) wins. Nearest rounding is
//! always among the candidates' neighbours and is kept when nothing beats it, so the search is
//! never worse than nearest rounding.
//!
//! The two legs of an input divider are one choice with several candidate pairs
//! (`divider::pair_choices`): the neighbours of each leg, and the other leg re-solved to
//! keep the Thevenin value or the ratio. Capacitor legs are free parts (the resistors are
//! re-solved from their sum), resistor legs are dependent parts (taken after the solve).

use super::divider::pair_choices;
use super::{Layout, Realization, Target};
use crate::choices::Rounding;
use crate::eseries::{PartClass, Series};
use crate::fmath;

/// Candidates per free part.
const FREE_CANDIDATES: usize = 3;
/// Candidates per dependent part.
const DEPENDENT_CANDIDATES: usize = 2;

fn series_of(class: PartClass, r_series: Series, c_series: Series) -> Series {
    match class {
        PartClass::Resistor => r_series,
        PartClass::Capacitor => c_series,
    }
}

/// Nearest standard value inside the buildable range (the nearest one may sit just outside).
fn nearest_in_range(series: Series, class: PartClass, value: f64) -> f64 {
    let nearest = series.nearest(value);
    if class.in_range(nearest) {
        return nearest;
    }
    series
        .candidates(value, 3, class)
        .into_iter()
        .min_by(|a, b| {
            let da = fmath::ln(a / value).abs();
            let db = fmath::ln(b / value).abs();
            da.total_cmp(&db)
        })
        .unwrap_or(value)
}

/// Every value rounded to its nearest standard value.
pub(crate) fn nearest(
    layout: &Layout,
    ideal: &[f64],
    r_series: Series,
    c_series: Series,
) -> Vec<f64> {
    layout
        .slots
        .iter()
        .zip(ideal)
        .map(|(slot, &v)| {
            nearest_in_range(series_of(slot.class, r_series, c_series), slot.class, v)
        })
        .collect()
}

/// One way to set some parts: (slot index, value) pairs.
type Choice = Vec<(usize, f64)>;

/// Calls `visit` with every combination of one entry from each list.
fn for_each_combination<T: Clone>(lists: &[Vec<T>], visit: &mut dyn FnMut(&[T])) {
    let mut pick = vec![0usize; lists.len()];
    if lists.iter().any(|l| l.is_empty()) {
        return;
    }
    let mut current: Vec<T> = lists.iter().map(|l| l[0].clone()).collect();
    loop {
        visit(&current);
        // Odometer increment.
        let mut pos = 0;
        loop {
            if pos == lists.len() {
                return;
            }
            pick[pos] += 1;
            if pick[pos] < lists[pos].len() {
                current[pos] = lists[pos][pick[pos]].clone();
                break;
            }
            pick[pos] = 0;
            current[pos] = lists[pos][0].clone();
            pos += 1;
        }
    }
}

/// The choices for the parts whose `free` flag is `free`, from `values`: the `n_near` standard
/// values near each part, and the divider pair (when its legs are of this kind) as pairs.
fn choices(
    layout: &Layout,
    values: &[f64],
    free: bool,
    n_near: usize,
    r_series: Series,
    c_series: Series,
) -> Vec<Vec<Choice>> {
    let divider = layout.divider.filter(|d| {
        layout
            .slots
            .get(d.upper)
            .is_some_and(|slot| slot.free == free)
    });
    let in_pair = |i: usize| divider.is_some_and(|d| i == d.upper || i == d.lower);
    let mut lists: Vec<Vec<Choice>> = layout
        .slots
        .iter()
        .enumerate()
        .filter(|(i, slot)| slot.free == free && !in_pair(*i))
        .map(|(i, slot)| {
            series_of(slot.class, r_series, c_series)
                .candidates(values[i], n_near, slot.class)
                .into_iter()
                .map(|v| vec![(i, v)])
                .collect()
        })
        .collect();
    if let Some(d) = divider {
        lists.push(pair_choices(
            &d,
            values[d.upper],
            values[d.lower],
            n_near,
            series_of(d.class, r_series, c_series),
        ));
    }
    lists
}

/// The combination search; `None` when no combination re-solves.
pub(crate) fn combination_search(
    realization: &dyn Realization,
    layout: &Layout,
    target: &Target,
    ideal: &[f64],
    r_series: Series,
    c_series: Series,
    hint: Option<f64>,
) -> Option<(Vec<f64>, f64)> {
    if ideal.len() != layout.slots.len() {
        return None;
    }
    let free_lists = choices(layout, ideal, true, FREE_CANDIDATES, r_series, c_series);
    let mut best: Option<(Vec<f64>, f64)> = None;
    for_each_combination(&free_lists, &mut |free_choice| {
        let mut values = ideal.to_vec();
        for &(i, v) in free_choice.iter().flatten() {
            values[i] = v;
        }
        if !realization.solve(target, &mut values, hint) {
            return;
        }
        let dep_lists = choices(
            layout,
            &values,
            false,
            DEPENDENT_CANDIDATES,
            r_series,
            c_series,
        );
        for_each_combination(&dep_lists, &mut |dep_choice| {
            let mut trial = values.clone();
            for &(i, v) in dep_choice.iter().flatten() {
                trial[i] = v;
            }
            let Some(achieved) = realization.achieved(&trial) else {
                return;
            };
            let cost = achieved.cost(target);
            if best.as_ref().map_or(true, |(_, c)| cost < *c) {
                best = Some((trial, cost));
            }
        });
    });
    best
}

/// Rounds the ideal values by the chosen method; returns the values and warnings.
#[allow(clippy::too_many_arguments)]
pub(crate) fn round(
    realization: &dyn Realization,
    layout: &Layout,
    target: &Target,
    ideal: &[f64],
    r_series: Series,
    c_series: Series,
    rounding: Rounding,
    hint: Option<f64>,
    stage_no: usize,
) -> (Vec<f64>, Vec<String>) {
    let mut warnings = Vec::new();
    let near = nearest(layout, ideal, r_series, c_series);
    let near_cost = realization
        .achieved(&near)
        .map_or(f64::INFINITY, |a| a.cost(target));
    let values = match rounding {
        Rounding::Nearest => near,
        Rounding::Search => {
            match combination_search(realization, layout, target, ideal, r_series, c_series, hint) {
                Some((found, cost)) if cost <= near_cost => found,
                Some(_) => near,
                None => {
                    warnings.push(format!(
                        "stage {stage_no}: no combination of neighbouring standard values could be \
                         re-solved; each part was rounded to its nearest value"
                    ));
                    near
                }
            }
        }
    };
    if let Some(achieved) = realization.achieved(&values) {
        let (ef, eq, eg) = achieved.errors(target);
        let eq_abs = eq.map_or(0.0, f64::abs);
        if ef.abs() > 0.01 || eq_abs > 0.02 {
            warnings.push(format!(
                "stage {stage_no}: standard values leave f0 {:+.2} %{} off target; a finer series \
                 (rser, cser) or round=search narrows it",
                100.0 * ef,
                eq.map_or(String::new(), |e| format!(" and Q {:+.2} %", 100.0 * e))
            ));
        }
        if eg.abs() > 0.01 {
            let series = match layout.divider {
                Some(d) if d.class == PartClass::Capacitor => "cser",
                _ => "rser, cser",
            };
            warnings.push(format!(
                "stage {stage_no}: standard values leave the gain {:+.2} % ({:+.3} dB) off \
                 target; a finer series ({series}) narrows it",
                100.0 * eg,
                20.0 * fmath::log10(1.0 + eg)
            ));
        }
    }
    (values, warnings)
}

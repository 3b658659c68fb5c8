//! The figures of a sampled step response: overshoot, rise time (10–90 %) and settling to 1 %
//! and 0.1 %, each level crossing on the parabola through three samples.

use super::StepFigures;

/// The instant where `y` crosses `level` between samples i−1 and i: the root of the parabola
/// through those two samples and the next one (the one before at the end), from the linear
/// interpolation by Newton's method. The parabola's error falls with the cube of the spacing
/// instead of the square, which matters where the crossing is near an extremum (a settling
/// band's last exit); the linear value is kept when the parabola has no root in the interval.
fn cross_time(t: &[f64], y: &[f64], i: usize, level: f64) -> f64 {
    if i == 0 {
        return t[0];
    }
    let (y0, y1) = (y[i - 1], y[i]);
    let frac = if y1 != y0 {
        (level - y0) / (y1 - y0)
    } else {
        0.0
    };
    let (ta, tb) = (t[i - 1], t[i]);
    let linear = ta + frac.clamp(0.0, 1.0) * (tb - ta);
    let k = if i + 1 < t.len() {
        i + 1
    } else if i >= 2 {
        i - 2
    } else {
        return linear;
    };
    let (tc, yc) = (t[k], y[k]);
    if !(tb > ta) || tc == ta || tc == tb {
        return linear;
    }
    // Newton form: p(s) = y0 + d1·(s − ta) + d2·(s − ta)·(s − tb).
    let d1 = (y1 - y0) / (tb - ta);
    let d2 = ((yc - y0) / (tc - ta) - d1) / (tc - tb);
    let mut s = linear;
    for _ in 0..4 {
        let value = y0 + d1 * (s - ta) + d2 * (s - ta) * (s - tb) - level;
        let slope = d1 + d2 * (2.0 * s - ta - tb);
        if slope == 0.0 || !slope.is_finite() {
            return linear;
        }
        s -= value / slope;
    }
    if s.is_finite() && s >= ta && s <= tb {
        s
    } else {
        linear
    }
}

/// The least final value, relative to the largest |y|, that a step response is measured against
/// (overshoot, rise); below it the response counts as returning to zero.
pub const FINAL_VALUE_FLOOR: f64 = 1e-3;

/// Overshoot, rise and settling figures of a sampled step response with final value `fv` (the
/// peak by a parabola through the largest sample and its neighbours).
pub fn step_figures(t: &[f64], y: &[f64], fv: f64) -> StepFigures {
    figures_with_peaks(t, y, fv, None, None)
}

/// [`step_figures`] with the largest `y/fv` and the largest `|y|` given (refined elsewhere);
/// a given peak below the samples' is not used.
pub(super) fn figures_with_peaks(
    t: &[f64],
    y: &[f64],
    fv: f64,
    peak_norm: Option<f64>,
    peak_abs_refined: Option<f64>,
) -> StepFigures {
    let sampled_abs = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let peak_abs = peak_abs_refined
        .filter(|p| p.is_finite())
        .map_or(sampled_abs, |p| p.max(sampled_abs));
    // A final value below a thousandth of the peak (−60 dB) is a response that returns to zero
    // (a band-pass, or a high-pass whose op amps leak a trace of DC through their finite gain):
    // an overshoot against it would read as millions of percent.
    let has_final = fv.abs() > FINAL_VALUE_FLOOR * peak_abs.max(1e-300);
    // Work with the response normalized to a positive final value.
    let (yn, height): (Vec<f64>, f64) = if has_final {
        (y.iter().map(|v| v / fv).collect(), 1.0)
    } else {
        (y.to_vec(), peak_abs)
    };
    let target = if has_final { 1.0 } else { 0.0 };
    let settle = |tol: f64| -> Option<f64> {
        let band = tol * height;
        let last_out = yn.iter().rposition(|v| (v - target).abs() > band)?;
        if last_out + 1 >= yn.len() {
            return None;
        }
        let i = last_out + 1;
        let level = if yn[last_out] > target {
            target + band
        } else {
            target - band
        };
        Some(cross_time(t, &yn, i, level))
    };
    let (overshoot, rise) = if has_final {
        // Peak by a parabola through the largest sample and its neighbours.
        let (imax, &vmax) =
            yn.iter()
                .enumerate()
                .fold((0, &f64::NEG_INFINITY), |(bi, bv), (i, v)| {
                    if v > bv {
                        (i, v)
                    } else {
                        (bi, bv)
                    }
                });
        let peak = if imax > 0 && imax + 1 < yn.len() {
            let (a, b, c) = (yn[imax - 1], vmax, yn[imax + 1]);
            let den = a - 2.0 * b + c;
            if den < 0.0 {
                b - (a - c) * (a - c) / (8.0 * den)
            } else {
                b
            }
        } else {
            vmax
        };
        let peak = match peak_norm.filter(|p| p.is_finite()) {
            Some(p) => p.max(vmax),
            None => peak,
        };
        let overshoot = ((peak - 1.0) * 100.0).max(0.0);
        let i10 = yn.iter().position(|&v| v >= 0.1);
        let i90 = yn.iter().position(|&v| v >= 0.9);
        let rise = match (i10, i90) {
            (Some(a), Some(b)) => Some(cross_time(t, &yn, b, 0.9) - cross_time(t, &yn, a, 0.1)),
            _ => None,
        };
        (Some(overshoot), rise)
    } else {
        (None, None)
    };
    StepFigures {
        final_value: fv,
        overshoot_pct: overshoot,
        rise_time_s: rise,
        settling_1pct_s: settle(0.01),
        settling_01pct_s: settle(0.001),
    }
}

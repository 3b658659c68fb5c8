//! Plot axes: the map from data to pixels (linear or logarithmic), tick placement and the
//! engineering-notation tick labels (written by the crate's one SI formatter,
//! [`crate::units::format_si_with`], with the typographic minus of figures).
//!
//! Tick placement follows common practice for engineering plots: a linear axis steps by 1, 2 or 5
//! times a power of ten; a logarithmic axis labels every decade and draws unlabelled grid lines at
//! 2 … 9 within each decade (1-2-5 labels when the axis spans less than about two decades).

use crate::fmath;
use serde::Serialize;

use crate::units::{format_si_unit_with, format_si_with, Minus};

/// How data values map onto an axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Scale {
    /// Pixel position proportional to the value.
    Linear,
    /// Pixel position proportional to log10 of the value; values ≤ 0 are not drawn.
    Log,
}

/// How tick labels are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum TickFormat {
    /// Engineering notation with SI prefixes (`1k`, `2.2M`, `470m`), for frequencies and times.
    Engineering,
    /// A plain decimal number with as many decimals as the tick step needs, for dB and degrees.
    Plain,
}

/// One axis of a figure: a range, a scale and how its ticks read.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Axis {
    /// Axis title in words, without the unit ("frequency").
    pub label: String,
    /// Unit symbol appended to readouts and the title ("Hz", "dB", "°", "s", "Ω"); may be empty.
    pub unit: String,
    /// Linear or logarithmic.
    pub scale: Scale,
    /// Lower end of the axis, in data units (> 0 for a log axis).
    pub min: f64,
    /// Upper end of the axis, in data units (> `min`).
    pub max: f64,
    /// How tick labels are written.
    pub format: TickFormat,
}

impl Axis {
    /// A linear axis over `[min, max]`.
    pub fn linear(label: &str, unit: &str, min: f64, max: f64, format: TickFormat) -> Axis {
        Axis {
            label: label.to_string(),
            unit: unit.to_string(),
            scale: Scale::Linear,
            min,
            max,
            format,
        }
    }

    /// A logarithmic axis over `[min, max]` with engineering labels.
    pub fn log(label: &str, unit: &str, min: f64, max: f64) -> Axis {
        Axis {
            label: label.to_string(),
            unit: unit.to_string(),
            scale: Scale::Log,
            min,
            max,
            format: TickFormat::Engineering,
        }
    }

    /// Returns the axis with a usable range: finite, `min < max`, and `min > 0` on a log axis.
    /// A degenerate range (all data equal, or no data) is widened around its value so that a plot
    /// of a constant still draws.
    pub fn sanitized(&self) -> Axis {
        let mut axis = self.clone();
        let (mut lo, mut hi) = (axis.min, axis.max);
        if !lo.is_finite() || !hi.is_finite() {
            (lo, hi) = match axis.scale {
                Scale::Linear => (-1.0, 1.0),
                Scale::Log => (1.0, 10.0),
            };
        }
        if lo > hi {
            std::mem::swap(&mut lo, &mut hi);
        }
        match axis.scale {
            Scale::Linear => {
                if hi - lo <= f64::EPSILON * hi.abs().max(lo.abs()).max(1e-300) {
                    let half = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
                    lo -= half;
                    hi += half;
                }
            }
            Scale::Log => {
                if hi <= 0.0 {
                    (lo, hi) = (1.0, 10.0);
                } else if lo <= 0.0 {
                    lo = hi / 1000.0;
                }
                if hi / lo < 1.0 + 1e-9 {
                    lo /= 2.0;
                    hi *= 2.0;
                }
            }
        }
        axis.min = lo;
        axis.max = hi;
        axis
    }

    /// The position of `value` along the axis as a fraction: 0 at `min`, 1 at `max`; `None` for a
    /// value the scale cannot show (non-finite, or ≤ 0 on a log axis). Values outside the range
    /// give fractions outside [0, 1]; the caller clips.
    ///
    /// Linear: t = (v − min)/(max − min). Log: t = log10(v/min)/log10(max/min).
    pub fn fraction(&self, value: f64) -> Option<f64> {
        if !value.is_finite() {
            return None;
        }
        match self.scale {
            Scale::Linear => Some((value - self.min) / (self.max - self.min)),
            Scale::Log => {
                if value <= 0.0 {
                    None
                } else {
                    Some(fmath::log10(value / self.min) / fmath::log10(self.max / self.min))
                }
            }
        }
    }

    /// The inverse of [`Axis::fraction`]: the data value at fraction `t` of the axis.
    pub fn value_at(&self, t: f64) -> f64 {
        match self.scale {
            Scale::Linear => self.min + t * (self.max - self.min),
            Scale::Log => self.min * fmath::powf(self.max / self.min, t),
        }
    }

    /// The ticks of the axis: labelled major ticks and unlabelled minor grid lines, all inside
    /// `[min, max]`, in ascending order.
    pub fn ticks(&self) -> Vec<Tick> {
        self.ticks_about(6)
    }

    /// Ticks with about `target` labelled steps on a linear axis; on a log axis a small target
    /// (below 4, for thumbnails) labels decades only.
    pub fn ticks_about(&self, target: usize) -> Vec<Tick> {
        match self.scale {
            Scale::Linear => linear_ticks(self.min, self.max, target, self.format),
            Scale::Log => log_ticks(self.min, self.max, self.format, target >= 4),
        }
    }

    /// The value written for a readout: engineering or plain with four significant digits, plus
    /// the unit.
    pub fn readout(&self, value: f64) -> String {
        let number = match self.format {
            TickFormat::Engineering => engineering(value, 4),
            TickFormat::Plain => fixed(value),
        };
        match self.format {
            TickFormat::Engineering => engineering_unit(value, 4, &self.unit),
            TickFormat::Plain if self.unit.is_empty() => number,
            TickFormat::Plain => format!("{number} {}", self.unit),
        }
    }
}

/// A tick on an axis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Tick {
    /// Where, in data units.
    pub value: f64,
    /// The label; `None` for a minor grid line.
    pub label: Option<String>,
}

/// "Nice" step of 1, 2 or 5 × 10^k nearest to `raw` from above (common practice for axes).
fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let power = fmath::powf(10f64, fmath::log10(raw).floor());
    let mantissa = raw / power;
    let nice = if mantissa <= 1.0 {
        1.0
    } else if mantissa <= 2.0 {
        2.0
    } else if mantissa <= 5.0 {
        5.0
    } else {
        10.0
    };
    nice * power
}

/// Linear ticks with about `target` labelled steps over `[min, max]`.
fn linear_ticks(min: f64, max: f64, target: usize, format: TickFormat) -> Vec<Tick> {
    let step = nice_step((max - min) / target.max(1) as f64);
    let first = (min / step).ceil() as i64;
    let last = (max / step).floor() as i64;
    let decimals = if step >= 1.0 {
        0
    } else {
        (-fmath::log10(step)).ceil().max(0.0) as usize
    };
    // A bounded loop: the step is at least (max − min)/target, so there are at most target + 1.
    (first..=last.min(first + 100))
        .map(|index| {
            // Rounding the product keeps labels like 0.30000000000000004 out of the plot.
            let value = index as f64 * step;
            let value = if value.abs() < step * 1e-9 {
                0.0
            } else {
                value
            };
            let label = match format {
                TickFormat::Plain => format!("{value:.decimals$}").replace('-', "−"),
                TickFormat::Engineering => engineering(value, 3),
            };
            Tick {
                value,
                label: Some(label),
            }
        })
        .collect()
}

/// Logarithmic ticks: decades labelled, 2 … 9 as grid lines; with less than two decades the
/// 2 and 5 lines are labelled too, so a narrow axis still reads.
fn log_ticks(min: f64, max: f64, format: TickFormat, allow_125: bool) -> Vec<Tick> {
    let decades = fmath::log10(max / min);
    let label_125 = allow_125 && decades < 2.2;
    let first = fmath::log10(min).floor() as i32;
    let last = fmath::log10(max).ceil() as i32;
    // A narrow (thumbnail) axis over many decades labels every second or third decade only.
    let every = if allow_125 || decades <= 4.5 {
        1
    } else if decades <= 7.5 {
        2
    } else {
        3
    };
    let mut ticks = Vec::new();
    for exponent in first..=last.min(first + 40) {
        let decade = fmath::powi(10f64, exponent);
        for digit in 1..=9 {
            let value = decade * digit as f64;
            if value < min * (1.0 - 1e-9) || value > max * (1.0 + 1e-9) {
                continue;
            }
            let labelled = (digit == 1 && exponent.rem_euclid(every) == 0)
                || (label_125 && (digit == 2 || digit == 5));
            let label = labelled.then(|| match format {
                TickFormat::Engineering => engineering(value, 3),
                TickFormat::Plain => significant(value, 3),
            });
            ticks.push(Tick { value, label });
        }
    }
    ticks
}

/// Formats `value` for a figure in engineering notation with `digits` significant digits and an
/// SI prefix (f p n µ m – k M G T), trimming trailing zeros: 1000 → "1k", 2.2e-9 → "2.2n",
/// 0 → "0", −0.25 → "−250m". A thin wrapper: [`crate::units::format_si_with`] with the
/// typographic minus ([`Minus::Typographic`]), NaN as "–".
pub fn engineering(value: f64, digits: usize) -> String {
    format_si_with(value, digits, Minus::Typographic)
}

/// Formats `value` for a figure in engineering notation followed by a space, the prefix and the
/// unit, as the SI writes quantities: 2000 Hz → "2 kHz", 4990 Ω → "4.99 kΩ", 0.25 s → "250 ms". An
/// empty unit gives the number with its prefix alone. A thin wrapper:
/// [`crate::units::format_si_unit_with`] with the typographic minus.
pub fn engineering_unit(value: f64, digits: usize, unit: &str) -> String {
    format_si_unit_with(value, digits, unit, Minus::Typographic)
}

/// A plain readout value (dB, degrees): three decimals below 10, two below 100, one above, so that
/// a passband a thousandth of a dB off reads as 0.001 rather than in exponent form.
fn fixed(value: f64) -> String {
    if !value.is_finite() {
        return engineering(value, 4);
    }
    let decimals = match value.abs() {
        m if m < 10.0 => 3,
        m if m < 100.0 => 2,
        _ => 1,
    };
    let text = format!("{value:.decimals$}");
    // −0.000 reads as 0.000.
    let text = if text
        .trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        text.trim_start_matches('-').to_string()
    } else {
        text
    };
    text.replace('-', "−")
}

/// Formats `value` with `digits` significant digits in plain decimal notation (no exponent for
/// magnitudes between 1e-4 and 1e9), trimming trailing zeros.
pub fn significant(value: f64, digits: usize) -> String {
    if value == 0.0 {
        return "0".to_string();
    }
    if !value.is_finite() {
        return engineering(value, digits);
    }
    let magnitude = value.abs();
    if !(1e-4..1e9).contains(&magnitude) {
        return format!("{value:.*e}", digits.saturating_sub(1));
    }
    let int_digits = fmath::log10(magnitude).floor() as i32 + 1;
    let decimals = (digits as i32 - int_digits).max(0) as usize;
    let mut text = format!("{magnitude:.decimals$}");
    if text.contains('.') {
        text = text.trim_end_matches('0').trim_end_matches('.').to_string();
    }
    let sign = if value < 0.0 { "−" } else { "" };
    format!("{sign}{text}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_fraction_puts_each_decade_at_an_equal_share() {
        // Definition of a logarithmic axis: 10 Hz … 100 kHz spans four decades, so 1 kHz is at
        // exactly one half (tolerance: f64 rounding, 1e-12).
        let axis = Axis::log("frequency", "Hz", 10.0, 100e3);
        let half = axis.fraction(1e3).unwrap_or(f64::NAN);
        assert!((half - 0.5).abs() < 1e-12, "1 kHz at {half}, expected 0.5");
        let quarter = axis.fraction(100.0).unwrap_or(f64::NAN);
        assert!((quarter - 0.25).abs() < 1e-12, "100 Hz at {quarter}");
        assert_eq!(axis.fraction(0.0), None, "zero has no place on a log axis");
        let back = axis.value_at(0.5);
        assert!((back - 1e3).abs() < 1e-9, "inverse gave {back}");
    }

    #[test]
    fn linear_ticks_step_by_one_two_or_five() {
        // Common practice: steps of 1, 2 or 5 × 10^k. −80 … 5 dB with six targets → 20 dB steps.
        let axis = Axis::linear("gain", "dB", -80.0, 5.0, TickFormat::Plain);
        let labels: Vec<String> = axis.ticks().into_iter().filter_map(|t| t.label).collect();
        assert_eq!(labels, ["−80", "−60", "−40", "−20", "0"]);
    }

    #[test]
    fn log_ticks_label_decades_and_grid_the_rest() {
        let axis = Axis::log("frequency", "Hz", 10.0, 100e3);
        let ticks = axis.ticks();
        let labels: Vec<String> = ticks.iter().filter_map(|t| t.label.clone()).collect();
        assert_eq!(labels, ["10", "100", "1k", "10k", "100k"]);
        // Four full decades of 2 … 9 grid lines plus the five decade lines.
        assert_eq!(ticks.len(), 4 * 9 + 1);
    }

    #[test]
    fn engineering_notation_uses_si_prefixes() {
        // SI prefixes (BIPM SI brochure): k = 1e3, n = 1e-9, µ = 1e-6, M = 1e6.
        assert_eq!(engineering(1000.0, 3), "1k");
        assert_eq!(engineering(2.2e-9, 3), "2.2n");
        assert_eq!(engineering(4.7e-6, 3), "4.7µ");
        assert_eq!(engineering(1.5e6, 3), "1.5M");
        assert_eq!(engineering(999.96, 4), "1k");
        assert_eq!(engineering(-0.25, 3), "−250m");
        assert_eq!(engineering(123.456, 4), "123.5");
        assert_eq!(engineering_unit(2000.0, 4, "Hz"), "2 kHz");
        assert_eq!(engineering_unit(4990.0, 3, "Ω"), "4.99 kΩ");
        assert_eq!(engineering_unit(100.0, 3, "Hz"), "100 Hz");
        assert_eq!(engineering_unit(2.2e-9, 3, "F"), "2.2 nF");
    }

    #[test]
    fn degenerate_ranges_are_widened_not_divided_by_zero() {
        let flat = Axis::linear("gain", "dB", 3.0, 3.0, TickFormat::Plain).sanitized();
        assert!(flat.min < 3.0 && flat.max > 3.0, "{flat:?}");
        let bad_log = Axis::log("frequency", "Hz", -5.0, 100.0).sanitized();
        assert!(bad_log.min > 0.0 && bad_log.min < 100.0, "{bad_log:?}");
    }
}

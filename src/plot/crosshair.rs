//! The crosshair readout: a figure read back at a pointer position, the axis values under it and
//! each line's value interpolated at that x.

use crate::fmath;
use serde::Serialize;

use super::axis::Axis;
use super::figure::{Figure, Frame, Layer};
use super::Look;

/// What the crosshair shows at a pointer position.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Readout {
    /// The x axis value under the pointer, formatted with its unit.
    pub x: String,
    /// The y axis value under the pointer, formatted with its unit.
    pub y: String,
    /// One entry per line, bar or nearby mark layer.
    pub entries: Vec<ReadoutEntry>,
}

/// One line of the readout.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReadoutEntry {
    /// The layer's label.
    pub label: String,
    /// The value, formatted with its unit.
    pub value: String,
}

/// Reads the figure at backend pixel `(px, py)` of a `width` × `height` canvas: the axis values
/// under the pointer and each line's value interpolated at that x (linear in the axis scales).
/// `None` when the pointer is outside the plot area.
pub fn readout(
    figure: &Figure,
    width: u32,
    height: u32,
    look: &Look,
    px: f64,
    py: f64,
) -> Option<Readout> {
    let scale = look.scale_clamped();
    let frame = Frame::new(width, height, look);
    if !frame.contains(px, py) {
        return None;
    }
    let x_axis = figure.x.sanitized();
    let y_axis = figure.y.sanitized();
    let x = frame.x_value(&x_axis, px);
    let y = frame.y_value(&y_axis, py);
    let mut entries = Vec::new();
    for layer in &figure.layers {
        match layer {
            Layer::Line { label, points, .. } if !label.is_empty() => {
                if let Some(value) = interpolate(&x_axis, points, x) {
                    entries.push(ReadoutEntry {
                        label: label.clone(),
                        value: y_axis.readout(value),
                    });
                }
            }
            Layer::Band {
                label,
                x: xs,
                lower,
                upper,
                ..
            } if !label.is_empty() => {
                let lo: Vec<(f64, f64)> = xs.iter().copied().zip(lower.iter().copied()).collect();
                let hi: Vec<(f64, f64)> = xs.iter().copied().zip(upper.iter().copied()).collect();
                if let (Some(a), Some(b)) =
                    (interpolate(&x_axis, &lo, x), interpolate(&x_axis, &hi, x))
                {
                    entries.push(ReadoutEntry {
                        label: label.clone(),
                        value: format!("{} … {}", y_axis.readout(a), y_axis.readout(b)),
                    });
                }
            }
            Layer::Bars {
                label,
                edges,
                counts,
                ..
            } => {
                let bin = edges.windows(2).position(|w| x >= w[0] && x < w[1]);
                if let (Some(index), Some(w)) = (bin, bin.and_then(|i| edges.get(i..i + 2))) {
                    let count = counts.get(index).copied().unwrap_or(0.0);
                    entries.push(ReadoutEntry {
                        label: format!(
                            "{label} {} … {}",
                            x_axis.readout(w[0]),
                            x_axis.readout(w[1])
                        ),
                        value: y_axis.readout(count),
                    });
                }
            }
            Layer::Marks { label, points, .. } => {
                let near = 10.0 * scale.clamp(0.5, 4.0);
                let nearest = points
                    .iter()
                    .filter_map(|&(mx, my)| {
                        let (qx, qy) = (frame.px(&x_axis, mx)?, frame.py(&y_axis, my)?);
                        let d = fmath::hypot(qx - px, qy - py);
                        (d <= near).then_some((d, mx, my))
                    })
                    .min_by(|a, b| a.0.total_cmp(&b.0));
                if let Some((_, mx, my)) = nearest {
                    entries.push(ReadoutEntry {
                        label: label.clone(),
                        value: format!("{}, {}", x_axis.readout(mx), y_axis.readout(my)),
                    });
                }
            }
            _ => {}
        }
    }
    Some(Readout {
        x: x_axis.readout(x),
        y: y_axis.readout(y),
        entries,
    })
}

/// Linear interpolation of y at `x` between the samples around it, with x measured in the axis
/// scale (log10 for a log axis) so that straight segments on the plot read straight. `None`
/// outside the sampled range or across a gap (non-finite sample).
fn interpolate(axis: &Axis, points: &[(f64, f64)], x: f64) -> Option<f64> {
    let t = axis.fraction(x)?;
    for pair in points.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let (ta, tb) = (axis.fraction(a.0)?, axis.fraction(b.0)?);
        if t >= ta.min(tb) && t <= ta.max(tb) {
            if !(a.1.is_finite() && b.1.is_finite()) {
                return None;
            }
            if (tb - ta).abs() < 1e-15 {
                return Some(a.1);
            }
            let u = (t - ta) / (tb - ta);
            return Some(a.1 + u * (b.1 - a.1));
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::figure::fixture::{sample_figure, LOOK};

    #[test]
    fn readout_interpolates_the_line_under_the_pointer() {
        let figure = sample_figure();
        let (w, h) = (600u32, 300u32);
        let frame = Frame::new(w, h, &LOOK);
        // The pointer at the 1 kHz column, which is exactly half-way along the log axis.
        let px = (frame.left + frame.right) / 2.0;
        let read = readout(&figure, w, h, &LOOK, px, frame.top + 10.0);
        let read = read.unwrap_or_else(|| panic!("pointer inside the frame gave no readout"));
        assert_eq!(read.x, "1 kHz");
        let built = read.entries.iter().find(|e| e.label == "built");
        // A first-order low-pass is 3.01 dB down at its corner (10·log10 2, circuit theory).
        assert_eq!(built.map(|e| e.value.as_str()), Some("−3.010 dB"));
        assert_eq!(
            readout(&figure, w, h, &LOOK, 1.0, 1.0),
            None,
            "margin is outside"
        );
    }
}

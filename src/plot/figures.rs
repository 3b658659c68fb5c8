//! The figures of the design sheet, built from plain curves: gain with the specification mask and
//! the tolerance envelope, phase, group delay, step response, pole-zero map, input impedance, noise
//! density, stage levels and the tolerance histograms.
//!
//! The builders take [`PlotData`] (vectors of numbers and the mask) rather than the analysis
//! types, so the page and the command line make the same figures from whatever analyses they ran,
//! and a missing analysis gives a figure with a note instead of an error.

use crate::fmath;
use num_complex::Complex64;
use serde::Serialize;

use super::axis::{Axis, TickFormat};
use super::figure::{Figure, Layer, Orientation, Shape, Weight};
use super::Ink;
use crate::spec::{Edge, Mask, ResponseClass};

/// Which figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub enum PlotKind {
    /// Gain against frequency with mask and envelope (`magnitude`).
    Magnitude,
    /// Unwrapped phase against frequency (`phase`).
    Phase,
    /// Group delay against frequency (`delay`).
    Delay,
    /// Step response against time (`step`).
    Step,
    /// Pole-zero map, target beside achieved (`poles`).
    Poles,
    /// Input impedance magnitude against frequency (`impedance`).
    Impedance,
    /// Output noise density against frequency (`noise`).
    Noise,
    /// Each stage's output level against frequency (`levels`).
    Levels,
    /// Histogram of the cutoff over the tolerance study (`hist-cutoff`).
    HistCutoff,
    /// Histogram of the passband gain over the tolerance study (`hist-gain`).
    HistGain,
}

impl PlotKind {
    /// Every kind, in the order the page shows them.
    pub const ALL: [PlotKind; 10] = [
        PlotKind::Magnitude,
        PlotKind::Phase,
        PlotKind::Delay,
        PlotKind::Step,
        PlotKind::Poles,
        PlotKind::Impedance,
        PlotKind::Noise,
        PlotKind::Levels,
        PlotKind::HistCutoff,
        PlotKind::HistGain,
    ];

    /// The name used by the page and the command line's `plot --kind`.
    pub fn key(self) -> &'static str {
        match self {
            PlotKind::Magnitude => "magnitude",
            PlotKind::Phase => "phase",
            PlotKind::Delay => "delay",
            PlotKind::Step => "step",
            PlotKind::Poles => "poles",
            PlotKind::Impedance => "impedance",
            PlotKind::Noise => "noise",
            PlotKind::Levels => "levels",
            PlotKind::HistCutoff => "hist-cutoff",
            PlotKind::HistGain => "hist-gain",
        }
    }

    /// The kind for a name, `None` for an unknown one.
    pub fn from_key(key: &str) -> Option<PlotKind> {
        PlotKind::ALL.into_iter().find(|k| k.key() == key)
    }
}

/// A frequency sweep of one response.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Sweep {
    /// Frequencies, Hz, ascending.
    pub freq_hz: Vec<f64>,
    /// Gain, dB.
    pub gain_db: Vec<f64>,
    /// Unwrapped phase, degrees.
    pub phase_deg: Vec<f64>,
    /// Group delay, s.
    pub delay_s: Vec<f64>,
}

/// A named curve sampled on some x grid.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Curve {
    /// Legend label.
    pub label: String,
    /// x samples.
    pub x: Vec<f64>,
    /// y samples.
    pub y: Vec<f64>,
}

/// A histogram with its reference lines.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Histogram {
    /// Bin edges, ascending (one more than `counts`).
    pub edges: Vec<f64>,
    /// Runs per bin.
    pub counts: Vec<f64>,
    /// The nominal value (the design with exact parts as rounded), drawn as a guide.
    pub nominal: Option<f64>,
    /// Limits to draw as guides, with labels (for example the mask's edge).
    pub limits: Vec<(String, f64)>,
}

/// Everything the figures draw. Optional parts are drawn when present; a figure whose data is
/// absent says so in its note.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PlotData {
    /// Low-, high- or band-pass (places the mask).
    pub class: Option<ResponseClass>,
    /// Overall passband gain, dB (the mask's reference).
    pub gain_db: f64,
    /// The specification mask.
    pub mask: Option<Mask>,
    /// Ideal response (exact sections, ideal op amp).
    pub ideal: Sweep,
    /// The board as built (rounded parts, op-amp model).
    pub built: Option<Sweep>,
    /// Tolerance envelope of the built gain (lower, upper), dB, on `ideal.freq_hz`.
    pub envelope_db: Option<(Vec<f64>, Vec<f64>)>,
    /// Label for the envelope ("tolerance 1–99 %").
    pub envelope_label: String,
    /// Target poles, s-plane divided by 2π (Hz).
    pub target_poles_hz: Vec<Complex64>,
    /// Achieved poles of the built board, Hz.
    pub built_poles_hz: Vec<Complex64>,
    /// Finite zeros, Hz (zeros at the origin included once each).
    pub zeros_hz: Vec<Complex64>,
    /// Ideal step response: time (s), output (V per V of step).
    pub step_ideal: Option<Curve>,
    /// Built step response.
    pub step_built: Option<Curve>,
    /// Input impedance magnitude, Ω, against frequency.
    pub impedance: Option<Curve>,
    /// Total output noise density (V/√Hz) against frequency.
    pub noise_total: Option<Curve>,
    /// Largest contributors to the output noise density.
    pub noise_parts: Vec<Curve>,
    /// Each stage's output level relative to the input, dB.
    pub levels: Vec<Curve>,
    /// The op-amp swing limit relative to the input amplitude, dB.
    pub level_limit_db: Option<f64>,
    /// Cutoff histogram (Hz), or with `hist_cutoff_is_depth` the stopband depth histogram (dB)
    /// of a study without a cutoff (a band-stop: how deep its notch stays across the stop band).
    pub hist_cutoff: Option<Histogram>,
    /// `hist_cutoff` holds the stopband depth, dB.
    pub hist_cutoff_is_depth: bool,
    /// Passband gain histogram (dB).
    pub hist_gain: Option<Histogram>,
}

fn finite_range(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    values
        .filter(|v| v.is_finite())
        .fold(None, |acc, v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// A linear range around `lo … hi` padded by `pad` of the span, at least `min_span` wide.
fn padded(lo: f64, hi: f64, pad: f64, min_span: f64) -> (f64, f64) {
    let span = (hi - lo).max(min_span);
    let mid = (lo + hi) / 2.0;
    let half = span / 2.0 * (1.0 + 2.0 * pad);
    (mid - half, mid + half)
}

fn freq_axis(data: &PlotData) -> Axis {
    let (lo, hi) = finite_range(data.ideal.freq_hz.iter().copied()).unwrap_or((10.0, 100e3));
    Axis::log("frequency", "Hz", lo, hi)
}

fn line(label: &str, ink: Ink, weight: Weight, x: &[f64], y: &[f64]) -> Layer {
    Layer::Line {
        label: label.to_string(),
        ink,
        weight,
        points: x.iter().copied().zip(y.iter().copied()).collect(),
    }
}

fn edges_of(edge: Edge) -> (f64, f64) {
    match edge {
        Edge::Single(f) => (f, f),
        Edge::Pair(lo, hi) => (lo, hi),
    }
}

/// The forbidden regions of a mask, relative to the passband gain `gain_db`: below
/// `gain − apass` inside the passband, above `gain − astop` inside the stopband(s).
pub fn mask_regions(class: ResponseClass, mask: &Mask, gain_db: f64) -> Vec<Layer> {
    let floor = gain_db - mask.apass_db;
    let ceiling = gain_db - mask.astop_db;
    let label = "limits";
    let region = |x0: f64, x1: f64, y0: f64, y1: f64| Layer::Region {
        label: label.to_string(),
        x0,
        x1,
        y0,
        y1,
    };
    let (p_lo, p_hi) = edges_of(mask.pass);
    let (s_lo, s_hi) = edges_of(mask.stop);
    let inf = f64::INFINITY;
    match class {
        ResponseClass::LowPass => vec![
            region(-inf, p_hi, -inf, floor),
            region(s_lo, inf, ceiling, inf),
        ],
        ResponseClass::HighPass => vec![
            region(p_lo, inf, -inf, floor),
            region(-inf, s_hi, ceiling, inf),
        ],
        ResponseClass::BandPass => vec![
            region(p_lo, p_hi, -inf, floor),
            region(-inf, s_lo, ceiling, inf),
            region(s_hi, inf, ceiling, inf),
        ],
        ResponseClass::BandStop => vec![
            region(-inf, p_lo, -inf, floor),
            region(p_hi, inf, -inf, floor),
            region(s_lo, s_hi, ceiling, inf),
        ],
    }
}

/// Builds the figure of `kind` from `data`.
pub fn build(kind: PlotKind, data: &PlotData) -> Figure {
    match kind {
        PlotKind::Magnitude => magnitude(data),
        PlotKind::Phase => frequency_plot(
            data,
            "phase",
            Axis::linear("phase", "°", -180.0, 180.0, TickFormat::Plain),
            |s| &s.phase_deg,
            0.0,
        ),
        PlotKind::Delay => frequency_plot(
            data,
            "group delay",
            Axis::linear("delay", "s", 0.0, 1.0, TickFormat::Engineering),
            |s| &s.delay_s,
            0.0,
        ),
        PlotKind::Step => step(data),
        PlotKind::Poles => poles(data),
        PlotKind::Impedance => impedance(data),
        PlotKind::Noise => noise(data),
        PlotKind::Levels => levels(data),
        PlotKind::HistCutoff if data.hist_cutoff_is_depth => histogram(
            data.hist_cutoff.as_ref(),
            "stopband depth spread",
            Axis::linear("depth", "dB", 0.0, 1.0, TickFormat::Plain),
            0.0,
        ),
        PlotKind::HistCutoff => histogram(
            data.hist_cutoff.as_ref(),
            "cutoff spread",
            Axis::linear("cutoff", "Hz", 0.0, 1.0, TickFormat::Engineering),
            1e-3,
        ),
        PlotKind::HistGain => histogram(
            data.hist_gain.as_ref(),
            "passband gain spread",
            Axis::linear("passband gain", "dB", 0.0, 1.0, TickFormat::Plain),
            0.0,
        ),
    }
}

fn magnitude(data: &PlotData) -> Figure {
    let x = freq_axis(data);
    let mut layers = Vec::new();
    if let (Some(class), Some(mask)) = (data.class, data.mask.as_ref()) {
        layers.extend(mask_regions(class, mask, data.gain_db));
    }
    let f = &data.ideal.freq_hz;
    if let Some((lo, hi)) = &data.envelope_db {
        layers.push(Layer::Band {
            label: data.envelope_label.clone(),
            ink: Ink::Built,
            x: f.clone(),
            lower: lo.clone(),
            upper: hi.clone(),
        });
    }
    layers.push(line(
        "ideal",
        Ink::Ideal,
        Weight::Thin,
        f,
        &data.ideal.gain_db,
    ));
    if let Some(built) = &data.built {
        layers.push(line(
            "built",
            Ink::Built,
            Weight::Bold,
            &built.freq_hz,
            &built.gain_db,
        ));
    }
    // The top shows the passband with room for peaking; the bottom reaches past the stopband depth.
    let peak = finite_range(
        data.ideal
            .gain_db
            .iter()
            .chain(data.built.iter().flat_map(|b| b.gain_db.iter()))
            .copied(),
    )
    .map(|(_, hi)| hi)
    .unwrap_or(data.gain_db);
    let depth = data
        .mask
        .map(|m| m.astop_db + 20.0)
        .unwrap_or(60.0)
        .clamp(40.0, 160.0);
    let top = (peak.max(data.gain_db) + 6.0).ceil();
    let bottom = data.gain_db - depth;
    Figure {
        title: "gain".into(),
        x,
        y: Axis::linear("gain", "dB", bottom, top, TickFormat::Plain),
        layers,
        empty_note: data
            .ideal
            .freq_hz
            .is_empty()
            .then(|| "no design".to_string()),
    }
}

fn frequency_plot(
    data: &PlotData,
    title: &str,
    mut y: Axis,
    pick: impl Fn(&Sweep) -> &Vec<f64>,
    floor: f64,
) -> Figure {
    let x = freq_axis(data);
    let mut layers = vec![line(
        "ideal",
        Ink::Ideal,
        Weight::Thin,
        &data.ideal.freq_hz,
        pick(&data.ideal),
    )];
    if let Some(built) = &data.built {
        layers.push(line(
            "built",
            Ink::Built,
            Weight::Bold,
            &built.freq_hz,
            pick(built),
        ));
    }
    let values = pick(&data.ideal)
        .iter()
        .chain(data.built.iter().flat_map(|b| pick(b).iter()))
        .copied();
    if let Some((lo, hi)) = finite_range(values) {
        let lo = if y.unit == "s" { lo.min(floor) } else { lo };
        let (a, b) = padded(lo, hi, 0.06, if y.unit == "s" { 1e-12 } else { 10.0 });
        y.min = if y.unit == "s" {
            a.max(floor.min(lo))
        } else {
            a
        };
        y.max = b;
    }
    Figure {
        title: title.into(),
        x,
        y,
        layers,
        empty_note: data
            .ideal
            .freq_hz
            .is_empty()
            .then(|| "no design".to_string()),
    }
}

fn step(data: &PlotData) -> Figure {
    let mut layers = Vec::new();
    let mut t_max: f64 = 0.0;
    let mut range: Option<(f64, f64)> = None;
    for (curve, ink, weight, label) in [
        (&data.step_ideal, Ink::Ideal, Weight::Thin, "ideal"),
        (&data.step_built, Ink::Built, Weight::Bold, "built"),
    ] {
        if let Some(c) = curve {
            layers.push(line(label, ink, weight, &c.x, &c.y));
            if let Some((_, hi)) = finite_range(c.x.iter().copied()) {
                t_max = t_max.max(hi);
            }
            if let Some((lo, hi)) = finite_range(c.y.iter().copied()) {
                range = Some(match range {
                    None => (lo, hi),
                    Some((a, b)) => (a.min(lo), b.max(hi)),
                });
            }
        }
    }
    let (lo, hi) = range.unwrap_or((0.0, 1.0));
    let (lo, hi) = padded(lo.min(0.0), hi, 0.05, 0.1);
    Figure {
        title: "step response".into(),
        x: Axis::linear(
            "time",
            "s",
            0.0,
            if t_max > 0.0 { t_max } else { 1.0 },
            TickFormat::Engineering,
        ),
        y: Axis::linear("output", "V/V", lo, hi, TickFormat::Plain),
        layers,
        empty_note: (data.step_ideal.is_none() && data.step_built.is_none())
            .then(|| "step response not computed".to_string()),
    }
}

fn poles(data: &PlotData) -> Figure {
    // The view is sized on the target poles: the op amp adds poles near its GBW, far outside,
    // which would squash the filter's own poles into the origin (they are left off the view).
    let reference = if data.target_poles_hz.is_empty() {
        &data.built_poles_hz
    } else {
        &data.target_poles_hz
    };
    let reach = reference
        .iter()
        .map(|p| p.re.abs().max(p.im.abs()))
        .filter(|v| v.is_finite())
        .fold(0.0_f64, f64::max);
    let reach = if reach > 0.0 { reach * 1.25 } else { 1.0 };
    let to_points = |v: &[Complex64]| v.iter().map(|p| (p.re, p.im)).collect::<Vec<_>>();
    let mut layers = vec![
        Layer::Guide {
            label: String::new(),
            ink: Ink::Muted,
            orientation: Orientation::Vertical,
            at: 0.0,
        },
        Layer::Guide {
            label: String::new(),
            ink: Ink::Muted,
            orientation: Orientation::Horizontal,
            at: 0.0,
        },
    ];
    if !data.zeros_hz.is_empty() {
        layers.push(Layer::Marks {
            label: "zero".into(),
            ink: Ink::Muted,
            shape: Shape::Ring,
            points: to_points(&data.zeros_hz),
        });
    }
    layers.push(Layer::Marks {
        label: "target pole".into(),
        ink: Ink::Target,
        shape: Shape::Ring,
        points: to_points(&data.target_poles_hz),
    });
    if !data.built_poles_hz.is_empty() {
        layers.push(Layer::Marks {
            label: "built pole".into(),
            ink: Ink::Built,
            shape: Shape::Cross,
            points: to_points(&data.built_poles_hz),
        });
    }
    Figure {
        title: "poles and zeros (s / 2π)".into(),
        x: Axis::linear("real", "Hz", -reach, reach * 0.35, TickFormat::Engineering),
        y: Axis::linear("imaginary", "Hz", -reach, reach, TickFormat::Engineering),
        layers,
        empty_note: data
            .target_poles_hz
            .is_empty()
            .then(|| "no design".to_string()),
    }
}

fn impedance(data: &PlotData) -> Figure {
    let x = freq_axis(data);
    let mut layers = Vec::new();
    let mut y = Axis::log("|Z in|", "Ω", 100.0, 1e6);
    if let Some(c) = &data.impedance {
        layers.push(line(&c.label, Ink::Built, Weight::Bold, &c.x, &c.y));
        if let Some((lo, hi)) = finite_range(c.y.iter().copied().filter(|v| *v > 0.0)) {
            let lo_decade = fmath::powf(10f64, fmath::log10(lo).floor());
            let hi_decade = fmath::powf(10f64, fmath::log10(hi).ceil());
            y.min = lo_decade;
            y.max = if hi_decade > lo_decade * 9.99 {
                hi_decade
            } else {
                lo_decade * 100.0
            };
        }
    }
    Figure {
        title: "input impedance".into(),
        x,
        y,
        layers,
        empty_note: data
            .impedance
            .is_none()
            .then(|| "input impedance not computed".to_string()),
    }
}

fn noise(data: &PlotData) -> Figure {
    let x = freq_axis(data);
    let mut layers = Vec::new();
    let mut values = Vec::new();
    for (index, c) in data.noise_parts.iter().enumerate() {
        layers.push(line(
            &c.label,
            Ink::Series((index + 1) as u8),
            Weight::Thin,
            &c.x,
            &c.y,
        ));
        values.extend(c.y.iter().copied());
    }
    if let Some(c) = &data.noise_total {
        layers.push(line(&c.label, Ink::Built, Weight::Bold, &c.x, &c.y));
        values.extend(c.y.iter().copied());
    }
    let mut y = Axis::log("density", "V/√Hz", 1e-9, 1e-6);
    if let Some((_, hi)) = finite_range(values.into_iter().filter(|v| *v > 0.0)) {
        let top = fmath::powf(10f64, fmath::log10(hi).ceil());
        y.max = top;
        y.min = top / 1e4;
    }
    Figure {
        title: "output noise density".into(),
        x,
        y,
        layers,
        empty_note: data
            .noise_total
            .is_none()
            .then(|| "noise not computed".to_string()),
    }
}

fn levels(data: &PlotData) -> Figure {
    let x = freq_axis(data);
    let mut layers = Vec::new();
    let mut values = Vec::new();
    for (index, c) in data.levels.iter().enumerate() {
        layers.push(line(
            &c.label,
            Ink::Series(index as u8),
            Weight::Bold,
            &c.x,
            &c.y,
        ));
        values.extend(c.y.iter().copied());
    }
    if let Some(limit) = data.level_limit_db {
        layers.push(Layer::Guide {
            label: "swing limit".into(),
            ink: Ink::Warn,
            orientation: Orientation::Horizontal,
            at: limit,
        });
        values.push(limit);
    }
    let (lo, hi) = finite_range(values.into_iter()).unwrap_or((-40.0, 10.0));
    let top = hi + 6.0;
    let bottom = lo.max(top - 80.0).min(top - 20.0);
    Figure {
        title: "stage output levels".into(),
        x,
        y: Axis::linear("level re input", "dB", bottom, top, TickFormat::Plain),
        layers,
        empty_note: data
            .levels
            .is_empty()
            .then(|| "stage levels not computed".to_string()),
    }
}

/// A histogram figure. The x axis spans the bins and the limits, and at least `min_relative` of
/// the values' magnitude (or 0.05 axis units when that is zero), so that a spread far below the
/// axis resolution (the DC gain of a unity-gain stage) still draws as one readable bar.
fn histogram(hist: Option<&Histogram>, title: &str, mut x: Axis, min_relative: f64) -> Figure {
    let mut layers = Vec::new();
    let mut y = Axis::linear("runs", "", 0.0, 1.0, TickFormat::Plain);
    if let Some(h) = hist {
        if let (Some(first), Some(last)) = (h.edges.first(), h.edges.last()) {
            let mut lo = *first;
            let mut hi = *last;
            for (_, v) in &h.limits {
                lo = lo.min(*v);
                hi = hi.max(*v);
            }
            let min_span = if min_relative > 0.0 {
                hi.abs().max(lo.abs()) * min_relative
            } else {
                0.05
            };
            let (a, b) = padded(lo, hi, 0.04, min_span.max(1e-12));
            x.min = a;
            x.max = b;
        }
        let peak = h.counts.iter().copied().fold(0.0_f64, f64::max);
        y.max = (peak * 1.12).max(1.0);
        layers.push(Layer::Bars {
            label: "runs".into(),
            ink: Ink::Built,
            edges: h.edges.clone(),
            counts: h.counts.clone(),
        });
        if let Some(nominal) = h.nominal {
            layers.push(Layer::Guide {
                label: "nominal".into(),
                ink: Ink::Ideal,
                orientation: Orientation::Vertical,
                at: nominal,
            });
        }
        for (label, at) in &h.limits {
            layers.push(Layer::Guide {
                label: label.clone(),
                ink: Ink::Warn,
                orientation: Orientation::Vertical,
                at: *at,
            });
        }
    }
    Figure {
        title: title.into(),
        x,
        y,
        layers,
        empty_note: hist
            .is_none()
            .then(|| "run the tolerance study".to_string()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plot_keys_round_trip() {
        for kind in PlotKind::ALL {
            assert_eq!(PlotKind::from_key(kind.key()), Some(kind));
        }
        assert_eq!(PlotKind::from_key("<script>"), None);
    }

    #[test]
    fn low_pass_mask_forbids_loss_in_the_passband_and_level_in_the_stopband() {
        // A 1 dB / 40 dB mask at 1 kHz / 3 kHz with 6 dB of gain: the passband floor sits at
        // 6 − 1 = 5 dB up to 1 kHz, the stopband ceiling at 6 − 40 = −34 dB from 3 kHz.
        let mask = Mask {
            pass: Edge::Single(1e3),
            apass_db: 1.0,
            stop: Edge::Single(3e3),
            astop_db: 40.0,
        };
        let regions = mask_regions(ResponseClass::LowPass, &mask, 6.0);
        let inf = f64::INFINITY;
        let expect = [(-inf, 1e3, -inf, 5.0), (3e3, inf, -34.0, inf)];
        assert_eq!(regions.len(), expect.len());
        for (layer, (ex0, ex1, ey0, ey1)) in regions.iter().zip(expect) {
            match layer {
                Layer::Region { x0, x1, y0, y1, .. } => {
                    assert_eq!((*x0, *x1, *y0, *y1), (ex0, ex1, ey0, ey1));
                }
                other => panic!("expected a region, got {other:?}"),
            }
        }
    }

    #[test]
    fn band_pass_mask_has_two_stopbands() {
        let mask = Mask {
            pass: Edge::Pair(2e3, 20e3),
            apass_db: 1.0,
            stop: Edge::Pair(400.0, 100e3),
            astop_db: 30.0,
        };
        let regions = mask_regions(ResponseClass::BandPass, &mask, 0.0);
        assert_eq!(regions.len(), 3);
    }

    #[test]
    fn a_missing_analysis_gives_a_note_not_a_blank() {
        let data = PlotData::default();
        for kind in PlotKind::ALL {
            let figure = build(kind, &data);
            assert!(figure.empty_note.is_some(), "{kind:?} has no note");
        }
    }
}

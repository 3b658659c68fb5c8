//! The page's canvas backend: plotters-canvas with the context's drawing state kept and short
//! lines joined.
//!
//! Every call across the wasm boundary costs more than the drawing it asks for, and a string
//! (a colour, a font) costs more again, because the browser decodes and parses it. A figure is
//! mostly short straight lines (grid, ticks, schematic wires) and tick labels in a handful of
//! styles, so this backend
//! - joins consecutive lines of one style into a single path, stroked once when the style
//!   changes or another kind of primitive comes;
//! - remembers the stroke and fill colour, line width, font, alignment and baseline it last set,
//!   and sets only what changed; curves are stroked here too, under the same remembered style;
//! - keeps the JavaScript strings of colours, fonts and labels it made (a page's labels and
//!   styles mostly repeat from one edit to the next), so that a repeated string crosses the
//!   boundary as a reference instead of being decoded again;
//! - hands polygons, circles and pixels to [`plotters_canvas::CanvasBackend`], and forgets what
//!   it remembered afterwards, since that backend sets the context's state itself.
//!
//! The pixels are those plotters-canvas draws for the same calls: the same half-pixel shift for
//! horizontal and vertical lines, the same CSS colour, font and alignment strings.

use plotters_backend::text_anchor::{HPos, VPos};
use plotters_backend::{BackendColor, BackendCoord, BackendStyle, BackendTextStyle};
use plotters_backend::{DrawingBackend, DrawingErrorKind, FontTransform};
use plotters_canvas::CanvasBackend;
use std::cell::RefCell;
use std::collections::HashMap;
use wasm_bindgen::prelude::wasm_bindgen;
use wasm_bindgen::{JsCast, JsValue};
use web_sys::{CanvasRenderingContext2d, HtmlCanvasElement};

// The context's string-taking members, given a JavaScript string already made.
#[wasm_bindgen]
extern "C" {
    /// A `CanvasRenderingContext2D` seen through the members below.
    type StringMembers;
    #[wasm_bindgen(method, setter = font)]
    fn set_font_value(this: &StringMembers, font: &JsValue);
    #[wasm_bindgen(method, setter = fillStyle)]
    fn set_fill_value(this: &StringMembers, color: &JsValue);
    #[wasm_bindgen(method, setter = strokeStyle)]
    fn set_stroke_value(this: &StringMembers, color: &JsValue);
    #[wasm_bindgen(method, catch, js_name = fillText)]
    fn fill_text_value(this: &StringMembers, text: &JsValue, x: f64, y: f64)
        -> Result<(), JsValue>;
}

/// Most strings kept; past it the store starts again (labels of values typed long ago go).
const STRINGS_KEPT: usize = 4096;

thread_local! {
    /// JavaScript strings made so far, by their text.
    static STRINGS: RefCell<HashMap<String, JsValue>> = RefCell::new(HashMap::new());
}

/// The JavaScript string of `text`, made once and then reused.
fn js_string(text: &str) -> JsValue {
    STRINGS.with(|strings| {
        let mut strings = strings.borrow_mut();
        if let Some(value) = strings.get(text) {
            return value.clone();
        }
        if strings.len() >= STRINGS_KEPT {
            strings.clear();
        }
        let value = JsValue::from_str(text);
        strings.insert(text.to_owned(), value.clone());
        value
    })
}

/// A drawing failure of the canvas (a context call that threw).
#[derive(Debug)]
pub struct CanvasFailure(String);

impl std::fmt::Display for CanvasFailure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "canvas: {}", self.0)
    }
}

impl std::error::Error for CanvasFailure {}

fn failure(e: JsValue) -> DrawingErrorKind<CanvasFailure> {
    DrawingErrorKind::DrawingError(CanvasFailure(
        e.as_string().unwrap_or_else(|| format!("{e:?}")),
    ))
}

fn inner_failure<E: std::error::Error + Send + Sync>(
    e: DrawingErrorKind<E>,
) -> DrawingErrorKind<CanvasFailure> {
    match e {
        DrawingErrorKind::DrawingError(e) => {
            DrawingErrorKind::DrawingError(CanvasFailure(e.to_string()))
        }
        DrawingErrorKind::FontError(e) => DrawingErrorKind::FontError(e),
    }
}

/// What the context was last told, as far as this backend knows (`None`: unknown).
#[derive(Clone, Default, PartialEq)]
struct Known {
    stroke: Option<(u8, u8, u8, u64)>,
    fill: Option<(u8, u8, u8, u64)>,
    line_width: Option<u32>,
    font: Option<String>,
    align: Option<&'static str>,
    baseline: Option<&'static str>,
}

fn color_key(c: BackendColor) -> (u8, u8, u8, u64) {
    (c.rgb.0, c.rgb.1, c.rgb.2, c.alpha.to_bits())
}

fn css_color(c: BackendColor) -> String {
    let (r, g, b) = c.rgb;
    format!("rgba({},{},{},{})", r, g, b, c.alpha)
}

/// Moves a horizontal or vertical line onto the pixel centres (as plotters-canvas does), so that
/// a one-pixel line stays one pixel wide.
fn crisp(from: BackendCoord, to: BackendCoord) -> ((f64, f64), (f64, f64)) {
    let mut a = (f64::from(from.0), f64::from(from.1));
    let mut b = (f64::from(to.0), f64::from(to.1));
    if from.0 == to.0 {
        a.0 -= 0.5;
        b.0 -= 0.5;
    }
    if from.1 == to.1 {
        a.1 -= 0.5;
        b.1 -= 0.5;
    }
    (a, b)
}

/// The canvas backend of the page (see the module documentation).
pub struct StyledCanvas {
    inner: CanvasBackend,
    context: CanvasRenderingContext2d,
    size: (u32, u32),
    known: Known,
    /// Style of the lines gathered into the open path, if one is open.
    open_lines: Option<((u8, u8, u8, u64), u32)>,
}

impl StyledCanvas {
    /// The backend for `canvas`, or `None` when it has no 2D context.
    pub fn new(canvas: HtmlCanvasElement) -> Option<StyledCanvas> {
        let context: CanvasRenderingContext2d = canvas.get_context("2d").ok()??.dyn_into().ok()?;
        let size = (canvas.width(), canvas.height());
        let inner = CanvasBackend::with_canvas_object(canvas)?;
        Some(StyledCanvas {
            inner,
            context,
            size,
            known: Known::default(),
            open_lines: None,
        })
    }

    fn strings(&self) -> &StringMembers {
        self.context.unchecked_ref()
    }

    /// Strokes the gathered lines, if any.
    fn flush(&mut self) {
        if self.open_lines.take().is_some() {
            self.context.stroke();
        }
    }

    /// Before a call to the inner backend: stroke what is gathered; afterwards the context's
    /// state is whatever that backend set.
    fn hand_over(&mut self) {
        self.flush();
        self.known = Known::default();
    }

    fn set_stroke(&mut self, color: BackendColor, width: u32) {
        let key = color_key(color);
        if self.known.stroke != Some(key) {
            self.strings()
                .set_stroke_value(&js_string(&css_color(color)));
            self.known.stroke = Some(key);
        }
        if self.known.line_width != Some(width) {
            self.context.set_line_width(f64::from(width));
            self.known.line_width = Some(width);
        }
    }

    fn set_fill(&mut self, color: BackendColor) {
        let key = color_key(color);
        if self.known.fill != Some(key) {
            self.strings().set_fill_value(&js_string(&css_color(color)));
            self.known.fill = Some(key);
        }
    }
}

impl Drop for StyledCanvas {
    /// Lines still gathered when a drawing stops early are stroked all the same.
    fn drop(&mut self) {
        self.flush();
    }
}

impl DrawingBackend for StyledCanvas {
    type ErrorType = CanvasFailure;

    fn get_size(&self) -> (u32, u32) {
        self.size
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        Ok(())
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        self.flush();
        Ok(())
    }

    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        self.hand_over();
        self.inner.draw_pixel(point, color).map_err(inner_failure)
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        let color = style.color();
        if color.alpha == 0.0 {
            return Ok(());
        }
        let line_style = (color_key(color), style.stroke_width());
        if self.open_lines != Some(line_style) {
            self.flush();
            self.set_stroke(color, style.stroke_width());
            self.context.begin_path();
            self.open_lines = Some(line_style);
        }
        let (a, b) = crisp(from, to);
        self.context.move_to(a.0, a.1);
        self.context.line_to(b.0, b.1);
        Ok(())
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        let color = style.color();
        if color.alpha == 0.0 {
            return Ok(());
        }
        self.flush();
        let (x, y) = (f64::from(upper_left.0), f64::from(upper_left.1));
        let w = f64::from(bottom_right.0 - upper_left.0);
        let h = f64::from(bottom_right.1 - upper_left.1);
        if fill {
            self.set_fill(color);
            self.context.fill_rect(x, y, w, h);
        } else {
            self.set_stroke(color, style.stroke_width());
            self.context.stroke_rect(x, y, w, h);
        }
        Ok(())
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        // As plotters-canvas strokes a path (no half-pixel shift), under the remembered style.
        let color = style.color();
        if color.alpha == 0.0 {
            return Ok(());
        }
        let mut path = path.into_iter();
        let Some(start) = path.next() else {
            return Ok(());
        };
        self.flush();
        self.set_stroke(color, style.stroke_width());
        self.context.begin_path();
        self.context.move_to(f64::from(start.0), f64::from(start.1));
        for next in path {
            self.context.line_to(f64::from(next.0), f64::from(next.1));
        }
        self.context.stroke();
        Ok(())
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        self.hand_over();
        self.inner
            .draw_circle(center, radius, style, fill)
            .map_err(inner_failure)
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        self.hand_over();
        self.inner.fill_polygon(vert, style).map_err(inner_failure)
    }

    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<CanvasFailure>> {
        let color = style.color();
        if color.alpha == 0.0 {
            return Ok(());
        }
        self.flush();
        let degrees = match style.transform() {
            FontTransform::None => 0.0,
            FontTransform::Rotate90 => 90.0,
            FontTransform::Rotate180 => 180.0,
            FontTransform::Rotate270 => 270.0,
        };
        let (mut x, mut y) = (f64::from(pos.0), f64::from(pos.1));
        // A rotated label is drawn between save() and restore(), which puts back the state from
        // before it: what is known then is what was known before.
        let before = (degrees != 0.0).then(|| self.known.clone());
        if before.is_some() {
            self.context.save();
            self.context.translate(x, y).map_err(failure)?;
            self.context
                .rotate(degrees / 180.0 * std::f64::consts::PI)
                .map_err(failure)?;
            x = 0.0;
            y = 0.0;
        }
        let baseline = match style.anchor().v_pos {
            VPos::Top => "top",
            VPos::Center => "middle",
            VPos::Bottom => "bottom",
        };
        if self.known.baseline != Some(baseline) {
            self.context.set_text_baseline(baseline);
            self.known.baseline = Some(baseline);
        }
        let align = match style.anchor().h_pos {
            HPos::Left => "start",
            HPos::Right => "end",
            HPos::Center => "center",
        };
        if self.known.align != Some(align) {
            self.context.set_text_align(align);
            self.known.align = Some(align);
        }
        self.set_fill(color);
        let font = format!(
            "{} {}px {}",
            style.style().as_str(),
            style.size(),
            style.family().as_str()
        );
        if self.known.font.as_deref() != Some(font.as_str()) {
            self.strings().set_font_value(&js_string(&font));
            self.known.font = Some(font);
        }
        let drawn = self
            .strings()
            .fill_text_value(&js_string(text), x, y)
            .map_err(failure);
        if let Some(before) = before {
            self.context.restore();
            self.known = before;
        }
        drawn
    }
}

//! The PNG drawing surface: a bitmap drawn at [`PNG_SCALE`] device pixels per figure pixel,
//! with its own text rasteriser.
//!
//! Figures are laid out in figure pixels (the SVG's units). [`Scaled`] multiplies every
//! coordinate, radius and stroke width by the scale, so a PNG has the SVG's layout at a
//! resolution where body text is at least 12 device pixels tall.
//!
//! Text is drawn here rather than by plotters' `ab_glyph` path, which places each glyph's
//! ink at the pen position without the glyph's left side bearing and at a baseline of half the
//! nominal size: narrow glyphs with a wide bearing, the decimal point above all, ended up
//! pressed against the digit before them with a gap after ("6.960" read as "6 960"), and text
//! sat higher than the SVG's. Here every glyph is positioned at its pen position on the
//! baseline (kerning included), its ink offset by its own bounds, and the em size, anchor
//! offsets and advance widths follow the SVG backend (em = size / 1.24; baseline 0.76 em
//! below a top anchor, 0.5 ex below a centre anchor, 0.5 ex above a bottom anchor), so
//! PNG and SVG agree.

use ab_glyph::{point, Font, FontRef, PxScale, ScaleFont};
use plotters::prelude::DrawingBackend;
use plotters_backend::text_anchor::{HPos, VPos};
use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingErrorKind, FontTransform,
};

/// Device pixels per figure pixel in PNGs.
pub const PNG_SCALE: i32 = 2;

/// The ratio of plotters' nominal text size to the em size the SVG backend writes.
const SIZE_PER_EM: f32 = 1.24;

/// A backend that draws a figure laid out in figure pixels onto `inner` at `scale` device
/// pixels per figure pixel, with correctly placed glyphs.
pub(crate) struct Scaled<DB> {
    inner: DB,
    scale: i32,
    font: FontRef<'static>,
}

impl<DB: DrawingBackend> Scaled<DB> {
    /// `inner` must be `scale` times the figure's size in both directions.
    pub(crate) fn new(inner: DB, scale: i32, font: FontRef<'static>) -> Self {
        Scaled {
            inner,
            scale: scale.max(1),
            font,
        }
    }

    fn at(&self, (x, y): BackendCoord) -> BackendCoord {
        (x * self.scale, y * self.scale)
    }

    fn style<S: BackendStyle>(&self, style: &S) -> Stroke {
        Stroke {
            color: style.color(),
            width: style.stroke_width() * self.scale as u32,
        }
    }
}

/// A style with the stroke width in device pixels.
struct Stroke {
    color: BackendColor,
    width: u32,
}

impl BackendStyle for Stroke {
    fn color(&self) -> BackendColor {
        self.color
    }
    fn stroke_width(&self) -> u32 {
        self.width
    }
}

/// A line of text measured in device pixels: its scale, advance width, em and x-height.
pub(crate) struct TextLine {
    pub scale: PxScale,
    pub width: f32,
    pub em: f32,
    pub x_height: f32,
}

/// Measure `text` at the nominal plotters size `size` times `device` pixels.
pub(crate) fn measure(font: &FontRef<'static>, size: f64, device: f32, text: &str) -> TextLine {
    let em = size as f32 / SIZE_PER_EM * device;
    let upem = font.units_per_em().unwrap_or(2048.0);
    // PxScale is the height from descent to ascent; ask for the em size.
    let scale = PxScale::from(em * font.height_unscaled() / upem);
    let scaled = font.as_scaled(scale);
    let mut width = 0.0;
    let mut prev = None;
    for c in text.chars() {
        let id = scaled.glyph_id(c);
        if let Some(p) = prev {
            width += scaled.kern(p, id);
        }
        width += scaled.h_advance(id);
        prev = Some(id);
    }
    // The x-height from the ink of 'x' (DejaVu Sans: 1120/2048 em).
    let x_height = scaled
        .outline_glyph(scaled.scaled_glyph('x'))
        .map(|g| -g.px_bounds().min.y)
        .unwrap_or(0.547 * em);
    TextLine {
        scale,
        width,
        em,
        x_height,
    }
}

impl<DB: DrawingBackend> DrawingBackend for Scaled<DB> {
    type ErrorType = DB::ErrorType;

    fn get_size(&self) -> (u32, u32) {
        let (w, h) = self.inner.get_size();
        (w / self.scale as u32, h / self.scale as u32)
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.inner.ensure_prepared()
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.inner.present()
    }

    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let (x, y) = self.at(point);
        let s = self.scale;
        self.inner.draw_rect((x, y), (x + s, y + s), &color, true)
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let (a, b, st) = (self.at(from), self.at(to), self.style(style));
        if st.width <= 1 {
            return self.inner.draw_line(a, b, &st);
        }
        self.inner.draw_path([a, b], &st)
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let (a, b, st) = (
            self.at(upper_left),
            self.at(bottom_right),
            self.style(style),
        );
        if fill {
            return self.inner.draw_rect(a, b, &st, true);
        }
        let corners = [a, (b.0, a.1), b, (a.0, b.1), a];
        self.inner.draw_path(corners, &st)
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let st = self.style(style);
        let s = self.scale;
        self.inner
            .draw_path(path.into_iter().map(|(x, y)| (x * s, y * s)), &st)
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let (c, st) = (self.at(center), self.style(style));
        self.inner
            .draw_circle(c, radius * self.scale as u32, &st, fill)
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let st = self.style(style);
        let s = self.scale;
        self.inner
            .fill_polygon(vert.into_iter().map(|(x, y)| (x * s, y * s)), &st)
    }

    fn estimate_text_size<TStyle: BackendTextStyle>(
        &self,
        text: &str,
        style: &TStyle,
    ) -> Result<(u32, u32), DrawingErrorKind<Self::ErrorType>> {
        let line = measure(&self.font, style.size(), 1.0, text);
        Ok((
            line.width.ceil() as u32,
            (style.size() / 1.24).ceil() as u32,
        ))
    }

    fn draw_text<TStyle: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &TStyle,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let color = style.color();
        if color.alpha == 0.0 {
            return Ok(());
        }
        let line = measure(&self.font, style.size(), self.scale as f32, text);
        let dx = match style.anchor().h_pos {
            HPos::Left => 0.0,
            HPos::Center => -line.width / 2.0,
            HPos::Right => -line.width,
        };
        // As the SVG backend's `dy`: 0.76 em, 0.5 ex, −0.5 ex.
        let baseline = match style.anchor().v_pos {
            VPos::Top => 0.76 * line.em,
            VPos::Center => 0.5 * line.x_height,
            VPos::Bottom => -0.5 * line.x_height,
        };
        let transform = style.transform();
        let anchor = self.at(pos);
        let scaled = self.font.as_scaled(line.scale);
        let mut pen = dx;
        let mut prev = None;
        let mut ink: Vec<(i32, i32, f32)> = Vec::new();
        for c in text.chars() {
            let id = scaled.glyph_id(c);
            if let Some(p) = prev {
                pen += scaled.kern(p, id);
            }
            prev = Some(id);
            let glyph = id.with_scale_and_position(line.scale, point(pen, baseline));
            if let Some(outline) = scaled.outline_glyph(glyph) {
                let bounds = outline.px_bounds();
                let (x0, y0) = (bounds.min.x as i32, bounds.min.y as i32);
                outline.draw(|x, y, coverage| {
                    if coverage > 0.0 {
                        ink.push((x0 + x as i32, y0 + y as i32, coverage));
                    }
                });
            }
            pen += scaled.h_advance(id);
        }
        for (x, y, coverage) in ink {
            let (x, y) = rotate(&transform, x, y);
            let mut c = color;
            c.alpha *= f64::from(coverage.min(1.0));
            self.inner.draw_pixel((anchor.0 + x, anchor.1 + y), c)?;
        }
        Ok(())
    }
}

fn rotate(t: &FontTransform, x: i32, y: i32) -> (i32, i32) {
    t.transform(x, y)
}

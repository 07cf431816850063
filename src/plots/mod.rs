//! Pictures of results, drawn with plotters into SVG or PNG (chosen by file extension).
//!
//! PNG text is rendered with DejaVu Sans embedded in the binary (assets/fonts, Bitstream Vera
//! licence), so pictures render identically on a machine without system fonts; PNGs are drawn
//! at [`PNG_SCALE`] device pixels per figure pixel by `raster::Scaled`, which also places the
//! glyphs (see there for why plotters' own text path is not used). SVG text names the generic
//! `sans-serif` family and is rendered by the viewer.
//!
//! Colours: the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"), which stays
//! distinguishable for the common colour-vision deficiencies; the over-limit state is also
//! marked by text, never by colour alone.

mod chip;
pub(crate) mod labels;
mod margins;
mod outlets;
mod pressure;
mod raster;
mod section_field;
mod spread;
pub mod ticks;
mod time;

pub use chip::{layout, ChipPicture, ColourBy, Layout, LABEL_LIMIT, LARGE_LIMIT};
pub use margins::MarginChart;
pub use outlets::{OutletChart, OutletSeries};
pub use pressure::{PressurePath, PressurePicture, DRAWN_PATHS};
pub use raster::PNG_SCALE;
pub use section_field::SectionPicture;
pub use spread::{SpreadPicture, TornadoChart};
pub use time::{default_channels, Curve, TimePicture, DEFAULT_CURVES};

use crate::error::Error;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;
use std::sync::Once;

/// Okabe–Ito blue: within limits.
pub const OK_BLUE: RGBColor = RGBColor(0, 114, 178);
/// Okabe–Ito vermillion: over a limit.
pub const ALERT_VERMILLION: RGBColor = RGBColor(213, 94, 0);
/// Neutral grey for axes and grid.
pub const GRID_GREY: RGBColor = RGBColor(200, 200, 200);
/// Text colour.
pub const INK: RGBColor = RGBColor(30, 30, 30);

/// The font family every figure uses.
pub const FONT: &str = "sans-serif";

static DEJAVU_SANS: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");
static REGISTER: Once = Once::new();

/// Make the embedded font available to the bitmap backend (once per process).
fn register_font() {
    REGISTER.call_once(|| {
        // The bytes are a valid TrueType font shipped in the repository; a failure here
        // would only mean PNG text is not drawn, which the tests would catch.
        let _ = plotters::style::register_font(FONT, FontStyle::Normal, DEJAVU_SANS);
    });
}

/// A figure that can draw itself on any plotters backend.
pub trait Figure {
    /// Pixel size (width, height).
    fn size(&self) -> (u32, u32);
    /// Draw onto `area` (already sized).
    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String>;
    /// Last touches to the SVG text (e.g. tooltips); unchanged by default.
    fn finish_svg(&self, svg: String) -> String {
        svg
    }
}

/// Picture formats, by file extension.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PictureFormat {
    Svg,
    Png,
}

impl PictureFormat {
    /// `.svg` or `.png` (case-insensitive); anything else is refused with a hint.
    pub fn from_path(path: &Path) -> Result<Self, Error> {
        match path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref()
        {
            Some("svg") => Ok(PictureFormat::Svg),
            Some("png") => Ok(PictureFormat::Png),
            _ => Err(Error::Write {
                path: path.to_path_buf(),
                reason: "a picture must end in .svg or .png".into(),
            }),
        }
    }
}

/// Render a figure to bytes in the given format.
pub fn render(figure: &impl Figure, format: PictureFormat) -> Result<Vec<u8>, String> {
    let (w, h) = figure.size();
    // Both backends measure text with the font (chart layout), so it is registered for SVG too.
    register_font();
    match format {
        PictureFormat::Svg => {
            let mut text = String::new();
            {
                let area = SVGBackend::with_string(&mut text, (w, h)).into_drawing_area();
                figure.draw(&area)?;
                area.present().map_err(|e| e.to_string())?;
            }
            Ok(figure.finish_svg(text).into_bytes())
        }
        PictureFormat::Png => {
            let s = PNG_SCALE as u32;
            let (pw, ph) = (w * s, h * s);
            let font = ab_glyph::FontRef::try_from_slice(DEJAVU_SANS).map_err(drawing)?;
            let mut rgb = vec![0u8; (pw as usize) * (ph as usize) * 3];
            {
                let bitmap = BitMapBackend::with_buffer(&mut rgb, (pw, ph));
                let area = raster::Scaled::new(bitmap, PNG_SCALE, font).into_drawing_area();
                figure.draw(&area)?;
                area.present().map_err(|e| e.to_string())?;
            }
            let mut out = Vec::new();
            {
                let mut enc = png::Encoder::new(&mut out, pw, ph);
                enc.set_color(png::ColorType::Rgb);
                enc.set_depth(png::BitDepth::Eight);
                let mut writer = enc.write_header().map_err(|e| e.to_string())?;
                writer.write_image_data(&rgb).map_err(|e| e.to_string())?;
            }
            Ok(out)
        }
    }
}

/// Render a figure into the new file `path` (never overwriting; `protected` are inputs).
pub fn save(figure: &impl Figure, path: &Path, protected: &[&Path]) -> Result<(), Error> {
    let format = PictureFormat::from_path(path)?;
    let bytes = render(figure, format).map_err(|reason| Error::Write {
        path: path.to_path_buf(),
        reason: format!("drawing failed: {reason}"),
    })?;
    crate::output::write_new_file(path, &bytes, protected)
}

/// Text in the figures' font, anchored at its top-left corner.
pub(crate) fn text_style(size: u32, color: RGBColor) -> TextStyle<'static> {
    let mut style = TextStyle::from((FONT, size).into_font());
    style.color = color.to_backend_color();
    style
}

/// A colour bar: where, the value range (bottom to top), ticks (value, text), an optional
/// marked value drawn as a line across the bar (e.g. margin = 1), and a label above.
pub(crate) struct Bar {
    pub rect: (i32, i32, i32, i32),
    pub lo: f64,
    pub hi: f64,
    pub ticks: Vec<(f64, String)>,
    pub mark: Option<(f64, String)>,
    pub label: String,
}

/// A vertical viridis colour bar at (x, y) of size w × h, framed, with round ticks (1-2-5
/// steps, see [`ticks`]) from `lo` (bottom) to `hi` (top) and a label above it.
pub(crate) fn colour_bar<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    rect: (i32, i32, i32, i32),
    (lo, hi): (f64, f64),
    label: &str,
) -> Result<(), String> {
    let ticks = ticks::linear(lo, hi, 6)
        .into_iter()
        .map(|v| (v, crate::units::display::fmt_sig(v, 3)))
        .collect();
    colour_bar_scaled(
        area,
        &Bar {
            rect,
            lo,
            hi,
            ticks,
            mark: None,
            label: label.to_string(),
        },
    )
}

/// Draw a [`Bar`].
pub(crate) fn colour_bar_scaled<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    bar: &Bar,
) -> Result<(), String> {
    use plotters::style::colors::colormaps::ViridisRGB;
    let (x, y, w, h) = bar.rect;
    for k in 0..h {
        let v = 1.0 - k as f64 / h as f64;
        area.draw(&Rectangle::new(
            [(x, y + k), (x + w, y + k + 1)],
            ViridisRGB::get_color(v).filled(),
        ))
        .map_err(drawing)?;
    }
    area.draw(&Rectangle::new(
        [(x, y), (x + w, y + h)],
        ShapeStyle::from(&INK).stroke_width(1),
    ))
    .map_err(drawing)?;
    let span = (bar.hi - bar.lo).max(1e-300);
    let at = |v: f64| y + h - ((v - bar.lo) / span * h as f64).round() as i32;
    let mut taken: Vec<i32> = Vec::new();
    if let Some((v, text)) = &bar.mark {
        let ty = at(*v);
        area.draw(&Rectangle::new(
            [(x - 4, ty - 1), (x + w + 4, ty + 1)],
            INK.filled(),
        ))
        .map_err(drawing)?;
        area.draw(&Text::new(
            text.clone(),
            (x + w + 8, ty - 7),
            text_style(12, INK),
        ))
        .map_err(drawing)?;
        taken.push(ty);
    }
    for (v, text) in &bar.ticks {
        let ty = at(*v);
        if taken.iter().any(|t| (t - ty).abs() < 15) {
            continue;
        }
        area.draw(&Rectangle::new(
            [(x + w, ty), (x + w + 4, ty + 1)],
            INK.filled(),
        ))
        .map_err(drawing)?;
        area.draw(&Text::new(
            text.clone(),
            (x + w + 8, ty - 7),
            text_style(11, INK),
        ))
        .map_err(drawing)?;
        taken.push(ty);
    }
    area.draw(&Text::new(
        bar.label.clone(),
        (x - 40, y - 24),
        text_style(12, INK),
    ))
    .map_err(drawing)?;
    Ok(())
}

/// Map a drawing error to text.
pub(crate) fn drawing<E: std::fmt::Display>(e: E) -> String {
    e.to_string()
}

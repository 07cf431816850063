//! `sections.NAME:` and inline `section:` — a shape keyword plus the dimensions it takes.
//!
//! Kept flat (not a serde tagged enum) so errors inside keep their line numbers; which fields
//! belong to which shape is checked here, with messages that list what the shape takes.

use super::{at, Misplaced, Q};
use crate::section::Shape;
use crate::units::{Angle, Length};
use serde::Deserialize;

/// The shape kinds a section may name.
#[derive(Debug, Clone, Copy, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum ShapeKind {
    Circle,
    Rectangle,
    Ellipse,
    Annulus,
    Plates,
    Triangle,
    Trapezoid,
    DShape,
    Semicircle,
    RoundedRectangle,
    Polygon,
    Profile,
}

/// A cross-section as written in the chip file.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct SectionSpec {
    pub shape: Option<ShapeKind>,
    #[serde(default)]
    pub diameter: Option<Q<Length>>,
    #[serde(default)]
    pub width: Option<Q<Length>>,
    #[serde(default)]
    pub height: Option<Q<Length>>,
    #[serde(default)]
    pub outer_diameter: Option<Q<Length>>,
    #[serde(default)]
    pub inner_diameter: Option<Q<Length>>,
    #[serde(default)]
    pub gap: Option<Q<Length>>,
    #[serde(default)]
    pub side: Option<Q<Length>>,
    #[serde(default)]
    pub top: Option<Q<Length>>,
    #[serde(default)]
    pub bottom: Option<Q<Length>>,
    #[serde(default)]
    pub depth: Option<Q<Length>>,
    /// Trapezoid sidewall angle from the lid plane (54.74 deg for KOH-etched Si(100)).
    #[serde(default)]
    pub sidewall: Option<Q<Angle>>,
    #[serde(default)]
    pub mask_width: Option<Q<Length>>,
    #[serde(default)]
    pub corner_radius: Option<Q<Length>>,
    /// Polygon vertices, or profile (position, depth) pairs.
    #[serde(default)]
    pub points: Option<Vec<[Q<Length>; 2]>>,
    /// Profile from a two-column CSV file (position, depth), relative to the chip file.
    #[serde(default)]
    pub file: Option<String>,
    /// Unit of the numbers in `file` (default um): sets both columns.
    #[serde(default)]
    pub unit: Option<String>,
    /// Profile only: every position multiplied by this factor, depths kept (default 1); what
    /// sizing changes when it sizes a profile's width.
    #[serde(default)]
    pub width_scale: Option<super::design_spec::RawQuantity>,
    /// Unit of the position column of `file` (instead of `unit`).
    #[serde(default)]
    pub unit_x: Option<String>,
    /// Unit of the depth column of `file` (instead of `unit`).
    #[serde(default)]
    pub unit_depth: Option<String>,
    /// Fabrication tolerances of the dimensions, for `rillnet spread`.
    #[serde(default)]
    pub tolerance: Option<super::tolerance_spec::ToleranceBlock>,
}

/// Reads a file named in the chip file; returns its text or a message.
pub type FileReader<'a> = &'a dyn Fn(&str) -> Result<String, String>;

/// Which fields a shape uses, for checks and "it takes" messages.
fn takes(kind: ShapeKind) -> &'static [&'static str] {
    match kind {
        ShapeKind::Circle | ShapeKind::Semicircle => &["diameter"],
        ShapeKind::Rectangle | ShapeKind::Ellipse => &["width", "height"],
        ShapeKind::Annulus => &["outer_diameter", "inner_diameter"],
        ShapeKind::Plates => &["gap", "width"],
        ShapeKind::Triangle => &["side"],
        ShapeKind::Trapezoid => &["top", "depth", "bottom or sidewall"],
        ShapeKind::DShape => &["mask_width", "depth"],
        ShapeKind::RoundedRectangle => &["width", "height", "corner_radius"],
        ShapeKind::Polygon => &["points"],
        ShapeKind::Profile => &["points or file (+ unit, or unit_x and unit_depth)"],
    }
}

/// Every field a shape may carry (alternatives included).
fn allowed(kind: ShapeKind) -> &'static [&'static str] {
    match kind {
        ShapeKind::Trapezoid => &["top", "depth", "bottom", "sidewall"],
        ShapeKind::Profile => &[
            "points",
            "file",
            "unit",
            "unit_x",
            "unit_depth",
            "width_scale",
        ],
        other => takes(other),
    }
}

fn kind_name(kind: ShapeKind) -> &'static str {
    match kind {
        ShapeKind::Circle => "circle",
        ShapeKind::Rectangle => "rectangle",
        ShapeKind::Ellipse => "ellipse",
        ShapeKind::Annulus => "annulus",
        ShapeKind::Plates => "plates",
        ShapeKind::Triangle => "triangle",
        ShapeKind::Trapezoid => "trapezoid",
        ShapeKind::DShape => "d-shape",
        ShapeKind::Semicircle => "semicircle",
        ShapeKind::RoundedRectangle => "rounded-rectangle",
        ShapeKind::Polygon => "polygon",
        ShapeKind::Profile => "profile",
    }
}

/// Parse a profilometer export: two numeric columns (position, depth) separated by comma,
/// semicolon, tab or spaces; header and `#` comment lines skipped. `scale` converts both
/// columns to metres.
pub fn parse_profile_csv(text: &str, scale: f64) -> Result<Vec<[Length; 2]>, String> {
    parse_profile_columns(text, [scale, scale])
}

/// [`parse_profile_csv`] with one scale per column (position, depth) to metres. Every refusal
/// names the line: a cell that is not a plain number, a changed field count, a decimal comma,
/// a value that is not finite, a position that does not increase.
pub fn parse_profile_columns(text: &str, scale: [f64; 2]) -> Result<Vec<[Length; 2]>, String> {
    let mut points = Vec::new();
    let row = |x: f64, d: f64, i: usize, points: &mut Vec<[Length; 2]>| {
        let (x, d) = (x * scale[0], d * scale[1]);
        if !(x.is_finite() && d.is_finite()) {
            return Err(format!(
                "line {}: ({x} m, {d} m) is not a pair of finite numbers",
                i + 1
            ));
        }
        if let Some(last) = points.last().map(|p: &[Length; 2]| p[0].si()) {
            if x <= last {
                return Err(format!(
                    "line {}: position {x} m follows {last} m; positions must increase \
                     across the channel",
                    i + 1
                ));
            }
        }
        points.push([Length::from_si(x), Length::from_si(d)]);
        Ok(())
    };
    // The delimiter and the field count are fixed by the first data row.
    let mut layout: Option<(Delimiter, usize)> = None;
    for (i, line) in text.lines().enumerate() {
        let line = line.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let delimiter = layout.map_or_else(|| Delimiter::of(line), |l| l.0);
        let cols = delimiter.split(line);
        let nums: Vec<Option<f64>> = cols.iter().map(|c| c.parse::<f64>().ok()).collect();
        let Some((_, fields)) = layout else {
            match nums.as_slice() {
                [Some(_), Some(_), ..] => layout = Some((delimiter, cols.len())),
                _ => {
                    // A header, unless it is a data row written with decimal commas.
                    let with_points = line.replace(',', ".");
                    let numbers = delimiter
                        .split(&with_points)
                        .iter()
                        .filter(|c| c.parse::<f64>().is_ok())
                        .count();
                    if numbers >= 2 {
                        check_decimal_comma(delimiter, line, i)?;
                    }
                    continue;
                }
            }
            let [Some(x), Some(d), ..] = nums.as_slice() else {
                continue;
            };
            check_decimal_comma(delimiter, line, i)?;
            row(*x, *d, i, &mut points)?;
            continue;
        };
        check_decimal_comma(delimiter, line, i)?;
        if cols.len() != fields {
            return Err(format!(
                "line {}: {} fields where the first data row has {fields}; every row needs the same columns",
                i + 1,
                cols.len()
            ));
        }
        match nums.as_slice() {
            [Some(x), Some(d), ..] => row(*x, *d, i, &mut points)?,
            _ => {
                return Err(format!(
                    "line {}: expected two plain numbers (position, depth), found '{line}'; \
                     write numbers without units or quotes (the unit is the profile's 'unit')",
                    i + 1
                ))
            }
        }
    }
    if points.len() < 2 {
        return Err("fewer than two (position, depth) rows".into());
    }
    Ok(points)
}

/// How the fields of a profile row are separated.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Delimiter {
    Semicolon,
    Comma,
    Blank,
}

impl Delimiter {
    fn of(line: &str) -> Delimiter {
        if line.contains(';') {
            Delimiter::Semicolon
        } else if line.contains(',') {
            Delimiter::Comma
        } else {
            Delimiter::Blank
        }
    }

    fn split(self, line: &str) -> Vec<&str> {
        let cols: Vec<&str> = match self {
            Delimiter::Semicolon => line.split(';').map(str::trim).collect(),
            Delimiter::Comma => line.split(',').map(str::trim).collect(),
            Delimiter::Blank => line.split([' ', '\t']).filter(|c| !c.is_empty()).collect(),
        };
        cols
    }
}

/// Refuse `0,5;0`-style rows: with ';' between fields a ',' is a decimal comma, which would be
/// misread.
fn check_decimal_comma(delimiter: Delimiter, line: &str, i: usize) -> Result<(), String> {
    if delimiter != Delimiter::Comma && line.contains(',') {
        return Err(format!(
            "line {}: '{line}' has a decimal comma; write decimal points (0.5, not 0,5)",
            i + 1
        ));
    }
    Ok(())
}

impl SectionSpec {
    /// Metres per unit of the position and depth columns of a profile file: `unit` sets both
    /// (default um); `unit_x` and `unit_depth` set one each and cannot be combined with `unit`.
    fn profile_units(&self) -> Result<[f64; 2], (&'static str, String)> {
        let metres = |field: &'static str, unit: &str| {
            crate::units::parse_si(&format!("1 {unit}"), crate::units::Dimension::Length)
                .map_err(|e| (field, format!("{e}")))
        };
        if self.unit.is_some() && (self.unit_x.is_some() || self.unit_depth.is_some()) {
            let field = if self.unit_x.is_some() {
                "unit_x"
            } else {
                "unit_depth"
            };
            return Err((
                field,
                "give 'unit' (both columns) or 'unit_x' and 'unit_depth' (one each), not both"
                    .into(),
            ));
        }
        let both = self.unit.as_deref().unwrap_or("um");
        Ok([
            metres(
                if self.unit_x.is_some() {
                    "unit_x"
                } else {
                    "unit"
                },
                self.unit_x.as_deref().unwrap_or(both),
            )?,
            metres(
                if self.unit_depth.is_some() {
                    "unit_depth"
                } else {
                    "unit"
                },
                self.unit_depth.as_deref().unwrap_or(both),
            )?,
        ])
    }

    /// The domain shape, checking that exactly the dimensions of this kind are present.
    pub(super) fn to_shape(&self, path: &[&str], read: FileReader<'_>) -> Result<Shape, Misplaced> {
        let place = |field: &str| {
            let mut p = path.to_vec();
            p.push(field);
            p.into_iter().map(str::to_string).collect::<Vec<_>>()
        };
        let err = |field: &str, msg: String| Misplaced {
            path: place(field),
            repeated: false,
            message: msg,
        };
        let Some(kind) = self.shape else {
            return Err(at(path, "a section needs 'shape' (circle, rectangle, ellipse, annulus, plates, triangle, trapezoid, d-shape, semicircle, rounded-rectangle, polygon or profile)"));
        };
        let name = kind_name(kind);
        let it_takes = takes(kind).join(", ");
        let lengths: [(&str, Option<Q<Length>>); 13] = [
            ("diameter", self.diameter),
            ("width", self.width),
            ("height", self.height),
            ("outer_diameter", self.outer_diameter),
            ("inner_diameter", self.inner_diameter),
            ("gap", self.gap),
            ("side", self.side),
            ("top", self.top),
            ("bottom", self.bottom),
            ("depth", self.depth),
            ("mask_width", self.mask_width),
            ("corner_radius", self.corner_radius),
            (
                "sidewall",
                self.sidewall.map(|a| Q(Length::from_si(a.0.si()))),
            ),
        ];
        // Fields this shape never takes are reported first: the likeliest mistake.
        let present = lengths
            .iter()
            .filter(|(_, v)| v.is_some())
            .map(|(f, _)| *f)
            .chain(self.points.as_ref().map(|_| "points"))
            .chain(self.file.as_ref().map(|_| "file"))
            .chain(self.unit.as_ref().map(|_| "unit"))
            .chain(self.unit_x.as_ref().map(|_| "unit_x"))
            .chain(self.unit_depth.as_ref().map(|_| "unit_depth"));
        for field in present {
            if !allowed(kind).contains(&field) {
                return Err(err(
                    field,
                    format!("a {name} does not take '{field}'; it takes: {it_takes}"),
                ));
            }
        }
        let mut used: Vec<&str> = Vec::new();
        let mut need = |field: &'static str| -> Result<Length, Misplaced> {
            used.push(field);
            lengths
                .iter()
                .find(|(f, _)| *f == field)
                .and_then(|(_, v)| *v)
                .map(|q| q.0)
                .ok_or_else(|| {
                    err(
                        "shape",
                        format!("a {name} needs '{field}'; it takes: {it_takes}"),
                    )
                })
        };
        let shape = match kind {
            ShapeKind::Circle => Shape::Circle {
                diameter: need("diameter")?,
            },
            ShapeKind::Semicircle => Shape::Semicircle {
                diameter: need("diameter")?,
            },
            ShapeKind::Rectangle => Shape::Rectangle {
                width: need("width")?,
                height: need("height")?,
            },
            ShapeKind::Ellipse => Shape::Ellipse {
                width: need("width")?,
                height: need("height")?,
            },
            ShapeKind::Annulus => Shape::Annulus {
                outer_diameter: need("outer_diameter")?,
                inner_diameter: need("inner_diameter")?,
            },
            ShapeKind::Plates => Shape::Plates {
                gap: need("gap")?,
                width: need("width")?,
            },
            ShapeKind::Triangle => Shape::Triangle {
                side: need("side")?,
            },
            ShapeKind::DShape => Shape::DShape {
                mask_width: need("mask_width")?,
                depth: need("depth")?,
            },
            ShapeKind::RoundedRectangle => Shape::RoundedRectangle {
                width: need("width")?,
                height: need("height")?,
                corner_radius: need("corner_radius")?,
            },
            ShapeKind::Trapezoid => {
                let top = need("top")?;
                let depth = need("depth")?;
                let bottom = match (self.bottom, self.sidewall) {
                    (Some(b), None) => need("bottom").map(|_| b.0)?,
                    (None, Some(angle)) => {
                        used.push("sidewall");
                        let a = angle.0.si();
                        if !(a > 0.0 && a <= std::f64::consts::FRAC_PI_2 + 1e-12) {
                            return Err(err("sidewall", format!(
                                "the sidewall angle from the lid must be in (0, 90] deg, got {} deg",
                                a.to_degrees()
                            )));
                        }
                        let b = top.si() - 2.0 * depth.si() / a.tan();
                        if b <= 0.0 {
                            return Err(err("depth", format!(
                                "with top {} um and sidewalls at {:.2} deg the walls meet at {} um depth; \
                                 a trapezoid needs a depth below that (or it is a triangle: use shape: polygon)",
                                top.si() * 1e6, a.to_degrees(), top.si() / 2.0 * a.tan() * 1e6
                            )));
                        }
                        Length::from_si(b)
                    }
                    (Some(_), Some(_)) => {
                        return Err(err(
                            "sidewall",
                            "give either 'bottom' or 'sidewall', not both".into(),
                        ))
                    }
                    (None, None) => {
                        return Err(err(
                            "shape",
                            format!(
                                "a trapezoid needs 'bottom' or 'sidewall'; it takes: {it_takes}"
                            ),
                        ))
                    }
                };
                Shape::Trapezoid { top, bottom, depth }
            }
            ShapeKind::Polygon => {
                let Some(points) = &self.points else {
                    return Err(err("shape", "a polygon needs 'points', e.g. [[0 um, 0 um], [100 um, 0 um], [50 um, -40 um]]".into()));
                };
                Shape::Polygon {
                    points: points.iter().map(|p| [p[0].0, p[1].0]).collect(),
                }
            }
            ShapeKind::Profile => {
                let points = match (&self.points, &self.file) {
                    (Some(p), None) => p.iter().map(|p| [p[0].0, p[1].0]).collect(),
                    (None, Some(f)) => {
                        let scale = self.profile_units().map_err(|(field, e)| err(field, e))?;
                        let text = read(f).map_err(|e| err("file", format!("cannot read profile '{f}': {e}")))?;
                        parse_profile_columns(&text, scale).map_err(|e| err("file", format!("profile '{f}': {e}")))?
                    }
                    (Some(_), Some(_)) => return Err(err("file", "give either 'points' or 'file', not both".into())),
                    (None, None) => return Err(err("shape", "a profile needs 'points' ((position, depth) pairs) or 'file' (a two-column CSV)".into())),
                };
                let profile = Shape::Profile { points };
                match &self.width_scale {
                    None => profile,
                    Some(raw) => match raw.0.trim().parse::<f64>() {
                        Ok(f) if f.is_finite() && f > 0.0 => profile.scaled_profile(f).unwrap_or(profile),
                        _ => return Err(err("width_scale", format!("must be a positive number (positions are multiplied by it), got '{}'", raw.0))),
                    },
                }
            }
        };
        // Anything given that this shape does not use is a mistake worth stopping for.
        let not_profile_file = kind != ShapeKind::Profile || self.file.is_none();
        let list_fields: [(&str, bool); 6] = [
            (
                "width_scale",
                self.width_scale.is_some() && kind != ShapeKind::Profile,
            ),
            (
                "points",
                self.points.is_some() && !matches!(kind, ShapeKind::Polygon | ShapeKind::Profile),
            ),
            ("file", self.file.is_some() && kind != ShapeKind::Profile),
            ("unit", self.unit.is_some() && not_profile_file),
            ("unit_x", self.unit_x.is_some() && not_profile_file),
            ("unit_depth", self.unit_depth.is_some() && not_profile_file),
        ];
        for (field, value) in &lengths {
            if value.is_some() && !used.contains(field) {
                return Err(err(
                    field,
                    format!("a {name} does not take '{field}'; it takes: {it_takes}"),
                ));
            }
        }
        for (field, wrong) in list_fields {
            if wrong {
                return Err(err(
                    field,
                    format!("a {name} does not take '{field}'; it takes: {it_takes}"),
                ));
            }
        }
        shape.check().map_err(|e| err(e.field, e.problem))?;
        Ok(shape)
    }
}

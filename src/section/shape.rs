//! The [`Shape`] enum: the twelve kinds of cross-section with their dimensions, the checks on
//! those dimensions, the geometry key and kind name, and the entry points to the figures
//! (closed form from the shape's family file, else the numerical solution).

use super::numeric::{self, NumericOptions, NumericSection};
use super::outline::Outline;
use super::{circular, etched, profile, rectangular, thin, triangular, SectionFigures};
use crate::units::Length;

/// A cross-section shape with its dimensions (SI inside).
///
/// Analytic shapes have closed-form figures; the others are solved numerically
/// ([`numeric`]). Numerical outlines put the lid (the flat, bonded top) at y = 0 and the
/// channel below it.
#[derive(Clone, Debug, PartialEq)]
pub enum Shape {
    /// Circular tube (Hagen–Poiseuille).
    Circle { diameter: Length },
    /// Rectangle of any aspect ratio (exact Fourier series).
    Rectangle { width: Length, height: Length },
    /// Ellipse with full axes `width` × `height` (closed form).
    Ellipse { width: Length, height: Length },
    /// Concentric annulus (closed form).
    Annulus {
        outer_diameter: Length,
        inner_diameter: Length,
    },
    /// Parallel plates `gap` apart over `width`; side walls ignored (closed form, w ≫ h).
    Plates { gap: Length, width: Length },
    /// Equilateral triangle of side `side` (closed form).
    Triangle { side: Length },
    /// Trapezoid: `top` at the lid, `bottom` at `depth` (numerical).
    Trapezoid {
        top: Length,
        bottom: Length,
        depth: Length,
    },
    /// Isotropic-etch D-shape: flat bottom of the mask width, quarter-round sides of radius
    /// `depth`, lid of width mask + 2·depth (numerical).
    DShape { mask_width: Length, depth: Length },
    /// Half disc under a flat lid (numerical).
    Semicircle { diameter: Length },
    /// Rectangle with all four corners rounded to `corner_radius` (numerical).
    RoundedRectangle {
        width: Length,
        height: Length,
        corner_radius: Length,
    },
    /// Any simple polygon, vertices in order (numerical).
    Polygon { points: Vec<[Length; 2]> },
    /// Measured depth profile: (position across, depth below the lid) pairs, x increasing,
    /// closed by the flat lid (numerical). Heights (a trench given as negative values) and an
    /// instrument zero line below the surface are accepted: see the `profile` module for the
    /// rule, and [`Shape::profile_notes`] for what is worth noting about the sampling.
    Profile { points: Vec<[Length; 2]> },
}

/// Identity of a shape's geometry (kind and exact dimension bits), used to solve each
/// distinct section once per run.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub struct GeometryKey(Vec<u64>);

/// Why a shape's dimensions are not usable: the field and what is wrong.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("{field}: {problem}")]
pub struct ShapeError {
    pub field: &'static str,
    pub problem: String,
}

fn bad(field: &'static str, problem: impl Into<String>) -> ShapeError {
    ShapeError {
        field,
        problem: problem.into(),
    }
}

fn positive(field: &'static str, value: Length) -> Result<(), ShapeError> {
    let v = value.si();
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(bad(
            field,
            format!("must be a positive finite length, got {v} m"),
        ))
    }
}

fn finite_points(
    field: &'static str,
    points: &[[Length; 2]],
    min: usize,
) -> Result<(), ShapeError> {
    if points.len() < min {
        return Err(bad(
            field,
            format!("needs at least {min} points, got {}", points.len()),
        ));
    }
    if let Some(p) = points
        .iter()
        .find(|p| !(p[0].si().is_finite() && p[1].si().is_finite()))
    {
        return Err(bad(
            field,
            format!("point ({}, {}) is not finite", p[0].si(), p[1].si()),
        ));
    }
    Ok(())
}

/// Annulus: both diameters positive, the inner one smaller.
fn check_annulus(outer_diameter: Length, inner_diameter: Length) -> Result<(), ShapeError> {
    positive("outer_diameter", outer_diameter)?;
    positive("inner_diameter", inner_diameter)?;
    if inner_diameter.si() >= outer_diameter.si() {
        return Err(bad("inner_diameter", "must be smaller than outer_diameter"));
    }
    Ok(())
}

/// D-shape: a positive depth; the mask may be zero wide (a half disc).
fn check_d_shape(mask_width: Length, depth: Length) -> Result<(), ShapeError> {
    positive("depth", depth)?;
    let w = mask_width.si();
    if !(w.is_finite() && w >= 0.0) {
        return Err(bad(
            "mask_width",
            format!("must be zero or positive, got {w} m"),
        ));
    }
    Ok(())
}

/// Rounded rectangle: positive sides, corner radius from 0 to half the smaller side.
fn check_rounded_rectangle(
    width: Length,
    height: Length,
    corner_radius: Length,
) -> Result<(), ShapeError> {
    positive("width", width)?;
    positive("height", height)?;
    let r = corner_radius.si();
    if !(r.is_finite() && r >= 0.0 && 2.0 * r <= width.si().min(height.si()) * (1.0 + 1e-12)) {
        return Err(bad(
            "corner_radius",
            format!("must be between 0 and half the smaller side, got {r} m"),
        ));
    }
    Ok(())
}

/// Measured profile: positions increasing, and some point below the lid once the values are
/// read by the profile rule (depths or heights, lid on the zero line or the highest point; see
/// the `profile` module).
fn check_profile(points: &[[Length; 2]]) -> Result<(), ShapeError> {
    finite_points("points", points, 2)?;
    for w in points.windows(2) {
        if w[1][0].si() <= w[0][0].si() {
            return Err(bad(
                "points",
                format!(
                    "positions must increase across the channel; {} m follows {} m",
                    w[1][0].si(),
                    w[0][0].si()
                ),
            ));
        }
    }
    if profile::channel(points).is_none() {
        return Err(bad(
            "points",
            "every value is zero: the profile encloses no channel",
        ));
    }
    Ok(())
}

impl Shape {
    /// Check that every dimension is usable.
    pub fn check(&self) -> Result<(), ShapeError> {
        match self {
            Shape::Circle { diameter } | Shape::Semicircle { diameter } => {
                positive("diameter", *diameter)
            }
            Shape::Rectangle { width, height } | Shape::Ellipse { width, height } => {
                positive("width", *width)?;
                positive("height", *height)
            }
            Shape::Annulus {
                outer_diameter,
                inner_diameter,
            } => check_annulus(*outer_diameter, *inner_diameter),
            Shape::Plates { gap, width } => {
                positive("gap", *gap)?;
                positive("width", *width)
            }
            Shape::Triangle { side } => positive("side", *side),
            Shape::Trapezoid { top, bottom, depth } => {
                positive("top", *top)?;
                positive("depth", *depth)?;
                positive("bottom", *bottom)
            }
            Shape::DShape { mask_width, depth } => check_d_shape(*mask_width, *depth),
            Shape::RoundedRectangle {
                width,
                height,
                corner_radius,
            } => check_rounded_rectangle(*width, *height, *corner_radius),
            Shape::Polygon { points } => finite_points("points", points, 3),
            Shape::Profile { points } => check_profile(points),
        }
    }

    /// A hashable identity of the geometry: equal keys mean the same figures.
    pub fn geometry_key(&self) -> GeometryKey {
        let bits = |l: &Length| l.si().to_bits();
        let tag = |t: u64, dims: &[&Length]| {
            let mut v = vec![t];
            v.extend(dims.iter().map(|d| bits(d)));
            GeometryKey(v)
        };
        let pts = |t: u64, p: &[[Length; 2]]| {
            let mut v = vec![t];
            v.extend(p.iter().flat_map(|q| [bits(&q[0]), bits(&q[1])]));
            GeometryKey(v)
        };
        match self {
            Shape::Circle { diameter } => tag(0, &[diameter]),
            Shape::Rectangle { width, height } => tag(1, &[width, height]),
            Shape::Ellipse { width, height } => tag(2, &[width, height]),
            Shape::Annulus {
                outer_diameter,
                inner_diameter,
            } => tag(3, &[outer_diameter, inner_diameter]),
            Shape::Plates { gap, width } => tag(4, &[gap, width]),
            Shape::Triangle { side } => tag(5, &[side]),
            Shape::Trapezoid { top, bottom, depth } => tag(6, &[top, bottom, depth]),
            Shape::DShape { mask_width, depth } => tag(7, &[mask_width, depth]),
            Shape::Semicircle { diameter } => tag(8, &[diameter]),
            Shape::RoundedRectangle {
                width,
                height,
                corner_radius,
            } => tag(9, &[width, height, corner_radius]),
            Shape::Polygon { points } => pts(10, points),
            Shape::Profile { points } => pts(11, points),
        }
    }

    /// Notes on how a measured profile was read (sampling, simplification for the mesh,
    /// surface left out); empty for every other shape.
    pub fn profile_notes(&self) -> Vec<profile::ProfileNote> {
        match self {
            Shape::Profile { points } => profile::profile_notes(points),
            _ => Vec::new(),
        }
    }

    /// Short name of the shape kind, as written in chip files.
    pub fn kind(&self) -> &'static str {
        match self {
            Shape::Circle { .. } => "circle",
            Shape::Rectangle { .. } => "rectangle",
            Shape::Ellipse { .. } => "ellipse",
            Shape::Annulus { .. } => "annulus",
            Shape::Plates { .. } => "plates",
            Shape::Triangle { .. } => "triangle",
            Shape::Trapezoid { .. } => "trapezoid",
            Shape::DShape { .. } => "d-shape",
            Shape::Semicircle { .. } => "semicircle",
            Shape::RoundedRectangle { .. } => "rounded-rectangle",
            Shape::Polygon { .. } => "polygon",
            Shape::Profile { .. } => "profile",
        }
    }

    /// Closed-form figures, for the shapes that have them.
    pub fn analytic_figures(&self) -> Option<SectionFigures> {
        Some(match self {
            Shape::Circle { diameter } => circular::circle(diameter.si() / 2.0),
            Shape::Rectangle { width, height } => rectangular::rectangle(width.si(), height.si()),
            Shape::Ellipse { width, height } => {
                circular::ellipse(width.si() / 2.0, height.si() / 2.0)
            }
            Shape::Annulus {
                outer_diameter,
                inner_diameter,
            } => circular::annulus(outer_diameter.si() / 2.0, inner_diameter.si() / 2.0),
            Shape::Plates { gap, width } => rectangular::plates(gap.si(), width.si()),
            Shape::Triangle { side } => triangular::triangle(side.si()),
            _ => return None,
        })
    }

    /// Overall width of the section [m]: the horizontal extent of its outline (arcs resolved
    /// to 1e-4 of the extent), e.g. for the footprint of a folded channel.
    pub fn overall_width(&self) -> f64 {
        let outline = self.outline();
        let (loops, _) = outline.chords(f64::INFINITY);
        let rough = extent(&loops);
        let (loops, _) = outline.chords(1e-4 * rough.max(f64::MIN_POSITIVE));
        extent(&loops)
    }

    /// A measured profile with every position multiplied by `factor` and the depths kept (the
    /// same etch, `factor` times as wide); `None` for the other shapes.
    pub fn scaled_profile(&self, factor: f64) -> Option<Shape> {
        match self {
            Shape::Profile { points } => Some(Shape::Profile {
                points: points
                    .iter()
                    .map(|p| [Length::from_si(p[0].si() * factor), p[1]])
                    .collect(),
            }),
            _ => None,
        }
    }

    /// The lateral span of a measured profile, last position − first [m]; `None` for the
    /// other shapes.
    pub fn profile_span(&self) -> Option<f64> {
        match self {
            Shape::Profile { points } => Some(points.last()?[0].si() - points.first()?[0].si()),
            _ => None,
        }
    }

    /// The outline to solve numerically (lid at y = 0, channel below), for any shape.
    pub fn outline(&self) -> Outline {
        let m = |l: &Length| l.si();
        match self {
            Shape::Circle { diameter } => circular::circle_outline(m(diameter) / 2.0),
            Shape::Rectangle { width, height } => {
                rectangular::rectangle_outline(m(width), m(height))
            }
            Shape::Ellipse { width, height } => {
                circular::ellipse_outline(m(width) / 2.0, m(height) / 2.0)
            }
            Shape::Annulus {
                outer_diameter,
                inner_diameter,
            } => circular::annulus_outline(m(outer_diameter) / 2.0, m(inner_diameter) / 2.0),
            Shape::Plates { gap, width } => rectangular::plates_outline(m(gap), m(width)),
            Shape::Triangle { side } => triangular::triangle_outline(m(side)),
            Shape::Trapezoid { top, bottom, depth } => {
                etched::trapezoid_outline(m(top), m(bottom), m(depth))
            }
            Shape::DShape { mask_width, depth } => etched::d_shape_outline(m(mask_width), m(depth)),
            Shape::Semicircle { diameter } => circular::semicircle_outline(m(diameter) / 2.0),
            Shape::RoundedRectangle {
                width,
                height,
                corner_radius,
            } => rectangular::rounded_rectangle_outline(m(width), m(height), m(corner_radius)),
            Shape::Polygon { points } => profile::polygon_outline(points),
            Shape::Profile { points } => profile::profile_outline(points),
        }
    }

    /// Laminar figures: closed form where one exists, else the numerical solution with
    /// default options.
    ///
    /// ```
    /// use rillnet::section::Shape;
    /// use rillnet::units::Length;
    /// let tube = Shape::Circle { diameter: Length::from_si(100e-6) };
    /// let f = tube.figures().unwrap();
    /// assert!((f.f_re() - 16.0).abs() < 1e-12); // Hagen–Poiseuille
    /// ```
    pub fn figures(&self) -> Result<SectionFigures, ShapeError> {
        self.figures_with(&NumericOptions::default())
            .map(|(f, _)| f)
    }

    /// Laminar figures with the numerical solution (if one was needed) for plots.
    pub fn figures_with(
        &self,
        opts: &NumericOptions,
    ) -> Result<(SectionFigures, Option<NumericSection>), ShapeError> {
        self.check()?;
        if let Some(f) = self.analytic_figures() {
            return Ok((f, None));
        }
        let outline = self.outline();
        match numeric::solve(&outline, *opts) {
            Ok(sol) => Ok((SectionFigures::from_numeric(&sol), Some(sol))),
            // Too thin to mesh: the thin-film limit, when the outline allows it.
            Err(e @ numeric::NumericError::TooThin { .. }) => thin::thin_figures(&outline)
                .map(|f| (f, None))
                .ok_or_else(|| bad("shape", e.to_string())),
            Err(e) => Err(bad("shape", e.to_string())),
        }
    }

    /// Solve any shape numerically (analytic ones too, for verification and plots).
    pub fn solve_numeric(&self, opts: &NumericOptions) -> Result<NumericSection, ShapeError> {
        self.check()?;
        numeric::solve(&self.outline(), *opts).map_err(|e| bad("shape", e.to_string()))
    }
}

/// Horizontal extent of chord polygons.
fn extent(loops: &[Vec<[f64; 2]>]) -> f64 {
    let xs = loops.iter().flatten().map(|p| p[0]);
    let lo = xs.clone().fold(f64::INFINITY, f64::min);
    let hi = xs.fold(f64::NEG_INFINITY, f64::max);
    if hi > lo {
        hi - lo
    } else {
        0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn check_rejects_bad_dimensions() {
        for bad in [0.0, -1e-6, f64::NAN, f64::INFINITY] {
            let s = Shape::Rectangle {
                width: Length::from_si(1e-4),
                height: Length::from_si(bad),
            };
            assert_eq!(s.check().unwrap_err().field, "height");
        }
    }
}

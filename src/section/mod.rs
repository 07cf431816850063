//! Channel cross-sections and their fully developed laminar (Poiseuille) figures.
//!
//! In a straight channel far from its ends, the axial velocity u(y, z) of a Newtonian fluid
//! solves ∇²u = −G/μ over the cross-section with u = 0 on the wall, G the pressure drop per
//! length. The flow is linear in G/μ: Q = K·G/μ, where the *conductance factor* K [m⁴]
//! depends on the shape alone. Every figure here follows from K, the area A and the wetted
//! perimeter P:
//!
//! - resistance per length  R' = μ/K            [Pa·s/m⁴]
//! - hydraulic diameter     Dh = 4A/P
//! - Fanning f·Re           = A·Dh²/(2K)         (16 for a circle)
//! - mean wall shear / G    = A/P                (force balance, exact for any shape)
//!
//! This module knows nothing of networks or files.

pub mod numeric;
pub mod outline;

use crate::units::Length;
use numeric::{NumericOptions, NumericSection};
use outline::{Loop, Outline, Piece, Point};
use std::f64::consts::PI;

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
    /// closed by the flat lid (numerical).
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
            } => {
                positive("outer_diameter", *outer_diameter)?;
                positive("inner_diameter", *inner_diameter)?;
                if inner_diameter.si() >= outer_diameter.si() {
                    return Err(bad("inner_diameter", "must be smaller than outer_diameter"));
                }
                Ok(())
            }
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
            Shape::DShape { mask_width, depth } => {
                positive("depth", *depth)?;
                let w = mask_width.si();
                if !(w.is_finite() && w >= 0.0) {
                    return Err(bad(
                        "mask_width",
                        format!("must be zero or positive, got {w} m"),
                    ));
                }
                Ok(())
            }
            Shape::RoundedRectangle {
                width,
                height,
                corner_radius,
            } => {
                positive("width", *width)?;
                positive("height", *height)?;
                let r = corner_radius.si();
                if !(r.is_finite()
                    && r >= 0.0
                    && 2.0 * r <= width.si().min(height.si()) * (1.0 + 1e-12))
                {
                    return Err(bad(
                        "corner_radius",
                        format!("must be between 0 and half the smaller side, got {r} m"),
                    ));
                }
                Ok(())
            }
            Shape::Polygon { points } => finite_points("points", points, 3),
            Shape::Profile { points } => {
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
                if let Some(p) = points.iter().find(|p| p[1].si() < 0.0) {
                    return Err(bad("points", format!("depths are measured down from the lid and must not be negative; got {} m", p[1].si())));
                }
                if !points.iter().any(|p| p[1].si() > 0.0) {
                    return Err(bad(
                        "points",
                        "every depth is zero: the profile encloses no channel",
                    ));
                }
                Ok(())
            }
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
            Shape::Circle { diameter } => circle(diameter.si() / 2.0),
            Shape::Rectangle { width, height } => rectangle(width.si(), height.si()),
            Shape::Ellipse { width, height } => ellipse(width.si() / 2.0, height.si() / 2.0),
            Shape::Annulus {
                outer_diameter,
                inner_diameter,
            } => annulus(outer_diameter.si() / 2.0, inner_diameter.si() / 2.0),
            Shape::Plates { gap, width } => plates(gap.si(), width.si()),
            Shape::Triangle { side } => triangle(side.si()),
            _ => return None,
        })
    }

    /// The outline to solve numerically (lid at y = 0, channel below), for any shape.
    pub fn outline(&self) -> Outline {
        let m = |l: &Length| l.si();
        match self {
            Shape::Circle { diameter } => {
                let r = m(diameter) / 2.0;
                Outline {
                    loops: vec![circle_loop([0.0, 0.0], r, true)],
                }
            }
            Shape::Rectangle { width, height } => {
                let (w, h) = (m(width), m(height));
                Outline::polygon(&[
                    [-w / 2.0, -h],
                    [w / 2.0, -h],
                    [w / 2.0, 0.0],
                    [-w / 2.0, 0.0],
                ])
            }
            Shape::Ellipse { width, height } => {
                // An ellipse is not a union of circular arcs: a fine polygon (0.25° steps).
                let (a, b) = (m(width) / 2.0, m(height) / 2.0);
                let n = 1440;
                let pts: Vec<Point> = (0..n)
                    .map(|k| {
                        let t = 2.0 * PI * k as f64 / n as f64;
                        [a * t.cos(), b * t.sin()]
                    })
                    .collect();
                Outline::polygon(&pts)
            }
            Shape::Annulus {
                outer_diameter,
                inner_diameter,
            } => Outline {
                loops: vec![
                    circle_loop([0.0, 0.0], m(outer_diameter) / 2.0, true),
                    circle_loop([0.0, 0.0], m(inner_diameter) / 2.0, false),
                ],
            },
            Shape::Plates { gap, width } => {
                let (h, w) = (m(gap), m(width));
                Outline::polygon(&[
                    [-w / 2.0, -h],
                    [w / 2.0, -h],
                    [w / 2.0, 0.0],
                    [-w / 2.0, 0.0],
                ])
            }
            Shape::Triangle { side } => {
                let a = m(side);
                Outline::polygon(&[
                    [-a / 2.0, 0.0],
                    [0.0, -a * 3f64.sqrt() / 2.0],
                    [a / 2.0, 0.0],
                ])
            }
            Shape::Trapezoid { top, bottom, depth } => {
                let (t, b, d) = (m(top), m(bottom), m(depth));
                Outline::polygon(&[
                    [-b / 2.0, -d],
                    [b / 2.0, -d],
                    [t / 2.0, 0.0],
                    [-t / 2.0, 0.0],
                ])
            }
            Shape::DShape { mask_width, depth } => {
                let (w, d) = (m(mask_width), m(depth));
                let mut pieces = Vec::new();
                if w > 0.0 {
                    pieces.push(Piece::Line { to: [w / 2.0, -d] });
                }
                pieces.push(Piece::Arc {
                    to: [w / 2.0 + d, 0.0],
                    center: [w / 2.0, 0.0],
                    ccw: true,
                });
                pieces.push(Piece::Line {
                    to: [-w / 2.0 - d, 0.0],
                });
                pieces.push(Piece::Arc {
                    to: [-w / 2.0, -d],
                    center: [-w / 2.0, 0.0],
                    ccw: true,
                });
                Outline {
                    loops: vec![Loop {
                        start: [-w / 2.0, -d],
                        pieces,
                    }],
                }
            }
            Shape::Semicircle { diameter } => {
                let r = m(diameter) / 2.0;
                Outline {
                    loops: vec![Loop {
                        start: [-r, 0.0],
                        pieces: vec![
                            Piece::Arc {
                                to: [r, 0.0],
                                center: [0.0, 0.0],
                                ccw: true,
                            },
                            Piece::Line { to: [-r, 0.0] },
                        ],
                    }],
                }
            }
            Shape::RoundedRectangle {
                width,
                height,
                corner_radius,
            } => {
                let (w, h, r) = (m(width), m(height), m(corner_radius));
                let (x0, x1, y0, y1) = (-w / 2.0, w / 2.0, -h, 0.0);
                if r <= 0.0 {
                    return Outline::polygon(&[[x0, y0], [x1, y0], [x1, y1], [x0, y1]]);
                }
                let mut pieces = Vec::new();
                let line = |to: Point, pieces: &mut Vec<Piece>| pieces.push(Piece::Line { to });
                line([x1 - r, y0], &mut pieces);
                pieces.push(Piece::Arc {
                    to: [x1, y0 + r],
                    center: [x1 - r, y0 + r],
                    ccw: true,
                });
                line([x1, y1 - r], &mut pieces);
                pieces.push(Piece::Arc {
                    to: [x1 - r, y1],
                    center: [x1 - r, y1 - r],
                    ccw: true,
                });
                line([x0 + r, y1], &mut pieces);
                pieces.push(Piece::Arc {
                    to: [x0, y1 - r],
                    center: [x0 + r, y1 - r],
                    ccw: true,
                });
                line([x0, y0 + r], &mut pieces);
                pieces.push(Piece::Arc {
                    to: [x0 + r, y0],
                    center: [x0 + r, y0 + r],
                    ccw: true,
                });
                // Remove zero-length lines where the radius is half a side.
                let mut clean: Vec<Piece> = Vec::new();
                let mut from = [x0 + r, y0];
                for p in pieces {
                    let to = p.end();
                    if matches!(p, Piece::Line { .. })
                        && (to[0] - from[0]).hypot(to[1] - from[1]) < 1e-12 * w.max(h)
                    {
                        continue;
                    }
                    clean.push(p);
                    from = to;
                }
                Outline {
                    loops: vec![Loop {
                        start: [x0 + r, y0],
                        pieces: clean,
                    }],
                }
            }
            Shape::Polygon { points } => {
                let pts: Vec<Point> = points.iter().map(|p| [m(&p[0]), m(&p[1])]).collect();
                Outline::polygon(&pts)
            }
            Shape::Profile { points } => {
                let mut pts: Vec<Point> = Vec::new();
                let first = &points[0];
                let last = &points[points.len() - 1];
                // Lid from the last point back to the first, then down the profile.
                if m(&first[1]) > 0.0 {
                    pts.push([m(&first[0]), 0.0]);
                }
                pts.extend(points.iter().map(|p| [m(&p[0]), -m(&p[1])]));
                if m(&last[1]) > 0.0 {
                    pts.push([m(&last[0]), 0.0]);
                }
                Outline::polygon(&pts)
            }
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
        let sol = self.solve_numeric(opts)?;
        Ok((SectionFigures::from_numeric(&sol), Some(sol)))
    }

    /// Solve any shape numerically (analytic ones too, for verification and plots).
    pub fn solve_numeric(&self, opts: &NumericOptions) -> Result<NumericSection, ShapeError> {
        self.check()?;
        numeric::solve(&self.outline(), *opts).map_err(|e| bad("shape", e.to_string()))
    }
}

fn circle_loop(center: Point, r: f64, ccw: bool) -> Loop {
    let (cx, cy) = (center[0], center[1]);
    Loop {
        start: [cx + r, cy],
        pieces: vec![
            Piece::Arc {
                to: [cx - r, cy],
                center,
                ccw,
            },
            Piece::Arc {
                to: [cx + r, cy],
                center,
                ccw,
            },
        ],
    }
}

/// Laminar figures of one cross-section, all SI.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SectionFigures {
    /// Area A [m²].
    pub area: f64,
    /// Wetted perimeter P [m].
    pub perimeter: f64,
    /// Conductance factor K [m⁴]: Q = K·G/μ.
    pub conductance_factor: f64,
    /// Maximum wall shear stress per unit pressure gradient, τ_max/G [m].
    pub max_wall_shear_per_gradient: f64,
    /// Relative error estimate of K (0 for closed forms).
    pub relative_error_estimate: f64,
}

impl SectionFigures {
    /// Figures of a numerical solution.
    pub fn from_numeric(sol: &NumericSection) -> SectionFigures {
        SectionFigures {
            area: sol.area,
            perimeter: sol.perimeter,
            conductance_factor: sol.conductance_factor,
            max_wall_shear_per_gradient: sol.max_wall_shear_per_gradient,
            relative_error_estimate: sol.relative_error_estimate,
        }
    }

    /// Hydraulic diameter Dh = 4A/P [m].
    pub fn hydraulic_diameter(&self) -> f64 {
        4.0 * self.area / self.perimeter
    }

    /// Hydraulic resistance per length R' = μ/K [Pa·s/m⁴] for viscosity μ [Pa·s].
    pub fn resistance_per_length(&self, viscosity: f64) -> f64 {
        viscosity / self.conductance_factor
    }

    /// Fanning friction factor times Reynolds number on Dh: f·Re = A·Dh²/(2K).
    pub fn f_re(&self) -> f64 {
        let dh = self.hydraulic_diameter();
        self.area * dh * dh / (2.0 * self.conductance_factor)
    }

    /// Mean wall shear per unit gradient, τ_mean/G = A/P [m] (force balance).
    pub fn mean_wall_shear_per_gradient(&self) -> f64 {
        self.area / self.perimeter
    }
}

/// Circle of radius a: K = πa⁴/8 (Hagen–Poiseuille), wall shear τ = G·a/2 everywhere.
fn circle(a: f64) -> SectionFigures {
    SectionFigures {
        area: PI * a * a,
        perimeter: 2.0 * PI * a,
        conductance_factor: PI * a.powi(4) / 8.0,
        max_wall_shear_per_gradient: a / 2.0,
        relative_error_estimate: 0.0,
    }
}

/// Complete elliptic integral of the second kind E(k) by the arithmetic–geometric mean
/// (Abramowitz & Stegun 17.6): E = K·(1 − Σ 2^(n−1) c_n²), K = π/(2·AGM(1, √(1−k²))).
pub fn elliptic_e(k: f64) -> f64 {
    if k >= 1.0 {
        return 1.0; // the degenerate (flat) limit
    }
    let (mut a, mut b) = (1.0f64, (1.0 - k * k).max(0.0).sqrt());
    let mut c = k;
    let mut sum = 0.5 * c * c;
    let mut pow = 0.5;
    for _ in 0..64 {
        if c.abs() < 1e-17 {
            break;
        }
        let an = (a + b) / 2.0;
        let bn = (a * b).sqrt();
        c = (a - b) / 2.0;
        pow *= 2.0;
        sum += pow * c * c;
        a = an;
        b = bn;
    }
    PI / (2.0 * a) * (1.0 - sum)
}

/// Ellipse, semi-axes a, b (Bruus 2008, ch. 4; Shah & London 1978): φ = a²b²(1 − x²/a² −
/// y²/b²)/(2(a² + b²)), so K = πa³b³/(4(a² + b²)); the steepest wall gradient is at the ends of
/// the minor axis, τ_max/G = a²·b_min/(a² + b²) with a the major semi-axis. Perimeter 4aE(e).
fn ellipse(a: f64, b: f64) -> SectionFigures {
    let (a, b) = if a >= b { (a, b) } else { (b, a) };
    let e = (1.0 - (b / a).powi(2)).sqrt();
    SectionFigures {
        area: PI * a * b,
        perimeter: 4.0 * a * elliptic_e(e),
        conductance_factor: PI * a.powi(3) * b.powi(3) / (4.0 * (a * a + b * b)),
        max_wall_shear_per_gradient: a * a * b / (a * a + b * b),
        relative_error_estimate: 0.0,
    }
}

/// Concentric annulus, radii r_o > r_i (Shah & London 1978; Bruus 2008):
/// φ = (r_o² − r²)/4 + B·ln(r/r_o), B = (r_o² − r_i²)/(4 ln(r_o/r_i)), so
/// K = (π/8)[r_o⁴ − r_i⁴ − (r_o² − r_i²)²/ln(r_o/r_i)]; wall shear |dφ/dr| on each wall.
fn annulus(ro: f64, ri: f64) -> SectionFigures {
    let ln = (ro / ri).ln();
    let b = (ro * ro - ri * ri) / (4.0 * ln);
    let tau_o = (ro / 2.0 - b / ro).abs();
    let tau_i = (b / ri - ri / 2.0).abs();
    SectionFigures {
        area: PI * (ro * ro - ri * ri),
        perimeter: 2.0 * PI * (ro + ri),
        conductance_factor: PI / 8.0 * (ro.powi(4) - ri.powi(4) - (ro * ro - ri * ri).powi(2) / ln),
        max_wall_shear_per_gradient: tau_o.max(tau_i),
        relative_error_estimate: 0.0,
    }
}

/// Parallel plates a gap h apart over width w, side walls ignored (Bruus 2008): K = wh³/12,
/// τ/G = h/2 on both plates; the wetted perimeter counts the plates only (2w), so Dh = 2h and
/// f·Re = 24.
fn plates(h: f64, w: f64) -> SectionFigures {
    SectionFigures {
        area: w * h,
        perimeter: 2.0 * w,
        conductance_factor: w * h.powi(3) / 12.0,
        max_wall_shear_per_gradient: h / 2.0,
        relative_error_estimate: 0.0,
    }
}

/// Equilateral triangle of side a, height H = a√3/2: φ = l₁l₂l₃/H with l_i the distances to
/// the sides (∇²(l₁l₂l₃) = −H since the inward normals meet at 120°). K = √3a⁴/320 (Bruus
/// 2008: R = 320μL/(√3a⁴)); the wall gradient l_j·l_k/H peaks at mid-side, τ_max/G = H/4.
fn triangle(a: f64) -> SectionFigures {
    let h = a * 3f64.sqrt() / 2.0;
    SectionFigures {
        area: a * h / 2.0,
        perimeter: 3.0 * a,
        conductance_factor: 3f64.sqrt() * a.powi(4) / 320.0,
        max_wall_shear_per_gradient: h / 4.0,
        relative_error_estimate: 0.0,
    }
}

/// Σ_{n odd} 1/n⁵ = (1 − 2⁻⁵)·ζ(5), ζ(5) = 1.0369277551433699263 (Abramowitz & Stegun 23.2).
const ODD_INV_FIFTH_POWERS: f64 = 31.0 / 32.0 * 1.036_927_755_143_37;

/// Rectangle w × h with h ≤ w (the function sorts them). The exact series
/// (Bruus, Theoretical Microfluidics 2008, eq. 3.56; Shah & London 1978):
///
///   K = (w h³/12)·[1 − (192 h/(π⁵ w))·Σ_{n odd} tanh(nπw/2h)/n⁵].
///
/// Written as tanh = 1 − (1 − tanh), the sum becomes the closed value
/// Σ 1/n⁵ = (31/32)ζ(5) minus terms that fall like e^{−nπw/h}/n⁵, so it reaches machine
/// precision after a handful of terms for every aspect ratio (the plain series needs
/// thousands of terms for 1e-12).
///
/// The largest wall shear sits at the middle of the long walls. Differentiating the same
/// series at the wall gives τ_max = (4Gh/π²)·Σ_{n odd} [1 − sech(nπw/2h)]/n²; with
/// Σ_{n odd} 1/n² = π²/8 it becomes τ_max/G = h/2 − (4h/π²)·Σ_{n odd} sech(nπw/2h)/n²,
/// again exponentially convergent.
fn rectangle(width: f64, height: f64) -> SectionFigures {
    let (w, h) = if width >= height {
        (width, height)
    } else {
        (height, width)
    };
    let ratio = w / h; // ≥ 1
    let mut tail5 = 0.0; // Σ (1 − tanh x_n)/n⁵
    let mut sech2 = 0.0; // Σ sech(x_n)/n²
    let mut n = 1.0_f64;
    loop {
        let x = n * PI * ratio / 2.0;
        // 1 − tanh x = 2/(e^{2x} + 1); sech x = 2/(e^x + e^{−x}); both underflow to 0 safely.
        let one_minus_tanh = 2.0 / ((2.0 * x).exp() + 1.0);
        let sech = 2.0 / (x.exp() + (-x).exp());
        let t5 = one_minus_tanh / n.powi(5);
        let t2 = sech / (n * n);
        tail5 += t5;
        sech2 += t2;
        if (t5 <= 1e-18 * ODD_INV_FIFTH_POWERS && t2 <= 1e-18) || n > 1.0e4 {
            break;
        }
        n += 2.0;
    }
    let series = ODD_INV_FIFTH_POWERS - tail5;
    let k = w * h.powi(3) / 12.0 * (1.0 - 192.0 * h / (PI.powi(5) * w) * series);
    SectionFigures {
        area: w * h,
        perimeter: 2.0 * (w + h),
        conductance_factor: k,
        max_wall_shear_per_gradient: h / 2.0 - 4.0 * h / (PI * PI) * sech2,
        relative_error_estimate: 0.0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn rect(w: f64, h: f64) -> SectionFigures {
        Shape::Rectangle {
            width: Length::from_si(w),
            height: Length::from_si(h),
        }
        .figures()
        .unwrap()
    }

    /// Plain summation of the series, many terms plus the integral tail estimate; an
    /// independent evaluation of the same closed form to check the rearranged one.
    fn brute_force_k(w: f64, h: f64) -> f64 {
        let mut s = 0.0;
        let mut n = 1.0_f64;
        let n_max = 400_001.0;
        while n <= n_max {
            s += (n * PI * w / (2.0 * h)).tanh() / n.powi(5);
            n += 2.0;
        }
        // Tail Σ_{n odd > N} 1/n⁵ ≈ ∫ dn/(2n⁵) from N+1 = 1/(8 (N+1)⁴).
        s += 1.0 / (8.0 * (n_max + 1.0).powi(4));
        w * h.powi(3) / 12.0 * (1.0 - 192.0 * h / (PI.powi(5) * w) * s)
    }

    #[test]
    fn circle_matches_hagen_poiseuille() {
        // Hagen–Poiseuille: R = 8μL/(πa⁴) (Bruus 2008, ch. 4); f·Re = 16.
        let a = 50e-6;
        let f = Shape::Circle {
            diameter: Length::from_si(2.0 * a),
        }
        .figures()
        .unwrap();
        let mu = 1.0016e-3;
        assert_relative_eq!(
            f.resistance_per_length(mu),
            8.0 * mu / (PI * a.powi(4)),
            max_relative = 1e-14
        );
        assert_relative_eq!(f.f_re(), 16.0, max_relative = 1e-14);
        assert_relative_eq!(f.hydraulic_diameter(), 2.0 * a, max_relative = 1e-15);
        // Wall shear of a circle is uniform: max = mean = G·a/2.
        assert_relative_eq!(
            f.max_wall_shear_per_gradient,
            f.mean_wall_shear_per_gradient(),
            max_relative = 1e-15
        );
    }

    #[test]
    fn rectangle_series_reaches_1e12() {
        for &(w, h) in &[
            (1.0, 1.0),
            (2.0, 1.0),
            (10.0, 1.0),
            (1.0, 0.3),
            (100.0, 1.0),
        ] {
            let f = rect(w, h);
            assert_relative_eq!(
                f.conductance_factor,
                brute_force_k(w.max(h), w.min(h)),
                max_relative = 1e-12
            );
        }
    }

    #[test]
    fn rectangle_f_re_matches_shah_london() {
        // Shah & London (1978), Laminar Flow Forced Convection in Ducts, rectangular ducts
        // table: f·Re for aspect ratios α = h/w, to the five decimals of the exact series.
        let table = [
            (1.0, 14.22708),
            (0.5, 15.54806),
            (1.0 / 3.0, 17.08967),
            (0.25, 18.23278),
            (0.2, 19.07050),
            (0.125, 20.58464),
            (0.1, 21.16888),
            (0.05, 22.47701),
        ];
        for (alpha, fre) in table {
            let f = rect(1.0, alpha);
            assert!(
                (f.f_re() - fre).abs() < 6e-6,
                "alpha {alpha}: {} vs {fre}",
                f.f_re()
            );
            // Orientation does not matter.
            assert_relative_eq!(rect(alpha, 1.0).f_re(), f.f_re(), max_relative = 1e-14);
        }
        // Parallel-plate limit α → 0: f·Re → 24 (Shah & London 1978).
        assert_relative_eq!(rect(1.0, 1e-5).f_re(), 24.0, max_relative = 1e-4);
    }

    #[test]
    fn rectangle_one_term_approximation_is_a_sanity_bound() {
        // Bruus (2008) one-term approximation R ≈ 12μL/[wh³(1 − 0.630 h/w)]: about 14% high at
        // h = w, about 0.2% at h = w/2, below 0.01% for h ≤ w/3 (compared against the series).
        for &(alpha, tol) in &[(1.0, 0.15), (0.5, 2.5e-3), (1.0 / 3.0, 1e-4), (0.1, 1e-4)] {
            let (w, h) = (1.0, alpha);
            let exact = rect(w, h).resistance_per_length(1.0);
            let approx = 12.0 / (w * h.powi(3) * (1.0 - 0.630 * h / w));
            assert!(
                ((approx - exact) / exact).abs() < tol,
                "alpha {alpha}: approx {approx} exact {exact}"
            );
        }
    }

    #[test]
    fn rectangle_worked_resistance() {
        // Water μ = 1.0016 mPa·s (IAPWS R12-08, 20 °C) in a 100 µm × 50 µm rectangle, L = 1 cm:
        // R = 1.40156e13 Pa·s/m³ computed from the series (Bruus 2008, eq. 3.56).
        let r = rect(100e-6, 50e-6).resistance_per_length(1.0016e-3) * 0.01;
        assert_relative_eq!(r, 1.40156e13, max_relative = 1e-5);
    }

    #[test]
    fn rectangle_max_wall_shear_ratio() {
        // τ_max/τ_mean at the middle of the long wall, from the series for the wall gradient
        // (derived in `rectangle`; values computed from that series).
        for (alpha, ratio) in [
            (1.0, 1.35062),
            (0.5, 1.39509),
            (0.25, 1.24621),
            (0.1, 1.10000),
        ] {
            let f = rect(1.0, alpha);
            let got = f.max_wall_shear_per_gradient / f.mean_wall_shear_per_gradient();
            assert!(
                (got - ratio).abs() < 1e-5,
                "alpha {alpha}: {got} vs {ratio}"
            );
        }
    }

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

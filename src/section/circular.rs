//! Round sections: circle, ellipse and annulus (closed forms and outlines) and the semicircle
//! (outline only; it is solved numerically).

use super::outline::{Loop, Outline, Piece, Point};
use super::special::elliptic_e;
use super::SectionFigures;
use std::f64::consts::PI;

/// Circle of radius a: K = πa⁴/8 (Hagen–Poiseuille), wall shear τ = G·a/2 everywhere.
pub(super) fn circle(a: f64) -> SectionFigures {
    SectionFigures {
        area: PI * a * a,
        perimeter: 2.0 * PI * a,
        conductance_factor: PI * a.powi(4) / 8.0,
        max_wall_shear_per_gradient: a / 2.0,
        ..SectionFigures::CLOSED_FORM
    }
}

/// Ellipse, semi-axes a, b (Bruus 2008, ch. 4; Shah & London 1978): φ = a²b²(1 − x²/a² −
/// y²/b²)/(2(a² + b²)), so K = πa³b³/(4(a² + b²)); the steepest wall gradient is at the ends of
/// the minor axis, τ_max/G = a²·b_min/(a² + b²) with a the major semi-axis. Perimeter 4aE(e).
pub(super) fn ellipse(a: f64, b: f64) -> SectionFigures {
    let (a, b) = if a >= b { (a, b) } else { (b, a) };
    let e = (1.0 - (b / a).powi(2)).sqrt();
    SectionFigures {
        area: PI * a * b,
        perimeter: 4.0 * a * elliptic_e(e),
        conductance_factor: PI * a.powi(3) * b.powi(3) / (4.0 * (a * a + b * b)),
        max_wall_shear_per_gradient: a * a * b / (a * a + b * b),
        ..SectionFigures::CLOSED_FORM
    }
}

/// Concentric annulus, radii r_o > r_i (Shah & London 1978; Bruus 2008):
/// φ = (r_o² − r²)/4 + B·ln(r/r_o), B = (r_o² − r_i²)/(4 ln(r_o/r_i)), so
/// K = (π/8)[r_o⁴ − r_i⁴ − (r_o² − r_i²)²/ln(r_o/r_i)]; wall shear |dφ/dr| on each wall.
pub(super) fn annulus(ro: f64, ri: f64) -> SectionFigures {
    let ln = (ro / ri).ln();
    let b = (ro * ro - ri * ri) / (4.0 * ln);
    let tau_o = (ro / 2.0 - b / ro).abs();
    let tau_i = (b / ri - ri / 2.0).abs();
    SectionFigures {
        area: PI * (ro * ro - ri * ri),
        perimeter: 2.0 * PI * (ro + ri),
        conductance_factor: PI / 8.0 * (ro.powi(4) - ri.powi(4) - (ro * ro - ri * ri).powi(2) / ln),
        max_wall_shear_per_gradient: tau_o.max(tau_i),
        ..SectionFigures::CLOSED_FORM
    }
}

/// A full circle of radius `r` around `center` as two half arcs, counter-clockwise if `ccw`.
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

/// Circle of radius `r` around the origin.
pub(super) fn circle_outline(r: f64) -> Outline {
    Outline {
        loops: vec![circle_loop([0.0, 0.0], r, true)],
    }
}

/// Ellipse of semi-axes `a` (across) and `b` (up) around the origin.
pub(super) fn ellipse_outline(a: f64, b: f64) -> Outline {
    // An ellipse is not a union of circular arcs: a fine polygon (0.25° steps).
    let n = 1440;
    let pts: Vec<Point> = (0..n)
        .map(|k| {
            let t = 2.0 * PI * k as f64 / n as f64;
            [a * t.cos(), b * t.sin()]
        })
        .collect();
    Outline::polygon(&pts)
}

/// Annulus of outer radius `ro` and inner radius `ri` around the origin (the inner wall a
/// clockwise hole).
pub(super) fn annulus_outline(ro: f64, ri: f64) -> Outline {
    Outline {
        loops: vec![
            circle_loop([0.0, 0.0], ro, true),
            circle_loop([0.0, 0.0], ri, false),
        ],
    }
}

/// Half disc of radius `r` below the lid, centred on the lid.
pub(super) fn semicircle_outline(r: f64) -> Outline {
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

#[cfg(test)]
mod tests {
    use crate::section::Shape;
    use crate::units::Length;
    use approx::assert_relative_eq;
    use std::f64::consts::PI;

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
}

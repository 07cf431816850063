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

/// Concentric annulus, radii r_o > r_i (Shah & London 1978; White, Viscous Fluid Flow;
/// Bruus 2008): φ = (r_o² − r²)/4 + B·ln(r/r_o), B = (r_o² − r_i²)/(4 ln(r_o/r_i)), so
/// K = (π/8)[r_o⁴ − r_i⁴ − (r_o² − r_i²)²/ln(r_o/r_i)]; wall shear |dφ/dr| on each wall.
///
/// For a thin gap the terms of K cancel (they are ~4εr_o⁴ while K ~ (4/3)ε³r_o⁴, with
/// ε = (r_o − r_i)/r_o), and so do B/r_o and r_o/2. With δ = r_o − r_i (exact for
/// r_i ≥ r_o/2) and L = ln(r_o/r_i) = −ln(1 − ε) = Σ_{n≥1} εⁿ/n, the same closed form is
///
///   K = (π/8)(r_o + r_i)·δ³·S(ε)·ε/L,  S = Σ_{n≥3} (n² − 3n + 4)/(n(n−1)(n−2))·εⁿ⁻³
///     = 2/3 + ε/3 + 7ε²/30 + …,
///
/// (expanding (2 − 2ε + ε²)L − ε(2 − ε), whose ε and ε² terms cancel exactly), and the wall
/// gradients are
///
///   τ_o/G = (δ/4)(ε/L)·T_o,  T_o = 2 + 2Σ_{n≥3} εⁿ⁻²/n,
///   τ_i/G = (δ/4)(ε/L)(r_o/r_i)·T_i,  T_i = 2 − Σ_{n≥3} 4εⁿ⁻²/(n(n−1)(n−2)).
///
/// All terms of S and T_o are positive and those of T_i are small against 2, so the sums
/// lose nothing; L comes from ln_1p. As ε → 0, K → (π/6)r_m·δ³·(1 + ε²/60 + …), the slot of
/// width 2πr_m (r_m the mean radius) and gap δ, and τ → G·δ/2. The series serves ε < 1/2
/// (summed until a term falls below 1e-17 of the sum: at most ~55 terms); from ε = 1/2 the
/// direct form cancels by at most a factor ~12 and is used as it stands.
pub(super) fn annulus(ro: f64, ri: f64) -> SectionFigures {
    let gap = ro - ri;
    let eps = gap / ro;
    let (k, tau_o, tau_i) = if eps < ANNULUS_SERIES_BELOW {
        let ln = -(-eps).ln_1p();
        let (s, t_o, t_i) = annulus_series(eps);
        let q = eps / ln;
        let k = PI / 8.0 * (ro + ri) * gap.powi(3) * s * q;
        (k, gap / 4.0 * q * t_o, gap / 4.0 * q * (ro / ri) * t_i)
    } else {
        let ln = (ro / ri).ln();
        let d2 = gap * (ro + ri); // r_o² − r_i²
        let b = d2 / (4.0 * ln);
        let k = PI / 8.0 * d2 * (ro * ro + ri * ri - d2 / ln);
        (k, (ro / 2.0 - b / ro).abs(), (b / ri - ri / 2.0).abs())
    };
    SectionFigures {
        area: PI * gap * (ro + ri),
        perimeter: 2.0 * PI * (ro + ri),
        conductance_factor: k,
        max_wall_shear_per_gradient: tau_o.max(tau_i),
        ..SectionFigures::CLOSED_FORM
    }
}

/// Gap ratio ε = (r_o − r_i)/r_o below which [`annulus`] sums its series.
const ANNULUS_SERIES_BELOW: f64 = 0.5;

/// The three power series of [`annulus`] in the gap ratio 0 ≤ ε < 1/2: (S, T_o, T_i).
fn annulus_series(eps: f64) -> (f64, f64, f64) {
    let (mut s, mut t_o, mut t_i) = (0.0, 2.0, 2.0);
    let mut pow = 1.0; // εⁿ⁻³
    let mut n = 3.0_f64;
    while n < 200.0 {
        let ds = (n * n - 3.0 * n + 4.0) / (n * (n - 1.0) * (n - 2.0)) * pow;
        s += ds;
        t_o += 2.0 * eps * pow / n;
        t_i -= 4.0 * eps * pow / (n * (n - 1.0) * (n - 2.0));
        if ds <= 1e-17 * s {
            break;
        }
        pow *= eps;
        n += 1.0;
    }
    (s, t_o, t_i)
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

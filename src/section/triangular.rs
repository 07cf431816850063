//! The equilateral triangle: closed form and outline.

use super::outline::Outline;
use super::SectionFigures;

/// Equilateral triangle of side a, height H = a√3/2: φ = l₁l₂l₃/H with l_i the distances to
/// the sides (∇²(l₁l₂l₃) = −H since the inward normals meet at 120°). K = √3a⁴/320 (Bruus
/// 2008: R = 320μL/(√3a⁴)); the wall gradient l_j·l_k/H peaks at mid-side, τ_max/G = H/4.
pub(super) fn triangle(a: f64) -> SectionFigures {
    let h = a * 3f64.sqrt() / 2.0;
    SectionFigures {
        area: a * h / 2.0,
        perimeter: 3.0 * a,
        conductance_factor: 3f64.sqrt() * a.powi(4) / 320.0,
        max_wall_shear_per_gradient: h / 4.0,
        ..SectionFigures::CLOSED_FORM
    }
}

/// Equilateral triangle of side `a`, one side on the lid and the apex below.
pub(super) fn triangle_outline(a: f64) -> Outline {
    Outline::polygon(&[
        [-a / 2.0, 0.0],
        [0.0, -a * 3f64.sqrt() / 2.0],
        [a / 2.0, 0.0],
    ])
}

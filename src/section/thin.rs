//! The thin-film (lubrication) limit for outlines far thinner than they are wide, where a
//! finite-element mesh would need millions of nodes.
//!
//! Across a gap h(x) much thinner than the section is wide, the flow at each x is the plane
//! Poiseuille flow between two walls (the Reynolds lubrication approximation; Bruus,
//! Theoretical Microfluidics, 2008, ch. 4 for plane Poiseuille flow), so
//!
//!   K = ∫ h(x)³/12 dx,   τ_max/G = h_max/2,
//!
//! exactly for a gap that varies linearly between the outline's vertices:
//! ∫ h³ dx = Δx·(h₁ + h₂)(h₁² + h₂²)/4 per slab. What it leaves out is the region near each
//! end of the slit, about one gap wide, where the side walls slow the flow: for a rectangle
//! the exact series gives K = (w·t³/12)(1 − 0.630·t/w + …) (Shah & London 1978), a relative
//! error of 0.63·t/w. The error estimate stated is [`THIN_ERROR_FACTOR`]·t_max/w, for K and
//! for the maximum wall shear; measured in `tests/sections_thin.rs` against the rectangle
//! series and the ellipse closed form it lies above the true error. An undercut outline (one
//! that overhangs itself across the thin direction) is not taken: every vertical line must
//! cross the outline twice.

use super::figures::{SectionFigures, SectionModel};
use super::outline::{Outline, Point};

/// Outlines whose thickness over width is at most this are solved by the thin-film limit
/// when they are too thin to mesh.
pub const THIN_ASPECT: f64 = 1e-3;

/// The relative error stated for the thin-film limit, per unit of thickness over width (the
/// rectangle's exact error is 0.630·t/w).
pub const THIN_ERROR_FACTOR: f64 = 1.0;

/// The thin-film figures of `outline`, or `None` when it is not thin enough (thickness over
/// width above [`THIN_ASPECT`]), has holes, or overhangs itself across its thin direction.
pub fn thin_figures(outline: &Outline) -> Option<SectionFigures> {
    let (loops, _) = outline.chords(f64::INFINITY);
    let rough = extent(loops.first()?);
    let (loops, _) = outline.chords(1e-3 * rough[0].min(rough[1]).max(f64::MIN_POSITIVE));
    let [outer] = loops.as_slice() else {
        return None;
    };
    let [dx, dy] = extent(outer);
    // Thin across y (a shallow channel), or across x (a tall slit): swap to make y thin.
    let pts: Vec<Point> = if dy <= dx {
        outer.clone()
    } else {
        outer.iter().map(|p| [p[1], p[0]]).collect()
    };
    let (w, t) = (dx.max(dy), dx.min(dy));
    if !(t > 0.0 && t <= THIN_ASPECT * w) {
        return None;
    }
    let slabs = gap_profile(&pts)?;
    let k: f64 = slabs
        .iter()
        .map(|&(x1, x2, h1, h2)| (x2 - x1) * (h1 + h2) * (h1 * h1 + h2 * h2) / 48.0)
        .sum();
    let h_max = slabs.iter().map(|s| s.2.max(s.3)).fold(0.0, f64::max);
    let estimate = THIN_ERROR_FACTOR * h_max / w;
    Some(SectionFigures {
        area: polygon_area(&pts),
        perimeter: polygon_perimeter(&pts),
        conductance_factor: k,
        max_wall_shear_per_gradient: h_max / 2.0,
        relative_error_estimate: estimate,
        shear_error_estimate: estimate,
        converged: true,
        max_wall_shear_singular: false,
        singular_corner_count: 0,
        singular_corner: None,
        model: SectionModel::ThinFilm,
    })
}

/// Width of the bounding box in x and in y.
fn extent(l: &[Point]) -> [f64; 2] {
    let span = |i: usize| {
        let lo = l.iter().map(|p| p[i]).fold(f64::INFINITY, f64::min);
        let hi = l.iter().map(|p| p[i]).fold(f64::NEG_INFINITY, f64::max);
        hi - lo
    };
    [span(0), span(1)]
}

/// The gap over each slab between neighbouring vertex positions, (x₁, x₂, h(x₁⁺), h(x₂⁻)),
/// in increasing x: within a slab the same two edges bound the polygon, so h is linear
/// there (a step in depth at a vertex is kept as a jump between slabs). `None` unless every
/// vertical line between the ends crosses the outline exactly twice.
fn gap_profile(pts: &[Point]) -> Option<Vec<(f64, f64, f64, f64)>> {
    let mut xs: Vec<f64> = pts.iter().map(|p| p[0]).collect();
    xs.sort_by(f64::total_cmp);
    xs.dedup();
    xs.windows(2)
        .map(|pair| {
            let (x1, x2) = (pair[0], pair[1]);
            let [e, f] = crossing_edges(pts, 0.5 * (x1 + x2))[..] else {
                return None;
            };
            let gap = |x: f64| (line_at(e, x) - line_at(f, x)).abs();
            Some((x1, x2, gap(x1), gap(x2)))
        })
        .collect()
}

/// The edges the vertical line at `x` crosses (each edge over [min x, max x)).
fn crossing_edges(pts: &[Point], x: f64) -> Vec<(Point, Point)> {
    let n = pts.len();
    (0..n)
        .filter_map(|i| {
            let (a, b) = (pts[i], pts[(i + 1) % n]);
            let (lo, hi) = if a[0] <= b[0] { (a, b) } else { (b, a) };
            (lo[0] <= x && x < hi[0]).then_some((lo, hi))
        })
        .collect()
}

/// Height of the line through edge (lo, hi) at `x` (lo[0] < hi[0]).
fn line_at((lo, hi): (Point, Point), x: f64) -> f64 {
    lo[1] + (hi[1] - lo[1]) * (x - lo[0]) / (hi[0] - lo[0])
}

/// Area enclosed by a polygon (shoelace formula).
fn polygon_area(pts: &[Point]) -> f64 {
    let n = pts.len();
    (0..n)
        .map(|i| {
            let (a, b) = (pts[i], pts[(i + 1) % n]);
            a[0] * b[1] - a[1] * b[0]
        })
        .sum::<f64>()
        .abs()
        / 2.0
}

/// Length of a closed polygon.
fn polygon_perimeter(pts: &[Point]) -> f64 {
    let n = pts.len();
    (0..n)
        .map(|i| {
            let (a, b) = (pts[i], pts[(i + 1) % n]);
            (b[0] - a[0]).hypot(b[1] - a[1])
        })
        .sum()
}

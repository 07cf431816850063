//! The refinement loop: uniform refinement (maximum triangle area ÷ 4 per level, so h halves)
//! until the Richardson error estimate of K and the change of the maximum wall shear are within
//! tolerance, and the finest level's result in SI units.

use super::assembly::{solve_on, Solved};
use super::mesh::{self, Frame, Mesh};
use super::{wall, FieldMesh, NumericError, NumericOptions, NumericSection};
use crate::section::outline::{Outline, Point};

/// Solve over `outline`, refining until `opts` are met or the node budget is spent.
pub(super) fn solve_to_tolerance(
    outline: &Outline,
    opts: NumericOptions,
) -> Result<NumericSection, NumericError> {
    let (coarse, _) = outline.chords(f64::INFINITY);
    let frame = Frame::enclosing(&coarse)?;
    let mut max_area = (shoelace(&frame.norm_loops(&coarse)) / 60.0).max(1e-12);
    let mut previous: Option<(f64, f64)> = None;
    let mut last_change: Option<f64> = None;
    let mut refinements = 0;
    loop {
        let m = mesh::generate(outline, &frame, max_area)?;
        let s = solve_on(&m)?;
        let max_shear = wall::max_wall_shear(&m, &s);
        let tau = max_shear.0;
        let (change, shear_estimate) = previous.map_or((f64::INFINITY, f64::INFINITY), |(k, t)| {
            (((s.k - k) / s.k).abs(), ((tau - t) / tau).abs())
        });
        let estimate = richardson(change, last_change);
        last_change = Some(change).filter(|c| c.is_finite());
        let converged = estimate <= opts.tolerance && shear_estimate <= opts.shear_tolerance;
        if converged || m.nodes.len() * 4 > opts.max_nodes {
            let level = Level {
                mesh: m,
                solved: s,
                max_shear,
            };
            return Ok(finish(level, &frame, estimate, shear_estimate, refinements));
        }
        previous = Some((s.k, tau));
        max_area /= 4.0;
        refinements += 1;
    }
}

/// Area enclosed by the outer loop less the holes (shoelace formula on each loop).
fn shoelace(loops: &[Vec<Point>]) -> f64 {
    loops
        .iter()
        .map(|l| {
            (0..l.len())
                .map(|k| {
                    let (a, b) = (l[k], l[(k + 1) % l.len()]);
                    a[0] * b[1] - a[1] * b[0]
                })
                .sum::<f64>()
                .abs()
                / 2.0
        })
        .fold(0.0, |acc, a| if acc == 0.0 { a } else { acc - a })
}

/// Error estimate of K from the relative `change` between the last two levels and the change
/// one level before (`last_change`).
///
/// Richardson: with three levels converging by a factor r = change_prev/change ≥ 2 per halving
/// of h, the finer value's error is about change/(r − 1). Otherwise the plain difference of the
/// last two levels is reported (conservative).
fn richardson(change: f64, last_change: Option<f64>) -> f64 {
    match last_change {
        Some(prev) if change > 0.0 && prev / change >= 2.0 => change / (prev / change - 1.0),
        _ => change,
    }
}

/// The finest level: its mesh, its solution and its largest wall shear (value, node).
struct Level {
    mesh: Mesh,
    solved: Solved,
    max_shear: (f64, usize),
}

/// The result of the finest level in SI units.
fn finish(
    level: Level,
    frame: &Frame,
    estimate: f64,
    shear_estimate: f64,
    refinements: usize,
) -> NumericSection {
    let Level {
        mesh: m,
        solved: s,
        max_shear: (max_tau, max_node),
    } = level;
    let scale = frame.scale;
    let walk = wall::walk(&m, &s, frame);
    NumericSection {
        area: s.area * scale * scale,
        perimeter: walk.perimeter * scale,
        conductance_factor: s.k * scale.powi(4),
        max_wall_shear_per_gradient: max_tau * scale,
        max_shear_at: frame.si(m.nodes[max_node]),
        mean_wall_shear_per_gradient_from_flux: walk.flux / walk.perimeter * scale,
        relative_error_estimate: estimate,
        shear_error_estimate: shear_estimate,
        wall: walk.samples,
        field: FieldMesh {
            nodes: m.nodes.iter().map(|&p| frame.si(p)).collect(),
            triangles: m.tris,
            phi: s.phi.iter().map(|v| v * scale * scale).collect(),
        },
        refinements,
    }
}

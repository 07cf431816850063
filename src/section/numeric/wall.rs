//! Wall shear: the consistent boundary flux turned into nodal shear by a 1-D mass solve along
//! each wall loop, the largest wall shear at the wall away from re-entrant corners, and the samples,
//! perimeter and total flux along the walls.

use super::assembly::{solve_symmetric, Solved};
use super::element::{edge_mass, wall_element};
use super::mesh::{Frame, Mesh};
use super::{NumericError, WallSample};
use crate::section::outline::Point;
use std::collections::HashMap;

/// The quadratic elements of a wall loop (vertex, edge node, vertex, ...; closed implicitly),
/// as positions in the loop: [vertex, middle, next vertex].
fn loop_elements(len: usize) -> impl Iterator<Item = [usize; 3]> {
    (0..len / 2).map(move |e| [2 * e, 2 * e + 1, (2 * e + 2) % len])
}

/// The quadratic elements of wall loop `w` as node indices.
fn wall_elements(w: &[usize]) -> impl Iterator<Item = [usize; 3]> + '_ {
    loop_elements(w.len()).map(move |ids| ids.map(|k| w[k]))
}

/// Nodal wall shear per gradient τ/G on every wall node from the consistent flux.
///
/// The assembled residual at a wall node, r_i = Σ_j A_ij φ_j − f_i, equals ∮ N_i ∂φ/∂n ds
/// (outward normal); ∂φ/∂n ≤ 0 on the wall, so f_i − Σ_j A_ij φ_j = ∮ N_i τ ds with
/// τ = −∂φ/∂n ≥ 0. `wall_rows` are the full stiffness rows of the wall nodes (wall node,
/// other node, value), `load` the f_i.
pub(super) fn consistent_shear(
    m: &Mesh,
    wall_rows: &[(usize, usize, f64)],
    phi: &[f64],
    load: &[f64],
) -> Result<HashMap<usize, f64>, NumericError> {
    let mut r: HashMap<usize, f64> = HashMap::new();
    for &(i, j, v) in wall_rows {
        *r.entry(i).or_insert(0.0) += v * phi[j];
    }
    for (i, ri) in r.iter_mut() {
        *ri = load[*i] - *ri;
    }
    let mut wall_shear = HashMap::new();
    for w in &m.walls {
        let tau = loop_shear(m, w, &r)?;
        for (i, tau) in w.iter().zip(tau) {
            wall_shear.insert(*i, tau);
        }
    }
    Ok(wall_shear)
}

/// Solve M·τ = r along one wall loop `w`, M the 1-D P2 mass matrix of the loop (a small
/// banded-cyclic system, solved with the same sparse Cholesky); τ by position in the loop.
fn loop_shear(m: &Mesh, w: &[usize], r: &HashMap<usize, f64>) -> Result<Vec<f64>, NumericError> {
    let len = w.len(); // even: vertex, edge node, vertex, ...
    let mut pos = Vec::new();
    let mut val = Vec::new();
    for ids in loop_elements(len) {
        let me = edge_mass(ids.map(|k| m.nodes[w[k]]));
        for a in 0..3 {
            for b in 0..3 {
                if ids[a] >= ids[b] {
                    pos.push((ids[a], ids[b]));
                    val.push(me[a][b]);
                }
            }
        }
    }
    let mut rhs: Vec<f64> = w.iter().map(|i| r.get(i).copied().unwrap_or(0.0)).collect();
    solve_symmetric(len, &pos, &val, &mut rhs)?;
    Ok(rhs)
}

/// The largest wall shear away from re-entrant corners, where it is found and the radius of
/// the neighbourhoods left out (all in the frame).
#[derive(Clone, Copy, Debug)]
pub(super) struct MaxShear {
    pub(super) value: f64,
    pub(super) at: Point,
    pub(super) exclusion_radius: f64,
}

/// The largest wall shear, as the largest mean over one wall element (∫τ ds / L), away from the
/// re-entrant corners `singular`.
///
/// Wall elements with a node closer than `fraction` × Dh (Dh = 4A/P of this mesh) to a
/// re-entrant corner are left out: the wall shear grows without bound towards such a corner, so
/// its pointwise value there only reflects the mesh.
///
/// Why a mean and not the largest nodal value: every vertex of a polygonal outline (a measured
/// profile, a polygon standing for a curve) is a corner of interior angle just under 180°,
/// where the exact gradient dips to zero over a vanishing length; the nodal flux then
/// alternates between vertex and edge nodes while its integral stays exact. The element mean
/// is free of that alternation and converges to the pointwise maximum of a smooth wall shear
/// as h²; the refinement loop's estimate accounts for that order.
pub(super) fn max_wall_shear(m: &Mesh, s: &Solved, singular: &[Point], fraction: f64) -> MaxShear {
    let perimeter: f64 = m
        .walls
        .iter()
        .flat_map(|w| wall_elements(w))
        .map(|ids| wall_element(&m.nodes, ids, |_| 0.0).0)
        .sum();
    let radius = if perimeter > 0.0 {
        fraction * 4.0 * s.area / perimeter
    } else {
        0.0
    };
    let allowed = |i: usize| {
        let p = m.nodes[i];
        singular
            .iter()
            .all(|c| (p[0] - c[0]).hypot(p[1] - c[1]) > radius)
    };
    let mut best: Option<(f64, usize)> = None;
    let mut any: Option<(f64, usize)> = None;
    for w in &m.walls {
        for ids in wall_elements(w) {
            let (length, integral) = wall_element(&m.nodes, ids, |k| s.shear_at(ids[k]));
            if length <= 0.0 {
                continue;
            }
            let mean = integral / length;
            if any.is_none_or(|b| mean > b.0) {
                any = Some((mean, ids[1]));
            }
            if ids.iter().all(|&i| allowed(i)) && best.is_none_or(|b| mean > b.0) {
                best = Some((mean, ids[1]));
            }
        }
    }
    // Every wall element near a singular corner: the plain maximum (flagged by the caller).
    let (value, node) = best.or(any).unwrap_or((0.0, 0));
    MaxShear {
        value,
        at: m.nodes.get(node).copied().unwrap_or([0.0, 0.0]),
        exclusion_radius: radius,
    }
}

/// The walls walked element by element.
pub(super) struct WallWalk {
    /// A sample at every wall node, in SI.
    pub(super) samples: Vec<WallSample>,
    /// Total wall length (in the frame).
    pub(super) perimeter: f64,
    /// ∮ τ/G ds over all walls (in the frame).
    pub(super) flux: f64,
}

/// Walk every wall loop: samples at each node (SI), the perimeter and the total flux.
pub(super) fn walk(m: &Mesh, s: &Solved, frame: &Frame) -> WallWalk {
    let mut samples = Vec::new();
    let mut perimeter = 0.0;
    let mut flux = 0.0;
    for (wi, w) in m.walls.iter().enumerate() {
        let mut sacc = 0.0;
        for ids in wall_elements(w) {
            let (length, integral) = wall_element(&m.nodes, ids, |k| s.shear_at(ids[k]));
            for (k, &i) in ids.iter().take(2).enumerate() {
                // Arc length of the edge node: half the element (exact for straight edges).
                let s_here = sacc + if k == 0 { 0.0 } else { length / 2.0 };
                samples.push(WallSample {
                    wall: wi,
                    s: s_here * frame.scale,
                    point: frame.si(m.nodes[i]),
                    shear_per_gradient: s.shear_at(i) * frame.scale,
                });
            }
            flux += integral;
            sacc += length;
        }
        perimeter += sacc;
    }
    WallWalk {
        samples,
        perimeter,
        flux,
    }
}

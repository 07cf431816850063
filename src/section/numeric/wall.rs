//! Wall shear: the consistent boundary flux turned into nodal shear by a 1-D mass solve along
//! each wall loop, the largest wall shear as the largest wall-element mean, and the samples,
//! perimeter and total flux along the walls.

use super::assembly::{solve_symmetric, Solved};
use super::element::{edge_mass, wall_element};
use super::mesh::{Frame, Mesh};
use super::{NumericError, WallSample};
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

/// The largest wall shear, as the largest mean over one wall element (∫τ ds / L), and the
/// element's middle node.
///
/// Why a mean and not the largest nodal value: every vertex of a polygonal outline (a measured
/// profile, a polygon standing for a curve) is a corner of interior angle just under 180°,
/// where the exact gradient dips to zero over a vanishing length; the nodal flux then
/// alternates between vertex and edge nodes by a few tenths of a per cent while its integral
/// stays exact. The element mean is free of that alternation and converges to the pointwise
/// maximum of a smooth wall shear as h² (one element spans a small part of the wall).
pub(super) fn max_wall_shear(m: &Mesh, s: &Solved) -> (f64, usize) {
    let mut best = (
        0.0f64,
        m.walls
            .first()
            .and_then(|w| w.first().copied())
            .unwrap_or(0),
    );
    for w in &m.walls {
        for ids in wall_elements(w) {
            let (length, integral) = wall_element(&m.nodes, ids, |k| s.shear_at(ids[k]));
            if length > 0.0 && integral / length > best.0 {
                best = (integral / length, ids[1]);
            }
        }
    }
    best
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

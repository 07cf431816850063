//! Wall shear: the consistent boundary flux turned into nodal shear by a 1-D mass solve along
//! each wall loop, the largest wall shear (pointwise) away from re-entrant corners and the wall
//! next to it (refined on every level), the robust maximum (99th percentile by wall length),
//! and the samples, perimeter and total flux along the walls.

use super::element::{edge_mass, edge_shape, edge_tangent, wall_element};
use super::mesh::{Frame, Mesh};
use super::Solved;
use super::{NumericError, WallSample};
use crate::section::outline::Point;
use crate::solver::solve_spd_positions;
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
    solve_spd_positions(len, &pos, &val, &mut rhs)?;
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

/// The largest wall shear, pointwise, away from the re-entrant corners `corners.singular`.
///
/// On each wall element the nodal flux distribution is a quadratic in the element's parameter
/// (the consistent boundary flux, see [`consistent_shear`]); its largest value on the element
/// (at an end or at the vertex of the parabola) is the element's contribution, so the maximum
/// is a value at the wall, not an average over one element.
///
/// Exception, the known vertex/edge-node alternation: at a corner of the outline (any angle,
/// e.g. every vertex of a polygon standing for a curve or of a measured profile), the exact
/// gradient dips to zero (convex) or peaks (re-entrant) over a vanishing length, and the
/// nodal flux next to it alternates between vertex and edge nodes while its integral stays
/// exact. An element with an outline corner at an end therefore contributes its mean
/// (∫τ ds / L), which is free of the alternation; the others their pointwise maximum.
///
/// The wall within `fraction` × Dh (Dh = 4A/P of this mesh) of a re-entrant corner is left out:
/// the wall shear grows without bound towards such a corner, so its pointwise value there only
/// reflects the mesh. An element the neighbourhood's circle cuts contributes the wall shear
/// where the wall crosses the circle (the quadratic interpolant of the nodal flux), so the
/// maximum next to a corner, where the shear rises towards it, is a value at a fixed place that
/// converges with the mesh.
pub(super) fn max_wall_shear(m: &Mesh, s: &Solved, corners: &Corners, fraction: f64) -> MaxShear {
    let (values, radius) = element_values(m, s, corners, fraction);
    // Every wall element near a singular corner: the plain maximum (flagged by the caller).
    let pick = |v: &[ElementValue], counted: bool| {
        v.iter()
            .filter(|e| e.counted || !counted)
            .map(|e| (e.value, e.at))
            .fold(None, |best: Option<(f64, Point)>, x| match best {
                Some(b) if b.0 >= x.0 => Some(b),
                _ => Some(x),
            })
    };
    let (value, at) = pick(&values, true)
        .or(pick(&values, false))
        .unwrap_or((0.0, [0.0, 0.0]));
    MaxShear {
        value,
        at,
        exclusion_radius: radius,
    }
}

/// The outline's corners in the frame: the re-entrant ones, and all of them.
pub(super) struct Corners<'a> {
    pub(super) singular: &'a [Point],
    pub(super) all: &'a [Point],
}

/// A wall node this close to a corner (in the frame) is the corner.
const CORNER_MATCH: f64 = 1e-9;

/// The largest value on [0, 1] of the quadratic through `v` (at 0, ½, 1), and where.
fn polynomial_max(v: [f64; 3]) -> (f64, f64) {
    let p = |t: f64| {
        let (nn, _) = edge_shape(t);
        nn[0] * v[0] + nn[1] * v[1] + nn[2] * v[2]
    };
    let mut best = if v[0] >= v[2] {
        (v[0], 0.0)
    } else {
        (v[2], 1.0)
    };
    let curvature = v[0] - 2.0 * v[1] + v[2];
    if curvature < 0.0 {
        let t = (3.0 * v[0] - 4.0 * v[1] + v[2]) / (4.0 * curvature);
        if t > 0.0 && t < 1.0 && p(t) > best.0 {
            best = (p(t), t);
        }
    }
    best
}

/// The point at parameter `t` along the quadratic wall element `ids`.
fn point_at(m: &Mesh, ids: [usize; 3], t: f64) -> Point {
    let (nn, _) = edge_shape(t);
    let mut p = [0.0; 2];
    for k in 0..3 {
        p[0] += nn[k] * m.nodes[ids[k]][0];
        p[1] += nn[k] * m.nodes[ids[k]][1];
    }
    p
}

/// The value one wall element contributes to the maximum wall shear.
struct ElementValue {
    /// The wall element's edge node (unique to it).
    middle: usize,
    value: f64,
    at: Point,
    /// Whether it counts towards the maximum (outside the corner neighbourhoods).
    counted: bool,
}

/// Each wall element's contribution to the maximum (see [`max_wall_shear`]), and the radius of
/// the corner neighbourhoods.
fn element_values(
    m: &Mesh,
    s: &Solved,
    corners: &Corners,
    fraction: f64,
) -> (Vec<ElementValue>, f64) {
    let (singular, corners) = (corners.singular, corners.all);
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
    let touches = |ids: [usize; 3]| {
        [ids[0], ids[2]].iter().any(|&i| {
            let p = m.nodes[i];
            corners
                .iter()
                .any(|c| (p[0] - c[0]).hypot(p[1] - c[1]) <= CORNER_MATCH)
        })
    };
    let mut out = Vec::new();
    for w in &m.walls {
        for ids in wall_elements(w) {
            let (length, integral) = wall_element(&m.nodes, ids, |k| s.shear_at(ids[k]));
            if length <= 0.0 {
                continue;
            }
            let mean = integral / length;
            let inside = ids.map(|i| !allowed(i));
            let (value, at, counted) = if !inside.iter().any(|&x| x) {
                if touches(ids) {
                    (mean, m.nodes[ids[1]], true)
                } else {
                    let (value, t) = polynomial_max(ids.map(|i| s.shear_at(i)));
                    (value, point_at(m, ids, t), true)
                }
            } else if inside[0] != inside[2] {
                // The wall enters a neighbourhood inside this element: the shear where it
                // crosses the circle, from the quadratic interpolant of the nodal flux.
                let (value, at) = crossing(m, s, ids, singular, radius, inside[0]);
                (value, at, true)
            } else {
                (mean, m.nodes[ids[1]], false)
            };
            out.push(ElementValue {
                middle: ids[1],
                value,
                at,
                counted,
            });
        }
    }
    (out, radius)
}

/// The triangles with a wall edge whose contribution to the maximum wall shear lies within
/// the fraction `band` of `max`: refined on every level, so that h halves there each time and
/// the maximum converges as the element allows wherever else the indicator refines.
pub(super) fn near_maximum(
    m: &Mesh,
    s: &Solved,
    corners: &Corners,
    fraction: f64,
    band: f64,
) -> Vec<bool> {
    let (values, _) = element_values(m, s, corners, fraction);
    let max = values
        .iter()
        .filter(|e| e.counted)
        .map(|e| e.value)
        .fold(f64::NEG_INFINITY, f64::max);
    let mut owner = vec![usize::MAX; m.nodes.len()];
    for (ti, t) in m.tris.iter().enumerate() {
        for &i in &t[3..] {
            owner[i] = ti;
        }
    }
    let mut marked = vec![false; m.tris.len()];
    for e in values {
        if e.counted && e.value >= (1.0 - band) * max && owner[e.middle] != usize::MAX {
            marked[owner[e.middle]] = true;
        }
    }
    marked
}

/// Where the quadratic wall element `ids` crosses the boundary of the corner neighbourhoods
/// (radius `radius` around `singular`; its start lies inside when `start_inside`), and the
/// interpolated wall shear there.
fn crossing(
    m: &Mesh,
    s: &Solved,
    ids: [usize; 3],
    singular: &[Point],
    radius: f64,
    start_inside: bool,
) -> (f64, Point) {
    let at = |t: f64| {
        let (nn, _) = edge_shape(t);
        let mut p = [0.0; 2];
        for k in 0..3 {
            p[0] += nn[k] * m.nodes[ids[k]][0];
            p[1] += nn[k] * m.nodes[ids[k]][1];
        }
        p
    };
    let inside = |t: f64| {
        let p = at(t);
        singular
            .iter()
            .any(|c| (p[0] - c[0]).hypot(p[1] - c[1]) <= radius)
    };
    // Bisection between an inside and an outside parameter.
    let (mut lo, mut hi) = if start_inside { (0.0, 1.0) } else { (1.0, 0.0) };
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if inside(mid) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let (nn, _) = edge_shape(hi);
    let value = (0..3).map(|k| nn[k] * s.shear_at(ids[k])).sum();
    (value, at(hi))
}

/// Sub-intervals per wall element at whose midpoints the robust maximum samples the wall shear.
const ROBUST_SAMPLES: usize = 8;

/// The robust maximum of the wall shear (see [`super::ROBUST_EXCLUDED_FRACTION`]): the wall
/// shear is sampled at the midpoints of [`ROBUST_SAMPLES`] equal parameter intervals of every
/// quadratic wall element (the quadratic interpolant of the nodal flux), each sample standing
/// for its interval's length; the result is the largest sample value v such that the samples
/// above v stand for at most the fraction `excluded` of the total wall length.
pub(super) fn robust_max(m: &Mesh, s: &Solved, excluded: f64) -> f64 {
    let mut samples: Vec<(f64, f64)> = Vec::new();
    let dt = 1.0 / ROBUST_SAMPLES as f64;
    for w in &m.walls {
        for ids in wall_elements(w) {
            let p = ids.map(|i| m.nodes[i]);
            for j in 0..ROBUST_SAMPLES {
                let t = (j as f64 + 0.5) * dt;
                let (nn, dn) = edge_shape(t);
                let (dx, dy) = edge_tangent(p, dn);
                let value = (0..3).map(|k| nn[k] * s.shear_at(ids[k])).sum::<f64>();
                samples.push((value, dx.hypot(dy) * dt));
            }
        }
    }
    let total: f64 = samples.iter().map(|x| x.1).sum();
    samples.sort_by(|a, b| b.0.total_cmp(&a.0));
    let mut above = 0.0;
    for (value, length) in samples.iter().copied() {
        if above + length > excluded * total {
            return value;
        }
        above += length;
    }
    samples.last().map_or(0.0, |x| x.0)
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

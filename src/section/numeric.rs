//! Numerical Poisson solution over any cross-section outline.
//!
//! Problem: ∇²φ = −1 in the section, φ = 0 on the wall; then u = (G/μ)·φ, the conductance
//! factor is K = ∫φ dA (Q = K·G/μ) and the wall shear per unit gradient is τ/G = |∂φ/∂n|.
//!
//! Method: quadratic (P2) isoparametric triangles on a constrained-Delaunay quality mesh
//! (spade; minimum angle 25°), edge nodes of curved walls placed on the true arc; stiffness and
//! load by the 6-point degree-4 Dunavant rule; the sparse system by faer's Cholesky through
//! [`crate::solver`]. For smooth solutions P2 converges as h⁴ in K and h² in the wall gradient.
//!
//! Error control: the mesh is refined (maximum triangle area ÷ 4 per step, so h halves) until
//! the error estimate of K is below the tolerance. The estimate compares successive levels:
//! with three levels whose changes shrink by a factor r ≥ 2, it is the Richardson estimate
//! change/(r − 1) (observed order, so corner singularities that slow convergence are accounted
//! for); otherwise it is the plain change between the last two levels.
//!
//! Wall shear is the consistent boundary flux: the residual r = A·φ − f at wall nodes is the
//! flux weighted by the wall shape functions, and a 1-D P2 mass solve along each wall loop
//! turns it into a nodal shear distribution (more accurate than differentiating φ).

use super::outline::{ArcInfo, Outline, Point};
use crate::solver::{Parallelism, SolverError, SymbolicCholesky, SymmetricPattern};
use spade::{ConstrainedDelaunayTriangulation, Point2, RefinementParameters, Triangulation};
use std::collections::HashMap;

/// Accuracy and effort settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NumericOptions {
    /// Target relative error estimate on the conductance factor (and so the resistance).
    pub tolerance: f64,
    /// Target relative change of the maximum wall shear between the last two meshes (wall
    /// gradients converge one order slower than K, so this is looser).
    pub shear_tolerance: f64,
    /// Refinement stops (with a larger estimate reported) beyond this many nodes.
    pub max_nodes: usize,
}

impl Default for NumericOptions {
    fn default() -> Self {
        NumericOptions {
            tolerance: 1e-4,
            shear_tolerance: 1e-3,
            max_nodes: 400_000,
        }
    }
}

/// Why a numerical section could not be solved.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum NumericError {
    #[error("the outline could not be meshed: {0}")]
    Mesh(String),
    #[error(transparent)]
    Solver(#[from] SolverError),
}

/// A wall sample: position along the wall and shear per unit gradient there.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WallSample {
    /// Which loop (0 = outer wall, then holes).
    pub wall: usize,
    /// Arc length from the loop's first node [m].
    pub s: f64,
    pub point: Point,
    /// τ/G [m].
    pub shear_per_gradient: f64,
}

/// The quadratic mesh and the solution on it, for plotting (SI).
#[derive(Clone, Debug, PartialEq)]
pub struct FieldMesh {
    pub nodes: Vec<Point>,
    /// Six node indices per triangle: vertices 0..3, then edge nodes (01, 12, 20).
    pub triangles: Vec<[usize; 6]>,
    /// φ = u·μ/G at each node [m²].
    pub phi: Vec<f64>,
}

/// Result of the numerical solution (SI).
#[derive(Clone, Debug, PartialEq)]
pub struct NumericSection {
    pub area: f64,
    pub perimeter: f64,
    pub conductance_factor: f64,
    pub max_wall_shear_per_gradient: f64,
    pub max_shear_at: Point,
    /// ∮(τ/G) ds / P, which force balance says equals A/P: a consistency check.
    pub mean_wall_shear_per_gradient_from_flux: f64,
    pub relative_error_estimate: f64,
    /// Relative change of the maximum wall shear between the last two meshes.
    pub shear_error_estimate: f64,
    pub wall: Vec<WallSample>,
    pub field: FieldMesh,
    pub refinements: usize,
}

/// Dunavant (1985) degree-4 rule on the reference triangle: (ξ, η, weight), weights summing
/// to 1 (multiply by the triangle's reference area 1/2).
const QUAD: [(f64, f64, f64); 6] = {
    const A: f64 = 0.445_948_490_915_965;
    const WA: f64 = 0.223_381_589_678_011;
    const B: f64 = 0.091_576_213_509_771;
    const WB: f64 = 0.109_951_743_655_322;
    [
        (A, A, WA),
        (1.0 - 2.0 * A, A, WA),
        (A, 1.0 - 2.0 * A, WA),
        (B, B, WB),
        (1.0 - 2.0 * B, B, WB),
        (B, 1.0 - 2.0 * B, WB),
    ]
};

/// P2 shape functions and their (ξ, η) derivatives at a reference point.
fn shape(xi: f64, eta: f64) -> ([f64; 6], [[f64; 2]; 6]) {
    let l1 = 1.0 - xi - eta;
    let (l2, l3) = (xi, eta);
    let n = [
        l1 * (2.0 * l1 - 1.0),
        l2 * (2.0 * l2 - 1.0),
        l3 * (2.0 * l3 - 1.0),
        4.0 * l1 * l2,
        4.0 * l2 * l3,
        4.0 * l3 * l1,
    ];
    // dλ1 = (−1, −1), dλ2 = (1, 0), dλ3 = (0, 1)
    let d = [
        [-(4.0 * l1 - 1.0), -(4.0 * l1 - 1.0)],
        [4.0 * l2 - 1.0, 0.0],
        [0.0, 4.0 * l3 - 1.0],
        [4.0 * (l1 - l2), -4.0 * l2],
        [4.0 * l3, 4.0 * l2],
        [-4.0 * l3, 4.0 * (l1 - l3)],
    ];
    (n, d)
}

/// Physical gradients of the 6 shape functions and |det J| at a reference point.
fn physical(xy: &[Point; 6], xi: f64, eta: f64) -> ([f64; 6], [[f64; 2]; 6], f64) {
    let (n, d) = shape(xi, eta);
    let mut j = [[0.0; 2]; 2]; // j[r][c] = ∂x_r/∂ξ_c
    for k in 0..6 {
        for r in 0..2 {
            for c in 0..2 {
                j[r][c] += xy[k][r] * d[k][c];
            }
        }
    }
    let det = j[0][0] * j[1][1] - j[0][1] * j[1][0];
    let inv = [
        [j[1][1] / det, -j[0][1] / det],
        [-j[1][0] / det, j[0][0] / det],
    ];
    let mut g = [[0.0; 2]; 6];
    for k in 0..6 {
        // ∇_x N = J^{-T} ∇_ξ N
        g[k][0] = inv[0][0] * d[k][0] + inv[1][0] * d[k][1];
        g[k][1] = inv[0][1] * d[k][0] + inv[1][1] * d[k][1];
    }
    (n, g, det.abs())
}

struct Mesh {
    nodes: Vec<Point>,
    tris: Vec<[usize; 6]>,
    /// Wall loops as ordered node lists (vertex, edge node, vertex, ...), closed implicitly.
    walls: Vec<Vec<usize>>,
}

/// Mesh the (normalised) chord polygons at `max_area`, then curve the arc walls.
fn mesh(loops: &[Vec<Point>], arcs: &[ArcInfo], max_area: f64) -> Result<Mesh, NumericError> {
    let mut cdt = ConstrainedDelaunayTriangulation::<Point2<f64>>::new();
    for l in loops {
        let handles: Vec<_> = l
            .iter()
            .map(|p| cdt.insert(Point2::new(p[0], p[1])))
            .collect::<Result<_, _>>()
            .map_err(|e| NumericError::Mesh(format!("{e:?}")))?;
        for k in 0..handles.len() {
            let (a, b) = (handles[k], handles[(k + 1) % handles.len()]);
            if a == b {
                continue;
            }
            if cdt.can_add_constraint(a, b) {
                cdt.add_constraint(a, b);
            } else {
                return Err(NumericError::Mesh(
                    "the outline crosses itself; give the vertices in order around the section"
                        .into(),
                ));
            }
        }
    }
    let params = RefinementParameters::<f64>::new()
        .exclude_outer_faces(true)
        .with_max_allowed_area(max_area)
        .with_angle_limit(spade::AngleLimit::from_deg(25.0))
        .with_max_additional_vertices(2_000_000);
    let result = cdt.refine(params);
    let excluded: std::collections::HashSet<_> = result.excluded_faces.iter().copied().collect();

    let mut nodes: Vec<Point> = cdt
        .vertices()
        .map(|v| [v.position().x, v.position().y])
        .collect();
    let mut tri3 = Vec::new();
    for f in cdt.inner_faces() {
        if excluded.contains(&f.fix()) {
            continue;
        }
        let v = f.vertices();
        tri3.push([v[0].fix().index(), v[1].fix().index(), v[2].fix().index()]);
    }
    if tri3.is_empty() {
        return Err(NumericError::Mesh("the outline encloses no area".into()));
    }
    // Edges: count uses; boundary edges are used once.
    let mut edge_use: HashMap<(usize, usize), u8> = HashMap::new();
    for t in &tri3 {
        for k in 0..3 {
            let (a, b) = (t[k], t[(k + 1) % 3]);
            *edge_use.entry((a.min(b), a.max(b))).or_insert(0) += 1;
        }
    }
    // A wall vertex belongs to an arc when it lies on that arc's chords (the mesher splits
    // chords, so new wall vertices sit on them); lid vertices near a corner do not.
    let on_arc = |p: Point| arcs.iter().find(|a| a.on_chords(p, 1e-10));
    // Move wall vertices that lie on (a chord of) an arc onto the arc.
    let mut wall_vertex = vec![false; nodes.len()];
    for (&(a, b), &n) in &edge_use {
        if n == 1 {
            wall_vertex[a] = true;
            wall_vertex[b] = true;
        }
    }
    for (i, is_wall) in wall_vertex.iter().enumerate() {
        if *is_wall {
            if let Some(arc) = on_arc(nodes[i]) {
                nodes[i] = arc.project(nodes[i]);
            }
        }
    }
    // Edge nodes.
    let mut edge_node: HashMap<(usize, usize), usize> = HashMap::new();
    let mut tris = Vec::with_capacity(tri3.len());
    for t in &tri3 {
        let mut six = [t[0], t[1], t[2], 0, 0, 0];
        for k in 0..3 {
            let (a, b) = (t[k], t[(k + 1) % 3]);
            let key = (a.min(b), a.max(b));
            let id = *edge_node.entry(key).or_insert_with(|| {
                let (pa, pb) = (nodes[a], nodes[b]);
                let mut m = [(pa[0] + pb[0]) / 2.0, (pa[1] + pb[1]) / 2.0];
                if edge_use.get(&key) == Some(&1) {
                    // An arc both ends lie on (a junction of two arcs belongs to both).
                    let near = |arc: &ArcInfo, p: Point| {
                        let r = ((p[0] - arc.center[0]).powi(2) + (p[1] - arc.center[1]).powi(2))
                            .sqrt();
                        (r - arc.radius).abs() < 1e-9 * arc.radius.max(1.0) && arc.covers(p)
                    };
                    if let Some(arc) = arcs.iter().find(|arc| near(arc, pa) && near(arc, pb)) {
                        m = arc.project(m);
                    }
                }
                nodes.push(m);
                nodes.len() - 1
            });
            six[3 + k] = id;
        }
        tris.push(six);
    }
    // Wall loops: follow boundary edges vertex to vertex.
    let mut next: HashMap<usize, Vec<usize>> = HashMap::new();
    for (&(a, b), &n) in &edge_use {
        if n == 1 {
            next.entry(a).or_default().push(b);
            next.entry(b).or_default().push(a);
        }
    }
    let mut visited = std::collections::HashSet::new();
    let mut starts: Vec<usize> = next.keys().copied().collect();
    starts.sort_unstable();
    let mut walls = Vec::new();
    for s in starts {
        if visited.contains(&s) {
            continue;
        }
        let mut lp = vec![s];
        visited.insert(s);
        let mut prev = usize::MAX;
        let mut cur = s;
        while let Some(cands) = next.get(&cur) {
            let Some(&nx) = cands
                .iter()
                .find(|&&c| c != prev && (c == s || !visited.contains(&c)))
            else {
                break;
            };
            let key = (cur.min(nx), cur.max(nx));
            lp.push(edge_node[&key]);
            if nx == s {
                break;
            }
            lp.push(nx);
            visited.insert(nx);
            prev = cur;
            cur = nx;
        }
        walls.push(lp);
    }
    Ok(Mesh { nodes, tris, walls })
}

struct Solved {
    k: f64,
    area: f64,
    phi: Vec<f64>,
    /// Nodal wall shear per gradient on each wall node.
    wall_shear: HashMap<usize, f64>,
}

fn solve_on(m: &Mesh) -> Result<Solved, NumericError> {
    let n = m.nodes.len();
    let mut fixed = vec![false; n];
    for w in &m.walls {
        for &i in w {
            fixed[i] = true;
        }
    }
    let mut unknown = vec![usize::MAX; n];
    let mut nu = 0;
    for i in 0..n {
        if !fixed[i] {
            unknown[i] = nu;
            nu += 1;
        }
    }
    // Element matrices.
    let mut positions = Vec::with_capacity(m.tris.len() * 21);
    let mut entries = Vec::with_capacity(m.tris.len() * 21);
    let mut load = vec![0.0; n];
    // Full stiffness rows of wall nodes, for the boundary flux: (wall node, other node, value).
    let mut wall_rows: Vec<(usize, usize, f64)> = Vec::new();
    let mut area = 0.0;
    for t in &m.tris {
        let xy: [Point; 6] = std::array::from_fn(|k| m.nodes[t[k]]);
        let mut ke = [[0.0; 6]; 6];
        let mut fe = [0.0; 6];
        for &(xi, eta, w) in &QUAD {
            let (nn, g, det) = physical(&xy, xi, eta);
            let wd = 0.5 * w * det;
            area += wd;
            for a in 0..6 {
                fe[a] += nn[a] * wd;
                for b in 0..6 {
                    ke[a][b] += (g[a][0] * g[b][0] + g[a][1] * g[b][1]) * wd;
                }
            }
        }
        for a in 0..6 {
            load[t[a]] += fe[a];
            for b in 0..6 {
                let (ia, ib) = (t[a], t[b]);
                if fixed[ia] {
                    wall_rows.push((ia, ib, ke[a][b]));
                }
                if !fixed[ia] && !fixed[ib] && unknown[ia] >= unknown[ib] {
                    positions.push((unknown[ia], unknown[ib]));
                    entries.push(ke[a][b]);
                }
            }
        }
    }
    let (pattern, slots) = SymmetricPattern::from_positions(nu, &positions);
    let mut values = vec![0.0; pattern.nnz()];
    for (s, v) in slots.iter().zip(&entries) {
        values[*s] += v;
    }
    let mut x: Vec<f64> = (0..n).filter(|&i| !fixed[i]).map(|i| load[i]).collect();
    if nu > 0 {
        let sym = SymbolicCholesky::analyse(&pattern, Parallelism::Sequential)?;
        let f = sym.factorize(&pattern, &values)?;
        f.solve_in_place(&mut x)?;
    }
    let mut phi = vec![0.0; n];
    for i in 0..n {
        if !fixed[i] {
            phi[i] = x[unknown[i]];
        }
    }
    let k: f64 = (0..n).map(|i| load[i] * phi[i]).sum();

    // Consistent wall flux: r_i = Σ_j A_ij φ_j − f_i at wall nodes equals −∮ N_i ∂φ/∂n ds
    // (outward normal); ∂φ/∂n ≤ 0 on the wall, so r_i = ∮ N_i τ ds with τ = −∂φ/∂n ≥ 0.
    let mut r: HashMap<usize, f64> = HashMap::new();
    for &(i, j, v) in &wall_rows {
        *r.entry(i).or_insert(0.0) += v * phi[j];
    }
    for (i, ri) in r.iter_mut() {
        // With outward normal n, r_i = −∮ N_i ∂φ/∂n ds − f_i·0 ... sign: the assembled residual
        // at a wall node is Σ_j A_ij φ_j − f_i = ∮ N_i ∂φ/∂n ds = −∮ N_i τ ds.
        *ri = load[*i] - *ri;
    }
    // 1-D P2 mass matrix along each wall loop: solve M·τ = r (small banded-cyclic systems;
    // solved with the same sparse Cholesky).
    let mut wall_shear = HashMap::new();
    for w in &m.walls {
        let len = w.len(); // even: vertex, edge node, vertex, ...
        let mut pos = Vec::new();
        let mut val = Vec::new();
        for e in 0..len / 2 {
            let ids = [2 * e, 2 * e + 1, (2 * e + 2) % len];
            let (p0, p1, p2) = (m.nodes[w[ids[0]]], m.nodes[w[ids[1]]], m.nodes[w[ids[2]]]);
            // Element length by 3-point Gauss on the quadratic curve.
            let mut me = [[0.0; 3]; 3];
            for &(s, ws) in &GAUSS3 {
                let nn = [
                    (1.0 - s) * (1.0 - 2.0 * s),
                    4.0 * s * (1.0 - s),
                    s * (2.0 * s - 1.0),
                ];
                let dn = [4.0 * s - 3.0, 4.0 - 8.0 * s, 4.0 * s - 1.0];
                let dx = dn[0] * p0[0] + dn[1] * p1[0] + dn[2] * p2[0];
                let dy = dn[0] * p0[1] + dn[1] * p1[1] + dn[2] * p2[1];
                let jac = (dx * dx + dy * dy).sqrt();
                for a in 0..3 {
                    for b in 0..3 {
                        me[a][b] += nn[a] * nn[b] * jac * ws;
                    }
                }
            }
            for a in 0..3 {
                for b in 0..3 {
                    if ids[a] >= ids[b] {
                        pos.push((ids[a], ids[b]));
                        val.push(me[a][b]);
                    }
                }
            }
        }
        let (pat, sl) = SymmetricPattern::from_positions(len, &pos);
        let mut mv = vec![0.0; pat.nnz()];
        for (s, v) in sl.iter().zip(&val) {
            mv[*s] += v;
        }
        let mut rhs: Vec<f64> = w.iter().map(|i| r.get(i).copied().unwrap_or(0.0)).collect();
        let sym = SymbolicCholesky::analyse(&pat, Parallelism::Sequential)?;
        sym.factorize(&pat, &mv)?.solve_in_place(&mut rhs)?;
        for (i, tau) in w.iter().zip(rhs) {
            wall_shear.insert(*i, tau);
        }
    }
    Ok(Solved {
        k,
        area,
        phi,
        wall_shear,
    })
}

/// Solve the Poisson problem over `outline` to the requested accuracy.
pub fn solve(outline: &Outline, opts: NumericOptions) -> Result<NumericSection, NumericError> {
    // Normalise to unit size: the mesher and the assembly work on O(1) numbers.
    let (coarse, _) = outline.chords(f64::INFINITY);
    let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
    for p in coarse.iter().flatten() {
        for d in 0..2 {
            lo[d] = lo[d].min(p[d]);
            hi[d] = hi[d].max(p[d]);
        }
    }
    let scale = (hi[0] - lo[0]).max(hi[1] - lo[1]);
    if !(scale.is_finite() && scale > 0.0) {
        return Err(NumericError::Mesh("the outline has no extent".into()));
    }
    let norm = |p: &Point| [(p[0] - lo[0]) / scale, (p[1] - lo[1]) / scale];
    let shoelace = |loops: &[Vec<Point>]| -> f64 {
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
    };
    let normalised: Vec<Vec<Point>> = coarse
        .iter()
        .map(|l| l.iter().map(norm).collect())
        .collect();
    let mut max_area = (shoelace(&normalised) / 60.0).max(1e-12);
    let mut previous: Option<(f64, f64)> = None;
    let mut last_change: Option<f64> = None;
    let mut refinements = 0;
    loop {
        // Arc chords follow the element size, so curved walls sharpen as the mesh refines.
        let h = (2.0 * max_area).sqrt();
        let (raw_loops, raw_arcs) = outline.chords(h * scale);
        let loops: Vec<Vec<Point>> = raw_loops
            .iter()
            .map(|l| l.iter().map(norm).collect())
            .collect();
        let arcs: Vec<ArcInfo> = raw_arcs
            .iter()
            .map(|a| ArcInfo {
                center: norm(&a.center),
                radius: a.radius / scale,
                chord: a.chord.iter().map(norm).collect(),
                ..*a
            })
            .collect();
        let m = mesh(&loops, &arcs, max_area)?;
        let s = solve_on(&m)?;
        let tau = max_wall_shear(&m, &s).0;
        let (change, shear_estimate) = previous.map_or((f64::INFINITY, f64::INFINITY), |(k, t)| {
            (((s.k - k) / s.k).abs(), ((tau - t) / tau).abs())
        });
        // Richardson: with three levels converging by a factor r = change_prev/change ≥ 2
        // per halving of h, the finer value's error is about change/(r − 1). Otherwise the
        // plain difference of the last two levels is reported (conservative).
        let estimate = match last_change {
            Some(prev) if change > 0.0 && prev / change >= 2.0 => change / (prev / change - 1.0),
            _ => change,
        };
        last_change = Some(change).filter(|c| c.is_finite());
        let converged = estimate <= opts.tolerance && shear_estimate <= opts.shear_tolerance;
        if converged || m.nodes.len() * 4 > opts.max_nodes {
            let mut out = finish(m, s, scale, lo, estimate, refinements);
            out.shear_error_estimate = shear_estimate;
            return Ok(out);
        }
        previous = Some((s.k, tau));
        max_area /= 4.0;
        refinements += 1;
    }
}

/// Length of a quadratic wall element and the integral of the quadratic interpolant of
/// `value` (by local node 0, 1 = middle, 2) along it, by 3-point Gauss–Legendre.
fn wall_element(nodes: &[Point], ids: [usize; 3], value: impl Fn(usize) -> f64) -> (f64, f64) {
    let (p0, p1, p2) = (nodes[ids[0]], nodes[ids[1]], nodes[ids[2]]);
    let (mut length, mut integral) = (0.0, 0.0);
    for &(t, wt) in &GAUSS3 {
        let nn = [
            (1.0 - t) * (1.0 - 2.0 * t),
            4.0 * t * (1.0 - t),
            t * (2.0 * t - 1.0),
        ];
        let dn = [4.0 * t - 3.0, 4.0 - 8.0 * t, 4.0 * t - 1.0];
        let dx = dn[0] * p0[0] + dn[1] * p1[0] + dn[2] * p2[0];
        let dy = dn[0] * p0[1] + dn[1] * p1[1] + dn[2] * p2[1];
        let jac = dx.hypot(dy);
        length += jac * wt;
        integral += (nn[0] * value(0) + nn[1] * value(1) + nn[2] * value(2)) * jac * wt;
    }
    (length, integral)
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
fn max_wall_shear(m: &Mesh, s: &Solved) -> (f64, usize) {
    let tau = |i: usize| s.wall_shear.get(&i).copied().unwrap_or(0.0);
    let mut best = (
        0.0f64,
        m.walls
            .first()
            .and_then(|w| w.first().copied())
            .unwrap_or(0),
    );
    for w in &m.walls {
        let len = w.len();
        for e in 0..len / 2 {
            let ids = [w[2 * e], w[2 * e + 1], w[(2 * e + 2) % len]];
            let (length, integral) = wall_element(&m.nodes, ids, |k| tau(ids[k]));
            if length > 0.0 && integral / length > best.0 {
                best = (integral / length, ids[1]);
            }
        }
    }
    best
}

/// 3-point Gauss–Legendre on [0, 1]: (point, weight).
const GAUSS3: [(f64, f64); 3] = [
    (0.5 - 0.387_298_334_620_741_7, 5.0 / 18.0),
    (0.5, 8.0 / 18.0),
    (0.5 + 0.387_298_334_620_741_7, 5.0 / 18.0),
];

fn finish(
    m: Mesh,
    s: Solved,
    scale: f64,
    lo: [f64; 2],
    estimate: f64,
    refinements: usize,
) -> NumericSection {
    let to_si = |p: Point| [p[0] * scale + lo[0], p[1] * scale + lo[1]];
    let mut wall = Vec::new();
    let mut perimeter = 0.0;
    let mut flux = 0.0;
    let (max_tau, max_node) = max_wall_shear(&m, &s);
    let max_at = to_si(m.nodes[max_node]);
    for (wi, w) in m.walls.iter().enumerate() {
        let len = w.len();
        let tau = |i: usize| s.wall_shear.get(&i).copied().unwrap_or(0.0);
        let mut sacc = 0.0;
        for e in 0..len / 2 {
            let ids = [w[2 * e], w[2 * e + 1], w[(2 * e + 2) % len]];
            let (length, integral) = wall_element(&m.nodes, ids, |k| tau(ids[k]));
            for (k, &i) in ids.iter().take(2).enumerate() {
                // Arc length of the edge node: half the element (exact for straight edges).
                let s_here = sacc + if k == 0 { 0.0 } else { length / 2.0 };
                wall.push(WallSample {
                    wall: wi,
                    s: s_here * scale,
                    point: to_si(m.nodes[i]),
                    shear_per_gradient: tau(i) * scale,
                });
            }
            flux += integral;
            sacc += length;
        }
        perimeter += sacc;
    }
    NumericSection {
        area: s.area * scale * scale,
        perimeter: perimeter * scale,
        conductance_factor: s.k * scale.powi(4),
        max_wall_shear_per_gradient: max_tau * scale,
        max_shear_at: max_at,
        mean_wall_shear_per_gradient_from_flux: flux / perimeter * scale,
        relative_error_estimate: estimate,
        shear_error_estimate: f64::NAN,
        wall,
        field: FieldMesh {
            nodes: m.nodes.iter().map(|&p| to_si(p)).collect(),
            triangles: m.tris,
            phi: s.phi.iter().map(|v| v * scale * scale).collect(),
        },
        refinements,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quadrature_is_exact_to_degree_4() {
        // ∫ ξ^a η^b over the reference triangle = a! b! / (a + b + 2)!.
        let fact = |n: u32| (1..=n).product::<u32>().max(1) as f64;
        for a in 0..=4u32 {
            for b in 0..=(4 - a) {
                let exact = fact(a) * fact(b) / fact(a + b + 2);
                let got: f64 = QUAD
                    .iter()
                    .map(|&(x, y, w)| 0.5 * w * x.powi(a as i32) * y.powi(b as i32))
                    .sum();
                assert!((got - exact).abs() < 1e-14, "{a} {b}: {got} vs {exact}");
            }
        }
    }
}

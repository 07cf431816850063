//! Mesh generation for the numerical solver: the unit-size frame the mesher and assembly work
//! in, the constrained-Delaunay quality mesh of the outline's chord polygons (spade) as the
//! base, newest-vertex bisection of marked triangles (nested, conforming levels), arc walls moved back onto their arcs,
//! the quadratic elements' edge nodes, and the wall loops.

use super::NumericError;
use crate::section::outline::{ArcInfo, Outline, Point};
use spade::{ConstrainedDelaunayTriangulation, Point2, RefinementParameters, Triangulation};
use std::collections::{HashMap, HashSet};

/// The section moved and scaled to unit size: the mesher and the assembly work on O(1)
/// numbers. A frame point p stands for the SI point p·scale + lo.
#[derive(Clone, Copy, Debug)]
pub(super) struct Frame {
    /// Larger side of the bounding box [m].
    pub(super) scale: f64,
    /// Lower-left corner of the bounding box [m].
    pub(super) lo: [f64; 2],
}

impl Frame {
    /// The frame of the bounding box of `loops` (SI points).
    pub(super) fn enclosing(loops: &[Vec<Point>]) -> Result<Frame, NumericError> {
        let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
        for p in loops.iter().flatten() {
            for d in 0..2 {
                lo[d] = lo[d].min(p[d]);
                hi[d] = hi[d].max(p[d]);
            }
        }
        let scale = (hi[0] - lo[0]).max(hi[1] - lo[1]);
        if !(scale.is_finite() && scale > 0.0) {
            return Err(NumericError::Mesh("the outline has no extent".into()));
        }
        Ok(Frame { scale, lo })
    }

    /// An SI point in the frame.
    pub(super) fn norm(&self, p: &Point) -> Point {
        [
            (p[0] - self.lo[0]) / self.scale,
            (p[1] - self.lo[1]) / self.scale,
        ]
    }

    /// A frame point in SI.
    pub(super) fn si(&self, p: Point) -> Point {
        [
            p[0] * self.scale + self.lo[0],
            p[1] * self.scale + self.lo[1],
        ]
    }

    /// SI loops in the frame.
    pub(super) fn norm_loops(&self, loops: &[Vec<Point>]) -> Vec<Vec<Point>> {
        loops
            .iter()
            .map(|l| l.iter().map(|p| self.norm(p)).collect())
            .collect()
    }
}

/// A quadratic triangle mesh (in the frame).
pub(super) struct Mesh {
    pub(super) nodes: Vec<Point>,
    /// Six node indices per triangle: vertices 0..3, then edge nodes (01, 12, 20).
    pub(super) tris: Vec<[usize; 6]>,
    /// Wall loops as ordered node lists (vertex, edge node, vertex, ...), closed implicitly.
    pub(super) walls: Vec<Vec<usize>>,
}

/// An edge as its two vertex indices, smaller first.
type Edge = (usize, usize);

fn edge(a: usize, b: usize) -> Edge {
    (a.min(b), a.max(b))
}

/// A linear triangle mesh (in the frame) with its walls on the outline: the base of each
/// refinement level.
pub(super) struct Linear {
    nodes: Vec<Point>,
    tris: Vec<[usize; 3]>,
    arcs: Vec<ArcInfo>,
}

/// The coarsest mesh of `outline`: triangles of area at most `max_area` (in the frame), graded
/// towards the re-entrant corners `singular` (frame points), wall vertices on arcs moved onto
/// the arcs.
pub(super) fn base(
    outline: &Outline,
    frame: &Frame,
    max_area: f64,
    singular: &[Point],
) -> Result<Linear, NumericError> {
    let h = (2.0 * max_area).sqrt();
    let (raw_loops, raw_arcs) = outline.chords(h * frame.scale);
    let loops: Vec<Vec<Point>> = frame
        .norm_loops(&raw_loops)
        .iter()
        .map(|l| grade(l, singular, h))
        .collect();
    let arcs: Vec<ArcInfo> = raw_arcs
        .iter()
        .map(|a| ArcInfo {
            center: frame.norm(&a.center),
            radius: a.radius / frame.scale,
            chord: a.chord.iter().map(|p| frame.norm(p)).collect(),
            ..*a
        })
        .collect();
    let (mut nodes, mut tris) = triangulate(&loops, max_area)?;
    snap_wall_vertices(&mut nodes, &edge_uses(&tris), &arcs);
    longest_edge_first(&nodes, &mut tris);
    Ok(Linear { nodes, tris, arcs })
}

/// Wall points at distances h/2, h/4, ..., h/2^GRADING from every re-entrant corner along its
/// two walls (within half of each wall segment): the quality mesher grades the elements down
/// towards the corner, where the solution is singular, and the refinement keeps the grading.
const GRADING: i32 = 6;

/// The loop `l` with grading points added next to the corners in `singular`.
fn grade(l: &[Point], singular: &[Point], h: f64) -> Vec<Point> {
    let is_singular = |p: Point| {
        singular
            .iter()
            .any(|c| (p[0] - c[0]).hypot(p[1] - c[1]) <= 1e-12)
    };
    let n = l.len();
    let mut out = Vec::with_capacity(n);
    for k in 0..n {
        let (a, b) = (l[k], l[(k + 1) % n]);
        out.push(a);
        let len = (b[0] - a[0]).hypot(b[1] - a[1]);
        if len == 0.0 {
            continue;
        }
        let mut ts: Vec<f64> = Vec::new();
        for j in 1..=GRADING {
            let d = h * 0.5f64.powi(j) / len;
            if d < 0.5 {
                if is_singular(a) {
                    ts.push(d);
                }
                if is_singular(b) {
                    ts.push(1.0 - d);
                }
            }
        }
        ts.sort_by(f64::total_cmp);
        out.extend(
            ts.iter()
                .map(|&t| [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])]),
        );
    }
    out
}

/// Newest-vertex bisection of the triangles `marked` (Mitchell 1991, "Adaptive refinement for
/// arbitrary finite-element spaces with hierarchical bases", J. Comput. Appl. Math. 36; the
/// closure as in Bänsch 1991, "Local mesh refinement in 2 and 3 dimensions", IMPACT Comput.
/// Sci. Eng. 3): every edge of a marked triangle is bisected; a triangle with a bisected edge
/// has its refinement edge (opposite its newest vertex, `tris[t][0]`) bisected too, until no
/// triangle needs more; then each triangle is split on its refinement edge and its children on
/// theirs where bisected (at most four children). The result is conforming, nested in the
/// input (every old triangle is a union of new ones) and of bounded shape: bisection produces
/// finitely many similarity classes per base triangle. Midpoints of arc walls go on the arc.
pub(super) fn bisect(lin: &Linear, marked: &[bool]) -> Linear {
    let mut split: HashSet<Edge> = HashSet::new();
    for (t, _) in lin.tris.iter().zip(marked).filter(|(_, &m)| m) {
        for k in 0..3 {
            split.insert(edge(t[k], t[(k + 1) % 3]));
        }
    }
    loop {
        let mut added = false;
        for t in &lin.tris {
            let has = (0..3).any(|k| split.contains(&edge(t[k], t[(k + 1) % 3])));
            if has && split.insert(edge(t[1], t[2])) {
                added = true;
            }
        }
        if !added {
            break;
        }
    }
    let edge_use = edge_uses(&lin.tris);
    let mut nodes = lin.nodes.clone();
    let mut mid: HashMap<Edge, usize> = HashMap::new();
    let mut midpoint = |a: usize, b: usize, nodes: &mut Vec<Point>| -> usize {
        let key = edge(a, b);
        *mid.entry(key).or_insert_with(|| {
            let p = edge_midpoint(nodes, key, &edge_use, &lin.arcs);
            nodes.push(p);
            nodes.len() - 1
        })
    };
    let mut tris = Vec::with_capacity(lin.tris.len() * 2);
    for &t in &lin.tris {
        if !split.contains(&edge(t[1], t[2])) {
            tris.push(t);
            continue;
        }
        let m = midpoint(t[1], t[2], &mut nodes);
        for child in [[m, t[0], t[1]], [m, t[2], t[0]]] {
            if split.contains(&edge(child[1], child[2])) {
                let m2 = midpoint(child[1], child[2], &mut nodes);
                tris.push([m2, child[0], child[1]]);
                tris.push([m2, child[2], child[0]]);
            } else {
                tris.push(child);
            }
        }
    }
    Linear {
        nodes,
        tris,
        arcs: lin.arcs.clone(),
    }
}

/// The number of nodes of the quadratic mesh on `lin` (vertices and edges).
pub(super) fn quadratic_node_count(lin: &Linear) -> usize {
    lin.nodes.len() + edge_uses(&lin.tris).len()
}

/// The number of triangles of `lin`.
pub(super) fn triangle_count(lin: &Linear) -> usize {
    lin.tris.len()
}

/// The middle of edge `key`: on the arc when it is a wall edge with both ends on one arc.
fn edge_midpoint(
    nodes: &[Point],
    key: Edge,
    edge_use: &HashMap<Edge, u8>,
    arcs: &[ArcInfo],
) -> Point {
    let (pa, pb) = (nodes[key.0], nodes[key.1]);
    let m = [(pa[0] + pb[0]) / 2.0, (pa[1] + pb[1]) / 2.0];
    if edge_use.get(&key) == Some(&1) {
        if let Some(arc) = arcs
            .iter()
            .find(|arc| lies_on_arc(arc, pa) && lies_on_arc(arc, pb))
        {
            return arc.project(m);
        }
    }
    m
}

/// Each triangle turned so that its longest edge is its refinement edge (vertices 1, 2): the
/// usual first choice for newest-vertex bisection, which then halves the longest edges first.
fn longest_edge_first(nodes: &[Point], tris: &mut [[usize; 3]]) {
    let len2 = |a: usize, b: usize| {
        let (p, q) = (nodes[a], nodes[b]);
        (p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2)
    };
    for t in tris.iter_mut() {
        let opposite = [len2(t[1], t[2]), len2(t[2], t[0]), len2(t[0], t[1])];
        let k = (0..3)
            .max_by(|&i, &j| opposite[i].total_cmp(&opposite[j]))
            .unwrap_or(0);
        t.rotate_left(k);
    }
}

/// The quadratic mesh on `lin`: edge nodes added, wall loops traced.
pub(super) fn quadratic(lin: &Linear) -> Mesh {
    let mut nodes = lin.nodes.clone();
    let edge_use = edge_uses(&lin.tris);
    let (tris, edge_node) = add_edge_nodes(&mut nodes, &lin.tris, &edge_use, &lin.arcs);
    let walls = trace_walls(&edge_use, &edge_node);
    Mesh { nodes, tris, walls }
}

/// How many triangles use each edge (wall edges: one).
fn edge_uses(tris: &[[usize; 3]]) -> HashMap<Edge, u8> {
    let mut edge_use: HashMap<Edge, u8> = HashMap::new();
    for t in tris {
        for k in 0..3 {
            *edge_use.entry(edge(t[k], t[(k + 1) % 3])).or_insert(0) += 1;
        }
    }
    edge_use
}

/// The linear quality mesh of the chord polygons: vertices and triangles inside the outline
/// (minimum angle 25°, area at most `max_area`).
fn triangulate(
    loops: &[Vec<Point>],
    max_area: f64,
) -> Result<(Vec<Point>, Vec<[usize; 3]>), NumericError> {
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
    let excluded: HashSet<_> = result.excluded_faces.iter().copied().collect();

    let nodes: Vec<Point> = cdt
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
    Ok(drop_unused(nodes, tri3))
}

/// Keep only the vertices of some triangle (a wall point the mesher left outside every kept
/// triangle would otherwise be an unknown without an equation), renumbered in order.
fn drop_unused(nodes: Vec<Point>, mut tri3: Vec<[usize; 3]>) -> (Vec<Point>, Vec<[usize; 3]>) {
    let mut new_index = vec![usize::MAX; nodes.len()];
    for t in &tri3 {
        for &i in t {
            new_index[i] = 0;
        }
    }
    let mut kept = Vec::with_capacity(nodes.len());
    for (i, p) in nodes.into_iter().enumerate() {
        if new_index[i] == 0 {
            new_index[i] = kept.len();
            kept.push(p);
        }
    }
    for t in &mut tri3 {
        for i in t.iter_mut() {
            *i = new_index[*i];
        }
    }
    (kept, tri3)
}

/// Move wall vertices that lie on (a chord of) an arc onto the arc.
///
/// A wall vertex belongs to an arc when it lies on that arc's chords (the mesher splits
/// chords, so new wall vertices sit on them); lid vertices near a corner do not.
fn snap_wall_vertices(nodes: &mut [Point], edge_use: &HashMap<Edge, u8>, arcs: &[ArcInfo]) {
    let arc_of = |p: Point| arcs.iter().find(|a| a.on_chords(p, 1e-10));
    let mut wall_vertex = vec![false; nodes.len()];
    for (&(a, b), &n) in edge_use {
        if n == 1 {
            wall_vertex[a] = true;
            wall_vertex[b] = true;
        }
    }
    for (i, is_wall) in wall_vertex.iter().enumerate() {
        if *is_wall {
            if let Some(arc) = arc_of(nodes[i]) {
                nodes[i] = arc.project(nodes[i]);
            }
        }
    }
}

/// Whether `p` lies on the circle of `arc` (relative tolerance 1e-9) within its angular range.
fn lies_on_arc(arc: &ArcInfo, p: Point) -> bool {
    let r = ((p[0] - arc.center[0]).powi(2) + (p[1] - arc.center[1]).powi(2)).sqrt();
    (r - arc.radius).abs() < 1e-9 * arc.radius.max(1.0) && arc.covers(p)
}

/// Give every edge its middle node (appended to `nodes`) and make the six-node triangles.
/// The middle node of a wall edge whose ends both lie on one arc is placed on that arc (a
/// junction of two arcs belongs to both). Returns the triangles and each edge's middle node.
fn add_edge_nodes(
    nodes: &mut Vec<Point>,
    tri3: &[[usize; 3]],
    edge_use: &HashMap<Edge, u8>,
    arcs: &[ArcInfo],
) -> (Vec<[usize; 6]>, HashMap<Edge, usize>) {
    let mut edge_node: HashMap<Edge, usize> = HashMap::new();
    let mut tris = Vec::with_capacity(tri3.len());
    for t in tri3 {
        let mut six = [t[0], t[1], t[2], 0, 0, 0];
        for k in 0..3 {
            let (a, b) = (t[k], t[(k + 1) % 3]);
            let key = edge(a, b);
            let id = *edge_node.entry(key).or_insert_with(|| {
                let m = edge_midpoint(nodes, key, edge_use, arcs);
                nodes.push(m);
                nodes.len() - 1
            });
            six[3 + k] = id;
        }
        tris.push(six);
    }
    (tris, edge_node)
}

/// Wall loops: follow boundary edges vertex to vertex, with each edge's middle node between.
fn trace_walls(edge_use: &HashMap<Edge, u8>, edge_node: &HashMap<Edge, usize>) -> Vec<Vec<usize>> {
    let mut next: HashMap<usize, Vec<usize>> = HashMap::new();
    for (&(a, b), &n) in edge_use {
        if n == 1 {
            next.entry(a).or_default().push(b);
            next.entry(b).or_default().push(a);
        }
    }
    // Sorted neighbours: the walk (and so every wall figure, to the last bit) does not
    // depend on the hash map's iteration order.
    for cands in next.values_mut() {
        cands.sort_unstable();
    }
    let mut visited = HashSet::new();
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
            lp.push(edge_node[&edge(cur, nx)]);
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
    walls
}

//! Cross-section outlines: closed loops of straight segments and circular arcs (SI, metres).
//!
//! The numerical solver meshes the straight-chord approximation of the outline, then moves
//! every boundary node that belongs to an arc back onto the arc and places the quadratic
//! elements' edge nodes on it, so curved walls are represented to the elements' own order.

use std::f64::consts::PI;

/// A point in the cross-section plane [m].
pub type Point = [f64; 2];

/// One piece of a boundary loop, from the previous piece's end to `to`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Piece {
    /// Straight segment to `to`.
    Line { to: Point },
    /// Circular arc around `center` to `to` (the short way, counter-clockwise if `ccw`).
    Arc { to: Point, center: Point, ccw: bool },
}

impl Piece {
    pub fn end(&self) -> Point {
        match *self {
            Piece::Line { to } | Piece::Arc { to, .. } => to,
        }
    }
}

/// A closed loop: a start point and pieces; the last piece ends at the start.
#[derive(Clone, Debug, PartialEq)]
pub struct Loop {
    pub start: Point,
    pub pieces: Vec<Piece>,
}

/// The outline of a cross-section: one outer loop and optional holes.
#[derive(Clone, Debug, PartialEq)]
pub struct Outline {
    pub loops: Vec<Loop>,
}

/// An arc known to the mesher: nodes close to it are projected onto it.
#[derive(Clone, Debug, PartialEq)]
pub struct ArcInfo {
    pub center: Point,
    pub radius: f64,
    /// Start angle and signed sweep [rad].
    pub start: f64,
    pub sweep: f64,
    /// The chord polyline that stands for the arc in the mesher's input.
    pub chord: Vec<Point>,
}

impl ArcInfo {
    /// Whether `p` lies within the arc's angular range (with a small tolerance).
    pub fn covers(&self, p: Point) -> bool {
        let a = (p[1] - self.center[1]).atan2(p[0] - self.center[0]);
        let mut rel = (a - self.start) * self.sweep.signum();
        rel = rel.rem_euclid(2.0 * PI);
        rel <= self.sweep.abs() + 1e-9 || rel >= 2.0 * PI - 1e-9
    }

    /// Whether `p` lies on the arc's chord polyline (within `tol`).
    pub fn on_chords(&self, p: Point, tol: f64) -> bool {
        self.chord.windows(2).any(|s| {
            let (a, b) = (s[0], s[1]);
            let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
            let len2 = dx * dx + dy * dy;
            let t = if len2 > 0.0 {
                (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / len2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let (qx, qy) = (a[0] + t * dx - p[0], a[1] + t * dy - p[1]);
            (qx * qx + qy * qy).sqrt() <= tol
        })
    }

    /// The point of the circle in the direction of `p`.
    pub fn project(&self, p: Point) -> Point {
        let (dx, dy) = (p[0] - self.center[0], p[1] - self.center[1]);
        let d = (dx * dx + dy * dy).sqrt();
        if d == 0.0 {
            return p;
        }
        [
            self.center[0] + self.radius * dx / d,
            self.center[1] + self.radius * dy / d,
        ]
    }
}

impl Outline {
    /// A single polygon loop through `points` (closed automatically).
    pub fn polygon(points: &[Point]) -> Outline {
        let mut pieces: Vec<Piece> = points[1..].iter().map(|&to| Piece::Line { to }).collect();
        pieces.push(Piece::Line { to: points[0] });
        Outline {
            loops: vec![Loop {
                start: points[0],
                pieces,
            }],
        }
    }

    /// The chord polygon of each loop, arcs split into chords no longer than `max_chord` and
    /// spanning at most 15°, and the arcs' descriptions.
    pub fn chords(&self, max_chord: f64) -> (Vec<Vec<Point>>, Vec<ArcInfo>) {
        let mut loops = Vec::new();
        let mut arcs = Vec::new();
        for l in &self.loops {
            let mut pts = vec![l.start];
            let mut from = l.start;
            for piece in &l.pieces {
                match *piece {
                    Piece::Line { to } => pts.push(to),
                    Piece::Arc { to, center, ccw } => {
                        let r =
                            ((from[0] - center[0]).powi(2) + (from[1] - center[1]).powi(2)).sqrt();
                        let a0 = (from[1] - center[1]).atan2(from[0] - center[0]);
                        let a1 = (to[1] - center[1]).atan2(to[0] - center[0]);
                        let mut sweep = a1 - a0;
                        if ccw && sweep <= 0.0 {
                            sweep += 2.0 * PI;
                        }
                        if !ccw && sweep >= 0.0 {
                            sweep -= 2.0 * PI;
                        }
                        let by_length = (r * sweep.abs() / max_chord).ceil();
                        let by_angle = (sweep.abs() / (PI / 12.0)).ceil();
                        let n = (by_length.max(by_angle) as usize).clamp(2, 100_000);
                        let mut chord = vec![from];
                        for k in 1..n {
                            let a = a0 + sweep * k as f64 / n as f64;
                            chord.push([center[0] + r * a.cos(), center[1] + r * a.sin()]);
                        }
                        chord.push(to);
                        pts.extend_from_slice(&chord[1..]);
                        arcs.push(ArcInfo {
                            center,
                            radius: r,
                            start: a0,
                            sweep,
                            chord,
                        });
                    }
                }
                from = piece.end();
            }
            // The closing point repeats the start.
            pts.pop();
            loops.push(pts);
        }
        (loops, arcs)
    }
}

/// A corner of an outline: where two pieces of a loop meet at an angle.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Corner {
    /// Where the pieces meet [m].
    pub at: Point,
    /// Interior angle on the fluid side [rad]: below π convex, above π re-entrant.
    pub interior_angle: f64,
}

impl Corner {
    /// Whether the fluid surrounds the corner (interior angle above 180°): the wall gradient
    /// there grows without bound as r^(π/α − 1) (α the interior angle, r the distance).
    pub fn is_re_entrant(&self) -> bool {
        self.interior_angle > PI + CORNER_ANGLE_TOLERANCE
    }
}

/// Junctions whose direction changes by less than this [rad] are smooth (a tangent arc, a
/// collinear point), not corners.
const CORNER_ANGLE_TOLERANCE: f64 = 1e-7;

impl Outline {
    /// Every corner of the outline: the junctions between pieces where the wall direction
    /// jumps (arcs are smooth inside; a tangent junction is no corner), with the interior
    /// angle on the fluid side (inside the outer loop, outside the holes).
    pub fn corners(&self) -> Vec<Corner> {
        let (chords, _) = self.chords(f64::INFINITY);
        let mut out = Vec::new();
        for (li, l) in self.loops.iter().enumerate() {
            let signed: f64 = chords.get(li).map_or(0.0, |c| signed_area(c));
            // Fluid on the left of the direction of travel?
            let fluid_left = (signed > 0.0) == (li == 0);
            // (start point, tangent at start, tangent at end) of every piece of non-zero length.
            let mut from = l.start;
            let mut ends: Vec<(Point, [f64; 2], [f64; 2])> = Vec::new();
            for piece in &l.pieces {
                let to = piece.end();
                if to != from {
                    let (t0, t1) = match *piece {
                        Piece::Line { to } => {
                            let d = [to[0] - from[0], to[1] - from[1]];
                            (d, d)
                        }
                        Piece::Arc { to, center, ccw } => {
                            let tangent = |p: Point| {
                                let (dx, dy) = (p[0] - center[0], p[1] - center[1]);
                                if ccw {
                                    [-dy, dx]
                                } else {
                                    [dy, -dx]
                                }
                            };
                            (tangent(from), tangent(to))
                        }
                    };
                    ends.push((from, t0, t1));
                }
                from = to;
            }
            let n = ends.len();
            for k in 0..n {
                let (at, out_dir, _) = ends[k];
                let in_dir = ends[(k + n - 1) % n].2;
                let cross = in_dir[0] * out_dir[1] - in_dir[1] * out_dir[0];
                let dot = in_dir[0] * out_dir[0] + in_dir[1] * out_dir[1];
                let turn = cross.atan2(dot); // left turn positive
                if turn.abs() <= CORNER_ANGLE_TOLERANCE {
                    continue;
                }
                let interior_angle = if fluid_left { PI - turn } else { PI + turn };
                out.push(Corner { at, interior_angle });
            }
        }
        out
    }
}

/// Signed area of a closed polygon (positive counter-clockwise).
fn signed_area(p: &[Point]) -> f64 {
    (0..p.len())
        .map(|k| {
            let (a, b) = (p[k], p[(k + 1) % p.len()]);
            a[0] * b[1] - a[1] * b[0]
        })
        .sum::<f64>()
        / 2.0
}

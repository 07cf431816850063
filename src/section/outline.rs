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

//! Label placement without overlaps, in pixel coordinates (x right, y down).
//!
//! Every drawn mark is registered first as an obstacle: line segments with their half stroke
//! width, and boxes (node markers, arrowheads, colour bar, titles). A label then takes the
//! first candidate position whose box is inside the picture and touches no obstacle; the
//! placed box becomes an obstacle for the labels after it. A candidate away from its anchor
//! gets a leader line, which must not cross another label either. A label with no free
//! candidate is dropped (callers place the most important labels first).
//!
//! Text boxes are estimated from the font size and the number of characters, on the large
//! side (DejaVu Sans digits are 0.64 em wide, most lower-case letters less; common practice
//! for layout without measuring glyphs). A uniform grid of buckets keeps queries local, so
//! placing a label costs O(obstacles nearby), not O(all obstacles).

use std::collections::HashMap;

/// Width of one character as a fraction of the font size (generous: see the module doc).
pub const CHAR_EM: f64 = 0.64;
/// Height of a line of text as a fraction of the font size.
pub const LINE_EM: f64 = 1.2;
/// Clear space kept around text [px].
pub const PAD: f64 = 2.0;

/// An axis-aligned box.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rect {
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

impl Rect {
    pub fn new(x0: f64, y0: f64, x1: f64, y1: f64) -> Rect {
        Rect {
            x0: x0.min(x1),
            y0: y0.min(y1),
            x1: x0.max(x1),
            y1: y0.max(y1),
        }
    }

    /// Open intersection: boxes that only touch do not intersect.
    pub fn intersects(&self, o: &Rect) -> bool {
        self.x0 < o.x1 && o.x0 < self.x1 && self.y0 < o.y1 && o.y0 < self.y1
    }

    pub fn inflate(&self, d: f64) -> Rect {
        Rect::new(self.x0 - d, self.y0 - d, self.x1 + d, self.y1 + d)
    }

    pub fn contains(&self, o: &Rect) -> bool {
        o.x0 >= self.x0 && o.x1 <= self.x1 && o.y0 >= self.y0 && o.y1 <= self.y1
    }

    /// The point of the box nearest to `p`.
    pub fn nearest(&self, p: [f64; 2]) -> [f64; 2] {
        [p[0].clamp(self.x0, self.x1), p[1].clamp(self.y0, self.y1)]
    }
}

/// Size (w, h) of `lines` lines of text at font size `size`, the longest with `chars`
/// characters.
pub fn text_size(chars: usize, lines: usize, size: f64) -> (f64, f64) {
    (chars as f64 * CHAR_EM * size, lines as f64 * LINE_EM * size)
}

/// Does the segment a–b pass through the interior of `r`? (Liang–Barsky clipping.)
pub fn segment_hits_rect(a: [f64; 2], b: [f64; 2], r: &Rect) -> bool {
    let d = [b[0] - a[0], b[1] - a[1]];
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-d[0], a[0] - r.x0),
        (d[0], r.x1 - a[0]),
        (-d[1], a[1] - r.y0),
        (d[1], r.y1 - a[1]),
    ] {
        if p == 0.0 {
            if q <= 0.0 {
                return false;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
        }
    }
    t0 < t1
}

/// A drawn mark that labels must avoid.
#[derive(Clone, Copy, Debug)]
enum Mark {
    /// A segment and the half width of its stroke (plus clearance).
    Segment([f64; 2], [f64; 2], f64),
    Box(Rect),
}

impl Mark {
    fn bounds(&self) -> Rect {
        match *self {
            Mark::Segment(a, b, h) => Rect::new(a[0], a[1], b[0], b[1]).inflate(h),
            Mark::Box(r) => r,
        }
    }

    fn hits(&self, r: &Rect) -> bool {
        match *self {
            // A thick segment hits the box when its centre line hits the box grown by the
            // half width (exact for axis-aligned segments, slightly generous for oblique ones).
            Mark::Segment(a, b, h) => segment_hits_rect(a, b, &r.inflate(h)),
            Mark::Box(b) => b.intersects(r),
        }
    }
}

const CELL: f64 = 48.0;

/// Where a label may go: its box's top-left corner, and the point it labels (for a leader
/// line when the box does not touch it).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Candidate {
    pub x: f64,
    pub y: f64,
    pub anchor: [f64; 2],
}

/// A placed label: the top-left corner of its box and the leader line, if any.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Placement {
    pub x: f64,
    pub y: f64,
    pub leader: Option<([f64; 2], [f64; 2])>,
}

/// All marks drawn so far, bucketed on a grid, and the picture's bounds.
#[derive(Debug)]
pub struct Obstacles {
    bounds: Rect,
    marks: Vec<Mark>,
    /// Indices into `marks` of the placed labels (leaders must not cross them).
    labels: Vec<usize>,
    grid: HashMap<(i32, i32), Vec<usize>>,
    /// Every segment longer than this many cells is kept out of the grid and tested always.
    long: Vec<usize>,
}

impl Obstacles {
    pub fn new(bounds: Rect) -> Obstacles {
        Obstacles {
            bounds,
            marks: Vec::new(),
            labels: Vec::new(),
            grid: HashMap::new(),
            long: Vec::new(),
        }
    }

    fn cells(r: &Rect) -> (i32, i32, i32, i32) {
        (
            (r.x0 / CELL).floor() as i32,
            (r.y0 / CELL).floor() as i32,
            (r.x1 / CELL).floor() as i32,
            (r.y1 / CELL).floor() as i32,
        )
    }

    fn push(&mut self, m: Mark) -> usize {
        let i = self.marks.len();
        self.marks.push(m);
        let b = m.bounds();
        let (cx0, cy0, cx1, cy1) = Self::cells(&b);
        let n = (cx1 - cx0 + 1) as i64 * (cy1 - cy0 + 1) as i64;
        if n > 64 {
            self.long.push(i);
        } else {
            for cx in cx0..=cx1 {
                for cy in cy0..=cy1 {
                    self.grid.entry((cx, cy)).or_default().push(i);
                }
            }
        }
        i
    }

    /// A stroked segment of the given stroke width.
    pub fn add_segment(&mut self, a: [f64; 2], b: [f64; 2], stroke: f64) {
        self.push(Mark::Segment(a, b, stroke / 2.0 + PAD));
    }

    /// Every segment of a stroked polyline.
    pub fn add_path(&mut self, pts: &[[f64; 2]], stroke: f64) {
        for w in pts.windows(2) {
            self.add_segment(w[0], w[1], stroke);
        }
    }

    /// A filled or framed box (a marker, a legend, a title).
    pub fn add_box(&mut self, r: Rect) {
        self.push(Mark::Box(r));
    }

    /// Is the box free of every mark and inside the picture?
    pub fn is_free(&self, r: &Rect) -> bool {
        if !self.bounds.contains(r) {
            return false;
        }
        let (cx0, cy0, cx1, cy1) = Self::cells(r);
        for cx in cx0..=cx1 {
            for cy in cy0..=cy1 {
                if let Some(list) = self.grid.get(&(cx, cy)) {
                    if list.iter().any(|&i| self.marks[i].hits(r)) {
                        return false;
                    }
                }
            }
        }
        !self.long.iter().any(|&i| self.marks[i].hits(r))
    }

    /// Does the segment a–b cross a placed label?
    fn crosses_label(&self, a: [f64; 2], b: [f64; 2]) -> bool {
        self.labels.iter().any(|&i| match self.marks[i] {
            Mark::Box(r) => segment_hits_rect(a, b, &r),
            Mark::Segment(..) => false,
        })
    }

    /// Place a box of size (w, h) at the first free candidate; record it (and its leader) as
    /// obstacles. `None` when no candidate is free.
    pub fn place(
        &mut self,
        (w, h): (f64, f64),
        candidates: impl IntoIterator<Item = Candidate>,
    ) -> Option<Placement> {
        for c in candidates {
            let r = Rect::new(c.x, c.y, c.x + w, c.y + h);
            let padded = r.inflate(PAD);
            if !self.is_free(&padded) {
                continue;
            }
            let near = padded.nearest(c.anchor);
            let gap = (near[0] - c.anchor[0]).hypot(near[1] - c.anchor[1]);
            let leader = if gap > 0.75 * h.max(12.0) {
                let from = near;
                if self.crosses_label(c.anchor, from) {
                    continue;
                }
                Some((c.anchor, from))
            } else {
                None
            };
            let i = self.push(Mark::Box(padded));
            self.labels.push(i);
            if let Some((a, b)) = leader {
                self.add_segment(a, b, 1.0);
            }
            return Some(Placement {
                x: c.x,
                y: c.y,
                leader,
            });
        }
        None
    }
}

/// Candidate positions for a box of size (w, h) labelling a point: touching it on every side
/// (right, left, below, above, then the corners), then the same rings at `rings` growing
/// distances (those get a leader line).
pub fn around_point(p: [f64; 2], clear: f64, (w, h): (f64, f64), rings: usize) -> Vec<Candidate> {
    let mut out = Vec::new();
    for k in 0..=rings {
        let d = clear + 2.0 * PAD + 1.0 + k as f64 * (h + 6.0);
        for (x, y) in [
            (p[0] + d, p[1] - h / 2.0),
            (p[0] - d - w, p[1] - h / 2.0),
            (p[0] - w / 2.0, p[1] + d),
            (p[0] - w / 2.0, p[1] - d - h),
            (p[0] + d, p[1] + d),
            (p[0] + d, p[1] - d - h),
            (p[0] - d - w, p[1] + d),
            (p[0] - d - w, p[1] - d - h),
            (p[0] + 0.0, p[1] + d),
            (p[0] - w, p[1] + d),
            (p[0] + 0.0, p[1] - d - h),
            (p[0] - w, p[1] - d - h),
        ] {
            out.push(Candidate { x, y, anchor: p });
        }
    }
    out
}

/// Candidate positions for a box of size (w, h) labelling a stroked polyline: beside points
/// along each segment (longest segments first; middle first, then towards the ends), on both
/// sides, then further out (with a leader line).
pub fn along_path(pts: &[[f64; 2]], half_width: f64, (w, h): (f64, f64)) -> Vec<Candidate> {
    let mut segs: Vec<usize> = (0..pts.len().saturating_sub(1)).collect();
    let len = |i: usize| (pts[i + 1][0] - pts[i][0]).hypot(pts[i + 1][1] - pts[i][1]);
    segs.sort_by(|&a, &b| len(b).total_cmp(&len(a)).then(a.cmp(&b)));
    let mut out = Vec::new();
    for ring in 0..4 {
        for &i in &segs {
            let (a, b) = (pts[i], pts[i + 1]);
            let l = len(i);
            if l < 1e-9 {
                continue;
            }
            let (tx, ty) = ((b[0] - a[0]) / l, (b[1] - a[1]) / l);
            for t in [0.5, 0.35, 0.65, 0.2, 0.8, 0.1, 0.9] {
                let p = [a[0] + (b[0] - a[0]) * t, a[1] + (b[1] - a[1]) * t];
                // Normal pointing up (or right, beside vertical lines) first.
                let n1 = if tx > 1e-12 || (tx.abs() <= 1e-12 && ty > 0.0) {
                    [ty, -tx]
                } else {
                    [-ty, tx]
                };
                for [nx, ny] in [n1, [-n1[0], -n1[1]]] {
                    // Distance from the line to the box centre along the normal.
                    let extent = nx.abs() * w / 2.0 + ny.abs() * h / 2.0;
                    // Clear of the line's own obstacle (half width + PAD) and of the box's padding.
                    let d = half_width + 2.0 * PAD + 1.0 + extent + ring as f64 * (h + 8.0);
                    let c = [p[0] + nx * d, p[1] + ny * d];
                    out.push(Candidate {
                        x: c[0] - w / 2.0,
                        y: c[1] - h / 2.0,
                        anchor: p,
                    });
                }
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn segments_and_boxes() {
        let r = Rect::new(10.0, 10.0, 20.0, 20.0);
        assert!(segment_hits_rect([0.0, 15.0], [30.0, 15.0], &r));
        assert!(segment_hits_rect([15.0, 15.0], [16.0, 16.0], &r)); // inside
        assert!(!segment_hits_rect([0.0, 0.0], [30.0, 5.0], &r));
        assert!(!segment_hits_rect([0.0, 10.0], [30.0, 10.0], &r)); // along an edge
        assert!(segment_hits_rect([0.0, 0.0], [30.0, 30.0], &r)); // diagonal
        assert!(!segment_hits_rect(
            [0.0, 25.0],
            [25.0, 0.0],
            &Rect::new(0.0, 0.0, 10.0, 10.0)
        ));
        assert!(Rect::new(0.0, 0.0, 2.0, 2.0).intersects(&Rect::new(1.0, 1.0, 3.0, 3.0)));
        assert!(!Rect::new(0.0, 0.0, 2.0, 2.0).intersects(&Rect::new(2.0, 0.0, 3.0, 3.0)));
    }

    #[test]
    fn a_label_avoids_a_thick_line_and_an_earlier_label() {
        let mut obs = Obstacles::new(Rect::new(0.0, 0.0, 400.0, 300.0));
        obs.add_segment([20.0, 150.0], [380.0, 150.0], 10.0);
        let size = text_size(10, 1, 12.0);
        let cands = along_path(&[[20.0, 150.0], [380.0, 150.0]], 5.0, size);
        let p1 = obs.place(size, cands.clone()).expect("room");
        let r1 = Rect::new(p1.x, p1.y, p1.x + size.0, p1.y + size.1);
        assert!(r1.y1 <= 150.0 - 5.0, "above the line: {r1:?}");
        assert!(p1.leader.is_none());
        let p2 = obs.place(size, cands).expect("room");
        let r2 = Rect::new(p2.x, p2.y, p2.x + size.0, p2.y + size.1);
        assert!(!r1.intersects(&r2), "{r1:?} {r2:?}");
        assert!(!segment_hits_rect(
            [20.0, 150.0],
            [380.0, 150.0],
            &r2.inflate(5.0)
        ));
    }

    #[test]
    fn crowded_labels_move_away_with_a_leader_or_are_dropped() {
        let mut obs = Obstacles::new(Rect::new(0.0, 0.0, 200.0, 200.0));
        let size = text_size(6, 1, 12.0);
        let p = [100.0, 100.0];
        // A mark around the point takes every near position: labels must move out.
        obs.add_box(Rect::new(70.0, 70.0, 130.0, 130.0));
        let mut placed = Vec::new();
        while let Some(pl) = obs.place(size, around_point(p, 5.0, size, 4)) {
            placed.push(pl);
            assert!(placed.len() < 100, "terminates");
        }
        assert!(placed.len() >= 4, "{} placed", placed.len());
        assert!(placed.iter().all(|p| p.leader.is_some()));
        let boxes: Vec<Rect> = placed
            .iter()
            .map(|p| Rect::new(p.x, p.y, p.x + size.0, p.y + size.1))
            .collect();
        for (i, a) in boxes.iter().enumerate() {
            assert!(Rect::new(0.0, 0.0, 200.0, 200.0).contains(a));
            for b in &boxes[i + 1..] {
                assert!(!a.intersects(b));
            }
        }
        // Leaders never cross another label.
        for pl in &placed {
            if let Some((a, b)) = pl.leader {
                let own = Rect::new(pl.x, pl.y, pl.x + size.0, pl.y + size.1);
                for r in &boxes {
                    if *r != own {
                        assert!(!segment_hits_rect(a, b, r));
                    }
                }
            }
        }
    }

    #[test]
    fn long_segments_are_seen_without_buckets() {
        let mut obs = Obstacles::new(Rect::new(0.0, 0.0, 10_000.0, 10_000.0));
        obs.add_segment([0.0, 5000.0], [10_000.0, 5000.0], 4.0);
        assert!(!obs.is_free(&Rect::new(7000.0, 4990.0, 7100.0, 5010.0)));
        assert!(obs.is_free(&Rect::new(7000.0, 4900.0, 7100.0, 4990.0)));
    }
}

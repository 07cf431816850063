//! Sections given point by point, solved numerically: any simple polygon, and a measured depth
//! profile closed by the flat lid.
//!
//! # Measured profiles as instruments export them
//!
//! A profile is a list of (position across, value) pairs, positions increasing. The values are
//! read by one rule, applied in this order:
//!
//! 1. **Sign.** Values are *depths* (positive downwards) unless the value farthest from zero
//!    is negative: then they are *heights* (a trench below the surface, as most profilometers
//!    report it) and are negated. A profile given as heights therefore gives exactly the
//!    figures of the same profile given as depths.
//! 2. **Lid.** The lid lies on the zero line, or on the highest point of the profile when some
//!    point lies above the zero line (an instrument whose zero is not at the surface).
//! 3. **Channel.** The channel is the part of the profile between the last point at the lid
//!    before its deepest point and the first one after it. Surface scanned beyond the channel
//!    (points outside that span) is left out, with a note. Ends below the lid are joined to
//!    it by vertical walls.
//! 4. **Resolution.** A profile of more than [`MAX_MESH_POINTS`] points is simplified to that
//!    many before meshing (Visvalingam & Whyatt 1993: repeatedly drop the point whose triangle
//!    with its neighbours has the smallest area), and a note states the resulting change of
//!    the section's area and wetted perimeter: the mesh could not resolve finer detail within
//!    its node budget, and the cost of meshing grows faster than linearly with the wall points.
//!
//! Sampling notes: a channel described by fewer than [`MIN_PROFILE_POINTS`] points, or with a
//! gap between neighbouring positions more than [`UNEVEN_GAP_RATIO`] times the median spacing,
//! is noted: the wall between the points is taken as straight, which may not be what was
//! measured.

use super::outline::{Outline, Point};
use crate::units::Length;
use std::cmp::Ordering;
use std::collections::BinaryHeap;

/// Largest number of profile points passed to the mesher; denser profiles are simplified.
pub const MAX_MESH_POINTS: usize = 1000;
/// Fewer points than this across the channel make a sampling note.
pub const MIN_PROFILE_POINTS: usize = 20;
/// A gap between neighbouring positions larger than this multiple of the median spacing makes
/// a sampling note.
pub const UNEVEN_GAP_RATIO: f64 = 5.0;

/// The polygon through `points` (vertices in order, closed automatically).
pub(super) fn polygon_outline(points: &[[Length; 2]]) -> Outline {
    let pts: Vec<Point> = points.iter().map(|p| [p[0].si(), p[1].si()]).collect();
    Outline::polygon(&pts)
}

/// Something worth knowing about how a measured profile was read (data; the words are written
/// by the report).
#[derive(Clone, Debug, PartialEq)]
pub enum ProfileNote {
    /// The channel is described by fewer than [`MIN_PROFILE_POINTS`] points.
    Sparse { points: usize },
    /// The largest gap between neighbouring positions [m], where it starts [m] and the median
    /// spacing [m].
    Uneven { gap: f64, at: f64, median: f64 },
    /// `from` points simplified to `to` for the mesh; relative change of area and perimeter
    /// (simplified − given, over given).
    Resampled {
        from: usize,
        to: usize,
        area_change: f64,
        perimeter_change: f64,
    },
    /// `left_out` points outside the channel span [`from_x`, `to_x`] (m) were not used.
    Trimmed {
        left_out: usize,
        from_x: f64,
        to_x: f64,
    },
}

/// The channel a profile describes: (x, depth below the lid) points, depths ≥ 0, interior
/// depths > 0, and how many given points were left outside it.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct Channel {
    pub points: Vec<Point>,
    pub left_out: usize,
}

/// Read `points` by the rule in the module documentation (sign, lid, channel span). `None`
/// when no point lies below the lid (the profile encloses no channel).
pub(super) fn channel(points: &[[Length; 2]]) -> Option<Channel> {
    let raw: Vec<Point> = points.iter().map(|p| [p[0].si(), p[1].si()]).collect();
    let extreme = raw
        .iter()
        .map(|p| p[1])
        .max_by(|a, b| a.abs().total_cmp(&b.abs()))?;
    // Heights (trench negative) become depths by exact negation.
    let sign = if extreme < 0.0 { -1.0 } else { 1.0 };
    let depths: Vec<Point> = raw.iter().map(|p| [p[0], sign * p[1]]).collect();
    let highest = depths.iter().map(|p| p[1]).fold(f64::INFINITY, f64::min);
    let lid = highest.min(0.0);
    let below: Vec<Point> = depths.iter().map(|p| [p[0], p[1] - lid]).collect();
    let deepest = (0..below.len()).max_by(|&a, &b| {
        below[a][1].total_cmp(&below[b][1]).then_with(|| b.cmp(&a)) // the first of equal depths
    })?;
    if below[deepest][1] <= 0.0 || below[deepest][1].is_nan() {
        return None;
    }
    let start = (0..deepest)
        .rev()
        .find(|&i| below[i][1] <= 0.0)
        .unwrap_or(0);
    let end = (deepest + 1..below.len())
        .find(|&i| below[i][1] <= 0.0)
        .unwrap_or(below.len() - 1);
    let mut kept: Vec<Point> = below[start..=end].to_vec();
    // Points exactly at the lid are on it (a value of −0 or a shift by rounding).
    for p in [0, kept.len() - 1] {
        kept[p][1] = kept[p][1].max(0.0);
    }
    Some(Channel {
        points: kept,
        left_out: below.len() - (end - start + 1),
    })
}

/// The points the mesher gets: the channel, simplified to [`MAX_MESH_POINTS`] when denser.
pub(super) fn mesh_points(channel: &Channel) -> Vec<Point> {
    if channel.points.len() <= MAX_MESH_POINTS {
        return channel.points.clone();
    }
    simplify(&channel.points, MAX_MESH_POINTS)
}

/// A measured profile closed by the lid (see the module documentation for how the values are
/// read): the lid from the last point back to the first, then down the profile. Ends below the
/// lid are joined to it by a vertical wall.
pub(super) fn profile_outline(points: &[[Length; 2]]) -> Outline {
    let pts = match channel(points) {
        Some(c) => mesh_points(&c),
        // Unchecked input with no channel: the points as given (the mesher will refuse them).
        None => points.iter().map(|p| [p[0].si(), p[1].si()]).collect(),
    };
    Outline::polygon(&closed(&pts))
}

/// The closed outline of channel points (depth positive down, lid at y = 0).
fn closed(pts: &[Point]) -> Vec<Point> {
    let mut out: Vec<Point> = Vec::with_capacity(pts.len() + 2);
    let (first, last) = (pts[0], pts[pts.len() - 1]);
    if first[1] > 0.0 {
        out.push([first[0], 0.0]);
    }
    out.extend(pts.iter().map(|p| [p[0], -p[1]]));
    if last[1] > 0.0 {
        out.push([last[0], 0.0]);
    }
    out
}

/// Area and wetted perimeter (lid and end walls included) of the section under channel points.
fn area_and_perimeter(pts: &[Point]) -> (f64, f64) {
    let (mut area, mut wall) = (0.0, 0.0);
    for w in pts.windows(2) {
        let (dx, dd) = (w[1][0] - w[0][0], w[1][1] - w[0][1]);
        area += 0.5 * dx * (w[0][1] + w[1][1]);
        wall += dx.hypot(dd);
    }
    let (first, last) = (pts[0], pts[pts.len() - 1]);
    (area, wall + (last[0] - first[0]) + first[1] + last[1])
}

/// The notes a profile deserves (sampling, simplification, surface left out); empty for an
/// unusable profile (its check reports that).
pub fn profile_notes(points: &[[Length; 2]]) -> Vec<ProfileNote> {
    let Some(c) = channel(points) else {
        return Vec::new();
    };
    let mut notes = Vec::new();
    let n = c.points.len();
    if n < MIN_PROFILE_POINTS {
        notes.push(ProfileNote::Sparse { points: n });
    }
    if let Some(note) = uneven(&c.points) {
        notes.push(note);
    }
    if n > MAX_MESH_POINTS {
        let simple = mesh_points(&c);
        let (a0, p0) = area_and_perimeter(&c.points);
        let (a1, p1) = area_and_perimeter(&simple);
        notes.push(ProfileNote::Resampled {
            from: n,
            to: simple.len(),
            area_change: (a1 - a0) / a0,
            perimeter_change: (p1 - p0) / p0,
        });
    }
    if c.left_out > 0 {
        notes.push(ProfileNote::Trimmed {
            left_out: c.left_out,
            from_x: c.points[0][0],
            to_x: c.points[n - 1][0],
        });
    }
    notes
}

/// The uneven-sampling note, when the largest gap exceeds [`UNEVEN_GAP_RATIO`] × the median.
fn uneven(pts: &[Point]) -> Option<ProfileNote> {
    if pts.len() < 3 {
        return None;
    }
    let gaps: Vec<f64> = pts.windows(2).map(|w| w[1][0] - w[0][0]).collect();
    let mut sorted = gaps.clone();
    sorted.sort_by(f64::total_cmp);
    let median = sorted[sorted.len() / 2];
    let (k, gap) = gaps
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1).then_with(|| b.0.cmp(&a.0)))?;
    (*gap > UNEVEN_GAP_RATIO * median).then_some(ProfileNote::Uneven {
        gap: *gap,
        at: pts[k][0],
        median,
    })
}

/// A candidate for removal: the area of the triangle a point makes with its neighbours.
#[derive(Clone, Copy, PartialEq)]
struct Candidate {
    area: f64,
    index: usize,
}

impl Eq for Candidate {}

impl Ord for Candidate {
    /// Reversed, so the max-heap pops the smallest area first (the lowest index on ties).
    fn cmp(&self, other: &Self) -> Ordering {
        other
            .area
            .total_cmp(&self.area)
            .then_with(|| other.index.cmp(&self.index))
    }
}

impl PartialOrd for Candidate {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

/// Visvalingam–Whyatt simplification of an open polyline to `keep` points (ends kept):
/// Visvalingam & Whyatt, *The Cartographic Journal* 30 (1993) 46–51. O(n log n) with a heap
/// and lazy deletion. A subsequence of x-increasing points stays x-increasing, and a chord
/// between depths ≥ 0, one of them positive, stays below the lid: the outline stays simple.
fn simplify(pts: &[Point], keep: usize) -> Vec<Point> {
    let n = pts.len();
    let keep = keep.max(2);
    let mut prev: Vec<usize> = (0..n).map(|i| i.wrapping_sub(1)).collect();
    let mut next: Vec<usize> = (1..=n).collect();
    let mut alive = vec![true; n];
    let mut current = vec![f64::INFINITY; n];
    let area = |a: Point, b: Point, c: Point| {
        0.5 * ((b[0] - a[0]) * (c[1] - a[1]) - (c[0] - a[0]) * (b[1] - a[1])).abs()
    };
    let mut heap = BinaryHeap::with_capacity(n);
    for i in 1..n - 1 {
        current[i] = area(pts[i - 1], pts[i], pts[i + 1]);
        heap.push(Candidate {
            area: current[i],
            index: i,
        });
    }
    let mut count = n;
    while count > keep {
        let Some(c) = heap.pop() else { break };
        if !alive[c.index] || c.area != current[c.index] {
            continue; // removed already, or its area changed since it was pushed
        }
        alive[c.index] = false;
        count -= 1;
        let (p, q) = (prev[c.index], next[c.index]);
        next[p] = q;
        prev[q] = p;
        for j in [p, q] {
            if j != 0 && j != n - 1 {
                current[j] = area(pts[prev[j]], pts[j], pts[next[j]]);
                heap.push(Candidate {
                    area: current[j],
                    index: j,
                });
            }
        }
    }
    (0..n).filter(|&i| alive[i]).map(|i| pts[i]).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pts(v: &[[f64; 2]]) -> Vec<[Length; 2]> {
        v.iter()
            .map(|p| [Length::from_si(p[0]), Length::from_si(p[1])])
            .collect()
    }

    #[test]
    fn heights_are_negated_and_the_surface_beyond_the_channel_left_out() {
        // Heights with scanned surface on both sides, one point of which sits above zero.
        let c = channel(&pts(&[
            [0.0, 0.0],
            [1.0, 0.5],
            [2.0, -3.0],
            [3.0, -4.0],
            [4.0, 0.2],
            [5.0, 0.0],
        ]))
        .unwrap();
        // The extreme value (−4) is negative: heights. The lid rests on the highest point
        // (0.5 above zero, at x = 1); no point after the trench reaches it, so the channel
        // runs from x = 1 to the last point, and the point at x = 0 is left out.
        assert_eq!(c.points[0], [1.0, 0.0]);
        assert_eq!(c.points[1], [2.0, 3.5]);
        assert_eq!(c.left_out, 1);
    }

    #[test]
    fn simplification_keeps_ends_and_count() {
        let p: Vec<Point> = (0..50)
            .map(|i| [i as f64, 1.0 + (i as f64 * 0.7).sin()])
            .collect();
        let s = simplify(&p, 10);
        assert_eq!(s.len(), 10);
        assert_eq!(s[0], p[0]);
        assert_eq!(s[9], p[49]);
        assert!(s.windows(2).all(|w| w[1][0] > w[0][0]));
    }
}

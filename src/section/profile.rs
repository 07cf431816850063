//! Sections given point by point, solved numerically: any simple polygon, and a measured depth
//! profile closed by the flat lid.

use super::outline::{Outline, Point};
use crate::units::Length;

/// The polygon through `points` (vertices in order, closed automatically).
pub(super) fn polygon_outline(points: &[[Length; 2]]) -> Outline {
    let pts: Vec<Point> = points.iter().map(|p| [p[0].si(), p[1].si()]).collect();
    Outline::polygon(&pts)
}

/// A measured profile of (position across, depth below the lid) pairs, x increasing: the lid
/// from the last point back to the first, then down the profile. Ends at a depth above zero
/// are joined to the lid by a vertical wall.
pub(super) fn profile_outline(points: &[[Length; 2]]) -> Outline {
    let m = |l: &Length| l.si();
    let mut pts: Vec<Point> = Vec::new();
    let first = &points[0];
    let last = &points[points.len() - 1];
    if m(&first[1]) > 0.0 {
        pts.push([m(&first[0]), 0.0]);
    }
    pts.extend(points.iter().map(|p| [m(&p[0]), -m(&p[1])]));
    if m(&last[1]) > 0.0 {
        pts.push([m(&last[0]), 0.0]);
    }
    Outline::polygon(&pts)
}

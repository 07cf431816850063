//! Etched-channel outlines, solved numerically: the trapezoid of an anisotropic (crystal-plane)
//! etch and the D-shape of an isotropic etch.

use super::outline::{Loop, Outline, Piece};

/// Trapezoid `top` wide at the lid and `bottom` wide at `depth`, centred across.
pub(super) fn trapezoid_outline(top: f64, bottom: f64, depth: f64) -> Outline {
    Outline::polygon(&[
        [-bottom / 2.0, -depth],
        [bottom / 2.0, -depth],
        [top / 2.0, 0.0],
        [-top / 2.0, 0.0],
    ])
}

/// Isotropic-etch D-shape: a flat bottom `w` wide (the mask opening; none when w = 0) at
/// depth `d`, quarter-round sides of radius `d` centred on the mask edges at the lid.
pub(super) fn d_shape_outline(w: f64, d: f64) -> Outline {
    let mut pieces = Vec::new();
    if w > 0.0 {
        pieces.push(Piece::Line { to: [w / 2.0, -d] });
    }
    pieces.push(Piece::Arc {
        to: [w / 2.0 + d, 0.0],
        center: [w / 2.0, 0.0],
        ccw: true,
    });
    pieces.push(Piece::Line {
        to: [-w / 2.0 - d, 0.0],
    });
    pieces.push(Piece::Arc {
        to: [-w / 2.0, -d],
        center: [-w / 2.0, 0.0],
        ccw: true,
    });
    Outline {
        loops: vec![Loop {
            start: [-w / 2.0, -d],
            pieces,
        }],
    }
}

//! A section's sizable dimensions by name (`width`, `height`): read one, or set one and get
//! the new shape. Shared by sizing, its derivatives and the file layer's bound checks.

use crate::section::Shape;
use crate::units::Length;

/// The shape with its width (or a circle's diameter) or height set to `value`, when the shape
/// has that dimension. The width of a trapezoid is its top (at the lid), changed with the
/// sidewall angle kept (the bottom moves by as much as the top); of a d-shape its mask width;
/// of a rounded rectangle its width; of a measured profile its span (last position − first),
/// changed by multiplying every position by one factor with the depths kept (the chip file's
/// `width_scale`).
pub fn with_dimension(shape: &Shape, dim: &str, value: f64) -> Option<Shape> {
    let v = Length::from_si(value);
    Some(match (shape, dim) {
        (Shape::Trapezoid { top, bottom, depth }, "width") => Shape::Trapezoid {
            top: v,
            bottom: Length::from_si(value - (top.si() - bottom.si())),
            depth: *depth,
        },
        (Shape::DShape { depth, .. }, "width") => Shape::DShape {
            mask_width: v,
            depth: *depth,
        },
        (
            Shape::RoundedRectangle {
                height,
                corner_radius,
                ..
            },
            "width",
        ) => Shape::RoundedRectangle {
            width: v,
            height: *height,
            corner_radius: *corner_radius,
        },
        (Shape::Rectangle { height, .. }, "width") => Shape::Rectangle {
            width: v,
            height: *height,
        },
        (Shape::Rectangle { width, .. }, "height") => Shape::Rectangle {
            width: *width,
            height: v,
        },
        (Shape::Ellipse { height, .. }, "width") => Shape::Ellipse {
            width: v,
            height: *height,
        },
        (Shape::Ellipse { width, .. }, "height") => Shape::Ellipse {
            width: *width,
            height: v,
        },
        (Shape::Plates { gap, .. }, "width") => Shape::Plates {
            gap: *gap,
            width: v,
        },
        (Shape::Plates { width, .. }, "height") => Shape::Plates {
            gap: v,
            width: *width,
        },
        (Shape::Circle { .. }, "width") => Shape::Circle { diameter: v },
        (Shape::Profile { .. }, "width") => {
            let span = shape.profile_span()?;
            if !(span > 0.0 && value.is_finite()) {
                return None;
            }
            shape.scaled_profile(value / span)?
        }
        _ => return None,
    })
}

/// A dimension's current value.
pub fn dimension(shape: &Shape, dim: &str) -> Option<f64> {
    Some(match (shape, dim) {
        (
            Shape::Rectangle { width, .. }
            | Shape::Ellipse { width, .. }
            | Shape::Plates { width, .. },
            "width",
        ) => width.si(),
        (Shape::Rectangle { height, .. } | Shape::Ellipse { height, .. }, "height") => height.si(),
        (Shape::Plates { gap, .. }, "height") => gap.si(),
        (Shape::Circle { diameter }, "width") => diameter.si(),
        (Shape::Trapezoid { top, .. }, "width") => top.si(),
        (Shape::DShape { mask_width, .. }, "width") => mask_width.si(),
        (Shape::RoundedRectangle { width, .. }, "width") => width.si(),
        (Shape::Profile { .. }, "width") => shape.profile_span()?,
        _ => return None,
    })
}

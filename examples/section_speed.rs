//! Speed of the numerical cross-section solver (one core).
//!
//! `cargo run --release --example section_speed`
//!
//! Times typical etched sections to the default accuracy (1e-4 relative on the resistance, and
//! 1e-3 relative change of the maximum wall shear), median of repeated runs, and with the
//! shear criterion relaxed (resistance only).
use rillnet::section::numeric::NumericOptions;
use rillnet::section::Shape;
use rillnet::units::{Angle, Length};
use std::time::Instant;

fn main() {
    let l = Length::from_si;
    let koh = Angle::from_si(54.74f64.to_radians());
    let top = 120e-6;
    let depth = 40e-6;
    let shapes = vec![
        (
            "trapezoid 120 um top, 40 um deep, 54.74 deg (KOH)",
            Shape::Trapezoid {
                top: l(top),
                bottom: l(top - 2.0 * depth / koh.si().tan()),
                depth: l(depth),
            },
        ),
        (
            "D-shape, 50 um mask, 30 um etch",
            Shape::DShape {
                mask_width: l(50e-6),
                depth: l(30e-6),
            },
        ),
        (
            "semicircle, 100 um",
            Shape::Semicircle {
                diameter: l(100e-6),
            },
        ),
        (
            "rounded rectangle 200 x 50 um, r 10 um",
            Shape::RoundedRectangle {
                width: l(200e-6),
                height: l(50e-6),
                corner_radius: l(10e-6),
            },
        ),
    ];
    println!(
        "{:<52} {:>10} {:>9} {:>8} {:>10} {:>9} {:>8}",
        "section", "default ms", "K est", "nodes", "K-only ms", "K est", "nodes"
    );
    for (name, shape) in shapes {
        let run = |opts: NumericOptions| {
            let mut times = Vec::new();
            let mut last = None;
            for _ in 0..7 {
                let t = Instant::now();
                let s = shape.solve_numeric(&opts).expect("solves");
                times.push(t.elapsed().as_secs_f64() * 1e3);
                last = Some(s);
            }
            times.sort_by(f64::total_cmp);
            let s = last.expect("ran");
            (
                times[times.len() / 2],
                s.relative_error_estimate,
                s.field.nodes.len(),
            )
        };
        let (t1, e1, n1) = run(NumericOptions::default());
        let (t2, e2, n2) = run(NumericOptions {
            shear_tolerance: f64::INFINITY,
            ..Default::default()
        });
        println!("{name:<52} {t1:>10.1} {e1:>9.1e} {n1:>8} {t2:>10.1} {e2:>9.1e} {n2:>8}");
    }
}

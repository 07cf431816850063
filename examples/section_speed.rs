//! Speed of the numerical cross-section solver (one core).
//!
//! `cargo run --release --example section_speed`
//!
//! Times typical etched sections to the default accuracy (error estimates 1e-4 on the
//! resistance and 1e-3 on the maximum wall shear), median of repeated runs, with the shear
//! criterion relaxed (resistance only), and the KOH trapezoid to 1e-6 on the resistance.
//! Prints nodes, the error estimate reached and whether the request was met.
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
        "{:<52} {:>10} {:>9} {:>8} {:>10} {:>9} {:>8} {:>10} {:>9} {:>8} {:>5}",
        "section",
        "default ms",
        "K est",
        "nodes",
        "K-only ms",
        "K est",
        "nodes",
        "1e-6 ms",
        "K est",
        "nodes",
        "conv"
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
                s.converged,
            )
        };
        let (t1, e1, n1, _) = run(NumericOptions::default());
        let (t2, e2, n2, _) = run(NumericOptions {
            shear_tolerance: f64::INFINITY,
            ..Default::default()
        });
        let (t3, e3, n3, c3) = run(NumericOptions {
            tolerance: 1e-6,
            shear_tolerance: f64::INFINITY,
            ..Default::default()
        });
        println!(
            "{name:<52} {t1:>10.1} {e1:>9.1e} {n1:>8} {t2:>10.1} {e2:>9.1e} {n2:>8} \
             {t3:>10.1} {e3:>9.1e} {n3:>8} {c3:>5}"
        );
    }
}

//! The square grid chip shared by the benchmark examples: the left column held at 100 mbar,
//! the right column at 0, a syringe pump injecting into the centre node, identical
//! rectangular channels between neighbours.

use rillnet::prelude::*;

/// A `side`×`side` grid (about 2·side² channels).
pub fn grid(side: usize) -> Network {
    let mut b = NetworkBuilder::new(Fluid::WATER_20C).with_capacity(side * side, 2 * side * side);
    let name = |i: usize, j: usize| format!("n{i}_{j}");
    for i in 0..side {
        for j in 0..side {
            let port = if j == 0 {
                Port::Pressure(Pressure::from_si(10_000.0))
            } else if j == side - 1 {
                Port::Pressure(Pressure::from_si(0.0))
            } else if i == side / 2 && j == side / 2 {
                Port::Flow(VolumeFlow::from_si(1e-10))
            } else {
                Port::Junction
            };
            b.add_node(&name(i, j), port).expect("unique names");
        }
    }
    let s = b
        .add_section(
            "cell",
            Shape::Rectangle {
                width: Length::from_si(100e-6),
                height: Length::from_si(50e-6),
            },
        )
        .expect("valid section");
    let l = Length::from_si(1e-3);
    for i in 0..side {
        for j in 0..side {
            if j + 1 < side {
                b.add_channel(&format!("h{i}_{j}"), &name(i, j), &name(i, j + 1), s, l)
                    .expect("valid channel");
            }
            if i + 1 < side {
                b.add_channel(&format!("v{i}_{j}"), &name(i, j), &name(i + 1, j), s, l)
                    .expect("valid channel");
            }
        }
    }
    b.build().expect("grid is connected to pressure ports")
}

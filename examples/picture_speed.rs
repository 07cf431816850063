//! Picture benchmark: time to draw a large chip beside the time to solve it.
//!
//! ```text
//! cargo run --release --example picture_speed            # 10⁴ and 10⁵ channels
//! cargo run --release --example picture_speed -- 1000000
//! ```
//!
//! Each size is the square grid of `examples/scale.rs` (left column at 100 mbar, right at 0,
//! a pump in the centre). Printed per size: the solve (assemble, analyse, factorise, check,
//! derive), the pressure-along-path picture (tracing + SVG), the flow-split picture (SVG),
//! and their ratios to the solve.

use rillnet::chip::{Chip, DrawnLayout, Source};
use rillnet::format::Syntax;
use rillnet::plots::{self, PictureFormat};
use rillnet::prelude::*;
use std::time::Instant;

fn grid(side: usize) -> Network {
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
    let cell = Shape::Rectangle {
        width: Length::from_si(100e-6),
        height: Length::from_si(50e-6),
    };
    let s = b.add_section("cell", cell).expect("valid section");
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

fn seconds(t: Instant) -> f64 {
    t.elapsed().as_secs_f64()
}

fn main() {
    let sizes: Vec<usize> = match std::env::args().nth(1) {
        Some(n) => vec![n.parse().expect("a channel count")],
        None => vec![10_000, 100_000],
    };
    println!("channels   solve [s]   pressure picture [s] (ratio)   split picture [s] (ratio)");
    for channels in sizes {
        let side = ((channels as f64 / 2.0).sqrt().round() as usize).max(2);
        let network = grid(side);
        let n = network.channels.len();
        let chip = Chip {
            name: Some(format!("grid {side}×{side}")),
            description: None,
            source: Source {
                origin: "generated".into(),
                text: String::new(),
                syntax: Syntax::Yaml,
            },
            network,
            design: Default::default(),
            layout: DrawnLayout::default(),
            notes: Vec::new(),
        };
        let t = Instant::now();
        let state = steady_state(&chip.network).expect("solve");
        let solve = seconds(t);
        let t = Instant::now();
        let picture = plots::PressurePicture::new(&chip, &state);
        let svg = plots::render(&picture, PictureFormat::Svg).expect("render");
        let pressure = seconds(t);
        let t = Instant::now();
        let split = plots::ChipPicture::new(&chip, &state, plots::ColourBy::Pressure);
        let svg2 = plots::render(&split, PictureFormat::Svg).expect("render");
        let splits = seconds(t);
        println!(
            "{n:>8}   {solve:9.3}   {pressure:9.3} ({:5.2}×, {} kB)   {splits:9.3} ({:5.2}×, {} kB)",
            pressure / solve,
            svg.len() / 1024,
            splits / solve,
            svg2.len() / 1024
        );
    }
}

//! Pressure-along-path benchmark: tracing the inlet–outlet paths and drawing them, beside the
//! solve, on two chips: the square grid of `examples/support/grid.rs` (short paths, one per
//! left-column inlet) and a fan-in (√n inlets at equal pressure feeding one chain of about n
//! channels to a single outlet: every inlet's path runs the whole chain, so tracing each
//! inlet's path step by step costs √n · n).
//!
//! ```text
//! cargo run --release --example pressure_path_speed            # 10³, 10⁴ and 10⁵ channels
//! cargo run --release --example pressure_path_speed -- 1000000
//! ```
//!
//! Printed per chip and size: the solve, the tracing (`PressurePicture::new`), the SVG and PNG
//! rendering (left out above 2·10⁶ points), the paths drawn and the points on them.

use rillnet::chip::Chip;
use rillnet::plots::{self, PictureFormat};
use rillnet::prelude::*;
use std::time::Instant;

#[path = "support/grid.rs"]
mod grid;
use grid::grid;

/// `k` inlets at 100 mbar, each through one channel onto the first node of a chain of `l`
/// channels ending at an outlet at 0.
fn fan(k: usize, l: usize) -> Network {
    let mut b = NetworkBuilder::new(Fluid::WATER_20C).with_capacity(k + l + 1, k + l);
    for i in 0..k {
        b.add_node(
            &format!("in{i}"),
            Port::Pressure(Pressure::from_si(10_000.0)),
        )
        .expect("unique names");
    }
    for j in 0..l {
        b.add_node(&format!("c{j}"), Port::Junction)
            .expect("unique names");
    }
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .expect("unique names");
    let s = b
        .add_section(
            "cell",
            Shape::Rectangle {
                width: Length::from_si(100e-6),
                height: Length::from_si(50e-6),
            },
        )
        .expect("valid section");
    let len = Length::from_si(1e-3);
    for i in 0..k {
        b.add_channel(&format!("feed{i}"), &format!("in{i}"), "c0", s, len)
            .expect("valid channel");
    }
    for j in 0..l {
        let to = if j + 1 < l {
            format!("c{}", j + 1)
        } else {
            "out".into()
        };
        b.add_channel(&format!("link{j}"), &format!("c{j}"), &to, s, len)
            .expect("valid channel");
    }
    b.build().expect("connected to pressure ports")
}

fn seconds(t: Instant) -> f64 {
    t.elapsed().as_secs_f64()
}

fn main() {
    let sizes: Vec<usize> = match std::env::args().nth(1) {
        Some(n) => vec![n.parse().expect("a channel count")],
        None => vec![1_000, 10_000, 100_000],
    };
    println!(
        "chip   channels   solve [s]   tracing [s]   SVG [s]   PNG [s]   paths   points   SVG [kB]"
    );
    for channels in sizes {
        let side = ((channels as f64 / 2.0).sqrt().round() as usize).max(2);
        let k = (channels as f64).sqrt().round() as usize;
        for (kind, network) in [
            ("grid", grid(side)),
            ("fan ", fan(k, channels.saturating_sub(k).max(1))),
        ] {
            run(kind, network);
        }
    }
}

fn run(kind: &str, network: Network) {
    let n = network.channels.len();
    let chip = Chip::from_network(format!("{kind} {n}"), network);
    let t = Instant::now();
    let state = steady_state(&chip.network).expect("solve");
    let solve = seconds(t);
    let t = Instant::now();
    let picture = plots::PressurePicture::new(&chip, &state);
    let tracing = seconds(t);
    let points: usize = picture.paths.iter().map(|p| p.points.len()).sum();
    if points > 2_000_000 {
        println!(
            "{kind}   {n:>8}   {solve:9.3}   {tracing:11.3}   (not drawn)        {:5}   {points:6}",
            picture.paths.len()
        );
        return;
    }
    let t = Instant::now();
    let svg = plots::render(&picture, PictureFormat::Svg).expect("render");
    let svg_time = seconds(t);
    let t = Instant::now();
    let png = plots::render(&picture, PictureFormat::Png).expect("render");
    let png_time = seconds(t);
    println!(
        "{kind}   {n:>8}   {solve:9.3}   {tracing:11.3}   {svg_time:7.3}   {png_time:7.3}   {:5}   {points:6}   {:8}",
        picture.paths.len(),
        svg.len() / 1024,
    );
    drop(png);
}

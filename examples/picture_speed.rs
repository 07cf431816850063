//! Picture benchmark: time to draw a large chip beside the time to solve it.
//!
//! ```text
//! cargo run --release --example picture_speed            # 10⁴ and 10⁵ channels
//! cargo run --release --example picture_speed -- 1000000
//! ```
//!
//! Each size is the square grid of `examples/scale.rs` (left column at 100 mbar, right at 0,
//! a pump in the centre). Printed per size: the solve (assemble, analyse, factorise, check,
//! derive), the pressure-along-path picture (tracing + SVG), the flow-split picture (SVG,
//! then PNG), and their ratios to the solve. Above `plots::LARGE_LIMIT` channels the split
//! picture is drawn as thin coloured lines with only the ports named.

use rillnet::chip::Chip;
use rillnet::plots::{self, PictureFormat};
use rillnet::prelude::*;
use std::time::Instant;

#[path = "support/grid.rs"]
mod grid;
use grid::grid;

fn seconds(t: Instant) -> f64 {
    t.elapsed().as_secs_f64()
}

fn main() {
    let sizes: Vec<usize> = match std::env::args().nth(1) {
        Some(n) => vec![n.parse().expect("a channel count")],
        None => vec![10_000, 100_000],
    };
    println!(
        "channels   solve [s]   pressure picture [s] (ratio)   split picture [s] (ratio)   \
         split PNG [s]"
    );
    for channels in sizes {
        let side = ((channels as f64 / 2.0).sqrt().round() as usize).max(2);
        let network = grid(side);
        let n = network.channels.len();
        let chip = Chip::from_network(format!("grid {side}×{side}"), network);
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
        let t = Instant::now();
        let png = plots::render(&split, PictureFormat::Png).expect("render");
        let split_png = seconds(t);
        println!(
            "{n:>8}   {solve:9.3}   {pressure:9.3} ({:5.2}×, {} kB)   {splits:9.3} ({:5.2}×, {} kB)   \
             {split_png:9.3} ({} kB)",
            pressure / solve,
            svg.len() / 1024,
            splits / solve,
            svg2.len() / 1024,
            png.len() / 1024
        );
    }
}

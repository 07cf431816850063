//! Time-stepping cost: a grid of about 1 000 channels with 20 soft chambers (compliance) and the
//! centre pump switched on at t = 0.1 s, followed over a run long enough for about 10⁴ steps.
//! Prints steps, factorisations and the wall-clock time of the evolution; then the same chip
//! with the step held to 1 ms over 10 s, which forces 10⁴ steps, and the seconds per 10⁴
//! steps (target: ≤ 1 s in a release build on one core).
//!
//! `cargo run --release --example evolve_speed`

use rillnet::analysis::transient::{evolve, evolve_with_step_limit, Drives, Run, SwitchOn};
use rillnet::network::{NodeId, Port, Storage};
use rillnet::units::Compliance;
use std::time::Instant;

#[path = "support/grid.rs"]
mod grid;

fn main() {
    let mut network = grid::grid(23);
    let junctions: Vec<usize> = (0..network.nodes.len())
        .filter(|&i| network.nodes[NodeId(i)].port == Port::Junction)
        .collect();
    let stride = junctions.len() / 20;
    for k in 0..20 {
        let i = junctions[k * stride];
        // 0.5 µL/bar: a soft PDMS chamber (demo value).
        network.nodes[NodeId(i)].storage = Some(Storage::Compliance(Compliance::from_si(5e-15)));
    }
    let pump = (0..network.nodes.len())
        .find(|&i| matches!(network.nodes[NodeId(i)].port, Port::Flow(_)))
        .map(NodeId)
        .expect("the grid has a pump");
    let drives = Drives {
        switch_on: vec![SwitchOn {
            node: pump,
            at: 0.1,
        }],
        rocking: None,
        ..Drives::default()
    };
    for rtol in [1e-6, 1e-9, 1e-12] {
        let t = Instant::now();
        let ev = evolve(
            &network,
            &drives,
            Run {
                duration: 10.0,
                every: 0.01,
                rtol,
            },
        )
        .expect("evolve");
        let s = t.elapsed().as_secs_f64();
        println!(
            "{} channels, 20 storage nodes, rtol {rtol:e}: {} steps ({} rejected), {} factorisations, \
             {:.3} s ({:.1} us/step)",
            network.channels.len(),
            ev.steps,
            ev.rejected,
            ev.factorizations,
            s,
            1e6 * s / ev.steps.max(1) as f64
        );
    }
    let t = Instant::now();
    let ev = evolve_with_step_limit(
        &network,
        &drives,
        Run {
            duration: 10.0,
            every: 0.01,
            rtol: 1e-9,
        },
        1e-3,
    )
    .expect("evolve");
    let s = t.elapsed().as_secs_f64();
    println!(
        "forced steps: {} channels, 20 storage nodes, {} steps ({} rejected), {} factorisations, \
         {:.3} s; {:.3} s per 10^4 steps (target <= 1 s)",
        network.channels.len(),
        ev.steps,
        ev.rejected,
        ev.factorizations,
        s,
        1e4 * s / ev.steps.max(1) as f64
    );
}

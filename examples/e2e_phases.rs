//! Time the phases of `rillnet solve` on a chip file: read+parse+validate, solve, render.
//!
//! `cargo run --release --example e2e_phases -- chip.json` (jsonc = compact JSON, the default
//! of `solve -o FILE`; a chip of 10⁶ channels: `cargo run --release --example scale -- --write
//! 1000000 grid.json`)
use std::time::Instant;
fn main() {
    let path = std::env::args().nth(1).expect("usage: e2e_phases CHIP");
    let text = std::fs::read_to_string(&path).expect("read");
    let t = Instant::now();
    let parsed: Result<serde_json::Value, _> = serde_json::from_str(&text);
    println!(
        "parse to serde_json::Value (reference): {:8.1} ms ({})",
        t.elapsed().as_secs_f64() * 1e3,
        parsed.is_ok()
    );
    drop(parsed);
    let t = Instant::now();
    let chip = rillnet::load_chip(std::path::Path::new(&path)).unwrap_or_else(|e| {
        eprintln!("{e}");
        std::process::exit(2)
    });
    let net = &chip.network;
    println!(
        "load (read, parse, validate, graph): {:8.1} ms",
        t.elapsed().as_secs_f64() * 1e3
    );
    let t = Instant::now();
    let sys = rillnet::analysis::kirchhoff::KirchhoffSystem::new(net);
    let g = rillnet::analysis::kirchhoff::conductances(net);
    println!("  assemble: {:8.1} ms", t.elapsed().as_secs_f64() * 1e3);
    let t = Instant::now();
    let sym = rillnet::solver::SymbolicCholesky::analyse(sys.pattern(), Default::default())
        .expect("analyse");
    println!("  analyse: {:8.1} ms", t.elapsed().as_secs_f64() * 1e3);
    let t = Instant::now();
    let sol = rillnet::analysis::kirchhoff::solve_with(net, &sys, &sym, &g).expect("solve");
    println!(
        "  factor+solve+check: {:8.1} ms (residual {:e})",
        t.elapsed().as_secs_f64() * 1e3,
        sol.max_relative_residual
    );
    let t = Instant::now();
    let state = rillnet::analysis::steady_state(net).expect("solve");
    println!(
        "solve (assemble, factor, check):     {:8.1} ms",
        t.elapsed().as_secs_f64() * 1e3
    );
    let outcome = rillnet::Outcome::Solved {
        chip: Box::new(chip.clone()),
        state,
        sensitivities: None,
    };
    use rillnet::report::{Format, JsonLayout};
    for (name, f, layout) in [
        ("json", Format::Json, JsonLayout::Pretty),
        ("jsonc", Format::Json, JsonLayout::Compact),
        ("csv", Format::Csv, JsonLayout::Pretty),
        ("table", Format::Table, JsonLayout::Pretty),
    ] {
        let t = Instant::now();
        let mut s = Vec::new();
        rillnet::report::render_with(&outcome, f, layout, &mut s).expect("render");
        println!(
            "render {name:5} ({:6} kB):            {:8.1} ms",
            s.len() / 1024,
            t.elapsed().as_secs_f64() * 1e3
        );
    }
}

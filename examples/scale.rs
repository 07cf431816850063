//! Scale benchmark: generated grid chips from 10³ to 10⁶ channels.
//!
//! ```text
//! cargo run --release --example scale                     # timing table
//! cargo run --release --example scale -- --write 100000 grid.json   # a chip file to time `rillnet solve`
//! ```
//!
//! Each size is a square grid of junctions joined by identical rectangular channels; the left
//! column is held at 100 mbar, the right column at 0, and a syringe pump injects into the
//! centre node. Phases are timed separately: building the validated network, assembling the
//! Kirchhoff system, the symbolic analysis (ordering), the numeric factorisation (sequential
//! and with two threads), the triangular solves and the balance check. Peak memory is the
//! process's peak resident set (VmHWM), reset before each size.

use rillnet::analysis::kirchhoff::{balance_residuals, conductances, KirchhoffSystem};
use rillnet::solver::{Parallelism, SymbolicCholesky};
use std::time::Instant;

#[path = "support/grid.rs"]
mod grid;
use grid::grid;

fn reset_peak_memory() {
    // Linux: writing 5 to clear_refs resets the peak RSS counter (VmHWM).
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

fn peak_memory_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

fn ms(t: Instant) -> f64 {
    t.elapsed().as_secs_f64() * 1e3
}

fn write_chip(channels: usize, path: &str) {
    let side = ((channels as f64 / 2.0).sqrt().ceil() as usize).max(2);
    let mut out = String::new();
    let json = path.ends_with(".json");
    let mut nodes = Vec::new();
    let mut chans = Vec::new();
    for i in 0..side {
        for j in 0..side {
            let port = if j == 0 {
                r#"{"pressure": "100 mbar"}"#
            } else if j == side - 1 {
                r#"{"pressure": "0 Pa"}"#
            } else {
                "{}"
            };
            nodes.push((format!("n{i}_{j}"), port));
            if j + 1 < side {
                chans.push((
                    format!("h{i}_{j}"),
                    format!("n{i}_{j}"),
                    format!("n{i}_{}", j + 1),
                ));
            }
            if i + 1 < side {
                chans.push((
                    format!("v{i}_{j}"),
                    format!("n{i}_{j}"),
                    format!("n{}_{j}", i + 1),
                ));
            }
        }
    }
    if json {
        out.push_str("{\"name\": \"generated grid\", \"fluid\": {\"viscosity\": \"1.0016 mPa*s\", \"density\": \"998.2 kg/m^3\"},\n");
        out.push_str("\"sections\": {\"cell\": {\"shape\": \"rectangle\", \"width\": \"100 um\", \"height\": \"50 um\"}},\n\"nodes\": {\n");
        let n: Vec<String> = nodes.iter().map(|(k, v)| format!("\"{k}\": {v}")).collect();
        out.push_str(&n.join(",\n"));
        out.push_str("},\n\"channels\": {\n");
        let c: Vec<String> = chans
            .iter()
            .map(|(k, a, b)| format!("\"{k}\": {{\"from\": \"{a}\", \"to\": \"{b}\", \"section\": \"cell\", \"length\": \"1 mm\"}}"))
            .collect();
        out.push_str(&c.join(",\n"));
        out.push_str("}}\n");
    } else {
        out.push_str(
            "name: generated grid\nfluid: {viscosity: 1.0016 mPa*s, density: 998.2 kg/m^3}\n",
        );
        out.push_str(
            "sections:\n  cell: {shape: rectangle, width: 100 um, height: 50 um}\nnodes:\n",
        );
        for (k, v) in &nodes {
            out.push_str(&format!("  {k}: {}\n", v.replace('"', "")));
        }
        out.push_str("channels:\n");
        for (k, a, b) in &chans {
            out.push_str(&format!(
                "  {k}: {{from: {a}, to: {b}, section: cell, length: 1 mm}}\n"
            ));
        }
    }
    if std::path::Path::new(path).exists() {
        eprintln!("{path} exists; not overwriting");
        std::process::exit(2);
    }
    std::fs::write(path, out).expect("write chip file");
    println!(
        "wrote {path}: {} nodes, {} channels",
        nodes.len(),
        chans.len()
    );
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() == 4 && args[1] == "--write" {
        let n: usize = args[2].parse().expect("channel count");
        write_chip(n, &args[3]);
        return;
    }
    let sizes: Vec<usize> = if args.len() > 1 {
        args[1..].iter().filter_map(|a| a.parse().ok()).collect()
    } else {
        vec![1_000, 10_000, 100_000, 1_000_000]
    };
    println!(
        "{:>9} {:>8} {:>9} {:>9} {:>9} {:>9} {:>11} {:>9} {:>9} {:>10} {:>9}",
        "channels",
        "unknowns",
        "build ms",
        "assem ms",
        "order ms",
        "fact1 ms",
        "fact2thr ms",
        "solve ms",
        "check ms",
        "total1 ms",
        "peak MiB"
    );
    for target in sizes {
        reset_peak_memory();
        // channels = 2·side·(side − 1)
        let side = ((target as f64 / 2.0).sqrt().round() as usize).max(2);
        let t = Instant::now();
        let net = grid(side);
        let t_build = ms(t);

        let t = Instant::now();
        let system = KirchhoffSystem::new(&net);
        let g = conductances(&net);
        let values = system.matrix_values(&g);
        let b = system.rhs(&net, &g);
        let t_assemble = ms(t);

        let t = Instant::now();
        let symbolic =
            SymbolicCholesky::analyse(system.pattern(), Parallelism::Sequential).expect("analysis");
        let t_order = ms(t);

        let t = Instant::now();
        let factor = symbolic
            .factorize(system.pattern(), &values)
            .expect("factor");
        let t_fact_seq = ms(t);

        let symbolic_par =
            SymbolicCholesky::analyse(system.pattern(), Parallelism::Threads(2)).expect("analysis");
        let t = Instant::now();
        let factor_par = symbolic_par
            .factorize(system.pattern(), &values)
            .expect("factor");
        let t_fact_par = ms(t);
        drop(factor_par);

        let t = Instant::now();
        let mut x = b.clone();
        factor.solve_in_place(&mut x).expect("solve");
        let t_solve = ms(t);

        let t = Instant::now();
        let p = system.node_pressures(&net, &x);
        let worst = balance_residuals(&net, &p, &g)
            .into_iter()
            .flatten()
            .fold(0.0f64, f64::max);
        let t_check = ms(t);
        assert!(worst < 1e-9, "balance residual {worst}");

        println!(
            "{:>9} {:>8} {:>9.1} {:>9.1} {:>9.1} {:>9.1} {:>11.1} {:>9.1} {:>9.1} {:>10.1} {:>9.0}",
            net.channels.len(),
            system.dim(),
            t_build,
            t_assemble,
            t_order,
            t_fact_seq,
            t_fact_par,
            t_solve,
            t_check,
            t_assemble + t_order + t_fact_seq + t_solve + t_check,
            peak_memory_mib().unwrap_or(f64::NAN)
        );
    }
    println!("\nbuild: names + validation + graph; assem: Kirchhoff pattern and values; order: AMD + symbolic;");
    println!("fact1/fact2thr: numeric Cholesky sequential / rayon 2 threads; total1 = assem..check, sequential.");
}

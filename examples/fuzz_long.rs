//! The long version of the mutation fuzz in `tests/fuzz.rs` (same driver, same checks):
//!
//! ```sh
//! cargo run --release --example fuzz_long -- [SEED] [COUNT] [NUMERIC_SHARE]
//! ```
//!
//! Defaults: seed 1, 100 000 cases, one case in 10 on a chip with numerically solved sections.
//! Prints a summary and every failure (seed chip, case, command, problem, the mutated chip);
//! exits 1 when there was any.

#[allow(dead_code)]
#[path = "../tests/fuzz.rs"]
mod fuzz;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let arg = |i: usize, default: u64| {
        args.get(i)
            .and_then(|a| a.parse::<u64>().ok())
            .unwrap_or(default)
    };
    let (seed, count, share) = (arg(0, 1), arg(1, 100_000), arg(2, 10));
    let start = std::time::Instant::now();
    let summary = fuzz::run(seed, count as usize, share as usize);
    for f in &summary.failures {
        println!(
            "=== {} case {} ({}): {}\n{}",
            f.seed, f.case, f.command, f.problem, f.text
        );
    }
    println!(
        "seed {seed}: {} cases, {} commands: {} accepted, {} refused, {} failures in {:.1} s",
        summary.cases,
        summary.commands,
        summary.accepted,
        summary.refused,
        summary.failures.len(),
        start.elapsed().as_secs_f64()
    );
    if !summary.failures.is_empty() {
        std::process::exit(1);
    }
}

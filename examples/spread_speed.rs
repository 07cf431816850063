//! Speed of `spread`: Monte Carlo samples of a chip of about 1 000 channels, each through the
//! balance-checked solve on one symbolic analysis, spread over the cores (rayon).
//!
//! The chip is the benchmark grid (23×23 nodes, 1 012 rectangular channels of one section)
//! with every width toleranced per channel (±2 µm), every height in one group (±5 %) and every
//! length per channel (±10 µm): 2 025 random variables, 1 012 reported flows.
//!
//! ```sh
//! cargo run --release --example spread_speed -- [SAMPLES] [THREADS]
//! ```
//!
//! Prints samples/s, the time of the first-order part, and the peak resident memory for three
//! sample counts (SAMPLES/10, SAMPLES, 3·SAMPLES): no per-sample values are kept and the
//! percentile histograms are sized by the model, so the peak does not grow with the samples.
//! The CPU seconds of the process (user + system) are printed beside the wall time: on a
//! machine shared with other jobs they say what the run costs when the wall time does not.

#[path = "support/grid.rs"]
mod grid;

use rillnet::analysis::spread::{Prepared, Shard};
use rillnet::chip::design::Design;
use rillnet::chip::tolerances::{Amount, Dim, Distribution, Tolerance, Toleranced, Tolerances};
use rillnet::network::SectionId;
use std::time::Instant;

fn peak_memory_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

/// User + system CPU seconds of this process so far (Linux, 100 clock ticks per second).
fn cpu_seconds() -> Option<f64> {
    let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
    // Fields after the command name (which is in parentheses): utime and stime are the
    // 12th and 13th of them.
    let rest = stat.rsplit_once(')')?.1;
    let fields: Vec<&str> = rest.split_whitespace().collect();
    let ticks: f64 = fields.get(11)?.parse::<f64>().ok()? + fields.get(12)?.parse::<f64>().ok()?;
    Some(ticks / 100.0)
}

fn load_average() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .ok()
        .and_then(|l| l.split_whitespace().next().map(str::to_string))
        .unwrap_or_else(|| "?".into())
}

fn reset_peak_memory() {
    // Linux: writing 5 to clear_refs resets the peak RSS counter (VmHWM).
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let samples: u64 = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(10_000);
    let threads: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(2);
    let network = grid::grid(23);
    let normal = Distribution::Normal { sigmas: 2.0 };
    let mut items = vec![
        Tolerance {
            what: Toleranced::SectionDim {
                section: SectionId(0),
                dim: Dim::Width,
            },
            amount: Amount::Absolute(2e-6),
            distribution: normal,
            group: None,
            label: "sections.cell.tolerance.width".into(),
        },
        Tolerance {
            what: Toleranced::SectionDim {
                section: SectionId(0),
                dim: Dim::Height,
            },
            amount: Amount::Relative(0.05),
            distribution: normal,
            group: Some("layer_1".into()),
            label: "sections.cell.tolerance.height".into(),
        },
    ];
    for k in 0..network.channels.len() {
        items.push(Tolerance {
            what: Toleranced::Length {
                channel: rillnet::network::ChannelId(k),
            },
            amount: Amount::Absolute(10e-6),
            distribution: normal,
            group: None,
            label: format!(
                "channels.{}.tolerance.length",
                network.channels[rillnet::network::ChannelId(k)].name
            ),
        });
    }
    let tolerances = Tolerances { items };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("thread pool");
    let t = Instant::now();
    let prepared =
        Prepared::new(&network, &Design::default(), &tolerances).expect("prepared model");
    println!(
        "{} channels, {} random variables, {} reported quantities; first order {:.3} s",
        network.channels.len(),
        prepared.variables.len(),
        prepared.quantities.len(),
        t.elapsed().as_secs_f64()
    );
    println!("samples   threads   time [s]   CPU [s]   samples/s   peak MiB   load");
    for n in [samples / 10, samples, 3 * samples] {
        reset_peak_memory();
        let load = load_average();
        let cpu = cpu_seconds().unwrap_or(f64::NAN);
        let t = Instant::now();
        let state = pool.install(|| prepared.monte_carlo(n, 1, Shard::WHOLE));
        let result = prepared.finish(state, 1, Shard::WHOLE, n);
        let secs = t.elapsed().as_secs_f64();
        let cpu = cpu_seconds().unwrap_or(f64::NAN) - cpu;
        println!(
            "{n:>7}   {threads:>7}   {secs:>8.3}   {cpu:>7.2}   {:>9.0}   {:>8.1}   {load}",
            n as f64 / secs,
            peak_memory_mib().unwrap_or(f64::NAN)
        );
        assert_eq!(result.withheld, 0);
    }
}

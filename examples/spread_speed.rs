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
//! Prints samples/s, the time of the first-order part, and the peak resident memory for two
//! sample counts (no per-sample values are kept; the percentile histograms fill towards their
//! bound, so the peak still rises between the two counts).

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
    println!("samples   threads   time [s]   samples/s   peak MiB");
    for n in [samples / 10, samples] {
        reset_peak_memory();
        let t = Instant::now();
        let state = pool.install(|| prepared.monte_carlo(n, 1, Shard::WHOLE));
        let result = prepared.finish(state, 1, Shard::WHOLE, n);
        let secs = t.elapsed().as_secs_f64();
        println!(
            "{n:>7}   {threads:>7}   {secs:>8.3}   {:>9.0}   {:>8.1}",
            n as f64 / secs,
            peak_memory_mib().unwrap_or(f64::NAN)
        );
        assert_eq!(result.withheld, 0);
    }
}

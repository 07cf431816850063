//! Helpers shared by the integration tests.
#![allow(dead_code)] // each test crate uses a different subset

use assert_cmd::Command;
use std::path::Path;

/// The `rillnet` binary under test.
pub fn rillnet() -> Command {
    Command::cargo_bin("rillnet").unwrap()
}

/// Run `rillnet` with `args` (which must ask for JSON); the parsed output. Panics with the
/// error output when the command fails.
pub fn run_json<I, S>(args: I) -> serde_json::Value
where
    I: IntoIterator<Item = S>,
    S: AsRef<std::ffi::OsStr>,
{
    let out = rillnet().args(args).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// `rillnet solve --format json FILE`, parsed.
pub fn json_of(path: &Path) -> serde_json::Value {
    run_json([
        std::ffi::OsStr::new("solve"),
        "--format".as_ref(),
        "json".as_ref(),
        path.as_os_str(),
    ])
}

/// A channel's flow [m³/s] from a solve report.
pub fn channel_flow(report: &serde_json::Value, name: &str) -> f64 {
    report["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap()["flow_m3_per_s"]
        .as_f64()
        .unwrap()
}

/// Write `text` to `dir/name`; the path.
pub fn write_file(dir: &Path, name: &str, text: &str) -> std::path::PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// A network of nodes `n{i}` from (kind, value, _) — kind 1 a pressure port at `value` Pa, 2 a
/// flow port at `value` pL/s, else a junction — joined by [`add_circle_channels`].
pub fn ported_network(
    ports: &[(u8, f64, f64)],
    channels: &[(usize, usize, f64, f64)],
) -> rillnet::network::Network {
    use rillnet::prelude::*;
    let mut b = NetworkBuilder::new(Fluid::WATER_20C);
    for (i, &(kind, v, _)) in ports.iter().enumerate() {
        let port = match kind {
            1 => Port::Pressure(Pressure::from_si(v)),
            2 => Port::Flow(VolumeFlow::from_si(v * 1e-12)),
            _ => Port::Junction,
        };
        b.add_node(&format!("n{i}"), port).unwrap();
    }
    add_circle_channels(&mut b, channels, None);
    b.build().unwrap()
}

/// Solute and flow that reach nodes nothing leaves (dead ends fed by rounding-level flows of
/// the flow solve): (Σ Q·c, Σ Q) into them, `means` the channels' mean concentrations.
pub fn sunk_into_dead_ends(
    network: &rillnet::network::Network,
    into: &[f64],
    flows: &[f64],
    means: &[Option<f64>],
) -> (f64, f64) {
    use rillnet::network::{NodeId, Port};
    let (mut sunk, mut sunk_flow) = (0.0, 0.0);
    for (i, &net) in into.iter().enumerate() {
        let (mut q_in, mut m_in) = (0.0, 0.0);
        let mut leaves = net < 0.0 && !matches!(network.nodes[NodeId(i)].port, Port::Junction);
        for (k, c) in network.channels.iter().enumerate() {
            let q = flows[k];
            if c.from == c.to || q == 0.0 {
                continue;
            }
            let (up, down) = if q > 0.0 {
                (c.from.0, c.to.0)
            } else {
                (c.to.0, c.from.0)
            };
            if down == i {
                q_in += q.abs();
                m_in += q.abs() * means[k].unwrap_or(0.0);
            }
            leaves |= up == i;
        }
        if !leaves {
            sunk += m_in;
            sunk_flow += q_in;
        }
    }
    (sunk, sunk_flow)
}

/// Add channels `c{k}` between nodes `n{a}` and `n{c}` for each (a, c, diameter µm, length mm),
/// each a circle of its own inline section; `flip` reverses channel k's direction.
pub fn add_circle_channels(
    b: &mut rillnet::network::NetworkBuilder,
    channels: &[(usize, usize, f64, f64)],
    flip: Option<usize>,
) {
    use rillnet::section::Shape;
    use rillnet::units::Length;
    for (k, &(a, c, d, l)) in channels.iter().enumerate() {
        let (a, c) = if flip == Some(k) { (c, a) } else { (a, c) };
        let s = b
            .inline_section(
                &format!("c{k}"),
                Shape::Circle {
                    diameter: Length::from_si(d * 1e-6),
                },
            )
            .unwrap();
        b.add_channel(
            &format!("c{k}"),
            &format!("n{a}"),
            &format!("n{c}"),
            s,
            Length::from_si(l * 1e-3),
        )
        .unwrap();
    }
}

/// ln K of a numerically solved section at `tolerance`, with its relative error estimate;
/// the solve must converge.
pub fn converged_ln_k(shape: &rillnet::section::Shape, tolerance: f64) -> (f64, f64) {
    let opts = rillnet::section::numeric::NumericOptions {
        tolerance,
        ..Default::default()
    };
    let sol = shape.solve_numeric(&opts).expect("solvable section");
    assert!(sol.converged, "{shape:?} did not converge");
    (sol.conductance_factor.ln(), sol.relative_error_estimate)
}

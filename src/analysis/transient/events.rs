//! Answers read off an evolution: settling times after a switch, wells running dry (found by
//! the run itself on its dense output), wells reaching the same level, volume delivered per
//! port.
//!
//! Settling and level times are interpolated linearly between output instants, so they are as
//! fine as `--every` (the integrator's own accuracy is finer).

use super::Evolution;
use crate::network::{Network, NodeId, Port, Storage};

/// What happened.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum EventKind {
    /// A channel's flow covered 90 %, 95 % or 99 % of its change since the last switch.
    Settled(u8),
    /// A well's level reached its bottom: from then on its port carries no flow (its node is
    /// a plain junction) and the run goes on.
    Dry,
    /// A dry well took liquid in again (the junction's pressure rose above its empty head).
    Refilled,
    /// A well ran dry and left part of the chip with no pressure reference and no storage:
    /// the run stops there.
    DryStop,
    /// Two wells' levels came within 1 % of their initial difference.
    LevelsEqual,
}

/// One event: its kind, the channel/node(s) it concerns, and when.
#[derive(Clone, Debug, PartialEq)]
pub struct Event {
    pub kind: EventKind,
    pub subject: String,
    pub time: f64,
}

/// The wells' switches as events: running dry, filling again, and where the run had to stop.
pub fn well_events(network: &Network, ev: &Evolution) -> Vec<Event> {
    ev.switches
        .iter()
        .map(|s| Event {
            kind: match (s.dry, ev.stopped_at == Some(s.time)) {
                (true, true) => EventKind::DryStop,
                (true, false) => EventKind::Dry,
                (false, _) => EventKind::Refilled,
            },
            subject: network.nodes[s.node].name.clone(),
            time: s.time,
        })
        .collect()
}

fn crossing(t0: f64, t1: f64, y0: f64, y1: f64, y: f64) -> f64 {
    if y1 == y0 {
        t1
    } else {
        t0 + (t1 - t0) * ((y - y0) / (y1 - y0)).clamp(0.0, 1.0)
    }
}

/// Settling of every channel after the last switch at or before the run's start of change:
/// the first time |Q − Q(t₀)| reaches p·|Q_end − Q(t₀)|, p = 90, 95, 99 %.
pub fn settling(network: &Network, ev: &Evolution, switched_at: f64) -> Vec<Event> {
    let mut out = Vec::new();
    let Some(k0) = ev.times.iter().position(|&t| t >= switched_at) else {
        return out;
    };
    let scale = ev
        .flows
        .iter()
        .flatten()
        .fold(0.0f64, |m, q| m.max(q.abs()));
    for (c, ch) in network.channels.iter().enumerate() {
        let q0 = ev.flows[k0][c];
        let Some(end) = ev.flows.last().map(|f| f[c]) else {
            continue;
        };
        let change = end - q0;
        if change.abs() <= 1e-6 * scale {
            continue;
        }
        for pct in [90u8, 95, 99] {
            let goal = q0 + change * f64::from(pct) / 100.0;
            let reached = (k0 + 1..ev.times.len())
                .find(|&k| (ev.flows[k][c] - goal) * change.signum() >= 0.0);
            if let Some(k) = reached {
                let (a, b) = (ev.flows[k - 1][c], ev.flows[k][c]);
                out.push(Event {
                    kind: EventKind::Settled(pct),
                    subject: ch.name.clone(),
                    time: crossing(ev.times[k - 1], ev.times[k], a, b, goal),
                });
            }
        }
    }
    out
}

/// Pairs of wells whose levels come within 1 % of their initial difference.
pub fn levels_equal(network: &Network, ev: &Evolution) -> Vec<Event> {
    let mut out = Vec::new();
    for (i, (a, la)) in ev.levels.iter().enumerate() {
        for (b, lb) in &ev.levels[i + 1..] {
            let d0 = la[0] - lb[0];
            if d0 == 0.0 {
                continue;
            }
            if let Some(k) = (1..la.len()).find(|&k| (la[k] - lb[k]).abs() <= 0.01 * d0.abs()) {
                let (p, q) = (la[k - 1] - lb[k - 1], la[k] - lb[k]);
                out.push(Event {
                    kind: EventKind::LevelsEqual,
                    subject: format!("{}={}", network.nodes[*a].name, network.nodes[*b].name),
                    time: crossing(
                        ev.times[k - 1],
                        ev.times[k],
                        p.abs(),
                        q.abs(),
                        0.01 * d0.abs(),
                    ),
                });
            }
        }
    }
    out
}

/// Volume each port (pressure, flow or well) delivered into the chip over the run [m³]
/// (trapezoid rule over the outputs), in node order.
pub fn delivered(network: &Network, ev: &Evolution) -> Vec<(NodeId, f64)> {
    let ports =
        network.nodes.iter().enumerate().filter(|(_, n)| {
            n.port != Port::Junction || matches!(n.storage, Some(Storage::Well(_)))
        });
    ports
        .map(|(i, _)| {
            let node = NodeId(i);
            let inflow = |k: usize| -> f64 {
                network
                    .incident(node)
                    .map(|(c, _)| {
                        let q = ev.flows[k][c.0];
                        if network.channels[c].from == node {
                            q
                        } else {
                            -q
                        }
                    })
                    .sum()
            };
            let v = (1..ev.times.len())
                .map(|k| 0.5 * (inflow(k - 1) + inflow(k)) * (ev.times[k] - ev.times[k - 1]))
                .sum();
            (node, v)
        })
        .collect()
}

//! Channel flows that can be trusted, and the check that they balance.
//!
//! A flow computed as Q = g·(p_i − p_j) inherits the rounding of the pressures magnified by
//! (|p_i| + |p_j|)/|p_i − p_j|: a channel whose resistance is negligible beside its
//! neighbours has almost equal end pressures, and its computed flow can be wrong in every
//! digit although every pressure is right to rounding. Such "stiff" channels get their flows
//! from the flow balance instead: at a node whose balance is imposed (a junction or a flow
//! port) and where every other channel's flow is trusted, the stiff channel carries the rest.
//! Peeling such nodes repeatedly recovers every stiff channel that lies on a forest hanging
//! off trusted flows, in O(nodes + channels). Stiff channels left over (a loop of them, or a
//! stiff channel with no imposed end) cannot be recovered and are named in the refusal.
//!
//! Every solution is then checked on its flows: at each imposed node, the net flow must vanish
//! to [`FLOW_LIMIT`] relative to the largest flow through the node, with a floor of a few
//! units of rounding of the largest flow anywhere (so that nodes where the flow has decayed to
//! nothing are not judged on noise).

use super::{KirchhoffSystem, Role};
use crate::network::{ChannelId, Network, NodeId, Port};

/// Largest relative error accepted on a flow computed from its end pressures, and on a node's
/// net flow relative to the flows through it.
pub const FLOW_LIMIT: f64 = 1e-9;

/// A channel is stiff when its conductance exceeds the other channels at either end by this
/// factor (its resistance is small beside its neighbours').
pub const STIFF_RATIO: f64 = 1e3;

/// Channels whose computed flow is not trusted: their conductance exceeds the others at their
/// ends by [`STIFF_RATIO`], and their end pressures agree so closely that the rounding of
/// g·(p_i − p_j), ε·(|p_i| + |p_j|)/|p_i − p_j| relative, exceeds [`FLOW_LIMIT`]. (A channel
/// of ordinary resistance with equal end pressures, as in a balanced bridge, carries nearly
/// nothing and is trusted.) Channels between two pressure ports take their given pressures and
/// are never stiff; dead-end channels carry exactly nothing. `None` when no channel is stiff.
///
/// The others' conductance at an end is that node's total `node_g` less g_k: the difference
/// loses digits only when the others are far below g_k, where the ratio is far above
/// [`STIFF_RATIO`] either way (an end with nothing left counts as infinitely far above).
pub(super) fn stiff_channels(
    system: &KirchhoffSystem,
    pressures: &[f64],
    g: &[f64],
    node_g: &[f64],
    dead: &[bool],
) -> Option<Vec<bool>> {
    let roles = system.roles();
    let is_stiff = |k: usize, [a, b]: [u32; 2]| {
        let (a, b) = (a as usize, b as usize);
        if dead[k] || !cancels(pressures[a], pressures[b]) {
            return false;
        }
        if roles[a] == Role::Pressure && roles[b] == Role::Pressure {
            return false;
        }
        let others = (node_g[a] - g[k]).max(node_g[b] - g[k]);
        others <= 0.0 || g[k] >= STIFF_RATIO * others
    };
    let ends = system.ends();
    let first = (0..ends.len()).find(|&k| is_stiff(k, ends[k]))?;
    let mut stiff = vec![false; ends.len()];
    stiff[first] = true;
    for (k, &e) in ends.iter().enumerate().skip(first + 1) {
        stiff[k] = is_stiff(k, e);
    }
    Some(stiff)
}

/// The rounding of g·(p_i − p_j), ε·(|p_i| + |p_j|)/|p_i − p_j| relative, exceeds
/// [`FLOW_LIMIT`]: the first condition for a channel to be stiff ([`stiff_channels`]).
#[inline]
pub(super) fn cancels(pi: f64, pj: f64) -> bool {
    let size = pi.abs() + pj.abs();
    size > 0.0 && f64::EPSILON * size > FLOW_LIMIT * (pi - pj).abs()
}

/// g_k over the larger of the sums of the other conductances at its two ends (infinite when
/// it is the only channel at both ends).
pub(super) fn conductance_ratio(network: &Network, g: &[f64], k: ChannelId) -> f64 {
    let c = &network.channels[k];
    let others = |end: NodeId| -> f64 {
        network
            .incident(end)
            .filter(|(o, _)| *o != k)
            .map(|(o, _)| g[o.0])
            .sum()
    };
    let ends = others(c.from).max(others(c.to));
    if ends > 0.0 {
        g[k.0] / ends
    } else {
        f64::INFINITY
    }
}

fn imposed(network: &Network, node: NodeId) -> bool {
    !matches!(network.nodes[node].port, Port::Pressure(_))
}

/// Replace the flows of the `stiff` channels ([`stiff_channels`]) by the values the flow
/// balance gives. `injection[i]` is the flow a node injects (a flow port's setting, 0 at a
/// junction). Returns the stiff channels that could not be recovered (empty when all were).
pub(super) fn recover_stiff(
    network: &Network,
    stiff: &[bool],
    injection: &[f64],
    flows: &mut [f64],
) -> Vec<ChannelId> {
    let mut unknown = stiff.to_vec();
    let mut count = vec![0usize; network.nodes.len()];
    for (c, _) in network.channels.iter().zip(&unknown).filter(|(_, &u)| u) {
        count[c.from.0] += 1;
        count[c.to.0] += 1;
    }
    let mut stack: Vec<NodeId> = network
        .nodes
        .ids()
        .filter(|&i| count[i.0] == 1 && imposed(network, i))
        .collect();
    while let Some(node) = stack.pop() {
        let Some((k, other)) = network.incident(node).find(|(c, _)| unknown[c.0]) else {
            continue;
        };
        // Balance at `node`: Σ outflows = injection; solve for channel k.
        let mut rest = injection[node.0];
        for (c, _) in network.incident(node).filter(|(c, _)| *c != k) {
            let ch = &network.channels[c];
            rest -= if ch.from == node {
                flows[c.0]
            } else {
                -flows[c.0]
            };
        }
        flows[k.0] = if network.channels[k].from == node {
            rest
        } else {
            -rest
        };
        unknown[k.0] = false;
        count[node.0] -= 1;
        count[other.0] -= 1;
        if count[other.0] == 1 && imposed(network, other) {
            stack.push(other);
        }
    }
    unknown
        .iter()
        .enumerate()
        .filter(|(_, &u)| u)
        .map(|(k, _)| ChannelId(k))
        .collect()
}

/// The node whose net flow misses the balance most, relative to the flows through it, and
/// that relative miss; `None` when every imposed node balances to [`FLOW_LIMIT`].
///
/// A miss within the rounding of the flows computed from pressures, 64·ε·Σ g_k·(|p_i| + |p_j|)
/// over every channel whose flow came from pressures (not the `stiff` ones, whose flows came
/// from the balance), is no miss: where nothing flows, or far down a leaky line where flows
/// decay below the smallest normal double, flows are that rounding. (A normwise floor, in
/// the spirit of Arioli, Demmel & Duff 1989.)
pub fn worst_flow_imbalance(
    network: &Network,
    pressures: &[f64],
    g: &[f64],
    stiff: &[bool],
    injection: &[f64],
    flows: &[f64],
) -> Option<(NodeId, f64)> {
    let n = network.nodes.len();
    let mut net = vec![0.0; n];
    let mut through = vec![0.0f64; n];
    let mut noise = 0.0;
    for (k, (c, &q)) in network.channels.iter().zip(flows).enumerate() {
        net[c.from.0] += q;
        net[c.to.0] -= q;
        through[c.from.0] = through[c.from.0].max(q.abs());
        through[c.to.0] = through[c.to.0].max(q.abs());
        if !stiff[k] {
            noise += g[k] * (pressures[c.from.0].abs() + pressures[c.to.0].abs());
        }
    }
    let roles = Role::of_nodes(network);
    worst_of_sums(&roles, &net, &through, noise, injection)
}

/// [`worst_flow_imbalance`] from its sums: each node's net outflow `net` and largest flow
/// `through`, and `noise` = Σ g_k·(|p_i| + |p_j|) over the channels whose flows came from
/// pressures (the checked solve gathers them in its one pass over the channels).
pub(super) fn worst_of_sums(
    roles: &[Role],
    net: &[f64],
    through: &[f64],
    noise: f64,
    injection: &[f64],
) -> Option<(NodeId, f64)> {
    let floor = 64.0 * f64::EPSILON * noise;
    let mut worst: Option<(NodeId, f64)> = None;
    for (i, _) in roles.iter().enumerate().filter(|(_, r)| r.imposed()) {
        let miss = (net[i] - injection[i]).abs();
        if miss <= floor {
            continue;
        }
        let relative = miss / through[i].max(injection[i].abs());
        if (relative > FLOW_LIMIT || relative.is_nan())
            && worst.is_none_or(|(_, w)| relative > w || relative.is_nan())
        {
            worst = Some((NodeId(i), relative));
        }
    }
    worst
}

/// The channel at `node` whose conductance most exceeds the other channels at its ends, with
/// that ratio (g_k over the larger of the two ends' other conductances): the likely cause
/// when the flows at `node` do not balance.
pub fn most_negligible_at(network: &Network, g: &[f64], node: NodeId) -> Option<(ChannelId, f64)> {
    network
        .incident(node)
        .map(|(k, _)| (k, conductance_ratio(network, g, k)))
        .max_by(|a, b| a.1.total_cmp(&b.1))
}

/// The channel whose conductance stands out most from the channels around it, either way
/// (largest |ln(g_k / others)|), with that ratio: the likely cause when the matrix cannot be
/// factorised. `None` for a network without channels.
pub fn most_extreme_channel(network: &Network, g: &[f64]) -> Option<(ChannelId, f64)> {
    network
        .channels
        .ids()
        .map(|k| (k, conductance_ratio(network, g, k)))
        .filter(|(_, r)| r.is_finite() && *r > 0.0)
        .max_by(|a, b| a.1.ln().abs().total_cmp(&b.1.ln().abs()))
}

/// The chip's global balance: the flows set at flow ports and the flows entering at pressure
/// ports (summed over their channels) add up to zero. Returns the miss relative to the
/// largest port flow when it exceeds [`FLOW_LIMIT`] and the rounding of the pressure ports'
/// flows (64·ε·Σ g_k·(|p_i| + |p_j|) over their channels); `None` when the balance holds.
/// Flow ports count with their set values, which are exact by definition.
pub(super) fn port_balance_miss(
    system: &KirchhoffSystem,
    pressures: &[f64],
    g: &[f64],
    injection: &[f64],
    flows: &[f64],
) -> Option<f64> {
    let roles = system.roles();
    // Each pressure port's inflow, summed over its channels (untouched pages stay unmapped).
    let mut inflow = vec![0.0; roles.len()];
    let mut noise = 0.0;
    for ((&[a, b], &gk), &q) in system.ends().iter().zip(g).zip(flows) {
        let (a, b) = (a as usize, b as usize);
        let (at_a, at_b) = (roles[a] == Role::Pressure, roles[b] == Role::Pressure);
        if !(at_a || at_b) {
            continue;
        }
        let size = gk * (pressures[a].abs() + pressures[b].abs());
        if at_a {
            noise += size;
            inflow[a] += q;
        }
        if at_b {
            noise += size;
            inflow[b] -= q;
        }
    }
    let mut sum = 0.0;
    let mut largest = 0.0f64;
    for (i, role) in roles.iter().enumerate() {
        let port = match role {
            Role::Flow => injection[i],
            Role::Pressure => inflow[i],
            Role::Junction => continue,
        };
        sum += port;
        largest = largest.max(port.abs());
    }
    let miss = sum.abs();
    if miss <= 64.0 * f64::EPSILON * noise || largest == 0.0 {
        return None;
    }
    let relative = miss / largest;
    (relative > FLOW_LIMIT || relative.is_nan()).then_some(relative)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::kirchhoff::testnet::{Chip, Rng};
    use crate::units::{Pressure, VolumeFlow};

    /// A path of `n` nodes with extra random channels (parallel ones included), pressure
    /// ports at both ends and now and then a flow port.
    fn random_network(rng: &mut Rng, n: usize) -> Network {
        let ports: Vec<Port> = (0..n)
            .map(|i| match (i, rng.below(7)) {
                (0, _) => Port::Pressure(Pressure::from_si(1000.0)),
                (i, _) if i == n - 1 => Port::Pressure(Pressure::from_si(0.0)),
                (_, 0) => Port::Pressure(Pressure::from_si(300.0)),
                (_, 1) => Port::Flow(VolumeFlow::from_si(1e-11)),
                _ => Port::Junction,
            })
            .collect();
        let mut chip = Chip::new(ports);
        for i in 1..n {
            chip.join(i - 1, i);
        }
        for _ in 0..n {
            let (i, j) = (rng.below(n), rng.below(n));
            if i != j {
                chip.join(i, j);
            }
        }
        chip.build()
    }

    /// The stiff mask from each node's total conductance agrees with the definition through
    /// each channel's neighbours ([`conductance_ratio`]), on random networks whose
    /// conductances span twelve orders of magnitude and whose end pressures often cancel.
    #[test]
    fn stiff_channels_from_node_totals_meet_the_definition() {
        let mut rng = Rng::new(3);
        let mut stiff_seen = 0;
        for _ in 0..400 {
            let n = 3 + rng.below(20);
            let net = random_network(&mut rng, n);
            let system = KirchhoffSystem::new(&net);
            let g: Vec<f64> = (0..net.channels.len())
                .map(|_| 10f64.powf(-6.0 + 12.0 * rng.unit()))
                .collect();
            let base: Vec<f64> = (0..net.nodes.len()).map(|_| 1000.0 * rng.unit()).collect();
            // Many channels get end pressures that agree to 1e-12 relative.
            let mut p = base.clone();
            for c in net.channels.iter() {
                if rng.below(2) == 0 {
                    p[c.to.0] = p[c.from.0] * (1.0 + 1e-12);
                }
            }
            let dead = net.dead_end_channels();
            let mut node_g = vec![0.0; net.nodes.len()];
            for (c, &gk) in net.channels.iter().zip(&g) {
                node_g[c.from.0] += gk;
                node_g[c.to.0] += gk;
            }
            let expected: Vec<bool> = net
                .channels
                .ids()
                .map(|k| {
                    let c = &net.channels[k];
                    let both_set = matches!(net.nodes[c.from].port, Port::Pressure(_))
                        && matches!(net.nodes[c.to].port, Port::Pressure(_));
                    !dead[k.0]
                        && !both_set
                        && cancels(p[c.from.0], p[c.to.0])
                        && conductance_ratio(&net, &g, k) >= STIFF_RATIO
                })
                .collect();
            let found = stiff_channels(&system, &p, &g, &node_g, &dead);
            stiff_seen += expected.iter().filter(|&&s| s).count();
            match found {
                None => assert!(!expected.contains(&true)),
                Some(mask) => assert_eq!(mask, expected),
            }
        }
        // The comparison is not vacuous.
        assert!(stiff_seen > 50, "{stiff_seen}");
    }
}

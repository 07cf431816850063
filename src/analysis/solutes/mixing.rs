//! Have the streams that met at a junction mixed by diffusion before the next split?
//!
//! Streams that meet at a junction flow on side by side (laminar flow), each across a part of
//! the width in proportion to its flow, and mix only by diffusion across the width. With plug
//! flow across the width, no Taylor dispersion and walls that the solute does not cross, the
//! concentration across the width ξ = x/w ∈ [0, 1] obeys ∂c/∂Fo = ∂²c/∂ξ², with the Fourier
//! number Fo = D·t/w² (t the residence time, volume/flow). The solution with no-flux walls is
//! the cosine series (Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §4.3.1, eq. 4.16
//! with impermeable faces; also §2.2 for the step initial condition):
//!
//! ```text
//! c(ξ, Fo) = c̄ + Σ_{n≥1} A_n cos(nπξ) exp(−n²π² Fo),   A_n = 2 ∫₀¹ c(ξ, 0) cos(nπξ) dξ
//! ```
//!
//! The *mixed fraction* is 1 − σ(Fo)/σ(0), σ the standard deviation of c across the width
//! (by Parseval, σ² = Σ A_n²/2 · exp(−2n²π²Fo)): 0 when nothing has mixed, 1 when uniform.
//! Streams count as mixed at [`MIXED_ENOUGH`] = 0.9, "90 % of the way to uniform"; for two
//! equal streams that is Fo ≈ 0.223, close to the first-mode rule exp(−π²Fo) = 0.1
//! (Fo = ln 10/π² ≈ 0.233).
//!
//! Along a chain of channels (one flow in, one out, no port) Fo adds up as Σ D·t_i/w_i²: in the
//! coordinate ξ the width only rescales time. The check follows each channel leaving a
//! junction where streams of different concentration meet, down to the first node that is not
//! such a pass-through; if that node splits the flow and the mixed fraction is under 0.9, the
//! last channel of the chain (the one feeding the split) is named. When the junction itself
//! splits the flow again, its outgoing channels are named with Fo = 0.
//!
//! Assumptions stated: the order of the streams across the width is not known without the
//! layout, so they are placed sorted by concentration (a monotone profile, which puts its
//! variance into the slowest mode — an assumption, not a proven worst case); the mixing width
//! is the section's overall width.

use super::{outflows, Field, FlowGraph, Load};
use crate::network::{ChannelId, Network, NodeId};

/// Mixed fraction at which streams count as mixed (common practice: "90 % mixed").
pub const MIXED_ENOUGH: f64 = 0.9;

/// Most cosine terms summed; beyond them the rest of the variance is bounded by its value at
/// Fo = 0 times the decay of the first term left out (an upper bound on σ).
const MAX_TERMS: usize = 4000;

/// A channel feeding a split whose streams have not mixed.
#[derive(Clone, Debug, PartialEq)]
pub struct Unmixed {
    /// The channel feeding the split (or leaving a junction that splits at once).
    pub channel: ChannelId,
    /// Where the streams met.
    pub junction: NodeId,
    /// Index of the least mixed species.
    pub species: usize,
    /// Mixed fraction 1 − σ/σ₀ reached at the end of the channel.
    pub mixed: f64,
    /// Fourier number D·Σt/w² from the junction to the end of the channel.
    pub fourier: f64,
}

/// Mixed fraction 1 − σ(Fo)/σ(0) of streams side by side across the width, given in order as
/// (fraction of the width, concentration), after Fourier number `fo` (series above).
pub fn mixed_fraction(streams: &[(f64, f64)], fo: f64) -> f64 {
    let total: f64 = streams.iter().map(|s| s.0).sum();
    if total.is_nan() || total <= 0.0 {
        return 1.0;
    }
    let mean = streams.iter().map(|s| s.0 * s.1).sum::<f64>() / total;
    let var0 = streams
        .iter()
        .map(|s| s.0 / total * (s.1 - mean).powi(2))
        .sum::<f64>();
    if var0.is_nan() || var0 <= 0.0 {
        return 1.0;
    }
    if fo.is_nan() || fo <= 0.0 {
        return 0.0;
    }
    let pi = std::f64::consts::PI;
    // Terms until exp(−2n²π²Fo) < 1e-20.
    let needed = ((20.0 * std::f64::consts::LN_10) / (2.0 * pi * pi * fo))
        .sqrt()
        .ceil();
    let terms = (needed as usize).clamp(1, MAX_TERMS);
    let mut bounds = Vec::with_capacity(streams.len() + 1);
    let mut acc = 0.0;
    bounds.push(0.0);
    for s in streams {
        acc += s.0 / total;
        bounds.push(acc.min(1.0));
    }
    let (mut head, mut head0) = (0.0, 0.0);
    for n in 1..=terms {
        let k = n as f64 * pi;
        let a: f64 = streams
            .iter()
            .zip(bounds.windows(2))
            .map(|(s, b)| s.1 * ((k * b[1]).sin() - (k * b[0]).sin()))
            .sum::<f64>()
            * 2.0
            / k;
        let half = 0.5 * a * a;
        head0 += half;
        head += half * (-2.0 * k * k * fo).exp();
    }
    let next = (terms + 1) as f64 * pi;
    let tail = (var0 - head0).max(0.0) * (-2.0 * next * next * fo).exp();
    (1.0 - ((head + tail) / var0).sqrt()).clamp(0.0, 1.0)
}

/// The streams meeting at `node` for one species, as (flow, concentration), sorted by
/// concentration; `None` when they all carry the same concentration.
fn meeting(g: &FlowGraph, field: &Field, source: &[f64], node: usize) -> Option<Vec<(f64, f64)>> {
    let mut streams: Vec<(f64, f64)> = g
        .inflows(node)
        .iter()
        .filter_map(|&(u, q)| field.nodes[u].map(|c| (q, c)))
        .collect();
    if g.external(node) > 0.0 {
        streams.push((g.external(node), source[node]));
    }
    if streams.len() < 2 {
        return None;
    }
    streams.sort_by(|a, b| a.1.total_cmp(&b.1));
    let lo = streams[0].1;
    let hi = streams[streams.len() - 1].1;
    // Streams equal to rounding do not need mixing.
    (hi - lo > 1e-9 * hi.abs().max(lo.abs())).then_some(streams)
}

/// Follow the flow from `node` out through `first` along pass-through nodes: (the last
/// channel, Σ t/w² [s/m²], whether the chain ends at a split).
/// `widths` caches each section's overall width (computed from its outline once).
fn chain(
    network: &Network,
    flows: &[f64],
    g: &FlowGraph,
    first: ChannelId,
    widths: &mut [Option<f64>],
) -> (ChannelId, f64, bool) {
    let mut channel = first;
    let mut sum = 0.0;
    for _ in 0..network.channels.len() {
        let c = &network.channels[channel];
        let s = &network.sections[c.section];
        let q = flows[channel.0].abs();
        let w = *widths[c.section.0].get_or_insert_with(|| s.shape.overall_width());
        sum += s.figures.area * c.length.si() / q / (w * w);
        let down = if flows[channel.0] > 0.0 {
            c.to.0
        } else {
            c.from.0
        };
        let outs = outflows(network, flows, down);
        if outs.len() >= 2 {
            return (channel, sum, true);
        }
        let through = outs.len() == 1 && g.inflows(down).len() == 1 && g.external(down) == 0.0;
        if !through {
            return (channel, sum, false);
        }
        channel = outs[0].0;
    }
    (channel, sum, false)
}

/// Every channel feeding a split whose streams are under [`MIXED_ENOUGH`] (the least mixed
/// species named), in the order of the junctions and their channels.
pub(super) fn unmixed(
    network: &Network,
    flows: &[f64],
    g: &FlowGraph,
    loads: &[Load<'_>],
    fields: &[Field],
) -> Vec<Unmixed> {
    let mut out: Vec<Unmixed> = Vec::new();
    let mut widths = vec![None; network.sections.len()];
    for node in 0..network.nodes.len() {
        let met: Vec<(usize, Vec<(f64, f64)>)> = fields
            .iter()
            .zip(loads)
            .enumerate()
            .filter_map(|(k, (f, l))| meeting(g, f, l.source, node).map(|s| (k, s)))
            .collect();
        if met.is_empty() {
            continue;
        }
        let outs = outflows(network, flows, node);
        for &(first, _, _) in &outs {
            let (last, geometric, feeds_split) = if outs.len() >= 2 {
                (first, 0.0, true)
            } else {
                chain(network, flows, g, first, &mut widths)
            };
            if !feeds_split {
                continue;
            }
            let worst = met
                .iter()
                .map(|(k, s)| {
                    let fo = loads[*k].diffusivity * geometric;
                    (*k, mixed_fraction(s, fo), fo)
                })
                .min_by(|a, b| a.1.total_cmp(&b.1));
            if let Some((species, mixed, fourier)) = worst {
                if mixed < MIXED_ENOUGH && !out.iter().any(|u| u.channel == last) {
                    out.push(Unmixed {
                        channel: last,
                        junction: NodeId(node),
                        species,
                        mixed,
                        fourier,
                    });
                }
            }
        }
    }
    out
}

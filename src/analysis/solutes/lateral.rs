//! Laminar co-flow: the concentration profile across each channel's width.
//!
//! **Model.** Streams that meet at a junction flow on side by side (laminar flow) and mix only
//! by diffusion across the width. Each channel carries a lateral profile c(ξ), ξ = x/w ∈ [0, 1]
//! measured from the channel's left wall looking downstream.
//!
//! * At a junction the incoming streams enter side by side in the order their channels meet it
//!   (the angles of the drawing: node `at:` positions and the first/last `path:` point of each
//!   channel), each across a part of the width in proportion to its flow. Going
//!   anticlockwise from the outgoing channels, the incoming ones fill ξ from 0 upward; the
//!   outgoing channels take slices of the combined profile in proportion to their flows, the
//!   first slice (ξ from 0) going to the first outgoing channel met clockwise from the incoming
//!   ones. A stream keeps its left on the left through a bend (the flow is planar and does not
//!   turn over). Flow entering the chip at a port takes the first part of the width; flow
//!   leaving the chip at a node that also feeds channels takes the last slice. Where a node
//!   needs an order (two or more streams in, or out) and the drawing does not give every angle,
//!   the order of the file is used (channels by file order) and the result says so in a note.
//! * Along a channel the profile diffuses across the width for the residence time t = V/Q:
//!   ∂c/∂Fo = ∂²c/∂ξ² with no-flux walls, Fo = D·t/w² (w the section's overall width). The
//!   profile entering a channel is piecewise constant (exact slices of what arrived); its
//!   solution is evaluated exactly and averaged onto [`BINS`] equal bins at the channel's end:
//!   for Fo ≥ [`IMAGES_BELOW`] by the cosine series (Crank, *The Mathematics of Diffusion*, 2nd
//!   ed. 1975, §4.3, no-flux faces), summed until the next term is below 1e-17 of the jump; for
//!   smaller Fo by the method of images (Crank 1975, §2.2, eq. 2.15, reflected at both walls),
//!   whose bin averages have the closed form ∫ erfc = ierfc (Crank 1975, §2.6 and Appendix).
//!   Both are exact to rounding; the only approximation is that a channel hands on its outlet
//!   profile as bin averages (resolution w/[`BINS`]).
//!
//! **Why bins.** Slicing at a split and placing streams side by side are exact on a piecewise
//! constant profile with free breakpoints, and they conserve the solute exactly (every slice
//! carries Q_slice·mean = Q_total·∫_slice c dξ). A truncated cosine series would ring at the
//! steps where streams meet and would need a re-expansion at every junction.
//!
//! **Assumptions.** Plug flow across the width (the lateral velocity profile is not resolved),
//! no Taylor dispersion along the channel, no diffusion across the depth (the profile is
//! uniform in depth), residence time = volume/flow, no mixing at the junction itself. The mean
//! concentrations (and so the mass balance) do not depend on these.
//!
//! **Mixing index** of a channel: 1 − σ/σ₀ at its end, σ the standard deviation of its
//! [`BINS`] bin averages, σ₀ = √((c̄ − c_lo)(c_hi − c̄)) the largest σ a profile of the same
//! mean c̄ can have between the smallest and largest concentration that enters the chip (the
//! streams fully segregated); 1 where σ₀ = 0. For two streams meeting once this is the mixed
//! fraction of [`super::mixed_fraction`] measured on the bins.
//!
//! **Recirculation.** The lateral model follows the flow downstream once; a flow field with a
//! recirculating loop has no first channel to start from, so [`super::solve_with`] falls back
//! to the well-mixed model there and says so ([`super::SoluteNote::LateralRecirculates`]).

use super::FlowGraph;
use crate::network::{ChannelId, Network, NodeId, Port};
use std::f64::consts::PI;

/// Bins a channel's outlet profile is averaged onto.
pub const BINS: usize = 100;

/// Below this Fourier number the bins are evaluated by the method of images, above it by the
/// cosine series (either is exact; each needs few terms on its side).
pub const IMAGES_BELOW: f64 = 1e-3;

/// A piecewise constant profile across the width: `values[i]` on `edges[i]..edges[i + 1]`,
/// `edges[0] = 0`, last edge 1.
#[derive(Clone, Debug, PartialEq)]
pub struct Profile {
    pub edges: Vec<f64>,
    pub values: Vec<f64>,
}

impl Profile {
    pub fn uniform(c: f64) -> Profile {
        Profile {
            edges: vec![0.0, 1.0],
            values: vec![c],
        }
    }

    /// Streams side by side, in order, as (weight, profile): widths in proportion to weight.
    pub fn side_by_side(parts: &[(f64, &Profile)]) -> Profile {
        let total: f64 = parts.iter().map(|p| p.0).sum();
        let mut edges = vec![0.0];
        let mut values = Vec::new();
        let mut x0 = 0.0;
        for (k, (w, p)) in parts.iter().enumerate() {
            let width = w / total;
            let last_part = k + 1 == parts.len();
            for (i, &v) in p.values.iter().enumerate() {
                let end = if last_part && i + 1 == p.values.len() {
                    1.0
                } else {
                    (x0 + width * p.edges[i + 1]).min(1.0)
                };
                push_piece(&mut edges, &mut values, end, v);
            }
            x0 += width;
        }
        Profile { edges, values }
    }

    /// The part between `a` and `b` (0 ≤ a < b ≤ 1), stretched to the full width.
    pub fn slice(&self, a: f64, b: f64) -> Profile {
        let mut edges = vec![0.0];
        let mut values = Vec::new();
        let span = b - a;
        for (i, &v) in self.values.iter().enumerate() {
            let (lo, hi) = (self.edges[i].max(a), self.edges[i + 1].min(b));
            if hi <= lo {
                continue;
            }
            let end = if hi >= b {
                1.0
            } else {
                ((hi - a) / span).min(1.0)
            };
            push_piece(&mut edges, &mut values, end, v);
        }
        if values.is_empty() {
            // A slice thinner than rounding: the value where it lies.
            let i = self
                .edges
                .partition_point(|&e| e <= a)
                .clamp(1, self.values.len());
            return Profile::uniform(self.values[i - 1]);
        }
        if let Some(e) = edges.last_mut() {
            *e = 1.0;
        }
        Profile { edges, values }
    }

    /// ∫₀¹ c dξ.
    pub fn mean(&self) -> f64 {
        self.values
            .iter()
            .zip(self.edges.windows(2))
            .map(|(v, e)| v * (e[1] - e[0]))
            .sum()
    }

    /// Every value times `f`.
    fn scaled(mut self, f: f64) -> Profile {
        self.values.iter_mut().for_each(|v| *v *= f);
        self
    }

    /// Exact averages over `n` equal bins.
    pub fn bin_averages(&self, n: usize) -> Vec<f64> {
        let mut out = vec![0.0; n];
        for (i, &v) in self.values.iter().enumerate() {
            let (a, b) = (self.edges[i] * n as f64, self.edges[i + 1] * n as f64);
            let first = (a.floor() as usize).min(n - 1);
            let last = ((b.ceil() as usize).max(1) - 1).min(n - 1);
            for (j, o) in out.iter_mut().enumerate().take(last + 1).skip(first) {
                let overlap = b.min(j as f64 + 1.0) - a.max(j as f64);
                if overlap > 0.0 {
                    *o += v * overlap;
                }
            }
        }
        out
    }

    /// The profile after diffusing across the width for Fourier number `fo` (no-flux walls),
    /// averaged exactly onto `n` equal bins (module docs).
    pub fn diffused(&self, fo: f64, n: usize) -> Vec<f64> {
        let mean = self.mean();
        let mut bins = if fo.is_nan() || fo <= 0.0 {
            self.bin_averages(n)
        } else if fo < IMAGES_BELOW {
            self.by_images(fo, n)
        } else {
            self.by_series(fo, n)
        };
        // The exact solution keeps the mean; restore what rounding of the sums moved.
        let drift = mean - bins.iter().sum::<f64>() / n as f64;
        bins.iter_mut().for_each(|b| *b += drift);
        bins
    }

    /// Cosine series: c̄_j = c̄ + Σ A_n e^{−n²π²Fo} ∫_bin cos(nπξ)/Δξ,
    /// A_n = 2 Σ_pieces v (sin nπb − sin nπa)/(nπ) (Crank 1975, §4.3).
    fn by_series(&self, fo: f64, n: usize) -> Vec<f64> {
        let mean = self.mean();
        let jump = self
            .values
            .iter()
            .fold(0.0f64, |m, v| m.max((v - mean).abs()));
        let mut bins = vec![mean; n];
        if jump == 0.0 {
            return bins;
        }
        // Terms until e^{−n²π²Fo} < 1e-17 (the coefficients are at most 4·jump/(nπ)).
        let terms = ((17.0 * std::f64::consts::LN_10) / (PI * PI * fo))
            .sqrt()
            .ceil()
            .max(1.0) as usize;
        let dx = 1.0 / n as f64;
        let mut edge_sin = vec![0.0; n + 1];
        for m in 1..=terms {
            let k = m as f64;
            let a: f64 = self
                .values
                .iter()
                .zip(self.edges.windows(2))
                .map(|(v, e)| (v - mean) * (sin_pi(k * e[1]) - sin_pi(k * e[0])))
                .sum::<f64>()
                * 2.0
                / (k * PI);
            let decay = a * (-k * k * PI * PI * fo).exp();
            if decay == 0.0 {
                continue;
            }
            for (j, s) in edge_sin.iter_mut().enumerate() {
                *s = sin_pi(k * j as f64 * dx);
            }
            for (j, b) in bins.iter_mut().enumerate() {
                *b += decay * (edge_sin[j + 1] - edge_sin[j]) / (k * PI * dx);
            }
        }
        bins
    }

    /// Method of images: each step at a (jump Δ) is the box (a, 2 − a) of the even periodic
    /// extension (period 2); a diffused step's bin average is the step's own plus
    /// (s/2)·[ierfc(|ξ − a|/s)] between the bin's edges, s = 2√Fo (Crank 1975, §2.2, eq. 2.15
    /// integrated). For Fo < 1e-3 only the images at a, 2 − a and −a reach the walls
    /// (the next are a distance 1 away, where ierfc(1/s) < 1e-100).
    fn by_images(&self, fo: f64, n: usize) -> Vec<f64> {
        let mut bins = self.bin_averages(n);
        let s = 2.0 * fo.sqrt();
        let dx = 1.0 / n as f64;
        let reach = 7.0 * s;
        let mut g = vec![0.0; n + 1];
        for (i, w) in self.values.windows(2).enumerate() {
            let jump = w[1] - w[0];
            if jump == 0.0 {
                continue;
            }
            let a = self.edges[i + 1];
            for (sign, at) in [(1.0, a), (-1.0, 2.0 - a), (-1.0, -a)] {
                let lo = (((at - reach) / dx).floor().max(0.0)) as usize;
                let hi = ((((at + reach) / dx).ceil()).max(0.0) as usize).min(n);
                for (j, gj) in g.iter_mut().enumerate().take(hi + 1).skip(lo) {
                    let x = (j as f64 * dx - at).abs() / s;
                    *gj += sign * jump * 0.5 * s * ierfc(x);
                }
            }
        }
        for (j, b) in bins.iter_mut().enumerate() {
            *b += (g[j + 1] - g[j]) / dx;
        }
        bins
    }
}

fn push_piece(edges: &mut Vec<f64>, values: &mut Vec<f64>, end: f64, v: f64) {
    let start = *edges.last().unwrap_or(&0.0);
    if end <= start {
        return;
    }
    if values.last() == Some(&v) {
        if let Some(e) = edges.last_mut() {
            *e = end;
        }
    } else {
        edges.push(end);
        values.push(v);
    }
}

/// sin(πx), exactly 0 at integers.
fn sin_pi(x: f64) -> f64 {
    let r = x - 2.0 * (0.5 * x).round();
    if r > 0.5 {
        (PI * (1.0 - r)).sin()
    } else if r < -0.5 {
        -(PI * (1.0 + r)).sin()
    } else {
        (PI * r).sin()
    }
}

/// erfc(x) for x ≥ 0 to about 1e-16 absolute: the series erf = (2/√π)·x·e^{−x²}·Σ (2x²)ⁿ/(2n+1)!!
/// below 2.5 (Abramowitz & Stegun 1964, 7.1.6), the continued fraction above
/// (Abramowitz & Stegun 1964, 7.1.14).
pub fn erfc(x: f64) -> f64 {
    if x < 2.5 {
        1.0 - erf_series(x)
    } else {
        let (f, _) = erfc_fraction(x);
        (-x * x).exp() / (PI.sqrt() * f)
    }
}

fn erf_series(x: f64) -> f64 {
    let t = 2.0 * x * x;
    let (mut term, mut sum) = (1.0, 1.0);
    let mut k = 1.0;
    while term > 1e-17 * sum {
        term *= t / (2.0 * k + 1.0);
        sum += term;
        k += 1.0;
    }
    2.0 / PI.sqrt() * x * (-x * x).exp() * sum
}

/// x + (1/2)/(x + 1/(x + (3/2)/(x + …))), evaluated from 80 levels down: (value, value − x).
fn erfc_fraction(x: f64) -> (f64, f64) {
    let mut f = x;
    for k in (2..=80).rev() {
        f = x + 0.5 * k as f64 / f;
    }
    let tail = 0.5 / f;
    (x + tail, tail)
}

/// ierfc(x) = ∫ₓ^∞ erfc = e^{−x²}/√π − x·erfc(x), x ≥ 0 (Crank 1975, Appendix, eq. 2.9 family);
/// above 2.5 from the continued fraction without cancellation.
pub fn ierfc(x: f64) -> f64 {
    if x > 27.0 {
        0.0
    } else if x < 2.5 {
        (-x * x).exp() / PI.sqrt() - x * erfc(x)
    } else {
        let (f, tail) = erfc_fraction(x);
        (-x * x).exp() / PI.sqrt() * tail / f
    }
}

/// Lateral figures of one channel at its end.
#[derive(Clone, Debug, PartialEq)]
pub struct Spread {
    pub min: f64,
    pub max: f64,
    /// 1 − σ/σ₀ (module docs).
    pub mixing_index: f64,
    /// The [`BINS`] bin averages at the channel's end, from its left wall looking downstream.
    pub profile: Vec<f64>,
}

/// The lateral model's per-channel figures and what leaves the chip.
#[derive(Clone, Debug, PartialEq)]
pub struct LateralField {
    /// Per channel; `None` without flow.
    pub channels: Vec<Option<Spread>>,
    /// Per node: concentration of the flow leaving the chip there (`None` where none leaves).
    pub leaving: Vec<Option<f64>>,
}

/// A stream at a junction.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Stream {
    /// Fluid entering or leaving the chip at the node.
    Outside(f64),
    /// A channel with |Q|.
    Channel(ChannelId, f64),
}

impl Stream {
    fn flow(&self) -> f64 {
        match *self {
            Stream::Outside(q) | Stream::Channel(_, q) => q,
        }
    }
}

/// The drawing, as plain positions [m]: per node an optional position, per channel the
/// intermediate points of its path (both may be empty: not given).
#[derive(Clone, Copy, Debug, Default)]
pub struct Layout<'a> {
    pub node_at: &'a [Option<[f64; 2]>],
    pub channel_path: &'a [Vec<[f64; 2]>],
}

/// The order of the streams at every node (the same for every species).
pub(super) struct Junctions {
    ins: Vec<Vec<Stream>>,
    outs: Vec<Vec<Stream>>,
    /// Nodes that needed an order the drawing did not give (file order used).
    pub file_order: Vec<NodeId>,
}

/// Direction (angle) in which channel `c` leaves `node` on the drawing.
fn angle(network: &Network, layout: &Layout<'_>, node: usize, c: ChannelId) -> Option<f64> {
    let here = (*layout.node_at.get(node)?)?;
    let ch = &network.channels[c];
    let path = layout.channel_path.get(c.0).map_or(&[][..], |p| &p[..]);
    let toward = if ch.from.0 == node {
        match path.first() {
            Some(p) => *p,
            None => (*layout.node_at.get(ch.to.0)?)?,
        }
    } else {
        match path.last() {
            Some(p) => *p,
            None => (*layout.node_at.get(ch.from.0)?)?,
        }
    };
    let (dx, dy) = (toward[0] - here[0], toward[1] - here[1]);
    (dx != 0.0 || dy != 0.0).then(|| dy.atan2(dx))
}

impl Junctions {
    pub(super) fn new(
        network: &Network,
        flows: &[f64],
        into_chip: &[f64],
        layout: &Layout<'_>,
    ) -> Self {
        let n = network.nodes.len();
        let mut ins = Vec::with_capacity(n);
        let mut outs = Vec::with_capacity(n);
        let mut file_order = Vec::new();
        for (node, &into) in into_chip.iter().enumerate().take(n) {
            // (stream, incoming?) of the channels, file order.
            let mut around: Vec<(ChannelId, bool, f64)> = network
                .incident(NodeId(node))
                .filter(|(c, _)| network.channels[*c].from != network.channels[*c].to)
                .filter_map(|(c, _)| {
                    let q = flows[c.0];
                    let forward = network.channels[c].from.0 == node;
                    match q {
                        q if q > 0.0 => Some((c, !forward, q)),
                        q if q < 0.0 => Some((c, forward, -q)),
                        _ => None,
                    }
                })
                .collect();
            around.sort_unstable_by_key(|a| a.0 .0);
            around.dedup_by_key(|a| a.0 .0);
            // Only ports let fluid in or out (a junction's net inflow is a rounding residual).
            let (external_in, external_out) = match network.nodes[NodeId(node)].port {
                Port::Junction => (0.0, 0.0),
                _ => (into.max(0.0), (-into).max(0.0)),
            };
            let n_in = around.iter().filter(|a| a.1).count() + usize::from(external_in > 0.0);
            let n_out = around.iter().filter(|a| !a.1).count() + usize::from(external_out > 0.0);
            let needs_order = n_in >= 2 || n_out >= 2;
            let mut ordered = around.clone();
            if needs_order {
                let angles: Option<Vec<f64>> = around
                    .iter()
                    .map(|a| angle(network, layout, node, a.0))
                    .collect();
                match angles {
                    Some(angles) => {
                        let mut keyed: Vec<(f64, (ChannelId, bool, f64))> =
                            angles.into_iter().zip(around.iter().copied()).collect();
                        keyed.sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1 .0 .0.cmp(&y.1 .0 .0)));
                        let seq: Vec<(ChannelId, bool, f64)> =
                            keyed.into_iter().map(|k| k.1).collect();
                        // Start at the first incoming channel that follows an outgoing one
                        // anticlockwise.
                        let m = seq.len();
                        let start = (0..m)
                            .find(|&k| seq[k].1 && !seq[(k + m - 1) % m].1)
                            .unwrap_or(0);
                        ordered = (0..m).map(|k| seq[(start + k) % m]).collect();
                        // Outgoing ones clockwise from the incoming: reverse.
                        let (i, mut o): (Vec<_>, Vec<_>) = ordered.iter().partition(|a| a.1);
                        o.reverse();
                        ordered = i.into_iter().chain(o).collect();
                    }
                    None => file_order.push(NodeId(node)),
                }
            }
            let mut node_ins = Vec::new();
            if external_in > 0.0 {
                node_ins.push(Stream::Outside(external_in));
            }
            node_ins.extend(
                ordered
                    .iter()
                    .filter(|a| a.1)
                    .map(|a| Stream::Channel(a.0, a.2)),
            );
            let mut node_outs: Vec<Stream> = ordered
                .iter()
                .filter(|a| !a.1)
                .map(|a| Stream::Channel(a.0, a.2))
                .collect();
            if external_out > 0.0 {
                node_outs.push(Stream::Outside(external_out));
            }
            ins.push(node_ins);
            outs.push(node_outs);
        }
        Junctions {
            ins,
            outs,
            file_order,
        }
    }
}

/// Per channel: Σ t/w² [s/m²] (Fo = D times it).
pub(super) fn geometric_fourier(network: &Network, flows: &[f64]) -> Vec<f64> {
    let mut widths = vec![None; network.sections.len()];
    network
        .channels
        .iter()
        .zip(flows)
        .map(|(c, &q)| {
            let s = &network.sections[c.section];
            let w: f64 = *widths[c.section.0].get_or_insert_with(|| s.shape.overall_width());
            if q == 0.0 {
                0.0
            } else {
                s.figures.area * c.length.si() / q.abs() / (w * w)
            }
        })
        .collect()
}

/// One species through the acyclic flow graph `g` (node means, channel means, lateral
/// figures). `source[i]` is the concentration entering at node i.
pub(super) fn sweep(
    g: &FlowGraph,
    j: &Junctions,
    t_over_w2: &[f64],
    diffusivity: f64,
    source: &[f64],
) -> (Vec<Option<f64>>, Vec<Option<f64>>, LateralField) {
    let n = g.external.len();
    let channels = t_over_w2.len();
    let mut node_c = vec![None; n];
    let mut channel_c = vec![None; channels];
    let mut arriving: Vec<Option<Profile>> = vec![None; channels];
    let mut spread: Vec<Option<Spread>> = vec![None; channels];
    let mut leaving = vec![None; n];
    // Extremes of what enters the chip (σ₀ of the mixing index).
    let entering = (0..n).filter(|&i| g.external(i) > 0.0).map(|i| source[i]);
    let lo = entering.clone().fold(f64::INFINITY, f64::min);
    let hi = entering.fold(f64::NEG_INFINITY, f64::max);
    for &node in &g.parts {
        let mut parts: Vec<(f64, &Profile)> = Vec::new();
        let mut mass = 0.0;
        let mut q_in = 0.0;
        let outside = Profile::uniform(source[node]);
        // A channel from a node nothing reaches (flows at rounding level) carries nothing,
        // as in the well-mixed balance.
        let nothing = Profile::uniform(0.0);
        // Each channel's profile is handed on once: take it (memory stays O(front)).
        let taken: Vec<Option<Profile>> = j.ins[node]
            .iter()
            .map(|s| match *s {
                Stream::Outside(_) => None,
                Stream::Channel(c, _) => arriving[c.0].take(),
            })
            .collect();
        for (s, held) in j.ins[node].iter().zip(&taken) {
            let p = match *s {
                Stream::Outside(_) => &outside,
                Stream::Channel(..) => held.as_ref().unwrap_or(&nothing),
            };
            parts.push((s.flow(), p));
            mass += s.flow() * p.mean();
            q_in += s.flow();
        }
        if parts.is_empty() || q_in.is_nan() || q_in <= 0.0 {
            continue;
        }
        let carrier = g.carrier(node);
        // Scale so that the flows leaving carry exactly what arrived (as in the well-mixed
        // balance; the factor differs from 1 by the flows' rounding).
        let combined = Profile::side_by_side(&parts).scaled(q_in / carrier);
        node_c[node] = Some(mass / carrier);
        let q_out: f64 = j.outs[node].iter().map(Stream::flow).sum();
        let mut x = 0.0;
        let count = j.outs[node].len();
        for (k, s) in j.outs[node].iter().enumerate() {
            let width = s.flow() / q_out;
            let end = if k + 1 == count {
                1.0
            } else {
                (x + width).min(1.0)
            };
            let slice = combined.slice(x, end.max(x + f64::MIN_POSITIVE));
            let mean = slice.mean();
            x = end;
            match *s {
                Stream::Outside(_) => leaving[node] = Some(mean),
                Stream::Channel(c, _) => {
                    channel_c[c.0] = Some(mean);
                    let bins = slice.diffused(diffusivity * t_over_w2[c.0], BINS);
                    let (min, max) = bins
                        .iter()
                        .fold((f64::INFINITY, f64::NEG_INFINITY), |m, &b| {
                            (m.0.min(b), m.1.max(b))
                        });
                    let var = bins.iter().map(|b| (b - mean).powi(2)).sum::<f64>() / BINS as f64;
                    let var0 = (mean - lo) * (hi - mean);
                    let mixing_index = if var0 > 1e-24 * hi.abs().max(lo.abs()).powi(2) {
                        (1.0 - (var / var0).sqrt()).clamp(0.0, 1.0)
                    } else {
                        1.0
                    };
                    arriving[c.0] = Some(Profile {
                        edges: (0..=BINS).map(|b| b as f64 / BINS as f64).collect(),
                        values: bins.clone(),
                    });
                    spread[c.0] = Some(Spread {
                        min,
                        max,
                        mixing_index,
                        profile: bins,
                    });
                }
            }
        }
    }
    (
        node_c,
        channel_c,
        LateralField {
            channels: spread,
            leaving,
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The two exact evaluations agree where both apply (Crank 1975: the image and the
    /// cosine-series solutions are the same function).
    #[test]
    fn images_and_series_agree() {
        let p = Profile {
            edges: vec![0.0, 0.13, 0.5, 0.77, 1.0],
            values: vec![1.0, 0.2, 3.0, 0.0],
        };
        for fo in [2e-4, 9e-4, 3e-3] {
            let a = p.by_images(fo, BINS);
            let b = p.by_series(fo, BINS);
            for (x, y) in a.iter().zip(&b) {
                assert!((x - y).abs() < 1e-12, "Fo {fo}: {x} {y}");
            }
        }
        let u = Profile::uniform(0.7).diffused(0.01, BINS);
        assert!(u.iter().all(|&x| (x - 0.7).abs() < 1e-14), "{u:?}");
    }
}

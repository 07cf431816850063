//! Solutes carried by the flow: the well-mixed model and the check of its assumption.
//!
//! **Well-mixed model.** A solute is conserved along a channel, and at every node the streams
//! that flow in mix completely (mass balance):
//!
//! ```text
//! (Σ_out Q) · c_i  −  Σ_in Q_k · c_from(k)  =  Q_ext · s_i
//! ```
//!
//! where `Σ_in` runs over the channels carrying flow *into* node i, `Σ_out` over everything
//! leaving it (channels, and the chip at an outlet), `Q_ext ≥ 0` is the flow entering the chip
//! at i (a port letting fluid in) and `s_i` its concentration. With balanced flows Σ_out Q =
//! Σ_in Q + Q_ext, the brief form (Σ_in Q)·c_i = …; writing the outflow (the conservative
//! form of finite volumes) makes the solute balance telescope exactly over the network even
//! where the flows balance only to rounding (to 1e-9 at worst, see `kirchhoff::flows`): what
//! enters the chip leaves it, to rounding of the sums. One such
//! sparse linear system per species. In a network of resistances every flow runs from higher to
//! lower pressure, so the directed flow graph has no cycle and the system is triangular: it is
//! solved by a sweep in topological order. Flow fields with recirculation (a directed cycle) are
//! solved too: the strongly connected parts are found (Tarjan) and each is solved by a sparse LU
//! factorisation (faer), in topological order of the parts.
//!
//! **Stagnant places.** A node that no flow enters (a dead end), and a channel without flow,
//! has no well-mixed concentration: the model reports none (`None`; `null` in JSON, `–` in
//! tables). Such channels carry no solute; in a real chip diffusion slowly fills them.
//!
//! The module sees flows and the graph only (no chip, no file format).

pub mod lateral;
pub mod mixing;

use crate::network::{ChannelId, Network, NodeId};
use faer::sparse::{SparseColMat, Triplet};
use faer::Mat;

pub use lateral::{LateralField, Layout, Spread};
pub use mixing::{mixed_fraction, Unmixed, MIXED_ENOUGH};

/// Largest relative residual of a node balance accepted after a solve (as for the flows).
pub const BALANCE_LIMIT: f64 = 1e-9;

/// Why concentrations could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SoluteError {
    #[error("the solute balance of a recirculating part of the network could not be solved ({0})")]
    Factorisation(String),
    /// `node` is the node's name in quotes (its index in the flow graph when no network is
    /// known).
    #[error("the solute balance at node {node} is not met after the solve (relative residual {residual:.1e}); results withheld")]
    Unbalanced { node: String, residual: f64 },
}

/// How the well-mixed balances were solved.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// The flow graph is acyclic: one sweep in topological order.
    Sweep,
    /// The flow graph has recirculating parts: sparse LU on each of them.
    SparseLu,
}

/// The flow graph seen by the solute balance: per node, the channels carrying flow in, and
/// the flow entering from outside the chip; the strongly connected parts in topological order.
#[derive(Clone, Debug)]
pub struct FlowGraph {
    /// CSR: inflows of node i are `inflow[start[i]..start[i + 1]]` as (upstream node, Q > 0).
    start: Vec<usize>,
    inflow: Vec<(usize, f64)>,
    /// Flow entering the chip at each node [m³/s] (0 where none enters).
    external: Vec<f64>,
    /// Everything leaving each node: its channels' outflows and the flow leaving the chip.
    outflow: Vec<f64>,
    /// Nodes of the strongly connected parts, part after part, upstream parts first.
    parts: Vec<usize>,
    part_start: Vec<usize>,
}

impl FlowGraph {
    /// From directed edges `(from, to, Q)` (any sign: a negative Q flows from `to` to
    /// `from`; zero carries nothing) and the flow into the chip at each node (negative where
    /// fluid leaves). Self-loops carry nothing into their node and are left out.
    pub fn new(nodes: usize, edges: &[(usize, usize, f64)], into_chip: &[f64]) -> FlowGraph {
        let directed = edges.iter().filter_map(|&(a, b, q)| match q {
            _ if a == b => None,
            q if q > 0.0 => Some((a, b, q)),
            q if q < 0.0 => Some((b, a, -q)),
            _ => None,
        });
        let mut count = vec![0usize; nodes + 1];
        let mut outflow: Vec<f64> = into_chip.iter().map(|&q| (-q).max(0.0)).collect();
        for (a, b, q) in directed.clone() {
            count[b + 1] += 1;
            outflow[a] += q;
        }
        for i in 0..nodes {
            count[i + 1] += count[i];
        }
        let start = count.clone();
        let mut fill = count;
        let mut inflow = vec![(0usize, 0.0f64); start[nodes]];
        let mut g = petgraph::Graph::<(), ()>::with_capacity(nodes, inflow.len());
        for _ in 0..nodes {
            g.add_node(());
        }
        for (a, b, q) in directed {
            inflow[fill[b]] = (a, q);
            fill[b] += 1;
            g.add_edge(
                petgraph::graph::NodeIndex::new(a),
                petgraph::graph::NodeIndex::new(b),
                (),
            );
        }
        // Tarjan gives the parts in reverse topological order.
        let sccs = petgraph::algo::tarjan_scc(&g);
        let mut parts = Vec::with_capacity(nodes);
        let mut part_start = Vec::with_capacity(sccs.len() + 1);
        for scc in sccs.iter().rev() {
            part_start.push(parts.len());
            parts.extend(scc.iter().map(|n| n.index()));
        }
        part_start.push(parts.len());
        FlowGraph {
            start,
            inflow,
            external: into_chip.iter().map(|&q| q.max(0.0)).collect(),
            outflow,
            parts,
            part_start,
        }
    }

    /// The flow graph of a solved network: channel flows and the ports' net inflows (the
    /// residual at junctions is not an inflow).
    pub fn of_network(network: &Network, flows: &[f64], into_chip: &[f64]) -> FlowGraph {
        let edges: Vec<(usize, usize, f64)> = network
            .channels
            .iter()
            .zip(flows)
            .map(|(c, &q)| (c.from.0, c.to.0, q))
            .collect();
        // Only ports let fluid in: a junction's net inflow is a rounding residual.
        let into: Vec<f64> = network
            .nodes
            .iter()
            .zip(into_chip)
            .map(|(n, &q)| match n.port {
                crate::network::Port::Junction => 0.0,
                _ => q,
            })
            .collect();
        FlowGraph::new(network.nodes.len(), &edges, &into)
    }

    /// (upstream node, Q) of the channels flowing into `node`.
    pub fn inflows(&self, node: usize) -> &[(usize, f64)] {
        &self.inflow[self.start[node]..self.start[node + 1]]
    }

    /// Flow entering the chip at `node` (0 where none enters).
    pub fn external(&self, node: usize) -> f64 {
        self.external[node]
    }

    /// Total flow into `node`: channels and outside.
    pub fn total_inflow(&self, node: usize) -> f64 {
        self.external[node] + self.inflows(node).iter().map(|x| x.1).sum::<f64>()
    }

    /// What node i's concentration is carried away by: its total outflow, or its inflow
    /// where nothing measurable leaves (a rounding residual).
    fn carrier(&self, node: usize) -> f64 {
        match self.outflow[node] {
            q if q > 0.0 => q,
            _ => self.total_inflow(node),
        }
    }

    /// Whether the flow recirculates somewhere (a part with more than one node).
    pub fn has_cycles(&self) -> bool {
        self.part_start.windows(2).any(|w| w[1] - w[0] > 1)
    }

    fn method(&self) -> Method {
        if self.has_cycles() {
            Method::SparseLu
        } else {
            Method::Sweep
        }
    }
}

/// Well-mixed concentrations at every node for one species; `source[i]` is the
/// concentration of the fluid entering the chip at node i. `None` where no flow enters.
pub fn well_mixed(
    g: &FlowGraph,
    source: &[f64],
) -> Result<(Vec<Option<f64>>, Method), SoluteError> {
    let fed: Vec<f64> = (0..g.external.len())
        .map(|i| g.external[i] * source[i])
        .collect();
    let c = balances(g, &fed)?;
    check_balances(g, source, &c)?;
    Ok((c, g.method()))
}

/// Solve carrier_i·c_i − Σ_in Q_k·c_from(k) = f_i on the flow graph (the well-mixed balances
/// with the right-hand side `f`): a sweep over single-node parts, sparse LU on recirculating
/// ones. `None` where no flow enters.
fn balances(g: &FlowGraph, f: &[f64]) -> Result<Vec<Option<f64>>, SoluteError> {
    let n = g.external.len();
    let mut c: Vec<Option<f64>> = vec![None; n];
    for w in g.part_start.windows(2) {
        let part = &g.parts[w[0]..w[1]];
        if let [i] = *part {
            let total = g.carrier(i);
            if g.total_inflow(i) > 0.0 && total > 0.0 {
                let carried: f64 = g
                    .inflows(i)
                    .iter()
                    .map(|&(u, q)| q * c[u].unwrap_or(0.0))
                    .sum();
                c[i] = Some((f[i] + carried) / total);
            }
        } else {
            solve_part(g, part, f, &mut c)?;
        }
    }
    Ok(c)
}

/// Derivatives of the well-mixed concentrations of a solved network along a change of its
/// flows: `dflows` per channel and `dinto` per node (the derivatives of `flows` and
/// `into_chip`, same signs), at the solution `c` of [`well_mixed`] on `g =
/// FlowGraph::of_network(network, flows, into_chip)` with the inlet concentrations `source`.
///
/// Exact (analytic) forward derivative of the balances A(Q)·c = b(Q): A·dc = db − dA·c, with
/// the same matrix A (the same sweep or LU) and the right-hand side
/// dQ_ext,i·s_i + Σ_in dQ_k·c_from(k) − d(carrier_i)·c_i. It holds while no flow changes
/// direction: channels without flow (and the nodes without concentration) stay as they are
/// (`None` where `c` is `None`).
#[allow(clippy::too_many_arguments)]
pub fn well_mixed_tangent(
    network: &Network,
    flows: &[f64],
    into_chip: &[f64],
    g: &FlowGraph,
    c: &[Option<f64>],
    source: &[f64],
    dflows: &[f64],
    dinto: &[f64],
) -> Result<Vec<Option<f64>>, SoluteError> {
    let n = network.nodes.len();
    let mut f = vec![0.0; n];
    let mut dout = vec![0.0; n];
    let mut din = vec![0.0; n];
    for ((ch, &q), &dq) in network.channels.iter().zip(flows).zip(dflows) {
        let (u, i, dq) = match q {
            _ if ch.from == ch.to => continue,
            q if q > 0.0 => (ch.from.0, ch.to.0, dq),
            q if q < 0.0 => (ch.to.0, ch.from.0, -dq),
            _ => continue,
        };
        f[i] += dq * c[u].unwrap_or(0.0);
        dout[u] += dq;
        din[i] += dq;
    }
    for (i, node) in network.nodes.iter().enumerate() {
        if matches!(node.port, crate::network::Port::Junction) {
            continue;
        }
        match into_chip[i] {
            q if q > 0.0 => {
                f[i] += dinto[i] * source[i];
                din[i] += dinto[i];
            }
            q if q < 0.0 => dout[i] -= dinto[i],
            _ => {}
        }
    }
    for i in 0..n {
        let dcarrier = if g.outflow[i] > 0.0 { dout[i] } else { din[i] };
        f[i] -= dcarrier * c[i].unwrap_or(0.0);
    }
    let dc = balances(g, &f)?;
    Ok(dc.into_iter().zip(c).map(|(d, ci)| ci.and(d)).collect())
}

/// Solve the balances of one recirculating part (inflows from upstream parts known).
fn solve_part(
    g: &FlowGraph,
    part: &[usize],
    f: &[f64],
    c: &mut [Option<f64>],
) -> Result<(), SoluteError> {
    let m = part.len();
    let local: rustc_hash::FxHashMap<usize, usize> =
        part.iter().enumerate().map(|(k, &i)| (i, k)).collect();
    let mut triplets = Vec::new();
    let mut rhs = Mat::<f64>::zeros(m, 1);
    let mut fed = 0.0;
    for (k, &i) in part.iter().enumerate() {
        triplets.push(Triplet::new(k, k, g.carrier(i)));
        rhs[(k, 0)] = f[i];
        fed += g.external[i];
        for &(u, q) in g.inflows(i) {
            match local.get(&u) {
                Some(&l) => triplets.push(Triplet::new(k, l, -q)),
                None => {
                    rhs[(k, 0)] += q * c[u].unwrap_or(0.0);
                    fed += q;
                }
            }
        }
    }
    if fed <= 0.0 {
        // A closed circulation fed by nothing: its concentration is whatever it held.
        return Ok(());
    }
    let a = SparseColMat::<usize, f64>::try_new_from_triplets(m, m, &triplets)
        .map_err(|e| SoluteError::Factorisation(format!("{e:?}")))?;
    let lu = a
        .sp_lu()
        .map_err(|e| SoluteError::Factorisation(format!("{e:?}")))?;
    use faer::linalg::solvers::Solve;
    lu.solve_in_place(rhs.as_mut());
    for (k, &i) in part.iter().enumerate() {
        c[i] = Some(rhs[(k, 0)]);
    }
    Ok(())
}

/// Every node balance met to [`BALANCE_LIMIT`], relative to the solute flows through the node.
fn check_balances(g: &FlowGraph, source: &[f64], c: &[Option<f64>]) -> Result<(), SoluteError> {
    for (i, ci) in c.iter().enumerate() {
        let Some(ci) = *ci else { continue };
        let out = g.carrier(i) * ci;
        let mut scale = out.abs() + (g.external[i] * source[i]).abs();
        let mut r = out - g.external[i] * source[i];
        for &(u, q) in g.inflows(i) {
            let x = q * c[u].unwrap_or(0.0);
            r -= x;
            scale += x.abs();
        }
        let residual = if scale > 0.0 { r.abs() / scale } else { 0.0 };
        if residual.is_nan() || residual > BALANCE_LIMIT {
            return Err(SoluteError::Unbalanced {
                node: format!("#{i}"),
                residual,
            });
        }
    }
    Ok(())
}

/// One species' inputs: its diffusion coefficient [m²/s] and, per node, the concentration of
/// the fluid entering the chip there (SI of the species' measure).
#[derive(Clone, Copy, Debug)]
pub struct Load<'a> {
    pub diffusivity: f64,
    pub source: &'a [f64],
}

/// Concentrations of one species.
#[derive(Clone, Debug, PartialEq)]
pub struct Field {
    /// Per node: what arrives, mixed (the flow-weighted mean); `None` where no flow enters
    /// (stagnant).
    pub nodes: Vec<Option<f64>>,
    /// Per channel: its mean concentration (well mixed: that of its upstream node; lateral:
    /// the mean of its slice); `None` without flow.
    pub channels: Vec<Option<f64>>,
    /// The lateral model's profiles (`None` in the well-mixed model).
    pub lateral: Option<LateralField>,
}

/// Which transport model to solve.
#[derive(Clone, Copy, Debug, Default)]
pub enum Model<'a> {
    /// Complete mixing at every junction (the default).
    #[default]
    WellMixed,
    /// Laminar co-flow with the lateral profile across each channel ([`lateral`]), ordered by
    /// the drawing.
    Lateral(Layout<'a>),
}

/// What the results rest on, beyond the model's stated assumptions (data; `report` words it).
#[derive(Clone, Debug, PartialEq)]
pub enum SoluteNote {
    /// The lateral model was asked for but the flow recirculates: well mixed instead.
    LateralRecirculates,
    /// The lateral model ordered the streams at these nodes as in the file: the drawing does
    /// not give every angle there.
    FileOrder(Vec<NodeId>),
}

/// The solutes of a solved chip: one field per species (in the order given), how they were
/// solved, and the channels where the well-mixed assumption fails before a split.
#[derive(Clone, Debug, PartialEq)]
pub struct Solutes {
    pub fields: Vec<Field>,
    pub method: Method,
    pub unmixed: Vec<Unmixed>,
    /// Whether the lateral model gave the fields.
    pub lateral: bool,
    pub notes: Vec<SoluteNote>,
}

/// Solve every species on the flows of a solved network (`flows` per channel, `into_chip`
/// per node), and check where the streams have not mixed before a split.
pub fn solve(
    network: &Network,
    flows: &[f64],
    into_chip: &[f64],
    loads: &[Load<'_>],
) -> Result<Solutes, SoluteError> {
    solve_with(network, flows, into_chip, loads, Model::WellMixed)
}

/// [`solve`] with a chosen model. The lateral model needs an acyclic flow graph; where the
/// flow recirculates it falls back to the well-mixed model with a note. The `not_mixed`
/// check is the well-mixed model's (where its assumption fails) in both.
pub fn solve_with(
    network: &Network,
    flows: &[f64],
    into_chip: &[f64],
    loads: &[Load<'_>],
    model: Model<'_>,
) -> Result<Solutes, SoluteError> {
    let g = FlowGraph::of_network(network, flows, into_chip);
    let mut fields = Vec::with_capacity(loads.len());
    for load in loads {
        let (nodes, _) = well_mixed(&g, load.source).map_err(|e| match e {
            SoluteError::Unbalanced { node, residual } => SoluteError::Unbalanced {
                node: node
                    .strip_prefix('#')
                    .and_then(|i| i.parse::<usize>().ok())
                    .and_then(|i| network.nodes.get(i))
                    .map_or(node.clone(), |n| format!("'{}'", n.name)),
                residual,
            },
            e => e,
        })?;
        let channels = network
            .channels
            .iter()
            .zip(flows)
            .map(|(ch, &q)| match q {
                q if q > 0.0 => nodes[ch.from.0],
                q if q < 0.0 => nodes[ch.to.0],
                _ => None,
            })
            .collect();
        fields.push(Field {
            nodes,
            channels,
            lateral: None,
        });
    }
    let unmixed = mixing::unmixed(network, flows, &g, loads, &fields);
    let mut notes = Vec::new();
    let mut lateral = false;
    if let Model::Lateral(layout) = model {
        if g.has_cycles() {
            notes.push(SoluteNote::LateralRecirculates);
        } else {
            let junctions = lateral::Junctions::new(network, flows, into_chip, &layout);
            let t_over_w2 = lateral::geometric_fourier(network, flows);
            for (field, load) in fields.iter_mut().zip(loads) {
                let (nodes, channels, profiles) =
                    lateral::sweep(&g, &junctions, &t_over_w2, load.diffusivity, load.source);
                *field = Field {
                    nodes,
                    channels,
                    lateral: Some(profiles),
                };
            }
            if !junctions.file_order.is_empty() {
                notes.push(SoluteNote::FileOrder(junctions.file_order));
            }
            lateral = true;
        }
    }
    Ok(Solutes {
        fields,
        method: g.method(),
        unmixed,
        lateral,
        notes,
    })
}

/// The channel a flow leaves `node` by: (channel, node downstream, |Q|), file order.
pub(crate) fn outflows(
    network: &Network,
    flows: &[f64],
    node: usize,
) -> Vec<(ChannelId, usize, f64)> {
    let mut out: Vec<(ChannelId, usize, f64)> = network
        .incident(crate::network::NodeId(node))
        .filter_map(|(c, other)| {
            let q = flows[c.0];
            let forward = network.channels[c].from.0 == node;
            match (forward, q) {
                (true, q) if q > 0.0 => Some((c, other.0, q)),
                (false, q) if q < 0.0 => Some((c, other.0, -q)),
                _ => None,
            }
        })
        .collect();
    out.sort_unstable_by_key(|o| o.0 .0);
    out
}

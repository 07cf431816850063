//! Steady flow through the network: Kirchhoff's flow balance at every node.
//!
//! Each channel k between nodes i and j carries Q_k = g_k·(p_i − p_j), with conductance
//! g_k = 1/R_k. At every node that is not pressure-controlled, the flows balance:
//!
//!   Σ_k g_k (p_i − p_j) = s_i     (s_i = the flow a pump injects at i, 0 at a junction)
//!
//! Pressure ports have known pressures; they move to the right-hand side. The unknowns are
//! the pressures of junctions and flow ports, and the matrix (the weighted graph Laplacian
//! restricted to them) is symmetric positive definite whenever every connected part touches
//! a pressure port — which [`crate::network::NetworkBuilder::build`] guarantees.
//!
//! Every solve goes through one checked path ([`Solver`] → [`Factor`]): iterative refinement
//! (at most [`MAX_REFINEMENTS`] steps) and a componentwise balance check against
//! [`RESIDUAL_LIMIT`]; [`solve`], [`solve_with`] and the design answers all use it.
//!
//! Sign convention: a channel's flow is positive from its `from` node to its `to` node; a
//! port's flow is positive into the chip.

mod eliminate;
pub mod flows;
mod session;

pub use session::{AdjointSolution, Factor, Solver};

use crate::network::{Network, Port};
use crate::solver::{SolverError, SymbolicCholesky, SymmetricPattern};

/// Largest relative node imbalance accepted before results are withheld.
pub const RESIDUAL_LIMIT: f64 = 1e-9;

/// Most iterative-refinement steps a checked solve takes before it gives up.
pub const MAX_REFINEMENTS: usize = 3;

/// Failure to produce a trustworthy flow solution.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SolveError {
    #[error(transparent)]
    Solver(#[from] SolverError),
    #[error(
        "the flow balance is not met to {limit:e} (worst node '{node}', relative imbalance {residual:e}); \
         results withheld. Channel resistances may span too many orders of magnitude for double precision"
    )]
    Residual {
        node: String,
        residual: f64,
        limit: f64,
    },
    #[error(
        "the adjoint system behind the sensitivities is not solved to {limit:e} (worst node '{node}', \
         componentwise relative residual {residual:e}); results withheld. Channel resistances may span \
         too many orders of magnitude for double precision"
    )]
    Adjoint {
        node: String,
        residual: f64,
        limit: f64,
    },
    #[error(
        "the flows through {count} channel(s) cannot be resolved in double precision: {listed}. \
         Their resistance is negligible beside the channels around them (their end pressures agree to \
         {digits} digits) and they close a loop or join two pressure ports. Merge their ends into one \
         node, or give them a realistic length and section"
    )]
    StiffChannels {
        count: usize,
        listed: String,
        digits: u32,
        channels: Vec<String>,
    },
    #[error(
        "channel '{channel}' has a resistance {ratio:.1e} times smaller than the channels around it, \
         beyond what double precision resolves: the flows at node '{node}' miss their balance by \
         {residual:.1e}. Merge the ends of '{channel}' into one node, or give it a realistic length \
         and section"
    )]
    NegligibleChannel {
        channel: String,
        node: String,
        ratio: f64,
        residual: f64,
    },
    #[error(
        "the conductance matrix cannot be factorised in double precision (pivot {pivot} of {n} not \
         positive); the likely cause is channel '{channel}', which conducts {ratio:.1e} times as much \
         as the channels around it, beyond what double precision resolves. {advice}"
    )]
    Unfactorisable {
        channel: String,
        ratio: f64,
        /// What to do: depends on whether the channel conducts far more or far less.
        advice: &'static str,
        pivot: usize,
        n: usize,
    },
    #[error(
        "the flows entering and leaving the chip miss their balance by {miss:.1e} of the largest port \
         flow, beyond what double precision resolves for this network; results withheld. The likely \
         cause is channel '{channel}', which conducts {ratio:.1e} times as much as the channels \
         around it. Bring the channels' resistances closer together (realistic lengths and sections)"
    )]
    PortBalance {
        miss: f64,
        channel: String,
        ratio: f64,
    },
    #[error(
        "the flows do not balance to {limit:e} at node '{node}' (net flow {residual:e} of the largest \
         flow through it); results withheld. Channel resistances around it may span too many orders \
         of magnitude for double precision"
    )]
    FlowBalance {
        node: String,
        residual: f64,
        limit: f64,
    },
    #[error(
        "the network's nodes, port kinds or channel ends differ from those the solver was analysed \
         for; a solver serves one topology"
    )]
    TopologyChanged,
    #[error("{what}: expected {expected} values, got {found}")]
    Mismatch {
        what: &'static str,
        expected: usize,
        found: usize,
    },
}

/// No unknown / no slot.
const NONE: usize = usize::MAX;

/// No off-diagonal slot (an end of the channel is a pressure port).
const NO_SLOT: u32 = u32::MAX;

/// The assembled structure of a network's Kirchhoff system: which node is which unknown,
/// the sparsity pattern, and where each channel's conductance goes. It depends on the
/// topology and on which nodes are pressure ports, not on the values, so sweeps over
/// channel sizes or drive settings reuse it (and its symbolic factorisation).
///
/// Built in O(nodes + channels) without a comparison sort
/// ([`SymmetricPattern::from_entries`]); every unknown's diagonal is the first entry of its
/// column.
#[derive(Debug)]
pub struct KirchhoffSystem {
    /// Per node: its unknown, or [`NONE`] at a known pressure.
    unknown_of: Vec<usize>,
    node_of: Vec<usize>,
    pattern: SymmetricPattern,
    /// Per channel: the slot of its off-diagonal entry in the matrix values, [`NO_SLOT`] when
    /// an end is a pressure port (its diagonal entries are the first of their columns). Slots
    /// fit 32 bits: a network has fewer than 2³¹ nodes and 2³¹ channels.
    off: Vec<u32>,
    /// Per channel: its (from, to) nodes, 8 bytes a channel. The passes over every channel
    /// after a solve (balance, flows, checks) read these rather than the network's channel
    /// records (72 bytes each, names included): on 10⁶ channels that is most of their cost.
    ends: Vec<[u32; 2]>,
    /// Per node: what it imposes (1 byte a node, for the same reason).
    role: Vec<Role>,
}

/// What a node imposes on the solve: its pressure (a pressure port), its injected flow (a
/// flow port) or nothing (a junction, whose flows balance).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Role {
    Pressure,
    Flow,
    Junction,
}

impl Role {
    fn of(port: &Port) -> Role {
        match port {
            Port::Pressure(_) => Role::Pressure,
            Port::Flow(_) => Role::Flow,
            Port::Junction => Role::Junction,
        }
    }

    /// Every node's role, in node order.
    fn of_nodes(network: &Network) -> Vec<Role> {
        network.nodes.iter().map(|n| Role::of(&n.port)).collect()
    }

    /// The node's flow balance is imposed (a junction or a flow port).
    pub(crate) fn imposed(self) -> bool {
        self != Role::Pressure
    }
}

impl KirchhoffSystem {
    /// Build the structure for `network`.
    pub fn new(network: &Network) -> Self {
        let role = Role::of_nodes(network);
        let fixed: Vec<bool> = role.iter().map(|&r| r == Role::Pressure).collect();
        Self::build(network, role, &fixed)
    }

    /// The structure with the nodes marked `fixed` as known pressures and every other node an
    /// unknown (time evolution frees the wells, whose pressure follows their level).
    pub fn with_fixed(network: &Network, fixed: &[bool]) -> Self {
        let role = Role::of_nodes(network);
        Self::build(network, role, fixed)
    }

    fn build(network: &Network, role: Vec<Role>, fixed: &[bool]) -> Self {
        let nodes = network.nodes.len();
        let mut unknown_of = vec![NONE; nodes];
        let mut node_of = Vec::with_capacity(nodes);
        for (i, &f) in fixed.iter().enumerate().take(nodes) {
            if !f {
                unknown_of[i] = node_of.len();
                node_of.push(i);
            }
        }
        // A node beyond `fixed` is an unknown, as before.
        for (i, u) in unknown_of.iter_mut().enumerate().skip(fixed.len()) {
            *u = node_of.len();
            node_of.push(i);
        }
        let n = node_of.len();
        let ends = network.channel_ends();
        let unknowns = |[a, b]: [u32; 2]| (unknown_of[a as usize], unknown_of[b as usize]);
        // Entries 0..n are the diagonals (so isolated unknowns still have one); then one
        // off-diagonal entry per channel joining two unknowns, in channel order.
        let joined: Vec<(usize, usize)> = ends
            .iter()
            .map(|&e| unknowns(e))
            .filter(|&(a, b)| a != NONE && b != NONE)
            .collect();
        let (pattern, slot_of) = SymmetricPattern::from_entries(n, n + joined.len(), |k| {
            if k < n {
                (k, k)
            } else {
                joined[k - n]
            }
        });
        drop(joined);
        let mut next_off = n;
        let off = ends
            .iter()
            .map(|&e| match unknowns(e) {
                (a, b) if a != NONE && b != NONE => {
                    next_off += 1;
                    slot_of[next_off - 1] as u32
                }
                _ => NO_SLOT,
            })
            .collect();
        KirchhoffSystem {
            unknown_of,
            node_of,
            pattern,
            off,
            ends,
            role,
        }
    }

    /// Exactly the pressure ports are known pressures (as [`KirchhoffSystem::new`] builds it).
    pub(crate) fn fixes_pressure_ports_only(&self) -> bool {
        self.role
            .iter()
            .zip(&self.unknown_of)
            .all(|(&r, &u)| (r == Role::Pressure) == (u == NONE))
    }

    /// Per channel, its (from, to) nodes.
    pub(crate) fn ends(&self) -> &[[u32; 2]] {
        &self.ends
    }

    /// Per node, what it imposes.
    pub(crate) fn roles(&self) -> &[Role] {
        &self.role
    }

    /// The channels on dead-end branches ([`Network::dead_end_channels`]), from the compact
    /// topology.
    pub(crate) fn dead_end_channels(&self) -> Vec<bool> {
        crate::network::dead_end_mask(self.role.len(), &self.ends, |i| {
            self.role[i] == Role::Junction
        })
    }

    /// Slot of the diagonal entry of unknown `u` in the matrix values.
    pub fn diagonal_slot(&self, u: usize) -> usize {
        self.pattern.column(u).0
    }

    /// The sparsity pattern (lower triangle).
    pub fn pattern(&self) -> &SymmetricPattern {
        &self.pattern
    }

    /// Number of unknown pressures.
    pub fn dim(&self) -> usize {
        self.pattern.dim()
    }

    /// Matrix values for channel conductances `g` [m³/(Pa·s)].
    pub fn matrix_values(&self, g: &[f64]) -> Vec<f64> {
        let mut values = vec![0.0; self.pattern.nnz()];
        for ((&[from, to], &off), &gk) in self.ends.iter().zip(&self.off).zip(g) {
            for node in [from, to] {
                let u = self.unknown_of[node as usize];
                if u != NONE {
                    values[self.diagonal_slot(u)] += gk;
                }
            }
            if off != NO_SLOT {
                values[off as usize] -= gk;
            }
        }
        values
    }

    /// Right-hand side: pump injections plus the pull of known port pressures.
    pub fn rhs(&self, network: &Network, g: &[f64]) -> Vec<f64> {
        self.rhs_for(network, g, &drive_values(network))
    }

    /// Right-hand side for other drive settings: `drives[i]` is the pressure of pressure
    /// port i or the injected flow of flow port i (ignored at junctions). The matrix does not
    /// depend on the drives, so one factorisation serves every setting.
    pub fn rhs_for(&self, network: &Network, g: &[f64], drives: &[f64]) -> Vec<f64> {
        debug_assert_eq!(network.nodes.len(), self.role.len());
        let mut b = vec![0.0; self.dim()];
        for ((&role, &u), d) in self.role.iter().zip(&self.unknown_of).zip(drives) {
            if role == Role::Flow && u != NONE {
                b[u] += d;
            }
        }
        for (&[from, to], &gk) in self.ends.iter().zip(g) {
            let (from, to) = (from as usize, to as usize);
            let a = self.unknown_of[from];
            let bb = self.unknown_of[to];
            if a != NONE && bb == NONE {
                b[a] += gk * drives[to];
            } else if a == NONE && bb != NONE {
                b[bb] += gk * drives[from];
            }
        }
        b
    }

    /// Expand the unknowns `x` into a pressure for every node.
    pub fn node_pressures(&self, network: &Network, x: &[f64]) -> Vec<f64> {
        self.node_pressures_for(x, &drive_values(network))
    }

    /// Expand the unknowns into node pressures, with port pressures from `drives`.
    pub fn node_pressures_for(&self, x: &[f64], drives: &[f64]) -> Vec<f64> {
        self.unknown_of
            .iter()
            .zip(drives)
            .map(|(&u, &d)| if u == NONE { d } else { x[u] })
            .collect()
    }

    /// The unknown index of a node (None for pressure ports).
    pub fn unknown(&self, node: usize) -> Option<usize> {
        Some(self.unknown_of[node]).filter(|&u| u != NONE)
    }

    /// The node of an unknown index (the inverse of [`KirchhoffSystem::unknown`]).
    pub fn node(&self, unknown: usize) -> usize {
        self.node_of[unknown]
    }

    /// Number of nodes the system was built for.
    pub fn nodes(&self) -> usize {
        self.unknown_of.len()
    }

    /// Number of channels the system was built for.
    pub fn channels(&self) -> usize {
        self.off.len()
    }
}

/// Each node's drive value: the piezometric pressure of a pressure port (its set pressure plus
/// ρ·g·z, or a well's gas pressure plus ρ·g·level: [`Network::imposed_head`]; the set pressure
/// itself on the datum), injected flow of a flow port, 0 at a junction (SI).
pub fn drive_values(network: &Network) -> Vec<f64> {
    network
        .nodes
        .iter()
        .enumerate()
        .map(|(i, n)| match n.port {
            Port::Pressure(p) => network
                .imposed_head(crate::network::NodeId(i))
                .unwrap_or(p.si()),
            Port::Flow(q) => q.si(),
            Port::Junction => 0.0,
        })
        .collect()
}

/// Channel flows Q_k = g_k·(p_from − p_to) [m³/s] for node pressures `p`.
pub fn channel_flows(network: &Network, g: &[f64], p: &[f64]) -> Vec<f64> {
    network
        .channels
        .iter()
        .zip(g)
        .map(|(c, gk)| gk * (p[c.from.0] - p[c.to.0]))
        .collect()
}

/// Channel conductances g = 1/R [m³/(Pa·s)].
pub fn conductances(network: &Network) -> Vec<f64> {
    (0..network.channels.len())
        .map(|k| 1.0 / network.resistance(crate::network::ChannelId(k)))
        .collect()
}

/// The steady flow state of a network for one set of drives, with the record of how the
/// checked solve ([`Factor::solve`]) got there.
#[derive(Clone, Debug, PartialEq)]
pub struct FlowSolution {
    /// Gauge pressure at every node [Pa].
    pub pressures: Vec<f64>,
    /// Flow in every channel [m³/s], positive from `from` to `to`.
    pub flows: Vec<f64>,
    /// Net flow each node delivers into the chip [m³/s]: the port flow at ports, the
    /// numerical imbalance (≈ 0) at junctions.
    pub node_net_inflow: Vec<f64>,
    /// Largest relative imbalance over the nodes whose balance is imposed: the final residual
    /// the solve stopped at (at most [`RESIDUAL_LIMIT`]).
    pub max_relative_residual: f64,
    /// Relative balance residual of every node (None at pressure ports, whose flow is free);
    /// see [`balance_residuals`].
    pub node_residuals: Vec<Option<f64>>,
    /// Iterative-refinement steps taken after the first solve (0 when the first solve met
    /// the balance; at most [`MAX_REFINEMENTS`]).
    pub refinements: usize,
}

/// Net flow out of every node through its channels [m³/s].
fn node_outflows(network: &Network, flows: &[f64]) -> Vec<f64> {
    let mut out = vec![0.0; network.nodes.len()];
    for (c, &q) in network.channels.iter().zip(flows) {
        out[c.from.0] += q;
        out[c.to.0] -= q;
    }
    out
}

/// Relative balance residual of every node whose balance is imposed (junctions and flow
/// ports); `None` at pressure ports, whose flow is free.
///
/// The measure is the componentwise relative backward error of Oettli & Prager (1964),
/// |s_i − Σ_k g_k(p_i − p_j)| / (|s_i| + Σ_k g_k(|p_i| + |p_j|)): the imbalance compared with
/// the size of the terms that produced it. It stays meaningful at a dead-end junction, where
/// the true flow is zero and any rounding would be a 100 % error relative to the flow itself.
pub fn balance_residuals(network: &Network, pressures: &[f64], g: &[f64]) -> Vec<Option<f64>> {
    balance_residuals_for(network, pressures, g, &drive_values(network))
}

/// [`balance_residuals`] for other drive settings: the injection s_i of a flow port is
/// `drives[i]` (see [`KirchhoffSystem::rhs_for`]).
pub fn balance_residuals_for(
    network: &Network,
    pressures: &[f64],
    g: &[f64],
    drives: &[f64],
) -> Vec<Option<f64>> {
    let mut sums = BalanceSums::new(network.nodes.len());
    for (c, &gk) in network.channels.iter().zip(g) {
        sums.add(c.from.0, c.to.0, gk, pressures[c.from.0], pressures[c.to.0]);
    }
    let roles = Role::of_nodes(network);
    sums.residuals(&roles, pressures, drives)
}

/// Per-node sums behind [`balance_residuals_for`], accumulated channel by channel so that the
/// checked solve can gather them in the same pass as the flows.
pub(crate) struct BalanceSums {
    imbalance: Vec<f64>,
    scale: Vec<f64>,
    conductance: Vec<f64>,
}

impl BalanceSums {
    pub(crate) fn new(n: usize) -> Self {
        BalanceSums {
            imbalance: vec![0.0; n],
            scale: vec![0.0; n],
            conductance: vec![0.0; n],
        }
    }

    /// Add channel (i → j) of conductance `gk` at end pressures `pi`, `pj`; returns its flow
    /// g·(p_i − p_j) and its size g·(|p_i| + |p_j|).
    #[inline]
    pub(crate) fn add(&mut self, i: usize, j: usize, gk: f64, pi: f64, pj: f64) -> (f64, f64) {
        let q = gk * (pi - pj);
        let size = gk * (pi.abs() + pj.abs());
        self.imbalance[i] -= q;
        self.imbalance[j] += q;
        self.scale[i] += size;
        self.scale[j] += size;
        self.conductance[i] += gk;
        self.conductance[j] += gk;
        (q, size)
    }

    /// The residuals of [`balance_residuals_for`] from the sums.
    /// Each node's total channel conductance Σ g_k.
    pub(crate) fn into_conductance(self) -> Vec<f64> {
        self.conductance
    }

    pub(crate) fn residuals(
        &self,
        roles: &[Role],
        pressures: &[f64],
        drives: &[f64],
    ) -> Vec<Option<f64>> {
        let n = roles.len();
        let (imbalance, scale, conductance) = (&self.imbalance, &self.scale, &self.conductance);
        let p_max = pressures.iter().fold(0.0f64, |m, p| m.max(p.abs()));
        // Arioli, Demmel & Duff (1989), SIAM J. Matrix Anal. Appl. 10, 165: where the componentwise
        // denominator (|A||x| + |b|)_i is below τ = 1000·n·ε times the normwise one
        // (‖A_i‖·‖x‖∞ + |b_i|), e.g. where pressures have decayed to nothing far down a leaky
        // line, the normwise denominator is used, so rounding there is not read as an imbalance.
        let tau = 1000.0 * n as f64 * f64::EPSILON;
        roles
            .iter()
            .zip(drives)
            .enumerate()
            .map(|(i, (role, &d))| {
                let inj = match role {
                    Role::Pressure => return None,
                    Role::Junction => 0.0,
                    Role::Flow => d,
                };
                let componentwise = scale[i] + inj.abs();
                let normwise = 2.0 * conductance[i] * p_max + inj.abs();
                let s = if componentwise < tau * normwise {
                    normwise
                } else {
                    componentwise
                };
                // 0 where nothing flows at all; NaN (never accepted) where the pressures are.
                Some(if s == 0.0 {
                    0.0
                } else {
                    (inj + imbalance[i]).abs() / s
                })
            })
            .collect()
    }
}

/// The largest residual and where it is (index 0 and residual 0 when there is none); the
/// first NaN, if any, counts as the largest, so that a broken solve is never accepted.
fn worst(residuals: impl IntoIterator<Item = Option<f64>>) -> (usize, f64) {
    residuals
        .into_iter()
        .enumerate()
        .filter_map(|(i, r)| r.map(|r| (i, r)))
        .fold((0, 0.0), |acc, (i, r)| {
            if acc.1.is_nan() || r <= acc.1 {
                acc
            } else {
                (i, r)
            }
        })
}

/// Solve the steady flow with the given channel conductances, reusing an analysed pattern
/// (`system` and `symbolic` built for `network`).
///
/// The same checked path as [`Solver`]: a [`Factor`] for `g`, then [`Factor::solve`] with the
/// network's own drives (refinement at most [`MAX_REFINEMENTS`] times, refused above
/// [`RESIDUAL_LIMIT`]).
pub fn solve_with(
    network: &Network,
    system: &KirchhoffSystem,
    symbolic: &SymbolicCholesky,
    g: &[f64],
) -> Result<FlowSolution, SolveError> {
    Factor::new(network, system, symbolic, g.to_vec())?.solve(&drive_values(network))
}

/// Solve the steady flow of `network`: assemble, analyse, factorise, solve, check — through
/// [`Solver::new`] and [`Solver::solve`].
///
/// ```
/// use rillnet::prelude::*;
/// let mut b = NetworkBuilder::new(Fluid::WATER_20C);
/// b.add_node("in", Port::Pressure(Pressure::from_si(1000.0))).unwrap();
/// b.add_node("out", Port::Pressure(Pressure::from_si(0.0))).unwrap();
/// let tube = b.add_section("tube", Shape::Circle { diameter: Length::from_si(100e-6) }).unwrap();
/// b.add_channel("c", "in", "out", tube, Length::from_si(0.01)).unwrap();
/// let net = b.build().unwrap();
/// let sol = solve(&net).unwrap();
/// let r = net.resistance(ChannelId(0));
/// assert!((sol.flows[0] - 1000.0 / r).abs() < 1e-12 * sol.flows[0]);
/// ```
pub fn solve(network: &Network) -> Result<FlowSolution, SolveError> {
    Solver::new(network)?.solve()
}

/// Random test networks shared by the unit tests of this module's parts.
#[cfg(test)]
pub(crate) mod testnet {
    use crate::fluid::Fluid;
    use crate::network::{Network, NetworkBuilder, Port, SectionId};
    use crate::section::Shape;
    use crate::units::Length;

    /// Successive uniform draws of the project's counter-based generator, on one stream.
    pub(crate) struct Rng {
        stream: u64,
        at: u64,
    }

    impl Rng {
        pub(crate) fn new(stream: u64) -> Rng {
            Rng { stream, at: 0 }
        }

        pub(crate) fn unit(&mut self) -> f64 {
            self.at += 1;
            crate::analysis::spread::rng::uniform(self.stream, self.at, 0, 0)
        }

        pub(crate) fn below(&mut self, n: usize) -> usize {
            ((self.unit() * n as f64) as usize).min(n - 1)
        }
    }

    /// Nodes n0, n1, … with the given ports, joined by channels c0, c1, … of one 100 µm round
    /// section, 1 mm long.
    pub(crate) struct Chip {
        builder: NetworkBuilder,
        section: SectionId,
        channels: usize,
    }

    impl Chip {
        pub(crate) fn new(ports: impl IntoIterator<Item = Port>) -> Chip {
            let mut builder = NetworkBuilder::new(Fluid::WATER_20C);
            for (i, port) in ports.into_iter().enumerate() {
                builder.add_node(&format!("n{i}"), port).unwrap();
            }
            let diameter = Length::from_si(1e-4);
            let section = builder
                .add_section("s", Shape::Circle { diameter })
                .unwrap();
            Chip {
                builder,
                section,
                channels: 0,
            }
        }

        pub(crate) fn join(&mut self, i: usize, j: usize) {
            let name = format!("c{}", self.channels);
            self.channels += 1;
            let (from, to) = (format!("n{i}"), format!("n{j}"));
            let length = Length::from_si(1e-3);
            self.builder
                .add_channel(&name, &from, &to, self.section, length)
                .unwrap();
        }

        pub(crate) fn build(self) -> Network {
            self.builder.build().unwrap()
        }
    }
}

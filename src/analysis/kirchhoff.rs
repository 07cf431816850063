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
//! Sign convention: a channel's flow is positive from its `from` node to its `to` node; a
//! port's flow is positive into the chip.

use crate::network::{Network, Port};
use crate::solver::{Parallelism, SolverError, SymbolicCholesky, SymmetricPattern};

/// Largest relative node imbalance accepted before results are withheld.
pub const RESIDUAL_LIMIT: f64 = 1e-9;

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
}

/// Where each channel's conductance lands in the matrix value array.
#[derive(Clone, Copy, Debug)]
struct ChannelSlots {
    /// Slot of the diagonal entry of `from` (if `from` is an unknown).
    from_diag: Option<usize>,
    /// Slot of the diagonal entry of `to` (if `to` is an unknown).
    to_diag: Option<usize>,
    /// Slot of the off-diagonal entry (if both ends are unknowns).
    off: Option<usize>,
}

/// The assembled structure of a network's Kirchhoff system: which node is which unknown,
/// the sparsity pattern, and where each channel's conductance goes. It depends on the
/// topology and on which nodes are pressure ports, not on the values, so sweeps over
/// channel sizes or drive settings reuse it (and its symbolic factorisation).
#[derive(Debug)]
pub struct KirchhoffSystem {
    unknown_of: Vec<Option<usize>>,
    pattern: SymmetricPattern,
    slots: Vec<ChannelSlots>,
}

impl KirchhoffSystem {
    /// Build the structure for `network`.
    pub fn new(network: &Network) -> Self {
        let mut unknown_of = Vec::with_capacity(network.nodes.len());
        let mut n = 0;
        for node in &network.nodes {
            if matches!(node.port, Port::Pressure(_)) {
                unknown_of.push(None);
            } else {
                unknown_of.push(Some(n));
                n += 1;
            }
        }
        // Positions 0..n are the diagonals (so isolated unknowns still have an entry); then one
        // off-diagonal position per channel joining two unknowns. A channel's diagonal slots
        // are those of its end nodes.
        let mut positions: Vec<(usize, usize)> = (0..n).map(|i| (i, i)).collect();
        positions.reserve(network.channels.len());
        let mut off_position = Vec::with_capacity(network.channels.len());
        for c in &network.channels {
            match (unknown_of[c.from.0], unknown_of[c.to.0]) {
                (Some(a), Some(b)) => {
                    off_position.push(Some(positions.len()));
                    positions.push((a, b));
                }
                _ => off_position.push(None),
            }
        }
        let (pattern, slot_of) = SymmetricPattern::from_positions(n, &positions);
        let slots = network
            .channels
            .iter()
            .zip(off_position)
            .map(|(c, off)| ChannelSlots {
                from_diag: unknown_of[c.from.0].map(|a| slot_of[a]),
                to_diag: unknown_of[c.to.0].map(|b| slot_of[b]),
                off: off.map(|k| slot_of[k]),
            })
            .collect();
        KirchhoffSystem {
            unknown_of,
            pattern,
            slots,
        }
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
        for (s, &gk) in self.slots.iter().zip(g) {
            if let Some(i) = s.from_diag {
                values[i] += gk;
            }
            if let Some(i) = s.to_diag {
                values[i] += gk;
            }
            if let Some(i) = s.off {
                values[i] -= gk;
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
        let mut b = vec![0.0; self.dim()];
        for ((node, u), d) in network.nodes.iter().zip(&self.unknown_of).zip(drives) {
            if let (Port::Flow(_), Some(u)) = (node.port, u) {
                b[*u] += d;
            }
        }
        for (c, &gk) in network.channels.iter().zip(g) {
            let a = self.unknown_of[c.from.0];
            let bb = self.unknown_of[c.to.0];
            match (a, bb) {
                (Some(a), None) => b[a] += gk * drives[c.to.0],
                (None, Some(bb)) => b[bb] += gk * drives[c.from.0],
                _ => {}
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
            .map(|(u, d)| match u {
                Some(u) => x[*u],
                None => *d,
            })
            .collect()
    }

    /// The unknown index of a node (None for pressure ports).
    pub fn unknown(&self, node: usize) -> Option<usize> {
        self.unknown_of[node]
    }
}

/// Each node's drive value: pressure of a pressure port, injected flow of a flow port, 0 at a
/// junction (SI).
pub fn drive_values(network: &Network) -> Vec<f64> {
    network
        .nodes
        .iter()
        .map(|n| match n.port {
            Port::Pressure(p) => p.si(),
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

/// The steady flow state of a network.
#[derive(Clone, Debug)]
pub struct FlowSolution {
    /// Gauge pressure at every node [Pa].
    pub pressures: Vec<f64>,
    /// Flow in every channel [m³/s], positive from `from` to `to`.
    pub flows: Vec<f64>,
    /// Net flow each node delivers into the chip [m³/s]: the port flow at ports, the
    /// numerical imbalance (≈ 0) at junctions.
    pub node_net_inflow: Vec<f64>,
    /// Largest relative imbalance over the nodes whose balance is imposed.
    pub max_relative_residual: f64,
    /// Relative balance residual of every node (None at pressure ports, whose flow is free);
    /// see [`balance_residuals`].
    pub node_residuals: Vec<Option<f64>>,
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
    let n = network.nodes.len();
    let mut imbalance = vec![0.0; n];
    let mut scale = vec![0.0; n];
    for (c, &gk) in network.channels.iter().zip(g) {
        let (pi, pj) = (pressures[c.from.0], pressures[c.to.0]);
        let q = gk * (pi - pj);
        let size = gk * (pi.abs() + pj.abs());
        imbalance[c.from.0] -= q;
        imbalance[c.to.0] += q;
        scale[c.from.0] += size;
        scale[c.to.0] += size;
    }
    network
        .nodes
        .iter()
        .enumerate()
        .map(|(i, node)| {
            let inj = match node.port {
                Port::Pressure(_) => return None,
                Port::Junction => 0.0,
                Port::Flow(q) => q.si(),
            };
            let s = scale[i] + inj.abs();
            Some(if s > 0.0 {
                (inj + imbalance[i]).abs() / s
            } else {
                0.0
            })
        })
        .collect()
}

fn worst(residuals: &[Option<f64>]) -> (usize, f64) {
    residuals
        .iter()
        .enumerate()
        .filter_map(|(i, r)| r.map(|r| (i, r)))
        .fold((0, 0.0), |acc, (i, r)| if r > acc.1 { (i, r) } else { acc })
}

/// Solve the steady flow with the given channel conductances, reusing an analysed pattern.
///
/// One step of iterative refinement is applied when the balance misses [`RESIDUAL_LIMIT`];
/// if it still misses, the solution is refused.
pub fn solve_with(
    network: &Network,
    system: &KirchhoffSystem,
    symbolic: &SymbolicCholesky,
    g: &[f64],
) -> Result<FlowSolution, SolveError> {
    let values = system.matrix_values(g);
    let b = system.rhs(network, g);
    let factor = symbolic.factorize(system.pattern(), &values)?;
    let mut x = b.clone();
    factor.solve_in_place(&mut x)?;

    let flows_of = |x: &[f64]| -> (Vec<f64>, Vec<f64>) {
        let p = system.node_pressures(network, x);
        let q = channel_flows(network, g, &p);
        (p, q)
    };
    let (mut pressures, mut flows) = flows_of(&x);
    let mut residuals = balance_residuals(network, &pressures, g);
    let mut refinements = 0;
    while worst(&residuals).1 > RESIDUAL_LIMIT && refinements < 3 {
        // r = b − A x; solve A d = r; x += d.
        let mut ax = vec![0.0; x.len()];
        system.pattern().multiply(&values, &x, &mut ax);
        let mut d: Vec<f64> = b.iter().zip(&ax).map(|(bi, ai)| bi - ai).collect();
        factor.solve_in_place(&mut d)?;
        x.iter_mut().zip(&d).for_each(|(xi, di)| *xi += di);
        (pressures, flows) = flows_of(&x);
        residuals = balance_residuals(network, &pressures, g);
        refinements += 1;
    }
    let (worst_node, worst_residual) = worst(&residuals);
    if worst_residual > RESIDUAL_LIMIT || !worst_residual.is_finite() {
        return Err(SolveError::Residual {
            node: network.nodes[worst_node].name.clone(),
            residual: worst_residual,
            limit: RESIDUAL_LIMIT,
        });
    }
    // Dead-end branches carry no flow; what the solve left there is rounding.
    for (q, dead) in flows.iter_mut().zip(network.dead_end_channels()) {
        if dead {
            *q = 0.0;
        }
    }
    Ok(FlowSolution {
        node_net_inflow: node_outflows(network, &flows),
        pressures,
        flows,
        max_relative_residual: worst_residual,
        node_residuals: residuals,
    })
}

/// Solve the steady flow of `network`: assemble, analyse, factorise, solve, check.
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
    let system = KirchhoffSystem::new(network);
    let symbolic = SymbolicCholesky::analyse(system.pattern(), Parallelism::default())?;
    solve_with(network, &system, &symbolic, &conductances(network))
}

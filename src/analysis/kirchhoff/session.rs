//! The one checked solve path: a [`Solver`] per topology, a [`Factor`] per conductance set,
//! refined and balance-checked solves for any number of drive sets and adjoint right-hand
//! sides.
//!
//! Forward solves (A·x = b(drives)) are checked node by node with the Oettli–Prager balance
//! residual of [`super::balance_residuals_for`]; adjoint solves (A·λ = b) with the componentwise
//! relative backward error of the linear system itself,
//!
//!   ω(λ) = max_i |b − A·λ|_i / (|A|·|λ| + |b|)_i     (Oettli & Prager 1964; 0 where the
//!                                                     denominator is 0),
//!
//! the same measure restricted to the unknowns. Both take at most [`MAX_REFINEMENTS`] steps
//! of fixed-precision iterative refinement (r = b − A·x, solve A·d = r on the same factor,
//! x += d; Skeel 1980 shows that such steps drive the componentwise backward error down to
//! the order of the unit roundoff when A is not too ill-conditioned) and refuse a result
//! whose residual stays above [`RESIDUAL_LIMIT`].

use super::eliminate::{Eliminated, Plan};
use super::{
    conductances, drive_values, node_outflows, worst, BalanceSums, FlowSolution, KirchhoffSystem,
    Role, SolveError, MAX_REFINEMENTS, RESIDUAL_LIMIT,
};
use crate::network::{Network, NodeId, Port};
use crate::solver::{Cholesky, Parallelism, SolverError, SymbolicCholesky};
use std::borrow::Cow;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::OnceLock;

/// A channel whose conductance exceeds the others at its ends by this factor is named as the
/// cause when the flows do not balance (its resistance is negligible: merging its ends is
/// the fix).
const NEGLIGIBLE_RATIO: f64 = 1e6;

/// Solves for one network topology: the Kirchhoff structure ([`KirchhoffSystem`]) and its
/// symbolic analysis, computed once in [`Solver::new`] and reused by every
/// [`Solver::factorize`] — for new drives (the matrix does not depend on them) and for new
/// conductances on the same topology (sizing). The analysis eliminates dead ends and series
/// chains exactly and orders only what is left for the sparse Cholesky factor (see
/// [`super::eliminate`]).
#[derive(Debug)]
pub struct Solver<'n> {
    network: &'n Network,
    system: KirchhoffSystem,
    plan: Plan,
    /// Dead-end channels ([`Network::dead_end_channels`]), marked at the first solve: only the
    /// checks and the flows need them, not the factorisation.
    dead_end: OnceLock<Vec<bool>>,
    factorizations: AtomicUsize,
}

impl<'n> Solver<'n> {
    /// Assemble and analyse `network` (sequential factorisation, see [`Parallelism`]).
    pub fn new(network: &'n Network) -> Result<Self, SolveError> {
        Self::with_parallelism(network, Parallelism::default())
    }

    /// Analyse `network` on a structure already assembled for it by
    /// [`KirchhoffSystem::new`] (sequential factorisation). A structure of other dimensions,
    /// or one that holds other nodes than the pressure ports fixed
    /// ([`KirchhoffSystem::with_fixed`]), is [`SolveError::TopologyChanged`].
    pub fn from_system(network: &'n Network, system: KirchhoffSystem) -> Result<Self, SolveError> {
        if system.nodes() != network.nodes.len()
            || system.channels() != network.channels.len()
            || !system.fixes_pressure_ports_only()
        {
            return Err(SolveError::TopologyChanged);
        }
        Self::analyse(network, system, Parallelism::default())
    }

    /// Assemble and analyse `network`, factorising with `par` threads.
    pub fn with_parallelism(network: &'n Network, par: Parallelism) -> Result<Self, SolveError> {
        Self::analyse(network, KirchhoffSystem::new(network), par)
    }

    fn analyse(
        network: &'n Network,
        system: KirchhoffSystem,
        par: Parallelism,
    ) -> Result<Self, SolveError> {
        let plan = Plan::new(&system, par)?;
        Ok(Solver {
            network,
            system,
            plan,
            dead_end: OnceLock::new(),
            factorizations: AtomicUsize::new(0),
        })
    }

    /// The network whose topology this solver serves.
    pub fn network(&self) -> &'n Network {
        self.network
    }

    /// The assembled structure.
    pub fn system(&self) -> &KirchhoffSystem {
        &self.system
    }

    /// Symbolic analyses this solver has done: always 1, in [`Solver::new`]; nothing after
    /// construction re-analyses. Exposed so that callers and tests can state the invariant.
    pub fn analyses(&self) -> usize {
        1
    }

    /// Unknowns the analysis eliminates exactly before the sparse factorisation (dead ends and
    /// series chains, see [`super::eliminate`]); the other `system().dim() − eliminated()`
    /// are factorised by sparse Cholesky.
    pub fn eliminated(&self) -> usize {
        self.plan.eliminated()
    }

    /// Numeric factorisations requested through [`Solver::factorize`] so far.
    pub fn factorizations(&self) -> usize {
        self.factorizations.load(Ordering::Relaxed)
    }

    /// The conductances of `network`, which must have this solver's topology: the same
    /// nodes with the same port kinds and the same channel ends. Channel lengths and
    /// sections may differ (sizing); anything else is [`SolveError::TopologyChanged`].
    pub fn conductances_of(&self, network: &Network) -> Result<Vec<f64>, SolveError> {
        if !same_topology(self.network, network) {
            return Err(SolveError::TopologyChanged);
        }
        Ok(conductances(network))
    }

    /// Factorise the matrix for channel conductances `g` [m³/(Pa·s)] on the kept analysis.
    pub fn factorize(&self, g: Vec<f64>) -> Result<Factor<'_>, SolveError> {
        self.factorizations.fetch_add(1, Ordering::Relaxed);
        Factor::build(
            self.network,
            &self.system,
            Analysis::Eliminating(&self.plan),
            g,
            Cow::Borrowed(&self.dead_end),
        )
    }

    /// The steady flow of the network with its own conductances and drives.
    pub fn solve(&self) -> Result<FlowSolution, SolveError> {
        self.factorize(conductances(self.network))?
            .solve(&drive_values(self.network))
    }
}

/// Same nodes, port kinds (not values: drives do not enter the matrix) and channel ends.
fn same_topology(a: &Network, b: &Network) -> bool {
    let kind = |p: &Port| std::mem::discriminant(p);
    a.nodes.len() == b.nodes.len()
        && a.channels.len() == b.channels.len()
        && a.nodes
            .iter()
            .zip(&b.nodes)
            .all(|(x, y)| kind(&x.port) == kind(&y.port))
        && a.channels
            .iter()
            .zip(&b.channels)
            .all(|(x, y)| x.from == y.from && x.to == y.to)
}

/// The adjoint solution of A·λ = b for one right-hand side, and why its solve stopped.
#[derive(Clone, Debug, PartialEq)]
pub struct AdjointSolution {
    /// λ at every node; 0 at pressure ports, whose pressure is not an unknown.
    pub lambda: Vec<f64>,
    /// The componentwise relative backward error ω(λ) the solve stopped at (see the module
    /// documentation); at most [`RESIDUAL_LIMIT`].
    pub relative_residual: f64,
    /// Iterative-refinement steps taken (at most [`MAX_REFINEMENTS`]).
    pub refinements: usize,
}

/// A numeric factorisation for one set of conductances, able to solve any number of drive
/// sets ([`Factor::solve_many`]) and adjoint right-hand sides ([`Factor::solve_adjoint`]),
/// each refined and checked.
#[derive(Debug)]
pub struct Factor<'a> {
    network: &'a Network,
    system: &'a KirchhoffSystem,
    g: Vec<f64>,
    /// The assembled matrix values, made when first needed (refinement, adjoint checks).
    values: std::sync::OnceLock<Vec<f64>>,
    linear: Linear<'a>,
    dead_end: Cow<'a, OnceLock<Vec<bool>>>,
}

/// The analysis a factor is built on: a [`Solver`]'s elimination plan, or a caller's symbolic
/// Cholesky of the whole pattern ([`super::solve_with`]).
#[derive(Clone, Copy)]
enum Analysis<'a> {
    Eliminating(&'a Plan),
    Whole(&'a SymbolicCholesky),
}

/// The numeric factor behind a [`Factor`].
#[derive(Debug)]
enum Linear<'a> {
    Eliminated(Eliminated<'a>),
    Whole(Cholesky<'a>),
}

impl Linear<'_> {
    /// Solve A·x = b for every column of `rhs` (column-major), in place.
    fn solve_in_place(&self, rhs: &mut [f64]) -> Result<(), SolverError> {
        match self {
            Linear::Eliminated(e) => e.solve_in_place(rhs),
            Linear::Whole(c) => c.solve_in_place(rhs),
        }
    }
}

/// A factorisation failure with the channel most likely behind it named (see
/// [`super::flows::most_extreme_channel`]); other solver errors unchanged.
fn name_the_cause(network: &Network, g: &[f64], e: SolverError) -> SolveError {
    match e {
        SolverError::NotPositiveDefinite { pivot, n } => {
            match super::flows::most_extreme_channel(network, g) {
                Some((k, ratio)) => SolveError::Unfactorisable {
                    channel: network.channels[k].name.clone(),
                    ratio,
                    advice: if ratio > 1.0 {
                        "Give it a realistic length and section, or merge its ends into one node \
                         if its resistance is meant to be negligible"
                    } else {
                        "It all but closes the path: give it a realistic section, or remove it if \
                         it is meant to be closed"
                    },
                    pivot,
                    n,
                },
                None => SolveError::Solver(e),
            }
        }
        other => SolveError::Solver(other),
    }
}

/// One pass over the channels at a forward solution: node pressures, the balance residuals
/// of [`super::balance_residuals_for`] and the worst of them, the channel flows (0 on
/// dead-end branches), each node's net outflow and largest flow, the rounding scale
/// Σ g_k·(|p_i| + |p_j|) of the flows, and whether any channel's end pressures cancel (a
/// channel could be stiff: see [`super::flows`]).
struct Forward {
    pressures: Vec<f64>,
    /// Each node's total channel conductance Σ g_k.
    conductance: Vec<f64>,
    residuals: Vec<Option<f64>>,
    node: usize,
    residual: f64,
    flows: Vec<f64>,
    net: Vec<f64>,
    through: Vec<f64>,
    noise: f64,
    cancel: bool,
}

/// Refuse a vector of the wrong length (a caller's mistake, reported rather than panicking).
fn expect_len(what: &'static str, expected: usize, found: usize) -> Result<(), SolveError> {
    if expected == found {
        Ok(())
    } else {
        Err(SolveError::Mismatch {
            what,
            expected,
            found,
        })
    }
}

impl<'a> Factor<'a> {
    /// Factorise for conductances `g` on `symbolic`, the analysis of `system`'s pattern, with
    /// `system` built for `network`'s topology.
    pub(super) fn new(
        network: &'a Network,
        system: &'a KirchhoffSystem,
        symbolic: &'a SymbolicCholesky,
        g: Vec<f64>,
    ) -> Result<Self, SolveError> {
        let dead_end = Cow::Owned(OnceLock::new());
        Self::build(network, system, Analysis::Whole(symbolic), g, dead_end)
    }

    fn build(
        network: &'a Network,
        system: &'a KirchhoffSystem,
        analysis: Analysis<'a>,
        g: Vec<f64>,
        dead_end: Cow<'a, OnceLock<Vec<bool>>>,
    ) -> Result<Self, SolveError> {
        expect_len("system nodes", network.nodes.len(), system.nodes())?;
        expect_len("system channels", network.channels.len(), system.channels())?;
        expect_len("conductances", network.channels.len(), g.len())?;
        let values = std::sync::OnceLock::new();
        let linear = match analysis {
            Analysis::Eliminating(plan) => plan.factorize(&g).map(Linear::Eliminated),
            Analysis::Whole(symbolic) => symbolic
                .factorize(
                    system.pattern(),
                    values.get_or_init(|| system.matrix_values(&g)),
                )
                .map(Linear::Whole),
        }
        .map_err(|e| name_the_cause(network, &g, e))?;
        Ok(Factor {
            network,
            system,
            g,
            values,
            linear,
            dead_end,
        })
    }

    /// The dead-end channels, marked on first use.
    fn dead_ends(&self) -> &[bool] {
        self.dead_end
            .get_or_init(|| self.system.dead_end_channels())
    }

    /// The assembled matrix values for this factor's conductances.
    fn values(&self) -> &[f64] {
        self.values
            .get_or_init(|| self.system.matrix_values(&self.g))
    }

    /// The conductances this factor is for.
    pub fn conductances(&self) -> &[f64] {
        &self.g
    }

    /// The network (topology, names) this factor solves for.
    pub fn network(&self) -> &'a Network {
        self.network
    }

    /// The steady flow for `drives` (one value per node, see [`KirchhoffSystem::rhs_for`]),
    /// refined and balance-checked: [`SolveError::Residual`] if the balance still misses
    /// [`RESIDUAL_LIMIT`] after [`MAX_REFINEMENTS`] steps.
    pub fn solve(&self, drives: &[f64]) -> Result<FlowSolution, SolveError> {
        expect_len("drives", self.network.nodes.len(), drives.len())?;
        let b = self.system.rhs_for(self.network, &self.g, drives);
        let mut x = b.clone();
        self.linear.solve_in_place(&mut x)?;
        self.finish_forward(drives, &b, x)
    }

    /// Solve A·x = b in place over the unknowns (`b` in the order of
    /// [`KirchhoffSystem::node`]) by the factor alone: the elimination, the sparse triangular
    /// solves and the back substitution, with no refinement and no balance check — for
    /// callers who check the result themselves, and for timing against other sparse
    /// solvers. Every command goes through [`Factor::solve`].
    pub fn substitute(&self, b: &mut [f64]) -> Result<(), SolveError> {
        expect_len("right-hand side", self.system.dim(), b.len())?;
        Ok(self.linear.solve_in_place(b)?)
    }

    /// [`Factor::solve`] for several drive sets: one multi-column solve, then each column
    /// refined and checked on its own.
    pub fn solve_many(&self, drive_sets: &[Vec<f64>]) -> Result<Vec<FlowSolution>, SolveError> {
        let n = self.system.dim();
        let mut b = Vec::with_capacity(n * drive_sets.len());
        for d in drive_sets {
            expect_len("drives", self.network.nodes.len(), d.len())?;
            b.extend(self.system.rhs_for(self.network, &self.g, d));
        }
        let mut x = b.clone();
        self.linear.solve_in_place(&mut x)?;
        drive_sets
            .iter()
            .enumerate()
            .map(|(k, d)| {
                let cols = k * n..(k + 1) * n;
                self.finish_forward(d, &b[cols.clone()], x[cols].to_vec())
            })
            .collect()
    }

    /// Solve the adjoint systems A·λ = b for right-hand sides given per node (entries at
    /// pressure ports are ignored: λ = 0 there), refined and checked with ω(λ) (see the
    /// module documentation): [`SolveError::Adjoint`] if ω stays above [`RESIDUAL_LIMIT`].
    /// A is symmetric, so the same factor serves.
    pub fn solve_adjoint(&self, rhs: &[Vec<f64>]) -> Result<Vec<AdjointSolution>, SolveError> {
        let n = self.system.dim();
        let mut b = Vec::with_capacity(n * rhs.len());
        for r in rhs {
            expect_len("adjoint right-hand side", self.network.nodes.len(), r.len())?;
            b.extend((0..n).map(|u| r[self.system.node(u)]));
        }
        let mut x = b.clone();
        self.linear.solve_in_place(&mut x)?;
        let abs_values: Vec<f64> = self.values().iter().map(|v| v.abs()).collect();
        (0..rhs.len())
            .map(|k| {
                let cols = k * n..(k + 1) * n;
                self.finish_adjoint(&abs_values, &b[cols.clone()], x[cols].to_vec())
            })
            .collect()
    }

    /// Refine `x` (a first solution of A·x = b) until `check` — which returns the worst
    /// residual and whatever it computed along the way — meets [`RESIDUAL_LIMIT`], or
    /// [`MAX_REFINEMENTS`] steps are done. Returns the steps taken and the last check.
    fn refine<T>(
        &self,
        b: &[f64],
        x: &mut [f64],
        check: impl Fn(&[f64]) -> (f64, T),
    ) -> Result<(usize, T), SolverError> {
        let (mut residual, mut last) = check(x);
        let mut refinements = 0;
        while residual > RESIDUAL_LIMIT && refinements < MAX_REFINEMENTS {
            // r = b − A x; solve A d = r; x += d.
            let mut d = vec![0.0; x.len()];
            self.system.pattern().multiply(self.values(), x, &mut d);
            d.iter_mut().zip(b).for_each(|(di, bi)| *di = bi - *di);
            self.linear.solve_in_place(&mut d)?;
            x.iter_mut().zip(&d).for_each(|(xi, di)| *xi += di);
            (residual, last) = check(x);
            refinements += 1;
        }
        Ok((refinements, last))
    }

    /// Everything the checks of a forward solution need, in one pass over the channels (see
    /// [`Forward`]).
    fn forward_pass(&self, x: &[f64], drives: &[f64]) -> Forward {
        let system = self.system;
        let pressures = system.node_pressures_for(x, drives);
        let roles = system.roles();
        let n = pressures.len();
        let mut sums = BalanceSums::new(n);
        let mut flows = Vec::with_capacity(system.channels());
        let mut net = vec![0.0; n];
        let mut through = vec![0.0f64; n];
        let (mut noise, mut cancel) = (0.0, false);
        for ((&[i, j], &gk), &dead) in system.ends().iter().zip(&self.g).zip(self.dead_ends()) {
            let (i, j) = (i as usize, j as usize);
            let (pi, pj) = (pressures[i], pressures[j]);
            let (q, size) = sums.add(i, j, gk, pi, pj);
            // Dead-end branches carry no flow; what the solve left there is rounding.
            let q = if dead { 0.0 } else { q };
            net[i] += q;
            net[j] -= q;
            through[i] = through[i].max(q.abs());
            through[j] = through[j].max(q.abs());
            noise += size;
            cancel |= !dead
                && super::flows::cancels(pi, pj)
                && !(roles[i] == Role::Pressure && roles[j] == Role::Pressure);
            flows.push(q);
        }
        let residuals = sums.residuals(roles, &pressures, drives);
        let (node, residual) = worst(residuals.iter().copied());
        Forward {
            pressures,
            conductance: sums.into_conductance(),
            residuals,
            node,
            residual,
            flows,
            net,
            through,
            noise,
            cancel,
        }
    }

    /// Refine and check one forward column, then derive flows and node inflows.
    fn finish_forward(
        &self,
        drives: &[f64],
        b: &[f64],
        mut x: Vec<f64>,
    ) -> Result<FlowSolution, SolveError> {
        let check = |x: &[f64]| {
            let pass = self.forward_pass(x, drives);
            (pass.residual, pass)
        };
        let (refinements, pass) = self.refine(b, &mut x, check)?;
        if pass.residual > RESIDUAL_LIMIT || !pass.residual.is_finite() {
            return Err(SolveError::Residual {
                node: self.network.nodes[NodeId(pass.node)].name.clone(),
                residual: pass.residual,
                limit: RESIDUAL_LIMIT,
            });
        }
        let (pass, refinements, flows, net) = self.balanced_ports(drives, x, pass, refinements)?;
        Ok(FlowSolution {
            node_net_inflow: net,
            pressures: pass.pressures,
            flows,
            max_relative_residual: pass.residual,
            node_residuals: pass.residuals,
            refinements,
        })
    }

    /// The flows of a checked forward solution, with the chip's global port balance held:
    /// when the flows leaving at pressure ports miss the flows set at flow ports, the pressures
    /// carry a forward error that plain refinement (which stops at a small backward error)
    /// leaves, or the assembled matrix itself carries (its diagonal Σ g rounds away a
    /// conductance far below its neighbours'); up to [`MAX_REFINEMENTS`] more steps with
    /// residuals summed channel by channel in double-double arithmetic
    /// ([`Self::channel_residual`]) remove it. Still
    /// missing after that, the result is withheld with the channel most likely behind it.
    /// Returns the last pass, the refinement steps, the flows and each node's net outflow.
    fn balanced_ports(
        &self,
        drives: &[f64],
        mut x: Vec<f64>,
        mut pass: Forward,
        mut refinements: usize,
    ) -> Result<(Forward, usize, Vec<f64>, Vec<f64>), SolveError> {
        let injection = self.injection(drives);
        let mut extra = 0;
        loop {
            let (flows, net) = self.trusted_flows(&mut pass, &injection)?;
            let miss = super::flows::port_balance_miss(
                self.system,
                &pass.pressures,
                &self.g,
                &injection,
                &flows,
            );
            let Some(miss) = miss else {
                return Ok((pass, refinements, flows, net));
            };
            if extra == MAX_REFINEMENTS {
                let (k, ratio) = super::flows::most_extreme_channel(self.network, &self.g)
                    .unwrap_or((crate::network::ChannelId(0), 1.0));
                return Err(SolveError::PortBalance {
                    miss,
                    channel: self.network.channels[k].name.clone(),
                    ratio,
                });
            }
            let mut d = self.channel_residual(&pass.pressures, &injection);
            self.linear.solve_in_place(&mut d)?;
            x.iter_mut().zip(&d).for_each(|(xi, di)| *xi += di);
            pass = self.forward_pass(&x, drives);
            extra += 1;
            refinements += 1;
        }
    }

    /// The balance residual of every unknown, r_i = s_i − Σ_k g_k·(p_i − p_j), summed channel
    /// by channel from the pressures (each difference p_i − p_j is exact for nearby
    /// pressures) in double-double arithmetic (Knuth's TwoSum, as in Ogita, Rump & Oishi
    /// 2005, SIAM J. Sci. Comput. 26). Unlike b − A·x it does not go through the assembled
    /// diagonal Σ_k g_k, whose rounding loses a conductance far smaller than its neighbours'.
    fn channel_residual(&self, pressures: &[f64], injection: &[f64]) -> Vec<f64> {
        let network = self.network;
        let mut hi = vec![0.0; network.nodes.len()];
        let mut lo = vec![0.0; network.nodes.len()];
        let mut add = |i: usize, v: f64| {
            let s = hi[i] + v;
            let bb = s - hi[i];
            lo[i] += (hi[i] - (s - bb)) + (v - bb);
            hi[i] = s;
        };
        for (i, &s) in injection.iter().enumerate() {
            add(i, s);
        }
        for (c, &g) in network.channels.iter().zip(&self.g) {
            let q = g * (pressures[c.from.0] - pressures[c.to.0]);
            add(c.from.0, -q);
            add(c.to.0, q);
        }
        (0..self.system.dim())
            .map(|u| {
                let i = self.system.node(u);
                hi[i] + lo[i]
            })
            .collect()
    }

    /// The flow each node injects: a flow port's setting, 0 elsewhere.
    fn injection(&self, drives: &[f64]) -> Vec<f64> {
        self.system
            .roles()
            .iter()
            .zip(drives)
            .map(|(&r, &d)| if r == Role::Flow { d } else { 0.0 })
            .collect()
    }

    /// Recover the flows of stiff channels from the balance and check every imposed node's
    /// net flow (see [`super::flows`]); returns the flows and each node's net outflow. When
    /// no channel's end pressures cancel (no channel can be stiff), the pass's own flows and
    /// sums are the answer and nothing is recomputed.
    fn trusted_flows(
        &self,
        pass: &mut Forward,
        injection: &[f64],
    ) -> Result<(Vec<f64>, Vec<f64>), SolveError> {
        let network = self.network;
        let mut flows = std::mem::take(&mut pass.flows);
        let stiff = if pass.cancel {
            super::flows::stiff_channels(
                self.system,
                &pass.pressures,
                &self.g,
                &pass.conductance,
                self.dead_ends(),
            )
        } else {
            None
        };
        let (worst, net) = match stiff {
            Some(stiff) => {
                let unresolved =
                    super::flows::recover_stiff(network, &stiff, injection, &mut flows);
                self.refuse_unresolved(&pass.pressures, &unresolved)?;
                let worst = super::flows::worst_flow_imbalance(
                    network,
                    &pass.pressures,
                    &self.g,
                    &stiff,
                    injection,
                    &flows,
                );
                (worst, node_outflows(network, &flows))
            }
            None => {
                let net = std::mem::take(&mut pass.net);
                let worst = super::flows::worst_of_sums(
                    self.system.roles(),
                    &net,
                    &pass.through,
                    pass.noise,
                    injection,
                );
                (worst, net)
            }
        };
        let Some((node, residual)) = worst else {
            return Ok((flows, net));
        };
        match super::flows::most_negligible_at(network, &self.g, node) {
            Some((k, ratio)) if ratio >= NEGLIGIBLE_RATIO => Err(SolveError::NegligibleChannel {
                channel: network.channels[k].name.clone(),
                node: network.nodes[node].name.clone(),
                ratio,
                residual,
            }),
            _ => Err(SolveError::FlowBalance {
                node: network.nodes[node].name.clone(),
                residual,
                limit: super::flows::FLOW_LIMIT,
            }),
        }
    }

    /// Refuse stiff channels whose flows the balance could not recover, naming them.
    fn refuse_unresolved(
        &self,
        pressures: &[f64],
        unresolved: &[crate::network::ChannelId],
    ) -> Result<(), SolveError> {
        let network = self.network;
        if !unresolved.is_empty() {
            let names: Vec<String> = unresolved
                .iter()
                .map(|&c| network.channels[c].name.clone())
                .collect();
            let agree = unresolved
                .iter()
                .map(|&c| {
                    let ch = &network.channels[c];
                    let (pi, pj) = (pressures[ch.from.0], pressures[ch.to.0]);
                    ((pi.abs() + pj.abs()) / (pi - pj).abs()).log10()
                })
                .fold(0.0f64, f64::max);
            return Err(SolveError::StiffChannels {
                count: names.len(),
                listed: names
                    .iter()
                    .take(8)
                    .map(|n| format!("'{n}'"))
                    .collect::<Vec<_>>()
                    .join(", "),
                digits: agree.min(99.0) as u32,
                channels: names,
            });
        }
        Ok(())
    }

    /// Refine and check one adjoint column (`abs_values` = |A|), then expand λ to the nodes.
    fn finish_adjoint(
        &self,
        abs_values: &[f64],
        b: &[f64],
        mut x: Vec<f64>,
    ) -> Result<AdjointSolution, SolveError> {
        let check = |x: &[f64]| {
            let w = self.backward_error(abs_values, b, x);
            (w.1, w)
        };
        let (refinements, (at, residual)) = self.refine(b, &mut x, check)?;
        if residual > RESIDUAL_LIMIT || !residual.is_finite() {
            return Err(SolveError::Adjoint {
                node: self.network.nodes[NodeId(self.system.node(at))]
                    .name
                    .clone(),
                residual,
                limit: RESIDUAL_LIMIT,
            });
        }
        let zeros = vec![0.0; self.network.nodes.len()];
        Ok(AdjointSolution {
            lambda: self.system.node_pressures_for(&x, &zeros),
            relative_residual: residual,
            refinements,
        })
    }

    /// ω(x) for A·x = b and where it is largest (unknown index): |b − A·x|_i over
    /// (|A|·|x| + |b|)_i, with `abs_values` the entries of |A|.
    fn backward_error(&self, abs_values: &[f64], b: &[f64], x: &[f64]) -> (usize, f64) {
        let pattern = self.system.pattern();
        let mut ax = vec![0.0; x.len()];
        pattern.multiply(self.values(), x, &mut ax);
        let abs_x: Vec<f64> = x.iter().map(|v| v.abs()).collect();
        let mut scale = vec![0.0; x.len()];
        pattern.multiply(abs_values, &abs_x, &mut scale);
        worst(ax.iter().zip(b).zip(&scale).map(|((ai, bi), si)| {
            let s = si + bi.abs();
            Some(if s == 0.0 { 0.0 } else { (bi - ai).abs() / s })
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::kirchhoff::balance_residuals_for;
    use crate::fluid::Fluid;
    use crate::network::{NetworkBuilder, Port};
    use crate::section::Shape;
    use crate::units::{Density, Length, Pressure, Viscosity, VolumeFlow};

    /// Pump and pressure inlet into a small mesh with a dead end, drained at 0 Pa; `width`
    /// sets the section of channel `c1` alone.
    fn mesh(width: f64) -> Network {
        let mut b = NetworkBuilder::new(Fluid::constant(
            Viscosity::from_si(1e-3),
            Density::from_si(1000.0),
        ));
        b.add_node("pump", Port::Flow(VolumeFlow::from_si(2e-11)))
            .unwrap();
        b.add_node("inlet", Port::Pressure(Pressure::from_si(3000.0)))
            .unwrap();
        for j in ["a", "b", "c", "dead"] {
            b.add_node(j, Port::Junction).unwrap();
        }
        b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
            .unwrap();
        let rect = |w: f64| Shape::Rectangle {
            width: Length::from_si(w),
            height: Length::from_si(50e-6),
        };
        let s = b.add_section("s", rect(100e-6)).unwrap();
        let own = b.inline_section("c1", rect(width)).unwrap();
        let l = Length::from_si;
        b.add_channel("c0", "pump", "a", s, l(4e-3)).unwrap();
        b.add_channel("c1", "inlet", "a", own, l(6e-3)).unwrap();
        b.add_channel("c2", "a", "b", s, l(3e-3)).unwrap();
        b.add_channel("c3", "a", "c", s, l(9e-3)).unwrap();
        b.add_channel("c4", "b", "c", s, l(2e-3)).unwrap();
        b.add_channel("c5", "b", "out", s, l(5e-3)).unwrap();
        b.add_channel("c6", "c", "out", s, l(7e-3)).unwrap();
        b.add_channel("c7", "c", "dead", s, l(1e-3)).unwrap();
        b.build().unwrap()
    }

    /// The first solution of A·x = b, perturbed by `rel` relative (alternating signs).
    fn perturbed_first_solve(factor: &Factor<'_>, b: &[f64], rel: f64) -> Vec<f64> {
        let mut x = b.to_vec();
        factor.linear.solve_in_place(&mut x).unwrap();
        x.iter()
            .enumerate()
            .map(|(i, v)| v * (1.0 + if i % 2 == 0 { rel } else { -rel }))
            .collect()
    }

    #[test]
    fn an_inaccurate_first_solve_is_refined_to_the_limit() {
        let net = mesh(100e-6);
        let solver = Solver::new(&net).unwrap();
        let factor = solver.factorize(conductances(&net)).unwrap();
        let clean = factor.solve(&drive_values(&net)).unwrap();
        assert_eq!(clean.refinements, 0);
        assert!(clean.max_relative_residual <= RESIDUAL_LIMIT);
        // A first solution off by 1e-6 misses the balance; one refinement step on the same
        // factor recovers it (the factor is exact to rounding, so d = A⁻¹r is too).
        let drives = drive_values(&net);
        let b = solver
            .system()
            .rhs_for(&net, factor.conductances(), &drives);
        let x = perturbed_first_solve(&factor, &b, 1e-6);
        let p = solver.system().node_pressures_for(&x, &drives);
        let before = balance_residuals_for(&net, &p, factor.conductances(), &drives);
        assert!(worst(before).1 > RESIDUAL_LIMIT);
        let fixed = factor.finish_forward(&drives, &b, x).unwrap();
        assert!((1..=MAX_REFINEMENTS).contains(&fixed.refinements));
        assert!(fixed.max_relative_residual <= RESIDUAL_LIMIT);
        for (p, q) in fixed.pressures.iter().zip(&clean.pressures) {
            assert!((p - q).abs() <= 1e-12 * q.abs().max(1.0), "{p} vs {q}");
        }
        // A first solution that no refinement can mend is refused, not returned.
        let broken = vec![f64::NAN; b.len()];
        assert!(matches!(
            factor.finish_forward(&drives, &b, broken),
            Err(SolveError::Residual { .. })
        ));
    }

    #[test]
    fn an_inaccurate_adjoint_solve_is_refined_or_refused() {
        let net = mesh(100e-6);
        let solver = Solver::new(&net).unwrap();
        let factor = solver.factorize(conductances(&net)).unwrap();
        let mut rhs = vec![0.0; net.nodes.len()];
        rhs[2] = 1.0;
        rhs[4] = -0.5;
        let clean = factor.solve_adjoint(std::slice::from_ref(&rhs)).unwrap();
        assert_eq!(clean[0].refinements, 0);
        assert!(clean[0].relative_residual <= RESIDUAL_LIMIT);
        assert_eq!(clean[0].lambda[1], 0.0); // pressure port
        let n = solver.system().dim();
        let b: Vec<f64> = (0..n).map(|u| rhs[solver.system().node(u)]).collect();
        let abs_values: Vec<f64> = factor.values().iter().map(|v| v.abs()).collect();
        let x = perturbed_first_solve(&factor, &b, 1e-6);
        assert!(factor.backward_error(&abs_values, &b, &x).1 > RESIDUAL_LIMIT);
        let fixed = factor.finish_adjoint(&abs_values, &b, x).unwrap();
        assert!(fixed.refinements >= 1);
        for (l, m) in fixed.lambda.iter().zip(&clean[0].lambda) {
            assert!((l - m).abs() <= 1e-12 * m.abs().max(1e-300), "{l} vs {m}");
        }
        assert!(matches!(
            factor.finish_adjoint(&abs_values, &b, vec![f64::NAN; n]),
            Err(SolveError::Adjoint { .. })
        ));
    }

    #[test]
    fn plain_substitution_and_an_assembled_structure_give_the_checked_answer() {
        let net = mesh(100e-6);
        let solver = Solver::from_system(&net, KirchhoffSystem::new(&net)).unwrap();
        let factor = solver.factorize(conductances(&net)).unwrap();
        let checked = factor.solve(&drive_values(&net)).unwrap();
        let mut x = solver.system().rhs(&net, factor.conductances());
        factor.substitute(&mut x).unwrap();
        let p = solver.system().node_pressures(&net, &x);
        for (a, b) in p.iter().zip(&checked.pressures) {
            assert!((a - b).abs() <= 1e-13 * b.abs().max(1.0), "{a} vs {b}");
        }
        assert!(matches!(
            factor.substitute(&mut [0.0; 2]),
            Err(SolveError::Mismatch { .. })
        ));
        // A structure that frees a pressure port (as time evolution builds) is refused.
        let mut fixed: Vec<bool> = net
            .nodes
            .iter()
            .map(|n| matches!(n.port, Port::Pressure(_)))
            .collect();
        fixed[1] = false;
        assert!(matches!(
            Solver::from_system(&net, KirchhoffSystem::with_fixed(&net, &fixed)),
            Err(SolveError::TopologyChanged)
        ));
    }

    #[test]
    fn many_drive_sets_match_single_solves_on_one_factorisation() {
        let net = mesh(100e-6);
        let solver = Solver::new(&net).unwrap();
        let factor = solver.factorize(conductances(&net)).unwrap();
        let base = drive_values(&net);
        let mut unit = vec![0.0; base.len()];
        unit[1] = 1.0;
        let many = factor.solve_many(&[base.clone(), unit.clone()]).unwrap();
        for (d, sol) in [base, unit].iter().zip(&many) {
            let one = factor.solve(d).unwrap();
            for (p, q) in sol.pressures.iter().zip(&one.pressures) {
                assert!((p - q).abs() <= 1e-13 * q.abs().max(1e-300));
            }
            // The dead end carries exactly no flow.
            assert_eq!(sol.flows[7], 0.0);
        }
        assert_eq!((solver.analyses(), solver.factorizations()), (1, 1));
        assert!(matches!(
            factor.solve(&[0.0; 2]),
            Err(SolveError::Mismatch { .. })
        ));
    }

    #[test]
    fn a_solver_serves_new_conductances_on_its_topology_only() {
        let net = mesh(100e-6);
        let solver = Solver::new(&net).unwrap();
        // Another width for c1: a new section, the same nodes and channel ends.
        let wider = mesh(160e-6);
        let g = solver.conductances_of(&wider).unwrap();
        let sol = solver
            .factorize(g)
            .unwrap()
            .solve(&drive_values(&wider))
            .unwrap();
        let direct = super::super::solve(&wider).unwrap();
        for (q, r) in sol.flows.iter().zip(&direct.flows) {
            assert!((q - r).abs() <= 1e-12 * r.abs().max(1e-300));
        }
        // A network with a different topology is refused.
        let mut other = mesh(100e-6);
        other.channels[crate::network::ChannelId(3)].to = crate::network::NodeId(3);
        assert_eq!(
            solver.conductances_of(&other),
            Err(SolveError::TopologyChanged)
        );
    }
}

//! How far the real chip's flows, splits and wall shear can land from the design, given the
//! declared tolerances (`chip::tolerances`): first-order propagation from adjoint
//! sensitivities beside Monte Carlo sampling, and where the two disagree.
//!
//! **Random inputs.** Every tolerance becomes one or more standard variables z (normal N(0,1),
//! or uniform on [−1, 1]); an item of a correlation group shares its group's z, an ungrouped
//! section dimension has one z per channel that uses the section. A dimension, length, drive
//! or viscosity then moves by a·z, with a = tolerance/k (normal, tolerance = ± k·σ) or
//! a = tolerance (uniform).
//!
//! **First order.** For each reported quantity J (a channel flow, a split share, a channel's
//! largest wall shear), dJ/dz_j = Σ a·dJ/dx over the items driven by z_j, with dJ/dx from the
//! adjoint of the Kirchhoff system (one adjoint solve per quantity, see
//! `design::adjoint`): dJ/dg_m = ∂J/∂g_m − (P_i − P_j)(λ_i − λ_j), carried to the dimensions
//! by g = K/(μL) and d ln K/dx of the section; drives by one forward solve per toleranced
//! port (the state is linear in the drives). Var J = Σ_j (dJ/dz_j)²·Var z_j; the share of
//! variance of z_j is its term over the sum.
//!
//! **Monte Carlo.** Sample i draws its z from a counter-based generator keyed by (seed, i,
//! variable) ([`rng`]), so results depend neither on the thread count nor on the shard; each
//! sample sets the conductances and drives, factorises on the one symbolic analysis and
//! solves through the balance-checked [`Factor::solve`] (a refused sample is counted as
//! withheld and as failing the yield). Closed-form sections are re-evaluated per sample;
//! numerically solved sections (FEM) are not re-solved: their ln K is taken linear in each
//! toleranced dimension, with the slope from converged solves
//! (`design::dlog_resistance_numeric`), and their τ_max/G is kept at its nominal value.
//! Statistics stream into exactly mergeable accumulators ([`stats`]): memory does not grow
//! with the number of samples.
//!
//! **Agreement.** For each quantity the Monte Carlo standard deviation s (n samples) and the
//! linear σ_L are flagged as disagreeing when |s − σ_L| > 3·s/√(2(n − 1)) + 1e-9·|J₀| (the
//! normal-theory standard error of a sample standard deviation, three times; common practice),
//! or when the Monte Carlo mean misses the nominal value by more than 3·s/√n + 1e-9·|J₀| (a
//! mean shift the linearisation cannot have).

pub mod rng;
pub mod stats;

use super::design::{dimension, dlog_resistance, dlog_resistance_numeric, with_dimension};
use super::kirchhoff::{conductances, drive_values, Factor, FlowSolution, SolveError, Solver};
use crate::chip::design::{Design, ShearMeasure, TargetKind, Tolerance as TargetTolerance};
use crate::chip::tolerances::{Amount, Dim, Distribution, Toleranced, Tolerances};
use crate::network::{ChannelId, Network, NodeId, Port};
use crate::section::{rectangle_k_and_shear, Shape};
use rayon::prelude::*;
use stats::Accumulator;

/// The reference pressure [Pa] of a pressure target of 0 Pa: the same 100 Pa as the design
/// commands' target scale, so verdicts agree with `check`/`tune`.
const PRESSURE_REF: f64 = 100.0;

/// Largest number of samples of one run.
pub const MAX_SAMPLES: u64 = 1 << 40;

/// A standard random variable of the model.
#[derive(Clone, Debug, PartialEq)]
pub struct Variable {
    /// What it stands for: `group NAME`, or the tolerance's key path (with `@ CHANNEL` for a
    /// shared section's per-channel draw).
    pub label: String,
    /// Uniform on [−1, 1] (else standard normal).
    pub uniform: bool,
}

impl Variable {
    fn variance(&self) -> f64 {
        if self.uniform {
            1.0 / 3.0
        } else {
            1.0
        }
    }
}

/// Where one variable acts, and by how much per unit z (SI).
#[derive(Clone, Copy, Debug, PartialEq)]
enum Target {
    Dim(ChannelId, Dim),
    Length(ChannelId),
    Drive(NodeId),
    Viscosity,
}

#[derive(Clone, Copy, Debug)]
struct Atom {
    variable: usize,
    target: Target,
    per_z: f64,
}

/// A reported quantity.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Quantity {
    /// A channel's flow [m³/s].
    Flow(ChannelId),
    /// A channel's share of a split target's total flow.
    Share { target: usize, channel: ChannelId },
    /// A channel's largest wall shear stress [Pa].
    MaxShear(ChannelId),
}

/// How each channel's section responds to its dimensions.
#[derive(Clone, Debug)]
enum SectionModel {
    /// Re-evaluated per sample.
    ClosedForm(Shape),
    /// ln K linear in the dimension: d ln K/d(width), d ln K/d(height) [1/m].
    Linearised { dlnk: [f64; 2] },
}

/// Everything the sampling needs, computed once: variables, what they move, the quantities,
/// their nominal values and first-order results.
#[derive(Debug)]
pub struct Prepared<'n> {
    solver: Solver<'n>,
    design: Design,
    pub variables: Vec<Variable>,
    atoms: Vec<Atom>,
    pub quantities: Vec<Quantity>,
    /// Nominal value of each quantity.
    pub nominal: Vec<f64>,
    /// dJ/dz_j per quantity (rows) and variable.
    pub gradient: Vec<Vec<f64>>,
    /// Channels with a wall-shear limit and the limit [Pa].
    pub shear_limits: Vec<(ChannelId, f64)>,
    models: Vec<SectionModel>,
    base_g: Vec<f64>,
    base_drives: Vec<f64>,
    shear_sign: Vec<f64>,
}

/// A problem preparing or running a spread.
#[derive(Debug, thiserror::Error)]
pub enum SpreadError {
    #[error("the chip declares no tolerance; add e.g. 'tolerance: {{width: 2 um}}' to a section")]
    NoTolerances,
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error("section of channel '{channel}': {message}")]
    Section { channel: String, message: String },
    #[error(
        "spread does not judge concentration targets yet (target on channel '{channel}'); \
         run spread on a copy of the chip without them"
    )]
    ConcentrationTarget { channel: String },
}

impl<'n> Prepared<'n> {
    /// Build the model for `network` with its `design` (targets, for the reported channels,
    /// splits and verdicts) and `tolerances`.
    pub fn new(
        network: &'n Network,
        design: &Design,
        tolerances: &Tolerances,
    ) -> Result<Self, SpreadError> {
        if tolerances.is_empty() {
            return Err(SpreadError::NoTolerances);
        }
        if let Some(TargetKind::Concentration { channel, .. }) = (design.targets.iter())
            .map(|t| &t.kind)
            .find(|k| matches!(k, TargetKind::Concentration { .. }))
        {
            return Err(SpreadError::ConcentrationTarget {
                channel: network.channels[*channel].name.clone(),
            });
        }
        let solver = Solver::new(network)?;
        let (variables, atoms) = variables(network, tolerances);
        let models = section_models(network, tolerances)?;
        let mut quantities: Vec<Quantity> = Vec::new();
        let targets = design.target_channels();
        let flows: Vec<ChannelId> = if targets.is_empty() {
            (0..network.channels.len()).map(ChannelId).collect()
        } else {
            targets
        };
        quantities.extend(flows.iter().map(|&c| Quantity::Flow(c)));
        for (t, target) in design.targets.iter().enumerate() {
            if let TargetKind::Split { channels, .. } = &target.kind {
                quantities.extend(
                    channels
                        .iter()
                        .map(|&channel| Quantity::Share { target: t, channel }),
                );
            }
        }
        let shear_limits: Vec<(ChannelId, f64)> = (network.channels.iter().enumerate())
            .filter_map(|(k, c)| {
                c.shear_limit
                    .or(network.fluid.shear_limit)
                    .map(|l| (ChannelId(k), l.si()))
            })
            .collect();
        quantities.extend(shear_limits.iter().map(|&(c, _)| Quantity::MaxShear(c)));
        let base_g = conductances(network);
        let base_drives = drive_values(network);
        let mut p = Prepared {
            design: design.clone(),
            variables,
            atoms,
            nominal: Vec::new(),
            gradient: Vec::new(),
            shear_limits,
            models,
            base_g,
            base_drives,
            shear_sign: Vec::new(),
            quantities,
            solver,
        };
        let state = p
            .solver
            .factorize(p.base_g.clone())?
            .solve(&p.base_drives)?;
        p.shear_sign = (state.flows.iter())
            .map(|&q| if q < 0.0 { -1.0 } else { 1.0 })
            .collect();
        p.nominal = p
            .quantities
            .iter()
            .map(|q| p.value(q, &state, None))
            .collect();
        let factor = p.solver.factorize(p.base_g.clone())?;
        let gradient = p.first_order(&factor, &state)?;
        p.gradient = gradient;
        Ok(p)
    }

    fn network(&self) -> &'n Network {
        self.solver.network()
    }

    /// τ_max/G of a channel's section [m].
    fn shear_factor(&self, c: ChannelId) -> f64 {
        self.network()
            .section_of(c)
            .figures
            .max_wall_shear_per_gradient
    }

    /// The value of a quantity in a solved state; `per_channel` holds the sample's
    /// (τ_max/G, length) per channel when they differ from the network's.
    fn value(&self, q: &Quantity, s: &FlowSolution, per_channel: Option<&[(f64, f64)]>) -> f64 {
        let net = self.network();
        match *q {
            Quantity::Flow(c) => s.flows[c.0],
            Quantity::Share { target, channel } => {
                let TargetKind::Split { channels, .. } = &self.design.targets[target].kind else {
                    return f64::NAN;
                };
                let total: f64 = channels.iter().map(|c| s.flows[c.0]).sum();
                s.flows[channel.0] / total
            }
            Quantity::MaxShear(c) => {
                let ch = &net.channels[c];
                let (factor, length) =
                    per_channel.map_or_else(|| (self.shear_factor(c), ch.length.si()), |p| p[c.0]);
                factor * (s.pressures[ch.from.0] - s.pressures[ch.to.0]).abs() / length
            }
        }
    }

    /// dJ/dz_j for every quantity and variable (see the module documentation).
    fn first_order(
        &self,
        factor: &Factor<'_>,
        state: &FlowSolution,
    ) -> Result<Vec<Vec<f64>>, SpreadError> {
        let net = self.network();
        let g = factor.conductances();
        let mu = net.fluid.viscosity.si();
        // Adjoint right-hand sides ∂J/∂p and explicit ∂J/∂g per quantity.
        let mut rhs = Vec::with_capacity(self.quantities.len());
        let mut explicit_g: Vec<Vec<(usize, f64)>> = Vec::new();
        for q in &self.quantities {
            let mut col = vec![0.0; net.nodes.len()];
            let mut ex = Vec::new();
            let mut flow = |k: usize, c: f64, col: &mut Vec<f64>| {
                let ch = &net.channels[ChannelId(k)];
                col[ch.from.0] += c * g[k];
                col[ch.to.0] -= c * g[k];
                ex.push((
                    k,
                    c * (state.pressures[ch.from.0] - state.pressures[ch.to.0]),
                ));
            };
            match *q {
                Quantity::Flow(c) => flow(c.0, 1.0, &mut col),
                Quantity::Share { target, channel } => {
                    if let TargetKind::Split { channels, .. } = &self.design.targets[target].kind {
                        let total: f64 = channels.iter().map(|c| state.flows[c.0]).sum();
                        let share = state.flows[channel.0] / total;
                        for c in channels {
                            let own = if *c == channel { 1.0 } else { 0.0 };
                            flow(c.0, (own - share) / total, &mut col);
                        }
                    }
                }
                Quantity::MaxShear(c) => {
                    let ch = &net.channels[c];
                    let a = self.shear_sign[c.0] * self.shear_factor(c) / ch.length.si();
                    col[ch.from.0] += a;
                    col[ch.to.0] -= a;
                }
            }
            rhs.push(col);
            explicit_g.push(ex);
        }
        let adjoints = factor.solve_adjoint(&rhs)?;
        // Drive responses: one forward solve per toleranced port.
        let driven: Vec<NodeId> = (self.atoms.iter())
            .filter_map(|a| match a.target {
                Target::Drive(n) => Some(n),
                _ => None,
            })
            .collect();
        let unit_sets: Vec<Vec<f64>> = driven
            .iter()
            .map(|n| {
                let mut d = vec![0.0; net.nodes.len()];
                d[n.0] = 1.0;
                d
            })
            .collect();
        let responses = if unit_sets.is_empty() {
            Vec::new()
        } else {
            factor.solve_many(&unit_sets)?
        };
        let mut out = Vec::with_capacity(self.quantities.len());
        for (qi, q) in self.quantities.iter().enumerate() {
            let lambda = &adjoints[qi].lambda;
            let dj_dg = |m: usize| {
                let ch = &net.channels[ChannelId(m)];
                let dp = state.pressures[ch.from.0] - state.pressures[ch.to.0];
                let ex: f64 = explicit_g[qi]
                    .iter()
                    .filter(|(k, _)| *k == m)
                    .map(|(_, v)| v)
                    .sum();
                ex - dp * (lambda[ch.from.0] - lambda[ch.to.0])
            };
            let own_shear = match *q {
                Quantity::MaxShear(c) => Some((c, self.nominal[qi])),
                _ => None,
            };
            let mut row = vec![0.0; self.variables.len()];
            for a in &self.atoms {
                let d = match a.target {
                    Target::Dim(m, dim) => {
                        let dlnk = self.dlnk(m, dim);
                        let mut d = dj_dg(m.0) * g[m.0] * dlnk;
                        if let Some((c, tau)) = own_shear {
                            if c == m {
                                d += tau * self.dln_shear_factor(m, dim);
                            }
                        }
                        d
                    }
                    Target::Length(m) => {
                        let l = net.channels[m].length.si();
                        let mut d = -dj_dg(m.0) * g[m.0] / l;
                        if let Some((c, tau)) = own_shear {
                            if c == m {
                                d -= tau / l;
                            }
                        }
                        d
                    }
                    Target::Viscosity => {
                        -(0..net.channels.len())
                            .map(|m| dj_dg(m) * g[m])
                            .sum::<f64>()
                            / mu
                    }
                    Target::Drive(n) => {
                        let k = driven.iter().position(|d| *d == n).unwrap_or(0);
                        self.drive_response(q, &responses[k], state)
                    }
                };
                row[a.variable] += a.per_z * d;
            }
            out.push(row);
        }
        Ok(out)
    }

    /// dJ/d(drive) from the state's response to a unit drive (the state is linear in the
    /// drives; the quantities are linearised about the nominal `state`).
    fn drive_response(&self, q: &Quantity, r: &FlowSolution, state: &FlowSolution) -> f64 {
        let net = self.network();
        match *q {
            Quantity::Flow(c) => r.flows[c.0],
            Quantity::Share { target, channel } => {
                let TargetKind::Split { channels, .. } = &self.design.targets[target].kind else {
                    return 0.0;
                };
                let total: f64 = channels.iter().map(|c| state.flows[c.0]).sum();
                let dsum: f64 = channels.iter().map(|c| r.flows[c.0]).sum();
                let share = state.flows[channel.0] / total;
                (r.flows[channel.0] - share * dsum) / total
            }
            Quantity::MaxShear(c) => {
                let ch = &net.channels[c];
                self.shear_sign[c.0] * self.shear_factor(c) / ch.length.si()
                    * (r.pressures[ch.from.0] - r.pressures[ch.to.0])
            }
        }
    }

    /// d ln K/dx of a channel's section [1/m] (= −d ln R'/dx).
    fn dlnk(&self, m: ChannelId, dim: Dim) -> f64 {
        match &self.models[m.0] {
            SectionModel::ClosedForm(shape) => {
                dlog_resistance(shape, dim.name()).map_or(0.0, |d| -d)
            }
            SectionModel::Linearised { dlnk } => dlnk[dim as usize],
        }
    }

    /// d ln(τ_max/G)/dx of a closed-form section [1/m] (0 for linearised sections).
    fn dln_shear_factor(&self, m: ChannelId, dim: Dim) -> f64 {
        let SectionModel::ClosedForm(shape) = &self.models[m.0] else {
            return 0.0;
        };
        let Some(v) = dimension(shape, dim.name()) else {
            return 0.0;
        };
        let h = 1e-5 * v;
        let f = |x: f64| {
            with_dimension(shape, dim.name(), x)
                .and_then(|s| s.analytic_figures())
                .map(|f| f.max_wall_shear_per_gradient.ln())
        };
        match (f(v + h), f(v - h)) {
            (Some(a), Some(b)) => (a - b) / (2.0 * h),
            _ => 0.0,
        }
    }

    /// First-order standard deviation of quantity `qi`.
    pub fn std_linear(&self, qi: usize) -> f64 {
        self.gradient[qi]
            .iter()
            .zip(&self.variables)
            .map(|(d, v)| d * d * v.variance())
            .sum::<f64>()
            .sqrt()
    }

    /// Shares of the first-order variance of quantity `qi` per variable, largest first
    /// (ties in variable order), at most `top` of them, zero shares left out.
    pub fn contributions(&self, qi: usize, top: usize) -> Vec<(usize, f64)> {
        let terms: Vec<f64> = (self.gradient[qi].iter().zip(&self.variables))
            .map(|(d, v)| d * d * v.variance())
            .collect();
        let total: f64 = terms.iter().sum();
        if total.is_nan() || total <= 0.0 {
            return Vec::new();
        }
        let mut ranked: Vec<(usize, f64)> = terms
            .iter()
            .enumerate()
            .filter(|(_, t)| **t > 0.0)
            .map(|(j, t)| (j, t / total))
            .collect();
        ranked.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        ranked.truncate(top);
        ranked
    }
}

/// The random variables and what each moves.
fn variables(network: &Network, tolerances: &Tolerances) -> (Vec<Variable>, Vec<Atom>) {
    let mut vars: Vec<Variable> = Vec::new();
    let mut groups: Vec<(String, usize)> = Vec::new();
    let mut atoms = Vec::new();
    for t in &tolerances.items {
        let uniform = t.distribution == Distribution::Uniform;
        let per_tolerance = match t.distribution {
            Distribution::Normal { sigmas } => 1.0 / sigmas,
            Distribution::Uniform => 1.0,
        };
        let amount = |nominal: f64| match t.amount {
            Amount::Absolute(a) => a,
            Amount::Relative(r) => r * nominal.abs(),
        } * per_tolerance;
        let mut variable = |label: String| -> usize {
            if let Some(g) = &t.group {
                if let Some((_, j)) = groups.iter().find(|(n, _)| n == g) {
                    return *j;
                }
                groups.push((g.clone(), vars.len()));
                vars.push(Variable {
                    label: format!("group {g}"),
                    uniform,
                });
                return vars.len() - 1;
            }
            vars.push(Variable { label, uniform });
            vars.len() - 1
        };
        match t.what {
            Toleranced::SectionDim { section, dim } => {
                let shape = &network.sections[section].shape;
                let nominal = dimension(shape, dim.name()).unwrap_or(0.0);
                let users: Vec<usize> = (network.channels.iter().enumerate())
                    .filter(|(_, c)| c.section == section)
                    .map(|(k, _)| k)
                    .collect();
                let shared = users.len() > 1;
                for k in users {
                    let label = if shared {
                        format!("{} @ {}", t.label, network.channels[ChannelId(k)].name)
                    } else {
                        t.label.clone()
                    };
                    atoms.push(Atom {
                        variable: variable(label),
                        target: Target::Dim(ChannelId(k), dim),
                        per_z: amount(nominal),
                    });
                }
            }
            Toleranced::Length { channel } => atoms.push(Atom {
                variable: variable(t.label.clone()),
                target: Target::Length(channel),
                per_z: amount(network.channels[channel].length.si()),
            }),
            Toleranced::Drive { node } => {
                let nominal = match network.nodes[node].port {
                    Port::Pressure(p) => p.si(),
                    Port::Flow(q) => q.si(),
                    Port::Junction => 0.0,
                };
                atoms.push(Atom {
                    variable: variable(t.label.clone()),
                    target: Target::Drive(node),
                    per_z: amount(nominal),
                });
            }
            Toleranced::Viscosity => atoms.push(Atom {
                variable: variable(t.label.clone()),
                target: Target::Viscosity,
                per_z: amount(network.fluid.viscosity.si()),
            }),
        }
    }
    (vars, atoms)
}

/// Each channel's section model: closed forms as they are; numerically solved sections
/// linearised in each toleranced dimension from converged solves (once per section).
fn section_models(
    network: &Network,
    tolerances: &Tolerances,
) -> Result<Vec<SectionModel>, SpreadError> {
    let toleranced = |section, dim| {
        tolerances
            .items
            .iter()
            .any(|t| t.what == Toleranced::SectionDim { section, dim })
    };
    let mut per_section: Vec<Option<SectionModel>> = vec![None; network.sections.len()];
    let mut out = Vec::with_capacity(network.channels.len());
    for c in network.channels.iter() {
        let s = c.section.0;
        if per_section[s].is_none() {
            let shape = &network.sections[c.section].shape;
            per_section[s] = Some(if shape.analytic_figures().is_some() {
                SectionModel::ClosedForm(shape.clone())
            } else {
                let mut dlnk = [0.0; 2];
                for (i, dim) in [Dim::Width, Dim::Height].into_iter().enumerate() {
                    if !toleranced(c.section, dim) {
                        continue;
                    }
                    let d = dlog_resistance_numeric(shape, dim.name(), network.section_tolerance)
                        .map_err(|e| SpreadError::Section {
                        channel: c.name.clone(),
                        message: e.to_string(),
                    })?;
                    dlnk[i] = d.map_or(0.0, |d| -d.value);
                }
                SectionModel::Linearised { dlnk }
            });
        }
        out.push(
            per_section[s]
                .clone()
                .unwrap_or(SectionModel::Linearised { dlnk: [0.0, 0.0] }),
        );
    }
    Ok(out)
}

/// Which samples a run covers: shard `index` (1-based) of `count` takes the global sample
/// indices ⌊(index − 1)·N/count⌋ .. ⌊index·N/count⌋.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    pub index: u64,
    pub count: u64,
}

impl Shard {
    pub const WHOLE: Shard = Shard { index: 1, count: 1 };

    /// The global sample indices of this shard out of `samples`.
    pub fn range(self, samples: u64) -> std::ops::Range<u64> {
        let at = |i: u64| (u128::from(i) * u128::from(samples) / u128::from(self.count)) as u64;
        at(self.index - 1)..at(self.index)
    }
}

/// What one Monte Carlo run (or shard) accumulated; merging the shards of one run gives the
/// run's own state exactly.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct McState {
    /// Samples drawn.
    pub samples: u64,
    /// Samples the checked solve refused (or with a dimension drawn at or below zero).
    pub withheld: u64,
    /// The smallest global index of a withheld sample and why.
    pub first_withheld: Option<(u64, String)>,
    /// One accumulator per quantity.
    pub quantities: Vec<Accumulator>,
    /// Samples missing each target by more than its tolerance (per design target).
    pub target_misses: Vec<u64>,
    /// Samples over each shear limit (per `Prepared::shear_limits` entry).
    pub shear_exceeded: Vec<u64>,
    /// Samples with a static pressure above the rating at some node.
    pub rating_exceeded: u64,
    /// Samples meeting every target and limit.
    pub good: u64,
}

impl McState {
    fn empty(p: &Prepared<'_>) -> McState {
        McState {
            quantities: vec![Accumulator::default(); p.quantities.len()],
            target_misses: vec![0; p.design.targets.len()],
            shear_exceeded: vec![0; p.shear_limits.len()],
            ..Default::default()
        }
    }

    /// Combine with the state of other samples of the same model.
    pub fn merge(mut self, o: McState) -> McState {
        self.samples += o.samples;
        self.withheld += o.withheld;
        self.first_withheld = match (self.first_withheld, o.first_withheld) {
            (Some(a), Some(b)) => Some(if a.0 <= b.0 { a } else { b }),
            (a, b) => a.or(b),
        };
        for (a, b) in self.quantities.iter_mut().zip(o.quantities) {
            a.absorb(b);
        }
        for (a, b) in self.target_misses.iter_mut().zip(&o.target_misses) {
            *a += b;
        }
        for (a, b) in self.shear_exceeded.iter_mut().zip(&o.shear_exceeded) {
            *a += b;
        }
        self.rating_exceeded += o.rating_exceeded;
        self.good += o.good;
        self
    }

    /// Whether this state has the shape of `p`'s model (for merging shard files).
    pub fn fits(&self, p: &Prepared<'_>) -> bool {
        self.quantities.len() == p.quantities.len()
            && self.target_misses.len() == p.design.targets.len()
            && self.shear_exceeded.len() == p.shear_limits.len()
    }
}

/// One sample's outcome.
enum Sample {
    Withheld(String),
    Solved {
        values: Vec<f64>,
        misses: Vec<bool>,
        shear_over: Vec<bool>,
        rating_over: bool,
    },
}

/// Samples whose values wait before they go into the histograms (512: the buckets a quantity
/// crossing zero fills, some thousands, are each visited several times per flush).
const BLOCK: usize = 512;

/// The values of up to [`BLOCK`] samples, quantity by quantity, so that each quantity's
/// buckets are visited in one run per block rather than once per sample (they stay in cache;
/// the order of adds does not change the integer counts and sums).
struct Pending {
    /// values[q·BLOCK + b]: quantity q of buffered sample b.
    values: Vec<f64>,
    filled: usize,
}

impl Pending {
    fn new(quantities: usize) -> Pending {
        Pending {
            values: vec![0.0; quantities * BLOCK],
            filled: 0,
        }
    }

    fn push(&mut self, values: &[f64]) {
        for (qi, v) in values.iter().enumerate() {
            self.values[qi * BLOCK + self.filled] = *v;
        }
        self.filled += 1;
    }

    fn flush(&mut self, st: &mut McState, binnings: &[stats::Binning]) {
        for (qi, (acc, b)) in st.quantities.iter_mut().zip(binnings).enumerate() {
            for v in &self.values[qi * BLOCK..qi * BLOCK + self.filled] {
                acc.add(*v, b);
            }
        }
        self.filled = 0;
    }
}

impl Prepared<'_> {
    /// Run the samples of `shard` out of `samples` with `seed`, in parallel (rayon).
    pub fn monte_carlo(&self, samples: u64, seed: u64, shard: Shard) -> McState {
        let binnings: Vec<stats::Binning> = (0..self.quantities.len())
            .map(|qi| stats::Binning::new(self.nominal[qi], self.std_linear(qi)))
            .collect();
        let range = shard.range(samples);
        // One contiguous part per thread, each accumulated in one state (its histograms are
        // sized by the model when their first value arrives, not by the samples); the result
        // does not depend on the parts (exact merges).
        let parts = (rayon::current_num_threads() as u64).max(1);
        let len = range.end - range.start;
        let at =
            |k: u64| range.start + (u128::from(k) * u128::from(len) / u128::from(parts)) as u64;
        (0..parts)
            .into_par_iter()
            .map(|k| {
                let mut st = McState::empty(self);
                let mut pending = Pending::new(self.quantities.len());
                for i in at(k)..at(k + 1) {
                    self.add_sample(&mut st, &mut pending, seed, i);
                    if pending.filled == BLOCK {
                        pending.flush(&mut st, &binnings);
                    }
                }
                pending.flush(&mut st, &binnings);
                st
            })
            .reduce(|| McState::empty(self), McState::merge)
    }

    /// Draw, solve and judge sample `i`, and add it to `st`.
    fn add_sample(&self, st: &mut McState, pending: &mut Pending, seed: u64, i: u64) {
        st.samples += 1;
        match self.sample(seed, i) {
            Sample::Withheld(why) => {
                st.withheld += 1;
                if st.first_withheld.as_ref().is_none_or(|(j, _)| i < *j) {
                    st.first_withheld = Some((i, why));
                }
            }
            Sample::Solved {
                values,
                misses,
                shear_over,
                rating_over,
            } => {
                pending.push(&values);
                for (t, m) in misses.iter().enumerate() {
                    st.target_misses[t] += u64::from(*m);
                }
                for (k, o) in shear_over.iter().enumerate() {
                    st.shear_exceeded[k] += u64::from(*o);
                }
                st.rating_exceeded += u64::from(rating_over);
                let good =
                    !misses.iter().any(|m| *m) && !shear_over.iter().any(|o| *o) && !rating_over;
                st.good += u64::from(good);
            }
        }
    }

    /// The standard variables of global sample `i`.
    /// Normal variable j is output j mod 2 of Box–Muller pair j/2 ([`rng::normal_pair_keyed`]);
    /// uniform variable j is the uniform (j, 0).
    pub fn draw(&self, seed: u64, i: u64) -> Vec<f64> {
        let key = rng::sample_key(seed, i);
        let mut z = Vec::with_capacity(self.variables.len());
        for (p, pair) in self.variables.chunks(2).enumerate() {
            let normals = if pair.iter().any(|v| !v.uniform) {
                let (a, b) = rng::normal_pair_keyed(key, p as u64);
                [a, b]
            } else {
                [0.0; 2]
            };
            for (k, v) in pair.iter().enumerate() {
                z.push(if v.uniform {
                    2.0 * rng::uniform_keyed(key, (2 * p + k) as u64, 0) - 1.0
                } else {
                    normals[k]
                });
            }
        }
        z
    }

    /// Draw, solve and judge one sample.
    fn sample(&self, seed: u64, i: u64) -> Sample {
        let net = self.network();
        let z = self.draw(seed, i);
        let n_ch = net.channels.len();
        let mut ddim = vec![[0.0f64; 2]; n_ch];
        let mut dlen = vec![0.0f64; n_ch];
        let mut drives = self.base_drives.clone();
        let mut dmu = 0.0;
        for a in &self.atoms {
            let d = a.per_z * z[a.variable];
            match a.target {
                Target::Dim(c, dim) => ddim[c.0][dim as usize] += d,
                Target::Length(c) => dlen[c.0] += d,
                Target::Drive(n) => drives[n.0] += d,
                Target::Viscosity => dmu += d,
            }
        }
        let mu0 = net.fluid.viscosity.si();
        let mu = mu0 + dmu;
        if mu.is_nan() || mu <= 0.0 {
            return Sample::Withheld("viscosity drawn at or below zero".into());
        }
        let mut g = self.base_g.clone();
        let mut per_channel: Vec<(f64, f64)> = Vec::with_capacity(n_ch);
        // The last rectangle evaluated per section: channels of a section drawn with the
        // same width and height (a group draw) share one series evaluation.
        let mut last: Vec<Option<[f64; 4]>> = vec![None; net.sections.len()];
        for (k, ch) in net.channels.iter().enumerate() {
            let l0 = ch.length.si();
            let length = l0 + dlen[k];
            let fig = &net.sections[ch.section].figures;
            let mut factor = fig.max_wall_shear_per_gradient;
            let mut kf = fig.conductance_factor;
            if ddim[k] != [0.0, 0.0] {
                match &self.models[k] {
                    SectionModel::ClosedForm(Shape::Rectangle { width, height }) => {
                        let w = width.si() + ddim[k][Dim::Width as usize];
                        let h = height.si() + ddim[k][Dim::Height as usize];
                        for (v, dim) in [(w, Dim::Width), (h, Dim::Height)] {
                            if v.is_nan() || v <= 0.0 {
                                return Sample::Withheld(format!(
                                    "the {} of channel '{}' drawn at or below zero",
                                    dim.name(),
                                    ch.name
                                ));
                            }
                        }
                        let slot = &mut last[ch.section.0];
                        let [_, _, kk, ff] = match *slot {
                            Some(e) if e[0] == w && e[1] == h => e,
                            _ => {
                                let (kk, ff) = rectangle_k_and_shear(w, h);
                                let e = [w, h, kk, ff];
                                *slot = Some(e);
                                e
                            }
                        };
                        if !(kk > 0.0 && kk.is_finite()) {
                            return Sample::Withheld(format!(
                                "the section of channel '{}' has no valid figures",
                                ch.name
                            ));
                        }
                        kf = kk;
                        factor = ff;
                    }
                    SectionModel::ClosedForm(shape) => {
                        let mut s = shape.clone();
                        for dim in [Dim::Width, Dim::Height] {
                            let d = ddim[k][dim as usize];
                            if d == 0.0 {
                                continue;
                            }
                            let v = dimension(&s, dim.name()).unwrap_or(0.0) + d;
                            if v.is_nan() || v <= 0.0 {
                                return Sample::Withheld(format!(
                                    "the {} of channel '{}' drawn at or below zero",
                                    dim.name(),
                                    ch.name
                                ));
                            }
                            s = with_dimension(&s, dim.name(), v).unwrap_or(s);
                        }
                        match s.analytic_figures() {
                            Some(f) if f.conductance_factor > 0.0 => {
                                kf = f.conductance_factor;
                                factor = f.max_wall_shear_per_gradient;
                            }
                            _ => {
                                return Sample::Withheld(format!(
                                    "the section of channel '{}' has no valid figures",
                                    ch.name
                                ))
                            }
                        }
                    }
                    SectionModel::Linearised { dlnk } => {
                        kf *= (dlnk[0] * ddim[k][0] + dlnk[1] * ddim[k][1]).exp();
                    }
                }
            }
            if length.is_nan() || length <= 0.0 {
                return Sample::Withheld(format!(
                    "the length of channel '{}' drawn at or below zero",
                    ch.name
                ));
            }
            if dlen[k] != 0.0 || ddim[k] != [0.0, 0.0] || dmu != 0.0 {
                g[k] = kf / (mu * length);
            }
            per_channel.push((factor, length));
        }
        let solution = match self.solver.factorize(g).and_then(|f| f.solve(&drives)) {
            Ok(s) => s,
            Err(e) => return Sample::Withheld(e.to_string()),
        };
        let values: Vec<f64> = (self.quantities.iter())
            .map(|q| self.value(q, &solution, Some(&per_channel)))
            .collect();
        let misses = self.misses(&solution, &per_channel);
        let shear_over = (self.shear_limits.iter())
            .map(|&(c, limit)| {
                let ch = &net.channels[c];
                let (f, l) = per_channel[c.0];
                f * (solution.pressures[ch.from.0] - solution.pressures[ch.to.0]).abs() / l > limit
            })
            .collect();
        let rating_over = net.pressure_rating.is_some_and(|r| {
            (solution.pressures.iter().enumerate())
                .any(|(n, &p)| net.static_pressure(NodeId(n), p).abs() > r.si())
        });
        Sample::Solved {
            values,
            misses,
            shear_over,
            rating_over,
        }
    }

    /// Whether each design target misses by more than its tolerance in a sample (the rules
    /// of `design::evaluate`, with the sample's own section figures for wall shear).
    fn misses(&self, s: &FlowSolution, per_channel: &[(f64, f64)]) -> Vec<bool> {
        let net = self.network();
        let within = |reached: f64, wanted: f64, scale: f64, tol: TargetTolerance| match tol {
            TargetTolerance::Relative(t) => (reached - wanted).abs() <= t * scale,
            TargetTolerance::Absolute(a) => (reached - wanted).abs() <= a,
        };
        self.design
            .targets
            .iter()
            .map(|t| {
                let met = match &t.kind {
                    TargetKind::ChannelFlow { channel, flow } => {
                        within(s.flows[channel.0], *flow, flow.abs(), t.tolerance)
                    }
                    TargetKind::NodePressure { node, pressure } => within(
                        s.pressures[node.0],
                        *pressure,
                        pressure.abs().max(PRESSURE_REF),
                        t.tolerance,
                    ),
                    TargetKind::Split { channels, ratio } => {
                        let total: f64 = channels.iter().map(|c| s.flows[c.0]).sum();
                        let rsum: f64 = ratio.iter().sum();
                        channels.iter().zip(ratio).all(|(c, r)| {
                            let want = r / rsum;
                            within(s.flows[c.0] / total, want, want.abs(), t.tolerance)
                        })
                    }
                    TargetKind::WallShear {
                        channel,
                        shear,
                        measure,
                    } => {
                        let ch = &net.channels[*channel];
                        let (f, l) = per_channel[channel.0];
                        let dp = (s.pressures[ch.from.0] - s.pressures[ch.to.0]).abs();
                        let tau = match measure {
                            ShearMeasure::Max => f * dp / l,
                            // A/P of the nominal section (its change is second order
                            // beside that of Δp/L; common practice).
                            ShearMeasure::Mean => {
                                net.section_of(*channel)
                                    .figures
                                    .mean_wall_shear_per_gradient()
                                    * dp
                                    / l
                            }
                        };
                        within(tau, *shear, shear.abs(), t.tolerance)
                    }
                    // Refused in `Prepared::new`: never judged here.
                    TargetKind::Concentration { .. } => true,
                };
                !met
            })
            .collect()
    }
}

/// Statistics of one quantity from both methods.
#[derive(Clone, Debug, PartialEq)]
pub struct Stat {
    pub quantity: Quantity,
    pub nominal: f64,
    pub mean: f64,
    pub std: f64,
    pub std_linear: f64,
    pub p05: f64,
    pub p95: f64,
    /// Whether Monte Carlo and first order agree within the sampling error (see the module
    /// documentation): both `std_agrees` and `mean_agrees`.
    pub agree: bool,
    /// The standard deviations agree.
    pub std_agrees: bool,
    /// The Monte Carlo mean is the nominal value within its sampling error.
    pub mean_agrees: bool,
    /// Shares of the first-order variance: (variable index, share), largest first.
    pub contributions: Vec<(usize, f64)>,
    /// For each listed contribution, the first-order change of the quantity with its variable
    /// one standard deviation high (dJ/dz·sd z; its square over the variance is the share).
    pub effects: Vec<f64>,
}

/// The answers of a spread run.
#[derive(Clone, Debug, PartialEq)]
pub struct SpreadResult {
    pub variables: Vec<Variable>,
    pub stats: Vec<Stat>,
    /// Probability of missing each design target by more than its tolerance.
    pub target_miss: Vec<f64>,
    /// Per shear-limited channel: (channel, limit [Pa], probability of exceeding it).
    pub shear_exceed: Vec<(ChannelId, f64, f64)>,
    /// (rating [Pa], probability that some node's static pressure exceeds it).
    pub rating_exceed: Option<(f64, f64)>,
    /// Fraction of all samples meeting every target and limit (withheld samples fail).
    pub yield_fraction: f64,
    pub samples: u64,
    pub withheld: u64,
    pub first_withheld: Option<(u64, String)>,
    pub seed: u64,
    pub shard: Shard,
    /// Samples of the whole run (all shards).
    pub total_samples: u64,
    /// Channels whose numerically solved section is linearised in a toleranced dimension
    /// (not re-solved per sample; see the module documentation).
    pub linearised: Vec<ChannelId>,
    /// The raw accumulated state, for merging shards.
    pub state: McState,
}

/// Variance contributions listed per quantity.
pub const TOP_CONTRIBUTIONS: usize = 10;

impl Prepared<'_> {
    /// The answers from an accumulated state.
    pub fn finish(&self, state: McState, seed: u64, shard: Shard, total: u64) -> SpreadResult {
        let valid = state.samples - state.withheld;
        let frac = |k: u64| {
            if valid == 0 {
                f64::NAN
            } else {
                k as f64 / valid as f64
            }
        };
        let stats = (self.quantities.iter().enumerate())
            .map(|(qi, &quantity)| {
                let acc = &state.quantities[qi];
                let nominal = self.nominal[qi];
                let std_linear = self.std_linear(qi);
                let scale = stats::scale_for(nominal, std_linear);
                let (mean, std) = (acc.mean(nominal, scale), acc.std(scale));
                let n = acc.count as f64;
                let floor = 1e-9 * nominal.abs();
                let std_agrees = acc.count < 2
                    || (std - std_linear).abs() <= 3.0 * std / (2.0 * (n - 1.0)).sqrt() + floor;
                let mean_agrees =
                    acc.count < 2 || (mean - nominal).abs() <= 3.0 * std / n.sqrt() + floor;
                let contributions = self.contributions(qi, TOP_CONTRIBUTIONS);
                Stat {
                    quantity,
                    nominal,
                    mean,
                    std,
                    std_linear,
                    p05: acc.quantile(0.05),
                    p95: acc.quantile(0.95),
                    agree: std_agrees && mean_agrees,
                    std_agrees,
                    mean_agrees,
                    effects: (contributions.iter())
                        .map(|&(j, _)| self.gradient[qi][j] * self.variables[j].variance().sqrt())
                        .collect(),
                    contributions,
                }
            })
            .collect();
        SpreadResult {
            variables: self.variables.clone(),
            stats,
            target_miss: state.target_misses.iter().map(|&k| frac(k)).collect(),
            shear_exceed: (self.shear_limits.iter().zip(&state.shear_exceeded))
                .map(|(&(c, l), &k)| (c, l, frac(k)))
                .collect(),
            rating_exceed: (self.network().pressure_rating)
                .map(|r| (r.si(), frac(state.rating_exceeded))),
            yield_fraction: if state.samples == 0 {
                f64::NAN
            } else {
                state.good as f64 / state.samples as f64
            },
            samples: state.samples,
            withheld: state.withheld,
            first_withheld: state.first_withheld.clone(),
            seed,
            shard,
            total_samples: total,
            linearised: (self.models.iter().enumerate())
                .filter(
                    |(_, m)| matches!(m, SectionModel::Linearised { dlnk } if *dlnk != [0.0, 0.0]),
                )
                .map(|(k, _)| ChannelId(k))
                .collect(),
            state,
        }
    }
}

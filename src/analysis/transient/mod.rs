//! Time evolution of a network with storage: C·dP/dt = −A·P + b(t) on the Kirchhoff system.
//!
//! Unknowns: every node except pressure ports without a well (those stay imposed). A well's
//! unknown is its piezometric pressure in the platform's frame, P − ρ·g·Δz(t) when the
//! platform tilts; its level is (P − p_gas)/(ρ·g). Storage per unknown is
//! [`Storage`]'s compliance: A/(ρ·g) for a well, V/p_abs for trapped gas (linearised about the
//! initial state), the given value for a compliance, 0 elsewhere (an algebraic unknown: the
//! system is a DAE of index 1). Integrated by TR-BDF2 ([`integrator`]).
//!
//! Drives in time: a flow port or pressure port switched on at t₀ (off before: flow 0, or
//! the pressure its elevation gives), a port's setting following a piecewise-linear profile
//! (a ramp or a schedule; steps land on its corners), and a rocking platform: angle θ(t) = θ₀·sin(2πt/T),
//! each node with an arm (its horizontal distance from the rocking axis) rising by
//! Δz = arm·sin θ(t).

pub mod events;
pub mod integrator;

use crate::analysis::kirchhoff::{conductances, drive_values, KirchhoffSystem};
use crate::network::{Network, NodeId, Port, Storage, STANDARD_ATMOSPHERE};
use integrator::{Forcing, LinearDae, Options};

pub use crate::chip::drives::{Drives, Profile, Rocking, SwitchOn};

pub use integrator::{IntegrationError, Step, Trajectory};

/// How long and how finely.
#[derive(Clone, Copy, Debug)]
pub struct Run {
    /// Duration [s].
    pub duration: f64,
    /// Output interval [s].
    pub every: f64,
    /// Relative tolerance of the time stepping.
    pub rtol: f64,
}

/// The evolution at the output instants.
#[derive(Clone, Debug)]
pub struct Evolution {
    pub times: Vec<f64>,
    /// Piezometric pressure of every node at each output [Pa].
    pub pressures: Vec<Vec<f64>>,
    /// Flow of every channel at each output [m³/s].
    pub flows: Vec<Vec<f64>>,
    /// Level of every well at each output [m] (file order of the wells).
    pub levels: Vec<(NodeId, Vec<f64>)>,
    pub steps: usize,
    pub rejected: usize,
    pub factorizations: usize,
}

/// Why an evolution could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TransientError {
    #[error(transparent)]
    Integration(#[from] IntegrationError),
    #[error(transparent)]
    Steady(#[from] crate::analysis::kirchhoff::SolveError),
    #[error("{0}")]
    Bad(String),
}

/// The assembled transient system of a network.
pub struct Model<'n> {
    network: &'n Network,
    system: KirchhoffSystem,
    g: Vec<f64>,
    a: Vec<f64>,
    diag: Vec<usize>,
    c: Vec<f64>,
    drives: Drives,
    base: Vec<f64>,
    arm: Vec<f64>,
}

impl<'n> Model<'n> {
    /// Assemble: pattern with the wells free, conductances, storage linearised at `initial`
    /// node pressures (piezometric).
    pub fn new(network: &'n Network, drives: Drives, initial: &[f64]) -> Self {
        let fixed: Vec<bool> = network
            .nodes
            .iter()
            .map(|n| {
                matches!(n.port, Port::Pressure(_)) && !matches!(n.storage, Some(Storage::Well(_)))
            })
            .collect();
        let system = KirchhoffSystem::with_fixed(network, &fixed);
        let g = conductances(network);
        let a = system.matrix_values(&g);
        let diag = (0..system.dim()).map(|u| system.diagonal_slot(u)).collect();
        let rho_g = network.specific_weight();
        let c = (0..system.dim())
            .map(|u| {
                let node = NodeId(system.node(u));
                match network.nodes[node].storage {
                    Some(Storage::Well(w)) => w.area.si() / rho_g,
                    Some(Storage::Gas { volume }) => {
                        let p = network.static_pressure(node, initial[node.0]);
                        volume.si() / (STANDARD_ATMOSPHERE + p)
                    }
                    Some(Storage::Compliance(c)) => c.si(),
                    None => 0.0,
                }
            })
            .collect();
        let mut arm = vec![0.0; network.nodes.len()];
        if let Some(r) = &drives.rocking {
            for &(n, d) in &r.arms {
                arm[n.0] = d;
            }
        }
        Model {
            network,
            system,
            g,
            a,
            diag,
            c,
            drives,
            base: drive_values(network),
            arm,
        }
    }

    /// Drive values of every node at t (piezometric for pressure ports).
    fn drives_at(&self, t: f64, before: bool) -> Vec<f64> {
        let mut d = self.base.clone();
        for s in &self.drives.switch_on {
            let off = t < s.at || (before && t == s.at);
            if off {
                d[s.node.0] = match self.network.nodes[s.node].port {
                    Port::Pressure(p) => d[s.node.0] - p.si(),
                    _ => 0.0,
                };
            }
        }
        for pr in &self.drives.profiles {
            let i = pr.node.0;
            d[i] = match self.network.nodes[pr.node].port {
                Port::Pressure(p) => d[i] - p.si() + pr.at(t),
                _ => pr.at(t),
            };
        }
        if let Some(r) = &self.drives.rocking {
            let rho_g = self.network.specific_weight();
            for (i, di) in d.iter_mut().enumerate() {
                if self.system.unknown(i).is_none() && self.arm[i] != 0.0 {
                    *di += rho_g * r.rise(self.arm[i], t);
                }
            }
        }
        d
    }

    /// Offset of each unknown: ρ·g·Δz(t) at wells on a rocking platform, else 0.
    fn offsets(&self, t: f64) -> Vec<f64> {
        let rho_g = self.network.specific_weight();
        (0..self.system.dim())
            .map(|u| {
                let i = self.system.node(u);
                match (&self.drives.rocking, self.network.nodes[NodeId(i)].storage) {
                    (Some(r), Some(Storage::Well(_))) => rho_g * r.rise(self.arm[i], t),
                    _ => 0.0,
                }
            })
            .collect()
    }

    /// Node pressures (piezometric) from the unknowns at t.
    pub fn node_pressures(&self, x: &[f64], t: f64) -> Vec<f64> {
        let e = self.offsets(t);
        let shifted: Vec<f64> = x.iter().zip(&e).map(|(a, b)| a + b).collect();
        self.system
            .node_pressures_for(&shifted, &self.drives_at(t, false))
    }

    /// Initial unknowns from node pressures.
    fn unknowns(&self, p: &[f64]) -> Vec<f64> {
        let e = self.offsets(0.0);
        (0..self.system.dim())
            .map(|u| p[self.system.node(u)] - e[u])
            .collect()
    }
}

impl Forcing for Model<'_> {
    fn rhs(&self, t: f64, before: bool, out: &mut [f64]) {
        let b = self
            .system
            .rhs_for(self.network, &self.g, &self.drives_at(t, before));
        let e = self.offsets(t);
        let mut ae = vec![0.0; e.len()];
        if e.iter().any(|v| *v != 0.0) {
            self.system.pattern().multiply(&self.a, &e, &mut ae);
        }
        for ((o, bi), aei) in out.iter_mut().zip(&b).zip(&ae) {
            *o = bi - aei;
        }
    }

    fn breakpoints(&self) -> Vec<f64> {
        let mut b: Vec<f64> = self.drives.switch_on.iter().map(|s| s.at).collect();
        for p in &self.drives.profiles {
            b.extend(p.points.iter().map(|&(t, _)| t));
        }
        b.sort_by(f64::total_cmp);
        b.dedup();
        b
    }
}

/// The steady state the run starts from: the network at t = 0 (switched drives off, wells at
/// their levels), piezometric node pressures.
fn initial_pressures(network: &Network, drives: &Drives) -> Result<Vec<f64>, TransientError> {
    let probe = Model::new(network, drives.clone(), &vec![0.0; network.nodes.len()]);
    let d0 = probe.drives_at(0.0, false);
    let solver = crate::analysis::kirchhoff::Solver::new(network)?;
    let factor = solver.factorize(conductances(network))?;
    Ok(factor.solve(&d0)?.pressures)
}

/// Integrate the network from its state at t = 0 over `run`.
pub fn evolve(network: &Network, drives: &Drives, run: Run) -> Result<Evolution, TransientError> {
    if !(run.duration.is_finite() && run.duration > 0.0) {
        return Err(TransientError::Bad(format!(
            "the duration must be positive, got {} s",
            run.duration
        )));
    }
    if !(run.every.is_finite() && run.every > 0.0) || run.duration / run.every > 1e7 {
        return Err(TransientError::Bad(format!(
            "the output interval must be positive and give at most 1e7 outputs, got {} s",
            run.every
        )));
    }
    let p0 = initial_pressures(network, drives)?;
    let model = Model::new(network, drives.clone(), &p0);
    let x0 = model.unknowns(&p0);
    let count = (run.duration / run.every).floor() as usize;
    let mut outputs: Vec<f64> = (0..=count).map(|k| k as f64 * run.every).collect();
    if outputs
        .last()
        .is_some_and(|&t| t < run.duration * (1.0 - 1e-12))
    {
        outputs.push(run.duration);
    }
    let scale = p0.iter().fold(1.0f64, |m, p| m.max(p.abs()));
    let dae = LinearDae {
        pattern: model.system.pattern(),
        a: &model.a,
        diag: &model.diag,
        c: &model.c,
    };
    let options = Options {
        rtol: run.rtol,
        atol: run.rtol * scale,
        ..Options::default()
    };
    let traj = integrator::integrate(
        &dae,
        &model,
        &x0,
        run.duration,
        &outputs,
        options,
        &mut |_| true,
    )?;
    let pressures: Vec<Vec<f64>> = traj
        .times
        .iter()
        .zip(&traj.states)
        .map(|(&t, x)| model.node_pressures(x, t))
        .collect();
    let flows = pressures
        .iter()
        .map(|p| crate::analysis::kirchhoff::channel_flows(network, &model.g, p))
        .collect();
    let rho_g = network.specific_weight();
    let levels = network
        .nodes
        .iter()
        .enumerate()
        .filter_map(|(i, n)| match (n.storage, n.port) {
            (Some(Storage::Well(_)), Port::Pressure(gas)) => Some((NodeId(i), gas.si())),
            _ => None,
        })
        .map(|(node, gas)| {
            let u = model.system.unknown(node.0);
            let series = traj
                .states
                .iter()
                .map(|x| u.map_or(0.0, |u| (x[u] - gas) / rho_g))
                .collect();
            (node, series)
        })
        .collect();
    Ok(Evolution {
        times: traj.times,
        pressures,
        flows,
        levels,
        steps: traj.steps,
        rejected: traj.rejected,
        factorizations: traj.factorizations,
    })
}

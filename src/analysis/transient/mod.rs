//! Time evolution of a network with storage: C·dP/dt = −A·P + b(t) on the Kirchhoff system.
//!
//! Unknowns: every node except pressure ports without a well (those stay imposed). A well's
//! unknown is its piezometric pressure in the platform's frame, P − ρ·g·Δz(t) when the
//! platform tilts; its level is (P − p_gas)/(ρ·g). Storage per unknown is
//! [`Storage`]'s compliance: A/(ρ·g) for a well, the given value for a compliance, 0 elsewhere
//! (an algebraic unknown); trapped gas follows Boyle's law p_abs·V = p_abs,0·V₀ with its
//! compliance p_abs,0·V₀/p_abs² at the current pressure, not linearised, and a well with a
//! level–volume table stores V(h) at its level h (both nonlinear storages in the integrator,
//! [`integrator::NonlinearStore`]). With algebraic unknowns the
//! system is a DAE of index 1. Integrated by TR-BDF2 ([`integrator`]).
//!
//! Drives in time: a flow port or pressure port switched on at t₀ (off before: flow 0, or
//! the pressure its elevation gives), a port's setting following a piecewise-linear profile
//! (a ramp or a schedule; steps land on its corners), and a rocking platform: angle θ(t) = θ₀·sin(2πt/T),
//! each node with an arm (its horizontal distance from the rocking axis) rising by
//! Δz = arm·sin θ(t).

pub mod cycles;
pub mod events;
pub mod integrator;

use crate::analysis::kirchhoff::{conductances, drive_values, KirchhoffSystem};
use crate::network::{Network, Node, NodeId, Port, Storage, Well, WellShape, STANDARD_ATMOSPHERE};
use integrator::{Forcing, LinearDae, NonlinearStore, Options, StoreLaw};

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
    /// Wells running dry or filling again, in time order.
    pub switches: Vec<WellSwitch>,
    /// Answers per tilt cycle, with a rocking platform.
    pub cycles: Option<cycles::CycleStats>,
    /// The run stopped here: a well ran dry and left part of the chip with no pressure
    /// reference and no storage (nothing could then set its pressures).
    pub stopped_at: Option<f64>,
    pub steps: usize,
    pub rejected: usize,
    pub factorizations: usize,
}

/// A well running dry (`dry: true`) or taking liquid in again (`dry: false`) at `time`
/// (found on the integrator's dense output, not between outputs).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WellSwitch {
    pub node: NodeId,
    pub time: f64,
    pub dry: bool,
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
    /// Trapped gases (Boyle's law about their initial state) and table wells (V(h)).
    stores: Vec<NonlinearStore>,
    drives: Drives,
    base: Vec<f64>,
    arm: Vec<f64>,
    /// Wells that are empty: their unknown is then a plain junction (no storage, no offset).
    dry: Vec<bool>,
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
                let n = &network.nodes[node];
                match &n.storage {
                    Some(Storage::Well(w)) => {
                        let height = (initial[node.0] - imposed_gas(n)) / rho_g - n.elevation.si();
                        w.area_at(height) / rho_g
                    }
                    Some(Storage::Gas { volume }) => {
                        let p = network.static_pressure(node, initial[node.0]);
                        volume.si() / (STANDARD_ATMOSPHERE + p)
                    }
                    Some(Storage::Compliance(c)) => c.si(),
                    None => 0.0,
                }
            })
            .collect();
        let stores = (0..system.dim())
            .filter_map(|u| {
                let node = NodeId(system.node(u));
                let n = &network.nodes[node];
                let law = match &n.storage {
                    Some(Storage::Gas { volume }) => {
                        // p_abs = STANDARD_ATMOSPHERE + static pressure = x + offset.
                        let offset = network.static_pressure(node, 0.0) + STANDARD_ATMOSPHERE;
                        let p0 =
                            network.static_pressure(node, initial[node.0]) + STANDARD_ATMOSPHERE;
                        StoreLaw::Gas {
                            k: p0 * volume.si(),
                            offset,
                        }
                    }
                    Some(Storage::Well(Well {
                        shape: WellShape::Table(table),
                        ..
                    })) => StoreLaw::Well {
                        table: table.clone(),
                        empty: imposed_gas(n) + rho_g * n.elevation.si(),
                        rho_g,
                    },
                    _ => return None,
                };
                Some(NonlinearStore { unknown: u, law })
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
            stores,
            drives,
            base: drive_values(network),
            arm,
            dry: vec![false; network.nodes.len()],
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
                match (&self.drives.rocking, &self.network.nodes[NodeId(i)].storage) {
                    (Some(r), Some(Storage::Well(_))) if !self.dry[i] => {
                        rho_g * r.rise(self.arm[i], t)
                    }
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

/// The gauge gas pressure above a well (its port's setting) [Pa]; 0 for other nodes.
fn imposed_gas(n: &Node) -> f64 {
    match n.port {
        Port::Pressure(p) => p.si(),
        _ => 0.0,
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

/// A well's unknown and what it takes to be empty.
#[derive(Clone, Copy)]
struct WellSlot {
    node: NodeId,
    unknown: usize,
    /// Gauge gas pressure above the surface [Pa].
    gas: f64,
    /// The well's bottom (its node's elevation) [m].
    bottom: f64,
    /// A/(ρ·g) at the bottom: the storage as it fills again.
    storage: f64,
    /// Height of a table's last row above the bottom: the well is full there [m]
    /// (infinite for a prism).
    top: f64,
}

impl Model<'_> {
    fn wells(&self) -> Vec<WellSlot> {
        let rho_g = self.network.specific_weight();
        (self.network.nodes.iter().enumerate())
            .filter_map(|(i, n)| match (&n.storage, n.port) {
                (Some(Storage::Well(w)), Port::Pressure(gas)) => Some(WellSlot {
                    node: NodeId(i),
                    unknown: self.system.unknown(i)?,
                    gas: gas.si(),
                    bottom: n.elevation.si(),
                    storage: w.area_at(0.0) / rho_g,
                    top: match &w.shape {
                        WellShape::Table(t) => t.top(),
                        WellShape::Prism { .. } => f64::INFINITY,
                    },
                }),
                _ => None,
            })
            .collect()
    }

    /// The pressure of an empty well at t, as its unknown holds it: in the platform's frame
    /// while it holds liquid (`wet`), piezometric when it is a dry junction.
    fn empty_pressure(&self, w: &WellSlot, t: f64, wet: bool) -> f64 {
        let rho_g = self.network.specific_weight();
        let rise = match (&self.drives.rocking, wet) {
            (Some(r), false) => r.rise(self.arm[w.node.0], t),
            _ => 0.0,
        };
        w.gas + rho_g * (w.bottom + rise)
    }

    /// Empty a well (its unknown becomes a junction's piezometric pressure, no storage) or fill
    /// it again (level at its bottom, storage back), at t.
    fn switch_well(&mut self, w: &WellSlot, t: f64, dry: bool, x: &mut [f64]) {
        let offset = self.offsets(t)[w.unknown];
        self.dry[w.node.0] = dry;
        if dry {
            x[w.unknown] += offset;
            self.c[w.unknown] = 0.0;
        } else {
            x[w.unknown] = self.empty_pressure(w, t, true);
            self.c[w.unknown] = w.storage;
        }
    }

    /// Whether the unknowns joined to `node` (through channels, not through imposed nodes)
    /// meet an imposed node or a storage other than `node`'s own: otherwise, once `node` loses
    /// its storage, nothing would set their pressures.
    fn anchored(&self, node: NodeId) -> bool {
        let mut seen = vec![false; self.network.nodes.len()];
        let mut stack = vec![node];
        seen[node.0] = true;
        while let Some(n) = stack.pop() {
            let Some(u) = self.system.unknown(n.0) else {
                return true;
            };
            if self.c[u] > 0.0 && n != node {
                return true;
            }
            for (_, m) in self.network.incident(n) {
                if !seen[m.0] {
                    seen[m.0] = true;
                    stack.push(m);
                }
            }
        }
        false
    }
}

/// The first time in `[lo, hi]` where `f` changes sign from `f(lo) ≥ 0` to `f(hi) < 0`
/// (bisection to rounding).
fn first_crossing(lo: f64, hi: f64, f: impl Fn(f64) -> f64) -> f64 {
    let (mut a, mut b) = (lo, hi);
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if m <= a || m >= b {
            break;
        }
        if f(m) >= 0.0 {
            a = m;
        } else {
            b = m;
        }
    }
    b
}

/// What a well does within a step.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Turn {
    /// Runs dry.
    Dry,
    /// Takes liquid in again.
    Fill,
    /// Fills past the last row of its table.
    Overflow,
}

/// Most switches of wells (dry, filled again) in one run before it is refused as chattering.
const MAX_SWITCHES: usize = 10_000;

/// Integrate the network from its state at t = 0 over `run`.
///
/// A well is unilateral: its level cannot fall below its bottom. When it empties, its port
/// carries no more flow: the node stays a liquid-filled junction (the channels meeting at the
/// well's bottom still join there, and the meniscus is taken as pinned at the well's outlet,
/// so no air enters the channels), with no storage. If the junction's pressure later rises
/// above the empty well's head, liquid is pushed into the well and it holds liquid again
/// (from its bottom). Both switches are found on the dense output of the step in which they
/// happen, and the run resumes from there. Should a dry well leave part of the chip with
/// neither an imposed pressure nor any storage (say a flow port drawing from it), that part's
/// pressures are undetermined: the run stops there (`stopped_at`).
pub fn evolve(network: &Network, drives: &Drives, run: Run) -> Result<Evolution, TransientError> {
    evolve_with_step_limit(network, drives, run, f64::INFINITY)
}

/// [`evolve`] with steps no longer than `max_step` [s] (benchmarks force a step count so).
pub fn evolve_with_step_limit(
    network: &Network,
    drives: &Drives,
    run: Run,
    max_step: f64,
) -> Result<Evolution, TransientError> {
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
    let mut model = Model::new(network, drives.clone(), &p0);
    let mut x = model.unknowns(&p0);
    let count = (run.duration / run.every).floor() as usize;
    let mut outputs: Vec<f64> = (0..=count).map(|k| k as f64 * run.every).collect();
    if outputs
        .last()
        .is_some_and(|&t| t < run.duration * (1.0 - 1e-12))
    {
        outputs.push(run.duration);
    }
    let scale = p0.iter().fold(1.0f64, |m, p| m.max(p.abs()));
    let wells = model.wells();
    let rho_g = network.specific_weight();
    let mut ev = Evolution {
        times: Vec::new(),
        pressures: Vec::new(),
        flows: Vec::new(),
        levels: wells.iter().map(|w| (w.node, Vec::new())).collect(),
        switches: Vec::new(),
        cycles: None,
        stopped_at: None,
        steps: 0,
        rejected: 0,
        factorizations: 0,
    };
    // Wells empty from the start.
    for w in &wells {
        if x[w.unknown] <= model.empty_pressure(w, 0.0, true) {
            let anchored = model.anchored(w.node);
            ev.switches.push(WellSwitch {
                node: w.node,
                time: 0.0,
                dry: true,
            });
            if !anchored {
                ev.stopped_at = Some(0.0);
                break;
            }
            model.switch_well(w, 0.0, true, &mut x);
        }
    }
    let mut per_cycle =
        (drives.rocking.as_ref()).map(|r| cycles::Accumulator::new(network, r.period));
    let mut t = 0.0;
    let mut next = 0;
    while ev.stopped_at.is_none() {
        let options = Options {
            rtol: run.rtol,
            atol: run.rtol * scale,
            start: t,
            max_step,
            ..Options::default()
        };
        // The first well to run dry, fill again or overflow within a step.
        let mut hit: Option<(f64, usize, Turn)> = None;
        // A dry well stores nothing until it fills again.
        let active: Vec<NonlinearStore> = (model.stores.iter())
            .filter(|st| !model.dry[model.system.node(st.unknown)])
            .cloned()
            .collect();
        let traj = {
            let dae = LinearDae {
                pattern: model.system.pattern(),
                a: &model.a,
                diag: &model.diag,
                c: &model.c,
                stores: &active,
            };
            let m = &model;
            let mut watch = |step: &Step<'_>| -> Option<f64> {
                hit = None;
                let t1 = step.t0 + step.h;
                for (k, w) in wells.iter().enumerate() {
                    let u = w.unknown;
                    let wet = !m.dry[w.node.0];
                    // Wet: the level falls through the bottom. Dry: the junction's pressure
                    // rises above the empty well's head (by more than the tolerance).
                    let margin = if wet { 0.0 } else { options.atol };
                    let sign = if wet { 1.0 } else { -1.0 };
                    let f = |t: f64| sign * (step.at(u, t) - m.empty_pressure(w, t, wet)) + margin;
                    if f(t1) < 0.0 {
                        // Already past at the step's start (a drive jumped there): switch now.
                        let tc = if f(step.t0) < 0.0 {
                            step.t0
                        } else {
                            first_crossing(step.t0, t1, f)
                        };
                        if hit.is_none_or(|(th, _, _)| tc < th) {
                            hit = Some((tc, k, if wet { Turn::Dry } else { Turn::Fill }));
                        }
                    }
                    // A table well filling past its last row.
                    let full =
                        |t: f64| m.empty_pressure(w, t, true) + rho_g * w.top - step.at(u, t);
                    if wet && w.top.is_finite() && full(t1) < 0.0 {
                        let tc = if full(step.t0) < 0.0 {
                            step.t0
                        } else {
                            first_crossing(step.t0, t1, full)
                        };
                        if hit.is_none_or(|(th, _, _)| tc < th) {
                            hit = Some((tc, k, Turn::Overflow));
                        }
                    }
                }
                if let Some(acc) = per_cycle.as_mut() {
                    let n = step.x0.len();
                    let flows = |t: f64| {
                        let x: Vec<f64> = (0..n).map(|u| step.at(u, t)).collect();
                        let p = m.node_pressures(&x, t);
                        crate::analysis::kirchhoff::channel_flows(network, &m.g, &p)
                    };
                    acc.add(step.t0, hit.map_or(t1, |h| h.0), &flows);
                }
                hit.map(|h| h.0)
            };
            integrator::integrate(
                &dae,
                m,
                &x,
                run.duration,
                &outputs[next..],
                options,
                &mut watch,
            )?
        };
        let record = |ev: &mut Evolution, time: f64, state: &[f64]| {
            let p = model.node_pressures(state, time);
            ev.flows.push(crate::analysis::kirchhoff::channel_flows(
                network, &model.g, &p,
            ));
            ev.pressures.push(p);
            ev.times.push(time);
            for (w, (_, series)) in wells.iter().zip(ev.levels.iter_mut()) {
                series.push(if model.dry[w.node.0] {
                    w.bottom
                } else {
                    (state[w.unknown] - w.gas) / rho_g
                });
            }
        };
        for (time, state) in traj.times.iter().zip(&traj.states) {
            record(&mut ev, *time, state);
        }
        next += traj.times.len();
        ev.steps += traj.steps;
        ev.rejected += traj.rejected;
        ev.factorizations += traj.factorizations;
        x = traj.last;
        t = traj.end;
        let Some((tc, k, turn)) = hit else {
            break;
        };
        let w = wells[k];
        if turn == Turn::Overflow {
            return Err(TransientError::Bad(format!(
                "well '{}' fills to the last row of its level–volume table ({} mm above its \
                 bottom) at t = {tc:.6e} s and would overflow; extend the table to the well's \
                 brim, or shorten the run",
                network.nodes[w.node].name,
                w.top * 1e3
            )));
        }
        let to_dry = turn == Turn::Dry;
        if ev.switches.len() >= MAX_SWITCHES {
            return Err(TransientError::Bad(format!(
                "wells ran dry and filled again more than {MAX_SWITCHES} times; the run \
                 stopped at t = {tc} s"
            )));
        }
        if to_dry && !model.anchored(w.node) {
            // The series ends with the state at the stop, past the last output.
            if ev.times.last().is_some_and(|&last| last < tc) {
                record(&mut ev, tc, &x);
            }
            ev.switches.push(WellSwitch {
                node: w.node,
                time: tc,
                dry: true,
            });
            ev.stopped_at = Some(tc);
            break;
        }
        model.switch_well(&w, tc, to_dry, &mut x);
        ev.switches.push(WellSwitch {
            node: w.node,
            time: tc,
            dry: to_dry,
        });
    }
    ev.cycles = per_cycle.map(cycles::Accumulator::finish);
    Ok(ev)
}

//! Analyses of a network: the steady flow state and the figures derived from it.
//!
//! [`kirchhoff`] solves for pressures and flows; [`steady_state`] adds what a designer reads
//! per channel (pressure drop, resistance, mean velocity, Reynolds number) and per port (the
//! flow a pressure port delivers, the pressure a pump must produce).

pub mod boxqp;
pub mod design;
pub mod kirchhoff;
pub mod limits;
pub mod lsq;
pub mod solutes;
pub mod spread;
pub mod transient;

pub use kirchhoff::{solve, FlowSolution, SolveError, Solver, RESIDUAL_LIMIT};
pub use limits::{findings, Finding, FindingKind, Place, Severity};

use crate::network::{ChannelId, Network, NodeId, Port};

/// Figures of one channel in the steady state (SI).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChannelState {
    /// Volume flow [m³/s], positive from `from` to `to`.
    pub flow: f64,
    /// p(from) − p(to) [Pa].
    pub pressure_drop: f64,
    /// Hydraulic resistance [Pa·s/m³].
    pub resistance: f64,
    /// Mean velocity Q/A [m/s], signed like the flow.
    pub mean_velocity: f64,
    /// Reynolds number ρ|U|Dh/μ on the hydraulic diameter.
    pub reynolds: f64,
    /// Mean wall shear stress τ_mean = G·A/P [Pa] (force balance; G = |ΔP|/L).
    pub wall_shear_mean: f64,
    /// Largest wall shear stress on the perimeter, τ_max = G·(τ_max/G) of the section [Pa].
    pub wall_shear_max: f64,
    /// The wall-shear limit that applies (the channel's own, else the cells') [Pa].
    pub shear_limit: Option<f64>,
    /// limit / τ_max: above 1 is inside the limit. `None` without a limit; infinite without
    /// flow.
    pub shear_margin: Option<f64>,
    /// Laminar entrance length [m], Durst et al. (2005), J. Fluids Eng. 127, 1154:
    /// L_e/Dh = [0.619^1.6 + (0.0567 Re)^1.6]^(1/1.6), fitted for 0 ≤ Re ≤ 2000 (pipe; used
    /// with the hydraulic diameter for other sections).
    pub entrance_length: f64,
    /// Time a fluid parcel spends in the channel, volume/|Q| [s] (infinite without flow).
    pub residence_time: f64,
    /// Viscous power dissipated, ΔP·Q [W].
    pub power: f64,
}

/// One port's operating point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PortState {
    /// Pressure at the port [Pa]: set (pressure port) or required (flow port).
    pub pressure: f64,
    /// Flow into the chip through the port [m³/s]: set (flow port) or delivered (pressure port).
    pub flow_into_chip: f64,
}

/// The steady state of a chip.
#[derive(Clone, Debug)]
pub struct SteadyState {
    pub solution: FlowSolution,
    pub channels: Vec<ChannelState>,
    /// Well-mixed solute concentrations, when the chip declares species.
    pub solutes: Option<solutes::Solutes>,
}

impl SteadyState {
    /// Channels carrying flow out of `node`: (channel index, node at the other end, |flow|),
    /// in O(degree) through the network's graph, ordered by channel (file order).
    pub fn outflows(&self, network: &Network, node: usize) -> Vec<(usize, usize, f64)> {
        let mut out: Vec<(usize, usize, f64)> = network
            .incident(NodeId(node))
            .filter_map(|(c, other)| {
                let q = self.channels[c.0].flow;
                let forward = network.channels[c].from.0 == node;
                match (forward, q) {
                    (true, q) if q > 0.0 => Some((c.0, other.0, q)),
                    (false, q) if q < 0.0 => Some((c.0, other.0, -q)),
                    _ => None,
                }
            })
            .collect();
        out.sort_unstable_by_key(|o| o.0);
        out
    }

    /// The operating point of node `i` if it is a port.
    pub fn port(&self, network: &Network, i: usize) -> Option<PortState> {
        match network.nodes[NodeId(i)].port {
            Port::Junction => None,
            Port::Pressure(_) | Port::Flow(_) => Some(PortState {
                pressure: self.solution.pressures[i],
                flow_into_chip: self.solution.node_net_inflow[i],
            }),
        }
    }
}

/// Solve the network (the checked path of [`kirchhoff::Solver`], through [`solve`]) and
/// derive the per-channel figures.
pub fn steady_state(network: &Network) -> Result<SteadyState, SolveError> {
    let solution = solve(network)?;
    Ok(derive(network, solution))
}

/// Laminar entrance length over hydraulic diameter, Durst et al. (2005).
pub fn entrance_length_ratio(reynolds: f64) -> f64 {
    (0.619f64.powf(1.6) + (0.0567 * reynolds).powf(1.6)).powf(1.0 / 1.6)
}

/// Per-channel figures from a flow solution.
pub fn derive(network: &Network, solution: FlowSolution) -> SteadyState {
    let mu = network.fluid.viscosity.si();
    let rho = network.fluid.density.si();
    let channels = network
        .channels
        .iter()
        .enumerate()
        .map(|(k, c)| {
            let q = solution.flows[k] + 0.0; // never −0
            let fig = &network.sections[c.section].figures;
            let u = q / fig.area;
            let dp = if q == 0.0 {
                0.0
            } else {
                solution.pressures[c.from.0] - solution.pressures[c.to.0]
            };
            let length = c.length.si();
            let gradient = dp.abs() / length;
            let dh = fig.hydraulic_diameter();
            let reynolds = rho * u.abs() * dh / mu;
            let wall_shear_max = gradient * fig.max_wall_shear_per_gradient;
            let shear_limit = c.shear_limit.or(network.fluid.shear_limit).map(|p| p.si());
            ChannelState {
                flow: q,
                pressure_drop: dp,
                resistance: network.resistance(ChannelId(k)),
                mean_velocity: u,
                reynolds,
                wall_shear_mean: gradient * fig.mean_wall_shear_per_gradient(),
                wall_shear_max,
                shear_limit,
                shear_margin: shear_limit.map(|l| {
                    if wall_shear_max > 0.0 {
                        l / wall_shear_max
                    } else {
                        f64::INFINITY
                    }
                }),
                entrance_length: dh * entrance_length_ratio(reynolds),
                residence_time: fig.area * length / q.abs(),
                power: dp * q,
            }
        })
        .collect();
    SteadyState {
        solution,
        channels,
        solutes: None,
    }
}

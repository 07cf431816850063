//! Analyses of a network: the steady flow state and the figures derived from it.
//!
//! [`kirchhoff`] solves for pressures and flows; [`steady_state`] adds what a designer reads
//! per channel (pressure drop, resistance, mean velocity, Reynolds number) and per port (the
//! flow a pressure port delivers, the pressure a pump must produce).

pub mod kirchhoff;

pub use kirchhoff::{solve, FlowSolution, SolveError, RESIDUAL_LIMIT};

use crate::network::{ChannelId, Network, Port};

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
}

impl SteadyState {
    /// The operating point of node `i` if it is a port.
    pub fn port(&self, network: &Network, i: usize) -> Option<PortState> {
        match network.nodes[i].port {
            Port::Junction => None,
            Port::Pressure(_) | Port::Flow(_) => Some(PortState {
                pressure: self.solution.pressures[i],
                flow_into_chip: self.solution.node_net_inflow[i],
            }),
        }
    }
}

/// Solve the network and derive the per-channel figures.
pub fn steady_state(network: &Network) -> Result<SteadyState, SolveError> {
    let solution = solve(network)?;
    Ok(derive(network, solution))
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
            let q = solution.flows[k];
            let fig = &network.sections[c.section.0].figures;
            let u = q / fig.area;
            ChannelState {
                flow: q,
                pressure_drop: solution.pressures[c.from.0] - solution.pressures[c.to.0],
                resistance: network.resistance(ChannelId(k)),
                mean_velocity: u,
                reynolds: rho * u.abs() * fig.hydraulic_diameter() / mu,
            }
        })
        .collect();
    SteadyState { solution, channels }
}

//! Exact derivatives of linear measures of the state with respect to channel conductances, by
//! the adjoint of the Kirchhoff system, and the sensitivities of flows to channel dimensions.
//!
//! For a linear measure J of the state (see `targets::Row`),
//!
//!   dJ/dg_m = ∂J/∂g_m − (P_i − P_j)(λ_i − λ_j),   A·λ = ∂J/∂p (A symmetric), λ = 0 at
//!   pressure ports,
//!
//! for channel m from node i to node j: one extra solve per measure on the factor of the
//! forward solve ([`Factor::solve_adjoint`], refined and checked). Dimensions enter through
//! g = K/(μL): dg/dL = −g/L and dg/dw = −g·d ln R'/dw, with d ln R'/dw a central difference of
//! the closed-form R' ([`dlog_resistance`]).

use super::super::kirchhoff::{
    conductances, drive_values, Factor, FlowSolution, SolveError, Solver,
};
use super::size::{dimension, with_dimension};
use super::targets::Row;
use crate::network::{ChannelId, Network};
use crate::section::Shape;

/// d(measure t)/d(g_m) for every channel m (one row per measure), at the state `state` that
/// `factor` solved: dJ/dg_m = ∂J/∂g_m − (P_i − P_j)(λ_i − λ_j) with A·λ = ∂J/∂p.
pub(super) fn measure_gradients(
    factor: &Factor<'_>,
    state: &FlowSolution,
    measures: &[Row],
) -> Result<Vec<Vec<f64>>, SolveError> {
    let network = factor.network();
    let g = factor.conductances();
    let rhs: Vec<Vec<f64>> = measures
        .iter()
        .map(|r| adjoint_rhs(network, g, r))
        .collect();
    let adjoints = factor.solve_adjoint(&rhs)?;
    Ok(measures
        .iter()
        .zip(&adjoints)
        .map(|(r, adj)| gradient(network, &state.pressures, r, &adj.lambda))
        .collect())
}

/// ∂J/∂p per node: a flow q_k = g_k(P_a − P_b) contributes ±c·g_k at its ends, a pressure
/// measure c at its node (entries at pressure ports are dropped by the solve).
fn adjoint_rhs(network: &Network, g: &[f64], r: &Row) -> Vec<f64> {
    let mut col = vec![0.0; network.nodes.len()];
    for &(k, c) in &r.flow_coeffs {
        let ch = &network.channels[ChannelId(k)];
        col[ch.from.0] += c * g[k];
        col[ch.to.0] -= c * g[k];
    }
    for &(i, c) in &r.pressure_coeffs {
        col[i] += c;
    }
    col
}

/// dJ/dg_m for every channel m from the pressures and the adjoint λ of measure `r`.
fn gradient(network: &Network, pressures: &[f64], r: &Row, lambda: &[f64]) -> Vec<f64> {
    network
        .channels
        .iter()
        .enumerate()
        .map(|(m, ch)| {
            let dp = pressures[ch.from.0] - pressures[ch.to.0];
            let explicit: f64 = r
                .flow_coeffs
                .iter()
                .filter(|(k, _)| *k == m)
                .map(|(_, c)| c * dp)
                .sum();
            explicit - dp * (lambda[ch.from.0] - lambda[ch.to.0])
        })
        .collect()
}

/// d ln R'/d(dimension) for a closed-form section: central difference of the closed form
/// (smooth, so the truncation error is of order (1e-5)² relative).
pub fn dlog_resistance(shape: &Shape, dim: &str) -> Option<f64> {
    let v = dimension(shape, dim)?;
    let h = 1e-5 * v;
    let r = |x: f64| {
        with_dimension(shape, dim, x)
            .and_then(|s| s.analytic_figures())
            .map(|f| 1.0 / f.conductance_factor)
    };
    let (rp, rm, r0) = (r(v + h)?, r(v - h)?, r(v)?);
    Some((rp - rm) / (2.0 * h) / r0)
}

/// Sensitivity of a target channel's flow to one channel's width, height and length:
/// absolute [m³/s per m] and relative (d ln Q / d ln x, i.e. % change of the flow per % change
/// of the dimension; `None` where the target carries no flow).
#[derive(Clone, Debug, PartialEq)]
pub struct Sensitivity {
    pub target_channel: ChannelId,
    pub channel: ChannelId,
    pub d_width: Option<f64>,
    pub d_height: Option<f64>,
    pub d_length: f64,
    pub rel_width: Option<f64>,
    pub rel_height: Option<f64>,
    pub rel_length: Option<f64>,
}

/// d(flow of each `targets` channel)/d(width, height, length of every channel)
/// ([`sensitivities_with`] on a new [`Solver`]).
pub fn sensitivities(
    network: &Network,
    targets: &[ChannelId],
) -> Result<Vec<Sensitivity>, SolveError> {
    sensitivities_with(&Solver::new(network)?, targets)
}

/// [`sensitivities`] for the network of `solver`: one factorisation, one checked forward
/// solve and one checked adjoint solve per target.
pub fn sensitivities_with(
    solver: &Solver<'_>,
    targets: &[ChannelId],
) -> Result<Vec<Sensitivity>, SolveError> {
    let network = solver.network();
    let factor = solver.factorize(conductances(network))?;
    let state = factor.solve(&drive_values(network))?;
    let measures: Vec<Row> = targets
        .iter()
        .enumerate()
        .map(|(t, c)| Row::channel_flow(*c, t))
        .collect();
    let grads = measure_gradients(&factor, &state, &measures)?;
    let g = factor.conductances();
    let mut out = Vec::with_capacity(targets.len() * network.channels.len());
    for (tc, dq_dg) in targets.iter().zip(&grads) {
        let q = state.flows[tc.0];
        out.extend(
            (0..network.channels.len())
                .map(|m| sensitivity(network, g[m], *tc, ChannelId(m), q, dq_dg[m])),
        );
    }
    Ok(out)
}

/// One row of the table: the flow `q` of `target` and its derivative `dq_dg` with respect to
/// the conductance `g` of `channel`, carried to the channel's dimensions.
fn sensitivity(
    network: &Network,
    g: f64,
    target: ChannelId,
    channel: ChannelId,
    q: f64,
    dq_dg: f64,
) -> Sensitivity {
    let ch = &network.channels[channel];
    let shape = &network.sections[ch.section].shape;
    let rel = |d: f64, x: f64| (q != 0.0).then(|| d * x / q);
    // g = K/(μL): dg/dL = −g/L; dg/dw = −g·d ln R'/dw.
    let length = ch.length.si();
    let d_length = dq_dg * (-g / length);
    let d = |dim: &str| dlog_resistance(shape, dim).map(|dl| dq_dg * (-g * dl));
    let (d_width, d_height) = (d("width"), d("height"));
    let relative =
        |dv: Option<f64>, dim: &str| dv.zip(dimension(shape, dim)).and_then(|(dv, x)| rel(dv, x));
    Sensitivity {
        target_channel: target,
        channel,
        rel_width: relative(d_width, "width"),
        rel_height: relative(d_height, "height"),
        rel_length: rel(d_length, length),
        d_width,
        d_height,
        d_length,
    }
}

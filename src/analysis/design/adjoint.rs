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
//! the closed-form R' ([`dlog_resistance`]), or, for a numerically solved section, a central
//! difference of two converged solves with the step chosen against the solver's error
//! estimate ([`dlog_resistance_numeric`]).

use super::super::kirchhoff::{
    conductances, drive_values, Factor, FlowSolution, SolveError, Solver,
};
use super::dimensions::{dimension, with_dimension};
use super::targets::Row;
use crate::network::{ChannelId, Network};
use crate::section::numeric::NumericOptions;
use crate::section::{Shape, ShapeError};

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

/// Tightest relative error asked of the two solves behind a numerical derivative.
pub const DERIVATIVE_TOLERANCE: f64 = 1e-6;

/// d ln R'/d(dimension) of a numerically solved section, with its error estimate.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NumericDerivative {
    /// d ln R'/dx [1/m] (R' ∝ 1/K, so this is −d ln K/dx), extrapolated (see
    /// [`dlog_resistance_numeric`]).
    pub value: f64,
    /// The half step h [m] of the inner central difference (the outer one uses 2h).
    pub step: f64,
    /// The relative error estimate ε_K the solves were asked for.
    pub tolerance: f64,
    /// The largest relative error estimate the four solves reported.
    pub solve_error: f64,
    /// The truncation error of the plain central difference at step h, measured: |D(h) −
    /// D(2h)|/3 [1/m]. A plain difference at another step h' has about (h'/h)² times this.
    pub truncation: f64,
    /// Estimated bound on the absolute error of `value` [1/m] (see
    /// [`dlog_resistance_numeric`]).
    pub error_estimate: f64,
}

/// d ln R'/d(dimension) for a numerically solved section, from central differences of
/// converged solves.
///
/// Method: K is solved at x ± h and x ± 2h, each to the relative error estimate
/// ε_K = min(`tolerance`, [`DERIVATIVE_TOLERANCE`]), giving the central differences
///
///   D(h) = (ln K(x + h) − ln K(x − h)) / (2h),   D(2h) likewise,
///
/// and the Richardson value (4·D(h) − D(2h))/3, whose truncation error is O(h⁴).
///
/// The step: the truncation error of D(h) is h²/6·|d³ ln K/dx³| ~ (h/x)²/x, the noise of the
/// solves (errors of different meshes, which do not cancel) at most ε_K/h; h = x·(3·ε_K)^(1/3)
/// balances the two for a plain difference (h ≈ 1.44 % of x at ε_K = 1e-6). Measured on
/// trapezoids, d-shapes and rounded rectangles, the solver's actual error is well below its
/// estimate, so the truncation dominates D(h) (a few 1e-4 relative); the extrapolation removes
/// it. The error estimate is the noise of the extrapolated value, (4·n(h) + n(2h))/3 with
/// n(s) = (ε₊ + ε₋)/(2s) from the reported estimates of the solves, plus a quarter of the
/// measured truncation |D(h) − D(2h)|/3 as allowance for the O(h⁴) remainder. Expected
/// relative accuracy: about 1e-4 or better at ε_K = 1e-6.
/// `None` when the shape has no such dimension or is closed form (use [`dlog_resistance`]).
pub fn dlog_resistance_numeric(
    shape: &Shape,
    dim: &str,
    tolerance: f64,
) -> Result<Option<NumericDerivative>, ShapeError> {
    if shape.analytic_figures().is_some() {
        return Ok(None);
    }
    let Some(x) = dimension(shape, dim) else {
        return Ok(None);
    };
    let eps = if tolerance.is_finite() && tolerance > 0.0 {
        tolerance.min(DERIVATIVE_TOLERANCE)
    } else {
        DERIVATIVE_TOLERANCE
    };
    let h = x * (3.0 * eps).cbrt();
    let opts = NumericOptions {
        tolerance: eps,
        ..NumericOptions::default()
    };
    let solve = |v: f64| -> Result<Option<(f64, f64)>, ShapeError> {
        let Some(s) = with_dimension(shape, dim, v) else {
            return Ok(None);
        };
        let sol = s.solve_numeric(&opts)?;
        Ok(Some((
            sol.conductance_factor.ln(),
            sol.relative_error_estimate,
        )))
    };
    // (D(s), noise of D(s), largest solve error) for the half step s.
    let difference = |s: f64| -> Result<Option<(f64, f64, f64)>, ShapeError> {
        let (Some((lp, ep)), Some((lm, em))) = (solve(x + s)?, solve(x - s)?) else {
            return Ok(None);
        };
        Ok(Some((
            (lp - lm) / (2.0 * s),
            (ep + em) / (2.0 * s),
            ep.max(em),
        )))
    };
    let (Some((d1, n1, e1)), Some((d2, n2, e2))) = (difference(h)?, difference(2.0 * h)?) else {
        return Ok(None);
    };
    let truncation = (d1 - d2).abs() / 3.0;
    Ok(Some(NumericDerivative {
        value: -(4.0 * d1 - d2) / 3.0,
        step: h,
        tolerance: eps,
        solve_error: e1.max(e2),
        truncation,
        error_estimate: (4.0 * n1 + n2) / 3.0 + truncation / 4.0,
    }))
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

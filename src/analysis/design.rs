//! Design answers: drive settings for target flows (tuning), channel sizes for target splits
//! (sizing), and sensitivities of flows to channel dimensions (adjoint method).
//!
//! Targets are turned into dimensionless residuals, each weighted by √weight:
//! - channel flow:  (q − q*)/|q*|
//! - node pressure: (p − p*)/max(|p*|, P_ref)
//! - split c₁…cₙ in ratio r₁…rₙ: (r₁q_i − r_iq₁)/((r₁ + r_i)·Q_ref) for i = 2…n, with Q_ref the
//!   current Σ|q| of those channels — zero exactly when the flows are in the ratio.
//!
//! Tuning is linear: flows and pressures are linear in the drive settings, so the response to
//! each adjustable port is one extra right-hand side on the same factorisation, and the bounded
//! least-squares problem is solved exactly ([`super::boxqp`]).
//!
//! Sizing is nonlinear in lengths and widths. It uses Gauss–Newton steps (Levenberg–Marquardt
//! damped, bounded) with exact derivatives: the adjoint of the Kirchhoff system gives
//! dq/dg for every channel conductance g with one extra solve per target, and
//! dg/dL = −g/L, dg/dw = −g·(dR'/dw)/R' (central difference of the closed-form R').

use super::boxqp;
use super::kirchhoff::{channel_flows, conductances, drive_values, KirchhoffSystem, SolveError};
pub use crate::chip::design::{Adjustable, Design, SizeDim, SizeVar, Target, TargetKind};
use crate::network::{ChannelId, Network, NodeId, Port};
use crate::section::Shape;
use crate::solver::{Parallelism, SymbolicCholesky};
use crate::units::Length;

/// Why a design question could not be answered.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum DesignError {
    #[error(
        "the chip has no targets; add a 'targets:' list (channel flow, split or node pressure)"
    )]
    NoTargets,
    #[error("no port is adjustable; add 'adjust: {{min: ..., max: ...}}' to the ports tuning may change")]
    NoAdjustable,
    #[error("no channel dimension is free; add 'size: {{length: {{min: ..., max: ...}}}}' (or width) to a channel")]
    NoSizes,
    #[error("channel '{channel}': width sizing needs a closed-form section (circle, rectangle, ellipse, plates); its section is a {shape}")]
    WidthUnsupported {
        channel: String,
        shape: &'static str,
    },
    #[error(transparent)]
    Solve(#[from] SolveError),
}

/// Reference pressure for pressure targets of 0 Pa.
const P_REF: f64 = 100.0;

/// A solved state for given conductances and drives.
struct State {
    pressures: Vec<f64>,
    flows: Vec<f64>,
}

fn solve_states(
    network: &Network,
    g: &[f64],
    drive_sets: &[Vec<f64>],
) -> Result<Vec<State>, SolveError> {
    let sys = KirchhoffSystem::new(network);
    let sym = SymbolicCholesky::analyse(sys.pattern(), Parallelism::default())?;
    let f = sym.factorize(sys.pattern(), &sys.matrix_values(g))?;
    let n = sys.dim();
    let mut rhs = Vec::with_capacity(n * drive_sets.len());
    for d in drive_sets {
        rhs.extend(sys.rhs_for(network, g, d));
    }
    f.solve_in_place(&mut rhs)?;
    Ok(drive_sets
        .iter()
        .enumerate()
        .map(|(k, d)| {
            let x = &rhs[k * n..(k + 1) * n];
            let pressures = sys.node_pressures_for(x, d);
            let flows = channel_flows(network, g, &pressures);
            State { pressures, flows }
        })
        .collect())
}

/// One residual row: a linear measure of the state (coefficients on channel flows and node
/// pressures), its wanted value, and its scale.
#[derive(Clone, Debug)]
struct Row {
    flow_coeffs: Vec<(usize, f64)>,
    pressure_coeffs: Vec<(usize, f64)>,
    wanted: f64,
    scale: f64,
    weight: f64,
    target: usize,
}

impl Row {
    fn measure(&self, pressures: &[f64], flows: &[f64]) -> f64 {
        self.flow_coeffs
            .iter()
            .map(|(k, c)| c * flows[*k])
            .sum::<f64>()
            + self
                .pressure_coeffs
                .iter()
                .map(|(i, c)| c * pressures[*i])
                .sum::<f64>()
    }
    fn residual(&self, pressures: &[f64], flows: &[f64]) -> f64 {
        self.weight.sqrt() * (self.measure(pressures, flows) - self.wanted) / self.scale
    }
}

fn rows(targets: &[Target], flows: &[f64]) -> Vec<Row> {
    let mut out = Vec::new();
    for (t, target) in targets.iter().enumerate() {
        match &target.kind {
            TargetKind::ChannelFlow { channel, flow } => out.push(Row {
                flow_coeffs: vec![(channel.0, 1.0)],
                pressure_coeffs: vec![],
                wanted: *flow,
                scale: flow.abs().max(1e-18),
                weight: target.weight,
                target: t,
            }),
            TargetKind::NodePressure { node, pressure } => out.push(Row {
                flow_coeffs: vec![],
                pressure_coeffs: vec![(node.0, 1.0)],
                wanted: *pressure,
                scale: pressure.abs().max(P_REF),
                weight: target.weight,
                target: t,
            }),
            TargetKind::Split { channels, ratio } => {
                let qref = channels
                    .iter()
                    .map(|c| flows[c.0].abs())
                    .sum::<f64>()
                    .max(1e-18);
                for i in 1..channels.len() {
                    let (r1, ri) = (ratio[0], ratio[i]);
                    out.push(Row {
                        flow_coeffs: vec![
                            (channels[i].0, r1 / (r1 + ri)),
                            (channels[0].0, -ri / (r1 + ri)),
                        ],
                        pressure_coeffs: vec![],
                        wanted: 0.0,
                        scale: qref,
                        weight: target.weight,
                        target: t,
                    });
                }
            }
        }
    }
    out
}

/// How a target came out.
#[derive(Clone, Debug, PartialEq)]
pub struct TargetOutcome {
    pub target: usize,
    /// Human description ("flow in c3", "split c3:c4", "pressure at n2").
    pub what: String,
    /// Wanted and reached values: flow [m³/s], pressure [Pa], or for a split the share of the
    /// first channel in the group's total flow.
    pub wanted: f64,
    pub reached: f64,
    /// Largest dimensionless residual of this target (0 = met).
    pub miss: f64,
}

fn outcomes(
    network: &Network,
    targets: &[Target],
    pressures: &[f64],
    flows: &[f64],
) -> Vec<TargetOutcome> {
    let rws = rows(targets, flows);
    targets
        .iter()
        .enumerate()
        .map(|(t, target)| {
            let miss = rws
                .iter()
                .filter(|r| r.target == t)
                .map(|r| ((r.measure(pressures, flows) - r.wanted) / r.scale).abs())
                .fold(0.0, f64::max);
            let (what, wanted, reached) = match &target.kind {
                TargetKind::ChannelFlow { channel, flow } => (
                    format!("flow in {}", network.channels[channel.0].name),
                    *flow,
                    flows[channel.0],
                ),
                TargetKind::NodePressure { node, pressure } => (
                    format!("pressure at {}", network.nodes[node.0].name),
                    *pressure,
                    pressures[node.0],
                ),
                TargetKind::Split { channels, ratio } => {
                    let names: Vec<&str> = channels
                        .iter()
                        .map(|c| network.channels[c.0].name.as_str())
                        .collect();
                    let total: f64 = channels.iter().map(|c| flows[c.0]).sum();
                    (
                        format!(
                            "split {} in {}",
                            names.join(":"),
                            ratio
                                .iter()
                                .map(|r| format!("{r}"))
                                .collect::<Vec<_>>()
                                .join(":")
                        ),
                        ratio[0] / ratio.iter().sum::<f64>(),
                        if total != 0.0 {
                            flows[channels[0].0] / total
                        } else {
                            f64::NAN
                        },
                    )
                }
            };
            TargetOutcome {
                target: t,
                what,
                wanted,
                reached,
                miss,
            }
        })
        .collect()
}

/// A tuned setting.
#[derive(Clone, Debug, PartialEq)]
pub struct Setting {
    pub node: NodeId,
    pub before: f64,
    pub after: f64,
    pub min: f64,
    pub max: f64,
    /// −1 at the minimum, +1 at the maximum, 0 inside.
    pub at_bound: i8,
}

/// Result of tuning.
#[derive(Clone, Debug, PartialEq)]
pub struct TuneResult {
    pub settings: Vec<Setting>,
    pub targets: Vec<TargetOutcome>,
    /// ‖weighted residual‖ at the optimum.
    pub residual_norm: f64,
    /// Every target met to 1e-9 relative.
    pub feasible: bool,
}

/// Relative miss below which a target counts as met.
pub const MET: f64 = 1e-9;

/// Find the adjustable port settings that best meet the targets, within bounds.
pub fn tune(network: &Network, design: &Design) -> Result<TuneResult, DesignError> {
    if design.targets.is_empty() {
        return Err(DesignError::NoTargets);
    }
    if design.adjustable.is_empty() {
        return Err(DesignError::NoAdjustable);
    }
    let g = conductances(network);
    let base = drive_values(network);
    // Drive sets: fixed ports only, then each adjustable port alone at 1 (unit response).
    let mut fixed = base.clone();
    for a in &design.adjustable {
        fixed[a.node.0] = 0.0;
    }
    let mut sets = vec![fixed];
    for a in &design.adjustable {
        let mut d = vec![0.0; base.len()];
        d[a.node.0] = 1.0;
        sets.push(d);
    }
    let states = solve_states(network, &g, &sets)?;
    // Variables scaled to O(1): x_j = s_j·y_j.
    let scale: Vec<f64> = design
        .adjustable
        .iter()
        .map(|a| {
            a.min
                .abs()
                .max(a.max.abs())
                .max(base[a.node.0].abs())
                .max(1e-300)
        })
        .collect();
    let scaled = |f: &dyn Fn(&Adjustable) -> f64| -> Vec<f64> {
        design
            .adjustable
            .iter()
            .zip(&scale)
            .map(|(a, s)| f(a) / s)
            .collect()
    };
    let lo = scaled(&|a| a.min);
    let hi = scaled(&|a| a.max);
    let x0 = scaled(&|a| base[a.node.0].clamp(a.min, a.max));
    let combine = |y: &[f64]| -> (Vec<f64>, Vec<f64>) {
        let mut p = states[0].pressures.clone();
        let mut q = states[0].flows.clone();
        for (j, yj) in y.iter().enumerate() {
            let xj = yj * scale[j];
            for (pi, v) in p.iter_mut().zip(&states[j + 1].pressures) {
                *pi += xj * v;
            }
            for (qi, v) in q.iter_mut().zip(&states[j + 1].flows) {
                *qi += xj * v;
            }
        }
        (p, q)
    };
    // Split rows depend on the current flows through Q_ref: a few fixed-point passes.
    let mut y = x0.clone();
    let mut sol = None;
    for _ in 0..4 {
        let (_, q_now) = combine(&y);
        let rws = rows(&design.targets, &q_now);
        let a: Vec<Vec<f64>> = rws
            .iter()
            .map(|r| {
                (0..design.adjustable.len())
                    .map(|j| {
                        r.weight.sqrt()
                            * r.measure(&states[j + 1].pressures, &states[j + 1].flows)
                            * scale[j]
                            / r.scale
                    })
                    .collect()
            })
            .collect();
        let rhs: Vec<f64> = rws
            .iter()
            .map(|r| -r.residual(&states[0].pressures, &states[0].flows))
            .collect();
        let s = boxqp::solve(&a, &rhs, &lo, &hi, &x0);
        let converged =
            s.x.iter()
                .zip(&y)
                .all(|(a, b)| (a - b).abs() <= 1e-13 * a.abs().max(1.0));
        y = s.x.clone();
        sol = Some(s);
        if converged {
            break;
        }
    }
    let sol = sol.expect("at least one pass");
    // Verify with a fresh solve at the tuned settings.
    let mut tuned = base.clone();
    for (j, a) in design.adjustable.iter().enumerate() {
        tuned[a.node.0] = y[j] * scale[j];
    }
    let check = solve_states(network, &g, std::slice::from_ref(&tuned))?;
    let targets = outcomes(
        network,
        &design.targets,
        &check[0].pressures,
        &check[0].flows,
    );
    let rws = rows(&design.targets, &check[0].flows);
    let residual_norm = rws
        .iter()
        .map(|r| r.residual(&check[0].pressures, &check[0].flows).powi(2))
        .sum::<f64>()
        .sqrt();
    let settings = design
        .adjustable
        .iter()
        .enumerate()
        .map(|(j, a)| Setting {
            node: a.node,
            before: base[a.node.0],
            after: tuned[a.node.0],
            min: a.min,
            max: a.max,
            at_bound: sol.active[j],
        })
        .collect();
    Ok(TuneResult {
        feasible: targets.iter().all(|t| t.miss <= MET),
        settings,
        targets,
        residual_norm,
    })
}

// ---------------------------------------------------------------------------------------
// Sensitivities (adjoint)
// ---------------------------------------------------------------------------------------

/// Gradients of measures with respect to channel conductances, and the state they were taken at.
struct Gradients {
    /// d(measure t)/d(g_m), one row per measure.
    grads: Vec<Vec<f64>>,
    pressures: Vec<f64>,
    flows: Vec<f64>,
}

/// d(measure)/d(g_m) for every channel m, for a list of linear measures, by the adjoint:
/// dJ/dg_m = ∂J/∂g_m − (P_i − P_j)(λ_i − λ_j), with A·λ = ∂J/∂p on the unknown pressures.
fn measure_gradients(
    network: &Network,
    g: &[f64],
    measures: &[Row],
) -> Result<Gradients, SolveError> {
    let sys = KirchhoffSystem::new(network);
    let sym = SymbolicCholesky::analyse(sys.pattern(), Parallelism::default())?;
    let f = sym.factorize(sys.pattern(), &sys.matrix_values(g))?;
    let drives = drive_values(network);
    let n = sys.dim();
    let mut x = sys.rhs_for(network, g, &drives);
    f.solve_in_place(&mut x)?;
    let p = sys.node_pressures_for(&x, &drives);
    let flows = channel_flows(network, g, &p);
    // Adjoint right-hand sides: ∂J/∂p on unknowns (flow q_k = g_k(P_a − P_b) contributes
    // ±g_k at its ends; a pressure measure contributes 1 at its node).
    let mut lam = vec![0.0; n * measures.len()];
    for (t, r) in measures.iter().enumerate() {
        let col = &mut lam[t * n..(t + 1) * n];
        for &(k, c) in &r.flow_coeffs {
            let ch = &network.channels[k];
            if let Some(u) = sys.unknown(ch.from.0) {
                col[u] += c * g[k];
            }
            if let Some(u) = sys.unknown(ch.to.0) {
                col[u] -= c * g[k];
            }
        }
        for &(i, c) in &r.pressure_coeffs {
            if let Some(u) = sys.unknown(i) {
                col[u] += c;
            }
        }
    }
    f.solve_in_place(&mut lam)?;
    let grads = measures
        .iter()
        .enumerate()
        .map(|(t, r)| {
            let col = &lam[t * n..(t + 1) * n];
            let l = |i: usize| sys.unknown(i).map_or(0.0, |u| col[u]);
            network
                .channels
                .iter()
                .enumerate()
                .map(|(m, ch)| {
                    let dp = p[ch.from.0] - p[ch.to.0];
                    let explicit: f64 = r
                        .flow_coeffs
                        .iter()
                        .filter(|(k, _)| *k == m)
                        .map(|(_, c)| c * dp)
                        .sum();
                    explicit - dp * (l(ch.from.0) - l(ch.to.0))
                })
                .collect()
        })
        .collect();
    Ok(Gradients {
        grads,
        pressures: p,
        flows,
    })
}

/// d(flow in `channel`)/d(g_m) for every channel m.
pub fn flow_conductance_gradients(
    network: &Network,
    channels: &[ChannelId],
) -> Result<Vec<Vec<f64>>, SolveError> {
    let g = conductances(network);
    let measures: Vec<Row> = channels
        .iter()
        .enumerate()
        .map(|(t, c)| Row {
            flow_coeffs: vec![(c.0, 1.0)],
            pressure_coeffs: vec![],
            wanted: 0.0,
            scale: 1.0,
            weight: 1.0,
            target: t,
        })
        .collect();
    Ok(measure_gradients(network, &g, &measures)?.grads)
}

/// The shape with its width (or a circle's diameter) or height set to `value`, when the shape
/// has a closed form with that dimension.
pub fn with_dimension(shape: &Shape, dim: &str, value: f64) -> Option<Shape> {
    let v = Length::from_si(value);
    Some(match (shape, dim) {
        (Shape::Rectangle { height, .. }, "width") => Shape::Rectangle {
            width: v,
            height: *height,
        },
        (Shape::Rectangle { width, .. }, "height") => Shape::Rectangle {
            width: *width,
            height: v,
        },
        (Shape::Ellipse { height, .. }, "width") => Shape::Ellipse {
            width: v,
            height: *height,
        },
        (Shape::Ellipse { width, .. }, "height") => Shape::Ellipse {
            width: *width,
            height: v,
        },
        (Shape::Plates { gap, .. }, "width") => Shape::Plates {
            gap: *gap,
            width: v,
        },
        (Shape::Plates { width, .. }, "height") => Shape::Plates {
            gap: v,
            width: *width,
        },
        (Shape::Circle { .. }, "width") => Shape::Circle { diameter: v },
        _ => return None,
    })
}

/// A dimension's current value.
pub fn dimension(shape: &Shape, dim: &str) -> Option<f64> {
    Some(match (shape, dim) {
        (
            Shape::Rectangle { width, .. }
            | Shape::Ellipse { width, .. }
            | Shape::Plates { width, .. },
            "width",
        ) => width.si(),
        (Shape::Rectangle { height, .. } | Shape::Ellipse { height, .. }, "height") => height.si(),
        (Shape::Plates { gap, .. }, "height") => gap.si(),
        (Shape::Circle { diameter }, "width") => diameter.si(),
        _ => return None,
    })
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

/// d(flow of each `targets` channel)/d(width, height, length of every channel).
pub fn sensitivities(
    network: &Network,
    targets: &[ChannelId],
) -> Result<Vec<Sensitivity>, SolveError> {
    let g = conductances(network);
    let measures: Vec<Row> = targets
        .iter()
        .enumerate()
        .map(|(t, c)| Row {
            flow_coeffs: vec![(c.0, 1.0)],
            pressure_coeffs: vec![],
            wanted: 0.0,
            scale: 1.0,
            weight: 1.0,
            target: t,
        })
        .collect();
    let grads = measure_gradients(network, &g, &measures)?;
    let mut out = Vec::with_capacity(targets.len() * network.channels.len());
    for (t, tc) in targets.iter().enumerate() {
        let q = grads.flows[tc.0];
        let rel = |d: f64, x: f64| (q != 0.0).then(|| d * x / q);
        for (m, ch) in network.channels.iter().enumerate() {
            let shape = &network.sections[ch.section.0].shape;
            let dq_dg = grads.grads[t][m];
            // g = K/(μL): dg/dL = −g/L; dg/dw = −g·d ln R'/dw.
            let length = ch.length.si();
            let d_length = dq_dg * (-g[m] / length);
            let d = |dim: &str| dlog_resistance(shape, dim).map(|dl| dq_dg * (-g[m] * dl));
            let (d_width, d_height) = (d("width"), d("height"));
            let relative = |dv: Option<f64>, dim: &str| {
                dv.zip(dimension(shape, dim)).and_then(|(dv, x)| rel(dv, x))
            };
            out.push(Sensitivity {
                target_channel: *tc,
                channel: ChannelId(m),
                rel_width: relative(d_width, "width"),
                rel_height: relative(d_height, "height"),
                rel_length: rel(d_length, length),
                d_width,
                d_height,
                d_length,
            });
        }
    }
    Ok(out)
}

// ---------------------------------------------------------------------------------------
// Sizing (Gauss–Newton with adjoint Jacobians)
// ---------------------------------------------------------------------------------------

/// A sized dimension.
#[derive(Clone, Debug, PartialEq)]
pub struct SizedDim {
    pub var: SizeVar,
    pub before: f64,
    pub after: f64,
    pub at_bound: i8,
}

/// Result of sizing.
#[derive(Clone, Debug)]
pub struct SizeResult {
    pub sizes: Vec<SizedDim>,
    pub targets: Vec<TargetOutcome>,
    pub residual_norm: f64,
    pub iterations: usize,
    pub feasible: bool,
    /// The network with the new sizes.
    pub network: Network,
}

/// The network at trial sizes, its residuals and their Jacobian.
struct Evaluation {
    net: Network,
    res: Vec<f64>,
    jac: Vec<Vec<f64>>,
}

/// Apply sizes `z` to a copy of the network.
fn apply(network: &Network, vars: &[SizeVar], z: &[f64]) -> Result<Network, DesignError> {
    let mut net = network.clone();
    for (v, &val) in vars.iter().zip(z) {
        match v.dim {
            SizeDim::Length => net.channels[v.channel.0].length = Length::from_si(val),
            SizeDim::Width => {
                let ch = &net.channels[v.channel.0];
                let shape = &net.sections[ch.section.0].shape;
                let new = with_dimension(shape, "width", val).ok_or_else(|| {
                    DesignError::WidthUnsupported {
                        channel: ch.name.clone(),
                        shape: shape.kind(),
                    }
                })?;
                let figures =
                    new.analytic_figures()
                        .ok_or_else(|| DesignError::WidthUnsupported {
                            channel: ch.name.clone(),
                            shape: new.kind(),
                        })?;
                // Each sized channel gets its own section, so shared sections stay as they were.
                let id = net.sections.len();
                net.sections.push(crate::network::Section {
                    name: format!("{}.section", ch.name),
                    named: false,
                    shape: new,
                    figures,
                });
                net.channels[v.channel.0].section = crate::network::SectionId(id);
            }
        }
    }
    Ok(net)
}

/// Find channel lengths/widths that meet the targets with the drives fixed.
pub fn size(network: &Network, design: &Design) -> Result<SizeResult, DesignError> {
    if design.targets.is_empty() {
        return Err(DesignError::NoTargets);
    }
    if design.sizes.is_empty() {
        return Err(DesignError::NoSizes);
    }
    let vars = &design.sizes;
    let current = |v: &SizeVar| -> Result<f64, DesignError> {
        let ch = &network.channels[v.channel.0];
        Ok(match v.dim {
            SizeDim::Length => ch.length.si(),
            SizeDim::Width => {
                let shape = &network.sections[ch.section.0].shape;
                dimension(shape, "width")
                    .filter(|_| shape.analytic_figures().is_some())
                    .ok_or_else(|| DesignError::WidthUnsupported {
                        channel: ch.name.clone(),
                        shape: shape.kind(),
                    })?
            }
        })
    };
    let before: Vec<f64> = vars.iter().map(current).collect::<Result<_, _>>()?;
    let mut z: Vec<f64> = before
        .iter()
        .zip(vars)
        .map(|(b, v)| b.clamp(v.min, v.max))
        .collect();

    let evaluate = |z: &[f64]| -> Result<Evaluation, DesignError> {
        let net = apply(network, vars, z)?;
        let g = conductances(&net);
        // The measures' coefficients do not depend on the flows (only the split scale Q_ref
        // does), so one solve gives both the gradients and the flows for the scales.
        let unscaled = rows(&design.targets, &vec![1.0; net.channels.len()]);
        let Gradients {
            grads,
            pressures: p,
            flows: q,
        } = measure_gradients(&net, &g, &unscaled)?;
        let rws = rows(&design.targets, &q);
        let res: Vec<f64> = rws.iter().map(|r| r.residual(&p, &q)).collect();
        // Jacobian d(res)/dz.
        let jac: Vec<Vec<f64>> = rws
            .iter()
            .zip(&grads)
            .map(|(r, gr)| {
                vars.iter()
                    .zip(z)
                    .map(|(v, &zv)| {
                        let m = v.channel.0;
                        let dg = match v.dim {
                            SizeDim::Length => -g[m] / zv,
                            SizeDim::Width => {
                                let shape = &net.sections[net.channels[m].section.0].shape;
                                -g[m] * dlog_resistance(shape, "width").unwrap_or(0.0)
                            }
                        };
                        r.weight.sqrt() * gr[m] * dg / r.scale
                    })
                    .collect()
            })
            .collect();
        Ok(Evaluation { net, res, jac })
    };

    let norm = |r: &[f64]| r.iter().map(|v| v * v).sum::<f64>().sqrt();
    let mut iterations = 0;
    let mut mu = 1e-3;
    let Evaluation {
        mut net,
        mut res,
        mut jac,
    } = evaluate(&z)?;
    let mut active = vec![0i8; vars.len()];
    let continuous = |vars_free: &[bool],
                      z: &mut Vec<f64>,
                      net: &mut Network,
                      res: &mut Vec<f64>,
                      jac: &mut Vec<Vec<f64>>,
                      active: &mut Vec<i8>,
                      iterations: &mut usize,
                      mu: &mut f64|
     -> Result<(), DesignError> {
        for _ in 0..100 {
            if norm(res) < 1e-13 {
                break;
            }
            *iterations += 1;
            // Bounded, damped Gauss–Newton step in relative units: Δz_j = z_j·δ_j.
            let n = vars.len();
            let mut a: Vec<Vec<f64>> = jac
                .iter()
                .map(|row| {
                    (0..n)
                        .map(|j| if vars_free[j] { row[j] * z[j] } else { 0.0 })
                        .collect()
                })
                .collect();
            let mut rhs: Vec<f64> = res.iter().map(|v| -v).collect();
            for j in 0..n {
                let mut damp = vec![0.0; n];
                damp[j] = mu.sqrt();
                a.push(damp);
                rhs.push(0.0);
            }
            let lo: Vec<f64> = (0..n)
                .map(|j| {
                    if vars_free[j] {
                        vars[j].min / z[j] - 1.0
                    } else {
                        0.0
                    }
                })
                .collect();
            let hi: Vec<f64> = (0..n)
                .map(|j| {
                    if vars_free[j] {
                        vars[j].max / z[j] - 1.0
                    } else {
                        0.0
                    }
                })
                .collect();
            let step = boxqp::solve(&a, &rhs, &lo, &hi, &vec![0.0; n]);
            let trial: Vec<f64> = (0..n)
                .map(|j| (z[j] * (1.0 + step.x[j])).clamp(vars[j].min, vars[j].max))
                .collect();
            let Evaluation {
                net: tnet,
                res: tres,
                jac: tjac,
            } = evaluate(&trial)?;
            if norm(&tres) < norm(res) {
                let small = trial
                    .iter()
                    .zip(z.iter())
                    .all(|(a, b)| (a - b).abs() <= 1e-14 * b.abs());
                *z = trial;
                *net = tnet;
                *res = tres;
                *jac = tjac;
                *active = step.active.clone();
                *mu = (*mu * 0.1).max(1e-15);
                if small {
                    break;
                }
            } else {
                *mu *= 10.0;
                if *mu > 1e12 {
                    break;
                }
            }
        }
        Ok(())
    };
    let all_free = vec![true; vars.len()];
    continuous(
        &all_free,
        &mut z,
        &mut net,
        &mut res,
        &mut jac,
        &mut active,
        &mut iterations,
        &mut mu,
    )?;
    // Fabrication steps: snap the stepped dimensions, then re-solve the others.
    if vars.iter().any(|v| v.step.is_some()) {
        for (j, v) in vars.iter().enumerate() {
            if let Some(step) = v.step {
                let snapped = (z[j] / step).round() * step;
                z[j] = snapped.clamp(v.min, v.max);
            }
        }
        let Evaluation {
            net: n2,
            res: r2,
            jac: j2,
        } = evaluate(&z)?;
        net = n2;
        res = r2;
        jac = j2;
        let free: Vec<bool> = vars.iter().map(|v| v.step.is_none()).collect();
        if free.iter().any(|f| *f) {
            mu = 1e-3;
            continuous(
                &free,
                &mut z,
                &mut net,
                &mut res,
                &mut jac,
                &mut active,
                &mut iterations,
                &mut mu,
            )?;
        }
    }
    let g = conductances(&net);
    let fin = solve_states(&net, &g, &[drive_values(&net)])?;
    let targets = outcomes(&net, &design.targets, &fin[0].pressures, &fin[0].flows);
    let sizes = vars
        .iter()
        .enumerate()
        .map(|(j, v)| SizedDim {
            var: v.clone(),
            before: before[j],
            after: z[j],
            at_bound: if z[j] <= v.min * (1.0 + 1e-12) {
                -1
            } else if z[j] >= v.max * (1.0 - 1e-12) {
                1
            } else {
                0
            },
        })
        .collect();
    Ok(SizeResult {
        feasible: targets.iter().all(|t| t.miss <= 1e-9),
        residual_norm: norm(&res),
        sizes,
        targets,
        iterations,
        network: net,
    })
}

/// A serpentine that packs `length` into straight runs of `run` joined by U-turns of
/// centre-line pitch `pitch`: n runs and n − 1 half-circle turns of length π·pitch/2.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Serpentine {
    pub runs: usize,
    pub turns: usize,
    /// Footprint: run length × (runs · pitch) [m].
    pub footprint: [f64; 2],
}

/// Serpentine needed for `length` with straight runs of `run` and centre-line `pitch`.
pub fn serpentine(length: f64, run: f64, pitch: f64) -> Serpentine {
    let turn = std::f64::consts::PI * pitch / 2.0;
    let runs = (((length + turn) / (run + turn)).ceil() as usize).max(1);
    Serpentine {
        runs,
        turns: runs - 1,
        footprint: [run, runs as f64 * pitch],
    }
}

/// Port kind for reports.
pub fn is_pressure_port(network: &Network, node: NodeId) -> bool {
    matches!(network.nodes[node.0].port, Port::Pressure(_))
}

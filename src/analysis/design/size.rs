//! Sizing: channel lengths and widths that meet the targets with the drives fixed.
//!
//! Sizing is nonlinear in lengths and widths. It uses Gauss–Newton steps (Levenberg–Marquardt
//! damped, bounded, in relative units Δz_j = z_j·δ_j; [`super::super::boxqp`]) with exact
//! derivatives: the adjoint of the Kirchhoff system (see `adjoint`) gives dq/dg for every
//! channel conductance g with one extra solve per target row, and dg/dL = −g/L,
//! dg/dw = −g·(dR'/dw)/R' (central difference of the closed-form R', [`dlog_resistance`]; for
//! a numerically solved section — trapezoid top, d-shape mask width, rounded-rectangle width,
//! measured-profile span (positions scaled, depths kept) —
//! a central difference of two converged solves with the step chosen against the solver's
//! error estimate, [`dlog_resistance_numeric`]). Numerical figures and derivatives are kept
//! per section geometry for the run, so a trial size seen before is not solved again.
//! Dimensions with a fabrication step are then snapped to it and the others re-solved.
//!
//! Limits (every channel's wall-shear limit, the chip's pressure rating and vacuum; see
//! `limits`) are held as linear inequality constraints in every step, linearised at the
//! iterate by the direct method: one extra solve per size variable, A·(dp/dg_m) =
//! −Δp_m·(e_i − e_j) on the same factor, gives the derivative of every node pressure and
//! channel flow (dq_k/dg_m = g_k·(dp_i − dp_j)/dg_m + [k = m]·Δp_m), which with many
//! limits and few sizes is cheaper than one adjoint per limit. A sized width also moves its
//! channel's flow bound q̄ = τ̄·K/(s·μ): d ln q̄/dw = −d ln R'/dw − d ln s/dw, the last term
//! a central difference of the closed form (left out for numerically solved sections, whose
//! τ_max is not smooth enough in w to difference; the exact bound is used at every iterate,
//! so the answer still keeps the limit). The step is then a linear least-squares problem
//! with inequality constraints, solved exactly by [`super::super::lsq`] (Lawson & Hanson
//! 1974, LSI → LDP → NNLS) rather than [`super::super::boxqp`], which holds bounds only.
//! Constraints that every step within the bounds keeps are left out. A trial is accepted
//! when it lowers the largest relative excess over a limit, or exceeds no limit more than
//! the iterate did and lowers ‖res‖ (feasibility first, then the targets). When the
//! linearised limits cannot all hold within the bounds, sizing goes on without them and says
//! so ([`LimitHandling::Unattainable`]); `--ignore-limits` leaves them out from the start
//! (the bounded steps of [`super::super::boxqp`], as before limits were held).
//!
//! A sized width gives the channel a section of its own, but the nodes, ports and channel
//! ends stay as they were: every evaluation refactorises on the one symbolic analysis of the
//! caller's [`Solver`], which checks this ([`Solver::conductances_of`]).

use super::super::boxqp;
use super::super::kirchhoff::{drive_values, Factor, FlowSolution, Solver};
use super::super::lsq;
use super::adjoint::{dlog_resistance, dlog_resistance_numeric, measure_gradients};
use super::dimensions::{dimension, with_dimension};
use super::limits::{
    self, bound_constraints, excess, limits_reached, ActiveLimit, Constraint, LimitHandling,
    Linearised,
};
use super::targets::{outcomes, rows, Scales, TargetOutcome};
use super::{Design, DesignError, SizeDim, SizeVar, TargetKind};
use crate::network::{Network, Section, SectionId};
use crate::section::numeric::NumericOptions;
use crate::section::{GeometryKey, SectionFigures, Shape};
use crate::units::Length;
use std::cell::{Cell, RefCell};
use std::collections::HashMap;

/// Gauss–Newton iterations per descent, at most.
const MAX_ITERATIONS: usize = 100;

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
    /// Trial sizes evaluated (each one factorisation, one forward and one adjoint solve per
    /// target row, all on the same symbolic analysis).
    pub evaluations: usize,
    /// Every target met within its tolerance (or the miss snapping itself causes).
    pub all_targets_met: bool,
    pub limits: LimitHandling,
    /// Limits the sized chip sits on (within [`super::ACTIVE_TOL`] of the limit held with
    /// its margin) or exceeds, when limits were held.
    pub active_limits: Vec<ActiveLimit>,
    /// Significant digits of the written sizes without a fabrication step (set when a copy
    /// is written).
    pub written_digits: Option<usize>,
    /// The network with the new sizes.
    pub network: Network,
    /// Its checked flow state (with the refinement count and residual).
    pub solution: FlowSolution,
}

/// Options of [`size_with_options`].
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct SizeOptions {
    /// Leave wall-shear limits, the pressure rating and vacuum out of the steps.
    pub ignore_limits: bool,
}

/// Find channel lengths/widths that meet the targets with the drives fixed, within bounds and
/// limits ([`size_with`] on a new [`Solver`]).
pub fn size(network: &Network, design: &Design) -> Result<SizeResult, DesignError> {
    check_design(design)?;
    size_with(&Solver::new(network)?, design)
}

/// [`size_with_options`] with the limits held.
pub fn size_with(solver: &Solver<'_>, design: &Design) -> Result<SizeResult, DesignError> {
    size_with_options(solver, design, SizeOptions::default())
}

/// [`size`] for the network of `solver`: every evaluation factorises on its analysis.
pub fn size_with_options(
    solver: &Solver<'_>,
    design: &Design,
    options: SizeOptions,
) -> Result<SizeResult, DesignError> {
    check_design(design)?;
    let network = solver.network();
    let vars = &design.sizes;
    let before: Vec<f64> = vars
        .iter()
        .map(|v| current(network, v))
        .collect::<Result<_, _>>()?;
    let z: Vec<f64> = before
        .iter()
        .zip(vars)
        .map(|(b, v)| b.clamp(v.min, v.max))
        .collect();
    let ctx = Context {
        solver,
        design,
        scales: RefCell::new(None),
        evaluations: Cell::new(0),
        numeric: NumericCache::default(),
        limits: Cell::new(if options.ignore_limits {
            LimitHandling::Ignored
        } else {
            LimitHandling::Constrained
        }),
    };
    let mut it = Iterate::start(&ctx, z)?;
    it.descend(&ctx, &vec![true; vars.len()])?;
    let stepped = vars.iter().any(|v| v.step.is_some());
    let before_snap = stepped.then(|| {
        let e = &it.eval;
        outcomes(
            &e.net,
            &design.targets,
            &e.state.pressures,
            &e.state.flows,
            &e.state.node_net_inflow,
        )
    });
    if stepped {
        it.snap_and_resolve(&ctx)?;
    }
    let Evaluation {
        net, state, res, ..
    } = it.eval;
    let mut targets = outcomes(
        &net,
        &design.targets,
        &state.pressures,
        &state.flows,
        &state.node_net_inflow,
    );
    // After snapping to fabrication steps: a target met before snapping is judged against
    // the miss the snapping itself causes when that is larger than its tolerance.
    if let Some(before) = before_snap {
        for (t, b) in targets.iter_mut().zip(&before) {
            if b.met && !t.met {
                t.snapping_miss = Some(t.miss);
                t.judge();
            }
        }
    }
    let sizes = vars
        .iter()
        .zip(&before)
        .zip(&it.z)
        .map(|((v, &before), &after)| SizedDim {
            var: v.clone(),
            before,
            after,
            at_bound: at_bound(v, after),
        })
        .collect();
    let limits = ctx.limits.get();
    let active_limits = if limits == LimitHandling::Constrained {
        limits_reached(&net, &state.flows, &state.pressures)
    } else {
        vec![]
    };
    Ok(SizeResult {
        all_targets_met: targets.iter().all(|t| t.met),
        limits,
        active_limits,
        written_digits: None,
        residual_norm: norm(&res),
        sizes,
        targets,
        iterations: it.iterations,
        evaluations: ctx.evaluations.get(),
        network: net,
        solution: state,
    })
}

fn check_design(design: &Design) -> Result<(), DesignError> {
    if design.targets.is_empty() {
        return Err(DesignError::NoTargets);
    }
    if design.sizes.is_empty() {
        return Err(DesignError::NoSizes);
    }
    if design
        .targets
        .iter()
        .any(|t| matches!(t.kind, super::TargetKind::Concentration { .. }))
    {
        return Err(DesignError::ConcentrationInSize);
    }
    Ok(())
}

/// −1 at the minimum, +1 at the maximum (to 1e-12 relative), 0 inside.
fn at_bound(v: &SizeVar, z: f64) -> i8 {
    if z <= v.min * (1.0 + 1e-12) {
        -1
    } else if z >= v.max * (1.0 - 1e-12) {
        1
    } else {
        0
    }
}

fn norm(r: &[f64]) -> f64 {
    r.iter().map(|v| v * v).sum::<f64>().sqrt()
}

/// The current value of a size variable.
fn current(network: &Network, v: &SizeVar) -> Result<f64, DesignError> {
    let ch = &network.channels[v.channel];
    Ok(match v.dim {
        SizeDim::Length => ch.length.si(),
        SizeDim::Width => {
            let shape = &network.sections[ch.section].shape;
            dimension(shape, "width").ok_or_else(|| DesignError::WidthUnsupported {
                channel: ch.name.clone(),
                shape: shape.kind(),
            })?
        }
    })
}

/// What every evaluation needs: the solver (one analysis), the problem, and a count.
struct Context<'a, 'n> {
    solver: &'a Solver<'n>,
    design: &'a Design,
    /// Split reference flows and shear signs, fixed at the starting sizes (the first
    /// evaluation), so that the objective is one function of the sizes throughout.
    scales: RefCell<Option<Scales>>,
    evaluations: Cell<usize>,
    /// Numerical figures and width derivatives per section geometry, for this run.
    numeric: NumericCache,
    /// Whether limits are held (set to unattainable when the linearised limits cannot hold).
    limits: Cell<LimitHandling>,
}

/// Numerical section figures and d ln R'/dw per geometry, solved once per sizing run.
#[derive(Default)]
struct NumericCache {
    figures: RefCell<HashMap<GeometryKey, SectionFigures>>,
    dlog_width: RefCell<HashMap<GeometryKey, f64>>,
}

impl NumericCache {
    /// Figures of `shape`: closed form, else solved to `tolerance` (once per geometry).
    fn figures(&self, shape: &Shape, tolerance: f64) -> Result<SectionFigures, String> {
        if let Some(f) = shape.analytic_figures() {
            return Ok(f);
        }
        let key = shape.geometry_key();
        if let Some(f) = self.figures.borrow().get(&key) {
            return Ok(*f);
        }
        let opts = NumericOptions {
            tolerance,
            ..NumericOptions::default()
        };
        let (f, _) = shape.figures_with(&opts).map_err(|e| e.to_string())?;
        self.figures.borrow_mut().insert(key, f);
        Ok(f)
    }

    /// d ln R'/dw of `shape`: closed form, else two converged solves (once per geometry).
    fn dlog_width(&self, shape: &Shape, tolerance: f64) -> Result<f64, String> {
        if shape.analytic_figures().is_some() {
            return Ok(dlog_resistance(shape, "width").unwrap_or(0.0));
        }
        let key = shape.geometry_key();
        if let Some(d) = self.dlog_width.borrow().get(&key) {
            return Ok(*d);
        }
        let d = dlog_resistance_numeric(shape, "width", tolerance)
            .map_err(|e| e.to_string())?
            .map_or(0.0, |d| d.value);
        self.dlog_width.borrow_mut().insert(key, d);
        Ok(d)
    }
}

/// The network at trial sizes, its checked state, its residuals and their Jacobian.
struct Evaluation {
    net: Network,
    state: FlowSolution,
    res: Vec<f64>,
    /// Per residual row and size variable: the factor of dg/dz and the explicit ∂/∂z.
    jac_parts: Vec<Vec<(f64, f64)>>,
    /// Conductances of the sized variables' channels.
    g_sized: Vec<f64>,
    /// Per size variable, the derivatives of every node pressure and channel flow with
    /// respect to its channel's conductance (empty when limits are not held).
    state_dg: Vec<StateDerivative>,
    /// The largest relative excess over a limit (0 when every limit holds).
    excess: f64,
}

impl Context<'_, '_> {
    /// Apply sizes `z`, factorise on the kept analysis, solve (forward and adjoint, checked)
    /// and form the residuals and d(res)/dz.
    fn evaluate(&self, z: &[f64]) -> Result<Evaluation, DesignError> {
        self.evaluations.set(self.evaluations.get() + 1);
        let vars = &self.design.sizes;
        let net = apply(self.solver.network(), vars, z, &self.numeric)?;
        let factor = self.solver.factorize(self.solver.conductances_of(&net)?)?;
        let state = factor.solve(&drive_values(&net))?;
        let scales = self
            .scales
            .borrow_mut()
            .get_or_insert_with(|| Scales::from_flows(&self.design.targets, &state.flows))
            .clone();
        let rws = rows(&net, &self.design.targets, &scales);
        let grads = measure_gradients(&factor, &state, &rws)?;
        let res: Vec<f64> = rws
            .iter()
            .map(|r| r.residual(&state.pressures, &state.flows))
            .collect();
        let g = factor.conductances();
        // Jacobian d(res)/dz = √w/scale · (dJ/dg_m · dg_m/dz + ∂J/∂z), kept here as the
        // factor of dg_m/dz and the explicit part; dg_m/dz itself is formed only for the
        // iterates a step starts from ([`Context::jacobian`]), since for a numerically solved
        // width it costs two converged section solves. The explicit part is that of a
        // wall-shear target on a channel whose length is sized: τ = s·|Δp|/L, so
        // ∂τ/∂L = −τ/L. (A sized width also changes s; that part is left to the damped
        // iteration, which accepts only steps that lower the residual.)
        let jac_parts: Vec<Vec<(f64, f64)>> = rws
            .iter()
            .zip(&grads)
            .map(|(r, gr)| {
                vars.iter()
                    .zip(z)
                    .map(|(v, &zv)| {
                        let explicit = match self.design.targets[r.target].kind {
                            TargetKind::WallShear { channel, .. }
                                if channel == v.channel && v.dim == SizeDim::Length =>
                            {
                                -r.measure(&state.pressures, &state.flows) / zv
                            }
                            _ => 0.0,
                        };
                        let c = r.weight.sqrt() / r.scale;
                        (c * gr[v.channel.0], c * explicit)
                    })
                    .collect()
            })
            .collect();
        let g_sized: Vec<f64> = vars.iter().map(|v| g[v.channel.0]).collect();
        let state_dg = if self.holds_limits() {
            state_derivatives(&factor, &state, vars)?
        } else {
            vec![]
        };
        Ok(Evaluation {
            excess: excess(&net, &state.flows, &state.pressures),
            net,
            state,
            res,
            jac_parts,
            g_sized,
            state_dg,
        })
    }

    fn holds_limits(&self) -> bool {
        self.limits.get() == LimitHandling::Constrained
    }

    /// d ln R'/dw of width variable `v`'s section in the evaluated network, and that section.
    fn dlog_width_of<'e>(
        &self,
        e: &'e Evaluation,
        v: &SizeVar,
    ) -> Result<(f64, &'e Shape), DesignError> {
        let ch = &e.net.channels[v.channel];
        let shape = &e.net.sections[ch.section].shape;
        let d = self
            .numeric
            .dlog_width(shape, e.net.section_tolerance)
            .map_err(|reason| DesignError::SizedSection {
                channel: ch.name.clone(),
                reason,
            })?;
        Ok((d, shape))
    }

    /// dg/dz of each size variable's channel at sizes `z`: dg/dL = −g/L, dg/dw =
    /// −g·d ln R'/dw.
    fn dg_dz(&self, e: &Evaluation, z: &[f64]) -> Result<Vec<f64>, DesignError> {
        self.design
            .sizes
            .iter()
            .zip(z)
            .zip(&e.g_sized)
            .map(|((v, &zv), &g)| {
                Ok(match v.dim {
                    SizeDim::Length => -g / zv,
                    SizeDim::Width => {
                        let (d, _) = self.dlog_width_of(e, v)?;
                        -g * d
                    }
                })
            })
            .collect()
    }

    /// d(res)/dz of an evaluation, from dg/dz ([`Context::dg_dz`]).
    fn jacobian(&self, e: &Evaluation, dg_dz: &[f64]) -> Vec<Vec<f64>> {
        e.jac_parts
            .iter()
            .map(|row| {
                row.iter()
                    .zip(dg_dz)
                    .map(|((c, explicit), dg)| c * dg + explicit)
                    .collect()
            })
            .collect()
    }

    /// The limits linearised at evaluation `e` (sizes `z`) over the relative step δ
    /// (z_j·(1 + δ_j)), without those that every step within `lo ≤ δ ≤ hi` keeps.
    fn limit_rows(
        &self,
        e: &Evaluation,
        z: &[f64],
        dg_dz: &[f64],
        lo: &[f64],
        hi: &[f64],
    ) -> Result<Vec<Constraint>, DesignError> {
        let vars = &self.design.sizes;
        // d/dδ_j = z_j·dg_m/dz_j·d/dg_m for the channel m of variable j.
        let per_step: Vec<f64> = z.iter().zip(dg_dz).map(|(z, d)| z * d).collect();
        let along = |pick: &dyn Fn(&StateDerivative) -> f64| -> Vec<f64> {
            e.state_dg
                .iter()
                .zip(&per_step)
                .map(|(d, c)| c * pick(d))
                .collect()
        };
        // d ln q̄/dw of each width variable (0 for lengths: q̄ does not depend on L).
        let dlog_bound: Vec<f64> = vars
            .iter()
            .zip(z)
            .map(|(v, &zv)| {
                if v.dim != SizeDim::Width {
                    return Ok(0.0);
                }
                let (dlog_r, shape) = self.dlog_width_of(e, v)?;
                Ok(zv * (-dlog_r - dlog_shear_factor(shape)))
            })
            .collect::<Result<_, DesignError>>()?;
        let dbound = |k: usize| -> Vec<f64> {
            let Some(qbar) = limits::shear_flow_bound(&e.net, k) else {
                return vec![];
            };
            vars.iter()
                .zip(&dlog_bound)
                .map(|(v, d)| if v.channel.0 == k { qbar * d } else { 0.0 })
                .collect()
        };
        let rows = limits::limit_constraints(
            &e.net,
            &Linearised {
                flows: &e.state.flows,
                pressures: &e.state.pressures,
                dflow: &|k| along(&|d| d.flows[k]),
                dpressure: &|i| along(&|d| d.pressures[i]),
                dbound: &dbound,
            },
        );
        Ok(rows
            .into_iter()
            .filter(|c| {
                let least: f64 =
                    c.g.iter()
                        .zip(lo.iter().zip(hi))
                        .map(|(g, (l, h))| (g * l).min(g * h))
                        .sum();
                least < c.h
            })
            .collect())
    }
}

/// Derivatives of every node pressure and channel flow with respect to one conductance.
struct StateDerivative {
    pressures: Vec<f64>,
    flows: Vec<f64>,
}

/// d ln s/dw of a closed-form section (s = τ_max/G), by a central difference of the closed
/// form; 0 for numerically solved sections and shapes without a width.
fn dlog_shear_factor(shape: &Shape) -> f64 {
    let Some(w) = dimension(shape, "width") else {
        return 0.0;
    };
    let h = 1e-5 * w;
    let s = |x: f64| {
        with_dimension(shape, "width", x)
            .and_then(|s| s.analytic_figures())
            .map(|f| f.max_wall_shear_per_gradient)
    };
    match (s(w + h), s(w - h), s(w)) {
        (Some(p), Some(m), Some(c)) if c > 0.0 => (p - m) / (2.0 * h) / c,
        _ => 0.0,
    }
}

/// For each size variable, d p/d g_m and d q/d g_m of the channel m it sizes (the direct
/// method: A·dp = −Δp_m·(e_i − e_j), dp = 0 at pressure ports, on the forward solve's
/// factor; dq_k = g_k·(dp_from − dp_to) + [k = m]·Δp_m).
fn state_derivatives(
    factor: &Factor<'_>,
    state: &FlowSolution,
    vars: &[SizeVar],
) -> Result<Vec<StateDerivative>, DesignError> {
    let net = factor.network();
    let g = factor.conductances();
    let p = &state.pressures;
    let rhs: Vec<Vec<f64>> = vars
        .iter()
        .map(|v| {
            let ch = &net.channels[v.channel];
            let dp = p[ch.from.0] - p[ch.to.0];
            let mut col = vec![0.0; net.nodes.len()];
            col[ch.from.0] -= dp;
            col[ch.to.0] += dp;
            col
        })
        .collect();
    let sols = factor.solve_adjoint(&rhs)?;
    Ok(vars
        .iter()
        .zip(sols)
        .map(|(v, sol)| {
            let dp = sol.lambda;
            let dq: Vec<f64> = net
                .channels
                .iter()
                .enumerate()
                .map(|(k, ch)| {
                    let own = if k == v.channel.0 {
                        p[ch.from.0] - p[ch.to.0]
                    } else {
                        0.0
                    };
                    g[k] * (dp[ch.from.0] - dp[ch.to.0]) + own
                })
                .collect();
            StateDerivative {
                pressures: dp,
                flows: dq,
            }
        })
        .collect())
}

/// The Gauss–Newton iterate: sizes, their evaluation, the damping μ and the iteration count.
struct Iterate {
    z: Vec<f64>,
    eval: Evaluation,
    iterations: usize,
    mu: f64,
}

impl Iterate {
    fn start(ctx: &Context<'_, '_>, z: Vec<f64>) -> Result<Iterate, DesignError> {
        Ok(Iterate {
            eval: ctx.evaluate(&z)?,
            z,
            iterations: 0,
            mu: 1e-3,
        })
    }

    /// Damped, bounded Gauss–Newton on the `free` variables: accept a step that improves the
    /// iterate ([`Iterate::improves`]; μ ← max(μ/10, 1e-15)), else raise μ tenfold; stop
    /// when ‖res‖ < 1e-13 with every limit kept, a step moves no size by more than 1e-14
    /// relative, μ exceeds 1e12, or after [`MAX_ITERATIONS`].
    fn descend(&mut self, ctx: &Context<'_, '_>, free: &[bool]) -> Result<(), DesignError> {
        let vars = &ctx.design.sizes;
        for _ in 0..MAX_ITERATIONS {
            let kept = !ctx.holds_limits() || self.eval.excess <= 0.0;
            if norm(&self.eval.res) < 1e-13 && kept {
                break;
            }
            self.iterations += 1;
            let step = self.step(ctx, vars, free)?;
            let trial: Vec<f64> = vars
                .iter()
                .zip(&self.z)
                .zip(&step)
                .map(|((v, z), d)| (z * (1.0 + d)).clamp(v.min, v.max))
                .collect();
            let eval = ctx.evaluate(&trial)?;
            if self.improves(ctx, &eval) {
                let small = trial
                    .iter()
                    .zip(&self.z)
                    .all(|(a, b)| (a - b).abs() <= 1e-14 * b.abs());
                self.z = trial;
                self.eval = eval;
                self.mu = (self.mu * 0.1).max(1e-15);
                if small {
                    break;
                }
            } else {
                self.mu *= 10.0;
                if self.mu > 1e12 {
                    break;
                }
            }
        }
        Ok(())
    }

    /// Whether a trial improves the iterate: without limits, a lower ‖res‖; with limits, a
    /// lower largest excess over a limit, or no more excess than now (none, once every limit
    /// is kept) and a lower ‖res‖.
    fn improves(&self, ctx: &Context<'_, '_>, trial: &Evaluation) -> bool {
        let lower = norm(&trial.res) < norm(&self.eval.res);
        if !ctx.holds_limits() {
            return lower;
        }
        let (now, then) = (self.eval.excess.max(0.0), trial.excess.max(0.0));
        then < now || (then <= now && lower)
    }

    /// The damped least-squares step in relative units: minimise ‖J·diag(z)·δ + res‖² +
    /// μ‖δ‖² with min/z − 1 ≤ δ ≤ max/z − 1 (δ = 0 where not free) and, when limits are
    /// held, the limits linearised at the iterate (LSI, [`lsq::solve`]); bounds only
    /// ([`boxqp::solve`]) otherwise. Limits that cannot all hold in the linearisation are
    /// dropped for the rest of the run ([`LimitHandling::Unattainable`]).
    fn step(
        &self,
        ctx: &Context<'_, '_>,
        vars: &[SizeVar],
        free: &[bool],
    ) -> Result<Vec<f64>, DesignError> {
        let n = vars.len();
        let z = &self.z;
        let dg_dz = ctx.dg_dz(&self.eval, z)?;
        let jac = ctx.jacobian(&self.eval, &dg_dz);
        let mut a: Vec<Vec<f64>> = jac
            .iter()
            .map(|row| {
                (0..n)
                    .map(|j| if free[j] { row[j] * z[j] } else { 0.0 })
                    .collect()
            })
            .collect();
        let mut rhs: Vec<f64> = self.eval.res.iter().map(|v| -v).collect();
        for j in 0..n {
            let mut damp = vec![0.0; n];
            damp[j] = self.mu.sqrt();
            a.push(damp);
            rhs.push(0.0);
        }
        let bound = |f: &dyn Fn(&SizeVar) -> f64| -> Vec<f64> {
            (0..n)
                .map(|j| {
                    if free[j] {
                        f(&vars[j]) / z[j] - 1.0
                    } else {
                        0.0
                    }
                })
                .collect()
        };
        let (lo, hi) = (bound(&|v| v.min), bound(&|v| v.max));
        if ctx.holds_limits() {
            let rows = ctx.limit_rows(&self.eval, z, &dg_dz, &lo, &hi)?;
            let all: Vec<Constraint> = bound_constraints(&lo, &hi)
                .into_iter()
                .chain(rows)
                .collect();
            let g: Vec<Vec<f64>> = all.iter().map(|c| c.g.clone()).collect();
            let h: Vec<f64> = all.iter().map(|c| c.h).collect();
            let lsi = lsq::solve(&a, &rhs, &g, &h, &vec![0.0; n]);
            if lsi.feasible {
                return Ok(lsi
                    .x
                    .iter()
                    .zip(lo.iter().zip(&hi))
                    .map(|(x, (l, h))| x.clamp(*l, *h))
                    .collect());
            }
            ctx.limits.set(LimitHandling::Unattainable);
        }
        Ok(boxqp::solve(&a, &rhs, &lo, &hi, &vec![0.0; n]).x)
    }

    /// Fabrication steps: snap the stepped dimensions, then re-solve the others.
    fn snap_and_resolve(&mut self, ctx: &Context<'_, '_>) -> Result<(), DesignError> {
        let vars = &ctx.design.sizes;
        for (z, v) in self.z.iter_mut().zip(vars) {
            if let Some(step) = v.step {
                let snapped = (*z / step).round() * step;
                *z = snapped.clamp(v.min, v.max);
            }
        }
        self.eval = ctx.evaluate(&self.z)?;
        let free: Vec<bool> = vars.iter().map(|v| v.step.is_none()).collect();
        if free.iter().any(|f| *f) {
            self.mu = 1e-3;
            self.descend(ctx, &free)?;
        }
        Ok(())
    }
}

/// Apply sizes `z` to a copy of the network. A sized width gives its channel a section of its
/// own, so shared sections stay as they were; nodes and channel ends do not change.
fn apply(
    network: &Network,
    vars: &[SizeVar],
    z: &[f64],
    cache: &NumericCache,
) -> Result<Network, DesignError> {
    let mut net = network.clone();
    for (v, &val) in vars.iter().zip(z) {
        match v.dim {
            SizeDim::Length => net.channels[v.channel].length = Length::from_si(val),
            SizeDim::Width => {
                let section = sized_section(&net, v, val, cache)?;
                net.sections.push(section);
                net.channels[v.channel].section = SectionId(net.sections.len() - 1);
            }
        }
    }
    Ok(net)
}

/// The section of `v`'s channel with its width set to `value`, with its figures (closed form,
/// else solved to the network's section tolerance).
fn sized_section(
    net: &Network,
    v: &SizeVar,
    value: f64,
    cache: &NumericCache,
) -> Result<Section, DesignError> {
    let ch = &net.channels[v.channel];
    let unsupported = |shape: &Shape| DesignError::WidthUnsupported {
        channel: ch.name.clone(),
        shape: shape.kind(),
    };
    let shape = &net.sections[ch.section].shape;
    let new = with_dimension(shape, "width", value).ok_or_else(|| unsupported(shape))?;
    let figures = cache
        .figures(&new, net.section_tolerance)
        .map_err(|reason| DesignError::SizedSection {
            channel: ch.name.clone(),
            reason,
        })?;
    Ok(Section {
        name: format!("{}.section", ch.name),
        named: false,
        shape: new,
        figures,
    })
}

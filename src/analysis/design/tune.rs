//! Tuning: the adjustable port settings that best meet the targets, within bounds and limits.
//!
//! Tuning is linear: flows and pressures are linear in the drive settings, so the response to
//! each adjustable port is one extra right-hand side on the same factorisation (the matrix
//! does not depend on the drives). Every target row is linear with a fixed scale (see
//! `targets`), so the weighted least-squares problem
//!
//!   minimise Σ w_t·row_t(x)²  subject to  bounds, |q_k| ≤ q̄_k (wall-shear limits),
//!   −min(rating, 1 atm) ≤ p_i ≤ rating (pressure rating and vacuum)
//!
//! is a linear least-squares problem with linear inequality constraints, solved exactly by
//! [`super::super::lsq`] (Lawson & Hanson 1974: LSI → LDP → NNLS), with the least change from
//! the file's settings in the directions the targets cannot see.
//!
//! Conventions:
//! - settings are scaled to O(1): y_j = x_j/s_j with s_j = max(|min|, |max|, |file setting|);
//! - a split's reference flow Q_ref is the group's flow at full scale of every port,
//!   Σ_c (|q⁰_c| + Σ_j s_j·|∂q_c/∂x_j|) (q⁰: the fixed ports alone), a constant of the problem;
//! - a wall-shear target's flow sign is the sign at the file's settings (clamped to bounds);
//! - a target no adjustable port can move (its row of the response matrix is below 1e-9 of its
//!   scale over the settings' range, or, for a split, every port changes the group's flows in
//!   the same proportion as the fixed ports do) is reported not controllable and left out;
//! - limits are held with a relative margin of [`limits::LIMIT_MARGIN`], so that a copy written with
//!   enough digits stays inside them; a limit is reported active within [`ACTIVE_TOL`] of it
//!   (both in [`super::limits`], shared with sizing).

use super::super::kirchhoff::{conductances, drive_values, FlowSolution, Solver};
use super::super::lsq;
use super::concentration::{self, ConcentrationRow};
use super::limits::{
    self, bound_constraints, ActiveLimit, Constraint, Label, LimitHandling, Linearised, ACTIVE_TOL,
};
use super::targets::{outcomes, rows, NotControllable, Scales, TargetOutcome};
use super::{Adjustable, Design, DesignError, TargetKind};
use crate::network::{Network, NodeId};

/// A response below this fraction of a target's scale (over the whole range of the settings)
/// counts as none.
const CONTROL_TOL: f64 = 1e-9;

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

/// Singular values of the (scaled, weighted) response matrix below this fraction of the
/// largest make the problem badly conditioned: their directions are reported.
pub const WEAK_DIRECTION: f64 = 1e-6;

/// Directions in the settings that the targets cannot see (free: singular values at or below
/// [`lsq::RANK_TOL`] of the largest, taking the least change from the file's settings) or
/// barely see (weak: below [`WEAK_DIRECTION`], badly conditioned).
#[derive(Clone, Debug, PartialEq)]
pub struct FreeDirection {
    /// Ports that move along the direction(s).
    pub ports: Vec<NodeId>,
    /// Targets that depend on those ports (and cannot, or barely, tell them apart).
    pub targets: Vec<usize>,
    /// Free (true) or weak (false).
    pub free: bool,
    /// Singular value over the largest (0 for free directions counted as such).
    pub singular_value_ratio: f64,
}

/// Result of tuning.
#[derive(Clone, Debug, PartialEq)]
pub struct TuneResult {
    pub settings: Vec<Setting>,
    pub targets: Vec<TargetOutcome>,
    /// ‖weighted residual‖ at the optimum (controllable targets).
    pub residual_norm: f64,
    /// Every target met within its tolerance.
    pub all_targets_met: bool,
    pub limits: LimitHandling,
    /// Limits the settings sit on (constraints with no slack).
    pub active_limits: Vec<ActiveLimit>,
    /// Directions left to the least change from the file's settings.
    pub free_directions: Vec<FreeDirection>,
    /// Significant digits of the written settings (set when a copy is written).
    pub written_digits: Option<usize>,
    /// The checked flow state at the tuned settings (with its refinement count and residual).
    pub solution: FlowSolution,
}

/// Options of [`tune_with_options`].
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct TuneOptions {
    /// Leave wall-shear limits, the pressure rating and vacuum out of the problem.
    pub ignore_limits: bool,
}

/// Find the adjustable port settings that best meet the targets, within bounds and limits
/// ([`tune_with`] on a new [`Solver`]).
pub fn tune(network: &Network, design: &Design) -> Result<TuneResult, DesignError> {
    check_design(design)?;
    tune_with(&Solver::new(network)?, design)
}

/// [`tune_with_options`] with the limits held.
pub fn tune_with(solver: &Solver<'_>, design: &Design) -> Result<TuneResult, DesignError> {
    tune_with_options(solver, design, TuneOptions::default())
}

/// [`tune`] on the network of `solver`: one factorisation ([`Solver::factorize`]) serves the
/// unit responses ([`super::super::kirchhoff::Factor::solve_many`]) and the check at the
/// tuned settings.
pub fn tune_with_options(
    solver: &Solver<'_>,
    design: &Design,
    options: TuneOptions,
) -> Result<TuneResult, DesignError> {
    check_design(design)?;
    let network = solver.network();
    let base = drive_values(network);
    let factor = solver.factorize(conductances(network))?;
    let states = factor.solve_many(&drive_sets(&base, &design.adjustable))?;
    let scaled = Scaled::new(&base, &design.adjustable);
    let problem = Problem::new(network, design, &scaled, &states);
    let bounds = bound_constraints(&scaled.lo, &scaled.hi);
    let mut limits = if options.ignore_limits {
        LimitHandling::Ignored
    } else {
        LimitHandling::Constrained
    };
    let limit_rows = if options.ignore_limits {
        vec![]
    } else {
        limit_constraints(network, &scaled, &states)
    };
    let all: Vec<Constraint> = bounds.iter().chain(&limit_rows).cloned().collect();
    let conc = concentration::rows(design);
    let mut lsi = problem.solve(&all, &scaled.start);
    if !lsi.feasible {
        limits = LimitHandling::Unattainable;
        lsi = problem.solve(&bounds, &scaled.start);
    }
    let used = if limits == LimitHandling::Constrained {
        &all
    } else {
        &bounds
    };
    let clamp = |x: &[f64]| -> Vec<f64> {
        x.iter()
            .zip(scaled.lo.iter().zip(&scaled.hi))
            .map(|(y, (lo, hi))| y.clamp(*lo, *hi))
            .collect()
    };
    let mut y: Vec<f64> = clamp(&lsi.x);
    let mut residual_norm = lsi.residual_norm;
    let mut conc_flat: Vec<bool> = vec![false; conc.len()];
    let mut problem = problem;
    if !conc.is_empty() {
        let nonlinear = gauss_newton(network, &problem, &conc, &scaled, &states, used)?;
        // A setting within rounding (1e-13 of its scale) of a bound is set on it: the
        // iteration lands there only to rounding, and a copy must not get 1e-16 mbar.
        y = clamp(&nonlinear.y)
            .into_iter()
            .zip(scaled.lo.iter().zip(&scaled.hi))
            .map(|(y, (lo, hi))| {
                if (y - lo).abs() <= 1e-13 {
                    *lo
                } else if (y - hi).abs() <= 1e-13 {
                    *hi
                } else {
                    y
                }
            })
            .collect();
        residual_norm = nonlinear.residual_norm;
        conc_flat = nonlinear.flat;
        lsi = nonlinear.lsi;
        problem = nonlinear.problem;
    }
    let tuned = scaled.settings(&base, &design.adjustable, &y);
    let solution = factor.solve(&tuned)?;
    let mut targets = outcomes(
        network,
        &design.targets,
        &solution.pressures,
        &solution.flows,
        &solution.node_net_inflow,
    );
    for (o, c) in targets.iter_mut().zip(&problem.control) {
        o.controllable = c.is_none();
        o.not_controllable = *c;
    }
    for (row, flat) in conc.iter().zip(&conc_flat) {
        let o = &mut targets[row.target];
        if *flat && !o.met {
            o.controllable = false;
            o.not_controllable = Some(NotControllable::NoResponse);
        }
    }
    let active = |label: &Label| {
        used.iter()
            .zip(&lsi.slack)
            .any(|(c, s)| &c.label == label && *s <= 1e-9)
    };
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
            at_bound: if a.min == a.max {
                0
            } else if active(&Label::Lower(j)) || y[j] <= scaled.lo[j] {
                -1
            } else if active(&Label::Upper(j)) || y[j] >= scaled.hi[j] {
                1
            } else {
                0
            },
        })
        .collect();
    let active_limits = if limits == LimitHandling::Constrained {
        used.iter()
            .zip(&lsi.slack)
            .filter(|(_, s)| **s <= ACTIVE_TOL)
            .filter_map(|(c, _)| c.label.limit())
            .collect()
    } else {
        vec![]
    };
    Ok(TuneResult {
        all_targets_met: targets.iter().all(|t| t.met),
        residual_norm,
        free_directions: problem.free_directions(&lsi, &design.adjustable),
        settings,
        targets,
        limits,
        active_limits,
        written_digits: None,
        solution,
    })
}

/// Largest number of Gauss–Newton steps for concentration targets.
const MAX_STEPS: usize = 100;

/// What the Gauss–Newton iteration for concentration targets ended with.
struct Nonlinear {
    y: Vec<f64>,
    /// The last step's problem and LSI (linearised at `y`): slacks, free directions.
    lsi: lsq::Lsi,
    problem: Problem,
    residual_norm: f64,
    /// Per concentration row: its gradient vanishes at `y` (no port moves it there).
    flat: Vec<bool>,
}

/// The state at the scaled settings `y`: flows and port flows by superposition of the unit
/// responses (exact: they are linear in the drives), and their derivatives along each y_j.
fn state_at(scaled: &Scaled, states: &[FlowSolution], y: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let n_ch = states[0].flows.len();
    let n = states[0].node_net_inflow.len();
    let flows = (0..n_ch)
        .map(|k| scaled.superpose(states, y, |st| st.flows[k]))
        .collect();
    let into = (0..n)
        .map(|i| scaled.superpose(states, y, |st| st.node_net_inflow[i]))
        .collect();
    (flows, into)
}

/// Damped Gauss–Newton over the scaled settings for the concentration targets (nonlinear)
/// together with the linear rows of `problem`: at each step the concentration rows are
/// linearised at y (analytic derivatives through the flows, [`concentration`]) and the
/// linear least-squares problem with the bounds and limits `constraints` is solved exactly
/// ([`lsq`], least change from y in the directions the targets cannot see); the step is
/// halved until the sum of squares decreases. The constraints are linear, so every point
/// between two feasible settings is feasible. It stops when a step no longer decreases the
/// sum of squares or changes no setting by more than 1e-15 of its scale. The iteration starts
/// at the file's settings (clamped), or where every concentration target's channel carries
/// flow: the middle of the bounds, else their upper ends.
fn gauss_newton(
    network: &Network,
    problem: &Problem,
    conc: &[ConcentrationRow],
    scaled: &Scaled,
    states: &[FlowSolution],
    constraints: &[Constraint],
) -> Result<Nonlinear, DesignError> {
    let dflows: Vec<Vec<f64>> = states[1..]
        .iter()
        .zip(&scaled.scale)
        .map(|(st, s)| st.flows.iter().map(|q| q * s).collect())
        .collect();
    let dinto: Vec<Vec<f64>> = states[1..]
        .iter()
        .zip(&scaled.scale)
        .map(|(st, s)| st.node_net_inflow.iter().map(|q| q * s).collect())
        .collect();
    let lin_at = |y: &[f64]| -> Result<Vec<concentration::Linear>, DesignError> {
        let (flows, into) = state_at(scaled, states, y);
        concentration::linearise(
            network,
            conc,
            &concentration::State {
                flows: &flows,
                into_chip: &into,
                dflows: &dflows,
                dinto: &dinto,
            },
        )
    };
    // Sum of squares of every row at y (infinite where a concentration target has no flow).
    let objective = |y: &[f64], lin: &[concentration::Linear]| -> f64 {
        let linear: f64 = problem
            .a
            .iter()
            .zip(&problem.r)
            .map(|(a, r)| {
                let v = a.iter().zip(y).map(|(a, y)| a * y).sum::<f64>() - r;
                v * v
            })
            .sum();
        lin.iter()
            .map(|l| l.residual.map_or(f64::INFINITY, |r| r * r))
            .sum::<f64>()
            + linear
    };
    let mid: Vec<f64> = scaled
        .lo
        .iter()
        .zip(&scaled.hi)
        .map(|(l, h)| 0.5 * (l + h))
        .collect();
    let mut y = scaled.start.clone();
    let mut lin = lin_at(&y)?;
    if lin.iter().any(|l| l.residual.is_none()) {
        for candidate in [&mid, &scaled.hi] {
            let l = lin_at(candidate)?;
            if l.iter().all(|l| l.residual.is_some()) {
                y = candidate.clone();
                lin = l;
                break;
            }
        }
    }
    let mut f = objective(&y, &lin);
    let mut lsi;
    let mut last;
    let mut steps = 0;
    loop {
        last = problem.with_concentrations(conc, &lin, &y);
        lsi = last.solve(constraints, &y);
        steps += 1;
        if !lsi.feasible || steps > MAX_STEPS {
            break;
        }
        let dir: Vec<f64> = lsi.x.iter().zip(&y).map(|(a, b)| a - b).collect();
        if dir.iter().all(|d| d.abs() <= 1e-15) {
            break;
        }
        let mut alpha = 1.0;
        let mut accepted = None;
        while alpha >= 1e-10 {
            let trial: Vec<f64> = y.iter().zip(&dir).map(|(y, d)| y + alpha * d).collect();
            let l = lin_at(&trial)?;
            let ft = objective(&trial, &l);
            if ft < f || (ft == 0.0 && f == 0.0) {
                accepted = Some((trial, l, ft));
                break;
            }
            alpha *= 0.5;
        }
        let Some((trial, l, ft)) = accepted else {
            break;
        };
        let small = trial
            .iter()
            .zip(&y)
            .all(|(a, b)| (a - b).abs() <= 1e-15 * a.abs().max(1.0));
        y = trial;
        lin = l;
        let stalled = ft >= f * (1.0 - 1e-12);
        f = ft;
        if small || stalled || f == 0.0 {
            last = problem.with_concentrations(conc, &lin, &y);
            lsi = last.solve(constraints, &y);
            break;
        }
    }
    let flat = lin
        .iter()
        .map(|l| l.gradient.iter().all(|g| g.abs() <= CONTROL_TOL))
        .collect();
    Ok(Nonlinear {
        y,
        lsi,
        problem: last,
        residual_norm: f.sqrt(),
        flat,
    })
}

fn check_design(design: &Design) -> Result<(), DesignError> {
    if design.targets.is_empty() {
        return Err(DesignError::NoTargets);
    }
    if design.adjustable.is_empty() {
        return Err(DesignError::NoAdjustable);
    }
    Ok(())
}

/// Drive sets: the fixed ports alone (adjustable ones at 0), then each adjustable port alone
/// at 1 (its unit response).
fn drive_sets(base: &[f64], adjustable: &[Adjustable]) -> Vec<Vec<f64>> {
    let mut fixed = base.to_vec();
    for a in adjustable {
        fixed[a.node.0] = 0.0;
    }
    let mut sets = vec![fixed];
    for a in adjustable {
        let mut d = vec![0.0; base.len()];
        d[a.node.0] = 1.0;
        sets.push(d);
    }
    sets
}

/// The tuning variables scaled to O(1), x_j = s_j·y_j, with their bounds and start.
struct Scaled {
    scale: Vec<f64>,
    lo: Vec<f64>,
    hi: Vec<f64>,
    start: Vec<f64>,
}

impl Scaled {
    fn new(base: &[f64], adjustable: &[Adjustable]) -> Scaled {
        let scale: Vec<f64> = adjustable
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
            adjustable
                .iter()
                .zip(&scale)
                .map(|(a, s)| f(a) / s)
                .collect()
        };
        Scaled {
            lo: scaled(&|a| a.min),
            hi: scaled(&|a| a.max),
            start: scaled(&|a| base[a.node.0].clamp(a.min, a.max)),
            scale,
        }
    }

    /// The drives with the adjustable ports at the scaled settings `y`.
    fn settings(&self, base: &[f64], adjustable: &[Adjustable], y: &[f64]) -> Vec<f64> {
        let mut drives = base.to_vec();
        for ((a, yj), s) in adjustable.iter().zip(y).zip(&self.scale) {
            drives[a.node.0] = yj * s;
        }
        drives
    }

    /// A linear quantity of the state at the scaled settings `y`: value(fixed) + Σ y_j·s_j·
    /// value(unit j).
    fn superpose(
        &self,
        states: &[FlowSolution],
        y: &[f64],
        value: impl Fn(&FlowSolution) -> f64,
    ) -> f64 {
        value(&states[0])
            + states[1..]
                .iter()
                .zip(y)
                .zip(&self.scale)
                .map(|((st, yj), s)| yj * s * value(st))
                .sum::<f64>()
    }
}

/// Wall-shear limits (|q_k| ≤ q̄_k) and the pressure rating and vacuum at every node, as
/// constraints on the scaled settings: exactly linear, value(y) = value(fixed ports) +
/// Σ_j y_j·s_j·value(unit j).
fn limit_constraints(
    network: &Network,
    scaled: &Scaled,
    states: &[FlowSolution],
) -> Vec<Constraint> {
    let along = |value: &dyn Fn(&FlowSolution) -> f64| -> Vec<f64> {
        states[1..]
            .iter()
            .zip(&scaled.scale)
            .map(|(st, s)| value(st) * s)
            .collect()
    };
    limits::limit_constraints(
        network,
        &Linearised {
            flows: &states[0].flows,
            pressures: &states[0].pressures,
            dflow: &|k| along(&|st| st.flows[k]),
            dpressure: &|i| along(&|st| st.pressures[i]),
            dbound: &|_| vec![],
        },
    )
}

/// The weighted least-squares problem in the scaled settings: A·y ≈ r over the controllable
/// targets' rows.
struct Problem {
    a: Vec<Vec<f64>>,
    r: Vec<f64>,
    /// The target of each row.
    row_target: Vec<usize>,
    /// Why each target is not controllable (None: it is).
    control: Vec<Option<NotControllable>>,
}

impl Problem {
    fn new(
        network: &Network,
        design: &Design,
        scaled: &Scaled,
        states: &[FlowSolution],
    ) -> Problem {
        let targets = &design.targets;
        // Reference flows at the file's settings (clamped) for the wall-shear signs, and the
        // split groups' flow at full scale.
        let n_ch = network.channels.len();
        let flows_at_start: Vec<f64> = (0..n_ch)
            .map(|k| scaled.superpose(states, &scaled.start, |st| st.flows[k]))
            .collect();
        let mut scales = Scales::from_flows(targets, &flows_at_start);
        for (t, target) in targets.iter().enumerate() {
            if let TargetKind::Split { channels, .. } = &target.kind {
                let full: f64 = channels
                    .iter()
                    .map(|c| {
                        states[0].flows[c.0].abs()
                            + states[1..]
                                .iter()
                                .zip(&scaled.scale)
                                .map(|(st, s)| s * st.flows[c.0].abs())
                                .sum::<f64>()
                    })
                    .sum();
                scales.split_ref[t] = full.max(1e-18);
            }
        }
        let control: Vec<Option<NotControllable>> = targets
            .iter()
            .map(|t| controllability(&t.kind, scaled, states))
            .collect();
        let rws = rows(network, targets, &scales);
        let mut a = Vec::new();
        let mut r = Vec::new();
        let mut row_target = Vec::new();
        for row in rws.iter().filter(|row| control[row.target].is_none()) {
            let w = row.weight.sqrt();
            a.push(
                states[1..]
                    .iter()
                    .zip(&scaled.scale)
                    .map(|(st, s)| w * row.measure(&st.pressures, &st.flows) * s / row.scale)
                    .collect(),
            );
            r.push(-row.residual(&states[0].pressures, &states[0].flows));
            row_target.push(row.target);
        }
        Problem {
            a,
            r,
            row_target,
            control,
        }
    }

    /// The problem with the concentration rows linearised at y appended: gradient·y' ≈
    /// gradient·y − residual (one Gauss–Newton step's rows). Rows without flow are left out.
    fn with_concentrations(
        &self,
        conc: &[ConcentrationRow],
        lin: &[concentration::Linear],
        y: &[f64],
    ) -> Problem {
        let mut p = Problem {
            a: self.a.clone(),
            r: self.r.clone(),
            row_target: self.row_target.clone(),
            control: self.control.clone(),
        };
        for (row, l) in conc.iter().zip(lin) {
            let Some(res) = l.residual else { continue };
            let gy: f64 = l.gradient.iter().zip(y).map(|(g, y)| g * y).sum();
            p.a.push(l.gradient.clone());
            p.r.push(gy - res);
            p.row_target.push(row.target);
        }
        p
    }

    fn solve(&self, constraints: &[Constraint], start: &[f64]) -> lsq::Lsi {
        let g: Vec<Vec<f64>> = constraints.iter().map(|c| c.g.clone()).collect();
        let h: Vec<f64> = constraints.iter().map(|c| c.h).collect();
        lsq::solve(&self.a, &self.r, &g, &h, start)
    }

    /// The free directions of the solve (together) and each weak one, with the ports that
    /// move along them and the targets that depend on those ports.
    fn free_directions(&self, lsi: &lsq::Lsi, adjustable: &[Adjustable]) -> Vec<FreeDirection> {
        if self.a.is_empty() {
            return vec![];
        }
        let top = lsi.singular_values.first().copied().unwrap_or(0.0);
        let ratio = |i: usize| {
            if top > 0.0 {
                lsi.singular_values[i] / top
            } else {
                0.0
            }
        };
        let mut out = Vec::new();
        let weak: Vec<usize> = (0..lsi.rank)
            .filter(|&i| ratio(i) <= WEAK_DIRECTION)
            .collect();
        for i in weak {
            out.push(self.direction(&[&lsi.directions[i]], adjustable, false, ratio(i)));
        }
        if !lsi.free.is_empty() {
            let vs: Vec<&Vec<f64>> = lsi.free.iter().collect();
            out.push(self.direction(&vs, adjustable, true, 0.0));
        }
        out
    }

    fn direction(
        &self,
        vs: &[&Vec<f64>],
        adjustable: &[Adjustable],
        free: bool,
        singular_value_ratio: f64,
    ) -> FreeDirection {
        let mut ports: Vec<usize> = Vec::new();
        for v in vs {
            let top = v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            for (j, x) in v.iter().enumerate() {
                if x.abs() >= 1e-3 * top && !ports.contains(&j) {
                    ports.push(j);
                }
            }
        }
        ports.sort_unstable();
        let mut targets: Vec<usize> = Vec::new();
        for (row, &t) in self.a.iter().zip(&self.row_target) {
            let top = row.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            let depends = ports
                .iter()
                .any(|&j| row[j].abs() > CONTROL_TOL * top.max(1e-300));
            if depends && !targets.contains(&t) {
                targets.push(t);
            }
        }
        targets.sort_unstable();
        FreeDirection {
            ports: ports.iter().map(|&j| adjustable[j].node).collect(),
            targets,
            free,
            singular_value_ratio,
        }
    }
}

/// Whether any adjustable port can move the target (None) or why not.
fn controllability(
    kind: &TargetKind,
    scaled: &Scaled,
    states: &[FlowSolution],
) -> Option<NotControllable> {
    let units = &states[1..];
    // Largest change of a linear quantity over the settings' range (|y_j| ≤ 1).
    let reach = |value: &dyn Fn(&FlowSolution) -> f64| -> f64 {
        units
            .iter()
            .zip(&scaled.scale)
            .map(|(st, s)| (value(st) * s).abs())
            .fold(0.0, f64::max)
    };
    match kind {
        TargetKind::ChannelFlow { channel, flow } => {
            let r = reach(&|st| st.flows[channel.0]);
            (r <= CONTROL_TOL * flow.abs().max(1e-300)).then_some(NotControllable::NoResponse)
        }
        TargetKind::NodePressure { node, pressure } => {
            let r = reach(&|st| st.pressures[node.0]);
            (r <= CONTROL_TOL * pressure.abs().max(super::targets::P_REF))
                .then_some(NotControllable::NoResponse)
        }
        TargetKind::WallShear { channel, .. } => {
            // Relative to the flow at full scale (the shear is proportional to the flow).
            let r = reach(&|st| st.flows[channel.0]);
            let full = r + states[0].flows[channel.0].abs();
            (r <= CONTROL_TOL * full || r == 0.0).then_some(NotControllable::NoResponse)
        }
        // Judged at the tuned settings (a concentration's response depends on the state).
        TargetKind::Concentration { .. } => None,
        TargetKind::Split { channels, .. } => {
            // Columns: the fixed ports' flows and each port's flows at full scale, over the
            // group. The shares cannot move when every column is parallel to the largest.
            let mut cols: Vec<Vec<f64>> =
                vec![channels.iter().map(|c| states[0].flows[c.0]).collect()];
            for (st, s) in units.iter().zip(&scaled.scale) {
                cols.push(channels.iter().map(|c| s * st.flows[c.0]).collect());
            }
            let norm = |v: &[f64]| v.iter().map(|x| x * x).sum::<f64>().sqrt();
            if cols[1..].iter().all(|c| norm(c) == 0.0) {
                return Some(NotControllable::NoResponse);
            }
            let big = cols
                .iter()
                .max_by(|a, b| norm(a).total_cmp(&norm(b)))
                .cloned()
                .unwrap_or_default();
            let nb = norm(&big);
            let parallel = cols.iter().all(|c| {
                let proj = c.iter().zip(&big).map(|(a, b)| a * b).sum::<f64>() / (nb * nb);
                let perp: Vec<f64> = c.iter().zip(&big).map(|(a, b)| a - proj * b).collect();
                norm(&perp) <= CONTROL_TOL * nb
            });
            parallel.then_some(NotControllable::FixedShares)
        }
    }
}

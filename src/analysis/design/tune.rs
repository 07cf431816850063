//! Tuning: the adjustable port settings that best meet the targets, within bounds.
//!
//! Tuning is linear: flows and pressures are linear in the drive settings, so the response to
//! each adjustable port is one extra right-hand side on the same factorisation (the matrix
//! does not depend on the drives), and the bounded least-squares problem is solved exactly
//! ([`super::super::boxqp`]). Split rows depend on the flows through Q_ref, so the problem is
//! re-linearised a few times (fixed-point passes).

use super::super::boxqp::{self, BoxLsq};
use super::super::kirchhoff::{conductances, drive_values, FlowSolution, Solver};
use super::targets::{outcomes, residual_norm, rows, TargetOutcome, MET};
use super::{Adjustable, Design, DesignError};
use crate::network::{Network, NodeId};

/// Fixed-point passes over the split scales Q_ref.
const PASSES: usize = 4;

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
    /// The checked flow state at the tuned settings (with its refinement count and residual).
    pub solution: FlowSolution,
}

/// Find the adjustable port settings that best meet the targets, within bounds
/// ([`tune_with`] on a new [`Solver`]).
pub fn tune(network: &Network, design: &Design) -> Result<TuneResult, DesignError> {
    check_design(design)?;
    tune_with(&Solver::new(network)?, design)
}

/// [`tune`] on the network of `solver`: one factorisation ([`Solver::factorize`]) serves the
/// unit responses ([`super::super::kirchhoff::Factor::solve_many`]) and the check at the
/// tuned settings.
pub fn tune_with(solver: &Solver<'_>, design: &Design) -> Result<TuneResult, DesignError> {
    check_design(design)?;
    let network = solver.network();
    let base = drive_values(network);
    let factor = solver.factorize(conductances(network))?;
    let states = factor.solve_many(&drive_sets(&base, &design.adjustable))?;
    let problem = Scaled::new(&base, &design.adjustable);
    let best = fixed_point(design, &problem, &states);
    let tuned = problem.settings(&base, &design.adjustable, &best.x);
    let solution = factor.solve(&tuned)?;
    let targets = outcomes(
        network,
        &design.targets,
        &solution.pressures,
        &solution.flows,
    );
    let settings = design
        .adjustable
        .iter()
        .zip(&best.active)
        .map(|(a, &at_bound)| Setting {
            node: a.node,
            before: base[a.node.0],
            after: tuned[a.node.0],
            min: a.min,
            max: a.max,
            at_bound,
        })
        .collect();
    Ok(TuneResult {
        feasible: targets.iter().all(|t| t.miss <= MET),
        residual_norm: residual_norm(&design.targets, &solution.pressures, &solution.flows),
        settings,
        targets,
        solution,
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

    /// Flows at the scaled settings `y`, superposed from the unit responses.
    fn flows(&self, states: &[FlowSolution], y: &[f64]) -> Vec<f64> {
        let mut q = states[0].flows.clone();
        for ((state, yj), s) in states[1..].iter().zip(y).zip(&self.scale) {
            for (qi, v) in q.iter_mut().zip(&state.flows) {
                *qi += yj * s * v;
            }
        }
        q
    }
}

/// Bounded linear least squares, re-linearised while the split scales move (at most
/// [`PASSES`] passes, stopping when the settings repeat to 1e-13).
fn fixed_point(design: &Design, problem: &Scaled, states: &[FlowSolution]) -> BoxLsq {
    let mut y = problem.start.clone();
    let mut sol = linearised(design, problem, states, &y);
    for _ in 1..PASSES {
        let converged = sol
            .x
            .iter()
            .zip(&y)
            .all(|(a, b)| (a - b).abs() <= 1e-13 * a.abs().max(1.0));
        if converged {
            break;
        }
        y = sol.x.clone();
        sol = linearised(design, problem, states, &y);
    }
    sol
}

/// One pass: rows at the flows of `y`, columns the scaled unit responses, solved in the box.
fn linearised(design: &Design, problem: &Scaled, states: &[FlowSolution], y: &[f64]) -> BoxLsq {
    let rws = rows(&design.targets, &problem.flows(states, y));
    let a: Vec<Vec<f64>> = rws
        .iter()
        .map(|r| {
            states[1..]
                .iter()
                .zip(&problem.scale)
                .map(|(st, s)| r.weight.sqrt() * r.measure(&st.pressures, &st.flows) * s / r.scale)
                .collect()
        })
        .collect();
    let rhs: Vec<f64> = rws
        .iter()
        .map(|r| -r.residual(&states[0].pressures, &states[0].flows))
        .collect();
    boxqp::solve(&a, &rhs, &problem.lo, &problem.hi, &problem.start)
}

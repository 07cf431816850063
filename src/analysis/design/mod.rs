//! Design answers: drive settings for target flows (tuning), channel sizes for target splits
//! (sizing), and sensitivities of flows to channel dimensions (adjoint method).
//!
//! - `targets`: targets → dimensionless residual rows with fixed scales, and how each target
//!   came out against its tolerance ([`evaluate`]);
//! - `tune`: linear least squares with bounds and limits as linear inequality constraints over
//!   the adjustable ports (unit responses on one factorisation, [`super::lsq`]);
//! - `adjoint`: gradients of linear measures with respect to conductances, and the
//!   sensitivities of flows to channel dimensions;
//! - `size`: bounded, damped Gauss–Newton over channel lengths and widths, limits held in
//!   each step;
//! - `limits`: wall-shear limits, pressure rating and vacuum as linear inequality rows;
//! - `serpentine`: how a long sized channel folds into a footprint.
//!
//! Every solve goes through one [`Solver`](super::kirchhoff::Solver) per chip (one symbolic
//! analysis) and its checked, refined [`Factor`](super::kirchhoff::Factor): tuning
//! factorises once for all its drive sets, sizing once per evaluation (conductances change,
//! the topology does not), and the adjoint solves are refined and checked like the flow
//! solves. The `*_with` variants take the solver from the caller, so that its counters
//! ([`Solver::factorizations`](super::kirchhoff::Solver::factorizations)) show what was done.

mod adjoint;
mod concentration;
mod dimensions;
mod limits;
mod serpentine;
mod size;
mod targets;
mod tune;

pub use crate::chip::design::{
    Adjustable, Design, Measure, ShearMeasure, SizeDim, SizeVar, Target, TargetKind, Tolerance,
    DEFAULT_TOLERANCE,
};
pub use adjoint::{
    dlog_resistance, dlog_resistance_numeric, sensitivities, sensitivities_with, NumericDerivative,
    Sensitivity, DERIVATIVE_TOLERANCE,
};
pub use dimensions::{dimension, with_dimension};
pub use limits::{ActiveLimit, LimitHandling, LimitKind, ACTIVE_TOL, LIMIT_MARGIN};
pub use serpentine::{serpentine, Serpentine};
pub use size::{size, size_with, size_with_options, SizeOptions, SizeResult, SizedDim};
pub use targets::{evaluate, NotControllable, TargetOutcome, TargetQuantity};
pub use tune::{
    tune, tune_with, tune_with_options, FreeDirection, Setting, TuneOptions, TuneResult,
};

use super::kirchhoff::SolveError;
use crate::network::{Network, NodeId, Port};

/// Why a design question could not be answered.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum DesignError {
    #[error(
        "the chip has no targets; add a 'targets:' list (channel flow, wall shear, split or node pressure)"
    )]
    NoTargets,
    #[error("no port is adjustable; add 'adjust: {{min: ..., max: ...}}' to the ports tuning may change")]
    NoAdjustable,
    #[error("no channel dimension is free; add 'size: {{length: {{min: ..., max: ...}}}}' (or width) to a channel")]
    NoSizes,
    #[error("channel '{channel}': width sizing needs a section with a width (circle, rectangle, ellipse, plates, trapezoid, d-shape, rounded-rectangle, profile); its section is a {shape}")]
    WidthUnsupported {
        channel: String,
        shape: &'static str,
    },
    #[error("channel '{channel}': the section at the sized width cannot be solved ({reason}); narrow the width's min/max")]
    SizedSection { channel: String, reason: String },
    #[error("concentration targets are met by 'tune' (drive settings), not by 'size'; remove them from the chip that is sized")]
    ConcentrationInSize,
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error(transparent)]
    Solute(#[from] crate::analysis::solutes::SoluteError),
}

/// Port kind for reports.
pub fn is_pressure_port(network: &Network, node: NodeId) -> bool {
    matches!(network.nodes[node].port, Port::Pressure(_))
}

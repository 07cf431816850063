//! Limits as linear inequality constraints, shared by tuning and sizing.
//!
//! Every channel with a wall-shear limit τ̄ (its own, else the fluid's) holds |q_k| ≤ q̄_k =
//! τ̄·K/(s·μ), with s = τ_max/G of its section (τ_max = s·|Δp|/L = s·μ·|q|/K); every node holds
//! −min(rating, 1 atm) ≤ p_i ≤ rating with the chip's pressure rating, and p_i ≥ −1 atm
//! (vacuum) without one. Tuning writes them on the drives, where they are exactly linear
//! (`tune`); sizing linearises them at each Gauss–Newton iterate (`size`). Each side is held
//! with a relative margin of [`LIMIT_MARGIN`] and divided by the size of its bound, so that
//! its slack is a fraction of the limit; a limit counts as active within [`ACTIVE_TOL`] of it.

use super::super::limits::STANDARD_ATMOSPHERE;
use super::super::Place;
use crate::network::{ChannelId, Network, NodeId};

/// Relative margin inside every limit held as a constraint.
pub const LIMIT_MARGIN: f64 = 1e-8;

/// A limit counts as active when the state is within this fraction of it (beyond the
/// margin): many channels in series can sit on their limits together, and the solve places
/// them on it only to its own accuracy.
pub const ACTIVE_TOL: f64 = 1e-7;

/// Which limit a constraint holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LimitKind {
    /// A channel's maximum wall shear against its limit.
    WallShear,
    /// A node's gauge pressure against the chip's pressure rating.
    PressureRating,
    /// A node's gauge pressure against −1 atm (vacuum).
    Vacuum,
}

/// A limit the answer sits on.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ActiveLimit {
    pub place: Place,
    pub kind: LimitKind,
    /// +1 at the upper side (flow in the channel's direction, pressure above), −1 below.
    pub side: i8,
}

/// How limits entered the problem.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LimitHandling {
    /// Held as constraints.
    Constrained,
    /// Left out on request (`--ignore-limits`).
    Ignored,
    /// The limits cannot all hold within the bounds (tuning: with the fixed ports as they
    /// are; sizing: in the linearisation at an iterate); the answer was found without them.
    Unattainable,
}

/// What a constraint row holds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum Label {
    Lower(usize),
    Upper(usize),
    Shear(ChannelId, i8),
    Rating(NodeId, i8),
    Vacuum(NodeId),
}

impl Label {
    /// The limit the row holds (`None` for a variable's bound).
    pub(super) fn limit(&self) -> Option<ActiveLimit> {
        match *self {
            Label::Lower(_) | Label::Upper(_) => None,
            Label::Shear(c, side) => Some(ActiveLimit {
                place: Place::Channel(c),
                kind: LimitKind::WallShear,
                side,
            }),
            Label::Rating(n, side) => Some(ActiveLimit {
                place: Place::Node(n),
                kind: LimitKind::PressureRating,
                side,
            }),
            Label::Vacuum(n) => Some(ActiveLimit {
                place: Place::Node(n),
                kind: LimitKind::Vacuum,
                side: -1,
            }),
        }
    }
}

/// One linear inequality g·y ≥ h on the (scaled) variables.
#[derive(Clone, Debug)]
pub(super) struct Constraint {
    pub(super) g: Vec<f64>,
    pub(super) h: f64,
    pub(super) label: Label,
}

/// The bounds lo ≤ y ≤ hi as constraints.
pub(super) fn bound_constraints(lo: &[f64], hi: &[f64]) -> Vec<Constraint> {
    let n = lo.len();
    let unit = |j: usize, v: f64| -> Vec<f64> {
        let mut g = vec![0.0; n];
        g[j] = v;
        g
    };
    (0..n)
        .flat_map(|j| {
            [
                Constraint {
                    g: unit(j, 1.0),
                    h: lo[j],
                    label: Label::Lower(j),
                },
                Constraint {
                    g: unit(j, -1.0),
                    h: -hi[j],
                    label: Label::Upper(j),
                },
            ]
        })
        .collect()
}

/// One side of a limit: the bound at y = 0 and its gradient over y (empty: constant).
pub(super) struct Side {
    pub(super) bound: f64,
    pub(super) grad: Vec<f64>,
    pub(super) label: Label,
}

/// `lower(y) ≤ value(y) ≤ upper(y)` for value(y) = v₀ + a·y and bounds b₀ + b·y, each side
/// held with [`LIMIT_MARGIN`] and divided by |b₀|; a limit that no variable moves is left out.
pub(super) fn two_sided(
    out: &mut Vec<Constraint>,
    v0: f64,
    a: &[f64],
    lower: Option<Side>,
    upper: Option<Side>,
) {
    let moves = |s: &Option<Side>| s.as_ref().is_some_and(|s| s.grad.iter().any(|v| *v != 0.0));
    if a.iter().all(|v| *v == 0.0) && !moves(&lower) && !moves(&upper) {
        return;
    }
    let keep = 1.0 - LIMIT_MARGIN;
    let b = |s: &Side, j: usize| s.grad.get(j).copied().unwrap_or(0.0);
    if let Some(up) = upper {
        let k = up.bound.abs();
        out.push(Constraint {
            g: (0..a.len())
                .map(|j| (b(&up, j) * keep - a[j]) / k)
                .collect(),
            h: (v0 - up.bound * keep) / k,
            label: up.label,
        });
    }
    if let Some(lo) = lower {
        let k = lo.bound.abs();
        out.push(Constraint {
            g: (0..a.len())
                .map(|j| (a[j] - b(&lo, j) * keep) / k)
                .collect(),
            h: (lo.bound * keep - v0) / k,
            label: lo.label,
        });
    }
}

/// The flow bound q̄ = τ̄·K/(s·μ) of channel `k` (`None` without a usable limit).
pub(super) fn shear_flow_bound(network: &Network, k: usize) -> Option<f64> {
    let ch = &network.channels[ChannelId(k)];
    let limit = ch.shear_limit.or(network.fluid.shear_limit)?.si();
    let fig = &network.sections[ch.section].figures;
    let mu = network.fluid.viscosity.si();
    let qbar = limit * fig.conductance_factor / (fig.max_wall_shear_per_gradient * mu);
    (qbar.is_finite() && qbar > 0.0).then_some(qbar)
}

/// The pressure bounds of node `i`: the lower side (−rating, or −1 atm when that is higher
/// or there is no rating) and the upper side (the rating, if any).
pub(super) fn pressure_bounds(network: &Network, i: usize) -> ((f64, Label), Option<(f64, Label)>) {
    let node = NodeId(i);
    let rating = network.pressure_rating.map(|r| r.si());
    let lower = match rating {
        Some(r) if r < STANDARD_ATMOSPHERE => (-r, Label::Rating(node, -1)),
        _ => (-STANDARD_ATMOSPHERE, Label::Vacuum(node)),
    };
    (lower, rating.map(|r| (r, Label::Rating(node, 1))))
}

/// The linearised state limits are written on: values at y = 0 and gradients over y.
pub(super) struct Linearised<'a> {
    pub(super) flows: &'a [f64],
    pub(super) pressures: &'a [f64],
    /// d q_k/dy.
    pub(super) dflow: &'a dyn Fn(usize) -> Vec<f64>,
    /// d p_i/dy.
    pub(super) dpressure: &'a dyn Fn(usize) -> Vec<f64>,
    /// d q̄_k/dy (empty: the bound does not move).
    pub(super) dbound: &'a dyn Fn(usize) -> Vec<f64>,
}

/// Wall-shear limits (|q_k| ≤ q̄_k) and the pressure rating and vacuum at every node as
/// constraints on y.
pub(super) fn limit_constraints(network: &Network, lin: &Linearised<'_>) -> Vec<Constraint> {
    let mut out = Vec::new();
    for k in 0..network.channels.len() {
        let Some(qbar) = shear_flow_bound(network, k) else {
            continue;
        };
        let c = ChannelId(k);
        let db = (lin.dbound)(k);
        let neg: Vec<f64> = db.iter().map(|v| -v).collect();
        two_sided(
            &mut out,
            lin.flows[k],
            &(lin.dflow)(k),
            Some(Side {
                bound: -qbar,
                grad: neg,
                label: Label::Shear(c, -1),
            }),
            Some(Side {
                bound: qbar,
                grad: db,
                label: Label::Shear(c, 1),
            }),
        );
    }
    for i in 0..network.nodes.len() {
        let ((lo, lo_label), upper) = pressure_bounds(network, i);
        two_sided(
            &mut out,
            lin.pressures[i],
            &(lin.dpressure)(i),
            Some(Side {
                bound: lo,
                grad: vec![],
                label: lo_label,
            }),
            upper.map(|(up, label)| Side {
                bound: up,
                grad: vec![],
                label,
            }),
        );
    }
    out
}

/// The limits a state sits on (within [`ACTIVE_TOL`] of the limit held with its margin) or
/// exceeds, from the state itself.
pub(super) fn limits_reached(
    network: &Network,
    flows: &[f64],
    pressures: &[f64],
) -> Vec<ActiveLimit> {
    let keep = 1.0 - LIMIT_MARGIN - ACTIVE_TOL;
    let mut out = Vec::new();
    for (k, &q) in flows.iter().enumerate() {
        if let Some(qbar) = shear_flow_bound(network, k) {
            if q.abs() >= qbar * keep {
                let side = if q < 0.0 { -1 } else { 1 };
                out.extend(Label::Shear(ChannelId(k), side).limit());
            }
        }
    }
    for (i, &p) in pressures.iter().enumerate() {
        let ((lo, lo_label), upper) = pressure_bounds(network, i);
        if p <= lo * keep {
            out.extend(lo_label.limit());
        }
        if let Some((up, label)) = upper {
            if p >= up * keep {
                out.extend(label.limit());
            }
        }
    }
    out
}

/// The largest relative excess of any limit, max(|q_k|/q̄_k − 1, p/bound − 1, 0): 0 when the
/// state keeps every limit.
pub(super) fn excess(network: &Network, flows: &[f64], pressures: &[f64]) -> f64 {
    let mut worst = 0.0f64;
    for (k, &q) in flows.iter().enumerate() {
        if let Some(qbar) = shear_flow_bound(network, k) {
            worst = worst.max(q.abs() / qbar - 1.0);
        }
    }
    for (i, &p) in pressures.iter().enumerate() {
        let ((lo, _), upper) = pressure_bounds(network, i);
        worst = worst.max(p / lo - 1.0);
        if let Some((up, _)) = upper {
            worst = worst.max(p / up - 1.0);
        }
    }
    worst
}

//! Targets as dimensionless residual rows, each weighted by √weight, and their verdicts.
//!
//! Every row is a linear measure of the state (coefficients on channel flows and node
//! pressures) minus its wanted value, over a scale that does not depend on the state:
//! - channel flow:  (q − q*)/|q*|
//! - node pressure: (p − p*)/max(|p*|, P_ref)
//! - wall shear:    (σ·s·(p_from − p_to)/L − τ*)/τ*, with s = τ_max/G (maximum) or A/P (mean)
//!   of the section and σ the sign of the channel's flow at the reference state (the shear is
//!   s·|Δp|/L = s·(μ/K)·|q|; with the sign fixed it is linear);
//! - split c₁…cₙ in ratio r₁…rₙ: one row per channel, (q_i − ρ_i·Σ_j q_j)/Q_ref with the
//!   wanted share ρ_i = r_i/Σr, zero for every i exactly when the flows are in the ratio.
//!   Q_ref is a constant of the problem chosen by the caller ([`Scales`]): tuning takes the
//!   group's total flow at full scale of every adjustable port (see `tune`), sizing the
//!   group's total flow at the starting sizes.
//!
//! Because every row is linear in the state with a fixed scale, tuning's weighted least-squares
//! problem is linear and solved exactly in one go, and the adjoint differentiates a row with
//! one extra solve.
//!
//! Concentration targets are not linear: a well-mixed concentration is a rational function of
//! the flows (a flow-weighted mean of what the ports let in). They get no row here; `tune`
//! linearises them at each step ([`concentration_scale`] is their scale).
//!
//! Verdicts do not depend on these scales: a target is met when its reached value is within
//! its [`Tolerance`] of the wanted value ([`evaluate`]).

use super::{Design, Measure, ShearMeasure, Target, TargetKind, Tolerance};
use crate::analysis::kirchhoff::FlowSolution;
use crate::analysis::solutes::{well_mixed, FlowGraph};
use crate::network::{ChannelId, Network, Port};

/// Reference pressure for pressure targets of 0 Pa.
pub const P_REF: f64 = 100.0;

/// One residual row: a linear measure of the state (coefficients on channel flows and node
/// pressures), its wanted value, and its scale.
#[derive(Clone, Debug)]
pub(super) struct Row {
    pub(super) flow_coeffs: Vec<(usize, f64)>,
    pub(super) pressure_coeffs: Vec<(usize, f64)>,
    pub(super) wanted: f64,
    pub(super) scale: f64,
    pub(super) weight: f64,
    pub(super) target: usize,
}

impl Row {
    /// The plain flow of one channel (wanted 0, scale and weight 1): what sensitivities
    /// differentiate.
    pub(super) fn channel_flow(channel: ChannelId, target: usize) -> Row {
        Row {
            flow_coeffs: vec![(channel.0, 1.0)],
            pressure_coeffs: vec![],
            wanted: 0.0,
            scale: 1.0,
            weight: 1.0,
            target,
        }
    }

    /// The measure Σ c_k·q_k + Σ c_i·p_i.
    pub(super) fn measure(&self, pressures: &[f64], flows: &[f64]) -> f64 {
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

    /// √weight·(measure − wanted)/scale.
    pub(super) fn residual(&self, pressures: &[f64], flows: &[f64]) -> f64 {
        self.weight.sqrt() * (self.measure(pressures, flows) - self.wanted) / self.scale
    }
}

/// The state-independent constants of the rows, per target: the reference flow Q_ref of a
/// split and the flow sign σ of a wall-shear target (1 for the other kinds).
#[derive(Clone, Debug)]
pub(super) struct Scales {
    pub(super) split_ref: Vec<f64>,
    pub(super) shear_sign: Vec<f64>,
}

impl Scales {
    /// Scales taken from one state: Q_ref = |Σ q| of each split group (else Σ|q|, else
    /// 1e-18 m³/s), σ = sign of the channel's flow (+1 without flow).
    pub(super) fn from_flows(targets: &[Target], flows: &[f64]) -> Scales {
        let split_ref = targets
            .iter()
            .map(|t| match &t.kind {
                TargetKind::Split { channels, .. } => {
                    let total = channels.iter().map(|c| flows[c.0]).sum::<f64>().abs();
                    let abs = channels.iter().map(|c| flows[c.0].abs()).sum::<f64>();
                    if total > 0.0 {
                        total
                    } else {
                        abs.max(1e-18)
                    }
                }
                _ => 1.0,
            })
            .collect();
        let shear_sign = targets
            .iter()
            .map(|t| match &t.kind {
                TargetKind::WallShear { channel, .. } if flows[channel.0] < 0.0 => -1.0,
                _ => 1.0,
            })
            .collect();
        Scales {
            split_ref,
            shear_sign,
        }
    }
}

/// τ/(Δp/L) of a channel's section for the measure: τ_max/G or A/P [m].
pub(super) fn shear_factor(network: &Network, channel: ChannelId, measure: ShearMeasure) -> f64 {
    let fig = &network.section_of(channel).figures;
    match measure {
        ShearMeasure::Max => fig.max_wall_shear_per_gradient,
        ShearMeasure::Mean => fig.mean_wall_shear_per_gradient(),
    }
}

/// Scale of a concentration target: the wanted value, or for a wanted 0 the largest
/// concentration a port lets in (so that '0' is met to a fraction of the inlet's strength).
pub(super) fn concentration_scale(wanted: f64, inlet: &[f64]) -> f64 {
    if wanted.abs() > 0.0 {
        wanted.abs()
    } else {
        inlet.iter().fold(0.0f64, |m, &c| m.max(c)).max(1e-300)
    }
}

/// The lowest and highest concentration the ports let in ((0, 0) without ports). A
/// well-mixed concentration is a flow-weighted mean of what enters, so it lies in this range
/// whatever the drives.
pub(super) fn inlet_range(network: &Network, inlet: &[f64]) -> (f64, f64) {
    let mut ports = network
        .nodes
        .iter()
        .zip(inlet)
        .filter(|(n, _)| !matches!(n.port, Port::Junction))
        .map(|(_, &c)| c)
        .peekable();
    if ports.peek().is_none() {
        return (0.0, 0.0);
    }
    ports.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), c| {
        (lo.min(c), hi.max(c))
    })
}

/// The well-mixed concentration in `channel` (that of its upstream node; `None` without flow).
pub(super) fn channel_concentration(
    network: &Network,
    channel: ChannelId,
    flows: &[f64],
    nodes: &[Option<f64>],
) -> Option<f64> {
    let ch = &network.channels[channel];
    match flows[channel.0] {
        q if q > 0.0 => nodes[ch.from.0],
        q if q < 0.0 => nodes[ch.to.0],
        _ => None,
    }
}

/// The residual rows of `targets` (one per flow, pressure and wall-shear target; one per
/// channel of a split; none for concentration targets).
pub(super) fn rows(network: &Network, targets: &[Target], scales: &Scales) -> Vec<Row> {
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
            TargetKind::WallShear {
                channel,
                shear,
                measure,
            } => {
                let ch = &network.channels[*channel];
                let c = scales.shear_sign[t] * shear_factor(network, *channel, *measure)
                    / ch.length.si();
                out.push(Row {
                    flow_coeffs: vec![],
                    pressure_coeffs: vec![(ch.from.0, c), (ch.to.0, -c)],
                    wanted: *shear,
                    scale: shear.abs().max(1e-300),
                    weight: target.weight,
                    target: t,
                });
            }
            TargetKind::Split { channels, ratio } => {
                let sum: f64 = ratio.iter().sum();
                for (i, r) in ratio.iter().enumerate() {
                    let share = r / sum;
                    let mut flow_coeffs: Vec<(usize, f64)> =
                        channels.iter().map(|c| (c.0, -share)).collect();
                    flow_coeffs.push((channels[i].0, 1.0));
                    out.push(Row {
                        flow_coeffs,
                        pressure_coeffs: vec![],
                        wanted: 0.0,
                        scale: scales.split_ref[t],
                        weight: target.weight,
                        target: t,
                    });
                }
            }
            TargetKind::Concentration { .. } => {}
        }
    }
    out
}

/// What a target's values are.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TargetQuantity {
    /// A channel flow [m³/s].
    Flow,
    /// A node pressure [Pa].
    Pressure,
    /// The first channel's share of a split group's total flow.
    Share,
    /// A wall shear stress [Pa] (maximum or mean).
    WallShear(ShearMeasure),
    /// A well-mixed concentration (SI of the measure: mol/m³, kg/m³ or a fraction).
    Concentration(Measure),
}

/// Why tuning cannot move a target.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum NotControllable {
    /// No adjustable port changes the measure (its row of the response matrix is zero
    /// relative to its scale).
    NoResponse,
    /// Every adjustable port changes the split channels' flows in one and the same
    /// proportion, so the shares cannot change.
    FixedShares,
}

/// How a target came out.
#[derive(Clone, Debug, PartialEq)]
pub struct TargetOutcome {
    pub target: usize,
    /// Short description for tables ("flow in c3", "split c3:c4 in 1:2", "pressure at n2").
    pub what: String,
    pub quantity: TargetQuantity,
    /// Wanted and reached values in SI (flow, pressure, wall shear), or for a split the share
    /// of the first channel in the group's total flow.
    pub wanted: f64,
    pub reached: f64,
    /// |reached − wanted| in SI (for a split: the largest miss of a share).
    pub error: f64,
    /// The error relative to the target's scale (for a split: the largest share miss relative
    /// to its wanted share).
    pub miss: f64,
    pub tolerance: Tolerance,
    /// Within the tolerance (or, after snapping to fabrication steps, within the miss the
    /// snapping itself causes, when that is larger).
    pub met: bool,
    /// Whether an adjustable port can move the target (always true outside tuning).
    pub controllable: bool,
    pub not_controllable: Option<NotControllable>,
    /// The relative miss caused by snapping sized dimensions to their fabrication steps, for
    /// a target that was met before snapping.
    pub snapping_miss: Option<f64>,
    /// For a concentration target outside what the ports let in: (lowest, highest) of the
    /// species' port concentrations. No drive setting can reach it (well mixed, the
    /// concentration is a flow-weighted mean of those).
    pub beyond_inlets: Option<(f64, f64)>,
}

impl TargetOutcome {
    /// Re-judge `met` from the error, the tolerance and the snapping allowance.
    pub fn judge(&mut self) {
        let within = match self.tolerance {
            Tolerance::Relative(t) => self.miss <= t,
            Tolerance::Absolute(a) => self.error <= a,
        };
        let snapped = self.snapping_miss.is_some_and(|s| self.miss <= s);
        self.met = self.miss.is_finite() && (within || snapped);
    }

    /// The allowed relative miss, when the tolerance is relative: max(tolerance, snapping miss).
    pub fn allowed_relative(&self) -> Option<f64> {
        match self.tolerance {
            Tolerance::Relative(t) => Some(self.snapping_miss.map_or(t, |s| s.max(t))),
            Tolerance::Absolute(_) => None,
        }
    }
}

/// How every target of `design` came out in `solution` (a solve of `network`), judged
/// against each target's tolerance. The same code judges the analysis result and the copy
/// read back from the written file.
pub fn evaluate(network: &Network, design: &Design, solution: &FlowSolution) -> Vec<TargetOutcome> {
    outcomes(
        network,
        &design.targets,
        &solution.pressures,
        &solution.flows,
        &solution.node_net_inflow,
    )
}

/// How every target came out in the state (`pressures`, `flows`, and the flow into the chip
/// at each node, `into_chip`, for the concentrations).
pub(super) fn outcomes(
    network: &Network,
    targets: &[Target],
    pressures: &[f64],
    flows: &[f64],
    into_chip: &[f64],
) -> Vec<TargetOutcome> {
    let mut graph: Option<FlowGraph> = None;
    targets
        .iter()
        .enumerate()
        .map(|(t, target)| {
            let mut beyond_inlets = None;
            let (what, quantity, wanted, reached, error, miss) = match &target.kind {
                TargetKind::Concentration {
                    channel,
                    species,
                    measure,
                    concentration,
                    inlet,
                } => {
                    let g = graph
                        .get_or_insert_with(|| FlowGraph::of_network(network, flows, into_chip));
                    let reached = well_mixed(g, inlet)
                        .ok()
                        .and_then(|(c, _)| channel_concentration(network, *channel, flows, &c))
                        .unwrap_or(f64::NAN);
                    let (lo, hi) = inlet_range(network, inlet);
                    let scale = concentration_scale(*concentration, inlet);
                    if *concentration > hi + 1e-12 * scale || *concentration < lo - 1e-12 * scale {
                        beyond_inlets = Some((lo, hi));
                    }
                    let error = (reached - concentration).abs();
                    (
                        format!("{species} in {}", network.channels[*channel].name),
                        TargetQuantity::Concentration(*measure),
                        *concentration,
                        reached,
                        error,
                        if error.is_nan() {
                            f64::INFINITY
                        } else {
                            error / scale
                        },
                    )
                }
                kind => describe(network, kind, pressures, flows),
            };
            let mut o = TargetOutcome {
                target: t,
                what,
                quantity,
                wanted,
                reached,
                error,
                miss,
                tolerance: target.tolerance,
                met: false,
                controllable: true,
                not_controllable: None,
                snapping_miss: None,
                beyond_inlets,
            };
            o.judge();
            o
        })
        .collect()
}

/// Reached shear of a channel: s·|p_from − p_to|/L.
fn shear_of(network: &Network, channel: ChannelId, measure: ShearMeasure, p: &[f64]) -> f64 {
    let ch = &network.channels[channel];
    shear_factor(network, channel, measure) * (p[ch.from.0] - p[ch.to.0]).abs() / ch.length.si()
}

type Described = (String, TargetQuantity, f64, f64, f64, f64);

/// A target's description, quantity, wanted and reached values, error and relative miss
/// (concentration targets are described by [`outcomes`]).
fn describe(network: &Network, kind: &TargetKind, pressures: &[f64], flows: &[f64]) -> Described {
    let plain = |what: String, q: TargetQuantity, wanted: f64, reached: f64, scale: f64| {
        let error = (reached - wanted).abs();
        (what, q, wanted, reached, error, error / scale)
    };
    match kind {
        TargetKind::ChannelFlow { channel, flow } => plain(
            format!("flow in {}", network.channels[*channel].name),
            TargetQuantity::Flow,
            *flow,
            flows[channel.0],
            flow.abs().max(1e-18),
        ),
        TargetKind::NodePressure { node, pressure } => plain(
            format!("pressure at {}", network.nodes[*node].name),
            TargetQuantity::Pressure,
            *pressure,
            pressures[node.0],
            pressure.abs().max(P_REF),
        ),
        TargetKind::WallShear {
            channel,
            shear,
            measure,
        } => plain(
            format!(
                "{} wall shear in {}",
                match measure {
                    ShearMeasure::Max => "max",
                    ShearMeasure::Mean => "mean",
                },
                network.channels[*channel].name
            ),
            TargetQuantity::WallShear(*measure),
            *shear,
            shear_of(network, *channel, *measure, pressures),
            shear.abs().max(1e-300),
        ),
        TargetKind::Concentration { .. } => (
            String::new(),
            TargetQuantity::Share,
            f64::NAN,
            f64::NAN,
            f64::NAN,
            f64::INFINITY,
        ),
        TargetKind::Split { channels, ratio } => {
            let names: Vec<&str> = channels
                .iter()
                .map(|c| network.channels[*c].name.as_str())
                .collect();
            let ratios: Vec<String> = ratio.iter().map(|r| format!("{r}")).collect();
            let total: f64 = channels.iter().map(|c| flows[c.0]).sum();
            let sum: f64 = ratio.iter().sum();
            let (mut error, mut miss) = (0.0f64, 0.0f64);
            for (c, r) in channels.iter().zip(ratio) {
                let e = if total != 0.0 {
                    (flows[c.0] / total - r / sum).abs()
                } else {
                    f64::INFINITY
                };
                error = error.max(e);
                miss = miss.max(e / (r / sum));
            }
            (
                format!("split {} in {}", names.join(":"), ratios.join(":")),
                TargetQuantity::Share,
                ratio[0] / sum,
                if total != 0.0 {
                    flows[channels[0].0] / total
                } else {
                    f64::NAN
                },
                error,
                miss,
            )
        }
    }
}

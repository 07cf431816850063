//! Targets as dimensionless residual rows, each weighted by √weight:
//! - channel flow:  (q − q*)/|q*|
//! - node pressure: (p − p*)/max(|p*|, P_ref)
//! - split c₁…cₙ in ratio r₁…rₙ: (r₁q_i − r_iq₁)/((r₁ + r_i)·Q_ref) for i = 2…n, with Q_ref the
//!   current Σ|q| of those channels — zero exactly when the flows are in the ratio.
//!
//! Every row is a linear measure of the state (coefficients on channel flows and node
//! pressures), which is what lets tuning superpose unit responses and the adjoint
//! differentiate a row with one extra solve.

use super::{Target, TargetKind};
use crate::network::{ChannelId, Network};

/// Reference pressure for pressure targets of 0 Pa.
const P_REF: f64 = 100.0;

/// Relative miss below which a target counts as met.
pub const MET: f64 = 1e-9;

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

/// The residual rows of `targets`; split rows take Q_ref from `flows`.
pub(super) fn rows(targets: &[Target], flows: &[f64]) -> Vec<Row> {
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
                out.extend(split_rows(channels, ratio, flows, target.weight, t));
            }
        }
    }
    out
}

/// Rows (r₁q_i − r_iq₁)/((r₁ + r_i)·Q_ref), i = 2…n, of one split target.
fn split_rows(
    channels: &[ChannelId],
    ratio: &[f64],
    flows: &[f64],
    weight: f64,
    target: usize,
) -> Vec<Row> {
    let qref = channels
        .iter()
        .map(|c| flows[c.0].abs())
        .sum::<f64>()
        .max(1e-18);
    (1..channels.len())
        .map(|i| {
            let (r1, ri) = (ratio[0], ratio[i]);
            Row {
                flow_coeffs: vec![
                    (channels[i].0, r1 / (r1 + ri)),
                    (channels[0].0, -ri / (r1 + ri)),
                ],
                pressure_coeffs: vec![],
                wanted: 0.0,
                scale: qref,
                weight,
                target,
            }
        })
        .collect()
}

/// ‖weighted residual‖₂ of `targets` in the state (`pressures`, `flows`).
pub(super) fn residual_norm(targets: &[Target], pressures: &[f64], flows: &[f64]) -> f64 {
    rows(targets, flows)
        .iter()
        .map(|r| r.residual(pressures, flows).powi(2))
        .sum::<f64>()
        .sqrt()
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

/// How every target came out in the state (`pressures`, `flows`).
pub(super) fn outcomes(
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
            let (what, wanted, reached) = describe(network, &target.kind, pressures, flows);
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

/// A target's description, wanted value and reached value.
fn describe(
    network: &Network,
    kind: &TargetKind,
    pressures: &[f64],
    flows: &[f64],
) -> (String, f64, f64) {
    match kind {
        TargetKind::ChannelFlow { channel, flow } => (
            format!("flow in {}", network.channels[*channel].name),
            *flow,
            flows[channel.0],
        ),
        TargetKind::NodePressure { node, pressure } => (
            format!("pressure at {}", network.nodes[*node].name),
            *pressure,
            pressures[node.0],
        ),
        TargetKind::Split { channels, ratio } => {
            let names: Vec<&str> = channels
                .iter()
                .map(|c| network.channels[*c].name.as_str())
                .collect();
            let ratios: Vec<String> = ratio.iter().map(|r| format!("{r}")).collect();
            let total: f64 = channels.iter().map(|c| flows[c.0]).sum();
            (
                format!("split {} in {}", names.join(":"), ratios.join(":")),
                ratio[0] / ratio.iter().sum::<f64>(),
                if total != 0.0 {
                    flows[channels[0].0] / total
                } else {
                    f64::NAN
                },
            )
        }
    }
}

//! Concentration targets for tuning: the well-mixed concentration in a channel and its
//! derivatives with respect to the adjustable drives.
//!
//! Flows and the chip's port flows are linear in the drives (superposition of the unit
//! responses tuning already has), and a well-mixed concentration is a rational function of
//! those flows. Its derivative is taken analytically through the flows
//! ([`well_mixed_tangent`]: the same balance matrix with a right-hand side from the flow
//! derivatives), exact to rounding while no flow changes direction; differencing two solves
//! would cost one concentration solve per port as well and lose half the digits to the step.

use super::targets::{channel_concentration, concentration_scale};
use super::{Design, DesignError, TargetKind};
use crate::analysis::solutes::{well_mixed, well_mixed_tangent, FlowGraph};
use crate::network::{ChannelId, Network};

/// One concentration target as tuning sees it.
#[derive(Clone, Debug)]
pub(super) struct ConcentrationRow {
    pub(super) target: usize,
    channel: ChannelId,
    inlet: Vec<f64>,
    wanted: f64,
    scale: f64,
    weight: f64,
}

/// A concentration row linearised at a state: √w·(c − c*)/scale and its gradient over the
/// (scaled) settings, `None` where the channel carries no flow.
#[derive(Clone, Debug)]
pub(super) struct Linear {
    pub(super) residual: Option<f64>,
    pub(super) gradient: Vec<f64>,
}

/// The concentration targets of `design`, in target order.
pub(super) fn rows(design: &Design) -> Vec<ConcentrationRow> {
    design
        .targets
        .iter()
        .enumerate()
        .filter_map(|(t, target)| match &target.kind {
            TargetKind::Concentration {
                channel,
                concentration,
                inlet,
                ..
            } => Some(ConcentrationRow {
                target: t,
                channel: *channel,
                inlet: inlet.clone(),
                wanted: *concentration,
                scale: concentration_scale(*concentration, inlet),
                weight: target.weight,
            }),
            _ => None,
        })
        .collect()
}

/// The state's flows and port flows, with their derivatives along each scaled setting
/// (`dflows[j]`, `dinto[j]`).
pub(super) struct State<'a> {
    pub(super) flows: &'a [f64],
    pub(super) into_chip: &'a [f64],
    pub(super) dflows: &'a [Vec<f64>],
    pub(super) dinto: &'a [Vec<f64>],
}

/// Every concentration row linearised at `state`.
pub(super) fn linearise(
    network: &Network,
    rows: &[ConcentrationRow],
    state: &State<'_>,
) -> Result<Vec<Linear>, DesignError> {
    let g = FlowGraph::of_network(network, state.flows, state.into_chip);
    let mut out = Vec::with_capacity(rows.len());
    for row in rows {
        let (c, _) = well_mixed(&g, &row.inlet)?;
        let Some(value) = channel_concentration(network, row.channel, state.flows, &c) else {
            out.push(Linear {
                residual: None,
                gradient: vec![0.0; state.dflows.len()],
            });
            continue;
        };
        let w = row.weight.sqrt();
        let mut gradient = Vec::with_capacity(state.dflows.len());
        for (dq, dp) in state.dflows.iter().zip(state.dinto) {
            let dc = well_mixed_tangent(
                network,
                state.flows,
                state.into_chip,
                &g,
                &c,
                &row.inlet,
                dq,
                dp,
            )?;
            let d = channel_concentration(network, row.channel, state.flows, &dc).unwrap_or(0.0);
            gradient.push(w * d / row.scale);
        }
        out.push(Linear {
            residual: Some(w * (value - row.wanted) / row.scale),
            gradient,
        });
    }
    Ok(out)
}

//! The solve report as one tidy CSV table.

use super::role;
use crate::analysis::SteadyState;
use crate::network::Network;

// ---------------------------------------------------------------------------------------
// CSV: one tidy table, a row per node and per channel, told apart by `record`.
// ---------------------------------------------------------------------------------------

/// An optional or possibly infinite value: empty when absent or not finite.
fn opt(v: Option<f64>) -> String {
    v.filter(|x| x.is_finite())
        .map(|x| format!("{x:e}"))
        .unwrap_or_default()
}

pub(crate) fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// The solve report as CSV (SI). Columns that do not apply to a row are empty.
pub fn to_csv(network: &Network, state: &SteadyState) -> String {
    let mut out = String::from(
        "record,name,kind,from,to,pressure_pa,flow_into_chip_m3_per_s,flow_m3_per_s,\
         pressure_drop_pa,resistance_pa_s_per_m3,mean_velocity_m_per_s,reynolds,\
         wall_shear_mean_pa,wall_shear_max_pa,shear_limit_pa,shear_margin,entrance_length_m,\
         residence_time_s,power_w\n",
    );
    for (i, n) in network.nodes.iter().enumerate() {
        let inflow = state
            .port(network, i)
            .map(|p| format!("{:e}", p.flow_into_chip))
            .unwrap_or_default();
        out.push_str(&format!(
            "node,{},{},,,{:e},{inflow},,,,,,,,,,,,\n",
            csv_field(&n.name),
            role(n.port),
            state.solution.pressures[i]
        ));
    }
    for (c, s) in network.channels.iter().zip(&state.channels) {
        out.push_str(&format!(
            "channel,{},{},{},{},,,{:e},{:e},{:e},{:e},{:e},{:e},{:e},{},{},{:e},{},{:e}\n",
            csv_field(&c.name),
            network.sections[c.section.0].shape.kind(),
            csv_field(&network.nodes[c.from.0].name),
            csv_field(&network.nodes[c.to.0].name),
            s.flow,
            s.pressure_drop,
            s.resistance,
            s.mean_velocity,
            s.reynolds,
            s.wall_shear_mean,
            s.wall_shear_max,
            opt(s.shear_limit),
            opt(s.shear_margin),
            s.entrance_length,
            opt(Some(s.residence_time)),
            s.power
        ));
    }
    out
}

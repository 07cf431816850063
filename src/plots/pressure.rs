//! Pressure along the way: for each inlet, the path the flow takes to an outlet (at every node,
//! the outgoing channel carrying the most flow), drawn as pressure against distance along the
//! channels, so the steep drops show where the resistance sits.

use super::{drawing, Figure, GRID_GREY, INK};
use crate::analysis::SteadyState;
use crate::chip::Chip;
use crate::network::{ChannelId, NodeId, Port};
use crate::units::display;
use plotters::coord::Shift;
use plotters::prelude::*;

/// One traced path: its label and (distance [mm], pressure [mbar]) points.
#[derive(Clone, Debug, PartialEq)]
pub struct PressurePath {
    pub label: String,
    pub points: Vec<(f64, f64)>,
}

/// The pressure picture.
pub struct PressurePicture {
    pub title: String,
    pub paths: Vec<PressurePath>,
}

/// Okabe–Ito colours for up to eight paths (repeated beyond).
const LINE_COLOURS: [RGBColor; 8] = [
    RGBColor(0, 114, 178),
    RGBColor(213, 94, 0),
    RGBColor(0, 158, 115),
    RGBColor(204, 121, 167),
    RGBColor(86, 180, 233),
    RGBColor(230, 159, 0),
    RGBColor(0, 0, 0),
    RGBColor(240, 228, 66),
];

impl PressurePicture {
    /// Trace every inlet (a port delivering flow into the chip) downstream to an outlet.
    pub fn new(chip: &Chip, state: &SteadyState) -> PressurePicture {
        let network = &chip.network;
        let p = &state.solution.pressures;
        let mut paths = Vec::new();
        for (i, node) in network.nodes.iter().enumerate() {
            let is_port = !matches!(node.port, Port::Junction);
            if !(is_port && state.solution.node_net_inflow[i] > 0.0) {
                continue;
            }
            let mut cur = i;
            let mut dist = 0.0;
            let mut pts = vec![(0.0, display::mbar(p[i]))];
            let mut seen = vec![false; network.nodes.len()];
            seen[i] = true;
            loop {
                // The outgoing channel with the largest flow.
                let next = state
                    .outflows(network, cur)
                    .into_iter()
                    .filter(|(_, to, _)| !seen[*to])
                    .max_by(|a, b| a.2.total_cmp(&b.2).then(b.0.cmp(&a.0)));
                let Some((k, to, _)) = next else { break };
                dist += network.channels[ChannelId(k)].length.si() * 1e3;
                pts.push((dist, display::mbar(p[to])));
                seen[to] = true;
                cur = to;
                if !matches!(network.nodes[NodeId(to)].port, Port::Junction) {
                    break;
                }
            }
            if pts.len() > 1 {
                paths.push(PressurePath {
                    label: format!("{} → {}", node.name, network.nodes[NodeId(cur)].name),
                    points: pts,
                });
            }
        }
        PressurePicture {
            title: format!(
                "{} — pressure along the main flow path from each inlet",
                chip.title()
            ),
            paths,
        }
    }
}

impl Figure for PressurePicture {
    fn size(&self) -> (u32, u32) {
        (1000, 560)
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let xmax = self
            .paths
            .iter()
            .flat_map(|p| p.points.iter().map(|q| q.0))
            .fold(0.0, f64::max)
            .max(1e-6);
        let (ymin, ymax) = self
            .paths
            .iter()
            .flat_map(|p| p.points.iter().map(|q| q.1))
            .fold((0.0f64, f64::NEG_INFINITY), |(a, b), v| {
                (a.min(v), b.max(v))
            });
        let ymax = if ymax.is_finite() && ymax > ymin {
            ymax * 1.05
        } else {
            ymin + 1.0
        };
        let mut chart = ChartBuilder::on(area)
            .margin(20)
            .caption(&self.title, (super::FONT, 18))
            .x_label_area_size(45)
            .y_label_area_size(70)
            .build_cartesian_2d(0.0..xmax * 1.02, ymin..ymax)
            .map_err(drawing)?;
        chart
            .configure_mesh()
            .light_line_style(GRID_GREY.mix(0.3))
            .x_desc("distance along the channels [mm]")
            .y_desc("pressure [mbar]")
            .label_style((super::FONT, 12))
            .draw()
            .map_err(drawing)?;
        for (i, path) in self.paths.iter().enumerate() {
            let colour = LINE_COLOURS[i % LINE_COLOURS.len()];
            chart
                .draw_series(LineSeries::new(
                    path.points.clone(),
                    ShapeStyle::from(&colour).stroke_width(2),
                ))
                .map_err(drawing)?
                .label(path.label.clone())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], colour));
            chart
                .draw_series(
                    path.points
                        .iter()
                        .map(|&p| Circle::new(p, 3, colour.filled())),
                )
                .map_err(drawing)?;
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.85))
            .border_style(INK)
            .label_font((super::FONT, 12))
            .draw()
            .map_err(drawing)?;
        Ok(())
    }
}

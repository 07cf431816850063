//! Pressure along the way: one curve per inlet–outlet path, drawn as pressure against distance
//! along the channels, so the steep drops show where the resistance sits.
//!
//! The paths: from every inlet (a port delivering flow into the chip), the way the flow takes
//! (at every junction the outgoing channel carrying the most flow) to the first port; and for
//! every outlet no such path reaches, the way back up (at every junction the incoming channel
//! carrying the most flow) to an inlet. Where a path ends is found for every node at once
//! (each node's successor is fixed, so the ends are memoised along the successor forest), so
//! the tracing costs O(nodes + channels) however many inlets share a path; only the drawn
//! paths are walked point by point.
//!
//! At most [`DRAWN_PATHS`] curves are drawn (those with the largest pressure drop); the legend
//! says how many more there are. The legend sits beside the plot area, never over it.

use super::{drawing, text_style, Figure, GRID_GREY, INK};
use crate::analysis::SteadyState;
use crate::chip::Chip;
use crate::network::{ChannelId, Network, NodeId, Port};
use crate::section::Shape;
use crate::units::display;
use plotters::coord::Shift;
use plotters::prelude::*;

/// At most this many paths are drawn (one Okabe–Ito colour each).
pub const DRAWN_PATHS: usize = 8;

/// Paths with at most this many points name every node at its marker; longer ones name the
/// first and last nodes only.
const NAMED_POINTS: usize = 16;

/// Paths with more points than this get markers at their ends only.
const MARKED_POINTS: usize = 200;

/// Lines are drawn through at most about this many points: a path's pressure falls
/// monotonically along the flow, so evenly spaced points keep its shape at picture resolution.
const LINE_POINTS: usize = 2000;

/// One traced path: its label, (distance [mm], pressure [mbar]) points and the node at each.
#[derive(Clone, Debug, PartialEq)]
pub struct PressurePath {
    pub label: String,
    pub points: Vec<(f64, f64)>,
    /// The node name at each point.
    pub nodes: Vec<String>,
    /// The pressure drop along the drawn curve [mbar].
    pub drop: f64,
}

/// The pressure picture.
pub struct PressurePicture {
    pub title: String,
    /// The drawn paths, largest pressure drop first.
    pub paths: Vec<PressurePath>,
    /// Inlet–outlet paths found but not drawn (smaller drops).
    pub more: usize,
    /// The paths start at the first on-chip node (leading round-section channels left out).
    pub on_chip: bool,
    /// Path steps visited while tracing (the work; linear in the chip's size).
    pub steps: usize,
}

/// Okabe–Ito colours, one per drawn path.
const LINE_COLOURS: [RGBColor; DRAWN_PATHS] = [
    RGBColor(0, 114, 178),
    RGBColor(213, 94, 0),
    RGBColor(0, 158, 115),
    RGBColor(204, 121, 167),
    RGBColor(86, 180, 233),
    RGBColor(230, 159, 0),
    RGBColor(0, 0, 0),
    RGBColor(240, 228, 66),
];

const NONE: u32 = u32::MAX;

/// For every node, the channel and node the flow takes next (`downstream`) or came from by
/// the most flow (`upstream`): one pass over the channels. Ties go to the channel first in
/// the file.
fn steepest(network: &Network, state: &SteadyState, downstream: bool) -> Vec<(u32, u32)> {
    let mut best: Vec<(u32, u32)> = vec![(NONE, NONE); network.nodes.len()];
    let mut best_q: Vec<f64> = vec![0.0; network.nodes.len()];
    for (k, c) in network.channels.iter().enumerate() {
        let q = state.channels[k].flow;
        if q == 0.0 || !q.is_finite() {
            continue;
        }
        // (upstream node, downstream node) of this channel's flow.
        let (up, down) = if q > 0.0 {
            (c.from.0, c.to.0)
        } else {
            (c.to.0, c.from.0)
        };
        let (at, other) = if downstream { (up, down) } else { (down, up) };
        if q.abs() > best_q[at] {
            best_q[at] = q.abs();
            best[at] = (k as u32, other as u32);
        }
    }
    best
}

/// Where the walk from every node along `next` ends: the first port after it (or the node
/// where the walk stops). Memoised, iterative: every node is settled once.
fn ends(network: &Network, next: &[(u32, u32)], steps: &mut usize) -> Vec<u32> {
    let n = network.nodes.len();
    let is_port = |i: usize| !matches!(network.nodes[NodeId(i)].port, Port::Junction);
    // end[i]: where a walk that has arrived at i ends (i itself for a port).
    let mut end = vec![NONE; n];
    let mut open = vec![false; n];
    let mut stack = Vec::new();
    for start in 0..n {
        let mut i = start;
        // Walk until a settled node, a port, a stop, or a node on this walk (no cycle exists
        // in a solved flow field, since pressure falls along the flow; guarded anyway).
        while end[i] == NONE && !open[i] {
            *steps += 1;
            if is_port(i) || next[i].1 == NONE {
                end[i] = i as u32;
                break;
            }
            open[i] = true;
            stack.push(i);
            i = next[i].1 as usize;
        }
        let settled = if end[i] == NONE { i as u32 } else { end[i] };
        for j in stack.drain(..) {
            open[j] = false;
            end[j] = settled;
        }
    }
    end
}

fn is_round(network: &Network, k: usize) -> bool {
    let section = network.channels[ChannelId(k)].section;
    matches!(network.sections[section].shape, Shape::Circle { .. })
}

impl PressurePicture {
    /// Every inlet–outlet path from the port (tubing included).
    pub fn new(chip: &Chip, state: &SteadyState) -> PressurePicture {
        PressurePicture::traced(chip, state, false)
    }

    /// Every inlet–outlet path; with `on_chip`, each drawn path starts at its first on-chip
    /// node: the leading channels of round cross-section (tubing, capillaries) are left out.
    pub fn traced(chip: &Chip, state: &SteadyState, on_chip: bool) -> PressurePicture {
        let network = &chip.network;
        let n = network.nodes.len();
        let p = &state.solution.pressures;
        let inflow = &state.solution.node_net_inflow;
        let is_port = |i: usize| !matches!(network.nodes[NodeId(i)].port, Port::Junction);
        let mut steps = 0usize;
        let down = steepest(network, state, true);
        let up = steepest(network, state, false);
        let down_end = ends(network, &down, &mut steps);
        let up_end = ends(network, &up, &mut steps);
        // Candidates: (drop [Pa], inlet, outlet, traced downstream).
        let mut candidates: Vec<(f64, usize, usize, bool)> = Vec::new();
        let mut reached = vec![false; n];
        for i in (0..n).filter(|&i| is_port(i) && inflow[i] > 0.0) {
            if down[i].1 == NONE {
                continue;
            }
            let o = down_end[down[i].1 as usize] as usize;
            reached[o] = true;
            candidates.push((p[i] - p[o], i, o, true));
        }
        for o in (0..n).filter(|&o| is_port(o) && inflow[o] < 0.0 && !reached[o]) {
            if up[o].1 == NONE {
                continue;
            }
            let i = up_end[up[o].1 as usize] as usize;
            candidates.push((p[i] - p[o], i, o, false));
        }
        steps += candidates.len();
        // Largest drop first; ties in file order of the inlet, then the outlet.
        candidates.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
        let more = candidates.len().saturating_sub(DRAWN_PATHS);
        let paths = candidates
            .iter()
            .take(DRAWN_PATHS)
            .map(|&(_, i, o, downstream)| {
                // The channels of the path in flow order.
                let mut channels: Vec<(usize, usize)> = Vec::new();
                if downstream {
                    let mut at = i;
                    loop {
                        let (k, to) = down[at];
                        if k == NONE || channels.len() > n {
                            break;
                        }
                        steps += 1;
                        channels.push((k as usize, to as usize));
                        at = to as usize;
                        if is_port(at) {
                            break;
                        }
                    }
                } else {
                    let mut at = o;
                    let mut rev: Vec<(usize, usize)> = Vec::new();
                    loop {
                        let (k, from) = up[at];
                        if k == NONE || rev.len() > n {
                            break;
                        }
                        steps += 1;
                        rev.push((k as usize, at));
                        at = from as usize;
                        if is_port(at) {
                            break;
                        }
                    }
                    channels.extend(rev.into_iter().rev());
                }
                // Leading tubing: round channels before the first on-chip node (a path made
                // of tubing only is kept whole).
                let skip = if on_chip {
                    let lead = channels
                        .iter()
                        .take_while(|(k, _)| is_round(network, *k))
                        .count();
                    if lead < channels.len() {
                        lead
                    } else {
                        0
                    }
                } else {
                    0
                };
                let first = if skip == 0 { i } else { channels[skip - 1].1 };
                let mut dist = 0.0;
                let mut points = vec![(0.0, display::mbar(p[first]))];
                let mut nodes = vec![network.nodes[NodeId(first)].name.clone()];
                for &(k, to) in &channels[skip..] {
                    dist += display::mm(network.channels[ChannelId(k)].length.si());
                    points.push((dist, display::mbar(p[to])));
                    nodes.push(network.nodes[NodeId(to)].name.clone());
                }
                let drawn = points[0].1 - points[points.len() - 1].1;
                PressurePath {
                    label: format!(
                        "{} → {}",
                        network.nodes[NodeId(i)].name,
                        network.nodes[NodeId(o)].name
                    ),
                    points,
                    nodes,
                    drop: drawn,
                }
            })
            .collect();
        PressurePicture {
            title: format!("{} — pressure along the inlet–outlet paths", chip.title()),
            paths,
            more,
            on_chip,
            steps,
        }
    }
}

/// Width of the legend column beside the plot area.
const LEGEND_WIDTH: u32 = 280;

impl Figure for PressurePicture {
    fn size(&self) -> (u32, u32) {
        (1100, 600)
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let (w, _) = self.size();
        let (plot_area, legend_area) = area.split_horizontally(w - LEGEND_WIDTH);
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
            ymax + 0.08 * (ymax - ymin)
        } else {
            ymin + 1.0
        };
        let mut chart = ChartBuilder::on(&plot_area)
            .margin(20)
            .caption(&self.title, (super::FONT, 20))
            .x_label_area_size(50)
            .y_label_area_size(75)
            .build_cartesian_2d(0.0..xmax * 1.04, ymin..ymax)
            .map_err(drawing)?;
        chart
            .configure_mesh()
            .light_line_style(GRID_GREY.mix(0.3))
            .x_desc(if self.on_chip {
                "distance from the first on-chip node [mm]"
            } else {
                "distance along the channels [mm]"
            })
            .y_desc("pressure [mbar]")
            .label_style((super::FONT, 15))
            .axis_desc_style((super::FONT, 16))
            .draw()
            .map_err(drawing)?;
        for (i, path) in self.paths.iter().enumerate() {
            let colour = LINE_COLOURS[i % LINE_COLOURS.len()];
            let n = path.points.len();
            let stride = n.div_ceil(LINE_POINTS).max(1);
            let line = path
                .points
                .iter()
                .enumerate()
                .filter(|(j, _)| j % stride == 0 || j + 1 == n)
                .map(|(_, &p)| p);
            chart
                .draw_series(LineSeries::new(
                    line,
                    ShapeStyle::from(&colour).stroke_width(2),
                ))
                .map_err(drawing)?;
            chart
                .draw_series(
                    path.points
                        .iter()
                        .enumerate()
                        .filter(|(j, _)| n <= MARKED_POINTS || *j == 0 || j + 1 == n)
                        .map(|(_, &p)| Circle::new(p, 3, colour.filled())),
                )
                .map_err(drawing)?;
        }
        // Node names at the markers, in path order; a name that would overlap one already
        // written (or repeat the same node at the same place) is left out.
        let mut placed: Vec<(i32, i32, i32, i32)> = Vec::new();
        let style = text_style(14, INK);
        for path in &self.paths {
            let last = path.points.len().saturating_sub(1);
            for (j, (&pt, name)) in path.points.iter().zip(&path.nodes).enumerate() {
                if path.points.len() > NAMED_POINTS && j != 0 && j != last {
                    continue;
                }
                let (px, py) = chart.backend_coord(&pt);
                let (tw, th) = plot_area
                    .estimate_text_size(name, &style)
                    .map_err(drawing)?;
                let (tw, th) = (tw as i32, th as i32);
                // Above the marker, shifted left at the right edge of the plot.
                let x = if j == last { px - tw - 4 } else { px + 4 };
                let y = py - th - 5;
                let b = (x, y, x + tw, y + th);
                if placed
                    .iter()
                    .any(|q| b.0 < q.2 && q.0 < b.2 && b.1 < q.3 && q.1 < b.3)
                {
                    continue;
                }
                placed.push(b);
                plot_area
                    .draw(&Text::new(name.clone(), (x, y), style.clone()))
                    .map_err(drawing)?;
            }
        }
        self.legend(&legend_area)
    }
}

impl PressurePicture {
    /// The legend column: one line per drawn path (colour, inlet → outlet, drop), then how
    /// many paths are not drawn.
    fn legend<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        let mut y = 70;
        area.draw(&Text::new(
            "path (inlet → outlet), drop",
            (8, y - 26),
            text_style(15, INK),
        ))
        .map_err(drawing)?;
        if self.paths.is_empty() {
            area.draw(&Text::new(
                "no inlet with flow",
                (8, y),
                text_style(14, INK),
            ))
            .map_err(drawing)?;
        }
        for (i, path) in self.paths.iter().enumerate() {
            let colour = LINE_COLOURS[i % LINE_COLOURS.len()];
            area.draw(&PathElement::new(
                vec![(8, y + 7), (30, y + 7)],
                ShapeStyle::from(&colour).stroke_width(3),
            ))
            .map_err(drawing)?;
            area.draw(&Text::new(path.label.clone(), (36, y), text_style(14, INK)))
                .map_err(drawing)?;
            area.draw(&Text::new(
                format!("{} mbar", display::fmt_sig(path.drop, 3)),
                (36, y + 19),
                text_style(13, INK),
            ))
            .map_err(drawing)?;
            y += 46;
        }
        if self.more > 0 {
            area.draw(&Text::new(
                format!("+{} more paths with smaller drops", self.more),
                (8, y),
                text_style(14, INK),
            ))
            .map_err(drawing)?;
            y += 24;
        }
        if self.on_chip {
            area.draw(&Text::new(
                "from the first on-chip node:",
                (8, y + 10),
                text_style(13, INK),
            ))
            .map_err(drawing)?;
            area.draw(&Text::new(
                "round tubing at the inlet left out",
                (8, y + 30),
                text_style(13, INK),
            ))
            .map_err(drawing)?;
        }
        Ok(())
    }
}

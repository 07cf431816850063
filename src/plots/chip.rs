//! The chip picture: channels drawn with a width that grows with |flow|, arrows for the flow
//! direction, each junction's outgoing split in percent, flows in µL/min, ports with their set
//! or required values, and a colour scale of pressure, flow or shear margin.
//!
//! Layout: the chip file's `at:` positions (and channel `path:` points) when every node has
//! one; otherwise an automatic layered layout, deterministic for a given file: nodes ordered
//! by pressure (high to low, ties by file order), layer = longest path from the high-pressure
//! side, order within a layer by the barycentre of neighbours (a few sweeps, ties by file
//! order) — so flow runs left to right and the drop in pressure reads along x.

use super::{drawing, text_style, Figure, ALERT_VERMILLION, GRID_GREY, INK};
use crate::analysis::SteadyState;
use crate::chip::Chip;
use crate::network::{ChannelId, Network, Port};
use crate::units::display;
use crate::units::display::fmt_sig;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::colors::colormaps::ViridisRGB;

/// What the channel colours show.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColourBy {
    Pressure,
    Flow,
    Margin,
    /// The mean concentration of the chip's species with this index (see `plots::solutes`).
    Species(usize),
}

/// Above this many channels, per-channel labels are left out (ports stay labelled).
pub const LABEL_LIMIT: usize = 60;

/// Node positions in drawing units (x right, y down) and channel polylines.
#[derive(Clone, Debug, PartialEq)]
pub struct Layout {
    pub nodes: Vec<[f64; 2]>,
    pub channels: Vec<Vec<[f64; 2]>>,
    /// True when the positions came from the chip file.
    pub from_file: bool,
}

/// Compute the layout (see the module doc).
pub fn layout(chip: &Chip, state: &SteadyState) -> Layout {
    let network = &chip.network;
    let n = network.nodes.len();
    let given = &chip.layout;
    if given.node_at.len() == n && given.node_at.iter().all(Option::is_some) {
        let nodes: Vec<[f64; 2]> = given
            .node_at
            .iter()
            .map(|p| p.map(|p| [p[0], -p[1]]).unwrap_or_default())
            .collect();
        let channels = network
            .channels
            .iter()
            .enumerate()
            .map(|(k, c)| {
                let mut pts = vec![nodes[c.from.0]];
                if let Some(path) = given.channel_path.get(k) {
                    pts.extend(path.iter().map(|p| [p[0], -p[1]]));
                }
                pts.push(nodes[c.to.0]);
                pts
            })
            .collect();
        return Layout {
            nodes,
            channels,
            from_file: true,
        };
    }
    let p = &state.solution.pressures;
    // Order by pressure, high first; ties by file order.
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| p[b].total_cmp(&p[a]).then(a.cmp(&b)));
    let mut rank = vec![0usize; n];
    for (r, &v) in order.iter().enumerate() {
        rank[v] = r;
    }
    // Edges oriented from earlier to later rank: a DAG.
    let mut succ: Vec<Vec<usize>> = vec![Vec::new(); n];
    let mut pred: Vec<Vec<usize>> = vec![Vec::new(); n];
    for c in &network.channels {
        let (a, b) = if rank[c.from.0] < rank[c.to.0] {
            (c.from.0, c.to.0)
        } else {
            (c.to.0, c.from.0)
        };
        succ[a].push(b);
        pred[b].push(a);
    }
    let mut layer = vec![0usize; n];
    for &v in &order {
        for &w in &succ[v] {
            layer[w] = layer[w].max(layer[v] + 1);
        }
    }
    let layers = layer.iter().max().map_or(1, |m| m + 1);
    let mut rows: Vec<Vec<usize>> = vec![Vec::new(); layers];
    for &v in &order {
        rows[layer[v]].push(v);
    }
    for row in &mut rows {
        row.sort_unstable();
    }
    let mut y = vec![0.0f64; n];
    let place = |rows: &Vec<Vec<usize>>, y: &mut Vec<f64>| {
        for row in rows {
            let mid = (row.len() as f64 - 1.0) / 2.0;
            for (i, &v) in row.iter().enumerate() {
                y[v] = i as f64 - mid;
            }
        }
    };
    place(&rows, &mut y);
    for sweep in 0..6 {
        let down = sweep % 2 == 0;
        let range: Vec<usize> = if down {
            (1..layers).collect()
        } else {
            (0..layers.saturating_sub(1)).rev().collect()
        };
        for l in range {
            let neigh = |v: usize| if down { &pred[v] } else { &succ[v] };
            let mut keyed: Vec<(f64, usize)> = rows[l]
                .iter()
                .map(|&v| {
                    let ns = neigh(v);
                    let bc = if ns.is_empty() {
                        y[v]
                    } else {
                        ns.iter().map(|&u| y[u]).sum::<f64>() / ns.len() as f64
                    };
                    (bc, v)
                })
                .collect();
            keyed.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            rows[l] = keyed.into_iter().map(|(_, v)| v).collect();
        }
        place(&rows, &mut y);
    }
    let nodes: Vec<[f64; 2]> = (0..n).map(|v| [layer[v] as f64, y[v]]).collect();
    let channels = network
        .channels
        .iter()
        .map(|c| vec![nodes[c.from.0], nodes[c.to.0]])
        .collect();
    Layout {
        nodes,
        channels,
        from_file: false,
    }
}

/// The chip picture.
pub struct ChipPicture<'a> {
    pub chip: &'a Chip,
    pub network: &'a Network,
    pub state: &'a SteadyState,
    pub colour: ColourBy,
    pub layout: Layout,
}

impl<'a> ChipPicture<'a> {
    pub fn new(chip: &'a Chip, state: &'a SteadyState, colour: ColourBy) -> Self {
        ChipPicture {
            chip,
            network: &chip.network,
            state,
            colour,
            layout: layout(chip, state),
        }
    }

    fn extent(&self) -> ([f64; 2], [f64; 2]) {
        let mut lo = [f64::INFINITY; 2];
        let mut hi = [f64::NEG_INFINITY; 2];
        for p in self
            .layout
            .nodes
            .iter()
            .chain(self.layout.channels.iter().flatten())
        {
            for d in 0..2 {
                lo[d] = lo[d].min(p[d]);
                hi[d] = hi[d].max(p[d]);
            }
        }
        (lo, hi)
    }

    /// The colour value of a channel and the scale's (min, max, label).
    fn colour_values(&self) -> (Vec<Option<f64>>, f64, f64, String) {
        let net = self.network;
        let st = self.state;
        let vals: Vec<Option<f64>> = match self.colour {
            ColourBy::Pressure => net
                .channels
                .iter()
                .map(|c| {
                    Some(display::mbar(
                        (st.solution.pressures[c.from.0] + st.solution.pressures[c.to.0]) / 2.0,
                    ))
                })
                .collect(),
            ColourBy::Flow => st
                .channels
                .iter()
                .map(|s| Some(display::ul_per_min(s.flow.abs())))
                .collect(),
            ColourBy::Margin => st
                .channels
                .iter()
                .map(|s| {
                    s.shear_margin
                        .filter(|m| m.is_finite())
                        .map(|m| m.max(1e-6).log10())
                })
                .collect(),
            ColourBy::Species(k) => super::outlets::channel_values(self.chip, st, k),
        };
        let finite = vals.iter().flatten().copied();
        let (mut lo, mut hi) = finite.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
        if !lo.is_finite() {
            (lo, hi) = (0.0, 1.0);
        }
        if hi - lo < 1e-12 * hi.abs().max(1.0) {
            hi = lo + 1.0;
        }
        let label = match self.colour {
            ColourBy::Pressure => "mean pressure [mbar]".to_string(),
            ColourBy::Flow => "|flow| [µL/min]".to_string(),
            ColourBy::Margin => "shear margin (log10)".to_string(),
            ColourBy::Species(k) => super::outlets::species_label(self.chip, k),
        };
        (vals, lo, hi, label)
    }
}

/// A label's box, for greedy overlap avoidance.
struct Placed(Vec<[i32; 4]>);

impl Placed {
    /// Try the position and a few shifted ones; return the first free, recording it.
    fn place(&mut self, x: i32, y: i32, text: &str, size: u32) -> Option<(i32, i32)> {
        let w = (text.chars().count() as f64 * size as f64 * 0.58) as i32;
        let h = size as i32 + 2;
        for dy in [0, -h, h, -2 * h, 2 * h] {
            let b = [x, y + dy, x + w, y + dy + h];
            if self
                .0
                .iter()
                .all(|o| b[2] <= o[0] || b[0] >= o[2] || b[3] <= o[1] || b[1] >= o[3])
            {
                self.0.push(b);
                return Some((x, y + dy));
            }
        }
        None
    }
}

const MARGIN_L: f64 = 110.0;
const MARGIN_R: f64 = 280.0;
const MARGIN_T: f64 = 90.0;
const MARGIN_B: f64 = 70.0;

impl Figure for ChipPicture<'_> {
    fn size(&self) -> (u32, u32) {
        let (lo, hi) = self.extent();
        let (dx, dy) = (hi[0] - lo[0], hi[1] - lo[1]);
        if self.layout.from_file {
            let aspect = if dx > 0.0 { dy / dx } else { 1.0 };
            let w = 1100.0;
            (
                w as u32,
                ((w - MARGIN_L - MARGIN_R) * aspect + MARGIN_T + MARGIN_B).clamp(400.0, 1400.0)
                    as u32,
            )
        } else {
            let w = (dx * 190.0 + MARGIN_L + MARGIN_R).clamp(800.0, 2400.0);
            let h = (dy * 110.0 + MARGIN_T + MARGIN_B).clamp(420.0, 1800.0);
            (w as u32, h as u32)
        }
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let (w, h) = self.size();
        let (lo, hi) = self.extent();
        let (pw, ph) = (
            w as f64 - MARGIN_L - MARGIN_R,
            h as f64 - MARGIN_T - MARGIN_B,
        );
        let sx = if hi[0] > lo[0] {
            pw / (hi[0] - lo[0])
        } else {
            1.0
        };
        let sy = if hi[1] > lo[1] {
            ph / (hi[1] - lo[1])
        } else {
            1.0
        };
        let (sx, sy) = if self.layout.from_file {
            (sx.min(sy), sx.min(sy))
        } else {
            (sx, sy)
        };
        let to_px = |p: [f64; 2]| -> (i32, i32) {
            let x = MARGIN_L + (p[0] - lo[0]) * sx + if hi[0] > lo[0] { 0.0 } else { pw / 2.0 };
            let y = MARGIN_T + (p[1] - lo[1]) * sy + if hi[1] > lo[1] { 0.0 } else { ph / 2.0 };
            (x.round() as i32, y.round() as i32)
        };
        let net = self.network;
        let st = self.state;
        let title = format!(
            "{} — flow split, colour: {}",
            self.chip.title(),
            match self.colour {
                ColourBy::Pressure => "pressure",
                ColourBy::Flow => "flow",
                ColourBy::Margin => "shear margin",
                ColourBy::Species(k) => self
                    .chip
                    .species
                    .get(k)
                    .map_or("species", |s| s.name.as_str()),
            }
        );
        area.draw(&Text::new(title, (16, 12), text_style(20, INK)))
            .map_err(drawing)?;
        let labelled = net.channels.len() <= LABEL_LIMIT;
        let sub = if labelled {
            "line width ∝ |flow| · arrows show direction · % = share of a junction's outflow"
                .to_string()
        } else {
            format!(
                "line width ∝ |flow| · {} channels: per-channel labels left out (see the tables)",
                net.channels.len()
            )
        };
        area.draw(&Text::new(sub, (16, 42), text_style(13, INK)))
            .map_err(drawing)?;

        let (vals, vlo, vhi, vlabel) = self.colour_values();
        let qmax = st
            .channels
            .iter()
            .fold(0.0f64, |m, s| m.max(s.flow.abs()))
            .max(1e-300);
        let mut placed = Placed(Vec::new());
        // Port labels claim their space first; channel labels then avoid them.
        let mut port_labels: Vec<(String, (i32, i32))> = Vec::new();
        for (i, node) in net.nodes.iter().enumerate() {
            if matches!(node.port, Port::Junction) {
                continue;
            }
            let (x, y) = to_px(self.layout.nodes[i]);
            let p = st.solution.pressures[i];
            let q = st.solution.node_net_inflow[i];
            let value = match node.port {
                Port::Flow(_) => format!(
                    "{} µL/min set, needs {} mbar",
                    fmt_sig(display::ul_per_min(q), 3),
                    fmt_sig(display::mbar(p), 4)
                ),
                _ => format!(
                    "{} mbar set, {} µL/min in",
                    fmt_sig(display::mbar(p), 4),
                    fmt_sig(display::ul_per_min(q), 3)
                ),
            };
            for (j, line) in [node.name.clone(), value].into_iter().enumerate() {
                let pos = (x - 40, y + 10 + 14 * j as i32);
                let width = (line.chars().count() as f64 * 12.0 * 0.58) as i32;
                placed.0.push([pos.0, pos.1, pos.0 + width, pos.1 + 14]);
                port_labels.push((line, pos));
            }
        }
        // Over-limit halos first, under everything.
        for (k, s) in st.channels.iter().enumerate() {
            if s.shear_margin.is_some_and(|m| m < 1.0) {
                let pts: Vec<(i32, i32)> =
                    self.layout.channels[k].iter().map(|&p| to_px(p)).collect();
                let width = 2.0 + 10.0 * s.flow.abs() / qmax;
                area.draw(&PathElement::new(
                    pts,
                    ShapeStyle::from(&ALERT_VERMILLION).stroke_width((width + 8.0) as u32),
                ))
                .map_err(drawing)?;
            }
        }
        // Channels.
        for (k, s) in st.channels.iter().enumerate() {
            let pts: Vec<(i32, i32)> = self.layout.channels[k].iter().map(|&p| to_px(p)).collect();
            let colour = match vals[k] {
                Some(v) => ViridisRGB::get_color(((v - vlo) / (vhi - vlo)).clamp(0.0, 1.0)),
                None => GRID_GREY,
            };
            let width = 2.0 + 10.0 * s.flow.abs() / qmax;
            area.draw(&PathElement::new(
                pts.clone(),
                ShapeStyle::from(&colour).stroke_width(width.round() as u32),
            ))
            .map_err(drawing)?;
            // Arrow at the middle of the longest segment, pointing along the flow.
            if s.flow != 0.0 && pts.len() >= 2 {
                let seg = (0..pts.len() - 1)
                    .max_by_key(|&i| {
                        let (a, b) = (pts[i], pts[i + 1]);
                        (a.0 - b.0).pow(2) + (a.1 - b.1).pow(2)
                    })
                    .unwrap_or(0);
                let (a, b) = (pts[seg], pts[seg + 1]);
                let (mx, my) = ((a.0 + b.0) as f64 / 2.0, (a.1 + b.1) as f64 / 2.0);
                let (mut dx, mut dy) = ((b.0 - a.0) as f64, (b.1 - a.1) as f64);
                if s.flow < 0.0 {
                    dx = -dx;
                    dy = -dy;
                }
                let len = dx.hypot(dy).max(1e-9);
                let (ux, uy) = (dx / len, dy / len);
                let size = 6.0 + width / 2.0;
                let tip = ((mx + ux * size) as i32, (my + uy * size) as i32);
                let l = (
                    (mx - ux * size - uy * size * 0.8) as i32,
                    (my - uy * size + ux * size * 0.8) as i32,
                );
                let r = (
                    (mx - ux * size + uy * size * 0.8) as i32,
                    (my - uy * size - ux * size * 0.8) as i32,
                );
                area.draw(&Polygon::new(vec![tip, l, r], INK.filled()))
                    .map_err(drawing)?;
                if labelled {
                    let mut text =
                        format!("{} µL/min", fmt_sig(display::ul_per_min(s.flow.abs()), 3));
                    if s.shear_margin.is_some_and(|m| m < 1.0) {
                        text.push_str(" ! over shear limit");
                    }
                    let colour = if s.shear_margin.is_some_and(|m| m < 1.0) {
                        ALERT_VERMILLION
                    } else {
                        INK
                    };
                    // Beside the line, on the side away from the arrow's left wing.
                    // Candidates: beside the middle of the segment, then beside points at 30 %
                    // and 70 % of it, on either side.
                    let off = width / 2.0 + 6.0;
                    let mut candidates = Vec::new();
                    for t in [0.5, 0.3, 0.7] {
                        let (cx, cy) = (
                            a.0 as f64 + (b.0 - a.0) as f64 * t,
                            a.1 as f64 + (b.1 - a.1) as f64 * t,
                        );
                        for side in [1.0, -1.0] {
                            let (lx, ly) = (cx - side * uy * off + 4.0, cy + side * ux * off);
                            let ly = if uy.abs() < 0.3 {
                                cy + side * off - if side < 0.0 { 12.0 } else { 0.0 }
                            } else {
                                ly
                            };
                            candidates.push((lx as i32, ly as i32));
                        }
                    }
                    if let Some(pos) = candidates
                        .into_iter()
                        .find_map(|(x, y)| placed.place(x, y, &text, 11))
                    {
                        area.draw(&Text::new(text, pos, text_style(11, colour)))
                            .map_err(drawing)?;
                    }
                }
            }
        }
        // Junction splits: share of each outgoing channel in the junction's outflow.
        if labelled {
            for (i, node) in net.nodes.iter().enumerate() {
                if !matches!(node.port, Port::Junction) {
                    continue;
                }
                let outgoing: Vec<(usize, f64)> = st
                    .outflows(net, i)
                    .into_iter()
                    .map(|(k, _, q)| (k, q))
                    .collect();
                if outgoing.len() < 2 {
                    continue;
                }
                let total: f64 = outgoing.iter().map(|o| o.1).sum();
                let (nx, ny) = to_px(self.layout.nodes[i]);
                for (k, q) in outgoing {
                    let pts = &self.layout.channels[k];
                    let far = if net.channels[ChannelId(k)].from.0 == i {
                        pts[1]
                    } else {
                        pts[pts.len() - 2]
                    };
                    let (fx, fy) = to_px(far);
                    let (dx, dy) = ((fx - nx) as f64, (fy - ny) as f64);
                    let len = dx.hypot(dy).max(1e-9);
                    let (x, y) = (
                        (nx as f64 + dx / len * 34.0) as i32,
                        (ny as f64 + dy / len * 34.0) as i32 - 16,
                    );
                    let text = format!("{:.0} %", 100.0 * q / total);
                    if let Some(pos) = placed.place(x, y, &text, 12) {
                        area.draw(&Text::new(text, pos, text_style(12, INK)))
                            .map_err(drawing)?;
                    }
                }
            }
        }
        // Nodes: ports as squares with labels, junctions as dots.
        for (i, node) in net.nodes.iter().enumerate() {
            let (x, y) = to_px(self.layout.nodes[i]);
            match node.port {
                Port::Junction => {
                    area.draw(&Circle::new((x, y), 4, INK.filled()))
                        .map_err(drawing)?;
                }
                Port::Pressure(_) | Port::Flow(_) => {
                    area.draw(&Rectangle::new(
                        [(x - 6, y - 6), (x + 6, y + 6)],
                        INK.filled(),
                    ))
                    .map_err(drawing)?;
                }
            }
        }
        for (line, pos) in port_labels {
            area.draw(&Text::new(line, pos, text_style(12, INK)))
                .map_err(drawing)?;
        }
        // Colour bar.
        let (bx, by, bw, bh) = (
            w as i32 - 100,
            MARGIN_T as i32 + 10,
            20,
            (h as f64 * 0.45) as i32,
        );
        super::colour_bar(area, (bx, by, bw, bh), (vlo, vhi), &vlabel)?;
        if self.colour == ColourBy::Margin {
            area.draw(&Text::new(
                "grey: no limit",
                (bx - 30, by + bh + 10),
                text_style(11, INK),
            ))
            .map_err(drawing)?;
        }
        if st
            .channels
            .iter()
            .any(|s| s.shear_margin.is_some_and(|m| m < 1.0))
        {
            area.draw(&Text::new(
                "vermillion halo: over the wall-shear limit",
                (16, h as i32 - 30),
                text_style(13, ALERT_VERMILLION),
            ))
            .map_err(drawing)?;
        }
        Ok(())
    }
}

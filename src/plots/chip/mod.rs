//! The chip picture: channels drawn with a stroke that grows with the channel's width (wide
//! chambers stand out), arrows for the flow direction, channel and junction names with each
//! channel's flow and its share of a split, ports with their set or required values, and a
//! colour scale of pressure, flow, shear margin or a species' concentration.
//!
//! Sizes (the README says the same):
//! - up to [`LABEL_LIMIT`] channels every channel and junction is named;
//! - up to [`LARGE_LIMIT`] channels only those with findings or targets are named (ports
//!   always);
//! - above [`LARGE_LIMIT`] channels are thin lines coloured by the chosen quantity, without
//!   arrows or junction marks; only ports are marked and named.
//!
//! Parallel and antiparallel channels drawn on the same path (the same two nodes without a
//! `path:`, or identical paths) are fanned out side by side. Labels are placed by
//! [`super::labels`]: never over another label, line, arrow or node; with a leader line when
//! moved away; dropped (least important first) only when no place is free.
//!
//! Layout: see [`layout`]. In SVG each channel's line carries a `<title>` (name, flow, ΔP,
//! wall shear) that viewers show on hover (not on large chips).

mod layout;

pub use layout::{layout, Layout};

use super::labels::{along_path, around_point, text_size, Obstacles, Rect};
use super::{drawing, text_style, ticks, Bar, Figure, ALERT_VERMILLION, GRID_GREY, INK};
use crate::analysis::{findings, Place, SteadyState};
use crate::chip::design::TargetKind;
use crate::chip::Chip;
use crate::network::{ChannelId, Network, Port};
use crate::units::display;
use crate::units::display::fmt_sig;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::colors::colormaps::ViridisRGB;
use std::collections::BTreeMap;

/// What the channel colours show.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColourBy {
    Pressure,
    Flow,
    Margin,
    /// The mean concentration of the chip's species with this index (see `plots::solutes`).
    Species(usize),
}

/// Up to this many channels, every channel and junction is named on the picture.
pub const LABEL_LIMIT: usize = 60;
/// Above this many channels, channels are thin coloured lines: no arrows, no channel or
/// junction labels, only ports marked and named.
pub const LARGE_LIMIT: usize = 2000;

/// The chip picture.
pub struct ChipPicture<'a> {
    pub chip: &'a Chip,
    pub network: &'a Network,
    pub state: &'a SteadyState,
    pub colour: ColourBy,
    pub layout: Layout,
}

const MARGIN_L: f64 = 120.0;
const MARGIN_R: f64 = 300.0;
const MARGIN_T: f64 = 100.0;
const MARGIN_B: f64 = 110.0;
/// Pixels per layer and per row of the automatic layout.
const LAYER_PX: f64 = 340.0;
const ROW_PX: f64 = 96.0;
const NAME_GREY: RGBColor = RGBColor(80, 80, 80);
const LEADER_GREY: RGBColor = RGBColor(120, 120, 120);

type Px = (i32, i32);

/// Everything the picture draws, in pixels, in drawing order.
struct Scene {
    halos: Vec<(usize, Vec<Px>, u32)>,
    channels: Vec<(usize, Vec<Px>, u32, RGBColor)>,
    arrows: Vec<[Px; 3]>,
    junctions: Vec<Px>,
    ports: Vec<Px>,
    leaders: Vec<(Px, Px)>,
    texts: Vec<(String, Px, u32, RGBColor)>,
    bar: Option<Bar>,
}

/// The channel colours and the bar's scale.
struct Colours {
    values: Vec<Option<f64>>,
    lo: f64,
    hi: f64,
    ticks: Vec<(f64, String)>,
    mark: Option<(f64, String)>,
    label: String,
    /// What the caption says is coloured.
    caption: String,
    /// Nothing to encode (e.g. margin without any limit): no bar.
    empty: bool,
}

fn fmt_tick(v: f64) -> String {
    if v == 0.0 || (1e-3..1e5).contains(&v.abs()) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
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

    fn large(&self) -> bool {
        self.network.channels.len() > LARGE_LIMIT
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
        if !lo[0].is_finite() {
            return ([0.0; 2], [1.0; 2]);
        }
        (lo, hi)
    }

    fn colours(&self) -> Colours {
        let net = self.network;
        let st = self.state;
        let values: Vec<Option<f64>> = match self.colour {
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
                        .filter(|m| m.is_finite() && *m > 0.0)
                        .map(|m| m.clamp(1e-6, 1e6).log10())
                })
                .collect(),
            ColourBy::Species(k) => super::outlets::channel_values(self.chip, st, k),
        };
        let (mut lo, mut hi) = values
            .iter()
            .flatten()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                (a.min(v), b.max(v))
            });
        let empty = !lo.is_finite();
        if empty {
            (lo, hi) = (0.0, 1.0);
        }
        let (ticks, mark, label, caption);
        if self.colour == ColourBy::Margin {
            // Centred on margin = 1 (log10 = 0), at least 0.5 … 2 wide.
            let a = lo.abs().max(hi.abs()).max(2f64.log10());
            (lo, hi) = (-a, a);
            ticks = ticks::log_125(10f64.powf(-a), 10f64.powf(a), 7)
                .into_iter()
                .filter(|&m| (m - 1.0).abs() > 1e-9)
                .map(|m| (m.log10(), fmt_tick(m)))
                .collect();
            mark = Some((0.0, "1 = limit".to_string()));
            label = "shear margin".to_string();
            caption = if empty {
                "colour: wall-shear margin, but no channel has a wall-shear limit (all grey)"
                    .to_string()
            } else {
                "colour: wall-shear margin = limit / maximum wall shear (log scale; below 1: \
                 over the limit); grey: no limit"
                    .to_string()
            };
        } else {
            if hi - lo < 1e-12 * hi.abs().max(1.0) {
                let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.05 };
                (lo, hi) = (lo - pad, hi + pad);
                if self.colour == ColourBy::Flow && lo < 0.0 {
                    (lo, hi) = (0.0, hi + pad);
                }
            }
            ticks = ticks::linear(lo, hi, 6)
                .into_iter()
                .map(|v| (v, fmt_tick(v)))
                .collect();
            mark = None;
            let (l, c) = match self.colour {
                ColourBy::Pressure => (
                    "pressure [mbar]".to_string(),
                    "colour: mean of each channel's end pressures [mbar]".to_string(),
                ),
                ColourBy::Flow => (
                    "|flow| [µL/min]".to_string(),
                    "colour: |flow| in each channel [µL/min]".to_string(),
                ),
                ColourBy::Species(k) => {
                    let l = super::outlets::species_label(self.chip, k);
                    let c = format!("colour: mean {l} in each channel");
                    (l, c)
                }
                ColourBy::Margin => (String::new(), String::new()),
            };
            label = l;
            caption = c;
        }
        Colours {
            values,
            lo,
            hi,
            ticks,
            mark,
            label,
            caption,
            empty,
        }
    }

    /// Channels and nodes to name on a mid-sized chip: those with findings or targets.
    fn important(&self) -> (Vec<bool>, Vec<bool>) {
        let net = self.network;
        let mut ch = vec![false; net.channels.len()];
        let mut nd = vec![false; net.nodes.len()];
        for f in findings(net, self.state) {
            match f.kind.place() {
                Place::Channel(c) => ch[c.0] = true,
                Place::Node(n) => nd[n.0] = true,
                Place::Section(_) => {}
            }
        }
        for c in self.chip.design.target_channels() {
            ch[c.0] = true;
        }
        for t in &self.chip.design.targets {
            if let TargetKind::NodePressure { node, .. } = t.kind {
                nd[node.0] = true;
            }
        }
        (ch, nd)
    }

    fn scene(&self) -> Scene {
        let (w, h) = self.size();
        let (wf, hf) = (w as f64, h as f64);
        let (lo, hi) = self.extent();
        let (pw, ph) = (wf - MARGIN_L - MARGIN_R, hf - MARGIN_T - MARGIN_B);
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
        // To scale from the file: one scale, set by the extent that has one (a chip drawn
        // on a single line has no height to fit).
        let (sx, sy) = if self.layout.from_file {
            let s = match (hi[0] > lo[0], hi[1] > lo[1]) {
                (true, true) => sx.min(sy),
                (true, false) => sx,
                (false, true) => sy,
                (false, false) => 1.0,
            };
            (s, s)
        } else {
            (sx, sy)
        };
        let to_px = |p: [f64; 2]| -> [f64; 2] {
            let x = MARGIN_L + (p[0] - lo[0]) * sx + if hi[0] > lo[0] { 0.0 } else { pw / 2.0 };
            let y = MARGIN_T + (p[1] - lo[1]) * sy + if hi[1] > lo[1] { 0.0 } else { ph / 2.0 };
            [x.round(), y.round()]
        };
        let ip = |p: [f64; 2]| -> Px { (p[0].round() as i32, p[1].round() as i32) };
        let net = self.network;
        let st = self.state;
        let large = self.large();
        let n_ch = net.channels.len();
        let nodes: Vec<[f64; 2]> = self.layout.nodes.iter().map(|&p| to_px(p)).collect();
        let strokes = self.strokes();
        let paths = fan_out(
            &self
                .layout
                .channels
                .iter()
                .map(|c| c.iter().map(|&p| to_px(p)).collect())
                .collect::<Vec<_>>(),
            &strokes,
        );
        let colours = self.colours();
        let mut scene = Scene {
            halos: Vec::new(),
            channels: Vec::new(),
            arrows: Vec::new(),
            junctions: Vec::new(),
            ports: Vec::new(),
            leaders: Vec::new(),
            texts: Vec::new(),
            bar: None,
        };
        let mut obs = Obstacles::new(Rect::new(4.0, 4.0, wf - 4.0, hf - 4.0));
        // Title and subtitle, captions at the bottom, the colour bar: reserved first.
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
        let fixed_text =
            |scene: &mut Scene, obs: &mut Obstacles, t: String, at: Px, size: u32, c: RGBColor| {
                let (tw, th) = text_size(t.chars().count(), 1, size as f64);
                obs.add_box(
                    Rect::new(at.0 as f64, at.1 as f64, at.0 as f64 + tw, at.1 as f64 + th)
                        .inflate(2.0),
                );
                scene.texts.push((t, at, size, c));
            };
        fixed_text(&mut scene, &mut obs, title, (16, 12), 20, INK);
        let sub = if n_ch <= LABEL_LIMIT {
            "line width ∝ channel width · arrows show direction · % = share of a junction's outflow"
                .to_string()
        } else if !large {
            format!(
                "line width ∝ channel width · {n_ch} channels: only channels and junctions with \
                 findings or targets are named (see the tables)"
            )
        } else {
            format!(
                "{n_ch} channels: thin lines coloured by {}; no arrows or labels except ports \
                 (see the tables)",
                colours.label
            )
        };
        fixed_text(&mut scene, &mut obs, sub, (16, 42), 13, INK);
        let mut captions = vec![(colours.caption.clone(), INK)];
        captions.push((
            if self.layout.from_file {
                "drawn from the file's 'at:' and 'path:' positions, to scale (line widths not)"
                    .to_string()
            } else {
                "schematic layout (the file gives no 'at:' positions): lengths not to scale"
                    .to_string()
            },
            INK,
        ));
        if st
            .channels
            .iter()
            .any(|s| s.shear_margin.is_some_and(|m| m < 1.0))
        {
            captions.push((
                "vermillion halo: over the wall-shear limit — cells may be harmed; confirm \
                 shear tolerance with your lab's own validation"
                    .to_string(),
                ALERT_VERMILLION,
            ));
        }
        let nc = captions.len() as i32;
        for (i, (t, c)) in captions.into_iter().enumerate() {
            fixed_text(
                &mut scene,
                &mut obs,
                t,
                (16, h as i32 - 22 * (nc - i as i32) - 6),
                13,
                c,
            );
        }
        if !colours.empty {
            let (bx, by, bw, bh) = (w as i32 - 110, MARGIN_T as i32 + 10, 20, (hf * 0.45) as i32);
            obs.add_box(Rect::new(
                (bx - 60) as f64,
                (by - 30) as f64,
                wf,
                (by + bh + 12) as f64,
            ));
            scene.bar = Some(Bar {
                rect: (bx, by, bw, bh),
                lo: colours.lo,
                hi: colours.hi,
                ticks: colours.ticks.clone(),
                mark: colours.mark.clone(),
                label: colours.label.clone(),
            });
        }
        // Channels (halos first), arrows and nodes: all obstacles before any label.
        for (k, s) in st.channels.iter().enumerate() {
            if s.shear_margin.is_some_and(|m| m < 1.0) {
                let sw = strokes[k] + if large { 3.0 } else { 8.0 };
                obs.add_path(&paths[k], sw);
                scene
                    .halos
                    .push((k, paths[k].iter().map(|&p| ip(p)).collect(), sw as u32));
            }
        }
        for (k, s) in st.channels.iter().enumerate() {
            let pts = &paths[k];
            let colour = match colours.values[k] {
                Some(v) => ViridisRGB::get_color(
                    ((v - colours.lo) / (colours.hi - colours.lo)).clamp(0.0, 1.0),
                ),
                None => GRID_GREY,
            };
            obs.add_path(pts, strokes[k]);
            scene.channels.push((
                k,
                pts.iter().map(|&p| ip(p)).collect(),
                strokes[k] as u32,
                colour,
            ));
            if large || s.flow == 0.0 || pts.len() < 2 {
                continue;
            }
            // Arrow at 70 % of the longest segment (its middle is the label's first choice),
            // pointing along the flow.
            let seg = longest_segment(pts);
            let (a, b) = (pts[seg], pts[seg + 1]);
            let (mx, my) = (a[0] + (b[0] - a[0]) * 0.7, a[1] + (b[1] - a[1]) * 0.7);
            let (mut dx, mut dy) = (b[0] - a[0], b[1] - a[1]);
            if s.flow < 0.0 {
                dx = -dx;
                dy = -dy;
            }
            let len = dx.hypot(dy).max(1e-9);
            let (ux, uy) = (dx / len, dy / len);
            let size = 6.0 + strokes[k] / 2.0;
            let tri = [
                [mx + ux * size, my + uy * size],
                [
                    mx - ux * size - uy * size * 0.8,
                    my - uy * size + ux * size * 0.8,
                ],
                [
                    mx - ux * size + uy * size * 0.8,
                    my - uy * size - ux * size * 0.8,
                ],
            ];
            let xs = tri.iter().map(|p| p[0]);
            let ys = tri.iter().map(|p| p[1]);
            obs.add_box(Rect::new(
                xs.clone().fold(f64::INFINITY, f64::min),
                ys.clone().fold(f64::INFINITY, f64::min),
                xs.fold(f64::NEG_INFINITY, f64::max),
                ys.fold(f64::NEG_INFINITY, f64::max),
            ));
            scene.arrows.push([ip(tri[0]), ip(tri[1]), ip(tri[2])]);
        }
        for (i, node) in net.nodes.iter().enumerate() {
            let [x, y] = nodes[i];
            match node.port {
                Port::Junction => {
                    if !large {
                        obs.add_box(Rect::new(x - 5.0, y - 5.0, x + 5.0, y + 5.0));
                        scene.junctions.push(ip(nodes[i]));
                    }
                }
                Port::Pressure(_) | Port::Flow(_) => {
                    obs.add_box(Rect::new(x - 7.0, y - 7.0, x + 7.0, y + 7.0));
                    scene.ports.push(ip(nodes[i]));
                }
            }
        }
        // Labels, most important first: ports, then channels and junctions with findings or
        // targets, then the others.
        let (imp_ch, imp_nd) = self.important();
        // Place the first of the alternative line sets that fits near its anchor (the first
        // `1/near` of the candidates); failing that, the first that fits anywhere offered.
        type Lines = Vec<(String, u32, RGBColor)>;
        let put = |scene: &mut Scene,
                   obs: &mut Obstacles,
                   alts: Vec<Lines>,
                   near: usize,
                   cands: &dyn Fn((f64, f64)) -> Vec<super::labels::Candidate>|
         -> bool {
            let boxed: Vec<(Lines, (f64, f64), f64)> = alts
                .into_iter()
                .map(|lines| {
                    let size = lines.iter().map(|l| l.1).max().unwrap_or(12) as f64;
                    let chars = lines.iter().map(|l| l.0.chars().count()).max().unwrap_or(0);
                    let bb = text_size(chars, lines.len(), size);
                    (lines, bb, size)
                })
                .collect();
            for phase in 0..2 {
                for (lines, bb, size) in &boxed {
                    let mut c = cands(*bb);
                    if phase == 0 {
                        c.truncate(c.len().div_ceil(near.max(1)));
                    }
                    if let Some(p) = obs.place(*bb, c) {
                        for (j, (t, sz, col)) in lines.iter().enumerate() {
                            let y = p.y + j as f64 * super::labels::LINE_EM * size;
                            scene.texts.push((
                                t.clone(),
                                (p.x.round() as i32, y.round() as i32),
                                *sz,
                                *col,
                            ));
                        }
                        if let Some((a, b)) = p.leader {
                            scene.leaders.push((ip(a), ip(b)));
                        }
                        return true;
                    }
                }
            }
            false
        };
        for (i, node) in net.nodes.iter().enumerate() {
            if matches!(node.port, Port::Junction) {
                continue;
            }
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
            let lines = if large {
                vec![(node.name.clone(), 12, INK)]
            } else {
                vec![(node.name.clone(), 12, INK), (value, 12, INK)]
            };
            let at = nodes[i];
            put(&mut scene, &mut obs, vec![lines], 1, &|sz| {
                around_point(at, 8.0, sz, 6)
            });
        }
        if large {
            return scene;
        }
        let all = n_ch <= LABEL_LIMIT;
        let shares = self.shares();
        // One line ("name: value"), or two (name above value) where one does not fit.
        let channel_label = |k: usize| -> (String, String, RGBColor) {
            let s = &st.channels[k];
            let name = format!("{}:", net.channels[ChannelId(k)].name);
            let mut t = String::new();
            if s.flow == 0.0 {
                t.push_str("no flow");
            } else {
                t.push_str(&format!(
                    "{} µL/min",
                    fmt_sig(display::ul_per_min(s.flow.abs()), 3)
                ));
            }
            if let Some(share) = shares[k] {
                t.push_str(&format!(", {share:.0} %"));
            }
            if s.shear_margin.is_some_and(|m| m < 1.0) {
                t.push_str(" ! over shear limit");
                (name, t, ALERT_VERMILLION)
            } else {
                (name, t, INK)
            }
        };
        let junction =
            |i: usize| matches!(net.nodes[crate::network::NodeId(i)].port, Port::Junction);
        for pass in 0..2 {
            let wanted = |imp: bool| if pass == 0 { imp } else { all && !imp };
            for k in (0..n_ch).filter(|&k| wanted(imp_ch[k])) {
                let (name, t, c) = channel_label(k);
                let path = paths[k].clone();
                let half = strokes[k] / 2.0;
                let alts = vec![
                    vec![(format!("{name} {t}"), 11, c)],
                    vec![(name, 11, c), (t, 11, c)],
                ];
                put(&mut scene, &mut obs, alts, 4, &|sz| {
                    along_path(&path, half, sz)
                });
            }
            for i in (0..net.nodes.len()).filter(|&i| junction(i) && wanted(imp_nd[i])) {
                let at = nodes[i];
                put(
                    &mut scene,
                    &mut obs,
                    vec![vec![(
                        net.nodes[crate::network::NodeId(i)].name.clone(),
                        11,
                        NAME_GREY,
                    )]],
                    1,
                    &|sz| around_point(at, 5.0, sz, 4),
                );
            }
        }
        scene
    }

    /// Stroke width per channel [px]: proportional to the channel's overall width, the widest
    /// at 14 px, none under 2 px (1 px on large chips).
    fn strokes(&self) -> Vec<f64> {
        let net = self.network;
        let widths: Vec<f64> = net
            .channels
            .iter()
            .map(|c| net.sections[c.section].shape.overall_width())
            .collect();
        if self.large() {
            return vec![1.0; widths.len()];
        }
        let wmax = widths
            .iter()
            .copied()
            .filter(|w| w.is_finite())
            .fold(0.0f64, f64::max);
        widths
            .iter()
            .map(|&wd| {
                if wmax > 0.0 && wd.is_finite() {
                    (14.0 * wd / wmax).clamp(2.0, 14.0).round()
                } else {
                    2.0
                }
            })
            .collect()
    }

    /// Each channel's share [%] of its upstream junction's outflow, where it splits.
    fn shares(&self) -> Vec<Option<f64>> {
        let net = self.network;
        let st = self.state;
        let mut out = vec![None; net.channels.len()];
        for (i, node) in net.nodes.iter().enumerate() {
            if !matches!(node.port, Port::Junction) {
                continue;
            }
            let outgoing = st.outflows(net, i);
            if outgoing.len() < 2 {
                continue;
            }
            let total: f64 = outgoing.iter().map(|o| o.2).sum();
            for (k, _, q) in outgoing {
                out[k] = Some(100.0 * q / total);
            }
        }
        out
    }

    /// One tooltip text per channel: name, flow, ΔP, wall shear.
    fn tooltip(&self, k: usize) -> String {
        let c = &self.network.channels[ChannelId(k)];
        let s = &self.state.channels[k];
        let mut t = format!(
            "{}: flow {} µL/min, ΔP {} mbar, wall shear {} Pa (max), {} Pa (mean)",
            c.name,
            fmt_sig(display::ul_per_min(s.flow), 3),
            fmt_sig(display::mbar(s.pressure_drop), 3),
            fmt_sig(s.wall_shear_max, 3),
            fmt_sig(s.wall_shear_mean, 3),
        );
        if let Some(m) = s.shear_margin.filter(|m| m.is_finite()) {
            t.push_str(&format!(", shear margin {}", fmt_sig(m, 3)));
        }
        t
    }
}

fn longest_segment(pts: &[[f64; 2]]) -> usize {
    (0..pts.len().saturating_sub(1))
        .max_by(|&i, &j| {
            let l = |i: usize| (pts[i + 1][0] - pts[i][0]).hypot(pts[i + 1][1] - pts[i][1]);
            l(i).total_cmp(&l(j)).then(j.cmp(&i))
        })
        .unwrap_or(0)
}

/// Channels drawn on the same pixel path (either direction) fanned out side by side: lane j
/// of n offset by (j − (n−1)/2) × spacing (room for a label between lanes), leaving and joining the shared end points at 45°.
fn fan_out(paths: &[Vec<[f64; 2]>], strokes: &[f64]) -> Vec<Vec<[f64; 2]>> {
    let key = |p: &Vec<[f64; 2]>| -> (Vec<(i64, i64)>, bool) {
        let fwd: Vec<(i64, i64)> = p.iter().map(|q| (q[0] as i64, q[1] as i64)).collect();
        let mut rev = fwd.clone();
        rev.reverse();
        if rev < fwd {
            (rev, true)
        } else {
            (fwd, false)
        }
    };
    // Pixel path → (channel, drawn reversed).
    type Lanes = Vec<(usize, bool)>;
    let mut groups: BTreeMap<Vec<(i64, i64)>, Lanes> = BTreeMap::new();
    for (k, p) in paths.iter().enumerate() {
        let (kk, flipped) = key(p);
        groups.entry(kk).or_default().push((k, flipped));
    }
    let mut out = paths.to_vec();
    for members in groups.values().filter(|m| m.len() > 1) {
        let n = members.len();
        let widest = members
            .iter()
            .map(|&(k, _)| strokes[k])
            .fold(0.0f64, f64::max);
        // Room for a line of text between two lanes.
        let spacing = widest + 44.0;
        for (j, &(k, flipped)) in members.iter().enumerate() {
            let d = (j as f64 - (n as f64 - 1.0) / 2.0) * spacing;
            if d == 0.0 {
                continue;
            }
            let mut base = paths[k].clone();
            if flipped {
                base.reverse();
            }
            let mut lane = offset_path(&base, d);
            if flipped {
                lane.reverse();
            }
            out[k] = lane;
        }
    }
    out
}

/// The polyline moved sideways by `d` (left of the direction of travel for d > 0, in
/// pixel coordinates), keeping its two end points and joining them at 45°.
fn offset_path(p: &[[f64; 2]], d: f64) -> Vec<[f64; 2]> {
    let m = p.len();
    if m < 2 {
        return p.to_vec();
    }
    let unit = |a: [f64; 2], b: [f64; 2]| {
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let l = dx.hypot(dy).max(1e-12);
        [dx / l, dy / l]
    };
    let normal = |t: [f64; 2]| [t[1], -t[0]];
    let mut inner = Vec::with_capacity(m);
    for i in 0..m {
        let t_in = if i > 0 {
            unit(p[i - 1], p[i])
        } else {
            unit(p[0], p[1])
        };
        let t_out = if i + 1 < m {
            unit(p[i], p[i + 1])
        } else {
            t_in
        };
        let (n1, n2) = (normal(t_in), normal(t_out));
        // Miter: the point at distance d from both offset lines.
        let s = [n1[0] + n2[0], n1[1] + n2[1]];
        let dot = 1.0 + n1[0] * n2[0] + n1[1] * n2[1];
        let q = if dot > 0.2 {
            [p[i][0] + s[0] * d / dot, p[i][1] + s[1] * d / dot]
        } else {
            [p[i][0] + n2[0] * d, p[i][1] + n2[1] * d]
        };
        inner.push(q);
    }
    let t0 = unit(p[0], p[1]);
    let t1 = unit(p[m - 2], p[m - 1]);
    let first_len = (p[1][0] - p[0][0]).hypot(p[1][1] - p[0][1]);
    let last_len = (p[m - 1][0] - p[m - 2][0]).hypot(p[m - 1][1] - p[m - 2][1]);
    let k0 = d.abs().min(first_len / 3.0);
    let k1 = d.abs().min(last_len / 3.0);
    inner[0] = [inner[0][0] + t0[0] * k0, inner[0][1] + t0[1] * k0];
    inner[m - 1] = [inner[m - 1][0] - t1[0] * k1, inner[m - 1][1] - t1[1] * k1];
    let mut out = vec![p[0]];
    out.extend(inner);
    out.push(p[m - 1]);
    out
}

fn escape_xml(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

impl Figure for ChipPicture<'_> {
    fn size(&self) -> (u32, u32) {
        let (lo, hi) = self.extent();
        let (dx, dy) = (hi[0] - lo[0], hi[1] - lo[1]);
        if self.layout.from_file {
            let aspect = if dx > 0.0 { dy / dx } else { 1.0 };
            let w = 1200.0;
            (
                w as u32,
                ((w - MARGIN_L - MARGIN_R) * aspect + MARGIN_T + MARGIN_B).clamp(480.0, 1500.0)
                    as u32,
            )
        } else {
            let w = (dx * LAYER_PX + MARGIN_L + MARGIN_R).clamp(900.0, 2400.0);
            let h = (dy * ROW_PX + MARGIN_T + MARGIN_B).clamp(480.0, 1800.0);
            (w as u32, h as u32)
        }
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let scene = self.scene();
        for (_, pts, sw) in &scene.halos {
            area.draw(&PathElement::new(
                pts.clone(),
                ShapeStyle::from(&ALERT_VERMILLION).stroke_width(*sw),
            ))
            .map_err(drawing)?;
        }
        for (_, pts, sw, colour) in &scene.channels {
            area.draw(&PathElement::new(
                pts.clone(),
                ShapeStyle::from(colour).stroke_width(*sw),
            ))
            .map_err(drawing)?;
        }
        for tri in &scene.arrows {
            area.draw(&Polygon::new(tri.to_vec(), INK.filled()))
                .map_err(drawing)?;
        }
        for &(x, y) in &scene.junctions {
            area.draw(&Circle::new((x, y), 4, INK.filled()))
                .map_err(drawing)?;
        }
        for &(x, y) in &scene.ports {
            area.draw(&Rectangle::new(
                [(x - 6, y - 6), (x + 6, y + 6)],
                INK.filled(),
            ))
            .map_err(drawing)?;
        }
        for &(a, b) in &scene.leaders {
            area.draw(&PathElement::new(
                vec![a, b],
                ShapeStyle::from(&LEADER_GREY).stroke_width(1),
            ))
            .map_err(drawing)?;
        }
        if let Some(bar) = &scene.bar {
            super::colour_bar_scaled(area, bar)?;
        }
        for (t, pos, size, colour) in &scene.texts {
            area.draw(&Text::new(t.clone(), *pos, text_style(*size, *colour)))
                .map_err(drawing)?;
        }
        Ok(())
    }

    /// Give each channel's line (and halo) a `<title>`: the polylines come in drawing order,
    /// halos, then channels, then leader lines.
    /// Large chips keep their SVG lean: no tooltips on lines too thin to point at.
    fn finish_svg(&self, svg: String) -> String {
        if self.large() {
            return svg;
        }
        let scene = self.scene();
        let owners: Vec<usize> = scene
            .halos
            .iter()
            .map(|h| h.0)
            .chain(scene.channels.iter().map(|c| c.0))
            .collect();
        let mut out = String::with_capacity(svg.len() + owners.len() * 120);
        let mut rest = svg.as_str();
        let mut i = 0;
        while let Some(at) = rest.find("<polyline") {
            let Some(end) = rest[at..].find("/>") else {
                break;
            };
            let end = at + end;
            out.push_str(&rest[..end]);
            match owners.get(i) {
                Some(&k) => {
                    out.push_str("><title>");
                    out.push_str(&escape_xml(&self.tooltip(k)));
                    out.push_str("</title></polyline>");
                }
                None => out.push_str("/>"),
            }
            rest = &rest[end + 2..];
            i += 1;
        }
        out.push_str(rest);
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn three_lanes_fan_out_into_distinct_paths() {
        let straight = vec![[100.0, 200.0], [500.0, 200.0]];
        let paths = vec![
            straight.clone(),
            straight.clone(),
            straight.iter().rev().copied().collect(),
        ];
        let out = fan_out(&paths, &[4.0, 4.0, 4.0]);
        // End points kept (each lane still joins its two nodes) …
        for (p, q) in out.iter().zip(&paths) {
            assert_eq!(p.first(), q.first());
            assert_eq!(p.last(), q.last());
        }
        // … and the middle runs of the three lanes at three different heights, 48 px apart.
        let mid_y = |p: &Vec<[f64; 2]>| p[p.len() / 2][1];
        let mut ys: Vec<f64> = out.iter().map(mid_y).collect();
        ys.sort_by(f64::total_cmp);
        assert_eq!(ys, vec![152.0, 200.0, 248.0]);
    }

    #[test]
    fn offset_keeps_orthogonal_runs_parallel() {
        let p = vec![[0.0, 0.0], [100.0, 0.0], [100.0, 100.0], [200.0, 100.0]];
        let q = offset_path(&p, 10.0);
        // Interior corners moved by (±10, ±10): the runs stay horizontal and vertical.
        assert_eq!(q[2], [110.0, -10.0]);
        assert_eq!(q[3], [110.0, 90.0]);
    }
}

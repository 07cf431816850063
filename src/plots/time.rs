//! Flows (and well levels) against time from an `evolve` run: one panel of channel flows,
//! and below it a panel of well levels when the chip has wells. The curves are the series at
//! the run's output instants (`--every`), so a finer `--every` draws a smoother picture.

use super::{drawing, Figure, GRID_GREY, INK};
use crate::analysis::transient::Evolution;
use crate::chip::design::TargetKind;
use crate::chip::Chip;
use crate::network::{ChannelId, Port, Storage};
use plotters::coord::Shift;
use plotters::prelude::*;

/// At most this many curves per panel by default (more would not be told apart).
pub const DEFAULT_CURVES: usize = 8;

/// Okabe–Ito colours, repeated beyond eight curves (the legend names every curve).
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

/// One curve: its name and (time, value) points in the panel's units.
#[derive(Clone, Debug, PartialEq)]
pub struct Curve {
    pub label: String,
    pub points: Vec<(f64, f64)>,
}

/// The picture: flows in µL/min, levels in mm, time in s, min or h (by the run's length).
pub struct TimePicture {
    pub title: String,
    pub time_unit: &'static str,
    pub flows: Vec<Curve>,
    pub levels: Vec<Curve>,
}

/// Channels drawn when none are named: those of the chip's flow and split targets, else the
/// channels at its ports (file order), at most [`DEFAULT_CURVES`].
pub fn default_channels(chip: &Chip) -> Vec<ChannelId> {
    let net = &chip.network;
    let mut out: Vec<ChannelId> = Vec::new();
    for t in &chip.design.targets {
        match &t.kind {
            TargetKind::ChannelFlow { channel, .. } => out.push(*channel),
            TargetKind::Split { channels, .. } => out.extend(channels.iter().copied()),
            _ => {}
        }
    }
    if out.is_empty() {
        for (k, c) in net.channels.iter().enumerate() {
            let at_port = [c.from, c.to].iter().any(|n| {
                let node = &net.nodes[*n];
                node.port != Port::Junction || matches!(node.storage, Some(Storage::Well(_)))
            });
            if at_port {
                out.push(ChannelId(k));
            }
        }
    }
    let mut seen = vec![false; net.channels.len()];
    out.retain(|c| !std::mem::replace(&mut seen[c.0], true));
    out.truncate(DEFAULT_CURVES);
    out
}

impl TimePicture {
    /// Curves for `channels` (and every well, at most [`DEFAULT_CURVES`]).
    pub fn new(chip: &Chip, ev: &Evolution, channels: &[ChannelId]) -> TimePicture {
        let end = ev.times.last().copied().unwrap_or(0.0);
        let (time_unit, scale) = if end <= 120.0 {
            ("s", 1.0)
        } else if end <= 2.0 * 3600.0 {
            ("min", 60.0)
        } else {
            ("h", 3600.0)
        };
        let flows = channels
            .iter()
            .map(|c| Curve {
                label: chip.network.channels[*c].name.clone(),
                points: (ev.times.iter().zip(&ev.flows))
                    .map(|(t, f)| (t / scale, f[c.0] * 6e10 + 0.0))
                    .collect(),
            })
            .collect();
        let levels = (ev.levels.iter().take(DEFAULT_CURVES))
            .map(|(n, l)| Curve {
                label: chip.network.nodes[*n].name.clone(),
                points: (ev.times.iter().zip(l))
                    .map(|(t, h)| (t / scale, h * 1e3 + 0.0))
                    .collect(),
            })
            .collect();
        TimePicture {
            title: format!("{} — flows against time", chip.title()),
            time_unit,
            flows,
            levels,
        }
    }
}

/// The range of the curves' values, padded, never empty.
fn value_range(curves: &[Curve]) -> (f64, f64) {
    let (lo, hi) = curves
        .iter()
        .flat_map(|c| c.points.iter().map(|p| p.1))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    if !(lo.is_finite() && hi.is_finite()) {
        return (0.0, 1.0);
    }
    let pad = if hi > lo {
        0.05 * (hi - lo)
    } else {
        0.5 * hi.abs().max(1e-12)
    };
    (lo - pad, hi + pad)
}

fn panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    caption: &str,
    x_desc: &str,
    y_desc: &str,
    xmax: f64,
    curves: &[Curve],
) -> Result<(), String> {
    let (lo, hi) = value_range(curves);
    let mut chart = ChartBuilder::on(area)
        .margin(20)
        .caption(caption, (super::FONT, 16))
        .x_label_area_size(45)
        .y_label_area_size(80)
        .build_cartesian_2d(0.0..xmax, lo..hi)
        .map_err(drawing)?;
    chart
        .configure_mesh()
        .light_line_style(GRID_GREY.mix(0.3))
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style((super::FONT, 12))
        .draw()
        .map_err(drawing)?;
    for (i, c) in curves.iter().enumerate() {
        let colour = LINE_COLOURS[i % LINE_COLOURS.len()];
        chart
            .draw_series(LineSeries::new(
                c.points.clone(),
                ShapeStyle::from(&colour).stroke_width(2),
            ))
            .map_err(drawing)?
            .label(c.label.clone())
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], colour));
    }
    if !curves.is_empty() {
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.85))
            .border_style(INK)
            .label_font((super::FONT, 12))
            .draw()
            .map_err(drawing)?;
    }
    Ok(())
}

impl Figure for TimePicture {
    fn size(&self) -> (u32, u32) {
        if self.levels.is_empty() {
            (1000, 520)
        } else {
            (1000, 900)
        }
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let xmax = (self.flows.iter().chain(&self.levels))
            .flat_map(|c| c.points.last().map(|p| p.0))
            .fold(0.0, f64::max)
            .max(1e-9);
        let x_desc = format!("time [{}]", self.time_unit);
        if self.levels.is_empty() {
            return panel(
                area,
                &self.title,
                &x_desc,
                "flow [uL/min]",
                xmax,
                &self.flows,
            );
        }
        let (top, bottom) = area.split_vertically(500);
        panel(
            &top,
            &self.title,
            &x_desc,
            "flow [uL/min]",
            xmax,
            &self.flows,
        )?;
        panel(
            &bottom,
            "well levels above the datum",
            &x_desc,
            "level [mm]",
            xmax,
            &self.levels,
        )
    }
}

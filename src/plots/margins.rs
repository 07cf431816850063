//! The shear-margin chart: one horizontal bar per channel with a limit, smallest margin at the
//! top, on a logarithmic margin axis with the limit (margin = 1) drawn as a line.

use super::{drawing, Figure, ALERT_VERMILLION, GRID_GREY, INK, OK_BLUE};
use crate::analysis::SteadyState;
use crate::chip::Chip;
use plotters::coord::Shift;
use plotters::prelude::*;

/// One bar.
#[derive(Clone, Debug, PartialEq)]
pub struct MarginBar {
    pub channel: String,
    /// limit / τ_max; infinite when the channel carries no flow.
    pub margin: f64,
    pub wall_shear_max: f64,
    pub limit: f64,
}

/// The chart's data and title.
#[derive(Clone, Debug, PartialEq)]
pub struct MarginChart {
    pub title: String,
    /// Worst (smallest margin) first.
    pub bars: Vec<MarginBar>,
    /// Channels left out because no limit applies to them.
    pub unlimited: usize,
}

const ROW: u32 = 22;
const TOP: u32 = 70;
const BOTTOM: u32 = 64;
const RIGHT: u32 = 150;
const WIDTH: u32 = 960;

impl MarginChart {
    /// Collect the bars from a solved chip; `None` when no channel has a shear limit.
    pub fn new(chip: &Chip, state: &SteadyState) -> Option<MarginChart> {
        let network = &chip.network;
        let mut bars: Vec<MarginBar> = network
            .channels
            .iter()
            .zip(&state.channels)
            .filter_map(|(c, s)| {
                Some(MarginBar {
                    channel: c.name.clone(),
                    margin: s.shear_margin?,
                    wall_shear_max: s.wall_shear_max,
                    limit: s.shear_limit?,
                })
            })
            .collect();
        if bars.is_empty() {
            return None;
        }
        bars.sort_by(|a, b| a.margin.total_cmp(&b.margin));
        let unlimited = network.channels.len() - bars.len();
        Some(MarginChart {
            title: format!("Wall-shear margin per channel — {}", chip.title()),
            bars,
            unlimited,
        })
    }

    /// Number of bars over their limit.
    pub fn over_limit(&self) -> usize {
        self.bars.iter().filter(|b| b.margin < 1.0).count()
    }

    fn label_width(&self) -> u32 {
        let longest = self
            .bars
            .iter()
            .map(|b| b.channel.chars().count())
            .max()
            .unwrap_or(4)
            .min(40);
        (longest as u32) * 8 + 24
    }

    /// Decades shown on the axis: from below the smallest finite margin (and 1) to above
    /// the largest (and 1).
    fn decades(&self) -> (i32, i32) {
        let finite = self.bars.iter().map(|b| b.margin).filter(|m| m.is_finite());
        let (lo, hi) = finite.fold((1.0f64, 1.0f64), |(lo, hi), m| (lo.min(m), hi.max(m)));
        let lo = lo.max(1e-6).log10().floor() as i32;
        let hi = hi.min(1e6).log10().ceil() as i32;
        (lo, hi.max(lo + 1))
    }
}

fn fmt_margin(m: f64) -> String {
    if !m.is_finite() {
        "no flow".into()
    } else if m >= 100.0 {
        format!("{m:.0}")
    } else if m >= 10.0 {
        format!("{m:.1}")
    } else {
        format!("{m:.2}")
    }
}

impl Figure for MarginChart {
    fn size(&self) -> (u32, u32) {
        (WIDTH, TOP + BOTTOM + ROW * self.bars.len() as u32)
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let (w, h) = self.size();
        let left = self.label_width();
        let plot_w = (w - left - RIGHT) as f64;
        let (lo, hi) = self.decades();
        let x_of = |m: f64| -> i32 {
            let m = m.clamp(10f64.powi(lo), 10f64.powi(hi));
            left as i32 + ((m.log10() - lo as f64) / (hi - lo) as f64 * plot_w) as i32
        };
        let text = |size: u32, color: &RGBColor| super::text_style(size, *color);

        // Title and subtitle.
        area.draw(&Text::new(self.title.clone(), (16, 12), text(20, &INK)))
            .map_err(drawing)?;
        let sub = format!(
            "margin = shear limit / maximum wall shear · {} of {} over the limit{}",
            self.over_limit(),
            self.bars.len(),
            if self.unlimited > 0 {
                format!(" · {} channel(s) without a limit not shown", self.unlimited)
            } else {
                String::new()
            }
        );
        area.draw(&Text::new(sub, (16, 40), text(13, &INK)))
            .map_err(drawing)?;

        let y_top = TOP as i32;
        let y_bottom = (h - BOTTOM) as i32;
        // Decade grid and tick labels.
        for d in lo..=hi {
            let x = x_of(10f64.powi(d));
            area.draw(&PathElement::new(
                vec![(x, y_top), (x, y_bottom)],
                GRID_GREY,
            ))
            .map_err(drawing)?;
            let label = if d >= 0 {
                format!("{}", 10f64.powi(d))
            } else {
                format!("{:.*}", (-d) as usize, 10f64.powi(d))
            };
            area.draw(&Text::new(label, (x - 10, y_bottom + 8), text(12, &INK)))
                .map_err(drawing)?;
        }
        area.draw(&Text::new(
            "margin (log scale)",
            (left as i32 + plot_w as i32 / 2 - 50, y_bottom + 32),
            text(13, &INK),
        ))
        .map_err(drawing)?;

        // Bars.
        for (i, b) in self.bars.iter().enumerate() {
            let y0 = y_top + (i as u32 * ROW) as i32 + 3;
            let y1 = y0 + ROW as i32 - 6;
            let over = b.margin < 1.0;
            let colour = if over { ALERT_VERMILLION } else { OK_BLUE };
            let name: String = b.channel.chars().take(40).collect();
            area.draw(&Text::new(name, (8, y0 + 2), text(13, &INK)))
                .map_err(drawing)?;
            if b.margin.is_finite() {
                let x1 = x_of(b.margin).max(left as i32 + 1);
                area.draw(&Rectangle::new(
                    [(left as i32, y0), (x1, y1)],
                    colour.filled(),
                ))
                .map_err(drawing)?;
                let tag = if over {
                    format!("{}  OVER LIMIT", fmt_margin(b.margin))
                } else {
                    fmt_margin(b.margin)
                };
                area.draw(&Text::new(tag, (x1 + 6, y0 + 2), text(12, &colour)))
                    .map_err(drawing)?;
            } else {
                area.draw(&Text::new(
                    "no flow",
                    (left as i32 + 6, y0 + 2),
                    text(12, &INK),
                ))
                .map_err(drawing)?;
            }
        }

        // The limit line at margin = 1, drawn over the bars.
        let x1 = x_of(1.0);
        area.draw(&PathElement::new(
            vec![(x1, y_top - 6), (x1, y_bottom)],
            ShapeStyle::from(&BLACK).stroke_width(2),
        ))
        .map_err(drawing)?;
        area.draw(&Text::new(
            "limit (margin = 1)",
            (x1 + 4, y_top - 18),
            text(12, &BLACK),
        ))
        .map_err(drawing)?;
        Ok(())
    }
}

//! Pictures of a spread run: the Monte Carlo distributions of the key flows, split shares and
//! wall shear (histograms with the nominal value, the target and its tolerance band, the 5th
//! and 95th percentiles, and the shear limit), and a tornado chart of the first-order
//! variance contributions.
//!
//! The histograms are re-binned from the run's percentile buckets (each within 0.05 % of the
//! values it counts), so they come from the same exactly merged state as the tables: shards
//! merged give the same picture as one run.

use super::{drawing, Figure, ALERT_VERMILLION, GRID_GREY, INK, OK_BLUE};
use crate::analysis::spread::{Quantity, SpreadResult, Stat};
use crate::chip::design::{TargetKind, Tolerance as TargetTolerance};
use crate::chip::Chip;
use crate::units::display::fmt_sig;
use plotters::coord::Shift;
use plotters::prelude::*;

/// Most panels of the distribution picture (and blocks of the tornado chart).
pub const MAX_PANELS: usize = 8;
/// Most quantities of the tornado chart.
pub const MAX_TORNADO: usize = 4;
/// Bars of one histogram.
const BINS: usize = 40;
/// Okabe–Ito orange: the input one standard deviation low.
const LOW_ORANGE: RGBColor = RGBColor(230, 159, 0);
/// Okabe–Ito sky blue, light: the target's tolerance band.
const BAND: RGBColor = RGBColor(86, 180, 233);
/// The caution under pictures bearing on limits.
const CAUTION: &str = "Model estimate: validate with your own device and your lab's rules.";

/// A quantity's display unit and factor from SI.
fn unit(q: Quantity) -> (&'static str, f64) {
    match q {
        Quantity::Flow(_) => ("uL/min", 6e10),
        Quantity::Share { .. } => ("%", 100.0),
        Quantity::MaxShear(_) => ("Pa", 1.0),
    }
}

fn name(chip: &Chip, q: Quantity) -> String {
    let net = &chip.network;
    match q {
        Quantity::Flow(c) => format!("flow in {}", net.channels[c].name),
        Quantity::Share { target, channel } => format!(
            "share of {} in split target {}",
            net.channels[channel].name,
            target + 1
        ),
        Quantity::MaxShear(c) => format!("max wall shear in {}", net.channels[c].name),
    }
}

/// The design's wanted value of a quantity and its tolerance band (SI), if it has a target.
fn target_of(chip: &Chip, q: Quantity) -> Option<(f64, f64, f64)> {
    let band = |wanted: f64, scale: f64, tol: TargetTolerance| {
        let half = match tol {
            TargetTolerance::Relative(t) => t * scale,
            TargetTolerance::Absolute(a) => a,
        };
        (wanted, wanted - half, wanted + half)
    };
    chip.design
        .targets
        .iter()
        .enumerate()
        .find_map(|(t, target)| match (&target.kind, q) {
            (TargetKind::ChannelFlow { channel, flow }, Quantity::Flow(c)) if *channel == c => {
                Some(band(*flow, flow.abs(), target.tolerance))
            }
            (
                TargetKind::Split { channels, ratio },
                Quantity::Share {
                    target: qt,
                    channel,
                },
            ) if qt == t => {
                let sum: f64 = ratio.iter().sum();
                let i = channels.iter().position(|c| *c == channel)?;
                let want = ratio[i] / sum;
                Some(band(want, want.abs(), target.tolerance))
            }
            (TargetKind::WallShear { channel, shear, .. }, Quantity::MaxShear(c))
                if *channel == c =>
            {
                Some(band(*shear, shear.abs(), target.tolerance))
            }
            _ => None,
        })
}

/// The stats worth a picture: split shares, flows with a target and wall shear under a
/// limit; with no share or flow target, the flows with the largest relative spread (leaving
/// out flows near zero). At most `max` (two places kept for wall shear), in the run's order.
fn key_stats(chip: &Chip, r: &SpreadResult, max: usize) -> Vec<usize> {
    let mut keys: Vec<usize> = (r.stats.iter().enumerate())
        .filter(|(_, s)| match s.quantity {
            Quantity::Share { .. } => true,
            Quantity::Flow(_) => target_of(chip, s.quantity).is_some(),
            Quantity::MaxShear(_) => false,
        })
        .map(|(i, _)| i)
        .collect();
    if keys.is_empty() {
        let biggest = (r.stats.iter())
            .filter(|s| matches!(s.quantity, Quantity::Flow(_)))
            .map(|s| s.nominal.abs())
            .fold(0.0, f64::max);
        let mut flows: Vec<(usize, f64)> = (r.stats.iter().enumerate())
            .filter(|(_, s)| {
                matches!(s.quantity, Quantity::Flow(_))
                    && s.nominal.abs() >= 1e-3 * biggest
                    && s.std_linear.is_finite()
            })
            // First-order relative spread (not the sampled one: equal channels tie), to 1e-9.
            .map(|(i, s)| (i, (s.std_linear / s.nominal.abs() * 1e9).round()))
            .collect();
        flows.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        keys.extend(flows.iter().map(|f| f.0));
    }
    keys.truncate(max.saturating_sub(2).max(1));
    keys.extend(
        (r.stats.iter().enumerate())
            .filter(|(_, s)| matches!(s.quantity, Quantity::MaxShear(_)))
            .map(|(i, _)| i),
    );
    keys.sort_unstable();
    keys.dedup();
    keys.truncate(max);
    keys
}

/// One histogram panel (display units).
#[derive(Clone, Debug, PartialEq)]
pub struct Distribution {
    pub title: String,
    pub unit: &'static str,
    /// (lower edge, upper edge, samples); the end bars also hold the tails beyond them. A
    /// bucket of the run's histogram that straddles two bars is shared between them in
    /// proportion to the overlap, so the counts need not be whole.
    pub bins: Vec<(f64, f64, f64)>,
    pub nominal: f64,
    pub mean: f64,
    pub std: f64,
    pub std_linear: f64,
    pub p05: f64,
    pub p95: f64,
    /// (wanted, band low, band high).
    pub target: Option<(f64, f64, f64)>,
    /// A wall-shear limit and the probability of exceeding it.
    pub limit: Option<(f64, f64)>,
}

/// The distributions of the key quantities of a spread run.
#[derive(Clone, Debug, PartialEq)]
pub struct SpreadPicture {
    pub title: String,
    pub subtitle: String,
    pub panels: Vec<Distribution>,
}

const PANEL_W: u32 = 480;
const PANEL_H: u32 = 300;
const HEAD: u32 = 76;

impl SpreadPicture {
    /// The picture of a run; `None` when it has no samples or no quantity to show.
    pub fn new(chip: &Chip, r: &SpreadResult) -> Option<SpreadPicture> {
        if r.samples == r.withheld {
            return None;
        }
        let panels: Vec<Distribution> = key_stats(chip, r, MAX_PANELS)
            .into_iter()
            .map(|i| distribution(chip, r, i))
            .collect();
        if panels.is_empty() {
            return None;
        }
        Some(SpreadPicture {
            title: format!("Spread under the tolerances — {}", chip.title()),
            subtitle: format!(
                "Monte Carlo, {} samples (seed {}); bars: samples per bin, the end bars hold \
                 the outer 0.5 % tails",
                r.samples - r.withheld,
                r.seed
            ),
            panels,
        })
    }
}

fn distribution(chip: &Chip, r: &SpreadResult, i: usize) -> Distribution {
    let s: &Stat = &r.stats[i];
    let (unit, f) = unit(s.quantity);
    let acc = &r.state.quantities[i];
    let target = target_of(chip, s.quantity).map(|(w, a, b)| (w * f, a * f, b * f));
    let limit = match s.quantity {
        Quantity::MaxShear(c) => (r.shear_exceed.iter())
            .find(|e| e.0 == c)
            .map(|e| (e.1 * f, e.2)),
        _ => None,
    };
    // The range: the central 99 % of the samples, the nominal value, target band and limit.
    let mut lo = acc.quantile(0.005) * f;
    let mut hi = acc.quantile(0.995) * f;
    let mut take = |v: f64| {
        if v.is_finite() {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    };
    take(s.nominal * f);
    if let Some((w, a, b)) = target {
        take(w);
        take(a);
        take(b);
    }
    if let Some((l, _)) = limit {
        take(l);
    }
    if !(lo.is_finite() && hi.is_finite()) {
        (lo, hi) = (0.0, 1.0);
    }
    let span = hi - lo;
    let pad = if span > 1e-9 * lo.abs().max(hi.abs()) {
        0.04 * span
    } else {
        1e-3 * lo.abs().max(1e-30)
    };
    let (lo, hi) = (lo - pad, hi + pad);
    let width = (hi - lo) / BINS as f64;
    let mut counts = vec![0.0f64; BINS];
    let bar = |v: f64| {
        let k = ((v - lo) / width).floor();
        if k.is_nan() {
            0
        } else {
            k.clamp(0.0, (BINS - 1) as f64) as usize
        }
    };
    for (a, b, c) in acc.bucket_ranges() {
        let (a, b) = ((a * f).min(b * f), (a * f).max(b * f));
        let (ka, kb) = (bar(a), bar(b));
        if ka == kb || b <= a {
            counts[ka] += c as f64;
            continue;
        }
        // Shared by overlap; the parts beyond the range go to the end bars.
        for (k, n) in counts.iter_mut().enumerate().take(kb + 1).skip(ka) {
            let x0 = if k == 0 {
                f64::NEG_INFINITY
            } else {
                lo + k as f64 * width
            };
            let x1 = if k == BINS - 1 {
                f64::INFINITY
            } else {
                lo + (k + 1) as f64 * width
            };
            let overlap = (b.min(x1) - a.max(x0)).max(0.0);
            *n += c as f64 * overlap / (b - a);
        }
    }
    Distribution {
        title: name(chip, s.quantity),
        unit,
        bins: (0..BINS)
            .map(|k| {
                (
                    lo + k as f64 * width,
                    lo + (k + 1) as f64 * width,
                    counts[k],
                )
            })
            .collect(),
        nominal: s.nominal * f,
        mean: s.mean * f,
        std: s.std * f,
        std_linear: s.std_linear * f,
        p05: s.p05 * f,
        p95: s.p95 * f,
        target,
        limit,
    }
}

/// A dashed vertical line from y0 to y1 (pixels) at x.
fn dashed<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    x: i32,
    (y0, y1): (i32, i32),
    style: ShapeStyle,
) -> Result<(), String> {
    let mut y = y0;
    while y < y1 {
        area.draw(&PathElement::new(vec![(x, y), (x, (y + 6).min(y1))], style))
            .map_err(drawing)?;
        y += 10;
    }
    Ok(())
}

fn panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    d: &Distribution,
) -> Result<(), String> {
    let (lo, hi) = (d.bins[0].0, d.bins[BINS - 1].1);
    // Room above the tallest bar for the figures.
    let tallest = d.bins.iter().map(|b| b.2).fold(1.0, f64::max);
    let top = tallest * 1.5;
    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .caption(&d.title, (super::FONT, 15))
        .x_label_area_size(40)
        .y_label_area_size(56)
        .build_cartesian_2d(lo..hi, 0.0..top)
        .map_err(drawing)?;
    chart
        .configure_mesh()
        .light_line_style(GRID_GREY.mix(0.3))
        .x_desc(format!("[{}]", d.unit))
        .y_desc("samples")
        .x_labels(5)
        .y_labels(5)
        .x_label_formatter(&|v| fmt_sig(*v, 4))
        .y_label_formatter(&|v| format!("{v:.0}"))
        .label_style((super::FONT, 12))
        .draw()
        .map_err(drawing)?;
    if let Some((_, a, b)) = d.target {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(a.max(lo), 0.0), (b.min(hi), top)],
                BAND.mix(0.25).filled(),
            )))
            .map_err(drawing)?;
    }
    chart
        .draw_series(
            d.bins
                .iter()
                .map(|&(a, b, c)| Rectangle::new([(a, 0.0), (b, c)], OK_BLUE.mix(0.85).filled())),
        )
        .map_err(drawing)?;
    let plot = chart.plotting_area().strip_coord_spec();
    let (px0, py0) = chart.backend_coord(&(lo, top));
    let (_, py1) = chart.backend_coord(&(lo, 0.0));
    let (_, pyt) = chart.backend_coord(&(lo, tallest * 1.08));
    let x_of = |v: f64| chart.backend_coord(&(v, 0.0)).0 - px0;
    // The marks span the bars' height; the figures are written above them.
    let (ya, yb) = (pyt - py0, py1 - py0);
    // Nominal (dashed ink), target (solid black), 5th/95th percentiles (dashed vermillion
    // ticks), shear limit (solid vermillion).
    dashed(
        &plot,
        x_of(d.nominal),
        (ya, yb),
        ShapeStyle::from(&INK).stroke_width(2),
    )?;
    if let Some((w, _, _)) = d.target {
        plot.draw(&PathElement::new(
            vec![(x_of(w), ya), (x_of(w), yb)],
            ShapeStyle::from(&BLACK).stroke_width(2),
        ))
        .map_err(drawing)?;
    }
    for p in [d.p05, d.p95] {
        if p.is_finite() {
            dashed(
                &plot,
                x_of(p),
                (ya + (yb - ya) / 3, yb),
                ShapeStyle::from(&ALERT_VERMILLION).stroke_width(1),
            )?;
        }
    }
    if let Some((l, _)) = d.limit {
        plot.draw(&PathElement::new(
            vec![(x_of(l), ya), (x_of(l), yb)],
            ShapeStyle::from(&ALERT_VERMILLION).stroke_width(3),
        ))
        .map_err(drawing)?;
    }
    // The figures, top left inside the plot.
    let mut lines = vec![
        format!(
            "mean {} ± {} (first order ± {})",
            fmt_sig(d.mean, 4),
            fmt_sig(d.std, 2),
            fmt_sig(d.std_linear, 2)
        ),
        format!(
            "nominal {} · 5–95 %: {} to {}",
            fmt_sig(d.nominal, 4),
            fmt_sig(d.p05, 4),
            fmt_sig(d.p95, 4)
        ),
    ];
    if let Some((w, a, b)) = d.target {
        lines.push(format!(
            "target {} (band {} to {})",
            fmt_sig(w, 4),
            fmt_sig(a, 4),
            fmt_sig(b, 4)
        ));
    }
    if let Some((l, p)) = d.limit {
        lines.push(format!(
            "limit {} · P(over) {} %{}",
            fmt_sig(l, 3),
            fmt_sig(100.0 * p, 3),
            if p >= 1.0 {
                "  OVER LIMIT IN EVERY CHIP"
            } else if p > 0.0 {
                "  OVER LIMIT IN SOME CHIPS"
            } else {
                ""
            }
        ));
    }
    for (k, t) in lines.iter().enumerate() {
        plot.draw(&Text::new(
            t.clone(),
            (6, 4 + 15 * k as i32),
            super::text_style(12, INK),
        ))
        .map_err(drawing)?;
    }
    Ok(())
}

impl Figure for SpreadPicture {
    fn size(&self) -> (u32, u32) {
        let rows = self.panels.len().div_ceil(2) as u32;
        (2 * PANEL_W, HEAD + rows * PANEL_H + 24)
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let (_, h) = self.size();
        area.draw(&Text::new(
            self.title.clone(),
            (16, 10),
            super::text_style(20, INK),
        ))
        .map_err(drawing)?;
        area.draw(&Text::new(
            self.subtitle.clone(),
            (16, 36),
            super::text_style(13, INK),
        ))
        .map_err(drawing)?;
        area.draw(&Text::new(
            "dashed ink: nominal · black: target, shaded: its tolerance band · dashed \
             vermillion: 5th and 95th percentiles · thick vermillion: shear limit",
            (16, 54),
            super::text_style(12, INK),
        ))
        .map_err(drawing)?;
        let body = area.margin(HEAD, 24, 0, 0);
        let rows = self.panels.len().div_ceil(2);
        let cells = body.split_evenly((rows, 2));
        for (d, cell) in self.panels.iter().zip(&cells) {
            panel(cell, d)?;
        }
        area.draw(&Text::new(
            CAUTION,
            (16, h as i32 - 20),
            super::text_style(12, INK),
        ))
        .map_err(drawing)?;
        Ok(())
    }
}

/// One quantity's block of the tornado chart (display units).
#[derive(Clone, Debug, PartialEq)]
pub struct TornadoBlock {
    pub title: String,
    pub unit: &'static str,
    pub nominal: f64,
    pub std_linear: f64,
    /// (variable label, change of the quantity for the variable one standard deviation
    /// high, share of the first-order variance), largest share first.
    pub rows: Vec<(String, f64, f64)>,
}

/// The first-order variance contributions of the key quantities.
#[derive(Clone, Debug, PartialEq)]
pub struct TornadoChart {
    pub title: String,
    pub blocks: Vec<TornadoBlock>,
}

const ROW: u32 = 22;
const BLOCK_HEAD: u32 = 58;
const LABEL_W: u32 = 340;
const TORNADO_W: u32 = 960;

impl TornadoChart {
    /// The chart of a run; `None` when no key quantity varies.
    pub fn new(chip: &Chip, r: &SpreadResult) -> Option<TornadoChart> {
        let blocks: Vec<TornadoBlock> = key_stats(chip, r, MAX_TORNADO)
            .into_iter()
            .filter_map(|i| {
                let s = &r.stats[i];
                let (unit, f) = unit(s.quantity);
                let rows: Vec<(String, f64, f64)> = (s.contributions.iter().zip(&s.effects))
                    .map(|(&(j, share), &e)| (r.variables[j].label.clone(), e * f, share))
                    .collect();
                (!rows.is_empty()).then(|| TornadoBlock {
                    title: name(chip, s.quantity),
                    unit,
                    nominal: s.nominal * f,
                    std_linear: s.std_linear * f,
                    rows,
                })
            })
            .collect();
        if blocks.is_empty() {
            return None;
        }
        Some(TornadoChart {
            title: format!("What drives the spread — {}", chip.title()),
            blocks,
        })
    }
}

impl Figure for TornadoChart {
    fn size(&self) -> (u32, u32) {
        let rows: u32 = self.blocks.iter().map(|b| b.rows.len() as u32).sum();
        (
            TORNADO_W,
            70 + self.blocks.len() as u32 * (BLOCK_HEAD + 36) + rows * ROW + 24,
        )
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let text = |size: u32, c: RGBColor| super::text_style(size, c);
        area.draw(&Text::new(self.title.clone(), (16, 10), text(20, INK)))
            .map_err(drawing)?;
        area.draw(&Text::new(
            "first order: change of each quantity for one input one standard deviation high \
             (blue) or low (orange); the share of the variance at the bar's end",
            (16, 38),
            text(12, INK),
        ))
        .map_err(drawing)?;
        let left = LABEL_W as i32;
        let right = TORNADO_W as i32 - 110;
        let mid = (left + right) / 2;
        let half = f64::from((right - left) / 2);
        let mut y = 70;
        for b in &self.blocks {
            let reach = b.rows.iter().map(|r| r.1.abs()).fold(0.0, f64::max);
            let reach = if reach > 0.0 { reach } else { 1.0 };
            let x_of = |d: f64| mid + (d / reach * half * 0.95) as i32;
            area.draw(&Text::new(
                format!(
                    "{} — nominal {} {}, first-order std {} {}",
                    b.title,
                    fmt_sig(b.nominal, 4),
                    b.unit,
                    fmt_sig(b.std_linear, 2),
                    b.unit
                ),
                (16, y),
                text(15, INK),
            ))
            .map_err(drawing)?;
            let y_top = y + 26;
            let y_bottom = y_top + (b.rows.len() as u32 * ROW) as i32;
            for (k, (label, e, share)) in b.rows.iter().enumerate() {
                let y0 = y_top + (k as u32 * ROW) as i32 + 3;
                let y1 = y0 + ROW as i32 - 6;
                let shown: String = if label.chars().count() > 44 {
                    let tail: String = label.chars().rev().take(43).collect();
                    format!("…{}", tail.chars().rev().collect::<String>())
                } else {
                    label.clone()
                };
                area.draw(&Text::new(shown, (8, y0 + 2), text(12, INK)))
                    .map_err(drawing)?;
                let (xh, xl) = (x_of(*e), x_of(-*e));
                for (x, c) in [(xh, OK_BLUE), (xl, LOW_ORANGE)] {
                    let (a, z) = if x < mid {
                        (x, mid)
                    } else {
                        (mid, x.max(mid + 1))
                    };
                    area.draw(&Rectangle::new([(a, y0), (z, y1)], c.filled()))
                        .map_err(drawing)?;
                }
                area.draw(&Text::new(
                    format!("{} %", fmt_sig(100.0 * share, 3)),
                    (xh.max(xl) + 6, y0 + 2),
                    text(12, INK),
                ))
                .map_err(drawing)?;
            }
            // The nominal line and the axis with the reach either side.
            area.draw(&PathElement::new(
                vec![(mid, y_top - 4), (mid, y_bottom + 4)],
                ShapeStyle::from(&INK).stroke_width(1),
            ))
            .map_err(drawing)?;
            area.draw(&PathElement::new(
                vec![(left, y_bottom + 4), (right, y_bottom + 4)],
                GRID_GREY,
            ))
            .map_err(drawing)?;
            for d in [-reach, 0.0, reach] {
                let x = x_of(d);
                let label = if d == 0.0 {
                    format!("{} {}", fmt_sig(b.nominal, 4), b.unit)
                } else {
                    format!("{}{}", if d > 0.0 { "+" } else { "−" }, fmt_sig(d.abs(), 2))
                };
                area.draw(&Text::new(label, (x - 24, y_bottom + 10), text(12, INK)))
                    .map_err(drawing)?;
            }
            y = y_bottom + 36 + BLOCK_HEAD as i32 - 26;
        }
        let (_, h) = self.size();
        area.draw(&Text::new(CAUTION, (16, h as i32 - 20), text(12, INK)))
            .map_err(drawing)?;
        Ok(())
    }
}

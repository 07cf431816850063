//! Outlet concentrations against outlet index: the gradient a generator makes. One series per
//! species (each in its own measure, scaled to its largest inlet concentration so that species
//! of different units share the axis), outlets in file order.

use super::{drawing, Figure, GRID_GREY, INK};
use crate::analysis::SteadyState;
use crate::chip::species::Measure;
use crate::chip::Chip;
use plotters::coord::Shift;
use plotters::prelude::*;

/// Okabe–Ito colours for the species' lines (blue, vermillion, bluish green, reddish purple,
/// orange, sky blue).
const LINE_COLOURS: [RGBColor; 6] = [
    RGBColor(0, 114, 178),
    RGBColor(213, 94, 0),
    RGBColor(0, 158, 115),
    RGBColor(204, 121, 167),
    RGBColor(230, 159, 0),
    RGBColor(86, 180, 233),
];

/// Marker shapes, so that lines are told apart without colour.
const MARKERS: usize = 3;

/// One species' outlet values.
#[derive(Clone, Debug, PartialEq)]
pub struct OutletSeries {
    /// Species name and the inlet concentration the values are fractions of, in words.
    pub label: String,
    /// Per outlet: c / (largest inlet concentration); `None` where nothing leaves.
    pub values: Vec<Option<f64>>,
}

/// The chart's data.
#[derive(Clone, Debug, PartialEq)]
pub struct OutletChart {
    pub title: String,
    /// Outlet names, file order (ports through which fluid leaves the chip).
    pub outlets: Vec<String>,
    pub series: Vec<OutletSeries>,
}

/// A display unit for a species' concentrations: (label, SI → display factor), from its
/// largest inlet concentration.
fn unit(chip: &Chip, k: usize) -> (&'static str, f64) {
    let Some(s) = chip.species.get(k) else {
        return ("", 1.0);
    };
    let top = s.inlet.iter().fold(0.0f64, |m, &x| m.max(x));
    match s.measure {
        Measure::Fraction => ("fraction", 1.0),
        Measure::Molar if top >= 1.0 => ("mM", 1.0),
        Measure::Molar if top >= 1e-3 => ("µM", 1e3),
        Measure::Molar => ("nM", 1e6),
        Measure::Mass if top >= 1.0 => ("mg/mL", 1.0),
        Measure::Mass => ("µg/mL", 1e3),
    }
}

/// Per channel: the mean concentration of species `k` in its display unit (`None` without
/// flow or without solutes), for the colour of the flow-split picture.
pub(crate) fn channel_values(chip: &Chip, state: &SteadyState, k: usize) -> Vec<Option<f64>> {
    let f = unit(chip, k).1;
    let field = state.solutes.as_ref().and_then(|s| s.fields.get(k));
    (0..chip.network.channels.len())
        .map(|c| field.and_then(|x| x.channels[c]).map(|v| v * f))
        .collect()
}

/// The colour bar's label for species `k`.
pub(crate) fn species_label(chip: &Chip, k: usize) -> String {
    let name = chip.species.get(k).map_or("species", |s| s.name.as_str());
    format!("{name} [{}]", unit(chip, k).0)
}

/// The largest inlet concentration in a short unit.
fn top_words(c: f64, m: Measure) -> String {
    use crate::units::display::fmt_sig;
    match m {
        Measure::Fraction => fmt_sig(c, 3),
        Measure::Molar => match c {
            c if c >= 1.0 => format!("{} mM", fmt_sig(c, 3)),
            c if c >= 1e-3 => format!("{} µM", fmt_sig(c * 1e3, 3)),
            c => format!("{} nM", fmt_sig(c * 1e6, 3)),
        },
        Measure::Mass => match c {
            c if c >= 1.0 => format!("{} mg/mL", fmt_sig(c, 3)),
            c => format!("{} µg/mL", fmt_sig(c * 1e3, 3)),
        },
    }
}

impl OutletChart {
    /// The outlets' concentrations of a solved chip; `None` without species or with fewer
    /// than two outlets. In the lateral model an outlet's value is that of the flow leaving
    /// there (its slice of the profile), else the mixed value at the node.
    pub fn new(chip: &Chip, state: &SteadyState) -> Option<OutletChart> {
        let solutes = state.solutes.as_ref()?;
        let outlets: Vec<usize> = (0..chip.network.nodes.len())
            .filter(|&i| {
                state
                    .port(&chip.network, i)
                    .is_some_and(|p| p.flow_into_chip < 0.0)
            })
            .collect();
        if outlets.len() < 2 || chip.species.is_empty() {
            return None;
        }
        let series = chip
            .species
            .iter()
            .zip(&solutes.fields)
            .map(|(s, f)| {
                let top = s.inlet.iter().fold(0.0f64, |m, &x| m.max(x));
                let values = outlets
                    .iter()
                    .map(|&i| {
                        let c = f
                            .lateral
                            .as_ref()
                            .and_then(|l| l.leaving[i])
                            .or(f.nodes[i])?;
                        (top > 0.0).then(|| c / top)
                    })
                    .collect();
                OutletSeries {
                    label: format!("{} (1 = {})", s.name, top_words(top, s.measure)),
                    values,
                }
            })
            .collect();
        Some(OutletChart {
            title: format!(
                "Outlet concentrations ({}) — {}",
                if solutes.lateral {
                    "streams side by side"
                } else {
                    "well mixed"
                },
                chip.title()
            ),
            outlets: outlets
                .iter()
                .map(|&i| chip.network.nodes[crate::network::NodeId(i)].name.clone())
                .collect(),
            series,
        })
    }
}

impl Figure for OutletChart {
    fn size(&self) -> (u32, u32) {
        (960, 540)
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let n = self.outlets.len();
        let mut chart = ChartBuilder::on(area)
            .margin(20)
            .caption(&self.title, (super::FONT, 18))
            .x_label_area_size(60)
            .y_label_area_size(70)
            .build_cartesian_2d(-0.5..n as f64 - 0.5, 0.0..1.05)
            .map_err(drawing)?;
        let names = self.outlets.clone();
        let labelled = n <= 24;
        chart
            .configure_mesh()
            .light_line_style(GRID_GREY.mix(0.3))
            .x_labels(n.min(24))
            .x_label_formatter(&|x| {
                let i = x.round();
                if (x - i).abs() > 1e-9 || i < 0.0 {
                    return String::new();
                }
                let i = i as usize;
                match names.get(i) {
                    Some(name) if labelled => name.clone(),
                    Some(_) => format!("{}", i + 1),
                    None => String::new(),
                }
            })
            .x_desc("outlet (file order)")
            .y_desc("concentration / largest inlet concentration")
            .label_style((super::FONT, 12))
            .draw()
            .map_err(drawing)?;
        for (k, s) in self.series.iter().enumerate() {
            let colour = LINE_COLOURS[k % LINE_COLOURS.len()];
            let points: Vec<(f64, f64)> = s
                .values
                .iter()
                .enumerate()
                .filter_map(|(i, v)| v.map(|v| (i as f64, v)))
                .collect();
            chart
                .draw_series(LineSeries::new(
                    points.clone(),
                    ShapeStyle::from(&colour).stroke_width(2),
                ))
                .map_err(drawing)?
                .label(s.label.clone())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], colour));
            match k % MARKERS {
                0 => chart
                    .draw_series(points.iter().map(|&p| Circle::new(p, 4, colour.filled())))
                    .map(|_| ()),
                1 => chart
                    .draw_series(
                        points
                            .iter()
                            .map(|&p| TriangleMarker::new(p, 5, colour.filled())),
                    )
                    .map(|_| ()),
                _ => chart
                    .draw_series(points.iter().map(|&p| Cross::new(p, 4, colour)))
                    .map(|_| ()),
            }
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

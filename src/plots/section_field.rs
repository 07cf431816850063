//! Picture of one cross-section: the velocity field as filled colour (viridis, perceptually
//! uniform and readable with colour-vision deficiency) with a labelled colour bar, and the
//! wall shear along the perimeter underneath.

use super::{drawing, text_style, Figure, GRID_GREY, INK, OK_BLUE};
use crate::section::numeric::NumericSection;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::colors::colormaps::ViridisRGB;

/// The section picture's data.
#[derive(Clone, Debug)]
pub struct SectionPicture<'a> {
    pub title: String,
    pub solution: &'a NumericSection,
}

const W: u32 = 900;
const FIELD_H: u32 = 420;
const SHEAR_H: u32 = 300;

impl Figure for SectionPicture<'_> {
    fn size(&self) -> (u32, u32) {
        (W, FIELD_H + SHEAR_H)
    }

    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        area.fill(&WHITE).map_err(drawing)?;
        let (top, bottom) = area.split_vertically(FIELD_H);
        self.draw_field(&top)?;
        self.draw_shear(&bottom)
    }
}

impl SectionPicture<'_> {
    fn draw_field<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        let sol = self.solution;
        let f = &sol.field;
        area.draw(&Text::new(
            self.title.clone(),
            (16, 10),
            text_style(18, INK),
        ))
        .map_err(drawing)?;
        // u / U_mean = φ / (K/A).
        let mean = sol.conductance_factor / sol.area;
        let umax = f.phi.iter().fold(0.0f64, |m, v| m.max(*v)) / mean;
        // Bounding box in µm, equal scaling on both axes.
        let (mut x0, mut x1, mut y0, mut y1) = (
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
        );
        for p in &f.nodes {
            x0 = x0.min(p[0]);
            x1 = x1.max(p[0]);
            y0 = y0.min(p[1]);
            y1 = y1.max(p[1]);
        }
        let (plot_x, plot_y, plot_w, plot_h) =
            (70.0, 50.0, (W - 230) as f64, (FIELD_H - 100) as f64);
        let s = (plot_w / (x1 - x0)).min(plot_h / (y1 - y0));
        let ox = plot_x + (plot_w - s * (x1 - x0)) / 2.0;
        let oy = plot_y + (plot_h - s * (y1 - y0)) / 2.0;
        let px = |p: [f64; 2]| -> (i32, i32) {
            (
                (ox + (p[0] - x0) * s).round() as i32,
                (oy + (y1 - p[1]) * s).round() as i32,
            )
        };
        // Each quadratic triangle drawn as its four linear sub-triangles, flat-shaded by
        // their mean value.
        const SUB: [[usize; 3]; 4] = [[0, 3, 5], [3, 1, 4], [5, 4, 2], [3, 4, 5]];
        for t in &f.triangles {
            for sub in SUB {
                let v = sub.iter().map(|&k| f.phi[t[k]]).sum::<f64>() / 3.0 / mean;
                let c = ViridisRGB::get_color((v / umax).clamp(0.0, 1.0));
                let pts: Vec<(i32, i32)> = sub.iter().map(|&k| px(f.nodes[t[k]])).collect();
                area.draw(&Polygon::new(pts, c.filled())).map_err(drawing)?;
            }
        }
        // Wall outline.
        let mut by_wall: Vec<Vec<(i32, i32)>> = Vec::new();
        for w in &sol.wall {
            if by_wall.len() <= w.wall {
                by_wall.resize(w.wall + 1, Vec::new());
            }
            by_wall[w.wall].push(px(w.point));
        }
        for mut pts in by_wall {
            if let Some(&first) = pts.first() {
                pts.push(first);
            }
            area.draw(&PathElement::new(
                pts,
                ShapeStyle::from(&INK).stroke_width(1),
            ))
            .map_err(drawing)?;
        }
        // Scale bar: dimensions in µm.
        let info = format!(
            "{:.1} µm wide × {:.1} µm deep · maximum wall shear marked ●",
            (x1 - x0) * 1e6,
            (y1 - y0) * 1e6
        );
        area.draw(&Text::new(
            info,
            (70, (FIELD_H - 40) as i32),
            text_style(13, INK),
        ))
        .map_err(drawing)?;
        let (mx, my) = px(sol.max_shear_at);
        area.draw(&Circle::new(
            (mx, my),
            5,
            ShapeStyle::from(&super::ALERT_VERMILLION).filled(),
        ))
        .map_err(drawing)?;
        // Colour bar.
        super::colour_bar(
            area,
            ((W - 130) as i32, 60, 22, (FIELD_H - 140) as i32),
            (0.0, umax),
            "u / U_mean",
        )?;
        Ok(())
    }

    fn draw_shear<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String> {
        let sol = self.solution;
        let samples: Vec<(f64, f64)> = sol
            .wall
            .iter()
            .filter(|w| w.wall == 0)
            .map(|w| (w.s * 1e6, w.shear_per_gradient * 1e6))
            .collect();
        let smax = samples.iter().map(|p| p.0).fold(0.0, f64::max).max(1e-9);
        let tmax = sol.max_wall_shear_per_gradient * 1e6 * 1.1;
        let mean = sol.area / sol.perimeter * 1e6;
        let mut chart = ChartBuilder::on(area)
            .margin(16)
            .caption(
                "Wall shear along the outer wall (per unit pressure gradient)",
                (super::FONT, 16),
            )
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(0.0..smax, 0.0..tmax.max(1e-9))
            .map_err(drawing)?;
        chart
            .configure_mesh()
            .light_line_style(GRID_GREY.mix(0.3))
            .x_desc("distance along the wall [µm]")
            .y_desc("τ / G [µm]")
            .label_style((super::FONT, 12))
            .draw()
            .map_err(drawing)?;
        let mut sorted = samples.clone();
        sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
        chart
            .draw_series(LineSeries::new(
                sorted,
                ShapeStyle::from(&OK_BLUE).stroke_width(2),
            ))
            .map_err(drawing)?
            .label("τ/G on the wall")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], OK_BLUE));
        chart
            .draw_series(LineSeries::new(
                vec![(0.0, mean), (smax, mean)],
                ShapeStyle::from(&INK).stroke_width(1),
            ))
            .map_err(drawing)?
            .label("mean = A/P (force balance)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], INK));
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.8))
            .border_style(GRID_GREY)
            .label_font((super::FONT, 12))
            .draw()
            .map_err(drawing)?;
        Ok(())
    }
}

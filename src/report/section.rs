//! The `section` command's report: one cross-section's figures.

use super::csv::{n, num, Tables};
use super::fmt_sig;
use crate::outcome::SectionOutcome;
use crate::section::numeric::CORNER_EXCLUSION;
use crate::section::SectionModel;
use serde::Serialize;
use std::io;

#[derive(Serialize)]
struct JsonSection {
    schema_version: u32,
    shape: &'static str,
    method: &'static str,
    viscosity_pa_s: f64,
    area_m2: f64,
    perimeter_m: f64,
    hydraulic_diameter_m: f64,
    conductance_factor_m4: f64,
    resistance_per_length_pa_s_per_m4: f64,
    fre_fanning: f64,
    max_wall_shear_per_gradient_m: f64,
    max_wall_shear_at_m: Option<[f64; 2]>,
    /// What the coordinates of `max_wall_shear_at_m` and of corners are measured from.
    position_origin: Option<&'static str>,
    /// The wall-shear level exceeded on only 1 % of the wall length (numerical shapes).
    robust_max_wall_shear_per_gradient_m: Option<f64>,
    mean_wall_shear_per_gradient_m: f64,
    relative_error_estimate: f64,
    shear_error_estimate: Option<f64>,
    mesh_nodes: Option<usize>,
    /// Whether the requested tolerances were reached (always for closed forms).
    converged: bool,
    requested_tolerance: Option<f64>,
    requested_shear_tolerance: Option<f64>,
    /// Re-entrant corners make the pointwise wall shear unbounded.
    max_wall_shear_singular: bool,
    singular_corners: Vec<JsonCorner>,
    corner_exclusion_radius_m: Option<f64>,
}

#[derive(Serialize)]
struct JsonCorner {
    at_m: [f64; 2],
    interior_angle_deg: f64,
}

fn json_section(o: &SectionOutcome) -> JsonSection {
    let (shape, f, numeric, viscosity) = (&o.shape, &o.figures, o.numeric.as_ref(), o.viscosity);
    JsonSection {
        schema_version: super::json::SCHEMA_VERSION,
        shape: shape.kind(),
        method: match f.model {
            SectionModel::Numerical => "numerical (P2 finite elements)",
            SectionModel::ClosedForm => "closed form",
            SectionModel::ThinFilm => "thin-film limit (lubrication)",
        },
        viscosity_pa_s: viscosity,
        area_m2: f.area,
        perimeter_m: f.perimeter,
        hydraulic_diameter_m: f.hydraulic_diameter(),
        conductance_factor_m4: f.conductance_factor,
        resistance_per_length_pa_s_per_m4: f.resistance_per_length(viscosity),
        fre_fanning: f.f_re(),
        max_wall_shear_per_gradient_m: f.max_wall_shear_per_gradient,
        max_wall_shear_at_m: numeric.map(|n| position(n.max_shear_at, f.hydraulic_diameter())),
        robust_max_wall_shear_per_gradient_m: numeric.map(|n| n.robust_max_wall_shear_per_gradient),
        position_origin: numeric.map(|_| position_origin(shape.kind())),
        mean_wall_shear_per_gradient_m: f.mean_wall_shear_per_gradient(),
        relative_error_estimate: f.relative_error_estimate,
        shear_error_estimate: numeric
            .map(|n| n.shear_error_estimate)
            .filter(|e| e.is_finite()),
        mesh_nodes: numeric.map(|n| n.field.nodes.len()),
        converged: f.converged,
        requested_tolerance: numeric.map(|n| n.requested_tolerance),
        requested_shear_tolerance: numeric.map(|n| n.requested_shear_tolerance),
        max_wall_shear_singular: f.max_wall_shear_singular,
        singular_corners: numeric
            .map(|n| {
                n.singular_corners
                    .iter()
                    .map(|c| JsonCorner {
                        at_m: c.at,
                        interior_angle_deg: c.interior_angle.to_degrees(),
                    })
                    .collect()
            })
            .unwrap_or_default(),
        corner_exclusion_radius_m: numeric
            .filter(|n| n.max_wall_shear_singular)
            .map(|n| n.corner_exclusion_radius),
    }
}

/// A position on the outline with rounding noise (below 1e-9 of the hydraulic diameter, as
/// left by interpolating along the lid) shown as 0.
fn position(p: [f64; 2], dh: f64) -> [f64; 2] {
    p.map(|v| if v.abs() < 1e-9 * dh { 0.0 } else { v })
}

/// What positions on a numerically solved outline are measured from, by shape kind (see
/// `Shape::outline`: the lid at y = 0 and the channel below it).
fn position_origin(kind: &str) -> &'static str {
    match kind {
        "polygon" => "the polygon's own coordinates, as given",
        "profile" => "x = the profile's own position, y = minus the depth (lid at y = 0)",
        _ => "x from the centre line, y from the lid (y = 0; the channel lies at y < 0)",
    }
}

/// One section's figures as JSON.
pub(crate) fn section_json(o: &SectionOutcome, w: &mut dyn io::Write) -> io::Result<()> {
    super::json::write_json(&json_section(o), w)
}

/// One section's figures as a one-row CSV table (the JSON keys as columns).
pub(crate) fn section_csv(o: &SectionOutcome, tables: &mut Tables<'_>) -> io::Result<()> {
    let j = json_section(o);
    let at = |i: usize| j.max_wall_shear_at_m.map(|p| p[i]);
    tables.table(
        &[
            "record",
            "shape",
            "method",
            "viscosity_pa_s",
            "area_m2",
            "perimeter_m",
            "hydraulic_diameter_m",
            "conductance_factor_m4",
            "resistance_per_length_pa_s_per_m4",
            "fre_fanning",
            "max_wall_shear_per_gradient_m",
            "max_wall_shear_at_x_m",
            "max_wall_shear_at_y_m",
            "robust_max_wall_shear_per_gradient_m",
            "position_origin",
            "mean_wall_shear_per_gradient_m",
            "relative_error_estimate",
            "shear_error_estimate",
            "mesh_nodes",
            "converged",
            "max_wall_shear_singular",
            "singular_corners",
        ],
        [vec![
            "section".into(),
            j.shape.into(),
            j.method.into(),
            n(j.viscosity_pa_s),
            n(j.area_m2),
            n(j.perimeter_m),
            n(j.hydraulic_diameter_m),
            n(j.conductance_factor_m4),
            n(j.resistance_per_length_pa_s_per_m4),
            n(j.fre_fanning),
            n(j.max_wall_shear_per_gradient_m),
            num(at(0)),
            num(at(1)),
            num(j.robust_max_wall_shear_per_gradient_m),
            j.position_origin.unwrap_or_default().into(),
            n(j.mean_wall_shear_per_gradient_m),
            n(j.relative_error_estimate),
            num(j.shear_error_estimate),
            j.mesh_nodes.map(|m| m.to_string()).unwrap_or_default(),
            j.converged.to_string(),
            j.max_wall_shear_singular.to_string(),
            j.singular_corners.len().to_string(),
        ]],
    )
}

/// One section's figures as a table.
pub fn section_report(o: &SectionOutcome) -> String {
    let (shape, f, numeric, viscosity) = (&o.shape, &o.figures, o.numeric.as_ref(), o.viscosity);
    let um = |m: f64| fmt_sig(m * 1e6, 5);
    let mut out = String::new();
    out.push_str(&format!(
        "Section: {} ({})\n",
        shape.kind(),
        match f.model {
            SectionModel::Numerical => "numerical: quadratic finite elements",
            SectionModel::ClosedForm => "closed form",
            SectionModel::ThinFilm =>
                "thin-film limit: too thin to mesh, each slice taken as plane Poiseuille flow",
        }
    ));
    let rows: Vec<(&str, String)> = vec![
        ("area", format!("{} µm²", fmt_sig(f.area * 1e12, 6))),
        ("wetted perimeter", format!("{} µm", um(f.perimeter))),
        (
            "hydraulic diameter",
            format!("{} µm", um(f.hydraulic_diameter())),
        ),
        (
            "conductance factor K (Q = K·G/μ)",
            format!("{} µm⁴", fmt_sig(f.conductance_factor * 1e24, 6)),
        ),
        (
            "resistance per length",
            format!(
                "{} Pa·s/m⁴ (μ = {} mPa·s) = {} mbar/(µL/min) per mm",
                fmt_sig(f.resistance_per_length(viscosity), 6),
                fmt_sig(viscosity * 1e3, 4),
                fmt_sig(
                    f.resistance_per_length(viscosity) * 1e-3 / 100.0 / 6.0e10,
                    4
                )
            ),
        ),
        ("f·Re (Fanning)", fmt_sig(f.f_re(), 6)),
        (
            "mean wall shear / G = A/P",
            format!("{} µm", um(f.mean_wall_shear_per_gradient())),
        ),
        (
            "maximum wall shear / G",
            match numeric {
                Some(n) => {
                    let at = position(n.max_shear_at, f.hydraulic_diameter());
                    format!(
                        "{} µm at ({}, {}) µm",
                        um(f.max_wall_shear_per_gradient),
                        fmt_sig(at[0] * 1e6, 4),
                        fmt_sig(at[1] * 1e6, 4)
                    )
                }
                None => format!("{} µm", um(f.max_wall_shear_per_gradient)),
            },
        ),
        (
            "relative error estimate (K)",
            match f.model {
                SectionModel::ClosedForm => "0 (exact)".into(),
                SectionModel::Numerical => estimate(f.relative_error_estimate),
                SectionModel::ThinFilm => format!(
                    "{} (the ends of the slit, about one gap wide, are left out)",
                    estimate(f.relative_error_estimate)
                ),
            },
        ),
    ];
    let mut rows = rows;
    if let Some(n) = numeric {
        rows.insert(
            rows.len() - 1,
            (
                "positions measured from",
                position_origin(shape.kind()).into(),
            ),
        );
        rows.insert(
            rows.len() - 1,
            (
                "robust maximum wall shear / G",
                format!(
                    "{} µm (exceeded on 1 % of the wall length){}",
                    um(n.robust_max_wall_shear_per_gradient),
                    if shape.kind() == "profile" {
                        "; on a measured wall the pointwise maximum depends on the sampling"
                    } else {
                        ""
                    }
                ),
            ),
        );
        rows.push((
            "relative error estimate (max shear)",
            estimate(n.shear_error_estimate),
        ));
        if !n.converged {
            rows.push((
                "convergence",
                format!(
                    "NOT converged to the requested tolerance (K {:.1e}, max shear {:.1e}) \
                     within the node budget",
                    n.requested_tolerance, n.requested_shear_tolerance
                ),
            ));
        }
        if n.max_wall_shear_singular {
            let shown: Vec<String> = n
                .singular_corners
                .iter()
                .take(4)
                .map(|c| {
                    format!(
                        "({}, {}) µm, {}°",
                        fmt_sig(c.at[0] * 1e6, 4),
                        fmt_sig(c.at[1] * 1e6, 4),
                        fmt_sig(c.interior_angle.to_degrees(), 4)
                    )
                })
                .collect();
            let more = n.singular_corners.len().saturating_sub(shown.len());
            rows.push((
                "re-entrant corners",
                format!(
                    "{}{}: wall shear unbounded there; maximum taken {} µm ({} % of Dh) away",
                    shown.join("; "),
                    if more > 0 {
                        format!(" and {more} more")
                    } else {
                        String::new()
                    },
                    fmt_sig(n.corner_exclusion_radius * 1e6, 3),
                    fmt_sig(CORNER_EXCLUSION * 100.0, 3)
                ),
            ));
        }
        rows.push((
            "mesh",
            format!(
                "{} nodes, {} refinements",
                n.field.nodes.len(),
                n.refinements
            ),
        ));
    }
    let width = rows.iter().map(|r| r.0.chars().count()).max().unwrap_or(0);
    for (k, v) in rows {
        out.push_str(&format!("  {k:<width$}  {v}\n"));
    }
    out.push_str(
        "\nG is the pressure drop per length; multiply by G for stresses, by G/μ for velocities.\n",
    );
    out
}

/// An error estimate in words: one significant digit, or "not available" (one mesh only).
fn estimate(e: f64) -> String {
    if e.is_finite() {
        format!("{e:.1e}")
    } else {
        "not available".into()
    }
}

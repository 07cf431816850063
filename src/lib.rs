//! rillnet: laminar flow in microfluidic channel networks, from first principles.
//!
//! A chip file describes nodes (junctions, pressure ports, flow ports) joined by channels of
//! known cross-section and length. rillnet computes each channel's hydraulic resistance from
//! the fully developed laminar solution over its cross-section, assembles Kirchhoff's flow
//! balance as a sparse symmetric system, solves it with faer's sparse Cholesky, and reports
//! every pressure and flow.
//!
//! Data flow (see DEVELOPERS.md for the full map):
//!
//! ```text
//! chip file ──format──▶ Network ──analysis::kirchhoff──▶ KirchhoffSystem ──solver──▶ pressures
//!   (YAML/JSON,          (domain,       (assembly)          (pattern+values)   (Cholesky)
//!    units, serde)        SI, graph)                                               │
//!                                   report ◀── analysis::SteadyState ◀─────────────┘
//! ```

pub mod analysis;
pub mod error;
pub mod fluid;
pub mod format;
pub mod network;
pub mod output;
pub mod plots;
pub mod report;
pub mod section;
pub mod solver;
pub mod units;

pub use error::Error;

use std::path::Path;

/// The names most programs need.
pub mod prelude {
    pub use crate::analysis::{solve, steady_state, SteadyState};
    pub use crate::fluid::Fluid;
    pub use crate::network::{ChannelId, Network, NetworkBuilder, NodeId, Port};
    pub use crate::section::Shape;
    pub use crate::units::{Length, Pressure, Viscosity, VolumeFlow};
}

/// Read and validate a chip file (YAML, or JSON when the extension is `.json`).
pub fn load_chip(path: &Path) -> Result<network::Network, Error> {
    let origin = path.display().to_string();
    let meta = std::fs::metadata(path).map_err(|source| Error::Read {
        path: path.to_path_buf(),
        source,
    })?;
    if meta.len() > format::MAX_FILE_BYTES as u64 {
        return Err(format::InputError::whole_file(
            &origin,
            format!(
                "the file is {} bytes; chip files are limited to {} bytes",
                meta.len(),
                format::MAX_FILE_BYTES
            ),
        )
        .into());
    }
    let bytes = std::fs::read(path).map_err(|source| Error::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let text = String::from_utf8(bytes).map_err(|e| {
        format::InputError::whole_file(
            &origin,
            format!(
                "the file is not UTF-8 text (invalid byte at offset {}); save it as UTF-8",
                e.utf8_error().valid_up_to()
            ),
        )
    })?;
    // Files the chip names (measured profiles) are found beside the chip file.
    let base = path.parent().unwrap_or(Path::new(".")).to_path_buf();
    let read = move |name: &str| -> Result<String, String> {
        std::fs::read_to_string(base.join(name)).map_err(|e| e.to_string())
    };
    Ok(format::parse_chip_with(
        &text,
        &origin,
        format::Syntax::from_path(path),
        &read,
    )?)
}

/// Load and solve a chip, mapping a failed solve to [`Error::Solve`].
fn load_and_solve(chip: &Path) -> Result<(network::Network, analysis::SteadyState), Error> {
    let network = load_chip(chip)?;
    let state = analysis::steady_state(&network).map_err(|source| Error::Solve {
        origin: chip.display().to_string(),
        source,
    })?;
    Ok((network, state))
}

/// Deliver `text` to `output` (a new file) or return it for printing.
fn deliver(text: String, output: Option<&Path>, inputs: &[&Path]) -> Result<String, Error> {
    match output {
        Some(path) => {
            output::write_new_file(path, text.as_bytes(), inputs)?;
            Ok(String::new())
        }
        None => Ok(text),
    }
}

/// Draw the shear-margin chart of a solved chip into a new picture file.
fn margin_plot(
    network: &network::Network,
    state: &analysis::SteadyState,
    path: &Path,
    chip: &Path,
) -> Result<(), Error> {
    let chart = plots::MarginChart::new(network, state).ok_or_else(|| Error::Write {
        path: path.to_path_buf(),
        reason: "no channel has a wall-shear limit, so there is no margin to chart; add \
                 'shear_limit' under fluid.cells or on a channel"
            .into(),
    })?;
    plots::save(&chart, path, &[chip])
}

/// What the `solve` command needs.
#[derive(Clone, Debug)]
pub struct SolveRequest<'a> {
    pub chip: &'a Path,
    pub format: report::Format,
    pub output: Option<&'a Path>,
    /// Draw the shear-margin chart to this new .svg/.png file.
    pub plot: Option<&'a Path>,
    /// Add d(flow)/d(width, height, length) of the target channels.
    pub sensitivity: bool,
}

/// Load, solve and render a chip. Returns the text to print (empty when written to a file).
pub fn solve_command(req: &SolveRequest<'_>) -> Result<String, Error> {
    let (network, state) = load_and_solve(req.chip)?;
    if let Some(path) = req.plot {
        margin_plot(&network, &state, path, req.chip)?;
    }
    let mut text = report::render(&network, &state, req.format);
    if req.sensitivity {
        let json = req.format == report::Format::Json;
        let sens = sensitivity_of(&network, req.chip, json)?;
        if json {
            // One JSON document: the solution and the sensitivities side by side.
            text = format!(
                "{{\n\"solution\": {},\n\"sensitivities\": {}}}\n",
                text.trim_end(),
                sens.trim_end()
            );
        } else {
            text.push_str(&sens);
        }
    }
    deliver(text, req.output, &[req.chip])
}

/// What the `check` command needs.
#[derive(Clone, Debug)]
pub struct CheckRequest<'a> {
    pub chip: &'a Path,
    pub format: report::Format,
    /// Draw the shear-margin chart to this new .svg/.png file.
    pub plot: Option<&'a Path>,
}

/// The verdict of `check`: the report and whether every limit holds.
#[derive(Clone, Debug)]
pub struct CheckOutcome {
    pub text: String,
    pub passed: bool,
}

/// Solve a chip and check it against its shear limits and pressure rating.
pub fn check_command(req: &CheckRequest<'_>) -> Result<CheckOutcome, Error> {
    let (network, state) = load_and_solve(req.chip)?;
    if let Some(path) = req.plot {
        margin_plot(&network, &state, path, req.chip)?;
    }
    let passed = !analysis::findings(&network, &state)
        .iter()
        .any(|f| f.severity == analysis::Severity::Exceeded);
    let text = match req.format {
        report::Format::Table => report::check_text(&network, &state, passed),
        other => report::render(&network, &state, other),
    };
    Ok(CheckOutcome { text, passed })
}

/// What the `section` command needs: a shape given inline, or a named section of a chip.
#[derive(Clone, Debug, Default)]
pub struct SectionRequest<'a> {
    /// Inline mapping in the chip-file syntax.
    pub spec: Option<&'a str>,
    /// Chip file and section name (a `sections:` entry, or `CHANNEL.section` for an inline one).
    pub chip: Option<&'a Path>,
    pub name: Option<&'a str>,
    /// Viscosity for the resistance (default: the chip's fluid, else water at 20 °C).
    pub viscosity: Option<units::Viscosity>,
    /// Relative error target for numerical shapes (default 1e-4).
    pub tolerance: Option<f64>,
    pub json: bool,
    pub plot: Option<&'a Path>,
}

/// Compute and render one cross-section's figures (and picture).
pub fn section_command(req: &SectionRequest<'_>) -> Result<String, Error> {
    let usage = |msg: &str| Error::Input(format::InputError::whole_file("section", msg));
    let (shape, chip_viscosity, label) = match (req.spec, req.chip, req.name) {
        (Some(spec), None, None) => {
            let read = |name: &str| std::fs::read_to_string(name).map_err(|e| e.to_string());
            (
                format::parse_section_spec(spec, "section spec", &read)?,
                None,
                "inline section".to_string(),
            )
        }
        (None, Some(chip), Some(name)) => {
            let net = load_chip(chip)?;
            let s = net.sections.iter().find(|s| s.name == name).ok_or_else(|| {
                let names: Vec<&str> = net.sections.iter().map(|s| s.name.as_str()).collect();
                Error::Input(format::InputError::whole_file(
                    &chip.display().to_string(),
                    format!("no section named '{name}'; the chip has: {}", names.join(", ")),
                ))
            })?;
            (s.shape.clone(), Some(net.fluid.viscosity), format!("section '{name}' of {}", chip.display()))
        }
        _ => {
            return Err(usage(
                "give either a section mapping, e.g. '{shape: circle, diameter: 100 um}', or --file CHIP --name SECTION",
            ))
        }
    };
    let mut opts = section::numeric::NumericOptions::default();
    if let Some(t) = req.tolerance {
        if !(t.is_finite() && t > 0.0 && t < 0.1) {
            return Err(usage(
                "--tolerance must be a relative error between 0 and 0.1",
            ));
        }
        opts.tolerance = t;
        opts.shear_tolerance = (10.0 * t).min(0.05);
    }
    let mu = req
        .viscosity
        .or(chip_viscosity)
        .unwrap_or(fluid::Fluid::WATER_20C.viscosity);
    let started = std::time::Instant::now();
    let (figures, numeric) = shape
        .figures_with(&opts)
        .map_err(|e| usage(&format!("{}: {e}", shape.kind())))?;
    let seconds = started.elapsed().as_secs_f64();
    if let Some(path) = req.plot {
        let sol = match &numeric {
            Some(sol) => sol.clone(),
            None => shape
                .solve_numeric(&opts)
                .map_err(|e| usage(&format!("{}: {e}", shape.kind())))?,
        };
        let picture = plots::SectionPicture {
            title: format!("{} — {}", shape.kind(), label),
            solution: &sol,
        };
        let protected: Vec<&Path> = req.chip.into_iter().collect();
        plots::save(&picture, path, &protected)?;
    }
    Ok(report::section_report(
        &shape,
        &figures,
        numeric.as_ref(),
        mu.si(),
        seconds,
        req.json,
    ))
}

/// Read a chip file's text (for rewriting it into a tuned or sized copy).
fn chip_text(path: &Path) -> Result<String, Error> {
    std::fs::read_to_string(path).map_err(|source| Error::Read {
        path: path.to_path_buf(),
        source,
    })
}

/// Quote a value for the chip file's syntax.
fn value_literal(path: &Path, text: &str) -> String {
    match format::Syntax::from_path(path) {
        format::Syntax::Json => format!("\"{text}\""),
        format::Syntax::Yaml => text.to_string(),
    }
}

fn rewrite_failed(chip: &Path, what: &str) -> Error {
    Error::Write {
        path: chip.to_path_buf(),
        reason: format!(
            "cannot rewrite {what} in a copy of the chip: write that entry in flow style \
             ({{key: value, ...}} on one line) so rillnet can change its value in place"
        ),
    }
}

/// Write a copy of the chip file to the new file `out` with each (key path, value) replaced in
/// place, keeping comments and layout.
fn write_edited_copy(chip: &Path, out: &Path, edits: &[([&str; 3], String)]) -> Result<(), Error> {
    let mut text = chip_text(chip)?;
    for (path, value) in edits {
        text = format::replace_value(&text, path, value)
            .ok_or_else(|| rewrite_failed(chip, &path.join(".")))?;
    }
    output::write_new_file(out, text.as_bytes(), &[chip])
}

/// What `tune` and `size` need.
#[derive(Clone, Debug)]
pub struct DesignRequest<'a> {
    pub chip: &'a Path,
    pub json: bool,
    /// Write the tuned/sized chip to this new file.
    pub output: Option<&'a Path>,
    /// Serpentine straight run and centre-line pitch for long sized lengths [m].
    pub run: f64,
    pub pitch: f64,
}

/// Tune the adjustable ports of a chip to its targets.
pub fn tune_command(req: &DesignRequest<'_>) -> Result<String, Error> {
    let net = load_chip(req.chip)?;
    let origin = req.chip.display().to_string();
    let r = analysis::design::tune(&net, &net.design).map_err(|source| Error::Design {
        origin: origin.clone(),
        source,
    })?;
    if let Some(out) = req.output {
        let edits = r
            .settings
            .iter()
            .map(|s| {
                let node = &net.nodes[s.node.0];
                let (key, value) = match node.port {
                    network::Port::Flow(_) => (
                        "flow",
                        format!("{} uL/min", units::display::ul_per_min(s.after)),
                    ),
                    _ => (
                        "pressure",
                        format!("{} mbar", units::display::mbar(s.after)),
                    ),
                };
                Ok((
                    ["nodes", node.name.as_str(), key],
                    value_literal(req.chip, &value),
                ))
            })
            .collect::<Result<Vec<_>, Error>>()?;
        write_edited_copy(req.chip, out, &edits)?;
    }
    Ok(report::tune_report(&net, &r, req.json))
}

/// Inline section text for a closed-form shape, in the chip file's syntax.
fn section_literal(path: &Path, shape: &section::Shape) -> Option<String> {
    let um = |l: &units::Length| format!("{} um", l.si() * 1e6);
    let fields: Vec<(&str, String)> = match shape {
        section::Shape::Circle { diameter } => vec![("diameter", um(diameter))],
        section::Shape::Rectangle { width, height } | section::Shape::Ellipse { width, height } => {
            vec![("width", um(width)), ("height", um(height))]
        }
        section::Shape::Plates { gap, width } => vec![("gap", um(gap)), ("width", um(width))],
        _ => return None,
    };
    Some(match format::Syntax::from_path(path) {
        format::Syntax::Json => format!(
            "{{\"shape\": \"{}\", {}}}",
            shape.kind(),
            fields
                .iter()
                .map(|(k, v)| format!("\"{k}\": \"{v}\""))
                .collect::<Vec<_>>()
                .join(", ")
        ),
        format::Syntax::Yaml => format!(
            "{{shape: {}, {}}}",
            shape.kind(),
            fields
                .iter()
                .map(|(k, v)| format!("{k}: {v}"))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    })
}

/// Size the free channel dimensions of a chip to its targets.
pub fn size_command(req: &DesignRequest<'_>) -> Result<String, Error> {
    let net = load_chip(req.chip)?;
    let origin = req.chip.display().to_string();
    let r = analysis::design::size(&net, &net.design).map_err(|source| Error::Design {
        origin: origin.clone(),
        source,
    })?;
    if let Some(out) = req.output {
        let edits = r
            .sizes
            .iter()
            .map(|s| {
                let ch = &r.network.channels[s.var.channel.0];
                let (key, value) = match s.var.dim {
                    analysis::design::SizeDim::Length => (
                        "length",
                        value_literal(req.chip, &format!("{} mm", s.after * 1e3)),
                    ),
                    analysis::design::SizeDim::Width => (
                        "section",
                        section_literal(req.chip, &r.network.sections[ch.section.0].shape)
                            .ok_or_else(|| rewrite_failed(req.chip, "a section"))?,
                    ),
                };
                Ok((["channels", ch.name.as_str(), key], value))
            })
            .collect::<Result<Vec<_>, Error>>()?;
        write_edited_copy(req.chip, out, &edits)?;
    }
    Ok(report::size_report(&net, &r, req.run, req.pitch, req.json))
}

/// Sensitivity table of a chip's target channels (or every channel if it has no flow targets).
pub fn sensitivity_text(chip: &Path, json: bool) -> Result<String, Error> {
    sensitivity_of(&load_chip(chip)?, chip, json)
}

fn sensitivity_of(net: &network::Network, chip: &Path, json: bool) -> Result<String, Error> {
    let mut targets: Vec<network::ChannelId> = Vec::new();
    for t in &net.design.targets {
        match &t.kind {
            analysis::design::TargetKind::ChannelFlow { channel, .. } => targets.push(*channel),
            analysis::design::TargetKind::Split { channels, .. } => {
                targets.extend(channels.iter().copied())
            }
            analysis::design::TargetKind::NodePressure { .. } => {}
        }
    }
    if targets.is_empty() {
        targets = (0..net.channels.len()).map(network::ChannelId).collect();
    }
    targets.dedup();
    let s = analysis::design::sensitivities(net, &targets).map_err(|source| Error::Solve {
        origin: chip.display().to_string(),
        source,
    })?;
    Ok(report::sensitivity_report(net, &s, json))
}

/// What the `plot` command needs.
#[derive(Clone, Debug)]
pub struct PlotRequest<'a> {
    pub chip: &'a Path,
    /// "splits" or "pressure".
    pub pressure_profile: bool,
    pub colour: plots::ColourBy,
    pub output: &'a Path,
}

/// Draw the chip's flow-split picture or its pressure profile.
pub fn plot_command(req: &PlotRequest<'_>) -> Result<String, Error> {
    let (network, state) = load_and_solve(req.chip)?;
    if req.pressure_profile {
        plots::save(
            &plots::PressurePicture::new(&network, &state),
            req.output,
            &[req.chip],
        )?;
    } else {
        plots::save(
            &plots::ChipPicture::new(&network, &state, req.colour),
            req.output,
            &[req.chip],
        )?;
    }
    Ok(format!("wrote {}\n", req.output.display()))
}

/// What the `report` command needs.
#[derive(Clone, Debug)]
pub struct ReportRequest<'a> {
    pub chip: &'a Path,
    pub folder: &'a Path,
    /// Allow a folder that already has files (existing files are still never replaced).
    pub into_existing: bool,
}

/// Write tables, pictures and a self-contained HTML page into a new folder.
pub fn report_command(req: &ReportRequest<'_>) -> Result<String, Error> {
    let folder_err = |reason: String| Error::Write {
        path: req.folder.to_path_buf(),
        reason,
    };
    if req.folder.exists() {
        let non_empty = std::fs::read_dir(req.folder)
            .map_err(|e| folder_err(e.to_string()))?
            .next()
            .is_some();
        if non_empty && !req.into_existing {
            return Err(folder_err(
                "the folder is not empty; choose a new folder, or pass --into-existing (existing files are never replaced)"
                    .into(),
            ));
        }
    }
    let (network, state) = load_and_solve(req.chip)?;
    std::fs::create_dir_all(req.folder).map_err(|e| folder_err(e.to_string()))?;
    let protected = [req.chip];
    let mut written = Vec::new();
    let mut put = |name: &str, bytes: &[u8]| -> Result<(), Error> {
        let path = req.folder.join(name);
        output::write_new_file(&path, bytes, &protected)?;
        written.push(name.to_string());
        Ok(())
    };
    put("summary.txt", report::to_table(&network, &state).as_bytes())?;
    put("results.json", report::to_json(&network, &state).as_bytes())?;
    put("results.csv", report::to_csv(&network, &state).as_bytes())?;
    let render_err = |name: &str, reason: String| Error::Write {
        path: req.folder.join(name),
        reason,
    };
    let mut pictures: Vec<(String, String)> = Vec::new();
    let mut picture = |name: &str,
                       caption: &str,
                       fig: &dyn Fn(plots::PictureFormat) -> Result<Vec<u8>, String>|
     -> Result<(), Error> {
        let svg = fig(plots::PictureFormat::Svg).map_err(|e| render_err(name, e))?;
        let png = fig(plots::PictureFormat::Png).map_err(|e| render_err(name, e))?;
        put(&format!("{name}.svg"), &svg)?;
        put(&format!("{name}.png"), &png)?;
        pictures.push((
            caption.to_string(),
            String::from_utf8_lossy(&svg).into_owned(),
        ));
        Ok(())
    };
    let colour = if state.channels.iter().any(|s| s.shear_limit.is_some()) {
        plots::ColourBy::Margin
    } else {
        plots::ColourBy::Pressure
    };
    let chip = plots::ChipPicture::new(&network, &state, colour);
    picture(
        "splits",
        "Flow split: line width ∝ |flow|, arrows show direction.",
        &|f| plots::render(&chip, f),
    )?;
    let pressure = plots::PressurePicture::new(&network, &state);
    picture(
        "pressure",
        "Pressure along the main flow path from each inlet.",
        &|f| plots::render(&pressure, f),
    )?;
    if let Some(chart) = plots::MarginChart::new(&network, &state) {
        picture(
            "margins",
            "Wall-shear margin per channel (limit / maximum wall shear).",
            &|f| plots::render(&chart, f),
        )?;
    }
    let page = report::html_page(&network, &state, &pictures);
    put("index.html", page.as_bytes())?;
    Ok(format!(
        "wrote {} files into {}: {}\n",
        written.len(),
        req.folder.display(),
        written.join(", ")
    ))
}

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
    Ok(format::parse_chip(
        &text,
        &origin,
        format::Syntax::from_path(path),
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
}

/// Load, solve and render a chip. Returns the text to print (empty when written to a file).
pub fn solve_command(req: &SolveRequest<'_>) -> Result<String, Error> {
    let (network, state) = load_and_solve(req.chip)?;
    if let Some(path) = req.plot {
        margin_plot(&network, &state, path, req.chip)?;
    }
    deliver(
        report::render(&network, &state, req.format),
        req.output,
        &[req.chip],
    )
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

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
//! chip file ──format──▶ Chip ─.network─▶ analysis::kirchhoff ──solver──▶ pressures
//!   (YAML/JSON,    (declared: design,    (assembly)        (Cholesky)        │
//!    units, serde)  layout, notes)                                           │
//!   commands::Outcome ◀── analysis::SteadyState ◀──────────────────────────────┘
//!        └──report::render──▶ table / JSON / CSV
//! ```

pub mod analysis;
pub mod chip;
pub mod commands;
pub mod copies;
pub mod error;
pub mod fluid;
pub mod format;
pub mod network;
pub mod output;
pub mod plots;
pub mod report;
pub mod section;
pub mod serpentine;
pub mod solver;
pub mod units;

pub use chip::Chip;
pub use commands::Outcome;
pub use error::Error;

use std::path::Path;

/// The names most programs need.
pub mod prelude {
    pub use crate::analysis::{solve, steady_state, SteadyState};
    pub use crate::chip::Chip;
    pub use crate::fluid::Fluid;
    pub use crate::network::{ChannelId, Network, NetworkBuilder, NodeId, Port};
    pub use crate::section::Shape;
    pub use crate::units::{Length, Pressure, Viscosity, VolumeFlow};
}

/// Read and validate a chip file (YAML, or JSON when the extension is `.json`).
pub fn load_chip(path: &Path) -> Result<Chip, Error> {
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

/// Render `outcome` in `format` to `out` (standard output, usually) through a buffer.
/// Errors are I/O errors of the writer; a broken pipe is for the caller to treat as a quiet
/// end (the reader has seen all it wanted).
pub fn emit(
    outcome: &Outcome,
    format: report::Format,
    out: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    let mut buffered = std::io::BufWriter::with_capacity(1 << 16, out);
    report::render(outcome, format, &mut buffered)?;
    std::io::Write::flush(&mut buffered)
}

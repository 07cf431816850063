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
pub mod index_vec;
pub mod input;
pub mod network;
pub mod outcome;
pub mod output;
pub mod plots;
pub mod report;
pub mod section;
pub mod serpentine;
pub mod solver;
pub mod units;

pub use chip::Chip;
pub use error::Error;
pub use outcome::Outcome;

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

/// Read at most [`format::MAX_FILE_BYTES`] bytes of text from `reader`; refuse more (the limit
/// is enforced while reading, so device files and pipes cannot exhaust memory).
pub fn read_limited(reader: impl std::io::Read, origin: &str) -> Result<String, Error> {
    let mut bytes = Vec::new();
    let limit = format::MAX_FILE_BYTES as u64;
    std::io::Read::read_to_end(&mut reader.take(limit + 1), &mut bytes).map_err(|e| {
        format::InputError::whole_file(origin, format!("cannot read the chip: {e}"))
    })?;
    if bytes.len() as u64 > limit {
        return Err(format::InputError::whole_file(
            origin,
            format!("the input is larger than {limit} bytes, the limit for a chip file"),
        )
        .into());
    }
    String::from_utf8(bytes).map_err(|e| {
        format::InputError::whole_file(
            origin,
            format!(
                "the file is not UTF-8 text (invalid byte at offset {}); save it as UTF-8",
                e.utf8_error().valid_up_to()
            ),
        )
        .into()
    })
}

/// Read a file named by a chip (a measured profile) with the same byte limit, for the
/// `FileReader` of the file format.
pub fn read_named_file(path: &Path) -> Result<String, String> {
    let file = std::fs::File::open(path).map_err(|e| e.to_string())?;
    read_limited(file, &path.display().to_string()).map_err(|e| e.to_string())
}

/// Read and validate a chip file (YAML, or JSON when the extension is `.json`).
pub fn load_chip(path: &Path) -> Result<Chip, Error> {
    let origin = path.display().to_string();
    let file = std::fs::File::open(path).map_err(|source| Error::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let text = read_limited(file, &origin)?;
    // Files the chip names (measured profiles) are found beside the chip file.
    let base = path.parent().unwrap_or(Path::new(".")).to_path_buf();
    let read = move |name: &str| read_named_file(&base.join(name));
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

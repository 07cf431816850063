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
pub mod level_table;
pub mod network;
pub mod outcome;
pub mod output;
pub mod plots;
pub mod progress;
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

/// Memory a run needs, estimated before the network is built (bytes).
///
/// Measured with `/usr/bin/time -v rillnet solve --format json` on generated chips (square
/// grids of 10⁴ and 10⁵ channels, chains of 10⁴ and 10⁵ channels): the peak resident size grew
/// by about 1 715 B per channel and 470 B per node, from a base of about 25 MB, and by 24–25
/// bytes per byte of YAML text. The figures below are rounded up.
pub mod memory {
    /// Bytes per channel of a parsed chip (parse, network, solve, derived figures, output).
    pub const PER_CHANNEL: u64 = 1_800;
    /// Bytes per node.
    pub const PER_NODE: u64 = 500;
    /// Bytes per byte of chip text, for the estimate made before parsing.
    pub const PER_TEXT_BYTE: u64 = 25;
    /// The program's own footprint (code, fonts, buffers).
    pub const BASE: u64 = 32 << 20;
    /// Fraction of the physical memory (`MemTotal` in /proc/meminfo) a run may plan to use.
    pub const FRACTION_OF_MEMORY: f64 = 0.5;
    /// The budget when the physical memory cannot be read.
    pub const FALLBACK: u64 = 4 << 30;
    /// Environment variable that sets the budget (as `--memory-budget` does).
    pub const ENV: &str = "RILLNET_MEMORY_BUDGET";

    static OVERRIDE: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

    /// Estimated bytes to parse `text_bytes` of chip text and run it.
    pub fn for_text(text_bytes: usize) -> u64 {
        BASE.saturating_add((text_bytes as u64).saturating_mul(PER_TEXT_BYTE))
    }

    /// Estimated bytes to build and solve a chip of `nodes` and `channels`.
    pub fn for_network(nodes: usize, channels: usize) -> u64 {
        BASE.saturating_add((channels as u64).saturating_mul(PER_CHANNEL))
            .saturating_add((nodes as u64).saturating_mul(PER_NODE))
    }

    /// Set the budget for this process (the `--memory-budget` option).
    pub fn set_budget(bytes: u64) {
        OVERRIDE.store(bytes.max(1), std::sync::atomic::Ordering::Relaxed);
    }

    /// The budget: set by [`set_budget`], else [`ENV`], else [`FRACTION_OF_MEMORY`] of the
    /// physical memory, else [`FALLBACK`]. An unreadable [`ENV`] value is ignored (the default
    /// applies; a refusal prints the budget it used).
    pub fn budget() -> u64 {
        match OVERRIDE.load(std::sync::atomic::Ordering::Relaxed) {
            0 => std::env::var(ENV)
                .ok()
                .and_then(|v| parse_size(&v).ok())
                .or_else(physical)
                .unwrap_or(FALLBACK),
            set => set,
        }
    }

    /// [`FRACTION_OF_MEMORY`] of `MemTotal` from /proc/meminfo, where there is one.
    fn physical() -> Option<u64> {
        let text = std::fs::read_to_string("/proc/meminfo").ok()?;
        let line = text.lines().find(|l| l.starts_with("MemTotal:"))?;
        let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
        Some((kib as f64 * 1024.0 * FRACTION_OF_MEMORY) as u64)
    }

    /// A size such as `4 GiB`, `500 MB`, `2G` or `1048576` (bytes) in bytes.
    pub fn parse_size(text: &str) -> Result<u64, String> {
        let t = text.trim();
        let split = t
            .find(|c: char| !(c.is_ascii_digit() || c == '.'))
            .unwrap_or(t.len());
        let (number, unit) = (t[..split].trim(), t[split..].trim());
        let value: f64 = number
            .parse()
            .map_err(|_| format!("'{text}' is not a size such as '4 GiB' or '500 MB'"))?;
        let factor: f64 = match unit.to_ascii_lowercase().as_str() {
            "" | "b" => 1.0,
            "k" | "kb" => 1e3,
            "m" | "mb" => 1e6,
            "g" | "gb" => 1e9,
            "t" | "tb" => 1e12,
            "kib" => 1024.0,
            "mib" => 1024.0 * 1024.0,
            "gib" => 1024.0 * 1024.0 * 1024.0,
            "tib" => 1024f64.powi(4),
            _ => {
                return Err(format!(
                    "'{unit}' in '{text}' is not a size unit (B, kB, MB, GB, KiB, MiB, GiB)"
                ))
            }
        };
        let bytes = value * factor;
        if !(1.0..1.8e19).contains(&bytes) {
            return Err(format!("'{text}' is not a usable memory budget"));
        }
        Ok(bytes as u64)
    }
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
    Ok(format::parse_chip_owned(
        text,
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
    emit_as(outcome, format, report::JsonLayout::Pretty, out)
}

/// [`emit`] with JSON laid out as `layout`.
pub fn emit_as(
    outcome: &Outcome,
    format: report::Format,
    layout: report::JsonLayout,
    out: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    let mut buffered = std::io::BufWriter::with_capacity(1 << 16, out);
    report::render_with(outcome, format, layout, &mut buffered)?;
    std::io::Write::flush(&mut buffered)
}

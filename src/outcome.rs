//! What a command produced — data, rendered by `report` in any of the [`Format`]s — kept apart
//! from the commands that produce it and the report that renders it, so neither depends on
//! the other.

use crate::analysis::{design, SteadyState};
use crate::chip::Chip;
use crate::section::numeric::NumericSection;
use crate::section::{SectionFigures, Shape};
use std::path::PathBuf;

/// Output formats (also the command line's `--format` values).
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum Format {
    Table,
    Json,
    Csv,
}

impl Format {
    pub fn name(self) -> &'static str {
        match self {
            Format::Table => "table",
            Format::Json => "json",
            Format::Csv => "csv",
        }
    }
}

/// What a command produced.
#[derive(Debug)]
pub enum Outcome {
    /// `solve`: the steady state, and sensitivities when asked for.
    Solved {
        chip: Box<Chip>,
        state: SteadyState,
        sensitivities: Option<SensitivityTable>,
    },
    /// `check`: the steady state and whether every limit holds.
    Checked {
        chip: Box<Chip>,
        state: SteadyState,
        passed: bool,
    },
    /// `tune`: new drive settings, and the tuned chip (the copy as written, read back)
    /// with its steady state.
    Tuned {
        chip: Box<Chip>,
        result: design::TuneResult,
        after: Box<Changed>,
    },
    /// `size`: new channel dimensions, and the sized chip (read back) with its steady state.
    Sized {
        chip: Box<Chip>,
        result: Box<design::SizeResult>,
        run: f64,
        pitch: f64,
        after: Box<Changed>,
    },
    /// `section`: one cross-section's figures.
    Section(Box<SectionOutcome>),
    /// `evolve`: the chip followed in time, and what happened.
    Evolved(Box<EvolveOutcome>),
    /// `spread`: flows, splits and shear under the chip's tolerances.
    Spread(Box<SpreadOutcome>),
    /// `plot`, `report`: files written (a status line for standard error).
    Wrote(Vec<PathBuf>),
}

/// A chip's spread under its tolerances, with the fingerprint of the chip text (shard
/// files of one run must come from the same text to be merged).
#[derive(Debug)]
pub struct SpreadOutcome {
    pub chip: Chip,
    pub result: crate::analysis::spread::SpreadResult,
    /// FNV-1a hash of the chip text, as 16 hex digits.
    pub fingerprint: String,
}

/// A chip followed in time: the series at the output instants, events and delivered volumes.
#[derive(Debug)]
pub struct EvolveOutcome {
    pub chip: Chip,
    pub evolution: crate::analysis::transient::Evolution,
    pub events: Vec<crate::analysis::transient::events::Event>,
    /// Volume each port delivered into the chip over the run [m³].
    pub delivered: Vec<(crate::network::NodeId, f64)>,
    /// Whether the run stopped early because a well ran dry.
    pub stopped_dry: bool,
}

impl Outcome {
    /// Whether the command's verdict is a pass (exit 0) — a check with no limit exceeded; a
    /// tune or size whose written copy meets every target within its tolerance and exceeds
    /// no limit; every other finished command passes.
    pub fn passed(&self) -> bool {
        match self {
            Outcome::Checked { passed, .. } => *passed,
            Outcome::Tuned { result, after, .. } => {
                result.all_targets_met && !after.exceeds_limits()
            }
            Outcome::Sized { result, after, .. } => {
                result.all_targets_met && !after.exceeds_limits()
            }
            _ => true,
        }
    }

    /// Formats this outcome can be rendered in.
    pub fn formats(&self) -> &'static [Format] {
        match self {
            Outcome::Wrote(_) => &[Format::Table],
            _ => &[Format::Table, Format::Json, Format::Csv],
        }
    }
}

/// A chip changed by `tune` or `size`: the edited copy's text, the chip read back from it,
/// and that chip's steady state.
#[derive(Debug)]
pub struct Changed {
    pub text: String,
    pub chip: Chip,
    pub state: SteadyState,
}

impl Changed {
    /// Whether the changed chip exceeds a limit (shear, rating, vacuum).
    pub fn exceeds_limits(&self) -> bool {
        crate::analysis::findings(&self.chip.network, &self.state)
            .iter()
            .any(|f| f.severity == crate::analysis::Severity::Exceeded)
    }
}

/// Sensitivities of chosen channels' flows, possibly cut to the largest per target.
#[derive(Clone, Debug)]
pub struct SensitivityTable {
    pub rows: Vec<design::Sensitivity>,
    /// Rows kept per target channel when the full table would exceed
    /// [`SENSITIVITY_ROW_LIMIT`] (the largest by relative length sensitivity); `None` when
    /// every row is shown.
    pub kept_per_target: Option<usize>,
}

/// One section's figures, as the `section` command reports them.
#[derive(Clone, Debug)]
pub struct SectionOutcome {
    pub shape: Shape,
    pub figures: SectionFigures,
    pub numeric: Option<NumericSection>,
    /// Viscosity used for the resistance [Pa·s].
    pub viscosity: f64,
    /// Wall-clock time of the section solve [s].
    pub seconds: f64,
    /// "inline section" or "section 'x' of chip.yaml".
    pub label: String,
}

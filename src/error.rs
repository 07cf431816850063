//! The library's top-level error and its exit codes.

use crate::analysis::SolveError;
use crate::format::InputError;
use std::path::PathBuf;

/// Everything a command can fail with. [`Error::exit_code`] maps each to the CLI contract:
/// 2 for bad input or usage, 1 for a check that failed (including a solution whose flow
/// balance misses its tolerance).
#[derive(Debug, thiserror::Error)]
pub enum Error {
    #[error("{0}")]
    Input(#[from] InputError),
    #[error("cannot read {}: {source}", path.display())]
    Read {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("cannot write {}: {reason}", path.display())]
    Write { path: PathBuf, reason: String },
    #[error("{}: {source}", origin)]
    Solve { origin: String, source: SolveError },
    #[error("{}: {source}", origin)]
    Design {
        origin: String,
        source: crate::analysis::design::DesignError,
    },
}

impl Error {
    /// Process exit code for this error.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input(_) | Error::Read { .. } | Error::Write { .. } => 2,
            Error::Solve { .. } => 1,
            Error::Design { source, .. } => match source {
                crate::analysis::design::DesignError::Solve(_) => 1,
                _ => 2,
            },
        }
    }
}

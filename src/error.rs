//! The library's top-level error and its exit codes.

use crate::analysis::SolveError;
use crate::format::InputError;
use std::path::PathBuf;

/// Everything a command can fail with. [`Error::exit_code`] maps each to the CLI contract
/// (see [`exit`]).
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
    Evolve {
        origin: String,
        source: crate::analysis::transient::TransientError,
    },
    #[error("{}: {source}", origin)]
    Design {
        origin: String,
        source: crate::analysis::design::DesignError,
    },
    #[error("{}: {source}", origin)]
    Solutes {
        origin: String,
        source: crate::analysis::solutes::SoluteError,
    },
}

/// The command line's exit codes.
pub mod exit {
    /// Done; every check passed.
    pub const OK: u8 = 0;
    /// Done, but a verdict is negative: a limit is exceeded (`check`).
    pub const CHECK_FAILED: u8 = 1;
    /// Bad input or usage: the chip file, an argument, or an output path that exists.
    pub const BAD_INPUT: u8 = 2;
    /// Results withheld: the solver could not produce a solution that meets its balance
    /// check (or the matrix was not numerically positive definite).
    pub const WITHHELD: u8 = 3;
    /// The output could not be written (disk full, closed standard output, ...): reported like
    /// any other refusal to write, with code 2.
    pub const OUTPUT_FAILED: u8 = 2;
}

impl Error {
    /// Process exit code for this error.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Input(_) | Error::Read { .. } | Error::Write { .. } => exit::BAD_INPUT,
            // A channel too short to resolve is a property of the input, named in the message.
            Error::Solve {
                source:
                    SolveError::StiffChannels { .. }
                    | SolveError::NegligibleChannel { .. }
                    | SolveError::Unfactorisable { .. }
                    | SolveError::PortBalance { .. },
                ..
            } => exit::BAD_INPUT,
            Error::Solve { .. } | Error::Solutes { .. } => exit::WITHHELD,
            Error::Evolve { source, .. } => match source {
                crate::analysis::transient::TransientError::Bad(_) => exit::BAD_INPUT,
                _ => exit::WITHHELD,
            },
            Error::Design { source, .. } => match source {
                crate::analysis::design::DesignError::Solve(_) => exit::WITHHELD,
                _ => exit::BAD_INPUT,
            },
        }
    }
}

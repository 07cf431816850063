//! Command-line inputs that need I/O before a command runs: a chip named `-` is read from
//! standard input (with the byte limit), its syntax given or sniffed.

use crate::commands::ChipInput;
use crate::error::Error;
use crate::format::Syntax;
use std::path::{Path, PathBuf};

/// A chip argument: a path, or the text of standard input for `-`.
#[derive(Clone, Debug)]
pub struct ChipArg {
    pub path: PathBuf,
    stdin: Option<(String, Syntax)>,
}

impl ChipArg {
    /// Take a chip argument; `-` reads standard input now. `syntax` overrides the guess
    /// (JSON when the text starts with `{`, else YAML).
    pub fn new(path: &Path, syntax: Option<Syntax>) -> Result<ChipArg, Error> {
        if path != Path::new("-") {
            return Ok(ChipArg {
                path: path.to_path_buf(),
                stdin: None,
            });
        }
        let text = crate::read_limited(std::io::stdin(), "<stdin>")?;
        let syntax = syntax.unwrap_or_else(|| Syntax::sniff(&text));
        Ok(ChipArg {
            path: path.to_path_buf(),
            stdin: Some((text, syntax)),
        })
    }

    /// The chip as a command takes it.
    pub fn input(&self) -> ChipInput<'_> {
        match &self.stdin {
            Some((text, syntax)) => ChipInput::Text {
                text,
                syntax: *syntax,
            },
            None => ChipInput::File(&self.path),
        }
    }
}

/// A positive, finite length argument such as `--run '10 mm'` [m].
pub fn positive_length(flag: &str, text: &str) -> Result<f64, Error> {
    let bad = |message: String| Error::Input(crate::format::InputError::whole_file(flag, message));
    let l = text
        .parse::<crate::units::Length>()
        .map(|l| l.si())
        .map_err(|e| bad(e.to_string()))?;
    if !(l.is_finite() && l > 0.0) {
        return Err(bad(format!(
            "must be a positive length, e.g. '10 mm'; got '{text}'"
        )));
    }
    Ok(l)
}

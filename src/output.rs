//! Writing results without ever overwriting what the user has.
//!
//! Outputs go to a temporary file beside the target, then are moved into place with a
//! no-clobber rename: a reader never sees a half-written file, and an existing file (in
//! particular the chip file itself) is never replaced.

use crate::error::Error;
use std::io::Write;
use std::path::Path;

/// Write `contents` to the new file `path`, atomically; refuse if it exists or if it is
/// one of `protected` (inputs of this run).
pub fn write_new_file(path: &Path, contents: &[u8], protected: &[&Path]) -> Result<(), Error> {
    write_new_file_with(path, protected, &mut |w| w.write_all(contents))
}

/// [`write_new_file`] with the contents streamed by `write` through a buffer into the
/// temporary file (a result of hundreds of megabytes is never held in memory whole). An error
/// of `write` leaves no file behind.
pub fn write_new_file_with(
    path: &Path,
    protected: &[&Path],
    write: &mut dyn FnMut(&mut dyn Write) -> std::io::Result<()>,
) -> Result<(), Error> {
    let fail = |reason: String| Error::Write {
        path: path.to_path_buf(),
        reason,
    };
    for p in protected {
        let same = match (p.canonicalize(), path.canonicalize()) {
            (Ok(a), Ok(b)) => a == b,
            _ => *p == path,
        };
        if same {
            return Err(fail(
                "this is an input file of the run; choose a new output path".into(),
            ));
        }
    }
    // symlink_metadata: a dangling symbolic link is an existing entry too.
    if std::fs::symlink_metadata(path).is_ok() {
        return Err(fail(
            "the file exists; rillnet never overwrites files. Choose a new path or move the old file away"
                .into(),
        ));
    }
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    if !dir.is_dir() {
        return Err(fail(format!("the folder {} does not exist", dir.display())));
    }
    let mut tmp = tempfile::Builder::new()
        .prefix(".rillnet-")
        .suffix(".part")
        .tempfile_in(dir)
        .map_err(|e| fail(e.to_string()))?;
    {
        let mut buffered = std::io::BufWriter::with_capacity(1 << 16, tmp.as_file_mut());
        write(&mut buffered)
            .and_then(|()| buffered.flush())
            .map_err(|e| fail(e.to_string()))?;
    }
    // Temporary files are created private (0600); a result file is an ordinary file.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        tmp.as_file()
            .set_permissions(std::fs::Permissions::from_mode(0o644))
            .map_err(|e| fail(e.to_string()))?;
    }
    tmp.as_file().sync_all().map_err(|e| fail(e.to_string()))?;
    tmp.persist_noclobber(path).map_err(|e| {
        fail(if e.error.kind() == std::io::ErrorKind::AlreadyExists {
            "the file appeared while writing; it was left untouched".into()
        } else {
            e.error.to_string()
        })
    })?;
    Ok(())
}

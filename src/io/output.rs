//! One place that writes outputs: `-` means standard output; a path is
//! written to a temporary file beside it and renamed into place, so a
//! failed run never leaves a half-written file.

use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// Where an output goes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Target {
    /// Standard output.
    Stdout,
    /// A file, written atomically.
    File(PathBuf),
}

impl Target {
    /// `-` is standard output; anything else a file path.
    pub fn parse(text: &str) -> Target {
        if text == "-" {
            Target::Stdout
        } else {
            Target::File(PathBuf::from(text))
        }
    }

    /// The path for messages (`-` for standard output).
    pub fn display_path(&self) -> PathBuf {
        match self {
            Target::Stdout => PathBuf::from("-"),
            Target::File(p) => p.clone(),
        }
    }

    /// Checks before long work starts that the output can be written: the
    /// folder exists and is a folder.
    pub fn check_writable(&self) -> Result<()> {
        if let Target::File(path) = self {
            let dir = parent_dir(path);
            if !dir.is_dir() {
                return Err(Error::io(
                    path,
                    "cannot write output",
                    std::io::Error::new(std::io::ErrorKind::NotFound, "its folder does not exist"),
                ));
            }
            if path.is_dir() {
                return Err(Error::Usage(format!(
                    "{}: is a folder; give a file name for the output",
                    path.display()
                )));
            }
        }
        Ok(())
    }
}

fn parent_dir(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// Writes through `fill` to `target`. For a file: a temporary file in the
/// same folder, flushed, then renamed over the destination.
pub fn write_to<F>(target: &Target, fill: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    match target {
        Target::Stdout => {
            let stdout = std::io::stdout();
            let mut w = BufWriter::with_capacity(1 << 16, stdout.lock());
            fill(&mut w)
                .and_then(|_| w.flush())
                .map_err(|e| Error::io("-", "cannot write to standard output", e))
        }
        Target::File(path) => write_file(path, fill),
    }
}

/// Writes a file atomically (temporary file, then rename).
pub fn write_file<F>(path: &Path, fill: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let dir = parent_dir(path);
    let tmp = tempfile::Builder::new()
        .prefix(".regionkey-")
        .suffix(".tmp")
        .tempfile_in(dir)
        .map_err(|e| Error::io(path, "cannot create a temporary file beside", e))?;
    {
        let mut w = BufWriter::with_capacity(1 << 16, tmp.as_file());
        fill(&mut w)
            .and_then(|_| w.flush())
            .map_err(|e| Error::io(path, "cannot write", e))?;
    }
    // No fsync: the rename makes the output appear whole or not at all to
    // readers and after a failed run; syncing large outputs costs seconds
    // and guards only against power loss.
    // Temporary files are created private (0600); an output is an ordinary
    // file, readable by others like any file the user writes, or keeps the
    // permissions of the file it replaces.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(path).map_or(0o644, |m| m.permissions().mode() & 0o7777);
        std::fs::set_permissions(tmp.path(), std::fs::Permissions::from_mode(mode))
            .map_err(|e| Error::io(path, "cannot set permissions of", e))?;
    }
    tmp.persist(path)
        .map_err(|e| Error::io(path, "cannot move into place", e.error))?;
    Ok(())
}

/// Formats a float with a fixed number of decimals, so outputs are the same
/// bytes on every run; `-0` is written as `0`.
pub fn fixed(value: f64, decimals: usize) -> String {
    let s = format!("{value:.decimals$}");
    if s.starts_with('-') && s[1..].bytes().all(|b| b == b'0' || b == b'.') {
        s[1..].to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_failed_write_leaves_no_file_behind() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        let r = write_file(&path, |w| {
            w.write_all(b"partial")?;
            Err(std::io::Error::other("boom"))
        });
        assert!(r.is_err());
        assert!(!path.exists());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn a_file_is_replaced_whole() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        write_file(&path, |w| w.write_all(b"one")).unwrap();
        write_file(&path, |w| w.write_all(b"two")).unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "two");
    }

    #[cfg(unix)]
    #[test]
    fn a_new_output_is_readable_by_others_like_any_file() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        write_file(&path, |w| w.write_all(b"x")).unwrap();
        let mode = std::fs::metadata(&path).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, 0o644);
    }

    #[test]
    fn negative_zero_is_written_as_zero() {
        assert_eq!(fixed(-0.0, 3), "0.000");
        assert_eq!(fixed(-1e-12, 6), "0.000000");
        assert_eq!(fixed(-0.5, 1), "-0.5");
    }
}

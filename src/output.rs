//! Writing output files safely: paths are checked before any long computation, and every
//! file is written to a temporary file beside its target and renamed into place, so a
//! failure or an interruption never leaves a half-written file.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Checks that `path` can be written: its folder exists, and the file does not exist unless `force`.
pub fn check_writable(path: &Path, force: bool) -> Result<()> {
    if path.exists() && !force {
        return Err(Error::output(
            path,
            "already exists (add --force to replace it)",
        ));
    }
    if path.is_dir() {
        return Err(Error::output(path, "is a folder, not a file"));
    }
    let parent = parent_dir(path);
    if !parent.is_dir() {
        return Err(Error::output(
            path,
            format!("folder {} does not exist", parent.display()),
        ));
    }
    Ok(())
}

/// The folder a file will be written in (`.` for a bare file name).
fn parent_dir(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Writes `bytes` to `path` through a temporary file in the same folder and a rename.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomic_with(path, |out| {
        out.write_all(bytes)
            .map_err(|e| Error::output(path, format!("cannot write: {e}")))
    })
}

/// Streams a file into place: `fill` writes to a buffered temporary file beside `path`, which
/// is renamed to `path` only when `fill` succeeds; on any error (including an interruption
/// reported by `fill`) the temporary file is removed and `fill`'s error returned. For outputs
/// too large to hold in memory.
pub fn write_atomic_with(
    path: &Path,
    fill: impl FnOnce(&mut dyn Write) -> Result<()>,
) -> Result<()> {
    let parent = parent_dir(path);
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    let tmp = parent.join(format!(".{name}.tmp-{}", std::process::id()));
    let io_error = |e: std::io::Error| Error::output(path, format!("cannot write: {e}"));
    let result = (|| -> Result<()> {
        let file = std::fs::File::create(&tmp).map_err(io_error)?;
        let mut out = std::io::BufWriter::with_capacity(1 << 20, file);
        fill(&mut out)?;
        let file = out.into_inner().map_err(|e| io_error(e.into_error()))?;
        file.sync_all().map_err(io_error)?;
        std::fs::rename(&tmp, path).map_err(io_error)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Prints to standard output; a closed pipe (e.g. `| head`) ends the program quietly with status 0.
pub fn print(text: &str) {
    let mut out = std::io::stdout().lock();
    if let Err(e) = out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            std::process::exit(0);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn refuses_existing_file_without_force_and_missing_folder() {
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("a.csv");
        std::fs::write(&file, "x").unwrap();
        assert!(check_writable(&file, false).is_err());
        assert!(check_writable(&file, true).is_ok());
        assert!(check_writable(&dir.path().join("no/such/a.csv"), true).is_err());
    }

    #[test]
    fn atomic_write_leaves_only_the_target() {
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("b.json");
        write_atomic(&file, b"{}").unwrap();
        let names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(names, vec![std::ffi::OsString::from("b.json")]);
    }

    #[test]
    fn failed_stream_leaves_nothing_behind() {
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("c.csv");
        let result = write_atomic_with(&file, |out| {
            out.write_all(b"half a file").unwrap();
            Err(Error::Computation("stopped".into()))
        });
        assert!(result.is_err());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }
}

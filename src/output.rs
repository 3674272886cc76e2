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

/// Streams a file into place: `fill` writes to a temporary file beside `path`, which is
/// synced and renamed to `path` only when `fill` succeeds; on any error (including an
/// interruption reported by `fill`) the temporary file is removed and `fill`'s error returned.
/// For outputs too large to hold in memory.
pub fn write_atomic_with(path: &Path, fill: impl FnOnce(&mut Staged) -> Result<()>) -> Result<()> {
    let parent = parent_dir(path);
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    let tmp = parent.join(format!(".{name}.tmp-{}", std::process::id()));
    let io_error = |e: std::io::Error| Error::output(path, format!("cannot write: {e}"));
    let result = (|| -> Result<()> {
        let mut out = Staged::create(&tmp, true).map_err(io_error)?;
        fill(&mut out)?;
        out.finish().map_err(io_error)?;
        std::fs::rename(&tmp, path).map_err(io_error)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Size and alignment of the blocks written past the page cache (a multiple of every common
/// disk sector and memory page size).
const BLOCK: usize = 4096;

/// Bytes gathered before each write to the temporary file (a whole number of blocks).
const CHUNK: usize = 8 << 20;

/// The temporary file [`write_atomic_with`] fills. Bytes are gathered into chunks of whole
/// blocks and, where the file system allows it (Linux `O_DIRECT`), written straight to the
/// disk past the page cache: for files of gigabytes that costs a fraction of the processor
/// time of copying into the cache and writing it back later, and leaves nothing to flush
/// before the rename. The last partial block, and every write on a file system that refuses
/// direct writes, go through the page cache as usual.
pub struct Staged {
    path: PathBuf,
    file: std::fs::File,
    direct: bool,
    /// Gathering buffer; its window `store[start..start + CHUNK]` starts on a block boundary
    /// (found in safe code: the first boundary inside a slightly larger allocation).
    store: Vec<u8>,
    start: usize,
    filled: usize,
}

impl Staged {
    /// Creates the temporary file, asking for direct writes when `direct` (falling back to
    /// ordinary writes when the file system refuses them).
    fn create(path: &Path, direct: bool) -> std::io::Result<Staged> {
        let (file, direct) = match direct.then(|| open_direct(path)).flatten() {
            Some(file) => (file, true),
            None => (std::fs::File::create(path)?, false),
        };
        let store = vec![0u8; CHUNK + BLOCK];
        let start = (BLOCK - store.as_ptr() as usize % BLOCK) % BLOCK;
        Ok(Staged {
            path: path.to_path_buf(),
            file,
            direct,
            store,
            start,
            filled: 0,
        })
    }

    /// Writes the first `len` gathered bytes (whole blocks while writing directly) and moves
    /// the rest to the front.
    fn write_gathered(&mut self, len: usize) -> std::io::Result<()> {
        let window = &self.store[self.start..self.start + self.filled];
        write_maybe_direct(&mut self.file, &self.path, &window[..len], &mut self.direct)?;
        let (start, filled) = (self.start, self.filled);
        self.store.copy_within(start + len..start + filled, start);
        self.filled -= len;
        Ok(())
    }

    /// Hands what has been written so far to the disk and waits for it. Long streams call it
    /// now and then, so the wait before the rename stays short instead of flushing hundreds
    /// of megabytes at the end. Direct writes need no such help.
    pub fn settle(&mut self) -> std::io::Result<()> {
        if !self.direct {
            self.write_gathered(self.filled)?;
            self.file.sync_data()?;
        }
        Ok(())
    }

    /// Writes what is left (the last partial block through the page cache) and syncs the
    /// file, data and size, to the disk.
    fn finish(mut self) -> std::io::Result<()> {
        if self.direct {
            self.write_gathered(self.filled / BLOCK * BLOCK)?;
        }
        if self.direct {
            // Direct writes take whole blocks only; the last part goes through the cache.
            self.file = std::fs::OpenOptions::new().append(true).open(&self.path)?;
            self.direct = false;
        }
        self.write_gathered(self.filled)?;
        self.file.sync_all()
    }
}

/// Writes `bytes` (whole blocks while `direct`) to the end of `file`, directly while `direct`.
/// If the file system refuses a direct write, or takes only part of it, the file at `path` is
/// reopened for ordinary writes, which finish this write and do all later ones (`direct`
/// becomes false).
fn write_maybe_direct(
    file: &mut std::fs::File,
    path: &Path,
    bytes: &[u8],
    direct: &mut bool,
) -> std::io::Result<()> {
    if !*direct || bytes.is_empty() {
        return file.write_all(bytes);
    }
    let before = file.metadata()?.len();
    if file.write_all(bytes).is_ok() {
        return Ok(());
    }
    let landed = (file.metadata()?.len() - before) as usize;
    *file = std::fs::OpenOptions::new().append(true).open(path)?;
    *direct = false;
    file.write_all(&bytes[landed.min(bytes.len())..])
}

/// Opens `path` for direct writes (Linux `O_DIRECT`), or `None` where that is not offered.
#[cfg(target_os = "linux")]
fn open_direct(path: &Path) -> Option<std::fs::File> {
    use std::os::unix::fs::OpenOptionsExt;
    std::fs::OpenOptions::new()
        .write(true)
        .create(true)
        .truncate(true)
        .custom_flags(libc::O_DIRECT)
        .open(path)
        .ok()
}

#[cfg(not(target_os = "linux"))]
fn open_direct(_path: &Path) -> Option<std::fs::File> {
    None
}

impl Write for Staged {
    fn write(&mut self, bytes: &[u8]) -> std::io::Result<usize> {
        let n = bytes.len().min(CHUNK - self.filled);
        let at = self.start + self.filled;
        self.store[at..at + n].copy_from_slice(&bytes[..n]);
        self.filled += n;
        if self.filled == CHUNK {
            self.write_gathered(CHUNK)?;
        }
        Ok(n)
    }

    /// Gathered bytes are written in whole chunks; [`Staged::settle`] writes and syncs them.
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// Checks that an output folder may be filled: it does not exist, or is empty, or `force` is
/// given; its parent folder exists.
pub fn check_folder(path: &Path, force: bool) -> Result<()> {
    if path.exists() {
        if !path.is_dir() {
            return Err(Error::output(path, "exists and is not a folder"));
        }
        let empty = std::fs::read_dir(path)
            .map_err(|e| Error::output(path, format!("cannot read: {e}")))?
            .next()
            .is_none();
        if !empty && !force {
            return Err(Error::output(
                path,
                "folder is not empty (add --force to replace it)",
            ));
        }
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

/// An output folder built in a temporary sibling folder and renamed into place by
/// [`StagedFolder::finish`], so that a failure never leaves a half-filled folder. Dropping it
/// unfinished removes the temporary folder.
#[derive(Debug)]
pub struct StagedFolder {
    target: PathBuf,
    staging: PathBuf,
    finished: bool,
}

impl StagedFolder {
    /// Creates the temporary folder beside `target` (which [`check_folder`] has accepted).
    pub fn new(target: &Path) -> Result<StagedFolder> {
        let parent = parent_dir(target);
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "output".into());
        let staging = parent.join(format!(".{name}.tmp-{}", std::process::id()));
        if staging.exists() {
            let _ = std::fs::remove_dir_all(&staging);
        }
        std::fs::create_dir(&staging)
            .map_err(|e| Error::output(target, format!("cannot create a temporary folder: {e}")))?;
        Ok(StagedFolder {
            target: target.to_path_buf(),
            staging,
            finished: false,
        })
    }

    /// The folder the result will finally have.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Writes one file (a plain name, no folders) into the temporary folder.
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<()> {
        let path = self.staging.join(name);
        std::fs::write(&path, bytes)
            .map_err(|e| Error::output(&self.target.join(name), format!("cannot write: {e}")))
    }

    /// Moves the finished folder into place, replacing an existing (empty, or accepted with
    /// `--force`) target folder.
    pub fn finish(mut self) -> Result<()> {
        let fail = |e: std::io::Error| Error::output(&self.target, format!("cannot write: {e}"));
        if self.target.exists() {
            let old = parent_dir(&self.target).join(format!(
                ".{}.old-{}",
                self.target
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default(),
                std::process::id()
            ));
            std::fs::rename(&self.target, &old).map_err(fail)?;
            if let Err(e) = std::fs::rename(&self.staging, &self.target) {
                let _ = std::fs::rename(&old, &self.target);
                return Err(fail(e));
            }
            let _ = std::fs::remove_dir_all(&old);
        } else {
            std::fs::rename(&self.staging, &self.target).map_err(fail)?;
        }
        self.finished = true;
        Ok(())
    }
}

impl Drop for StagedFolder {
    fn drop(&mut self) {
        if !self.finished {
            let _ = std::fs::remove_dir_all(&self.staging);
        }
    }
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
    fn stream_settled_midway_ends_whole() {
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("s.csv");
        write_atomic_with(&file, |out| {
            out.write_all(b"first,").unwrap();
            out.settle().unwrap();
            out.write_all(b"second").unwrap();
            Ok(())
        })
        .unwrap();
        assert_eq!(std::fs::read(&file).unwrap(), b"first,second");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    /// Bytes that show any misplaced, lost or repeated piece: a counter pattern.
    fn pattern(len: usize) -> Vec<u8> {
        (0..len)
            .map(|i| (i % 251) as u8 ^ (i / 251) as u8)
            .collect()
    }

    #[test]
    fn long_streams_land_whole_written_directly_or_not() {
        // Several chunks and a partial block at the end, in pieces of awkward sizes, through
        // direct writes (where the file system offers them) and through ordinary writes.
        let dir = tempfile::tempdir().unwrap();
        let expected = pattern(3 * CHUNK + 5 * BLOCK + 123);
        for direct in [true, false] {
            let file = dir.path().join(format!("long-{direct}.csv"));
            let mut out = Staged::create(&file, direct).unwrap();
            for piece in expected.chunks(1_000_003) {
                out.write_all(piece).unwrap();
            }
            out.finish().unwrap();
            assert!(std::fs::read(&file).unwrap() == expected, "direct {direct}");
        }
        // And through the public entry, with a settle on the way.
        let file = dir.path().join("atomic.csv");
        write_atomic_with(&file, |out| {
            out.write_all(&expected[..CHUNK + 7]).unwrap();
            out.settle().unwrap();
            out.write_all(&expected[CHUNK + 7..]).unwrap();
            Ok(())
        })
        .unwrap();
        assert!(std::fs::read(&file).unwrap() == expected);
    }

    #[test]
    fn refused_direct_write_goes_on_through_the_cache() {
        // A direct write of a length that is not a whole number of blocks is refused by Linux
        // (EINVAL); the write must still land, and later writes go through the cache.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("refused.csv");
        let Some(mut file) = open_direct(&path) else {
            return; // this file system offers no direct writes: nothing to refuse
        };
        let mut direct = true;
        write_maybe_direct(&mut file, &path, b"not a whole block", &mut direct).unwrap();
        write_maybe_direct(&mut file, &path, b", then more", &mut direct).unwrap();
        assert!(!direct);
        drop(file);
        assert_eq!(
            std::fs::read(&path).unwrap(),
            b"not a whole block, then more"
        );
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

    #[test]
    fn staged_folder_appears_only_when_finished() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out");
        {
            let staged = StagedFolder::new(&target).unwrap();
            staged.write("a.txt", b"1").unwrap();
            assert!(!target.exists());
        }
        // Dropped unfinished: nothing left behind.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
        let staged = StagedFolder::new(&target).unwrap();
        staged.write("a.txt", b"1").unwrap();
        staged.finish().unwrap();
        assert_eq!(std::fs::read(target.join("a.txt")).unwrap(), b"1");
        assert!(check_folder(&target, false).is_err());
        assert!(check_folder(&target, true).is_ok());
        let again = StagedFolder::new(&target).unwrap();
        again.write("b.txt", b"2").unwrap();
        again.finish().unwrap();
        assert!(!target.join("a.txt").exists());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}

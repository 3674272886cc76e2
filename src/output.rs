//! Writing output files safely: paths are checked before any long computation, and every
//! file is written to a temporary file beside its target and renamed into place, so a
//! failure or an interruption never leaves a half-written file. Files that belong together (a
//! CSV file and its descriptor) are staged first and put in place together ([`commit`]).
//! Also the one place that says what time an output may record ([`source_date_epoch`]).

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
    commit(vec![stage(path, bytes)?])
}

/// Streams a file into place: `fill` writes to a temporary file beside `path`, which is
/// synced and renamed to `path` only when `fill` succeeds; on any error (including an
/// interruption reported by `fill`) the temporary file is removed and `fill`'s error returned.
/// For outputs too large to hold in memory.
pub fn write_atomic_with(path: &Path, fill: impl FnOnce(&mut Staged) -> Result<()>) -> Result<()> {
    commit(vec![stage_with(path, fill)?])
}

/// A file written in full (and synced) to a temporary file beside its target, waiting for
/// [`commit`] to put it in place. Dropped without being committed, it removes its temporary file.
#[derive(Debug)]
pub struct Pending {
    tmp: PathBuf,
    target: PathBuf,
    bytes: u64,
    done: bool,
}

impl Pending {
    /// Length of the staged file in bytes.
    pub fn bytes(&self) -> u64 {
        self.bytes
    }
}

impl Drop for Pending {
    fn drop(&mut self) {
        if !self.done {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// Stages `bytes` for `path` (see [`Pending`]).
pub fn stage(path: &Path, bytes: &[u8]) -> Result<Pending> {
    stage_with(path, |out| {
        out.write_all(bytes)
            .map_err(|e| Error::output(path, format!("cannot write: {e}")))
    })
}

/// Stages the bytes `fill` writes for `path` (see [`Pending`]); on any error from `fill` the
/// temporary file is removed and the error returned.
pub fn stage_with(path: &Path, fill: impl FnOnce(&mut Staged) -> Result<()>) -> Result<Pending> {
    let tmp = sibling(path, "tmp");
    let io_error = |e: std::io::Error| Error::output(path, format!("cannot write: {e}"));
    // Created first, so that a failure anywhere below removes the temporary file.
    let mut pending = Pending {
        tmp: tmp.clone(),
        target: path.to_path_buf(),
        bytes: 0,
        done: false,
    };
    let mut out = Staged::create(&tmp, true).map_err(io_error)?;
    fill(&mut out)?;
    pending.bytes = out.written;
    out.finish().map_err(io_error)?;
    Ok(pending)
}

/// A hidden name beside `path` for this process: `.NAME.KIND-PID`.
fn sibling(path: &Path, kind: &str) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    parent_dir(path).join(format!(".{name}.{kind}-{}", std::process::id()))
}

/// Puts staged files in place, in the order given (a descriptor before the data file it
/// describes, so that the data file never appears alone). Each rename replaces its target
/// in one step; when several files go together and one rename fails, the files already put
/// in place are taken back (earlier versions restored from hard links made beforehand), so
/// either all of them land or none.
pub fn commit(mut files: Vec<Pending>) -> Result<()> {
    let together = files.len() > 1;
    // (index, hard link to the file it replaced) of the files in place so far.
    let mut placed: Vec<(usize, Option<PathBuf>)> = Vec::new();
    let mut failure = None;
    for (i, file) in files.iter().enumerate() {
        let backup = if together && file.target.is_file() {
            let link = sibling(&file.target, "old");
            let _ = std::fs::remove_file(&link);
            // Where the file system offers no hard links, the old file cannot be restored.
            std::fs::hard_link(&file.target, &link).ok().map(|_| link)
        } else {
            None
        };
        match std::fs::rename(&file.tmp, &file.target) {
            Ok(()) => placed.push((i, backup)),
            Err(e) => {
                if let Some(link) = backup {
                    let _ = std::fs::remove_file(link);
                }
                failure = Some(Error::output(&file.target, format!("cannot write: {e}")));
                break;
            }
        }
    }
    for (i, backup) in placed.iter().rev() {
        let target = &files[*i].target;
        match (&failure, backup) {
            (None, Some(link)) => {
                let _ = std::fs::remove_file(link);
            }
            (None, None) => {}
            (Some(_), Some(link)) => {
                let _ = std::fs::rename(link, target);
            }
            (Some(_), None) => {
                let _ = std::fs::remove_file(target);
            }
        }
    }
    for (i, _) in &placed {
        files[*i].done = failure.is_none();
    }
    match failure {
        Some(e) => Err(e),
        None => Ok(()),
    }
}

/// Name of the environment variable that sets the time outputs record, the reproducible-builds
/// convention (reproducible-builds.org, "SOURCE_DATE_EPOCH" specification): seconds since
/// 1970-01-01 00:00 UTC, as `date +%s` prints them.
pub const SOURCE_DATE_EPOCH: &str = "SOURCE_DATE_EPOCH";

/// The latest time an XLSX workbook's properties can hold, 9999-12-31 23:59:59 UTC.
const LATEST_RECORDED_TIME: u64 = 253_402_300_799;

/// The time outputs record (XLSX document properties, the report's date, `datapackage.json`'s
/// `created`), in seconds since 1970-01-01 00:00 UTC: `SOURCE_DATE_EPOCH` when the environment
/// sets it, else `None`, and then no file holds a time, so reruns give identical files.
pub fn source_date_epoch() -> Result<Option<u64>> {
    match std::env::var_os(SOURCE_DATE_EPOCH) {
        None => Ok(None),
        Some(value) => parse_source_date_epoch(&value.to_string_lossy()),
    }
}

/// Reads a `SOURCE_DATE_EPOCH` value: empty means unset; otherwise a whole number of seconds
/// from 0 to the end of the year 9999, or a usage error (the convention asks tools to stop on
/// a malformed value rather than fall back to the clock).
pub fn parse_source_date_epoch(text: &str) -> Result<Option<u64>> {
    if text.is_empty() {
        return Ok(None);
    }
    let shown = crate::format::shown(text);
    match text.parse::<u64>() {
        Ok(secs) if text.bytes().all(|b| b.is_ascii_digit()) && secs <= LATEST_RECORDED_TIME => {
            Ok(Some(secs))
        }
        Ok(_) => Err(Error::Usage(format!(
            "{SOURCE_DATE_EPOCH}={shown}: later than 9999-12-31 23:59:59 UTC, the last time an XLSX file can hold"
        ))),
        Err(_) => Err(Error::Usage(format!(
            "{SOURCE_DATE_EPOCH}={shown}: not a whole number of seconds since 1970-01-01 00:00 UTC (as `date +%s` prints)"
        ))),
    }
}

/// The civil date and time of `secs` seconds after 1970-01-01 00:00 UTC: year, month, day,
/// hour, minute, second (Hinnant's days-to-civil algorithm, from memory).
pub fn civil_time(secs: u64) -> (i64, u32, u32, u32, u32, u32) {
    let days = (secs / 86_400) as i64;
    let rem = (secs % 86_400) as u32;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let month = (if mp < 10 { mp + 3 } else { mp - 9 }) as u32;
    let year = yoe + era * 400 + i64::from(month <= 2);
    (year, month, day, rem / 3600, (rem % 3600) / 60, rem % 60)
}

/// `secs` as an RFC 3339 time in UTC, e.g. `2000-02-29T00:00:00Z`.
pub fn rfc3339(secs: u64) -> String {
    let (y, mo, d, h, mi, s) = civil_time(secs);
    format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{s:02}Z")
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
    /// Bytes handed to [`Write::write`] so far.
    written: u64,
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
            written: 0,
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
        self.written += n as u64;
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

    /// Where the file `name` (a plain name) is while the folder is staged, for files streamed
    /// into it rather than written whole.
    pub fn staging_path(&self, name: &str) -> PathBuf {
        self.staging.join(name)
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
    fn files_staged_together_land_together_or_not_at_all() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.resource.json"), dir.path().join("a.csv"));
        commit(vec![
            stage(&a, b"{}").unwrap(),
            stage(&b, b"x\r\n").unwrap(),
        ])
        .unwrap();
        assert_eq!(std::fs::read(&a).unwrap(), b"{}");
        assert_eq!(std::fs::read(&b).unwrap(), b"x\r\n");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
        // The second rename fails (its target is a non-empty folder): the first file is taken
        // back, the earlier version restored, and no temporary file or link is left.
        let blocked = dir.path().join("blocked");
        std::fs::create_dir(&blocked).unwrap();
        std::fs::write(blocked.join("inside"), b"1").unwrap();
        let err = commit(vec![
            stage(&a, b"{\"new\": 1}").unwrap(),
            stage(&blocked, b"y").unwrap(),
        ]);
        assert!(err.is_err());
        assert_eq!(std::fs::read(&a).unwrap(), b"{}");
        let mut names: Vec<String> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        assert_eq!(names, ["a.csv", "a.resource.json", "blocked"]);
        // A new file (no earlier version) is removed again.
        let c = dir.path().join("c.json");
        assert!(commit(vec![
            stage(&c, b"1").unwrap(),
            stage(&blocked, b"y").unwrap()
        ])
        .is_err());
        assert!(!c.exists());
        // Staged but never committed: nothing left.
        drop(stage(&dir.path().join("d.csv"), b"z").unwrap());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 3);
    }

    #[test]
    fn source_date_epoch_is_whole_seconds_or_a_usage_error() {
        // Reproducible-builds SOURCE_DATE_EPOCH specification: an integer as `date +%s` prints;
        // a malformed value should stop the tool. Empty is taken as unset (common practice).
        assert_eq!(parse_source_date_epoch("").unwrap(), None);
        assert_eq!(
            parse_source_date_epoch("951782400").unwrap(),
            Some(951_782_400)
        );
        assert_eq!(
            parse_source_date_epoch("253402300799").unwrap(),
            Some(253_402_300_799)
        );
        for bad in ["-1", "+5", "1.5", "1e9", " 12", "yesterday", "253402300800"] {
            let err = parse_source_date_epoch(bad).unwrap_err();
            assert_eq!(err.exit_code(), 2, "{bad}");
            assert!(err.to_string().starts_with("SOURCE_DATE_EPOCH="), "{err}");
        }
    }

    #[test]
    fn civil_times_follow_the_calendar() {
        // 0 is 1970-01-01 (Unix epoch); 951_782_400 = 11_016 days = 2000-02-29, a leap day
        // (10_957 days to 2000-01-01, then 31 + 28); 1_700_000_000 is 2023-11-14 22:13:20 UTC
        // (common practice: well-known timestamps); 253_402_300_799 the last second of 9999.
        assert_eq!(rfc3339(0), "1970-01-01T00:00:00Z");
        assert_eq!(rfc3339(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(rfc3339(1_700_000_000), "2023-11-14T22:13:20Z");
        assert_eq!(rfc3339(315_532_800), "1980-01-01T00:00:00Z");
        assert_eq!(rfc3339(253_402_300_799), "9999-12-31T23:59:59Z");
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

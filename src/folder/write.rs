//! The measurement folder on disk: raw files written once and never
//! replaced, derived files written to a temporary name and renamed, one
//! writer at a time, the manifest last.
//!
//! **One writer.** [`MeasurementFolder::check`] takes an exclusive lock on
//! `.lock` inside the folder (making the folder if it does not exist yet)
//! before it looks at anything, and the [`MeasurementFolder`] holds it
//! until it is dropped, after the manifest is written. A second run is
//! refused while the first holds it. The lock is released when the file
//! closes, so a run that dies (`kill -9`) leaves no stale lock, only a
//! `.lock` file the next run reuses. On drop the lock file is removed (on
//! Unix, while still held; the next run checks that the file it locked is
//! still the one at `.lock`) and so is a folder this run made and left
//! empty. Readers never see `.lock`: it is not listed in the manifest and
//! [`crate::folder::open`] reads only what the manifest lists.
//!
//! **The commit point.** The manifest is written last, through a temporary
//! name and a rename. Before replacing the derived files of a complete
//! folder (`--overwrite`), [`MeasurementFolder::create`] first rewrites its
//! manifest as incomplete ([`REPLACING`]); a run cut off after that leaves a
//! folder that [`crate::folder::open`] refuses as an interrupted
//! re-analysis, never a complete manifest over files it does not describe.
//! Temporary files are named `.partial-PID-NAME`; the next run, holding
//! the lock, removes those a dead run left behind.

use std::fs;
use std::io::{Read, Seek, Write};
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::error::{Error, ErrorKind, Result};
use crate::folder::schema::{FileEntry, FileRole};

/// Names of the raw files of a measurement folder.
pub const RAW_FILES: [&str; 2] = ["stimulus.wav", "recording.wav"];

/// The lock file inside a folder being written (never listed in a
/// manifest).
pub const LOCK_FILE: &str = ".lock";

/// The prefix of a derived file being written; `.partial-PID-NAME`.
pub const PARTIAL_PREFIX: &str = ".partial-";

/// The problem a manifest names while its folder's derived files are being
/// replaced; it stays if that run never finishes.
pub const REPLACING: &str =
    "its derived files are being replaced by a new analysis (or that analysis was interrupted)";

/// SHA-256 of `bytes` as lowercase hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// The manifest entry of a derived file.
fn derived(rel: &str, bytes: &[u8]) -> FileEntry {
    FileEntry {
        name: rel.into(),
        role: FileRole::Derived,
        sha256: sha256_hex(bytes),
    }
}

/// The exclusive lock on a folder being written, released on drop.
///
/// The lock is an advisory whole-file lock taken with the `fs4` crate:
/// `flock(2)` on Unix (Linux, macOS) and `LockFileEx` on Windows, without
/// libc or any system library (it goes through rustix and windows-sys),
/// and it works at our minimum Rust version (1.85), before
/// `std::fs::File::try_lock` was stable (1.89). The operating system
/// releases it when the process ends however it ends, so a killed run never
/// leaves the folder locked.
#[derive(Debug)]
struct FolderLock {
    /// The open, locked `.lock`; closing it releases the lock.
    file: fs::File,
    /// Its path.
    path: PathBuf,
    /// The folders this run made to hold the lock (the folder first, then
    /// its missing parents), removed on drop if they are still empty.
    made: Vec<PathBuf>,
}

impl FolderLock {
    /// Locks `dir` (making it and its missing parents if needed), or
    /// refuses when another run holds it.
    fn acquire(dir: &Path) -> Result<Self> {
        let path = dir.join(LOCK_FILE);
        // a run that is just removing the folder it made can make one open
        // fail or lock a file that is no longer at `.lock`: try again
        for _ in 0..20 {
            let made = missing_dirs(dir);
            fs::create_dir_all(dir).map_err(|e| Error::io("create the folder", dir, &e))?;
            let file = match fs::OpenOptions::new()
                .read(true)
                .write(true)
                .create(true)
                .truncate(false)
                .open(&path)
            {
                Ok(f) => f,
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => continue,
                Err(e) if e.kind() == std::io::ErrorKind::PermissionDenied && path.exists() => {
                    // Windows: the holder is removing it
                    return Err(busy(dir, None));
                }
                Err(e) => return Err(Error::io("create the lock file", &path, &e)),
            };
            match fs4::FileExt::try_lock(&file) {
                Ok(()) => {}
                Err(fs4::TryLockError::WouldBlock) => {
                    return Err(busy(dir, holder_pid(&file)));
                }
                Err(fs4::TryLockError::Error(e)) => {
                    return Err(Error::io("lock", &path, &e));
                }
            }
            if !still_at(&file, &path) {
                continue;
            }
            let mut lock = FolderLock { file, path, made };
            lock.write_pid();
            return Ok(lock);
        }
        Err(busy(dir, None))
    }

    /// Writes this process's id into the lock file, for the refusal of a
    /// second run (best effort: the lock itself is what counts).
    fn write_pid(&mut self) {
        let _ = self.file.set_len(0).and_then(|()| {
            self.file.rewind()?;
            write!(self.file, "{}", std::process::id())?;
            self.file.flush()
        });
    }
}

impl Drop for FolderLock {
    fn drop(&mut self) {
        // Unix: unlink while still holding the lock; a run that opened the
        // old file meanwhile sees it is no longer at `.lock` and opens
        // again. Windows keeps the (unlocked) file: removing it there could
        // not be told apart by the next run.
        #[cfg(unix)]
        let _ = fs::remove_file(&self.path);
        let dir = self.path.parent().unwrap_or(Path::new("."));
        if !self.made.is_empty() && !dir.join("manifest.json").exists() {
            // a run that made the folder and wrote nothing takes it away
            let _ = fs::remove_dir(dir.join("plots"));
            for d in &self.made {
                if fs::remove_dir(d).is_err() {
                    break;
                }
            }
        }
    }
}

/// `dir` and those of its parents that do not exist, deepest first.
fn missing_dirs(dir: &Path) -> Vec<PathBuf> {
    dir.ancestors()
        .take_while(|d| !d.as_os_str().is_empty() && !d.exists())
        .map(Path::to_path_buf)
        .collect()
}

/// Whether the open `file` is still the file at `path` (not removed and
/// replaced since it was opened).
#[cfg(unix)]
fn still_at(file: &fs::File, path: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (file.metadata(), fs::metadata(path)) {
        (Ok(a), Ok(b)) => a.dev() == b.dev() && a.ino() == b.ino(),
        _ => false,
    }
}

/// Whether the open `file` is still the file at `path`: on Windows the
/// lock file is never removed, so it is.
#[cfg(not(unix))]
fn still_at(_file: &fs::File, path: &Path) -> bool {
    path.exists()
}

/// The process id the holder wrote into the lock file, if it can be read.
fn holder_pid(mut file: &fs::File) -> Option<u32> {
    let mut s = String::new();
    file.read_to_string(&mut s).ok()?;
    s.trim().parse().ok()
}

/// The refusal of a folder another run is writing.
fn busy(dir: &Path, pid: Option<u32>) -> Error {
    let who = pid.map_or_else(String::new, |p| format!(" (pid {p})"));
    Error::new(
        ErrorKind::AlreadyExists,
        format!(
            "{} is being written by another gliss run{who}; wait for it or choose another --out",
            dir.display()
        ),
    )
}

/// Whether `e` is an empty plots/ (what a run cut off right after making
/// the folder leaves): it does not make the folder hold anything.
fn is_empty_plots(e: &fs::DirEntry) -> bool {
    e.file_name() == "plots" && fs::read_dir(e.path()).is_ok_and(|mut d| d.next().is_none())
}

/// Removes the temporary files (`.partial-*`) in `dir` and `dir/plots`:
/// with the lock held, they are what a run that died left behind.
fn remove_stale_partials(dir: &Path) -> Result<()> {
    for d in [dir.to_path_buf(), dir.join("plots")] {
        let Ok(entries) = fs::read_dir(&d) else {
            continue;
        };
        for e in entries.flatten() {
            let stale = e.file_name().to_string_lossy().starts_with(PARTIAL_PREFIX)
                && e.file_type().is_ok_and(|t| t.is_file());
            if stale {
                let p = e.path();
                fs::remove_file(&p).map_err(|e| Error::io("remove the leftover", &p, &e))?;
            }
        }
    }
    Ok(())
}

/// Writes a new file `path` (one a single command writes, outside a
/// measurement folder: a sweep, a calibration, which take `--overwrite`
/// to replace one through [`write_replacing`]): created new, never over an
/// existing file, and removed again if it cannot be written whole, so that
/// a failure (a full disk) leaves nothing that blocks the retry.
pub fn write_new(path: &Path, bytes: &[u8]) -> Result<()> {
    let mut f = fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(path)
        .map_err(|e| {
            if e.kind() == std::io::ErrorKind::AlreadyExists {
                Error::new(
                    ErrorKind::AlreadyExists,
                    format!(
                        "{} already exists; choose another --out, or add --overwrite to replace it",
                        path.display()
                    ),
                )
            } else {
                Error::io("create", path, &e)
            }
        })?;
    if let Err(e) = f.write_all(bytes).and_then(|()| f.sync_all()) {
        drop(f);
        let _ = fs::remove_file(path);
        return Err(single_failed(path, bytes.len(), &e));
    }
    Ok(())
}

/// Writes the file `out` (an export, a report) through a temporary file
/// beside it and a rename, so that `out` is either the old file or the
/// whole new one; without `overwrite` an existing `out` is never
/// replaced. A failed write removes its temporary file.
pub fn write_replacing(out: &Path, bytes: &[u8], overwrite: bool) -> Result<()> {
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = out.with_file_name(format!("{PARTIAL_PREFIX}{}-{name}", std::process::id()));
    let written = fs::File::create(&tmp).and_then(|mut f| {
        f.write_all(bytes)?;
        f.sync_all()
    });
    if let Err(e) = written {
        let _ = fs::remove_file(&tmp);
        return Err(single_failed(out, bytes.len(), &e));
    }
    if !overwrite && out.exists() {
        let _ = fs::remove_file(&tmp);
        return Err(Error::new(
            ErrorKind::AlreadyExists,
            format!(
                "{} appeared while it was being written; choose another --out, or add --overwrite",
                out.display()
            ),
        ));
    }
    fs::rename(&tmp, out).map_err(|e| {
        let _ = fs::remove_file(&tmp);
        Error::io("write", out, &e)
    })
}

/// The error of a single file `path` of `len` bytes that could not be
/// written; on a full disk, how much it needs and how much is free.
fn single_failed(path: &Path, len: usize, e: &std::io::Error) -> Error {
    let err = Error::io("write", path, e);
    if err.kind() != ErrorKind::DiskFull {
        return err;
    }
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let free = fs4::available_space(dir)
        .map(|b| format!(", {} free now", crate::model::units::bytes(b)))
        .unwrap_or_default();
    err.with_advice(&format!(
        "the file needs {}{free}; nothing was left behind: free at least that much space, or choose another --out, and run again",
        crate::model::units::bytes(len as u64)
    ))
}

/// A measurement folder about to be written, locked for this run until it
/// is dropped.
///
/// **A failed run leaves nothing that blocks its retry.** It keeps a list
/// of the files it creates. Dropped before its manifest was written (an
/// error on the way: a full disk, a plot that could not be drawn), it
/// removes them again, and its temporary files, so that the same command
/// run again finds the folder as it was before: a new folder is gone, a
/// folder being re-analysed holds its raw files and the manifest that says
/// it is being replaced. Unless [`MeasurementFolder::keep_on_failure`] was
/// called: a measurement keeps what it captured whatever happens.
#[derive(Debug)]
pub struct MeasurementFolder {
    dir: PathBuf,
    /// Held from the check until the folder is dropped.
    _lock: FolderLock,
    /// What this run wrote: the files it created, their bytes, and
    /// whether its manifest is written or its files are to be kept.
    written: std::sync::Mutex<Written>,
}

/// The files a run created in its folder.
#[derive(Debug, Default)]
struct Written {
    /// Created by this run, in order.
    files: Vec<PathBuf>,
    /// Their bytes, and those of the file that could not be written.
    bytes: u64,
    /// The manifest is written: the run succeeded, or wrote the record
    /// of its failure.
    manifest: bool,
    /// Keep the files even if the run fails (a measurement's capture).
    keep: bool,
}

impl Drop for MeasurementFolder {
    fn drop(&mut self) {
        let w = self.written.get_mut().unwrap_or_else(|p| p.into_inner());
        let mine = format!("{PARTIAL_PREFIX}{}-", std::process::id());
        for d in [self.dir.clone(), self.dir.join("plots")] {
            for e in fs::read_dir(&d).into_iter().flatten().flatten() {
                if e.file_name().to_string_lossy().starts_with(&mine) {
                    let _ = fs::remove_file(e.path());
                }
            }
        }
        if !w.manifest && !w.keep {
            for f in w.files.iter().rev() {
                let _ = fs::remove_file(f);
            }
        }
    }
}

impl MeasurementFolder {
    /// Locks `dir` for this run and checks that it can take a new
    /// measurement: it must not exist, or be empty, or — with `overwrite` —
    /// hold only a measurement whose raw files equal `raw` (name, bytes),
    /// which are then kept.
    ///
    /// Refused when another gliss run is writing `dir`. To hold the lock a
    /// missing folder is made (with `.lock` in it); dropping the result
    /// takes an empty folder it made away again, so a refused run leaves
    /// nothing behind. Leftover temporary files of a run that died are
    /// removed; nothing else is written.
    pub fn check(dir: &Path, overwrite: bool, raw: &[(&str, &[u8])]) -> Result<Self> {
        if dir.exists() && !dir.is_dir() {
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!(
                    "{} exists and is not a folder; choose another --out",
                    dir.display()
                ),
            ));
        }
        let lock = FolderLock::acquire(dir)?;
        let folder = MeasurementFolder {
            dir: dir.to_path_buf(),
            _lock: lock,
            written: std::sync::Mutex::default(),
        };
        remove_stale_partials(dir)?;
        let mut entries = fs::read_dir(dir)
            .map_err(|e| Error::io("read the folder", dir, &e))?
            .flatten()
            .filter(|e| e.file_name() != LOCK_FILE && !is_empty_plots(e));
        if entries.next().is_none() {
            return Ok(folder);
        }
        if !overwrite {
            let what = if dir.join("manifest.json").exists() {
                "already holds a measurement"
            } else {
                "is not empty"
            };
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!(
                    "{} {what}; choose a new --out, or add --overwrite to replace its derived files (raw recordings are always kept)",
                    dir.display()
                ),
            ));
        }
        // the raw files must still be the ones the manifest recorded: a
        // changed one is refused, so its original hash is never replaced
        let recorded = crate::folder::read_manifest(dir)
            .map(|m| m.files)
            .unwrap_or_default();
        crate::folder::check_files(dir, &recorded, crate::folder::OpenOptions::default())?;
        for (name, bytes) in raw {
            let path = dir.join(name);
            // a raw file the manifest lists was just checked against its
            // hash: compare with that instead of reading the file again
            let listed = recorded
                .iter()
                .find(|e| e.role == FileRole::Raw && e.name == *name)
                .map(|e| e.sha256.clone());
            let old = match listed {
                Some(h) => Some(h),
                None if path.exists() => Some(sha256_hex(
                    &fs::read(&path).map_err(|e| Error::io("read", &path, &e))?,
                )),
                None => None,
            };
            if let Some(old) = old {
                if !old.eq_ignore_ascii_case(&sha256_hex(bytes)) {
                    return Err(Error::new(
                        ErrorKind::AlreadyExists,
                        format!(
                            "{} holds a different raw file; gliss never replaces raw files, so choose a new --out",
                            path.display()
                        ),
                    ));
                }
            }
        }
        Ok(folder)
    }

    /// The folder's path.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// Creates the folder and its plots/ subfolder, and — the first step of
    /// replacing a folder's derived files — marks a complete manifest
    /// already there as being replaced ([`REPLACING`]), so that a run cut
    /// off from here on leaves a folder readers refuse as interrupted
    /// rather than a complete manifest over files it does not describe.
    pub fn create(&self) -> Result<()> {
        let plots = self.dir.join("plots");
        // a link named plots would send the PNGs outside the folder
        if fs::symlink_metadata(&plots).is_ok_and(|m| m.file_type().is_symlink()) {
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!(
                    "{} is a link to another place; gliss writes only inside the measurement folder: remove the link, or choose another --out",
                    plots.display()
                ),
            ));
        }
        fs::create_dir_all(&plots).map_err(|e| Error::io("create the folder", &plots, &e))?;
        self.mark_replacing()
    }

    /// Rewrites a complete manifest.json as incomplete, naming
    /// [`REPLACING`] as its problem and keeping everything else (the
    /// recorded hashes of the raw files among it).
    fn mark_replacing(&self) -> Result<()> {
        let path = self.dir.join("manifest.json");
        let Ok(bytes) = fs::read(&path) else {
            return Ok(());
        };
        let Ok(mut m) = serde_json::from_slice::<serde_json::Value>(&bytes) else {
            return Ok(());
        };
        if m.get("complete").and_then(serde_json::Value::as_bool) != Some(true) {
            return Ok(());
        }
        m["complete"] = serde_json::Value::Bool(false);
        m["problems"] = serde_json::json!([REPLACING]);
        let bytes = serde_json::to_vec_pretty(&m).map_err(|e| {
            Error::new(
                ErrorKind::Io,
                format!("could not mark {} as being replaced: {e}", path.display()),
            )
        })?;
        self.write_durable("manifest.json", &bytes)?;
        // the old derived set goes: a re-analysis that draws no plots, or
        // no distortion, must not leave the old ones lying unlisted beside
        // the new results (the manifest, marked above, says the folder is
        // being replaced until the new one is committed)
        let old: Vec<FileEntry> = m
            .get("files")
            .cloned()
            .and_then(|f| serde_json::from_value(f).ok())
            .unwrap_or_default();
        for f in old.iter().filter(|f| f.role == FileRole::Derived) {
            let inside = Path::new(&f.name)
                .components()
                .all(|c| matches!(c, std::path::Component::Normal(_)));
            if inside && f.name != "manifest.json" {
                let _ = fs::remove_file(self.dir.join(&f.name));
            }
        }
        Ok(())
    }

    /// Writes the derived file `rel` through a temporary name, with its
    /// bytes on disk before the rename (the manifest, whose rename is the
    /// commit point).
    fn write_durable(&self, rel: &str, bytes: &[u8]) -> Result<()> {
        let tmp = self.temp_path(rel);
        let written = fs::File::create(&tmp).and_then(|mut f| {
            f.write_all(bytes)?;
            f.sync_all()
        });
        if let Err(e) = written {
            let _ = fs::remove_file(&tmp);
            return Err(self.failed("write", &self.dir.join(rel), bytes.len(), &e));
        }
        self.commit(&tmp, rel)
    }

    /// Keeps every file this run writes even if it fails: a measurement's
    /// capture, which cannot be made again by running the command again.
    pub fn keep_on_failure(&self) {
        self.lock_written().keep = true;
    }

    /// What this run wrote.
    fn lock_written(&self) -> std::sync::MutexGuard<'_, Written> {
        self.written.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// Notes that this run created `path` (`bytes` long).
    fn created(&self, path: PathBuf, bytes: u64) {
        let mut w = self.lock_written();
        w.bytes += bytes;
        if !w.files.contains(&path) {
            w.files.push(path);
        }
    }

    /// The error of a failed write of `path` (`len` bytes), with what the
    /// run needed and what it did about it when the disk was full.
    fn failed(&self, doing: &str, path: &Path, len: usize, e: &std::io::Error) -> Error {
        let err = Error::io(doing, path, e);
        if err.kind() == ErrorKind::DiskFull {
            self.disk_full(err, len as u64)
        } else {
            err
        }
    }

    /// Adds to a disk-full error how much room this run had, and so how
    /// much it needs at least (what it had written, plus the `more` bytes
    /// of the file it was writing, plus what was still free), and what
    /// happens to what it wrote.
    pub fn disk_full(&self, err: Error, more: u64) -> Error {
        let w = self.lock_written();
        let b = crate::model::units::bytes;
        let room = match fs4::available_space(&self.dir) {
            Ok(free) => format!(
                "this run needs more than the {} the disk had for it ({} written when it filled)",
                b(w.bytes + more + free),
                b(w.bytes + more)
            ),
            Err(_) => format!(
                "this run needs more than the {} it had written when the disk filled",
                b(w.bytes + more)
            ),
        };
        let kept = if w.keep {
            "what was recorded is kept"
        } else {
            "what this run wrote has been removed"
        };
        err.with_advice(&format!(
            "{room}; {kept}: free more space, or choose another --out, and run again"
        ))
    }

    /// Writes a raw file once: if it already exists with the same bytes it
    /// is kept as it is; otherwise it is created, never replaced. Returns
    /// its SHA-256.
    pub fn write_raw(&self, name: &str, bytes: &[u8]) -> Result<String> {
        self.write_raw_hashed(name, bytes, sha256_hex(bytes))
    }

    /// [`MeasurementFolder::write_raw`] of bytes whose SHA-256 (lowercase
    /// hex) the caller has already taken, so that they are not hashed
    /// twice: `hash` must be [`sha256_hex`] of exactly `bytes`, as it is
    /// recorded in the manifest.
    pub fn write_raw_hashed(&self, name: &str, bytes: &[u8], hash: String) -> Result<String> {
        debug_assert_eq!(
            hash,
            sha256_hex(bytes),
            "the hash given is not that of the bytes"
        );
        let path = self.dir.join(name);
        if path.exists() {
            let old = fs::read(&path).map_err(|e| Error::io("read", &path, &e))?;
            if sha256_hex(&old) == hash {
                return Ok(hash);
            }
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!(
                    "{} exists and differs; raw files are never replaced",
                    path.display()
                ),
            ));
        }
        let mut f = fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
            .map_err(|e| self.failed("create", &path, bytes.len(), &e))?;
        if let Err(e) = f.write_all(bytes).and_then(|_| f.sync_all()) {
            // the file is this run's own copy: a half-written one goes
            drop(f);
            if !self.lock_written().keep {
                let _ = fs::remove_file(&path);
            }
            return Err(self.failed("write", &path, bytes.len(), &e));
        }
        self.created(path, bytes.len() as u64);
        Ok(hash)
    }

    /// A temporary path for the derived file `rel`: `.partial-PID-NAME`
    /// beside it, unique to this run (it keeps the extension, which some
    /// writers need).
    pub fn temp_path(&self, rel: &str) -> PathBuf {
        let path = self.dir.join(rel);
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        path.with_file_name(format!("{PARTIAL_PREFIX}{}-{name}", std::process::id()))
    }

    /// Moves a finished temporary file into place as `rel`.
    pub fn commit(&self, temp: &Path, rel: &str) -> Result<()> {
        let path = self.dir.join(rel);
        if RAW_FILES.contains(&rel) {
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!("refusing to replace the raw file {}", path.display()),
            ));
        }
        let len = fs::metadata(temp).map_or(0, |m| m.len());
        // a file replaced (the manifest marked as being replaced) is not
        // this run's to take away
        let new = !path.exists();
        fs::rename(temp, &path).map_err(|e| Error::io("move into place", &path, &e))?;
        if new {
            self.created(path, len);
        }
        Ok(())
    }

    /// Writes the derived file `rel` through a temporary name (the
    /// manifest also synced to disk before its rename).
    pub fn write_derived(&self, rel: &str, bytes: &[u8]) -> Result<()> {
        if rel == "manifest.json" {
            // the run's record is written: from here a failure keeps it
            self.write_durable(rel, bytes)?;
            self.lock_written().manifest = true;
            return Ok(());
        }
        let tmp = self.temp_path(rel);
        if let Err(e) = fs::write(&tmp, bytes) {
            let _ = fs::remove_file(&tmp);
            return Err(self.failed("write", &self.dir.join(rel), bytes.len(), &e));
        }
        self.commit(&tmp, rel)
    }

    /// Writes the derived file `rel` and returns its manifest entry.
    pub fn derived_entry(&self, rel: &str, bytes: &[u8]) -> Result<FileEntry> {
        self.write_derived(rel, bytes)?;
        Ok(derived(rel, bytes))
    }

    /// Draws the derived file `rel` (a plot) with `draw`, which writes it
    /// to the temporary path it is given, moves it into place and returns
    /// its manifest entry.
    pub fn draw(&self, rel: &str, draw: impl FnOnce(&Path) -> Result<()>) -> Result<FileEntry> {
        let tmp = self.temp_path(rel);
        if let Err(e) = draw(&tmp) {
            let len = fs::metadata(&tmp).map_or(0, |m| m.len());
            let _ = fs::remove_file(&tmp);
            return Err(if e.kind() == ErrorKind::DiskFull {
                self.disk_full(e, len)
            } else {
                e
            });
        }
        self.commit_entry(&tmp, rel)
    }

    /// Draws every plot of `kinds` with `draw` (as [`Self::draw`]), in
    /// parallel: the plots of a folder are independent. Their entries
    /// come back in the order of `kinds`; the first error is returned.
    pub fn draw_all(
        &self,
        kinds: Vec<crate::model::PlotKind>,
        draw: impl Fn(crate::model::PlotKind, &Path) -> Result<()> + Sync,
    ) -> Result<Vec<FileEntry>> {
        use rayon::prelude::*;
        kinds
            .into_par_iter()
            .map(|kind| self.draw(kind.file(), |tmp| draw(kind, tmp)))
            .collect()
    }

    /// Moves a finished temporary derived file (a plot its writer drew to
    /// `temp`) into place as `rel` and returns its manifest entry.
    pub fn commit_entry(&self, temp: &Path, rel: &str) -> Result<FileEntry> {
        let bytes = fs::read(temp).map_err(|e| Error::io("read", temp, &e))?;
        self.commit(temp, rel)?;
        Ok(derived(rel, &bytes))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_matches_the_fips_180_example() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc")
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn raw_files_are_kept_and_never_replaced() {
        let t = tempfile::tempdir().unwrap();
        let dir = t.path().join("m");
        let f = MeasurementFolder::check(&dir, false, &[]).unwrap();
        f.create().unwrap();
        f.write_raw("recording.wav", b"one").unwrap();
        assert!(f.write_raw("recording.wav", b"one").is_ok());
        assert!(f.write_raw("recording.wav", b"two").is_err());
        assert_eq!(fs::read(dir.join("recording.wav")).unwrap(), b"one");
        assert!(f.write_derived("recording.wav", b"x").is_err());
        assert_eq!(fs::read(dir.join("recording.wav")).unwrap(), b"one");
        f.write_derived("manifest.json", b"{}").unwrap();
        drop(f); // the writer's lock goes with it
        // a non-empty folder is refused without --overwrite
        assert!(MeasurementFolder::check(&dir, false, &[]).is_err());
        // and with it, only when the raw files agree
        assert!(MeasurementFolder::check(&dir, true, &[("recording.wav", b"one")]).is_ok());
        assert!(MeasurementFolder::check(&dir, true, &[("recording.wav", b"two")]).is_err());
    }

    #[test]
    fn a_run_that_fails_before_its_manifest_takes_away_what_it_wrote() {
        let t = tempfile::tempdir().unwrap();
        // a new folder: everything goes, the folder too
        let dir = t.path().join("new");
        let f = MeasurementFolder::check(&dir, false, &[]).unwrap();
        f.create().unwrap();
        f.write_raw("recording.wav", b"raw").unwrap();
        f.write_derived("results.json", b"{}").unwrap();
        let tmp = f.temp_path("plots/response.png");
        fs::write(&tmp, b"half a plot").unwrap();
        drop(f); // an error on the way: no manifest written
        assert!(!dir.exists(), "{:?}", fs::read_dir(&dir).map(|d| d.count()));
        // a measurement keeps what it wrote
        let dir = t.path().join("measured");
        let f = MeasurementFolder::check(&dir, false, &[]).unwrap();
        f.create().unwrap();
        f.write_raw("recording.wav", b"raw").unwrap();
        f.keep_on_failure();
        f.write_derived("impulse.wav", b"ir").unwrap();
        drop(f);
        assert_eq!(fs::read(dir.join("recording.wav")).unwrap(), b"raw");
        // a re-analysis: the raw files and the marked manifest stay, the
        // new derived files go
        let dir = t.path().join("again");
        let f = MeasurementFolder::check(&dir, false, &[]).unwrap();
        f.create().unwrap();
        let hash = f.write_raw("recording.wav", b"raw").unwrap();
        let manifest = serde_json::json!({
            "complete": true,
            "files": [{"name": "recording.wav", "role": "raw", "sha256": hash}],
        });
        f.write_derived("manifest.json", manifest.to_string().as_bytes())
            .unwrap();
        drop(f);
        let f = MeasurementFolder::check(&dir, true, &[("recording.wav", b"raw")]).unwrap();
        f.create().unwrap();
        f.write_derived("results.json", b"{}").unwrap();
        drop(f);
        let mut left: Vec<String> = fs::read_dir(&dir)
            .unwrap()
            .flatten()
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .collect();
        left.sort();
        assert_eq!(left, ["manifest.json", "plots", "recording.wav"]);
        let m: serde_json::Value =
            serde_json::from_slice(&fs::read(dir.join("manifest.json")).unwrap()).unwrap();
        assert_eq!(m["complete"], false);
    }

    #[test]
    fn a_second_writer_of_a_locked_folder_is_refused() {
        let t = tempfile::tempdir().unwrap();
        let dir = t.path().join("new/m");
        let first = MeasurementFolder::check(&dir, false, &[]).unwrap();
        assert!(
            dir.join(LOCK_FILE).is_file(),
            "the lock lives in the folder"
        );
        let e = MeasurementFolder::check(&dir, false, &[]).unwrap_err();
        let pid = format!("(pid {})", std::process::id());
        assert!(
            e.message()
                .contains("is being written by another gliss run")
                && e.message().contains(&pid)
                && e.message().contains("choose another --out"),
            "{e}"
        );
        // --overwrite does not get past it either
        assert!(MeasurementFolder::check(&dir, true, &[]).is_err());
        drop(first);
        // the folder (and its parent) this run made and left empty are gone
        assert!(!t.path().join("new").exists());
        // released on drop: the next run takes it
        let again = MeasurementFolder::check(&dir, false, &[]).unwrap();
        again.create().unwrap();
        again.write_derived("manifest.json", b"{}").unwrap();
        drop(again);
        assert!(
            dir.join("manifest.json").is_file(),
            "a written folder stays"
        );
        #[cfg(unix)]
        assert!(!dir.join(LOCK_FILE).exists(), "the lock file goes on drop");
    }

    #[test]
    fn leftovers_of_a_dead_run_are_removed_by_the_next() {
        let t = tempfile::tempdir().unwrap();
        let dir = t.path().join("m");
        fs::create_dir_all(dir.join("plots")).unwrap();
        fs::write(dir.join(".partial-99999-results.json"), b"half").unwrap();
        fs::write(dir.join("plots/.partial-99999-response.png"), b"half").unwrap();
        // a stale lock file, not held by anyone, is no obstacle
        fs::write(dir.join(LOCK_FILE), b"99999").unwrap();
        // without --overwrite too: once they are gone, the folder is empty
        let f = MeasurementFolder::check(&dir, false, &[]).unwrap();
        assert!(!dir.join(".partial-99999-results.json").exists());
        assert!(!dir.join("plots/.partial-99999-response.png").exists());
        // this run's temporary names carry its process id
        let tmp = f.temp_path("plots/response.png");
        assert_eq!(
            tmp.file_name().unwrap().to_string_lossy(),
            format!(".partial-{}-response.png", std::process::id())
        );
    }

    #[test]
    fn replacing_marks_the_old_manifest_before_anything_is_written() {
        let t = tempfile::tempdir().unwrap();
        let dir = t.path().join("m");
        let f = MeasurementFolder::check(&dir, false, &[]).unwrap();
        f.create().unwrap();
        f.write_raw("recording.wav", b"one").unwrap();
        let manifest = serde_json::json!({
            "complete": true,
            "files": [{"name": "recording.wav", "role": "raw", "sha256": sha256_hex(b"one")}],
        });
        f.write_derived("manifest.json", manifest.to_string().as_bytes())
            .unwrap();
        drop(f);
        let f = MeasurementFolder::check(&dir, true, &[("recording.wav", b"one")]).unwrap();
        f.create().unwrap();
        let m: serde_json::Value =
            serde_json::from_slice(&fs::read(dir.join("manifest.json")).unwrap()).unwrap();
        assert_eq!(m["complete"], false);
        assert_eq!(m["problems"][0], REPLACING);
        assert_eq!(m["files"], manifest["files"], "the raw hashes are kept");
        assert_eq!(fs::read(dir.join("recording.wav")).unwrap(), b"one");
    }

    #[cfg(unix)]
    #[test]
    fn a_plots_link_to_elsewhere_is_refused() {
        let t = tempfile::tempdir().unwrap();
        let elsewhere = t.path().join("elsewhere");
        fs::create_dir(&elsewhere).unwrap();
        let dir = t.path().join("m");
        fs::create_dir(&dir).unwrap();
        std::os::unix::fs::symlink(&elsewhere, dir.join("plots")).unwrap();
        let f = MeasurementFolder::check(&dir, false, &[]).unwrap();
        let e = f.create().unwrap_err();
        assert!(e.message().contains("is a link"), "{e}");
        assert_eq!(fs::read_dir(&elsewhere).unwrap().count(), 0);
    }
}

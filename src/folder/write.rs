//! The measurement folder on disk: raw files written once and never
//! replaced, derived files written to a temporary name and renamed.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::error::{Error, ErrorKind, Result};
use crate::folder::schema::{FileEntry, FileRole};

/// Names of the raw files of a measurement folder.
pub const RAW_FILES: [&str; 2] = ["stimulus.wav", "recording.wav"];

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

/// A measurement folder about to be written.
#[derive(Debug, Clone)]
pub struct MeasurementFolder {
    dir: PathBuf,
}

impl MeasurementFolder {
    /// Checks that `dir` can take a new measurement: it must not exist, or
    /// be empty, or — with `overwrite` — hold only a measurement whose raw
    /// files equal `raw` (name, bytes), which are then kept. Writes nothing.
    pub fn check(dir: &Path, overwrite: bool, raw: &[(&str, &[u8])]) -> Result<Self> {
        let folder = MeasurementFolder {
            dir: dir.to_path_buf(),
        };
        if !dir.exists() {
            return Ok(folder);
        }
        if !dir.is_dir() {
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!(
                    "{} exists and is not a folder; choose another --out",
                    dir.display()
                ),
            ));
        }
        let mut entries = fs::read_dir(dir).map_err(|e| Error::io("read the folder", dir, &e))?;
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
        if let Ok(m) = crate::folder::read_manifest(dir) {
            crate::folder::check_files(dir, &m.files, crate::folder::OpenOptions::default())?;
        }
        for (name, bytes) in raw {
            let path = dir.join(name);
            if path.exists() {
                let old = fs::read(&path).map_err(|e| Error::io("read", &path, &e))?;
                if sha256_hex(&old) != sha256_hex(bytes) {
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

    /// Creates the folder and its plots/ subfolder.
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
        fs::create_dir_all(&plots).map_err(|e| Error::io("create the folder", &plots, &e))
    }

    /// Writes a raw file once: if it already exists with the same bytes it
    /// is kept as it is; otherwise it is created, never replaced. Returns
    /// its SHA-256.
    pub fn write_raw(&self, name: &str, bytes: &[u8]) -> Result<String> {
        let path = self.dir.join(name);
        let hash = sha256_hex(bytes);
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
            .map_err(|e| Error::io("create", &path, &e))?;
        f.write_all(bytes)
            .and_then(|_| f.sync_all())
            .map_err(|e| Error::io("write", &path, &e))?;
        Ok(hash)
    }

    /// A temporary path for the derived file `rel` (keeps its extension,
    /// which some writers need).
    pub fn temp_path(&self, rel: &str) -> PathBuf {
        let path = self.dir.join(rel);
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        path.with_file_name(format!(".partial-{name}"))
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
        fs::rename(temp, &path).map_err(|e| Error::io("move into place", &path, &e))
    }

    /// Writes the derived file `rel` through a temporary name.
    pub fn write_derived(&self, rel: &str, bytes: &[u8]) -> Result<()> {
        let tmp = self.temp_path(rel);
        fs::write(&tmp, bytes).map_err(|e| Error::io("write", &tmp, &e))?;
        self.commit(&tmp, rel)
    }

    /// Writes the derived file `rel` and returns its manifest entry.
    pub fn derived_entry(&self, rel: &str, bytes: &[u8]) -> Result<FileEntry> {
        self.write_derived(rel, bytes)?;
        Ok(derived(rel, bytes))
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
        // a non-empty folder is refused without --overwrite
        assert!(MeasurementFolder::check(&dir, false, &[]).is_err());
        // and with it, only when the raw files agree
        assert!(MeasurementFolder::check(&dir, true, &[("recording.wav", b"one")]).is_ok());
        assert!(MeasurementFolder::check(&dir, true, &[("recording.wav", b"two")]).is_err());
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
        let f = MeasurementFolder { dir: dir.clone() };
        let e = f.create().unwrap_err();
        assert!(e.message().contains("is a link"), "{e}");
        assert_eq!(fs::read_dir(&elsewhere).unwrap().count(), 0);
    }
}

//! The measurement folder: one schema for every kind gliss writes
//! ([`schema`]), the writer that keeps raw files sacred ([`write`](mod@write)), and
//! one reader, [`open`], through which every later command (re-analysis,
//! average, compare, export, report) enters a folder.
//!
//! [`open`] reads manifest.json, refuses an incomplete folder, checks every
//! file the manifest lists against its SHA-256 and refuses a folder whose
//! raw files are not the ones it recorded or whose results.json (or
//! comparison.json) is not the one it lists (an interrupted re-analysis),
//! then reads results.json or comparison.json into the shared types. It
//! takes no lock: a writer commits by renaming the manifest into place last
//! (see [`write`](mod@write)), so a reader sees the old folder, the new one,
//! or a refusal.

pub mod schema;
pub mod write;

use std::fs;
use std::path::{Component, Path, PathBuf};

use crate::error::{Error, Result};
use schema::{
    AlignManifest, Comparison, ComparisonManifest, DirectivityFile, DirectivityManifest, FileEntry,
    FileRole, FolderKind, Manifest, NoiseManifest, Results, TuningFile, TuningManifest,
};
pub use write::{MeasurementFolder, sha256_hex};

/// How a file of a folder compares with the SHA-256 its manifest recorded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FileState {
    /// The bytes match the recorded hash.
    Matches,
    /// The file is there but its bytes differ.
    Differs,
    /// The file is not there.
    Missing,
}

/// One file the manifest lists, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct FileCheck {
    /// The manifest's entry (name, role, recorded hash).
    pub entry: FileEntry,
    /// What the file on disk is now.
    pub state: FileState,
}

/// What a folder holds, read into the shared types.
#[derive(Debug, Clone)]
pub enum Content {
    /// A measurement or an average: manifest.json and results.json.
    Measurement {
        /// The manifest.
        manifest: Box<Manifest>,
        /// The results.
        results: Box<Results>,
    },
    /// A comparison: its manifest and comparison.json.
    Comparison {
        /// The manifest.
        manifest: Box<ComparisonManifest>,
        /// The comparison.
        comparison: Box<Comparison>,
    },
    /// An alignment of several loudspeakers: its manifest and align.json.
    Align {
        /// The manifest.
        manifest: Box<AlignManifest>,
        /// align.json.
        alignment: Box<crate::analysis::align::Alignment>,
    },
    /// A directivity folder: its manifest and directivity.json (read by
    /// [`open_directivity`]; [`open`] refuses it by name).
    Directivity {
        /// The manifest.
        manifest: Box<DirectivityManifest>,
        /// directivity.json.
        directivity: Box<DirectivityFile>,
    },
    /// A tuning: its manifest and tuning.json (read by [`open_tuning`];
    /// [`open`] refuses a tuning folder).
    Tuning {
        /// The manifest.
        manifest: Box<TuningManifest>,
        /// The filters and their predicted effect.
        tuning: Box<TuningFile>,
    },
}

/// A folder gliss wrote, opened and checked.
#[derive(Debug, Clone)]
pub struct Folder {
    /// The folder as given.
    pub dir: PathBuf,
    /// What it holds.
    pub kind: FolderKind,
    /// SHA-256 of its manifest.json (which lists the hash of every file).
    pub manifest_sha256: String,
    /// SHA-256 of its results.json or comparison.json.
    pub content_sha256: String,
    /// Every file the manifest lists, checked against its hash.
    pub files: Vec<FileCheck>,
    /// The manifest and results, or the comparison.
    pub content: Content,
}

/// What [`open_with`] accepts.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct OpenOptions {
    /// Open a folder whose raw files no longer match their manifest
    /// (for a report that shows the damage); everything else refuses it.
    pub allow_changed_raw: bool,
}

/// Opens a folder that gliss wrote: it must be complete and its raw files
/// must be the ones its manifest recorded.
///
/// ```
/// use gliss::model::{Fraction, Parameter};
/// let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
///     .join("measurements/rehearsal-room/before-1");
/// let f = gliss::folder::open(&dir)?;
/// let (_, results) = f.measurement("give a measurement folder")?;
/// let t30_1k = results
///     .bands
///     .iter()
///     .find(|b| b.is(Fraction::Octave, 1000.0))
///     .and_then(|b| b.get(Parameter::T30))
///     .expect("the example room has a T30 at 1 kHz");
/// assert!(t30_1k > 0.3 && t30_1k < 1.0);
/// # Ok::<(), gliss::Error>(())
/// ```
pub fn open(dir: &Path) -> Result<Folder> {
    open_with(dir, OpenOptions::default())
}

/// Opens a folder with `options`; see [`open`].
pub fn open_with(dir: &Path, options: OpenOptions) -> Result<Folder> {
    let name = dir.display();
    if !dir.is_dir() {
        return Err(Error::input(format!(
            "{name} is not a folder; give folders written by gliss (measure, analyze, impedance, demo, average or compare)"
        )));
    }
    let mpath = dir.join("manifest.json");
    if !mpath.is_file() {
        return Err(Error::input(format!(
            "{name} is not a measurement folder: it has no manifest.json; give folders written by gliss measure, analyze, demo, average or compare"
        )));
    }
    let mbytes = fs::read(&mpath).map_err(|e| Error::io("read", &mpath, &e))?;
    let value: serde_json::Value = serde_json::from_slice(&mbytes).map_err(|e| {
        Error::input(format!(
            "{name}/manifest.json is not valid JSON ({e}); the folder is damaged: analyse its raw files again into a new folder"
        ))
    })?;
    let is_comparison =
        |v: Option<&serde_json::Value>| v.and_then(serde_json::Value::as_str) == Some("comparison");
    let comparison = is_comparison(value.get("kind"))
        || is_comparison(value.get("source").and_then(|s| s.get("kind")));
    let again = if comparison {
        "gliss compare ... --overwrite"
    } else if value.get("kind").and_then(serde_json::Value::as_str) == Some("average") {
        "gliss average ... --overwrite"
    } else if value.get("kind").and_then(serde_json::Value::as_str) == Some("impedance") {
        "gliss impedance ... --overwrite"
    } else {
        "gliss analyze ... --overwrite"
    };
    let problems = value.get("problems").and_then(|p| p.as_array());
    if value.get("complete").and_then(serde_json::Value::as_bool) == Some(false) {
        if problems.is_some_and(|p| p.iter().any(|x| x.as_str() == Some(write::REPLACING))) {
            return Err(Error::input(format!(
                "{name} holds an interrupted re-analysis: its derived files were being replaced when that run stopped; run the analysis again with --overwrite ({again}; the raw files are kept)"
            )));
        }
        let why = problems
            .map(|p| {
                p.iter()
                    .filter_map(|x| x.as_str())
                    .collect::<Vec<_>>()
                    .join("; ")
            })
            .filter(|w| !w.is_empty())
            .unwrap_or_else(|| "it was interrupted".into());
        return Err(Error::input(format!(
            "{name} is an incomplete measurement ({why}); it has no results: measure again, or analyse its recording.wav with gliss analyze into a new folder"
        )));
    }
    if value.get("kind").and_then(serde_json::Value::as_str) == Some("noise") {
        return Err(Error::input(format!(
            "{name} is a noise folder (gliss noise): it holds the room's background noise, not a measurement; give it to gliss analyze, measure or demo as --noise {name}, and report the room measurement"
        )));
    }
    if value.get("kind").and_then(serde_json::Value::as_str) == Some("align") {
        return open_align(dir, value, &mbytes, options);
    }
    if value.get("kind").and_then(serde_json::Value::as_str) == Some("directivity") {
        return Err(Error::input(format!(
            "{name} is a directivity folder (gliss directivity): it holds a loudspeaker's responses by angle and the spatial averages, not a measurement; report it with gliss report {name}, or give its measurement folders"
        )));
    }
    if value.get("kind").and_then(serde_json::Value::as_str) == Some("tuning") {
        return Err(Error::input(format!(
            "{name} is a tuning folder (gliss tune): it holds correction filters, not a measurement; give it to gliss report, or to gliss compare beside a measurement (its predicted response is compared), type its filters.txt into the processor, and measure again to see the result"
        )));
    }
    let not_ours = |e: serde_json::Error| {
        Error::input(format!(
            "{name}/manifest.json is not a gliss manifest ({e}); give folders written by gliss"
        ))
    };
    if comparison {
        let manifest: ComparisonManifest = serde_json::from_value(value).map_err(not_ours)?;
        let files = check_files(dir, &manifest.files, options)?;
        let (bytes, sha) = read_content(dir, "comparison.json", "run gliss compare again")?;
        content_matches(dir, "comparison.json", &sha, &files, again)?;
        let mut c: Comparison = serde_json::from_slice(&bytes).map_err(|e| {
            Error::input(format!(
                "{name}/comparison.json does not parse ({e}); run gliss compare again into a new folder"
            ))
        })?;
        c.fill_missing_verdicts();
        return Ok(Folder {
            dir: dir.to_path_buf(),
            kind: FolderKind::Comparison,
            manifest_sha256: sha256_hex(&mbytes),
            content_sha256: sha,
            files,
            content: Content::Comparison {
                manifest: Box::new(manifest),
                comparison: Box::new(c),
            },
        });
    }
    let manifest: Manifest = serde_json::from_value(value).map_err(not_ours)?;
    let files = check_files(dir, &manifest.files, options)?;
    let (bytes, sha) = read_content(
        dir,
        "results.json",
        "analyse its raw files again (gliss analyze ... --overwrite)",
    )?;
    content_matches(dir, "results.json", &sha, &files, again)?;
    let results: Results = serde_json::from_slice(&bytes).map_err(|e| {
        Error::input(format!(
            "{name}/results.json is not a gliss results file ({e}); analyse its raw files again (gliss analyze ... --overwrite)"
        ))
    })?;
    check_consistent(dir, &manifest, &results)?;
    Ok(Folder {
        dir: dir.to_path_buf(),
        kind: manifest.kind.unwrap_or(FolderKind::Measurement),
        manifest_sha256: sha256_hex(&mbytes),
        content_sha256: sha,
        files,
        content: Content::Measurement {
            manifest: Box::new(manifest),
            results: Box::new(results),
        },
    })
}

/// The alignment branch of [`open_with`]: its manifest, every listed file
/// checked, align.json the one listed.
fn open_align(
    dir: &Path,
    value: serde_json::Value,
    mbytes: &[u8],
    options: OpenOptions,
) -> Result<Folder> {
    let name = dir.display();
    let manifest: AlignManifest = serde_json::from_value(value).map_err(|e| {
        Error::input(format!(
            "{name}/manifest.json is not a gliss alignment manifest ({e}); run gliss align again into a new folder"
        ))
    })?;
    let files = check_files(dir, &manifest.files, options)?;
    let again = "gliss align ... --overwrite";
    let (bytes, sha) = read_content(dir, "align.json", "run gliss align again")?;
    content_matches(dir, "align.json", &sha, &files, again)?;
    let alignment: crate::analysis::align::Alignment =
        serde_json::from_slice(&bytes).map_err(|e| {
            Error::input(format!(
                "{name}/align.json does not parse ({e}); run gliss align again into a new folder"
            ))
        })?;
    Ok(Folder {
        dir: dir.to_path_buf(),
        kind: FolderKind::Align,
        manifest_sha256: sha256_hex(mbytes),
        content_sha256: sha,
        files,
        content: Content::Align {
            manifest: Box::new(manifest),
            alignment: Box::new(alignment),
        },
    })
}

/// Reads the manifest of a measurement folder as it is, complete or not
/// and without checking its files: for what needs only the manifest's
/// record of the sweep or the files (re-analysing an interrupted
/// measurement's recording, checking a folder before replacing its derived
/// files). Everything else opens the folder with [`open`].
pub fn read_manifest(dir: &Path) -> Result<Manifest> {
    let path = dir.join("manifest.json");
    let bytes = fs::read(&path).map_err(|e| Error::io("read", &path, &e))?;
    serde_json::from_slice(&bytes).map_err(|e| {
        Error::input(format!(
            "{} is not a gliss measurement manifest ({e}); give folders written by gliss",
            path.display()
        ))
    })
}

/// A manifest and results that contradict each other, or a rate no sound
/// card records at, are a folder that lies: refused, naming what.
fn check_consistent(dir: &Path, m: &Manifest, r: &Results) -> Result<()> {
    let name = dir.display();
    let (lo, hi) = crate::signal::sweep::RATE_RANGE_HZ;
    if m.sample_rate_hz != r.sample_rate_hz || !(lo..=hi).contains(&r.sample_rate_hz) {
        return Err(Error::input(format!(
            "{name} does not hold together: its manifest says {} Hz and its results {} Hz (gliss measures at {lo} to {hi} Hz); analyse its raw files again into a new folder",
            m.sample_rate_hz, r.sample_rate_hz
        )));
    }
    if m.sweep.params.sample_rate_hz != m.sample_rate_hz {
        return Err(Error::input(format!(
            "{name} does not hold together: its sweep is at {} Hz but the folder at {} Hz; analyse its raw files again into a new folder",
            m.sweep.params.sample_rate_hz, m.sample_rate_hz
        )));
    }
    Ok(())
}

/// Reads `file` of the folder with its SHA-256; `redo` says how to make it
/// again when it is missing.
fn read_content(dir: &Path, file: &str, redo: &str) -> Result<(Vec<u8>, String)> {
    let path = dir.join(file);
    let bytes = fs::read(&path).map_err(|e| {
        if e.kind() == std::io::ErrorKind::NotFound {
            Error::input(format!("{} has no {file}; {redo}", dir.display()))
        } else {
            Error::io("read", &path, &e)
        }
    })?;
    let sha = sha256_hex(&bytes);
    Ok((bytes, sha))
}

/// Refuses a folder whose `file` (results.json or comparison.json, SHA-256
/// `sha`) is not the one its manifest lists: a re-analysis that was cut off
/// between writing it and its manifest (or an edit). `again` is the command
/// that makes the folder again.
fn content_matches(
    dir: &Path,
    file: &str,
    sha: &str,
    files: &[FileCheck],
    again: &str,
) -> Result<()> {
    let listed = files.iter().find(|f| f.entry.name == file);
    if listed.is_some_and(|f| !f.entry.sha256.eq_ignore_ascii_case(sha)) {
        return Err(Error::input(format!(
            "{}/{file} does not match the SHA-256 its manifest recorded: a re-analysis was interrupted (or the file was changed); run the analysis again with --overwrite ({again}; the raw files are kept)",
            dir.display()
        )));
    }
    Ok(())
}

/// Checks every file the manifest lists (inside the folder) against its
/// hash; a raw file that is missing or changed refuses the folder unless
/// `options` allow it.
pub(crate) fn check_files(
    dir: &Path,
    entries: &[FileEntry],
    options: OpenOptions,
) -> Result<Vec<FileCheck>> {
    let mut out = Vec::new();
    for entry in entries {
        // only paths inside the folder are checked
        let inside = !entry.name.is_empty()
            && Path::new(&entry.name)
                .components()
                .all(|c| matches!(c, Component::Normal(_)));
        if !inside {
            continue;
        }
        let state = match fs::read(dir.join(&entry.name)) {
            Ok(bytes) if sha256_hex(&bytes).eq_ignore_ascii_case(&entry.sha256) => {
                FileState::Matches
            }
            Ok(_) => FileState::Differs,
            Err(_) => FileState::Missing,
        };
        if entry.role == FileRole::Raw && state != FileState::Matches && !options.allow_changed_raw
        {
            return Err(Error::input(changed_raw_message(dir, &entry.name, state)));
        }
        out.push(FileCheck {
            entry: entry.clone(),
            state,
        });
    }
    Ok(out)
}

/// The refusal of a folder whose raw file `name` is not the one its
/// manifest recorded.
fn changed_raw_message(dir: &Path, name: &str, state: FileState) -> String {
    let path = dir.join(name);
    let what = match state {
        FileState::Missing => "is missing",
        _ => {
            "does not match the SHA-256 its manifest recorded (it was changed after the measurement)"
        }
    };
    format!(
        "the raw file {} {what}; gliss never works from a raw file it cannot vouch for: restore the original from a backup, or measure again into a new folder",
        path.display()
    )
}

impl Folder {
    /// The folder's label: its last path component.
    pub fn label(&self) -> String {
        self.dir
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| self.dir.display().to_string())
    }

    /// How a folder made from this one records it: the folder as given,
    /// `label` (or the folder's last component) and the SHA-256 of its
    /// manifest and of its results.
    pub fn input_record(&self, label: Option<&str>) -> schema::InputRecord {
        schema::InputRecord {
            folder: self.dir.display().to_string(),
            label: label.map_or_else(|| self.label(), str::to_string),
            sha256: self.manifest_sha256.clone(),
            results_sha256: self.content_sha256.clone(),
        }
    }

    /// The manifest and results of a measurement or an average; a
    /// comparison is refused with `why` (what the caller needs instead).
    pub fn measurement(&self, why: &str) -> Result<(&Manifest, &Results)> {
        match &self.content {
            Content::Measurement { manifest, results } => Ok((manifest, results)),
            _ => Err(self.not_a_measurement(why)),
        }
    }

    /// [`Folder::measurement`], taking the manifest and results out of the
    /// folder instead of lending them.
    pub fn into_measurement(self, why: &str) -> Result<(Manifest, Results)> {
        match self.content {
            Content::Measurement { manifest, results } => Ok((*manifest, *results)),
            _ => Err(self.not_a_measurement(why)),
        }
    }

    #[cold]
    fn not_a_measurement(&self, why: &str) -> Error {
        Error::input(format!(
            "{} is {}, not a measurement; {why}",
            self.dir.display(),
            self.kind.words()
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_folder_without_a_manifest_is_refused_by_name() {
        let t = tempfile::tempdir().unwrap();
        let e = open(t.path()).unwrap_err();
        assert!(e.message().contains("has no manifest.json"), "{e}");
        let e = open(&t.path().join("nowhere")).unwrap_err();
        assert!(e.message().contains("is not a folder"), "{e}");
    }
}

/// A noise folder, opened and checked.
#[derive(Debug, Clone)]
pub struct NoiseFolder {
    /// The folder as given.
    pub dir: PathBuf,
    /// SHA-256 of its manifest.json.
    pub manifest_sha256: String,
    /// The manifest.
    pub manifest: NoiseManifest,
    /// The levels (noise.json).
    pub noise: crate::analysis::noise::NoiseLevels,
}

/// The manifest of a folder of one kind (noise, tuning, directivity), for
/// its one reader: the folder must have a manifest.json whose `kind` is
/// `kind` and which says it is complete; `what` names such a folder ("a
/// noise folder"), `made_by` the commands that write one, `again` what to
/// do when it is damaged. Returns the manifest and its bytes (for their
/// SHA-256).
fn kind_manifest<M: serde::de::DeserializeOwned>(
    dir: &Path,
    kind: &str,
    what: &str,
    made_by: &str,
    again: &str,
) -> Result<(M, Vec<u8>)> {
    let name = dir.display();
    let mpath = dir.join("manifest.json");
    if !dir.is_dir() || !mpath.is_file() {
        return Err(Error::input(format!(
            "{name} is not {what} (no manifest.json); give a folder written by {made_by}"
        )));
    }
    let mbytes = fs::read(&mpath).map_err(|e| Error::io("read", &mpath, &e))?;
    let value: serde_json::Value = serde_json::from_slice(&mbytes).map_err(|e| {
        Error::input(format!(
            "{name}/manifest.json is not valid JSON ({e}); {again}"
        ))
    })?;
    if value.get("kind").and_then(serde_json::Value::as_str) != Some(kind) {
        return Err(Error::input(format!(
            "{name} is not {what} (its manifest says it is {}); give a folder written by {made_by}",
            value
                .get("kind")
                .and_then(serde_json::Value::as_str)
                .unwrap_or("a measurement")
        )));
    }
    if value.get("complete").and_then(serde_json::Value::as_bool) != Some(true) {
        let bare = what.split_once(' ').map_or(what, |(_, rest)| rest);
        return Err(Error::input(format!(
            "{name} is an incomplete {bare}; {again}"
        )));
    }
    let manifest: M = serde_json::from_value(value).map_err(|e| {
        Error::input(format!(
            "{name}/manifest.json is not a gliss {kind} manifest ({e}); {again}"
        ))
    })?;
    Ok((manifest, mbytes))
}

/// Opens a noise folder (`gliss noise`, `gliss measure --noise`): the one
/// reader of that kind, with the checks of [`open`] — complete, every
/// listed file matching its SHA-256, noise.json the one listed.
pub fn open_noise(dir: &Path) -> Result<NoiseFolder> {
    let name = dir.display();
    let (manifest, mbytes): (NoiseManifest, Vec<u8>) = kind_manifest(
        dir,
        "noise",
        "a noise folder",
        "gliss noise or gliss measure --noise",
        "record the noise again into a new folder",
    )?;
    let files = check_files(dir, &manifest.files, OpenOptions::default())?;
    let again = "gliss noise ... --overwrite";
    let (bytes, sha) = read_content(
        dir,
        "noise.json",
        "analyse its recording again (gliss noise ... --overwrite)",
    )?;
    content_matches(dir, "noise.json", &sha, &files, again)?;
    let noise = serde_json::from_slice(&bytes).map_err(|e| {
        Error::input(format!(
            "{name}/noise.json is not a gliss noise file ({e}); analyse its recording again (gliss noise ... --overwrite)"
        ))
    })?;
    Ok(NoiseFolder {
        dir: dir.to_path_buf(),
        manifest_sha256: sha256_hex(&mbytes),
        manifest,
        noise,
    })
}

/// A directivity folder, opened and checked.
#[derive(Debug, Clone)]
pub struct DirectivityFolder {
    /// The folder as given.
    pub dir: PathBuf,
    /// SHA-256 of its manifest.json.
    pub manifest_sha256: String,
    /// The manifest.
    pub manifest: DirectivityManifest,
    /// directivity.json.
    pub directivity: DirectivityFile,
    /// SHA-256 of directivity.json.
    pub content_sha256: String,
    /// Every file the manifest lists, checked against its hash.
    pub files: Vec<FileCheck>,
}

/// Whether `dir` holds a manifest.json (a folder gliss wrote, or began
/// to write); only to find a folder, which [`open`] then checks.
pub fn has_manifest(dir: &Path) -> bool {
    dir.join("manifest.json").is_file()
}

/// The `kind` its manifest.json states, when it has a readable one (only
/// to choose the reader; the reader checks everything).
pub fn kind_of(dir: &Path) -> Option<String> {
    fs::read(dir.join("manifest.json"))
        .ok()
        .and_then(|b| serde_json::from_slice::<serde_json::Value>(&b).ok())
        .and_then(|v| v.get("kind").and_then(|k| k.as_str()).map(str::to_string))
}

/// Opens any folder gliss writes that a report shows: a directivity folder
/// through [`open_directivity`], a tuning through [`open_tuning`], every
/// other kind through [`open_with`].
pub fn open_any(dir: &Path, options: OpenOptions) -> Result<Folder> {
    match kind_of(dir).as_deref() {
        Some("directivity") => {
            let d = open_directivity(dir)?;
            Ok(Folder {
                dir: d.dir,
                kind: FolderKind::Directivity,
                manifest_sha256: d.manifest_sha256,
                content_sha256: d.content_sha256,
                files: d.files,
                content: Content::Directivity {
                    manifest: Box::new(d.manifest),
                    directivity: Box::new(d.directivity),
                },
            })
        }
        Some("tuning") => {
            let t = open_tuning(dir)?;
            Ok(Folder {
                dir: t.dir,
                kind: FolderKind::Tuning,
                manifest_sha256: t.manifest_sha256,
                content_sha256: t.content_sha256,
                files: t.files,
                content: Content::Tuning {
                    manifest: Box::new(t.manifest),
                    tuning: Box::new(t.tuning),
                },
            })
        }
        _ => open_with(dir, options),
    }
}

/// A tuning folder, opened and checked.
#[derive(Debug, Clone)]
pub struct TuningFolder {
    /// The folder as given.
    pub dir: PathBuf,
    /// SHA-256 of its manifest.json.
    pub manifest_sha256: String,
    /// SHA-256 of its tuning.json.
    pub content_sha256: String,
    /// Every file the manifest lists, checked against its hash.
    pub files: Vec<FileCheck>,
    /// The manifest.
    pub manifest: TuningManifest,
    /// tuning.json.
    pub tuning: TuningFile,
}

/// Opens a tuning folder (`gliss tune`): the one reader of that kind, with
/// the checks of [`open`] — complete, every listed file matching its
/// SHA-256, tuning.json the one listed.
pub fn open_tuning(dir: &Path) -> Result<TuningFolder> {
    let name = dir.display();
    let (manifest, mbytes): (TuningManifest, Vec<u8>) = kind_manifest(
        dir,
        "tuning",
        "a tuning folder",
        "gliss tune",
        "run gliss tune again into a new folder",
    )?;
    let files = check_files(dir, &manifest.files, OpenOptions::default())?;
    let again = "gliss tune ... --overwrite";
    let (bytes, sha) = read_content(dir, "tuning.json", "run gliss tune again with --overwrite")?;
    content_matches(dir, "tuning.json", &sha, &files, again)?;
    let tuning: TuningFile = serde_json::from_slice(&bytes).map_err(|e| {
        Error::input(format!(
            "{name}/tuning.json is not a gliss tuning file ({e}); run gliss tune again with --overwrite"
        ))
    })?;
    if tuning.schema_version > schema::TUNING_SCHEMA_VERSION {
        return Err(Error::input(format!(
            "{name}/tuning.json is schema version {}, newer than this gliss reads ({}); use a newer gliss",
            tuning.schema_version,
            schema::TUNING_SCHEMA_VERSION
        )));
    }
    Ok(TuningFolder {
        dir: dir.to_path_buf(),
        manifest_sha256: sha256_hex(&mbytes),
        content_sha256: sha,
        files,
        manifest,
        tuning,
    })
}

/// Opens a directivity folder (`gliss directivity`): the one reader of
/// that kind, with the checks of [`open`] — complete, every listed file
/// matching its SHA-256, directivity.json the one listed.
pub fn open_directivity(dir: &Path) -> Result<DirectivityFolder> {
    let name = dir.display();
    let again = "run gliss directivity again into a new folder";
    let (manifest, mbytes): (DirectivityManifest, Vec<u8>) = kind_manifest(
        dir,
        "directivity",
        "a directivity folder",
        "gliss directivity",
        again,
    )?;
    let files = check_files(dir, &manifest.files, OpenOptions::default())?;
    let (bytes, sha) = read_content(dir, "directivity.json", again)?;
    content_matches(
        dir,
        "directivity.json",
        &sha,
        &files,
        "gliss directivity ... --overwrite",
    )?;
    let directivity = serde_json::from_slice(&bytes).map_err(|e| {
        Error::input(format!(
            "{name}/directivity.json is not a gliss directivity file ({e}); {again}"
        ))
    })?;
    Ok(DirectivityFolder {
        dir: dir.to_path_buf(),
        manifest_sha256: sha256_hex(&mbytes),
        manifest,
        directivity,
        content_sha256: sha,
        files,
    })
}

//! `gliss report`: measurement folders into one self-contained HTML file.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

use clap::Args as ClapArgs;

use gliss::error::{Error, ErrorKind, Result};
use gliss::report::{self, Content, FileCheck, FileState, Folder, Plot};
use gliss::session::folder::sha256_hex;
use gliss::session::records::Manifest;

/// Options of `gliss report`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "The report is one HTML file: its style sheet is inline and every \
plot is embedded, so it opens in any browser without a network and prints on A4 (one \
measurement per page break). It shows, per folder in the order given: key numbers, \
warnings with what to do, the band tables (— with the reason where a value could not be \
measured), the plots with captions, what was measured and how, and the raw files with their \
SHA-256, checked against the folder. A comparison folder (from gliss compare) gets a verdict \
per band and parameter. The folders are only read, never changed."
)]
pub struct Args {
    /// Measurement or comparison folders (each with manifest.json), in the
    /// order the report shows them.
    #[arg(value_name = "DIR", required = true)]
    pub dirs: Vec<PathBuf>,
    /// The HTML file to write.
    #[arg(long, value_name = "FILE.html")]
    pub out: PathBuf,
    /// Replace --out if it exists.
    #[arg(long)]
    pub overwrite: bool,
}

/// Runs `gliss report`.
pub fn run(a: Args) -> Result<()> {
    if a.out.is_dir() {
        return Err(Error::new(
            ErrorKind::AlreadyExists,
            format!(
                "{} is a folder; give --out a file name such as report.html",
                a.out.display()
            ),
        ));
    }
    if a.out.exists() && !a.overwrite {
        return Err(Error::new(
            ErrorKind::AlreadyExists,
            format!(
                "{} already exists; choose another --out, or add --overwrite to replace it",
                a.out.display()
            ),
        ));
    }
    let folders = a
        .dirs
        .iter()
        .map(|d| read_folder(d))
        .collect::<Result<Vec<_>>>()?;
    let written = humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string();
    let html = report::render(&folders, &written);
    write_out(&a.out, html.as_bytes(), a.overwrite)?;
    let plots: usize = folders.iter().map(|f| f.plots.len()).sum();
    println!(
        "wrote {}: {} folder{}, {plots} plot{} embedded ({} kB); open it in a browser or print it",
        a.out.display(),
        folders.len(),
        if folders.len() == 1 { "" } else { "s" },
        if plots == 1 { "" } else { "s" },
        html.len().div_ceil(1024)
    );
    Ok(())
}

/// Writes `bytes` to a temporary file beside `out`, then renames it into
/// place; without `overwrite` an existing `out` is never replaced.
fn write_out(out: &Path, bytes: &[u8], overwrite: bool) -> Result<()> {
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "report.html".into());
    let tmp = out.with_file_name(format!(".partial-{name}"));
    let mut f = fs::File::create(&tmp).map_err(|e| Error::io("create", &tmp, &e))?;
    f.write_all(bytes)
        .and_then(|()| f.sync_all())
        .map_err(|e| Error::io("write", &tmp, &e))?;
    drop(f);
    if !overwrite && out.exists() {
        let _ = fs::remove_file(&tmp);
        return Err(Error::new(
            ErrorKind::AlreadyExists,
            format!(
                "{} appeared while the report was written; choose another --out, or add --overwrite",
                out.display()
            ),
        ));
    }
    fs::rename(&tmp, out).map_err(|e| {
        let _ = fs::remove_file(&tmp);
        Error::io("write", out, &e)
    })
}

/// Reads one folder for the report; refuses anything that is not a
/// complete measurement or comparison folder, naming the folder.
pub fn read_folder(dir: &Path) -> Result<Folder> {
    let name = dir.display().to_string();
    if !dir.is_dir() {
        return Err(Error::input(format!(
            "{name} is not a folder; give measurement folders written by gliss (analyze, measure, demo or compare)"
        )));
    }
    let mpath = dir.join("manifest.json");
    if !mpath.is_file() {
        return Err(Error::input(format!(
            "{name} is not a measurement folder: it has no manifest.json; give folders written by gliss analyze, measure, demo or compare"
        )));
    }
    let text = fs::read_to_string(&mpath).map_err(|e| Error::io("read", &mpath, &e))?;
    let value: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        Error::input(format!(
            "{name}: manifest.json is not valid JSON ({e}); the folder is damaged, re-analyse its raw files into a new folder"
        ))
    })?;
    if value.get("complete").and_then(|v| v.as_bool()) == Some(false) {
        let why = value
            .get("problems")
            .and_then(|p| p.as_array())
            .and_then(|p| p.first())
            .and_then(|p| p.as_str())
            .map(|p| format!(" ({p})"))
            .unwrap_or_default();
        return Err(Error::input(format!(
            "{name} is an incomplete measurement{why}; a report needs a complete folder: measure again, or analyse its recording.wav with gliss analyze into a new folder"
        )));
    }
    let kind_is = |v: Option<&serde_json::Value>| v.and_then(|k| k.as_str()) == Some("comparison");
    let comparison =
        kind_is(value.get("kind")) || kind_is(value.get("source").and_then(|s| s.get("kind")));
    let files = check_files(dir, &value);
    let (plots, notes) = read_plots(dir)?;
    let content = if comparison {
        let cpath = dir.join("comparison.json");
        let text = fs::read_to_string(&cpath).map_err(|e| {
            Error::input(format!(
                "{name} is a comparison folder without a readable comparison.json ({e}); run gliss compare again"
            ))
        })?;
        let c: report::comparison::Comparison = serde_json::from_str(&text).map_err(|e| {
            Error::input(format!(
                "{name}: comparison.json does not parse ({e}); run gliss compare again into a new folder"
            ))
        })?;
        Content::Comparison {
            manifest: value,
            comparison: Box::new(c),
        }
    } else {
        let manifest: Manifest = serde_json::from_value(value).map_err(|e| {
            Error::input(format!(
                "{name}: manifest.json is not a gliss manifest ({e}); give folders written by gliss"
            ))
        })?;
        let results = gliss::session::read_results(dir).map_err(|e| {
            Error::input(format!(
                "{}; re-analyse the raw files of {name} (gliss analyze ... --overwrite)",
                e.message()
            ))
        })?;
        Content::Measurement {
            manifest: Box::new(manifest),
            results: Box::new(results),
        }
    };
    Ok(Folder {
        name,
        content,
        plots,
        files,
        notes,
    })
}

/// The manifest's files, each checked against its recorded SHA-256.
fn check_files(dir: &Path, manifest: &serde_json::Value) -> Vec<FileCheck> {
    let Some(list) = manifest.get("files").and_then(|f| f.as_array()) else {
        return Vec::new();
    };
    list.iter()
        .filter_map(|e| {
            let name = e.get("name")?.as_str()?.to_string();
            let sha256 = e.get("sha256")?.as_str()?.to_string();
            let role = e
                .get("role")
                .and_then(|r| r.as_str())
                .unwrap_or("")
                .to_string();
            // only paths inside the folder are checked
            let inside = !name.is_empty()
                && Path::new(&name)
                    .components()
                    .all(|c| matches!(c, std::path::Component::Normal(_)));
            if !inside {
                return None;
            }
            let state = match fs::read(dir.join(&name)) {
                Ok(bytes) if sha256_hex(&bytes).eq_ignore_ascii_case(&sha256) => FileState::Matches,
                Ok(_) => FileState::Differs,
                Err(_) => FileState::Missing,
            };
            Some(FileCheck {
                name,
                role,
                sha256,
                state,
            })
        })
        .collect()
}

/// plots/*.png of a folder, in the report's order, and a note for each
/// file there that is not a PNG (left out).
fn read_plots(dir: &Path) -> Result<(Vec<Plot>, Vec<String>)> {
    let pdir = dir.join("plots");
    let Ok(entries) = fs::read_dir(&pdir) else {
        return Ok((Vec::new(), Vec::new()));
    };
    let mut plots = Vec::new();
    let mut notes = Vec::new();
    for e in entries.flatten() {
        let path = e.path();
        let Some(file) = path.file_name().and_then(|n| n.to_str()) else {
            continue;
        };
        if !file.ends_with(".png") || file.starts_with('.') || !path.is_file() {
            continue;
        }
        let png = fs::read(&path).map_err(|e| Error::io("read", &path, &e))?;
        if report::png_size(&png).is_none() {
            notes.push(format!(
                "plots/{file} is not a PNG image and is left out of the report"
            ));
            continue;
        }
        plots.push(Plot {
            file: format!("plots/{file}"),
            png,
        });
    }
    plots.sort_by(|a, b| {
        report::plot_rank(&a.file)
            .cmp(&report::plot_rank(&b.file))
            .then_with(|| a.file.cmp(&b.file))
    });
    Ok((plots, notes))
}

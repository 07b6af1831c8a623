//! `gliss report`: measurement folders into one self-contained HTML file.

use std::fs;
use std::path::{Path, PathBuf};

use clap::Args as ClapArgs;

use gliss::error::{Error, ErrorKind, Result};
use gliss::report::{self, Folder, Plot};

/// Options of `gliss report`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "The report is one HTML file: its style sheet is inline and every \
plot is embedded, so it opens in any browser without a network and prints on A4. Page 1 is \
the answer for the first folder: for a comparison, the question, the verdict in words for \
Tmid, the bass ratio, C80 (a room for music), D50 (a room for speech; both for a room in \
general: the --profile the folders were analysed with) and the change of absorption, counts \
per quantity and octave band, and the reverberation time per octave before and after with \
error bars and the --target-rt range; for a measurement, its key numbers, its T30 against \
the target, response and decay. Then the evidence (plots with captions, \
octave-band tables), then an appendix (one-third-octave tables, the positions of any average \
given too, how each folder was made with the SHA-256 of its raw files, checked). The folders \
are only read, never changed.

--out must end in .html: gliss writes no PDF itself; open the report in a browser and print \
it, or e.g. chromium --headless --no-pdf-header-footer --print-to-pdf=report.pdf report.html."
)]
pub struct Args {
    /// Measurement, comparison or tuning folders (each with
    /// manifest.json), in the order the report shows them.
    #[arg(value_name = "DIR", required = true)]
    pub dirs: Vec<PathBuf>,
    /// The HTML file to write (its name must end in .html or .htm; a PDF
    /// is refused: print the HTML).
    #[arg(long, value_name = "FILE.html")]
    pub out: PathBuf,
    /// Replace --out if it exists.
    #[arg(long)]
    pub overwrite: bool,
    /// The reverberation time's target: MIN,MAX in seconds for every
    /// octave band (e.g. 0.3,0.5), or a file with one band a line,
    /// "centre_hz min_s max_s" (# comments; bands not listed have no
    /// target). Drawn as a shaded band on page 1's reverberation figure,
    /// and T30 per octave is judged against it in words (a value nearer
    /// a limit than twice its uncertainty is named as such).
    #[arg(long, value_name = "MIN,MAX|FILE", allow_hyphen_values = true)]
    pub target_rt: Option<String>,
    /// Report a folder even if a raw file no longer matches the SHA-256 its
    /// manifest recorded, with a warning on its page (otherwise refused).
    #[arg(long)]
    pub show_changed_raw: bool,
}

/// Runs `gliss report`.
pub fn run(a: Args) -> Result<()> {
    let html_name = a
        .out
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("html") || e.eq_ignore_ascii_case("htm"));
    if !html_name {
        return Err(Error::new(
            ErrorKind::InvalidParameter,
            format!(
                "--out {} is not an .html file name: gliss report writes HTML only; give e.g. --out report.html, then print it to PDF from a browser (chromium --headless --print-to-pdf=report.pdf report.html)",
                a.out.display()
            ),
        ));
    }
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
    let options = report::Options {
        target_rt: a.target_rt.as_deref().map(target_rt).transpose()?,
    };
    // each folder is read and its raw files hashed on its own: in parallel
    let folders = {
        use rayon::prelude::*;
        a.dirs
            .par_iter()
            .map(|d| read_folder(d, a.show_changed_raw))
            .collect::<Result<Vec<_>>>()?
    };
    let written = humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string();
    let html = report::render(&folders, &written, &options);
    gliss::folder::write::write_replacing(&a.out, html.as_bytes(), a.overwrite)?;
    let plots = html.matches("<img ").count();
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

/// `--target-rt`: a file when one exists at that path, else MIN,MAX.
fn target_rt(arg: &str) -> Result<gliss::analysis::rt_target::RtTarget> {
    use gliss::analysis::rt_target::RtTarget;
    let path = Path::new(arg);
    if path.is_file() {
        let text = fs::read_to_string(path).map_err(|e| Error::io("read", path, &e))?;
        RtTarget::parse_file(&text).map_err(|e| {
            Error::new(
                ErrorKind::InvalidInput,
                format!("--target-rt {}: {}", path.display(), e.message()),
            )
        })
    } else {
        RtTarget::parse_range(arg)
    }
}

/// Reads one folder for the report through the one folder reader;
/// refuses anything that is not a complete folder gliss wrote, or one whose
/// raw files changed (unless `show_changed_raw`: then the report shows the
/// damage).
pub fn read_folder(dir: &Path, show_changed_raw: bool) -> Result<Folder> {
    let f = gliss::folder::open_any(
        dir,
        gliss::folder::OpenOptions {
            allow_changed_raw: show_changed_raw,
        },
    )?;
    let (plots, notes) = read_plots(dir)?;
    Ok(Folder {
        name: dir.display().to_string(),
        content: f.content,
        plots,
        files: f.files,
        notes,
    })
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

//! A directivity folder: measurement folders taken around a loudspeaker
//! (each with its `--orbit` and `--angle`), read through the one reader in
//! parallel, checked to be one set (one sample rate, one gate, one
//! smoothing, one grid), reduced by [`crate::analysis::directivity`], and
//! written through the one folder writer: directivity.json,
//! directivity.csv (the curves and beamwidths), polar.csv (every angle),
//! the plots, the manifest last.

use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::analysis::directivity::{self, AngleResponse, Curve, Directivity};
use crate::error::{Error, Result};
use crate::folder::schema::{
    DirectivityFile, DirectivityInput, DirectivityManifest, FileEntry, FolderKind, InputRecord,
    Manifest, Results, SCHEMA_VERSION, Source,
};
use crate::folder::{self, MeasurementFolder};
use crate::model::plot_kind::PLOTS_BUILT;
use crate::model::{Orbit, Position};
use crate::session::to_json;

/// What `gliss directivity` hands the library.
#[derive(Debug, Clone)]
pub struct DirectivityJob {
    /// The measurement folders, one per position.
    pub inputs: Vec<PathBuf>,
    /// The directivity folder to write.
    pub out: PathBuf,
    /// Replace the derived files of an existing directivity folder.
    pub overwrite: bool,
    /// Draw the plots.
    pub plots: bool,
    /// The command line that made it.
    pub command_line: Vec<String>,
}

/// What a directivity job wrote.
#[derive(Debug, Clone)]
pub struct DirectivityOutcome {
    /// directivity.json as written.
    pub file: DirectivityFile,
    /// The files written, manifest first.
    pub files: Vec<String>,
}

/// A measurement of the set, read and checked.
struct Member {
    dir: PathBuf,
    record: InputRecord,
    manifest: Manifest,
    results: Results,
}

fn read_member(dir: &Path) -> Result<Member> {
    let f = folder::open(dir)?;
    let record = f.input_record(None);
    let (manifest, results) = f.into_measurement("give the measurement folders of each angle")?;
    if manifest.kind.is_some_and(|k| k != FolderKind::Measurement) {
        return Err(Error::input(format!(
            "{} is {}, not a measurement at one angle; give the measurement folders of each angle",
            dir.display(),
            manifest.kind.map_or("a measurement", |k| k.words())
        )));
    }
    if manifest.settings.position.is_none() {
        return Err(Error::input(format!(
            "{} does not say where around the loudspeaker it was measured; analyse its recording again with --orbit horizontal|vertical --angle DEG (gliss analyze ... --orbit horizontal --angle 30)",
            dir.display()
        )));
    }
    Ok(Member {
        dir: dir.to_path_buf(),
        record,
        manifest,
        results,
    })
}

fn gate_words(g: Option<&crate::analysis::gate::GateInfo>) -> String {
    g.map_or_else(
        || "no gate".to_string(),
        |g| format!("the gate {:.2} to {:.2} ms", g.start_s * 1e3, g.end_s * 1e3),
    )
}

/// The set must be one measurement repeated at each angle: one sample
/// rate, one gate, one smoothing and one frequency grid. Refused by name
/// otherwise.
fn check_set(members: &[Member]) -> Result<()> {
    let first = &members[0];
    let r0 = &first.results;
    let pos = |m: &Member| m.manifest.settings.position.expect("checked").words();
    for m in &members[1..] {
        let r = &m.results;
        if r.sample_rate_hz != r0.sample_rate_hz {
            return Err(Error::input(format!(
                "{} ({}) was measured at {} Hz and {} ({}) at {} Hz; measure every angle at one sample rate",
                m.dir.display(),
                pos(m),
                r.sample_rate_hz,
                first.dir.display(),
                pos(first),
                r0.sample_rate_hz
            )));
        }
        let same_gate = match (&r.response.gate, &r0.response.gate) {
            (None, None) => true,
            (Some(a), Some(b)) => {
                (a.start_s - b.start_s).abs() < 1e-6 && (a.end_s - b.end_s).abs() < 1e-6
            }
            _ => false,
        };
        if !same_gate {
            return Err(Error::input(format!(
                "{} ({}) was analysed with {} and {} ({}) with {}; every angle needs the same gate: analyse them again with the on-axis gate given as --gate START_MS,END_MS",
                m.dir.display(),
                pos(m),
                gate_words(r.response.gate.as_ref()),
                first.dir.display(),
                pos(first),
                gate_words(r0.response.gate.as_ref())
            )));
        }
        if r.response.smoothing != r0.response.smoothing {
            return Err(Error::input(format!(
                "{} ({}) is smoothed {} and {} ({}) {}; analyse every angle with one --smooth",
                m.dir.display(),
                pos(m),
                r.response.smoothing,
                first.dir.display(),
                pos(first),
                r0.response.smoothing
            )));
        }
        let f = &r.response.frequency_hz;
        let f0 = &r0.response.frequency_hz;
        let same_grid =
            f.len() == f0.len() && f.iter().zip(f0).all(|(a, b)| (a - b).abs() <= 1e-9 * b);
        if !same_grid {
            return Err(Error::input(format!(
                "{} ({}) has another frequency grid than {} ({}): they were measured with different sweeps; measure every angle with one sweep",
                m.dir.display(),
                pos(m),
                first.dir.display(),
                pos(first)
            )));
        }
    }
    Ok(())
}

/// Reads the set (in parallel, each folder through [`folder::open`] with
/// its hash checks), checks it and reduces it.
pub fn reduce_folders(dirs: &[PathBuf]) -> Result<DirectivityFile> {
    if dirs.is_empty() {
        return Err(Error::parameter(
            "give the measurement folders of the angles (gliss directivity DIR... --out DIR)",
        ));
    }
    let members: Vec<Member> = dirs
        .par_iter()
        .map(|d| read_member(d))
        .collect::<Result<_>>()?;
    check_set(&members)?;
    let responses: Vec<AngleResponse> = members
        .iter()
        .map(|m| AngleResponse {
            position: m.manifest.settings.position.expect("checked"),
            magnitude_db: &m.results.response.magnitude_db,
        })
        .collect();
    let r0 = &members[0].results;
    let d = directivity::reduce(&r0.response.frequency_hz, &responses).map_err(|e| {
        Error::input(format!(
            "{} (from the folders' --orbit and --angle)",
            e.message()
        ))
    })?;
    Ok(DirectivityFile {
        schema_version: SCHEMA_VERSION,
        sample_rate_hz: r0.sample_rate_hz,
        smoothing: r0.response.smoothing,
        gate: r0.response.gate,
        magnitude_reference: r0.response.magnitude_reference.clone(),
        inputs: members
            .into_iter()
            .map(|m| DirectivityInput {
                position: m.manifest.settings.position.expect("checked"),
                folder: m.record,
            })
            .collect(),
        directivity: d,
    })
}

fn csv_err(e: csv::Error) -> Error {
    Error::input(format!("could not encode CSV: {e}"))
}

fn cell(v: Option<f64>, decimals: usize) -> String {
    v.map_or_else(String::new, |v| format!("{v:.decimals$}"))
}

/// directivity.csv: per grid frequency, every curve of the standard (an
/// empty cell where a curve is withheld) and the beamwidth of each orbit.
pub fn curves_csv(d: &Directivity) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut header = vec!["frequency_hz".to_string()];
    header.extend(Curve::ALL.iter().map(|c| format!("{}_db", c.key())));
    header.extend(
        Orbit::ALL
            .iter()
            .map(|o| format!("beamwidth_{}_deg", o.code())),
    );
    w.write_record(&header).map_err(csv_err)?;
    for (i, f) in d.frequency_hz.iter().enumerate() {
        let mut row = vec![format!("{f:.2}")];
        row.extend(
            Curve::ALL
                .iter()
                .map(|&c| cell(d.levels(c).map(|l| l[i]), 2)),
        );
        row.extend(Orbit::ALL.iter().map(|&o| {
            cell(
                d.beamwidth(o)
                    .and_then(|b| b.beamwidth_deg.as_ref())
                    .and_then(|b| b[i]),
                1,
            )
        }));
        w.write_record(&row).map_err(csv_err)?;
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// polar.csv: one row per orbit, angle and grid frequency, with the level
/// and the level relative to on axis.
pub fn polar_csv(d: &Directivity) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record([
        "orbit",
        "angle_deg",
        "frequency_hz",
        "level_db",
        "normalized_db",
    ])
    .map_err(csv_err)?;
    for o in &d.orbits {
        for (k, a) in o.angles_deg.iter().enumerate() {
            for (i, f) in d.frequency_hz.iter().enumerate() {
                w.write_record([
                    o.orbit.code().to_string(),
                    a.to_string(),
                    format!("{f:.2}"),
                    format!("{:.2}", o.level_db[k][i]),
                    format!("{:.2}", o.normalized_db[k][i]),
                ])
                .map_err(csv_err)?;
            }
        }
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// Reduces the job's folders and writes the directivity folder. Every
/// check and the reduction run before anything is written.
pub fn run(job: &DirectivityJob) -> Result<DirectivityOutcome> {
    let file = reduce_folders(&job.inputs)?;
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &[])?;
    folder.create()?;
    let d = &file.directivity;
    let mut files: Vec<FileEntry> = Vec::new();
    files.push(folder.derived_entry("directivity.json", &to_json(&file)?)?);
    files.push(folder.derived_entry("directivity.csv", &curves_csv(d)?)?);
    files.push(folder.derived_entry("polar.csv", &polar_csv(d)?)?);
    let plots = job.plots && PLOTS_BUILT;
    #[cfg(not(feature = "plots"))]
    let _ = plots;
    #[cfg(feature = "plots")]
    if plots {
        let kinds = crate::model::PlotKind::DIRECTIVITY.to_vec();
        files.extend(folder.draw_all(kinds, |k, p| crate::plot::directivity::draw(k, p, &file))?);
    }
    let manifest = DirectivityManifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        kind: FolderKind::Directivity,
        command_line: job.command_line.clone(),
        source: Source {
            kind: "directivity".into(),
            description: format!(
                "directivity of {} measurements around a loudspeaker",
                file.inputs.len()
            ),
            recording_path: None,
            sweep_path: None,
        },
        inputs: file.inputs.iter().map(|i| i.folder.clone()).collect(),
        files,
    };
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    Ok(DirectivityOutcome {
        files: std::iter::once("manifest.json".to_string())
            .chain(manifest.files.into_iter().map(|f| f.name))
            .collect(),
        file,
    })
}

/// The folder of a position inside a series folder: "horizontal30",
/// "vertical-20".
pub fn position_folder(p: Position) -> String {
    format!("{}{}", p.orbit.code(), p.angle_deg)
}

/// The positions of a guided series on `orbit` at `step_deg`, in the
/// order a turntable turns: 0°, step, … 180°, then −180° + step … −step.
/// The step must divide 180° (the standard's is 10°).
pub fn series_positions(orbit: Orbit, step_deg: i32) -> Result<Vec<Position>> {
    if !(1..=90).contains(&step_deg) || 180 % step_deg != 0 {
        return Err(Error::parameter(format!(
            "--step {step_deg} does not divide the half circle into whole steps; use a step that divides 180, e.g. 10 (the standard's) or 15"
        )));
    }
    let n = 360 / step_deg;
    Ok((0..n)
        .map(|k| {
            let a = k * step_deg;
            Position {
                orbit,
                angle_deg: if a > 180 { a - 360 } else { a },
            }
        })
        .collect())
}

/// Where a position of a series stands in its series folder.
#[derive(Debug, Clone, PartialEq)]
pub enum SeriesState {
    /// Not measured yet.
    Missing,
    /// Measured: a complete measurement folder that records this position
    /// (for 0° and 180°, on either orbit), with the gate its response was
    /// taken through.
    Done {
        /// The folder.
        folder: PathBuf,
        /// Its gate (`None`: none).
        gate: Option<crate::analysis::gate::GateInfo>,
    },
    /// A folder is there but cannot be read as this position's
    /// measurement (an interrupted one, or another position): the reason.
    Blocked(String),
}

/// The state of position `p` in the series folder `dir`: what a resumed
/// series skips, measures, or stops at.
pub fn series_state(dir: &Path, p: Position) -> SeriesState {
    let mut names = vec![position_folder(p)];
    if p.is_shared() {
        for o in Orbit::ALL {
            let twin = position_folder(Position { orbit: o, ..p });
            if !names.contains(&twin) {
                names.push(twin);
            }
        }
    }
    for name in names {
        let d = dir.join(&name);
        if !d.exists() {
            continue;
        }
        let read = folder::open(&d).and_then(|f| f.into_measurement("give a measurement"));
        return match read {
            Ok((m, r))
                if m.settings.position == Some(p)
                    || (p.is_shared()
                        && m.settings
                            .position
                            .is_some_and(|q| q.angle_deg == p.angle_deg)) =>
            {
                SeriesState::Done {
                    folder: d,
                    gate: r.response.gate,
                }
            }
            Ok(_) => SeriesState::Blocked(format!(
                "{} holds another measurement than {}; move it away",
                d.display(),
                p.words()
            )),
            Err(e) => SeriesState::Blocked(format!(
                "{} cannot be resumed ({}); remove it and run the series again: the other angles are kept",
                d.display(),
                e.message()
            )),
        };
    }
    SeriesState::Missing
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_series_turns_from_on_axis_round_the_circle_once() {
        let p = series_positions(Orbit::Vertical, 10).unwrap();
        assert_eq!(p.len(), 36);
        let a: Vec<i32> = p.iter().map(|p| p.angle_deg).collect();
        assert_eq!(&a[..3], &[0, 10, 20]);
        assert_eq!(a[18], 180);
        assert_eq!(a[19], -170);
        assert_eq!(*a.last().unwrap(), -10);
        assert!(series_positions(Orbit::Horizontal, 7).is_err());
        assert_eq!(position_folder(p[35]), "vertical-10");
    }

    #[test]
    fn a_series_folder_with_nothing_in_it_is_missing_every_position() {
        let t = tempfile::tempdir().unwrap();
        let p = Position {
            orbit: Orbit::Horizontal,
            angle_deg: 30,
        };
        assert_eq!(series_state(t.path(), p), SeriesState::Missing);
        std::fs::create_dir(t.path().join("horizontal30")).unwrap();
        assert!(matches!(series_state(t.path(), p), SeriesState::Blocked(_)));
    }
}

//! `gliss align`: several loudspeakers measured at the same listening
//! position(s), related to the first (analysis::align), written as an
//! alignment folder: align.json, align.csv, the plots, the manifest last.

use std::path::{Path, PathBuf};

use crate::analysis::align::{self, Alignment};
use crate::error::{Error, Result};
use crate::folder::schema::{
    AlignManifest, FileEntry, FolderKind, InputRecord, SCHEMA_VERSION, Source,
};
use crate::folder::{self, MeasurementFolder};
use crate::model::plot_kind::PLOTS_BUILT;
use crate::session::to_json;
use crate::signal::wav;

/// What `gliss align` hands the library.
#[derive(Debug, Clone)]
pub struct AlignJob {
    /// The measurement folders, position by position.
    pub inputs: Vec<PathBuf>,
    /// The loudspeakers' names (one per loudspeaker; empty: the first
    /// position's folder names).
    pub names: Vec<String>,
    /// Listening positions.
    pub positions: usize,
    /// `--band`.
    pub band: Option<(f64, f64)>,
    /// `--crossover`.
    pub crossover: Option<(f64, f64)>,
    /// `--max-delay`, s.
    pub max_delay_s: f64,
    /// The alignment folder to write.
    pub out: PathBuf,
    /// Replace the derived files of an existing alignment folder.
    pub overwrite: bool,
    /// Draw the plots.
    pub plots: bool,
    /// The command line that made it.
    pub command_line: Vec<String>,
}

/// One measurement read for the alignment.
struct Read {
    record: InputRecord,
    samples: Vec<f64>,
    start_s: f64,
    delay_s: f64,
    rate: u32,
    band: (f64, f64),
    has_reference: bool,
}

/// Reads one measurement folder through the one reader and its
/// impulse.wav.
fn read(dir: &Path) -> Result<Read> {
    let f = folder::open(dir)?;
    let record = f.input_record(None);
    let (manifest, results) = f.into_measurement(
        "gliss align relates measurements of each loudspeaker: give their measurement folders",
    )?;
    match manifest.kind {
        Some(FolderKind::Average) => {
            return Err(Error::input(format!(
                "{} is an average of positions, which has no impulse response; give the measurement folders of each position, in order, with --positions",
                dir.display()
            )));
        }
        Some(FolderKind::Impedance) => {
            return Err(Error::input(format!(
                "{} is an impedance measurement; give acoustic measurements of each loudspeaker",
                dir.display()
            )));
        }
        _ => {}
    }
    let Some(impulse) = &results.impulse else {
        return Err(Error::input(format!(
            "{} has no impulse response; give measurement folders of each loudspeaker",
            dir.display()
        )));
    };
    let path = dir.join(&impulse.file);
    let w = wav::read_wav(&path, "the impulse response")?;
    let samples = w.channels.into_iter().next().unwrap_or_default();
    if samples.is_empty() {
        return Err(Error::input(format!(
            "{} holds no samples; analyse the measurement again (gliss analyze ... --overwrite)",
            path.display()
        )));
    }
    let has_reference = manifest.settings.reference_channel.is_some()
        || manifest
            .measurement
            .as_ref()
            .is_some_and(|m| m.reference_channel.is_some());
    Ok(Read {
        record,
        samples,
        start_s: impulse.start_s,
        delay_s: results.delay_s,
        rate: manifest.sample_rate_hz,
        band: (manifest.sweep.params.start_hz, manifest.sweep.params.end_hz),
        has_reference,
    })
}

/// align.csv: the curves, one row per grid frequency.
pub fn align_csv(a: &Alignment) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::input(format!("could not encode CSV: {e}"));
    let mut head = vec!["frequency_hz".to_string()];
    for l in &a.loudspeakers {
        head.push(format!("{} level_db", l.name));
        head.push(format!("{} phase_deg", l.name));
    }
    head.push("sum_as_is_db".into());
    if a.crossover.is_some() {
        head.push("sum_suggested_db".into());
    }
    w.write_record(&head).map_err(err)?;
    let c = &a.curves;
    for (i, f) in c.frequency_hz.iter().enumerate() {
        let mut row = vec![format!("{f:.3}")];
        for s in 0..a.loudspeakers.len() {
            row.push(format!("{:.3}", c.level_db[s][i]));
            row.push(format!("{:.2}", c.phase_deg[s][i]));
        }
        row.push(format!("{:.3}", c.sum_as_is_db[i]));
        if let Some(v) = c.sum_suggested_db.get(i) {
            row.push(format!("{v:.3}"));
        }
        w.write_record(&row).map_err(err)?;
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// Reads the folders, relates them and writes the alignment folder.
/// Every check and the analysis run before anything is written.
pub fn run(job: &AlignJob) -> Result<(Alignment, Vec<String>)> {
    if job.positions == 0 {
        return Err(Error::parameter("--positions must be at least 1"));
    }
    if job.inputs.len() < 2 * job.positions || job.inputs.len() % job.positions != 0 {
        return Err(Error::parameter(format!(
            "{} folders do not make {} position(s) of two or more loudspeakers; give each position's folders in turn, every loudspeaker in the same order",
            job.inputs.len(),
            job.positions
        )));
    }
    let speakers = job.inputs.len() / job.positions;
    let reads = {
        use rayon::prelude::*;
        job.inputs
            .par_iter()
            .map(|d| read(d))
            .collect::<Result<Vec<_>>>()?
    };
    let rate = reads[0].rate;
    if let Some(other) = reads.iter().find(|r| r.rate != rate) {
        return Err(Error::input(format!(
            "{} was measured at {} Hz and {} at {rate} Hz; relate measurements made at one sample rate",
            other.record.folder, other.rate, reads[0].record.folder
        )));
    }
    let limits = reads.iter().fold((0.0f64, f64::INFINITY), |(lo, hi), r| {
        (
            lo.max(r.band.0),
            hi.min(r.band.1.min(0.5 * f64::from(rate))),
        )
    });
    if limits.1 <= limits.0 {
        return Err(Error::input(
            "the measurements' sweeps share no band; measure every loudspeaker with one sweep",
        ));
    }
    let names = if job.names.is_empty() {
        reads[..speakers]
            .iter()
            .map(|r| r.record.label.clone())
            .collect()
    } else if job.names.len() == speakers {
        job.names.clone()
    } else {
        return Err(Error::parameter(format!(
            "--names gives {} names for {speakers} loudspeakers; give one per loudspeaker, in order",
            job.names.len()
        )));
    };
    let inputs: Vec<align::Input<'_>> = reads
        .iter()
        .map(|r| align::Input {
            impulse: align::Impulse {
                samples: &r.samples,
                start_s: r.start_s,
            },
            has_reference: r.has_reference,
            delay_s: r.delay_s,
        })
        .collect();
    let a = align::align(
        &inputs,
        f64::from(rate),
        &align::Options {
            names: names.clone(),
            positions: job.positions,
            band: job.band,
            crossover: job.crossover,
            max_delay_s: job.max_delay_s,
            limits,
        },
    )?;
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &[])?;
    folder.create()?;
    #[cfg_attr(not(feature = "plots"), allow(unused_mut))]
    let mut files: Vec<FileEntry> = vec![
        folder.derived_entry("align.json", &to_json(&a)?)?,
        folder.derived_entry("align.csv", &align_csv(&a)?)?,
    ];
    let plots = job.plots && PLOTS_BUILT;
    #[cfg(not(feature = "plots"))]
    let _ = plots;
    #[cfg(feature = "plots")]
    if plots {
        let title = names.join(" + ");
        files.extend(folder.draw_all(
            crate::model::PlotKind::ALIGN.to_vec(),
            |kind, p| match kind {
                crate::model::PlotKind::AlignSum => {
                    crate::plot::align::align_sum_png(p, &title, &a)
                }
                _ => crate::plot::align::align_phase_png(p, &title, &a),
            },
        )?);
    }
    let manifest = AlignManifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        kind: FolderKind::Align,
        command_line: job.command_line.clone(),
        source: Source {
            kind: "align".into(),
            description: format!(
                "{} against {}{}",
                names[1..].join(", "),
                names[0],
                if job.positions > 1 {
                    format!(" at {} listening positions", job.positions)
                } else {
                    " at one listening position".to_string()
                }
            ),
            recording_path: None,
            sweep_path: None,
        },
        inputs: reads.iter().map(|r| r.record.clone()).collect(),
        files,
    };
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    Ok((
        a,
        std::iter::once("manifest.json".to_string())
            .chain(manifest.files.into_iter().map(|f| f.name))
            .collect(),
    ))
}

//! Export: one curve or table of a measurement folder as CSV or JSON, with
//! its units, for a report or another program.
//!
//! CSV: one header line of column names that carry their units
//! (`frequency_hz`, `magnitude_db`, `thd_percent`), then one row per
//! point; an empty field where a value was not measured. JSON: the same
//! columns as arrays (`null` where not measured) under `data`, their
//! order under `columns`, a `units` object, and a `source` naming the
//! folder and the SHA-256 of its results.json.

use std::path::{Path, PathBuf};

use serde_json::{Map, Value, json};

use crate::analysis::correction::Correction;
use crate::analysis::{self, ImpulsePlacement, Smoothing};
use crate::error::{Error, ErrorKind, Result};
use crate::signal::wav::decode_wav;

use crate::folder::schema::{Manifest, Results};
use crate::folder::sha256_hex;
use crate::model::Parameter;

/// What to export.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum What {
    /// The frequency response on the log grid.
    Response,
    /// Each harmonic order and THD per excitation frequency.
    Distortion,
    /// The room-acoustic parameters per band.
    Bands,
    /// The linear impulse response.
    Impulse,
}

impl What {
    /// Parses `response`, `distortion`, `bands` or `impulse`.
    pub fn parse(s: &str) -> Result<What> {
        match s.trim().to_ascii_lowercase().as_str() {
            "response" => Ok(What::Response),
            "distortion" => Ok(What::Distortion),
            "bands" => Ok(What::Bands),
            "impulse" => Ok(What::Impulse),
            _ => Err(Error::parameter(format!(
                "--what {s:?} is not known; use response, distortion, bands or impulse"
            ))),
        }
    }

    /// The name used in files.
    pub fn label(self) -> &'static str {
        match self {
            What::Response => "response",
            What::Distortion => "distortion",
            What::Bands => "bands",
            What::Impulse => "impulse",
        }
    }
}

/// The file format of an export.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Comma-separated values with a header line.
    Csv,
    /// One JSON object.
    Json,
}

impl Format {
    /// Parses `csv` or `json`.
    pub fn parse(s: &str) -> Result<Format> {
        match s.trim().to_ascii_lowercase().as_str() {
            "csv" => Ok(Format::Csv),
            "json" => Ok(Format::Json),
            _ => Err(Error::parameter(format!(
                "--format {s:?} is not known; use csv or json"
            ))),
        }
    }
}

/// A measurement folder opened for export.
#[derive(Debug, Clone)]
pub struct Measurement {
    /// The folder.
    pub dir: PathBuf,
    /// Its manifest.json.
    pub manifest: Manifest,
    /// Its results.json.
    pub results: Results,
    /// SHA-256 of results.json.
    pub results_sha256: String,
}

/// Opens a measurement folder through [`crate::folder::open`]: refuses
/// what is not a complete measurement or average with intact raw files.
pub fn open(dir: &Path) -> Result<Measurement> {
    let f = crate::folder::open(dir)?;
    let results_sha256 = f.content_sha256.clone();
    let (manifest, results) = f.into_measurement(
        "export the measurement folders it compared, or read its comparison.csv",
    )?;
    Ok(Measurement {
        dir: dir.to_path_buf(),
        manifest,
        results,
        results_sha256,
    })
}

/// The values of one column.
#[derive(Debug, Clone, PartialEq)]
pub enum Values {
    /// Numbers (`None`: not measured) and the decimals CSV prints; `None`
    /// digits print the shortest form that reads back exactly.
    Numbers(Vec<Option<f64>>, Option<usize>),
    /// Words.
    Text(Vec<String>),
    /// Yes or no.
    Flags(Vec<bool>),
}

impl Values {
    fn len(&self) -> usize {
        match self {
            Values::Numbers(v, _) => v.len(),
            Values::Text(v) => v.len(),
            Values::Flags(v) => v.len(),
        }
    }
}

/// One column: its name (which carries the unit), its unit in words and
/// its values.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Column name, e.g. `magnitude_db`.
    pub name: String,
    /// The unit and reference in words.
    pub unit: String,
    /// The values, one per row.
    pub values: Values,
}

/// What an export holds.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// What was exported.
    pub what: What,
    /// The response's smoothing (response only).
    pub smoothing: Option<Smoothing>,
    /// Whether the response was smoothed again from impulse.wav.
    pub resmoothed: bool,
    /// The columns, all of the same length.
    pub columns: Vec<Column>,
}

impl Table {
    /// Rows of the table.
    pub fn rows(&self) -> usize {
        self.columns.first().map_or(0, |c| c.values.len())
    }
}

fn numbers(name: &str, unit: &str, v: impl IntoIterator<Item = f64>, digits: usize) -> Column {
    Column {
        name: name.into(),
        unit: unit.into(),
        values: Values::Numbers(v.into_iter().map(Some).collect(), Some(digits)),
    }
}

fn optional(name: &str, unit: &str, v: Vec<Option<f64>>, digits: usize) -> Column {
    Column {
        name: name.into(),
        unit: unit.into(),
        values: Values::Numbers(v, Some(digits)),
    }
}

/// The table of `what` from a measurement; `smooth` smooths the response
/// again from impulse.wav (response only).
pub fn table(m: &Measurement, what: What, smooth: Option<Smoothing>) -> Result<Table> {
    if smooth.is_some() && what != What::Response {
        return Err(Error::parameter(format!(
            "--smooth applies to --what response only (the {} are not smoothed); leave it out",
            what.label()
        )));
    }
    let r = &m.results;
    match what {
        What::Response => response_table(m, smooth),
        What::Distortion => {
            let d = r.distortion.as_ref().ok_or_else(|| {
                Error::input(format!(
                    "{} holds no distortion orders (it was analysed with --harmonics 1); analyse again with --harmonics 5",
                    m.dir.display()
                ))
            })?;
            let grid: Vec<f64> = if d.thd.frequency_hz.is_empty() {
                d.orders
                    .iter()
                    .max_by_key(|o| o.frequency_hz.len())
                    .map(|o| o.frequency_hz.clone())
                    .unwrap_or_default()
            } else {
                d.thd.frequency_hz.clone()
            };
            let lookup = |fs: &[f64], vs: &[Option<f64>], f: f64| -> Option<f64> {
                let k = fs.partition_point(|&g| g < f * (1.0 - 1e-9));
                (k < fs.len() && (fs[k] - f).abs() <= 1e-9 * f)
                    .then(|| vs.get(k).copied().flatten())
                    .flatten()
            };
            let mut columns = vec![numbers(
                "frequency_hz",
                "Hz, the excitation frequency (the fundamental's)",
                grid.iter().copied(),
                4,
            )];
            for o in &d.orders {
                columns.push(optional(
                    &format!("h{}_db", o.order),
                    &format!(
                        "dB re the fundamental at the same excitation frequency (order {}); empty or null where it is less than 10 dB above its noise floor",
                        o.order
                    ),
                    grid.iter()
                        .map(|&f| lookup(&o.frequency_hz, &o.level_db, f))
                        .collect(),
                    3,
                ));
            }
            columns.push(optional(
                "thd_percent",
                "percent of the fundamental, sqrt(sum of the orders' squares); empty or null where not measured",
                grid.iter()
                    .map(|&f| lookup(&d.thd.frequency_hz, &d.thd.percent, f))
                    .collect(),
                5,
            ));
            Ok(Table {
                what,
                smoothing: None,
                resmoothed: false,
                columns,
            })
        }
        What::Bands => {
            if r.bands.is_empty() {
                return Err(Error::input(format!(
                    "{} holds no band parameters (it was analysed with --no-bands or the speaker profile); analyse again with --bands",
                    m.dir.display()
                )));
            }
            let all: Vec<_> = r.bands.iter().chain(r.broadband.as_ref()).collect();
            let mut columns = vec![
                numbers(
                    "center_hz",
                    "Hz, nominal mid-band frequency (ISO 266); the broadband row: the geometric centre of the sweep band",
                    all.iter().map(|b| (b.center_hz * 10.0).round() / 10.0),
                    1,
                ),
                numbers(
                    "exact_hz",
                    "Hz, exact mid-band frequency (IEC 61260-1, base 10)",
                    all.iter().map(|b| b.exact_hz),
                    3,
                ),
                Column {
                    name: "fraction".into(),
                    unit: "the band's width: 1/1 octave, 1/3 octave, or broadband (the whole sweep band)".into(),
                    values: Values::Text(all.iter().map(|b| b.fraction.code().to_string()).collect()),
                },
            ];
            columns.extend(Parameter::ALL.iter().map(|&p| {
                let i = p.info();
                optional(
                    i.key,
                    i.description,
                    all.iter().map(|b| b.get(p)).collect(),
                    i.file_decimals,
                )
            }));
            columns.push(optional(
                "curvature_percent",
                "percent, 100*(T30/T20 - 1)",
                all.iter().map(|b| b.curvature_percent).collect(),
                1,
            ));
            columns.push(Column {
                name: "warnings".into(),
                unit: "what limits the band's values, in words; several joined by \"; \"".into(),
                values: Values::Text(
                    all.iter()
                        .map(|b| b.warnings.messages().join("; "))
                        .collect(),
                ),
            });
            Ok(Table {
                what,
                smoothing: None,
                resmoothed: false,
                columns,
            })
        }
        What::Impulse => {
            let ir = read_impulse(m)?;
            let fs = f64::from(r.sample_rate_hz);
            let start = impulse_record(m)?.start_s;
            Ok(Table {
                what,
                smoothing: None,
                resmoothed: false,
                columns: vec![
                    numbers(
                        "time_s",
                        "s after the first sample of the recording",
                        (0..ir.len()).map(|i| start + i as f64 / fs),
                        9,
                    ),
                    Column {
                        name: "amplitude".into(),
                        unit: "full scale (1.0 = a full-scale sample); the impulse response of the sweep as written, as in impulse.wav".into(),
                        values: Values::Numbers(ir.into_iter().map(Some).collect(), None),
                    },
                ],
            })
        }
    }
}

/// Where the impulse response is; an average has none.
fn impulse_record(m: &Measurement) -> Result<&crate::folder::schema::ImpulseRecord> {
    m.results.impulse.as_ref().ok_or_else(|| {
        Error::input(format!(
            "{} is an average over positions and has no impulse response; export it from one of the position folders, or export the response as it is (without --smooth)",
            m.dir.display()
        ))
    })
}

/// The samples of impulse.wav.
fn read_impulse(m: &Measurement) -> Result<Vec<f64>> {
    let p = m.dir.join(&impulse_record(m)?.file);
    let bytes = std::fs::read(&p).map_err(|e| Error::io("read", &p, &e))?;
    let mut w = decode_wav(&bytes).map_err(|e| Error::input(format!("{} {e}", p.display())))?;
    if w.channels.is_empty() || w.sample_rate_hz != m.results.sample_rate_hz {
        return Err(Error::input(format!(
            "{} does not match results.json (sample rate or channels); analyse the recording again",
            p.display()
        )));
    }
    Ok(w.channels.swap_remove(0))
}

/// The microphone correction the folder's response had removed, read
/// again from where the manifest says it was, checked by its hash.
fn correction(m: &Measurement) -> Result<Option<Correction>> {
    let Some(entry) = &m.manifest.settings.mic_correction else {
        return Ok(None);
    };
    let path = PathBuf::from(&entry.name);
    let bytes = std::fs::read(&path).map_err(|_| {
        Error::input(format!(
            "the response of {} has the microphone correction {} removed, and smoothing it again needs that file, which is not there; run export from the folder the measurement was made in, or leave out --smooth",
            m.dir.display(),
            entry.name
        ))
    })?;
    if sha256_hex(&bytes) != entry.sha256 {
        return Err(Error::input(format!(
            "the microphone correction {} has changed since {} was analysed (its SHA-256 differs from the manifest's); smoothing again would not match: leave out --smooth, or analyse again",
            entry.name,
            m.dir.display()
        )));
    }
    Correction::parse(&String::from_utf8_lossy(&bytes))
        .map(Some)
        .map_err(|e| Error::input(format!("the microphone correction {}: {e}", entry.name)))
}

/// The folder's response taken again from its impulse.wav with the
/// analysis's own stages, at smoothing `s` (on the folder's grid).
pub fn fresh_response(m: &Measurement, s: Smoothing) -> Result<analysis::FrequencyResponse> {
    let rec = &m.results.response;
    if m.manifest.source.kind == "impulse" {
        return Err(Error::input(format!(
            "{} was analysed from an impulse response given as it is, so its response is not taken again at another smoothing here; analyse the impulse response again with the smoothing you need",
            m.dir.display()
        )));
    }
    let ir = read_impulse(m)?;
    let placement = ImpulsePlacement {
        design: &m.manifest.sweep,
        start_s: impulse_record(m)?.start_s,
        delay_s: m.results.delay_s,
        harmonics: m.manifest.settings.harmonics.max(1),
        gate: rec.gate,
    };
    let c = correction(m)?;
    let fresh = analysis::response_from_impulse(&ir, placement, c.as_ref(), s)?;
    if fresh.frequency_hz.len() != rec.frequency_hz.len() {
        return Err(Error::input(format!(
            "the response of {} is on another grid than its sweep gives; analyse the recording again",
            m.dir.display()
        )));
    }
    Ok(fresh)
}

fn response_table(m: &Measurement, smooth: Option<Smoothing>) -> Result<Table> {
    let rec = &m.results.response;
    let mut magnitude = rec.magnitude_db.clone();
    let mut phase = rec.phase_deg.clone();
    let mut smoothing = rec.smoothing;
    let resmoothed = smooth.is_some();
    if let Some(s) = smooth {
        let fresh = fresh_response(m, s)?;
        magnitude = fresh.magnitude_db;
        phase = fresh.phase_deg;
        smoothing = fresh.smoothing;
    }
    let mut columns = vec![
        numbers("frequency_hz", "Hz", rec.frequency_hz.iter().copied(), 4),
        numbers(
            "magnitude_db",
            &format!("dB; {}", rec.magnitude_reference),
            magnitude.iter().copied(),
            4,
        ),
        numbers(
            "phase_deg",
            "degrees in (-180, 180], with the delay delay_s removed",
            phase.iter().copied(),
            3,
        ),
    ];
    // the calibrated curves are the magnitude plus a constant
    let offset = |v: &[f64]| {
        v.iter()
            .zip(&rec.magnitude_db)
            .map(|(a, b)| a - b)
            .sum::<f64>()
            / v.len().max(1) as f64
    };
    let n = rec.frequency_hz.len();
    if rec.spl_db.len() == n {
        let o = offset(&rec.spl_db);
        let v: Vec<f64> = if resmoothed {
            magnitude.iter().map(|x| x + o).collect()
        } else {
            rec.spl_db.clone()
        };
        columns.push(numbers(
            "spl_db",
            "dB SPL at the microphone for the sweep's drive level (re 20 µPa)",
            v,
            4,
        ));
    }
    if rec.sensitivity_db_spl.len() == n {
        let o = offset(&rec.sensitivity_db_spl);
        let v: Vec<f64> = if resmoothed {
            magnitude.iter().map(|x| x + o).collect()
        } else {
            rec.sensitivity_db_spl.clone()
        };
        let unit = rec
            .sensitivity
            .as_ref()
            .map_or_else(|| "dB SPL at 2.83 V".to_string(), |s| s.description.clone());
        columns.push(numbers("sensitivity_db_spl", &unit, v, 4));
    }
    if rec.resolved.len() == n {
        columns.push(Column {
            name: "resolved".into(),
            unit: "whether the gate resolves the frequency (from 1/gate length up to gate.resolved_to_hz)".into(),
            values: Values::Flags(rec.resolved.clone()),
        });
    }
    Ok(Table {
        what: What::Response,
        smoothing: Some(smoothing),
        resmoothed,
        columns,
    })
}

fn cell(v: Option<f64>, digits: Option<usize>) -> String {
    match (v, digits) {
        (None, _) => String::new(),
        (Some(x), Some(d)) => format!("{:.d$}", x + 0.0),
        // the shortest form that reads back as the same 32-bit float
        (Some(x), None) if x != 0.0 && x.abs() < 1e-3 => format!("{:e}", x as f32),
        (Some(x), None) => format!("{}", x as f32),
    }
}

/// The table as CSV: a header of column names, then one row per point.
pub fn to_csv(t: &Table) -> Result<Vec<u8>> {
    let err = |e: csv::Error| Error::input(format!("could not encode CSV: {e}"));
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(t.columns.iter().map(|c| c.name.as_str()))
        .map_err(err)?;
    for i in 0..t.rows() {
        let row: Vec<String> = t
            .columns
            .iter()
            .map(|c| match &c.values {
                Values::Numbers(v, d) => cell(v[i], *d),
                Values::Text(v) => v[i].clone(),
                Values::Flags(v) => v[i].to_string(),
            })
            .collect();
        w.write_record(&row).map_err(err)?;
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// The table as JSON: `source`, `what`, `units`, `columns` and `data`.
pub fn to_json(t: &Table, m: &Measurement) -> Result<Vec<u8>> {
    let mut units = Map::new();
    let mut data = Map::new();
    for c in &t.columns {
        units.insert(c.name.clone(), Value::String(c.unit.clone()));
        let v: Vec<Value> = match &c.values {
            Values::Numbers(v, d) => v
                .iter()
                .map(|x| match (x, d) {
                    (None, _) => Value::Null,
                    (Some(x), Some(_)) => json!(x),
                    (Some(x), None) => json!(f64::from(*x as f32)),
                })
                .collect(),
            Values::Text(v) => v.iter().map(|s| json!(s)).collect(),
            Values::Flags(v) => v.iter().map(|b| json!(b)).collect(),
        };
        data.insert(c.name.clone(), Value::Array(v));
    }
    let mut out = json!({
        "format": "gliss export",
        "schema_version": crate::folder::schema::SCHEMA_VERSION,
        "what": t.what.label(),
        "source": {
            "folder": m.dir.display().to_string(),
            "results": "results.json",
            "results_sha256": m.results_sha256,
            "created_utc": m.manifest.created_utc,
        },
        "rows": t.rows(),
        "columns": t.columns.iter().map(|c| c.name.clone()).collect::<Vec<_>>(),
        "units": units,
        "data": data,
    });
    if let Some(s) = &t.smoothing {
        out["smoothing"] = json!(s);
        out["smoothed_from"] = json!(if t.resmoothed {
            "impulse.wav: the unsmoothed response taken again from the impulse response and smoothed at this setting"
        } else {
            "results.json: the response as analysed"
        });
    }
    super::to_json(&out)
}

/// Writes `bytes` to `out` (`-`: standard output); an existing file is
/// refused unless `overwrite`, and a file of the measurement folder itself
/// always.
pub fn write(out: &Path, bytes: &[u8], overwrite: bool, m: &Measurement) -> Result<()> {
    if out == Path::new("-") {
        use std::io::Write;
        let mut s = std::io::stdout().lock();
        return s
            .write_all(bytes)
            .and_then(|_| s.flush())
            .map_err(|e| Error::io("write", Path::new("standard output"), &e));
    }
    if out.is_dir() {
        return Err(Error::input(format!(
            "--out {} is a folder; give a file name, e.g. {}",
            out.display(),
            out.join("response.csv").display()
        )));
    }
    let name = out
        .file_name()
        .ok_or_else(|| Error::parameter(format!("--out {} has no file name", out.display())))?;
    let parent = match out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if let (Ok(a), Ok(b)) = (parent.canonicalize(), m.dir.canonicalize()) {
        let inside = a.starts_with(&b)
            && m.manifest
                .files
                .iter()
                .map(|f| f.name.as_str())
                .chain(std::iter::once("manifest.json"))
                .any(|f| b.join(f) == a.join(name));
        if inside {
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!(
                    "--out {} is a file of the measurement folder itself; write the export elsewhere",
                    out.display()
                ),
            ));
        }
    }
    if out.exists() && !overwrite {
        return Err(Error::new(
            ErrorKind::AlreadyExists,
            format!(
                "{} already exists and is not overwritten; give another --out, or add --overwrite to replace it",
                out.display()
            ),
        ));
    }
    crate::folder::write::write_replacing(out, bytes, overwrite)
}

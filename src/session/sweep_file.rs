//! The sweep parameters kept beside a sweep WAV (`NAME.json` beside
//! `NAME.wav`), so that analysis can rebuild the exact stimulus.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::signal::sweep::{SweepDesign, SweepParams};

/// What `gliss sweep` writes beside the WAV.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepFile {
    /// Always "gliss sweep".
    pub format: String,
    /// Version of this file's layout.
    pub schema_version: u32,
    /// The parameters and everything derived from them.
    pub sweep: SweepDesign,
    /// The WAV it describes.
    pub wav: WavInfo,
}

/// The WAV a sweep file describes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WavInfo {
    /// File name (beside this file).
    pub file: String,
    /// Sample encoding, e.g. "32-bit float".
    pub encoding: String,
    /// SHA-256 of the WAV file.
    pub sha256: String,
}

/// The sidecar path of a sweep WAV: same folder and stem, `.json`.
pub fn sidecar_path(wav: &Path) -> PathBuf {
    wav.with_extension("json")
}

/// The format tag of sweep files.
pub const FORMAT: &str = "gliss sweep";

/// Finds the sweep design of `wav`: from `NAME.json` beside it or, for
/// the stimulus.wav of a measurement folder, from its manifest.json.
/// The parameters are checked again, so a hand-edited file cannot describe
/// an impossible sweep.
pub fn load_design(wav: &Path) -> Result<SweepDesign> {
    if !wav.is_file() {
        return Err(Error::input(format!(
            "the sweep file {} does not exist; give the WAV that gliss sweep wrote",
            wav.display()
        )));
    }
    let side = sidecar_path(wav);
    let params: SweepParams = if side.exists() {
        let text = std::fs::read_to_string(&side).map_err(|e| Error::io("read", &side, &e))?;
        let f: SweepFile = serde_json::from_str(&text).map_err(|e| {
            Error::input(format!(
                "{} is not a gliss sweep description ({e}); make the sweep again with gliss sweep",
                side.display()
            ))
        })?;
        f.sweep.params
    } else {
        let from_manifest = wav
            .parent()
            .and_then(|d| crate::folder::read_manifest(d).ok())
            .map(|m| m.sweep.params);
        match from_manifest {
            Some(p) => p,
            None => {
                return Err(Error::input(format!(
                    "no sweep parameters found for {}: expected {} beside it (gliss sweep writes it); give the sweep WAV that gliss made, with its .json",
                    wav.display(),
                    side.display()
                )));
            }
        }
    };
    params.design()
}

/// The sweep design of `wav` as [`load_design`] finds it or, when the WAV
/// has no description beside it (a sweep played by another program, or a
/// gliss sweep whose .json was lost), recovered from its samples
/// ([`crate::analysis::sweep_track::recovered_design`]), with a note of
/// what was found. Refuses, with the reason, a file that is not an
/// exponential sweep.
pub fn load_or_recover(wav: &Path) -> Result<(SweepDesign, Option<String>)> {
    use crate::analysis::sweep_track::recovered_design;
    use crate::signal::wav::{SampleEncoding, decode_wav};
    if !wav.is_file() || sidecar_path(wav).exists() {
        return load_design(wav).map(|d| (d, None));
    }
    if let Ok(d) = load_design(wav) {
        return Ok((d, None));
    }
    let bytes = std::fs::read(wav).map_err(|e| Error::io("read", wav, &e))?;
    let data =
        decode_wav(&bytes).map_err(|m| Error::input(format!("the sweep {} {m}", wav.display())))?;
    if data.channels.len() != 1 {
        return Err(Error::input(format!(
            "the sweep {} has {} channels and no {} beside it; give a mono sweep WAV",
            wav.display(),
            data.channels.len(),
            sidecar_path(wav).display()
        )));
    }
    let step = match data.encoding {
        SampleEncoding::Int(b) => 1.0 / f64::from(1u32 << (b - 1)),
        SampleEncoding::Float => 1e-6,
    };
    let r = recovered_design(&data.channels[0], data.sample_rate_hz, step).map_err(|why| {
        Error::input(format!(
            "{} has no {} beside it, and its parameters cannot be recovered from the file: {why}",
            wav.display(),
            sidecar_path(wav).display()
        ))
    })?;
    let d = &r.design;
    let name = wav.file_name().map_or_else(
        || wav.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let what = format!(
        "{name} has no .json beside it: its parameters were recovered from its instantaneous frequency ({:.4} Hz to {:.4} Hz, rate constant {:.6} s, {:.4} s, then {:.3} s of silence)",
        d.params.start_hz, d.params.end_hz, d.rate_constant_s, d.length_s, d.params.tail_s
    );
    let note = if r.exact {
        format!("{what}; they generate the file exactly, as gliss sweep made it")
    } else {
        format!(
            "{what}; it is not a sweep gliss made (its samples differ from the synchronised sweep of those parameters), so the harmonic orders are placed by its measured rate constant and their phases are not aligned"
        )
    };
    Ok((r.design, Some(note)))
}

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

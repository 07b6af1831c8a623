//! The sweep parameters kept beside a sweep WAV (`NAME.json` beside
//! `NAME.wav`), so that analysis can rebuild the exact stimulus.
//!
//! The description also binds its parameters to the WAV's bytes
//! ([`binding_sha256`]): when the WAV's hash and the binding both agree
//! with the file and the parameters read back, the WAV holds the samples
//! those parameters generate, as `gliss sweep` wrote them, and the
//! analysis need not generate the sweep again to compare
//! ([`SweepBinding::vouches`]).

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::folder::sha256_hex;
use crate::signal::sweep::{SweepDesign, SweepParams};
use crate::signal::wav::WavData;

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
    /// SHA-256 of the parameters' canonical text and the WAV's SHA-256
    /// ([`binding_sha256`]): it says that this WAV is the one made from
    /// these parameters. Absent in the files of an earlier gliss, and
    /// when the parameters would not read back exactly from the JSON.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub binding_sha256: Option<String>,
}

impl SweepFile {
    /// What this description vouches for: the WAV's hash and the
    /// binding, if it records one.
    pub fn binding(&self) -> Option<SweepBinding> {
        self.binding_sha256.as_ref().map(|b| SweepBinding {
            wav_sha256: self.wav.sha256.clone(),
            binding_sha256: b.clone(),
        })
    }

    /// Whether `wav_bytes` are vouched for by this description: see
    /// [`SweepBinding::vouches`]; `false` without a binding.
    pub fn vouches(&self, wav_bytes: &[u8]) -> bool {
        self.binding()
            .is_some_and(|b| b.vouches(&self.sweep.params, &sha256_hex(wav_bytes)))
    }
}

/// The description `gliss sweep` writes beside the WAV of `design` whose
/// bytes are `wav_bytes` (named `file`, encoded as `encoding` says), as
/// JSON. It records the WAV's SHA-256 and, when the parameters read back
/// from that JSON to the same bits (so that the analysis, which reads
/// them back, can make the same binding), the [`binding_sha256`].
pub fn describe(
    design: &SweepDesign,
    file: &str,
    encoding: &str,
    wav_bytes: &[u8],
) -> Result<Vec<u8>> {
    let wav_sha256 = sha256_hex(wav_bytes);
    let mut record = SweepFile {
        format: FORMAT.into(),
        schema_version: 1,
        sweep: design.clone(),
        wav: WavInfo {
            file: file.into(),
            encoding: encoding.into(),
            sha256: wav_sha256.clone(),
        },
        binding_sha256: Some(binding_sha256(&design.params, &wav_sha256)),
    };
    let json = super::to_json(&record)?;
    let want = design.params.canonical_text();
    let reads_back = serde_json::from_slice::<SweepFile>(&json)
        .is_ok_and(|f| f.sweep.params.canonical_text() == want);
    if reads_back {
        return Ok(json);
    }
    // a binding the analysis could not make again would only cost it a
    // hash: without one, it compares the WAV with the sweep generated
    // again, as for the files of an earlier gliss
    record.binding_sha256 = None;
    super::to_json(&record)
}

/// The SHA-256 (lowercase hex) that binds a sweep's parameters to its
/// WAV: that of [`SweepParams::canonical_text`] followed by the line
/// `wav_sha256: HASH` (the WAV's SHA-256 in lowercase hex). It does not
/// depend on how the JSON that holds the parameters is laid out.
pub fn binding_sha256(params: &SweepParams, wav_sha256: &str) -> String {
    let text = format!(
        "{}wav_sha256: {}\n",
        params.canonical_text(),
        wav_sha256.to_ascii_lowercase()
    );
    sha256_hex(text.as_bytes())
}

/// What a sweep's description records to vouch for its WAV.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SweepBinding {
    /// The WAV's SHA-256 (`wav.sha256`).
    pub wav_sha256: String,
    /// The binding of the parameters to that hash (`binding_sha256`).
    pub binding_sha256: String,
}

impl SweepBinding {
    /// Whether the sweep WAV whose bytes hash to `wav_sha256` holds the
    /// samples `params` generate: the hash is the one recorded, and the
    /// binding made again from `params` (as read back from the
    /// description) and that hash is the one recorded. An edited WAV fails
    /// the first, edited parameters the second; either way the sweep must
    /// be generated again and compared.
    pub fn vouches(&self, params: &SweepParams, wav_sha256: &str) -> bool {
        wav_sha256.eq_ignore_ascii_case(&self.wav_sha256)
            && binding_sha256(params, wav_sha256).eq_ignore_ascii_case(&self.binding_sha256)
    }
}

/// Whether the mono sweep `wav` differs from the sweep `design` generates
/// by more than 1.5 quantisation steps of its encoding (10⁻⁶ for float),
/// or is shorter than the sweep itself. Generates the whole sweep: the
/// check a file no binding vouches for needs.
pub fn differs(design: &SweepDesign, wav: &WavData) -> bool {
    let Some(got) = wav.channels.first() else {
        return true;
    };
    let want = design.generate();
    let step = wav.encoding.step();
    let n = want.len().min(got.len());
    let worst = want[..n]
        .iter()
        .zip(&got[..n])
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    worst > 1.5 * step || got.len() < design.sweep_samples
}

/// A sweep's design as [`load_or_recover`] found it.
#[derive(Debug, Clone)]
pub struct LoadedSweep {
    /// The design.
    pub design: SweepDesign,
    /// With no description beside the WAV: what was recovered from its
    /// samples, said as a note.
    pub recovered: Option<String>,
    /// The binding its `NAME.json` records, if any (not for the
    /// stimulus.wav of a measurement folder, nor a recovered design).
    pub binding: Option<SweepBinding>,
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
    load_described(wav).map(|(d, _)| d)
}

/// [`load_design`], with the binding of a `NAME.json` that records one.
fn load_described(wav: &Path) -> Result<(SweepDesign, Option<SweepBinding>)> {
    if !wav.is_file() {
        return Err(Error::input(format!(
            "the sweep file {} does not exist; give the WAV that gliss sweep wrote",
            wav.display()
        )));
    }
    let side = sidecar_path(wav);
    let (params, binding): (SweepParams, _) = if side.exists() {
        let text = std::fs::read_to_string(&side).map_err(|e| Error::io("read", &side, &e))?;
        let f: SweepFile = serde_json::from_str(&text).map_err(|e| {
            Error::input(format!(
                "{} is not a gliss sweep description ({e}); make the sweep again with gliss sweep",
                side.display()
            ))
        })?;
        let binding = f.binding();
        (f.sweep.params, binding)
    } else {
        let from_manifest = wav
            .parent()
            .and_then(|d| crate::folder::read_manifest(d).ok())
            .map(|m| m.sweep.params);
        match from_manifest {
            Some(p) => (p, None),
            None => {
                return Err(Error::input(format!(
                    "no sweep parameters found for {}: expected {} beside it (gliss sweep writes it); give the sweep WAV that gliss made, with its .json",
                    wav.display(),
                    side.display()
                )));
            }
        }
    };
    Ok((params.design()?, binding))
}

/// The sweep design of `wav` as [`load_design`] finds it or, when the WAV
/// has no description beside it (a sweep played by another program, or a
/// gliss sweep whose .json was lost), recovered from its samples
/// ([`crate::analysis::sweep_track::recovered_design`]), with a note of
/// what was found; with the binding its description records, if any.
/// Refuses, with the reason, a file that is not an exponential sweep.
pub fn load_or_recover(wav: &Path) -> Result<LoadedSweep> {
    use crate::analysis::sweep_track::recovered_design;
    use crate::signal::wav::decode_wav;
    let described = |(design, binding)| LoadedSweep {
        design,
        recovered: None,
        binding,
    };
    if !wav.is_file() || sidecar_path(wav).exists() {
        return load_described(wav).map(described);
    }
    if let Ok(d) = load_described(wav) {
        return Ok(described(d));
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
    let step = data.encoding.step();
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
    Ok(LoadedSweep {
        design: r.design,
        recovered: Some(note),
        binding: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::wav::{SampleEncoding, decode_wav, encode_wav};

    /// A short sweep as `gliss sweep` writes it: the WAV's bytes and its
    /// description.
    fn written(level_dbfs: f64, encoding: SampleEncoding) -> (Vec<u8>, SweepFile) {
        let design = SweepParams {
            requested_length_s: 0.5,
            tail_s: 0.1,
            level_dbfs,
            ..SweepParams::default()
        }
        .design()
        .unwrap();
        let bytes = encode_wav(
            &[&design.generate()],
            design.params.sample_rate_hz,
            encoding,
        );
        let json = describe(&design, "s.wav", &encoding.describe(), &bytes).unwrap();
        (bytes, serde_json::from_slice(&json).unwrap())
    }

    #[test]
    fn a_sweep_as_written_is_vouched_for() {
        let (bytes, f) = written(-20.0, SampleEncoding::Float);
        let b = f.binding_sha256.as_deref().expect("a binding is written");
        assert_eq!(b.len(), 64);
        assert_eq!(f.wav.sha256, sha256_hex(&bytes));
        assert_eq!(b, binding_sha256(&f.sweep.params, &f.wav.sha256));
        assert!(f.vouches(&bytes));
        // the hash may be given in capitals
        let upper = f.binding().unwrap();
        assert!(upper.vouches(&f.sweep.params, &f.wav.sha256.to_ascii_uppercase()));
    }

    #[test]
    fn the_binding_ignores_the_layout_of_the_json() {
        let (bytes, f) = written(-20.0, SampleEncoding::Float);
        // compact, keys sorted (serde_json's map is ordered), a number
        // written another way that reads to the same bits
        let v = serde_json::to_value(&f).unwrap();
        let compact = serde_json::to_string(&v).unwrap();
        let compact = compact.replace("\"end_hz\":20000.0", "\"end_hz\":2e4");
        assert!(compact.contains("2e4"));
        let g: SweepFile = serde_json::from_str(&compact).unwrap();
        assert_eq!(g.sweep.params.end_hz, 20_000.0);
        assert!(g.vouches(&bytes));
    }

    #[test]
    fn an_edited_wav_or_design_or_a_missing_binding_is_not_vouched_for() {
        let (bytes, f) = written(-20.0, SampleEncoding::Float);
        // one byte of one sample
        let mut changed = bytes.clone();
        let last = changed.len() - 4 * 2000;
        changed[last] ^= 1;
        assert!(!f.vouches(&changed));
        // the level edited in the description: the WAV is the same
        let mut g = f.clone();
        g.sweep.params.level_dbfs = -14.0;
        assert!(!g.vouches(&bytes));
        // one ulp of a fade
        let mut g = f.clone();
        g.sweep.params.fade_in_octaves =
            f64::from_bits(g.sweep.params.fade_in_octaves.to_bits() + 1);
        assert!(!g.vouches(&bytes));
        // the hash edited along with the WAV: the binding no longer holds
        let mut g = f.clone();
        g.wav.sha256 = sha256_hex(&changed);
        assert!(!g.vouches(&changed));
        // an earlier gliss wrote no binding
        let mut g = f.clone();
        g.binding_sha256 = None;
        assert!(!g.vouches(&bytes));
        let old = serde_json::to_string(&g).unwrap();
        assert!(!old.contains("binding_sha256"));
        let h: SweepFile = serde_json::from_str(&old).unwrap();
        assert_eq!(h.binding_sha256, None);
    }

    #[test]
    fn a_vouched_sweep_passes_the_comparison_it_skips() {
        // what the binding vouches for is a file the regeneration passes,
        // at every encoding and up to full scale: skipping it hides nothing
        for (level, enc) in [
            (-20.0, SampleEncoding::Float),
            (0.0, SampleEncoding::Float),
            (-3.0, SampleEncoding::Int(24)),
            (0.0, SampleEncoding::Int(16)),
        ] {
            let (bytes, f) = written(level, enc);
            assert!(f.vouches(&bytes));
            let wav = decode_wav(&bytes).unwrap();
            assert!(!differs(&f.sweep, &wav), "{level} dBFS, {enc:?}");
            // and the comparison sees an edited level
            let mut edited = f.sweep.params.clone();
            edited.level_dbfs = level - 6.0;
            assert!(differs(&edited.design().unwrap(), &wav));
        }
    }
}

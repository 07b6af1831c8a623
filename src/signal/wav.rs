//! WAV input and output (hound), with errors in the user's terms.
//!
//! Integer samples are scaled by 2^(bits−1), so full scale reads ±1.0;
//! writing rounds and clips to the integer range.

use std::io::{Cursor, Read};
use std::path::Path;

use crate::error::{Error, Result};

/// Sample encoding of a WAV file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SampleEncoding {
    /// Signed integers of the given bits (8-bit WAV is unsigned on disk).
    Int(u16),
    /// 32-bit IEEE float.
    Float,
}

impl SampleEncoding {
    /// The step a sample of this encoding is known to: one quantisation
    /// step of full scale for integers, 10⁻⁶ for 32-bit float (our
    /// choice: well above float's rounding near full scale, far below
    /// any difference between two sweeps).
    pub fn step(self) -> f64 {
        match self {
            SampleEncoding::Int(b) => 1.0 / f64::from(1u32 << (b - 1)),
            SampleEncoding::Float => 1e-6,
        }
    }

    /// From the `--bits` option: 16 or 24 integer, 32 float.
    pub fn from_bits(bits: u16) -> Result<Self> {
        match bits {
            16 => Ok(SampleEncoding::Int(16)),
            24 => Ok(SampleEncoding::Int(24)),
            32 => Ok(SampleEncoding::Float),
            _ => Err(Error::parameter(format!(
                "--bits {bits} is not supported; use 16, 24 or 32 (32 = float)"
            ))),
        }
    }

    /// A short description, e.g. "24-bit integer".
    pub fn describe(self) -> String {
        match self {
            SampleEncoding::Int(b) => format!("{b}-bit integer"),
            SampleEncoding::Float => "32-bit float".to_string(),
        }
    }
}

/// A decoded WAV file: one vector per channel.
#[derive(Debug, Clone)]
pub struct WavData {
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// The encoding found in the file.
    pub encoding: SampleEncoding,
    /// Samples per channel, full scale ±1.0.
    pub channels: Vec<Vec<f64>>,
}

impl WavData {
    /// Frames (samples per channel).
    pub fn frames(&self) -> usize {
        self.channels.first().map_or(0, Vec::len)
    }
}

/// Reads a WAV file; `what` names it in messages ("the recording").
pub fn read_wav(path: &Path, what: &str) -> Result<WavData> {
    let bytes = std::fs::read(path).map_err(|e| Error::io("read", path, &e))?;
    decode_wav(&bytes).map_err(|m| Error::input(format!("{what} {} {m}", path.display())))
}

/// Decodes WAV bytes; on failure returns the end of a sentence such as
/// "is not a WAV file".
pub fn decode_wav(bytes: &[u8]) -> crate::Result<WavData> {
    // the smallest WAV (RIFF, fmt and data headers) is 44 bytes
    if bytes.len() < 44 {
        return Err(Error::input(if bytes.is_empty() {
            "is empty (0 bytes); record or export it again".to_string()
        } else {
            format!(
                "is {} bytes long: not a WAV file (a WAV file has at least 44 bytes); record or export it again",
                bytes.len()
            )
        }));
    }
    let reader =
        hound::WavReader::new(Cursor::new(bytes)).map_err(|e| Error::input(describe_hound(e)))?;
    read_all(reader, bytes.len())
}

/// Reads every sample; `available` is the number of bytes the file has, so
/// that a header promising more data than there is cannot make gliss
/// reserve memory for it.
fn read_all<R: Read>(reader: hound::WavReader<R>, available: usize) -> crate::Result<WavData> {
    let spec = reader.spec();
    let nch = usize::from(spec.channels);
    if nch == 0 {
        return Err(Error::input("has no channels"));
    }
    let expected = reader.len() as usize;
    let encoding = match spec.sample_format {
        hound::SampleFormat::Float => {
            if spec.bits_per_sample != 32 {
                return Err(Error::input(format!(
                    "holds {}-bit float samples; only 32-bit float is supported",
                    spec.bits_per_sample
                )));
            }
            SampleEncoding::Float
        }
        hound::SampleFormat::Int => SampleEncoding::Int(spec.bits_per_sample),
    };
    // no more samples than the bytes could hold, whatever the header says
    let bytes_per_sample = usize::from(spec.bits_per_sample).div_ceil(8).max(1);
    let mut interleaved: Vec<f64> = Vec::with_capacity(expected.min(available / bytes_per_sample));
    let truncated = |got: usize| {
        format!(
            "is truncated: its header promises {} frames but the data ends after {}; export or copy the file again",
            expected / nch,
            got / nch
        )
    };
    match encoding {
        SampleEncoding::Float => {
            for s in reader.into_samples::<f32>() {
                match s {
                    Ok(v) => interleaved.push(f64::from(v)),
                    Err(_) => return Err(Error::input(truncated(interleaved.len()))),
                }
            }
        }
        SampleEncoding::Int(bits) => {
            if !(8..=32).contains(&bits) {
                return Err(Error::input(format!(
                    "holds {bits}-bit samples, which gliss cannot read"
                )));
            }
            let scale = 1.0 / f64::from(1u32 << (bits - 1));
            for s in reader.into_samples::<i32>() {
                match s {
                    Ok(v) => interleaved.push(f64::from(v) * scale),
                    Err(_) => return Err(Error::input(truncated(interleaved.len()))),
                }
            }
        }
    }
    if interleaved.len() < expected {
        return Err(Error::input(truncated(interleaved.len())));
    }
    let frames = interleaved.len() / nch;
    let mut channels = vec![Vec::with_capacity(frames); nch];
    for frame in interleaved.chunks_exact(nch) {
        for (c, &v) in frame.iter().enumerate() {
            channels[c].push(v);
        }
    }
    Ok(WavData {
        sample_rate_hz: spec.sample_rate,
        encoding,
        channels,
    })
}

#[cold]
fn describe_hound(e: hound::Error) -> String {
    match e {
        hound::Error::FormatError(m) => {
            format!("is not a readable WAV file ({m}); give a .wav file of PCM or 32-bit float samples")
        }
        hound::Error::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            "is not a WAV file or is cut short before its audio data; give a complete .wav file".into()
        }
        hound::Error::Unsupported => {
            "uses a WAV encoding gliss cannot read; convert it to 16/24/32-bit integer or 32-bit float PCM".into()
        }
        other => format!("could not be read as WAV: {other}"),
    }
}

/// Encodes channels (equal lengths) as a WAV file in memory.
pub fn encode_wav(channels: &[&[f64]], sample_rate_hz: u32, encoding: SampleEncoding) -> Vec<u8> {
    let (bits, format) = match encoding {
        SampleEncoding::Int(b) => (b, hound::SampleFormat::Int),
        SampleEncoding::Float => (32, hound::SampleFormat::Float),
    };
    let spec = hound::WavSpec {
        channels: channels.len() as u16,
        sample_rate: sample_rate_hz,
        bits_per_sample: bits,
        sample_format: format,
    };
    let frames = channels.first().map_or(0, |c| c.len());
    let mut out = Cursor::new(Vec::with_capacity(frames * channels.len() * 4 + 64));
    {
        // Writing into a Vec cannot fail except on a programming error
        // (an inconsistent spec), which the match above rules out.
        let mut w = hound::WavWriter::new(&mut out, spec).expect("valid WAV spec");
        let full = match encoding {
            SampleEncoding::Int(b) => f64::from(1u32 << (b - 1)),
            SampleEncoding::Float => 1.0,
        };
        for n in 0..frames {
            for ch in channels {
                match encoding {
                    SampleEncoding::Float => w.write_sample(ch[n] as f32),
                    SampleEncoding::Int(_) => {
                        let v = (ch[n] * full).round().clamp(-full, full - 1.0) as i32;
                        w.write_sample(v)
                    }
                }
                .expect("writing to memory");
            }
        }
        w.finalize().expect("finalising a WAV in memory");
    }
    out.into_inner()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_every_encoding() {
        let a: Vec<f64> = (0..1000).map(|n| 0.9 * (n as f64 * 0.01).sin()).collect();
        let b: Vec<f64> = a.iter().map(|v| -v * 0.5).collect();
        for (enc, tol) in [
            (SampleEncoding::Int(16), 1.0 / 32768.0),
            (SampleEncoding::Int(24), 1.0 / 8_388_608.0),
            (SampleEncoding::Float, 1e-7),
        ] {
            let bytes = encode_wav(&[&a, &b], 44_100, enc);
            let d = decode_wav(&bytes).unwrap();
            assert_eq!(d.sample_rate_hz, 44_100);
            assert_eq!(d.encoding, enc);
            assert_eq!(d.channels.len(), 2);
            assert_eq!(d.frames(), 1000);
            for (x, y) in a.iter().zip(&d.channels[0]) {
                assert!((x - y).abs() <= tol, "{enc:?}");
            }
            assert!((d.channels[1][10] - b[10]).abs() <= tol);
        }
    }

    #[test]
    fn int32_files_read_at_full_scale() {
        let spec = hound::WavSpec {
            channels: 1,
            sample_rate: 48_000,
            bits_per_sample: 32,
            sample_format: hound::SampleFormat::Int,
        };
        let mut c = Cursor::new(Vec::new());
        let mut w = hound::WavWriter::new(&mut c, spec).unwrap();
        w.write_sample(i32::MIN).unwrap();
        w.write_sample(1 << 30).unwrap();
        w.finalize().unwrap();
        let d = decode_wav(c.get_ref()).unwrap();
        assert_eq!(d.channels[0], vec![-1.0, 0.5]);
    }

    #[test]
    fn garbage_and_truncation_are_reported() {
        assert!(
            decode_wav(b"this is not audio at all, just text")
                .unwrap_err()
                .message()
                .to_string()
                .contains("not")
        );
        let a = vec![0.1; 1000];
        let bytes = encode_wav(&[&a], 48_000, SampleEncoding::Int(16));
        let cut = &bytes[..bytes.len() / 2];
        assert!(
            decode_wav(cut)
                .unwrap_err()
                .message()
                .to_string()
                .contains("truncated")
        );
        assert!(decode_wav(&bytes[..20]).is_err());
    }
}

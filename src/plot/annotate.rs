//! Words inside a PNG: a tEXt chunk (PNG specification, ISO/IEC 15948,
//! section 11.3.4.3) that says in text what a plot marks, so that a script
//! or a test can read what the picture shows without reading pixels.
//! Written by hand because it is one chunk inserted before IEND; the CRC is
//! crc32fast's (the PNG CRC-32).

use std::fs;
use std::path::Path;

use crate::error::{Error, Result};

/// The keyword gliss writes its marks under.
pub const MARKS_KEYWORD: &str = "gliss-marks";

/// `png` with a tEXt chunk `keyword` = `text` inserted right after its
/// IHDR chunk (so that a decoder reading the header sees it); `None` when
/// `png` is not a PNG ending in IEND or the keyword is not 1–79 Latin-1
/// characters.
pub fn with_text(png: &[u8], keyword: &str, text: &str) -> Option<Vec<u8>> {
    const IEND: [u8; 12] = [0, 0, 0, 0, b'I', b'E', b'N', b'D', 0xae, 0x42, 0x60, 0x82];
    if png.len() < 20 || png[png.len() - 12..] != IEND {
        return None;
    }
    if keyword.is_empty() || keyword.len() > 79 || !keyword.is_ascii() {
        return None;
    }
    let mut data = Vec::with_capacity(keyword.len() + 1 + text.len());
    data.extend_from_slice(keyword.as_bytes());
    data.push(0);
    // tEXt is Latin-1: anything beyond ASCII is replaced
    data.extend(
        text.chars()
            .map(|c| if c.is_ascii() { c as u8 } else { b'?' }),
    );
    let mut chunk = Vec::with_capacity(data.len() + 12);
    chunk.extend_from_slice(&(data.len() as u32).to_be_bytes());
    let mut typed = b"tEXt".to_vec();
    typed.extend_from_slice(&data);
    chunk.extend_from_slice(&typed);
    chunk.extend_from_slice(&crc32fast::hash(&typed).to_be_bytes());
    // the signature (8 bytes), then IHDR: length, type, 13 bytes, CRC
    const AFTER_IHDR: usize = 8 + 4 + 4 + 13 + 4;
    if &png[12..16] != b"IHDR" || png.len() < AFTER_IHDR + 12 {
        return None;
    }
    let mut out = png[..AFTER_IHDR].to_vec();
    out.extend_from_slice(&chunk);
    out.extend_from_slice(&png[AFTER_IHDR..]);
    Some(out)
}

/// Adds the tEXt chunk `keyword` = `text` to the PNG file at `path`.
pub fn add_text(path: &Path, keyword: &str, text: &str) -> Result<()> {
    let png = fs::read(path).map_err(|e| Error::io("read", path, &e))?;
    let out = with_text(&png, keyword, text).ok_or_else(|| {
        Error::input(format!(
            "{} is not a complete PNG; could not note its marks",
            path.display()
        ))
    })?;
    fs::write(path, out).map_err(|e| Error::io("write", path, &e))
}

/// The row filter and compression the plots are encoded with, chosen by
/// measurement on the demo's charts (docs/performance.md): the Paeth
/// filter on every row, zlib at its fast level. Trying every filter on
/// every row (the adaptive choice) costs several times the time for a few
/// per cent of size.
pub const PNG_FILTER: png::FilterType = png::FilterType::Paeth;
/// See [`PNG_FILTER`].
pub const PNG_COMPRESSION: png::Compression = png::Compression::Fast;

/// An RGB image of `size` as a PNG (8 bits per channel) with `marks` as a
/// tEXt chunk under [`MARKS_KEYWORD`] (left out when empty), encoded with
/// [`PNG_FILTER`] and [`PNG_COMPRESSION`].
pub fn encode_png(
    px: &[u8],
    size: (u32, u32),
    marks: &str,
) -> std::result::Result<Vec<u8>, png::EncodingError> {
    encode_png_with(px, size, marks, PNG_FILTER, PNG_COMPRESSION)
}

/// [`encode_png`] with a chosen filter and compression (for measuring
/// them).
pub fn encode_png_with(
    px: &[u8],
    size: (u32, u32),
    marks: &str,
    filter: png::FilterType,
    compression: png::Compression,
) -> std::result::Result<Vec<u8>, png::EncodingError> {
    let mut out = Vec::with_capacity(px.len() / 8);
    {
        let mut e = png::Encoder::new(&mut out, size.0, size.1);
        e.set_color(png::ColorType::Rgb);
        e.set_depth(png::BitDepth::Eight);
        e.set_filter(filter);
        e.set_adaptive_filter(png::AdaptiveFilterType::NonAdaptive);
        e.set_compression(compression);
        if !marks.is_empty() {
            // tEXt is Latin-1: anything beyond ASCII is replaced
            let text: String = marks
                .chars()
                .map(|c| if c.is_ascii() { c } else { '?' })
                .collect();
            e.add_text_chunk(MARKS_KEYWORD.to_string(), text)?;
        }
        let mut w = e.write_header()?;
        w.write_image_data(px)?;
        w.finish()?;
    }
    Ok(out)
}

/// What a chart marks, gathered while it is drawn and written into its PNG
/// under [`MARKS_KEYWORD`] as one `key: value` line each, so that a test
/// or a script reads the tick labels, the axis ranges, the legend's box
/// and how much data it covers without reading pixels. Boxes are in
/// pixels of the whole image: `x0,y0,x1,y1`.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Marks {
    lines: Vec<String>,
}

impl Marks {
    /// No marks yet.
    pub fn new() -> Self {
        Marks::default()
    }

    /// Adds the line `key: value`.
    pub fn push(&mut self, key: &str, value: impl std::fmt::Display) {
        self.lines.push(format!("{key}: {value}"));
    }

    /// Adds lines already written as `key: value`.
    pub fn extend_lines(&mut self, text: &str) {
        self.lines
            .extend(text.lines().filter(|l| !l.is_empty()).map(str::to_string));
    }

    /// The marks as the text of the chunk, one line each.
    pub fn text(&self) -> String {
        self.lines.join("\n")
    }

    /// Writes the marks into the PNG at `path`.
    pub fn write(&self, path: &Path) -> Result<()> {
        add_text(path, MARKS_KEYWORD, &self.text())
    }

    /// Encodes the chart `px` (RGB, [`super::theme::SIZE`]) as a PNG with
    /// these marks as its tEXt chunk and writes it to `path`.
    pub fn save(&self, path: &Path, px: &[u8]) -> Result<()> {
        let png = encode_png(px, super::theme::SIZE, &self.text()).map_err(|e| {
            Error::input(format!("could not encode the plot {}: {e}", path.display()))
        })?;
        fs::write(path, png).map_err(|e| Error::io("write", path, &e))
    }
}

/// The values of every line `key: value` in the marks of `png` (the text
/// under [`MARKS_KEYWORD`]), in order.
pub fn mark_values(png: &[u8], key: &str) -> Vec<String> {
    let prefix = format!("{key}: ");
    texts(png)
        .into_iter()
        .filter(|(k, _)| k == MARKS_KEYWORD)
        .flat_map(|(_, t)| {
            t.lines()
                .filter_map(|l| l.strip_prefix(&prefix).map(str::to_string))
                .collect::<Vec<_>>()
        })
        .collect()
}

/// The tEXt chunks of a PNG as (keyword, text), in file order.
pub fn texts(png: &[u8]) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let mut i = 8;
    while i + 12 <= png.len() {
        let len = u32::from_be_bytes([png[i], png[i + 1], png[i + 2], png[i + 3]]) as usize;
        let Some(end) = (i + 8).checked_add(len).filter(|&e| e + 4 <= png.len()) else {
            break;
        };
        if &png[i + 4..i + 8] == b"tEXt" {
            let data = &png[i + 8..end];
            if let Some(z) = data.iter().position(|&b| b == 0) {
                out.push((
                    String::from_utf8_lossy(&data[..z]).into_owned(),
                    data[z + 1..].iter().map(|&b| b as char).collect(),
                ));
            }
        }
        i = end + 4;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_text_chunk_reads_back_and_png_decodes() {
        // a 1×1 grey PNG made by the png crate (the reference decoder)
        let mut png = Vec::new();
        {
            let mut e = png::Encoder::new(&mut png, 1, 1);
            e.set_color(png::ColorType::Grayscale);
            e.set_depth(png::BitDepth::Eight);
            let mut w = e.write_header().unwrap();
            w.write_image_data(&[128]).unwrap();
        }
        let marked = with_text(&png, MARKS_KEYWORD, "T30 1/1 500 Hz: audible").unwrap();
        assert_eq!(
            texts(&marked),
            vec![(
                MARKS_KEYWORD.to_string(),
                "T30 1/1 500 Hz: audible".to_string()
            )]
        );
        // the png crate still decodes it and sees the same text (so the CRC
        // is right)
        let d = png::Decoder::new(std::io::Cursor::new(&marked));
        let r = d.read_info().unwrap();
        let t = &r.info().uncompressed_latin1_text;
        assert_eq!(t.len(), 1);
        assert_eq!(t[0].keyword, MARKS_KEYWORD);
        assert_eq!(t[0].text, "T30 1/1 500 Hz: audible");
        assert!(with_text(b"not a png", "k", "v").is_none());
    }
}

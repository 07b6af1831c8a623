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

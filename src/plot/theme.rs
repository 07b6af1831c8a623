//! The house look: colours, the embedded font, the canvas every plot
//! starts from, and the colour ramp of bands, slices and levels.

use std::path::Path;
use std::sync::Once;

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::error::{Error, ErrorKind, Result};

/// Font family name under which the embedded font is registered.
pub(super) const FONT: &str = "sans-serif";
/// DejaVu Sans (Bitstream Vera licence, assets/fonts/DejaVuSans-LICENSE.txt),
/// embedded so that plots need no system fonts.
static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Main curve colour.
pub const BLUE: RGBColor = RGBColor(22, 86, 140);
/// Second curve colour.
pub const ORANGE: RGBColor = RGBColor(196, 98, 24);
/// Grid colour.
pub const GRID: RGBColor = RGBColor(225, 225, 225);
/// Minor grid colour.
pub const GRID_MINOR: RGBColor = RGBColor(242, 242, 242);

/// Plot size in pixels.
pub const SIZE: (u32, u32) = (1200, 800);

pub(super) fn register_font() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        // The bytes are a valid TrueType font compiled into the binary.
        let _ = plotters::style::register_font(FONT, FontStyle::Normal, FONT_BYTES);
    });
}

pub(super) type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

/// The pixels of one chart of [`SIZE`] (RGB, 8 bits each), drawn into by
/// [`canvas`] and encoded by [`super::annotate::Marks::save`].
pub(super) fn pixels() -> Vec<u8> {
    vec![0; SIZE.0 as usize * SIZE.1 as usize * 3]
}

/// A white canvas of [`SIZE`] on `px` ([`pixels`]) with `heading` across
/// its top: the root (to present when done) and the area below the
/// heading. `path` is the file it will be saved to, for messages.
pub(super) fn canvas<'a>(
    px: &'a mut [u8],
    path: &Path,
    heading: &str,
) -> Result<(Area<'a>, Area<'a>)> {
    register_font();
    let root = BitMapBackend::with_buffer(px, SIZE).into_drawing_area();
    root.fill(&WHITE).map_err(plot_error(path))?;
    let (head, body) = root.split_vertically(50);
    head.draw(&Text::new(
        heading.to_string(),
        (20, 14),
        (FONT, 26).into_font(),
    ))
    .map_err(plot_error(path))?;
    Ok((root, body))
}

pub(super) fn plot_error<E: std::fmt::Display>(path: &Path) -> impl FnOnce(E) -> Error + '_ {
    move |e| {
        let text = e.to_string();
        // the plotting crate keeps the system's error only as text inside
        // its own (the PNG encoder wraps it again), so a full disk is
        // recognised by the system's error number in that text
        if crate::error::text_says_full(&text) {
            return Error::new(
                ErrorKind::DiskFull,
                format!("could not draw {}: the disk is full", path.display()),
            );
        }
        Error::new(
            ErrorKind::Io,
            format!("could not draw {}: {text}", path.display()),
        )
    }
}

/// Colour of a target curve and its tolerance band.
pub const TARGET: RGBColor = RGBColor(40, 40, 40);
/// Fill of a target's tolerance band.
pub const TOLERANCE: RGBColor = RGBColor(110, 170, 110);

/// Colour of harmonic order n (2..=9), the project's own palette.
pub fn order_colour(n: u32) -> RGBColor {
    match n {
        2 => ORANGE,
        3 => RGBColor(46, 139, 87),
        4 => RGBColor(120, 80, 160),
        5 => RGBColor(178, 34, 52),
        6 => RGBColor(0, 128, 128),
        7 => RGBColor(128, 128, 0),
        8 => RGBColor(139, 90, 43),
        _ => RGBColor(90, 90, 90),
    }
}

/// Colour of the k-th of `n` bands: from deep blue at low frequencies
/// through green to a warm red at high ones (the project's own ramp,
/// [`ramp`]).
pub fn band_colour(k: usize, n: usize) -> RGBColor {
    ramp(if n <= 1 {
        0.0
    } else {
        k as f64 / (n - 1) as f64
    })
}

/// The project's own colour ramp at u in [0, 1]: deep blue, green, ochre,
/// warm red. Bands run along it from low to high frequency, the decay
/// spectrum from its first slice to its last, the spectrogram from its
/// floor to its maximum.
pub fn ramp(u: f64) -> RGBColor {
    let stops = [
        (22.0, 86.0, 140.0),
        (46.0, 139.0, 87.0),
        (196.0, 150.0, 24.0),
        (178.0, 34.0, 52.0),
    ];
    let u = u.clamp(0.0, 1.0) * (stops.len() - 1) as f64;
    let i = (u.floor() as usize).min(stops.len() - 2);
    let t = u - i as f64;
    let mix = |a: f64, b: f64| (a + (b - a) * t).round() as u8;
    RGBColor(
        mix(stops[i].0, stops[i + 1].0),
        mix(stops[i].1, stops[i + 1].1),
        mix(stops[i].2, stops[i + 1].2),
    )
}

/// Colour of a spectrogram level `db` (dB re the maximum, ≤ 0) above a
/// floor of `floor_db`: viridis from the floor to 0 dB, a perceptually
/// uniform map (equal steps of level look like equal steps of colour, and
/// it reads in grey and to most colour-blind eyes; van der Walt and Smith
/// 2015, as plotters' `colormaps` feature gives it), dark at the floor.
pub fn level_colour(db: f64, floor_db: f64) -> RGBColor {
    use plotters::style::colors::colormaps::{ColorMap, ViridisRGB};
    let u = (1.0 - db / floor_db).clamp(0.0, 1.0);
    ViridisRGB.get_color(u as f32)
}

/// The colour of input `k` of a comparison: the house blue and orange,
/// then the distortion orders' colours.
pub fn input_colour(k: usize) -> RGBColor {
    match k {
        0 => BLUE,
        1 => ORANGE,
        _ => order_colour(k as u32 + 1),
    }
}

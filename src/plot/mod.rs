//! PNG plots (plotters, bitmap backend, the project's own embedded font),
//! one chart per file.
//!
//! The look is gliss's own: white ground, light grey grid, a deep blue for
//! the main curve and a burnt orange for the second quantity
//! (theme.rs). Which plots a folder gets is [`PlotKind`]'s business; the
//! folder writers hand their data to [`draw_measurement`],
//! [`draw_average`] or [`draw_comparison`] for each kind the data draws.
//! This module exists only with the `plots` cargo feature.

use std::path::Path;

use crate::analysis::Analysis;
use crate::analysis::room::BandResult;
use crate::error::{Error, ErrorKind, Result};
use crate::model::plot_kind::PlotKind;

/// The smallest text on any plot, px, on the 1200 × 800 canvas: tick
/// labels and legends. The report prints plots at least 8 · 1200 / this
/// points wide, so that no printed plot text is smaller than 8 pt.
pub const SMALLEST_TEXT_PX: u32 = 24;

pub mod align;
pub mod annotate;
mod axes;
mod theme;

mod average_response;
mod average_reverberation;
mod compare_difference;
mod compare_response;
mod compare_reverberation;
mod decay;
mod decay_spectrum;
pub mod directivity;
mod distortion;
mod group_delay;
mod impedance;
mod impulse;
mod mtf;
pub mod noise;
mod phase;
mod response;
mod reverberation;
mod spectrogram;
pub mod tuning;

pub use average_response::average_response_png;
pub use average_reverberation::average_reverberation_png;
pub use axes::{TargetOverlay, axis_end, draw_target, frequency_ticks, log_ticks, wrap_phase};
pub use compare_difference::compare_difference_png;
pub use compare_response::compare_response_png;
pub use compare_reverberation::{BandPoints, compare_reverberation_png};
pub use decay::decay_png;
pub use decay_spectrum::decay_spectrum_png;
pub use distortion::distortion_png;
pub use group_delay::group_delay_png;
pub use impedance::impedance_png;
pub use impulse::impulse_png;
pub use phase::{PhaseView, phase_png};
pub use response::response_png;
pub use reverberation::reverberation_png;
pub use spectrogram::spectrogram_png;
pub use theme::{
    BLUE, GRID, GRID_MINOR, ORANGE, SIZE, TARGET, TOLERANCE, band_colour, input_colour,
    level_colour, order_colour, ramp,
};

/// What the plots of one measurement folder are drawn from.
#[derive(Debug, Clone, Copy)]
pub struct MeasurementPlotInput<'a> {
    /// A short title for the headings.
    pub title: &'a str,
    /// The analysis of the measured channel.
    pub analysis: &'a Analysis,
    /// A target to draw over the response, if one was given.
    pub target: Option<&'a TargetOverlay>,
    /// How the phase plot shows the phase (wrapped unless asked).
    pub phase_view: PhaseView,
    /// An impedance measurement's impedance and, if read, its
    /// small-signal parameters.
    pub impedance: Option<(
        &'a crate::analysis::impedance::Impedance,
        Option<&'a crate::analysis::thiele_small::ThieleSmall>,
    )>,
}

impl MeasurementPlotInput<'_> {
    /// The plots this analysis draws, in [`PlotKind::MEASUREMENT`] order:
    /// response, impulse, phase and group delay always; distortion, decay
    /// spectrum, spectrogram, decay and reverberation where the analysis
    /// has them.
    pub fn kinds(&self) -> Vec<PlotKind> {
        let a = self.analysis;
        PlotKind::MEASUREMENT
            .into_iter()
            .filter(|k| match k {
                PlotKind::Response | PlotKind::Impulse | PlotKind::Phase | PlotKind::GroupDelay => {
                    true
                }
                PlotKind::Distortion => a.distortion.is_some(),
                PlotKind::DecaySpectrum => a.decay_spectrum.is_some() && a.gate.is_some(),
                PlotKind::Spectrogram => a.spectrogram.is_some(),
                PlotKind::Decay | PlotKind::Reverberation => a.room.is_some(),
                PlotKind::Impedance => self.impedance.is_some(),
                PlotKind::Mtf => a.speech.as_ref().is_some_and(|s| !s.bands.is_empty()),
                _ => false,
            })
            .collect()
    }
}

/// Draws the measurement plot `kind` of `input` to `path`. A kind the
/// analysis does not draw (see [`MeasurementPlotInput::kinds`]) is an
/// error.
pub fn draw_measurement(
    kind: PlotKind,
    path: &Path,
    input: &MeasurementPlotInput<'_>,
) -> Result<()> {
    let (a, title) = (input.analysis, input.title);
    let f = &a.response.frequency_hz;
    match kind {
        PlotKind::Response => response_png(
            path,
            title,
            f,
            &a.response.magnitude_db,
            &a.response.phase_deg,
            &a.response.smoothing.words(),
            a.gate.map(|g| (g.resolution_hz, g.resolved_to_hz)),
            input.target,
        ),
        PlotKind::Impulse => impulse_png(
            path,
            title,
            &a.impulse.samples,
            a.impulse.start_s,
            a.delay_s,
            a.sample_rate_hz,
        ),
        PlotKind::Phase => phase_png(path, title, f, &a.phase, input.phase_view),
        PlotKind::GroupDelay => group_delay_png(path, title, f, &a.phase, a.delay_s),
        PlotKind::Distortion => match &a.distortion {
            Some(d) => distortion_png(path, title, &a.response, d),
            None => Err(not_drawn(kind, "the analysis has no distortion")),
        },
        PlotKind::DecaySpectrum => match (&a.decay_spectrum, a.gate) {
            (Some(slices), Some(g)) => {
                decay_spectrum_png(path, title, f, slices, (g.resolution_hz, g.resolved_to_hz))
            }
            _ => Err(not_drawn(kind, "the analysis has no gated decay spectrum")),
        },
        PlotKind::Spectrogram => match &a.spectrogram {
            Some(s) => spectrogram_png(path, title, s),
            None => Err(not_drawn(kind, "the analysis has no spectrogram")),
        },
        PlotKind::Decay | PlotKind::Reverberation => match (&a.room, kind) {
            (Some(r), PlotKind::Decay) => decay_png(path, title, r),
            (Some(r), _) => reverberation_png(path, title, r),
            (None, _) => Err(not_drawn(kind, "the analysis has no room parameters")),
        },
        PlotKind::Impedance => match input.impedance {
            Some((z, ts)) => impedance_png(path, title, z, ts),
            None => Err(not_drawn(kind, "the analysis has no impedance")),
        },
        PlotKind::Mtf => match &a.speech {
            Some(s) => mtf::mtf_png(path, title, s),
            None => Err(not_drawn(
                kind,
                "the analysis has no speech transmission index",
            )),
        },
        _ => Err(not_drawn(kind, "it is not a plot of a measurement")),
    }
}

/// What the plots of an average are drawn from.
#[derive(Debug, Clone, Copy)]
pub struct AveragePlotInput<'a> {
    /// A short title for the headings.
    pub title: &'a str,
    /// The common frequency grid, Hz.
    pub frequency_hz: &'a [f64],
    /// Each position's label and magnitude on the grid, dB (NaN where
    /// it has none).
    pub positions: &'a [(String, Vec<f64>)],
    /// The power average on the grid, dB.
    pub average: &'a [f64],
    /// The average's smoothing in words.
    pub smoothing: &'a str,
    /// The averaged bands (with their spread over the positions).
    pub bands: &'a [BandResult],
}

impl AveragePlotInput<'_> {
    /// The plots this average draws: the response; the reverberation
    /// times where it has bands.
    pub fn kinds(&self) -> Vec<PlotKind> {
        PlotKind::AVERAGE
            .into_iter()
            .filter(|k| *k != PlotKind::AverageReverberation || !self.bands.is_empty())
            .collect()
    }
}

/// Draws the average plot `kind` of `input` to `path`.
pub fn draw_average(kind: PlotKind, path: &Path, input: &AveragePlotInput<'_>) -> Result<()> {
    match kind {
        PlotKind::AverageResponse => average_response_png(
            path,
            input.title,
            input.frequency_hz,
            input.positions,
            input.average,
            input.smoothing,
        ),
        PlotKind::AverageReverberation => average_reverberation_png(path, input.title, input.bands),
        _ => Err(not_drawn(kind, "it is not a plot of an average")),
    }
}

/// What the plots of a comparison are drawn from.
#[derive(Debug, Clone, Copy)]
pub struct ComparisonPlotInput<'a> {
    /// A short title for the headings.
    pub title: &'a str,
    /// The inputs' labels, the reference first.
    pub labels: &'a [String],
    /// The common frequency grid, Hz.
    pub frequency_hz: &'a [f64],
    /// Each input's label and magnitude on the grid, dB (NaN where it has
    /// none), the reference first.
    pub responses: &'a [(String, Vec<f64>)],
    /// Each input but the reference: its label and its magnitude minus
    /// the reference's, dB.
    pub differences: &'a [(String, Vec<f64>)],
    /// The responses' smoothing in words.
    pub smoothing: &'a str,
    /// A target to draw over the responses, if one was given.
    pub target: Option<&'a TargetOverlay>,
    /// The decay time of each band per input, and which to mark.
    pub bands: &'a [BandPoints],
    /// What a mark (a ring) means, for the legend.
    pub mark_label: &'a str,
}

impl ComparisonPlotInput<'_> {
    /// The plots this comparison draws: the responses over each other,
    /// their differences, and the reverberation times where there are
    /// bands.
    pub fn kinds(&self) -> Vec<PlotKind> {
        PlotKind::COMPARISON
            .into_iter()
            .filter(|k| *k != PlotKind::CompareReverberation || !self.bands.is_empty())
            .collect()
    }
}

/// Draws the comparison plot `kind` of `input` to `path`.
pub fn draw_comparison(kind: PlotKind, path: &Path, input: &ComparisonPlotInput<'_>) -> Result<()> {
    match kind {
        PlotKind::CompareResponse => compare_response_png(
            path,
            input.title,
            input.frequency_hz,
            input.responses,
            input.smoothing,
            input.target,
        ),
        PlotKind::CompareDifference => compare_difference_png(
            path,
            input.title,
            input.frequency_hz,
            input.differences,
            input.labels.first().map_or("the first", String::as_str),
        ),
        PlotKind::CompareReverberation => compare_reverberation_png(
            path,
            input.title,
            input.labels,
            input.bands,
            input.mark_label,
        ),
        _ => Err(not_drawn(kind, "it is not a plot of a comparison")),
    }
}

/// The error of a plot asked of data that does not draw it.
fn not_drawn(kind: PlotKind, why: &str) -> Error {
    Error::new(
        ErrorKind::InvalidInput,
        format!("{} cannot be drawn: {why}", kind.file()),
    )
}

#[cfg(test)]
mod tests;

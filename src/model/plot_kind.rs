//! Every plot gliss draws, as one type: its file in the folder, its place
//! in the report and its caption there.
//!
//! Adding a plot is adding a variant here (and its chart in `plot`); the
//! folder writers, the report's order and its captions follow from it.

use super::units::{hz, num};

/// Whether this build of gliss draws plots (the `plots` cargo feature).
/// Without it, the folder writers skip the PNGs and record
/// `settings.plots: false`; everything else works the same.
pub const PLOTS_BUILT: bool = cfg!(feature = "plots");

/// A plot gliss draws into a folder's `plots/`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum PlotKind {
    /// A measurement's frequency response: magnitude above, phase below.
    Response,
    /// A measurement's impulse response above its energy-time curve.
    Impulse,
    /// A measurement's phase (wrapped unless asked) against the minimum phase.
    Phase,
    /// A measurement's group delay and excess group delay.
    GroupDelay,
    /// A measurement's harmonic orders and THD.
    Distortion,
    /// A measurement's decay spectrum within the gate.
    DecaySpectrum,
    /// A measurement's spectrogram of the decay.
    Spectrogram,
    /// A measurement's decay curves per octave band.
    Decay,
    /// A measurement's reverberation times per band.
    Reverberation,
    /// An average's power-averaged response over its positions.
    AverageResponse,
    /// An average's mean T30 per band with its spread.
    AverageReverberation,
    /// A comparison's responses over each other.
    CompareResponse,
    /// A comparison's responses minus the reference's.
    CompareDifference,
    /// A comparison's reverberation times per octave band.
    CompareReverberation,
    /// An impedance measurement's |Z| and phase with the fitted model.
    Impedance,
    /// A measurement's modulation transfer function per octave (STI).
    Mtf,
    /// A noise folder's background noise per band with its rating.
    Noise,
    /// An alignment's responses and their complex sum, as measured and
    /// with the suggested delays and polarities.
    AlignSum,
    /// An alignment's phases through the crossover band.
    AlignPhase,
    /// A directivity folder's level by angle and frequency, per orbit.
    PolarMap,
    /// A directivity folder's polar diagrams at a few frequencies.
    PolarDiagram,
    /// A directivity folder's spatial averages (ANSI/CTA-2034-A) with
    /// their directivity indices.
    SpatialAverages,
    /// A tuning folder's measured, predicted and target responses with
    /// the correction filters.
    Tuning,
}

/// What a caption says about the folder it describes. Fill what the
/// folder has; a caption uses only the facts of its own kind.
#[derive(Debug, Clone, Default)]
pub struct CaptionFacts<'a> {
    /// The response's smoothing in words ("1/6-octave smoothing", "no
    /// smoothing"), as `Smoothing::words` says it.
    pub smoothing: &'a str,
    /// What 0 dB of the magnitude means, in words.
    pub magnitude_reference: &'a str,
    /// The range the gate resolves, Hz (lowest, highest), if gated.
    pub gate_hz: Option<(f64, f64)>,
    /// The delay removed from the phase, s.
    pub delay_s: f64,
    /// The highest harmonic order analysed.
    pub harmonics: u32,
    /// The compared inputs' names, as one list ("a, b, c").
    pub inputs: &'a str,
    /// The compared inputs' reference (the first input's name).
    pub reference: &'a str,
}

/// The rank after every known plot: where unknown files go in the report.
pub const UNKNOWN_RANK: usize = 21;

impl PlotKind {
    /// Every plot, in the order of the variants.
    pub const ALL: [PlotKind; 23] = [
        PlotKind::Response,
        PlotKind::Impulse,
        PlotKind::Phase,
        PlotKind::GroupDelay,
        PlotKind::Distortion,
        PlotKind::DecaySpectrum,
        PlotKind::Spectrogram,
        PlotKind::Decay,
        PlotKind::Reverberation,
        PlotKind::AverageResponse,
        PlotKind::AverageReverberation,
        PlotKind::CompareResponse,
        PlotKind::CompareDifference,
        PlotKind::CompareReverberation,
        PlotKind::Impedance,
        PlotKind::Mtf,
        PlotKind::Noise,
        PlotKind::AlignSum,
        PlotKind::AlignPhase,
        PlotKind::PolarMap,
        PlotKind::PolarDiagram,
        PlotKind::SpatialAverages,
        PlotKind::Tuning,
    ];

    /// The plots of one measurement, in the order they are drawn (and
    /// listed in its manifest).
    pub const MEASUREMENT: [PlotKind; 11] = [
        PlotKind::Impedance,
        PlotKind::Response,
        PlotKind::Impulse,
        PlotKind::Phase,
        PlotKind::GroupDelay,
        PlotKind::Distortion,
        PlotKind::DecaySpectrum,
        PlotKind::Spectrogram,
        PlotKind::Decay,
        PlotKind::Reverberation,
        PlotKind::Mtf,
    ];

    /// The plots of a tuning folder.
    pub const TUNING: [PlotKind; 1] = [PlotKind::Tuning];

    /// The plots of a noise folder.
    pub const NOISE: [PlotKind; 1] = [PlotKind::Noise];

    /// The plots of an alignment folder.
    pub const ALIGN: [PlotKind; 2] = [PlotKind::AlignSum, PlotKind::AlignPhase];
    /// The plots of a directivity folder, in the order they are drawn.
    pub const DIRECTIVITY: [PlotKind; 3] = [
        PlotKind::SpatialAverages,
        PlotKind::PolarMap,
        PlotKind::PolarDiagram,
    ];

    /// The plots of an average, in the order they are drawn.
    pub const AVERAGE: [PlotKind; 2] = [PlotKind::AverageResponse, PlotKind::AverageReverberation];

    /// The plots of a comparison, in the order they are drawn.
    pub const COMPARISON: [PlotKind; 3] = [
        PlotKind::CompareResponse,
        PlotKind::CompareDifference,
        PlotKind::CompareReverberation,
    ];

    /// Its path inside the folder, e.g. "plots/response.png". An
    /// average's plots have the names of a measurement's.
    pub fn file(self) -> &'static str {
        match self {
            PlotKind::Response | PlotKind::AverageResponse => "plots/response.png",
            PlotKind::Impulse => "plots/impulse.png",
            PlotKind::Phase => "plots/phase.png",
            PlotKind::GroupDelay => "plots/group-delay.png",
            PlotKind::Distortion => "plots/distortion.png",
            PlotKind::DecaySpectrum => "plots/decay-spectrum.png",
            PlotKind::Spectrogram => "plots/spectrogram.png",
            PlotKind::Decay => "plots/decay.png",
            PlotKind::Reverberation | PlotKind::AverageReverberation => "plots/reverberation.png",
            PlotKind::CompareResponse => "plots/compare-response.png",
            PlotKind::CompareDifference => "plots/compare-difference.png",
            PlotKind::CompareReverberation => "plots/compare-reverberation.png",
            PlotKind::Impedance => "plots/impedance.png",
            PlotKind::Mtf => "plots/mtf.png",
            PlotKind::Noise => "plots/noise.png",
            PlotKind::AlignSum => "plots/align-sum.png",
            PlotKind::AlignPhase => "plots/align-phase.png",
            PlotKind::PolarMap => "plots/polar-map.png",
            PlotKind::PolarDiagram => "plots/polar-diagram.png",
            PlotKind::SpatialAverages => "plots/spatial-averages.png",
            PlotKind::Tuning => "plots/tuning.png",
        }
    }

    /// Its place in the report: comparison plots, response, phase, group
    /// delay, distortion, decay, reverberation, modulation transfer,
    /// decay spectrum, spectrogram, impulse, background noise (an average's plots rank as their
    /// measurement namesakes); below [`UNKNOWN_RANK`].
    pub fn rank(self) -> usize {
        match self {
            PlotKind::CompareResponse => 0,
            PlotKind::CompareDifference => 1,
            PlotKind::CompareReverberation => 2,
            // an impedance measurement's own plot leads its evidence
            PlotKind::Impedance => 3,
            PlotKind::Response | PlotKind::AverageResponse => 4,
            PlotKind::Phase => 5,
            PlotKind::GroupDelay => 6,
            PlotKind::Distortion => 7,
            PlotKind::Decay => 8,
            PlotKind::Reverberation | PlotKind::AverageReverberation => 9,
            PlotKind::Mtf => 10,
            PlotKind::DecaySpectrum => 11,
            PlotKind::Spectrogram => 12,
            PlotKind::Impulse => 13,
            PlotKind::Noise => 14,
            PlotKind::SpatialAverages => 15,
            PlotKind::PolarMap => 16,
            PlotKind::PolarDiagram => 17,
            PlotKind::AlignSum => 18,
            PlotKind::AlignPhase => 19,
            PlotKind::Tuning => 20,
        }
    }

    /// The plot of `file` ("plots/response.png", or just "response.png"),
    /// if gliss draws one by that name. A name an average shares with a
    /// measurement is the measurement's plot; [`PlotKind::from_file_among`]
    /// picks among the plots of one kind of folder.
    pub fn from_file(file: &str) -> Option<PlotKind> {
        PlotKind::from_file_among(file, &PlotKind::ALL)
    }

    /// The first of `kinds` drawn to `file`, as [`PlotKind::from_file`].
    pub fn from_file_among(file: &str, kinds: &[PlotKind]) -> Option<PlotKind> {
        let name = file.strip_prefix("plots/").unwrap_or(file);
        kinds
            .iter()
            .copied()
            .find(|k| k.file().strip_prefix("plots/") == Some(name))
    }

    /// What the plot shows, in words, for the report's figure caption.
    pub fn caption(self, f: &CaptionFacts<'_>) -> String {
        let gate = f.gate_hz.map_or(String::new(), |(from, to)| {
            format!(
                " The gate resolves the response from {} to {}; outside that range it is greyed out.",
                hz(from),
                hz(to)
            )
        });
        let delay = format!("{} ms", num(f.delay_s * 1e3, 3));
        let smoothing = f.smoothing;
        match self {
            PlotKind::Response => format!(
                "Frequency response: level against frequency with {smoothing}; {}.{gate}",
                f.magnitude_reference
            ),
            PlotKind::Phase => format!(
                "Phase against frequency, wrapped into ±180°, with the delay of {delay} removed, beside the minimum phase that the magnitude implies.{gate}"
            ),
            PlotKind::GroupDelay => format!(
                "Group delay against frequency, relative to the arrival at {delay}, with the excess group delay beyond minimum phase.{gate}"
            ),
            PlotKind::Distortion => format!(
                "Harmonic distortion: each order from the 2nd to the {} relative to the fundamental, and the total (THD), against the excitation frequency; an order is drawn only where it stands clear of its own noise floor (dashed).",
                ordinal(f.harmonics)
            ),
            PlotKind::Decay => "Decay curves per octave band (Schroeder backward integration) with the fitted lines of EDT, T20 and T30.".to_string(),
            PlotKind::Reverberation => "Reverberation time per band: EDT, T20 and T30 against frequency; missing points are bands where the value could not be measured.".to_string(),
            PlotKind::DecaySpectrum => "Decay spectrum: the gated response as the window's start moves later, showing which frequencies ring on.".to_string(),
            PlotKind::Spectrogram => "Spectrogram of the decay: level in time and frequency after the direct sound, showing how each part of the spectrum dies away.".to_string(),
            PlotKind::Impulse => format!(
                "Impulse response against time, arrival at {delay} after the recording's start (its peak, or a direct sound ahead of a stronger build-up)."
            ),
            PlotKind::AverageResponse => format!(
                "Frequency response: the power average of the positions (blue) over each position's response (each in its own grey, named in the legend), with {smoothing}; {}.",
                f.magnitude_reference
            ),
            PlotKind::AverageReverberation => "Reverberation time per band: T30 averaged over the positions, octaves with ± one standard deviation over the positions, one-third octaves thin; missing points are bands where the value could not be measured.".to_string(),
            PlotKind::CompareResponse => {
                format!("The frequency responses of {} overlaid.", f.inputs)
            }
            PlotKind::CompareDifference => format!(
                "The difference of each response from the reference, {}, in dB against frequency.",
                f.reference
            ),
            PlotKind::CompareReverberation => {
                format!("Reverberation time per band of {}.", f.inputs)
            }
            PlotKind::Impedance => "Electrical impedance of the driver: magnitude in ohms above, phase below, on a log frequency axis; the fitted lumped model dashed over the measurement, the resonance fs marked.".to_string(),
            PlotKind::Mtf => "Modulation transfer function per octave 125 Hz–8 kHz: the modulation depth m that reaches the listener against the modulation frequency (IEC 60268-16), as the STI used it, with each octave's modulation transfer index.".to_string(),
            PlotKind::Noise => "Background noise: the equivalent continuous level per octave and one-third octave, dB SPL, with the noise rating curve it touches.".to_string(),
            PlotKind::AlignSum => format!("Each loudspeaker's level and their complex sum at the listening position(s), as measured and with the suggested delays and polarities, 1/24-octave power smoothing; 0 dB is {}'s highest level in the plot; the crossover band between the grey lines.", f.reference),
            PlotKind::AlignPhase => format!("Each loudspeaker's phase through the crossover band, {}'s arrival taken out of all, as measured (solid), and each of the others with its suggested delay and polarity relative to it (dashed, lighter): where the curves meet, the loudspeakers add.", f.reference),
            PlotKind::PolarMap => format!(
                "Polar map: the level relative to on axis against the angle off axis and frequency, for each measured orbit, with contour lines at −3, −6 and −10 dB; {smoothing}.{gate}"
            ),
            PlotKind::PolarDiagram => "Polar diagrams: the level relative to on axis around each measured orbit at a few frequencies, 0° (on axis) at the top.".to_string(),
            PlotKind::SpatialAverages => format!(
                "The spatial averages of ANSI/CTA-2034-A: on axis, listening window, early reflections, sound power and the estimated in-room response (left axis), with the sound power and early reflections directivity indices (right axis); {}. Curves the measured angles cannot give are left out and named in the report.{gate}",
                f.magnitude_reference
            ),
            PlotKind::Tuning => format!("Tuning, {}: above, the measured response and the response predicted after the correction (each level-aligned to the target) over the target and its tolerance band; below, the correction of all filters together and, faintly, each filter's own curve (Audio EQ Cookbook biquads, exact responses).", f.smoothing),
        }
    }
}

/// The report's rank of a plot file ([`PlotKind::rank`]); files gliss
/// does not draw come after, at [`UNKNOWN_RANK`].
pub fn plot_rank(file: &str) -> usize {
    PlotKind::from_file(file).map_or(UNKNOWN_RANK, PlotKind::rank)
}

/// "2nd", "3rd", "4th" … for harmonic orders from 2 to 9.
fn ordinal(n: u32) -> String {
    match n {
        2 => "2nd".into(),
        3 => "3rd".into(),
        n => format!("{n}th"),
    }
}

/// How the phase plot shows the phase.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "cli", derive(clap::ValueEnum))]
#[serde(rename_all = "lowercase")]
pub enum PhaseView {
    /// Wrapped into −180…180° (the default): every turn on one scale.
    #[default]
    Wrapped,
    /// Unwrapped: the accumulated phase, on a scale that fits it.
    Unwrapped,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn files_are_the_folder_names_and_read_back() {
        let names: Vec<&str> = PlotKind::ALL.iter().map(|k| k.file()).collect();
        for n in [
            "plots/response.png",
            "plots/impulse.png",
            "plots/phase.png",
            "plots/group-delay.png",
            "plots/distortion.png",
            "plots/decay-spectrum.png",
            "plots/spectrogram.png",
            "plots/decay.png",
            "plots/reverberation.png",
            "plots/compare-response.png",
            "plots/compare-difference.png",
            "plots/compare-reverberation.png",
            "plots/impedance.png",
            "plots/mtf.png",
            "plots/noise.png",
            "plots/align-sum.png",
            "plots/align-phase.png",
        ] {
            assert!(names.contains(&n), "{n}");
        }
        for k in PlotKind::MEASUREMENT.iter().chain(&PlotKind::COMPARISON) {
            assert_eq!(PlotKind::from_file(k.file()), Some(*k));
        }
        for k in PlotKind::AVERAGE {
            assert_eq!(
                PlotKind::from_file_among(k.file(), &PlotKind::AVERAGE),
                Some(k)
            );
        }
        assert_eq!(
            PlotKind::from_file("response.png"),
            Some(PlotKind::Response)
        );
        assert_eq!(PlotKind::from_file("plots/sketch.png"), None);
    }

    #[test]
    fn every_plot_is_in_one_folder_kind() {
        let mut listed: Vec<PlotKind> = PlotKind::MEASUREMENT
            .iter()
            .chain(&PlotKind::AVERAGE)
            .chain(&PlotKind::COMPARISON)
            .chain(&PlotKind::NOISE)
            .chain(&PlotKind::DIRECTIVITY)
            .chain(&PlotKind::ALIGN)
            .chain(&PlotKind::TUNING)
            .copied()
            .collect();
        listed.sort_by_key(|k| PlotKind::ALL.iter().position(|a| a == k));
        assert_eq!(listed, PlotKind::ALL);
    }

    #[test]
    fn report_order() {
        let order = [
            "compare-response",
            "compare-difference",
            "compare-reverberation",
            "impedance",
            "response",
            "phase",
            "group-delay",
            "distortion",
            "decay",
            "reverberation",
            "mtf",
            "decay-spectrum",
            "spectrogram",
            "impulse",
            "noise",
            "spatial-averages",
            "polar-map",
            "polar-diagram",
            "align-sum",
            "align-phase",
            "tuning",
        ];
        for (i, stem) in order.iter().enumerate() {
            assert_eq!(plot_rank(&format!("plots/{stem}.png")), i, "{stem}");
        }
        assert_eq!(plot_rank("plots/notes.png"), UNKNOWN_RANK);
    }

    #[test]
    fn captions_say_the_facts() {
        let f = CaptionFacts {
            smoothing: "1/6-octave smoothing",
            magnitude_reference: "0 dB = the recording equals the sweep",
            gate_hz: Some((200.0, 20_000.0)),
            delay_s: 0.002_5,
            harmonics: 5,
            inputs: "before, after",
            reference: "before",
        };
        assert_eq!(
            PlotKind::Response.caption(&f),
            "Frequency response: level against frequency with 1/6-octave smoothing; 0 dB = the recording equals the sweep. The gate resolves the response from 200 Hz to 20 kHz; outside that range it is greyed out."
        );
        assert!(
            PlotKind::Impulse
                .caption(&f)
                .contains("arrival at 2.500 ms")
        );
        assert!(PlotKind::Distortion.caption(&f).contains("to the 5th"));
        assert!(
            PlotKind::CompareDifference
                .caption(&f)
                .contains("reference, before,")
        );
    }
}

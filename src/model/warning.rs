//! Warnings as data: a stable machine code, a severity, what it is about,
//! and the sentence a person reads. The analysis decides a warning once;
//! the terminal, the files and the report only show it.
//!
//! In results.json (and comparison.json) a list of warnings is written as
//! two arrays of one length: `warnings`, the sentences (as they always
//! were), and `warning_codes`, the codes beside them.

use std::fmt;

use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::ser::{SerializeMap, Serializer};
use serde::{Deserialize, Serialize};

/// How much a warning matters.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// Context: how a value was obtained or what limits it; nothing wrong.
    Note,
    /// A value is doubtful or withheld; read it with care.
    Caution,
    /// The measurement itself is compromised; measure again.
    Problem,
}

/// What a warning is about, for grouping with advice.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Topic {
    /// Decays along more than one slope.
    Curvature,
    /// Decays too short for the band filter.
    ShortDecay,
    /// Too little decay above the background noise.
    NoiseFloor,
    /// The recording's level.
    RecordingLevel,
    /// The gate of a quasi-anechoic response.
    Gate,
    /// Harmonic distortion.
    Distortion,
    /// Calibration, sensitivity and microphone correction.
    Calibration,
    /// Input files and their agreement.
    Files,
    /// Averaging positions and comparing folders.
    Combining,
    /// Anything else.
    Other,
}

macro_rules! codes {
    ($($(#[doc = $doc:literal])* $variant:ident = $code:literal, $severity:ident, $topic:ident;)*) => {
        /// A warning's stable machine code; its string form (`code()`) is
        /// what results.json writes in `warning_codes`.
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
        pub enum Code {
            $($(#[doc = $doc])* $variant,)*
        }

        impl Code {
            /// Every code.
            pub const ALL: &'static [Code] = &[$(Code::$variant,)*];

            /// The stable string written to files.
            pub fn code(self) -> &'static str {
                match self { $(Code::$variant => $code,)* }
            }

            /// How much it matters.
            pub fn severity(self) -> Severity {
                match self { $(Code::$variant => Severity::$severity,)* }
            }

            /// What it is about.
            pub fn topic(self) -> Topic {
                match self { $(Code::$variant => Topic::$topic,)* }
            }
        }
    };
}

codes! {
    /// Samples at or above −0.1 dBFS in the analysed channel.
    RecordingClips = "recording-clips", Problem, RecordingLevel;
    /// The recording peaks very low.
    RecordingQuiet = "recording-quiet", Caution, RecordingLevel;
    /// The loopback reference channel clips.
    ReferenceClips = "reference-clips", Problem, RecordingLevel;
    /// The impulse response stands little above its noise.
    LowPeakToNoise = "low-peak-to-noise", Problem, NoiseFloor;
    /// No stretch of the recording holds noise alone, and the response's
    /// end is close to its peak.
    NoNoiseStretch = "no-noise-stretch", Caution, NoiseFloor;
    /// The microphone correction does not cover the sweep band.
    MicCorrectionCoverage = "mic-correction-coverage", Caution, Calibration;
    /// The gate resolves the response only above a frequency.
    GateResolution = "gate-resolution", Note, Gate;
    /// The auto gate cannot tell a rise in the energy-time curve from the
    /// loudspeaker's own ringing, and ends before it.
    GateUncertain = "gate-uncertain", Caution, Gate;
    /// The strongest part of the response comes well after a direct sound
    /// within 20 dB of it (a room's low-frequency build-up): the response
    /// is windowed from the direct sound, and the delay is its arrival.
    DirectSoundAhead = "direct-sound-ahead", Note, Other;
    /// The recording stops with the sweep: the room's decay is cut off.
    TailCut = "tail-cut", Problem, NoiseFloor;
    /// A band: the recording ends before the decay.
    BandTailCut = "band-tail-cut", Caution, NoiseFloor;
    /// Some bands lack some decay parameters (see the bands).
    BandsIncomplete = "bands-incomplete", Note, NoiseFloor;
    /// Some bands decay along more than one slope (see the bands).
    CurvedDecays = "curved-decays", Caution, Curvature;
    /// Distortion cannot be told from noise: no noise-only stretch.
    DistortionUnmeasurable = "distortion-unmeasurable", Caution, Distortion;
    /// High harmonic distortion over much of the band.
    DistortionHigh = "distortion-high", Problem, Distortion;
    /// The harmonic responses run into the linear one.
    HarmonicOverlap = "harmonic-overlap", Caution, Distortion;
    /// Another channel of the recording holds the sweep far more clearly
    /// than the analysed one.
    OtherChannelClearer = "other-channel-clearer", Caution, Files;
    /// The sweep file differs from the sweep its .json describes.
    SweepFileDiffers = "sweep-file-differs", Caution, Files;
    /// An impulse response analysed as it is: no harmonic distortion (it
    /// is separated from the recording of a sweep).
    DistortionNeedsSweep = "distortion-needs-sweep", Note, Distortion;
    /// The sweep file had no description: its parameters were recovered
    /// from its samples.
    SweepRecovered = "sweep-recovered", Note, Files;
    /// The sensitivity holds at the microphone's distance, not at 1 m.
    SensitivityAtMicrophone = "sensitivity-at-microphone", Note, Calibration;
    /// A band: no decay found above the noise.
    BandNoDecay = "band-no-decay", Caution, NoiseFloor;
    /// A band: too little decay range for a parameter.
    BandDecayRange = "band-decay-range", Note, NoiseFloor;
    /// A band: the decay curve does not reach the end of a range.
    BandRangeNotReached = "band-range-not-reached", Note, NoiseFloor;
    /// A band: a decay too short for the band's filter.
    BandTooShortForFilter = "band-too-short-for-filter", Note, ShortDecay;
    /// A band: T30 and T20 differ by more than the band's uncertainty
    /// allows (and by more than 10 %): a decay along more than one slope.
    BandCurvature = "band-curvature", Caution, Curvature;
    /// A band: too little range for the energy parameters.
    BandEnergyRange = "band-energy-range", Note, NoiseFloor;
    /// A band: the response's start cannot be told from the noise ahead
    /// of it; the values that count from the start are withheld.
    BandStartInNoise = "band-start-in-noise", Caution, NoiseFloor;
    /// An average: a parameter measured at only some positions.
    PartialPositions = "partial-positions", Note, Combining;
    /// An average: the positions were smoothed differently.
    MixedSmoothing = "mixed-smoothing", Caution, Combining;
    /// An average: the ISO 3382-2 precision grade the positions reach.
    PrecisionGrade = "precision-grade", Note, Combining;
    /// Folders measured at different sample rates.
    MixedSampleRates = "mixed-sample-rates", Note, Combining;
    /// Folders whose sweeps cover different bands.
    DifferentBands = "different-bands", Caution, Combining;
    /// A file of a folder differs from the hash its manifest recorded.
    FileChanged = "file-changed", Problem, Files;
    /// A file a folder's manifest lists is missing.
    FileMissing = "file-missing", Problem, Files;
    /// A file of a folder cannot be read as what it should be (a plot
    /// that is no PNG).
    FileUnreadable = "file-unreadable", Caution, Files;
    /// The sense resistor is far from the driver's impedance: the noise
    /// reaches the impedance amplified.
    SenseResistorMismatch = "sense-resistor-mismatch", Caution, RecordingLevel;
    /// The lumped model fits the measured impedance poorly: the
    /// small-signal parameters describe it only roughly.
    ImpedanceFitPoor = "impedance-fit-poor", Caution, Other;
    /// The resonance lies too near the sweep's band edge for the
    /// small-signal parameters: they are withheld.
    ResonanceOutsideBand = "resonance-outside-band", Problem, Other;
    /// The speech transmission index is withheld: an octave 125 Hz–8 kHz
    /// is missing or has no decay above the noise.
    SpeechWithheld = "speech-withheld", Caution, NoiseFloor;
    /// The speech transmission index is for the impulse response alone:
    /// no background noise, speech level, masking or threshold.
    SpeechImpulseOnly = "speech-impulse-only", Note, Other;
    /// The noise rating is withheld: an octave it needs is missing.
    NoiseRatingWithheld = "noise-rating-withheld", Caution, Other;
    /// An alignment: not every measurement rests on a loopback reference,
    /// so the relative times include the interface's latency.
    AlignNoReference = "align-no-reference", Caution, Combining;
    /// An alignment: a loudspeaker's envelope in the band has a weaker
    /// hump before the arrival read: likely a room's build-up.
    AlignArrivalDoubtful = "align-arrival-doubtful", Caution, Combining;
    /// An alignment: a measurement's impulse response file begins inside
    /// the response; the sums are withheld.
    AlignImpulseCut = "align-impulse-cut", Problem, Combining;
    /// An alignment: a loudspeaker's polarity cannot be told over the band.
    AlignPolarityUnclear = "align-polarity-unclear", Note, Combining;
    /// An alignment: the best delay lies at the edge of the search.
    AlignSearchEdge = "align-search-edge", Caution, Combining;
    /// A curve of the directivity reduction (ANSI/CTA-2034-A) is withheld:
    /// a position it needs was not measured.
    DirectivityWithheld = "directivity-withheld", Caution, Combining;
    /// A tuning leaves regions of its range uncorrected (dips equalisation
    /// should not fill, a loudspeaker's roll-off, or above the transition
    /// frequency).
    TuningUncorrectable = "tuning-uncorrectable", Note, Other;
    /// A tuning of one position of a room without the room's transition
    /// frequency: above it one position's response is not the room's.
    TuningSinglePosition = "tuning-single-position", Caution, Combining;
    /// The predicted response still leaves the target's tolerance.
    TuningOutsideTolerance = "tuning-outside-tolerance", Caution, Other;
    /// A boost of the tuning reaches past an edge of its range, where
    /// nothing was measured (a loudspeaker may not play there).
    TuningBoostPastEdge = "tuning-boost-past-edge", Caution, Other;
    /// A warning read from a file written before codes existed.
    Unclassified = "unclassified", Note, Other;
}

impl Code {
    /// The code whose string form is `s`.
    pub fn from_code(s: &str) -> Option<Code> {
        Code::ALL.iter().copied().find(|c| c.code() == s)
    }

    /// A band warning in a few words, for a line that lists the bands it
    /// holds in ("curvature in 4 of 31 one-third-octave bands: …"); the
    /// stable code for a code that is no band warning.
    pub fn in_few_words(self) -> &'static str {
        match self {
            Code::BandTailCut => "the recording ends before the decay",
            Code::BandNoDecay => "no decay above the noise",
            Code::BandDecayRange => "too little decay range for EDT, T20 or T30",
            Code::BandRangeNotReached => "the decay curve ends before a fit range",
            Code::BandTooShortForFilter => "a decay too short for the band filter",
            Code::BandCurvature => "curvature",
            Code::BandEnergyRange => "too little range for C50, C80, D50 and Ts",
            Code::BandStartInNoise => "the start lost in the noise",
            Code::PartialPositions => "a value measured at only some positions",
            c => c.code(),
        }
    }
}

impl Serialize for Code {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.code())
    }
}

impl<'de> Deserialize<'de> for Code {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        // a code this version does not know reads as unclassified: files
        // from a newer gliss stay readable
        let s = String::deserialize(d)?;
        Ok(Code::from_code(&s).unwrap_or(Code::Unclassified))
    }
}

/// One warning.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Warning {
    /// What it is, for machines.
    pub code: Code,
    /// What it says, for people: what was wrong and, where it helps, what
    /// to do.
    pub message: String,
}

impl Warning {
    /// A warning of `code` saying `message`.
    pub fn new(code: Code, message: impl Into<String>) -> Self {
        Warning {
            code,
            message: message.into(),
        }
    }

    /// How much it matters.
    pub fn severity(&self) -> Severity {
        self.code.severity()
    }
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

/// A list of warnings; in JSON the two arrays `warnings` (sentences) and
/// `warning_codes` (codes), flattened into the record that holds them.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Warnings(pub Vec<Warning>);

impl Warnings {
    /// No warnings.
    pub fn new() -> Self {
        Warnings(Vec::new())
    }

    /// Adds a warning of `code` saying `message`.
    pub fn add(&mut self, code: Code, message: impl Into<String>) {
        self.0.push(Warning::new(code, message));
    }

    /// The sentences alone.
    pub fn messages(&self) -> Vec<&str> {
        self.0.iter().map(|w| w.message.as_str()).collect()
    }
}

impl std::ops::Deref for Warnings {
    type Target = Vec<Warning>;
    fn deref(&self) -> &Vec<Warning> {
        &self.0
    }
}

impl std::ops::DerefMut for Warnings {
    fn deref_mut(&mut self) -> &mut Vec<Warning> {
        &mut self.0
    }
}

impl From<Vec<Warning>> for Warnings {
    fn from(v: Vec<Warning>) -> Self {
        Warnings(v)
    }
}

impl<'a> IntoIterator for &'a Warnings {
    type Item = &'a Warning;
    type IntoIter = std::slice::Iter<'a, Warning>;
    fn into_iter(self) -> Self::IntoIter {
        self.0.iter()
    }
}

impl Serialize for Warnings {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let messages: Vec<&str> = self.messages();
        let codes: Vec<Code> = self.0.iter().map(|w| w.code).collect();
        let mut m = s.serialize_map(Some(2))?;
        m.serialize_entry("warnings", &messages)?;
        m.serialize_entry("warning_codes", &codes)?;
        m.end()
    }
}

impl<'de> Deserialize<'de> for Warnings {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Warnings;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("warnings and their codes")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Warnings, A::Error> {
                let mut messages: Vec<String> = Vec::new();
                let mut codes: Vec<Code> = Vec::new();
                // other keys belong to the record around the warnings
                while let Some(k) = map.next_key::<String>()? {
                    match k.as_str() {
                        "warnings" => messages = map.next_value()?,
                        "warning_codes" => codes = map.next_value()?,
                        _ => {
                            map.next_value::<de::IgnoredAny>()?;
                        }
                    }
                }
                Ok(Warnings(
                    messages
                        .into_iter()
                        .enumerate()
                        .map(|(i, m)| Warning {
                            code: codes.get(i).copied().unwrap_or(Code::Unclassified),
                            message: m,
                        })
                        .collect(),
                ))
            }
        }
        d.deserialize_map(V)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codes_are_unique_and_stable() {
        let mut seen: Vec<&str> = Code::ALL.iter().map(|c| c.code()).collect();
        seen.sort_unstable();
        seen.dedup();
        assert_eq!(seen.len(), Code::ALL.len());
        for c in Code::ALL {
            assert_eq!(Code::from_code(c.code()), Some(*c));
        }
    }

    #[derive(Debug, PartialEq, Serialize, Deserialize)]
    struct Holder {
        id: u32,
        #[serde(flatten)]
        warnings: Warnings,
    }

    #[test]
    fn written_as_sentences_with_codes_beside_them() {
        let mut w = Warnings::new();
        w.add(Code::RecordingClips, "the recording clips");
        w.add(Code::GateResolution, "the gate resolves above 200 Hz");
        let h = Holder { id: 7, warnings: w };
        let j = serde_json::to_value(&h).unwrap();
        assert_eq!(j["warnings"][0], "the recording clips");
        assert_eq!(j["warning_codes"][1], "gate-resolution");
        assert_eq!(serde_json::from_value::<Holder>(j).unwrap(), h);
        // a file without codes (older) still reads
        let old: Holder = serde_json::from_str(r#"{"id": 1, "warnings": ["something"]}"#).unwrap();
        assert_eq!(old.warnings[0].code, Code::Unclassified);
    }
}

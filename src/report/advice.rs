//! Warnings in plain words: grouped by what they are about, each group
//! with what to do about it.

use crate::analysis::room::{self, BandResult};
use crate::model::{Code, Topic, Warning};

/// A group of warnings about one thing.
#[derive(Debug, Clone, PartialEq)]
pub struct Group {
    /// What the warnings are about, as a heading.
    pub title: &'static str,
    /// What to do about it.
    pub advice: &'static str,
    /// The warnings as the analysis wrote them.
    pub items: Vec<String>,
}

/// The heading and what to do of a warning's topic. The warnings' own
/// words usually say what was wrong; this adds what to do.
pub fn topic(t: Topic) -> (&'static str, &'static str) {
    match t {
        Topic::Curvature => (
            "Decays along more than one slope",
            "The decay is not a single straight line in these bands, by more than the scatter of T20 and T30 in the band allows (coupled spaces, or absorption gathered on a few surfaces). Read T20 and T30 there with care, prefer EDT for what is heard, look at the decay plot, and measure at more microphone positions.",
        ),
        Topic::ShortDecay => (
            "Decays too short for the band filter",
            "The band filter's own ringing would be longer than the decay, so the value is withheld. Read the octave band, or the broadband value, instead.",
        ),
        Topic::NoiseFloor => (
            "Too little decay above the background noise",
            "Some values need more dynamic range than the measurement has. Raise the sweep level step by step, lengthen the sweep (about 3 dB per doubling), average repeated sweeps (--repeat), or measure when the room is quieter.",
        ),
        Topic::RecordingLevel => (
            "Recording level",
            "Set the gain so that the recording peaks between about -20 and -3 dBFS, then measure again.",
        ),
        Topic::Gate => (
            "Gated (quasi-anechoic) response",
            "Below the gate's resolution the curve shows the room as much as the loudspeaker. For the low end, move the loudspeaker away from reflecting surfaces for a longer gate, or measure close to the driver. Where the auto gate could not tell a reflection from the loudspeaker's own ringing, read the energy-time curve and give the gate by hand (--gate -1,N, N in ms before the first reflection).",
        ),
        Topic::Distortion => (
            "Distortion",
            "Check the level and the signal chain; a lower level shows whether the distortion comes from the device or from overload.",
        ),
        Topic::Calibration => (
            "Calibration and sensitivity",
            "Give the missing drive voltage or distance, or recalibrate, and analyse the raw files again.",
        ),
        Topic::Files => (
            "Files",
            "A file of the folder is not the one the analysis wrote or read. Re-analyse the raw files (gliss analyze ... --overwrite) or ask for the original folder.",
        ),
        Topic::Combining => ("Averaging and comparing", ""),
        Topic::Other => ("Notes", ""),
    }
}

/// Groups `general` warnings (results.json `warnings`) and the bands'
/// warnings by their codes' topics, in the order topics first appear. The
/// bands' warnings come one line per code and band width
/// ([`room::group_band_warnings`], as the terminal prints them), in place
/// of the whole result's summaries of them; each band's own sentences stay
/// in its row of the band tables.
pub fn group(general: &[Warning], bands: &[BandResult]) -> Vec<Group> {
    let lines = room::group_band_warnings(bands);
    let all = general
        .iter()
        .filter(|w| lines.is_empty() || !room::summarises_bands(w.code))
        .map(|w| (w.code, w.message.clone()))
        .chain(lines.iter().map(|g| (g.code, g.line())))
        .chain(
            bands
                .iter()
                .flat_map(|b| b.warnings.iter())
                .filter(|w| w.code == Code::Unclassified)
                .map(|w| (w.code, w.message.clone())),
        );
    let mut groups: Vec<Group> = Vec::new();
    for (code, message) in all {
        let (title, advice) = topic(code.topic());
        match groups.iter_mut().find(|g| g.title == title) {
            Some(g) => {
                if !g.items.contains(&message) {
                    g.items.push(message);
                }
            }
            None => groups.push(Group {
                title,
                advice,
                items: vec![message],
            }),
        }
    }
    groups
}

/// Why the band parameter `label` ("EDT", "T20", "T30", "C50", "C80",
/// "D50", "Ts", "INR") of a band is missing: the first of its warnings
/// that names it, or that says nothing was measured.
pub fn reason_for<'a>(warnings: &'a [Warning], label: &str) -> Option<&'a str> {
    warnings
        .iter()
        .find(|w| names(&w.message, label))
        .or_else(|| {
            warnings
                .iter()
                .find(|w| matches!(w.code, Code::BandNoDecay | Code::BandTailCut))
        })
        .map(|w| w.message.as_str())
}

/// Whether `text` names `label` as a word.
fn names(text: &str, label: &str) -> bool {
    text.match_indices(label).any(|(i, _)| {
        let before = text[..i].chars().next_back();
        let after = text[i + label.len()..].chars().next();
        !before.is_some_and(char::is_alphanumeric) && !after.is_some_and(char::is_alphanumeric)
    })
}

/// A band's warning without its leading band label ("125 Hz (1/1-octave): ").
pub fn without_label(w: &str) -> &str {
    match w.split_once("-octave): ") {
        Some((head, rest)) if head.ends_with("(1/1") || head.ends_with("(1/3") => rest,
        _ => w,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_missing_value_finds_the_warning_that_names_it() {
        let w = vec![
            Warning::new(
                Code::BandDecayRange,
                "125 Hz (1/1-octave): T30 needs 45 dB of decay above the noise (its range must end 10 dB above it, ISO 3382-1); this band has 38 dB",
            ),
            Warning::new(
                Code::BandEnergyRange,
                "125 Hz (1/1-octave): only 15 dB above the noise; C50, C80, D50 and Ts need 20 dB",
            ),
        ];
        assert!(reason_for(&w, "T30").unwrap().contains("45 dB"));
        assert!(reason_for(&w, "Ts").unwrap().contains("C50, C80"));
        assert!(reason_for(&w, "T20").is_none());
        assert_eq!(
            without_label(&w[0].message),
            "T30 needs 45 dB of decay above the noise (its range must end 10 dB above it, ISO 3382-1); this band has 38 dB"
        );
        let none = vec![Warning::new(
            Code::BandNoDecay,
            "63 Hz (1/3-octave): no decay found above the noise; nothing measured",
        )];
        assert!(reason_for(&none, "EDT").is_some());
    }

    #[test]
    fn warnings_group_by_topic_with_advice() {
        let g = group(
            &[
                Warning::new(
                    Code::RecordingClips,
                    "the recording clips: 3 samples at or above -0.1 dBFS (peak 0.00 dBFS); lower the playback or input gain and measure again",
                ),
                Warning::new(
                    Code::CurvedDecays,
                    "some bands decay along more than one slope (curvature above 10 %); see bands[].warnings",
                ),
            ],
            &[],
        );
        assert_eq!(g.len(), 2);
        assert_eq!(g[0].title, "Recording level");
        assert_eq!(g[1].title, "Decays along more than one slope");
        assert!(!g[1].advice.is_empty());
    }

    #[test]
    fn the_bands_warnings_come_one_line_per_code_in_place_of_their_summary() {
        let mut bands: Vec<BandResult> = [63.0, 80.0, 100.0, 125.0, 160.0]
            .iter()
            .map(|&f| BandResult::empty(f, f, crate::model::Fraction::Third))
            .collect();
        for i in [0, 1, 3, 4] {
            let hz = bands[i].center_hz;
            bands[i].warnings.add(
                Code::BandCurvature,
                format!("{hz} Hz (1/3-octave): curvature 80 %"),
            );
        }
        let summary = Warning::new(
            Code::CurvedDecays,
            "some bands decay along more than one slope; see bands[].warnings",
        );
        let g = group(std::slice::from_ref(&summary), &bands);
        assert_eq!(g.len(), 1);
        assert_eq!(
            g[0].items,
            ["curvature in 4 of 5 one-third-octave bands: 63, 80, 125, 160 Hz"]
        );
        // without bands (a comparison) a summary is shown as it is
        assert_eq!(group(&[summary], &[])[0].items.len(), 1);
    }
}

//! Warnings in plain words: grouped by what they are about, each group
//! with what to do about it.

use crate::analysis::room::BandResult;

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

/// The topic of a warning: (title, what to do). The analysis's own words
/// usually say what was wrong; this adds what to do where they do not.
fn topic(w: &str) -> (&'static str, &'static str) {
    let l = w.to_lowercase();
    if l.contains("curvature") || l.contains("more than one slope") {
        (
            "Decays along more than one slope",
            "The decay is not a single straight line in these bands (coupled spaces, a strong mode, or an uneven spread of absorption). Read T20 and T30 there with care, prefer EDT for what is heard, and measure at more microphone positions.",
        )
    } else if l.contains("too short for the band") {
        (
            "Decays too short for the band filter",
            "The band filter's own ringing would be longer than the decay, so the value is withheld. Read the octave band, or the broadband value, instead.",
        )
    } else if l.contains("no decay found")
        || l.contains("above the noise")
        || l.contains("does not reach")
        || l.contains("lack some decay parameters")
        || l.contains("rises only")
    {
        (
            "Too little decay above the background noise",
            "Some values need more dynamic range than the measurement has. Raise the sweep level step by step, lengthen the sweep (about 3 dB per doubling), average repeated sweeps (--repeat), or measure when the room is quieter.",
        )
    } else if l.contains("clips") || l.contains("very quiet") {
        (
            "Recording level",
            "Set the gain so that the recording peaks between about -20 and -3 dBFS, then measure again.",
        )
    } else if l.contains("gate") {
        (
            "Gated (quasi-anechoic) response",
            "Below the gate's resolution the curve shows the room as much as the loudspeaker. For the low end, move the loudspeaker away from reflecting surfaces for a longer gate, or measure close to the driver.",
        )
    } else if l.contains("distortion") {
        (
            "Distortion",
            "Check the level and the signal chain; a lower level shows whether the distortion comes from the device or from overload.",
        )
    } else if l.contains("sensitivity") || l.contains("calibrat") {
        (
            "Calibration and sensitivity",
            "Give the missing drive voltage or distance, or recalibrate, and analyse the raw files again.",
        )
    } else if l.contains("differs") || l.contains("sha-256") || l.contains("missing") {
        (
            "Files",
            "A file of the folder is not the one the analysis wrote or read. Re-analyse the raw files (gliss analyze ... --overwrite) or ask for the original folder.",
        )
    } else {
        ("Notes", "")
    }
}

/// Groups `general` warnings (results.json `warnings`) and the bands'
/// warnings by topic, in the order topics first appear.
pub fn group(general: &[String], bands: &[BandResult]) -> Vec<Group> {
    let mut groups: Vec<Group> = Vec::new();
    let all = general
        .iter()
        .chain(bands.iter().flat_map(|b| b.warnings.iter()));
    for w in all {
        let (title, advice) = topic(w);
        match groups.iter_mut().find(|g| g.title == title) {
            Some(g) => {
                if !g.items.contains(w) {
                    g.items.push(w.clone());
                }
            }
            None => groups.push(Group {
                title,
                advice,
                items: vec![w.clone()],
            }),
        }
    }
    groups
}

/// Why the band parameter `label` ("EDT", "T20", "T30", "C50", "C80",
/// "D50", "Ts", "INR") of a band is missing: the first of its warnings
/// that names it, or that says nothing was measured.
pub fn reason_for<'a>(warnings: &'a [String], label: &str) -> Option<&'a str> {
    warnings
        .iter()
        .find(|w| names(w, label))
        .or_else(|| warnings.iter().find(|w| w.contains("nothing measured")))
        .map(String::as_str)
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
            "125 Hz (1/1-octave): T30 needs 45 dB of decay above the noise (its range must end 10 dB above it, ISO 3382-1); this band has 38 dB".to_string(),
            "125 Hz (1/1-octave): only 15 dB above the noise; C50, C80, D50 and Ts need 20 dB".to_string(),
        ];
        assert!(reason_for(&w, "T30").unwrap().contains("45 dB"));
        assert!(reason_for(&w, "Ts").unwrap().contains("C50, C80"));
        assert!(reason_for(&w, "T20").is_none());
        assert_eq!(
            without_label(&w[0]),
            "T30 needs 45 dB of decay above the noise (its range must end 10 dB above it, ISO 3382-1); this band has 38 dB"
        );
        let none = vec![
            "63 Hz (1/3-octave): no decay found above the noise; nothing measured".to_string(),
        ];
        assert!(reason_for(&none, "EDT").is_some());
    }

    #[test]
    fn warnings_group_by_topic_with_advice() {
        let g = group(
            &[
                "the recording clips: 3 samples at or above -0.1 dBFS (peak 0.00 dBFS); lower the playback or input gain and measure again".into(),
                "some bands decay along more than one slope (curvature above 10 %); see bands[].warnings".into(),
            ],
            &[],
        );
        assert_eq!(g.len(), 2);
        assert_eq!(g[0].title, "Recording level");
        assert_eq!(g[1].title, "Decays along more than one slope");
        assert!(!g[1].advice.is_empty());
    }
}

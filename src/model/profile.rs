//! What is being measured, and so which defaults and which numbers lead:
//! a room in general, a room for speech, a room for music, or a
//! loudspeaker. Stored in the manifest's settings as `"room"`, `"speech"`,
//! `"music"` or `"speaker"`, so the report leads with the numbers the
//! use asks for.

use serde::{Deserialize, Serialize};

use super::Parameter;

/// What is being measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, Default)]
#[cfg_attr(feature = "cli", derive(clap::ValueEnum))]
#[serde(rename_all = "lowercase")]
pub enum Profile {
    /// A room: the whole response, 1/6-octave smoothing, bands; the
    /// report gives both clarity (C80) and definition (D50).
    #[default]
    Room,
    /// A room for speech (classroom, office, meeting room, place of
    /// worship): as room, and the report leads with D50 (and the speech
    /// transmission index where one was computed).
    Speech,
    /// A room for music (rehearsal room, studio, hall): as room, and the
    /// report leads with C80.
    Music,
    /// A loudspeaker in a room: gated before the first reflection,
    /// 1/12-octave smoothing, no bands.
    Speaker,
}

impl Profile {
    /// As written in files and on the command line.
    pub fn code(self) -> &'static str {
        match self {
            Profile::Room => "room",
            Profile::Speech => "speech",
            Profile::Music => "music",
            Profile::Speaker => "speaker",
        }
    }

    /// In words: "a room", "a room for speech", …
    pub fn words(self) -> &'static str {
        match self {
            Profile::Room => "a room",
            Profile::Speech => "a room for speech",
            Profile::Music => "a room for music",
            Profile::Speaker => "a loudspeaker",
        }
    }

    /// Whether the loudspeaker defaults apply (gate, 1/12 octave, no bands).
    pub fn is_speaker(self) -> bool {
        self == Profile::Speaker
    }

    /// The energy parameters a client of this use asks about, in the order
    /// the report's first page gives them: the clarity of music C80 for
    /// music, the definition of speech D50 for speech, both for a room in
    /// general (ISO 3382-1 Annex A lists both as the room's single
    /// numbers; which one a client reads depends on the room's use).
    pub fn clarity_parameters(self) -> &'static [Parameter] {
        match self {
            Profile::Speech => &[Parameter::D50],
            Profile::Music => &[Parameter::C80],
            Profile::Room | Profile::Speaker => &[Parameter::C80, Parameter::D50],
        }
    }

    /// The profile several folders share, or `None` when they differ or
    /// none is recorded (an average or a comparison keeps the profile of
    /// its inputs only when they agree).
    pub fn common(profiles: impl IntoIterator<Item = Option<Profile>>) -> Option<Profile> {
        let mut it = profiles.into_iter();
        let first = it.next()??;
        it.all(|p| p == Some(first)).then_some(first)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trips_through_its_code() {
        for p in [
            Profile::Room,
            Profile::Speech,
            Profile::Music,
            Profile::Speaker,
        ] {
            let s = serde_json::to_string(&p).unwrap();
            assert_eq!(s, format!("\"{}\"", p.code()));
            assert_eq!(serde_json::from_str::<Profile>(&s).unwrap(), p);
        }
    }

    #[test]
    fn a_common_profile_needs_every_input_to_agree() {
        use Profile::*;
        assert_eq!(Profile::common([Some(Music), Some(Music)]), Some(Music));
        assert_eq!(Profile::common([Some(Music), Some(Speech)]), None);
        assert_eq!(Profile::common([Some(Music), None]), None);
        assert_eq!(Profile::common(std::iter::empty()), None);
    }

    #[test]
    fn speech_leads_with_definition_and_music_with_clarity() {
        assert_eq!(Profile::Speech.clarity_parameters(), &[Parameter::D50]);
        assert_eq!(Profile::Music.clarity_parameters(), &[Parameter::C80]);
        assert_eq!(Profile::Room.clarity_parameters().len(), 2);
    }
}

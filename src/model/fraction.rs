//! The width of a band: an octave, a one-third octave, or the whole sweep
//! band. In files it is written `"1/1"`, `"1/3"` or `"broadband"`.

use std::fmt;

use serde::{Deserialize, Serialize};

/// The width of a band.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum Fraction {
    /// One octave (IEC 61260-1, b = 1).
    #[serde(rename = "1/1")]
    Octave,
    /// One-third octave (IEC 61260-1, b = 3).
    #[serde(rename = "1/3")]
    Third,
    /// The whole band of the sweep.
    #[serde(rename = "broadband")]
    Broadband,
}

impl Fraction {
    /// Octave, then one-third octave, then broadband: the order of tables.
    pub const ALL: [Fraction; 3] = [Fraction::Octave, Fraction::Third, Fraction::Broadband];

    /// The fraction of IEC 61260-1's band designator b (1 or 3).
    pub fn of_designator(b: u32) -> Option<Fraction> {
        match b {
            1 => Some(Fraction::Octave),
            3 => Some(Fraction::Third),
            _ => None,
        }
    }

    /// As written in files: "1/1", "1/3", "broadband".
    pub fn code(self) -> &'static str {
        match self {
            Fraction::Octave => "1/1",
            Fraction::Third => "1/3",
            Fraction::Broadband => "broadband",
        }
    }

    /// In words, as an adjective: "octave", "one-third-octave", "broadband".
    pub fn words(self) -> &'static str {
        match self {
            Fraction::Octave => "octave",
            Fraction::Third => "one-third-octave",
            Fraction::Broadband => "broadband",
        }
    }

    /// The effective bandwidth ISO 3382-2 puts in its uncertainty formula,
    /// Hz: about 0.71·fc for octaves and 0.23·fc for one-third octaves
    /// (seen through a secondary source); none for the whole band.
    pub fn uncertainty_bandwidth_hz(self, center_hz: f64) -> Option<f64> {
        match self {
            Fraction::Octave => Some(0.71 * center_hz),
            Fraction::Third => Some(0.23 * center_hz),
            Fraction::Broadband => None,
        }
    }
}

impl fmt::Display for Fraction {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.code())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn written_as_before() {
        for f in Fraction::ALL {
            let j = serde_json::to_string(&f).unwrap();
            assert_eq!(j, format!("\"{}\"", f.code()));
            assert_eq!(serde_json::from_str::<Fraction>(&j).unwrap(), f);
        }
        assert!(serde_json::from_str::<Fraction>("\"1/2\"").is_err());
    }
}

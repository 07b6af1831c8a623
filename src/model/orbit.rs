//! Where around a loudspeaker a measurement was taken: the orbit (the
//! horizontal or the vertical plane through the loudspeaker's reference
//! axis) and the angle off that axis, as ANSI/CTA-2034-A measures them.
//! Stored in the manifest's settings as `"orbit": "horizontal"` and
//! `"angle_deg": 30`.
//!
//! Angles are whole degrees in −170…180. On the vertical orbit a positive
//! angle is above the axis (toward the ceiling), a negative one below
//! (toward the floor), as the standard's floor and ceiling reflections
//! need; on the horizontal orbit a positive angle is to the loudspeaker's
//! left as seen from the front (counter-clockwise seen from above). 0° (on
//! axis) and 180° (behind) lie on both orbits and are one position.

use serde::{Deserialize, Serialize};

/// The plane a measurement was taken in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[cfg_attr(feature = "cli", derive(clap::ValueEnum))]
#[serde(rename_all = "lowercase")]
pub enum Orbit {
    /// The horizontal plane through the reference axis.
    Horizontal,
    /// The vertical plane through the reference axis.
    Vertical,
}

impl Orbit {
    /// Both orbits, horizontal first.
    pub const ALL: [Orbit; 2] = [Orbit::Horizontal, Orbit::Vertical];

    /// As written in files and on the command line.
    pub fn code(self) -> &'static str {
        match self {
            Orbit::Horizontal => "horizontal",
            Orbit::Vertical => "vertical",
        }
    }
}

/// The lowest angle gliss accepts, degrees (−180° is written 180°).
pub const MIN_ANGLE_DEG: i32 = -170;
/// The highest angle gliss accepts, degrees.
pub const MAX_ANGLE_DEG: i32 = 180;

/// One measuring position on an orbit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub struct Position {
    /// The plane.
    pub orbit: Orbit,
    /// Degrees off the reference axis, −170…180.
    pub angle_deg: i32,
}

impl Position {
    /// A position; `None` when the angle is outside −170…180.
    pub fn new(orbit: Orbit, angle_deg: i32) -> Option<Position> {
        (MIN_ANGLE_DEG..=MAX_ANGLE_DEG)
            .contains(&angle_deg)
            .then_some(Position { orbit, angle_deg })
    }

    /// Whether it lies on both orbits (0° or 180°).
    pub fn is_shared(self) -> bool {
        self.angle_deg == 0 || self.angle_deg == 180
    }

    /// Degrees between this position and the reference axis, 0…180.
    pub fn off_axis_deg(self) -> i32 {
        self.angle_deg.abs()
    }

    /// In words: "30° horizontal", "−20° vertical".
    pub fn words(self) -> String {
        let sign = if self.angle_deg < 0 { "−" } else { "" };
        format!("{sign}{}° {}", self.angle_deg.abs(), self.orbit.code())
    }
}

/// The error of an angle outside −170…180, for the command line and files.
pub fn angle_range_words() -> String {
    format!("{MIN_ANGLE_DEG}…{MAX_ANGLE_DEG} degrees (write −180° as 180)")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn angles_outside_the_standard_range_are_not_positions() {
        assert!(Position::new(Orbit::Horizontal, -180).is_none());
        assert!(Position::new(Orbit::Horizontal, 181).is_none());
        let p = Position::new(Orbit::Vertical, -20).unwrap();
        assert_eq!(p.words(), "−20° vertical");
        assert_eq!(p.off_axis_deg(), 20);
        assert!(Position::new(Orbit::Vertical, 180).unwrap().is_shared());
    }
}

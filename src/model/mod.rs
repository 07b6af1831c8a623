//! The vocabulary every layer shares: band parameters with their keys,
//! units and just-noticeable differences ([`parameter`]), band widths
//! ([`fraction`]), warnings with their codes ([`warning`]), the plots gliss
//! draws ([`plot_kind`]), what is measured ([`profile`]), where around a loudspeaker ([`orbit`]) and units and number formats ([`units`]). Each
//! word is defined once here; nothing here draws, reads or writes; the
//! analysis, the folder, the plots, the report and the command line speak
//! it and never re-spell it as a string.

pub mod fraction;
pub mod orbit;
pub mod parameter;
pub mod plot_kind;
pub mod profile;
pub mod units;
pub mod warning;

pub use fraction::Fraction;
pub use orbit::{Orbit, Position};
pub use parameter::{Jnd, Parameter};
pub use plot_kind::PlotKind;
pub use profile::Profile;
pub use warning::{Code, Severity, Topic, Warning, Warnings};

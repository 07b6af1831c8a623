//! The vocabulary every layer shares: band parameters with their keys,
//! units and just-noticeable differences ([`parameter`]), band widths
//! ([`fraction`]) and warnings with their codes ([`warning`]). Each word
//! is defined once here; the analysis, the folder, the plots, the report
//! and the command line speak it and never re-spell it as a string.

pub mod fraction;
pub mod parameter;
pub mod warning;

pub use fraction::Fraction;
pub use parameter::{Jnd, Parameter};
pub use warning::{Code, Severity, Topic, Warning, Warnings};

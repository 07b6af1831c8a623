//! The vocabulary every layer shares: units and number formats, the
//! plots gliss draws. Nothing here draws, reads or writes; the analysis,
//! the folders, the plots and the report all speak these words.

pub mod plot_kind;
pub mod units;

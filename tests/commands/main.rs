//! Integration tests: the real `gliss` binary on files the tests make, in
//! temporary folders. One test binary, one module per subject.

mod cookbook;
mod util;

mod align;
mod bad_input;
mod compare;
mod demo;
mod device_under_test;
mod directivity;
mod distortion;
mod examples;
mod export;
mod features;
mod folder_safety;
mod full_disk;
mod impedance;
mod impulse;
mod measure;
mod mistakes;
mod reanalyze;
mod report;
mod sensitivity;
#[cfg(feature = "soundcard")]
mod sound_server;
#[cfg(feature = "plots")]
mod speech;
mod spine;
mod sweep;
mod target;
mod tuning;
mod wire;

//! Measures a known filter with the library API, no files involved: a
//! +6 dB peaking equaliser at 1 kHz (Audio EQ Cookbook) stands in for the
//! device under test. Run with `cargo run --example known_filter`.

use gliss::analysis::{AnalysisConfig, Smoothing, analyze};
use gliss::signal::biquad::Biquad;
use gliss::signal::sweep::SweepParams;

/// Runs the measurement (public so that the integration tests run it too).
pub fn main() -> gliss::Result<()> {
    let design = SweepParams {
        requested_length_s: 2.0,
        tail_s: 0.5,
        ..SweepParams::default()
    }
    .design()?;
    let stimulus = design.generate();

    // the "device": the sweep through the filter
    let filter = Biquad::peaking(design.fs(), 1000.0, 1.0, 6.0);
    let mut recording = stimulus.clone();
    filter.process(&mut recording);

    let config = AnalysisConfig {
        smoothing: Smoothing::None,
        harmonics: 1, // a linear filter: no distortion to separate
        bands: false, // and no room to decay
        gate: None,
        mic_correction: None,
        profile: Default::default(),
        speech: None,
    };
    let a = analyze(&recording, &stimulus, &design, &config)?;
    println!("delay {:.4} samples", a.delay_s * design.fs());
    println!("{:>10} {:>10} {:>12}", "f (Hz)", "measured", "closed form");
    for target in [100.0, 500.0, 1000.0, 2000.0, 10_000.0] {
        let i = a
            .response
            .frequency_hz
            .iter()
            .position(|&f| f >= target)
            .unwrap_or(0);
        let f = a.response.frequency_hz[i];
        let exact = 20.0 * filter.response(design.fs(), f).norm().log10();
        println!(
            "{f:>10.1} {:>9.3}dB {exact:>10.3}dB",
            a.response.magnitude_db[i]
        );
    }
    Ok(())
}

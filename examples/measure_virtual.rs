//! Measures the built-in virtual system (a simulated loudspeaker in a
//! simulated room) with the library alone, no command line: the sweep is
//! played and recorded into a measurement folder in a temporary directory,
//! analysed, and the delay and the octave-band T30 are printed. Run with
//! `cargo run --example measure_virtual`.

use std::sync::atomic::AtomicBool;

use gliss::analysis::{AnalysisConfig, Smoothing};
use gliss::audio::PlayRecord;
use gliss::audio::virtual_system::VirtualSystem;
use gliss::model::{Fraction, Parameter};
use gliss::session::measure::{MeasureJob, measure};
use gliss::signal::sweep::SweepParams;

/// Runs the measurement (public so that the integration tests run it too).
pub fn main() -> gliss::Result<()> {
    let design = SweepParams {
        requested_length_s: 3.0,
        tail_s: 2.0, // longer than the room's longest reverberation time
        ..SweepParams::default()
    }
    .design()?;
    let dir = tempfile::tempdir().map_err(|e| {
        gliss::Error::new(
            gliss::ErrorKind::Io,
            format!("could not make a temporary folder: {e}"),
        )
    })?;
    let job = MeasureJob {
        out: dir.path().join("virtual"),
        plots: false,
        phase_view: Default::default(),
        channel: 0,
        reference: None,
        output_channels: vec![0],
        repeat: 1,
        design,
        config: AnalysisConfig {
            smoothing: Smoothing::Fraction(6),
            harmonics: 1,
            bands: true,
            gate: None,
            mic_correction: None,
            profile: Default::default(),
            speech: None,
        },
        title: "virtual system (example)".into(),
        command_line: std::env::args().collect(),
        mic_correction: None,
        calibration: None,
        drive: None,
        source_kind: "virtual".into(),
        target: None,
        impedance: None,
        position: None,
    };
    let mut system = VirtualSystem::default();
    // nothing stops this run early; a program would set the flag from its
    // Ctrl-C handler, and show `progress` in a progress bar
    let stop = AtomicBool::new(false);
    let outcome = measure(&mut system, &job, &stop, &mut |_| {})?;
    let a = &outcome.analysis;

    println!("{}", system.describe());
    println!(
        "delay {:.3} ms ({:.1} samples; the interface's latency is {} samples)",
        a.delay_s * 1e3,
        a.delay_s * 48_000.0,
        system.latency_samples
    );
    println!("{:>8}  {:>8}", "octave", "T30");
    let room = a.room.as_ref().ok_or_else(|| {
        gliss::Error::input("the analysis has no room parameters; analyse with bands")
    })?;
    for b in room.bands.iter().filter(|b| b.fraction == Fraction::Octave) {
        let t30 = b
            .get(Parameter::T30)
            .map_or_else(|| "—".to_string(), |t| Parameter::T30.show_with_unit(t));
        println!("{:>5} Hz  {t30:>8}", b.center_hz);
    }
    // the folder goes with the temporary directory when `dir` is dropped
    println!(
        "written to {} (temporary): {}",
        job.out.display(),
        outcome.files.join(", ")
    );
    Ok(())
}

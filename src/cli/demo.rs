//! `gliss demo`: the whole job on the virtual system.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::audio::virtual_system::VirtualSystem;
use crate::audio::{NoSink, PlayRecord, Playback};
use crate::cli::common::{self, OutputArgs, SweepArgs};
use crate::error::Result;
use crate::session::{self, Job, Outcome, records::Source};
use crate::signal::wav::{SampleEncoding, WavData, encode_wav};

/// Options of `gliss demo`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Everything in the demo is simulated: the Kestrel 5 monitor and \
the rehearsal room are the project's own inventions, rendered in software, and no \
sound is played."
)]
pub struct Args {
    /// The measurement folder to write.
    #[arg(long, value_name = "DIR", default_value = "gliss-demo")]
    pub out: PathBuf,
    #[command(flatten)]
    pub sweep: SweepArgs,
    #[command(flatten)]
    pub output: OutputArgs,
    /// Seed of the simulated background noise.
    #[arg(long, default_value_t = 2026)]
    pub seed: u64,
}

/// `x` rounded to `decimals`, with −0 shown as 0.
fn no_negative_zero(x: f64, decimals: i32) -> f64 {
    let scale = 10f64.powi(decimals);
    (x * scale).round() / scale + 0.0
}

/// Prints what a job wrote and found.
pub fn print_summary(out: &str, o: &Outcome) {
    let a = &o.analysis;
    println!("wrote the measurement folder {out}:");
    for f in &o.files {
        println!("  {f}");
    }
    println!(
        "delay {:.3} ms ({:.2} samples), recording peak {:.1} dBFS, impulse response {:.0} dB above its noise",
        no_negative_zero(a.delay_s * 1e3, 3),
        no_negative_zero(a.delay_s * f64::from(a.sample_rate_hz), 2),
        a.peak_dbfs,
        a.peak_to_noise_db
    );
    if let Some(t) = &o.target {
        println!("{}", session::target_summary(t));
    }
    if a.warnings.is_empty() {
        println!("no warnings");
    }
    for w in &a.warnings {
        println!("warning: {w}");
    }
}

/// Runs `gliss demo`.
pub fn run(a: Args) -> Result<()> {
    let mut config = a.output.config()?;
    let drive = a.output.drive()?;
    let mic = a.output.mic_correction()?;
    config.mic_correction = mic.as_ref().map(|m| m.0.clone());
    let design = a.sweep.design()?;
    let target = a
        .output
        .target((design.params.start_hz, design.params.end_hz))?;
    let mut system = VirtualSystem {
        seed: a.seed,
        ..VirtualSystem::default()
    };
    println!("SIMULATED: {}", system.describe());
    println!("(no sound is played; the recording is computed)");
    let stimulus = design.generate();
    let stop = std::sync::atomic::AtomicBool::new(false);
    let take = system.play_record(
        &Playback {
            signal: &stimulus,
            sample_rate_hz: design.params.sample_rate_hz,
            output_channels: &[0],
            stop: &stop,
        },
        &mut NoSink,
        &mut |_| {},
    )?;
    let stimulus_bytes = encode_wav(
        &[&stimulus],
        design.params.sample_rate_hz,
        SampleEncoding::Float,
    );
    let refs: Vec<&[f64]> = take.channels.iter().map(Vec::as_slice).collect();
    let recording_bytes = encode_wav(&refs, take.sample_rate_hz, SampleEncoding::Float);
    // analyse what was written, exactly as `analyze` would read it
    let f32_round = |x: &[f64]| x.iter().map(|&v| f64::from(v as f32)).collect::<Vec<_>>();
    let job = Job {
        out: a.out.clone(),
        overwrite: a.output.overwrite,
        plots: !a.output.no_plots,
        recording_bytes,
        recording: WavData {
            sample_rate_hz: take.sample_rate_hz,
            encoding: SampleEncoding::Float,
            channels: take.channels.iter().map(|c| f32_round(c)).collect(),
        },
        channel: 0,
        stimulus_bytes,
        stimulus: WavData {
            sample_rate_hz: design.params.sample_rate_hz,
            encoding: SampleEncoding::Float,
            channels: vec![f32_round(&stimulus)],
        },
        design,
        config,
        source: Source {
            kind: "virtual".into(),
            description: system.describe(),
            recording_path: None,
            sweep_path: None,
        },
        title: "Kestrel 5 in the rehearsal room (simulated)".into(),
        command_line: std::env::args().collect(),
        mic_correction: mic.map(|m| m.1),
        calibration: a.output.calibration()?,
        reference: None,
        measurement: None,
        drive,
        target,
    };
    let outcome = session::run(&job)?;
    print_summary(&common::show(&a.out), &outcome);
    Ok(())
}

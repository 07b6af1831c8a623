//! `gliss measure`: play the sweep through a sound card while recording the
//! microphone, then analyse.

#[cfg(feature = "soundcard")]
use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};

use clap::Args as ClapArgs;

use crate::cli::common::{self, OutputArgs, SweepArgs};
#[cfg(feature = "soundcard")]
use gliss::audio::soundcard::{Request, SoundCard};
use gliss::audio::virtual_system::{VirtualDriver, VirtualSystem};
use gliss::audio::{PlayRecord, Progress};
use gliss::error::{Error, Result};
use gliss::session::measure::{self, MeasureJob};
use gliss::signal::sweep::SweepDesign;

/// Above this sweep level `measure` asks before it plays, dBFS.
#[cfg(feature = "soundcard")]
pub const CONFIRM_ABOVE_DBFS: f64 = -6.0;

const AFTER_HELP: &str = "\
Safety: sweeps are loud, broadband signals. Protect your hearing (and that of anyone \
near) and start at a low level, with the amplifier turned down; raise it step by step. \
High-level sweeps with much high-frequency energy can damage tweeters: keep the level \
modest and the sweep short when measuring a tweeter on its own. Follow local rules on \
noise exposure. The default level is -20 dBFS; above -6 dBFS gliss asks first (--yes \
answers for scripts). Ctrl-C (or a termination signal, SIGTERM, or a hangup) stops at \
once: the output ramps down over 10 ms, the recording so far is kept and the manifest \
says the measurement is incomplete.

Wiring: play the sweep on --output-channel (default 1) into the amplifier, record the \
microphone on --channel. For a loopback reference, play the sweep on a second output too \
(--output-channel 1,2) and wire that output straight back to an input (--reference 2): \
the interface's own response and latency are then divided out, so a loopback reads 0 dB \
and 0 s. Without it the measured delay includes the interface's latency.

--device virtual measures the built-in simulated system (nothing is played; input 2 is \
a loopback from output 2; output 3 a subwoofer crossed at 80 Hz in the same room, for \
trying --each-output 1,3 --output-channel 2 --reference 2 and gliss align; with --impedance, the simulated system's woofer on the bench \
behind the sense resistor, input 1 before it and input 2 across the driver).

--impedance measures a driver's impedance instead (see gliss impedance --help for the \
wiring and the cautions: a divider or pad on each input, levels checked with a \
voltmeter before connecting, the sense resistor's power rating, a low drive level, the \
driver's excursion).";

/// Options of `gliss measure`.
#[derive(Debug, ClapArgs)]
#[command(after_help = AFTER_HELP)]
pub struct Args {
    /// The new measurement folder (it must not exist yet, or be empty).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// The sound card: a number from `gliss devices`, part of its name, or
    /// `virtual` for the simulated system [default: the system's default
    /// input and output].
    #[arg(long, value_name = "N|NAME|virtual")]
    pub device: Option<String>,
    /// The device that records, when it differs from the output (overrides
    /// --device for the input).
    #[arg(long, value_name = "N|NAME")]
    pub input_device: Option<String>,
    /// The device that plays, when it differs from the input (overrides
    /// --device for the output).
    #[arg(long, value_name = "N|NAME")]
    pub output_device: Option<String>,
    /// Output channels that play the sweep, counted from 1, e.g. 1 or 1,2
    /// [default: 1; with --each-output, none but those listed there].
    #[arg(long, value_name = "N[,N...]", value_delimiter = ',')]
    pub output_channel: Vec<usize>,
    /// Measure several loudspeakers in one run: play the sweep on each of
    /// these outputs in turn (with --output-channel's, e.g. the loopback's,
    /// every time), one measurement folder per output in --out
    /// (output-1, output-2, …), for gliss align. With --reference the
    /// relative timing between them is exact to the sample.
    #[arg(long, value_name = "N,N[,N...]", value_delimiter = ',')]
    pub each_output: Vec<usize>,
    /// The microphone input, counted from 1 [default: 1; with
    /// --impedance 2, the input across the driver].
    #[arg(long, value_name = "N")]
    pub channel: Option<usize>,
    /// An input wired straight back from an output that also plays the
    /// sweep (a loopback): the response is divided by it, which removes the
    /// interface's own response and latency. With --impedance: the input at
    /// the amplifier side of the sense resistor [default with --impedance: 1].
    #[arg(long, value_name = "N")]
    pub reference: Option<usize>,
    /// Play N sweeps with short gaps and average them synchronously (each
    /// doubling lowers uncorrelated noise by 3 dB); every take stays in
    /// recording.wav.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub repeat: usize,
    /// Buffer size in frames [default: the device's]; smaller buffers
    /// risk lost samples on a busy machine.
    #[arg(long, value_name = "FRAMES")]
    pub buffer: Option<u32>,
    /// Measure a loudspeaker driver's impedance through a sense resistor
    /// instead of a response: --reference (default 1) records the amplifier
    /// side of the resistor, --channel (default 2) the voltage across the
    /// driver; the folder is an impedance folder as `gliss impedance`
    /// writes. Read the wiring and cautions of `gliss impedance --help`
    /// first: never connect the amplifier's output to an input directly.
    #[arg(long, requires = "sense_ohms")]
    pub impedance: bool,
    /// With --impedance: the sense resistor in series with the driver,
    /// ohms (as an ohmmeter reads it).
    #[arg(
        long,
        value_name = "R",
        allow_hyphen_values = true,
        requires = "impedance"
    )]
    pub sense_ohms: Option<f64>,
    /// With --impedance: the voice coil's DC resistance, ohms, as an
    /// ohmmeter reads it [default: read from the impedance].
    #[arg(
        long,
        value_name = "OHMS",
        allow_hyphen_values = true,
        requires = "impedance"
    )]
    pub re_ohms: Option<f64>,
    /// Play above -6 dBFS without asking (for scripts; mind the safety
    /// notes below).
    #[arg(long)]
    pub yes: bool,
    #[command(flatten)]
    pub sweep: SweepArgs,
    #[command(flatten)]
    pub output: OutputArgs,
    #[command(flatten)]
    pub orbit: common::OrbitArgs,
    /// A guided directivity series around the loudspeaker on this orbit
    /// (horizontal or vertical): --out is then the series folder, one
    /// measurement folder per angle inside it; gliss asks you to turn the
    /// loudspeaker to each angle in turn (Enter to measure, q to stop)
    /// and resumes an interrupted series where it stopped.
    #[arg(long, value_name = "ORBIT", conflicts_with_all = ["orbit", "angle", "noise", "impedance"])]
    pub series: Option<gliss::model::Orbit>,
    /// The series' step, degrees (it must divide 180; the standard's is 10).
    #[arg(long, value_name = "DEG", default_value_t = 10, requires = "series")]
    pub step: i32,
    /// Measure each angle of the series without waiting for Enter (a
    /// turntable turned by other means, or the virtual device).
    #[arg(long, requires = "series")]
    pub no_prompt: bool,
    /// Record the room's background noise for S seconds with every output
    /// silent, into --out as a noise folder (as `gliss noise` writes),
    /// instead of measuring with the sweep; needs --calibration. 30 s or
    /// more for a steady noise, at most 600 s.
    #[arg(long, value_name = "S", allow_hyphen_values = true)]
    pub noise: Option<f64>,
    /// The A-weighted speech level at 1 m of the talker, dB(A), for the
    /// STI [default: 60, normal vocal effort, with --noise-folder]; as
    /// `analyze --speech-level`.
    #[arg(
        long,
        value_name = "DB",
        allow_hyphen_values = true,
        conflicts_with = "noise"
    )]
    pub speech_level: Option<f64>,
    /// A noise folder of the same room: the STI includes its noise (as
    /// `analyze --noise DIR`).
    #[arg(long, value_name = "DIR", conflicts_with = "noise")]
    pub noise_folder: Option<PathBuf>,
}

/// Set by Ctrl-C: the measurement stops, the output ramps down.
static STOP: AtomicBool = AtomicBool::new(false);

fn one_based(v: usize, what: &str) -> Result<usize> {
    v.checked_sub(1).ok_or_else(|| {
        Error::parameter(format!(
            "{what} counts from 1; use {what} 1 for the first channel"
        ))
    })
}

/// Asks before a loud sweep; refuses when nobody can answer.
#[cfg(feature = "soundcard")]
fn confirm_level(level: f64, yes: bool) -> Result<()> {
    if level <= CONFIRM_ABOVE_DBFS || yes {
        return Ok(());
    }
    if !std::io::stdin().is_terminal() {
        return Err(Error::parameter(format!(
            "--level {level} dBFS is above {CONFIRM_ABOVE_DBFS} dBFS and nobody is at the terminal to confirm it; add --yes if you mean it (protect your hearing and the tweeters)"
        )));
    }
    eprint!(
        "The sweep will play at {level} dBFS, which can be very loud and can damage tweeters. Turn the amplifier down first. Play it? Type yes: "
    );
    let _ = std::io::stderr().flush();
    let mut answer = String::new();
    std::io::stdin()
        .read_line(&mut answer)
        .map_err(|e| Error::parameter(format!("could not read the answer: {e}")))?;
    if answer.trim().eq_ignore_ascii_case("yes") {
        Ok(())
    } else {
        Err(Error::parameter(
            "not played: the loud sweep was not confirmed; lower --level or answer yes",
        ))
    }
}

/// A terminal progress bar with time left and a live input peak meter.
struct Meter {
    bar: indicatif::ProgressBar,
    rate: f64,
    hold: f32,
    hold_age: u32,
}

impl Meter {
    fn new(total_frames: u64, rate: f64) -> Self {
        let bar = indicatif::ProgressBar::with_draw_target(
            Some(total_frames),
            indicatif::ProgressDrawTarget::stderr(),
        );
        if let Ok(style) =
            indicatif::ProgressStyle::with_template(&format!("{{bar:{BAR_COLUMNS}}} {{msg}}"))
        {
            bar.set_style(style.progress_chars("=> "));
        }
        Meter {
            bar,
            rate,
            hold: 0.0,
            hold_age: 0,
        }
    }

    fn update(&mut self, p: Progress) {
        // a peak meter holds its highest reading for about a second
        self.hold_age += 1;
        if p.peak >= self.hold || self.hold_age > 50 {
            self.hold = p.peak;
            self.hold_age = 0;
        }
        let done = p.done_frames as f64 / self.rate;
        let total = p.total_frames as f64 / self.rate;
        self.bar
            .set_message(meter_line(done, total, self.hold, p.done_frames > 0));
        self.bar.set_length(p.total_frames);
        self.bar.set_position(p.done_frames);
    }
}

/// Width of the progress bar before the meter line, columns.
const BAR_COLUMNS: usize = 16;

/// The meter's range, dB below full scale: its left end.
const METER_FLOOR_DB: f64 = -60.0;

/// Below this a peak reads as "no signal", dBFS (under the noise of any
/// 24-bit converter: an input that reads less carries nothing).
const NO_SIGNAL_DBFS: f64 = -120.0;

/// The peak `dbfs` in words: "-12.3 dBFS", or "no signal".
fn peak_words(dbfs: f64) -> String {
    if dbfs < NO_SIGNAL_DBFS || !dbfs.is_finite() {
        "no signal".to_string()
    } else {
        format!("{dbfs:.1} dBFS")
    }
}

/// The line beside the progress bar: the time done and the whole, the
/// input's held peak in words and on a 12-cell meter with its scale
/// (-60 … 0 dBFS), CLIP at full scale, low when under -50 dBFS once the
/// recording runs. With the bar it fits 80 columns.
fn meter_line(done_s: f64, total_s: f64, peak: f32, running: bool) -> String {
    let db = 20.0 * f64::from(peak.max(1e-12)).log10();
    let cells = (((db - METER_FLOOR_DB) / -METER_FLOOR_DB).clamp(0.0, 1.0) * 12.0).round() as usize;
    let warn = if db >= -0.1 {
        " CLIP"
    } else if db < -50.0 && running {
        " low"
    } else {
        ""
    };
    format!(
        "{done_s:5.1}/{total_s:.1} s  in {:>10} {METER_FLOOR_DB:.0}[{:<12}]0{warn}",
        peak_words(db),
        "#".repeat(cells)
    )
}

/// Asks before a loud sweep, then opens the sound card for `highest_in`
/// inputs and `highest_out` outputs.
#[cfg(feature = "soundcard")]
fn sound_card(
    a: &Args,
    design: &SweepDesign,
    highest_in: usize,
    highest_out: usize,
) -> Result<Box<dyn PlayRecord>> {
    confirm_level(design.params.level_dbfs, a.yes)?;
    Ok(Box::new(SoundCard::open(&Request {
        input_device: a.input_device.clone().or_else(|| a.device.clone()),
        output_device: a.output_device.clone().or_else(|| a.device.clone()),
        sample_rate_hz: design.params.sample_rate_hz,
        input_channels: highest_in,
        output_channels: highest_out,
        buffer_frames: a.buffer,
    })?))
}

/// A build without the sound card refuses every device but the virtual one.
#[cfg(not(feature = "soundcard"))]
fn sound_card(a: &Args, _: &SweepDesign, _: usize, _: usize) -> Result<Box<dyn PlayRecord>> {
    // the sound card's options have nothing to act on here
    let _ = (&a.input_device, &a.output_device, a.buffer, a.yes);
    Err(common::no_soundcard(
        "gliss measure with a sound card",
        "gliss measure --device virtual measures the simulated system; to measure through a sound card, ",
    ))
}

/// Runs `gliss measure`.
pub fn run(a: Args) -> Result<()> {
    if a.output.overwrite {
        return Err(Error::parameter(
            "--overwrite does not apply to measure: every measurement goes to a new folder; to re-analyse one, use gliss analyze on its recording.wav",
        ));
    }
    let mut config = a.output.config()?;
    config.speech = common::speech_conditions(a.speech_level, a.noise_folder.as_deref())?;
    let mic = a.output.mic_correction()?;
    config.mic_correction = mic.as_ref().map(|m| m.0.clone());
    let calibration = a.output.calibration()?;
    let drive = a.output.drive()?;
    let design = a.sweep.design()?;
    let target = a
        .output
        .target((design.params.start_hz, design.params.end_hz))?;
    let channel_given = a.channel.unwrap_or(if a.impedance { 2 } else { 1 });
    let channel = one_based(channel_given, "--channel")?;
    let reference_given = a.reference.or(a.impedance.then_some(1));
    let reference = reference_given
        .map(|r| one_based(r, "--reference"))
        .transpose()?;
    let impedance = match (a.impedance, a.sense_ohms) {
        (true, Some(r)) => Some(super::impedance::impedance_job(
            reference_given,
            r,
            a.re_ohms,
            None,
        )?),
        _ => None,
    };
    if impedance.is_some() {
        // the impedance's own settings: no gate, no bands; an analysis
        // option given with it would be ignored, so it is refused
        let o = &a.output;
        let ignored = [
            (o.smooth.is_some(), "--smooth"),
            (o.gate.is_some(), "--gate"),
            (o.profile.is_some(), "--profile"),
            (o.bands, "--bands"),
            (o.no_bands, "--no-bands"),
        ];
        if let Some((_, name)) = ignored.iter().find(|(given, _)| *given) {
            return Err(Error::parameter(format!(
                "{name} does not apply with --impedance: the driver channel is analysed with the impedance's own settings (1/12-octave smoothing, no gate, no bands); leave {name} out"
            )));
        }
        config = super::impedance::config()?;
    }
    let given_outputs: Vec<usize> = if a.output_channel.is_empty() && a.each_output.is_empty() {
        vec![1]
    } else {
        a.output_channel.clone()
    };
    let each = each_output(&a, &given_outputs)?;
    let mut outputs = Vec::new();
    for &o in &given_outputs {
        let o = one_based(o, "--output-channel")?;
        if !outputs.contains(&o) {
            outputs.push(o);
        }
    }
    if a.repeat == 0 || a.repeat > 64 {
        return Err(Error::parameter(format!(
            "--repeat {} is out of range; use 1 to 64 sweeps",
            a.repeat
        )));
    }
    if a.buffer == Some(0) {
        return Err(Error::parameter(
            "--buffer must be a positive number of frames",
        ));
    }
    let is_virtual = a
        .device
        .as_deref()
        .is_some_and(|d| d.trim().eq_ignore_ascii_case("virtual"));
    let mut device: Box<dyn PlayRecord> = if is_virtual {
        Box::new(VirtualSystem {
            loopback: true,
            driver: a.sense_ohms.map(VirtualDriver::kestrel_woofer),
            position: a.orbit.position()?,
            ..VirtualSystem::default()
        })
    } else {
        let highest_in = channel.max(reference.unwrap_or(0)) + 1;
        let highest_out = outputs.iter().chain(&each).copied().max().unwrap_or(0) + 1;
        sound_card(&a, &design, highest_in, highest_out)?
    };
    let position = a.orbit.position()?;
    if position.is_some() && (a.noise.is_some() || a.impedance) {
        return Err(Error::parameter(
            "--orbit and --angle place a loudspeaker measurement; they do not apply to --noise or --impedance: leave them out",
        ));
    }
    if let Some(seconds) = a.noise {
        return record_noise(&a, device.as_mut(), seconds, channel, calibration, &design);
    }
    let title = match (is_virtual, a.impedance) {
        (true, true) => "Kestrel 5 woofer on the bench (simulated)".into(),
        (true, false) => virtual_title(&outputs),
        _ => format!("{}, input {channel_given}", common::show(&a.out)),
    };
    let job = MeasureJob {
        out: a.out.clone(),
        plots: !a.output.no_plots,
        phase_view: a.output.phase_plot,
        channel,
        reference,
        output_channels: outputs,
        repeat: a.repeat,
        design: design.clone(),
        config,
        title,
        command_line: std::env::args().collect(),
        mic_correction: mic.map(|m| m.1),
        calibration,
        drive,
        source_kind: if is_virtual { "virtual" } else { "soundcard" }.into(),
        target,
        impedance,
        position,
    };
    if !each.is_empty() {
        return measure_each(&a, device.as_mut(), &job, &each, reference_given);
    }
    if let Some(orbit) = a.series {
        return series(&a, orbit, job, device, is_virtual);
    }
    measure::check(&job, device.as_ref())?;
    // Ctrl-C, SIGTERM and a hangup (ctrlc's "termination" feature) stop
    // the measurement instead of killing the process, so that the output
    // ramps down and the raw file is closed properly
    let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
    println!("{}", device.describe());
    println!(
        "playing {} sweep{} of {:.1} s at {} dBFS on output {}; recording input {}{}",
        a.repeat,
        if a.repeat == 1 { "" } else { "s" },
        design.length_s,
        design.params.level_dbfs,
        given_outputs
            .iter()
            .map(|c| c.to_string())
            .collect::<Vec<_>>()
            .join(","),
        channel_given,
        reference_given
            .map(|r| format!(" (reference: input {r})"))
            .unwrap_or_default()
    );
    let mut meter = Meter::new(1, f64::from(design.params.sample_rate_hz));
    let outcome = measure::measure(device.as_mut(), &job, &STOP, &mut |p| meter.update(p));
    meter.bar.finish_and_clear();
    let outcome = outcome?;
    if let Some(m) = outcome_measurement(&a.out) {
        let peaks: Vec<String> = m
            .input_peaks_dbfs
            .iter()
            .enumerate()
            .map(|(i, p)| format!("input {} {}", i + 1, peak_words(*p)))
            .collect();
        println!("input peaks: {}", peaks.join(", "));
    }
    if outcome.impedance.is_some() {
        super::impedance::print_summary(&common::show(&a.out), &outcome);
    } else {
        super::demo::print_summary(&common::show(&a.out), &outcome);
    }
    if a.repeat > 1 {
        println!(
            "{} sweeps averaged synchronously: uncorrelated noise {:.1} dB lower than one sweep's",
            a.repeat,
            10.0 * (a.repeat as f64).log10()
        );
    }
    if reference.is_none() && !a.impedance {
        println!(
            "note: no --reference, so the delay includes the interface's latency (known to about one buffer)"
        );
    }
    Ok(())
}

/// `--each-output`: the outputs (0-based) to measure in turn, checked
/// against the options it cannot go with; empty without it.
fn each_output(a: &Args, always: &[usize]) -> Result<Vec<usize>> {
    if a.each_output.is_empty() {
        return Ok(Vec::new());
    }
    if a.impedance || a.noise.is_some() {
        return Err(Error::parameter(
            "--each-output measures several loudspeakers' responses; it does not go with --impedance or --noise",
        ));
    }
    let mut each = Vec::new();
    for &o in &a.each_output {
        let o0 = one_based(o, "--each-output")?;
        if each.contains(&o0) {
            return Err(Error::parameter(format!(
                "--each-output lists output {o} twice; list each loudspeaker's output once"
            )));
        }
        if always.contains(&o) {
            return Err(Error::parameter(format!(
                "output {o} is in --each-output and in --output-channel; --output-channel names the outputs that play every time (the loopback's), so leave it out of one"
            )));
        }
        each.push(o0);
    }
    if each.len() < 2 {
        return Err(Error::parameter(
            "--each-output needs two or more outputs, e.g. --each-output 1,2; for one loudspeaker use --output-channel",
        ));
    }
    Ok(each)
}

/// The plots' title for the built-in virtual system playing `outputs`
/// (0-based): the microphone hears the Kestrel 5 on output 1 and the
/// subwoofer on output 3 (output 2 is the loopback).
fn virtual_title(outputs: &[usize]) -> String {
    let heard: Vec<&str> = [(0, "Kestrel 5"), (2, "the subwoofer")]
        .into_iter()
        .filter(|(o, _)| outputs.contains(o))
        .map(|(_, name)| name)
        .collect();
    let what = match heard.as_slice() {
        [] => "Nothing (the loopback output only)".to_string(),
        [one] => one.to_string(),
        more => more.join(" and "),
    };
    let mut what = what;
    if let Some(c) = what.get(..1) {
        what = c.to_uppercase() + &what[1..];
    }
    format!("{what} in the rehearsal room (simulated)")
}

/// `gliss measure --each-output`: the sweep on each output in turn, one
/// measurement folder per output in `--out`, with the same sweep, inputs
/// and reference.
fn measure_each(
    a: &Args,
    device: &mut dyn PlayRecord,
    base: &MeasureJob,
    each: &[usize],
    reference_given: Option<usize>,
) -> Result<()> {
    if a.out.exists()
        && std::fs::read_dir(&a.out)
            .map(|mut d| d.next().is_some())
            .unwrap_or(true)
    {
        return Err(Error::new(
            gliss::ErrorKind::AlreadyExists,
            format!(
                "{} already exists and is not empty; --each-output writes a folder per output into a new folder: choose another --out",
                a.out.display()
            ),
        ));
    }
    let mut jobs = measure::each_output_jobs(base, each);
    if base.source_kind == "virtual" && !a.impedance {
        // each folder names what its own output plays
        for (j, o) in jobs.iter_mut().zip(each) {
            j.title = format!("{}, output {}", virtual_title(&[*o]), o + 1);
        }
    }
    for j in &jobs {
        measure::check(j, device)?;
    }
    std::fs::create_dir_all(&a.out).map_err(|e| Error::io("create", &a.out, &e))?;
    let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
    println!("{}", device.describe());
    if reference_given.is_none() {
        println!(
            "note: no --reference: each measurement's timing includes the interface's latency, which can change from run to run, so the relative delays between the outputs are only as good as it is repeatable"
        );
    }
    let mut folders = Vec::new();
    for (j, &o) in jobs.iter().zip(each) {
        println!(
            "output {}: playing {} sweep{} of {:.1} s at {} dBFS{}; recording input {}",
            o + 1,
            a.repeat,
            if a.repeat == 1 { "" } else { "s" },
            j.design.length_s,
            j.design.params.level_dbfs,
            if j.output_channels.len() > 1 {
                format!(
                    " (with output {} every time)",
                    j.output_channels[1..]
                        .iter()
                        .map(|c| (c + 1).to_string())
                        .collect::<Vec<_>>()
                        .join(",")
                )
            } else {
                String::new()
            },
            j.channel + 1
        );
        let mut meter = Meter::new(1, f64::from(j.design.params.sample_rate_hz));
        let outcome = measure::measure(device, j, &STOP, &mut |p| meter.update(p));
        meter.bar.finish_and_clear();
        let outcome = outcome?;
        super::demo::print_summary(&common::show(&j.out), &outcome);
        folders.push(common::show(&j.out));
    }
    println!(
        "relate them: gliss align {} --out {}",
        folders.join(" "),
        common::show(&a.out.join("align"))
    );
    Ok(())
}

/// `gliss measure --noise S`: the room's noise through the device, outputs
/// silent, into a noise folder.
fn record_noise(
    a: &Args,
    device: &mut dyn PlayRecord,
    seconds: f64,
    channel: usize,
    calibration: Option<(
        gliss::analysis::calibration::Calibration,
        gliss::folder::schema::FileEntry,
    )>,
    design: &SweepDesign,
) -> Result<()> {
    let Some(calibration) = calibration else {
        return Err(Error::parameter(
            "--noise needs --calibration: the noise is stated in dB SPL; run gliss calibrate on a calibrator's tone and pass --calibration FILE.json",
        ));
    };
    let is_virtual = device.describe().to_lowercase().contains("virtual");
    let job = gliss::session::noise::NoiseRecording {
        out: a.out.clone(),
        plots: !a.output.no_plots,
        seconds,
        channel,
        calibration,
        sample_rate_hz: design.params.sample_rate_hz,
        source_kind: if is_virtual { "virtual" } else { "soundcard" }.into(),
        command_line: std::env::args().collect(),
    };
    let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
    println!("{}", device.describe());
    println!(
        "recording {seconds} s of the room's noise on input {} with every output silent",
        channel + 1
    );
    let mut meter = Meter::new(1, f64::from(design.params.sample_rate_hz));
    let outcome = gliss::session::noise::record(device, &job, &STOP, &mut |p| meter.update(p));
    meter.bar.finish_and_clear();
    super::noise::print_levels(&common::show(&a.out), &outcome?.levels);
    Ok(())
}

/// The measurement record of the folder just written.
fn outcome_measurement(dir: &std::path::Path) -> Option<gliss::folder::schema::MeasurementRecord> {
    gliss::folder::read_manifest(dir).ok()?.measurement
}

/// Asks for the loudspeaker to be turned to `p`; false when the user stops
/// (q, or the input ends).
fn ask_turn(p: gliss::model::Position, k: usize, n: usize) -> bool {
    use std::io::BufRead;
    println!(
        "[{k}/{n}] turn the loudspeaker so that the microphone is at {} off its axis, then press Enter (q and Enter to stop)",
        p.words()
    );
    let mut line = String::new();
    match std::io::stdin().lock().read_line(&mut line) {
        Ok(0) | Err(_) => false,
        Ok(_) => !line.trim().eq_ignore_ascii_case("q"),
    }
}

/// `gliss measure --series ORBIT`: each angle of the orbit in turn into
/// its own folder inside --out, skipping the angles already measured
/// there; the on-axis measurement's gate (found or given) is every
/// angle's gate.
fn series(
    a: &Args,
    orbit: gliss::model::Orbit,
    mut job: MeasureJob,
    mut device: Box<dyn PlayRecord>,
    is_virtual: bool,
) -> Result<()> {
    use gliss::analysis::gate::Gate;
    use gliss::session::directivity::{
        SeriesState, position_folder, series_positions, series_state,
    };
    let positions = series_positions(orbit, a.step)?;
    let n = positions.len();
    let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
    println!("{}", device.describe());
    let mut todo = Vec::new();
    for &p in &positions {
        match series_state(&a.out, p) {
            SeriesState::Missing => todo.push(p),
            SeriesState::Done { folder, gate } => {
                if p.angle_deg == 0 {
                    if let (Some(g), Some(Gate::Auto)) = (gate, job.config.gate) {
                        job.config.gate = Some(Gate::Fixed {
                            start_s: g.start_s,
                            end_s: g.end_s,
                        });
                    }
                }
                println!(
                    "{} already measured in {}",
                    p.words(),
                    common::show(&folder)
                );
            }
            SeriesState::Blocked(why) => return Err(Error::input(why)),
        }
    }
    let base = a.out.clone();
    let done_before = n - todo.len();
    for (k, p) in todo.into_iter().enumerate() {
        if !a.no_prompt && !ask_turn(p, done_before + k + 1, n) {
            println!(
                "stopped: {} of {n} angles measured in {}; run the same command again to go on from {}",
                done_before + k,
                common::show(&base),
                p.words()
            );
            return Ok(());
        }
        if is_virtual {
            device = Box::new(VirtualSystem {
                loopback: true,
                position: Some(p),
                ..VirtualSystem::default()
            });
        }
        job.out = base.join(position_folder(p));
        job.position = Some(p);
        measure::check(&job, device.as_ref())?;
        let mut meter = Meter::new(1, f64::from(job.design.params.sample_rate_hz));
        let outcome = measure::measure(device.as_mut(), &job, &STOP, &mut |q| meter.update(q));
        meter.bar.finish_and_clear();
        let outcome = outcome?;
        println!(
            "measured {}: {}",
            p.words(),
            common::outcome_in_brief(&outcome)
        );
        if p.angle_deg == 0 {
            if let (Some(g), Some(Gate::Auto)) = (&outcome.analysis.gate, job.config.gate) {
                job.config.gate = Some(Gate::Fixed {
                    start_s: g.start_s,
                    end_s: g.end_s,
                });
                println!(
                    "on axis: gate {:.2} to {:.2} ms, used for every angle",
                    g.start_s * 1e3,
                    g.end_s * 1e3
                );
            }
        }
    }
    println!(
        "series complete: {n} angles of the {} orbit in {}; reduce them with gliss directivity {}/* --out DIR",
        orbit.code(),
        common::show(&base),
        common::show(&base)
    );
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_progress_line_fits_80_columns_and_says_when_there_is_no_signal() {
        for (done, total, peak) in [
            (0.0, 9.5, 0.0f32),
            (123.4, 999.9, 1.0),
            (5.0, 10.0, 0.01),
            (5.0, 10.0, 1e-7),
        ] {
            let line = meter_line(done, total, peak, true);
            let width = BAR_COLUMNS + 1 + line.chars().count();
            assert!(width <= 80, "{width} columns: {line}");
            // the meter shows its scale
            assert!(line.contains("-60[") && line.contains("]0"), "{line}");
        }
        assert!(meter_line(1.0, 2.0, 0.0, true).contains("no signal"));
        assert!(meter_line(1.0, 2.0, 1.0, true).ends_with("CLIP"));
        assert!(meter_line(1.0, 2.0, 0.1, true).contains("-20.0 dBFS"));
        assert_eq!(peak_words(-240.0), "no signal");
        assert_eq!(peak_words(-11.94), "-11.9 dBFS");
    }
}

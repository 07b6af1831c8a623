//! `gliss demo`: the whole job on the virtual system.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common::{self, OutputArgs, SweepArgs};
use gliss::analysis::room;
use gliss::audio::virtual_system::VirtualSystem;
use gliss::audio::{NoSink, PlayRecord, Playback};
use gliss::error::{Error, Result};
use gliss::folder::schema::Source;
use gliss::model::Severity;
use gliss::session::compare::{self, AverageJob, CompareJob};
use gliss::session::{self, Job, Outcome};
use gliss::signal::wav::{SampleEncoding, decode_wav, encode_wav};

/// Options of `gliss demo`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "The story (the default): the Kestrel 5 monitor plays in a bare 4.6 × 3.8 × \
2.6 m rehearsal room, measured at three microphone positions (1.2, 1.8 and 2.4 m); the \
room is then treated (panels at the first reflection points and on the rear wall, two \
corner bass traps) and measured again at the same positions. gliss averages each \
condition, compares them with the room's volume, tunes the treated room's positions to a \
gently sloping target (correction filters, as gliss tune), and writes the report, judging T30 \
against the brief of 0.3 to 0.5 s per octave band. DIR gets \
before-1..3, after-1..3 (measurements), before and after (averages), comparison, target.csv, \
tuning, report.html and tuning.html (the tuning's report). With --single, DIR is one measurement \
of the bare room at 1.2 m. With --directivity, DIR gets the Kestrel 5 measured around both \
orbits at 10° (70 folders horizontal0 … vertical-170, gated before the room's first reflection \
with the on-axis gate), their reduction in directivity/ (gliss directivity) and report.html.

Everything in the demo is simulated: the Kestrel 5 monitor and the rehearsal room are the \
project's own inventions, rendered in software, and no sound is played."
)]
pub struct Args {
    /// The folder to write (the story's folders go inside it).
    #[arg(long, value_name = "DIR", default_value = "gliss-demo")]
    pub out: PathBuf,
    /// One measurement (the bare room at 1.2 m) instead of the story.
    #[arg(long)]
    pub single: bool,
    /// A directivity series instead of the story: the Kestrel 5 measured
    /// at 10° steps around both orbits (70 positions) at 1.2 m, reduced
    /// by gliss directivity and reported.
    #[arg(long, conflicts_with = "single")]
    pub directivity: bool,
    /// In the story, draw plots only for the averages and the comparison
    /// (with --directivity: only for the directivity folder); smaller
    /// folders, the positions keep their numbers and CSVs.
    #[arg(long)]
    pub no_position_plots: bool,
    /// Sample format of the simulated raw recordings: 16, 24 (integer) or
    /// 32 (float).
    #[arg(long, value_name = "16|24|32", default_value_t = 32)]
    pub bits: u16,
    #[command(flatten)]
    pub sweep: SweepArgs,
    #[command(flatten)]
    pub output: OutputArgs,
    #[command(flatten)]
    pub speech: common::SpeechArgs,
    /// Seed of the simulated background noise.
    #[arg(long, default_value_t = 2026)]
    pub seed: u64,
}

/// The story's brief for the treated room: T30 from 0.3 to 0.5 s in every
/// octave band (the scenario's own choice for a small rehearsal room, not
/// a standard's), drawn and judged on the report's first page.
pub const BRIEF_RT: &str = "0.3,0.5";

/// The story's target for tuning the treated room: a gentle slope from
/// +3 dB at 20 Hz to −3 dB at 20 kHz (a straight line on a log axis),
/// ±3 dB (the scenario's own choice, not a standard's).
pub const TUNING_TARGET: &str = "# gliss demo: a gently sloping target, +3 dB at 20 Hz to -3 dB at 20 kHz, +-3 dB\nfrequency_hz,target_db,tolerance_db\n20,3,3\n20000,-3,3\n";

/// The range the story tunes, Hz: where the Kestrel 5 plays, from just
/// above its closed box's 58 Hz high-pass (below it a boost would only
/// push the woofer's excursion into its roll-off) to 16 kHz.
pub const TUNING_RANGE_HZ: (f64, f64) = (65.0, 16_000.0);

/// Volume of the demo room, m³ (4.6 × 3.8 × 2.6 m).
pub const ROOM_VOLUME_M3: f64 = 4.6 * 3.8 * 2.6;

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
    if let Some(s) = &a.speech {
        match (s.sti, &s.qualification) {
            (Some(v), Some(q)) => println!(
                "STI {v:.2} (qualification band {q}, IEC 60268-16); {}",
                s.corrections.statement
            ),
            _ => println!("STI not given (see results.json speech.warnings)"),
        }
    }
    // the bands' warnings once per code (analysis::room::group_band_warnings,
    // as the report shows them), in place of the whole result's summaries
    // of them; results.json keeps every one in its band
    let groups = a
        .room
        .as_ref()
        .map(|r| room::group_band_warnings(&r.bands))
        .unwrap_or_default();
    let general: Vec<_> = a
        .warnings
        .iter()
        .filter(|w| groups.is_empty() || !room::summarises_bands(w.code))
        .collect();
    if general.is_empty() && groups.is_empty() {
        println!("no warnings");
    }
    for w in general {
        println!("warning: {w}");
    }
    for g in &groups {
        let word = match g.code.severity() {
            Severity::Note => "note",
            Severity::Caution | Severity::Problem => "warning",
        };
        println!("{word}: {}", g.line());
    }
}

/// One simulated measurement of `system` into `out`.
fn measure_one(
    a: &Args,
    system: &mut VirtualSystem,
    out: &std::path::Path,
    title: &str,
    plots: bool,
) -> Result<Outcome> {
    let mut config = a.output.config()?;
    if a.output.profile.is_none() {
        // the story's room is a rehearsal room: a room for music
        config.profile = gliss::model::Profile::Music;
    }
    measure_with(a, system, out, title, plots, config)
}

/// [`measure_one`] with the analysis settings given.
fn measure_with(
    a: &Args,
    system: &mut VirtualSystem,
    out: &std::path::Path,
    title: &str,
    plots: bool,
    mut config: gliss::analysis::AnalysisConfig,
) -> Result<Outcome> {
    config.speech = a.speech.conditions()?;
    let drive = a.output.drive()?;
    let mic = a.output.mic_correction()?;
    config.mic_correction = mic.as_ref().map(|m| m.0.clone());
    let design = a.sweep.design()?;
    let encoding = SampleEncoding::from_bits(a.bits).map_err(|_| {
        Error::parameter(format!(
            "--bits {} is not a WAV format gliss writes; use 16, 24 or 32 (float)",
            a.bits
        ))
    })?;
    let target = a
        .output
        .target((design.params.start_hz, design.params.end_hz))?;
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
    let stimulus_bytes = encode_wav(&[&stimulus], design.params.sample_rate_hz, encoding);
    let refs: Vec<&[f64]> = take.channels.iter().map(Vec::as_slice).collect();
    let recording_bytes = encode_wav(&refs, take.sample_rate_hz, encoding);
    // analyse what was written, exactly as `analyze` would read it
    let decode =
        |b: &[u8]| decode_wav(b).map_err(|e| Error::input(format!("the simulated file {e}")));
    let job = Job {
        out: out.to_path_buf(),
        overwrite: a.output.overwrite,
        plots,
        phase_view: a.output.phase_plot,
        recording: decode(&recording_bytes)?,
        recording_bytes,
        channel: 0,
        stimulus: decode(&stimulus_bytes)?,
        stimulus_bytes,
        design,
        config,
        source: Source {
            kind: "virtual".into(),
            description: system.describe(),
            recording_path: None,
            sweep_path: None,
        },
        title: title.into(),
        command_line: std::env::args().collect(),
        mic_correction: mic.map(|m| m.1),
        calibration: a.output.calibration()?,
        reference: None,
        measurement: None,
        drive,
        target,
        impulse: false,
        recovered_sweep: None,
        sweep_binding: None,
        impedance: None,
        position: system.position,
    };
    session::run(job)
}

/// Runs `gliss demo`.
pub fn run(a: Args) -> Result<()> {
    let bare = VirtualSystem {
        seed: a.seed,
        ..VirtualSystem::default()
    };
    if a.directivity {
        return directivity_series(&a, &bare);
    }
    if a.single {
        let mut system = bare;
        println!("SIMULATED: {}", system.describe());
        println!("(no sound is played; the recording is computed)");
        let outcome = measure_one(
            &a,
            &mut system,
            &a.out,
            "Kestrel 5 in the rehearsal room (simulated)",
            !a.output.no_plots,
        )?;
        print_summary(&common::show(&a.out), &outcome);
        return Ok(());
    }
    story(&a, &bare)
}

/// The story's tuning step: the treated room's three positions (the
/// loudspeaker heard around the listening position) tuned to
/// [`TUNING_TARGET`], written beside the folders as target.csv.
fn tune(a: &Args) -> Result<()> {
    use gliss::analysis::target::Target;
    use gliss::session::tuning::{self, TuneJob};
    let path = a.out.join("target.csv");
    gliss::folder::write::write_replacing(&path, TUNING_TARGET.as_bytes(), a.output.overwrite)?;
    let (bytes, target_file) = common::read_input(&path)?;
    let target = Target::parse(&String::from_utf8_lossy(&bytes))?;
    let outcome = tuning::run(&TuneJob {
        out: a.out.join("tuning"),
        overwrite: a.output.overwrite,
        plots: !a.output.no_plots,
        inputs: (1..=3).map(|k| a.out.join(format!("after-{k}"))).collect(),
        target,
        target_file,
        range: Some(TUNING_RANGE_HZ),
        filters: 10,
        max_boost_db: 6.0,
        max_cut_db: 15.0,
        q_range: (0.3, 8.0),
        rates: Vec::new(),
        volume_m3: Some(ROOM_VOLUME_M3),
        above_transition: None,
        fir_taps: None,
        command_line: std::env::args().collect(),
    })?;
    let t = &outcome.tuning;
    println!(
        "tuned the treated room to a gently sloping target: {} filters, largest deviation {:.1} → {:.1} dB over {:.0}–{:.0} Hz (predicted)",
        t.filters.len(),
        t.before.max_abs_db,
        t.after.max_abs_db,
        TUNING_RANGE_HZ.0,
        TUNING_RANGE_HZ.1
    );
    Ok(())
}

/// The whole story: positions before and after treatment, averaged,
/// compared, tuned and reported.
fn story(a: &Args, bare: &VirtualSystem) -> Result<()> {
    println!(
        "SIMULATED: the Kestrel 5 monitor (virtual) in a bare 4.6 × 3.8 × 2.6 m rehearsal room (virtual), three microphone positions, before and after treatment"
    );
    println!("(no sound is played; the recordings are computed)");
    let positions = [1.2, 1.8, 2.4];
    let mut written = Vec::new();
    // every position is its own simulated system: all six are measured in
    // parallel, then reported in order
    struct Position {
        condition: &'static str,
        name: String,
        system: VirtualSystem,
        out: std::path::PathBuf,
        title: String,
    }
    let mut all = Vec::new();
    for (condition, system) in [("before", bare.clone()), ("after", bare.treated())] {
        for (k, d) in positions.iter().enumerate() {
            let name = format!("{condition}-{}", k + 1);
            all.push(Position {
                condition,
                system: VirtualSystem {
                    distance_m: *d,
                    seed: bare
                        .seed
                        .wrapping_add(k as u64 + if condition == "after" { 10 } else { 0 }),
                    ..system.clone()
                },
                out: a.out.join(&name),
                title: format!(
                    "rehearsal room {}, position {} at {d} m (simulated)",
                    if condition == "before" {
                        "bare"
                    } else {
                        "treated"
                    },
                    k + 1
                ),
                name,
            });
        }
    }
    let plots = !a.output.no_plots && !a.no_position_plots;
    let outcomes: Vec<Result<Outcome>> = {
        use rayon::prelude::*;
        all.par_iter_mut()
            .map(|p| measure_one(a, &mut p.system, &p.out, &p.title, plots))
            .collect()
    };
    let mut outcomes = outcomes.into_iter();
    for condition in ["before", "after"] {
        let mut dirs = Vec::new();
        for p in all.iter().filter(|p| p.condition == condition) {
            let o = outcomes
                .next()
                .expect("one outcome per position, in order")?;
            println!("measured {}: {}", p.name, common::outcome_in_brief(&o));
            dirs.push(p.out.clone());
            written.push(p.name.clone());
        }
        let avg = a.out.join(condition);
        compare::average(&AverageJob {
            out: avg.clone(),
            overwrite: a.output.overwrite,
            inputs: dirs,
            labels: (1..=positions.len())
                .map(|k| format!("position {k}"))
                .collect(),
            sources: 1,
            plots: !a.output.no_plots,
            command_line: std::env::args().collect(),
        })?;
        println!(
            "averaged the {} positions {condition} treatment into {condition}",
            positions.len()
        );
        written.push(condition.to_string());
    }
    let (cmp, _) = compare::compare(&CompareJob {
        align: None,
        out: a.out.join("comparison"),
        overwrite: a.output.overwrite,
        inputs: vec![a.out.join("before"), a.out.join("after")],
        labels: vec!["before treatment".into(), "after treatment".into()],
        smoothing: None,
        volume_m3: Some(ROOM_VOLUME_M3),
        temperature_c: 20.0,
        plots: !a.output.no_plots,
        command_line: std::env::args().collect(),
        target: None,
    })?;
    written.push("comparison".into());
    println!("compared before and after treatment (room volume {ROOM_VOLUME_M3:.1} m³):");
    common::print_octave_verdicts(&cmp, 1);
    tune(a)?;
    written.push("tuning".into());
    let report = a.out.join("report.html");
    super::report::run(super::report::Args {
        // the positions last: the report puts them in its appendix
        dirs: ["comparison", "before", "after"]
            .iter()
            .map(|d| a.out.join(d))
            .chain(
                ["before", "after"]
                    .iter()
                    .flat_map(|c| (1..=positions.len()).map(move |k| format!("{c}-{k}")))
                    .map(|d| a.out.join(d)),
            )
            .collect(),
        out: report,
        overwrite: a.output.overwrite,
        show_changed_raw: false,
        target_rt: Some(BRIEF_RT.to_string()),
    })?;
    // the tuning's own report: the plan for the processor, with the
    // treated room it was made from (the story's report stays within its
    // ten A4 pages)
    super::report::run(super::report::Args {
        dirs: vec![a.out.join("tuning"), a.out.join("after")],
        out: a.out.join("tuning.html"),
        overwrite: a.output.overwrite,
        show_changed_raw: false,
        target_rt: None,
    })?;
    println!("wrote {}:", common::show(&a.out));
    for w in &written {
        println!("  {w}/");
    }
    println!("  report.html  (open it in a browser: the comparison, then each average)");
    println!("  tuning.html  (the correction filters for the treated room, with target.csv)");
    Ok(())
}

/// The 70 positions of ANSI/CTA-2034-A's orbits at 10°, on axis first.
fn series_positions() -> Vec<gliss::model::Position> {
    use gliss::model::{Orbit, Position};
    let mut p = vec![Position {
        orbit: Orbit::Horizontal,
        angle_deg: 0,
    }];
    for orbit in Orbit::ALL {
        for k in -17..=18 {
            let angle_deg = k * 10;
            let shared = angle_deg == 0 || (angle_deg == 180 && orbit == Orbit::Vertical);
            if !shared {
                p.push(Position { orbit, angle_deg });
            }
        }
    }
    p
}

/// `gliss demo --directivity`: the Kestrel 5 around both orbits, the
/// on-axis gate for every angle, the reduction and the report.
fn directivity_series(a: &Args, bare: &VirtualSystem) -> Result<()> {
    use gliss::analysis::gate::Gate;
    println!(
        "SIMULATED: the Kestrel 5 monitor (virtual) measured at 1.2 m around both orbits at 10° (70 positions)"
    );
    println!("(no sound is played; the recordings are computed)");
    let mut config = a.output.config()?;
    if a.output.profile.is_none() {
        config.profile = gliss::model::Profile::Speaker;
        if a.output.smooth.is_none() {
            config.smoothing = gliss::analysis::Smoothing::Fraction(12);
        }
        config.bands = false;
        if a.output.gate.is_none() {
            config.gate = Some(Gate::Auto);
        }
    }
    let positions = series_positions();
    let plots = !a.output.no_plots && !a.no_position_plots;
    let system = |p| VirtualSystem {
        position: Some(p),
        ..bare.clone()
    };
    // on axis first: its gate, found or given, is every angle's gate
    let axis = positions[0];
    let first = measure_with(
        a,
        &mut system(axis),
        &a.out
            .join(gliss::session::directivity::position_folder(axis)),
        "Kestrel 5 on axis (simulated)",
        plots,
        config.clone(),
    )?;
    if let Some(g) = &first.analysis.gate {
        config.gate = Some(Gate::Fixed {
            start_s: g.start_s,
            end_s: g.end_s,
        });
        println!(
            "on axis: gate {:.2} to {:.2} ms, used for every angle",
            g.start_s * 1e3,
            g.end_s * 1e3
        );
    }
    let rest: Vec<Result<Outcome>> = {
        use rayon::prelude::*;
        positions[1..]
            .par_iter()
            .map(|&p| {
                measure_with(
                    a,
                    &mut system(p),
                    &a.out.join(gliss::session::directivity::position_folder(p)),
                    &format!("Kestrel 5 at {} (simulated)", p.words()),
                    plots,
                    config.clone(),
                )
            })
            .collect()
    };
    for r in rest {
        r?;
    }
    println!("measured {} positions", positions.len());
    let inputs: Vec<PathBuf> = positions
        .iter()
        .map(|&p| a.out.join(gliss::session::directivity::position_folder(p)))
        .collect();
    let out = a.out.join("directivity");
    let outcome = gliss::session::directivity::run(&gliss::session::directivity::DirectivityJob {
        inputs,
        out: out.clone(),
        overwrite: a.output.overwrite,
        plots: !a.output.no_plots,
        command_line: std::env::args().collect(),
    })?;
    super::directivity::print_summary(&common::show(&out), &outcome.file);
    super::report::run(super::report::Args {
        dirs: vec![out],
        out: a.out.join("report.html"),
        overwrite: a.output.overwrite,
        show_changed_raw: false,
        target_rt: None,
    })?;
    Ok(())
}

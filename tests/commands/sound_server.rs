//! The real sound path: `gliss measure` through cpal and ALSA into a
//! software sound server whose null sink's monitor records what is played.
//!
//! `.ci/run` starts PulseAudio with a null sink as the default sink and its
//! monitor as the default source, and sets GLISS_REQUIRE_SOUND_SERVER=1.
//! Elsewhere the tests skip (and say so) unless that variable is set, in
//! which case a missing sound server is a failure. They never run against
//! a real sink: a sweep is only played where it cannot be heard.

use std::path::Path;
use std::process::Command;
use std::sync::Mutex;
use std::time::Duration;

use crate::util::*;

/// One measurement at a time: they share the sink.
static SINK: Mutex<()> = Mutex::new(());

/// Whether the default sink of a running sound server is a null sink.
fn null_sink_ready() -> Result<(), String> {
    let info = Command::new("pactl")
        .arg("info")
        .output()
        .map_err(|e| format!("pactl cannot run ({e})"))?;
    if !info.status.success() {
        return Err("no sound server is running".into());
    }
    let text = String::from_utf8_lossy(&info.stdout).into_owned();
    let sink = text
        .lines()
        .find_map(|l| l.strip_prefix("Default Sink: "))
        .ok_or("the sound server has no default sink")?
        .trim()
        .to_string();
    let sinks = Command::new("pactl")
        .args(["list", "short", "sinks"])
        .output()
        .map_err(|e| format!("pactl cannot run ({e})"))?;
    let list = String::from_utf8_lossy(&sinks.stdout).into_owned();
    let is_null = list
        .lines()
        .any(|l| l.split('\t').nth(1) == Some(sink.as_str()) && l.contains("module-null-sink"));
    if is_null {
        Ok(())
    } else {
        Err(format!(
            "the default sink {sink} is not a null sink (a sweep would be heard)"
        ))
    }
}

/// True when the tests may play; panics when CI requires it and it is not
/// there.
fn sound_server() -> bool {
    match null_sink_ready() {
        Ok(()) => true,
        Err(why) => {
            assert!(
                std::env::var_os("GLISS_REQUIRE_SOUND_SERVER").is_none(),
                "GLISS_REQUIRE_SOUND_SERVER is set but {why}"
            );
            eprintln!("skipped: {why} (start PulseAudio with a null sink, as .ci/run does)");
            false
        }
    }
}

/// Measures into `out`. A software server on a busy machine (the other
/// tests run beside these) can underrun; gliss then rightly refuses the
/// take, keeps its files and says so, and the test measures again into a
/// new folder, up to three times.
fn measure(dir: &Path, out: &str, extra: &[&str]) -> serde_json::Value {
    for attempt in 1..=3 {
        let folder = format!("{out}-{attempt}");
        let o = run(dir, &measure_args(&folder, extra));
        let err = String::from_utf8_lossy(&o.stderr).into_owned();
        if o.status.success() {
            let _ = std::fs::rename(dir.join(&folder), dir.join(out));
            return json(&dir.join(out).join("results.json"));
        }
        assert!(
            err.contains("samples were lost"),
            "gliss measure failed for another reason than lost samples:\n{err}"
        );
        let m = json(&dir.join(&folder).join("manifest.json"));
        assert_eq!(
            m["complete"], false,
            "a take with lost samples is incomplete"
        );
        eprintln!("attempt {attempt} lost samples; measuring again");
    }
    panic!("three measurements in a row lost samples");
}

fn measure_args<'a>(out: &'a str, extra: &[&'a str]) -> Vec<&'a str> {
    let mut args = vec![
        "measure",
        "--out",
        out,
        "--buffer",
        "4096",
        "--length",
        "2",
        "--tail",
        "1",
        "--no-plots",
        "--no-bands",
        "--harmonics",
        "1",
    ];
    args.extend_from_slice(extra);
    args
}

/// Asserts 0 dB ± 0.5 dB over 50 Hz–16 kHz (a wire; the null sink passes
/// the samples unchanged).
fn assert_flat(r: &serde_json::Value) {
    let f = numbers(&r["response"]["frequency_hz"]);
    let m = numbers(&r["response"]["magnitude_db"]);
    let mut n = 0;
    for (f, m) in f.iter().zip(&m) {
        if (50.0..=16_000.0).contains(f) {
            assert!(m.abs() <= 0.5, "{f:.1} Hz reads {m:.3} dB");
            n += 1;
        }
    }
    assert!(n >= 399, "only {n} points checked");
}

#[test]
fn a_loopback_through_the_sound_server_reads_zero_db_and_zero_seconds() {
    let _one = SINK.lock().unwrap_or_else(|e| e.into_inner());
    if !sound_server() {
        return;
    }
    let t = tempfile::tempdir().unwrap();
    let r = measure(
        t.path(),
        "loop",
        &["--output-channel", "1,2", "--reference", "2"],
    );
    assert_flat(&r);
    let delay = r["delay_s"].as_f64().unwrap() * 48_000.0;
    assert!(delay.abs() <= 1.0, "delay {delay:.3} samples");
    let m = json(&t.path().join("loop/manifest.json"));
    assert_eq!(m["complete"], true);
    assert_eq!(m["source"]["kind"], "soundcard");
    assert_eq!(m["measurement"]["lost_frames"], 0);
    assert_eq!(m["measurement"]["reference_channel"], 2);
}

#[test]
fn without_a_reference_the_response_is_flat_and_the_delay_is_the_latency() {
    let _one = SINK.lock().unwrap_or_else(|e| e.into_inner());
    if !sound_server() {
        return;
    }
    let t = tempfile::tempdir().unwrap();
    let r = measure(t.path(), "plain", &[]);
    assert_flat(&r);
    // the delay is the server's latency as far as the two streams' block
    // counts tell it (known to about one buffer, 4096 frames here): under
    // a second either way, and the results say what it includes
    let delay = r["delay_s"].as_f64().unwrap();
    assert!(delay.abs() < 1.0, "delay {delay} s");
    let why = r["delay_reference"].as_str().unwrap();
    assert!(why.contains("latency"), "{why}");
}

#[test]
fn ctrl_c_ramps_down_keeps_the_recording_and_marks_the_manifest_incomplete() {
    stopped_by("-INT");
}

#[test]
fn sigterm_and_a_hangup_stop_like_ctrl_c() {
    stopped_by("-TERM");
    stopped_by("-HUP");
}

/// A measurement stopped by `signal` (as `kill` names it) once a second is
/// on disk: ramps down, keeps the recording, marks the manifest incomplete.
fn stopped_by(signal: &str) {
    let _one = SINK.lock().unwrap_or_else(|e| e.into_inner());
    if !sound_server() {
        return;
    }
    let t = tempfile::tempdir().unwrap();
    // stop once a second has reached the disk (the raw file is written
    // while it is recorded), however slowly the machine started
    let child = measuring_until(t.path(), 1.0, std::process::Stdio::piped);
    let killed = Command::new("kill")
        .args([signal, &child.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        !out.status.success(),
        "a stopped measurement is not a success"
    );
    assert!(!err.contains("panicked"), "{err}");
    assert!(
        err.contains("error:") && err.contains("stopped"),
        "{signal}: {err}"
    );
    let dir = t.path().join("cut");
    let m = json(&dir.join("manifest.json"));
    assert_eq!(m["complete"], false);
    assert!(m["problems"].to_string().contains("stopped"), "{m}");
    // the raw file is a proper WAV holding what was recorded: at least
    // the second seen on disk, far less than the 9 s of sweep and tail
    let (rate, rec) = read_wav(&dir.join("recording.wav"));
    assert_eq!(rate, 48_000);
    let s = rec[0].len() as f64 / 48_000.0;
    assert!((1.0..6.0).contains(&s), "{s} s recorded");
    assert!(!dir.join("results.json").exists());
}

#[test]
fn after_kill_9_the_raw_header_lags_its_data_by_at_most_a_tenth_of_a_second() {
    let _one = SINK.lock().unwrap_or_else(|e| e.into_inner());
    if !sound_server() {
        return;
    }
    // killed at three moments, so that the kill falls at different
    // points between two header updates
    for (k, (after_s, wait_ms)) in [(1.0, 13), (1.37, 31), (1.71, 47), (2.03, 71)]
        .into_iter()
        .enumerate()
    {
        let t = tempfile::tempdir().unwrap();
        let mut child = measuring_until(t.path(), after_s, std::process::Stdio::null);
        let raw = t.path().join("cut/recording.wav");
        // a little later, not right as the file grew
        std::thread::sleep(Duration::from_millis(wait_ms));
        child.kill().unwrap(); // SIGKILL: nothing runs after it
        child.wait().unwrap();
        let bytes = std::fs::read(&raw).unwrap();
        let (declared, data_at, frame_bytes) = data_chunk(&bytes);
        let on_disk = (bytes.len() - data_at) as u64;
        assert!(
            declared <= on_disk,
            "the header claims more than the file holds"
        );
        let lag_s = (on_disk - declared) as f64 / frame_bytes as f64 / 48_000.0;
        eprintln!(
            "kill {k}: the header declares {declared} of {on_disk} bytes: {lag_s:.3} s behind"
        );
        assert!(lag_s <= 0.1, "the header lags its data by {lag_s:.3} s");
        // and the file reads as a WAV of what the header says
        let (rate, rec) = read_wav(&raw);
        assert_eq!(rate, 48_000);
        assert!(rec[0].len() as f64 / 48_000.0 >= after_s - 0.1);
    }
}

/// Starts an 8 s measurement into `dir/cut` and returns it once `seconds`
/// of one channel's 32-bit audio have reached the raw file, however slowly
/// the machine started (`output` makes the child's stdout and stderr).
fn measuring_until(
    dir: &Path,
    seconds: f64,
    output: fn() -> std::process::Stdio,
) -> std::process::Child {
    let child = Command::new(assert_cmd::cargo::cargo_bin("gliss"))
        .current_dir(dir)
        .args([
            "measure",
            "--out",
            "cut",
            "--length",
            "8",
            "--tail",
            "1",
            "--no-plots",
        ])
        .stdout(output())
        .stderr(output())
        .spawn()
        .unwrap();
    let raw = dir.join("cut/recording.wav");
    let enough = 44 + (seconds * 48_000.0) as u64 * 4;
    let waited = std::time::Instant::now();
    while std::fs::metadata(&raw).map_or(0, |m| m.len()) < enough {
        assert!(
            waited.elapsed() < Duration::from_secs(30),
            "no recording reached the disk"
        );
        std::thread::sleep(Duration::from_millis(7));
    }
    child
}

/// A RIFF/WAVE file's data chunk: (declared size, offset of its data, bytes
/// per frame from the fmt chunk's block align).
fn data_chunk(b: &[u8]) -> (u64, usize, usize) {
    assert_eq!(&b[..4], b"RIFF");
    assert_eq!(&b[8..12], b"WAVE");
    let u32_at = |i: usize| u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]]);
    let mut i = 12;
    let mut align = 0;
    while i + 8 <= b.len() {
        let size = u32_at(i + 4) as usize;
        match &b[i..i + 4] {
            b"fmt " => align = u16::from_le_bytes([b[i + 20], b[i + 21]]) as usize,
            b"data" => return (u64::from(u32_at(i + 4)), i + 8, align),
            _ => {}
        }
        i += 8 + size + size % 2;
    }
    panic!("no data chunk");
}

#[test]
fn devices_lists_the_sound_server_with_its_rates() {
    let _one = SINK.lock().unwrap_or_else(|e| e.into_inner());
    if !sound_server() {
        return;
    }
    let t = tempfile::tempdir().unwrap();
    let out = ok(t.path(), &["devices", "--json"]);
    let list: serde_json::Value = serde_json::from_str(&out).expect("JSON on stdout");
    let list = list.as_array().unwrap();
    let default_in = list
        .iter()
        .find(|d| d["default_input"] == true)
        .expect("a default input");
    assert!(
        numbers(&default_in["input"]["sample_rates_hz"]).contains(&48_000.0),
        "{default_in}"
    );
    assert!(list.iter().any(|d| d["default_output"] == true));
    // numbered 1…N without gaps, the numbers --device takes
    let numbers: Vec<u64> = list.iter().map(|d| d["index"].as_u64().unwrap()).collect();
    assert_eq!(numbers, (1..=list.len() as u64).collect::<Vec<_>>());
    // the text lists the simulated system too
    let text = ok(t.path(), &["devices"]);
    assert!(text.lines().any(|l| l.starts_with("virtual ")), "{text}");
}

#[test]
fn calibrate_records_a_calibrator_tone_from_the_sound_card() {
    let _one = SINK.lock().unwrap_or_else(|e| e.into_inner());
    if !sound_server() {
        return;
    }
    let t = tempfile::tempdir().unwrap();
    // a "calibrator": a 1 kHz sine of peak 0.1 played into the null sink
    // by the server's own player while gliss records its monitor
    let tone: Vec<f64> = (0..48_000 * 20)
        .map(|i| 0.1 * (std::f64::consts::TAU * 1000.0 * f64::from(i) / 48_000.0).sin())
        .collect();
    write_wav_int(&t.path().join("tone.wav"), 48_000, 16, &[tone]);
    let mut player = Command::new("paplay")
        .arg(t.path().join("tone.wav"))
        .spawn()
        .expect("paplay (pulseaudio-utils) plays the tone");
    std::thread::sleep(Duration::from_millis(500));
    // a busy machine can make the server underrun: gliss then refuses the
    // tone and says so; record again (into new files), up to three times
    let mut out = String::new();
    for attempt in 1..=3 {
        let o = run(
            t.path(),
            &[
                "calibrate",
                "--record",
                "3",
                "--level",
                "94",
                "--out",
                "mic.json",
            ],
        );
        let err = String::from_utf8_lossy(&o.stderr).into_owned();
        if o.status.success() {
            out = String::from_utf8_lossy(&o.stdout).into_owned();
            break;
        }
        assert!(
            err.contains("samples were lost") && attempt < 3,
            "calibrate --record failed:\n{err}"
        );
        let _ = std::fs::remove_file(t.path().join("mic.wav"));
    }
    let _ = player.kill();
    let _ = player.wait();
    let c = json(&t.path().join("mic.json"));
    // a sine of peak 0.1 at 94 dB SPL: a full-scale sine (peak 1) is 20 dB
    // louder, 114 dB SPL (closed form: 20·lg(1/0.1)); 16-bit, within 0.1 dB
    let fs = c["full_scale_db_spl"].as_f64().unwrap();
    assert!((fs - 114.0).abs() < 0.1, "{fs} dB SPL; {out}");
    assert!((c["tone_hz"].as_f64().unwrap() - 1000.0).abs() < 1.0);
    // the tone is kept beside the calibration, as recorded
    let (rate, rec) = read_wav(&t.path().join("mic.wav"));
    assert_eq!(rate, 48_000);
    assert!(rec[0].len() >= 3 * 48_000);
}

/// The sink for several loudspeakers: `.ci/run` loads a remap sink
/// `gliss_out` over the null sink whose outputs 1 and 2 both reach the
/// null sink's left channel (two loudspeakers heard by one microphone on
/// input 1) and output 3 its right (the loopback to input 2). True when
/// it is there; panics when CI requires it and it is not.
fn several_loudspeakers_sink() -> bool {
    if !sound_server() {
        return false;
    }
    let sinks = Command::new("pactl")
        .args(["list", "short", "sinks"])
        .output()
        .map(|o| String::from_utf8_lossy(&o.stdout).into_owned())
        .unwrap_or_default();
    let there = sinks
        .lines()
        .any(|l| l.split('\t').nth(1) == Some("gliss_out") && l.contains("module-remap-sink"));
    if !there {
        assert!(
            std::env::var_os("GLISS_REQUIRE_SOUND_SERVER").is_none(),
            "GLISS_REQUIRE_SOUND_SERVER is set but the remap sink gliss_out is missing (see .ci/run)"
        );
        eprintln!("skipped: no remap sink gliss_out (load it as .ci/run does)");
    }
    there
}

#[test]
fn each_output_with_a_loopback_reads_two_outputs_at_zero_delay_and_zero_db_apart() {
    let _one = SINK.lock().unwrap_or_else(|e| e.into_inner());
    if !several_loudspeakers_sink() {
        return;
    }
    let t = tempfile::tempdir().unwrap();
    let mut done = None;
    for attempt in 1..=3 {
        let out = format!("pair-{attempt}");
        let o = gliss()
            .current_dir(t.path())
            .env("PULSE_SINK", "gliss_out")
            .args([
                "measure",
                "--each-output",
                "1,2",
                "--output-channel",
                "3",
                "--reference",
                "2",
                "--out",
                &out,
                "--buffer",
                "4096",
                "--length",
                "2",
                "--tail",
                "0.5",
                "--no-plots",
                "--no-bands",
                "--harmonics",
                "1",
            ])
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr).into_owned();
        if o.status.success() {
            done = Some(out);
            break;
        }
        assert!(
            err.contains("samples were lost"),
            "gliss measure --each-output failed for another reason than lost samples:\n{err}"
        );
        eprintln!("attempt {attempt} lost samples; measuring again");
    }
    let out = done.expect("three runs in a row lost samples");
    for o in ["output-1", "output-2"] {
        let m = json(&t.path().join(&out).join(o).join("manifest.json"));
        assert_eq!(m["complete"], true);
        assert_eq!(m["measurement"]["reference_channel"], 2);
    }
    let m = json(&t.path().join(&out).join("output-2/manifest.json"));
    assert_eq!(
        m["measurement"]["output_channels"],
        serde_json::json!([2, 3])
    );
    ok(
        t.path(),
        &[
            "align",
            &format!("{out}/output-1"),
            &format!("{out}/output-2"),
            "--out",
            "a",
            "--band",
            "100,10000",
            "--no-plots",
        ],
    );
    let j = json(&t.path().join("a/align.json"));
    assert_eq!(j["loopback_reference"], true);
    let l = &j["loudspeakers"][1];
    let dt = l["relative_arrival_s"].as_f64().unwrap();
    assert!(dt.abs() < 1e-6, "the outputs are {:.4} ms apart", dt * 1e3);
    let level = l["relative_level_db"].as_f64().unwrap();
    assert!(level.abs() < 0.01, "the outputs are {level:.3} dB apart");
    assert_eq!(l["polarity"], "same");
}

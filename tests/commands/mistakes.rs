//! Everyday mistakes that must be refused with one clear line and change
//! nothing: one position given twice to an average, a folder whose
//! manifest contradicts itself or lost a raw file, a WAV whose header
//! promises far more data than the file holds.

use std::path::Path;
use std::process::Command;

use crate::util::{json, make_sweep, ok, refused, snapshot};

/// Copies the folder `from` to `to` (files one level deep and plots/).
fn copy_folder(from: &Path, to: &Path) {
    std::fs::create_dir_all(to.join("plots")).unwrap();
    for e in std::fs::read_dir(from).unwrap().flatten() {
        if e.path().is_file() {
            std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
        }
    }
}

#[test]
fn an_average_counts_each_position_once() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    crate::util::two_positions(d);
    copy_folder(&d.join("a"), &d.join("a-copy"));
    let before = snapshot(d);
    let line = refused(d, &["average", "a", "b", "a", "--out", "avg"]);
    assert!(
        line.contains("same measurement") && line.contains("the same folder"),
        "{line}"
    );
    let line = refused(d, &["average", "a", "a-copy", "--out", "avg"]);
    assert!(line.contains("the same recording.wav"), "{line}");
    assert_eq!(snapshot(d), before, "nothing written");
    // two different positions still average
    ok(d, &["average", "a", "b", "--out", "avg", "--no-plots"]);
}

#[test]
fn a_folder_whose_manifest_lies_is_refused_by_every_reader() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    crate::util::two_positions(d);
    // a sample rate no sound card records at
    let mut m = json(&d.join("a/manifest.json"));
    m["sample_rate_hz"] = 7.into();
    std::fs::write(d.join("a/manifest.json"), m.to_string()).unwrap();
    // a raw file the manifest lists but that is gone
    std::fs::remove_file(d.join("b/recording.wav")).unwrap();
    let before = snapshot(d);
    for args in [
        vec!["average", "a", "b", "--out", "x"],
        vec!["compare", "a", "b", "--out", "x"],
        vec!["export", "a", "--what", "bands", "--out", "x.csv"],
        vec!["report", "a", "--out", "x.html"],
    ] {
        let line = refused(d, &args);
        assert!(
            line.contains("a does not hold together") && line.contains("7 Hz"),
            "{args:?}: {line}"
        );
    }
    for args in [
        vec!["export", "b", "--what", "bands", "--out", "x.csv"],
        vec!["report", "b", "--out", "x.html"],
    ] {
        let line = refused(d, &args);
        assert!(
            line.contains("recording.wav is missing"),
            "{args:?}: {line}"
        );
    }
    assert_eq!(snapshot(d), before, "nothing written");
}

/// A 16-bit mono WAV of `frames` samples whose header claims `claimed`
/// bytes of data.
fn lying_wav(frames: usize, claimed: u32) -> Vec<u8> {
    let data: Vec<u8> = (0..frames)
        .flat_map(|i| (((i % 64) as i16 - 32) * 100).to_le_bytes())
        .collect();
    let mut w = Vec::new();
    w.extend_from_slice(b"RIFF");
    w.extend_from_slice(&claimed.saturating_add(36).to_le_bytes());
    w.extend_from_slice(b"WAVEfmt ");
    w.extend_from_slice(&16u32.to_le_bytes());
    w.extend_from_slice(&1u16.to_le_bytes()); // PCM
    w.extend_from_slice(&1u16.to_le_bytes()); // mono
    w.extend_from_slice(&48_000u32.to_le_bytes());
    w.extend_from_slice(&96_000u32.to_le_bytes());
    w.extend_from_slice(&2u16.to_le_bytes());
    w.extend_from_slice(&16u16.to_le_bytes());
    w.extend_from_slice(b"data");
    w.extend_from_slice(&claimed.to_le_bytes());
    w.extend_from_slice(&data);
    w
}

#[cfg(unix)]
#[test]
fn a_header_promising_gigabytes_gets_the_truncated_error_within_a_memory_limit() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &[]);
    // 4 kB of samples, a header promising 4 GB
    std::fs::write(d.join("big.wav"), lying_wav(2048, 0xFFFF_FF00)).unwrap();
    let before = snapshot(d);
    // about 1 GB of address space: reserving what the header promises
    // (8 bytes per sample: 17 GB) would abort instead of refusing
    let o = Command::new("sh")
        .current_dir(d)
        .arg("-c")
        .arg("ulimit -v 1000000; exec \"$0\" \"$@\"")
        .arg(env!("CARGO_BIN_EXE_gliss"))
        .args(["analyze", "big.wav", "--sweep", "sweep.wav", "--out", "x"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    let lines: Vec<&str> = err.lines().collect();
    assert_eq!(lines.len(), 1, "{err}");
    assert!(
        lines[0].starts_with("error: ") && lines[0].contains("truncated"),
        "{err}"
    );
    assert_eq!(snapshot(d), before, "nothing written");
}

#[test]
fn messages_say_what_was_wrong_in_the_users_terms() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &[]);
    // a file of no bytes at all
    std::fs::write(d.join("nothing.wav"), b"").unwrap();
    let line = refused(
        d,
        &[
            "analyze",
            "nothing.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "x",
        ],
    );
    assert!(line.contains("nothing.wav is empty (0 bytes)"), "{line}");
    // a negative fraction reaches gliss's own check, not the parser's
    for args in [
        vec![
            "analyze",
            "sweep.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "x",
            "--smooth",
            "-1/3",
        ],
        vec![
            "export", "x", "--what", "response", "--smooth", "-1/3", "--out", "-",
        ],
    ] {
        let line = refused(d, &args);
        assert!(
            line.contains("--smooth \"-1/3\" is not understood"),
            "{args:?}: {line}"
        );
    }
    assert!(!d.join("x").exists());
}

#[test]
fn a_clipped_calibrator_tone_is_refused_with_its_figure() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    // a 1 kHz tone driven 10 dB past full scale and clipped there
    let clipped: Vec<f64> = (0..96_000)
        .map(|i| {
            let x = 3.16 * (std::f64::consts::TAU * 1000.0 * i as f64 / 48_000.0).sin();
            x.clamp(-1.0, 1.0)
        })
        .collect();
    crate::util::write_wav_f32(&d.join("tone.wav"), 48_000, &[clipped]);
    let before = snapshot(d);
    let line = refused(
        d,
        &[
            "calibrate",
            "tone.wav",
            "--level",
            "94",
            "--out",
            "cal.json",
        ],
    );
    assert!(
        line.contains("tone clips") && line.contains("dBFS"),
        "{line}"
    );
    assert_eq!(snapshot(d), before, "no calibration written");
}

#[test]
fn the_microphone_on_another_channel_is_named() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "1", "--tail", "0.5"]);
    let (_, s) = crate::util::read_wav(&d.join("sweep.wav"));
    let s = &s[0];
    // channel 1 holds a little noise, channel 2 the sweep (a wire)
    let noise: Vec<f64> = (0..s.len())
        .map(|i| 1e-3 * (((i * 7919) % 1000) as f64 / 500.0 - 1.0))
        .collect();
    crate::util::write_wav_f32(&d.join("swapped.wav"), 48_000, &[noise, s.clone()]);
    let before = snapshot(d);
    let line = refused(
        d,
        &[
            "analyze",
            "swapped.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "x",
        ],
    );
    assert!(
        line.contains("channel 1 of the recording holds no sweep") && line.contains("--channel 2"),
        "{line}"
    );
    assert_eq!(snapshot(d), before, "nothing written");
    ok(
        d,
        &[
            "analyze",
            "swapped.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "x",
            "--channel",
            "2",
            "--no-plots",
        ],
    );
    assert!(
        json(&d.join("x/results.json"))["delay_s"]
            .as_f64()
            .unwrap()
            .abs()
            < 1e-4
    );
    // a reverberant microphone on 1 beside an undeclared loopback on 2:
    // analysed, with a warning that names the loopback
    let tail = decaying_noise(12_000, 1.0);
    let mut room = gliss::signal::fft::convolve(s, &tail);
    room.truncate(s.len());
    crate::util::write_wav_f32(&d.join("loop.wav"), 48_000, &[room, s.clone()]);
    ok(
        d,
        &[
            "analyze",
            "loop.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "y",
            "--no-plots",
        ],
    );
    let r = json(&d.join("y/results.json"));
    let codes: Vec<&str> = r["warning_codes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap())
        .collect();
    assert!(codes.contains(&"other-channel-clearer"), "{codes:?}");
    let w = r["warnings"].to_string();
    assert!(w.contains("--reference 2"), "{w}");
}

#[test]
fn a_recording_stopped_with_the_sweep_says_its_decay_was_cut() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "1", "--tail", "1"]);
    let (_, s) = crate::util::read_wav(&d.join("sweep.wav"));
    // a room (T60 0.8 s) heard through the whole sweep file ...
    let tail = decaying_noise(38_400, 0.8);
    let mut room = gliss::signal::fft::convolve(&s[0], &tail);
    // ... but the recorder stopped 10 ms after the sweep's end
    let sweep_len = s[0].len() - 48_000;
    room.truncate(sweep_len + 480);
    let peak = room.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let room: Vec<f64> = room.iter().map(|v| 0.5 * v / peak).collect();
    crate::util::write_wav_f32(&d.join("cut.wav"), 48_000, &[room]);
    ok(
        d,
        &["analyze", "cut.wav", "--sweep", "sweep.wav", "--out", "x"],
    );
    let r = json(&d.join("x/results.json"));
    let codes = r["warning_codes"].to_string();
    assert!(codes.contains("\"tail-cut\""), "{codes}");
    assert!(r["warnings"].to_string().contains("decay was cut off"));
    // no EDT (nor anything else) from a decay that was never recorded
    for b in r["bands"].as_array().unwrap() {
        for p in ["edt_s", "t20_s", "t30_s", "c80_db", "d50"] {
            assert!(b[p].is_null(), "{} {p}: {}", b["center_hz"], b[p]);
        }
        assert_eq!(b["warning_codes"][0], "band-tail-cut");
    }
    assert!(r["broadband"]["edt_s"].is_null());
}

/// A room whose octave bands 125 Hz–8 kHz each decay as e^(−13.8·t/T):
/// a sine at each octave's exact centre under that envelope, heard 5 ms
/// into the recording (at 48 kHz).
fn exponential_octaves(t60: f64) -> Vec<f64> {
    let lead = 240;
    (0..lead + (2.0 * t60 * 48_000.0) as usize)
        .map(|i| {
            if i < lead {
                return 0.0;
            }
            let t = (i - lead) as f64 / 48_000.0;
            (-3..=3)
                .map(|x| {
                    let fm = 1000.0 * 10f64.powf(0.3 * x as f64);
                    (std::f64::consts::TAU * fm * t).sin()
                })
                .sum::<f64>()
                * (-0.5 * 13.815_510_557_964_274 * t / t60).exp()
        })
        .collect()
}

/// The sweep `s` through `room`, at 0.5 peak, plus white Gaussian noise
/// of standard deviation `sigma` (seeded).
fn noisy_recording(s: &[f64], room: &[f64], sigma: f64, seed: u64) -> Vec<f64> {
    use rand::{SeedableRng, rngs::StdRng};
    use rand_distr::{Distribution, Normal};
    let mut y = gliss::signal::fft::convolve(s, room);
    y.truncate(s.len());
    let peak = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let mut rng = StdRng::seed_from_u64(seed);
    let normal = Normal::new(0.0, sigma).unwrap();
    y.iter()
        .map(|v| 0.5 * v / peak + normal.sample(&mut rng))
        .collect()
}

#[test]
fn a_noisy_recording_keeps_edt_and_c80_or_says_why_not() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "2", "--tail", "2"]);
    let (_, s) = crate::util::read_wav(&d.join("sweep.wav"));
    let t60 = 0.5;
    let room = exponential_octaves(t60);
    // about 25 dB broadband peak-to-noise, and about 13 dB
    let quiet = noisy_recording(&s[0], &room, 0.01, 1);
    let loud = noisy_recording(&s[0], &room, 0.05, 1);
    crate::util::write_wav_f32(&d.join("quiet.wav"), 48_000, &[quiet]);
    crate::util::write_wav_f32(&d.join("loud.wav"), 48_000, &[loud]);
    let before = snapshot(d);
    ok(
        d,
        &[
            "analyze",
            "quiet.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "q",
            "--no-plots",
        ],
    );
    let r = json(&d.join("q/results.json"));
    let ptn = r["peak_to_noise_db"].as_f64().unwrap();
    assert!((22.0..29.0).contains(&ptn), "peak-to-noise {ptn} dB");
    // closed forms for h²(t) ∝ e^(−13.8·t/T): EDT = T,
    // C80 = 10·lg(e^(13.8·0.08/T) − 1) dB
    let c80 = 10.0 * ((13.815_510_557_964_274 * 0.08 / t60).exp() - 1.0).log10();
    let octave = |r: &serde_json::Value, hz: f64| {
        r["bands"]
            .as_array()
            .unwrap()
            .iter()
            .find(|b| b["fraction"] == "1/1" && b["center_hz"].as_f64() == Some(hz))
            .cloned()
            .unwrap_or_else(|| panic!("no {hz} Hz octave"))
    };
    for hz in [250.0, 500.0] {
        let b = octave(&r, hz);
        let inr = b["inr_db"].as_f64().unwrap();
        assert!((40.0..=60.0).contains(&inr), "{hz} Hz: {inr} dB of range");
        let edt = b["edt_s"].as_f64().unwrap();
        assert!(
            (edt / t60 - 1.0).abs() < 0.05,
            "{hz} Hz: EDT {edt} s against the closed form {t60} s"
        );
        let c = b["c80_db"].as_f64().unwrap();
        assert!(
            (c - c80).abs() < 0.5,
            "{hz} Hz: C80 {c} dB against the closed form {c80} dB"
        );
    }
    // the start lost in the noise: EDT and C80 withheld with the reason,
    // T20 still given
    ok(
        d,
        &[
            "analyze",
            "loud.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "l",
            "--no-plots",
        ],
    );
    let r = json(&d.join("l/results.json"));
    for hz in [250.0, 500.0] {
        let b = octave(&r, hz);
        assert!(
            b["edt_s"].is_null() && b["c80_db"].is_null(),
            "{hz} Hz: {b}"
        );
        let codes = b["warning_codes"].to_string();
        assert!(
            codes.contains("\"band-start-in-noise\""),
            "{hz} Hz: {codes}"
        );
        assert!(
            b["warnings"]
                .to_string()
                .contains("cannot be told from the noise"),
            "{hz} Hz: {}",
            b["warnings"]
        );
    }
    assert!(!octave(&r, 250.0)["t20_s"].is_null());
    // nothing that was there changed
    let after = snapshot(d);
    for (p, bytes) in &before {
        assert_eq!(after.get(p), Some(bytes), "{} changed", p.display());
    }
}

#[test]
fn a_recording_started_after_the_sweep_says_so() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "5", "--tail", "2"]);
    let (_, s) = crate::util::read_wav(&d.join("sweep.wav"));
    // a room (T60 0.8 s) heard through the sweep file and 3 s more ...
    let mut played = s[0].clone();
    played.extend(vec![0.0; 3 * 48_000]);
    let mut room = gliss::signal::fft::convolve(&played, &decaying_noise(38_400, 0.8));
    room.truncate(played.len());
    // ... by a recorder started 3 s after the sweep: long enough, but the
    // sweep's first 3 s (20 Hz to about 1.3 kHz) are not in it
    let late: Vec<f64> = room[3 * 48_000..].to_vec();
    let peak = late.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let late: Vec<f64> = late.iter().map(|v| 0.5 * v / peak).collect();
    crate::util::write_wav_f32(&d.join("late.wav"), 48_000, &[late]);
    let before = snapshot(d);
    let line = refused(
        d,
        &["analyze", "late.wav", "--sweep", "sweep.wav", "--out", "x"],
    );
    assert!(
        line.contains("the recording starts 3.00 s after the sweep reached the microphone"),
        "{line}"
    );
    assert!(line.contains("from 20 Hz to"), "{line}");
    assert!(
        line.contains("start the recorder before playing the sweep"),
        "{line}"
    );
    assert!(!line.contains("decay"), "{line}");
    assert_eq!(snapshot(d), before, "nothing written");
    assert!(!d.join("x").exists());
    // with a loopback on channel 2 that started as late: divided by it,
    // the response would look whole; the loopback is checked against the
    // sweep file
    let (_, l) = crate::util::read_wav(&d.join("late.wav"));
    let lost = s[0][3 * 48_000..].to_vec();
    let mut loopback = vec![0.0; l[0].len()];
    loopback[..lost.len()].copy_from_slice(&lost);
    crate::util::write_wav_f32(&d.join("late2.wav"), 48_000, &[l[0].clone(), loopback]);
    let before = snapshot(d);
    let line = refused(
        d,
        &[
            "analyze",
            "late2.wav",
            "--sweep",
            "sweep.wav",
            "--reference",
            "2",
            "--out",
            "x",
        ],
    );
    assert!(
        line.contains(
            "the recording starts 3.00 s after the sweep reached the loopback (channel 2)"
        ),
        "{line}"
    );
    assert_eq!(snapshot(d), before, "nothing written");
    assert!(!d.join("x").exists());
}

#[test]
fn a_reanalysis_leaves_no_stale_derived_files() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "1", "--tail", "0.5"]);
    ok(
        d,
        &["analyze", "sweep.wav", "--sweep", "sweep.wav", "--out", "m"],
    );
    assert!(d.join("m/plots/response.png").is_file());
    assert!(d.join("m/distortion.csv").is_file());
    // again without plots and without distortion orders
    ok(
        d,
        &[
            "analyze",
            "sweep.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--overwrite",
            "--no-plots",
            "--harmonics",
            "1",
        ],
    );
    // what the folder holds is what its manifest lists, nothing older
    let m = json(&d.join("m/manifest.json"));
    let mut listed: Vec<String> = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["name"].as_str().unwrap().to_string())
        .collect();
    listed.push("manifest.json".into());
    for e in walk(&d.join("m")) {
        let rel = e
            .strip_prefix(d.join("m"))
            .unwrap()
            .to_string_lossy()
            .into_owned();
        assert!(
            listed.contains(&rel),
            "{rel} is left over, not in {listed:?}"
        );
    }
}

/// A room's response as a deterministic noise decaying 60 dB in `t60_s`
/// (at 48 kHz), `len` samples long.
fn decaying_noise(len: usize, t60_s: f64) -> Vec<f64> {
    (0..len)
        .map(|i| {
            let v = ((i * 7919 + 13) % 2001) as f64 / 1000.0 - 1.0;
            v * 10f64.powf(-3.0 * i as f64 / (t60_s * 48_000.0))
        })
        .collect()
}

/// Every file below `dir`.
fn walk(dir: &Path) -> Vec<std::path::PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap().flatten() {
        let p = e.path();
        if p.is_dir() {
            out.extend(walk(&p));
        } else {
            out.push(p);
        }
    }
    out
}

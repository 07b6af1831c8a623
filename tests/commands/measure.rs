//! `gliss measure` through the virtual device, and through a device double
//! that injects faults (lost samples, a stop in the middle).

use std::path::Path;
use std::sync::atomic::AtomicBool;

use gliss::analysis::{AnalysisConfig, Smoothing};
use gliss::audio::virtual_system::{Faults, VirtualSystem};
use gliss::session::measure::{MeasureJob, measure};
use gliss::signal::sweep::SweepParams;

use crate::util::*;

const SHORT: [&str; 4] = ["--length", "2", "--tail", "1.5"];

fn measure_virtual(dir: &Path, out: &str, extra: &[&str]) -> String {
    let mut args = vec!["measure", "--device", "virtual", "--out", out, "--no-plots"];
    args.extend_from_slice(&SHORT);
    args.extend_from_slice(extra);
    ok(dir, &args)
}

#[test]
fn measuring_the_virtual_device_gives_what_analyze_gives_on_its_recording() {
    let t = tempfile::tempdir().unwrap();
    measure_virtual(t.path(), "m", &[]);
    let m = t.path().join("m");
    let manifest = json(&m.join("manifest.json"));
    assert_eq!(manifest["complete"], true);
    assert_eq!(manifest["source"]["kind"], "virtual");
    assert_eq!(manifest["measurement"]["repeat"], 1);
    assert_eq!(manifest["measurement"]["takes"][0]["start_frame"], 0);
    // the same folder layout as analyze writes
    ok(
        t.path(),
        &[
            "analyze",
            "m/recording.wav",
            "--sweep",
            "m/stimulus.wav",
            "--out",
            "a",
            "--no-plots",
        ],
    );
    let a = t.path().join("a");
    let names = |d: &Path| {
        let mut v: Vec<String> = snapshot(d)
            .keys()
            .map(|p| p.strip_prefix(d).unwrap().display().to_string())
            .collect();
        v.sort();
        v
    };
    assert_eq!(names(&m), names(&a));
    // the raw files are the same bytes
    for f in ["stimulus.wav", "recording.wav"] {
        assert_eq!(
            std::fs::read(m.join(f)).unwrap(),
            std::fs::read(a.join(f)).unwrap()
        );
    }
    // and so are the results, apart from the words saying what the delay
    // is measured from
    let mut rm = json(&m.join("results.json"));
    let mut ra = json(&a.join("results.json"));
    rm["delay_reference"] = serde_json::Value::Null;
    ra["delay_reference"] = serde_json::Value::Null;
    assert_eq!(rm, ra);
    assert_eq!(
        std::fs::read(m.join("response.csv")).unwrap(),
        std::fs::read(a.join("response.csv")).unwrap()
    );
}

#[test]
fn a_loopback_reference_takes_the_interface_latency_out_of_the_delay() {
    let t = tempfile::tempdir().unwrap();
    measure_virtual(t.path(), "plain", &["--no-bands", "--harmonics", "1"]);
    measure_virtual(
        t.path(),
        "ref",
        &[
            "--no-bands",
            "--harmonics",
            "1",
            "--output-channel",
            "1,2",
            "--reference",
            "2",
        ],
    );
    let plain = json(&t.path().join("plain/results.json"));
    let with_ref = json(&t.path().join("ref/results.json"));
    let latency = VirtualSystem::default().latency_samples as f64 / 48_000.0;
    let d_plain = plain["delay_s"].as_f64().unwrap();
    let d_ref = with_ref["delay_s"].as_f64().unwrap();
    // the loopback carries the same latency as the microphone path, so the
    // difference of the two delays is that latency, within a sample
    assert!(
        ((d_plain - d_ref) - latency).abs() < 1.0 / 48_000.0,
        "plain {d_plain} s, with reference {d_ref} s, latency {latency} s"
    );
    assert!(
        with_ref["delay_reference"]
            .as_str()
            .unwrap()
            .contains("loopback"),
        "{with_ref}"
    );
    // the response divided by a wire is the response divided by the sweep
    let a = numbers(&plain["response"]["magnitude_db"]);
    let b = numbers(&with_ref["response"]["magnitude_db"]);
    let f = numbers(&plain["response"]["frequency_hz"]);
    for i in 0..a.len() {
        if (50.0..=16_000.0).contains(&f[i]) {
            assert!(
                (a[i] - b[i]).abs() < 0.05,
                "{} Hz: {} vs {}",
                f[i],
                a[i],
                b[i]
            );
        }
    }
}

#[test]
fn averaging_n_sweeps_lowers_the_noise_by_ten_log_n() {
    // synchronous averaging of N takes with independent noise lowers the
    // noise power N times, 10·log10 N dB (averaging of uncorrelated noise;
    // common practice)
    let t = tempfile::tempdir().unwrap();
    measure_virtual(t.path(), "one", &["--no-bands"]);
    measure_virtual(t.path(), "four", &["--no-bands", "--repeat", "4"]);
    let one = json(&t.path().join("one/results.json"));
    let four = json(&t.path().join("four/results.json"));
    let gain =
        four["peak_to_noise_db"].as_f64().unwrap() - one["peak_to_noise_db"].as_f64().unwrap();
    let expected = 10.0 * 4f64.log10();
    assert!(
        (gain - expected).abs() < 1.0,
        "the noise fell {gain:.2} dB, expected {expected:.2} dB"
    );
    // every take is kept in the raw recording, one period apart
    let m = json(&t.path().join("four/manifest.json"));
    let takes = m["measurement"]["takes"].as_array().unwrap();
    assert_eq!(takes.len(), 4);
    let (_, rec) = read_wav(&t.path().join("four/recording.wav"));
    let last = takes[3]["start_frame"].as_u64().unwrap() + takes[3]["frames"].as_u64().unwrap();
    assert!(rec[0].len() as u64 >= last);
    // and the signal is as loud as one sweep's: the response agrees
    let a = numbers(&one["response"]["magnitude_db"]);
    let b = numbers(&four["response"]["magnitude_db"]);
    let f = numbers(&one["response"]["frequency_hz"]);
    for i in 0..a.len() {
        if (50.0..=16_000.0).contains(&f[i]) {
            assert!(
                (a[i] - b[i]).abs() < 0.1,
                "{} Hz: {} vs {}",
                f[i],
                a[i],
                b[i]
            );
        }
    }
}

#[test]
fn measure_refuses_what_the_device_cannot_do_and_writes_nothing() {
    let t = tempfile::tempdir().unwrap();
    let cases: [(&[&str], &str); 8] = [
        (&["--rate", "22050", "--end", "10000"], "22050 Hz"),
        (&["--channel", "3"], "--channel 3"),
        (&["--reference", "5"], "--reference 5"),
        (&["--reference", "1"], "another input"),
        (&["--output-channel", "1,7"], "--output-channel 7"),
        (&["--channel", "0"], "counts from 1"),
        (&["--repeat", "0"], "--repeat"),
        (&["--overwrite"], "new folder"),
    ];
    for (extra, needle) in cases {
        let mut args = vec!["measure", "--device", "virtual", "--out", "x"];
        args.extend_from_slice(extra);
        let line = refused(t.path(), &args);
        assert!(line.contains(needle), "{extra:?}: {line}");
        assert!(!t.path().join("x").exists(), "{extra:?} wrote a folder");
    }
}

#[test]
fn a_silent_reference_is_named_and_the_raw_files_are_kept() {
    // --reference 2 but the sweep only on output 1: the loopback is silent
    let t = tempfile::tempdir().unwrap();
    let mut args = vec![
        "measure",
        "--device",
        "virtual",
        "--out",
        "x",
        "--reference",
        "2",
    ];
    args.extend_from_slice(&SHORT);
    let line = refused(t.path(), &args);
    assert!(line.contains("reference channel 2 is silent"), "{line}");
    assert!(t.path().join("x/recording.wav").is_file());
}

#[test]
fn an_existing_measurement_is_never_measured_over() {
    let t = tempfile::tempdir().unwrap();
    measure_virtual(t.path(), "m", &["--no-bands", "--harmonics", "1"]);
    let before = snapshot(&t.path().join("m"));
    let mut args = vec!["measure", "--device", "virtual", "--out", "m"];
    args.extend_from_slice(&SHORT);
    let line = refused(t.path(), &args);
    assert!(line.contains("already holds a measurement"), "{line}");
    assert_eq!(before, snapshot(&t.path().join("m")));
}

#[test]
#[cfg(feature = "soundcard")]
fn a_loud_sweep_needs_confirmation() {
    // above -6 dBFS, with nobody at the terminal (the test's stdin is not
    // one) and no --yes: refused before any device is opened
    let t = tempfile::tempdir().unwrap();
    let line = refused(t.path(), &["measure", "--out", "x", "--level", "-3"]);
    assert!(line.contains("--yes"), "{line}");
    assert!(!t.path().join("x").exists());
}

/// A measurement job on the virtual device for the fault tests.
fn job(out: &Path) -> MeasureJob {
    let design = SweepParams {
        start_hz: 20.0,
        end_hz: 20_000.0,
        requested_length_s: 2.0,
        tail_s: 1.0,
        ..SweepParams::default()
    }
    .design()
    .unwrap();
    MeasureJob {
        out: out.to_path_buf(),
        plots: false,
        phase_view: Default::default(),
        channel: 0,
        reference: None,
        output_channels: vec![0],
        repeat: 1,
        design,
        config: AnalysisConfig {
            smoothing: Smoothing::parse("1/6").unwrap(),
            harmonics: 1,
            bands: false,
            gate: None,
            mic_correction: None,
            profile: Default::default(),
            speech: None,
        },
        title: "fault test".into(),
        command_line: vec!["test".into()],
        mic_correction: None,
        calibration: None,
        drive: None,
        source_kind: "virtual".into(),
        target: None,
        impedance: None,
        position: None,
    }
}

/// Checks the folder a failed measurement leaves: a readable raw recording
/// of `frames` frames, a manifest marked incomplete that says why (and
/// lists the raw files with their true hashes), and no derived results.
fn assert_honest_leftovers(dir: &Path, frames: usize, why: &str) {
    let (rate, rec) = read_wav(&dir.join("recording.wav"));
    assert_eq!(rate, 48_000);
    assert_eq!(rec[0].len(), frames);
    let m = json(&dir.join("manifest.json"));
    assert_eq!(m["complete"], false);
    let problems = m["problems"].to_string();
    assert!(problems.contains(why), "{problems}");
    for f in m["files"].as_array().unwrap() {
        let name = f["name"].as_str().unwrap();
        let bytes = std::fs::read(dir.join(name)).unwrap();
        assert_eq!(
            f["sha256"].as_str().unwrap(),
            gliss::folder::sha256_hex(&bytes),
            "{name}"
        );
    }
    assert!(!dir.join("results.json").exists());
}

#[test]
fn lost_samples_make_the_measurement_invalid_and_keep_the_files() {
    let t = tempfile::tempdir().unwrap();
    let out = t.path().join("x");
    let j = job(&out);
    let total = j.design.generate().len();
    let mut device = VirtualSystem {
        faults: Faults {
            lose_frames_at_s: Some((1.0, 256)),
            ..Faults::default()
        },
        ..VirtualSystem::default()
    };
    let stop = AtomicBool::new(false);
    let err = measure(&mut device, &j, &stop, &mut |_| {}).unwrap_err();
    assert!(err.message().contains("samples were lost"), "{err}");
    assert_honest_leftovers(&out, total - 256, "256 input frames were lost");
    let m = json(&out.join("manifest.json"));
    assert_eq!(m["measurement"]["lost_frames"], 256);
}

#[test]
fn a_stop_in_the_middle_keeps_what_was_recorded() {
    let t = tempfile::tempdir().unwrap();
    let out = t.path().join("x");
    let mut j = job(&out);
    // the sweep also goes to output 2, wired back to input 2: that input
    // records exactly what was played
    j.output_channels = vec![0, 1];
    let mut device = VirtualSystem {
        loopback: true,
        faults: Faults {
            stop_at_s: Some(1.0),
            ..Faults::default()
        },
        ..VirtualSystem::default()
    };
    let stop = AtomicBool::new(false);
    let err = measure(&mut device, &j, &stop, &mut |_| {}).unwrap_err();
    assert!(err.message().contains("stopped"), "{err}");
    // one second, the 10 ms ramp and as long again after it
    assert_honest_leftovers(&out, 48_000 + 960, "stopped after 1.00 s");
    // the output was ramped down over 10 ms, not cut: what was played
    // stays under a raised-cosine envelope from the stop on, and is
    // silent after it
    let (_, rec) = read_wav(&out.join("recording.wav"));
    let played = &rec[1];
    let at = 48_000 + device.latency_samples;
    let ramp = 480;
    let peak = |r: std::ops::Range<usize>| played[r].iter().fold(0.0f64, |m, v| m.max(v.abs()));
    assert!(peak(at - 480..at) > 0.09, "the sweep played up to the stop");
    for k in 0..8 {
        let lo = at + k * ramp / 8;
        let envelope = gliss::audio::stop_gain(k * ramp / 8, ramp);
        assert!(
            peak(lo..lo + ramp / 8) <= 0.1 * envelope + 1e-6,
            "segment {k} of the ramp is louder than the ramp allows"
        );
    }
    assert_eq!(peak(at + ramp..played.len()), 0.0);
}

#[test]
fn a_device_that_goes_away_is_a_clear_error_and_keeps_the_recording() {
    let t = tempfile::tempdir().unwrap();
    let out = t.path().join("x");
    let j = job(&out);
    let mut device = VirtualSystem {
        faults: Faults {
            fail_at_s: Some(1.5),
            ..Faults::default()
        },
        ..VirtualSystem::default()
    };
    let stop = AtomicBool::new(false);
    let err = measure(&mut device, &j, &stop, &mut |_| {}).unwrap_err();
    assert!(err.message().contains("went away"), "{err}");
    assert!(!err.message().contains('\n'));
    assert_honest_leftovers(&out, 72_000, "went away after 1.50 s");
}

#[test]
fn the_virtual_subwoofer_is_windowed_from_its_direct_sound_not_its_room_build_up() {
    // output 3 of the virtual system: a subwoofer 2.17 m from the
    // microphone (6.3 ms, plus 293 samples of latency: 12.4 ms), through an
    // 80 Hz Linkwitz-Riley low-pass; the room's modes build up to the
    // strongest sample some 120 ms later
    let t = tempfile::tempdir().unwrap();
    ok(
        t.path(),
        &[
            "measure",
            "--device",
            "virtual",
            "--each-output",
            "1,3",
            "--out",
            "sub",
            "--no-plots",
        ],
    );
    let r = json(&t.path().join("sub/output-3/results.json"));
    let codes = r["warning_codes"].as_array().unwrap();
    assert!(codes.iter().any(|c| c == "direct-sound-ahead"), "{codes:?}");
    // the bands start at the direct sound too, not at a zero crossing of
    // the build-up with the build-up read as the noise ahead
    assert!(
        !codes.iter().any(|c| c == "band-start-in-noise"),
        "{codes:?}"
    );
    for b in r["bands"].as_array().unwrap() {
        let codes = b["warning_codes"].as_array().unwrap();
        assert!(!codes.iter().any(|c| c == "band-start-in-noise"), "{b}");
    }
    // the delay is the direct sound's peak (its arrival and the
    // low-pass's few milliseconds), not the build-up's
    let delay = r["delay_s"].as_f64().unwrap();
    assert!(delay > 0.0124 && delay < 0.02, "{delay}");
    // the window starts 100 ms before it, well before the sound
    let start = r["impulse"]["start_s"].as_f64().unwrap();
    assert!((start - (delay - 0.1)).abs() < 1e-4, "{start} {delay}");
    assert!(start < 0.0124 - 0.05, "{start}");
    // the monitor on output 1 is as it was: its strongest sample is its
    // direct sound
    let r = json(&t.path().join("sub/output-1/results.json"));
    let codes = r["warning_codes"].as_array().unwrap();
    assert!(
        !codes.iter().any(|c| c == "direct-sound-ahead"),
        "{codes:?}"
    );
}

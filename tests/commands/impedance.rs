//! `gliss impedance` and `gliss measure --impedance`: a driver's impedance
//! through a sense resistor and its small-signal parameters, on the
//! virtual system's woofer (invented: Re 5.6 Ω, fs 48 Hz, Qms 3.8, Qes
//! 0.42, Le 0.45 mH, Mms 14 g; `VirtualDriver::kestrel_woofer`).

use std::path::Path;

use crate::util::{json, ok, read_wav, refused, snapshot, write_wav_f32};

/// Measures the virtual woofer behind 10 Ω into `out`.
fn measure_woofer(dir: &Path, out: &str) -> String {
    ok(
        dir,
        &[
            "measure",
            "--device",
            "virtual",
            "--impedance",
            "--sense-ohms",
            "10",
            "--start",
            "10",
            "--length",
            "3",
            "--out",
            out,
        ],
    )
}

/// `gliss impedance REC --sweep sweep.wav --reference R --channel C
/// --sense-ohms OHMS --out OUT`.
fn impedance_args<'a>(
    rec: &'a str,
    reference: &'a str,
    channel: &'a str,
    ohms: &'a str,
    out: &'a str,
) -> Vec<&'a str> {
    vec![
        "impedance",
        rec,
        "--sweep",
        "sweep.wav",
        "--reference",
        reference,
        "--channel",
        channel,
        "--sense-ohms",
        ohms,
        "--out",
        out,
    ]
}

/// Measures the virtual woofer into woofer/, copies its sweep to
/// sweep.wav and returns its recording (rate, channels).
fn woofer_recording(dir: &Path) -> (u32, Vec<Vec<f64>>) {
    measure_woofer(dir, "woofer");
    std::fs::copy(dir.join("woofer/stimulus.wav"), dir.join("sweep.wav")).unwrap();
    read_wav(&dir.join("woofer/recording.wav"))
}

#[test]
fn the_virtual_woofer_measures_as_its_model() {
    let t = tempfile::tempdir().unwrap();
    let said = measure_woofer(t.path(), "woofer");
    assert!(said.contains("Qts"), "{said}");
    let r = json(&t.path().join("woofer/results.json"));
    let ts = &r["thiele_small"];
    let get = |k: &str| ts[k].as_f64().unwrap_or_else(|| panic!("{k} in {ts}"));
    let rel = |a: f64, b: f64| (a - b).abs() / b;
    // the model's own values (invented driver); the tolerances
    assert!(rel(get("fs_hz"), 48.0) < 0.005, "{ts}");
    assert!(rel(get("re_ohm"), 5.6) < 0.01, "{ts}");
    assert!(rel(get("qms"), 3.8) < 0.03, "{ts}");
    assert!(rel(get("qes"), 0.42) < 0.03, "{ts}");
    // Qts = Qms·Qes/(Qms + Qes) = 3.8·0.42/4.22 = 0.37820 [calc]
    assert!(rel(get("qts"), 0.378_20) < 0.03, "{ts}");
    assert!(rel(get("le_mh"), 0.45) < 0.05, "{ts}");
    // |Z| on the grid peaks at Re + Res = Re·(1 + Qms/Qes) = 56.27 Ω [calc]
    let m: Vec<f64> = r["impedance"]["magnitude_ohm"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let peak = m[..m.len() / 2].iter().copied().fold(0.0, f64::max);
    assert!(rel(peak, 56.27) < 0.01, "{peak}");
    let manifest = json(&t.path().join("woofer/manifest.json"));
    assert_eq!(manifest["kind"], "impedance");
    let csv = std::fs::read_to_string(t.path().join("woofer/impedance.csv")).unwrap();
    assert!(csv.starts_with("frequency_hz,magnitude_ohm,phase_deg,real_ohm,imaginary_ohm\n"));
    assert!(csv.lines().count() > 10 * m.len(), "full resolution");
    assert!(t.path().join("woofer/plots/impedance.png").is_file());
    // the report shows the parameters
    ok(t.path(), &["report", "woofer", "--out", "r.html"]);
    let html = std::fs::read_to_string(t.path().join("r.html")).unwrap();
    assert!(
        html.contains("Small-signal parameters"),
        "no parameters table"
    );
    assert!(html.contains("Qts"));
}

#[test]
fn the_impedance_command_reads_the_same_recording_and_refuses_swapped_channels() {
    let t = tempfile::tempdir().unwrap();
    let (rate, channels) = woofer_recording(t.path());
    write_wav_f32(&t.path().join("rec.wav"), rate, &channels);
    let args = |r, c, out| impedance_args("rec.wav", r, c, "10", out);
    ok(t.path(), &args("1", "2", "again"));
    let a = json(&t.path().join("woofer/results.json"));
    let b = json(&t.path().join("again/results.json"));
    let fs = |v: &serde_json::Value| v["thiele_small"]["fs_hz"].as_f64().unwrap();
    assert!(
        (fs(&a) - fs(&b)).abs() < 1e-3 * fs(&a),
        "{} {}",
        fs(&a),
        fs(&b)
    );
    let before = snapshot(t.path());
    let e = refused(t.path(), &args("2", "1", "swapped"));
    assert!(e.contains("swapped"), "{e}");
    assert_eq!(snapshot(t.path()), before, "a refused run writes nothing");
    let e = refused(t.path(), &impedance_args("rec.wav", "1", "2", "0", "zero"));
    assert!(e.contains("--sense-ohms"), "{e}");
}

#[test]
fn an_open_circuit_is_refused() {
    // no driver: the second input sees the first (a lead off the driver,
    // the input's own impedance in its place)
    let t = tempfile::tempdir().unwrap();
    let (rate, channels) = woofer_recording(t.path());
    let open = vec![channels[0].clone(), channels[0].clone()];
    write_wav_f32(&t.path().join("open.wav"), rate, &open);
    let e = refused(
        t.path(),
        &impedance_args("open.wav", "1", "2", "10", "open"),
    );
    assert!(e.contains("open circuit"), "{e}");
}

#[test]
fn a_clipping_reference_is_refused_and_a_small_sense_resistor_warned_of() {
    let t = tempfile::tempdir().unwrap();
    let (rate, channels) = woofer_recording(t.path());
    // the reference 26 dB hotter, clipped at full scale
    let hot: Vec<f64> = channels[0]
        .iter()
        .map(|v| (v * 20.0).clamp(-1.0, 1.0))
        .collect();
    write_wav_f32(&t.path().join("hot.wav"), rate, &[hot, channels[1].clone()]);
    let e = refused(t.path(), &impedance_args("hot.wav", "1", "2", "10", "hot"));
    assert!(e.contains("reference channel clips"), "{e}");
    // 0.1 Ω against a woofer of 5.6 to 56 Ω: V1 − V2 is some 55 dB down
    // at resonance, the noise reaches Z 55 dB louder: warned
    ok(
        t.path(),
        &[
            "measure",
            "--device",
            "virtual",
            "--impedance",
            "--sense-ohms",
            "0.1",
            "--start",
            "10",
            "--length",
            "3",
            "--out",
            "small",
            "--no-plots",
        ],
    );
    let r = json(&t.path().join("small/results.json"));
    let codes = r["warning_codes"].to_string();
    assert!(codes.contains("sense-resistor-mismatch"), "{codes}");
}

#[test]
fn the_added_mass_method_gives_the_model_s_vas_through_the_binary() {
    use gliss::audio::virtual_system::VirtualDriver;
    let t = tempfile::tempdir().unwrap();
    let sweep = crate::util::make_sweep(t.path(), "sweep.wav", &["--start", "10", "--length", "3"]);
    let (rate, s) = read_wav(&sweep);
    let fs = f64::from(rate);
    let free = VirtualDriver::kestrel_woofer(10.0);
    // 6 g on the cone of the 14 g woofer: fs falls by √(14/20) [alg]
    let loaded = VirtualDriver {
        mms_kg: free.mms_kg + 0.006,
        // the same suspension and motor: Qms and Qes rise with √(Mms)
        qms: free.qms * (20.0f64 / 14.0).sqrt(),
        qes: free.qes * (20.0f64 / 14.0).sqrt(),
        fs_hz: free.fs_hz * (14.0f64 / 20.0).sqrt(),
        ..free
    };
    for (d, name) in [(free, "free.wav"), (loaded, "loaded.wav")] {
        let (v1, v2) = d.render(&s[0], fs, 100);
        write_wav_f32(&t.path().join(name), rate, &[v1, v2]);
    }
    let common = [
        "--sweep",
        "sweep.wav",
        "--reference",
        "1",
        "--channel",
        "2",
        "--sense-ohms",
        "10",
    ];
    let mut args = vec!["impedance", "free.wav", "--out", "free"];
    args.extend_from_slice(&common);
    ok(t.path(), &args);
    let mut args = vec![
        "impedance",
        "loaded.wav",
        "--out",
        "loaded",
        "--added-mass",
        "6",
        "--cone-diameter",
        "105",
        "--free-air",
        "free",
    ];
    args.extend_from_slice(&common);
    let said = ok(t.path(), &args);
    assert!(said.contains("Vas"), "{said}");
    let m = &json(&t.path().join("loaded/results.json"))["thiele_small"]["mechanics"];
    // the model: Cms = 1/((2π·48)²·0.014), Sd = π·0.0525², Vas = ρc²Sd²Cms
    // with ρ = 1.18 kg/m³, c = 343 m/s (REFERENCES.md) [calc]
    let w = std::f64::consts::TAU * 48.0;
    let cms = 1.0 / (w * w * 0.014);
    let sd = std::f64::consts::PI * 0.0525f64.powi(2);
    let vas_l = 1.18 * 343.0f64.powi(2) * sd * sd * cms * 1e3;
    let got = m["vas_l"].as_f64().unwrap();
    assert!(
        (got - vas_l).abs() / vas_l < 0.05,
        "Vas {got} l against {vas_l} l: {m}"
    );
    let mms = m["mms_g"].as_f64().unwrap();
    assert!((mms - 14.0).abs() / 14.0 < 0.05, "Mms {mms} g");
    // a folder that is no impedance measurement is refused as FREE_DIR
    ok(
        t.path(),
        &[
            "analyze",
            "free.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "plain",
            "--no-plots",
        ],
    );
    let mut args = vec![
        "impedance",
        "loaded.wav",
        "--out",
        "wrong",
        "--added-mass",
        "6",
        "--cone-diameter",
        "105",
        "--free-air",
        "plain",
    ];
    args.extend_from_slice(&common);
    let e = refused(t.path(), &args);
    assert!(e.contains("not an impedance measurement"), "{e}");
}

/// An analysis option the impedance path would ignore is refused, naming
/// it, and no folder is made.
#[test]
fn measure_impedance_refuses_analysis_options_it_would_ignore() {
    let t = tempfile::tempdir().unwrap();
    for (opt, val) in [
        ("--smooth", Some("1/3")),
        ("--gate", Some("auto")),
        ("--bands", None),
    ] {
        let mut args = vec![
            "measure",
            "--device",
            "virtual",
            "--impedance",
            "--sense-ohms",
            "10",
            "--out",
            "w",
            opt,
        ];
        args.extend(val);
        let e = refused(t.path(), &args);
        assert!(
            e.contains(opt) && e.contains("does not apply with --impedance"),
            "{e}"
        );
        assert!(!t.path().join("w").exists());
    }
}

/// The report of an impedance folder leads with the impedance, not with
/// the driver channel's delay.
#[test]
fn the_report_of_an_impedance_folder_shows_its_parameters_not_a_delay() {
    let t = tempfile::tempdir().unwrap();
    measure_woofer(t.path(), "w");
    ok(t.path(), &["report", "w", "--out", "w.html"]);
    let html = std::fs::read_to_string(t.path().join("w.html")).unwrap();
    let r = json(&t.path().join("w/results.json"));
    let fs = r["thiele_small"]["fs_hz"].as_f64().unwrap();
    assert!(
        html.contains("<dt>Recording peak</dt>"),
        "the level check stays"
    );
    assert!(
        !html.contains("<dt>Delay</dt>"),
        "no delay for an impedance"
    );
    assert!(
        html.contains(&format!("{fs:.1}")),
        "fs {fs:.1} in the report"
    );
}

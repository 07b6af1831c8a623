//! Speed of the analysis of one recording: a 5 s, 48 kHz sweep with a 3 s
//! tail through the virtual system, analysed to the impulse response, the
//! 1/6-octave response and the distortion orders 2–5 (no plots, no file
//! I/O). Results and how to
//! rerun them: docs/performance.md.

use criterion::{Criterion, criterion_group, criterion_main};
use std::hint::black_box;

use gliss::analysis::impedance::{self, ImpedanceInput};
use gliss::analysis::{AnalysisConfig, analyze, room, smoothing, speech, thiele_small};
use gliss::audio::virtual_system::{VirtualDriver, VirtualSystem};
use gliss::deconv;
use gliss::signal::sweep::SweepParams;

/// The case of docs/performance.md: a 5 s, 48 kHz sweep (20 Hz–20 kHz)
/// with a 3 s tail.
fn case_design() -> gliss::signal::sweep::SweepDesign {
    SweepParams {
        requested_length_s: 5.0,
        tail_s: 3.0,
        ..SweepParams::default()
    }
    .design()
    .expect("a valid sweep")
}

fn bench(c: &mut Criterion) {
    let design = case_design();
    let stimulus = design.generate();
    let recording = VirtualSystem::default().render(&stimulus, design.fs());
    let config = AnalysisConfig::default();

    let mut g = c.benchmark_group("analysis_5s_48k_3s_tail");
    g.sample_size(30);
    g.bench_function(
        "whole analysis (impulse, 1/6-octave response, orders 2-5, bands)",
        |b| b.iter(|| analyze(black_box(&recording), &stimulus, &design, &config).unwrap()),
    );
    // what a user waits for: the same analysis on a fresh thread, so every
    // FFT plan is built again (the planner is cached per thread)
    g.bench_function("whole analysis, cold FFT plans (fresh thread)", |b| {
        b.iter(|| {
            std::thread::scope(|s| {
                s.spawn(|| analyze(black_box(&recording), &stimulus, &design, &config).unwrap())
                    .join()
                    .unwrap()
            })
        })
    });
    // the unavoidable transforms: two forward real FFTs and one inverse at
    // the deconvolution's length, plans included (fresh thread)
    let n = deconv::fft_len(recording.len(), stimulus.len());
    g.bench_function("the unavoidable FFTs, cold plans (fresh thread)", |b| {
        b.iter(|| {
            std::thread::scope(|s| {
                s.spawn(|| {
                    let x = gliss::signal::fft::rfft(black_box(&stimulus), n);
                    let mut y = gliss::signal::fft::rfft(black_box(&recording), n);
                    for (a, b) in y.iter_mut().zip(&x) {
                        *a *= b.conj();
                    }
                    gliss::signal::fft::irfft(&mut y, n)
                })
                .join()
                .unwrap()
            })
        })
    });
    let linear_only = AnalysisConfig {
        harmonics: 1,
        bands: false,
        ..AnalysisConfig::default()
    };
    g.bench_function("linear only (impulse + 1/6-octave response)", |b| {
        b.iter(|| analyze(black_box(&recording), &stimulus, &design, &linear_only).unwrap())
    });
    g.bench_function("deconvolution only", |b| {
        b.iter(|| {
            deconv::deconvolve(
                black_box(&recording),
                &stimulus,
                design.fs(),
                20.0,
                20_000.0,
            )
        })
    });
    let power: Vec<f64> = (0..200_001)
        .map(|k| 1.0 + (k as f64 * 1e-3).sin().powi(2))
        .collect();
    let grid = smoothing::log_grid(20.0, 20_000.0);
    g.bench_function("1/6-octave smoothing of 200k bins", |b| {
        b.iter(|| {
            smoothing::smooth_power(
                black_box(&power),
                0.12,
                &grid,
                smoothing::Smoothing::Fraction(6),
            )
        })
    });
    // the room analysis alone on a 2 s impulse response (the case)
    let analysis = analyze(&recording, &stimulus, &design, &linear_only).unwrap();
    let ir2: Vec<f64> = analysis.impulse.samples[..(2.0 * design.fs()) as usize].to_vec();
    g.bench_function(
        "octave + third-octave bands, all parameters, 2 s response",
        |b| b.iter(|| room::analyze(black_box(&ir2), design.fs(), 20.0, 20_000.0)),
    );
    g.finish();

    // the STI's own cost: the MTF of the seven octaves by Schroeder's
    // formula (here each a 2 s squared response at the full 48 kHz, more
    // samples than room::analyze hands it at each band's lower rate) and
    // the STI from them
    let mut g = c.benchmark_group("speech_sti");
    g.sample_size(30);
    let p2: Vec<f64> = ir2.iter().map(|v| v * v).collect();
    g.bench_function("MTF of 7 octaves (2 s at 48 kHz each) and the STI", |b| {
        b.iter(|| {
            let m: Vec<(f64, [f64; 14])> = speech::OCTAVES_HZ
                .iter()
                .map(|&c| (c, speech::mtf(black_box(&p2), design.fs(), None).unwrap()))
                .collect();
            speech::speech(&m, None)
        })
    });
    g.finish();

    impedance(c);
    tuning(c);
}

/// Impedance and the small-signal fit for a 5 s sweep (1 s tail) through
/// the virtual woofer behind 10 Ω: both channels deconvolved, Z on the
/// grid, closed forms and the Levenberg–Marquardt fit.
fn impedance(c: &mut Criterion) {
    let design = SweepParams {
        requested_length_s: 5.0,
        tail_s: 1.0,
        start_hz: 10.0,
        ..SweepParams::default()
    }
    .design()
    .expect("a valid sweep");
    let stimulus = design.generate();
    let driver = VirtualDriver::kestrel_woofer(10.0);
    let (v1, v2) = driver.render(&stimulus, design.fs(), 293);
    let input = ImpedanceInput {
        reference: Some(&v1),
        driver: &v2,
        stimulus: &stimulus,
        fs: design.fs(),
        band: (design.params.start_hz, design.params.end_hz),
        rate_s: design.harmonic_offset_s(2) / 2f64.ln(),
        sense_ohms: 10.0,
    };
    let mut g = c.benchmark_group("impedance_5s_48k");
    g.sample_size(20);
    g.bench_function("impedance and the small-signal fit", |b| {
        b.iter(|| {
            let z = impedance::impedance(black_box(&input)).unwrap();
            thiele_small::thiele_small(&z.frequency_hz, &z.grid_complex(), None).unwrap()
        })
    });
    let z = impedance::impedance(&input).unwrap();
    let zc = z.grid_complex();
    g.bench_function("the small-signal fit alone", |b| {
        b.iter(|| thiele_small::thiele_small(black_box(&z.frequency_hz), &zc, None).unwrap())
    });
    g.finish();
}

/// Designing 10 correction filters for the committed rehearsal room's
/// average (its 1/6-octave response on the 48-per-octave grid, 20 Hz to
/// 20 kHz) towards a gently sloping target: greedy placement, the joint
/// Levenberg–Marquardt refinement, pruning and the boost cap.
fn tuning(c: &mut Criterion) {
    use gliss::analysis::target::Target;
    use gliss::analysis::tuning::{AboveTransition, TuneSettings, design};
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("measurements/rehearsal-room/after");
    let f = gliss::folder::open(&dir).expect("the committed example");
    let (_, r) = f.measurement("the example is an average").unwrap();
    let target = Target::parse("20 4 2\n200 2 2\n1000 0 2\n20000 -4 2\n").expect("a valid target");
    let settings = TuneSettings {
        range_hz: (20.0, 19_000.0),
        filters: 10,
        max_boost_db: 6.0,
        max_cut_db: 15.0,
        q_range: (0.3, 8.0),
        sample_rate_hz: 48_000.0,
        transition_hz: Some(86.0),
        above_transition: AboveTransition::Broad,
    };
    let (fr, m) = (&r.response.frequency_hz, &r.response.magnitude_db);
    let mut g = c.benchmark_group("tuning");
    g.sample_size(20);
    g.bench_function("10 filters for the rehearsal room's average", |b| {
        b.iter(|| design(black_box(fr), black_box(m), &target, &settings).unwrap())
    });
    g.finish();
}

/// PNG encoding of the committed example charts with each row filter and
/// compression level: prints the total size once, times each choice.
#[cfg(feature = "plots")]
fn png(c: &mut Criterion) {
    use gliss::plot::annotate::encode_png_with;
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("measurements/kestrel5-speaker/plots");
    let charts: Vec<(Vec<u8>, (u32, u32))> = std::fs::read_dir(&dir)
        .expect("the committed example plots")
        .flatten()
        .filter(|e| e.path().extension().is_some_and(|x| x == "png"))
        .map(|e| {
            let d = png::Decoder::new(std::io::BufReader::new(
                std::fs::File::open(e.path()).unwrap(),
            ));
            let mut r = d.read_info().unwrap();
            let mut buf = vec![0; r.output_buffer_size()];
            let info = r.next_frame(&mut buf).unwrap();
            buf.truncate(info.buffer_size());
            (buf, (info.width, info.height))
        })
        .collect();
    let mut g = c.benchmark_group("png_encoding_6_charts");
    g.sample_size(10);
    for (fname, filter) in [
        ("none", png::FilterType::NoFilter),
        ("sub", png::FilterType::Sub),
        ("up", png::FilterType::Up),
        ("paeth", png::FilterType::Paeth),
    ] {
        for (cname, compression) in [
            ("fast", png::Compression::Fast),
            ("default", png::Compression::Default),
            ("best", png::Compression::Best),
        ] {
            let size: usize = charts
                .iter()
                .map(|(px, s)| {
                    encode_png_with(px, *s, "", filter, compression)
                        .unwrap()
                        .len()
                })
                .sum();
            println!(
                "png {fname}/{cname}: {} kB for {} charts",
                size / 1024,
                charts.len()
            );
            g.bench_function(format!("{fname} filter, {cname} compression"), |b| {
                b.iter(|| {
                    for (px, s) in &charts {
                        black_box(encode_png_with(px, *s, "", filter, compression).unwrap());
                    }
                })
            });
        }
    }
    g.finish();
}

#[cfg(not(feature = "plots"))]
fn png(_: &mut Criterion) {}

/// `gliss align`'s work on two 5 s measurements (the virtual room's
/// impulse response from a 5 s sweep with a 3 s tail, and the same 2.3 ms
/// later): the spectra, the arrivals, and the crossover search over
/// ±20 ms at 1/16 sample for a subwoofer crossover (50–150 Hz) and a
/// tweeter's (1–4 kHz, the search's finest coarse pass).
fn align(c: &mut Criterion) {
    use gliss::analysis::align::{self, Impulse};
    let design = case_design();
    let stimulus = design.generate();
    let recording = VirtualSystem::default().render(&stimulus, design.fs());
    let a = analyze(&recording, &stimulus, &design, &AnalysisConfig::default()).unwrap();
    let h = a.impulse.samples.clone();
    let fs = design.fs();
    let first = Impulse {
        samples: &h,
        start_s: a.impulse.start_s,
    };
    let second = Impulse {
        samples: &h,
        start_s: a.impulse.start_s + 0.0023,
    };
    let mut g = c.benchmark_group("align_two_5s_measurements");
    g.sample_size(20);
    let n = align::common_len(&[h.len()]);
    g.bench_function("spectra and arrivals", |b| {
        b.iter(|| {
            let s1 = align::spectrum(first, fs, n);
            let s2 = align::spectrum(second, fs, n);
            let t1 = align::arrival_s(first, fs, (200.0, 2000.0));
            let t2 = align::arrival_s(second, fs, (200.0, 2000.0));
            black_box((s1, s2, t1, t2))
        })
    });
    let s1 = align::spectrum(first, fs, n);
    let s2 = align::spectrum(second, fs, n);
    for (name, band) in [("50-150 Hz", (50.0, 150.0)), ("1-4 kHz", (1000.0, 4000.0))] {
        g.bench_function(
            format!("delay search ±20 ms at 1/16 sample, {name}"),
            |b| b.iter(|| black_box(align::best_sum(&[vec![&s1, &s2]], band, 0.02, fs).unwrap())),
        );
    }
    g.finish();
}

/// The directivity reduction of ANSI/CTA-2034-A's 70 positions on a
/// 48-per-octave grid from 20 Hz to 20 kHz (480 points): the polar data,
/// both beamwidths, every curve and index (no file I/O; reading the 70
/// folders is timed as a whole command in docs/performance.md).
fn directivity(c: &mut Criterion) {
    use gliss::analysis::directivity::{AngleResponse, Curve, positions, reduce};
    let f: Vec<f64> = (0..480)
        .map(|i| 20.0 * 2f64.powf(i as f64 / 48.0))
        .collect();
    let set: Vec<(gliss::model::Position, Vec<f64>)> = positions(Curve::SoundPower)
        .into_iter()
        .map(|p| {
            let theta = (p.off_axis_deg() as f64).to_radians().min(1.5);
            let level = f
                .iter()
                .map(|&fi| {
                    let ka = 2.0 * std::f64::consts::PI * fi / 343.0 * 0.1;
                    let d = gliss::signal::special::piston_directivity(ka, theta);
                    20.0 * d.abs().max(0.03).log10()
                })
                .collect();
            (p, level)
        })
        .collect();
    let inputs: Vec<AngleResponse> = set
        .iter()
        .map(|(p, m)| AngleResponse {
            position: *p,
            magnitude_db: m,
        })
        .collect();
    let mut g = c.benchmark_group("directivity_70");
    g.bench_function("reduce 70 positions x 480 frequencies", |b| {
        b.iter(|| reduce(black_box(&f), black_box(&inputs)).unwrap())
    });
    g.finish();
}

/// What checking the sweep file against its description costs: generating
/// the sweep again and comparing (a description without a binding), or
/// hashing the WAV and the binding (`gliss sweep`'s files).
fn sweep_check(c: &mut Criterion) {
    use gliss::session::sweep_file::{self, SweepFile};
    use gliss::signal::wav::{SampleEncoding, decode_wav, encode_wav};
    let design = case_design();
    let enc = SampleEncoding::Float;
    let bytes = encode_wav(&[&design.generate()], design.params.sample_rate_hz, enc);
    let json = sweep_file::describe(&design, "sweep.wav", &enc.describe(), &bytes).unwrap();
    let file: SweepFile = serde_json::from_slice(&json).unwrap();
    let wav = decode_wav(&bytes).unwrap();
    let mut g = c.benchmark_group("sweep_file_check_5s_48k_3s_tail");
    g.sample_size(30);
    g.bench_function("generated again and compared (no binding)", |b| {
        b.iter(|| assert!(!sweep_file::differs(black_box(&design), black_box(&wav))))
    });
    g.bench_function("vouched for: SHA-256 of the WAV and the binding", |b| {
        b.iter(|| assert!(black_box(&file).vouches(black_box(&bytes))))
    });
    g.finish();
}

criterion_group! {
    name = benches;
    // Criterion's own charts would need a system font; the numbers suffice.
    config = Criterion::default().without_plots();
    targets = bench, png, align, directivity, sweep_check
}
criterion_main!(benches);

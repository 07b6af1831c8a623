//! Speed of the analysis of one recording: a 5 s, 48 kHz sweep with a 3 s
//! tail through the virtual system, analysed to the impulse response, the
//! 1/6-octave response and the distortion orders 2–5 (no plots, no file
//! I/O). Results and how to
//! rerun them: docs/performance.md.

use criterion::{Criterion, criterion_group, criterion_main};
use std::hint::black_box;

use gliss::analysis::{AnalysisConfig, analyze, room, smoothing, speech};
use gliss::audio::virtual_system::VirtualSystem;
use gliss::deconv;
use gliss::signal::sweep::SweepParams;

fn bench(c: &mut Criterion) {
    let design = SweepParams {
        requested_length_s: 5.0,
        tail_s: 3.0,
        ..SweepParams::default()
    }
    .design()
    .expect("a valid sweep");
    let stimulus = design.generate();
    let recording = VirtualSystem::default().render(&stimulus, design.fs());
    let config = AnalysisConfig::default();

    let mut g = c.benchmark_group("analysis_5s_48k_3s_tail");
    g.sample_size(30);
    g.bench_function(
        "whole analysis (impulse, 1/6-octave response, orders 2-5, bands)",
        |b| b.iter(|| analyze(black_box(&recording), &stimulus, &design, &config).unwrap()),
    );
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
}

criterion_group! {
    name = benches;
    // Criterion's own charts would need a system font; the numbers suffice.
    config = Criterion::default().without_plots();
    targets = bench
}
criterion_main!(benches);

//! A bounded fuzz run over everything gliss reads from files: WAV
//! decoding, the sweep's .json, manifest.json, results.json and
//! comparison.json, and the curve files (target, microphone correction).
//! Random and mutated inputs, a fixed seed and a fixed number of cases so
//! that it runs the same in CI every time. What it asserts: no panic, and
//! no allocation beyond a bound set by the input's size (a header must not
//! make gliss reserve what the file does not hold). Its own test binary,
//! because it installs a counting allocator.

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};

use gliss::analysis::Smoothing;
use gliss::analysis::correction::Correction;
use gliss::analysis::target::Target;
use gliss::folder::schema::{Comparison, ComparisonManifest, Manifest, Results};
use gliss::session::sweep_file::SweepFile;
use gliss::signal::wav::{SampleEncoding, decode_wav, encode_wav};
use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};

/// The system allocator, counting the bytes in use and their peak.
struct Counting;

static IN_USE: AtomicUsize = AtomicUsize::new(0);
static PEAK: AtomicUsize = AtomicUsize::new(0);

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        // SAFETY: forwarded unchanged to the system allocator
        let p = unsafe { System.alloc(layout) };
        if !p.is_null() {
            let now = IN_USE.fetch_add(layout.size(), Ordering::Relaxed) + layout.size();
            PEAK.fetch_max(now, Ordering::Relaxed);
        }
        p
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: forwarded unchanged to the system allocator
        unsafe { System.dealloc(ptr, layout) };
        IN_USE.fetch_sub(layout.size(), Ordering::Relaxed);
    }
}

#[global_allocator]
static ALLOC: Counting = Counting;

/// One measurement of the peak at a time (the tests of this binary run in
/// parallel threads).
static ONE: Mutex<()> = Mutex::new(());

/// The most `f` allocates above what was in use before it, in bytes.
fn peak_of(f: impl FnOnce()) -> usize {
    let base = IN_USE.load(Ordering::Relaxed);
    PEAK.store(base, Ordering::Relaxed);
    f();
    PEAK.load(Ordering::Relaxed).saturating_sub(base)
}

fn runner(cases: u32) -> TestRunner {
    TestRunner::new_with_rng(
        Config {
            cases,
            failure_persistence: None,
            ..Config::default()
        },
        TestRng::deterministic_rng(RngAlgorithm::ChaCha),
    )
}

/// A small valid WAV of every encoding gliss writes, to mutate.
fn seeds() -> Vec<Vec<u8>> {
    let x: Vec<f64> = (0..256).map(|i| ((i as f64) * 0.1).sin() * 0.5).collect();
    [
        SampleEncoding::Int(16),
        SampleEncoding::Int(24),
        SampleEncoding::Float,
    ]
    .into_iter()
    .map(|e| encode_wav(&[&x, &x], 48_000, e))
    .collect()
}

/// Decoding `bytes` may fail but neither panics nor allocates more than
/// about 16 times the file (8-byte samples, per channel and interleaved)
/// plus a fixed margin.
fn decodes_within_bounds(bytes: &[u8]) -> Result<(), TestCaseError> {
    let bound = 16 * bytes.len() + (1 << 20);
    let used = peak_of(|| {
        let _ = decode_wav(bytes);
    });
    prop_assert!(
        used <= bound,
        "{used} bytes allocated for a {}-byte file",
        bytes.len()
    );
    Ok(())
}

#[test]
fn wav_decoding_of_random_and_mutated_files() {
    let _one = ONE.lock().unwrap_or_else(|e| e.into_inner());
    runner(3000)
        .run(&proptest::collection::vec(any::<u8>(), 0..4096), |b| {
            decodes_within_bounds(&b)
        })
        .unwrap();
    let seeds = seeds();
    let n = seeds.len();
    // a valid file with bytes of its header (and a few of its data)
    // replaced, and cut anywhere
    let mutation = (
        0..n,
        proptest::collection::vec((0usize..96, any::<u8>()), 1..8),
        any::<prop::sample::Index>(),
    );
    runner(3000)
        .run(&mutation, |(k, edits, cut)| {
            let mut b = seeds[k].clone();
            for (i, v) in edits {
                if i < b.len() {
                    b[i] = v;
                }
            }
            let keep = cut.index(b.len() + 1);
            b.truncate(keep);
            decodes_within_bounds(&b)
        })
        .unwrap();
}

/// A committed example folder's file, to mutate.
fn example(rel: &str) -> String {
    std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("measurements")
            .join(rel),
    )
    .unwrap()
}

#[test]
fn folder_files_parse_or_refuse_without_panic() {
    let texts = [
        example("rehearsal-room/before-1/manifest.json"),
        example("rehearsal-room/before-1/results.json"),
        example("rehearsal-room/comparison/comparison.json"),
        example("rehearsal-room/comparison/manifest.json"),
    ];
    let parse_all = |b: &[u8]| {
        let _ = serde_json::from_slice::<Manifest>(b);
        let _ = serde_json::from_slice::<Results>(b);
        let _ = serde_json::from_slice::<Comparison>(b);
        let _ = serde_json::from_slice::<ComparisonManifest>(b);
        let _ = serde_json::from_slice::<SweepFile>(b);
    };
    // every committed file reads as its own type
    assert!(serde_json::from_str::<Manifest>(&texts[0]).is_ok());
    assert!(serde_json::from_str::<Results>(&texts[1]).is_ok());
    assert!(serde_json::from_str::<Comparison>(&texts[2]).is_ok());
    assert!(serde_json::from_str::<ComparisonManifest>(&texts[3]).is_ok());
    runner(1000)
        .run(&proptest::collection::vec(any::<u8>(), 0..512), |b| {
            parse_all(&b);
            Ok(())
        })
        .unwrap();
    // the files with characters replaced, inserted and cut: keys renamed,
    // numbers turned into strings, nulls where arrays were
    let n = texts.len();
    let mutation = (
        0..n,
        proptest::collection::vec((any::<prop::sample::Index>(), any::<u8>()), 1..6),
        any::<prop::sample::Index>(),
    );
    runner(400)
        .run(&mutation, |(k, edits, cut)| {
            let mut b = texts[k].as_bytes().to_vec();
            for (i, v) in edits {
                let at = i.index(b.len());
                b[at] = v;
            }
            let keep = cut.index(b.len() + 1).max(b.len() / 2);
            b.truncate(keep);
            parse_all(&b);
            Ok(())
        })
        .unwrap();
}

#[test]
fn curve_files_and_options_parse_or_refuse_without_panic() {
    runner(2000)
        .run(&"[0-9eE.,;#*+\\- \\t\\nA-Za-z/]{0,200}", |s| {
            let _ = Target::parse(&s);
            let _ = Correction::parse(&s);
            let _ = Smoothing::parse(&s);
            Ok(())
        })
        .unwrap();
    // numbers that are not: huge, tiny, infinite, not a number
    runner(500)
        .run(
            &(any::<f64>(), any::<f64>(), any::<f64>(), any::<f64>()),
            |(a, b, c, d)| {
                let text = format!("{a} {b}\n{c} {d}\n");
                let _ = Target::parse(&text);
                let _ = Correction::parse(&text);
                Ok(())
            },
        )
        .unwrap();
}

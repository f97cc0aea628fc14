//! Replays what the fuzzers under `fuzz/` kept: every input of `fuzz/corpus/<target>/`
//! (the minimised corpus each target grew) and of `fuzz/regressions/<target>/` (inputs
//! that once crashed or hung, kept after the fix) goes through the same entry point the
//! fuzz target calls, on stable Rust and without libFuzzer. A panic or a stack overflow
//! in any of them fails this suite; a hang fails it through the per-input time limit.
//!
//! Running the fuzzers themselves is described in DEVELOPERS.md; CI only replays.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot read its corpus should stop at once with the cause"
)]

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// One input taking longer than this (debug build, a loaded machine) counts as a hang.
const PER_INPUT: Duration = Duration::from_secs(20);

fn inputs(target: &str) -> Vec<PathBuf> {
    let fuzz = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz");
    let mut all = Vec::new();
    for kind in ["corpus", "regressions"] {
        let dir = fuzz.join(kind).join(target);
        let Ok(entries) = std::fs::read_dir(&dir) else {
            continue;
        };
        for entry in entries {
            let path = entry.unwrap().path();
            if path.is_file() {
                all.push(path);
            }
        }
    }
    all.sort();
    all
}

fn replay(target: &str, run: fn(&[u8])) {
    let all = inputs(target);
    // The corpus is committed; an empty one means it was lost, and the replay would pass
    // by checking nothing.
    assert!(
        all.len() >= 10,
        "fuzz/corpus/{target} holds only {} inputs; the committed corpus is missing",
        all.len()
    );
    for path in &all {
        let data = std::fs::read(path).unwrap();
        let start = Instant::now();
        let outcome = std::panic::catch_unwind(|| run(&data));
        assert!(
            outcome.is_ok(),
            "{target}: {} made tauscan panic",
            path.display()
        );
        assert!(
            start.elapsed() < PER_INPUT,
            "{target}: {} took {:?}",
            path.display(),
            start.elapsed()
        );
    }
}

#[test]
fn the_evaluator_corpus_replays_without_a_panic() {
    replay("evaluator", tauscan::fuzzing::evaluator);
}

#[test]
fn the_recogniser_corpus_replays_without_a_panic() {
    replay("recogniser", tauscan::fuzzing::recogniser);
}

#[test]
fn the_spec_loader_corpus_replays_without_a_panic() {
    replay("spec_loader", tauscan::fuzzing::spec_loader);
}

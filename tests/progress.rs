//! The progress of a scan: the library's counters end at the files and smoothers the scan
//! really had, and the command line draws nothing when standard error is not a terminal
//! (CI logs stay clean) or with `--quiet`.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run the binary should stop with the reason"
)]

use std::sync::Arc;
use std::time::Duration;
use tauscan::scan::{Progress, ScanOptions};

mod common;

#[test]
fn the_counters_end_at_what_the_scan_read_and_found() {
    let progress = Arc::new(Progress::default());
    let options = ScanOptions {
        paths: vec![common::fixture("demo-greenhouse")],
        progress: Some(progress.clone()),
        ..Default::default()
    };
    let scan = tauscan::scan::run(&options);
    let files = scan.program.files.len();
    assert!(files > 5, "the demo has its files: {files}");
    assert_eq!(Progress::get(&progress.files_total), files);
    assert_eq!(Progress::get(&progress.files_read), files);
    assert_eq!(Progress::get(&progress.files_recognised), files);
    // The first pass finds every smoother of the demo (it has no filter-function
    // instances found only in the second pass beyond the function's own update).
    let found = Progress::get(&progress.smoothers);
    assert!(
        found >= 1 && found <= scan.recognition.smoothers.len(),
        "{found} of {}",
        scan.recognition.smoothers.len()
    );
}

#[test]
fn nothing_is_drawn_when_standard_error_is_not_a_terminal() {
    let demo = common::fixture("demo-greenhouse");
    for extra in [&[][..], &["--quiet"][..]] {
        let mut args = vec!["check"];
        args.extend_from_slice(extra);
        args.push(".");
        let run = common::tauscan_in(&demo, &args, Duration::from_secs(60));
        run.assert_finished();
        for marker in ["reading ", "recognising ", "\r", "\u{1b}["] {
            assert!(
                !run.stderr.contains(marker),
                "{args:?}: `{}` on a non-terminal stderr:\n{}",
                marker.escape_debug(),
                run.stderr
            );
        }
    }
}

//! Two boards, one shared controller header, two `board.h`: each board's smoother takes its
//! gain from its own board's header.
//!
//! `fixtures/board_headers` is a funicular railway's two car controllers. Both include the
//! shared `common/ctrl.h` through the include path (`#include "ctrl.h"`; in
//! `fixtures/board_headers_relative`, by its path from the file, `"../../common/ctrl.h"`),
//! which includes
//! `"board.h"`; `boards/a/board.h` defines `BOARD_LP_K 0.25f`, `boards/b/board.h` `0.5f`. The
//! C compiler finds `board.h` for a board only with that board's `-I` flag: C11 6.10.2p2-3
//! leave the search for a quoted name to the implementation, and the GCC manual ("Search
//! Path") has it look beside the including file (`common/`, where there is none), then in
//! the `-I` folders in order. So the alphas expected are 0.25 for car A and 0.5 for car B,
//! which this test confirms by compiling each board with `cc -I boards/<x> -I common` and
//! running one update from rest, and holds against what tauscan lists for the folder, both
//! scanned plainly and through the folder's compilation database.
//!
//! A board needs its own `-I`, so the fixture cannot be one of `fixtures/forms`, whose
//! drivers are all compiled the same way (`tests/exec_truth.rs`).
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run the compiler or the binary should stop with the reason"
)]

mod common;
use common::crate_root;

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

/// The two fixtures: the shared header found through the include path, or by a path
/// relative to the including file.
const FIXTURES: [&str; 2] = ["board_headers", "board_headers_relative"];

fn fixture_root(fixture: &str) -> PathBuf {
    crate_root().join("fixtures").join(fixture)
}

/// One car's controller: its folder under `boards/`, its file and its sample function.
struct Board {
    folder: &'static str,
    file: &'static str,
    function: &'static str,
    state: &'static str,
}

const BOARDS: [Board; 2] = [
    Board {
        folder: "a",
        file: "boards/a/main_a.c",
        function: "funi_a_tension_sample",
        state: "funi_a_tension_kn",
    },
    Board {
        folder: "b",
        file: "boards/b/main_b.c",
        function: "funi_b_tension_sample",
        state: "funi_b_tension_kn",
    },
];

/// The first step from rest at 0 toward 1000 kN, by compiling the board with its own
/// include path and running one update: alpha = y1 / 1000.
fn executed_alpha(fixture: &str, board: &Board) -> f64 {
    let root = fixture_root(fixture);
    let dir = tempfile::tempdir().unwrap();
    let driver = dir.path().join("drive.c");
    std::fs::write(
        &driver,
        format!(
            "#include <stdio.h>\n\
             void {function}(float kn);\n\
             float funi_rope_tension_kn(void);\n\
             int main(void)\n{{\n    {function}(1000.0f);\n    \
             printf(\"%.17g\\n\", (double)funi_rope_tension_kn());\n    return 0;\n}}\n",
            function = board.function
        ),
    )
    .unwrap();
    let exe = dir.path().join("drive");
    let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
    let out = Command::new(&cc)
        .args(["-std=c11", "-Wall", "-Wextra", "-Werror"])
        .arg("-I")
        .arg(Path::new("boards").join(board.folder))
        .args(["-I", "common"])
        .arg(board.file)
        .arg(&driver)
        .arg("-o")
        .arg(&exe)
        .current_dir(&root)
        .output()
        .expect("a C compiler (cc) is needed for the execution checks");
    assert!(
        out.status.success(),
        "{} does not compile with its own board's include path:\n{}",
        board.file,
        String::from_utf8_lossy(&out.stderr)
    );
    let run = common::output(&mut Command::new(&exe));
    assert!(run.status.success());
    let y1: f64 = String::from_utf8_lossy(&run.stdout).trim().parse().unwrap();
    y1 / 1000.0
}

/// The record tauscan lists for `board`, after checking that it lists nothing else.
fn record<'a>(smoothers: &'a [Value], board: &Board) -> &'a Value {
    let found: Vec<&Value> = smoothers
        .iter()
        .filter(|s| s["file"].as_str().map(|f| f.trim_start_matches("./")) == Some(board.file))
        .collect();
    assert_eq!(
        found.len(),
        1,
        "{}: expected one smoother, got {found:?}",
        board.file
    );
    let record = found[0];
    assert_eq!(
        record["function"].as_str(),
        Some(board.function),
        "{record}"
    );
    assert_eq!(record["state"].as_str(), Some(board.state), "{record}");
    record
}

fn check_scan(fixture: &str, args: &[&str]) {
    let run = common::tauscan_in(&crate_root(), args, common::LIMIT);
    run.assert_exit(0, "two float smoothers and no spec: nothing to report");
    let json = run.json();
    let smoothers = json["smoothers"].as_array().unwrap();
    assert_eq!(smoothers.len(), 2, "{json}");
    for board in &BOARDS {
        let record = record(smoothers, board);
        let executed = executed_alpha(fixture, board);
        let reported = record["alpha"].as_f64();
        // Source: execution of the board's file with the system C compiler (cc) and that
        // board's -I flag; the first step is one float rounding of alpha * 1000.
        assert!(
            reported.is_some_and(|a| (a - executed).abs() <= 1e-6 * executed),
            "{} ({}): alpha reported {}, executed {executed}",
            board.file,
            args.join(" "),
            record["alpha"]
        );
        // Source: the fixture's text: the coefficient comes from the board's own header.
        let header = format!("boards/{}/board.h", board.folder);
        assert_eq!(
            record["coefficient_chain"][0]["file"].as_str(),
            Some(header.as_str()),
            "{} ({}): the coefficient should come from {header}: {}",
            board.file,
            args.join(" "),
            record["coefficient_chain"]
        );
        assert_eq!(record["dc_gain"].as_f64(), Some(1.0), "{record}");
        // Source: the fixture's text: the other board's header is not a preprocessor
        // branch of this board's build, so it gives no variant.
        assert_eq!(
            record["variants"].as_array().map(Vec::len),
            Some(0),
            "{record}"
        );
    }
}

#[test]
fn each_board_takes_its_gain_from_its_own_board_header() {
    for fixture in FIXTURES {
        let root = format!("fixtures/{fixture}");
        check_scan(fixture, &["list", "--format", "json", &root]);
    }
}

#[test]
fn the_compilation_database_gives_each_board_its_own_header() {
    for fixture in FIXTURES {
        let database = format!("fixtures/{fixture}/compile_commands.json");
        check_scan(
            fixture,
            &["list", "--format", "json", "--compile-commands", &database],
        );
    }
}

#[test]
fn the_executed_alphas_are_the_board_headers_values() {
    // Source: the fixture's text (BOARD_LP_K in boards/a/board.h and boards/b/board.h),
    // and execution: 0.25f and 0.5f are exact in float, so are their first steps.
    for fixture in FIXTURES {
        assert_eq!(executed_alpha(fixture, &BOARDS[0]), 0.25);
        assert_eq!(executed_alpha(fixture, &BOARDS[1]), 0.5);
    }
}

//! A JSON compilation database picks the build's `#if` branches: with the database's
//! `-DKILN_FAST_TC`, the thermocouple filter's shift is 2 (alpha 1/4); without it, 5
//! (alpha 1/32). Both confirmed by compiling and running the fixture with the same flags.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run the compiler or the binary should stop with the reason"
)]

use std::path::Path;
use std::process::Command;

mod common;

fn alpha(args: &[&str]) -> f64 {
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["list", "--format", "json"])
            .args(args)
            .current_dir(env!("CARGO_MANIFEST_DIR")),
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let s = &doc["smoothers"][0];
    assert_eq!(s["file"], "src/kiln.c");
    s["alpha"].as_f64().unwrap()
}

/// The first step from rest at 0 toward 32000, by execution: alpha = y1 / 32000.
fn executed_alpha(flags: &[&str]) -> f64 {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/compdb");
    let dir = tempfile::tempdir().unwrap();
    let driver = dir.path().join("drive.c");
    std::fs::write(
        &driver,
        format!(
            "#include <stdio.h>\n#include \"{}\"\nint main(void) {{ printf(\"%d\\n\", (int)kiln_tc_sample(32000)); return 0; }}\n",
            root.join("src/kiln.c").display()
        ),
    )
    .unwrap();
    let include = format!("-I{}", root.join("inc").display());
    let mut all_flags = vec!["-Wall", "-Werror", include.as_str()];
    all_flags.extend(flags.iter().copied());
    let text = common::compile_and_run(&[&driver], &all_flags, &dir.path().join("drive"));
    let y1: f64 = text.trim().parse().unwrap();
    y1 / 32000.0
}

#[test]
fn the_databases_defines_choose_the_coefficient() {
    // Source: execution of the fixture with the system C compiler (cc), same -D flags.
    let with_db = alpha(&[
        "--compile-commands",
        "fixtures/compdb/compile_commands.json",
    ]);
    assert_eq!(with_db, 0.25);
    assert_eq!(executed_alpha(&["-DKILN_FAST_TC"]), with_db);
    let without = alpha(&["fixtures/compdb"]);
    assert_eq!(without, 1.0 / 32.0);
    assert_eq!(executed_alpha(&[]), without);
}

#[test]
fn a_broken_database_is_a_tool_error() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("compile_commands.json");
    std::fs::write(&db, "{\"not\": \"a list\"}").unwrap();
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["list", "--compile-commands"])
            .arg(&db),
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not a JSON compilation database"));
}

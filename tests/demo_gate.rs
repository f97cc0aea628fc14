//! The demo's gate, end to end: `tauscan check` on the demo firmware with its spec fails
//! with the findings a reviewer would expect, and passes once the constants the `help:`
//! lines suggest are put in.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot copy its fixture or run the binary should stop with the reason"
)]

use std::path::Path;
use std::process::Command;

mod common;

fn copy_tree(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        std::fs::copy(entry.path(), to.join(entry.file_name())).unwrap();
    }
}

fn check(dir: &Path) -> (i32, serde_json::Value, String) {
    let json = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "json"])
            .arg(dir),
    );
    let text = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .arg("check")
            .arg(dir),
    );
    let doc: serde_json::Value = serde_json::from_slice(&json.stdout).unwrap();
    (
        json.status.code().unwrap_or(-1),
        doc,
        String::from_utf8_lossy(&text.stdout).into_owned(),
    )
}

fn rules_of(doc: &serde_json::Value) -> Vec<String> {
    let mut rules: Vec<String> = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| {
            format!(
                "{} {}:{}",
                f["rule"].as_str().unwrap(),
                f["file"].as_str().unwrap(),
                f["line"]
            )
        })
        .collect();
    rules.sort();
    rules
}

fn edit(path: &Path, from: &str, to: &str) {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.contains(from), "{} lacks {from}", path.display());
    std::fs::write(path, text.replacen(from, to, 1)).unwrap();
}

#[test]
fn the_demo_fails_its_spec_and_passes_after_the_suggested_fixes() {
    let dir = tempfile::tempdir().unwrap();
    let demo = dir.path().join("demo");
    copy_tree(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/demo-greenhouse"),
        &demo,
    );

    let (status, doc, text) = check(&demo);
    assert_eq!(status, 1, "{text}");
    // Reviewed by hand: the light filter's gain was computed for 100 Hz and runs at 20 Hz
    // (both stages), the soil average is too short for 12 dB, the vent current filter is
    // too slow for 8-12 Hz at 200 Hz and rests 15 counts short.
    assert_eq!(
        rules_of(&doc),
        vec![
            "cutoff-outside-requirement vent_motor.c:14",
            "dead-band-over-requirement vent_motor.c:14",
            "noise-reduction-under-requirement soil.c:14",
            "rate-mismatch light.c:12",
            "rate-mismatch light.c:13",
        ]
    );
    // The diagnostics carry the suggested constants.
    assert!(
        text.contains(">> 2 (alpha = 0.25, cutoff 9.22 Hz)"),
        "{text}"
    );
    assert!(text.contains("window of N = 16"), "{text}");
    assert!(text.contains("runs at 20 Hz"), "{text}");

    // The fixes the help lines give.
    edit(
        &demo.join("vent_motor.c"),
        "#define VENT_CURRENT_SHIFT 4",
        "#define VENT_CURRENT_SHIFT 2",
    );
    edit(
        &demo.join("soil.c"),
        "#define SOIL_WINDOW 8",
        "#define SOIL_WINDOW 16",
    );
    edit(
        &demo.join("light.c"),
        "#define SENSOR_DT 0.01f",
        "#define SENSOR_DT 0.05f",
    );
    let (status, doc, text) = check(&demo);
    assert_eq!(rules_of(&doc), Vec::<String>::new(), "{text}");
    assert_eq!(status, 0, "{text}");
}

#[test]
fn a_broken_spec_stops_the_gate_with_its_place() {
    let dir = tempfile::tempdir().unwrap();
    let demo = dir.path().join("demo");
    copy_tree(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/demo-greenhouse"),
        &demo,
    );
    edit(
        &demo.join("tauscan.yaml"),
        "max_dead_band:",
        "max_dead_bnd:",
    );
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .arg("check")
            .arg(&demo),
    );
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("tauscan.yaml:16:"), "{err}");
    assert!(err.contains("did you mean `max_dead_band`"), "{err}");
}

#[test]
fn a_starter_spec_from_init_passes_the_code_it_was_written_from() {
    let dir = tempfile::tempdir().unwrap();
    let demo = dir.path().join("demo");
    copy_tree(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/demo-greenhouse"),
        &demo,
    );
    std::fs::remove_file(demo.join("tauscan.yaml")).unwrap();
    let init = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .arg("init")
            .arg(&demo),
    );
    assert_eq!(
        init.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&init.stderr)
    );
    let spec = std::fs::read_to_string(demo.join("tauscan.yaml")).unwrap();
    assert!(spec.contains("max_dead_band: \"15 counts\""), "{spec}");
    let (status, doc, text) = check(&demo);
    assert_eq!(rules_of(&doc), Vec::<String>::new(), "{text}");
    assert_eq!(status, 0);
    // A second init does not overwrite without --force.
    let again = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .arg("init")
            .arg(&demo),
    );
    assert_eq!(again.status.code(), Some(2));
    // Tightening one requirement makes the gate fail: the spec really holds the code.
    edit(
        &demo.join("tauscan.yaml"),
        "max_dead_band: \"15 counts\"",
        "max_dead_band: \"14 counts\"",
    );
    let (status, doc, _) = check(&demo);
    assert_eq!(status, 1);
    assert_eq!(
        rules_of(&doc),
        vec!["dead-band-over-requirement vent_motor.c:14"]
    );
}

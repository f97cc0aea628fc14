//! Inline suppressions and tags, end to end: a suppression with a reason keeps the finding
//! in the JSON but out of the gate; one without a reason is not applied and is itself a
//! finding; a tag in the code picks the spec entry.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot write its fixture or run the binary should stop with the reason"
)]

use std::process::Command;

mod common;

fn check(dir: &std::path::Path) -> (i32, serde_json::Value) {
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "json", "--fail-on", "warning"])
            .arg(dir),
    );
    (
        out.status.code().unwrap(),
        serde_json::from_slice(&out.stdout).unwrap(),
    )
}

fn write(dir: &std::path::Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).unwrap();
}

#[test]
fn a_reasoned_suppression_keeps_the_finding_visible_but_passes_the_gate() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "coop.c",
        "static int door_mm;\n\
         void coop_door_sample(int raw)\n{\n\
         \x20   // tauscan: allow integer-dead-band -- the door stops on a limit switch, 7 mm is fine\n\
         \x20   door_mm += (raw - door_mm) >> 3;\n}\n",
    );
    let (status, doc) = check(dir.path());
    let findings = doc["findings"].as_array().unwrap();
    assert_eq!(findings.len(), 1, "{doc:#}");
    assert_eq!(findings[0]["rule"], "integer-dead-band");
    assert_eq!(findings[0]["line"], 5);
    assert_eq!(
        findings[0]["suppressed"],
        "the door stops on a limit switch, 7 mm is fine"
    );
    assert_eq!(status, 0);
}

#[test]
fn a_suppression_without_reason_is_not_applied() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "coop.c",
        "static int door_mm;\nvoid coop_door_sample(int raw)\n{\n    door_mm += (raw - door_mm) >> 3; // tauscan: allow integer-dead-band\n}\n",
    );
    let (status, doc) = check(dir.path());
    let mut rules: Vec<&str> = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["suppressed"].is_null())
        .map(|f| f["rule"].as_str().unwrap())
        .collect();
    rules.sort_unstable();
    assert_eq!(rules, ["integer-dead-band", "suppression-without-reason"]);
    assert_eq!(status, 1);
}

#[test]
fn a_tag_in_the_code_picks_the_spec_entry() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "coop.c",
        "static float coop_temp_c;\nvoid coop_temp_sample(float raw)\n{\n    /* tauscan: tag coop-air */\n    coop_temp_c += 0.5f * (raw - coop_temp_c);\n}\n",
    );
    write(
        dir.path(),
        "tauscan.yaml",
        "smoothers:\n  - match: { tag: coop-air }\n    requires: { min_noise_reduction: \"12 dB\" }\n",
    );
    let (status, doc) = check(dir.path());
    let findings = doc["findings"].as_array().unwrap();
    assert_eq!(findings.len(), 1, "{doc:#}");
    assert_eq!(findings[0]["rule"], "noise-reduction-under-requirement");
    assert_eq!(status, 1);
    // Without the tag the entry matches nothing, which is a finding of its own.
    write(
        dir.path(),
        "coop.c",
        "static float coop_temp_c;\nvoid coop_temp_sample(float raw)\n{\n    coop_temp_c += 0.5f * (raw - coop_temp_c);\n}\n",
    );
    let (_, doc) = check(dir.path());
    assert_eq!(doc["findings"][0]["rule"], "spec-entry-unmatched");
}

#[test]
fn the_spec_turns_rules_off_and_changes_their_severity() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "coop.c",
        "static int door_mm;\nvoid coop_door_sample(int raw)\n{\n    door_mm += (raw - door_mm) >> 3;\n}\n",
    );
    let run = |spec: &str| {
        write(dir.path(), "tauscan.yaml", spec);
        let out = common::output(
            Command::new(env!("CARGO_BIN_EXE_tauscan"))
                .args(["check", "--format", "json"])
                .arg(dir.path()),
        );
        let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        (
            out.status.code().unwrap(),
            doc["findings"].as_array().unwrap().len(),
            doc,
        )
    };
    // Default: a warning, which does not fail the default gate (--fail-on error).
    let (status, n, doc) = run("");
    assert_eq!((status, n), (0, 1));
    assert_eq!(doc["findings"][0]["severity"], "warning");
    let (status, _, doc) = run("rules: { integer-dead-band: error }\n");
    assert_eq!(status, 1);
    assert_eq!(doc["findings"][0]["severity"], "error");
    let (status, n, _) = run("rules: { integer-dead-band: off }\n");
    assert_eq!((status, n), (0, 0));
}

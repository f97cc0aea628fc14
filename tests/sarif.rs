//! SARIF output, from the consumer's side: it validates against the OASIS SARIF 2.1.0
//! schema (tests/standards/sarif-schema-2.1.0.json, copied unchanged from the OASIS
//! technical committee's published Schemata), lists every rule, and keeps its
//! fingerprints when unrelated edits move lines.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run the binary or read the schema should stop with the reason"
)]

use std::path::Path;
use std::process::Command;

mod common;

fn sarif(dir: &Path) -> serde_json::Value {
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "sarif"])
            .arg(dir),
    );
    assert!(
        matches!(out.status.code(), Some(0) | Some(1)),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn replace_pattern(value: &mut serde_json::Value, from: &str, to: &str) -> usize {
    match value {
        serde_json::Value::Object(map) => {
            let mut n = 0;
            for (key, v) in map.iter_mut() {
                if key == "pattern" && v == from {
                    *v = serde_json::json!(to);
                    n += 1;
                } else {
                    n += replace_pattern(v, from, to);
                }
            }
            n
        }
        serde_json::Value::Array(items) => {
            items.iter_mut().map(|v| replace_pattern(v, from, to)).sum()
        }
        _ => 0,
    }
}

fn copy_demo() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let from = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/demo-greenhouse");
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        std::fs::copy(entry.path(), dir.path().join(entry.file_name())).unwrap();
    }
    dir
}

#[test]
fn sarif_validates_against_the_oasis_schema() {
    // Source: OASIS SARIF 2.1.0 JSON Schema.
    let schema_text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/standards/sarif-schema-2.1.0.json"),
    )
    .unwrap();
    let mut schema: serde_json::Value = serde_json::from_str(&schema_text).unwrap();
    // The published schema's `language` patterns have a stray `]` that the validator's
    // check of the schema itself rejects as a regex. tauscan writes no `language`, so the
    // pattern is replaced in memory (the file stays as published) by the one it means.
    assert!(
        replace_pattern(
            &mut schema,
            "^[a-zA-Z]{2}|^[a-zA-Z]{2}-[a-zA-Z]{2}]?$",
            "^[a-zA-Z]{2}(-[a-zA-Z]{2})?$"
        ) > 0
    );
    let validator = jsonschema::validator_for(&schema).unwrap();
    let demo = copy_demo();
    let log = sarif(demo.path());
    let errors: Vec<String> = validator
        .iter_errors(&log)
        .map(|e| format!("{e} at {}", e.instance_path()))
        .take(10)
        .collect();
    assert!(errors.is_empty(), "{errors:#?}");
    // The validator can fail: a result without a message is not SARIF.
    let mut broken = log.clone();
    broken["runs"][0]["results"][0]
        .as_object_mut()
        .unwrap()
        .remove("message");
    assert!(!validator.is_valid(&broken));
}

#[test]
fn every_rule_is_described_and_results_are_relative_to_the_root() {
    let demo = copy_demo();
    let log = sarif(demo.path());
    let run = &log["runs"][0];
    let listed =
        common::output(Command::new(env!("CARGO_BIN_EXE_tauscan")).args(["explain", "--list"]));
    let ids: Vec<String> = String::from_utf8_lossy(&listed.stdout)
        .lines()
        .filter_map(|l| l.split_whitespace().next().map(str::to_string))
        .collect();
    let rules = run["tool"]["driver"]["rules"].as_array().unwrap();
    assert_eq!(rules.len(), ids.len());
    for (rule, id) in rules.iter().zip(&ids) {
        assert_eq!(rule["id"], id.as_str());
        assert!(rule["fullDescription"]["text"]
            .as_str()
            .unwrap()
            .contains("## What it finds"));
        assert!(!rule["shortDescription"]["text"]
            .as_str()
            .unwrap()
            .is_empty());
    }
    let results = run["results"].as_array().unwrap();
    assert_eq!(results.len(), 5);
    for r in results {
        let loc = &r["locations"][0]["physicalLocation"];
        assert_eq!(loc["artifactLocation"]["uriBaseId"], "SRCROOT");
        let uri = loc["artifactLocation"]["uri"].as_str().unwrap();
        assert!(!uri.starts_with('/') && !uri.contains("://"), "{uri}");
        let index = r["ruleIndex"].as_u64().unwrap() as usize;
        assert_eq!(rules[index]["id"], r["ruleId"]);
    }
    let cutoff = results
        .iter()
        .find(|r| r["ruleId"] == "cutoff-outside-requirement")
        .unwrap();
    // The coefficient's definition is a related location.
    assert!(cutoff["relatedLocations"][0]["message"]["text"]
        .as_str()
        .unwrap()
        .contains("VENT_CURRENT_SHIFT"));
}

fn fingerprints(log: &serde_json::Value) -> Vec<String> {
    let mut v: Vec<String> = log["runs"][0]["results"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r["partialFingerprints"]["tauscanFinding/v1"]
                .as_str()
                .unwrap()
                .to_string()
        })
        .collect();
    v.sort();
    v
}

#[test]
fn fingerprints_survive_edits_that_move_lines() {
    let demo = copy_demo();
    let before = fingerprints(&sarif(demo.path()));
    let mut unique = before.clone();
    unique.dedup();
    assert_eq!(unique.len(), before.len(), "fingerprints are distinct");
    for name in ["vent_motor.c", "soil.c", "light.c"] {
        let path = demo.path().join(name);
        let text = std::fs::read_to_string(&path).unwrap();
        std::fs::write(&path, format!("/* moved */\n\n\n{text}")).unwrap();
    }
    let after = fingerprints(&sarif(demo.path()));
    assert_eq!(before, after);
}

//! The JSON inventory holds its documented promise: every output of `tauscan list
//! --format json` over the project's fixtures validates against
//! `docs/tauscan-list-1.schema.json`, and a consumer that knows only the README's field
//! list can read it.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test helper that cannot run its command should stop the test with the reason"
)]

use serde::Deserialize;
use std::path::Path;
use std::process::Command;

mod common;

fn list_json(path: &str) -> serde_json::Value {
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["list", "--format", "json", path])
            .current_dir(env!("CARGO_MANIFEST_DIR")),
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("stdout is JSON")
}

fn schema() -> jsonschema::Validator {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/tauscan-list-1.schema.json");
    let text = std::fs::read_to_string(path).expect("schema file");
    let schema: serde_json::Value = serde_json::from_str(&text).expect("schema is JSON");
    jsonschema::validator_for(&schema).expect("schema compiles")
}

#[test]
fn every_fixture_tree_validates_against_the_documented_schema() {
    let validator = schema();
    for tree in [
        "fixtures/demo-greenhouse",
        "fixtures/forms",
        "fixtures/decoys",
        "fixtures/instances",
    ] {
        let doc = list_json(tree);
        let errors: Vec<String> = validator
            .iter_errors(&doc)
            .map(|e| format!("{} at {}", e, e.instance_path()))
            .take(10)
            .collect();
        assert!(errors.is_empty(), "{tree}: {errors:#?}");
    }
}

#[test]
fn check_output_with_findings_validates_too() {
    let validator = schema();
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "json", "fixtures/demo-greenhouse"])
            .current_dir(env!("CARGO_MANIFEST_DIR")),
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).expect("stdout is JSON");
    assert!(!doc["findings"].as_array().unwrap().is_empty());
    let errors: Vec<String> = validator
        .iter_errors(&doc)
        .map(|e| format!("{} at {}", e, e.instance_path()))
        .take(10)
        .collect();
    assert!(errors.is_empty(), "{errors:#?}");
    // Every finding about a smoother names one that is in the inventory.
    let ids: Vec<&str> = doc["smoothers"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["id"].as_str().unwrap())
        .collect();
    for f in doc["findings"].as_array().unwrap() {
        if let Some(id) = f["smoother"].as_str() {
            assert!(ids.contains(&id), "{id}");
        }
    }
}

#[test]
fn schema_rejects_what_it_should() {
    // The schema itself must be able to fail: a record missing `alpha` and a wrong form.
    let validator = schema();
    let mut doc = list_json("fixtures/demo-greenhouse");
    let first = &mut doc["smoothers"][0];
    first.as_object_mut().unwrap().remove("alpha");
    assert!(!validator.is_valid(&doc));
    let mut doc = list_json("fixtures/demo-greenhouse");
    doc["smoothers"][0]["form"] = serde_json::json!("biquad");
    assert!(!validator.is_valid(&doc));
}

/// The fields the README promises, as a consumer would declare them.
#[derive(Deserialize)]
struct Inventory {
    schema: u32,
    smoothers: Vec<Record>,
}

#[derive(Deserialize)]
struct Record {
    id: String,
    file: String,
    line: u32,
    column: u32,
    function: String,
    state: String,
    form: String,
    arithmetic: String,
    alpha: Option<f64>,
    tau_samples: Option<f64>,
    window: Option<u32>,
    rate_hz: Option<f64>,
    rate_source: Option<String>,
    rate_kind: String,
    cutoff_hz: Option<f64>,
    lag_s: Option<f64>,
    noise_ratio: Option<f64>,
    dc_gain: Option<f64>,
    stall: Option<Stall>,
    coefficient_chain: Vec<ChainStep>,
    definition: Option<Location>,
}

#[derive(Deserialize)]
struct Stall {
    rising: u64,
    falling: u64,
}

#[derive(Deserialize)]
struct ChainStep {
    file: String,
    line: u32,
    text: String,
}

#[derive(Deserialize)]
struct Location {
    file: String,
    line: u32,
}

#[test]
fn a_consumer_reads_the_demo_inventory() {
    let doc = list_json("fixtures/demo-greenhouse");
    let inv: Inventory = serde_json::from_value(doc).expect("consumer structs fit");
    assert_eq!(inv.schema, 1);
    assert!(!inv.smoothers.is_empty());
    let mut ids: Vec<&str> = inv.smoothers.iter().map(|s| s.id.as_str()).collect();
    ids.sort_unstable();
    ids.dedup();
    assert_eq!(ids.len(), inv.smoothers.len(), "ids are unique");
    for s in &inv.smoothers {
        assert!(s.line >= 1 && s.column >= 1);
        assert!(!s.function.is_empty() && !s.state.is_empty() && !s.file.is_empty());
        assert!(["ema", "ema-scaled-state", "moving-average"].contains(&s.form.as_str()));
        assert!(["float", "integer", "fixed"].contains(&s.arithmetic.as_str()));
        // Figures in Hz or seconds only with a rate: never invented.
        if s.rate_hz.is_none() {
            assert!(s.cutoff_hz.is_none() && s.lag_s.is_none(), "{}", s.id);
        } else {
            assert!(s.rate_source.is_some(), "{}", s.id);
        }
        match s.form.as_str() {
            "moving-average" => assert!(s.window.is_some() && s.alpha.is_none()),
            _ => assert!(s.window.is_none()),
        }
        if let (Some(a), Some(t)) = (s.alpha, s.tau_samples) {
            assert!((a * t - 1.0).abs() < 1e-9);
        }
        if s.arithmetic == "float" {
            assert!(s.stall.is_none(), "{}", s.id);
        }
        if let Some(st) = &s.stall {
            assert!(st.rising < 1 << 20 && st.falling < 1 << 20);
        }
        for step in &s.coefficient_chain {
            assert!(step.line >= 1 && !step.text.is_empty() && !step.file.is_empty());
        }
        if let Some(d) = &s.definition {
            assert!(d.line >= 1 && !d.file.is_empty());
        }
        assert!(s.noise_ratio.is_none_or(|r| r > 0.0 && r <= 1.0));
        assert!(s.dc_gain.is_some());
        assert!(
            ["constant", "spec", "adaptive", "event", "unknown"].contains(&s.rate_kind.as_str())
        );
    }
}

//! Checks where tauscan places the instances of a filter function and of a function-like
//! macro: one record per call, at the call, in the calling function, with the instance's own
//! state, and a `definition` pointing at the update inside the function or macro.
//!
//! The lines to expect are read from the fixtures' own text, so the test does not depend on
//! the fixtures' layout staying put. What each instance's update does (its gain, dead band,
//! rate and cutoff) is confirmed by execution in `tests/exec_truth.rs`; this file only
//! checks the places.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

use serde_json::Value;
use std::process::Command;

mod common;
use common::crate_root;

/// The records tauscan gives for one fixture of `fixtures/forms`.
fn records_of(fixture: &str) -> Vec<Value> {
    let output = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["list", "--format", "json", "fixtures/forms"])
            .current_dir(crate_root()),
    );
    assert!(
        matches!(output.status.code(), Some(0 | 1)),
        "tauscan exited with {:?}: {}",
        output.status.code(),
        String::from_utf8_lossy(&output.stderr)
    );
    let json: Value = serde_json::from_slice(&output.stdout).unwrap();
    json["smoothers"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["file"].as_str().map(|f| f.trim_start_matches("./")) == Some(fixture))
        .cloned()
        .collect()
}

/// The text of a fixture of `fixtures/forms`.
fn fixture_text(fixture: &str) -> String {
    std::fs::read_to_string(crate_root().join("fixtures").join("forms").join(fixture)).unwrap()
}

/// The 1-based line of the one line of `text` that contains `needle`, after `from`.
fn line_of(text: &str, needle: &str, from: usize) -> u64 {
    let hits: Vec<usize> = text
        .lines()
        .enumerate()
        .skip(from)
        .filter(|(_, line)| line.contains(needle))
        .map(|(i, _)| i + 1)
        .collect();
    assert_eq!(
        hits.len(),
        1,
        "{needle:?} should be on exactly one line: {hits:?}"
    );
    hits[0] as u64
}

/// Checks each record of `expected` (state, call text) and returns the disagreements.
fn check_instances(
    fixture: &str,
    function: &str,
    definition_line: u64,
    expected: &[(&str, String)],
) -> Vec<String> {
    let text = fixture_text(fixture);
    let records = records_of(fixture);
    let mut problems = Vec::new();
    let in_function: Vec<&Value> = records
        .iter()
        .filter(|r| r["function"].as_str() == Some(function))
        .collect();
    // Source: the fixture's text: the function makes exactly these calls.
    if in_function.len() != expected.len() {
        problems.push(format!(
            "{fixture}: {} records in {function}, the fixture calls the filter {} times there",
            in_function.len(),
            expected.len()
        ));
    }
    for (state, call) in expected {
        let call_line = line_of(&text, call, 0);
        let Some(record) = in_function
            .iter()
            .find(|r| r["state"].as_str() == Some(state))
        else {
            problems.push(format!(
                "{fixture}: no record of {function} / {state} (the call on line {call_line})"
            ));
            continue;
        };
        // Source: the fixture's text: where the call and the update are written.
        if record["line"].as_u64() != Some(call_line) {
            problems.push(format!(
                "{fixture}: {state}: line reported {}, the call is on line {call_line}",
                record["line"]
            ));
        }
        let definition = &record["definition"];
        let definition_file = definition["file"]
            .as_str()
            .map(|f| f.trim_start_matches("./"));
        if definition_file != Some(fixture) || definition["line"].as_u64() != Some(definition_line)
        {
            problems.push(format!(
                "{fixture}: {state}: definition reported {definition}, the update is on line \
                 {definition_line} of {fixture}"
            ));
        }
    }
    problems
}

#[test]
fn filter_library_instances_are_placed_at_their_calls() {
    let fixture = "filter_library.c";
    let text = fixture_text(fixture);
    // The update inside the apply function, found after the function's own line.
    let apply = line_of(&text, "float hydro_lpf_apply(", 0) as usize;
    let update = line_of(&text, "f->y += f->k * (u - f->y);", apply);
    let expected: Vec<(&str, String)> = [
        ("g_pump_flow.y", "hydro_lpf_apply(&g_pump_flow,"),
        ("g_pump_pressure.y", "hydro_lpf_apply(&g_pump_pressure,"),
        ("g_reservoir_ph.y", "hydro_lpf_apply(&g_reservoir_ph,"),
        ("g_reservoir_ec.y", "hydro_lpf_apply(&g_reservoir_ec,"),
    ]
    .into_iter()
    .map(|(state, call)| (state, call.to_string()))
    .collect();
    let problems = check_instances(fixture, "hydro_task", update, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn macro_instances_are_placed_at_their_calls() {
    let fixture = "macro_instances.c";
    let text = fixture_text(fixture);
    let definition = line_of(&text, "#define HIVE_SMOOTH(", 0);
    let expected: Vec<(&str, String)> =
        ["hive_weight_g", "hive_brood_cdeg", "hive_traffic_per_min"]
            .into_iter()
            .map(|state| (state, format!("HIVE_SMOOTH({state},")))
            .collect();
    let problems = check_instances(fixture, "hive_sample", definition, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn canal_lock_macro_calls_are_placed_at_their_calls() {
    // One expansion per function: the low-pass macro on a global and on a field through
    // the function's pointer parameter, and the eighths average that names its state
    // twice. Each is placed at its call, in the function that expands it.
    let fixture = "canal_lock.c";
    let text = fixture_text(fixture);
    let low_pass = line_of(&text, "#define LOCK_LP(", 0);
    let average = line_of(&text, "#define LOCK_AVG8(", 0);
    let calls = [
        (
            "lock_upper_sample",
            low_pass,
            "lock_upper_m",
            "LOCK_LP(lock_upper_m,",
        ),
        (
            "lock_chamber_sample",
            low_pass,
            "c->level_m",
            "LOCK_LP(c->level_m,",
        ),
        (
            "lock_paddle_sample",
            average,
            "g_lock_paddle_counts",
            "LOCK_AVG8(g_lock_paddle_counts,",
        ),
    ];
    let mut problems = Vec::new();
    for (function, definition, state, call) in calls {
        problems.extend(check_instances(
            fixture,
            function,
            definition,
            &[(state, call.to_string())],
        ));
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

//! Checks where tauscan places the instances of filter functions and macros in
//! `fixtures/instances`: calls from several functions, calls in a state machine that many
//! call paths reach, calls whose guard is false, calls on a unit test's own stack object,
//! and smoothing macros that nothing expands.
//!
//! These fixtures hold no new coefficient, only new places, so they have no execution
//! driver (`tests/exec_truth.rs` confirms the coefficients of the same update shapes in
//! `fixtures/forms`). The lines to expect are read from the fixtures' own text, so the
//! test does not depend on their layout staying put.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

mod common;
use common::crate_root;

use serde_json::Value;
use std::collections::BTreeMap;
use std::sync::OnceLock;

/// The JSON of one `tauscan list` over `fixtures/instances`, run once for all tests.
fn scan() -> &'static Value {
    static SCAN: OnceLock<Value> = OnceLock::new();
    SCAN.get_or_init(|| {
        let run = common::tauscan_in(
            &crate_root(),
            &["list", "--format", "json", "fixtures/instances"],
            common::LIMIT,
        );
        run.assert_finished();
        // 0 is clean and 1 means findings; anything else is a tool failure.
        assert!(
            matches!(run.code, Some(0 | 1)),
            "tauscan failed\n{}",
            run.context()
        );
        run.json()
    })
}

/// A record's file, relative to `fixtures/instances`.
fn file_of(record: &Value) -> &str {
    record["file"]
        .as_str()
        .unwrap_or("?")
        .trim_start_matches("./")
}

/// The records tauscan gives for one fixture of `fixtures/instances`.
fn records_of(fixture: &str) -> Vec<&'static Value> {
    scan()["smoothers"]
        .as_array()
        .unwrap_or_else(|| panic!("no smoothers array in {}", scan()))
        .iter()
        .filter(|r| file_of(r) == fixture)
        .collect()
}

fn fixture_text(fixture: &str) -> String {
    std::fs::read_to_string(crate_root().join("fixtures/instances").join(fixture)).unwrap()
}

/// The 1-based line of the one line of `text` that contains `needle`, after line `from`.
fn line_of(text: &str, needle: &str, from: u64) -> u64 {
    let hits: Vec<u64> = text
        .lines()
        .enumerate()
        .skip(from as usize)
        .filter(|(_, line)| line.contains(needle))
        .map(|(i, _)| i as u64 + 1)
        .collect();
    assert_eq!(
        hits.len(),
        1,
        "{needle:?} should be on exactly one line: {hits:?}"
    );
    hits[0]
}

/// One record, printed for failure messages.
fn shown(record: &Value) -> String {
    format!(
        "{}:{} {} / {} (macro {}, instances {}, definition {})",
        file_of(record),
        record["line"],
        record["function"],
        record["state"],
        record["macro"],
        record["instances"],
        record["definition"]
    )
}

fn shown_all(records: &[&Value]) -> String {
    records
        .iter()
        .map(|r| shown(r))
        .collect::<Vec<_>>()
        .join("\n  ")
}

/// An instance the fixture's text says is there: the calling function, the state the call
/// updates and the text of the call.
struct Expected<'a> {
    function: &'a str,
    state: &'a str,
    call: &'a str,
}

/// Checks that the records of `fixture` are exactly the filter function's own record
/// (holding `expected.len()` instances, at `update_line`) and one record per expected call,
/// at the call, in the calling function, with the call's state and a `definition` pointing
/// at the update. Returns the disagreements.
fn check_instances(
    fixture: &str,
    filter_function: &str,
    update_line: u64,
    expected: &[Expected],
) -> Vec<String> {
    let text = fixture_text(fixture);
    let records = records_of(fixture);
    let mut problems = Vec::new();
    // Source: the fixture's text: the filter function's update, and the calls that run it.
    let own: Vec<&&Value> = records
        .iter()
        .filter(|r| r["function"].as_str() == Some(filter_function))
        .collect();
    match own.as_slice() {
        [record] => {
            if record["line"].as_u64() != Some(update_line) {
                problems.push(format!(
                    "{filter_function}: its record is on line {}, the update on {update_line}",
                    record["line"]
                ));
            }
            if record["instances"].as_u64() != Some(expected.len() as u64) {
                problems.push(format!(
                    "{filter_function}: {} instances reported, the fixture has {}",
                    record["instances"],
                    expected.len()
                ));
            }
        }
        _ => problems.push(format!(
            "{fixture}: {} records in {filter_function} itself, expected its one definition",
            own.len()
        )),
    }
    if records.len() != expected.len() + 1 {
        problems.push(format!(
            "{fixture}: {} records, expected {} instances and the definition:\n  {}",
            records.len(),
            expected.len(),
            shown_all(&records)
        ));
    }
    for instance in expected {
        let call_line = line_of(&text, instance.call, 0);
        let found: Vec<&&Value> = records
            .iter()
            .filter(|r| r["line"].as_u64() == Some(call_line))
            .collect();
        let [record] = found.as_slice() else {
            problems.push(format!(
                "{fixture}: {} records on line {call_line} ({}), expected one",
                found.len(),
                instance.call
            ));
            continue;
        };
        if record["function"].as_str() != Some(instance.function)
            || record["state"].as_str() != Some(instance.state)
        {
            problems.push(format!(
                "{fixture}:{call_line}: expected {} / {}, got {}",
                instance.function,
                instance.state,
                shown(record)
            ));
        }
        let definition = &record["definition"];
        let definition_file = definition["file"]
            .as_str()
            .map(|f| f.trim_start_matches("./"));
        if definition_file != Some(fixture) || definition["line"].as_u64() != Some(update_line) {
            problems.push(format!(
                "{fixture}:{call_line}: definition {definition}, the update is on line \
                 {update_line} of {fixture}"
            ));
        }
    }
    problems
}

#[test]
fn calls_from_three_functions_are_three_instances_in_their_callers() {
    let fixture = "tram_door.c";
    let text = fixture_text(fixture);
    let apply = line_of(&text, "float door_lpf_apply(", 0);
    let update = line_of(&text, "f->y = f->y + f->k * (u - f->y);", apply);
    let expected = [
        Expected {
            function: "door_motor_task",
            state: "door_motor_amps.y",
            call: "door_lpf_apply(&door_motor_amps, amps)",
        },
        Expected {
            function: "door_position_task",
            state: "door_leaf_mm.y",
            call: "door_lpf_apply(&door_leaf_mm, leaf_mm)",
        },
        Expected {
            function: "door_curtain_task",
            state: "door_curtain_level.y",
            call: "door_lpf_apply(&door_curtain_level, level)",
        },
    ];
    let problems = check_instances(fixture, "door_lpf_apply", update, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn calls_in_a_state_machine_that_many_paths_reach_are_listed_once_each() {
    let fixture = "frame_machine.c";
    let text = fixture_text(fixture);
    let apply = line_of(&text, "float lock_lpf_apply(", 0);
    let update = line_of(&text, "f->y += f->k * (u - f->y);", apply);
    let expected = [
        Expected {
            function: "lock_on_frame",
            state: "lock_upper_cm.y",
            call: "lock_lpf_apply(&lock_upper_cm, value);",
        },
        Expected {
            function: "lock_on_frame",
            state: "lock_lower_cm.y",
            call: "lock_lpf_apply(&lock_lower_cm, value);",
        },
        Expected {
            function: "lock_on_frame",
            state: "lock_gate_deg.y",
            call: "lock_lpf_apply(&lock_gate_deg, value);",
        },
        // The same object from a second kind of frame: a call of its own, so a record of
        // its own.
        Expected {
            function: "lock_on_frame",
            state: "lock_upper_cm.y",
            call: "lock_lpf_apply(&lock_upper_cm, value * 0.1f);",
        },
    ];
    let problems = check_instances(fixture, "lock_lpf_apply", update, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn no_place_and_state_is_reported_twice() {
    // Source: docs/tauscan-list-1.schema.json and the README: a record is one update at one
    // place (the update, or the call that supplies the instance's object), so a (file, line,
    // state) appears once however many call paths reach it.
    let mut seen: BTreeMap<(String, u64, String), usize> = BTreeMap::new();
    for record in scan()["smoothers"].as_array().unwrap() {
        let key = (
            file_of(record).to_string(),
            record["line"].as_u64().unwrap_or(0),
            record["state"].as_str().unwrap_or("?").to_string(),
        );
        *seen.entry(key).or_default() += 1;
    }
    let twice: Vec<String> = seen
        .iter()
        .filter(|(_, count)| **count > 1)
        .map(|((file, line, state), count)| format!("{file}:{line} {state} ({count} times)"))
        .collect();
    assert!(twice.is_empty(), "reported more than once: {twice:?}");
}

#[test]
fn calls_whose_guard_is_false_for_every_loop_value_are_not_instances() {
    let fixture = "gimbal_axes.c";
    let text = fixture_text(fixture);
    let dterm = line_of(&text, "float gimbal_axis_dterm(", 0);
    let update = line_of(&text, "f->d += 0.125f * ((err - f->last) - f->d);", dterm);
    // Source: the fixture's text: the loop passes axes 0 to 2 and the roll call axis 0, and
    // the update runs only for axis 3; only the focus call runs it.
    let expected = [Expected {
        function: "gimbal_tick",
        state: "gimbal_focus_d.d",
        call: "gimbal_axis_dterm(&gimbal_focus_d, GIMBAL_AXIS_FOCUS, focus_err);",
    }];
    let problems = check_instances(fixture, "gimbal_axis_dterm", update, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn calls_on_a_unit_test_s_own_stack_object_are_not_instances() {
    let fixture = "hive_scale_tests.c";
    let text = fixture_text(fixture);
    let step = line_of(&text, "float hive_lp_step(", 0);
    let update = line_of(&text, "f->y += f->k * (u - f->y);", step);
    // Source: the fixture's text: the firmware's call updates a global object; the tests'
    // objects are locals that die with each test.
    let expected = [Expected {
        function: "hive_weight_sample",
        state: "hive_weight_lp.y",
        call: "hive_lp_step(&hive_weight_lp, grams)",
    }];
    let problems = check_instances(fixture, "hive_lp_step", update, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn macros_that_nothing_expands_are_listed_as_definitions() {
    // (fixture, macro name) for each smoothing macro that no code expands, in a header no
    // file includes or under a branch that no -D of this scan selects.
    let unexpanded = [
        ("macros/lock_unused.h", "LOCK_SETTLE"),
        ("macros/lock_unused.h", "LOCK_SETTLE_F"),
        ("macros/door_bench.c", "DOOR_BENCH_SMOOTH"),
        ("macros/door_bench.c", "DOOR_HEAVY_SMOOTH"),
    ];
    let mut problems = Vec::new();
    for (fixture, name) in unexpanded {
        let line = line_of(&fixture_text(fixture), &format!("#define {name}("), 0);
        let records = records_of(fixture);
        let found: Vec<&&Value> = records
            .iter()
            .filter(|r| r["macro"].as_str() == Some(name))
            .collect();
        let [record] = found.as_slice() else {
            problems.push(format!(
                "{fixture}: {} records of macro {name}, expected its one definition:\n  {}",
                found.len(),
                shown_all(&records)
            ));
            continue;
        };
        // Source: docs/tauscan-list-1.schema.json: `function` is null for a macro definition
        // that no code expands, `macro` names the macro, `instances` counts the call sites
        // listed as its instances (none); the fixture's text gives the line.
        if record["line"].as_u64() != Some(line)
            || !record["function"].is_null()
            || record["instances"].as_u64() != Some(0)
            || !record["definition"].is_null()
        {
            problems.push(format!(
                "{fixture}: expected {name} at line {line} with function null, 0 instances \
                 and no definition; got {}",
                shown(record)
            ));
        }
    }
    // Source: the doc of `Program::condition_possible` in src/index.rs: a branch known
    // never to be built (`#if 0`) is not read, so its macro is not listed.
    let never_built: Vec<&Value> = records_of("macros/door_bench.c")
        .into_iter()
        .filter(|r| r["macro"].as_str() == Some("DOOR_OLD_SMOOTH"))
        .collect();
    if !never_built.is_empty() {
        problems.push(format!(
            "DOOR_OLD_SMOOTH sits under `#if 0` and was listed: {}",
            shown_all(&never_built)
        ));
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn instances_stop_at_the_nearest_call_and_a_relay_is_no_filter_function() {
    let fixture = "relay_protocol.c";
    let text = fixture_text(fixture);
    let apply = line_of(&text, "float lock_lpf_apply(", 0);
    let update = line_of(&text, "f->y += f->k * (u - f->y);", apply);
    // Source: the fixture's text: the one call of the filter function is in `lock_relay`;
    // the calls of the relays in `lock_on_frame` pass objects to a function that is no
    // filter function, so they are not instances.
    let expected = [Expected {
        function: "lock_relay",
        state: "f->y",
        call: "lock_lpf_apply(f, x);",
    }];
    let problems = check_instances(fixture, "lock_lpf_apply", update, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn calls_whose_gain_from_a_const_table_is_zero_for_every_axis_are_not_instances() {
    let fixture = "pid_axes.c";
    let text = fixture_text(fixture);
    let apply = line_of(&text, "float gimbal_dfilt_apply(", 0);
    let update = line_of(
        &text,
        "f->d += f->a * (kd * (err - f->last) - f->d);",
        apply,
    );
    // Source: the fixture's text: every entry of the const table `gimbal_kd` is zero, so the
    // guard `kd != 0.0f` is false for each axis of the loop; FOCUS_KD is 0.3.
    let expected = [Expected {
        function: "gimbal_tick",
        state: "gimbal_focus_d.d",
        call: "gimbal_dfilt_apply(&gimbal_focus_d, FOCUS_KD, focus_err);",
    }];
    let problems = check_instances(fixture, "gimbal_dfilt_apply", update, &expected);
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

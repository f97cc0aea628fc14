//! Confirms by execution how tauscan reads a coefficient chosen by the preprocessor.
//!
//! `fixtures/forms/variants.c` defines its coefficients under `#ifdef FERMENTER_FAST_PH` /
//! `#if defined(FERMENTER_FAST_PH)` with an `#else`. This test scans it with and without
//! `-D FERMENTER_FAST_PH`, builds and runs its driver (`tests/exec/variants.drive.c`) with
//! and without `-DFERMENTER_FAST_PH`, and holds each scan's alpha against the build with the
//! same option, and each scan's `variants` against the build with the other option.
//!
//! The driver's measuring is `tests/exec/drive_main.c`'s, shared with `tests/exec_truth.rs`;
//! this file only reads its first fields (alpha and the dead band).
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

use serde_json::Value;
use std::process::Command;

mod common;
use common::crate_root;

const OPTION: &str = "FERMENTER_FAST_PH";

/// The smoothers of the fixture, with the macro whose branches choose each coefficient.
const CASES: [(&str, &str, &str); 3] = [
    ("ferm_ph_sample", "ferm_ph", "FERM_PH_ALPHA"),
    ("ferm_temp_sample", "g_ferm_vessel_cdeg", "FERM_TEMP_SHIFT"),
    (
        "ferm_gravity_sample",
        "ferm_gravity_sum",
        "FERM_GRAVITY_WINDOW",
    ),
];

/// What the driver printed for one case.
#[derive(Debug)]
struct Executed {
    integer: bool,
    scale: f64,
    alpha: f64,
    stall: Option<(f64, f64)>,
}

/// Builds and runs the driver, with `-D<OPTION>` when `defined`; returns its cases by
/// function and state.
fn execute(defined: bool) -> Vec<(String, String, Executed)> {
    let cc = std::env::var("CC").unwrap_or_else(|_| "cc".to_string());
    let exec_dir = crate_root().join("tests").join("exec");
    let build = tempfile::Builder::new()
        .prefix("tauscan-variants-")
        .tempdir()
        .unwrap();
    let binary = build.path().join("variants");
    let mut compile = Command::new(&cc);
    compile.args(["-std=c11", "-O1", "-Wall", "-Wextra", "-Werror"]);
    if defined {
        compile.arg(format!("-D{OPTION}"));
    }
    let compile = compile
        .arg(exec_dir.join("variants.drive.c"))
        .arg(exec_dir.join("drive_main.c"))
        .arg("-o")
        .arg(&binary)
        .arg("-lm")
        .current_dir(&exec_dir)
        .output()
        .unwrap_or_else(|e| panic!("the C compiler `{cc}` could not be run: {e}"));
    assert!(
        compile.status.success(),
        "variants.drive.c does not compile (defined: {defined}):\n{}",
        String::from_utf8_lossy(&compile.stderr)
    );
    let run = common::output(&mut Command::new(&binary));
    assert!(run.status.success(), "the variants driver failed: {run:?}");
    String::from_utf8_lossy(&run.stdout)
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(|line| {
            let f: Vec<&str> = line.split('\t').collect();
            assert!(f.len() >= 8, "malformed driver line {line:?}");
            let integer = f[2] == "1";
            let number = |i: usize| -> f64 { f[i].parse().unwrap() };
            let executed = Executed {
                integer,
                scale: number(3),
                alpha: number(4),
                stall: integer.then(|| (number(6), number(7))),
            };
            (f[0].to_string(), f[1].to_string(), executed)
        })
        .collect()
}

/// `tauscan list --format json` of the fixture, with `-D <OPTION>` when `defined`.
fn scan(defined: bool) -> Vec<Value> {
    let mut command = Command::new(env!("CARGO_BIN_EXE_tauscan"));
    command.args(["list", "--format", "json"]);
    if defined {
        command.args(["-D", OPTION]);
    }
    let output = common::output(
        command
            .arg("fixtures/forms/variants.c")
            .current_dir(crate_root()),
    );
    assert!(
        matches!(output.status.code(), Some(0 | 1)),
        "tauscan exited with {:?}: {}",
        output.status.code(),
        String::from_utf8_lossy(&output.stderr)
    );
    let json: Value = serde_json::from_slice(&output.stdout).unwrap();
    json["smoothers"].as_array().unwrap().clone()
}

fn executed_case<'a>(
    runs: &'a [(String, String, Executed)],
    function: &str,
    state: &str,
) -> &'a Executed {
    runs.iter()
        .find(|(f, s, _)| f == function && s == state)
        .map(|(_, _, e)| e)
        .unwrap_or_else(|| panic!("the driver does not drive {function} / {state}"))
}

/// Tolerance on an alpha: a part in a million of a float first step, or one count of the
/// scale for an integer one (see tests/exec_truth.rs).
fn tolerance(e: &Executed) -> f64 {
    if e.integer {
        1.0 / e.scale
    } else {
        1e-6 * e.alpha
    }
}

/// Holds one scan against the build with the same option and the build with the other.
fn check_scan(defined: bool, conditions: &mut Vec<String>) -> Vec<String> {
    let label = if defined { "with -D" } else { "without -D" };
    let report = scan(defined);
    let same = execute(defined);
    let other = execute(!defined);
    let mut problems = Vec::new();
    for (function, state, macro_name) in CASES {
        let this_build = executed_case(&same, function, state);
        let other_build = executed_case(&other, function, state);
        // The fixture must really choose: otherwise the checks below prove nothing.
        assert!(
            (this_build.alpha - other_build.alpha).abs() > tolerance(this_build),
            "{function}: both builds execute alpha {}",
            this_build.alpha
        );
        let Some(record) = report
            .iter()
            .find(|r| r["function"].as_str() == Some(function) && r["state"] == state)
        else {
            problems.push(format!("{label}: {function} / {state} not reported"));
            continue;
        };
        // Source: execution of the fixture with the system C compiler (cc), built with the
        // same option as the scan.
        // A moving average reports its window, whose first step from rest is 1/N.
        let reported_alpha = record["alpha"]
            .as_f64()
            .or_else(|| record["window"].as_f64().map(|n| 1.0 / n));
        match reported_alpha {
            Some(a) if (a - this_build.alpha).abs() <= tolerance(this_build) => {}
            _ => problems.push(format!(
                "{label}: {function} / {state}: alpha reported {}, executed {}",
                record["alpha"], this_build.alpha
            )),
        }
        if let Some((rising, falling)) = this_build.stall {
            // Source: execution of the fixture with the system C compiler (cc).
            let reported = (
                record["stall"]["rising"].as_f64(),
                record["stall"]["falling"].as_f64(),
            );
            if reported != (Some(rising), Some(falling)) {
                problems.push(format!(
                    "{label}: {function} / {state}: stall reported {}, executed {rising} / \
                     {falling}",
                    record["stall"]
                ));
            }
        }
        let variants = record["variants"].as_array().cloned().unwrap_or_default();
        match variants.as_slice() {
            [variant] => {
                if variant["macro"].as_str() != Some(macro_name) {
                    problems.push(format!(
                        "{label}: {function}: variant of macro {}, the fixture chooses \
                         {macro_name}",
                        variant["macro"]
                    ));
                }
                // Source: execution of the fixture with the system C compiler (cc), built
                // with the other option.
                match variant["alpha"].as_f64() {
                    Some(a) if (a - other_build.alpha).abs() <= tolerance(other_build) => {}
                    _ => problems.push(format!(
                        "{label}: {function}: variant alpha reported {}, the other build \
                         executes {}",
                        variant["alpha"], other_build.alpha
                    )),
                }
                // A window's variant carries the window: the other build's first step
                // from rest is 1/N.
                if record["form"] == "moving-average" {
                    let expected = (1.0 / other_build.alpha).round();
                    if variant["window"].as_f64() != Some(expected) {
                        problems.push(format!(
                            "{label}: {function}: variant window reported {}, the other \
                             build executes a window of {expected}",
                            variant["window"]
                        ));
                    }
                }
                let condition = variant["condition"].as_str().unwrap_or("");
                if !condition.contains(OPTION) {
                    problems.push(format!(
                        "{label}: {function}: variant condition {condition:?} does not name \
                         {OPTION}"
                    ));
                }
                conditions.push(format!("{function}\t{defined}\t{condition}"));
            }
            other => problems.push(format!(
                "{label}: {function} / {state}: variants reported {other:?}, expected the \
                 other branch of {macro_name} (alpha {} when built {})",
                other_build.alpha,
                if defined {
                    "without the option"
                } else {
                    "with it"
                }
            )),
        }
    }
    problems
}

#[test]
fn each_branch_of_the_option_is_reported_with_its_executed_alpha() {
    let mut conditions = Vec::new();
    let mut problems = check_scan(false, &mut conditions);
    problems.extend(check_scan(true, &mut conditions));
    // The other branch is a different condition in each run (the `#ifdef` one without -D,
    // the `#else` one with it).
    for (function, _, _) in CASES {
        let of_function: Vec<&str> = conditions
            .iter()
            .filter_map(|c| c.strip_prefix(&format!("{function}\t")))
            .map(|c| c.split_once('\t').map_or("", |(_, cond)| cond))
            .collect();
        if of_function.len() == 2 && of_function[0] == of_function[1] {
            problems.push(format!(
                "{function}: the variant's condition is {:?} with and without -D",
                of_function[0]
            ));
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

//! Confirms by execution what tauscan reports about the smoothers in `fixtures/forms`.
//!
//! Every `tests/exec/<case>.drive.c` includes `fixtures/forms/<case>.c` and lists its
//! smoothers as reset/step pairs. This test compiles each driver with the system C compiler
//! together with `tests/exec/drive_main.c`, runs it, and holds what the C really does (the
//! first step of the step response, where a step comes to rest, the dead band on either
//! side) against the record tauscan gives for the same file, function and state. It also
//! checks that tauscan reports nothing in those fixtures beyond the driven cases.
//!
//! The recogniser itself, the JSON schema and the simulation of truncation are tauscan's;
//! the measuring is `drive_main.c`'s. This file only runs both and compares.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

use serde_json::Value;
use std::collections::BTreeSet;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

/// What one driven case did when it ran, as printed by `drive_main.c`.
#[derive(Debug, Clone)]
struct Executed {
    /// Fixture file name relative to `fixtures/forms`, as tauscan's `file` should read.
    file: String,
    function: String,
    state: String,
    integer: bool,
    scale: f64,
    alpha: f64,
    dc_gain: f64,
    /// Rising and falling dead band in counts of the output; None for float forms.
    stall: Option<(f64, f64)>,
}

impl Executed {
    fn label(&self) -> String {
        format!("{}: {} / {}", self.file, self.function, self.state)
    }
}

fn crate_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn c_compiler() -> String {
    std::env::var("CC").unwrap_or_else(|_| "cc".to_string())
}

/// The `<case>` names of `dir/<case><suffix>`, sorted.
fn cases_in(dir: &Path, suffix: &str) -> Vec<String> {
    let mut cases: Vec<String> = std::fs::read_dir(dir)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", dir.display()))
        .map(|entry| entry.unwrap().file_name().to_string_lossy().into_owned())
        .filter_map(|name| name.strip_suffix(suffix).map(str::to_string))
        .filter(|case| !case.contains('.'))
        .collect();
    cases.sort();
    cases
}

/// Runs `tauscan list --format json <dir>` from the crate root and returns its smoothers.
fn reported_smoothers(dir: &str) -> Vec<Value> {
    let output = Command::new(env!("CARGO_BIN_EXE_tauscan"))
        .args(["list", "--format", "json", dir])
        .current_dir(crate_root())
        .output()
        .expect("tauscan could not be started");
    let stderr = String::from_utf8_lossy(&output.stderr);
    // Exit status 0 is clean and 1 means findings; 2 or a signal is a tool failure, which
    // must never pass for a result.
    let code = output.status.code();
    assert!(
        matches!(code, Some(0 | 1)),
        "tauscan list {dir} exited with {code:?}\nstderr:\n{stderr}"
    );
    let json: Value = serde_json::from_slice(&output.stdout).unwrap_or_else(|e| {
        panic!(
            "tauscan list {dir} did not print JSON: {e}\nstdout:\n{}\nstderr:\n{stderr}",
            String::from_utf8_lossy(&output.stdout)
        )
    });
    assert_eq!(json["schema"], 1, "unexpected schema in {json}");
    json["smoothers"]
        .as_array()
        .unwrap_or_else(|| panic!("no smoothers array in {json}"))
        .clone()
}

fn forms_report() -> &'static Vec<Value> {
    static REPORT: OnceLock<Vec<Value>> = OnceLock::new();
    REPORT.get_or_init(|| reported_smoothers("fixtures/forms"))
}

/// Compiles and runs every driver once for all the tests of this file.
fn executed_cases() -> &'static Vec<Executed> {
    static EXECUTED: OnceLock<Vec<Executed>> = OnceLock::new();
    EXECUTED.get_or_init(execute_all_drivers)
}

fn execute_all_drivers() -> Vec<Executed> {
    let cc = c_compiler();
    let probe = Command::new(&cc).arg("--version").output();
    assert!(
        matches!(&probe, Ok(out) if out.status.success()),
        "the C compiler `{cc}` is needed to confirm the fixtures by execution and could not \
         be run ({probe:?}); install one or set CC"
    );
    let exec_dir = crate_root().join("tests").join("exec");
    let build = tempfile::Builder::new()
        .prefix("tauscan-exec-")
        .tempdir_in(std::env::temp_dir())
        .unwrap();
    let mut all = Vec::new();
    for case in cases_in(&exec_dir, ".drive.c") {
        let binary = build.path().join(&case);
        let compile = Command::new(&cc)
            .args(["-std=c11", "-O1", "-Wall", "-Wextra", "-Werror"])
            .arg(exec_dir.join(format!("{case}.drive.c")))
            .arg(exec_dir.join("drive_main.c"))
            .arg("-o")
            .arg(&binary)
            .arg("-lm")
            .current_dir(&exec_dir)
            .output()
            .unwrap();
        assert!(
            compile.status.success(),
            "{case}.drive.c does not compile:\n{}",
            String::from_utf8_lossy(&compile.stderr)
        );
        let run = Command::new(&binary).output().unwrap();
        let stdout = String::from_utf8_lossy(&run.stdout);
        assert!(
            run.status.success(),
            "{case} driver failed ({:?}):\n{stdout}\n{}",
            run.status,
            String::from_utf8_lossy(&run.stderr)
        );
        let before = all.len();
        for line in stdout.lines().filter(|l| !l.trim().is_empty()) {
            all.push(parse_driver_line(&format!("{case}.c"), line));
        }
        assert!(all.len() > before, "{case} driver printed no case");
    }
    assert!(
        !all.is_empty(),
        "no drivers found in {}",
        exec_dir.display()
    );
    all
}

fn parse_driver_line(file: &str, line: &str) -> Executed {
    let fields: Vec<&str> = line.split('\t').collect();
    assert_eq!(fields.len(), 8, "{file}: malformed driver line {line:?}");
    let number = |i: usize| -> f64 {
        fields[i]
            .parse()
            .unwrap_or_else(|e| panic!("{file}: field {i} of {line:?}: {e}"))
    };
    let integer = fields[2] == "1";
    let stall = if integer {
        Some((number(6), number(7)))
    } else {
        None
    };
    Executed {
        file: file.to_string(),
        function: fields[0].to_string(),
        state: fields[1].to_string(),
        integer,
        scale: number(3),
        alpha: number(4),
        dc_gain: number(5),
        stall,
    }
}

/// The scan-root-relative file name of a record, with '/' separators.
fn record_file(record: &Value) -> String {
    let file = record["file"].as_str().unwrap_or("").replace('\\', "/");
    file.strip_prefix("./").unwrap_or(&file).to_string()
}

fn matches_case(record: &Value, case: &Executed) -> bool {
    record_file(record) == case.file
        && record["function"].as_str() == Some(case.function.as_str())
        && record["state"].as_str() == Some(case.state.as_str())
}

fn describe(record: &Value) -> String {
    format!(
        "{}:{} {} / {} ({}, alpha {})",
        record_file(record),
        record["line"],
        record["function"],
        record["state"],
        record["form"],
        record["alpha"]
    )
}

/// Compares one record with its execution; returns the disagreements, one per line.
fn compare(case: &Executed, record: &Value) -> Vec<String> {
    let mut problems = Vec::new();
    let label = case.label();

    let arithmetic = record["arithmetic"].as_str().unwrap_or("<missing>");
    let arithmetic_fits = if case.integer {
        arithmetic == "integer" || arithmetic == "fixed"
    } else {
        arithmetic == "float"
    };
    if !arithmetic_fits {
        problems.push(format!(
            "{label}: arithmetic reported {arithmetic:?}, but the driver drives it as {}",
            if case.integer { "integer" } else { "float" }
        ));
    }

    match record["alpha"].as_f64() {
        None => problems.push(format!(
            "{label}: alpha reported {}, executed {}",
            record["alpha"], case.alpha
        )),
        Some(alpha) => {
            // Float forms: the first step is one or two roundings of alpha * scale, far
            // inside a part in a million. Integer forms: the first step is a whole number
            // of counts; the scales are chosen so that alpha * scale is whole, and even a
            // truncated first step loses less than one count, so one count over the scale.
            let tolerance = if case.integer {
                1.0 / case.scale
            } else {
                1e-6 * case.alpha
            };
            // Source: execution of the fixture with the system C compiler (cc).
            if (alpha - case.alpha).abs() > tolerance {
                problems.push(format!(
                    "{label}: alpha reported {alpha}, executed {} (tolerance {tolerance:e})",
                    case.alpha
                ));
            }
        }
    }

    // tauscan's dc_gain is the sum of the ideal weights; the execution below confirms that
    // the fixture really is a unity-gain smoother, so 1 is the value to hold it against.
    match record["dc_gain"].as_f64() {
        // Source: execution of the fixture with the system C compiler (cc).
        Some(dc) if (dc - 1.0).abs() <= 1e-9 => {}
        _ => problems.push(format!(
            "{label}: dc_gain reported {}, executed {} (a unity-gain smoother)",
            record["dc_gain"], case.dc_gain
        )),
    }
    // A float state stops moving once alpha times its distance from the input is under
    // half an ulp, so it rests within about eps / (2 alpha) of the input (with room here
    // for the extra roundings of blend forms); an integer state rests within its dead
    // band of it.
    let executed_dc_tolerance = match case.stall {
        Some((rising, falling)) => (rising.max(falling) + 1.0) / case.scale,
        None => 4.0 * f64::from(f32::EPSILON) / case.alpha,
    };
    // Source: execution of the fixture with the system C compiler (cc).
    if (case.dc_gain - 1.0).abs() > executed_dc_tolerance {
        problems.push(format!(
            "{label}: the executed step came to rest at {} of the input, not 1 within \
             {executed_dc_tolerance:e}: the fixture or its driver is wrong",
            case.dc_gain
        ));
    }

    match case.stall {
        Some((rising, falling)) => {
            let reported_rising = record["stall"]["rising"].as_f64();
            let reported_falling = record["stall"]["falling"].as_f64();
            // Source: execution of the fixture with the system C compiler (cc).
            if reported_rising != Some(rising) || reported_falling != Some(falling) {
                problems.push(format!(
                    "{label}: stall reported {}, executed {{\"rising\": {rising}, \
                     \"falling\": {falling}}}",
                    record["stall"]
                ));
            }
        }
        None => {
            // Source: execution of the fixture with the system C compiler (cc): a float
            // state has no dead band in counts.
            if !record["stall"].is_null() {
                problems.push(format!(
                    "{label}: stall reported {} for a float form, expected null",
                    record["stall"]
                ));
            }
        }
    }
    problems
}

#[test]
fn every_forms_fixture_has_a_driver_and_every_driver_a_fixture() {
    let root = crate_root();
    let fixtures: BTreeSet<String> = cases_in(&root.join("fixtures").join("forms"), ".c")
        .into_iter()
        .collect();
    let drivers: BTreeSet<String> = cases_in(&root.join("tests").join("exec"), ".drive.c")
        .into_iter()
        .collect();
    assert!(
        fixtures.len() >= 12,
        "only {} forms fixtures: {fixtures:?}",
        fixtures.len()
    );
    let undriven: Vec<_> = fixtures.difference(&drivers).collect();
    let orphans: Vec<_> = drivers.difference(&fixtures).collect();
    assert!(
        undriven.is_empty() && orphans.is_empty(),
        "fixtures without a driver: {undriven:?}; drivers without a fixture: {orphans:?}"
    );
}

#[test]
fn executed_figures_match_reported_figures() {
    let executed = executed_cases();
    let report = forms_report();
    let mut problems = Vec::new();
    for case in executed {
        let records: Vec<&Value> = report.iter().filter(|r| matches_case(r, case)).collect();
        match records.as_slice() {
            [] => {
                let same_function: Vec<String> = report
                    .iter()
                    .filter(|r| {
                        record_file(r) == case.file
                            && r["function"].as_str() == Some(case.function.as_str())
                    })
                    .map(describe)
                    .collect();
                problems.push(format!(
                    "{}: not reported (records in the same function: {same_function:?})",
                    case.label()
                ));
            }
            [record] => problems.extend(compare(case, record)),
            many => problems.push(format!(
                "{}: reported {} times, expected once: {:?}",
                case.label(),
                many.len(),
                many.iter().map(|r| describe(r)).collect::<Vec<_>>()
            )),
        }
    }
    let mut message = String::new();
    for problem in &problems {
        let _ = writeln!(message, "  {problem}");
    }
    assert!(
        problems.is_empty(),
        "{} disagreement(s) between tauscan and execution over {} cases:\n{message}",
        problems.len(),
        executed.len()
    );
}

#[test]
fn nothing_is_reported_in_the_forms_beyond_the_driven_cases() {
    let executed = executed_cases();
    let extras: Vec<String> = forms_report()
        .iter()
        .filter(|record| !executed.iter().any(|case| matches_case(record, case)))
        .map(describe)
        .collect();
    // Source: execution of the fixture with the system C compiler (cc): the driven cases
    // are every smoother the fixtures hold; their other self-references (counters, a ramp,
    // a slew limiter) are not smoothers.
    assert!(
        extras.is_empty(),
        "reported but not a driven smoother:\n  {}",
        extras.join("\n  ")
    );
}

//! Confirms by execution the hazards that five rules of `tauscan check` report about
//! coefficients and states: `coefficient-truncated`, `dc-gain-not-one`,
//! `coefficient-out-of-range`, `state-not-persistent` and `float-state-absorbs-updates`.
//!
//! Each rule has a failing fixture and a passing twin in `fixtures/rules/<id>/{fail,pass}`
//! and one driver, `tests/rules_exec_coefficients/<id>.drive.c`, which includes the
//! fixture's C by name from the include path. This test compiles the driver once against
//! each twin with the system C compiler, runs it, and reads the `key=value` lines it
//! prints: the failing twin must show the hazard (a frozen state, a gain of 2 at rest, an
//! overshoot, a state that forgets, a state that ignores a small change) and the passing
//! twin must not. It then runs `tauscan check --format json` on both folders: the rule's
//! finding must stand at the right file and line of the failing twin, agree with what the
//! execution measured, and be absent from the passing twin.
//!
//! The rules themselves are tauscan's and the measuring is the drivers'; this file only
//! runs both and compares.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

use serde_json::Value;
use std::collections::BTreeMap;
use std::process::Command;

mod common;
use common::crate_root;

fn c_compiler() -> String {
    std::env::var("CC").unwrap_or_else(|_| "cc".to_string())
}

/// What one driver printed: every `key=value` line as a number.
struct Executed {
    label: String,
    values: BTreeMap<String, f64>,
}

impl Executed {
    fn get(&self, key: &str) -> f64 {
        *self
            .values
            .get(key)
            .unwrap_or_else(|| panic!("{}: the driver printed no `{key}`", self.label))
    }
}

/// Compiles `tests/rules_exec_coefficients/<rule>.drive.c` against the `twin` folder of the
/// rule's fixtures, runs it and reads its output.
fn execute(rule: &str, twin: &str) -> Executed {
    let cc = c_compiler();
    let label = format!("{rule}/{twin}");
    let fixture = crate_root().join("fixtures/rules").join(rule).join(twin);
    let driver = crate_root()
        .join("tests/rules_exec_coefficients")
        .join(format!("{rule}.drive.c"));
    let build = tempfile::Builder::new()
        .prefix("tauscan-rules-exec-")
        .tempdir_in(std::env::temp_dir())
        .unwrap();
    let binary = build.path().join("drive");
    // No contraction of a*b+c into one fused rounding (C11 6.5p8 allows it; GCC does it
    // by default on targets with FMA): every operation rounds on its own, as tauscan
    // simulates it.
    let compile = Command::new(&cc)
        .args(["-std=c11", "-O1", "-ffp-contract=off", "-Wall", "-Wextra", "-Werror"])
        .arg("-I")
        .arg(&fixture)
        .arg(&driver)
        .arg("-o")
        .arg(&binary)
        .arg("-lm")
        .output()
        .unwrap_or_else(|e| {
            panic!("the C compiler `{cc}` is needed to run the fixtures and could not be started: {e}; install one or set CC")
        });
    assert!(
        compile.status.success(),
        "{label}: the driver does not compile:\n{}",
        String::from_utf8_lossy(&compile.stderr)
    );
    let run = common::output(&mut Command::new(&binary));
    let stdout = String::from_utf8_lossy(&run.stdout).into_owned();
    assert!(
        run.status.success(),
        "{label}: the driver failed ({:?})",
        run.status
    );
    let mut values = BTreeMap::new();
    for line in stdout.lines().filter(|l| !l.trim().is_empty()) {
        let (key, value) = line
            .split_once('=')
            .unwrap_or_else(|| panic!("{label}: malformed driver line {line:?}"));
        let value: f64 = value
            .trim()
            .parse()
            .unwrap_or_else(|e| panic!("{label}: {line:?}: {e}"));
        values.insert(key.to_string(), value);
    }
    assert!(!values.is_empty(), "{label}: the driver printed nothing");
    Executed { label, values }
}

/// What `tauscan check --format json` says about one twin: its findings and smoothers.
struct Checked {
    label: String,
    findings: Vec<Value>,
    smoothers: Vec<Value>,
}

fn tauscan_check(rule: &str, twin: &str) -> Checked {
    let dir = format!("fixtures/rules/{rule}/{twin}");
    let output = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "json", &dir])
            .current_dir(crate_root()),
    );
    let stderr = String::from_utf8_lossy(&output.stderr);
    // 0 is clean and 1 means findings; 2 or a signal is a tool failure.
    let code = output.status.code();
    assert!(
        matches!(code, Some(0 | 1)),
        "tauscan check {dir} exited with {code:?}\nstderr:\n{stderr}"
    );
    let json: Value = serde_json::from_slice(&output.stdout)
        .unwrap_or_else(|e| panic!("tauscan check {dir} did not print JSON: {e}\n{stderr}"));
    assert_eq!(json["schema"], 1, "unexpected schema in {json}");
    Checked {
        label: dir,
        findings: json["findings"].as_array().unwrap().clone(),
        smoothers: json["smoothers"].as_array().unwrap().clone(),
    }
}

impl Checked {
    fn of_rule(&self, rule: &str) -> Vec<&Value> {
        self.findings.iter().filter(|f| f["rule"] == rule).collect()
    }

    /// The one finding of `rule` at `file:line`, as a message.
    fn finding_at(&self, rule: &str, file: &str, line: u64) -> String {
        let here: Vec<&Value> = self
            .of_rule(rule)
            .into_iter()
            .filter(|f| f["file"] == file && f["line"] == line)
            .collect();
        assert_eq!(
            here.len(),
            1,
            "{}: expected one {rule} finding at {file}:{line}, got {:#?}",
            self.label,
            self.findings
        );
        here[0]["message"].as_str().unwrap().to_string()
    }

    fn assert_clean_of(&self, rule: &str) {
        assert!(
            self.of_rule(rule).is_empty(),
            "{}: the passing twin has {rule} findings: {:#?}",
            self.label,
            self.of_rule(rule)
        );
    }

    fn smoother_in(&self, file: &str) -> &Value {
        self.smoothers
            .iter()
            .find(|s| s["file"] == file)
            .unwrap_or_else(|| panic!("{}: no smoother listed in {file}", self.label))
    }
}

/// The number that follows `after` in `message` (`"smaller than 62.6 g"` gives 62.6).
fn number_after(message: &str, after: &str) -> f64 {
    let rest = message
        .split_once(after)
        .unwrap_or_else(|| panic!("{after:?} not in {message:?}"))
        .1;
    let text: String = rest
        .chars()
        .take_while(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e'))
        .collect();
    text.parse()
        .unwrap_or_else(|e| panic!("no number after {after:?} in {message:?}: {e}"))
}

fn relative_close(a: f64, b: f64, tolerance: f64) -> bool {
    (a - b).abs() <= tolerance * a.abs().max(b.abs())
}

#[test]
fn coefficient_truncated_freezes_the_kiln_and_shortens_the_hub() {
    const RULE: &str = "coefficient-truncated";
    let fail = execute(RULE, "fail");
    // Source: execution of the fixture with the system C compiler (cc). C11 6.5.5p6: 1/8
    // is computed in int and truncated to 0 before the conversion to float, so the kiln
    // state never moves: 1000 ticks at 1200 C leave it at its 20 C start, exactly.
    assert_eq!(fail.get("kiln_after_1000"), fail.get("kiln_start"));
    assert_eq!(fail.get("kiln_first_step"), 0.0);
    // Source: execution with cc. C11 6.5.5p6: 1500 / 400 is 3, so alpha is 1/3, not the
    // 1/3.75 = 0.2667 the text means.
    let hub_alpha = fail.get("hub_first_step");
    assert!(relative_close(hub_alpha, 1.0 / 3.0, 1e-6), "{hub_alpha}");

    let pass = execute(RULE, "pass");
    // Source: execution with cc: with a float operand the kiln follows (after 1000 ticks
    // (7/8)^1000 of the step is left, nothing) and the hub's first step is 1/3.75.
    assert!((pass.get("kiln_after_1000") - 1200.0).abs() < 0.01);
    assert!(relative_close(pass.get("kiln_first_step"), 0.125, 1e-6));
    assert!(relative_close(pass.get("hub_first_step"), 1.0 / 3.75, 1e-6));

    let checked = tauscan_check(RULE, "fail");
    let kiln = checked.finding_at(RULE, "kiln.c", 8);
    assert!(
        kiln.starts_with("`kiln_alpha = 1 / 8` is 0 in C") && kiln.contains("0.125 was meant"),
        "{kiln}"
    );
    assert!(kiln.ends_with("the filter never moves"), "{kiln}");
    let hub = checked.finding_at(RULE, "hub.c", 11);
    assert!(hub.contains("is 3 in C"), "{hub}");
    // The alpha the finding says C applies is the one the execution measured.
    let said = number_after(&hub, "alpha is ");
    assert!(
        relative_close(said, hub_alpha, 5e-3),
        "{hub} vs {hub_alpha}"
    );
    let listed = checked.smoother_in("hub.c")["alpha"].as_f64().unwrap();
    assert!(
        relative_close(listed, hub_alpha, 1e-6),
        "{listed} vs {hub_alpha}"
    );
    tauscan_check(RULE, "pass").assert_clean_of(RULE);
}

#[test]
fn dc_gain_not_one_doubles_a_steady_pressure() {
    const RULE: &str = "dc-gain-not-one";
    let fail = execute(RULE, "fail");
    // Source: execution of the fixture with the system C compiler (cc): after 2000
    // samples of 300 kPa the state has stopped moving at twice the input (binary32
    // rounding of 0.9f and 0.2f keeps it a few millionths short of 2).
    assert_eq!(fail.get("settled"), 1.0);
    let gain = fail.get("gain");
    assert!((gain - 2.0).abs() < 1e-4, "{gain}");
    let pass = execute(RULE, "pass");
    // Source: execution with cc: with weights 0.9 and 0.1 the steady pressure reads as
    // itself.
    assert!(
        (pass.get("gain") - 1.0).abs() < 1e-4,
        "{}",
        pass.get("gain")
    );

    let checked = tauscan_check(RULE, "fail");
    let message = checked.finding_at(RULE, "manifold.c", 7);
    let said = number_after(&message, "DC gain ");
    assert!(relative_close(said, gain, 5e-3), "{message} vs {gain}");
    assert!(message.contains("+100 %"), "{message}");
    let listed = checked.smoother_in("manifold.c")["dc_gain"]
        .as_f64()
        .unwrap();
    assert!(relative_close(listed, gain, 1e-5), "{listed} vs {gain}");
    tauscan_check(RULE, "pass").assert_clean_of(RULE);
}

#[test]
fn coefficient_out_of_range_overshoots_and_rings() {
    const RULE: &str = "coefficient-out-of-range";
    let steps =
        |e: &Executed| -> Vec<f64> { (1..=8).map(|i| e.get(&format!("step{i}"))).collect() };
    let fail = steps(&execute(RULE, "fail"));
    // Source: execution of the fixture with the system C compiler (cc): a step to 100 %
    // gives 150 % first, and the error to the input changes sign on every update.
    assert_eq!(fail[0], 150.0);
    for pair in fail.windows(2) {
        assert!(
            (pair[0] - 100.0) * (pair[1] - 100.0) < 0.0,
            "the error keeps its sign: {fail:?}"
        );
    }
    let pass = steps(&execute(RULE, "pass"));
    // Source: execution with cc: with alpha 0.5 the state rises toward 100 % from below
    // and never passes it.
    assert!(pass.windows(2).all(|p| p[0] < p[1]), "{pass:?}");
    assert!(pass.iter().all(|v| *v <= 100.0), "{pass:?}");

    let checked = tauscan_check(RULE, "fail");
    let message = checked.finding_at(RULE, "vent.c", 7);
    // The overshoot the finding states is the executed one: 150 % of a 100 % step.
    let said = number_after(&message, "overshoots the input by ");
    assert!(relative_close(said, fail[0] - 100.0, 1e-9), "{message}");
    tauscan_check(RULE, "pass").assert_clean_of(RULE);
}

#[test]
fn state_not_persistent_forgets_between_calls() {
    const RULE: &str = "state-not-persistent";
    let fail = execute(RULE, "fail");
    // Source: execution of the fixture with the system C compiler (cc): the local state
    // restarts at 4 C on every call, so two calls with the same input give the same first
    // step, and after 100 calls the output is still that first step, far from 10 C.
    assert_eq!(fail.get("first"), fail.get("second"));
    assert_eq!(fail.get("after_100"), fail.get("first"));
    assert!((fail.get("first") - 4.6).abs() < 1e-5);
    let pass = execute(RULE, "pass");
    // Source: execution with cc: a static state goes on from where it was and approaches
    // the input (1 - 0.9^100 of the way).
    assert!(pass.get("second") > pass.get("first"));
    assert!(
        (pass.get("after_100") - 10.0).abs() < 1e-3,
        "{}",
        pass.get("after_100")
    );

    let checked = tauscan_check(RULE, "fail");
    let message = checked.finding_at(RULE, "coldroom.c", 6);
    assert!(
        message.starts_with("`smoothed_c` is a plain local of coldroom_probe_smooth()"),
        "{message}"
    );
    // The passing twin also holds a block filter with a local state inside a loop: it is
    // listed, and not reported.
    let pass_checked = tauscan_check(RULE, "pass");
    assert_eq!(
        pass_checked.smoothers.len(),
        2,
        "{:#?}",
        pass_checked.smoothers
    );
    pass_checked.assert_clean_of(RULE);
}

#[test]
fn float_state_absorbs_updates_ignores_fifty_grams() {
    const RULE: &str = "float-state-absorbs-updates";
    // The fixture's spec: the load cell resolves 0.5 g.
    let resolution = 0.5;
    let fail = execute(RULE, "fail");
    // Source: execution of the fixture with the system C compiler (cc), which follows
    // IEEE 754 binary32 rounding: from rest at 1.2e6 g the float state moves only once the
    // input drops by 62.625 g, and 10000 updates 50 g below leave it exactly unchanged.
    let threshold = fail.get("threshold");
    assert!(threshold > resolution * 100.0, "{threshold}");
    assert_eq!(fail.get("after_50g"), 1_200_000.0);
    let pass = execute(RULE, "pass");
    // Source: execution with cc: a double state moves with the smallest change the float
    // input can carry (one binary32 step near 1.2e6, 0.125 g) and follows the 50 g drop.
    assert!(
        pass.get("threshold") <= resolution,
        "{}",
        pass.get("threshold")
    );
    assert!((pass.get("after_50g") - 1_199_950.0).abs() < 0.01);

    let checked = tauscan_check(RULE, "fail");
    let message = checked.finding_at(RULE, "hive.c", 8);
    // The smallest change the finding names is the executed one (to its three digits).
    let said = number_after(&message, "smaller than ");
    assert!(
        relative_close(said, threshold, 5e-3),
        "{message} vs {threshold}"
    );
    assert!(message.contains("resolves 0.5 g"), "{message}");
    tauscan_check(RULE, "pass").assert_clean_of(RULE);
}

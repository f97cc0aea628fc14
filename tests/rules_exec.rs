//! Shows by execution the hazards that two rules of `tauscan check` report, and that
//! tauscan reports them on the failing fixture, at the right file and line, with the values
//! the execution gives, and not on its passing twin.
//!
//! Each `tests/rules_exec/<rule-id>.drive.c` includes the C of `fixtures/rules/<rule-id>/`
//! `fail/` or `pass/` (chosen by `-I`, with TWIN_FAIL or TWIN_PASS picking the matching
//! transcription for a 16-bit `int`, which this machine cannot compile for). This file
//! compiles each driver with the system C compiler, runs it, reads what it printed, and
//! holds it against `tauscan check --format json` on the same folder. The drivers print the
//! fixture line each transcription stands for; the tests check that the fixture holds that
//! line, and take the expected finding line from it.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

use serde_json::Value;
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::Command;

mod common;
use common::crate_root;

fn c_compiler() -> String {
    std::env::var("CC").unwrap_or_else(|_| "cc".to_string())
}

/// One update the driver ran, as it printed it.
#[derive(Debug, Clone, PartialEq)]
struct Case {
    name: String,
    how: String,
    state: i128,
    input: i128,
    after: i128,
    /// The first intermediate its C type could not hold, computed wider (integer-overflow).
    wide: Option<i128>,
}

/// What one run of a driver printed and how it ended.
#[derive(Debug)]
struct Driven {
    /// Fixture file name to the update line the driver stands for.
    lines: BTreeMap<String, String>,
    cases: Vec<Case>,
    /// `wide NAME VALUE` lines: an intermediate formed in 64 bits before a native run.
    wide: BTreeMap<String, i128>,
    success: bool,
    stderr: String,
}

impl Driven {
    fn case(&self, name: &str, how: &str) -> Option<&Case> {
        self.cases.iter().find(|c| c.name == name && c.how == how)
    }

    fn expect_case(&self, name: &str, how: &str) -> &Case {
        self.case(name, how)
            .unwrap_or_else(|| panic!("the driver printed no {name} {how} case: {self:?}"))
    }
}

fn fixture_dir(rule: &str, twin: &str) -> PathBuf {
    crate_root().join("fixtures/rules").join(rule).join(twin)
}

/// Compiles `tests/rules_exec/<rule>.drive.c` against the `twin` folder and runs it.
fn drive(rule: &str, twin: &str, sanitize: bool) -> Driven {
    let cc = c_compiler();
    let probe = Command::new(&cc).arg("--version").output();
    assert!(
        matches!(&probe, Ok(out) if out.status.success()),
        "the C compiler `{cc}` is needed to show the hazards by execution and could not be \
         run ({probe:?}); install one or set CC"
    );
    let build = tempfile::Builder::new()
        .prefix("tauscan-rules-exec-")
        .tempdir_in(std::env::temp_dir())
        .unwrap();
    let binary = build.path().join(format!("{rule}-{twin}"));
    let mut compile = Command::new(&cc);
    compile
        .args(["-std=c11", "-O1", "-Wall", "-Wextra", "-Werror"])
        .arg(format!("-DTWIN_{}", twin.to_uppercase()))
        .arg("-I")
        .arg(fixture_dir(rule, twin));
    if sanitize {
        compile.args([
            "-fsanitize=signed-integer-overflow",
            "-fno-sanitize-recover",
        ]);
    }
    let compiled = compile
        .arg(
            crate_root()
                .join("tests/rules_exec")
                .join(format!("{rule}.drive.c")),
        )
        .arg("-o")
        .arg(&binary)
        .output()
        .unwrap();
    assert!(
        compiled.status.success(),
        "{rule}.drive.c does not compile against {twin}/:\n{}",
        String::from_utf8_lossy(&compiled.stderr)
    );
    let run = common::output(&mut Command::new(&binary));
    let stdout = String::from_utf8_lossy(&run.stdout).into_owned();
    let mut driven = Driven {
        lines: BTreeMap::new(),
        cases: Vec::new(),
        wide: BTreeMap::new(),
        success: run.status.success(),
        stderr: String::from_utf8_lossy(&run.stderr).into_owned(),
    };
    let number = |field: &str| -> i128 {
        field
            .parse()
            .unwrap_or_else(|e| panic!("{rule} driver: {field:?} in {stdout:?}: {e}"))
    };
    for line in stdout.lines().filter(|l| !l.trim().is_empty()) {
        let fields: Vec<&str> = line.split('\t').collect();
        match fields.as_slice() {
            ["line", file, text] => {
                driven.lines.insert(file.to_string(), text.to_string());
            }
            ["wide", name, value] => {
                driven.wide.insert(name.to_string(), number(value));
            }
            ["case", name, how, state, input, after, rest @ ..] => driven.cases.push(Case {
                name: name.to_string(),
                how: how.to_string(),
                state: number(state),
                input: number(input),
                after: number(after),
                wide: rest.first().filter(|w| **w != "-").map(|w| number(w)),
            }),
            _ => panic!("{rule} driver: malformed line {line:?}"),
        }
    }
    assert!(
        !driven.lines.is_empty(),
        "{rule} driver printed nothing: {stdout:?}"
    );
    driven
}

/// Runs `tauscan check --format json` on a fixture folder and returns every finding.
fn findings(rule: &str, twin: &str, extra: &[&str]) -> Vec<Value> {
    let dir = format!("fixtures/rules/{rule}/{twin}");
    let output = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "json"])
            .args(extra)
            .arg(&dir)
            .current_dir(crate_root()),
    );
    let stderr = String::from_utf8_lossy(&output.stderr);
    // 0 is clean and 1 means findings; 2 or a signal is a tool failure, never a result.
    assert!(
        matches!(output.status.code(), Some(0 | 1)),
        "tauscan check {dir} exited with {:?}\nstderr:\n{stderr}",
        output.status.code()
    );
    let json: Value = serde_json::from_slice(&output.stdout).unwrap_or_else(|e| {
        panic!(
            "tauscan check {dir} did not print JSON: {e}\nstdout:\n{}\nstderr:\n{stderr}",
            String::from_utf8_lossy(&output.stdout)
        )
    });
    assert_eq!(json["schema"], 1, "unexpected schema in {json}");
    json["findings"]
        .as_array()
        .unwrap_or_else(|| panic!("no findings array in {json}"))
        .clone()
}

fn file_of(finding: &Value) -> String {
    let file = finding["file"].as_str().unwrap_or("").replace('\\', "/");
    file.strip_prefix("./").unwrap_or(&file).to_string()
}

/// The findings of one rule, as (file, line, message).
fn of_rule(all: &[Value], rule: &str) -> Vec<(String, u64, String)> {
    let mut found: Vec<(String, u64, String)> = all
        .iter()
        .filter(|f| f["rule"].as_str() == Some(rule))
        .map(|f| {
            (
                file_of(f),
                f["line"].as_u64().unwrap_or(0),
                f["message"].as_str().unwrap_or("").to_string(),
            )
        })
        .collect();
    found.sort();
    found
}

/// The 1-based line of `text` in a fixture file; the fixture must hold it exactly once.
fn line_of(rule: &str, twin: &str, file: &str, text: &str) -> u64 {
    let path = fixture_dir(rule, twin).join(file);
    let source = std::fs::read_to_string(&path).unwrap();
    let hits: Vec<usize> = source
        .lines()
        .enumerate()
        .filter(|(_, l)| l.trim() == text)
        .map(|(i, _)| i + 1)
        .collect();
    assert_eq!(
        hits.len(),
        1,
        "{} must hold the line the driver transcribes, once: {text:?}",
        path.display()
    );
    hits[0] as u64
}

/// The finding of `rule` at `file`, checked to be at the driver's line for that file.
fn finding_at<'a>(
    found: &'a [(String, u64, String)],
    driven: &Driven,
    rule: &str,
    file: &str,
) -> &'a str {
    let text = driven
        .lines
        .get(file)
        .unwrap_or_else(|| panic!("the driver names no line of {file}"));
    let line = line_of(rule, "fail", file, text);
    let hit = found
        .iter()
        .find(|(f, _, _)| f == file)
        .unwrap_or_else(|| panic!("no {rule} finding in {file}; found {found:?}"));
    assert_eq!(
        hit.1, line,
        "{rule} in {file} at line {}, the update is at {line}",
        hit.1
    );
    &hit.2
}

mod unsigned_difference_wraps {
    use super::*;

    const RULE: &str = "unsigned-difference-wraps";

    /// A smoother that falls toward a lower input: it ends below where it was and not
    /// below the input.
    fn falls(c: &Case) -> bool {
        c.input < c.state && c.after < c.state && c.after >= c.input
    }

    #[test]
    fn the_failing_fixture_leaps_when_the_input_falls_and_tauscan_says_where_and_to_what() {
        let driven = drive(RULE, "fail", false);
        assert!(driven.success, "{}", driven.stderr);
        // Source: execution of the fixture with the system C compiler (cc): a uint32_t state
        // at the top of a 24-bit range, handed 0, ends above where it was.
        let kiln = driven.expect_case("kiln_thermo", "native");
        assert!(
            kiln.input < kiln.state && kiln.after > kiln.state,
            "the kiln state did not leap: {kiln:?}"
        );
        // Source: execution of the fixture's line transcribed with 16-bit int rules (C11
        // 6.3.1.1, 6.2.5) with the system C compiler (cc).
        let hub = driven.expect_case("hub_torque", "int16");
        assert!(
            hub.input < hub.state && hub.after > hub.state,
            "the 16-bit hub state did not leap: {hub:?}"
        );

        let found = of_rule(&findings(RULE, "fail", &[]), RULE);
        assert_eq!(found.len(), 2, "{found:?}");
        for (file, executed) in [("kiln_thermo.c", kiln), ("hub_torque.c", hub)] {
            let message = finding_at(&found, &driven, RULE, file);
            // Source: execution of the fixture with the system C compiler (cc): tauscan's
            // values are the ones the C gives.
            let values = format!(
                "with the state at {} and the input at {}",
                executed.state, executed.input
            );
            let leap = format!("leaps to {} instead of falling", executed.after);
            assert!(
                message.contains(&values) && message.contains(&leap),
                "{file}: {message:?} does not say {values:?} and {leap:?}"
            );
        }
    }

    #[test]
    fn the_passing_twin_falls_and_tauscan_is_silent() {
        let driven = drive(RULE, "pass", false);
        assert!(driven.success, "{}", driven.stderr);
        assert_eq!(driven.cases.len(), 3, "{driven:?}");
        for case in &driven.cases {
            // Source: execution of the fixture with the system C compiler (cc), and for the
            // `int16` case of its line transcribed with 16-bit int rules (C11 6.3.1.8).
            assert!(falls(case), "the passing twin did not fall: {case:?}");
        }
        for (file, text) in &driven.lines {
            line_of(RULE, "pass", file, text);
        }
        let found = of_rule(&findings(RULE, "pass", &[]), RULE);
        assert!(found.is_empty(), "reported on the passing twin: {found:?}");
    }

    #[test]
    fn uint16_wraps_only_where_int_is_sixteen_bits() {
        // Source: execution of the fixture with the system C compiler (cc), whose int is 32
        // bits: there uint16_t promotes to signed int (C11 6.3.1.1) and the same line falls.
        let driven = drive(RULE, "fail", false);
        let native = driven.expect_case("hub_torque", "native");
        assert!(
            falls(native),
            "on a 32-bit int the hub did not fall: {native:?}"
        );
        // Source: C11 6.3.1.1: uint32_t is never promoted, on either width.
        let found = of_rule(&findings(RULE, "fail", &["--int-bits", "32"]), RULE);
        let files: Vec<&str> = found.iter().map(|(f, _, _)| f.as_str()).collect();
        assert_eq!(files, ["kiln_thermo.c"], "{found:?}");
    }
}

mod integer_overflow {
    use super::*;

    const RULE: &str = "integer-overflow";

    #[test]
    fn the_failing_fixture_overflows_and_tauscan_says_where_and_by_how_much() {
        let driven = drive(RULE, "fail", true);
        // Source: execution of the fixture's line transcribed with 16-bit int rules (C11
        // 6.3.1.1, 6.5p5) with the system C compiler (cc): the product, formed in 64 bits,
        // is past 32767, and the wrapped result throws the state off its rest.
        let hub = driven.expect_case("hub_current", "int16");
        let wide = hub
            .wide
            .unwrap_or_else(|| panic!("no 16-bit overflow seen: {hub:?}"));
        assert!(wide > i128::from(i16::MAX), "{hub:?}");
        assert_ne!(hub.after, hub.input, "the state stayed at rest: {hub:?}");
        // Source: execution of the fixture with the system C compiler (cc) and
        // -fsanitize=signed-integer-overflow -fno-sanitize-recover: the run stops at the
        // overflow of the beehive product.
        assert!(
            !driven.success,
            "the beehive run was not stopped: {driven:?}"
        );
        assert!(
            driven.stderr.contains("signed integer overflow")
                && driven.stderr.contains("hive_weight.c")
                && driven.stderr.contains("16777215 * 255"),
            "no sanitizer report of the beehive product: {}",
            driven.stderr
        );
        assert!(driven.case("hive_weight", "native").is_none(), "{driven:?}");
        let hive_wide = *driven.wide.get("hive_weight").unwrap();
        assert!(hive_wide > i128::from(i32::MAX), "{driven:?}");

        let found = of_rule(&findings(RULE, "fail", &[]), RULE);
        assert_eq!(found.len(), 2, "{found:?}");
        // Source: execution, as above: tauscan's values are the ones the C gives.
        let message = finding_at(&found, &driven, RULE, "hub_current.c");
        for expected in [
            format!(
                "with the state at {} and the input at {}",
                hub.state, hub.input
            ),
            format!("comes to {wide}"),
            format!("the state becomes {}", hub.after),
        ] {
            assert!(
                message.contains(&expected),
                "{message:?} lacks {expected:?}"
            );
        }
        let message = finding_at(&found, &driven, RULE, "hive_weight.c");
        for expected in [
            "with the state at 16777215 and the input at 16777215".to_string(),
            format!("comes to {hive_wide}"),
        ] {
            assert!(
                message.contains(&expected),
                "{message:?} lacks {expected:?}"
            );
        }
    }

    #[test]
    fn the_passing_twin_stays_at_rest_and_tauscan_is_silent() {
        let driven = drive(RULE, "pass", true);
        // Source: execution of the fixture with the system C compiler (cc) and the
        // sanitizer, and of its line transcribed with 16-bit int rules: no intermediate
        // leaves its type, and a state at rest at the top stays there.
        assert!(driven.success, "{}", driven.stderr);
        assert!(
            !driven.stderr.contains("runtime error"),
            "{}",
            driven.stderr
        );
        assert_eq!(driven.cases.len(), 3, "{driven:?}");
        for case in &driven.cases {
            assert_eq!(case.wide, None, "{case:?}");
            assert_eq!(case.after, case.input, "left its rest: {case:?}");
        }
        for (file, text) in &driven.lines {
            line_of(RULE, "pass", file, text);
        }
        let found = of_rule(&findings(RULE, "pass", &[]), RULE);
        assert!(found.is_empty(), "reported on the passing twin: {found:?}");
    }

    #[test]
    fn the_sixteen_bit_product_overflows_only_where_int_is_sixteen_bits() {
        // Source: execution of the fixture with the system C compiler (cc), whose int is 32
        // bits: there the product 4095 * 15 fits and the state stays at rest.
        let driven = drive(RULE, "fail", true);
        let native = driven.expect_case("hub_current", "native");
        assert_eq!(
            (native.wide, native.after),
            (None, native.input),
            "{native:?}"
        );
        // Source: C11 6.3.1.1: int32_t arithmetic is 32 bits on either width.
        let found = of_rule(&findings(RULE, "fail", &["--int-bits", "32"]), RULE);
        let files: Vec<&str> = found.iter().map(|(f, _, _)| f.as_str()).collect();
        assert_eq!(files, ["hive_weight.c"], "{found:?}");
    }
}

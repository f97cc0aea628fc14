//! Confirms by execution what tauscan reports about the smoothers in `fixtures/forms`.
//!
//! Every `tests/exec/<case>.drive.c` includes `fixtures/forms/<case>.c` (or the files of
//! the folder `fixtures/forms/<case>/`) and lists its smoothers as reset/step pairs. This test compiles each driver with the system C compiler
//! together with `tests/exec/drive_main.c`, runs it, and holds what the C really does (the
//! first step of the step response, where a step comes to rest, the dead band on either
//! side) against the record tauscan gives for the same file, function and state. It also
//! checks that tauscan reports nothing in those fixtures beyond the driven cases.
//!
//! Some cases carry more (see `tests/exec/drive.h`): a moving average's executed window, a
//! cascade's executed settling and ramp lag, a gain measured at two run-time time steps, the
//! rate the fixture's own constants give. Those are held against the window, the `cascade`
//! figures, the adaptive coefficient, and the rate and cutoff of the same record.
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
use std::path::Path;
use std::process::Command;
use std::sync::OnceLock;

mod common;
use common::crate_root;

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
    /// For a moving average: the update at which a step from rest first came out whole.
    window: Option<u32>,
    /// For the last stage of a cascade: what the whole chain did.
    chain: Option<ExecutedChain>,
    /// For a gain that follows a run-time time step: the first step under the other step.
    alpha_alt: Option<f64>,
    /// The update rate the fixture's own constants give, when they give one.
    rate_hz: Option<f64>,
    /// For a gain a design law computes: the period in seconds the driver configured.
    design_dt_s: Option<f64>,
}

/// What a whole cascade did when it ran, as printed by `drive_main.c`.
#[derive(Debug, Clone)]
struct ExecutedChain {
    stages: usize,
    /// Updates (the first counted as 1) to first reach 1 - 1/e, 90 %, 95 % and 99 % of a
    /// step, keyed as tauscan keys its `settle` object.
    settle: Vec<(&'static str, f64)>,
    /// Delay behind a ramp in samples: input minus output over the slope, after a long
    /// ramp.
    lag: f64,
}

impl Executed {
    fn label(&self) -> String {
        format!("{}: {} / {}", self.file, self.function, self.state)
    }
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
    let output = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["list", "--format", "json", dir])
            .current_dir(crate_root()),
    );
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
        let run = common::output(&mut Command::new(&binary));
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
    assert!(fields.len() >= 8, "{file}: malformed driver line {line:?}");
    let number = |i: usize| -> f64 {
        fields[i]
            .parse()
            .unwrap_or_else(|e| panic!("{file}: field {i} of {line:?}: {e}"))
    };
    // After the eight fixed fields come key=value fields of the optional kinds of case.
    let mut extra = std::collections::BTreeMap::new();
    let mut file = file.to_string();
    for field in &fields[8..] {
        let (key, value) = field
            .split_once('=')
            .unwrap_or_else(|| panic!("{file}: field {field:?} of {line:?} is not key=value"));
        if key == "file" {
            // A fixture folder: the update's file in it.
            let folder = file.trim_end_matches(".c");
            file = format!("{folder}/{value}");
            continue;
        }
        let value: f64 = value
            .parse()
            .unwrap_or_else(|e| panic!("{file}: field {field:?} of {line:?}: {e}"));
        extra.insert(key.to_string(), value);
    }
    let integer = fields[2] == "1";
    let stall = if integer {
        Some((number(6), number(7)))
    } else {
        None
    };
    let chain = extra.get("stages").map(|&stages| {
        let settle_of = |key: &str| -> f64 {
            *extra
                .get(key)
                .unwrap_or_else(|| panic!("{file}: {key} missing from {line:?}"))
        };
        ExecutedChain {
            stages: stages as usize,
            settle: vec![
                ("63", settle_of("settle63")),
                ("90", settle_of("settle90")),
                ("95", settle_of("settle95")),
                ("99", settle_of("settle99")),
            ],
            lag: settle_of("lag"),
        }
    });
    Executed {
        file,
        function: fields[0].to_string(),
        state: fields[1].to_string(),
        integer,
        scale: number(3),
        alpha: number(4),
        dc_gain: number(5),
        stall,
        window: extra.get("window").map(|&n| n as u32),
        chain,
        alpha_alt: extra.get("alpha_alt").copied(),
        rate_hz: extra.get("rate_hz").copied(),
        design_dt_s: extra.get("design_dt_s").copied(),
    }
}

/// The exact -3 dB frequency of a first-order smoother of gain `alpha` updated at `rate_hz`,
/// or None when its gain stays above -3 dB up to Nyquist.
///
/// Source: DOMAIN first-order section formula, sin(wc / 2) = alpha / (2 sqrt(1 - alpha)),
/// fc = wc fs / (2 pi); it has a solution only while that right side is at most 1.
fn exact_cutoff_hz(alpha: f64, rate_hz: f64) -> Option<f64> {
    let half_sine = alpha / (2.0 * (1.0 - alpha).sqrt());
    (half_sine <= 1.0).then(|| 2.0 * half_sine.asin() * rate_hz / (2.0 * std::f64::consts::PI))
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

/// A smoother with a constant gain: the reported alpha against the executed first step.
fn compare_alpha(case: &Executed, record: &Value, problems: &mut Vec<String>) {
    let label = case.label();
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
}

/// A moving average: no alpha, the form, and the reported window against the executed one.
fn compare_window(case: &Executed, record: &Value, window: u32, problems: &mut Vec<String>) {
    let label = case.label();
    // Source: execution of the fixture with the system C compiler (cc): a step from rest
    // came out whole at update `window` and not before, which is what a running sum over
    // that many samples does.
    if record["form"].as_str() != Some("moving-average") {
        problems.push(format!(
            "{label}: form reported {}, executed a moving average of {window}",
            record["form"]
        ));
    }
    if record["window"].as_u64() != Some(u64::from(window)) {
        problems.push(format!(
            "{label}: window reported {}, executed {window}",
            record["window"]
        ));
    }
    // A moving average has a window, not a smoothing coefficient (schema 1).
    if !record["alpha"].is_null() {
        problems.push(format!(
            "{label}: alpha reported {} for a moving average, expected null",
            record["alpha"]
        ));
    }
}

/// A gain computed from a time step given at run time: no constant alpha, an adaptive rate,
/// and a formula; the execution shows that the gain does change with the step.
fn compare_adaptive(case: &Executed, record: &Value, alpha_alt: f64, problems: &mut Vec<String>) {
    let label = case.label();
    // Source: execution of the fixture with the system C compiler (cc): the first step under
    // two time steps gave two gains, so no constant alpha describes the update.
    if !record["alpha"].is_null() {
        problems.push(format!(
            "{label}: alpha reported {}, but the executed gain is {} or {alpha_alt} depending \
             on the time step",
            record["alpha"], case.alpha
        ));
    }
    if record["rate_kind"].as_str() != Some("adaptive") {
        problems.push(format!(
            "{label}: rate_kind reported {}, expected \"adaptive\" (executed gain {} or \
             {alpha_alt} depending on the time step)",
            record["rate_kind"], case.alpha
        ));
    }
    if record["alpha_formula"]
        .as_str()
        .is_none_or(|f| f.trim().is_empty())
    {
        problems.push(format!(
            "{label}: alpha_formula reported {}, expected the gain's formula",
            record["alpha_formula"]
        ));
    }
    // A cutoff in Hz would need one gain; the executed gain has two.
    if !record["cutoff_hz"].is_null() {
        problems.push(format!(
            "{label}: cutoff_hz reported {} for a gain that follows the time step",
            record["cutoff_hz"]
        ));
    }
}

/// A gain computed by a design law from a period and a configuration the code reads at run
/// time: no constant alpha, and a design whose law and figures give the executed gain at
/// the configuration's defaults.
fn compare_design(case: &Executed, record: &Value, dt: f64, problems: &mut Vec<String>) {
    let label = case.label();
    let design = &record["design"];
    if !record["alpha"].is_null() {
        problems.push(format!(
            "{label}: alpha reported {}, but the gain follows a configuration read at run time",
            record["alpha"]
        ));
    }
    // Source: DOMAIN.md section 1, the first-order designs, each linear in the period in
    // its own coordinate: rc x / (1 + x), exponential 1 - exp(-x), forward Euler x, with
    // x = 2 pi fc dt.
    let a = case.alpha;
    let coordinate = match design["law"].as_str() {
        Some("rc") => a / (1.0 - a),
        Some("exponential") => -(1.0 - a).ln(),
        Some("euler") => a,
        other => {
            problems.push(format!("{label}: design law {other:?}, design {design}"));
            return;
        }
    };
    // Source: execution of the fixture with the system C compiler (cc): the first step at
    // the defaults, over the period the driver configured.
    let executed_cutoff = coordinate / (2.0 * std::f64::consts::PI * dt);
    match design["cutoff_hz"].as_f64() {
        Some(c) if ((c - executed_cutoff) / executed_cutoff).abs() <= 1e-4 => {}
        _ => problems.push(format!(
            "{label}: design cutoff_hz reported {}, the executed gain gives {executed_cutoff}              under the {} law",
            design["cutoff_hz"], design["law"]
        )),
    }
    match design["alpha_at_defaults"].as_f64() {
        Some(d) if ((d - a) / a).abs() <= 1e-5 => {}
        _ => problems.push(format!(
            "{label}: design alpha_at_defaults reported {}, executed {a}",
            design["alpha_at_defaults"]
        )),
    }
    if record["rate_kind"].as_str() != Some("adaptive") {
        problems.push(format!(
            "{label}: rate_kind reported {}, expected \"adaptive\" (the gain follows the period)",
            record["rate_kind"]
        ));
    }
}

/// The rate of the fixture's own constants against the reported one, and the exact cutoff
/// at that rate from the executed alpha against the reported cutoff.
fn compare_rate(case: &Executed, record: &Value, rate: f64, problems: &mut Vec<String>) {
    let label = case.label();
    // Source: execution of the fixture with the system C compiler (cc), which evaluated the
    // fixture's rate constant (1 / DT) in the driver.
    match record["rate_hz"].as_f64() {
        Some(reported) if ((reported - rate) / rate).abs() <= 1e-6 => {}
        _ => problems.push(format!(
            "{label}: rate_hz reported {}, the fixture's constants give {rate}",
            record["rate_hz"]
        )),
    }
    if case.window.is_some() || case.alpha_alt.is_some() {
        return;
    }
    // Source: DOMAIN first-order section formula, and execution (the executed alpha and
    // the rate above). The float first step carries about one rounding of alpha; the cutoff
    // moves at most about twice as much, relative, for the alphas of the fixtures.
    let expected = exact_cutoff_hz(case.alpha, rate);
    let reported = record["cutoff_hz"].as_f64();
    let agree = match (expected, reported) {
        (Some(e), Some(r)) => ((r - e) / e).abs() <= 1e-5,
        (None, None) => true,
        _ => false,
    };
    if !agree {
        problems.push(format!(
            "{label}: cutoff_hz reported {}, exact cutoff of the executed alpha {} at {rate} Hz \
             is {expected:?}",
            record["cutoff_hz"], case.alpha
        ));
    }
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

    if let Some(window) = case.window {
        compare_window(case, record, window, &mut problems);
    } else if let Some(alpha_alt) = case.alpha_alt {
        compare_adaptive(case, record, alpha_alt, &mut problems);
    } else if let Some(dt) = case.design_dt_s {
        compare_design(case, record, dt, &mut problems);
    } else {
        compare_alpha(case, record, &mut problems);
    }
    if let Some(rate) = case.rate_hz {
        compare_rate(case, record, rate, &mut problems);
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
    let forms = root.join("fixtures").join("forms");
    let mut fixtures: BTreeSet<String> = cases_in(&forms, ".c").into_iter().collect();
    // A case of several files is a folder of them.
    for entry in std::fs::read_dir(&forms).unwrap() {
        let entry = entry.unwrap();
        if entry.file_type().unwrap().is_dir() {
            fixtures.insert(entry.file_name().to_string_lossy().into_owned());
        }
    }
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
    let report = forms_report();
    // The update inside a filter function is listed once where it is written, with the
    // number of its calls listed as instances; those instances are the driven cases.
    let instances_of = |record: &Value| {
        report
            .iter()
            .filter(|r| {
                r["definition"]["file"] == record["file"]
                    && r["definition"]["line"] == record["line"]
            })
            .count() as u64
    };
    for record in report.iter().filter(|r| r["instances"].as_u64() > Some(0)) {
        assert_eq!(
            record["instances"].as_u64(),
            Some(instances_of(record)),
            "{}: the instance count disagrees with the records that point at it",
            describe(record)
        );
    }
    let extras: Vec<String> = report
        .iter()
        .filter(|record| record["instances"].as_u64() == Some(0))
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

/// The one record of `report` for an executed case; panics with what was found otherwise.
fn the_record<'a>(report: &'a [Value], case: &Executed) -> &'a Value {
    let records: Vec<&Value> = report.iter().filter(|r| matches_case(r, case)).collect();
    match records.as_slice() {
        [record] => record,
        other => panic!(
            "{}: expected one record, found {:?}",
            case.label(),
            other.iter().map(|r| describe(r)).collect::<Vec<_>>()
        ),
    }
}

#[test]
fn cascade_figures_match_the_executed_chain() {
    let executed = executed_cases();
    let report = forms_report();
    let chains: Vec<(&Executed, &ExecutedChain)> = executed
        .iter()
        .filter_map(|case| case.chain.as_ref().map(|chain| (case, chain)))
        .collect();
    assert!(!chains.is_empty(), "no driver drives a whole cascade");
    let mut problems = Vec::new();
    for (case, chain) in chains {
        let label = case.label();
        let record = the_record(report, case);
        let cascade = &record["cascade"];
        if !cascade.is_object() {
            problems.push(format!(
                "{label}: the last stage of a chain of {} carries cascade {cascade}",
                chain.stages
            ));
            continue;
        }
        // The stages are records of the same report, first to last, ending with this one.
        let stages: Vec<&str> = cascade["stages"]
            .as_array()
            .map(|a| a.iter().filter_map(Value::as_str).collect())
            .unwrap_or_default();
        // Source: execution of the fixture with the system C compiler (cc): the driver ran
        // a chain of this many stages.
        if stages.len() != chain.stages {
            problems.push(format!(
                "{label}: cascade.stages {stages:?}, executed a chain of {}",
                chain.stages
            ));
        }
        if stages.last().copied() != record["id"].as_str() {
            problems.push(format!(
                "{label}: cascade.stages {stages:?} does not end with the record's own id {}",
                record["id"]
            ));
        }
        for id in &stages {
            let stage = report.iter().find(|r| r["id"].as_str() == Some(id));
            if stage.is_none_or(|r| r["function"] != record["function"]) {
                problems.push(format!(
                    "{label}: cascade stage {id} is not a record of {}",
                    record["function"]
                ));
            }
        }
        for (key, samples) in &chain.settle {
            // Source: execution of the fixture with the system C compiler (cc): the update,
            // counting the first as 1, at which the chain's step response first reached the
            // fraction (1 - 1/e for "63").
            let reported = cascade["settle"][*key]["samples"].as_f64();
            if reported != Some(*samples) {
                problems.push(format!(
                    "{label}: cascade.settle.{key}.samples reported {}, executed {samples}",
                    cascade["settle"][*key]["samples"]
                ));
            }
        }
        // Source: execution of the fixture with the system C compiler (cc): input minus
        // output over the slope after a long ramp.
        match cascade["lag_samples"].as_f64() {
            Some(lag) if (lag - chain.lag).abs() <= 1e-3 => {}
            _ => problems.push(format!(
                "{label}: cascade.lag_samples reported {}, executed {}",
                cascade["lag_samples"], chain.lag
            )),
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn filter_library_instances_have_their_own_cutoffs() {
    let executed = executed_cases();
    let report = forms_report();
    let instances: Vec<&Executed> = executed
        .iter()
        .filter(|case| case.file == "filter_library.c")
        .collect();
    assert!(
        instances.len() >= 4,
        "filter_library.c drives {} instances, expected at least four",
        instances.len()
    );
    let mut cutoffs: Vec<(String, f64)> = Vec::new();
    let mut problems = Vec::new();
    for case in &instances {
        let rate = case
            .rate_hz
            .unwrap_or_else(|| panic!("{}: the driver gives no rate", case.label()));
        // Source: DOMAIN first-order section formula, and execution (the executed alpha and
        // the rate the fixture's constants give).
        let expected = exact_cutoff_hz(case.alpha, rate).unwrap_or_else(|| {
            panic!(
                "{}: executed alpha {} has no cutoff",
                case.label(),
                case.alpha
            )
        });
        let record = the_record(report, case);
        match record["cutoff_hz"].as_f64() {
            Some(reported) if ((reported - expected) / expected).abs() <= 1e-5 => {}
            _ => problems.push(format!(
                "{}: cutoff_hz reported {}, expected {expected}",
                case.label(),
                record["cutoff_hz"]
            )),
        }
        cutoffs.push((case.state.clone(), expected));
    }
    // Source: execution of the fixture with the system C compiler (cc): each instance was
    // set up with its own cutoff, so no two executed gains give the same cutoff.
    for (i, (state_a, a)) in cutoffs.iter().enumerate() {
        for (state_b, b) in &cutoffs[i + 1..] {
            assert!(
                ((a - b) / a).abs() > 0.01,
                "{state_a} and {state_b} execute with the same cutoff {a} Hz: the fixture \
                 does not give its instances their own cutoffs"
            );
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn a_gain_from_a_run_time_time_step_is_reported_adaptive() {
    let executed = executed_cases();
    let report = forms_report();
    let adaptive: Vec<&Executed> = executed
        .iter()
        .filter(|case| case.alpha_alt.is_some())
        .collect();
    assert!(
        !adaptive.is_empty(),
        "no driver runs a gain under two time steps"
    );
    let mut problems = Vec::new();
    for case in adaptive {
        let alpha_alt = case.alpha_alt.unwrap_or(f64::NAN);
        // Source: execution of the fixture with the system C compiler (cc): the same update
        // under two time steps moved its state by different fractions of the step.
        assert!(
            ((case.alpha - alpha_alt) / case.alpha).abs() > 0.01,
            "{}: executed gains {} and {alpha_alt} under two time steps: the fixture's gain \
             does not follow the time step",
            case.label(),
            case.alpha
        );
        compare_adaptive(case, the_record(report, case), alpha_alt, &mut problems);
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

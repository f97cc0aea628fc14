//! Checks of truth for the rates the spec declares: carried from an entry function down the
//! call graph to a smoother three calls below it, in conflict when one update is reached
//! from entries of different rates, and held against the rate a coefficient was computed
//! for. Each check runs `tauscan check --format json` on a fixture under `fixtures/rates/`
//! and recomputes the figures that matter here (alpha from the C constants, the cutoff at
//! the spec's rate) outside tauscan, with the source named beside each.
//!
//! What the rules say in general is `tests/rules.rs`'s; what the figures are for every form
//! is `tests/metrics_reference.rs`'s and `tests/exec_truth.rs`'s.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test helper that cannot run tauscan or read its JSON should stop the test with the cause"
)]

use serde_json::Value;
use std::path::PathBuf;
use std::process::Command;

mod common;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join("rates")
        .join(name)
}

/// `tauscan check --format json` on a fixture: exit status and the JSON document.
fn check(name: &str) -> (Option<i32>, Value) {
    let dir = fixture(name);
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "json"])
            .arg(&dir),
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    let json: Value = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "no JSON from tauscan check {} ({e}); status {:?}\nstderr:\n{stderr}",
            dir.display(),
            out.status.code()
        )
    });
    (out.status.code(), json)
}

fn smoother<'a>(json: &'a Value, id: &str) -> &'a Value {
    json["smoothers"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["id"] == id)
        .unwrap_or_else(|| {
            let ids: Vec<&Value> = json["smoothers"]
                .as_array()
                .unwrap()
                .iter()
                .map(|s| &s["id"])
                .collect();
            panic!("no smoother `{id}`; tauscan found {ids:?}")
        })
}

fn findings<'a>(json: &'a Value, rule: &str) -> Vec<&'a Value> {
    json["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["rule"] == rule)
        .collect()
}

/// The exact -3 dB cutoff in Hz of `y[n] = y[n-1] + alpha (x[n] - y[n-1])` run at `fs`.
///
/// Source: the first-order section `H(z) = alpha / (1 - p z^-1)`, `p = 1 - alpha`, has
/// `|H(e^jw)|^2 = alpha^2 / (1 - 2p cos w + p^2) = alpha^2 / (alpha^2 + 4p sin^2(w/2))`;
/// setting it to 1/2 gives `sin(wc/2) = alpha / (2 sqrt(1 - alpha))`, and
/// `fc = wc fs / (2 pi)`. Textbook discrete-time first-order analysis, derived here from
/// memory (the same formula the scipy table of `tests/metrics_reference.rs` confirms).
fn exact_cutoff_hz(alpha: f64, fs: f64) -> f64 {
    let half = (alpha / (2.0 * (1.0 - alpha).sqrt())).asin();
    2.0 * half * fs / std::f64::consts::TAU
}

fn close(a: f64, b: f64, relative: f64) -> bool {
    (a - b).abs() <= relative * b.abs()
}

fn number(v: &Value, what: &str) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("{what} is not a number: {v}"))
}

#[test]
fn a_rate_named_only_at_the_interrupt_reaches_the_smoother_three_calls_below() {
    // fixtures/rates/propagation: ferm_adc_isr (2 kHz in the spec) -> ferm_sensor_task ->
    // ferm_condition -> ferm_smooth_gravity, whose gain is the bare GRAVITY_ALPHA 0.05f.
    let (status, json) = check("propagation");
    assert_eq!(status, Some(0), "{json}");
    let fs = 2000.0;
    let gravity = smoother(
        &json,
        "fermenter_sensors.c::ferm_smooth_gravity::ferm_gravity_sg",
    );
    assert_eq!(gravity["rate_kind"], "spec", "{gravity}");
    assert_eq!(number(&gravity["rate_hz"], "rate_hz"), fs, "{gravity}");
    assert!(
        gravity["rate_source"]
            .as_str()
            .is_some_and(|s| s.contains("ferm_adc_isr")),
        "the rate's source should name the interrupt: {}",
        gravity["rate_source"]
    );
    // Source: C11 6.4.4.2p4, a floating constant suffixed `f` has type float, so the alpha
    // the code uses is 0.05 rounded to binary32.
    let alpha = f64::from(0.05f32);
    assert!(
        close(number(&gravity["alpha"], "alpha"), alpha, 1e-12),
        "{gravity}"
    );
    let cutoff = number(&gravity["cutoff_hz"], "cutoff_hz");
    let expected = exact_cutoff_hz(alpha, fs);
    assert!(
        close(cutoff, expected, 1e-9),
        "cutoff {cutoff} Hz, exact formula at {fs} Hz gives {expected} Hz"
    );

    // The filter instance called in the helper gets the rate too, with its own gain (0.2f
    // from its struct's initialiser).
    let wort = smoother(
        &json,
        "fermenter_sensors.c::ferm_condition::ferm_wort_temp.y",
    );
    assert_eq!(wort["rate_kind"], "spec", "{wort}");
    assert_eq!(number(&wort["rate_hz"], "rate_hz"), fs, "{wort}");
    let alpha = f64::from(0.2f32);
    let cutoff = number(&wort["cutoff_hz"], "cutoff_hz");
    let expected = exact_cutoff_hz(alpha, fs);
    assert!(close(cutoff, expected, 1e-9), "{cutoff} vs {expected}");

    // A task the spec does not name, and nothing named calls, has no rate: none is invented.
    let log = smoother(&json, "fermenter_sensors.c::ferm_log_task::ferm_log_sg");
    assert_eq!(log["rate_kind"], "unknown", "{log}");
    assert!(log["rate_hz"].is_null(), "{log}");
    assert!(log["cutoff_hz"].is_null(), "{log}");
}

#[test]
fn one_update_reached_from_entries_of_different_rates_is_ambiguous() {
    // fixtures/rates/conflict: wind_smooth is reached from mast_anemometer_isr (1 kHz,
    // through mast_pulse_handler) and from mast_radio_task (50 Hz); vane_smooth from the
    // interrupt and from mast_backup_timer, both at 1 kHz.
    let (status, json) = check("conflict");
    assert_eq!(status, Some(1), "rate-ambiguous is an error: {json}");
    let ambiguous = findings(&json, "rate-ambiguous");
    assert_eq!(ambiguous.len(), 1, "{ambiguous:#?}");
    let finding = ambiguous[0];
    assert_eq!(finding["smoother"], "weather.c::wind_smooth::wind_ms");
    assert_eq!(finding["file"], "weather.c");
    let message = finding["message"].as_str().unwrap();
    for part in ["mast_anemometer_isr", "mast_radio_task", "50 Hz"] {
        assert!(message.contains(part), "`{part}` missing from: {message}");
    }
    assert!(
        message.contains("1 kHz") || message.contains("1000 Hz"),
        "the 1 kHz rate is missing from: {message}"
    );
    assert!(!message.contains("mast_backup_timer"), "{message}");
    // Each path names the call that carries its rate (weather.c, read by hand: the
    // interrupt's handler calls wind_smooth at line 28, the radio task at line 44).
    for part in [
        "mast_anemometer_isr -> mast_pulse_handler -> wind_smooth, weather.c:28",
        "mast_radio_task -> wind_smooth, weather.c:44",
    ] {
        assert!(message.contains(part), "`{part}` missing from: {message}");
    }
    let lines: Vec<&Value> = finding["labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| &l["line"])
        .collect();
    assert_eq!(lines, vec![28, 44], "{finding:#}");

    // With no single rate there is no cutoff in Hz.
    let wind = smoother(&json, "weather.c::wind_smooth::wind_ms");
    assert!(wind["rate_hz"].is_null(), "{wind}");
    assert!(wind["cutoff_hz"].is_null(), "{wind}");

    // Two entries at the same rate are no conflict: the vane runs at 1 kHz.
    let vane = smoother(&json, "weather.c::vane_smooth::vane_dir_deg");
    assert_eq!(vane["rate_kind"], "spec", "{vane}");
    assert_eq!(number(&vane["rate_hz"], "rate_hz"), 1000.0, "{vane}");
    let expected = exact_cutoff_hz(f64::from(0.1f32), 1000.0);
    let cutoff = number(&vane["cutoff_hz"], "cutoff_hz");
    assert!(close(cutoff, expected, 1e-9), "{cutoff} vs {expected}");
}

#[test]
fn a_coefficient_computed_for_one_rate_and_run_at_another_is_a_mismatch_at_the_real_rate() {
    // fixtures/rates/mismatch: alpha = DT / (RC + DT) with `#define DT 0.001f` (1 kHz) and
    // `#define RC 0.02f`, in a task the spec runs at 100 Hz.
    let (status, json) = check("mismatch");
    assert_eq!(status, Some(1), "rate-mismatch is an error: {json}");
    let mismatch = findings(&json, "rate-mismatch");
    assert_eq!(mismatch.len(), 1, "{mismatch:#?}");
    let finding = mismatch[0];
    assert_eq!(finding["smoother"], "pump.c::pump_task::pump_flow_lpm");
    let message = finding["message"].as_str().unwrap();
    assert!(message.contains("100 Hz"), "{message}");
    assert!(
        message.contains("1 kHz") || message.contains("1000 Hz"),
        "the rate the coefficient assumes is missing from: {message}"
    );
    assert!(message.contains("DT"), "the code's source: {message}");
    assert!(
        message.contains("pump_task"),
        "the spec's source: {message}"
    );
    // The label points at the definition the coefficient's rate comes from.
    let source = std::fs::read_to_string(fixture("mismatch").join("pump.c")).unwrap();
    let dt_line = source
        .lines()
        .position(|l| l.starts_with("#define DT "))
        .unwrap()
        + 1;
    let labels = finding["labels"].as_array().unwrap();
    assert!(
        labels
            .iter()
            .any(|l| l["file"] == "pump.c" && l["line"].as_u64() == Some(dt_line as u64)),
        "no label at pump.c:{dt_line}: {labels:#?}"
    );

    // Source: C11 6.3.1.8, both operands are float, so DT / (RC + DT) is computed in float
    // (FLT_EVAL_METHOD 0, as on every target with SSE or a single-precision FPU).
    let alpha = f64::from(0.001f32 / (0.02f32 + 0.001f32));
    let pump = smoother(&json, "pump.c::pump_task::pump_flow_lpm");
    assert!(
        close(number(&pump["alpha"], "alpha"), alpha, 1e-6),
        "{pump}"
    );
    assert_eq!(pump["rate_kind"], "spec", "{pump}");
    assert_eq!(number(&pump["rate_hz"], "rate_hz"), 100.0, "{pump}");
    // The figures are at the rate the update really runs, not the one it was designed for.
    let cutoff = number(&pump["cutoff_hz"], "cutoff_hz");
    let at_100 = exact_cutoff_hz(alpha, 100.0);
    let at_1000 = exact_cutoff_hz(alpha, 1000.0);
    assert!(
        close(cutoff, at_100, 1e-6),
        "{cutoff} vs {at_100} at 100 Hz"
    );
    assert!(!close(cutoff, at_1000, 0.5), "{cutoff} is the 1 kHz cutoff");
}

#[test]
fn static_functions_of_the_same_name_in_different_files_keep_their_own_rates() {
    // fixtures/rates/static-same-name: compressor.c and panel.c each define their own
    // `static void smooth(float)`, called from compressor_isr (1 kHz) and panel_task
    // (10 Hz) in the same file. Source: C11 6.2.2p3, an identifier of file scope declared
    // `static` has internal linkage, so the two are different functions and each call
    // reaches the one in its own translation unit.
    let (status, json) = check("static-same-name");
    let ambiguous = findings(&json, "rate-ambiguous");
    assert!(
        ambiguous.is_empty(),
        "each smooth() is reached from one entry only: {ambiguous:#?}"
    );
    for (id, fs) in [
        ("compressor.c::smooth::compressor_amps", 1000.0),
        ("panel.c::smooth::panel_lux", 10.0),
    ] {
        let s = smoother(&json, id);
        assert_eq!(s["rate_kind"], "spec", "{id}: {s}");
        assert_eq!(s["rate_hz"].as_f64(), Some(fs), "{id}: {s}");
        let expected = exact_cutoff_hz(f64::from(0.1f32), fs);
        let cutoff = s["cutoff_hz"].as_f64().unwrap_or(f64::NAN);
        assert!(
            close(cutoff, expected, 1e-9),
            "{id}: {cutoff} vs {expected}"
        );
    }
    assert_eq!(status, Some(0), "{json}");
}

/// A smoother's `rate_path` as (function, file, line, via) tuples.
fn path_of(s: &Value) -> Vec<(String, String, u64, String)> {
    s["rate_path"]
        .as_array()
        .unwrap_or_else(|| panic!("no rate_path: {s}"))
        .iter()
        .map(|step| {
            (
                step["function"].as_str().unwrap().to_string(),
                step["file"].as_str().unwrap().to_string(),
                step["line"].as_u64().unwrap(),
                step["via"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

fn step(function: &str, file: &str, line: u64, via: &str) -> (String, String, u64, String) {
    (function.into(), file.into(), line, via.into())
}

#[test]
fn a_propagated_rate_carries_its_path_from_the_entry_through_each_call() {
    // fixtures/rates/propagation, read by hand: ferm_adc_isr is defined at
    // fermenter_adc.c:10 and calls ferm_sensor_task at line 12; that calls ferm_condition
    // at fermenter_sensors.c:43, which calls ferm_smooth_gravity at line 37.
    let (_, json) = check("propagation");
    let gravity = smoother(
        &json,
        "fermenter_sensors.c::ferm_smooth_gravity::ferm_gravity_sg",
    );
    assert_eq!(
        path_of(gravity),
        vec![
            step("ferm_adc_isr", "fermenter_adc.c", 10, "entry"),
            step("ferm_sensor_task", "fermenter_adc.c", 12, "call"),
            step("ferm_condition", "fermenter_sensors.c", 43, "call"),
            step("ferm_smooth_gravity", "fermenter_sensors.c", 37, "call"),
        ]
    );
    assert_eq!(
        number(&gravity["running_rate_hz"], "running_rate_hz"),
        2000.0
    );
    assert!(gravity["design_rate_hz"].is_null(), "{gravity}");
    // No rate from the spec: no path, nothing running.
    let log = smoother(&json, "fermenter_sensors.c::ferm_log_task::ferm_log_sg");
    assert!(path_of(log).is_empty(), "{log}");
    assert!(log["running_rate_hz"].is_null(), "{log}");
}

#[test]
fn function_pointer_tables_and_ops_structs_carry_their_entry_rate() {
    // fixtures/rates/indirect, read by hand: wash_scheduler_tick (50 Hz) calls every task
    // of the table wash_tasks[] through `wash_tasks[i].fn()` at tasks.c:38, positional and
    // designated entries alike; wash_pump_isr (1 kHz) calls wash_rinse_sample through the
    // ops struct (initialised in another file's order of fields) at pump.c:24.
    let (status, json) = check("indirect");
    assert_eq!(
        status,
        Some(0),
        "a partial rate warns, a doubt notes: {json}"
    );
    let caustic = smoother(&json, "sensors.c::wash_caustic_sample::wash_caustic");
    assert_eq!(number(&caustic["rate_hz"], "rate_hz"), 50.0, "{caustic}");
    assert_eq!(
        path_of(caustic),
        vec![
            step("wash_scheduler_tick", "tasks.c", 35, "entry"),
            step("wash_caustic_sample", "tasks.c", 38, "indirect-call"),
        ]
    );
    let rinse = smoother(&json, "pump.c::wash_rinse_sample::wash_rinse_lpm");
    assert_eq!(number(&rinse["rate_hz"], "rate_hz"), 1000.0, "{rinse}");
    assert_eq!(
        path_of(rinse),
        vec![
            step("wash_pump_isr", "pump.c", 21, "entry"),
            step("wash_rinse_sample", "pump.c", 24, "indirect-call"),
        ]
    );
    // The figure follows the rate: exact cutoff of 0.02f at 1 kHz (formula above).
    let expected = exact_cutoff_hz(f64::from(0.02f32), 1000.0);
    let cutoff = number(&rinse["cutoff_hz"], "cutoff_hz");
    assert!(close(cutoff, expected, 1e-9), "{cutoff} vs {expected}");
}

#[test]
fn a_rate_with_another_way_in_is_said_to_be_partial_or_in_doubt() {
    // fixtures/rates/indirect: wash_service_menu, which no rate entry reaches, also calls
    // wash_tank_sample (sensors.c:27); wash_dryer_sample is registered as a hook and
    // called through `hook` (tasks.c:30), which the program never shows a value for.
    let (_, json) = check("indirect");
    let tank = smoother(&json, "sensors.c::wash_tank_sample::wash_tank_mm");
    assert_eq!(number(&tank["rate_hz"], "rate_hz"), 50.0, "{tank}");
    let doubts: Vec<&str> = tank["rate_doubts"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(Value::as_str)
        .collect();
    assert!(
        doubts
            .iter()
            .any(|d| d.starts_with("partial rate") && d.contains("wash_service_menu")),
        "{doubts:?}"
    );
    let partial: Vec<&Value> = findings(&json, "rate-ambiguous")
        .into_iter()
        .filter(|f| f["smoother"] == "sensors.c::wash_tank_sample::wash_tank_mm")
        .collect();
    assert_eq!(partial.len(), 1, "{partial:#?}");
    assert_eq!(partial[0]["severity"], "warning");
    assert_eq!(partial[0]["labels"][0]["line"], 27, "{:#?}", partial[0]);

    let dryer = smoother(&json, "sensors.c::wash_dryer_sample::wash_dryer_c");
    assert!(
        dryer["rate_hz"].is_null(),
        "never silently given a rate: {dryer}"
    );
    let noted: Vec<&Value> = findings(&json, "rate-ambiguous")
        .into_iter()
        .filter(|f| f["smoother"] == "sensors.c::wash_dryer_sample::wash_dryer_c")
        .collect();
    assert_eq!(noted.len(), 1, "{noted:#?}");
    assert_eq!(noted[0]["severity"], "note");
    let message = noted[0]["message"].as_str().unwrap();
    assert!(
        message.contains("`hook`") && message.contains("tasks.c:30"),
        "{message}"
    );

    // The caustic sampler is reached only through the table: no doubt.
    let caustic = smoother(&json, "sensors.c::wash_caustic_sample::wash_caustic");
    assert_eq!(caustic["rate_doubts"], serde_json::json!([]), "{caustic}");
}

/// `tauscan list` with arguments, in a folder: exit status and its JSON.
fn list_json(dir: &std::path::Path, extra: &[&str]) -> (Option<i32>, Value) {
    let mut args = vec!["list", "--format", "json"];
    args.extend_from_slice(extra);
    args.push(".");
    let run = common::tauscan_in(dir, &args, std::time::Duration::from_secs(60));
    run.assert_finished();
    (run.code, run.json())
}

#[test]
fn list_uses_the_spec_and_tells_the_running_rate_from_the_design_rate() {
    // fixtures/demo-greenhouse: LUX_ALPHA is computed from `#define SENSOR_DT 0.01f` (a
    // 100 Hz design) and light_sample runs from sensor_task, which the demo's spec runs
    // every 50 ms (20 Hz).
    let demo = common::fixture("demo-greenhouse");
    let (status, json) = list_json(&demo, &[]);
    assert_eq!(status, Some(0), "{json}");
    let lux = smoother(&json, "light.c::light_sample::lux_fast");
    assert_eq!(
        number(&lux["running_rate_hz"], "running_rate_hz"),
        20.0,
        "{lux}"
    );
    let design = number(&lux["design_rate_hz"], "design_rate_hz");
    // Source: C11 6.4.4.2p4, 0.01f is binary32, so 1 / 0.01f is 100 Hz to float precision.
    assert!(close(design, 1.0 / f64::from(0.01f32), 1e-12), "{lux}");
    let alpha = number(&lux["alpha"], "alpha");
    let cutoff = number(&lux["cutoff_hz"], "cutoff_hz");
    assert!(
        close(cutoff, exact_cutoff_hz(alpha, 20.0), 1e-9),
        "figures at the running rate: {cutoff}"
    );

    // --spec names another spec: here one with no rates, so only the design rate is left.
    let empty = tempfile::tempdir().unwrap();
    let spec = empty.path().join("no-rates.yaml");
    std::fs::write(&spec, "smoothers: []\n").unwrap();
    let (_, json) = list_json(&demo, &["--spec", spec.to_str().unwrap()]);
    let lux = smoother(&json, "light.c::light_sample::lux_fast");
    assert!(lux["running_rate_hz"].is_null(), "{lux}");
    let rate = number(&lux["rate_hz"], "rate_hz");
    assert!(close(rate, design, 1e-12), "{lux}");
}

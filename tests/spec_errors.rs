//! A broken spec stops `tauscan check` with exit status 2 and says where: the spec's path,
//! line and column, then what is wrong. Covered here: unknown keys (with the nearest known
//! one), a quantity in the wrong unit, a range whose minimum is above its maximum, and a
//! glob that does not compile, each where a person would look for it.
//!
//! The places (line:column, 1-based) are counted by hand from the spec texts below; for a
//! quoted value either the quote or the first character inside it is the place. What the
//! messages say beyond the place and the key is the spec module's to choose.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test helper that cannot write its temporary spec or run tauscan should stop the test with the cause"
)]

use std::path::PathBuf;
use std::process::Command;

mod common;

struct Broken {
    status: Option<i32>,
    stderr: String,
    spec: PathBuf,
    _dir: tempfile::TempDir,
}

/// Runs `tauscan check --spec FILE DIR` with `text` as the spec, over a folder with one
/// trivial C file.
fn check_with_spec(text: &str) -> Broken {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("idle.c"), "void idle(void) {}\n").unwrap();
    let spec = dir.path().join("broken.yaml");
    std::fs::write(&spec, text).unwrap();
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .arg("check")
            .arg("--spec")
            .arg(&spec)
            .arg(dir.path()),
    );
    Broken {
        status: out.status.code(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        spec,
        _dir: dir,
    }
}

/// Asserts exit status 2 and `PATH:LINE:COLUMN:` (one of `columns`) in the message,
/// followed by every one of `words`.
fn assert_broken_at(text: &str, line: usize, columns: &[usize], words: &[&str]) -> String {
    let run = check_with_spec(text);
    assert_eq!(
        run.status,
        Some(2),
        "a broken spec must exit 2; spec:\n{text}\nstderr:\n{}",
        run.stderr
    );
    let path = run.spec.display().to_string();
    let place = columns
        .iter()
        .map(|c| format!("{path}:{line}:{c}:"))
        .find(|p| run.stderr.contains(p.as_str()));
    assert!(
        place.is_some(),
        "want {path}:{line}:{columns:?}: in the message; spec:\n{text}\nstderr:\n{}",
        run.stderr
    );
    for word in words {
        assert!(
            run.stderr.contains(word),
            "want `{word}` in the message; spec:\n{text}\nstderr:\n{}",
            run.stderr
        );
    }
    run.stderr
}

#[test]
fn a_misspelt_key_is_placed_and_the_nearest_key_named() {
    assert_broken_at(
        "smoothers:\n  - match: { function: kiln_tc_sample }\n    requires:\n      cutof: { min: \"1 Hz\" }\n",
        4,
        &[7],
        &["cutof", "did you mean `cutoff`"],
    );
    // In a flow mapping, the key's own column.
    assert_broken_at(
        "rates:\n  - { function: kiln_control_tick, rat: \"10 Hz\" }\n",
        2,
        &[36],
        &["rat", "did you mean `rate`"],
    );
    assert_broken_at(
        "smoothers:\n  - match: { functoin: coop_light_sample }\n",
        2,
        &[14],
        &["functoin", "did you mean `function`"],
    );
    assert_broken_at(
        "scan:\n  exclude: [\"vendor/**\"]\ntarget: { int_bit: 16 }\n",
        3,
        &[11],
        &["int_bit", "did you mean `int_bits`"],
    );
}

#[test]
fn a_known_key_in_the_wrong_place_is_not_offered_as_its_own_correction() {
    // `max_lag` is a key of `requires`, written one level too high. "Did you mean
    // `max_lag`?" tells the person nothing; the message must not offer the key itself.
    let stderr = assert_broken_at(
        "smoothers:\n  - match: { function: autopilot_gyro_sample }\n    max_lag: \"250 ms\"\n",
        3,
        &[5],
        &["max_lag"],
    );
    assert!(
        !stderr.contains("did you mean `max_lag`"),
        "the suggestion is the key itself: {stderr}"
    );
}

#[test]
fn a_misspelt_rule_id_under_rules_is_an_unknown_key() {
    // A typo in a rule's id would otherwise leave the rule at its default severity while
    // the spec reads as if it were turned off.
    assert_broken_at(
        "rules:\n  integer-dead-bnad: off\n",
        2,
        &[3],
        &["integer-dead-bnad", "did you mean `integer-dead-band`"],
    );
}

#[test]
fn a_quantity_in_the_wrong_unit_is_placed_at_its_value() {
    // max_lag: "3 Hz" -- the quote is column 16.
    assert_broken_at(
        "smoothers:\n  - match: { function: autopilot_gyro_sample }\n    requires:\n      max_lag: \"3 Hz\"\n",
        4,
        &[16, 17],
        &["max_lag", "3 Hz"],
    );
    // A cutoff written as a period.
    assert_broken_at(
        "smoothers:\n  - match: { function: kiln_tc_sample }\n    requires:\n      cutoff: { min: \"100 ms\" }\n",
        4,
        &[22, 23],
        &["cutoff.min", "100 ms"],
    );
    assert_broken_at(
        "rates:\n  - { function: ferm_adc_isr, rate: \"2 furlongs\" }\n",
        2,
        &[37, 38],
        &["rate", "2 furlongs"],
    );
    assert_broken_at(
        "smoothers:\n  - match: { function: coop_light_sample }\n    requires:\n      settle: { fraction: 0.9, within: \"2 Hz\" }\n",
        4,
        &[40, 41],
        &["settle.within", "2 Hz"],
    );
    assert_broken_at(
        "smoothers:\n  - match: { function: hive_scale_sample }\n    requires:\n      max_dead_band: \"3 volts\"\n",
        4,
        &[22, 23],
        &["max_dead_band", "3 volts"],
    );
    assert_broken_at(
        "smoothers:\n  - match: { function: doser_ph_sample }\n    requires:\n      min_noise_reduction: \"12 volts\"\n",
        4,
        &[28, 29],
        &["min_noise_reduction", "12 volts"],
    );
}

#[test]
fn a_wrong_unit_is_placed_at_its_own_key_when_the_same_text_appears_earlier_in_the_entry() {
    // The same "2 s" is a valid lag on line 4 and a wrong cutoff on line 5; the error is
    // the cutoff's.
    assert_broken_at(
        "smoothers:\n  - match: { function: kiln_tc_sample }\n    requires:\n      max_lag: \"2 s\"\n      cutoff: { min: \"2 s\" }\n",
        5,
        &[22, 23],
        &["cutoff.min", "2 s"],
    );
}

#[test]
fn a_wrong_unit_in_defaults_is_placed_there_when_the_same_text_appears_under_rates() {
    // "100 ms" is a valid period on line 2 and a wrong cutoff in `defaults` on line 5.
    assert_broken_at(
        "rates:\n  - { function: slab_control_task, period: \"100 ms\" }\ndefaults:\n  requires:\n    cutoff: { max: \"100 ms\" }\n",
        5,
        &[20, 21],
        &["cutoff.max", "100 ms"],
    );
}

#[test]
fn a_minimum_above_its_maximum_is_placed_at_the_minimum() {
    assert_broken_at(
        "smoothers:\n  - match: { function: kiln_tc_sample }\n    requires:\n      cutoff: { min: \"0.5 Hz\", max: \"0.1 Hz\" }\n",
        4,
        &[22, 23],
        &["min", "above", "max"],
    );
    // In block style, on the minimum's own line.
    assert_broken_at(
        "smoothers:\n  - match: { function: kiln_tc_sample }\n    requires:\n      cutoff:\n        min: \"3 Hz\"\n        max: \"2 Hz\"\n",
        5,
        &[14, 15],
        &["min", "above", "max"],
    );
    // Under defaults too.
    assert_broken_at(
        "defaults:\n  requires:\n    cutoff: { min: \"2 kHz\", max: \"1 kHz\" }\n",
        3,
        &[20, 21],
        &["min", "above", "max"],
    );
}

#[test]
fn a_glob_that_does_not_compile_is_placed_at_the_pattern() {
    assert_broken_at(
        "scan:\n  exclude: [\"vendor/**\", \"src/{a,b\"]\n",
        2,
        &[26, 27],
        &["scan.exclude", "src/{a,b"],
    );
    assert_broken_at(
        "# the sources\nscan:\n  include: [\"src/[abc\"]\n",
        3,
        &[13, 14],
        &["scan.include", "src/[abc"],
    );
    assert_broken_at(
        "rates:\n  - { path: \"drivers/[adc/**\", rate: \"2 kHz\" }\n",
        2,
        &[13, 14],
        &["rates.path", "drivers/[adc/**"],
    );
    assert_broken_at(
        "smoothers:\n  - match: { path: \"src/**\" }\n  - match: { path: \"lib/[x\" }\n",
        3,
        &[20, 21],
        &["match.path", "lib/[x"],
    );
}

#[test]
fn a_spec_found_by_itself_is_named_in_the_error_too() {
    // Without --spec, tauscan finds tauscan.yaml in the scan root; the message must still
    // name the file and the place.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("idle.c"), "void idle(void) {}\n").unwrap();
    std::fs::write(
        dir.path().join("tauscan.yaml"),
        "smoothers:\n  - match: { function: idle }\n    requires:\n      max_lagg: \"5 ms\"\n",
    )
    .unwrap();
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .arg("check")
            .arg(dir.path()),
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("tauscan.yaml:4:7:"), "{stderr}");
    assert!(stderr.contains("did you mean `max_lag`"), "{stderr}");
}

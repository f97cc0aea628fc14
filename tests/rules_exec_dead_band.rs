//! The dead-band rules' fixtures, run: the failing fixtures' states really rest the
//! reported number of counts away from a constant input, and the passing twins (scaled
//! states) reach it, as `tauscan check` says of each.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run the compiler or the binary should stop with the reason"
)]

use std::path::{Path, PathBuf};
use std::process::Command;

mod common;

struct Case {
    dir: &'static str,
    file: &'static str,
    /// C that puts the filter at rest at `v` (output units).
    set: &'static str,
    /// C expression for the output.
    read: &'static str,
    call: &'static str,
}

const CASES: &[Case] = &[
    Case {
        dir: "integer-dead-band/fail",
        file: "cave_rh.c",
        set: "cave_rh_permille = v;",
        read: "cave_rh_permille",
        call: "cave_rh_sample",
    },
    Case {
        dir: "integer-dead-band/pass",
        file: "cave_rh.c",
        set: "cave_rh_acc = v * 16;",
        read: "(cave_rh_acc >> 4)",
        call: "cave_rh_sample",
    },
    Case {
        dir: "dead-band-over-requirement/fail",
        file: "hive_scale.c",
        set: "hive_weight_counts = v;",
        read: "hive_weight_counts",
        call: "hive_scale_sample",
    },
    Case {
        dir: "dead-band-over-requirement/pass",
        file: "hive_scale.c",
        set: "hive_weight_acc = v * 16;",
        read: "(hive_weight_acc >> 4)",
        call: "hive_scale_sample",
    },
];

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/rules")
}

/// Runs the fixture to rest from many starting points under constant inputs above and
/// below, and returns the largest resting distance below (rising) and above (falling).
fn executed_band(case: &Case) -> (i64, i64) {
    let dir = tempfile::tempdir().unwrap();
    let source = fixtures().join(case.dir).join(case.file);
    let driver = format!(
        r#"#include <stdio.h>
#include "{src}"
static void set(int v) {{ {set} }}
int main(void) {{
    long rising = 0, falling = 0;
    for (int base = 1000; base < 1064; base++) {{
        for (int d = 1; d <= 64; d++) {{
            set(base);
            for (int n = 0; n < 4000; n++) {call}(base + d);
            long below = (long)(base + d) - (long){read};
            if (below > rising) rising = below;
            set(base);
            for (int n = 0; n < 4000; n++) {call}(base - d);
            long above = (long){read} - (long)(base - d);
            if (above > falling) falling = above;
        }}
    }}
    printf("%ld %ld\n", rising, falling);
    return 0;
}}
"#,
        src = source.display(),
        set = case.set,
        call = case.call,
        read = case.read
    );
    let c = dir.path().join("drive.c");
    std::fs::write(&c, driver).unwrap();
    let text = common::compile_and_run(
        &[&c],
        &["-O1", "-Wall", "-Wno-unused-function"],
        &dir.path().join("drive"),
    );
    let mut parts = text.split_whitespace().map(|x| x.parse::<i64>().unwrap());
    (parts.next().unwrap(), parts.next().unwrap())
}

fn reported(case: &Case) -> (Option<(i64, i64)>, Vec<String>) {
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["check", "--format", "json"])
            .arg(fixtures().join(case.dir)),
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let s = &doc["smoothers"][0];
    let stall = s["stall"].as_object().map(|o| {
        (
            o["rising"].as_i64().unwrap(),
            o["falling"].as_i64().unwrap(),
        )
    });
    let rules = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["rule"].as_str().unwrap().to_string())
        .collect();
    (stall, rules)
}

#[test]
fn the_dead_bands_the_rules_report_are_the_ones_the_code_has() {
    for case in CASES {
        // Source: execution of the fixture with the system C compiler (cc).
        let executed = executed_band(case);
        let (stall, rules) = reported(case);
        let rule = case.dir.split('/').next().unwrap();
        if case.dir.ends_with("fail") {
            assert!(executed.0 >= 15, "{}: executed {executed:?}", case.dir);
            assert_eq!(stall, Some(executed), "{}", case.dir);
            assert!(rules.iter().any(|r| r == rule), "{}: {rules:?}", case.dir);
        } else {
            assert!(
                executed.0 <= 1 && executed.1 <= 1,
                "{}: executed {executed:?}",
                case.dir
            );
            assert!(!rules.iter().any(|r| r == rule), "{}: {rules:?}", case.dir);
        }
    }
}

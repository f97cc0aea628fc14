//! Baselines, end to end: record today's findings, then the gate fails only on new ones;
//! moving lines keeps the baseline valid; a fixed finding is reported as gone.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot copy its fixture or run the binary should stop with the reason"
)]

use std::path::Path;
use std::process::Command;

mod common;

fn copy_demo() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let from = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/demo-greenhouse");
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        std::fs::copy(entry.path(), dir.path().join(entry.file_name())).unwrap();
    }
    dir
}

fn run(args: &[&str], dir: &Path) -> (i32, String, String) {
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(args)
            .arg(dir),
    );
    (
        out.status.code().unwrap(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn new_findings(json: &str) -> Vec<String> {
    let doc: serde_json::Value = serde_json::from_str(json).unwrap();
    let mut v: Vec<String> = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["baselined"] == false)
        .map(|f| {
            format!(
                "{} {}",
                f["rule"].as_str().unwrap(),
                f["file"].as_str().unwrap()
            )
        })
        .collect();
    v.sort();
    v
}

#[test]
fn only_new_findings_fail_a_gate_with_a_baseline() {
    let demo = copy_demo();
    let work = tempfile::tempdir().unwrap();
    let baseline = work.path().join("baseline.json");
    let b = baseline.to_str().unwrap();
    let (status, _, err) = run(&["baseline", "--output", b], demo.path());
    assert_eq!(status, 0, "{err}");
    assert!(err.contains("recorded 5 finding(s)"), "{err}");

    let (status, out, _) = run(&["check", "--format", "json", "--baseline", b], demo.path());
    assert_eq!(status, 0);
    assert!(new_findings(&out).is_empty());

    // Unrelated edits that move every line keep the baseline valid.
    for name in ["vent_motor.c", "soil.c", "light.c"] {
        let path = demo.path().join(name);
        let text = std::fs::read_to_string(&path).unwrap();
        std::fs::write(&path, format!("/* reviewed 2026-11 */\n\n{text}")).unwrap();
    }
    let (status, out, _) = run(&["check", "--format", "json", "--baseline", b], demo.path());
    assert_eq!(status, 0, "{out}");

    // A new hazard fails the gate, alone.
    std::fs::write(
        demo.path().join("fan.c"),
        "static float fan_rpm;\nvoid fan_sample(float raw) { fan_rpm = 0.9f * fan_rpm + 0.2f * raw; }\n",
    )
    .unwrap();
    std::fs::write(
        demo.path().join("tauscan.yaml"),
        std::fs::read_to_string(demo.path().join("tauscan.yaml")).unwrap()
            + "  - match: { function: fan_sample }\n    requires: { min_noise_reduction: \"20 dB\" }\n",
    )
    .unwrap();
    let (status, out, _) = run(&["check", "--format", "json", "--baseline", b], demo.path());
    assert_eq!(status, 1);
    assert_eq!(
        new_findings(&out),
        vec![
            "dc-gain-not-one fan.c",
            "noise-reduction-under-requirement fan.c"
        ]
    );

    // Fixing a baselined finding is reported: the baseline can be refreshed.
    let soil = demo.path().join("soil.c");
    let text = std::fs::read_to_string(&soil).unwrap();
    std::fs::write(
        &soil,
        text.replace("#define SOIL_WINDOW 8", "#define SOIL_WINDOW 16"),
    )
    .unwrap();
    let (_, _, err) = run(&["check", "--baseline", b], demo.path());
    assert!(
        err.contains(
            "baseline entry no longer occurs: noise-reduction-under-requirement at soil.c"
        ),
        "{err}"
    );
}

#[test]
fn a_broken_baseline_is_a_tool_error() {
    let demo = copy_demo();
    let work = tempfile::tempdir().unwrap();
    let baseline = work.path().join("baseline.json");
    std::fs::write(&baseline, "{ not json").unwrap();
    let (status, _, err) = run(
        &["check", "--baseline", baseline.to_str().unwrap()],
        demo.path(),
    );
    assert_eq!(status, 2);
    assert!(err.contains("not a tauscan baseline"), "{err}");
    let missing = work.path().join("none.json");
    let (status, _, _) = run(
        &["check", "--baseline", missing.to_str().unwrap()],
        demo.path(),
    );
    assert_eq!(status, 2);
}

//! `tauscan diff`, end to end on a temporary git repository with two commits: a filter
//! retuned, one added, one removed; and the errors outside a repository and for an
//! unknown revision.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run git or the binary should stop with the reason"
)]

use std::path::Path;
use std::process::Command;

mod common;

fn git(dir: &Path, args: &[&str]) {
    let out = Command::new("git")
        .arg("-C")
        .arg(dir)
        .args([
            "-c",
            "user.name=Test",
            "-c",
            "user.email=test@invalid",
            "-c",
            "commit.gpgsign=false",
        ])
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "git {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

const BATTERY_V1: &str = "#define CELL_DT 0.01f\n#define CELL_TAU 1.0f\nstatic float cell_v;\n\
void bms_tick(float raw) { cell_v += (CELL_DT / (CELL_TAU + CELL_DT)) * (raw - cell_v); }\n";
const BATTERY_V2: &str = "#define CELL_DT 0.01f\n#define CELL_TAU 0.5f\nstatic float cell_v;\n\
void bms_tick(float raw) { cell_v += (CELL_DT / (CELL_TAU + CELL_DT)) * (raw - cell_v); }\n";
const PUMP: &str = "static int flow;\nvoid pump_tick(int raw) { flow += (raw - flow) >> 3; }\n";
const FAN: &str = "static float fan;\nvoid fan_tick(float raw) { fan += 0.25f * (raw - fan); }\n";

fn repo() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let fw = dir.path().join("firmware");
    std::fs::create_dir(&fw).unwrap();
    git(dir.path(), &["init", "-q"]);
    std::fs::write(fw.join("battery.c"), BATTERY_V1).unwrap();
    std::fs::write(fw.join("pump.c"), PUMP).unwrap();
    git(dir.path(), &["add", "."]);
    git(dir.path(), &["commit", "-q", "-m", "first"]);
    std::fs::write(fw.join("battery.c"), BATTERY_V2).unwrap();
    std::fs::remove_file(fw.join("pump.c")).unwrap();
    std::fs::write(fw.join("fan.c"), FAN).unwrap();
    git(dir.path(), &["add", "-A"]);
    git(dir.path(), &["commit", "-q", "-m", "second"]);
    dir
}

fn diff(dir: &Path, args: &[&str]) -> (i32, String, String) {
    let out = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .arg("diff")
            .args(args)
            .current_dir(dir),
    );
    (
        out.status.code().unwrap(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn a_retune_an_addition_and_a_removal_are_reported_with_numbers() {
    let dir = repo();
    let fw = dir.path().join("firmware");
    let (status, out, err) = diff(&fw, &["HEAD~1..HEAD", "--format", "json"]);
    assert_eq!(status, 0, "{err}");
    let doc: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(doc["added"][0]["id"], "fan.c::fan_tick::fan");
    assert_eq!(doc["removed"][0]["id"], "pump.c::pump_tick::flow");
    let changed = &doc["changed"][0];
    assert_eq!(changed["id"], "battery.c::bms_tick::cell_v");
    // The retune halves the time constant: alpha = dt/(tau + dt) in float, from 0.01/1.01
    // to 0.01/0.51 (the backward-Euler RC form, DOMAIN section 1), at 100 Hz from CELL_DT.
    let a0 = changed["before"]["alpha"].as_f64().unwrap();
    let a1 = changed["after"]["alpha"].as_f64().unwrap();
    assert!(
        (a0 - 0.01f32 as f64 / (1.01f32 as f64)).abs() < 1e-6,
        "{a0}"
    );
    assert!(
        (a1 - 0.01f32 as f64 / (0.51f32 as f64)).abs() < 1e-6,
        "{a1}"
    );
    let c0 = changed["before"]["cutoff_hz"].as_f64().unwrap();
    let c1 = changed["after"]["cutoff_hz"].as_f64().unwrap();
    assert!(c1 / c0 > 1.9 && c1 / c0 < 2.1, "{c0} -> {c1}");
    assert_eq!(changed["after"]["rate_hz"].as_f64().unwrap().round(), 100.0);

    // Against the work tree, with an uncommitted change.
    std::fs::write(fw.join("fan.c"), FAN.replace("0.25f", "0.5f")).unwrap();
    let (status, out, _) = diff(&fw, &["HEAD"]);
    assert_eq!(status, 0);
    assert!(
        out.contains("changed  fan.c::fan_tick::fan  alpha 0.25 -> alpha 0.5"),
        "{out}"
    );
    let (_, md, _) = diff(&fw, &["HEAD", "--format", "markdown"]);
    assert!(md.contains("| changed | fan.c::fan\\_tick::fan |"), "{md}");
}

#[test]
fn outside_a_repository_and_unknown_revisions_are_clear_errors() {
    let plain = tempfile::tempdir().unwrap();
    std::fs::write(plain.path().join("fan.c"), FAN).unwrap();
    let (status, _, err) = diff(plain.path(), &["HEAD"]);
    assert_eq!(status, 2);
    assert!(err.contains("not inside a git repository"), "{err}");
    let dir = repo();
    let (status, _, err) = diff(&dir.path().join("firmware"), &["no-such-branch"]);
    assert_eq!(status, 2);
    assert!(
        err.contains("is not a revision of this repository"),
        "{err}"
    );
}

#[test]
fn a_shallow_clone_works_once_the_base_is_fetched() {
    let dir = repo();
    let clone = tempfile::tempdir().unwrap();
    let url = format!("file://{}", dir.path().display());
    let out = Command::new("git")
        .args(["clone", "-q", "--depth=1", &url])
        .arg(clone.path().join("c"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let c = clone.path().join("c");
    let base = Command::new("git")
        .arg("-C")
        .arg(dir.path())
        .args(["rev-parse", "HEAD~1"])
        .output()
        .unwrap();
    let base = String::from_utf8_lossy(&base.stdout).trim().to_string();
    // Before the fetch the base is not there: a clear error, not a wrong diff.
    let (status, _, err) = diff(&c.join("firmware"), &[&base]);
    assert_eq!(status, 2);
    assert!(err.contains("fetch it first"), "{err}");
    git(&c, &["fetch", "-q", "--depth=1", "origin", &base]);
    let (status, out, err) = diff(&c.join("firmware"), &[&base, "--format", "json"]);
    assert_eq!(status, 0, "{err}");
    let doc: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(doc["changed"][0]["id"], "battery.c::bms_tick::cell_v");
}

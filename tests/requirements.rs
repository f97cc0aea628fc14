//! The requirement rules at their boundaries: for every kind of requirement (cutoff
//! minimum and maximum, lag, settling, noise reduction, dead band), a spec just inside the
//! smoother's present figure passes and one just outside fails.
//!
//! The present figures are read from `tauscan list --format json`, first held against the
//! closed forms of the first-order smoother (so the boundary is at the true figure, not
//! merely at tauscan's), then written into temporary specs with a margin of 0.5 % each
//! way; for the dead band, a maximum equal to the band passes and one count less fails.
//! Which rule judges which requirement is tauscan's; this file runs `tauscan check` and
//! reads its verdict.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test helper that cannot run tauscan or write its temporary files should stop the test with the cause"
)]

use serde_json::Value;
use std::path::Path;
use std::process::Command;

mod common;

/// A grain dryer: the plenum air temperature in float, the grain moisture in integer
/// counts with a shift, both run from the 50 Hz dryer tick.
const DRYER_C: &str = r#"/* Grain dryer: plenum air and grain moisture, smoothed in the 50 Hz tick. */
#include <stdint.h>

static float plenum_c;
static int32_t moisture_counts;

void dryer_plenum_sample(float raw_c)
{
    plenum_c += 0.08f * (raw_c - plenum_c);
}

void dryer_moisture_sample(int32_t raw_counts)
{
    moisture_counts += (raw_counts - moisture_counts) >> 3;
}

void dryer_tick(float raw_c, int32_t raw_counts)
{
    dryer_plenum_sample(raw_c);
    dryer_moisture_sample(raw_counts);
}
"#;

const RATE_HZ: f64 = 50.0;
const RATES: &str = "rates:\n  - { function: dryer_tick, rate: \"50 Hz\" }\n";
const PLENUM: &str = "dryer.c::dryer_plenum_sample::plenum_c";
const MOISTURE: &str = "dryer.c::dryer_moisture_sample::moisture_counts";
const MARGIN: f64 = 0.005;

fn tauscan(args: &[&str]) -> (Option<i32>, Value, String) {
    let out = common::output(Command::new(env!("CARGO_BIN_EXE_tauscan")).args(args));
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    let json = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "no JSON from tauscan {args:?} ({e}); status {:?}\nstderr:\n{stderr}",
            out.status.code()
        )
    });
    (out.status.code(), json, stderr)
}

fn dryer() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("dryer.c"), DRYER_C).unwrap();
    dir
}

fn record<'a>(json: &'a Value, id: &str) -> &'a Value {
    json["smoothers"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["id"] == id)
        .unwrap_or_else(|| panic!("no smoother `{id}` in {json}"))
}

fn number(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// The present figures of one smoother, as `tauscan list` reports them.
#[derive(Debug, Clone, Copy)]
struct Present {
    alpha: f64,
    cutoff_hz: f64,
    lag_s: f64,
    settle_90_s: f64,
    settle_95_s: f64,
    noise_ratio: f64,
}

fn present(json: &Value, id: &str) -> Present {
    let s = record(json, id);
    Present {
        alpha: number(&s["alpha"]),
        cutoff_hz: number(&s["cutoff_hz"]),
        lag_s: number(&s["lag_s"]),
        settle_90_s: number(&s["settle"]["90"]["s"]),
        settle_95_s: number(&s["settle"]["95"]["s"]),
        noise_ratio: number(&s["noise_ratio"]),
    }
}

fn close(a: f64, b: f64, relative: f64) -> bool {
    (a - b).abs() <= relative * b.abs()
}

/// The figures of `y += alpha (u - y)` at `fs`, from the closed forms.
///
/// Source: the first-order section `H(z) = alpha / (1 - p z^-1)`, `p = 1 - alpha`
/// (textbook discrete-time analysis, from memory): exact -3 dB point
/// `sin(wc/2) = alpha / (2 sqrt(p))`; delay to a ramp `p / alpha` samples; step response
/// `1 - p^n` after n updates, so a fraction q is first reached after
/// `ceil(ln(1 - q) / ln p)` updates; white-noise ratio `sqrt(alpha / (2 - alpha))` (the sum
/// of the squared impulse response `alpha^2 / (1 - p^2)`, square-rooted).
fn held_against_closed_forms(id: &str, p: Present, alpha: f64, fs: f64) {
    let pole = 1.0 - alpha;
    let wc = 2.0 * (alpha / (2.0 * pole.sqrt())).asin();
    let cutoff = wc * fs / std::f64::consts::TAU;
    let lag = pole / alpha / fs;
    let updates = |q: f64| ((1.0 - q).ln() / pole.ln()).ceil();
    let noise = (alpha / (2.0 - alpha)).sqrt();
    assert!(close(p.alpha, alpha, 1e-12), "{id}: alpha {p:?}");
    assert!(
        close(p.cutoff_hz, cutoff, 1e-9),
        "{id}: cutoff {p:?} vs {cutoff}"
    );
    assert!(close(p.lag_s, lag, 1e-9), "{id}: lag {p:?} vs {lag}");
    assert!(
        close(p.settle_90_s, updates(0.9) / fs, 1e-9),
        "{id}: 90 % {p:?} vs {}",
        updates(0.9) / fs
    );
    assert!(
        close(p.settle_95_s, updates(0.95) / fs, 1e-9),
        "{id}: 95 % {p:?} vs {}",
        updates(0.95) / fs
    );
    assert!(
        close(p.noise_ratio, noise, 1e-9),
        "{id}: noise {p:?} vs {noise}"
    );
}

/// The verdict of `tauscan check` under a spec holding one smoother to `requires`: the
/// findings of `rule` on that smoother, and the exit status.
fn verdict(dir: &Path, function: &str, id: &str, requires: &str, rule: &str) -> (usize, i32) {
    let spec = format!(
        "{RATES}smoothers:\n  - match: {{ function: {function} }}\n    requires:\n{requires}"
    );
    let spec_file = dir.join("boundary.yaml");
    std::fs::write(&spec_file, &spec).unwrap();
    let (status, json, stderr) = tauscan(&[
        "check",
        "--format",
        "json",
        "--spec",
        spec_file.to_str().unwrap(),
        dir.to_str().unwrap(),
    ]);
    let status = status.unwrap_or(-1);
    assert!(
        status == 0 || status == 1,
        "tauscan check failed ({status}) on the spec:\n{spec}\n{stderr}"
    );
    let found = json["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["rule"] == rule && f["smoother"] == id)
        .count();
    (found, status)
}

/// One requirement, inside and outside: the inside spec must pass (no finding of the rule,
/// exit 0), the outside one fail (one finding, exit 1).
fn pair(dir: &Path, function: &str, id: &str, rule: &str, inside: &str, outside: &str) {
    let (found, status) = verdict(dir, function, id, inside, rule);
    assert!(
        found == 0 && status == 0,
        "{id}: just inside the present figure\n{inside}should pass; {rule} found {found} time(s), exit {status}"
    );
    let (found, status) = verdict(dir, function, id, outside, rule);
    assert!(
        found == 1 && status == 1,
        "{id}: just outside the present figure\n{outside}should fail; {rule} found {found} time(s), exit {status}"
    );
}

#[test]
fn every_timed_requirement_and_the_noise_reduction_decide_at_the_present_figure() {
    let dir = dryer();
    let (status, listed, stderr) = tauscan(&[
        "list",
        "--format",
        "json",
        "--rate",
        "50 Hz",
        dir.path().to_str().unwrap(),
    ]);
    assert_eq!(status, Some(0), "{stderr}");
    // Source: C11 6.4.4.2p4 (0.08f is 0.08 rounded to float); the shift by 3 is a gain
    // of 2^-3 (C11 6.5.7p5, arithmetic on GCC and Clang for negative values).
    let cases = [
        (PLENUM, "dryer_plenum_sample", f64::from(0.08f32)),
        (MOISTURE, "dryer_moisture_sample", 0.125),
    ];
    for (id, function, alpha) in cases {
        let p = present(&listed, id);
        held_against_closed_forms(id, p, alpha, RATE_HZ);
        let up = 1.0 + MARGIN;
        let down = 1.0 - MARGIN;
        let hz = |v: f64| format!("\"{v} Hz\"");
        let s = |v: f64| format!("\"{v} s\"");
        pair(
            dir.path(),
            function,
            id,
            "cutoff-outside-requirement",
            &format!("      cutoff: {{ min: {} }}\n", hz(p.cutoff_hz * down)),
            &format!("      cutoff: {{ min: {} }}\n", hz(p.cutoff_hz * up)),
        );
        pair(
            dir.path(),
            function,
            id,
            "cutoff-outside-requirement",
            &format!("      cutoff: {{ max: {} }}\n", hz(p.cutoff_hz * up)),
            &format!("      cutoff: {{ max: {} }}\n", hz(p.cutoff_hz * down)),
        );
        pair(
            dir.path(),
            function,
            id,
            "lag-over-requirement",
            &format!("      max_lag: {}\n", s(p.lag_s * up)),
            &format!("      max_lag: {}\n", s(p.lag_s * down)),
        );
        for (fraction, t) in [(0.9, p.settle_90_s), (0.95, p.settle_95_s)] {
            pair(
                dir.path(),
                function,
                id,
                "settling-over-requirement",
                &format!(
                    "      settle: {{ fraction: {fraction}, within: {} }}\n",
                    s(t * up)
                ),
                &format!(
                    "      settle: {{ fraction: {fraction}, within: {} }}\n",
                    s(t * down)
                ),
            );
        }
        // Source: the decibel for amplitude ratios, 20 log10; a reduction of D dB is a
        // ratio of 10^(-D/20), so asking for less than the present reduction passes.
        let db = -20.0 * p.noise_ratio.log10();
        pair(
            dir.path(),
            function,
            id,
            "noise-reduction-under-requirement",
            &format!("      min_noise_reduction: \"{} dB\"\n", db * down),
            &format!("      min_noise_reduction: \"{} dB\"\n", db * up),
        );
    }
}

#[test]
fn the_spec_rate_gives_the_same_figures_as_the_command_line_rate() {
    // The boundaries above are taken from `tauscan list --rate`; the check applies the
    // spec's rate through the call graph. Both must describe the same smoother.
    let dir = dryer();
    let (_, listed, _) = tauscan(&[
        "list",
        "--format",
        "json",
        "--rate",
        "50 Hz",
        dir.path().to_str().unwrap(),
    ]);
    let spec_file = dir.path().join("rates-only.yaml");
    std::fs::write(&spec_file, RATES).unwrap();
    let (status, checked, stderr) = tauscan(&[
        "check",
        "--format",
        "json",
        "--spec",
        spec_file.to_str().unwrap(),
        dir.path().to_str().unwrap(),
    ]);
    assert!(matches!(status, Some(0 | 1)), "{stderr}");
    for id in [PLENUM, MOISTURE] {
        let a = present(&listed, id);
        let b = present(&checked, id);
        assert_eq!(record(&checked, id)["rate_kind"], "spec");
        for (what, x, y) in [
            ("cutoff", a.cutoff_hz, b.cutoff_hz),
            ("lag", a.lag_s, b.lag_s),
            ("90 %", a.settle_90_s, b.settle_90_s),
            ("noise", a.noise_ratio, b.noise_ratio),
        ] {
            assert!(close(x, y, 1e-12), "{id} {what}: list {x}, check {y}");
        }
    }
}

#[test]
fn the_dead_band_maximum_passes_at_the_band_and_fails_one_count_below() {
    let dir = dryer();
    let (status, listed, stderr) =
        tauscan(&["list", "--format", "json", dir.path().to_str().unwrap()]);
    assert_eq!(status, Some(0), "{stderr}");
    let stall = &record(&listed, MOISTURE)["stall"];
    let rising = stall["rising"].as_u64().unwrap();
    let falling = stall["falling"].as_u64().unwrap();
    // Source: C11 6.5.7p5 with GCC's arithmetic shift. `y += (u - y) >> 3` stops moving
    // when (u - y) >> 3 == 0, i.e. 0 <= u - y <= 7: the state rests up to 7 counts below
    // a rising input; for u < y the shift gives -1 or less, so it always reaches a falling
    // one.
    assert_eq!((rising, falling), (7, 0), "{stall}");
    let widest = rising.max(falling);
    pair(
        dir.path(),
        "dryer_moisture_sample",
        MOISTURE,
        "dead-band-over-requirement",
        &format!("      max_dead_band: \"{widest} counts\"\n"),
        &format!("      max_dead_band: \"{} counts\"\n", widest - 1),
    );
}

#[test]
fn an_overflow_that_only_the_whole_of_int_would_reach_is_a_note_asking_for_the_range() {
    // Source: C11 6.5p5 (signed overflow) — `y * 15` passes INT_MAX only for states above
    // INT_MAX / 15, which an `int` reading is not known to reach without a declared range.
    let dir = tempfile::tempdir().unwrap();
    common::write(
        dir.path(),
        "volt.c",
        "static int mv;\nvoid volt_sample(int raw) { mv = (mv * 15 + raw) / 16; }\n",
    );
    let run = common::tauscan_in(
        dir.path(),
        &["check", ".", "--format", "json"],
        common::LIMIT,
    );
    run.assert_exit(0, "a note does not fail the gate");
    let json = run.json();
    let overflow: Vec<&Value> = json["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["rule"] == "integer-overflow")
        .collect();
    assert_eq!(overflow.len(), 1, "{}", run.context());
    assert_eq!(overflow[0]["severity"], "note");
    assert!(
        overflow[0]["message"]
            .as_str()
            .unwrap()
            .contains("input.range"),
        "{}",
        overflow[0]
    );
    // With the range declared, 4095 * 15 + 4095 fits an `int`: nothing to say.
    common::write(
        dir.path(),
        "tauscan.yaml",
        "smoothers:\n  - match: { function: volt_sample }\n    input: { range: [0, 4095] }\n",
    );
    let run = common::tauscan_in(
        dir.path(),
        &["check", ".", "--format", "json"],
        common::LIMIT,
    );
    let json = run.json();
    assert!(
        !json["findings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|f| f["rule"] == "integer-overflow"),
        "{}",
        run.context()
    );
}

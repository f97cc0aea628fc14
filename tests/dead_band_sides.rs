//! The dead band follows C's rounding over the values the input really takes: run in C,
//! the smoothers of `fixtures/dead-band-sides/shade.c` rest on one side only where every
//! value is at or above zero (truncation toward zero rounds down there, C11 6.5.5p6), and
//! on both sides where values go below zero, for division and shift, signed and unsigned.
//! Each band tauscan reports (from the input's type with no spec, with the spec's
//! `input.range` when it declares one) is held against the band measured by running the
//! fixture compiled with the system C compiler.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run the compiler or the binary should stop with the reason"
)]

use serde_json::Value;
use std::path::PathBuf;
use std::time::Duration;

mod common;

struct Case {
    function: &'static str,
    state: &'static str,
    /// Whether the input's type takes values below zero.
    signed: bool,
}

const CASES: &[Case] = &[
    Case {
        function: "shade_lux_sample",
        state: "shade_lux",
        signed: true,
    },
    Case {
        function: "shade_motor_sample",
        state: "shade_motor_ma",
        signed: true,
    },
    Case {
        function: "shade_pot_sample",
        state: "shade_pot",
        signed: false,
    },
    Case {
        function: "shade_wind_sample",
        state: "shade_wind",
        signed: true,
    },
    Case {
        function: "shade_temp_sample",
        state: "shade_temp",
        signed: true,
    },
];

fn fixture() -> PathBuf {
    common::fixture("dead-band-sides")
}

/// The executed band (rising, falling) of every case, for rest points drawn from
/// `[lo, hi]` (64 bases in its part at or above zero, and 64 in its part below zero when
/// it has one): from rest at a base, 4000 updates with the input `d` counts away (1..64,
/// inside the range), then the distance left.
fn executed(lo: i64, hi: i64) -> Vec<(i64, i64)> {
    let dir = tempfile::tempdir().unwrap();
    let source = fixture().join("shade.c");
    let mut cases = String::new();
    for c in CASES {
        cases.push_str(&format!(
            "    band({lo}, {hi}, set_{s}, run_{s}, read_{s});\n",
            s = c.state
        ));
    }
    let mut accessors = String::new();
    for c in CASES {
        accessors.push_str(&format!(
            "static void set_{s}(long v) {{ {s} = v; }}\n\
             static void run_{s}(long u) {{ {f}(u); }}\n\
             static long read_{s}(void) {{ return (long){s}; }}\n",
            s = c.state,
            f = c.function
        ));
    }
    let driver = format!(
        r#"#include <stdio.h>
#include "{src}"
{accessors}
static void band(long lo, long hi, void (*set)(long), void (*run)(long), long (*read)(void)) {{
    long rising = 0, falling = 0;
    /* Rest points a third of the way into the part of the range at or above zero, and
       into the part below zero, where the range has them. */
    long top = hi < 0 ? 0 : hi, bottom = lo > 0 ? lo : 0;
    long starts[2] = {{ bottom + (top - bottom) / 3, (lo < 0 ? 0 : 1) }};
    int parts = 1;
    if (lo < -128) {{ starts[1] = (hi < 0 ? hi : 0) - ((hi < 0 ? hi : 0) - lo) / 3 - 64; parts = 2; }}
    for (int k = 0; k < parts; k++) {{
        for (long base = starts[k]; base < starts[k] + 64; base++) {{
            for (long d = 1; d <= 64; d++) {{
                if (base + d <= hi) {{
                    set(base);
                    for (int n = 0; n < 4000; n++) run(base + d);
                    long below = base + d - read();
                    if (below > rising) rising = below;
                }}
                if (base - d >= lo) {{
                    set(base);
                    for (int n = 0; n < 4000; n++) run(base - d);
                    long above = read() - (base - d);
                    if (above > falling) falling = above;
                }}
            }}
        }}
    }}
    printf("%ld %ld\n", rising, falling);
}}
int main(void) {{
{cases}    return 0;
}}
"#,
        src = source.display(),
    );
    let c = dir.path().join("drive.c");
    std::fs::write(&c, driver).unwrap();
    let text = common::compile_and_run(
        &[&c],
        &["-O1", "-Wall", "-Wno-unused-function"],
        &dir.path().join("drive"),
    );
    text.lines()
        .map(|l| {
            let mut p = l.split_whitespace().map(|x| x.parse::<i64>().unwrap());
            (p.next().unwrap(), p.next().unwrap())
        })
        .collect()
}

fn band(v: &Value) -> Option<(i64, i64)> {
    v.as_object().map(|o| {
        (
            o["rising"].as_i64().unwrap(),
            o["falling"].as_i64().unwrap(),
        )
    })
}

fn record<'a>(json: &'a Value, state: &str) -> &'a Value {
    json["smoothers"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["state"] == state)
        .unwrap_or_else(|| panic!("no smoother `{state}`: {json}"))
}

/// `tauscan ARGS .` in a copy of the fixture with `spec` as its tauscan.yaml (none when
/// `spec` is None).
fn run(args: &[&str], spec: Option<&str>) -> Value {
    let dir = tempfile::tempdir().unwrap();
    common::copy_tree(&fixture(), dir.path());
    if let Some(spec) = spec {
        std::fs::write(dir.path().join("tauscan.yaml"), spec).unwrap();
    }
    let mut all = args.to_vec();
    all.push(".");
    let run = common::tauscan_in(dir.path(), &all, Duration::from_secs(120));
    run.assert_finished();
    run.json()
}

fn spec_with_range(lo: i64, hi: i64) -> String {
    let mut text = String::from("smoothers:\n");
    for c in CASES {
        text.push_str(&format!(
            "  - match: {{ function: {} }}\n    input: {{ range: [{lo}, {hi}] }}\n",
            c.function
        ));
    }
    text
}

#[test]
fn with_a_declared_range_the_band_is_the_one_c_gives_over_that_range() {
    for (lo, hi) in [(0, 4095), (-2048, 2047)] {
        // Source: execution of the fixture with the system C compiler.
        let truth = executed(lo, hi);
        let json = run(
            &["check", "--format", "json"],
            Some(&spec_with_range(lo, hi)),
        );
        for (case, executed) in CASES.iter().zip(&truth) {
            let s = record(&json, case.state);
            if !case.signed && lo < 0 {
                continue; // An unsigned input cannot take that range.
            }
            assert_eq!(
                band(&s["stall"]),
                Some(*executed),
                "{} over [{lo}, {hi}]: {s}",
                case.state
            );
            assert!(s["stall_nonnegative"].is_null(), "{s}");
        }
    }
}

#[test]
fn with_no_range_a_signed_input_says_both_sides_and_the_side_at_or_above_zero() {
    // Source: execution of the fixture with the system C compiler. Over the whole of a
    // signed type, rest points below zero count too; at or above zero, only those.
    let both = executed(-2048, 2047);
    let above = executed(0, 4095);
    let json = run(&["list", "--format", "json"], None);
    for (i, case) in CASES.iter().enumerate() {
        let s = record(&json, case.state);
        if case.signed {
            assert_eq!(band(&s["stall"]), Some(both[i]), "{}: {s}", case.state);
            let expected_nonnegative = (above[i] != both[i]).then_some(above[i]);
            assert_eq!(
                band(&s["stall_nonnegative"]),
                expected_nonnegative,
                "{}: {s}",
                case.state
            );
        } else {
            assert_eq!(band(&s["stall"]), Some(above[i]), "{}: {s}", case.state);
            assert!(s["stall_nonnegative"].is_null(), "{s}");
        }
    }
    // The shapes the trade expects, from the runs themselves: truncating division rests
    // on one side at or above zero and on both below; the shift on one side everywhere.
    assert_eq!(above[0].1, 0, "{above:?}");
    assert!(both[0].1 > 0, "{both:?}");
    assert_eq!(both[3].1, 0, "{both:?}");
}

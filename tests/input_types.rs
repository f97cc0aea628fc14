//! With no `input.range` in the spec, an integer smoother's input takes the range of its
//! declared type, also where the input is a call of a function defined outside the scan:
//! its prototype's return type (`uint16_t adc_read(void);` reads 0..65535, C11 7.20.1.1).
//! The overflow finding says which types the range came from.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run the binary should stop with the reason"
)]

use serde_json::Value;
use std::time::Duration;

mod common;

const PUMP: &str = "#include <stdint.h>\n\
    /* Irrigation pump: the shunt voltage from the ADC driver (defined elsewhere). */\n\
    uint16_t pump_adc_read(void);\n\
    static int16_t pump_mv;\n\
    void pump_sample(void) { pump_mv = (pump_mv * 15 + pump_adc_read()) / 16; }\n";

fn check(args: &[&str]) -> Value {
    let dir = tempfile::tempdir().unwrap();
    common::write(dir.path(), "pump.c", PUMP);
    let mut all = vec!["check", "--format", "json"];
    all.extend_from_slice(args);
    all.push(".");
    let run = common::tauscan_in(dir.path(), &all, Duration::from_secs(60));
    run.assert_finished();
    run.json()
}

#[test]
fn a_call_of_a_prototyped_function_has_its_return_type() {
    let doc = check(&["--int-bits", "16"]);
    let overflow: Vec<&Value> = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["rule"] == "integer-overflow")
        .collect();
    assert_eq!(overflow.len(), 1, "{doc:#}");
    // A fixed-width type bounds it: an error, not the note of a plain `int`.
    assert_eq!(overflow[0]["severity"], "error");
    let message = overflow[0]["message"].as_str().unwrap();
    // The input is unsigned (C11 7.20.1.1: uint16_t holds 0..65535), so the values tried
    // start at 0; the state's int16_t caps them at 32767.
    for part in [
        "0..32767",
        "`int16_t` `pump_mv`",
        "`uint16_t` `pump_adc_read()`",
        "the spec gives no `input.range`",
    ] {
        assert!(message.contains(part), "`{part}` missing from: {message}");
    }
    // The dead band over an unsigned input is one-sided: truncation toward zero rounds
    // down for values at or above zero (C11 6.5.5p6).
    let s = &doc["smoothers"][0];
    assert_eq!(s["stall"]["falling"], 0, "{s}");
    assert!(s["stall_nonnegative"].is_null(), "{s}");
}

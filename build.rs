//! Tells the test suite whether a Chromium is at hand, so that the headless-browser test of
//! `tests/report.rs` shows as ignored (with the reason) rather than passing without having
//! looked at anything.
//!
//! The browser is looked for as the test itself looks for it: `TAUSCAN_TEST_CHROMIUM`, else
//! `/usr/bin/chromium`, else `chromium` on the PATH. When none is found and the build is not
//! in CI (`CI` is not `true` or `1`), `cfg(tauscan_no_chromium)` is set. In CI the cfg is
//! never set: the test runs and fails when the browser is missing. The script reads nothing
//! of the crate's sources and has no dependencies; it reruns when one of those variables
//! changes (or this file), so a browser installed later is seen after `touch build.rs`.

use std::path::PathBuf;

fn chromium_found() -> bool {
    if std::env::var_os("TAUSCAN_TEST_CHROMIUM").is_some() {
        return true;
    }
    if PathBuf::from("/usr/bin/chromium").is_file() {
        return true;
    }
    std::env::var_os("PATH")
        .is_some_and(|paths| std::env::split_paths(&paths).any(|p| p.join("chromium").is_file()))
}

fn main() {
    println!("cargo::rustc-check-cfg=cfg(tauscan_no_chromium)");
    println!("cargo::rerun-if-changed=build.rs");
    for variable in ["TAUSCAN_TEST_CHROMIUM", "CI", "PATH"] {
        println!("cargo::rerun-if-env-changed={variable}");
    }
    let in_ci = matches!(std::env::var("CI").as_deref(), Ok("true") | Ok("1"));
    if !in_ci && !chromium_found() {
        println!("cargo::rustc-cfg=tauscan_no_chromium");
    }
}

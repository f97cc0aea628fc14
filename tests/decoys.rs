//! Holds tauscan to silence on `fixtures/decoys`: C that refers to itself the way smoothers
//! do (integrators, counters, peak holds, crossfades, slew limiters, leaky integrators,
//! resonators and rotations, expo maps, checksums, number parsers, up/down trackers, gains
//! computed at run time, dead stores, state that lives for one call, unit tests of a
//! filter, an update behind a guard that a const table makes false, a coupled pair such
//! as a fixed-point rotation) and is not one.
//!
//! A second test makes sure the decoys still contain such self-referencing assignments,
//! so that the first cannot pass on empty or defanged files. Deciding what is a smoother
//! is tauscan's; this file only runs it and reads its JSON.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

use serde_json::Value;
use std::path::PathBuf;
use std::process::Command;

mod common;

fn decoy_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join("decoys")
}

fn decoy_files() -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(decoy_dir())
        .unwrap()
        .map(|entry| entry.unwrap().path())
        .filter(|path| path.extension().is_some_and(|ext| ext == "c"))
        .collect();
    files.sort();
    files
}

#[test]
fn no_decoy_is_reported_as_a_smoother() {
    let output = common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(["list", "--format", "json", "fixtures/decoys"])
            .current_dir(env!("CARGO_MANIFEST_DIR")),
    );
    let stderr = String::from_utf8_lossy(&output.stderr);
    // 0 is clean and 1 means findings; anything else is a tool failure, never a pass.
    let code = output.status.code();
    assert!(
        matches!(code, Some(0 | 1)),
        "tauscan list fixtures/decoys exited with {code:?}\nstderr:\n{stderr}"
    );
    let json: Value = serde_json::from_slice(&output.stdout).unwrap_or_else(|e| {
        panic!(
            "tauscan did not print JSON: {e}\nstdout:\n{}\nstderr:\n{stderr}",
            String::from_utf8_lossy(&output.stdout)
        )
    });
    assert_eq!(json["schema"], 1, "unexpected schema in {json}");
    let smoothers = json["smoothers"]
        .as_array()
        .unwrap_or_else(|| panic!("no smoothers array in {json}"));
    let reported: Vec<String> = smoothers
        .iter()
        .map(|s| {
            format!(
                "{}:{} {} / {} ({}, alpha {}, dc_gain {})",
                s["file"].as_str().unwrap_or("?"),
                s["line"],
                s["function"],
                s["state"],
                s["form"],
                s["alpha"],
                s["dc_gain"]
            )
        })
        .collect();
    // Source: DOMAIN.md section 1 and 6 (integrators, counters, growth, peak holds, block
    // and cumulative means, crossfades, slew limiters, leaky integrators, resonators and
    // expo maps are not smoothers); common practice, no published source.
    assert!(
        reported.is_empty(),
        "{} decoy(s) reported as smoothers:\n  {}",
        reported.len(),
        reported.join("\n  ")
    );
}

/// Whether a line of C holds an assignment whose target is on its own right side (or is
/// implied there by a compound operator or `++`/`--`). Deliberately simple and textual.
fn is_self_referencing(line: &str) -> bool {
    let code = line.split("//").next().unwrap_or("").trim();
    // Block comment lines start with "* " or "*/"; a dereference like `*p = ...` does not.
    let comment = code == "*" || ["* ", "*/", "/*"].iter().any(|p| code.starts_with(p));
    if code.is_empty() || comment || code.starts_with('#') {
        return false;
    }
    if code.contains("++") || code.contains("--") {
        return true;
    }
    let bytes = code.as_bytes();
    for i in 0..bytes.len() {
        if bytes[i] != b'=' {
            continue;
        }
        let next = bytes.get(i + 1).copied();
        let prev = if i > 0 { Some(bytes[i - 1]) } else { None };
        let before_prev = if i > 1 { Some(bytes[i - 2]) } else { None };
        if next == Some(b'=') || matches!(prev, Some(b'=' | b'!')) {
            continue;
        }
        // `<=` and `>=` compare; `<<=` and `>>=` assign.
        if matches!(prev, Some(b'<' | b'>')) && before_prev != prev {
            continue;
        }
        let compound = matches!(
            prev,
            Some(b'+' | b'-' | b'*' | b'/' | b'%' | b'&' | b'|' | b'^' | b'<' | b'>')
        );
        if compound {
            return true;
        }
        let target = lvalue_before(&code[..i]);
        if target.is_empty() {
            continue;
        }
        return contains_word(&code[i + 1..], &target);
    }
    false
}

/// The lvalue that ends the text before an `=`: identifiers joined by `.`, `->`, `[...]`,
/// with a leading `*`.
fn lvalue_before(text: &str) -> String {
    let text = text.trim_end();
    let chars: Vec<char> = text.chars().collect();
    let mut start = chars.len();
    let mut depth = 0usize;
    while start > 0 {
        let c = chars[start - 1];
        let keep = match c {
            ']' => {
                depth += 1;
                true
            }
            '[' if depth > 0 => {
                depth -= 1;
                true
            }
            _ if depth > 0 => true,
            '>' if start > 1 && chars[start - 2] == '-' => {
                start -= 1;
                true
            }
            '.' | '*' => true,
            _ => c.is_ascii_alphanumeric() || c == '_',
        };
        if !keep {
            break;
        }
        start -= 1;
    }
    chars[start..].iter().collect()
}

fn contains_word(haystack: &str, word: &str) -> bool {
    let is_ident = |c: char| c.is_ascii_alphanumeric() || c == '_';
    haystack.match_indices(word).any(|(at, _)| {
        let before = haystack[..at].chars().next_back();
        let after = haystack[at + word.len()..].chars().next();
        !before.is_some_and(is_ident) && !after.is_some_and(is_ident)
    })
}

#[test]
fn self_reference_detector_reads_the_lines_it_should() {
    // Common practice, no source: the examples are written for this detector.
    assert!(is_self_referencing("    n += 1;"));
    assert!(is_self_referencing("    ticks++;"));
    assert!(is_self_referencing("    x >>= 1;"));
    assert!(is_self_referencing("    g_pid.integral += err * KI;"));
    assert!(is_self_referencing("    v = 0.98f * v + acc * dt;"));
    assert!(is_self_referencing("    *channel = *channel * k;"));
    assert!(is_self_referencing("    buf[i] = buf[i] * 2;"));
    assert!(!is_self_referencing("    out = a * x + (1.0f - a) * z;"));
    assert!(!is_self_referencing("    if (u >= peak) {"));
    assert!(!is_self_referencing("    return a <= b;"));
    assert!(!is_self_referencing(" * y = y + 1 in a comment"));
    assert!(!is_self_referencing("    total = subtotal + u;"));
}

#[test]
fn decoys_really_refer_to_themselves() {
    let files = decoy_files();
    assert!(
        files.len() >= 8,
        "only {} decoy files in {}",
        files.len(),
        decoy_dir().display()
    );
    let mut thin = Vec::new();
    let mut total = 0;
    for path in &files {
        let text = std::fs::read_to_string(path).unwrap();
        let count = text.lines().filter(|l| is_self_referencing(l)).count();
        total += count;
        println!("{}: {count} self-referencing lines", path.display());
        // Every decoy file exists to offer at least two look-alikes.
        if count < 2 {
            thin.push(format!("{} ({count})", path.display()));
        }
    }
    assert!(
        thin.is_empty(),
        "decoy files with fewer than two self-referencing assignments: {thin:?}"
    );
    assert!(
        total >= 3 * files.len(),
        "only {total} self-references in all decoys"
    );
}

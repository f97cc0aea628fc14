//! The baseline file: today's findings, recorded so a gate on an inherited code base fails
//! only on findings that are new.
//!
//! ```text
//! { "tauscan_baseline": 1,
//!   "findings": [ { "fingerprint": "9c1e…", "rule": "integer-dead-band",
//!                   "smoother": "vent.c::vent_tick::y", "file": "vent.c", "line": 14,
//!                   "message": "…" } ] }
//! ```
//! Entries are matched by `fingerprint` alone (`rules::fingerprint`), which does not
//! depend on line numbers, so edits that only move code keep them; the other fields are
//! for the people who read the file.

use crate::check::CheckResult;
use crate::rules::fingerprint;
use crate::scan::Scan;
use crate::spec::Spec;
use serde::{Deserialize, Serialize};

pub const VERSION: u32 = 1;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Entry {
    pub fingerprint: String,
    pub rule: String,
    #[serde(default)]
    pub smoother: Option<String>,
    #[serde(default)]
    pub file: Option<String>,
    #[serde(default)]
    pub line: Option<u32>,
    #[serde(default)]
    pub message: String,
}

#[derive(Serialize, Deserialize)]
struct File {
    tauscan_baseline: u32,
    findings: Vec<Entry>,
}

/// The entries for the findings of a check (suppressed ones need no baseline).
pub fn entries(scan: &Scan, result: &CheckResult, spec: &Spec) -> Vec<Entry> {
    result
        .findings
        .iter()
        .filter(|f| f.suppressed.is_none())
        .map(|f| Entry {
            fingerprint: fingerprint(f, &result.ids, spec),
            rule: f.rule.to_string(),
            smoother: f.smoother.and_then(|i| result.ids.get(i).cloned()),
            file: f.span.map(|s| scan.program.path(s.file).to_string()),
            line: f.span.map(|s| s.line).or(f.spec_line.map(|l| l as u32)),
            message: f.message.clone(),
        })
        .collect()
}

pub fn render(entries: &[Entry]) -> String {
    let file = File {
        tauscan_baseline: VERSION,
        findings: entries.to_vec(),
    };
    let mut text = serde_json::to_string_pretty(&file).unwrap_or_else(|_| "{}".into());
    text.push('\n');
    text
}

/// Reads a baseline file's text; the error says what is wrong with it.
pub fn parse(text: &str) -> Result<Vec<Entry>, String> {
    let file: File =
        serde_json::from_str(text).map_err(|e| format!("not a tauscan baseline: {e}"))?;
    if file.tauscan_baseline != VERSION {
        return Err(format!(
            "baseline version {} is not one this tauscan reads ({VERSION})",
            file.tauscan_baseline
        ));
    }
    Ok(file.findings)
}

/// Marks the findings the baseline knows; returns the baseline entries that no longer
/// occur (fixed, or changed beyond recognition).
pub fn apply(result: &mut CheckResult, spec: &Spec, baseline: &[Entry]) -> Vec<Entry> {
    let mut seen = vec![false; baseline.len()];
    for f in &mut result.findings {
        let print = fingerprint(f, &result.ids, spec);
        if let Some(i) = baseline.iter().position(|e| e.fingerprint == print) {
            f.baselined = true;
            seen[i] = true;
        }
    }
    baseline
        .iter()
        .zip(seen)
        .filter(|(_, s)| !s)
        .map(|(e, _)| e.clone())
        .collect()
}

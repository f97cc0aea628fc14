//! SARIF 2.1.0 output of `tauscan check` (`--format sarif`), for code-scanning services.
//!
//! One run; `tool.driver.rules` lists every rule of the registry with its summary as the
//! short description, its document (`rules/<id>.md`) as the full description and help,
//! and its default level. Each finding is a result with a location relative to the
//! `SRCROOT` base (the scan root), related locations for the coefficient and the rate's
//! source, a stable `partialFingerprints` entry that survives edits which only move lines
//! (`rules::fingerprint`: the rule, the smoother's id and the message's words, not line
//! numbers), a `baselineState` (`new`, or `unchanged` for a finding in the baseline), and
//! an `inSource` suppression with its reason when one applies. Findings about the spec
//! point at the spec file, relative to the same base when it lies inside the root.

use crate::check::CheckResult;
use crate::rules::{fingerprint, REGISTRY};
use crate::scan::Scan;
use crate::spec::Severity;
use serde_json::{json, Value};
use std::path::Path;

fn level(s: Severity) -> &'static str {
    match s {
        Severity::Error => "error",
        Severity::Warning => "warning",
        Severity::Note => "note",
    }
}

fn uri_of(path: &str) -> String {
    // Relative URIs: percent-encode what is not safe in a path segment.
    let mut out = String::new();
    for b in path.bytes() {
        match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'_' | b'.' | b'~' | b'/' => {
                out.push(b as char)
            }
            _ => out.push_str(&format!("%{b:02X}")),
        }
    }
    out
}

fn root_uri(root: &Path) -> String {
    let absolute = root.canonicalize().unwrap_or_else(|_| root.to_path_buf());
    let mut text = uri_of(&absolute.to_string_lossy().replace('\\', "/"));
    if !text.starts_with('/') {
        text.insert(0, '/');
    }
    if !text.ends_with('/') {
        text.push('/');
    }
    format!("file://{text}")
}

fn location(uri: &str, line: u32, column: Option<u32>, message: Option<&str>) -> Value {
    let mut region = json!({ "startLine": line.max(1) });
    if let Some(c) = column {
        region["startColumn"] = json!(c.max(1));
    }
    let mut loc = json!({
        "physicalLocation": {
            "artifactLocation": { "uri": uri, "uriBaseId": "SRCROOT" },
            "region": region
        }
    });
    if let Some(m) = message {
        loc["message"] = json!({ "text": m });
    }
    loc
}

/// The SARIF log. `spec_file` is the spec's path relative to the scan root, when there is
/// one inside it (findings about spec entries point there).
pub fn render(
    scan: &Scan,
    result: &CheckResult,
    spec: &crate::spec::Spec,
    spec_file: Option<&str>,
) -> String {
    let rules: Vec<Value> = REGISTRY
        .iter()
        .map(|r| {
            json!({
                "id": r.id,
                "name": r.id,
                "shortDescription": { "text": r.summary },
                "fullDescription": { "text": r.doc },
                "help": { "text": r.doc, "markdown": r.doc },
                "defaultConfiguration": { "level": level(r.severity) },
            })
        })
        .collect();
    let program = &scan.program;
    let results: Vec<Value> = result
        .findings
        .iter()
        .map(|f| {
            let rule_index = REGISTRY.iter().position(|r| r.id == f.rule);
            let mut locations = Vec::new();
            if let Some(span) = f.span {
                locations.push(location(
                    &uri_of(program.path(span.file)),
                    span.line,
                    Some(span.column),
                    None,
                ));
            } else if let (Some(line), Some(file)) = (f.spec_line, spec_file) {
                locations.push(location(&uri_of(file), line as u32, None, None));
            }
            let related: Vec<Value> = f
                .labels
                .iter()
                .enumerate()
                .map(|(i, l)| {
                    let mut loc = location(
                        &uri_of(program.path(l.file)),
                        l.line,
                        None,
                        Some(&l.message),
                    );
                    loc["id"] = json!(i);
                    loc
                })
                .collect();
            let mut text = f.message.clone();
            if let Some(help) = &f.help {
                text.push_str(&format!(" (help: {help})"));
            }
            let mut r = json!({
                "ruleId": f.rule,
                "level": level(f.severity),
                "message": { "text": text },
                "locations": locations,
                "partialFingerprints": {
                    "tauscanFinding/v1": fingerprint(f, &result.ids, spec)
                },
            });
            if let Some(i) = rule_index {
                r["ruleIndex"] = json!(i);
            }
            if !related.is_empty() {
                r["relatedLocations"] = json!(related);
            }
            r["baselineState"] = json!(if f.baselined { "unchanged" } else { "new" });
            if let Some(reason) = &f.suppressed {
                r["suppressions"] = json!([{ "kind": "inSource", "justification": reason }]);
            }
            r
        })
        .collect();
    let log = json!({
        "$schema": "https://json.schemastore.org/sarif-2.1.0.json",
        "version": "2.1.0",
        "runs": [{
            "tool": {
                "driver": {
                    "name": "tauscan",
                    "version": env!("CARGO_PKG_VERSION"),
                    "semanticVersion": env!("CARGO_PKG_VERSION"),
                    "rules": rules,
                }
            },
            "originalUriBaseIds": { "SRCROOT": { "uri": root_uri(&scan.root) } },
            "results": results,
            "columnKind": "utf16CodeUnits",
        }]
    });
    let mut text = serde_json::to_string_pretty(&log).unwrap_or_else(|_| "{}".into());
    text.push('\n');
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uris_are_relative_and_escaped() {
        assert_eq!(uri_of("src/vent motor.c"), "src/vent%20motor.c");
    }
}

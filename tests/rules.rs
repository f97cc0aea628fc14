//! Walks the rule registry through the binary (`tauscan explain --list`) and holds every
//! rule to its promises: a document with the fixed headings that names only spec keys the
//! spec format has, a failing fixture that makes it fire and a passing twin that does not,
//! and, for every fixture directory under `fixtures/rules/`, the findings recorded in its
//! `expected.txt`.
//!
//! Nothing here lists rule names: a rule added to the registry, or a fixture directory
//! added under `fixtures/rules/`, is picked up on the next run. `UPDATE_EXPECT=1 cargo test
//! --test rules` rewrites the `expected.txt` files from what tauscan reports now; a person
//! then reviews the diff before it is committed. Deciding what is a finding is tauscan's;
//! this file only runs it and compares.
//!
//! `expected.txt` holds one line per finding of `tauscan check --format json DIR`,
//! `RULE SEVERITY FILE:LINE`, sorted, with ` suppressed` after a finding that an inline
//! suppression with a reason silences (it stays in the output but does not fail the gate).
//! FILE is relative to the fixture directory, also for findings about the spec itself.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test helper that cannot run tauscan or read a fixture should stop the test with the cause"
)]

use serde_json::Value;
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

mod common;

/// The headings every rule document carries, in this order.
const HEADINGS: &[&str] = &[
    "## What it finds",
    "## Why it matters",
    "## Example",
    "## How to fix",
    "## Spec keys",
];

/// The spec module, whose module doc is the reference of the spec format.
const SPEC_MODULE: &str = include_str!("../src/spec.rs");

/// Words that are values of `rules:` entries, not keys, and may appear in backticks.
const RULE_SETTINGS: &[&str] = &["error", "warning", "note", "off"];

struct Rule {
    id: String,
    severity: String,
}

fn manifest_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn tauscan(args: &[&str]) -> Output {
    common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(args)
            .current_dir(manifest_dir()),
    )
}

/// The registry as the binary prints it: `id severity summary` per line.
fn registry() -> Vec<Rule> {
    let out = tauscan(&["explain", "--list"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "tauscan explain --list failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let rules: Vec<Rule> = text
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(|line| {
            let mut words = line.split_whitespace();
            let id = words.next().unwrap().to_string();
            let severity = words
                .next()
                .unwrap_or_else(|| panic!("no severity in `{line}`"))
                .to_string();
            assert!(
                words.next().is_some(),
                "no summary in `tauscan explain --list` line `{line}`"
            );
            Rule { id, severity }
        })
        .collect();
    // An empty or truncated listing must not let every per-rule test pass vacuously.
    assert!(
        rules.len() >= 11,
        "tauscan explain --list printed only {} rules:\n{text}",
        rules.len()
    );
    rules
}

fn fixture_root() -> PathBuf {
    manifest_dir().join("fixtures").join("rules")
}

/// Every directory under `fixtures/rules/`, by name.
fn fixture_rule_dirs() -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(fixture_root())
        .unwrap()
        .map(|e| e.unwrap())
        .filter(|e| e.file_type().unwrap().is_dir())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

fn file_names(dir: &Path) -> BTreeSet<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect()
}

/// What one run of `tauscan check --format json DIR` gave.
struct CheckRun {
    status: Option<i32>,
    stderr: String,
    /// `RULE SEVERITY FILE:LINE[ suppressed]`, sorted.
    lines: Vec<String>,
    /// Unsuppressed findings by rule, with their severities.
    by_rule: BTreeMap<String, Vec<String>>,
}

/// A place tauscan reports, relative to the fixture directory.
fn relative_file(file: &str, dir: &Path) -> String {
    let path = Path::new(file);
    if path.is_absolute() {
        let canonical_dir = dir.canonicalize().unwrap();
        if let Ok(rest) = path.strip_prefix(&canonical_dir) {
            return rest.to_string_lossy().replace('\\', "/");
        }
    }
    file.replace('\\', "/")
}

fn check(dir: &Path, extra: &[&str]) -> CheckRun {
    let dir_text = dir.to_str().unwrap();
    let mut args = vec!["check", "--format", "json"];
    args.extend_from_slice(extra);
    args.push(dir_text);
    let out = tauscan(&args);
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    let json: Value = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "tauscan check {dir_text} printed no JSON ({e}); status {:?}\nstderr:\n{stderr}",
            out.status.code()
        )
    });
    let findings = json["findings"]
        .as_array()
        .unwrap_or_else(|| panic!("no findings array for {dir_text}: {json}"));
    let mut lines = Vec::new();
    let mut by_rule: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for f in findings {
        let rule = f["rule"].as_str().unwrap().to_string();
        let severity = f["severity"].as_str().unwrap().to_string();
        let file = f["file"]
            .as_str()
            .map(|x| relative_file(x, dir))
            .unwrap_or_else(|| "?".into());
        let line = f["line"]
            .as_u64()
            .map(|l| l.to_string())
            .unwrap_or_else(|| "?".into());
        let suppressed = !f["suppressed"].is_null();
        lines.push(format!(
            "{rule} {severity} {file}:{line}{}",
            if suppressed { " suppressed" } else { "" }
        ));
        if !suppressed {
            by_rule.entry(rule).or_default().push(severity);
        }
    }
    lines.sort();
    CheckRun {
        status: out.status.code(),
        stderr,
        lines,
        by_rule,
    }
}

fn read_expected(path: &Path) -> Option<Vec<String>> {
    let text = std::fs::read_to_string(path).ok()?;
    let mut lines: Vec<String> = text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .map(str::to_string)
        .collect();
    lines.sort();
    Some(lines)
}

/// The text of one `## ` section of a document, up to the next heading.
fn section<'a>(doc: &'a str, heading: &str) -> Option<&'a str> {
    let start = doc.find(heading)? + heading.len();
    let rest = &doc[start..];
    Some(rest.find("\n## ").map_or(rest, |end| &rest[..end]))
}

/// The spans between backticks in a piece of Markdown.
fn backticked(text: &str) -> Vec<&str> {
    text.split('`').skip(1).step_by(2).collect()
}

/// Whether a backticked span reads as a spec key path (`a`, `a.b`, `a[].b-c`).
fn is_key_path(span: &str) -> bool {
    !span.is_empty()
        && span.split('.').all(|segment| {
            let name = segment.strip_suffix("[]").unwrap_or(segment);
            name.starts_with(|c: char| c.is_ascii_lowercase())
                && name
                    .chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_' || c == '-')
        })
}

/// The shape of the spec as its module doc shows it: for every key name, the keys found
/// under it anywhere (so `defaults.requires` and `smoothers[].requires` share one set),
/// which key names hold a list, and the top-level keys.
struct SpecShape {
    top: BTreeSet<String>,
    children: BTreeMap<String, BTreeSet<String>>,
    lists: BTreeSet<String>,
    all: BTreeSet<String>,
}

fn doc_yaml() -> String {
    let doc: Vec<&str> = SPEC_MODULE
        .lines()
        .take_while(|l| l.starts_with("//!"))
        .map(|l| {
            l.strip_prefix("//! ")
                .unwrap_or(l.trim_start_matches("//!"))
        })
        .collect();
    let start = doc
        .iter()
        .position(|l| l.trim() == "```yaml")
        .expect("the spec module doc has a ```yaml block");
    let end = doc[start + 1..]
        .iter()
        .position(|l| l.trim() == "```")
        .expect("the yaml block in the spec module doc is closed");
    doc[start + 1..start + 1 + end].join("\n")
}

fn spec_shape() -> SpecShape {
    let value: serde_norway::Value =
        serde_norway::from_str(&doc_yaml()).expect("the yaml block in the spec module doc is YAML");
    let mut shape = SpecShape {
        top: BTreeSet::new(),
        children: BTreeMap::new(),
        lists: BTreeSet::new(),
        all: BTreeSet::new(),
    };
    fn walk(value: &serde_norway::Value, parent: Option<&str>, shape: &mut SpecShape) {
        match value {
            serde_norway::Value::Mapping(map) => {
                for (key, child) in map {
                    let Some(key) = key.as_str() else { continue };
                    shape.all.insert(key.to_string());
                    match parent {
                        Some(p) => {
                            shape
                                .children
                                .entry(p.to_string())
                                .or_default()
                                .insert(key.to_string());
                        }
                        None => {
                            shape.top.insert(key.to_string());
                        }
                    }
                    if child.is_sequence() {
                        shape.lists.insert(key.to_string());
                    }
                    walk(child, Some(key), shape);
                }
            }
            serde_norway::Value::Sequence(items) => {
                for item in items {
                    walk(item, parent, shape);
                }
            }
            _ => {}
        }
    }
    walk(&value, None, &mut shape);
    shape
}

/// Why a key path named by a rule document is not in the spec format, if it is not.
fn key_problem(path: &str, shape: &SpecShape, rule_ids: &BTreeSet<String>) -> Option<String> {
    let segments: Vec<&str> = path.split('.').collect();
    if segments.len() == 1 {
        let name = segments[0].strip_suffix("[]").unwrap_or(segments[0]);
        if RULE_SETTINGS.contains(&name) {
            return None;
        }
        if !shape.all.contains(name) {
            return Some(format!("`{name}` is no key of the spec format"));
        }
        if segments[0].ends_with("[]") && !shape.lists.contains(name) {
            return Some(format!("`{name}` holds no list"));
        }
        return None;
    }
    let first = segments[0].strip_suffix("[]").unwrap_or(segments[0]);
    if !shape.top.contains(first) {
        return Some(format!("`{first}` is no top-level key of the spec format"));
    }
    // Under `rules:` the keys are the rule ids (the module doc's `# error | warning | note
    // | off` entry shows one); any registered id is a key there.
    if first == "rules" {
        return (segments.len() != 2 || !rule_ids.contains(segments[1])).then(|| {
            format!(
                "`{}` is no rule id of the registry",
                segments[1..].join(".")
            )
        });
    }
    let mut parent = first;
    for (i, segment) in segments.iter().enumerate() {
        let is_list = segment.ends_with("[]");
        let name = segment.strip_suffix("[]").unwrap_or(segment);
        if i > 0 {
            let known = shape.children.get(parent).is_some_and(|c| c.contains(name));
            if !known {
                return Some(format!("`{parent}` has no key `{name}`"));
            }
        }
        if is_list && !shape.lists.contains(name) {
            return Some(format!("`{name}` holds no list, so `{name}[]` is wrong"));
        }
        let last = i + 1 == segments.len();
        if !last && !is_list && shape.lists.contains(name) {
            return Some(format!("`{name}` holds a list: write `{name}[]`"));
        }
        parent = name;
    }
    None
}

#[test]
fn every_rule_has_a_doc_with_every_heading_in_order_and_explain_prints_it() {
    let mut problems = Vec::new();
    for rule in registry() {
        let path = manifest_dir().join("rules").join(format!("{}.md", rule.id));
        let Ok(doc) = std::fs::read_to_string(&path) else {
            problems.push(format!("{}: no rules/{}.md", rule.id, rule.id));
            continue;
        };
        if !doc.starts_with(&format!("# {}\n", rule.id)) {
            problems.push(format!(
                "{}: the doc's title is not `# {}`",
                rule.id, rule.id
            ));
        }
        let mut last = 0;
        for heading in HEADINGS {
            match doc.find(&format!("\n{heading}\n")) {
                None => problems.push(format!("{}: no `{heading}`", rule.id)),
                Some(at) if at < last => {
                    problems.push(format!("{}: `{heading}` is out of order", rule.id))
                }
                Some(at) => {
                    last = at;
                    let body = section(&doc, heading).unwrap_or("");
                    if body.trim().is_empty() {
                        problems.push(format!("{}: `{heading}` is empty", rule.id));
                    }
                }
            }
        }
        // The doc `tauscan explain` prints is the file, so the two cannot drift apart.
        let out = tauscan(&["explain", &rule.id]);
        if String::from_utf8_lossy(&out.stdout) != doc {
            problems.push(format!(
                "{}: `tauscan explain {}` does not print rules/{}.md",
                rule.id, rule.id, rule.id
            ));
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn every_rule_has_a_failing_fixture_and_a_passing_twin() {
    let mut problems = Vec::new();
    for rule in registry() {
        let base = fixture_root().join(&rule.id);
        let mut sources = BTreeMap::new();
        for side in ["fail", "pass"] {
            let dir = base.join(side);
            if !dir.is_dir() {
                problems.push(format!(
                    "{}: no fixtures/rules/{}/{side}/",
                    rule.id, rule.id
                ));
                continue;
            }
            let names = file_names(&dir);
            for needed in ["tauscan.yaml", "expected.txt"] {
                if !names.contains(needed) {
                    problems.push(format!("{}/{side}: no {needed}", rule.id));
                }
            }
            let c: BTreeSet<String> = names
                .into_iter()
                .filter(|n| n.ends_with(".c") || n.ends_with(".h"))
                .collect();
            if c.is_empty() {
                problems.push(format!("{}/{side}: no C source", rule.id));
            }
            sources.insert(side, c);
        }
        // A twin is the same program fixed, so it has the same files.
        if let (Some(fail), Some(pass)) = (sources.get("fail"), sources.get("pass")) {
            if fail != pass {
                problems.push(format!(
                    "{}: the twins hold different C files: fail {fail:?}, pass {pass:?}",
                    rule.id
                ));
            }
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn every_fixture_directory_belongs_to_a_rule_of_the_registry() {
    let ids: BTreeSet<String> = registry().into_iter().map(|r| r.id).collect();
    let mut problems = Vec::new();
    for name in fixture_rule_dirs() {
        if !ids.contains(&name) {
            problems.push(format!(
                "fixtures/rules/{name}/ names no rule of `tauscan explain --list`"
            ));
        }
        for entry in file_names(&fixture_root().join(&name)) {
            if entry != "fail" && entry != "pass" {
                problems.push(format!(
                    "fixtures/rules/{name}/{entry}: only fail/ and pass/ belong here"
                ));
            }
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn rule_docs_name_only_spec_keys_that_exist() {
    let rules = registry();
    let ids: BTreeSet<String> = rules.iter().map(|r| r.id.clone()).collect();
    let shape = spec_shape();
    // The shape must be the real one, or every key would be judged against nothing.
    for key in [
        "rates",
        "smoothers",
        "defaults",
        "rules",
        "requires",
        "cutoff",
    ] {
        assert!(shape.all.contains(key), "the spec module doc lacks `{key}`");
    }
    let mut problems = Vec::new();
    let mut named = 0;
    for rule in &rules {
        let path = manifest_dir().join("rules").join(format!("{}.md", rule.id));
        let Ok(doc) = std::fs::read_to_string(&path) else {
            continue; // The doc test above reports the missing file.
        };
        let Some(keys) = section(&doc, "## Spec keys") else {
            continue;
        };
        for span in backticked(keys).into_iter().filter(|s| is_key_path(s)) {
            named += 1;
            if let Some(why) = key_problem(span, &shape, &ids) {
                problems.push(format!("rules/{}.md names `{span}`: {why}", rule.id));
            }
        }
    }
    assert!(named > 0, "no rule document names a spec key");
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn the_key_check_rejects_keys_the_spec_does_not_have() {
    // The check above must be able to fail: misspelt, misplaced and unknown keys.
    let ids: BTreeSet<String> = registry().into_iter().map(|r| r.id).collect();
    let shape = spec_shape();
    for bad in [
        "smoothers[].requires.cutof",
        "smoothers.requires.max_lag",
        "defaults.requires.rate",
        "rates[].hz",
        "rules.no-such-rule",
        "max_delay",
        "tolerance",
    ] {
        assert!(
            key_problem(bad, &shape, &ids).is_some(),
            "`{bad}` passed the key check"
        );
    }
    for good in [
        "smoothers[].requires.cutoff.min",
        "defaults.requires.settle",
        "rates[].period",
        "rules.integer-dead-band",
        "unit",
        "rates",
    ] {
        assert_eq!(key_problem(good, &shape, &ids), None, "`{good}`");
    }
}

#[test]
fn the_spec_format_in_the_module_doc_is_a_spec_tauscan_accepts() {
    // The keys above are taken from the module doc; the doc's example must therefore be a
    // spec the parser takes, or the list of keys would not be the format's.
    let dir = tempfile::tempdir().unwrap();
    let spec = dir.path().join("doc-example.yaml");
    std::fs::write(&spec, doc_yaml()).unwrap();
    // Under `src/`, which the example's `scan.include` takes: a spec whose patterns leave
    // no file to read makes the scan incomplete (exit 2).
    std::fs::create_dir_all(dir.path().join("src")).unwrap();
    std::fs::write(
        dir.path().join("src").join("empty.c"),
        "void idle(void) {}\n",
    )
    .unwrap();
    let out = tauscan(&[
        "check",
        "--spec",
        spec.to_str().unwrap(),
        dir.path().to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    // 1 is expected (the example's entry matches nothing here); 2 would be a spec error.
    assert_eq!(out.status.code(), Some(1), "stderr:\n{stderr}");
}

#[test]
fn every_fixture_gives_the_findings_in_its_expected_file() {
    let update = std::env::var_os("UPDATE_EXPECT").is_some_and(|v| v != "0" && !v.is_empty());
    let mut problems = Vec::new();
    let mut compared = 0;
    for name in fixture_rule_dirs() {
        for side in ["fail", "pass"] {
            let dir = fixture_root().join(&name).join(side);
            if !dir.is_dir() {
                continue; // The twin test reports a missing side.
            }
            let run = check(&dir, &[]);
            if !matches!(run.status, Some(0 | 1)) {
                problems.push(format!(
                    "{name}/{side}: tauscan check exited {:?}\n{}",
                    run.status, run.stderr
                ));
                continue;
            }
            let expected_path = dir.join("expected.txt");
            if update {
                let mut text = run.lines.join("\n");
                if !text.is_empty() {
                    text.push('\n');
                }
                if std::fs::read_to_string(&expected_path).ok().as_deref() != Some(&text) {
                    std::fs::write(&expected_path, text).unwrap();
                    eprintln!("rewrote {}", expected_path.display());
                }
                continue;
            }
            compared += 1;
            match read_expected(&expected_path) {
                None => problems.push(format!("{name}/{side}: no expected.txt")),
                Some(expected) if expected != run.lines => problems.push(format!(
                    "{name}/{side}: findings differ from expected.txt\n  expected:\n    {}\n  got:\n    {}",
                    expected.join("\n    "),
                    run.lines.join("\n    ")
                )),
                Some(_) => {}
            }
        }
    }
    assert!(update || compared > 0, "no fixture directory was compared");
    assert!(problems.is_empty(), "{}", problems.join("\n\n"));
}

#[test]
fn failing_fixtures_fire_their_rule_and_passing_twins_do_not() {
    let mut problems = Vec::new();
    let mut checked = 0;
    for rule in registry() {
        let base = fixture_root().join(&rule.id);
        let fail_dir = base.join("fail");
        let pass_dir = base.join("pass");
        if !fail_dir.is_dir() || !pass_dir.is_dir() {
            continue; // The twin test reports missing directories.
        }
        checked += 1;
        let fail = check(&fail_dir, &[]);
        match fail.by_rule.get(&rule.id) {
            None => problems.push(format!(
                "{}/fail: the rule does not fire; findings: {:?}",
                rule.id, fail.lines
            )),
            Some(severities) => {
                if severities.iter().any(|s| *s != rule.severity) {
                    problems.push(format!(
                        "{}/fail: findings of severity {severities:?}, the rule's default is {}",
                        rule.id, rule.severity
                    ));
                }
            }
        }
        if rule.severity == "error" && fail.status != Some(1) {
            problems.push(format!(
                "{}/fail: exit status {:?}, want 1\n{}",
                rule.id, fail.status, fail.stderr
            ));
        }
        // A rule below error fails the gate when the gate is set at its level.
        if rule.severity != "error" {
            let gated = check(&fail_dir, &["--fail-on", &rule.severity]);
            if gated.status != Some(1) {
                problems.push(format!(
                    "{}/fail: with --fail-on {} the exit status is {:?}, want 1\n{}",
                    rule.id, rule.severity, gated.status, gated.stderr
                ));
            }
        }
        let pass = check(&pass_dir, &[]);
        if let Some(severities) = pass.by_rule.get(&rule.id) {
            problems.push(format!(
                "{}/pass: the rule still fires ({} finding(s)): {:?}",
                rule.id,
                severities.len(),
                pass.lines
            ));
        }
        if pass.status != Some(0) {
            problems.push(format!(
                "{}/pass: exit status {:?}, want 0; findings: {:?}\n{}",
                rule.id, pass.status, pass.lines, pass.stderr
            ));
        }
    }
    assert!(checked > 0, "no rule had fixtures to check");
    assert!(problems.is_empty(), "{}", problems.join("\n\n"));
}

#[test]
fn the_readme_rule_table_lists_every_rule_with_its_default_severity() {
    let readme = std::fs::read_to_string(manifest_dir().join("README.md")).unwrap();
    let table: BTreeMap<String, String> = readme
        .lines()
        .filter_map(|l| {
            let cells: Vec<&str> = l.split('|').map(str::trim).collect();
            // `| `rule-id` | severity | finds |`
            let id = cells.get(1)?.strip_prefix('`')?.strip_suffix('`')?;
            let severity = cells.get(2)?;
            ["error", "warning", "note"]
                .contains(severity)
                .then(|| (id.to_string(), severity.to_string()))
        })
        .collect();
    let mut problems = Vec::new();
    for rule in registry() {
        match table.get(&rule.id) {
            None => problems.push(format!("README's rule table lacks `{}`", rule.id)),
            Some(s) if *s != rule.severity => problems.push(format!(
                "README gives `{}` the default {s}, tauscan {}",
                rule.id, rule.severity
            )),
            Some(_) => {}
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

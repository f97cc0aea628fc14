//! The checks of `tauscan check`: one rule per file, one registry, one `Finding` type.
//!
//! Each rule module exports `check(&Context, &mut Vec<Finding>)` and its doc
//! (`rules/<id>.md`, embedded so `tauscan explain` and SARIF use the same text). The
//! `Context` holds what every rule needs: the scan, the spec, each smoother's merged
//! requirements and input, and its effective rate. Findings are format-neutral; `report`
//! renders them.

use crate::figures::SmootherFigures;
use crate::ir::{FileId, Span};
use crate::recognise::Smoother;
use crate::scan::Scan;
use crate::spec::{Input, Requirements, Severity, Spec};

mod coefficient_out_of_range;
mod coefficient_truncated;
mod cutoff_outside_requirement;
mod dc_gain_not_one;
mod dead_band_over_requirement;
mod float_state_absorbs_updates;
mod help;
mod integer_dead_band;
mod integer_overflow;
mod lag_over_requirement;
mod noise_reduction_under_requirement;
mod rate_ambiguous;
mod rate_mismatch;
mod rate_unknown;
mod requirement_not_evaluated;
mod settling_over_requirement;
mod spec_entry_unmatched;
mod state_not_persistent;
mod suppression_without_reason;
mod unsigned_difference_wraps;

/// A secondary place a finding points at (the coefficient's definition, the rate's source).
#[derive(Debug, Clone, PartialEq)]
pub struct Label {
    pub file: FileId,
    pub line: u32,
    /// Byte range within the file when known; else the whole line.
    pub range: Option<(u32, u32)>,
    pub message: String,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Finding {
    pub rule: &'static str,
    pub severity: Severity,
    /// The line a reader must look at: the update, or an instance's call. None for
    /// findings about the spec itself (then `spec_line` says where).
    pub span: Option<Span>,
    pub spec_line: Option<usize>,
    pub labels: Vec<Label>,
    pub message: String,
    pub help: Option<String>,
    /// Index of the smoother in the scan's list.
    pub smoother: Option<usize>,
    /// The reason given by an inline suppression, when one applies.
    pub suppressed: Option<String>,
    /// The finding is in the baseline the gate was given: known, not new.
    pub baselined: bool,
}

impl Finding {
    pub fn at(rule: &'static RuleInfo, smoother: usize, s: &Smoother, message: String) -> Finding {
        Finding {
            rule: rule.id,
            severity: rule.severity,
            span: Some(s.span),
            spec_line: None,
            labels: Vec::new(),
            message,
            help: None,
            smoother: Some(smoother),
            suppressed: None,
            baselined: false,
        }
    }
}

/// FNV-1a, 64 bits: small, and stable across platforms and versions (unlike std's hasher),
/// which fingerprints kept in files need.
pub fn fnv1a(text: &str) -> String {
    let mut hash: u64 = 0xcbf29ce484222325;
    for b in text.bytes() {
        hash ^= b as u64;
        hash = hash.wrapping_mul(0x100000001b3);
    }
    format!("{hash:016x}")
}

/// What identifies a finding across edits that move lines: the rule, the smoother's id
/// (or the spec entry's matcher) and the message with its numbers left out, so a retuned
/// figure is the same finding while another smoother is not.
pub fn fingerprint(f: &Finding, ids: &[String], spec: &Spec) -> String {
    let subject = f
        .smoother
        .and_then(|i| ids.get(i).cloned())
        .or_else(|| {
            f.spec_line.and_then(|line| {
                spec.smoothers
                    .iter()
                    .find(|e| e.line == line)
                    .map(|e| format!("{:?}", e.matcher))
            })
        })
        .unwrap_or_default();
    let words: String = f
        .message
        .chars()
        .map(|c| {
            if c.is_ascii_digit() || c == '.' {
                '#'
            } else {
                c
            }
        })
        .collect();
    fnv1a(&format!("{}\u{1f}{subject}\u{1f}{words}", f.rule))
}

pub struct RuleInfo {
    pub id: &'static str,
    pub severity: Severity,
    pub summary: &'static str,
    /// The rule's document (`rules/<id>.md`).
    pub doc: &'static str,
    pub check: fn(&Context, &mut Vec<Finding>),
}

/// The effective rate of one smoother once the spec is applied.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct EffectiveRate {
    /// Every distinct rate the spec makes reach the update (several: ambiguous).
    pub from_spec: Vec<crate::context::propagate::Reach>,
    /// A caller no rate reaches also calls the update's function.
    pub partial: Option<crate::context::propagate::Doubt>,
    /// An unresolved call through a pointer may reach the update's function.
    pub indirect: Option<crate::context::propagate::Doubt>,
}

pub struct Context<'a> {
    pub scan: &'a Scan,
    pub spec: &'a Spec,
    pub ids: &'a [String],
    /// Spec entries (indexes into `spec.smoothers`) matching each smoother.
    pub matched: Vec<Vec<usize>>,
    /// Each smoother's requirements: its entries' merged over the defaults.
    pub requirements: Vec<Requirements>,
    pub inputs: Vec<Input>,
    pub rates: Vec<EffectiveRate>,
    /// Tags (`tauscan: tag NAME`) next to each smoother.
    pub tags: Vec<Vec<String>>,
}

impl Context<'_> {
    /// The smoothers the rules judge: every one but the update inside a filter function
    /// or macro whose calls are listed as instances (each instance carries the coefficient
    /// and the rate that really run, and is judged itself).
    pub fn smoothers(&self) -> impl Iterator<Item = (usize, &Smoother, &SmootherFigures)> {
        self.scan
            .recognition
            .smoothers
            .iter()
            .zip(&self.scan.figures)
            .enumerate()
            .filter(|(_, (s, _))| s.instance_count == 0)
            .map(|(i, (s, f))| (i, s, f))
    }

    /// Whether any requirement is in Hz or seconds (which needs a rate).
    pub fn has_timed_requirements(&self, i: usize) -> bool {
        let r = &self.requirements[i];
        r.cutoff_min.is_some()
            || r.cutoff_max.is_some()
            || r.max_lag.is_some()
            || r.settle.is_some()
    }
}

/// Every rule, in the order they run and are documented.
pub static REGISTRY: &[RuleInfo] = &[
    cutoff_outside_requirement::RULE,
    lag_over_requirement::RULE,
    settling_over_requirement::RULE,
    noise_reduction_under_requirement::RULE,
    dead_band_over_requirement::RULE,
    integer_dead_band::RULE,
    unsigned_difference_wraps::RULE,
    integer_overflow::RULE,
    coefficient_truncated::RULE,
    dc_gain_not_one::RULE,
    coefficient_out_of_range::RULE,
    state_not_persistent::RULE,
    float_state_absorbs_updates::RULE,
    rate_mismatch::RULE,
    rate_ambiguous::RULE,
    rate_unknown::RULE,
    requirement_not_evaluated::RULE,
    spec_entry_unmatched::RULE,
    suppression_without_reason::RULE,
];

pub fn find_rule(id: &str) -> Option<&'static RuleInfo> {
    REGISTRY.iter().find(|r| r.id == id)
}

/// Runs every rule the spec leaves on, with the spec's severities.
pub fn run(ctx: &Context) -> Vec<Finding> {
    let mut findings = Vec::new();
    for rule in REGISTRY {
        let setting = ctx.spec.rules.get(rule.id).copied();
        if setting == Some(crate::spec::RuleSetting::Off) {
            continue;
        }
        let mut found = Vec::new();
        (rule.check)(ctx, &mut found);
        if let Some(crate::spec::RuleSetting::Severity(s)) = setting {
            for f in &mut found {
                f.severity = s;
            }
        }
        findings.extend(found);
    }
    apply_suppressions(ctx, &mut findings);
    findings.sort_by(|a, b| {
        let key = |f: &Finding| {
            (
                f.span.map(|s| ctx.scan.program.path(s.file)),
                f.span.map(|s| s.line),
                f.spec_line,
                f.rule,
            )
        };
        key(a).cmp(&key(b))
    });
    findings
}

/// An inline suppression: `tauscan: allow RULE-ID -- reason` in a comment on the finding's
/// line or the line above.
#[derive(Debug, Clone, PartialEq)]
pub struct Suppression {
    pub rule: String,
    pub reason: Option<String>,
}

pub fn parse_suppression(tag: &str) -> Option<Suppression> {
    let rest = tag.trim().strip_prefix("allow")?.trim_start();
    let (rule, reason) = match rest.split_once("--") {
        Some((r, why)) => (
            r.trim(),
            Some(why.trim().to_string()).filter(|w| !w.is_empty()),
        ),
        None => (rest.trim(), None),
    };
    let rule = rule.split_whitespace().next()?.to_string();
    Some(Suppression { rule, reason })
}

/// The `tauscan:` comments on a line or the line above it.
pub fn tags_near(scan: &Scan, span: Span) -> Vec<&str> {
    let Some(file) = scan.program.files.get(span.file.0 as usize) else {
        return Vec::new();
    };
    file.tags
        .iter()
        .filter(|(line, _)| *line == span.line || *line + 1 == span.line)
        .map(|(_, text)| text.as_str())
        .collect()
}

fn apply_suppressions(ctx: &Context, findings: &mut Vec<Finding>) {
    let mut extra = Vec::new();
    for f in findings.iter_mut() {
        let Some(span) = f.span else { continue };
        for tag in tags_near(ctx.scan, span) {
            let Some(sup) = parse_suppression(tag) else {
                continue;
            };
            if sup.rule != f.rule {
                continue;
            }
            match sup.reason {
                Some(reason) => f.suppressed = Some(reason),
                None => extra.push(suppression_without_reason::finding(f, span)),
            }
        }
    }
    findings.extend(extra);
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADINGS: &[&str] = &[
        "## What it finds",
        "## Why it matters",
        "## Example",
        "## How to fix",
        "## Spec keys",
    ];

    #[test]
    fn every_rule_has_a_complete_doc_and_a_kebab_case_id() {
        for rule in REGISTRY {
            assert!(
                rule.id.chars().all(|c| c.is_ascii_lowercase() || c == '-'),
                "{}",
                rule.id
            );
            assert!(
                rule.doc.starts_with(&format!("# {}", rule.id)),
                "{} doc title",
                rule.id
            );
            for h in HEADINGS {
                assert!(rule.doc.contains(h), "{} lacks {h}", rule.id);
            }
            assert!(!rule.summary.is_empty());
        }
        let mut ids: Vec<&str> = REGISTRY.iter().map(|r| r.id).collect();
        ids.sort_unstable();
        ids.dedup();
        assert_eq!(ids.len(), REGISTRY.len(), "ids are unique");
    }

    #[test]
    fn suppressions_need_a_reason() {
        assert_eq!(
            parse_suppression("allow integer-dead-band -- 10-bit ADC, 3 counts are fine"),
            Some(Suppression {
                rule: "integer-dead-band".into(),
                reason: Some("10-bit ADC, 3 counts are fine".into())
            })
        );
        assert_eq!(
            parse_suppression("allow integer-dead-band"),
            Some(Suppression {
                rule: "integer-dead-band".into(),
                reason: None
            })
        );
        assert_eq!(parse_suppression("tag vent"), None);
    }
}

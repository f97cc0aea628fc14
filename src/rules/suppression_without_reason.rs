//! `suppression-without-reason`: an inline `tauscan: allow RULE` with no reason after
//! `--`. The suppression is not applied: a reason is what a reviewer reads.

use super::{Context, Finding, RuleInfo};
use crate::ir::Span;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "suppression-without-reason",
    severity: Severity::Warning,
    summary: "An inline suppression gives no reason, so it is not applied.",
    doc: include_str!("../../rules/suppression-without-reason.md"),
    check,
};

/// The rule runs from `apply_suppressions`, which sees the findings to suppress.
fn check(_ctx: &Context, _out: &mut Vec<Finding>) {}

pub(super) fn finding(suppressed: &Finding, span: Span) -> Finding {
    Finding {
        rule: RULE.id,
        severity: RULE.severity,
        span: Some(span),
        spec_line: None,
        labels: Vec::new(),
        message: format!(
            "`tauscan: allow {}` gives no reason, so the finding stands",
            suppressed.rule
        ),
        help: Some(format!(
            "write the reason after `--`: `// tauscan: allow {} -- why this is acceptable`",
            suppressed.rule
        )),
        smoother: suppressed.smoother,
        suppressed: None,
        baselined: false,
    }
}

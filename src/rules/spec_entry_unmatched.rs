//! `spec-entry-unmatched`: a spec entry that matches no smoother. A filter that was
//! deleted or renamed must not pass the gate silently.

use super::{Context, Finding, RuleInfo};
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "spec-entry-unmatched",
    severity: Severity::Error,
    summary: "A spec entry matches no smoother.",
    doc: include_str!("../../rules/spec-entry-unmatched.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    // A rate for an entry function that is not in the code: a renamed interrupt would
    // otherwise lose its rate without a word.
    // A rate by constant that no smoother's coefficient is derived from: a renamed
    // `LOOP_DT` would otherwise leave every smoother without the rate it declares.
    for rate in &ctx.spec.rates {
        let (message, help) = match &rate.scope {
            crate::spec::RateScope::Function(name) => {
                if !ctx.scan.program.functions_named(name).is_empty() {
                    continue;
                }
                (
                    format!("the rate entry for function `{name}` names no function in the scanned code"),
                    "update the entry if the function was renamed, or remove it",
                )
            }
            crate::spec::RateScope::Constant { name, .. } => {
                let used = ctx.scan.recognition.smoothers.iter().any(|s| {
                    s.chain
                        .iter()
                        .any(|c| c.name.as_deref() == Some(name.as_str()))
                });
                if used {
                    continue;
                }
                (
                    format!("the rate entry for constant `{name}` matches no smoother: no coefficient is derived from it"),
                    "update the entry if the constant was renamed, or remove it",
                )
            }
            crate::spec::RateScope::Path(_) => continue,
        };
        out.push(Finding {
            rule: RULE.id,
            severity: RULE.severity,
            span: None,
            spec_line: Some(rate.line),
            labels: Vec::new(),
            message,
            help: Some(help.into()),
            smoother: None,
            suppressed: None,
            baselined: false,
        });
    }
    for (e, entry) in ctx.spec.smoothers.iter().enumerate() {
        if ctx.matched.iter().any(|m| m.contains(&e)) {
            continue;
        }
        let m = &entry.matcher;
        let mut parts = Vec::new();
        for (key, value) in [
            ("id", &m.id),
            ("path", &m.path),
            ("function", &m.function),
            ("state", &m.state),
            ("tag", &m.tag),
        ] {
            if let Some(v) = value {
                parts.push(format!("{key} `{v}`"));
            }
        }
        out.push(Finding {
            rule: RULE.id,
            severity: RULE.severity,
            span: None,
            spec_line: Some(entry.line),
            labels: Vec::new(),
            message: format!("the spec entry for {} matches no smoother", parts.join(", ")),
            help: Some(
                "update the entry if the filter was renamed or moved, or remove it if the filter is gone (`tauscan list` shows the ids)".into(),
            ),
            smoother: None,
            suppressed: None,
            baselined: false,
        });
    }
}

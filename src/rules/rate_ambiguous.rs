//! `rate-ambiguous`: one update reached from entry functions of different rates, so its
//! cutoff has no single value.

use super::{Context, Finding, RuleInfo};
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "rate-ambiguous",
    severity: Severity::Error,
    summary: "The update is reached from entries of different rates.",
    doc: include_str!("../../rules/rate-ambiguous.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let reaches = &ctx.rates[i].from_spec;
        if reaches.len() < 2 {
            continue;
        }
        let list: Vec<String> = reaches.iter().map(|r| r.source.clone()).collect();
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "reached from entries of different rates: {}",
                list.join("; ")
            ),
        );
        finding.help = Some(
            "give each rate its own filter state, or compute the coefficient from a measured time step".into(),
        );
        out.push(finding);
    }
}

//! `rate-unknown`: a smoother with requirements in Hz or seconds whose rate nothing gives
//! (neither the spec nor its coefficient's derivation), or that runs per event.

use super::{Context, Finding, RuleInfo};
use crate::context::RateKind;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "rate-unknown",
    severity: Severity::Error,
    summary: "A smoother with timed requirements has no known rate.",
    doc: include_str!("../../rules/rate-unknown.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        if !ctx.has_timed_requirements(i) || s.rate.hz.is_some() || ctx.rates[i].from_spec.len() > 1
        {
            continue;
        }
        let message = match s.rate.kind {
            RateKind::Event => "runs per event, so its requirements in Hz and seconds cannot be checked".to_string(),
            RateKind::Adaptive => "its coefficient follows a time step measured at run time; its requirements in Hz and seconds cannot be checked statically".to_string(),
            _ => "no rate is known for this update, so its requirements in Hz and seconds cannot be checked".to_string(),
        };
        let mut finding = Finding::at(&RULE, i, s, message);
        finding.help = Some(format!(
            "name the entry that calls {}() and its rate under `rates:` in the spec",
            s.function
        ));
        out.push(finding);
    }
}

//! `dead-band-over-requirement`: an integer smoother can rest further from its input than
//! the spec allows.

use super::{Context, Finding, RuleInfo};
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "dead-band-over-requirement",
    severity: Severity::Error,
    summary: "The integer dead band is wider than the required maximum.",
    doc: include_str!("../../rules/dead-band-over-requirement.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let Some(max) = ctx.requirements[i].max_dead_band else {
            continue;
        };
        let Some(band) = s.dead_band else { continue };
        let widest = band.rising.max(band.falling);
        if (widest as f64) <= max {
            continue;
        }
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "can rest {} below a rising input and {} above a falling one, required at most {}",
                super::integer_dead_band::counts(band.rising, &ctx.inputs[i]),
                super::integer_dead_band::counts(band.falling, &ctx.inputs[i]),
                super::integer_dead_band::counts(max as u64, &ctx.inputs[i]),
            ),
        );
        finding.help = Some(super::integer_dead_band::FIX.into());
        finding.labels = super::cutoff_outside_requirement::coefficient_and_rate_labels(s);
        out.push(finding);
    }
}

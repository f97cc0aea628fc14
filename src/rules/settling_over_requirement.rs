//! `settling-over-requirement`: a step takes longer than the spec allows to reach the
//! stated fraction.

use super::{help, Context, Finding, RuleInfo};
use crate::metrics;
use crate::report::table::seconds;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "settling-over-requirement",
    severity: Severity::Error,
    summary: "A step takes longer than required to reach the stated fraction.",
    doc: include_str!("../../rules/settling-over-requirement.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, f) in ctx.smoothers() {
        let Some((q, within)) = ctx.requirements[i].settle else {
            continue;
        };
        let (Some(fs), Some(stage)) = (s.rate.hz, f.stage) else {
            continue;
        };
        let Some(n) = metrics::cascade_samples_to_fraction(&[stage], q) else {
            continue;
        };
        let t = n.0 / fs;
        if t <= within.0 {
            continue;
        }
        let pct = crate::report::table::sig3(q * 100.0);
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "reaches {pct} % of a step after {} ({} updates at {}), required within {}",
                seconds(t),
                crate::report::table::sig3(n.0),
                crate::report::table::hertz(fs),
                seconds(within.0)
            ),
        );
        finding.help = help::alpha_for_settle(q, within.0 * fs).map(|a| {
            format!(
                "to reach {pct} % within {}, use {}",
                seconds(within.0),
                help::suggest(s, a, Some(fs))
            )
        });
        finding.labels = super::cutoff_outside_requirement::coefficient_and_rate_labels(s);
        out.push(finding);
    }
}

//! `lag-over-requirement`: the delay behind a ramp is longer than the spec allows.

use super::{help, Context, Finding, RuleInfo};
use crate::report::table::seconds;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "lag-over-requirement",
    severity: Severity::Error,
    summary: "The smoother lags its input by more than the required maximum.",
    doc: include_str!("../../rules/lag-over-requirement.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, f) in ctx.smoothers() {
        let Some(max) = ctx.requirements[i].max_lag else {
            continue;
        };
        let (Some(fs), Some(own)) = (s.rate.hz, f.own.as_ref()) else {
            continue;
        };
        let Some(lag) = own.lag_seconds else { continue };
        if lag.0 <= max.0 {
            continue;
        }
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "lag {} ({} samples at {}), required at most {}",
                seconds(lag.0),
                crate::report::table::sig3(own.lag.0),
                crate::report::table::hertz(fs),
                seconds(max.0)
            ),
        );
        finding.help = help::alpha_for_lag(max.0 * fs * 0.95).map(|a| {
            format!(
                "for a lag under {}, use {}",
                seconds(max.0),
                help::suggest(s, a, Some(fs))
            )
        });
        finding.labels = super::cutoff_outside_requirement::coefficient_and_rate_labels(s);
        out.push(finding);
    }
}

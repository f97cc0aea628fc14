//! `noise-reduction-under-requirement`: white noise is reduced less than the spec asks.
//! Needs no rate: the ratio is per sample.

use super::{help, Context, Finding, RuleInfo};
use crate::report::table::sig3;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "noise-reduction-under-requirement",
    severity: Severity::Error,
    summary: "The smoother reduces white noise less than required.",
    doc: include_str!("../../rules/noise-reduction-under-requirement.md"),
    check,
};

fn db(ratio: f64) -> f64 {
    -20.0 * ratio.log10()
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, f) in ctx.smoothers() {
        let Some(max_ratio) = ctx.requirements[i].max_noise_ratio else {
            continue;
        };
        let Some(ratio) = f.own.as_ref().and_then(|o| o.noise_ratio) else {
            continue;
        };
        if ratio <= max_ratio {
            continue;
        }
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "reduces white noise by {} dB (ratio {}), required at least {} dB (ratio {})",
                sig3(db(ratio)),
                sig3(ratio),
                sig3(db(max_ratio)),
                sig3(max_ratio)
            ),
        );
        finding.help = if s.form == crate::recognise::Form::MovingAverage {
            // 1/sqrt(N) <= r needs N >= 1/r^2.
            let n = (1.0 / (max_ratio * max_ratio) - 1e-9).ceil();
            Some(format!(
                "for {} dB, use a window of N = {n} ({} dB)",
                sig3(db(max_ratio)),
                sig3(db(1.0 / n.sqrt()))
            ))
        } else {
            help::alpha_for_noise_ratio(max_ratio * 0.98).map(|a| {
                format!(
                    "for {} dB, use {}",
                    sig3(db(max_ratio)),
                    help::suggest(s, a, s.rate.hz)
                )
            })
        };
        finding.labels = super::cutoff_outside_requirement::coefficient_and_rate_labels(s);
        out.push(finding);
    }
}

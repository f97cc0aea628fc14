//! `rate-mismatch`: the coefficient was computed for one rate (a `dt` or Hz constant in
//! its derivation) but the update runs at another (from the spec and the call graph).

use super::{Context, Finding, Label, RuleInfo};
use crate::metrics;
use crate::report::table::hertz;
use crate::spec::Severity;
use crate::units::{Alpha, Hertz};

pub const RULE: RuleInfo = RuleInfo {
    id: "rate-mismatch",
    severity: Severity::Error,
    summary: "The coefficient was computed for one rate but the update runs at another.",
    doc: include_str!("../../rules/rate-mismatch.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let (Some(code), Some(real)) = (s.code_rate.as_ref(), s.rate.hz) else {
            continue;
        };
        let Some(assumed) = code.hz else { continue };
        if code.kind != crate::context::RateKind::Constant
            || (assumed - real).abs() <= 0.01 * real.abs()
        {
            continue;
        }
        let cutoff_at = |fs: f64| {
            s.alpha
                .value()
                .and_then(Alpha::new)
                .and_then(metrics::ema_cutoff)
                .map(|w| hertz(w.to_hertz(Hertz(fs)).0))
                .unwrap_or_else(|| "?".into())
        };
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "coefficient computed for {} ({}) but the update runs at {} ({}): cutoff {} instead of {}",
                hertz(assumed),
                code.source.as_deref().unwrap_or("its derivation"),
                hertz(real),
                s.rate.source.as_deref().unwrap_or("the spec"),
                cutoff_at(real),
                cutoff_at(assumed)
            ),
        );
        finding.help = Some(format!(
            "compute the coefficient from the rate the update runs at ({}), or call the update at {}",
            hertz(real),
            hertz(assumed)
        ));
        if let Some(span) = code.span {
            finding.labels.push(Label {
                file: span.file,
                line: span.line,
                range: None,
                message: format!("coefficient assumes {}", hertz(assumed)),
            });
        }
        out.push(finding);
    }
}

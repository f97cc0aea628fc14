//! `cutoff-outside-requirement`: the cutoff at the rate the update really runs is outside
//! the spec's range. Needs a rate; `rate-unknown` speaks when there is none.

use super::{help, Context, Finding, Label, RuleInfo};
use crate::report::table::hertz;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "cutoff-outside-requirement",
    severity: Severity::Error,
    summary: "The smoother's cutoff at the rate it runs is outside the required range.",
    doc: include_str!("../../rules/cutoff-outside-requirement.md"),
    check,
};

/// Labels every timed rule shares: where the coefficient is defined and where the rate
/// comes from.
pub(super) fn coefficient_and_rate_labels(s: &crate::recognise::Smoother) -> Vec<Label> {
    let mut labels = Vec::new();
    // The outermost step is the one written for this smoother (its init call, its
    // macro); the deeper ones are shared by every instance.
    if let Some(step) = s.chain.first() {
        labels.push(Label {
            file: step.file,
            line: step.line,
            range: None,
            message: format!("coefficient from `{}`", step.text),
        });
    }
    if let Some(span) = s.rate.span {
        // A rate carried from an entry: the functions it came through, and the entry's
        // line in the spec (in the source text).
        let via: Vec<&str> = s.rate.path.iter().map(|p| p.function.as_str()).collect();
        let message = match via.len() {
            0 | 1 => format!("rate from {}", s.rate.source.as_deref().unwrap_or("here")),
            _ => format!(
                "rate from {}, via {}",
                s.rate.source.as_deref().unwrap_or("the spec"),
                via.join(" -> ")
            ),
        };
        labels.push(Label {
            file: span.file,
            line: span.line,
            range: None,
            message,
        });
    }
    labels
}

fn range_text(lo: Option<f64>, hi: Option<f64>) -> String {
    match (lo, hi) {
        (Some(l), Some(h)) => format!("{}-{}", hertz(l), hertz(h)),
        (Some(l), None) => format!("at least {}", hertz(l)),
        (None, Some(h)) => format!("at most {}", hertz(h)),
        (None, None) => String::new(),
    }
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, f) in ctx.smoothers() {
        let req = &ctx.requirements[i];
        let lo = req.cutoff_min.map(|h| h.0);
        let hi = req.cutoff_max.map(|h| h.0);
        if lo.is_none() && hi.is_none() {
            continue;
        }
        let (Some(fs), Some(own)) = (s.rate.hz, f.own.as_ref()) else {
            continue;
        };
        let fc = own.cutoff_hertz.map(|h| h.0);
        let bad = match fc {
            Some(fc) => lo.is_some_and(|l| fc < l) || hi.is_some_and(|h| fc > h),
            // No -3 dB point below Nyquist: it passes everything, above any maximum.
            None => hi.is_some(),
        };
        if !bad {
            continue;
        }
        let now = fc.map(hertz).unwrap_or_else(|| "none below Nyquist".into());
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "cutoff {now} at {}, required {}",
                hertz(fs),
                range_text(lo, hi)
            ),
        );
        let target = match (lo, hi) {
            (Some(l), Some(h)) => (l * h).sqrt(),
            (Some(l), None) => l * 1.25,
            (None, Some(h)) => h * 0.8,
            (None, None) => continue,
        };
        finding.help = help::alpha_for_cutoff(target, fs).map(|a| {
            format!(
                "for {} at {}, use {}",
                hertz(target),
                hertz(fs),
                help::suggest(s, a, Some(fs))
            )
        });
        finding.labels = coefficient_and_rate_labels(s);
        out.push(finding);
    }
}

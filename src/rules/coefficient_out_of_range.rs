//! `coefficient-out-of-range`: alpha outside (0, 1]. Above one each update overshoots the
//! input and the error changes sign every sample; below zero the state runs away from the
//! input. Zero is `coefficient-truncated`'s (a filter that never moves), so it is left
//! alone here. The recogniser lists structural forms with alpha in [0, 2) only, so in
//! practice this meets the overshooting band (1, 2).

use super::{help, Context, Finding, RuleInfo};
use crate::report::table::sig3;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "coefficient-out-of-range",
    severity: Severity::Error,
    summary: "The smoothing coefficient is outside (0, 1]: the state overshoots or runs away.",
    doc: include_str!("../../rules/coefficient-out-of-range.md"),
    check,
};

/// Alpha computed as `1 - c_y` in binary64 can land a rounding above one for a form that
/// passes its input through; that is alpha = 1, not an overshoot.
const ABOVE_ONE: f64 = 1.0 + 1e-9;

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let Some(alpha) = s.alpha.value() else {
            continue;
        };
        if !alpha.is_finite() || alpha == 0.0 || (alpha > 0.0 && alpha <= ABOVE_ONE) {
            continue;
        }
        let pole = 1.0 - alpha;
        let message = if alpha > 1.0 && alpha < 2.0 {
            format!(
                "alpha = {} is above 1: each update overshoots the input by {} % of the gap, \
                 and the error changes sign every sample (pole at {}) while it dies out",
                sig3(alpha),
                sig3((alpha - 1.0) * 100.0),
                sig3(pole)
            )
        } else if alpha >= 2.0 {
            format!(
                "alpha = {} is 2 or more: the error changes sign every sample and never \
                 shrinks (pole at {}), the state oscillates without bound",
                sig3(alpha),
                sig3(pole)
            )
        } else {
            format!(
                "alpha = {} is negative: each update moves the state away from the input \
                 (pole at {}), it runs off",
                sig3(alpha),
                sig3(pole)
            )
        };
        let mut finding = Finding::at(&RULE, i, s, message);
        let rate = s.rate.hz;
        let mut advice = vec![];
        if alpha > 1.0 && alpha < 2.0 {
            // 2 - alpha has the same pole magnitude |1 - alpha| without the sign flip: it
            // settles as fast, from one side.
            advice.push(format!(
                "use {}: it settles as fast without overshoot",
                help::suggest(s, 2.0 - alpha, rate)
            ));
        }
        if alpha.abs() > 1.0 {
            advice.push(format!(
                "if {} was meant as a time constant in samples, use {}",
                sig3(alpha.abs()),
                help::suggest(s, 1.0 / alpha.abs(), rate)
            ));
        }
        if advice.is_empty() {
            advice.push("use an alpha in (0, 1]".into());
        }
        finding.help = Some(advice.join("; "));
        finding.labels = super::cutoff_outside_requirement::coefficient_and_rate_labels(s);
        out.push(finding);
    }
}

#[cfg(test)]
mod tests {
    use super::super::coefficient_truncated::findings_in;
    use super::*;

    #[test]
    fn one_and_a_half_overshoots_by_half_the_gap() {
        // Source: DOMAIN section 2, pole p = 1 - alpha; the step response 1 - p^n with
        // p = -0.5 gives 1.5, 0.75, 1.125: over, under, over (algebra, no outside value).
        let f = findings_in(
            "static float y;\nvoid f(float u) { y += 1.5f * (u - y); }\n",
            "",
            RULE.id,
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message
                .starts_with("alpha = 1.5 is above 1: each update overshoots the input by 50 %"),
            "{}",
            f[0].message
        );
        assert!(f[0].message.contains("pole at -0.5"), "{}", f[0].message);
        let help = f[0].help.as_deref().unwrap();
        assert!(help.contains("alpha = 0.5"), "{help}");
        assert!(help.contains("alpha = 0.667"), "{help}");
    }

    #[test]
    fn zero_one_and_the_usual_range_are_not_reported() {
        for gain in ["0.0f", "1.0f", "0.25f", "0.999f"] {
            let src = format!("static float y;\nvoid f(float u) {{ y += {gain} * (u - y); }}\n");
            let f = findings_in(&src, "", RULE.id);
            assert!(f.is_empty(), "{gain}: {f:?}");
        }
    }
}

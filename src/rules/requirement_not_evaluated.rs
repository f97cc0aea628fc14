//! `requirement-not-evaluated`: a smoother has requirements, but a figure they need cannot
//! be computed because its coefficient, its window or its dead band is not known. A gate
//! must never pass what it could not check. A missing rate is `rate-unknown`'s finding.

use super::{Context, Finding, RuleInfo};
use crate::recognise::{Arithmetic, Coefficient, Form, Smoother};
use crate::spec::{Requirements, Severity};

pub const RULE: RuleInfo = RuleInfo {
    id: "requirement-not-evaluated",
    severity: Severity::Error,
    summary:
        "A requirement could not be evaluated: the coefficient, window or dead band is not known.",
    doc: include_str!("../../rules/requirement-not-evaluated.md"),
    check,
};

/// The spec keys of the requirements set, in the spec's words.
fn requirement_names(r: &Requirements, timed: bool, untimed: bool) -> Vec<&'static str> {
    let mut names = Vec::new();
    if timed {
        if r.cutoff_min.is_some() || r.cutoff_max.is_some() {
            names.push("cutoff");
        }
        if r.max_lag.is_some() {
            names.push("max_lag");
        }
        if r.settle.is_some() {
            names.push("settle");
        }
    }
    if untimed {
        if r.max_noise_ratio.is_some() {
            names.push("min_noise_reduction");
        }
        if r.max_dead_band.is_some() {
            names.push("max_dead_band");
        }
    }
    names
}

/// What is missing of the coefficient, when that is what stops the figures: its text and
/// why it is not known.
fn missing_coefficient(s: &Smoother) -> Option<(String, String)> {
    match (&s.form, &s.alpha) {
        (Form::MovingAverage, _) if s.window.is_none() => Some((
            "window".into(),
            "the number of samples it sums is not a constant tauscan can read".into(),
        )),
        (Form::MovingAverage, _) => None,
        (_, Coefficient::Unknown { formula, reason }) => {
            Some((format!("coefficient `{formula}`"), reason.clone()))
        }
        (
            _,
            Coefficient::Adaptive {
                formula,
                depends_on,
            },
        ) => Some((
            format!("coefficient `{formula}`"),
            format!("it follows `{depends_on}`, measured while running"),
        )),
        (_, Coefficient::Known(_)) => None,
    }
}

/// How to supply what is missing: in the code's terms, or in the spec.
fn help(s: &Smoother) -> String {
    let assume = match s.form {
        Form::MovingAverage => "`assume: { window: 16 }`",
        _ => "`assume: { alpha: 0.05 }`",
    };
    format!(
        "make the value visible to tauscan (a `const`, a macro the build sets given with -D NAME=VALUE or --compile-commands, an init call with constant arguments), or state the value the product runs with in this smoother's spec entry: {assume}"
    )
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let req = &ctx.requirements[i];
        if req.is_empty() {
            continue;
        }
        if let Some((what, why)) = missing_coefficient(s) {
            // An adaptive coefficient's timed requirements are `rate-unknown`'s: it says
            // the time step is measured while running.
            let adaptive = matches!(s.alpha, Coefficient::Adaptive { .. });
            let names = requirement_names(req, !adaptive, true);
            if names.is_empty() {
                continue;
            }
            let mut finding = Finding::at(
                &RULE,
                i,
                s,
                format!(
                    "{} cannot be checked: its {what} is not known ({why})",
                    list(&names)
                ),
            );
            finding.help = Some(help(s));
            finding.labels = super::cutoff_outside_requirement::coefficient_and_rate_labels(s);
            out.push(finding);
            continue;
        }
        let integer = matches!(s.arithmetic, Arithmetic::Integer | Arithmetic::Fixed);
        if req.max_dead_band.is_some() && integer && s.dead_band.is_none() {
            let mut finding = Finding::at(
                &RULE,
                i,
                s,
                "max_dead_band cannot be checked: the update could not be run to measure its dead band (a value in it is not a constant tauscan can read)".into(),
            );
            finding.help = Some(help(s));
            finding.labels = super::cutoff_outside_requirement::coefficient_and_rate_labels(s);
            out.push(finding);
        }
    }
}

fn list(names: &[&str]) -> String {
    match names {
        [one] => format!("the requirement `{one}`"),
        _ => {
            let quoted: Vec<String> = names.iter().map(|n| format!("`{n}`")).collect();
            format!("the requirements {}", quoted.join(", "))
        }
    }
}

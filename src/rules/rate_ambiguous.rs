//! `rate-ambiguous`: one update reached from entry functions of different rates, so its
//! cutoff has no single value.

use super::{Context, Finding, Label, RuleInfo};
use crate::context::path_text;
use crate::report::table::hertz;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "rate-ambiguous",
    severity: Severity::Error,
    summary: "The update is reached from entries of different rates, or its one rate is partial or may come through a pointer.",
    doc: include_str!("../../rules/rate-ambiguous.md"),
    check,
};

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    let program = &ctx.scan.program;
    for (i, s, _) in ctx.smoothers() {
        let rates = &ctx.rates[i];
        let reaches = &rates.from_spec;
        if reaches.len() >= 2 {
            // Each path with its rate and the call that carries it.
            let list: Vec<String> = reaches
                .iter()
                .map(|r| format!("{} via {}", rate_words(r.hz), path_text(program, &r.path)))
                .collect();
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
            finding.labels = reaches
                .iter()
                .filter_map(|r| {
                    let last = r.path.last()?;
                    Some(Label {
                        file: last.file,
                        line: last.line,
                        range: None,
                        message: format!("{} from {}", rate_words(r.hz), r.source),
                    })
                })
                .collect();
            out.push(finding);
            continue;
        }
        // One rate, but another way in that carries none (a partial rate: a warning), or
        // a call through a pointer tauscan could not follow that may reach it (a note).
        for (doubt, what, severity, label, help) in [
            (
                &rates.partial,
                "partial rate",
                Severity::Warning,
                "called here with no rate",
                "give the other caller its rate under `rates:` (or make it an entry of its own), or suppress with the reason it never runs the update",
            ),
            (
                &rates.indirect,
                "the rate may come through an indirect call",
                Severity::Note,
                "a call through a pointer tauscan could not follow",
                "name the function under `rates:` with the rate the pointer is called at (an entry of its own), or store it where tauscan can see it (a table or struct initialised with function names)",
            ),
        ] {
            let Some(doubt) = doubt else { continue };
            let now = match reaches.first() {
                Some(reach) => format!(
                    "{} via {}",
                    rate_words(reach.hz),
                    path_text(program, &reach.path)
                ),
                None => match s.rate.hz {
                    Some(hz) => format!("{} from the code's own constants", hertz(hz)),
                    None => "no rate known".into(),
                },
            };
            let mut finding = Finding::at(
                &RULE,
                i,
                s,
                format!("{what}: {now}, but {}", doubt.text),
            );
            // Said, not failed on by default: the rate given is checked; the other way
            // in is for a reader to judge.
            finding.severity = severity;
            finding.help = Some(help.into());
            finding.labels = vec![Label {
                file: doubt.span.file,
                line: doubt.span.line,
                range: None,
                message: label.into(),
            }];
            out.push(finding);
            break;
        }
    }
}

fn rate_words(hz: Option<f64>) -> String {
    match hz {
        Some(hz) => hertz(hz),
        None => "per event".into(),
    }
}

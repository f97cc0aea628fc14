//! `integer-dead-band`: an integer smoother that cannot reach a constant input, by how
//! many counts on each side. Silent when the spec sets `max_dead_band` for the smoother
//! (then `dead-band-over-requirement` judges it).

use super::{Context, Finding, RuleInfo};
use crate::spec::{Input, Severity};

pub const RULE: RuleInfo = RuleInfo {
    id: "integer-dead-band",
    severity: Severity::Warning,
    summary: "Integer truncation lets the state rest away from a constant input.",
    doc: include_str!("../../rules/integer-dead-band.md"),
    check,
};

/// Each claim is held by execution: the scaled states of `fixtures/forms/scaled_state.c`
/// and `cold_store.c` rest under one count; the rounded forms of `ema_rounded.c` rest about
/// half the band on each side, and a rounded signed division farther on one side below
/// zero (`tests/exec_truth.rs`).
pub(super) const FIX: &str = "keep the state scaled (`acc += u - (acc >> k)`, read `acc >> k`): \
it then rests under one count of the output; rounding before truncating (add N/2 before \
`>> k` or `/ N`) only halves the band and splits it over both sides";

/// Counts, with engineering units when the spec gives what a count is worth.
pub(super) fn counts(n: u64, input: &Input) -> String {
    let base = format!("{n} count{}", if n == 1 { "" } else { "s" });
    match (input.per_count, &input.unit) {
        (Some(per), Some(unit)) => format!(
            "{base} ({} {unit})",
            crate::report::table::sig3(n as f64 * per)
        ),
        (Some(per), None) => format!("{base} ({})", crate::report::table::sig3(n as f64 * per)),
        _ => base,
    }
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        if ctx.requirements[i].max_dead_band.is_some() {
            continue;
        }
        let Some(band) = s.dead_band else { continue };
        if band.rising == 0 && band.falling == 0 {
            continue;
        }
        let how = match (band.rising > 0, band.falling > 0) {
            (true, false) => " (the result is rounded down: a right shift, or a division of values at or above zero)",
            (true, true) if band.rising == band.falling => {
                " (integer division truncates toward zero: down above zero, up below it)"
            }
            _ => "",
        };
        // No range declared and a signed input: which side applies where.
        let sides = match s.dead_band_nonnegative {
            Some(nn) => format!(
                "; for inputs at or above zero, {} below and {} above (give `input.range` in the spec to judge the range the input really takes)",
                counts(nn.rising, &ctx.inputs[i]),
                counts(nn.falling, &ctx.inputs[i])
            ),
            None => String::new(),
        };
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "rests up to {} below a rising input and {} above a falling one{how}{sides}",
                counts(band.rising, &ctx.inputs[i]),
                counts(band.falling, &ctx.inputs[i])
            ),
        );
        finding.help = Some(FIX.into());
        out.push(finding);
    }
}

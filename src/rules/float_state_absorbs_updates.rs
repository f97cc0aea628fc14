//! `float-state-absorbs-updates`: a floating-point state so large against its updates
//! that an input change the sensor can resolve never moves it. Near 1.2e6 a binary32 state
//! holds steps of 0.125; with alpha = 0.001 an input change must exceed about 62 before
//! `alpha * (u - y)` survives the rounding to the state (IEEE 754 round to nearest: an
//! addend under half an ulp leaves the sum unchanged).
//!
//! Needs the input range from the spec (`input.range`); without it the rule is silent. The
//! smallest input step that still moves the state at the top of the range is found by
//! running the compiled update (`sim::Update::run`, which computes in binary32 for a
//! `float` state as C does) from rest there, and is reported when it is larger than the
//! input's resolution (`input.per_count`, else one count). Double states are run the same
//! way and so pass unless their numbers are extreme; integer states are
//! `integer-dead-band`'s.

use super::{Context, Finding, RuleInfo};
use crate::eval::num::Num;
use crate::ir::CType;
use crate::recognise::sim::Update;
use crate::report::table::sig3;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "float-state-absorbs-updates",
    severity: Severity::Warning,
    summary: "A float state is too large for its updates: small input changes are rounded away.",
    doc: include_str!("../../rules/float-state-absorbs-updates.md"),
    check,
};

/// Bisection steps for the threshold: far more than the 53 bits a double can resolve.
const BISECTIONS: u32 = 80;

/// Half the distance from `y` to the next value of its type away from zero.
fn half_ulp(y: f64, ty: &CType) -> Option<f64> {
    match ty {
        CType::Float => {
            let f = (y as f32).abs();
            let next = f32::from_bits(f.to_bits().checked_add(1)?);
            Some((next as f64 - f as f64) / 2.0)
        }
        CType::Double => {
            let f = y.abs();
            let next = f64::from_bits(f.to_bits().checked_add(1)?);
            Some((next - f) / 2.0)
        }
        _ => None,
    }
}

/// What running the update at the top of the range gives.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Threshold {
    /// Where the state rests with the input held at the top of the range.
    rest: f64,
    /// The smallest input change toward the inside of the range that moves the state, as
    /// the input's own type holds it; None when no change within the range moves it.
    step: Option<f64>,
}

fn threshold(sim: &Update, top: f64, span: f64) -> Option<Threshold> {
    let mut rest = sim.run(top, top)?.value.as_f64();
    for _ in 0..64 {
        let next = sim.run(rest, top)?.value.as_f64();
        if next == rest {
            break;
        }
        rest = next;
    }
    let inward = if top >= 0.0 { -1.0 } else { 1.0 };
    let moves =
        |d: f64| -> Option<bool> { Some(sim.run(rest, rest + inward * d)?.value.as_f64() != rest) };
    let mut still = 0.0;
    let mut moving = rest.abs().max(1.0) * 1e-18;
    while !moves(moving)? {
        still = moving;
        moving *= 2.0;
        if moving > span {
            return Some(Threshold { rest, step: None });
        }
    }
    for _ in 0..BISECTIONS {
        let mid = 0.5 * (still + moving);
        if mid <= still || mid >= moving {
            break;
        }
        if moves(mid)? {
            moving = mid;
        } else {
            still = mid;
        }
    }
    // The run converts the input to its declared type first: report the change that type
    // really carries.
    let ty = sim.input_types.first().unwrap_or(&sim.state_type);
    let input = Num::double(rest + inward * moving)
        .convert(ty, sim.target)
        .as_f64();
    Some(Threshold {
        rest,
        step: Some((rest - input).abs()),
    })
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let input = &ctx.inputs[i];
        let Some((lo, hi)) = input.range else {
            continue;
        };
        let Some(sim) = s.simulation.as_ref() else {
            continue;
        };
        let kind = match sim.state_type {
            CType::Float => "float",
            CType::Double => "double",
            _ => continue,
        };
        let Some(alpha) = s.alpha.value().filter(|a| *a > 0.0 && a.is_finite()) else {
            continue;
        };
        let top = if hi.abs() >= lo.abs() { hi } else { lo };
        let span = (hi - lo).abs();
        let Some(found) = threshold(sim, top, span) else {
            continue;
        };
        let resolution = input.per_count.unwrap_or(1.0);
        if found.step.is_some_and(|d| d <= resolution) {
            continue;
        }
        let (unit, resolution_text) = match (input.per_count, &input.unit) {
            (Some(per), Some(unit)) => (format!(" {unit}"), format!("{} {unit}", sig3(per))),
            (Some(per), None) => (String::new(), sig3(per)),
            (None, _) => (String::new(), "1 count".to_string()),
        };
        let half = half_ulp(found.rest, &sim.state_type).unwrap_or(f64::NAN);
        let lost = match found.step {
            Some(d) => format!(
                "cannot follow an input change smaller than {}{unit}",
                sig3(d)
            ),
            None => "is not moved by any input change inside the range".to_string(),
        };
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "near {} the {kind} state {lost}: alpha ({}) times the change is under half \
                 an ulp of the state ({}) and rounds away, while the input resolves \
                 {resolution_text}",
                sig3(found.rest),
                sig3(alpha),
                sig3(half)
            ),
        );
        let wider = match kind {
            "float" => "keep the state in `double`, or ",
            _ => "",
        };
        let needed = found
            .step
            .map(|d| alpha * d / resolution)
            .filter(|a| *a <= 1.0);
        finding.help = Some(match needed {
            Some(a) => format!(
                "{wider}subtract a fixed offset (a tare) so the state stays small; alpha of at \
                 least {} would also keep a change of {resolution_text}, with less smoothing",
                sig3(a)
            ),
            None => format!("{wider}subtract a fixed offset (a tare) so the state stays small"),
        });
        out.push(finding);
    }
}

#[cfg(test)]
mod tests {
    use super::super::coefficient_truncated::findings_in;
    use super::*;

    const SPEC: &str = "smoothers:\n  - match: { function: f }\n    input: { range: [0, 1200000], per_count: 0.5, unit: g }\n";

    #[test]
    fn a_float_state_near_a_million_loses_changes_of_sixty_grams() {
        // Source: IEEE 754 binary32 rounding: near 1.2e6 (between 2^20 and 2^21) the
        // spacing is 2^-3 = 0.125, so an addend of 0.0625 or less (a tie goes to the even
        // neighbour, here the state itself) is lost; 0.001 * d > 0.0625 needs d > 62.5,
        // and the input is itself a float on the 0.125 grid: 62.625.
        let f = findings_in(
            "static float y;\nvoid f(float u) { y += 0.001f * (u - y); }\n",
            SPEC,
            RULE.id,
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message.starts_with(
                "near 1200000 the float state cannot follow an input change smaller than 62.6 g"
            ),
            "{}",
            f[0].message
        );
        assert!(f[0].message.contains("(0.0625)"), "{}", f[0].message);
        assert!(f[0].message.ends_with("resolves 0.5 g"), "{}", f[0].message);
    }

    #[test]
    fn double_states_small_ranges_and_missing_ranges_pass() {
        let double = "static double y;\nvoid f(float u) { y += 0.001 * (u - y); }\n";
        assert!(findings_in(double, SPEC, RULE.id).is_empty());
        let float = "static float y;\nvoid f(float u) { y += 0.001f * (u - y); }\n";
        assert!(
            findings_in(float, "", RULE.id).is_empty(),
            "no range, no finding"
        );
        // Near 4095 the spacing is 2^-12 (IEEE 754 binary32): 0.001 * 1 count survives.
        let adc = "smoothers:\n  - match: { function: f }\n    input: { range: [0, 4095] }\n";
        assert!(findings_in(float, adc, RULE.id).is_empty());
    }

    #[test]
    fn the_threshold_is_the_first_change_that_moves_the_state() {
        let f = findings_in(
            "static float y;\nvoid f(float u) { y += 0.001f * (u - y); }\n",
            SPEC,
            RULE.id,
        );
        assert_eq!(f.len(), 1);
        // Independently of the rule: binary32 steps near 1.2e6, run in Rust's f32.
        let y = 1_200_000.0f32;
        let moves = |d: f32| y + 0.001f32 * ((y - d) - y) != y;
        assert!(!moves(62.5) && moves(62.625));
        assert_eq!(half_ulp(1.2e6, &CType::Float), Some(0.0625));
    }
}

//! `unsigned-difference-wraps`: an integer update takes the difference of input and state
//! in an unsigned type at least as wide as the target's `int`, so an input on the far side
//! of the state wraps the difference to a huge number and the state leaps.
//!
//! Found by running the smoother's compiled update (`recognise::sim`) on the target's
//! `int` width at falling inputs (state high, input low) and rising ones, over the input
//! range: a run that wraps an unsigned intermediate and leaves the new state outside the
//! span between the old state and the input is the hazard. A wrap alone is not: the scaled
//! state `acc += u - (acc >> k)` wraps and wraps back, exactly, by C's modular rules. Which
//! types promote to signed `int` is `eval::num`'s; the helpers shared with
//! `integer-overflow` live there.

use super::integer_overflow::{
    input_range, leaves_span, names_of, num_text, slots, spills, type_name, type_range, Hazard,
    InputRange, Spill,
};
use super::{Context, Finding, RuleInfo};
use crate::ir::BinaryOp;
use crate::recognise::sim::Update;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "unsigned-difference-wraps",
    severity: Severity::Error,
    summary: "The input-minus-state difference is unsigned and wraps, so the state leaps \
              instead of following the input.",
    doc: include_str!("../../rules/unsigned-difference-wraps.md"),
    check,
};

/// One run in which the state leapt.
#[derive(Debug, Clone, PartialEq)]
struct Leap {
    state: i128,
    input: i128,
    after: String,
    falling: bool,
    spill: Spill,
}

/// Where in the range to put the state and the input, as fractions of the range: the ends
/// first (they give the plainest message), then inner points, since over a type's whole
/// range the ends can wrap to a difference of one and hide the leap.
const FALLING: &[(f64, f64)] = &[(1.0, 0.0), (0.75, 0.25), (0.5, 0.0), (0.125, 0.0)];

fn leap(update: &Update, names: &[String], range: InputRange) -> Option<Leap> {
    let target = update.target;
    let scale = update.scale.max(1.0);
    let state_range = type_range(&update.state_type, target);
    let span = (range.hi - range.lo) as f64;
    let at = |fraction: f64| range.lo + (span * fraction).round() as i128;
    let rising = FALLING.iter().map(|&(s, u)| (1.0 - s, 1.0 - u, false));
    let falling = FALLING.iter().map(|&(s, u)| (s, u, true));
    for (s, u, is_falling) in falling.chain(rising) {
        let (out, input) = (at(s), at(u));
        let state = (out as f64 * scale).round() as i128;
        if state_range.is_some_and(|(lo, hi)| state < lo || state > hi) {
            continue;
        }
        let Some(run) = update.run(state as f64, input as f64) else {
            continue;
        };
        if !run.unsigned_wrap || !leaves_span(out, input, run.value, scale) {
            continue;
        }
        // The difference is this rule's; a wrapped product or sum is `integer-overflow`'s.
        let slots = slots(update, state, input);
        let Some(spill) = spills(
            &update.new_value,
            &slots,
            target,
            names,
            Hazard::UnsignedWrap,
        )
        .into_iter()
        .find(|s| s.op == BinaryOp::Sub) else {
            continue;
        };
        return Some(Leap {
            state,
            input,
            after: num_text(run.value),
            falling: is_falling,
            spill,
        });
    }
    None
}

fn message(leap: &Leap, update: &Update) -> String {
    let target = update.target;
    let instead = if leap.falling { "falling" } else { "rising" };
    let mut text = format!(
        "with the state at {} and the input at {}, `{}` ",
        leap.state, leap.input, leap.spill.text
    );
    if let Some(exact) = leap.spill.exact {
        text.push_str(&format!("is {exact}, which "));
    }
    text.push_str(&format!(
        "wraps to {} in its type ({}): the state leaps to {} instead of {instead}",
        leap.spill.value,
        type_name(leap.spill.ty, target),
        leap.after
    ));
    text
}

fn help(leap: &Leap, range: InputRange) -> String {
    // int32_t holds the difference of any two values up to 2^31 - 1 apart from zero.
    let signed = if range.hi <= i128::from(i32::MAX) && range.lo >= 0 {
        "int32_t"
    } else {
        "int64_t"
    };
    let spill = &leap.spill;
    if spill.op == BinaryOp::Sub {
        format!(
            "take the difference in a signed type wide enough for both: `({signed}){} - \
             ({signed}){}`",
            spill.lhs, spill.rhs
        )
    } else {
        format!(
            "compute the step in a signed type wide enough for the input and the state \
             (cast each operand of `{}` to `{signed}`)",
            spill.text
        )
    }
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let Some(update) = &s.simulation else {
            continue;
        };
        let Some(range) = input_range(update, &ctx.inputs[i]) else {
            continue;
        };
        let Some(found) = leap(update, &names_of(s), range) else {
            continue;
        };
        let mut finding = Finding::at(&RULE, i, s, message(&found, update));
        finding.help = Some(help(&found, range));
        out.push(finding);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::eval::num::Target;
    use crate::ir::{CType, IntType};
    use crate::recognise::sim::Node;

    use crate::recognise::sim::build::{int_type, k, slot, target};

    fn unsigned(bits: u8) -> CType {
        int_type(bits, false)
    }
    fn names() -> Vec<String> {
        vec!["y".into(), "u".into()]
    }

    /// `y = y + ((u - y) >> 3)` over `ty` state and input.
    fn shift_update(ty: CType, t: Target) -> Update {
        let diff = Box::new(Node::Binary(BinaryOp::Sub, slot(1), slot(0)));
        let step = Box::new(Node::Binary(BinaryOp::Shr, diff, k(3, t)));
        Update {
            new_value: Node::Binary(BinaryOp::Add, slot(0), step),
            state_type: ty.clone(),
            input_types: vec![ty],
            scale: 1.0,
            target: t,
        }
    }

    fn range(lo: i128, hi: i128) -> InputRange {
        InputRange {
            lo,
            hi,
            from_spec: true,
        }
    }

    #[test]
    fn uint16_wraps_on_a_sixteen_bit_int_only() {
        // Source: C11 6.3.1.1p2: uint16_t promotes to signed int where int is wider (32
        // bits) and to unsigned int where it is as wide (16 bits); 6.2.5p9: unsigned
        // arithmetic is modulo 2^16, so 0 - 4095 is 61441, and 4095 + 61441 / 8 = 11775.
        let on16 = leap(
            &shift_update(unsigned(16), target(16)),
            &names(),
            range(0, 4095),
        )
        .unwrap();
        assert_eq!((on16.state, on16.input, on16.falling), (4095, 0, true));
        assert_eq!(on16.spill.value, 61441);
        assert_eq!(on16.after, "11775");
        assert_eq!(
            leap(
                &shift_update(unsigned(16), target(32)),
                &names(),
                range(0, 4095)
            ),
            None
        );
    }

    #[test]
    fn uint32_wraps_on_a_thirty_two_bit_int_and_the_message_gives_the_values() {
        // Source: C11 6.2.5p9: 100 - 4000 in uint32_t is 2^32 - 3900 = 4294963396, whose
        // eighth (536870424) added to 4000 is 536874424.
        let update = shift_update(unsigned(32), target(32));
        let found = leap(&update, &names(), range(100, 4000)).unwrap();
        let text = message(&found, &update);
        assert!(
            text.contains("state at 4000 and the input at 100")
                && text.contains("wraps to 4294963396")
                && text.contains("leaps to 536874424 instead of falling"),
            "{text}"
        );
        assert!(help(&found, range(100, 4000)).contains("(int32_t)u - (int32_t)y"));
    }

    #[test]
    fn over_a_whole_type_an_inner_point_shows_the_leap() {
        // Source: C11 6.2.5p9: at the ends of uint32_t, 0 - (2^32 - 1) wraps to 1 and the
        // state barely moves; from three quarters down to a quarter it wraps to 2^31.
        let update = shift_update(unsigned(32), target(32));
        let whole = input_range(&update, &crate::spec::Input::default()).unwrap();
        let found = leap(&update, &names(), whole).unwrap();
        assert!(found.falling);
        assert!(found.state > found.input);
        assert_eq!(found.spill.value, (1i128 << 32) + found.input - found.state);
    }

    #[test]
    fn a_scaled_state_that_wraps_and_wraps_back_is_not_a_leap() {
        // acc = acc + (u - (acc >> 4)) in uint32_t: u - (acc >> 4) wraps below zero and the
        // sum wraps back to the exact value. Source: C11 6.2.5p9 (modular arithmetic).
        let t = target(32);
        let shifted = Box::new(Node::Binary(BinaryOp::Shr, slot(0), k(4, t)));
        let step = Box::new(Node::Binary(BinaryOp::Sub, slot(1), shifted));
        let update = Update {
            new_value: Node::Binary(BinaryOp::Add, slot(0), step),
            state_type: unsigned(32),
            input_types: vec![unsigned(32)],
            scale: 16.0,
            target: t,
        };
        let slots = slots(&update, 4000 * 16, 100);
        assert!(
            update.new_value.hazards(&slots, t).1,
            "the difference does wrap"
        );
        assert_eq!(leap(&update, &names(), range(0, 4095)), None);
    }

    #[test]
    fn a_signed_difference_never_leaps() {
        // y + (((int32_t)u - (int32_t)y) >> 3): the sum wraps in uint32_t when the step is
        // negative, yet lands on the right value. Source: C11 6.3.1.8 and 6.2.5p9.
        let t = target(32);
        let i32t = CType::FixedInt(IntType {
            bits: 32,
            signed: true,
        });
        let cast = |i| Box::new(Node::Cast(i32t.clone(), slot(i)));
        let diff = Box::new(Node::Binary(BinaryOp::Sub, cast(1), cast(0)));
        let step = Box::new(Node::Binary(BinaryOp::Shr, diff, k(3, t)));
        let update = Update {
            new_value: Node::Binary(BinaryOp::Add, slot(0), step),
            state_type: unsigned(32),
            input_types: vec![unsigned(32)],
            scale: 1.0,
            target: t,
        };
        assert_eq!(leap(&update, &names(), range(0, 16_777_215)), None);
    }
}

//! `integer-overflow`: the state or an intermediate of an integer update leaves its type
//! for the declared input range, on the target's `int` width.
//!
//! Runs the smoother's compiled update (`recognise::sim`) with the state and the input at
//! the ends of the input range (a smoother at rest holds a value of its input's range,
//! times its scale) and reports the first of: a scaled state that cannot hold its resting
//! value, a signed intermediate that overflows (undefined in C, C11 6.5p5), an unsigned
//! product or sum that wraps and throws the state off, or a new state its type cannot hold.
//! A wrapped input-state difference is left to `unsigned-difference-wraps`. Also holds the
//! helpers both rules share: the input range to try, the slot values, finding and naming
//! the intermediate that went wrong, and the test that tells a harmful wrap from the
//! modular kind that comes back exact.

use super::{Context, Finding, RuleInfo};
use crate::eval::num::{self, Num, Target};
use crate::ir::{BinaryOp, CType, IntType, UnaryOp};
use crate::recognise::sim::{Node, Update};
use crate::spec::{Input, Severity};

pub const RULE: RuleInfo = RuleInfo {
    id: "integer-overflow",
    severity: Severity::Error,
    summary: "The state or an intermediate of an integer update overflows its type for the \
              input range.",
    doc: include_str!("../../rules/integer-overflow.md"),
    check,
};

/// The input values a rule tries, in counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct InputRange {
    pub lo: i128,
    pub hi: i128,
    /// Whether the spec gave it (else it is what the declared types can hold).
    pub from_spec: bool,
}

/// The range an integer type holds on the target; None for float and other types.
pub(super) fn type_range(ty: &CType, target: Target) -> Option<(i128, i128)> {
    match ty {
        CType::FixedInt(t) => Some(num::int_range(*t)),
        CType::PlainInt { signed } => Some(num::int_range(target.int(*signed))),
        CType::Bool => Some((0, 1)),
        _ => None,
    }
}

/// The input range to try: the spec's, else what the declared input types hold, and in
/// either case no wider than those types and the state's type over the scale (a value no
/// input variable can hold is not an input). None when nothing bounds it (float throughout
/// and no spec range) or the bounds leave no range.
pub(super) fn input_range(update: &Update, input: &Input) -> Option<InputRange> {
    let scale = update.scale.max(1.0);
    let mut bounds: Option<(i128, i128)> =
        type_range(&update.state_type, update.target).map(|(lo, hi)| {
            (
                (lo as f64 / scale).ceil() as i128,
                (hi as f64 / scale).floor() as i128,
            )
        });
    for ty in &update.input_types {
        if let Some((lo, hi)) = type_range(ty, update.target) {
            bounds = Some(match bounds {
                Some((a, b)) => (a.max(lo), b.min(hi)),
                None => (lo, hi),
            });
        }
    }
    let (lo, hi, from_spec) = match (input.range, bounds) {
        (Some((lo, hi)), Some((a, b))) => (
            (lo.ceil() as i128).max(a),
            (hi.floor() as i128).min(b),
            true,
        ),
        (Some((lo, hi)), None) => (lo.ceil() as i128, hi.floor() as i128, true),
        (None, Some((a, b))) => (a, b, false),
        (None, None) => return None,
    };
    (lo < hi).then_some(InputRange { lo, hi, from_spec })
}

/// The slot values `Update::run` puts in for a state and an input, converted to their
/// declared types the same way, so the intermediates named here are the ones it ran.
pub(super) fn slots(update: &Update, state: i128, input: i128) -> Vec<Num> {
    let value = |v: i128, ty: &CType| Num::double(v as f64).convert(ty, update.target);
    let mut slots = vec![value(state, &update.state_type)];
    slots.extend(update.input_types.iter().map(|ty| value(input, ty)));
    slots
}

/// Which flag of C arithmetic an intermediate is looked for by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Hazard {
    SignedOverflow,
    UnsignedWrap,
}

/// An intermediate of the update that left its type, as one run met it.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Spill {
    /// The intermediate as C, in the smoother's own names.
    pub text: String,
    /// The operation, to suggest the fix on its operands; these are printed to stand
    /// after a cast (`(int32_t)(8 - 1)`).
    pub op: BinaryOp,
    pub lhs: String,
    pub rhs: String,
    /// The value in unbounded arithmetic, when the operation has one (`+`, `-`, `*`, `<<`).
    pub exact: Option<i128>,
    /// What C gave: wrapped into `ty`.
    pub value: i128,
    pub ty: IntType,
}

/// The intermediates, on the branches the run takes, whose operation raises `hazard`,
/// innermost first. The flags of `Update::run` cover both arms of a `?:`; a saturation
/// guard then raises them for a product it never computes, so the rules confirm each flag
/// here.
pub(super) fn spills(
    node: &Node,
    slots: &[Num],
    target: Target,
    names: &[String],
    hazard: Hazard,
) -> Vec<Spill> {
    let mut found = Vec::new();
    collect_spills(node, slots, target, names, hazard, &mut found);
    found
}

fn collect_spills(
    node: &Node,
    slots: &[Num],
    target: Target,
    names: &[String],
    hazard: Hazard,
    found: &mut Vec<Spill>,
) {
    match node {
        Node::Const(_) | Node::Slot(_) => {}
        Node::Unary(_, a) | Node::Cast(_, a) => {
            collect_spills(a, slots, target, names, hazard, found)
        }
        Node::Cond(c, t, o) => {
            collect_spills(c, slots, target, names, hazard, found);
            let Ok(condition) = c.eval(slots, target) else {
                return;
            };
            let taken = if condition.is_zero() { o } else { t };
            collect_spills(taken, slots, target, names, hazard, found);
        }
        Node::Binary(op, a, b) => {
            collect_spills(a, slots, target, names, hazard, found);
            collect_spills(b, slots, target, names, hazard, found);
            if let Some(spill) = spill_at((*op, a, b), slots, target, names, hazard) {
                found.push(spill);
            }
        }
    }
}

/// The first of `spills`.
pub(super) fn first_spill(
    node: &Node,
    slots: &[Num],
    target: Target,
    names: &[String],
    hazard: Hazard,
) -> Option<Spill> {
    spills(node, slots, target, names, hazard)
        .into_iter()
        .next()
}

/// The spill at one operation `a op b`, if its result raises `hazard`.
fn spill_at(
    (op, a, b): (BinaryOp, &Node, &Node),
    slots: &[Num],
    target: Target,
    names: &[String],
    hazard: Hazard,
) -> Option<Spill> {
    let (x, y) = (a.eval(slots, target).ok()?, b.eval(slots, target).ok()?);
    let out = num::binary(op, x, y, target).ok()?;
    let raised = match hazard {
        Hazard::SignedOverflow => out.signed_overflow,
        Hazard::UnsignedWrap => out.unsigned_wrap,
    };
    let Num::Int { value, ty } = out.value else {
        return None;
    };
    if !raised {
        return None;
    }
    let exact = match (x, y) {
        (Num::Int { value: x, .. }, Num::Int { value: y, .. }) => match op {
            BinaryOp::Add => x.checked_add(y),
            BinaryOp::Sub => x.checked_sub(y),
            BinaryOp::Mul => x.checked_mul(y),
            BinaryOp::Shl => u32::try_from(y)
                .ok()
                .filter(|s| *s < 64)
                .and_then(|s| x.checked_mul(1i128 << s)),
            _ => None,
        },
        _ => None,
    };
    let text = format!(
        "{} {} {}",
        operand_text(a, op.precedence(), false, names),
        op.text(),
        operand_text(b, op.precedence(), true, names)
    );
    Some(Spill {
        text,
        op,
        lhs: operand_text(a, CAST, false, names),
        rhs: operand_text(b, CAST, true, names),
        exact,
        value,
        ty,
    })
}

/// The precedence of a cast or a unary operator, above every binary one.
const CAST: u8 = 11;

/// An operand printed inside an operation of precedence `parent`, with the parentheses
/// it needs. Inside a shift, a comparison or a bitwise operation every operation gets its
/// parentheses, as careful C writes them (`(u - y) >> 3`).
fn operand_text(child: &Node, parent: u8, right: bool, names: &[String]) -> String {
    let text = node_text(child, names);
    match child {
        Node::Binary(op, ..)
            if parent < 9 || op.precedence() < parent || (right && op.precedence() == parent) =>
        {
            format!("({text})")
        }
        Node::Cond(..) => format!("({text})"),
        _ => text,
    }
}

/// A compiled update printed back as C, slot 0 as the state and the others as the inputs.
pub(super) fn node_text(node: &Node, names: &[String]) -> String {
    match node {
        Node::Const(Num::Int { value, .. }) => value.to_string(),
        Node::Const(Num::Float { value, .. }) => value.to_string(),
        Node::Slot(i) => names
            .get(*i)
            .cloned()
            .unwrap_or_else(|| format!("input{i}")),
        Node::Unary(op, a) => {
            let sign = match op {
                UnaryOp::Neg => "-",
                UnaryOp::Plus => "+",
                UnaryOp::Not => "!",
                UnaryOp::BitNot => "~",
                UnaryOp::Deref => "*",
                UnaryOp::AddrOf => "&",
            };
            format!("{sign}{}", operand_text(a, CAST, false, names))
        }
        Node::Cast(ty, a) => format!("({ty}){}", operand_text(a, CAST, false, names)),
        Node::Binary(op, a, b) => {
            let p = op.precedence();
            format!(
                "{} {} {}",
                operand_text(a, p, false, names),
                op.text(),
                operand_text(b, p, true, names)
            )
        }
        Node::Cond(c, t, o) => format!(
            "{} ? {} : {}",
            operand_text(c, 1, false, names),
            operand_text(t, 1, false, names),
            operand_text(o, 1, false, names)
        ),
    }
}

/// An integer type as a reader of the target's C would name it.
pub(super) fn type_name(ty: IntType, target: Target) -> String {
    match (ty.bits == target.int_bits, ty.signed) {
        (true, true) => format!("a {}-bit `int` on this target", ty.bits),
        (true, false) => format!("a {}-bit `unsigned int` on this target", ty.bits),
        (false, true) => format!("`int{}_t`", ty.bits),
        (false, false) => format!("`uint{}_t`", ty.bits),
    }
}

/// A state's type by its C name, with the width when it is the target's `int`.
fn state_type_name(ty: &CType, target: Target) -> String {
    match ty {
        CType::PlainInt { .. } => format!("`{ty}` ({} bits on this target)", target.int_bits),
        _ => format!("`{ty}`"),
    }
}

/// The declared types that bound an update's values, with what they are declared for:
/// "`int16_t` `pump_mv` and `uint16_t` `raw`".
fn declared_types(update: &Update, names: &[String]) -> String {
    let mut parts = Vec::new();
    for (i, ty) in std::iter::once(&update.state_type)
        .chain(update.input_types.iter())
        .enumerate()
    {
        if !ty.is_integer() {
            continue;
        }
        let name = names.get(i).map(String::as_str).unwrap_or("an input");
        let part = format!("{} `{name}`", state_type_name(ty, update.target));
        if !parts.contains(&part) {
            parts.push(part);
        }
    }
    parts.join(" and ")
}

/// A type wider than `ty` of the same signedness, by the name a reader would cast to.
pub(super) fn wider(ty: IntType) -> &'static str {
    match (ty.signed, ty.bits < 32) {
        (true, true) => "int32_t",
        (true, false) => "int64_t",
        (false, true) => "uint32_t",
        (false, false) => "uint64_t",
    }
}

/// Whether a run took the state out of the span between where it was and the input, by
/// more than the count a rounding offset may step past. A smoother only ever moves toward
/// its input; a wrapped intermediate that throws it elsewhere broke the filter, one that
/// wraps back (modular arithmetic) did not.
pub(super) fn leaves_span(out: i128, input: i128, new_state: Num, scale: f64) -> bool {
    let new_out = new_state.as_f64() / scale.max(1.0);
    let low = out.min(input) as f64 - 1.0;
    let high = out.max(input) as f64 + 1.0;
    !(low..=high).contains(&new_out)
}

/// What went out of range, where, and how it reads.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Overflow {
    pub message: String,
    pub help: String,
}

/// The states and inputs to try. With a range from the spec, every pairing of its ends: a
/// smoother at rest at one end may be handed the other. With only the types to go by, the
/// state at rest at either end: a swing from one end of `int32_t` to the other is no input
/// anyone declared, and it would overflow `u - y` in every signed smoother alike.
fn points(range: InputRange) -> Vec<(i128, i128)> {
    let mut points = vec![(range.hi, range.hi)];
    if range.from_spec {
        points.push((range.hi, range.lo));
        points.push((range.lo, range.hi));
    }
    points.push((range.lo, range.lo));
    points
}

/// The first place the update leaves its types over `range`: a state that cannot hold its
/// resting value, a signed intermediate that overflows, an unsigned one other than the
/// input-state difference that wraps and throws the state off, or a new value the state's
/// type cannot hold.
pub(super) fn overflow(update: &Update, names: &[String], range: InputRange) -> Option<Overflow> {
    let target = update.target;
    let scale = update.scale.max(1.0);
    let state_of = |out: i128| (out as f64 * scale).round() as i128;
    let state_range = type_range(&update.state_type, target)?;
    let give_range = if range.from_spec {
        String::new()
    } else {
        "; or, if the input never spans its whole type, give its range in the spec \
         (`smoothers[].input.range`)"
            .to_string()
    };
    let state_name = names.first().map(String::as_str).unwrap_or("the state");
    // A scaled state holds the output times its scale: at rest it can already be too big.
    for out in [range.hi, range.lo] {
        let state = state_of(out);
        if state < state_range.0 || state > state_range.1 {
            return Some(Overflow {
                message: format!(
                    "at rest with the input at {out}, `{state_name}` holds {state} ({out} \
                     times its scale {scale}), outside the {}..{} of {}",
                    state_range.0,
                    state_range.1,
                    state_type_name(&update.state_type, target)
                ),
                help: format!("give `{state_name}` a type that holds {state}{give_range}"),
            });
        }
    }
    for (out, input) in points(range) {
        let state = state_of(out);
        let Some(run) = update.run(state as f64, input as f64) else {
            continue;
        };
        let slots = slots(update, state, input);
        let at = format!("with the state at {state} and the input at {input}");
        let widen = |spill: &Spill| {
            format!(
                "form the intermediate in a wider type: `({}){} {} {}`{give_range}",
                wider(spill.ty),
                spill.lhs,
                spill.op.text(),
                spill.rhs
            )
        };
        if run.signed_overflow {
            if let Some(spill) = first_spill(
                &update.new_value,
                &slots,
                target,
                names,
                Hazard::SignedOverflow,
            ) {
                let (lo, hi) = num::int_range(spill.ty);
                let (end, bound) = if spill.exact.is_some_and(|e| e < lo) {
                    ("smallest", lo)
                } else {
                    ("largest", hi)
                };
                let exact = spill
                    .exact
                    .map(|e| format!(" comes to {e}, past the {end} value of its type"))
                    .unwrap_or_else(|| format!(" goes past the {end} value of its type"));
                return Some(Overflow {
                    message: format!(
                        "{at}, `{}`{exact} ({bound}, {}); signed overflow is undefined \
                         behaviour, and where it wraps the state becomes {}",
                        spill.text,
                        type_name(spill.ty, target),
                        num_text(run.value)
                    ),
                    help: widen(&spill),
                });
            }
        }
        // A wrapped input-state difference is `unsigned-difference-wraps`'s to report.
        if run.unsigned_wrap && leaves_span(out, input, run.value, scale) {
            let wrapped = spills(
                &update.new_value,
                &slots,
                target,
                names,
                Hazard::UnsignedWrap,
            );
            if !wrapped.iter().any(|w| w.op == BinaryOp::Sub) {
                if let Some(spill) = wrapped.first() {
                    let exact = spill
                        .exact
                        .map(|e| format!(" is {e}, which"))
                        .unwrap_or_default();
                    return Some(Overflow {
                        message: format!(
                            "{at}, `{}`{exact} wraps to {} in its type ({}): the state \
                             becomes {}",
                            spill.text,
                            spill.value,
                            type_name(spill.ty, target),
                            num_text(run.value)
                        ),
                        help: widen(spill),
                    });
                }
            }
        }
        // A float result stored into an integer state is always "narrowed" by its
        // truncation; only a value outside the state's type is an overflow. A value that
        // came through an unsigned wrap is judged above or by the other rule.
        if run.narrowed && !run.unsigned_wrap {
            let Ok(raw) = update.new_value.eval(&slots, target) else {
                continue;
            };
            let raw = raw.as_f64();
            if raw < state_range.0 as f64 || raw > state_range.1 as f64 {
                return Some(Overflow {
                    message: format!(
                        "{at}, the new value {} does not fit {} ({}..{}) and is stored as {}",
                        crate::report::table::sig3(raw),
                        state_type_name(&update.state_type, target),
                        state_range.0,
                        state_range.1,
                        num_text(run.value)
                    ),
                    help: format!(
                        "give `{state_name}` a type that holds the update's largest value, \
                         or saturate it before storing{give_range}"
                    ),
                });
            }
        }
    }
    None
}

pub(super) fn num_text(n: Num) -> String {
    match n {
        Num::Int { value, .. } => value.to_string(),
        Num::Float { value, .. } => crate::report::table::sig3(value),
    }
}

/// The state's name and its inputs', in slot order.
pub(super) fn names_of(s: &crate::recognise::Smoother) -> Vec<String> {
    std::iter::once(s.state.clone())
        .chain(s.inputs.iter().cloned())
        .collect()
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let Some(update) = &s.simulation else {
            continue;
        };
        if !update.state_type.is_integer() {
            continue;
        }
        let Some(range) = input_range(update, &ctx.inputs[i]) else {
            continue;
        };
        let Some(found) = overflow(update, &names_of(s), range) else {
            continue;
        };
        // With no range in the spec and only plain `int` to go by, the whole of `int` is
        // an assumption, not a reading: a note that asks for the range, not an error.
        let fixed_width = std::iter::once(&update.state_type)
            .chain(update.input_types.iter())
            .any(|t| matches!(t, CType::FixedInt(_)));
        let assumed = !range.from_spec && !fixed_width;
        let message = if assumed {
            format!(
                "{} (assuming inputs over the whole of `int`: the spec gives no \
                 `input.range` and no fixed-width type bounds them)",
                found.message
            )
        } else if !range.from_spec {
            // Where the range came from: the declared types, named.
            format!(
                "{} (values over {}..{}, the range of {}: the spec gives no `input.range`)",
                found.message,
                range.lo,
                range.hi,
                declared_types(update, &names_of(s))
            )
        } else {
            found.message
        };
        let mut finding = Finding::at(&RULE, i, s, message);
        if assumed {
            finding.severity = crate::spec::Severity::Note;
        }
        finding.help = Some(found.help);
        out.push(finding);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recognise::sim::build::{int_type, k, slot, target};

    /// `y = (y * 15 + u) / 16` over `ty` state and input.
    fn weighted(ty: CType, t: Target, widen: Option<CType>) -> Update {
        let y: Box<Node> = match widen {
            Some(w) => Box::new(Node::Cast(w, slot(0))),
            None => slot(0),
        };
        let product = Box::new(Node::Binary(BinaryOp::Mul, y, k(15, t)));
        let sum = Box::new(Node::Binary(BinaryOp::Add, product, slot(1)));
        Update {
            new_value: Node::Binary(BinaryOp::Div, sum, k(16, t)),
            state_type: ty.clone(),
            input_types: vec![ty],
            scale: 1.0,
            target: t,
        }
    }

    fn names() -> Vec<String> {
        vec!["y".into(), "u".into()]
    }

    fn twelve_bits() -> InputRange {
        InputRange {
            lo: 0,
            hi: 4095,
            from_spec: true,
        }
    }

    #[test]
    fn a_product_of_a_twelve_bit_state_overflows_a_sixteen_bit_int() {
        // Source: C11 6.3.1.1 (int16_t promotes to int, 16 bits here) and 6.5p5 (signed
        // overflow); 4095 * 15 = 61425 is above 32767.
        let found = overflow(
            &weighted(int_type(16, true), target(16), None),
            &names(),
            twelve_bits(),
        )
        .unwrap();
        assert!(
            found.message.contains("`y * 15` comes to 61425"),
            "{}",
            found.message
        );
        assert!(found.message.contains("32767"), "{}", found.message);
        assert!(found.help.contains("(int32_t)y * 15"), "{}", found.help);
    }

    #[test]
    fn the_same_line_fits_a_thirty_two_bit_int_or_a_widened_product() {
        // Source: C11 6.3.1.1: on a 32-bit int the product is formed in 32 bits, and
        // 61425 + 4095 fits; a cast to int32_t does the same on a 16-bit int.
        let t16 = target(16);
        assert_eq!(
            overflow(
                &weighted(int_type(16, true), target(32), None),
                &names(),
                twelve_bits()
            ),
            None
        );
        assert_eq!(
            overflow(
                &weighted(int_type(16, true), t16, Some(int_type(32, true))),
                &names(),
                twelve_bits()
            ),
            None
        );
    }

    #[test]
    fn without_a_spec_range_the_input_type_decides_and_the_help_says_so() {
        // Source: C11 6.2.5 (int32_t holds up to 2^31 - 1); 15 times that overflows.
        let update = weighted(int_type(32, true), target(32), None);
        let range = input_range(&update, &Input::default()).unwrap();
        assert_eq!(
            (range.lo, range.hi, range.from_spec),
            (i32::MIN as i128, i32::MAX as i128, false)
        );
        let found = overflow(&update, &names(), range).unwrap();
        assert!(found.help.contains("input.range"), "{}", found.help);
    }

    #[test]
    fn a_scaled_state_that_cannot_hold_its_rest_value_is_an_overflow() {
        // acc += u - (acc >> 4) in int16_t: at rest acc holds 16 * 4095 = 65520, above
        // 32767. Source: C11 6.2.5 (the range of int16_t).
        let t = target(32);
        let shifted = Box::new(Node::Binary(BinaryOp::Shr, slot(0), k(4, t)));
        let step = Box::new(Node::Binary(BinaryOp::Sub, slot(1), shifted));
        let update = Update {
            new_value: Node::Binary(BinaryOp::Add, slot(0), step),
            state_type: int_type(16, true),
            input_types: vec![int_type(16, true)],
            scale: 16.0,
            target: t,
        };
        let found = overflow(&update, &names(), twelve_bits()).unwrap();
        assert!(found.message.contains("65520"), "{}", found.message);
    }

    #[test]
    fn an_unsigned_product_that_wraps_is_reported_and_a_wrapped_difference_is_not() {
        // Source: C11 6.2.5p9: 4294967295 * 15 in uint32_t wraps; the state leaves its rest.
        let t = target(32);
        let update = weighted(int_type(32, false), t, None);
        let range = input_range(&update, &Input::default()).unwrap();
        let found = overflow(&update, &names(), range).unwrap();
        assert!(
            found
                .message
                .contains("`y * 15` is 64424509425, which wraps"),
            "{}",
            found.message
        );
        assert!(found.help.contains("(uint64_t)y * 15"), "{}", found.help);
        // y + ((u - y) >> 3) in uint32_t wraps only in the difference: the other rule's.
        let diff = Box::new(Node::Binary(BinaryOp::Sub, slot(1), slot(0)));
        let step = Box::new(Node::Binary(BinaryOp::Shr, diff, k(3, t)));
        let update = Update {
            new_value: Node::Binary(BinaryOp::Add, slot(0), step),
            state_type: int_type(32, false),
            input_types: vec![int_type(32, false)],
            scale: 1.0,
            target: t,
        };
        assert_eq!(overflow(&update, &names(), twelve_bits()), None);
    }

    #[test]
    fn the_untaken_arm_of_a_saturation_is_not_an_overflow() {
        // y = y > 2000 ? 2000 : y * 15 on a 16-bit int: at 4095 the product is never formed.
        let t = target(16);
        let guard = Box::new(Node::Binary(BinaryOp::Gt, slot(0), k(2000, t)));
        let product = Box::new(Node::Binary(BinaryOp::Mul, slot(0), k(15, t)));
        let node = Node::Cond(guard, k(2000, t), product);
        let slots = vec![Num::int(4095, t.int(true))];
        assert_eq!(
            first_spill(&node, &slots, t, &names(), Hazard::SignedOverflow),
            None
        );
        assert!(
            node.hazards(&slots, t).0,
            "the run's flag does see the untaken arm"
        );
    }

    #[test]
    fn printing_keeps_the_parentheses_precedence_needs() {
        let t = target(32);
        let diff = Box::new(Node::Binary(BinaryOp::Sub, slot(1), slot(0)));
        let node = Node::Binary(BinaryOp::Shr, diff, k(3, t));
        assert_eq!(node_text(&node, &names()), "(u - y) >> 3");
        let diff = Box::new(Node::Binary(BinaryOp::Sub, slot(1), slot(0)));
        let node = Node::Binary(BinaryOp::Mul, diff, k(3, t));
        assert_eq!(node_text(&node, &names()), "(u - y) * 3");
    }
}

//! Runs an update the way the target's C would: a compiled form of the update expression
//! over a few slots (the state and its inputs), evaluated with the integer rules of
//! `eval::num`, used to measure what truncation does (the dead band).
//!
//! Compiling once and evaluating on slots keeps the search loops free of name lookups and
//! allocation. The dead band is the largest distance at which the state can rest from a
//! constant input: the largest `d` for which one update from rest at `s`, with the input
//! at `out(s) + d` (rising) or `out(s) - d` (falling), leaves the state unchanged, over
//! enough starting points `s` to cover every remainder of the divisions involved. Every
//! resting point is such a one-step stall and every one-step stall is a resting point, so
//! this is the same as running to rest from everywhere, at a small fraction of the cost.

use crate::eval::num::{self, ArithError, Num, Target};
use crate::ir::{BinaryOp, CType, UnaryOp};

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum Node {
    Const(Num),
    Slot(usize),
    Unary(UnaryOp, Box<Node>),
    Binary(BinaryOp, Box<Node>, Box<Node>),
    Cast(CType, Box<Node>),
    Cond(Box<Node>, Box<Node>, Box<Node>),
}

impl Node {
    pub fn eval(&self, slots: &[Num], target: Target) -> Result<Num, ArithError> {
        Ok(match self {
            Node::Const(v) => *v,
            Node::Slot(i) => *slots.get(*i).ok_or(ArithError::NotANumber)?,
            Node::Unary(op, a) => num::unary(*op, a.eval(slots, target)?, target)?.value,
            Node::Binary(op, a, b) => {
                num::binary(*op, a.eval(slots, target)?, b.eval(slots, target)?, target)?.value
            }
            Node::Cast(ty, a) => a.eval(slots, target)?.convert(ty, target),
            Node::Cond(c, t, o) => {
                if !c.eval(slots, target)?.is_zero() {
                    t.eval(slots, target)?
                } else {
                    o.eval(slots, target)?
                }
            }
        })
    }

    /// Whether evaluating this raises a signed overflow or unsigned wrap for the slots.
    pub fn hazards(&self, slots: &[Num], target: Target) -> (bool, bool) {
        let mut overflow = false;
        let mut wrapped = false;
        self.walk_hazards(slots, target, &mut overflow, &mut wrapped);
        (overflow, wrapped)
    }

    fn walk_hazards(&self, slots: &[Num], target: Target, overflow: &mut bool, wrapped: &mut bool) {
        match self {
            Node::Unary(_, a) | Node::Cast(_, a) => {
                a.walk_hazards(slots, target, overflow, wrapped)
            }
            Node::Binary(op, a, b) => {
                a.walk_hazards(slots, target, overflow, wrapped);
                b.walk_hazards(slots, target, overflow, wrapped);
                if let (Ok(x), Ok(y)) = (a.eval(slots, target), b.eval(slots, target)) {
                    if let Ok(out) = num::binary(*op, x, y, target) {
                        *overflow |= out.signed_overflow;
                        *wrapped |= out.unsigned_wrap;
                    }
                }
            }
            Node::Cond(c, t, o) => {
                c.walk_hazards(slots, target, overflow, wrapped);
                t.walk_hazards(slots, target, overflow, wrapped);
                o.walk_hazards(slots, target, overflow, wrapped);
            }
            Node::Const(_) | Node::Slot(_) => {}
        }
    }
}

/// The state and up to seven inputs.
const MAX_SLOTS: usize = 8;

/// An update ready to run: slot 0 is the state, the others are inputs.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Update {
    pub new_value: Node,
    pub state_type: CType,
    pub input_types: Vec<CType>,
    /// The state holds the output times this factor (1 for a plain smoother).
    pub scale: f64,
    pub target: Target,
}

/// Rising and falling dead band, in counts of the output.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct DeadBand {
    pub rising: u64,
    pub falling: u64,
}

/// One run of an update on given values, with what C arithmetic did on the way.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Run {
    /// The new value, converted to the state's type as the assignment does.
    pub value: Num,
    /// A signed intermediate went out of its type's range (undefined in C; wrapped here).
    pub signed_overflow: bool,
    /// An unsigned intermediate wrapped modulo 2^N.
    pub unsigned_wrap: bool,
    /// The assignment to the state changed the value (it did not fit the state's type).
    pub narrowed: bool,
}

impl Update {
    /// Runs the update once with the state at `state` and every input at `input` (each
    /// converted to its declared type first). None when a value cannot be represented or
    /// the arithmetic has no result (division by zero).
    pub fn run(&self, state: f64, input: f64) -> Option<Run> {
        let convert = |v: f64, ty: &CType| -> Option<Num> {
            if !v.is_finite() {
                return None;
            }
            Some(Num::double(v).convert(ty, self.target))
        };
        let mut slots = Vec::with_capacity(1 + self.input_types.len());
        slots.push(convert(state, &self.state_type)?);
        for ty in &self.input_types {
            slots.push(convert(input, ty)?);
        }
        let raw = self.new_value.eval(&slots, self.target).ok()?;
        let (signed_overflow, unsigned_wrap) = self.new_value.hazards(&slots, self.target);
        let value = raw.convert(&self.state_type, self.target);
        let narrowed = value.as_f64() != raw.as_f64();
        Some(Run {
            value,
            signed_overflow,
            unsigned_wrap,
            narrowed,
        })
    }

    fn step(&self, state: i128, input: i128) -> Option<i128> {
        // Slots live on the stack: this runs hundreds of thousands of times per smoother.
        let mut slots = [Num::Int {
            value: 0,
            ty: self.target.int(true),
        }; MAX_SLOTS];
        let used = 1 + self.input_types.len();
        if used > MAX_SLOTS {
            return None;
        }
        slots[0] = int_of(state, &self.state_type, self.target)?;
        for (i, ty) in self.input_types.iter().enumerate() {
            slots[i + 1] = int_of(input, ty, self.target)?;
        }
        let v = self.new_value.eval(&slots[..used], self.target).ok()?;
        match v.convert(&self.state_type, self.target) {
            Num::Int { value, .. } => Some(value),
            Num::Float { .. } => None,
        }
    }

    fn output(&self, state: i128) -> i128 {
        if self.scale <= 1.0 {
            state
        } else {
            (state as f64 / self.scale).floor() as i128
        }
    }

    /// Whether moving state and input together by the same amount moves the result by that
    /// amount too, on a sample of shifts and distances.
    fn translation_invariant(&self, base: i128, span: i128) -> bool {
        let distances = [1, 2, 3, span / 7, span / 3, span / 2, span - 1];
        let shifts = [1i128, 2, 3, 5, 7, 11, 13, 64, 100, 255, 1000, 4097];
        for d in distances {
            for sign in [1i128, -1] {
                let u = base + sign * d.max(1);
                let Some(reference) = self.step(base, u) else {
                    return false;
                };
                for shift in shifts {
                    match self.step(base + shift, u + shift) {
                        Some(v) if v - shift == reference => {}
                        _ => return false,
                    }
                }
            }
        }
        true
    }

    /// The largest `d` up to `limit` for which one update from `s` with the input at
    /// `out + direction * d` leaves the state where it was.
    fn stall_run(
        &self,
        s: i128,
        out: i128,
        limit: i128,
        direction: i128,
        gap: i128,
    ) -> Option<u64> {
        let mut last = 0i128;
        let mut d = 1i128;
        while d <= limit {
            if self.step(s, out + direction * d)? == s {
                last = d;
            } else if d - last > gap {
                break;
            }
            d += 1;
        }
        Some(last as u64)
    }

    /// The whole run of inputs around `out` that leave the state `s` where it is, found by
    /// bisection on the assumption that a smoother's result never falls as its input rises:
    /// a split truncation (`y = y/8*7; y += u/8;`) rests only for inputs dozens of counts
    /// away, past any run of moving inputs a step-by-step scan would wait through. Each
    /// answer is confirmed step by step over the run and just outside it, so a result that
    /// breaks the assumption gives nothing rather than a wrong run. (rising, falling)
    /// distances from `out`, or None.
    fn stall_interval(&self, s: i128, out: i128, reach: (i128, i128)) -> Option<(u64, u64)> {
        let (lo_end, hi_end) = (out - reach.1, out + reach.0);
        let moved = |u: i128| self.step(s, u).map(|v| v.cmp(&s));
        // The first input whose result is not below the state, and the last whose result is
        // not above it.
        let (mut a, mut b) = (lo_end, hi_end + 1);
        while a < b {
            let m = a + (b - a) / 2;
            if moved(m)? == std::cmp::Ordering::Less {
                a = m + 1;
            } else {
                b = m;
            }
        }
        let first = a;
        let (mut a, mut b) = (lo_end - 1, hi_end);
        while a < b {
            let m = b - (b - a) / 2;
            if moved(m)? == std::cmp::Ordering::Greater {
                b = m - 1;
            } else {
                a = m;
            }
        }
        let last = a;
        if first > last || last - first > 1 << 16 {
            return None;
        }
        for u in first..=last {
            if moved(u)? != std::cmp::Ordering::Equal {
                return None;
            }
        }
        Some(((last - out).max(0) as u64, (out - first).max(0) as u64))
    }

    /// The dead band over every value the declared types let the input take; None for a
    /// float state or when the update cannot be run (an unknown constant, a type that
    /// cannot hold the test values).
    pub fn dead_band(&self, alpha: f64) -> Option<DeadBand> {
        self.dead_band_in(alpha, None)
    }

    /// The dead band for inputs (and so states at rest) within `range` as well as within
    /// the declared types. C's rounding differs on either side of zero (division truncates
    /// toward zero, C11 6.5.5p6; a right shift of a negative value rounds down where the
    /// implementation shifts arithmetically, C11 6.5.7p5), so the band of a range that
    /// stays at or above zero can be narrower than the type's.
    pub fn dead_band_in(&self, alpha: f64, range: Option<(i128, i128)>) -> Option<DeadBand> {
        let (state_min, state_max) = state_range(&self.state_type, self.target)?;
        let scale = self.scale.max(1.0);
        let out_max = (state_max as f64 / scale) as i128;
        let out_min = (state_min as f64 / scale) as i128;
        let (mut input_min, mut input_max) = self
            .input_types
            .iter()
            .filter_map(|t| state_range(t, self.target))
            .fold((out_min, out_max), |(lo, hi), (a, b)| {
                (lo.max(a), hi.min(b))
            });
        if let Some((lo, hi)) = range {
            input_min = input_min.max(lo);
            input_max = input_max.min(hi);
        }
        let negative = input_min < -8 && state_min < 0 && scale <= 1.0;
        if input_max < 8 && !negative {
            return None;
        }
        let low_positive = input_min.max(0);
        let base_out = low_positive + ((input_max - low_positive) / 3).clamp(1, 1000);
        let span = if alpha > 0.0 && alpha.is_finite() {
            ((4.0 / alpha).ceil().min((1 << 17) as f64) as i128 + 64).min(1 << 17)
        } else {
            1 << 12
        };
        let bases = ((1i128 << 20) / span.max(1)).clamp(4, 64);
        // How far the bisection looks: a truncation in each of two statements rests up to
        // about 1/alpha^2 counts away.
        let reach = if alpha > 0.0 && alpha.is_finite() {
            ((1.0 / (alpha * alpha)).ceil().min((1 << 20) as f64) as i128 + 64).clamp(span, 1 << 20)
        } else {
            span
        };
        // Stalls come in runs no further apart than about one time constant; once this
        // many steps past the last stall have all moved, no further stall is coming.
        let gap = if alpha > 0.0 && alpha.is_finite() {
            ((2.0 / alpha).ceil() as i128 + 16).min(span)
        } else {
            span
        };
        // Truncation toward zero behaves differently below zero (C11 6.5.5), so a signed
        // state is tried on both sides. A scaled state is read out by a division or a shift
        // whose rounding below zero is not known here, and its band is under one count.
        let mut starts = Vec::new();
        if input_max >= 8 {
            starts.push(base_out);
        }
        if negative {
            let high_negative = input_max.min(0);
            starts.push(high_negative - ((high_negative - input_min) / 3).clamp(1, 1000) - bases);
        }
        // Most spellings see the state and input only through their difference, so the
        // stall does not depend on where the state rests: one start point then covers all.
        let bases = if scale <= 1.0 && self.translation_invariant(starts[0], span) {
            1
        } else {
            bases
        };
        let mut rising = 0u64;
        let mut falling = 0u64;
        for start in starts {
            for j in 0..bases {
                let s = (start as f64 * scale) as i128 + j;
                let out = self.output(s);
                let up_limit = span.min(input_max - out);
                let down_limit = span.min(out - input_min);
                rising = rising.max(self.stall_run(s, out, up_limit, 1, gap)?);
                falling = falling.max(self.stall_run(s, out, down_limit, -1, gap)?);
                let reach = (
                    reach.min(input_max - out).max(0),
                    reach.min(out - input_min).max(0),
                );
                if let Some((up, down)) = self.stall_interval(s, out, reach) {
                    rising = rising.max(up);
                    falling = falling.max(down);
                }
            }
        }
        Some(DeadBand { rising, falling })
    }
}

fn int_of(value: i128, ty: &CType, target: Target) -> Option<Num> {
    match ty {
        CType::FixedInt(t) => Some(Num::int(value, *t)),
        CType::PlainInt { signed } => Some(Num::int(value, target.int(*signed))),
        CType::Bool => Some(Num::int((value != 0) as i128, target.int(true))),
        CType::Float | CType::Double => Some(Num::double(value as f64).convert(ty, target)),
        _ => None,
    }
}

fn state_range(ty: &CType, target: Target) -> Option<(i128, i128)> {
    match ty {
        CType::FixedInt(t) => Some(num::int_range(*t)),
        CType::PlainInt { signed } => Some(num::int_range(target.int(*signed))),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ir::IntType;

    fn i32t() -> CType {
        CType::FixedInt(IntType {
            bits: 32,
            signed: true,
        })
    }

    fn slot(i: usize) -> Box<Node> {
        Box::new(Node::Slot(i))
    }
    fn k(v: i128) -> Box<Node> {
        Box::new(Node::Const(Num::int(v, Target::default().int(true))))
    }

    fn update(new_value: Node) -> Update {
        Update {
            new_value,
            state_type: i32t(),
            input_types: vec![i32t()],
            scale: 1.0,
            target: Target::default(),
        }
    }

    #[test]
    fn truncating_division_rests_n_minus_one_either_side() {
        // y + (u - y) / 16. Source: C11 6.5.5 (truncation toward zero).
        let diff = Box::new(Node::Binary(BinaryOp::Sub, slot(1), slot(0)));
        let step = Box::new(Node::Binary(BinaryOp::Div, diff, k(16)));
        let u = update(Node::Binary(BinaryOp::Add, slot(0), step));
        assert_eq!(
            u.dead_band(1.0 / 16.0),
            Some(DeadBand {
                rising: 15,
                falling: 15
            })
        );
    }

    #[test]
    fn arithmetic_shift_rests_below_only() {
        // y + ((u - y) >> 3). Source: GCC manual, "Integers implementation" (>> is
        // arithmetic on negative values, so falling inputs are always reached).
        let diff = Box::new(Node::Binary(BinaryOp::Sub, slot(1), slot(0)));
        let step = Box::new(Node::Binary(BinaryOp::Shr, diff, k(3)));
        let u = update(Node::Binary(BinaryOp::Add, slot(0), step));
        assert_eq!(
            u.dead_band(0.125),
            Some(DeadBand {
                rising: 7,
                falling: 0
            })
        );
    }

    #[test]
    fn split_truncation_rests_far_below_a_rise() {
        // (y / 8) * 7 + u / 8 over uint16_t. Source: C11 6.5.5 and a derivation by hand:
        // with q = u / 8 and m = y / 8, y = 7m + q is at rest for m in [q - 7, q], so as
        // low as 8q - 49 under an input as high as 8q + 7: 56 counts below, never above.
        // (Below zero, a signed state would mirror it: truncation toward zero.)
        let kept = Box::new(Node::Binary(
            BinaryOp::Mul,
            Box::new(Node::Binary(BinaryOp::Div, slot(0), k(8))),
            k(7),
        ));
        let share = Box::new(Node::Binary(BinaryOp::Div, slot(1), k(8)));
        let u16t = super::build::int_type(16, false);
        let u = Update {
            state_type: u16t.clone(),
            input_types: vec![u16t],
            ..update(Node::Binary(BinaryOp::Add, kept, share))
        };
        assert_eq!(
            u.dead_band(0.125),
            Some(DeadBand {
                rising: 56,
                falling: 0
            })
        );
    }
}

/// Builders of update trees for the rules' unit tests.
#[cfg(test)]
pub mod build {
    use super::Node;
    use crate::eval::num::{Num, Target};
    use crate::ir::{CType, IntType};

    pub fn int_type(bits: u8, signed: bool) -> CType {
        CType::FixedInt(IntType { bits, signed })
    }
    pub fn slot(i: usize) -> Box<Node> {
        Box::new(Node::Slot(i))
    }
    /// A signed `int` constant of the target.
    pub fn k(v: i128, target: Target) -> Box<Node> {
        Box::new(Node::Const(Num::int(v, target.int(true))))
    }
    pub fn target(int_bits: u8) -> Target {
        Target {
            int_bits,
            has_fpu: false,
        }
    }
}

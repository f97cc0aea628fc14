//! C arithmetic on concrete numbers: promotions, usual arithmetic conversions, truncating
//! division, shifts, unsigned wrap, and float vs double rounding.
//!
//! The rules are those of ISO/IEC 9899:2011: integer promotions (6.3.1.1), usual arithmetic
//! conversions (6.3.1.8), multiplicative operators truncating toward zero (6.5.5), shifts
//! (6.5.7, with GCC's arithmetic right shift for negative values), and unsigned arithmetic
//! modulo 2^N (6.2.5). Signed overflow is undefined in C; here it wraps like the hardware
//! and is flagged, so callers can report it. Nothing here panics.

use crate::ir::{BinaryOp, CType, IntType, UnaryOp};
use std::fmt;

/// What the target's C compiler makes of `int`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Target {
    pub int_bits: u8,
    pub has_fpu: bool,
}

impl Default for Target {
    fn default() -> Self {
        Target {
            int_bits: 32,
            has_fpu: true,
        }
    }
}

impl Target {
    pub fn int(self, signed: bool) -> IntType {
        IntType {
            bits: self.int_bits,
            signed,
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum Num {
    Int {
        value: i128,
        ty: IntType,
    },
    /// `single` is true for `float`, whose every result is rounded to 32 bits.
    Float {
        value: f64,
        single: bool,
    },
}

/// Why an operation has no defined or representable result.
#[derive(Debug, Clone, PartialEq)]
pub enum ArithError {
    DivisionByZero,
    ShiftOutOfRange(i128),
    NotANumber,
}

impl fmt::Display for ArithError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ArithError::DivisionByZero => write!(f, "division by zero"),
            ArithError::ShiftOutOfRange(n) => write!(f, "shift by {n} is outside the type's width"),
            ArithError::NotANumber => write!(f, "result is not a number"),
        }
    }
}

/// Result of one operation: the value, and whether a signed result overflowed (undefined
/// behaviour in C, wrapped here) or an unsigned one wrapped (defined, often a bug).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Outcome {
    pub value: Num,
    pub signed_overflow: bool,
    pub unsigned_wrap: bool,
}

impl Outcome {
    fn clean(value: Num) -> Outcome {
        Outcome {
            value,
            signed_overflow: false,
            unsigned_wrap: false,
        }
    }
}

pub fn int_range(ty: IntType) -> (i128, i128) {
    let bits = ty.bits.clamp(1, 127) as u32;
    if ty.signed {
        (-(1i128 << (bits - 1)), (1i128 << (bits - 1)) - 1)
    } else {
        (0, (1i128 << bits) - 1)
    }
}

/// Wraps `value` into `ty` the way two's-complement hardware does.
pub fn wrap(value: i128, ty: IntType) -> (i128, bool) {
    let bits = ty.bits.clamp(1, 127) as u32;
    // Keep the low `bits` bits (a mask, not a division: this is on the simulation's hot
    // path), then sign-extend for signed types.
    let mask = (1i128 << bits) - 1;
    let mut v = value & mask;
    if ty.signed && v >> (bits - 1) & 1 == 1 {
        v -= 1i128 << bits;
    }
    (v, v != value)
}

impl Num {
    pub fn int(value: i128, ty: IntType) -> Num {
        Num::Int {
            value: wrap(value, ty).0,
            ty,
        }
    }

    pub fn double(value: f64) -> Num {
        Num::Float {
            value,
            single: false,
        }
    }

    pub fn as_f64(self) -> f64 {
        match self {
            Num::Int { value, .. } => value as f64,
            Num::Float { value, .. } => value,
        }
    }

    pub fn is_float(self) -> bool {
        matches!(self, Num::Float { .. })
    }

    pub fn is_zero(self) -> bool {
        self.as_f64() == 0.0
    }

    /// Converts to `ty` as an assignment or a cast does (C11 6.3.1.3, 6.3.1.4).
    pub fn convert(self, ty: &CType, target: Target) -> Num {
        match ty {
            CType::Float => Num::Float {
                value: self.as_f64() as f32 as f64,
                single: true,
            },
            CType::Double => Num::double(self.as_f64()),
            CType::Bool => Num::int((self.as_f64() != 0.0) as i128, target.int(true)),
            CType::FixedInt(t) => self.to_int(*t),
            CType::PlainInt { signed } => self.to_int(target.int(*signed)),
            _ => self,
        }
    }

    fn to_int(self, ty: IntType) -> Num {
        match self {
            Num::Int { value, .. } => Num::int(value, ty),
            Num::Float { value, .. } => {
                // Float to integer truncates toward zero (C11 6.3.1.4); out-of-range is
                // undefined, saturate rather than invent a wrap.
                let (lo, hi) = int_range(ty);
                let v = if value.is_nan() {
                    0
                } else {
                    (value.trunc() as i128).clamp(lo, hi)
                };
                Num::Int { value: v, ty }
            }
        }
    }

    /// The integer promotions (C11 6.3.1.1): types narrower than `int` become `int`.
    pub fn promote(self, target: Target) -> Num {
        match self {
            Num::Int { value, ty } if ty.bits < target.int_bits => Num::Int {
                value,
                ty: target.int(true),
            },
            Num::Int { value, ty } if ty.bits == target.int_bits => Num::Int {
                value,
                ty: IntType {
                    bits: target.int_bits,
                    signed: ty.signed,
                },
            },
            other => other,
        }
    }
}

/// The usual arithmetic conversions (C11 6.3.1.8) of two promoted integer types.
fn common_int(a: IntType, b: IntType) -> IntType {
    if a.signed == b.signed {
        return if a.bits >= b.bits { a } else { b };
    }
    let (s, u) = if a.signed { (a, b) } else { (b, a) };
    if u.bits >= s.bits {
        u
    } else {
        // The signed type can represent every value of the narrower unsigned one.
        s
    }
}

pub fn unary(op: UnaryOp, a: Num, target: Target) -> Result<Outcome, ArithError> {
    match a {
        Num::Float { value, single } => {
            let v = match op {
                UnaryOp::Neg => -value,
                UnaryOp::Plus => value,
                UnaryOp::Not => (value == 0.0) as i32 as f64,
                _ => return Err(ArithError::NotANumber),
            };
            if op == UnaryOp::Not {
                return Ok(Outcome::clean(Num::int(v as i128, target.int(true))));
            }
            Ok(Outcome::clean(Num::Float { value: v, single }))
        }
        Num::Int { .. } => {
            let Num::Int { value, ty } = a.promote(target) else {
                return Err(ArithError::NotANumber);
            };
            let raw = match op {
                UnaryOp::Neg => value.wrapping_neg(),
                UnaryOp::Plus => value,
                UnaryOp::Not => {
                    return Ok(Outcome::clean(Num::int(
                        (value == 0) as i128,
                        target.int(true),
                    )))
                }
                UnaryOp::BitNot => !value,
                _ => return Err(ArithError::NotANumber),
            };
            Ok(finish_int(raw, ty, op == UnaryOp::BitNot))
        }
    }
}

fn finish_int(raw: i128, ty: IntType, bitwise: bool) -> Outcome {
    let (value, changed) = wrap(raw, ty);
    Outcome {
        value: Num::Int { value, ty },
        signed_overflow: changed && ty.signed && !bitwise,
        unsigned_wrap: changed && !ty.signed && !bitwise,
    }
}

pub fn binary(op: BinaryOp, a: Num, b: Num, target: Target) -> Result<Outcome, ArithError> {
    use BinaryOp::*;
    if matches!(op, And | Or) {
        let v = match op {
            And => !a.is_zero() && !b.is_zero(),
            _ => !a.is_zero() || !b.is_zero(),
        };
        return Ok(Outcome::clean(Num::int(v as i128, target.int(true))));
    }
    if a.is_float() || b.is_float() {
        if matches!(op, Rem | Shl | Shr | BitAnd | BitOr | BitXor) {
            return Err(ArithError::NotANumber);
        }
        let single = match (a, b) {
            (Num::Float { single: sa, .. }, Num::Float { single: sb, .. }) => sa && sb,
            (Num::Float { single, .. }, _) | (_, Num::Float { single, .. }) => single,
            _ => false,
        };
        let (x, y) = if single {
            (a.as_f64() as f32 as f64, b.as_f64() as f32 as f64)
        } else {
            (a.as_f64(), b.as_f64())
        };
        let cmp = |v: bool| Ok(Outcome::clean(Num::int(v as i128, target.int(true))));
        let v = match op {
            Add => x + y,
            Sub => x - y,
            Mul => x * y,
            Div => {
                if y == 0.0 {
                    return Err(ArithError::DivisionByZero);
                }
                x / y
            }
            Eq => return cmp(x == y),
            Ne => return cmp(x != y),
            Lt => return cmp(x < y),
            Le => return cmp(x <= y),
            Gt => return cmp(x > y),
            Ge => return cmp(x >= y),
            _ => return Err(ArithError::NotANumber),
        };
        let v = if single { v as f32 as f64 } else { v };
        if v.is_nan() {
            return Err(ArithError::NotANumber);
        }
        return Ok(Outcome::clean(Num::Float { value: v, single }));
    }
    let (Num::Int { value: x, ty: tx }, Num::Int { value: y, ty: ty_ }) =
        (a.promote(target), b.promote(target))
    else {
        return Err(ArithError::NotANumber);
    };
    if matches!(op, Shl | Shr) {
        // The result has the promoted type of the left operand (C11 6.5.7).
        if y < 0 || y >= tx.bits as i128 {
            return Err(ArithError::ShiftOutOfRange(y));
        }
        let raw = match op {
            Shl => x.wrapping_shl(y as u32),
            // GCC shifts negative values arithmetically (round toward minus infinity).
            _ => x >> y,
        };
        let mut out = finish_int(raw, tx, false);
        if op == Shr {
            out.signed_overflow = false;
            out.unsigned_wrap = false;
        }
        return Ok(out);
    }
    let ty = common_int(tx, ty_);
    let (x, _) = wrap(x, ty);
    let (y, _) = wrap(y, ty);
    let cmp = |v: bool| Ok(Outcome::clean(Num::int(v as i128, target.int(true))));
    let raw = match op {
        Add => x.wrapping_add(y),
        Sub => x.wrapping_sub(y),
        Mul => x.wrapping_mul(y),
        Div | Rem => {
            if y == 0 {
                return Err(ArithError::DivisionByZero);
            }
            // i128 division truncates toward zero, as C11 6.5.5 requires.
            if op == Div {
                x / y
            } else {
                x % y
            }
        }
        BitAnd => return Ok(finish_int(x & y, ty, true)),
        BitOr => return Ok(finish_int(x | y, ty, true)),
        BitXor => return Ok(finish_int(x ^ y, ty, true)),
        Eq => return cmp(x == y),
        Ne => return cmp(x != y),
        Lt => return cmp(x < y),
        Le => return cmp(x <= y),
        Gt => return cmp(x > y),
        Ge => return cmp(x >= y),
        Shl | Shr | And | Or => return Err(ArithError::NotANumber),
    };
    Ok(finish_int(raw, ty, false))
}

#[cfg(test)]
mod tests {
    use super::*;

    const T32: Target = Target {
        int_bits: 32,
        has_fpu: true,
    };
    const T16: Target = Target {
        int_bits: 16,
        has_fpu: false,
    };

    fn i(v: i128) -> Num {
        Num::int(v, T32.int(true))
    }
    fn u32n(v: i128) -> Num {
        Num::int(
            v,
            IntType {
                bits: 32,
                signed: false,
            },
        )
    }

    #[test]
    fn division_truncates_toward_zero() {
        // Source: C11 6.5.5p6 (the quotient is truncated toward zero).
        let q = binary(BinaryOp::Div, i(-7), i(2), T32).unwrap().value;
        assert_eq!(q, i(-3));
        let r = binary(BinaryOp::Rem, i(-7), i(2), T32).unwrap().value;
        assert_eq!(r, i(-1));
    }

    #[test]
    fn right_shift_of_negative_is_arithmetic() {
        // Source: GCC manual, "Integers implementation": >> on negative values sign-extends.
        let v = binary(BinaryOp::Shr, i(-1), i(3), T32).unwrap().value;
        assert_eq!(v, i(-1));
        let v = binary(BinaryOp::Shr, i(-9), i(3), T32).unwrap().value;
        assert_eq!(v, i(-2));
    }

    #[test]
    fn unsigned_difference_wraps() {
        // Source: C11 6.2.5p9 (unsigned arithmetic is reduced modulo 2^N).
        let out = binary(BinaryOp::Sub, u32n(10), u32n(20), T32).unwrap();
        assert_eq!(out.value, u32n(4294967286));
        assert!(out.unsigned_wrap);
    }

    #[test]
    fn uint16_promotes_to_int_on_32_bit_but_not_16_bit() {
        // Source: C11 6.3.1.1p2 (integer promotions) and 6.3.1.8 (usual conversions).
        let u16v = |v| {
            Num::int(
                v,
                IntType {
                    bits: 16,
                    signed: false,
                },
            )
        };
        let on32 = binary(BinaryOp::Sub, u16v(10), u16v(20), T32).unwrap();
        assert_eq!(on32.value.as_f64(), -10.0);
        let on16 = binary(BinaryOp::Sub, u16v(10), u16v(20), T16).unwrap();
        assert_eq!(on16.value.as_f64(), 65526.0);
        assert!(on16.unsigned_wrap);
    }

    #[test]
    fn int16_target_overflows_in_products() {
        // Source: C11 6.5p5 (signed overflow is undefined); shown here as a flag.
        let out = binary(
            BinaryOp::Mul,
            Num::int(4095, T16.int(true)),
            Num::int(15, T16.int(true)),
            T16,
        )
        .unwrap();
        assert!(out.signed_overflow);
    }

    #[test]
    fn float_arithmetic_rounds_to_single() {
        let a = Num::Float {
            value: 0.1,
            single: true,
        };
        let out = binary(BinaryOp::Mul, a, a, T32).unwrap().value;
        assert_eq!(out.as_f64(), (0.1f32 * 0.1f32) as f64);
    }

    #[test]
    fn errors_are_values_not_panics() {
        assert_eq!(
            binary(BinaryOp::Div, i(1), i(0), T32),
            Err(ArithError::DivisionByZero)
        );
        assert!(matches!(
            binary(BinaryOp::Shl, i(1), i(40), T32),
            Err(ArithError::ShiftOutOfRange(40))
        ));
        let big = Num::int(
            i128::MAX,
            IntType {
                bits: 64,
                signed: true,
            },
        );
        assert!(binary(BinaryOp::Mul, big, big, T32).is_ok());
    }
}

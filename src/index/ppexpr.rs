//! A small parser for the expressions of `#if` once `defined` and macro names are
//! replaced: integer constants, the marker of an unknown name, parentheses, the unary,
//! binary and conditional operators C11 6.10.1 allows there, and calls (what is left of a
//! function-like macro the index does not expand, `0(0)`, which has no value).
//!
//! It exists for speed: a vendor's device headers carry hundreds of thousands of `#if`
//! lines, and a tree-sitter parse of each costs more than the rest of the index. It
//! declines (returns `None`) on anything outside that small language, and on the one
//! ambiguity of C's grammar it could read differently from tree-sitter (`(name) -1`, a
//! cast or a subtraction), so that the caller falls back to the full parse; the tests
//! below hold its values equal to the full parse's on hand-picked and generated texts.

use crate::ir::{BinaryOp, Expr, ExprKind, Span, UnaryOp};

/// The name an unknown macro is replaced with before parsing (see `Program::pp_tri`).
pub const UNKNOWN: &str = "__tauscan_unknown";

/// Deepest recursion of this parser; deeper text is declined.
const DEPTH_LIMIT: u32 = 200;
/// Most operators, parentheses and calls taken in one text. Each can add a level to the
/// full parse's tree (a chain `a || b || ...` nests one per operator), which gives up past
/// `parse::MAX_DEPTH` levels; with fewer than half as many the full parse never does, so
/// the two agree. Longer texts are left to it.
const NESTING_LIMIT: usize = 90;
/// Longest text taken; longer text is declined.
const LENGTH_LIMIT: usize = 1 << 16;

#[derive(Debug, Clone, Copy, PartialEq)]
enum Token {
    Int {
        value: u64,
        unsigned: bool,
        long: bool,
    },
    Unknown,
    Open,
    Close,
    Question,
    Colon,
    Comma,
    Bang,
    Tilde,
    Op(BinaryOp),
}

/// Splits `text` into tokens, or `None` when it holds anything outside the language.
fn tokens(text: &str) -> Option<Vec<Token>> {
    let b = text.as_bytes();
    let mut out = Vec::with_capacity(b.len() / 2 + 1);
    let mut i = 0;
    while i < b.len() {
        let c = b[i];
        if c.is_ascii_whitespace() {
            i += 1;
            continue;
        }
        // A line continued with a backslash (C11 5.1.1.2 phase 2).
        if c == b'\\' {
            match (b.get(i + 1), b.get(i + 2)) {
                (Some(b'\n'), _) => i += 2,
                (Some(b'\r'), Some(b'\n')) => i += 3,
                _ => return None,
            }
            continue;
        }
        if c.is_ascii_digit() {
            let start = i;
            while i < b.len() && (b[i].is_ascii_alphanumeric() || b[i] == b'.') {
                i += 1;
            }
            // A preprocessing number runs on through a sign after an exponent letter
            // (C11 6.4.8: `0x1E+1` is one token), and digit separators are read
            // differently by the full parse: leave both to it.
            let exponent = matches!(b[i - 1], b'e' | b'E' | b'p' | b'P');
            if b.get(i) == Some(&b'\'') || (exponent && matches!(b.get(i), Some(b'+' | b'-'))) {
                return None;
            }
            match crate::parse::parse_number(&text[start..i])? {
                ExprKind::Int {
                    value,
                    unsigned,
                    long,
                } => out.push(Token::Int {
                    value,
                    unsigned,
                    long,
                }),
                _ => return None,
            }
            continue;
        }
        if c.is_ascii_alphabetic() || c == b'_' {
            let start = i;
            while i < b.len() && (b[i].is_ascii_alphanumeric() || b[i] == b'_') {
                i += 1;
            }
            // Any other name (a keyword, a type) is left to the full parse.
            if &text[start..i] != UNKNOWN {
                return None;
            }
            out.push(Token::Unknown);
            continue;
        }
        let next = b.get(i + 1).copied();
        let (token, width) = match (c, next) {
            (b'<', Some(b'<')) => (Token::Op(BinaryOp::Shl), 2),
            (b'>', Some(b'>')) => (Token::Op(BinaryOp::Shr), 2),
            (b'<', Some(b'=')) => (Token::Op(BinaryOp::Le), 2),
            (b'>', Some(b'=')) => (Token::Op(BinaryOp::Ge), 2),
            (b'=', Some(b'=')) => (Token::Op(BinaryOp::Eq), 2),
            (b'!', Some(b'=')) => (Token::Op(BinaryOp::Ne), 2),
            (b'&', Some(b'&')) => (Token::Op(BinaryOp::And), 2),
            (b'|', Some(b'|')) => (Token::Op(BinaryOp::Or), 2),
            (b'<', _) => (Token::Op(BinaryOp::Lt), 1),
            (b'>', _) => (Token::Op(BinaryOp::Gt), 1),
            (b'+', _) => (Token::Op(BinaryOp::Add), 1),
            (b'-', _) => (Token::Op(BinaryOp::Sub), 1),
            (b'*', _) => (Token::Op(BinaryOp::Mul), 1),
            (b'/', _) => (Token::Op(BinaryOp::Div), 1),
            (b'%', _) => (Token::Op(BinaryOp::Rem), 1),
            (b'&', _) => (Token::Op(BinaryOp::BitAnd), 1),
            (b'|', _) => (Token::Op(BinaryOp::BitOr), 1),
            (b'^', _) => (Token::Op(BinaryOp::BitXor), 1),
            (b'(', _) => (Token::Open, 1),
            (b')', _) => (Token::Close, 1),
            (b'?', _) => (Token::Question, 1),
            (b':', _) => (Token::Colon, 1),
            (b',', _) => (Token::Comma, 1),
            (b'!', _) => (Token::Bang, 1),
            (b'~', _) => (Token::Tilde, 1),
            // `=`, `[`, `.`, quotes, comments, `#`...: not this language.
            _ => return None,
        };
        // `++`, `--`, `<<=` and the like are not this language either.
        if matches!(
            (token, next),
            (Token::Op(BinaryOp::Add), Some(b'+')) | (Token::Op(BinaryOp::Sub), Some(b'-'))
        ) || (width == 2 && b.get(i + 2) == Some(&b'='))
            || (width == 1
                && matches!(token, Token::Op(_))
                && next == Some(b'=')
                && !matches!(token, Token::Op(BinaryOp::Lt | BinaryOp::Gt)))
        {
            return None;
        }
        out.push(token);
        i += width;
    }
    Some(out)
}

struct Parser {
    tokens: Vec<Token>,
    at: usize,
    depth: u32,
}

fn node(kind: ExprKind) -> Expr {
    Expr::new(kind, Span::default())
}

impl Parser {
    fn peek(&self) -> Option<Token> {
        self.tokens.get(self.at).copied()
    }

    fn next(&mut self) -> Option<Token> {
        let t = self.peek()?;
        self.at += 1;
        Some(t)
    }

    fn deeper(&mut self) -> Option<()> {
        self.depth += 1;
        (self.depth <= DEPTH_LIMIT).then_some(())
    }

    /// conditional-expression (C11 6.5.15); the middle operand is read the same way,
    /// since a comma would have been declined already.
    fn conditional(&mut self) -> Option<Expr> {
        self.deeper()?;
        let cond = self.binary(1)?;
        let result = if self.peek() == Some(Token::Question) {
            self.at += 1;
            let then = self.conditional()?;
            if self.next()? != Token::Colon {
                return None;
            }
            let otherwise = self.conditional()?;
            node(ExprKind::Conditional {
                cond: Box::new(cond),
                then: Box::new(then),
                otherwise: Box::new(otherwise),
            })
        } else {
            cond
        };
        self.depth -= 1;
        Some(result)
    }

    /// Binary operators of at least `min` strength, left to right.
    fn binary(&mut self, min: u8) -> Option<Expr> {
        let mut lhs = self.unary()?;
        while let Some(Token::Op(op)) = self.peek() {
            let s = op.precedence();
            if s < min {
                break;
            }
            self.at += 1;
            self.deeper()?;
            let rhs = self.binary(s + 1)?;
            self.depth -= 1;
            lhs = node(ExprKind::Binary {
                op,
                lhs: Box::new(lhs),
                rhs: Box::new(rhs),
            });
        }
        Some(lhs)
    }

    fn unary(&mut self) -> Option<Expr> {
        self.deeper()?;
        let op = match self.peek()? {
            Token::Op(BinaryOp::Sub) => Some(UnaryOp::Neg),
            Token::Op(BinaryOp::Add) => Some(UnaryOp::Plus),
            Token::Bang => Some(UnaryOp::Not),
            Token::Tilde => Some(UnaryOp::BitNot),
            _ => None,
        };
        let result = match op {
            Some(op) => {
                self.at += 1;
                let arg = self.unary()?;
                node(ExprKind::Unary {
                    op,
                    arg: Box::new(arg),
                })
            }
            None => self.postfix()?,
        };
        self.depth -= 1;
        Some(result)
    }

    /// A primary expression and the calls made of it (`0(0)`, `f(a, b)()`).
    fn postfix(&mut self) -> Option<Expr> {
        let mut e = self.primary()?;
        while self.peek() == Some(Token::Open) {
            self.at += 1;
            self.deeper()?;
            let mut args = Vec::new();
            if self.peek() == Some(Token::Close) {
                self.at += 1;
            } else {
                loop {
                    args.push(self.conditional()?);
                    match self.next()? {
                        Token::Comma => {}
                        Token::Close => break,
                        _ => return None,
                    }
                }
            }
            self.depth -= 1;
            e = node(ExprKind::Call {
                callee: Box::new(e),
                args: std::sync::Arc::new(args),
            });
        }
        Some(e)
    }

    fn primary(&mut self) -> Option<Expr> {
        match self.next()? {
            Token::Int {
                value,
                unsigned,
                long,
            } => Some(node(ExprKind::Int {
                value,
                unsigned,
                long,
            })),
            Token::Unknown => Some(node(ExprKind::Ident(UNKNOWN.into()))),
            Token::Open => {
                let start = self.at;
                let inner = self.conditional()?;
                if self.next()? != Token::Close {
                    return None;
                }
                // `(name)` before an operand may be read as a cast by C's grammar (and
                // `&&` as GNU's label address): leave that reading to the full parse.
                let lone_name = self.at == start + 2 && self.tokens[start] == Token::Unknown;
                let operand_follows = matches!(
                    self.peek(),
                    Some(
                        Token::Open
                            | Token::Int { .. }
                            | Token::Unknown
                            | Token::Bang
                            | Token::Tilde
                            | Token::Op(
                                BinaryOp::Add
                                    | BinaryOp::Sub
                                    | BinaryOp::Mul
                                    | BinaryOp::BitAnd
                                    | BinaryOp::And
                            )
                    )
                );
                if lone_name && operand_follows {
                    return None;
                }
                Some(inner)
            }
            _ => None,
        }
    }
}

/// The expression `text` spells, when it is in the small language; `None` to ask for the
/// full parse.
pub fn parse(text: &str) -> Option<Expr> {
    if text.len() > LENGTH_LIMIT {
        return None;
    }
    let tokens = tokens(text)?;
    let nesting = tokens
        .iter()
        .filter(|t| {
            matches!(
                t,
                Token::Op(_) | Token::Open | Token::Question | Token::Bang | Token::Tilde
            )
        })
        .count();
    if nesting > NESTING_LIMIT {
        return None;
    }
    let mut p = Parser {
        tokens,
        at: 0,
        depth: 0,
    };
    let e = p.conditional()?;
    (p.at == p.tokens.len()).then_some(e)
}

#[cfg(test)]
mod tests {
    use super::super::{pp_eval, pp_eval_tri};
    use super::*;

    /// `#if` values as `pp_eval` and `pp_eval_tri` give them.
    type Values = (Option<i128>, Option<i128>);

    /// Both evaluations of `text`, by this parser (None when it declines) and by the full
    /// tree-sitter parse that the index used before it (the reference).
    fn both(text: &str) -> (Option<Values>, Values) {
        let fast = parse(text).map(|e| (pp_eval(&e), pp_eval_tri(&e)));
        let full = crate::parse::parse_expression(text, Span::default())
            .map(|e| (pp_eval(&e), pp_eval_tri(&e)))
            .unwrap_or((None, None));
        (fast, full)
    }

    fn agrees(text: &str) -> bool {
        let (fast, full) = both(text);
        fast.is_none_or(|f| f == full)
    }

    #[test]
    fn values_match_the_full_parse_on_written_texts() {
        // Reference: tree-sitter-c's parse lowered to the IR, evaluated by the same code.
        let texts = [
            "1",
            "0",
            "(1)",
            "((0) || (1))",
            "1 + 2 * 3 == 7",
            "(1 + 2) * 3 == 9",
            "10 - 4 - 3",
            "100 / 10 / 5",
            "7 % 4",
            "1 << 4 >> 2",
            "1 < 2 == 1",
            "3 & 5 ^ 6 | 8",
            "!0 && ~0",
            "-1 < 0",
            "- -1",
            "+1",
            "0x10 == 16",
            "010 == 8",
            "0b101 == 5",
            "1UL << 31",
            "18446744073709551615ULL == -1",
            "1 ? 2 : 3",
            "0 ? 2 : 1 ? 4 : 5",
            "1 ? 0 ? 7 : 8 : 9",
            "1 / 0",
            "1 % 0",
            "1 << 200",
            "1 << -1",
            "__tauscan_unknown",
            "__tauscan_unknown || 1",
            "__tauscan_unknown && 0",
            "!(__tauscan_unknown)",
            "(0) - 1",
            "((2)) - 1",
            "(((1) >= (2)) || ((3) != (4)))",
            "1 == 1 != 0",
            "2 > 1 >= 1 <= 1 < 2",
            "0(0)",
            "!0(0)",
            "0(0) || 1",
            "0(0) && 0",
            "0(0, 0) == 1",
            "0()",
            "0(0)(1)",
            "(0)(0)",
            "__tauscan_unknown(__tauscan_unknown) || 1",
            "!0(0(0))",
            "0(0) || \\\n 0(0)",
            "1 + \\\r\n 2",
        ];
        for t in texts {
            let (fast, full) = both(t);
            assert!(fast.is_some(), "declined: {t}");
            assert_eq!(fast, Some(full), "{t}");
        }
    }

    #[test]
    fn the_cast_reading_and_other_c_is_left_to_the_full_parse() {
        for t in [
            "(__tauscan_unknown) - 1",
            "(__tauscan_unknown) + 1",
            "(__tauscan_unknown) (1)",
            "(__tauscan_unknown) !1",
            "(__tauscan_unknown) && 1",
            "(__tauscan_unknown) 1",
            "FOO",
            "defined(FOO)",
            "sizeof(int)",
            "1.0",
            "'a'",
            "\"s\"",
            "1, 2",
            "(1, 2)",
            "0(1,)",
            "0(,1)",
            "1 \\ 2",
            "0x1E+1",
            "0x1e-1",
            "0x1e+0x1e",
            "1e+1",
            "0x1p-1",
            "1'0",
            "0x'1",
            "2'U",
            "x = 1",
            "1 += 2",
            "1 <<= 2",
            "a++",
            "1 ?",
            "(1",
            "1)",
            "",
            "1 2",
        ] {
            assert!(parse(t).is_none(), "taken: {t}");
        }
    }

    #[test]
    fn long_chains_are_left_to_the_full_parse() {
        // The full parse nests one level per operator of a chain and gives up past its
        // depth limit (`parse::MAX_DEPTH`); this parser must not answer where it would not.
        for n in [150, 199, 200, 230, 400] {
            for text in [
                vec!["1"; n].join(" || "),
                vec!["1"; n].join(" + "),
                format!("!({})", vec!["0"; n].join(" || ")),
                format!("0{} || 1", "(0)".repeat(n)),
            ] {
                let (fast, full) = both(&text);
                assert!(fast.is_none_or(|f| f == full), "{n}: {text}");
                assert!(fast.is_none(), "{n} operators taken");
            }
        }
        // Short chains are still this parser's.
        assert!(parse(&vec!["1"; 40].join(" || ")).is_some());
    }

    #[test]
    fn deep_and_long_texts_are_declined_not_overflowed() {
        let deep = format!("{}1{}", "(".repeat(5000), ")".repeat(5000));
        assert!(parse(&deep).is_none());
        let unary = format!("{}1", "-".repeat(5000).replace("--", "- -"));
        assert!(parse(&unary).is_none());
        let long = "1 + ".repeat(20_000) + "1";
        assert!(parse(&long).is_none());
        // Within the limits, still taken.
        assert!(parse(&format!("{}1{}", "(".repeat(50), ")".repeat(50))).is_some());
    }

    /// A small deterministic generator (xorshift), so a failure reproduces.
    struct Rng(u64);
    impl Rng {
        fn next(&mut self) -> u64 {
            self.0 ^= self.0 << 13;
            self.0 ^= self.0 >> 7;
            self.0 ^= self.0 << 17;
            self.0
        }
        fn pick<'a>(&mut self, items: &[&'a str]) -> &'a str {
            items[(self.next() % items.len() as u64) as usize]
        }
    }

    fn generate(rng: &mut Rng, depth: u32) -> String {
        let leaf = depth == 0 || rng.next().is_multiple_of(4);
        if leaf {
            return rng
                .pick(&[
                    "0",
                    "1",
                    "2",
                    "7",
                    "0x1F",
                    "010",
                    "4294967295U",
                    "9223372036854775807L",
                    "18446744073709551615ULL",
                    "__tauscan_unknown",
                    "(__tauscan_unknown)",
                    "(0)",
                    "(1)",
                ])
                .to_string();
        }
        match rng.next() % 6 {
            4 => format!(
                "{}({})",
                rng.pick(&["0", "__tauscan_unknown", "(1)", "7"]),
                generate(rng, depth - 1)
            ),
            5 => format!(
                "{}({}, {}){}",
                rng.pick(&["0", "__tauscan_unknown"]),
                generate(rng, depth - 1),
                generate(rng, depth - 1),
                rng.pick(&["", " \\\n", "()", "(0)"])
            ),
            0 => format!(
                "{}{}",
                rng.pick(&["-", "+", "!", "~", "- ", "!("]),
                generate(rng, depth - 1)
            )
            .replace("!(", "!"),
            1 => format!("({})", generate(rng, depth - 1)),
            2 => format!(
                "{} ? {} : {}",
                generate(rng, depth - 1),
                generate(rng, depth - 1),
                generate(rng, depth - 1)
            ),
            _ => format!(
                "{} {} {}",
                generate(rng, depth - 1),
                rng.pick(&[
                    "+", "-", "*", "/", "%", "<<", ">>", "<", "<=", ">", ">=", "==", "!=", "&",
                    "^", "|", "&&", "||"
                ]),
                generate(rng, depth - 1)
            ),
        }
    }

    #[test]
    fn values_match_the_full_parse_on_generated_texts() {
        // Reference: tree-sitter-c's parse, as above, on 3000 generated expressions.
        let mut rng = Rng(0x7a05_ca11_5eed_0001);
        let mut taken = 0;
        for _ in 0..3000 {
            let text = generate(&mut rng, 5);
            assert!(agrees(&text), "{text}: {:?}", both(&text));
            taken += usize::from(parse(&text).is_some());
        }
        // Most of them are in the language (the rest hold the cast reading).
        assert!(taken > 2000, "only {taken} of 3000 taken");
    }
}

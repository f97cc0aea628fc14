//! The project's own typed picture of a C file: the parts tauscan reasons about.
//!
//! `parse` lowers tree-sitter trees into these types; everything downstream (index, eval,
//! recognise) works on them alone, so no other module needs to know tree-sitter exists.
//! The IR keeps spans for every expression and statement so that findings can point at
//! source lines. It does not try to be a full C AST: constructs that no smoother needs are
//! kept as `Other`/`Opaque` with their text, which is enough to say what was not understood.

use std::fmt;

/// Index of a file in the scan, assigned by `walk` in a stable order.
///
/// Serialised as its number. A file's IR read back from the cache belongs to whatever
/// index the file has in this scan, so deserialising gives the index set by
/// [`with_file_id`] when there is one (every `FileId` inside one `FileIr` is that file's).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Default)]
pub struct FileId(pub u32);

thread_local! {
    static LOADING_AS: std::cell::Cell<Option<u32>> = const { std::cell::Cell::new(None) };
    /// Set while a function body is parked: its file ids are written as 0, so that equal
    /// bodies of different files (copies) park as equal bytes.
    static PARKING: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
    /// The names read so far while a file is loaded, so that each is allocated once, as
    /// the lowering does.
    static LOADING_NAMES: std::cell::RefCell<Option<rustc_hash::FxHashSet<std::sync::Arc<str>>>> =
        const { std::cell::RefCell::new(None) };
}

/// Runs `load` with every `FileId` it deserialises replaced by `file`, and equal names
/// deserialised as one shared text.
pub fn with_file_id<T>(file: FileId, load: impl FnOnce() -> T) -> T {
    let before = LOADING_AS.with(|c| c.replace(Some(file.0)));
    let names_before = LOADING_NAMES.with(|n| n.replace(Some(Default::default())));
    let out = load();
    LOADING_AS.with(|c| c.set(before));
    LOADING_NAMES.with(|n| n.replace(names_before));
    out
}

/// Deserialises a name as shared text: inside `with_file_id`, the load's earlier
/// allocation of the same text.
fn shared_name<'de, D: serde::Deserializer<'de>>(d: D) -> Result<std::sync::Arc<str>, D::Error> {
    struct Name;
    impl serde::de::Visitor<'_> for Name {
        type Value = std::sync::Arc<str>;
        fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
            f.write_str("a name")
        }
        fn visit_str<E: serde::de::Error>(self, text: &str) -> Result<Self::Value, E> {
            Ok(LOADING_NAMES.with(|n| match n.borrow_mut().as_mut() {
                Some(names) => match names.get(text) {
                    Some(name) => name.clone(),
                    None => {
                        let name: std::sync::Arc<str> = text.into();
                        names.insert(name.clone());
                        name
                    }
                },
                None => text.into(),
            }))
        }
    }
    d.deserialize_str(Name)
}

impl serde::Serialize for FileId {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let id = if PARKING.with(|p| p.get()) { 0 } else { self.0 };
        s.serialize_u32(id)
    }
}

impl<'de> serde::Deserialize<'de> for FileId {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<FileId, D::Error> {
        let stored = <u32 as serde::Deserialize>::deserialize(d)?;
        Ok(FileId(LOADING_AS.with(|c| c.get()).unwrap_or(stored)))
    }
}

/// A byte range in one file, with the 1-based line and column of its start.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, Default, serde::Serialize, serde::Deserialize,
)]
pub struct Span {
    pub file: FileId,
    pub start: u32,
    pub end: u32,
    pub line: u32,
    pub column: u32,
}

/// Integer type as C sees it: width in bits and signedness.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub struct IntType {
    pub bits: u8,
    pub signed: bool,
}

/// The types tauscan distinguishes. Widths of `int`/`long` depend on the target, so the
/// lowering records the spelling (`Int`, `Long`...) and the evaluator maps it to bits.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum CType {
    /// An integer type whose width is fixed by its name (`int16_t`, `uint8_t`, `char`).
    FixedInt(IntType),
    /// `int` / `unsigned int` (and `short` treated as 16, `long` as 32, `long long` as 64
    /// are fixed); `int`'s width is the target's.
    PlainInt {
        signed: bool,
    },
    Float,
    Double,
    Bool,
    Void,
    Struct(String),
    Pointer(Box<CType>),
    /// Element type and the size as written (a literal, a macro, an expression).
    Array(Box<CType>, Option<Box<Expr>>),
    /// A typedef name not resolved at lowering time (resolved by `index`).
    Named(String),
    Unknown(String),
}

impl CType {
    pub fn is_float(&self) -> bool {
        matches!(self, CType::Float | CType::Double)
    }
    pub fn is_integer(&self) -> bool {
        matches!(
            self,
            CType::FixedInt(_) | CType::PlainInt { .. } | CType::Bool
        )
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub enum BinaryOp {
    Add,
    Sub,
    Mul,
    Div,
    Rem,
    Shl,
    Shr,
    BitAnd,
    BitOr,
    BitXor,
    And,
    Or,
    Eq,
    Ne,
    Lt,
    Le,
    Gt,
    Ge,
}

impl BinaryOp {
    /// How tightly the operator binds, 1 (`||`) to 10 (`*`, `/`, `%`), as C's grammar
    /// orders the binary operators (C11 6.5.5-6.5.14).
    pub fn precedence(self) -> u8 {
        use BinaryOp::*;
        match self {
            Mul | Div | Rem => 10,
            Add | Sub => 9,
            Shl | Shr => 8,
            Lt | Le | Gt | Ge => 7,
            Eq | Ne => 6,
            BitAnd => 5,
            BitXor => 4,
            BitOr => 3,
            And => 2,
            Or => 1,
        }
    }

    pub fn text(self) -> &'static str {
        use BinaryOp::*;
        match self {
            Add => "+",
            Sub => "-",
            Mul => "*",
            Div => "/",
            Rem => "%",
            Shl => "<<",
            Shr => ">>",
            BitAnd => "&",
            BitOr => "|",
            BitXor => "^",
            And => "&&",
            Or => "||",
            Eq => "==",
            Ne => "!=",
            Lt => "<",
            Le => "<=",
            Gt => ">",
            Ge => ">=",
        }
    }
    pub fn from_text(text: &str) -> Option<BinaryOp> {
        use BinaryOp::*;
        Some(match text {
            "+" => Add,
            "-" => Sub,
            "*" => Mul,
            "/" => Div,
            "%" => Rem,
            "<<" => Shl,
            ">>" => Shr,
            "&" => BitAnd,
            "|" => BitOr,
            "^" => BitXor,
            "&&" => And,
            "||" => Or,
            "==" => Eq,
            "!=" => Ne,
            "<" => Lt,
            "<=" => Le,
            ">" => Gt,
            ">=" => Ge,
            _ => return None,
        })
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub enum UnaryOp {
    Neg,
    Plus,
    Not,
    BitNot,
    Deref,
    AddrOf,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Expr {
    pub kind: ExprKind,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum ExprKind {
    /// An integer literal: its value and the type its suffix and size give it. (No C
    /// integer constant exceeds 64 bits; one that does is not lowered to `Int`.)
    Int {
        value: u64,
        unsigned: bool,
        long: bool,
    },
    Float {
        value: f64,
        single: bool,
    },
    /// A name: shared text (the lowering makes a file's equal names one allocation).
    Ident(#[serde(deserialize_with = "shared_name")] std::sync::Arc<str>),
    Field {
        base: Box<Expr>,
        arrow: bool,
        /// Shared text, as names are.
        #[serde(deserialize_with = "shared_name")]
        field: std::sync::Arc<str>,
    },
    Index {
        base: Box<Expr>,
        index: Box<Expr>,
    },
    Unary {
        op: UnaryOp,
        arg: Box<Expr>,
    },
    Binary {
        op: BinaryOp,
        lhs: Box<Expr>,
        rhs: Box<Expr>,
    },
    /// `target op= value`; `op` is None for plain `=`.
    Assign {
        op: Option<BinaryOp>,
        target: Box<Expr>,
        value: Box<Expr>,
    },
    /// `x++`, `--x`: `increment` tells which.
    IncDec {
        target: Box<Expr>,
        increment: bool,
    },
    Cast {
        ty: CType,
        arg: Box<Expr>,
    },
    /// `args` is shared with the index's call table (`index::CallSite`), which keeps
    /// every call's arguments as read back from the parked body (the body's own copy goes
    /// when the body is dropped again). Code that rewrites them copies on write
    /// (`Arc::make_mut`).
    Call {
        callee: Box<Expr>,
        args: std::sync::Arc<Vec<Expr>>,
    },
    Conditional {
        cond: Box<Expr>,
        then: Box<Expr>,
        otherwise: Box<Expr>,
    },
    Comma(Vec<Expr>),
    /// Anything else (sizeof, strings, compound literals...), kept as its text.
    Opaque(String),
}

impl Expr {
    pub fn new(kind: ExprKind, span: Span) -> Expr {
        Expr { kind, span }
    }

    /// Calls `visit` on each direct sub-expression, in order, for the rewrites that recurse
    /// through it. A call's arguments are shared with the index (`Arc`), so they are
    /// copied first when shared (`Arc::make_mut`).
    pub fn children_mut(&mut self, visit: &mut dyn FnMut(&mut Expr)) {
        match &mut self.kind {
            ExprKind::Field { base, .. } => visit(base),
            ExprKind::Index { base, index } => {
                visit(base);
                visit(index);
            }
            ExprKind::Unary { arg, .. } | ExprKind::Cast { arg, .. } => visit(arg),
            ExprKind::Binary { lhs, rhs, .. } => {
                visit(lhs);
                visit(rhs);
            }
            ExprKind::Assign { target, value, .. } => {
                visit(target);
                visit(value);
            }
            ExprKind::IncDec { target, .. } => visit(target),
            ExprKind::Call { callee, args } => {
                visit(callee);
                std::sync::Arc::make_mut(args).iter_mut().for_each(visit);
            }
            ExprKind::Conditional {
                cond,
                then,
                otherwise,
            } => {
                visit(cond);
                visit(then);
                visit(otherwise);
            }
            ExprKind::Comma(items) => items.iter_mut().for_each(visit),
            ExprKind::Int { .. }
            | ExprKind::Float { .. }
            | ExprKind::Ident(_)
            | ExprKind::Opaque(_) => {}
        }
    }

    /// Calls `visit` on this expression and every sub-expression, parents first.
    pub fn walk<'a>(&'a self, visit: &mut dyn FnMut(&'a Expr)) {
        visit(self);
        match &self.kind {
            ExprKind::Field { base, .. } => base.walk(visit),
            ExprKind::Index { base, index } => {
                base.walk(visit);
                index.walk(visit);
            }
            ExprKind::Unary { arg, .. } | ExprKind::Cast { arg, .. } => arg.walk(visit),
            ExprKind::Binary { lhs, rhs, .. } => {
                lhs.walk(visit);
                rhs.walk(visit);
            }
            ExprKind::Assign { target, value, .. } => {
                target.walk(visit);
                value.walk(visit);
            }
            ExprKind::IncDec { target, .. } => target.walk(visit),
            ExprKind::Call { callee, args } => {
                callee.walk(visit);
                for arg in args.iter() {
                    arg.walk(visit);
                }
            }
            ExprKind::Conditional {
                cond,
                then,
                otherwise,
            } => {
                cond.walk(visit);
                then.walk(visit);
                otherwise.walk(visit);
            }
            ExprKind::Comma(items) => {
                for item in items {
                    item.walk(visit);
                }
            }
            ExprKind::Int { .. }
            | ExprKind::Float { .. }
            | ExprKind::Ident(_)
            | ExprKind::Opaque(_) => {}
        }
    }

    /// True when `other` occurs in this expression (compared as C text, spans ignored).
    pub fn mentions(&self, other: &Expr) -> bool {
        let mut found = false;
        self.walk(&mut |e| {
            if !found && same_place_kind(e, other) && e.same_as(other) {
                found = true;
            }
        });
        found
    }

    /// Structural equality, spans ignored: the same C text without printing it (this is
    /// on the recogniser's hot path).
    pub fn same_as(&self, other: &Expr) -> bool {
        use ExprKind::*;
        match (&self.kind, &other.kind) {
            (Ident(a), Ident(b)) => a == b,
            (Opaque(a), Opaque(b)) => a == b,
            (
                Int {
                    value: a,
                    unsigned: ua,
                    long: la,
                },
                Int {
                    value: b,
                    unsigned: ub,
                    long: lb,
                },
            ) => a == b && ua == ub && la == lb,
            (
                Float {
                    value: a,
                    single: sa,
                },
                Float {
                    value: b,
                    single: sb,
                },
            ) => a.to_bits() == b.to_bits() && sa == sb,
            (
                Field {
                    base: a,
                    arrow: x,
                    field: f,
                },
                Field {
                    base: b,
                    arrow: y,
                    field: g,
                },
            ) => x == y && f == g && a.same_as(b),
            (Index { base: a, index: i }, Index { base: b, index: j }) => {
                a.same_as(b) && i.same_as(j)
            }
            (Unary { op: o, arg: a }, Unary { op: p, arg: b }) => o == p && a.same_as(b),
            (
                Binary {
                    op: o,
                    lhs: a,
                    rhs: c,
                },
                Binary {
                    op: p,
                    lhs: b,
                    rhs: d,
                },
            ) => o == p && a.same_as(b) && c.same_as(d),
            (Cast { ty: t, arg: a }, Cast { ty: u, arg: b }) => t == u && a.same_as(b),
            (Call { callee: a, args: x }, Call { callee: b, args: y }) => {
                a.same_as(b)
                    && x.len() == y.len()
                    && x.iter().zip(y.iter()).all(|(p, q)| p.same_as(q))
            }
            (
                Assign {
                    op: o,
                    target: a,
                    value: c,
                },
                Assign {
                    op: p,
                    target: b,
                    value: d,
                },
            ) => o == p && a.same_as(b) && c.same_as(d),
            (
                IncDec {
                    target: a,
                    increment: x,
                },
                IncDec {
                    target: b,
                    increment: y,
                },
            ) => x == y && a.same_as(b),
            (
                Conditional {
                    cond: a,
                    then: b,
                    otherwise: c,
                },
                Conditional {
                    cond: x,
                    then: y,
                    otherwise: z,
                },
            ) => a.same_as(x) && b.same_as(y) && c.same_as(z),
            (Comma(a), Comma(b)) => {
                a.len() == b.len() && a.iter().zip(b).all(|(p, q)| p.same_as(q))
            }
            _ => false,
        }
    }

    /// The identifier this lvalue is rooted at (`f` in `f->y`, `buf` in `buf[i]`).
    pub fn root_ident(&self) -> Option<&str> {
        match &self.kind {
            ExprKind::Ident(name) => Some(name),
            ExprKind::Field { base, .. } | ExprKind::Index { base, .. } => base.root_ident(),
            ExprKind::Unary {
                op: UnaryOp::Deref,
                arg,
            } => arg.root_ident(),
            ExprKind::Cast { arg, .. } => arg.root_ident(),
            _ => None,
        }
    }

    /// Strips redundant parentheses-like wrappers that carry no meaning for places.
    pub fn is_place(&self) -> bool {
        match &self.kind {
            ExprKind::Ident(_) => true,
            ExprKind::Field { base, .. } => base.is_place() || base.is_addr_of_place(),
            ExprKind::Index { base, .. } => base.is_place(),
            ExprKind::Unary {
                op: UnaryOp::Deref,
                arg,
            } => arg.is_place() || matches!(arg.kind, ExprKind::Binary { .. }),
            _ => false,
        }
    }

    fn is_addr_of_place(&self) -> bool {
        matches!(&self.kind, ExprKind::Unary { op: UnaryOp::AddrOf, arg } if arg.is_place())
    }
}

fn same_place_kind(a: &Expr, b: &Expr) -> bool {
    std::mem::discriminant(&a.kind) == std::mem::discriminant(&b.kind)
}

fn precedence(expr: &Expr) -> u8 {
    match &expr.kind {
        ExprKind::Comma(_) => 1,
        ExprKind::Assign { .. } => 2,
        ExprKind::Conditional { .. } => 3,
        // Above the comma, assignment and conditional levels.
        ExprKind::Binary { op, .. } => 3 + op.precedence(),
        ExprKind::Unary { .. } | ExprKind::Cast { .. } => 14,
        _ => 16,
    }
}

struct Operand<'a>(&'a Expr, u8);

impl fmt::Display for Operand<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // Shifts and bit operators bind looser than arithmetic, which readers often
        // misjudge: print the parentheses there even where C does not need them.
        let child = precedence(self.0);
        let readable = (4..=11).contains(&self.1) && (12..=13).contains(&child);
        if child < self.1 || readable {
            write!(f, "({})", self.0)
        } else {
            write!(f, "{}", self.0)
        }
    }
}

impl fmt::Display for CType {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CType::FixedInt(t) => write!(f, "{}int{}_t", if t.signed { "" } else { "u" }, t.bits),
            CType::PlainInt { signed: true } => write!(f, "int"),
            CType::PlainInt { signed: false } => write!(f, "unsigned"),
            CType::Float => write!(f, "float"),
            CType::Double => write!(f, "double"),
            CType::Bool => write!(f, "bool"),
            CType::Void => write!(f, "void"),
            CType::Struct(name) => write!(f, "struct {name}"),
            CType::Pointer(inner) => write!(f, "{inner} *"),
            CType::Array(inner, Some(n)) => write!(f, "{inner}[{n}]"),
            CType::Array(inner, None) => write!(f, "{inner}[]"),
            CType::Named(name) | CType::Unknown(name) => write!(f, "{name}"),
        }
    }
}

/// Prints the expression back as C, with the parentheses precedence needs. Names and
/// numbers keep the spelling the lowering recorded, so the text is stable across runs.
impl fmt::Display for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let me = precedence(self);
        match &self.kind {
            ExprKind::Int {
                value,
                unsigned,
                long,
            } => write!(
                f,
                "{value}{}{}",
                if *unsigned { "u" } else { "" },
                if *long { "L" } else { "" }
            ),
            ExprKind::Float { value, single } => {
                let mut text = format!("{value}");
                if !text.contains(['.', 'e', 'E']) && value.is_finite() {
                    text.push_str(".0");
                }
                write!(f, "{text}{}", if *single { "f" } else { "" })
            }
            ExprKind::Ident(name) => write!(f, "{name}"),
            ExprKind::Field { base, arrow, field } => {
                write!(
                    f,
                    "{}{}{field}",
                    Operand(base, 15),
                    if *arrow { "->" } else { "." }
                )
            }
            ExprKind::Index { base, index } => write!(f, "{}[{index}]", Operand(base, 15)),
            ExprKind::Unary { op, arg } => {
                let sym = match op {
                    UnaryOp::Neg => "-",
                    UnaryOp::Plus => "+",
                    UnaryOp::Not => "!",
                    UnaryOp::BitNot => "~",
                    UnaryOp::Deref => "*",
                    UnaryOp::AddrOf => "&",
                };
                write!(f, "{sym}{}", Operand(arg, 14))
            }
            ExprKind::Binary { op, lhs, rhs } => {
                write!(
                    f,
                    "{} {} {}",
                    Operand(lhs, me),
                    op.text(),
                    Operand(rhs, me + 1)
                )
            }
            ExprKind::Assign { op, target, value } => {
                let sym = op.map(BinaryOp::text).unwrap_or("");
                write!(f, "{target} {sym}= {}", Operand(value, 2))
            }
            ExprKind::IncDec { target, increment } => {
                write!(
                    f,
                    "{}{}",
                    Operand(target, 15),
                    if *increment { "++" } else { "--" }
                )
            }
            ExprKind::Cast { ty, arg } => write!(f, "({ty}){}", Operand(arg, 14)),
            ExprKind::Call { callee, args } => {
                write!(f, "{}(", Operand(callee, 15))?;
                for (i, arg) in args.iter().enumerate() {
                    if i > 0 {
                        write!(f, ", ")?;
                    }
                    write!(f, "{}", Operand(arg, 2))?;
                }
                write!(f, ")")
            }
            ExprKind::Conditional {
                cond,
                then,
                otherwise,
            } => write!(
                f,
                "{} ? {} : {}",
                Operand(cond, 4),
                Operand(then, 2),
                Operand(otherwise, 3)
            ),
            ExprKind::Comma(items) => {
                for (i, item) in items.iter().enumerate() {
                    if i > 0 {
                        write!(f, ", ")?;
                    }
                    write!(f, "{}", Operand(item, 2))?;
                }
                Ok(())
            }
            ExprKind::Opaque(text) => write!(f, "{text}"),
        }
    }
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LocalDecl {
    pub name: String,
    pub ty: CType,
    pub is_static: bool,
    pub is_const: bool,
    pub init: Option<Initializer>,
    pub span: Span,
}

/// A declaration's initialiser: a plain expression or a braced list.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum Initializer {
    Expr(Expr),
    /// Items of `{ ... }`, each with its designator (`.k = ...`) when it has one.
    List(Vec<(Option<String>, Initializer)>),
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum Stmt {
    Expr(Expr),
    Decl(Vec<LocalDecl>),
    Block(Vec<Stmt>),
    If {
        cond: Expr,
        then: Box<Stmt>,
        otherwise: Option<Box<Stmt>>,
    },
    /// `for`, `while`, `do`: the body runs zero or more times.
    /// (The expressions are boxed to keep every `Stmt` small: most are not loops.)
    Loop {
        init: Vec<Stmt>,
        cond: Option<Box<Expr>>,
        step: Option<Box<Expr>>,
        body: Box<Stmt>,
        span: Span,
    },
    Switch {
        scrutinee: Expr,
        body: Box<Stmt>,
    },
    Return(Option<Expr>, Span),
    /// A preprocessor conditional inside a function: each branch with its condition text.
    Conditional(Vec<(CondBranch, Vec<Stmt>)>),
    Other(Span),
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Param {
    pub name: String,
    pub ty: CType,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Function {
    pub name: String,
    pub params: Vec<Param>,
    pub returns: CType,
    pub is_static: bool,
    pub body: Body,
    pub span: Span,
    pub name_span: Span,
    pub condition: Condition,
}

impl Function {
    /// The function's statements, read back if the body is parked.
    pub fn body(&self) -> Stmts<'_> {
        self.body.stmts(self.span.file)
    }
}

/// A function's statements: as lowered, or parked once its file is lowered.
///
/// A body takes most of a file's IR in memory (on a tree without copies, over half of
/// it), and later stages read each body a few times, one at a time. Parked, it is the
/// body's postcard encoding (a fifth of the memory or less), with every file id written
/// as 0; it is read back as the file it belongs to ([`Function::body`]), and the last few
/// bodies read on each thread are kept decoded. Bodies equal but for their file park as
/// equal bytes: `==` compares two live bodies as statements and otherwise compares the
/// parked bytes, so a parked body equals the live body of any file it was parked from.
#[derive(Clone)]
pub enum Body {
    Live(Vec<Stmt>),
    Parked(std::sync::Arc<[u8]>),
}

impl Default for Body {
    fn default() -> Body {
        Body::Live(Vec::new())
    }
}

impl From<Vec<Stmt>> for Body {
    fn from(stmts: Vec<Stmt>) -> Body {
        Body::Live(stmts)
    }
}

/// A function's statements as read: borrowed from a live body, or shared with the decoded
/// bodies each thread keeps.
pub enum Stmts<'a> {
    Borrowed(&'a [Stmt]),
    Decoded(std::rc::Rc<Vec<Stmt>>),
}

impl std::ops::Deref for Stmts<'_> {
    type Target = [Stmt];
    fn deref(&self) -> &[Stmt] {
        match self {
            Stmts::Borrowed(s) => s,
            Stmts::Decoded(s) => s,
        }
    }
}

/// How many decoded bodies each thread keeps: the function being walked and the few it
/// looks into (an init function, a helper's return).
const DECODED_KEPT: usize = 4;

type DecodedBody = (std::sync::Arc<[u8]>, FileId, std::rc::Rc<Vec<Stmt>>);

thread_local! {
    /// The bodies last decoded on this thread, newest last. Each holds its parked bytes,
    /// so an entry's address cannot be reused by another body while it is here.
    static DECODED: std::cell::RefCell<Vec<DecodedBody>> = const { std::cell::RefCell::new(Vec::new()) };
}

fn park(stmts: &[Stmt]) -> Option<std::sync::Arc<[u8]>> {
    let before = PARKING.with(|p| p.replace(true));
    let bytes = postcard::to_stdvec(stmts);
    PARKING.with(|p| p.set(before));
    bytes.ok().map(Into::into)
}

fn unpark(bytes: &[u8], file: FileId) -> Option<Vec<Stmt>> {
    with_file_id(file, || postcard::from_bytes(bytes)).ok()
}

impl Body {
    /// Parks a live body (a body that cannot be encoded stays live).
    pub fn park(&mut self) {
        if let Body::Live(stmts) = self {
            if let Some(bytes) = park(stmts) {
                *self = Body::Parked(bytes);
            }
        }
    }

    /// Whether a parked body reads back (a damaged cache entry may hold one that does not).
    pub fn reads_back(&self) -> bool {
        match self {
            Body::Live(_) => true,
            Body::Parked(bytes) => unpark(bytes, FileId(0)).is_some(),
        }
    }

    /// The statements as file `file`'s. A parked body that does not read back (never made
    /// by this build) reads as no statements.
    pub fn stmts(&self, file: FileId) -> Stmts<'_> {
        let bytes = match self {
            Body::Live(stmts) => return Stmts::Borrowed(stmts),
            Body::Parked(bytes) => bytes,
        };
        let hit = DECODED.with(|d| {
            let mut d = d.borrow_mut();
            let at = d
                .iter()
                .position(|(b, f, _)| std::sync::Arc::ptr_eq(b, bytes) && *f == file)?;
            let entry = d.remove(at);
            let stmts = entry.2.clone();
            d.push(entry);
            Some(stmts)
        });
        if let Some(stmts) = hit {
            return Stmts::Decoded(stmts);
        }
        let stmts = std::rc::Rc::new(unpark(bytes, file).unwrap_or_default());
        DECODED.with(|d| {
            let mut d = d.borrow_mut();
            if d.len() >= DECODED_KEPT {
                d.remove(0);
            }
            d.push((bytes.clone(), file, stmts.clone()));
        });
        Stmts::Decoded(stmts)
    }

    /// How many statements the body holds at its top level, without reading a parked body
    /// back: its encoding starts with that count (postcard's varint). A parked body whose
    /// count does not read counts as none (it reads back as no statements).
    pub fn len(&self) -> usize {
        match self {
            Body::Live(stmts) => stmts.len(),
            Body::Parked(bytes) => {
                let mut count: u64 = 0;
                for (k, byte) in bytes.iter().take(10).enumerate() {
                    count |= u64::from(byte & 0x7f) << (7 * k);
                    if byte & 0x80 == 0 {
                        return usize::try_from(count).unwrap_or(0);
                    }
                }
                0
            }
        }
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The statements of a live body, to change them (the lowering's and tests' own).
    pub fn live_mut(&mut self) -> Option<&mut Vec<Stmt>> {
        match self {
            Body::Live(stmts) => Some(stmts),
            Body::Parked(_) => None,
        }
    }

    fn parked_bytes(&self) -> Option<std::borrow::Cow<'_, [u8]>> {
        match self {
            Body::Live(stmts) => park(stmts).map(|b| std::borrow::Cow::Owned(b.to_vec())),
            Body::Parked(bytes) => Some(std::borrow::Cow::Borrowed(bytes)),
        }
    }
}

impl PartialEq for Body {
    fn eq(&self, other: &Body) -> bool {
        match (self, other) {
            (Body::Live(a), Body::Live(b)) => a == b,
            _ => self.parked_bytes() == other.parked_bytes(),
        }
    }
}

impl fmt::Debug for Body {
    fn fmt(&self, f: &mut fmt::Formatter) -> fmt::Result {
        match self {
            Body::Live(stmts) => stmts.fmt(f),
            Body::Parked(bytes) => write!(f, "Parked({} bytes)", bytes.len()),
        }
    }
}

/// Written as the parked bytes, so that a cached file's bodies are read back parked.
impl serde::Serialize for Body {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match self.parked_bytes() {
            Some(bytes) => s.serialize_bytes(&bytes),
            None => Err(serde::ser::Error::custom("a body that cannot be encoded")),
        }
    }
}

impl<'de> serde::Deserialize<'de> for Body {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Body, D::Error> {
        struct Bytes;
        impl<'de> serde::de::Visitor<'de> for Bytes {
            type Value = Vec<u8>;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a parked function body")
            }
            fn visit_bytes<E: serde::de::Error>(self, v: &[u8]) -> Result<Vec<u8>, E> {
                Ok(v.to_vec())
            }
            fn visit_byte_buf<E: serde::de::Error>(self, v: Vec<u8>) -> Result<Vec<u8>, E> {
                Ok(v)
            }
        }
        let bytes = d.deserialize_byte_buf(Bytes)?;
        Ok(Body::Parked(bytes.into()))
    }
}

/// One branch of a preprocessor conditional: what makes it active.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum CondBranch {
    /// `#if EXPR` / `#elif EXPR`, the expression as text.
    If(String),
    Ifdef(String),
    Ifndef(String),
    /// `#else` of the branches listed before it.
    Else,
}

/// The chain of preprocessor branches a definition sits in, outermost first. Each element
/// is the branch taken plus the conditions of the branches before it in the same group,
/// which must all be false for it to be taken.
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize, serde::Deserialize)]
pub struct Condition {
    /// Shared: every definition in one preprocessor group holds the same levels (a vendor
    /// header puts thousands of macros under one `#if`), so a clone costs a count.
    pub levels: std::sync::Arc<Vec<CondLevel>>,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct CondLevel {
    pub branch: CondBranch,
    pub earlier: Vec<CondBranch>,
}

impl Condition {
    pub fn is_unconditional(&self) -> bool {
        self.levels.is_empty()
    }
}

impl fmt::Display for CondBranch {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CondBranch::If(text) => write!(f, "{text}"),
            CondBranch::Ifdef(name) => write!(f, "defined({name})"),
            CondBranch::Ifndef(name) => write!(f, "!defined({name})"),
            CondBranch::Else => write!(f, "else"),
        }
    }
}

impl fmt::Display for Condition {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts = Vec::new();
        for level in self.levels.iter() {
            let mut terms: Vec<String> = level.earlier.iter().map(|b| format!("!({b})")).collect();
            if level.branch != CondBranch::Else {
                terms.push(level.branch.to_string());
            }
            parts.push(terms.join(" && "));
        }
        write!(f, "{}", parts.join(" && "))
    }
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct MacroDef {
    /// Name and body are shared text: a vendor's headers copied per board define the same
    /// names to the same values hundreds of thousands of times, and a copied file's IR is
    /// a clone of the first copy's (`FileIr::move_to`), sharing them.
    pub name: std::sync::Arc<str>,
    /// None for object-like macros.
    pub params: Option<Vec<String>>,
    pub body: std::sync::Arc<str>,
    pub span: Span,
    pub condition: Condition,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct GlobalDecl {
    pub decl: LocalDecl,
    pub condition: Condition,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct StructDef {
    pub name: String,
    pub fields: Vec<Param>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct EnumConst {
    pub name: String,
    /// The written value, or None for "previous + 1".
    pub value: Option<Expr>,
    /// Position in its enum, and the name of the previous constant, for implicit values.
    pub previous: Option<String>,
    pub span: Span,
}

/// Everything `parse` extracts from one file.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct FileIr {
    pub file: FileId,
    pub macros: Vec<MacroDef>,
    pub globals: Vec<GlobalDecl>,
    pub functions: Vec<Function>,
    pub structs: Vec<StructDef>,
    pub enums: Vec<EnumConst>,
    pub typedefs: Vec<(String, CType)>,
    pub problems: Vec<ParseProblem>,
    /// `tauscan:` comments: (line, text after the marker), for tags and suppressions.
    pub tags: Vec<(u32, String)>,
    /// `#include` directives, in order.
    pub includes: Vec<Include>,
    /// Function prototypes (declarations without a body): name and return type, so that
    /// a call of a function defined outside the scan still has a type (`uint16_t
    /// adc_read(void);`).
    pub prototypes: Vec<(String, CType)>,
}

/// Moves every span of `stmts` to file `file` (as [`FileIr::move_to`] does a file's).
pub fn move_stmts_to(stmts: &mut [Stmt], file: FileId) {
    stmts.iter_mut().for_each(|s| move_stmt(s, file));
}

fn move_ty(t: &mut CType, file: FileId) {
    match t {
        CType::Pointer(inner) => move_ty(inner, file),
        CType::Array(inner, size) => {
            move_ty(inner, file);
            if let Some(size) = size {
                move_expr(size, file);
            }
        }
        _ => {}
    }
}
fn move_expr(e: &mut Expr, file: FileId) {
    e.span.file = file;
    if let ExprKind::Cast { ty: t, .. } = &mut e.kind {
        move_ty(t, file);
    }
    e.children_mut(&mut |c| move_expr(c, file));
}
fn move_init(i: &mut Initializer, file: FileId) {
    match i {
        Initializer::Expr(e) => move_expr(e, file),
        Initializer::List(items) => items.iter_mut().for_each(|(_, i)| move_init(i, file)),
    }
}
fn move_decl(d: &mut LocalDecl, file: FileId) {
    d.span.file = file;
    move_ty(&mut d.ty, file);
    if let Some(i) = &mut d.init {
        move_init(i, file);
    }
}
fn move_stmt(s: &mut Stmt, file: FileId) {
    match s {
        Stmt::Expr(e) => move_expr(e, file),
        Stmt::Decl(decls) => decls.iter_mut().for_each(|d| move_decl(d, file)),
        Stmt::Block(items) => items.iter_mut().for_each(|s| move_stmt(s, file)),
        Stmt::If {
            cond,
            then,
            otherwise,
        } => {
            move_expr(cond, file);
            move_stmt(then, file);
            if let Some(o) = otherwise {
                move_stmt(o, file);
            }
        }
        Stmt::Loop {
            init,
            cond,
            step,
            body,
            span,
        } => {
            span.file = file;
            init.iter_mut().for_each(|s| move_stmt(s, file));
            if let Some(c) = cond {
                move_expr(c, file);
            }
            if let Some(s) = step {
                move_expr(s, file);
            }
            move_stmt(body, file);
        }
        Stmt::Switch { scrutinee, body } => {
            move_expr(scrutinee, file);
            move_stmt(body, file);
        }
        Stmt::Return(e, span) => {
            span.file = file;
            if let Some(e) = e {
                move_expr(e, file);
            }
        }
        Stmt::Conditional(branches) => {
            for (_, body) in branches {
                body.iter_mut().for_each(|s| move_stmt(s, file));
            }
        }
        Stmt::Other(span) => span.file = file,
    }
}

impl FileIr {
    /// Makes equal conditions of neighbouring definitions one shared value again, as the
    /// lowering made them (an IR decoded from bytes holds a copy per definition: a
    /// vendor header's thousands of macros under one `#if` would each hold their own).
    pub fn share_conditions(&mut self) {
        fn share(last: &mut Option<Condition>, c: &mut Condition) {
            match last {
                Some(l) if l.levels == c.levels => c.levels = l.levels.clone(),
                _ => *last = Some(c.clone()),
            }
        }
        let mut last = None;
        for m in &mut self.macros {
            share(&mut last, &mut m.condition);
        }
        for g in &mut self.globals {
            share(&mut last, &mut g.condition);
        }
        for f in &mut self.functions {
            share(&mut last, &mut f.condition);
        }
        for i in &mut self.includes {
            share(&mut last, &mut i.condition);
        }
    }

    /// The IR as file `file`: every span (and the file's own id) moved there. A file whose
    /// bytes equal another's takes a clone of that file's IR moved to itself, sharing its
    /// texts and conditions.
    pub fn move_to(&mut self, file: FileId) {
        self.file = file;
        for m in &mut self.macros {
            m.span.file = file;
        }
        for g in &mut self.globals {
            move_decl(&mut g.decl, file);
        }
        for f in &mut self.functions {
            f.span.file = file;
            f.name_span.file = file;
            for p in &mut f.params {
                move_ty(&mut p.ty, file);
            }
            move_ty(&mut f.returns, file);
            // A parked body holds no file ids: it is read back as its function's file.
            if let Some(body) = f.body.live_mut() {
                body.iter_mut().for_each(|s| move_stmt(s, file));
            }
        }
        for s in &mut self.structs {
            s.span.file = file;
            for p in &mut s.fields {
                move_ty(&mut p.ty, file);
            }
        }
        for e in &mut self.enums {
            e.span.file = file;
            if let Some(v) = &mut e.value {
                move_expr(v, file);
            }
        }
        for (_, t) in &mut self.typedefs {
            move_ty(t, file);
        }
        for p in &mut self.problems {
            p.span.file = file;
        }
        for (_, t) in &mut self.prototypes {
            move_ty(t, file);
        }
    }
}

/// One `#include` directive: the path as written (without quotes or brackets).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Include {
    pub path: String,
    pub line: u32,
    pub condition: Condition,
}

/// Something in a file the lowering could not read; data for the report, not an error.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ParseProblem {
    pub span: Span,
    pub message: String,
}

#[cfg(test)]
mod body_tests {
    use super::*;

    #[test]
    fn a_parked_body_reads_back_as_each_file_and_a_damaged_one_as_nothing() {
        let damaged = Body::Parked(vec![0xff, 0xff, 0xff].into());
        assert!(!damaged.reads_back());
        assert!(damaged.stmts(FileId(1)).is_empty());
        assert_eq!(damaged.len(), 0);
        let ir = crate::parse::parse_file(FileId(1), b"int y;\nvoid f(int u) { y += u; }\n");
        let mut body = ir.functions[0].body.clone();
        assert!(body.reads_back());
        body.park();
        assert!(body.reads_back());
        assert_eq!(body.stmts(FileId(1)).len(), 1);
        assert_eq!(body, ir.functions[0].body);
        assert_ne!(body, damaged);
        // Read as two files in turn: each reading is that file's, not the last one kept.
        for file in [FileId(1), FileId(2), FileId(1)] {
            let Stmt::Expr(e) = &body.stmts(file)[0] else {
                panic!("not an expression statement");
            };
            assert_eq!(e.span.file, file);
        }
        // A count past one varint byte.
        let long: String = (0..300).map(|i| format!("y += {i};\n")).collect();
        let source = format!("int y;\nvoid g(void) {{\n{long}}}\n");
        let ir = crate::parse::parse_file(FileId(1), source.as_bytes());
        let mut body = ir.functions[0].body.clone();
        body.park();
        assert!(matches!(body, Body::Parked(_)));
        assert_eq!(body.len(), 300);
    }
}

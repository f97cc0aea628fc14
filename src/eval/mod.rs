//! The constant evaluator: what value does this C expression have, and which definitions
//! did it come from?
//!
//! It resolves names through the program index (macros of the active preprocessor branch,
//! enum constants, `const` and never-written globals, struct fields set in init functions
//! or initialisers, small helper functions that return a formula) and computes with the
//! C rules of `num`. Every definition it passes through is recorded as a `ChainStep`, so a
//! coefficient can be shown with its derivation. A value it cannot know is
//! `Unknown` with the reason, never a guess; depth, cycle and step limits make it total.

pub mod num;

use crate::index::{FuncRef, Program};
use crate::ir::*;
use num::{ArithError, Num, Target};
use std::collections::HashMap;

const MAX_DEPTH: u32 = 48;
const MAX_STEPS: u32 = 20_000;

/// One definition a value was derived through.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ChainStep {
    pub file: FileId,
    pub line: u32,
    pub text: String,
    /// The name this step defines (macro, constant, field, parameter), when it has one.
    pub name: Option<String>,
    /// The value the name took, when it was known.
    pub value: Option<f64>,
}

/// Why a value is not known.
#[derive(Debug, Clone, PartialEq)]
pub struct Unknown {
    pub reason: String,
    /// The run-time quantity (a parameter, a variable set while running) the value depends
    /// on, when that is the reason.
    pub runtime: Option<String>,
    /// When that quantity is a parameter: the function it is a parameter of.
    pub param_of: Option<FuncRef>,
}

impl Unknown {
    pub fn new(reason: impl Into<String>) -> Unknown {
        Unknown {
            reason: reason.into(),
            runtime: None,
            param_of: None,
        }
    }
    fn runtime(name: &str, reason: impl Into<String>) -> Unknown {
        Unknown {
            reason: reason.into(),
            runtime: Some(name.to_string()),
            param_of: None,
        }
    }
}

impl From<ArithError> for Unknown {
    fn from(e: ArithError) -> Unknown {
        Unknown::new(e.to_string())
    }
}

/// The names visible where an expression stands.
#[derive(Debug, Clone, Default)]
pub struct Scope {
    pub function: Option<FuncRef>,
    /// Places (by their C text) with a known value: bound parameters, simulated state.
    pub values: HashMap<String, Num>,
    /// Local names that stand for an expression of the same scope (temporaries, local
    /// constants).
    pub exprs: HashMap<String, Expr>,
}

impl Scope {
    pub fn in_function(function: FuncRef) -> Scope {
        Scope {
            function: Some(function),
            ..Scope::default()
        }
    }
}

/// Flags raised while evaluating, for the integer-hazard checks.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Flags {
    pub signed_overflow: bool,
    pub unsigned_wrap: bool,
}

pub struct Evaluator<'p> {
    pub program: &'p Program,
    /// A macro definition to use instead of the active one (to evaluate the value under
    /// another preprocessor branch).
    pub macro_override: Option<MacroDef>,
    /// Divide integers as real numbers (`1/8` is 0.125), to see what a constant was meant
    /// to be where C's truncating division (C11 6.5.5) changes it. Everything else keeps
    /// the C rules, conversions to a declared type included.
    pub real_arithmetic: bool,
    /// A field reached through a pointer parameter takes the value every write to such a
    /// field gives (a configuration shared by every object of the type). Off where a wrong
    /// value would remove something (judging a guard).
    pub shared_fields: bool,
    pub chain: Vec<ChainStep>,
    pub flags: Flags,
    /// Values to assume for run-time quantities (by their C text, as `Unknown::runtime`
    /// names them), to probe how a value computed at run time depends on them.
    pub assumed: HashMap<String, Num>,
    /// The file whose includes decide which definition of a macro is meant: the file of
    /// the innermost scope with a function.
    file: Option<usize>,
    /// The file of the outermost evaluation: where the value is needed. A field of a
    /// struct reached through pointers is looked up among that file's writes first (the
    /// demodulator of this file sets its own fields).
    origin: Option<usize>,
    depth: u32,
    steps: u32,
    active: Vec<String>,
}

impl<'p> Evaluator<'p> {
    /// An evaluator whose macro names are seen from `file` (for a macro body read on its
    /// own, with no function around it).
    pub fn in_file(program: &'p Program, file: usize) -> Evaluator<'p> {
        let mut e = Evaluator::new(program);
        e.file = Some(file);
        e
    }

    pub fn new(program: &'p Program) -> Evaluator<'p> {
        Evaluator {
            program,
            macro_override: None,
            real_arithmetic: false,
            shared_fields: true,
            chain: Vec::new(),
            flags: Flags::default(),
            assumed: HashMap::new(),
            file: None,
            origin: None,
            depth: 0,
            steps: 0,
            active: Vec::new(),
        }
    }

    fn target(&self) -> Target {
        self.program.options.target
    }

    fn record(&mut self, file: FileId, line: u32, text: String) {
        self.record_named(file, line, text, None);
    }

    /// Records a step; returns its position so the value can be filled in once known.
    fn record_named(&mut self, file: FileId, line: u32, text: String, name: Option<&str>) -> usize {
        if let Some(i) = self
            .chain
            .iter()
            .position(|s| s.file == file && s.line == line && s.text == text)
        {
            return i;
        }
        self.chain.push(ChainStep {
            file,
            line,
            text,
            name: name.map(str::to_string),
            value: None,
        });
        self.chain.len() - 1
    }

    fn fill(&mut self, step: usize, value: &Result<Num, Unknown>) {
        if let (Some(s), Ok(v)) = (self.chain.get_mut(step), value) {
            s.value = Some(v.as_f64());
        }
    }

    /// Evaluates `expr` in `scope`.
    pub fn eval(&mut self, expr: &Expr, scope: &Scope) -> Result<Num, Unknown> {
        self.steps += 1;
        if self.steps > MAX_STEPS {
            return Err(Unknown::new("evaluation step limit reached"));
        }
        if self.depth > MAX_DEPTH {
            return Err(Unknown::new("definitions nest too deeply"));
        }
        self.depth += 1;
        let outer_file = self.file;
        if let Some(f) = scope.function {
            self.file = Some(f.file);
            if self.origin.is_none() {
                self.origin = Some(f.file);
            }
        }
        let result = self.eval_inner(expr, scope);
        self.file = outer_file;
        self.depth -= 1;
        result
    }

    fn eval_inner(&mut self, expr: &Expr, scope: &Scope) -> Result<Num, Unknown> {
        let target = self.target();
        if let Some(v) = scope.values.get(&expr.to_string()) {
            if matches!(
                expr.kind,
                ExprKind::Ident(_)
                    | ExprKind::Field { .. }
                    | ExprKind::Index { .. }
                    | ExprKind::Unary {
                        op: UnaryOp::Deref,
                        ..
                    }
            ) {
                return Ok(*v);
            }
        }
        if !self.assumed.is_empty()
            && matches!(
                expr.kind,
                ExprKind::Ident(_)
                    | ExprKind::Field { .. }
                    | ExprKind::Index { .. }
                    | ExprKind::Unary {
                        op: UnaryOp::Deref,
                        ..
                    }
            )
        {
            if let Some(v) = self.assumed.get(&expr.to_string()) {
                return Ok(*v);
            }
        }
        match &expr.kind {
            ExprKind::Int {
                value,
                unsigned,
                long,
            } => Ok(int_literal(u128::from(*value), *unsigned, *long, target)),
            ExprKind::Float { value, single } => Ok(Num::Float {
                value: if *single {
                    *value as f32 as f64
                } else {
                    *value
                },
                single: *single,
            }),
            ExprKind::Ident(name) => self.ident(name, expr.span, scope),
            ExprKind::Unary { op, arg } => {
                if *op == UnaryOp::Deref || *op == UnaryOp::AddrOf {
                    return self.place(expr, scope);
                }
                let a = self.eval(arg, scope)?;
                let out = num::unary(*op, a, target)?;
                self.note(out.signed_overflow, out.unsigned_wrap);
                if out.signed_overflow {
                    return Err(overflowed(expr));
                }
                Ok(out.value)
            }
            ExprKind::Binary { op, lhs, rhs } => {
                let a = self.eval(lhs, scope)?;
                // Short-circuit operators do not evaluate the right side when the left decides.
                if *op == BinaryOp::And && a.is_zero() {
                    return Ok(Num::int(0, target.int(true)));
                }
                if *op == BinaryOp::Or && !a.is_zero() {
                    return Ok(Num::int(1, target.int(true)));
                }
                let b = self.eval(rhs, scope)?;
                let both_int = !a.is_float() && !b.is_float();
                let (a, b) = if self.real_arithmetic && *op == BinaryOp::Div && both_int {
                    (Num::double(a.as_f64()), Num::double(b.as_f64()))
                } else {
                    (a, b)
                };
                let out = num::binary(*op, a, b, target)?;
                self.note(out.signed_overflow, out.unsigned_wrap);
                if out.signed_overflow {
                    return Err(overflowed(expr));
                }
                Ok(out.value)
            }
            ExprKind::Cast { ty, arg } => {
                if let Some((op, name, inner)) = self.program.cast_as_binary(ty, arg) {
                    let a = self.ident(&name, expr.span, scope)?;
                    let b = self.eval(inner, scope)?;
                    let out = num::binary(op, a, b, target)?;
                    self.note(out.signed_overflow, out.unsigned_wrap);
                    if out.signed_overflow {
                        return Err(overflowed(expr));
                    }
                    return Ok(out.value);
                }
                let v = self.eval(arg, scope)?;
                let ty = self.program.resolve_type(ty);
                Ok(v.convert(&ty, target))
            }
            ExprKind::Conditional {
                cond,
                then,
                otherwise,
            } => {
                let c = self.eval(cond, scope)?;
                if !c.is_zero() {
                    self.eval(then, scope)
                } else {
                    self.eval(otherwise, scope)
                }
            }
            ExprKind::Call { callee, args } => self.call(callee, args, scope),
            ExprKind::Field { .. } | ExprKind::Index { .. } => self.place(expr, scope),
            ExprKind::Comma(items) => {
                let mut last = Err(Unknown::new("empty comma expression"));
                for item in items {
                    last = self.eval(item, scope);
                }
                last
            }
            ExprKind::Assign { value, .. } => self.eval(value, scope),
            ExprKind::IncDec { target: t, .. } => Err(Unknown::runtime(
                &t.to_string(),
                format!("`{t}` changes while running"),
            )),
            ExprKind::Opaque(text) => Err(Unknown::new(format!("`{text}` is not evaluated"))),
        }
    }

    fn note(&mut self, signed_overflow: bool, unsigned_wrap: bool) {
        self.flags.signed_overflow |= signed_overflow;
        self.flags.unsigned_wrap |= unsigned_wrap;
    }

    fn guarded<T>(
        &mut self,
        key: String,
        f: impl FnOnce(&mut Self) -> Result<T, Unknown>,
    ) -> Result<T, Unknown> {
        if self.active.contains(&key) {
            return Err(Unknown::new(format!(
                "`{key}` is defined in terms of itself"
            )));
        }
        self.active.push(key);
        let result = f(self);
        self.active.pop();
        result
    }

    fn ident(&mut self, name: &str, span: Span, scope: &Scope) -> Result<Num, Unknown> {
        if let Some(e) = scope.exprs.get(name) {
            let e = e.clone();
            // A local temporary with a known value: a step of the derivation, at the local's
            // declaration when there is one.
            let declared = scope
                .function
                .and_then(|f| find_local(self.program.function(f), name))
                .map(|d| {
                    let written = match &d.init {
                        Some(Initializer::Expr(init)) => init.to_string(),
                        _ => e.to_string(),
                    };
                    let prefix = if d.is_const { "const " } else { "" };
                    (
                        d.span.file,
                        d.span.line,
                        format!("{prefix}{} {} = {written}", d.ty, d.name),
                    )
                });
            return self.guarded(format!("local {name}"), |ev| {
                let step = declared
                    .map(|(file, line, text)| ev.record_named(file, line, text, Some(name)));
                let v = ev.eval(&e, scope);
                if let Some(step) = step {
                    ev.fill(step, &v);
                }
                // A local computed from what a call returns at run time is itself a
                // run-time quantity, better named by the local (`dt_ms = now() - last`).
                v.map_err(|u| match &u.runtime {
                    Some(r) if r.ends_with(')') => Unknown {
                        reason: u.reason.clone(),
                        runtime: Some(name.to_string()),
                        param_of: None,
                    },
                    _ => u,
                })
            });
        }
        if let Some(f) = scope.function {
            let function = self.program.function(f);
            if function.params.iter().any(|p| p.name == name) {
                let mut u = Unknown::runtime(
                    name,
                    format!("`{name}` is a parameter of {}()", function.name),
                );
                u.param_of = Some(f);
                return Err(u);
            }
            if let Some(local) = find_local(function, name) {
                let fname = function.name.clone();
                let never_written = !self
                    .program
                    .writes_in_file(name, f.file)
                    .any(|w| w.function == f);
                // A local set once where it is declared and never again (not through its
                // address either) is its initialiser, in the function's scope: the
                // `float rc = 1.0f / (2 * PI * fc);` of an init function.
                let set_once = || !local.is_static && single_assignment(function, name);
                return match &local.init {
                    Some(Initializer::Expr(init))
                        if local.is_const || (local.is_static && never_written) || set_once() =>
                    {
                        let init = init.clone();
                        let ty = self.program.resolve_type(&local.ty);
                        self.guarded(format!("local {name}"), |ev| {
                            let step = ev.record_named(
                                local.span.file,
                                local.span.line,
                                format!("{} {} = {init}", local.ty, local.name),
                                Some(name),
                            );
                            let v = ev.eval(&init, scope).map(|v| v.convert(&ty, ev.target()));
                            ev.fill(step, &v);
                            v
                        })
                    }
                    _ => Err(Unknown::runtime(
                        name,
                        format!("`{name}` is a variable of {fname}() set while running"),
                    )),
                };
            }
        }
        // The active definition's body is parsed once per program; an override (another
        // preprocessor branch, for variants) is parsed here.
        let chosen: Option<(MacroDef, Option<Expr>)> = match &self.macro_override {
            Some(m) if *m.name == *name => {
                Some((m.clone(), crate::parse::parse_expression(&m.body, m.span)))
            }
            _ => self
                .program
                .macro_expr(name, self.file)
                .map(|(m, e)| (m.clone(), e.cloned())),
        };
        if let Some((m, body)) = chosen {
            return self.guarded(format!("macro {name}"), |ev| {
                let step = ev.record_named(
                    m.span.file,
                    m.span.line,
                    format!("#define {} {}", m.name, m.body),
                    Some(name),
                );
                let Some(body) = body else {
                    return Err(Unknown::new(format!(
                        "the body of macro {name} is not an expression"
                    )));
                };
                let v = ev.eval(&body, &Scope::default());
                ev.fill(step, &v);
                v
            });
        }
        if self.program.active_macro_in(name, self.file).is_some() {
            // A function-like macro named without arguments.
            return Err(Unknown::new(format!("`{name}` is a function-like macro")));
        } else if self.program.is_macro(name) {
            return Err(Unknown::new(format!(
                "macro {name} is not defined with the active preprocessor values"
            )));
        }
        if let Some((file, e)) = self.program.enum_const_in(name) {
            let e = e.clone();
            return self.guarded(format!("enum {name}"), |ev| ev.enum_value(file, &e));
        }
        if let Some(global) = self
            .program
            .global_seen_from(name, scope.function.map(|f| f.file))
        {
            let global = global.clone();
            return self.guarded(format!("global {name}"), |ev| ev.global_value(&global));
        }
        match name {
            "M_PI" => return Ok(Num::double(std::f64::consts::PI)),
            "M_PI_2" => return Ok(Num::double(std::f64::consts::FRAC_PI_2)),
            "M_2PI" | "M_TWOPI" => return Ok(Num::double(std::f64::consts::TAU)),
            "M_E" => return Ok(Num::double(std::f64::consts::E)),
            "M_SQRT2" => return Ok(Num::double(std::f64::consts::SQRT_2)),
            _ => {}
        }
        let _ = span;
        Err(Unknown::runtime(
            name,
            format!("`{name}` has no constant value in the scanned files"),
        ))
    }

    fn enum_value(&mut self, file: FileId, e: &EnumConst) -> Result<Num, Unknown> {
        let target = self.target();
        let value = match &e.value {
            Some(v) => {
                self.record(file, e.span.line, format!("{} = {v}", e.name));
                self.eval(v, &Scope::default())?
            }
            None => match &e.previous {
                Some(prev) => {
                    let p = self.ident(prev, e.span, &Scope::default())?;
                    self.record(file, e.span.line, format!("{} = {prev} + 1", e.name));
                    Num::int(p.as_f64() as i128 + 1, target.int(true))
                }
                None => {
                    self.record(file, e.span.line, format!("{} = 0", e.name));
                    Num::int(0, target.int(true))
                }
            },
        };
        Ok(value.convert(&CType::PlainInt { signed: true }, target))
    }

    fn global_value(&mut self, decl: &LocalDecl) -> Result<Num, Unknown> {
        let ty = self.program.resolve_type(&decl.ty);
        let writes: Vec<_> = crate::index::effective_writes(
            self.program
                .writes_seen_from(&decl.name, decl.span.file.0 as usize)
                .into_iter()
                .cloned()
                .collect(),
        );
        if !decl.is_const && !writes.is_empty() {
            return self.value_from_writes(&decl.name, &writes, &ty);
        }
        match &decl.init {
            Some(Initializer::Expr(init)) => {
                let prefix = if decl.is_const { "const " } else { "" };
                let step = self.record_named(
                    decl.span.file,
                    decl.span.line,
                    format!("{prefix}{} {} = {init}", decl.ty, decl.name),
                    Some(&decl.name),
                );
                let v = self
                    .eval(init, &Scope::default())
                    .map(|v| v.convert(&ty, self.target()));
                self.fill(step, &v);
                v
            }
            _ => Err(Unknown::runtime(
                &decl.name,
                format!(
                    "`{}` has no initial value and is not assigned a constant",
                    decl.name
                ),
            )),
        }
    }

    /// A value assigned to a place in function bodies: known when every plain assignment
    /// gives the same constant.
    fn value_from_writes(
        &mut self,
        place: &str,
        writes: &[crate::index::Write],
        ty: &CType,
    ) -> Result<Num, Unknown> {
        let mut values: Vec<Num> = Vec::new();
        for w in writes {
            if w.op.is_some() {
                return Err(Unknown::runtime(
                    place,
                    format!("`{place}` is updated while running"),
                ));
            }
            let scope = Scope::in_function(w.function);
            self.record(w.span.file, w.span.line, format!("{place} = {}", w.value));
            let v = self.eval(&w.value, &scope)?.convert(ty, self.target());
            if !values.iter().any(|x| x == &v) {
                values.push(v);
            }
        }
        match values.as_slice() {
            [one] => Ok(*one),
            [] => Err(Unknown::new(format!("`{place}` is never assigned"))),
            _ => Err(Unknown::runtime(
                place,
                format!("`{place}` is assigned {} different values", values.len()),
            )),
        }
    }

    /// A field, array element or dereference: bound values first, then every assignment
    /// to that place (directly, through an init function's pointer parameter, or in an
    /// initialiser).
    fn place(&mut self, expr: &Expr, scope: &Scope) -> Result<Num, Unknown> {
        let text = expr.to_string();
        if let Some(v) = scope.values.get(&text) {
            return Ok(*v);
        }
        if let ExprKind::Unary {
            op: UnaryOp::AddrOf,
            ..
        } = expr.kind
        {
            return Err(Unknown::new(format!("`{text}` is an address")));
        }
        // A field reached through a parameter of this function is set per call, unless
        // every write to a field of that name through such a pointer (the origin file's
        // first) gives one value: a configuration every object of the type shares.
        if let Some(root) = expr.root_ident() {
            if let Some(f) = scope.function {
                let function = self.program.function(f);
                if function.params.iter().any(|p| p.name == root) {
                    let per_call = Unknown::runtime(
                        &text,
                        format!(
                            "`{text}` is reached through a parameter of {}()",
                            function.name
                        ),
                    );
                    if !self.shared_fields || !matches!(expr.kind, ExprKind::Field { .. }) {
                        return Err(per_call);
                    }
                    let key = format!("place {text}");
                    let file = Some(f.file);
                    let shared = self.guarded(key, |ev| {
                        let writes = ev.writes_for(&text, file);
                        if writes.is_empty() {
                            return Err(per_call.clone());
                        }
                        ev.place_from_writes(expr, &text, file, scope)
                    });
                    return shared.map_err(|_| per_call);
                }
            }
        }
        if let Some(v) = self.const_array_element(expr, scope) {
            return v;
        }
        let key = format!("place {text}");
        let file = scope.function.map(|f| f.file);
        self.guarded(key, |ev| ev.place_from_writes(expr, &text, file, scope))
    }

    /// An element of a `const` array read from its initialiser (`kd[i]`, `gains[2].k`):
    /// the element at the index where the index is known, or the one value every element
    /// has where it is not. Elements the list leaves out are zero (C11 6.7.9 par. 21).
    /// None when the place is not of that shape or the list cannot be read by position.
    fn const_array_element(&mut self, expr: &Expr, scope: &Scope) -> Option<Result<Num, Unknown>> {
        let (indexed, field) = match &expr.kind {
            ExprKind::Field {
                base,
                arrow: false,
                field,
            } => (&**base, Some(&**field)),
            _ => (expr, None),
        };
        let ExprKind::Index { base, index } = &indexed.kind else {
            return None;
        };
        let ExprKind::Ident(name) = &base.kind else {
            return None;
        };
        // A local of that name (a `static const` table in the function) comes first.
        let local = scope
            .function
            .and_then(|f| find_local(self.program.function(f), name));
        // A local's initialiser reads the function's names (its parameters shadow globals).
        let init_scope = match &local {
            Some(_) => scope.function.map(Scope::in_function).unwrap_or_default(),
            None => Scope::default(),
        };
        let global = match local {
            Some(l) => l,
            None => self
                .program
                .global_seen_from(name, scope.function.map(|f| f.file))?
                .clone(),
        };
        if !global.is_const {
            return None;
        }
        let Some(Initializer::List(items)) = &global.init else {
            return None;
        };
        if items.iter().any(|(d, _)| d.is_some()) || items.len() > 256 {
            return None;
        }
        let CType::Array(element_ty, size) = self.program.resolve_type(&global.ty) else {
            return None;
        };
        let size = match size {
            Some(e) => {
                let n = self.eval(&e, &Scope::default()).ok()?.as_f64();
                (n.fract() == 0.0 && (0.0..=4096.0).contains(&n)).then_some(n as usize)?
            }
            None => items.len(),
        };
        let element_ty = self.program.resolve_type(&element_ty);
        let target = self.target();
        let read = |ev: &mut Self, k: usize| -> Result<Num, Unknown> {
            let missing = || {
                Ok(Num::int(
                    0,
                    IntType {
                        bits: target.int_bits,
                        signed: true,
                    },
                ))
            };
            let Some((_, item)) = items.get(k) else {
                return missing().map(|v: Num| v.convert(&element_ty, target));
            };
            let item = match field {
                None => item,
                Some(field) => {
                    let Initializer::List(members) = item else {
                        return Err(Unknown::new(format!(
                            "`{name}[{k}]` is not a braced struct"
                        )));
                    };
                    let fields = ev
                        .program
                        .struct_fields(&element_ty)
                        .unwrap_or(&[])
                        .to_vec();
                    let Some(position) = fields.iter().position(|f| f.name == field) else {
                        return Err(Unknown::new(format!("no field `{field}` in `{name}`")));
                    };
                    let found = struct_member(&fields, members, position);
                    let ty = ev.program.resolve_type(&fields[position].ty);
                    match found {
                        Some(m) => m,
                        None => return missing().map(|v: Num| v.convert(&ty, target)),
                    }
                }
            };
            let Initializer::Expr(e) = item else {
                return Err(Unknown::new(format!("`{name}[{k}]` is a braced list")));
            };
            ev.record(
                global.span.file,
                global.span.line,
                format!("{name}[{k}] = {e}"),
            );
            ev.eval(e, &init_scope)
        };
        Some(match self.eval(index, scope) {
            Ok(k) => {
                let k = k.as_f64();
                if !(k.fract() == 0.0 && k >= 0.0 && (k as usize) < size) {
                    return None;
                }
                read(self, k as usize)
            }
            Err(unknown) => {
                // Any index: one value, if every element has it.
                let mut value: Option<Num> = None;
                for k in 0..size.min(64) {
                    let v = match read(self, k) {
                        Ok(v) => v,
                        Err(_) => return Some(Err(unknown)),
                    };
                    match value {
                        None => value = Some(v),
                        Some(w) if w.as_f64() == v.as_f64() => {}
                        Some(_) => return Some(Err(unknown)),
                    }
                }
                if size > 64 {
                    return Some(Err(unknown));
                }
                value.ok_or(unknown)
            }
        })
    }

    /// The writes to a place as seen from `file`: the origin file's own first (where the
    /// value is needed), then `file`'s, then every file's (for a place that is not static).
    fn writes_for(&self, text: &str, file: Option<usize>) -> Vec<crate::index::Write> {
        if let (Some(origin), Some(f)) = (self.origin, file) {
            if origin != f {
                let own: Vec<_> = self.program.writes_in_file(text, origin).cloned().collect();
                if !own.is_empty() {
                    return own;
                }
            }
        }
        let writes: Vec<crate::index::Write> = match file {
            Some(f) => self
                .program
                .writes_seen_from(text, f)
                .into_iter()
                .cloned()
                .collect(),
            None => self.program.writes_to(text).cloned().collect(),
        };
        match self.origin {
            Some(origin) if (2..=64).contains(&writes.len()) => {
                let after_init: Vec<_> = writes
                    .iter()
                    .filter(|w| self.after_init_of(w, origin))
                    .cloned()
                    .collect();
                if after_init.is_empty() {
                    writes
                } else {
                    after_init
                }
            }
            _ => writes,
        }
    }

    /// Whether a write to an object's field follows, in the same function, a call that hands
    /// the object to a function of `origin` (`module_init(..., d); d->gain = d->base * 0.2f;`)
    /// with no other call handing it on in between: the object is then one of `origin`'s,
    /// and of several writes to the field the ones after its init calls are its
    /// configuration.
    fn after_init_of(&self, w: &crate::index::Write, origin: usize) -> bool {
        let root: String = w
            .target
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
            .collect();
        if root.is_empty() || w.function.file == origin {
            return false;
        }
        let hands_object = |a: &Expr| {
            let t = a.to_string();
            t == root || t.strip_prefix('&') == Some(root.as_str())
        };
        let latest = self
            .program
            .calls_from(w.function)
            .filter(|c| c.span.start < w.span.start && c.args.iter().any(hands_object))
            .max_by_key(|c| c.span.start);
        latest.is_some_and(|c| {
            self.program
                .resolve_call(c.caller, &c.callee)
                .is_some_and(|f| f.file == origin)
        })
    }

    /// The calls that pass the address of `base` (`init(&base, ...)`), with the argument's
    /// position; for an element `arr[k]`, also calls passing `&arr[j]` where `j` is the
    /// same constant as `k` is where the place is read (`&pids[PID_ROLL]` for
    /// `pids[PID_GROUP + i]` with `i` bound).
    fn init_calls(&mut self, base: &Expr, scope: &Scope) -> Vec<(crate::index::CallSite, usize)> {
        let address = format!("&{base}");
        let mut out: Vec<(crate::index::CallSite, usize)> = Vec::new();
        for call in self.program.calls_passing(&address) {
            if let Some(p) = call.args.iter().position(|a| a.to_string() == address) {
                out.push((call.clone(), p));
            }
        }
        let ExprKind::Index { base: array, index } = &base.kind else {
            return out;
        };
        let Ok(k) = self.eval(index, scope) else {
            return out;
        };
        let array_text = array.to_string();
        let calls: Vec<crate::index::CallSite> = self
            .program
            .calls_passing_element_of(&array_text)
            .cloned()
            .collect();
        for call in calls {
            for (p, a) in call.args.iter().enumerate() {
                let ExprKind::Unary {
                    op: UnaryOp::AddrOf,
                    arg,
                } = &a.kind
                else {
                    continue;
                };
                let ExprKind::Index { base: b, index: j } = &arg.kind else {
                    continue;
                };
                if b.to_string() != array_text {
                    continue;
                }
                let caller_scope = Scope::in_function(call.caller);
                let same = self
                    .eval(j, &caller_scope)
                    .is_ok_and(|v| v.as_f64() == k.as_f64());
                if same && !out.iter().any(|(c, q)| c.span == call.span && *q == p) {
                    out.push((call.clone(), p));
                }
            }
        }
        out
    }

    fn place_from_writes(
        &mut self,
        expr: &Expr,
        text: &str,
        file: Option<usize>,
        scope: &Scope,
    ) -> Result<Num, Unknown> {
        let ty = self.place_type(expr).unwrap_or(CType::Double);
        let mut values: Vec<Num> = Vec::new();
        let mut unknown: Option<Unknown> = None;
        let direct: Vec<_> = crate::index::effective_writes(self.writes_for(text, file));
        for w in &direct {
            if w.op.is_some() {
                return Err(Unknown::runtime(
                    text,
                    format!("`{text}` is updated while running"),
                ));
            }
            self.record(w.span.file, w.span.line, format!("{text} = {}", w.value));
            match self.eval(&w.value, &Scope::in_function(w.function)) {
                Ok(v) => push_unique(&mut values, v.convert(&ty, self.target())),
                Err(u) => unknown = Some(u),
            }
        }
        // `init(&X, ...)` where init writes `p->field = ...`.
        if let ExprKind::Field { base, field, .. } = &expr.kind {
            let base_text = base.to_string();
            let calls = self.init_calls(base, scope);
            for (call, position) in calls {
                let Some(callee) = self.program.resolve_call(call.caller, &call.callee) else {
                    // A function outside the scan that is handed the object may write it
                    // (a configuration read from flash); clearing it first does not count.
                    if !is_clearing_function(&call.callee) {
                        self.record(call.span.file, call.span.line, call.to_string_call());
                        unknown = Some(Unknown::runtime(
                            text,
                            format!(
                                "`{base_text}` is handed to {}(), which is not in the scanned files",
                                call.callee
                            ),
                        ));
                    }
                    continue;
                };
                let function = self.program.function(callee).clone();
                let address = call.args[position].to_string();
                let Some(param) = function.params.get(position) else {
                    continue;
                };
                let inner_place = format!("{}->{field}", param.name);
                let writes: Vec<_> = crate::index::effective_writes(
                    self.program
                        .writes_in_file(&inner_place, callee.file)
                        .filter(|w| w.function == callee)
                        .cloned()
                        .collect(),
                );
                if writes.is_empty() {
                    continue;
                }
                // Bind the callee's parameters to the call's arguments.
                let mut scope = Scope::in_function(callee);
                let mut failed_args: HashMap<String, Unknown> = HashMap::new();
                let caller_scope = Scope::in_function(call.caller);
                self.record(call.span.file, call.span.line, call.to_string_call());
                for (p, a) in function.params.iter().zip(call.args.iter()) {
                    if a.to_string() == address {
                        continue;
                    }
                    let step = self.record_named(
                        call.span.file,
                        call.span.line,
                        format!("{}: {} = {a}", function.name, p.name),
                        Some(&p.name),
                    );
                    let pty = self.program.resolve_type(&p.ty);
                    let v = self
                        .eval(a, &caller_scope)
                        .map(|v| v.convert(&pty, self.target()));
                    self.fill(step, &v);
                    match v {
                        Ok(v) => {
                            scope.values.insert(p.name.clone(), v);
                        }
                        Err(u) => {
                            failed_args.insert(p.name.clone(), u);
                        }
                    }
                }
                for w in writes {
                    if w.op.is_some() {
                        return Err(Unknown::runtime(
                            text,
                            format!("`{text}` is updated while running"),
                        ));
                    }
                    self.record(
                        w.span.file,
                        w.span.line,
                        format!("{inner_place} = {}", w.value),
                    );
                    match self.eval(&w.value, &scope) {
                        Ok(v) => push_unique(&mut values, v.convert(&ty, self.target())),
                        // A parameter whose argument is not known: what the argument
                        // depends on, not the parameter's name.
                        Err(u) => {
                            let from_arg = match (&u.runtime, u.param_of) {
                                (Some(p), Some(f)) if f == callee => failed_args.get(p).cloned(),
                                _ => None,
                            };
                            unknown = Some(from_arg.unwrap_or(u));
                        }
                    }
                }
            }
            // The initialiser of the global the field belongs to.
            if let Some(global) = self.program.global(&base_text).cloned() {
                if let Some(init) = &global.init {
                    if let Some(v) = self.field_initializer(&global, init, field) {
                        match v {
                            Ok(v) => {
                                if direct.is_empty() && values.is_empty() {
                                    push_unique(&mut values, v.convert(&ty, self.target()));
                                }
                            }
                            Err(u) => unknown = unknown.or(Some(u)),
                        }
                    }
                }
            }
        }
        match values.as_slice() {
            [one] if unknown.is_none() => Ok(*one),
            [] => Err(unknown.unwrap_or_else(|| {
                Unknown::runtime(
                    text,
                    format!("no constant assignment to `{text}` was found"),
                )
            })),
            [_] => Err(unknown.unwrap_or_else(|| Unknown::new("unknown"))),
            _ => Err(Unknown::runtime(
                text,
                format!("`{text}` is assigned {} different values", values.len()),
            )),
        }
    }

    fn field_initializer(
        &mut self,
        global: &LocalDecl,
        init: &Initializer,
        field: &str,
    ) -> Option<Result<Num, Unknown>> {
        let Initializer::List(items) = init else {
            return None;
        };
        let fields = self.program.struct_fields(&global.ty)?.to_vec();
        let position = fields.iter().position(|f| f.name == field)?;
        let Initializer::Expr(e) = struct_member(&fields, items, position)? else {
            return None;
        };
        self.record(
            global.span.file,
            global.span.line,
            format!("{} {} = {{ .{field} = {e} }}", global.ty, global.name),
        );
        Some(self.eval(e, &Scope::default()))
    }

    /// The declared type of a place, where the index can tell it.
    pub fn place_type(&self, expr: &Expr) -> Option<CType> {
        place_type(self.program, None, expr)
    }

    fn call(&mut self, callee: &Expr, args: &[Expr], scope: &Scope) -> Result<Num, Unknown> {
        let ExprKind::Ident(name) = &callee.kind else {
            return Err(Unknown::new(format!("call through `{callee}`")));
        };
        if let Some(v) = self.math_call(name, args, scope)? {
            return Ok(v);
        }
        // `(T)(x)` read as a call of a typedef name: the cast.
        if args.len() == 1 && self.program.is_type_name(name) {
            let v = self.eval(&args[0], scope)?;
            let ty = self
                .program
                .resolve_type(&crate::parse::type_from_name(name));
            return Ok(v.convert(&ty, self.target()));
        }
        if let Some(m) = self.program.active_macro_in(name, self.file) {
            if let Some(params) = &m.params {
                let m = m.clone();
                let params = params.clone();
                return self.guarded(format!("macro {name}"), |ev| {
                    let text = substitute_macro(&m.body, &params, args);
                    ev.record(
                        m.span.file,
                        m.span.line,
                        format!("#define {}({}) {}", m.name, params.join(", "), m.body),
                    );
                    let Some(body) = crate::parse::parse_expression(&text, callee.span) else {
                        return Err(Unknown::new(format!(
                            "macro {name} does not expand to an expression"
                        )));
                    };
                    ev.eval(&body, scope)
                });
            }
        }
        let resolved = match scope.function {
            Some(caller) => self.program.resolve_call(caller, name),
            None => self.program.function_by_name(name),
        };
        let Some(f) = resolved else {
            // What a function outside the scan returns is a value of the run.
            return Err(Unknown::runtime(
                &format!("{name}()"),
                format!("{name}() is not defined in the scanned files"),
            ));
        };
        let function = self.program.function(f).clone();
        self.guarded(format!("function {name}"), |ev| {
            let mut inner = Scope::in_function(f);
            for (p, a) in function.params.iter().zip(args) {
                let step = ev.record_named(
                    callee.span.file,
                    callee.span.line,
                    format!("{name}: {} = {a}", p.name),
                    Some(&p.name),
                );
                let pty = ev.program.resolve_type(&p.ty);
                let v = ev.eval(a, scope).map(|v| v.convert(&pty, ev.target()));
                ev.fill(step, &v);
                inner.values.insert(p.name.clone(), v?);
            }
            ev.record(
                function.name_span.file,
                function.name_span.line,
                format!(
                    "{}({})",
                    function.name,
                    function
                        .params
                        .iter()
                        .map(|p| p.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            );
            let returns = ev.program.resolve_type(&function.returns);
            ev.run_body(&function.body(), &mut inner)?
                .map(|v| v.convert(&returns, ev.target()))
                .ok_or_else(|| Unknown::new(format!("{name}() returns no constant")))
        })
    }

    /// Runs a helper function's straight-line body: declarations, assignments to locals,
    /// and the first return.
    fn run_body(&mut self, body: &[Stmt], scope: &mut Scope) -> Result<Option<Num>, Unknown> {
        for stmt in body {
            match stmt {
                Stmt::Decl(decls) => {
                    for d in decls {
                        if let Some(Initializer::Expr(e)) = &d.init {
                            let v = self.eval(e, scope)?;
                            let ty = self.program.resolve_type(&d.ty);
                            scope
                                .values
                                .insert(d.name.clone(), v.convert(&ty, self.target()));
                        }
                    }
                }
                Stmt::Expr(Expr {
                    kind: ExprKind::Assign { op, target, value },
                    ..
                }) => {
                    let ExprKind::Ident(name) = &target.kind else {
                        return Err(Unknown::new("helper writes outside its locals"));
                    };
                    let mut v = self.eval(value, scope)?;
                    if let Some(op) = op {
                        let old = scope
                            .values
                            .get(&**name)
                            .copied()
                            .ok_or_else(|| Unknown::new("helper reads an unset local"))?;
                        v = num::binary(*op, old, v, self.target())?.value;
                    }
                    scope.values.insert(name.to_string(), v);
                }
                Stmt::Return(Some(e), _) => return Ok(Some(self.eval(e, scope)?)),
                Stmt::Block(inner) => {
                    if let Some(v) = self.run_body(inner, scope)? {
                        return Ok(Some(v));
                    }
                }
                _ => return Err(Unknown::new("helper body has control flow")),
            }
        }
        Ok(None)
    }

    fn math_call(
        &mut self,
        name: &str,
        args: &[Expr],
        scope: &Scope,
    ) -> Result<Option<Num>, Unknown> {
        let base = name.strip_suffix('f').filter(|b| is_math(b));
        let (base, single) = match base {
            Some(b) => (b, true),
            None if is_math(name) => (name, false),
            None => return Ok(None),
        };
        if self.program.function_by_name(name).is_some() || self.program.is_macro(name) {
            return Ok(None);
        }
        let mut values = Vec::new();
        for a in args {
            values.push(self.eval(a, scope)?.as_f64());
        }
        let arg = |i: usize| {
            values
                .get(i)
                .copied()
                .ok_or_else(|| Unknown::new(format!("{name}() needs more arguments")))
        };
        let v = match base {
            "exp" => arg(0)?.exp(),
            "log" => arg(0)?.ln(),
            "log10" => arg(0)?.log10(),
            "log2" => arg(0)?.log2(),
            "sqrt" => arg(0)?.sqrt(),
            "sin" => arg(0)?.sin(),
            "cos" => arg(0)?.cos(),
            "tan" => arg(0)?.tan(),
            "atan" => arg(0)?.atan(),
            "fabs" => arg(0)?.abs(),
            "floor" => arg(0)?.floor(),
            "ceil" => arg(0)?.ceil(),
            "round" => arg(0)?.round(),
            "pow" => arg(0)?.powf(arg(1)?),
            "fmin" => arg(0)?.min(arg(1)?),
            "fmax" => arg(0)?.max(arg(1)?),
            "exp2" => arg(0)?.exp2(),
            "expm1" => arg(0)?.exp_m1(),
            _ => return Ok(None),
        };
        if !v.is_finite() {
            return Err(Unknown::new(format!("{name}() gives no finite value here")));
        }
        Ok(Some(Num::Float {
            value: if single { v as f32 as f64 } else { v },
            single,
        }))
    }
}

/// Adds a value unless one equal to it (to the precision of a `float`, for floating values:
/// `0.080 * 0.2` in double and `0.080f * 0.2f` are one configuration) is there.
fn push_unique(values: &mut Vec<Num>, v: Num) {
    let same = |a: &Num| match (a, &v) {
        (Num::Float { value: x, .. }, Num::Float { value: y, .. }) => {
            (x - y).abs() <= 1e-6 * x.abs().max(y.abs())
        }
        _ => *a == v,
    };
    if !values.iter().any(same) {
        values.push(v);
    }
}

/// Whether `name` is a C math function the evaluator computes (`expf`, `sqrt`...).
pub fn is_math_function(name: &str) -> bool {
    is_math(name) || name.strip_suffix('f').is_some_and(is_math)
}

fn is_math(name: &str) -> bool {
    matches!(
        name,
        "exp"
            | "log"
            | "log10"
            | "log2"
            | "sqrt"
            | "sin"
            | "cos"
            | "tan"
            | "atan"
            | "fabs"
            | "floor"
            | "ceil"
            | "round"
            | "pow"
            | "fmin"
            | "fmax"
            | "exp2"
            | "expm1"
    )
}

/// C integer literal typing (C11 6.4.4.1p5), simplified to the first type that holds it.
fn int_literal(value: u128, unsigned: bool, long: bool, target: Target) -> Num {
    let candidates: Vec<(u8, bool)> = match (unsigned, long) {
        (false, false) => vec![(target.int_bits, true), (32, true), (64, true), (64, false)],
        (true, false) => vec![(target.int_bits, false), (32, false), (64, false)],
        (false, true) => vec![(32, true), (64, true), (64, false)],
        (true, true) => vec![(32, false), (64, false)],
    };
    for (bits, signed) in candidates {
        let ty = IntType { bits, signed };
        let (_, hi) = num::int_range(ty);
        if (value as i128) <= hi && value <= i128::MAX as u128 {
            return Num::Int {
                value: value as i128,
                ty,
            };
        }
    }
    Num::int(
        value as i128,
        IntType {
            bits: 64,
            signed: false,
        },
    )
}

/// Replaces a function-like macro's parameters by the argument texts, parenthesised only
/// where the macro body already does (the text is parsed again, so this keeps C meaning).
pub fn substitute_macro(body: &str, params: &[String], args: &[Expr]) -> String {
    let text = body.replace("##", "");
    crate::index::map_identifiers(&text, |ident| {
        params
            .iter()
            .position(|p| p == ident)
            .and_then(|i| args.get(i))
            .map(|a| format!("({a})"))
    })
}

/// A signed operation whose result does not fit its type has no value in C (C11 6.5p5),
/// so a constant computed that way is not known, whatever a wrap would give.
/// A library function that only clears or fills memory it is handed with a constant
/// (`memset(&cfg, 0, sizeof cfg)` before the fields are set).
fn is_clearing_function(name: &str) -> bool {
    matches!(name, "memset" | "bzero" | "explicit_bzero" | "memset_s")
}

fn overflowed(expr: &Expr) -> Unknown {
    Unknown::new(format!(
        "`{expr}` overflows its signed type (undefined, C11 6.5p5)"
    ))
}

/// The width in bits of an integer type on the target, or `None` for a type that is not
/// an integer (or not known).
pub fn integer_bits(ty: &CType, target: Target) -> Option<u8> {
    match ty {
        CType::FixedInt(t) => Some(t.bits),
        CType::PlainInt { .. } => Some(target.int_bits),
        CType::Bool => Some(1),
        _ => None,
    }
}

/// The width of `expr`'s type after the integer promotions (C11 6.3.1.1p2, 6.3.1.8),
/// estimated from the places and casts it is made of: the widest of their integer types,
/// and at least `int`. Used to tell whether a shift count is defined (C11 6.5.7p3).
pub fn promoted_bits(program: &Program, function: Option<FuncRef>, expr: &Expr) -> u8 {
    let target = program.options.target;
    let mut bits = target.int_bits;
    expr.walk(&mut |e| {
        let ty = match &e.kind {
            ExprKind::Cast { ty, .. } => Some(ty.clone()),
            ExprKind::Ident(_) | ExprKind::Field { .. } | ExprKind::Index { .. } => {
                place_type(program, function, e)
            }
            _ => None,
        };
        if let Some(b) = ty.as_ref().and_then(|t| integer_bits(t, target)) {
            bits = bits.max(b);
        }
    });
    bits
}

/// The declared type of a place expression in a function (locals, parameters, globals,
/// struct fields through `.` and `->`, array elements).
pub fn place_type(program: &Program, function: Option<FuncRef>, expr: &Expr) -> Option<CType> {
    let ty = match &expr.kind {
        ExprKind::Ident(name) => {
            let local = function.and_then(|f| local_type(program.function(f), name));
            match local {
                Some(t) => t,
                None => program
                    .global_seen_from(name, function.map(|f| f.file))?
                    .ty
                    .clone(),
            }
        }
        ExprKind::Field { base, arrow, field } => {
            let mut base_ty = program.resolve_type(&place_type(program, function, base)?);
            if *arrow {
                base_ty = match base_ty {
                    CType::Pointer(inner) | CType::Array(inner, _) => *inner,
                    other => other,
                };
            }
            let fields = program.struct_fields(&base_ty)?;
            fields.iter().find(|f| *f.name == **field)?.ty.clone()
        }
        ExprKind::Index { base, .. } => {
            match program.resolve_type(&place_type(program, function, base)?) {
                CType::Array(inner, _) | CType::Pointer(inner) => *inner,
                _ => return None,
            }
        }
        ExprKind::Unary {
            op: UnaryOp::Deref,
            arg,
        } => match program.resolve_type(&place_type(program, function, arg)?) {
            CType::Pointer(inner) | CType::Array(inner, _) => *inner,
            _ => return None,
        },
        ExprKind::Unary {
            op: UnaryOp::AddrOf,
            arg,
        } => CType::Pointer(Box::new(place_type(program, function, arg)?)),
        ExprKind::Cast { ty, .. } => ty.clone(),
        // Pointer arithmetic (`(f + i)->y`): the pointer's type (C11 6.5.6).
        // The difference of two pointers is an integer.
        ExprKind::Binary {
            op: op @ (BinaryOp::Add | BinaryOp::Sub),
            lhs,
            rhs,
        } => {
            let pointer = |e: &Expr| match program.resolve_type(&place_type(program, function, e)?)
            {
                CType::Pointer(inner) | CType::Array(inner, _) => Some(CType::Pointer(inner)),
                _ => None,
            };
            match (pointer(lhs), pointer(rhs), op) {
                (Some(p), None, _) => p,
                (None, Some(p), BinaryOp::Add) => p,
                _ => return None,
            }
        }
        // A call: what the function returns, from its definition or its prototype (an
        // ADC driver's `uint16_t adc_read(void);`).
        ExprKind::Call { callee, .. } => {
            let ExprKind::Ident(name) = &callee.kind else {
                return None;
            };
            program.return_type(name, function.map(|f| f.file))?
        }
        _ => return None,
    };
    Some(program.resolve_type(&ty))
}

/// The type of a local variable or parameter of `function`.
pub fn local_type(function: &Function, name: &str) -> Option<CType> {
    if let Some(p) = function.params.iter().find(|p| p.name == name) {
        return Some(p.ty.clone());
    }
    let mut found = None;
    find_local_decl(&function.body(), name, &mut found);
    found.map(|d| d.ty)
}

/// The item of a braced struct initialiser that sets the field at `position` of `fields`:
/// by its designator (`.k = ...`) or by its place in the list. None when no item sets it,
/// or a designator names no field.
fn struct_member<'a>(
    fields: &[Param],
    items: &'a [(Option<String>, Initializer)],
    position: usize,
) -> Option<&'a Initializer> {
    let mut index = 0;
    for (designator, item) in items {
        let this = match designator {
            Some(name) => fields.iter().position(|f| &f.name == name)?,
            None => index,
        };
        index = this + 1;
        if this == position {
            return Some(item);
        }
    }
    None
}

/// The declaration of a local variable in a function body.
/// Whether the local `name` of `function` is declared once, never assigned after and its
/// address never taken: then its value is its initialiser wherever it is read.
fn single_assignment(function: &Function, name: &str) -> bool {
    let mut declarations = 0;
    count_local_decls(&function.body(), name, &mut declarations);
    if declarations != 1 {
        return false;
    }
    // The program's write index leaves a function's locals out: look in the body.
    let mut changed = false;
    crate::index::visit_stmts(&function.body(), &mut |e| match &e.kind {
        ExprKind::Unary {
            op: UnaryOp::AddrOf,
            arg,
        } => changed |= arg.root_ident() == Some(name),
        ExprKind::Assign { target, .. } | ExprKind::IncDec { target, .. } => {
            changed |= target.root_ident() == Some(name)
        }
        _ => {}
    });
    !changed
}

fn count_local_decls(stmts: &[Stmt], name: &str, count: &mut usize) {
    for stmt in stmts {
        match stmt {
            Stmt::Decl(decls) => *count += decls.iter().filter(|d| d.name == name).count(),
            Stmt::Block(items) => count_local_decls(items, name, count),
            Stmt::If {
                then, otherwise, ..
            } => {
                count_local_decls(std::slice::from_ref(then), name, count);
                if let Some(o) = otherwise {
                    count_local_decls(std::slice::from_ref(o), name, count);
                }
            }
            Stmt::Loop { init, body, .. } => {
                count_local_decls(init, name, count);
                count_local_decls(std::slice::from_ref(body), name, count);
            }
            Stmt::Switch { body, .. } => count_local_decls(std::slice::from_ref(body), name, count),
            Stmt::Conditional(branches) => {
                for (_, b) in branches {
                    count_local_decls(b, name, count);
                }
            }
            _ => {}
        }
    }
}

pub fn find_local(function: &Function, name: &str) -> Option<LocalDecl> {
    let mut found = None;
    find_local_decl(&function.body(), name, &mut found);
    found
}

fn find_local_decl(stmts: &[Stmt], name: &str, found: &mut Option<LocalDecl>) {
    for stmt in stmts {
        if found.is_some() {
            return;
        }
        match stmt {
            Stmt::Decl(decls) => {
                if let Some(d) = decls.iter().find(|d| d.name == name) {
                    *found = Some(d.clone());
                }
            }
            Stmt::Block(items) => find_local_decl(items, name, found),
            Stmt::If {
                then, otherwise, ..
            } => {
                find_local_decl(std::slice::from_ref(then), name, found);
                if let Some(o) = otherwise {
                    find_local_decl(std::slice::from_ref(o), name, found);
                }
            }
            Stmt::Loop { init, body, .. } => {
                find_local_decl(init, name, found);
                find_local_decl(std::slice::from_ref(body), name, found);
            }
            Stmt::Switch { body, .. } => find_local_decl(std::slice::from_ref(body), name, found),
            Stmt::Conditional(branches) => {
                for (_, b) in branches {
                    find_local_decl(b, name, found);
                }
            }
            _ => {}
        }
    }
}

impl crate::index::CallSite {
    /// The call as C text.
    pub fn to_string_call(&self) -> String {
        let args: Vec<String> = self.args.iter().map(|a| a.to_string()).collect();
        format!("{}({})", self.callee, args.join(", "))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::index::ProgramOptions;
    use crate::parse::{parse_expression, parse_file};

    fn program(src: &str) -> Program {
        let ir = parse_file(FileId(0), src.as_bytes());
        Program::build(vec![ir], vec!["a.c".into()], ProgramOptions::default())
    }

    fn value(p: &Program, text: &str) -> Result<Num, Unknown> {
        let e = parse_expression(text, Span::default()).unwrap();
        Evaluator::new(p).eval(&e, &Scope::default())
    }

    #[test]
    fn const_tables_are_read_by_element() {
        // C11 6.7.9 par. 21: elements a list leaves out are zero.
        let p = program(
            "#define FIX(x) ((int)(x * 32768))\nstatic const float g[3] = {0.5f, 0.25f};\nstatic const float same[2] = {0.125f, 0.125f};\nint f(int i) {\n    static int const a[2] = {FIX(1.0) >> 1, FIX(0.5) >> 1};\n    return a[1] + i;\n}\n",
        );
        assert_eq!(value(&p, "g[1]").unwrap().as_f64(), 0.25);
        assert_eq!(value(&p, "g[2]").unwrap().as_f64(), 0.0);
        assert_eq!(value(&p, "same[k]").unwrap().as_f64(), 0.125);
        assert!(value(&p, "g[k]").is_err());
        let f = p.function_by_name("f").unwrap();
        let e = parse_expression("a[1]", Span::default()).unwrap();
        let v = Evaluator::new(&p).eval(&e, &Scope::in_function(f));
        assert_eq!(v.unwrap().as_f64(), 8192.0);
        // A local table filled from a parameter is not the global of the same name.
        let p = program(
            "static const float a = 0.5f;\nfloat g(float a) {\n    const float k[2] = {a, a};\n    return k[0];\n}\n",
        );
        let g = p.function_by_name("g").unwrap();
        let e = parse_expression("k[0]", Span::default()).unwrap();
        assert!(Evaluator::new(&p).eval(&e, &Scope::in_function(g)).is_err());
    }

    #[test]
    fn define_chains_and_enums_resolve() {
        let p = program(
            "#define RATE_HZ 500\n#define DT (1.0f/RATE_HZ)\nenum { SHIFT_A = 2, SHIFT_B };\n",
        );
        assert_eq!(
            value(&p, "DT").unwrap().as_f64(),
            (1.0f32 / 500.0f32) as f64
        );
        assert_eq!(value(&p, "SHIFT_B").unwrap().as_f64(), 3.0);
    }

    #[test]
    fn integer_division_before_conversion_gives_zero() {
        // Source: C11 6.5.5p6 and 6.3.1.4: 1/8 is computed in int, then converted.
        let p = program("float a = 1/8;\n");
        assert_eq!(value(&p, "a").unwrap().as_f64(), 0.0);
    }

    #[test]
    fn real_arithmetic_divides_integers_exactly_and_keeps_conversions() {
        // Source: C11 6.5.5p6 (1/8 truncates to 0 in C); real arithmetic gives 0.125, and
        // the conversion to a declared int (C11 6.3.1.4) still truncates 15/2 to 7.
        let p = program("#define K (1/3*2.0f)\nfloat a = 1/8;\nconst int n = 15/2;\n");
        let real = |text: &str| {
            let e = parse_expression(text, Span::default()).unwrap();
            let mut ev = Evaluator::new(&p);
            ev.real_arithmetic = true;
            ev.eval(&e, &Scope::default()).unwrap().as_f64()
        };
        assert_eq!(value(&p, "a").unwrap().as_f64(), 0.0);
        assert_eq!(real("a"), 0.125);
        assert_eq!(value(&p, "K").unwrap().as_f64(), 0.0);
        assert!((real("K") - 2.0 / 3.0).abs() < 1e-7, "{}", real("K"));
        assert_eq!(real("n"), 7.0);
        assert_eq!(real("1.0f / 3"), (1.0f32 / 3.0f32) as f64);
    }

    #[test]
    fn init_function_fields_resolve_through_pointer_params() {
        let src = "typedef struct { float k; float y; } lpf_t;\nstatic lpf_t g_oven;\n\
                   static float gain(float fc, float dt) { return dt / (1.0f/(2.0f*3.14159f*fc) + dt); }\n\
                   void lpf_init(lpf_t *f, float k) { f->k = k; f->y = 0; }\n\
                   void setup(void) { lpf_init(&g_oven, gain(5.0f, 0.001f)); }\n";
        let p = program(src);
        let mut ev = Evaluator::new(&p);
        let e = parse_expression("g_oven.k", Span::default()).unwrap();
        let k = ev.eval(&e, &Scope::default()).unwrap().as_f64();
        // The fixture's rounded pi on purpose: firmware writes it that way.
        #[allow(clippy::approx_constant)]
        let rc = 1.0f32 / (2.0f32 * 3.14159f32 * 5.0f32);
        let expect = 0.001f32 / (rc + 0.001f32);
        assert!((k - expect as f64).abs() < 1e-7, "{k} vs {expect}");
        assert!(ev.chain.len() >= 3, "{:?}", ev.chain);
    }

    #[test]
    fn locals_set_once_in_an_init_function_fold() {
        let src = "typedef struct { float a; float y; } lp_t;\nstatic lp_t g_vent;\n\
                   void lp_init(lp_t *f, float fc, float dt) {\n\
                     float rc = 1.0f / (2.0f * 3.14159f * fc);\n\
                     f->a = dt / (rc + dt); f->y = 0; }\n\
                   void setup(void) { lp_init(&g_vent, 5.0f, 0.01f); }\n";
        let p = program(src);
        let mut ev = Evaluator::new(&p);
        let e = parse_expression("g_vent.a", Span::default()).unwrap();
        let a = ev.eval(&e, &Scope::default()).unwrap().as_f64();
        #[allow(clippy::approx_constant)]
        let rc = 1.0f32 / (2.0f32 * 3.14159f32 * 5.0f32);
        let expect = 0.01f32 / (rc + 0.01f32);
        assert!((a - expect as f64).abs() < 1e-7, "{a} vs {expect}");
        assert!(
            ev.chain.iter().any(|c| c.text.starts_with("float rc = ")),
            "the local is a step of the derivation: {:?}",
            ev.chain
        );
    }

    #[test]
    fn locals_written_again_or_through_their_address_stay_unknown() {
        for body in [
            "float rc = 0.5f; if (fc > 1) rc = 0.25f; f->a = dt / (rc + dt);",
            "float rc = 0.5f; rc *= 2; f->a = dt / (rc + dt);",
            "float rc = 0.5f; tune(&rc); f->a = dt / (rc + dt);",
            "float rc = 0.5f; { float rc = 0.25f; f->y = rc; } f->a = dt / (rc + dt);",
        ] {
            let src = format!(
                "typedef struct {{ float a; float y; }} lp_t;\nstatic lp_t g_vent;\n\
                 void tune(float *x);\n\
                 void lp_init(lp_t *f, float fc, float dt) {{ {body} }}\n\
                 void setup(void) {{ lp_init(&g_vent, 5.0f, 0.01f); }}\n"
            );
            let p = program(&src);
            let mut ev = Evaluator::new(&p);
            let e = parse_expression("g_vent.a", Span::default()).unwrap();
            let v = ev.eval(&e, &Scope::default());
            assert!(
                v.is_err(),
                "{body}: a local that can change is not its initialiser: {v:?} {:?}",
                ev.chain
            );
        }
    }

    #[test]
    fn cycles_and_parameters_are_unknown_not_loops() {
        let p = program("#define A (B+1)\n#define B (A+1)\nvoid f(float dt) { }\n");
        assert!(value(&p, "A").is_err());
        assert!(value(&p, "1/0").is_err());
        assert!(value(&p, "1 << 40").is_err());
    }

    #[test]
    fn math_functions_fold() {
        let p = program("#define FC 2.0\n#define DT 0.01\n");
        let v = value(&p, "1 - exp(-2*M_PI*FC*DT)").unwrap().as_f64();
        assert!((v - (1.0 - (-2.0 * std::f64::consts::PI * 0.02f64).exp())).abs() < 1e-15);
    }
}

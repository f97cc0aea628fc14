//! Finds the smoothers: every assignment whose target appears on its own right side, put
//! in affine form in that target, and kept when its weights make a low-pass.
//!
//! Each function body is walked in order with the values of its local temporaries, so that
//! an update spread over statements (`d = u - y; y += d >> 3;`, a value computed in a
//! local and stored back into a field) is seen whole; function-like macros are expanded at
//! their call sites. The new value is read as a polynomial over atoms (`poly`): the state's
//! coefficient `c_y` gives `alpha = 1 - c_y`; the rest must be the input weighted so that
//! the DC gain is one (or a scaled state, or a blend whose weights miss one, which is a bug
//! worth listing). Coefficients are then evaluated (`eval`) where the update stands: for a
//! filter function updated through a pointer parameter, once per call site, with that
//! instance's own init call. Integer forms are run (`sim`) to measure the dead band.
//! Rates come from `context`; figures from `metrics` are left to the caller.

pub mod poly;
pub mod sim;

use crate::context::{self, RateInfo};
use crate::eval::{self, num::Num, ChainStep, Evaluator, Scope};
use crate::index::{FuncRef, Program};
use crate::ir::*;
use poly::{AtomId, Lcg, Monomial, Poly};
use std::collections::HashMap;

/// How the smoother is built.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Form {
    /// A first-order recursive smoother (EMA) with the state in output units.
    Ema,
    /// An EMA whose state holds the output times a factor (`acc += u - (acc >> k)`).
    ScaledState,
    /// A running-sum moving average over a ring buffer.
    MovingAverage,
}

impl Form {
    pub fn name(self) -> &'static str {
        match self {
            Form::Ema => "ema",
            Form::ScaledState => "ema-scaled-state",
            Form::MovingAverage => "moving-average",
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Arithmetic {
    Float,
    Integer,
    Fixed,
}

impl Arithmetic {
    pub fn name(self) -> &'static str {
        match self {
            Arithmetic::Float => "float",
            Arithmetic::Integer => "integer",
            Arithmetic::Fixed => "fixed",
        }
    }
}

/// Where the state lives, which decides whether it survives between calls.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Storage {
    StaticLocal,
    Global,
    Field,
    ArrayElement,
    Pointer,
    /// A plain local variable: it starts afresh on every call.
    Local,
}

impl Storage {
    pub fn name(self) -> &'static str {
        match self {
            Storage::StaticLocal => "static-local",
            Storage::Global => "global",
            Storage::Field => "field",
            Storage::ArrayElement => "array-element",
            Storage::Pointer => "pointer",
            Storage::Local => "local",
        }
    }
}

/// The smoothing coefficient as far as it can be known statically.
#[derive(Debug, Clone, PartialEq)]
pub enum Coefficient {
    Known(f64),
    /// Computed from a quantity measured at run time (a `dt`): the filter adapts.
    Adaptive {
        formula: String,
        depends_on: String,
    },
    Unknown {
        formula: String,
        reason: String,
    },
}

impl Coefficient {
    pub fn value(&self) -> Option<f64> {
        match self {
            Coefficient::Known(v) => Some(*v),
            _ => None,
        }
    }
}

/// The coefficient under another preprocessor branch.
#[derive(Debug, Clone, PartialEq)]
pub struct Variant {
    pub condition: String,
    pub macro_name: String,
    pub alpha: Option<f64>,
    pub window: Option<u32>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Smoother {
    pub function: String,
    pub function_ref: FuncRef,
    /// The state as C text, in the instance's own terms (`g_oven.y`, not `f->y`).
    pub state: String,
    /// The update statement, or for an instance of a filter function or macro, its call.
    pub span: Span,
    /// The update inside the filter function or macro, for instances.
    pub definition: Option<Span>,
    pub form: Form,
    pub arithmetic: Arithmetic,
    pub storage: Storage,
    pub alpha: Coefficient,
    pub window: Option<u32>,
    /// Sum of the input weights over `alpha`: 1 for a correct smoother.
    pub dc_gain: Option<f64>,
    /// For a scaled state, the factor between state and output.
    pub scale: Option<f64>,
    pub dead_band: Option<sim::DeadBand>,
    pub chain: Vec<ChainStep>,
    pub rate: RateInfo,
    /// When the spec sets the rate: the rate the code's own derivation gave, if any.
    pub code_rate: Option<RateInfo>,
    pub variants: Vec<Variant>,
    /// The update as C text after temporaries and macros were put in.
    pub update: String,
    pub state_type: Option<CType>,
    /// The input signals as C text.
    pub inputs: Vec<String>,
    /// The update compiled to run with C semantics (state in slot 0, inputs after), when
    /// every constant in it is known.
    pub simulation: Option<sim::Update>,
    /// Index (in the result list) of the smoother whose state feeds this one.
    pub upstream: Option<usize>,
}

/// Something recognition wants a reader to know: a form it saw but could not resolve.
#[derive(Debug, Clone, PartialEq)]
pub struct Note {
    pub span: Span,
    pub message: String,
}

#[derive(Debug, Clone, Default)]
pub struct Recognition {
    pub smoothers: Vec<Smoother>,
    pub notes: Vec<Note>,
}

/// Options that change recognition.
#[derive(Debug, Clone, Default)]
pub struct RecogniseOptions {
    /// A rate to assume for smoothers whose code gives none (`--rate`).
    pub default_rate_hz: Option<f64>,
}

const MAX_MACRO_DEPTH: u32 = 8;
const MAX_INSTANCE_DEPTH: u32 = 4;

/// Finds every smoother of the program.
pub fn recognise(program: &Program, options: &RecogniseOptions) -> Recognition {
    use rayon::prelude::*;
    let functions: Vec<FuncRef> = program.functions().collect();
    // Functions are independent of each other here: walk and judge them in parallel, then
    // put the results back in one deterministic order.
    let parts: Vec<Recognition> = functions
        .par_iter()
        .map(|&f| {
            let mut part = Recognition::default();
            let function = program.function(f);
            if function.name == "tauscan_snippet" || !program.condition_holds(&function.condition) {
                return part;
            }
            let mut walker = Walker::new(program, f);
            walker.block(&function.body);
            for candidate in walker.finish() {
                expand_candidate(program, candidate, 0, &mut part, options);
            }
            part
        })
        .collect();
    let mut result = Recognition::default();
    for part in parts {
        result.smoothers.extend(part.smoothers);
        result.notes.extend(part.notes);
    }
    link_cascades(&mut result.smoothers);
    result.smoothers.sort_by(|a, b| {
        (
            program.path(a.span.file),
            a.span.line,
            a.span.column,
            &a.state,
        )
            .cmp(&(
                program.path(b.span.file),
                b.span.line,
                b.span.column,
                &b.state,
            ))
    });
    // Sorting moved the smoothers: link again so upstream indexes are right.
    link_cascades(&mut result.smoothers);
    result
}

/// An update found in a function body, before it is judged.
#[derive(Debug, Clone)]
struct Candidate {
    function: FuncRef,
    state: Expr,
    new_value: Expr,
    span: Span,
    definition: Option<Span>,
    /// Other writes of the same function (for the moving-average ring buffer).
    buffer_writes: Vec<(String, String)>,
    /// Local temporaries left as names in the update, with their values, for evaluation.
    locals: HashMap<String, Expr>,
    /// Set for a buffer that is summed afresh each call after the new sample is stored:
    /// the loop bound (the window).
    resummed_bound: Option<Expr>,
}

impl Candidate {
    fn scope(&self) -> Scope {
        Scope {
            function: Some(self.function),
            values: HashMap::new(),
            exprs: self.locals.clone(),
        }
    }
}

/// Turns a candidate into smoothers: itself, or one per call site when its state is
/// reached through a parameter of its function.
fn expand_candidate(
    program: &Program,
    candidate: Candidate,
    depth: u32,
    out: &mut Recognition,
    options: &RecogniseOptions,
) {
    let function = program.function(candidate.function);
    let through_param = candidate
        .state
        .root_ident()
        .and_then(|root| function.params.iter().position(|p| p.name == root));
    if let Some(_position) = through_param {
        // Only the calls that reach this very function (a static one of the same name in
        // another file is another function).
        let calls: Vec<_> = program
            .calls_to(&function.name)
            .filter(|c| program.resolve_call(c.caller, &c.callee) == Some(candidate.function))
            .cloned()
            .collect();
        if !calls.is_empty() && depth < MAX_INSTANCE_DEPTH {
            for call in calls {
                let mut map = HashMap::new();
                for (p, a) in function.params.iter().zip(&call.args) {
                    map.insert(p.name.clone(), a.clone());
                }
                let instance = Candidate {
                    function: call.caller,
                    state: simplify(&substitute_idents(&candidate.state, &map)),
                    new_value: simplify(&substitute_idents(&candidate.new_value, &map)),
                    span: call.span,
                    definition: Some(candidate.definition.unwrap_or(candidate.span)),
                    buffer_writes: candidate
                        .buffer_writes
                        .iter()
                        .map(|(t, v)| (t.clone(), v.clone()))
                        .collect(),
                    locals: candidate
                        .locals
                        .iter()
                        .map(|(k, v)| (k.clone(), simplify(&substitute_idents(v, &map))))
                        .collect(),
                    resummed_bound: candidate
                        .resummed_bound
                        .as_ref()
                        .map(|b| simplify(&substitute_idents(b, &map))),
                };
                expand_candidate(program, instance, depth + 1, out, options);
            }
            return;
        }
    }
    if let Some(s) = analyse(program, &candidate, options) {
        out.smoothers.push(s);
    }
}

/// Replaces identifiers by expressions (parameters by a call's arguments).
fn substitute_idents(expr: &Expr, map: &HashMap<String, Expr>) -> Expr {
    let mut out = expr.clone();
    substitute_in_place(&mut out, &|e: &Expr| match &e.kind {
        ExprKind::Ident(name) => map.get(name).cloned(),
        _ => None,
    });
    out
}

fn substitute_in_place(expr: &mut Expr, f: &dyn Fn(&Expr) -> Option<Expr>) {
    if let Some(replacement) = f(expr) {
        *expr = replacement;
        return;
    }
    match &mut expr.kind {
        ExprKind::Field { base, .. } => substitute_in_place(base, f),
        ExprKind::Index { base, index } => {
            substitute_in_place(base, f);
            substitute_in_place(index, f);
        }
        ExprKind::Unary { arg, .. } | ExprKind::Cast { arg, .. } => substitute_in_place(arg, f),
        ExprKind::Binary { lhs, rhs, .. } => {
            substitute_in_place(lhs, f);
            substitute_in_place(rhs, f);
        }
        ExprKind::Assign { target, value, .. } => {
            substitute_in_place(target, f);
            substitute_in_place(value, f);
        }
        ExprKind::IncDec { target, .. } => substitute_in_place(target, f),
        ExprKind::Call { callee, args } => {
            substitute_in_place(callee, f);
            for a in args {
                substitute_in_place(a, f);
            }
        }
        ExprKind::Conditional {
            cond,
            then,
            otherwise,
        } => {
            substitute_in_place(cond, f);
            substitute_in_place(then, f);
            substitute_in_place(otherwise, f);
        }
        ExprKind::Comma(items) => {
            for i in items {
                substitute_in_place(i, f);
            }
        }
        ExprKind::Int { .. }
        | ExprKind::Float { .. }
        | ExprKind::Ident(_)
        | ExprKind::Opaque(_) => {}
    }
}

/// `(&x)->f` is `x.f` and `*&x` is `x`: the forms parameter substitution leaves.
fn simplify(expr: &Expr) -> Expr {
    let mut out = expr.clone();
    simplify_in_place(&mut out);
    out
}

fn simplify_in_place(expr: &mut Expr) {
    match &mut expr.kind {
        ExprKind::Field { base, arrow, .. } => {
            simplify_in_place(base);
            if *arrow {
                if let ExprKind::Unary {
                    op: UnaryOp::AddrOf,
                    arg,
                } = &base.kind
                {
                    let inner = (**arg).clone();
                    **base = inner;
                    *arrow = false;
                }
            }
        }
        ExprKind::Unary { op, arg } => {
            simplify_in_place(arg);
            if *op == UnaryOp::Deref {
                if let ExprKind::Unary {
                    op: UnaryOp::AddrOf,
                    arg: inner,
                } = &arg.kind
                {
                    *expr = (**inner).clone();
                }
            }
        }
        ExprKind::Index { base, index } => {
            simplify_in_place(base);
            simplify_in_place(index);
        }
        ExprKind::Cast { arg, .. } => simplify_in_place(arg),
        ExprKind::Binary { lhs, rhs, .. } => {
            simplify_in_place(lhs);
            simplify_in_place(rhs);
        }
        ExprKind::Assign { target, value, .. } => {
            simplify_in_place(target);
            simplify_in_place(value);
        }
        ExprKind::IncDec { target, .. } => simplify_in_place(target),
        ExprKind::Call { callee, args } => {
            simplify_in_place(callee);
            for a in args {
                simplify_in_place(a);
            }
        }
        ExprKind::Conditional {
            cond,
            then,
            otherwise,
        } => {
            simplify_in_place(cond);
            simplify_in_place(then);
            simplify_in_place(otherwise);
        }
        ExprKind::Comma(items) => {
            for i in items {
                simplify_in_place(i);
            }
        }
        ExprKind::Int { .. }
        | ExprKind::Float { .. }
        | ExprKind::Ident(_)
        | ExprKind::Opaque(_) => {}
    }
}

/// A local variable's current value, as an expression of the function's other names.
#[derive(Debug, Clone)]
struct LocalValue {
    expr: Expr,
    /// Where the value last took a self-referencing update (and the macro it came from).
    origin: Option<(Span, Option<Span>)>,
}

struct Walker<'p> {
    program: &'p Program,
    function: FuncRef,
    env: HashMap<String, LocalValue>,
    /// Static locals and parameters are not temporaries.
    statics: Vec<String>,
    candidates: Vec<(Candidate, Option<String>)>,
    /// The macro whose expansion is being walked, with the call's span.
    expansion: Option<(Span, Span)>,
    macro_depth: u32,
    writes: Vec<(String, String)>,
}

impl<'p> Walker<'p> {
    fn new(program: &'p Program, function: FuncRef) -> Walker<'p> {
        Walker {
            program,
            function,
            env: HashMap::new(),
            statics: Vec::new(),
            candidates: Vec::new(),
            expansion: None,
            macro_depth: 0,
            writes: Vec::new(),
        }
    }

    fn func(&self) -> &'p Function {
        self.program.function(self.function)
    }

    fn is_plain_local(&self, name: &str) -> bool {
        if self.statics.iter().any(|s| s == name) {
            return false;
        }
        eval::find_local(self.func(), name).is_some_and(|d| !d.is_static)
    }

    /// Candidates of the function, less the local ones whose value was stored into a
    /// persistent place (that store is the real update and was recorded itself).
    fn finish(self) -> Vec<Candidate> {
        let writes = self.writes;
        self.candidates
            .into_iter()
            .filter_map(|(mut c, superseded_by)| {
                if superseded_by.is_some() {
                    return None;
                }
                c.buffer_writes = writes.clone();
                Some(c)
            })
            .collect()
    }

    fn block(&mut self, stmts: &[Stmt]) {
        for stmt in stmts {
            self.stmt(stmt);
        }
    }

    fn stmt(&mut self, stmt: &Stmt) {
        match stmt {
            Stmt::Expr(e) => self.expr(e),
            Stmt::Decl(decls) => {
                for d in decls {
                    if d.is_static {
                        self.statics.push(d.name.clone());
                        continue;
                    }
                    match &d.init {
                        Some(Initializer::Expr(init)) => {
                            let value = self.subst(init, None);
                            self.env.insert(
                                d.name.clone(),
                                LocalValue {
                                    expr: value,
                                    origin: None,
                                },
                            );
                        }
                        _ => {
                            self.env.remove(&d.name);
                        }
                    }
                }
            }
            Stmt::Block(items) => self.block(items),
            Stmt::If {
                cond,
                then,
                otherwise,
            } => {
                self.expr_side_effects(cond);
                let before = self.env.clone();
                self.stmt(then);
                let after_then = std::mem::replace(&mut self.env, before.clone());
                if let Some(o) = otherwise {
                    self.stmt(o);
                }
                let after_else = std::mem::replace(&mut self.env, before.clone());
                self.merge_branches(cond, &before, &after_then, &after_else);
            }
            Stmt::Loop {
                init,
                body,
                step,
                cond,
                span,
            } => {
                if let Some(c) = self.resummed_loop(init, cond.as_deref(), body, *span) {
                    self.candidates.push((c, None));
                }
                self.block(init);
                let before = self.env.clone();
                self.stmt(body);
                if let Some(s) = step {
                    self.expr(s);
                }
                if let Some(c) = cond {
                    self.expr_side_effects(c);
                }
                let after = std::mem::replace(&mut self.env, before.clone());
                self.forget_changed(&before, &after);
            }
            Stmt::Switch { body, .. } => {
                let before = self.env.clone();
                self.stmt(body);
                let after = std::mem::replace(&mut self.env, before.clone());
                self.forget_changed(&before, &after);
            }
            Stmt::Return(Some(e), _) => self.expr_side_effects(e),
            Stmt::Conditional(branches) => {
                let mut earlier = Vec::new();
                for (branch, body) in branches {
                    let cond = Condition {
                        levels: vec![CondLevel {
                            branch: branch.clone(),
                            earlier: earlier.clone(),
                        }],
                    };
                    if self.program.condition_holds(&cond) {
                        self.block(body);
                        break;
                    }
                    earlier.push(branch.clone());
                }
            }
            Stmt::Return(None, _) | Stmt::Other(_) => {}
        }
    }

    /// `for (i = 0; i < N; i++) acc += buf[i];` over a buffer this function has just
    /// stored a sample into: a moving average re-summed on every call.
    fn resummed_loop(
        &self,
        init: &[Stmt],
        cond: Option<&Expr>,
        body: &Stmt,
        span: Span,
    ) -> Option<Candidate> {
        let var = match init.first()? {
            Stmt::Decl(d) => d.first().map(|d| d.name.clone())?,
            Stmt::Expr(Expr {
                kind: ExprKind::Assign { target, .. },
                ..
            }) => target.to_string(),
            _ => return None,
        };
        let ExprKind::Binary {
            op: BinaryOp::Lt,
            lhs,
            rhs: bound,
        } = &cond?.kind
        else {
            return None;
        };
        if lhs.to_string() != var {
            return None;
        }
        let single = match body {
            Stmt::Block(items) if items.len() == 1 => &items[0],
            other => other,
        };
        let Stmt::Expr(Expr {
            kind: ExprKind::Assign { op, target, value },
            ..
        }) = single
        else {
            return None;
        };
        let element = match (op, &value.kind) {
            (Some(BinaryOp::Add), _) => value,
            (
                None,
                ExprKind::Binary {
                    op: BinaryOp::Add,
                    lhs,
                    rhs,
                },
            ) if lhs.to_string() == target.to_string() => rhs,
            _ => return None,
        };
        let ExprKind::Index { base, index } = &element.kind else {
            return None;
        };
        let ExprKind::Ident(acc) = &target.kind else {
            return None;
        };
        if index.to_string() != var || !self.is_plain_local(acc) {
            return None;
        }
        let prefix = format!("{base}[");
        let (_, stored) = self
            .writes
            .iter()
            .rev()
            .find(|(t, v)| t.starts_with(&prefix) && !v.contains(&prefix))?;
        let input = crate::parse::parse_expression(stored, span)?;
        Some(Candidate {
            function: self.function,
            state: (**base).clone(),
            new_value: input,
            span,
            definition: None,
            buffer_writes: Vec::new(),
            locals: self.locals_snapshot(),
            resummed_bound: Some((**bound).clone()),
        })
    }

    /// After an `if`: a local that one branch clamps (the condition tests it) keeps its
    /// unclamped value, since saturation is not part of the smoother's affine form; any
    /// other local that a branch changed is no longer known.
    fn merge_branches(
        &mut self,
        cond: &Expr,
        before: &HashMap<String, LocalValue>,
        then: &HashMap<String, LocalValue>,
        otherwise: &HashMap<String, LocalValue>,
    ) {
        let mut names: Vec<&String> = then.keys().chain(otherwise.keys()).collect();
        names.sort();
        names.dedup();
        for name in names {
            let b = before.get(name).map(|v| v.expr.to_string());
            let t = then.get(name).map(|v| v.expr.to_string());
            let o = otherwise.get(name).map(|v| v.expr.to_string());
            if t == b && o == b {
                continue;
            }
            let tests_it = cond.mentions(&Expr::new(ExprKind::Ident(name.clone()), cond.span));
            if tests_it && b.is_some() && (t == b || o == b) {
                continue;
            }
            if t == o {
                if let Some(v) = then.get(name) {
                    self.env.insert(name.clone(), v.clone());
                }
                continue;
            }
            self.env.remove(name);
        }
    }

    fn forget_changed(
        &mut self,
        before: &HashMap<String, LocalValue>,
        after: &HashMap<String, LocalValue>,
    ) {
        for (name, value) in after {
            let same = before
                .get(name)
                .is_some_and(|b| b.expr.to_string() == value.expr.to_string());
            if !same {
                self.env.remove(name);
            }
        }
    }

    fn expr_side_effects(&mut self, e: &Expr) {
        let mut inner = Vec::new();
        e.walk(&mut |x| {
            if matches!(x.kind, ExprKind::Assign { .. }) {
                inner.push(x.clone());
            }
        });
        for x in inner {
            self.expr(&x);
        }
    }

    fn expr(&mut self, e: &Expr) {
        match &e.kind {
            ExprKind::Comma(items) => {
                for item in items {
                    self.expr(item);
                }
            }
            ExprKind::Assign { op, target, value } => self.assignment(e, *op, target, value),
            ExprKind::Call { callee, args } => {
                if let Some(stmts) = self.expand_statement_macro(callee, args, e.span) {
                    let outer = self.expansion;
                    let macro_span = self
                        .program
                        .active_macro(&callee.to_string())
                        .map(|m| m.span)
                        .unwrap_or(e.span);
                    if self.expansion.is_none() {
                        self.expansion = Some((e.span, macro_span));
                    }
                    self.macro_depth += 1;
                    self.block(&stmts);
                    self.macro_depth -= 1;
                    self.expansion = outer;
                } else {
                    for a in args {
                        self.expr_side_effects(a);
                    }
                }
            }
            _ => self.expr_side_effects(e),
        }
    }

    fn expand_statement_macro(
        &self,
        callee: &Expr,
        args: &[Expr],
        span: Span,
    ) -> Option<Vec<Stmt>> {
        if self.macro_depth >= MAX_MACRO_DEPTH {
            return None;
        }
        let ExprKind::Ident(name) = &callee.kind else {
            return None;
        };
        let m = self.program.active_macro(name)?;
        let params = m.params.as_ref()?;
        let text = eval::substitute_macro(&m.body, params, args);
        let anchor = self.expansion.map(|(call, _)| call).unwrap_or(span);
        crate::parse::parse_statements(&text, anchor)
    }

    fn assignment(&mut self, whole: &Expr, op: Option<BinaryOp>, target: &Expr, value: &Expr) {
        let target = self.subst_place(target);
        let new_raw = match op {
            Some(op) => Expr::new(
                ExprKind::Binary {
                    op,
                    lhs: Box::new(target.clone()),
                    rhs: Box::new(value.clone()),
                },
                whole.span,
            ),
            None => value.clone(),
        };
        let span = self.expansion.map(|(call, _)| call).unwrap_or(whole.span);
        let definition = self.expansion.map(|(_, def)| def);
        if let ExprKind::Ident(name) = &target.kind {
            if self.is_plain_local(name) {
                // A temporary: keep its value; a self-referencing update of it is a
                // candidate only until its value is stored somewhere that persists.
                let own = self.subst(&new_raw, Some(name));
                let mut origin = self.env.get(name).and_then(|v| v.origin);
                // `t += e`, `t -= e`, `t ^= e` with `e` free of `t` keep the weight one on
                // `t` (or are not linear): never a smoother, and most code is full of them.
                let plain_step = matches!(
                    op,
                    Some(
                        BinaryOp::Add
                            | BinaryOp::Sub
                            | BinaryOp::BitXor
                            | BinaryOp::BitOr
                            | BinaryOp::BitAnd
                            | BinaryOp::Shl
                            | BinaryOp::Rem
                    )
                ) && !value.mentions(&target);
                if !plain_step && own.mentions(&target) {
                    let locals = self.locals_snapshot();
                    self.candidates.push((
                        Candidate {
                            function: self.function,
                            state: target.clone(),
                            new_value: own,
                            span,
                            definition,
                            buffer_writes: Vec::new(),
                            locals,
                            resummed_bound: None,
                        },
                        None,
                    ));
                    origin = Some((span, definition));
                }
                let full = self.subst(&new_raw, None);
                self.env
                    .insert(name.clone(), LocalValue { expr: full, origin });
                return;
            }
        }
        // A persistent place: static, global, field, array element, pointer target. Only
        // the temporaries that carry the state are put in; the others stay as names (an
        // input computed into a local is one input, not a product of several).
        let new_value = self.subst_carrying(&new_raw, &target);
        self.writes
            .push((target.to_string(), new_value.to_string()));
        let state_text = target.to_string();
        if !new_value.mentions(&target) {
            return;
        }
        let mut span = span;
        let mut definition = definition;
        // Stored from a temporary that took the update: the update line is the one to show,
        // and the temporary's own candidate is replaced by this one.
        if let ExprKind::Ident(local) = &value.kind {
            if op.is_none() {
                if let Some((origin, def)) = self.env.get(local).and_then(|v| v.origin) {
                    span = origin;
                    definition = def;
                }
                for (c, superseded) in &mut self.candidates {
                    if c.state.to_string() == *local {
                        *superseded = Some(state_text.clone());
                    }
                }
            }
        }
        // A second update of the same place in the same body continues the first.
        let mut new_value = new_value;
        if let Some(position) = self
            .candidates
            .iter()
            .rposition(|(c, s)| s.is_none() && c.state.to_string() == state_text)
        {
            let previous = self.candidates[position].0.new_value.clone();
            let target_text = state_text.clone();
            substitute_in_place(&mut new_value, &|e: &Expr| {
                (e.to_string() == target_text && e.is_place()).then(|| previous.clone())
            });
            self.candidates[position].1 = Some(state_text.clone());
        }
        let locals = self.locals_snapshot();
        self.candidates.push((
            Candidate {
                function: self.function,
                state: target,
                new_value,
                span,
                definition,
                buffer_writes: Vec::new(),
                locals,
                resummed_bound: None,
            },
            None,
        ));
    }

    fn locals_snapshot(&self) -> HashMap<String, Expr> {
        self.env
            .iter()
            .map(|(k, v)| (k.clone(), v.expr.clone()))
            .collect()
    }

    /// Like `subst`, but a temporary is put in only when its value involves `state`, and
    /// a small helper function that is handed the state (`y = blend(y, u, k)`) is put in
    /// with its arguments.
    fn subst_carrying(&self, e: &Expr, state: &Expr) -> Expr {
        self.subst_carrying_depth(e, state, 0)
    }

    fn subst_carrying_depth(&self, e: &Expr, state: &Expr, depth: u32) -> Expr {
        let mut out = e.clone();
        substitute_in_place(&mut out, &|x: &Expr| match &x.kind {
            ExprKind::Ident(name) => {
                let v = self.env.get(name)?;
                v.expr.mentions(state).then(|| v.expr.clone())
            }
            ExprKind::Call { callee, args } => {
                let ExprKind::Ident(name) = &callee.kind else {
                    return None;
                };
                let hands_state = args.iter().any(|a| {
                    a.mentions(state)
                        || matches!(&a.kind, ExprKind::Ident(l) if self.env.get(l).is_some_and(|v| v.expr.mentions(state)))
                });
                if !hands_state || self.program.is_macro(name) || depth >= MAX_MACRO_DEPTH {
                    return None;
                }
                let body = inline_function(self.program, self.function, name, args)?;
                Some(self.subst_carrying_depth(&body, state, depth + 1))
            }
            _ => None,
        });
        // Macros are expanded in full, as the plain substitution does.
        self.subst_depth(&out, None, 0, false)
    }

    /// A place written through a macro that names it (`#define STATE g_vent.y`).
    fn subst_place(&self, target: &Expr) -> Expr {
        if let ExprKind::Ident(name) = &target.kind {
            if let Some((_, Some(e))) = self.program.macro_expr(name) {
                if e.is_place() {
                    let mut e = e.clone();
                    crate::parse::relocate_expr(&mut e, target.span);
                    return e;
                }
            }
        }
        target.clone()
    }

    /// The expression with local temporaries replaced by their values (all but `keep`)
    /// and function-like macros expanded.
    fn subst(&self, e: &Expr, keep: Option<&str>) -> Expr {
        self.subst_depth(e, keep, 0, true)
    }

    fn subst_depth(&self, e: &Expr, keep: Option<&str>, depth: u32, locals: bool) -> Expr {
        if depth > MAX_MACRO_DEPTH {
            return e.clone();
        }
        let mut out = e.clone();
        substitute_in_place(&mut out, &|x: &Expr| match &x.kind {
            ExprKind::Ident(name) if Some(name.as_str()) != keep => {
                if let Some(v) = self.env.get(name) {
                    return locals.then(|| v.expr.clone());
                }
                let (_, body) = self.program.macro_expr(name)?;
                let body = body?;
                if !body.is_place() || self.is_plain_local(name) {
                    return None;
                }
                let mut body = body.clone();
                crate::parse::relocate_expr(&mut body, x.span);
                Some(body)
            }
            ExprKind::Call { callee, args } => {
                let ExprKind::Ident(name) = &callee.kind else {
                    return None;
                };
                let m = self.program.active_macro(name)?;
                let params = m.params.as_ref()?;
                let text = eval::substitute_macro(&m.body, params, args);
                let body = crate::parse::parse_expression(&text, x.span)?;
                Some(self.subst_depth(&body, keep, depth + 1, locals))
            }
            _ => None,
        });
        out
    }
}

/// The value a small helper returns, with its parameters replaced by the arguments: its
/// body may declare temporaries and must end in `return EXPR;`.
fn inline_function(program: &Program, caller: FuncRef, name: &str, args: &[Expr]) -> Option<Expr> {
    let f = program.resolve_call(caller, name)?;
    let function = program.function(f);
    if function.params.len() != args.len() || function.body.len() > 8 {
        return None;
    }
    let mut map: HashMap<String, Expr> = function
        .params
        .iter()
        .zip(args)
        .map(|(p, a)| (p.name.clone(), a.clone()))
        .collect();
    for stmt in &function.body {
        match stmt {
            Stmt::Decl(decls) => {
                for d in decls {
                    let Some(Initializer::Expr(init)) = &d.init else {
                        return None;
                    };
                    let value = substitute_idents(init, &map);
                    map.insert(d.name.clone(), value);
                }
            }
            Stmt::Return(Some(e), _) => {
                let mut out = simplify(&substitute_idents(e, &map));
                crate::parse::relocate_expr(
                    &mut out,
                    args.first().map(|a| a.span).unwrap_or(e.span),
                );
                return Some(out);
            }
            _ => return None,
        }
    }
    None
}

/// What an atom stands for.
#[derive(Debug, Clone)]
enum AtomKind {
    /// A sub-expression that is not a literal: a place, a call, a named constant.
    Leaf(Expr),
    /// One over a denominator that is not a literal.
    Inverse(Poly),
}

struct Linearizer<'a> {
    atoms: Vec<(String, AtomKind)>,
    state: String,
    _marker: std::marker::PhantomData<&'a ()>,
    /// The count of a shift (`lhs`, count), see `Shift`.
    shift_eval: &'a dyn Fn(&Expr, &Expr) -> Shift,
}

#[derive(Debug)]
struct NotAffine;

impl<'a> Linearizer<'a> {
    fn atom(&mut self, key: String, kind: AtomKind) -> Option<AtomId> {
        if let Some(i) = self.atoms.iter().position(|(k, _)| *k == key) {
            return Some(i as AtomId);
        }
        if self.atoms.len() >= 64 {
            return None;
        }
        self.atoms.push((key, kind));
        Some((self.atoms.len() - 1) as AtomId)
    }

    fn cancel_fn(&self) -> impl Fn(&mut Monomial) + '_ {
        // `x * (1/x)` is 1 when the denominator is the single atom x.
        move |m: &mut Monomial| {
            let mut i = 0;
            while i < m.len() {
                let a = m[i];
                if let Some((_, AtomKind::Inverse(den))) = self.atoms.get(a as usize) {
                    if den.terms.len() == 1 {
                        if let Some((mono, c)) = den.terms.iter().next() {
                            if mono.len() == 1 && *c == 1.0 {
                                if let Some(j) = m.iter().position(|x| *x == mono[0]) {
                                    let (hi, lo) = if i > j { (i, j) } else { (j, i) };
                                    m.remove(hi);
                                    m.remove(lo);
                                    i = 0;
                                    continue;
                                }
                            }
                        }
                    }
                }
                i += 1;
            }
        }
    }

    fn mul(&self, a: &Poly, b: &Poly) -> Result<Poly, NotAffine> {
        let cancel = self.cancel_fn();
        a.mul(b, &cancel).ok_or(NotAffine)
    }

    fn lin(&mut self, e: &Expr) -> Result<Poly, NotAffine> {
        match &e.kind {
            ExprKind::Int { value, .. } => Ok(Poly::constant(*value as f64)),
            ExprKind::Float { value, single } => Ok(Poly::constant(if *single {
                *value as f32 as f64
            } else {
                *value
            })),
            ExprKind::Unary {
                op: UnaryOp::Neg,
                arg,
            } => Ok(self.lin(arg)?.scale(-1.0)),
            ExprKind::Unary {
                op: UnaryOp::Plus,
                arg,
            } => self.lin(arg),
            ExprKind::Cast { arg, .. } => self.lin(arg),
            ExprKind::Binary { op, lhs, rhs } => {
                use BinaryOp::*;
                // `(E - y)` and `(y - E)`: the written grouping says E is the input, however
                // it is scaled (`0.05f * raw - y` smooths 0.05 raw), so E is one atom.
                if *op == Sub {
                    if let Some(poly) = self.grouped_difference(lhs, rhs)? {
                        return Ok(poly);
                    }
                }
                match op {
                    Add => Ok(self.lin(lhs)?.add(&self.lin(rhs)?)),
                    Sub => Ok(self.lin(lhs)?.sub(&self.lin(rhs)?)),
                    Mul => {
                        let a = self.lin(lhs)?;
                        let b = self.lin(rhs)?;
                        self.mul(&a, &b)
                    }
                    Div => {
                        let num = self.lin(lhs)?;
                        let den = self.lin(rhs)?;
                        if let Some(c) = den.as_constant() {
                            if c != 0.0 {
                                return Ok(num.scale(1.0 / c));
                            }
                            // Division by a constant zero: an opaque factor whose
                            // evaluation fails, so the smoother is listed with no alpha.
                            let one = Expr::new(
                                ExprKind::Float {
                                    value: 1.0,
                                    single: false,
                                },
                                rhs.span,
                            );
                            let gain = Expr::new(
                                ExprKind::Binary {
                                    op: Div,
                                    lhs: Box::new(one),
                                    rhs: rhs.clone(),
                                },
                                e.span,
                            );
                            let id = self
                                .atom(gain.to_string(), AtomKind::Leaf(gain))
                                .ok_or(NotAffine)?;
                            return self.mul(&num, &Poly::atom(id));
                        }
                        if self.mentions_state(rhs) {
                            return Err(NotAffine);
                        }
                        let key = format!("1/({rhs})");
                        let inv = self.atom(key, AtomKind::Inverse(den)).ok_or(NotAffine)?;
                        self.mul(&num, &Poly::atom(inv))
                    }
                    Shr | Shl => {
                        let value = self.lin(lhs)?;
                        let amount = match (self.shift_eval)(lhs, rhs) {
                            Shift::Count(amount) => amount,
                            Shift::NotKnown { bits } => {
                                // The gain is `2^count` (or its inverse) as one opaque
                                // factor, evaluated like any other leaf: unknown while the
                                // count changes at run time or is not defined in C.
                                let gain = shift_gain(*op, bits, rhs, e.span);
                                let key = gain.to_string();
                                let id = self.atom(key, AtomKind::Leaf(gain)).ok_or(NotAffine)?;
                                return self.mul(&value, &Poly::atom(id));
                            }
                        };
                        let factor = 2f64.powi(amount as i32);
                        Ok(if *op == Shr {
                            value.scale(1.0 / factor)
                        } else {
                            value.scale(factor)
                        })
                    }
                    _ => self.leaf(e),
                }
            }
            ExprKind::Ident(_)
            | ExprKind::Field { .. }
            | ExprKind::Index { .. }
            | ExprKind::Unary {
                op: UnaryOp::Deref, ..
            } => {
                let key = e.to_string();
                let id = self.atom(key, AtomKind::Leaf(e.clone())).ok_or(NotAffine)?;
                Ok(Poly::atom(id))
            }
            _ => self.leaf(e),
        }
    }

    fn grouped_difference(&mut self, lhs: &Expr, rhs: &Expr) -> Result<Option<Poly>, NotAffine> {
        let is_state = |e: &Expr| e.is_place() && e.to_string() == self.state;
        let (input, state_first) = if is_state(rhs) {
            (lhs, false)
        } else if is_state(lhs) {
            (rhs, true)
        } else {
            return Ok(None);
        };
        let mut named = false;
        input.walk(&mut |x| {
            named |= matches!(
                x.kind,
                ExprKind::Ident(_)
                    | ExprKind::Field { .. }
                    | ExprKind::Index { .. }
                    | ExprKind::Call { .. }
            )
        });
        if input.is_place() || !named || self.mentions_state(input) {
            return Ok(None);
        }
        let u = self.leaf(input)?;
        let y = self.lin(if state_first { lhs } else { rhs })?;
        Ok(Some(if state_first { y.sub(&u) } else { u.sub(&y) }))
    }

    /// An opaque sub-expression: fine as a coefficient or input, not if it hides the state.
    fn leaf(&mut self, e: &Expr) -> Result<Poly, NotAffine> {
        if self.mentions_state(e) {
            return Err(NotAffine);
        }
        let id = self
            .atom(e.to_string(), AtomKind::Leaf(e.clone()))
            .ok_or(NotAffine)?;
        Ok(Poly::atom(id))
    }

    fn mentions_state(&self, e: &Expr) -> bool {
        let mut found = false;
        e.walk(&mut |x| {
            if !found && x.is_place() && x.to_string() == self.state {
                found = true;
            }
        });
        found
    }
}

/// The affine reading of an update: which atoms are the inputs, and the coefficient.
struct Affine {
    atoms: Vec<(String, AtomKind)>,
    state_atom: AtomId,
    alpha: Poly,
    /// Input atoms with the weight each carries.
    inputs: Vec<(AtomId, Poly)>,
    /// Whether the weights sum to `alpha` identically (DC gain one by construction).
    structural: bool,
}

/// What the linearizer may take a shift's count for.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Shift {
    /// A constant count that C defines for the left operand (C11 6.5.7p3: a whole number,
    /// not negative, less than the promoted left operand's width): the shift is an exact
    /// power of two.
    Count(f64),
    /// A count that changes at run time, or a constant one that C leaves undefined: the
    /// shift's gain stays an opaque factor. `bits` is the promoted left operand's width.
    NotKnown { bits: u8 },
}

fn defined_shift(program: &Program, function: FuncRef, lhs: &Expr, count: Option<f64>) -> Shift {
    let bits = eval::promoted_bits(program, Some(function), lhs);
    match count {
        Some(c) if c.fract() == 0.0 && (0.0..f64::from(bits)).contains(&c) => Shift::Count(c),
        _ => Shift::NotKnown { bits },
    }
}

/// The gain of `x >> count` (`1.0 / ((uintN_t)1 << count)`) or of `x << count`
/// (`(uintN_t)1 << count`), with N the promoted left operand's width, so that evaluating
/// it fails exactly where the shift itself is undefined (C11 6.5.7p3).
fn shift_gain(op: BinaryOp, bits: u8, count: &Expr, span: Span) -> Expr {
    let one = Expr::new(
        ExprKind::Int {
            value: 1,
            unsigned: true,
            long: false,
        },
        span,
    );
    let unit = Expr::new(
        ExprKind::Cast {
            ty: CType::FixedInt(IntType {
                bits,
                signed: false,
            }),
            arg: Box::new(one),
        },
        span,
    );
    let power = Expr::new(
        ExprKind::Binary {
            op: BinaryOp::Shl,
            lhs: Box::new(unit),
            rhs: Box::new(count.clone()),
        },
        span,
    );
    if op == BinaryOp::Shl {
        return power;
    }
    Expr::new(
        ExprKind::Binary {
            op: BinaryOp::Div,
            lhs: Box::new(Expr::new(
                ExprKind::Float {
                    value: 1.0,
                    single: false,
                },
                span,
            )),
            rhs: Box::new(power),
        },
        span,
    )
}

fn affine(
    update: &Expr,
    state: &Expr,
    shift_eval: &dyn Fn(&Expr, &Expr) -> Shift,
) -> Option<Affine> {
    let mut lin = Linearizer {
        atoms: Vec::new(),
        state: state.to_string(),
        _marker: std::marker::PhantomData,
        shift_eval,
    };
    let state_atom = lin.atom(state.to_string(), AtomKind::Leaf(state.clone()))?;
    let poly = lin.lin(update).ok()?;
    if poly.degree_in(state_atom) != 1 {
        return None;
    }
    let (c_y, rest) = poly.split_on(state_atom);
    if c_y.degree_in(state_atom) > 0 {
        return None;
    }
    let alpha = Poly::constant(1.0).sub(&c_y);
    let monomials: Vec<(Monomial, f64)> = rest
        .terms
        .iter()
        .filter(|(m, _)| !m.is_empty())
        .map(|(m, c)| (m.clone(), *c))
        .collect();
    if monomials.is_empty() {
        return None;
    }
    let atoms = lin.atoms.clone();
    let is_leaf = |a: AtomId| matches!(atoms.get(a as usize), Some((_, AtomKind::Leaf(_))));
    // Try each way of naming one atom of every monomial its input; keep the first whose
    // weights sum to alpha at several random points.
    let choices: Vec<Vec<AtomId>> = monomials
        .iter()
        .map(|(m, _)| {
            let mut c: Vec<AtomId> = m.iter().copied().filter(|a| is_leaf(*a)).collect();
            c.dedup();
            c
        })
        .collect();
    if choices.iter().any(|c| c.is_empty()) {
        return None;
    }
    let combos: usize = choices.iter().map(|c| c.len()).product();
    if combos > 512 {
        return None;
    }
    let mut found = None;
    let mut fallback = None;
    for k in 0..combos {
        let mut rem = k;
        let pick: Vec<AtomId> = choices
            .iter()
            .map(|c| {
                let a = c[rem % c.len()];
                rem /= c.len();
                a
            })
            .collect();
        let inputs = weights(&monomials, &pick);
        // An atom cannot be both an input and a weight.
        let clash = inputs
            .iter()
            .any(|(_, w)| w.atoms().iter().any(|a| pick.contains(a)));
        if clash {
            continue;
        }
        if fallback.is_none() {
            fallback = Some(inputs.clone());
        }
        let sum = inputs
            .iter()
            .fold(Poly::default(), |acc, (_, w)| acc.add(w));
        if identical(&sum, &alpha, &atoms) {
            found = Some(inputs);
            break;
        }
    }
    let (inputs, structural) = match found {
        Some(i) => (i, true),
        None => (fallback?, false),
    };
    Some(Affine {
        atoms,
        state_atom,
        alpha,
        inputs,
        structural,
    })
}

/// Groups the monomials by their chosen input atom: input -> weight polynomial.
fn weights(monomials: &[(Monomial, f64)], pick: &[AtomId]) -> Vec<(AtomId, Poly)> {
    let mut out: Vec<(AtomId, Poly)> = Vec::new();
    for ((m, c), input) in monomials.iter().zip(pick) {
        let mut reduced = m.clone();
        if let Some(pos) = reduced.iter().position(|a| a == input) {
            reduced.remove(pos);
        }
        let mut w = Poly::default();
        w.terms.insert(reduced, *c);
        match out.iter_mut().find(|(a, _)| a == input) {
            Some((_, acc)) => *acc = acc.add(&w),
            None => out.push((*input, w)),
        }
    }
    out
}

/// Whether two polynomials agree at several random points (inverse atoms taking one
/// over their denominator's value at the same point).
fn identical(a: &Poly, b: &Poly, atoms: &[(String, AtomKind)]) -> bool {
    if a == b {
        return true;
    }
    let mut rng = Lcg::new(atoms.len() as u64 + 7);
    for _ in 0..4 {
        let leaves: Vec<f64> = (0..atoms.len()).map(|_| rng.next_value()).collect();
        let values = atom_values(atoms, &leaves);
        let va = a.evaluate(&|i| values[i as usize]);
        let vb = b.evaluate(&|i| values[i as usize]);
        if (va - vb).abs() > 1e-9 * (1.0 + va.abs().max(vb.abs())) {
            return false;
        }
    }
    true
}

/// Values of all atoms given values for the leaves (inverses computed from them).
fn atom_values(atoms: &[(String, AtomKind)], leaves: &[f64]) -> Vec<f64> {
    let mut values = leaves.to_vec();
    for _ in 0..4 {
        for (i, (_, kind)) in atoms.iter().enumerate() {
            if let AtomKind::Inverse(den) = kind {
                let d = den.evaluate(&|a| values.get(a as usize).copied().unwrap_or(f64::NAN));
                values[i] = 1.0 / d;
            }
        }
    }
    values
}

/// Judges a candidate: is it a smoother, and what is it?
fn analyse(program: &Program, c: &Candidate, options: &RecogniseOptions) -> Option<Smoother> {
    let function = program.function(c.function);
    let scope = c.scope();
    if let Some(bound) = &c.resummed_bound {
        return resummed(program, c, bound, options);
    }
    let shift_eval = |lhs: &Expr, count: &Expr| -> Shift {
        let count = Evaluator::new(program).eval(count, &scope).ok();
        defined_shift(program, c.function, lhs, count.map(|v| v.as_f64()))
    };
    let aff = affine(&c.new_value, &c.state, &shift_eval)?;

    // Evaluate the leaves that are constants where the update stands.
    let mut evaluator = Evaluator::new(program);
    // Shift amounts are part of the coefficient: record their derivation too.
    c.new_value.walk(&mut |e| {
        if let ExprKind::Binary {
            op: BinaryOp::Shr | BinaryOp::Shl,
            rhs,
            ..
        } = &e.kind
        {
            if !matches!(rhs.kind, ExprKind::Int { .. }) {
                let _ = evaluator.eval(rhs, &scope);
            }
        }
    });
    let mut leaf_values: Vec<Option<f64>> = Vec::with_capacity(aff.atoms.len());
    let mut unknown_reasons: Vec<eval::Unknown> = Vec::new();
    let input_ids: Vec<AtomId> = aff.inputs.iter().map(|(a, _)| *a).collect();
    for (i, (_, kind)) in aff.atoms.iter().enumerate() {
        let id = i as AtomId;
        let value = match kind {
            AtomKind::Leaf(e) if id != aff.state_atom && !input_ids.contains(&id) => {
                match evaluator.eval(e, &scope) {
                    Ok(v) => Some(v.as_f64()),
                    Err(u) => {
                        unknown_reasons.push(u);
                        None
                    }
                }
            }
            _ => None,
        };
        leaf_values.push(value);
    }
    let weight_atoms: Vec<AtomId> = {
        let mut all: Vec<AtomId> = aff.alpha.atoms();
        for (_, w) in &aff.inputs {
            all.extend(w.atoms());
        }
        all.sort_unstable();
        all.dedup();
        all
    };
    let known = |a: AtomId| -> bool {
        match &aff.atoms[a as usize].1 {
            AtomKind::Leaf(_) => leaf_values[a as usize].is_some(),
            AtomKind::Inverse(den) => den
                .atoms()
                .iter()
                .all(|x| leaf_values[*x as usize].is_some()),
        }
    };
    let mut all_known = weight_atoms.iter().all(|a| known(*a));
    let values = atom_values(
        &aff.atoms,
        &leaf_values
            .iter()
            .map(|v| v.unwrap_or(f64::NAN))
            .collect::<Vec<_>>(),
    );
    // A denominator that is zero where the update stands has no quotient in C (C11
    // 6.5.5p5): the coefficient is unknown, not infinite.
    if all_known {
        for a in &weight_atoms {
            if let (key, AtomKind::Inverse(_)) = &aff.atoms[*a as usize] {
                if !values[*a as usize].is_finite() {
                    all_known = false;
                    unknown_reasons.push(eval::Unknown::new(format!(
                        "`{key}` divides by zero (undefined, C11 6.5.5p5)"
                    )));
                }
            }
        }
    }
    let alpha_value = all_known.then(|| aff.alpha.evaluate(&|a| values[a as usize]));
    let input_weight: Option<f64> = all_known.then(|| {
        aff.inputs
            .iter()
            .map(|(_, w)| w.evaluate(&|a| values[a as usize]))
            .sum()
    });

    let state_type = eval::place_type(program, Some(c.function), &c.state);
    let storage = storage_of(program, c.function, &c.state);

    // Moving average: the state is a running sum that takes the new sample and gives back
    // the one leaving the ring buffer.
    if let Some(window) = moving_average(program, c, &aff, alpha_value, &values) {
        return Some(build(
            program,
            c,
            options,
            Form::MovingAverage,
            Coefficient::Known(1.0 / window as f64),
            Some(window),
            Some(1.0),
            None,
            Some(sim::DeadBand {
                rising: 0,
                falling: 0,
            })
            .filter(|_| state_type.as_ref().is_some_and(CType::is_integer)),
            evaluator.chain,
            &aff,
            state_type,
            storage,
        ));
    }

    // A weight that shrinks with a sample counter makes a cumulative mean, not a smoother
    // with a time constant (`m += (u - m) / n` with `n++`).
    let counter_weight = weight_atoms.iter().any(|&a| {
        let leaves = match &aff.atoms[a as usize].1 {
            AtomKind::Leaf(_) => vec![a],
            AtomKind::Inverse(den) => den.atoms(),
        };
        leaves.iter().any(|&l| {
            matches!(&aff.atoms[l as usize].1, AtomKind::Leaf(e) if e.is_place())
                && program.is_counter(&aff.atoms[l as usize].0, c.function.file)
        })
    });
    if counter_weight {
        return None;
    }
    // An input weighted by the time step is being integrated, even when the numbers happen
    // to sum to one (`pos = 0.995*pos + vel*DT` with DT = 0.005).
    let step_weighted = aff.inputs.iter().any(|(_, w)| {
        w.atoms()
            .iter()
            .any(|&a| context::is_time_step_name(&aff.atoms[a as usize].0))
    });

    let mut form = Form::Ema;
    let mut scale = None;
    let dc_gain;
    match (aff.structural, alpha_value, input_weight) {
        (true, Some(a), Some(w)) => {
            dc_gain = if a != 0.0 { Some(w / a) } else { Some(1.0) };
        }
        (true, _, _) => dc_gain = Some(1.0),
        (false, Some(a), Some(w)) => {
            if !(a > 0.0 && a < 1.0) || step_weighted {
                return None;
            }
            let gain = w / a;
            if (w - 1.0).abs() < 1e-9 && gain >= 1.5 {
                // The state carries the output times 1/alpha.
                form = Form::ScaledState;
                scale = Some(gain);
                dc_gain = Some(1.0);
            } else if (0.5..=2.0).contains(&gain) {
                dc_gain = Some(gain);
            } else {
                return None;
            }
        }
        _ => return None,
    }
    // A negative alpha grows instead of smoothing (an extrapolator); alpha of 2 or more
    // oscillates without bound. Between 1 and 2 it overshoots: still listed, a rule says so.
    if aff.structural && alpha_value.is_some_and(|a| !a.is_finite() || !(0.0..2.0).contains(&a)) {
        return None;
    }

    let formula = formula_text(&aff);
    let coefficient = match alpha_value {
        Some(a) => Coefficient::Known(a),
        None => {
            let runtime = unknown_reasons.iter().find_map(|u| u.runtime.clone());
            match runtime.filter(|name| context::is_time_step_name(name)) {
                Some(name) => Coefficient::Adaptive {
                    formula,
                    depends_on: name,
                },
                None => Coefficient::Unknown {
                    formula,
                    reason: unknown_reasons
                        .first()
                        .map(|u| u.reason.clone())
                        .unwrap_or_else(|| "the coefficient is not a constant".into()),
                },
            }
        }
    };

    // Integer forms: run the update to measure the dead band.
    let dead_band = match (&state_type, alpha_value) {
        (Some(ty), Some(a)) if ty.is_integer() => {
            compile_update(program, c, &aff, ty, scale.unwrap_or(1.0))
                .and_then(|u| cached_dead_band(&u, a))
        }
        _ => None,
    };
    let _ = function;
    Some(build(
        program,
        c,
        options,
        form,
        coefficient,
        None,
        dc_gain,
        scale,
        dead_band,
        evaluator.chain,
        &aff,
        state_type,
        storage,
    ))
}

/// The dead band of an update, remembered per compiled update: firmware repeats the same
/// spelling (`>> 4` on an `int32_t`) many times, and the search is the costly part.
fn cached_dead_band(update: &sim::Update, alpha: f64) -> Option<sim::DeadBand> {
    use std::collections::HashMap;
    use std::sync::{Mutex, OnceLock};
    static CACHE: OnceLock<Mutex<HashMap<String, Option<sim::DeadBand>>>> = OnceLock::new();
    let key = format!("{update:?}|{}", alpha.to_bits());
    let cache = CACHE.get_or_init(|| Mutex::new(HashMap::new()));
    if let Some(hit) = cache.lock().ok().and_then(|m| m.get(&key).copied()) {
        return hit;
    }
    let band = update.dead_band(alpha);
    if let Ok(mut m) = cache.lock() {
        if m.len() < 100_000 {
            m.insert(key, band);
        }
    }
    band
}

#[allow(clippy::too_many_arguments)] // One constructor for the three forms; a struct of
                                     // arguments would only rename the fields of Smoother.
fn build(
    program: &Program,
    c: &Candidate,
    options: &RecogniseOptions,
    form: Form,
    alpha: Coefficient,
    window: Option<u32>,
    dc_gain: Option<f64>,
    scale: Option<f64>,
    dead_band: Option<sim::DeadBand>,
    chain: Vec<ChainStep>,
    aff: &Affine,
    state_type: Option<CType>,
    storage: Storage,
) -> Smoother {
    let function = program.function(c.function);
    let arithmetic = arithmetic_of(&state_type, &c.new_value);
    let inputs: Vec<String> = aff
        .inputs
        .iter()
        .map(|(a, _)| aff.atoms[*a as usize].0.clone())
        .collect();
    let rate = context::rate_of(&chain, &alpha, options.default_rate_hz);
    let variants = variants_of(program, c, &chain, &alpha);
    Smoother {
        function: function.name.clone(),
        function_ref: c.function,
        state: c.state.to_string(),
        span: c.span,
        definition: c.definition,
        form,
        arithmetic,
        storage,
        alpha,
        window,
        dc_gain,
        scale,
        dead_band,
        chain,
        rate,
        code_rate: None,
        variants,
        update: format!("{} = {}", c.state, c.new_value),
        // A moving average's update reads the ring too; running it on one input value
        // would say nothing true, so it has no simulation.
        simulation: state_type
            .as_ref()
            .filter(|_| form != Form::MovingAverage)
            .and_then(|ty| compile_update(program, c, aff, ty, scale.unwrap_or(1.0))),
        state_type,
        inputs,
        upstream: None,
    }
}

/// The coefficient under each other definition of a macro in its chain.
fn variants_of(
    program: &Program,
    c: &Candidate,
    chain: &[ChainStep],
    alpha: &Coefficient,
) -> Vec<Variant> {
    let mut variants = Vec::new();
    if alpha.value().is_none() {
        return variants;
    }
    let scope = c.scope();
    for step in chain {
        let Some(name) = &step.name else { continue };
        if !step.text.starts_with("#define") {
            continue;
        }
        for def in program.macro_definitions(name) {
            if def.span.line == step.line && def.span.file == step.file {
                continue;
            }
            if program
                .active_macro(name)
                .is_some_and(|m| m.span == def.span)
            {
                continue;
            }
            let shift_eval = |lhs: &Expr, count: &Expr| -> Shift {
                let mut ev = Evaluator::new(program);
                ev.macro_override = Some(def.clone());
                let count = ev.eval(count, &scope).ok();
                defined_shift(program, c.function, lhs, count.map(|v| v.as_f64()))
            };
            let value = affine(&c.new_value, &c.state, &shift_eval).and_then(|aff| {
                let mut ev = Evaluator::new(program);
                ev.macro_override = Some(def.clone());
                let leaves: Vec<f64> = aff
                    .atoms
                    .iter()
                    .map(|(_, k)| match k {
                        AtomKind::Leaf(e) => {
                            ev.eval(e, &scope).map(|v| v.as_f64()).unwrap_or(f64::NAN)
                        }
                        AtomKind::Inverse(_) => f64::NAN,
                    })
                    .collect();
                let values = atom_values(&aff.atoms, &leaves);
                let a = aff.alpha.evaluate(&|i| values[i as usize]);
                a.is_finite().then_some(a)
            });
            variants.push(Variant {
                condition: def.condition.to_string(),
                macro_name: name.clone(),
                alpha: value,
                window: None,
            });
        }
    }
    variants
}

fn formula_text(aff: &Affine) -> String {
    let mut parts = Vec::new();
    for (m, c) in &aff.alpha.terms {
        let names: Vec<String> = m.iter().map(|a| aff.atoms[*a as usize].0.clone()).collect();
        let body = names.join(" * ");
        let text = match (names.is_empty(), *c) {
            (true, c) => format!("{c}"),
            (false, 1.0) => body,
            (false, -1.0) => format!("-{body}"),
            (false, c) => format!("{c} * {body}"),
        };
        parts.push(text);
    }
    if parts.is_empty() {
        "0".into()
    } else {
        parts.join(" + ").replace("+ -", "- ")
    }
}

fn storage_of(program: &Program, f: FuncRef, state: &Expr) -> Storage {
    let function = program.function(f);
    match &state.kind {
        ExprKind::Ident(name) => match eval::find_local(function, name) {
            Some(d) if d.is_static => Storage::StaticLocal,
            Some(_) => Storage::Local,
            None => Storage::Global,
        },
        ExprKind::Field { base, arrow, .. } => {
            if *arrow
                && base
                    .root_ident()
                    .is_some_and(|r| function.params.iter().any(|p| p.name == r))
            {
                Storage::Pointer
            } else {
                Storage::Field
            }
        }
        ExprKind::Index { .. } => Storage::ArrayElement,
        ExprKind::Unary { .. } => Storage::Pointer,
        _ => Storage::Global,
    }
}

/// Fixed point: a product with an integer constant brought back by a shift of 8 or more.
fn arithmetic_of(state_type: &Option<CType>, update: &Expr) -> Arithmetic {
    match state_type {
        Some(t) if t.is_float() => return Arithmetic::Float,
        Some(t) if t.is_integer() => {}
        _ => {
            let mut has_float = false;
            update.walk(&mut |e| has_float |= matches!(e.kind, ExprKind::Float { .. }));
            if has_float {
                return Arithmetic::Float;
            }
        }
    }
    let mut fixed = false;
    update.walk(&mut |e| {
        if let ExprKind::Binary {
            op: BinaryOp::Shr,
            lhs,
            rhs,
        } = &e.kind
        {
            let big_shift = matches!(rhs.kind, ExprKind::Int { value, .. } if value >= 8)
                || matches!(&rhs.kind, ExprKind::Ident(_));
            let mut product = false;
            lhs.walk(&mut |x| {
                product |= matches!(
                    x.kind,
                    ExprKind::Binary {
                        op: BinaryOp::Mul,
                        ..
                    }
                )
            });
            fixed |= big_shift && product;
        }
    });
    if fixed {
        Arithmetic::Fixed
    } else {
        Arithmetic::Integer
    }
}

/// A buffer summed afresh each call: a moving average over the loop's bound.
fn resummed(
    program: &Program,
    c: &Candidate,
    bound: &Expr,
    options: &RecogniseOptions,
) -> Option<Smoother> {
    let mut evaluator = Evaluator::new(program);
    let n = evaluator.eval(bound, &c.scope()).ok()?.as_f64();
    if !(n >= 1.0 && n <= u32::MAX as f64 && n.fract() == 0.0) {
        return None;
    }
    let window = n as u32;
    let element_type = match eval::place_type(program, Some(c.function), &c.state) {
        Some(CType::Array(inner, _)) | Some(CType::Pointer(inner)) => {
            Some(program.resolve_type(&inner))
        }
        _ => None,
    };
    let aff = Affine {
        atoms: vec![(c.new_value.to_string(), AtomKind::Leaf(c.new_value.clone()))],
        state_atom: 0,
        alpha: Poly::constant(1.0 / n),
        inputs: vec![(0, Poly::constant(1.0 / n))],
        structural: true,
    };
    let integer = element_type.as_ref().is_some_and(CType::is_integer);
    let mut smoother = build(
        program,
        c,
        options,
        Form::MovingAverage,
        Coefficient::Known(1.0 / n),
        Some(window),
        Some(1.0),
        None,
        integer.then_some(sim::DeadBand {
            rising: 0,
            falling: 0,
        }),
        evaluator.chain,
        &aff,
        element_type,
        storage_of(program, c.function, &c.state),
    );
    smoother.update = format!(
        "{}[..] = {}; sum of {}[0 .. {bound})",
        c.state, c.new_value, c.state
    );
    Some(smoother)
}

/// A running sum `s += u - buf[i]` with `buf[i] = u` in the same body: window = the
/// buffer's length.
fn moving_average(
    program: &Program,
    c: &Candidate,
    aff: &Affine,
    alpha: Option<f64>,
    values: &[f64],
) -> Option<u32> {
    if alpha.is_none_or(|a| a.abs() > 1e-12) || aff.inputs.len() != 2 {
        return None;
    }
    let weight = |w: &Poly| w.evaluate(&|a| values[a as usize]);
    let (plus, minus) = {
        let (a, wa) = &aff.inputs[0];
        let (b, wb) = &aff.inputs[1];
        match (weight(wa), weight(wb)) {
            (x, y) if (x - 1.0).abs() < 1e-12 && (y + 1.0).abs() < 1e-12 => (*a, *b),
            (x, y) if (y - 1.0).abs() < 1e-12 && (x + 1.0).abs() < 1e-12 => (*b, *a),
            _ => return None,
        }
    };
    let leaving = &aff.atoms[minus as usize];
    let entering = &aff.atoms[plus as usize].0;
    let AtomKind::Leaf(leaving_expr) = &leaving.1 else {
        return None;
    };
    let ExprKind::Index { base, index } = &leaving_expr.kind else {
        return None;
    };
    let stored = c
        .buffer_writes
        .iter()
        .any(|(t, v)| *t == leaving.0 && v == entering);
    if !stored {
        return None;
    }
    let whole = |n: f64| (n >= 1.0 && n <= u32::MAX as f64 && n.fract() == 0.0).then_some(n as u32);
    let size = match eval::place_type(program, Some(c.function), base) {
        Some(CType::Array(_, Some(size))) => Evaluator::new(program)
            .eval(&size, &c.scope())
            .ok()
            .and_then(|v| whole(v.as_f64())),
        _ => None,
    };
    // The index may wrap before the end of the buffer: the window is where it wraps.
    let wrap = index_wrap(program, c, index).and_then(whole);
    match (size, wrap) {
        (Some(a), Some(b)) => Some(a.min(b)),
        (a, b) => a.or(b),
    }
}

/// Where a ring index wraps: `i = (i + 1) % N`, or `if (i >= N) i = 0;` / `== N`.
fn index_wrap(program: &Program, c: &Candidate, index: &Expr) -> Option<f64> {
    let text = index.to_string();
    let scope = c.scope();
    for w in program.writes_seen_from(&text, c.function.file) {
        if let ExprKind::Binary {
            op: BinaryOp::Rem,
            rhs,
            ..
        } = &w.value.kind
        {
            if let Ok(v) = Evaluator::new(program).eval(rhs, &scope) {
                return Some(v.as_f64());
            }
        }
    }
    let mut found = None;
    let function = program.function(c.function);
    visit_ifs(&function.body, &mut |cond, then| {
        let ExprKind::Binary { op, lhs, rhs } = &cond.kind else {
            return;
        };
        if lhs.to_string() != text || !matches!(op, BinaryOp::Ge | BinaryOp::Eq) {
            return;
        }
        let mut resets = false;
        crate::index::visit_stmts(std::slice::from_ref(then), &mut |e| {
            if let ExprKind::Assign {
                op: None,
                target,
                value,
            } = &e.kind
            {
                resets |= target.to_string() == text
                    && matches!(value.kind, ExprKind::Int { value: 0, .. });
            }
        });
        if resets {
            found = Evaluator::new(program)
                .eval(rhs, &scope)
                .ok()
                .map(|v| v.as_f64());
        }
    });
    found
}

fn visit_ifs(stmts: &[Stmt], f: &mut dyn FnMut(&Expr, &Stmt)) {
    for stmt in stmts {
        match stmt {
            Stmt::If {
                cond,
                then,
                otherwise,
            } => {
                f(cond, then);
                visit_ifs(std::slice::from_ref(then), f);
                if let Some(o) = otherwise {
                    visit_ifs(std::slice::from_ref(o), f);
                }
            }
            Stmt::Block(items) => visit_ifs(items, f),
            Stmt::Loop { body, .. } | Stmt::Switch { body, .. } => {
                visit_ifs(std::slice::from_ref(body), f)
            }
            Stmt::Conditional(branches) => {
                for (_, b) in branches {
                    visit_ifs(b, f);
                }
            }
            _ => {}
        }
    }
}

/// Compiles the update for `sim`: the state in slot 0, the inputs in the next slots,
/// every other name evaluated to its constant.
fn compile_update(
    program: &Program,
    c: &Candidate,
    aff: &Affine,
    state_ty: &CType,
    scale: f64,
) -> Option<sim::Update> {
    let scope = c.scope();
    let inputs: Vec<String> = aff
        .inputs
        .iter()
        .map(|(a, _)| aff.atoms[*a as usize].0.clone())
        .collect();
    let state = c.state.to_string();
    let mut input_types = Vec::new();
    for (a, _) in &aff.inputs {
        let ty = match &aff.atoms[*a as usize].1 {
            AtomKind::Leaf(e) => eval::place_type(program, Some(c.function), e),
            AtomKind::Inverse(_) => None,
        };
        input_types.push(ty.unwrap_or_else(|| state_ty.clone()));
    }
    let node = compile(program, &scope, &c.new_value, &state, &inputs, 0)?;
    Some(sim::Update {
        new_value: node,
        state_type: state_ty.clone(),
        input_types,
        scale,
        target: program.options.target,
    })
}

fn compile(
    program: &Program,
    scope: &Scope,
    e: &Expr,
    state: &str,
    inputs: &[String],
    depth: u32,
) -> Option<sim::Node> {
    if depth > 64 {
        return None;
    }
    let text = e.to_string();
    if e.is_place() && text == state {
        return Some(sim::Node::Slot(0));
    }
    // An input may be any expression the affine reading kept whole (`0.05f * raw`).
    if let Some(i) = inputs.iter().position(|s| *s == text) {
        return Some(sim::Node::Slot(i + 1));
    }
    let sub = |x: &Expr| compile(program, scope, x, state, inputs, depth + 1).map(Box::new);
    Some(match &e.kind {
        ExprKind::Unary { op, arg } if *op != UnaryOp::Deref && *op != UnaryOp::AddrOf => {
            sim::Node::Unary(*op, sub(arg)?)
        }
        ExprKind::Binary { op, lhs, rhs } => sim::Node::Binary(*op, sub(lhs)?, sub(rhs)?),
        ExprKind::Cast { ty, arg } => sim::Node::Cast(program.resolve_type(ty), sub(arg)?),
        ExprKind::Conditional {
            cond,
            then,
            otherwise,
        } => sim::Node::Cond(sub(cond)?, sub(then)?, sub(otherwise)?),
        _ => {
            let v: Num = Evaluator::new(program).eval(e, scope).ok()?;
            sim::Node::Const(v)
        }
    })
}

/// Marks a smoother whose only input is another smoother's state as its downstream stage.
fn link_cascades(smoothers: &mut [Smoother]) {
    let states: Vec<(String, FuncRef, Storage)> = smoothers
        .iter()
        .map(|s| (s.state.clone(), s.function_ref, s.storage))
        .collect();
    for s in smoothers.iter_mut() {
        s.upstream = None;
        if s.inputs.len() != 1 {
            continue;
        }
        let input = &s.inputs[0];
        s.upstream = states.iter().position(|(state, f, storage)| {
            state == input
                && *state != s.state
                && (*f == s.function_ref || !matches!(storage, Storage::Local))
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::index::ProgramOptions;
    use crate::parse::parse_file;

    fn find(src: &str) -> Vec<Smoother> {
        let ir = parse_file(FileId(0), src.as_bytes());
        let program = Program::build(vec![ir], vec!["a.c".into()], ProgramOptions::default());
        recognise(&program, &RecogniseOptions::default()).smoothers
    }

    #[test]
    fn float_ema_spellings_give_the_same_alpha() {
        for body in [
            "y += 0.25f * (u - y);",
            "y -= 0.25f * (y - u);",
            "y = 0.25f * u + (1.0f - 0.25f) * y;",
            "y = (1.0f - 0.25f) * y + u * 0.25f;",
            "y = y + 0.25f*u - 0.25f*y;",
        ] {
            let src = format!("static float y;\nvoid f(float u) {{ {body} }}\n");
            let found = find(&src);
            assert_eq!(found.len(), 1, "{body}");
            assert_eq!(found[0].alpha, Coefficient::Known(0.25), "{body}");
            assert_eq!(found[0].dc_gain, Some(1.0), "{body}");
        }
    }

    #[test]
    fn named_coefficient_is_resolved_with_its_chain() {
        let src = "#define K 0.125f\nstatic float y;\nvoid f(float u) { y += K * (u - y); }\n";
        let found = find(src);
        assert_eq!(found[0].alpha, Coefficient::Known(0.125));
        assert_eq!(found[0].chain[0].text, "#define K 0.125f");
    }

    #[test]
    fn weights_that_miss_one_are_kept_with_their_gain() {
        let found = find("static float y;\nvoid f(float u) { y = 0.9f*y + 0.2f*u; }\n");
        assert_eq!(found.len(), 1);
        let gain = found[0].dc_gain.unwrap();
        assert!((gain - 2.0).abs() < 1e-5, "{gain}");
    }

    #[test]
    fn look_alikes_are_not_smoothers() {
        for body in [
            "i += e * 0.1f;",
            "n += 1;",
            "y = 2*y + e;",
            "y *= 0.99f;",
            "y = fmaxf(y * 0.99f, e);",
            "y = 0.98f*y + e*0.001f;",
        ] {
            let src = format!("static float y, i, n;\nvoid f(float e) {{ {body} }}\n");
            assert!(find(&src).is_empty(), "{body} was reported");
        }
    }

    #[test]
    fn shifts_by_counts_c_does_not_fix_are_listed_with_no_alpha() {
        // A count that changes at run time, or one past the promoted operand's width
        // (C11 6.5.7p3: undefined), leaves the smoother listed but its alpha unknown.
        for (state_type, body) in [
            ("int", "y += (u - y) >> k;"),
            ("int", "y += (u - y) >> 32;"),
            ("int", "y += (u - y) >> -1;"),
            ("int", "y += (u - y) / 0;"),
        ] {
            let src = format!("static {state_type} y; extern int k;\nvoid f(int u) {{ {body} }}\n");
            let found = find(&src);
            assert_eq!(found.len(), 1, "{body} was not listed");
            assert!(
                !matches!(found[0].alpha, Coefficient::Known(_)),
                "{body}: alpha {:?}",
                found[0].alpha
            );
        }
        // The same count is defined for a `long long` state (at least 64 bits, C11
        // 5.2.4.2.1; 64 in this project's model), and a 31-bit shift of an int is too.
        for (state_type, body, alpha) in [
            ("long long", "y += (u - y) >> 32;", 2f64.powi(-32)),
            ("int", "y += (u - y) >> 31;", 2f64.powi(-31)),
        ] {
            let src = format!("static {state_type} y;\nvoid f(int u) {{ {body} }}\n");
            let found = find(&src);
            assert_eq!(found.len(), 1, "{body} was not listed");
            assert_eq!(found[0].alpha, Coefficient::Known(alpha), "{body}");
        }
    }
}

//! The symbolic walk: one function body (or one macro body) read in order, every value put
//! in the shared graph, every self-referencing write recorded as a candidate update.
//!
//! Locals hold graph values (`locals`); a place written earlier in the same body is read
//! back as what was written (store forwarding), so an update spread over statements (`d =
//! u - y; y += d >> 3;`, `y = (y/8)*7; y += u/8;`, a blend computed into a local and
//! stored into a field, two board macros that feed each other) is one value by the time it
//! is stored. Branches merge into `Phi` values; loops give the locals they change a
//! `carried` value at the start of an iteration, so a recurrence on a local across the
//! iterations of a loop (a block filter over a buffer, a task loop that never returns) is
//! seen like a recurrence on a global. Function-like and statement macros are expanded at
//! their calls from templates parsed once (`macros`); small helpers that return a formula
//! are put in from their own walk (`Helpers`); in the instance pass, the updates of a
//! filter function are put in at each of its calls with that call's arguments.
//!
//! Every walk has a work budget and the graph a node budget; past either, the walk stops
//! or the values become opaque, and a note says so. Nothing here judges: `judge` decides
//! which candidates are smoothers.

use super::locals::{Binding, Key, Locals};
use super::macros;
use super::values::{Graph, Home, HomeInfo, Node, Sym, V};
use crate::eval;
use crate::index::{FuncRef, MacroBody, MacroRef, Program};
use crate::ir::*;
use std::collections::HashMap;
use std::sync::{Arc, Mutex};

/// How far a reachability question looks before answering "maybe".
pub const REACH_LIMIT: usize = 20_000;
const MAX_MACRO_DEPTH: u32 = 8;
/// A helper is put in only when its returned value is this small.
const MAX_HELPER_NODES: usize = 400;

/// What kind of thing an update's state is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StateKind {
    /// A place in memory: a global, a static, a field, an element, a pointer's target.
    Place,
    /// A local carried from one iteration of a loop to the next.
    LoopLocal,
    /// A plain local that starts from a constant (or nothing) on every call.
    RestartLocal,
    /// An element of a buffer computed from the element before it in a loop
    /// (`y[i] = a*y[i-1] + ...`): the state is the previous element.
    Recurrence,
}

/// A filter function's update put in at one of its calls.
#[derive(Debug, Clone)]
pub struct Instance {
    pub callee: FuncRef,
}

/// A buffer summed afresh each call after a new sample went into it.
#[derive(Debug, Clone)]
pub struct Resummed {
    /// The loop's bound: the window.
    pub bound: V,
    /// The sample stored into the buffer.
    pub input: V,
}

/// A self-referencing write found by the walk, not yet judged.
#[derive(Debug, Clone)]
pub struct Candidate {
    /// The state's value as the update read it (a place, or a later version of it).
    pub state: V,
    /// The place (or carried local) the update writes.
    pub place: V,
    /// The innermost loop around the update (its number), if any.
    pub loop_id: Option<u32>,
    pub value: V,
    /// Where to report it: the update statement, or for an expansion, the macro call.
    pub span: Span,
    /// The update inside the macro or filter function, for an expansion or instance.
    pub definition: Option<Span>,
    pub macro_ref: Option<MacroRef>,
    /// The conditions of the branches the update sits in.
    pub guards: Vec<V>,
    pub kind: StateKind,
    pub in_loop: bool,
    /// Earlier candidates on the same state whose value this one continues.
    pub supersedes: Vec<usize>,
    pub instance: Option<Instance>,
    pub resummed: Option<Resummed>,
    /// The state as written where the update is (for its declared type).
    pub state_expr: Option<Expr>,
    /// Order of the walk's events, for the round-trip test of local objects.
    pub seq: u32,
    /// A later store on the same path replaced the value before anything read it: the
    /// update never reaches the next call (a filter whose state is zeroed right after).
    pub overwritten: bool,
}

/// What a walk found.
#[derive(Debug)]
pub struct WalkResult {
    pub graph: Graph,
    pub home: Home,
    pub candidates: Vec<Candidate>,
    /// Every store to memory, in order: (place, value).
    pub stores: Vec<(V, V)>,
    /// Return values, with whether the return was reached on every path.
    pub returns: Vec<(V, bool)>,
    /// The function had no branch, loop or switch.
    pub straight: bool,
    pub used_macros: Vec<MacroRef>,
    pub notes: Vec<(Span, String)>,
    /// Local objects whose address went to a call, with the event number.
    pub escapes: Vec<(Sym, u32)>,
    /// Local objects declared `static`: names of static locals (places that persist).
    pub static_locals: Vec<Sym>,
    pub work: u64,
    pub exhausted: bool,
    /// The parameters' entry values, in order.
    pub params: Vec<V>,
    /// For each loop (by number): the epoch at which its body starts; values of memory
    /// read from then on, and locals carried by it, change between its iterations.
    pub loop_epochs: Vec<u32>,
    /// The loop each carried local belongs to.
    pub carried_by: HashMap<V, u32>,
    /// Loop counters (`for (i = 0; i < N; i++)`): the carried value of `i` with its start
    /// and bound, so a guard can be judged for each value the counter takes.
    pub inductions: HashMap<V, Induction>,
}

/// A loop counter that steps by one from `start` while below `bound` (or up to it).
#[derive(Debug, Clone, Copy)]
pub struct Induction {
    pub start: V,
    pub bound: V,
    pub inclusive: bool,
}

/// The helper functions' returned formulas, computed once each, on first use.
#[derive(Default)]
pub struct Helpers {
    memo: Mutex<HashMap<FuncRef, Option<Arc<ReturnTemplate>>>>,
}

#[derive(Debug)]
pub struct ReturnTemplate {
    pub graph: Graph,
    pub root: V,
    pub params: Vec<V>,
}

impl Helpers {
    /// The formula `f` returns in terms of its parameters, when it is a straight-line
    /// function without side effects on memory and the formula is small.
    pub fn returns(&self, program: &Program, f: FuncRef) -> Option<Arc<ReturnTemplate>> {
        if let Ok(memo) = self.memo.lock() {
            if let Some(hit) = memo.get(&f) {
                return hit.clone();
            }
        }
        let computed = compute_return(program, f).map(Arc::new);
        if let Ok(mut memo) = self.memo.lock() {
            memo.entry(f).or_insert_with(|| computed.clone());
        }
        computed
    }
}

fn compute_return(program: &Program, f: FuncRef) -> Option<ReturnTemplate> {
    let function = program.function(f);
    if matches!(function.returns, CType::Void) || function.body.len() > 24 {
        return None;
    }
    let setup = Setup {
        program,
        function: Some(f),
        file: f.file,
        helpers: None,
        summaries: None,
        budget: 20_000,
    };
    let folded = fold_early_returns(&function.body());
    let r = match &folded {
        Some(body) => walk_function_body(&setup, body),
        None => walk_function(&setup),
    };
    // Branches are allowed when they only choose a value (`if (v > MAX) r = MAX; else ...
    // return r;`): one return, on every path, and no loop or switch.
    let branched_value =
        r.returns.len() == 1 && r.returns[0].1 && only_branches(&function.body(), 0);
    if !(r.straight || branched_value)
        || !r.stores.is_empty()
        || r.returns.len() != 1
        || r.exhausted
    {
        return None;
    }
    let (root, _) = r.returns[0];
    let mut small = Graph::new(MAX_HELPER_NODES * 2);
    let mut memo = HashMap::new();
    let root = small.import(&r.graph, root, &HashMap::new(), MAX_HELPER_NODES, &mut memo)?;
    let mut params = Vec::new();
    for p in &r.params {
        params.push(small.import(&r.graph, *p, &HashMap::new(), 4, &mut memo)?);
    }
    Some(ReturnTemplate {
        graph: small,
        root,
        params,
    })
}

/// The updates of filter functions, to be put in at their calls (the instance pass).
#[derive(Debug, Default)]
pub struct Summaries {
    pub updates: HashMap<FuncRef, Arc<FunctionUpdates>>,
}

/// One filter function's updates, over a graph of their own.
#[derive(Debug)]
pub struct FunctionUpdates {
    pub graph: Graph,
    pub params: Vec<V>,
    pub templates: Vec<UpdateTemplate>,
    pub stores: Vec<(V, V)>,
}

#[derive(Debug, Clone)]
pub struct UpdateTemplate {
    pub state: V,
    pub place: V,
    pub hand: super::instances::Hand,
    pub value: V,
    pub guards: Vec<V>,
    pub span: Span,
    pub definition: Option<Span>,
    pub macro_ref: Option<MacroRef>,
    pub kind: StateKind,
    pub in_loop: bool,
}

/// What a walk is given.
pub struct Setup<'a> {
    pub program: &'a Program,
    pub function: Option<FuncRef>,
    pub file: usize,
    pub helpers: Option<&'a Helpers>,
    /// Set for the instance pass: filter functions are put in at their calls.
    pub summaries: Option<&'a Summaries>,
    pub budget: u64,
}

#[derive(Debug, Clone)]
struct LocalInfo {
    ty: CType,
    aggregate: bool,
    is_static: bool,
}

#[derive(Debug, Clone, Copy)]
enum PlaceRef {
    Local(Sym),
    Mem(V),
}

struct LoopFrame {
    id: u32,
    carried: HashMap<Sym, V>,
}

struct Walker<'a> {
    setup: &'a Setup<'a>,
    program: &'a Program,
    g: Graph,
    home: Home,
    env: Locals,
    locals: HashMap<Sym, LocalInfo>,
    scopes: Vec<Vec<(Sym, Option<LocalInfo>)>>,
    params: HashMap<Sym, CType>,
    param_values: Vec<V>,
    candidates: Vec<Candidate>,
    guards: Vec<V>,
    /// The outermost macro expansion being walked: (call span, definition span, macro).
    expansion: Option<(Span, Span, MacroRef)>,
    expanding: Vec<MacroRef>,
    macro_depth: u32,
    loops: Vec<LoopFrame>,
    stores: Vec<(V, V)>,
    returns: Vec<(V, bool)>,
    branch_depth: u32,
    straight: bool,
    used_macros: Vec<MacroRef>,
    notes: Vec<(Span, String)>,
    escapes: Vec<(Sym, u32)>,
    static_locals: Vec<Sym>,
    seq: u32,
    work: u64,
    exhausted: bool,
    quiet: u32,
    /// Memory's epoch: it moves on at each call and each loop boundary, after which a
    /// place's value is a new version.
    epoch: u32,
    loop_epochs: Vec<u32>,
    carried_by: HashMap<V, u32>,
    inductions: HashMap<V, Induction>,
    read_memo: HashMap<(V, V), Option<(u32, V)>>,
}

/// Walks a function body.
/// Whether a body has no loop, switch, jump or preprocessor conditional, at any depth (up
/// to 16).
fn only_branches(body: &[Stmt], depth: usize) -> bool {
    depth < 16
        && body.iter().all(|s| match s {
            Stmt::Expr(_) | Stmt::Decl(_) | Stmt::Return(..) => true,
            // `goto`, labels and whatever else the lowering keeps as text can jump.
            Stmt::Other(_) => false,
            Stmt::Block(items) => only_branches(items, depth + 1),
            Stmt::If {
                then, otherwise, ..
            } => {
                only_branches(std::slice::from_ref(&**then), depth + 1)
                    && otherwise
                        .as_deref()
                        .is_none_or(|o| only_branches(std::slice::from_ref(o), depth + 1))
            }
            Stmt::Loop { .. } | Stmt::Switch { .. } | Stmt::Conditional(_) => false,
        })
}

/// A saturation helper written with early returns (`if (v > MAX) return MAX; if (v < MIN)
/// return MIN; return v;`), as the one conditional it computes: the declarations and
/// expression statements before the first guarded return, then
/// `return c1 ? a : c2 ? b : v;`. None for any other shape.
fn fold_early_returns(body: &[Stmt]) -> Option<Vec<Stmt>> {
    fn lone_return(s: &Stmt) -> Option<&Expr> {
        match s {
            Stmt::Return(Some(e), _) => Some(e),
            Stmt::Block(items) if items.len() == 1 => lone_return(&items[0]),
            _ => None,
        }
    }
    let first = body.iter().position(|s| matches!(s, Stmt::If { .. }))?;
    if !body[..first]
        .iter()
        .all(|s| matches!(s, Stmt::Decl(_) | Stmt::Expr(_)))
    {
        return None;
    }
    let mut guarded: Vec<(&Expr, &Expr)> = Vec::new();
    let mut last: Option<&Expr> = None;
    for (k, s) in body[first..].iter().enumerate() {
        let at_end = first + k + 1 == body.len();
        match s {
            Stmt::If {
                cond,
                then,
                otherwise,
            } => {
                guarded.push((cond, lone_return(then)?));
                match otherwise {
                    None => {}
                    Some(other) if at_end => last = Some(lone_return(other)?),
                    Some(_) => return None,
                }
            }
            Stmt::Return(Some(e), _) if at_end => last = Some(e),
            _ => return None,
        }
    }
    let mut value = last?.clone();
    for (cond, then) in guarded.into_iter().rev() {
        let span = cond.span;
        value = Expr {
            kind: ExprKind::Conditional {
                cond: Box::new(cond.clone()),
                then: Box::new(then.clone()),
                otherwise: Box::new(value),
            },
            span,
        };
    }
    let span = value.span;
    let mut out: Vec<Stmt> = body[..first].to_vec();
    out.push(Stmt::Return(Some(value), span));
    Some(out)
}

pub fn walk_function(setup: &Setup) -> WalkResult {
    match setup.function {
        Some(f) => walk_function_body(setup, &setup.program.function(f).body()),
        None => Walker::new(setup).finish(),
    }
}

/// Walks `body` as the body of `setup.function` (which gives the parameters).
fn walk_function_body(setup: &Setup, body: &[Stmt]) -> WalkResult {
    let Some(f) = setup.function else {
        return Walker::new(setup).finish();
    };
    let function = setup.program.function(f);
    let mut w = Walker::new(setup);
    for p in &function.params {
        let s = w.g.sym(&p.name);
        let ty = setup.program.resolve_type(&p.ty);
        let v = w.g.name_node(&p.name, w.home);
        w.params.insert(s, ty);
        w.param_values.push(v);
        w.env.set(
            Key::Local(s),
            Binding {
                value: v,
                origin: None,
            },
        );
    }
    w.block(body);
    w.finish()
}

/// Walks a macro body on its own (a definition no call expands), its parameters standing
/// for themselves.
pub fn walk_macro(program: &Program, r: MacroRef) -> Option<WalkResult> {
    let def = program.macro_def(r);
    let setup = Setup {
        program,
        function: None,
        file: r.0,
        helpers: None,
        summaries: None,
        budget: 20_000,
    };
    let mut w = Walker::new(&setup);
    w.expansion = None;
    let body = match program.macro_body(r) {
        MacroBody::Expr(e) => vec![Stmt::Expr(e.clone())],
        MacroBody::Stmts(s) => s.clone(),
        MacroBody::Neither => return None,
    };
    let _ = def;
    w.block(&body);
    Some(w.finish())
}

impl<'a> Walker<'a> {
    fn new(setup: &'a Setup<'a>) -> Walker<'a> {
        let mut g = Graph::new(super::values::NODE_BUDGET);
        let home = g.home(HomeInfo {
            function: setup.function,
            file: setup.file,
        });
        Walker {
            setup,
            program: setup.program,
            g,
            home,
            env: Locals::default(),
            locals: HashMap::new(),
            scopes: vec![Vec::new()],
            params: HashMap::new(),
            param_values: Vec::new(),
            candidates: Vec::new(),
            guards: Vec::new(),
            expansion: None,
            expanding: Vec::new(),
            macro_depth: 0,
            loops: Vec::new(),
            stores: Vec::new(),
            returns: Vec::new(),
            branch_depth: 0,
            straight: true,
            used_macros: Vec::new(),
            notes: Vec::new(),
            escapes: Vec::new(),
            static_locals: Vec::new(),
            seq: 0,
            work: 0,
            exhausted: false,
            quiet: 0,
            epoch: 0,
            loop_epochs: Vec::new(),
            carried_by: HashMap::new(),
            inductions: HashMap::new(),
            read_memo: HashMap::new(),
        }
    }

    fn finish(mut self) -> WalkResult {
        if self.g.over_budget() > 0 {
            let span = self.first_span();
            self.notes.push((
                span,
                format!(
                    "{} value(s) past the recogniser's graph budget were treated as unknown; smoothers that depend on them may be missed",
                    self.g.over_budget()
                ),
            ));
        }
        WalkResult {
            graph: self.g,
            home: self.home,
            candidates: self.candidates,
            stores: self.stores,
            returns: self.returns,
            straight: self.straight,
            used_macros: self.used_macros,
            notes: self.notes,
            escapes: self.escapes,
            static_locals: self.static_locals,
            work: self.work,
            exhausted: self.exhausted,
            params: self.param_values,
            loop_epochs: self.loop_epochs,
            carried_by: self.carried_by,
            inductions: self.inductions,
        }
    }

    fn first_span(&self) -> Span {
        match self.setup.function {
            Some(f) => self.program.function(f).name_span,
            None => Span::default(),
        }
    }

    fn tick(&mut self) -> bool {
        self.work += 1;
        if self.work > self.setup.budget && !self.exhausted {
            self.exhausted = true;
            let span = self.first_span();
            self.notes.push((
                span,
                "the recogniser's work budget for this function was reached; the rest of it was not read for smoothers".into(),
            ));
        }
        !self.exhausted
    }

    // ----- statements -----

    fn block(&mut self, stmts: &[Stmt]) {
        self.scopes.push(Vec::new());
        for s in stmts {
            if self.exhausted {
                break;
            }
            self.stmt(s);
        }
        if let Some(scope) = self.scopes.pop() {
            for (name, previous) in scope.into_iter().rev() {
                match previous {
                    Some(info) => {
                        self.locals.insert(name, info);
                    }
                    None => {
                        self.locals.remove(&name);
                    }
                }
            }
        }
    }

    fn stmt(&mut self, stmt: &Stmt) {
        if !self.tick() {
            return;
        }
        self.seq += 1;
        match stmt {
            Stmt::Expr(e) => self.expr_stmt(e),
            Stmt::Decl(decls) => {
                for d in decls {
                    self.decl(d);
                }
            }
            Stmt::Block(items) => self.block(items),
            Stmt::If {
                cond,
                then,
                otherwise,
            } => {
                self.straight = false;
                let c = self.rvalue(cond);
                let not_c = self.g.unary(UnaryOp::Not, c);
                let alternatives: Vec<(V, Option<&Stmt>)> =
                    vec![(c, Some(&**then)), (not_c, otherwise.as_deref())];
                self.branches(c, &alternatives);
            }
            Stmt::Loop {
                init,
                cond,
                step,
                body,
                span,
            } => {
                self.straight = false;
                self.loop_stmt(init, cond.as_deref(), step.as_deref(), body, *span);
            }
            Stmt::Switch { scrutinee, body } => {
                self.straight = false;
                let s = self.rvalue(scrutinee);
                let items: Vec<&Stmt> = match &**body {
                    Stmt::Block(items) => items.iter().collect(),
                    other => vec![other],
                };
                let case = self.g.text("case");
                let cond = self.g.binary(BinaryOp::Eq, s, case);
                let alternatives: Vec<(V, Option<&Stmt>)> =
                    items.iter().map(|i| (cond, Some(*i))).collect();
                self.branches(cond, &alternatives);
            }
            Stmt::Return(e, _) => {
                if let Some(e) = e {
                    let v = self.rvalue(e);
                    let top = self.branch_depth == 0 && self.loops.is_empty();
                    self.returns.push((v, top));
                }
            }
            Stmt::Conditional(branches) => self.preprocessor_branches(branches),
            Stmt::Other(_) => {}
        }
    }

    fn expr_stmt(&mut self, e: &Expr) {
        // A statement macro used alone (`GET_THROTTLE_INPUT;`).
        if let ExprKind::Ident(name) = &e.kind {
            if !self.is_local_name(name) {
                if let Some((r, def)) = self.program.macro_for(name, Some(self.setup.file)) {
                    if def.params.is_none() && macros::may_assign(&def.body) {
                        self.expand_object_statement(r, e.span);
                        return;
                    }
                }
            }
        }
        let _ = self.rvalue(e);
    }

    fn decl(&mut self, d: &LocalDecl) {
        let s = self.g.sym(&d.name);
        let ty = self.program.resolve_type(&d.ty);
        let aggregate = matches!(ty, CType::Array(..) | CType::Struct(_));
        let info = LocalInfo {
            ty: ty.clone(),
            aggregate,
            is_static: d.is_static,
        };
        let previous = self.locals.insert(s, info);
        if let Some(scope) = self.scopes.last_mut() {
            scope.push((s, previous));
        }
        if d.is_static {
            // Initialised once, before the first call: its value here is whatever the
            // last call left.
            self.static_locals.push(s);
            let place = self.g.name_node(&d.name, self.home);
            self.env.remove(Key::Place(place));
            return;
        }
        if aggregate {
            let base = self.g.local_object(s, self.home);
            if let Some(Initializer::List(items)) = &d.init {
                for (k, (designator, item)) in items.iter().enumerate().take(64) {
                    // Past an index designator (`[2] = ...`) positions are not counted here.
                    if designator.as_deref().is_some_and(|d| d.starts_with('[')) {
                        break;
                    }
                    let Initializer::Expr(e) = item else { continue };
                    let place = match designator {
                        Some(name) => {
                            let f = self.g.sym(name.trim_start_matches('.'));
                            self.g.field(base, false, f)
                        }
                        None => {
                            let i = self.g.int(k as u64);
                            self.g.index_node(base, i)
                        }
                    };
                    let v = self.rvalue(e);
                    self.env.set(
                        Key::Place(place),
                        Binding {
                            value: v,
                            origin: None,
                        },
                    );
                }
            }
            return;
        }
        match &d.init {
            Some(Initializer::Expr(e)) => {
                let v = self.rvalue(e);
                let v = self.convert(&ty, v);
                let version = self.env.next_version();
                let wrapped = self.g.local(s, self.home, version, v);
                let origin = Some(self.site(d.span));
                self.env.set(
                    Key::Local(s),
                    Binding {
                        value: wrapped,
                        origin: origin.map(|(sp, def, _)| (sp, def)),
                    },
                );
            }
            _ => self.env.remove(Key::Local(s)),
        }
    }

    /// Walks alternatives from the same starting point and merges what they changed.
    fn branches(&mut self, cond: V, alternatives: &[(V, Option<&Stmt>)]) {
        self.branch_depth += 1;
        let mut outcomes: Vec<Vec<(Key, Option<Binding>)>> = Vec::new();
        // The epoch of memory at the end of each alternative: a place not forwarded there
        // holds its version of that epoch.
        let mut ends: Vec<u32> = Vec::new();
        for (guard, body) in alternatives {
            let mark = self.env.mark();
            self.guards.push(*guard);
            if let Some(b) = body {
                self.stmt(b);
            }
            self.guards.pop();
            outcomes.push(self.env.undo(mark));
            ends.push(self.epoch);
        }
        self.branch_depth -= 1;
        let mut keys: Vec<Key> = Vec::new();
        for o in &outcomes {
            for (k, _) in o {
                if !keys.contains(k) {
                    keys.push(*k);
                }
            }
        }
        let two_way = alternatives.len() == 2;
        // A place that the branches leave different is not followed through the merge: what
        // comes after reads its current value (a new version), so an update after an `if`
        // that seeds or updates the place on one branch is an update of its own.
        let mut places_differ = false;
        for key in keys {
            let before = self.env.get(key);
            let values: Vec<Option<Binding>> = outcomes
                .iter()
                .map(|o| match o.iter().find(|(k, _)| *k == key) {
                    Some((_, b)) => *b,
                    None => before,
                })
                .collect();
            let vs: Vec<Option<V>> = values
                .iter()
                .zip(&ends)
                .map(|(b, end)| match (key, b) {
                    (_, Some(b)) => Some(b.value),
                    (Key::Place(p), None) => Some(self.g.version(p, *end)),
                    (Key::Local(_), None) => None,
                })
                .collect();
            let origin = values
                .iter()
                .flatten()
                .find(|b| Some(**b) != before)
                .and_then(|b| b.origin)
                .or(before.and_then(|b| b.origin));
            let merged = if vs.iter().all(|v| *v == vs[0]) {
                vs[0]
            } else if two_way && vs.iter().all(Option::is_some) {
                let (t, o) = (vs[0].unwrap_or(cond), vs[1].unwrap_or(cond));
                Some(self.g.phi(cond, t, o))
            } else if vs.iter().all(Option::is_some) {
                let mut acc = vs[vs.len() - 1].unwrap_or(cond);
                for v in vs.iter().rev().skip(1).flatten() {
                    acc = self.g.phi(cond, *v, acc);
                }
                Some(acc)
            } else {
                None
            };
            if let (Key::Place(_), Some(v)) = (key, merged) {
                if matches!(self.g.node(v), Node::Phi { .. }) {
                    places_differ = true;
                    self.env.remove(key);
                    continue;
                }
            }
            match (key, merged) {
                (Key::Place(p), Some(v)) if v == self.g.version(p, self.epoch) => {
                    self.env.remove(key)
                }
                (_, Some(v)) => self.env.set(key, Binding { value: v, origin }),
                (Key::Local(s), None) => {
                    let v = self.fresh(s, false);
                    self.env.set(key, Binding { value: v, origin });
                }
                (Key::Place(_), None) => self.env.remove(key),
            }
        }
        if places_differ {
            self.epoch += 1;
        }
    }

    fn preprocessor_branches(&mut self, branches: &[(CondBranch, Vec<Stmt>)]) {
        let mut earlier: Vec<CondBranch> = Vec::new();
        let mut alternatives: Vec<(String, &Vec<Stmt>)> = Vec::new();
        let mut taken = false;
        for (branch, body) in branches {
            let cond = Condition {
                levels: std::sync::Arc::new(vec![CondLevel {
                    branch: branch.clone(),
                    earlier: earlier.clone(),
                }]),
            };
            match self.program.condition_tri(&cond) {
                crate::index::Tri::False => {}
                crate::index::Tri::True => {
                    alternatives.push((branch.to_string(), body));
                    taken = true;
                    break;
                }
                crate::index::Tri::Unknown => {
                    if self.program.condition_holds(&cond) || !self.program.options.complete_defines
                    {
                        alternatives.push((branch.to_string(), body));
                    }
                }
            }
            earlier.push(branch.clone());
        }
        if alternatives.len() == 1 && taken {
            let body = alternatives[0].1;
            self.block(body);
            return;
        }
        if alternatives.is_empty() {
            return;
        }
        self.straight = false;
        let cond = self.g.text(&format!("#if {}", alternatives[0].0));
        let blocks: Vec<Stmt> = alternatives
            .iter()
            .map(|(_, b)| Stmt::Block((*b).clone()))
            .collect();
        let mut alts: Vec<(V, Option<&Stmt>)> = blocks.iter().map(|b| (cond, Some(b))).collect();
        if !taken {
            // No branch may be taken at all.
            alts.push((cond, None));
        }
        self.branches(cond, &alts);
    }

    fn loop_stmt(
        &mut self,
        init: &[Stmt],
        cond: Option<&Expr>,
        step: Option<&Expr>,
        body: &Stmt,
        span: Span,
    ) {
        for s in init {
            self.stmt(s);
        }
        if let Some(c) = self.resummed_loop(init, cond, body, span) {
            self.push_candidate(c);
        }
        let counter = loop_counter(init, cond, step);
        let counter_values = counter.as_ref().map(|(_, start, bound, inclusive)| {
            (self.rvalue(start), self.rvalue(bound), *inclusive)
        });
        let mut assigned = Vec::new();
        assigned_names(std::slice::from_ref(body), &mut assigned);
        if let Some(s) = step {
            assigned_in_expr(s, &mut assigned);
        }
        let mark = self.env.mark();
        // What memory held before the loop may change between iterations.
        for p in self.env.places() {
            self.env.remove(Key::Place(p));
        }
        self.epoch += 1;
        let id = self.loop_epochs.len() as u32;
        self.loop_epochs.push(self.epoch);
        let mut frame = LoopFrame {
            id,
            carried: HashMap::new(),
        };
        for name in assigned {
            if !self.is_env_local(&name) {
                continue;
            }
            let s = self.g.sym(&name);
            let v = self.fresh(s, true);
            self.env.set(
                Key::Local(s),
                Binding {
                    value: v,
                    origin: None,
                },
            );
            frame.carried.insert(s, v);
            self.carried_by.insert(v, id);
            if let (Some((counter_name, ..)), Some((start, bound, inclusive))) =
                (&counter, counter_values)
            {
                if *counter_name == name {
                    self.inductions.insert(
                        v,
                        Induction {
                            start,
                            bound,
                            inclusive,
                        },
                    );
                }
            }
        }
        self.loops.push(frame);
        if let Some(c) = cond {
            let _ = self.rvalue(c);
        }
        self.stmt(body);
        if let Some(s) = step {
            let _ = self.rvalue(s);
        }
        self.loops.pop();
        let changes = self.env.undo(mark);
        for (key, _) in changes {
            match key {
                Key::Local(s) => {
                    let v = self.fresh(s, false);
                    self.env.set(
                        key,
                        Binding {
                            value: v,
                            origin: None,
                        },
                    );
                }
                Key::Place(_) => self.env.remove(key),
            }
        }
        for p in self.env.places() {
            self.env.remove(Key::Place(p));
        }
        self.epoch += 1;
    }

    /// `for (i = 0; i < N; i++) acc += buf[i];` over a buffer that this body stored a new
    /// sample into (at a position other than the loop's): a moving average summed afresh.
    fn resummed_loop(
        &mut self,
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
            }) => match &target.kind {
                ExprKind::Ident(n) => n.to_string(),
                _ => return None,
            },
            _ => return None,
        };
        let ExprKind::Binary {
            op: BinaryOp::Lt | BinaryOp::Le,
            lhs,
            rhs: bound,
        } = &cond?.kind
        else {
            return None;
        };
        let le = matches!(
            cond?.kind,
            ExprKind::Binary {
                op: BinaryOp::Le,
                ..
            }
        );
        if !matches!(&lhs.kind, ExprKind::Ident(n) if **n == *var) {
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
            (Some(BinaryOp::Add), _) => &**value,
            (
                None,
                ExprKind::Binary {
                    op: BinaryOp::Add,
                    lhs,
                    rhs,
                },
            ) if lhs.same_as(target) => &**rhs,
            _ => return None,
        };
        let ExprKind::Index { base, index } = &element.kind else {
            return None;
        };
        let ExprKind::Ident(acc) = &target.kind else {
            return None;
        };
        if !matches!(&index.kind, ExprKind::Ident(n) if **n == *var) || !self.is_env_local(acc) {
            return None;
        }
        let buffer = match self.place(base) {
            PlaceRef::Mem(v) => v,
            PlaceRef::Local(_) => return None,
        };
        // The buffer must outlive the call, and the sample go in at a position of its own.
        if self.g.place_root(buffer).is_some_and(|(_, _, local)| local) {
            return None;
        }
        let (_, input) = self.stores.iter().rev().find(|(p, _)| {
            matches!(self.g.node(*p), Node::Index { base, index }
                if *base == buffer && !matches!(self.g.node(*index), Node::Int { .. }))
        })?;
        let input = *input;
        let mut bound_v = self.rvalue(bound);
        if le {
            let one = self.g.int(1);
            bound_v = self.g.binary(BinaryOp::Add, bound_v, one);
        }
        let (site, definition, macro_ref) = self.site_full(span);
        Some(Candidate {
            state: buffer,
            place: buffer,
            loop_id: self.loops.last().map(|f| f.id),
            value: input,
            span: site,
            definition,
            macro_ref,
            guards: self.guards.clone(),
            kind: StateKind::Place,
            in_loop: !self.loops.is_empty(),
            supersedes: Vec::new(),
            instance: None,
            resummed: Some(Resummed {
                bound: bound_v,
                input,
            }),
            state_expr: Some((**base).clone()),
            seq: self.seq,
            overwritten: false,
        })
    }

    // ----- expressions -----

    fn rvalue(&mut self, e: &Expr) -> V {
        if !self.tick() {
            return self.g.text("…");
        }
        match &e.kind {
            ExprKind::Int {
                value,
                unsigned,
                long,
            } => self.g.int_literal(*value, *unsigned, *long),
            ExprKind::Float { value, single } => self.g.float(*value, *single),
            ExprKind::Ident(name) => self.ident(name, e.span),
            ExprKind::Field { .. }
            | ExprKind::Index { .. }
            | ExprKind::Unary {
                op: UnaryOp::Deref, ..
            } => {
                let p = self.place(e);
                self.load(p)
            }
            ExprKind::Unary {
                op: UnaryOp::AddrOf,
                arg,
            } => match self.place(arg) {
                PlaceRef::Mem(p) => self.g.addr_of(p),
                PlaceRef::Local(s) => {
                    // The address of a scalar local: the local is memory from here on.
                    let base = self.g.local_object(s, self.home);
                    self.g.addr_of(base)
                }
            },
            ExprKind::Unary { op, arg } => {
                let a = self.rvalue(arg);
                self.g.unary(*op, a)
            }
            ExprKind::Binary { op, lhs, rhs } => {
                let a = self.rvalue(lhs);
                let b = self.rvalue(rhs);
                self.g.binary(*op, a, b)
            }
            ExprKind::Assign { op, target, value } => self.assign(e.span, *op, target, value),
            ExprKind::IncDec { target, increment } => {
                let p = self.place(target);
                let old = self.load(p);
                let one = self.g.int(1);
                let op = if *increment {
                    BinaryOp::Add
                } else {
                    BinaryOp::Sub
                };
                let new = self.g.binary(op, old, one);
                self.store(p, new, target, None, Some(op), e.span, true);
                old
            }
            ExprKind::Cast { ty, arg } => {
                if let Some((op, name, inner)) = self.program.cast_as_binary(ty, arg) {
                    let a = self.ident(&name, e.span);
                    let b = self.rvalue(inner);
                    return self.g.binary(op, a, b);
                }
                let a = self.rvalue(arg);
                let ty = self.program.resolve_type(ty);
                self.g.cast(&ty, a)
            }
            ExprKind::Call { callee, args } => self.call(e.span, callee, args),
            ExprKind::Conditional {
                cond,
                then,
                otherwise,
            } => {
                let c = self.rvalue(cond);
                let a = self.rvalue(then);
                let b = self.rvalue(otherwise);
                self.g.cond(c, a, b)
            }
            ExprKind::Comma(items) => {
                let mut last = self.g.int(0);
                for i in items {
                    last = self.rvalue(i);
                }
                last
            }
            ExprKind::Opaque(text) => self.g.text(text),
        }
    }

    fn is_local_name(&self, name: &str) -> bool {
        let Some(s) = self.g_sym_lookup(name) else {
            return false;
        };
        self.locals.contains_key(&s) || self.params.contains_key(&s)
    }

    fn g_sym_lookup(&self, name: &str) -> Option<Sym> {
        // Names not yet interned are not locals (every local is interned when declared).
        let mut probe = None;
        for (s, _) in self.locals.iter() {
            if self.g.name(*s) == name {
                probe = Some(*s);
                break;
            }
        }
        if probe.is_none() {
            for s in self.params.keys() {
                if self.g.name(*s) == name {
                    probe = Some(*s);
                    break;
                }
            }
        }
        probe
    }

    /// A name that lives in the environment: a plain (non-static, non-aggregate) local or a
    /// parameter.
    fn is_env_local(&mut self, name: &str) -> bool {
        let s = self.g.sym(name);
        match self.locals.get(&s) {
            Some(info) => !info.is_static && !info.aggregate,
            None => self.params.contains_key(&s),
        }
    }

    fn ident(&mut self, name: &str, span: Span) -> V {
        let s = self.g.sym(name);
        if let Some(info) = self.locals.get(&s).cloned() {
            if info.is_static {
                let p = self.g.name_node(name, self.home);
                return self.load(PlaceRef::Mem(p));
            }
            if info.aggregate {
                return self.g.local_object(s, self.home);
            }
            return self.local_value(s);
        }
        if self.params.contains_key(&s) {
            return self.local_value(s);
        }
        if let Some(v) = self.object_macro_value(name, span) {
            return v;
        }
        let p = self.g.name_node(name, self.home);
        self.load(PlaceRef::Mem(p))
    }

    fn local_value(&mut self, s: Sym) -> V {
        if let Some(b) = self.env.get(Key::Local(s)) {
            return b.value;
        }
        let v = self.fresh(s, false);
        self.env.set(
            Key::Local(s),
            Binding {
                value: v,
                origin: None,
            },
        );
        v
    }

    fn fresh(&mut self, s: Sym, carried: bool) -> V {
        let version = self.env.next_version();
        self.g.opaque(s, self.home, version, carried)
    }

    /// An object-like macro that stands for something other than a constant (a place, a
    /// call, a local): its body, walked at the use. Constants stay names, so that their
    /// value keeps its derivation.
    fn object_macro_value(&mut self, name: &str, span: Span) -> Option<V> {
        if self.macro_depth >= MAX_MACRO_DEPTH {
            return None;
        }
        let (r, def) = self.program.macro_for(name, Some(self.setup.file))?;
        if def.params.is_some() || self.expanding.contains(&r) {
            return None;
        }
        let MacroBody::Expr(body) = self.program.macro_body(r) else {
            return None;
        };
        if !self.worth_expanding(body) {
            return None;
        }
        let anchor = self.expansion.map(|x| x.0).unwrap_or(span);
        let MacroBody::Expr(e) = macros::object_body(self.program, r, anchor)? else {
            return None;
        };
        Some(self.within_expansion(r, span, |w| w.rvalue(&e)))
    }

    fn worth_expanding(&mut self, body: &Expr) -> bool {
        let mut worth = false;
        let mut names = Vec::new();
        body.walk(&mut |x| match &x.kind {
            ExprKind::Field { .. }
            | ExprKind::Index { .. }
            | ExprKind::Assign { .. }
            | ExprKind::IncDec { .. }
            | ExprKind::Unary {
                op: UnaryOp::Deref, ..
            } => worth = true,
            ExprKind::Ident(n) => names.push(n.clone()),
            _ => {}
        });
        if worth {
            return true;
        }
        names.iter().any(|n| {
            self.is_env_local(n)
                || self
                    .program
                    .global_seen_from(n, Some(self.setup.file))
                    .is_some_and(|g| !g.is_const)
        })
    }

    fn within_expansion<T>(
        &mut self,
        r: MacroRef,
        span: Span,
        f: impl FnOnce(&mut Self) -> T,
    ) -> T {
        self.used_macros.push(r);
        let outer = self.expansion;
        if self.expansion.is_none() {
            let def_span = self.program.macro_def(r).span;
            self.expansion = Some((span, def_span, r));
        }
        self.macro_depth += 1;
        self.expanding.push(r);
        let out = f(self);
        self.expanding.pop();
        self.macro_depth -= 1;
        self.expansion = outer;
        out
    }

    fn expand_object_statement(&mut self, r: MacroRef, span: Span) {
        if self.macro_depth >= MAX_MACRO_DEPTH || self.expanding.contains(&r) {
            return;
        }
        let anchor = self.expansion.map(|x| x.0).unwrap_or(span);
        let Some(body) = macros::object_body(self.program, r, anchor) else {
            return;
        };
        self.within_expansion(r, span, |w| match body {
            MacroBody::Expr(e) => {
                let _ = w.rvalue(&e);
            }
            MacroBody::Stmts(s) => w.block(&s),
            MacroBody::Neither => {}
        });
    }

    fn place(&mut self, e: &Expr) -> PlaceRef {
        match &e.kind {
            ExprKind::Ident(name) => {
                let s = self.g.sym(name);
                if let Some(info) = self.locals.get(&s).cloned() {
                    if info.is_static {
                        return PlaceRef::Mem(self.g.name_node(name, self.home));
                    }
                    if info.aggregate {
                        return PlaceRef::Mem(self.g.local_object(s, self.home));
                    }
                    return PlaceRef::Local(s);
                }
                if self.params.contains_key(&s) {
                    return PlaceRef::Local(s);
                }
                if let Some(p) = self.macro_place(name, e.span) {
                    return p;
                }
                PlaceRef::Mem(self.g.name_node(name, self.home))
            }
            ExprKind::Field { base, arrow, field } => {
                let b = if *arrow {
                    self.rvalue(base)
                } else {
                    match self.place(base) {
                        PlaceRef::Mem(v) => v,
                        PlaceRef::Local(s) => self.g.local_object(s, self.home),
                    }
                };
                let f = self.g.sym(field);
                PlaceRef::Mem(self.g.field(b, *arrow, f))
            }
            ExprKind::Index { base, index } => {
                let b = match self.place(base) {
                    PlaceRef::Local(_) => self.rvalue(base),
                    // An array is its own storage: indexing it reads no pointer.
                    PlaceRef::Mem(v) if self.is_array(base) => v,
                    PlaceRef::Mem(v) => self.load(PlaceRef::Mem(v)),
                };
                let i = self.rvalue(index);
                PlaceRef::Mem(self.g.index_node(b, i))
            }
            ExprKind::Unary {
                op: UnaryOp::Deref,
                arg,
            } => {
                let p = self.rvalue(arg);
                PlaceRef::Mem(self.g.deref(p))
            }
            ExprKind::Cast { arg, .. } => self.place(arg),
            ExprKind::Comma(items) if !items.is_empty() => {
                for i in &items[..items.len() - 1] {
                    let _ = self.rvalue(i);
                }
                self.place(&items[items.len() - 1])
            }
            _ => PlaceRef::Mem(self.rvalue(e)),
        }
    }

    /// Whether an lvalue is an array (its name is its address, not a pointer to load).
    fn is_array(&mut self, e: &Expr) -> bool {
        if let ExprKind::Ident(name) = &e.kind {
            let s = self.g.sym(name);
            if let Some(info) = self.locals.get(&s) {
                return matches!(info.ty, CType::Array(..));
            }
            if self.params.contains_key(&s) {
                return false;
            }
        }
        let ty = eval::place_type(self.program, self.setup.function, e);
        matches!(ty, Some(CType::Array(..)))
    }

    /// A name that a macro defines as a place (`#define STATE g_vent.y`).
    fn macro_place(&mut self, name: &str, span: Span) -> Option<PlaceRef> {
        if self.macro_depth >= MAX_MACRO_DEPTH {
            return None;
        }
        let (r, def) = self.program.macro_for(name, Some(self.setup.file))?;
        if def.params.is_some() || self.expanding.contains(&r) {
            return None;
        }
        let MacroBody::Expr(body) = self.program.macro_body(r) else {
            return None;
        };
        if !body.is_place() {
            return None;
        }
        let mut e = body.clone();
        crate::parse::relocate_expr(&mut e, span);
        self.used_macros.push(r);
        self.macro_depth += 1;
        self.expanding.push(r);
        let p = self.place(&e);
        self.expanding.pop();
        self.macro_depth -= 1;
        Some(p)
    }

    fn load(&mut self, p: PlaceRef) -> V {
        match p {
            PlaceRef::Local(s) => self.local_value(s),
            PlaceRef::Mem(v) => match self.env.get(Key::Place(v)) {
                Some(b) => b.value,
                None => self.g.version(v, self.epoch),
            },
        }
    }

    /// The converted value a store into a place of type `ty` leaves (C11 6.5.16.1p2).
    fn convert(&mut self, ty: &CType, v: V) -> V {
        let scalar = ty.is_integer() || ty.is_float();
        if !scalar {
            return v;
        }
        if let Node::Cast(t, _) = self.g.node(v) {
            if self.g.ty(*t) == ty {
                return v;
            }
        }
        self.g.cast(ty, v)
    }

    fn assign(&mut self, span: Span, op: Option<BinaryOp>, target: &Expr, value: &Expr) -> V {
        let p = self.place(target);
        let rhs = self.rvalue(value);
        let new = match op {
            Some(op) => {
                let old = self.load(p);
                self.g.binary(op, old, rhs)
            }
            None => rhs,
        };
        self.store(p, new, target, Some(value), op, span, false)
    }

    /// Where an update at `span` is reported: the macro call when inside an expansion.
    fn site(&self, span: Span) -> (Span, Option<Span>, Option<MacroRef>) {
        self.site_full(span)
    }

    fn site_full(&self, span: Span) -> (Span, Option<Span>, Option<MacroRef>) {
        match self.expansion {
            Some((call, def, r)) => (call, Some(def), Some(r)),
            None => (span, None, None),
        }
    }

    #[allow(clippy::too_many_arguments)] // One store, described by what C says of it.
    fn store(
        &mut self,
        p: PlaceRef,
        new: V,
        target: &Expr,
        value_expr: Option<&Expr>,
        op: Option<BinaryOp>,
        span: Span,
        step: bool,
    ) -> V {
        let (site, definition, macro_ref) = self.site(span);
        match p {
            PlaceRef::Local(s) => {
                let ty = self
                    .locals
                    .get(&s)
                    .map(|i| i.ty.clone())
                    .or_else(|| self.params.get(&s).cloned())
                    .unwrap_or(CType::Unknown(String::new()));
                let carried = self
                    .loops
                    .iter()
                    .rev()
                    .find_map(|f| f.carried.get(&s).copied());
                let mut recorded = false;
                if let Some(c) = carried {
                    let plain_step = step
                        || matches!(
                            op,
                            Some(
                                BinaryOp::Add
                                    | BinaryOp::Sub
                                    | BinaryOp::BitOr
                                    | BinaryOp::BitAnd
                                    | BinaryOp::BitXor
                                    | BinaryOp::Shl
                                    | BinaryOp::Rem
                            )
                        ) && value_expr.is_some_and(|v| !mentions_ident(v, self.g.name(s)));
                    if !plain_step && self.g.reaches(new, c, REACH_LIMIT) {
                        let state_expr = Some(target.clone());
                        self.push_candidate(Candidate {
                            state: c,
                            place: c,
                            loop_id: self.loops.last().map(|f| f.id),
                            value: new,
                            span: site,
                            definition,
                            macro_ref,
                            guards: self.guards.clone(),
                            kind: StateKind::LoopLocal,
                            in_loop: true,
                            supersedes: Vec::new(),
                            instance: None,
                            resummed: None,
                            state_expr,
                            seq: self.seq,
                            overwritten: false,
                        });
                        recorded = true;
                    }
                }
                if !recorded && !step && self.quiet == 0 {
                    self.restart_candidate(s, target, value_expr, op, site, definition, macro_ref);
                }
                let v = self.convert(&ty, new);
                let version = self.env.next_version();
                let wrapped = self.g.local(s, self.home, version, v);
                self.env.set(
                    Key::Local(s),
                    Binding {
                        value: wrapped,
                        origin: Some((site, definition)),
                    },
                );
                wrapped
            }
            PlaceRef::Mem(place) => {
                let ty = self
                    .setup
                    .function
                    .and_then(|f| eval::place_type(self.program, Some(f), target));
                let v = match &ty {
                    Some(t) => self.convert(t, new),
                    None => new,
                };
                let constant_step = step
                    || (matches!(op, Some(BinaryOp::Add | BinaryOp::Sub))
                        && value_expr.is_some_and(|e| {
                            matches!(e.kind, ExprKind::Int { .. } | ExprKind::Float { .. })
                        }));
                let mut origin = (site, definition);
                // Stored from a local that took the update: that line is the update.
                if op.is_none() {
                    if let Some(local) = value_expr.and_then(local_read) {
                        let ls = self.g.sym(local);
                        if let Some(b) = self.env.get(Key::Local(ls)) {
                            if let Some(o) = b.origin {
                                if self.state_read(b.value, place).is_some() {
                                    origin = o;
                                }
                            }
                        }
                    }
                }
                let read = if constant_step {
                    None
                } else {
                    self.state_read(v, place)
                };
                if let Some(state) = read {
                    self.push_candidate(Candidate {
                        state,
                        place,
                        loop_id: self.loops.last().map(|f| f.id),
                        value: v,
                        span: origin.0,
                        definition: origin.1,
                        macro_ref,
                        guards: self.guards.clone(),
                        kind: StateKind::Place,
                        in_loop: !self.loops.is_empty(),
                        supersedes: Vec::new(),
                        instance: None,
                        resummed: None,
                        state_expr: Some(target.clone()),
                        seq: self.seq,
                        overwritten: false,
                    });
                } else if !self.loops.is_empty() && !constant_step {
                    if let Some(previous) = self.previous_element(place, v) {
                        self.push_candidate(Candidate {
                            state: previous,
                            place,
                            loop_id: self.loops.last().map(|f| f.id),
                            value: v,
                            span: origin.0,
                            definition: origin.1,
                            macro_ref,
                            guards: self.guards.clone(),
                            kind: StateKind::Recurrence,
                            in_loop: true,
                            supersedes: Vec::new(),
                            instance: None,
                            resummed: None,
                            state_expr: Some(target.clone()),
                            seq: self.seq,
                            overwritten: false,
                        });
                    }
                }
                // An update stored on this path and replaced here before anything read it
                // is dead: not read by the new value, by the condition the replacement is
                // under (a clamp), or by a store since.
                if let Some(previous) = self.env.get(Key::Place(place)) {
                    if let Node::Stored { value: stored, .. } = *self.g.node(previous.value) {
                        let read = self.g.reaches(v, previous.value, REACH_LIMIT)
                            || self
                                .guards
                                .iter()
                                .any(|&c| self.g.reaches(c, previous.value, REACH_LIMIT))
                            || self.stores.iter().rev().take(64).any(|&(p, x)| {
                                p != place && self.g.reaches(x, previous.value, REACH_LIMIT)
                            });
                        if !read {
                            for c in self.candidates.iter_mut() {
                                if c.place == place && c.value == stored && c.instance.is_none() {
                                    c.overwritten = true;
                                }
                            }
                        }
                    }
                }
                let name = self.g.display(place, 200);
                let version = self.env.next_version();
                let named = self.g.stored(&name, version, v);
                self.env.set(
                    Key::Place(place),
                    Binding {
                        value: named,
                        origin: Some(origin),
                    },
                );
                if self.stores.len() < 4096 {
                    self.stores.push((place, v));
                }
                v
            }
        }
    }

    /// The value of `place` that `value` reads as its previous state: the place itself or a
    /// later version of it, read since the innermost loop's iteration began (a value read
    /// before the loop is another sample of the place, not the one this iteration updates).
    /// The latest such version when there are several.
    fn state_read(&mut self, value: V, place: V) -> Option<V> {
        let floor = self
            .loops
            .last()
            .map(|f| self.loop_epochs[f.id as usize])
            .unwrap_or(0);
        let best = self.latest_read(value, place);
        best.filter(|(version, _)| *version >= floor)
            .map(|(_, v)| v)
    }

    /// The latest value of `place` that `value` reads (its version and node), remembered
    /// per value: a chain of updates (`t = t*0.5f + x;` four thousand times) is searched
    /// once, each statement adding only what it adds.
    fn latest_read(&mut self, value: V, place: V) -> Option<(u32, V)> {
        if let Some(hit) = self.read_memo.get(&(value, place)) {
            return *hit;
        }
        let g = &self.g;
        let mut best: Option<(u32, V)> = None;
        let mut seen = std::collections::HashSet::new();
        let mut stack = vec![value];
        let better = |best: &mut Option<(u32, V)>, found: (u32, V)| {
            if best.is_none_or(|(b, _)| found.0 > b) {
                *best = Some(found);
            }
        };
        while let Some(v) = stack.pop() {
            if !seen.insert(v) || seen.len() > REACH_LIMIT {
                continue;
            }
            if v != value {
                if let Some(hit) = self.read_memo.get(&(v, place)) {
                    if let Some(found) = hit {
                        better(&mut best, *found);
                    }
                    continue;
                }
            }
            match g.node(v) {
                Node::Version { place: p, version } if *p == place => {
                    better(&mut best, (*version, v));
                }
                _ if v == place => better(&mut best, (0, v)),
                _ => stack.extend(g.children(v)),
            }
        }
        if self.read_memo.len() < 1_000_000 {
            self.read_memo.insert((value, place), best);
        }
        best
    }

    /// `y[i] = f(y[i - 1])` in a loop: the element the value reads at a constant offset
    /// below the one written.
    fn previous_element(&self, place: V, value: V) -> Option<V> {
        let Node::Index { base, index } = *self.g.node(place) else {
            return None;
        };
        let mut found = None;
        let mut seen = std::collections::HashSet::new();
        let mut stack = vec![value];
        while let Some(v) = stack.pop() {
            if found.is_some() || !seen.insert(v) || seen.len() > 2000 {
                break;
            }
            if let Node::Index { base: b, index: i } = *self.g.node(self.g.place_of(v)) {
                if b == base && i != index && self.offset_below(index, i) {
                    found = Some(v);
                    continue;
                }
            }
            stack.extend(self.g.children(v));
        }
        found
    }

    /// Whether `lower` is `upper - k` for a positive constant k (or `upper` is `lower + k`).
    fn offset_below(&self, upper: V, lower: V) -> bool {
        let upper = self.g.strip_aliases(upper);
        let lower = self.g.strip_aliases(lower);
        match *self.g.node(lower) {
            Node::Binary(BinaryOp::Sub, a, k) => {
                self.g.strip_aliases(a) == upper
                    && matches!(self.g.node(k), Node::Int { value, .. } if *value > 0)
            }
            _ => match *self.g.node(upper) {
                Node::Binary(BinaryOp::Add, a, k) => {
                    self.g.strip_aliases(a) == lower
                        && matches!(self.g.node(k), Node::Int { value, .. } if *value > 0)
                }
                _ => false,
            },
        }
    }

    /// A plain local updated from itself where its value before was a constant or nothing:
    /// the "filter" restarts on every call. Recorded with a state of its own.
    #[allow(clippy::too_many_arguments)] // The parts of one store, as `store` has them.
    fn restart_candidate(
        &mut self,
        s: Sym,
        target: &Expr,
        value_expr: Option<&Expr>,
        op: Option<BinaryOp>,
        site: Span,
        definition: Option<Span>,
        macro_ref: Option<MacroRef>,
    ) {
        let Some(value_expr) = value_expr else {
            return;
        };
        if self.params.contains_key(&s) {
            return;
        }
        let name = self.g.name(s).to_string();
        let self_ref = op.is_some() || mentions_ident(value_expr, &name);
        if !self_ref {
            return;
        }
        let previous = self.env.get(Key::Local(s)).map(|b| b.value);
        let restarts = match previous {
            None => true,
            Some(v) => {
                let inner = self.g.strip_aliases(v);
                matches!(self.g.node(inner), Node::Int { .. } | Node::Float { .. })
            }
        };
        if !restarts || !self.loops.is_empty() {
            return;
        }
        // Read the update again with the local standing for its previous value.
        let leaf = self.fresh(s, false);
        let saved = self.env.get(Key::Local(s));
        let mark = self.env.mark();
        self.env.set(
            Key::Local(s),
            Binding {
                value: leaf,
                origin: None,
            },
        );
        self.quiet += 1;
        let rhs = self.rvalue(value_expr);
        self.quiet -= 1;
        let _ = self.env.undo(mark);
        if let Some(b) = saved {
            self.env.set(Key::Local(s), b);
        }
        let new = match op {
            Some(op) => self.g.binary(op, leaf, rhs),
            None => rhs,
        };
        if !self.g.reaches(new, leaf, REACH_LIMIT) {
            return;
        }
        self.push_candidate(Candidate {
            state: leaf,
            place: leaf,
            loop_id: None,
            value: new,
            span: site,
            definition,
            macro_ref,
            guards: self.guards.clone(),
            kind: StateKind::RestartLocal,
            in_loop: false,
            supersedes: Vec::new(),
            instance: None,
            resummed: None,
            state_expr: Some(target.clone()),
            seq: self.seq,
            overwritten: false,
        });
    }

    /// Whether `from` reads `target` without going through a merge of branches, within a
    /// few hundred nodes (a continuation reads what it continues near the top).
    fn reaches_on_path(&self, from: V, target: V) -> bool {
        let g = &self.g;
        let mut seen = std::collections::HashSet::new();
        let mut stack = vec![from];
        while let Some(v) = stack.pop() {
            if v == target {
                return true;
            }
            if !seen.insert(v) || seen.len() > 256 {
                continue;
            }
            if matches!(g.node(v), Node::Phi { .. }) {
                continue;
            }
            stack.extend(g.children(v));
        }
        false
    }

    fn push_candidate(&mut self, mut c: Candidate) {
        if self.quiet > 0 {
            return;
        }
        // The latest earlier update of the same place is the one a continuation continues
        // (the ones before it are continued by it in turn).
        let latest = self
            .candidates
            .iter()
            .rposition(|old| old.place == c.place && old.instance.is_none());
        for (i, old) in self.candidates.iter().enumerate() {
            if Some(i) != latest {
                continue;
            }
            // A continuation reads the same state as the earlier update and reads the
            // earlier update's value on the way (not merely through an input).
            // It reads it on the same path: not through a merge of branches (an update made
            // on one branch is not continued by what follows the merge).
            if old.place == c.place
                && old.state == c.state
                && old.instance.is_none()
                && c.instance.is_none()
                && self.reaches_on_path(c.value, old.value)
            {
                c.supersedes.push(i);
            }
        }
        if self.candidates.len() < 10_000 {
            self.candidates.push(c);
        }
    }

    fn call(&mut self, span: Span, callee: &Expr, args: &[Expr]) -> V {
        let ExprKind::Ident(name) = &callee.kind else {
            let c = self.rvalue(callee);
            let vals: Vec<V> = args.iter().map(|a| self.rvalue(a)).collect();
            self.after_unknown_call(args);
            return self.g.call_indirect(c, vals);
        };
        if !self.is_local_name(name) {
            if let Some((r, def)) = self.program.macro_for(name, Some(self.setup.file)) {
                if def.params.is_some() {
                    return self.expand_macro_call(r, name, args, span);
                }
            }
            // `(u32_t)(x)` reads as a call of `u32_t` in C's grammar until the typedef is
            // known: it is a cast.
            if args.len() == 1 && self.program.is_type_name(name) {
                let a = self.rvalue(&args[0]);
                let ty = self
                    .program
                    .resolve_type(&crate::parse::type_from_name(name));
                return self.g.cast(&ty, a);
            }
        }
        let vals: Vec<V> = args.iter().map(|a| self.rvalue(a)).collect();
        let target = self
            .setup
            .function
            .and_then(|f| self.program.resolve_call(f, name))
            .or_else(|| self.program.function_by_name(name));
        if eval::is_math_function(name) && target.is_none() {
            return self.g.call(name, vals);
        }
        if let (Some(helpers), Some(f)) = (self.setup.helpers, target) {
            if let Some(t) = helpers.returns(self.program, f) {
                if t.params.len() == vals.len() {
                    let subst: HashMap<V, V> =
                        t.params.iter().copied().zip(vals.iter().copied()).collect();
                    let mut memo = HashMap::new();
                    if let Some(v) =
                        self.g
                            .import(&t.graph, t.root, &subst, MAX_HELPER_NODES * 4, &mut memo)
                    {
                        return v;
                    }
                }
            }
        }
        if let (Some(summaries), Some(f)) = (self.setup.summaries, target) {
            if let Some(updates) = summaries.updates.get(&f).cloned() {
                self.instantiate(f, &updates, &vals, args, span);
            }
        }
        self.after_unknown_call(args);
        self.g.call(name, vals)
    }

    /// A call may write what its pointer arguments reach and any global: forwarded memory
    /// is forgotten (later reads are the place itself), and the address of a local object
    /// that went into the call is remembered (a getter/setter round trip keeps it).
    fn after_unknown_call(&mut self, args: &[Expr]) {
        self.seq += 1;
        // Memory the call can reach is forgotten. A static local of this function (or a
        // local object) is out of its reach unless the call is handed its address.
        let handed: Vec<String> = args
            .iter()
            .filter_map(|a| a.root_ident().map(str::to_string))
            .collect();
        for p in self.env.places() {
            let private = self.g.place_root(p).is_some_and(|(root, home, local)| {
                home == self.home
                    && (local || self.static_locals.contains(&root))
                    && !handed.iter().any(|h| h == self.g.name(root))
            });
            if !private {
                self.env.remove(Key::Place(p));
            }
        }
        self.epoch += 1;
        for a in args {
            let ExprKind::Unary {
                op: UnaryOp::AddrOf,
                arg,
            } = &a.kind
            else {
                continue;
            };
            // `&x` of a scalar local: the call may set it. `&obj.f`, `&buf[i]` of a local
            // object: the object went into the call (a round trip keeps it). `&p->f` goes
            // through a pointer and leaves the local `p` itself alone.
            if let ExprKind::Ident(n) = &arg.kind {
                if self.is_env_local(n) {
                    let s = self.g.sym(n);
                    // Also an object whose type the scan cannot see (a generated header).
                    self.escapes.push((s, self.seq));
                    let v = self.fresh(s, false);
                    self.env.set(
                        Key::Local(s),
                        Binding {
                            value: v,
                            origin: None,
                        },
                    );
                    continue;
                }
            }
            if let Some(root) = own_object(arg) {
                let s = self.g.sym(root);
                if self.locals.get(&s).is_some_and(|i| !i.is_static) {
                    self.escapes.push((s, self.seq));
                }
            }
        }
    }

    fn expand_macro_call(&mut self, r: MacroRef, name: &str, args: &[Expr], span: Span) -> V {
        if self.macro_depth >= MAX_MACRO_DEPTH || self.expanding.contains(&r) {
            let vals: Vec<V> = args.iter().map(|a| self.rvalue(a)).collect();
            return self.g.call(name, vals);
        }
        let anchor = self.expansion.map(|x| x.0).unwrap_or(span);
        let Some(body) = macros::instantiate(self.program, r, args, anchor) else {
            let vals: Vec<V> = args.iter().map(|a| self.rvalue(a)).collect();
            return self.g.call(name, vals);
        };
        self.within_expansion(r, span, |w| match body {
            MacroBody::Expr(e) => w.rvalue(&e),
            MacroBody::Stmts(s) => {
                w.block(&s);
                w.g.text(name)
            }
            MacroBody::Neither => w.g.text(name),
        })
    }

    /// Puts a filter function's updates in at one of its calls.
    fn instantiate(
        &mut self,
        callee: FuncRef,
        updates: &FunctionUpdates,
        args: &[V],
        arg_exprs: &[Expr],
        span: Span,
    ) {
        if self.quiet > 0 || updates.params.len() != args.len() {
            return;
        }
        let subst: HashMap<V, V> = updates
            .params
            .iter()
            .copied()
            .zip(args.iter().copied())
            .collect();
        let (site, _, macro_ref) = self.site(span);
        for t in &updates.templates {
            // A call that hands on its own pointer makes no instance of an update whose
            // calls supply nothing but the object.
            if !t.hand.every_call {
                let own = match (self.setup.function, arg_exprs.get(t.hand.root_param)) {
                    (Some(caller), Some(a)) => {
                        super::instances::passes_own_parameter(self.program, caller, a)
                    }
                    _ => true,
                };
                if own {
                    continue;
                }
            }
            let mut memo = HashMap::new();
            let limit = 50_000;
            let Some(state) = self
                .g
                .import(&updates.graph, t.state, &subst, limit, &mut memo)
            else {
                continue;
            };
            let Some(value) = self
                .g
                .import(&updates.graph, t.value, &subst, limit, &mut memo)
            else {
                continue;
            };
            let Some(place) = self
                .g
                .import(&updates.graph, t.place, &subst, limit, &mut memo)
            else {
                continue;
            };
            let mut guards = self.guards.clone();
            for gv in &t.guards {
                if let Some(v) = self.g.import(&updates.graph, *gv, &subst, limit, &mut memo) {
                    guards.push(v);
                }
            }
            for (p, v) in &updates.stores {
                if let (Some(p), Some(v)) = (
                    self.g.import(&updates.graph, *p, &subst, limit, &mut memo),
                    self.g.import(&updates.graph, *v, &subst, limit, &mut memo),
                ) {
                    if self.stores.len() < 4096 {
                        self.stores.push((p, v));
                    }
                }
            }
            self.candidates.push(Candidate {
                state,
                place,
                loop_id: None,
                value,
                span: site,
                definition: Some(t.definition.unwrap_or(t.span)),
                macro_ref: macro_ref.or(t.macro_ref),
                guards,
                kind: t.kind,
                in_loop: t.in_loop || !self.loops.is_empty(),
                supersedes: Vec::new(),
                instance: Some(Instance { callee }),
                resummed: None,
                state_expr: None,
                seq: self.seq,
                overwritten: false,
            });
        }
    }
}

/// `for (i = START; i < BOUND; i++)` (or `<=`, `++i`, `i += 1`): the counter's name, its
/// start, its bound and whether the bound is included.
fn loop_counter<'e>(
    init: &'e [Stmt],
    cond: Option<&'e Expr>,
    step: Option<&'e Expr>,
) -> Option<(String, &'e Expr, &'e Expr, bool)> {
    let (name, start) = match init.first()? {
        Stmt::Decl(d) => {
            let d = d.first()?;
            match &d.init {
                Some(Initializer::Expr(e)) => (d.name.clone(), e),
                _ => return None,
            }
        }
        Stmt::Expr(Expr {
            kind:
                ExprKind::Assign {
                    op: None,
                    target,
                    value,
                },
            ..
        }) => match &target.kind {
            ExprKind::Ident(n) => (n.to_string(), &**value),
            _ => return None,
        },
        _ => return None,
    };
    let ExprKind::Binary { op, lhs, rhs } = &cond?.kind else {
        return None;
    };
    let inclusive = match op {
        BinaryOp::Lt | BinaryOp::Ne => false,
        BinaryOp::Le => true,
        _ => return None,
    };
    if !matches!(&lhs.kind, ExprKind::Ident(n) if **n == *name) {
        return None;
    }
    let steps_by_one = match &step?.kind {
        ExprKind::IncDec {
            target,
            increment: true,
        } => matches!(&target.kind, ExprKind::Ident(n) if **n == *name),
        ExprKind::Assign {
            op: Some(BinaryOp::Add),
            target,
            value,
        } => {
            matches!(&target.kind, ExprKind::Ident(n) if **n == *name)
                && matches!(value.kind, ExprKind::Int { value: 1, .. })
        }
        _ => false,
    };
    steps_by_one.then_some((name, start, &**rhs, inclusive))
}

/// Whether an expression reads the identifier `name` (not as a field name).
fn mentions_ident(e: &Expr, name: &str) -> bool {
    let mut found = false;
    e.walk(&mut |x| {
        if let ExprKind::Ident(n) = &x.kind {
            found |= &**n == name;
        }
    });
    found
}

/// The variable whose own storage an lvalue is part of (`obj` in `obj.f[2]`), not going
/// through a pointer.
fn own_object(e: &Expr) -> Option<&str> {
    match &e.kind {
        ExprKind::Ident(n) => Some(n),
        ExprKind::Field {
            base, arrow: false, ..
        }
        | ExprKind::Index { base, .. } => own_object(base),
        ExprKind::Cast { arg, .. } => own_object(arg),
        _ => None,
    }
}

/// The local an expression just reads (`t`, `(int16_t)t`, `(t)`).
fn local_read(e: &Expr) -> Option<&str> {
    match &e.kind {
        ExprKind::Ident(n) => Some(n),
        ExprKind::Cast { arg, .. } => local_read(arg),
        _ => None,
    }
}

/// The names a statement list assigns (`x = ...`, `x += ...`, `x++`), for the locals a
/// loop carries from one iteration to the next.
fn assigned_names(stmts: &[Stmt], out: &mut Vec<String>) {
    crate::index::visit_stmts(stmts, &mut |e| assigned_in_one(e, out));
}

fn assigned_in_expr(e: &Expr, out: &mut Vec<String>) {
    e.walk(&mut |x| assigned_in_one(x, out));
}

fn assigned_in_one(e: &Expr, out: &mut Vec<String>) {
    let target = match &e.kind {
        ExprKind::Assign { target, .. } | ExprKind::IncDec { target, .. } => target,
        _ => return,
    };
    if let ExprKind::Ident(n) = &target.kind {
        if !out.iter().any(|o| **o == **n) && out.len() < 4096 {
            out.push(n.to_string());
        }
    }
}

/// Builds the summaries of the filter functions: each function's updates whose state is
/// reached through one of its parameters, over a graph of their own.
pub fn summarise(
    result: &WalkResult,
    keep: &[(usize, super::instances::Hand)],
) -> Option<FunctionUpdates> {
    if keep.is_empty() {
        return None;
    }
    let mut g = Graph::new(200_000);
    let mut memo = HashMap::new();
    let none = HashMap::new();
    let mut params = Vec::new();
    for p in &result.params {
        params.push(g.import(&result.graph, *p, &none, 4, &mut memo)?);
    }
    let mut templates = Vec::new();
    for &(i, hand) in keep {
        let c = &result.candidates[i];
        let Some(state) = g.import(&result.graph, c.state, &none, 50_000, &mut memo) else {
            continue;
        };
        let Some(value) = g.import(&result.graph, c.value, &none, 50_000, &mut memo) else {
            continue;
        };
        let Some(place) = g.import(&result.graph, c.place, &none, 50_000, &mut memo) else {
            continue;
        };
        let guards = c
            .guards
            .iter()
            .filter_map(|v| g.import(&result.graph, *v, &none, 50_000, &mut memo))
            .collect();
        templates.push(UpdateTemplate {
            state,
            place,
            hand,
            value,
            guards,
            span: c.span,
            definition: c.definition,
            macro_ref: c.macro_ref,
            kind: c.kind,
            in_loop: c.in_loop,
        });
    }
    let stores = result
        .stores
        .iter()
        .take(64)
        .filter_map(|(p, v)| {
            Some((
                g.import(&result.graph, *p, &none, 2000, &mut memo)?,
                g.import(&result.graph, *v, &none, 2000, &mut memo)?,
            ))
        })
        .collect();
    if templates.is_empty() {
        return None;
    }
    Some(FunctionUpdates {
        graph: g,
        params,
        templates,
        stores,
    })
}

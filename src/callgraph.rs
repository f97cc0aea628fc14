//! The call graph rates travel on: every direct call, and calls through function pointers
//! where the program shows which functions a pointer can hold.
//!
//! A pointer is known by a key: the field it is read from (`tasks[i].fn()`, `ops->run()`:
//! the fields `fn`, `run`) or the variable (`handler()`, `handlers[i]()`, `(*cb)()`).
//! Functions are bound to keys where their names are stored: in the initialisers of
//! globals and locals (designated, `.fn = pump_run`, or by position in a struct whose field
//! at that position is the key) and in assignments (`ops.run = pump_run;`,
//! `cb = &pump_run;`). An indirect call whose key has bindings reaches every function bound
//! to it; one whose key has none is unresolved, and any function whose name is used as a
//! value elsewhere (passed to a registration call, returned) may be what it calls.
//!
//! One pass over every function body and global initialiser; no recursion deeper than an
//! initialiser's own nesting, which is bounded by `MAX_NESTING`.

use crate::index::{FuncRef, Program};
use crate::ir::{CType, Expr, ExprKind, Initializer, LocalDecl, Span, Stmt, UnaryOp};
use std::collections::{BTreeMap, BTreeSet, HashSet};

/// Deepest initialiser nesting followed (`{ { { ... } } }`).
const MAX_NESTING: usize = 16;

#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash)]
enum Key {
    Field(String),
    Var(String),
}

/// One call from a caller: to whom, where, and whether through a pointer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Edge {
    pub callee: FuncRef,
    pub span: Span,
    pub indirect: bool,
}

/// A call through a pointer that no binding resolves.
#[derive(Debug, Clone, PartialEq)]
pub struct Unresolved {
    pub caller: FuncRef,
    pub span: Span,
    /// The callee as C text (`cb`, `t->on_tick`).
    pub text: String,
}

#[derive(Debug, Default)]
pub struct CallGraph {
    /// Caller to its calls, each callee once (the first call's place).
    pub callees: BTreeMap<FuncRef, Vec<Edge>>,
    /// Callee to its callers, each once, with the first call's place.
    pub callers: BTreeMap<FuncRef, Vec<(FuncRef, Span)>>,
    pub unresolved: Vec<Unresolved>,
    /// Functions whose name is used as a value where no key is known, or bound to a key
    /// that no call reads: what an unresolved call may reach.
    pub escaped: BTreeSet<FuncRef>,
}

/// The function a name used in `file` means (its own file's first, as a call would).
fn function_in(program: &Program, file: usize, name: &str) -> Option<FuncRef> {
    let refs = program.functions_named(name);
    refs.iter()
        .find(|f| f.file == file)
        .or_else(|| refs.first())
        .copied()
}

/// The function named by a value (`pump_run`, `&pump_run`, `(task_fn)pump_run`).
fn function_value<'e>(program: &Program, e: &'e Expr) -> Option<&'e str> {
    match &e.kind {
        ExprKind::Ident(name) if !program.functions_named(name).is_empty() => Some(name),
        ExprKind::Unary {
            op: UnaryOp::AddrOf,
            arg,
        }
        | ExprKind::Cast { arg, .. } => function_value(program, arg),
        _ => None,
    }
}

/// The key of a place a pointer is stored in or read from.
fn key_of(e: &Expr) -> Option<Key> {
    match &e.kind {
        ExprKind::Field { field, .. } => Some(Key::Field(field.to_string())),
        ExprKind::Ident(name) => Some(Key::Var(name.to_string())),
        ExprKind::Index { base, .. } => key_of(base),
        ExprKind::Unary {
            op: UnaryOp::Deref,
            arg,
        }
        | ExprKind::Cast { arg, .. } => key_of(arg),
        _ => None,
    }
}

struct Builder<'p> {
    program: &'p Program,
    bindings: BTreeMap<Key, BTreeSet<FuncRef>>,
    /// Starts of the name uses that are bindings or direct callees, not escapes.
    placed: HashSet<(usize, u32)>,
    /// Every function name used as a value: its place and the function.
    values: Vec<((usize, u32), FuncRef)>,
}

impl Builder<'_> {
    fn bind(&mut self, key: Key, file: usize, value: &Expr) -> bool {
        let Some(name) = function_value(self.program, value) else {
            return false;
        };
        let Some(f) = function_in(self.program, file, name) else {
            return false;
        };
        self.bindings.entry(key).or_default().insert(f);
        self.placed.insert((file, value.span.start));
        let mut inner = value;
        while let ExprKind::Unary { arg, .. } | ExprKind::Cast { arg, .. } = &inner.kind {
            inner = arg;
            self.placed.insert((file, inner.span.start));
        }
        true
    }

    /// Binds the function names an initialiser of a variable of type `ty` stores.
    fn initialiser(
        &mut self,
        var: &str,
        ty: &CType,
        init: &Initializer,
        file: usize,
        depth: usize,
    ) {
        if depth > MAX_NESTING {
            return;
        }
        match init {
            Initializer::Expr(e) => {
                self.bind(Key::Var(var.to_string()), file, e);
            }
            Initializer::List(items) => {
                let resolved = self.program.resolve_type(ty);
                match &resolved {
                    CType::Array(element, _) => {
                        for (designator, item) in items {
                            // `[2] = f` designators index arrays; a field designator means
                            // the element type is not what was read.
                            let _ = designator;
                            self.initialiser(var, element, item, file, depth + 1);
                        }
                    }
                    _ => {
                        let fields: Vec<(String, CType)> = self
                            .program
                            .struct_fields(&resolved)
                            .map(|f| f.iter().map(|p| (p.name.clone(), p.ty.clone())).collect())
                            .unwrap_or_default();
                        let mut position = 0;
                        for (designator, item) in items {
                            if let Some(d) = designator {
                                let d = d.trim_start_matches('.');
                                if let Some(p) = fields.iter().position(|(n, _)| n == d) {
                                    position = p;
                                }
                            }
                            let field = designator
                                .as_deref()
                                .map(|d| d.trim_start_matches('.').to_string())
                                .or_else(|| fields.get(position).map(|(n, _)| n.clone()));
                            let field_ty = fields
                                .get(position)
                                .map(|(_, t)| t.clone())
                                .unwrap_or_else(|| CType::Unknown(String::new()));
                            match (item, field) {
                                (Initializer::Expr(e), Some(field)) => {
                                    self.bind(Key::Field(field), file, e);
                                }
                                // A stored function whose field is not known: it may be
                                // called through any pointer.
                                (Initializer::Expr(e), None) => {
                                    if let Some(g) = function_value(self.program, e)
                                        .and_then(|n| function_in(self.program, file, n))
                                    {
                                        self.values.push(((file, u32::MAX), g));
                                    }
                                }
                                (list, _) => {
                                    self.initialiser(var, &field_ty, list, file, depth + 1)
                                }
                            }
                            position += 1;
                        }
                    }
                }
            }
        }
    }

    fn decl(&mut self, d: &LocalDecl, file: usize) {
        if let Some(init) = &d.init {
            self.initialiser(&d.name, &d.ty, init, file, 0);
        }
    }
}

fn decls_in<'a>(stmts: &'a [Stmt], out: &mut Vec<&'a LocalDecl>) {
    for stmt in stmts {
        match stmt {
            Stmt::Decl(ds) => out.extend(ds.iter()),
            Stmt::Block(items) => decls_in(items, out),
            Stmt::If {
                then, otherwise, ..
            } => {
                decls_in(std::slice::from_ref(then), out);
                if let Some(o) = otherwise {
                    decls_in(std::slice::from_ref(o), out);
                }
            }
            Stmt::Loop { init, body, .. } => {
                decls_in(init, out);
                decls_in(std::slice::from_ref(body), out);
            }
            Stmt::Switch { body, .. } => decls_in(std::slice::from_ref(body), out),
            Stmt::Conditional(branches) => {
                for (_, b) in branches {
                    decls_in(b, out);
                }
            }
            _ => {}
        }
    }
}

/// Whether `name` is a variable (parameter, local or global) seen from `f`.
fn is_variable(program: &Program, f: FuncRef, name: &str) -> bool {
    let function = program.function(f);
    function.params.iter().any(|p| p.name == name)
        || crate::eval::find_local(function, name).is_some()
        || program.global_seen_from(name, Some(f.file)).is_some()
}

/// A call that is not of a function the program defines: through a pointer, or of a
/// library function. Whether the callee is known to be a variable (else a bare name that is
/// a pointer only if something is stored in it).
fn indirect_callee(program: &Program, f: FuncRef, callee: &Expr) -> Option<bool> {
    match &callee.kind {
        ExprKind::Ident(name) => program
            .functions_named(name)
            .is_empty()
            .then(|| is_variable(program, f, name)),
        _ => Some(true),
    }
}

pub fn build(program: &Program) -> CallGraph {
    let mut b = Builder {
        program,
        bindings: BTreeMap::new(),
        placed: HashSet::new(),
        values: Vec::new(),
    };
    for (fi, file) in program.files.iter().enumerate() {
        for g in &file.globals {
            b.decl(&g.decl, fi);
        }
    }
    // Direct calls, indirect calls with their keys, assignments of functions, and every
    // use of a function's name as a value.
    let mut direct: Vec<(FuncRef, FuncRef, Span)> = Vec::new();
    let mut indirect: Vec<(FuncRef, Option<Key>, Span, String, bool)> = Vec::new();
    for f in program.functions() {
        let function = program.function(f);
        let body = function.body();
        let mut decls = Vec::new();
        decls_in(&body, &mut decls);
        for d in decls {
            b.decl(d, f.file);
        }
        crate::index::visit_stmts(&body, &mut |e| match &e.kind {
            ExprKind::Call { callee, .. } => match indirect_callee(program, f, callee) {
                None => {
                    if let ExprKind::Ident(name) = &callee.kind {
                        b.placed.insert((f.file, callee.span.start));
                        if let Some(target) = program.resolve_call(f, name) {
                            direct.push((f, target, e.span));
                        }
                    }
                }
                Some(variable) => {
                    indirect.push((f, key_of(callee), e.span, callee.to_string(), variable))
                }
            },
            ExprKind::Assign { target, value, .. } => {
                if let Some(key) = key_of(target) {
                    b.bind(key, f.file, value);
                }
            }
            ExprKind::Ident(name)
                if !program.functions_named(name).is_empty() && !is_variable(program, f, name) =>
            {
                if let Some(g) = function_in(program, f.file, name) {
                    b.values.push(((f.file, e.span.start), g));
                }
            }
            _ => {}
        });
    }
    let mut graph = CallGraph::default();
    let add = |graph: &mut CallGraph, caller: FuncRef, edge: Edge| {
        let list = graph.callees.entry(caller).or_default();
        if !list.iter().any(|x| x.callee == edge.callee) {
            list.push(edge);
        }
        let back = graph.callers.entry(edge.callee).or_default();
        if !back.iter().any(|(c, _)| *c == caller) {
            back.push((caller, edge.span));
        }
    };
    for (caller, callee, span) in direct {
        add(
            &mut graph,
            caller,
            Edge {
                callee,
                span,
                indirect: false,
            },
        );
    }
    let mut read_keys = BTreeSet::new();
    for (caller, key, span, text, variable) in indirect {
        let targets = key.as_ref().and_then(|k| b.bindings.get(k));
        if targets.is_none() && !variable {
            continue; // A function the scan does not define (a library's).
        }
        match targets {
            Some(targets) => {
                for &callee in targets {
                    add(
                        &mut graph,
                        caller,
                        Edge {
                            callee,
                            span,
                            indirect: true,
                        },
                    );
                }
            }
            None => graph.unresolved.push(Unresolved { caller, span, text }),
        }
        if let Some(k) = key {
            read_keys.insert(k);
        }
    }
    for (place, f) in &b.values {
        if !b.placed.contains(place) {
            graph.escaped.insert(*f);
        }
    }
    for (key, targets) in &b.bindings {
        if !read_keys.contains(key) {
            graph.escaped.extend(targets.iter().copied());
        }
    }
    graph
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::index::ProgramOptions;
    use crate::ir::FileId;
    use crate::parse::parse_file;

    fn program(files: &[&str]) -> Program {
        let irs = files
            .iter()
            .enumerate()
            .map(|(i, src)| parse_file(FileId(i as u32), src.as_bytes()))
            .collect();
        let paths = (0..files.len()).map(|i| format!("f{i}.c")).collect();
        Program::build(irs, paths, ProgramOptions::default())
    }

    fn callees_of(p: &Program, g: &CallGraph, name: &str) -> Vec<String> {
        let Some(f) = p.function_by_name(name) else {
            return Vec::new();
        };
        let mut names: Vec<String> = g
            .callees
            .get(&f)
            .map(|edges| {
                edges
                    .iter()
                    .map(|e| p.function(e.callee).name.clone())
                    .collect()
            })
            .unwrap_or_default();
        names.sort();
        names
    }

    #[test]
    fn task_tables_and_ops_structs_resolve_across_files() {
        let tables = "typedef void (*task_fn)(void);\n\
            struct task { task_fn fn; unsigned period_ms; };\n\
            void coolant_sample(void); void housekeeping(void); void pump_run(void);\n\
            const struct task tasks[] = { { coolant_sample, 1 }, { .period_ms = 20, .fn = housekeeping } };\n\
            struct ops { int id; void (*run)(void); };\n\
            struct ops pump_ops = { 3, pump_run };\n";
        let code = "struct task { void (*fn)(void); unsigned period_ms; };\n\
            struct ops { int id; void (*run)(void); };\n\
            extern const struct task tasks[]; extern struct ops pump_ops;\n\
            void coolant_sample(void) { }\n void housekeeping(void) { }\n void pump_run(void) { }\n\
            void scheduler(void) { for (int i = 0; i < 2; i++) tasks[i].fn(); }\n\
            void pump_tick(struct ops *o) { o->run(); }\n";
        let p = program(&[tables, code]);
        let g = build(&p);
        assert_eq!(
            callees_of(&p, &g, "scheduler"),
            vec!["coolant_sample", "housekeeping"]
        );
        assert_eq!(callees_of(&p, &g, "pump_tick"), vec!["pump_run"]);
        assert!(g.unresolved.is_empty(), "{:?}", g.unresolved);
        assert!(g.escaped.is_empty(), "{:?}", g.escaped);
    }

    #[test]
    fn assigned_pointers_resolve_and_registered_ones_escape() {
        let src = "void fast(void) { } void slow(void) { } void late(void) { }\n\
            void register_cb(void (*f)(void));\n\
            static void (*tick_hook)(void);\n\
            void setup(void) { tick_hook = &fast; register_cb(slow); }\n\
            void isr(void) { tick_hook(); }\n\
            void run_cb(void (*cb)(void)) { cb(); }\n";
        let p = program(&[src]);
        let g = build(&p);
        assert_eq!(callees_of(&p, &g, "isr"), vec!["fast"]);
        // `cb` has no binding: unresolved, and `slow`, passed as a value, may be it.
        assert_eq!(g.unresolved.len(), 1, "{:?}", g.unresolved);
        assert_eq!(g.unresolved[0].text, "cb");
        let escaped: Vec<&str> = g
            .escaped
            .iter()
            .map(|f| p.function(*f).name.as_str())
            .collect();
        assert_eq!(escaped, vec!["slow"]);
        // A direct call is an edge, not an escape.
        assert_eq!(callees_of(&p, &g, "setup"), Vec::<String>::new());
    }
}

//! The whole program: every file's IR gathered into tables that answer "where is this
//! name defined, and what is written to this place".
//!
//! It holds macros (with the `#if` branch each sits in and whether that branch is built
//! with the active defines), enum constants, globals, struct definitions, typedefs,
//! functions, every assignment in every function body, and every call. It evaluates
//! preprocessor conditions itself, with a deliberately small lookup (command-line defines
//! and unconditional macros), so that it never depends on the evaluator it serves.
//! It knows nothing of smoothers; `recognise` asks it questions.

use crate::eval::num::Target;
use crate::ir::*;
use once_cell::race::OnceBox;
use std::collections::{BTreeMap, HashMap, HashSet};

mod ppexpr;

/// A function by position: file index and function index within that file.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize, serde::Deserialize,
)]
pub struct FuncRef {
    pub file: usize,
    pub index: usize,
}

/// An assignment found in a function body: `target op= value`.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct Write {
    pub function: FuncRef,
    pub target: String,
    pub op: Option<BinaryOp>,
    pub value: Expr,
    pub span: Span,
    /// The write is a statement of the function's body itself, not inside a branch or a
    /// loop: it happens on every call, after the ones written before it.
    pub unconditional: bool,
}

#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct CallSite {
    pub caller: FuncRef,
    /// The name called, shared with the IR's.
    pub callee: std::sync::Arc<str>,
    /// The call's arguments, shared with the IR's call expression (not kept in the
    /// cache: `Program::restore_call_arguments` takes them from the IR again).
    #[serde(skip)]
    pub args: std::sync::Arc<Vec<Expr>>,
    pub span: Span,
}

/// The analysis options that change what the program means.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct ProgramOptions {
    pub target: Target,
    /// `-D NAME=VALUE` (or `-D NAME`, which means 1).
    pub defines: BTreeMap<String, String>,
    /// The defines describe a whole build (a compilation database): a name defined
    /// nowhere is undefined. Otherwise it may come from the build system, and code under
    /// it is still read for smoothers.
    pub complete_defines: bool,
}

/// Per macro, by position: no keys to store and no hashing on the hot path (a vendor's
/// device headers define hundreds of thousands of macros).
fn macro_cells<T>(files: &[FileIr]) -> Vec<Vec<OnceBox<T>>> {
    files
        .iter()
        .map(|f| (0..f.macros.len()).map(|_| OnceBox::new()).collect())
        .collect()
}

/// A three-valued truth: what a preprocessor condition is known to be.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Tri {
    True,
    False,
    Unknown,
}

impl Tri {
    pub fn negate(self) -> Tri {
        match self {
            Tri::True => Tri::False,
            Tri::False => Tri::True,
            Tri::Unknown => Tri::Unknown,
        }
    }
    pub fn and(self, other: Tri) -> Tri {
        match (self, other) {
            (Tri::False, _) | (_, Tri::False) => Tri::False,
            (Tri::True, Tri::True) => Tri::True,
            _ => Tri::Unknown,
        }
    }
    pub fn or(self, other: Tri) -> Tri {
        match (self, other) {
            (Tri::True, _) | (_, Tri::True) => Tri::True,
            (Tri::False, Tri::False) => Tri::False,
            _ => Tri::Unknown,
        }
    }
}

/// A macro body parsed once: as an expression, as statements, or neither.
#[derive(Debug, Clone)]
pub enum MacroBody {
    Expr(Expr),
    Stmts(Vec<Stmt>),
    Neither,
}

/// A macro definition by position: file index and index within the file.
pub type MacroRef = (usize, usize);

#[derive(serde::Serialize, serde::Deserialize)]
pub struct Program {
    #[serde(skip)]
    pub files: Vec<FileIr>,
    /// Path of each file relative to the scan root, with '/' separators.
    #[serde(skip)]
    pub paths: Vec<String>,
    #[serde(skip)]
    pub options: ProgramOptions,
    macros: HashMap<std::sync::Arc<str>, Vec<(usize, usize)>>,
    /// Whether each macro's `#if` branch is built, by file and index within the file.
    macro_active: Vec<Vec<bool>>,
    /// Object-like macro bodies parsed as expressions, on first use.
    #[serde(skip)]
    macro_exprs: Vec<Vec<OnceBox<Option<Expr>>>>,
    enums: HashMap<String, (usize, usize)>,
    globals: HashMap<String, Vec<(usize, usize)>>,
    /// Globals by file and name: the common lookup, kept cheap when a name recurs in
    /// many files.
    globals_by_file: HashMap<(usize, String), Vec<usize>>,
    functions: HashMap<String, Vec<FuncRef>>,
    structs: HashMap<String, (usize, usize)>,
    typedefs: HashMap<String, CType>,
    writes: Vec<Write>,
    writes_by_target: HashMap<String, Vec<usize>>,
    /// The same, per file: a `static` name is written only in its own file, and names such
    /// as `state` recur in many files.
    writes_by_file_target: HashMap<(usize, String), Vec<usize>>,
    calls: Vec<CallSite>,
    calls_by_callee: HashMap<std::sync::Arc<str>, Vec<usize>>,
    /// Calls by the function they are made in, in file order.
    calls_by_caller: HashMap<FuncRef, Vec<usize>>,
    /// Calls by the text of an address-of argument (`&g_oven`), for init functions.
    calls_by_address_arg: HashMap<String, Vec<usize>>,
    /// Calls by the array of an `&arr[k]` argument, for init calls of array elements.
    calls_by_element_arg: HashMap<String, Vec<usize>>,
    /// Whether each macro name is defined with the active defines (computed once).
    defined: HashMap<std::sync::Arc<str>, bool>,
    /// What each macro name is known to be (defined, undefined, or either).
    defined_tri: HashMap<std::sync::Arc<str>, Tri>,
    /// For each file, each `#include`'s possible files of the scan.
    includes: Vec<Vec<Vec<usize>>>,
    /// Each file's include closure (itself and what it includes, transitively), on first use.
    #[serde(skip)]
    closures: Vec<std::sync::OnceLock<Vec<usize>>>,
    /// Every macro body parsed as statements or an expression, on first use.
    #[serde(skip)]
    macro_bodies: Vec<Vec<OnceBox<MacroBody>>>,
    /// `#if` texts already judged (three-valued).
    #[serde(skip)]
    pp_cache: std::sync::RwLock<HashMap<String, Tri>>,
    /// `#if` texts already judged as the default build takes them (two-valued).
    #[serde(skip)]
    pp_holds: std::sync::RwLock<HashMap<String, bool>>,
    /// Macro bodies parsed, once per text.
    #[serde(skip)]
    snippets: crate::parse::Snippets,
}

impl Program {
    pub fn build(files: Vec<FileIr>, paths: Vec<String>, options: ProgramOptions) -> Program {
        let mut program = Program {
            files,
            paths,
            options,
            macros: HashMap::new(),
            macro_active: Vec::new(),
            macro_exprs: Vec::new(),
            enums: HashMap::new(),
            globals: HashMap::new(),
            globals_by_file: HashMap::new(),
            functions: HashMap::new(),
            structs: HashMap::new(),
            typedefs: HashMap::new(),
            writes: Vec::new(),
            writes_by_target: HashMap::new(),
            writes_by_file_target: HashMap::new(),
            calls: Vec::new(),
            calls_by_callee: HashMap::new(),
            calls_by_caller: HashMap::new(),
            calls_by_address_arg: HashMap::new(),
            calls_by_element_arg: HashMap::new(),
            defined: HashMap::new(),
            defined_tri: HashMap::new(),
            includes: Vec::new(),
            closures: Vec::new(),
            macro_bodies: Vec::new(),
            pp_cache: std::sync::RwLock::new(HashMap::new()),
            pp_holds: std::sync::RwLock::new(HashMap::new()),
            snippets: Default::default(),
        };
        for (fi, file) in program.files.iter().enumerate() {
            for (i, m) in file.macros.iter().enumerate() {
                program
                    .macros
                    .entry(m.name.clone())
                    .or_default()
                    .push((fi, i));
            }
            for (i, e) in file.enums.iter().enumerate() {
                program.enums.entry(e.name.clone()).or_insert((fi, i));
            }
            for (i, g) in file.globals.iter().enumerate() {
                program
                    .globals
                    .entry(g.decl.name.clone())
                    .or_default()
                    .push((fi, i));
                program
                    .globals_by_file
                    .entry((fi, g.decl.name.clone()))
                    .or_default()
                    .push(i);
            }
            for (i, s) in file.structs.iter().enumerate() {
                program.structs.entry(s.name.clone()).or_insert((fi, i));
            }
            for (name, ty) in &file.typedefs {
                program
                    .typedefs
                    .entry(name.clone())
                    .or_insert_with(|| ty.clone());
            }
            for (i, f) in file.functions.iter().enumerate() {
                if f.name == "tauscan_snippet" {
                    continue;
                }
                program
                    .functions
                    .entry(f.name.clone())
                    .or_default()
                    .push(FuncRef { file: fi, index: i });
            }
        }
        let started = std::time::Instant::now();
        program.compute_definedness();
        crate::scan::phase("  definedness", started);
        let started = std::time::Instant::now();
        program.resolve_includes();
        crate::scan::phase("  includes", started);
        let started = std::time::Instant::now();
        program.macro_bodies = macro_cells(&program.files);
        program.macro_exprs = macro_cells(&program.files);
        program.macro_active = program
            .files
            .iter()
            .map(|f| {
                f.macros
                    .iter()
                    .map(|m| program.condition_holds(&m.condition))
                    .collect()
            })
            .collect();
        crate::scan::phase("  macro-active", started);
        let started = std::time::Instant::now();
        program.collect_writes_and_calls();
        crate::scan::phase("  writes+calls", started);
        program
    }

    /// Whether `self`, read back from a cache without its files, was built from files of
    /// these shapes: every position its tables hold is one of these files' macros,
    /// functions, globals, enums and structs, and every write and call it lists is there.
    /// An entry that decodes but does not fit (a damaged disk, another tool's file) is not
    /// used, rather than followed to a panic.
    pub fn fits(&self, files: &[FileIr]) -> bool {
        let n = files.len();
        let macro_at =
            |&(fi, i): &(usize, usize)| files.get(fi).is_some_and(|f| i < f.macros.len());
        let function_at = |r: &FuncRef| {
            files
                .get(r.file)
                .is_some_and(|f| r.index < f.functions.len())
        };
        let global_at =
            |&(fi, i): &(usize, usize)| files.get(fi).is_some_and(|f| i < f.globals.len());
        let writes = self.writes.len();
        let calls = self.calls.len();
        self.includes.len() == n
            && self.macro_active.len() == n
            && self
                .macro_active
                .iter()
                .zip(files)
                .all(|(active, f)| active.len() == f.macros.len())
            && self.macros.values().flatten().all(macro_at)
            && self
                .enums
                .values()
                .all(|&(fi, i)| files.get(fi).is_some_and(|f| i < f.enums.len()))
            && self
                .structs
                .values()
                .all(|&(fi, i)| files.get(fi).is_some_and(|f| i < f.structs.len()))
            && self.globals.values().flatten().all(global_at)
            && self
                .globals_by_file
                .iter()
                .all(|((fi, _), list)| list.iter().all(|&i| global_at(&(*fi, i))))
            && self.functions.values().flatten().all(function_at)
            && self.writes.iter().all(|w| function_at(&w.function))
            && self.calls.iter().all(|c| function_at(&c.caller))
            && self.calls_by_caller.keys().all(function_at)
            && self.calls_by_callee.values().flatten().all(|&i| i < calls)
            && [
                &self.writes_by_target,
                &self.calls_by_address_arg,
                &self.calls_by_element_arg,
            ]
            .iter()
            .zip([writes, calls, calls])
            .all(|(table, len)| table.values().flatten().all(|&i| i < len))
            && self
                .writes_by_file_target
                .values()
                .flatten()
                .all(|&i| i < writes)
            && self.calls_by_caller.values().flatten().all(|&i| i < calls)
            && self.includes.iter().flatten().flatten().all(|&f| f < n)
    }

    /// A program read back from a cache (its tables only), given its files, paths and
    /// options again; the tables filled on first use start empty.
    pub fn attach(
        mut self,
        files: Vec<FileIr>,
        paths: Vec<String>,
        options: ProgramOptions,
    ) -> Program {
        self.macro_bodies = macro_cells(&files);
        self.macro_exprs = macro_cells(&files);
        self.closures = (0..files.len())
            .map(|_| std::sync::OnceLock::new())
            .collect();
        self.files = files;
        self.paths = paths;
        self.options = options;
        self
    }

    /// The arguments of every call site, taken from its call in `files` (the cache keeps
    /// the call table without them, as they are in the files' bodies already): each
    /// caller's calls are found in the order the table was built in, and each must have
    /// the site's caller, span and name; every site must be restored once. False when
    /// not, and the table cannot be used.
    pub fn restore_call_arguments(&mut self, files: &[FileIr]) -> bool {
        let calls = &mut self.calls;
        let mut restored = vec![false; calls.len()];
        for (caller, list) in &self.calls_by_caller {
            let Some(f) = files
                .get(caller.file)
                .and_then(|file| file.functions.get(caller.index))
            else {
                return false;
            };
            let body = f.body();
            let mut found = Vec::with_capacity(list.len());
            visit_stmts(&body, &mut |e| {
                if let Some((name, args)) = named_call(e) {
                    found.push((e, name, args));
                }
            });
            if found.len() != list.len() {
                return false;
            }
            for (&i, (e, name, args)) in list.iter().zip(found) {
                match (calls.get_mut(i), restored.get_mut(i)) {
                    (Some(call), Some(done))
                        if !*done
                            && call.caller == *caller
                            && call.span == e.span
                            && call.callee == *name =>
                    {
                        call.args = std::sync::Arc::clone(args);
                        call.callee = std::sync::Arc::clone(name);
                        *done = true;
                    }
                    _ => return false,
                }
            }
        }
        restored.iter().all(|&done| done)
    }

    fn collect_writes_and_calls(&mut self) {
        use rayon::prelude::*;
        // Each file's writes and calls on its own worker, then joined in file order, so
        // the tables are the same on any number of threads.
        let this: &Program = self;
        let per_file: Vec<(Vec<Write>, Vec<CallSite>)> = this
            .files
            .par_iter()
            .enumerate()
            .map(|(fi, file)| writes_and_calls_of(this, fi, file))
            .collect();
        let mut writes = Vec::with_capacity(per_file.iter().map(|(w, _)| w.len()).sum());
        let mut calls = Vec::with_capacity(per_file.iter().map(|(_, c)| c.len()).sum());
        for (w, c) in per_file {
            writes.extend(w);
            calls.extend(c);
        }
        for (i, w) in writes.iter().enumerate() {
            self.writes_by_target
                .entry(w.target.clone())
                .or_default()
                .push(i);
            self.writes_by_file_target
                .entry((w.function.file, w.target.clone()))
                .or_default()
                .push(i);
        }
        for (i, c) in calls.iter().enumerate() {
            self.calls_by_callee
                .entry(c.callee.clone())
                .or_default()
                .push(i);
            self.calls_by_caller.entry(c.caller).or_default().push(i);
            for a in c.args.iter() {
                if matches!(
                    a.kind,
                    ExprKind::Unary {
                        op: UnaryOp::AddrOf,
                        ..
                    }
                ) {
                    let list = self.calls_by_address_arg.entry(a.to_string()).or_default();
                    if list.last() != Some(&i) {
                        list.push(i);
                    }
                    if let ExprKind::Unary { arg, .. } = &a.kind {
                        if let ExprKind::Index { base, .. } = &arg.kind {
                            let list = self
                                .calls_by_element_arg
                                .entry(base.to_string())
                                .or_default();
                            if list.last() != Some(&i) {
                                list.push(i);
                            }
                        }
                    }
                }
            }
        }
        self.writes = writes;
        self.calls = calls;
    }

    pub fn function(&self, f: FuncRef) -> &Function {
        &self.files[f.file].functions[f.index]
    }

    pub fn functions(&self) -> impl Iterator<Item = FuncRef> + '_ {
        self.files.iter().enumerate().flat_map(|(fi, file)| {
            (0..file.functions.len()).map(move |i| FuncRef { file: fi, index: i })
        })
    }

    pub fn function_by_name(&self, name: &str) -> Option<FuncRef> {
        let refs = self.functions.get(name)?;
        // Prefer a definition whose preprocessor branch is built.
        refs.iter()
            .copied()
            .find(|f| self.condition_holds(&self.function(*f).condition))
            .or_else(|| refs.first().copied())
    }

    /// The function a call from `caller` to `name` reaches: one of that name in the
    /// caller's own file first (a `static` function is visible only there), else one that
    /// is not `static`, else any.
    pub fn resolve_call(&self, caller: FuncRef, name: &str) -> Option<FuncRef> {
        let refs = self.functions.get(name)?;
        let built = |f: &&FuncRef| self.condition_holds(&self.function(**f).condition);
        refs.iter()
            .filter(built)
            .find(|f| f.file == caller.file)
            .or_else(|| {
                refs.iter()
                    .filter(built)
                    .find(|f| !self.function(**f).is_static)
            })
            .or_else(|| refs.first())
            .copied()
    }

    /// What a function returns, from its definition (the one a call from `file` reaches)
    /// or else a prototype (the file's own, or its includes', or any file's).
    pub fn return_type(&self, name: &str, file: Option<usize>) -> Option<CType> {
        let defined = match file {
            Some(file) => self
                .functions_named(name)
                .iter()
                .find(|f| f.file == file)
                .or_else(|| self.functions_named(name).first()),
            None => self.functions_named(name).first(),
        };
        if let Some(f) = defined {
            return Some(self.function(*f).returns.clone());
        }
        let in_file = |fi: usize| {
            self.files
                .get(fi)?
                .prototypes
                .iter()
                .find(|(n, _)| n == name)
                .map(|(_, t)| t.clone())
        };
        if let Some(file) = file {
            for &fi in self.include_closure(file) {
                if let Some(t) = in_file(fi) {
                    return Some(t);
                }
            }
        }
        (0..self.files.len()).find_map(in_file)
    }

    /// All functions of a name (static functions of the same name in several files).
    pub fn functions_named(&self, name: &str) -> &[FuncRef] {
        self.functions.get(name).map(Vec::as_slice).unwrap_or(&[])
    }

    pub fn path(&self, file: FileId) -> &str {
        self.paths
            .get(file.0 as usize)
            .map(String::as_str)
            .unwrap_or("?")
    }

    /// The definition of a macro that the active defines select, if any.
    pub fn active_macro(&self, name: &str) -> Option<&MacroDef> {
        self.macro_for(name, None).map(|(_, m)| m)
    }

    /// The active definition a use in `file` sees (see `macro_for`).
    pub fn active_macro_in(&self, name: &str, file: Option<usize>) -> Option<&MacroDef> {
        self.macro_for(name, file).map(|(_, m)| m)
    }

    /// The active object-like macro of this name that a use in `file` sees, with its body
    /// parsed as an expression (None when the body is not an expression). Parsed once.
    pub fn macro_expr(
        &self,
        name: &str,
        file: Option<usize>,
    ) -> Option<(&MacroDef, Option<&Expr>)> {
        let (r, m) = self.macro_for(name, file)?;
        if m.params.is_some() {
            return None;
        }
        let cell = self.macro_exprs.get(r.0)?.get(r.1)?;
        let expr = cell
            .get_or_init(|| Box::new(self.snippets.expression(&m.body, m.span)))
            .as_ref();
        Some((m, expr))
    }

    /// Every definition of a macro, active or not.
    pub fn macro_definitions(&self, name: &str) -> Vec<&MacroDef> {
        self.macros
            .get(name)
            .map(|refs| {
                refs.iter()
                    .map(|&(fi, i)| &self.files[fi].macros[i])
                    .collect()
            })
            .unwrap_or_default()
    }

    pub fn is_macro(&self, name: &str) -> bool {
        self.macros.contains_key(name)
    }

    pub fn enum_const(&self, name: &str) -> Option<&EnumConst> {
        self.enums
            .get(name)
            .map(|&(fi, i)| &self.files[fi].enums[i])
    }

    pub fn enum_const_in(&self, name: &str) -> Option<(FileId, &EnumConst)> {
        self.enums
            .get(name)
            .map(|&(fi, i)| (self.files[fi].file, &self.files[fi].enums[i]))
    }

    /// The definition of a global: the one with an initialiser if there is one (an
    /// `extern` declaration carries none).
    pub fn global(&self, name: &str) -> Option<&LocalDecl> {
        self.global_seen_from(name, None)
    }

    /// The global a name means in `file`: one declared in that file first (a `static` one
    /// is visible only there), else one that is not `static`; among several, the one with
    /// an initialiser (an `extern` declaration carries none).
    pub fn global_seen_from(&self, name: &str, file: Option<usize>) -> Option<&LocalDecl> {
        if let Some(f) = file {
            if let Some(local) = self.globals_by_file.get(&(f, name.to_string())) {
                let decls: Vec<&GlobalDecl> = local
                    .iter()
                    .map(|&i| &self.files[f].globals[i])
                    .filter(|g| self.condition_holds(&g.condition))
                    .collect();
                if let Some(g) = decls
                    .iter()
                    .find(|g| g.decl.init.is_some())
                    .or(decls.first())
                {
                    return Some(&g.decl);
                }
            }
        }
        let refs = self.globals.get(name)?;
        let decls: Vec<(usize, &GlobalDecl)> = refs
            .iter()
            .map(|&(fi, i)| (fi, &self.files[fi].globals[i]))
            .filter(|(_, g)| self.condition_holds(&g.condition))
            .collect();
        fn pick<'g>(candidates: Vec<&(usize, &'g GlobalDecl)>) -> Option<&'g LocalDecl> {
            candidates
                .iter()
                .find(|(_, g)| g.decl.init.is_some())
                .or_else(|| candidates.first())
                .map(|(_, g)| &g.decl)
        }
        if let Some(f) = file {
            let here: Vec<_> = decls.iter().filter(|(fi, _)| *fi == f).collect();
            if !here.is_empty() {
                return pick(here);
            }
        }
        let visible: Vec<_> = decls.iter().filter(|(_, g)| !g.decl.is_static).collect();
        if !visible.is_empty() {
            return pick(visible);
        }
        pick(decls.iter().collect())
    }

    pub fn struct_def(&self, name: &str) -> Option<&StructDef> {
        self.structs
            .get(name)
            .map(|&(fi, i)| &self.files[fi].structs[i])
    }

    /// Follows typedef names to the type they stand for.
    pub fn resolve_type(&self, ty: &CType) -> CType {
        let mut current = ty.clone();
        for _ in 0..16 {
            match &current {
                CType::Named(name) => match self.typedefs.get(name) {
                    Some(next) => current = next.clone(),
                    None => return current,
                },
                CType::Pointer(inner) => return CType::Pointer(Box::new(self.resolve_type(inner))),
                CType::Array(inner, n) => {
                    return CType::Array(Box::new(self.resolve_type(inner)), n.clone())
                }
                _ => return current,
            }
        }
        current
    }

    /// Whether a name is a type (a typedef of the program or a C or `stdint.h` name).
    pub fn is_type_name(&self, name: &str) -> bool {
        self.typedefs.contains_key(name)
            || !matches!(
                crate::parse::type_from_name(name),
                CType::Named(_) | CType::Unknown(_)
            )
    }

    /// `(name) * x`, `(name) - x`, `(name) + x`, `(name) & x` are read by the C grammar
    /// as casts when it cannot know that `name` is not a type; when it is not, they are
    /// the binary operation (the common spelling of a parenthesised macro parameter or
    /// variable).
    pub fn cast_as_binary<'e>(
        &self,
        ty: &CType,
        arg: &'e Expr,
    ) -> Option<(BinaryOp, String, &'e Expr)> {
        let CType::Named(name) = ty else {
            return None;
        };
        if self.is_type_name(name) {
            return None;
        }
        let ExprKind::Unary { op, arg: inner } = &arg.kind else {
            return None;
        };
        let op = match op {
            UnaryOp::Deref => BinaryOp::Mul,
            UnaryOp::Neg => BinaryOp::Sub,
            UnaryOp::Plus => BinaryOp::Add,
            UnaryOp::AddrOf => BinaryOp::BitAnd,
            _ => return None,
        };
        Some((op, name.clone(), inner))
    }

    /// The fields of a struct type (after typedefs), if known.
    pub fn struct_fields(&self, ty: &CType) -> Option<&[Param]> {
        match self.resolve_type(ty) {
            CType::Struct(name) => self.struct_def(&name).map(|s| s.fields.as_slice()),
            _ => None,
        }
    }

    pub fn writes_to(&self, place: &str) -> impl Iterator<Item = &Write> {
        self.writes_by_target
            .get(place)
            .into_iter()
            .flatten()
            .map(|&i| &self.writes[i])
    }

    /// Writes to a place made in one file.
    pub fn writes_in_file(&self, place: &str, file: usize) -> impl Iterator<Item = &Write> {
        self.writes_by_file_target
            .get(&(file, place.to_string()))
            .into_iter()
            .flatten()
            .map(|&i| &self.writes[i])
    }

    /// Writes that can reach a place read in `file`: that file's own when it has any (a
    /// static or a file's own global), else every file's.
    pub fn writes_seen_from(&self, place: &str, file: usize) -> Vec<&Write> {
        let here: Vec<&Write> = self.writes_in_file(place, file).collect();
        if !here.is_empty() {
            return here;
        }
        let root = place
            .split(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
            .next()
            .unwrap_or(place);
        if self
            .global_seen_from(root, Some(file))
            .is_some_and(|g| g.is_static)
        {
            return Vec::new();
        }
        self.writes_to(place).collect()
    }

    pub fn calls_to(&self, callee: &str) -> impl Iterator<Item = &CallSite> {
        self.calls_by_callee
            .get(callee)
            .into_iter()
            .flatten()
            .map(|&i| &self.calls[i])
    }

    /// Every write to a place of the program, in file order.
    pub fn all_writes(&self) -> impl Iterator<Item = &Write> {
        self.writes.iter()
    }

    /// The calls made in function `caller`, in the order they are written.
    pub fn calls_from(&self, caller: FuncRef) -> impl Iterator<Item = &CallSite> {
        self.calls_by_caller
            .get(&caller)
            .into_iter()
            .flatten()
            .map(|&i| &self.calls[i])
    }

    /// Calls that pass `address` (the text of an `&x` expression) as an argument.
    pub fn calls_passing(&self, address: &str) -> impl Iterator<Item = &CallSite> {
        self.calls_by_address_arg
            .get(address)
            .into_iter()
            .flatten()
            .map(|&i| &self.calls[i])
    }

    /// Calls that pass the address of an element of `array` (`&array[k]`).
    pub fn calls_passing_element_of(&self, array: &str) -> impl Iterator<Item = &CallSite> {
        self.calls_by_element_arg
            .get(array)
            .into_iter()
            .flatten()
            .map(|&i| &self.calls[i])
    }

    /// Whether a place is a counter: stepped by a constant (`n++`, `n += 1`, `n = n + 1`).
    pub fn is_counter(&self, place: &str, file: usize) -> bool {
        self.writes_seen_from(place, file).into_iter().any(|w| {
            let constant_step = |e: &Expr| matches!(e.kind, ExprKind::Int { .. });
            match (&w.op, &w.value.kind) {
                (Some(BinaryOp::Add | BinaryOp::Sub), _) => constant_step(&w.value),
                (
                    None,
                    ExprKind::Binary {
                        op: BinaryOp::Add,
                        lhs,
                        rhs,
                    },
                ) => lhs.to_string() == place && constant_step(rhs),
                _ => false,
            }
        })
    }

    /// Whether a preprocessor condition holds with the active defines.
    pub fn condition_holds(&self, cond: &Condition) -> bool {
        cond.levels.iter().all(|level| {
            level.earlier.iter().all(|b| !self.branch_holds(b))
                && (level.branch == CondBranch::Else || self.branch_holds(&level.branch))
        })
    }

    fn is_defined(&self, name: &str) -> bool {
        self.options.defines.contains_key(name) || self.defined.get(name).copied().unwrap_or(false)
    }

    /// Works out, once, which macro names are defined: by a definition whose own branch is
    /// built (a header's include guard, a configuration header's `#ifndef` defaults), and
    /// what each is known to be when unknown names may come from the build.
    fn compute_definedness(&mut self) {
        // Judged in a fixed order, not the hash table's: of two names each defined where
        // the other is not (`#ifndef B` / `#define A`, then `#ifndef A` / `#define B`),
        // the one judged first counts the other as defined. Later definitions are judged
        // first, so the name defined first in file order holds, as the preprocessor
        // reading from the top has it.
        let mut names: Vec<(&(usize, usize), &std::sync::Arc<str>)> = self
            .macros
            .iter()
            .filter_map(|(name, refs)| Some((refs.first()?, name)))
            .collect();
        names.sort_unstable_by(|a, b| b.0.cmp(a.0).then_with(|| a.1.cmp(b.1)));
        let names: Vec<std::sync::Arc<str>> =
            names.into_iter().map(|(_, name)| name.clone()).collect();
        let mut defined = HashMap::new();
        let mut tri = HashMap::new();
        // An include guard (`#ifndef X` / `#define X` around a header) is undefined where
        // its header is read for the first time, which is where every use of the header's
        // contents stands: its `#ifndef` holds.
        for name in &names {
            let Some(refs) = self.macros.get(name) else {
                continue;
            };
            let guard = refs.iter().all(|&(fi, i)| {
                self.files[fi].macros[i]
                    .condition
                    .levels
                    .iter()
                    .any(|l| match &l.branch {
                        CondBranch::Ifndef(n) => n.as_str() == &**name,
                        CondBranch::If(text) => {
                            let t: String = text.chars().filter(|c| !c.is_whitespace()).collect();
                            t == format!("!defined({name})") || t == format!("!defined{name}")
                        }
                        _ => false,
                    })
            });
            if guard {
                defined.insert(name.clone(), false);
                tri.insert(name.clone(), Tri::False);
            }
        }
        for name in &names {
            let mut visiting = Vec::new();
            self.defined_rec(name, &mut visiting, &mut defined, 0);
            let mut visiting = Vec::new();
            self.defined_tri_rec(name, &mut visiting, &mut tri, 0);
        }
        self.defined = defined;
        self.defined_tri = tri;
    }

    fn defined_rec(
        &self,
        name: &str,
        visiting: &mut Vec<String>,
        memo: &mut HashMap<std::sync::Arc<str>, bool>,
        depth: u32,
    ) -> bool {
        if self.options.defines.contains_key(name) {
            return true;
        }
        if let Some(v) = memo.get(name) {
            return *v;
        }
        // While a name's own definitions are being judged it counts as undefined: that is
        // what an include guard (`#ifndef X` / `#define X`) means on first inclusion.
        if depth > 32 || visiting.iter().any(|v| v == name) {
            return false;
        }
        let Some((key, refs)) = self.macros.get_key_value(name) else {
            return false;
        };
        visiting.push(name.to_string());
        let mut result = false;
        for &(fi, i) in refs {
            let cond = &self.files[fi].macros[i].condition;
            let holds = cond.levels.iter().all(|level| {
                level
                    .earlier
                    .iter()
                    .all(|b| !self.branch_holds_with(b, visiting, memo, depth + 1))
                    && (level.branch == CondBranch::Else
                        || self.branch_holds_with(&level.branch, visiting, memo, depth + 1))
            });
            if holds {
                result = true;
                break;
            }
        }
        visiting.pop();
        memo.insert(key.clone(), result);
        result
    }

    fn branch_holds_with(
        &self,
        branch: &CondBranch,
        visiting: &mut Vec<String>,
        memo: &mut HashMap<std::sync::Arc<str>, bool>,
        depth: u32,
    ) -> bool {
        match branch {
            CondBranch::Ifdef(n) => self.defined_rec(n, visiting, memo, depth),
            CondBranch::Ifndef(n) => !self.defined_rec(n, visiting, memo, depth),
            CondBranch::Else => true,
            CondBranch::If(text) => {
                let replaced = replace_defined(text, |n| {
                    self.defined_rec(n, &mut visiting.clone(), memo, depth)
                });
                let mut seen = HashSet::new();
                let expanded = self.expand_pp_identifiers(&replaced, &mut seen, 0);
                pp_parse(&expanded)
                    .and_then(|e| pp_eval(&e))
                    .is_some_and(|v| v != 0)
            }
        }
    }

    fn defined_tri_rec(
        &self,
        name: &str,
        visiting: &mut Vec<String>,
        memo: &mut HashMap<std::sync::Arc<str>, Tri>,
        depth: u32,
    ) -> Tri {
        if self.options.defines.contains_key(name) {
            return Tri::True;
        }
        if let Some(v) = memo.get(name) {
            return *v;
        }
        if depth > 32 || visiting.iter().any(|v| v == name) {
            return Tri::False;
        }
        let Some((key, refs)) = self.macros.get_key_value(name) else {
            return self.undefined_name();
        };
        visiting.push(name.to_string());
        let mut result = Tri::False;
        for &(fi, i) in refs {
            let cond = &self.files[fi].macros[i].condition;
            let here = self.condition_tri_by(cond, &mut |n| {
                self.defined_tri_rec(n, visiting, memo, depth + 1)
            });
            result = result.or(here);
            if result == Tri::True {
                break;
            }
        }
        visiting.pop();
        memo.insert(key.clone(), result);
        result
    }

    /// What a name defined nowhere in the scan is: undefined in a complete build, else
    /// possibly defined by the build system.
    fn undefined_name(&self) -> Tri {
        if self.options.complete_defines {
            Tri::False
        } else {
            Tri::Unknown
        }
    }

    /// What a macro name is known to be, once the program is built.
    fn defined_tri_of(&self, name: &str) -> Tri {
        if self.options.defines.contains_key(name) {
            return Tri::True;
        }
        match self.defined_tri.get(name) {
            Some(t) => *t,
            None if self.macros.contains_key(name) => Tri::Unknown,
            None => self.undefined_name(),
        }
    }

    fn condition_tri_by(&self, cond: &Condition, defined: &mut dyn FnMut(&str) -> Tri) -> Tri {
        let mut all = Tri::True;
        for level in cond.levels.iter() {
            for b in &level.earlier {
                all = all.and(self.branch_tri_by(b, defined).negate());
            }
            if level.branch != CondBranch::Else {
                all = all.and(self.branch_tri_by(&level.branch, defined));
            }
            if all == Tri::False {
                return all;
            }
        }
        all
    }

    fn branch_tri_by(&self, branch: &CondBranch, defined: &mut dyn FnMut(&str) -> Tri) -> Tri {
        match branch {
            CondBranch::Ifdef(n) => defined(n),
            CondBranch::Ifndef(n) => defined(n).negate(),
            CondBranch::Else => Tri::True,
            CondBranch::If(text) => {
                if let Ok(cache) = self.pp_cache.read() {
                    if let Some(t) = cache.get(text) {
                        return *t;
                    }
                }
                let t = self.pp_tri(text, defined);
                if !self.defined_tri.is_empty() {
                    if let Ok(mut cache) = self.pp_cache.write() {
                        cache.insert(text.clone(), t);
                    }
                }
                t
            }
        }
    }

    /// An `#if` expression, three-valued: known true, known false, or depending on names
    /// the scan cannot know (left to the build).
    fn pp_tri(&self, text: &str, defined: &mut dyn FnMut(&str) -> Tri) -> Tri {
        let replaced = replace_defined_tri(text, |n| match defined(n) {
            Tri::True => Some(true),
            Tri::False => Some(false),
            Tri::Unknown => None,
        });
        let expanded = map_identifiers(&replaced, |ident| {
            if ident == "__tauscan_unknown" {
                return None;
            }
            if let Some(v) = self.options.defines.get(ident) {
                return Some(format!("({})", if v.is_empty() { "1" } else { v }));
            }
            let def = self.macros.get(ident).and_then(|refs| {
                refs.iter()
                    .map(|&(fi, i)| &self.files[fi].macros[i])
                    .find(|m| m.condition.is_unconditional() && m.params.is_none())
            });
            if let Some(m) = def {
                let mut seen = HashSet::new();
                return Some(format!(
                    "({})",
                    self.expand_pp_identifiers(&m.body, &mut seen, 1)
                ));
            }
            match defined(ident) {
                Tri::False => Some("0".into()),
                _ => Some("__tauscan_unknown".into()),
            }
        });
        let Some(expr) = pp_parse(&expanded) else {
            return Tri::Unknown;
        };
        match pp_eval_tri(&expr) {
            Some(v) => {
                if v != 0 {
                    Tri::True
                } else {
                    Tri::False
                }
            }
            None => Tri::Unknown,
        }
    }

    /// Whether code under a condition may be built: false only for a branch known not to
    /// be (`#if 0`, the `#else` of a branch known taken, a name known undefined in a
    /// complete build). Code that may be built is read for smoothers, so an audit sees
    /// every board's and every option's filters.
    pub fn condition_possible(&self, cond: &Condition) -> bool {
        self.condition_tri(cond) != Tri::False
    }

    /// What a condition is known to be.
    pub fn condition_tri(&self, cond: &Condition) -> Tri {
        if cond.is_unconditional() {
            return Tri::True;
        }
        self.condition_tri_by(cond, &mut |n| self.defined_tri_of(n))
    }

    /// One `#if` branch's condition, three-valued.
    pub fn branch_tri(&self, branch: &CondBranch) -> Tri {
        self.branch_tri_by(branch, &mut |n| self.defined_tri_of(n))
    }

    /// A relative path with `.` and `..` segments resolved (`a/b/../c` is `a/c`); a `..` that
    /// climbs out of the root is kept.
    fn normalise_path(path: &str) -> String {
        let mut parts: Vec<&str> = Vec::new();
        for segment in path.split('/') {
            match segment {
                "" | "." => {}
                ".." if parts.last().is_some_and(|p| *p != "..") => {
                    parts.pop();
                }
                other => parts.push(other),
            }
        }
        parts.join("/")
    }

    /// Finds, for each `#include` of each file, the files of the scan it can name: the file
    /// of that path relative to the including file's folder, else those whose path ends
    /// with it. Which of several is meant depends on the file being compiled (each board's
    /// `hal.h` is included by the shared headers of every board): `include_closure`
    /// chooses, from the file at the root.
    fn resolve_includes(&mut self) {
        let mut by_name: HashMap<&str, Vec<usize>> = HashMap::new();
        for (i, p) in self.paths.iter().enumerate() {
            let base = p.rsplit('/').next().unwrap_or(p);
            by_name.entry(base).or_default().push(i);
        }
        let mut includes = Vec::with_capacity(self.files.len());
        for (fi, file) in self.files.iter().enumerate() {
            let dir = self
                .paths
                .get(fi)
                .and_then(|p| p.rsplit_once('/').map(|(d, _)| d.to_string()))
                .unwrap_or_default();
            let mut out: Vec<Vec<usize>> = Vec::new();
            for inc in &file.includes {
                if !self.condition_possible_simple(&inc.condition) {
                    continue;
                }
                let wanted = inc.path.trim_start_matches("./");
                let base = wanted.rsplit('/').next().unwrap_or(wanted);
                let Some(cands) = by_name.get(base) else {
                    continue;
                };
                let joined = Self::normalise_path(&if dir.is_empty() {
                    wanted.to_string()
                } else {
                    format!("{dir}/{wanted}")
                });
                // A path that climbs (`../../common/ctrl.h`) names its file by what
                // follows the climb when it leaves the scan.
                let wanted = wanted.trim_start_matches("../").trim_start_matches("./");
                let relative: Vec<usize> = cands
                    .iter()
                    .copied()
                    .filter(|&c| self.paths[c] == joined && c != fi)
                    .collect();
                let choices = if relative.is_empty() {
                    cands
                        .iter()
                        .copied()
                        .filter(|&c| {
                            let p = &self.paths[c];
                            c != fi && (p == wanted || p.ends_with(&format!("/{wanted}")))
                        })
                        .collect()
                } else {
                    relative
                };
                if !choices.is_empty() {
                    out.push(choices);
                }
            }
            includes.push(out);
        }
        self.closures = (0..self.files.len())
            .map(|_| std::sync::OnceLock::new())
            .collect();
        self.includes = includes;
    }

    fn condition_possible_simple(&self, cond: &Condition) -> bool {
        // Before definedness is known everything may be built; after, the real answer.
        cond.is_unconditional() || self.defined_tri.is_empty() || self.condition_possible(cond)
    }

    /// The files a file sees: itself and everything it includes, transitively (at most a
    /// few thousand files; a breadth-first walk in include order).
    pub fn include_closure(&self, file: usize) -> &[usize] {
        let Some(cell) = self.closures.get(file) else {
            return &[];
        };
        cell.get_or_init(|| {
            // Of several files an include can name, the one nearest the file compiled: the
            // longest common folder with it, then the shortest path.
            let root = self.paths.get(file).map(String::as_str).unwrap_or("");
            let shared = |p: &str| {
                root.split('/')
                    .zip(p.split('/'))
                    .take_while(|(a, b)| a == b)
                    .count()
            };
            let mut seen = vec![file];
            let mut queue = std::collections::VecDeque::from([file]);
            while let Some(f) = queue.pop_front() {
                for choices in self.includes.get(f).map(Vec::as_slice).unwrap_or(&[]) {
                    let Some(&next) = choices.iter().max_by_key(|&&c| {
                        let p = &self.paths[c];
                        (shared(p), std::cmp::Reverse(p.len()), std::cmp::Reverse(c))
                    }) else {
                        continue;
                    };
                    if !seen.contains(&next) {
                        seen.push(next);
                        queue.push_back(next);
                        if seen.len() > 4096 {
                            return seen;
                        }
                    }
                }
            }
            seen
        })
    }

    /// The definition of a macro that a use in `file` sees: an active one in the file or
    /// what it includes first (board headers that define the same name differently are
    /// told apart by which one the file includes), else any active one.
    pub fn macro_for(&self, name: &str, file: Option<usize>) -> Option<(MacroRef, &MacroDef)> {
        let refs = self.macros.get(name)?;
        let active = |r: &&MacroRef| {
            self.macro_active
                .get(r.0)
                .and_then(|f| f.get(r.1))
                .copied()
                .unwrap_or(false)
        };
        if let Some(f) = file {
            let closure = self.include_closure(f);
            if refs.len() > 1 {
                // Every file the use sees, nearest first: the last active definition in
                // the nearest file that has one.
                for inc in closure {
                    if let Some(r) = refs.iter().filter(active).rev().find(|r| r.0 == *inc) {
                        return Some((*r, &self.files[r.0].macros[r.1]));
                    }
                }
            }
        }
        let r = refs.iter().rev().find(active)?;
        Some((*r, &self.files[r.0].macros[r.1]))
    }

    /// A macro definition by its reference.
    pub fn macro_def(&self, r: MacroRef) -> &MacroDef {
        &self.files[r.0].macros[r.1]
    }

    /// Every macro definition, with its reference, in file order.
    pub fn all_macros(&self) -> impl Iterator<Item = (MacroRef, &MacroDef)> + '_ {
        self.files
            .iter()
            .enumerate()
            .flat_map(|(fi, f)| f.macros.iter().enumerate().map(move |(i, m)| ((fi, i), m)))
    }

    /// A macro's body parsed once: as one expression when it is one, else as statements
    /// (the cell is one pointer until it is used: MESC has 263 000 macros and uses a few
    /// hundred. Two threads asking at once may both parse it; one result is kept.)
    pub fn macro_body(&self, r: MacroRef) -> &MacroBody {
        static NEITHER: MacroBody = MacroBody::Neither;
        let Some(cell) = self.macro_bodies.get(r.0).and_then(|f| f.get(r.1)) else {
            return &NEITHER;
        };
        cell.get_or_init(|| Box::new(self.macro_body_of(&self.files[r.0].macros[r.1])))
    }

    fn macro_body_of(&self, m: &MacroDef) -> MacroBody {
        if m.body.trim().is_empty() || m.body.contains('#') {
            return MacroBody::Neither;
        }
        // Every parameter in parentheses of its own: `(a) * (x)` with `a` alone in
        // parentheses reads as a cast to a type `a` in C's grammar; `((a)) * (x)` does
        // not. The parentheses leave no trace in the IR.
        let wrapped = match &m.params {
            Some(params) if !params.is_empty() => map_identifiers(&m.body, |ident| {
                params
                    .iter()
                    .any(|p| p == ident)
                    .then(|| format!("({ident})"))
            }),
            _ => m.body.to_string(),
        };
        let body = wrapped.trim();
        let looks_like_statements = body.ends_with(';')
            || body.starts_with('{')
            || body.starts_with("do")
            || body.starts_with("if")
            || body.starts_with("for")
            || body.starts_with("while");
        if !looks_like_statements {
            if let Some(e) = self.snippets.expression(body, m.span) {
                return MacroBody::Expr(e);
            }
        }
        match self.snippets.statements(body, m.span) {
            Some(stmts) => MacroBody::Stmts(stmts),
            None => MacroBody::Neither,
        }
    }

    fn branch_holds(&self, branch: &CondBranch) -> bool {
        match branch {
            CondBranch::Ifdef(name) => self.is_defined(name),
            CondBranch::Ifndef(name) => !self.is_defined(name),
            CondBranch::Else => true,
            CondBranch::If(text) => self.eval_pp_condition(text),
        }
    }

    /// Evaluates an `#if` expression: `defined` is answered first, then identifiers take
    /// their command-line or unconditional macro values (recursively, bounded), and any
    /// other identifier is 0 as C11 6.10.1p4 says.
    fn eval_pp_condition(&self, text: &str) -> bool {
        // Once the defined names are settled (as for the three-valued cache), a text's
        // value no longer changes: each is worked out once.
        let settled = !self.defined_tri.is_empty();
        if settled {
            if let Some(v) = self.pp_holds.read().ok().and_then(|c| c.get(text).copied()) {
                return v;
            }
        }
        let v = self.eval_pp_condition_once(text);
        if settled {
            if let Ok(mut cache) = self.pp_holds.write() {
                cache.insert(text.to_string(), v);
            }
        }
        v
    }

    fn eval_pp_condition_once(&self, text: &str) -> bool {
        let replaced = replace_defined(text, |name| self.is_defined(name));
        let mut seen = HashSet::new();
        let expanded = self.expand_pp_identifiers(&replaced, &mut seen, 0);
        let Some(expr) = pp_parse(&expanded) else {
            return false;
        };
        pp_eval(&expr).map(|v| v != 0).unwrap_or(false)
    }

    fn expand_pp_identifiers(&self, text: &str, seen: &mut HashSet<String>, depth: u32) -> String {
        if depth > 16 {
            return "0".into();
        }
        map_identifiers(text, |ident| {
            if let Some(v) = self.options.defines.get(ident) {
                return Some(format!("({})", if v.is_empty() { "1" } else { v }));
            }
            let def = self.macros.get(ident).and_then(|refs| {
                refs.iter()
                    .map(|&(fi, i)| &self.files[fi].macros[i])
                    .find(|m| m.condition.is_unconditional() && m.params.is_none())
            });
            match def {
                Some(m) if seen.insert(ident.to_string()) => {
                    let inner = self.expand_pp_identifiers(&m.body, seen, depth + 1);
                    seen.remove(ident);
                    Some(format!("({inner})"))
                }
                _ => Some("0".into()),
            }
        })
    }
}

/// Text of a place as written, normalised: `(*f).y` and `f->y` are kept distinct, but
/// spacing and parentheses are not part of the key.
pub fn canonical_place(expr: &Expr) -> String {
    expr.to_string()
}

/// A call of a function by name (the call table's entries): the name and the arguments.
fn named_call(e: &Expr) -> Option<(&std::sync::Arc<str>, &std::sync::Arc<Vec<Expr>>)> {
    let ExprKind::Call { callee, args } = &e.kind else {
        return None;
    };
    match &callee.kind {
        ExprKind::Ident(name) => Some((name, args)),
        _ => None,
    }
}

/// The writes to non-locals and the calls of one file's functions.
fn writes_and_calls_of(program: &Program, fi: usize, file: &FileIr) -> (Vec<Write>, Vec<CallSite>) {
    let mut writes = Vec::new();
    let mut calls = Vec::new();
    for (i, f) in file.functions.iter().enumerate() {
        let fref = FuncRef { file: fi, index: i };
        // Writes to a function's own plain locals are never asked about (values
        // come from globals, fields and statics), and most writes are to them.
        let body = f.body();
        let mut locals = HashSet::new();
        collect_plain_locals(&body, &mut locals);
        for p in &f.params {
            locals.insert(p.name.clone());
        }
        let is_local = |t: &Expr| matches!(&t.kind, ExprKind::Ident(n) if locals.contains(&**n));
        let mut top_level: HashSet<u32> = HashSet::new();
        top_level_statements(&body, &mut top_level);
        let first = writes.len();
        // Writes count where the default build takes them (`#ifdef TUNE` overrides are not
        // the configuration's value); calls count in every branch that may be built.
        let mut built: HashSet<u32> = HashSet::new();
        visit_stmts_built(program, &body, &mut |e| {
            if matches!(e.kind, ExprKind::Assign { .. } | ExprKind::IncDec { .. }) {
                built.insert(e.span.start);
            }
        });
        let is_built = |e: &Expr| built.contains(&e.span.start);
        visit_stmts(&body, &mut |e| match &e.kind {
            ExprKind::Assign { .. } | ExprKind::IncDec { .. } if !is_built(e) => {}
            ExprKind::Assign { target, .. } if is_local(target) => {}
            ExprKind::IncDec { target, .. } if is_local(target) => {}
            ExprKind::Assign { op, target, value } => writes.push(Write {
                function: fref,
                target: canonical_place(target),
                op: *op,
                value: (**value).clone(),
                span: e.span,
                unconditional: false,
            }),
            ExprKind::IncDec { target, increment } => writes.push(Write {
                function: fref,
                target: canonical_place(target),
                op: Some(if *increment {
                    BinaryOp::Add
                } else {
                    BinaryOp::Sub
                }),
                value: Expr::new(
                    ExprKind::Int {
                        value: 1,
                        unsigned: false,
                        long: false,
                    },
                    e.span,
                ),
                span: e.span,
                unconditional: false,
            }),
            _ => {
                if let Some((name, args)) = named_call(e) {
                    calls.push(CallSite {
                        caller: fref,
                        callee: name.clone(),
                        args: args.clone(),
                        span: e.span,
                    });
                }
            }
        });
        for w in &mut writes[first..] {
            w.unconditional = top_level.contains(&w.span.start);
        }
    }
    (writes, calls)
}

/// The start offsets of the assignments that are statements of the body itself (or of
/// plain blocks in it), not under a branch or a loop.
fn top_level_statements(stmts: &[Stmt], out: &mut HashSet<u32>) {
    for stmt in stmts {
        match stmt {
            Stmt::Expr(e) => {
                let mut add = |x: &Expr| {
                    if matches!(x.kind, ExprKind::Assign { .. }) {
                        out.insert(x.span.start);
                    }
                };
                match &e.kind {
                    ExprKind::Comma(items) => items.iter().for_each(&mut add),
                    _ => add(e),
                }
            }
            Stmt::Block(items) => top_level_statements(items, out),
            _ => {}
        }
    }
}

/// The writes that can still hold when their function returns: of several unconditional
/// writes to one place in one function, only the last (the others are overwritten on the
/// way: `k = 0.05f; k = 1.0f - k;`).
pub fn effective_writes(writes: Vec<Write>) -> Vec<Write> {
    let mut out: Vec<Write> = Vec::with_capacity(writes.len());
    for w in writes {
        if w.unconditional {
            let replaced = out.iter().position(|o| {
                o.unconditional
                    && o.function == w.function
                    && o.target == w.target
                    && o.span.file == w.span.file
            });
            match replaced {
                Some(i) if out[i].span.start < w.span.start => out[i] = w,
                Some(_) => {}
                None => out.push(w),
            }
        } else {
            out.push(w);
        }
    }
    out
}

/// The names of a body's non-static local variables.
fn collect_plain_locals(stmts: &[Stmt], out: &mut HashSet<String>) {
    for stmt in stmts {
        match stmt {
            Stmt::Decl(decls) => {
                for d in decls.iter().filter(|d| !d.is_static) {
                    out.insert(d.name.clone());
                }
            }
            Stmt::Block(items) => collect_plain_locals(items, out),
            Stmt::If {
                then, otherwise, ..
            } => {
                collect_plain_locals(std::slice::from_ref(then), out);
                if let Some(o) = otherwise {
                    collect_plain_locals(std::slice::from_ref(o), out);
                }
            }
            Stmt::Loop { init, body, .. } => {
                collect_plain_locals(init, out);
                collect_plain_locals(std::slice::from_ref(body), out);
            }
            Stmt::Switch { body, .. } => collect_plain_locals(std::slice::from_ref(body), out),
            Stmt::Conditional(branches) => {
                for (_, b) in branches {
                    collect_plain_locals(b, out);
                }
            }
            _ => {}
        }
    }
}

/// Visits the expressions of a statement list that the default build compiles: of a `#if`
/// group inside a function, only the branch that holds.
fn visit_stmts_built<'a>(program: &Program, stmts: &'a [Stmt], visit: &mut dyn FnMut(&'a Expr)) {
    for stmt in stmts {
        match stmt {
            Stmt::Conditional(branches) => {
                let mut earlier: Vec<CondBranch> = Vec::new();
                for (branch, body) in branches {
                    let cond = Condition {
                        levels: std::sync::Arc::new(vec![CondLevel {
                            branch: branch.clone(),
                            earlier: earlier.clone(),
                        }]),
                    };
                    if program.condition_holds(&cond) {
                        visit_stmts_built(program, body, visit);
                        break;
                    }
                    earlier.push(branch.clone());
                }
            }
            Stmt::Block(items) => visit_stmts_built(program, items, visit),
            Stmt::If {
                cond,
                then,
                otherwise,
            } => {
                cond.walk(visit);
                visit_stmts_built(program, std::slice::from_ref(then), visit);
                if let Some(o) = otherwise {
                    visit_stmts_built(program, std::slice::from_ref(o), visit);
                }
            }
            Stmt::Loop {
                init,
                cond,
                step,
                body,
                ..
            } => {
                visit_stmts_built(program, init, visit);
                if let Some(c) = cond {
                    c.walk(visit);
                }
                if let Some(s) = step {
                    s.walk(visit);
                }
                visit_stmts_built(program, std::slice::from_ref(body), visit);
            }
            Stmt::Switch { scrutinee, body } => {
                scrutinee.walk(visit);
                visit_stmts_built(program, std::slice::from_ref(body), visit);
            }
            other => visit_stmt(other, visit),
        }
    }
}

/// Visits every expression in a statement list, statements in order.
pub fn visit_stmts<'a>(stmts: &'a [Stmt], visit: &mut dyn FnMut(&'a Expr)) {
    for stmt in stmts {
        visit_stmt(stmt, visit);
    }
}

fn visit_stmt<'a>(stmt: &'a Stmt, visit: &mut dyn FnMut(&'a Expr)) {
    match stmt {
        Stmt::Expr(e) => e.walk(visit),
        Stmt::Decl(decls) => {
            for d in decls {
                if let Some(init) = &d.init {
                    visit_init(init, visit);
                }
            }
        }
        Stmt::Block(items) => visit_stmts(items, visit),
        Stmt::If {
            cond,
            then,
            otherwise,
        } => {
            cond.walk(visit);
            visit_stmt(then, visit);
            if let Some(o) = otherwise {
                visit_stmt(o, visit);
            }
        }
        Stmt::Loop {
            init,
            cond,
            step,
            body,
            ..
        } => {
            visit_stmts(init, visit);
            if let Some(c) = cond {
                c.walk(visit);
            }
            if let Some(s) = step {
                s.walk(visit);
            }
            visit_stmt(body, visit);
        }
        Stmt::Switch { scrutinee, body } => {
            scrutinee.walk(visit);
            visit_stmt(body, visit);
        }
        Stmt::Return(Some(e), _) => e.walk(visit),
        Stmt::Conditional(branches) => {
            for (_, body) in branches {
                visit_stmts(body, visit);
            }
        }
        Stmt::Return(None, _) | Stmt::Other(_) => {}
    }
}

fn visit_init<'a>(init: &'a Initializer, visit: &mut dyn FnMut(&'a Expr)) {
    match init {
        Initializer::Expr(e) => e.walk(visit),
        Initializer::List(items) => {
            for (_, item) in items {
                visit_init(item, visit);
            }
        }
    }
}

/// Calls `f` on each identifier of a C text; `Some(s)` replaces it.
pub fn map_identifiers(text: &str, mut f: impl FnMut(&str) -> Option<String>) -> String {
    let mut out = String::with_capacity(text.len());
    let chars: Vec<char> = text.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c.is_ascii_digit() {
            // A number, with its suffix: not an identifier.
            while i < chars.len() && (chars[i].is_ascii_alphanumeric() || chars[i] == '.') {
                out.push(chars[i]);
                i += 1;
            }
            continue;
        }
        if c == '"' || c == '\'' {
            let quote = c;
            out.push(c);
            i += 1;
            while i < chars.len() && chars[i] != quote {
                if chars[i] == '\\' && i + 1 < chars.len() {
                    out.push(chars[i]);
                    i += 1;
                }
                out.push(chars[i]);
                i += 1;
            }
            if i < chars.len() {
                out.push(chars[i]);
                i += 1;
            }
            continue;
        }
        if c.is_ascii_alphabetic() || c == '_' {
            let start = i;
            while i < chars.len() && (chars[i].is_ascii_alphanumeric() || chars[i] == '_') {
                i += 1;
            }
            let ident: String = chars[start..i].iter().collect();
            match f(&ident) {
                Some(replacement) => out.push_str(&replacement),
                None => out.push_str(&ident),
            }
            continue;
        }
        out.push(c);
        i += 1;
    }
    out
}

fn replace_defined(text: &str, mut is_defined: impl FnMut(&str) -> bool) -> String {
    // `defined NAME` and `defined ( NAME )` become 1 or 0 before any other expansion.
    let tokens: Vec<char> = text.chars().collect();
    let mut out = String::new();
    let mut i = 0;
    while i < tokens.len() {
        let rest: String = tokens[i..].iter().take(7).collect();
        let boundary = i == 0 || !(tokens[i - 1].is_ascii_alphanumeric() || tokens[i - 1] == '_');
        if boundary && rest == "defined" {
            let mut j = i + 7;
            while j < tokens.len() && tokens[j].is_whitespace() {
                j += 1;
            }
            let paren = j < tokens.len() && tokens[j] == '(';
            if paren {
                j += 1;
            }
            while j < tokens.len() && tokens[j].is_whitespace() {
                j += 1;
            }
            let start = j;
            while j < tokens.len() && (tokens[j].is_ascii_alphanumeric() || tokens[j] == '_') {
                j += 1;
            }
            let name: String = tokens[start..j].iter().collect();
            if paren {
                while j < tokens.len() && tokens[j] != ')' {
                    j += 1;
                }
                j += 1;
            }
            out.push_str(if is_defined(&name) { " 1 " } else { " 0 " });
            i = j;
            continue;
        }
        out.push(tokens[i]);
        i += 1;
    }
    out
}

/// `defined NAME` replaced by 1, 0, or an unknown marker.
fn replace_defined_tri(text: &str, mut is_defined: impl FnMut(&str) -> Option<bool>) -> String {
    let tokens: Vec<char> = text.chars().collect();
    let mut out = String::new();
    let mut i = 0;
    while i < tokens.len() {
        let rest: String = tokens[i..].iter().take(7).collect();
        let boundary = i == 0 || !(tokens[i - 1].is_ascii_alphanumeric() || tokens[i - 1] == '_');
        if boundary && rest == "defined" {
            let mut j = i + 7;
            while j < tokens.len() && tokens[j].is_whitespace() {
                j += 1;
            }
            let paren = j < tokens.len() && tokens[j] == '(';
            if paren {
                j += 1;
            }
            while j < tokens.len() && tokens[j].is_whitespace() {
                j += 1;
            }
            let start = j;
            while j < tokens.len() && (tokens[j].is_ascii_alphanumeric() || tokens[j] == '_') {
                j += 1;
            }
            let name: String = tokens[start..j].iter().collect();
            if paren {
                while j < tokens.len() && tokens[j] != ')' {
                    j += 1;
                }
                j += 1;
            }
            out.push_str(match is_defined(&name) {
                Some(true) => " 1 ",
                Some(false) => " 0 ",
                None => " __tauscan_unknown ",
            });
            i = j;
            continue;
        }
        out.push(tokens[i]);
        i += 1;
    }
    out
}

/// `#if` arithmetic where `__tauscan_unknown` is a value nobody knows: `0 && unknown` is 0,
/// `1 || unknown` is 1, anything else that reads it is unknown (None).
fn pp_eval_tri(expr: &Expr) -> Option<i128> {
    match &expr.kind {
        ExprKind::Ident(name) if &**name == "__tauscan_unknown" => None,
        ExprKind::Binary {
            op: BinaryOp::And,
            lhs,
            rhs,
        } => match (pp_eval_tri(lhs), pp_eval_tri(rhs)) {
            (Some(0), _) | (_, Some(0)) => Some(0),
            (Some(_), Some(_)) => Some(1),
            _ => None,
        },
        ExprKind::Binary {
            op: BinaryOp::Or,
            lhs,
            rhs,
        } => match (pp_eval_tri(lhs), pp_eval_tri(rhs)) {
            (Some(a), _) if a != 0 => Some(1),
            (_, Some(b)) if b != 0 => Some(1),
            (Some(_), Some(_)) => Some(0),
            _ => None,
        },
        _ => {
            let mut unknown = false;
            expr.walk(&mut |e| {
                unknown |= matches!(&e.kind, ExprKind::Ident(n) if &**n == "__tauscan_unknown")
            });
            if unknown {
                None
            } else {
                pp_eval(expr)
            }
        }
    }
}

/// Parses an `#if` expression after its names are replaced: by the small parser when the
/// text is in its language, else by the full C parse.
fn pp_parse(text: &str) -> Option<Expr> {
    ppexpr::parse(text).or_else(|| crate::parse::parse_expression(text, Span::default()))
}

/// Integer evaluation for `#if` (C11 6.10.1: all arithmetic in intmax_t).
fn pp_eval(expr: &Expr) -> Option<i128> {
    Some(match &expr.kind {
        ExprKind::Int { value, .. } => *value as i128,
        ExprKind::Ident(_) => 0,
        ExprKind::Unary { op, arg } => {
            let v = pp_eval(arg)?;
            match op {
                UnaryOp::Neg => v.wrapping_neg(),
                UnaryOp::Plus => v,
                UnaryOp::Not => (v == 0) as i128,
                UnaryOp::BitNot => !v,
                _ => return None,
            }
        }
        ExprKind::Binary { op, lhs, rhs } => {
            let a = pp_eval(lhs)?;
            let b = pp_eval(rhs)?;
            use BinaryOp::*;
            match op {
                Add => a.wrapping_add(b),
                Sub => a.wrapping_sub(b),
                Mul => a.wrapping_mul(b),
                Div => a.checked_div(b)?,
                Rem => a.checked_rem(b)?,
                Shl => a.checked_shl(u32::try_from(b).ok()?)?,
                Shr => a.checked_shr(u32::try_from(b).ok()?)?,
                BitAnd => a & b,
                BitOr => a | b,
                BitXor => a ^ b,
                And => (a != 0 && b != 0) as i128,
                Or => (a != 0 || b != 0) as i128,
                Eq => (a == b) as i128,
                Ne => (a != b) as i128,
                Lt => (a < b) as i128,
                Le => (a <= b) as i128,
                Gt => (a > b) as i128,
                Ge => (a >= b) as i128,
            }
        }
        ExprKind::Conditional {
            cond,
            then,
            otherwise,
        } => {
            if pp_eval(cond)? != 0 {
                pp_eval(then)?
            } else {
                pp_eval(otherwise)?
            }
        }
        _ => return None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::parse::parse_file;

    fn program(src: &str, defines: &[(&str, &str)]) -> Program {
        let ir = parse_file(FileId(0), src.as_bytes());
        let options = ProgramOptions {
            defines: defines
                .iter()
                .map(|(k, v)| (k.to_string(), v.to_string()))
                .collect(),
            ..ProgramOptions::default()
        };
        Program::build(vec![ir], vec!["a.c".into()], options)
    }

    /// The call table read back from its encoding (as the cache keeps it, without the
    /// arguments) gets every call's arguments from the IR again, the same as built; and
    /// refuses IR whose calls are not the table's.
    #[test]
    fn mutually_exclusive_defaults_are_judged_the_same_in_every_build() {
        // Each of two names is defined where the other is not: which one wins depends on
        // which is judged first, and that must not be the hash table's order.
        let src = "#ifndef KILN_FIXED\n#define KILN_FLOAT 1\n#endif\n\
                   #ifndef KILN_FLOAT\n#define KILN_FIXED 1\n#endif\n";
        let first = program(src, &[]);
        let seen = (
            first.is_defined("KILN_FLOAT"),
            first.is_defined("KILN_FIXED"),
        );
        // The preprocessor reading from the top defines the first and not the second
        // (C11 6.10.1, conditional inclusion, and 6.10.3, a macro is defined from its
        // `#define` on).
        assert_eq!(seen, (true, false));
        for _ in 0..40 {
            let p = program(src, &[]);
            assert_eq!(
                (p.is_defined("KILN_FLOAT"), p.is_defined("KILN_FIXED")),
                seen
            );
        }
    }

    #[test]
    fn call_arguments_come_back_from_the_ir_or_the_table_is_refused() {
        let src = "static float y;\nvoid vent_init(float k) { vent_set(&y, k, 2); }\n\
                   void vent_step(float x) { vent_filter(&y, x); if (x > 1) vent_log(x + 1); }\n";
        let built = program(src, &[]);
        assert_eq!(built.calls.len(), 3);
        let encoded = postcard::to_stdvec(&built).unwrap();
        let mut read: Program = postcard::from_bytes(&encoded).unwrap();
        assert!(read.calls.iter().all(|c| c.args.is_empty()));
        let files = vec![parse_file(FileId(0), src.as_bytes())];
        assert!(read.restore_call_arguments(&files));
        for (a, b) in read.calls.iter().zip(&built.calls) {
            assert_eq!((&a.callee, a.span, &a.args), (&b.callee, b.span, &b.args));
        }
        // The same shape, another call in the second function: refused.
        let other = src.replace("vent_log(x + 1)", "vent_note(x + 1)");
        let mut read: Program = postcard::from_bytes(&encoded).unwrap();
        assert!(!read.restore_call_arguments(&[parse_file(FileId(0), other.as_bytes())]));
        // A call fewer: refused.
        let fewer = src.replace(" if (x > 1) vent_log(x + 1);", "");
        let mut read: Program = postcard::from_bytes(&encoded).unwrap();
        assert!(!read.restore_call_arguments(&[parse_file(FileId(0), fewer.as_bytes())]));
        // A damaged table that names a caller's calls nowhere: refused, not left empty.
        let mut read: Program = postcard::from_bytes(&encoded).unwrap();
        let init = *read
            .calls_by_caller
            .keys()
            .find(|f| files[0].functions[f.index].name == "vent_init")
            .unwrap();
        read.calls_by_caller.remove(&init);
        assert!(!read.restore_call_arguments(&files));
    }

    #[test]
    fn preprocessor_branches_follow_defines() {
        // Source: C11 6.10.1 (conditional inclusion).
        let src = "#ifdef KILN_FAST\n#define K 3\n#elif BOARD_REV >= 2\n#define K 4\n#else\n#define K 5\n#endif\n";
        assert_eq!(&*program(src, &[]).active_macro("K").unwrap().body, "5");
        assert_eq!(
            program(src, &[("KILN_FAST", "")])
                .active_macro("K")
                .unwrap()
                .body
                .as_ref(),
            "3"
        );
        assert_eq!(
            program(src, &[("BOARD_REV", "2")])
                .active_macro("K")
                .unwrap()
                .body
                .as_ref(),
            "4"
        );
    }

    #[test]
    fn include_guards_do_not_hide_their_contents() {
        let src = "#ifndef VENT_H\n#define VENT_H\n#define VENT_SHIFT 4\n#endif\n";
        assert_eq!(
            &*program(src, &[]).active_macro("VENT_SHIFT").unwrap().body,
            "4"
        );
    }

    #[test]
    fn if_zero_is_never_built() {
        let src = "#if 0\n#define K 1\n#endif\n";
        assert!(program(src, &[]).active_macro("K").is_none());
    }

    #[test]
    fn writes_and_calls_are_indexed() {
        let src = "struct f { float k; };\nstatic struct f g;\nvoid init(void) { g.k = 0.5f; go(&g, 1); }\n";
        let p = program(src, &[]);
        assert_eq!(p.writes_to("g.k").count(), 1);
        assert_eq!(p.calls_to("go").count(), 1);
    }

    #[test]
    fn a_shared_header_includes_the_board_header_nearest_the_file_compiled() {
        // Two boards of a kiln controller each have their own `board.h`; the shared
        // `kiln.h` includes "board.h", which means the one beside the file being compiled.
        let files = [
            ("boards/k1/main.c", "#include \"kiln.h\"\n"),
            ("boards/k2/main.c", "#include \"kiln.h\"\n"),
            ("common/kiln.h", "#include \"board.h\"\n"),
            ("boards/k1/board.h", "#define KILN_WEIGHT 0.25f\n"),
            ("boards/k2/board.h", "#define KILN_WEIGHT 0.5f\n"),
        ];
        let irs = files
            .iter()
            .enumerate()
            .map(|(i, (_, s))| parse_file(FileId(i as u32), s.as_bytes()))
            .collect();
        let paths = files.iter().map(|(p, _)| p.to_string()).collect();
        let p = Program::build(irs, paths, ProgramOptions::default());
        let k1 = p
            .macro_for("KILN_WEIGHT", Some(0))
            .map(|(_, m)| m.body.clone());
        let k2 = p
            .macro_for("KILN_WEIGHT", Some(1))
            .map(|(_, m)| m.body.clone());
        assert_eq!(k1.as_deref(), Some("0.25f"));
        assert_eq!(k2.as_deref(), Some("0.5f"));
    }
}

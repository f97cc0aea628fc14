//! Filter functions and their instances.
//!
//! An update whose state is reached through a parameter (`f->y`, `*p`, `buf[i]` with `buf`
//! a parameter) belongs to whoever passes that parameter. When the call also supplies
//! something the update needs (an input sample, a coefficient, or an object whose fields
//! hold the coefficient), the function is a filter function: each direct call is one
//! instance, with the state and the coefficient in the caller's terms. Instances stop at
//! that nearest call; a function that only passes a pointer along is not a filter
//! function, and a call path is not an instance. A function whose update needs nothing from
//! its caller but the object (a protocol routine that smooths a field of its context) is
//! reported once, at its own line.
//!
//! At each instance the update's guards (the conditions of the branches it sits in, the
//! callee's and the caller's) are evaluated with the call's arguments: a call where a
//! guard is known false never runs the update (a derivative filter configured with a zero
//! derivative gain) and is not an instance.

use super::affine::{self, Shift};
use super::judge;
use super::values::{Node, V};
use super::walk::{self, Helpers, StateKind, Summaries, WalkResult};
use super::{Note, RecogniseOptions, Smoother};
use crate::eval::Evaluator;
use crate::index::{FuncRef, MacroRef, Program};
use crate::ir::{Expr, ExprKind};
use std::collections::BTreeSet;

/// The candidates of a walk that stand: not continued by a later update of the same state
/// that reads as an update (a second statement of a split update replaces the first).
pub fn live_candidates(w: &WalkResult) -> Vec<usize> {
    live_candidates_noted(w).0
}

/// The live candidates, and where a chain of updates too long to read was cut (for a note).
pub fn live_candidates_noted(w: &WalkResult) -> (Vec<usize>, Vec<crate::ir::Span>) {
    let mut cut = Vec::new();
    let n = w.candidates.len();
    let mut dropped = vec![false; n];
    let read = |i: usize| {
        let c = &w.candidates[i];
        affine::read(&w.graph, c.value, c.state, &|_, _| Shift::NotKnown)
    };
    // Each candidate continues at most the latest earlier update of its place: chains of
    // updates, read from their last link backwards until one reads as an update.
    let mut continued_by = vec![None; n];
    for (j, c) in w.candidates.iter().enumerate() {
        for &i in &c.supersedes {
            continued_by[i] = Some(j);
        }
    }
    let predecessor = |j: usize| w.candidates[j].supersedes.first().copied();
    let drop_chain = |dropped: &mut Vec<bool>, from: Option<usize>| {
        let mut cur = from;
        let mut steps = 0;
        while let Some(i) = cur {
            if dropped[i] || steps > n {
                break;
            }
            dropped[i] = true;
            cur = predecessor(i);
            steps += 1;
        }
    };
    for tail in (0..n).rev() {
        if continued_by[tail].is_some() || predecessor(tail).is_none() || dropped[tail] {
            continue;
        }
        let mut cur = tail;
        let mut attempts = 0;
        while let Some(pred) = predecessor(cur) {
            match read(cur) {
                Some(later) => {
                    // A later statement that only clamps, converts or copies what the one
                    // before computed (`y += k*(u - y); y = MAX(y, lo);`) adds nothing to
                    // the algebra: the update is the earlier line.
                    let later_sig = signature(w, &later);
                    let same = read(pred).is_some_and(|e| signature(w, &e) == later_sig);
                    if same {
                        dropped[cur] = true;
                    } else {
                        drop_chain(&mut dropped, Some(pred));
                    }
                    break;
                }
                None => {
                    // Not an update as a whole: the link before may be one.
                    dropped[cur] = true;
                    attempts += 1;
                    if attempts >= 8 {
                        // A long chain that never reads as an update (generated code, a
                        // hash round): the rest of it is not read.
                        cut.push(w.candidates[tail].span);
                        drop_chain(&mut dropped, Some(pred));
                        break;
                    }
                    cur = pred;
                }
            }
        }
    }
    let live = (0..n)
        .filter(|i| {
            !dropped[*i] && w.candidates[*i].instance.is_none() && !w.candidates[*i].overwritten
        })
        .collect();
    (live, cut)
}

/// The algebra of a reading as text (alpha and each input's weight, by the atoms' C text),
/// to tell whether two readings describe the same update.
fn signature(w: &WalkResult, a: &affine::Affine) -> String {
    let text = |p: &super::poly::Poly| {
        let mut terms: Vec<String> = p
            .terms
            .iter()
            .map(|(m, c)| {
                let mut names: Vec<String> = m
                    .iter()
                    .map(|x| judge::atom_text(&w.graph, &a.atoms, *x))
                    .collect();
                names.sort();
                format!("{c:.9}*{}", names.join("*"))
            })
            .collect();
        terms.sort();
        terms.join("+")
    };
    let mut inputs: Vec<String> = a
        .inputs
        .iter()
        .map(|(x, wp)| format!("{}:{}", judge::atom_text(&w.graph, &a.atoms, *x), text(wp)))
        .collect();
    inputs.sort();
    format!("{}|{}", text(&a.alpha), inputs.join(","))
}

/// The parameter (by position) a candidate's state is reached through, if any.
fn state_param(program: &Program, f: FuncRef, w: &WalkResult, i: usize) -> Option<usize> {
    let c = &w.candidates[i];
    if !matches!(c.kind, StateKind::Place | StateKind::Recurrence) {
        return None;
    }
    let (root, home, local) = w.graph.place_root(c.state)?;
    if local || home != w.home {
        return None;
    }
    let name = w.graph.name(root);
    program
        .function(f)
        .params
        .iter()
        .position(|p| p.name == name)
}

/// How a filter function's update is put in at its calls.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Hand {
    /// The parameter the state is reached through.
    pub root_param: usize,
    /// Every call is an instance (it supplies an input or a coefficient); otherwise only
    /// the calls that supply the object itself (not a pointer the caller was given).
    pub every_call: bool,
}

/// Whether an argument hands on the caller's own parameter (`S`, `&*p`, `(T *)p`) rather
/// than an object of the caller's.
pub fn passes_own_parameter(program: &Program, caller: FuncRef, arg: &Expr) -> bool {
    let mut e = arg;
    loop {
        match &e.kind {
            ExprKind::Cast { arg, .. } => e = arg,
            ExprKind::Ident(n) => {
                return program
                    .function(caller)
                    .params
                    .iter()
                    .any(|p| *p.name == **n)
            }
            _ => return false,
        }
    }
}

/// Whether a candidate of function `f` is also put in at `f`'s calls, and how.
pub fn hands_to_callers(program: &Program, f: FuncRef, w: &WalkResult, i: usize) -> Option<Hand> {
    let root_param = state_param(program, f, w, i)?;
    let function = program.function(f);
    let calls: Vec<&crate::index::CallSite> = program
        .calls_to(&function.name)
        .filter(|call| {
            program.resolve_call(call.caller, &call.callee) == Some(f)
                && program.condition_possible(&program.function(call.caller).condition)
        })
        .collect();
    if calls.is_empty() {
        return None;
    }
    let hand = |every_call| {
        Some(Hand {
            root_param,
            every_call,
        })
    };
    let supplies_object = calls.iter().any(|call| {
        call.args
            .get(root_param)
            .is_some_and(|a| !passes_own_parameter(program, call.caller, a))
    });
    let g = &w.graph;
    let c = &w.candidates[i];
    let root_value = w.params.get(root_param).copied();
    let other_params: Vec<V> = w
        .params
        .iter()
        .enumerate()
        .filter(|(k, _)| *k != root_param)
        .map(|(_, v)| *v)
        .collect();
    // The coefficient lives in the object the call passes (`f->k`, set by an init), or
    // the call supplies an input or a coefficient.
    let aff = affine::read(g, c.value, c.state, &|_, _| Shift::NotKnown)?;
    // An integrator or an accumulator is not a smoother at any call.
    if aff.alpha.is_zero() {
        return None;
    }
    let root_value = root_value?;
    if !other_params.is_empty()
        && g.reaches_any(c.value, &|x| other_params.contains(&x), walk::REACH_LIMIT)
    {
        return hand(true);
    }
    let per_object = aff.weight_atoms().iter().any(|a| {
        aff.values_of(*a)
            .into_iter()
            .any(|v| g.spelled_with(v, &|x| x == root_value, walk::REACH_LIMIT))
    });
    if per_object {
        return hand(true);
    }
    // The calls that pass an object of their own make instances of it (each model keeps
    // its own state); calls that pass a pointer they were given add nothing.
    if supplies_object {
        return hand(false);
    }
    None
}

/// The functions that call a filter function, in a fixed order.
pub fn callers(program: &Program, summaries: &Summaries) -> Vec<FuncRef> {
    let mut out = BTreeSet::new();
    for f in summaries.updates.keys() {
        let name = &program.function(*f).name;
        for call in program.calls_to(name) {
            if program.resolve_call(call.caller, &call.callee) == Some(*f)
                && program.condition_possible(&program.function(call.caller).condition)
            {
                out.insert(call.caller);
            }
        }
    }
    out.into_iter().collect()
}

/// The instances in one caller: its walk again, with the filter functions put in.
pub fn instances_in(
    program: &Program,
    f: FuncRef,
    helpers: &Helpers,
    summaries: &Summaries,
    options: &RecogniseOptions,
) -> (Vec<Smoother>, Vec<Note>, Vec<MacroRef>) {
    let setup = walk::Setup {
        program,
        function: Some(f),
        file: f.file,
        helpers: Some(helpers),
        summaries: Some(summaries),
        budget: 400_000,
    };
    let w = walk::walk_function(&setup);
    let mut out = Vec::new();
    for i in 0..w.candidates.len() {
        if w.candidates[i].instance.is_none() || !guards_may_hold(program, &w, i) {
            continue;
        }
        if let Some(s) = judge::judge(program, &w, i, options) {
            out.push(s);
        }
    }
    let name = &program.function(f).name;
    let notes = w
        .notes
        .iter()
        .map(|(span, message)| Note {
            span: *span,
            message: format!("{name}(): {message}"),
        })
        .collect();
    (out, notes, w.used_macros.clone())
}

/// False when one of the update's guards is known false where it stands: for every value
/// of the loop counters it reads, when it sits in counted loops.
pub fn guards_may_hold(program: &Program, w: &WalkResult, i: usize) -> bool {
    let c = &w.candidates[i];
    for g in &c.guards {
        if matches!(w.graph.node(*g), Node::Text(_)) {
            continue;
        }
        if guard_always_false(program, w, *g, c.span) {
            return false;
        }
    }
    true
}

/// Whether a guard is zero where it stands, for each value the loop counters it reads take
/// (at most a few dozen combinations are tried; past that, it may hold).
fn guard_always_false(program: &Program, w: &WalkResult, guard: V, span: crate::ir::Span) -> bool {
    let g = &w.graph;
    // The counters in the guard, with their ranges.
    let mut counters: Vec<(String, Vec<i128>)> = Vec::new();
    let mut stack = vec![guard];
    let mut seen = std::collections::HashSet::new();
    while let Some(v) = stack.pop() {
        if !seen.insert(v) || seen.len() > 2000 {
            continue;
        }
        if let Some(ind) = w.inductions.get(&v) {
            let mut ev = Evaluator::new(program);
            ev.shared_fields = false;
            let start = judge::eval_value(&mut ev, w, ind.start, span).ok();
            let bound = judge::eval_value(&mut ev, w, ind.bound, span).ok();
            let (Some(start), Some(bound)) = (start, bound) else {
                return false;
            };
            let (a, b) = (start.as_f64(), bound.as_f64());
            let end = if ind.inclusive { b } else { b - 1.0 };
            if !(a.fract() == 0.0 && b.fract() == 0.0 && end >= a && end - a < 64.0) {
                return false;
            }
            counters.push((g.display(v, 60), ((a as i128)..=(end as i128)).collect()));
        }
        stack.extend(g.children(v));
    }
    let combos: usize = counters.iter().map(|(_, r)| r.len()).product();
    if combos > 64 {
        return false;
    }
    let Some((expr, scope)) = judge::atom_scope(w, guard, span) else {
        return false;
    };
    for k in 0..combos.max(1) {
        let mut scope = scope.clone();
        let mut rem = k;
        for (name, range) in &counters {
            let value = range[rem % range.len()];
            rem /= range.len();
            let int = crate::eval::num::Num::int(
                value,
                crate::ir::IntType {
                    bits: program.options.target.int_bits,
                    signed: true,
                },
            );
            scope.values.insert(name.clone(), int);
        }
        let mut ev = Evaluator::new(program);
        ev.shared_fields = false;
        match ev.eval(&expr, &scope) {
            Ok(v) if v.is_zero() => {}
            _ => return false,
        }
    }
    true
}

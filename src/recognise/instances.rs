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

use super::affine::{self, AtomKind, Shift};
use super::judge;
use super::values::{Node, V};
use super::walk::{self, Helpers, StateKind, Summaries, WalkResult};
use super::{Note, RecogniseOptions, Smoother};
use crate::eval::Evaluator;
use crate::index::{FuncRef, MacroRef, Program};
use std::collections::BTreeSet;

/// The candidates of a walk that stand: not continued by a later update of the same state
/// that reads as an update (a second statement of a split update replaces the first).
pub fn live_candidates(w: &WalkResult) -> Vec<usize> {
    let n = w.candidates.len();
    let mut dropped = vec![false; n];
    let read = |i: usize| {
        let c = &w.candidates[i];
        affine::read(&w.graph, c.value, c.state, &|_, _| Shift::NotKnown)
    };
    for j in (0..n).rev() {
        if dropped[j] || w.candidates[j].supersedes.is_empty() {
            continue;
        }
        let Some(later) = read(j) else {
            continue;
        };
        let later_sig = signature(w, &later);
        for &i in &w.candidates[j].supersedes {
            // A later statement that only clamps, converts or copies what an earlier one
            // computed (`y += k*(u - y); y = MAX(y, lo);`) adds nothing to the algebra: the
            // update is the earlier line.
            let same = read(i).is_some_and(|earlier| signature(w, &earlier) == later_sig);
            if same {
                dropped[j] = true;
            } else {
                dropped[i] = true;
            }
        }
    }
    (0..n)
        .filter(|i| !dropped[*i] && w.candidates[*i].instance.is_none())
        .collect()
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
                    .map(|x| judge::atom_text(&w.graph, &a.atoms[*x as usize]))
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
        .map(|(x, wp)| {
            format!(
                "{}:{}",
                judge::atom_text(&w.graph, &a.atoms[*x as usize]),
                text(wp)
            )
        })
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

/// Whether a candidate of function `f` is put in at `f`'s calls instead of being reported
/// at its own line.
pub fn hands_to_callers(program: &Program, f: FuncRef, w: &WalkResult, i: usize) -> bool {
    let Some(root_param) = state_param(program, f, w, i) else {
        return false;
    };
    let function = program.function(f);
    let has_calls = program.calls_to(&function.name).any(|call| {
        program.resolve_call(call.caller, &call.callee) == Some(f)
            && program.condition_possible(&program.function(call.caller).condition)
    });
    if !has_calls {
        return false;
    }
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
    let Some(aff) = affine::read(g, c.value, c.state, &|_, _| Shift::NotKnown) else {
        return false;
    };
    // An integrator or an accumulator is not a smoother at any call.
    if aff.alpha.is_zero() {
        return false;
    }
    let Some(root_value) = root_value else {
        return false;
    };
    if !other_params.is_empty()
        && g.reaches_any(c.value, &|x| other_params.contains(&x), walk::REACH_LIMIT)
    {
        return true;
    }
    let mut weight_atoms = aff.alpha.atoms();
    for (_, wp) in &aff.inputs {
        weight_atoms.extend(wp.atoms());
    }
    weight_atoms.iter().any(|a| {
        let v = match &aff.atoms[*a as usize] {
            AtomKind::Leaf(v) | AtomKind::Inverse(v, _) => *v,
            AtomKind::Pow2 { count, .. } => *count,
        };
        g.spelled_with(v, &|x| x == root_value, walk::REACH_LIMIT)
    })
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

/// False when one of the update's guards is known false where it stands.
pub fn guards_may_hold(program: &Program, w: &WalkResult, i: usize) -> bool {
    let c = &w.candidates[i];
    for g in &c.guards {
        if matches!(w.graph.node(*g), Node::Text(_)) {
            continue;
        }
        let mut ev = Evaluator::new(program);
        if let Ok(v) = judge::eval_value(&mut ev, w, *g, c.span) {
            if v.is_zero() {
                return false;
            }
        }
    }
    true
}

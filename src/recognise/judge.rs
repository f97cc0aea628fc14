//! Judges a candidate update: is it a smoother, and what are its coefficient, form and
//! dead band?
//!
//! The affine reading (`affine`) says how the new value depends on the state and the
//! inputs; the atoms that are neither (coefficient names, macro constants, fields set in
//! init functions) are evaluated where the update stands (`eval`), in the home of each atom
//! (a filter function's own names are looked up in its file). Each form has its judge in
//! `forms/`; this file gathers what they all need (`Reading`) and builds the output record.
//! Integer forms are compiled and run (`sim`) to measure the dead band.

use super::affine::{self, Affine, AtomKind, Shift};
use super::forms::{self, Verdict};
use super::poly::{AtomId, Poly};
use super::sim;
use super::values::{Graph, Node, V};
use super::walk::{Candidate, StateKind, WalkResult};
use super::{Arithmetic, Coefficient, Form, RecogniseOptions, Smoother, Storage, Variant};
use crate::context;
use crate::eval::{self, num::Num, ChainStep, Evaluator, Scope};
use crate::index::{FuncRef, Program};
use crate::ir::*;
use std::cell::RefCell;
use std::collections::HashMap;

/// What every form's judge reads: the candidate, its affine reading, and the values of the
/// atoms where the update stands.
pub struct Reading<'a> {
    pub program: &'a Program,
    pub walk: &'a WalkResult,
    pub candidate: &'a Candidate,
    pub affine: Affine,
    /// Value of each atom (NaN where unknown; inputs and the state are unknown here).
    pub values: Vec<f64>,
    /// Every atom the weights use has a known value.
    pub known: bool,
    pub alpha: Option<f64>,
    /// The sum of the input weights.
    pub input_weight: Option<f64>,
    pub unknown: Vec<eval::Unknown>,
    pub chain: Vec<ChainStep>,
    pub state_type: Option<CType>,
}

impl Reading<'_> {
    pub fn g(&self) -> &Graph {
        &self.walk.graph
    }

    pub fn weight(&self, w: &Poly) -> f64 {
        w.evaluate(&|a| self.values[a as usize])
    }

    /// The atoms the weights (alpha and the input weights) are made of.
    pub fn weight_atoms(&self) -> Vec<AtomId> {
        self.affine.weight_atoms()
    }

    pub fn function(&self) -> Option<FuncRef> {
        home_function(self.walk, self.walk.home)
    }

    /// The atom as C text.
    pub fn atom_text(&self, a: AtomId) -> String {
        atom_text(&self.walk.graph, &self.affine.atoms, a)
    }
}

/// A product of atoms as C text: the factors multiplied, then divided by the inverse ones
/// (`ang / (period + 0.1f)`).
fn factors_text(g: &Graph, atoms: &[AtomKind], factors: &[AtomId]) -> String {
    let (over, times): (Vec<AtomId>, Vec<AtomId>) = factors
        .iter()
        .partition(|f| matches!(atoms.get(**f as usize), Some(AtomKind::Inverse(..))));
    let mut text = times
        .iter()
        .map(|f| atom_text(g, atoms, *f))
        .collect::<Vec<_>>()
        .join(" * ");
    if text.is_empty() {
        text.push('1');
    }
    for f in over {
        if let Some(AtomKind::Inverse(v, _)) = atoms.get(f as usize) {
            text.push_str(&format!(" / ({})", g.display(*v, 120)));
        }
    }
    text
}

pub fn atom_text(g: &Graph, atoms: &[AtomKind], a: AtomId) -> String {
    let Some(atom) = atoms.get(a as usize) else {
        return "?".into();
    };
    match atom {
        AtomKind::Product(factors) => factors_text(g, atoms, factors),
        AtomKind::Composite { node: Some(v), .. } => g.display(*v, 160),
        AtomKind::Composite { signal, .. } => {
            let mut parts = Vec::new();
            for (m, c) in &signal.terms {
                parts.push(format!(
                    "{}{}",
                    if *c < 0.0 { "- " } else { "+ " },
                    factors_text(g, atoms, m)
                ));
            }
            parts.join(" ").trim_start_matches("+ ").to_string()
        }
        AtomKind::Leaf(v) => g.display(*v, 120),
        AtomKind::Inverse(v, _) => format!("1/({})", g.display(*v, 120)),
        AtomKind::Pow2 { count, negative } => {
            format!(
                "2^{}({})",
                if *negative { "-" } else { "" },
                g.display(*count, 60)
            )
        }
    }
}

fn home_function(walk: &WalkResult, home: super::values::Home) -> Option<FuncRef> {
    walk.graph.home_info(home).function
}

/// The home (function) whose names an atom is made of: that of the first name in it.
fn home_of(g: &Graph, v: V, default: super::values::Home) -> super::values::Home {
    let mut stack = vec![v];
    let mut seen = 0;
    while let Some(x) = stack.pop() {
        seen += 1;
        if seen > 200 {
            break;
        }
        match g.node(x) {
            Node::Name { home, .. }
            | Node::Opaque { home, .. }
            | Node::LocalObject { home, .. } => return *home,
            Node::Local { home, .. } => return *home,
            _ => stack.extend(g.children(x)),
        }
    }
    default
}

/// An atom as an IR expression for the evaluator, with the locals it names given their
/// values in the scope (so the derivation shows them), in the function of its home.
pub fn atom_scope(walk: &WalkResult, v: V, span: Span) -> Option<(Expr, Scope)> {
    let g = &walk.graph;
    let home = home_of(g, v, walk.home);
    let function = home_function(walk, home).or(home_function(walk, walk.home));
    // Locals that appear with one version only are kept as names.
    let mut versions: HashMap<String, Vec<V>> = HashMap::new();
    let mut stack = vec![v];
    let mut seen = std::collections::HashSet::new();
    while let Some(x) = stack.pop() {
        if !seen.insert(x) || seen.len() > 4000 {
            continue;
        }
        if let Node::Local { name, .. } = g.node(x) {
            let list = versions.entry(g.name(*name).to_string()).or_default();
            if !list.contains(&x) {
                list.push(x);
            }
        }
        stack.extend(g.children(x));
    }
    let mut exprs = HashMap::new();
    for (name, list) in &versions {
        if list.len() == 1 {
            if let Node::Local { value, .. } = g.node(list[0]) {
                if let Some(e) = g.to_expr(*value, span, true, 4000) {
                    exprs.insert(name.clone(), e);
                }
            }
        }
    }
    let expr = g
        .to_expr(v, span, false, 4000)
        .or_else(|| g.to_expr(v, span, true, 4000))?;
    Some((
        expr,
        Scope {
            function,
            values: HashMap::new(),
            exprs,
        },
    ))
}

/// Evaluates one graph value where the walk stands.
pub fn eval_value(
    ev: &mut Evaluator,
    walk: &WalkResult,
    v: V,
    span: Span,
) -> Result<Num, eval::Unknown> {
    let Some((expr, scope)) = atom_scope(walk, v, span) else {
        return Err(eval::Unknown::new(format!(
            "`{}` is too large to evaluate",
            walk.graph.display(v, 60)
        )));
    };
    ev.eval(&expr, &scope)
}

fn new_evaluator<'p>(program: &'p Program, walk: &WalkResult) -> Evaluator<'p> {
    match home_function(walk, walk.home) {
        Some(_) => Evaluator::new(program),
        None => Evaluator::in_file(program, walk.graph.home_info(walk.home).file),
    }
}

/// How the counts of shifts are read: constant and defined for the left operand (C11
/// 6.5.7p3), or not known.
fn shift_of(
    program: &Program,
    walk: &WalkResult,
    ev: &RefCell<Evaluator>,
    span: Span,
    lhs: V,
    count: V,
) -> Shift {
    let Ok(c) = ev
        .try_borrow_mut()
        .map_err(|_| ())
        .and_then(|mut e| eval_value(&mut e, walk, count, span).map_err(|_| ()))
    else {
        return Shift::NotKnown;
    };
    let c = c.as_f64();
    let bits = promoted_bits(program, walk, lhs, span);
    if c.fract() == 0.0 && (0.0..f64::from(bits)).contains(&c) {
        Shift::Count(c)
    } else {
        Shift::NotKnown
    }
}

fn promoted_bits(program: &Program, walk: &WalkResult, v: V, span: Span) -> u8 {
    let g = &walk.graph;
    let function = home_function(walk, home_of(g, v, walk.home));
    match g.to_expr(v, span, true, 2000) {
        Some(e) => eval::promoted_bits(program, function, &e),
        None => program.options.target.int_bits,
    }
}

/// The values of the atoms, with what could not be known and the derivation.
fn evaluate_atoms(
    r_program: &Program,
    walk: &WalkResult,
    c: &Candidate,
    aff: &Affine,
    ev: &mut Evaluator,
) -> (Vec<f64>, Vec<eval::Unknown>) {
    let input_ids: Vec<AtomId> = aff.inputs.iter().map(|(a, _)| *a).collect();
    let mut leaves = vec![f64::NAN; aff.atoms.len()];
    let mut unknown = Vec::new();
    evaluate_leaves(
        r_program,
        walk,
        c,
        aff,
        ev,
        &|id| id != aff.state_atom && !input_ids.contains(&id),
        &mut leaves,
        &mut unknown,
    );
    (
        atom_values_checked(walk, aff, &leaves, &mut unknown),
        unknown,
    )
}

/// Evaluates the leaf and shift atoms `which` accepts into `leaves`.
#[allow(clippy::too_many_arguments, reason = "one pass shared by two callers")]
fn evaluate_leaves(
    r_program: &Program,
    walk: &WalkResult,
    c: &Candidate,
    aff: &Affine,
    ev: &mut Evaluator,
    which: &dyn Fn(AtomId) -> bool,
    leaves: &mut [f64],
    unknown: &mut Vec<eval::Unknown>,
) {
    let g = &walk.graph;
    for (i, kind) in aff.atoms.iter().enumerate() {
        let id = i as AtomId;
        if !which(id) {
            continue;
        }
        match kind {
            AtomKind::Leaf(v) => match eval_value(ev, walk, *v, c.span) {
                Ok(n) => leaves[i] = n.as_f64(),
                Err(u) => unknown.push(u),
            },
            AtomKind::Pow2 { count, negative } => {
                let bits = promoted_bits(r_program, walk, *count, c.span);
                match eval_value(ev, walk, *count, c.span) {
                    Ok(n) => {
                        let n = n.as_f64();
                        if n.fract() == 0.0 && (0.0..f64::from(bits)).contains(&n) {
                            leaves[i] = 2f64.powf(if *negative { -n } else { n });
                        } else {
                            unknown.push(eval::Unknown::new(format!(
                                "the shift by `{}` ({n}) is not defined for a {bits}-bit operand (C11 6.5.7p3)",
                                g.display(*count, 60)
                            )));
                        }
                    }
                    Err(u) => unknown.push(u),
                }
            }
            AtomKind::Inverse(..) | AtomKind::Product(_) | AtomKind::Composite { .. } => {}
        }
    }
}

/// The values of all atoms from those of the leaves; a zero denominator makes its inverse
/// unknown.
fn atom_values_checked(
    walk: &WalkResult,
    aff: &Affine,
    leaves: &[f64],
    unknown: &mut Vec<eval::Unknown>,
) -> Vec<f64> {
    let g = &walk.graph;
    let mut values = affine::atom_values(&aff.atoms, leaves);
    // A denominator that is zero where the update stands has no quotient in C (C11
    // 6.5.5p5): the coefficient is unknown, not infinite.
    for (i, kind) in aff.atoms.iter().enumerate() {
        if let AtomKind::Inverse(v, _) = kind {
            if values[i].is_infinite() {
                values[i] = f64::NAN;
                unknown.push(eval::Unknown::new(format!(
                    "`1/({})` divides by zero (undefined, C11 6.5.5p5)",
                    g.display(*v, 60)
                )));
            }
        }
    }
    values
}

/// Whether every atom of alpha and of the input weights has a finite value.
fn weights_known(aff: &Affine, values: &[f64]) -> bool {
    aff.weight_atoms()
        .iter()
        .all(|a| values.get(*a as usize).is_some_and(|v| v.is_finite()))
}

/// Alpha and the sum of the input weights from the values of the atoms.
pub fn alpha_of(aff: &Affine, values: &[f64]) -> (Option<f64>, Option<f64>) {
    let a = aff.alpha.evaluate(&|x| values[x as usize]);
    let w: f64 = aff
        .inputs
        .iter()
        .map(|(_, w)| w.evaluate(&|x| values[x as usize]))
        .sum();
    let input_weight = w.is_finite().then_some(w);
    // When the weights sum to alpha identically, both sides are alpha; the input's weight
    // is the better-conditioned one (`1 - 0.9999f` loses four digits to cancellation,
    // `0.0001f` none).
    let alpha = match (aff.structural, input_weight) {
        (true, Some(w)) => Some(w),
        _ => a.is_finite().then_some(a),
    };
    (alpha, input_weight)
}

/// The values of the atoms with run-time quantities assumed (`assumed`, by their C text),
/// and the evaluator's derivation; for probing a coefficient computed at run time.
pub fn probe_atoms(
    reading: &Reading,
    assumed: &HashMap<String, Num>,
) -> (Vec<f64>, Vec<eval::Unknown>, Vec<eval::ChainStep>) {
    let mut ev = new_evaluator(reading.program, reading.walk);
    ev.assumed = assumed.clone();
    let (values, unknown) = evaluate_atoms(
        reading.program,
        reading.walk,
        reading.candidate,
        &reading.affine,
        &mut ev,
    );
    (values, unknown, ev.chain)
}

/// Judges candidate `i` of a walk.
pub fn judge(
    program: &Program,
    walk: &WalkResult,
    i: usize,
    options: &RecogniseOptions,
) -> Option<Smoother> {
    judge_explained(program, walk, i, options).ok()
}

/// Judges candidate `i`, or says why it is not a smoother (for `tauscan debug candidates`).
pub fn judge_explained(
    program: &Program,
    walk: &WalkResult,
    i: usize,
    options: &RecogniseOptions,
) -> Result<Smoother, &'static str> {
    let c = &walk.candidates[i];
    let storage = storage_of(program, walk, c).ok_or("a local object updated once per call")?;
    if let Some(r) = &c.resummed {
        let verdict =
            forms::resummed::judge(program, walk, c, r).ok_or("re-summed window not constant")?;
        return Ok(build_plain(program, walk, c, verdict, storage, options));
    }
    let ev = RefCell::new(new_evaluator(program, walk));
    let shift = |lhs: V, count: V| shift_of(program, walk, &ev, c.span, lhs, count);
    let mut aff = affine::read(&walk.graph, c.value, c.state, &shift)
        .ok_or("not affine in the state, or no input")?;
    let mut evaluator = ev.into_inner();
    let (mut values, mut unknown) = evaluate_atoms(program, walk, c, &aff, &mut evaluator);
    // Weights that are not all numbers may mean the wrong factor of a product was named
    // the input: the first other naming whose weights are all known is the reading. The
    // atoms are evaluated once more, the first naming's inputs included; each naming is
    // then only a look at those values.
    if !aff.structural && !aff.alternatives.is_empty() && !weights_known(&aff, &values) {
        let first_inputs: Vec<AtomId> = aff.inputs.iter().map(|(a, _)| *a).collect();
        let mut leaves = values.clone();
        let mut more_unknown = unknown.clone();
        evaluate_leaves(
            program,
            walk,
            c,
            &aff,
            &mut evaluator,
            &|id| first_inputs.contains(&id),
            &mut leaves,
            &mut more_unknown,
        );
        let every = atom_values_checked(walk, &aff, &leaves, &mut more_unknown);
        for alternative in std::mem::take(&mut aff.alternatives) {
            let mut other = aff.clone();
            other.inputs = alternative;
            if weights_known(&other, &every) {
                (aff, values, unknown) = (other, every, more_unknown);
                break;
            }
        }
    }
    let state_type = state_type(program, walk, c);
    let mut reading = Reading {
        program,
        walk,
        candidate: c,
        affine: aff,
        values,
        known: false,
        alpha: None,
        input_weight: None,
        unknown,
        chain: std::mem::take(&mut evaluator.chain),
        state_type,
    };
    reading.known = weights_known(&reading.affine, &reading.values);
    if reading.known {
        let (alpha, input_weight) = alpha_of(&reading.affine, &reading.values);
        reading.alpha = alpha;
        reading.input_weight = input_weight;
    }
    if storage == Storage::LoopLocal && !input_changes_per_iteration(&reading) {
        return Err("a loop iteration on a value that does not change between iterations");
    }
    let verdict = match forms::moving_average::judge(&reading) {
        Some(v) => v,
        None => {
            // Alpha zero as written (the state's weight is exactly one) is an integrator or
            // an accumulator, never a smoother: only a coefficient that C arithmetic
            // truncates to zero (`float a = 1/8;`) is a smoother with a hazard.
            if reading.affine.alpha.is_zero() {
                return Err("the state's weight is exactly one (an integrator)");
            }
            forms::ema::reject(&reading)?;
            forms::scaled_state::judge(&reading)
                .or_else(|| forms::ema::judge(&reading))
                .ok_or("weights that do not make a low-pass")?
        }
    };
    // An update behind a condition that is false wherever it stands (a gain from a const
    // table that is zero for every axis the loop visits) never runs.
    if c.instance.is_none() && !super::instances::guards_may_hold(program, walk, i) {
        return Err("a guard around it is false wherever it stands");
    }
    Ok(build(reading, verdict, storage, options))
}

/// For an update carried from one iteration of a loop to the next: whether an input can
/// change between iterations (a value read or computed in the loop, a call), so that the
/// loop filters a sequence. A recursion whose inputs stay the same for the whole loop is a
/// numerical iteration (bisection, a fixed point), not a smoother of samples.
fn input_changes_per_iteration(r: &Reading) -> bool {
    let walk = r.walk;
    let g = &walk.graph;
    let Some(loop_id) = r.candidate.loop_id else {
        return true;
    };
    let floor = walk.loop_epochs.get(loop_id as usize).copied().unwrap_or(0);
    r.affine.inputs.iter().any(|(a, _)| {
        let Some(v) = r.affine.leaf(*a) else {
            return true;
        };
        g.any_within(
            v,
            &|x| match g.node(x) {
                Node::Call { .. } | Node::CallIndirect { .. } | Node::Huge(_) => true,
                Node::Version { version, .. } => *version >= floor,
                Node::Opaque { carried: true, .. } => {
                    walk.carried_by.get(&x).is_some_and(|id| *id >= loop_id)
                }
                _ => false,
            },
            5000,
        )
    })
}

/// Where the state lives, which decides whether it survives between calls. None for a
/// state that is a local object updated once (a one-shot computation).
fn storage_of(program: &Program, walk: &WalkResult, c: &Candidate) -> Option<Storage> {
    let g = &walk.graph;
    match c.kind {
        StateKind::LoopLocal => return Some(Storage::LoopLocal),
        StateKind::RestartLocal => return Some(Storage::Local),
        StateKind::Recurrence => return Some(Storage::ArrayElement),
        StateKind::Place => {}
    }
    let Some((root, root_home, local_object)) = g.place_root(c.state) else {
        // Memory reached through a pointer a function returns outlives the call, unless
        // the function has just allocated it (C11 7.22.3).
        let callee = g.place_call_root(c.state)?;
        let allocator = matches!(
            g.name(callee),
            "malloc" | "calloc" | "realloc" | "alloca" | "pvPortMalloc"
        );
        return (!allocator).then_some(Storage::Pointer);
    };
    if local_object {
        if c.in_loop {
            return Some(Storage::LoopLocal);
        }
        // A local object filled by a call before the update and handed to a call after
        // it: its state lives where the calls keep it (a getter/setter round trip).
        let before = walk
            .escapes
            .iter()
            .any(|(s, seq)| *s == root && *seq < c.seq);
        let after = walk
            .escapes
            .iter()
            .any(|(s, seq)| *s == root && *seq > c.seq);
        return (before && after).then_some(Storage::Field);
    }
    let function = home_function(walk, root_home);
    let is_param = function.is_some_and(|f| {
        program
            .function(f)
            .params
            .iter()
            .any(|p| p.name == g.name(root))
    });
    Some(match g.node(c.place) {
        Node::Name { .. } => {
            if walk.static_locals.contains(&root) && c.instance.is_none() {
                Storage::StaticLocal
            } else {
                Storage::Global
            }
        }
        Node::Field { arrow, .. } => {
            if *arrow && is_param {
                Storage::Pointer
            } else {
                Storage::Field
            }
        }
        Node::Index { .. } => Storage::ArrayElement,
        Node::Deref(_) => Storage::Pointer,
        _ => Storage::Global,
    })
}

fn state_type(program: &Program, walk: &WalkResult, c: &Candidate) -> Option<CType> {
    let g = &walk.graph;
    let function = home_function(walk, walk.home);
    if let Some(e) = &c.state_expr {
        if let Some(t) = eval::place_type(program, function, e) {
            return Some(t);
        }
    }
    let home = home_of(g, c.state, walk.home);
    let f = home_function(walk, home).or(function);
    let e = g.to_expr(c.state, c.span, true, 2000)?;
    eval::place_type(program, f, &e)
}

/// Fixed point: a product with an integer constant brought back by a shift of 8 or more.
fn arithmetic_of(g: &Graph, state_type: &Option<CType>, value: V, float_input: bool) -> Arithmetic {
    let mut has_float = float_input;
    let mut fixed = false;
    let mut stack = vec![value];
    let mut seen = std::collections::HashSet::new();
    while let Some(v) = stack.pop() {
        if !seen.insert(v) || seen.len() > 5000 {
            continue;
        }
        match g.node(v) {
            Node::Float { .. } => has_float = true,
            Node::Binary(BinaryOp::Shr, lhs, rhs) => {
                let big_shift = matches!(g.node(*rhs), Node::Int { value, .. } if *value >= 8)
                    || matches!(g.node(*rhs), Node::Name { .. } | Node::Binary(..));
                let product = g.any_within(
                    *lhs,
                    &|x| matches!(g.node(x), Node::Binary(BinaryOp::Mul, ..)),
                    500,
                );
                fixed |= big_shift && product;
            }
            _ => {}
        }
        stack.extend(g.children(v));
    }
    match state_type {
        Some(t) if t.is_float() => return Arithmetic::Float,
        Some(t) if t.is_integer() => {}
        _ => {
            if has_float {
                return Arithmetic::Float;
            }
        }
    }
    if fixed {
        Arithmetic::Fixed
    } else {
        Arithmetic::Integer
    }
}

fn formula_text(reading: &Reading) -> String {
    let mut parts = Vec::new();
    for (m, c) in &reading.affine.alpha.terms {
        let names: Vec<String> = m.iter().map(|a| reading.atom_text(*a)).collect();
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

fn coefficient(reading: &Reading) -> Coefficient {
    match reading.alpha {
        Some(a) => Coefficient::Known(a),
        None => {
            let formula = formula_text(reading);
            let runtime = reading.unknown.iter().find_map(|u| u.runtime.clone());
            match runtime.filter(|name| context::is_time_step_name(name)) {
                Some(name) => Coefficient::Adaptive {
                    formula,
                    depends_on: name,
                },
                None => Coefficient::Unknown {
                    formula,
                    reason: reading
                        .unknown
                        .first()
                        .map(|u| u.reason.clone())
                        .unwrap_or_else(|| "the coefficient is not a constant".into()),
                },
            }
        }
    }
}

fn build(
    reading: Reading,
    verdict: Verdict,
    storage: Storage,
    options: &RecogniseOptions,
) -> Smoother {
    let program = reading.program;
    let walk = reading.walk;
    let c = reading.candidate;
    let g = &walk.graph;
    let mut coefficient = match verdict.form {
        Form::MovingAverage => Coefficient::Known(1.0 / f64::from(verdict.window.unwrap_or(1))),
        _ => coefficient(&reading),
    };
    let design = match (&coefficient, verdict.form) {
        (Coefficient::Known(_), _) | (_, Form::MovingAverage) => None,
        _ => super::design::analyse(&reading),
    };
    // A coefficient designed over a period follows that period.
    if let (Some(d), Coefficient::Unknown { formula, .. }) = (&design, &coefficient) {
        if let Some((p, _)) = d.period {
            coefficient = Coefficient::Adaptive {
                formula: formula.clone(),
                depends_on: d.quantities[p].text.clone(),
            };
        }
    }
    let inputs: Vec<V> = reading
        .affine
        .inputs
        .iter()
        .filter_map(|(a, _)| reading.affine.leaf(*a))
        .collect();
    let declared_inputs: Vec<Option<CType>> = inputs
        .iter()
        .map(|v| {
            let home = home_of(g, *v, walk.home);
            let f = home_function(walk, home);
            g.to_expr(*v, c.span, true, 2000)
                .and_then(|e| eval::place_type(program, f, &e))
        })
        .collect();
    // A state of a type the scan cannot see (`real_T` from a header outside it) takes its
    // arithmetic from the inputs: one declared `float` makes the expression float (C11
    // 6.3.1.8, the usual arithmetic conversions).
    let float_input = declared_inputs.iter().flatten().any(CType::is_float);
    let arithmetic = arithmetic_of(g, &reading.state_type, c.value, float_input);
    let input_types: Vec<CType> = declared_inputs
        .into_iter()
        .map(|t| {
            t.or_else(|| reading.state_type.clone())
                .unwrap_or(CType::Double)
        })
        .collect();
    // An input that is a product of signals has no one value to drive: no simulation.
    let all_leaves = inputs.len() == reading.affine.inputs.len();
    let simulation = match (&reading.state_type, verdict.form) {
        (Some(ty), form) if form != Form::MovingAverage && all_leaves => compile_update(
            program,
            walk,
            c,
            &inputs,
            ty,
            input_types,
            verdict.scale.unwrap_or(1.0),
        ),
        _ => None,
    };
    let dead_band = match verdict.form {
        Form::MovingAverage => Some(sim::DeadBand {
            rising: 0,
            falling: 0,
        })
        .filter(|_| reading.state_type.as_ref().is_some_and(CType::is_integer)),
        _ => match (&reading.state_type, coefficient.value(), &simulation) {
            (Some(ty), Some(a), Some(u)) if ty.is_integer() => cached_dead_band(u, a, None),
            _ => None,
        },
    };
    // Where the types let the input go below zero and no range is declared yet, the band
    // of inputs at or above zero too, when C's rounding makes it another.
    let dead_band_nonnegative = match (&dead_band, coefficient.value(), &simulation) {
        (Some(all), Some(a), Some(u)) if verdict.form != Form::MovingAverage => {
            cached_dead_band(u, a, Some((0, i128::MAX))).filter(|b| b != all)
        }
        _ => None,
    };
    let variants = match verdict.form {
        Form::MovingAverage => window_variants(program, walk, &verdict),
        _ => variants_of(program, walk, c, &reading, &coefficient),
    };
    let rate = context::rate_of(&reading.chain, &coefficient, options.default_rate_hz);
    let function = home_function(walk, walk.home);
    let function_name = function
        .map(|f| program.function(f).name.clone())
        .unwrap_or_default();
    let macro_name = c.macro_ref.map(|r| program.macro_def(r).name.to_string());
    let state_text = g.display(c.state, 200);
    Smoother {
        function: function_name,
        function_ref: function,
        macro_name,
        state: state_text.clone(),
        span: c.span,
        definition: c.definition,
        form: verdict.form,
        arithmetic,
        storage,
        alpha: coefficient,
        window: verdict.window,
        dc_gain: verdict.dc_gain,
        scale: verdict.scale,
        dead_band,
        dead_band_nonnegative,
        chain: reading.chain.clone(),
        rate,
        code_rate: None,
        assumed: false,
        variants,
        update: format!("{state_text} = {}", g.display(c.value, 400)),
        update_expr: g.to_expr(c.value, c.span, false, 4000),
        state_type: reading.state_type.clone(),
        inputs: reading
            .affine
            .inputs
            .iter()
            .map(|(a, _)| reading.atom_text(*a))
            .collect(),
        simulation,
        upstream: None,
        through_branch: reading.affine.through_branch,
        instance_count: 0,
        design,
    }
}

/// A verdict that needs no affine reading (a re-summed window).
fn build_plain(
    program: &Program,
    walk: &WalkResult,
    c: &Candidate,
    verdict: Verdict,
    storage: Storage,
    options: &RecogniseOptions,
) -> Smoother {
    let g = &walk.graph;
    let function = home_function(walk, walk.home);
    let element_type = state_type(program, walk, c).and_then(|t| match program.resolve_type(&t) {
        CType::Array(inner, _) | CType::Pointer(inner) => Some(program.resolve_type(&inner)),
        _ => None,
    });
    let integer = element_type.as_ref().is_some_and(CType::is_integer);
    let n = f64::from(verdict.window.unwrap_or(1));
    let alpha = Coefficient::Known(1.0 / n);
    let chain = verdict.chain.clone();
    let rate = context::rate_of(&chain, &alpha, options.default_rate_hz);
    let state_text = g.display(c.state, 200);
    let input = c.resummed.as_ref().map(|r| r.input).unwrap_or(c.value);
    Smoother {
        function: function
            .map(|f| program.function(f).name.clone())
            .unwrap_or_default(),
        function_ref: function,
        macro_name: c.macro_ref.map(|r| program.macro_def(r).name.to_string()),
        state: state_text.clone(),
        span: c.span,
        definition: c.definition,
        form: Form::MovingAverage,
        arithmetic: if integer {
            Arithmetic::Integer
        } else {
            Arithmetic::Float
        },
        storage,
        alpha,
        window: verdict.window,
        dc_gain: Some(1.0),
        scale: None,
        dead_band: integer.then_some(sim::DeadBand {
            rising: 0,
            falling: 0,
        }),
        dead_band_nonnegative: None,
        chain,
        rate,
        code_rate: None,
        assumed: false,
        variants: window_variants(program, walk, &verdict),
        update: format!(
            "{state_text}[..] = {}; sum of {state_text}[0 .. {})",
            g.display(input, 200),
            verdict.window.unwrap_or(0)
        ),
        update_expr: None,
        state_type: element_type,
        inputs: vec![g.display(input, 200)],
        simulation: None,
        upstream: None,
        through_branch: false,
        instance_count: 0,
        design: None,
    }
}

/// The dead band of an update, remembered per compiled update: firmware repeats the same
/// spelling (`>> 4` on an `int32_t`) many times, and the search is the costly part.
pub(crate) fn cached_dead_band(
    update: &sim::Update,
    alpha: f64,
    range: Option<(i128, i128)>,
) -> Option<sim::DeadBand> {
    use std::sync::{Mutex, OnceLock};
    static CACHE: OnceLock<Mutex<HashMap<String, Option<sim::DeadBand>>>> = OnceLock::new();
    let key = format!("{update:?}|{}|{range:?}", alpha.to_bits());
    let cache = CACHE.get_or_init(|| Mutex::new(HashMap::new()));
    if let Some(hit) = cache.lock().ok().and_then(|m| m.get(&key).copied()) {
        return hit;
    }
    let band = update.dead_band_in(alpha, range);
    if let Ok(mut m) = cache.lock() {
        if m.len() < 100_000 {
            m.insert(key, band);
        }
    }
    band
}

/// Compiles the update for `sim`: the state in slot 0, the inputs in the next slots,
/// every other value evaluated to its constant.
fn compile_update(
    program: &Program,
    walk: &WalkResult,
    c: &Candidate,
    inputs: &[V],
    state_ty: &CType,
    input_types: Vec<CType>,
    scale: f64,
) -> Option<sim::Update> {
    let carries = affine::carriers(&walk.graph, c.value, c.state, 200_000)?;
    let mut ev = new_evaluator(program, walk);
    let mut compiler = SimCompiler {
        program,
        walk,
        state: c.state,
        inputs,
        carries: &carries,
        span: c.span,
        ev: &mut ev,
        budget: 4096,
    };
    let node = compiler.compile(c.value, 0)?;
    Some(sim::Update {
        new_value: node,
        state_type: state_ty.clone(),
        input_types,
        scale,
        target: program.options.target,
    })
}

struct SimCompiler<'a, 'p> {
    program: &'p Program,
    walk: &'a WalkResult,
    state: V,
    inputs: &'a [V],
    carries: &'a std::collections::HashSet<V>,
    span: Span,
    ev: &'a mut Evaluator<'p>,
    budget: usize,
}

impl SimCompiler<'_, '_> {
    fn compile(&mut self, v: V, depth: u32) -> Option<sim::Node> {
        if self.budget == 0 || depth > 200 {
            return None;
        }
        self.budget -= 1;
        if v == self.state {
            return Some(sim::Node::Slot(0));
        }
        if let Some(i) = self.inputs.iter().position(|x| *x == v) {
            return Some(sim::Node::Slot(i + 1));
        }
        let g = &self.walk.graph;
        let carries = self.carries.contains(&v);
        let sub = |this: &mut Self, x: V| this.compile(x, depth + 1).map(Box::new);
        Some(match g.node(v).clone() {
            Node::Local { value, .. } | Node::Stored { value, .. } if carries => {
                return self.compile(value, depth + 1)
            }
            Node::Cast(t, a) if carries || self.contains_input(a) => {
                let ty = self.program.resolve_type(g.ty(t));
                sim::Node::Cast(ty, sub(self, a)?)
            }
            Node::Unary(op, a)
                if (carries || self.contains_input(a))
                    && op != UnaryOp::Deref
                    && op != UnaryOp::AddrOf =>
            {
                sim::Node::Unary(op, sub(self, a)?)
            }
            Node::Binary(op, a, b) if carries || self.contains_input(v) => {
                sim::Node::Binary(op, sub(self, a)?, sub(self, b)?)
            }
            Node::Cond(cv, a, b) if carries => {
                sim::Node::Cond(sub(self, cv)?, sub(self, a)?, sub(self, b)?)
            }
            Node::Phi {
                then, otherwise, ..
            } if carries => {
                // The side that carries the state, as the affine reading took it.
                let side = if self.carries.contains(&then) {
                    then
                } else {
                    otherwise
                };
                return self.compile(side, depth + 1);
            }
            _ => {
                let n = eval_value(self.ev, self.walk, v, self.span).ok()?;
                sim::Node::Const(n)
            }
        })
    }

    fn contains_input(&self, v: V) -> bool {
        let inputs = self.inputs;
        self.walk
            .graph
            .reaches_any(v, &|x| inputs.contains(&x), 2000)
    }
}

/// The coefficient under each other definition of a macro in its chain.
fn variants_of(
    program: &Program,
    walk: &WalkResult,
    c: &Candidate,
    reading: &Reading,
    alpha: &Coefficient,
) -> Vec<Variant> {
    let mut variants = Vec::new();
    if alpha.value().is_none() {
        return variants;
    }
    for (name, def) in other_definitions(program, walk, &reading.chain) {
        let make = || {
            let mut ev = new_evaluator(program, walk);
            ev.macro_override = Some(def.clone());
            ev
        };
        let ev = RefCell::new(make());
        let shift = |lhs: V, count: V| shift_of(program, walk, &ev, c.span, lhs, count);
        let value = affine::read(&walk.graph, c.value, c.state, &shift).and_then(|aff| {
            let mut ev = make();
            let (values, _) = evaluate_atoms(program, walk, c, &aff, &mut ev);
            let a = aff.alpha.evaluate(&|i| values[i as usize]);
            a.is_finite().then_some(a)
        });
        variants.push(Variant {
            condition: def.condition.to_string(),
            macro_name: name,
            alpha: value,
            window: None,
        });
    }
    variants
}

/// The other definitions of each macro a derivation went through, under `#if` branches
/// this build did not take: the same file's, or a header the update's file can include
/// (another board's header is no preprocessor branch of this build).
fn other_definitions(
    program: &Program,
    walk: &WalkResult,
    chain: &[crate::eval::ChainStep],
) -> Vec<(String, crate::ir::MacroDef)> {
    let mut out = Vec::new();
    let file = home_function(walk, walk.home).map(|f| f.file);
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
                .active_macro_in(name, file)
                .is_some_and(|m| m.span == def.span)
            {
                continue;
            }
            let def_file = def.span.file.0 as usize;
            let reachable = def.span.file == step.file
                || file.is_some_and(|f| program.include_closure(f).contains(&def_file));
            if reachable {
                out.push((name.clone(), def.clone()));
            }
        }
    }
    out
}

/// A moving average's window under the other `#if` branches of the macros it came from:
/// its terms (buffer length, index wrap, loop bound) evaluated again with each other
/// definition; the window is the smallest.
fn window_variants(program: &Program, walk: &WalkResult, verdict: &Verdict) -> Vec<Variant> {
    let function = home_function(walk, walk.home);
    let scope = crate::eval::Scope {
        function,
        ..Default::default()
    };
    other_definitions(program, walk, &verdict.chain)
        .into_iter()
        .map(|(name, def)| {
            let window = verdict
                .window_terms
                .iter()
                .filter_map(|term| {
                    let mut ev = new_evaluator(program, walk);
                    ev.macro_override = Some(def.clone());
                    let n = ev.eval(term, &scope).ok()?.as_f64();
                    (n >= 1.0 && n <= u32::MAX as f64 && n.fract() == 0.0).then_some(n as u32)
                })
                .min();
            Variant {
                condition: def.condition.to_string(),
                macro_name: name,
                alpha: window.map(|n| 1.0 / f64::from(n)),
                window,
            }
        })
        .collect()
}

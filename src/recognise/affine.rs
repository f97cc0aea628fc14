//! Reads an update's new value as algebra in its state: `new = c_y * state + Σ w_k * u_k
//! (+ c0)`, with `alpha = 1 - c_y`, over the value graph.
//!
//! The value is read as a polynomial (`poly`) over atoms: the state, the inputs, the
//! coefficient names, opaque sub-values, and inverses of denominators that are not
//! constants. Truncation of integer division and shifts is ignored on purpose: this is the
//! filter the code means; `sim` measures what truncation does to it. Each graph node is read
//! once (memoised), so a value shared a thousand times costs one reading, and a reading
//! deeper than a fixed limit makes the node an atom instead of recursing further.
//!
//! Locals are read through when their value carries the state (a temporary that took the
//! update); otherwise they are atoms named by the local (an input computed into a local is
//! one input; a coefficient held in a local is one name). A merge of branches (`Phi`) or a
//! `?:` with the state on one side only is read on that side: the other side overrides the
//! update (a clamp, a first-sample seed) and is not part of the smoother's algebra.

use super::poly::{AtomId, Lcg, Monomial, Poly};
use super::values::{Graph, Node, V};
use crate::ir::BinaryOp;
use std::collections::{HashMap, HashSet};

/// What an atom stands for.
#[derive(Debug, Clone, PartialEq)]
pub enum AtomKind {
    /// A value of the graph that is not read further: a place, a name, a call.
    Leaf(V),
    /// One over a denominator that is not a constant (keyed by the denominator).
    Inverse(V, Poly),
    /// `2^count` (or `2^-count` when `negative`) for a shift whose count is not a constant
    /// that C defines here: a factor whose value is unknown.
    Pow2 { count: V, negative: bool },
    /// An input that is a product of several leaves (`scaling * raw` weighted by the
    /// coefficient): one input signal.
    Product(Vec<AtomId>),
    /// An input that is a sum of signals with unit weights, as written under one constant
    /// coefficient (`0.05f * max * (threshold - level)`): the written sub-expression, when
    /// it is one, and the signal polynomial.
    Composite { node: Option<V>, signal: Poly },
}

/// What the reader may take a shift's count for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Shift {
    /// A constant count that C defines for the left operand (C11 6.5.7p3): an exact power
    /// of two.
    Count(f64),
    /// A count that changes at run time or that C leaves undefined: the shift's gain stays
    /// an opaque factor.
    NotKnown,
}

/// The affine reading of an update.
#[derive(Debug, Clone)]
pub struct Affine {
    pub atoms: Vec<AtomKind>,
    pub state_atom: AtomId,
    pub alpha: Poly,
    /// Input atoms with the weight each carries.
    pub inputs: Vec<(AtomId, Poly)>,
    /// Whether the weights sum to `alpha` identically (DC gain one by construction).
    pub structural: bool,
    /// The constant term (a rounding offset).
    pub offset: f64,
    /// The reading followed one side of a branch merge.
    pub through_branch: bool,
    /// When the weights do not sum to alpha identically: the other ways of naming one
    /// atom of each term its input, in order, for the judge to choose the one whose
    /// weights are constants (`gb * u` names `u`, not `gb`, when `gb` is a `const`).
    pub alternatives: Vec<Vec<(AtomId, Poly)>>,
}

impl Affine {
    /// The atoms of alpha and of the input weights (the coefficient's atoms), once each.
    pub fn weight_atoms(&self) -> Vec<AtomId> {
        let mut all: Vec<AtomId> = self.alpha.atoms();
        for (_, w) in &self.inputs {
            all.extend(w.atoms());
        }
        all.sort_unstable();
        all.dedup();
        all
    }

    /// The graph values an atom is made of (a product's factors, a shift's count).
    pub fn values_of(&self, a: AtomId) -> Vec<V> {
        match self.atoms.get(a as usize) {
            Some(AtomKind::Leaf(v)) | Some(AtomKind::Inverse(v, _)) => vec![*v],
            Some(AtomKind::Pow2 { count, .. }) => vec![*count],
            Some(AtomKind::Product(factors)) => {
                factors.iter().flat_map(|f| self.values_of(*f)).collect()
            }
            Some(AtomKind::Composite { signal, .. }) => signal
                .atoms()
                .iter()
                .flat_map(|f| self.values_of(*f))
                .collect(),
            None => Vec::new(),
        }
    }

    pub fn leaf(&self, a: AtomId) -> Option<V> {
        match self.atoms.get(a as usize) {
            Some(AtomKind::Leaf(v)) => Some(*v),
            _ => None,
        }
    }
}

/// Deepest chain of nodes read before the rest becomes an atom.
const MAX_READ_DEPTH: u32 = 4000;
const MAX_ATOMS: usize = 200;

struct Reader<'a> {
    g: &'a Graph,
    state: V,
    /// Nodes whose value reads the state.
    carries: HashSet<V>,
    atoms: Vec<AtomKind>,
    atom_index: HashMap<(bool, V), AtomId>,
    pow_index: HashMap<(bool, V), AtomId>,
    memo: HashMap<V, Option<Poly>>,
    shift: &'a dyn Fn(V, V) -> Shift,
    through_branch: bool,
    /// Nodes read in this reading, an overall work count.
    work: usize,
}

/// The nodes of `root`'s value that read `state`, found in one pass.
pub fn carriers(g: &Graph, root: V, state: V, limit: usize) -> Option<HashSet<V>> {
    // Post-order over the sub-graph, then a node carries when it is the state or one of
    // its children carries.
    let mut order = Vec::new();
    let mut seen = HashSet::new();
    let mut stack = vec![(root, false)];
    while let Some((v, done)) = stack.pop() {
        if done {
            order.push(v);
            continue;
        }
        if !seen.insert(v) {
            continue;
        }
        if seen.len() > limit {
            return None;
        }
        stack.push((v, true));
        for c in g.children(v) {
            if !seen.contains(&c) {
                stack.push((c, false));
            }
        }
    }
    let mut carries = HashSet::new();
    for v in order {
        if v == state || g.children(v).iter().any(|c| carries.contains(c)) {
            carries.insert(v);
        }
    }
    Some(carries)
}

/// Reads `value` in affine form in `state`. None when it is not affine in the state, has
/// no input, or is too large to read.
pub fn read(g: &Graph, value: V, state: V, shift: &dyn Fn(V, V) -> Shift) -> Option<Affine> {
    let carries = carriers(g, value, state, 50_000)?;
    if !carries.contains(&value) {
        return None;
    }
    let mut r = Reader {
        g,
        state,
        carries,
        atoms: Vec::new(),
        atom_index: HashMap::new(),
        pow_index: HashMap::new(),
        memo: HashMap::new(),
        shift,
        through_branch: false,
        work: 0,
    };
    let state_atom = r.atom(false, state, AtomKind::Leaf(state))?;
    let poly = r.lin(value, 0)?;
    if poly.degree_in(state_atom) != 1 {
        return None;
    }
    let (c_y, rest) = poly.split_on(state_atom);
    if c_y.degree_in(state_atom) > 0 {
        return None;
    }
    let alpha = Poly::constant(1.0).sub(&c_y);
    let offset = rest.terms.get(&Vec::new()).copied().unwrap_or(0.0);
    let monomials: Vec<(Monomial, f64)> = rest
        .terms
        .iter()
        .filter(|(m, _)| !m.is_empty())
        .map(|(m, c)| (m.clone(), *c))
        .collect();
    if monomials.is_empty() {
        return None;
    }
    let atoms = r.atoms.clone();
    let is_leaf = |a: AtomId| matches!(atoms.get(a as usize), Some(AtomKind::Leaf(_)));
    // Try each way of naming one atom of every monomial its input; keep the first whose
    // weights sum to alpha identically.
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
    let combos: usize = choices
        .iter()
        .map(|c| c.len())
        .try_fold(1usize, |acc, n| acc.checked_mul(n))?;
    if combos > 512 {
        return None;
    }
    let mut found = None;
    let mut fallback = None;
    // The other non-clashing namings, kept as picks: their weights are worked out only
    // when no naming sums to alpha.
    let mut other_picks: Vec<Vec<AtomId>> = Vec::new();
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
        } else if other_picks.len() < 16 {
            other_picks.push(pick.clone());
        }
        let sum = inputs
            .iter()
            .fold(Poly::default(), |acc, (_, w)| acc.add(w));
        if identical(&sum, &alpha, &atoms, g) {
            found = Some(inputs);
            break;
        }
    }
    // An input may be a product of signals (`scaling * raw * (1 - a)`): every factor of a
    // monomial that the coefficient does not have is part of the input.
    let mut atoms = atoms;
    if found.is_none() {
        if let Some(inputs) = product_inputs(&monomials, &alpha, &mut atoms) {
            let sum = inputs
                .iter()
                .fold(Poly::default(), |acc, (_, w)| acc.add(w));
            if identical(&sum, &alpha, &atoms, g) {
                found = Some(inputs);
            }
        }
    }
    // An input that is a whole expression of signals under one constant coefficient: the
    // rest divided by alpha has only unit weights (`0.95*y + 0.05*k*(a - b)`).
    if found.is_none() {
        // Only for a coefficient of a low-pass: a growth (`y = 2*y + e`) has no input to
        // approach.
        if let Some(c) = alpha.as_constant().filter(|c| *c > 0.0 && *c < 2.0) {
            let signal = rest_without_constant(&rest).scale(1.0 / c);
            // Two or more signals with unit weights, or one signal negated (`0.99f*y -
            // 0.01f*max` approaches -max).
            let unit = signal
                .terms
                .values()
                .all(|w| ((w.abs() - 1.0).abs()) < 1e-6)
                && (signal.terms.len() >= 2 || signal.terms.values().all(|w| *w < 0.0));
            let leaves_only = signal.atoms().iter().all(|a| {
                matches!(
                    atoms.get(*a as usize),
                    Some(AtomKind::Leaf(_))
                        | Some(AtomKind::Product(_))
                        | Some(AtomKind::Inverse(..))
                )
            });
            if unit && leaves_only && atoms.len() < MAX_ATOMS {
                let node = if signal.terms.len() >= 2 {
                    signal_node(g, value, &r.carries)
                } else {
                    None
                };
                atoms.push(AtomKind::Composite { node, signal });
                let id = (atoms.len() - 1) as AtomId;
                found = Some(vec![(id, alpha.clone())]);
            }
        }
    }
    let (inputs, structural) = match found {
        Some(i) => (i, true),
        None => (fallback?, false),
    };
    let alternatives = if structural {
        Vec::new()
    } else {
        other_picks
            .iter()
            .map(|pick| weights(&monomials, pick))
            .collect()
    };
    Some(Affine {
        atoms,
        state_atom,
        alpha,
        inputs,
        structural,
        offset,
        through_branch: r.through_branch,
        alternatives,
    })
}

impl Reader<'_> {
    fn atom(&mut self, inverse: bool, key: V, kind: AtomKind) -> Option<AtomId> {
        if let Some(a) = self.atom_index.get(&(inverse, key)) {
            return Some(*a);
        }
        if self.atoms.len() >= MAX_ATOMS {
            return None;
        }
        let id = self.atoms.len() as AtomId;
        self.atoms.push(kind);
        self.atom_index.insert((inverse, key), id);
        Some(id)
    }

    fn atom_pow(&mut self, negative: bool, key: V, kind: AtomKind) -> Option<AtomId> {
        if let Some(a) = self.pow_index.get(&(negative, key)) {
            return Some(*a);
        }
        if self.atoms.len() >= MAX_ATOMS {
            return None;
        }
        let id = self.atoms.len() as AtomId;
        self.atoms.push(kind);
        self.pow_index.insert((negative, key), id);
        Some(id)
    }

    fn carries(&self, v: V) -> bool {
        self.carries.contains(&v)
    }

    /// An opaque sub-value: fine as a coefficient or input, not if it hides the state.
    fn leaf(&mut self, v: V) -> Option<Poly> {
        if self.carries(v) && v != self.state {
            return None;
        }
        let id = self.atom(false, v, AtomKind::Leaf(v))?;
        Some(Poly::atom(id))
    }

    fn mul(&self, a: &Poly, b: &Poly) -> Option<Poly> {
        let atoms = &self.atoms;
        let cancel = move |m: &mut Monomial| cancel_inverses(m, atoms);
        a.mul(b, &cancel)
    }

    fn lin(&mut self, v: V, depth: u32) -> Option<Poly> {
        if let Some(hit) = self.memo.get(&v) {
            return hit.clone();
        }
        self.work += 1;
        let out = if depth > MAX_READ_DEPTH || self.work > 200_000 {
            self.leaf(v)
        } else {
            self.lin_inner(v, depth)
        };
        self.memo.insert(v, out.clone());
        out
    }

    fn lin_inner(&mut self, v: V, depth: u32) -> Option<Poly> {
        let g = self.g;
        if v == self.state {
            return self.leaf(v);
        }
        match g.node(v).clone() {
            Node::Int { value, .. } => Some(Poly::constant(value as f64)),
            Node::Float { bits, single } => {
                let x = f64::from_bits(bits);
                Some(Poly::constant(if single { x as f32 as f64 } else { x }))
            }
            Node::Stored { value, .. } if !self.carries(value) => {
                // A constant stored earlier in the body is that constant.
                match self.lin(value, depth + 1) {
                    Some(p) if p.as_constant().is_some() => Some(p),
                    _ => self.leaf(v),
                }
            }
            Node::Local { value, .. } | Node::Stored { value, .. } => {
                if self.carries(value) {
                    self.lin(value, depth + 1)
                } else {
                    self.leaf(v)
                }
            }
            Node::Cast(_, a) => {
                if self.carries(a) {
                    self.lin(a, depth + 1)
                } else {
                    // A cast of something that does not carry the state is one name (a
                    // `(float)raw` input), unless it is a number.
                    match self.lin(a, depth + 1) {
                        Some(p) if p.as_constant().is_some() => Some(p),
                        _ => self.leaf(v),
                    }
                }
            }
            Node::Unary(crate::ir::UnaryOp::Neg, a) => Some(self.lin(a, depth + 1)?.scale(-1.0)),
            Node::Binary(op, a, b) => self.binary(v, op, a, b, depth),
            Node::Cond(c, a, b)
            | Node::Phi {
                cond: c,
                then: a,
                otherwise: b,
            } => {
                if self.carries(c) {
                    // A branch on the state itself that is not a clamp of one side.
                    if !(self.carries(a) ^ self.carries(b)) {
                        return None;
                    }
                }
                // One side carries the state. When the condition tests it, the other side is a
                // clamp of it (`if (t > max) t = max;`); when the condition does not, the
                // other side must be a seed or a reset and this side the state left alone
                // (`if (!init) y = u;`). A side that computed something from the state under
                // a condition that does not test it is an update of that path only.
                let one_side = |this: &Self, side: V| {
                    this.carries(c) || this.g.strip_aliases(side) == this.state
                };
                match (self.carries(a), self.carries(b)) {
                    (true, false) => {
                        if !one_side(self, a) {
                            return None;
                        }
                        self.through_branch = true;
                        self.lin(a, depth + 1)
                    }
                    (false, true) => {
                        if !one_side(self, b) {
                            return None;
                        }
                        self.through_branch = true;
                        self.lin(b, depth + 1)
                    }
                    (true, true) => {
                        let pa = self.lin(a, depth + 1)?;
                        let pb = self.lin(b, depth + 1)?;
                        (pa == pb).then_some(pa)
                    }
                    (false, false) => self.leaf(v),
                }
            }
            _ => self.leaf(v),
        }
    }

    fn binary(&mut self, whole: V, op: BinaryOp, a: V, b: V, depth: u32) -> Option<Poly> {
        use BinaryOp::*;
        // `(E - y)` and `(y - E)`: the written grouping says E is the input, however it is
        // scaled (`0.05f * raw - y` smooths 0.05 raw), so E is one atom.
        if op == Sub {
            if let Some(p) = self.grouped_difference(a, b, depth) {
                return Some(p);
            }
        }
        match op {
            Add => Some(self.lin(a, depth + 1)?.add(&self.lin(b, depth + 1)?)),
            Sub => Some(self.lin(a, depth + 1)?.sub(&self.lin(b, depth + 1)?)),
            Mul => {
                let pa = self.lin(a, depth + 1)?;
                let pb = self.lin(b, depth + 1)?;
                self.mul(&pa, &pb)
            }
            Div => {
                let num = self.lin(a, depth + 1)?;
                if self.carries(b) {
                    return None;
                }
                let den = self.lin(b, depth + 1)?;
                if let Some(c) = den.as_constant() {
                    if c != 0.0 {
                        return Some(num.scale(1.0 / c));
                    }
                    // Division by a constant zero: an opaque factor whose evaluation
                    // fails, so the smoother is listed with no alpha.
                    let id = self.atom(true, b, AtomKind::Inverse(b, den))?;
                    return self.mul(&num, &Poly::atom(id));
                }
                let id = self.atom(true, b, AtomKind::Inverse(b, den))?;
                self.mul(&num, &Poly::atom(id))
            }
            Shr | Shl => {
                if self.carries(b) {
                    return None;
                }
                let value = self.lin(a, depth + 1)?;
                match (self.shift)(a, b) {
                    Shift::Count(count) => {
                        let factor = 2f64.powi(count as i32);
                        Some(if op == Shr {
                            value.scale(1.0 / factor)
                        } else {
                            value.scale(factor)
                        })
                    }
                    Shift::NotKnown => {
                        // The gain `2^count` (or its inverse) is one opaque factor.
                        let negative = op == Shr;
                        let kind = AtomKind::Pow2 { count: b, negative };
                        let key = self.g.strip_aliases(b);
                        let id = self.atom_pow(negative, key, kind)?;
                        self.mul(&value, &Poly::atom(id))
                    }
                }
            }
            _ => self.leaf(whole),
        }
    }

    fn grouped_difference(&mut self, a: V, b: V, depth: u32) -> Option<Poly> {
        let g = self.g;
        let is_state = |v: V| g.strip_aliases(v) == self.state;
        let (input, state_first) = if is_state(b) {
            (a, false)
        } else if is_state(a) {
            (b, true)
        } else {
            return None;
        };
        if self.carries(input) || g.is_place(g.strip_aliases(input)) {
            return None;
        }
        // Only an expression of names (not a bare number, not a single name) is grouped.
        let named = matches!(
            g.node(input),
            Node::Binary(..) | Node::Unary(..) | Node::Cast(..)
        ) && g.reaches_any(
            input,
            &|x| {
                matches!(
                    g.node(x),
                    Node::Name { .. }
                        | Node::Field { .. }
                        | Node::Index { .. }
                        | Node::Deref(_)
                        | Node::Call { .. }
                        | Node::Opaque { .. }
                        | Node::Local { .. }
                        | Node::Stored { .. }
                )
            },
            2000,
        );
        if !named {
            return None;
        }
        let u = self.leaf(input)?;
        let y = self.lin(if state_first { a } else { b }, depth + 1)?;
        Some(if state_first { y.sub(&u) } else { u.sub(&y) })
    }
}

/// `x * (1/x)` is 1 when the denominator is the single atom x.
fn cancel_inverses(m: &mut Monomial, atoms: &[AtomKind]) {
    let mut i = 0;
    while i < m.len() {
        let a = m[i];
        if let Some(AtomKind::Inverse(_, den)) = atoms.get(a as usize) {
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

/// The polynomial without its constant term.
fn rest_without_constant(rest: &Poly) -> Poly {
    let mut out = rest.clone();
    out.terms.remove(&Vec::new());
    out
}

/// The written sub-expression that holds the signals of an update: the one summand of the
/// top-level sum that does not read the state, with its constant factor taken off.
fn signal_node(g: &Graph, value: V, carries: &HashSet<V>) -> Option<V> {
    let mut summands = Vec::new();
    let mut stack = vec![value];
    while let Some(v) = stack.pop() {
        if summands.len() > 8 {
            return None;
        }
        match g.node(v) {
            Node::Cast(_, a) if carries.contains(&v) => stack.push(*a),
            Node::Local { value, .. } | Node::Stored { value, .. } if carries.contains(&v) => {
                stack.push(*value)
            }
            Node::Binary(BinaryOp::Add | BinaryOp::Sub, a, b) if carries.contains(&v) => {
                stack.push(*a);
                stack.push(*b);
            }
            _ if !carries.contains(&v) => summands.push(v),
            _ => {}
        }
    }
    let [one] = summands.as_slice() else {
        return None;
    };
    // `c * expr` or `expr * c`: the constant is the coefficient, the rest the signal.
    match g.node(*one) {
        Node::Binary(BinaryOp::Mul, a, b)
            if matches!(g.node(*a), Node::Int { .. } | Node::Float { .. }) =>
        {
            Some(*b)
        }
        Node::Binary(BinaryOp::Mul, a, b)
            if matches!(g.node(*b), Node::Int { .. } | Node::Float { .. }) =>
        {
            Some(*a)
        }
        // `c * k * expr` groups as `(c * k) * expr`: no written node is the signal without
        // the coefficient, so the signal is printed from its terms.
        Node::Binary(BinaryOp::Mul, a, _)
            if matches!(g.node(*a), Node::Binary(BinaryOp::Mul, x, _)
                if matches!(g.node(*x), Node::Int { .. } | Node::Float { .. })) =>
        {
            None
        }
        _ => Some(*one),
    }
}

/// The inputs when each monomial's factors that alpha does not have make one input (a
/// product atom when there are several).
fn product_inputs(
    monomials: &[(Monomial, f64)],
    alpha: &Poly,
    atoms: &mut Vec<AtomKind>,
) -> Option<Vec<(AtomId, Poly)>> {
    let in_alpha = alpha.atoms();
    let mut out: Vec<(AtomId, Poly)> = Vec::new();
    for (m, c) in monomials {
        let (weight_atoms, signal): (Vec<AtomId>, Vec<AtomId>) =
            m.iter().partition(|a| in_alpha.contains(a));
        // Signals and quotients of signals (`ang / (period + 0.1f)`).
        let leaves_only = signal.iter().all(|a| {
            matches!(
                atoms.get(*a as usize),
                Some(AtomKind::Leaf(_)) | Some(AtomKind::Inverse(..))
            )
        });
        if signal.is_empty() || !leaves_only {
            return None;
        }
        let input = if signal.len() == 1 {
            signal[0]
        } else {
            let kind = AtomKind::Product(signal.clone());
            match atoms.iter().position(|k| *k == kind) {
                Some(i) => i as AtomId,
                None => {
                    if atoms.len() >= MAX_ATOMS {
                        return None;
                    }
                    atoms.push(kind);
                    (atoms.len() - 1) as AtomId
                }
            }
        };
        let mut w = Poly::default();
        w.terms.insert(weight_atoms, *c);
        match out.iter_mut().find(|(a, _)| *a == input) {
            Some((_, acc)) => *acc = acc.add(&w),
            None => out.push((input, w)),
        }
    }
    (out.len() > 1
        || out
            .iter()
            .any(|(a, _)| matches!(atoms[*a as usize], AtomKind::Product(_))))
    .then_some(out)
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

/// Whether two polynomials agree at several random points (inverse atoms taking one over
/// their denominator's value at the same point): exact for rational identities with
/// overwhelming probability, and cheap.
pub fn identical(a: &Poly, b: &Poly, atoms: &[AtomKind], _g: &Graph) -> bool {
    if a == b {
        return true;
    }
    // Weights over different signals are different, however small their scale (a Q31
    // gain's 2^-31 would pass the numeric test below for any two).
    if leaves_of(a, atoms) != leaves_of(b, atoms) {
        return false;
    }
    let mut rng = Lcg::new(atoms.len() as u64 + 7);
    for _ in 0..4 {
        let leaves: Vec<f64> = (0..atoms.len()).map(|_| rng.next_value()).collect();
        let values = atom_values(atoms, &leaves);
        let va = a.evaluate(&|i| values[i as usize]);
        let vb = b.evaluate(&|i| values[i as usize]);
        // Single-precision constants (`1.1f`, `0.1f`) differ from their sums in the
        // seventh digit; anything closer than that is the same weight.
        if (va - vb).abs() > 1e-6 * (1.0 + va.abs().max(vb.abs())) {
            return false;
        }
    }
    true
}

/// The leaf atoms a polynomial is made of, through products, composites and inverses.
fn leaves_of(p: &Poly, atoms: &[AtomKind]) -> std::collections::BTreeSet<AtomId> {
    let mut out = std::collections::BTreeSet::new();
    let mut stack: Vec<AtomId> = p.atoms();
    let mut seen = 0;
    while let Some(a) = stack.pop() {
        seen += 1;
        if seen > 4096 {
            break;
        }
        match atoms.get(a as usize) {
            Some(AtomKind::Product(factors)) => stack.extend(factors.iter().copied()),
            Some(AtomKind::Composite { signal, .. }) => stack.extend(signal.atoms()),
            Some(AtomKind::Inverse(_, den)) => {
                out.insert(a);
                stack.extend(den.atoms());
            }
            _ => {
                out.insert(a);
            }
        }
    }
    out
}

/// Values of all atoms given values for the leaves (inverses computed from them; an
/// inverse of an unread count takes its leaf value as a power of two's inverse).
pub fn atom_values(atoms: &[AtomKind], leaves: &[f64]) -> Vec<f64> {
    let mut values = leaves.to_vec();
    for _ in 0..4 {
        for (i, kind) in atoms.iter().enumerate() {
            if let AtomKind::Product(factors) = kind {
                values[i] = factors
                    .iter()
                    .map(|a| values.get(*a as usize).copied().unwrap_or(f64::NAN))
                    .product();
            }
            if let AtomKind::Composite { signal, .. } = kind {
                values[i] =
                    signal.evaluate(&|a| values.get(a as usize).copied().unwrap_or(f64::NAN));
            }
            if let AtomKind::Inverse(_, den) = kind {
                let d = den.evaluate(&|a| values.get(a as usize).copied().unwrap_or(f64::NAN));
                values[i] = 1.0 / d;
            }
        }
    }
    values
}

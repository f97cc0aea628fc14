//! A running-sum moving average: `sum += u - buf[i]; buf[i] = u;` (in any order, spread
//! over statements). The state's weight is exactly one, the new sample comes in with
//! weight one and the element leaving the ring buffer goes out with weight minus one, and
//! the same body stores the new sample where the leaving one was. The window is the
//! buffer's length, or where the ring index wraps when that comes first.

use super::super::affine::AtomKind;
use super::super::judge::Reading;
use super::super::values::{Node, V};
use super::super::Form;
use super::Verdict;
use crate::eval::{self, Evaluator};
use crate::ir::*;

pub fn judge(r: &Reading) -> Option<Verdict> {
    let a = &r.affine;
    if !a.alpha.is_zero() || a.inputs.len() != 2 {
        return None;
    }
    let g = r.g();
    let weight = |p: &super::super::poly::Poly| p.as_constant();
    let (plus, minus) = {
        let (x, wx) = &a.inputs[0];
        let (y, wy) = &a.inputs[1];
        match (weight(wx), weight(wy)) {
            (Some(p), Some(m)) if p == 1.0 && m == -1.0 => (*x, *y),
            (Some(m), Some(p)) if p == 1.0 && m == -1.0 => (*y, *x),
            _ => return None,
        }
    };
    let (AtomKind::Leaf(entering), AtomKind::Leaf(leaving)) =
        (&a.atoms[plus as usize], &a.atoms[minus as usize])
    else {
        return None;
    };
    let leaving = g.place_of(*leaving);
    let Node::Index { base, index } = *g.node(leaving) else {
        return None;
    };
    let entering = g.strip_aliases(*entering);
    let stored = r
        .walk
        .stores
        .iter()
        .any(|(p, v)| *p == leaving && g.strip_aliases(*v) == entering);
    if !stored {
        return None;
    }
    let whole = |n: f64| (n >= 1.0 && n <= u32::MAX as f64 && n.fract() == 0.0).then_some(n as u32);
    let function = r.function();
    let span = r.candidate.span;
    let mut chain = Vec::new();
    let mut terms = Vec::new();
    let size = g
        .to_expr(base, span, true, 2000)
        .and_then(|e| eval::place_type(r.program, function, &e))
        .and_then(|t| match r.program.resolve_type(&t) {
            CType::Array(_, Some(size)) => {
                terms.push((*size).clone());
                let mut ev = Evaluator::new(r.program);
                let out = ev
                    .eval(
                        &size,
                        &crate::eval::Scope {
                            function,
                            ..Default::default()
                        },
                    )
                    .ok()
                    .and_then(|v| whole(v.as_f64()));
                chain.extend(ev.chain);
                out
            }
            _ => None,
        });
    let wrap = index_wrap(r, index).and_then(|(n, term)| {
        let n = whole(n)?;
        terms.push(term);
        Some(n)
    });
    let window = match (size, wrap) {
        (Some(a), Some(b)) => Some(a.min(b)),
        (a, b) => a.or(b),
    }?;
    let mut v = Verdict::new(Form::MovingAverage);
    v.window = Some(window);
    v.dc_gain = Some(1.0);
    v.chain = chain;
    v.window_terms = terms;
    Some(v)
}

/// Where a ring index wraps: `i = (i + 1) % N`, or `if (i >= N) i = 0;` / `== N`.
fn index_wrap(r: &Reading, index: V) -> Option<(f64, Expr)> {
    let g = r.g();
    let text = g.display(g.strip_aliases(index), 200);
    let function = r.function()?;
    let scope = crate::eval::Scope::in_function(function);
    for w in r.program.writes_seen_from(&text, function.file) {
        if let ExprKind::Binary {
            op: BinaryOp::Rem,
            rhs,
            ..
        } = &w.value.kind
        {
            if let Ok(v) = Evaluator::new(r.program).eval(rhs, &scope) {
                return Some((v.as_f64(), (**rhs).clone()));
            }
        }
    }
    // A local index: `i = (i + 1) % N` among the function's own statements.
    let body = &*r.program.function(function).body();
    let mut found = None;
    crate::index::visit_stmts(body, &mut |e| {
        if found.is_some() {
            return;
        }
        if let ExprKind::Assign {
            op: None,
            target,
            value,
        } = &e.kind
        {
            if target.to_string() == text {
                if let ExprKind::Binary {
                    op: BinaryOp::Rem,
                    rhs,
                    ..
                } = &value.kind
                {
                    found = Evaluator::new(r.program)
                        .eval(rhs, &scope)
                        .ok()
                        .map(|v| (v.as_f64(), (**rhs).clone()));
                }
            }
        }
    });
    if found.is_some() {
        return found;
    }
    visit_ifs(body, &mut |cond, then| {
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
            found = Evaluator::new(r.program)
                .eval(rhs, &scope)
                .ok()
                .map(|v| (v.as_f64(), (**rhs).clone()));
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

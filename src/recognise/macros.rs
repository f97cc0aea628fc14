//! Macros as the recogniser uses them: bodies parsed once into IR templates, filled in at
//! each call with the call's own argument expressions.
//!
//! `index::Program::macro_body` parses each definition once (as an expression when it is
//! one, else as statements). Expanding a call clones that template with every parameter
//! replaced by the argument's IR and every span moved to the call, so the walk sees the
//! update at the line that calls the macro. A tree substitution keeps the grouping the
//! argument had; C substitutes text, which differs only where the body uses a parameter
//! unparenthesised next to an operator and the argument is itself an operator expression
//! (`#define SQ(x) x*x` with `SQ(a+b)`). For that case, and for bodies that paste or
//! stringify tokens, the call falls back to textual substitution and a fresh parse.

use crate::index::{MacroBody, MacroRef, Program};
use crate::ir::*;

/// The body of a macro call with its arguments put in, located at the call.
pub fn instantiate(
    program: &Program,
    r: MacroRef,
    args: &[Expr],
    anchor: Span,
) -> Option<MacroBody> {
    let def = program.macro_def(r);
    let params: &[String] = def.params.as_deref().unwrap_or(&[]);
    let variadic = params.iter().any(|p| p.contains("..."));
    if params.len() != args.len() && !variadic {
        // A call with the wrong number of arguments does not compile; nothing to read.
        if !(params.is_empty() && args.len() == 1 && def.params.is_some()) {
            return None;
        }
    }
    let textual = variadic
        || def.body.contains('#')
        || params
            .iter()
            .zip(args)
            .any(|(p, a)| compound(a) && !protected(&def.body, p));
    if textual {
        let text = crate::eval::substitute_macro(&def.body, params, args);
        return parse_body(&text, anchor);
    }
    let template = program.macro_body(r);
    // `(a) * (x)` in a body reads as a cast to a type `a` until `a` is known: a parameter
    // given a value is the product, one given a type name is the cast.
    let cast_fix = |e: &Expr| -> Option<Expr> {
        let ExprKind::Cast {
            ty: CType::Named(name),
            arg,
        } = &e.kind
        else {
            return None;
        };
        let i = params.iter().position(|p| **p == **name)?;
        let given = args.get(i)?;
        if let ExprKind::Ident(t) = &given.kind {
            if program.is_type_name(t) {
                return Some(Expr::new(
                    ExprKind::Cast {
                        ty: crate::parse::type_from_name(t),
                        arg: arg.clone(),
                    },
                    e.span,
                ));
            }
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
        Some(Expr::new(
            ExprKind::Binary {
                op,
                lhs: Box::new(Expr::new(ExprKind::Ident(name.as_str().into()), e.span)),
                rhs: inner.clone(),
            },
            e.span,
        ))
    };
    let substitute = |e: &Expr| -> Option<Expr> {
        let ExprKind::Ident(name) = &e.kind else {
            return None;
        };
        let i = params.iter().position(|p| **p == **name)?;
        let mut arg = args.get(i)?.clone();
        crate::parse::relocate_expr(&mut arg, anchor);
        Some(arg)
    };
    match template {
        MacroBody::Expr(e) => {
            let mut e = e.clone();
            crate::parse::relocate_expr(&mut e, anchor);
            repair_casts(&mut e, &cast_fix);
            replace_in_expr(&mut e, &substitute);
            Some(MacroBody::Expr(e))
        }
        MacroBody::Stmts(stmts) => {
            let mut stmts = stmts.clone();
            crate::parse::relocate_stmts(&mut stmts, anchor);
            for s in &mut stmts {
                replace_in_stmt(s, &|x| {
                    let mut x = x.clone();
                    if repair_casts(&mut x, &cast_fix) {
                        Some(x)
                    } else {
                        None
                    }
                });
                replace_in_stmt(s, &substitute);
            }
            Some(MacroBody::Stmts(stmts))
        }
        MacroBody::Neither => None,
    }
}

/// The body of an object-like macro, located at its use.
pub fn object_body(program: &Program, r: MacroRef, anchor: Span) -> Option<MacroBody> {
    match program.macro_body(r) {
        MacroBody::Expr(e) => {
            let mut e = e.clone();
            crate::parse::relocate_expr(&mut e, anchor);
            Some(MacroBody::Expr(e))
        }
        MacroBody::Stmts(s) => {
            let mut s = s.clone();
            crate::parse::relocate_stmts(&mut s, anchor);
            Some(MacroBody::Stmts(s))
        }
        MacroBody::Neither => None,
    }
}

/// Applies `fix` to every sub-expression, innermost first; true when anything changed.
fn repair_casts(e: &mut Expr, fix: &dyn Fn(&Expr) -> Option<Expr>) -> bool {
    let mut changed = false;
    e.children_mut(&mut |c| changed |= repair_casts(c, fix));
    if let Some(r) = fix(e) {
        *e = r;
        changed = true;
    }
    changed
}

fn parse_body(text: &str, anchor: Span) -> Option<MacroBody> {
    let trimmed = text.trim();
    if !trimmed.ends_with(';') && !trimmed.starts_with('{') {
        if let Some(e) = crate::parse::parse_expression(trimmed, anchor) {
            return Some(MacroBody::Expr(e));
        }
    }
    crate::parse::parse_statements(trimmed, anchor).map(MacroBody::Stmts)
}

/// Whether an argument's grouping can change when its text is pasted next to an operator.
fn compound(e: &Expr) -> bool {
    matches!(
        e.kind,
        ExprKind::Binary { .. }
            | ExprKind::Conditional { .. }
            | ExprKind::Assign { .. }
            | ExprKind::Comma(_)
    )
}

/// Whether every use of `param` in `body` is parenthesised or a whole argument, so that
/// substituting a tree means what substituting text means.
fn protected(body: &str, param: &str) -> bool {
    let bytes = body.as_bytes();
    let mut ok = true;
    let mut i = 0;
    while i < bytes.len() {
        let c = bytes[i];
        if c.is_ascii_alphabetic() || c == b'_' {
            let start = i;
            while i < bytes.len() && (bytes[i].is_ascii_alphanumeric() || bytes[i] == b'_') {
                i += 1;
            }
            if &body[start..i] == param {
                let before = body[..start].trim_end().chars().last();
                let after = body[i..].trim_start().chars().next();
                let open = matches!(before, Some('(') | Some(','));
                let close = matches!(after, Some(')') | Some(','));
                let whole = before.is_none() && after.is_none();
                if !(whole || open && close) {
                    ok = false;
                }
            }
            continue;
        }
        i += 1;
    }
    ok
}

fn replace_in_stmt(stmt: &mut Stmt, f: &dyn Fn(&Expr) -> Option<Expr>) {
    match stmt {
        Stmt::Expr(e) => replace_in_expr(e, f),
        Stmt::Decl(decls) => {
            for d in decls {
                if let Some(init) = &mut d.init {
                    replace_in_init(init, f);
                }
            }
        }
        Stmt::Block(items) => {
            for s in items {
                replace_in_stmt(s, f);
            }
        }
        Stmt::If {
            cond,
            then,
            otherwise,
        } => {
            replace_in_expr(cond, f);
            replace_in_stmt(then, f);
            if let Some(o) = otherwise {
                replace_in_stmt(o, f);
            }
        }
        Stmt::Loop {
            init,
            cond,
            step,
            body,
            ..
        } => {
            for s in init {
                replace_in_stmt(s, f);
            }
            if let Some(c) = cond {
                replace_in_expr(c, f);
            }
            if let Some(s) = step {
                replace_in_expr(s, f);
            }
            replace_in_stmt(body, f);
        }
        Stmt::Switch { scrutinee, body } => {
            replace_in_expr(scrutinee, f);
            replace_in_stmt(body, f);
        }
        Stmt::Return(Some(e), _) => replace_in_expr(e, f),
        Stmt::Conditional(branches) => {
            for (_, b) in branches {
                for s in b {
                    replace_in_stmt(s, f);
                }
            }
        }
        Stmt::Return(None, _) | Stmt::Other(_) => {}
    }
}

fn replace_in_init(init: &mut Initializer, f: &dyn Fn(&Expr) -> Option<Expr>) {
    match init {
        Initializer::Expr(e) => replace_in_expr(e, f),
        Initializer::List(items) => {
            for (_, i) in items {
                replace_in_init(i, f);
            }
        }
    }
}

/// Replaces the sub-expressions `f` answers for (parents first; a replacement is not
/// searched again).
pub fn replace_in_expr(expr: &mut Expr, f: &dyn Fn(&Expr) -> Option<Expr>) {
    if let Some(r) = f(expr) {
        *expr = r;
        return;
    }
    expr.children_mut(&mut |c| replace_in_expr(c, f));
}

/// Whether a macro body can hold an update: an assignment operator somewhere in its text.
pub fn may_assign(body: &str) -> bool {
    let b = body.as_bytes();
    for i in 0..b.len() {
        if b[i] != b'=' {
            continue;
        }
        let prev = if i > 0 { b[i - 1] } else { b' ' };
        let next = b.get(i + 1).copied().unwrap_or(b' ');
        if next == b'=' || matches!(prev, b'=' | b'!' | b'<' | b'>') {
            // `==`, `!=`, `<=`, `>=` compare; but `<<=` and `>>=` assign.
            if matches!(prev, b'<' | b'>') && i >= 2 && b[i - 2] == prev {
                return true;
            }
            continue;
        }
        return true;
    }
    body.contains("++") || body.contains("--")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parenthesised_parameters_are_protected() {
        assert!(protected("((y) += (k) * ((u) - (y)))", "y"));
        assert!(!protected("x * x", "x"));
        assert!(protected("f(a, b)", "a"));
    }

    #[test]
    fn assignments_are_told_from_comparisons() {
        assert!(may_assign("y += k*(u - y)"));
        assert!(may_assign("acc >>= 1"));
        assert!(!may_assign("(a == b) && (c <= d)"));
        assert!(!may_assign("x >= 3"));
    }
}

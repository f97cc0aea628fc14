//! `state-not-persistent`: the state is a plain local variable (`Storage::Local`), so it
//! starts afresh on every call and the "filter" keeps nothing of the past.
//!
//! A local state updated inside a loop of its own function is left alone: that is a block
//! filter over a buffer, whose state only has to live as long as the loop. Where the state
//! lives is the recogniser's finding (`Smoother::storage`); this rule only adds the loop
//! test and the declaration's initial value for the message.

use super::{Context, Finding, Label, RuleInfo};
use crate::index::Program;
use crate::ir::{Initializer, Span, Stmt};
use crate::recognise::{Smoother, Storage};
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "state-not-persistent",
    severity: Severity::Error,
    summary: "The smoother's state is a plain local: it restarts on every call.",
    doc: include_str!("../../rules/state-not-persistent.md"),
    check,
};

/// Whether the update at `span` stands inside a loop of `stmts`.
fn in_loop(stmts: &[Stmt], span: Span) -> bool {
    let mut found = false;
    visit_loops(stmts, &mut |body, cond, step| {
        let mut exprs: Vec<&crate::ir::Expr> = Vec::new();
        crate::index::visit_stmts(std::slice::from_ref(body), &mut |e| exprs.push(e));
        exprs.extend(cond);
        exprs.extend(step);
        found |= exprs.iter().any(|top| {
            let mut hit = false;
            top.walk(&mut |e| hit |= e.span.file == span.file && e.span.start == span.start);
            hit
        });
    });
    found
}

type LoopVisitor<'a> = dyn FnMut(&Stmt, Option<&crate::ir::Expr>, Option<&crate::ir::Expr>) + 'a;

fn visit_loops(stmts: &[Stmt], f: &mut LoopVisitor) {
    for stmt in stmts {
        match stmt {
            Stmt::Loop {
                body, cond, step, ..
            } => {
                f(body, cond.as_deref(), step.as_deref());
                visit_loops(std::slice::from_ref(body), f);
            }
            Stmt::Block(items) => visit_loops(items, f),
            Stmt::If {
                then, otherwise, ..
            } => {
                visit_loops(std::slice::from_ref(then), f);
                if let Some(o) = otherwise {
                    visit_loops(std::slice::from_ref(o), f);
                }
            }
            Stmt::Switch { body, .. } => visit_loops(std::slice::from_ref(body), f),
            Stmt::Conditional(branches) => {
                for (_, b) in branches {
                    visit_loops(b, f);
                }
            }
            _ => {}
        }
    }
}

/// What the state starts from on each call, as C text, and where it is declared.
fn start_of(program: &Program, s: &Smoother) -> (String, Option<Span>) {
    let Some(f) = s.function_ref else {
        return ("its declaration".into(), None);
    };
    let function = program.function(f);
    match crate::eval::find_local(function, &s.state) {
        Some(decl) => match &decl.init {
            Some(Initializer::Expr(e)) => (format!("`{e}`"), Some(decl.span)),
            Some(Initializer::List(_)) => ("its initialiser".into(), Some(decl.span)),
            None => (
                "whatever the stack holds (it is never initialised)".into(),
                Some(decl.span),
            ),
        },
        None => ("its declaration".into(), None),
    }
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    let program = &ctx.scan.program;
    for (i, s, _) in ctx.smoothers() {
        if s.storage != Storage::Local {
            continue;
        }
        let Some(f) = s.function_ref else { continue };
        let function = program.function(f);
        if in_loop(&function.body(), s.span) {
            continue;
        }
        let (start, declared) = start_of(program, s);
        let mut finding = Finding::at(
            &RULE,
            i,
            s,
            format!(
                "`{}` is a plain local of {}(): it starts from {start} on every call, so \
                 the update keeps nothing of the past (each call returns one step from that \
                 start)",
                s.state, s.function
            ),
        );
        finding.help = Some(format!(
            "declare it `static` (or keep it in a global, or in a struct passed by pointer) \
             so `{}` keeps its value from one call to the next",
            s.state
        ));
        if let Some(span) = declared {
            finding.labels.push(Label {
                file: span.file,
                line: span.line,
                range: None,
                message: "declared here without `static`".into(),
            });
        }
        out.push(finding);
    }
}

#[cfg(test)]
mod tests {
    use super::super::coefficient_truncated::findings_in;
    use super::*;

    #[test]
    fn a_plain_local_state_is_reported_with_its_start() {
        let f = findings_in(
            "float f(float u)\n{\n    float y = 4.0f;\n    y += 0.1f * (u - y);\n    return y;\n}\n",
            "",
            RULE.id,
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message
                .starts_with("`y` is a plain local of f(): it starts from `4.0f` on every call"),
            "{}",
            f[0].message
        );
        assert_eq!(f[0].span.map(|s| s.line), Some(4));
        assert_eq!(f[0].labels[0].line, 3);
    }

    #[test]
    fn static_locals_globals_and_block_filters_pass() {
        for src in [
            "float f(float u) { static float y; y += 0.1f * (u - y); return y; }\n",
            "static float y;\nvoid f(float u) { y += 0.1f * (u - y); }\n",
            "float f(const float *b, int n) { float y = b[0];\n for (int i = 1; i < n; i++) {\n y += 0.25f * (b[i] - y);\n }\n return y; }\n",
            "float f(const float *b, int n) { float y = b[0]; int i = 0;\n while (i < n) { y += 0.25f * (b[i] - y); i++; }\n return y; }\n",
        ] {
            let f = findings_in(src, "", RULE.id);
            assert!(f.is_empty(), "{src}: {f:?}");
        }
    }
}

//! `coefficient-truncated`: a coefficient that C's integer division makes zero or changes
//! badly (`float a = 1/8;` is 0, `(1500 / 400)` is 3 where 3.75 was meant).
//!
//! Two places are searched. The coefficient's derivation (`Smoother::chain`): each named
//! step is evaluated again from its right-hand side, once with the C rules and once with
//! integer division done in real numbers (`Evaluator::real_arithmetic`), and a step whose
//! two values differ is reported where the difference starts (a step whose inputs are
//! themselves already wrong is only a consequence). And constant divisions written into the
//! update itself (`y += (1/8) * (u - y)`), which have no step of their own. Both searches are
//! for float smoothers, where integer division is a slip; integer smoothers divide on
//! purpose and `integer-dead-band` judges them. A zero alpha is reported for every form,
//! since such a filter never moves. Where the value of alpha is out of range but not zero,
//! `coefficient-out-of-range` speaks; this rule leaves it alone.

use super::{Context, Finding, Label, RuleInfo};
use crate::eval::num::Num;
use crate::eval::{self, ChainStep, Evaluator, Scope};
use crate::index::Program;
use crate::ir::{BinaryOp, CType, Expr, ExprKind, Initializer, Span};
use crate::recognise::{Arithmetic, Coefficient, Form, Smoother};
use crate::report::table::sig3;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "coefficient-truncated",
    severity: Severity::Error,
    summary: "Integer division makes a coefficient zero or far from what its text means.",
    doc: include_str!("../../rules/coefficient-truncated.md"),
    check,
};

/// A truncation matters when it moves a value by more than this fraction of what was
/// meant. Below it the change is within what a designer rounds anyway (`1000/3` for
/// 333.3 is 0.1 % off); above it the filter is not the one written down.
const TOLERANCE: f64 = 0.01;

/// The amplitude used to run the update once and see whether it moves at all.
const PROBE: f64 = 1000.0;

const WHY: &str = "integer division before the conversion to float";

/// One place where integer division changed a value: its text, what C makes of it, and
/// what real arithmetic gives.
#[derive(Debug, Clone, PartialEq)]
struct Truncation {
    text: String,
    in_c: f64,
    meant: f64,
    /// Where it is written, when that is not the update itself.
    at: Option<(crate::ir::FileId, u32)>,
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    let program = &ctx.scan.program;
    for (i, s, _) in ctx.smoothers() {
        if s.form == Form::MovingAverage {
            continue;
        }
        let float = s.arithmetic == Arithmetic::Float;
        let (mut found, every) = if float {
            chain_truncations(program, s)
        } else {
            (Vec::new(), Vec::new())
        };
        if float && found.is_empty() {
            found = update_truncations(program, s);
        }
        let zero_alpha = s.alpha == Coefficient::Known(0.0);
        let frozen = zero_alpha || first_step(s) == Some(0.0);
        if found.is_empty() && !zero_alpha {
            continue;
        }
        let consequence = if frozen {
            "the filter never moves".to_string()
        } else {
            match alpha_meant(s, &found, &every) {
                Some((c, meant)) => format!("alpha is {} instead of {}", sig3(c), sig3(meant)),
                None => "the filter is not the one written down".to_string(),
            }
        };
        let message = match found.first() {
            Some(t) => format!(
                "`{}` is {} in C ({WHY}), {} was meant; {consequence}",
                t.text,
                sig3(t.in_c),
                sig3(t.meant)
            ),
            None => format!("alpha is 0 in C: {consequence}, its output stays where it starts"),
        };
        let mut finding = Finding::at(&RULE, i, s, message);
        finding.help = Some(if found.is_empty() {
            "give the coefficient a value in (0, 1]; if it is computed, check each step of its \
             derivation for a division of two integers"
                .into()
        } else {
            "make one operand of the division a float (`1.0f / 8`, `400.0f`) so the division \
             keeps its fraction"
                .into()
        });
        finding.labels = found
            .iter()
            .filter_map(|t| {
                let (file, line) = t.at?;
                Some(Label {
                    file,
                    line,
                    range: None,
                    message: format!("{} in C, {} meant", sig3(t.in_c), sig3(t.meant)),
                })
            })
            .collect();
        out.push(finding);
    }
}

/// The first step of the update from rest at 0 toward a constant input, as a fraction of
/// the input: the coefficient C really applies. Float states only.
fn first_step(s: &Smoother) -> Option<f64> {
    let sim = s.simulation.as_ref()?;
    if !sim.state_type.is_float() {
        return None;
    }
    let run = sim.run(0.0, PROBE)?;
    Some(run.value.as_f64() / PROBE)
}

/// What alpha is in C and what it was meant to be, when that is known: from the step that
/// defines alpha itself (its value is alpha; it may be a consequence of the reported step,
/// so every changed step is searched), or for a division in the update, from the executed
/// first step against the affine reading (which reads `1/8` as 0.125).
fn alpha_meant(s: &Smoother, found: &[Truncation], every: &[Truncation]) -> Option<(f64, f64)> {
    let alpha = s.alpha.value()?;
    if let Some(t) = every
        .iter()
        .find(|t| (t.in_c - alpha).abs() <= 1e-12 * alpha.abs().max(1.0))
    {
        return Some((t.in_c, t.meant));
    }
    if found.iter().any(|t| t.at.is_none()) {
        return first_step(s).map(|c| (c, alpha));
    }
    None
}

fn close(a: f64, b: f64, relative: f64) -> bool {
    (a - b).abs() <= relative * a.abs().max(b.abs())
}

fn differs(in_c: f64, meant: f64) -> bool {
    meant.is_finite() && in_c.is_finite() && !close(in_c, meant, TOLERANCE)
}

/// A chain step taken apart: the name it defines, its right-hand side, the type the value
/// is converted to, and the scopes its right-hand side may have been evaluated in.
struct StepParts {
    name: String,
    rhs: String,
    ty: Option<CType>,
    scopes: Vec<Scope>,
}

fn step_parts(program: &Program, s: &Smoother, step: &ChainStep) -> Option<StepParts> {
    let name = step.name.clone()?;
    if let Some(rest) = step.text.strip_prefix("#define ") {
        // An object-like macro: its body is evaluated with no scope, and not converted.
        let rhs = rest.trim_start().strip_prefix(name.as_str())?.trim();
        return Some(StepParts {
            name,
            rhs: rhs.to_string(),
            ty: None,
            scopes: vec![Scope::default()],
        });
    }
    let (lhs, rhs) = step.text.split_once(" = ")?;
    let rhs = rhs.trim().to_string();
    if let Some((function, param)) = lhs.split_once(": ") {
        // An argument bound to a parameter: converted to the parameter's type, evaluated
        // where the call stands (not recorded, so both likely places are tried).
        let f = program.function_by_name(function.trim())?;
        let ty = program
            .function(f)
            .params
            .iter()
            .find(|p| p.name == param.trim())
            .map(|p| program.resolve_type(&p.ty))?;
        return Some(StepParts {
            name,
            rhs,
            ty: Some(ty),
            scopes: vec![
                Scope::default(),
                Scope {
                    function: s.function_ref,
                    ..Scope::default()
                },
            ],
        });
    }
    // A declaration with an initialiser: a local of the smoother's function, or a global.
    let local = s
        .function_ref
        .and_then(|f| eval::find_local(program.function(f), &name));
    if let Some(local) = local {
        return Some(StepParts {
            name,
            rhs,
            ty: Some(program.resolve_type(&local.ty)),
            scopes: vec![Scope {
                function: s.function_ref,
                ..Scope::default()
            }],
        });
    }
    let global = program.global(&name)?;
    Some(StepParts {
        name,
        rhs,
        ty: Some(program.resolve_type(&global.ty)),
        scopes: vec![Scope::default()],
    })
}

/// Evaluates `expr` in `scope`, with the C rules or with real division, converted to `ty`.
fn value_of(
    program: &Program,
    expr: &Expr,
    scope: &Scope,
    ty: Option<&CType>,
    real: bool,
) -> Option<f64> {
    let mut ev = Evaluator::new(program);
    ev.real_arithmetic = real;
    let v: Num = ev.eval(expr, scope).ok()?;
    let v = match ty {
        Some(t) => v.convert(t, program.options.target),
        None => v,
    };
    Some(v.as_f64())
}

/// The steps of the chain whose value integer division changed: those where the change
/// starts, and all of them.
fn chain_truncations(program: &Program, s: &Smoother) -> (Vec<Truncation>, Vec<Truncation>) {
    let mut wrong: Vec<(String, Vec<String>, Truncation)> = Vec::new();
    for step in &s.chain {
        let Some(in_c) = step.value else { continue };
        let Some(parts) = step_parts(program, s, step) else {
            continue;
        };
        let anchor = Span {
            file: step.file,
            line: step.line,
            ..Span::default()
        };
        let Some(expr) = crate::parse::parse_expression(&parts.rhs, anchor) else {
            continue;
        };
        // Use the scope in which the C rules give back the value the chain recorded: then
        // the only difference left is the division.
        let meant = parts.scopes.iter().find_map(|scope| {
            let again = value_of(program, &expr, scope, parts.ty.as_ref(), false)?;
            if !close(again, in_c, 1e-9) {
                return None;
            }
            value_of(program, &expr, scope, parts.ty.as_ref(), true)
        });
        let Some(meant) = meant else { continue };
        if !differs(in_c, meant) {
            continue;
        }
        let mut names = Vec::new();
        expr.walk(&mut |e| {
            if let ExprKind::Ident(n) = &e.kind {
                names.push(n.to_string());
            }
        });
        wrong.push((
            parts.name.clone(),
            names,
            Truncation {
                text: format!("{} = {}", parts.name, parts.rhs),
                in_c,
                meant,
                at: Some((step.file, step.line)),
            },
        ));
    }
    let wrong_names: Vec<String> = wrong.iter().map(|(n, _, _)| n.clone()).collect();
    let origins = wrong
        .iter()
        .filter(|(own, uses, _)| !uses.iter().any(|u| u != own && wrong_names.contains(u)))
        .map(|(_, _, t)| t.clone())
        .collect();
    (origins, wrong.into_iter().map(|(_, _, t)| t).collect())
}

/// Divisions of two integer constants written in the update itself, and in the
/// initialisers of the function's locals that the update names (a `const float a = 1/8;`
/// inside the function is read through the locals, not recorded as a step of the chain).
fn update_truncations(program: &Program, s: &Smoother) -> Vec<Truncation> {
    let Some(update) = s.update_expr.clone() else {
        return Vec::new();
    };
    let mut places: Vec<String> = s.inputs.clone();
    places.push(s.state.clone());
    let scope = Scope {
        function: s.function_ref,
        ..Scope::default()
    };
    let mut divisions = Vec::new();
    update.walk(&mut |e| {
        if let ExprKind::Binary {
            op: BinaryOp::Div,
            lhs,
            rhs,
        } = &e.kind
        {
            let mut signal = false;
            e.walk(&mut |x| signal |= x.is_place() && places.contains(&x.to_string()));
            if !signal {
                divisions.push((e.clone(), (**lhs).clone(), (**rhs).clone()));
            }
        }
    });
    let mut found = Vec::new();
    let Some(function) = s.function_ref.map(|f| program.function(f)) else {
        return found;
    };
    let mut names: Vec<String> = Vec::new();
    update.walk(&mut |e| {
        if let ExprKind::Ident(n) = &e.kind {
            let n = n.to_string();
            if !places.contains(&n) && !names.contains(&n) {
                names.push(n);
            }
        }
    });
    for name in names {
        let Some(decl) = eval::find_local(function, &name) else {
            continue;
        };
        let Some(Initializer::Expr(init)) = &decl.init else {
            continue;
        };
        let ty = program.resolve_type(&decl.ty);
        let (Some(in_c), Some(meant)) = (
            value_of(program, init, &scope, Some(&ty), false),
            value_of(program, init, &scope, Some(&ty), true),
        ) else {
            continue;
        };
        if differs(in_c, meant) {
            found.push(Truncation {
                text: format!("{name} = {init}"),
                in_c,
                meant,
                at: Some((decl.span.file, decl.span.line)),
            });
        }
    }
    for (whole, lhs, rhs) in divisions {
        let ints = [&lhs, &rhs].iter().all(|side| {
            Evaluator::new(program)
                .eval(side, &scope)
                .is_ok_and(|v| !v.is_float())
        });
        if !ints {
            continue;
        }
        let (Some(in_c), Some(meant)) = (
            value_of(program, &whole, &scope, None, false),
            value_of(program, &whole, &scope, None, true),
        ) else {
            continue;
        };
        if differs(in_c, meant) {
            found.push(Truncation {
                text: whole.to_string(),
                in_c,
                meant,
                at: None,
            });
        }
    }
    found
}

/// Runs the gate on C source held in memory, for the unit tests of the rules of this
/// family: the file is `a.c`, the spec is YAML text (empty for none).
#[cfg(test)]
pub(super) fn findings_in(src: &str, spec_yaml: &str, rule: &str) -> Vec<Finding> {
    use crate::index::ProgramOptions;
    let ir = crate::parse::parse_file(crate::ir::FileId(0), src.as_bytes());
    let program = Program::build(vec![ir], vec!["a.c".into()], ProgramOptions::default());
    let recognition =
        crate::recognise::recognise(&program, &crate::recognise::RecogniseOptions::default());
    let figures = crate::figures::for_all(&recognition.smoothers);
    let mut scan = crate::scan::Scan {
        root: std::path::PathBuf::from("."),
        program,
        recognition,
        figures,
        notes: Vec::new(),
        incomplete: false,
    };
    let spec = crate::spec::from_str(spec_yaml).unwrap();
    crate::check::run(&mut scan, &spec)
        .findings
        .into_iter()
        .filter(|f| f.rule == rule)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn found(src: &str) -> Vec<Finding> {
        findings_in(src, "", RULE.id)
    }

    #[test]
    fn one_eighth_in_int_is_zero_and_never_moves() {
        // Source: C11 6.5.5p6 (1/8 is 0 before the conversion to float, 6.3.1.4).
        let f = found(
            "static const float a = 1 / 8;\nstatic float y;\n\
             void f(float u) { y += a * (u - y); }\n",
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert_eq!(
            f[0].message,
            "`a = 1 / 8` is 0 in C (integer division before the conversion to float), \
             0.125 was meant; the filter never moves"
        );
        assert_eq!(f[0].labels[0].line, 1);
    }

    #[test]
    fn a_macro_mixing_int_and_float_is_caught_where_it_truncates() {
        // Source: C11 6.5.5p6: 1/3 is 0, so 1/3*2.0f is 0 although 2.0f is a float.
        let f =
            found("#define K (1/3*2.0f)\nstatic float y;\nvoid f(float u) { y += K * (u - y); }\n");
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message.starts_with("`K = (1/3*2.0f)` is 0 in C"),
            "{}",
            f[0].message
        );
        assert!(f[0].message.contains("0.667 was meant"), "{}", f[0].message);
    }

    #[test]
    fn the_origin_is_named_not_its_consequences() {
        // Source: C11 6.5.5p6: 1500/400 is 3; 1.0f/3 then makes alpha 1/3, not 1/3.75.
        let f = found(
            "#define RATE 1500\n#define TAU (RATE / 400)\n#define ALPHA (1.0f / TAU)\n\
             static float y;\nvoid f(float u) { y += ALPHA * (u - y); }\n",
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message.starts_with("`TAU = (RATE / 400)` is 3 in C"),
            "{}",
            f[0].message
        );
        assert!(f[0]
            .message
            .contains("3.75 was meant; alpha is 0.333 instead of 0.267"));
        assert_eq!(f[0].labels.len(), 1, "only the origin is labelled");
        assert_eq!(f[0].labels[0].line, 2);
    }

    #[test]
    fn a_local_constant_of_the_function_is_caught_at_its_declaration() {
        // Source: C11 6.5.5p6; the local is read through the function's locals.
        let f = found(
            "static float q;\nvoid f(float u)\n{\n    const float a = 1 / 8;\n    q += a * (u - q);\n}\n",
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message.starts_with("`a = 1 / 8` is 0 in C"),
            "{}",
            f[0].message
        );
        assert_eq!(f[0].labels[0].line, 4);
    }

    #[test]
    fn a_division_in_the_update_itself_is_caught() {
        // Source: C11 6.5.5p6; the update then runs with a zero coefficient.
        let f = found("static float y;\nvoid f(float u) { y += (1/8) * (u - y); }\n");
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message.contains("`1 / 8` is 0 in C"),
            "{}",
            f[0].message
        );
        assert!(
            f[0].message.ends_with("the filter never moves"),
            "{}",
            f[0].message
        );
    }

    #[test]
    fn float_divisions_integer_smoothers_and_small_roundings_pass() {
        for src in [
            "static const float a = 1.0f / 8;\nstatic float y;\nvoid f(float u) { y += a * (u - y); }\n",
            "#define N (1600 / 100)\nstatic int y;\nvoid f(int u) { y += (u - y) / N; }\n",
            // 1000/3 is 333 for 333.3: 0.1 % off, within what a designer rounds.
            "#define TAU (1000 / 3)\nstatic float y;\nvoid f(float u) { y += (1.0f / TAU) * (u - y); }\n",
            // A declared int truncates in real arithmetic too: nothing was meant otherwise.
            "static const int n = 15 / 2;\nstatic float y;\nvoid f(float u) { y += (u - y) / n; }\n",
        ] {
            assert!(found(src).is_empty(), "{src}: {:?}", found(src));
        }
    }
}

//! Entry points for the fuzz targets under `fuzz/` and for `tests/fuzz_corpus.rs`, which
//! replays what the fuzzers kept. Each takes arbitrary bytes, drives one part of tauscan
//! the way a user's files would, and returns normally whatever the bytes are: a panic, a
//! stack overflow or a hang here is a bug.
//!
//! Each runs its work on a thread with the scan's deep stack, so that the fuzzers and the
//! replay see the same limits as the command line.

use crate::check;
use crate::eval::{num::Target, Evaluator, Scope};
use crate::index::{Program, ProgramOptions};
use crate::ir::{FileId, Span};
use crate::report;
use crate::scan::{self, ScanOptions};
use crate::spec;

/// Separates the definitions from the expression in an evaluator input.
pub const EXPRESSION_MARK: &str = "\n@@\n";

/// The C constant evaluator: the bytes are C definitions, then `EXPRESSION_MARK`, then
/// one expression (with no mark, all of it is the expression). The expression, every
/// macro and every global of the definitions are evaluated, with C's and with real
/// arithmetic, for a 32-bit and a 16-bit `int`.
pub fn evaluator(data: &[u8]) {
    on_scan_stack(|| evaluate_all(data));
}

fn evaluate_all(data: &[u8]) {
    let text = String::from_utf8_lossy(data);
    let (definitions, expression) = match text.split_once(EXPRESSION_MARK) {
        Some((d, e)) => (d, e),
        None => ("", text.as_ref()),
    };
    let parsed = crate::parse::parse_file(FileId(0), definitions.as_bytes());
    let mut names: Vec<String> = parsed.macros.iter().map(|m| m.name.to_string()).collect();
    names.extend(parsed.globals.iter().map(|g| g.decl.name.clone()));
    let mut exprs = Vec::new();
    if let Some(e) = crate::parse::parse_expression(expression, Span::default()) {
        exprs.push(e);
    }
    exprs.extend(
        names
            .iter()
            .filter_map(|n| crate::parse::parse_expression(n, Span::default())),
    );
    for int_bits in [32, 16] {
        let options = ProgramOptions {
            target: Target {
                int_bits,
                has_fpu: true,
            },
            ..ProgramOptions::default()
        };
        let program = Program::build(vec![parsed.clone()], vec!["fuzz.c".into()], options);
        for e in &exprs {
            for real in [false, true] {
                let mut ev = Evaluator::new(&program);
                ev.real_arithmetic = real;
                let _ = ev.eval(e, &Scope::default());
                let _ = ev.place_type(e);
            }
        }
    }
}

/// The recogniser and everything after it: the bytes are one C file, scanned as the
/// command line scans a tree, held against an empty spec (every rule at its default),
/// and rendered in every text format.
pub fn recogniser(data: &[u8]) {
    on_scan_stack(|| recognise_and_render(data));
}

fn recognise_and_render(data: &[u8]) {
    let sources = vec![("fuzz.c".to_string(), data.to_vec())];
    let mut scan = scan::run_sources(&sources, &ScanOptions::default());
    let spec = spec::Spec::default();
    let result = check::run(&mut scan, &spec);
    let _ = report::table::render(&scan);
    let _ = report::json::render_with_findings(&scan, "fuzz", &result.findings, None);
    let _ = report::markdown::render(&scan, &result);
    let _ = report::sarif::render(&scan, &result, &spec, None);
    let read = |_: FileId| Some(data.to_vec());
    let sources = report::diagnostics::Sources {
        read: &read,
        spec: None,
    };
    let _ = report::diagnostics::render(&scan, &result, &sources, false);
}

/// The spec loader: the bytes are a `tauscan.yaml`, read and checked as `check` does.
pub fn spec_loader(data: &[u8]) {
    on_scan_stack(|| {
        let text = String::from_utf8_lossy(data);
        if let Ok(spec) = spec::from_str(&text) {
            let known: Vec<&str> = crate::rules::REGISTRY.iter().map(|r| r.id).collect();
            let _ = spec::check_rule_ids(&spec, &text, &known);
        }
    });
}

/// Runs `work` on a thread with the scan's worker stack; a panic in it is resumed here,
/// so that the fuzzer and the replay see it.
fn on_scan_stack(work: impl FnOnce() + Send) {
    std::thread::scope(|s| {
        let handle = std::thread::Builder::new()
            .stack_size(scan::WORKER_STACK)
            .spawn_scoped(s, work);
        match handle {
            Ok(h) => {
                if let Err(panic) = h.join() {
                    std::panic::resume_unwind(panic);
                }
            }
            Err(_) => panic!("no thread for the fuzz input"),
        }
    });
}

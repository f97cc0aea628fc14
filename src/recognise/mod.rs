//! Finds the smoothers: every self-referencing update of the program, read as algebra in
//! its state, kept when its weights make a low-pass.
//!
//! The pipeline, in one direction:
//!
//! 1. `walk` reads each function body in order into a shared value graph (`values`), with
//!    the locals and the memory written so far in `locals`, macros expanded from templates
//!    (`macros`), helpers put in; every write whose value reads the place written is a
//!    candidate.
//! 2. `judge` reads each candidate in affine form (`affine`, `poly`), evaluates its atoms
//!    (`eval`), and asks the forms (`forms/`) what it is; integer forms are run (`sim`) for
//!    their dead band.
//! 3. An update whose state is reached through a parameter, and whose input or coefficient
//!    the call supplies, is a filter function: `instances` puts it in at each of its calls
//!    (one level: the nearest call), with that call's arguments, and drops the calls where
//!    a guard of the update is known false.
//! 4. Macro definitions that hold a smoother and that no walk expanded are listed as
//!    definitions with no instance.
//! 5. The results are put in one order and linked into cascades.
//!
//! Every walk is budgeted (work per function and per file, nodes per graph); what a budget
//! cuts is noted with the file and line, and the scan goes on.

pub mod affine;
pub mod design;
pub mod forms;
pub mod instances;
pub mod judge;
pub mod locals;
pub mod macros;
pub mod poly;
pub mod sim;
pub mod values;
pub mod walk;

use crate::context::RateInfo;
use crate::eval::ChainStep;
use crate::index::{FuncRef, Program};
use crate::ir::*;
use std::collections::BTreeSet;

/// How the smoother is built.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Form {
    /// A first-order recursive smoother (EMA) with the state in output units.
    Ema,
    /// An EMA whose state holds the output times a factor (`acc += u - (acc >> k)`).
    ScaledState,
    /// A running-sum moving average over a ring buffer.
    MovingAverage,
}

impl Form {
    pub fn name(self) -> &'static str {
        match self {
            Form::Ema => "ema",
            Form::ScaledState => "ema-scaled-state",
            Form::MovingAverage => "moving-average",
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Arithmetic {
    Float,
    Integer,
    Fixed,
}

impl Arithmetic {
    pub fn name(self) -> &'static str {
        match self {
            Arithmetic::Float => "float",
            Arithmetic::Integer => "integer",
            Arithmetic::Fixed => "fixed",
        }
    }
}

/// Where the state lives, which decides whether it survives between calls.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Storage {
    StaticLocal,
    Global,
    Field,
    ArrayElement,
    Pointer,
    /// A local carried from one iteration of a loop to the next (a block filter over a
    /// buffer, a task loop that never returns).
    LoopLocal,
    /// A plain local variable: it starts afresh on every call.
    Local,
}

impl Storage {
    pub fn name(self) -> &'static str {
        match self {
            Storage::StaticLocal => "static-local",
            Storage::Global => "global",
            Storage::Field => "field",
            Storage::ArrayElement => "array-element",
            Storage::Pointer => "pointer",
            Storage::LoopLocal => "loop-local",
            Storage::Local => "local",
        }
    }
}

/// The smoothing coefficient as far as it can be known statically.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum Coefficient {
    Known(f64),
    /// Computed from a quantity measured at run time (a `dt`): the filter adapts.
    Adaptive {
        formula: String,
        depends_on: String,
    },
    Unknown {
        formula: String,
        reason: String,
    },
}

impl Coefficient {
    pub fn value(&self) -> Option<f64> {
        match self {
            Coefficient::Known(v) => Some(*v),
            _ => None,
        }
    }
}

/// The coefficient under another preprocessor branch.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Variant {
    pub condition: String,
    pub macro_name: String,
    pub alpha: Option<f64>,
    pub window: Option<u32>,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Smoother {
    /// The function the update (or the call of the filter function or macro) is in; empty
    /// for a macro definition that no code expands.
    pub function: String,
    pub function_ref: Option<FuncRef>,
    /// The macro the update comes from, for an expansion or a macro definition.
    pub macro_name: Option<String>,
    /// The state as C text, in the instance's own terms (`g_oven.y`, not `f->y`).
    pub state: String,
    /// The update statement, or for an instance of a filter function or macro, its call.
    pub span: Span,
    /// The update inside the filter function or macro, for instances.
    pub definition: Option<Span>,
    pub form: Form,
    pub arithmetic: Arithmetic,
    pub storage: Storage,
    pub alpha: Coefficient,
    pub window: Option<u32>,
    /// Sum of the input weights over `alpha`: 1 for a correct smoother.
    pub dc_gain: Option<f64>,
    /// For a scaled state, the factor between state and output.
    pub scale: Option<f64>,
    /// The dead band over the values the input can take: its declared types', or the
    /// spec's `input.range` once `check::apply` has put it in.
    pub dead_band: Option<sim::DeadBand>,
    /// Where the input's type lets it go below zero and no range is declared: the band
    /// for inputs at or above zero, when C's rounding makes it differ from `dead_band`
    /// (division truncates toward zero, so a falling band may appear only below zero).
    pub dead_band_nonnegative: Option<sim::DeadBand>,
    pub chain: Vec<ChainStep>,
    pub rate: RateInfo,
    /// When the spec sets the rate: the rate the code's own derivation gave, if any.
    pub code_rate: Option<RateInfo>,
    /// The coefficient (or window) is the one the spec's `assume` states, because the code
    /// does not show it.
    pub assumed: bool,
    pub variants: Vec<Variant>,
    /// The update as C text, for people (locals by name).
    pub update: String,
    /// The update's new value as IR, for the rules (locals by name).
    pub update_expr: Option<Expr>,
    pub state_type: Option<CType>,
    /// The input signals as C text.
    pub inputs: Vec<String>,
    /// The update compiled to run with C semantics (state in slot 0, inputs after), when
    /// every constant in it is known.
    pub simulation: Option<sim::Update>,
    /// Index (in the result list) of the smoother whose state feeds this one.
    pub upstream: Option<usize>,
    /// The reading followed one side of a branch merge (a clamp or a seed was set aside).
    pub through_branch: bool,
    /// For the update inside a filter function: how many call sites are listed as its
    /// instances (their coefficients are the ones that run).
    pub instance_count: usize,
    /// For a coefficient computed at run time: the design law it follows and what that
    /// law fixes (a cutoff, a time constant), when one is found.
    pub design: Option<design::Design>,
}

/// Something recognition wants a reader to know: a form it saw but could not resolve, a
/// budget that cut a walk short.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Note {
    pub span: Span,
    pub message: String,
}

#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct Recognition {
    pub smoothers: Vec<Smoother>,
    pub notes: Vec<Note>,
}

/// Options that change recognition.
#[derive(Debug, Clone, Default)]
pub struct RecogniseOptions {
    /// A rate to assume for smoothers whose code gives none (`--rate`).
    pub default_rate_hz: Option<f64>,
}

/// Work one function's walk may do (statements and expressions read).
const FUNCTION_BUDGET: u64 = 400_000;
/// Work all the walks of one file may do together: about a second on a slow machine.
const FILE_BUDGET: u64 = 2_000_000;

/// What the first pass found in one file.
#[derive(Default)]
struct FilePart {
    smoothers: Vec<Smoother>,
    notes: Vec<Note>,
    summaries: Vec<(FuncRef, walk::FunctionUpdates)>,
    used_macros: Vec<crate::index::MacroRef>,
}

/// Finds every smoother of the program.
pub fn recognise(program: &Program, options: &RecogniseOptions) -> Recognition {
    recognise_counting(program, options, None)
}

/// `recognise`, counting files done and smoothers found in `progress` as it goes.
pub fn recognise_counting(
    program: &Program,
    options: &RecogniseOptions,
    progress: Option<&crate::scan::Progress>,
) -> Recognition {
    use rayon::prelude::*;
    let helpers = walk::Helpers::default();
    let started = std::time::Instant::now();
    // Pass 1, one file per worker (so each file's budget is spent in a fixed order): every
    // function's own updates, and the updates filter functions hand to their callers.
    let parts: Vec<FilePart> = (0..program.files.len())
        .into_par_iter()
        .map(|fi| {
            let part = first_pass(program, fi, &helpers, options);
            if let Some(p) = progress {
                crate::scan::Progress::add(&p.files_recognised, 1);
                crate::scan::Progress::add(&p.smoothers, part.smoothers.len());
            }
            part
        })
        .collect();
    let mut result = Recognition::default();
    let mut summaries = walk::Summaries::default();
    let mut used: BTreeSet<crate::index::MacroRef> = BTreeSet::new();
    // The smoothers are joined once all passes are done, into a list of their exact
    // number (a smoother is a kilobyte; a list grown by doubling holds up to twice that).
    let mut found: Vec<Vec<Smoother>> = Vec::new();
    for part in parts {
        found.push(part.smoothers);
        result.notes.extend(part.notes);
        used.extend(part.used_macros);
        for (f, s) in part.summaries {
            summaries.updates.insert(f, std::sync::Arc::new(s));
        }
    }
    crate::scan::phase("  pass 1", started);
    let started = std::time::Instant::now();
    // Pass 2: the callers of filter functions, with the updates put in at each call.
    let callers = instances::callers(program, &summaries);
    let second: Vec<(Vec<Smoother>, Vec<Note>, Vec<crate::index::MacroRef>)> = callers
        .par_iter()
        .map(|&f| instances::instances_in(program, f, &helpers, &summaries, options))
        .collect();
    for (s, n, u) in second {
        found.push(s);
        result.notes.extend(n);
        used.extend(u);
    }
    crate::scan::phase("  pass 2", started);
    let started = std::time::Instant::now();
    // Macro definitions that hold a smoother and that nothing expanded.
    let unexpanded: Vec<_> = program
        .all_macros()
        .filter(|(r, m)| {
            !used.contains(r)
                && macros::may_assign(&m.body)
                && program.condition_possible(&m.condition)
        })
        .map(|(r, _)| r)
        .collect();
    let defs: Vec<Vec<Smoother>> = unexpanded
        .par_iter()
        .map(|&r| macro_definition(program, r, options))
        .collect();
    found.extend(defs);
    result
        .smoothers
        .reserve_exact(found.iter().map(Vec::len).sum());
    for s in found {
        result.smoothers.extend(s);
    }
    crate::scan::phase("  macro defs", started);
    let started = std::time::Instant::now();
    finish(program, &mut result);
    crate::scan::phase("  finish", started);
    result
}

fn first_pass(
    program: &Program,
    fi: usize,
    helpers: &walk::Helpers,
    options: &RecogniseOptions,
) -> FilePart {
    let mut part = FilePart::default();
    let file = &program.files[fi];
    let mut spent: u64 = 0;
    let mut skipped = 0usize;
    let mut first_skipped: Option<Span> = None;
    for (index, function) in file.functions.iter().enumerate() {
        if function.name == "tauscan_snippet" || !program.condition_possible(&function.condition) {
            continue;
        }
        if spent >= FILE_BUDGET {
            skipped += 1;
            first_skipped.get_or_insert(function.name_span);
            continue;
        }
        let f = FuncRef { file: fi, index };
        let setup = walk::Setup {
            program,
            function: Some(f),
            file: fi,
            helpers: Some(helpers),
            summaries: None,
            budget: FUNCTION_BUDGET.min(FILE_BUDGET - spent),
        };
        let w = walk::walk_function(&setup);
        spent += w.work;
        part.used_macros.extend(w.used_macros.iter().copied());
        for (span, message) in &w.notes {
            part.notes.push(Note {
                span: *span,
                message: format!("{}(): {message}", function.name),
            });
        }
        let (live, cut) = instances::live_candidates_noted(&w);
        for span in cut {
            part.notes.push(Note {
                span,
                message: format!(
                    "{}(): a chain of updates of one place too long to read as one was cut here; smoothers in it may be missed",
                    function.name
                ),
            });
        }
        let mut keep_for_callers = Vec::new();
        for i in live {
            // A filter function's update is listed where it is written (its coefficient
            // as far as the function alone says) and again at each call.
            if let Some(hand) = instances::hands_to_callers(program, f, &w, i) {
                keep_for_callers.push((i, hand));
            }
            if let Some(s) = judge::judge(program, &w, i, options) {
                part.smoothers.push(s);
            }
        }
        if let Some(s) = walk::summarise(&w, &keep_for_callers) {
            part.summaries.push((f, s));
        }
    }
    if skipped > 0 {
        part.notes.push(Note {
            span: first_skipped.unwrap_or_default(),
            message: format!(
                "the recogniser's work budget for this file was reached; {skipped} function(s) from here on were not read for smoothers"
            ),
        });
    }
    part
}

/// What the recogniser makes of every candidate update in the files whose path ends with
/// `only` (all files when empty): one line each, for `tauscan debug candidates`.
pub fn explain(program: &Program, options: &RecogniseOptions, only: &str) -> Vec<String> {
    let helpers = walk::Helpers::default();
    let mut lines = Vec::new();
    for (fi, file) in program.files.iter().enumerate() {
        if !program.paths[fi].ends_with(only) {
            continue;
        }
        for (index, function) in file.functions.iter().enumerate() {
            if !program.condition_possible(&function.condition) {
                continue;
            }
            let f = FuncRef { file: fi, index };
            let setup = walk::Setup {
                program,
                function: Some(f),
                file: fi,
                helpers: Some(&helpers),
                summaries: None,
                budget: FUNCTION_BUDGET,
            };
            let w = walk::walk_function(&setup);
            let live = instances::live_candidates(&w);
            for (i, c) in w.candidates.iter().enumerate() {
                let verdict = if c.overwritten {
                    "replaced on the same path before anything reads it".to_string()
                } else if !live.contains(&i) {
                    let by: Vec<u32> = w
                        .candidates
                        .iter()
                        .filter(|later| later.supersedes.contains(&i))
                        .map(|later| later.span.line)
                        .collect();
                    format!("continued by a later update of the same state (lines {by:?})")
                } else {
                    let handed = if instances::hands_to_callers(program, f, &w, i).is_some() {
                        " (and put in at the calls of this function)"
                    } else {
                        ""
                    };
                    let judged = match judge::judge_explained(program, &w, i, options) {
                        Ok(s) => format!(
                            "{} alpha {} dc {} inputs {:?}",
                            s.form.name(),
                            s.alpha
                                .value()
                                .map(|a| format!("{a}"))
                                .unwrap_or_else(|| "unknown".into()),
                            s.dc_gain
                                .map(|d| format!("{d}"))
                                .unwrap_or_else(|| "?".into()),
                            s.inputs
                        ),
                        Err(why) => format!("not a smoother: {why}"),
                    };
                    format!("{judged}{handed}")
                };
                lines.push(format!(
                    "{}:{} {}() {:?} {} = {}: {verdict}",
                    program.paths[fi],
                    c.span.line,
                    function.name,
                    c.kind,
                    w.graph.display(c.state, 80),
                    w.graph.display(c.value, 160),
                ));
            }
            for (span, note) in &w.notes {
                lines.push(format!("{}:{} note: {note}", program.paths[fi], span.line));
            }
        }
    }
    // The instances the file's functions make of filter functions elsewhere.
    let mut summaries = walk::Summaries::default();
    for fi in 0..program.files.len() {
        for (f, s) in first_pass(program, fi, &helpers, options).summaries {
            summaries.updates.insert(f, std::sync::Arc::new(s));
        }
    }
    for f in instances::callers(program, &summaries) {
        if !program.paths[f.file].ends_with(only) {
            continue;
        }
        let setup = walk::Setup {
            program,
            function: Some(f),
            file: f.file,
            helpers: Some(&helpers),
            summaries: Some(&summaries),
            budget: FUNCTION_BUDGET,
        };
        let w = walk::walk_function(&setup);
        for (i, c) in w.candidates.iter().enumerate() {
            let Some(inst) = &c.instance else { continue };
            let guards: Vec<String> = c.guards.iter().map(|g| w.graph.display(*g, 80)).collect();
            let verdict = if !instances::guards_may_hold(program, &w, i) {
                "a guard is false here".to_string()
            } else {
                match judge::judge_explained(program, &w, i, options) {
                    Ok(s) => format!("{} alpha {:?}", s.form.name(), s.alpha.value()),
                    Err(why) => format!("not a smoother: {why}"),
                }
            };
            lines.push(format!(
                "{}:{} {}() instance of {}(): {} guards {:?}: {verdict}",
                program.paths[f.file],
                c.span.line,
                program.function(f).name,
                program.function(inst.callee).name,
                w.graph.display(c.state, 80),
                guards
            ));
        }
    }
    lines
}

/// A macro definition read on its own: its smoothers, with no function.
fn macro_definition(
    program: &Program,
    r: crate::index::MacroRef,
    options: &RecogniseOptions,
) -> Vec<Smoother> {
    let Some(w) = walk::walk_macro(program, r) else {
        return Vec::new();
    };
    let def = program.macro_def(r);
    instances::live_candidates(&w)
        .into_iter()
        .filter_map(|i| judge::judge(program, &w, i, options))
        .map(|mut s| {
            s.macro_name = Some(def.name.to_string());
            s.span = def.span;
            s.definition = None;
            s
        })
        .collect()
}

/// One order, no repeats, and the cascades linked.
fn finish(program: &Program, result: &mut Recognition) {
    type Place = (String, u32, u32, String, Option<(u32, u32)>);
    let mut seen: BTreeSet<Place> = BTreeSet::new();
    result.smoothers.retain(|s| {
        let key = (
            program.path(s.span.file).to_string(),
            s.span.line,
            s.span.column,
            s.state.clone(),
            s.definition.map(|d| (d.file.0, d.line)),
        );
        seen.insert(key)
    });
    result.smoothers.sort_by(|a, b| {
        (
            program.path(a.span.file),
            a.span.line,
            a.span.column,
            &a.state,
            a.definition.map(|d| (program.path(d.file), d.line)),
        )
            .cmp(&(
                program.path(b.span.file),
                b.span.line,
                b.span.column,
                &b.state,
                b.definition.map(|d| (program.path(d.file), d.line)),
            ))
    });
    result.notes.sort_by(|a, b| {
        (program.path(a.span.file), a.span.line, &a.message).cmp(&(
            program.path(b.span.file),
            b.span.line,
            &b.message,
        ))
    });
    result.notes.dedup();
    // How many instances name each definition's place.
    let mut definitions: std::collections::HashMap<(FileId, u32), usize> =
        std::collections::HashMap::new();
    for s in &result.smoothers {
        if let Some(d) = s.definition {
            *definitions.entry((d.file, d.line)).or_default() += 1;
        }
    }
    for s in &mut result.smoothers {
        if s.definition.is_none() {
            let here = (s.span.file, s.span.line);
            s.instance_count = definitions.get(&here).copied().unwrap_or(0);
        }
    }
    link_cascades(&mut result.smoothers);
}

/// Marks a smoother whose only input is another smoother's state as its downstream stage.
fn link_cascades(smoothers: &mut [Smoother]) {
    // Each state's smoothers, in list order (the first that fits is the upstream).
    let mut by_state: std::collections::HashMap<String, Vec<(usize, Option<FuncRef>, Storage)>> =
        std::collections::HashMap::new();
    for (i, s) in smoothers.iter().enumerate() {
        by_state
            .entry(s.state.clone())
            .or_default()
            .push((i, s.function_ref, s.storage));
    }
    for s in smoothers.iter_mut() {
        s.upstream = None;
        if s.inputs.len() != 1 || s.inputs[0] == s.state {
            continue;
        }
        s.upstream = by_state.get(&s.inputs[0]).and_then(|candidates| {
            candidates
                .iter()
                .find(|(_, f, storage)| *f == s.function_ref || !matches!(storage, Storage::Local))
                .map(|(i, _, _)| *i)
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::index::ProgramOptions;
    use crate::parse::parse_file;

    fn find(src: &str) -> Vec<Smoother> {
        let ir = parse_file(FileId(0), src.as_bytes());
        let program = Program::build(vec![ir], vec!["a.c".into()], ProgramOptions::default());
        recognise(&program, &RecogniseOptions::default()).smoothers
    }

    #[test]
    fn a_cascade_links_to_the_first_stage_of_that_state_it_can_see() {
        // `stage` is a plain local of `prime` (another function's, which `shade` cannot
        // read) and a global updated in `vent`: `shade`'s input is the global one.
        let found = find(
            "float stage, out;\n\
             void prime(float u) { float stage = 0.0f; stage += 0.5f * (u - stage); }\n\
             void vent(float u) { stage += 0.25f * (u - stage); }\n\
             void shade(void) { out += 0.1f * (stage - out); }\n",
        );
        let index = |function: &str| {
            found
                .iter()
                .position(|s| s.function == function)
                .unwrap_or_else(|| panic!("no smoother in {function}: {found:?}"))
        };
        assert_eq!(found[index("prime")].storage, Storage::Local);
        assert_eq!(found[index("shade")].upstream, Some(index("vent")));
        assert_eq!(found[index("vent")].upstream, None);
    }

    #[test]
    fn float_ema_spellings_give_the_same_alpha() {
        for body in [
            "y += 0.25f * (u - y);",
            "y -= 0.25f * (y - u);",
            "y = 0.25f * u + (1.0f - 0.25f) * y;",
            "y = (1.0f - 0.25f) * y + u * 0.25f;",
            "y = y + 0.25f*u - 0.25f*y;",
        ] {
            let src = format!("static float y;\nvoid f(float u) {{ {body} }}\n");
            let found = find(&src);
            assert_eq!(found.len(), 1, "{body}");
            assert_eq!(found[0].alpha, Coefficient::Known(0.25), "{body}");
            assert_eq!(found[0].dc_gain, Some(1.0), "{body}");
        }
    }

    #[test]
    fn a_composite_input_is_named_without_its_coefficient() {
        for (body, input) in [
            ("y = 0.95f*y + 0.05f*(a - b);", "a - b"),
            ("y = 0.95f*y + 0.05f*K*(a - b);", "K * a - K * b"),
        ] {
            let src =
                format!("#define K 0.5f\nstatic float y;\nvoid f(float a, float b) {{ {body} }}\n");
            let found = find(&src);
            assert_eq!(found.len(), 1, "{body}");
            assert_eq!(found[0].inputs, vec![input.to_string()], "{body}");
        }
    }

    #[test]
    fn a_helper_that_jumps_is_not_put_in() {
        // `goto out` skips `k = 0.05f`: coef(1) returns 0.1f, which a helper read as
        // straight-line code would get wrong.
        let src = "static float y;\nstatic float coef(int fast) { float k = 0.1f; if (fast) goto out; k = 0.05f; out: return k; }\nvoid f(float u) { y += coef(1) * (u - y); }\n";
        let found = find(src);
        assert!(
            found.iter().all(|s| s.alpha != Coefficient::Known(0.05)),
            "{:?}",
            found.iter().map(|s| &s.alpha).collect::<Vec<_>>()
        );
    }

    #[test]
    fn named_coefficient_is_resolved_with_its_chain() {
        let src = "#define K 0.125f\nstatic float y;\nvoid f(float u) { y += K * (u - y); }\n";
        let found = find(src);
        assert_eq!(found[0].alpha, Coefficient::Known(0.125));
        assert_eq!(found[0].chain[0].text, "#define K 0.125f");
    }

    #[test]
    fn weights_that_miss_one_are_kept_with_their_gain() {
        for (body, gain) in [("y = 0.9f*y + 0.2f*u;", 2.0), ("y = 0.9f*y + 0.3f*u;", 3.0)] {
            let found = find(&format!("static float y;\nvoid f(float u) {{ {body} }}\n"));
            assert_eq!(found.len(), 1, "{body}");
            let g = found[0].dc_gain.unwrap();
            assert!((g - gain).abs() < 1e-5, "{body}: {g}");
        }
    }

    #[test]
    fn look_alikes_are_not_smoothers() {
        for body in [
            "i += e * 0.1f;",
            "n += 1;",
            "y = 2*y + e;",
            "y *= 0.99f;",
            "y = fmaxf(y * 0.99f, e);",
            "y = y + (e - i);",
        ] {
            let src = format!("static float y, i, n;\nvoid f(float e) {{ {body} }}\n");
            assert!(find(&src).is_empty(), "{body} was reported");
        }
    }

    #[test]
    fn out_of_range_coefficients_are_listed() {
        // Weights written to sum to alpha, with alpha outside (0, 1]: listed, for the
        // coefficient-out-of-range rule to report.
        for (body, alpha) in [
            ("y += 1.5f*(u - y);", 1.5),
            ("y = 1.1f*y - 0.1f*u;", -0.1),
            ("y += (u - y) / 0.4f;", 2.5),
        ] {
            let found = find(&format!("static float y;\nvoid f(float u) {{ {body} }}\n"));
            assert_eq!(found.len(), 1, "{body}");
            let a = found[0].alpha.value().unwrap();
            assert!((a - alpha).abs() < 1e-6, "{body}: {a}");
        }
    }

    #[test]
    fn shifts_by_counts_c_does_not_fix_are_listed_with_no_alpha() {
        // A count that changes at run time, or one past the promoted operand's width
        // (C11 6.5.7p3: undefined), leaves the smoother listed but its alpha unknown.
        for (state_type, body) in [
            ("int", "y += (u - y) >> k;"),
            ("int", "y += (u - y) >> 32;"),
            ("int", "y += (u - y) >> -1;"),
            ("int", "y += (u - y) / 0;"),
        ] {
            let src = format!("static {state_type} y; extern int k;\nvoid f(int u) {{ {body} }}\n");
            let found = find(&src);
            assert_eq!(found.len(), 1, "{body} was not listed");
            assert!(
                !matches!(found[0].alpha, Coefficient::Known(_)),
                "{body}: alpha {:?}",
                found[0].alpha
            );
        }
        // The same count is defined for a `long long` state (at least 64 bits, C11
        // 5.2.4.2.1; 64 in this project's model), and a 31-bit shift of an int is too.
        for (state_type, body, alpha) in [
            ("long long", "y += (u - y) >> 32;", 2f64.powi(-32)),
            ("int", "y += (u - y) >> 31;", 2f64.powi(-31)),
        ] {
            let src = format!("static {state_type} y;\nvoid f(int u) {{ {body} }}\n");
            let found = find(&src);
            assert_eq!(found.len(), 1, "{body} was not listed");
            assert_eq!(found[0].alpha, Coefficient::Known(alpha), "{body}");
        }
    }
}

//! The rate at which a smoother's update runs, and where that knowledge comes from.
//!
//! For now the rate comes from the coefficient's own derivation (a step `dt` or a rate in
//! Hz among the definitions the coefficient was computed from) or from a default the user
//! gives. Names are read the way firmware engineers write them (`DT`, `LOOP_HZ`,
//! `TICK_MS`, `SAMPLE_RATE`); cutoff and time-constant names are excluded, since they are
//! the filter's own parameters, not the rate it runs at. Propagation from entry functions
//! down the call graph arrives with the spec.

use crate::eval::ChainStep;
use crate::ir::Span;
use crate::recognise::Coefficient;

#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum RateKind {
    /// A constant of the program (in the coefficient's derivation).
    Constant,
    /// Given by the user (command line, later the spec).
    Spec,
    /// The coefficient follows a time step measured at run time.
    Adaptive,
    /// The update runs per event (packet, edge): no rate in Hz.
    Event,
    Unknown,
}

impl RateKind {
    pub fn name(self) -> &'static str {
        match self {
            RateKind::Constant => "constant",
            RateKind::Spec => "spec",
            RateKind::Adaptive => "adaptive",
            RateKind::Event => "event",
            RateKind::Unknown => "unknown",
        }
    }
}

/// One step of the way a rate reaches an update: the entry function (at its definition),
/// then each call (at the call) down to the function that holds the update.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct RateStep {
    pub function: String,
    pub file: crate::ir::FileId,
    pub line: u32,
    /// The call is through a function pointer.
    pub indirect: bool,
}

/// A rate's way in words: "pwm_isr -> coolant_sample, tasks.c:22" (the entry, each
/// function called, and the place of the last call, or of the entry when the update is in
/// it). A call through a pointer is marked `~>`.
pub fn path_text(program: &crate::index::Program, path: &[RateStep]) -> String {
    let mut text = String::new();
    for (i, step) in path.iter().enumerate() {
        if i > 0 {
            text.push_str(if step.indirect { " ~> " } else { " -> " });
        }
        text.push_str(&step.function);
    }
    if let Some(last) = path.last() {
        text.push_str(&format!(", {}:{}", program.path(last.file), last.line));
    }
    text
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct RateInfo {
    pub hz: Option<f64>,
    pub kind: RateKind,
    /// Where the rate comes from, in words (`DT = 0.002 at control.c:12`).
    pub source: Option<String>,
    pub span: Option<Span>,
    /// Other rates found in the same derivation that disagree with the first.
    pub conflicts: Vec<(f64, String)>,
    /// For a rate carried from an entry function: the way it came.
    pub path: Vec<RateStep>,
    /// What may make the rate another one (a caller no rate reaches, an unresolved call
    /// through a pointer), in words.
    pub doubts: Vec<String>,
}

impl RateInfo {
    pub fn unknown() -> RateInfo {
        RateInfo {
            hz: None,
            kind: RateKind::Unknown,
            source: None,
            span: None,
            conflicts: Vec::new(),
            path: Vec::new(),
            doubts: Vec::new(),
        }
    }
}

fn words(name: &str) -> Vec<String> {
    // Split on underscores and lower-to-upper case changes: `loopPeriodMs` -> loop period ms.
    let mut out = Vec::new();
    let mut current = String::new();
    let mut previous_lower = false;
    for c in name.chars() {
        if c == '_' || !c.is_ascii_alphanumeric() {
            if !current.is_empty() {
                out.push(std::mem::take(&mut current));
            }
            previous_lower = false;
            continue;
        }
        if c.is_ascii_uppercase() && previous_lower && !current.is_empty() {
            out.push(std::mem::take(&mut current));
        }
        previous_lower = c.is_ascii_lowercase() || c.is_ascii_digit();
        current.push(c.to_ascii_lowercase());
    }
    if !current.is_empty() {
        out.push(current);
    }
    // `dT`, `dTs`: short names whose capital is not a new word; the name's pieces between
    // underscores count too.
    for piece in name.split('_') {
        let lower = piece.to_ascii_lowercase();
        if !lower.is_empty() && !out.contains(&lower) {
            out.push(lower);
        }
    }
    out
}

const FILTER_OWN: &[&str] = &[
    "fc",
    "cut",
    "cutoff",
    "corner",
    "bw",
    "bandwidth",
    "tau",
    "rc",
    "tc",
    "pole",
    "fcut",
    "f3db",
    "alpha",
    "gain",
    "lpf",
    "knee",
];

/// Words that make a name a count, a size or a factor, never a time or a rate
/// (`LORA_DELTA_SHIFT`, `STEP_BITS`, `TICK_DIV`).
const NOT_A_TIME: &[&str] = &[
    "shift", "shr", "shl", "bits", "bit", "count", "cnt", "len", "size", "scale", "ratio",
    "weight", "coef", "coeff", "div", "divider", "mult", "mul", "mask",
];

/// Whether a name reads as the time step between updates (`dt`, `DT_S`, `TICK_MS`).
pub fn is_time_step_name(name: &str) -> bool {
    time_step_scale(name).is_some()
}

/// For a time-step name (`dt_us`, `loopPeriodMs`), the factor from its unit to seconds.
pub fn time_step_unit(name: &str) -> Option<f64> {
    time_step_scale(name)
}

/// For a rate name (`samp_rate`, `fs_khz`), the factor from its unit to Hz.
pub fn rate_unit(name: &str) -> Option<f64> {
    rate_scale(name)
}

/// For a time-step name, the factor from its unit to seconds.
fn time_step_scale(name: &str) -> Option<f64> {
    let w = words(name);
    if w.iter()
        .any(|x| FILTER_OWN.contains(&x.as_str()) || NOT_A_TIME.contains(&x.as_str()))
    {
        return None;
    }
    let step = w.iter().any(|x| {
        matches!(
            x.as_str(),
            "dt" | "ts"
                | "period"
                | "interval"
                | "tick"
                | "tsample"
                | "step"
                | "delta"
                | "looptime"
                | "delt"
        )
    }) || (w.iter().any(|x| x == "sample") && w.iter().any(|x| x == "time"));
    if !step {
        return None;
    }
    let unit = if w.iter().any(|x| x == "ms" || x == "msec") {
        1e-3
    } else if w.iter().any(|x| x == "us" || x == "usec") {
        1e-6
    } else {
        1.0
    };
    Some(unit)
}

/// For a rate name, the factor from its unit to Hz.
fn rate_scale(name: &str) -> Option<f64> {
    let w = words(name);
    if w.iter()
        .any(|x| FILTER_OWN.contains(&x.as_str()) || NOT_A_TIME.contains(&x.as_str()))
    {
        return None;
    }
    let khz = w.iter().any(|x| x == "khz");
    let rate = khz
        || w.iter().any(|x| {
            matches!(
                x.as_str(),
                "fs" | "hz" | "rate" | "sps" | "samplerate" | "freq"
            )
        });
    if !rate {
        return None;
    }
    // A plain "freq" is too often a signal's frequency; want a word saying it is the loop's.
    let plain_freq =
        w.iter().any(|x| x == "freq") && !w.iter().any(|x| x == "hz" || x == "fs" || x == "rate");
    if plain_freq
        && !w.iter().any(|x| {
            matches!(
                x.as_str(),
                "sample" | "sampling" | "loop" | "control" | "update" | "isr" | "task"
            )
        })
    {
        return None;
    }
    Some(if khz { 1e3 } else { 1.0 })
}

/// The rate a name and its value imply, if the name reads as a rate or a time step.
pub fn rate_from_name(name: &str, value: f64) -> Option<f64> {
    if !(value.is_finite() && value > 0.0) {
        return None;
    }
    if let Some(unit) = time_step_scale(name) {
        return Some(1.0 / (value * unit));
    }
    rate_scale(name).map(|unit| value * unit)
}

/// The rate of a smoother from its coefficient's derivation, else the default.
pub fn rate_of(chain: &[ChainStep], alpha: &Coefficient, default_hz: Option<f64>) -> RateInfo {
    if let Coefficient::Adaptive { depends_on, .. } = alpha {
        return RateInfo {
            hz: None,
            kind: RateKind::Adaptive,
            source: Some(format!(
                "coefficient follows `{depends_on}` measured at run time"
            )),
            span: None,
            conflicts: Vec::new(),
            path: Vec::new(),
            doubts: Vec::new(),
        };
    }
    // Every rate the derivation mentions; a definition (`#define`, a constant) is the
    // origin and reads better than a parameter it was passed through.
    let mut rates: Vec<(f64, &ChainStep, String)> = Vec::new();
    for step in chain {
        let (Some(name), Some(value)) = (&step.name, step.value) else {
            continue;
        };
        if let Some(hz) = rate_from_name(name, value) {
            rates.push((hz, step, format!("`{}`", step.text)));
        }
    }
    let is_definition = |s: &ChainStep| {
        s.text.starts_with("#define") || s.text.contains(" = ") && !s.text.contains(':')
    };
    let found = rates.first().map(|(first_hz, _, _)| {
        let agree = |hz: f64| (hz - first_hz).abs() <= 1e-6 * first_hz.abs();
        let chosen = rates
            .iter()
            .filter(|(hz, _, _)| agree(*hz))
            .rfind(|(_, step, _)| is_definition(step))
            .or_else(|| rates.first())
            .cloned();
        let conflicts = rates
            .iter()
            .filter(|(hz, _, _)| !agree(*hz))
            .map(|(hz, _, source)| (*hz, source.clone()))
            .collect();
        let (hz, step, source) = chosen.unwrap_or_else(|| rates[0].clone());
        RateInfo {
            hz: Some(hz),
            kind: RateKind::Constant,
            source: Some(source),
            span: Some(Span {
                file: step.file,
                line: step.line,
                column: 1,
                ..Span::default()
            }),
            conflicts,
            path: Vec::new(),
            doubts: Vec::new(),
        }
    });
    if let Some(info) = found {
        return info;
    }
    match default_hz {
        Some(hz) => RateInfo {
            hz: Some(hz),
            kind: RateKind::Spec,
            source: Some("--rate on the command line".into()),
            span: None,
            conflicts: Vec::new(),
            path: Vec::new(),
            doubts: Vec::new(),
        },
        None => RateInfo::unknown(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rate_names_are_read_with_units() {
        assert_eq!(rate_from_name("LOOP_HZ", 500.0), Some(500.0));
        assert_eq!(rate_from_name("DT", 0.002), Some(500.0));
        assert_eq!(rate_from_name("TICK_MS", 10.0), Some(100.0));
        assert_eq!(rate_from_name("loopPeriodUs", 250.0), Some(4000.0));
        assert_eq!(rate_from_name("SAMPLE_RATE_KHZ", 8.0), Some(8000.0));
        assert_eq!(rate_from_name("dt", 0.001), Some(1000.0));
    }

    #[test]
    fn filter_parameters_are_not_rates() {
        assert_eq!(rate_from_name("CUTOFF_HZ", 5.0), None);
        assert_eq!(rate_from_name("FC_HZ", 5.0), None);
        assert_eq!(rate_from_name("TAU_MS", 5.0), None);
        assert_eq!(rate_from_name("signal_freq", 50.0), None);
        assert_eq!(rate_from_name("ALPHA", 0.1), None);
    }
}

/// Rates the spec declares, carried from entry functions down the call graph (direct calls
/// and the calls through function pointers `callgraph` resolves), each with its path.
pub mod propagate {
    use super::RateStep;
    use crate::callgraph::CallGraph;
    use crate::index::{FuncRef, Program};
    use crate::ir::Span;
    use crate::spec::{RateScope, Spec};
    use std::collections::{BTreeMap, BTreeSet, VecDeque};

    /// One rate that reaches a function: Hz (None for an event-driven entry), the entry it
    /// came from in words, and the calls it came through.
    #[derive(Debug, Clone, PartialEq)]
    pub struct Reach {
        pub hz: Option<f64>,
        pub source: String,
        /// Line of the spec entry.
        pub spec_line: usize,
        /// The entry function first, then each call down to the function reached.
        pub path: Vec<RateStep>,
    }

    /// A call that may bring another rate than the one a function was given.
    #[derive(Debug, Clone, PartialEq)]
    pub struct Doubt {
        /// In words: "debug_dump() calls it at cli.c:40, and no rate entry reaches
        /// debug_dump()".
        pub text: String,
        pub span: Span,
    }

    #[derive(Debug, Default)]
    pub struct Propagation {
        /// For every function reached by a spec rate, the distinct rates that reach it.
        pub reached: BTreeMap<FuncRef, Vec<Reach>>,
        /// Reached functions that are also called from a function no rate reaches.
        pub partial: BTreeMap<FuncRef, Doubt>,
        /// Functions below a function whose address is taken, where a call through a
        /// pointer that tauscan could not resolve lies in a function a rate reaches.
        pub indirect: BTreeMap<FuncRef, Doubt>,
    }

    fn step(program: &Program, f: FuncRef, span: Span, indirect: bool) -> RateStep {
        RateStep {
            function: program.function(f).name.clone(),
            file: span.file,
            line: span.line,
            indirect,
        }
    }

    pub fn rates(program: &Program, spec: &Spec) -> Propagation {
        let mut out = Propagation::default();
        let by_function = spec
            .rates
            .iter()
            .any(|r| !matches!(r.scope, RateScope::Constant { .. }));
        if !by_function {
            return out;
        }
        let graph = crate::callgraph::build(program);
        let spec_name = spec
            .path
            .as_deref()
            .and_then(|p| p.file_name())
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| crate::spec::FILE_NAME.to_string());
        let mut starts_all = BTreeSet::new();
        for rate in &spec.rates {
            let starts: Vec<FuncRef> = match &rate.scope {
                // Constants are applied per smoother (by its derivation), not by function.
                RateScope::Constant { .. } => continue,
                // Every function of that name: an entry is usually unique, and a static one
                // in several files is named for all of them.
                RateScope::Function(name) => program.functions_named(name).to_vec(),
                RateScope::Path(glob) => {
                    let Ok(matcher) = globset::Glob::new(glob).map(|g| g.compile_matcher()) else {
                        continue;
                    };
                    program
                        .functions()
                        .filter(|f| matcher.is_match(program.path(program.function(*f).span.file)))
                        .collect()
                }
            };
            starts_all.extend(starts.iter().copied());
            let what = match &rate.scope {
                RateScope::Function(name) => format!("{name}()"),
                RateScope::Path(glob) => format!("files `{glob}`"),
                RateScope::Constant { name, .. } => name.clone(),
            };
            let entry = format!("{spec_name}:{}", rate.line);
            let source = match rate.rate {
                Some(hz) => format!(
                    "{entry}: {what} runs at {}",
                    crate::report::table::hertz(hz.0)
                ),
                None => format!("{entry}: {what} runs per event"),
            };
            // Breadth first, so each function's path is a shortest one.
            let mut parent: BTreeMap<FuncRef, (FuncRef, Span, bool)> = BTreeMap::new();
            let mut queue: VecDeque<FuncRef> = starts.iter().copied().collect();
            let mut visited: BTreeSet<FuncRef> = starts.iter().copied().collect();
            while let Some(f) = queue.pop_front() {
                let list = out.reached.entry(f).or_default();
                if !list.iter().any(|r| r.hz == rate.rate.map(|h| h.0)) {
                    let mut path = Vec::new();
                    let mut at = f;
                    while let Some(&(caller, span, indirect)) = parent.get(&at) {
                        path.push(step(program, at, span, indirect));
                        at = caller;
                        if path.len() > parent.len() {
                            break;
                        }
                    }
                    path.push(step(program, at, program.function(at).name_span, false));
                    path.reverse();
                    list.push(Reach {
                        hz: rate.rate.map(|h| h.0),
                        source: source.clone(),
                        spec_line: rate.line,
                        path,
                    });
                }
                for edge in graph.callees.get(&f).map(Vec::as_slice).unwrap_or(&[]) {
                    if visited.insert(edge.callee) {
                        parent.insert(edge.callee, (f, edge.span, edge.indirect));
                        queue.push_back(edge.callee);
                    }
                }
            }
        }
        out.partial = partial(program, &graph, &out.reached, &starts_all);
        out.indirect = indirect(program, &graph, &out.reached);
        out
    }

    /// Reached functions (not entries themselves) with a caller no rate reaches, directly
    /// or through callers that are partial in turn.
    fn partial(
        program: &Program,
        graph: &CallGraph,
        reached: &BTreeMap<FuncRef, Vec<Reach>>,
        starts: &BTreeSet<FuncRef>,
    ) -> BTreeMap<FuncRef, Doubt> {
        let mut doubts: BTreeMap<FuncRef, Doubt> = BTreeMap::new();
        let mut queue: VecDeque<FuncRef> = VecDeque::new();
        for &f in reached.keys() {
            if starts.contains(&f) {
                continue;
            }
            let outside = graph
                .callers
                .get(&f)
                .into_iter()
                .flatten()
                .find(|(c, _)| !reached.contains_key(c));
            if let Some(&(caller, span)) = outside {
                let name = &program.function(caller).name;
                doubts.insert(
                    f,
                    Doubt {
                        text: format!(
                            "{name}() also calls it at {}:{}, and no rate entry reaches {name}()",
                            program.path(span.file),
                            span.line
                        ),
                        span,
                    },
                );
                queue.push_back(f);
            }
        }
        // What a partial function calls is partial through it.
        while let Some(f) = queue.pop_front() {
            let Some(doubt) = doubts.get(&f).cloned() else {
                continue;
            };
            for edge in graph.callees.get(&f).map(Vec::as_slice).unwrap_or(&[]) {
                let g = edge.callee;
                if starts.contains(&g) || !reached.contains_key(&g) || doubts.contains_key(&g) {
                    continue;
                }
                doubts.insert(g, doubt.clone());
                queue.push_back(g);
            }
        }
        doubts
    }

    /// Functions an unresolved call through a pointer, in a function a rate reaches, may
    /// reach: those whose address escapes, and what they call.
    fn indirect(
        program: &Program,
        graph: &CallGraph,
        reached: &BTreeMap<FuncRef, Vec<Reach>>,
    ) -> BTreeMap<FuncRef, Doubt> {
        let mut doubts = BTreeMap::new();
        let Some(call) = graph
            .unresolved
            .iter()
            .find(|u| reached.contains_key(&u.caller))
        else {
            return doubts;
        };
        let doubt = Doubt {
            text: format!(
                "{}() calls through `{}` at {}:{}, which tauscan could not resolve, and this function's address is taken",
                program.function(call.caller).name,
                call.text,
                program.path(call.span.file),
                call.span.line
            ),
            span: call.span,
        };
        let mut queue: VecDeque<FuncRef> = graph.escaped.iter().copied().collect();
        while let Some(f) = queue.pop_front() {
            if doubts.contains_key(&f) {
                continue;
            }
            doubts.insert(f, doubt.clone());
            for edge in graph.callees.get(&f).map(Vec::as_slice).unwrap_or(&[]) {
                queue.push_back(edge.callee);
            }
        }
        doubts
    }
}

//! The JSON inventory (`--format json`), schema 1.
//!
//! A promise to other programs: fields are added, never renamed or removed, within a
//! schema number. Unknown values are `null`, never made up.
//!
//! ```text
//! {
//!   "schema": 1,
//!   "tool": { "name": "tauscan", "version": "0.1.0" },
//!   "root": "fixtures/greenhouse",          // the scan root as given
//!   "smoothers": [ {
//!     "id": "vent.c::vent_sample::g_vent.temp",   // path::function::state, stable
//!     "file": "vent.c", "line": 42, "column": 5,  // the update, or an instance's call
//!     "function": "vent_sample" | null (null: a macro definition no code expands),
//!     "state": "g_vent.temp",
//!     "macro": "LPF" | null,                      // the macro the update comes from
//!     "instances": 0,                             // call sites listed for this update
//!     "form": "ema" | "ema-scaled-state" | "moving-average",
//!     "arithmetic": "float" | "integer" | "fixed",
//!     "storage": "static-local" | "global" | "field" | "array-element" | "pointer"
//!                | "loop-local" | "local",
//!     "alpha": 0.125 | null (null for a moving average, which has a window), "alpha_formula": "k" | null, "alpha_reason": "…" | null,
//!     "tau_samples": 8.0 | null, "window": 16 | null,
//!     "rate_hz": 500.0 | null, "rate_source": "LOOP_HZ = 500 (…)" | null,
//!     "rate_kind": "constant" | "spec" | "adaptive" | "event" | "unknown",
//!     "design_rate_hz": 100.0 | null,             // the rate the coefficient's derivation names
//!     "running_rate_hz": 20.0 | null,             // the rate the spec and call graph give
//!     "rate_path": [ { "function": "sensor_task", "file": "control.c", "line": 40,
//!                      "via": "entry" | "call" | "indirect-call" } ],
//!     "rate_doubts": [ "partial rate: …" ],       // what may make the rate another one
//!     "assumed": false,                           // coefficient from the spec's `assume`
//!     "cutoff_hz": 10.3 | null, "cutoff_per_sample": 0.13 | null (rad/sample),
//!     "cutoff_below_nyquist": true | false | null,
//!     "lag_samples": 7.0 | null, "lag_s": 0.014 | null,
//!     "settle": { "63": {"samples": 8, "s": 0.016}, "90": …, "95": …, "99": … } | null,
//!     "time_constant_samples": 7.49 | null,
//!     "noise_ratio": 0.25 | null, "dc_gain": 1.0 | null, "scale": 8.0 | null,
//!     "stall": { "rising": 7, "falling": 0 } | null,   // dead band in counts, integer forms
//!     "stall_nonnegative": { "rising": 7, "falling": 0 } | null,  // for inputs >= 0, where
//!                                                 // a signed type with no declared range differs
//!     "coefficient_chain": [ { "file": "vent.c", "line": 3, "text": "#define K 3" } ],
//!     "definition": { "file": "lpf.c", "line": 9 } | null,   // for instances
//!     "variants": [ { "condition": "defined(FAST)", "macro": "K", "alpha": 0.25,
//!                     "window": 4 | null } ],         // window: a moving average's
//!     "update": "y = y + (u - y) >> 3", "inputs": ["u"],
//!     "cascade": { "stages": [id, …], "cutoff_hz": …, "cutoff_per_sample": …,
//!                  "lag_samples": …, "lag_s": …, "settle": {…}, "noise_ratio": … } | null,
//!     "design": {                                 // a coefficient computed at run time
//!       "law": "rc" | "exponential" | "euler" | "span",
//!       "text": "cutoff = `cfg->cutoff_hz` Hz at the period `dt` (rc law)",
//!       "figure": "cutoff" | "cutoff-of" | "time-constant-of" | "window-of" | "several",
//!       "figure_of": "cfg->cutoff_hz" | null, "figure_scale": 1.0 | null,
//!       "period": "dt" | null, "period_unit_s": 1.0 | null, "period_is_rate": false,
//!       "cutoff_hz": 2.0 | null,                  // constant, or at the defaults
//!       "quantities": [ { "text": "cutoff", "reason": "…", "file": …, "line": …,
//!                         "default": 20.0 | null, "default_file": …, "default_line": …,
//!                         "argument": "cfg->cutoff_hz" | null,  // a parameter's callers
//!                         "argument_file": …, "argument_line": … } ],
//!       "alpha_at_defaults": 0.11 | null
//!     } | null
//!   } ],
//!   "findings": [ {                               // `tauscan check` only; [] for list
//!     "rule": "cutoff-outside-requirement", "severity": "error" | "warning" | "note",
//!     "file": "vent.c", "line": 42, "column": 5,      // the update or call; for a spec
//!                                                     // entry, the spec file and line
//!     "message": "…", "help": "…" | null,
//!     "smoother": id | null, "suppressed": "reason" | null, "baselined": false,
//!     "labels": [ { "file": "vent.c", "line": 3, "message": "coefficient from …" } ]
//!   } ],
//!   "notes": [ { "file": "x.c", "line": 3 | null, "message": "…" } ]
//! }
//! ```

use crate::context::RateKind;
use crate::figures::SmootherFigures;
use crate::index::Program;
use crate::metrics::{Figures, Settling};
use crate::recognise::{Coefficient, Smoother};
use crate::scan::Scan;
use serde::Serialize;
use std::collections::BTreeMap;

pub const SCHEMA: u32 = 1;

#[derive(Serialize)]
struct Document<'a> {
    schema: u32,
    tool: Tool,
    root: String,
    smoothers: Records<'a>,
    findings: Vec<FindingRecord>,
    notes: Vec<NoteRecord>,
}

/// The smoothers' records, each made as it is written: a scan with many smoothers never
/// holds all of them (the generated 1M-line tree's 25 000 took 37 MB).
struct Records<'a> {
    program: &'a Program,
    smoothers: &'a [Smoother],
    figures: &'a [crate::figures::SmootherFigures],
    ids: &'a [String],
}

impl Serialize for Records<'_> {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_seq(
            self.smoothers
                .iter()
                .zip(self.figures)
                .zip(self.ids)
                .map(|((sm, f), id)| record(self.program, sm, f, id.clone(), self.ids)),
        )
    }
}

#[derive(Serialize)]
struct Tool {
    name: &'static str,
    version: &'static str,
}

#[derive(Serialize)]
struct Location {
    file: String,
    line: u32,
}

#[derive(Serialize)]
struct ChainRecord {
    file: String,
    line: u32,
    text: String,
}

#[derive(Serialize)]
struct Stall {
    rising: u64,
    falling: u64,
}

#[derive(Serialize)]
struct SettleRecord {
    samples: Option<f64>,
    s: Option<f64>,
}

#[derive(Serialize)]
struct VariantRecord {
    condition: String,
    #[serde(rename = "macro")]
    macro_name: String,
    alpha: Option<f64>,
    /// For a moving average: the window under that branch.
    window: Option<u32>,
}

#[derive(Serialize)]
struct CascadeRecord {
    stages: Vec<String>,
    cutoff_hz: Option<f64>,
    cutoff_per_sample: Option<f64>,
    lag_samples: f64,
    lag_s: Option<f64>,
    settle: BTreeMap<&'static str, SettleRecord>,
    noise_ratio: Option<f64>,
}

#[derive(Serialize)]
struct QuantityRecord {
    text: String,
    reason: String,
    /// Where the derivation met it (an init call's argument, a write).
    file: Option<String>,
    line: Option<u32>,
    /// A constant the code gives it elsewhere (a reset function, a defaults write).
    default: Option<f64>,
    default_file: Option<String>,
    default_line: Option<u32>,
    /// For a parameter: what every call of its function passes, at the first call.
    argument: Option<String>,
    argument_file: Option<String>,
    argument_line: Option<u32>,
}

#[derive(Serialize)]
struct DesignRecord {
    law: &'static str,
    text: String,
    figure: &'static str,
    /// The quantity the figure is a multiple of (cutoff in Hz, time constant in s, window).
    figure_of: Option<String>,
    figure_scale: Option<f64>,
    period: Option<String>,
    period_unit_s: Option<f64>,
    period_is_rate: bool,
    /// The design's cutoff: a constant of the code, or at the quantities' defaults.
    cutoff_hz: Option<f64>,
    quantities: Vec<QuantityRecord>,
    alpha_at_defaults: Option<f64>,
}

fn design_record(program: &Program, d: &crate::recognise::design::Design) -> DesignRecord {
    use crate::recognise::design::Figure;
    let (figure, of, scale) = match &d.figure {
        Figure::Cutoff { .. } => ("cutoff", None, None),
        Figure::CutoffOf { leaf, scale } => ("cutoff-of", Some(*leaf), Some(*scale)),
        Figure::TimeConstantOf { leaf, scale } => ("time-constant-of", Some(*leaf), Some(*scale)),
        Figure::WindowOf { leaf, scale } => ("window-of", Some(*leaf), Some(*scale)),
        Figure::Several => ("several", None, None),
    };
    let text_of = |i: usize| d.quantities.get(i).map(|q| q.text.clone());
    DesignRecord {
        law: d.law.name(),
        text: d.describe(),
        figure,
        figure_of: of.and_then(text_of),
        figure_scale: finite(scale),
        period: d.period.and_then(|(p, _)| text_of(p)),
        period_unit_s: finite(d.period.map(|(_, u)| u)),
        period_is_rate: d.period_is_rate,
        cutoff_hz: finite(d.cutoff_hz()),
        quantities: d
            .quantities
            .iter()
            .map(|q| QuantityRecord {
                text: q.text.clone(),
                reason: q.reason.clone(),
                file: q.met_at.map(|(f, _)| program.path(f).to_string()),
                line: q.met_at.map(|(_, l)| l),
                default: finite(q.default.map(|(v, _, _)| v)),
                default_file: q.default.map(|(_, f, _)| program.path(f).to_string()),
                default_line: q.default.map(|(_, _, l)| l),
                argument: q.argument.as_ref().map(|(a, _, _)| a.clone()),
                argument_file: q
                    .argument
                    .as_ref()
                    .map(|(_, f, _)| program.path(*f).to_string()),
                argument_line: q.argument.as_ref().map(|(_, _, l)| *l),
            })
            .collect(),
        alpha_at_defaults: finite(d.alpha_at_defaults),
    }
}

#[derive(Serialize)]
struct RateStepRecord<'a> {
    function: &'a str,
    file: &'a str,
    line: u32,
    /// "entry" for the first step, "call" or "indirect-call" for the rest.
    via: &'static str,
}

#[derive(Serialize)]
struct Record<'a> {
    id: String,
    file: &'a str,
    line: u32,
    column: u32,
    /// Null for a macro definition that no code expands.
    function: Option<&'a str>,
    state: &'a str,
    /// The macro the update comes from (an expansion, or a macro definition), else null.
    #[serde(rename = "macro")]
    macro_name: Option<&'a str>,
    /// For the update inside a filter function or macro: how many call sites are listed as
    /// its instances (each with its own coefficient and rate); 0 otherwise.
    instances: usize,
    form: &'static str,
    arithmetic: &'static str,
    storage: &'static str,
    alpha: Option<f64>,
    alpha_formula: Option<&'a str>,
    alpha_reason: Option<&'a str>,
    tau_samples: Option<f64>,
    window: Option<u32>,
    rate_hz: Option<f64>,
    rate_source: Option<&'a str>,
    rate_kind: &'static str,
    /// The rate the coefficient was designed for, from its own derivation (a `DT`, a
    /// `LOOP_HZ`), when it names one.
    design_rate_hz: Option<f64>,
    /// The rate the update runs at, from the spec and the call graph, when known.
    running_rate_hz: Option<f64>,
    /// How a rate from the spec reached the update: the entry, then each call.
    rate_path: Vec<RateStepRecord<'a>>,
    /// What may make the running rate another one (a partial rate, an indirect call).
    rate_doubts: &'a [String],
    /// The coefficient (or window) is the spec's `assume`, not the code's.
    assumed: bool,
    cutoff_hz: Option<f64>,
    cutoff_per_sample: Option<f64>,
    cutoff_below_nyquist: Option<bool>,
    lag_samples: Option<f64>,
    lag_s: Option<f64>,
    settle: Option<BTreeMap<&'static str, SettleRecord>>,
    time_constant_samples: Option<f64>,
    noise_ratio: Option<f64>,
    dc_gain: Option<f64>,
    scale: Option<f64>,
    stall: Option<Stall>,
    /// Where the input's type lets it go below zero and no range is declared: the dead
    /// band for inputs at or above zero, when C's rounding makes it another.
    stall_nonnegative: Option<Stall>,
    coefficient_chain: Vec<ChainRecord>,
    definition: Option<Location>,
    variants: Vec<VariantRecord>,
    update: &'a str,
    inputs: &'a [String],
    cascade: Option<CascadeRecord>,
    /// For a coefficient computed at run time: its design law and what it fixes.
    design: Option<DesignRecord>,
}

#[derive(Serialize)]
struct LabelRecord {
    file: String,
    line: u32,
    message: String,
}

#[derive(Serialize)]
struct FindingRecord {
    rule: &'static str,
    severity: &'static str,
    /// The update or call a reader must look at; for a finding about the spec, the spec
    /// file and the entry's line.
    file: Option<String>,
    line: Option<u32>,
    column: Option<u32>,
    message: String,
    help: Option<String>,
    smoother: Option<String>,
    /// The reason of an inline suppression; the finding then does not fail the gate.
    suppressed: Option<String>,
    /// In the baseline the gate was given: known, so it does not fail the gate.
    baselined: bool,
    labels: Vec<LabelRecord>,
}

#[derive(Serialize)]
struct NoteRecord {
    file: String,
    line: Option<u32>,
    message: String,
}

/// Finite numbers only: JSON has no NaN or infinity, and a non-finite figure is unknown.
fn finite(v: Option<f64>) -> Option<f64> {
    v.filter(|x| x.is_finite())
}

fn settle(s: &Settling) -> SettleRecord {
    SettleRecord {
        samples: finite(s.samples.map(|x| x.0)),
        s: finite(s.seconds.map(|x| x.0)),
    }
}

fn settle_map(x: &Figures) -> BTreeMap<&'static str, SettleRecord> {
    let mut m = BTreeMap::new();
    m.insert("63", settle(&x.to_63));
    m.insert("90", settle(&x.to_90));
    m.insert("95", settle(&x.to_95));
    m.insert("99", settle(&x.to_99));
    m
}

fn record<'a>(
    program: &'a Program,
    s: &'a Smoother,
    f: &SmootherFigures,
    id: String,
    all_ids: &[String],
) -> Record<'a> {
    let own: Option<&Figures> = f.own.as_ref();
    let (alpha, formula, reason) = match &s.alpha {
        // A moving average has a window, not a smoothing coefficient.
        Coefficient::Known(_) if s.window.is_some() => (None, None, None),
        Coefficient::Known(a) => (Some(*a), None, None),
        Coefficient::Adaptive { formula, .. } => (None, Some(formula.as_str()), None),
        Coefficient::Unknown { formula, reason } => {
            (None, Some(formula.as_str()), Some(reason.as_str()))
        }
    };
    let has_stage = f.stage.is_some();
    let tau = match s.window {
        Some(_) => None,
        None => alpha.filter(|a| *a > 0.0).map(|a| 1.0 / a),
    };
    Record {
        id,
        file: program.path(s.span.file),
        line: s.span.line,
        column: s.span.column,
        function: s.function_ref.map(|_| s.function.as_str()),
        state: &s.state,
        macro_name: s.macro_name.as_deref(),
        instances: s.instance_count,
        form: s.form.name(),
        arithmetic: s.arithmetic.name(),
        storage: s.storage.name(),
        alpha: finite(alpha),
        alpha_formula: formula,
        alpha_reason: reason,
        tau_samples: finite(tau),
        window: s.window,
        rate_hz: finite(s.rate.hz),
        rate_source: s.rate.source.as_deref(),
        rate_kind: if s.rate.kind == RateKind::Unknown && s.rate.hz.is_some() {
            RateKind::Constant.name()
        } else {
            s.rate.kind.name()
        },
        design_rate_hz: finite(design_rate(s)),
        running_rate_hz: finite(running_rate(s)),
        rate_path: s
            .rate
            .path
            .iter()
            .enumerate()
            .map(|(i, step)| RateStepRecord {
                function: &step.function,
                file: program.path(step.file),
                line: step.line,
                via: match (i, step.indirect) {
                    (0, _) => "entry",
                    (_, false) => "call",
                    (_, true) => "indirect-call",
                },
            })
            .collect(),
        rate_doubts: &s.rate.doubts,
        assumed: s.assumed,
        cutoff_hz: finite(own.and_then(|x| x.cutoff_hertz.map(|h| h.0))),
        cutoff_per_sample: finite(own.and_then(|x| x.cutoff.map(|c| c.0))),
        cutoff_below_nyquist: has_stage.then(|| own.is_some_and(|x| x.cutoff.is_some())),
        lag_samples: finite(own.map(|x| x.lag.0)),
        lag_s: finite(own.and_then(|x| x.lag_seconds.map(|l| l.0))),
        settle: own.map(settle_map),
        time_constant_samples: finite(own.and_then(|x| x.time_constant.map(|t| t.0))),
        noise_ratio: finite(own.and_then(|x| x.noise_ratio)),
        dc_gain: finite(s.dc_gain),
        scale: finite(s.scale),
        stall: s.dead_band.map(|d| Stall {
            rising: d.rising,
            falling: d.falling,
        }),
        stall_nonnegative: s.dead_band_nonnegative.map(|d| Stall {
            rising: d.rising,
            falling: d.falling,
        }),
        coefficient_chain: s
            .chain
            .iter()
            .map(|c| ChainRecord {
                file: program.path(c.file).to_string(),
                line: c.line,
                text: c.text.clone(),
            })
            .collect(),
        definition: s.definition.map(|d| Location {
            file: program.path(d.file).to_string(),
            line: d.line,
        }),
        variants: s
            .variants
            .iter()
            .map(|v| VariantRecord {
                condition: v.condition.clone(),
                macro_name: v.macro_name.clone(),
                alpha: finite(v.alpha),
                window: v.window,
            })
            .collect(),
        update: &s.update,
        inputs: &s.inputs,
        cascade: f.cascade.as_ref().map(|(stages, fig)| CascadeRecord {
            stages: stages.iter().map(|&i| all_ids[i].clone()).collect(),
            cutoff_hz: finite(fig.cutoff_hertz.map(|h| h.0)),
            cutoff_per_sample: finite(fig.cutoff.map(|c| c.0)),
            lag_samples: fig.lag.0,
            lag_s: finite(fig.lag_seconds.map(|l| l.0)),
            settle: settle_map(fig),
            noise_ratio: finite(fig.noise_ratio),
        }),
        design: s.design.as_ref().map(|d| design_record(program, d)),
    }
}

/// The whole scan as JSON text (the inventory of `tauscan list`).
pub fn render(scan: &Scan, root_label: &str) -> String {
    render_with_findings(scan, root_label, &[], None)
}

/// The scan and the findings of `tauscan check`; `spec_file` names the spec for findings
/// about its entries.
pub fn render_with_findings(
    scan: &Scan,
    root_label: &str,
    findings: &[crate::rules::Finding],
    spec_file: Option<&str>,
) -> String {
    let mut text = Vec::new();
    // Writing to memory fails only as serialising does (never: plain structs of strings
    // and finite numbers); should it ever, the output says so rather than being empty.
    match write_with_findings(&mut text, scan, root_label, findings, spec_file) {
        Ok(()) => String::from_utf8(text).unwrap_or_default(),
        Err(e) => format!("{{\"schema\": {SCHEMA}, \"error\": \"{e}\"}}\n"),
    }
}

/// `render` written to `out` as it is made (a large scan's JSON is never one string).
pub fn write(out: &mut dyn std::io::Write, scan: &Scan, root_label: &str) -> std::io::Result<()> {
    write_with_findings(out, scan, root_label, &[], None)
}

/// `render_with_findings` written to `out` as it is made.
pub fn write_with_findings(
    out: &mut dyn std::io::Write,
    scan: &Scan,
    root_label: &str,
    findings: &[crate::rules::Finding],
    spec_file: Option<&str>,
) -> std::io::Result<()> {
    let program = &scan.program;
    let smoothers = &scan.recognition.smoothers;
    let all_ids = scan.ids();
    let records = Records {
        program,
        smoothers,
        figures: &scan.figures,
        ids: &all_ids,
    };
    let doc = Document {
        schema: SCHEMA,
        tool: Tool {
            name: "tauscan",
            version: env!("CARGO_PKG_VERSION"),
        },
        root: root_label.to_string(),
        smoothers: records,
        findings: findings
            .iter()
            .map(|f| {
                let (file, line, column) = match (f.span, f.spec_line) {
                    (Some(span), _) => (
                        Some(program.path(span.file).to_string()),
                        Some(span.line),
                        Some(span.column),
                    ),
                    (None, Some(line)) => (spec_file.map(str::to_string), Some(line as u32), None),
                    (None, None) => (None, None, None),
                };
                FindingRecord {
                    rule: f.rule,
                    severity: f.severity.name(),
                    file,
                    line,
                    column,
                    message: f.message.clone(),
                    help: f.help.clone(),
                    smoother: f.smoother.and_then(|i| all_ids.get(i).cloned()),
                    suppressed: f.suppressed.clone(),
                    baselined: f.baselined,
                    labels: f
                        .labels
                        .iter()
                        .map(|l| LabelRecord {
                            file: program.path(l.file).to_string(),
                            line: l.line,
                            message: l.message.clone(),
                        })
                        .collect(),
                }
            })
            .collect(),
        notes: scan
            .notes
            .iter()
            .map(|n| NoteRecord {
                file: n.file.clone(),
                line: n.line,
                message: n.message.clone(),
            })
            .collect(),
    };
    serde_json::to_writer_pretty(&mut *out, &doc)?;
    out.write_all(b"\n")
}

/// The rate the coefficient was designed for: its derivation's, kept aside when the spec
/// gave another.
pub fn design_rate(s: &Smoother) -> Option<f64> {
    match &s.code_rate {
        Some(code) => (code.kind == RateKind::Constant)
            .then_some(code.hz)
            .flatten(),
        None => (s.rate.kind == RateKind::Constant)
            .then_some(s.rate.hz)
            .flatten(),
    }
}

/// The rate the update runs at, from the spec (an entry function carried down the call
/// graph, a path, a constant it declares) or `--rate`.
pub fn running_rate(s: &Smoother) -> Option<f64> {
    (s.rate.kind == RateKind::Spec)
        .then_some(s.rate.hz)
        .flatten()
}

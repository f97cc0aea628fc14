//! The smoother document (`tauscan report`) as values, before any markup: its header, one
//! entry per smoother with its figures, verdict, source lines and derivation, the findings
//! about the spec itself, and the scan's notes.
//!
//! Both renderers (`html` and `document_md`) read this model, so the HTML page and the
//! Markdown file say the same thing. It is built from a checked scan and what the CLI gathers
//! (file texts, git revision, date), all passed in: this module reads no file and asks no
//! clock. Text from the scanned files is kept as it is here; each renderer escapes it for its
//! own format.

use crate::check::CheckResult;
use crate::ir::{FileId, Span};
use crate::metrics::{self, Figures, Stage};
use crate::recognise::{Coefficient, Form};
use crate::report::table::{hertz, seconds, sig3};
use crate::rules::Finding;
use crate::scan::Scan;
use crate::spec::{Requirements, Severity};
use crate::units::{Hertz, Seconds};
use std::f64::consts::TAU;

/// Lines of source shown before and after an update.
pub const CONTEXT_LINES: u32 = 3;

/// What the CLI gathers for the header.
#[derive(Debug, Clone, PartialEq)]
pub struct Header {
    /// The scan root as given on the command line.
    pub root: String,
    /// The git revision of the scan root (`git rev-parse --short HEAD`), when it is in git;
    /// with a note when the work tree differs from it.
    pub revision: Option<String>,
    /// The spec file the smoothers were held against, when one was found.
    pub spec: Option<String>,
    /// The date and time the document was made, in UTC (see [`utc_timestamp`]).
    pub date_utc: String,
    /// The tool's version.
    pub version: String,
}

/// Source lines around one place, as read from the file.
#[derive(Debug, Clone, PartialEq)]
pub struct Excerpt {
    /// What the lines are (`update`, `filter body`).
    pub title: &'static str,
    pub file: String,
    /// (1-based line number, text without the line end, whether the place is on it).
    pub lines: Vec<(u32, String, bool)>,
}

/// One step of the coefficient's derivation.
#[derive(Debug, Clone, PartialEq)]
pub struct ChainLine {
    pub file: String,
    pub line: u32,
    pub text: String,
    /// `NAME = value` when the step defines a name whose value is known.
    pub value: Option<String>,
}

/// A finding about one smoother or about the spec, as the document shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct FindingLine {
    pub rule: &'static str,
    pub severity: Severity,
    /// `file:line` of the finding, or `spec line N`.
    pub place: String,
    pub message: String,
    pub help: Option<String>,
    /// The reason of an inline suppression, when one applies.
    pub suppressed: Option<String>,
    pub baselined: bool,
}

impl FindingLine {
    /// Whether the finding counts against the smoother (not suppressed, not known).
    pub fn counts(&self) -> bool {
        self.suppressed.is_none() && !self.baselined
    }

    /// The lines under the message (see [`crate::report::finding_details`]).
    pub fn details(&self) -> Vec<String> {
        crate::report::finding_details(
            self.help.as_deref(),
            self.suppressed.as_deref(),
            self.baselined,
        )
    }
}

/// The verdict of one smoother against the spec.
#[derive(Debug, Clone, PartialEq)]
pub enum Verdict {
    /// No finding counts against it and the spec asked something of it.
    Pass { requirements: bool },
    /// The spec asks nothing of it: no verdict, not a pass.
    NoRequirement,
    /// The spec asks something, but the coefficient is unknown, so no figure could be held
    /// against it: not a pass.
    NotEvaluated,
    /// These rules fired (each once, in the order of the findings), the worst severity first.
    Fired {
        rules: Vec<&'static str>,
        worst: Severity,
    },
    /// The update inside a filter function or macro: each of its calls is listed and
    /// judged as an instance of its own.
    Instances { count: usize },
}

impl Verdict {
    /// The verdict in words: `pass`, or the rule ids that fired.
    pub fn text(&self) -> String {
        match self {
            Verdict::Pass { .. } => "pass".into(),
            Verdict::NoRequirement => "no requirement".into(),
            Verdict::NotEvaluated => "not evaluated (coefficient unknown)".into(),
            Verdict::Fired { rules, .. } => rules.join(", "),
            Verdict::Instances { count: 1 } => "judged at its one instance".into(),
            Verdict::Instances { count } => format!("judged at each of its {count} instances"),
        }
    }
}

/// The combined response of a cascade that ends at a smoother.
#[derive(Debug, Clone, PartialEq)]
pub struct CascadeEntry {
    /// Ids of the stages, first to last.
    pub stage_ids: Vec<String>,
    pub stages: Vec<Stage>,
    pub figures: Figures,
    /// The rate of the whole cascade, when every stage runs at the same known one.
    pub rate: Option<Hertz>,
}

/// One smoother of the document.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    /// Index in the scan's list of smoothers.
    pub index: usize,
    pub id: String,
    /// A short name for links within the document (`s1`, `s2`…), made of nothing the scanned
    /// files wrote.
    pub anchor: String,
    pub file: String,
    pub line: u32,
    pub column: u32,
    pub function: String,
    pub state: String,
    pub form: &'static str,
    pub arithmetic: &'static str,
    pub storage: &'static str,
    /// The coefficient in words: `alpha = 0.0625 (tau 16 samples)`, `N = 8`, `unknown: …`.
    pub coefficient: String,
    /// The smoother's stage, when its coefficient gives figures.
    pub stage: Option<Stage>,
    pub figures: Option<Figures>,
    /// The update rate, when known (positive and finite).
    pub rate: Option<Hertz>,
    /// The rate in words with its kind: `200 Hz (spec)`, `unknown`, `per event`.
    pub rate_text: String,
    pub rate_source: Option<String>,
    /// The rate it runs at and the rate its coefficient was designed for, each with where it
    /// comes from (see [`rate_story`]).
    pub rate_story: String,
    /// What may make the running rate another one, in words.
    pub rate_doubts: Vec<String>,
    pub cutoff_text: String,
    pub lag_text: String,
    /// Settling time to the spec's fraction when it sets one, else to 95 %.
    pub settle_text: String,
    pub noise_text: String,
    pub dead_band_text: String,
    pub dc_gain: Option<f64>,
    pub update: String,
    pub verdict: Verdict,
    pub findings: Vec<FindingLine>,
    pub requirements: Requirements,
    pub excerpts: Vec<Excerpt>,
    pub chain: Vec<ChainLine>,
    /// Coefficients under other preprocessor branches, in words.
    pub variants: Vec<String>,
    pub cascade: Option<CascadeEntry>,
    /// Why no plot can be drawn, when none can.
    pub no_plot_reason: Option<String>,
}

/// The whole document.
#[derive(Debug, Clone, PartialEq)]
pub struct Document {
    pub header: Header,
    /// Ordered by file, line and column.
    pub entries: Vec<Entry>,
    /// Findings about the spec itself (an entry that matches no smoother).
    pub spec_findings: Vec<FindingLine>,
    /// The scan's notes, `place: message`.
    pub notes: Vec<String>,
    /// Files could not be read or a path does not exist: the document may miss smoothers.
    pub incomplete: bool,
    pub files: usize,
}

impl Document {
    /// How many findings count, by severity (error, warning, note).
    pub fn counts(&self) -> (usize, usize, usize) {
        let mut counts = (0, 0, 0);
        let all = self
            .entries
            .iter()
            .flat_map(|e| e.findings.iter())
            .chain(&self.spec_findings);
        for f in all.filter(|f| f.counts()) {
            match f.severity {
                Severity::Error => counts.0 += 1,
                Severity::Warning => counts.1 += 1,
                Severity::Note => counts.2 += 1,
            }
        }
        counts
    }
}

/// The caution every document ends with.
pub const CAUTION: &str = "This document is an aid to review, not a safety certification. \
Where a filter guards people or equipment (a motor, a heater, a battery, a medical device), \
check its behaviour against the product's own requirements, local codes and licensed practice.";

/// `seconds` since 1970-01-01 UTC as `YYYY-MM-DD HH:MM UTC`, for the document's date.
///
/// The days are turned into a civil date with the proleptic Gregorian calendar (the
/// days-from-civil inverse in 400-year eras); negative times work too.
pub fn utc_timestamp(seconds_since_epoch: i64) -> String {
    let days = seconds_since_epoch.div_euclid(86_400);
    let of_day = seconds_since_epoch.rem_euclid(86_400);
    // Shift to an era starting on 0000-03-01, so the leap day is the last day of a year.
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let day_of_era = z.rem_euclid(146_097);
    let year_of_era =
        (day_of_era - day_of_era / 1_460 + day_of_era / 36_524 - day_of_era / 146_096) / 365;
    let day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
    let month_index = (5 * day_of_year + 2) / 153;
    let day = day_of_year - (153 * month_index + 2) / 5 + 1;
    let month = if month_index < 10 {
        month_index + 3
    } else {
        month_index - 9
    };
    let year = year_of_era + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02} {:02}:{:02} UTC",
        of_day / 3_600,
        of_day % 3_600 / 60
    )
}

fn finding_line(scan: &Scan, f: &Finding) -> FindingLine {
    let place = match (f.span, f.spec_line) {
        (Some(span), _) => format!("{}:{}", scan.program.path(span.file), span.line),
        (None, Some(line)) => format!("spec line {line}"),
        (None, None) => String::new(),
    };
    FindingLine {
        rule: f.rule,
        severity: f.severity,
        place,
        message: f.message.clone(),
        help: f.help.clone(),
        suppressed: f.suppressed.clone(),
        baselined: f.baselined,
    }
}

fn verdict(findings: &[FindingLine], requirements: &Requirements, evaluated: bool) -> Verdict {
    let counting: Vec<&FindingLine> = findings.iter().filter(|f| f.counts()).collect();
    let Some(worst) = counting.iter().map(|f| f.severity).max() else {
        return match (requirements.is_empty(), evaluated) {
            (true, _) => Verdict::NoRequirement,
            (false, false) => Verdict::NotEvaluated,
            (false, true) => Verdict::Pass { requirements: true },
        };
    };
    let mut rules: Vec<&'static str> = Vec::new();
    for severity in [Severity::Error, Severity::Warning, Severity::Note] {
        for f in counting.iter().filter(|f| f.severity == severity) {
            if !rules.contains(&f.rule) {
                rules.push(f.rule);
            }
        }
    }
    Verdict::Fired { rules, worst }
}

/// The lines of `text` around `span` (the lines it covers, highlighted, and
/// [`CONTEXT_LINES`] either side).
fn excerpt(title: &'static str, file: &str, text: &str, span: Span) -> Excerpt {
    let start = (span.start as usize).min(text.len());
    let end = (span.end as usize).clamp(start, text.len());
    // Counting line ends in bytes keeps this right even where the span cuts a character.
    let last_line = span.line
        + text.as_bytes()[start..end]
            .iter()
            .filter(|b| **b == b'\n')
            .count() as u32;
    let from = span.line.saturating_sub(CONTEXT_LINES).max(1);
    let to = last_line.saturating_add(CONTEXT_LINES);
    let lines = text
        .split('\n')
        .enumerate()
        .map(|(i, l)| (i as u32 + 1, l))
        .filter(|(n, _)| *n >= from && *n <= to)
        .map(|(n, l)| {
            (
                n,
                l.strip_suffix('\r').unwrap_or(l).to_string(),
                n >= span.line && n <= last_line,
            )
        })
        .collect();
    Excerpt {
        title,
        file: file.to_string(),
        lines,
    }
}

/// A count of samples in words, `1 sample` or `2.5 samples`.
pub fn samples(count: f64) -> String {
    let text = sig3(count);
    if text == "1" {
        "1 sample".into()
    } else {
        format!("{text} samples")
    }
}

fn cutoff_text(figures: Option<&Figures>, has_stage: bool) -> String {
    match figures {
        Some(f) => match (f.cutoff_hertz, f.cutoff) {
            (Some(h), _) => hertz(h.0),
            (None, Some(w)) => format!("{} fs", sig3(w.0 / TAU)),
            (None, None) => "none below Nyquist".into(),
        },
        None if has_stage => "?".into(),
        None => "-".into(),
    }
}

fn lag_text(f: &Figures) -> String {
    match f.lag_seconds {
        Some(s) => format!("{} ({})", seconds(s.0), samples(f.lag.0)),
        None => samples(f.lag.0),
    }
}

/// The time to reach `q` of a step, in seconds with a rate, else in samples.
fn settle_text(stage: Stage, rate: Option<Hertz>, q: f64) -> String {
    let percent = sig3(q * 100.0);
    match metrics::cascade_samples_to_fraction(&[stage], q) {
        Some(n) => match rate {
            Some(r) => format!("{} to {percent} %", seconds(n.to_seconds(r).0)),
            None => format!("{} to {percent} %", samples(n.0)),
        },
        None => format!("? to {percent} %"),
    }
}

/// White-noise reduction in dB with the ratio.
pub fn noise_text(ratio: Option<f64>) -> String {
    match ratio.filter(|r| r.is_finite() && *r > 0.0) {
        Some(r) => format!("{} dB (ratio {})", sig3(-20.0 * r.log10()), sig3(r)),
        None => "?".into(),
    }
}

fn coefficient_text(s: &crate::recognise::Smoother) -> String {
    if s.form == Form::MovingAverage {
        return match s.window {
            Some(n) => format!("N = {n}"),
            None => "N unknown".into(),
        };
    }
    let text = match &s.alpha {
        Coefficient::Known(a) if *a > 0.0 => {
            format!("alpha = {} (tau {})", sig3(*a), samples(1.0 / a))
        }
        Coefficient::Known(a) => format!("alpha = {}", sig3(*a)),
        Coefficient::Adaptive {
            formula,
            depends_on,
        } => format!("adaptive: {formula} (follows {depends_on})"),
        Coefficient::Unknown { formula, reason } => format!("unknown: {formula} ({reason})"),
    };
    match &s.design {
        Some(d) => format!("{text}; design: {}", d.describe()),
        None => text,
    }
}

/// The rates of a smoother in words: the rate the update runs at, with where that comes from
/// and the way it reaches the update, then the rate its coefficient was designed for, with
/// the constant that says so. For example `runs at 20 Hz (tauscan.yaml:5: sensor_task() runs
/// at 20 Hz, via sensor_task -> light_sample, control.c:26); coefficient designed for 100 Hz
/// (`#define SENSOR_DT 0.01f`)`.
pub fn rate_story(program: &crate::index::Program, s: &crate::recognise::Smoother) -> String {
    use crate::context::{path_text, RateKind};
    use crate::report::json::{design_rate, running_rate};
    let usable = |hz: Option<f64>| hz.filter(|r| r.is_finite() && *r > 0.0);
    let running = usable(running_rate(s));
    let design = usable(design_rate(s));
    // Where the running rate comes from and how it reaches the update. A rate of the
    // program's own constants is the design rate, said in the second half.
    let mut why: Vec<String> = Vec::new();
    if s.rate.kind != RateKind::Constant {
        why.extend(s.rate.source.clone());
    }
    if !s.rate.path.is_empty() {
        why.push(format!("via {}", path_text(program, &s.rate.path)));
    }
    let why = if why.is_empty() {
        String::new()
    } else {
        format!(" ({})", why.join(", "))
    };
    let runs = match (running, s.rate.kind) {
        (Some(r), _) => format!("runs at {}{why}", hertz(r)),
        (None, RateKind::Event) => format!("runs per event{why}, at no fixed rate"),
        (None, RateKind::Adaptive) => {
            format!("runs at a time step measured while running{why}")
        }
        (None, _) => format!("runs at a rate not given{why}: no spec rate and no --rate reach it"),
    };
    let designed = match design {
        Some(d) => {
            let source = match &s.code_rate {
                Some(code) => code.source.clone(),
                None => s.rate.source.clone(),
            };
            let source = source.map(|x| format!(" ({x})")).unwrap_or_default();
            let used = if running.is_none() {
                ", the rate the figures use"
            } else {
                ""
            };
            format!("coefficient designed for {}{source}{used}", hertz(d))
        }
        None => "the coefficient names no rate of its own".into(),
    };
    format!("{runs}; {designed}")
}

/// Builds the document of a checked scan. `read` gives a scanned file's bytes (for the source
/// lines); a file it cannot give is shown without them.
pub fn build(
    scan: &Scan,
    checked: &CheckResult,
    header: Header,
    read: &dyn Fn(FileId) -> Option<Vec<u8>>,
) -> Document {
    let program = &scan.program;
    let smoothers = &scan.recognition.smoothers;
    let ids = &checked.ids;
    let mut texts: std::collections::HashMap<FileId, Option<String>> =
        std::collections::HashMap::new();
    let mut text_of = |file: FileId| -> Option<String> {
        texts
            .entry(file)
            .or_insert_with(|| read(file).map(|b| String::from_utf8_lossy(&b).into_owned()))
            .clone()
    };
    let mut order: Vec<usize> = (0..smoothers.len()).collect();
    order.sort_by(|&a, &b| {
        let (x, y) = (&smoothers[a], &smoothers[b]);
        (
            program.path(x.span.file),
            x.span.line,
            x.span.column,
            &ids[a],
        )
            .cmp(&(
                program.path(y.span.file),
                y.span.line,
                y.span.column,
                &ids[b],
            ))
    });
    let mut entries = Vec::with_capacity(order.len());
    for (position, &i) in order.iter().enumerate() {
        let s = &smoothers[i];
        let f = &scan.figures[i];
        let own = f.own;
        let rate = s.rate.hz.filter(|r| r.is_finite() && *r > 0.0).map(Hertz);
        let requirements = checked.requirements.get(i).copied().unwrap_or_default();
        let findings: Vec<FindingLine> = checked
            .findings
            .iter()
            .filter(|x| x.smoother == Some(i))
            .map(|x| finding_line(scan, x))
            .collect();
        let settle_fraction = requirements.settle.map_or(metrics::FRACTION_95, |(q, _)| q);
        let file = program.path(s.span.file).to_string();
        let mut excerpts = Vec::new();
        if let Some(text) = text_of(s.span.file) {
            let title = if s.definition.is_some() {
                "call"
            } else {
                "update"
            };
            excerpts.push(excerpt(title, &file, &text, s.span));
        }
        if let Some(d) = s.definition {
            if let Some(text) = text_of(d.file) {
                excerpts.push(excerpt("filter body", program.path(d.file), &text, d));
            }
        }
        let cascade = f.cascade.as_ref().and_then(|(chain, figures)| {
            let stages: Option<Vec<Stage>> = chain.iter().map(|&k| scan.figures[k].stage).collect();
            Some(CascadeEntry {
                stage_ids: chain.iter().map(|&k| ids[k].clone()).collect(),
                stages: stages?,
                figures: *figures,
                // The cascade has a rate exactly when its stages share one (see `figures`);
                // its seconds say so.
                rate: figures.lag_seconds.and(rate),
            })
        });
        let rate_text = match (rate, s.rate.kind) {
            (Some(r), kind) => format!("{} ({})", hertz(r.0), kind.name()),
            (None, crate::context::RateKind::Event) => "per event (no rate)".into(),
            (None, crate::context::RateKind::Adaptive) => "adaptive (measured time step)".into(),
            (None, _) => "unknown".into(),
        };
        let no_plot_reason = match (f.stage, &s.alpha) {
            (Some(_), _) => None,
            (None, Coefficient::Adaptive { depends_on, .. }) => Some(format!(
                "no plot: the coefficient follows {depends_on}, which is only known while running"
            )),
            (None, Coefficient::Unknown { reason, .. }) => {
                Some(format!("no plot: the coefficient is not known ({reason})"))
            }
            (None, _) => Some("no plot: the coefficient gives no low-pass figures".into()),
        };
        entries.push(Entry {
            index: i,
            id: ids[i].clone(),
            anchor: format!("s{}", position + 1),
            file,
            line: s.span.line,
            column: s.span.column,
            function: s.function.clone(),
            state: s.state.clone(),
            form: s.form.name(),
            arithmetic: s.arithmetic.name(),
            storage: s.storage.name(),
            coefficient: coefficient_text(s),
            stage: f.stage,
            figures: own,
            rate,
            rate_text,
            rate_source: s.rate.source.clone(),
            rate_story: rate_story(program, s),
            rate_doubts: s.rate.doubts.clone(),
            cutoff_text: cutoff_text(own.as_ref(), f.stage.is_some()),
            lag_text: own.as_ref().map(lag_text).unwrap_or_else(|| "-".into()),
            settle_text: f
                .stage
                .map(|st| settle_text(st, rate, settle_fraction))
                .unwrap_or_else(|| "-".into()),
            noise_text: match own {
                Some(o) => noise_text(o.noise_ratio),
                None => "-".into(),
            },
            dead_band_text: match s.dead_band {
                Some(d) => format!("{} below, {} above (counts)", d.rising, d.falling),
                None => "-".into(),
            },
            dc_gain: s.dc_gain,
            update: s.update.clone(),
            verdict: if s.instance_count > 0 {
                Verdict::Instances {
                    count: s.instance_count,
                }
            } else {
                verdict(&findings, &requirements, s.alpha.value().is_some())
            },
            findings,
            requirements,
            excerpts,
            chain: s
                .chain
                .iter()
                .map(|c| ChainLine {
                    file: program.path(c.file).to_string(),
                    line: c.line,
                    text: c.text.clone(),
                    value: match (&c.name, c.value) {
                        (Some(name), Some(v)) => Some(format!("{name} = {}", sig3(v))),
                        _ => None,
                    },
                })
                .collect(),
            variants: s
                .variants
                .iter()
                .map(|v| {
                    let value = match (v.window, v.alpha) {
                        (Some(n), _) => format!("N = {n}"),
                        (None, Some(a)) => format!("alpha = {}", sig3(a)),
                        _ => "unknown".into(),
                    };
                    format!("{value} when {} ({})", v.condition, v.macro_name)
                })
                .collect(),
            cascade,
            no_plot_reason,
        });
    }
    Document {
        header,
        entries,
        spec_findings: checked
            .findings
            .iter()
            .filter(|f| f.smoother.is_none())
            .map(|f| finding_line(scan, f))
            .collect(),
        notes: scan
            .notes
            .iter()
            .map(|n| match n.line {
                Some(line) => format!("{}:{line}: {}", n.file, n.message),
                None => format!("{}: {}", n.file, n.message),
            })
            .collect(),
        incomplete: scan.incomplete,
        files: program.files.len(),
    }
}

/// The spec's requirements of an entry in words, one per item.
pub fn requirement_lines(r: &Requirements) -> Vec<String> {
    let mut out = Vec::new();
    match (r.cutoff_min, r.cutoff_max) {
        (Some(a), Some(b)) => out.push(format!("cutoff {} to {}", hertz(a.0), hertz(b.0))),
        (Some(a), None) => out.push(format!("cutoff at least {}", hertz(a.0))),
        (None, Some(b)) => out.push(format!("cutoff at most {}", hertz(b.0))),
        (None, None) => {}
    }
    if let Some(Seconds(lag)) = r.max_lag {
        out.push(format!("lag at most {}", seconds(lag)));
    }
    if let Some((q, Seconds(within))) = r.settle {
        out.push(format!(
            "{} % of a step within {}",
            sig3(q * 100.0),
            seconds(within)
        ));
    }
    if let Some(ratio) = r.max_noise_ratio {
        out.push(format!(
            "noise reduction at least {}",
            noise_text(Some(ratio))
        ));
    }
    if let Some(counts) = r.max_dead_band {
        out.push(format!("dead band at most {} counts", sig3(counts)));
    }
    out
}

/// Step marks of a figure set in words: `63 %: 65 samples (0.32 s)`.
pub fn settle_marks(f: &Figures) -> Vec<(String, String)> {
    [f.to_63, f.to_90, f.to_95, f.to_99]
        .iter()
        .map(|m| {
            let label = format!("{} %", sig3(m.fraction * 100.0));
            let value = match (m.samples, m.seconds) {
                (Some(n), Some(s)) => format!("{} ({})", seconds(s.0), samples(n.0)),
                (Some(n), None) => samples(n.0),
                _ => "?".into(),
            };
            (label, value)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utc_timestamps_of_known_instants() {
        // Source: the Unix epoch is 1970-01-01 00:00 UTC (POSIX); 951782400 is 2000-02-29
        // 00:00 UTC and 1700000000 is 2023-11-14 22:13:20 UTC (both from `date -u -d @N`).
        assert_eq!(utc_timestamp(0), "1970-01-01 00:00 UTC");
        assert_eq!(utc_timestamp(951_782_400), "2000-02-29 00:00 UTC");
        assert_eq!(utc_timestamp(1_700_000_000), "2023-11-14 22:13 UTC");
        assert_eq!(utc_timestamp(-1), "1969-12-31 23:59 UTC");
    }

    #[test]
    fn excerpts_mark_the_lines_of_the_span() {
        let text = "a\nb\nc\nd\ne\nf\ng\nh\ni\n";
        // The span covers "d\ne" (bytes 6..9), lines 4 and 5.
        let span = Span {
            file: FileId(0),
            start: 6,
            end: 9,
            line: 4,
            column: 1,
        };
        let e = excerpt("update", "x.c", text, span);
        let numbers: Vec<u32> = e.lines.iter().map(|l| l.0).collect();
        assert_eq!(numbers, vec![1, 2, 3, 4, 5, 6, 7, 8]);
        let marked: Vec<u32> = e.lines.iter().filter(|l| l.2).map(|l| l.0).collect();
        assert_eq!(marked, vec![4, 5]);
    }

    #[test]
    fn verdicts_name_the_rules_that_fired_worst_first() {
        let line = |rule: &'static str, severity, suppressed: Option<&str>| FindingLine {
            rule,
            severity,
            place: String::new(),
            message: String::new(),
            help: None,
            suppressed: suppressed.map(str::to_string),
            baselined: false,
        };
        let some = Requirements {
            max_dead_band: Some(3.0),
            ..Requirements::default()
        };
        let findings = vec![
            line("integer-dead-band", Severity::Warning, None),
            line("cutoff-outside-requirement", Severity::Error, None),
            line("lag-over-requirement", Severity::Error, Some("known")),
        ];
        assert_eq!(
            verdict(&findings, &some, true).text(),
            "cutoff-outside-requirement, integer-dead-band"
        );
        assert_eq!(verdict(&findings[2..], &some, true).text(), "pass");
        // Neither asking nothing nor knowing nothing is a pass.
        assert_eq!(
            verdict(&[], &Requirements::default(), true).text(),
            "no requirement"
        );
        assert_eq!(
            verdict(&findings[2..], &some, false).text(),
            "not evaluated (coefficient unknown)"
        );
    }
}

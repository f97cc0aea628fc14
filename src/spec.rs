//! The spec: a product's written requirements for its smoothers, read from YAML.
//!
//! `from_str` turns the text of a `tauscan.yaml` into a validated `Spec` with typed
//! quantities (units are parsed here, once) or a `SpecError` with the line and column and,
//! for a misspelt key, the nearest valid one. Nothing past this module sees YAML. Finding
//! the file (upward from the scan root) is `find`; reading it is the caller's.
//!
//! ```yaml
//! scan:     { include: ["src/**"], exclude: ["vendor/**"] }   # and compile_commands: FILE
//! defines:  { VENT_FAST_CURRENT: 1 }
//! target:   { int_bits: 16, fpu: false }
//! rates:
//!   - { function: control_isr, rate: "1 kHz" }      # an entry function and its rate
//!   - { function: ui_task, period: "10 ms" }
//!   - { path: "drivers/adc/**", rate: "2 kHz" }
//!   - { function: on_packet, event: true }           # runs per event: no rate in Hz
//!   - { constant: LOOP_PERIOD_US, unit: us }         # a constant of the code is the rate
//! defaults:
//!   input: { range: [0, 4095], per_count: 0.8, unit: mV }
//!   requires: { max_dead_band: "4 counts" }
//! smoothers:
//!   - match: { id: "climate.c::climate_step::air_temp_c.y" }
//!   - match: { path: "src/*.c", function: vent_tick, state: vent_ma }
//!   - match: { tag: throttle }                       # a `tauscan: tag throttle` comment
//!     input: { range: [0, 4095], per_count: 0.8, unit: mV }
//!     requires:
//!       cutoff: { min: "0.4 Hz", max: "0.6 Hz" }
//!       max_lag: "400 ms"
//!       settle: { fraction: 0.95, within: "1.5 s" }
//!       min_noise_reduction: "12 dB"
//!       max_dead_band: "3 counts"
//!   - match: { function: lamp_sample }
//!     assume: { alpha: 0.05 }                        # set at run time (calibration)
//!   - match: { function: tray_sample }
//!     assume: { window: 16 }                         # a moving average's, likewise
//! rules:
//!   integer-dead-band: warning      # error | warning | note | off
//! ```

use crate::quantity::{self, QuantityError};
use crate::units::{Hertz, Seconds};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::fmt;
use std::path::{Path, PathBuf};

pub const FILE_NAME: &str = "tauscan.yaml";

/// A spec that could not be used, with where in the file.
#[derive(Debug, Clone, PartialEq)]
pub struct SpecError {
    pub line: Option<usize>,
    pub column: Option<usize>,
    pub message: String,
}

impl fmt::Display for SpecError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match (self.line, self.column) {
            (Some(l), Some(c)) => write!(f, "{l}:{c}: {}", self.message),
            (Some(l), None) => write!(f, "{l}: {}", self.message),
            _ => write!(f, "{}", self.message),
        }
    }
}

impl std::error::Error for SpecError {}

#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Severity {
    Note,
    Warning,
    Error,
}

impl Severity {
    pub fn name(self) -> &'static str {
        match self {
            Severity::Note => "note",
            Severity::Warning => "warning",
            Severity::Error => "error",
        }
    }
    pub fn parse(text: &str) -> Option<Severity> {
        match text {
            "note" => Some(Severity::Note),
            "warning" => Some(Severity::Warning),
            "error" => Some(Severity::Error),
            _ => None,
        }
    }
}

/// A rule's setting in the spec: a severity, or off.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RuleSetting {
    Off,
    Severity(Severity),
}

/// How a spec entry picks its smoothers.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Matcher {
    pub id: Option<String>,
    /// A glob over the file path relative to the scan root.
    pub path: Option<String>,
    pub function: Option<String>,
    pub state: Option<String>,
    /// A `tauscan: tag NAME` comment on or just above the update.
    pub tag: Option<String>,
}

#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Requirements {
    pub cutoff_min: Option<Hertz>,
    pub cutoff_max: Option<Hertz>,
    pub max_lag: Option<Seconds>,
    /// Fraction of a step (0..1) and the time within which it must be reached.
    pub settle: Option<(f64, Seconds)>,
    /// Minimum noise reduction as an amplitude ratio (output over input), so smaller is
    /// stronger: "12 dB" is 0.251.
    pub max_noise_ratio: Option<f64>,
    /// Maximum dead band in counts.
    pub max_dead_band: Option<f64>,
}

impl Requirements {
    pub fn is_empty(&self) -> bool {
        *self == Requirements::default()
    }

    /// `self` with the fields it does not set taken from `defaults`.
    pub fn or(self, defaults: &Requirements) -> Requirements {
        Requirements {
            cutoff_min: self.cutoff_min.or(defaults.cutoff_min),
            cutoff_max: self.cutoff_max.or(defaults.cutoff_max),
            max_lag: self.max_lag.or(defaults.max_lag),
            settle: self.settle.or(defaults.settle),
            max_noise_ratio: self.max_noise_ratio.or(defaults.max_noise_ratio),
            max_dead_band: self.max_dead_band.or(defaults.max_dead_band),
        }
    }
}

/// The input of a smoother: the range it takes and what one count is worth.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Input {
    pub range: Option<(f64, f64)>,
    pub per_count: Option<f64>,
    pub unit: Option<String>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct SmootherSpec {
    pub matcher: Matcher,
    pub input: Input,
    pub requires: Requirements,
    /// What the product runs with where the code does not show it.
    pub assume: Assume,
    /// Line of the entry in the spec file, for findings about the entry itself.
    pub line: usize,
}

/// A coefficient or window the spec states for smoothers whose code sets it at run time
/// (a calibration read from flash, a value received over a bus): the figures and the
/// requirements are then computed from it, and the output says it was assumed.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Assume {
    /// The weight of the new input, in (0, 1].
    pub alpha: Option<f64>,
    /// The number of samples a moving average sums.
    pub window: Option<u32>,
}

/// Where a rate is declared.
#[derive(Debug, Clone, PartialEq)]
pub enum RateScope {
    /// An entry function (ISR, task): the rate propagates to everything it calls.
    Function(String),
    /// Every function in files matching a glob.
    Path(String),
    /// A constant of the code that states the rate: every smoother whose coefficient is
    /// derived from it runs at the rate it gives (its value in `unit`).
    Constant { name: String, unit: String },
}

#[derive(Debug, Clone, PartialEq)]
pub struct RateSpec {
    pub scope: RateScope,
    /// None for an event-driven entry.
    pub rate: Option<Hertz>,
    pub line: usize,
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Spec {
    /// The file it was read from, if any.
    pub path: Option<PathBuf>,
    pub include: Vec<String>,
    pub exclude: Vec<String>,
    /// A JSON compilation database (relative to the spec's folder) whose files and flags
    /// the scan takes.
    pub compile_commands: Option<String>,
    pub defines: BTreeMap<String, String>,
    pub int_bits: Option<u8>,
    pub fpu: Option<bool>,
    pub rates: Vec<RateSpec>,
    pub defaults: Requirements,
    pub default_input: Input,
    pub smoothers: Vec<SmootherSpec>,
    pub rules: BTreeMap<String, RuleSetting>,
}

// The raw, serde-shaped form. Unknown keys are errors everywhere.

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawSpec {
    #[serde(default)]
    scan: RawScan,
    #[serde(default)]
    defines: BTreeMap<String, serde_norway::Value>,
    #[serde(default)]
    target: RawTarget,
    #[serde(default)]
    rates: Vec<RawRate>,
    #[serde(default)]
    defaults: RawDefaults,
    #[serde(default)]
    smoothers: Vec<RawSmoother>,
    #[serde(default)]
    rules: BTreeMap<String, String>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawScan {
    #[serde(default)]
    include: Vec<String>,
    #[serde(default)]
    exclude: Vec<String>,
    compile_commands: Option<String>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawTarget {
    int_bits: Option<u8>,
    fpu: Option<bool>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRate {
    function: Option<String>,
    path: Option<String>,
    constant: Option<String>,
    unit: Option<String>,
    rate: Option<String>,
    period: Option<String>,
    #[serde(default)]
    event: bool,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawDefaults {
    #[serde(default)]
    requires: RawRequirements,
    #[serde(default)]
    input: RawInput,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSmoother {
    #[serde(rename = "match")]
    matcher: RawMatcher,
    #[serde(default)]
    input: RawInput,
    #[serde(default)]
    requires: RawRequirements,
    #[serde(default)]
    assume: RawAssume,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawAssume {
    alpha: Option<f64>,
    window: Option<u32>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawMatcher {
    id: Option<String>,
    path: Option<String>,
    function: Option<String>,
    state: Option<String>,
    tag: Option<String>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawInput {
    range: Option<(f64, f64)>,
    per_count: Option<f64>,
    unit: Option<String>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawRequirements {
    cutoff: Option<RawRange>,
    max_lag: Option<String>,
    settle: Option<RawSettle>,
    min_noise_reduction: Option<serde_norway::Value>,
    max_dead_band: Option<serde_norway::Value>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRange {
    min: Option<String>,
    max: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSettle {
    fraction: serde_norway::Value,
    within: String,
}

/// Every key the spec knows, for "did you mean".
const KNOWN_KEYS: &[&str] = &[
    "scan",
    "include",
    "exclude",
    "defines",
    "target",
    "int_bits",
    "fpu",
    "rates",
    "function",
    "path",
    "rate",
    "period",
    "constant",
    "event",
    "defaults",
    "requires",
    "input",
    "smoothers",
    "match",
    "id",
    "state",
    "tag",
    "range",
    "per_count",
    "unit",
    "cutoff",
    "min",
    "max",
    "max_lag",
    "settle",
    "fraction",
    "within",
    "min_noise_reduction",
    "max_dead_band",
    "assume",
    "alpha",
    "window",
    "rules",
];

/// The nearest known key to a misspelt one, when it is near enough to be a typo.
pub fn nearest_key(key: &str) -> Option<&'static str> {
    KNOWN_KEYS
        .iter()
        .map(|k| (strsim::damerau_levenshtein(key, k), *k))
        .filter(|(d, k)| *d <= 2.max(k.len() / 3))
        .min()
        .map(|(_, k)| k)
}

/// Where `needle` first appears at or after `from_line` (1-based), as line and column.
fn locate(text: &str, needle: &str, from_line: usize) -> (Option<usize>, Option<usize>) {
    for (i, line) in text.lines().enumerate().skip(from_line.saturating_sub(1)) {
        if let Some(col) = line.find(needle) {
            return (Some(i + 1), Some(col + 1));
        }
    }
    (None, None)
}

struct Reader<'a> {
    text: &'a str,
}

impl Reader<'_> {
    fn error_at(&self, needle: &str, from_line: usize, message: String) -> SpecError {
        let (line, column) = locate(self.text, needle, from_line);
        SpecError {
            line,
            column,
            message,
        }
    }

    /// Where a key's value is: the first line from `from_line` on that holds both the key
    /// and the value (the same text can stand under several keys), else the value alone.
    fn error_at_key(&self, key: &str, value: &str, from_line: usize, message: String) -> SpecError {
        let last = key.rsplit('.').next().unwrap_or(key);
        for (i, line) in self
            .text
            .lines()
            .enumerate()
            .skip(from_line.saturating_sub(1))
        {
            if let (Some(k), Some(v)) = (line.find(&format!("{last}:")), line.rfind(value)) {
                if v > k {
                    return SpecError {
                        line: Some(i + 1),
                        column: Some(v + 1),
                        message,
                    };
                }
            }
        }
        self.error_at(value, from_line, message)
    }

    fn quantity<T>(
        &self,
        text: &str,
        key: &str,
        from_line: usize,
        parse: fn(&str) -> Result<T, QuantityError>,
    ) -> Result<T, SpecError> {
        parse(text).map_err(|e| self.error_at_key(key, text, from_line, format!("{key}: {e}")))
    }

    fn requirements(
        &self,
        raw: &RawRequirements,
        from_line: usize,
    ) -> Result<Requirements, SpecError> {
        let mut req = Requirements::default();
        if let Some(range) = &raw.cutoff {
            if let Some(min) = &range.min {
                req.cutoff_min =
                    Some(self.quantity(min, "cutoff.min", from_line, quantity::parse_frequency)?);
            }
            if let Some(max) = &range.max {
                req.cutoff_max =
                    Some(self.quantity(max, "cutoff.max", from_line, quantity::parse_frequency)?);
            }
            if let (Some(lo), Some(hi)) = (req.cutoff_min, req.cutoff_max) {
                if lo.0 > hi.0 {
                    let needle = range.min.as_deref().unwrap_or("cutoff");
                    return Err(self.error_at_key(
                        "min",
                        needle,
                        from_line,
                        format!(
                            "cutoff: min ({}) is above max ({})",
                            range.min.as_deref().unwrap_or("?"),
                            range.max.as_deref().unwrap_or("?")
                        ),
                    ));
                }
            }
        }
        if let Some(lag) = &raw.max_lag {
            req.max_lag =
                Some(self.quantity(lag, "max_lag", from_line, quantity::parse_duration)?);
        }
        if let Some(settle) = &raw.settle {
            let fraction = match &settle.fraction {
                serde_norway::Value::Number(n) => n.as_f64(),
                serde_norway::Value::String(s) => quantity::parse_fraction(s).ok(),
                _ => None,
            };
            let fraction = fraction.filter(|f| *f > 0.0 && *f < 1.0).ok_or_else(|| {
                self.error_at(
                    "fraction",
                    from_line,
                    "settle.fraction: want a fraction of the step between 0 and 1, such as 0.95 or \"95 %\"".into(),
                )
            })?;
            let within = self.quantity(
                &settle.within,
                "settle.within",
                from_line,
                quantity::parse_duration,
            )?;
            req.settle = Some((fraction, within));
        }
        if let Some(value) = &raw.min_noise_reduction {
            let text = value_text(value);
            let ratio = quantity::parse_reduction(&text).map_err(|e| {
                self.error_at(&text, from_line, format!("min_noise_reduction: {e}"))
            })?;
            req.max_noise_ratio = Some(ratio);
        }
        if let Some(value) = &raw.max_dead_band {
            let text = value_text(value);
            let counts = quantity::parse_counts(&text).map_err(|e| {
                self.error_at_key(
                    "max_dead_band",
                    &text,
                    from_line,
                    format!("max_dead_band: {e}"),
                )
            })?;
            req.max_dead_band = Some(counts);
        }
        Ok(req)
    }

    fn input(&self, raw: &RawInput, from_line: usize) -> Result<Input, SpecError> {
        if let Some((lo, hi)) = raw.range {
            if !(lo.is_finite() && hi.is_finite()) || lo >= hi {
                return Err(self.error_at(
                    "range",
                    from_line,
                    format!("input.range: [{lo}, {hi}] is not a range from low to high"),
                ));
            }
        }
        if let Some(p) = raw.per_count {
            if !(p.is_finite() && p > 0.0) {
                return Err(self.error_at(
                    "per_count",
                    from_line,
                    "input.per_count must be above zero".into(),
                ));
            }
        }
        Ok(Input {
            range: raw.range,
            per_count: raw.per_count,
            unit: raw.unit.clone(),
        })
    }

    fn glob(&self, pattern: &str, key: &str, from_line: usize) -> Result<String, SpecError> {
        globset::Glob::new(pattern)
            .map(|_| pattern.to_string())
            .map_err(|e| {
                self.error_at(
                    pattern,
                    from_line,
                    format!("{key}: the glob `{pattern}` does not compile: {e}"),
                )
            })
    }
}

fn value_text(v: &serde_norway::Value) -> String {
    match v {
        serde_norway::Value::String(s) => s.clone(),
        serde_norway::Value::Number(n) => n.to_string(),
        serde_norway::Value::Bool(b) => b.to_string(),
        _ => String::new(),
    }
}

/// Rule ids under `rules:` that no rule has: an error at the id's line, with the nearest
/// id, so a misspelt rule is not silently left on.
pub fn check_rule_ids(spec: &Spec, text: &str, known: &[&str]) -> Result<(), SpecError> {
    for id in spec.rules.keys() {
        if known.contains(&id.as_str()) {
            continue;
        }
        let near = known
            .iter()
            .map(|k| (strsim::damerau_levenshtein(id, k), *k))
            .min()
            .map(|(_, k)| k)
            .unwrap_or("");
        let (line, column) = locate(text, id, locate(text, "rules:", 1).0.unwrap_or(1));
        return Err(SpecError {
            line,
            column,
            message: format!("rules: no rule `{id}` (did you mean `{near}`? `tauscan explain --list` lists them)"),
        });
    }
    Ok(())
}

/// The 1-based line of the `index`-th item under the top-level key `section`.
fn item_line(text: &str, section: &str, index: usize) -> usize {
    let (start, _) = locate(text, &format!("{section}:"), 1);
    let start = start.unwrap_or(1);
    let mut seen = 0;
    for (i, line) in text.lines().enumerate().skip(start) {
        let trimmed = line.trim_start();
        if !line.starts_with(' ')
            && !line.starts_with('-')
            && !trimmed.is_empty()
            && !trimmed.starts_with('#')
        {
            break;
        }
        if trimmed.starts_with("- ") || trimmed == "-" {
            if seen == index {
                return i + 1;
            }
            seen += 1;
        }
    }
    start
}

/// A `constant` rate entry takes its rate from the code: it gives no `rate`, `period` or
/// `event` of its own.
fn spec_constant_rate_check(r: &RawRate, line: usize) -> Result<(), SpecError> {
    if r.rate.is_some() || r.period.is_some() || r.event {
        return Err(SpecError {
            line: Some(line),
            column: None,
            message: "rates: a `constant` entry takes its rate from the constant's value; give it a `unit`, not a `rate` or `period`".into(),
        });
    }
    Ok(())
}

/// Deeper nesting than this is no spec a person writes; the YAML reader would take a very
/// long time over it, so it is refused before reading.
const MAX_NESTING: usize = 64;
/// Larger than this is no spec either.
const MAX_SPEC_BYTES: usize = 4 << 20;

/// Refuses a text nested deeper than `MAX_NESTING` (flow brackets or indentation).
fn check_shape(text: &str) -> Result<(), SpecError> {
    if text.len() > MAX_SPEC_BYTES {
        return Err(SpecError {
            line: None,
            column: None,
            message: format!("the spec is larger than {} MiB", MAX_SPEC_BYTES >> 20),
        });
    }
    let mut depth = 0usize;
    for (i, line) in text.lines().enumerate() {
        let indent = line.len() - line.trim_start_matches([' ', '-']).len();
        let mut quote: Option<char> = None;
        for (col, c) in line.chars().enumerate() {
            match (quote, c) {
                (Some(q), c) if c == q => quote = None,
                (Some(_), _) => {}
                (None, '"') | (None, '\'') => quote = Some(c),
                (None, '#') => break,
                (None, '[') | (None, '{') => depth += 1,
                (None, ']') | (None, '}') => depth = depth.saturating_sub(1),
                _ => {}
            }
            if depth > MAX_NESTING || indent / 2 > MAX_NESTING {
                return Err(SpecError {
                    line: Some(i + 1),
                    column: Some(col + 1),
                    message: format!("the spec nests deeper than {MAX_NESTING} levels"),
                });
            }
        }
    }
    Ok(())
}

/// Reads and validates a spec from its text.
pub fn from_str(text: &str) -> Result<Spec, SpecError> {
    check_shape(text)?;
    let raw: RawSpec = if text.trim().is_empty() {
        RawSpec::default()
    } else {
        serde_norway::from_str(text).map_err(|e| {
            let location = e.location();
            let mut message = e.to_string();
            // serde names the unknown key; add the nearest one the spec knows.
            if let Some(rest) = message.split("unknown field `").nth(1) {
                if let Some(key) = rest.split('`').next() {
                    // The keys valid at this place, as serde lists them.
                    let expected: Vec<&str> = rest
                        .split("expected ")
                        .nth(1)
                        .map(|list| list.split('`').skip(1).step_by(2).collect())
                        .unwrap_or_default();
                    let near_here = expected
                        .iter()
                        .map(|k| (strsim::damerau_levenshtein(key, k), *k))
                        .filter(|(d, k)| *d <= 2.max(k.len() / 3))
                        .min()
                        .map(|(_, k)| k);
                    message = match (near_here, nearest_key(key)) {
                        (Some(near), _) => format!("unknown key `{key}` (did you mean `{near}`?)"),
                        (None, Some(near)) if near == key => format!(
                            "`{key}` does not belong here (valid here: {})",
                            expected.join(", ")
                        ),
                        (None, Some(near)) => {
                            format!("unknown key `{key}` (did you mean `{near}`?)")
                        }
                        (None, None) => format!("unknown key `{key}`"),
                    };
                }
            }
            // The location is already in the error's own text; keep the message plain.
            if let Some(pos) = message.find(" at line ") {
                message.truncate(pos);
            }
            SpecError {
                line: location.as_ref().map(|l| l.line()),
                column: location.as_ref().map(|l| l.column()),
                message,
            }
        })?
    };
    let reader = Reader { text };
    let mut spec = Spec {
        include: Vec::new(),
        exclude: Vec::new(),
        ..Spec::default()
    };
    for pattern in &raw.scan.include {
        spec.include.push(reader.glob(pattern, "scan.include", 1)?);
    }
    for pattern in &raw.scan.exclude {
        spec.exclude.push(reader.glob(pattern, "scan.exclude", 1)?);
    }
    spec.compile_commands = raw.scan.compile_commands.clone();
    for (name, value) in &raw.defines {
        let valid = !name.is_empty()
            && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
            && !name.starts_with(|c: char| c.is_ascii_digit());
        if !valid {
            return Err(reader.error_at(
                name,
                1,
                format!("defines: `{name}` is not a C identifier"),
            ));
        }
        let text = match value {
            serde_norway::Value::Null => "1".to_string(),
            serde_norway::Value::Bool(true) => "1".to_string(),
            serde_norway::Value::Bool(false) => "0".to_string(),
            other => value_text(other),
        };
        spec.defines.insert(name.clone(), text);
    }
    if let Some(bits) = raw.target.int_bits {
        if bits != 16 && bits != 32 {
            return Err(reader.error_at(
                "int_bits",
                1,
                format!("target.int_bits: {bits} is not 16 or 32"),
            ));
        }
        spec.int_bits = Some(bits);
    }
    spec.fpu = raw.target.fpu;
    for (i, r) in raw.rates.iter().enumerate() {
        let line = item_line(text, "rates", i);
        let scope = match (&r.function, &r.path, &r.constant) {
            (Some(f), None, None) => RateScope::Function(f.clone()),
            (None, Some(p), None) => RateScope::Path(reader.glob(p, "rates.path", line)?),
            (None, None, Some(c)) => {
                let unit = r.unit.clone().unwrap_or_else(|| "Hz".into());
                if quantity::parse_rate(&format!("1 {unit}")).is_err() {
                    return Err(reader.error_at(
                        &unit,
                        line,
                        format!("rates.unit: `{unit}` is not Hz, kHz, s, ms or us"),
                    ));
                }
                spec_constant_rate_check(r, line)?;
                RateScope::Constant {
                    name: c.clone(),
                    unit,
                }
            }
            _ => {
                return Err(SpecError {
                    line: Some(line),
                    column: None,
                    message: "rates: each entry names one `function`, `path` or `constant`".into(),
                })
            }
        };
        if let RateScope::Constant { .. } = scope {
            spec.rates.push(RateSpec {
                scope,
                rate: None,
                line,
            });
            continue;
        }
        let rate = match (&r.rate, &r.period, r.event) {
            (Some(text), None, false) => {
                Some(reader.quantity(text, "rate", line, quantity::parse_rate)?)
            }
            (None, Some(text), false) => {
                let period = reader.quantity(text, "period", line, quantity::parse_duration)?;
                if period.0 <= 0.0 {
                    return Err(reader.error_at(text, line, "period: must be above zero".into()));
                }
                Some(Hertz(1.0 / period.0))
            }
            (None, None, true) => None,
            _ => {
                return Err(SpecError {
                    line: Some(line),
                    column: None,
                    message: "rates: each entry gives one of `rate`, `period` or `event: true`"
                        .into(),
                })
            }
        };
        spec.rates.push(RateSpec { scope, rate, line });
    }
    let defaults_line = locate(text, "defaults:", 1).0.unwrap_or(1);
    spec.defaults = reader.requirements(&raw.defaults.requires, defaults_line)?;
    spec.default_input = reader.input(&raw.defaults.input, defaults_line)?;
    for (i, s) in raw.smoothers.iter().enumerate() {
        let line = item_line(text, "smoothers", i);
        let m = &s.matcher;
        if m.id.is_none()
            && m.path.is_none()
            && m.function.is_none()
            && m.state.is_none()
            && m.tag.is_none()
        {
            return Err(SpecError {
                line: Some(line),
                column: None,
                message: "smoothers: `match` needs at least one of id, path, function, state, tag"
                    .into(),
            });
        }
        let path = match &m.path {
            Some(p) => Some(reader.glob(p, "match.path", line)?),
            None => None,
        };
        let assume = Assume {
            alpha: s.assume.alpha,
            window: s.assume.window,
        };
        if assume.alpha.is_some_and(|a| !(a > 0.0 && a <= 1.0)) {
            return Err(SpecError {
                line: Some(line),
                column: None,
                message: "smoothers: `assume.alpha` must be in (0, 1]".into(),
            });
        }
        if assume.window == Some(0) {
            return Err(SpecError {
                line: Some(line),
                column: None,
                message: "smoothers: `assume.window` must be at least 1".into(),
            });
        }
        spec.smoothers.push(SmootherSpec {
            matcher: Matcher {
                id: m.id.clone(),
                path,
                function: m.function.clone(),
                state: m.state.clone(),
                tag: m.tag.clone(),
            },
            input: reader.input(&s.input, line)?,
            requires: reader.requirements(&s.requires, line)?,
            assume,
            line,
        });
    }
    for (rule, setting) in &raw.rules {
        let value = match setting.as_str() {
            "off" => RuleSetting::Off,
            other => match Severity::parse(other) {
                Some(s) => RuleSetting::Severity(s),
                None => {
                    return Err(reader.error_at(
                        &format!("{rule}:"),
                        1,
                        format!("rules.{rule}: `{other}` is not error, warning, note or off"),
                    ))
                }
            },
        };
        spec.rules.insert(rule.clone(), value);
    }
    Ok(spec)
}

/// The spec file for a scan root: `tauscan.yaml` in it or the nearest folder above.
pub fn find(root: &Path) -> Option<PathBuf> {
    let start = root.canonicalize().ok()?;
    let mut dir = if start.is_dir() {
        Some(start.as_path())
    } else {
        start.parent()
    };
    while let Some(d) = dir {
        let candidate = d.join(FILE_NAME);
        if candidate.is_file() {
            return Some(candidate);
        }
        dir = d.parent();
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_full_spec_reads() {
        let text = r#"
scan: { exclude: ["vendor/**"] }
defines: { FAST: 1 }
target: { int_bits: 16, fpu: false }
rates:
  - { function: control_isr, rate: "1 kHz" }
  - { function: ui_task, period: "10 ms" }
  - { function: on_packet, event: true }
defaults:
  requires: { max_dead_band: "4 counts" }
smoothers:
  - match: { function: vent_tick, state: y }
    input: { range: [0, 4095], per_count: 0.8, unit: mV }
    requires:
      cutoff: { min: "0.4 Hz", max: "0.6 Hz" }
      max_lag: "400 ms"
      settle: { fraction: 0.95, within: "1.5 s" }
      min_noise_reduction: "12 dB"
      max_dead_band: 3
rules:
  integer-dead-band: warning
  float-state-absorbs-updates: off
"#;
        let spec = from_str(text).unwrap();
        assert_eq!(spec.int_bits, Some(16));
        assert_eq!(spec.rates.len(), 3);
        assert_eq!(spec.rates[1].rate, Some(Hertz(100.0)));
        assert_eq!(spec.rates[2].rate, None);
        assert_eq!(spec.rates[1].line, 7);
        let s = &spec.smoothers[0];
        assert_eq!(s.line, 12);
        assert_eq!(s.requires.cutoff_min, Some(Hertz(0.4)));
        assert_eq!(s.requires.max_lag, Some(Seconds(0.4)));
        assert_eq!(s.requires.settle, Some((0.95, Seconds(1.5))));
        let ratio = s.requires.max_noise_ratio.unwrap();
        assert!((ratio - 10f64.powf(-12.0 / 20.0)).abs() < 1e-12);
        assert_eq!(s.requires.max_dead_band, Some(3.0));
        assert_eq!(spec.defaults.max_dead_band, Some(4.0));
        assert_eq!(spec.rules["float-state-absorbs-updates"], RuleSetting::Off);
    }

    #[test]
    fn a_misspelt_key_names_the_nearest_one_and_its_place() {
        let text = "smoothers:\n  - match: { function: f }\n    requires:\n      cutof: { min: \"1 Hz\" }\n";
        let e = from_str(text).unwrap_err();
        assert!(e.message.contains("did you mean `cutoff`"), "{e}");
        assert_eq!(e.line, Some(4));
        assert!(e.column.is_some());
    }

    #[test]
    fn wrong_units_and_inverted_ranges_are_errors_with_places() {
        let e = from_str(
            "smoothers:\n  - match: { state: y }\n    requires: { max_lag: \"5 furlongs\" }\n",
        )
        .unwrap_err();
        assert_eq!(e.line, Some(3));
        assert!(e.message.contains("max_lag"), "{e}");
        let e = from_str("smoothers:\n  - match: { state: y }\n    requires:\n      cutoff: { min: \"9 Hz\", max: \"1 Hz\" }\n").unwrap_err();
        assert!(e.message.contains("above max"), "{e}");
        assert_eq!(e.line, Some(4));
        let e = from_str("scan: { exclude: [\"src/[\"] }\n").unwrap_err();
        assert!(e.message.contains("does not compile"), "{e}");
        let e = from_str("rules: { integer-dead-band: loud }\n").unwrap_err();
        assert!(e.message.contains("loud"), "{e}");
        let e = from_str("rates:\n  - { function: isr }\n").unwrap_err();
        assert_eq!(e.line, Some(2));
    }

    #[test]
    fn a_constant_can_be_declared_the_rate() {
        let spec = from_str("rates:\n  - { constant: LOOP_PERIOD_US, unit: us }\n").unwrap();
        assert_eq!(
            spec.rates[0].scope,
            RateScope::Constant {
                name: "LOOP_PERIOD_US".into(),
                unit: "us".into()
            }
        );
        assert!(from_str("rates:\n  - { constant: X, unit: furlongs }\n").is_err());
        assert!(from_str("rates:\n  - { constant: X, rate: \"1 kHz\" }\n").is_err());
        // A bare number could be a rate or a period: it needs its unit.
        let bare = from_str("rates:\n  - { function: f, rate: 10 }\n");
        assert!(
            bare.as_ref()
                .is_err_and(|e| e.to_string().contains("with its unit")),
            "{bare:?}"
        );
    }

    #[test]
    fn the_commented_example_uses_every_key_and_reads() {
        let text = include_str!("../fixtures/spec-example/tauscan.yaml");
        let spec = from_str(text).unwrap();
        assert_eq!(spec.rates.len(), 5);
        assert_eq!(spec.smoothers.len(), 5);
        for key in KNOWN_KEYS {
            assert!(
                text.contains(&format!("{key}:")),
                "the example lacks `{key}`"
            );
        }
    }

    #[test]
    fn hostile_shapes_are_refused_quickly() {
        let deep = format!(
            "smoothers: {}{}\n",
            "[".repeat(100_000),
            "]".repeat(100_000)
        );
        let e = from_str(&deep).unwrap_err();
        assert!(e.message.contains("nests deeper"), "{e}");
        // An alias bomb stops at the reader's repetition limit.
        let mut bomb = String::from(
            "defines:\n  A: &a [\"l\",\"l\",\"l\",\"l\",\"l\",\"l\",\"l\",\"l\",\"l\"]\n",
        );
        let mut prev = 'a';
        for c in 'b'..='i' {
            let refs = vec![format!("*{prev}"); 9].join(",");
            bomb.push_str(&format!("  {}: &{c} [{refs}]\n", c.to_ascii_uppercase()));
            prev = c;
        }
        assert!(from_str(&bomb).is_err());
    }

    #[test]
    fn empty_spec_is_valid() {
        assert_eq!(from_str("").unwrap(), Spec::default());
        assert_eq!(from_str("# nothing yet\n").unwrap(), Spec::default());
    }
}

//! The design law behind a coefficient computed at run time.
//!
//! Flight and motor controllers compute most gains when they start or while they run, from
//! a cutoff or a time constant in their configuration and the loop's period:
//! `omega / (omega + 1)` with `omega = 2 pi fc dt`, `dt / (rc + dt)`, `1 - exp(-dt / tau)`,
//! `2 / (N + 1)`. Alpha then has no one value, but the design does: the cutoff or the time
//! constant the law keeps whatever the period.
//!
//! The law is found by probing, not by matching text. The coefficient is evaluated with the
//! constant evaluator, which follows locals, init calls, helper functions and fields; each
//! run-time quantity it cannot know (a parameter, a configuration field, a measured `dt`)
//! is assumed a value and the evaluation run again, up to `MAX_LEAVES` quantities. Then
//! alpha is a function of those quantities, and each law is a line through the origin in
//! its own coordinate: `x = alpha / (1 - alpha)` for the RC law, `x = -ln(1 - alpha)` for
//! the exponential law, `x = alpha` for the forward-Euler law, each `x = dt / tau`. The law
//! whose `x` doubles when the period doubles is the one written; the quantity that `x`
//! follows in proportion is the cutoff, the one it follows inversely is the time constant.
//!
//! Every evaluation is one of the evaluator's (bounded by its step and depth limits) and
//! there are at most about forty of them per coefficient.

use super::judge::{alpha_of, probe_atoms, Reading};
use crate::context;
use crate::eval::num::Num;
use crate::ir::FileId;
use std::collections::HashMap;

/// Most run-time quantities a coefficient may be probed over.
const MAX_LEAVES: usize = 6;
/// Relative agreement for a law and for a proportion: wide enough for float arithmetic in
/// the code, narrow enough to tell the laws apart at the alphas probed (their coordinates
/// differ by over 10 % there).
const AGREE: f64 = 1e-3;

/// How the coefficient follows its quantities.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Law {
    /// `alpha = x / (1 + x)`, `x = dt / tau`: `dt / (dt + rc)`, `omega / (omega + 1)`.
    Rc,
    /// `alpha = 1 - exp(-x)`.
    Exponential,
    /// `alpha = x` (forward Euler): `dt / tau`, `2 pi fc dt`.
    Euler,
    /// `alpha = 2 / (N + 1)`: the smoother matched to a moving average of N samples.
    Span,
}

impl Law {
    pub fn name(self) -> &'static str {
        match self {
            Law::Rc => "rc",
            Law::Exponential => "exponential",
            Law::Euler => "euler",
            Law::Span => "span",
        }
    }

    /// The law's coordinate of an alpha: linear in the period (or, for `Span`, the window).
    fn coordinate(self, alpha: f64) -> f64 {
        match self {
            Law::Rc => alpha / (1.0 - alpha),
            Law::Exponential => -(1.0 - alpha).ln(),
            Law::Euler => alpha,
            Law::Span => 2.0 / alpha - 1.0,
        }
    }
}

/// A run-time quantity the coefficient depends on.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Quantity {
    /// Its C text where the evaluator met it (`cfg->cutoff_hz`, `dT`).
    pub text: String,
    /// Why it has no one value (`reached through a parameter of pid_apply()`).
    pub reason: String,
    /// The step of the derivation where it was met (an init call's argument, a write).
    pub met_at: Option<(FileId, u32)>,
    /// A constant the code gives it (a reset function, a defaults write), with where.
    pub default: Option<(f64, FileId, u32)>,
    /// For a parameter: the argument every call of its function passes (the caller's
    /// configuration field), with the first such call.
    pub argument: Option<(String, FileId, u32)>,
    param_of: Option<crate::index::FuncRef>,
}

impl Quantity {
    /// The quantity as the code that sets it names it: the argument of the calls for a
    /// parameter they all pass the same way.
    pub fn name(&self) -> &str {
        self.argument
            .as_ref()
            .map(|(a, _, _)| a.as_str())
            .unwrap_or(&self.text)
    }
}

/// What the design fixes.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub enum Figure {
    /// The cutoff is a constant of the code (the time constant is `1 / (2 pi hz)`).
    Cutoff { hz: f64 },
    /// The cutoff in Hz is `scale` times the quantity `leaf`.
    CutoffOf { leaf: usize, scale: f64 },
    /// The time constant in seconds is `scale` times the quantity `leaf`.
    TimeConstantOf { leaf: usize, scale: f64 },
    /// The matched window in samples is `scale` times the quantity `leaf`.
    WindowOf { leaf: usize, scale: f64 },
    /// The law and the period only: the rest depends on several quantities.
    Several,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Design {
    pub law: Law,
    /// Which quantity is the period, and the factor from its unit to seconds.
    pub period: Option<(usize, f64)>,
    /// A rate given instead of a period (`samp_rate`): the period is its inverse.
    pub period_is_rate: bool,
    pub figure: Figure,
    pub quantities: Vec<Quantity>,
    /// Alpha per update with every quantity at its default, when each has one.
    pub alpha_at_defaults: Option<f64>,
}

impl Design {
    /// The cutoff in Hz the design gives with every quantity at its default, or always.
    pub fn cutoff_hz(&self) -> Option<f64> {
        match &self.figure {
            Figure::Cutoff { hz } => Some(*hz),
            Figure::CutoffOf { leaf, scale } => self.default_of(*leaf).map(|v| scale * v),
            Figure::TimeConstantOf { leaf, scale } => self
                .default_of(*leaf)
                .map(|v| 1.0 / (2.0 * std::f64::consts::PI * scale * v)),
            _ => None,
        }
    }

    fn default_of(&self, leaf: usize) -> Option<f64> {
        self.quantities
            .get(leaf)
            .and_then(|q| q.default.map(|(v, _, _)| v))
    }

    /// What the design fixes, in a few words for a table column (`fc 0.04 Hz`,
    /// `fc = cfg->cutoff_hz`), when it fixes one thing.
    pub fn brief(&self) -> Option<String> {
        let name = |i: usize| self.quantities.get(i).map(|q| q.name().to_string());
        match &self.figure {
            Figure::Cutoff { hz } => Some(format!("fc {} Hz", short(*hz))),
            Figure::CutoffOf { leaf, .. } => name(*leaf).map(|n| format!("fc = {n}")),
            Figure::TimeConstantOf { leaf, .. } => name(*leaf).map(|n| format!("tau = {n}")),
            Figure::WindowOf { leaf, .. } => name(*leaf).map(|n| format!("N = {n}")),
            Figure::Several => None,
        }
    }

    /// The design in words: `cutoff = `cfg->cutoff_hz` Hz at the period `dT` s (rc law)`.
    pub fn describe(&self) -> String {
        let quantity = |i: usize| {
            self.quantities
                .get(i)
                .map(|q| format!("`{}`", q.name()))
                .unwrap_or_else(|| "?".into())
        };
        // A multiple of a quantity in the unit the multiple names: `tau_ms` ms, not
        // 0.001 * `tau_ms` s.
        let scaled = |scale: f64, leaf: usize, units: &[(f64, &str)]| match units
            .iter()
            .find(|(u, _)| agree(scale, *u))
        {
            Some((_, unit)) => format!("{} {unit}", quantity(leaf)),
            None => format!("{} * {} {}", short(scale), quantity(leaf), units[0].1),
        };
        let figure = match &self.figure {
            Figure::Cutoff { hz } => format!(
                "cutoff {} Hz (time constant {} s)",
                short(*hz),
                short(1.0 / (2.0 * std::f64::consts::PI * hz))
            ),
            Figure::CutoffOf { leaf, scale } => format!(
                "cutoff = {}",
                scaled(*scale, *leaf, &[(1.0, "Hz"), (1e3, "kHz")])
            ),
            Figure::TimeConstantOf { leaf, scale } => format!(
                "time constant = {}",
                scaled(*scale, *leaf, &[(1.0, "s"), (1e-3, "ms"), (1e-6, "us")])
            ),
            Figure::WindowOf { leaf, scale } => format!(
                "matched to a window of {}",
                scaled(*scale, *leaf, &[(1.0, "samples")])
            ),
            Figure::Several => "cutoff set by several quantities".into(),
        };
        let period = match self.period {
            Some((i, _)) if self.period_is_rate => format!(" at the rate {}", quantity(i)),
            Some((i, _)) => format!(" at the period {}", quantity(i)),
            None => String::new(),
        };
        format!("{figure}{period} ({} law)", self.law.name())
    }
}

/// A number as people write it: up to six significant digits.
fn short(v: f64) -> String {
    let text = format!("{v:.6}");
    let trimmed = text.trim_end_matches('0').trim_end_matches('.');
    if trimmed == "0" || trimmed == "-0" || v.abs() >= 1e6 {
        format!("{v:.6e}")
    } else {
        trimmed.to_string()
    }
}

/// Alpha with the quantities at `values`, or why not.
enum Probe {
    Alpha(f64),
    /// A quantity not assumed yet: its text, reason and where it was met.
    Needs(Quantity),
    Fails,
}

fn probe(reading: &Reading, names: &[String], values: &[f64]) -> Probe {
    let assumed: HashMap<String, Num> = names
        .iter()
        .zip(values)
        .map(|(n, v)| (n.clone(), Num::double(*v)))
        .collect();
    let (atom_values, unknown, chain) = probe_atoms(reading, &assumed);
    if let Some(u) = unknown.first() {
        return match &u.runtime {
            Some(name) if !assumed.contains_key(name) => Probe::Needs(Quantity {
                text: name.clone(),
                reason: u.reason.clone(),
                met_at: chain
                    .iter()
                    .rev()
                    .find(|s| s.text.contains(name.as_str()))
                    .map(|s| (s.file, s.line)),
                default: None,
                argument: None,
                param_of: u.param_of,
            }),
            _ => Probe::Fails,
        };
    }
    match alpha_of(&reading.affine, &atom_values).0 {
        Some(a) if a.is_finite() => Probe::Alpha(a),
        _ => Probe::Fails,
    }
}

/// The last identifier of a place's text (`cfg->loop_dt_us` -> `loop_dt_us`).
fn last_name(text: &str) -> &str {
    let cut = text
        .rfind(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
        .map(|i| i + 1)
        .unwrap_or(0);
    let tail = &text[cut..];
    if tail.is_empty() {
        text
    } else {
        tail
    }
}

fn agree(a: f64, b: f64) -> bool {
    a.is_finite() && b.is_finite() && (a - b).abs() <= AGREE * b.abs().max(f64::MIN_POSITIVE)
}

/// The design law of a coefficient that is not a constant, when one is found.
pub fn analyse(reading: &Reading) -> Option<Design> {
    // Find the quantities, assuming 1 for each.
    let mut quantities: Vec<Quantity> = Vec::new();
    loop {
        let names: Vec<String> = quantities.iter().map(|q| q.text.clone()).collect();
        match probe(reading, &names, &vec![1.0; names.len()]) {
            Probe::Alpha(_) => break,
            Probe::Needs(q) if quantities.len() < MAX_LEAVES => quantities.push(q),
            _ => return None,
        }
    }
    if quantities.is_empty() {
        return None;
    }
    let names: Vec<String> = quantities.iter().map(|q| q.text.clone()).collect();
    let period = quantities.iter().enumerate().find_map(|(i, q)| {
        context::time_step_unit(last_name(&q.text)).map(|unit| (i, unit, false))
    });
    let period = period.or_else(|| {
        quantities.iter().enumerate().find_map(|(i, q)| {
            context::rate_unit(last_name(&q.text)).map(|unit| (i, 1.0 / unit, true))
        })
    });
    let base = vec![1.0; names.len()];
    let alpha_at = |values: &[f64]| match probe(reading, &names, values) {
        Probe::Alpha(a) => Some(a),
        _ => None,
    };
    let mut design = match period {
        Some((p, unit, is_rate)) => {
            by_period(&alpha_at, &base, p, unit, is_rate).map(|(law, figure)| Design {
                law,
                period: Some((p, if is_rate { 1.0 / unit } else { unit })),
                period_is_rate: is_rate,
                figure,
                quantities: Vec::new(),
                alpha_at_defaults: None,
            })
        }
        None => by_span(&alpha_at, &base).map(|figure| Design {
            law: Law::Span,
            period: None,
            period_is_rate: false,
            figure,
            quantities: Vec::new(),
            alpha_at_defaults: None,
        }),
    }?;
    for q in &mut quantities {
        q.argument = argument_of(reading, q);
        q.default = default_of(reading, q.name());
    }
    let defaults: Option<Vec<f64>> = quantities
        .iter()
        .map(|q| q.default.map(|(v, _, _)| v))
        .collect();
    design.alpha_at_defaults = defaults.and_then(|d| alpha_at(&d));
    design.quantities = quantities;
    Some(design)
}

/// The law and figure of a coefficient with a period (or rate) among its quantities.
fn by_period(
    alpha_at: &dyn Fn(&[f64]) -> Option<f64>,
    base: &[f64],
    p: usize,
    unit: f64,
    is_rate: bool,
) -> Option<(Law, Figure)> {
    // The period in its own unit, as the code holds it (a rate holds its inverse).
    let with_period = |values: &[f64], period: f64| -> Vec<f64> {
        let mut v = values.to_vec();
        v[p] = if is_rate { 1.0 / period } else { period };
        v
    };
    // A period where alpha is between 0.05 and 0.6, where the laws differ most: start at a
    // millisecond and move by fours.
    let seconds = |period: f64| {
        if is_rate {
            period / unit
        } else {
            period * unit
        }
    };
    let mut period = if is_rate { 1e-3 * unit } else { 1e-3 / unit };
    let mut alpha = alpha_at(&with_period(base, period))?;
    for _ in 0..40 {
        if (0.05..=0.6).contains(&alpha) {
            break;
        }
        period *= if alpha < 0.05 { 4.0 } else { 0.25 };
        alpha = alpha_at(&with_period(base, period))?;
    }
    if !(0.05..=0.6).contains(&alpha) {
        return None;
    }
    let doubled = alpha_at(&with_period(base, 2.0 * period))?;
    let halved = alpha_at(&with_period(base, 0.5 * period))?;
    let law = [Law::Rc, Law::Exponential, Law::Euler]
        .into_iter()
        .find(|law| {
            let x = law.coordinate(alpha);
            agree(law.coordinate(doubled), 2.0 * x) && agree(law.coordinate(halved), 0.5 * x)
        })?;
    // x = dt / tau: the rate of the law in radians per second.
    let omega = law.coordinate(alpha) / seconds(period);
    let mut followed: Vec<(usize, f64)> = Vec::new();
    for leaf in (0..base.len()).filter(|&i| i != p) {
        let mut values = with_period(base, period);
        values[leaf] *= 2.0;
        let moved = alpha_at(&values)?;
        if !(0.0..1.0).contains(&moved) {
            return Some((law, Figure::Several));
        }
        let ratio = law.coordinate(moved) / seconds(period) / omega;
        if agree(ratio, 1.0) {
            continue;
        }
        followed.push((leaf, ratio));
    }
    let two_pi = 2.0 * std::f64::consts::PI;
    let figure = match followed.as_slice() {
        [] => Figure::Cutoff { hz: omega / two_pi },
        [(leaf, ratio)] if agree(*ratio, 2.0) => Figure::CutoffOf {
            leaf: *leaf,
            scale: omega / two_pi / base[*leaf],
        },
        [(leaf, ratio)] if agree(*ratio, 0.5) => Figure::TimeConstantOf {
            leaf: *leaf,
            scale: 1.0 / (omega * base[*leaf]),
        },
        _ => Figure::Several,
    };
    Some((law, figure))
}

/// `alpha = 2 / (N + 1)` over one quantity N (a window the code configures).
fn by_span(alpha_at: &dyn Fn(&[f64]) -> Option<f64>, base: &[f64]) -> Option<Figure> {
    if base.len() != 1 {
        return None;
    }
    let at = |n: f64| alpha_at(&[n]);
    let (a8, a16) = (at(8.0)?, at(16.0)?);
    let (n8, n16) = (Law::Span.coordinate(a8), Law::Span.coordinate(a16));
    (agree(n16, 2.0 * n8) && n8 > 0.0).then(|| Figure::WindowOf {
        leaf: 0,
        scale: n8 / 8.0,
    })
}

/// For a parameter: the argument text every call of its function passes, at the first call.
fn argument_of(reading: &Reading, q: &Quantity) -> Option<(String, FileId, u32)> {
    let f = q.param_of?;
    let program = reading.program;
    let function = program.function(f);
    let index = function.params.iter().position(|p| p.name == q.text)?;
    let mut found: Option<(String, FileId, u32)> = None;
    for call in program
        .calls_to(&function.name)
        .filter(|c| program.resolve_call(c.caller, &c.callee) == Some(f))
        .take(64)
    {
        let text = call.args.get(index)?.to_string();
        match &found {
            None => found = Some((text, call.span.file, call.span.line)),
            Some((other, _, _)) if *other == text => {}
            Some(_) => return None,
        }
    }
    found
}

/// A constant the code gives a quantity: every plain write of a constant to the same
/// place, or to a field of the same name, agreeing.
fn default_of(reading: &Reading, text: &str) -> Option<(f64, FileId, u32)> {
    let program = reading.program;
    let field = last_name(text);
    let same_field = |target: &str| {
        target == text
            || (field.len() >= 4
                && field != text
                && (target.ends_with(&format!("->{field}"))
                    || target.ends_with(&format!(".{field}"))))
    };
    let mut found: Option<(f64, FileId, u32)> = None;
    let mut seen = 0;
    for w in program
        .all_writes()
        .filter(|w| w.op.is_none() && same_field(&w.target))
    {
        seen += 1;
        if seen > 64 {
            return None;
        }
        let mut ev = crate::eval::Evaluator::new(program);
        let scope = crate::eval::Scope::in_function(w.function);
        let Ok(v) = ev.eval(&w.value, &scope) else {
            continue;
        };
        let v = v.as_f64();
        match found {
            None => found = Some((v, w.span.file, w.span.line)),
            Some((other, _, _)) if agree(v, other) => {}
            Some(_) => return None,
        }
    }
    found
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_law_has_its_own_coordinate() {
        // Source: DOMAIN.md, the first-order designs: dt / (dt + tau) = x / (1 + x),
        // 1 - exp(-x), forward Euler x, and 2 / (N + 1) for a matched window.
        let x: f64 = 0.25;
        assert!((Law::Rc.coordinate(x / (1.0 + x)) - x).abs() < 1e-12);
        assert!((Law::Exponential.coordinate(1.0 - (-x).exp()) - x).abs() < 1e-12);
        assert!((Law::Euler.coordinate(x) - x).abs() < 1e-12);
        assert!((Law::Span.coordinate(2.0 / 9.0) - 8.0).abs() < 1e-12);
    }

    #[test]
    fn numbers_are_written_short() {
        assert_eq!(short(1.0), "1");
        assert_eq!(short(0.159155), "0.159155");
        assert_eq!(short(2.5e-7), "2.500000e-7");
    }
}

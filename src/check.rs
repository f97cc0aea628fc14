//! The gate: a scan held against a spec.
//!
//! Applies the spec's rates (carried down the call graph from entry functions), computes
//! the figures again at the rate each update really runs, matches every smoother to its
//! spec entries (by id, path and function and state, or tag), and runs the rules. Pure:
//! takes the scan and the spec, returns findings; reading and printing are the caller's.

use crate::context::{propagate, RateInfo, RateKind};
use crate::rules::{self, Context, EffectiveRate, Finding};
use crate::scan::Scan;
use crate::spec::{Assume, Input, Matcher, Requirements, Spec};

pub struct CheckResult {
    pub ids: Vec<String>,
    pub findings: Vec<Finding>,
    /// Each smoother's requirements as the rules held it to them: its spec entries' merged
    /// over the defaults (for documents that draw them).
    pub requirements: Vec<Requirements>,
}

fn matches(
    m: &Matcher,
    id: &str,
    path: &str,
    function: &str,
    state: &str,
    tags: &[String],
) -> bool {
    let glob_ok = |pattern: &str| {
        globset::Glob::new(pattern)
            .map(|g| g.compile_matcher().is_match(path))
            .unwrap_or(false)
    };
    m.id.as_deref().is_none_or(|x| x == id)
        && m.path.as_deref().is_none_or(glob_ok)
        && m.function.as_deref().is_none_or(|x| x == function)
        && m.state.as_deref().is_none_or(|x| x == state)
        && m.tag.as_deref().is_none_or(|t| tags.iter().any(|x| x == t))
}

/// The tags (`tauscan: tag NAME`) on a smoother's line or the line above.
fn tags_of(scan: &Scan, i: usize) -> Vec<String> {
    let s = &scan.recognition.smoothers[i];
    let mut spans = vec![s.span];
    if let Some(d) = s.definition {
        spans.push(d);
    }
    let mut tags = Vec::new();
    for span in spans {
        for text in rules::tags_near(scan, span) {
            if let Some(name) = text.trim().strip_prefix("tag") {
                let name = name.trim().trim_end_matches("*/").trim();
                if !name.is_empty() {
                    tags.push(name.to_string());
                }
            }
        }
    }
    tags
}

/// The rate a spec `constant` entry gives a smoother whose derivation uses that constant.
fn constant_rate(spec: &Spec, s: &crate::recognise::Smoother) -> Option<(f64, String)> {
    for rate in &spec.rates {
        let crate::spec::RateScope::Constant { name, unit } = &rate.scope else {
            continue;
        };
        let Some(value) = s
            .chain
            .iter()
            .find(|c| c.name.as_deref() == Some(name.as_str()))
            .and_then(|c| c.value)
        else {
            continue;
        };
        let Ok(hz) = crate::quantity::parse_rate(&format!("{value} {unit}")) else {
            continue;
        };
        return Some((hz.0, format!("spec: {name} = {value} {unit}")));
    }
    None
}

/// A spec rate as the smoother's rate: in Hz (or per event), with the way it came.
fn spec_rate(reach: &propagate::Reach) -> RateInfo {
    // The call that carries the rate into the update's function; the entry itself when
    // the update is in it.
    RateInfo {
        hz: reach.hz,
        kind: if reach.hz.is_some() {
            RateKind::Spec
        } else {
            RateKind::Event
        },
        source: Some(reach.source.clone()),
        span: reach.path.last().map(|step| crate::ir::Span {
            file: step.file,
            line: step.line,
            column: 1,
            ..crate::ir::Span::default()
        }),
        path: reach.path.clone(),
        ..RateInfo::unknown()
    }
}

/// Applies the spec's rates to the smoothers and computes their figures again.
fn apply_rates(scan: &mut Scan, spec: &Spec) -> Vec<EffectiveRate> {
    let propagation = propagate::rates(&scan.program, spec);
    let mut effective = Vec::new();
    for s in &mut scan.recognition.smoothers {
        let from_spec = s
            .function_ref
            .and_then(|f| propagation.reached.get(&f))
            .cloned()
            .unwrap_or_default();
        let partial = s
            .function_ref
            .and_then(|f| propagation.partial.get(&f))
            .cloned();
        let indirect = s
            .function_ref
            .and_then(|f| propagation.indirect.get(&f))
            .cloned();
        match from_spec.as_slice() {
            [] => {
                // A constant the spec declares as a rate, found in the derivation.
                if let Some((hz, source)) = constant_rate(spec, s) {
                    let code = std::mem::replace(
                        &mut s.rate,
                        RateInfo {
                            hz: Some(hz),
                            kind: RateKind::Spec,
                            source: Some(source),
                            ..RateInfo::unknown()
                        },
                    );
                    s.code_rate = Some(code);
                }
            }
            [one] => {
                let code = std::mem::replace(&mut s.rate, spec_rate(one));
                s.code_rate = Some(code);
            }
            _ => {
                let code = std::mem::replace(&mut s.rate, RateInfo::unknown());
                s.code_rate = Some(code);
                s.rate.source = Some("reached from entries of different rates".into());
            }
        }
        if let Some(d) = &partial {
            s.rate.doubts.push(format!("partial rate: {}", d.text));
        }
        if let Some(d) = &indirect {
            s.rate.doubts.push(format!(
                "the rate may come through an indirect call: {}",
                d.text
            ));
        }
        effective.push(EffectiveRate {
            from_spec,
            partial,
            indirect,
        });
    }
    scan.figures = crate::figures::for_all(&scan.recognition.smoothers);
    effective
}

/// The coefficient and window the first matching entries state (`assume`), each from the
/// first entry that states it.
fn first_assume(spec: &Spec, entries: &[usize]) -> Assume {
    let mut assume = Assume::default();
    for &e in entries {
        let a = spec.smoothers[e].assume;
        assume.alpha = assume.alpha.or(a.alpha);
        assume.window = assume.window.or(a.window);
    }
    assume
}

/// Puts the spec's stated coefficient or window in where the code does not show one. A
/// value the code does show is kept: the spec never overrides what the C says. Returns
/// whether anything changed.
fn apply_assumes(smoothers: &mut [crate::recognise::Smoother], assumes: &[Assume]) -> bool {
    use crate::recognise::{Coefficient, Form};
    let mut changed = false;
    for (s, a) in smoothers.iter_mut().zip(assumes) {
        match s.form {
            Form::MovingAverage => {
                if let (None, Some(w)) = (s.window, a.window) {
                    s.window = Some(w);
                    s.alpha = Coefficient::Known(1.0 / f64::from(w));
                    s.assumed = true;
                    changed = true;
                }
            }
            Form::Ema | Form::ScaledState => {
                if let (false, Some(alpha)) = (matches!(s.alpha, Coefficient::Known(_)), a.alpha) {
                    s.alpha = Coefficient::Known(alpha);
                    s.assumed = true;
                    changed = true;
                }
            }
        }
    }
    changed
}

/// A scan with the spec applied: its rates carried to the updates, its stated
/// coefficients put in where the code shows none, each smoother matched to its entries.
/// `list` and `report` show this; `check` holds it against the requirements.
pub struct Applied {
    pub ids: Vec<String>,
    /// Spec entries (indexes into `spec.smoothers`) matching each smoother.
    pub matched: Vec<Vec<usize>>,
    /// Each smoother's requirements: its entries' merged over the defaults.
    pub requirements: Vec<Requirements>,
    pub inputs: Vec<Input>,
    pub rates: Vec<EffectiveRate>,
    pub tags: Vec<Vec<String>>,
}

/// Applies the spec to the scan: rates, `assume`, matching. The figures are computed
/// again at the rates and with the coefficients that result.
pub fn apply(scan: &mut Scan, spec: &Spec) -> Applied {
    let rates = apply_rates(scan, spec);
    let ids = scan.ids();
    let n = scan.recognition.smoothers.len();
    let mut matched = vec![Vec::new(); n];
    let mut requirements = vec![Requirements::default(); n];
    let mut inputs = vec![Input::default(); n];
    let mut assumes = Vec::with_capacity(n);
    let mut tags = Vec::with_capacity(n);
    for i in 0..n {
        tags.push(tags_of(scan, i));
    }
    for (i, s) in scan.recognition.smoothers.iter().enumerate() {
        let path = scan.program.path(s.span.file);
        let mut req = Requirements::default();
        let mut input = Input::default();
        for (e, entry) in spec.smoothers.iter().enumerate() {
            if matches(
                &entry.matcher,
                &ids[i],
                path,
                &s.function,
                &s.state,
                &tags[i],
            ) {
                matched[i].push(e);
                // The first entry that sets a field wins; later ones fill the rest.
                req = req.or(&entry.requires);
                input = Input {
                    range: input.range.or(entry.input.range),
                    per_count: input.per_count.or(entry.input.per_count),
                    unit: input.unit.or_else(|| entry.input.unit.clone()),
                };
            }
        }
        requirements[i] = req.or(&spec.defaults);
        assumes.push(first_assume(spec, &matched[i]));
        inputs[i] = Input {
            range: input.range.or(spec.default_input.range),
            per_count: input.per_count.or(spec.default_input.per_count),
            unit: input.unit.or_else(|| spec.default_input.unit.clone()),
        };
    }
    if apply_assumes(&mut scan.recognition.smoothers, &assumes) {
        scan.figures = crate::figures::for_all(&scan.recognition.smoothers);
    }
    apply_input_ranges(&mut scan.recognition.smoothers, &inputs);
    Applied {
        ids,
        matched,
        requirements,
        inputs,
        rates,
        tags,
    }
}

/// Measures each integer smoother's dead band again over the input range the spec
/// declares: C rounds differently on either side of zero, so a range that stays at or
/// above zero can have a narrower band than the input's type.
fn apply_input_ranges(smoothers: &mut [crate::recognise::Smoother], inputs: &[Input]) {
    for (s, input) in smoothers.iter_mut().zip(inputs) {
        let (Some((lo, hi)), Some(update), Some(alpha), Some(_)) = (
            input.range,
            s.simulation.as_ref(),
            s.alpha.value(),
            s.dead_band,
        ) else {
            continue;
        };
        if !(lo.is_finite() && hi.is_finite() && lo <= hi) {
            continue;
        }
        let range = (lo.floor() as i128, hi.ceil() as i128);
        s.dead_band = crate::recognise::judge::cached_dead_band(update, alpha, Some(range));
        s.dead_band_nonnegative = None;
    }
}

/// Runs the gate.
pub fn run(scan: &mut Scan, spec: &Spec) -> CheckResult {
    let started = std::time::Instant::now();
    let applied = apply(scan, spec);
    crate::scan::phase("  apply", started);
    let started = std::time::Instant::now();
    let ctx = Context {
        scan,
        spec,
        ids: &applied.ids,
        matched: applied.matched,
        requirements: applied.requirements.clone(),
        inputs: applied.inputs,
        rates: applied.rates,
        tags: applied.tags,
    };
    let findings = rules::run(&ctx);
    crate::scan::phase("  rules", started);
    CheckResult {
        ids: applied.ids,
        findings,
        requirements: applied.requirements,
    }
}

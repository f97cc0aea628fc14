//! The gate: a scan held against a spec.
//!
//! Applies the spec's rates (carried down the call graph from entry functions), computes
//! the figures again at the rate each update really runs, matches every smoother to its
//! spec entries (by id, path and function and state, or tag), and runs the rules. Pure:
//! takes the scan and the spec, returns findings; reading and printing are the caller's.

use crate::context::{propagate, RateInfo, RateKind};
use crate::rules::{self, Context, EffectiveRate, Finding};
use crate::scan::Scan;
use crate::spec::{Input, Matcher, Requirements, Spec};

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

/// Applies the spec's rates to the smoothers and computes their figures again.
fn apply_rates(scan: &mut Scan, spec: &Spec) -> Vec<EffectiveRate> {
    let reached = propagate::rates(&scan.program, spec);
    let mut effective = Vec::new();
    for s in &mut scan.recognition.smoothers {
        let from_spec = s
            .function_ref
            .and_then(|f| reached.get(&f))
            .cloned()
            .unwrap_or_default();
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
                            span: None,
                            conflicts: Vec::new(),
                        },
                    );
                    s.code_rate = Some(code);
                }
            }
            [one] => {
                let code = std::mem::replace(
                    &mut s.rate,
                    RateInfo {
                        hz: one.hz,
                        kind: if one.hz.is_some() {
                            RateKind::Spec
                        } else {
                            RateKind::Event
                        },
                        source: Some(one.source.clone()),
                        span: None,
                        conflicts: Vec::new(),
                    },
                );
                s.code_rate = Some(code);
            }
            _ => {
                let code = std::mem::replace(&mut s.rate, RateInfo::unknown());
                s.code_rate = Some(code);
                s.rate.source = Some("reached from entries of different rates".into());
            }
        }
        effective.push(EffectiveRate { from_spec });
    }
    scan.figures = crate::figures::for_all(&scan.recognition.smoothers);
    effective
}

/// Runs the gate.
pub fn run(scan: &mut Scan, spec: &Spec) -> CheckResult {
    let rates = apply_rates(scan, spec);
    let ids = scan.ids();
    let n = scan.recognition.smoothers.len();
    let mut matched = vec![Vec::new(); n];
    let mut requirements = vec![Requirements::default(); n];
    let mut inputs = vec![Input::default(); n];
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
        inputs[i] = Input {
            range: input.range.or(spec.default_input.range),
            per_count: input.per_count.or(spec.default_input.per_count),
            unit: input.unit.or_else(|| spec.default_input.unit.clone()),
        };
    }
    let ctx = Context {
        scan,
        spec,
        ids: &ids,
        matched,
        requirements: requirements.clone(),
        inputs,
        rates,
        tags,
    };
    let findings = rules::run(&ctx);
    CheckResult {
        ids,
        findings,
        requirements,
    }
}

//! The starter spec of `tauscan init`: every smoother held to its present figures within a
//! tolerance, so an inherited code base can be locked down first and tightened later.
//!
//! Requirements are written only where a figure is known: cutoff and lag need a rate,
//! noise reduction needs a known coefficient, the dead band an integer form. The bounds
//! are widened a little past the tolerance where rounding to four digits could otherwise
//! make the present code fail its own starter spec.

use crate::report::table::hertz;
use crate::scan::Scan;

fn quoted(text: &str) -> String {
    // A JSON string is a valid YAML double-quoted scalar.
    serde_json::to_string(text).unwrap_or_else(|_| "\"?\"".into())
}

fn four(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return "0".into();
    }
    let magnitude = v.abs().log10().floor() as i32;
    let decimals = (3 - magnitude).clamp(0, 9) as usize;
    let text = format!("{v:.decimals$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

fn seconds(v: f64) -> String {
    if v < 1.0 {
        format!("{} ms", four(v * 1e3))
    } else {
        format!("{} s", four(v))
    }
}

/// Most entry functions named in the commented `rates:` example.
const MAX_ENTRIES: usize = 40;

/// The entry functions of the program that lead to a smoother: functions nothing in the
/// scan calls (an interrupt, a task, `main`), or whose address is taken (a callback), from
/// which a smoother's function is reached through calls. Each with the smoothers'
/// functions it reaches, by name, sorted.
fn entries(scan: &Scan) -> Vec<(String, Vec<String>)> {
    use std::collections::{BTreeMap, BTreeSet, VecDeque};
    let program = &scan.program;
    let holders: BTreeSet<crate::index::FuncRef> = scan
        .recognition
        .smoothers
        .iter()
        .filter_map(|s| s.function_ref)
        .collect();
    if holders.is_empty() {
        return Vec::new();
    }
    let graph = crate::callgraph::build(program);
    let is_entry = |f: &crate::index::FuncRef| {
        graph.callers.get(f).is_none_or(|c| c.is_empty()) || graph.escaped.contains(f)
    };
    // Up from each smoother's function through its callers (a handful of functions hold
    // smoothers; a tree has thousands of uncalled functions, so walking down from each of
    // those would cost far more): every entry met reaches that function.
    let mut found: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for &holder in &holders {
        let name = &program.function(holder).name;
        let mut seen = BTreeSet::from([holder]);
        let mut queue = VecDeque::from([holder]);
        while let Some(g) = queue.pop_front() {
            if is_entry(&g) {
                found
                    .entry(program.function(g).name.clone())
                    .or_default()
                    .insert(name.clone());
            }
            for (caller, _) in graph.callers.get(&g).map(Vec::as_slice).unwrap_or(&[]) {
                if seen.insert(*caller) {
                    queue.push_back(*caller);
                }
            }
        }
    }
    found
        .into_iter()
        .map(|(name, reached)| (name, reached.into_iter().collect()))
        .collect()
}

/// The commented `rates:` example: the entry functions found, each with a rate to fill
/// in (a placeholder the spec refuses until it is replaced).
fn rates_example(scan: &Scan) -> String {
    let found = entries(scan);
    let mut out = String::from(
        "# Name the entry functions (interrupts, tasks) and the rates they run at, so every\n\
         # smoother's figures are in Hz and seconds; the rate reaches everything they call.\n",
    );
    if found.is_empty() {
        out.push_str(
            "# rates:\n#   - { function: control_isr, rate: \"1 kHz\" }\n#   - { function: ui_task, period: \"10 ms\" }\n",
        );
        return out;
    }
    out.push_str(
        "# These functions are called by nothing in the scan (or through a pointer) and lead to\n\
         # smoothers; fill in each one's rate (or `period: \"10 ms\"`, or `event: true`):\n# rates:\n",
    );
    for (name, reached) in found.iter().take(MAX_ENTRIES) {
        let mut shown: Vec<&str> = reached.iter().take(3).map(String::as_str).collect();
        if reached.len() > 3 {
            shown.push("...");
        }
        out.push_str(&format!(
            "#   - {{ function: {name}, rate: \"? Hz\" }}   # reaches {}\n",
            shown.join(", ")
        ));
    }
    if found.len() > MAX_ENTRIES {
        out.push_str(&format!(
            "#   ({} more entry functions not listed)\n",
            found.len() - MAX_ENTRIES
        ));
    }
    out
}

pub fn starter_spec(scan: &Scan, tolerance: f64) -> String {
    let ids = scan.ids();
    let mut out = String::new();
    out.push_str(&format!(
        "# tauscan spec, written by `tauscan init` from the figures the code has today\n\
         # (each held within {} %). Review it, tighten it to the product's real requirements,\n\
         # and keep it beside the code. Every key is described in tauscan's README.\n#\n",
        four(tolerance * 100.0)
    ));
    out.push_str(&rates_example(scan));
    out.push('\n');
    if scan.recognition.smoothers.is_empty() {
        out.push_str("smoothers: []\n");
        return out;
    }
    out.push_str("smoothers:\n");
    let slack = 1e-3;
    for ((s, f), id) in scan
        .recognition
        .smoothers
        .iter()
        .zip(&scan.figures)
        .zip(&ids)
    {
        out.push_str(&format!("  - match: {{ id: {} }}\n", quoted(id)));
        let mut lines = Vec::new();
        if let Some(own) = &f.own {
            if let Some(fc) = own.cutoff_hertz {
                let lo = fc.0 * (1.0 - tolerance) * (1.0 - slack);
                let hi = fc.0 * (1.0 + tolerance) * (1.0 + slack);
                lines.push(format!(
                    "cutoff: {{ min: \"{} Hz\", max: \"{} Hz\" }}    # now {}",
                    four(lo),
                    four(hi),
                    hertz(fc.0)
                ));
            }
            if let Some(lag) = own.lag_seconds {
                if lag.0 > 0.0 {
                    lines.push(format!(
                        "max_lag: \"{}\"",
                        seconds(lag.0 * (1.0 + tolerance) * (1.0 + slack))
                    ));
                }
            }
            if let Some(ratio) = own.noise_ratio {
                let db = -20.0 * ratio.log10();
                if db > 0.01 {
                    lines.push(format!(
                        "min_noise_reduction: \"{} dB\"",
                        four(db * (1.0 - tolerance) * (1.0 - slack))
                    ));
                }
            }
        }
        if let Some(band) = s.dead_band {
            lines.push(format!(
                "max_dead_band: \"{} counts\"",
                band.rising.max(band.falling)
            ));
        }
        if lines.is_empty() {
            out.push_str(
                "    # no figure is known yet for this smoother (its coefficient or rate)\n",
            );
            continue;
        }
        out.push_str("    requires:\n");
        for l in lines {
            out.push_str(&format!("      {l}\n"));
        }
    }
    out
}

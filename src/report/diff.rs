//! Renders what a change does to the smoother inventory (`tauscan diff`): a terminal
//! listing, JSON with before and after values as numbers, or Markdown for a pull request.
//!
//! ```text
//! { "tauscan_diff": 1, "from": "HEAD~1", "to": "work tree",
//!   "added":   [ { "id": …, "after":  { "file", "line", "alpha", "window", "rate_hz",
//!                                       "cutoff_hz", "lag_s", "dead_band": [rising, falling] } } ],
//!   "removed": [ { "id": …, "before": { … } } ],
//!   "changed": [ { "id": …, "before": { … }, "after": { … } } ] }
//! ```

use crate::diff::{Change, Figures};
use crate::report::markdown::cell;
use crate::report::neutral;
use crate::report::table::{hertz, seconds, sig3};
use serde::Serialize;

#[derive(Serialize)]
struct Side {
    file: String,
    line: u32,
    alpha: Option<f64>,
    window: Option<u32>,
    rate_hz: Option<f64>,
    cutoff_hz: Option<f64>,
    lag_s: Option<f64>,
    dead_band: Option<[u64; 2]>,
}

fn side(f: &Figures) -> Side {
    let finite = |v: Option<f64>| v.filter(|x| x.is_finite());
    Side {
        file: f.file.clone(),
        line: f.line,
        alpha: finite(f.alpha),
        window: f.window,
        rate_hz: finite(f.rate_hz),
        cutoff_hz: finite(f.cutoff_hz),
        lag_s: finite(f.lag_s),
        dead_band: f.dead_band.map(|(r, d)| [r, d]),
    }
}

#[derive(Serialize)]
struct Entry {
    id: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    before: Option<Side>,
    #[serde(skip_serializing_if = "Option::is_none")]
    after: Option<Side>,
}

#[derive(Serialize)]
struct Document {
    tauscan_diff: u32,
    from: String,
    to: String,
    added: Vec<Entry>,
    removed: Vec<Entry>,
    changed: Vec<Entry>,
}

pub fn json(changes: &[Change], from: &str, to: &str) -> String {
    let mut doc = Document {
        tauscan_diff: 1,
        from: from.into(),
        to: to.into(),
        added: Vec::new(),
        removed: Vec::new(),
        changed: Vec::new(),
    };
    for c in changes {
        match c {
            Change::Added { id, after } => doc.added.push(Entry {
                id: id.clone(),
                before: None,
                after: Some(side(after)),
            }),
            Change::Removed { id, before } => doc.removed.push(Entry {
                id: id.clone(),
                before: Some(side(before)),
                after: None,
            }),
            Change::Changed { id, before, after } => doc.changed.push(Entry {
                id: id.clone(),
                before: Some(side(before)),
                after: Some(side(after)),
            }),
        }
    }
    let mut text = serde_json::to_string_pretty(&doc).unwrap_or_else(|_| "{}".into());
    text.push('\n');
    text
}

fn coefficient(f: &Figures) -> String {
    match (f.window, f.alpha) {
        (Some(n), _) => format!("N={n}"),
        (None, Some(a)) => format!("alpha {}", sig3(a)),
        _ => "alpha ?".into(),
    }
}

fn opt<T>(v: Option<T>, f: impl Fn(T) -> String) -> String {
    v.map(f).unwrap_or_else(|| "?".into())
}

fn band(b: Option<(u64, u64)>) -> String {
    b.map(|(r, f)| format!("+{r}/-{f}"))
        .unwrap_or_else(|| "-".into())
}

/// The parts that changed, as `what before -> after`.
fn deltas(b: &Figures, a: &Figures) -> Vec<String> {
    let mut out = Vec::new();
    if coefficient(b) != coefficient(a) {
        out.push(format!("{} -> {}", coefficient(b), coefficient(a)));
    }
    let pairs = [
        ("rate", opt(b.rate_hz, hertz), opt(a.rate_hz, hertz)),
        ("cutoff", opt(b.cutoff_hz, hertz), opt(a.cutoff_hz, hertz)),
        ("lag", opt(b.lag_s, seconds), opt(a.lag_s, seconds)),
        ("dead band", band(b.dead_band), band(a.dead_band)),
    ];
    for (what, x, y) in pairs {
        if x != y {
            out.push(format!("{what} {x} -> {y}"));
        }
    }
    if out.is_empty() {
        out.push("figures changed in the last digits".into());
    }
    out
}

fn summary(f: &Figures) -> String {
    format!(
        "{}, rate {}, cutoff {}, lag {}, dead band {}",
        coefficient(f),
        opt(f.rate_hz, hertz),
        opt(f.cutoff_hz, hertz),
        opt(f.lag_s, seconds),
        band(f.dead_band)
    )
}

pub fn table(changes: &[Change], from: &str, to: &str) -> String {
    let mut out = format!("Smoothers from {} to {}:\n", neutral(from), neutral(to));
    if changes.is_empty() {
        out.push_str("no smoother changed.\n");
        return out;
    }
    for c in changes {
        match c {
            Change::Added { id, after } => {
                out.push_str(&format!("added    {}  ({})\n", neutral(id), summary(after)))
            }
            Change::Removed { id, before } => out.push_str(&format!(
                "removed  {}  (was {})\n",
                neutral(id),
                summary(before)
            )),
            Change::Changed { id, before, after } => out.push_str(&format!(
                "changed  {}  {}\n",
                neutral(id),
                deltas(before, after).join(", ")
            )),
        }
    }
    out
}

pub fn markdown(changes: &[Change], from: &str, to: &str) -> String {
    let mut out = format!(
        "### tauscan: smoothers from {} to {}\n\n",
        cell(from),
        cell(to)
    );
    if changes.is_empty() {
        out.push_str("No smoother changed.\n");
        return out;
    }
    out.push_str("| | smoother | change |\n|---|---|---|\n");
    for c in changes {
        let (kind, text) = match c {
            Change::Added { after, .. } => ("added", summary(after)),
            Change::Removed { before, .. } => ("removed", format!("was {}", summary(before))),
            Change::Changed { before, after, .. } => ("changed", deltas(before, after).join(", ")),
        };
        out.push_str(&format!(
            "| {kind} | {} | {} |\n",
            cell(c.id()),
            cell(&text)
        ));
    }
    out
}

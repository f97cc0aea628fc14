//! What a change does to the smoother inventory: smoothers added, removed, and for each one
//! present on both sides, its coefficient, rate, cutoff, lag and dead band before and after.
//!
//! Pure: takes two scans (already checked against their specs, so rates are the real
//! ones) and returns the differences; getting the trees of two revisions is the CLI's job.

use crate::scan::Scan;

/// The figures compared for one smoother on one side.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Figures {
    pub alpha: Option<f64>,
    pub window: Option<u32>,
    pub rate_hz: Option<f64>,
    pub cutoff_hz: Option<f64>,
    pub lag_s: Option<f64>,
    pub dead_band: Option<(u64, u64)>,
    pub file: String,
    pub line: u32,
}

#[derive(Debug, Clone, PartialEq)]
pub enum Change {
    Added {
        id: String,
        after: Figures,
    },
    Removed {
        id: String,
        before: Figures,
    },
    Changed {
        id: String,
        before: Figures,
        after: Figures,
    },
}

impl Change {
    pub fn id(&self) -> &str {
        match self {
            Change::Added { id, .. } | Change::Removed { id, .. } | Change::Changed { id, .. } => {
                id
            }
        }
    }
}

fn figures_of(scan: &Scan, ids: &[String]) -> Vec<(String, Figures)> {
    scan.recognition
        .smoothers
        .iter()
        .zip(&scan.figures)
        .zip(ids)
        .map(|((s, f), id)| {
            let own = f.own.as_ref();
            (
                id.clone(),
                Figures {
                    alpha: if s.window.is_some() {
                        None
                    } else {
                        s.alpha.value()
                    },
                    window: s.window,
                    rate_hz: s.rate.hz,
                    cutoff_hz: own.and_then(|o| o.cutoff_hertz.map(|h| h.0)),
                    lag_s: own.and_then(|o| o.lag_seconds.map(|t| t.0)),
                    dead_band: s.dead_band.map(|d| (d.rising, d.falling)),
                    file: scan.program.path(s.span.file).to_string(),
                    line: s.span.line,
                },
            )
        })
        .collect()
}

fn differs(a: Option<f64>, b: Option<f64>) -> bool {
    match (a, b) {
        (Some(x), Some(y)) => (x - y).abs() > 1e-9 * x.abs().max(y.abs()).max(1e-300),
        (None, None) => false,
        _ => true,
    }
}

fn figures_differ(a: &Figures, b: &Figures) -> bool {
    differs(a.alpha, b.alpha)
        || a.window != b.window
        || differs(a.rate_hz, b.rate_hz)
        || differs(a.cutoff_hz, b.cutoff_hz)
        || differs(a.lag_s, b.lag_s)
        || a.dead_band != b.dead_band
}

/// The changes from `before` to `after`, in id order. Smoothers are matched by id
/// (path, function and state), so moving one within its file is no change.
pub fn compare(before: &Scan, after: &Scan) -> Vec<Change> {
    let old = figures_of(before, &before.ids());
    let new = figures_of(after, &after.ids());
    let mut changes = Vec::new();
    for (id, b) in &old {
        match new.iter().find(|(i, _)| i == id) {
            None => changes.push(Change::Removed {
                id: id.clone(),
                before: b.clone(),
            }),
            Some((_, a)) if figures_differ(b, a) => changes.push(Change::Changed {
                id: id.clone(),
                before: b.clone(),
                after: a.clone(),
            }),
            Some(_) => {}
        }
    }
    for (id, a) in &new {
        if !old.iter().any(|(i, _)| i == id) {
            changes.push(Change::Added {
                id: id.clone(),
                after: a.clone(),
            });
        }
    }
    changes.sort_by(|x, y| x.id().cmp(y.id()));
    changes
}

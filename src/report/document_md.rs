//! The smoother document as Markdown (`tauscan report --out FILE.md`), for design files and
//! repositories where a page of text travels better than a web page.
//!
//! It says what the HTML page says, from the same `document` model, with the plots given as
//! numbers instead: the step response's 63/90/95/99 % times, and the gain at a few frequencies
//! around the cutoff up to Nyquist. Text from the scanned files is escaped for Markdown (no
//! markup, no HTML, no table breaks) outside code blocks, and shown verbatim, control
//! characters made visible, inside fenced blocks whose fence is longer than any run of
//! backticks in them. Laying out the page is all this module does.

use crate::metrics::{self, Figures, Stage};
use crate::report::document::{
    requirement_lines, settle_marks, CascadeEntry, Document, Entry, FindingLine, CAUTION,
};
use crate::report::html::{cascade_cutoff_text, cascade_lag_text};
use crate::report::markdown::cell;
use crate::report::plot::decibels;
use crate::report::table::{hertz, sig3};
use crate::units::{Hertz, RadPerSample};
use std::f64::consts::TAU;

/// Source text for a fenced code block: control and bidirectional-override characters shown
/// as `\u{..}` (tabs kept), everything else as written.
fn visible(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        let bidi = matches!(
            c,
            '\u{061c}' | '\u{200e}' | '\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}'
        );
        if (c.is_control() && c != '\t') || bidi {
            out.push_str(&format!("\\u{{{:x}}}", c as u32));
        } else {
            out.push(c);
        }
    }
    out
}

/// A backtick fence longer than any run of backticks in `lines` (and at least three).
fn fence_for<'a>(lines: impl Iterator<Item = &'a str>) -> String {
    let mut longest = 0;
    for line in lines {
        let mut run = 0;
        for c in line.chars() {
            if c == '`' {
                run += 1;
                longest = longest.max(run);
            } else {
                run = 0;
            }
        }
    }
    "`".repeat((longest + 1).max(3))
}

fn finding_md(f: &FindingLine) -> String {
    let mut out = format!("- **{}** {}", f.severity.name(), cell(f.rule));
    if !f.place.is_empty() {
        out.push_str(&format!(" at {}", cell(&f.place)));
    }
    out.push_str(&format!(": {}", cell(&f.message)));
    for line in f.details() {
        out.push_str(&format!("  \n  {}", cell(&line)));
    }
    out.push('\n');
    out
}

/// Frequencies (in fractions of fs) at which the gain table is given: around the cutoff by
/// factors of two and ten, and Nyquist.
fn gain_points(cutoff: Option<RadPerSample>) -> Vec<f64> {
    let nyquist = 0.5;
    let mut points: Vec<f64> = match cutoff {
        Some(w) => {
            let fc = w.0 / TAU;
            [0.1, 0.5, 1.0, 2.0, 10.0]
                .iter()
                .map(|k| k * fc)
                .filter(|f| *f < nyquist)
                .collect()
        }
        None => vec![0.01, 0.1],
    };
    points.push(nyquist);
    points
}

fn frequency_text(fraction: f64, rate: Option<Hertz>) -> String {
    match rate {
        Some(r) => hertz(fraction * r.0),
        None => format!("{} fs", sig3(fraction)),
    }
}

fn gain_text(stages: &[Stage], fraction: f64) -> String {
    let gain = metrics::cascade_magnitude(stages, RadPerSample(fraction * TAU));
    format!("{} dB", sig3(decibels(gain)))
}

fn responses_md(e: &Entry, stage: Stage, figures: &Figures, out: &mut String) {
    let own = [stage];
    let cascade: Option<&CascadeEntry> = e.cascade.as_ref();
    out.push_str("#### Step response\n\n");
    match cascade {
        Some(c) => {
            out.push_str(
                "| fraction of the step | this stage alone | whole cascade |\n|---|---|---|\n",
            );
            for (mine, theirs) in settle_marks(figures)
                .into_iter()
                .zip(settle_marks(&c.figures))
            {
                out.push_str(&format!("| {} | {} | {} |\n", mine.0, mine.1, theirs.1));
            }
        }
        None => {
            out.push_str("| fraction of the step | reached after |\n|---|---|\n");
            for (label, value) in settle_marks(figures) {
                out.push_str(&format!("| {label} | {value} |\n"));
            }
        }
    }
    if let Some((q, within)) = e.requirements.settle {
        out.push_str(&format!(
            "\nRequired: {} % within {}.\n",
            sig3(q * 100.0),
            crate::report::table::seconds(within.0)
        ));
    }
    out.push_str("\n#### Magnitude response\n\n");
    let points = gain_points(figures.cutoff);
    match cascade {
        Some(c) => {
            out.push_str(
                "| frequency | gain, this stage alone | gain, whole cascade |\n|---|---|---|\n",
            );
            for f in points {
                out.push_str(&format!(
                    "| {} | {} | {} |\n",
                    frequency_text(f, e.rate),
                    gain_text(&own, f),
                    gain_text(&c.stages, f)
                ));
            }
            out.push_str(&format!(
                "\nThe whole cascade cuts at {}.\n",
                cell(&cascade_cutoff_text(c))
            ));
        }
        None => {
            out.push_str("| frequency | gain |\n|---|---|\n");
            for f in points {
                out.push_str(&format!(
                    "| {} | {} |\n",
                    frequency_text(f, e.rate),
                    gain_text(&own, f)
                ));
            }
        }
    }
    out.push_str(&format!(
        "\nCutoff (-3 dB): {}; the last row is Nyquist. The HTML version of this document draws both responses.\n",
        cell(&e.cutoff_text)
    ));
}

fn entry_md(e: &Entry, out: &mut String) {
    out.push_str(&format!("\n## {}\n\n", cell(&e.id)));
    let mut item = |name: &str, value: String| {
        out.push_str(&format!("- **{name}:** {value}\n"));
    };
    item(
        "where",
        format!(
            "{}:{}:{}, in {}",
            cell(&e.file),
            e.line,
            e.column,
            cell(&e.function)
        ),
    );
    item("state", format!("{} ({})", cell(&e.state), e.storage));
    item("form", format!("{}, {} arithmetic", e.form, e.arithmetic));
    item("update as read", cell(&e.update));
    item("coefficient", cell(&e.coefficient));
    item("rate", cell(&e.rate_story));
    if !e.rate_doubts.is_empty() {
        item("rate doubts", cell(&e.rate_doubts.join("; ")));
    }
    item("cutoff", cell(&e.cutoff_text));
    item("lag behind a ramp", cell(&e.lag_text));
    item("noise reduction", cell(&e.noise_text));
    item("dead band", cell(&e.dead_band_text));
    if let Some(c) = &e.cascade {
        let stages: Vec<String> = c.stage_ids.iter().map(|id| cell(id)).collect();
        item(
            "cascade",
            format!(
                "last of {} stages ({}); combined cutoff {}, lag {}",
                c.stages.len(),
                stages.join(" → "),
                cell(&cascade_cutoff_text(c)),
                cell(&cascade_lag_text(c))
            ),
        );
    }
    let requirements = requirement_lines(&e.requirements);
    item(
        "requirements",
        if requirements.is_empty() {
            "none in the spec".into()
        } else {
            cell(&requirements.join("; "))
        },
    );
    item("verdict", format!("**{}**", cell(&e.verdict.text())));

    if !e.findings.is_empty() {
        out.push_str("\n#### Findings\n\n");
        for f in &e.findings {
            out.push_str(&finding_md(f));
        }
    }
    for x in &e.excerpts {
        out.push_str(&format!(
            "\n#### Source: {} in {}\n\n",
            x.title,
            cell(&x.file)
        ));
        let lines: Vec<String> = x
            .lines
            .iter()
            .map(|(n, text, hit)| {
                format!("{}{n:>5} | {}", if *hit { ">" } else { " " }, visible(text))
            })
            .collect();
        let fence = fence_for(lines.iter().map(String::as_str));
        out.push_str(&format!("{fence}c\n"));
        for l in &lines {
            out.push_str(l);
            out.push('\n');
        }
        out.push_str(&format!("{fence}\n"));
    }
    out.push_str("\n#### Derivation of the coefficient\n\n");
    if e.chain.is_empty() {
        out.push_str("The coefficient is written in the update itself.\n");
    } else {
        for (k, c) in e.chain.iter().enumerate() {
            out.push_str(&format!(
                "{}. {}:{}: {}{}\n",
                k + 1,
                cell(&c.file),
                c.line,
                cell(&c.text),
                c.value
                    .as_ref()
                    .map(|v| format!(" gives {}", cell(v)))
                    .unwrap_or_default()
            ));
        }
    }
    if !e.variants.is_empty() {
        out.push_str("\nUnder other preprocessor branches:\n\n");
        for v in &e.variants {
            out.push_str(&format!("- {}\n", cell(v)));
        }
    }
    out.push('\n');
    match (e.stage, e.figures.as_ref()) {
        (Some(stage), Some(figures)) => responses_md(e, stage, figures, out),
        _ => out.push_str(&format!(
            "_{}_\n",
            cell(
                e.no_plot_reason
                    .as_deref()
                    .unwrap_or("no plot: the figures are not known")
            )
        )),
    }
}

/// The whole document as Markdown.
pub fn render(doc: &Document) -> String {
    let h = &doc.header;
    let mut out = format!("# Smoothers of {}\n\n", cell(&h.root));
    out.push_str("| | |\n|---|---|\n");
    out.push_str(&format!("| scan root | {} |\n", cell(&h.root)));
    out.push_str(&format!(
        "| revision | {} |\n",
        h.revision
            .as_deref()
            .map(cell)
            .unwrap_or_else(|| "not in a git repository".into())
    ));
    out.push_str(&format!(
        "| spec | {} |\n",
        h.spec
            .as_deref()
            .map(cell)
            .unwrap_or_else(|| "none found: only the rules that need no requirement ran".into())
    ));
    out.push_str(&format!("| date | {} |\n", cell(&h.date_utc)));
    out.push_str(&format!("| tool | tauscan {} |\n", cell(&h.version)));
    let (errors, warnings, notes) = doc.counts();
    out.push_str(&format!(
        "| findings | {errors} error(s), {warnings} warning(s), {notes} note(s) over {} smoother(s) in {} file(s) |\n",
        doc.entries.len(),
        doc.files
    ));
    if doc.incomplete {
        out.push_str("\n> **The scan is incomplete:** a path does not exist or a file could not be read (see the notes at the end). Smoothers may be missing from this document.\n");
    }
    out.push_str("\n## Summary\n\n");
    if doc.entries.is_empty() {
        out.push_str("No smoother was found.\n");
    } else {
        out.push_str("Every smoother, ordered by file and line. Figures are at the rate each update really runs; without a known rate they stay in samples and fractions of the update rate fs.\n\n");
        out.push_str("| smoother | location | form | arithmetic | coefficient | rate | rate source | cutoff | lag | settle time | noise reduction | dead band | verdict |\n");
        out.push_str("|---|---|---|---|---|---|---|---|---|---|---|---|---|\n");
        for e in &doc.entries {
            out.push_str(&format!(
                "| {} | {}:{} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |\n",
                cell(&e.id),
                cell(&e.file),
                e.line,
                e.form,
                e.arithmetic,
                cell(&e.coefficient),
                cell(&e.rate_text),
                cell(e.rate_source.as_deref().unwrap_or("-")),
                cell(&e.cutoff_text),
                cell(&e.lag_text),
                cell(&e.settle_text),
                cell(&e.noise_text),
                cell(&e.dead_band_text),
                cell(&e.verdict.text()),
            ));
        }
    }
    let cascades: Vec<&Entry> = doc.entries.iter().filter(|e| e.cascade.is_some()).collect();
    if !cascades.is_empty() {
        out.push_str("\n### Cascades\n\n| stages, first to last | combined cutoff | combined lag |\n|---|---|---|\n");
        for c in cascades.iter().filter_map(|e| e.cascade.as_ref()) {
            let stages: Vec<String> = c.stage_ids.iter().map(|id| cell(id)).collect();
            out.push_str(&format!(
                "| {} | {} | {} |\n",
                stages.join(" → "),
                cell(&cascade_cutoff_text(c)),
                cell(&cascade_lag_text(c))
            ));
        }
    }
    if !doc.spec_findings.is_empty() {
        out.push_str("\n### Findings about the spec\n\n");
        for f in &doc.spec_findings {
            out.push_str(&finding_md(f));
        }
    }
    for e in &doc.entries {
        entry_md(e, &mut out);
    }
    if !doc.notes.is_empty() {
        out.push_str("\n## Notes from the scan\n\n");
        for n in &doc.notes {
            out.push_str(&format!("- {}\n", cell(n)));
        }
    }
    out.push_str(&format!(
        "\n---\n\n> **Caution.** {CAUTION}\n\nMade by tauscan {} on {}.\n",
        cell(&h.version),
        cell(&h.date_utc)
    ));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fences_outgrow_the_backticks_inside() {
        assert_eq!(fence_for(["int x;"].into_iter()), "```");
        assert_eq!(fence_for(["a ```` b", "`"].into_iter()), "`````");
    }

    #[test]
    fn hidden_characters_become_visible_in_code_blocks() {
        // Source: Unicode's bidirectional controls (UAX #9), from memory.
        assert_eq!(visible("x\u{202e}y\x1b\tz"), "x\\u{202e}y\\u{1b}\tz");
    }

    #[test]
    fn gain_points_stop_at_nyquist() {
        // Source: Nyquist is half the update rate (sampling theorem, from memory).
        let points = gain_points(Some(RadPerSample(0.1 * TAU)));
        let expected = [0.01, 0.05, 0.1, 0.2, 0.5];
        assert_eq!(points.len(), expected.len(), "{points:?}");
        for (got, want) in points.iter().zip(expected) {
            assert!((got - want).abs() < 1e-15, "{points:?}");
        }
        assert_eq!(gain_points(None), vec![0.01, 0.1, 0.5]);
    }
}

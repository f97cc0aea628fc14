//! A Markdown summary of `tauscan check` (`--format markdown`), sized for a pull-request
//! comment: counts by severity, a table of the smoothers with findings and their figures,
//! and the full findings folded in `<details>`. Text from the scanned files is escaped so
//! it cannot break the table or inject markup.

use crate::check::CheckResult;
use crate::report::table::{hertz, seconds, sig3};
use crate::scan::Scan;
use crate::spec::Severity;
use std::collections::BTreeMap;

/// Markdown-safe text for a table cell: no pipes, no HTML, no newlines.
pub fn cell(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let one_line = text.replace(['\n', '\r'], " ");
    for c in crate::report::neutral(&one_line).chars() {
        match c {
            '|' => out.push_str("\\|"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '`' => out.push('\''),
            '\n' | '\r' => out.push(' '),
            '*' | '_' | '[' | ']' | '#' => {
                out.push('\\');
                out.push(c);
            }
            _ => out.push(c),
        }
    }
    out
}

/// C text as a code span: shown as written (`f->y`, no entities), one line, with no pipe
/// that could end a table cell and a fence longer than any backtick run inside.
pub fn code(text: &str) -> String {
    let one_line = crate::report::neutral(&text.replace(['\n', '\r'], " ")).replace('|', "\\|");
    let mut longest = 0;
    let mut run = 0;
    for c in one_line.chars() {
        run = if c == '`' { run + 1 } else { 0 };
        longest = longest.max(run);
    }
    let fence = "`".repeat(longest + 1);
    let pad = if one_line.starts_with('`') || one_line.ends_with('`') {
        " "
    } else {
        ""
    };
    format!("{fence}{pad}{one_line}{pad}{fence}")
}

/// A message whose `quoted` parts are C: those as code spans, the rest as cell text.
pub fn rich(text: &str) -> String {
    let parts: Vec<&str> = text.split('`').collect();
    if parts.len().is_multiple_of(2) {
        // Unbalanced backticks: all of it as plain text.
        return cell(text);
    }
    parts
        .iter()
        .enumerate()
        .map(|(k, part)| {
            if k % 2 == 1 && !part.is_empty() {
                code(part)
            } else {
                cell(part)
            }
        })
        .collect()
}

pub fn render(scan: &Scan, result: &CheckResult) -> String {
    let mut counts: BTreeMap<Severity, usize> = BTreeMap::new();
    let mut suppressed = 0;
    for f in &result.findings {
        if f.suppressed.is_some() || f.baselined {
            suppressed += 1;
        } else {
            *counts.entry(f.severity).or_insert(0) += 1;
        }
    }
    let n = |s: Severity| counts.get(&s).copied().unwrap_or(0);
    let mut out = String::new();
    let verdict = if n(Severity::Error) > 0 {
        "fails"
    } else {
        "passes"
    };
    out.push_str(&format!(
        "### tauscan: the smoother check {verdict}\n\n**{}** error(s), **{}** warning(s), **{}** note(s) over {} smoother(s) in {} file(s){}.\n\n",
        n(Severity::Error),
        n(Severity::Warning),
        n(Severity::Note),
        scan.recognition.smoothers.len(),
        scan.program.files.len(),
        if suppressed > 0 {
            format!("; {suppressed} suppressed with a reason or known from the baseline")
        } else {
            String::new()
        }
    ));
    let mut with_findings: Vec<usize> = result
        .findings
        .iter()
        .filter(|f| f.suppressed.is_none() && !f.baselined)
        .filter_map(|f| f.smoother)
        .collect();
    with_findings.sort_unstable();
    with_findings.dedup();
    if !with_findings.is_empty() {
        out.push_str(
            "| smoother | where | coefficient | rate | cutoff | lag | dead band | findings |\n",
        );
        out.push_str("|---|---|---|---|---|---|---|---|\n");
        for i in with_findings {
            let s = &scan.recognition.smoothers[i];
            let f = &scan.figures[i];
            let own = f.own.as_ref();
            let coefficient = match (s.window, s.alpha.value()) {
                (Some(n), _) => format!("N = {n}"),
                (None, Some(a)) => format!("alpha = {}", sig3(a)),
                _ => "unknown".into(),
            };
            let rules: Vec<&str> = result
                .findings
                .iter()
                .filter(|x| x.smoother == Some(i) && x.suppressed.is_none() && !x.baselined)
                .map(|x| x.rule)
                .collect();
            out.push_str(&format!(
                "| {} | {}:{} | {} | {} | {} | {} | {} | {} |\n",
                code(&result.ids[i]),
                cell(scan.program.path(s.span.file)),
                s.span.line,
                coefficient,
                s.rate.hz.map(hertz).unwrap_or_else(|| "?".into()),
                own.and_then(|o| o.cutoff_hertz)
                    .map(|h| hertz(h.0))
                    .unwrap_or_else(|| "-".into()),
                own.and_then(|o| o.lag_seconds)
                    .map(|t| seconds(t.0))
                    .unwrap_or_else(|| "-".into()),
                s.dead_band
                    .map(|d| format!("+{}/-{}", d.rising, d.falling))
                    .unwrap_or_else(|| "-".into()),
                rules.join(", ")
            ));
        }
        out.push('\n');
    }
    if !result.findings.is_empty() {
        out.push_str("<details><summary>All findings</summary>\n\n");
        for f in &result.findings {
            let place = match (f.span, f.spec_line) {
                (Some(span), _) => format!("{}:{}", scan.program.path(span.file), span.line),
                (None, Some(line)) => format!("spec line {line}"),
                _ => String::new(),
            };
            out.push_str(&format!(
                "- **{}** `{}` at {}: {}",
                f.severity.name(),
                f.rule,
                cell(&place),
                rich(&f.message)
            ));
            let details = crate::report::finding_details(
                f.help.as_deref(),
                f.suppressed.as_deref(),
                f.baselined,
            );
            for line in details {
                out.push_str(&format!("  \n  {}", rich(&line)));
            }
            out.push('\n');
        }
        out.push_str("\n</details>\n");
    }
    out
}

#[cfg(test)]
mod tests {
    use super::{cell, code, rich};

    #[test]
    fn cells_cannot_break_the_table_or_inject_markup() {
        assert_eq!(cell("a|b<script>&"), "a\\|b&lt;script&gt;&amp;");
        assert_eq!(cell("x\ny"), "x y");
    }

    #[test]
    fn c_text_is_shown_as_written_in_code_spans() {
        // CommonMark 0.31, "Code spans": no entity or markup inside; GFM tables need `\|`.
        assert_eq!(code("f->y"), "`f->y`");
        assert_eq!(code("a|b"), "`a\\|b`");
        assert_eq!(code("x`y"), "``x`y``");
        assert_eq!(
            rich("`f->y` rests 7 below <u>"),
            "`f->y` rests 7 below &lt;u&gt;"
        );
        assert_eq!(rich("odd ` tick"), cell("odd ` tick"));
    }
}

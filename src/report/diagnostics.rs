//! Compiler-style diagnostics for `tauscan check`, rendered with codespan-reporting.
//!
//! Each finding shows its rule, severity and message, the update line (primary label),
//! the coefficient's definition and the rate's source (secondary labels), and a `help:`
//! with the constant that would meet the requirement. Source text is made safe for the
//! terminal first, byte for byte, so labels still land where they should. Suppressed
//! findings are counted, not shown.

use crate::check::CheckResult;
use crate::ir::FileId;
use crate::rules::Finding;
use crate::scan::Scan;
use crate::spec::Severity;
use codespan_reporting::diagnostic::{Diagnostic, Label};
use codespan_reporting::files::SimpleFiles;
use codespan_reporting::term::{self, termcolor};
use std::collections::HashMap;

/// Bytes as text of the same length: control characters (but newline and tab) and bytes
/// that are not UTF-8 become `?`, so byte offsets from the parser still point right.
pub fn safe_source(bytes: &[u8]) -> String {
    let mut out = String::with_capacity(bytes.len());
    let mut rest = bytes;
    while !rest.is_empty() {
        match std::str::from_utf8(rest) {
            Ok(text) => {
                push_safe(&mut out, text);
                break;
            }
            Err(e) => {
                let (good, bad) = rest.split_at(e.valid_up_to());
                push_safe(&mut out, std::str::from_utf8(good).unwrap_or(""));
                let skip = e.error_len().unwrap_or(bad.len()).max(1);
                out.extend(std::iter::repeat_n('?', skip));
                rest = &bad[skip.min(bad.len())..];
            }
        }
    }
    out
}

fn push_safe(out: &mut String, text: &str) {
    for c in text.chars() {
        if c.is_control() && c != '\n' && c != '\t' && c != '\r' {
            // Keep the byte length: a control character is one byte in UTF-8 below 0x80,
            // two for C1 controls.
            out.extend(std::iter::repeat_n('?', c.len_utf8()));
        } else {
            out.push(c);
        }
    }
}

/// Adds a scanned file to the rendering's file set on first use and returns its id there.
type FileIdOf<'a> = dyn FnMut(&mut SimpleFiles<String, String>, FileId) -> Option<usize> + 'a;

/// The rendering inputs the CLI gathers: file texts and the spec's text.
pub struct Sources<'a> {
    pub read: &'a dyn Fn(FileId) -> Option<Vec<u8>>,
    pub spec: Option<(String, String)>,
}

fn line_range(text: &str, line: u32) -> std::ops::Range<usize> {
    let mut start = 0;
    for (i, l) in text.split_inclusive('\n').enumerate() {
        if i + 1 == line as usize {
            let trimmed = l.trim_end_matches(['\n', '\r']);
            let indent = trimmed.len() - trimmed.trim_start().len();
            return start + indent..start + trimmed.len();
        }
        start += l.len();
    }
    start..start
}

pub fn render(scan: &Scan, result: &CheckResult, sources: &Sources, color: bool) -> String {
    let mut files = SimpleFiles::new();
    let mut ids: HashMap<FileId, usize> = HashMap::new();
    let mut file_id = |files: &mut SimpleFiles<String, String>, f: FileId| -> Option<usize> {
        if let Some(id) = ids.get(&f) {
            return Some(*id);
        }
        let text = safe_source(&(sources.read)(f)?);
        let id = files.add(crate::report::neutral(scan.program.path(f)), text);
        ids.insert(f, id);
        Some(id)
    };
    let spec_id = sources
        .spec
        .as_ref()
        .map(|(name, text)| files.add(crate::report::neutral(name), safe_source(text.as_bytes())));
    let spec_text = sources
        .spec
        .as_ref()
        .map(|(_, t)| safe_source(t.as_bytes()));

    let mut buffer = if color {
        termcolor::Buffer::ansi()
    } else {
        termcolor::Buffer::no_color()
    };
    let config = term::Config::default();
    let mut counts: HashMap<Severity, usize> = HashMap::new();
    let mut suppressed = 0;
    let mut baselined = 0;
    for f in &result.findings {
        if f.suppressed.is_some() {
            suppressed += 1;
            continue;
        }
        if f.baselined {
            baselined += 1;
            continue;
        }
        *counts.entry(f.severity).or_insert(0) += 1;
        let diagnostic = diagnostic_of(
            scan,
            f,
            &mut files,
            &mut file_id,
            spec_id,
            spec_text.as_deref(),
        );
        let _ = term::emit(&mut buffer, &config, &files, &diagnostic);
    }
    let mut out = String::from_utf8_lossy(buffer.as_slice()).into_owned();
    let n = |s: Severity| counts.get(&s).copied().unwrap_or(0);
    let plural = |k: usize, word: &str| format!("{k} {word}{}", if k == 1 { "" } else { "s" });
    out.push_str(&format!(
        "{}, {}, {} over {} in {}{}.\n",
        plural(n(Severity::Error), "error"),
        plural(n(Severity::Warning), "warning"),
        plural(n(Severity::Note), "note"),
        plural(scan.recognition.smoothers.len(), "smoother"),
        plural(scan.program.files.len(), "file"),
        match (suppressed, baselined) {
            (0, 0) => String::new(),
            (s, 0) => format!(" ({s} suppressed with a reason)"),
            (0, b) => format!(" ({b} known from the baseline)"),
            (s, b) => format!(" ({s} suppressed with a reason, {b} known from the baseline)"),
        }
    ));
    out
}

fn diagnostic_of(
    scan: &Scan,
    f: &Finding,
    files: &mut SimpleFiles<String, String>,
    file_id: &mut FileIdOf,
    spec_id: Option<usize>,
    spec_text: Option<&str>,
) -> Diagnostic<usize> {
    let base = match f.severity {
        Severity::Error => Diagnostic::error(),
        Severity::Warning => Diagnostic::warning(),
        Severity::Note => Diagnostic::note(),
    };
    let mut d = base
        .with_code(f.rule)
        .with_message(crate::report::neutral(&f.message));
    let mut labels = Vec::new();
    if let Some(span) = f.span {
        if let Some(id) = file_id(files, span.file) {
            let range = span.start as usize..span.end as usize;
            let what = match f.smoother.and_then(|i| scan.recognition.smoothers.get(i)) {
                Some(s) if s.definition.is_some() => "this call is the smoother",
                _ => "this update",
            };
            labels.push(Label::primary(id, range).with_message(what));
        }
    }
    if let (Some(line), Some(id), Some(text)) = (f.spec_line, spec_id, spec_text) {
        labels.push(
            Label::primary(id, line_range(text, line as u32)).with_message("this spec entry"),
        );
    }
    for l in &f.labels {
        let Some(id) = file_id(files, l.file) else {
            continue;
        };
        let range = match l.range {
            Some((a, b)) => a as usize..b as usize,
            None => {
                let text = files
                    .get(id)
                    .map(|x| x.source().clone())
                    .unwrap_or_default();
                line_range(&text, l.line)
            }
        };
        labels.push(Label::secondary(id, range).with_message(crate::report::neutral(&l.message)));
    }
    d = d.with_labels(labels);
    if let Some(help) = &f.help {
        d = d.with_notes(vec![format!("help: {}", crate::report::neutral(help))]);
    }
    d
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unsafe_bytes_keep_their_offsets() {
        let raw = b"a\x1b[2Jb\xffc\n";
        let text = safe_source(raw);
        assert_eq!(text.len(), raw.len());
        assert!(!text.contains('\x1b'));
        assert_eq!(&text[6..8], "?c");
    }
}

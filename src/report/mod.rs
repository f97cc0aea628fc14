//! Rendering: the scan's smoothers and notes as a terminal table, the versioned JSON, or the
//! smoother document (`document`, drawn by `html` with `plot`'s SVG, or by `document_md`).
//!
//! Only this module knows serde and output formats. Every string that comes from the
//! scanned files passes `neutral` before it reaches a terminal, so control characters and
//! escape sequences in source text cannot drive the reader's terminal. Files are written
//! whole or not at all (`write_atomically`).

pub mod baseline;
pub mod diagnostics;
pub mod diff;
pub mod document;
pub mod document_md;
pub mod html;
pub mod json;
pub mod markdown;
pub mod plot;
pub mod sarif;
pub mod starter_spec;
pub mod table;

use std::io::Write;
use std::path::Path;

/// Source text made safe for a terminal: control characters shown as `\u{..}` escapes.
pub fn neutral(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c.is_control() && c != '\t' {
            out.push_str(&format!("\\u{{{:x}}}", c as u32));
        } else {
            out.push(c);
        }
    }
    out
}

/// Like `neutral`, for multi-line text: newlines stay.
pub fn neutral_keep_newlines(text: &str) -> String {
    text.split('\n').map(neutral).collect::<Vec<_>>().join("\n")
}

/// The lines written under a finding's message in the Markdown and HTML outputs, as plain
/// text (each output escapes them its own way): its help, the reason of the suppression
/// that applies, and whether the baseline knows it.
pub fn finding_details(
    help: Option<&str>,
    suppressed: Option<&str>,
    baselined: bool,
) -> Vec<String> {
    let mut lines = Vec::new();
    if let Some(help) = help {
        lines.push(format!("help: {help}"));
    }
    if let Some(reason) = suppressed {
        lines.push(format!("suppressed in the source: {reason}"));
    }
    if baselined {
        lines.push("known from the baseline".to_string());
    }
    lines
}

/// Writes `contents` to `path` through a temporary file in the same folder and a rename,
/// so that a reader never sees a half-written file.
pub fn write_atomically(path: &Path, contents: &[u8]) -> std::io::Result<()> {
    write_atomically_with(path, |w| w.write_all(contents))
}

/// As `write_atomically`, with the contents written by `write` (buffered): output too
/// large to hold as one string goes to the file as it is made.
pub fn write_atomically_with(
    path: &Path,
    write: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let folder = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or_else(|| Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    // Unique per process and per call: the parse cache writes from several threads, and
    // two of them may write the same entry at once.
    static SERIAL: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
    let serial = SERIAL.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let temporary = folder.join(format!(
        ".{name}.tauscan-{}-{serial}.tmp",
        std::process::id()
    ));
    let result = (|| {
        let mut file = std::io::BufWriter::new(std::fs::File::create(&temporary)?);
        write(&mut file)?;
        let file = file.into_inner().map_err(|e| e.into_error())?;
        file.sync_all()?;
        std::fs::rename(&temporary, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&temporary);
    }
    result
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_cannot_reach_the_terminal() {
        assert_eq!(neutral("y\x1b[2Jx"), "y\\u{1b}[2Jx");
        assert_eq!(neutral("plain"), "plain");
    }
}

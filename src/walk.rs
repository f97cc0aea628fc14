//! Which files to read: the C sources and headers under the paths given, in a stable order.
//!
//! Folders of build output and version control are skipped; links are followed only while
//! they stay inside the scan root, and link loops are reported, not followed. A file that
//! cannot be read becomes a `WalkProblem`, never an abort. Reading the bytes is left to
//! the caller (so that it can happen in parallel, one file at a time, without keeping
//! every file in memory at once).

use std::path::{Path, PathBuf};

/// Folders never worth reading.
const SKIPPED_DIRS: &[&str] = &[
    ".git",
    ".svn",
    ".hg",
    "build",
    "target",
    "node_modules",
    ".cache",
    "CMakeFiles",
];

#[derive(Debug, Clone)]
pub struct SourcePath {
    pub absolute: PathBuf,
    /// Relative to the scan root, with '/' separators.
    pub relative: String,
    /// Named on the command line (not found by walking a folder).
    pub named: bool,
}

#[derive(Debug, Clone)]
pub struct WalkProblem {
    pub path: String,
    pub message: String,
    /// True when a file that should have been read was not (the scan is incomplete);
    /// false for what was left out on purpose (a link loop, a link out of the root).
    pub incomplete: bool,
}

#[derive(Debug, Default)]
pub struct WalkResult {
    pub root: PathBuf,
    pub files: Vec<SourcePath>,
    pub problems: Vec<WalkProblem>,
    /// A path given on the command line that does not exist or cannot be read: the scan
    /// is incomplete, which a gate must not take as a pass.
    pub missing_inputs: bool,
}

fn is_c_source(path: &Path) -> bool {
    matches!(
        path.extension().and_then(|e| e.to_str()),
        Some("c") | Some("h")
    )
}

/// The scan root: a single folder given is its own root; a single file, its folder;
/// several paths, the current folder.
pub fn scan_root(paths: &[PathBuf]) -> PathBuf {
    match paths {
        [one] if one.is_dir() => one.clone(),
        [one] => one
            .parent()
            .map(Path::to_path_buf)
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or_else(|| PathBuf::from(".")),
        _ => PathBuf::from("."),
    }
}

pub fn relative_to(root: &Path, path: &Path) -> String {
    let rel = path.strip_prefix(root).unwrap_or(path);
    let text = rel.to_string_lossy().replace('\\', "/");
    text.trim_start_matches("./").to_string()
}

/// Lists the C files under `paths`, with paths relative to `root` (default: `scan_root`).
pub fn walk(paths: &[PathBuf], root: Option<&Path>, excluded: &dyn Fn(&str) -> bool) -> WalkResult {
    let root = root
        .map(Path::to_path_buf)
        .unwrap_or_else(|| scan_root(paths));
    let canonical_root = root.canonicalize().unwrap_or_else(|_| root.clone());
    let mut result = WalkResult {
        root: root.clone(),
        ..WalkResult::default()
    };
    let mut seen = std::collections::HashSet::new();
    for path in paths {
        if std::fs::symlink_metadata(path).is_err() {
            result.problems.push(WalkProblem {
                path: path.to_string_lossy().into_owned(),
                message: "no such file or folder".into(),
                incomplete: true,
            });
            result.missing_inputs = true;
            continue;
        }
        let mut entries = walkdir::WalkDir::new(path)
            .follow_links(true)
            .sort_by_file_name()
            .into_iter()
            .filter_entry(|e| {
                !(e.file_type().is_dir()
                    && e.depth() > 0
                    && e.file_name()
                        .to_str()
                        .is_some_and(|n| SKIPPED_DIRS.contains(&n)))
            });
        while let Some(entry) = entries.next() {
            let entry = match entry {
                Ok(e) => e,
                Err(err) => {
                    let where_ = err
                        .path()
                        .map(|p| relative_to(&root, p))
                        .unwrap_or_else(|| path.to_string_lossy().into_owned());
                    let (message, incomplete) = if err.loop_ancestor().is_some() {
                        (
                            "a link loops back to a folder above it; not followed".to_string(),
                            false,
                        )
                    } else {
                        let text = err
                            .io_error()
                            .map(|e| e.to_string())
                            .unwrap_or_else(|| err.to_string());
                        (text, true)
                    };
                    result.problems.push(WalkProblem {
                        path: where_,
                        message,
                        incomplete,
                    });
                    continue;
                }
            };
            let inside = || {
                entry
                    .path()
                    .canonicalize()
                    .map(|p| p.starts_with(&canonical_root))
                    .unwrap_or(false)
            };
            if entry.path_is_symlink() && entry.depth() > 0 && !inside() {
                result.problems.push(WalkProblem {
                    path: relative_to(&root, entry.path()),
                    message: "a link that leads outside the scan root; not followed".into(),
                    incomplete: false,
                });
                if entry.file_type().is_dir() {
                    entries.skip_current_dir();
                }
                continue;
            }
            if entry.file_type().is_dir() {
                continue;
            }
            if !is_c_source(entry.path()) {
                // A file named on the command line that is not C is a mistake to say, not
                // something to skip in silence.
                if entry.depth() == 0 {
                    result.problems.push(WalkProblem {
                        path: relative_to(&root, entry.path()),
                        message: "is not a C source or header (.c, .h); not read".into(),
                        incomplete: true,
                    });
                }
                continue;
            }
            if !entry.file_type().is_file() {
                // A FIFO or device named like a source: opening it could block forever.
                result.problems.push(WalkProblem {
                    path: relative_to(&root, entry.path()),
                    message: "not a regular file; not read".into(),
                    incomplete: true,
                });
                continue;
            }
            // The same file reached twice (through a link, or two overlapping paths) is
            // read once.
            let identity = entry
                .path()
                .canonicalize()
                .unwrap_or_else(|_| entry.path().to_path_buf());
            if !seen.insert(identity) {
                continue;
            }
            let relative = relative_to(&root, entry.path());
            if excluded(&relative) {
                continue;
            }
            result.files.push(SourcePath {
                absolute: entry.path().to_path_buf(),
                relative,
                named: entry.depth() == 0,
            });
        }
    }
    result.files.sort_by(|a, b| a.relative.cmp(&b.relative));
    // A gate pointed at the wrong folder must not pass on nothing.
    if result.files.is_empty() && !result.problems.iter().any(|p| p.incomplete) {
        result.problems.push(WalkProblem {
            path: root.to_string_lossy().into_owned(),
            message: "no C source or header (.c, .h) was found under the paths given".into(),
            incomplete: true,
        });
    }
    result.files.dedup_by(|a, b| a.relative == b.relative);
    result
}

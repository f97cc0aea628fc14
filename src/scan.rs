//! One scan: the listed files read and parsed in parallel, the program indexed, the
//! smoothers recognised and their figures computed.
//!
//! Each file is read and parsed on a worker thread and only its IR is kept (the syntax
//! tree and the bytes are dropped as soon as the file is lowered, or, for a file with
//! copies, once its copies are compared with it), so memory follows the IR, not the
//! trees. Problems with single files are collected as notes; the scan goes on.

use crate::cache::{Cache, Entry};
use crate::figures::{self, SmootherFigures};
use crate::index::{Program, ProgramOptions};
use crate::ir::{FileId, FileIr};
use crate::recognise::{self, RecogniseOptions, Recognition};
use crate::walk::{self, WalkResult};
use rayon::prelude::*;
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};

#[derive(Debug, Clone, Default)]
pub struct ScanOptions {
    pub paths: Vec<PathBuf>,
    pub program: ProgramOptions,
    pub recognise: RecogniseOptions,
    /// Globs over relative paths (with '/') not to read.
    pub exclude: Vec<String>,
    /// When not empty, only relative paths matching one of these globs are read.
    pub include: Vec<String>,
    /// The folder paths are reported relative to (default: the one folder given, or the
    /// current one).
    pub root: Option<PathBuf>,
    /// Where to keep each file's lowered IR between scans (`--cache`).
    pub cache: Option<Cache>,
    /// Counters a caller may show while the scan runs (the CLI's progress line).
    pub progress: Option<std::sync::Arc<Progress>>,
}

/// How far a scan has come, as counters another thread may read at any time: the files
/// found, read and recognised, and the smoothers found so far. Nothing is drawn here.
#[derive(Debug, Default)]
pub struct Progress {
    pub files_total: AtomicUsize,
    pub files_read: AtomicUsize,
    pub files_recognised: AtomicUsize,
    pub smoothers: AtomicUsize,
}

impl Progress {
    pub fn get(counter: &AtomicUsize) -> usize {
        counter.load(Ordering::Relaxed)
    }

    pub(crate) fn add(counter: &AtomicUsize, n: usize) {
        counter.fetch_add(n, Ordering::Relaxed);
    }
}

/// A file's IR: from the cache when it has this file's bytes, else parsed (and stored);
/// with a cache, the file's entry too.
fn lower(id: FileId, bytes: &[u8], cache: Option<&Cache>) -> (FileIr, Option<Entry>) {
    let Some(cache) = cache else {
        return (parse_packed(id, bytes), None);
    };
    let entry = cache.entry(bytes);
    if let Some(ir) = cache.load(&entry, id) {
        return (ir, Some(entry));
    }
    let ir = parse_packed(id, bytes);
    cache.store(&entry, &ir);
    (ir, Some(entry))
}

/// A file's IR with its function bodies parked ([`crate::ir::Body`]), copied once its
/// syntax tree is freed. The lowering allocates the IR between the tree's nodes, so
/// freeing the tree leaves holes around IR that is kept to the end; the copy fills such
/// holes instead (measured: MESC's peak 293 -> 282 MB, the generated 1M-line tree's 741 ->
/// 673 MB, at a cost within the benchmark's noise). Parking the bodies took the IR after
/// reading from 297 to 88 MB on the generated 1M-line tree and from 173 to 93 MB on MESC.
fn parse_packed(id: FileId, bytes: &[u8]) -> FileIr {
    let mut lowered = crate::parse::parse_file(id, bytes);
    for f in &mut lowered.functions {
        f.body.park();
    }
    lowered.clone()
}

/// One file as read: its IR, why it could not be read (if so), and its cache entry.
type Read = (FileIr, Option<String>, Option<Entry>);

/// A note about one file or the scan as a whole, for stderr and the JSON `notes`.
#[derive(Debug, Clone, PartialEq)]
pub struct ScanNote {
    pub file: String,
    pub line: Option<u32>,
    pub message: String,
    /// True when the note means results may be missing (an unreadable file).
    pub incomplete: bool,
}

pub struct Scan {
    pub root: PathBuf,
    pub program: Program,
    pub recognition: Recognition,
    pub figures: Vec<SmootherFigures>,
    pub notes: Vec<ScanNote>,
    /// A path given does not exist or a file could not be read.
    pub incomplete: bool,
}

impl Scan {
    /// The stable id of each smoother: path, function and state; a repeat gets `#2`, `#3`.
    pub fn ids(&self) -> Vec<String> {
        let mut seen: std::collections::BTreeMap<String, u32> = std::collections::BTreeMap::new();
        self.recognition
            .smoothers
            .iter()
            .map(|s| {
                let base = format!(
                    "{}::{}::{}",
                    self.program.path(s.span.file),
                    s.function,
                    s.state
                );
                let n = seen.entry(base.clone()).or_insert(0);
                *n += 1;
                if *n == 1 {
                    base
                } else {
                    format!("{base}#{n}")
                }
            })
            .collect()
    }
}

fn excluded(patterns: &[String], relative: &str) -> bool {
    patterns.iter().any(|p| glob_match(p, relative))
}

/// A small glob: `*` within a path part, `**` across parts, `?` one character.
pub fn glob_match(pattern: &str, text: &str) -> bool {
    fn go(p: &[u8], t: &[u8]) -> bool {
        match (p.first(), t.first()) {
            (None, None) => true,
            (Some(b'*'), _) if p.get(1) == Some(&b'*') => {
                let rest = p[2..].strip_prefix(b"/").unwrap_or(&p[2..]);
                (0..=t.len()).any(|i| go(rest, &t[i..]))
            }
            (Some(b'*'), _) => (0..=t.len())
                .take_while(|&i| i == 0 || t[i - 1] != b'/')
                .any(|i| go(&p[1..], &t[i..])),
            (Some(b'?'), Some(c)) if *c != b'/' => go(&p[1..], &t[1..]),
            (Some(a), Some(b)) if a == b => go(&p[1..], &t[1..]),
            _ => false,
        }
    }
    go(pattern.as_bytes(), text.as_bytes())
}

/// What a parse-only pass saw (for the benchmark's baseline).
#[derive(Debug, Clone, Copy, Default)]
pub struct ParseOnly {
    pub files: usize,
    pub bytes: u64,
    pub lines: u64,
}

/// Walks and parses every file exactly as `run` does (same walker, same pool, same
/// lowering) and keeps nothing: the floor the full check is measured against.
pub fn parse_only(options: &ScanOptions) -> ParseOnly {
    read_and(options, |i, bytes| {
        drop(crate::parse::parse_file(FileId(i as u32), bytes));
    })
}

/// Walks and reads every file and parses it with tree-sitter alone, in parallel, keeping
/// nothing: the floor `bench/` measures the scan against.
pub fn bare_parse(options: &ScanOptions) -> ParseOnly {
    read_and(options, |_, bytes| {
        crate::parse::bare_parse(bytes);
    })
}

/// Walks the paths and runs `each` on every file's bytes on the worker pool, counting.
fn read_and(options: &ScanOptions, each: impl Fn(usize, &[u8]) + Sync) -> ParseOnly {
    let work = || {
        let skip = |rel: &str| excluded(&options.exclude, rel);
        let walked = walk::walk(&options.paths, options.root.as_deref(), &skip);
        walked
            .files
            .par_iter()
            .enumerate()
            .map(|(i, source)| match std::fs::read(&source.absolute) {
                Ok(bytes) => {
                    each(i, &bytes);
                    ParseOnly {
                        files: 1,
                        bytes: bytes.len() as u64,
                        lines: bytes.iter().filter(|b| **b == b'\n').count() as u64,
                    }
                }
                Err(_) => ParseOnly::default(),
            })
            .reduce(ParseOnly::default, |a, b| ParseOnly {
                files: a.files + b.files,
                bytes: a.bytes + b.bytes,
                lines: a.lines + b.lines,
            })
    };
    match rayon::ThreadPoolBuilder::new()
        .stack_size(WORKER_STACK)
        .build()
    {
        Ok(pool) => pool.install(work),
        Err(_) => work(),
    }
}

/// Prints how long a stage of the scan took on standard error when the environment sets
/// `TAUSCAN_PHASES` (for developers measuring the scan; `bench/README.md`).
pub fn phase(name: &str, since: std::time::Instant) {
    static ON: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    if *ON.get_or_init(|| std::env::var_os("TAUSCAN_PHASES").is_some()) {
        // The resident memory at the stage's end, where the system tells it (Linux).
        let rss = std::fs::read_to_string("/proc/self/status")
            .ok()
            .and_then(|status| {
                let line = status.lines().find(|l| l.starts_with("VmRSS:"))?;
                let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
                Some(format!("  rss {:6.1} MB", kb as f64 / 1024.0))
            })
            .unwrap_or_default();
        eprintln!(
            "phase {name:<14} {:8.3} s{rss}",
            since.elapsed().as_secs_f64()
        );
    }
}

/// Stack for each worker: lowering and recognition recurse over the syntax, which a
/// generated state machine can nest deeply, and debug builds use large frames.
pub const WORKER_STACK: usize = 64 << 20;

/// Reads, parses and analyses the files under `options.paths`, on a pool of worker
/// threads with deep stacks (the whole scan runs there, not only the parsing).
pub fn run(options: &ScanOptions) -> Scan {
    match rayon::ThreadPoolBuilder::new()
        .stack_size(WORKER_STACK)
        .build()
    {
        Ok(pool) => pool.install(|| run_here(options)),
        // Without a pool of our own, the global one still does the work.
        Err(_) => run_here(options),
    }
}

fn run_here(options: &ScanOptions) -> Scan {
    let include: Vec<globset::GlobMatcher> = options
        .include
        .iter()
        .filter_map(|g| globset::Glob::new(g).ok().map(|g| g.compile_matcher()))
        .collect();
    let skip = |rel: &str| {
        excluded(&options.exclude, rel)
            || (!include.is_empty() && !include.iter().any(|m| m.is_match(rel)))
    };
    let started = std::time::Instant::now();
    let walked: WalkResult = walk::walk(&options.paths, options.root.as_deref(), &skip);
    phase("walk", started);
    let started = std::time::Instant::now();
    let notes: Vec<ScanNote> = walked
        .problems
        .iter()
        .map(|p| ScanNote {
            file: p.path.clone(),
            line: None,
            message: p.message.clone(),
            incomplete: p.incomplete,
        })
        .collect();
    let incomplete = walked.missing_inputs || walked.problems.iter().any(|p| p.incomplete);
    if let Some(p) = &options.progress {
        Progress::add(&p.files_total, walked.files.len());
    }

    let parsed = read_and_lower(&walked.files, options);
    phase("read+lower", started);
    let paths: Vec<String> = walked.files.iter().map(|f| f.relative.clone()).collect();
    analyse(walked.root, parsed, paths, notes, incomplete, options)
}

/// Files smaller than this are parsed even when another file holds the same bytes:
/// fingerprinting them would cost about what it saves.
const SHARED_MIN_BYTES: u64 = 4096;

/// Reads and lowers every file, in parallel and in walk order. A file whose bytes are
/// exactly another's (a vendor's headers copied per board) is not parsed again: it gets
/// a clone of the first copy's IR moved to its own `FileId` (`FileIr::move_to`; the
/// lowering reads nothing but the bytes, as the per-file cache also relies on).
fn read_and_lower(files: &[walk::SourcePath], options: &ScanOptions) -> Vec<Read> {
    let progress = |n: usize| {
        if let Some(p) = &options.progress {
            Progress::add(&p.files_read, n);
        }
    };
    // Each group is a file and the later files that may hold its bytes, read by one
    // worker in turn, so that only one file's bytes wait for its copies.
    let mut groups: Vec<Vec<usize>> = Vec::with_capacity(files.len());
    let mut group_of: Vec<usize> = Vec::with_capacity(files.len());
    for (i, first) in first_copies(files).into_iter().enumerate() {
        match first {
            Some(f) => {
                let g = group_of[f];
                groups[g].push(i);
                group_of.push(g);
            }
            None => {
                group_of.push(groups.len());
                groups.push(vec![i]);
            }
        }
    }
    let read: Vec<Vec<(usize, Read)>> = groups
        .par_iter()
        .map(|group| {
            let mut out = Vec::with_capacity(group.len());
            let (&first, copies) = match group.split_first() {
                Some(split) => split,
                None => return out,
            };
            progress(1);
            let (read, bytes) = read_one(FileId(first as u32), &files[first], options);
            // The first copy's bytes, kept while its copies are compared with them.
            let shared = match bytes {
                Some(bytes) if !copies.is_empty() && read.1.is_none() => Some(bytes),
                _ => None,
            };
            let entry = read.2.clone();
            out.push((first, read));
            for &i in copies {
                progress(1);
                let id = FileId(i as u32);
                let source = &files[i];
                let read = match std::fs::read(&source.absolute) {
                    Ok(bytes) => {
                        // Equal bytes, compared here (the fingerprint only grouped them).
                        let same = shared.as_ref().is_some_and(|first_bytes| {
                            *first_bytes == bytes && !(source.named && bytes.contains(&0))
                        });
                        let copied = match out.first() {
                            Some((_, (first_ir, _, _))) if same => {
                                let mut ir = first_ir.clone();
                                ir.move_to(id);
                                Some(ir)
                            }
                            _ => None,
                        };
                        match copied {
                            Some(ir) => (ir, None, entry.clone()),
                            None => read_bytes(id, source, &bytes, options),
                        }
                    }
                    Err(e) => placeholder(id, Some(format!("cannot be read: {e}"))),
                };
                out.push((i, read));
            }
            out
        })
        .collect();
    let mut out: Vec<Option<Read>> = Vec::new();
    out.resize_with(files.len(), || None);
    for (i, r) in read.into_iter().flatten() {
        out[i] = Some(r);
    }
    out.into_iter()
        .enumerate()
        .map(|(i, r)| r.unwrap_or_else(|| placeholder(FileId(i as u32), None)))
        .collect()
}

/// For each file, the index of an earlier file with the same bytes, if any (by length,
/// then by a fingerprint of the bytes; `read_and_lower` compares the bytes themselves).
fn first_copies(files: &[walk::SourcePath]) -> Vec<Option<usize>> {
    use std::collections::HashMap;
    use std::hash::{Hash, Hasher};
    let lengths: Vec<Option<u64>> = files
        .par_iter()
        .map(|f| std::fs::metadata(&f.absolute).ok().map(|m| m.len()))
        .collect();
    let mut by_length: HashMap<u64, usize> = HashMap::new();
    for len in lengths.iter().flatten() {
        *by_length.entry(*len).or_default() += 1;
    }
    let shared_length =
        |len: &Option<u64>| matches!(len, Some(n) if *n >= SHARED_MIN_BYTES && by_length[n] > 1);
    let prints: Vec<Option<(u64, u64)>> = files
        .par_iter()
        .zip(&lengths)
        .map(|(f, len)| {
            if !shared_length(len) {
                return None;
            }
            let bytes = std::fs::read(&f.absolute).ok()?;
            let mut hasher = std::collections::hash_map::DefaultHasher::new();
            bytes.hash(&mut hasher);
            Some((bytes.len() as u64, hasher.finish()))
        })
        .collect();
    let mut first: HashMap<(u64, u64), usize> = HashMap::new();
    prints
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let p = (*p)?;
            match first.get(&p) {
                Some(&f) => Some(f),
                None => {
                    first.insert(p, i);
                    None
                }
            }
        })
        .collect()
}

/// A file that yields no IR: why, when it is an error.
fn placeholder(id: FileId, error: Option<String>) -> Read {
    (
        FileIr {
            file: id,
            ..FileIr::default()
        },
        error,
        None,
    )
}

/// One file read and lowered; its bytes too, when it could be read.
fn read_one(
    id: FileId,
    source: &walk::SourcePath,
    options: &ScanOptions,
) -> (Read, Option<Vec<u8>>) {
    match std::fs::read(&source.absolute) {
        Ok(bytes) => {
            let read = read_bytes(id, source, &bytes, options);
            (read, Some(bytes))
        }
        Err(e) => (placeholder(id, Some(format!("cannot be read: {e}"))), None),
    }
}

fn read_bytes(id: FileId, source: &walk::SourcePath, bytes: &[u8], options: &ScanOptions) -> Read {
    // A file named on the command line that holds NUL bytes is not C text.
    if source.named && bytes.contains(&0) {
        return placeholder(
            id,
            Some("holds NUL bytes: not C source text; not read".to_string()),
        );
    }
    let (ir, entry) = lower(id, bytes, options.cache.as_ref());
    (ir, None, entry)
}

/// Parses and analyses sources held in memory (name, bytes), as `run` does files: for
/// callers that have no tree on disk (the fuzz targets and their corpus replay).
pub fn run_sources(sources: &[(String, Vec<u8>)], options: &ScanOptions) -> Scan {
    let parsed = sources
        .par_iter()
        .enumerate()
        .map(|(i, (_, bytes))| {
            (
                crate::parse::parse_file(FileId(i as u32), bytes),
                None,
                None,
            )
        })
        .collect();
    let paths = sources.iter().map(|(name, _)| name.clone()).collect();
    analyse(PathBuf::new(), parsed, paths, Vec::new(), false, options)
}

/// Everything after reading: notes from the lowering, the index, recognition, figures.
fn analyse(
    root: PathBuf,
    parsed: Vec<Read>,
    paths: Vec<String>,
    mut notes: Vec<ScanNote>,
    mut incomplete: bool,
    options: &ScanOptions,
) -> Scan {
    let mut files = Vec::with_capacity(parsed.len());
    let mut entries = Vec::with_capacity(parsed.len());
    for (ir, read_error, entry) in parsed {
        entries.push(entry);
        let path = paths[ir.file.0 as usize].clone();
        if let Some(message) = read_error {
            incomplete = true;
            notes.push(ScanNote {
                file: path.clone(),
                line: None,
                message,
                incomplete: true,
            });
        }
        for problem in &ir.problems {
            notes.push(ScanNote {
                file: path.clone(),
                line: Some(problem.span.line),
                message: problem.message.clone(),
                incomplete: false,
            });
        }
        files.push(ir);
    }
    let (program, recognition) = index_and_recognise(files, paths, entries, options);
    for note in &recognition.notes {
        notes.push(ScanNote {
            file: program.path(note.span.file).to_string(),
            line: Some(note.span.line),
            message: note.message.clone(),
            incomplete: false,
        });
    }
    let started = std::time::Instant::now();
    let figures = figures::for_all(&recognition.smoothers);
    phase("figures", started);
    Scan {
        root,
        program,
        recognition,
        figures,
        notes,
        incomplete,
    }
}

/// The program's index and its smoothers: from the cache when it holds this very tree
/// (every file's entry, path and the options), else built (and stored).
fn index_and_recognise(
    files: Vec<FileIr>,
    paths: Vec<String>,
    entries: Vec<Option<Entry>>,
    options: &ScanOptions,
) -> (Program, Recognition) {
    // Only a tree whose every file has an entry is one the cache can name.
    let cached = options.cache.as_ref().and_then(|cache| {
        let named: Option<Vec<(&str, &Entry)>> = paths
            .iter()
            .zip(&entries)
            .map(|(p, e)| e.as_ref().map(|e| (p.as_str(), e)))
            .collect();
        Some((
            cache,
            cache.program_entry(&named?, &options.program, &options.recognise),
        ))
    });
    let started = std::time::Instant::now();
    let (files, paths, program_options) = match &cached {
        Some((cache, entry)) => {
            match cache.load_program(entry, files, paths, options.program.clone()) {
                Ok((program, recognition)) => {
                    phase("cached", started);
                    if let Some(p) = &options.progress {
                        Progress::add(&p.files_recognised, program.files.len());
                        Progress::add(&p.smoothers, recognition.smoothers.len());
                    }
                    return (program, recognition);
                }
                Err(back) => back,
            }
        }
        None => (files, paths, options.program.clone()),
    };
    let program = Program::build(files, paths, program_options);
    phase("index", started);
    let started = std::time::Instant::now();
    let recognition =
        recognise::recognise_counting(&program, &options.recognise, options.progress.as_deref());
    phase("recognise", started);
    if let Some((cache, entry)) = &cached {
        cache.store_program(entry, &program, &recognition);
    }
    (program, recognition)
}

#[cfg(test)]
mod tests {
    use super::glob_match;

    #[test]
    fn globs_match_paths() {
        assert!(glob_match("vendor/**", "vendor/a/b.c"));
        assert!(glob_match("**/test_*.c", "src/x/test_vent.c"));
        assert!(glob_match("*.h", "vent.h"));
        assert!(!glob_match("*.h", "inc/vent.h"));
        assert!(glob_match("src/?ent.c", "src/vent.c"));
    }

    /// A copy's IR is the first file's, cloned and moved to the copy's id: exactly what
    /// lowering the bytes as that file gives, on every C file of the fixtures (the
    /// encoded forms compared, so a span `move_to` misses fails here).
    #[test]
    fn a_moved_clone_is_the_ir_lowered_as_that_file() {
        use crate::ir::FileId;
        let mut checked = 0;
        for (path, bytes) in crate::fixture_sources() {
            let first = crate::parse::parse_file(FileId(0), &bytes);
            let mut moved = first.clone();
            moved.move_to(FileId(7));
            let lowered = crate::parse::parse_file(FileId(7), &bytes);
            assert_eq!(
                postcard::to_stdvec(&moved).ok(),
                postcard::to_stdvec(&lowered).ok(),
                "{path}"
            );
            checked += 1;
        }
        assert!(checked > 50, "only {checked} fixture files");
    }

    #[test]
    fn parked_bodies_read_back_as_lowered_in_their_file() {
        use crate::ir::{Body, FileId};
        let mut checked = 0;
        for (path, bytes) in crate::fixture_sources() {
            // Parked as file 0 (as the scan does), then moved as a copy is.
            let mut moved = super::parse_packed(FileId(0), &bytes);
            moved.move_to(FileId(7));
            let lowered = crate::parse::parse_file(FileId(7), &bytes);
            assert_eq!(moved.functions.len(), lowered.functions.len());
            for (m, l) in moved.functions.iter().zip(&lowered.functions) {
                assert!(matches!(m.body, Body::Parked(_)), "{path}");
                assert!(matches!(l.body, Body::Live(_)));
                // The statements, file ids and all, read back as lowered.
                assert_eq!(*m.body(), *l.body(), "{path}: {}", l.name);
                assert_eq!(m.body.len(), l.body().len());
                assert_eq!(m.body, l.body);
                checked += 1;
            }
        }
        assert!(checked > 200, "only {checked} functions");
    }
}

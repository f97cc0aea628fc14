//! The `tauscan` command line: arguments in, a validated configuration, the scan, the
//! report, and an exit status a CI gate can trust.
//!
//! clap fills the raw arguments; `Config::from_args` validates them into values the core
//! understands (typed rate, defines, target), so the core never sees clap. Exit status:
//! 0 nothing wrong, 1 findings at or above the failure level (from `check`, later),
//! 2 usage, spec or I/O error, including an incomplete scan.

use anyhow::{bail, Context, Result};
use clap::{Parser, Subcommand, ValueEnum};
use std::collections::BTreeMap;
use std::io::IsTerminal;
use std::path::PathBuf;
use std::process::ExitCode;
use tauscan::eval::num::Target;
use tauscan::index::ProgramOptions;
use tauscan::recognise::RecogniseOptions;
use tauscan::report;
use tauscan::scan::{self, ScanOptions};

/// Exit statuses, documented in the README.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Status {
    Clean = 0,
    Findings = 1,
    ToolError = 2,
}

#[derive(Parser)]
#[command(
    name = "tauscan",
    version,
    about = "Finds the recursive smoothers in C firmware and says what they really do in Hz and seconds."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Clone, Copy, ValueEnum, PartialEq)]
enum FailOn {
    Error,
    Warning,
    Note,
}

impl FailOn {
    fn severity(self) -> tauscan::spec::Severity {
        match self {
            FailOn::Error => tauscan::spec::Severity::Error,
            FailOn::Warning => tauscan::spec::Severity::Warning,
            FailOn::Note => tauscan::spec::Severity::Note,
        }
    }
}

/// The formats of `list`.
#[derive(Clone, Copy, ValueEnum)]
enum ListFormat {
    Table,
    Json,
}

/// The formats of `diff`.
#[derive(Clone, Copy, ValueEnum)]
enum DiffFormat {
    Table,
    Json,
    /// A summary for a pull-request comment.
    Markdown,
}

/// The formats of `check`.
#[derive(Clone, Copy, ValueEnum)]
enum Format {
    Table,
    Json,
    /// SARIF 2.1.0.
    Sarif,
    /// A summary for a pull-request comment.
    Markdown,
}

#[derive(clap::Args)]
struct ScanArgs {
    /// Files or folders to scan (default: the current folder).
    paths: Vec<PathBuf>,
    /// Preprocessor value, as for a compiler: -D NAME or -D NAME=VALUE. Repeatable.
    #[arg(short = 'D', long = "define", value_name = "NAME[=VALUE]")]
    defines: Vec<String>,
    /// A rate to assume where the code gives none, e.g. "1kHz", "500 Hz", "2 ms".
    #[arg(long, value_name = "RATE")]
    rate: Option<String>,
    /// Width of `int` on the target, in bits (default: the spec's, else 32).
    #[arg(long, value_name = "BITS", value_parser = int_bits)]
    int_bits: Option<u8>,
    /// Paths (relative to the scan root) not to read; `*`, `**` and `?` work. Repeatable.
    #[arg(long, value_name = "GLOB")]
    exclude: Vec<String>,
    /// No progress line on standard error, even on a terminal.
    #[arg(short, long)]
    quiet: bool,
    /// Take the files and their -D/-I flags from a JSON compilation database.
    #[arg(long, value_name = "FILE")]
    compile_commands: Option<PathBuf>,
    /// Keep each file's parsed form, and the whole program's index and smoothers, in this
    /// folder, so that the next scan of unchanged files (or an unchanged tree) is faster.
    /// Safe to delete; never changes the results.
    #[arg(long, value_name = "DIR")]
    cache: Option<PathBuf>,
}

#[derive(Subcommand)]
enum Command {
    /// List every recursive smoother with its coefficient, rate and figures.
    #[command(
        after_help = "Exit status: 0 the scan completed; 2 a usage or spec error, or the scan is incomplete (a\npath missing, a file unreadable, no C file found).\n\nExample:\n  tauscan list firmware/ --format json -o smoothers.json\n\nRATE is the rate the update runs at where the spec (its rates: carried down the call\ngraph) or --rate gives one (`run`), else the rate the coefficient's own constants were\ndesigned for (`design`); both are shown when they differ."
    )]
    List {
        #[command(flatten)]
        scan: ScanArgs,
        /// The spec whose rates and stated coefficients apply (default: tauscan.yaml in the
        /// scan root or the nearest folder above, when there is one).
        #[arg(long, value_name = "FILE")]
        spec: Option<PathBuf>,
        /// Output format.
        #[arg(long, value_enum, default_value_t = ListFormat::Table)]
        format: ListFormat,
        /// Write the output to this file (whole or not at all) instead of standard output.
        #[arg(short, long, value_name = "FILE")]
        output: Option<PathBuf>,
    },
    /// Hold every smoother against the spec (tauscan.yaml) and report what disagrees.
    #[command(
        after_help = "Exit status: 0 no finding at or above --fail-on; 1 findings at or above it; 2 a usage\nor spec error, or the scan is incomplete (a gate never passes because tauscan failed).\n\nExample:\n  tauscan check firmware/ --spec tauscan.yaml --format sarif -o tauscan.sarif"
    )]
    Check {
        #[command(flatten)]
        scan: ScanArgs,
        /// The spec file (default: tauscan.yaml in the scan root or the nearest folder above).
        #[arg(long, value_name = "FILE")]
        spec: Option<PathBuf>,
        /// The lowest severity that fails the gate (exit status 1).
        #[arg(long, value_enum, default_value_t = FailOn::Error)]
        fail_on: FailOn,
        /// Output format: compiler-style diagnostics, or the JSON inventory with findings.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Write the output to this file (whole or not at all) instead of standard output.
        #[arg(short, long, value_name = "FILE")]
        output: Option<PathBuf>,
        /// Fail only on findings that are not in this baseline (from `tauscan baseline`).
        #[arg(long, value_name = "FILE")]
        baseline: Option<PathBuf>,
    },
    /// Write the smoother document: every smoother with its figures, source, derivation,
    /// verdict and plots, as one self-contained HTML page or as Markdown.
    #[command(
        after_help = "Exit status: 0 the document was written; 2 a usage or spec error, or the scan is\nincomplete (the document, when written, says so).\n\nExample:\n  tauscan report firmware/ --out smoothers.html"
    )]
    Report {
        #[command(flatten)]
        scan: ScanArgs,
        /// The spec file (default: tauscan.yaml in the scan root or the nearest folder above).
        #[arg(long, value_name = "FILE")]
        spec: Option<PathBuf>,
        /// The document to write, whole or not at all: FILE.html (with plots) or FILE.md.
        #[arg(short = 'o', long, visible_alias = "output", value_name = "FILE")]
        out: PathBuf,
    },
    /// Record today's findings in a baseline file, for `check --baseline`.
    #[command(
        after_help = "Exit status: 0 the baseline was written; 2 a usage or spec error, or the scan is\nincomplete (then nothing is written).\n\nExample:\n  tauscan baseline firmware/ -o tauscan-baseline.json"
    )]
    Baseline {
        #[command(flatten)]
        scan: ScanArgs,
        /// The spec file (default: tauscan.yaml in the scan root or the nearest folder above).
        #[arg(long, value_name = "FILE")]
        spec: Option<PathBuf>,
        /// Where to write the baseline.
        #[arg(short, long, value_name = "FILE")]
        output: PathBuf,
    },
    /// Compare the smoothers at a git revision with the work tree (or REV..REV2).
    #[command(
        after_help = "Exit status: 0 the comparison was made (changes or none); 2 a usage error, a revision\ngit does not know, or a side whose scan is incomplete.\n\nExample:\n  tauscan diff origin/main firmware/ --format markdown"
    )]
    Diff {
        /// The revision to compare from, or FROM..TO.
        revisions: String,
        #[command(flatten)]
        scan: ScanArgs,
        /// Output format.
        #[arg(long, value_enum, default_value_t = DiffFormat::Table)]
        format: DiffFormat,
        /// Write the output to this file (whole or not at all) instead of standard output.
        #[arg(short, long, value_name = "FILE")]
        output: Option<PathBuf>,
    },
    /// Print a rule's documentation (`tauscan explain --list` lists the rules).
    #[command(
        after_help = "Exit status: 0 printed; 2 no such rule.\n\nExample:\n  tauscan explain integer-dead-band"
    )]
    Explain {
        /// The rule id, e.g. integer-dead-band.
        rule: Option<String>,
        /// List every rule with its default severity and summary.
        #[arg(long)]
        list: bool,
    },
    /// Write a starter spec that holds every smoother to its present figures.
    #[command(
        after_help = "Exit status: 0 the spec was written; 2 a usage error, a spec already there (without\n--force), or the scan is incomplete.\n\nExample:\n  tauscan init firmware/ --tolerance 10"
    )]
    Init {
        #[command(flatten)]
        scan: ScanArgs,
        /// Where to write it (default: tauscan.yaml in the scan root).
        #[arg(short, long, value_name = "FILE")]
        output: Option<PathBuf>,
        /// Tolerance around the present figures, in percent.
        #[arg(long, default_value_t = 20.0)]
        tolerance: f64,
        /// Replace an existing file.
        #[arg(long)]
        force: bool,
    },
    /// Inspect what the parser and the lowering make of a file.
    #[command(hide = true)]
    Debug {
        #[command(subcommand)]
        what: DebugWhat,
    },
}

#[derive(Subcommand)]
enum DebugWhat {
    /// The tree-sitter syntax tree.
    Syntax { file: PathBuf },
    /// The lowered IR.
    Ir { file: PathBuf },
    /// Every self-referencing update the recogniser considers in the files whose path ends
    /// with FILE, and what it made of each.
    Candidates {
        file: String,
        #[command(flatten)]
        scan: ScanArgs,
    },
    /// Walk and parse every file as `check` does, lowering included, and nothing more.
    ParseOnly {
        #[command(flatten)]
        scan: ScanArgs,
    },
    /// Walk and parse every file with tree-sitter alone, keeping nothing (the benchmark's
    /// floor).
    BareParse {
        #[command(flatten)]
        scan: ScanArgs,
    },
}

fn int_bits(text: &str) -> Result<u8, String> {
    match text {
        "16" => Ok(16),
        "32" => Ok(32),
        _ => Err(format!("`{text}` is not 16 or 32")),
    }
}

fn parse_defines(raw: &[String]) -> Result<BTreeMap<String, String>> {
    let mut defines = BTreeMap::new();
    for item in raw {
        let (name, value) = match item.split_once('=') {
            Some((n, v)) => (n.trim(), v.trim()),
            None => (item.trim(), "1"),
        };
        let valid = !name.is_empty()
            && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
            && !name.starts_with(|c: char| c.is_ascii_digit());
        if !valid {
            bail!("-D {item}: `{name}` is not a C identifier");
        }
        defines.insert(name.to_string(), value.to_string());
    }
    Ok(defines)
}

fn scan_options(args: &ScanArgs) -> Result<ScanOptions> {
    scan_options_with(args, &tauscan::spec::Spec::default())
}

/// The scan's options: the spec's, with the command line's on top.
fn scan_options_with(args: &ScanArgs, spec: &tauscan::spec::Spec) -> Result<ScanOptions> {
    let default_rate_hz = match &args.rate {
        Some(text) => Some(
            tauscan::quantity::parse_rate(text)
                .with_context(|| format!("--rate {text}"))?
                .0,
        ),
        None => None,
    };
    let paths = if args.paths.is_empty() {
        vec![PathBuf::from(".")]
    } else {
        args.paths.clone()
    };
    let mut defines = spec.defines.clone();
    let mut paths = paths;
    let mut root = None;
    // A compilation database: its files and flags (the spec's path is relative to the
    // spec's folder; the command line's to the current one).
    let database = args.compile_commands.clone().or_else(|| {
        spec.compile_commands.as_ref().map(|c| {
            spec.path
                .as_ref()
                .and_then(|p| p.parent())
                .map(|d| d.join(c))
                .unwrap_or_else(|| PathBuf::from(c))
        })
    });
    let complete_defines = database.is_some();
    if let Some(db_path) = database {
        let text = std::fs::read_to_string(&db_path).with_context(|| {
            format!("cannot read the compilation database {}", db_path.display())
        })?;
        let base = db_path
            .parent()
            .map(std::path::Path::to_path_buf)
            .unwrap_or_else(|| PathBuf::from("."));
        let db = tauscan::compdb::from_str(&text, &base)
            .map_err(|e| anyhow::anyhow!("{}: {e}", db_path.display()))?;
        for name in &db.conflicts {
            eprintln!(
                "tauscan: note: {}: `{}` is defined to different values by different files; the first is used",
                db_path.display(),
                report::neutral(name)
            );
        }
        for (k, v) in &db.defines {
            defines.entry(k.clone()).or_insert_with(|| v.clone());
        }
        let mut files = db.files.clone();
        for dir in &db.include_dirs {
            let headers = tauscan::walk::walk(std::slice::from_ref(dir), None, &|_| false);
            files.extend(
                headers
                    .files
                    .into_iter()
                    .filter(|f| f.relative.ends_with(".h"))
                    .map(|f| f.absolute),
            );
        }
        // Canonical paths, so every file is reported relative to the same root.
        let files: Vec<PathBuf> = files
            .into_iter()
            .map(|f| f.canonicalize().unwrap_or(f))
            .collect();
        root = Some(common_folder(&files).unwrap_or(base));
        paths = files;
    }
    defines.extend(parse_defines(&args.defines)?);
    let mut exclude = spec.exclude.clone();
    exclude.extend(args.exclude.iter().cloned());
    Ok(ScanOptions {
        paths,
        program: ProgramOptions {
            target: Target {
                int_bits: args.int_bits.or(spec.int_bits).unwrap_or(32),
                has_fpu: spec.fpu.unwrap_or(true),
            },
            defines,
            complete_defines,
        },
        recognise: RecogniseOptions { default_rate_hz },
        exclude,
        include: spec.include.clone(),
        root,
        // A progress line only where someone watches: standard error is a terminal.
        progress: (!args.quiet && std::io::stderr().is_terminal())
            .then(|| std::sync::Arc::new(scan::Progress::default())),
        cache: match &args.cache {
            Some(dir) => Some(
                tauscan::cache::Cache::open(dir)
                    .with_context(|| format!("cannot use the cache folder {}", dir.display()))?,
            ),
            None => None,
        },
    })
}

/// Runs a scan; with `options.progress`, draws a progress line on standard error while it
/// runs (files read, files recognised, smoothers found, elapsed), cleared at the end.
fn run_scan(options: &ScanOptions) -> scan::Scan {
    let Some(progress) = options.progress.clone() else {
        return scan::run(options);
    };
    let done = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    let drawer = {
        let done = done.clone();
        std::thread::spawn(move || {
            use scan::Progress as P;
            let bar = indicatif::ProgressBar::new(0);
            bar.set_draw_target(indicatif::ProgressDrawTarget::stderr_with_hz(8));
            if let Ok(style) =
                indicatif::ProgressStyle::with_template("{spinner} {msg} [{elapsed}]")
            {
                bar.set_style(style);
            }
            while !done.load(std::sync::atomic::Ordering::Relaxed) {
                let total = P::get(&progress.files_total);
                let read = P::get(&progress.files_read);
                let recognised = P::get(&progress.files_recognised);
                let found = P::get(&progress.smoothers);
                bar.set_message(if recognised == 0 {
                    format!("reading {read}/{total} files")
                } else {
                    format!("recognising {recognised}/{total} files, {found} smoothers so far")
                });
                bar.tick();
                std::thread::sleep(std::time::Duration::from_millis(120));
            }
            bar.finish_and_clear();
        })
    };
    let result = scan::run(options);
    done.store(true, std::sync::atomic::Ordering::Relaxed);
    let _ = drawer.join();
    result
}

/// The deepest folder that holds every file.
fn common_folder(files: &[PathBuf]) -> Option<PathBuf> {
    let mut common: Option<PathBuf> = None;
    for f in files {
        let absolute = f.canonicalize().unwrap_or_else(|_| f.clone());
        let dir = absolute.parent()?.to_path_buf();
        common = Some(match common {
            None => dir,
            Some(c) => {
                let mut prefix = PathBuf::new();
                for (a, b) in c.components().zip(dir.components()) {
                    if a != b {
                        break;
                    }
                    prefix.push(a);
                }
                prefix
            }
        });
    }
    common
}

fn print_notes(scan: &scan::Scan) {
    for note in &scan.notes {
        let place = match note.line {
            Some(line) => format!("{}:{line}", note.file),
            None => note.file.clone(),
        };
        eprintln!(
            "tauscan: note: {}: {}",
            report::neutral(&place),
            report::neutral(&note.message)
        );
    }
}

/// Writes what `write` makes to the output file (whole or not at all) or standard output,
/// as it is made: for output too large to hold as one string (a large tree's JSON).
fn emit_with(
    output: &Option<PathBuf>,
    write: impl FnOnce(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> Result<()> {
    match output {
        Some(path) => report::write_atomically_with(path, write)
            .with_context(|| format!("cannot write {}", path.display())),
        None => {
            use std::io::Write;
            let mut out = std::io::BufWriter::new(std::io::stdout().lock());
            match write(&mut out).and_then(|_| out.flush()) {
                Ok(()) => Ok(()),
                // A closed pipe (`| head`) is the reader's choice, not an error.
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
                Err(e) => Err(e).context("cannot write to standard output"),
            }
        }
    }
}

fn emit(text: &str, output: &Option<PathBuf>) -> Result<()> {
    match output {
        Some(path) => report::write_atomically(path, text.as_bytes())
            .with_context(|| format!("cannot write {}", path.display())),
        None => {
            use std::io::Write;
            let mut out = std::io::stdout().lock();
            match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
                Ok(()) => Ok(()),
                // A closed pipe (`| head`) is the reader's choice, not an error.
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
                Err(e) => Err(e).context("cannot write to standard output"),
            }
        }
    }
}

/// The scan root as a document names it: `.` (or `..`) is the folder's own name.
fn document_root_name(root: &std::path::Path) -> String {
    let text = root.to_string_lossy().replace('\\', "/");
    let bare = text.trim_end_matches('/');
    if bare.is_empty() || bare == "." || bare.ends_with("/.") || bare.ends_with("..") {
        if let Some(name) = root
            .canonicalize()
            .ok()
            .and_then(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
        {
            return name;
        }
    }
    text
}

/// An incomplete scan that read no file at all (a missing path, no C file).
fn nothing_read(result: &scan::Scan) -> bool {
    result.incomplete && result.program.paths.is_empty()
}

fn run(cli: Cli) -> Result<Status> {
    match cli.command {
        Command::List {
            scan: args,
            spec,
            format,
            output,
        } => {
            let loaded = load_spec(spec, &args.paths)?;
            let spec = loaded.map(|(_, _, s)| s).unwrap_or_default();
            let options = scan_options_with(&args, &spec)?;
            let mut result = run_scan(&options);
            print_notes(&result);
            // The spec's rates and stated coefficients: the rate each update runs at,
            // next to the one its coefficient was designed for.
            tauscan::check::apply(&mut result, &spec);
            let root_label = result.root.to_string_lossy().replace('\\', "/");
            // Nothing was read: the notes say why, and an empty table would only look like
            // an answer.
            if matches!(format, ListFormat::Table) && nothing_read(&result) {
                eprintln!("tauscan: error: the scan is incomplete (see the notes above)");
                return Ok(Status::ToolError);
            }
            match format {
                ListFormat::Table => emit(&report::table::render(&result), &output)?,
                ListFormat::Json => {
                    emit_with(&output, |w| report::json::write(w, &result, &root_label))?
                }
            }
            if result.incomplete {
                eprintln!("tauscan: error: the scan is incomplete (see the notes above)");
                return Ok(Status::ToolError);
            }
            Ok(Status::Clean)
        }
        Command::Check {
            scan: args,
            spec,
            fail_on,
            format,
            output,
            baseline,
        } => check(&args, spec, fail_on, format, &output, baseline),
        Command::Baseline {
            scan: args,
            spec,
            output,
        } => {
            let loaded = load_spec(spec, &args.paths)?;
            let spec = loaded.map(|(_, _, s)| s).unwrap_or_default();
            let options = scan_options_with(&args, &spec)?;
            let mut result = run_scan(&options);
            print_notes(&result);
            if result.incomplete {
                bail!("the scan is incomplete (see the notes above); no baseline written");
            }
            let checked = tauscan::check::run(&mut result, &spec);
            let entries = report::baseline::entries(&result, &checked, &spec);
            report::write_atomically(&output, report::baseline::render(&entries).as_bytes())
                .with_context(|| format!("cannot write {}", output.display()))?;
            eprintln!(
                "tauscan: recorded {} finding(s) in {}",
                entries.len(),
                output.display()
            );
            Ok(Status::Clean)
        }
        Command::Report {
            scan: args,
            spec,
            out,
        } => report(&args, spec, &out),
        Command::Explain { rule, list } => explain(rule.as_deref(), list),
        Command::Diff {
            revisions,
            scan: args,
            format,
            output,
        } => diff(&revisions, &args, format, &output),
        Command::Init {
            scan: args,
            output,
            tolerance,
            force,
        } => init(&args, output, tolerance, force),
        Command::Debug { what } => {
            let (file, ir) = match &what {
                DebugWhat::Syntax { file } => (file, false),
                DebugWhat::Ir { file } => (file, true),
                DebugWhat::Candidates { file, scan: args } => {
                    let options = scan_options(args)?;
                    let scanned = run_scan(&options);
                    let lines =
                        tauscan::recognise::explain(&scanned.program, &options.recognise, file);
                    let mut text = String::new();
                    for l in lines {
                        text.push_str(&report::neutral(&l));
                        text.push('\n');
                    }
                    emit(&text, &None)?;
                    return Ok(Status::Clean);
                }
                DebugWhat::ParseOnly { scan: args } | DebugWhat::BareParse { scan: args } => {
                    let options = scan_options(args)?;
                    let seen = match &what {
                        DebugWhat::BareParse { .. } => scan::bare_parse(&options),
                        _ => scan::parse_only(&options),
                    };
                    emit(
                        &format!(
                            "{} files, {} bytes, {} lines parsed\n",
                            seen.files, seen.bytes, seen.lines
                        ),
                        &None,
                    )?;
                    return Ok(Status::Clean);
                }
            };
            let bytes =
                std::fs::read(file).with_context(|| format!("cannot read {}", file.display()))?;
            let text = if ir {
                format!(
                    "{:#?}\n",
                    tauscan::parse::parse_file(tauscan::ir::FileId(0), &bytes)
                )
            } else {
                format!("{}\n", tauscan::parse::debug_syntax(&bytes))
            };
            emit(&text, &None)?;
            Ok(Status::Clean)
        }
    }
}

/// Reads the spec named or found; None when there is none (an empty spec then applies).
fn load_spec(
    named: Option<PathBuf>,
    paths: &[PathBuf],
) -> Result<Option<(PathBuf, String, tauscan::spec::Spec)>> {
    let root = tauscan::walk::scan_root(if paths.is_empty() { &[] } else { paths });
    let path = match named {
        Some(p) => p,
        None => match tauscan::spec::find(&root) {
            Some(p) => p,
            None => return Ok(None),
        },
    };
    let text = std::fs::read_to_string(&path)
        .with_context(|| format!("cannot read the spec {}", path.display()))?;
    let ids: Vec<&str> = tauscan::rules::REGISTRY.iter().map(|r| r.id).collect();
    match tauscan::spec::from_str(&text)
        .and_then(|spec| tauscan::spec::check_rule_ids(&spec, &text, &ids).map(|_| spec))
    {
        Ok(mut spec) => {
            spec.path = Some(path.clone());
            Ok(Some((path, text, spec)))
        }
        Err(e) => bail!("{}:{e}", path.display()),
    }
}

fn check(
    args: &ScanArgs,
    spec_path: Option<PathBuf>,
    fail_on: FailOn,
    format: Format,
    output: &Option<PathBuf>,
    baseline: Option<PathBuf>,
) -> Result<Status> {
    let loaded = load_spec(spec_path, &args.paths)?;
    let spec = loaded
        .as_ref()
        .map(|(_, _, s)| s.clone())
        .unwrap_or_default();
    let known = match &baseline {
        Some(path) => {
            let text = std::fs::read_to_string(path)
                .with_context(|| format!("cannot read the baseline {}", path.display()))?;
            match report::baseline::parse(&text) {
                Ok(entries) => Some(entries),
                Err(e) => bail!("{}: {e}", path.display()),
            }
        }
        None => None,
    };
    let options = scan_options_with(args, &spec)?;
    let mut result = run_scan(&options);
    print_notes(&result);
    if matches!(format, Format::Table) && nothing_read(&result) {
        eprintln!("tauscan: error: the scan is incomplete (see the notes above)");
        return Ok(Status::ToolError);
    }
    let started = std::time::Instant::now();
    let mut checked = tauscan::check::run(&mut result, &spec);
    tauscan::scan::phase("check", started);
    if let Some(entries) = &known {
        let gone = report::baseline::apply(&mut checked, &spec, entries);
        for e in &gone {
            eprintln!(
                "tauscan: note: baseline entry no longer occurs: {} at {}:{} ({})",
                e.rule,
                report::neutral(e.file.as_deref().unwrap_or("spec")),
                e.line.unwrap_or(0),
                report::neutral(&e.message)
            );
        }
    }
    // The spec's name as findings show it: relative to the scan root when it is inside it
    // (the same on every machine), else as found.
    let spec_name = loaded.as_ref().map(|(p, _, _)| {
        let inside = result.root.canonicalize().ok().and_then(|root| {
            p.canonicalize()
                .ok()?
                .strip_prefix(&root)
                .ok()
                .map(|r| r.to_string_lossy().replace('\\', "/"))
        });
        inside.unwrap_or_else(|| p.to_string_lossy().replace('\\', "/"))
    });
    let text = match format {
        Format::Markdown => report::markdown::render(&result, &checked),
        Format::Sarif => {
            let relative_spec = loaded.as_ref().and_then(|(p, _, _)| {
                let root = result.root.canonicalize().ok()?;
                let spec = p.canonicalize().ok()?;
                spec.strip_prefix(&root)
                    .ok()
                    .map(|r| r.to_string_lossy().replace('\\', "/"))
            });
            report::sarif::render(&result, &checked, &spec, relative_spec.as_deref())
        }
        Format::Json => {
            // Written as it is made: a large tree's JSON is never held as one string.
            let root_label = result.root.to_string_lossy().replace('\\', "/");
            emit_with(output, |w| {
                report::json::write_with_findings(
                    w,
                    &result,
                    &root_label,
                    &checked.findings,
                    spec_name.as_deref(),
                )
            })?;
            String::new()
        }
        Format::Table => {
            let root = result.root.clone();
            let paths = result.program.paths.clone();
            let read = move |f: tauscan::ir::FileId| -> Option<Vec<u8>> {
                let rel = paths.get(f.0 as usize)?;
                std::fs::read(root.join(rel)).ok()
            };
            let sources = report::diagnostics::Sources {
                read: &read,
                spec: loaded
                    .as_ref()
                    .map(|(p, t, _)| (p.to_string_lossy().into_owned(), t.clone())),
            };
            use std::io::IsTerminal;
            let color = output.is_none()
                && std::io::stdout().is_terminal()
                && std::env::var_os("NO_COLOR").is_none();
            let mut text = report::diagnostics::render(&result, &checked, &sources, color);
            if loaded.is_none() {
                text.push_str("No spec found (tauscan.yaml): only the rules that need no requirements ran; `tauscan init` writes a starter spec.\n");
            }
            text
        }
    };
    if !matches!(format, Format::Json) {
        emit(&text, output)?;
    }
    let incomplete = result.incomplete;
    // The process ends next: leave the program's tables to the operating system rather
    // than freeing them one by one.
    std::mem::forget(result);
    if incomplete {
        eprintln!("tauscan: error: the scan is incomplete (see the notes above)");
        return Ok(Status::ToolError);
    }
    let failing = checked
        .findings
        .iter()
        .any(|f| f.suppressed.is_none() && !f.baselined && f.severity >= fail_on.severity());
    Ok(if failing {
        Status::Findings
    } else {
        Status::Clean
    })
}

/// The git revision of `dir` for a document's header: the short commit, marked when the
/// work tree under `dir` differs from it; None outside git or without git.
fn revision_of(dir: &std::path::Path) -> Option<String> {
    let head = git(dir, &["rev-parse", "--short", "HEAD"]).ok()?;
    if !head.status.success() {
        return None;
    }
    let commit = String::from_utf8_lossy(&head.stdout).trim().to_string();
    if commit.is_empty() {
        return None;
    }
    let changed = git(dir, &["status", "--porcelain", "--", "."])
        .ok()
        .filter(|o| o.status.success())
        .is_some_and(|o| !o.stdout.is_empty());
    Some(if changed {
        format!("{commit} (the work tree differs from it)")
    } else {
        commit
    })
}

/// A path as a document shows it: relative to the current folder when it is under it (the
/// same on every machine), else as found.
fn shown_path(path: &std::path::Path) -> String {
    let relative = std::env::current_dir()
        .ok()
        .and_then(|here| here.canonicalize().ok())
        .and_then(|here| {
            let full = path.canonicalize().ok()?;
            full.strip_prefix(&here)
                .ok()
                .map(std::path::Path::to_path_buf)
        });
    relative
        .as_deref()
        .unwrap_or(path)
        .to_string_lossy()
        .replace('\\', "/")
}

/// Now, or `SOURCE_DATE_EPOCH` when set (for documents that must come out the same).
fn document_date() -> String {
    let from_env = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|v| v.trim().parse::<i64>().ok());
    let seconds = from_env.unwrap_or_else(|| {
        std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_secs() as i64)
            .unwrap_or(0)
    });
    report::document::utc_timestamp(seconds)
}

fn report(args: &ScanArgs, spec_path: Option<PathBuf>, out: &std::path::Path) -> Result<Status> {
    let extension = out
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    let html = match extension.as_str() {
        "html" | "htm" => true,
        "md" | "markdown" => false,
        _ => bail!(
            "--out {}: name the document FILE.html (with plots) or FILE.md",
            out.display()
        ),
    };
    let loaded = load_spec(spec_path, &args.paths)?;
    let spec = loaded
        .as_ref()
        .map(|(_, _, s)| s.clone())
        .unwrap_or_default();
    let options = scan_options_with(args, &spec)?;
    let mut result = run_scan(&options);
    print_notes(&result);
    if nothing_read(&result) {
        eprintln!("tauscan: error: the scan is incomplete (see the notes above)");
        return Ok(Status::ToolError);
    }
    let checked = tauscan::check::run(&mut result, &spec);
    let root = result.root.clone();
    let paths = result.program.paths.clone();
    let read = move |f: tauscan::ir::FileId| -> Option<Vec<u8>> {
        let rel = paths.get(f.0 as usize)?;
        std::fs::read(root.join(rel)).ok()
    };
    let header = report::document::Header {
        root: document_root_name(&result.root),
        revision: revision_of(&result.root),
        spec: loaded.as_ref().map(|(p, _, _)| shown_path(p)),
        date_utc: document_date(),
        version: env!("CARGO_PKG_VERSION").to_string(),
    };
    let document = report::document::build(&result, &checked, header, &read);
    let text = if html {
        report::html::render(&document)
    } else {
        report::document_md::render(&document)
    };
    report::write_atomically(out, text.as_bytes())
        .with_context(|| format!("cannot write {}", out.display()))?;
    if result.incomplete {
        eprintln!(
            "tauscan: error: the scan is incomplete (see the notes above); the document says so"
        );
        return Ok(Status::ToolError);
    }
    Ok(Status::Clean)
}

fn git(dir: &std::path::Path, args: &[&str]) -> Result<std::process::Output> {
    std::process::Command::new("git")
        .arg("-C")
        .arg(dir)
        .args(args)
        .output()
        .context("cannot run git (is it installed?)")
}

/// The files of `path` as they are at `rev`, extracted into `into`; returns the folder in
/// `into` that corresponds to `path`.
fn tree_at(
    repo: &std::path::Path,
    prefix: &str,
    rev: &str,
    into: &std::path::Path,
) -> Result<PathBuf> {
    let check = git(
        repo,
        &[
            "rev-parse",
            "--verify",
            "--quiet",
            &format!("{rev}^{{commit}}"),
        ],
    )?;
    if !check.status.success() {
        bail!(
            "`{}` is not a revision of this repository (in a shallow clone, fetch it first)",
            report::neutral(rev)
        );
    }
    let mut archive = std::process::Command::new("git");
    archive
        .arg("-C")
        .arg(repo)
        .args(["archive", "--format=tar", rev]);
    if !prefix.is_empty() {
        archive.arg("--").arg(prefix);
    }
    let tar = archive.output().context("cannot run git archive")?;
    if !tar.status.success() {
        bail!(
            "git archive {} failed: {}",
            report::neutral(rev),
            report::neutral(String::from_utf8_lossy(&tar.stderr).trim())
        );
    }
    let mut untar = std::process::Command::new("tar")
        .arg("-x")
        .arg("-C")
        .arg(into)
        .stdin(std::process::Stdio::piped())
        .spawn()
        .context("cannot run tar")?;
    if let Some(mut stdin) = untar.stdin.take() {
        use std::io::Write;
        stdin.write_all(&tar.stdout).context("cannot feed tar")?;
    }
    if !untar.wait().context("tar did not finish")?.success() {
        bail!("cannot unpack the files of {}", report::neutral(rev));
    }
    let side = into.join(prefix);
    std::fs::create_dir_all(&side).ok();
    Ok(side)
}

/// Scans one side of a diff and applies the spec found in it (so rates are the real ones).
fn scan_side(args: &ScanArgs, root: &std::path::Path) -> Result<scan::Scan> {
    let side_args = ScanArgs {
        paths: vec![root.to_path_buf()],
        defines: args.defines.clone(),
        rate: args.rate.clone(),
        int_bits: args.int_bits,
        exclude: args.exclude.clone(),
        compile_commands: None,
        cache: args.cache.clone(),
        quiet: args.quiet,
    };
    let spec_path = root.join(tauscan::spec::FILE_NAME);
    let loaded = if spec_path.is_file() {
        load_spec(Some(spec_path), &side_args.paths)?
    } else {
        None
    };
    let spec = loaded.map(|(_, _, s)| s).unwrap_or_default();
    let options = scan_options_with(&side_args, &spec)?;
    let mut result = run_scan(&options);
    print_notes(&result);
    if result.incomplete {
        bail!(
            "the scan of {} is incomplete (see the notes above)",
            root.display()
        );
    }
    tauscan::check::run(&mut result, &spec);
    Ok(result)
}

fn diff(
    revisions: &str,
    args: &ScanArgs,
    format: DiffFormat,
    output: &Option<PathBuf>,
) -> Result<Status> {
    let path = match args.paths.as_slice() {
        [] => PathBuf::from("."),
        [one] => one.clone(),
        _ => bail!("tauscan diff takes one path (a folder inside the repository)"),
    };
    if !path.is_dir() {
        bail!("{} is not a folder", path.display());
    }
    let top = git(&path, &["rev-parse", "--show-toplevel"])?;
    if !top.status.success() {
        bail!("{} is not inside a git repository", path.display());
    }
    let repo = PathBuf::from(String::from_utf8_lossy(&top.stdout).trim());
    let prefix_out = git(&path, &["rev-parse", "--show-prefix"])?;
    let prefix = String::from_utf8_lossy(&prefix_out.stdout)
        .trim()
        .to_string();
    let (from, to) = match revisions.split_once("..") {
        Some((a, b)) if !a.is_empty() && !b.is_empty() => (a.to_string(), Some(b.to_string())),
        Some(_) => bail!(
            "`{}`: give FROM..TO with both revisions",
            report::neutral(revisions)
        ),
        None => (revisions.to_string(), None),
    };
    let work = tempfile_dir()?;
    let before_root = tree_at(&repo, &prefix, &from, &work.join("before"))?;
    let after_root = match &to {
        Some(rev) => tree_at(&repo, &prefix, rev, &work.join("after"))?,
        None => path.clone(),
    };
    let before = scan_side(args, &before_root);
    let after = scan_side(args, &after_root);
    let _ = std::fs::remove_dir_all(&work);
    let (before, after) = (before?, after?);
    let changes = tauscan::diff::compare(&before, &after);
    let to_label = to.clone().unwrap_or_else(|| "the work tree".into());
    let text = match format {
        DiffFormat::Json => report::diff::json(&changes, &from, &to_label),
        DiffFormat::Markdown => report::diff::markdown(&changes, &from, &to_label),
        DiffFormat::Table => report::diff::table(&changes, &from, &to_label),
    };
    emit(&text, output)?;
    Ok(Status::Clean)
}

/// A fresh private folder under the system's temporary folder.
fn tempfile_dir() -> Result<PathBuf> {
    let base = std::env::temp_dir();
    for n in 0..1000u32 {
        let dir = base.join(format!("tauscan-diff-{}-{n}", std::process::id()));
        if std::fs::create_dir(&dir).is_ok() {
            std::fs::create_dir(dir.join("before"))?;
            std::fs::create_dir(dir.join("after"))?;
            return Ok(dir);
        }
    }
    bail!("cannot make a temporary folder in {}", base.display())
}

fn explain(rule: Option<&str>, list: bool) -> Result<Status> {
    use tauscan::rules::REGISTRY;
    if list || rule.is_none() {
        let mut text = String::new();
        for r in REGISTRY {
            text.push_str(&format!(
                "{:<36} {:<8} {}\n",
                r.id,
                r.severity.name(),
                r.summary
            ));
        }
        emit(&text, &None)?;
        return Ok(Status::Clean);
    }
    let id = rule.unwrap_or_default();
    match tauscan::rules::find_rule(id) {
        Some(r) => {
            emit(r.doc, &None)?;
            Ok(Status::Clean)
        }
        None => {
            let near = REGISTRY
                .iter()
                .min_by_key(|r| strsim::damerau_levenshtein(id, r.id))
                .map(|r| r.id)
                .unwrap_or("");
            bail!("no rule `{id}` (did you mean `{near}`? `tauscan explain --list` lists them)")
        }
    }
}

fn init(args: &ScanArgs, output: Option<PathBuf>, tolerance: f64, force: bool) -> Result<Status> {
    if !(tolerance > 0.0 && tolerance < 100.0) {
        bail!("--tolerance {tolerance}: want a percentage between 0 and 100");
    }
    let options = scan_options(args)?;
    let result = run_scan(&options);
    print_notes(&result);
    let path = output.unwrap_or_else(|| result.root.join(tauscan::spec::FILE_NAME));
    if path.exists() && !force {
        bail!("{} exists; use --force to replace it", path.display());
    }
    let text = report::starter_spec::starter_spec(&result, tolerance / 100.0);
    report::write_atomically(&path, text.as_bytes())
        .with_context(|| format!("cannot write {}", path.display()))?;
    eprintln!(
        "tauscan: wrote {} with {} smoother(s); review it, add the rates of your entry functions, and tighten it",
        path.display(),
        result.recognition.smoothers.len()
    );
    if result.incomplete {
        return Ok(Status::ToolError);
    }
    Ok(Status::Clean)
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let is_help = matches!(
                e.kind(),
                clap::error::ErrorKind::DisplayHelp | clap::error::ErrorKind::DisplayVersion
            );
            if is_help {
                let _ = e.print();
            } else {
                eprint!("{}", report::neutral_keep_newlines(&e.render().to_string()));
            }
            return ExitCode::from(if is_help { 0 } else { Status::ToolError as u8 });
        }
    };
    match run(cli) {
        Ok(status) => ExitCode::from(status as u8),
        Err(e) => {
            // Arguments (paths, -D values) can carry escape sequences from whoever named a
            // branch or a file; they never reach the terminal raw.
            eprintln!("tauscan: error: {}", report::neutral(&format!("{e:#}")));
            ExitCode::from(Status::ToolError as u8)
        }
    }
}

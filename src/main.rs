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
    #[allow(dead_code)] // Returned by `check`, which comes with the spec.
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

#[derive(Clone, Copy, ValueEnum)]
enum Format {
    Table,
    Json,
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
    /// Width of `int` on the target, in bits.
    #[arg(long, value_name = "BITS", default_value_t = 32, value_parser = int_bits)]
    int_bits: u8,
    /// Paths (relative to the scan root) not to read; `*`, `**` and `?` work. Repeatable.
    #[arg(long, value_name = "GLOB")]
    exclude: Vec<String>,
}

#[derive(Subcommand)]
enum Command {
    /// List every recursive smoother with its coefficient, rate and figures.
    List {
        #[command(flatten)]
        scan: ScanArgs,
        /// Output format.
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Write the output to this file (whole or not at all) instead of standard output.
        #[arg(short, long, value_name = "FILE")]
        output: Option<PathBuf>,
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
    Ok(ScanOptions {
        paths,
        program: ProgramOptions {
            target: Target {
                int_bits: args.int_bits,
                has_fpu: true,
            },
            defines: parse_defines(&args.defines)?,
        },
        recognise: RecogniseOptions { default_rate_hz },
        exclude: args.exclude.clone(),
    })
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

fn run(cli: Cli) -> Result<Status> {
    match cli.command {
        Command::List {
            scan: args,
            format,
            output,
        } => {
            let options = scan_options(&args)?;
            let result = scan::run(&options);
            print_notes(&result);
            let root_label = result.root.to_string_lossy().replace('\\', "/");
            let text = match format {
                Format::Table => report::table::render(&result),
                Format::Json => report::json::render(&result, &root_label),
            };
            emit(&text, &output)?;
            if result.incomplete {
                eprintln!("tauscan: error: the scan is incomplete (see the notes above)");
                return Ok(Status::ToolError);
            }
            Ok(Status::Clean)
        }
        Command::Debug { what } => {
            let (file, ir) = match &what {
                DebugWhat::Syntax { file } => (file, false),
                DebugWhat::Ir { file } => (file, true),
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

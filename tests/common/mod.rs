//! What the end-to-end suites share: running the binary with a time limit and reading
//! what it printed (exit status, notes, JSON), and building small trees in temporary
//! folders. Each suite uses part of it, so unused items are allowed here.
#![allow(
    dead_code,
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "shared by several test crates, each using part; a test that cannot build its fixture should stop at once"
)]

use serde_json::Value;
use std::io::Read;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// A smoother tauscan reports as function `vent_tick`, state `y` (alpha 1/8).
pub const GOOD_SMOOTHER: &str = "static int y; void vent_tick(int u) { y += (u - y) >> 3; }\n";

/// Time after which a small scan is taken to hang. Generous, because the suite runs its
/// tests in parallel on small machines; a scan of these trees takes well under a second.
pub const LIMIT: Duration = Duration::from_secs(120);

/// Time after which a scan that meets a FIFO is taken to hang (it would block forever
/// opening a FIFO that has no writer).
pub const FIFO_LIMIT: Duration = Duration::from_secs(20);

/// What one run of the binary did.
pub struct Run {
    /// The exit code; `None` when the process was killed by a signal (a stack overflow
    /// aborts) or by the time limit.
    pub code: Option<i32>,
    pub stdout: Vec<u8>,
    pub stderr_bytes: Vec<u8>,
    pub stderr: String,
    pub timed_out: bool,
    /// The command line, for failure messages.
    pub label: String,
}

/// Runs `tauscan` with `args` in `dir`, killing it after `limit`.
pub fn tauscan_in(dir: &Path, args: &[&str], limit: Duration) -> Run {
    tauscan_command(
        Command::new(env!("CARGO_BIN_EXE_tauscan")),
        dir,
        args,
        limit,
    )
}

/// Runs a prepared command (the binary, possibly behind a privilege drop) with `args`.
pub fn tauscan_command(mut command: Command, dir: &Path, args: &[&str], limit: Duration) -> Run {
    let label = format!("tauscan {}", args.join(" "));
    let (status, stdout, stderr_bytes) = run_limited(command.args(args).current_dir(dir), limit);
    Run {
        code: status.and_then(|s| s.code()),
        stderr: String::from_utf8_lossy(&stderr_bytes).into_owned(),
        stdout,
        stderr_bytes,
        timed_out: status.is_none(),
        label,
    }
}

/// Runs a command with no input, its output drained on threads of their own (so a large
/// output cannot block it), killed after `limit`: its status (None when killed for the
/// limit), standard output and standard error.
fn run_limited(
    command: &mut Command,
    limit: Duration,
) -> (Option<std::process::ExitStatus>, Vec<u8>, Vec<u8>) {
    let mut child = command
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the command could not be started");
    let mut out_pipe = child.stdout.take().unwrap();
    let mut err_pipe = child.stderr.take().unwrap();
    let out_reader = std::thread::spawn(move || {
        let mut buffer = Vec::new();
        let _ = out_pipe.read_to_end(&mut buffer);
        buffer
    });
    let err_reader = std::thread::spawn(move || {
        let mut buffer = Vec::new();
        let _ = err_pipe.read_to_end(&mut buffer);
        buffer
    });
    let start = Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait().unwrap() {
            break Some(status);
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            break None;
        }
        std::thread::sleep(Duration::from_millis(10));
    };
    (
        status,
        out_reader.join().unwrap(),
        err_reader.join().unwrap(),
    )
}

/// `Command::output` with a time limit, for suites that drive the binary themselves: the
/// child is killed past `LIMIT` and the test fails, so a hang costs two minutes, not CI's
/// whole run.
pub fn output(command: &mut Command) -> std::process::Output {
    let (status, stdout, stderr) = run_limited(command, LIMIT);
    let Some(status) = status else {
        panic!("{command:?} did not finish within {LIMIT:?}");
    };
    std::process::Output {
        status,
        stdout,
        stderr,
    }
}

/// Compiles `sources` with the system C compiler (`$CC`, else `cc`), C11 and `flags`, into
/// `exe`, runs it with the time limit and returns its standard output. Panics with the
/// compiler's messages when it does not compile.
#[allow(
    dead_code,
    reason = "each test crate uses its own part of the shared helpers"
)]
pub fn compile_and_run(sources: &[&Path], flags: &[&str], exe: &Path) -> String {
    let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
    let built = Command::new(&cc)
        .arg("-std=c11")
        .args(flags)
        .args(sources)
        .arg("-o")
        .arg(exe)
        .output()
        .unwrap_or_else(|e| {
            panic!("a C compiler (`{cc}`) is needed for the execution checks: {e}")
        });
    assert!(
        built.status.success(),
        "{sources:?} do not compile:\n{}",
        String::from_utf8_lossy(&built.stderr)
    );
    let out = output(&mut Command::new(exe));
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// Text safe to print in a failure message: control characters other than newlines are
/// shown escaped, so that a failing test cannot drive the terminal either.
pub fn shown(text: &str) -> String {
    text.chars()
        .map(|c| {
            if c.is_control() && c != '\n' {
                c.escape_default().to_string()
            } else {
                c.to_string()
            }
        })
        .collect()
}

impl Run {
    pub fn context(&self) -> String {
        format!(
            "{}\nexit code: {:?} (timed out: {})\nstderr:\n{}",
            self.label,
            self.code,
            self.timed_out,
            shown(&self.stderr)
        )
    }

    /// The run ended by itself, within the limit, without a panic or an abort.
    pub fn assert_finished(&self) {
        assert!(
            !self.timed_out,
            "tauscan hung and was killed\n{}",
            self.context()
        );
        assert!(
            !self.stderr.contains("panicked") && !self.stderr.contains("overflowed its stack"),
            "tauscan crashed\n{}",
            self.context()
        );
        assert!(
            self.code.is_some(),
            "tauscan was killed by a signal (an abort, e.g. a stack overflow)\n{}",
            self.context()
        );
    }

    pub fn assert_exit(&self, expected: i32, why: &str) {
        self.assert_finished();
        assert_eq!(
            self.code,
            Some(expected),
            "expected exit status {expected}: {why}\n{}",
            self.context()
        );
    }

    /// The note lines, each without its `tauscan: note: ` prefix.
    pub fn notes(&self) -> Vec<&str> {
        self.stderr
            .lines()
            .filter_map(|line| line.strip_prefix("tauscan: note: "))
            .collect()
    }

    /// Whether a note is about `path` (the note starts with the path, then `:`).
    pub fn has_note_on(&self, path: &str) -> bool {
        self.notes().iter().any(|note| {
            note.strip_prefix(path)
                .is_some_and(|rest| rest.starts_with(':') || rest.starts_with('/'))
        })
    }

    pub fn assert_note_on(&self, path: &str) {
        assert!(
            self.has_note_on(path),
            "no note on standard error names {path}\n{}",
            self.context()
        );
    }

    pub fn assert_no_note_on(&self, path: &str) {
        assert!(
            !self.has_note_on(path),
            "a note names {path}, which is fine C and needs none\n{}",
            self.context()
        );
    }

    pub fn json(&self) -> Value {
        serde_json::from_slice(&self.stdout).unwrap_or_else(|e| {
            panic!(
                "tauscan did not print JSON: {e}\nstdout:\n{}\n{}",
                shown(&String::from_utf8_lossy(&self.stdout)),
                self.context()
            )
        })
    }
}

/// One reported smoother, as far as these tests care.
#[derive(Debug, Clone, PartialEq)]
pub struct Reported {
    pub file: String,
    pub function: String,
    pub state: String,
    pub alpha: Option<f64>,
}

pub fn reported(json: &Value) -> Vec<Reported> {
    assert_eq!(json["schema"], 1, "unexpected schema in {json}");
    json["smoothers"]
        .as_array()
        .unwrap_or_else(|| panic!("no smoothers array in {json}"))
        .iter()
        .map(|s| Reported {
            file: s["file"].as_str().unwrap_or_default().to_string(),
            function: s["function"].as_str().unwrap_or_default().to_string(),
            state: s["state"].as_str().unwrap_or_default().to_string(),
            alpha: s["alpha"].as_f64(),
        })
        .collect()
}

pub fn count_of(json: &Value, function: &str, state: &str) -> usize {
    reported(json)
        .iter()
        .filter(|s| s.function == function && s.state == state)
        .count()
}

/// The good smoother planted beside the bad input is in the JSON: the rest of the scan
/// went on.
pub fn assert_sibling_reported(run: &Run) {
    let json = run.json();
    assert!(
        count_of(&json, "vent_tick", "y") >= 1,
        "the good smoother vent_tick/y beside the bad input is missing from {:?}\n{}",
        reported(&json),
        run.context()
    );
}

pub fn write(dir: &Path, name: &str, contents: impl AsRef<[u8]>) {
    let path = dir.join(name);
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent).unwrap();
    }
    std::fs::write(path, contents).unwrap();
}

/// A temporary scan root holding the good smoother in `good.c`.
pub fn tree_with_good_sibling() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "root/good.c", GOOD_SMOOTHER);
    dir
}

/// Every file and folder under `dir`, relative, sorted.
pub fn listing(dir: &Path) -> Vec<String> {
    fn go(base: &Path, dir: &Path, out: &mut Vec<String>) {
        for entry in std::fs::read_dir(dir).unwrap() {
            let path = entry.unwrap().path();
            out.push(
                path.strip_prefix(base)
                    .unwrap()
                    .to_string_lossy()
                    .into_owned(),
            );
            if path.is_dir() && !path.is_symlink() {
                go(base, &path, out);
            }
        }
    }
    let mut out = Vec::new();
    go(dir, dir, &mut out);
    out.sort();
    out
}

/// A folder under `fixtures/`.
/// The crate's own folder (where `fixtures/` and `tests/` are).
pub fn crate_root() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

pub fn fixture(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(name)
}

/// Copies the files of `from` into `to`, folders included.
pub fn copy_tree(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let path = entry.unwrap().path();
        let target = to.join(path.file_name().unwrap());
        if path.is_dir() {
            copy_tree(&path, &target);
        } else {
            std::fs::copy(&path, &target).unwrap();
        }
    }
}

/// A run refused its input with exit status 2 and a message naming `name`.
pub fn assert_refused_naming(run: &Run, name: &str, why: &str) {
    run.assert_exit(2, why);
    assert!(
        run.stderr.contains(name),
        "the message does not name {name}\n{}",
        run.context()
    );
}

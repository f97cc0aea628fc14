//! Holds `tauscan list` to its promises about bad input, end to end: for unparseable C,
//! stray bytes, empty files, huge lines, unreadable files, FIFOs, link loops, links out of
//! the scan root, missing paths, bad output paths, usage errors, deep nesting, macro
//! cycles, NUL bytes and terminal escape sequences, each test builds a small tree in a
//! temporary folder, runs the binary on it and checks the exit status, the notes on
//! standard error, and that a good smoother planted beside the bad file is still reported.
//!
//! What counts as a smoother and what its figures are is left to the other suites; this
//! file only checks that bad input never stops, hangs or misleads a scan. Every run has a
//! time limit (the child is killed past it), so a hang is a failing test, not a stuck one.
//! The exit statuses expected are those of the README's table: 0 when the scan completed,
//! 2 for a usage error or an incomplete scan.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot build its fixture should stop at once with the cause"
)]

mod common;

use common::*;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

// 1. Unparseable C.

#[test]
fn unparseable_c_is_a_note_and_the_scan_goes_on() {
    let dir = tree_with_good_sibling();
    write(dir.path(), "root/bad.c", "void f( { y += ; }}}\n");
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(
        0,
        "a file that does not parse is noted, the scan still completes",
    );
    run.assert_note_on("bad.c");
    assert_sibling_reported(&run);
}

// 2. Bytes that are not UTF-8.

#[test]
fn non_utf8_bytes_in_comments_and_strings_are_tolerated() {
    let dir = tree_with_good_sibling();
    // Latin-1 bytes in a comment, a broken sequence and 0xff in a string, then the
    // smoother: the file is C all the same (a compiler takes such bytes as they come).
    let mut source = b"static int h; /* caf\xe9 \xff\xfe \xc3 */\n".to_vec();
    source.extend_from_slice(b"static const char *label = \"ab\xc3\x28\xff\";\n");
    source.extend_from_slice(b"void hive_tick(int u) { h += (u - h) >> 2; }\n");
    write(dir.path(), "root/latin.c", source);
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "stray bytes are tolerated, never fatal");
    let json = run.json();
    assert_eq!(
        count_of(&json, "hive_tick", "h"),
        1,
        "the smoother in the file with non-UTF-8 bytes is not reported: {:?}\n{}",
        reported(&json),
        run.context()
    );
    assert_sibling_reported(&run);
}

#[cfg(unix)]
#[test]
fn a_file_name_that_is_not_utf8_is_scanned() {
    use std::os::unix::ffi::OsStrExt;
    let dir = tree_with_good_sibling();
    let name = std::ffi::OsStr::from_bytes(b"caf\xe9.c");
    std::fs::write(
        dir.path().join("root").join(name),
        "static int h; void hive_tick(int u) { h += (u - h) >> 2; }\n",
    )
    .unwrap();
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "a file name with a stray byte is still a file to read");
    let json = run.json();
    assert_eq!(
        count_of(&json, "hive_tick", "h"),
        1,
        "the smoother in the file with a non-UTF-8 name is not reported: {:?}\n{}",
        reported(&json),
        run.context()
    );
    assert_sibling_reported(&run);
}

// 3. Empty and blank files.

#[test]
fn empty_and_blank_files_need_no_note() {
    let dir = tree_with_good_sibling();
    write(dir.path(), "root/empty.c", "");
    // Every character C counts as white space: space, tab, CR, LF, form feed, vertical tab.
    write(dir.path(), "root/blank.c", " \t\r\n\x0c\n\x0b\n   \n");
    write(dir.path(), "root/crlf.h", "\r\n\r\n");
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "empty files are nothing to worry about");
    for name in ["empty.c", "blank.c", "crlf.h"] {
        run.assert_no_note_on(name);
    }
    assert_sibling_reported(&run);
}

// 4. A very long line.

#[test]
fn a_five_megabyte_line_is_read_and_the_scan_goes_on() {
    let dir = tree_with_good_sibling();
    let ones = 5 * 1024 * 1024 / 2;
    let mut line = String::with_capacity(ones * 2 + 16);
    line.push_str("int kiln_table[] = {");
    for i in 0..ones {
        if i > 0 {
            line.push(',');
        }
        line.push('1');
    }
    line.push_str("};");
    assert!(line.len() >= 5 * 1024 * 1024, "the line is too short");
    write(dir.path(), "root/table.c", &line);
    // No assertion on the time (the limit only turns a hang into a failure).
    let run = tauscan_in(
        dir.path(),
        &["list", "root", "--format", "json"],
        Duration::from_secs(600),
    );
    run.assert_exit(0, "a long line is just a long line");
    assert_sibling_reported(&run);
}

// 5. Files that cannot be read.

/// Whether `setpriv` can run the binary as the unprivileged user 65534 here.
#[cfg(unix)]
fn can_drop_privileges() -> bool {
    Command::new("setpriv")
        .args(["--reuid=65534", "--regid=65534", "--clear-groups"])
        .arg(env!("CARGO_BIN_EXE_tauscan"))
        .arg("--version")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success())
}

#[cfg(unix)]
#[test]
fn an_unreadable_file_is_noted_and_makes_the_scan_incomplete() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tree_with_good_sibling();
    let locked = dir.path().join("root/x.c");
    std::fs::write(
        &locked,
        "static int k; void kiln_tick(int u) { k += (u - k) >> 2; }\n",
    )
    .unwrap();
    std::fs::set_permissions(&locked, std::fs::Permissions::from_mode(0o000)).unwrap();
    let args = ["list", "root", "--format", "json"];
    let run = if std::fs::read(&locked).is_err() {
        eprintln!("x.c is unreadable by mode 000");
        tauscan_in(dir.path(), &args, LIMIT)
    } else if can_drop_privileges() {
        // Running as root, mode 000 does not stop reading; as user 65534 it does. The
        // tree must then be reachable by that user.
        eprintln!("x.c is readable here; running tauscan as user 65534");
        for folder in [dir.path().to_path_buf(), dir.path().join("root")] {
            std::fs::set_permissions(&folder, std::fs::Permissions::from_mode(0o755)).unwrap();
        }
        let mut command = Command::new("setpriv");
        command
            .args(["--reuid=65534", "--regid=65534", "--clear-groups"])
            .arg(env!("CARGO_BIN_EXE_tauscan"));
        tauscan_command(command, dir.path(), &args, LIMIT)
    } else {
        // Neither way makes a file unreadable here: a link named x.c that leads nowhere
        // is a C file whose contents no user can read.
        eprintln!("x.c stays readable here; testing a dangling link named x.c instead");
        std::fs::remove_file(&locked).unwrap();
        std::os::unix::fs::symlink("nowhere.c", &locked).unwrap();
        tauscan_in(dir.path(), &args, LIMIT)
    };
    run.assert_exit(2, "a file that cannot be read makes the scan incomplete");
    run.assert_note_on("x.c");
    assert_sibling_reported(&run);
}

#[cfg(unix)]
#[test]
fn a_dangling_link_named_like_a_source_is_noted() {
    let dir = tree_with_good_sibling();
    std::os::unix::fs::symlink("nowhere.c", dir.path().join("root/gone.c")).unwrap();
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(
        2,
        "a C file whose contents cannot be read makes the scan incomplete",
    );
    run.assert_note_on("gone.c");
    assert_sibling_reported(&run);
}

#[cfg(unix)]
fn make_fifo(path: &Path) {
    let status = Command::new("mkfifo").arg(path).status().unwrap();
    assert!(status.success(), "mkfifo {} failed", path.display());
}

#[cfg(unix)]
#[test]
fn a_fifo_named_like_a_source_is_noted_without_hanging() {
    let dir = tree_with_good_sibling();
    make_fifo(&dir.path().join("root/x.c"));
    let run = tauscan_in(
        dir.path(),
        &["list", "root", "--format", "json"],
        FIFO_LIMIT,
    );
    run.assert_finished();
    run.assert_note_on("x.c");
    run.assert_exit(
        2,
        "x.c is named as C source and was not read: the scan is incomplete",
    );
    assert_sibling_reported(&run);
}

#[cfg(unix)]
#[test]
fn a_fifo_given_on_the_command_line_is_noted_without_hanging() {
    let dir = tree_with_good_sibling();
    make_fifo(&dir.path().join("root/x.c"));
    let run = tauscan_in(
        dir.path().join("root").as_path(),
        &["list", "x.c", "good.c", "--format", "json"],
        FIFO_LIMIT,
    );
    run.assert_finished();
    run.assert_note_on("x.c");
    run.assert_exit(
        2,
        "a path the user asked for was not read: the scan is incomplete",
    );
    assert_sibling_reported(&run);
}

// 6. Links that loop or lead out of the scan root.
//
// A loop skipped loses nothing: the link points at a folder already being scanned, so every
// file is still read once. A link out of the root is left unread on purpose (the walk never
// follows a link out of the root), like an `--exclude`. Neither makes the scan
// incomplete, so both are a note and exit status 0; only a file that should have been read
// and could not be (as in section 5) is exit status 2.

#[cfg(unix)]
#[test]
fn a_link_loop_is_noted_and_skipped() {
    let dir = tree_with_good_sibling();
    std::fs::create_dir_all(dir.path().join("root/a")).unwrap();
    std::os::unix::fs::symlink("..", dir.path().join("root/a/loop")).unwrap();
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_finished();
    run.assert_note_on("a/loop");
    let json = run.json();
    assert_eq!(
        count_of(&json, "vent_tick", "y"),
        1,
        "the good smoother should be reported once, not again through the loop: {:?}\n{}",
        reported(&json),
        run.context()
    );
    run.assert_exit(0, "a loop skipped loses no file, so the scan is complete");
}

#[cfg(unix)]
#[test]
fn a_file_link_out_of_the_root_is_noted_and_not_followed() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "outside/secret.c",
        "static int w; void hive_weigh(int u) { w += (u - w) >> 2; }\n",
    );
    std::os::unix::fs::symlink("../outside/secret.c", dir.path().join("root/out.c")).unwrap();
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_finished();
    run.assert_note_on("out.c");
    let json = run.json();
    assert_eq!(
        count_of(&json, "hive_weigh", "w"),
        0,
        "a file outside the root was read through a link: {:?}\n{}",
        reported(&json),
        run.context()
    );
    assert_sibling_reported(&run);
    run.assert_exit(
        0,
        "a link left out on purpose does not make the scan incomplete",
    );
}

#[cfg(unix)]
#[test]
fn a_folder_link_out_of_the_root_is_noted_and_not_followed() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "outside/secret.c",
        "static int w; void hive_weigh(int u) { w += (u - w) >> 2; }\n",
    );
    std::os::unix::fs::symlink("../outside", dir.path().join("root/outdir")).unwrap();
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_finished();
    let json = run.json();
    assert_eq!(
        count_of(&json, "hive_weigh", "w"),
        0,
        "a file outside the root was read through a folder link: {:?}\n{}",
        reported(&json),
        run.context()
    );
    run.assert_note_on("outdir");
    assert_sibling_reported(&run);
    run.assert_exit(
        0,
        "a link left out on purpose does not make the scan incomplete",
    );
}

// 7. A path that does not exist.

#[test]
fn a_missing_path_is_noted_and_the_other_path_is_scanned() {
    let dir = tree_with_good_sibling();
    let run = tauscan_in(
        dir.path(),
        &["list", "root", "no/such/dir", "--format", "json"],
        LIMIT,
    );
    run.assert_exit(2, "a path asked for does not exist: the scan is incomplete");
    run.assert_note_on("no/such/dir");
    assert_sibling_reported(&run);
}

// 8. Output files: whole or not at all.

#[test]
fn output_into_a_missing_folder_fails_and_leaves_nothing() {
    let dir = tree_with_good_sibling();
    let before = listing(dir.path());
    let run = tauscan_in(
        dir.path(),
        &["list", "root", "--format", "json", "-o", "nodir/out.json"],
        LIMIT,
    );
    run.assert_exit(2, "the output could not be written");
    assert!(
        run.stderr.contains("nodir/out.json"),
        "the error does not name the output path\n{}",
        run.context()
    );
    assert_eq!(
        listing(dir.path()),
        before,
        "a failed write left something behind\n{}",
        run.context()
    );
}

#[test]
fn output_to_a_good_path_is_whole_json() {
    let dir = tree_with_good_sibling();
    let run = tauscan_in(
        dir.path(),
        &["list", "root", "--format", "json", "-o", "out.json"],
        LIMIT,
    );
    run.assert_exit(0, "a clean scan written to a file");
    assert!(
        run.stdout.is_empty(),
        "with -o nothing belongs on standard output\n{}",
        run.context()
    );
    let written = std::fs::read(dir.path().join("out.json")).unwrap();
    let as_run = Run {
        stdout: written,
        stderr_bytes: Vec::new(),
        ..run
    };
    assert_sibling_reported(&as_run);
    let mut expected = vec!["out.json".to_string(), "root".into(), "root/good.c".into()];
    expected.sort();
    assert_eq!(
        listing(dir.path()),
        expected,
        "a temporary file was left behind"
    );
}

#[test]
fn output_over_an_existing_file_replaces_it_whole() {
    let dir = tree_with_good_sibling();
    // Longer than any output of this scan, so left-over bytes would break the JSON.
    let old = "x".repeat(1 << 20);
    write(dir.path(), "out.json", &old);
    let run = tauscan_in(
        dir.path(),
        &["list", "root", "--format", "json", "-o", "out.json"],
        LIMIT,
    );
    run.assert_exit(0, "a clean scan written over an old file");
    let written = std::fs::read(dir.path().join("out.json")).unwrap();
    assert!(
        written.len() < old.len(),
        "the old file was not replaced ({} bytes)",
        written.len()
    );
    let as_run = Run {
        stdout: written,
        stderr_bytes: Vec::new(),
        ..run
    };
    assert_sibling_reported(&as_run);
}

#[test]
fn output_onto_a_folder_fails_and_leaves_the_folder_alone() {
    let dir = tree_with_good_sibling();
    std::fs::create_dir(dir.path().join("reports")).unwrap();
    write(dir.path(), "reports/keep.txt", "kept");
    let before = listing(dir.path());
    let run = tauscan_in(
        dir.path(),
        &["list", "root", "--format", "json", "-o", "reports"],
        LIMIT,
    );
    run.assert_exit(2, "a folder cannot be replaced by the output");
    assert_eq!(
        listing(dir.path()),
        before,
        "a failed write changed the tree\n{}",
        run.context()
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("reports/keep.txt")).unwrap(),
        "kept"
    );
}

// 9. Usage errors.

#[test]
fn usage_errors_exit_2_with_a_message_and_write_nothing() {
    let cases: [(&[&str], &str); 4] = [
        (&["--unknown-flag"], "--unknown-flag"),
        (&["--rate", "fast"], "fast"),
        (&["-D", "9bad"], "9bad"),
        (&["--int-bits", "12"], "12"),
    ];
    for (extra, offending) in cases {
        let dir = tree_with_good_sibling();
        let mut args = vec!["list", "root", "--format", "json", "-o", "out.json"];
        args.extend_from_slice(extra);
        let run = tauscan_in(dir.path(), &args, LIMIT);
        run.assert_exit(2, "a usage error");
        assert!(
            run.stderr.contains(offending),
            "the message does not name `{offending}`\n{}",
            run.context()
        );
        assert!(
            run.stdout.is_empty(),
            "a usage error printed output\n{}",
            run.context()
        );
        assert!(
            !dir.path().join("out.json").exists(),
            "a usage error still wrote the output file\n{}",
            run.context()
        );
    }
}

// 10. Deep nesting and macro cycles: every recursive walk over user input has a limit.

const DEEP: usize = 20_000;

// 100,000 nested parentheses: tests/hostile.rs.

#[test]
fn macro_cycles_in_coefficients_do_not_crash_and_stay_unknown() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "root/cycle.c",
        "#define A A+1\n\
         #define B C\n\
         #define C B\n\
         static int p, q;\n\
         void hub_a(int u) { p += (u - p) / A; }\n\
         void hub_b(int u) { q += (u - q) * B; }\n",
    );
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "a macro cycle is cut, not followed forever");
    // C11 6.10.3.4p2: a macro's own name is not replaced again inside its expansion, so
    // `A` and `B` end as bare unknown names and neither coefficient has a value.
    let json = run.json();
    for s in reported(&json) {
        if s.function == "hub_a" || s.function == "hub_b" {
            assert_eq!(
                s.alpha, None,
                "a coefficient behind a macro cycle was given a value: {s:?}"
            );
        }
    }
    assert_sibling_reported(&run);
}

#[test]
fn twenty_thousand_nested_initializer_braces_do_not_crash() {
    let dir = tree_with_good_sibling();
    let braces = format!("{}1{}", "{".repeat(DEEP), "}".repeat(DEEP));
    write(
        dir.path(),
        "root/global_init.c",
        format!("int kiln_map[] = {braces};\n"),
    );
    write(
        dir.path(),
        "root/local_init.c",
        format!("void kiln_fill(void) {{ int t[] = {braces}; (void)t; }}\n"),
    );
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "deep nesting is limited, not fatal");
    assert_sibling_reported(&run);
}

#[test]
fn twenty_thousand_nested_preprocessor_groups_do_not_crash() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "root/nested_if.c",
        format!(
            "{}int kiln_a;\n{}",
            "#if 1\n".repeat(DEEP),
            "#endif\n".repeat(DEEP)
        ),
    );
    write(
        dir.path(),
        "root/nested_ifdef.c",
        format!(
            "{}int kiln_b;\n{}",
            "#ifdef KILN\n".repeat(DEEP),
            "#endif\n".repeat(DEEP)
        ),
    );
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "deep nesting is limited, not fatal");
    assert_sibling_reported(&run);
}

#[test]
fn twenty_thousand_nested_struct_definitions_do_not_crash() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "root/nested_struct.c",
        format!(
            "struct {}S {{ int a; }}{};\n",
            "S { struct ".repeat(DEEP),
            " x; }".repeat(DEEP)
        ),
    );
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "deep nesting is limited, not fatal");
    assert_sibling_reported(&run);
}

#[test]
fn a_smoother_past_the_nesting_limit_is_reported_or_noted() {
    // A long `else if` chain (as in a generated state machine) nests one level per branch.
    // If the lowering stops at its depth limit, the smoother in the last branch is missed,
    // and then a note must say so: silence would read as "no smoother here".
    let dir = tree_with_good_sibling();
    let mut source =
        String::from("static int c;\nvoid kiln_mode(int u) {\n    if (u == 0) c = 0;\n");
    for i in 1..300 {
        source.push_str(&format!("    else if (u == {i}) c = {i};\n"));
    }
    source.push_str("    else c += (u - c) >> 3;\n}\n");
    write(dir.path(), "root/chain.c", source);
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "deep nesting is limited, not fatal");
    let json = run.json();
    assert!(
        count_of(&json, "kiln_mode", "c") == 1 || run.has_note_on("chain.c"),
        "the smoother at the end of a 300-branch else-if chain is neither reported nor \
         noted: {:?}\n{}",
        reported(&json),
        run.context()
    );
    assert_sibling_reported(&run);
}

// 11. NUL bytes.

#[test]
fn nul_bytes_do_not_stop_the_scan() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "root/nul.c",
        b"static int n;\n/* \0\0 */\nstatic const char *tag = \"a\0b\";\n\
          void hub_tick(int u) { n += (u - n) >> 2; }\n",
    );
    // Binary garbage named like a source (a deterministic pseudo-random byte stream, NULs
    // included).
    let mut state: u32 = 0x2545_f491;
    let garbage: Vec<u8> = (0..4096)
        .map(|_| {
            state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            (state >> 24) as u8
        })
        .collect();
    assert!(garbage.contains(&0), "the garbage holds no NUL byte");
    write(dir.path(), "root/blob.c", garbage);
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "NUL bytes are bad C, not a reason to stop");
    run.assert_note_on("blob.c");
    let json = run.json();
    assert_eq!(
        count_of(&json, "hub_tick", "n"),
        1,
        "the smoother after the NUL bytes is not reported: {:?}\n{}",
        reported(&json),
        run.context()
    );
    assert_sibling_reported(&run);
}

// 12. Terminal escape sequences.

const ESC: u8 = 0x1b;
const BEL: u8 = 0x07;

fn assert_no_raw_control(what: &str, bytes: &[u8], run: &Run) {
    assert!(
        !bytes.contains(&ESC) && !bytes.contains(&BEL),
        "raw ESC or BEL bytes reached {what}:\n{}\n{}",
        shown(&String::from_utf8_lossy(bytes)),
        run.context()
    );
}

#[cfg(unix)]
#[test]
fn escape_sequences_in_names_and_source_do_not_reach_the_terminal() {
    let dir = tree_with_good_sibling();
    // A file name that clears the screen and rings the bell: reported in the table.
    write(
        dir.path(),
        "root/vent\x1b[2J\x07.c",
        "static int e; void kiln_tick(int u) { e += (u - e) >> 2; }\n",
    );
    // The same in the name of a file that does not parse: named in a note on stderr.
    write(
        dir.path(),
        "root/bad\x1b[2J\x07.c",
        "void f( { \x1b]0;title\x07 }}}\n",
    );
    // The same in the name of a link that leads nowhere: a note of the walk.
    std::os::unix::fs::symlink("nowhere.c", dir.path().join("root/gone\x1b[2J\x07.c")).unwrap();
    // In a function name (through a macro) and in a state whose index holds a string.
    write(
        dir.path(),
        "root/names.c",
        "#define NAMED(x) x\n\
         static int g; void NAMED(hub\x1b[2J\x07tick)(int u) { g += (u - g) >> 2; }\n\
         static int ring[256];\n\
         void hub_ring(int u) { ring[\"\x1b[2J\x07\"[0]] += (u - ring[\"\x1b[2J\x07\"[0]]) >> 3; }\n",
    );
    let run = tauscan_in(dir.path(), &["list", "root", "--format", "table"], LIMIT);
    run.assert_finished();
    assert!(
        String::from_utf8_lossy(&run.stdout).contains("vent_tick"),
        "the good smoother is missing from the table\n{}",
        run.context()
    );
    assert!(
        String::from_utf8_lossy(&run.stdout).contains("kiln_tick"),
        "the smoother in the file with an escape in its name is missing from the table\n{}",
        run.context()
    );
    assert!(
        run.notes().len() >= 2,
        "the unparseable file and the dangling link should each have a note\n{}",
        run.context()
    );
    assert_no_raw_control("the table", &run.stdout, &run);
    assert_no_raw_control("standard error", &run.stderr_bytes, &run);
}

#[test]
fn escape_sequences_in_arguments_do_not_reach_stderr() {
    // Gates build output paths and defines from branch or job names, which the author of
    // a pull request chooses; an error that repeats such an argument must not drive the
    // terminal.
    let cases: [&[&str]; 3] = [
        &["-o", "missing\x1b[2J\x07/out.txt"],
        &["-D", "\x1b[2J\x07"],
        &["--rate", "\x1b[2J\x07"],
    ];
    for extra in cases {
        let dir = tree_with_good_sibling();
        let mut args = vec!["list", "root"];
        args.extend_from_slice(extra);
        let run = tauscan_in(dir.path(), &args, LIMIT);
        run.assert_exit(2, "the argument is refused or the output cannot be written");
        assert_no_raw_control("standard error", &run.stderr_bytes, &run);
    }
}

// A gate pointed at the wrong place never passes on nothing.

#[test]
fn no_c_file_to_read_is_an_incomplete_scan() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "empty/README.txt", "no sources here\n");
    for command in ["list", "check"] {
        let run = tauscan_in(dir.path(), &[command, "empty"], LIMIT);
        run.assert_exit(
            2,
            "a folder with no .c or .h file gives the gate no verdict",
        );
        assert!(
            run.stderr.contains("no C source or header"),
            "{}",
            run.context()
        );
    }
}

#[test]
fn a_named_file_that_is_not_c_is_noted_and_the_scan_is_incomplete() {
    let dir = tree_with_good_sibling();
    write(dir.path(), "firmware.bin", b"\x7fELF\x00\x01\x02");
    write(dir.path(), "dump.c", b"\x00\x00\x13\x37");
    for named in ["firmware.bin", "dump.c"] {
        let run = tauscan_in(
            dir.path(),
            &["list", "root", named, "--format", "json"],
            LIMIT,
        );
        run.assert_exit(
            2,
            "a named file that cannot be read as C leaves the scan incomplete",
        );
        run.assert_note_on(named);
        assert_sibling_reported(&run);
    }
}

#[test]
fn a_scan_that_read_nothing_prints_no_empty_table_and_writes_no_file() {
    let dir = tempfile::tempdir().unwrap();
    for command in ["list", "check"] {
        let run = tauscan_in(dir.path(), &[command, "no-such-folder"], LIMIT);
        run.assert_exit(2, "a path that does not exist leaves the scan incomplete");
        assert!(
            run.stdout.is_empty(),
            "an empty table looks like an answer:\n{}",
            run.context()
        );
        let run = tauscan_in(
            dir.path(),
            &[command, "no-such-folder", "-o", "out.txt"],
            LIMIT,
        );
        run.assert_exit(2, "nothing to write");
        assert!(!dir.path().join("out.txt").exists(), "{}", run.context());
    }
}

#[test]
fn each_command_offers_only_the_formats_it_writes() {
    let dir = tree_with_good_sibling();
    for (command, refused, offered) in [
        ("list", "sarif", vec!["table", "json"]),
        ("list", "markdown", vec!["table", "json"]),
        ("diff", "sarif", vec!["table", "json", "markdown"]),
    ] {
        let run = tauscan_in(dir.path(), &[command, "HEAD", "--format", refused], LIMIT);
        run.assert_exit(2, "a format the command does not write is a usage error");
        let help = tauscan_in(dir.path(), &[command, "--help"], LIMIT);
        let text = String::from_utf8_lossy(&help.stdout).to_string();
        assert!(
            !text.contains(refused),
            "{command} --help offers {refused}:\n{text}"
        );
        for format in offered {
            assert!(
                text.contains(format),
                "{command} --help lacks {format}:\n{text}"
            );
        }
    }
}

#[test]
fn every_command_help_gives_its_exit_statuses_and_an_example() {
    let dir = tempfile::tempdir().unwrap();
    for command in [
        "list", "check", "report", "baseline", "diff", "explain", "init",
    ] {
        let help = tauscan_in(dir.path(), &[command, "--help"], LIMIT);
        help.assert_exit(0, "help is no error");
        let text = String::from_utf8_lossy(&help.stdout).to_string();
        assert!(text.contains("Exit status: 0"), "{command}:\n{text}");
        assert!(text.contains("Example:\n  tauscan "), "{command}:\n{text}");
    }
}

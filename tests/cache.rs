//! The cache (`--cache DIR`: each file's parse, and the whole program's index and
//! recognition) changes how fast a scan is, never what it reports: on the fixture trees, a
//! scan without the cache, one that fills it and one that reads it print the same bytes
//! and exit the same way; damaged entries, edited files, a header that changes another
//! file's smoother and other options are read afresh, never served stale. (How much faster
//! is the benchmark's business.)
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot build its fixture should stop at once with the cause"
)]

mod common;

use common::*;
use std::path::{Path, PathBuf};

/// Runs `args` in `dir` with `--cache cache` appended when given; stdout and exit code.
fn output(dir: &Path, args: &[&str], cache: Option<&Path>) -> (Vec<u8>, Option<i32>) {
    let cache_text;
    let mut all: Vec<&str> = args.to_vec();
    if let Some(c) = cache {
        cache_text = c.to_string_lossy().into_owned();
        all.push("--cache");
        all.push(&cache_text);
    }
    let run = tauscan_in(dir, &all, LIMIT);
    run.assert_finished();
    (run.stdout, run.code)
}

/// The per-file entries under the cache folder.
fn file_entries(cache: &Path) -> Vec<PathBuf> {
    entries(cache)
        .into_iter()
        .filter(|p| p.extension().is_some_and(|x| x == "ir"))
        .collect()
}

/// The entry files under the cache folder (per file and whole-program).
fn entries(cache: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for folder in std::fs::read_dir(cache).unwrap() {
        let folder = folder.unwrap().path();
        if folder.is_dir() {
            for entry in std::fs::read_dir(&folder).unwrap() {
                out.push(entry.unwrap().path());
            }
        }
    }
    out
}

fn assert_same(what: &str, a: &(Vec<u8>, Option<i32>), b: &(Vec<u8>, Option<i32>)) {
    assert_eq!(a.1, b.1, "{what}: exit status differs");
    assert!(
        a.0 == b.0,
        "{what}: output differs\n--- without the cache\n{}\n--- with it\n{}",
        shown(&String::from_utf8_lossy(&a.0)),
        shown(&String::from_utf8_lossy(&b.0))
    );
}

/// Whether a folder holds a `.c` or `.h` file at any depth.
fn holds_c_files(dir: &Path) -> bool {
    std::fs::read_dir(dir).unwrap().any(|e| {
        let p = e.unwrap().path();
        if p.is_dir() {
            holds_c_files(&p)
        } else {
            p.extension().is_some_and(|x| x == "c" || x == "h")
        }
    })
}

#[test]
fn every_fixture_tree_lists_the_same_with_and_without_the_cache() {
    let mut trees: Vec<PathBuf> = std::fs::read_dir(fixture(""))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_dir())
        .collect();
    trees.sort();
    assert!(trees.len() >= 10, "fixture trees: {trees:?}");
    let args = ["list", "tree", "--format", "json"];
    for tree in trees {
        let name = tree.file_name().unwrap().to_string_lossy().into_owned();
        let dir = tempfile::tempdir().unwrap();
        copy_tree(&tree, &dir.path().join("tree"));
        let cache = dir.path().join("cache");
        let plain = output(dir.path(), &args, None);
        let filling = output(dir.path(), &args, Some(&cache));
        assert_same(&format!("{name}, filling the cache"), &plain, &filling);
        let reading = output(dir.path(), &args, Some(&cache));
        assert_same(&format!("{name}, reading the cache"), &plain, &reading);
        let holds_c = holds_c_files(&tree);
        assert_eq!(
            cache.join("program").is_dir(),
            holds_c,
            "{name}: a whole-program entry is kept for a tree with C files, only then"
        );
    }
}

#[test]
fn cached_scans_print_exactly_what_uncached_scans_print() {
    for (tree, args) in [
        ("forms", &["list", "tree", "--format", "json"][..]),
        (
            "demo-greenhouse",
            &["check", "tree", "--format", "json"][..],
        ),
        ("demo-greenhouse", &["check", "tree"][..]),
        ("decoys", &["list", "tree", "--format", "json"][..]),
        ("rates", &["list", "tree", "--format", "json"][..]),
    ] {
        let dir = tempfile::tempdir().unwrap();
        copy_tree(&fixture(tree), &dir.path().join("tree"));
        let cache = dir.path().join("cache");
        let plain = output(dir.path(), args, None);
        let filling = output(dir.path(), args, Some(&cache));
        assert_same(&format!("{tree}, filling the cache"), &plain, &filling);
        assert!(
            !entries(&cache).is_empty(),
            "{tree}: the cache folder holds no entry after a scan"
        );
        let reading = output(dir.path(), args, Some(&cache));
        assert_same(&format!("{tree}, reading the cache"), &plain, &reading);
    }
}

#[test]
fn damaged_entries_are_parsed_again() {
    let dir = tempfile::tempdir().unwrap();
    copy_tree(&fixture("forms"), &dir.path().join("tree"));
    let cache = dir.path().join("cache");
    let args = ["list", "tree", "--format", "json"];
    let plain = output(dir.path(), &args, None);
    output(dir.path(), &args, Some(&cache));
    let all = entries(&cache);
    assert!(all.len() >= 3, "too few entries to damage: {all:?}");
    // Truncated, emptied, and replaced with garbage.
    for (i, entry) in all.iter().enumerate() {
        let bytes = std::fs::read(entry).unwrap();
        let damaged = match i % 3 {
            0 => bytes[..bytes.len() / 2].to_vec(),
            1 => Vec::new(),
            _ => vec![0xff; 64],
        };
        std::fs::write(entry, damaged).unwrap();
    }
    let reading = output(dir.path(), &args, Some(&cache));
    assert_same("damaged entries", &plain, &reading);
    // And the cache can be deleted outright.
    std::fs::remove_dir_all(&cache).unwrap();
    let again = output(dir.path(), &args, Some(&cache));
    assert_same("deleted cache", &plain, &again);
}

#[test]
fn an_edited_file_is_not_served_from_the_cache() {
    let dir = tempfile::tempdir().unwrap();
    let tree = dir.path().join("tree");
    write(
        &tree,
        "kiln.c",
        "static int y; void kiln_tick(int u) { y += (u - y) >> 3; }\n",
    );
    let cache = dir.path().join("cache");
    let args = ["list", "tree", "--format", "json"];
    output(dir.path(), &args, Some(&cache));
    // The same length, another shift: a cache keyed on size or time alone would miss it.
    write(
        &tree,
        "kiln.c",
        "static int y; void kiln_tick(int u) { y += (u - y) >> 5; }\n",
    );
    let plain = output(dir.path(), &args, None);
    let reading = output(dir.path(), &args, Some(&cache));
    assert_same("edited file", &plain, &reading);
    let json: serde_json::Value = serde_json::from_slice(&reading.0).unwrap();
    // 2^-5: the edited shift, not the cached one.
    assert_eq!(json["smoothers"][0]["alpha"].as_f64(), Some(1.0 / 32.0));
}

#[test]
fn a_header_edit_reaches_the_smoothers_of_unchanged_files() {
    // kiln.c's bytes (its parse entry) stay the same; what it means changes with kiln.h.
    let dir = tempfile::tempdir().unwrap();
    let tree = dir.path().join("tree");
    write(&tree, "kiln.h", "#define KILN_SHIFT 3\n");
    write(
        &tree,
        "kiln.c",
        "#include \"kiln.h\"\nstatic int y;\nvoid kiln_tick(int u) { y += (u - y) >> KILN_SHIFT; }\n",
    );
    let cache = dir.path().join("cache");
    let args = ["list", "tree", "--format", "json"];
    output(dir.path(), &args, Some(&cache));
    write(&tree, "kiln.h", "#define KILN_SHIFT 5\n");
    let plain = output(dir.path(), &args, None);
    let reading = output(dir.path(), &args, Some(&cache));
    assert_same("edited header", &plain, &reading);
    let json: serde_json::Value = serde_json::from_slice(&reading.0).unwrap();
    // 2^-5, from the edited header (C11 6.10.3: the macro is replaced where it is used).
    assert_eq!(json["smoothers"][0]["alpha"].as_f64(), Some(1.0 / 32.0));
}

#[test]
fn other_options_are_another_program() {
    let dir = tempfile::tempdir().unwrap();
    let tree = dir.path().join("tree");
    write(
        &tree,
        "vent.c",
        "#ifdef VENT_FAST\n#define VENT_SHIFT 2\n#else\n#define VENT_SHIFT 4\n#endif\n\
         static int y;\nvoid vent_tick(int u) { y += (u - y) >> VENT_SHIFT; }\n",
    );
    let cache = dir.path().join("cache");
    let slow = ["list", "tree", "--format", "json", "-D", "VENT_SLOW"];
    let fast = ["list", "tree", "--format", "json", "-D", "VENT_FAST"];
    output(dir.path(), &slow, Some(&cache));
    let plain = output(dir.path(), &fast, None);
    let reading = output(dir.path(), &fast, Some(&cache));
    assert_same("another define", &plain, &reading);
    let json: serde_json::Value = serde_json::from_slice(&reading.0).unwrap();
    // With VENT_FAST defined the first branch is built (C11 6.10.1): 2^-2.
    assert_eq!(json["smoothers"][0]["alpha"].as_f64(), Some(0.25));
}

#[test]
fn only_the_newest_whole_program_entries_are_kept() {
    let dir = tempfile::tempdir().unwrap();
    let tree = dir.path().join("tree");
    let cache = dir.path().join("cache");
    let args = ["list", "tree", "--format", "json"];
    for shift in 1..=7 {
        write(
            &tree,
            "kiln.c",
            format!("static int y; void kiln_tick(int u) {{ y += (u - y) >> {shift}; }}\n"),
        );
        output(dir.path(), &args, Some(&cache));
    }
    let programs = std::fs::read_dir(cache.join("program")).unwrap().count();
    assert_eq!(programs, 4, "whole-program entries kept");
    // The newest is among them and serves the same result.
    let plain = output(dir.path(), &args, None);
    let reading = output(dir.path(), &args, Some(&cache));
    assert_same("after pruning", &plain, &reading);
}

#[test]
fn a_cache_folder_that_cannot_be_made_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "tree/kiln.c", GOOD_SMOOTHER);
    write(dir.path(), "blocker", "a file, not a folder");
    let run = tauscan_in(
        dir.path(),
        &["list", "tree", "--cache", "blocker/cache"],
        LIMIT,
    );
    assert_refused_naming(&run, "cache", "the cache folder cannot be created");
}

#[test]
fn a_cache_path_that_is_a_file_or_has_no_parent_is_refused_by_name() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "tree/kiln.c", GOOD_SMOOTHER);
    write(dir.path(), "notes.txt", "a file, not a folder");
    let run = tauscan_in(dir.path(), &["list", "tree", "--cache", "notes.txt"], LIMIT);
    assert_refused_naming(&run, "notes.txt", "a file is no cache folder");
    assert!(run.stderr.contains("not a folder"), "{}", run.context());
    // A mistyped deep path is not made folder by folder.
    let run = tauscan_in(
        dir.path(),
        &["list", "tree", "--cache", "cahce/tauscan/v1"],
        LIMIT,
    );
    assert_refused_naming(
        &run,
        "cahce",
        "the parent of the cache folder does not exist",
    );
    assert!(!dir.path().join("cahce").exists(), "{}", run.context());
    // One level below an existing folder is made.
    let run = tauscan_in(dir.path(), &["list", "tree", "--cache", "cache"], LIMIT);
    run.assert_exit(0, "a new cache folder in an existing one is made");
    assert!(dir.path().join("cache").is_dir());
}

#[test]
fn files_with_the_same_bytes_share_one_entry_written_whole() {
    // Fifty files with the same bytes are one entry, which the parsing threads may write
    // at the same moment; every later scan must still read it whole.
    let dir = tempfile::tempdir().unwrap();
    for i in 0..50 {
        write(
            &dir.path().join("tree"),
            &format!("hub_{i}.c"),
            "static int y; void hub_tick(int u) { y += (u - y) >> 3; }\n",
        );
    }
    let cache = dir.path().join("cache");
    let args = ["list", "tree", "--format", "json"];
    let plain = output(dir.path(), &args, None);
    for _ in 0..3 {
        let reading = output(dir.path(), &args, Some(&cache));
        assert_same("one shared entry", &plain, &reading);
    }
    assert_eq!(file_entries(&cache).len(), 1, "{:?}", entries(&cache));
}

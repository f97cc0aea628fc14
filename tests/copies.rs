//! Files that hold the same bytes (a vendor's headers and drivers copied into each board's
//! folder) are parsed once and the copies take that IR under their own file: what a scan
//! reports must be exactly what it reports when every copy is parsed on its own. The
//! check: a tree whose copies are identical, then the same tree with one newline added at
//! the end of each copy (a different length, so nothing is shared; a trailing newline
//! changes no line, column or token), must print the same JSON and notes.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot build its fixture should stop at once with the cause"
)]

mod common;

use common::*;
use std::path::Path;

/// A kiln controller's shared register header, long enough to be shared (4 KiB and more).
fn registers() -> String {
    let mut text = String::from("#ifndef KILN_REGS_H\n#define KILN_REGS_H\n");
    text.push_str("#define KILN_ALPHA_SHIFT 3\n#define KILN_LP_K 0.125f\n");
    for i in 0..200 {
        text.push_str(&format!(
            "#define KILN_REG_{i} (*(volatile unsigned *)0x4000{i:04})\n"
        ));
    }
    text.push_str("#endif\n");
    text
}

/// A board's thermocouple driver: an integer and a float smoother, a call through the
/// header's macros, and a line the grammar cannot read (so each copy has a note).
fn driver() -> String {
    let mut text = String::from(
        "#include \"kiln_regs.h\"\n\
         static int tc_filtered;\n\
         static float tc_smooth;\n\
         void tc_sample(int raw)\n\
         {\n\
         \x20   tc_filtered += (raw - tc_filtered) >> KILN_ALPHA_SHIFT;\n\
         \x20   tc_smooth += KILN_LP_K * ((float)raw - tc_smooth);\n\
         }\n\
         int tc_broken(void) { return ) 1; }\n",
    );
    // Padding to make the driver long enough to be shared too.
    for i in 0..120 {
        text.push_str(&format!("int tc_pad_{i}(int a) {{ return a + {i}; }}\n"));
    }
    text
}

fn json_and_notes(dir: &Path) -> (Vec<u8>, String) {
    let run = tauscan_in(dir, &["list", "--format", "json", "."], LIMIT);
    run.assert_finished();
    (run.stdout.clone(), run.stderr.clone())
}

#[test]
fn copied_files_report_what_separately_parsed_files_report() {
    let dir = tempfile::tempdir().unwrap();
    let boards = ["boards/k1", "boards/k2", "boards/k3"];
    for b in boards {
        write(dir.path(), &format!("{b}/kiln_regs.h"), registers());
        write(dir.path(), &format!("{b}/thermo.c"), driver());
    }
    assert!(registers().len() >= 4096 && driver().len() >= 4096);
    let (shared, shared_notes) = json_and_notes(dir.path());

    // The cache, filled and then read, gives the same (copies share one entry).
    let cache = tempfile::tempdir().unwrap();
    let cache_arg = cache.path().to_string_lossy().into_owned();
    for pass in ["filling", "reading"] {
        let run = tauscan_in(
            dir.path(),
            &["list", "--format", "json", ".", "--cache", &cache_arg],
            LIMIT,
        );
        run.assert_finished();
        assert!(run.stdout == shared, "{pass} the cache changed the result");
    }

    // Each board's smoothers are reported under its own path and line.
    let json: serde_json::Value = serde_json::from_slice(&shared).unwrap();
    let found: Vec<(String, u64, String)> = json["smoothers"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            (
                s["file"].as_str().unwrap_or_default().to_string(),
                s["line"].as_u64().unwrap_or_default(),
                s["state"].as_str().unwrap_or_default().to_string(),
            )
        })
        .collect();
    for b in boards {
        let file = format!("{b}/thermo.c");
        let mut here: Vec<(u64, &str)> = found
            .iter()
            .filter(|(f, _, _)| *f == file)
            .map(|(_, line, state)| (*line, state.as_str()))
            .collect();
        here.sort();
        assert_eq!(
            here,
            [(6, "tc_filtered"), (7, "tc_smooth")],
            "{file}: {found:?}"
        );
        assert!(
            shared_notes.contains(&format!("{file}:9")),
            "no note for {file}'s unreadable line:\n{shared_notes}"
        );
    }

    // The same tree with every copy made different by a trailing newline.
    for b in &boards[1..] {
        write(dir.path(), &format!("{b}/kiln_regs.h"), registers() + "\n");
        write(dir.path(), &format!("{b}/thermo.c"), driver() + "\n");
    }
    let (separate, separate_notes) = json_and_notes(dir.path());
    assert!(
        shared == separate,
        "copies shared and copies parsed apart differ:\n--- shared\n{}\n--- apart\n{}",
        shown(&String::from_utf8_lossy(&shared)),
        shown(&String::from_utf8_lossy(&separate))
    );
    assert_eq!(shared_notes, separate_notes);
}

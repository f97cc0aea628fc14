//! A file that is only a table of constants (`fixtures/tables/hive_trim_table.h`, a trim
//! per degree included inside an array's initialiser) declares and runs nothing: it gets
//! no note that parts of it could not be read, and the file that includes it is read as
//! before. The grammar cannot read the `#include` line inside the initialiser itself, so
//! the including file keeps its note (tree-sitter-c reads directives only where a
//! declaration or statement may stand).
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot run its tools should stop at once with the cause"
)]

mod common;

use common::*;

#[test]
fn a_table_of_constants_gets_no_note_and_hides_nothing() {
    let dir = crate_root().join("fixtures").join("tables");
    let run = tauscan_in(&dir, &["list", "--format", "json", "."], LIMIT);
    run.assert_finished();
    run.assert_no_note_on("hive_trim_table.h");
    run.assert_note_on("hive_scale.c");
    let found = reported(&run.json());
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].function, "hive_scale_sample");
    assert_eq!(found[0].state, "hive_weight_filtered");
    // `y += (x - y) >> 4` is `y += (x - y) / 16` for a nonnegative difference (C11
    // 6.5.7p5; arithmetic on GCC and Clang for negative values): an exponential average
    // with a = 2^-4.
    assert_eq!(found[0].alpha, Some(0.0625));
}

#[test]
fn a_header_with_anything_but_constants_is_read_as_c() {
    let dir = tempfile::tempdir().unwrap();
    // The same table with one name in it is not a table of constants: it is parsed, and
    // the grammar's complaint about it is reported.
    let table = std::fs::read_to_string(
        crate_root()
            .join("fixtures")
            .join("tables")
            .join("hive_trim_table.h"),
    )
    .unwrap();
    write(
        dir.path(),
        "hive_trim_table.h",
        table.replace("-8,", "HIVE_ZERO,"),
    );
    let run = tauscan_in(dir.path(), &["list", "--format", "json", "."], LIMIT);
    run.assert_finished();
    run.assert_note_on("hive_trim_table.h");
}

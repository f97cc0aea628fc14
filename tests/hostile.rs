//! The hostile-input suite: inputs nobody reviewed, as a gate meets them on a pull request.
//! Each case runs the binary with a time limit on a small tree and checks that it ends by
//! itself (no panic, no stack overflow, no hang), says what it could not read, keeps the
//! rest of the scan, and exits with the status the README's table gives. Peak memory is
//! bounded by the child's address-space limit (`ulimit -v`), so a case that would grow
//! without bound fails instead of thrashing the machine.
//!
//! The cases the issue lists that `bad_input.rs` already holds (invalid UTF-8, NUL bytes,
//! a link loop, an unreadable file, macro cycles, escape sequences in the table and on
//! standard error) stay there; this file adds the large and the spec-side cases and the
//! escaping of every other output format.
#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot build its fixture should stop at once with the cause"
)]

mod common;

use common::*;
use serde_json::Value;
use std::path::Path;
use std::process::Command;
use std::time::Duration;

/// The address-space limit of each child, in KiB: 2 GiB. The 64 MiB worker stacks are
/// reserved address space, so the limit is set well above them; the scans here need
/// tens of megabytes.
const ADDRESS_LIMIT_KIB: u64 = 2 * 1024 * 1024;

/// Runs the binary under `ulimit -v`, so that unbounded growth ends in an allocation
/// failure (an abort, which `assert_finished` reports) rather than in swapping.
fn bounded(dir: &Path, args: &[&str], limit: Duration) -> Run {
    let mut command = Command::new("sh");
    command.args([
        "-c",
        &format!("ulimit -v {ADDRESS_LIMIT_KIB} && exec \"$0\" \"$@\""),
        env!("CARGO_BIN_EXE_tauscan"),
    ]);
    tauscan_command(command, dir, args, limit)
}

// Large C.

#[test]
fn one_hundred_thousand_nested_parentheses_do_not_crash() {
    let dir = tree_with_good_sibling();
    let depth = 100_000;
    let source = format!(
        "static int z; void kiln_deep(int u) {{ z += {}u - z{} >> 3; }}\n",
        "(".repeat(depth),
        ")".repeat(depth)
    );
    write(dir.path(), "root/deep.c", source);
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "deep nesting is limited, not fatal");
    // What the limit left unread is said, not passed over in silence.
    run.assert_note_on("deep.c");
    assert_sibling_reported(&run);
}

#[test]
fn a_ten_megabyte_line_is_read_and_the_scan_goes_on() {
    let dir = tree_with_good_sibling();
    // One line of 10 MiB: a table of constants written out on a single line, as a code
    // generator might, ending in a smoother on the same line.
    let mut line = String::from("static const int kiln_table[] = {");
    while line.len() < 10 * 1024 * 1024 {
        line.push_str("1234,");
    }
    line.push_str("0}; static int w; void kiln_long(int u) { w += (u - w) >> 4; }\n");
    write(dir.path(), "root/long_line.c", &line);
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "a long line is still C");
    let json = run.json();
    assert_eq!(
        count_of(&json, "kiln_long", "w"),
        1,
        "the smoother at the end of the 10 MiB line is not reported\n{}",
        run.context()
    );
    assert_sibling_reported(&run);
}

// Macros that name themselves.

#[test]
fn self_referential_macros_expand_once_and_do_not_hang() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "root/selfref.c",
        "#define GAIN GAIN\n\
         #define SHIFT (SHIFT + 1)\n\
         #define STEP(x) STEP(x) + 1\n\
         #define TWICE(x) TWICE(TWICE(x))\n\
         static int a, b, c, d;\n\
         void hub_a(int u) { a += (u - a) / GAIN; }\n\
         void hub_b(int u) { b += (u - b) >> SHIFT; }\n\
         void hub_c(int u) { c += (u - c) / STEP(4); }\n\
         void hub_d(int u) { d += (u - d) / TWICE(2); }\n",
    );
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "a self-referential macro is cut, not followed");
    // C11 6.10.3.4p2: inside its own expansion a macro's name is not replaced again, so
    // every coefficient here ends in a bare unknown name and has no value.
    let json = run.json();
    for s in reported(&json) {
        if s.function.starts_with("hub_") {
            assert_eq!(
                s.alpha, None,
                "a coefficient behind a self-referential macro was given a value: {s:?}"
            );
        }
    }
    assert_sibling_reported(&run);
}

// Code that makes values grow: hash rounds, chains of updates, thousands of locals.

/// An image check in the style of a message-digest round function: four 32-bit words
/// mixed by 64 macro steps, each rotating and adding the others (the shape of MD5).
fn digest_rounds_source() -> String {
    let mut src = String::from(
        "#include <stdint.h>\n\
         #define MIX_F(x, y, z) (((x) & (y)) | (~(x) & (z)))\n\
         #define MIX_G(x, y, z) (((x) & (z)) | ((y) & ~(z)))\n\
         #define MIX_H(x, y, z) ((x) ^ (y) ^ (z))\n\
         #define MIX_I(x, y, z) ((y) ^ ((x) | ~(z)))\n\
         #define ROTL(x, n) (((x) << (n)) | ((x) >> (32 - (n))))\n\
         #define ROUND(f, a, b, c, d, x, t, s) (a) += f((b), (c), (d)) + (x) + (t); \\\n\
             (a) = ROTL((a), (s)); (a) += (b);\n\
         static uint32_t vent_image_sum[4];\n\
         void vent_image_block(const uint32_t *w)\n{\n\
             uint32_t a = vent_image_sum[0], b = vent_image_sum[1];\n\
             uint32_t c = vent_image_sum[2], d = vent_image_sum[3];\n",
    );
    let regs = ["a", "b", "c", "d"];
    for i in 0..64usize {
        let f = ["MIX_F", "MIX_G", "MIX_H", "MIX_I"][i / 16];
        let r: Vec<&str> = (0..4).map(|k| regs[(k + 4 - i % 4) % 4]).collect();
        src.push_str(&format!(
            "    ROUND({f}, {}, {}, {}, {}, w[{}], 0x{:08x}u, {});\n",
            r[0],
            r[1],
            r[2],
            r[3],
            i % 16,
            (i as u64 * 2_654_435_761) & 0xffff_ffff,
            7 + (i % 4) * 5
        ));
    }
    src.push_str(
        "    vent_image_sum[0] += a; vent_image_sum[1] += b;\n\
             vent_image_sum[2] += c; vent_image_sum[3] += d;\n}\n",
    );
    src
}

/// The same in the style of a five-word digest with a message schedule computed by a
/// macro inside the round macro (the shape of SHA-1): 80 rounds.
fn schedule_rounds_source() -> String {
    let mut src = String::from(
        "#include <stdint.h>\n\
         #define ROL(v, n) (((v) << (n)) | ((v) >> (32 - (n))))\n\
         #define NEXT(i) (w[(i) & 15] = ROL(w[((i) + 13) & 15] ^ w[((i) + 8) & 15] ^ \\\n\
             w[((i) + 2) & 15] ^ w[(i) & 15], 1))\n\
         #define R0(v, x, y, z, q, i) z += ((x & (y ^ q)) ^ q) + w[i] + 0x5A827999u + ROL(v, 5); \\\n\
             x = ROL(x, 30);\n\
         #define R1(v, x, y, z, q, i) z += (x ^ y ^ q) + NEXT(i) + 0x6ED9EBA1u + ROL(v, 5); \\\n\
             x = ROL(x, 30);\n\
         static uint32_t vent_log_digest[5];\n\
         void vent_log_block(uint32_t *w)\n{\n\
             uint32_t a = vent_log_digest[0], b = vent_log_digest[1], c = vent_log_digest[2];\n\
             uint32_t d = vent_log_digest[3], e = vent_log_digest[4];\n",
    );
    let regs = ["a", "b", "c", "d", "e"];
    for i in 0..80usize {
        let m = if i < 16 { "R0" } else { "R1" };
        let r: Vec<&str> = (0..5).map(|k| regs[(k + 5 - i % 5) % 5]).collect();
        src.push_str(&format!(
            "    {m}({}, {}, {}, {}, {}, {i});\n",
            r[0], r[1], r[2], r[3], r[4]
        ));
    }
    src.push_str(
        "    vent_log_digest[0] += a; vent_log_digest[1] += b; vent_log_digest[2] += c;\n\
             vent_log_digest[3] += d; vent_log_digest[4] += e;\n}\n",
    );
    src
}

#[test]
fn digest_round_macros_are_read_within_bounds() {
    let dir = tree_with_good_sibling();
    write(dir.path(), "root/image_check.c", digest_rounds_source());
    write(dir.path(), "root/log_check.c", schedule_rounds_source());
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "hash rounds are bit arithmetic, read and set aside");
    let json = run.json();
    for s in reported(&json) {
        assert!(
            !s.function.starts_with("vent_image") && !s.function.starts_with("vent_log"),
            "a digest round was reported as a smoother: {s:?}"
        );
    }
    assert_sibling_reported(&run);
}

#[test]
fn four_thousand_chained_updates_are_cut_with_a_note() {
    let dir = tree_with_good_sibling();
    let mut src = String::from("static float pump_level;\nvoid pump_chain(float x)\n{\n");
    for _ in 0..4000 {
        src.push_str("    pump_level = pump_level * 0.5f + x;\n");
    }
    src.push_str("}\nvoid pump_chain_local(float x)\n{\n    float t = x;\n");
    for _ in 0..4000 {
        src.push_str("    t = t * 0.5f + x;\n");
    }
    src.push_str("    pump_level = t;\n}\n");
    write(dir.path(), "root/chain.c", src);
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "a long chain is cut, not followed to the end");
    // What the cut left unread is said.
    run.assert_note_on("chain.c");
    assert_sibling_reported(&run);
}

#[test]
fn a_function_with_ten_thousand_locals_is_read() {
    let dir = tree_with_good_sibling();
    let mut src =
        String::from("static int barn_out;\nstatic int barn_level;\nvoid barn_many(int u)\n{\n");
    for i in 0..10_000 {
        src.push_str(&format!("    int v{i} = u + {i};\n"));
    }
    for i in (0..10_000).step_by(2) {
        src.push_str(&format!("    if (v{i} > {i}) v{} = v{i} - 1;\n", i + 1));
    }
    // A real smoother at the end, after all of them.
    src.push_str("    barn_out = v9999 + v1;\n    barn_level += (u - barn_level) >> 3;\n}\n");
    write(dir.path(), "root/many_locals.c", src);
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "ten thousand locals are read in one pass");
    assert_eq!(
        count_of(&run.json(), "barn_many", "barn_level"),
        1,
        "the smoother after ten thousand locals is not reported\n{}",
        run.context()
    );
    assert_sibling_reported(&run);
}

#[test]
fn a_stray_brace_in_a_file_the_grammar_loses_does_not_stop_the_scan() {
    // The grammar loses this file (a macro used as a statement prefix, an unbalanced
    // brace at the top); the functions are read again one by one, and nothing panics.
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "root/lost.c",
        "#if KILN_FEATURE\n#include KILN_HOOKS\nstatic int kiln_fan;\n}\n\
         void kiln_a(int u)\n{\n  FOR_EACH_ZONE(z) {\n    kiln_fan = z;\n  }\n}\n\
         static int kiln_y;\nvoid kiln_b(int u)\n{\n  kiln_y += (u - kiln_y) >> 2;\n}\n}}\n#endif\n",
    );
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(0, "a file the grammar loses is read as far as it goes");
    assert_eq!(
        count_of(&run.json(), "kiln_b", "kiln_y"),
        1,
        "the function after the lost part is not read again\n{}",
        run.context()
    );
    assert_sibling_reported(&run);
}

// Constants that C leaves undefined.

/// The smoothers of `hub_*` functions in the JSON, as (function, alpha).
fn hub_alphas(json: &Value) -> Vec<(String, Option<f64>)> {
    reported(json)
        .into_iter()
        .filter(|s| s.function.starts_with("hub_"))
        .map(|s| (s.function, s.alpha))
        .collect()
}

#[test]
fn division_by_zero_and_overlong_shifts_in_constants_give_no_value() {
    let dir = tree_with_good_sibling();
    write(
        dir.path(),
        "root/undefined.c",
        "#define ZERO 0\n\
         #define WIDE 40\n\
         static const int kiln_zero = 0;\n\
         static const int kiln_wide = 40;\n\
         static const int kiln_min_over = (-2147483647 - 1) / -1;\n\
         static const int kiln_max_over = 2147483647 + 1;\n\
         static int p, q, r, s, p2, r2, t, t2;\n\
         void hub_div(int u) { p += (u - p) / ZERO; }\n\
         void hub_mod(int u) { q += (u - q) / (8 % ZERO); }\n\
         void hub_shift(int u) { r += (u - r) >> WIDE; }\n\
         void hub_negshift(int u) { s += (u - s) >> (0 - 3); }\n\
         void hub_div_const(int u) { p2 += (u - p2) / kiln_zero; }\n\
         void hub_shift_const(int u) { r2 += (u - r2) >> kiln_wide; }\n\
         void hub_min(int u) { t += (u - t) / kiln_min_over; }\n\
         void hub_max(int u) { t2 += (u - t2) / kiln_max_over; }\n",
    );
    let run = bounded(dir.path(), &["list", "root", "--format", "json"], LIMIT);
    run.assert_exit(
        0,
        "undefined constants are findings of the code, not of the scan",
    );
    // C11 6.5.5p5 (division by zero is undefined), 6.5.7p3 (a shift by a negative count
    // or by the width or more is undefined) and 6.5p5 (INT_MIN / -1 overflows): none of
    // these has a value, so none may be turned into a coefficient.
    let alphas = hub_alphas(&run.json());
    let mut listed: Vec<&str> = alphas.iter().map(|(f, _)| f.as_str()).collect();
    listed.sort_unstable();
    assert_eq!(
        listed,
        [
            "hub_div",
            "hub_div_const",
            "hub_max",
            "hub_min",
            "hub_mod",
            "hub_negshift",
            "hub_shift",
            "hub_shift_const"
        ],
        "every smoother with an undefined constant should still be listed, with no alpha\n{}",
        run.context()
    );
    for (function, alpha) in alphas {
        assert_eq!(
            alpha, None,
            "{function}: an undefined constant was given the coefficient {alpha:?}"
        );
    }
    assert_sibling_reported(&run);
}

// Hostile specs.

/// A tree with the good smoother and `spec` as its `tauscan.yaml`, checked.
fn check_with_spec(spec: &str) -> Run {
    let dir = tree_with_good_sibling();
    write(dir.path(), "root/tauscan.yaml", spec);
    bounded(dir.path(), &["check", "root"], LIMIT)
}

#[test]
fn a_yaml_alias_bomb_is_refused_quickly_with_a_message() {
    // Nine levels of nine aliases each: expanded, 9^9 (387 million) strings.
    let mut spec =
        String::from("bomb:\n  a: &a [\"x\",\"x\",\"x\",\"x\",\"x\",\"x\",\"x\",\"x\",\"x\"]\n");
    for (previous, level) in "abcdefgh".chars().zip("bcdefghi".chars()) {
        let refs = vec![format!("*{previous}"); 9].join(",");
        spec.push_str(&format!("  {level}: &{level} [{refs}]\n"));
    }
    let run = check_with_spec(&spec);
    assert_refused_naming(
        &run,
        "tauscan.yaml",
        "a spec that cannot be read is a usage error",
    );
}

#[test]
fn a_deeply_nested_spec_is_refused_with_a_message() {
    let depth = 100_000;
    let spec = format!("smoothers: {}1{}\n", "[".repeat(depth), "]".repeat(depth));
    let run = check_with_spec(&spec);
    assert_refused_naming(
        &run,
        "tauscan.yaml",
        "a spec that cannot be read is a usage error",
    );
    let mapping = format!("smoothers:\n{}\n", {
        let mut text = String::new();
        for level in 0..2000 {
            text.push_str(&" ".repeat(level + 2));
            text.push_str("k:\n");
        }
        text
    });
    let run = check_with_spec(&mapping);
    run.assert_exit(2, "a spec that cannot be read is a usage error");
}

#[test]
fn a_spec_that_is_not_utf8_or_holds_nul_is_refused_with_a_message() {
    for bytes in [&b"smoothers: []\n\xff\xfe\n"[..], &b"smoothers: [\0]\n"[..]] {
        let dir = tree_with_good_sibling();
        write(dir.path(), "root/tauscan.yaml", bytes);
        let run = bounded(dir.path(), &["check", "root"], LIMIT);
        assert_refused_naming(
            &run,
            "tauscan.yaml",
            "a spec that cannot be read is a usage error",
        );
    }
}

// Untrusted text in every output format.

const ESC: char = '\x1b';
const BEL: char = '\x07';

/// A tree whose smoother breaks its spec, on a line whose comment, file name and
/// function name carry terminal escape sequences.
fn tree_with_hostile_finding() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "root/kiln\x1b[2J\x07.c",
        "#define NAMED(x) x\n\
         static int y;\n\
         void NAMED(kiln\x1b]0;owned\x07tick)(int u) { y += (u - y) >> 3; } /* \x1b[2J\x07\x1b[31m */\n",
    );
    write(
        dir.path(),
        "root/tauscan.yaml",
        "rates:\n  - { path: \"**\", rate: \"1 kHz\" }\n\
         smoothers:\n  - match: { state: y }\n    requires:\n      cutoff: { min: \"100 Hz\" }\n",
    );
    dir
}

fn assert_no_raw_escape(what: &str, bytes: &[u8], run: &Run) {
    let text = String::from_utf8_lossy(bytes);
    assert!(
        !text.contains(ESC) && !text.contains(BEL),
        "raw ESC or BEL reached {what}:\n{}\n{}",
        shown(&text),
        run.context()
    );
}

#[cfg(unix)]
#[test]
fn escape_sequences_never_reach_the_terminal_in_check_diagnostics() {
    let dir = tree_with_hostile_finding();
    let run = bounded(dir.path(), &["check", "root"], LIMIT);
    run.assert_exit(1, "the cutoff is below the spec's minimum");
    let out = String::from_utf8_lossy(&run.stdout).into_owned();
    assert!(
        out.contains("y += (u - y) >> 3"),
        "the diagnostic does not quote the source line\n{}",
        shown(&out)
    );
    assert_no_raw_escape("the diagnostics", &run.stdout, &run);
    assert_no_raw_escape("standard error", &run.stderr_bytes, &run);
}

#[cfg(unix)]
#[test]
fn escape_sequences_are_escaped_in_json_and_sarif_and_kept_as_text() {
    let dir = tree_with_hostile_finding();
    for format in ["json", "sarif"] {
        let run = bounded(dir.path(), &["check", "root", "--format", format], LIMIT);
        run.assert_exit(1, "the cutoff is below the spec's minimum");
        // RFC 8259 section 7: control characters in a JSON string are escaped, so the
        // raw bytes cannot appear, and the parsed text keeps the name as it was.
        assert_no_raw_escape(format, &run.stdout, &run);
        // SARIF 2.1.0 section 3.4.3 (and RFC 3986 section 2.1): an artifact's `uri` is
        // percent-encoded, so there the bytes appear as `%1B` and `%07`.
        let text = run.json().to_string();
        let expected = if format == "sarif" {
            "kiln%1B%5B2J%07.c"
        } else {
            "kiln\\u001b[2J\\u0007.c"
        };
        assert!(
            text.contains(expected),
            "{format}: the file name is not carried, escaped, into the output\n{}",
            shown(&String::from_utf8_lossy(&run.stdout))
        );
    }
}

#[cfg(unix)]
#[test]
fn escape_sequences_are_neutralised_in_markdown() {
    let dir = tree_with_hostile_finding();
    let run = bounded(
        dir.path(),
        &["check", "root", "--format", "markdown"],
        LIMIT,
    );
    run.assert_exit(1, "the cutoff is below the spec's minimum");
    assert_no_raw_escape("the Markdown summary", &run.stdout, &run);
}

#[cfg(unix)]
#[test]
fn escape_sequences_are_neutralised_in_the_report_the_baseline_and_the_starter_spec() {
    let dir = tree_with_hostile_finding();
    for (args, name) in [
        (&["report", "root", "--out", "out.html"][..], "out.html"),
        (&["report", "root", "--out", "out.md"][..], "out.md"),
        (&["baseline", "root", "-o", "base.json"][..], "base.json"),
        (&["init", "root", "-o", "init.yaml"][..], "init.yaml"),
    ] {
        let run = bounded(dir.path(), args, LIMIT);
        run.assert_finished();
        let written = std::fs::read(dir.path().join(name))
            .unwrap_or_else(|e| panic!("{name} was not written: {e}\n{}", run.context()));
        assert_no_raw_escape(name, &written, &run);
        if name == "init.yaml" {
            // The names are quoted, so the starter spec is still a spec tauscan reads.
            let reread = bounded(
                dir.path(),
                &["check", "root", "--spec", "init.yaml", "--format", "json"],
                LIMIT,
            );
            reread.assert_finished();
            assert_ne!(
                reread.code,
                Some(2),
                "the starter spec does not load\n{}",
                reread.context()
            );
        }
        assert_no_raw_escape("standard output", &run.stdout, &run);
        assert_no_raw_escape("standard error", &run.stderr_bytes, &run);
    }
}

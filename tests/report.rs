//! The smoother document (`tauscan report`), end to end and against its sources of truth:
//!
//! - the plotted series are the figures of `metrics` (the step curve first reaches 63.2, 90
//!   and 95 % at the samples `metrics` counts, the magnitude curve passes -3 dB at the cutoff
//!   `metrics` computes); `metrics` itself is held against scipy.signal in
//!   tests/metrics_reference.rs, so here the check is that the plots use it faithfully;
//! - text from the scanned files, the file names and the spec's path (`<script>`, `&`,
//!   quotes, control and bidirectional characters) comes out as text, never as markup;
//! - the page is self-contained (no script, no fetch) and renders in headless Chromium to a
//!   page that is not blank, with one step and one magnitude plot per smoother that has
//!   figures, and no console message. Without Chromium (a contributor's laptop) that test
//!   is ignored, and the summary says why: `build.rs` sets `cfg(tauscan_no_chromium)` when
//!   it finds no browser (`TAUSCAN_TEST_CHROMIUM`, `/usr/bin/chromium`, `chromium` on the
//!   PATH) outside CI. In CI (`CI=true`) the cfg is never set, so the test runs and fails
//!   when the browser is missing. After installing Chromium, `touch build.rs` (or set
//!   `TAUSCAN_TEST_CHROMIUM`) so the build looks again.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    reason = "a test that cannot build its fixture or run a program should stop with the cause"
)]

use serde_json::Value;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};
use tauscan::figures::SmootherFigures;
use tauscan::metrics::{Figures, Stage, FRACTION_63};
use tauscan::report::plot;

mod common;

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(name)
}

/// Runs the binary with a fixed document date.
fn tauscan(args: &[&std::ffi::OsStr]) -> Output {
    common::output(
        Command::new(env!("CARGO_BIN_EXE_tauscan"))
            .args(args)
            .env("SOURCE_DATE_EPOCH", "1700000000"),
    )
}

/// Writes the document of `dir` to `out` and returns its text.
fn report(dir: &Path, out: &Path, extra: &[&str]) -> String {
    let mut args: Vec<&std::ffi::OsStr> = vec!["report".as_ref(), dir.as_os_str()];
    args.extend(extra.iter().map(|a| std::ffi::OsStr::new(*a)));
    args.push("--out".as_ref());
    args.push(out.as_os_str());
    let run = tauscan(&args);
    assert_eq!(
        run.status.code(),
        Some(0),
        "tauscan report failed: {}",
        String::from_utf8_lossy(&run.stderr)
    );
    std::fs::read_to_string(out).unwrap()
}

fn inventory(dir: &Path) -> Value {
    let run = tauscan(&[
        "check".as_ref(),
        "--format".as_ref(),
        "json".as_ref(),
        dir.as_os_str(),
    ]);
    serde_json::from_slice(&run.stdout).unwrap()
}

/// The scan and check of a folder through the library, with its `tauscan.yaml` if any.
fn checked_scan(dir: &Path) -> tauscan::scan::Scan {
    let options = tauscan::scan::ScanOptions {
        paths: vec![dir.to_path_buf()],
        ..Default::default()
    };
    let mut scan = tauscan::scan::run(&options);
    let spec = match std::fs::read_to_string(dir.join("tauscan.yaml")) {
        Ok(text) => tauscan::spec::from_str(&text).unwrap(),
        Err(_) => tauscan::spec::Spec::default(),
    };
    tauscan::check::run(&mut scan, &spec);
    scan
}

/// Every response the document plots: each smoother's own stage, and each cascade whole.
fn plotted_responses(scan: &tauscan::scan::Scan) -> Vec<(String, Vec<Stage>, Figures)> {
    let mut out = Vec::new();
    for (i, f) in scan.figures.iter().enumerate() {
        let SmootherFigures {
            stage,
            own,
            cascade,
            ..
        } = f;
        if let (Some(stage), Some(own)) = (stage, own) {
            out.push((format!("smoother {i}"), vec![*stage], *own));
        }
        if let Some((chain, figures)) = cascade {
            let stages: Vec<Stage> = chain
                .iter()
                .map(|&k| scan.figures[k].stage.unwrap())
                .collect();
            out.push((format!("cascade ending at {i}"), stages, *figures));
        }
    }
    out
}

/// -3 dB in decibels: 20 log10(1 / sqrt 2) (definition of the half-power point).
fn minus_3_db() -> f64 {
    20.0 * std::f64::consts::FRAC_1_SQRT_2.log10()
}

#[test]
fn plotted_series_cross_where_the_metrics_say() {
    // Source: `metrics` (held against scipy.signal in tests/metrics_reference.rs); the check
    // is that the curves drawn are its responses, sample for sample and at the cutoff.
    let mut checked = 0;
    let mut cutoffs_checked = 0;
    for folder in ["demo-greenhouse", "forms"] {
        let scan = checked_scan(&fixture(folder));
        for (what, stages, figures) in plotted_responses(&scan) {
            let length = plot::step_length(&[&figures], None);
            let step = plot::step_series(&stages, length);
            assert_eq!(step.first(), Some(&(0.0, 0.0)), "{folder} {what}");
            for mark in [figures.to_63, figures.to_90, figures.to_95] {
                let q = mark.fraction;
                let first = step.iter().find(|(_, y)| *y >= q).map(|p| p.0);
                assert_eq!(
                    first,
                    mark.samples.map(|s| s.0),
                    "{folder} {what}: the step curve first reaches {q} elsewhere"
                );
            }
            let magnitude = plot::magnitude_series(&stages, plot::MAGNITUDE_POINTS);
            assert_eq!(
                magnitude.last().unwrap().0,
                0.5,
                "{folder} {what}: ends at Nyquist"
            );
            let crossing = magnitude.windows(2).find_map(|pair| {
                let ((f0, d0), (f1, d1)) = (pair[0], pair[1]);
                (d0 > minus_3_db() && d1 <= minus_3_db()).then(|| {
                    // Linear in decibels over a logarithmic frequency, as the axis draws it.
                    let t = (d0 - minus_3_db()) / (d0 - d1);
                    (f0.ln() + t * (f1.ln() - f0.ln())).exp()
                })
            });
            match figures.cutoff {
                Some(w) => {
                    let expected = w.0 / std::f64::consts::TAU;
                    let found = crossing
                        .unwrap_or_else(|| panic!("{folder} {what}: the curve never passes -3 dB"));
                    assert!(
                        (found - expected).abs() <= 2e-3 * expected,
                        "{folder} {what}: -3 dB at {found} fs, cutoff {expected} fs"
                    );
                    cutoffs_checked += 1;
                }
                None => assert_eq!(crossing, None, "{folder} {what}: no cutoff below Nyquist"),
            }
            checked += 1;
        }
    }
    assert!(checked >= 30, "only {checked} responses checked");
    assert!(
        cutoffs_checked >= 25,
        "only {cutoffs_checked} cutoffs checked"
    );
}

#[test]
fn the_vent_current_curve_matches_a_hand_computation() {
    // Source: hand computation for y += (u - y) >> 4 (alpha 1/16) at 200 Hz: after n updates
    // the step has reached 1 - (15/16)^n, which is 0.6202 at n = 15 and 0.6439 at n = 16, so
    // 63.2 % is first reached at 16 updates, 80 ms; and the demo's spec asks for 8-12 Hz.
    let dir = tempfile::tempdir().unwrap();
    let html = report(&fixture("demo-greenhouse"), &dir.path().join("r.html"), &[]);
    let scan = checked_scan(&fixture("demo-greenhouse"));
    let i = scan
        .recognition
        .smoothers
        .iter()
        .position(|s| s.state == "vent_current_ma")
        .unwrap();
    let step = plot::step_series(&[scan.figures[i].stage.unwrap()], 20);
    assert!((step[15].1 - (1.0 - (15.0f64 / 16.0).powi(15))).abs() < 1e-12);
    assert!(step[15].1 < FRACTION_63 && step[16].1 >= FRACTION_63);
    let section = section_of(&html, "vent_motor.c::vent_current_sample::vent_current_ma");
    assert!(
        section.contains("63.2 % after 80 ms (16 samples)"),
        "{section}"
    );
    assert!(
        section.contains("required cutoff band"),
        "the spec's band is drawn"
    );
    assert!(section.contains("frequency (Hz), up to Nyquist"));
    assert!(section.contains("time after the step (s)"));
}

/// The text of the section of the smoother with this id (escaped as the page escapes it).
fn section_of<'a>(html: &'a str, id: &str) -> &'a str {
    let escaped = id
        .replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;");
    let heading = format!("<h2><code>{escaped}</code></h2>");
    let start = html
        .find(&heading)
        .unwrap_or_else(|| panic!("no section for {id}"));
    let end = html[start..]
        .find("</section>")
        .map_or(html.len(), |e| start + e);
    &html[start..end]
}

#[test]
fn the_demo_page_holds_every_smoother_and_what_the_gate_found() {
    let dir = tempfile::tempdir().unwrap();
    let demo = fixture("demo-greenhouse");
    let html = report(&demo, &dir.path().join("demo.html"), &[]);
    let doc = inventory(&demo);
    let smoothers = doc["smoothers"].as_array().unwrap();

    // Header: root, spec, the date given by SOURCE_DATE_EPOCH, the version.
    assert!(html.contains(&format!("<code>{}</code>", demo.display())));
    assert!(html.contains("tauscan.yaml</code>"));
    // Source: `date -u -d @1700000000` gives Tue Nov 14 22:13:20 UTC 2023.
    assert!(html.contains("2023-11-14 22:13 UTC"));
    assert!(html.contains(&format!("tauscan {}", env!("CARGO_PKG_VERSION"))));
    assert!(html.contains("an aid to review, not a safety certification"));
    assert!(html.contains("local codes and licensed practice"));

    // One summary row and one section per smoother, with the verdict the gate gives.
    let summary = &html[html.find("<table class=\"summary\">").unwrap()..];
    let summary = &summary[..summary.find("</table>").unwrap()];
    assert_eq!(
        summary.matches("<tr><td class=\"id\">").count(),
        smoothers.len()
    );
    assert_eq!(
        html.matches("<section class=\"smoother\"").count(),
        smoothers.len()
    );
    for s in smoothers {
        let id = s["id"].as_str().unwrap();
        let section = section_of(&html, id);
        let mut fired: Vec<&str> = doc["findings"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|f| f["smoother"].as_str() == Some(id))
            .map(|f| f["rule"].as_str().unwrap())
            .collect();
        fired.dedup();
        let verdict = section[section.find("<dt>verdict</dt>").unwrap()..].to_string();
        if s["instances"].as_u64() > Some(0) {
            // A filter function's own update: its calls are judged, each as an instance.
            assert!(verdict.contains("instance"), "{id}: {verdict}");
            assert!(
                fired.is_empty(),
                "{id}: rules judge the instances, not the body"
            );
            continue;
        }
        if fired.is_empty() {
            // Nothing fired: a pass, or a neutral state when the spec asks nothing of it
            // or no figure could be held against what it asks.
            assert!(
                verdict.contains(">pass")
                    || verdict.contains(">no requirement")
                    || verdict.contains(">not evaluated"),
                "{id}: {verdict}"
            );
        }
        if s["alpha"].is_null() && s["window"].is_null() {
            assert!(
                !verdict.contains(">pass"),
                "{id}: no figures, yet a pass: {verdict}"
            );
        }
        for rule in fired {
            assert!(verdict.contains(rule), "{id}: {rule} not in {verdict}");
        }
        let has_figures = !s["cutoff_below_nyquist"].is_null();
        assert_eq!(
            section.matches("<figure class=\"plot step\">").count(),
            usize::from(has_figures),
            "{id}"
        );
        assert_eq!(
            section.matches("<figure class=\"plot magnitude\">").count(),
            usize::from(has_figures),
            "{id}"
        );
        if !has_figures {
            assert!(section.contains("class=\"no-plot\""), "{id} says why");
        }
    }
    // The cascade of the demo is drawn whole as well, in both plots.
    let slow = section_of(&html, "light.c::light_sample::lux_slow");
    assert_eq!(slow.matches("whole cascade (2 stages)").count(), 2);
}

#[test]
fn ids_in_the_summary_break_only_between_their_parts() {
    // Source: the HTML standard's `<wbr>` (a line-break opportunity) and CSS Text 3's
    // `overflow-wrap: normal` (no break inside a word otherwise), from memory.
    let dir = tempfile::tempdir().unwrap();
    let html = report(
        &fixture("demo-greenhouse"),
        &dir.path().join("demo.html"),
        &[],
    );
    let summary = &html[html.find("<table class=\"summary\">").unwrap()..];
    let summary = &summary[..summary.find("</table>").unwrap()];
    assert!(
        summary.contains(
            "<code>climate.<wbr>c::<wbr>climate_<wbr>step::<wbr>air_<wbr>temp_<wbr>c.<wbr>y</code>"
        ),
        "{summary}"
    );
    assert!(summary.contains("<code>vent_<wbr>motor.<wbr>c:14</code>"));
    // Between the separators the words stay whole: no break opportunity inside them.
    for cell in summary.split("<td class=\"id\">").skip(1) {
        let code = &cell[cell.find("<code>").unwrap() + 6..cell.find("</code>").unwrap()];
        for piece in code.split("<wbr>") {
            let last = piece.chars().last().unwrap();
            assert!(
                piece == code.rsplit("<wbr>").next().unwrap()
                    || matches!(last, '.' | '_' | '/' | ':')
                    || piece.ends_with("-&gt;"),
                "a break after {piece:?} in {code}"
            );
        }
    }
    // The id cells ask for no break inside a word; other cells may still break anywhere.
    let style = &html[html.find("<style>").unwrap()..html.find("</style>").unwrap()];
    let rule = style
        .lines()
        .find(|l| l.starts_with("td.id code"))
        .expect("a rule for the id cells");
    assert!(rule.contains("overflow-wrap: normal") && rule.contains("word-break: normal"));
}

#[test]
fn each_section_tells_the_running_rate_from_the_design_rate() {
    // Source: fixtures/demo-greenhouse read by hand: tauscan.yaml line 5 gives sensor_task a
    // 50 ms period (20 Hz), control.c:26 calls light_sample from it, and light.c derives
    // LUX_ALPHA from `#define SENSOR_DT 0.01f`, a 100 Hz design; the vent current's shift
    // names no period; on_pipe_reading (line 6) runs per event and calls heater_pipe_reading
    // at control.c:32.
    let dir = tempfile::tempdir().unwrap();
    let demo = fixture("demo-greenhouse");
    let html = report(&demo, &dir.path().join("demo.html"), &[]);
    let fast = section_of(&html, "light.c::light_sample::lux_fast");
    assert!(
        fast.contains("<dt>rate</dt><dd>runs at 20 Hz (tauscan.yaml:5: sensor_task() runs at 20 Hz, via sensor_task -&gt; light_sample, control.c:26); coefficient designed for 100 Hz (`#define SENSOR_DT 0.01f`)</dd>"),
        "{fast}"
    );
    assert!(!fast.contains("rate doubts"), "no doubt about this rate");
    let vent = section_of(&html, "vent_motor.c::vent_current_sample::vent_current_ma");
    assert!(
        vent.contains("runs at 200 Hz (tauscan.yaml:4: control_tick() runs at 200 Hz, via control_tick -&gt; vent_current_sample, control.c:21); the coefficient names no rate of its own"),
        "{vent}"
    );
    let pipe = section_of(&html, "heater.c::heater_pipe_reading::pipe_c");
    assert!(
        pipe.contains("runs per event (tauscan.yaml:6: on_pipe_reading() runs per event, via on_pipe_reading -&gt; heater_pipe_reading, control.c:32), at no fixed rate"),
        "{pipe}"
    );

    let md = report(&demo, &dir.path().join("demo.md"), &[]);
    assert!(
        md.contains("- **rate:** runs at 20 Hz (tauscan.yaml:5: sensor\\_task() runs at 20 Hz, via sensor\\_task -&gt; light\\_sample, control.c:26); coefficient designed for 100 Hz ('\\#define SENSOR\\_DT 0.01f')\n"),
        "{md}"
    );

    // Without the spec, the design rate is the one the figures use, and nothing runs.
    let alone = dir.path().join("light");
    std::fs::create_dir(&alone).unwrap();
    std::fs::copy(demo.join("light.c"), alone.join("light.c")).unwrap();
    let html = report(&alone, &dir.path().join("light.html"), &[]);
    let fast = section_of(&html, "light.c::light_sample::lux_fast");
    assert!(
        fast.contains("runs at a rate not given: no spec rate and no --rate reach it; coefficient designed for 100 Hz (`#define SENSOR_DT 0.01f`), the rate the figures use"),
        "{fast}"
    );
}

#[test]
fn rate_doubts_are_shown_in_the_section() {
    // Source: fixtures/rates/indirect read by hand (as in tests/rates.rs):
    // wash_service_menu, which no rate entry reaches, also calls wash_tank_sample.
    let dir = tempfile::tempdir().unwrap();
    let html = report(
        &fixture("rates/indirect"),
        &dir.path().join("wash.html"),
        &[],
    );
    let tank = section_of(&html, "sensors.c::wash_tank_sample::wash_tank_mm");
    let doubts = &tank[tank
        .find("<dt>rate doubts</dt><dd>")
        .expect("a doubts line")..];
    let doubts = &doubts[..doubts.find("</dd>").unwrap()];
    assert!(
        doubts.contains("partial rate") && doubts.contains("wash_service_menu"),
        "{doubts}"
    );
    let caustic = section_of(&html, "sensors.c::wash_caustic_sample::wash_caustic");
    assert!(
        !caustic.contains("rate doubts"),
        "reached only through the table"
    );
}

/// The plots' SVG documents in a page.
fn svgs(html: &str) -> Vec<&str> {
    html.split("<svg")
        .skip(1)
        .map(|rest| &rest[..rest.find("</svg>").unwrap()])
        .collect()
}

#[test]
fn a_page_of_200_smoothers_stays_under_5_mb() {
    // 200 kiln zones, each its own function with its own EMA, ten files of twenty.
    let dir = tempfile::tempdir().unwrap();
    let tree = dir.path().join("kiln");
    for file in 0..10 {
        let mut source = String::new();
        for zone in file * 20..file * 20 + 20 {
            source.push_str(&format!(
                "void kiln_zone_{zone}_sample(float u) {{ static float y; y += 0.05f * (u - y); }}\n"
            ));
        }
        common::write(&tree, &format!("zones_{file}.c"), source);
    }
    let run = common::tauscan_in(
        &tree,
        &["report", ".", "--out", "zones.html"],
        common::LIMIT,
    );
    run.assert_exit(0, "a document of 200 smoothers");
    let html = std::fs::read_to_string(tree.join("zones.html")).unwrap();
    assert_eq!(html.matches("<section class=\"smoother\"").count(), 200);
    assert_eq!(svgs(&html).len(), 400, "a step and a magnitude plot each");
    assert!(
        html.len() < 5 * 1024 * 1024,
        "the page of 200 smoothers is {} bytes",
        html.len()
    );
}

#[test]
fn the_demo_page_is_small() {
    // Measured: the demo's page was 566,424 bytes when every plot carried a dense minor grid,
    // every dash as an element and every style as attributes; 200 KiB is the bound now.
    let dir = tempfile::tempdir().unwrap();
    let html = report(
        &fixture("demo-greenhouse"),
        &dir.path().join("demo.html"),
        &[],
    );
    assert!(
        html.len() < 200 * 1024,
        "the demo page is {} bytes",
        html.len()
    );
    // The grid is a few major lines: at most seven a side, so fourteen lines a plot.
    for svg in svgs(&html) {
        let grid = svg.matches("class=\"ke1e1e1-1\"").count();
        assert!(grid <= 14, "{grid} grid lines");
        assert!(!svg.contains("opacity=\"1\""), "a default attribute left");
    }
}

#[test]
fn the_labels_of_marks_and_cutoffs_never_overlap() {
    // The demo's moving average reaches 90 and 95 % at the same update, and the cascade's
    // magnitude plot marks two cutoffs close together: their labels sit apart. Boxes are
    // estimated as the plot estimates them (`plot::text_width`).
    let dir = tempfile::tempdir().unwrap();
    let html = report(
        &fixture("demo-greenhouse"),
        &dir.path().join("demo.html"),
        &[],
    );
    let mut labels_seen = 0;
    for svg in svgs(&html) {
        let mut boxes: Vec<(f64, f64, f64, f64, String)> = Vec::new();
        for text in svg.split("<text class=\"label ").skip(1) {
            let attribute = |name: &str| -> f64 {
                text.split(&format!(" {name}=\""))
                    .nth(1)
                    .and_then(|v| v.split('"').next())
                    .and_then(|v| v.parse().ok())
                    .unwrap()
            };
            let content = &text[text.find('>').unwrap() + 1..text.find("</text>").unwrap()];
            let size = attribute("font-size");
            boxes.push((
                attribute("x"),
                attribute("y"),
                plot::text_width(content, size),
                size * 1.2,
                content.to_string(),
            ));
        }
        for (i, a) in boxes.iter().enumerate() {
            for b in &boxes[i + 1..] {
                let apart =
                    a.0 + a.2 <= b.0 || b.0 + b.2 <= a.0 || a.1 + a.3 <= b.1 || b.1 + b.3 <= a.1;
                assert!(apart, "{} and {} overlap: {a:?} {b:?}", a.4, b.4);
            }
        }
        labels_seen += boxes.len();
    }
    // Seven plotted smoothers, each with 63/90/95 %, -3 dB and a cutoff, and the cascade's
    // own cutoff: 7 * 5 + 1.
    assert_eq!(labels_seen, 36);
    let soil = section_of(&html, "soil.c::soil_sample::soil_sum");
    assert!(soil.contains(">90 %</text>") && soil.contains(">95 %</text>"));
}

#[test]
fn the_page_prints_plots_at_their_own_size_with_legible_text() {
    // Source: CSS 2 and CSS Values 4: 1 px = 0.75 pt; A4 is 210 mm wide, 182 mm (688 px)
    // between the page's 14 mm margins (from memory). At the plot's own width a user unit
    // of the SVG is one CSS pixel.
    let dir = tempfile::tempdir().unwrap();
    let html = report(
        &fixture("demo-greenhouse"),
        &dir.path().join("demo.html"),
        &[],
    );
    let style = &html[html.find("<style>").unwrap()..html.find("</style>").unwrap()];
    let print = &style[style.find("@media print {").expect("a print block")..];
    let print = &print[..print.find("\n}\n").unwrap()];
    let width_rule = print
        .lines()
        .find(|l| l.trim_start().starts_with("figure.plot svg {"))
        .expect("a printed width for the plots");
    let printed_px: f64 = width_rule
        .split("width:")
        .nth(1)
        .and_then(|w| w.trim().split("px").next())
        .and_then(|w| w.parse().ok())
        .expect("a width in px");
    assert!(printed_px <= 688.0, "the plots fit between the margins");
    assert!(print.contains("section.smoother { break-inside: avoid; }"));
    assert!(
        !print.contains("break-before: page"),
        "no page per smoother"
    );

    let mut sizes = Vec::new();
    let mut ticks = 0;
    for svg in svgs(&html) {
        let plot_width: f64 = svg
            .split("width=\"")
            .nth(1)
            .and_then(|w| w.split('"').next())
            .and_then(|w| w.parse().ok())
            .unwrap();
        let scale = printed_px / plot_width;
        for text in svg.split("<text ").skip(1) {
            let tag = &text[..text.find('>').unwrap()];
            let size: f64 = tag
                .split("font-size=\"")
                .nth(1)
                .and_then(|v| v.split('"').next())
                .and_then(|v| v.parse().ok())
                .unwrap_or_else(|| panic!("a text without its size: {tag}"));
            // Tick labels are the texts anchored at their end (y axis) or middle under the
            // axis (x axis), without a rotation; the title and axis descriptions are larger.
            if tag.contains("text-anchor=\"end\"") {
                ticks += 1;
                assert!(size >= 12.0, "a tick label of {size} units");
            }
            sizes.push(size * scale * 0.75);
        }
    }
    assert!(ticks >= 14, "only {ticks} tick labels seen");
    let smallest = sizes.iter().copied().fold(f64::INFINITY, f64::min);
    assert!(smallest >= 8.0, "plot text prints at {smallest} pt");
}

#[test]
fn the_spec_requirements_are_drawn_on_the_plots() {
    // Source: fixtures/report/kiln-settle/tauscan.yaml (95 % within 3 s and a cutoff of at
    // most 0.5 Hz for the temperature, at least 1 Hz for the door); the step of alpha 1/8 at
    // 10 Hz reaches 95 % after 23 updates (1 - (7/8)^23 = 0.954, 1 - (7/8)^22 = 0.947, hand
    // computation), 2.3 s.
    let dir = tempfile::tempdir().unwrap();
    let html = report(
        &fixture("report/kiln-settle"),
        &dir.path().join("kiln.html"),
        &[],
    );
    let temperature = section_of(&html, "kiln.c::kiln_tick::kiln_temp_dc");
    assert!(
        temperature.contains("required: 95 % within 3 s"),
        "the settle line"
    );
    assert!(temperature.contains("95 % after 2.3 s (23 samples)"));
    assert!(temperature.contains("required cutoff band"));
    assert!(temperature.contains("truncation can leave the output short"));
    let door = section_of(&html, "kiln.c::kiln_tick::kiln_door_mm");
    assert!(door.contains("required cutoff band"));
    assert!(
        !door.contains("required: "),
        "no settling requirement for the door"
    );
}

#[test]
fn the_page_is_self_contained() {
    // Source: the HTML standard's ways of loading something (script, link, src, url(),
    // @import), from memory; the only URL left is the SVG namespace, which is a name, not a
    // fetch.
    let dir = tempfile::tempdir().unwrap();
    let html = report(
        &fixture("demo-greenhouse"),
        &dir.path().join("demo.html"),
        &[],
    );
    let lower = html.to_ascii_lowercase();
    for forbidden in [
        "<script", "<link", " src=", "url(", "@import", "<iframe", "<object",
    ] {
        assert!(!lower.contains(forbidden), "the page holds {forbidden}");
    }
    let urls = lower.matches("http://").count() + lower.matches("https://").count();
    let namespaces = lower
        .matches("xmlns=\"http://www.w3.org/2000/svg\"")
        .count();
    assert_eq!(urls, namespaces, "every URL is the SVG namespace");
    assert!(
        namespaces >= 14,
        "the demo has seven smoothers with two plots each"
    );
    assert!(html.contains("Content-Security-Policy\" content=\"default-src 'none'"));
}

#[test]
fn plots_without_a_rate_stay_in_samples_and_fractions_of_fs() {
    // Source: DESIGN.md, a figure in Hz or seconds exists only when a rate is known.
    let dir = tempfile::tempdir().unwrap();
    let work = dir.path().join("yaw");
    std::fs::create_dir(&work).unwrap();
    std::fs::copy(fixture("forms").join("cascade.c"), work.join("cascade.c")).unwrap();
    let html = report(&work, &dir.path().join("yaw.html"), &[]);
    assert!(html.contains("updates after the step (samples)"));
    assert!(html.contains("frequency (fraction of fs), up to Nyquist"));
    assert!(!html.contains("frequency (Hz)"));
    assert!(html.contains("whole cascade (2 stages)"));
    assert!(html.contains("none found: only the rules that need no requirement ran"));
}

/// A scanned folder whose file name, comments, macro and spec path hold markup, `&`, quotes,
/// control characters and a bidirectional override.
fn hostile_tree(dir: &Path) -> (PathBuf, PathBuf) {
    let root = dir.join("hatch");
    std::fs::create_dir(&root).unwrap();
    // The comments sit within the lines shown around the update; the coefficient's macro
    // holds `<`, `>` and `&&` in its own text, which the derivation shows.
    let source = [
        "#define HATCH_GAIN ((1 < 2 && 3 > 2) ? 0.125f : 0.5f)",
        "static float hatch_pos;",
        "void hatch_tick(float u)",
        "{",
        "    /* Roof hatch <script>alert(\"hatch & 'vent'\")</script> of the potting shed. */",
        "    /* escape \x1b[31m red, bell \x07, override \u{202e}txet */",
        "    hatch_pos += HATCH_GAIN * (u - hatch_pos); /* <script>note()</script> && a < b */",
        "}",
        "",
    ]
    .join("\n");
    std::fs::write(root.join("hatch<script>&'q\".c"), source).unwrap();
    let spec = dir.join("spec<script>&.yaml");
    std::fs::write(
        &spec,
        "rates:\n  - { function: hatch_tick, rate: \"50 Hz\" }\n",
    )
    .unwrap();
    (root, spec)
}

/// Every `&` in `text` starts one of the character references the renderer writes.
fn ampersands_are_references(text: &str) -> bool {
    text.match_indices('&').all(|(i, _)| {
        let rest = &text[i..];
        ["&amp;", "&lt;", "&gt;", "&quot;", "&#39;"]
            .iter()
            .any(|r| rest.starts_with(r))
    })
}

#[test]
fn hostile_text_is_shown_as_text_in_html() {
    // Source: the HTML standard's syntax: `<` opens a tag and `&` a character reference in
    // text, `"` and `'` close attribute values (from memory); Unicode UAX #9 for the
    // bidirectional override; C0 controls are not allowed as text (HTML standard).
    let dir = tempfile::tempdir().unwrap();
    let (root, spec) = hostile_tree(dir.path());
    let spec_arg = spec.to_str().unwrap();
    let html = report(&root, &dir.path().join("hatch.html"), &["--spec", spec_arg]);
    assert!(
        !html.to_ascii_lowercase().contains("<script"),
        "a raw <script> reached the page"
    );
    assert!(ampersands_are_references(&html), "a raw & reached the page");
    // The comments beside the update, the macro in the derivation, the file name in the id
    // and the spec's path each arrive escaped.
    assert!(
        html.contains("&lt;script&gt;alert(&quot;hatch &amp; &#39;vent&#39;&quot;)&lt;/script&gt;")
    );
    assert!(html.contains("&lt;script&gt;note()&lt;/script&gt; &amp;&amp; a &lt; b"));
    assert!(html.contains("hatch&lt;script&gt;&amp;&#39;q&quot;.c::hatch_tick::hatch_pos"));
    assert!(html.contains("spec&lt;script&gt;&amp;.yaml"));
    assert!(html.contains("#define HATCH_GAIN ((1 &lt; 2 &amp;&amp; 3 &gt; 2) ? 0.125f : 0.5f)"));
    // Control and bidirectional characters are shown, not passed on.
    assert!(html.contains("escape \\u{1b}[31m red, bell \\u{7}, override \\u{202e}txet"));
    assert!(!html.contains('\u{202e}'));
    assert!(!html
        .chars()
        .any(|c| c.is_control() && c != '\n' && c != '\t'));
    // And it is still the document of a real smoother at the spec's rate.
    assert!(html.contains("50 Hz (spec)"));
    assert_eq!(html.matches("<figure class=\"plot step\">").count(), 1);
}

#[test]
fn hostile_text_is_shown_as_text_in_markdown() {
    // Source: CommonMark 0.31, raw HTML is passed through outside code spans and blocks,
    // and fenced code blocks show their content literally (from memory).
    let dir = tempfile::tempdir().unwrap();
    let (root, spec) = hostile_tree(dir.path());
    let spec_arg = spec.to_str().unwrap();
    let md = report(&root, &dir.path().join("hatch.md"), &["--spec", spec_arg]);
    let mut in_fence = false;
    for line in md.lines() {
        if line.starts_with("```") {
            in_fence = !in_fence;
            continue;
        }
        if !in_fence {
            // A `>` may only open a block quote; nothing may open a tag.
            let body = line.strip_prefix("> ").unwrap_or(line);
            assert!(
                !body.contains('<') && !body.contains('>'),
                "raw markup outside a code block: {line}"
            );
        }
    }
    assert!(!in_fence, "every fence is closed");
    assert!(md.contains("hatch&lt;script&gt;&amp;'q\".c"));
    assert!(md.contains("\\u{1b}[31m"));
    assert!(!md.chars().any(|c| c.is_control() && c != '\n' && c != '\t'));
    assert!(!md.contains('\u{202e}'));
}

#[test]
fn the_markdown_document_is_well_formed() {
    // Source: GitHub Flavored Markdown tables: every row has the header's number of cells,
    // and an unescaped `|` would start a new one (from memory).
    let dir = tempfile::tempdir().unwrap();
    let demo = fixture("demo-greenhouse");
    let md = report(&demo, &dir.path().join("demo.md"), &[]);
    let doc = inventory(&demo);
    let smoothers = doc["smoothers"].as_array().unwrap();
    let cells = |line: &str| line.replace("\\|", "").matches('|').count();
    let mut header_cells = None;
    for line in md.lines() {
        if line.starts_with('|') {
            let n = cells(line);
            match header_cells {
                None => header_cells = Some(n),
                Some(h) => assert_eq!(n, h, "a table row with a different width: {line}"),
            }
        } else {
            header_cells = None;
        }
    }
    let headings = md.lines().filter(|l| l.starts_with("## ")).count();
    assert_eq!(
        headings,
        smoothers.len() + 1,
        "the summary and one per smoother"
    );
    assert!(
        md.contains("| 63.2 % | 80 ms (16 samples) |"),
        "the vent current's step"
    );
    assert!(md.contains("2023-11-14 22:13 UTC"));
    assert!(md
        .contains("> **Caution.** This document is an aid to review, not a safety certification."));
}

#[test]
fn the_document_kind_comes_from_the_file_name() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("report.pdf");
    let run = tauscan(&[
        "report".as_ref(),
        fixture("demo-greenhouse").as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
    ]);
    assert_eq!(run.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&run.stderr).contains("FILE.html"));
    assert!(!out.exists());
}

// ---------------------------------------------------------------------------------------------
// Headless Chromium.
// ---------------------------------------------------------------------------------------------

/// The browser to render with: `TAUSCAN_TEST_CHROMIUM`, else `/usr/bin/chromium`, else
/// `chromium` on the PATH.
fn find_chromium() -> Option<PathBuf> {
    if let Some(named) = std::env::var_os("TAUSCAN_TEST_CHROMIUM") {
        return Some(PathBuf::from(named));
    }
    let usual = PathBuf::from("/usr/bin/chromium");
    if usual.is_file() {
        return Some(usual);
    }
    std::env::var_os("PATH").and_then(|paths| {
        std::env::split_paths(&paths)
            .map(|p| p.join("chromium"))
            .find(|p| p.is_file())
    })
}

/// Runs Chromium headless, without sandbox, network chatter or a shared profile, on `page`,
/// with `mode` (`--screenshot=…` or `--dump-dom`); killed after two minutes.
fn chromium(browser: &Path, page: &Path, mode: &str, profile: &Path) -> (String, String) {
    let mut child = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--no-first-run",
            "--enable-logging=stderr",
            "--v=0",
            "--window-size=1280,4000",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .arg(mode)
        .arg(format!("file://{}", page.display()))
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Read both pipes on threads so a chatty browser cannot block on a full pipe.
    let mut out_pipe = child.stdout.take().unwrap();
    let mut err_pipe = child.stderr.take().unwrap();
    let out = std::thread::spawn(move || {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut out_pipe, &mut s).ok();
        s
    });
    let err = std::thread::spawn(move || {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut err_pipe, &mut s).ok();
        s
    });
    let started = Instant::now();
    loop {
        if child.try_wait().unwrap().is_some() {
            break;
        }
        if started.elapsed() > Duration::from_secs(120) {
            child.kill().ok();
            child.wait().ok();
            panic!("chromium did not finish within two minutes ({mode})");
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    (out.join().unwrap(), err.join().unwrap())
}

/// Console messages and uncaught errors in Chromium's log (its own D-Bus and GPU complaints
/// in a container are not the page's).
fn console_lines(log: &str) -> Vec<&str> {
    log.lines()
        .filter(|l| l.contains(":CONSOLE") || l.contains("Uncaught"))
        .collect()
}

#[test]
#[cfg_attr(
    tauscan_no_chromium,
    ignore = "no Chromium found: install the Debian package `chromium` or set TAUSCAN_TEST_CHROMIUM"
)]
fn the_demo_page_renders_in_headless_chromium() {
    let Some(browser) = find_chromium() else {
        let in_ci = matches!(std::env::var("CI").as_deref(), Ok("true") | Ok("1"));
        assert!(
            !in_ci,
            "CI=true but no Chromium found: install the Debian package `chromium` (or set TAUSCAN_TEST_CHROMIUM)"
        );
        // Reached when the test is run with `--ignored`, or when the browser the build saw
        // has gone since. Written straight to stderr so it shows even though the test passes.
        writeln!(
            std::io::stderr(),
            "SKIPPED the_demo_page_renders_in_headless_chromium: no Chromium found (install the Debian package `chromium`, or set TAUSCAN_TEST_CHROMIUM)"
        )
        .ok();
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let demo = fixture("demo-greenhouse");
    let page = dir.path().join("demo.html");
    report(&demo, &page, &[]);

    // The log check must be able to fail with this browser: a page with a console error and
    // an uncaught exception shows up in it.
    let faulty = dir.path().join("faulty.html");
    std::fs::write(
        &faulty,
        "<!DOCTYPE html><title>x</title><script>console.error('seen'); missing_function();</script>",
    )
    .unwrap();
    let (_, faulty_log) = chromium(
        &browser,
        &faulty,
        &format!("--screenshot={}", dir.path().join("faulty.png").display()),
        &dir.path().join("profile-faulty"),
    );
    assert!(
        console_lines(&faulty_log).len() >= 2,
        "Chromium's log does not show console errors, so their absence would prove nothing:\n{faulty_log}"
    );

    // Screenshot: not blank, and the plots' curves are drawn.
    let shot = dir.path().join("demo.png");
    let (_, log) = chromium(
        &browser,
        &page,
        &format!("--screenshot={}", shot.display()),
        &dir.path().join("profile-shot"),
    );
    assert!(shot.is_file(), "no screenshot written:\n{log}");
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(&shot).unwrap()));
    let mut reader = decoder.read_info().unwrap();
    let mut pixels = vec![0; reader.output_buffer_size()];
    let frame = reader.next_frame(&mut pixels).unwrap();
    let channels = frame.color_type.samples();
    assert!(channels >= 3, "colour screenshot expected");
    let pixels = &pixels[..frame.buffer_size()];
    let (mut ink, mut curve) = (0usize, 0usize);
    for px in pixels.chunks(channels) {
        let (r, g, b) = (px[0] as i32, px[1] as i32, px[2] as i32);
        if r < 240 || g < 240 || b < 240 {
            ink += 1;
        }
        // The colour of a smoother's own curve (31, 90, 160), give or take anti-aliasing.
        if (r - 31).abs() < 24 && (g - 90).abs() < 24 && (b - 160).abs() < 24 {
            curve += 1;
        }
    }
    let total = (frame.width * frame.height) as usize;
    assert!(
        total >= 1280 * 4000 / 2,
        "a {}x{} screenshot",
        frame.width,
        frame.height
    );
    assert!(
        ink * 50 > total,
        "the page is nearly blank: {ink} of {total} pixels inked"
    );
    // The first 4000 px hold the first smoother's two plots: two curves about 500 px long
    // and 2 px wide, some 1 800 pixels in their colour; none when they are not drawn.
    assert!(
        curve > 1_000,
        "the curves are not drawn: {curve} pixels in their colour"
    );
    let console = console_lines(&log);
    assert!(console.is_empty(), "console messages: {console:#?}");

    // The DOM as rendered: one step and one magnitude plot (an SVG each) per smoother that
    // has figures, a reason for the others.
    let (dom, log) = chromium(
        &browser,
        &page,
        "--dump-dom",
        &dir.path().join("profile-dom"),
    );
    let console = console_lines(&log);
    assert!(console.is_empty(), "console messages: {console:#?}");
    let doc = inventory(&demo);
    let smoothers = doc["smoothers"].as_array().unwrap();
    let sections: Vec<&str> = dom.split("<section class=\"smoother\"").skip(1).collect();
    assert_eq!(sections.len(), smoothers.len(), "one section per smoother");
    let mut plotted = 0;
    for section in &sections {
        let section = &section[..section.find("</section>").unwrap_or(section.len())];
        let steps = section.matches("<figure class=\"plot step\">").count();
        let magnitudes = section.matches("<figure class=\"plot magnitude\">").count();
        let svgs = section.matches("<svg").count();
        if steps == 0 {
            assert_eq!(magnitudes, 0);
            assert!(
                section.contains("no plot:"),
                "a section without plots says why"
            );
        } else {
            assert_eq!((steps, magnitudes, svgs), (1, 1, 2), "{}", &section[..200]);
            plotted += 1;
        }
    }
    let with_figures = smoothers
        .iter()
        .filter(|s| !s["cutoff_below_nyquist"].is_null())
        .count();
    assert_eq!(plotted, with_figures);
    assert!(plotted >= 7, "the demo has seven smoothers with figures");
}

#[test]
fn a_document_of_the_current_folder_is_titled_with_its_name() {
    let dir = tempfile::tempdir().unwrap();
    let tree = dir.path().join("kiln-controller");
    common::write(&tree, "zone.c", common::GOOD_SMOOTHER);
    let run = common::tauscan_in(&tree, &["report", ".", "--out", "doc.md"], common::LIMIT);
    run.assert_exit(0, "a document of a clean tree");
    let text = std::fs::read_to_string(tree.join("doc.md")).unwrap();
    assert!(
        text.starts_with("# Smoothers of kiln-controller\n"),
        "{}",
        text.lines().next().unwrap_or("")
    );
}

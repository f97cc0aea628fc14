//! The smoother document as one self-contained HTML page (`tauscan report --out FILE.html`).
//!
//! The page needs nothing outside itself: the styles are one inline `<style>` block, the
//! plots are inline SVG drawn by `plot`, there is no script at all, and a Content Security
//! Policy (`default-src 'none'`) tells the browser to fetch nothing and run nothing, whatever
//! the scanned files contain. Every piece of text that comes from the scanned files, the spec
//! or the command line goes through [`escape`], which leaves no markup and shows control and
//! bidirectional-override characters as visible `\u{..}` escapes. The summary table is ordered
//! by file and line (no sorting script). What the page says is decided by `document`; this
//! module only lays it out.

use crate::report::document::{
    requirement_lines, settle_marks, Document, Entry, FindingLine, Verdict, CAUTION,
};
use crate::report::plot::{self, Curve, PlotInput};
use crate::spec::Severity;

/// Whether a character reorders the text around it when displayed (a bidirectional embedding,
/// override, isolate or mark), which could make source text read differently from what it is.
fn is_bidi_control(c: char) -> bool {
    matches!(
        c,
        '\u{061c}' | '\u{200e}' | '\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}'
    )
}

/// Text made safe for HTML element content and quoted attribute values: `& < > " '` become
/// character references, and control characters (but tab) and bidirectional controls are
/// shown as `\u{..}` so that a reader sees they are there.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 8);
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            '\t' => out.push('\t'),
            c if c.is_control() || is_bidi_control(c) => {
                out.push_str(&format!("\\u{{{:x}}}", c as u32));
            }
            c => out.push(c),
        }
    }
    out
}

/// [`escape`]d text with a line-break opportunity (`<wbr>`) after each separator of an id or
/// a path: `::`, `->`, `/`, `.` and `_`. With `overflow-wrap: normal` on its cell, a long id
/// such as `climate.c::climate_step::air_temp_c.y` then wraps between its parts, never
/// inside a word.
pub fn breakable(text: &str) -> String {
    let mut out = String::with_capacity(text.len() * 2);
    let mut previous = None;
    for c in text.chars() {
        let mut buffer = [0u8; 4];
        out.push_str(&escape(c.encode_utf8(&mut buffer)));
        let ends_separator = match c {
            '/' | '.' | '_' => true,
            ':' => previous == Some(':'),
            '>' => previous == Some('-'),
            _ => false,
        };
        if ends_separator {
            out.push_str("<wbr>");
            // A third colon starts a new pair rather than ending this one.
            previous = None;
        } else {
            previous = Some(c);
        }
    }
    out
}

const STYLE: &str = r#"
:root { --ink: #1d2327; --muted: #5f6b73; --rule: #d5dadd; --pass: #1e7a3c; --error: #b3261e;
        --warning: #9a6200; --note: #2b5d9b; --hit: #fff3c4; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, Helvetica, Arial, sans-serif;
       color: var(--ink); margin: 0 auto; max-width: 1280px; padding: 1.5rem; line-height: 1.4;
       background: #fff; }
h1 { font-size: 1.6rem; margin: 0 0 .5rem; }
h2 { font-size: 1.25rem; margin: 2rem 0 .5rem; border-bottom: 1px solid var(--rule); }
h2 code, h3 code { font-size: inherit; }
h3 { font-size: 1rem; margin: 1rem 0 .3rem; }
code, pre, .mono { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace;
                   font-size: .85rem; }
dl.header, dl.figures { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1rem;
                        margin: .5rem 0; }
dl dt { color: var(--muted); }
dl dd { margin: 0; overflow-wrap: anywhere; }
table { border-collapse: collapse; width: 100%; font-size: .85rem; margin: .5rem 0 1rem; }
caption { text-align: left; color: var(--muted); padding: .2rem 0; }
th, td { border: 1px solid var(--rule); padding: .25rem .4rem; text-align: left;
         vertical-align: top; overflow-wrap: break-word; }
td code { overflow-wrap: anywhere; }
td.id code { overflow-wrap: normal; word-break: normal; }
th { background: #f3f5f6; }
td .source { color: var(--muted); font-size: .8rem; }
td.num { white-space: nowrap; }
.verdict-pass { color: var(--pass); font-weight: 600; }
.verdict-error { color: var(--error); font-weight: 600; }
.verdict-warning { color: var(--warning); font-weight: 600; }
.verdict-note { color: var(--note); font-weight: 600; }
.verdict-neutral { font-weight: 600; }
.banner { border: 2px solid var(--error); padding: .5rem .8rem; color: var(--error); }
pre.source { background: #f7f8f9; border: 1px solid var(--rule); padding: .4rem 0;
             overflow-x: auto; margin: .3rem 0 .8rem; tab-size: 4; }
pre.source span.line { display: block; padding: 0 .6rem; white-space: pre; }
pre.source span.hit { background: var(--hit); }
pre.source span.ln { color: var(--muted); display: inline-block; min-width: 3.5em;
                     user-select: none; }
ul.findings li { margin-bottom: .3rem; }
ol.chain { padding-left: 1.5rem; }
.plots { display: flex; flex-wrap: wrap; gap: 1rem; }
figure.plot { margin: 0; border: 1px solid var(--rule); padding: .3rem; max-width: 100%; }
figure.plot svg { display: block; max-width: 100%; height: auto; }
figure.plot figcaption { font-size: .8rem; color: var(--muted); max-width: 580px; }
p.no-plot { color: var(--muted); font-style: italic; }
footer { margin-top: 2.5rem; border-top: 1px solid var(--rule); padding-top: .8rem;
         font-size: .85rem; }
footer p.caution { border-left: 4px solid var(--warning); padding-left: .6rem; }
@page { size: A4; margin: 14mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  section.smoother { break-inside: avoid; }
  h2, h3 { break-after: avoid; }
  figure.plot, pre.source, tr, dl.figures { break-inside: avoid; }
  pre.source span.line { white-space: pre-wrap; }
  .plots { display: block; }
  figure.plot { margin: 0 0 3mm; width: fit-content; }
  /* Plots print at their own width, 580 px of the 688 an A4 page holds between its margins,
     so a user unit is a CSS pixel and the smallest plot text (11 units) is 8.25 pt. */
  figure.plot svg { width: 580px; max-width: none; height: auto; }
  a { color: inherit; text-decoration: none; }
}
"#;

fn severity_class(severity: Severity) -> &'static str {
    match severity {
        Severity::Error => "verdict-error",
        Severity::Warning => "verdict-warning",
        Severity::Note => "verdict-note",
    }
}

fn verdict_html(v: &Verdict) -> String {
    let class = match v {
        Verdict::Pass { .. } => "verdict-pass",
        Verdict::Fired { worst, .. } => severity_class(*worst),
        Verdict::Instances { .. } | Verdict::NoRequirement | Verdict::NotEvaluated => {
            "verdict-neutral"
        }
    };
    format!("<span class=\"{class}\">{}</span>", escape(&v.text()))
}

fn finding_html(f: &FindingLine) -> String {
    let mut out = format!(
        "<li><span class=\"{}\">{}</span> <code>{}</code>",
        severity_class(f.severity),
        f.severity.name(),
        escape(f.rule)
    );
    if !f.place.is_empty() {
        out.push_str(&format!(" at <code>{}</code>", escape(&f.place)));
    }
    out.push_str(&format!(": {}", escape(&f.message)));
    for line in f.details() {
        out.push_str(&format!("<br>{}", escape(&line)));
    }
    out.push_str("</li>\n");
    out
}

fn header_html(doc: &Document, out: &mut String) {
    let h = &doc.header;
    out.push_str("<header>\n");
    out.push_str(&format!("<h1>Smoothers of {}</h1>\n", escape(&h.root)));
    out.push_str("<dl class=\"header\">\n");
    let mut item = |name: &str, value: String| {
        out.push_str(&format!("<dt>{name}</dt><dd>{value}</dd>\n"));
    };
    item("scan root", format!("<code>{}</code>", escape(&h.root)));
    item(
        "revision",
        match &h.revision {
            Some(r) => format!("<code>{}</code>", escape(r)),
            None => "not in a git repository".into(),
        },
    );
    item(
        "spec",
        match &h.spec {
            Some(s) => format!("<code>{}</code>", escape(s)),
            None => "none found: only the rules that need no requirement ran".into(),
        },
    );
    item("date", escape(&h.date_utc));
    item("tool", format!("tauscan {}", escape(&h.version)));
    let (errors, warnings, notes) = doc.counts();
    item(
        "findings",
        format!(
            "{errors} error(s), {warnings} warning(s), {notes} note(s) over {} smoother(s) in {} file(s)",
            doc.entries.len(),
            doc.files
        ),
    );
    out.push_str("</dl>\n");
    if doc.incomplete {
        out.push_str("<p class=\"banner\">The scan is incomplete: a path does not exist or a file could not be read (see the notes at the end). Smoothers may be missing from this document.</p>\n");
    }
    out.push_str("</header>\n");
}

fn summary_html(doc: &Document, out: &mut String) {
    out.push_str("<section id=\"summary\">\n<h2>Summary</h2>\n");
    if doc.entries.is_empty() {
        out.push_str("<p>No smoother was found.</p>\n");
    } else {
        out.push_str("<table class=\"summary\">\n<caption>Every smoother, ordered by file and line. Figures are at the rate each update really runs; without a known rate they stay in samples and fractions of the update rate fs.</caption>\n<thead><tr>");
        for column in [
            "smoother",
            "location",
            "form, arithmetic",
            "coefficient",
            "rate and its source",
            "cutoff",
            "lag",
            "settle time",
            "noise reduction",
            "dead band",
            "verdict",
        ] {
            out.push_str(&format!("<th scope=\"col\">{column}</th>"));
        }
        out.push_str("</tr></thead>\n<tbody>\n");
        for e in &doc.entries {
            out.push_str(&format!(
                "<tr><td class=\"id\"><a href=\"#{}\"><code>{}</code></a></td><td class=\"id\"><code>{}:{}</code></td><td>{}, {}</td><td>{}</td><td><span class=\"rate\">{}</span><br><span class=\"source\">{}</span></td><td class=\"num\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                e.anchor,
                breakable(&e.id),
                breakable(&e.file),
                e.line,
                e.form,
                e.arithmetic,
                escape(&e.coefficient),
                escape(&e.rate_text),
                escape(e.rate_source.as_deref().unwrap_or("no source found")),
                escape(&e.cutoff_text),
                escape(&e.lag_text),
                escape(&e.settle_text),
                escape(&e.noise_text),
                escape(&e.dead_band_text),
                verdict_html(&e.verdict),
            ));
        }
        out.push_str("</tbody>\n</table>\n");
    }
    let cascades: Vec<&Entry> = doc.entries.iter().filter(|e| e.cascade.is_some()).collect();
    if !cascades.is_empty() {
        out.push_str("<h3>Cascades</h3>\n<table class=\"cascades\">\n<thead><tr><th scope=\"col\">stages, first to last</th><th scope=\"col\">combined cutoff</th><th scope=\"col\">combined lag</th><th scope=\"col\">combined noise reduction</th></tr></thead>\n<tbody>\n");
        for e in cascades {
            if let Some(c) = &e.cascade {
                let stages: Vec<String> = c
                    .stage_ids
                    .iter()
                    .map(|id| format!("<code>{}</code>", breakable(id)))
                    .collect();
                out.push_str(&format!(
                    "<tr><td class=\"id\"><a href=\"#{}\">{}</a></td><td class=\"num\">{}</td><td>{}</td><td>{}</td></tr>\n",
                    e.anchor,
                    stages.join(" → "),
                    escape(&cascade_cutoff_text(c)),
                    escape(&cascade_lag_text(c)),
                    escape(&crate::report::document::noise_text(c.figures.noise_ratio)),
                ));
            }
        }
        out.push_str("</tbody>\n</table>\n");
    }
    if !doc.spec_findings.is_empty() {
        out.push_str("<h3>Findings about the spec</h3>\n<ul class=\"findings\">\n");
        for f in &doc.spec_findings {
            out.push_str(&finding_html(f));
        }
        out.push_str("</ul>\n");
    }
    out.push_str("</section>\n");
}

/// The cutoff of a cascade in words.
pub fn cascade_cutoff_text(c: &crate::report::document::CascadeEntry) -> String {
    use crate::report::table::{hertz, sig3};
    match (c.figures.cutoff, c.rate) {
        (Some(w), Some(r)) => hertz(w.to_hertz(r).0),
        (Some(w), None) => format!("{} fs", sig3(w.0 / std::f64::consts::TAU)),
        (None, _) => "none below Nyquist".into(),
    }
}

/// The lag of a cascade in words.
pub fn cascade_lag_text(c: &crate::report::document::CascadeEntry) -> String {
    use crate::report::document::samples;
    use crate::report::table::seconds;
    match c.figures.lag_seconds {
        Some(s) => format!("{} ({})", seconds(s.0), samples(c.figures.lag.0)),
        None => samples(c.figures.lag.0),
    }
}

fn plots_html(e: &Entry, out: &mut String) {
    let (Some(stage), Some(figures)) = (e.stage, e.figures.as_ref()) else {
        let reason = e
            .no_plot_reason
            .clone()
            .unwrap_or_else(|| "no plot: the figures are not known".into());
        out.push_str(&format!("<p class=\"no-plot\">{}</p>\n", escape(&reason)));
        return;
    };
    let own = [stage];
    let mut curves = vec![Curve {
        stages: &own,
        figures,
        label: if e.cascade.is_some() {
            "this stage alone".into()
        } else {
            "this smoother".into()
        },
    }];
    if let Some(c) = &e.cascade {
        curves.push(Curve {
            stages: &c.stages,
            figures: &c.figures,
            label: format!("whole cascade ({} stages)", c.stages.len()),
        });
    }
    let input = PlotInput {
        curves,
        rate: e.rate,
        settle: e.requirements.settle,
        cutoff_band: (e.requirements.cutoff_min, e.requirements.cutoff_max),
    };
    let marks: Vec<String> = settle_marks(figures)
        .into_iter()
        .map(|(label, value)| format!("{label} after {value}"))
        .collect();
    let mut step_caption = format!("Step response from rest. {}.", marks.join("; "));
    if let Some(c) = &e.cascade {
        let whole: Vec<String> = settle_marks(&c.figures)
            .into_iter()
            .map(|(label, value)| format!("{label} after {value}"))
            .collect();
        step_caption.push_str(&format!(" Whole cascade: {}.", whole.join("; ")));
    }
    if let (Some((q, within)), Some(_)) = (e.requirements.settle, e.rate) {
        step_caption.push_str(&format!(
            " Required: {} % within {}.",
            crate::report::table::sig3(q * 100.0),
            crate::report::table::seconds(within.0)
        ));
    }
    if e.dead_band_text != "-" {
        step_caption.push_str(" Drawn for the filter the arithmetic intends; truncation can leave the output short of it by the dead band.");
    }
    if e.requirements.settle.is_some() && e.rate.is_none() {
        step_caption.push_str(
            " The spec's settling requirement is in seconds and cannot be placed without a rate.",
        );
    }
    let mut magnitude_caption = format!(
        "Magnitude response on a logarithmic frequency axis up to Nyquist; cutoff {}.",
        e.cutoff_text
    );
    let has_band = e.requirements.cutoff_min.is_some() || e.requirements.cutoff_max.is_some();
    if has_band && e.rate.is_none() {
        magnitude_caption
            .push_str(" The spec's cutoff band is in hertz and cannot be placed without a rate.");
    }
    if let Some(c) = &e.cascade {
        magnitude_caption.push_str(&format!(
            " The whole cascade cuts at {}.",
            cascade_cutoff_text(c)
        ));
    }
    out.push_str("<div class=\"plots\">\n");
    for (class, drawn, caption) in [
        ("step", plot::step_svg(&input), step_caption),
        ("magnitude", plot::magnitude_svg(&input), magnitude_caption),
    ] {
        match drawn {
            Ok(svg) => out.push_str(&format!(
                "<figure class=\"plot {class}\">\n{svg}\n<figcaption>{}</figcaption>\n</figure>\n",
                escape(&caption)
            )),
            Err(why) => out.push_str(&format!("<p class=\"no-plot\">{}</p>\n", escape(&why))),
        }
    }
    out.push_str("</div>\n");
}

fn entry_html(e: &Entry, out: &mut String) {
    out.push_str(&format!(
        "<section class=\"smoother\" id=\"{}\">\n<h2><code>{}</code></h2>\n",
        e.anchor,
        escape(&e.id)
    ));
    out.push_str("<dl class=\"figures\">\n");
    let mut item = |name: &str, value: String| {
        out.push_str(&format!("<dt>{name}</dt><dd>{value}</dd>\n"));
    };
    item(
        "where",
        format!(
            "<code>{}:{}:{}</code>, in <code>{}</code>",
            escape(&e.file),
            e.line,
            e.column,
            escape(&e.function)
        ),
    );
    item(
        "state",
        format!("<code>{}</code> ({})", escape(&e.state), e.storage),
    );
    item("form", format!("{}, {} arithmetic", e.form, e.arithmetic));
    item(
        "update as read",
        format!("<code>{}</code>", escape(&e.update)),
    );
    item("coefficient", escape(&e.coefficient));
    item("rate", escape(&e.rate_story));
    if !e.rate_doubts.is_empty() {
        item("rate doubts", escape(&e.rate_doubts.join("; ")));
    }
    item("cutoff", escape(&e.cutoff_text));
    item("lag behind a ramp", escape(&e.lag_text));
    if let Some(f) = &e.figures {
        let marks: Vec<String> = settle_marks(f)
            .into_iter()
            .map(|(label, value)| format!("{label}: {value}"))
            .collect();
        item("step response", escape(&marks.join("; ")));
    }
    item("noise reduction", escape(&e.noise_text));
    item("dead band", escape(&e.dead_band_text));
    if let Some(g) = e.dc_gain.filter(|g| (g - 1.0).abs() > 1e-9) {
        item("DC gain", escape(&crate::report::table::sig3(g)));
    }
    if let Some(c) = &e.cascade {
        let stages: Vec<String> = c
            .stage_ids
            .iter()
            .map(|id| format!("<code>{}</code>", escape(id)))
            .collect();
        item(
            "cascade",
            format!(
                "last of {} stages ({}); combined cutoff {}, lag {}, noise reduction {}",
                c.stages.len(),
                stages.join(" → "),
                escape(&cascade_cutoff_text(c)),
                escape(&cascade_lag_text(c)),
                escape(&crate::report::document::noise_text(c.figures.noise_ratio))
            ),
        );
    }
    let requirements = requirement_lines(&e.requirements);
    item(
        "requirements",
        if requirements.is_empty() {
            "none in the spec".into()
        } else {
            escape(&requirements.join("; "))
        },
    );
    item("verdict", verdict_html(&e.verdict));
    out.push_str("</dl>\n");

    if !e.findings.is_empty() {
        out.push_str("<h3>Findings</h3>\n<ul class=\"findings\">\n");
        for f in &e.findings {
            out.push_str(&finding_html(f));
        }
        out.push_str("</ul>\n");
    }

    for x in &e.excerpts {
        out.push_str(&format!(
            "<h3>Source: {} in <code>{}</code></h3>\n<pre class=\"source\"><code>",
            x.title,
            escape(&x.file)
        ));
        for (number, text, hit) in &x.lines {
            out.push_str(&format!(
                "<span class=\"line{}\"><span class=\"ln\">{number}</span>{}</span>",
                if *hit { " hit" } else { "" },
                escape(text)
            ));
        }
        out.push_str("</code></pre>\n");
    }

    out.push_str("<h3>Derivation of the coefficient</h3>\n");
    if e.chain.is_empty() {
        out.push_str("<p>The coefficient is written in the update itself.</p>\n");
    } else {
        out.push_str("<ol class=\"chain\">\n");
        for c in &e.chain {
            out.push_str(&format!(
                "<li><code>{}:{}</code> <code>{}</code>{}</li>\n",
                escape(&c.file),
                c.line,
                escape(&c.text),
                c.value
                    .as_ref()
                    .map(|v| format!(" gives <code>{}</code>", escape(v)))
                    .unwrap_or_default()
            ));
        }
        out.push_str("</ol>\n");
    }
    if !e.variants.is_empty() {
        out.push_str("<h3>Under other preprocessor branches</h3>\n<ul>\n");
        for v in &e.variants {
            out.push_str(&format!("<li>{}</li>\n", escape(v)));
        }
        out.push_str("</ul>\n");
    }

    out.push_str("<h3>Plots</h3>\n");
    plots_html(e, out);
    out.push_str("</section>\n");
}

/// The whole document as one HTML page.
pub fn render(doc: &Document) -> String {
    let mut out = String::with_capacity(64 * 1024);
    out.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    out.push_str("<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'\">\n");
    out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    out.push_str(&format!(
        "<title>Smoothers of {}</title>\n<style>{STYLE}{}</style>\n</head>\n<body>\n",
        escape(&doc.header.root),
        plot::css()
    ));
    header_html(doc, &mut out);
    out.push_str("<main>\n");
    summary_html(doc, &mut out);
    for e in &doc.entries {
        entry_html(e, &mut out);
    }
    if !doc.notes.is_empty() {
        out.push_str("<section id=\"notes\">\n<h2>Notes from the scan</h2>\n<ul>\n");
        for n in &doc.notes {
            out.push_str(&format!("<li><code>{}</code></li>\n", escape(n)));
        }
        out.push_str("</ul>\n</section>\n");
    }
    out.push_str("</main>\n<footer>\n");
    out.push_str(&format!(
        "<p class=\"caution\"><strong>Caution.</strong> {CAUTION}</p>\n"
    ));
    out.push_str(&format!(
        "<p>Made by tauscan {} on {}.</p>\n",
        escape(&doc.header.version),
        escape(&doc.header.date_utc)
    ));
    out.push_str("</footer>\n</body>\n</html>\n");
    out
}

#[cfg(test)]
mod tests {
    use super::{breakable, escape};

    #[test]
    fn ids_break_only_after_their_separators() {
        // Source: the rule of `breakable` itself, worked by hand on each separator; `<wbr>`
        // is the HTML standard's line-break opportunity (from memory).
        assert_eq!(
            breakable("climate.c::climate_step::air_temp_c.y"),
            "climate.<wbr>c::<wbr>climate_<wbr>step::<wbr>air_<wbr>temp_<wbr>c.<wbr>y"
        );
        assert_eq!(
            breakable("lpf.c::lpf_apply::f->y"),
            "lpf.<wbr>c::<wbr>lpf_<wbr>apply::<wbr>f-&gt;<wbr>y"
        );
        assert_eq!(breakable("src/a:b"), "src/<wbr>a:b");
        assert_eq!(breakable(":::x"), "::<wbr>:x");
        assert_eq!(breakable("plain"), "plain");
        // What it inserts is the only markup: the text itself is escaped as everywhere.
        assert_eq!(
            breakable("a<script>_&'\"\u{202e}"),
            "a&lt;script&gt;_<wbr>&amp;&#39;&quot;\\u{202e}"
        );
    }

    #[test]
    fn escaped_text_holds_no_markup_and_shows_hidden_characters() {
        // Source: the HTML standard's five characters that can start or end markup in text
        // and quoted attributes (&, <, >, ", '), and Unicode's bidirectional controls
        // (UAX #9), from memory.
        assert_eq!(
            escape("<script>alert(\"&'\")</script>"),
            "&lt;script&gt;alert(&quot;&amp;&#39;&quot;)&lt;/script&gt;"
        );
        assert_eq!(escape("a\x1b[2Jb\x07"), "a\\u{1b}[2Jb\\u{7}");
        assert_eq!(escape("if (x\u{202e} y)"), "if (x\\u{202e} y)");
        assert_eq!(escape("\tkeep tabs"), "\tkeep tabs");
        assert_eq!(escape("line\nend"), "line\\u{a}end");
    }
}

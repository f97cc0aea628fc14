//! The two plots of a smoother in the document: its step response and its magnitude
//! response, as the data series they are drawn from and as SVG drawn with `plotters`.
//!
//! The series builders are pure functions of `metrics` stages, so a test can hold the curve
//! against the figures the rest of the tool prints: the step curve is
//! `metrics::cascade_step_response` sample by sample, the magnitude curve is
//! `metrics::cascade_magnitude` on a logarithmic grid up to Nyquist. The drawing adds the marks
//! (63/90/95 % and the cutoff, from the same `metrics::Figures`) and what the spec asks (the
//! settling requirement, the cutoff band). Units: with a known rate the axes are in seconds and
//! hertz, else in samples and fractions of the update rate `fs`; no rate is ever made up.
//! The dashed marks and all labels are drawn over plotters' output by this module, the
//! labels placed clear of each other and of the legend ([`place_labels`]); plotters' SVG is
//! then compacted (default attributes dropped, known strokes as classes whose rules [`css`]
//! gives, redundant polyline points removed). Choosing what to plot for which smoother and
//! placing the SVG in a page is left to the document renderers.

use crate::metrics::{self, Figures, Stage};
use crate::report::table::{hertz, seconds, sig3};
use crate::units::{Hertz, RadPerSample, Seconds};
use plotters::prelude::*;
use std::f64::consts::TAU;

/// Width and height of each plot, in SVG user units (pixels on screen).
pub const PLOT_SIZE: (u32, u32) = (580, 360);

/// Gains below this are drawn at it: a moving average's nulls are minus infinity in decibels.
pub const DB_FLOOR: f64 = -100.0;

/// The longest step response drawn, in samples. A slower smoother's plot stops there and says
/// so; its figures are unaffected.
pub const STEP_SAMPLE_CAP: usize = 1 << 18;

/// Most points of one curve put in the SVG; longer series are thinned evenly for drawing only.
const DRAWN_POINTS_CAP: usize = 600;

/// Points of the magnitude curve over its frequency span.
pub const MAGNITUDE_POINTS: usize = 480;

// Colours of the curves and marks, chosen to stay apart when printed in grey.
const STAGE_COLOUR: RGBColor = RGBColor(31, 90, 160);
const CASCADE_COLOUR: RGBColor = RGBColor(205, 105, 0);
const MARK_COLOUR: RGBColor = RGBColor(110, 110, 110);
const REQUIREMENT_COLOUR: RGBColor = RGBColor(190, 30, 30);
const BAND_COLOUR: RGBColor = RGBColor(60, 160, 80);
/// The grid: a few major lines, no minor mesh.
const GRID_COLOUR: RGBColor = RGBColor(225, 225, 225);
/// Most tick labels (and so grid lines) on each axis.
const TICKS: usize = 6;

/// The step response of `stages` in series for its first `n` updates, as (updates, output)
/// points starting at rest (0, 0): the point (k, y) is the output after k updates.
/// Empty when `metrics` cannot compute the response (a zero-length moving average, a
/// response too long to simulate).
pub fn step_series(stages: &[Stage], n: usize) -> Vec<(f64, f64)> {
    let Some(response) = metrics::cascade_step_response(stages, n) else {
        return Vec::new();
    };
    std::iter::once((0.0, 0.0))
        .chain(
            response
                .into_iter()
                .enumerate()
                .map(|(index, y)| (index as f64 + 1.0, y)),
        )
        .collect()
}

/// How many updates the step plot shows: a quarter more than the slowest of the 99 % time and
/// `also_show` (a settling requirement in samples), at least 8, at most [`STEP_SAMPLE_CAP`].
pub fn step_length(figures: &[&Figures], also_show: Option<f64>) -> usize {
    let mut longest: f64 = 0.0;
    for f in figures {
        // A 99 % time the metrics could not compute means a very slow response: show the cap.
        longest = longest.max(f.to_99.samples.map_or(f64::INFINITY, |s| s.0));
    }
    if let Some(extra) = also_show.filter(|x| x.is_finite() && *x > 0.0) {
        longest = longest.max(extra);
    }
    let wanted = (longest * 1.25).ceil();
    if wanted.is_finite() {
        (wanted as usize).clamp(8, STEP_SAMPLE_CAP)
    } else {
        STEP_SAMPLE_CAP
    }
}

/// The frequency span of the magnitude plot in cycles per sample (fractions of `fs`): from a
/// power of ten at least a decade and a half below the lowest cutoff of `cutoffs` (and below
/// `also_show`, a frequency the plot must include), and at least a decade below Nyquist, up
/// to Nyquist (0.5).
pub fn frequency_span(cutoffs: &[Option<RadPerSample>], also_show: Option<f64>) -> (f64, f64) {
    let nyquist: f64 = 0.5;
    let mut lowest = nyquist / 20.0;
    for w in cutoffs.iter().flatten() {
        lowest = lowest.min(w.0 / TAU / 30.0);
    }
    if let Some(f) = also_show.filter(|f| f.is_finite() && *f > 0.0) {
        lowest = lowest.min(f / 3.0);
    }
    // A cutoff below about 1e-12 of the rate is not worth a wider plot than this.
    let lowest = lowest.max(1e-12);
    (10f64.powf(lowest.log10().floor()), nyquist)
}

/// The magnitude response of `stages` in series, as (cycles per sample, gain in dB) at `points`
/// frequencies spaced evenly on a logarithmic axis over [`frequency_span`] of their cutoff,
/// the last one at Nyquist exactly. Gains below [`DB_FLOOR`] are given as the floor.
pub fn magnitude_series(stages: &[Stage], points: usize) -> Vec<(f64, f64)> {
    let span = frequency_span(&[metrics::cascade_cutoff(stages)], None);
    magnitude_series_over(stages, span, points)
}

/// [`magnitude_series`] over a given span (so that several curves share one axis).
pub fn magnitude_series_over(stages: &[Stage], span: (f64, f64), points: usize) -> Vec<(f64, f64)> {
    let (low, high) = span;
    if points < 2 || !(low > 0.0 && high > low) {
        return Vec::new();
    }
    let (log_low, log_high) = (low.ln(), high.ln());
    (0..points)
        .map(|i| {
            let f = if i + 1 == points {
                high
            } else {
                (log_low + (log_high - log_low) * i as f64 / (points - 1) as f64).exp()
            };
            let gain = metrics::cascade_magnitude(stages, RadPerSample(f * TAU));
            (f, decibels(gain))
        })
        .collect()
}

/// A linear gain in decibels, floored at [`DB_FLOOR`] (NaN, from a broken stage, too).
pub fn decibels(gain: f64) -> f64 {
    let db = 20.0 * gain.log10();
    if db.is_nan() {
        DB_FLOOR
    } else {
        db.max(DB_FLOOR)
    }
}

// ---------------------------------------------------------------------------------------------
// Text sizes.
// ---------------------------------------------------------------------------------------------

/// Sizes of the plots' text in SVG user units, which are CSS pixels when a plot is shown at
/// its own width ([`PLOT_SIZE`]), as the print stylesheet keeps it. The smallest, [`MIN_TEXT`],
/// is then 8.25 pt on paper (a CSS pixel is 0.75 pt).
pub const TITLE_TEXT: f64 = 15.0;
/// The axis descriptions.
pub const AXIS_TEXT: f64 = 12.5;
/// The tick labels.
pub const TICK_TEXT: f64 = 12.0;
/// The labels of marks and cutoffs, and the legend.
pub const LABEL_TEXT: f64 = 11.5;
/// No text of a plot is smaller than this.
pub const MIN_TEXT: f64 = 11.0;

/// A font of `size` user units in the SVG: plotters' SVG backend writes a requested size
/// divided by 1.24, so the request is scaled up by as much.
fn font(size: f64) -> FontDesc<'static> {
    ("sans-serif", size * 1.24).into_font()
}

/// The width of `text` in user units at `size`, as drawn in a sans-serif face: 0.6 em a
/// character, a little over the average advance of such faces, so that boxes err on the
/// roomy side.
pub fn text_width(text: &str, size: f64) -> f64 {
    text.chars().count() as f64 * size * 0.6
}

// ---------------------------------------------------------------------------------------------
// Label placement.
// ---------------------------------------------------------------------------------------------

/// A label's box in pixels: where it wants its top-left corner, and its size.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LabelBox {
    pub x: f64,
    pub y: f64,
    pub width: f64,
    pub height: f64,
}

impl LabelBox {
    /// Whether two boxes come closer than `gap` to each other.
    fn near(&self, other: &LabelBox, gap: f64) -> bool {
        self.x < other.x + other.width + gap
            && other.x < self.x + self.width + gap
            && self.y < other.y + other.height + gap
            && other.y < self.y + self.height + gap
    }
}

/// The way a label moves when its place is taken.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shift {
    Down,
    Up,
}

/// Places labels so that none comes within `gap` of another or of an obstacle (a legend).
/// Each label keeps its x; taken in order of its wanted y (the topmost first when labels
/// move down, the lowest first when they move up), it stays at its wanted y when that is
/// free, else moves in the direction `shift` just past every box in its way. Returns each
/// label's y, in the order given.
///
/// A label only ever moves past a box, never back, so each label moves at most once per
/// box placed before it.
pub fn place_labels(
    labels: &[LabelBox],
    obstacles: &[LabelBox],
    gap: f64,
    shift: Shift,
) -> Vec<f64> {
    let mut order: Vec<usize> = (0..labels.len()).collect();
    order.sort_by(|&a, &b| {
        let by_y = labels[a].y.total_cmp(&labels[b].y);
        match shift {
            Shift::Down => by_y,
            Shift::Up => by_y.reverse(),
        }
    });
    let mut placed: Vec<LabelBox> = obstacles.to_vec();
    let mut ys = vec![0.0; labels.len()];
    for i in order {
        let mut candidate = labels[i];
        for _ in 0..=placed.len() {
            let in_the_way = placed.iter().filter(|b| candidate.near(b, gap));
            let next = match shift {
                Shift::Down => in_the_way
                    .map(|b| b.y + b.height + gap)
                    .fold(None, |m: Option<f64>, y| Some(m.map_or(y, |m| m.max(y)))),
                Shift::Up => in_the_way
                    .map(|b| b.y - candidate.height - gap)
                    .fold(None, |m: Option<f64>, y| Some(m.map_or(y, |m| m.min(y)))),
            };
            match next {
                Some(y) => candidate.y = y,
                None => break,
            }
        }
        ys[i] = candidate.y;
        placed.push(candidate);
    }
    ys
}

// ---------------------------------------------------------------------------------------------
// What is drawn over plotters' output: dashed marks and their labels.
// ---------------------------------------------------------------------------------------------

/// The colours of marks and labels drawn over a plot, each a class of the page's style.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Ink {
    Mark,
    Stage,
    Cascade,
}

impl Ink {
    fn class(self) -> &'static str {
        match self {
            Ink::Mark => "ink-mark",
            Ink::Stage => "ink-stage",
            Ink::Cascade => "ink-cascade",
        }
    }

    fn colour(self) -> RGBColor {
        match self {
            Ink::Mark => MARK_COLOUR,
            Ink::Stage => STAGE_COLOUR,
            Ink::Cascade => CASCADE_COLOUR,
        }
    }
}

/// A label to draw over a plot: its text, its wanted box in pixels, its colour.
struct Label {
    text: String,
    wanted: LabelBox,
    ink: Ink,
}

/// Dashed lines and labels drawn after plotters, in pixels: plotters would draw every dash
/// of a dashed line as an element of its own, and knows nothing of labels in each other's
/// way.
#[derive(Default)]
struct Overlay {
    dashes: Vec<(Ink, Vec<(i32, i32)>)>,
    labels: Vec<Label>,
}

impl Overlay {
    fn dash(&mut self, ink: Ink, points: Vec<(i32, i32)>) {
        self.dashes.push((ink, points));
    }

    /// A label whose top-left corner wants to be `offset` from `anchor`.
    fn label(&mut self, text: String, anchor: (i32, i32), offset: (f64, f64), ink: Ink) {
        let wanted = LabelBox {
            x: f64::from(anchor.0) + offset.0,
            y: f64::from(anchor.1) + offset.1,
            width: text_width(&text, LABEL_TEXT),
            height: LABEL_TEXT * 1.2,
        };
        self.labels.push(Label { text, wanted, ink });
    }

    /// The SVG of the overlay, the labels placed clear of each other and of `obstacles`.
    fn svg(&self, obstacles: &[LabelBox], shift: Shift) -> String {
        let mut out = String::new();
        for (ink, points) in &self.dashes {
            let points: Vec<String> = points.iter().map(|(x, y)| format!("{x},{y}")).collect();
            out.push_str(&format!(
                "<polyline class=\"dash {}\" points=\"{}\"/>\n",
                ink.class(),
                points.join(" ")
            ));
        }
        let boxes: Vec<LabelBox> = self.labels.iter().map(|l| l.wanted).collect();
        let ys = place_labels(&boxes, obstacles, LABEL_GAP, shift);
        for (label, y) in self.labels.iter().zip(ys) {
            out.push_str(&format!(
                "<text class=\"label {}\" x=\"{:.1}\" y=\"{:.1}\" dy=\"0.76em\" font-size=\"{LABEL_TEXT}\">{}</text>\n",
                label.ink.class(),
                label.wanted.x,
                y,
                crate::report::html::escape(&label.text)
            ));
        }
        out
    }
}

/// Least room between two labels, in pixels.
pub const LABEL_GAP: f64 = 2.0;

/// The box plotters gives a legend of `entries` with the longest text `longest` characters
/// long, at the lower left or right of `area` (plotters' layout: 5 pixels in from the
/// corner, 10 of margin, 30 for the line sample), widened a little to err on the safe side.
fn legend_box(
    area: &(std::ops::Range<i32>, std::ops::Range<i32>),
    entries: usize,
    longest: usize,
    right: bool,
) -> LabelBox {
    let width = 30.0 + 2.0 * 10.0 + longest as f64 * LABEL_TEXT * 0.6;
    let height = 2.0 * 10.0 + entries as f64 * LABEL_TEXT * 1.3;
    let (x0, x1) = (f64::from(area.0.start), f64::from(area.0.end));
    let y1 = f64::from(area.1.end);
    LabelBox {
        x: if right { x1 - width - 5.0 } else { x0 + 5.0 },
        y: y1 - height - 5.0,
        width,
        height,
    }
}

// ---------------------------------------------------------------------------------------------
// Compaction of plotters' SVG.
// ---------------------------------------------------------------------------------------------

/// The strokes plotters draws with, each given a class of the page's style instead of its
/// attributes: (colour, width).
fn stroke_classes() -> Vec<(String, u32, String)> {
    let mut out = Vec::new();
    for (colour, width) in [
        (STAGE_COLOUR, 2),
        (CASCADE_COLOUR, 2),
        (REQUIREMENT_COLOUR, 2),
        (GRID_COLOUR, 1),
        (BLACK, 1),
    ] {
        let hex = hex(colour);
        let class = format!(
            "k{}-{width}",
            hex.trim_start_matches('#').to_ascii_lowercase()
        );
        out.push((hex, width, class));
    }
    out
}

/// A colour as plotters writes it: `#1F5AA0`.
fn hex(colour: RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", colour.0, colour.1, colour.2)
}

/// The style rules of the plots' classes, for the page's one `<style>` block.
pub fn css() -> String {
    let mut out = String::from("svg.plot text { font-family: sans-serif; }\n");
    for (hex, width, class) in stroke_classes() {
        out.push_str(&format!(
            "svg.plot .{class} {{ fill: none; stroke: {hex}; stroke-width: {width}; }}\n"
        ));
    }
    for ink in [Ink::Mark, Ink::Stage, Ink::Cascade] {
        let colour = hex(ink.colour());
        out.push_str(&format!(
            "svg.plot .dash.{0} {{ fill: none; stroke: {colour}; stroke-width: 1; stroke-dasharray: 4 3; }}\nsvg.plot text.{0} {{ fill: {colour}; }}\n",
            ink.class()
        ));
    }
    // A white outline under each label keeps it legible where it crosses a line.
    out.push_str("svg.plot text.label { paint-order: stroke; stroke: #fff; stroke-width: 3px; stroke-linejoin: round; }\n");
    out
}

/// The points of a polyline with the points dropped that change nothing drawn: repeats of
/// the one before and points in the middle of a straight run (plotters' coordinates are
/// whole pixels, so this is exact).
fn simplify(points: &[(i64, i64)]) -> Vec<(i64, i64)> {
    let mut out: Vec<(i64, i64)> = Vec::with_capacity(points.len());
    for &p in points {
        if out.last() == Some(&p) {
            continue;
        }
        if let [.., a, b] = out.as_slice() {
            let (d1, d2) = ((b.0 - a.0, b.1 - a.1), (p.0 - b.0, p.1 - b.1));
            let straight = d1.0 * d2.1 == d1.1 * d2.0 && d1.0 * d2.0 + d1.1 * d2.1 > 0;
            if straight {
                out.pop();
            }
        }
        out.push(p);
    }
    out
}

/// The `points` attribute of a polyline, simplified; the text as it was when it does not read
/// as whole-pixel pairs.
fn compact_points(text: &str) -> String {
    let parsed: Option<Vec<(i64, i64)>> = text
        .split_whitespace()
        .map(|pair| {
            let (x, y) = pair.split_once(',')?;
            Some((x.parse().ok()?, y.parse().ok()?))
        })
        .collect();
    match parsed {
        Some(points) => simplify(&points)
            .iter()
            .map(|(x, y)| format!("{x},{y}"))
            .collect::<Vec<_>>()
            .join(" "),
        None => text.to_string(),
    }
}

/// Rounds a number written in an attribute to one decimal, dropping a trailing `.0`.
fn round_attribute(line: &str, name: &str) -> String {
    let key = format!(" {name}=\"");
    let Some(start) = line.find(&key).map(|i| i + key.len()) else {
        return line.to_string();
    };
    let Some(length) = line[start..].find('"') else {
        return line.to_string();
    };
    match line[start..start + length].parse::<f64>() {
        Ok(v) => {
            let rounded = format!("{:.1}", v);
            let rounded = rounded.strip_suffix(".0").unwrap_or(&rounded);
            format!("{}{}{}", &line[..start], rounded, &line[start + length..])
        }
        Err(_) => line.to_string(),
    }
}

/// Plotters' SVG made smaller without changing what it draws: attributes at their default
/// value dropped (`opacity="1"`, black text, the font family, which the `<svg>` gives its
/// text), known strokes replaced by a class of the page's style, font sizes rounded to a
/// tenth, polylines without their redundant points. Lines it does not recognise pass
/// unchanged.
fn compact(svg: &str) -> String {
    let classes = stroke_classes();
    let mut out = String::with_capacity(svg.len() / 2);
    for line in svg.lines() {
        let mut line = line.replace(" opacity=\"1\"", "");
        if line.starts_with("<svg ") {
            line = line.replacen("<svg ", "<svg class=\"plot\" ", 1);
        } else if line.starts_with("<text ") {
            line = line
                .replace(" font-family=\"sans-serif\"", "")
                .replace(" fill=\"#000000\"", "");
            line = round_attribute(&line, "font-size");
        } else if line.starts_with("<line ") || line.starts_with("<polyline ") {
            for (hex, width, class) in &classes {
                let attributes = format!(" stroke=\"{hex}\" stroke-width=\"{width}\"");
                if line.contains(&attributes) {
                    line = line
                        .replace(&attributes, &format!(" class=\"{class}\""))
                        .replace(" fill=\"none\"", "");
                    break;
                }
            }
            if let Some(start) = line.find(" points=\"").map(|i| i + 9) {
                if let Some(length) = line[start..].find('"') {
                    let points = compact_points(&line[start..start + length]);
                    line = format!("{}{}{}", &line[..start], points, &line[start + length..]);
                }
            }
        }
        out.push_str(&line);
        out.push('\n');
    }
    out
}

/// Plotters' SVG compacted, with the overlay drawn last, over everything else.
fn finish(svg: &str, overlay: &Overlay, obstacles: &[LabelBox], shift: Shift) -> String {
    let compacted = compact(svg);
    let over = overlay.svg(obstacles, shift);
    match compacted.rfind("</svg>") {
        Some(end) => format!("{}{over}{}", &compacted[..end], &compacted[end..]),
        None => compacted,
    }
}

/// One curve of a plot: the stages it is the response of, their figures and a legend text.
pub struct Curve<'a> {
    pub stages: &'a [Stage],
    pub figures: &'a Figures,
    pub label: String,
}

/// Everything a smoother's two plots show. The first curve is the smoother itself (its marks
/// are drawn); a second one is the whole cascade it ends, when it ends one.
pub struct PlotInput<'a> {
    pub curves: Vec<Curve<'a>>,
    /// The update rate, when known: the axes are then in seconds and hertz.
    pub rate: Option<Hertz>,
    /// The spec's settling requirement: a fraction of the step and the time to reach it.
    pub settle: Option<(f64, Seconds)>,
    /// The spec's cutoff band in hertz (either end may be open).
    pub cutoff_band: (Option<Hertz>, Option<Hertz>),
}

/// A usable rate: positive and finite.
fn usable(rate: Option<Hertz>) -> Option<Hertz> {
    rate.filter(|r| r.0.is_finite() && r.0 > 0.0)
}

/// Evenly thinned points for drawing, the first and last kept.
fn thinned(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    if points.len() <= DRAWN_POINTS_CAP {
        return points.to_vec();
    }
    let stride = points.len().div_ceil(DRAWN_POINTS_CAP);
    let mut out: Vec<(f64, f64)> = points.iter().step_by(stride).copied().collect();
    if let Some(last) = points.last() {
        if out.last() != Some(last) {
            out.push(*last);
        }
    }
    out
}

/// A tick label: three significant digits, no exponent for everyday magnitudes.
fn tick(value: f64) -> String {
    if value != 0.0 && value.abs() < 1e-3 {
        format!("{value:.0e}")
    } else {
        sig3(value)
    }
}

fn plot_error(e: impl std::fmt::Display) -> String {
    format!("the plot could not be drawn: {e}")
}

/// Draws one curve of a plot in `colour`, with its legend entry.
fn draw_curve<'a, X, Y>(
    chart: &mut ChartContext<'a, SVGBackend<'a>, Cartesian2d<X, Y>>,
    points: Vec<(f64, f64)>,
    label: &str,
    colour: RGBColor,
) -> Result<(), String>
where
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    let style = colour.stroke_width(2);
    chart
        .draw_series(LineSeries::new(points, style))
        .map_err(plot_error)?
        .label(label)
        .legend(move |(lx, ly)| PathElement::new([(lx, ly), (lx + 18, ly)], style));
    Ok(())
}

/// Draws the legend box of a plot at `position`.
fn draw_legend<'a, X, Y>(
    chart: &mut ChartContext<'a, SVGBackend<'a>, Cartesian2d<X, Y>>,
    position: SeriesLabelPosition,
) -> Result<(), String>
where
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    chart
        .configure_series_labels()
        .position(position)
        .background_style(WHITE.mix(0.9))
        .border_style(MARK_COLOUR)
        .label_font(font(LABEL_TEXT))
        .draw()
        .map_err(plot_error)
}

/// The step response plot as an SVG document, or why it could not be drawn.
pub fn step_svg(input: &PlotInput) -> Result<String, String> {
    let rate = usable(input.rate);
    let settle_samples = match (input.settle, rate) {
        (Some((_, within)), Some(r)) => Some(within.0 * r.0),
        _ => None,
    };
    let figures: Vec<&Figures> = input.curves.iter().map(|c| c.figures).collect();
    let length = step_length(&figures, settle_samples);
    let series: Vec<Vec<(f64, f64)>> = input
        .curves
        .iter()
        .map(|c| step_series(c.stages, length))
        .collect();
    if series.iter().all(Vec::is_empty) {
        return Err("the step response cannot be computed".into());
    }
    // Updates to seconds when the rate is known; samples stay samples otherwise.
    let x_of = |samples: f64| rate.map_or(samples, |r| samples / r.0);
    let x_max = x_of(length as f64);
    let mut svg = String::new();
    let mut overlay = Overlay::default();
    let mut obstacles: Vec<LabelBox> = Vec::new();
    {
        let root = SVGBackend::with_string(&mut svg, PLOT_SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(12)
            .caption("Step response", font(TITLE_TEXT))
            .x_label_area_size(42)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..x_max, 0.0..1.08)
            .map_err(plot_error)?;
        chart
            .configure_mesh()
            .x_desc(if rate.is_some() {
                "time after the step (s)"
            } else {
                "updates after the step (samples)"
            })
            .y_desc("output (fraction of the step)")
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| format!("{:.0} %", v * 100.0))
            .x_labels(TICKS)
            .y_labels(TICKS)
            .label_style(font(TICK_TEXT))
            .axis_desc_style(font(AXIS_TEXT))
            .bold_line_style(GRID_COLOUR)
            .light_line_style(TRANSPARENT)
            .draw()
            .map_err(plot_error)?;

        // The marks of the smoother itself: where it first reaches 63, 90 and 95 %.
        if let Some(first) = input.curves.first() {
            let f = first.figures;
            for mark in [f.to_63, f.to_90, f.to_95] {
                let Some(samples) = mark.samples else {
                    continue;
                };
                let x = x_of(samples.0);
                if x > x_max {
                    continue;
                }
                let q = mark.fraction;
                let corner = chart.backend_coord(&(x, q));
                overlay.dash(
                    Ink::Mark,
                    vec![
                        chart.backend_coord(&(0.0, q)),
                        corner,
                        chart.backend_coord(&(x, 0.0)),
                    ],
                );
                overlay.label(format!("{:.0} %", q * 100.0), corner, (4.0, 4.0), Ink::Mark);
            }
        }
        let mut legend: Vec<String> = Vec::new();

        // The requirement: the curve must have reached the fraction by the time given.
        // A requirement past the plotted span (beyond the cap of samples) is left to the
        // caption rather than drawn off the axis.
        let settle = input
            .settle
            .filter(|(_, within)| within.0.is_finite() && within.0 > 0.0 && within.0 <= x_max);
        if let (Some((q, within)), Some(_)) = (settle, rate) {
            let x = within.0;
            let style = REQUIREMENT_COLOUR.stroke_width(2);
            let text = format!("required: {:.0} % within {}", q * 100.0, seconds(within.0));
            legend.push(text.clone());
            chart
                .draw_series(LineSeries::new([(x, 0.0), (x, 1.08)], style))
                .map_err(plot_error)?
                .label(text)
                .legend(move |(lx, ly)| PathElement::new([(lx, ly), (lx + 18, ly)], style));
            chart
                .draw_series(LineSeries::new([(x, q), (x_max.max(x), q)], style))
                .map_err(plot_error)?;
        }

        let colours = [STAGE_COLOUR, CASCADE_COLOUR];
        for ((curve, points), colour) in input.curves.iter().zip(&series).zip(colours) {
            let drawn: Vec<(f64, f64)> = thinned(points)
                .into_iter()
                .map(|(k, y)| (x_of(k), y))
                .collect();
            draw_curve(&mut chart, drawn, &curve.label, colour)?;
            legend.push(curve.label.clone());
        }
        draw_legend(&mut chart, SeriesLabelPosition::LowerRight)?;
        obstacles.push(legend_box(
            &chart.plotting_area().get_pixel_range(),
            legend.len(),
            legend.iter().map(|l| l.chars().count()).max().unwrap_or(0),
            true,
        ));
        root.present().map_err(plot_error)?;
    }
    Ok(finish(&svg, &overlay, &obstacles, Shift::Down))
}

/// The magnitude response plot as an SVG document, or why it could not be drawn.
pub fn magnitude_svg(input: &PlotInput) -> Result<String, String> {
    let rate = usable(input.rate);
    // The spec's band in fractions of fs, to place it and to keep it on the axis.
    let band = match (rate, input.cutoff_band) {
        (Some(r), (low, high)) if low.is_some() || high.is_some() => {
            Some((low.map(|h| h.0 / r.0), high.map(|h| h.0 / r.0)))
        }
        _ => None,
    };
    let band_low = band.and_then(|(low, high)| low.or(high));
    let cutoffs: Vec<Option<RadPerSample>> =
        input.curves.iter().map(|c| c.figures.cutoff).collect();
    let span = frequency_span(&cutoffs, band_low);
    let series: Vec<Vec<(f64, f64)>> = input
        .curves
        .iter()
        .map(|c| magnitude_series_over(c.stages, span, MAGNITUDE_POINTS))
        .collect();
    let lowest_db = series.iter().flatten().map(|p| p.1).fold(0.0_f64, f64::min);
    let y_low = ((lowest_db / 10.0).floor() * 10.0).clamp(DB_FLOOR, -10.0);
    let x_of = |fraction: f64| rate.map_or(fraction, |r| fraction * r.0);
    let (x_low, x_high) = (x_of(span.0), x_of(span.1));
    let mut svg = String::new();
    let mut overlay = Overlay::default();
    let mut obstacles: Vec<LabelBox> = Vec::new();
    {
        let root = SVGBackend::with_string(&mut svg, PLOT_SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(12)
            .caption("Magnitude response", font(TITLE_TEXT))
            .x_label_area_size(42)
            .y_label_area_size(56)
            .build_cartesian_2d((x_low..x_high).log_scale(), y_low..3.0)
            .map_err(plot_error)?;
        chart
            .configure_mesh()
            .x_desc(if rate.is_some() {
                "frequency (Hz), up to Nyquist"
            } else {
                "frequency (fraction of fs), up to Nyquist"
            })
            .y_desc("gain (dB)")
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| sig3(*v))
            .x_labels(TICKS)
            .y_labels(TICKS)
            .label_style(font(TICK_TEXT))
            .axis_desc_style(font(AXIS_TEXT))
            .bold_line_style(GRID_COLOUR)
            .light_line_style(TRANSPARENT)
            .draw()
            .map_err(plot_error)?;

        let mut legend: Vec<String> = Vec::new();
        if let Some((low, high)) = band {
            let from = x_of(low.unwrap_or(span.0).max(span.0));
            let to = x_of(high.unwrap_or(span.1).min(span.1));
            if to > from {
                legend.push("required cutoff band".into());
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(from, 3.0), (to, y_low)],
                        BAND_COLOUR.mix(0.18).filled(),
                    )))
                    .map_err(plot_error)?
                    .label("required cutoff band")
                    .legend(|(lx, ly)| {
                        Rectangle::new(
                            [(lx, ly - 5), (lx + 18, ly + 5)],
                            BAND_COLOUR.mix(0.3).filled(),
                        )
                    });
            }
        }

        let minus_3 = decibels(std::f64::consts::FRAC_1_SQRT_2);
        let left = chart.backend_coord(&(x_low, minus_3));
        overlay.dash(
            Ink::Mark,
            vec![left, chart.backend_coord(&(x_high, minus_3))],
        );
        overlay.label("-3 dB".into(), left, (4.0, 3.0), Ink::Mark);

        let colours = [(STAGE_COLOUR, Ink::Stage), (CASCADE_COLOUR, Ink::Cascade)];
        for ((curve, points), (colour, ink)) in input.curves.iter().zip(&series).zip(colours) {
            let drawn: Vec<(f64, f64)> = points.iter().map(|&(f, db)| (x_of(f), db)).collect();
            draw_curve(&mut chart, drawn, &curve.label, colour)?;
            legend.push(curve.label.clone());
            // The cutoff of this curve, from the figures, not read off the curve.
            if let Some(w) = curve.figures.cutoff {
                let x = x_of(w.0 / TAU);
                let text = match rate {
                    Some(r) => format!("cutoff {}", hertz(w.to_hertz(r).0)),
                    None => format!("cutoff {} fs", sig3(w.0 / TAU)),
                };
                let foot = chart.backend_coord(&(x, y_low));
                overlay.dash(ink, vec![chart.backend_coord(&(x, 3.0)), foot]);
                overlay.label(text, foot, (4.0, -(LABEL_TEXT * 1.2 + 4.0)), ink);
            }
        }
        draw_legend(&mut chart, SeriesLabelPosition::LowerLeft)?;
        obstacles.push(legend_box(
            &chart.plotting_area().get_pixel_range(),
            legend.len(),
            legend.iter().map(|l| l.chars().count()).max().unwrap_or(0),
            false,
        ));
        root.present().map_err(plot_error)?;
    }
    Ok(finish(&svg, &overlay, &obstacles, Shift::Up))
}

#[cfg(test)]
#[allow(
    clippy::unwrap_used,
    reason = "a missing value in a test should fail the test on the spot"
)]
mod tests {
    use super::*;
    use crate::units::Alpha;

    fn ema(a: f64) -> Stage {
        Stage::Ema(Alpha::new(a).unwrap())
    }

    #[test]
    fn step_series_starts_at_rest_and_counts_updates() {
        // Source: hand computation of 1 - 0.5^k for alpha = 0.5.
        let series = step_series(&[ema(0.5)], 3);
        assert_eq!(
            series,
            vec![(0.0, 0.0), (1.0, 0.5), (2.0, 0.75), (3.0, 0.875)]
        );
        assert!(step_series(&[Stage::MovingAverage(0)], 3).is_empty());
    }

    #[test]
    fn magnitude_series_ends_at_nyquist_and_starts_below_the_cutoff() {
        // Source: Nyquist is half the rate (sampling theorem, from memory); the gain of a
        // two-sample average is cos(pi f) (hand computation), zero at Nyquist.
        let series = magnitude_series(&[ema(0.1)], 100);
        assert_eq!(series.len(), 100);
        assert_eq!(series.last().unwrap().0, 0.5);
        let cutoff = metrics::ema_cutoff(Alpha::new(0.1).unwrap()).unwrap().0 / TAU;
        assert!(series[0].0 <= cutoff / 30.0);
        assert!(series[0].1 > -0.01, "near DC the gain is 0 dB");
        let average = magnitude_series(&[Stage::MovingAverage(2)], 50);
        assert_eq!(average.last().unwrap().1, DB_FLOOR);
        assert!(magnitude_series_over(&[ema(0.1)], (0.1, 0.1), 10).is_empty());
    }

    #[test]
    fn frequency_span_is_a_decade_boundary_below_every_cutoff() {
        // Source: the rule of the span itself (a decade and a half below the lowest cutoff,
        // rounded down to a power of ten); 0.01 / 30 = 3.3e-4 rounds down to 1e-4.
        let span = frequency_span(&[Some(RadPerSample(0.01 * TAU)), None], None);
        assert!((span.0 - 1e-4).abs() < 1e-18, "{span:?}");
        let none = frequency_span(&[None], None);
        assert!((none.0 - 0.01).abs() < 1e-15, "{none:?}");
        let band = frequency_span(&[None], Some(3e-5));
        assert!((band.0 - 1e-5).abs() < 1e-19, "{band:?}");
    }

    #[test]
    fn step_length_covers_the_99_percent_time_and_the_requirement() {
        // Source: hand computation; alpha = 0.5 reaches 99 % after 7 updates (1 - 0.5^7 >
        // 0.99 > 1 - 0.5^6), and a quarter more is 8.75, rounded up to 9.
        let f = Figures::for_stages(&[ema(0.5)], None);
        assert_eq!(step_length(&[&f], None), 9);
        assert_eq!(step_length(&[&f], Some(100.0)), 125);
        let slow = Figures::for_stages(&[ema(1e-9)], None);
        assert_eq!(step_length(&[&slow], None), STEP_SAMPLE_CAP);
    }

    #[test]
    fn thinning_keeps_the_ends_and_the_cap() {
        let points: Vec<(f64, f64)> = (0..10_001).map(|i| (i as f64, 0.0)).collect();
        let drawn = thinned(&points);
        assert!(drawn.len() <= DRAWN_POINTS_CAP + 1);
        assert_eq!(drawn.first(), points.first());
        assert_eq!(drawn.last(), points.last());
    }

    fn label(x: f64, y: f64, width: f64) -> LabelBox {
        LabelBox {
            x,
            y,
            width,
            height: 12.0,
        }
    }

    /// No two of the boxes (labels at their placed y, and obstacles) within `gap`.
    fn assert_apart(labels: &[LabelBox], ys: &[f64], obstacles: &[LabelBox], gap: f64) {
        let mut boxes: Vec<LabelBox> = labels
            .iter()
            .zip(ys)
            .map(|(l, y)| LabelBox { y: *y, ..*l })
            .collect();
        boxes.extend_from_slice(obstacles);
        for (i, a) in boxes.iter().enumerate() {
            for b in &boxes[i + 1..] {
                let apart_x = a.x + a.width + gap <= b.x || b.x + b.width + gap <= a.x;
                let apart_y = a.y + a.height + gap <= b.y || b.y + b.height + gap <= a.y;
                assert!(apart_x || apart_y, "{a:?} and {b:?} overlap in {ys:?}");
            }
        }
    }

    #[test]
    fn labels_in_each_others_way_stack_and_the_others_stay() {
        // Source: the placement rule worked by hand: 95 % and 90 % at one x (a moving
        // average reaches both at the same sample) 6 px apart; 95 % (higher) keeps its
        // place, 90 % goes under it, 12 + 2 px lower; 63 % far to the left stays.
        let labels = [
            label(200.0, 106.0, 30.0),
            label(200.0, 100.0, 30.0),
            label(50.0, 200.0, 30.0),
        ];
        let ys = place_labels(&labels, &[], 2.0, Shift::Down);
        assert_eq!(ys, vec![114.0, 100.0, 200.0]);
        assert_apart(&labels, &ys, &[], 2.0);
        // Three labels at one anchor stack in a column, each 14 px under the one before.
        let same = [label(10.0, 10.0, 40.0); 3];
        let ys = place_labels(&same, &[], 2.0, Shift::Down);
        let mut sorted = ys.clone();
        sorted.sort_by(f64::total_cmp);
        assert_eq!(sorted, vec![10.0, 24.0, 38.0]);
        // Moving up: two cutoff labels that overlap sideways; the lower one (larger y)
        // stays, the other goes above it.
        let cutoffs = [label(300.0, 250.0, 90.0), label(330.0, 251.0, 90.0)];
        let ys = place_labels(&cutoffs, &[], 2.0, Shift::Up);
        assert_eq!(ys, vec![251.0 - 12.0 - 2.0, 251.0]);
    }

    #[test]
    fn labels_go_past_obstacles_and_keep_apart_everywhere() {
        // A legend in the way: the label goes past it, and past a label placed beyond it.
        let legend = label(0.0, 100.0, 200.0);
        let legend = LabelBox {
            height: 50.0,
            ..legend
        };
        let ys = place_labels(&[label(20.0, 120.0, 30.0)], &[legend], 2.0, Shift::Up);
        assert_eq!(ys, vec![100.0 - 12.0 - 2.0]);
        // Many labels at clustered anchors, both ways: never within the gap of each other.
        let crowd: Vec<LabelBox> = (0..40)
            .map(|i| label(f64::from(i % 7) * 9.0, f64::from(i % 5) * 4.0 + 50.0, 25.0))
            .collect();
        for shift in [Shift::Down, Shift::Up] {
            let ys = place_labels(&crowd, &[legend], 2.0, shift);
            assert_apart(&crowd, &ys, &[legend], 2.0);
        }
    }

    #[test]
    fn compaction_keeps_every_drawn_point_that_matters() {
        // Source: hand computation: (0,0) (1,1) (2,2) is one straight run; (2,2) repeated
        // draws nothing; the turn at (2,2) and both ends stay.
        assert_eq!(compact_points("0,0 1,1 2,2 2,2 3,2 4,2 "), "0,0 2,2 4,2");
        // Going back on itself is not a straight run through the middle point.
        assert_eq!(compact_points("0,0 5,0 1,0"), "0,0 5,0 1,0");
        assert_eq!(compact_points("a,b"), "a,b");
        let svg = "<svg width=\"1\" height=\"1\">\n<polyline fill=\"none\" opacity=\"1\" stroke=\"#1F5AA0\" stroke-width=\"2\" points=\"0,0 1,0 2,0 \"/>\n<text x=\"1\" y=\"2\" font-family=\"sans-serif\" font-size=\"9.67741935483871\" opacity=\"1\" fill=\"#000000\">\n</svg>\n";
        assert_eq!(
            compact(svg),
            "<svg class=\"plot\" width=\"1\" height=\"1\">\n<polyline class=\"k1f5aa0-2\" points=\"0,0 2,0\"/>\n<text x=\"1\" y=\"2\" font-size=\"9.7\">\n</svg>\n"
        );
        // Every class compaction writes has its rule in the page's style.
        let style = css();
        for (_, _, class) in stroke_classes() {
            assert!(style.contains(&format!(".{class} {{")), "{class}");
        }
    }

    #[test]
    fn plots_are_svg_with_the_curves_and_marks() {
        let f = Figures::for_stages(&[ema(0.2)], Some(Hertz(100.0)));
        let stages = [ema(0.2)];
        let input = PlotInput {
            curves: vec![Curve {
                stages: &stages,
                figures: &f,
                label: "this smoother".into(),
            }],
            rate: Some(Hertz(100.0)),
            settle: Some((0.95, Seconds(0.2))),
            cutoff_band: (Some(Hertz(2.0)), Some(Hertz(4.0))),
        };
        let step = step_svg(&input).unwrap();
        assert!(step.starts_with("<svg"), "{}", &step[..40]);
        assert!(step.contains("required: 95 % within 200 ms"));
        assert!(step.contains("63 %") && step.contains("90 %") && step.contains("95 %"));
        let magnitude = magnitude_svg(&input).unwrap();
        assert!(magnitude.contains("required cutoff band"));
        assert!(magnitude.contains("cutoff "));
        assert!(magnitude.contains("Hz"));
    }
}

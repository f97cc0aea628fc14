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
//! Choosing what to plot for which smoother and placing the SVG in a page is left to the
//! document renderers.

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
        .label_font(("sans-serif", 12))
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
    {
        let root = SVGBackend::with_string(&mut svg, PLOT_SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(12)
            .caption("Step response", ("sans-serif", 18))
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
            .light_line_style(RGBColor(235, 235, 235))
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
                chart
                    .draw_series(DashedLineSeries::new(
                        [(0.0, q), (x, q), (x, 0.0)],
                        4,
                        3,
                        MARK_COLOUR.stroke_width(1),
                    ))
                    .map_err(plot_error)?;
                chart
                    .draw_series(std::iter::once(
                        EmptyElement::at((x, q))
                            + Text::new(
                                format!("{:.0} %", q * 100.0),
                                (4, 4),
                                ("sans-serif", 11).into_font().color(&MARK_COLOUR),
                            ),
                    ))
                    .map_err(plot_error)?;
            }
        }

        // The requirement: the curve must have reached the fraction by the time given.
        // A requirement past the plotted span (beyond the cap of samples) is left to the
        // caption rather than drawn off the axis.
        let settle = input
            .settle
            .filter(|(_, within)| within.0.is_finite() && within.0 > 0.0 && within.0 <= x_max);
        if let (Some((q, within)), Some(_)) = (settle, rate) {
            let x = within.0;
            let style = REQUIREMENT_COLOUR.stroke_width(2);
            chart
                .draw_series(LineSeries::new([(x, 0.0), (x, 1.08)], style))
                .map_err(plot_error)?
                .label(format!(
                    "required: {:.0} % within {}",
                    q * 100.0,
                    seconds(within.0)
                ))
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
        }
        draw_legend(&mut chart, SeriesLabelPosition::LowerRight)?;
        root.present().map_err(plot_error)?;
    }
    Ok(svg)
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
    {
        let root = SVGBackend::with_string(&mut svg, PLOT_SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(12)
            .caption("Magnitude response", ("sans-serif", 18))
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
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(plot_error)?;

        if let Some((low, high)) = band {
            let from = x_of(low.unwrap_or(span.0).max(span.0));
            let to = x_of(high.unwrap_or(span.1).min(span.1));
            if to > from {
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
        chart
            .draw_series(DashedLineSeries::new(
                [(x_low, minus_3), (x_high, minus_3)],
                4,
                3,
                MARK_COLOUR.stroke_width(1),
            ))
            .map_err(plot_error)?;
        chart
            .draw_series(std::iter::once(
                EmptyElement::at((x_low, minus_3))
                    + Text::new(
                        "-3 dB",
                        (4, 3),
                        ("sans-serif", 11).into_font().color(&MARK_COLOUR),
                    ),
            ))
            .map_err(plot_error)?;

        let colours = [STAGE_COLOUR, CASCADE_COLOUR];
        for ((curve, points), colour) in input.curves.iter().zip(&series).zip(colours) {
            let drawn: Vec<(f64, f64)> = points.iter().map(|&(f, db)| (x_of(f), db)).collect();
            draw_curve(&mut chart, drawn, &curve.label, colour)?;
            // The cutoff of this curve, from the figures, not read off the curve.
            if let Some(w) = curve.figures.cutoff {
                let x = x_of(w.0 / TAU);
                let text = match rate {
                    Some(r) => format!("cutoff {}", hertz(w.to_hertz(r).0)),
                    None => format!("cutoff {} fs", sig3(w.0 / TAU)),
                };
                chart
                    .draw_series(DashedLineSeries::new(
                        [(x, 3.0), (x, y_low)],
                        4,
                        3,
                        colour.stroke_width(1),
                    ))
                    .map_err(plot_error)?;
                chart
                    .draw_series(std::iter::once(
                        EmptyElement::at((x, y_low))
                            + Text::new(
                                text,
                                (4, -16),
                                ("sans-serif", 11).into_font().color(&colour),
                            ),
                    ))
                    .map_err(plot_error)?;
            }
        }
        draw_legend(&mut chart, SeriesLabelPosition::LowerLeft)?;
        root.present().map_err(plot_error)?;
    }
    Ok(svg)
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

//! Checks the figures of `tauscan::metrics` against a committed table computed with
//! scipy.signal (tests/reference/metrics_table.csv, made by generate_metrics_table.py beside
//! it), and against the rules of thumb of the trade.
//!
//! CI has no Python: it only reads the table. Regenerating the table, and why it looks as it
//! does, is described in tests/reference/README.md. The unit tests inside `metrics` cover edge
//! cases; this file covers the ordinary range of coefficients.

#![allow(
    clippy::unwrap_used,
    reason = "a malformed reference table should fail the test on the spot"
)]

use std::f64::consts::TAU;
use tauscan::metrics::{
    cascade_cutoff, cascade_lag, cascade_magnitude, cascade_noise_ratio,
    cascade_samples_to_fraction, ema_cutoff, ema_lag, ema_magnitude, ema_noise_ratio,
    ema_samples_to_fraction, ema_step, ema_time_constant, ma_cutoff, ma_lag, ma_magnitude,
    ma_noise_ratio, ma_samples_to_fraction, Figures, Stage, FRACTION_63, FRACTION_90, FRACTION_95,
    FRACTION_99,
};
use tauscan::units::{Alpha, RadPerSample, Samples};

const TABLE: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/tests/reference/metrics_table.csv"
);

/// Tolerance for figures tauscan computes in closed form (and for scipy's, which are exact to
/// about 1e-12 on this grid).
const CLOSED_FORM: f64 = 1e-9;
/// Tolerance for figures tauscan finds numerically (bisection, simulation).
const NUMERICAL: f64 = 1e-6;
/// Gains are at most 1; near a null a relative tolerance means nothing, so gains also pass
/// within this absolute distance.
const GAIN_FLOOR: f64 = 1e-14;

/// One line of the table.
struct Row {
    line: usize,
    label: String,
    stages: Vec<Stage>,
    metric: String,
    argument: Option<f64>,
    value: Option<f64>,
}

impl Row {
    fn single_ema(&self) -> Option<Alpha> {
        match self.stages.as_slice() {
            [Stage::Ema(alpha)] => Some(*alpha),
            _ => None,
        }
    }

    fn single_ma(&self) -> Option<u32> {
        match self.stages.as_slice() {
            [Stage::MovingAverage(n)] => Some(*n),
            _ => None,
        }
    }

    fn where_(&self) -> String {
        format!(
            "line {} ({} {} {:?})",
            self.line, self.label, self.metric, self.argument
        )
    }
}

fn parse_stage(text: &str) -> Stage {
    let (kind, value) = text.split_once(':').unwrap();
    match kind {
        "ema" => Stage::Ema(Alpha::new(value.parse().unwrap()).unwrap()),
        "ma" => Stage::MovingAverage(value.parse().unwrap()),
        other => panic!("unknown stage kind {other:?}"),
    }
}

fn parse_value(text: &str) -> Option<f64> {
    match text {
        "none" => None,
        number => Some(number.parse().unwrap()),
    }
}

fn table() -> Vec<Row> {
    let text = std::fs::read_to_string(TABLE).unwrap();
    let mut rows = Vec::new();
    let mut saw_header = false;
    for (index, line) in text.lines().enumerate() {
        if line.starts_with('#') || line.trim().is_empty() {
            continue;
        }
        if !saw_header {
            assert_eq!(line, "stages,metric,argument,value");
            saw_header = true;
            continue;
        }
        let fields: Vec<&str> = line.split(',').collect();
        assert_eq!(fields.len(), 4, "line {}: {line}", index + 1);
        rows.push(Row {
            line: index + 1,
            label: fields[0].to_string(),
            stages: fields[0].split('>').map(parse_stage).collect(),
            metric: fields[1].to_string(),
            argument: if fields[2].is_empty() {
                None
            } else {
                Some(fields[2].parse().unwrap())
            },
            value: parse_value(fields[3]),
        });
    }
    rows
}

fn rows_of(metric: &str) -> Vec<Row> {
    table()
        .into_iter()
        .filter(|row| row.metric == metric)
        .collect()
}

fn within(actual: f64, expected: f64, relative: f64) -> bool {
    (actual - expected).abs() <= relative * expected.abs()
}

/// Compares optional figures: both absent, or both present and within `relative`.
fn check(failures: &mut Vec<String>, row: &Row, what: &str, actual: Option<f64>, relative: f64) {
    let agrees = match (actual, row.value) {
        (None, None) => true,
        (Some(a), Some(e)) => within(a, e, relative),
        _ => false,
    };
    if !agrees {
        failures.push(format!(
            "{}: {what} gave {actual:?}, scipy {:?}",
            row.where_(),
            row.value
        ));
    }
}

fn report(failures: Vec<String>) {
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn table_covers_every_metric_and_both_kinds_of_cutoff() {
    // A truncated or empty table would let every other test pass vacuously.
    let rows = table();
    for metric in [
        "magnitude",
        "cutoff",
        "lag",
        "step",
        "samples_to_fraction",
        "noise_ratio",
    ] {
        let count = rows.iter().filter(|row| row.metric == metric).count();
        assert!(count >= 20, "only {count} rows of {metric}");
    }
    let cutoffs = rows_of("cutoff");
    assert!(cutoffs.iter().filter(|row| row.value.is_none()).count() >= 5);
    assert!(cutoffs.iter().filter(|row| row.stages.len() >= 2).count() >= 10);
}

#[test]
fn magnitude_matches_scipy() {
    let mut failures = Vec::new();
    for row in rows_of("magnitude") {
        let w = RadPerSample(row.argument.unwrap());
        let expected = row.value.unwrap();
        let mut compare = |what: &str, actual: f64| {
            // Source: scipy.signal.freqz via tests/reference/generate_metrics_table.py
            if !(within(actual, expected, CLOSED_FORM) || (actual - expected).abs() <= GAIN_FLOOR) {
                failures.push(format!(
                    "{}: {what} gave {actual}, scipy {expected}",
                    row.where_()
                ));
            }
        };
        if let Some(alpha) = row.single_ema() {
            compare("ema_magnitude", ema_magnitude(alpha, w));
        }
        if let Some(n) = row.single_ma() {
            compare("ma_magnitude", ma_magnitude(n, w));
        }
        compare("cascade_magnitude", cascade_magnitude(&row.stages, w));
    }
    report(failures);
}

#[test]
fn cutoff_matches_scipy() {
    let mut failures = Vec::new();
    for row in rows_of("cutoff") {
        let value = |cutoff: Option<RadPerSample>| cutoff.map(|w| w.0);
        if let Some(alpha) = row.single_ema() {
            // Source: scipy.signal.freqz via tests/reference/generate_metrics_table.py
            check(
                &mut failures,
                &row,
                "ema_cutoff",
                value(ema_cutoff(alpha)),
                CLOSED_FORM,
            );
        }
        if let Some(n) = row.single_ma() {
            // Source: scipy.signal.freqz via tests/reference/generate_metrics_table.py
            check(
                &mut failures,
                &row,
                "ma_cutoff",
                value(ma_cutoff(n)),
                NUMERICAL,
            );
        }
        // Source: scipy.signal.freqz via tests/reference/generate_metrics_table.py
        let cascade = value(cascade_cutoff(&row.stages));
        check(&mut failures, &row, "cascade_cutoff", cascade, NUMERICAL);
    }
    report(failures);
}

#[test]
fn lag_matches_scipy() {
    let mut failures = Vec::new();
    for row in rows_of("lag") {
        if let Some(alpha) = row.single_ema() {
            // Source: scipy.signal.group_delay via tests/reference/generate_metrics_table.py
            check(
                &mut failures,
                &row,
                "ema_lag",
                Some(ema_lag(alpha).0),
                CLOSED_FORM,
            );
        }
        if let Some(n) = row.single_ma() {
            // Source: scipy.signal.group_delay via tests/reference/generate_metrics_table.py
            check(
                &mut failures,
                &row,
                "ma_lag",
                Some(ma_lag(n).0),
                CLOSED_FORM,
            );
        }
        // Source: scipy.signal.group_delay via tests/reference/generate_metrics_table.py
        let cascade = Some(cascade_lag(&row.stages).0);
        check(&mut failures, &row, "cascade_lag", cascade, CLOSED_FORM);
    }
    report(failures);
}

#[test]
fn step_matches_scipy() {
    let mut failures = Vec::new();
    for row in rows_of("step") {
        let alpha = row.single_ema().unwrap();
        let n = row.argument.unwrap() as u64;
        // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
        check(
            &mut failures,
            &row,
            "ema_step",
            Some(ema_step(alpha, n)),
            CLOSED_FORM,
        );
    }
    report(failures);
}

#[test]
fn samples_to_fraction_matches_scipy() {
    let mut failures = Vec::new();
    let count = |samples: Option<Samples>| samples.map(|s| s.0);
    for row in rows_of("samples_to_fraction") {
        let q = row.argument.unwrap();
        // Counts are whole numbers: they must agree exactly.
        if let Some(alpha) = row.single_ema() {
            // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
            let actual = count(ema_samples_to_fraction(alpha, q));
            check(&mut failures, &row, "ema_samples_to_fraction", actual, 0.0);
        }
        if let Some(n) = row.single_ma() {
            // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
            let actual = count(ma_samples_to_fraction(n, q));
            check(&mut failures, &row, "ma_samples_to_fraction", actual, 0.0);
        }
        // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
        let actual = count(cascade_samples_to_fraction(&row.stages, q));
        check(
            &mut failures,
            &row,
            "cascade_samples_to_fraction",
            actual,
            0.0,
        );
    }
    report(failures);
}

#[test]
fn noise_ratio_matches_scipy() {
    let mut failures = Vec::new();
    for row in rows_of("noise_ratio") {
        if let Some(alpha) = row.single_ema() {
            // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
            let actual = Some(ema_noise_ratio(alpha));
            check(&mut failures, &row, "ema_noise_ratio", actual, CLOSED_FORM);
        }
        if let Some(n) = row.single_ma() {
            // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
            let actual = Some(ma_noise_ratio(n));
            check(&mut failures, &row, "ma_noise_ratio", actual, CLOSED_FORM);
        }
        let tolerance = if row.stages.len() == 1 {
            CLOSED_FORM
        } else {
            NUMERICAL
        };
        // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
        let actual = cascade_noise_ratio(&row.stages);
        check(
            &mut failures,
            &row,
            "cascade_noise_ratio",
            actual,
            tolerance,
        );
    }
    report(failures);
}

#[test]
fn figures_match_scipy() {
    // The same checks through `Figures`, which simulates all four fractions of a cascade in one
    // pass instead of one call each.
    let mut failures = Vec::new();
    for row in table() {
        let figures = Figures::for_stages(&row.stages, None);
        let tolerance = if row.stages.len() == 1 {
            CLOSED_FORM
        } else {
            NUMERICAL
        };
        match row.metric.as_str() {
            "cutoff" => {
                // Source: scipy.signal.freqz via tests/reference/generate_metrics_table.py
                let actual = figures.cutoff.map(|w| w.0);
                check(&mut failures, &row, "Figures.cutoff", actual, NUMERICAL);
            }
            "lag" => {
                // Source: scipy.signal.group_delay via tests/reference/generate_metrics_table.py
                let actual = Some(figures.lag.0);
                check(&mut failures, &row, "Figures.lag", actual, CLOSED_FORM);
            }
            "noise_ratio" => {
                // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
                let actual = figures.noise_ratio;
                check(
                    &mut failures,
                    &row,
                    "Figures.noise_ratio",
                    actual,
                    tolerance,
                );
            }
            "samples_to_fraction" => {
                let q = row.argument.unwrap();
                let settling = [figures.to_63, figures.to_90, figures.to_95, figures.to_99]
                    .into_iter()
                    .find(|settling| settling.fraction == q);
                if let Some(settling) = settling {
                    // Source: scipy.signal.lfilter via tests/reference/generate_metrics_table.py
                    let actual = settling.samples.map(|s| s.0);
                    check(&mut failures, &row, "Figures settling", actual, 0.0);
                }
            }
            _ => {}
        }
    }
    report(failures);
}

// ---------------------------------------------------------------------------------------------
// Rules of thumb of the trade. Their tolerances are those of the rules, not of the arithmetic.
// ---------------------------------------------------------------------------------------------

fn alpha(value: f64) -> Alpha {
    Alpha::new(value).unwrap()
}

#[test]
fn cutoff_is_about_one_over_tau_radians_per_sample() {
    for tau in [20.0, 50.0, 100.0, 1000.0] {
        let wc = ema_cutoff(alpha(1.0 / tau)).unwrap().0;
        // Common practice, no source.
        assert!(within(wc, 1.0 / tau, 0.03), "tau {tau}: cutoff {wc}");
    }
}

#[test]
fn time_constant_is_about_a_sixth_of_the_cutoff_period() {
    for tau in [20.0, 50.0, 100.0] {
        let wc = ema_cutoff(alpha(1.0 / tau)).unwrap().0;
        let period_in_samples = TAU / wc;
        // Common practice, no source (2 pi rounded to 6).
        assert!(within(period_in_samples / tau, 6.0, 0.06), "tau {tau}");
    }
}

#[test]
fn a_step_is_about_63_percent_done_after_one_time_constant() {
    for tau in [4u64, 10, 20, 100, 1000] {
        let reached = ema_step(alpha(1.0 / tau as f64), tau);
        // Common practice, no source.
        assert!((0.60..=0.70).contains(&reached), "tau {tau}: {reached}");
        let time_constant = ema_time_constant(alpha(1.0 / tau as f64)).0;
        // Common practice, no source.
        assert!(within(time_constant, tau as f64, 0.15), "tau {tau}");
    }
}

#[test]
fn a_step_is_past_90_percent_after_three_time_constants() {
    for tau in [2u64, 4, 10, 100, 1000] {
        // Common practice, no source.
        assert!(
            ema_step(alpha(1.0 / tau as f64), 3 * tau) > 0.90,
            "tau {tau}"
        );
    }
}

#[test]
fn settling_takes_three_to_five_time_constants() {
    for tau in [10.0, 100.0, 1000.0] {
        for q in [FRACTION_95, FRACTION_99] {
            let samples = ema_samples_to_fraction(alpha(1.0 / tau), q).unwrap().0;
            // Common practice, no source.
            assert!(
                (2.9 * tau..=5.0 * tau).contains(&samples),
                "tau {tau} q {q}: {samples}"
            );
        }
        let to_90 = ema_samples_to_fraction(alpha(1.0 / tau), FRACTION_90)
            .unwrap()
            .0;
        let to_63 = ema_samples_to_fraction(alpha(1.0 / tau), FRACTION_63)
            .unwrap()
            .0;
        // Common practice, no source.
        assert!(to_63 <= 1.01 * tau && to_90 <= 3.0 * tau, "tau {tau}");
    }
}

#[test]
fn gain_at_the_cutoff_is_about_seven_tenths() {
    for a in [0.01, 0.1, 0.5, 0.8] {
        let wc = ema_cutoff(alpha(a)).unwrap();
        // Common practice, no source.
        assert!(
            (ema_magnitude(alpha(a), wc) - 0.7).abs() < 0.01,
            "alpha {a}"
        );
    }
    for n in [2, 5, 16, 64] {
        let wc = ma_cutoff(n).unwrap();
        // Common practice, no source.
        assert!((ma_magnitude(n, wc) - 0.7).abs() < 0.01, "n {n}");
    }
}

#[test]
fn gain_falls_as_cutoff_over_frequency_for_small_alpha() {
    for a in [0.001, 0.01, 0.02] {
        let wc = ema_cutoff(alpha(a)).unwrap().0;
        // Common practice, no source: a sine at ten times the cutoff comes out at a tenth.
        let tenfold = ema_magnitude(alpha(a), RadPerSample(10.0 * wc));
        assert!(within(tenfold, 0.1, 0.05), "alpha {a}: {tenfold}");
        for ratio in [2.0, 4.0, 20.0] {
            let gain = ema_magnitude(alpha(a), RadPerSample(ratio * wc));
            // Common practice, no source: above twice the cutoff the gain is about fc / f.
            assert!(
                within(gain, 1.0 / ratio, 0.15),
                "alpha {a} ratio {ratio}: {gain}"
            );
        }
    }
}

#[test]
fn tau_two_and_a_half_halves_the_noise_and_eight_and_a_half_quarters_it() {
    // Common practice, no source.
    assert!(within(ema_noise_ratio(alpha(1.0 / 2.5)), 0.5, 1e-3));
    // Common practice, no source.
    assert!(within(ema_noise_ratio(alpha(1.0 / 8.5)), 0.25, 1e-3));
}

#[test]
fn quadrupling_a_long_tau_halves_the_noise() {
    for tau in [100.0, 1000.0] {
        let ratio = ema_noise_ratio(alpha(1.0 / tau)) / ema_noise_ratio(alpha(1.0 / (4.0 * tau)));
        // Common practice, no source.
        assert!(within(ratio, 2.0, 0.01), "tau {tau}: {ratio}");
    }
}

#[test]
fn lag_behind_a_ramp_is_tau_minus_one() {
    for tau in [1.0, 2.0, 8.0, 100.0] {
        // Common practice, no source.
        assert!(
            (ema_lag(alpha(1.0 / tau)).0 - (tau - 1.0)).abs() < 1e-9,
            "tau {tau}"
        );
    }
}

#[test]
fn moving_average_matches_ema_of_tau_n_plus_one_over_two() {
    for n in [3u32, 5, 9, 16, 64] {
        let tau = (f64::from(n) + 1.0) / 2.0;
        let ema = alpha(1.0 / tau);
        // Common practice, no source (N = 5 matches tau = 3).
        assert!(
            within(ma_noise_ratio(n), ema_noise_ratio(ema), 1e-3),
            "n {n}"
        );
        // Common practice, no source.
        assert!((ma_lag(n).0 - ema_lag(ema).0).abs() < 1e-9, "n {n}");
    }
}

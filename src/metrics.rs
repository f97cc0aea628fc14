//! The figures of a smoother: cutoff, lag, settling times and noise reduction of an
//! exponential moving average (EMA), of an N-sample moving average (MA), and of several of
//! them in series; plus the closed-form integer dead bands of the two common integer spellings.
//!
//! Everything here is a pure function of coefficients: this module knows nothing of syntax,
//! files, specs or rates it was not handed. Recognising a smoother in C and finding its rate is
//! left to the recogniser; turning figures into findings and text is left to the rules and to
//! `report`. Every function is total: NaN, zero and huge inputs give NaN or `None`, never a
//! panic or an endless loop.
//!
//! Conventions. Frequencies are in radians per sample, with Nyquist at pi. A count of samples
//! "to reach a fraction q" of a step counts the updates fed with the step, the first included:
//! an EMA with alpha = 1 reaches any fraction after 1 sample. A fraction counts as reached when
//! the remaining distance `1 - y` is at most `1 - q` give or take rounding, so that a decimal
//! tie such as alpha = 0.9 reaching 99.99 % after four updates is not lost to binary
//! arithmetic. The slack has two parts: two ulps of 1, absolute, for the rounding of `q`
//! itself (the double nearest 0.9999 leaves a distance 1.1e-13 short of 1e-4, relatively), and
//! a relative part for the rounding of the computation, 64 ulps for the closed forms and one
//! part in a billion for simulated responses, whose rounding grows with their length.

use crate::units::{Alpha, Hertz, RadPerSample, Samples, Seconds};
use std::f64::consts::{FRAC_1_SQRT_2, PI, TAU};

/// The fraction of a step reached after one continuous time constant, `1 - 1/e`.
pub const FRACTION_63: f64 = 1.0 - 1.0 / std::f64::consts::E;
/// Ninety percent of a step.
pub const FRACTION_90: f64 = 0.90;
/// Ninety-five percent of a step.
pub const FRACTION_95: f64 = 0.95;
/// Ninety-nine percent of a step.
pub const FRACTION_99: f64 = 0.99;

/// Absolute slack on the remaining distance for the rounding of the fraction itself: a
/// fraction in [0.5, 1) is stored within half an ulp of 1 of what was written.
const FRACTION_ROUNDING_SLACK: f64 = 2.0 * f64::EPSILON;

/// Relative slack on the remaining distance when a closed form decides that a fraction is
/// reached; see the module doc. It covers the few roundings of a closed form and stays below the
/// change of the remaining distance from one sample to the next for any moving average that
/// fits in a `u32` and any EMA with alpha above about 1e-14.
const CLOSED_FORM_TIE_TOLERANCE: f64 = 64.0 * f64::EPSILON;

/// The same slack for a simulated step response, whose rounding grows with every sample. It is
/// far below the change from one sample to the next of any response short enough to simulate.
const SIMULATION_TIE_TOLERANCE: f64 = 1e-9;

/// Most samples of an impulse or step response that a cascade simulation will compute. At about
/// sixteen million samples an EMA with alpha down to about 1e-6 still converges; slower
/// cascades get `None` instead of a long wait.
const RESPONSE_SAMPLE_CAP: usize = 1 << 24;

/// Longest impulse response of the moving averages of one cascade that a simulation will hold
/// in memory (eight megabytes of samples).
const MOVING_AVERAGE_RESPONSE_CAP: usize = 1 << 20;

/// A simulation of white-noise gain stops once the energy still to come is below this share of
/// the energy so far.
const ENERGY_TAIL_RATIO: f64 = 1e-15;

/// Bisection stops when the bracket no longer shrinks; this only bounds the loop.
const BISECTION_STEP_CAP: u32 = 2_000;

// ---------------------------------------------------------------------------------------------
// Exponential moving average: y += alpha * (u - y), H(z) = alpha / (1 - p z^-1), p = 1 - alpha.
// ---------------------------------------------------------------------------------------------

/// Linear gain `|H(w)|` of the EMA at angular frequency `w`.
///
/// The denominator `1 - 2 p cos w + p^2` is computed as `alpha^2 + 4 p sin^2(w / 2)`, the same
/// value without the cancellation that would eat the digits of a small alpha near DC.
pub fn ema_magnitude(alpha: Alpha, w: RadPerSample) -> f64 {
    let a = alpha.get();
    let half_sine = (w.0 / 2.0).sin();
    a / (a * a + 4.0 * alpha.pole() * half_sine * half_sine).sqrt()
}

/// The exact -3 dB frequency of the EMA, where `|H| = 1/sqrt(2)`, or `None` when the gain
/// stays above that all the way to Nyquist (alpha above `2 sqrt(2) - 2`, about 0.828, which
/// includes alpha = 1, a plain copy).
///
/// The cutoff solves `sin(wc / 2) = alpha / (2 sqrt(p))`. It is computed through the equivalent
/// `tan(wc / 2) = alpha / sqrt(4 p - alpha^2)`: it keeps the digits of a small alpha, needs no
/// clamp of a sine that rounding pushed past one, and the sign of `4 p - alpha^2` decides
/// existence at the boundary (where the cutoff is exactly pi).
pub fn ema_cutoff(alpha: Alpha) -> Option<RadPerSample> {
    let a = alpha.get();
    let p = alpha.pole();
    let radicand = 4.0 * p - a * a;
    if radicand < 0.0 || p == 0.0 {
        return None;
    }
    Some(RadPerSample(2.0 * a.atan2(radicand.sqrt())))
}

/// Group delay at DC, the lag behind a ramp: `p / alpha = tau - 1` samples (zero at alpha = 1).
pub fn ema_lag(alpha: Alpha) -> Samples {
    Samples(alpha.pole() / alpha.get())
}

/// The output after `n` updates fed with a unit step from rest: `1 - p^n`.
///
/// Computed as `-expm1(n ln(1 - alpha))` so that the first few updates of a small alpha keep
/// their digits.
pub fn ema_step(alpha: Alpha, n: u64) -> f64 {
    if n == 0 {
        return 0.0;
    }
    if alpha.get() == 1.0 {
        return 1.0;
    }
    -(n as f64 * (-alpha.get()).ln_1p()).exp_m1()
}

/// The number of updates after which a step first reaches fraction `q` (0 < q < 1), counting
/// the first update as 1: `ceil(ln(1 - q) / ln p)`, checked against the step response itself so
/// that an exact tie (alpha = 0.25, q = 0.578125 = 1 - 0.75^3: three updates) is not pushed to
/// the next count by the rounding of the logarithms. `None` for q outside (0, 1) or a count beyond what an `f64`
/// holds.
pub fn ema_samples_to_fraction(alpha: Alpha, q: f64) -> Option<Samples> {
    if !(q > 0.0 && q < 1.0) {
        return None;
    }
    if alpha.get() == 1.0 {
        return Some(Samples(1.0));
    }
    let log_pole = (-alpha.get()).ln_1p();
    let residual = |n: f64| (n * log_pole).exp();
    let mut count = ((-q).ln_1p() / log_pole).ceil().max(1.0);
    if !count.is_finite() {
        return None;
    }
    // The estimate is off by at most one either way; a few steps make the loop bounded even
    // where `count - 1.0 == count` for astronomically large counts.
    for _ in 0..4 {
        if count > 1.0 && fraction_reached(residual(count - 1.0), q, CLOSED_FORM_TIE_TOLERANCE) {
            count -= 1.0;
        } else {
            break;
        }
    }
    for _ in 0..4 {
        if fraction_reached(residual(count), q, CLOSED_FORM_TIE_TOLERANCE) {
            break;
        }
        count += 1.0;
    }
    Some(Samples(count))
}

/// The time constant of the continuous exponential that passes through the EMA's step
/// response, `-1 / ln p` samples (near `1/alpha - 1/2` for small alpha; zero at alpha = 1).
pub fn ema_time_constant(alpha: Alpha) -> Samples {
    if alpha.get() == 1.0 {
        return Samples(0.0);
    }
    Samples(-1.0 / (-alpha.get()).ln_1p())
}

/// Output over input standard deviation for white noise: `sqrt(alpha / (2 - alpha))`.
pub fn ema_noise_ratio(alpha: Alpha) -> f64 {
    let a = alpha.get();
    (a / (2.0 - a)).sqrt()
}

// ---------------------------------------------------------------------------------------------
// N-sample moving average (running sum over a ring buffer). A length of zero is no filter at
// all; every function answers NaN or `None` for it.
// ---------------------------------------------------------------------------------------------

/// Linear gain `|sin(N w / 2) / (N sin(w / 2))|` of the N-sample moving average, 1 at DC.
pub fn ma_magnitude(n: u32, w: RadPerSample) -> f64 {
    if n == 0 {
        return f64::NAN;
    }
    if n == 1 {
        return 1.0;
    }
    // The gain is even and 2 pi periodic; folding into [0, pi] leaves w = 0 as the only place
    // where the formula is 0 / 0, instead of every multiple of 2 pi computed inexactly.
    let folded = w.0.rem_euclid(TAU);
    let folded = if folded > PI { TAU - folded } else { folded };
    let denominator = f64::from(n) * (folded / 2.0).sin();
    if denominator == 0.0 {
        return 1.0;
    }
    ((f64::from(n) * folded / 2.0).sin() / denominator).abs()
}

/// The first -3 dB crossing of the N-sample moving average, by bisection on the main lobe
/// (below the first null at `2 pi / N`, where the gain falls monotonically from 1 to 0).
/// `None` for N = 1, which passes everything, and for N = 0.
pub fn ma_cutoff(n: u32) -> Option<RadPerSample> {
    if n < 2 {
        return None;
    }
    let first_null = TAU / f64::from(n);
    Some(RadPerSample(bisect_falling_gain(
        |w| ma_magnitude(n, RadPerSample(w)),
        0.0,
        first_null,
    )))
}

/// Group delay of the N-sample moving average, `(N - 1) / 2` samples.
pub fn ma_lag(n: u32) -> Samples {
    if n == 0 {
        return Samples(f64::NAN);
    }
    Samples((f64::from(n) - 1.0) / 2.0)
}

/// White-noise standard deviation ratio of the N-sample moving average, `1 / sqrt(N)`.
pub fn ma_noise_ratio(n: u32) -> f64 {
    if n == 0 {
        return f64::NAN;
    }
    1.0 / f64::from(n).sqrt()
}

/// Samples after which the moving average's step response, a ramp reaching 1 at sample N,
/// first reaches fraction `q`: `ceil(q N)`, with the tie rule of the module doc.
pub fn ma_samples_to_fraction(n: u32, q: f64) -> Option<Samples> {
    if n == 0 || !(q > 0.0 && q < 1.0) {
        return None;
    }
    let length = f64::from(n);
    let residual = |m: f64| (length - m) / length;
    let mut count = (q * length).ceil().clamp(1.0, length);
    for _ in 0..4 {
        if count > 1.0 && fraction_reached(residual(count - 1.0), q, CLOSED_FORM_TIE_TOLERANCE) {
            count -= 1.0;
        } else {
            break;
        }
    }
    for _ in 0..4 {
        if count >= length || fraction_reached(residual(count), q, CLOSED_FORM_TIE_TOLERANCE) {
            break;
        }
        count += 1.0;
    }
    Some(Samples(count))
}

// ---------------------------------------------------------------------------------------------
// Cascades: stages in series. An empty cascade is the identity (gain 1, no lag, no cutoff).
// ---------------------------------------------------------------------------------------------

/// One stage of a cascade of smoothers.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Stage {
    /// An exponential moving average with this factor.
    Ema(Alpha),
    /// A moving average over this many samples.
    MovingAverage(u32),
}

impl Stage {
    fn magnitude(self, w: RadPerSample) -> f64 {
        match self {
            Stage::Ema(alpha) => ema_magnitude(alpha, w),
            Stage::MovingAverage(n) => ma_magnitude(n, w),
        }
    }

    fn lag(self) -> Samples {
        match self {
            Stage::Ema(alpha) => ema_lag(alpha),
            Stage::MovingAverage(n) => ma_lag(n),
        }
    }
}

/// Linear gain of the stages in series: the product of their gains.
pub fn cascade_magnitude(stages: &[Stage], w: RadPerSample) -> f64 {
    stages.iter().map(|stage| stage.magnitude(w)).product()
}

/// The first -3 dB crossing of the cascade, or `None` when the gain stays above `1/sqrt(2)` up
/// to Nyquist (or a stage is a zero-length moving average).
///
/// Every EMA's gain falls monotonically over [0, pi] and every moving average's gain falls
/// monotonically over its main lobe, so the product falls monotonically up to the first null of
/// the longest moving average (or up to pi). The first crossing is therefore the only one in
/// that interval and plain bisection finds it.
pub fn cascade_cutoff(stages: &[Stage]) -> Option<RadPerSample> {
    let mut upper = PI;
    for stage in stages {
        if let Stage::MovingAverage(n) = *stage {
            if n == 0 {
                return None;
            }
            if n >= 2 {
                upper = upper.min(TAU / f64::from(n));
            }
        }
    }
    let gain = |w: f64| cascade_magnitude(stages, RadPerSample(w));
    let gain_at_upper = gain(upper);
    if gain_at_upper.is_nan() || gain_at_upper > FRAC_1_SQRT_2 {
        return None;
    }
    Some(RadPerSample(bisect_falling_gain(gain, 0.0, upper)))
}

/// Lag of the cascade behind a ramp: the sum of the stages' group delays at DC.
pub fn cascade_lag(stages: &[Stage]) -> Samples {
    Samples(stages.iter().map(|stage| stage.lag().0).sum())
}

/// White-noise standard deviation ratio of the cascade: the square root of the energy of its
/// impulse response.
///
/// A single stage uses its closed form. Two or more are simulated until the energy still to
/// come is below 1e-15 of the energy so far; `None` when that takes more than about sixteen
/// million samples, when the moving averages' combined response is longer than about a million
/// samples, or when a stage is a zero-length moving average.
pub fn cascade_noise_ratio(stages: &[Stage]) -> Option<f64> {
    match stages {
        [] => Some(1.0),
        [Stage::Ema(alpha)] => Some(ema_noise_ratio(*alpha)),
        [Stage::MovingAverage(0)] => None,
        [Stage::MovingAverage(n)] => Some(ma_noise_ratio(*n)),
        _ => simulated_noise_ratio(stages),
    }
}

/// Samples after which the cascade's step response first reaches fraction `q` (0 < q < 1),
/// counting the first sample as 1.
///
/// A single stage uses its closed form; two or more are simulated, with the same caps as
/// [`cascade_noise_ratio`], and `None` past them.
pub fn cascade_samples_to_fraction(stages: &[Stage], q: f64) -> Option<Samples> {
    if !(q > 0.0 && q < 1.0) {
        return None;
    }
    match stages {
        [] => Some(Samples(1.0)),
        [Stage::Ema(alpha)] => ema_samples_to_fraction(*alpha, q),
        [Stage::MovingAverage(n)] => ma_samples_to_fraction(*n, q),
        _ => simulated_samples_to_fractions(stages, &[q])
            .into_iter()
            .next()
            .flatten(),
    }
}

/// The cascade's output after each of the first `samples` updates fed with a unit step from
/// rest: index 0 holds the output after the first update.
///
/// A single stage uses its closed form and two or more are simulated exactly as
/// [`cascade_samples_to_fraction`] simulates them, so a curve drawn from this response crosses
/// each fraction at the sample the figures give. `None` for a zero-length moving average, for
/// moving averages whose combined response is longer than the simulation holds, or for more
/// samples than a simulation computes (about sixteen million).
pub fn cascade_step_response(stages: &[Stage], samples: usize) -> Option<Vec<f64>> {
    if samples > RESPONSE_SAMPLE_CAP {
        return None;
    }
    let counts = 1..=samples as u64;
    match stages {
        [] => Some(vec![1.0; samples]),
        [Stage::Ema(alpha)] => Some(counts.map(|n| ema_step(*alpha, n)).collect()),
        [Stage::MovingAverage(0)] => None,
        [Stage::MovingAverage(length)] => {
            let length = u64::from(*length);
            Some(
                counts
                    .map(|n| n.min(length) as f64 / length as f64)
                    .collect(),
            )
        }
        _ => {
            let (head, alphas) = split_cascade(stages)?;
            let mut states = vec![0.0; alphas.len()];
            let mut head_step = 0.0;
            let mut response = Vec::with_capacity(samples);
            for index in 0..samples {
                let input = match head.get(index) {
                    Some(sample) => {
                        head_step += sample;
                        head_step
                    }
                    None => 1.0,
                };
                response.push(run_emas(&alphas, &mut states, input));
            }
            Some(response)
        }
    }
}

// ---------------------------------------------------------------------------------------------
// All figures of one smoother at once.
// ---------------------------------------------------------------------------------------------

/// The time a step takes to reach one fraction, in samples and, when the rate is known, in
/// seconds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settling {
    /// The fraction of the step, one of the `FRACTION_*` constants.
    pub fraction: f64,
    /// Samples to first reach it, counting the first as 1; `None` when not computable.
    pub samples: Option<Samples>,
    /// The same in seconds; `None` without a rate.
    pub seconds: Option<Seconds>,
}

/// Every figure of a smoother (a single stage or a cascade), in samples and, when the update
/// rate is known, in hertz and seconds.
///
/// An event-driven smoother has no rate: its hertz and seconds fields stay `None`, and no rate
/// is ever made up for it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Figures {
    /// First -3 dB crossing; `None` when the gain stays above -3 dB up to Nyquist.
    pub cutoff: Option<RadPerSample>,
    /// The cutoff at the given rate.
    pub cutoff_hertz: Option<Hertz>,
    /// Lag behind a ramp (group delay at DC).
    pub lag: Samples,
    /// The lag at the given rate.
    pub lag_seconds: Option<Seconds>,
    /// Time to reach `1 - 1/e` (about 63.2 %) of a step.
    pub to_63: Settling,
    /// Time to reach 90 % of a step.
    pub to_90: Settling,
    /// Time to reach 95 % of a step.
    pub to_95: Settling,
    /// Time to reach 99 % of a step.
    pub to_99: Settling,
    /// White-noise standard deviation out over in; `None` when not computable.
    pub noise_ratio: Option<f64>,
    /// Continuous-equivalent time constant `-1 / ln p`, for a single EMA only.
    pub time_constant: Option<Samples>,
    /// The time constant at the given rate.
    pub time_constant_seconds: Option<Seconds>,
}

impl Figures {
    /// Computes the figures of `stages` in series (a single smoother is one stage). A `rate`
    /// that is not a positive finite number is treated as no rate, since nothing sensible
    /// could be said in hertz or seconds from it.
    pub fn for_stages(stages: &[Stage], rate: Option<Hertz>) -> Figures {
        let rate = rate.filter(|r| r.0.is_finite() && r.0 > 0.0);
        let in_seconds = |samples: Option<Samples>| match (samples, rate) {
            (Some(samples), Some(rate)) => Some(samples.to_seconds(rate)),
            _ => None,
        };

        let fractions = [FRACTION_63, FRACTION_90, FRACTION_95, FRACTION_99];
        // One simulation serves all four fractions when the cascade has to be simulated.
        let counts: Vec<Option<Samples>> = if stages.len() >= 2 {
            simulated_samples_to_fractions(stages, &fractions)
        } else {
            fractions
                .iter()
                .map(|&q| cascade_samples_to_fraction(stages, q))
                .collect()
        };
        let settling = |index: usize| {
            let samples = counts.get(index).copied().flatten();
            Settling {
                fraction: fractions[index],
                samples,
                seconds: in_seconds(samples),
            }
        };

        let cutoff = cascade_cutoff(stages);
        let lag = cascade_lag(stages);
        let time_constant = match stages {
            [Stage::Ema(alpha)] => Some(ema_time_constant(*alpha)),
            _ => None,
        };
        Figures {
            cutoff,
            cutoff_hertz: match (cutoff, rate) {
                (Some(cutoff), Some(rate)) => Some(cutoff.to_hertz(rate)),
                _ => None,
            },
            lag,
            lag_seconds: in_seconds(Some(lag)),
            to_63: settling(0),
            to_90: settling(1),
            to_95: settling(2),
            to_99: settling(3),
            noise_ratio: cascade_noise_ratio(stages),
            time_constant,
            time_constant_seconds: in_seconds(time_constant),
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Integer dead bands (closed forms).
// ---------------------------------------------------------------------------------------------

/// How far, in counts, `y += (u - y) / n` in signed integers can rest from a constant input:
/// `(below a rising input, above a falling input)` = `(n - 1, n - 1)`, because C division
/// truncates toward zero (C11 6.5.5) and the step is zero once `|u - y| < n`.
///
/// Dividing by zero is undefined in C; `n = 0` answers `(0, 0)` only to stay total, and callers
/// should not ask.
pub fn dead_band_truncating_division(n: u64) -> (u64, u64) {
    let band = n.saturating_sub(1);
    (band, band)
}

/// How far `y += (u - y) >> k` in signed integers can rest from a constant input:
/// `(below a rising input, above a falling input)` = `(2^k - 1, 0)`. GCC shifts negative values
/// arithmetically (GCC manual, "Integers implementation"), rounding toward minus infinity, so a
/// falling input is reached exactly while a rising one stops up to `2^k - 1` short. Shifts of
/// 64 bits or more saturate at `u64::MAX`.
pub fn dead_band_arithmetic_shift(k: u32) -> (u64, u64) {
    let band = match 1u64.checked_shl(k) {
        Some(power) => power - 1,
        None => u64::MAX,
    };
    (band, 0)
}

// ---------------------------------------------------------------------------------------------
// Private helpers.
// ---------------------------------------------------------------------------------------------

/// Whether a step response whose remaining distance to 1 is `residual` has reached `q`, with
/// `tolerance` as relative slack for the rounding of the computation.
fn fraction_reached(residual: f64, q: f64, tolerance: f64) -> bool {
    residual <= (1.0 - q) * (1.0 + tolerance) + FRACTION_ROUNDING_SLACK
}

/// Finds where a gain that falls monotonically from above `1/sqrt(2)` at `low` to at most
/// `1/sqrt(2)` at `high` crosses it, to the last bit the bracket allows.
fn bisect_falling_gain(gain: impl Fn(f64) -> f64, mut low: f64, mut high: f64) -> f64 {
    for _ in 0..BISECTION_STEP_CAP {
        let middle = low + (high - low) / 2.0;
        if middle <= low || middle >= high {
            break;
        }
        if gain(middle) > FRAC_1_SQRT_2 {
            low = middle;
        } else {
            high = middle;
        }
    }
    low + (high - low) / 2.0
}

/// The impulse response of the cascade's moving averages alone, and the factors of its EMAs.
///
/// The stages are linear and time invariant, so their order does not change the response:
/// running all moving averages first gives a finite sequence, after which only the EMAs are
/// left and their input is zero. `None` for a zero-length moving average or a response longer
/// than the cap.
fn split_cascade(stages: &[Stage]) -> Option<(Vec<f64>, Vec<f64>)> {
    let mut response = vec![1.0];
    let mut alphas = Vec::new();
    for stage in stages {
        match *stage {
            Stage::Ema(alpha) => alphas.push(alpha.get()),
            Stage::MovingAverage(0) => return None,
            Stage::MovingAverage(1) => {}
            Stage::MovingAverage(n) => {
                let n = usize::try_from(n).ok()?;
                let length = response.len().checked_add(n - 1)?;
                if length > MOVING_AVERAGE_RESPONSE_CAP {
                    return None;
                }
                // A running sum over the last n inputs, as the firmware's ring buffer keeps it.
                let mut output = Vec::with_capacity(length);
                let mut window_sum = 0.0;
                for index in 0..length {
                    window_sum += response.get(index).copied().unwrap_or(0.0);
                    if index >= n {
                        window_sum -= response.get(index - n).copied().unwrap_or(0.0);
                    }
                    output.push(window_sum / n as f64);
                }
                response = output;
            }
        }
    }
    Some((response, alphas))
}

/// Runs one sample through the EMA states in series and returns the last output.
fn run_emas(alphas: &[f64], states: &mut [f64], input: f64) -> f64 {
    let mut signal = input;
    for (state, alpha) in states.iter_mut().zip(alphas) {
        *state += alpha * (signal - *state);
        signal = *state;
    }
    signal
}

/// White-noise gain of a cascade by simulating its impulse response.
///
/// Each stage's impulse response (a boxcar, a geometric sequence) is log-concave, and so is
/// their convolution; the ratio of one sample to the one before therefore never grows, and once
/// the moving averages are done the energy still to come is at most a geometric series with
/// the current ratio. That bound is what decides when to stop.
fn simulated_noise_ratio(stages: &[Stage]) -> Option<f64> {
    let (head, alphas) = split_cascade(stages)?;
    // The response can fall no faster than the slowest EMA's pole, so a cascade that needs
    // more samples than the cap is known to do so before it starts.
    let slowest_log_pole = alphas
        .iter()
        .map(|a| (-a).ln_1p())
        .fold(f64::NEG_INFINITY, f64::max);
    if ENERGY_TAIL_RATIO.ln() / (2.0 * slowest_log_pole) > RESPONSE_SAMPLE_CAP as f64 {
        return None;
    }
    let mut states = vec![0.0; alphas.len()];
    let mut energy = 0.0;
    let mut previous = 0.0;
    for index in 0..RESPONSE_SAMPLE_CAP {
        let input = head.get(index).copied().unwrap_or(0.0);
        let output = run_emas(&alphas, &mut states, input);
        energy += output * output;
        if index >= head.len() {
            if output == 0.0 {
                return Some(energy.sqrt());
            }
            let ratio = output / previous;
            if ratio < 1.0 {
                let tail = output * output * ratio * ratio / (1.0 - ratio * ratio);
                if tail <= ENERGY_TAIL_RATIO * energy {
                    return Some(energy.sqrt());
                }
            }
        }
        previous = output;
    }
    None
}

/// Samples to first reach each fraction in `fractions` by simulating the cascade's step
/// response, in the same order. The response of stages with non-negative impulse responses
/// never falls, so the first sample at or past a fraction is the answer.
fn simulated_samples_to_fractions(stages: &[Stage], fractions: &[f64]) -> Vec<Option<Samples>> {
    let mut counts: Vec<Option<Samples>> = vec![None; fractions.len()];
    let Some((head, alphas)) = split_cascade(stages) else {
        return counts;
    };
    // A cascade's step response never runs ahead of its slowest stage's (the other stages only
    // average it over the past), so a fraction that stage reaches only past the cap is left out
    // before simulating.
    let slowest = alphas.iter().copied().fold(f64::INFINITY, f64::min);
    let beyond_cap = |q: f64| {
        Alpha::new(slowest)
            .and_then(|alpha| ema_samples_to_fraction(alpha, q))
            .is_none_or(|count| count.0 > RESPONSE_SAMPLE_CAP as f64)
    };
    let mut pending: Vec<usize> = (0..fractions.len())
        .filter(|&i| fractions[i] > 0.0 && fractions[i] < 1.0)
        .filter(|&i| alphas.is_empty() || !beyond_cap(fractions[i]))
        .collect();
    let mut states = vec![0.0; alphas.len()];
    // The moving averages' step response is the running sum of their impulse response, and
    // exactly 1 once that response is over.
    let mut head_step = 0.0;
    for index in 0..RESPONSE_SAMPLE_CAP {
        if pending.is_empty() {
            break;
        }
        let input = match head.get(index) {
            Some(sample) => {
                head_step += sample;
                head_step
            }
            None => 1.0,
        };
        let output = run_emas(&alphas, &mut states, input);
        pending.retain(|&i| {
            if fraction_reached(1.0 - output, fractions[i], SIMULATION_TIE_TOLERANCE) {
                counts[i] = Some(Samples(index as f64 + 1.0));
                false
            } else {
                true
            }
        });
    }
    counts
}

#[cfg(test)]
#[allow(
    clippy::unwrap_used,
    reason = "a missing value in a test should fail the test on the spot"
)]
mod tests {
    use super::*;

    fn alpha(value: f64) -> Alpha {
        Alpha::new(value).unwrap()
    }

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        (actual - expected).abs() <= relative * expected.abs()
    }

    /// `|H|^2` in the textbook form with the cosine, independent of the form used above.
    fn ema_power_textbook(a: f64, w: f64) -> f64 {
        let p = 1.0 - a;
        a * a / (1.0 - 2.0 * p * w.cos() + p * p)
    }

    #[test]
    fn ema_cutoff_has_half_power_in_the_textbook_form() {
        // Source: |H|^2 = alpha^2 / (1 - 2 p cos w + p^2) and cos wc = 1 - alpha^2 / (2 p),
        // textbook discrete first-order section, from memory.
        for a in [0.01, 0.1, 0.25, 0.5, 0.75, 0.8] {
            let wc = ema_cutoff(alpha(a)).unwrap().0;
            assert!(close(ema_power_textbook(a, wc), 0.5, 1e-12), "alpha {a}");
            let p = 1.0 - a;
            assert!(close(wc.cos(), 1.0 - a * a / (2.0 * p), 1e-12), "alpha {a}");
        }
    }

    #[test]
    fn ema_cutoff_keeps_digits_for_tiny_alpha() {
        // Source: series of 2 asin(alpha / (2 sqrt(1 - alpha))) = alpha + alpha^2 / 2 + ...,
        // hand computation; the cosine form would lose every digit at alpha = 1e-9.
        let wc = ema_cutoff(alpha(1e-9)).unwrap().0;
        assert!(close(wc, 1e-9 * (1.0 + 0.5e-9), 1e-15));
        let wc = ema_cutoff(alpha(1e-300)).unwrap().0;
        assert!(close(wc, 1e-300, 1e-15));
    }

    #[test]
    fn ema_cutoff_boundary_at_two_root_two_minus_two() {
        // Source: the gain at Nyquist is alpha / (2 - alpha), which is 1/sqrt(2) at
        // alpha = 2 sqrt(2) - 2 = 0.82842712474619009760... (hand computation). The doubles
        // 0.8284271247461901 and 0.8284271247461902 are the last below and the first above it
        // (checked in exact decimal arithmetic); so is the nearest double to the boundary.
        let boundary = 2.0 * std::f64::consts::SQRT_2 - 2.0;
        assert_eq!(ema_cutoff(alpha(boundary)), None);
        assert_eq!(ema_cutoff(alpha(0.828_427_124_746_190_2)), None);
        let wc = ema_cutoff(alpha(0.828_427_124_746_190_1)).unwrap().0;
        assert!(wc <= PI && wc > PI - 1e-6, "cutoff {wc}");
        assert!(ema_cutoff(alpha(0.82)).is_some());
        assert_eq!(ema_cutoff(alpha(0.83)), None);
    }

    #[test]
    fn ema_near_one_and_at_one_has_no_cutoff() {
        // Source: alpha = 1 is y = u, gain 1 at every frequency (definition).
        assert_eq!(ema_cutoff(alpha(1.0)), None);
        assert_eq!(ema_cutoff(alpha(1.0 - f64::EPSILON)), None);
        assert_eq!(ema_magnitude(alpha(1.0), RadPerSample(PI)), 1.0);
        assert_eq!(ema_lag(alpha(1.0)), Samples(0.0));
        assert_eq!(ema_step(alpha(1.0), 1), 1.0);
        assert_eq!(
            ema_samples_to_fraction(alpha(1.0), 0.99),
            Some(Samples(1.0))
        );
        assert_eq!(ema_time_constant(alpha(1.0)), Samples(0.0));
        assert_eq!(ema_noise_ratio(alpha(1.0)), 1.0);
    }

    #[test]
    fn ema_samples_to_fraction_exact_ties() {
        // Source: hand computation of 1 - p^n: 1 - 0.5^2 = 0.75, 1 - 0.1^2 = 0.99,
        // 1 - 0.5^3 = 0.875, 1 - 0.1 = 0.9, 1 - 0.75^3 = 0.578125, 1 - 0.4^3 = 0.936,
        // 1 - 0.1^4 = 0.9999. The last three are where a plain ceil of the logarithms is one
        // update late.
        assert_eq!(
            ema_samples_to_fraction(alpha(0.25), 0.578125),
            Some(Samples(3.0))
        );
        assert_eq!(
            ema_samples_to_fraction(alpha(0.6), 0.936),
            Some(Samples(3.0))
        );
        assert_eq!(
            ema_samples_to_fraction(alpha(0.9), 0.9999),
            Some(Samples(4.0))
        );
        assert_eq!(
            ema_samples_to_fraction(alpha(0.5), 0.75),
            Some(Samples(2.0))
        );
        assert_eq!(
            ema_samples_to_fraction(alpha(0.5), 0.875),
            Some(Samples(3.0))
        );
        assert_eq!(
            ema_samples_to_fraction(alpha(0.9), 0.99),
            Some(Samples(2.0))
        );
        assert_eq!(ema_samples_to_fraction(alpha(0.9), 0.9), Some(Samples(1.0)));
        // Just past a tie needs one more update.
        assert_eq!(
            ema_samples_to_fraction(alpha(0.5), 0.7501),
            Some(Samples(3.0))
        );
    }

    #[test]
    fn ema_samples_to_fraction_refuses_fractions_outside_the_open_interval() {
        // Source: a step response from rest starts at 0 and never reaches 1 (definition).
        for q in [0.0, 1.0, -0.1, 1.5, f64::NAN, f64::INFINITY] {
            assert_eq!(ema_samples_to_fraction(alpha(0.1), q), None, "q {q}");
            assert_eq!(ma_samples_to_fraction(4, q), None, "q {q}");
            assert_eq!(
                cascade_samples_to_fraction(&[Stage::Ema(alpha(0.1))], q),
                None
            );
        }
    }

    #[test]
    fn ema_samples_to_fraction_of_a_vanishing_alpha_stays_total() {
        // Source: ln(0.01) / ln(1 - 1e-300) = 4.6e300 (hand computation); the smallest
        // subnormal alpha gives a count no f64 holds.
        let count = ema_samples_to_fraction(alpha(1e-300), 0.99).unwrap().0;
        assert!(close(count, 0.01f64.ln() / -1e-300, 1e-12));
        assert_eq!(
            ema_samples_to_fraction(alpha(f64::from_bits(1)), 0.99),
            None
        );
    }

    #[test]
    fn ema_step_matches_repeated_update() {
        // Source: running y += alpha (u - y) itself from y = 0 with u = 1.
        let a = 0.05;
        let mut y: f64 = 0.0;
        for n in 1..=200u64 {
            y += a * (1.0 - y);
            assert!(close(ema_step(alpha(a), n), y, 1e-12), "n {n}");
        }
        assert_eq!(ema_step(alpha(a), 0), 0.0);
        assert_eq!(ema_step(alpha(a), u64::MAX), 1.0);
    }

    #[test]
    fn ema_time_constant_series_for_small_alpha() {
        // Source: -1 / ln(1 - a) = 1/a - 1/2 - a/12 - ..., Taylor series, from memory.
        for a in [1e-3, 1e-2, 0.05] {
            let tau = ema_time_constant(alpha(a)).0;
            assert!(
                (tau - (1.0 / a - 0.5 - a / 12.0)).abs() < a * a,
                "alpha {a}"
            );
        }
    }

    #[test]
    fn magnitudes_at_nan_are_nan_not_panics() {
        // Source: IEEE 754 propagation of NaN; the point is that nothing panics.
        assert!(ema_magnitude(alpha(0.1), RadPerSample(f64::NAN)).is_nan());
        assert!(ma_magnitude(8, RadPerSample(f64::NAN)).is_nan());
        assert!(ma_magnitude(0, RadPerSample(1.0)).is_nan());
        assert!(cascade_magnitude(&[Stage::MovingAverage(0)], RadPerSample(1.0)).is_nan());
    }

    #[test]
    fn ma_two_cuts_at_a_quarter_of_the_sample_rate() {
        // Source: |H| = |cos(w / 2)| for N = 2, which is 1/sqrt(2) at w = pi / 2 (hand
        // computation).
        let wc = ma_cutoff(2).unwrap().0;
        assert!(close(wc, PI / 2.0, 1e-15));
    }

    #[test]
    fn ma_gain_is_one_at_dc_and_zero_at_its_nulls() {
        // Source: a moving average of N passes DC and has nulls at multiples of 2 pi / N
        // (textbook, from memory).
        assert_eq!(ma_magnitude(8, RadPerSample(0.0)), 1.0);
        assert_eq!(ma_magnitude(8, RadPerSample(TAU)), 1.0);
        assert!(ma_magnitude(8, RadPerSample(TAU / 8.0)) < 1e-15);
        assert!(ma_magnitude(8, RadPerSample(3.0 * TAU / 8.0)) < 1e-15);
        assert_eq!(ma_magnitude(1, RadPerSample(2.0)), 1.0);
    }

    #[test]
    fn ma_edge_lengths_stay_total() {
        // Source: a zero-length average is undefined and N = 1 is a copy (definition); the
        // point for u32::MAX is that nothing panics or loops.
        assert_eq!(ma_cutoff(0), None);
        assert_eq!(ma_cutoff(1), None);
        assert!(ma_lag(0).0.is_nan());
        assert!(ma_noise_ratio(0).is_nan());
        assert_eq!(ma_samples_to_fraction(0, 0.5), None);
        let wc = ma_cutoff(u32::MAX).unwrap().0;
        assert!(wc > 0.0 && wc < TAU / f64::from(u32::MAX));
        assert_eq!(ma_samples_to_fraction(1, 0.99), Some(Samples(1.0)));
        assert_eq!(
            ma_samples_to_fraction(u32::MAX, 0.5),
            Some(Samples((f64::from(u32::MAX) / 2.0).ceil()))
        );
    }

    #[test]
    fn ma_samples_to_fraction_is_the_ramp_crossing() {
        // Source: hand computation; the step response of a 10-sample average is k / 10 after k
        // samples, so 90 % is reached at 9 even though 0.9 is not exact in binary.
        assert_eq!(ma_samples_to_fraction(10, 0.9), Some(Samples(9.0)));
        assert_eq!(ma_samples_to_fraction(10, 0.91), Some(Samples(10.0)));
        assert_eq!(ma_samples_to_fraction(4, 0.25), Some(Samples(1.0)));
        assert_eq!(ma_samples_to_fraction(4, 0.26), Some(Samples(2.0)));
    }

    #[test]
    fn cascade_of_one_stage_matches_the_stage() {
        // Source: a cascade of one stage is that stage (definition); the simulated paths are
        // checked against the closed forms they bypass for single stages.
        for a in [0.02, 0.3, 0.8, 1.0] {
            let stages = [Stage::Ema(alpha(a))];
            assert_eq!(
                cascade_cutoff(&stages).is_some(),
                ema_cutoff(alpha(a)).is_some()
            );
            if let (Some(c), Some(e)) = (cascade_cutoff(&stages), ema_cutoff(alpha(a))) {
                assert!(close(c.0, e.0, 1e-12), "alpha {a}");
            }
            let simulated = simulated_noise_ratio(&stages).unwrap();
            assert!(
                close(simulated, ema_noise_ratio(alpha(a)), 1e-9),
                "alpha {a}"
            );
            for q in [FRACTION_63, 0.9, 0.95, 0.99] {
                let simulated = simulated_samples_to_fractions(&stages, &[q])[0];
                assert_eq!(
                    simulated,
                    ema_samples_to_fraction(alpha(a), q),
                    "alpha {a} q {q}"
                );
            }
        }
        for n in [1, 2, 5, 16] {
            let stages = [Stage::MovingAverage(n)];
            let simulated = simulated_noise_ratio(&stages).unwrap();
            assert!(close(simulated, ma_noise_ratio(n), 1e-12), "n {n}");
            for q in [FRACTION_63, 0.9, 0.95, 0.99] {
                let simulated = simulated_samples_to_fractions(&stages, &[q])[0];
                assert_eq!(simulated, ma_samples_to_fraction(n, q), "n {n} q {q}");
            }
        }
    }

    #[test]
    fn cascade_of_two_identical_emas_has_a_known_noise_gain() {
        // Source: sum over n of ((n + 1) a^2 p^n)^2 = a^4 (1 + p^2) / (1 - p^2)^3, the energy of
        // a double pole (hand computation with the series of 1 / (1 - x)^3).
        let a: f64 = 0.1;
        let p = 1.0 - a;
        let expected = (a.powi(4) * (1.0 + p * p) / (1.0 - p * p).powi(3)).sqrt();
        let stages = [Stage::Ema(alpha(a)), Stage::Ema(alpha(a))];
        assert!(close(cascade_noise_ratio(&stages).unwrap(), expected, 1e-9));
    }

    #[test]
    fn cascade_of_two_emas_cuts_where_each_gives_a_fourth_root_of_a_half() {
        // Source: two equal stages give |H|^2 = 1/2 where each gives 2^-1/4 (hand computation
        // with the textbook form).
        let a = 0.2;
        let stages = [Stage::Ema(alpha(a)), Stage::Ema(alpha(a))];
        let wc = cascade_cutoff(&stages).unwrap().0;
        assert!(close(ema_power_textbook(a, wc), FRAC_1_SQRT_2, 1e-12));
    }

    #[test]
    fn cascade_edges_stay_total() {
        // Source: an empty cascade is the identity (definition); the rest only must not panic
        // nor loop.
        assert_eq!(cascade_magnitude(&[], RadPerSample(1.0)), 1.0);
        assert_eq!(cascade_cutoff(&[]), None);
        assert_eq!(cascade_lag(&[]), Samples(0.0));
        assert_eq!(cascade_noise_ratio(&[]), Some(1.0));
        assert_eq!(cascade_samples_to_fraction(&[], 0.5), Some(Samples(1.0)));
        let broken = [Stage::Ema(alpha(0.1)), Stage::MovingAverage(0)];
        assert_eq!(cascade_cutoff(&broken), None);
        assert_eq!(cascade_noise_ratio(&broken), None);
        assert_eq!(cascade_samples_to_fraction(&broken, 0.5), None);
        assert!(cascade_lag(&broken).0.is_nan());
        let too_long = [Stage::MovingAverage(u32::MAX), Stage::MovingAverage(3)];
        assert_eq!(cascade_noise_ratio(&too_long), None);
        assert_eq!(cascade_samples_to_fraction(&too_long, 0.5), None);
        assert!(cascade_cutoff(&too_long).is_some());
        let too_slow = [Stage::Ema(alpha(1e-12)), Stage::Ema(alpha(0.5))];
        assert_eq!(cascade_noise_ratio(&too_slow), None);
        assert_eq!(cascade_samples_to_fraction(&too_slow, 0.5), None);
        let passthrough = [Stage::Ema(alpha(1.0)), Stage::MovingAverage(1)];
        assert_eq!(cascade_cutoff(&passthrough), None);
        assert_eq!(cascade_noise_ratio(&passthrough), Some(1.0));
        assert_eq!(
            cascade_samples_to_fraction(&passthrough, 0.99),
            Some(Samples(1.0))
        );
    }

    #[test]
    fn step_response_crosses_each_fraction_at_the_counted_sample() {
        // Source: running y += alpha (u - y) and the running sum of a ring buffer by hand for
        // the single stages; for the cascades, the counts of `cascade_samples_to_fraction`,
        // which the simulation shares (a curve drawn from one must agree with the other).
        let cascades: [&[Stage]; 4] = [
            &[Stage::Ema(alpha(0.2))],
            &[Stage::MovingAverage(8)],
            &[Stage::Ema(alpha(0.2)), Stage::Ema(alpha(0.2))],
            &[Stage::MovingAverage(4), Stage::Ema(alpha(0.1))],
        ];
        for stages in cascades {
            let response = cascade_step_response(stages, 200).unwrap();
            assert_eq!(response.len(), 200);
            for q in [FRACTION_63, FRACTION_90, FRACTION_95] {
                let first = response.iter().position(|y| *y >= q).unwrap() + 1;
                let counted = cascade_samples_to_fraction(stages, q).unwrap().0;
                assert_eq!(first as f64, counted, "{stages:?} q {q}");
            }
        }
        let mut y: f64 = 0.0;
        let ema = cascade_step_response(&[Stage::Ema(alpha(0.2))], 5).unwrap();
        for value in ema {
            y += 0.2 * (1.0 - y);
            assert!(close(value, y, 1e-12));
        }
        assert_eq!(
            cascade_step_response(&[Stage::MovingAverage(4)], 6).unwrap(),
            vec![0.25, 0.5, 0.75, 1.0, 1.0, 1.0]
        );
        assert_eq!(cascade_step_response(&[Stage::MovingAverage(0)], 4), None);
        assert_eq!(cascade_step_response(&[], 2).unwrap(), vec![1.0, 1.0]);
        assert_eq!(
            cascade_step_response(&[Stage::Ema(alpha(0.5))], RESPONSE_SAMPLE_CAP + 1),
            None
        );
    }

    #[test]
    fn figures_without_a_rate_stay_in_samples() {
        // Source: an event-driven update has no rate, so no hertz or seconds exist for it
        // (definition); the samples figures are checked against hand values for alpha = 0.5.
        let figures = Figures::for_stages(&[Stage::Ema(alpha(0.5))], None);
        assert!(figures.cutoff.is_some());
        assert_eq!(figures.cutoff_hertz, None);
        assert_eq!(figures.lag, Samples(1.0));
        assert_eq!(figures.lag_seconds, None);
        assert_eq!(figures.to_90.samples, Some(Samples(4.0)));
        assert_eq!(figures.to_90.seconds, None);
        assert_eq!(figures.time_constant_seconds, None);
        for bad_rate in [0.0, -10.0, f64::NAN, f64::INFINITY] {
            let figures = Figures::for_stages(&[Stage::Ema(alpha(0.5))], Some(Hertz(bad_rate)));
            assert_eq!(figures.cutoff_hertz, None, "rate {bad_rate}");
            assert_eq!(figures.lag_seconds, None, "rate {bad_rate}");
        }
    }

    #[test]
    fn figures_with_a_rate_convert_every_figure() {
        // Source: hand computation for alpha = 0.5 at 100 Hz: lag 1 sample = 10 ms, 90 % after
        // 4 samples (1 - 0.5^4 = 0.9375) = 40 ms, cutoff 2 atan(0.5 / sqrt(1.75)) rad/sample.
        let figures = Figures::for_stages(&[Stage::Ema(alpha(0.5))], Some(Hertz(100.0)));
        assert_eq!(figures.lag_seconds, Some(Seconds(0.01)));
        assert_eq!(figures.to_90.seconds, Some(Seconds(0.04)));
        let hertz = figures.cutoff_hertz.unwrap().0;
        let expected = 2.0 * (0.5f64 / 1.75f64.sqrt()).atan() * 100.0 / TAU;
        assert!(close(hertz, expected, 1e-12));
        let cascade = Figures::for_stages(
            &[Stage::Ema(alpha(0.5)), Stage::MovingAverage(4)],
            Some(Hertz(100.0)),
        );
        assert_eq!(cascade.time_constant, None);
        assert!(cascade.to_99.seconds.is_some());
        assert_eq!(cascade.lag_seconds, Some(Seconds(0.025)));
    }

    /// The states at which `update(u - y)` leaves `y` where it is, for an input `u`, as offsets
    /// `y - u` in `-span..=span`.
    fn resting_offsets(update: impl Fn(i64) -> i64, span: i64) -> Vec<i64> {
        let input = 1000;
        (-span..=span)
            .filter(|offset| {
                let y = input + offset;
                update(input - y) == 0
            })
            .collect()
    }

    #[test]
    fn truncating_division_rests_n_minus_one_either_side() {
        // Source: C11 6.5.5 (integer division truncates toward zero), which Rust's `/` on
        // i64 shares: the states where `y += (u - y) / n` stops moving are exactly those from
        // `u - rising` to `u + falling`.
        for n in [2i64, 3, 8, 16, 100] {
            let (rising, falling) = dead_band_truncating_division(n as u64);
            let resting = resting_offsets(|difference| difference / n, 3 * n);
            let expected: Vec<i64> = (-(rising as i64)..=falling as i64).collect();
            assert_eq!(resting, expected, "n {n}");
        }
        assert_eq!(dead_band_truncating_division(16), (15, 15));
        assert_eq!(dead_band_truncating_division(1), (0, 0));
        assert_eq!(dead_band_truncating_division(0), (0, 0));
    }

    #[test]
    fn arithmetic_shift_rests_below_a_rising_input_only() {
        // Source: GCC manual, "Integers implementation": >> of a negative signed value shifts
        // arithmetically, as Rust's `>>` on i64 does: the states where `y += (u - y) >> k`
        // stops moving are exactly those from `u - rising` to `u + falling`.
        for k in [1u32, 3, 4, 8] {
            let (rising, falling) = dead_band_arithmetic_shift(k);
            let resting = resting_offsets(|difference| difference >> k, 3 << k);
            let expected: Vec<i64> = (-(rising as i64)..=falling as i64).collect();
            assert_eq!(resting, expected, "k {k}");
        }
        assert_eq!(dead_band_arithmetic_shift(0), (0, 0));
        assert_eq!(dead_band_arithmetic_shift(63), ((1u64 << 63) - 1, 0));
        assert_eq!(dead_band_arithmetic_shift(64), (u64::MAX, 0));
        assert_eq!(dead_band_arithmetic_shift(u32::MAX), (u64::MAX, 0));
    }
}

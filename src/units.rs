//! Typed quantities for the figures of a smoother: the smoothing factor `Alpha`, and
//! frequencies, durations and counts that each say which unit they are in.
//!
//! A bare `f64` could be hertz or radians per sample, seconds or samples; mixing them up is the
//! very mistake tauscan exists to find in firmware, so the core never passes one around.
//! This module only holds the values and converts between units given a sample rate. Reading
//! units that a person writes ("10 ms", "50 Hz") is left to the spec module, and deciding which
//! rate applies to a smoother is left to the recogniser.

use std::f64::consts::TAU;

/// The smoothing factor of a first-order recursive smoother, `y += alpha * (u - y)`.
///
/// Only values in (0, 1] are smoothers: zero never moves, one passes the input through, and
/// anything outside that range grows or oscillates. Holding the range in the type lets the
/// metrics assume it instead of checking it in every formula.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Alpha(f64);

impl Alpha {
    /// Returns `None` unless `value` is in (0, 1]; NaN is refused as well.
    pub fn new(value: f64) -> Option<Alpha> {
        // Written as a positive test so that NaN, which fails every comparison, is refused.
        if value > 0.0 && value <= 1.0 {
            Some(Alpha(value))
        } else {
            None
        }
    }

    /// The factor itself, in (0, 1].
    pub fn get(self) -> f64 {
        self.0
    }

    /// The pole `p = 1 - alpha` of `H(z) = alpha / (1 - p z^-1)`, in [0, 1).
    pub fn pole(self) -> f64 {
        1.0 - self.0
    }
}

/// A frequency in hertz (cycles per second): a sample rate or a cutoff at a known rate.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Hertz(pub f64);

impl Hertz {
    /// The duration of one cycle. A rate of zero gives an infinite period rather than a panic;
    /// whoever holds a zero rate has to decide what it means.
    pub fn period(self) -> Seconds {
        Seconds(1.0 / self.0)
    }
}

/// A duration in seconds.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Seconds(pub f64);

/// A duration or delay counted in samples (updates of the smoother). Not always whole: a
/// group delay of 2.5 samples is a real figure.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Samples(pub f64);

impl Samples {
    /// The same duration in seconds when the update runs `rate` times a second.
    pub fn to_seconds(self, rate: Hertz) -> Seconds {
        Seconds(self.0 / rate.0)
    }
}

/// An angular frequency in radians per sample: the unit in which a filter's response is a
/// property of its coefficients alone, with Nyquist at pi.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct RadPerSample(pub f64);

impl RadPerSample {
    /// The same frequency in hertz at sample rate `rate`: `w * fs / (2 pi)`.
    pub fn to_hertz(self, rate: Hertz) -> Hertz {
        // Dividing first keeps Nyquist exact: pi / (2 pi) is exactly one half in binary.
        Hertz(self.0 / TAU * rate.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    #[test]
    fn alpha_accepts_only_the_half_open_unit_interval() {
        // Source: definition of the first-order smoother, 0 < alpha <= 1 (textbook discrete
        // first-order section, from memory).
        assert_eq!(Alpha::new(1.0).map(Alpha::get), Some(1.0));
        assert_eq!(Alpha::new(0.125).map(Alpha::get), Some(0.125));
        assert_eq!(
            Alpha::new(f64::MIN_POSITIVE).map(Alpha::get),
            Some(f64::MIN_POSITIVE)
        );
        assert_eq!(Alpha::new(0.0), None);
        assert_eq!(Alpha::new(-0.5), None);
        assert_eq!(Alpha::new(1.0 + f64::EPSILON), None);
        assert_eq!(Alpha::new(f64::NAN), None);
        assert_eq!(Alpha::new(f64::INFINITY), None);
    }

    #[test]
    fn pole_is_one_minus_alpha() {
        // Source: H(z) = alpha / (1 - (1 - alpha) z^-1), hand computation.
        assert_eq!(Alpha::new(0.25).map(Alpha::pole), Some(0.75));
        assert_eq!(Alpha::new(1.0).map(Alpha::pole), Some(0.0));
    }

    #[test]
    fn nyquist_in_radians_is_half_the_rate_in_hertz() {
        // Source: w = 2 pi f / fs, so pi rad/sample is fs / 2 (textbook sampling, from memory).
        assert_eq!(RadPerSample(PI).to_hertz(Hertz(1000.0)), Hertz(500.0));
        assert_eq!(RadPerSample(0.0).to_hertz(Hertz(1000.0)), Hertz(0.0));
    }

    #[test]
    fn samples_at_a_rate_become_seconds() {
        // Source: hand computation, 250 samples at 1 kHz last a quarter of a second.
        assert_eq!(Samples(250.0).to_seconds(Hertz(1000.0)), Seconds(0.25));
        assert_eq!(Hertz(50.0).period(), Seconds(0.02));
    }

    #[test]
    fn zero_rate_gives_infinity_not_a_panic() {
        // Source: IEEE 754 division by zero gives infinity; the point is that nothing panics.
        assert_eq!(Hertz(0.0).period(), Seconds(f64::INFINITY));
        assert_eq!(Samples(3.0).to_seconds(Hertz(0.0)), Seconds(f64::INFINITY));
    }
}

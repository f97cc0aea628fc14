//! Quantities as a person writes them: `"1 kHz"`, `"500Hz"`, `"2 ms"`, `"12 dB"`.
//!
//! Parsed once at the boundary (command line, spec) into typed values; nothing past this
//! module sees the strings. A rate may also be given as a period (`"10 ms"` is 100 Hz),
//! since that is how loop timing is often written.

use crate::units::{Hertz, Seconds};
use std::fmt;

#[derive(Debug, Clone, PartialEq, Eq)]
pub struct QuantityError {
    pub text: String,
    pub expected: &'static str,
}

impl fmt::Display for QuantityError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "`{}` is not {}", self.text, self.expected)
    }
}

impl std::error::Error for QuantityError {}

fn split_number(text: &str) -> Option<(f64, String)> {
    let t = text.trim();
    let end = t
        .char_indices()
        .find(|(i, c)| {
            !(c.is_ascii_digit()
                || *c == '.'
                || ((*c == 'e' || *c == 'E')
                    && t[i + 1..]
                        .starts_with(|n: char| n.is_ascii_digit() || n == '-' || n == '+'))
                || ((*c == '-' || *c == '+') && (*i == 0 || t[..*i].ends_with(['e', 'E']))))
        })
        .map(|(i, _)| i)
        .unwrap_or(t.len());
    let value: f64 = t[..end].parse().ok()?;
    Some((value, t[end..].trim().to_string()))
}

/// A rate: a frequency (`Hz`, `kHz`, `MHz`) or a period (`s`, `ms`, `us`), which is turned
/// into its frequency. A bare number is refused: `10` could be 10 Hz or a 10 ms period.
pub fn parse_rate(text: &str) -> Result<Hertz, QuantityError> {
    let err = || QuantityError {
        text: text.to_string(),
        expected: "a rate with its unit, such as \"1 kHz\", \"500 Hz\" or \"2 ms\"",
    };
    let (value, unit) = split_number(text).ok_or_else(err)?;
    let hz = match unit.to_ascii_lowercase().as_str() {
        "hz" => value,
        "khz" => value * 1e3,
        "mhz" if unit.starts_with('M') => value * 1e6,
        "s" | "sec" => 1.0 / value,
        "ms" => 1.0 / (value * 1e-3),
        "us" | "µs" => 1.0 / (value * 1e-6),
        _ => return Err(err()),
    };
    if hz.is_finite() && hz > 0.0 {
        Ok(Hertz(hz))
    } else {
        Err(err())
    }
}

/// A frequency (a cutoff): `Hz`, `kHz`, `mHz`; a bare number is Hz. Unlike a rate, a
/// period is not accepted: a cutoff is not written as one.
pub fn parse_frequency(text: &str) -> Result<Hertz, QuantityError> {
    let err = || QuantityError {
        text: text.to_string(),
        expected: "a frequency such as \"5 Hz\" or \"1.2 kHz\"",
    };
    let (value, unit) = split_number(text).ok_or_else(err)?;
    let hz = match unit.as_str() {
        "" | "Hz" | "hz" => value,
        "kHz" | "khz" => value * 1e3,
        "mHz" => value * 1e-3,
        _ => return Err(err()),
    };
    if hz.is_finite() && hz > 0.0 {
        Ok(Hertz(hz))
    } else {
        Err(err())
    }
}

/// A fraction of a step: `0.95`, `"95 %"`.
pub fn parse_fraction(text: &str) -> Result<f64, QuantityError> {
    let err = || QuantityError {
        text: text.to_string(),
        expected: "a fraction such as 0.95 or \"95 %\"",
    };
    let (value, unit) = split_number(text).ok_or_else(err)?;
    let f = match unit.as_str() {
        "" => value,
        "%" => value / 100.0,
        _ => return Err(err()),
    };
    if f > 0.0 && f < 1.0 {
        Ok(f)
    } else {
        Err(err())
    }
}

/// A noise reduction, as the largest allowed output-over-input amplitude ratio: `"12 dB"`
/// (a reduction by 12 dB is a ratio of 10^(-12/20)), or `"x4"` / `4` (a quarter).
pub fn parse_reduction(text: &str) -> Result<f64, QuantityError> {
    let err = || QuantityError {
        text: text.to_string(),
        expected: "a noise reduction such as \"12 dB\" or 4 (times)",
    };
    let t = text.trim();
    let t = t.strip_prefix('x').unwrap_or(t);
    let (value, unit) = split_number(t).ok_or_else(err)?;
    let ratio = match unit.as_str() {
        "dB" | "db" if value > 0.0 => 10f64.powf(-value / 20.0),
        "" | "x" | "times" if value > 1.0 => 1.0 / value,
        _ => return Err(err()),
    };
    if ratio.is_finite() && ratio > 0.0 && ratio < 1.0 {
        Ok(ratio)
    } else {
        Err(err())
    }
}

/// A count of ADC or integer steps: `3`, `"3 counts"`, `"3 LSB"`.
pub fn parse_counts(text: &str) -> Result<f64, QuantityError> {
    let err = || QuantityError {
        text: text.to_string(),
        expected: "a number of counts such as 3 or \"3 counts\"",
    };
    let (value, unit) = split_number(text).ok_or_else(err)?;
    match unit.as_str() {
        "" | "counts" | "count" | "LSB" | "lsb" if value >= 0.0 && value.is_finite() => Ok(value),
        _ => Err(err()),
    }
}

/// A duration: `s`, `ms`, `us`.
pub fn parse_duration(text: &str) -> Result<Seconds, QuantityError> {
    let err = || QuantityError {
        text: text.to_string(),
        expected: "a duration such as \"200 ms\" or \"1.5 s\"",
    };
    let (value, unit) = split_number(text).ok_or_else(err)?;
    let s = match unit.as_str() {
        "s" | "sec" => value,
        "ms" => value * 1e-3,
        "us" | "µs" => value * 1e-6,
        "min" => value * 60.0,
        _ => return Err(err()),
    };
    if s.is_finite() && s >= 0.0 {
        Ok(Seconds(s))
    } else {
        Err(err())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rates_in_the_usual_spellings() {
        assert_eq!(parse_rate("1kHz"), Ok(Hertz(1000.0)));
        assert_eq!(parse_rate("1 kHz"), Ok(Hertz(1000.0)));
        assert_eq!(parse_rate("500 Hz"), Ok(Hertz(500.0)));
        // A bare number has no unit to say whether it is a rate or a period.
        assert!(parse_rate("500").is_err());
        assert_eq!(parse_rate("2 ms"), Ok(Hertz(500.0)));
        assert_eq!(parse_rate("2.5e3 Hz"), Ok(Hertz(2500.0)));
        assert!(parse_rate("fast").is_err());
        assert!(parse_rate("0 Hz").is_err());
        assert!(parse_rate("-5 Hz").is_err());
        assert!(parse_rate("5 furlongs").is_err());
    }

    #[test]
    fn frequencies_fractions_reductions_counts() {
        assert_eq!(parse_frequency("5 Hz"), Ok(Hertz(5.0)));
        assert_eq!(parse_frequency("1.2 kHz"), Ok(Hertz(1200.0)));
        assert!(parse_frequency("10 ms").is_err());
        assert_eq!(parse_fraction("95 %"), Ok(0.95));
        assert_eq!(parse_fraction("0.9"), Ok(0.9));
        assert!(parse_fraction("1.5").is_err());
        // Source: the definition of the decibel for amplitudes, 20 log10(ratio).
        assert!((parse_reduction("20 dB").unwrap() - 0.1).abs() < 1e-12);
        assert_eq!(parse_reduction("4"), Ok(0.25));
        assert!(parse_reduction("-3 dB").is_err());
        assert_eq!(parse_counts("3 counts"), Ok(3.0));
        assert!(parse_counts("3 volts").is_err());
    }

    #[test]
    fn durations() {
        assert_eq!(parse_duration("200 ms"), Ok(Seconds(0.2)));
        assert!(parse_duration("200").is_err());
    }
}

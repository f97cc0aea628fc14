//! What constant would meet a requirement: the `help:` line of a finding.
//!
//! Inverts the exact first-order formulas of `metrics` (cutoff, lag, noise ratio) to the
//! alpha that meets a target, then says it in the smoother's own spelling: a shift
//! `>> k` or a divisor `/ N` for integer forms, alpha for float ones, with the figure the
//! suggested constant really gives (it is rounded to what the spelling can express).

use crate::metrics;
use crate::recognise::{Arithmetic, Form, Smoother};
use crate::units::{Alpha, Hertz};

/// The alpha whose exact -3 dB point is `fc` at rate `fs`:
/// from sin(wc/2) = alpha / (2 sqrt(1 - alpha)), alpha = 2 s (sqrt(s^2 + 1) - s), s = sin(wc/2).
pub fn alpha_for_cutoff(fc: f64, fs: f64) -> Option<f64> {
    let wc = std::f64::consts::TAU * fc / fs;
    if !(wc > 0.0 && wc < std::f64::consts::PI) {
        return None;
    }
    let s = (wc / 2.0).sin();
    let a = 2.0 * s * ((s * s + 1.0).sqrt() - s);
    (a > 0.0 && a <= 1.0).then_some(a)
}

/// The alpha whose delay to a ramp is `lag` samples: lag = (1 - a) / a.
pub fn alpha_for_lag(lag_samples: f64) -> Option<f64> {
    (lag_samples >= 0.0).then(|| 1.0 / (1.0 + lag_samples))
}

/// The alpha whose white-noise ratio is `r`: r^2 = a / (2 - a).
pub fn alpha_for_noise_ratio(r: f64) -> Option<f64> {
    (r > 0.0 && r < 1.0).then(|| 2.0 * r * r / (1.0 + r * r))
}

/// The alpha that first reaches fraction `q` of a step within `n` updates.
pub fn alpha_for_settle(q: f64, n: f64) -> Option<f64> {
    (n >= 1.0 && q > 0.0 && q < 1.0).then(|| 1.0 - (1.0 - q).powf(1.0 / n.floor()))
}

fn cutoff_text(alpha: f64, rate: Option<f64>) -> String {
    let Some(a) = Alpha::new(alpha) else {
        return String::new();
    };
    match (metrics::ema_cutoff(a), rate) {
        (Some(w), Some(fs)) => format!(
            "cutoff {}",
            crate::report::table::hertz(w.to_hertz(Hertz(fs)).0)
        ),
        (Some(w), None) => format!(
            "cutoff {} fs",
            crate::report::table::sig3(w.0 / std::f64::consts::TAU)
        ),
        (None, _) => "no cutoff below Nyquist".into(),
    }
}

/// The constant nearest `alpha` in the smoother's own spelling, with what it gives.
pub fn suggest(s: &Smoother, alpha: f64, rate: Option<f64>) -> String {
    let sig = crate::report::table::sig3;
    if s.form == Form::MovingAverage {
        let n = (2.0 / alpha - 1.0).round().max(1.0);
        return format!("a window of N = {n} (about the same smoothing)");
    }
    let integer = s.arithmetic != Arithmetic::Float;
    let shifts = s.update_expr.as_ref().is_some_and(|e| {
        let mut found = false;
        e.walk(&mut |x| {
            found |= matches!(
                x.kind,
                crate::ir::ExprKind::Binary {
                    op: crate::ir::BinaryOp::Shr,
                    ..
                } | crate::ir::ExprKind::Assign {
                    op: Some(crate::ir::BinaryOp::Shr),
                    ..
                }
            );
        });
        found
    });
    if integer && shifts && s.arithmetic == Arithmetic::Integer {
        let k = (1.0 / alpha).log2().round().clamp(0.0, 30.0);
        let a = 2f64.powi(-(k as i32));
        return format!(">> {k} (alpha = {}, {})", sig(a), cutoff_text(a, rate));
    }
    if integer && s.arithmetic == Arithmetic::Integer {
        let n = (1.0 / alpha).round().max(1.0);
        return format!(
            "/ {n} (alpha = {}, {})",
            sig(1.0 / n),
            cutoff_text(1.0 / n, rate)
        );
    }
    format!("alpha = {} ({})", sig(alpha), cutoff_text(alpha, rate))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::{Alpha, RadPerSample};

    #[test]
    fn inverting_the_cutoff_gives_back_the_alpha() {
        // Source: the exact -3 dB formula of the first-order section, checked against
        // scipy in tests/metrics_reference.rs; here its inverse must round-trip.
        for alpha in [0.001, 0.0309, 0.125, 0.5, 0.8] {
            let w = metrics::ema_cutoff(Alpha::new(alpha).unwrap()).unwrap();
            let fc = w.to_hertz(Hertz(1000.0)).0;
            let back = alpha_for_cutoff(fc, 1000.0).unwrap();
            assert!((back - alpha).abs() < 1e-12, "{alpha} -> {back}");
        }
        let _ = RadPerSample(0.0);
    }

    #[test]
    fn lag_noise_settle_inverses() {
        let a = alpha_for_lag(7.0).unwrap();
        assert!((metrics::ema_lag(Alpha::new(a).unwrap()).0 - 7.0).abs() < 1e-12);
        let a = alpha_for_noise_ratio(0.25).unwrap();
        assert!((metrics::ema_noise_ratio(Alpha::new(a).unwrap()) - 0.25).abs() < 1e-12);
        let a = alpha_for_settle(0.95, 20.0).unwrap();
        let n = metrics::ema_samples_to_fraction(Alpha::new(a).unwrap(), 0.95).unwrap();
        assert!(n.0 <= 20.0);
    }
}

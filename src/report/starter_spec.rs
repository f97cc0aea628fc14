//! The starter spec of `tauscan init`: every smoother held to its present figures within a
//! tolerance, so an inherited code base can be locked down first and tightened later.
//!
//! Requirements are written only where a figure is known: cutoff and lag need a rate,
//! noise reduction needs a known coefficient, the dead band an integer form. The bounds
//! are widened a little past the tolerance where rounding to four digits could otherwise
//! make the present code fail its own starter spec.

use crate::report::table::hertz;
use crate::scan::Scan;

fn quoted(text: &str) -> String {
    // A JSON string is a valid YAML double-quoted scalar.
    serde_json::to_string(text).unwrap_or_else(|_| "\"?\"".into())
}

fn four(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return "0".into();
    }
    let magnitude = v.abs().log10().floor() as i32;
    let decimals = (3 - magnitude).clamp(0, 9) as usize;
    let text = format!("{v:.decimals$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

fn seconds(v: f64) -> String {
    if v < 1.0 {
        format!("{} ms", four(v * 1e3))
    } else {
        format!("{} s", four(v))
    }
}

pub fn starter_spec(scan: &Scan, tolerance: f64) -> String {
    let ids = scan.ids();
    let mut out = String::new();
    out.push_str(&format!(
        "# tauscan spec, written by `tauscan init` from the figures the code has today\n\
         # (each held within {} %). Review it, tighten it to the product's real requirements,\n\
         # and keep it beside the code. Every key is described in tauscan's README.\n#\n\
         # Name the entry functions (interrupts, tasks) and the rates they run at, so every\n\
         # smoother's figures are in Hz and seconds:\n\
         # rates:\n#   - {{ function: control_isr, rate: \"1 kHz\" }}\n#   - {{ function: ui_task, period: \"10 ms\" }}\n\n",
        four(tolerance * 100.0)
    ));
    if scan.recognition.smoothers.is_empty() {
        out.push_str("smoothers: []\n");
        return out;
    }
    out.push_str("smoothers:\n");
    let slack = 1e-3;
    for ((s, f), id) in scan
        .recognition
        .smoothers
        .iter()
        .zip(&scan.figures)
        .zip(&ids)
    {
        out.push_str(&format!("  - match: {{ id: {} }}\n", quoted(id)));
        let mut lines = Vec::new();
        if let Some(own) = &f.own {
            if let Some(fc) = own.cutoff_hertz {
                let lo = fc.0 * (1.0 - tolerance) * (1.0 - slack);
                let hi = fc.0 * (1.0 + tolerance) * (1.0 + slack);
                lines.push(format!(
                    "cutoff: {{ min: \"{} Hz\", max: \"{} Hz\" }}    # now {}",
                    four(lo),
                    four(hi),
                    hertz(fc.0)
                ));
            }
            if let Some(lag) = own.lag_seconds {
                if lag.0 > 0.0 {
                    lines.push(format!(
                        "max_lag: \"{}\"",
                        seconds(lag.0 * (1.0 + tolerance) * (1.0 + slack))
                    ));
                }
            }
            if let Some(ratio) = own.noise_ratio {
                let db = -20.0 * ratio.log10();
                if db > 0.01 {
                    lines.push(format!(
                        "min_noise_reduction: \"{} dB\"",
                        four(db * (1.0 - tolerance) * (1.0 - slack))
                    ));
                }
            }
        }
        if let Some(band) = s.dead_band {
            lines.push(format!(
                "max_dead_band: \"{} counts\"",
                band.rising.max(band.falling)
            ));
        }
        if lines.is_empty() {
            out.push_str(
                "    # no figure is known yet for this smoother (its coefficient or rate)\n",
            );
            continue;
        }
        out.push_str("    requires:\n");
        for l in lines {
            out.push_str(&format!("      {l}\n"));
        }
    }
    out
}

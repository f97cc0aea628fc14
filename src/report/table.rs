//! The terminal table (`--format table`, the default): one row per smoother, aligned,
//! with figures in Hz and seconds where the rate is known and in samples where it is not.
//!
//! Columns: where, function, state, form and arithmetic, coefficient, rate, cutoff, lag,
//! time to 63/90/95/99 %, noise ratio, DC gain, dead band (rising/falling counts). A row's rate
//! source and coefficient chain are in the JSON; the table stays one line per smoother.

use super::neutral;
use crate::context::RateKind;
use crate::recognise::{Coefficient, Form};
use crate::scan::Scan;

/// Three significant digits, no exponent for everyday magnitudes.
pub fn sig3(v: f64) -> String {
    if !v.is_finite() {
        return "?".into();
    }
    if v == 0.0 {
        return "0".into();
    }
    let magnitude = v.abs().log10().floor() as i32;
    let decimals = (2 - magnitude).clamp(0, 6) as usize;
    let text = format!("{v:.decimals$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

pub fn hertz(v: f64) -> String {
    // Round first: 999.99 Hz reads as 1 kHz, as people write it.
    if sig3(v).parse::<f64>().unwrap_or(v) >= 1e3 {
        format!("{} kHz", sig3(v / 1e3))
    } else {
        format!("{} Hz", sig3(v))
    }
}

pub fn seconds(v: f64) -> String {
    if v == 0.0 {
        "0 s".into()
    } else if v < 1e-3 {
        format!("{} us", sig3(v * 1e6))
    } else if v < 1.0 {
        format!("{} ms", sig3(v * 1e3))
    } else {
        format!("{} s", sig3(v))
    }
}

/// Time to 63, 90, 95 and 99 % of a step: in seconds with a rate, else in samples.
fn settling(f: &crate::metrics::Figures) -> String {
    let marks = [f.to_63, f.to_90, f.to_95, f.to_99];
    if marks.iter().all(|m| m.seconds.is_some()) {
        let values: Vec<f64> = marks
            .iter()
            .filter_map(|m| m.seconds.map(|s| s.0))
            .collect();
        let largest = values.iter().cloned().fold(0.0, f64::max);
        let (factor, unit) = if largest < 1.0 {
            (1e3, "ms")
        } else {
            (1.0, "s")
        };
        let parts: Vec<String> = values.iter().map(|v| sig3(v * factor)).collect();
        return format!("{} {unit}", parts.join("/"));
    }
    let parts: Vec<String> = marks
        .iter()
        .map(|m| m.samples.map(|n| sig3(n.0)).unwrap_or_else(|| "?".into()))
        .collect();
    format!("{} smp", parts.join("/"))
}

fn coefficient(s: &crate::recognise::Smoother) -> String {
    if s.form == Form::MovingAverage {
        return s
            .window
            .map(|n| format!("N={n}"))
            .unwrap_or_else(|| "N=?".into());
    }
    match &s.alpha {
        Coefficient::Known(a) => {
            if *a > 0.0 {
                format!("a={} (tau {})", sig3(*a), sig3(1.0 / a))
            } else {
                format!("a={}", sig3(*a))
            }
        }
        Coefficient::Adaptive { depends_on, .. } => {
            match s.design.as_ref().and_then(|d| d.brief()) {
                Some(brief) => format!("adaptive ({depends_on}; {brief})"),
                None => format!("adaptive ({depends_on})"),
            }
        }
        Coefficient::Unknown { .. } => "unknown".into(),
    }
}

/// The RATE cell: the rate the update runs at (`run`, from the spec or `--rate`) and the
/// rate its coefficient was designed for (`design`, from its own constants), both when
/// they differ; what may make the running rate another one, in brackets.
pub fn rate_cell(s: &crate::recognise::Smoother) -> String {
    let running = crate::report::json::running_rate(s);
    let design = crate::report::json::design_rate(s);
    let mut text = match (running, design) {
        (Some(r), Some(d)) if (r - d).abs() > 1e-6 * r.abs() => {
            format!("{} run, {} design", hertz(r), hertz(d))
        }
        (Some(r), _) => format!("{} run", hertz(r)),
        (None, Some(d)) => format!("{} design", hertz(d)),
        (None, None) => match s.rate.kind {
            RateKind::Adaptive => "adaptive".into(),
            RateKind::Event => "per event".into(),
            _ if s.code_rate.is_some() && s.rate.source.is_some() => "ambiguous".into(),
            _ => "?".into(),
        },
    };
    if s.rate.doubts.iter().any(|d| d.starts_with("partial")) {
        text.push_str(" (partial)");
    } else if !s.rate.doubts.is_empty() {
        text.push_str(" (pointer?)");
    }
    text
}

pub fn render(scan: &Scan) -> String {
    let headers = [
        "LOCATION",
        "FUNCTION",
        "STATE",
        "FORM",
        "COEFFICIENT",
        "RATE",
        "CUTOFF",
        "LAG",
        "TO 63/90/95/99%",
        "NOISE",
        "DC",
        "DEAD BAND",
    ];
    let mut rows: Vec<Vec<String>> = Vec::new();
    for (s, f) in scan.recognition.smoothers.iter().zip(&scan.figures) {
        let own = f.own.as_ref();
        let rate = rate_cell(s);
        let cutoff = match own {
            None => "-".into(),
            Some(x) => match (x.cutoff, x.cutoff_hertz) {
                (_, Some(hz)) => hertz(hz.0),
                (Some(w), None) => format!("{} fs", sig3(w.0 / std::f64::consts::TAU)),
                (None, _) => "none<Nyq".into(),
            },
        };
        let lag = match own {
            None => "-".into(),
            Some(x) => match x.lag_seconds {
                Some(t) => seconds(t.0),
                None => format!("{} smp", sig3(x.lag.0)),
            },
        };
        let settle = own.map(settling).unwrap_or_else(|| "-".into());
        let noise = own
            .and_then(|x| x.noise_ratio)
            .map(sig3)
            .unwrap_or_else(|| "-".into());
        let dc = s.dc_gain.map(sig3).unwrap_or_else(|| "?".into());
        let band = match (s.dead_band, s.dead_band_nonnegative) {
            (Some(d), Some(nn)) => format!(
                "+{}/-{} (>=0: +{}/-{})",
                d.rising, d.falling, nn.rising, nn.falling
            ),
            (Some(d), None) => format!("+{}/-{}", d.rising, d.falling),
            (None, _) => "-".into(),
        };
        let location = format!("{}:{}", scan.program.path(s.span.file), s.span.line);
        let mut coefficient_text = coefficient(s);
        if s.instance_count > 0 && s.alpha.value().is_none() {
            // A filter function's own update: each call below has its coefficient.
            coefficient_text = format!(
                "per call ({} instance{})",
                s.instance_count,
                if s.instance_count == 1 { "" } else { "s" }
            );
        }
        if !s.variants.is_empty() {
            // Other `#if` branches give other values: say so, the JSON lists them.
            coefficient_text.push_str(&format!(" +{} #if", s.variants.len()));
        }
        let form = format!("{} {}", s.form.name(), s.arithmetic.name());
        let function = match (&s.function_ref, &s.macro_name) {
            (None, Some(m)) => format!("#define {m}"),
            _ => s.function.clone(),
        };
        rows.push(vec![
            neutral(&location),
            neutral(&function),
            neutral(&s.state),
            form,
            neutral(&coefficient_text),
            rate,
            cutoff,
            lag,
            settle,
            noise,
            dc,
            band,
        ]);
        if let Some((stages, fig)) = &f.cascade {
            let cut = match (fig.cutoff_hertz, fig.cutoff) {
                (Some(hz), _) => hertz(hz.0),
                (None, Some(w)) => format!("{} fs", sig3(w.0 / std::f64::consts::TAU)),
                _ => "none<Nyq".into(),
            };
            let lag = match fig.lag_seconds {
                Some(t) => seconds(t.0),
                None => format!("{} smp", sig3(fig.lag.0)),
            };
            let settle = settling(fig);
            rows.push(vec![
                String::new(),
                String::new(),
                format!("  cascade of {}", stages.len()),
                "combined".into(),
                String::new(),
                String::new(),
                cut,
                lag,
                settle,
                fig.noise_ratio.map(sig3).unwrap_or_else(|| "-".into()),
                String::new(),
                String::new(),
            ]);
        }
    }
    let mut widths: Vec<usize> = headers.iter().map(|h| h.chars().count()).collect();
    for row in &rows {
        for (i, cell) in row.iter().enumerate() {
            widths[i] = widths[i].max(cell.chars().count());
        }
    }
    let mut out = String::new();
    let line = |cells: &[String], out: &mut String| {
        let mut text = String::new();
        for (i, cell) in cells.iter().enumerate() {
            if i > 0 {
                text.push_str("  ");
            }
            let pad = widths[i].saturating_sub(cell.chars().count());
            text.push_str(cell);
            text.push_str(&" ".repeat(pad));
        }
        out.push_str(text.trim_end());
        out.push('\n');
    };
    line(
        &headers.iter().map(|h| h.to_string()).collect::<Vec<_>>(),
        &mut out,
    );
    for row in &rows {
        line(row, &mut out);
    }
    let count = scan.recognition.smoothers.len();
    let files = scan.program.files.len();
    out.push_str(&format!(
        "\n{count} smoother{} in {files} file{}. Figures in samples where the rate is unknown (fs = the update rate).\n",
        if count == 1 { "" } else { "s" },
        if files == 1 { "" } else { "s" }
    ));
    out.push_str(
        "RATE: run = the rate the update runs at (spec rates carried down the call graph, or --rate); design = the rate its coefficient's constants assume. Figures use run, else design.\n",
    );
    // What may make a running rate another one, said under the table.
    for s in &scan.recognition.smoothers {
        for doubt in &s.rate.doubts {
            out.push_str(&format!(
                "{}:{}: {}\n",
                neutral(scan.program.path(s.span.file)),
                s.span.line,
                neutral(doubt)
            ));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_read_naturally() {
        assert_eq!(sig3(4.9712), "4.97");
        assert_eq!(sig3(0.0309), "0.0309");
        assert_eq!(sig3(1234.6), "1235");
        assert_eq!(hertz(1500.0), "1.5 kHz");
        assert_eq!(seconds(0.014), "14 ms");
        assert_eq!(seconds(2.5), "2.5 s");
    }
}

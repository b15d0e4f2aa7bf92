//! Report writers: the only part of the crate that knows output formats.
//!
//! A finished run ([`RunResult`]) and the study it came from are bundled in a
//! [`ReportContext`]; each format implements [`ReportWriter`] and writes the context to any
//! `std::io::Write`:
//!
//! - [`summary::Summary`]: the human-readable text report, ranked findings first;
//! - [`json::JsonReport`]: one pretty-printed JSON object with the keys of the domain
//!   contract (section 9), byte-reproducible for a given scenario;
//! - [`timeseries::TimeseriesWriter`]: not a [`ReportWriter`] but an engine
//!   [`crate::engine::Observer`] that writes one CSV row per interval while the run goes.
//!
//! - [`resonance`]: the tables, CSV curves and JSON of `bankstep resonance`.
//!
//! The ranking of findings, shared by the text and JSON reports, lives in [`findings`].
//! The small helpers at the bottom of this file format numbers, durations and step sets
//! the same way in every human-facing output.

pub mod findings;
pub mod json;
pub mod resonance;
pub mod summary;
pub mod timeseries;

pub use findings::{Finding, Severity};
pub use json::JsonReport;
pub use summary::Summary;
pub use timeseries::TimeseriesWriter;

use crate::engine::RunResult;
use crate::scenario::{LoadSpec, Scenario};
use crate::study::Study;
use std::io::Write;

/// Everything a report writer needs: the study (scenario and simulation settings) and the
/// result of its run.
#[derive(Debug, Clone, Copy)]
pub struct ReportContext<'a> {
    /// The study that was run.
    pub study: &'a Study,
    /// The result of the run.
    pub result: &'a RunResult,
}

impl<'a> ReportContext<'a> {
    /// Bundles a study and its result.
    pub fn new(study: &'a Study, result: &'a RunResult) -> Self {
        ReportContext { study, result }
    }

    /// The scenario of the study.
    pub fn scenario(&self) -> &'a Scenario {
        &self.study.scenario
    }

    /// The scenario's file name without its folder, as shown in reports (so that a report
    /// does not depend on where the study was run from).
    pub fn scenario_file(&self) -> String {
        file_name(&self.study.scenario.path)
    }

    /// A short description of the load source: `synthetic` or the CSV file name.
    pub fn load_source(&self) -> String {
        match &self.study.scenario.load {
            LoadSpec::Csv { path, .. } => file_name(path),
            LoadSpec::Synthetic(_) => "synthetic".to_string(),
        }
    }

    /// Smallest switched step, kvar (the smallest step of all if none is switched).
    pub fn smallest_switched_kvar(&self) -> f64 {
        crate::bank::smallest_switched_kvar(&self.study.scenario.steps)
    }
}

/// Errors raised while writing a report.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// The output could not be written.
    #[error("cannot write the report: {0}")]
    Io(#[from] std::io::Error),
    /// The report could not be encoded as JSON.
    #[error("cannot encode the report as JSON: {0}")]
    Json(#[from] serde_json::Error),
}

impl ReportError {
    /// True when the reader of the output went away (a closed pipe), which a command line
    /// treats as a normal end rather than a failure.
    pub fn is_broken_pipe(&self) -> bool {
        match self {
            ReportError::Io(e) => e.kind() == std::io::ErrorKind::BrokenPipe,
            ReportError::Json(e) => e.io_error_kind() == Some(std::io::ErrorKind::BrokenPipe),
        }
    }
}

/// A report format.
pub trait ReportWriter {
    /// Writes the report of `ctx` to `out`.
    fn write(&self, ctx: &ReportContext<'_>, out: &mut dyn Write) -> Result<(), ReportError>;
}

/// The last component of a path, or the whole path if it has none.
pub(crate) fn file_name(path: &std::path::Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string())
}

/// Inserts thousands separators into the integer part of a formatted number.
fn group(text: &str) -> String {
    let (sign, rest) = match text.strip_prefix('-') {
        Some(r) => ("-", r),
        None => ("", text),
    };
    let (int, frac) = match rest.find('.') {
        Some(i) => rest.split_at(i),
        None => (rest, ""),
    };
    let mut out = String::with_capacity(text.len() + int.len() / 3);
    out.push_str(sign);
    for (i, c) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    out.push_str(frac);
    out
}

/// A number with `decimals` decimals and thousands separators, e.g. `12,345.6`.
pub(crate) fn num(x: f64, decimals: usize) -> String {
    if !x.is_finite() {
        return "n/a".to_string();
    }
    let s = format!("{x:.decimals$}");
    // Avoid printing `-0.0`.
    let s = if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    };
    group(&s)
}

/// A count with thousands separators, e.g. `100,000`.
pub(crate) fn count(n: u64) -> String {
    group(&n.to_string())
}

/// An extrapolated quantity rounded to three significant figures, e.g. `47,600` or `2.13`.
pub(crate) fn approx(x: f64) -> String {
    if !x.is_finite() {
        return "n/a".to_string();
    }
    let a = x.abs();
    if a == 0.0 {
        "0".to_string()
    } else if a >= 1000.0 {
        let mag = 10f64.powi(a.log10().floor() as i32 - 2);
        num((x / mag).round() * mag, 0)
    } else if a >= 100.0 {
        num(x, 0)
    } else if a >= 10.0 {
        num(x, 1)
    } else {
        num(x, 2)
    }
}

/// Years to a rated life: one decimal below 10 years, else three significant figures.
pub(crate) fn years_text(y: f64) -> String {
    if y < 10.0 {
        num(y, 1)
    } else {
        approx(y)
    }
}

/// A share of run time (0..1) as a percentage with its unit, e.g. `38 %` or `4.2 %`.
pub(crate) fn pct(share: f64) -> String {
    let p = share * 100.0;
    if p == 0.0 {
        "0 %".to_string()
    } else if p < 10.0 {
        format!("{} %", num(p, 1))
    } else {
        format!("{} %", num(p, 0))
    }
}

/// A duration in words with its unit: `45 s`, `41 min`, `3.5 h`, `31 h`, `2.5 days`.
pub(crate) fn duration(s: f64) -> String {
    if !s.is_finite() {
        "n/a".to_string()
    } else if s < 120.0 {
        format!("{} s", num(s, 0))
    } else if s < 7200.0 {
        format!("{} min", num(s / 60.0, 0))
    } else if s < 36_000.0 {
        format!("{} h", num(s / 3600.0, 1))
    } else if s < 3.0 * 86_400.0 {
        format!("{} h", num(s / 3600.0, 0))
    } else {
        format!("{} days", num(s / 86_400.0, 1))
    }
}

/// A set of step numbers joined by `+`, e.g. `1+2+3`; `none` for the empty set.
pub(crate) fn steps_label(steps: &[usize]) -> String {
    if steps.is_empty() {
        return "none".to_string();
    }
    let mut s = String::with_capacity(steps.len() * 3);
    for (i, n) in steps.iter().enumerate() {
        if i > 0 {
            s.push('+');
        }
        s.push_str(&n.to_string());
    }
    s
}

/// A harmonic order in words: `5th`, `11th`, `23rd`; a non-integer order as `order 4.5`.
pub(crate) fn harmonic_name(h: f64) -> String {
    let r = h.round();
    if (h - r).abs() > 1e-9 || r < 1.0 {
        return format!("order {} harmonic", num(h, 1));
    }
    let n = r as u64;
    let suffix = match (n % 10, n % 100) {
        (_, 11..=13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{n}{suffix} harmonic")
}

/// Wraps `text` to 90 columns, every line starting with `indent`, and appends it to `t`.
pub(crate) fn wrap_plain(t: &mut String, indent: &str, text: &str) {
    let mut line = String::from(indent);
    for word in text.split_whitespace() {
        let empty = line.len() == indent.len();
        if !empty && line.chars().count() + 1 + word.chars().count() > 90 {
            t.push_str(&line);
            t.push('\n');
            line = String::from(indent);
        }
        if line.len() > indent.len() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if line.len() > indent.len() {
        t.push_str(&line);
        t.push('\n');
    }
}

/// The caution printed wherever a report recommends a change to hardware.
pub const HARDWARE_CAUTION: &str = "Caution: capacitors hold their charge after they are \
switched off. Isolate the bank and discharge it (wait at least the discharge time, then \
verify with a meter) before touching it. Changes to steps, reactors or wiring are for \
qualified persons, to local codes and licensed practice. Resonance can damage capacitors, \
fuses and drives: have a harmonic study confirm it before acting on it.";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_have_separators_and_units() {
        assert_eq!(count(100_000), "100,000");
        assert_eq!(count(12), "12");
        assert_eq!(num(1234.56, 1), "1,234.6");
        assert_eq!(num(-0.01, 1), "0.0");
        assert_eq!(num(-1234.0, 0), "-1,234");
        assert_eq!(approx(47_632.0), "47,600");
        assert_eq!(approx(2.134), "2.13");
        assert_eq!(pct(0.38), "38 %");
        assert_eq!(pct(0.042), "4.2 %");
        assert_eq!(duration(45.0), "45 s");
        assert_eq!(duration(41.0 * 60.0), "41 min");
        assert_eq!(duration(31.0 * 3600.0), "31 h");
        assert_eq!(duration(3.0 * 86_400.0), "3.0 days");
        assert_eq!(steps_label(&[1, 2, 3]), "1+2+3");
        assert_eq!(steps_label(&[]), "none");
        assert_eq!(harmonic_name(5.0), "5th harmonic");
        assert_eq!(harmonic_name(23.0), "23rd harmonic");
        assert_eq!(harmonic_name(11.0), "11th harmonic");
        assert_eq!(harmonic_name(4.5), "order 4.5 harmonic");
    }
}

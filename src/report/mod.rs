//! Report writers: the only part of the crate that knows output formats.
//!
//! A finished run ([`RunResult`]) and the study it came from are bundled in a
//! [`ReportContext`]; each format implements [`ReportWriter`] and writes the context to any
//! `std::io::Write`:
//!
//! - [`summary::Summary`]: the human-readable text report, ranked findings first;
//! - [`json::JsonReport`]: one pretty-printed JSON object with the keys the README's
//!   "JSON report" section promises, byte-reproducible for a given scenario;
//! - [`timeseries::TimeseriesWriter`]: not a [`ReportWriter`] but an engine
//!   [`crate::engine::Observer`] that writes one CSV row per interval while the run goes.
//!
//! - [`resonance`]: the tables, CSV curves and JSON of `bankstep resonance`.
//! - [`design`]: the report, JSON and CSV of `bankstep design` (rendering a
//!   [`crate::design::Design`]).
//! - [`sweep`]: the summary, CSV, JSON and shard files of `bankstep sweep` and `merge`.
//! - [`figures`]: the figures (SVG and PNG, drawn with `plotters`); [`html_page`]: the
//!   one-file HTML page every report folder shares; [`html`], [`html_sweep`] and
//!   [`html_design`]: the report folders of `simulate`, `sweep`/`merge` and `design`
//!   with `--report DIR`.
//!
//! What a run means (findings, advice, the harmonic assessment) is decided once in
//! [`crate::analysis`] and handed to the writers in the [`ReportContext`]; quantities are
//! put into words by [`crate::text`], so a figure reads the same in every output.

pub mod design;
pub mod figures;
pub mod html;
pub mod html_design;
pub mod html_page;
pub mod html_sweep;
pub mod json;
pub mod resonance;
pub mod summary;
pub mod sweep;
pub mod timeseries;
pub mod wear;
pub mod wiring;

pub use crate::analysis::{Finding, Severity};
pub(crate) use crate::text::{
    approx, count, duration, harmonic_name, num, pct, steps_label, years_text,
};
pub use json::JsonReport;
pub use summary::Summary;
pub use timeseries::TimeseriesWriter;

use crate::analysis::Assessment;
use crate::engine::RunResult;
use crate::scenario::{LoadSpec, Scenario};
use crate::study::Study;
use std::io::Write;

/// Everything a report writer needs: the study (its settings and profile), the raw result
/// of its run and the assessment of that result. Writers render these; they judge nothing.
#[derive(Debug, Clone, Copy)]
pub struct ReportContext<'a> {
    /// The study that was run.
    pub study: &'a Study,
    /// The result of the run.
    pub result: &'a RunResult,
    /// What the analysis concluded.
    pub assessment: &'a Assessment,
    /// The wear plan, when the caller made one (`analysis::maintenance::plan`).
    pub wear_plan: Option<&'a crate::analysis::maintenance::WearPlan>,
}

impl<'a> ReportContext<'a> {
    /// Bundles a study, its result and their assessment.
    pub fn new(study: &'a Study, result: &'a RunResult, assessment: &'a Assessment) -> Self {
        ReportContext {
            study,
            result,
            assessment,
            wear_plan: None,
        }
    }

    /// The same context with a wear plan, rendered by the summary and the JSON report.
    pub fn with_wear_plan(self, plan: &'a crate::analysis::maintenance::WearPlan) -> Self {
        ReportContext {
            wear_plan: Some(plan),
            ..self
        }
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
    /// A figure could not be drawn.
    #[error(transparent)]
    Figure(#[from] figures::FigureError),
}

impl ReportError {
    /// True when the reader of the output went away (a closed pipe), which a command line
    /// treats as a normal end rather than a failure.
    pub fn is_broken_pipe(&self) -> bool {
        match self {
            ReportError::Io(e) => e.kind() == std::io::ErrorKind::BrokenPipe,
            ReportError::Json(e) => e.io_error_kind() == Some(std::io::ErrorKind::BrokenPipe),
            ReportError::Figure(_) => false,
        }
    }
}

/// A report format.
pub trait ReportWriter {
    /// Writes the report of `ctx` to `out`.
    fn write(&self, ctx: &ReportContext<'_>, out: &mut dyn Write) -> Result<(), ReportError>;
}

/// JSON formatting as `serde_json`'s pretty printer, except that a negative zero is
/// written `0.0`: a reader sees no sign on a quantity that is nothing.
struct PrettyNoNegativeZero<'a>(serde_json::ser::PrettyFormatter<'a>);

impl serde_json::ser::Formatter for PrettyNoNegativeZero<'_> {
    fn write_f64<W: ?Sized + Write>(&mut self, w: &mut W, value: f64) -> std::io::Result<()> {
        let v = if value == 0.0 { 0.0 } else { value };
        self.0.write_f64(w, v)
    }
    fn write_f32<W: ?Sized + Write>(&mut self, w: &mut W, value: f32) -> std::io::Result<()> {
        let v = if value == 0.0 { 0.0 } else { value };
        self.0.write_f32(w, v)
    }
    fn begin_array<W: ?Sized + Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_array(w)
    }
    fn end_array<W: ?Sized + Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_array(w)
    }
    fn begin_array_value<W: ?Sized + Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.0.begin_array_value(w, first)
    }
    fn end_array_value<W: ?Sized + Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_array_value(w)
    }
    fn begin_object<W: ?Sized + Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_object(w)
    }
    fn end_object<W: ?Sized + Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_object(w)
    }
    fn begin_object_key<W: ?Sized + Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.0.begin_object_key(w, first)
    }
    fn begin_object_value<W: ?Sized + Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_object_value(w)
    }
    fn end_object_value<W: ?Sized + Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_object_value(w)
    }
}

/// Writes `value` as pretty-printed JSON followed by a newline, with no negative zeros.
pub(crate) fn write_json<T: serde::Serialize + ?Sized>(
    out: &mut dyn Write,
    value: &T,
) -> Result<(), ReportError> {
    let fmt = PrettyNoNegativeZero(serde_json::ser::PrettyFormatter::new());
    let mut ser = serde_json::Serializer::with_formatter(&mut *out, fmt);
    value.serialize(&mut ser)?;
    out.write_all(b"\n")?;
    out.flush()?;
    Ok(())
}

/// The tool that wrote a report: the `tool` object of every JSON output.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub(crate) struct Tool {
    name: &'static str,
    version: &'static str,
}

/// This build of bankstep.
pub(crate) const TOOL: Tool = Tool {
    name: "bankstep",
    version: env!("CARGO_PKG_VERSION"),
};

/// What a report was made from, so that a run can be repeated and checked later: the
/// `provenance` object of every JSON output, right after `tool`.
#[derive(Debug, Clone, serde::Serialize)]
pub(crate) struct Provenance {
    tool_version: &'static str,
    scenario_sha256: String,
    /// SHA-256 of the CSV profile, when one was read (null for a synthetic load or a scan
    /// that ran no profile).
    profile_sha256: Option<String>,
    seed: u64,
}

impl Provenance {
    /// The provenance of a report on `scenario`, with the hash of the profile read.
    pub(crate) fn new(scenario: &Scenario, profile_sha256: Option<&str>) -> Self {
        Provenance {
            tool_version: TOOL.version,
            scenario_sha256: scenario.content_sha256.clone(),
            profile_sha256: profile_sha256.map(str::to_string),
            seed: scenario.seed,
        }
    }
}

/// The last component of a path, or the whole path if it has none.
pub(crate) fn file_name(path: &std::path::Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string())
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

/// Appends a plain-text table to `t`: a header row and one row per entry, every column
/// as wide as its widest cell (so long step labels never push the others out of line),
/// two spaces between columns. `align` has one letter per column: `l` left-aligns it
/// (words), anything else right-aligns it (numbers).
pub(crate) fn table(
    t: &mut String,
    indent: &str,
    headers: &[&str],
    align: &str,
    rows: &[Vec<String>],
) {
    let left: Vec<bool> = headers
        .iter()
        .enumerate()
        .map(|(i, _)| align.as_bytes().get(i) == Some(&b'l'))
        .collect();
    let n = headers.len();
    let mut width: Vec<usize> = headers.iter().map(|h| h.chars().count()).collect();
    for r in rows {
        for (w, c) in width.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let mut line = |cells: &mut dyn Iterator<Item = &str>| {
        let mut l = String::from(indent);
        for (i, c) in cells.enumerate().take(n) {
            let pad = width[i].saturating_sub(c.chars().count());
            if i > 0 {
                l.push_str("  ");
            }
            if left[i] {
                l.push_str(c);
                l.push_str(&" ".repeat(pad));
            } else {
                l.push_str(&" ".repeat(pad));
                l.push_str(c);
            }
        }
        t.push_str(l.trim_end());
        t.push('\n');
    };
    line(&mut headers.iter().copied());
    for r in rows {
        line(&mut r.iter().map(String::as_str));
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
    fn table_columns_line_up_whatever_the_label_length() {
        let mut t = String::new();
        let rows = vec![
            vec!["1+2+3+4+5+6+7+8+9+10+11+12".to_string(), "600".to_string()],
            vec!["1".to_string(), "50".to_string()],
        ];
        table(&mut t, "  ", &["steps on", "kvar"], "lr", &rows);
        let lines: Vec<&str> = t.lines().collect();
        assert_eq!(lines.len(), 3);
        // Every row ends at the same column: the numbers are right-aligned under the header.
        let ends: Vec<usize> = lines.iter().map(|l| l.chars().count()).collect();
        assert!(ends.iter().all(|&e| e == ends[0]), "{t}");
    }

    #[test]
    fn json_has_no_negative_zero() {
        let mut out = Vec::new();
        write_json(&mut out, &[-0.0f64, 0.0, -1.5]).unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(!text.contains("-0.0"), "{text}");
        assert!(text.contains("-1.5"));
    }
}

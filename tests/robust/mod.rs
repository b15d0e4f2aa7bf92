//! Checks shared by the no-panic property tests (`tests/no_panic.rs`) and the fuzz
//! targets (`fuzz/`): feed the CSV reader or the scenario parser any input, and check
//! that it returns a profile that streams, or a clean error that names the line or key.
//!
//! Each check returns `Err` with a description when an invariant is broken; a panic
//! inside the library is caught by the caller (proptest reports it, libFuzzer crashes).
#![allow(dead_code)]

use bankstep::error::{ProfileError, ScenarioError};
use bankstep::profile::csv::{scan_bytes, CsvOptions, CsvScan};
use bankstep::profile::{DefectPolicy, LoadSample, LoadSource};
use bankstep::scenario::{LoadSpec, Scenario};
use bankstep::study::Study;
use std::path::Path;

/// Grid points streamed through a profile that scanned.
const GRID_POINTS: u64 = 48;

/// CSV options chosen by two bytes, covering every delimiter, decimal mark and policy.
pub fn options_from(a: u8, b: u8) -> CsvOptions {
    use DefectPolicy::*;
    let mut o = CsvOptions {
        delimiter: [',', ';', '\t', '|'][usize::from(a & 3)],
        decimal: if a & 4 != 0 { ',' } else { '.' },
        on_defect: [None, Some(Stop), Some(Skip), Some(Hold), Some(Interpolate)]
            [usize::from(a >> 3) % 5],
        ..CsvOptions::default()
    };
    let fill = [None, Some(Skip), Some(Hold), Some(Interpolate)];
    o.defects.malformed = fill[usize::from(b & 3)];
    o.defects.not_finite = fill[usize::from((b >> 2) & 3)];
    o.defects.short_row = fill[usize::from((b >> 4) & 3)];
    let either = [None, Some(Skip)];
    o.defects.duplicate = either[usize::from((b >> 6) & 1)];
    o.defects.conflicting_duplicate = either[usize::from((b >> 6) & 1)];
    o.defects.backwards = either[usize::from((b >> 7) & 1)];
    o.defects.gap = [None, Some(Stop), Some(Hold), Some(Interpolate)][usize::from(a >> 6)];
    o.gap_factor = if b & 0x20 != 0 { 1.0 } else { 3.0 };
    o
}

/// Physical lines in `data` (line feeds + 1).
fn lines_in(data: &[u8]) -> u64 {
    data.iter().filter(|&&b| b == b'\n').count() as u64 + 1
}

/// Scans `data` with `opts`; on success streams it and loads it, and checks that both
/// agree and stay finite; on failure checks that the error is clean. Returns the scan
/// (if any) for callers that check more.
pub fn check_csv(data: &[u8], opts: &CsvOptions) -> Result<Option<CsvScan>, String> {
    let lines = lines_in(data);
    let sc = match scan_bytes("fuzz.csv", data.to_vec(), opts) {
        Ok(sc) => sc,
        Err(e) => {
            clean_profile_error(&e, lines)?;
            return Ok(None);
        }
    };
    if sc.rows_read != sc.rows_used + sc.rows_skipped {
        return Err(format!("rows do not add up: {sc:?}"));
    }
    if !(sc.t_first_s <= sc.t_last_s && sc.t_last_s < sc.end_s && sc.median_spacing_s > 0.0) {
        return Err(format!("bad time line: {sc:?}"));
    }
    if sc.defect_counts.total() != sc.summary.kinds.iter().map(|k| k.count).sum::<u64>() {
        return Err("summary counts differ from the defect counts".into());
    }
    if sc.defects.iter().any(|d| d.line == 0 || d.line > lines) {
        return Err(format!(
            "a defect line is outside the file: {:?}",
            sc.defects
        ));
    }
    if sc.defects.windows(2).any(|w| w[0].line > w[1].line) {
        return Err("defects are not in line order".into());
    }
    let mut st = sc
        .stream()
        .map_err(|e| format!("stream failed after scan: {e}"))?;
    let mem = sc
        .load()
        .map_err(|e| format!("load failed after scan: {e}"))?;
    if mem.len() as u64 != sc.rows_used {
        return Err("memory profile length differs from rows_used".into());
    }
    let mut cur = mem.cursor();
    let span = sc.end_s - sc.t_first_s;
    let dt = span / GRID_POINTS as f64;
    let (mut a, mut b) = (LoadSample::default(), LoadSample::default());
    for k in 0..GRID_POINTS {
        let t = sc.t_first_s + k as f64 * dt;
        if t + bankstep::profile::csv::time_tolerance(t) >= sc.end_s {
            break;
        }
        st.sample(k, t, &mut a)
            .map_err(|e| format!("stream sample at {t}: {e}"))?;
        cur.sample(k, t, &mut b)
            .map_err(|e| format!("cursor sample at {t}: {e}"))?;
        if a != b {
            return Err(format!("stream {a:?} and memory {b:?} differ at t = {t}"));
        }
        if !a.p_kw.iter().chain(&a.q_kvar).all(|v| v.is_finite()) {
            return Err(format!("non-finite sample at {t}: {a:?}"));
        }
    }
    match cur.sample(GRID_POINTS, sc.end_s + span, &mut b) {
        Err(ProfileError::Coverage { .. }) => {}
        other => return Err(format!("no coverage error after the end: {other:?}")),
    }
    Ok(Some(sc))
}

/// An error is clean when it names a line inside the file (or says which option is wrong).
fn clean_profile_error(e: &ProfileError, lines: u64) -> Result<(), String> {
    let text = e.to_string();
    if !text.starts_with("fuzz.csv") {
        return Err(format!("the error does not name the file: {text}"));
    }
    match e {
        ProfileError::Row { line, message, .. } => {
            if *line == 0 || *line > lines || message.is_empty() {
                return Err(format!(
                    "row error outside the file ({lines} lines): {text}"
                ));
            }
        }
        ProfileError::File { message, .. } | ProfileError::Coverage { message, .. } => {
            if !message.contains("line") {
                return Err(format!("a file error that names no line: {text}"));
            }
        }
        ProfileError::Io { .. } => return Err(format!("an I/O error from memory: {text}")),
        ProfileError::Sequence { .. } => {
            return Err(format!("a CSV profile asked for out of order: {text}"))
        }
    }
    Ok(())
}

/// Parses and validates scenario text; a scenario with a synthetic profile is also
/// prepared as a study (no file is opened). Errors must name a line (TOML syntax) or a
/// key (validation).
pub fn check_scenario(text: &str) -> Result<(), String> {
    match Scenario::from_str(text, Path::new("fuzz.toml")) {
        Ok(sc) => {
            if matches!(sc.load, LoadSpec::Synthetic(_)) {
                if let Err(e) = Study::prepare(sc) {
                    let m = e.to_string();
                    if m.is_empty() {
                        return Err("an empty study error".into());
                    }
                }
            }
            Ok(())
        }
        Err(ScenarioError::Parse { message, .. }) => {
            if message.contains("line") {
                Ok(())
            } else {
                Err(format!("a parse error that names no line: {message}"))
            }
        }
        Err(ScenarioError::Invalid { key, message, .. }) => {
            if key.is_empty() || message.is_empty() {
                Err(format!(
                    "a validation error without key or message: `{key}`: {message}"
                ))
            } else {
                Ok(())
            }
        }
        Err(e @ ScenarioError::Io { .. }) => Err(format!("an I/O error from text: {e}")),
    }
}

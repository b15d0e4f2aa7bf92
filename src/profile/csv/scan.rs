//! Pass 1 over a profile ([`scan_source`], [`scan`], [`scan_bytes`]): reads the whole
//! source once, validates every row, applies the policies, and collects what the file
//! holds and what is wrong with it in [`CsvScan`] (time kind, row counts, spacings,
//! coverage, defects, the [`DefectSummary`]), with memory that stays flat however long
//! the file. Gaps come from a second reading once the median spacing is known (`gaps.rs`).
//! The later passes over a scan are [`CsvScan::stream`] (in `stream.rs`) and
//! [`CsvScan::load`] (in `memory.rs`).

use super::defect::{
    merge_by_line, Defect, DefectAction, DefectCounts, DefectKind, MAX_DEFECTS_KEPT,
};
use super::errors::{file_error, read_error};
use super::gaps::find_gaps;
use super::header::{read_header, ColumnMatch, COLUMNS};
use super::options::CsvOptions;
use super::replay::{FileStamp, Plan};
use super::rules::{self, Action, Fill, Rejection, Rules, Verdict};
use super::source::{CsvSource, RecordReader};
use super::spacings::Spacings;
use super::summary::{DefectSummary, Tally};
use super::tolerance::spacing_key;
use crate::error::ProfileError;
use crate::profile::{DefectPolicy, LoadSample};
use crate::scenario::hex_lower;
use crate::timebase::{Calendar, TimeKind};
use chrono::NaiveDateTime;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Result of the first pass over a profile CSV: what the file holds and what is wrong
/// with it. Times are in the profile's own base (elapsed seconds, or Unix epoch seconds
/// for ISO 8601 timestamps; see `time_kind`).
#[derive(Debug, Clone)]
pub struct CsvScan {
    /// The profile file (or the name given to an in-memory source).
    pub path: PathBuf,
    /// The options it was scanned with (pass 2 uses the same).
    pub options: CsvOptions,
    /// What the time column holds, decided by the first data row with a readable time.
    pub time_kind: TimeKind,
    /// For ISO 8601 times, the UTC offset written on the file's first date-time (the row
    /// that decided the time kind), s east of UTC: `Some(3600)` for `+01:00`, `Some(0)`
    /// for `Z`. `None` for elapsed times and for date-times written without an offset.
    /// The calendar of the run follows this offset ([`CsvScan::calendar`]); the times
    /// themselves are exact instants whatever the offsets.
    pub utc_offset_s: Option<i32>,
    /// Data rows read (not counting the header or blank lines): `rows_used + rows_skipped`.
    pub rows_read: u64,
    /// Rows that make up the profile, held and interpolated ones included.
    pub rows_used: u64,
    /// Defective rows kept in the profile with the last good row's values.
    pub rows_held: u64,
    /// Defective rows kept in the profile with interpolated values.
    pub rows_interpolated: u64,
    /// Rows left out as defective (always 0 when every kind's policy is `stop`).
    pub rows_skipped: u64,
    /// Rows whose fields are all empty or white space (e.g. `,,,,,,` from a
    /// spreadsheet), ignored but counted here. Empty lines are skipped and not counted.
    pub blank_rows: u64,
    /// Line of the first used row.
    pub first_line: u64,
    /// Line of the last used row.
    pub last_line: u64,
    /// Time of the first used row, s.
    pub t_first_s: f64,
    /// Time of the last used row, s.
    pub t_last_s: f64,
    /// Median spacing between consecutive used rows, s (resolution 1 µs, coarser only
    /// for files with more than 65 536 distinct spacings).
    pub median_spacing_s: f64,
    /// Shortest spacing between consecutive used rows, s (resolution 1 µs).
    pub min_spacing_s: f64,
    /// Longest spacing between consecutive used rows, s (resolution 1 µs).
    pub max_spacing_s: f64,
    /// End of coverage, s: `t_last_s + median_spacing_s`. A run may ask for any
    /// t with `t_first_s ≤ t < end_s`.
    pub end_s: f64,
    /// Defects in line order: the first [`MAX_DEFECTS_KEPT`] row defects and the first
    /// [`MAX_DEFECTS_KEPT`] gaps, merged, then cut to [`MAX_DEFECTS_KEPT`].
    pub defects: Vec<Defect>,
    /// Exact counts of all defects by kind.
    pub defect_counts: DefectCounts,
    /// Time without data across gaps, s: for each gap, its spacing minus the median
    /// spacing (the part beyond the normal one-spacing hold of the previous row).
    pub gap_time_s: f64,
    /// What was wrong and what was done, per kind, for the reports.
    pub summary: DefectSummary,
    /// SHA-256 of the whole source as this scan read it (every byte, a byte-order mark
    /// included), lowercase hex: 64 characters. Computed during the scan, so the file is
    /// not read again to hash it.
    pub sha256: String,
    pub(super) plan: Plan,
}

impl CsvScan {
    /// True when some defects were counted but not kept in full in `defects`.
    pub fn defects_truncated(&self) -> bool {
        (self.defects.len() as u64) < self.defect_counts.total()
    }

    /// Where each required column was found in the header.
    pub fn columns(&self) -> &[ColumnMatch] {
        &self.summary.columns
    }

    /// The source the profile is read from.
    pub fn source(&self) -> &CsvSource {
        &self.plan.source
    }

    /// The calendar of a run over this profile: for elapsed times, elapsed 0 falls on
    /// `start` (the scenario's `run.start`); for ISO 8601 times, `start` is not used and
    /// weekdays, hours and month starts are those of the profile's local time, at the
    /// offset of its first date-time ([`CsvScan::utc_offset_s`]; naive times as written).
    pub fn calendar(&self, start: NaiveDateTime) -> Calendar {
        match self.time_kind {
            TimeKind::Elapsed => Calendar::elapsed_from(start),
            TimeKind::Absolute => Calendar::absolute_local(self.utc_offset_s.unwrap_or(0)),
        }
    }

    /// Spacings longer than this (µs) are interpolated across, under the gap policy
    /// `interpolate`.
    pub(super) fn gap_interpolation_us(&self) -> Option<f64> {
        (self.plan.policies[DefectKind::Gap.index()] == DefectPolicy::Interpolate)
            .then_some(self.plan.gap_threshold_us)
    }
}

/// Pass 1 over a profile file: see [`scan_source`].
pub fn scan(path: &Path, opts: &CsvOptions) -> Result<CsvScan, ProfileError> {
    scan_source(&CsvSource::File(path.to_path_buf()), opts)
}

/// Pass 1 over CSV text in memory; `name` stands for the file in messages.
pub fn scan_bytes(
    name: impl Into<PathBuf>,
    data: impl Into<Arc<[u8]>>,
    opts: &CsvOptions,
) -> Result<CsvScan, ProfileError> {
    scan_source(&CsvSource::bytes(name, data), opts)
}

/// The used rows of the first pass as a time line: first and last row, and spacings.
#[derive(Debug, Default)]
struct Timeline {
    used: u64,
    t_first: f64,
    first_line: u64,
    t_last: f64,
    last_line: u64,
    spacings: Spacings,
}

impl Timeline {
    /// A used row at time `t` on `line`.
    #[inline]
    fn add(&mut self, t: f64, line: u64) {
        if self.used == 0 {
            self.t_first = t;
            self.first_line = line;
        } else {
            self.spacings.add(spacing_key(t - self.t_last));
        }
        self.used += 1;
        self.t_last = t;
        self.last_line = line;
    }
}

/// Counters of the first pass.
#[derive(Debug, Default)]
struct Counts {
    used: u64,
    good: u64,
    held: u64,
    interpolated: u64,
    skipped: u64,
    blank: u64,
}

/// Pass 1: reads the whole source, validates every row, applies the policies and
/// collects the profile's statistics. Memory stays flat: spacings are kept as a
/// histogram of bounded size, defects up to [`MAX_DEFECTS_KEPT`].
///
/// Errors: `Io` if the source cannot be read; `File` for invalid options, a missing or
/// contradicting column, no data rows, fewer than two usable rows or no good row; `Row`
/// for the first defect whose kind's policy is `stop` (gaps included), and for a record
/// that is too long or too wide.
pub fn scan_source(source: &CsvSource, opts: &CsvOptions) -> Result<CsvScan, ProfileError> {
    let name = source.name().to_path_buf();
    if let Err(e) = opts.check() {
        return Err(file_error(
            &name,
            format!("the CSV option {}: {}", e.key, e.message),
        ));
    }
    let policies = opts.policies();
    let stamp = FileStamp::of(source)?;
    let mut rdr = RecordReader::open_hashing(source, opts.delimiter as u8)
        .map_err(|e| read_error(&name, e))?;
    let (columns, matches) = read_header(&mut rdr, &name, opts)?;
    let header_line = rdr.record_line;
    let mut rules = Rules::new(
        columns,
        None,
        0,
        policies,
        opts.decimal,
        opts.delimiter,
        false,
    );
    let mut sample = LoadSample::default();

    let mut n = Counts::default();
    let mut line_of_time = Timeline::default();
    let mut row_defects: Vec<Defect> = Vec::new();
    let mut counts = DefectCounts::default();
    let mut tally = Tally::default();

    while rdr.read().map_err(|e| read_error(&name, e))? {
        let verdict = rules.check(&rdr, &mut sample);
        let line = rdr.record_line;
        // The common case first, without going through the policies.
        let verdict = match verdict {
            Verdict::Accept(t) => {
                line_of_time.add(t, line);
                n.good += 1;
                tally.timed(t, None);
                rules.commit(t, line, Some(&sample));
                continue;
            }
            v => v,
        };
        match rules.decide(verdict) {
            Action::Blank => n.blank += 1,
            Action::Stop(r) => {
                return Err(ProfileError::Row {
                    file: name,
                    line,
                    message: rules.describe(&rdr, &r),
                });
            }
            Action::Skip(r) => {
                let kind = r.kind();
                n.skipped += 1;
                record_defect(
                    &mut counts,
                    &mut tally,
                    &mut row_defects,
                    &rules,
                    &rdr,
                    &r,
                    DefectAction::Skipped,
                );
                match r.fill_t {
                    Some(t) => tally.timed(t, Some(kind)),
                    None => tally.untimed(kind),
                }
            }
            // Good rows took the path above; this arm only keeps the match complete.
            Action::Good(t) => {
                line_of_time.add(t, line);
                n.good += 1;
                tally.timed(t, None);
                rules.commit(t, line, Some(&sample));
            }
            Action::Fill(t, fill, r) => {
                line_of_time.add(t, line);
                let action = if fill == Fill::Hold {
                    n.held += 1;
                    DefectAction::Held
                } else {
                    n.interpolated += 1;
                    DefectAction::Interpolated
                };
                record_defect(
                    &mut counts,
                    &mut tally,
                    &mut row_defects,
                    &rules,
                    &rdr,
                    &r,
                    action,
                );
                tally.timed(t, Some(r.kind()));
                rules.commit(t, line, None);
            }
        }
    }
    let Timeline {
        used,
        t_first,
        first_line,
        t_last,
        last_line,
        mut spacings,
    } = line_of_time;
    n.used = used;
    spacings.flush();
    let sha256 = match rdr.finish_sha256().map_err(|e| read_error(&name, e))? {
        Some(digest) => hex_lower(&digest),
        None => String::new(),
    };

    let rows_read = n.used + n.skipped;
    let first_defect = || {
        row_defects
            .first()
            .map(|d| format!(" (the first: {d})"))
            .unwrap_or_default()
    };
    if n.used == 0 {
        let message = if rows_read == 0 {
            format!(
                "the file has a header (line {}) but no data rows; add one row per sample \
                 with {}",
                header_line,
                COLUMNS.join(", ")
            )
        } else {
            format!(
                "none of the {rows_read} data rows is usable; all were skipped as defective{}",
                first_defect()
            )
        };
        return Err(file_error(&name, message));
    }
    if n.good == 0 {
        return Err(file_error(
            &name,
            format!(
                "none of the {rows_read} data rows has a full set of good values, so there is \
                 nothing to hold or interpolate from{}",
                first_defect()
            ),
        ));
    }
    if n.used == 1 {
        return Err(file_error(
            &name,
            format!(
                "only one usable data row (line {first_line}); at least two rows are needed, \
                 because the last row holds for the median spacing between rows"
            ),
        ));
    }
    let time_kind = rules.kind.unwrap_or(TimeKind::Elapsed);
    let median_us = spacings.median_us();
    if median_us <= 0.0 {
        return Err(file_error(
            &name,
            format!(
                "the median spacing between rows (lines {first_line} to {last_line}) is below \
                 1 µs; the time column must be in seconds (elapsed) or ISO 8601 date-times"
            ),
        ));
    }
    let median_s = median_us / 1e6;
    let gap_threshold_us = opts.gap_factor * median_us;
    let plan = Plan {
        source: source.clone(),
        stamp,
        columns,
        time_kind,
        kind_line: rules.kind_line,
        policies,
        delimiter: opts.delimiter,
        decimal: opts.decimal,
        rows_used: n.used,
        gap_threshold_us,
        keep_values: n.held + n.interpolated + counts.duplicate + counts.conflicting_duplicate > 0,
    };

    // Gaps need the median, so they come from another pass, run only when some spacing
    // is above the threshold. When every row was good, that pass reads only the times.
    let (gaps, gap_time_us) = if spacings.max_us as f64 > gap_threshold_us {
        let time_only = n.good == n.used && n.skipped == 0;
        find_gaps(
            &plan,
            time_only,
            median_us,
            opts.gap_factor,
            &mut counts,
            &mut tally,
        )?
    } else {
        (Vec::new(), 0.0)
    };
    let defects = merge_by_line(row_defects, gaps);
    let end_s = t_last + median_s;
    let list_truncated = (defects.len() as u64) < counts.total();
    let summary = tally.finish(
        median_s,
        end_s - t_first,
        &policies,
        opts.delimiter,
        opts.decimal,
        matches,
        [
            rows_read,
            n.used,
            n.held,
            n.interpolated,
            n.skipped,
            n.blank,
        ],
        list_truncated,
    );
    Ok(CsvScan {
        path: name,
        options: *opts,
        time_kind,
        utc_offset_s: match time_kind {
            TimeKind::Absolute => rules.utc_offset_s,
            TimeKind::Elapsed => None,
        },
        rows_read,
        rows_used: n.used,
        rows_held: n.held,
        rows_interpolated: n.interpolated,
        rows_skipped: n.skipped,
        blank_rows: n.blank,
        first_line,
        last_line,
        t_first_s: t_first,
        t_last_s: t_last,
        median_spacing_s: median_s,
        min_spacing_s: spacings.min_us as f64 / 1e6,
        max_spacing_s: spacings.max_us as f64 / 1e6,
        end_s,
        defects,
        defect_counts: counts,
        gap_time_s: gap_time_us / 1e6,
        summary,
        sha256,
        plan,
    })
}

/// Counts a row defect, notes it in the tally and keeps it in full if there is room.
fn record_defect(
    counts: &mut DefectCounts,
    tally: &mut Tally,
    kept: &mut Vec<Defect>,
    rules: &Rules,
    rdr: &RecordReader,
    r: &Rejection,
    action: DefectAction,
) {
    let kind = r.kind();
    let line = rdr.record_line;
    counts.add(kind);
    if r.dst() == rules::Dst::Starts {
        tally.dst_line(line);
    }
    let mut message = None;
    tally.count(kind, line, action, || {
        let m = rules.describe(rdr, r);
        message = Some(m.clone());
        format!("line {line}: {m}")
    });
    if kept.len() < MAX_DEFECTS_KEPT {
        kept.push(Defect {
            line,
            kind,
            action,
            message: message.unwrap_or_else(|| rules.describe(rdr, r)),
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::profile::csv::testing::{row, write, HEADER};

    #[test]
    fn stop_reports_first_defect_with_line() {
        let text = format!("{HEADER}{}{}0x,1,1,1,1,1,1\n", row("0", 1.0), row("1", 1.0));
        let f = write(&text);
        match scan(f.path(), &CsvOptions::default()) {
            Err(ProfileError::Row { line, message, .. }) => {
                assert_eq!(line, 4);
                assert!(message.contains("\"0x\""), "{message}");
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn blank_rows_are_counted_not_defects() {
        let text = format!("{HEADER}{}\n,,,,,,\n   \n{}", row("0", 1.0), row("1", 2.0));
        let f = write(&text);
        let sc = scan(f.path(), &CsvOptions::default()).unwrap();
        assert_eq!(sc.rows_used, 2);
        assert_eq!(sc.blank_rows, 2);
        assert_eq!(sc.last_line, 6);
    }

    #[test]
    fn bytes_and_files_scan_alike() {
        let text = format!(
            "{HEADER}{}{}{}",
            row("0", 1.0),
            row("10", 2.0),
            row("20", 3.0)
        );
        let f = write(&text);
        let a = scan(f.path(), &CsvOptions::default()).unwrap();
        let b = scan_bytes("mem.csv", text.into_bytes(), &CsvOptions::default()).unwrap();
        assert_eq!(a.end_s, b.end_s);
        assert_eq!(b.path, Path::new("mem.csv"));
        assert_eq!(a.load().unwrap().samples, b.load().unwrap().samples);
    }
}

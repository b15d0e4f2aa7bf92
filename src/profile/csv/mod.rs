//! Load profiles read from CSV files (DOMAIN.md section 7).
//!
//! This module owns everything between a profile file on disk and the per-interval
//! [`LoadSample`]s the engine asks for:
//!
//! - the header: required columns found by name (trimmed, case-insensitive, any order),
//!   extra columns ignored;
//! - the row rules: what makes a row defective (malformed or non-finite numbers, short
//!   rows, duplicate or backwards times) and what the [`DefectPolicy`] does about it;
//! - pass 1, [`scan`]: validates the whole file and collects its statistics (time kind,
//!   row counts, median spacing, coverage end, defects with line numbers, gaps) in
//!   [`CsvScan`], with memory that stays flat however long the file is;
//! - pass 2, [`CsvScan::stream`]: reopens the file and yields samples on the simulation
//!   grid by sample-and-hold, applying the same rules so that it skips exactly the rows
//!   pass 1 skipped;
//! - [`CsvScan::load`] and [`MemoryProfile`]: the whole profile in memory, for many runs
//!   over one profile, with a [`MemoryCursor`] that does the same sample-and-hold.
//!
//! Sample-and-hold: interval k, starting at t_k, takes the last row whose time is
//! ≤ t_k (within [`time_tolerance`]), and the last row holds for the profile's median
//! spacing, so N evenly spaced rows cover N spacings.
//!
//! Line numbers are 1-based physical lines of the file (the header is line 1), counted
//! by line feeds, so they stay right across blank lines, CRLF line ends and quoted
//! fields that contain line breaks.

use super::{DefectPolicy, LoadSample, LoadSource};
use crate::error::ProfileError;
use crate::timebase::{parse_iso8601, TimeKind};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::fmt;
use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::time::SystemTime;

/// The required columns, in the order used internally: the time, then P and Q of
/// phases a, b and c.
pub const COLUMNS: [&str; 7] = [
    "time", "p_a_kw", "q_a_kvar", "p_b_kw", "q_b_kvar", "p_c_kw", "q_c_kvar",
];

/// At most this many defects of each class (row defects, gaps) are kept in full in
/// [`CsvScan::defects`]; the counts in [`CsvScan::defect_counts`] are always exact.
pub const MAX_DEFECTS_KEPT: usize = 1000;

/// Base time tolerance, s: a row at time t counts as "at or before" t_k when
/// t ≤ t_k + tolerance, so that float grids such as 0.1·k do not miss a row.
pub const TIME_TOL_S: f64 = 1e-9;

/// Size of the read buffer, bytes.
const READ_BUFFER_BYTES: usize = 64 * 1024;

/// Longest field text quoted in a message, characters.
const MAX_QUOTED_CHARS: usize = 40;

/// Time tolerance at time `t_s`, s: [`TIME_TOL_S`], widened to a few units in the last
/// place for large times (epoch seconds), where 1 ns is below the resolution of an f64.
#[inline]
pub fn time_tolerance(t_s: f64) -> f64 {
    TIME_TOL_S.max(t_s.abs() * 4.0 * f64::EPSILON)
}

/// How to read a profile CSV. Deserializes from e.g. `{ on_defect = "skip",
/// gap_factor = 5.0 }`, missing keys taking their defaults.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct CsvOptions {
    /// What to do with a defective row: stop with an error, or skip it and record it.
    pub on_defect: DefectPolicy,
    /// A spacing between rows longer than this many median spacings is reported as a
    /// gap (a warning; the previous row holds across it). Must be ≥ 1. Default 3.
    pub gap_factor: f64,
}

impl Default for CsvOptions {
    fn default() -> Self {
        CsvOptions {
            on_defect: DefectPolicy::Stop,
            gap_factor: 3.0,
        }
    }
}

/// The kinds of defect a profile row can have.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DefectKind {
    /// A field that is not a number (or a time that is neither a number of seconds nor
    /// an ISO 8601 date-time, or of the other kind than the file's), or non-empty
    /// fields beyond the header's columns (columns shifted, e.g. by a decimal comma).
    Malformed,
    /// A number that is NaN or infinite.
    NotFinite,
    /// A row with fewer fields than the required columns need (e.g. a truncated line).
    ShortRow,
    /// A row whose time equals the previous accepted row's time.
    Duplicate,
    /// A row whose time is earlier than the previous accepted row's time.
    Backwards,
    /// A spacing longer than `gap_factor` median spacings: a warning, not a row defect.
    Gap,
}

impl DefectKind {
    /// All kinds, in report order.
    pub const ALL: [DefectKind; 6] = [
        DefectKind::Malformed,
        DefectKind::NotFinite,
        DefectKind::ShortRow,
        DefectKind::Duplicate,
        DefectKind::Backwards,
        DefectKind::Gap,
    ];

    /// True for kinds that are warnings (the row is used), false for row defects.
    pub fn is_warning(self) -> bool {
        self == DefectKind::Gap
    }

    /// The snake_case name used in reports.
    pub fn name(self) -> &'static str {
        match self {
            DefectKind::Malformed => "malformed",
            DefectKind::NotFinite => "not_finite",
            DefectKind::ShortRow => "short_row",
            DefectKind::Duplicate => "duplicate",
            DefectKind::Backwards => "backwards",
            DefectKind::Gap => "gap",
        }
    }
}

impl fmt::Display for DefectKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// One defect found in a profile file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Defect {
    /// 1-based line number in the file (the header is line 1). For a gap, the line of
    /// the row after the gap.
    pub line: u64,
    /// What kind of defect.
    pub kind: DefectKind,
    /// What is wrong, in plain words, without the line number (the `Display` form adds
    /// it: `line 7: q_b_kvar is "1,5", not a number`).
    pub message: String,
}

impl fmt::Display for Defect {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

/// Exact number of defects of each kind, including those not kept in full.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize)]
pub struct DefectCounts {
    /// Malformed fields or rows.
    pub malformed: u64,
    /// NaN or infinite numbers.
    pub not_finite: u64,
    /// Rows with missing fields.
    pub short_row: u64,
    /// Rows repeating the previous time.
    pub duplicate: u64,
    /// Rows earlier than the previous row.
    pub backwards: u64,
    /// Gaps (warnings).
    pub gap: u64,
}

impl DefectCounts {
    /// The count of one kind.
    pub fn get(&self, kind: DefectKind) -> u64 {
        match kind {
            DefectKind::Malformed => self.malformed,
            DefectKind::NotFinite => self.not_finite,
            DefectKind::ShortRow => self.short_row,
            DefectKind::Duplicate => self.duplicate,
            DefectKind::Backwards => self.backwards,
            DefectKind::Gap => self.gap,
        }
    }

    fn add(&mut self, kind: DefectKind) {
        let c = match kind {
            DefectKind::Malformed => &mut self.malformed,
            DefectKind::NotFinite => &mut self.not_finite,
            DefectKind::ShortRow => &mut self.short_row,
            DefectKind::Duplicate => &mut self.duplicate,
            DefectKind::Backwards => &mut self.backwards,
            DefectKind::Gap => &mut self.gap,
        };
        *c += 1;
    }

    /// Number of row defects (every kind except gaps): the rows left out under `Skip`.
    pub fn rows(&self) -> u64 {
        self.malformed + self.not_finite + self.short_row + self.duplicate + self.backwards
    }

    /// All defects, gaps included.
    pub fn total(&self) -> u64 {
        self.rows() + self.gap
    }
}

/// Result of the first pass over a profile CSV: what the file holds and what is wrong
/// with it. Times are in the profile's own base (elapsed seconds, or Unix epoch seconds
/// for ISO 8601 timestamps; see `time_kind`).
#[derive(Debug, Clone)]
pub struct CsvScan {
    /// The profile file.
    pub path: PathBuf,
    /// The options it was scanned with (pass 2 uses the same).
    pub options: CsvOptions,
    /// What the time column holds, decided by the first data row with a readable time.
    pub time_kind: TimeKind,
    /// Data rows read (not counting the header or blank lines): `rows_used + rows_skipped`.
    pub rows_read: u64,
    /// Rows that make up the profile.
    pub rows_used: u64,
    /// Rows left out as defective (always 0 under `DefectPolicy::Stop`).
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
    /// Median spacing between consecutive used rows, s (resolution 1 µs).
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
    /// Column index of each of [`COLUMNS`] in the file, and the header's width.
    columns: Columns,
    /// Line of the row that decided the time kind (for messages).
    kind_line: u64,
    /// Size and modification time when scanned, to notice a file changed under us.
    stamp: FileStamp,
}

impl CsvScan {
    /// True when some defects were counted but not kept in full in `defects`.
    pub fn defects_truncated(&self) -> bool {
        (self.defects.len() as u64) < self.defect_counts.total()
    }

    /// Pass 2: reopens the file and returns a source that yields samples on the
    /// simulation grid, skipping exactly the rows this scan skipped.
    pub fn stream(&self) -> Result<CsvStream, ProfileError> {
        let mut rows = AcceptedRows::open(self, false)?;
        let mut cur = LoadSample::default();
        let cur_t = match rows.next(&mut cur)? {
            Some(t) => t,
            None => return Err(changed_error(&self.path)),
        };
        let mut next = LoadSample::default();
        let next_t = rows.next(&mut next)?.unwrap_or(f64::INFINITY);
        Ok(CsvStream {
            rows,
            cur,
            cur_t,
            next,
            next_t,
            t_first_s: self.t_first_s,
            end_s: self.end_s,
            median_spacing_s: self.median_spacing_s,
            t_last_s: self.t_last_s,
            last_line: self.last_line,
            first_line: self.first_line,
            time_kind: self.time_kind,
        })
    }

    /// Reads the whole profile into memory (the used rows only), for many runs over one
    /// profile. Memory: 56 bytes per used row.
    pub fn load(&self) -> Result<MemoryProfile, ProfileError> {
        let mut rows = AcceptedRows::open(self, false)?;
        let n = usize::try_from(self.rows_used).unwrap_or(usize::MAX);
        let mut times = Vec::with_capacity(n);
        let mut samples = Vec::with_capacity(n);
        let mut s = LoadSample::default();
        while let Some(t) = rows.next(&mut s)? {
            times.push(t);
            samples.push(s);
        }
        Ok(MemoryProfile {
            times,
            samples,
            end_s: self.end_s,
            time_kind: self.time_kind,
            source: self.path.clone(),
        })
    }
}

/// Pass 1: reads the whole file, validates every row and collects the profile's
/// statistics. Memory stays flat: spacings are kept as a histogram at 1 µs resolution,
/// bounded by the number of distinct spacings.
///
/// Errors: `Io` if the file cannot be read; `File` for a missing column, no data rows,
/// fewer than two usable rows, or invalid options; `Row` for the first row defect under
/// `DefectPolicy::Stop`. Gaps never stop the scan.
pub fn scan(path: &Path, opts: &CsvOptions) -> Result<CsvScan, ProfileError> {
    if !(opts.gap_factor.is_finite() && opts.gap_factor >= 1.0) {
        return Err(file_error(
            path,
            format!(
                "the CSV option gap_factor must be a finite number ≥ 1 (median spacings), not {}",
                opts.gap_factor
            ),
        ));
    }
    let stamp = FileStamp::of(path)?;
    let mut rdr = RecordReader::open(path)?;
    let columns = read_header(&mut rdr, path)?;
    let mut rules = Rules::new(columns, None, 0, false);
    let mut sample = LoadSample::default();

    let mut rows_used: u64 = 0;
    let mut rows_skipped: u64 = 0;
    let mut blank_rows: u64 = 0;
    let mut first_line = 0;
    let mut last_line = 0;
    let mut t_first = 0.0;
    let mut t_last = 0.0;
    let mut spacings = Spacings::default();
    let mut row_defects: Vec<Defect> = Vec::new();
    let mut counts = DefectCounts::default();

    while rdr.read().map_err(|e| io_error(path, e))? {
        match rules.check(&rdr, &mut sample) {
            Verdict::Accept(t) => {
                if rows_used == 0 {
                    t_first = t;
                    first_line = rdr.record_line;
                } else {
                    spacings.add(spacing_key(t - t_last));
                }
                rows_used += 1;
                t_last = t;
                last_line = rdr.record_line;
            }
            Verdict::Blank => blank_rows += 1,
            Verdict::Reject(p) => {
                if opts.on_defect == DefectPolicy::Stop {
                    return Err(ProfileError::Row {
                        file: path.to_path_buf(),
                        line: rdr.record_line,
                        message: rules.describe(&rdr, &p),
                    });
                }
                rows_skipped += 1;
                counts.add(p.kind());
                if row_defects.len() < MAX_DEFECTS_KEPT {
                    row_defects.push(Defect {
                        line: rdr.record_line,
                        kind: p.kind(),
                        message: rules.describe(&rdr, &p),
                    });
                }
            }
        }
    }
    spacings.flush();

    let rows_read = rows_used + rows_skipped;
    if rows_used == 0 {
        let message = if rows_read == 0 {
            format!(
                "the file has a header but no data rows; add one row per sample with {}",
                COLUMNS.join(", ")
            )
        } else {
            let first = row_defects
                .first()
                .map(|d| format!(" (the first: {d})"))
                .unwrap_or_default();
            format!(
                "none of the {rows_read} data rows is usable; all were skipped as defective{first}"
            )
        };
        return Err(file_error(path, message));
    }
    if rows_used == 1 {
        return Err(file_error(
            path,
            format!(
                "only one usable data row (line {first_line}); at least two rows are needed, \
                 because the last row holds for the median spacing between rows"
            ),
        ));
    }
    let time_kind = rules.kind.unwrap_or(TimeKind::Elapsed);
    let median_us = spacings.median_us(rows_used - 1);
    if median_us <= 0.0 {
        return Err(file_error(
            path,
            "the median spacing between rows is below 1 µs; the time column must be in \
             seconds (elapsed) or ISO 8601 date-times"
                .to_string(),
        ));
    }
    let gap_threshold_us = opts.gap_factor * median_us;
    let mut gap_time_us = 0.0;
    for (&key, &n) in spacings.hist.range(..) {
        if key as f64 > gap_threshold_us {
            gap_time_us += (key as f64 - median_us) * n as f64;
        }
    }

    let mut partial = CsvScan {
        path: path.to_path_buf(),
        options: *opts,
        time_kind,
        rows_read,
        rows_used,
        rows_skipped,
        blank_rows,
        first_line,
        last_line,
        t_first_s: t_first,
        t_last_s: t_last,
        median_spacing_s: median_us / 1e6,
        min_spacing_s: spacings.min_us() / 1e6,
        max_spacing_s: spacings.max_us() / 1e6,
        end_s: t_last + median_us / 1e6,
        defects: Vec::new(),
        defect_counts: counts,
        gap_time_s: gap_time_us / 1e6,
        columns,
        kind_line: rules.kind_line,
        stamp,
    };

    // Gaps need the median, so their line numbers come from a second pass, run only
    // when the histogram shows a spacing above the threshold. With no skipped rows every
    // row is used, and that pass need only read the time column.
    let mut gaps = Vec::new();
    if spacings.max_us() > gap_threshold_us {
        let time_only = rows_skipped == 0;
        let mut rows = AcceptedRows::open(&partial, time_only)?;
        let mut s = LoadSample::default();
        let mut prev: Option<(f64, u64)> = None;
        while let Some(t) = rows.next(&mut s)? {
            let line = rows.row_line();
            if let Some((tp, lp)) = prev {
                let key = spacing_key(t - tp);
                if key as f64 > gap_threshold_us {
                    partial.defect_counts.add(DefectKind::Gap);
                    if gaps.len() < MAX_DEFECTS_KEPT {
                        gaps.push(Defect {
                            line,
                            kind: DefectKind::Gap,
                            message: gap_message(
                                time_kind,
                                tp,
                                lp,
                                t,
                                key as f64 / 1e6,
                                opts.gap_factor,
                                median_us / 1e6,
                            ),
                        });
                    }
                }
            }
            prev = Some((t, line));
        }
    }
    partial.defects = merge_by_line(row_defects, gaps);
    Ok(partial)
}

/// Pass 2 over a scanned CSV: yields samples on the simulation grid by sample-and-hold,
/// reading the file forward once. Holds two rows at a time; memory is flat.
#[derive(Debug)]
pub struct CsvStream {
    rows: AcceptedRows,
    /// The row in force (the last one with time ≤ the last asked t).
    cur: LoadSample,
    cur_t: f64,
    /// The row after it, read ahead (time +∞ after the last row).
    next: LoadSample,
    next_t: f64,
    t_first_s: f64,
    end_s: f64,
    median_spacing_s: f64,
    t_last_s: f64,
    first_line: u64,
    last_line: u64,
    time_kind: TimeKind,
}

impl CsvStream {
    /// End of coverage, s.
    pub fn end_s(&self) -> f64 {
        self.end_s
    }

    /// Time of the first row, s.
    pub fn t_first_s(&self) -> f64 {
        self.t_first_s
    }
}

impl LoadSource for CsvStream {
    fn sample(&mut self, _k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let tq = t_s + time_tolerance(t_s);
        if !(tq >= self.t_first_s && tq < self.end_s) {
            return Err(self.coverage_error(t_s));
        }
        if tq < self.cur_t {
            return Err(ProfileError::Coverage {
                file: self.rows.path.clone(),
                message: format!(
                    "the run asks for the load at {}, but the CSV stream has already moved \
                     past it to {}; a stream only moves forward (load the profile into \
                     memory to go back)",
                    fmt_time(self.time_kind, t_s),
                    fmt_time(self.time_kind, self.cur_t)
                ),
            });
        }
        while self.next_t <= tq {
            self.cur = self.next;
            self.cur_t = self.next_t;
            self.next_t = self.rows.next(&mut self.next)?.unwrap_or(f64::INFINITY);
        }
        *out = self.cur;
        Ok(())
    }
}

impl CsvStream {
    fn coverage_error(&self, t_s: f64) -> ProfileError {
        let k = self.time_kind;
        let message = if t_s.is_finite() && t_s < self.t_first_s {
            format!(
                "the run asks for the load at {}, before the profile's first row ({}, line {}); \
                 start the run at or after the first row",
                fmt_time(k, t_s),
                fmt_time(k, self.t_first_s),
                self.first_line
            )
        } else {
            format!(
                "the run asks for the load at {}, but the profile ends at {} (last row at {}, \
                 line {}, held for the median spacing of {} s); shorten the run or extend the \
                 profile",
                fmt_time(k, t_s),
                fmt_time(k, self.end_s),
                fmt_time(k, self.t_last_s),
                self.last_line,
                fmt_secs(self.median_spacing_s)
            )
        };
        ProfileError::Coverage {
            file: self.rows.path.clone(),
            message,
        }
    }
}

/// A whole profile in memory: row times and samples in time order, and the end of
/// coverage. Built by [`CsvScan::load`] or [`MemoryProfile::from_parts`].
#[derive(Debug, Clone, PartialEq)]
pub struct MemoryProfile {
    /// Row times, s, strictly increasing.
    pub times: Vec<f64>,
    /// The sample of each row, same length as `times`.
    pub samples: Vec<LoadSample>,
    /// End of coverage, s: the last sample holds until just before this.
    pub end_s: f64,
    /// What the times are.
    pub time_kind: TimeKind,
    /// Where the profile came from, for error messages.
    pub source: PathBuf,
}

impl MemoryProfile {
    /// Builds a profile from parts (for tests and generated profiles), with elapsed
    /// times. `times` (s) must be finite and strictly increasing, `samples` as long as
    /// `times` and finite, and `end_s` (s) finite and after the last time.
    pub fn from_parts(
        times: Vec<f64>,
        samples: Vec<LoadSample>,
        end_s: f64,
    ) -> Result<Self, String> {
        if times.is_empty() {
            return Err("a profile needs at least one sample".to_string());
        }
        if times.len() != samples.len() {
            return Err(format!(
                "{} times but {} samples; there must be one sample per time",
                times.len(),
                samples.len()
            ));
        }
        if let Some(i) = times.iter().position(|t| !t.is_finite()) {
            return Err(format!("times[{i}] is {}, not a finite number", times[i]));
        }
        for (i, w) in times.windows(2).enumerate() {
            if w[1] <= w[0] {
                return Err(format!(
                    "times must increase strictly: times[{}] = {} s is not after times[{}] = {} s",
                    i + 1,
                    w[1],
                    i,
                    w[0]
                ));
            }
        }
        if let Some(i) = samples
            .iter()
            .position(|s| !s.p_kw.iter().chain(&s.q_kvar).all(|v| v.is_finite()))
        {
            return Err(format!("samples[{i}] holds a NaN or infinite value"));
        }
        let last = times[times.len() - 1];
        if !(end_s.is_finite() && end_s > last) {
            return Err(format!(
                "end_s = {end_s} s must be a finite time after the last sample ({last} s)"
            ));
        }
        Ok(MemoryProfile {
            times,
            samples,
            end_s,
            time_kind: TimeKind::Elapsed,
            source: PathBuf::from("(generated profile)"),
        })
    }

    /// Number of samples.
    pub fn len(&self) -> usize {
        self.times.len()
    }

    /// True when there are no samples.
    pub fn is_empty(&self) -> bool {
        self.times.is_empty()
    }

    /// Time of the first sample, s (NaN if empty).
    pub fn t_first_s(&self) -> f64 {
        self.times.first().copied().unwrap_or(f64::NAN)
    }

    /// A sample-and-hold source over this profile. Cursors are cheap; make one per run.
    pub fn cursor(&self) -> MemoryCursor<'_> {
        MemoryCursor {
            profile: self,
            idx: 0,
        }
    }

    fn coverage_error(&self, t_s: f64) -> ProfileError {
        let k = self.time_kind;
        let message = match (self.times.first(), self.times.last()) {
            (Some(&first), Some(_)) if t_s.is_finite() && t_s < first => format!(
                "the run asks for the load at {}, before the profile's first sample ({}); \
                 start the run at or after it",
                fmt_time(k, t_s),
                fmt_time(k, first)
            ),
            (Some(_), Some(&last)) => format!(
                "the run asks for the load at {}, but the profile ends at {} (last sample at \
                 {}); shorten the run or extend the profile",
                fmt_time(k, t_s),
                fmt_time(k, self.end_s),
                fmt_time(k, last)
            ),
            _ => "the profile has no samples".to_string(),
        };
        ProfileError::Coverage {
            file: self.source.clone(),
            message,
        }
    }
}

/// Sample-and-hold over a [`MemoryProfile`]. Moving forward costs O(1) amortised per
/// row passed (a short linear walk, then a binary search for long jumps); asking for an
/// earlier time than the last is allowed and costs a binary search.
#[derive(Debug, Clone)]
pub struct MemoryCursor<'a> {
    profile: &'a MemoryProfile,
    idx: usize,
}

impl LoadSource for MemoryCursor<'_> {
    fn sample(&mut self, _k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let p = self.profile;
        let times = &p.times;
        let tq = t_s + time_tolerance(t_s);
        let first = match times.first() {
            Some(&f) => f,
            None => return Err(p.coverage_error(t_s)),
        };
        if !(tq >= first && tq < p.end_s) {
            return Err(p.coverage_error(t_s));
        }
        let n = times.len();
        let mut idx = self.idx.min(n - 1);
        if times[idx] > tq {
            // Going back: search the whole profile.
            idx = times.partition_point(|&x| x <= tq).saturating_sub(1);
        } else {
            // Going forward: a few steps, then a binary search over the rest.
            let mut steps = 0;
            while idx + 1 < n && times[idx + 1] <= tq {
                idx += 1;
                steps += 1;
                if steps == 8 {
                    idx += times[idx + 1..].partition_point(|&x| x <= tq);
                    break;
                }
            }
        }
        self.idx = idx;
        match p.samples.get(idx) {
            Some(s) => {
                *out = *s;
                Ok(())
            }
            None => Err(file_error(
                &p.source,
                format!(
                    "the profile has {} times but only {} samples",
                    n,
                    p.samples.len()
                ),
            )),
        }
    }
}

// ---------------------------------------------------------------------------------------
// Record reading.

/// Reads CSV records with `csv_core`, into reused buffers (no allocation per record once
/// the buffers have grown to the longest record), counting physical lines by line feeds.
/// (The `csv` crate's `Position::line` is not used: it is off after blank lines and in
/// CRLF files.)
struct RecordReader {
    src: BufReader<File>,
    core: csv_core::Reader,
    /// Unescaped field bytes of the current record, contiguous.
    out: Vec<u8>,
    /// End offset in `out` of each field of the current record.
    ends: Vec<usize>,
    /// Number of fields in the current record.
    len: usize,
    /// Line number of the next unread byte.
    line: u64,
    /// Line on which the current record starts.
    record_line: u64,
}

impl fmt::Debug for RecordReader {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("RecordReader")
            .field("line", &self.line)
            .field("record_line", &self.record_line)
            .finish_non_exhaustive()
    }
}

#[inline]
fn count_lf(bytes: &[u8]) -> u64 {
    bytes.iter().filter(|&&b| b == b'\n').count() as u64
}

impl RecordReader {
    fn open(path: &Path) -> Result<Self, ProfileError> {
        let file = File::open(path).map_err(|e| io_error(path, e))?;
        Ok(RecordReader {
            src: BufReader::with_capacity(READ_BUFFER_BYTES, file),
            core: csv_core::Reader::new(),
            out: vec![0; 1024],
            ends: vec![0; 32],
            len: 0,
            line: 1,
            record_line: 1,
        })
    }

    /// Reads the next record; false at the end of the file.
    fn read(&mut self) -> std::io::Result<bool> {
        // Skip blank lines ourselves, so that the record's first line is known.
        loop {
            let buf = self.src.fill_buf()?;
            if buf.is_empty() {
                break;
            }
            let skip = buf
                .iter()
                .position(|&b| b != b'\n' && b != b'\r')
                .unwrap_or(buf.len());
            let lf = count_lf(&buf[..skip]);
            let found = skip < buf.len();
            self.src.consume(skip);
            self.line += lf;
            if found {
                break;
            }
        }
        self.record_line = self.line;
        let (mut n_out, mut n_end) = (0, 0);
        loop {
            let input = self.src.fill_buf()?;
            let (res, nin, nout, nend) =
                self.core
                    .read_record(input, &mut self.out[n_out..], &mut self.ends[n_end..]);
            let lf = count_lf(&input[..nin]);
            self.src.consume(nin);
            self.line += lf;
            n_out += nout;
            n_end += nend;
            match res {
                csv_core::ReadRecordResult::InputEmpty => {}
                csv_core::ReadRecordResult::OutputFull => {
                    let n = self.out.len().max(1);
                    self.out.resize(n * 2, 0);
                }
                csv_core::ReadRecordResult::OutputEndsFull => {
                    let n = self.ends.len().max(1);
                    self.ends.resize(n * 2, 0);
                }
                csv_core::ReadRecordResult::Record => {
                    self.len = n_end;
                    return Ok(true);
                }
                csv_core::ReadRecordResult::End => {
                    self.len = 0;
                    return Ok(false);
                }
            }
        }
    }

    /// Field i of the current record (empty if there is no such field).
    #[inline]
    fn field(&self, i: usize) -> &[u8] {
        if i >= self.len {
            return &[];
        }
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        self.out.get(start..self.ends[i]).unwrap_or(&[])
    }

    /// True when every field of the current record is empty or white space.
    fn is_blank(&self) -> bool {
        (0..self.len).all(|i| self.field(i).trim_ascii().is_empty())
    }
}

/// Where the required columns are.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Columns {
    /// Field index of each of [`COLUMNS`].
    idx: [usize; 7],
    /// Fields a row needs: the largest index + 1.
    min_fields: usize,
    /// Fields in the header.
    header_fields: usize,
}

/// Reads the header and finds the required columns.
fn read_header(rdr: &mut RecordReader, path: &Path) -> Result<Columns, ProfileError> {
    let required = COLUMNS.join(", ");
    if !rdr.read().map_err(|e| io_error(path, e))? {
        return Err(file_error(
            path,
            format!("the file is empty; it needs a header row naming the columns {required}"),
        ));
    }
    let mut idx = [usize::MAX; 7];
    for i in 0..rdr.len {
        let name = rdr.field(i).trim_ascii();
        for (c, want) in COLUMNS.iter().enumerate() {
            if name.eq_ignore_ascii_case(want.as_bytes()) {
                if idx[c] != usize::MAX {
                    return Err(file_error(
                        path,
                        format!(
                            "column {want} appears twice in the header (columns {} and {}); \
                             keep only one",
                            idx[c] + 1,
                            i + 1
                        ),
                    ));
                }
                idx[c] = i;
            }
        }
    }
    let missing: Vec<&str> = COLUMNS
        .iter()
        .zip(idx)
        .filter(|(_, i)| *i == usize::MAX)
        .map(|(name, _)| *name)
        .collect();
    if !missing.is_empty() {
        let found: Vec<String> = (0..rdr.len.min(12))
            .map(|i| lossy(rdr.field(i).trim_ascii()))
            .collect();
        let mut found = found.join(", ");
        if rdr.len > 12 {
            found.push_str(", ...");
        }
        let mut message = format!(
            "missing column{} {} in the header (line {}); the header must name all of {} \
             (any order, not case-sensitive; other columns are ignored); found: {}",
            if missing.len() == 1 { "" } else { "s" },
            missing.join(", "),
            rdr.record_line,
            required,
            found
        );
        let first = rdr.field(0);
        if rdr.len == 1 && first.contains(&b';') {
            message.push_str(
                "; the header seems to use ';' between columns, but the file must be \
                 comma-separated",
            );
        } else if rdr.len == 1 && first.contains(&b'\t') {
            message.push_str(
                "; the header seems to use tabs between columns, but the file must be \
                 comma-separated",
            );
        } else if parse_f64(first.trim_ascii()).is_some() {
            message.push_str("; the first line looks like data: add a header row");
        }
        return Err(file_error(path, message));
    }
    let min_fields = idx.iter().max().map_or(0, |m| m + 1);
    Ok(Columns {
        idx,
        min_fields,
        header_fields: rdr.len,
    })
}

// ---------------------------------------------------------------------------------------
// Row rules, shared by both passes so that they accept exactly the same rows.

/// What is wrong with a rejected row; turned into a message only when needed.
#[derive(Debug, Clone, Copy)]
enum Problem {
    /// Fewer fields than the required columns need.
    Short,
    /// Non-empty fields beyond the header's columns.
    Extra,
    /// Column c (index into [`COLUMNS`], 0 = time) is not a number / not a date-time.
    Malformed(usize),
    /// Column c is NaN or infinite.
    NotFinite(usize),
    /// The time is of the other kind than the file's.
    KindMismatch,
    /// The time equals the previous accepted row's.
    Duplicate { prev_line: u64 },
    /// The time is before the previous accepted row's.
    Backwards { t: f64, prev_t: f64, prev_line: u64 },
}

impl Problem {
    fn kind(&self) -> DefectKind {
        match self {
            Problem::Short => DefectKind::ShortRow,
            Problem::Extra | Problem::Malformed(_) | Problem::KindMismatch => DefectKind::Malformed,
            Problem::NotFinite(_) => DefectKind::NotFinite,
            Problem::Duplicate { .. } => DefectKind::Duplicate,
            Problem::Backwards { .. } => DefectKind::Backwards,
        }
    }
}

enum Verdict {
    /// A blank row: ignored (counted by the scan).
    Blank,
    /// A good row at this time; its sample has been written.
    Accept(f64),
    /// A defective row.
    Reject(Problem),
}

/// The row rules and the state they depend on (time kind, previous accepted row).
#[derive(Debug, Clone)]
struct Rules {
    cols: Columns,
    kind: Option<TimeKind>,
    kind_line: u64,
    prev_t: f64,
    prev_line: u64,
    has_prev: bool,
    /// Check only the time column (valid only when no row was rejected in pass 1).
    time_only: bool,
}

#[inline]
fn parse_f64(bytes: &[u8]) -> Option<f64> {
    std::str::from_utf8(bytes).ok()?.parse::<f64>().ok()
}

impl Rules {
    fn new(cols: Columns, kind: Option<TimeKind>, kind_line: u64, time_only: bool) -> Self {
        Rules {
            cols,
            kind,
            kind_line,
            prev_t: 0.0,
            prev_line: 0,
            has_prev: false,
            time_only,
        }
    }

    /// Applies the rules to the current record. On `Accept`, `out` holds the sample
    /// (unless `time_only`); on `Reject`, `out` may be partly overwritten.
    #[inline]
    fn check(&mut self, rec: &RecordReader, out: &mut LoadSample) -> Verdict {
        if rec.len < self.cols.min_fields {
            return if rec.is_blank() {
                Verdict::Blank
            } else {
                Verdict::Reject(Problem::Short)
            };
        }
        let text = rec.field(self.cols.idx[0]).trim_ascii();
        let t = match self.parse_time(text, rec.record_line) {
            Ok(t) => t,
            Err(p) => {
                return if rec.is_blank() {
                    Verdict::Blank
                } else {
                    Verdict::Reject(p)
                };
            }
        };
        if self.has_prev {
            let dt = t - self.prev_t;
            let tol = time_tolerance(t);
            if dt.abs() <= tol {
                return Verdict::Reject(Problem::Duplicate {
                    prev_line: self.prev_line,
                });
            }
            if dt < 0.0 {
                return Verdict::Reject(Problem::Backwards {
                    t,
                    prev_t: self.prev_t,
                    prev_line: self.prev_line,
                });
            }
        }
        if !self.time_only {
            for c in 1..7 {
                let v = match parse_f64(rec.field(self.cols.idx[c]).trim_ascii()) {
                    Some(v) if v.is_finite() => v,
                    Some(_) => return Verdict::Reject(Problem::NotFinite(c)),
                    None => return Verdict::Reject(Problem::Malformed(c)),
                };
                let phase = (c - 1) / 2;
                if c % 2 == 1 {
                    out.p_kw[phase] = v;
                } else {
                    out.q_kvar[phase] = v;
                }
            }
            if rec.len > self.cols.header_fields
                && (self.cols.header_fields..rec.len).any(|i| !rec.field(i).trim_ascii().is_empty())
            {
                return Verdict::Reject(Problem::Extra);
            }
        }
        self.prev_t = t;
        self.prev_line = rec.record_line;
        self.has_prev = true;
        Verdict::Accept(t)
    }

    /// Reads a time; the first readable one decides the file's time kind.
    #[inline]
    fn parse_time(&mut self, text: &[u8], line: u64) -> Result<f64, Problem> {
        match self.kind {
            Some(TimeKind::Elapsed) => match parse_f64(text) {
                Some(t) if t.is_finite() => Ok(t),
                Some(_) => Err(Problem::NotFinite(0)),
                None if iso(text).is_some() => Err(Problem::KindMismatch),
                None => Err(Problem::Malformed(0)),
            },
            Some(TimeKind::Absolute) => match iso(text) {
                Some(t) => Ok(t),
                None if parse_f64(text).is_some() => Err(Problem::KindMismatch),
                None => Err(Problem::Malformed(0)),
            },
            None => {
                if let Some(t) = parse_f64(text) {
                    self.kind = Some(TimeKind::Elapsed);
                    self.kind_line = line;
                    if t.is_finite() {
                        Ok(t)
                    } else {
                        Err(Problem::NotFinite(0))
                    }
                } else if let Some(t) = iso(text) {
                    self.kind = Some(TimeKind::Absolute);
                    self.kind_line = line;
                    Ok(t)
                } else {
                    Err(Problem::Malformed(0))
                }
            }
        }
    }

    /// The message for a rejected row (the record must still be the current one).
    fn describe(&self, rec: &RecordReader, p: &Problem) -> String {
        let time_text = || quoted(rec.field(self.cols.idx[0]).trim_ascii());
        match *p {
            Problem::Short => {
                let missing: Vec<&str> = COLUMNS
                    .iter()
                    .zip(self.cols.idx)
                    .filter(|(_, i)| *i >= rec.len)
                    .map(|(n, _)| *n)
                    .collect();
                format!(
                    "the row has {} field{} but the header has {}, so {} {} missing; is the \
                     line cut short?",
                    rec.len,
                    if rec.len == 1 { "" } else { "s" },
                    self.cols.header_fields,
                    missing.join(", "),
                    if missing.len() == 1 { "is" } else { "are" }
                )
            }
            Problem::Extra => format!(
                "the row has {} fields but the header has {}; a comma inside a value (a \
                 decimal comma?) shifts the columns; use a point as the decimal separator \
                 or quote the value",
                rec.len, self.cols.header_fields
            ),
            Problem::Malformed(0) => {
                let text = rec.field(self.cols.idx[0]).trim_ascii();
                let what = if text.is_empty() {
                    "time is empty".to_string()
                } else {
                    format!("time is {}", quoted(text))
                };
                match self.kind {
                    Some(TimeKind::Elapsed) => format!("{what}, not a number of seconds"),
                    Some(TimeKind::Absolute) => {
                        format!("{what}, not an ISO 8601 date-time such as 2026-03-02T08:00:00")
                    }
                    None => format!(
                        "{what}, neither a number of seconds nor an ISO 8601 date-time such \
                         as 2026-03-02T08:00:00"
                    ),
                }
            }
            Problem::Malformed(c) => {
                let text = rec.field(self.cols.idx[c]).trim_ascii();
                if text.is_empty() {
                    format!("{} is empty, not a number", COLUMNS[c])
                } else {
                    let mut m = format!("{} is {}, not a number", COLUMNS[c], quoted(text));
                    let fixed: Vec<u8> = text
                        .iter()
                        .map(|&b| if b == b',' { b'.' } else { b })
                        .collect();
                    if text.contains(&b',') && parse_f64(&fixed).is_some() {
                        m.push_str("; use a point as the decimal separator");
                    }
                    m
                }
            }
            Problem::NotFinite(c) => {
                let text = rec.field(self.cols.idx[c]).trim_ascii();
                format!("{} is {}, not a finite number", COLUMNS[c], quoted(text))
            }
            Problem::KindMismatch => match self.kind {
                Some(TimeKind::Absolute) => format!(
                    "time is {}, a number of seconds, but this file's times are ISO 8601 \
                     date-times (set by the first data row, line {}); use one kind throughout",
                    time_text(),
                    self.kind_line
                ),
                _ => format!(
                    "time is {}, a date-time, but this file's times are elapsed seconds (set \
                     by the first data row, line {}); use one kind throughout",
                    time_text(),
                    self.kind_line
                ),
            },
            Problem::Duplicate { prev_line } => match self.kind {
                Some(TimeKind::Absolute) => format!(
                    "time {} repeats the previous row's time (line {prev_line}); each time \
                     may appear only once",
                    time_text()
                ),
                _ => format!(
                    "time {} s repeats the previous row's time (line {prev_line}); each time \
                     may appear only once",
                    fmt_secs(self.prev_t)
                ),
            },
            Problem::Backwards {
                t,
                prev_t,
                prev_line,
            } => match self.kind {
                Some(TimeKind::Absolute) => format!(
                    "time {} is {} s earlier than the previous row (line {prev_line}); rows \
                     must be in time order",
                    time_text(),
                    fmt_secs(prev_t - t)
                ),
                _ => format!(
                    "time {} s is earlier than the previous row ({} s, line {prev_line}); \
                     rows must be in time order",
                    fmt_secs(t),
                    fmt_secs(prev_t)
                ),
            },
        }
    }
}

#[inline]
fn iso(text: &[u8]) -> Option<f64> {
    parse_iso8601(std::str::from_utf8(text).ok()?)
}

/// The used rows of a scanned file, one by one, re-applying the row rules.
#[derive(Debug)]
struct AcceptedRows {
    rdr: RecordReader,
    rules: Rules,
    path: PathBuf,
    policy: DefectPolicy,
    accepted: u64,
    expected: u64,
}

impl AcceptedRows {
    /// Reopens the scanned file, checks it has not changed, and skips the header.
    fn open(scan: &CsvScan, time_only: bool) -> Result<Self, ProfileError> {
        if FileStamp::of(&scan.path)? != scan.stamp {
            return Err(changed_error(&scan.path));
        }
        let mut rdr = RecordReader::open(&scan.path)?;
        if read_header(&mut rdr, &scan.path)? != scan.columns {
            return Err(changed_error(&scan.path));
        }
        Ok(AcceptedRows {
            rdr,
            rules: Rules::new(
                scan.columns,
                Some(scan.time_kind),
                scan.kind_line,
                time_only,
            ),
            path: scan.path.clone(),
            policy: scan.options.on_defect,
            accepted: 0,
            expected: scan.rows_used,
        })
    }

    /// The next used row's time, its sample written to `out`; `None` after the last.
    #[inline]
    fn next(&mut self, out: &mut LoadSample) -> Result<Option<f64>, ProfileError> {
        loop {
            if !self.rdr.read().map_err(|e| io_error(&self.path, e))? {
                if self.accepted != self.expected {
                    return Err(changed_error(&self.path));
                }
                return Ok(None);
            }
            match self.rules.check(&self.rdr, out) {
                Verdict::Accept(t) => {
                    self.accepted += 1;
                    if self.accepted > self.expected {
                        return Err(changed_error(&self.path));
                    }
                    return Ok(Some(t));
                }
                Verdict::Blank => {}
                Verdict::Reject(p) => {
                    // Pass 1 stopped on any defect under Stop, so a defect here means
                    // the file changed; under Skip pass 1 recorded it already.
                    if self.policy == DefectPolicy::Stop {
                        return Err(ProfileError::Row {
                            file: self.path.clone(),
                            line: self.rdr.record_line,
                            message: self.rules.describe(&self.rdr, &p),
                        });
                    }
                }
            }
        }
    }

    /// Line of the row last returned.
    fn row_line(&self) -> u64 {
        self.rdr.record_line
    }
}

// ---------------------------------------------------------------------------------------
// Spacing statistics.

/// A spacing in whole microseconds (saturating for absurd values).
#[inline]
fn spacing_key(dt_s: f64) -> i64 {
    (dt_s * 1e6).round() as i64
}

/// Histogram of spacings in µs, with a run-length front so that the common case (the
/// same spacing again) does not touch the map.
#[derive(Debug, Default)]
struct Spacings {
    hist: BTreeMap<i64, u64>,
    run_key: i64,
    run_len: u64,
}

impl Spacings {
    #[inline]
    fn add(&mut self, key: i64) {
        if self.run_len > 0 && key == self.run_key {
            self.run_len += 1;
        } else {
            self.flush();
            self.run_key = key;
            self.run_len = 1;
        }
    }

    fn flush(&mut self) {
        if self.run_len > 0 {
            *self.hist.entry(self.run_key).or_insert(0) += self.run_len;
            self.run_len = 0;
        }
    }

    /// Median of the `n` spacings, µs (mean of the two middle ones for even n).
    fn median_us(&self, n: u64) -> f64 {
        if n == 0 {
            return 0.0;
        }
        let (lo, hi) = ((n - 1) / 2, n / 2);
        let (mut a, mut b) = (None, None);
        let mut seen = 0;
        for (&key, &count) in &self.hist {
            seen += count;
            if a.is_none() && seen > lo {
                a = Some(key);
            }
            if seen > hi {
                b = Some(key);
                break;
            }
        }
        match (a, b) {
            (Some(a), Some(b)) => (a as f64 + b as f64) / 2.0,
            _ => 0.0,
        }
    }

    fn min_us(&self) -> f64 {
        self.hist.keys().next().map_or(0.0, |&k| k as f64)
    }

    fn max_us(&self) -> f64 {
        self.hist.keys().next_back().map_or(0.0, |&k| k as f64)
    }
}

/// Merges two line-ordered defect lists and keeps the first [`MAX_DEFECTS_KEPT`].
fn merge_by_line(a: Vec<Defect>, b: Vec<Defect>) -> Vec<Defect> {
    if b.is_empty() {
        return a;
    }
    let mut all = a;
    all.extend(b);
    // A stable sort keeps a row defect before a gap on the same line (which cannot
    // happen: a gap's line is a used row) and is cheap at this size.
    all.sort_by_key(|d| d.line);
    all.truncate(MAX_DEFECTS_KEPT);
    all
}

fn gap_message(
    kind: TimeKind,
    t_prev: f64,
    line_prev: u64,
    t: f64,
    spacing_s: f64,
    factor: f64,
    median_s: f64,
) -> String {
    format!(
        "gap of {} s after the row at {} (line {line_prev}), more than {} × the median \
         spacing of {} s; that row's load is held across the gap until {}",
        fmt_secs(spacing_s),
        fmt_time(kind, t_prev),
        fmt_secs(factor),
        fmt_secs(median_s),
        fmt_time(kind, t)
    )
}

// ---------------------------------------------------------------------------------------
// Small helpers.

/// Size and modification time of a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct FileStamp {
    len: u64,
    modified: Option<SystemTime>,
}

impl FileStamp {
    fn of(path: &Path) -> Result<Self, ProfileError> {
        let m = std::fs::metadata(path).map_err(|e| io_error(path, e))?;
        Ok(FileStamp {
            len: m.len(),
            modified: m.modified().ok(),
        })
    }
}

fn io_error(path: &Path, source: std::io::Error) -> ProfileError {
    ProfileError::Io {
        file: path.to_path_buf(),
        source,
    }
}

fn file_error(path: &Path, message: String) -> ProfileError {
    ProfileError::File {
        file: path.to_path_buf(),
        message,
    }
}

fn changed_error(path: &Path) -> ProfileError {
    file_error(
        path,
        "the file changed after it was scanned; scan it again".to_string(),
    )
}

fn lossy(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

/// Field text in double quotes, shortened if long.
fn quoted(bytes: &[u8]) -> String {
    let s = String::from_utf8_lossy(bytes);
    if s.chars().count() > MAX_QUOTED_CHARS {
        let short: String = s.chars().take(MAX_QUOTED_CHARS).collect();
        format!("\"{short}...\"")
    } else {
        format!("\"{s}\"")
    }
}

/// Seconds for messages: whole numbers without decimals, others to 1 µs.
fn fmt_secs(t: f64) -> String {
    if !t.is_finite() {
        return format!("{t}");
    }
    if t == t.trunc() && t.abs() < 1e15 {
        return format!("{t:.0}");
    }
    let s = format!("{t:.6}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// A time for messages: `3600 s` (elapsed) or `2026-03-02T08:00:00` (absolute, from
/// epoch seconds; offsets have been applied, so times given with an offset show in UTC).
fn fmt_time(kind: TimeKind, t: f64) -> String {
    match kind {
        TimeKind::Elapsed => format!("{} s", fmt_secs(t)),
        TimeKind::Absolute => {
            if !t.is_finite() {
                return format!("{t}");
            }
            let secs = t.floor();
            let nanos = ((t - secs) * 1e9).round().min(999_999_999.0) as u32;
            match chrono::DateTime::from_timestamp(secs as i64, nanos) {
                Some(d) if nanos == 0 => d.format("%Y-%m-%dT%H:%M:%S").to_string(),
                Some(d) => d.format("%Y-%m-%dT%H:%M:%S%.6f").to_string(),
                None => format!("{} s (epoch)", fmt_secs(t)),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

    fn write(text: &str) -> tempfile::NamedTempFile {
        let mut f = tempfile::NamedTempFile::new().expect("temp file");
        f.write_all(text.as_bytes()).expect("write");
        f.flush().expect("flush");
        f
    }

    /// A row whose P and Q of every phase equal `v`.
    fn row(t: &str, v: f64) -> String {
        format!("{t},{v},{v},{v},{v},{v},{v}\n")
    }

    fn pa_at(src: &mut dyn LoadSource, k: u64, t: f64) -> f64 {
        let mut s = LoadSample::default();
        src.sample(k, t, &mut s).expect("sample");
        s.p_kw[0]
    }

    #[test]
    fn record_reader_counts_physical_lines() {
        // Blank lines, CRLF ends and a quoted field with a line break inside.
        let f = write("h1,h2\r\n1,2\r\n\r\n\r\n3,4\r\n\"a\nb\",5\n6,7");
        let mut r = RecordReader::open(f.path()).unwrap();
        let mut lines = Vec::new();
        while r.read().unwrap() {
            lines.push((r.record_line, lossy(r.field(0)), lossy(r.field(1))));
        }
        assert_eq!(
            lines,
            vec![
                (1, "h1".into(), "h2".into()),
                (2, "1".into(), "2".into()),
                (5, "3".into(), "4".into()),
                (6, "a\nb".into(), "5".into()),
                (8, "6".into(), "7".into()),
            ]
        );
    }

    #[test]
    fn median_of_histogram() {
        let mut s = Spacings::default();
        for k in [10, 10, 30, 20, 10, 40] {
            s.add(k);
        }
        s.flush();
        // Sorted: 10 10 10 20 30 40 → median (10 + 20) / 2.
        assert_eq!(s.median_us(6), 15.0);
        let mut s = Spacings::default();
        for k in [5, 1, 9] {
            s.add(k);
        }
        s.flush();
        assert_eq!(s.median_us(3), 5.0);
    }

    #[test]
    fn finer_and_coarser_grids() {
        let text = format!(
            "{HEADER}{}{}{}",
            row("0", 1.0),
            row("10", 2.0),
            row("20", 3.0)
        );
        let f = write(&text);
        let sc = scan(f.path(), &CsvOptions::default()).unwrap();
        assert_eq!(sc.end_s, 30.0);
        assert_eq!(sc.median_spacing_s, 10.0);
        let mut st = sc.stream().unwrap();
        for k in 0..30u64 {
            let want = 1.0 + (k / 10) as f64;
            assert_eq!(pa_at(&mut st, k, k as f64), want, "t = {k}");
        }
        let mut s = LoadSample::default();
        assert!(matches!(
            st.sample(30, 30.0, &mut s),
            Err(ProfileError::Coverage { .. })
        ));
        let mut st = sc.stream().unwrap();
        assert_eq!(pa_at(&mut st, 0, 0.0), 1.0);
        assert_eq!(pa_at(&mut st, 1, 15.0), 2.0);
        assert!(st.sample(2, 30.0, &mut s).is_err());
    }

    #[test]
    fn float_grid_does_not_miss_rows() {
        // 0.1 * k is not exact in binary; row times written as 0.3 etc. must still be
        // taken at k = 3.
        let mut text = HEADER.to_string();
        for i in 0..=20 {
            text.push_str(&row(&format!("{}", i as f64 / 10.0), i as f64));
        }
        let f = write(&text);
        let sc = scan(f.path(), &CsvOptions::default()).unwrap();
        let mut st = sc.stream().unwrap();
        for k in 0..=20u64 {
            assert_eq!(pa_at(&mut st, k, k as f64 * 0.1), k as f64);
        }
    }

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
    fn options_deserialize_with_defaults() {
        let o: CsvOptions = serde_json::from_str(r#"{"on_defect": "skip"}"#).unwrap();
        assert_eq!(o.on_defect, DefectPolicy::Skip);
        assert_eq!(o.gap_factor, 3.0);
        assert!(serde_json::from_str::<CsvOptions>(r#"{"gap": 2}"#).is_err());
    }

    #[test]
    fn fmt_helpers() {
        assert_eq!(fmt_secs(3600.0), "3600");
        assert_eq!(fmt_secs(0.1 + 0.2), "0.3");
        assert_eq!(fmt_secs(1.5), "1.5");
        assert_eq!(
            fmt_time(TimeKind::Absolute, 1_772_438_400.0),
            "2026-03-02T08:00:00"
        );
    }
}

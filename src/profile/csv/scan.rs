//! Pass 1 over a profile ([`scan_source`], [`scan`], [`scan_bytes`]): reads the whole
//! source once, validates every row, applies the policies, and collects what the file
//! holds and what is wrong with it in [`CsvScan`] (time kind, row counts, spacings,
//! coverage, defects, the [`DefectSummary`]), with memory that stays flat however long
//! the file. Gaps come from a second reading once the median spacing is known (`gaps.rs`).
//! The later passes over a scan are [`CsvScan::stream`] (in `stream.rs`) and
//! [`CsvScan::load`] (in `memory.rs`).

use super::block::{walk, Layout, Parsed, PlainLine, Row, Rows, BLOCK_BYTES};
use super::defect::{
    merge_by_line, Defect, DefectAction, DefectCounts, DefectKind, MAX_DEFECTS_KEPT,
};
use super::errors::io_error;
use super::errors::{file_error, read_error};
use super::gaps::find_gaps;
use super::header::{read_header, ColumnMatch, COLUMNS};
use super::interpolate::lerp;
use super::memory::MemoryProfile;
use super::options::CsvOptions;
use super::replay::{FileStamp, Plan};
use super::rules::{self, Action, Fill, Rejection, Rules};
use super::source::{CsvSource, RawInput, Record, RecordReader};
use super::spacings::Spacings;
use super::summary::{DefectSummary, Tally};
use super::tolerance::{spacing_key, time_tolerance};
use crate::error::ProfileError;
use crate::profile::{DefectPolicy, LoadSample};
use crate::scenario::hex_lower;
use crate::timebase::{Calendar, TimeKind};
use chrono::NaiveDateTime;
use sha2::{Digest, Sha256};
use std::io::Read;
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
    /// The used rows, kept by the scan when they fit in its memory budget.
    pub(super) memory: Kept,
}

/// The used rows kept in memory by the scan (shown by their count in debug output).
#[derive(Clone, Default)]
pub(super) struct Kept(pub(super) Option<Arc<MemoryProfile>>);

impl std::fmt::Debug for Kept {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match &self.0 {
            Some(m) => write!(f, "Kept({} rows)", m.len()),
            None => f.write_str("Kept(none)"),
        }
    }
}

/// Default memory budget for keeping a profile's rows during the scan, bytes (512 MiB:
/// about 9.6 million rows at [`BYTES_PER_ROW`], 111 days at 1 s).
pub const DEFAULT_KEEP_BYTES: u64 = 512 << 20;

/// Memory of one row kept by the scan, bytes: its time and six values as f64 (8 + 48).
/// The values stay f64: f32 carries about 7 significant digits, so a reading of
/// 1234.567 kW would keep only 1234.57, and energies summed over millions of intervals
/// would drift from those of the file; the text is read once and the numbers must be
/// exactly the ones the stream gives.
pub const BYTES_PER_ROW: u64 = 56;

/// How the first pass reads: whether it keeps the used rows in memory (so that runs read
/// them from there instead of the file) and whether it may parse on several threads.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ScanSettings {
    /// Keep the used rows while they take at most this many bytes (and not at all when the
    /// first block of a file shows that the whole would need more than 1.25 times it)
    /// ([`BYTES_PER_ROW`] per row, plus 8 per held or interpolated row); beyond it, drop
    /// them and let runs stream the file, so that memory stays flat. 0 keeps nothing.
    /// Default [`DEFAULT_KEEP_BYTES`].
    pub keep_bytes: u64,
    /// Parse blocks of plain lines on this many threads of rayon's pool (`None`: as many
    /// as the pool has; `Some(1)`: on the calling thread only). Default `None`.
    pub threads: Option<usize>,
    /// Take the fast path on plain text (default true); false reads every record with
    /// the record reader, as a reference for the tests.
    pub fast: bool,
}

impl Default for ScanSettings {
    fn default() -> Self {
        ScanSettings {
            keep_bytes: DEFAULT_KEEP_BYTES,
            threads: None,
            fast: true,
        }
    }
}

impl ScanSettings {
    fn threads(&self) -> usize {
        self.threads
            .unwrap_or_else(rayon::current_num_threads)
            .max(1)
    }
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
    /// The latest spacing (its bits) and its key, so that a steady spacing is keyed once.
    last_dt: (u64, i64),
}

impl Timeline {
    /// [`Timeline::add`] of a used row at `t` on `line` whose spacing from the last one has
    /// the same bits as the spacing before (which needs at least two rows before).
    #[inline(always)]
    fn add_again(&mut self, t: f64, line: u64) {
        self.spacings.add_again();
        self.used += 1;
        self.t_last = t;
        self.last_line = line;
    }

    /// A used row at time `t` on `line`.
    #[inline]
    fn add(&mut self, t: f64, line: u64) {
        if self.used == 0 {
            self.t_first = t;
            self.first_line = line;
        } else {
            let dt = t - self.t_last;
            if dt.to_bits() != self.last_dt.0 || self.used == 1 {
                self.last_dt = (dt.to_bits(), spacing_key(dt));
            }
            self.spacings.add(self.last_dt.1);
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
    scan_source_with(source, opts, &ScanSettings::default())
}

/// Pass 1 as [`scan_source`], with a choice of how to read: see [`ScanSettings`].
pub fn scan_source_with(
    source: &CsvSource,
    opts: &CsvOptions,
    settings: &ScanSettings,
) -> Result<CsvScan, ProfileError> {
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
    let rules = Rules::new(
        columns,
        None,
        0,
        policies,
        opts.decimal,
        opts.delimiter,
        false,
    );
    let mut st = Pass1::new(rules, settings.keep_bytes);

    // The fast path takes the plain text in blocks; the record reader goes on from where
    // it stopped (the start of a line or a block it had a doubt about), or from the
    // header.
    let mut hasher = rdr.take_hasher();
    let (mut offset, mut line) = (rdr.offset, rdr.next_line());
    drop(rdr);
    let delimiter = opts.delimiter as u8;
    let layout = Layout::new(&columns, delimiter, opts.decimal as u8);
    let done = match layout {
        Some(lay) if settings.fast => fast_pass(
            source,
            &lay,
            &mut st,
            &mut hasher,
            (&mut offset, &mut line),
            settings.threads(),
        )?,
        _ => false,
    };
    let sha256 = if done {
        hasher
            .map(|h| hex_lower(h.finalize().as_slice()))
            .unwrap_or_default()
    } else {
        let mut rdr = RecordReader::resume(source, delimiter, offset, line, hasher)
            .map_err(|e| read_error(&name, e))?;
        while rdr.read().map_err(|e| read_error(&name, e))? {
            st.record(&rdr, &name)?;
        }
        match rdr.finish_sha256().map_err(|e| read_error(&name, e))? {
            Some(digest) => hex_lower(&digest),
            None => String::new(),
        }
    };
    let Pass1 {
        rules,
        mut n,
        line_of_time,
        row_defects,
        mut counts,
        mut tally,
        kept,
        ..
    } = st;
    let Timeline {
        used,
        t_first,
        first_line,
        t_last,
        last_line,
        mut spacings,
        ..
    } = line_of_time;
    n.used = used;
    spacings.flush();
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
    let memory = kept.and_then(|k| k.finish()).map(|(times, samples)| {
        Arc::new(MemoryProfile {
            times,
            samples,
            end_s,
            time_kind,
            gap_interpolation_us: (policies[DefectKind::Gap.index()] == DefectPolicy::Interpolate)
                .then_some(gap_threshold_us),
            source: name.clone(),
        })
    });
    Ok(CsvScan {
        memory: Kept(memory),
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

/// The rows kept in memory during the first pass.
#[derive(Debug, Default)]
struct KeptRows {
    times: Vec<f64>,
    samples: Vec<LoadSample>,
    /// Indices of interpolated rows, to be filled in once the next good row is known.
    interpolated: Vec<usize>,
    /// Indices of held and interpolated rows (those that are not good rows), ascending.
    filled: Vec<usize>,
    /// Most bytes the rows may take.
    budget: u64,
}

impl KeptRows {
    /// Adds a row; false when the budget is exceeded.
    #[inline]
    fn push(&mut self, t: f64, s: &LoadSample) -> bool {
        self.times.push(t);
        self.samples.push(*s);
        (self.times.len() as u64) * BYTES_PER_ROW + (self.filled.len() as u64) * 8 <= self.budget
    }

    /// The rows with the values of interpolated rows filled in as the stream fills them:
    /// linear between the last good row before and the next good row after (the nearest
    /// one at either end). `None` when there are no rows.
    fn finish(mut self) -> Option<(Vec<f64>, Vec<LoadSample>)> {
        if self.times.is_empty() {
            return None;
        }
        let n = self.times.len();
        let filled = &self.filled;
        // The run of consecutive filled rows being worked on: positions in `filled`.
        let (mut f, mut run) = (0usize, None::<(usize, usize)>);
        for &i in &self.interpolated {
            while filled[f] < i {
                f += 1;
            }
            let (ra, rb) = match run {
                Some((ra, rb)) if ra <= f && f <= rb => (ra, rb),
                _ => {
                    let (mut ra, mut rb) = (f, f);
                    while ra > 0 && filled[ra - 1] + 1 == filled[ra] {
                        ra -= 1;
                    }
                    while rb + 1 < filled.len() && filled[rb] + 1 == filled[rb + 1] {
                        rb += 1;
                    }
                    run = Some((ra, rb));
                    (ra, rb)
                }
            };
            let left = filled[ra].checked_sub(1);
            let right = Some(filled[rb] + 1).filter(|&r| r < n);
            self.samples[i] = match (left, right) {
                (Some(l), Some(r)) => lerp(
                    &self.samples[l],
                    self.times[l],
                    &self.samples[r],
                    self.times[r],
                    self.times[i],
                ),
                (Some(l), None) => self.samples[l],
                (None, Some(r)) => self.samples[r],
                (None, None) => return None,
            };
        }
        Some((self.times, self.samples))
    }
}

/// The state of the first pass: the rules, the counters, the time line, the defects and
/// the rows kept in memory.
struct Pass1 {
    rules: Rules,
    /// The last row was good, in a state where [`Pass1::steady_row`] may take the next
    /// one (set by [`Pass1::good`], cleared by [`Pass1::record`]).
    steady: bool,
    sample: LoadSample,
    n: Counts,
    line_of_time: Timeline,
    row_defects: Vec<Defect>,
    counts: DefectCounts,
    tally: Tally,
    kept: Option<KeptRows>,
}

impl Pass1 {
    fn new(rules: Rules, keep_bytes: u64) -> Self {
        Pass1 {
            rules,
            steady: false,
            sample: LoadSample::default(),
            n: Counts::default(),
            line_of_time: Timeline::default(),
            row_defects: Vec::new(),
            counts: DefectCounts::default(),
            tally: Tally::default(),
            kept: (keep_bytes > 0).then(|| KeptRows {
                budget: keep_bytes,
                ..KeptRows::default()
            }),
        }
    }

    /// Keeps a used row, or gives up keeping rows when the budget is exceeded.
    #[inline]
    fn keep(&mut self, t: f64, s: &LoadSample) {
        if let Some(k) = self.kept.as_mut() {
            if !k.push(t, s) {
                self.kept = None;
            }
        }
    }

    /// A good row at time `t` on `line`, its values in `self.sample`.
    #[inline]
    fn good(&mut self, t: f64, line: u64) {
        self.line_of_time.add(t, line);
        self.n.good += 1;
        self.tally.timed(t, None);
        self.rules.commit(t, line, Some(&self.sample));
        let s = self.sample;
        self.keep(t, &s);
        self.steady =
            self.rules.steady() && self.line_of_time.used >= 2 && self.tally.good_span_at(t);
    }

    /// A clean row (time `t` on `line`, values in column order) taken in a few stores,
    /// when the row before was good ([`Pass1::steady`]) and this one comes the same
    /// spacing after it, more than the tolerance: exactly what [`Pass1::good_values`]
    /// does then, and the rules would accept it. False (and nothing done) otherwise.
    #[inline(always)]
    fn steady_row(&mut self, t: f64, line: u64, v: &[f64; 6]) -> bool {
        let dt = t - self.rules.prev_t();
        if !(self.steady && dt.to_bits() == self.line_of_time.last_dt.0 && dt > time_tolerance(t)) {
            return false;
        }
        let s = LoadSample {
            p_kw: [v[0], v[2], v[4]],
            q_kvar: [v[1], v[3], v[5]],
        };
        self.line_of_time.add_again(t, line);
        self.n.good += 1;
        self.tally.good_again(t);
        self.rules.commit_steady(t, line, dt, &s);
        self.keep(t, &s);
        true
    }

    /// A clean row the rules accept: time `t`, values in column order.
    #[inline]
    fn good_values(&mut self, t: f64, line: u64, v: &[f64; 6]) {
        self.sample = LoadSample {
            p_kw: [v[0], v[2], v[4]],
            q_kvar: [v[1], v[3], v[5]],
        };
        self.good(t, line);
    }

    /// Applies the rules and the policies to one record.
    fn record<R: Record>(&mut self, rec: &R, name: &Path) -> Result<(), ProfileError> {
        self.steady = false;
        let verdict = self.rules.check(rec, &mut self.sample);
        let line = rec.record_line();
        match self.rules.decide(verdict) {
            Action::Good(t) => self.good(t, line),
            Action::Blank => self.n.blank += 1,
            Action::Stop(r) => {
                return Err(ProfileError::Row {
                    file: name.to_path_buf(),
                    line,
                    message: self.rules.describe(rec, &r),
                });
            }
            Action::Skip(r) => {
                let kind = r.kind();
                self.n.skipped += 1;
                self.defect(rec, &r, DefectAction::Skipped);
                match r.fill_t {
                    Some(t) => self.tally.timed(t, Some(kind)),
                    None => self.tally.untimed(kind),
                }
            }
            Action::Fill(t, fill, r) => {
                self.line_of_time.add(t, line);
                let action = if fill == Fill::Hold {
                    self.n.held += 1;
                    DefectAction::Held
                } else {
                    self.n.interpolated += 1;
                    DefectAction::Interpolated
                };
                self.defect(rec, &r, action);
                self.tally.timed(t, Some(r.kind()));
                self.rules.commit(t, line, None);
                // A held row takes the last good row's values; an interpolated one is
                // filled in once the scan has seen the next good row.
                let held = match self.rules.last_good() {
                    Some((_, s)) if fill == Fill::Hold => *s,
                    _ => LoadSample::default(),
                };
                if let Some(k) = self.kept.as_mut() {
                    let i = k.times.len();
                    k.filled.push(i);
                    if fill == Fill::Interpolate {
                        k.interpolated.push(i);
                    }
                }
                self.keep(t, &held);
            }
        }
        Ok(())
    }

    /// Counts a row defect, notes it in the tally and keeps it in full if there is room.
    fn defect<R: Record>(&mut self, rec: &R, r: &Rejection, action: DefectAction) {
        let kind = r.kind();
        let line = rec.record_line();
        self.counts.add(kind);
        if r.dst() == rules::Dst::Starts {
            self.tally.dst_line(line);
        }
        let rules = &self.rules;
        let mut message = None;
        self.tally.count(kind, line, action, || {
            let m = rules.describe(rec, r);
            message = Some(m.clone());
            format!("line {line}: {m}")
        });
        if self.row_defects.len() < MAX_DEFECTS_KEPT {
            self.row_defects.push(Defect {
                line,
                kind,
                action,
                message: message.unwrap_or_else(|| rules.describe(rec, r)),
            });
        }
    }
}

/// The rows of a block read on one thread, each given to the rules as it is read.
struct OneThread<'a> {
    st: &'a mut Pass1,
    /// Line of the block's first line.
    line: u64,
    /// Rows seen.
    rows: usize,
    block: &'a [u8],
    /// The block ends the source.
    eof: bool,
    lay: &'a Layout,
    name: &'a Path,
}

impl OneThread<'_> {
    /// A row that is not taken the steady way, on `line`.
    #[inline(never)]
    fn other(&mut self, r: &Row, line: u64) -> Result<(), ProfileError> {
        let st = &mut *self.st;
        if r.clean && st.rules.accepts_clean(r.t()) {
            st.good_values(r.t(), line, r.v());
            Ok(())
        } else {
            let (a, b) = (r.start as usize, (r.start + r.len) as usize);
            let unterminated = self.eof && b == self.block.len();
            st.record(
                &PlainLine::new(&self.block[a..b], self.lay.delimiter(), line, unterminated),
                self.name,
            )
        }
    }
}

impl Rows for &mut OneThread<'_> {
    type Error = ProfileError;

    /// Inlined into the walk: the steady rows cost no call.
    #[inline(always)]
    fn row(&mut self, r: &Row) -> Result<(), ProfileError> {
        self.rows += 1;
        let line = self.line + u64::from(r.lf_before);
        if r.clean && self.st.steady_row(r.t(), line, r.v()) {
            Ok(())
        } else {
            self.other(r, line)
        }
    }
}

/// After the first block of `end` bytes and `rows` rows of a source of `total_len`
/// bytes (taken, so that this is done once): gives up keeping the rows at once when the
/// whole source would clearly not fit the budget, so that a long profile never fills it,
/// and otherwise reserves room for the estimate and a little more, so that the columns
/// are not copied as they grow.
fn reserve_kept(st: &mut Pass1, total_len: &mut Option<u64>, rows: usize, end: usize) {
    if let (Some(budget), Some(total)) = (st.kept.as_ref().map(|k| k.budget), total_len.take()) {
        let estimate = rows as f64 * total as f64 / end.max(1) as f64;
        if estimate * BYTES_PER_ROW as f64 > 1.25 * budget as f64 {
            st.kept = None;
        } else if let Some(k) = st.kept.as_mut() {
            let want =
                ((estimate * 1.02) as usize + 16).min((k.budget / BYTES_PER_ROW) as usize + 1);
            let more = want.saturating_sub(k.times.len());
            k.times.reserve_exact(more);
            k.samples.reserve_exact(more);
        }
    }
}

/// The fast path of the first pass (see `block.rs`): reads `source` from byte `at.0`
/// (line `at.1`) in blocks of plain lines, parses each block on `threads` threads and
/// applies the rules in file order, hashing every byte it takes. Returns true when it
/// reached the end of the source; false when it met a doubt, with `at` and `hasher` at
/// the start of the line (on one thread) or block (in parallel) it left to the record
/// reader.
fn fast_pass(
    source: &CsvSource,
    lay: &Layout,
    st: &mut Pass1,
    hasher: &mut Option<Sha256>,
    at: (&mut u64, &mut u64),
    threads: usize,
) -> Result<bool, ProfileError> {
    let (offset, line) = at;
    let name = source.name();
    let io = |e| io_error(name, e);
    let mut input = RawInput::open(source, *offset).map_err(io)?;
    // The size of the source, when it is known before reading it.
    let mut total_len = match source {
        CsvSource::File(p) => std::fs::metadata(p).ok().map(|m| m.len()),
        CsvSource::Bytes { data, .. } => Some(data.len() as u64),
        CsvSource::Reader { .. } => None,
    };
    // The block is read into `store[..filled]`; the store grows to a block as the bytes
    // come (so a small file costs a small buffer) and is then reused without being
    // cleared again.
    let mut store: Vec<u8> = Vec::new();
    let mut filled = 0usize;
    let mut parsed = Parsed::default();
    let mut eof = false;
    loop {
        while !eof && filled < BLOCK_BYTES {
            // Reads to the end of the block or of the input.
            if store.len() == filled {
                let grow = (filled.max(64 * 1024) * 2).min(BLOCK_BYTES);
                store.resize(grow, 0);
            }
            match input.read(&mut store[filled..]) {
                Ok(0) => eof = true,
                Ok(got) => filled += got,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => return Err(io(e)),
            }
        }
        let buf = &store[..filled];
        if buf.is_empty() {
            return Ok(true);
        }
        let end = if eof {
            buf.len()
        } else {
            match memchr::memrchr(b'\n', buf) {
                Some(p) => p + 1,
                // A line longer than a block.
                None => return Ok(false),
            }
        };
        // A line with a quote or a lone carriage return is a doubt found by the walk:
        // on one thread the lines before it are taken and the record reader goes on
        // from it; in parallel the record reader takes the whole block.
        let block = &buf[..end];
        if threads == 1 {
            // On one thread the rules take each row as it is parsed, with nothing kept
            // in between; a doubt hands the rest of the block, from its line, to the
            // record reader.
            let mut each = OneThread {
                st: &mut *st,
                line: *line,
                rows: 0,
                block,
                eof,
                lay,
                name,
            };
            let walked = walk(block, 0, lay, &mut each)?;
            let rows = each.rows;
            let (taken, lf_done) = match walked {
                Ok(lf) => (end, u64::from(lf)),
                Err(d) => (d.at, u64::from(d.lf)),
            };
            if let Some(h) = hasher.as_mut() {
                h.update(&block[..taken]);
            }
            *line += lf_done;
            *offset += taken as u64;
            if walked.is_err() {
                return Ok(false);
            }
            reserve_kept(st, &mut total_len, rows, end);
            store.copy_within(end..filled, 0);
            filled -= end;
            if eof && filled == 0 {
                return Ok(true);
            }
            continue;
        }
        if !parsed.parse(block, lay, threads) {
            return Ok(false);
        }
        // The rules go through the rows in order on this thread while another hashes
        // the block.
        let apply = |st: &mut Pass1| -> Result<u64, ProfileError> {
            let mut lf_done = 0u64;
            for (rows, lf) in &parsed.pieces {
                for r in rows {
                    let l = *line + lf_done + u64::from(r.lf_before);
                    if r.clean && st.steady_row(r.t(), l, r.v()) {
                        continue;
                    }
                    if r.clean && st.rules.accepts_clean(r.t()) {
                        st.good_values(r.t(), l, r.v());
                    } else {
                        let (a, b) = (r.start as usize, (r.start + r.len) as usize);
                        let unterminated = eof && b == block.len();
                        st.record(
                            &PlainLine::new(&block[a..b], lay.delimiter(), l, unterminated),
                            name,
                        )?;
                    }
                }
                lf_done += u64::from(*lf);
            }
            Ok(lf_done)
        };
        let hash = |hasher: &mut Option<Sha256>| {
            if let Some(h) = hasher.as_mut() {
                h.update(block);
            }
        };
        let lf_done = if threads > 1 {
            rayon::join(|| hash(hasher), || apply(st)).1?
        } else {
            hash(hasher);
            apply(st)?
        };
        let rows: usize = parsed.pieces.iter().map(|p| p.0.len()).sum();
        reserve_kept(st, &mut total_len, rows, end);
        *line += lf_done;
        *offset += end as u64;
        store.copy_within(end..filled, 0);
        filled -= end;
        if eof && filled == 0 {
            return Ok(true);
        }
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

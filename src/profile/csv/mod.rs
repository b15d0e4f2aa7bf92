//! Load profiles read from CSV files (DOMAIN.md section 7).
//!
//! This module owns everything between a profile's bytes and the per-interval
//! [`LoadSample`]s the engine asks for:
//!
//! - the source ([`CsvSource`]): a file, bytes in memory, or any reader that can start
//!   again (e.g. a generated profile that never touches the disk);
//! - the dialect: the column delimiter and the decimal mark ([`CsvOptions`]);
//! - the header (`header.rs`): required columns found by base name, with or without a
//!   unit (`p_a_kw`, `P_a [kW]`, `p_a_kw (kW)`), a contradicting unit being an error;
//! - the row rules (`rules.rs`): what makes a row defective, by [`DefectKind`], and what
//!   each kind's [`DefectPolicy`] does with it: stop, skip, hold or interpolate;
//! - pass 1, [`scan`]: validates the whole source and collects its statistics (time
//!   kind, row counts, median spacing, coverage end, defects with line numbers, gaps, the
//!   [`DefectSummary`]) in [`CsvScan`], with memory that stays flat however long the file;
//! - pass 2, [`CsvScan::stream`]: reads the source again and yields samples on the
//!   simulation grid by sample-and-hold, applying the same rules so that it uses exactly
//!   the rows pass 1 used;
//! - [`CsvScan::load`] and [`MemoryProfile`]: the whole profile in memory, for many runs
//!   over one profile, with a [`MemoryCursor`] that does the same sample-and-hold.
//!
//! Sample-and-hold: interval k, starting at t_k, takes the last row whose time is
//! ≤ t_k (within [`time_tolerance`]), and the last row holds for the profile's median
//! spacing, so N evenly spaced rows cover N spacings. Across a gap the previous row holds
//! (policy `hold`) or the load is interpolated linearly between the rows on either side
//! (policy `interpolate`).
//!
//! Line numbers are 1-based physical lines of the file (the header is line 1), counted
//! by line feeds, so they stay right across blank lines, CRLF line ends and quoted
//! fields that contain line breaks.
//!
//! Bad input never panics and never makes memory grow without bound: records are capped
//! in length and width, the spacing histogram is capped in size, and at most
//! [`MAX_DEFECTS_KEPT`] defects are kept in full.

mod header;
mod rules;
mod source;
mod summary;

pub use header::ColumnMatch;
pub use rules::{MAX_ELAPSED_S, MAX_POWER};
pub use source::{CsvSource, OpenFn, MAX_FIELDS, MAX_RECORD_BYTES};
pub use summary::{DefectSummary, KindSummary, FIRST_LINES_KEPT};

use super::{DefectPolicies, DefectPolicy, LoadSample, LoadSource};
use crate::error::ProfileError;
use crate::timebase::TimeKind;
use header::{read_header, Columns};
use rules::{Action, Fill, Rejection, Rules, Verdict};
use serde::{Deserialize, Serialize};
use source::{ReadError, RecordReader};
use std::collections::BTreeMap;
use std::fmt;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::SystemTime;
use summary::Tally;

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

/// Most distinct spacings kept at full (1 µs) resolution; beyond this the histogram
/// coarsens tenfold at a time, so that its memory stays bounded.
const MAX_SPACING_BINS: usize = 1 << 16;

/// Longest field text quoted in a message, characters.
const MAX_QUOTED_CHARS: usize = 40;

/// Time tolerance at time `t_s`, s: [`TIME_TOL_S`], widened to a few units in the last
/// place for large times (epoch seconds), where 1 ns is below the resolution of an f64.
#[inline]
pub fn time_tolerance(t_s: f64) -> f64 {
    TIME_TOL_S.max(t_s.abs() * 4.0 * f64::EPSILON)
}

/// How to read a profile CSV. Deserializes from e.g. `{ on_defect = "skip",
/// gap_factor = 5.0, defects = { gap = "interpolate" }, delimiter = ";", decimal = "," }`,
/// missing keys taking their defaults.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct CsvOptions {
    /// One policy for every kind of row defect (not for gaps). A kind that cannot hold or
    /// interpolate (duplicates, backwards times, a truncated last line) skips instead.
    /// Default: none, so each kind takes its own default ([`DefectKind::default_policy`]).
    pub on_defect: Option<DefectPolicy>,
    /// Policies for single kinds; these win over `on_defect`. Default: none set.
    pub defects: DefectPolicies,
    /// A spacing between rows longer than this many median spacings is reported as a
    /// gap. Must be finite and ≥ 1. Default 3.
    pub gap_factor: f64,
    /// Column delimiter: `,` (default), `;`, tab or `|`.
    pub delimiter: char,
    /// Decimal mark of the numbers: `.` (default) or `,`. With `,` a point in a number
    /// is refused (no thousands separators).
    pub decimal: char,
}

impl Default for CsvOptions {
    fn default() -> Self {
        CsvOptions {
            on_defect: None,
            defects: DefectPolicies::default(),
            gap_factor: 3.0,
            delimiter: ',',
            decimal: '.',
        }
    }
}

/// An invalid CSV option: its key (relative to `[load]`, e.g. `defects.gap`) and what is
/// allowed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct OptionError {
    /// The key, e.g. `decimal` or `defects.duplicate`.
    pub key: String,
    /// What is wrong and what is allowed.
    pub message: String,
}

/// The per-kind setting of a [`DefectPolicies`].
fn configured(p: &DefectPolicies, kind: DefectKind) -> Option<DefectPolicy> {
    match kind {
        DefectKind::Malformed => p.malformed,
        DefectKind::NotFinite => p.not_finite,
        DefectKind::ShortRow => p.short_row,
        DefectKind::TruncatedLastLine => p.truncated_last_line,
        DefectKind::Duplicate => p.duplicate,
        DefectKind::ConflictingDuplicate => p.conflicting_duplicate,
        DefectKind::Backwards => p.backwards,
        DefectKind::Gap => p.gap,
    }
}

impl CsvOptions {
    /// Options with one policy for every kind of row defect.
    pub fn all(policy: DefectPolicy) -> Self {
        CsvOptions {
            on_defect: Some(policy),
            ..CsvOptions::default()
        }
    }

    /// The policy in force for a kind: its own setting, else `on_defect` (skip where
    /// that policy does not apply to the kind; gaps ignore `on_defect`), else the kind's
    /// default.
    pub fn policy(&self, kind: DefectKind) -> DefectPolicy {
        if let Some(p) = configured(&self.defects, kind) {
            return p;
        }
        match self.on_defect {
            Some(_) if kind == DefectKind::Gap => kind.default_policy(),
            Some(p) if kind.allows(p) => p,
            Some(_) => DefectPolicy::Skip,
            None => kind.default_policy(),
        }
    }

    /// The policy of every kind, by [`DefectKind::index`].
    pub fn policies(&self) -> [DefectPolicy; DefectKind::COUNT] {
        DefectKind::ALL.map(|k| self.policy(k))
    }

    /// Checks every option against its allowed values.
    pub fn check(&self) -> Result<(), OptionError> {
        let err = |key: &str, message: String| {
            Err(OptionError {
                key: key.to_string(),
                message,
            })
        };
        if !(self.gap_factor.is_finite() && self.gap_factor >= 1.0) {
            return err(
                "gap_factor",
                format!(
                    "{} is outside the allowed range: a finite number ≥ 1 (median spacings)",
                    self.gap_factor
                ),
            );
        }
        if !matches!(self.delimiter, ',' | ';' | '\t' | '|') {
            return err(
                "delimiter",
                format!(
                    "{:?} is not an allowed delimiter; write \",\" (the default), \";\", \"\\t\" \
                     (tab) or \"|\"",
                    self.delimiter.to_string()
                ),
            );
        }
        if !matches!(self.decimal, '.' | ',') {
            return err(
                "decimal",
                format!(
                    "{:?} is not an allowed decimal mark; write \".\" (the default) or \",\"",
                    self.decimal.to_string()
                ),
            );
        }
        for kind in DefectKind::ALL {
            if let Some(p) = configured(&self.defects, kind) {
                if !kind.allows(p) {
                    let allowed: Vec<&str> = kind.allowed().iter().map(|p| p.name()).collect();
                    return err(
                        &format!("defects.{}", kind.name()),
                        format!(
                            "`{}` does not apply to {}; allowed: {}",
                            p.name(),
                            kind.plural(),
                            allowed.join(", ")
                        ),
                    );
                }
            }
        }
        Ok(())
    }
}

/// The kinds of defect a profile can have.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DefectKind {
    /// A field that is not a number (or a time that is neither a number of seconds nor
    /// an ISO 8601 date-time, or of the other kind than the file's), a number out of range
    /// (±[`MAX_POWER`], ±[`MAX_ELAPSED_S`]), or
    /// non-empty fields beyond the header's columns (columns shifted, e.g. by a decimal
    /// comma). Default policy: stop.
    Malformed,
    /// A number that is NaN or infinite. Default policy: stop.
    NotFinite,
    /// A row with fewer fields than the required columns need. Default policy: stop.
    ShortRow,
    /// The last line of the file, without a line end, cut short or unreadable (the file
    /// was copied while being written). Default policy: skip, with a warning.
    TruncatedLastLine,
    /// A row repeating the previous row's time and values exactly. Default: skip.
    Duplicate,
    /// A row repeating the previous row's time with other values. Default: stop.
    ConflictingDuplicate,
    /// A row whose time is earlier than the previous row's. Default: stop.
    Backwards,
    /// A spacing longer than `gap_factor` median spacings. Default: hold.
    Gap,
}

impl DefectKind {
    /// Number of kinds.
    pub const COUNT: usize = 8;

    /// All kinds, in report order.
    pub const ALL: [DefectKind; DefectKind::COUNT] = [
        DefectKind::Malformed,
        DefectKind::NotFinite,
        DefectKind::ShortRow,
        DefectKind::TruncatedLastLine,
        DefectKind::Duplicate,
        DefectKind::ConflictingDuplicate,
        DefectKind::Backwards,
        DefectKind::Gap,
    ];

    /// Position in [`DefectKind::ALL`].
    #[inline]
    pub fn index(self) -> usize {
        self as usize
    }

    /// True for gaps: a warning about the time line, not about a row.
    pub fn is_warning(self) -> bool {
        self == DefectKind::Gap
    }

    /// The snake_case name used in reports and as the scenario key under `[load.defects]`.
    pub fn name(self) -> &'static str {
        match self {
            DefectKind::Malformed => "malformed",
            DefectKind::NotFinite => "not_finite",
            DefectKind::ShortRow => "short_row",
            DefectKind::TruncatedLastLine => "truncated_last_line",
            DefectKind::Duplicate => "duplicate",
            DefectKind::ConflictingDuplicate => "conflicting_duplicate",
            DefectKind::Backwards => "backwards",
            DefectKind::Gap => "gap",
        }
    }

    fn plural(self) -> &'static str {
        match self {
            DefectKind::Malformed => "malformed rows",
            DefectKind::NotFinite => "rows with NaN or infinite numbers",
            DefectKind::ShortRow => "short rows",
            DefectKind::TruncatedLastLine => "a truncated last line",
            DefectKind::Duplicate => "duplicate rows",
            DefectKind::ConflictingDuplicate => "conflicting duplicate rows",
            DefectKind::Backwards => "rows with backwards times",
            DefectKind::Gap => "gaps",
        }
    }

    /// The policy used when neither `on_defect` nor the kind's own key is given: stop on
    /// malformed numbers, NaN, short rows, conflicting duplicates and backwards times;
    /// skip an exact duplicate and a truncated last line (with a warning); hold across
    /// gaps.
    pub fn default_policy(self) -> DefectPolicy {
        match self {
            DefectKind::TruncatedLastLine | DefectKind::Duplicate => DefectPolicy::Skip,
            DefectKind::Gap => DefectPolicy::Hold,
            _ => DefectPolicy::Stop,
        }
    }

    /// The policies that apply to this kind. Rows with a readable time may be held or
    /// interpolated; rows that repeat or precede the previous time have no time of their
    /// own and may only stop the run or be skipped; a gap cannot be skipped.
    pub fn allowed(self) -> &'static [DefectPolicy] {
        use DefectPolicy::*;
        match self {
            DefectKind::Malformed | DefectKind::NotFinite | DefectKind::ShortRow => {
                &[Stop, Skip, Hold, Interpolate]
            }
            DefectKind::Gap => &[Stop, Hold, Interpolate],
            _ => &[Stop, Skip],
        }
    }

    /// True when `policy` applies to this kind.
    pub fn allows(self, policy: DefectPolicy) -> bool {
        self.allowed().contains(&policy)
    }
}

impl fmt::Display for DefectKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// What was done with one defect.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DefectAction {
    /// The row was left out (the row before it holds in its place).
    Skipped,
    /// The row stays in the profile with the last good row's values; for a gap, the row
    /// before the gap holds across it.
    Held,
    /// The row stays in the profile with values interpolated between the good rows on
    /// either side; for a gap, the load is interpolated across it.
    Interpolated,
}

impl DefectAction {
    /// Lower-case name for reports.
    pub fn name(self) -> &'static str {
        match self {
            DefectAction::Skipped => "skipped",
            DefectAction::Held => "held",
            DefectAction::Interpolated => "interpolated",
        }
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
    /// What was done with it.
    pub action: DefectAction,
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
    /// A truncated last line (0 or 1).
    pub truncated_last_line: u64,
    /// Rows repeating the previous row exactly.
    pub duplicate: u64,
    /// Rows repeating the previous time with other values.
    pub conflicting_duplicate: u64,
    /// Rows earlier than the previous row.
    pub backwards: u64,
    /// Gaps.
    pub gap: u64,
}

impl DefectCounts {
    /// The count of one kind.
    pub fn get(&self, kind: DefectKind) -> u64 {
        match kind {
            DefectKind::Malformed => self.malformed,
            DefectKind::NotFinite => self.not_finite,
            DefectKind::ShortRow => self.short_row,
            DefectKind::TruncatedLastLine => self.truncated_last_line,
            DefectKind::Duplicate => self.duplicate,
            DefectKind::ConflictingDuplicate => self.conflicting_duplicate,
            DefectKind::Backwards => self.backwards,
            DefectKind::Gap => self.gap,
        }
    }

    fn add(&mut self, kind: DefectKind) {
        let c = match kind {
            DefectKind::Malformed => &mut self.malformed,
            DefectKind::NotFinite => &mut self.not_finite,
            DefectKind::ShortRow => &mut self.short_row,
            DefectKind::TruncatedLastLine => &mut self.truncated_last_line,
            DefectKind::Duplicate => &mut self.duplicate,
            DefectKind::ConflictingDuplicate => &mut self.conflicting_duplicate,
            DefectKind::Backwards => &mut self.backwards,
            DefectKind::Gap => &mut self.gap,
        };
        *c += 1;
    }

    /// Number of defective rows (every kind except gaps), whether left out, held or
    /// interpolated.
    pub fn rows(&self) -> u64 {
        self.total() - self.gap
    }

    /// All defects, gaps included.
    pub fn total(&self) -> u64 {
        DefectKind::ALL.iter().map(|&k| self.get(k)).sum()
    }
}

/// What the second pass needs to read the source again exactly as the scan did.
#[derive(Debug, Clone)]
struct Plan {
    source: CsvSource,
    stamp: Option<FileStamp>,
    columns: Columns,
    time_kind: TimeKind,
    kind_line: u64,
    policies: [DefectPolicy; DefectKind::COUNT],
    delimiter: char,
    decimal: char,
    rows_used: u64,
    /// Spacings longer than this are gaps, µs.
    gap_threshold_us: f64,
    /// Later passes must keep each good row's values: pass 1 found duplicate times
    /// (compared by value) or rows to hold or interpolate (filled from good rows).
    keep_values: bool,
}

impl Plan {
    fn name(&self) -> &Path {
        self.source.name()
    }

    fn rules(&self, time_only: bool) -> Rules {
        let mut r = Rules::new(
            self.columns,
            Some(self.time_kind),
            self.kind_line,
            self.policies,
            self.decimal,
            self.delimiter,
            time_only,
        );
        r.keep_values = self.keep_values;
        r
    }
}

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
    plan: Plan,
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

    /// Pass 2: reads the source again and returns a load source that yields samples on
    /// the simulation grid, using exactly the rows this scan used.
    pub fn stream(&self) -> Result<CsvStream, ProfileError> {
        let mut rows = AcceptedRows::open(&self.plan, false, true)?;
        let mut cur = LoadSample::default();
        let cur_t = match rows.next(&mut cur)? {
            Some(t) => t,
            None => return Err(changed_error(self.plan.name())),
        };
        let mut next = LoadSample::default();
        let next_t = rows.next(&mut next)?.unwrap_or(f64::INFINITY);
        let mut st = CsvStream {
            rows,
            cur,
            cur_t,
            next,
            next_t,
            gap_us: self.gap_interpolation_us(),
            cur_gap: false,
            t_first_s: self.t_first_s,
            end_s: self.end_s,
            median_spacing_s: self.median_spacing_s,
            t_last_s: self.t_last_s,
            last_line: self.last_line,
            first_line: self.first_line,
            time_kind: self.time_kind,
        };
        st.update_gap();
        Ok(st)
    }

    /// Reads the whole profile into memory (the used rows only), for many runs over one
    /// profile. Memory: 56 bytes per used row.
    pub fn load(&self) -> Result<MemoryProfile, ProfileError> {
        let mut rows = AcceptedRows::open(&self.plan, false, true)?;
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
            gap_interpolation_us: self.gap_interpolation_us(),
            source: self.path.clone(),
        })
    }

    /// Spacings longer than this (µs) are interpolated across, under the gap policy
    /// `interpolate`.
    fn gap_interpolation_us(&self) -> Option<f64> {
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
    let mut rdr =
        RecordReader::open(source, opts.delimiter as u8).map_err(|e| read_error(&name, e))?;
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
    let mut gaps = Vec::new();
    let mut gap_time_us = 0.0;
    if spacings.max_us as f64 > gap_threshold_us {
        let time_only = n.good == n.used && n.skipped == 0;
        let mut rows = AcceptedRows::open(&plan, time_only, false)?;
        let mut s = LoadSample::default();
        let mut prev: Option<(f64, u64)> = None;
        let gap_policy = policies[DefectKind::Gap.index()];
        while let Some(t) = rows.next(&mut s)? {
            let line = rows.row_line();
            if let Some((tp, lp)) = prev {
                let key = spacing_key(t - tp);
                if key as f64 > gap_threshold_us {
                    let dst = rules::dst_forward(tp, t, median_s, rows.naive_time());
                    let mut message = gap_message(
                        time_kind,
                        tp,
                        lp,
                        t,
                        key as f64 / 1e6,
                        opts.gap_factor,
                        median_s,
                        gap_policy,
                    );
                    if dst {
                        message.push_str(
                            "; this looks like a daylight-saving change (clocks set forward one \
                             hour with times in naive local time), so the profile's time line \
                             has an hour that did not happen: give the times with their UTC \
                             offset (e.g. +01:00)",
                        );
                        tally.dst_line(line);
                    }
                    if gap_policy == DefectPolicy::Stop {
                        message.push_str(
                            "; set gap = \"hold\" or \"interpolate\" under [load.defects] to \
                             run across it",
                        );
                        return Err(ProfileError::Row {
                            file: name,
                            line,
                            message,
                        });
                    }
                    let action = if gap_policy == DefectPolicy::Interpolate {
                        DefectAction::Interpolated
                    } else {
                        DefectAction::Held
                    };
                    counts.add(DefectKind::Gap);
                    let extra_us = key as f64 - median_us;
                    gap_time_us += extra_us;
                    tally.gap_seconds(extra_us / 1e6);
                    let d = Defect {
                        line,
                        kind: DefectKind::Gap,
                        action,
                        message,
                    };
                    tally.count(DefectKind::Gap, line, action, || d.to_string());
                    if gaps.len() < MAX_DEFECTS_KEPT {
                        gaps.push(d);
                    }
                }
            }
            prev = Some((t, line));
        }
    }
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

/// Pass 2 over a scanned CSV: yields samples on the simulation grid by sample-and-hold,
/// reading the source forward once. Holds two rows at a time; memory is flat.
#[derive(Debug)]
pub struct CsvStream {
    rows: AcceptedRows,
    /// The row in force (the last one with time ≤ the last asked t).
    cur: LoadSample,
    cur_t: f64,
    /// The row after it, read ahead (time +∞ after the last row).
    next: LoadSample,
    next_t: f64,
    /// Interpolate across spacings longer than this, µs (`None`: hold across gaps).
    gap_us: Option<f64>,
    /// The spacing from `cur` to `next` is such a gap.
    cur_gap: bool,
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

    #[inline]
    fn update_gap(&mut self) {
        self.cur_gap = match self.gap_us {
            Some(thr) => self.next_t.is_finite() && is_gap(self.next_t - self.cur_t, thr),
            None => false,
        };
    }
}

/// True when a spacing of `dt_s` is longer than `threshold_us`, compared at 1 µs as the
/// scan compares them.
#[inline]
fn is_gap(dt_s: f64, threshold_us: f64) -> bool {
    spacing_key(dt_s) as f64 > threshold_us
}

/// Linear interpolation between two samples at `t` (clamped to [ta, tb]).
#[inline]
fn lerp(a: &LoadSample, ta: f64, b: &LoadSample, tb: f64, t: f64) -> LoadSample {
    let span = tb - ta;
    let f = if span > 0.0 {
        ((t - ta) / span).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let mut out = *a;
    for i in 0..3 {
        out.p_kw[i] += (b.p_kw[i] - a.p_kw[i]) * f;
        out.q_kvar[i] += (b.q_kvar[i] - a.q_kvar[i]) * f;
    }
    out
}

impl LoadSource for CsvStream {
    fn sample(&mut self, _k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let tq = t_s + time_tolerance(t_s);
        if !(tq >= self.t_first_s && tq < self.end_s) {
            return Err(self.coverage_error(t_s));
        }
        if tq < self.cur_t {
            return Err(ProfileError::Coverage {
                file: self.rows.plan.name().to_path_buf(),
                message: format!(
                    "the run asks for the load at {}, but the CSV stream has already moved \
                     past it to {} (line {}); a stream only moves forward (load the profile \
                     into memory to go back)",
                    fmt_time(self.time_kind, t_s),
                    fmt_time(self.time_kind, self.cur_t),
                    self.rows.row_line()
                ),
            });
        }
        if self.next_t <= tq {
            while self.next_t <= tq {
                self.cur = self.next;
                self.cur_t = self.next_t;
                self.next_t = self.rows.next(&mut self.next)?.unwrap_or(f64::INFINITY);
            }
            self.update_gap();
        }
        *out = if self.cur_gap {
            lerp(&self.cur, self.cur_t, &self.next, self.next_t, t_s)
        } else {
            self.cur
        };
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
            file: self.rows.plan.name().to_path_buf(),
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
    /// Interpolate linearly across spacings longer than this, µs (spacings compared at
    /// 1 µs resolution). `None` (the default): every sample holds until the next.
    pub gap_interpolation_us: Option<f64>,
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
            gap_interpolation_us: None,
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
        let (Some(s), Some(&ta)) = (p.samples.get(idx), times.get(idx)) else {
            return Err(file_error(
                &p.source,
                format!(
                    "the profile has {} times but only {} samples",
                    n,
                    p.samples.len()
                ),
            ));
        };
        *out = *s;
        if let Some(thr) = p.gap_interpolation_us {
            if let (Some(&tb), Some(b)) = (times.get(idx + 1), p.samples.get(idx + 1)) {
                if is_gap(tb - ta, thr) {
                    *out = lerp(s, ta, b, tb, t_s);
                }
            }
        }
        Ok(())
    }
}

// ---------------------------------------------------------------------------------------
// Reading the used rows again.

/// The next good row after the current one, found by looking ahead.
#[derive(Debug, Clone, Copy)]
enum Right {
    /// Not looked for yet.
    Unknown,
    /// The next good row ends at this byte offset, at time `t` with sample `s`.
    Good { end: u64, t: f64, s: LoadSample },
    /// There is no good row after this byte offset.
    NoneAfter(u64),
}

/// The used rows of a scanned source, one by one, re-applying the row rules and the
/// policies, with the values of held and interpolated rows filled in.
#[derive(Debug)]
struct AcceptedRows {
    rdr: RecordReader,
    rules: Rules,
    plan: Plan,
    accepted: u64,
    /// Fill in the values of held and interpolated rows (false when only times matter).
    values: bool,
    /// Second reader for looking ahead, made on first use.
    look: Option<RecordReader>,
    right: Right,
}

impl AcceptedRows {
    /// Opens the scanned source again, checks it has not changed, and skips the header.
    fn open(plan: &Plan, time_only: bool, values: bool) -> Result<Self, ProfileError> {
        let name = plan.name();
        if FileStamp::of(&plan.source)? != plan.stamp {
            return Err(changed_error(name));
        }
        let mut rdr = RecordReader::open(&plan.source, plan.delimiter as u8)
            .map_err(|e| read_error(name, e))?;
        let opts = CsvOptions {
            delimiter: plan.delimiter,
            decimal: plan.decimal,
            ..CsvOptions::default()
        };
        match read_header(&mut rdr, name, &opts) {
            Ok((cols, _)) if cols == plan.columns => {}
            _ => return Err(changed_error(name)),
        }
        Ok(AcceptedRows {
            rdr,
            rules: plan.rules(time_only),
            plan: plan.clone(),
            accepted: 0,
            values,
            look: None,
            right: Right::Unknown,
        })
    }

    /// The next used row's time, its sample written to `out`; `None` after the last.
    #[inline]
    fn next(&mut self, out: &mut LoadSample) -> Result<Option<f64>, ProfileError> {
        loop {
            if !self
                .rdr
                .read()
                .map_err(|e| read_error(self.plan.name(), e))?
            {
                if self.accepted != self.plan.rows_used {
                    return Err(changed_error(self.plan.name()));
                }
                return Ok(None);
            }
            let verdict = self.rules.check(&self.rdr, out);
            let line = self.rdr.record_line;
            let t = match self.rules.decide(verdict) {
                Action::Blank | Action::Skip(_) => continue,
                Action::Stop(r) => {
                    // Pass 1 stopped on any such defect, so the file changed.
                    return Err(ProfileError::Row {
                        file: self.plan.name().to_path_buf(),
                        line,
                        message: format!(
                            "{} (this row passed the first reading: the file changed while \
                             being read)",
                            self.rules.describe(&self.rdr, &r)
                        ),
                    });
                }
                Action::Good(t) => {
                    self.rules.commit(t, line, Some(out));
                    t
                }
                Action::Fill(t, fill, _) => {
                    // Commit first: the look-ahead goes on from the state after this row.
                    self.rules.commit(t, line, None);
                    if self.values {
                        *out = match (fill, self.rules.last_good()) {
                            (Fill::Hold, Some((_, s))) => *s,
                            _ => self.interpolate(t)?,
                        };
                    }
                    t
                }
            };
            self.accepted += 1;
            if self.accepted > self.plan.rows_used {
                return Err(changed_error(self.plan.name()));
            }
            return Ok(Some(t));
        }
    }

    /// The values of an interpolated row at time `t` (the current record).
    fn interpolate(&mut self, t: f64) -> Result<LoadSample, ProfileError> {
        let right = self.right_neighbour()?;
        let left = self.rules.last_good().map(|(t, s)| (t, *s));
        match (left, right) {
            (Some((ta, a)), Some((tb, b))) => Ok(lerp(&a, ta, &b, tb, t)),
            (Some((_, a)), None) => Ok(a),
            (None, Some((_, b))) => Ok(b),
            (None, None) => Err(changed_error(self.plan.name())),
        }
    }

    /// The next good row after the current record, by looking ahead with a second reader
    /// (once per run of interpolated rows; the answer is kept until it is passed).
    fn right_neighbour(&mut self) -> Result<Option<(f64, LoadSample)>, ProfileError> {
        let here = self.rdr.offset;
        match self.right {
            Right::Good { end, t, s } if end > here => return Ok(Some((t, s))),
            Right::NoneAfter(o) if here >= o => return Ok(None),
            _ => {}
        }
        let name = self.plan.name().to_path_buf();
        let src = &self.plan.source;
        let rerr = |e| read_error(&name, e);
        let look = match &mut self.look {
            Some(l) => l,
            None => self
                .look
                .insert(RecordReader::open(src, self.plan.delimiter as u8).map_err(rerr)?),
        };
        look.reposition(src, here, self.rdr.next_line())
            .map_err(rerr)?;
        let mut rules = self.rules.clone();
        let mut s = LoadSample::default();
        loop {
            if !look.read().map_err(rerr)? {
                self.right = Right::NoneAfter(here);
                return Ok(None);
            }
            let verdict = rules.check(look, &mut s);
            match rules.decide(verdict) {
                Action::Good(t) => {
                    self.right = Right::Good {
                        end: look.offset,
                        t,
                        s,
                    };
                    return Ok(Some((t, s)));
                }
                Action::Fill(t, _, _) => rules.commit(t, look.record_line, None),
                Action::Blank | Action::Skip(_) => {}
                Action::Stop(_) => return Err(changed_error(&name)),
            }
        }
    }

    /// Line of the row last returned.
    fn row_line(&self) -> u64 {
        self.rdr.record_line
    }

    /// True when the row last returned has a naive ISO 8601 time (no UTC offset).
    fn naive_time(&self) -> bool {
        self.rules.naive(&self.rdr)
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
/// same spacing again) does not touch the map. Exact while there are at most
/// [`MAX_SPACING_BINS`] distinct spacings; beyond that the bins widen tenfold at a time.
#[derive(Debug)]
struct Spacings {
    hist: BTreeMap<i64, u64>,
    /// Bin width, µs.
    res_us: i64,
    run_key: i64,
    run_len: u64,
    n: u64,
    min_us: i64,
    max_us: i64,
}

impl Default for Spacings {
    fn default() -> Self {
        Spacings {
            hist: BTreeMap::new(),
            res_us: 1,
            run_key: 0,
            run_len: 0,
            n: 0,
            min_us: i64::MAX,
            max_us: i64::MIN,
        }
    }
}

impl Spacings {
    #[inline]
    fn add(&mut self, key: i64) {
        self.n += 1;
        self.min_us = self.min_us.min(key);
        self.max_us = self.max_us.max(key);
        if self.run_len > 0 && key == self.run_key {
            self.run_len += 1;
        } else {
            self.flush();
            self.run_key = key;
            self.run_len = 1;
        }
    }

    fn bin(&self, key: i64) -> i64 {
        key.div_euclid(self.res_us)
    }

    fn flush(&mut self) {
        if self.run_len > 0 {
            let b = self.bin(self.run_key);
            *self.hist.entry(b).or_insert(0) += self.run_len;
            self.run_len = 0;
            if self.hist.len() > MAX_SPACING_BINS {
                self.coarsen();
            }
        }
    }

    /// Widens the bins tenfold.
    fn coarsen(&mut self) {
        let old = std::mem::take(&mut self.hist);
        for (b, c) in old {
            *self.hist.entry(b.div_euclid(10)).or_insert(0) += c;
        }
        self.res_us = self.res_us.saturating_mul(10);
    }

    /// Median of the spacings, µs (mean of the two middle ones for an even count; a bin
    /// stands for its middle when the bins are wider than 1 µs). Call after `flush`.
    fn median_us(&self) -> f64 {
        let n = self.n;
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
        let value = |bin: i64| {
            if self.res_us == 1 {
                bin as f64
            } else {
                (bin as f64 + 0.5) * self.res_us as f64
            }
        };
        match (a, b) {
            (Some(a), Some(b)) => (value(a) + value(b)) / 2.0,
            _ => 0.0,
        }
    }
}

/// Merges two line-ordered defect lists and keeps the first [`MAX_DEFECTS_KEPT`].
fn merge_by_line(a: Vec<Defect>, b: Vec<Defect>) -> Vec<Defect> {
    if b.is_empty() {
        return a;
    }
    let mut all = a;
    all.extend(b);
    // A stable sort keeps a row defect before a gap on the same line and is cheap at
    // this size.
    all.sort_by_key(|d| d.line);
    all.truncate(MAX_DEFECTS_KEPT);
    all
}

#[allow(clippy::too_many_arguments)]
fn gap_message(
    kind: TimeKind,
    t_prev: f64,
    line_prev: u64,
    t: f64,
    spacing_s: f64,
    factor: f64,
    median_s: f64,
    policy: DefectPolicy,
) -> String {
    let across = match policy {
        DefectPolicy::Interpolate => format!(
            "the load is interpolated across the gap between that row and the row at {}",
            fmt_time(kind, t)
        ),
        _ => format!(
            "that row's load is held across the gap until {}",
            fmt_time(kind, t)
        ),
    };
    format!(
        "gap of {} s after the row at {} (line {line_prev}), more than {} × the median \
         spacing of {} s; {across}",
        fmt_secs(spacing_s),
        fmt_time(kind, t_prev),
        fmt_secs(factor),
        fmt_secs(median_s),
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
    /// The stamp of a file source; `None` for other sources.
    fn of(src: &CsvSource) -> Result<Option<Self>, ProfileError> {
        let CsvSource::File(path) = src else {
            return Ok(None);
        };
        let m = std::fs::metadata(path).map_err(|e| io_error(path, e))?;
        Ok(Some(FileStamp {
            len: m.len(),
            modified: m.modified().ok(),
        }))
    }
}

fn io_error(path: &Path, source: std::io::Error) -> ProfileError {
    ProfileError::Io {
        file: path.to_path_buf(),
        source,
    }
}

fn read_error(path: &Path, e: ReadError) -> ProfileError {
    match e {
        ReadError::Io(source) => io_error(path, source),
        ReadError::TooLong { line } => ProfileError::Row {
            file: path.to_path_buf(),
            line,
            message: format!(
                "the record starting on this line is longer than {} bytes; is this a CSV \
                 profile? (a quote that is never closed makes the rest of the file one field)",
                MAX_RECORD_BYTES
            ),
        },
        ReadError::TooManyFields { line } => ProfileError::Row {
            file: path.to_path_buf(),
            line,
            message: format!(
                "the record starting on this line has more than {MAX_FIELDS} fields; is the \
                 delimiter right?"
            ),
        },
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
        "the file changed after it was scanned (its rows no longer match the first \
         reading, from line 1 on); scan it again"
            .to_string(),
    )
}

/// Field text in double quotes, shortened if long.
fn quoted(bytes: &[u8]) -> String {
    quoted_str(&String::from_utf8_lossy(bytes))
}

/// Text in double quotes, shortened if long.
fn quoted_str(s: &str) -> String {
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
    fn median_of_histogram() {
        let mut s = Spacings::default();
        for k in [10, 10, 30, 20, 10, 40] {
            s.add(k);
        }
        s.flush();
        // Sorted: 10 10 10 20 30 40 → median (10 + 20) / 2.
        assert_eq!(s.median_us(), 15.0);
        assert_eq!((s.min_us, s.max_us), (10, 40));
        let mut s = Spacings::default();
        for k in [5, 1, 9] {
            s.add(k);
        }
        s.flush();
        assert_eq!(s.median_us(), 5.0);
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
        assert_eq!(o.on_defect, Some(DefectPolicy::Skip));
        assert_eq!(o.gap_factor, 3.0);
        assert_eq!((o.delimiter, o.decimal), (',', '.'));
        assert!(serde_json::from_str::<CsvOptions>(r#"{"gap": 2}"#).is_err());
        let o: CsvOptions = toml::from_str(
            "delimiter = \";\"\ndecimal = \",\"\n[defects]\ngap = \"interpolate\"\n",
        )
        .unwrap();
        assert_eq!((o.delimiter, o.decimal), (';', ','));
        assert_eq!(o.policy(DefectKind::Gap), DefectPolicy::Interpolate);
    }

    #[test]
    fn policies_resolve_kind_then_all_then_default() {
        let d = CsvOptions::default();
        use DefectKind as K;
        use DefectPolicy as P;
        let want = [
            P::Stop,
            P::Stop,
            P::Stop,
            P::Skip,
            P::Skip,
            P::Stop,
            P::Stop,
            P::Hold,
        ];
        assert_eq!(d.policies(), want);
        // One policy for all: kinds that cannot hold skip; gaps keep their own.
        let all = CsvOptions::all(P::Hold);
        assert_eq!(all.policy(K::NotFinite), P::Hold);
        assert_eq!(all.policy(K::Duplicate), P::Skip);
        assert_eq!(all.policy(K::Gap), P::Hold);
        assert_eq!(
            CsvOptions::all(P::Stop).policy(K::TruncatedLastLine),
            P::Stop
        );
        assert_eq!(CsvOptions::all(P::Stop).policy(K::Gap), P::Hold);
        let mut o = CsvOptions::all(P::Skip);
        o.defects.not_finite = Some(P::Interpolate);
        assert_eq!(o.policy(K::NotFinite), P::Interpolate);
        assert_eq!(o.policy(K::Malformed), P::Skip);
        assert!(o.check().is_ok());
        o.defects.backwards = Some(P::Hold);
        let e = o.check().unwrap_err();
        assert_eq!(e.key, "defects.backwards");
        assert_eq!(
            e.message,
            "`hold` does not apply to rows with backwards times; allowed: stop, skip"
        );
        let o = CsvOptions {
            decimal: ';',
            ..CsvOptions::default()
        };
        assert_eq!(o.check().unwrap_err().key, "decimal");
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

    #[test]
    fn histogram_memory_is_bounded() {
        let mut s = Spacings::default();
        for k in 0..(3 * MAX_SPACING_BINS as i64) {
            s.add(1_000_000 + k);
        }
        s.flush();
        assert!(s.hist.len() <= MAX_SPACING_BINS);
        assert!(s.res_us > 1);
        // The spacings are 1 s + 0 … 196 607 µs, median about 1.098 s.
        let m = s.median_us();
        assert!((m - 1_098_303.5).abs() < 10.0, "{m}");
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

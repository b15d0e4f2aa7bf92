//! The defects a profile can have: their kinds ([`DefectKind`]), which policies apply
//! to each and which is the default, what was done with one ([`DefectAction`]), one
//! defect as reported ([`Defect`]), exact counts by kind ([`DefectCounts`]), and how many
//! are kept in full.

use crate::profile::DefectPolicy;
use serde::Serialize;
use std::fmt;

/// At most this many defects of each class (row defects, gaps) are kept in full in
/// [`CsvScan::defects`](super::CsvScan::defects); the counts in
/// [`CsvScan::defect_counts`](super::CsvScan::defect_counts) are always exact.
pub const MAX_DEFECTS_KEPT: usize = 1000;

/// The kinds of defect a profile can have.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DefectKind {
    /// A field that is not a number (or a time that is neither a number of seconds nor
    /// an ISO 8601 date-time, or of the other kind than the file's), a number out of range
    /// (±[`MAX_POWER`](super::MAX_POWER), ±[`MAX_ELAPSED_S`](super::MAX_ELAPSED_S)), or
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

    pub(super) fn plural(self) -> &'static str {
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

    pub(super) fn add(&mut self, kind: DefectKind) {
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

/// Merges two line-ordered defect lists and keeps the first [`MAX_DEFECTS_KEPT`].
pub(super) fn merge_by_line(a: Vec<Defect>, b: Vec<Defect>) -> Vec<Defect> {
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

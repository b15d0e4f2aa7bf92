//! What was wrong with a profile and what was done about it: [`DefectSummary`], built by
//! the scan for the reports, and the running tally behind it.
//!
//! **Profile time affected** by a defect kind is the time, in the profile's own time line,
//! during which the load does not come from a good row because of that kind:
//!
//! - a row left out, held or interpolated whose time is readable and in order covers the
//!   time from its own time to the next row's (one median spacing after the last row);
//! - a row whose time is unreadable, or earlier than the previous row's, counts one median
//!   spacing (the time a row normally covers), since its place in the time line is unknown;
//! - an exact duplicate affects nothing (0 s); a conflicting duplicate affects the time
//!   covered by the row it repeats, whose values were kept although they are in doubt;
//! - a gap affects its spacing minus one median spacing (the part beyond the normal hold).

use super::defect::{DefectAction, DefectKind};
use super::header::ColumnMatch;
use super::text::fmt_secs;
use crate::profile::DefectPolicy;
use serde::Serialize;

/// Lines kept per kind in [`KindSummary::first_lines`].
pub const FIRST_LINES_KEPT: usize = 5;

/// What happened to the defects of one kind.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct KindSummary {
    /// The kind, e.g. `not_finite`.
    pub kind: DefectKind,
    /// The policy in force for this kind (`stop`, `skip`, `hold`, `interpolate`).
    pub policy: DefectPolicy,
    /// Defects of this kind: rows, or gaps for `gap`.
    pub count: u64,
    /// Rows left out.
    pub skipped: u64,
    /// Rows (or gaps) across which the last good row's values were held.
    pub held: u64,
    /// Rows (or gaps) filled by linear interpolation between good rows.
    pub interpolated: u64,
    /// Profile time affected, s (see the module documentation for the definition).
    pub affected_s: f64,
    /// The first few lines with this kind of defect (at most [`FIRST_LINES_KEPT`]).
    pub first_lines: Vec<u64>,
    /// The first such defect in full, e.g. `line 5: p_c_kw is "NaN", not a finite number`.
    pub first: String,
}

/// What the scan found wrong with a profile and what it did, for the reports.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DefectSummary {
    /// The column separator used, e.g. `","`.
    pub delimiter: String,
    /// The decimal mark used, `"."` or `","`.
    pub decimal: String,
    /// Where each required column was found in the header, in [`super::COLUMNS`] order.
    pub columns: Vec<ColumnMatch>,
    /// Data rows read (not counting the header or blank lines).
    pub rows_read: u64,
    /// Rows in the profile: good rows plus held and interpolated ones.
    pub rows_used: u64,
    /// Rows in the profile whose values came from a good row before them.
    pub rows_held: u64,
    /// Rows in the profile whose values were interpolated.
    pub rows_interpolated: u64,
    /// Rows left out.
    pub rows_skipped: u64,
    /// Rows whose fields are all empty, ignored.
    pub blank_rows: u64,
    /// Profile time affected by all defects, s (sum over the kinds).
    pub affected_s: f64,
    /// Share of the profile's coverage affected, 0..1 (may exceed 1 when rows with
    /// unreadable times are counted one median spacing each).
    pub affected_share: f64,
    /// One entry per defect kind found, in report order; kinds not found are left out.
    pub kinds: Vec<KindSummary>,
    /// Lines where the times look like a daylight-saving change (at most
    /// [`FIRST_LINES_KEPT`]): a repeated hour or a skipped hour in naive local times.
    pub daylight_saving_lines: Vec<u64>,
    /// True when the scan's list of defects was cut at [`super::MAX_DEFECTS_KEPT`]
    /// (the counts here are exact all the same).
    pub list_truncated: bool,
}

impl DefectSummary {
    /// True when nothing was wrong with the profile.
    pub fn is_clean(&self) -> bool {
        self.kinds.is_empty()
    }

    /// The summary as short lines of plain text, one per defect kind after a first line
    /// on the rows, e.g. `not_finite: 3 rows, 180 s of profile time, held (lines 5, 9, 12)`.
    pub fn lines(&self) -> Vec<String> {
        let mut out = Vec::new();
        let mut head = format!("{} data rows read, {} used", self.rows_read, self.rows_used);
        if self.rows_held + self.rows_interpolated > 0 {
            head.push_str(&format!(
                " ({} held, {} interpolated)",
                self.rows_held, self.rows_interpolated
            ));
        }
        head.push_str(&format!(", {} left out", self.rows_skipped));
        if self.affected_s > 0.0 {
            head.push_str(&format!(
                "; {} s of profile time affected ({:.2} % of the profile)",
                fmt_secs(round_ms(self.affected_s)),
                100.0 * self.affected_share
            ));
        }
        out.push(head);
        for k in &self.kinds {
            let unit = if k.kind == DefectKind::Gap {
                "gap"
            } else {
                "row"
            };
            let mut done = Vec::new();
            for (n, what) in [
                (k.skipped, "left out"),
                (k.held, "held"),
                (k.interpolated, "interpolated"),
            ] {
                if n > 0 {
                    done.push(if n == k.count {
                        what.to_string()
                    } else {
                        format!("{n} {what}")
                    });
                }
            }
            let lines: Vec<String> = k.first_lines.iter().map(u64::to_string).collect();
            out.push(format!(
                "{}: {} {unit}{}, {} s of profile time, {} (line{} {}{})",
                k.kind,
                k.count,
                if k.count == 1 { "" } else { "s" },
                fmt_secs(round_ms(k.affected_s)),
                done.join(", "),
                if lines.len() == 1 { "" } else { "s" },
                lines.join(", "),
                if (k.first_lines.len() as u64) < k.count {
                    ", ..."
                } else {
                    ""
                }
            ));
        }
        if !self.daylight_saving_lines.is_empty() {
            let lines: Vec<String> = self
                .daylight_saving_lines
                .iter()
                .map(u64::to_string)
                .collect();
            out.push(format!(
                "the times look like a daylight-saving change at line{} {}: give times with \
                 their UTC offset",
                if lines.len() == 1 { "" } else { "s" },
                lines.join(", ")
            ));
        }
        for c in &self.columns {
            if c.header != c.column {
                out.push(format!(
                    "column {} read from field {} \"{}\"",
                    c.column, c.field, c.header
                ));
            }
        }
        out
    }
}

fn round_ms(s: f64) -> f64 {
    (s * 1000.0).round() / 1000.0
}

/// Running totals for one kind.
#[derive(Debug, Clone, Default)]
struct KindTally {
    count: u64,
    skipped: u64,
    held: u64,
    interpolated: u64,
    /// Affected time known from row times, s.
    seconds: f64,
    /// Rows counted one median spacing each.
    median_rows: u64,
    first_lines: Vec<u64>,
    first: Option<String>,
}

/// The running tally of the scan: per kind counts and affected time, with memory that
/// does not grow with the file.
#[derive(Debug, Clone, Default)]
pub(super) struct Tally {
    kinds: [KindTally; DefectKind::COUNT],
    /// The span of profile time that started at the last timed row, and the defect kind
    /// charged with it (`None`: a good row).
    span: Option<(f64, Option<DefectKind>)>,
    dst_lines: Vec<u64>,
}

impl Tally {
    /// Counts a defect on `line`; `message` makes the message if it is the kind's first.
    pub(super) fn count(
        &mut self,
        kind: DefectKind,
        line: u64,
        done: DefectAction,
        message: impl FnOnce() -> String,
    ) {
        let k = &mut self.kinds[kind.index()];
        k.count += 1;
        match done {
            DefectAction::Skipped => k.skipped += 1,
            DefectAction::Held => k.held += 1,
            DefectAction::Interpolated => k.interpolated += 1,
        }
        if k.first_lines.len() < FIRST_LINES_KEPT {
            k.first_lines.push(line);
        }
        if k.first.is_none() {
            k.first = Some(message());
        }
    }

    /// Notes a line that looks like a daylight-saving change.
    pub(super) fn dst_line(&mut self, line: u64) {
        if self.dst_lines.len() < FIRST_LINES_KEPT && !self.dst_lines.contains(&line) {
            self.dst_lines.push(line);
        }
    }

    /// A row with a readable time `t` in order: a used row (`owner` = its defect kind for
    /// a held or interpolated one), or a left-out row (`owner` = its kind).
    #[inline]
    pub(super) fn timed(&mut self, t: f64, owner: Option<DefectKind>) {
        if let Some((t0, prev_owner)) = self.span {
            if let Some(k) = prev_owner {
                self.kinds[k.index()].seconds += (t - t0).max(0.0);
            }
            if t < t0 {
                // A left-out row earlier than a left-out row before it: keep the span.
                if let Some(k) = owner {
                    self.kinds[k.index()].median_rows += 1;
                }
                self.span = Some((t0, prev_owner));
                return;
            }
        }
        self.span = Some((t, owner));
    }

    /// True when the span of profile time open is that of a good row at `t`: then
    /// [`Tally::timed`] of a good row after it only moves the span to it.
    #[inline]
    pub(super) fn good_span_at(&self, t: f64) -> bool {
        matches!(self.span, Some((t0, None)) if t0.to_bits() == t.to_bits())
    }

    /// [`Tally::timed`] of a good row at `t` while the span open is a good row's before it.
    #[inline(always)]
    pub(super) fn good_again(&mut self, t: f64) {
        self.span = Some((t, None));
    }

    /// A left-out row with no place in the time line.
    pub(super) fn untimed(&mut self, kind: DefectKind) {
        match kind {
            DefectKind::Duplicate => {}
            DefectKind::ConflictingDuplicate => {
                if let Some((t0, None)) = self.span {
                    self.span = Some((t0, Some(kind)));
                }
            }
            _ => self.kinds[kind.index()].median_rows += 1,
        }
    }

    /// Affected time of gaps, s.
    pub(super) fn gap_seconds(&mut self, s: f64) {
        self.kinds[DefectKind::Gap.index()].seconds += s;
    }

    /// The summary, given the median spacing and coverage of the profile.
    #[allow(clippy::too_many_arguments)]
    pub(super) fn finish(
        mut self,
        median_s: f64,
        coverage_s: f64,
        policies: &[DefectPolicy; DefectKind::COUNT],
        delimiter: char,
        decimal: char,
        columns: Vec<ColumnMatch>,
        rows: [u64; 6],
        list_truncated: bool,
    ) -> DefectSummary {
        if let Some((_, Some(k))) = self.span.take() {
            self.kinds[k.index()].seconds += median_s;
        }
        let mut kinds = Vec::new();
        let mut affected = 0.0;
        for kind in DefectKind::ALL {
            let k = &self.kinds[kind.index()];
            if k.count == 0 {
                continue;
            }
            let s = k.seconds + k.median_rows as f64 * median_s;
            affected += s;
            let first = k.first.clone().unwrap_or_default();
            kinds.push(KindSummary {
                kind,
                policy: policies[kind.index()],
                count: k.count,
                skipped: k.skipped,
                held: k.held,
                interpolated: k.interpolated,
                affected_s: s,
                first_lines: k.first_lines.clone(),
                first,
            });
        }
        let [rows_read, rows_used, rows_held, rows_interpolated, rows_skipped, blank_rows] = rows;
        DefectSummary {
            delimiter: delimiter.to_string(),
            decimal: decimal.to_string(),
            columns,
            rows_read,
            rows_used,
            rows_held,
            rows_interpolated,
            rows_skipped,
            blank_rows,
            affected_s: affected,
            affected_share: if coverage_s > 0.0 {
                affected / coverage_s
            } else {
                0.0
            },
            kinds,
            daylight_saving_lines: self.dst_lines,
            list_truncated,
        }
    }
}

//! The row rules, shared by every pass so that all passes treat every row alike: what
//! makes a row defective ([`Rules::check`]), what the policy for its kind does with it
//! ([`Rules::decide`]), the state the rules keep (time kind, previous row, last good
//! values), and the message for each defect, including the hint for patterns that look
//! like a daylight-saving change in naive local times.

use super::defect::DefectKind;
use super::header::{Columns, COLUMNS};
use super::number::{parse_f64, parse_number};
use super::options::delimiter_name;
use super::source::Record;
use super::text::{fmt_secs, quoted};
use super::tolerance::time_tolerance;
use crate::profile::{DefectPolicy, LoadSample};
use crate::timebase::{parse_iso8601, parse_iso8601_offset, TimeKind};
use chrono::{Datelike, Timelike};

/// Largest elapsed time accepted, s (about 3 000 years); larger values are refused so
/// that no arithmetic on times overflows.
pub const MAX_ELAPSED_S: f64 = 1e11;

/// Largest power accepted in a value column, kW or kvar (1 TW, far beyond any site);
/// larger values are refused so that interpolation and sums never overflow.
pub const MAX_POWER: f64 = 1e9;

/// Tolerance when matching a jump of one hour, s.
const DST_TOLERANCE_S: f64 = 1e-3;

#[inline]
fn iso(text: &[u8], decimal: u8) -> Option<f64> {
    let s = std::str::from_utf8(text).ok()?;
    match parse_iso8601(s) {
        Some(t) => Some(t),
        // ISO 8601 allows a decimal comma in the seconds.
        None if decimal == b',' && s.contains(',') => parse_iso8601(&s.replace(',', ".")),
        None => None,
    }
}

/// Longest date-time [`LastIso`] keeps, bytes.
const LAST_ISO_BYTES: usize = 40;

/// The last date-time read, for [`LastIso::read`]: its text and its instant.
#[derive(Debug, Clone, Copy)]
struct LastIso {
    text: [u8; LAST_ISO_BYTES],
    len: usize,
    t: f64,
}

impl Default for LastIso {
    fn default() -> Self {
        LastIso {
            text: [0; LAST_ISO_BYTES],
            len: 0,
            t: 0.0,
        }
    }
}

/// The whole seconds of a date-time written `YYYY-MM-DDTHH:MM:SS` (or with a space for
/// the `T`), 0 to 59, with no fraction after them; `None` for any other layout.
fn whole_seconds(text: &[u8]) -> Option<u32> {
    let digits = |r: std::ops::Range<usize>| {
        text.get(r)
            .is_some_and(|d| d.iter().all(u8::is_ascii_digit))
    };
    let layout = text.len() >= 19
        && digits(0..4)
        && text[4] == b'-'
        && digits(5..7)
        && text[7] == b'-'
        && digits(8..10)
        && matches!(text[10], b'T' | b't' | b' ')
        && digits(11..13)
        && text[13] == b':'
        && digits(14..16)
        && text[16] == b':'
        && digits(17..19)
        && !matches!(text.get(19), Some(b'0'..=b'9' | b'.' | b','));
    if !layout {
        return None;
    }
    let s = u32::from(text[17] - b'0') * 10 + u32::from(text[18] - b'0');
    (s <= 59).then_some(s)
}

impl LastIso {
    /// [`iso`] of `text`; when `text` is the last date-time read with other whole seconds
    /// (the same date, hours, minutes and offset), its instant is the last one shifted by
    /// the difference, which is exactly what reading it gives (whole seconds in an f64,
    /// no leap seconds in the time line).
    #[inline]
    fn read(&mut self, text: &[u8], decimal: u8) -> Option<f64> {
        let last = &self.text[..self.len];
        // Only a text kept here (19 bytes or more) is compared.
        if self.len >= 19
            && self.len == text.len()
            && text[..17] == last[..17]
            && text[19..] == last[19..]
        {
            if let (Some(s), Some(s_last)) = (whole_seconds(text), whole_seconds(last)) {
                let t = self.t + (f64::from(s) - f64::from(s_last));
                self.text[17..19].copy_from_slice(&text[17..19]);
                self.t = t;
                return Some(t);
            }
        }
        let t = iso(text, decimal)?;
        if text.len() <= LAST_ISO_BYTES && whole_seconds(text).is_some() {
            self.text[..text.len()].copy_from_slice(text);
            self.len = text.len();
            self.t = t;
        }
        Some(t)
    }
}

/// [`iso`] with the UTC offset written on the time, in seconds east of UTC (`None` for a
/// naive time).
fn iso_offset(text: &[u8], decimal: u8) -> Option<(f64, Option<i32>)> {
    let s = std::str::from_utf8(text).ok()?;
    match parse_iso8601_offset(s) {
        Some(t) => Some(t),
        None if decimal == b',' && s.contains(',') => parse_iso8601_offset(&s.replace(',', ".")),
        None => None,
    }
}

/// True when an ISO 8601 date-time carries a UTC offset (`Z`, `+01:00`, `-0500`).
fn has_offset(text: &[u8]) -> bool {
    text.get(10..)
        .is_some_and(|rest| rest.iter().any(|&b| matches!(b, b'Z' | b'z' | b'+' | b'-')))
}

/// Month (1–12) and hour (0–23) of epoch seconds, if representable.
fn month_hour(t: f64) -> Option<(u32, u32)> {
    if !t.is_finite() {
        return None;
    }
    let d = chrono::DateTime::from_timestamp(t.floor() as i64, 0)?;
    Some((d.month(), d.hour()))
}

/// True for a date and hour at which clocks change somewhere: February–April or
/// September–November, between midnight and 04:00 local time.
fn plausible_change(t: f64) -> bool {
    matches!(month_hour(t), Some((m, h)) if matches!(m, 2..=4 | 9..=11) && h <= 3)
}

/// True when a gap from `t_prev` to `t` in naive local times looks like clocks set
/// forward one hour: the spacing is one hour more than the median spacing.
pub(super) fn dst_forward(t_prev: f64, t: f64, median_s: f64, naive: bool) -> bool {
    naive && ((t - t_prev) - 3600.0 - median_s).abs() <= DST_TOLERANCE_S && plausible_change(t)
}

/// What a backwards or repeated time has to do with a daylight-saving change.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Dst {
    /// Nothing that we can see.
    No,
    /// This row starts an hour that repeats (clocks set back).
    Starts,
    /// This row is inside the hour repeated by the change found at this line.
    Within(u64),
}

/// What is wrong with a rejected row; turned into a message only when needed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Problem {
    /// Fewer fields than the required columns need.
    Short,
    /// Non-empty fields beyond the header's columns.
    Extra,
    /// Column c (index into [`COLUMNS`], 0 = time) is not a number / not a date-time.
    Malformed(usize),
    /// Column c is NaN or infinite.
    NotFinite(usize),
    /// Column c (1..7) is beyond ±[`MAX_POWER`].
    ValueRange(usize),
    /// The elapsed time is beyond ±[`MAX_ELAPSED_S`].
    TimeRange,
    /// The time is of the other kind than the file's.
    KindMismatch,
    /// The time and values repeat the previous row's.
    Duplicate { prev_line: u64, dst: Dst },
    /// The time repeats the previous row's, the values differ (or are unreadable).
    Conflicting { prev_line: u64, dst: Dst },
    /// The time is before the previous row's.
    Backwards {
        t: f64,
        prev_t: f64,
        prev_line: u64,
        dst: Dst,
    },
}

/// A rejected row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Rejection {
    /// What is wrong.
    pub(super) problem: Problem,
    /// The row's time when it is readable and after the previous row's, so that the row
    /// can be held or interpolated in place.
    pub(super) fill_t: Option<f64>,
    /// The row is the last of the file, has no line end, and is cut short or unreadable.
    pub(super) truncated: bool,
}

impl Rejection {
    /// The defect kind, which selects the policy.
    pub(super) fn kind(&self) -> DefectKind {
        if self.truncated {
            return DefectKind::TruncatedLastLine;
        }
        match self.problem {
            Problem::Short => DefectKind::ShortRow,
            Problem::Extra
            | Problem::Malformed(_)
            | Problem::ValueRange(_)
            | Problem::KindMismatch
            | Problem::TimeRange => DefectKind::Malformed,
            Problem::NotFinite(_) => DefectKind::NotFinite,
            Problem::Duplicate { .. } => DefectKind::Duplicate,
            Problem::Conflicting { .. } => DefectKind::ConflictingDuplicate,
            Problem::Backwards { .. } => DefectKind::Backwards,
        }
    }

    /// The line the daylight-saving change was found on, when this row is part of one.
    pub(super) fn dst(&self) -> Dst {
        match self.problem {
            Problem::Duplicate { dst, .. }
            | Problem::Conflicting { dst, .. }
            | Problem::Backwards { dst, .. } => dst,
            _ => Dst::No,
        }
    }
}

/// The rules' verdict on one record.
pub(super) enum Verdict {
    /// A blank row: ignored (counted by the scan).
    Blank,
    /// A good row at this time; its sample has been written.
    Accept(f64),
    /// A defective row.
    Reject(Rejection),
}

/// How a defective row that stays in the profile gets its values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Fill {
    /// The last good row's values.
    Hold,
    /// Linear between the good rows before and after (the nearest one at the ends).
    Interpolate,
}

/// What to do with one record.
pub(super) enum Action {
    /// Ignore it.
    Blank,
    /// A good row of the profile at this time.
    Good(f64),
    /// A defective row that stays in the profile at this time, with filled-in values.
    Fill(f64, Fill, Rejection),
    /// Leave it out.
    Skip(Rejection),
    /// Stop with an error.
    Stop(Rejection),
}

/// The row rules and the state they depend on.
#[derive(Debug, Clone)]
pub(super) struct Rules {
    pub(super) cols: Columns,
    /// The file's time kind, set by the first readable time.
    pub(super) kind: Option<TimeKind>,
    /// Line of the row that set the time kind.
    pub(super) kind_line: u64,
    /// UTC offset written on the time that set the time kind, s east of UTC (`None` for
    /// elapsed times and naive date-times; set only while the kind is being decided).
    pub(super) utc_offset_s: Option<i32>,
    /// Policy of each defect kind, by [`DefectKind::index`].
    policies: [DefectPolicy; DefectKind::COUNT],
    decimal: u8,
    delimiter: char,
    /// Check only the time column (valid only when every row of pass 1 was good).
    time_only: bool,
    /// The previous used row.
    prev_t: f64,
    prev_line: u64,
    has_prev: bool,
    /// Spacing before the previous used row, s (0 if none).
    prev_dt: f64,
    /// Values of the last good row (those of the previous used row when `prev_vals_ok`).
    prev_vals: LoadSample,
    prev_vals_ok: bool,
    /// Time of the last good row, s.
    last_good_t: f64,
    /// A good row has been used.
    pub(super) has_good: bool,
    /// Keep each good row's values (for duplicates and filled rows). Pass 1 always does;
    /// later passes only when pass 1 found a use for them, so that a clean file's stream
    /// copies nothing it does not need.
    pub(super) keep_values: bool,
    /// An hour repeated by a daylight-saving change: it ends at this time; found at this line.
    dst_back: Option<(f64, u64)>,
    /// The last date-time read in full or shifted, so that the next one that differs
    /// only in its seconds is not read again.
    last_iso: LastIso,
}

impl Rules {
    pub(super) fn new(
        cols: Columns,
        kind: Option<TimeKind>,
        kind_line: u64,
        policies: [DefectPolicy; DefectKind::COUNT],
        decimal: char,
        delimiter: char,
        time_only: bool,
    ) -> Self {
        Rules {
            cols,
            kind,
            kind_line,
            utc_offset_s: None,
            policies,
            decimal: decimal as u8,
            delimiter,
            time_only,
            prev_t: 0.0,
            prev_line: 0,
            has_prev: false,
            prev_dt: 0.0,
            prev_vals: LoadSample::default(),
            prev_vals_ok: false,
            last_good_t: 0.0,
            has_good: false,
            keep_values: true,
            dst_back: None,
            last_iso: LastIso::default(),
        }
    }

    /// Applies the rules to the current record. On `Accept`, `out` holds the sample
    /// (unless `time_only`); on `Reject`, `out` may be partly overwritten. The state
    /// changes only through [`Rules::commit`], apart from the time kind (set by the first
    /// readable time) and the note of a daylight-saving change.
    #[inline]
    pub(super) fn check<R: Record>(&mut self, rec: &R, out: &mut LoadSample) -> Verdict {
        let short = rec.n_fields() < self.cols.min_fields;
        if short && rec.is_blank() {
            return Verdict::Blank;
        }
        // A record that ends without a line end is a truncated last line only when it is
        // one physical line; one over several lines is an unclosed quote, which is worse.
        let truncated = rec.unterminated() && rec.inner_lf() == 0;
        let reject = |problem, fill_t| {
            Verdict::Reject(Rejection {
                problem,
                fill_t,
                truncated: truncated
                    && matches!(
                        problem,
                        Problem::Short
                            | Problem::Extra
                            | Problem::Malformed(_)
                            | Problem::NotFinite(_)
                            | Problem::ValueRange(_)
                            | Problem::TimeRange
                            | Problem::KindMismatch
                    ),
            })
        };
        let text = rec.field(self.cols.idx[0]).trim_ascii();
        let t = match self.parse_time(text, rec.record_line()) {
            Ok(t) => t,
            Err(p) => {
                return if rec.is_blank() {
                    Verdict::Blank
                } else if short {
                    reject(Problem::Short, None)
                } else {
                    reject(p, None)
                };
            }
        };
        if self.has_prev {
            let dt = t - self.prev_t;
            let tol = time_tolerance(t);
            if dt.abs() <= tol {
                if short {
                    return reject(Problem::Short, None);
                }
                let dst = self.within_dst(t);
                let prev_line = self.prev_line;
                let mut vals = LoadSample::default();
                let same = self.prev_vals_ok
                    && self.read_values(rec, &mut vals).is_ok()
                    && vals == self.prev_vals;
                return reject(
                    if same {
                        Problem::Duplicate { prev_line, dst }
                    } else {
                        Problem::Conflicting { prev_line, dst }
                    },
                    None,
                );
            }
            if dt < 0.0 {
                if short {
                    return reject(Problem::Short, None);
                }
                let dst = self.backwards_dst(rec, t, dt);
                return reject(
                    Problem::Backwards {
                        t,
                        prev_t: self.prev_t,
                        prev_line: self.prev_line,
                        dst,
                    },
                    None,
                );
            }
        }
        if short {
            return reject(Problem::Short, Some(t));
        }
        if !self.time_only {
            if let Err(p) = self.read_values(rec, out) {
                return reject(p, Some(t));
            }
            if rec.n_fields() > self.cols.header_fields
                && (self.cols.header_fields..rec.n_fields())
                    .any(|i| !rec.field(i).trim_ascii().is_empty())
            {
                return reject(Problem::Extra, Some(t));
            }
        }
        Verdict::Accept(t)
    }

    /// True when [`Rules::check`] would accept a row whose fields all read cleanly (enough
    /// fields, nothing beyond the header, an elapsed time `t` within range and six finite
    /// values within range): the file's times are elapsed seconds and `t` is after the
    /// previous used row's by more than the tolerance.
    #[inline]
    pub(super) fn accepts_clean(&self, t: f64) -> bool {
        self.kind == Some(TimeKind::Elapsed)
            && !self.time_only
            && (!self.has_prev || t - self.prev_t > time_tolerance(t))
    }

    /// Reads the six values of the current record into `out`.
    #[inline]
    fn read_values<R: Record>(&self, rec: &R, out: &mut LoadSample) -> Result<(), Problem> {
        for c in 1..7 {
            let v = match parse_number(rec.field(self.cols.idx[c]).trim_ascii(), self.decimal) {
                Some(v) if v.abs() <= MAX_POWER => v,
                Some(v) if v.is_finite() => return Err(Problem::ValueRange(c)),
                Some(_) => return Err(Problem::NotFinite(c)),
                None => return Err(Problem::Malformed(c)),
            };
            let phase = (c - 1) / 2;
            if c % 2 == 1 {
                out.p_kw[phase] = v;
            } else {
                out.q_kvar[phase] = v;
            }
        }
        Ok(())
    }

    /// What the policies do with a verdict.
    #[inline]
    pub(super) fn decide(&self, v: Verdict) -> Action {
        match v {
            Verdict::Blank => Action::Blank,
            Verdict::Accept(t) => Action::Good(t),
            Verdict::Reject(r) => match (self.policies[r.kind().index()], r.fill_t) {
                (DefectPolicy::Stop, _) => Action::Stop(r),
                (DefectPolicy::Hold, Some(t)) if self.has_good => Action::Fill(t, Fill::Hold, r),
                (DefectPolicy::Interpolate, Some(t)) => Action::Fill(t, Fill::Interpolate, r),
                _ => Action::Skip(r),
            },
        }
    }

    /// Records a used row at time `t` on `line`; `good` holds its values for a good row.
    #[inline]
    pub(super) fn commit(&mut self, t: f64, line: u64, good: Option<&LoadSample>) {
        self.prev_dt = if self.has_prev { t - self.prev_t } else { 0.0 };
        self.prev_t = t;
        self.prev_line = line;
        self.has_prev = true;
        match good {
            Some(v) => {
                if self.keep_values {
                    self.prev_vals = *v;
                }
                self.prev_vals_ok = true;
                self.has_good = true;
                self.last_good_t = t;
            }
            None => self.prev_vals_ok = false,
        }
        if let Some((until, _)) = self.dst_back {
            if t > until + DST_TOLERANCE_S {
                self.dst_back = None;
            }
        }
    }

    /// True when the previous used row was a good row of an elapsed-time file whose
    /// rules check every column, with no repeated hour open: then a clean row after it
    /// by more than the tolerance is good, and committing it changes only what
    /// [`Rules::commit_steady`] changes.
    #[inline]
    pub(super) fn steady(&self) -> bool {
        self.kind == Some(TimeKind::Elapsed)
            && !self.time_only
            && self.has_prev
            && self.has_good
            && self.prev_vals_ok
            && self.keep_values
            && self.dst_back.is_none()
    }

    /// The previous used row's time, s (0 before the first).
    #[inline(always)]
    pub(super) fn prev_t(&self) -> f64 {
        self.prev_t
    }

    /// [`Rules::commit`] of a good row at `t` on `line`, `dt` after the previous used row,
    /// with values `s`, while [`Rules::steady`] holds (which it still does after).
    #[inline(always)]
    pub(super) fn commit_steady(&mut self, t: f64, line: u64, dt: f64, s: &LoadSample) {
        self.prev_dt = dt;
        self.prev_t = t;
        self.prev_line = line;
        self.prev_vals = *s;
        self.last_good_t = t;
    }

    /// The last good row's time and values, if there was one.
    #[inline]
    pub(super) fn last_good(&self) -> Option<(f64, &LoadSample)> {
        self.has_good.then_some((self.last_good_t, &self.prev_vals))
    }

    /// Reads a time; the first readable one decides the file's time kind.
    #[inline]
    fn parse_time(&mut self, text: &[u8], line: u64) -> Result<f64, Problem> {
        let elapsed = |t: f64| {
            if !t.is_finite() {
                Err(Problem::NotFinite(0))
            } else if t.abs() > MAX_ELAPSED_S {
                Err(Problem::TimeRange)
            } else {
                Ok(t)
            }
        };
        match self.kind {
            Some(TimeKind::Elapsed) => match parse_number(text, self.decimal) {
                Some(t) => elapsed(t),
                None if iso(text, self.decimal).is_some() => Err(Problem::KindMismatch),
                None => Err(Problem::Malformed(0)),
            },
            Some(TimeKind::Absolute) => match self.last_iso.read(text, self.decimal) {
                Some(t) => Ok(t),
                None if parse_number(text, self.decimal).is_some() => Err(Problem::KindMismatch),
                None => Err(Problem::Malformed(0)),
            },
            None => {
                if let Some(t) = parse_number(text, self.decimal) {
                    self.kind = Some(TimeKind::Elapsed);
                    self.kind_line = line;
                    elapsed(t)
                } else if let Some((t, offset)) = iso_offset(text, self.decimal) {
                    self.kind = Some(TimeKind::Absolute);
                    self.kind_line = line;
                    self.utc_offset_s = offset;
                    Ok(t)
                } else {
                    Err(Problem::Malformed(0))
                }
            }
        }
    }

    /// True when the current record's time is an ISO 8601 date-time without an offset.
    pub(super) fn naive<R: Record>(&self, rec: &R) -> bool {
        self.kind == Some(TimeKind::Absolute)
            && !has_offset(rec.field(self.cols.idx[0]).trim_ascii())
    }

    /// Is a backwards time at `t`, `dt` s before the previous row, part of a repeated hour?
    fn backwards_dst<R: Record>(&mut self, rec: &R, t: f64, dt: f64) -> Dst {
        if let Dst::Within(l) = self.within_dst(t) {
            return Dst::Within(l);
        }
        let one_hour = (dt + 3600.0).abs() <= DST_TOLERANCE_S
            || (self.prev_dt > 0.0 && (dt + 3600.0 - self.prev_dt).abs() <= DST_TOLERANCE_S);
        if one_hour && self.naive(rec) && plausible_change(t) {
            self.dst_back = Some((self.prev_t, rec.record_line()));
            Dst::Starts
        } else {
            Dst::No
        }
    }

    fn within_dst(&self, t: f64) -> Dst {
        match self.dst_back {
            Some((until, line))
                if t <= until + DST_TOLERANCE_S && t >= until - 3600.0 - DST_TOLERANCE_S =>
            {
                Dst::Within(line)
            }
            _ => Dst::No,
        }
    }

    /// The message for a rejected row (the record must still be the current one).
    pub(super) fn describe<R: Record>(&self, rec: &R, r: &Rejection) -> String {
        let mut m = self.describe_problem(rec, &r.problem);
        if r.truncated {
            m = format!(
                "the last line has no line end and seems cut short (was the file copied while \
                 the logger was writing?): {m}"
            );
        }
        if rec.inner_lf() > 0 {
            let (a, b) = (rec.record_line(), rec.record_line() + rec.inner_lf());
            m.push_str(&format!(
                "; the record runs from line {a} to line {b}: is a quote not closed?"
            ));
        } else if r.problem == Problem::Short && !r.truncated {
            m.push_str("; is the line cut short?");
        }
        match r.dst() {
            Dst::Starts => {
                m.push_str(
                    "; this looks like a daylight-saving change (clocks set back one hour with \
                     times in naive local time, so an hour repeats): give the times with their \
                     UTC offset (e.g. +01:00)",
                );
                m.push_str(
                    if self.policies[DefectKind::Backwards.index()] == DefectPolicy::Stop {
                        ", or set backwards = \"skip\" under [load.defects] to drop the \
                         repeated hour"
                    } else {
                        "; the rows of the repeated hour are left out"
                    },
                );
            }
            Dst::Within(line) => m.push_str(&format!(
                "; part of the hour repeated by the daylight-saving change at line {line}"
            )),
            Dst::No => {}
        }
        m
    }

    fn describe_problem<R: Record>(&self, rec: &R, p: &Problem) -> String {
        let time_text = || quoted(rec.field(self.cols.idx[0]).trim_ascii());
        let decimal_comma = self.decimal == b',';
        match *p {
            Problem::Short => {
                let missing: Vec<&str> = COLUMNS
                    .iter()
                    .zip(self.cols.idx)
                    .filter(|(_, i)| *i >= rec.n_fields())
                    .map(|(n, _)| *n)
                    .collect();
                format!(
                    "the row has {} field{} but the header has {}, so {} {} missing",
                    rec.n_fields(),
                    if rec.n_fields() == 1 { "" } else { "s" },
                    self.cols.header_fields,
                    missing.join(", "),
                    if missing.len() == 1 { "is" } else { "are" }
                )
            }
            Problem::Extra => {
                let mut m = format!(
                    "the row has {} fields but the header has {}",
                    rec.n_fields(),
                    self.cols.header_fields
                );
                if self.delimiter == ',' && !decimal_comma {
                    m.push_str(
                        "; a comma inside a value (a decimal comma?) shifts the columns; use a \
                         point as the decimal separator or quote the value (or, for a file with \
                         decimal commas, separate the columns with ';' and set delimiter = \";\" \
                         and decimal = \",\" under [load])",
                    );
                } else {
                    m.push_str(&format!(
                        "; a {} inside an unquoted value shifts the columns; quote the value",
                        delimiter_name(self.delimiter)
                    ));
                }
                m
            }
            Problem::Malformed(0) => {
                let text = rec.field(self.cols.idx[0]).trim_ascii();
                let what = if text.is_empty() {
                    "time is empty".to_string()
                } else {
                    format!("time is {}", quoted(text))
                };
                let mut m = match self.kind {
                    Some(TimeKind::Elapsed) => format!("{what}, not a number of seconds"),
                    Some(TimeKind::Absolute) => {
                        format!("{what}, not an ISO 8601 date-time such as 2026-03-02T08:00:00")
                    }
                    None => format!(
                        "{what}, neither a number of seconds nor an ISO 8601 date-time such \
                         as 2026-03-02T08:00:00"
                    ),
                };
                m.push_str(&self.number_hint(text));
                m
            }
            Problem::Malformed(c) => {
                let text = rec.field(self.cols.idx[c]).trim_ascii();
                if text.is_empty() {
                    format!("{} is empty, not a number", COLUMNS[c])
                } else {
                    format!(
                        "{} is {}, not a number{}",
                        COLUMNS[c],
                        quoted(text),
                        self.number_hint(text)
                    )
                }
            }
            Problem::NotFinite(c) => {
                let text = rec.field(self.cols.idx[c]).trim_ascii();
                format!("{} is {}, not a finite number", COLUMNS[c], quoted(text))
            }
            Problem::ValueRange(c) => format!(
                "{} is {}, outside the allowed range -{MAX_POWER:e} to {MAX_POWER:e} {}",
                COLUMNS[c],
                quoted(rec.field(self.cols.idx[c]).trim_ascii()),
                if c % 2 == 1 { "kW" } else { "kvar" }
            ),
            Problem::TimeRange => format!(
                "time is {}, outside the allowed range -{MAX_ELAPSED_S:e} to {MAX_ELAPSED_S:e} s",
                time_text(),
            ),
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
            Problem::Duplicate { prev_line, .. } => format!(
                "time {} repeats the previous row's time (line {prev_line}) with the same \
                 values; each time may appear only once",
                self.time_for_message(rec)
            ),
            Problem::Conflicting { prev_line, .. } => format!(
                "time {} repeats the previous row's time (line {prev_line}) with different \
                 values; each time may appear only once, and it is not clear which row is right",
                self.time_for_message(rec)
            ),
            Problem::Backwards {
                t,
                prev_t,
                prev_line,
                ..
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

    /// The row's time as the messages show it.
    fn time_for_message<R: Record>(&self, rec: &R) -> String {
        match self.kind {
            Some(TimeKind::Absolute) => quoted(rec.field(self.cols.idx[0]).trim_ascii()),
            _ => format!("{} s", fmt_secs(self.prev_t)),
        }
    }

    /// Why a number may have failed, when it can be guessed.
    fn number_hint(&self, text: &[u8]) -> String {
        let decimal_comma = self.decimal == b',';
        if !decimal_comma && text.contains(&b',') && parse_number(text, b',').is_some() {
            return "; this looks like a decimal comma: use a point as the decimal separator, \
                    or set decimal = \",\" under [load]"
                .to_string();
        }
        if decimal_comma && text.contains(&b'.') {
            let unpointed: Vec<u8> = text.iter().copied().filter(|&b| b != b'.').collect();
            if parse_number(&unpointed, b',').is_some() || parse_f64(text).is_some() {
                return "; with decimal = \",\" a point is not allowed in a number (no thousands \
                        separators; or is the file's decimal mark a point?)"
                    .to_string();
            }
        }
        let end = text
            .iter()
            .rposition(|b| !b.is_ascii_alphabetic() && *b != b' ')
            .map_or(0, |i| i + 1);
        if end > 0 && end < text.len() && parse_number(&text[..end], self.decimal).is_some() {
            return "; give plain numbers (units belong in the header, e.g. p_a_kw [kW])"
                .to_string();
        }
        String::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // A date-time that differs from the last one only in its whole seconds gets the
    // instant the full reading gives (the reference: `iso`), on every second of two
    // days, with and without offsets, and not for other layouts.
    #[test]
    fn shifted_seconds_read_as_the_full_reading() {
        let mut last = LastIso::default();
        let mut shifted = 0;
        for day in ["2026-03-29", "2026-10-25"] {
            for suffix in ["Z", "+01:00", "-0500", "", "+02"] {
                for sep in ["T", " "] {
                    for k in (0..86_400).step_by(7) {
                        let text = format!(
                            "{day}{sep}{:02}:{:02}:{:02}{suffix}",
                            k / 3600,
                            k / 60 % 60,
                            k % 60
                        );
                        let before = last.len;
                        let got = last.read(text.as_bytes(), b'.');
                        assert_eq!(got, iso(text.as_bytes(), b'.'), "{text}");
                        shifted += usize::from(before == text.len() && got.is_some());
                    }
                }
            }
        }
        assert!(shifted > 50_000, "{shifted}");
        for text in [
            "2026-03-29T10:00:00.5Z",
            "2026-03-29T10:00:01.5Z",
            "2026-03-29T10:00:60Z",
            "",
            "7",
            "2026-03-29T10:00",
            "2026-03-29T10:00:0",
            "2026-03-29T10:00:07Z",
            "2026-03-29T10:00:0xZ",
            "2026-03-29T10:00:08\u{e9}",
        ] {
            assert_eq!(
                last.read(text.as_bytes(), b'.'),
                iso(text.as_bytes(), b'.'),
                "{text}"
            );
        }
        assert_eq!(whole_seconds(b"2026-03-29T10:00:07,5"), None);
        assert_eq!(whole_seconds(b"2026-03-29T10:00"), None);
        assert_eq!(whole_seconds(b"2026-03-29 10:00:07+01:00"), Some(7));
    }

    #[test]
    fn offsets_and_plausible_dates() {
        assert!(has_offset(b"2026-03-29T03:00:00Z"));
        assert!(has_offset(b"2026-03-29T03:00:00+02:00"));
        assert!(has_offset(b"2026-03-29 03:00:00-0500"));
        assert!(!has_offset(b"2026-03-29T03:00:00"));
        assert!(!has_offset(b"2026-03-29 03:00"));
        // 2026-03-29T03:00:00 (naive, read as UTC) is 1 774 753 200 s after the epoch.
        let t = parse_iso8601("2026-03-29T03:00:00").unwrap();
        assert!(dst_forward(t - 4500.0, t, 900.0, true));
        assert!(!dst_forward(t - 4500.0, t, 900.0, false));
        assert!(!dst_forward(t - 4400.0, t, 900.0, true));
        let july = parse_iso8601("2026-07-05T03:00:00").unwrap();
        assert!(!dst_forward(july - 4500.0, july, 900.0, true));
    }
}

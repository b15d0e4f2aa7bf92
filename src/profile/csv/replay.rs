//! Reading the used rows again. The scan leaves a [`Plan`]: what a later pass needs to
//! read the source exactly as the scan did (columns, time kind, policies, dialect, row
//! count, and the file's size and modification time). [`AcceptedRows`] follows it,
//! re-applying the row rules and the policies, and fills in the values of held and
//! interpolated rows (looking ahead with a second reader for the next good row). Every
//! later pass (the gap pass of the scan, the stream, loading into memory) reads through
//! it, and each stops with an error if the file no longer matches the scan.

use super::defect::DefectKind;
use super::errors::{changed_error, io_error, read_error};
use super::header::{read_header, Columns};
use super::interpolate::lerp;
use super::options::CsvOptions;
use super::rules::{Action, Fill, Rules};
use super::source::{CsvSource, RecordReader};
use crate::error::ProfileError;
use crate::profile::{DefectPolicy, LoadSample};
use crate::timebase::TimeKind;
use std::path::Path;
use std::time::SystemTime;

/// What the second pass needs to read the source again exactly as the scan did.
#[derive(Debug, Clone)]
pub(super) struct Plan {
    pub(super) source: CsvSource,
    pub(super) stamp: Option<FileStamp>,
    pub(super) columns: Columns,
    pub(super) time_kind: TimeKind,
    pub(super) kind_line: u64,
    pub(super) policies: [DefectPolicy; DefectKind::COUNT],
    pub(super) delimiter: char,
    pub(super) decimal: char,
    pub(super) rows_used: u64,
    /// Spacings longer than this are gaps, µs.
    pub(super) gap_threshold_us: f64,
    /// Later passes must keep each good row's values: pass 1 found duplicate times
    /// (compared by value) or rows to hold or interpolate (filled from good rows).
    pub(super) keep_values: bool,
}

impl Plan {
    pub(super) fn name(&self) -> &Path {
        self.source.name()
    }

    pub(super) fn rules(&self, time_only: bool) -> Rules {
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

/// Size and modification time of a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct FileStamp {
    len: u64,
    modified: Option<SystemTime>,
}

impl FileStamp {
    /// The stamp of a file source; `None` for other sources.
    pub(super) fn of(src: &CsvSource) -> Result<Option<Self>, ProfileError> {
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
pub(super) struct AcceptedRows {
    rdr: RecordReader,
    rules: Rules,
    pub(super) plan: Plan,
    accepted: u64,
    /// Fill in the values of held and interpolated rows (false when only times matter).
    values: bool,
    /// Second reader for looking ahead, made on first use.
    look: Option<RecordReader>,
    right: Right,
}

impl AcceptedRows {
    /// Opens the scanned source again, checks it has not changed, and skips the header.
    pub(super) fn open(plan: &Plan, time_only: bool, values: bool) -> Result<Self, ProfileError> {
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
    pub(super) fn next(&mut self, out: &mut LoadSample) -> Result<Option<f64>, ProfileError> {
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
    pub(super) fn row_line(&self) -> u64 {
        self.rdr.record_line
    }

    /// True when the row last returned has a naive ISO 8601 time (no UTC offset).
    pub(super) fn naive_time(&self) -> bool {
        self.rules.naive(&self.rdr)
    }
}

//! Pass 2 over a scanned CSV ([`CsvStream`], made by [`CsvScan::stream`]): reads the
//! source forward once and yields the load on the simulation grid by sample-and-hold
//! (interpolating across gaps under the gap policy `interpolate`), holding two rows at
//! a time, so that memory stays flat.

use super::errors::changed_error;
use super::interpolate::lerp;
use super::replay::AcceptedRows;
use super::scan::CsvScan;
use super::text::{fmt_secs, fmt_time};
use super::tolerance::{first_interval_reaching, is_gap, time_tolerance};
use crate::error::ProfileError;
use crate::profile::{LoadSample, LoadSource};
use crate::timebase::TimeKind;

impl CsvScan {
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
            grid: None,
        };
        st.update_gap();
        Ok(st)
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
    /// The run's grid (first time, Δt), s, for [`LoadSource::unchanged_until`].
    grid: Option<(f64, f64)>,
}

impl CsvStream {
    /// Tells the stream the run's grid t_k = `t_first_s` + k·`dt_s` (s), so that
    /// [`LoadSource::unchanged_until`] can promise the intervals until the next row.
    pub fn on_grid(mut self, t_first_s: f64, dt_s: f64) -> Self {
        self.grid = Some((t_first_s, dt_s));
        self
    }

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

    /// On a known grid: the interval at which the row read ahead (or the end of
    /// coverage) comes into force; across an interpolated gap, k + 1.
    fn unchanged_until(&self, k: u64) -> u64 {
        match self.grid {
            Some((t0, dt)) if !self.cur_gap => {
                let t_next = if self.next_t.is_finite() {
                    self.next_t
                } else {
                    self.end_s
                };
                first_interval_reaching(t0, dt, k, t_next)
            }
            _ => k + 1,
        }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::profile::csv::testing::{pa_at, row, write, HEADER};
    use crate::profile::csv::{scan, CsvOptions};

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
}

//! A whole profile in memory ([`MemoryProfile`], kept by the scan when it fits in its
//! budget, made by [`CsvScan::load`] or from parts), for many runs over one profile, and
//! its sample-and-hold cursors: [`MemoryCursor`] borrows the profile, [`SharedCursor`]
//! shares it through an `Arc` (the source of a study's runs); both may also go back in
//! time, and on a known grid they say how long a sample stays unchanged.

use super::errors::file_error;
use super::interpolate::lerp;
use super::replay::AcceptedRows;
use super::scan::CsvScan;
use super::text::fmt_time;
use super::tolerance::first_interval_reaching;
use super::tolerance::{is_gap, time_tolerance};
use crate::error::ProfileError;
use crate::profile::{LoadSample, LoadSource};
use crate::timebase::TimeKind;
use std::ops::Deref;
use std::path::PathBuf;
use std::sync::Arc;

impl CsvScan {
    /// The used rows as the scan kept them in memory, when they fitted in its budget
    /// ([`ScanSettings::keep_bytes`](super::ScanSettings)); `None` when the scan kept
    /// nothing, and runs stream the file.
    pub fn memory(&self) -> Option<&Arc<MemoryProfile>> {
        self.memory.0.as_ref()
    }

    /// The whole profile in memory, shared: the rows the scan kept, or else read again
    /// from the source ([`CsvScan::load`]).
    pub fn load_shared(&self) -> Result<Arc<MemoryProfile>, ProfileError> {
        match self.memory() {
            Some(m) => Ok(Arc::clone(m)),
            None => self.load().map(Arc::new),
        }
    }

    /// Reads the whole profile into memory (the used rows only), for many runs over one
    /// profile: a copy of the rows the scan kept, or else read again from the source.
    /// Memory: 56 bytes per used row.
    pub fn load(&self) -> Result<MemoryProfile, ProfileError> {
        if let Some(m) = self.memory() {
            return Ok(MemoryProfile::clone(m));
        }
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
        Cursor {
            profile: self,
            at: At::default(),
        }
    }

    /// A sample-and-hold source sharing this profile, for a run that must own its source.
    pub fn shared_cursor(self: &Arc<Self>) -> SharedCursor {
        Cursor {
            profile: Arc::clone(self),
            at: At::default(),
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

/// Where a cursor stands: the row in force, and the grid it is asked on when known.
#[derive(Debug, Clone, Copy, Default)]
struct At {
    idx: usize,
    /// The run's grid (first time, Δt), s, for [`LoadSource::unchanged_until`].
    grid: Option<(f64, f64)>,
}

impl MemoryProfile {
    /// Sample-and-hold at `t_s` from the row at `at.idx`. Moving forward costs O(1)
    /// amortised per row passed (a short linear walk, then a binary search for long
    /// jumps); going back costs a binary search.
    #[inline]
    fn sample_at(&self, at: &mut At, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let times = &self.times;
        let tq = t_s + time_tolerance(t_s);
        let first = match times.first() {
            Some(&f) => f,
            None => return Err(self.coverage_error(t_s)),
        };
        if !(tq >= first && tq < self.end_s) {
            return Err(self.coverage_error(t_s));
        }
        let n = times.len();
        let mut idx = at.idx.min(n - 1);
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
        at.idx = idx;
        let (Some(s), Some(&ta)) = (self.samples.get(idx), times.get(idx)) else {
            return Err(file_error(
                &self.source,
                format!(
                    "the profile has {} times but only {} samples",
                    n,
                    self.samples.len()
                ),
            ));
        };
        *out = *s;
        if let Some(thr) = self.gap_interpolation_us {
            if let (Some(&tb), Some(b)) = (times.get(idx + 1), self.samples.get(idx + 1)) {
                if is_gap(tb - ta, thr) {
                    *out = lerp(s, ta, b, tb, t_s);
                }
            }
        }
        Ok(())
    }

    /// After sampling interval k from the row at `at.idx`: the first interval whose
    /// sample may differ (the next row, or the end of coverage), on the cursor's grid.
    fn next_change(&self, at: &At, k: u64) -> u64 {
        let Some((t0, dt)) = at.grid else {
            return k + 1;
        };
        let (Some(&ta), next) = (self.times.get(at.idx), self.times.get(at.idx + 1)) else {
            return k + 1;
        };
        let t_next = match next {
            Some(&tb) => {
                if self
                    .gap_interpolation_us
                    .is_some_and(|thr| is_gap(tb - ta, thr))
                {
                    // Interpolated across a gap: every interval differs.
                    return k + 1;
                }
                tb
            }
            None => self.end_s,
        };
        first_interval_reaching(t0, dt, k, t_next)
    }

    /// [`LoadSource::fill`] for a cursor at `at`: the same samples and the same stops as
    /// the default. A sample that stays on its row or moves to the next takes a short
    /// path (the same row `sample_at` finds). The promise is asked for in full only when
    /// interval k + 1 does not reach the next row (by the comparison
    /// [`first_interval_reaching`] makes): on data as fine as the grid, every interval
    /// reaches the next row and nothing is promised.
    fn fill_at(
        &self,
        at: &mut At,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        out: &mut [LoadSample],
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        let on_grid = stop_at_hold && at.grid.is_some();
        let times = &self.times;
        let n = times.len();
        // Held rows only (no interpolation across gaps), one sample per time.
        let plain = self.gap_interpolation_us.is_none() && n > 0 && self.samples.len() == n;
        // j as a float, counted along: exact, so the times are `t_first_s + j as f64 * dt_s`.
        let mut jf = k as f64;
        for (i, s) in out.iter_mut().enumerate() {
            let j = k + i as u64;
            let t_s = t_first_s + jf * dt_s;
            jf += 1.0;
            // The usual step, as `sample_at` takes it: inside the coverage, not back in
            // time, and the row in force or the next one (its forward walk stopping after
            // at most one step); anything else goes the whole way.
            let tq = t_s + time_tolerance(t_s);
            let idx = at.idx;
            let step = plain && tq >= times[0] && tq < self.end_s && idx < n && times[idx] <= tq;
            let fast = step.then(|| {
                let ahead = |x: usize| x + 1 < n && times[x + 1] <= tq;
                match (ahead(idx), ahead(idx + 1)) {
                    (false, _) => Some(idx),
                    (true, false) => Some(idx + 1),
                    (true, true) => None,
                }
            });
            if let Some(Some(x)) = fast {
                at.idx = x;
                *s = self.samples[x];
            } else if let Err(e) = self.sample_at(at, t_s, s) {
                return (i, Some(e));
            }
            if on_grid && self.may_hold(at, j, jf) && self.next_change(at, j) > j + 1 {
                return (i + 1, None);
            }
        }
        (out.len(), None)
    }

    /// False only when [`MemoryProfile::next_change`] after interval j is sure to be
    /// j + 1: the grid's interval j + 1 (`j1f`, j + 1 as a float) reaches the row after
    /// the one in force.
    #[inline]
    fn may_hold(&self, at: &At, j: u64, j1f: f64) -> bool {
        let Some((t0, dt)) = at.grid else {
            return false;
        };
        let t_next = match self.times.get(at.idx + 1) {
            Some(&tb) => tb,
            None => self.end_s,
        };
        // Far out on the grid the full answer may differ (it gives up past 1e15
        // intervals); ask it there.
        let t = t0 + j1f * dt;
        let reaches = t_next <= t + time_tolerance(t);
        !reaches || j >= 1 << 48
    }
}

/// Sample-and-hold over a [`MemoryProfile`] reached through `P`: a borrow
/// ([`MemoryCursor`]) or an `Arc` ([`SharedCursor`], for a source that must own what it
/// reads, such as a study's runs). Moving forward costs O(1) amortised per row passed;
/// asking for an earlier time than the last is allowed and costs a binary search.
#[derive(Debug, Clone)]
pub struct Cursor<P> {
    profile: P,
    at: At,
}

/// A cursor borrowing its profile.
pub type MemoryCursor<'a> = Cursor<&'a MemoryProfile>;

/// A cursor sharing its profile through an `Arc`.
pub type SharedCursor = Cursor<Arc<MemoryProfile>>;

impl<P: Deref<Target = MemoryProfile>> Cursor<P> {
    /// Tells the cursor the run's grid t_k = `t_first_s` + k·`dt_s` (s), so that
    /// [`LoadSource::unchanged_until`] can promise the intervals until the next row.
    pub fn on_grid(mut self, t_first_s: f64, dt_s: f64) -> Self {
        self.at.grid = Some((t_first_s, dt_s));
        self
    }

    /// The profile read.
    pub fn profile(&self) -> &P {
        &self.profile
    }
}

impl<P: Deref<Target = MemoryProfile>> LoadSource for Cursor<P> {
    #[inline]
    fn sample(&mut self, _k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        self.profile.sample_at(&mut self.at, t_s, out)
    }

    fn unchanged_until(&self, k: u64) -> u64 {
        self.profile.next_change(&self.at, k)
    }

    fn fill(
        &mut self,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        out: &mut [LoadSample],
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        self.profile
            .fill_at(&mut self.at, k, t_first_s, dt_s, out, stop_at_hold)
    }
}

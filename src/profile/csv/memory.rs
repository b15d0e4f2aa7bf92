//! A whole profile in memory ([`MemoryProfile`], made by [`CsvScan::load`] or from
//! parts), for many runs over one profile, and its sample-and-hold cursor
//! ([`MemoryCursor`]), which may also go back in time.

use super::errors::file_error;
use super::interpolate::lerp;
use super::replay::AcceptedRows;
use super::scan::CsvScan;
use super::text::fmt_time;
use super::tolerance::{is_gap, time_tolerance};
use crate::error::ProfileError;
use crate::profile::{LoadSample, LoadSource};
use crate::timebase::TimeKind;
use std::path::PathBuf;

impl CsvScan {
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

//! Load profiles: the per-phase P and Q of the site's load, interval by interval.
//!
//! A profile is anything that implements [`LoadSource`]: the streaming CSV reader
//! ([`csv`]), an in-memory copy of a CSV for many runs over one profile
//! ([`csv::MemoryProfile`]), or the seeded synthetic generator ([`synthetic`]). The engine
//! asks for interval k = 0, 1, 2, … in order and never looks back, so a source may stream.
//! [`prefetch`] drives a source on a second thread ahead of the engine, with the same
//! samples.

pub mod csv;
pub mod prefetch;
pub mod synthetic;

use crate::error::ProfileError;
use serde::{Deserialize, Serialize};

/// Phase names in array order.
pub const PHASES: [&str; 3] = ["a", "b", "c"];

/// The load during one interval: per-phase active and reactive power at the metering
/// point, load sign convention (P > 0 import, Q > 0 inductive).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct LoadSample {
    /// Active power per phase a, b, c, kW.
    pub p_kw: [f64; 3],
    /// Reactive power per phase a, b, c, kvar.
    pub q_kvar: [f64; 3],
}

impl LoadSample {
    /// Three-phase active power, kW.
    #[inline]
    pub fn p_total(&self) -> f64 {
        self.p_kw[0] + self.p_kw[1] + self.p_kw[2]
    }

    /// Three-phase reactive power, kvar.
    #[inline]
    pub fn q_total(&self) -> f64 {
        self.q_kvar[0] + self.q_kvar[1] + self.q_kvar[2]
    }
}

/// A source of load samples on the simulation grid t_k = t_first + k·Δt.
pub trait LoadSource {
    /// Writes the load of interval k, starting at `t_s`, into `out`. The engine calls this
    /// with k increasing (0, 1, 2, …), and may skip intervals that the source declared
    /// unchanged with [`LoadSource::unchanged_until`]. Must not allocate.
    fn sample(&mut self, k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError>;

    /// After `sample(k, …)`: the first interval index after k whose sample may differ from
    /// interval k's. The source promises that every interval from k + 1 up to (not
    /// including) the returned index would receive exactly the sample of interval k, so
    /// the engine may step over them as one block. The default, k + 1, promises nothing.
    fn unchanged_until(&self, k: u64) -> u64 {
        k + 1
    }

    /// Writes the samples of intervals k, k + 1, … (interval j starting at t_first + j·Δt)
    /// into `out[0]`, `out[1]`, …, as the same calls of [`LoadSource::sample`] would, and
    /// returns how many it wrote. With `stop_at_hold` it stops after the first interval j
    /// whose sample the source promises to hold ([`LoadSource::unchanged_until`] above
    /// j + 1), so that the caller can ask for that promise; otherwise it fills `out`.
    /// An error ends the filling: the samples written before it are returned with it, so
    /// that the caller can use them before it reports the error. The default calls
    /// `sample` once per interval; a source may fill faster, with the same results.
    fn fill(
        &mut self,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        out: &mut [LoadSample],
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        for (i, s) in out.iter_mut().enumerate() {
            let j = k + i as u64;
            if let Err(e) = self.sample(j, t_first_s + j as f64 * dt_s, s) {
                return (i, Some(e));
            }
            if stop_at_hold && self.unchanged_until(j) > j + 1 {
                return (i + 1, None);
            }
        }
        (out.len(), None)
    }

    /// [`LoadSource::fill`] into the first `len` samples of `buf` (grown to `len` when
    /// shorter), for a caller that owns its buffer: a source that made the samples ahead
    /// in a buffer of its own may hand that buffer over instead of copying it, swapping
    /// it for `buf` (then at least `len` long; the source fills the caller's old buffer
    /// later). The samples and the count are those `fill` would give. The default fills
    /// `buf` in place.
    fn fill_owned(
        &mut self,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        buf: &mut Vec<LoadSample>,
        len: usize,
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        if buf.len() < len {
            buf.resize(len, LoadSample::default());
        }
        self.fill(k, t_first_s, dt_s, &mut buf[..len], stop_at_hold)
    }
}

/// What to do with a defect in a CSV profile. Which policies apply depends on the kind
/// of defect (see `csv::DefectKind::allowed`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum DefectPolicy {
    /// Stop with an error naming the line (nothing is dropped unasked).
    #[default]
    Stop,
    /// Leave the row out (the previous row holds in its place) and list it in the report.
    Skip,
    /// Keep the row's time and give it the previous good row's values; across a gap, hold
    /// the row before the gap.
    Hold,
    /// Keep the row's time and give it values interpolated linearly between the good rows
    /// before and after it (the nearest good row at either end of the file); across a
    /// gap, interpolate between the rows on either side.
    Interpolate,
}

impl DefectPolicy {
    /// The lower-case name used in scenarios and reports.
    pub fn name(self) -> &'static str {
        match self {
            DefectPolicy::Stop => "stop",
            DefectPolicy::Skip => "skip",
            DefectPolicy::Hold => "hold",
            DefectPolicy::Interpolate => "interpolate",
        }
    }
}

impl std::fmt::Display for DefectPolicy {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// Policies for single kinds of CSV defect, as in a scenario's `[load.defects]` table;
/// an unset kind takes `[load] on_defect`, else its own default (see
/// `csv::DefectKind::default_policy`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct DefectPolicies {
    /// Numbers or times that cannot be read, or fields beyond the header. Default `stop`.
    pub malformed: Option<DefectPolicy>,
    /// NaN or infinite numbers. Default `stop`.
    pub not_finite: Option<DefectPolicy>,
    /// Rows with too few fields. Default `stop`.
    pub short_row: Option<DefectPolicy>,
    /// A last line without a line end that is cut short. Default `skip` (a warning);
    /// `stop` or `skip`.
    pub truncated_last_line: Option<DefectPolicy>,
    /// Rows repeating the previous row's time and values. Default `skip`; `stop` or
    /// `skip`.
    pub duplicate: Option<DefectPolicy>,
    /// Rows repeating the previous row's time with other values. Default `stop`; `stop`
    /// or `skip` (keep the first).
    pub conflicting_duplicate: Option<DefectPolicy>,
    /// Rows earlier than the previous row. Default `stop`; `stop` or `skip`.
    pub backwards: Option<DefectPolicy>,
    /// Spacings longer than `gap_factor` median spacings. Default `hold`; `stop`, `hold`
    /// or `interpolate`.
    pub gap: Option<DefectPolicy>,
}

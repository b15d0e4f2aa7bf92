//! Load profiles: the per-phase P and Q of the site's load, interval by interval.
//!
//! A profile is anything that implements [`LoadSource`]: the streaming CSV reader
//! ([`csv`]), an in-memory copy of a CSV for many runs over one profile
//! ([`csv::MemoryProfile`]), or the seeded synthetic generator ([`synthetic`]). The engine
//! asks for interval k = 0, 1, 2, … in order and never looks back, so a source may stream.

pub mod csv;
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
    /// once per interval with k = 0, 1, 2, … in order. Must not allocate.
    fn sample(&mut self, k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError>;
}

/// What to do with a defective CSV row (malformed or missing number, NaN, duplicate or
/// backwards time).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum DefectPolicy {
    /// Stop with an error naming the line (the default: nothing is dropped unasked).
    #[default]
    Stop,
    /// Leave the row out, keep the previous sample, and list the row in the report.
    Skip,
}

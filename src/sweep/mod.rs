//! Sweeps: many variations of one scenario simulated on one prepared profile, to find good
//! controller settings and step layouts for a site.
//!
//! - [`spec`]: what is varied ([`Variation`], ranges, grid files) and the cartesian
//!   product of the settings in a fixed order (first key slowest).
//! - [`runner`]: [`Sweep`] validates every setting, prepares each distinct load profile
//!   once (shared by every run through an `Arc`), and runs any subset of the run list in
//!   parallel on the caller's rayon pool, one [`Row`] per run. Setting 0 is always the
//!   scenario's own settings (the reference row). With seeds, setting s runs seeds
//!   0..N as runs s × N + i (`run.seed` = the scenario's seed + i).
//! - [`cost`]: the cost a year of a run under the scenario's `[tariff]`.
//! - [`front`]: the Pareto front of two objectives and the recommendation in plain words.
//! - [`outcome`]: the rows joined into per-setting figures (median and spread over
//!   seeds), the front and the recommendation; computed from the rows alone, so a merged
//!   set of shards gives exactly what the whole run gives.
//! - [`shard`]: which runs a shard `K/N` does, the fingerprint a shard carries, and the
//!   merge of shard files.
//!
//! Results do not depend on the number of threads or on the shard split: each run is
//! independent, rows are collected in run order, and the resonance cache holds values
//! that do not depend on which run computed them first.

pub mod cost;
pub mod front;
pub mod outcome;
pub mod runner;
pub mod shard;
pub mod spec;

pub use cost::CostPerYear;
pub use front::{FrontAxes, Recommendation};
pub use outcome::{Outcome, SettingStats, Spread};
pub use runner::{FirstLife, ResonanceCache, Row, Sweep, WorstState};
pub use shard::{merge, Fingerprint, Shard, ShardFile};
pub use spec::{SweepSpec, Variation};

use crate::error::{RunError, ScenarioError};

/// Errors of a sweep, each naming what it is about.
#[derive(Debug, thiserror::Error)]
pub enum SweepError {
    /// A variation, range, grid file or option is malformed.
    #[error("{what}: {message}")]
    Spec {
        /// The text, key, file or option concerned.
        what: String,
        /// What is wrong and what is allowed.
        message: String,
    },
    /// The scenario, or one setting of it, is not valid.
    #[error("{0}")]
    Scenario(#[from] ScenarioError),
    /// A run failed (profile or configuration).
    #[error("run {run} ({settings}): {source}")]
    Run {
        /// Run index.
        run: usize,
        /// The setting in words.
        settings: String,
        /// The failure.
        source: RunError,
    },
    /// Preparing a load profile failed.
    #[error("{0}")]
    Profile(#[from] RunError),
    /// Shard files do not belong together or do not cover the runs.
    #[error("{0}")]
    Merge(String),
}

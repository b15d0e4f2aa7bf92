//! A study: a validated scenario joined to its load profile. This is where the library
//! opens files (the engine never does): it scans a CSV profile once, works out the time
//! base, the run length and the billing windows, builds the [`Simulation`], and hands out
//! a fresh load source for each run.

use crate::engine::{Observer, RunResult, Simulation};
use crate::error::{ProfileError, RunError};
use crate::metrics::MetricParams;
use crate::profile::csv::{self, CsvScan, CsvStream};
use crate::profile::synthetic::{SyntheticConfig, SyntheticProfile};
use crate::profile::{LoadSample, LoadSource};
use crate::scenario::{BillingWindows, LoadSpec, Scenario};
use crate::timebase::{Calendar, TimeKind, DAY_S};

/// Default length of a synthetic run: one week, s.
pub const DEFAULT_SYNTHETIC_S: f64 = 7.0 * DAY_S;

/// Largest number of intervals in one run.
pub const MAX_INTERVALS: f64 = 1e10;

/// Runs shorter than this are billed as one window even with monthly billing, s.
pub const SHORT_RUN_S: f64 = 30.0 * DAY_S;

/// A scenario with its profile located and scanned.
#[derive(Debug, Clone)]
pub struct Study {
    /// The scenario.
    pub scenario: Scenario,
    /// The simulation built from it.
    pub simulation: Simulation,
    /// The CSV scan, for a CSV profile.
    pub csv: Option<CsvScan>,
    /// SHA-256 of the CSV profile file, lowercase hex (none for a synthetic profile).
    pub profile_sha256: Option<String>,
}

/// Hashes a file by streaming it.
fn file_sha256(path: &std::path::Path) -> Result<String, ProfileError> {
    use sha2::{Digest, Sha256};
    use std::io::Read;
    let io = |source| ProfileError::Io {
        file: path.to_path_buf(),
        source,
    };
    let mut f = std::fs::File::open(path).map_err(io)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = f.read(&mut buf).map_err(io)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(crate::scenario::hex_lower(&h.finalize()))
}

/// The load source of one run.
pub enum Source {
    /// Streaming CSV.
    Csv(Box<CsvStream>),
    /// Synthetic generator.
    Synthetic(Box<SyntheticProfile>),
}

impl LoadSource for Source {
    #[inline]
    fn sample(&mut self, k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        match self {
            Source::Csv(s) => s.sample(k, t_s, out),
            Source::Synthetic(s) => s.sample(k, t_s, out),
        }
    }
}

impl Study {
    /// Prepares a study: scans the CSV profile if there is one and builds the simulation.
    pub fn prepare(scenario: Scenario) -> Result<Study, RunError> {
        let dt = scenario.dt_s;
        let (csv, t_first, calendar, available) = match &scenario.load {
            LoadSpec::Csv { path, options } => {
                let scan = csv::scan(path, options)?;
                let cal = match scan.time_kind {
                    TimeKind::Absolute => Calendar::absolute(),
                    TimeKind::Elapsed => Calendar::elapsed_from(scenario.start),
                };
                let avail = scan.end_s - scan.t_first_s;
                (Some(scan.clone()), scan.t_first_s, cal, Some(avail))
            }
            LoadSpec::Synthetic(_) => (None, 0.0, Calendar::elapsed_from(scenario.start), None),
        };
        let duration = match (scenario.duration_s, available) {
            (Some(d), Some(a)) if d > a + 1e-9 => {
                return Err(RunError::Profile(ProfileError::Coverage {
                    file: csv.as_ref().map(|c| c.path.clone()).unwrap_or_default(),
                    message: format!(
                        "the run asks for {d} s (run.duration_*) but the profile covers only {a} s; shorten the run or extend the profile"
                    ),
                }))
            }
            (Some(d), _) => d,
            (None, Some(a)) => a,
            (None, None) => DEFAULT_SYNTHETIC_S,
        };
        let n = (duration / dt + 1e-9).floor();
        if n > MAX_INTERVALS {
            return Err(RunError::Config(format!(
                "the run would have {n:.3e} intervals ({duration} s at {dt} s); at most {MAX_INTERVALS:e} are allowed: use a longer run.time_step_s or a shorter run"
            )));
        }
        let intervals = n as u64;
        if intervals == 0 {
            return Err(RunError::Config(format!(
                "the run is shorter than one time step ({dt} s)"
            )));
        }
        let t_end = t_first + intervals as f64 * dt;
        let billing_starts = match scenario.billing {
            BillingWindows::Run => Vec::new(),
            // A run shorter than a (30-day) month is billed as one window.
            BillingWindows::Month if t_end - t_first < SHORT_RUN_S => Vec::new(),
            BillingWindows::Month => calendar.month_starts(t_first, t_end),
        };
        let c = &scenario.controller;
        let simulation = Simulation {
            supply: scenario.supply,
            steps: scenario.steps.clone(),
            controller: *c,
            metrics: MetricParams {
                target: c.target,
                overcorrection_threshold_kvar: scenario.overcorrection_threshold_kvar,
                overcorrection_min_s: scenario.overcorrection_min_s,
                hunting_window_s: scenario.hunting_window_s,
                billing_starts,
            },
            spectrum: scenario.spectrum.clone(),
            resonance_tolerance: scenario.resonance_tolerance,
            harmonics: scenario.harmonics,
            calendar,
            t_first_s: t_first,
            dt_s: dt,
            intervals,
        };
        let profile_sha256 = match &scenario.load {
            LoadSpec::Csv { path, .. } => Some(file_sha256(path)?),
            LoadSpec::Synthetic(_) => None,
        };
        Ok(Study {
            scenario,
            simulation,
            csv,
            profile_sha256,
        })
    }

    /// A fresh load source positioned at the start of the run.
    pub fn source(&self) -> Result<Source, RunError> {
        match (&self.scenario.load, &self.csv) {
            (LoadSpec::Csv { .. }, Some(scan)) => Ok(Source::Csv(Box::new(scan.stream()?))),
            (LoadSpec::Synthetic(cfg), _) => Ok(Source::Synthetic(Box::new(self.synthetic(cfg)))),
            (LoadSpec::Csv { .. }, None) => {
                Err(RunError::Config("the CSV profile was not scanned".into()))
            }
        }
    }

    fn synthetic(&self, cfg: &SyntheticConfig) -> SyntheticProfile {
        let s = &self.simulation;
        SyntheticProfile::new(cfg, self.scenario.seed, s.calendar, s.t_first_s, s.dt_s)
    }

    /// Runs the study once.
    pub fn run<O: Observer + ?Sized>(&self, observer: &mut O) -> Result<RunResult, RunError> {
        let mut src = self.source()?;
        self.simulation.run(&mut src, observer)
    }
}

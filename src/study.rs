//! A study: the validated settings of one run joined to a prepared load profile.
//!
//! This is where the library opens files (the engine never does). Preparing a profile
//! scans and hashes a CSV file once, or notes that the load is synthetic; the result, a
//! [`PreparedProfile`], is its own value that many studies can share (a sweep changes the
//! settings and reuses the profile without reading the file again). A [`Study`] then works
//! out the time base of one run ([`RunPlan`]: first interval, Δt, number of intervals,
//! billing windows) and hands out a fresh load source for each run.
//!
//! The settings exist once: [`Study::scenario`] is what the engine runs and what every
//! report prints.
//!
//! [`Study::run`] has the synthetic generator fill the load on a second thread while the
//! engine steps ([`crate::profile::prefetch`], the same samples to the bit) when the
//! machine has a core to spare; [`Study::run_on`] runs on the caller's source as it is.

use crate::engine::{self, Observer, RunResult};
use crate::error::{ProfileError, RunError};
use crate::harmonics::HarmonicModel;
use crate::profile::csv::{self, CsvScan, CsvStream, MemoryProfile, SharedCursor};
use crate::profile::prefetch;
use crate::profile::synthetic::SyntheticProfile;
use crate::profile::{LoadSample, LoadSource};
use crate::scenario::{BillingWindows, LoadSpec, Scenario};
use crate::timebase::{Calendar, DAY_S};
use std::sync::Arc;

/// Default length of a synthetic run: one week, s.
pub const DEFAULT_SYNTHETIC_S: f64 = 7.0 * DAY_S;

/// Largest number of intervals in one run.
pub const MAX_INTERVALS: f64 = 1e10;

/// Runs shorter than this are billed as one window even with monthly billing, s.
pub const SHORT_RUN_S: f64 = 30.0 * DAY_S;

/// A load profile made ready for runs: scanned and hashed once, shared by every run.
///
/// A CSV profile whose rows fit in the scan's memory budget
/// ([`csv::DEFAULT_KEEP_BYTES`], [`csv::BYTES_PER_ROW`] per row) is read once: the scan
/// keeps its rows, and every run reads them from memory. A longer one is streamed from
/// the file by each run, with memory flat in its length.
#[derive(Debug, Clone)]
pub struct PreparedProfile {
    /// The CSV scan, for a CSV profile; `None` for the synthetic generator. Everything
    /// else a run needs of the profile (hash, coverage, calendar, rows kept in memory) is
    /// read from it, so nothing here can disagree with the scan.
    pub csv: Option<Arc<CsvScan>>,
}

impl PreparedProfile {
    /// Prepares the load profile a scenario names: scans and hashes a CSV file (one read);
    /// the synthetic generator needs no preparing.
    pub fn prepare(scenario: &Scenario) -> Result<PreparedProfile, RunError> {
        match &scenario.load {
            LoadSpec::Csv { path, options } => Ok(PreparedProfile {
                csv: Some(Arc::new(csv::scan(path, options)?)),
            }),
            LoadSpec::Synthetic(_) => Ok(PreparedProfile { csv: None }),
        }
    }

    /// SHA-256 of the CSV profile file, lowercase hex (none for a synthetic profile).
    pub fn sha256(&self) -> Option<&str> {
        self.csv.as_deref().map(|c| c.sha256.as_str())
    }

    /// The CSV profile's rows in memory, when the scan kept them; runs then read them
    /// instead of streaming the file. `None` for a synthetic profile or a long CSV one.
    pub fn memory(&self) -> Option<&Arc<MemoryProfile>> {
        self.csv.as_deref().and_then(CsvScan::memory)
    }

    /// Time of the first sample in the profile's own time base, s (0 for synthetic).
    pub fn t_first_s(&self) -> f64 {
        self.csv.as_deref().map_or(0.0, |c| c.t_first_s)
    }

    /// Time the profile covers, s (`None`: the generator runs as long as asked).
    pub fn available_s(&self) -> Option<f64> {
        self.csv.as_deref().map(|c| c.end_s - c.t_first_s)
    }

    /// The calendar of a run starting at `start` (used for elapsed times and the
    /// generator; a profile with absolute times carries its own, in its local time).
    pub fn calendar(&self, start: chrono::NaiveDateTime) -> Calendar {
        match self.csv.as_deref() {
            Some(c) => c.calendar(start),
            None => Calendar::elapsed_from(start),
        }
    }
}

/// The time base of one run, derived from the settings and the profile.
#[derive(Debug, Clone, PartialEq)]
pub struct RunPlan {
    /// Calendar of the run's time base.
    pub calendar: Calendar,
    /// Start of the first interval, s (profile time base).
    pub t_first_s: f64,
    /// Time step Δt, s.
    pub dt_s: f64,
    /// Number of intervals.
    pub intervals: u64,
    /// Run times at which a new billing window starts (after the first), ascending.
    pub billing_starts: Vec<f64>,
    /// How the engine steps through the intervals. Default [`Stepping::Events`].
    pub stepping: Stepping,
}

/// How the engine steps through the intervals. Both give the same results (energies to
/// rounding in the last digits); `EveryInterval` is there to check that.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Stepping {
    /// Every interval on its own.
    EveryInterval,
    /// Stretches of identical intervals (the same sample, bank state and timers' outcome)
    /// as one block, when the observer allows it (see `engine`). The default.
    #[default]
    Events,
}

impl RunPlan {
    /// Length of the run, s.
    pub fn duration_s(&self) -> f64 {
        self.intervals as f64 * self.dt_s
    }
}

/// The load source of one run.
pub enum Source {
    /// Streaming CSV.
    Csv(Box<CsvStream>),
    /// A CSV profile held in memory by its scan.
    Memory(Box<SharedCursor>),
    /// Synthetic generator.
    Synthetic(Box<SyntheticProfile>),
}

impl LoadSource for Source {
    #[inline]
    fn sample(&mut self, k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        match self {
            Source::Csv(s) => s.sample(k, t_s, out),
            Source::Memory(s) => s.sample(k, t_s, out),
            Source::Synthetic(s) => s.sample(k, t_s, out),
        }
    }

    #[inline]
    fn unchanged_until(&self, k: u64) -> u64 {
        match self {
            Source::Csv(s) => s.unchanged_until(k),
            Source::Memory(s) => s.unchanged_until(k),
            Source::Synthetic(s) => s.unchanged_until(k),
        }
    }

    #[inline]
    fn fill(
        &mut self,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        out: &mut [LoadSample],
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        match self {
            Source::Csv(s) => s.fill(k, t_first_s, dt_s, out, stop_at_hold),
            Source::Memory(s) => s.fill(k, t_first_s, dt_s, out, stop_at_hold),
            Source::Synthetic(s) => s.fill(k, t_first_s, dt_s, out, stop_at_hold),
        }
    }
}

/// Validated settings joined to a prepared profile: everything one run needs.
#[derive(Debug, Clone)]
pub struct Study {
    /// The settings: what the engine runs and what every report prints.
    pub scenario: Scenario,
    /// The prepared load profile, shared with other studies of the same profile.
    pub profile: Arc<PreparedProfile>,
    /// The time base of the run.
    pub plan: RunPlan,
}

impl Study {
    /// Prepares a study: prepares its profile (scanning a CSV file if there is one) and
    /// works out the time base.
    pub fn prepare(scenario: Scenario) -> Result<Study, RunError> {
        let profile = Arc::new(PreparedProfile::prepare(&scenario)?);
        Study::with_profile(scenario, profile)
    }

    /// A study of `scenario` on a profile prepared before, without reading it again. The
    /// scenario must name the same load as the one the profile was prepared from (a sweep
    /// varies the bank and the controller, not the load file).
    pub fn with_profile(
        scenario: Scenario,
        profile: Arc<PreparedProfile>,
    ) -> Result<Study, RunError> {
        match (&scenario.load, &profile.csv) {
            (LoadSpec::Csv { path, .. }, Some(scan)) if *path == scan.path => {}
            (LoadSpec::Synthetic(_), None) => {}
            _ => {
                return Err(RunError::Config(
                    "the prepared load profile is not the one the scenario names".into(),
                ))
            }
        }
        let plan = plan(&scenario, &profile)?;
        Ok(Study {
            scenario,
            profile,
            plan,
        })
    }

    /// The CSV scan, for a CSV profile.
    pub fn csv(&self) -> Option<&CsvScan> {
        self.profile.csv.as_deref()
    }

    /// A fresh load source positioned at the start of the run, on the run's grid: the
    /// rows in memory when the scan kept them, else a stream over the file.
    pub fn source(&self) -> Result<Source, RunError> {
        let p = &self.plan;
        match (
            &self.scenario.load,
            &self.profile.csv,
            self.profile.memory(),
        ) {
            (LoadSpec::Csv { .. }, Some(_), Some(m)) => Ok(Source::Memory(Box::new(
                m.shared_cursor().on_grid(p.t_first_s, p.dt_s),
            ))),
            (LoadSpec::Csv { .. }, Some(scan), None) => Ok(Source::Csv(Box::new(
                scan.stream()?.on_grid(p.t_first_s, p.dt_s),
            ))),
            (LoadSpec::Synthetic(cfg), _, _) => Ok(Source::Synthetic(Box::new(
                SyntheticProfile::new(cfg, self.scenario.seed, p.calendar, p.t_first_s, p.dt_s),
            ))),
            (LoadSpec::Csv { .. }, None, _) => {
                Err(RunError::Config("the CSV profile was not scanned".into()))
            }
        }
    }

    /// The harmonic model of the site: supply, steps, load spectrum and limits.
    pub fn harmonic_model(&self) -> HarmonicModel {
        self.scenario.harmonic_model()
    }

    /// Runs the study once on its own profile. The synthetic generator runs on a second
    /// thread ahead of the engine ([`prefetch`], the same samples) when the machine has
    /// two cores or more, the run is not itself one of many on the rayon pool, and the
    /// engine takes the samples in whole chunks: with measurement noise, or with an
    /// observer that wants every interval. (Without noise the engine steps over the
    /// generator's runs of unchanged samples, each chunk ends at one, and every next
    /// chunk would be a round trip to the other thread.)
    pub fn run<O: Observer + ?Sized>(&self, observer: &mut O) -> Result<RunResult, RunError> {
        let mut src = self.source()?;
        if let Source::Synthetic(g) = &mut src {
            let blocks = self.plan.stepping == Stepping::Events && !observer.wants_every_interval();
            if !(blocks && g.may_hold()) && prefetch_wanted() {
                return prefetch::scoped(&mut **g, self.plan.intervals, |pf| {
                    self.run_on(pf, observer)
                });
            }
        }
        self.run_on(&mut src, observer)
    }

    /// Runs the study's settings and time base over any load source (tests and library
    /// users drive the engine with sources of their own).
    pub fn run_on<S: LoadSource + ?Sized, O: Observer + ?Sized>(
        &self,
        source: &mut S,
        observer: &mut O,
    ) -> Result<RunResult, RunError> {
        engine::run(&self.scenario, &self.plan, source, observer)
    }
}

/// Whether a run may fill its load on a second thread: the machine has at least two
/// cores, and the run is not on a rayon worker (sweeps and designs already run one study
/// per core there).
fn prefetch_wanted() -> bool {
    // The count of cores reads the system's settings: once per process is enough.
    static CORES: std::sync::OnceLock<usize> = std::sync::OnceLock::new();
    rayon::current_thread_index().is_none()
        && *CORES.get_or_init(|| std::thread::available_parallelism().map_or(1, |n| n.get())) >= 2
}

/// Works out the time base of a run of `scenario` on `profile`.
fn plan(scenario: &Scenario, profile: &PreparedProfile) -> Result<RunPlan, RunError> {
    let dt = scenario.dt_s;
    let t_first = profile.t_first_s();
    let duration = match (scenario.duration_s, profile.available_s()) {
        (Some(d), Some(a)) if d > a + 1e-9 => {
            return Err(RunError::Profile(ProfileError::Coverage {
                file: profile
                    .csv
                    .as_ref()
                    .map(|c| c.path.clone())
                    .unwrap_or_default(),
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
    // An absolute time base carries its own calendar; elapsed seconds and the generator
    // count from the scenario's start.
    let calendar = profile.calendar(scenario.start);
    let billing_starts = match scenario.billing {
        BillingWindows::Run => Vec::new(),
        // A run shorter than a (30-day) month is billed as one window.
        BillingWindows::Month if t_end - t_first < SHORT_RUN_S => Vec::new(),
        BillingWindows::Month => calendar.month_starts(t_first, t_end),
    };
    Ok(RunPlan {
        calendar,
        t_first_s: t_first,
        dt_s: dt,
        intervals,
        billing_starts,
        stepping: Stepping::Events,
    })
}

//! The sweep runner: every setting validated up front, each distinct load profile
//! prepared once and shared, runs in parallel on the caller's rayon pool, one [`Row`] per
//! run, and a resonance cache shared by the runs.
//!
//! Run indices: setting s (0 = the scenario's own settings, 1.. the product in order)
//! with seed i (0 ≤ i < seeds) is run s × seeds + i. A row depends on its run alone, so
//! any subset of the runs, on any number of threads, gives the same rows for the runs it
//! holds.

use super::cost::CostPerYear;
use super::front::FrontAxes;
use super::outcome::Outcome;
use super::shard::{Fingerprint, Shard, ShardFile};
use super::spec::SweepSpec;
use super::SweepError;
use crate::analysis::findings::billed_goal;
use crate::analysis::resonance::assess_with;
use crate::bank::BankState;
use crate::engine::Quiet;
use crate::harmonics::{HarmonicModel, StateHarmonics};
use crate::pf::Quadrant;
use crate::scenario::overrides::{apply, lookup, value_text};
use crate::scenario::{LoadSpec, Override, Scenario};
use crate::study::{PreparedProfile, Study};
use crate::timebase::DAY_S;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, OnceLock};

/// Years beyond which the date of a rated life is not given.
const MAX_DATED_YEARS: f64 = 1000.0;

/// The first contactor to reach its rated life in a run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FirstLife {
    /// Step number.
    pub step: usize,
    /// Years from the run start until its rated operations are reached at the run's rate.
    pub years: f64,
    /// That date, `YYYY-MM-DD`, counting 365-day years from the run start (`None` beyond
    /// 1000 years).
    pub date: Option<String>,
}

/// The worst bank state of a run for resonance (most hours a year × severity, as the
/// summary of a single run ranks them).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WorstState {
    /// Connected steps.
    pub steps: Vec<usize>,
    /// Time in the state extrapolated to a 365-day year, h.
    pub hours_per_year: f64,
    /// Estimated voltage THD at the bus in the state (full harmonic load), %.
    pub thd_pct: f64,
    /// `clear`, `near h7`, `over THD_V, I_C`, ...
    pub status: String,
}

/// One run of a sweep.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Row {
    /// Run index (setting × seeds + seed offset).
    pub run: usize,
    /// Setting index: 0 the scenario's own, 1.. the product in order.
    pub setting: usize,
    /// The value of each varied key in this setting, as TOML text (the reference row
    /// shows the scenario's own value, `default` when the scenario does not set it).
    pub values: Vec<String>,
    /// Seed of the run (`run.seed`).
    pub seed: u64,
    /// Billed PF of the run (energy PF over the import register).
    pub billed_pf: f64,
    /// Its quadrant.
    pub billed_pf_quadrant: Quadrant,
    /// The billed PF the target asks for.
    pub pf_goal: f64,
    /// How far the billed PF falls short of the goal (0 when it meets it).
    pub pf_shortfall: f64,
    /// Share of time under target, 0..1.
    pub share_under_target: f64,
    /// Share of time leading, 0..1.
    pub share_leading: f64,
    /// Operations in the run (all steps, trips included).
    pub operations: u64,
    /// Operations extrapolated to a 365-day year.
    pub operations_per_year: f64,
    /// The first contactor to reach its rated life (`None`: no step operates).
    pub first_life: Option<FirstLife>,
    /// Hunting cycles in the run.
    pub hunting_cycles: u64,
    /// Time overcorrected (in episodes), s.
    pub overcorrection_s: f64,
    /// Overcorrection episodes.
    pub overcorrection_episodes: u64,
    /// The worst bank state for resonance (`None`: no state with a step connected).
    pub worst_state: Option<WorstState>,
    /// Cost a year under the scenario's tariff (`None` without a tariff).
    pub cost: Option<CostPerYear>,
}

/// One cached state, solved at most once.
type StateCell = Arc<OnceLock<StateHarmonics>>;

/// A setting made ready: its overrides, its validated scenario and its values as text.
type Parsed = (Vec<Override>, Scenario, Vec<String>);

/// Solved harmonics of bank states, shared by the runs of a sweep: each distinct bank
/// (supply, steps, spectrum, options, background) and state is solved once.
#[derive(Debug, Default)]
pub struct ResonanceCache {
    models: Mutex<HashMap<String, usize>>,
    states: Mutex<HashMap<(usize, BankState), StateCell>>,
}

impl ResonanceCache {
    /// An empty cache.
    pub fn new() -> Self {
        Self::default()
    }

    /// The cache's number for the harmonic model of `sc` (equal inputs, equal number).
    pub fn model_id(&self, sc: &Scenario) -> usize {
        // Debug output of f64 is exact (shortest round-trip), so equal keys mean equal
        // inputs.
        let key = format!(
            "{:?}|{:?}|{:?}|{:?}|{:?}",
            sc.supply, sc.steps, sc.spectrum, sc.harmonics, sc.background_pct
        );
        let mut m = self.models.lock().unwrap_or_else(|e| e.into_inner());
        let n = m.len();
        *m.entry(key).or_insert(n)
    }

    /// The harmonics of `mask` in model `id` (`hm` must be that model). A state is
    /// solved once: a second thread asking for it meanwhile waits for the first.
    pub fn state(&self, id: usize, hm: &HarmonicModel, mask: BankState) -> StateHarmonics {
        let cell = self
            .states
            .lock()
            .unwrap_or_else(|e| e.into_inner())
            .entry((id, mask))
            .or_default()
            .clone();
        cell.get_or_init(|| hm.state(mask)).clone()
    }

    /// Number of states solved and kept.
    pub fn len(&self) -> usize {
        self.states.lock().map(|s| s.len()).unwrap_or(0)
    }

    /// True when nothing is cached.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// One setting, validated.
#[derive(Debug, Clone)]
struct Setting {
    overrides: Vec<Override>,
    scenario: Scenario,
    values: Vec<String>,
    profile: usize,
}

/// A sweep made ready to run: settings validated, profiles prepared.
#[derive(Debug)]
pub struct Sweep {
    /// The scenario's own settings (setting 0).
    pub base: Scenario,
    /// The keys varied, in order (the columns of the settings).
    pub keys: Vec<String>,
    /// Seeds per setting.
    pub seeds: u32,
    /// The objectives of the front.
    pub axes: FrontAxes,
    spec_text: String,
    settings: Vec<Setting>,
    profiles: Vec<Arc<PreparedProfile>>,
    cache: ResonanceCache,
}

impl Sweep {
    /// Reads the scenario file and prepares the sweep `spec` of it.
    pub fn from_file(path: &Path, spec: &SweepSpec, axes: FrontAxes) -> Result<Sweep, SweepError> {
        let text = std::fs::read_to_string(path).map_err(|source| {
            SweepError::Scenario(crate::error::ScenarioError::Io {
                file: path.to_path_buf(),
                source,
            })
        })?;
        Sweep::new(&text, path, spec, axes)
    }

    /// Prepares the sweep `spec` of the scenario `text` (`path` names it in errors and
    /// anchors a relative CSV path): every setting of the product is validated and each
    /// distinct load profile prepared once.
    pub fn new(
        text: &str,
        path: &Path,
        spec: &SweepSpec,
        axes: FrontAxes,
    ) -> Result<Sweep, SweepError> {
        spec.check()?;
        Sweep::with_settings(
            text,
            path,
            spec.keys(),
            spec.settings(),
            spec.seeds,
            axes,
            spec.canonical(),
            None,
        )
    }

    /// Prepares a sweep of any list of settings (each a list of overrides; the scenario's
    /// own settings are added as setting 0). `keys` are the columns shown (each override
    /// key should be among them); `spec_text` describes the list in the fingerprint.
    /// `base_profile`, when given, is the scenario's own load prepared before (it must be
    /// the load the scenario names): settings that keep that load share it instead of
    /// reading the profile again.
    #[allow(clippy::too_many_arguments)]
    pub fn with_settings(
        text: &str,
        path: &Path,
        keys: Vec<String>,
        settings: Vec<Vec<Override>>,
        seeds: u32,
        axes: FrontAxes,
        spec_text: String,
        base_profile: Option<Arc<PreparedProfile>>,
    ) -> Result<Sweep, SweepError> {
        if seeds == 0 {
            return Err(SweepError::Spec {
                what: "--seeds".into(),
                message: "at least 1 seed".into(),
            });
        }
        let base = Scenario::from_str(text, path)?;
        let doc: toml::Table = text.parse().map_err(|e: toml::de::Error| {
            SweepError::Scenario(crate::error::ScenarioError::Parse {
                file: path.to_path_buf(),
                message: e.to_string().trim_end().to_string(),
            })
        })?;
        if seeds > 1 {
            if keys.iter().any(|k| k == "run.seed") {
                return Err(SweepError::Spec {
                    what: "--seeds".into(),
                    message: "`run.seed` is varied already; use --seeds or vary run.seed, not both"
                        .into(),
                });
            }
            if let LoadSpec::Csv { path: csv, .. } = &base.load {
                return Err(SweepError::Spec {
                    what: "--seeds".into(),
                    message: format!(
                        "the load is the CSV profile {}, one realisation: seeds change only the \
                         synthetic generator; drop --seeds",
                        csv.display()
                    ),
                });
            }
        }
        let reference_values: Vec<String> = keys
            .iter()
            .map(|k| match lookup(&doc, k) {
                None => "default".to_string(),
                Some(v @ (toml::Value::Table(_) | toml::Value::Array(_))) => {
                    let t = value_text(v);
                    if t.len() <= 40 {
                        t
                    } else {
                        "as in the scenario".to_string()
                    }
                }
                Some(v) => value_text(v),
            })
            .collect();
        let mut all = Vec::with_capacity(settings.len() + 1);
        all.push((Vec::new(), base.clone(), reference_values));
        // Validated in parallel: 1000 settings parse and check quickly, but there is no
        // reason to wait on one core.
        let parsed: Vec<Result<Parsed, SweepError>> = settings
            .into_par_iter()
            .map(|ov| {
                let sc = Scenario::from_str_with(text, path, &ov)?;
                let values = keys
                    .iter()
                    .map(|k| {
                        ov.iter()
                            .rev()
                            .find(|o| &o.key == k)
                            .map(|o| value_text(&o.value))
                            .unwrap_or_else(|| "default".to_string())
                    })
                    .collect();
                Ok((ov, sc, values))
            })
            .collect();
        for p in parsed {
            all.push(p?);
        }
        // Each distinct load (the `[load]` table after the overrides) is prepared once.
        let mut loads: Vec<String> = Vec::new();
        let mut prepared: Vec<Setting> = Vec::with_capacity(all.len());
        let mut profiles = Vec::new();
        if let Some(p) = base_profile {
            loads.push(lookup(&doc, "load").map(value_text).unwrap_or_default());
            profiles.push(p);
        }
        for (overrides, scenario, values) in all {
            let mut d = doc.clone();
            for o in &overrides {
                apply(&mut d, &o.key, &o.value).map_err(|m| SweepError::Spec {
                    what: o.key.clone(),
                    message: m,
                })?;
            }
            let load_key = lookup(&d, "load").map(value_text).unwrap_or_default();
            let profile = match loads.iter().position(|l| *l == load_key) {
                Some(i) => i,
                None => {
                    loads.push(load_key);
                    profiles.push(Arc::new(PreparedProfile::prepare(&scenario)?));
                    profiles.len() - 1
                }
            };
            prepared.push(Setting {
                overrides,
                scenario,
                values,
                profile,
            });
        }
        Ok(Sweep {
            base,
            keys,
            seeds,
            axes,
            spec_text,
            settings: prepared,
            profiles,
            cache: ResonanceCache::new(),
        })
    }

    /// Number of settings, the reference included.
    pub fn setting_count(&self) -> usize {
        self.settings.len()
    }

    /// Number of runs: settings × seeds.
    pub fn run_count(&self) -> usize {
        self.settings.len() * self.seeds as usize
    }

    /// The overrides of setting `s` (empty for the reference).
    pub fn overrides(&self, s: usize) -> &[Override] {
        &self.settings[s].overrides
    }

    /// The validated settings of setting `s` (seed not applied).
    pub fn scenario(&self, s: usize) -> &Scenario {
        &self.settings[s].scenario
    }

    /// The prepared load profiles, one per distinct load.
    pub fn profiles(&self) -> &[Arc<PreparedProfile>] {
        &self.profiles
    }

    /// The resonance cache shared by the runs.
    pub fn cache(&self) -> &ResonanceCache {
        &self.cache
    }

    /// The fingerprint of this sweep: what a shard must agree on to be merged.
    pub fn fingerprint(&self) -> Fingerprint {
        Fingerprint {
            tool: format!("bankstep {}", env!("CARGO_PKG_VERSION")),
            scenario: self.base.name.clone(),
            scenario_sha256: self.base.content_sha256.clone(),
            profile_sha256: self
                .profiles
                .iter()
                .map(|p| p.sha256().unwrap_or("synthetic").to_string())
                .collect(),
            variations: self.spec_text.clone(),
            keys: self.keys.clone(),
            seeds: self.seeds,
            settings: self.settings.len(),
            runs: self.run_count(),
            front: self.axes,
            currency: self.base.tariff.as_ref().map(|t| t.currency.clone()),
        }
    }

    /// The study of run `run`: its setting's settings with its seed, on its profile.
    pub fn study(&self, run: usize) -> Result<Study, SweepError> {
        let (s, i) = self.split(run)?;
        let st = &self.settings[s];
        let mut sc = st.scenario.clone();
        sc.seed = sc.seed.wrapping_add(i as u64);
        Study::with_profile(sc, self.profiles[st.profile].clone()).map_err(|source| {
            SweepError::Run {
                run,
                settings: self.describe(s),
                source,
            }
        })
    }

    /// Setting and seed offset of a run index.
    fn split(&self, run: usize) -> Result<(usize, usize), SweepError> {
        if run >= self.run_count() {
            return Err(SweepError::Spec {
                what: format!("run {run}"),
                message: format!("the sweep has runs 0 to {}", self.run_count() - 1),
            });
        }
        let n = self.seeds as usize;
        Ok((run / n, run % n))
    }

    /// Setting `s` in words: `the scenario's own settings` or `key = value, ...`.
    pub fn describe(&self, s: usize) -> String {
        describe(&self.keys, &self.settings[s].values, s)
    }

    /// Runs one run and makes its row.
    pub fn run_one(&self, run: usize) -> Result<Row, SweepError> {
        let (s, _) = self.split(run)?;
        let study = self.study(run)?;
        let result = study.run(&mut Quiet).map_err(|source| SweepError::Run {
            run,
            settings: self.describe(s),
            source,
        })?;
        Ok(self.row(run, s, &study, &result))
    }

    /// The row of a finished run.
    fn row(&self, run: usize, s: usize, study: &Study, r: &crate::engine::RunResult) -> Row {
        let sc = &study.scenario;
        let m = &r.metrics;
        let goal = billed_goal(sc.controller.target);
        let hm = study.harmonic_model();
        let id = self.cache.model_id(sc);
        let res = assess_with(study, &hm, m, &|mask| self.cache.state(id, &hm, mask));
        let worst = res.worst_state().map(|w| WorstState {
            steps: w.steps.clone(),
            hours_per_year: w.hours_per_year,
            thd_pct: w.thd_pct,
            status: w.status(),
        });
        let first_life = m
            .wear
            .iter()
            .filter(|w| !w.fixed)
            .filter_map(|w| w.years_to_rated_life.map(|y| (w.step, y)))
            .min_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)))
            .map(|(step, years)| FirstLife {
                step,
                years,
                date: (years <= MAX_DATED_YEARS).then(|| {
                    let p = &study.plan;
                    let t = p.t_first_s + years * 365.0 * DAY_S;
                    p.calendar.datetime(t).format("%Y-%m-%d").to_string()
                }),
            });
        Row {
            run,
            setting: s,
            values: self.settings[s].values.clone(),
            seed: sc.seed,
            billed_pf: m.pf.energy_pf,
            billed_pf_quadrant: m.pf.energy_pf_quadrant,
            pf_goal: goal,
            pf_shortfall: (goal - m.pf.energy_pf).max(0.0),
            share_under_target: m.pf.share_under_target,
            share_leading: m.pf.share_leading,
            operations: m.switching.total_operations,
            operations_per_year: m.switching.per_year,
            first_life,
            hunting_cycles: m.switching.hunting_cycles,
            overcorrection_s: m.overcorrection.total_s,
            overcorrection_episodes: m.overcorrection.episodes,
            worst_state: worst,
            cost: sc.tariff.as_ref().map(|t| CostPerYear::of(t, m)),
        }
    }

    /// Runs the runs listed, in parallel on the current rayon pool; rows come back in the
    /// order listed. `progress(done, total)` is called after each run, from any thread.
    /// On failure the error of the first failing run in the list is returned.
    pub fn run_list(
        &self,
        runs: &[usize],
        progress: &(dyn Fn(u64, u64) + Sync),
    ) -> Result<Vec<Row>, SweepError> {
        let total = runs.len() as u64;
        let done = AtomicU64::new(0);
        progress(0, total);
        let results: Vec<Result<Row, SweepError>> = runs
            .par_iter()
            .map(|&i| {
                let r = self.run_one(i);
                let d = done.fetch_add(1, Ordering::Relaxed) + 1;
                progress(d, total);
                r
            })
            .collect();
        results.into_iter().collect()
    }

    /// Runs a shard's share of the runs and returns the shard file.
    pub fn run_shard(
        &self,
        shard: Shard,
        progress: &(dyn Fn(u64, u64) + Sync),
    ) -> Result<ShardFile, SweepError> {
        let runs = shard.runs(self.run_count());
        let rows = self.run_list(&runs, progress)?;
        Ok(ShardFile {
            fingerprint: self.fingerprint(),
            shard,
            rows,
        })
    }

    /// Runs every run and works out the outcome.
    pub fn run_all(&self, progress: &(dyn Fn(u64, u64) + Sync)) -> Result<Outcome, SweepError> {
        let runs: Vec<usize> = (0..self.run_count()).collect();
        let rows = self.run_list(&runs, progress)?;
        Outcome::from_rows(self.fingerprint(), rows)
    }

    /// The scenario file the sweep came from.
    pub fn path(&self) -> &PathBuf {
        &self.base.path
    }
}

/// A setting in words from its columns: `the scenario's own settings` for setting 0, else
/// `key = value, key = value`.
pub fn describe(keys: &[String], values: &[String], setting: usize) -> String {
    if setting == 0 {
        return "the scenario's own settings".to_string();
    }
    let parts: Vec<String> = keys
        .iter()
        .zip(values)
        .map(|(k, v)| format!("{k} = {v}"))
        .collect();
    parts.join(", ")
}

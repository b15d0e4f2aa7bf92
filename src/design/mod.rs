//! The step-layout designer: what total kvar a site needs and which layout of switched
//! steps serves its load best.
//!
//! - [`need`]: the kvar needed at each instant to bring the load to the target, as a
//!   time-weighted duration curve, and the recommended total at a coverage.
//! - [`layout`]: candidate layouts of catalogue step sizes (equal, 1:2:2, binary, a small
//!   step plus equal steps), plain and detuned, within a band around the recommended
//!   total.
//! - [`rank`]: each candidate's run at its best settings judged (target, billed PF,
//!   operations, overcorrection, resonance, steps) and ranked, with a reason for each.
//!
//! [`design`] joins them. Each candidate replaces the scenario's whole bank (fixed steps
//! included) and is run with each of a handful of controller settings
//! ([`settings_grid`]: ordering, dead band, switching delay) through the sweep runner, on
//! one prepared profile, in parallel. The sweep's own recommendation (the Pareto front of
//! billed PF against operations a year, and among the settings on it that meet the target
//! the one with the fewest operations) picks each candidate's best settings; that run is
//! repeated once and assessed by the analysis layer (resonance of every state reached,
//! billed PF against the target), and the candidates are ranked on it.
//!
//! Every candidate is judged against the same overcorrection threshold: the scenario's
//! `report.overcorrection_threshold_kvar` when it gives one, else
//! [`THRESHOLD_SHARE`] of the recommended total (the usual default, the smallest step,
//! would judge a layout of large steps more leniently). The scenario's dead band keys are
//! set aside, since the sweep tries dead bands as fractions of each layout's smallest step.
//!
//! The library does no printing; `report::design` writes the result.

pub mod layout;
pub mod need;
pub mod rank;

pub use layout::{DesignOptions, Family, Layout, OptionError};
pub use need::{CurvePoint, DurationCurve, KvarNeed};
pub use rank::{Candidate, CandidateResonance};

use crate::engine::Quiet;
use crate::error::{RunError, ScenarioError};
use crate::scenario::overrides::{lookup, Override};
use crate::scenario::Scenario;
use crate::study::Study;
use crate::sweep::{FrontAxes, Outcome, Row, Sweep, SweepError};
use rayon::prelude::*;
use serde::Serialize;
use std::path::Path;
use toml::Value;

/// The common overcorrection threshold when the scenario gives none: 5 % of the
/// recommended total (at least 0.1 kvar).
pub const THRESHOLD_SHARE: f64 = 0.05;

/// Why a design could not be made.
#[derive(Debug, thiserror::Error)]
pub enum DesignError {
    /// A design option is out of range.
    #[error("{0}")]
    Options(#[from] OptionError),
    /// The scenario is not valid.
    #[error("{0}")]
    Scenario(#[from] ScenarioError),
    /// The profile could not be prepared or read.
    #[error("{0}")]
    Run(#[from] RunError),
    /// The sweep of the candidates failed.
    #[error("{0}")]
    Sweep(#[from] SweepError),
}

/// Which part of the work a progress report is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    /// Reading the profile for the kvar needed (intervals).
    Need,
    /// Running the candidates with each setting (runs).
    Candidates,
    /// Repeating each candidate's best run for its assessment (runs).
    Checks,
}

/// One combination of controller settings tried on every candidate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Trial {
    /// Step ordering: `best-fit` or `rotating`.
    pub ordering: &'static str,
    /// Dead band half-width as a fraction of the layout's smallest step.
    pub dead_band_fraction: f64,
    /// Switching delay, s.
    pub switching_delay_s: f64,
}

impl Trial {
    /// The overrides that set it.
    fn overrides(&self) -> Vec<Override> {
        vec![
            Override::new("controller.ordering", Value::String(self.ordering.into())),
            Override::new(
                "controller.dead_band_fraction",
                Value::Float(self.dead_band_fraction),
            ),
            Override::new(
                "controller.switching_delay_s",
                Value::Float(self.switching_delay_s),
            ),
        ]
    }

    /// In words for a layout whose smallest step is `smallest_kvar`.
    pub fn words(&self, smallest_kvar: f64) -> Vec<String> {
        vec![
            format!("controller.ordering = \"{}\"", self.ordering),
            format!(
                "controller.dead_band_fraction = {} ({} kvar)",
                self.dead_band_fraction,
                crate::text::num(self.dead_band_fraction * smallest_kvar, 1)
            ),
            format!(
                "controller.switching_delay_s = {}",
                crate::text::num(self.switching_delay_s, 0)
            ),
        ]
    }
}

/// The handful of settings tried on every candidate: `best-fit` and `rotating` ordering,
/// dead band 0.65 (the usual default) and 0.9 × the smallest step, the scenario's switching
/// delay and twice it (10 s when it is 0): eight combinations.
pub fn settings_grid(delay_s: f64) -> Vec<Trial> {
    let longer = if delay_s > 0.0 { 2.0 * delay_s } else { 10.0 };
    let mut out = Vec::new();
    for ordering in ["best-fit", "rotating"] {
        for dead_band_fraction in [0.65, 0.9] {
            for switching_delay_s in [delay_s, longer] {
                out.push(Trial {
                    ordering,
                    dead_band_fraction,
                    switching_delay_s,
                });
            }
        }
    }
    out
}

/// What a design concluded.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Design {
    /// Study name.
    pub scenario: String,
    /// SHA-256 of the scenario text, lowercase hex (in the JSON `provenance` object).
    #[serde(skip)]
    pub scenario_sha256: String,
    /// SHA-256 of the CSV profile (`None` for the synthetic generator; in `provenance`).
    #[serde(skip)]
    pub profile_sha256: Option<String>,
    /// Seed of the synthetic generator (in `provenance`).
    #[serde(skip)]
    pub seed: u64,
    /// U_n, V.
    pub nominal_voltage_v: f64,
    /// The options used.
    pub options: DesignOptions,
    /// The kvar needed.
    pub need: KvarNeed,
    /// The band a layout's effective total must lie in, kvar (low, high).
    pub band_kvar: (f64, f64),
    /// The overcorrection threshold every candidate is judged by, kvar.
    pub overcorrection_threshold_kvar: f64,
    /// The settings tried on each candidate.
    pub settings_tried: Vec<Trial>,
    /// Simulation runs made (the sweep plus each candidate's repeated best run).
    pub runs: usize,
    /// The candidates, best first.
    pub candidates: Vec<Candidate>,
    /// Notes on what could not be done, in plain words.
    pub notes: Vec<String>,
}

impl Design {
    /// The recommended candidate: the first, when there is one.
    pub fn recommended(&self) -> Option<&Candidate> {
        self.candidates.first()
    }
}

/// Designs a bank for the scenario in `text` (`path` names it and anchors a relative CSV
/// path). `progress(stage, done, total)` hears about each stage, from any thread.
pub fn design(
    text: &str,
    path: &Path,
    opts: DesignOptions,
    progress: &(dyn Fn(Stage, u64, u64) + Sync),
) -> Result<Design, DesignError> {
    let opts = opts.checked()?;
    let scenario = Scenario::from_str(text, path)?;
    let u_n = scenario.supply.nominal_voltage_v;
    let delay = scenario.controller.connect_delay_s;
    let study = Study::prepare(scenario)?;
    let need = need::measure(&study, opts.coverage, &mut |d, t| {
        progress(Stage::Need, d, t)
    })?;
    let sc = &study.scenario;
    let r = need.recommended_kvar;
    let doc: toml::Table = text
        .parse()
        .map_err(|e: toml::de::Error| ScenarioError::Parse {
            file: path.to_path_buf(),
            message: e.to_string().trim_end().to_string(),
        })?;
    let written_threshold = lookup(&doc, "report.overcorrection_threshold_kvar").is_some();
    let threshold = if written_threshold {
        sc.overcorrection_threshold_kvar
    } else {
        (THRESHOLD_SHARE * r).max(0.1)
    };
    let trials = settings_grid(delay);
    let mut out = Design {
        scenario: sc.name.clone(),
        scenario_sha256: sc.content_sha256.clone(),
        profile_sha256: study.profile.sha256().map(str::to_string),
        seed: sc.seed,
        nominal_voltage_v: u_n,
        band_kvar: (layout::BAND_LOW * r, layout::BAND_HIGH * r),
        overcorrection_threshold_kvar: threshold,
        settings_tried: trials.clone(),
        runs: 0,
        candidates: Vec::new(),
        notes: Vec::new(),
        options: opts,
        need,
    };
    if r.is_nan() || r <= 0.0 {
        out.notes.push(format!(
            "The load needs no correction for {} of the time at the target {}, so there is \
             no bank to design at this coverage.",
            crate::text::pct(out.options.coverage),
            out.need.target
        ));
        return Ok(out);
    }
    let layouts = layout::candidates(&out.options, r, u_n);
    if layouts.is_empty() {
        out.notes.push(format!(
            "No layout of the sizes given ({} kvar) with 2 to {} steps has an effective total \
             within {} to {} kvar; give other sizes (--sizes) or more steps (--max-steps).",
            out.options
                .sizes_kvar
                .iter()
                .map(|s| crate::text::num(*s, if s.fract() == 0.0 { 0 } else { 1 }))
                .collect::<Vec<_>>()
                .join(", "),
            out.options.max_steps,
            crate::text::num(out.band_kvar.0, 1),
            crate::text::num(out.band_kvar.1, 1)
        ));
        return Ok(out);
    }

    // The base document: the scenario without its dead band keys (each trial sets the
    // fraction), with the common overcorrection threshold.
    let mut base = doc.clone();
    if let Some(Value::Table(c)) = base.get_mut("controller") {
        c.remove("dead_band_kvar");
        c.remove("dead_band_fraction");
    }
    let base_text = toml::to_string(&base).map_err(|e| ScenarioError::Parse {
        file: path.to_path_buf(),
        message: e.to_string(),
    })?;
    let mut settings = Vec::with_capacity(layouts.len() * trials.len());
    for l in &layouts {
        for t in &trials {
            let mut ov = vec![Override::new("steps", steps_value(l))];
            ov.extend(t.overrides());
            if !written_threshold {
                ov.push(Override::new(
                    "report.overcorrection_threshold_kvar",
                    Value::Float(threshold),
                ));
            }
            settings.push(ov);
        }
    }
    let keys = vec![
        "steps".to_string(),
        "controller.ordering".to_string(),
        "controller.dead_band_fraction".to_string(),
        "controller.switching_delay_s".to_string(),
    ];
    let spec_text = format!(
        "design of {} layouts × {} settings",
        layouts.len(),
        trials.len()
    );
    let sweep = Sweep::with_settings(
        &base_text,
        path,
        keys,
        settings,
        1,
        FrontAxes::PfOps,
        spec_text,
        Some(study.profile.clone()),
    )?;
    // Setting 0 is the scenario's own bank; the candidates are settings 1 onwards.
    let runs: Vec<usize> = (1..sweep.run_count()).collect();
    let rows = sweep.run_list(&runs, &|d, t| progress(Stage::Candidates, d, t))?;
    let per = trials.len();
    let best: Vec<usize> = layouts
        .iter()
        .enumerate()
        .map(|(i, _)| best_setting(&sweep, &rows[i * per..(i + 1) * per]))
        .collect::<Result<_, _>>()?;
    // Each candidate's best run again, assessed once by the analysis layer.
    let done = std::sync::atomic::AtomicU64::new(0);
    let total = layouts.len() as u64;
    progress(Stage::Checks, 0, total);
    let checked: Vec<Result<Candidate, DesignError>> = layouts
        .par_iter()
        .zip(best.par_iter())
        .map(|(l, &run)| {
            let st = sweep.study(run)?;
            let result = st.run(&mut Quiet)?;
            let assessment = crate::analysis::assess(&st, &result);
            let trial = &trials[(run - 1) % per];
            let c = rank::evaluate(
                l.clone(),
                trial.words(l.smallest_kvar()),
                u_n,
                &result,
                &assessment,
                &out.need,
            );
            let d = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
            progress(Stage::Checks, d, total);
            Ok(c)
        })
        .collect();
    let mut cands = checked.into_iter().collect::<Result<Vec<_>, _>>()?;
    rank::rank(&mut cands);
    out.runs = runs.len() + cands.len();
    out.candidates = cands;
    Ok(out)
}

/// The `[[steps]]` array of a layout: plain steps by their effective kvar, detuned ones by
/// their capacitors' catalogue rating, equal neighbours grouped with `count`.
pub fn steps_value(l: &Layout) -> Value {
    let mut tables = Vec::new();
    let mut i = 0;
    while i < l.rated_kvar.len() {
        let s = l.rated_kvar[i];
        let mut j = i;
        while j < l.rated_kvar.len() && l.rated_kvar[j] == s {
            j += 1;
        }
        let mut t = toml::Table::new();
        if l.detuning > 0.0 {
            t.insert("rated_kvar".into(), Value::Float(s));
            t.insert("rated_voltage_v".into(), Value::Float(l.rated_voltage_v));
            t.insert("detuning_pct".into(), Value::Float(l.detuning * 100.0));
        } else {
            t.insert("kvar".into(), Value::Float(s));
        }
        if j - i > 1 {
            t.insert("count".into(), Value::Integer((j - i) as i64));
        }
        tables.push(Value::Table(t));
        i = j;
    }
    Value::Array(tables)
}

/// The best run of one candidate's rows (its settings, in order): the sweep's
/// recommendation over those settings alone.
fn best_setting(sweep: &Sweep, rows: &[Row]) -> Result<usize, SweepError> {
    let mut fp = sweep.fingerprint();
    fp.runs = rows.len();
    fp.settings = rows.len();
    fp.seeds = 1;
    let local: Vec<Row> = rows
        .iter()
        .enumerate()
        .map(|(j, r)| Row {
            run: j,
            setting: j,
            ..r.clone()
        })
        .collect();
    let outcome = Outcome::from_rows(fp, local)?;
    let j = outcome.recommendation.setting.unwrap_or(0);
    Ok(rows[j].run)
}

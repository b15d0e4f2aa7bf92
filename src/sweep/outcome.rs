//! The outcome of a sweep, worked out from its rows alone: the figures of each setting
//! (median and spread over its seeds), the Pareto front, its ranking and the
//! recommendation. The whole run and a merge of shards call the same function on the
//! same rows, so they give the same outcome to the bit.

use super::front::{pareto_front, recommend, FrontAxes, Recommendation};
use super::runner::{describe, Row};
use super::shard::Fingerprint;
use super::SweepError;
use crate::pf::Quadrant;
use serde::{Serialize, Serializer};

/// Median and range of a figure over a setting's seeds (all equal with one seed).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Spread {
    /// Median (the mean of the middle two for an even count).
    #[serde(serialize_with = "finite")]
    pub median: f64,
    /// Lowest.
    #[serde(serialize_with = "finite")]
    pub min: f64,
    /// Highest.
    #[serde(serialize_with = "finite")]
    pub max: f64,
}

/// An infinite figure (a rated life never reached) is written as `null`.
fn finite<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
    if x.is_finite() {
        s.serialize_f64(*x)
    } else {
        s.serialize_none()
    }
}

impl Spread {
    /// The spread of some values (sorted here; NaN last). Empty gives NaN.
    pub fn of(values: &[f64]) -> Spread {
        let mut v = values.to_vec();
        v.sort_by(f64::total_cmp);
        let n = v.len();
        if n == 0 {
            return Spread {
                median: f64::NAN,
                min: f64::NAN,
                max: f64::NAN,
            };
        }
        let median = if n % 2 == 1 {
            v[n / 2]
        } else {
            (v[n / 2 - 1] + v[n / 2]) / 2.0
        };
        Spread {
            median,
            min: v[0],
            max: v[n - 1],
        }
    }
}

/// The figures of one setting over its seeds.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SettingStats {
    /// Setting index (0: the scenario's own settings).
    pub setting: usize,
    /// The keys varied (the same for every setting).
    #[serde(skip)]
    pub keys: Vec<String>,
    /// The value of each varied key, as TOML text.
    pub values: Vec<String>,
    /// Runs (seeds) of this setting.
    pub runs: usize,
    /// Billed PF.
    pub billed_pf: Spread,
    /// Quadrant of the billed PF (that of most of the seeds; `lag` on a tie).
    pub billed_pf_quadrant: Quadrant,
    /// The billed PF the target asks for.
    pub pf_goal: f64,
    /// True when the median billed PF meets the goal.
    pub meets_target: bool,
    /// Shortfall of the billed PF below the goal.
    pub pf_shortfall: Spread,
    /// Share of time under target, 0..1.
    pub share_under_target: Spread,
    /// Operations a year.
    pub operations_per_year: Spread,
    /// Years to the first contactor's rated life (`null`: never reached).
    pub years_to_first_life: Spread,
    /// Cost a year under the tariff, currency/year (`None`: no tariff).
    pub cost_per_year: Option<Spread>,
    /// On the Pareto front of the chosen objectives.
    pub on_front: bool,
}

impl SettingStats {
    /// The setting in words (`key = value, ...`, or the scenario's own settings).
    pub fn describe(&self) -> String {
        describe(&self.keys, &self.values, self.setting)
    }
}

/// Everything a sweep concluded.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Outcome {
    /// What was run (tool, scenario and profile hashes, variations, seeds).
    pub provenance: Fingerprint,
    /// One row per run, in run order.
    pub rows: Vec<Row>,
    /// One entry per setting, in setting order.
    pub settings: Vec<SettingStats>,
    /// The settings on the front, ranked: by cost a year (lowest first) when a tariff is
    /// given, else by the first objective (best first); ties by the second, then index.
    pub front: Vec<usize>,
    /// The recommendation.
    pub recommendation: Recommendation,
}

impl Outcome {
    /// Works out the outcome from all rows of a sweep (in any order; every run once).
    pub fn from_rows(fp: Fingerprint, mut rows: Vec<Row>) -> Result<Outcome, SweepError> {
        rows.sort_by_key(|r| r.run);
        let seeds = fp.seeds.max(1) as usize;
        if rows.len() != fp.runs || rows.iter().enumerate().any(|(i, r)| r.run != i) {
            return Err(SweepError::Merge(format!(
                "the rows do not cover runs 0 to {} exactly once",
                fp.runs.saturating_sub(1)
            )));
        }
        let axes = fp.front;
        let mut stats: Vec<SettingStats> = rows
            .chunks(seeds)
            .enumerate()
            .map(|(s, rs)| stats_of(s, rs, &fp.keys))
            .collect();
        let points: Vec<(f64, f64)> = stats.iter().map(|s| axes.point(s)).collect();
        for (s, on) in stats.iter_mut().zip(pareto_front(&points)) {
            s.on_front = on;
        }
        let mut front: Vec<usize> = stats
            .iter()
            .filter(|s| s.on_front)
            .map(|s| s.setting)
            .collect();
        front.sort_by(|&a, &b| {
            let (sa, sb) = (&stats[a], &stats[b]);
            let by_cost = match (&sa.cost_per_year, &sb.cost_per_year) {
                (Some(ca), Some(cb)) => ca.median.total_cmp(&cb.median),
                _ => std::cmp::Ordering::Equal,
            };
            let (pa, pb) = (axes.point(sa), axes.point(sb));
            by_cost
                .then(pb.0.total_cmp(&pa.0))
                .then(pb.1.total_cmp(&pa.1))
                .then(a.cmp(&b))
        });
        let recommendation = recommend(&stats, axes, fp.seeds);
        Ok(Outcome {
            provenance: fp,
            rows,
            settings: stats,
            front,
            recommendation,
        })
    }

    /// The objectives of the front.
    pub fn axes(&self) -> FrontAxes {
        self.provenance.front
    }
}

fn stats_of(setting: usize, rows: &[Row], keys: &[String]) -> SettingStats {
    let col =
        |f: &dyn Fn(&Row) -> f64| -> Spread { Spread::of(&rows.iter().map(f).collect::<Vec<_>>()) };
    let billed_pf = col(&|r| r.billed_pf);
    let leads = rows
        .iter()
        .filter(|r| r.billed_pf_quadrant == Quadrant::Lead)
        .count();
    let goal = rows.first().map_or(1.0, |r| r.pf_goal);
    let cost_per_year = rows
        .iter()
        .all(|r| r.cost.is_some())
        .then(|| col(&|r| r.cost.map_or(f64::NAN, |c| c.total)));
    SettingStats {
        setting,
        keys: keys.to_vec(),
        values: rows.first().map(|r| r.values.clone()).unwrap_or_default(),
        runs: rows.len(),
        billed_pf,
        billed_pf_quadrant: if leads * 2 > rows.len() {
            Quadrant::Lead
        } else {
            Quadrant::Lag
        },
        pf_goal: goal,
        meets_target: billed_pf.median >= goal,
        pf_shortfall: col(&|r| r.pf_shortfall),
        share_under_target: col(&|r| r.share_under_target),
        operations_per_year: col(&|r| r.operations_per_year),
        years_to_first_life: col(&|r| r.first_life.as_ref().map_or(f64::INFINITY, |l| l.years)),
        cost_per_year: if rows.is_empty() { None } else { cost_per_year },
        on_front: false,
    }
}

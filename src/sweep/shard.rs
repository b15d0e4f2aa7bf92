//! Shards: splitting a sweep's runs over processes or hosts, and merging what they wrote.
//!
//! Shard K of N (1 ≤ K ≤ N) does the runs whose index i has i mod N = K − 1, so the
//! shards together hold every run once and each holds a mix of settings (an even load).
//! A shard writes a [`ShardFile`]: its rows and the sweep's [`Fingerprint`] (tool version,
//! scenario and profile hashes, the variations, seeds, the number of runs, the front's
//! objectives). [`merge`] checks that the fingerprints agree and the shard split is one
//! split, that every run appears exactly once, and then works out the outcome from all
//! rows, exactly as the whole run does.

use super::front::FrontAxes;
use super::outcome::Outcome;
use super::runner::Row;
use super::SweepError;
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// Shard K of N.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Shard {
    /// This shard, 1..=N.
    pub k: u32,
    /// Number of shards.
    pub n: u32,
}

impl Shard {
    /// The whole sweep as one shard.
    pub const WHOLE: Shard = Shard { k: 1, n: 1 };

    /// Shard `k` of `n`, checked.
    pub fn new(k: u32, n: u32) -> Result<Shard, SweepError> {
        if n == 0 || k == 0 || k > n {
            return Err(SweepError::Spec {
                what: format!("--shard {k}/{n}"),
                message: "write K/N with 1 ≤ K ≤ N, e.g. 2/4".into(),
            });
        }
        Ok(Shard { k, n })
    }

    /// True when run `i` belongs to this shard.
    pub fn holds(&self, i: usize) -> bool {
        i % self.n as usize == (self.k - 1) as usize
    }

    /// The runs of this shard among `total`, ascending.
    pub fn runs(&self, total: usize) -> Vec<usize> {
        (0..total).filter(|&i| self.holds(i)).collect()
    }
}

impl FromStr for Shard {
    type Err = SweepError;
    fn from_str(s: &str) -> Result<Shard, SweepError> {
        let bad = || SweepError::Spec {
            what: format!("--shard {s}"),
            message: "write K/N with 1 ≤ K ≤ N, e.g. 2/4".into(),
        };
        let (k, n) = s.split_once('/').ok_or_else(bad)?;
        let k: u32 = k.trim().parse().map_err(|_| bad())?;
        let n: u32 = n.trim().parse().map_err(|_| bad())?;
        Shard::new(k, n)
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.k, self.n)
    }
}

/// What identifies a sweep: shards must agree on all of it to be merged. It is also the
/// provenance of the outcome (nothing here depends on the shard).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Fingerprint {
    /// Tool and version, e.g. `bankstep 0.1.0`.
    pub tool: String,
    /// Study name of the scenario.
    pub scenario: String,
    /// SHA-256 of the scenario text, lowercase hex.
    pub scenario_sha256: String,
    /// SHA-256 of each distinct load profile prepared (`synthetic` for the generator).
    pub profile_sha256: Vec<String>,
    /// The variations in one canonical line.
    pub variations: String,
    /// The keys varied, in order.
    pub keys: Vec<String>,
    /// Seeds per setting.
    pub seeds: u32,
    /// Settings, the reference included.
    pub settings: usize,
    /// Runs: settings × seeds.
    pub runs: usize,
    /// The objectives of the front.
    pub front: FrontAxes,
    /// Currency of the tariff (`None`: no tariff).
    pub currency: Option<String>,
}

/// What a shard writes: the fingerprint, which shard, and its rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ShardFile {
    /// The sweep's fingerprint.
    pub fingerprint: Fingerprint,
    /// Which shard.
    pub shard: Shard,
    /// The rows of the shard's runs, in run order.
    pub rows: Vec<Row>,
}

/// Merges shard files (`names` label them in errors): the fingerprints must agree, the
/// shards must be of one split, and every run must appear exactly once.
pub fn merge(files: Vec<ShardFile>, names: &[String]) -> Result<Outcome, SweepError> {
    let name = |i: usize| {
        names
            .get(i)
            .cloned()
            .unwrap_or_else(|| format!("shard file {}", i + 1))
    };
    let Some(first) = files.first() else {
        return Err(SweepError::Merge("no shard files to merge".into()));
    };
    let fp = first.fingerprint.clone();
    for (i, f) in files.iter().enumerate().skip(1) {
        if let Some(diff) = differs(&fp, &f.fingerprint) {
            return Err(SweepError::Merge(format!(
                "{} and {} are not shards of the same sweep: {diff}",
                name(0),
                name(i)
            )));
        }
    }
    for (i, f) in files.iter().enumerate().skip(1) {
        if f.shard.n != first.shard.n {
            return Err(SweepError::Merge(format!(
                "{} is shard {} but {} is shard {}: the files come from splits into different \
                 numbers of shards",
                name(0),
                first.shard,
                name(i),
                f.shard
            )));
        }
    }
    let mut owner: Vec<Option<usize>> = vec![None; fp.runs];
    for (i, f) in files.iter().enumerate() {
        for r in &f.rows {
            if r.run >= fp.runs {
                return Err(SweepError::Merge(format!(
                    "{} holds run {}, but the sweep has runs 0 to {}",
                    name(i),
                    r.run,
                    fp.runs.saturating_sub(1)
                )));
            }
            if let Some(j) = owner[r.run] {
                return Err(SweepError::Merge(format!(
                    "run {} appears twice ({} and {}); give each shard once",
                    r.run,
                    name(j),
                    name(i)
                )));
            }
            owner[r.run] = Some(i);
        }
    }
    let missing: Vec<usize> = owner
        .iter()
        .enumerate()
        .filter(|(_, o)| o.is_none())
        .map(|(i, _)| i)
        .collect();
    if !missing.is_empty() {
        let shown: Vec<String> = missing.iter().take(10).map(|i| i.to_string()).collect();
        let n = files[0].shard.n;
        let have: Vec<String> = files.iter().map(|f| f.shard.to_string()).collect();
        return Err(SweepError::Merge(format!(
            "{} of {} runs are missing (runs {}{}); the files hold shards {} of a {n}-way split",
            missing.len(),
            fp.runs,
            shown.join(", "),
            if missing.len() > 10 { ", ..." } else { "" },
            have.join(", ")
        )));
    }
    let mut rows: Vec<Row> = files.into_iter().flat_map(|f| f.rows).collect();
    rows.sort_by_key(|r| r.run);
    Outcome::from_rows(fp, rows)
}

/// The first field in which two fingerprints differ, in words.
fn differs(a: &Fingerprint, b: &Fingerprint) -> Option<String> {
    let checks: [(&str, bool); 11] = [
        ("tool version", a.tool == b.tool),
        ("scenario name", a.scenario == b.scenario),
        ("scenario hash", a.scenario_sha256 == b.scenario_sha256),
        ("load profile hash", a.profile_sha256 == b.profile_sha256),
        ("variations", a.variations == b.variations),
        ("keys", a.keys == b.keys),
        ("seeds", a.seeds == b.seeds),
        ("settings", a.settings == b.settings),
        ("runs", a.runs == b.runs),
        ("front", a.front == b.front),
        ("tariff currency", a.currency == b.currency),
    ];
    checks
        .iter()
        .find(|(_, same)| !same)
        .map(|(what, _)| format!("their {what} differ"))
}

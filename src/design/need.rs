//! The reactive power the site needs: the kvar a bank would have to deliver at each
//! instant to bring the load to the target power factor, gathered into a time-weighted
//! duration curve, and the totals read from it (the recommended total at a coverage, the
//! maximum, the energy-weighted figure, the light-load need).
//!
//! The need of one sample is worked out on the three-phase load as the profile gives it
//! (the sum of the phases, load sign convention, at nominal voltage):
//!
//! Q_c = Q − P·tan φ_t = P·(tan φ_load − tan φ_t), and 0 where that is negative or P ≤ 0.
//!
//! This is the kW-multiplier relation of IEEE Std 141 written with the load's own Q. How
//! the awkward cases count:
//!
//! - **Exporting or idle** (P ≤ 0): no need. A bank cannot help a billed PF while the site
//!   exports, and the controller's default export mode does not close steps for it.
//! - **Leading load** (Q < 0) with a lagging or unity target: no need, since the load
//!   already leads; the time still counts in the curve, as time needing 0 kvar. With a
//!   leading target a load needs capacitive kvar until it leads by the target's angle, so
//!   a load at unity needs P·|tan φ_t| and only a load leading beyond the target needs
//!   nothing.
//! - **Already at or past the target** (Q ≤ P·tan φ_t): no need.
//!
//! Every interval of the run counts for its length, so the curve is a share of the run's
//! time. The source is walked with [`LoadSource::unchanged_until`]: a logger row that holds
//! for 15 minutes is one entry, so coarse data costs what its rows cost, not what its
//! intervals cost.
//!
//! Memory stays bounded: the curve keeps each distinct need with its time, exactly, until
//! there are more than [`EXACT_LEVELS`] of them (noisy one-second data); then the levels
//! are rounded **up** to a grid of [`GRID_KVAR`] (doubled as often as needed to stay within
//! the bound), which errs on the side of more kvar, and the curve says which grid it used.

use crate::error::RunError;
use crate::pf::PfTarget;
use crate::profile::{LoadSample, LoadSource};
use crate::study::{RunPlan, Study};
use serde::Serialize;

/// Default coverage: the recommended total covers the need 95 % of the run's time.
pub const DEFAULT_COVERAGE: f64 = 0.95;

/// The share of the time with some need that the light-load need is taken at: the need
/// exceeded 90 % of the time the load needs anything at all.
pub const LIGHT_LOAD_SHARE: f64 = 0.10;

/// Distinct need levels kept exactly before they are rounded to a grid.
pub const EXACT_LEVELS: usize = 1 << 21;

/// First grid the need levels are rounded up to once there are too many, kvar.
pub const GRID_KVAR: f64 = 0.01;

/// The kvar needed to bring a three-phase load of `p_kw` and `q_kvar` (load convention:
/// P > 0 import, Q > 0 inductive) to a target of tan φ_t = `tan_target` (positive lagging,
/// negative leading): Q − P·tan φ_t where positive and P > 0, else 0.
pub fn kvar_needed(p_kw: f64, q_kvar: f64, tan_target: f64) -> f64 {
    if p_kw.is_nan() || p_kw <= 0.0 {
        return 0.0;
    }
    let q = q_kvar - p_kw * tan_target;
    if q > 0.0 {
        q
    } else {
        0.0
    }
}

/// One point of the duration curve for a figure: the need is at least `kvar` for
/// `share_of_time` of the run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CurvePoint {
    /// Share of the run's time, 0 to 1.
    pub share_of_time: f64,
    /// The need exceeded (or reached) for that share, kvar.
    pub kvar: f64,
}

/// The time-weighted distribution of the kvar needed: each distinct level with the time
/// the run spent needing it.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct DurationCurve {
    /// Need levels ascending, kvar, with the time at each, s.
    levels: Vec<(f64, f64)>,
    /// Time of the run, s.
    total_s: f64,
    /// The grid the levels were rounded up to, kvar; `None` when they are exact.
    grid_kvar: Option<f64>,
}

/// Builds a [`DurationCurve`] from (need, time) pieces in any order.
#[derive(Debug, Clone, Default)]
pub struct CurveBuilder {
    levels: Vec<(f64, f64)>,
    grid: Option<f64>,
    cap: usize,
}

impl CurveBuilder {
    /// A builder keeping up to [`EXACT_LEVELS`] distinct levels exactly.
    pub fn new() -> Self {
        Self::with_capacity_limit(EXACT_LEVELS)
    }

    /// A builder keeping up to `cap` (at least 16) distinct levels exactly before rounding.
    pub fn with_capacity_limit(cap: usize) -> Self {
        CurveBuilder {
            levels: Vec::new(),
            grid: None,
            cap: cap.max(16),
        }
    }

    /// Adds `time_s` seconds at a need of `kvar`.
    pub fn add(&mut self, kvar: f64, time_s: f64) {
        let k = match self.grid {
            Some(g) => round_up(kvar, g),
            None => kvar,
        };
        if let Some(last) = self.levels.last_mut() {
            if last.0 == k {
                last.1 += time_s;
                return;
            }
        }
        self.levels.push((k, time_s));
        if self.levels.len() >= self.cap {
            self.compact();
        }
    }

    /// Sorts and merges equal levels; rounds to a (coarser) grid while that leaves too many.
    fn compact(&mut self) {
        merge_sorted(&mut self.levels);
        while self.levels.len() > self.cap / 2 {
            let g = match self.grid {
                None => GRID_KVAR,
                Some(g) => 2.0 * g,
            };
            self.grid = Some(g);
            for l in &mut self.levels {
                l.0 = round_up(l.0, g);
            }
            merge_sorted(&mut self.levels);
        }
    }

    /// The curve.
    pub fn finish(mut self) -> DurationCurve {
        merge_sorted(&mut self.levels);
        let total_s = self.levels.iter().map(|l| l.1).sum();
        DurationCurve {
            levels: self.levels,
            total_s,
            grid_kvar: self.grid,
        }
    }
}

/// `x` rounded up to a multiple of `g` (0 stays 0).
fn round_up(x: f64, g: f64) -> f64 {
    (x / g - 1e-9).ceil().max(0.0) * g
}

/// Sorts levels ascending and adds the times of equal ones, in a fixed order.
fn merge_sorted(levels: &mut Vec<(f64, f64)>) {
    levels.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(levels.len());
    for &(k, s) in levels.iter() {
        match out.last_mut() {
            Some(last) if last.0 == k => last.1 += s,
            _ => out.push((k, s)),
        }
    }
    *levels = out;
}

impl DurationCurve {
    /// The curve of (need kvar, time s) pieces.
    pub fn from_pieces(pieces: impl IntoIterator<Item = (f64, f64)>) -> Self {
        let mut b = CurveBuilder::new();
        for (k, s) in pieces {
            b.add(k, s);
        }
        b.finish()
    }

    /// Time the curve covers, s.
    pub fn total_s(&self) -> f64 {
        self.total_s
    }

    /// The grid the levels were rounded up to, kvar (`None`: exact).
    pub fn grid_kvar(&self) -> Option<f64> {
        self.grid_kvar
    }

    /// Distinct need levels ascending, kvar, each with its time, s.
    pub fn levels(&self) -> &[(f64, f64)] {
        &self.levels
    }

    /// The largest need, kvar (0 for an empty curve).
    pub fn max_kvar(&self) -> f64 {
        self.levels.last().map_or(0.0, |l| l.0)
    }

    /// Reactive energy the load needs over the run, kvarh: ∫ Q_c dt.
    pub fn kvarh(&self) -> f64 {
        self.levels.iter().map(|&(k, s)| k * s).sum::<f64>() / 3600.0
    }

    /// Time-mean need, kvar.
    pub fn mean_kvar(&self) -> f64 {
        if self.total_s > 0.0 {
            self.kvarh() * 3600.0 / self.total_s
        } else {
            0.0
        }
    }

    /// Share of the time (0 to 1) with a need above `kvar`: the time a bank of `kvar`
    /// cannot cover in full.
    pub fn share_above(&self, kvar: f64) -> f64 {
        if self.total_s <= 0.0 {
            return 0.0;
        }
        let s: f64 = self.levels.iter().filter(|l| l.0 > kvar).map(|l| l.1).sum();
        s / self.total_s
    }

    /// The kvar that covers `coverage` (0 to 1) of the run's time: the smallest level Q
    /// with the need at or below Q for at least that share of the time. Coverage 1 gives
    /// the maximum; coverage 0 the smallest level.
    pub fn quantile(&self, coverage: f64) -> f64 {
        let want = coverage.clamp(0.0, 1.0) * self.total_s;
        // A relative allowance for the rounding of the running sum, so that a level
        // holding exactly the asked share counts as covering it.
        let slack = 1e-12 * self.total_s;
        let mut cum = 0.0;
        for &(k, s) in &self.levels {
            cum += s;
            if cum + slack >= want {
                return k;
            }
        }
        self.max_kvar()
    }

    /// The energy-weighted figure: the smallest bank size Q whose output, capped at the
    /// need, delivers `coverage` (0 to 1) of the kvarh the load needs,
    /// ∫ min(Q_c, Q) dt = coverage · ∫ Q_c dt, kvar (linear between levels, so it need not
    /// be a level itself). A constant need Q_c gives coverage · Q_c.
    pub fn energy_quantile(&self, coverage: f64) -> f64 {
        let total: f64 = self.levels.iter().map(|&(k, s)| k * s).sum();
        if total <= 0.0 {
            return 0.0;
        }
        let want = coverage.clamp(0.0, 1.0) * total;
        // Delivered(Q) = Σ s·min(k, Q), piecewise linear in Q: below level i (ascending),
        // the levels from i on deliver Q each and the ones before deliver their own k.
        let mut below = 0.0; // Σ k·s of levels below Q
        let mut time_at_or_above = self.total_s;
        let mut prev = 0.0;
        for &(k, s) in &self.levels {
            // On [prev, k], Delivered(Q) = below + Q·time_at_or_above.
            let at_k = below + k * time_at_or_above;
            if at_k >= want {
                return if time_at_or_above > 0.0 {
                    ((want - below) / time_at_or_above).clamp(prev, k)
                } else {
                    k
                };
            }
            below += k * s;
            time_at_or_above -= s;
            prev = k;
        }
        self.max_kvar()
    }

    /// `n` + 1 points (n at least 1) of the duration curve for a figure, from share 0 to 1
    /// of the time: at share x, the need reached or exceeded for that share of the run,
    /// the largest need first.
    pub fn points(&self, n: usize) -> Vec<CurvePoint> {
        let n = n.max(1);
        (0..=n)
            .map(|i| {
                let x = i as f64 / n as f64;
                CurvePoint {
                    share_of_time: x,
                    kvar: self.quantile(1.0 - x),
                }
            })
            .collect()
    }

    /// The need exceeded for all but `share` of the time the load needs anything
    /// (levels above 0 only); 0 when it never needs anything.
    pub fn light_kvar(&self, share: f64) -> f64 {
        let positive: f64 = self.levels.iter().filter(|l| l.0 > 0.0).map(|l| l.1).sum();
        if positive <= 0.0 {
            return 0.0;
        }
        let want = share.clamp(0.0, 1.0) * positive;
        let slack = 1e-12 * positive;
        let mut cum = 0.0;
        for &(k, s) in self.levels.iter().filter(|l| l.0 > 0.0) {
            cum += s;
            if cum + slack >= want {
                return k;
            }
        }
        self.max_kvar()
    }
}

/// What the load needs, read from its profile.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct KvarNeed {
    /// The target the need is worked out for, e.g. `0.95 lag`.
    pub target: String,
    /// tan φ of the target (positive lagging, negative leading).
    pub tan_target: f64,
    /// Coverage asked for, share of the run's time (0 to 1).
    pub coverage: f64,
    /// The recommended total: the need covered for `coverage` of the time, kvar.
    pub recommended_kvar: f64,
    /// The largest need of the run, kvar.
    pub max_kvar: f64,
    /// The energy-weighted figure: the bank size delivering `coverage` of the kvarh
    /// needed, kvar (see [`DurationCurve::energy_quantile`]).
    pub energy_weighted_kvar: f64,
    /// The time-mean need, kvar.
    pub mean_kvar: f64,
    /// The light-load need: exceeded 90 % of the time the load needs anything, kvar.
    pub light_load_kvar: f64,
    /// Reactive energy needed over the run, kvarh.
    pub kvarh_needed: f64,
    /// Share of the time (0 to 1) needing nothing: exporting or idle, leading, or already
    /// at or past the target.
    pub share_no_need: f64,
    /// Share of the time (0 to 1) exporting or idle (P ≤ 0).
    pub share_export: f64,
    /// Share of the time (0 to 1) importing with a leading load (Q < 0).
    pub share_leading_load: f64,
    /// Length of the run walked, s.
    pub duration_s: f64,
    /// Samples read from the source (a row that holds for many intervals is read once).
    pub samples_read: u64,
    /// The grid the need was rounded up to, kvar (`null`: exact).
    pub grid_kvar: Option<f64>,
    /// The curve, for figures: the need reached or exceeded for each share of the time,
    /// 201 points from 0 to 1.
    pub curve: Vec<CurvePoint>,
    /// The full curve.
    #[serde(skip)]
    pub duration_curve: DurationCurve,
}

/// Points in [`KvarNeed::curve`], less one.
pub const CURVE_POINTS: usize = 200;

/// The need of the study's load, walking its own source over the run's time base;
/// `progress(done, total)` hears about the intervals covered.
pub fn measure(
    study: &Study,
    coverage: f64,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<KvarNeed, RunError> {
    let mut src = study.source()?;
    measure_source(
        &mut src,
        &study.plan,
        study.scenario.controller.target,
        coverage,
        progress,
    )
}

/// The need of the load `source` gives on the time base `plan`, for `target`.
pub fn measure_source<S: LoadSource + ?Sized>(
    source: &mut S,
    plan: &RunPlan,
    target: PfTarget,
    coverage: f64,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<KvarNeed, RunError> {
    let tan_t = target.tan_phi();
    let n = plan.intervals;
    let mut b = CurveBuilder::new();
    let mut s = LoadSample::default();
    let (mut export_s, mut leading_s) = (0.0, 0.0);
    let mut k = 0u64;
    let mut read = 0u64;
    let mut next_report = 0u64;
    while k < n {
        let t = plan.t_first_s + k as f64 * plan.dt_s;
        source.sample(k, t, &mut s)?;
        read += 1;
        let next = source.unchanged_until(k).clamp(k + 1, n);
        let held = (next - k) as f64 * plan.dt_s;
        let (p, q) = (s.p_total(), s.q_total());
        if p.is_nan() || p <= 0.0 {
            export_s += held;
        } else if q < 0.0 {
            leading_s += held;
        }
        b.add(kvar_needed(p, q, tan_t), held);
        k = next;
        if k >= next_report {
            progress(k, n);
            next_report = k + crate::engine::PROGRESS_EVERY;
        }
    }
    progress(n, n);
    let curve = b.finish();
    let total = curve.total_s().max(1e-300);
    let no_need: f64 = curve
        .levels()
        .iter()
        .filter(|l| l.0 <= 0.0)
        .map(|l| l.1)
        .sum();
    Ok(KvarNeed {
        target: target.to_string(),
        tan_target: tan_t,
        coverage,
        recommended_kvar: curve.quantile(coverage),
        max_kvar: curve.max_kvar(),
        energy_weighted_kvar: curve.energy_quantile(coverage),
        mean_kvar: curve.mean_kvar(),
        light_load_kvar: curve.light_kvar(LIGHT_LOAD_SHARE),
        kvarh_needed: curve.kvarh(),
        share_no_need: no_need / total,
        share_export: export_s / total,
        share_leading_load: leading_s / total,
        duration_s: curve.total_s(),
        samples_read: read,
        grid_kvar: curve.grid_kvar(),
        curve: curve.points(CURVE_POINTS),
        duration_curve: curve,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // Worked by hand: 2 h at 10 kvar and 8 h at 0; the need covering 80 % of the time is
    // 0, covering 81 % is 10.
    #[test]
    fn quantile_steps_at_the_share() {
        let c = DurationCurve::from_pieces([(10.0, 7200.0), (0.0, 28_800.0)]);
        assert_eq!(c.quantile(0.8), 0.0);
        assert_eq!(c.quantile(0.81), 10.0);
        assert_eq!(c.share_above(0.0), 0.2);
        assert_eq!(c.light_kvar(0.1), 10.0);
    }

    // Worked by hand: needs 10 kvar for 1 h and 30 kvar for 1 h: 40 kvarh. A bank of Q
    // between 10 and 30 delivers 10 + Q kvarh; 90 % is 36 kvarh, so Q = 26 kvar.
    #[test]
    fn energy_quantile_is_linear_between_levels() {
        let c = DurationCurve::from_pieces([(30.0, 3600.0), (10.0, 3600.0)]);
        assert!((c.kvarh() - 40.0).abs() < 1e-12);
        assert!((c.energy_quantile(0.9) - 26.0).abs() < 1e-9);
        // Below the first level both intervals deliver Q: 2·Q = 0.4·40 → Q = 8.
        assert!((c.energy_quantile(0.4) - 8.0).abs() < 1e-9);
        assert_eq!(c.energy_quantile(1.0), 30.0);
    }

    // Rounding up to a grid keeps the total time and never lowers a level.
    #[test]
    fn rounding_to_a_grid_errs_high() {
        let mut b = CurveBuilder::with_capacity_limit(16);
        let mut exact_max: f64 = 0.0;
        for i in 0..1000 {
            let k = (i as f64 * 0.37) % 50.0;
            exact_max = exact_max.max(k);
            b.add(k, 1.0);
        }
        let c = b.finish();
        assert!(c.grid_kvar().is_some());
        assert_eq!(c.total_s(), 1000.0);
        assert!(c.levels().len() <= 16);
        assert!(c.max_kvar() >= exact_max);
        assert!(c.max_kvar() - exact_max <= c.grid_kvar().unwrap());
    }

    #[test]
    fn leading_and_exporting_loads_need_nothing() {
        let lag = crate::pf::PfTarget::lag(0.95).tan_phi();
        assert_eq!(kvar_needed(-10.0, 50.0, lag), 0.0);
        assert_eq!(kvar_needed(0.0, 50.0, lag), 0.0);
        assert_eq!(kvar_needed(100.0, -5.0, lag), 0.0);
        // A leading target asks for kvar even from a load at unity.
        let lead = crate::pf::PfTarget::lead(0.95).tan_phi();
        assert!((kvar_needed(100.0, 0.0, lead) - 100.0 * 0.328_684).abs() < 1e-4);
    }
}

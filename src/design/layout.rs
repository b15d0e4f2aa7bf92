//! Candidate step layouts: the ways of splitting a bank into switched steps of catalogue
//! sizes, kept where their effective total lies in a band around the recommended total.
//!
//! Four usual families, each from the available catalogue sizes (kvar at the capacitors'
//! rated voltage) and up to a maximum number of switched steps (at least 2):
//!
//! - **equal**: n × s;
//! - **1:2:2…**: s + (n − 1) × 2s, a half-size first step and equal steps;
//! - **binary** 1:2:4…: s, 2s, 4s, … (n ≥ 3; with two steps it is the 1:2:2 layout);
//! - **small + equal**: a small trim step s₀ + (n − 1) × s with s/4 ≤ s₀ < s/2 (the
//!   half-size step is the 1:2:2 family).
//!
//! Each size in a layout must itself be one of the available sizes. The steps are
//! numbered smallest first, as they are usually wired.
//!
//! Each layout comes plain and behind each detuning ratio asked for. A plain step is a
//! capacitor rated at U_n, so its effective output is its catalogue size. A detuned step
//! uses capacitors of the catalogue size rated at the usual voltage for that ratio (the
//! smallest common rating at or above U_n/(1 − p): 440 V for 5.67 % and 7 % at 400 V),
//! and delivers Q_R·(U_n/U_R)²/(1 − p): 50 kvar rated at 440 V behind 7 % gives 44.43
//! kvar at 400 V. The band is applied to the effective total.
//!
//! **Band.** A layout is kept when its effective total lies from [`BAND_LOW`] to
//! [`BAND_HIGH`] times the recommended total (100 to 130 %): below it the bank misses the
//! coverage asked for; above it the extra capacitance sits idle most of the time, costs
//! money and lowers the resonant order of the full bank. The 30 % allows for the coarse
//! steps of a catalogue and some growth.
//!
//! **Which layouts are simulated.** Within a family, layouts of the same smallest step and
//! step count differ only in total, so only the one with the least excess over the
//! recommended total is kept per family and smallest size; then the families take turns
//! (equal, small + equal, 1:2:2, binary), each offering its layout of least excess first,
//! up to [`DesignOptions::max_layouts`] layouts per detuning ratio.

use crate::harmonics::limits::default_rated_voltage;
use crate::scenario::effective_kvar;
use serde::Serialize;

/// Lower end of the band, times the recommended total.
pub const BAND_LOW: f64 = 1.0;

/// Upper end of the band, times the recommended total.
pub const BAND_HIGH: f64 = 1.3;

/// Default catalogue sizes, kvar: a common series of low-voltage capacitor ratings
/// (common practice, from memory).
pub const DEFAULT_SIZES_KVAR: [f64; 12] = [
    5.0, 10.0, 12.5, 15.0, 20.0, 25.0, 30.0, 40.0, 50.0, 60.0, 75.0, 100.0,
];

/// Default largest number of switched steps.
pub const DEFAULT_MAX_STEPS: usize = 8;

/// Default detuning ratios to try besides plain steps, fractions (7 %).
pub const DEFAULT_DETUNING: [f64; 1] = [0.07];

/// Default number of layouts simulated per detuning ratio (plain counting as one).
pub const DEFAULT_MAX_LAYOUTS: usize = 10;

/// The choices of a design.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DesignOptions {
    /// Share of the run's time the recommended total covers, 0 to 1. Default 0.95.
    pub coverage: f64,
    /// Available catalogue sizes, kvar at the capacitors' rated voltage, ascending.
    /// Default [`DEFAULT_SIZES_KVAR`].
    pub sizes_kvar: Vec<f64>,
    /// Largest number of switched steps, 2 to 64. Default 8.
    pub max_steps: usize,
    /// Detuning ratios, fractions (0 for plain). Default plain and 7 %.
    pub detuning: Vec<f64>,
    /// Layouts simulated per detuning ratio, at least 1. Default 10.
    pub max_layouts: usize,
}

impl Default for DesignOptions {
    fn default() -> Self {
        let mut detuning = vec![0.0];
        detuning.extend(DEFAULT_DETUNING);
        DesignOptions {
            coverage: crate::design::need::DEFAULT_COVERAGE,
            sizes_kvar: DEFAULT_SIZES_KVAR.to_vec(),
            max_steps: DEFAULT_MAX_STEPS,
            detuning,
            max_layouts: DEFAULT_MAX_LAYOUTS,
        }
    }
}

/// Why a design option is refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum OptionError {
    /// The coverage is outside (0, 1].
    #[error("coverage {0}: allowed more than 0 and at most 1 (a share of the run's time)")]
    Coverage(f64),
    /// No sizes, or a size outside (0, 100 000] kvar.
    #[error("step sizes: {0}")]
    Sizes(String),
    /// The step count is outside 2 to 64.
    #[error("largest number of steps {0}: allowed 2 to 64")]
    MaxSteps(usize),
    /// A detuning ratio outside [0, 20] %.
    #[error("detuning {0} %: allowed 0 (plain) to 20 %")]
    Detuning(f64),
    /// No layouts to simulate.
    #[error("layouts simulated: allowed 1 or more")]
    MaxLayouts,
}

impl DesignOptions {
    /// Checks the ranges, sorts the sizes and the ratios and drops repeats.
    pub fn checked(mut self) -> Result<Self, OptionError> {
        if !(self.coverage > 0.0 && self.coverage <= 1.0) {
            return Err(OptionError::Coverage(self.coverage));
        }
        if self.sizes_kvar.is_empty() {
            return Err(OptionError::Sizes("give at least one size, kvar".into()));
        }
        for &s in &self.sizes_kvar {
            if !(s.is_finite() && s > 0.0 && s <= 100_000.0) {
                return Err(OptionError::Sizes(format!(
                    "{s} kvar is outside the allowed range: more than 0, up to 100 000 kvar"
                )));
            }
        }
        self.sizes_kvar.sort_by(f64::total_cmp);
        self.sizes_kvar.dedup();
        if !(2..=crate::bank::MAX_STEPS).contains(&self.max_steps) {
            return Err(OptionError::MaxSteps(self.max_steps));
        }
        for &p in &self.detuning {
            if !(p.is_finite() && (0.0..=0.2).contains(&p)) {
                return Err(OptionError::Detuning(p * 100.0));
            }
        }
        self.detuning.sort_by(f64::total_cmp);
        self.detuning.dedup();
        if self.detuning.is_empty() {
            self.detuning.push(0.0);
        }
        if self.max_layouts == 0 {
            return Err(OptionError::MaxLayouts);
        }
        Ok(self)
    }
}

/// A family of layouts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Family {
    /// n × s.
    Equal,
    /// A small trim step and equal steps, s₀ + (n − 1) × s.
    SmallPlusEqual,
    /// s + (n − 1) × 2s.
    OneTwoTwo,
    /// s, 2s, 4s, …
    Binary,
}

impl Family {
    /// The family in words.
    pub fn words(self) -> &'static str {
        match self {
            Family::Equal => "equal steps",
            Family::SmallPlusEqual => "small step plus equal steps",
            Family::OneTwoTwo => "1:2:2 (half-size first step)",
            Family::Binary => "binary 1:2:4",
        }
    }

    /// Every family, in the order they take turns.
    pub const ALL: [Family; 4] = [
        Family::Equal,
        Family::SmallPlusEqual,
        Family::OneTwoTwo,
        Family::Binary,
    ];
}

/// One candidate layout: catalogue sizes, detuning and what the steps deliver.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Layout {
    /// Its family.
    pub family: Family,
    /// Catalogue size of each step in number order, kvar at `rated_voltage_v`.
    pub rated_kvar: Vec<f64>,
    /// Detuning ratio, fraction (0: plain).
    pub detuning: f64,
    /// The capacitors' rated voltage, V (U_n for plain steps).
    pub rated_voltage_v: f64,
    /// Effective output of each step at U_n, kvar.
    pub step_kvar: Vec<f64>,
    /// Effective total at U_n, kvar.
    pub total_kvar: f64,
}

impl Layout {
    /// A layout of catalogue sizes (in number order) behind detuning `p` (0: plain) on a
    /// bus of `u_n_v`.
    pub fn new(family: Family, rated_kvar: Vec<f64>, p: f64, u_n_v: f64) -> Self {
        let detuning = (p > 0.0).then_some(p);
        let rated_voltage_v = default_rated_voltage(u_n_v, detuning);
        let step_kvar: Vec<f64> = rated_kvar
            .iter()
            .map(|&q| effective_kvar(q, rated_voltage_v, u_n_v, detuning))
            .collect();
        let total_kvar = step_kvar.iter().sum();
        Layout {
            family,
            rated_kvar,
            detuning: p,
            rated_voltage_v,
            step_kvar,
            total_kvar,
        }
    }

    /// Number of switched steps.
    pub fn steps(&self) -> usize {
        self.rated_kvar.len()
    }

    /// The smallest step's effective output, kvar.
    pub fn smallest_kvar(&self) -> f64 {
        self.step_kvar.iter().copied().fold(f64::INFINITY, f64::min)
    }

    /// The catalogue sizes in the layout shorthand of sweeps: `6x50`, `25+5x50`,
    /// `20+40+80`, runs of equal sizes grouped. For a plain layout this is the layout
    /// itself; a detuned one's effective sizes differ (see [`Layout::step_kvar`]).
    pub fn shorthand_plain(&self) -> String {
        let mut parts: Vec<String> = Vec::new();
        let mut i = 0;
        while i < self.rated_kvar.len() {
            let s = self.rated_kvar[i];
            let mut j = i;
            while j < self.rated_kvar.len() && self.rated_kvar[j] == s {
                j += 1;
            }
            let n = j - i;
            let size = crate::text::num(s, if s.fract() == 0.0 { 0 } else { 1 });
            let size = size.replace(',', "");
            parts.push(if n == 1 { size } else { format!("{n}x{size}") });
            i = j;
        }
        parts.join("+")
    }

    /// The layout in words: `6 × 50 kvar plain` or `25 + 5 × 50 kvar rated at 440 V,
    /// 7 % detuned (22.2 + 5 × 44.4 kvar at 400 V)`.
    pub fn words(&self, u_n_v: f64) -> String {
        let sizes = self.shorthand_sizes(&self.rated_kvar);
        if self.detuning > 0.0 {
            format!(
                "{sizes} kvar rated at {} V behind {} % reactors ({} kvar at {} V)",
                crate::text::num(self.rated_voltage_v, 0),
                pct_text(self.detuning),
                self.shorthand_sizes(&self.step_kvar),
                crate::text::num(u_n_v, 0)
            )
        } else {
            format!("{sizes} kvar plain")
        }
    }

    /// Sizes grouped as `25 + 5 × 50`.
    fn shorthand_sizes(&self, sizes: &[f64]) -> String {
        let mut parts = Vec::new();
        let mut i = 0;
        while i < sizes.len() {
            let s = sizes[i];
            let mut j = i;
            while j < sizes.len() && (sizes[j] - s).abs() <= 1e-9 * s.abs().max(1.0) {
                j += 1;
            }
            let digits = if (s - s.round()).abs() < 1e-9 { 0 } else { 1 };
            let size = crate::text::num(s, digits);
            parts.push(if j - i == 1 {
                size
            } else {
                format!("{} × {size}", j - i)
            });
            i = j;
        }
        parts.join(" + ")
    }

    /// Every kvar level the steps can reach together, ascending, 0 included (the sums of
    /// every subset of steps, equal sums once), at U_n.
    pub fn reachable_kvar(&self) -> Vec<f64> {
        let mut sums = vec![0.0f64];
        for &q in &self.step_kvar {
            let more: Vec<f64> = sums.iter().map(|s| s + q).collect();
            sums.extend(more);
            sums.sort_by(f64::total_cmp);
            sums.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs().max(1.0));
        }
        sums
    }

    /// The largest gap between reachable levels, kvar: how far the bank may land from the
    /// need at worst before the dead band.
    pub fn largest_gap_kvar(&self) -> f64 {
        self.reachable_kvar()
            .windows(2)
            .map(|w| w[1] - w[0])
            .fold(0.0, f64::max)
    }
}

/// A ratio as a percentage without trailing zeros: `7`, `5.67`.
pub fn pct_text(p: f64) -> String {
    let t = format!("{:.2}", p * 100.0);
    t.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// Every layout of the families from `sizes` (ascending) up to `max_steps` steps, as
/// catalogue sizes in number order, with its family; repeats (the same sizes in the same
/// order) once, under the first family that makes them.
pub fn all_layouts(sizes: &[f64], max_steps: usize) -> Vec<(Family, Vec<f64>)> {
    let has = |x: f64| sizes.iter().any(|&s| (s - x).abs() <= 1e-9 * x.max(1.0));
    let mut out: Vec<(Family, Vec<f64>)> = Vec::new();
    let mut push = |f: Family, v: Vec<f64>| {
        if !out.iter().any(|(_, w)| *w == v) {
            out.push((f, v));
        }
    };
    for &s in sizes {
        for n in 2..=max_steps {
            push(Family::Equal, vec![s; n]);
        }
    }
    for &big in sizes {
        for &small in sizes {
            if small >= big / 4.0 - 1e-9 && small < big / 2.0 - 1e-9 {
                for n in 2..=max_steps {
                    let mut v = vec![small];
                    v.extend(std::iter::repeat_n(big, n - 1));
                    push(Family::SmallPlusEqual, v);
                }
            }
        }
    }
    for &s in sizes {
        if has(2.0 * s) {
            for n in 2..=max_steps {
                let mut v = vec![s];
                v.extend(std::iter::repeat_n(2.0 * s, n - 1));
                push(Family::OneTwoTwo, v);
            }
        }
    }
    for &s in sizes {
        let mut v = vec![s];
        let mut next = 2.0 * s;
        while v.len() < max_steps && has(next) {
            v.push(next);
            if v.len() >= 3 {
                push(Family::Binary, v.clone());
            }
            next *= 2.0;
        }
    }
    out
}

/// The layouts to simulate: every layout of the families, plain and behind each ratio in
/// `opts.detuning`, whose effective total lies in the band around `recommended_kvar`,
/// thinned as the module docs say, on a bus of `u_n_v`. Ordered by detuning, then by the
/// turn order of the families.
pub fn candidates(opts: &DesignOptions, recommended_kvar: f64, u_n_v: f64) -> Vec<Layout> {
    let lo = BAND_LOW * recommended_kvar;
    let hi = BAND_HIGH * recommended_kvar;
    let all = all_layouts(&opts.sizes_kvar, opts.max_steps);
    let mut out = Vec::new();
    for &p in &opts.detuning {
        // The least excess per family and smallest size.
        let mut best: Vec<Layout> = Vec::new();
        for (family, sizes) in &all {
            let l = Layout::new(*family, sizes.clone(), p, u_n_v);
            if !(l.total_kvar >= lo * (1.0 - 1e-9) && l.total_kvar <= hi * (1.0 + 1e-9)) {
                continue;
            }
            let small = l.rated_kvar[0];
            match best
                .iter_mut()
                .find(|b| b.family == l.family && b.rated_kvar[0] == small)
            {
                Some(b) => {
                    if (l.total_kvar, l.steps()) < (b.total_kvar, b.steps()) {
                        *b = l;
                    }
                }
                None => best.push(l),
            }
        }
        // Families take turns, least excess first within each.
        let mut by_family: Vec<Vec<Layout>> = Family::ALL
            .iter()
            .map(|f| {
                let mut v: Vec<Layout> = best.iter().filter(|l| l.family == *f).cloned().collect();
                v.sort_by(|a, b| {
                    a.total_kvar
                        .total_cmp(&b.total_kvar)
                        .then(a.steps().cmp(&b.steps()))
                        .then(a.rated_kvar[0].total_cmp(&b.rated_kvar[0]))
                });
                v.reverse();
                v
            })
            .collect();
        let mut taken = 0;
        'turns: loop {
            let mut any = false;
            for f in by_family.iter_mut() {
                if let Some(l) = f.pop() {
                    any = true;
                    out.push(l);
                    taken += 1;
                    if taken >= opts.max_layouts {
                        break 'turns;
                    }
                }
            }
            if !any {
                break;
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shorthand_groups_equal_sizes() {
        let l = Layout::new(
            Family::SmallPlusEqual,
            vec![25.0, 50.0, 50.0, 50.0],
            0.0,
            400.0,
        );
        assert_eq!(l.shorthand_plain(), "25+3x50");
        assert_eq!(l.words(400.0), "25 + 3 × 50 kvar plain");
        let d = Layout::new(Family::Equal, vec![50.0; 6], 0.07, 400.0);
        assert_eq!(d.shorthand_plain(), "6x50");
        assert_eq!(
            d.words(400.0),
            "6 × 50 kvar rated at 440 V behind 7 % reactors (6 × 44.4 kvar at 400 V)"
        );
        assert_eq!(d.rated_voltage_v, 440.0);
    }

    // Reachable levels of 10 + 20 + 40 (binary): every multiple of 10 up to 70.
    #[test]
    fn binary_reaches_every_multiple() {
        let l = Layout::new(Family::Binary, vec![10.0, 20.0, 40.0], 0.0, 400.0);
        let r = l.reachable_kvar();
        assert_eq!(r, vec![0.0, 10.0, 20.0, 30.0, 40.0, 50.0, 60.0, 70.0]);
        assert_eq!(l.largest_gap_kvar(), 10.0);
    }

    #[test]
    fn families_are_distinct() {
        let all = all_layouts(&[10.0, 20.0, 25.0, 40.0, 50.0], 4);
        // 25 + 50 + 50 is 1:2:2; 10 + 50 + 50 is not a layout (10 < 50/4).
        assert!(all
            .iter()
            .any(|(f, v)| *f == Family::OneTwoTwo && *v == vec![25.0, 50.0, 50.0]));
        assert!(!all.iter().any(|(_, v)| *v == vec![10.0, 50.0, 50.0]));
        assert!(all
            .iter()
            .any(|(f, v)| *f == Family::Binary && *v == vec![10.0, 20.0, 40.0]));
        assert!(all
            .iter()
            .any(|(f, v)| *f == Family::SmallPlusEqual && *v == vec![20.0, 50.0, 50.0]));
    }

    #[test]
    fn candidates_lie_in_the_band() {
        let opts = DesignOptions::default().checked().unwrap();
        let c = candidates(&opts, 280.0, 400.0);
        assert!(!c.is_empty());
        assert!(c.len() <= 2 * opts.max_layouts);
        for l in &c {
            assert!(
                l.total_kvar >= 280.0 - 1e-6 && l.total_kvar <= 364.0 + 1e-6,
                "{l:?}"
            );
            assert!(l.steps() >= 2 && l.steps() <= 8);
        }
        assert!(c.iter().any(|l| l.detuning > 0.0));
    }
}

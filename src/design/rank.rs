//! Judging and ranking the candidate layouts: each candidate's run with its best settings
//! turned into the figures a designer compares (target met, billed PF, operations a year,
//! overcorrection, resonance, steps), the order of the candidates, and one sentence per
//! candidate saying why it stands where it does.
//!
//! **Order.** Candidates are compared on these, in turn, the first difference deciding:
//!
//! 1. a bank state reached exceeds a harmonic or capacitor limit (damage first);
//! 2. a bank state reached resonates near a harmonic present in the load;
//! 3. a contactor reaches its rated life in less than [`SHORT_LIFE_YEARS`] (the bank
//!    hunts or switches far too often, whatever the PF it reaches);
//! 4. the billed PF misses the target, and among those that miss it, by how much (to
//!    0.001);
//! 5. overcorrected (leading beyond the threshold) more than [`OVERCORRECTED_SHARE`] of
//!    the time;
//! 6. operations a year of all contactors, rounded to two significant figures (a yearly
//!    extrapolation is not finer than that);
//! 7. fewer switched steps (fewer contactors and fuses);
//! 8. the smaller total kvar;
//! 9. the label, so that the order never depends on anything else.
//!
//! The reason of each candidate below the first names the check on which it lost to the
//! one ranked just above it.

use super::layout::Layout;
use super::need::KvarNeed;
use crate::analysis::{Assessment, StateResonance};
use crate::engine::RunResult;
use crate::pf::{format_pf, Quadrant};

use crate::text::{approx, num, pct};
use serde::Serialize;
use std::cmp::Ordering;

/// A candidate whose first contactor reaches its rated life sooner than this wears out
/// too fast, years (a contactor is expected to last several years between overhauls;
/// common practice, our choice of figure).
pub const SHORT_LIFE_YEARS: f64 = 5.0;

/// A candidate counts as overcorrected when it leads beyond the threshold for more than
/// this share of the run's time (1 %, about 88 h a year).
pub const OVERCORRECTED_SHARE: f64 = 0.01;

/// The resonance of a candidate's run, from the analysis layer.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CandidateResonance {
    /// The worst bank state reached (most hours a year × severity), as step numbers joined
    /// by `+`; `null` when no state with a step connected was reached.
    pub worst_state: Option<String>,
    /// Its status: `clear`, `near h7`, `over THD_V, I_C`, ….
    pub worst_status: Option<String>,
    /// Its resonant order.
    pub worst_order: Option<f64>,
    /// Hours a year in states near a harmonic present in the load, h.
    pub hours_near_harmonic: f64,
    /// Hours a year in states over a limit, h.
    pub hours_over_limit: f64,
    /// True when a state reached exceeds a limit.
    pub over_limit: bool,
    /// True when a state reached resonates near a harmonic present.
    pub near_harmonic: bool,
}

/// One candidate layout with the figures of its run at its best settings.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Candidate {
    /// Place in the ranking, from 1.
    pub rank: usize,
    /// The layout.
    pub layout: Layout,
    /// Short label: `6x50`, `25+5x50`, `6x50 rated 440 V @7%`.
    pub label: String,
    /// The layout in words.
    pub description: String,
    /// The best settings found for it, as `key = value`.
    pub settings: Vec<String>,
    /// Billed PF of the run, 0 to 1, with `billed_pf_quadrant`.
    pub billed_pf: f64,
    /// `lag` or `lead`.
    pub billed_pf_quadrant: Quadrant,
    /// The billed PF the target asks for.
    pub billed_goal: f64,
    /// True when the billed PF reaches the goal.
    pub meets_target: bool,
    /// Operations a year of all contactors.
    pub operations_per_year: f64,
    /// Fewest years until a contactor reaches its rated life (`null`: none operates).
    pub years_to_first_contactor_life: Option<f64>,
    /// Overcorrection: time leading beyond the threshold, s.
    pub overcorrected_s: f64,
    /// The same as a share of the run's time, 0 to 1.
    pub overcorrected_share: f64,
    /// Overcorrection episodes.
    pub overcorrection_episodes: u64,
    /// The overcorrection threshold used, kvar (the same for every candidate).
    pub overcorrection_threshold_kvar: f64,
    /// Share of the time leading at all (Q < 0 at the supply), 0 to 1.
    pub share_leading: f64,
    /// The smallest step's effective output, kvar.
    pub smallest_step_kvar: f64,
    /// The light-load need it is compared with, kvar.
    pub light_load_kvar: f64,
    /// Resonance of the states reached.
    pub resonance: CandidateResonance,
    /// Number of switched steps.
    pub steps: usize,
    /// Effective total at U_n, kvar.
    pub total_kvar: f64,
    /// Every kvar level the steps reach together, ascending, kvar (for figures).
    pub reachable_kvar: Vec<f64>,
    /// Why it stands at this rank, one sentence.
    pub reason: String,
}

/// The label of a layout: the sweep's shorthand for plain steps (`6x50`, `25+5x50`); for
/// detuned ones the catalogue sizes with their rated voltage and the ratio.
pub fn label(l: &Layout) -> String {
    if l.detuning > 0.0 {
        format!(
            "{} rated {} V @{}%",
            l.shorthand_plain(),
            num(l.rated_voltage_v, 0),
            super::layout::pct_text(l.detuning)
        )
    } else {
        l.shorthand_plain()
    }
}

/// The figures of one candidate from its run and the run's assessment, with its best
/// settings in words; rank and reason are filled in by [`rank`].
pub fn evaluate(
    layout: Layout,
    settings: Vec<String>,
    u_n_v: f64,
    result: &RunResult,
    assessment: &Assessment,
    need: &KvarNeed,
) -> Candidate {
    let m = &result.metrics;
    let run_s = m.run.duration_s.max(1e-9);
    let states = &assessment.resonance.states;
    let worst = assessment.resonance.worst_state();
    let hours_near: f64 = states
        .iter()
        .filter(|s| s.near_harmonic.is_some())
        .map(|s| s.hours_per_year)
        .sum();
    let hours_over: f64 = states
        .iter()
        .filter(|s| !s.breaches.is_empty())
        .map(|s| s.hours_per_year)
        .sum();
    let resonance = CandidateResonance {
        worst_state: worst.map(|w| crate::text::steps_label(&w.steps)),
        worst_status: worst.map(StateResonance::status),
        worst_order: worst.and_then(|w| w.order),
        hours_near_harmonic: hours_near,
        hours_over_limit: hours_over,
        over_limit: states.iter().any(|s| !s.breaches.is_empty()),
        near_harmonic: states.iter().any(|s| s.near_harmonic.is_some()),
    };
    let years = m
        .wear
        .iter()
        .filter_map(|w| w.years_to_rated_life)
        .fold(None, |a: Option<f64>, y| Some(a.map_or(y, |a| a.min(y))));
    Candidate {
        rank: 0,
        label: label(&layout),
        description: layout.words(u_n_v),
        settings,
        billed_pf: m.pf.energy_pf,
        billed_pf_quadrant: m.pf.energy_pf_quadrant,
        billed_goal: assessment.billed_pf.goal,
        meets_target: !assessment.billed_pf.below_target,
        operations_per_year: m.switching.per_year,
        years_to_first_contactor_life: years,
        overcorrected_s: m.overcorrection.total_s,
        overcorrected_share: m.overcorrection.total_s / run_s,
        overcorrection_episodes: m.overcorrection.episodes,
        overcorrection_threshold_kvar: m.overcorrection.threshold_kvar,
        share_leading: m.pf.share_leading,
        smallest_step_kvar: layout.smallest_kvar(),
        light_load_kvar: need.light_load_kvar,
        resonance,
        steps: layout.steps(),
        total_kvar: layout.total_kvar,
        reachable_kvar: layout.reachable_kvar(),
        reason: String::new(),
        layout,
    }
}

/// Two significant figures, for comparing yearly extrapolations.
fn sig2(x: f64) -> f64 {
    if !(x.is_finite() && x > 0.0) {
        return 0.0;
    }
    let mag = 10f64.powi(x.log10().floor() as i32 - 1);
    (x / mag).round() * mag
}

impl Candidate {
    /// True when it leads beyond the threshold for more than [`OVERCORRECTED_SHARE`].
    pub fn overcorrected(&self) -> bool {
        self.overcorrected_share > OVERCORRECTED_SHARE
    }

    /// How far the billed PF falls short of the goal, in thousandths (0 when it meets it).
    pub fn shortfall(&self) -> u64 {
        if self.meets_target {
            0
        } else {
            ((self.billed_goal - self.billed_pf).max(0.0) * 1000.0).ceil() as u64
        }
    }

    /// True when a contactor reaches its rated life in less than [`SHORT_LIFE_YEARS`].
    pub fn wears_out(&self) -> bool {
        self.years_to_first_contactor_life
            .is_some_and(|y| y < SHORT_LIFE_YEARS)
    }

    /// True when it passes every check: no limit exceeded, no resonance near a harmonic,
    /// no contactor worn out early, the target met, not overcorrected.
    pub fn passes_every_check(&self) -> bool {
        !self.resonance.over_limit
            && !self.resonance.near_harmonic
            && !self.wears_out()
            && self.meets_target
            && !self.overcorrected()
    }

    /// The billed PF with its quadrant, e.g. `0.97 lag`.
    /// Near the goal it shows the digits that decide it (`0.9795 lag` against 0.98).
    pub fn billed_text(&self) -> String {
        crate::text::pf_vs(self.billed_pf, self.billed_pf_quadrant, self.billed_goal)
    }

    /// The smallest step against the light-load need, in one sentence.
    pub fn light_load_sentence(&self) -> String {
        let (q, l) = (self.smallest_step_kvar, self.light_load_kvar);
        if l <= 0.0 {
            return format!(
                "The load never needs correction, so its smallest step ({} kvar) is never \
                 needed.",
                num(q, 1)
            );
        }
        if q > l {
            format!(
                "Its smallest step ({} kvar) is larger than the light-load need ({} kvar): at \
                 light load it leaves the load uncorrected or, switched in, leads by up to {} \
                 kvar.",
                num(q, 1),
                num(l, 1),
                num(q - l, 1)
            )
        } else {
            format!(
                "Its smallest step ({} kvar) fits within the light-load need ({} kvar).",
                num(q, 1),
                num(l, 1)
            )
        }
    }

    /// The goal as a lagging PF, e.g. `0.95 lag` (`1.00` for unity).
    pub fn goal_text(&self) -> String {
        format_pf(self.billed_goal, Quadrant::Lag)
    }
}

/// Which check decides between two candidates (the first that differs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Decider {
    OverLimit,
    NearHarmonic,
    WearsOut,
    Target,
    Overcorrected,
    Operations,
    Steps,
    Total,
    Label,
}

/// Compares two candidates by the order of the module docs; returns the ordering and the
/// check that decided it.
fn compare(a: &Candidate, b: &Candidate) -> (Ordering, Decider) {
    let checks: [(Ordering, Decider); 9] = [
        (
            a.resonance.over_limit.cmp(&b.resonance.over_limit),
            Decider::OverLimit,
        ),
        (
            a.resonance.near_harmonic.cmp(&b.resonance.near_harmonic),
            Decider::NearHarmonic,
        ),
        (a.wears_out().cmp(&b.wears_out()), Decider::WearsOut),
        (a.shortfall().cmp(&b.shortfall()), Decider::Target),
        (
            a.overcorrected().cmp(&b.overcorrected()),
            Decider::Overcorrected,
        ),
        (
            sig2(a.operations_per_year).total_cmp(&sig2(b.operations_per_year)),
            Decider::Operations,
        ),
        (a.steps.cmp(&b.steps), Decider::Steps),
        (a.total_kvar.total_cmp(&b.total_kvar), Decider::Total),
        (a.label.cmp(&b.label), Decider::Label),
    ];
    checks
        .into_iter()
        .find(|(o, _)| *o != Ordering::Equal)
        .unwrap_or((Ordering::Equal, Decider::Label))
}

/// Ranks the candidates in place (best first), numbers them and writes each one's reason.
pub fn rank(cands: &mut [Candidate]) {
    cands.sort_by(|a, b| compare(a, b).0);
    for i in 0..cands.len() {
        cands[i].rank = i + 1;
        let reason = if i == 0 {
            first_reason(&cands[0], &cands[1..])
        } else {
            let (_, why) = compare(&cands[i - 1], &cands[i]);
            below_reason(&cands[i], &cands[i - 1], why)
        };
        cands[i].reason = reason;
    }
}

/// Overcorrection in words: `overcorrected 0.4 % of the time`.
fn overcorrection_words(c: &Candidate) -> String {
    if c.overcorrected_s <= 0.0 {
        "never overcorrected".to_string()
    } else {
        format!("overcorrected {} of the time", pct(c.overcorrected_share))
    }
}

/// Resonance in words: `no state reached near a harmonic or over a limit`, or what is.
fn resonance_words(c: &Candidate) -> String {
    let r = &c.resonance;
    let state = r.worst_state.clone().unwrap_or_default();
    let status = r.worst_status.clone().unwrap_or_default();
    if r.over_limit {
        format!(
            "states over a limit about {} h a year (worst: steps {state}, {status})",
            approx(r.hours_over_limit)
        )
    } else if r.near_harmonic {
        format!(
            "states near a harmonic about {} h a year (worst: steps {state}, {status})",
            approx(r.hours_near_harmonic)
        )
    } else {
        "no state reached near a harmonic or over a limit".to_string()
    }
}

/// The reason of the first candidate.
fn first_reason(c: &Candidate, rest: &[Candidate]) -> String {
    let target = if c.meets_target {
        format!(
            "meets the target (billed {} against {})",
            c.billed_text(),
            c.goal_text()
        )
    } else {
        format!(
            "misses the target (billed {} against {})",
            c.billed_text(),
            c.goal_text()
        )
    };
    let ops = match c.years_to_first_contactor_life {
        Some(y) => format!(
            "{} operations a year (the first contactor reaches its rated life in {} years)",
            approx(c.operations_per_year),
            crate::text::years_text(y)
        ),
        None => format!("{} operations a year", approx(c.operations_per_year)),
    };
    let alike = rest
        .iter()
        .filter(|o| {
            o.resonance.over_limit == c.resonance.over_limit
                && o.resonance.near_harmonic == c.resonance.near_harmonic
                && o.wears_out() == c.wears_out()
                && o.shortfall() == c.shortfall()
                && o.overcorrected() == c.overcorrected()
        })
        .count();
    let lead = if c.passes_every_check() {
        "Recommended: it"
    } else {
        "No layout passes every check; this one comes first:"
    };
    let standing = if alike == 0 {
        if rest.is_empty() {
            "the only layout simulated".to_string()
        } else {
            "no other layout does as well on these checks".to_string()
        }
    } else {
        format!(
            "the fewest operations (then steps, then kvar) of the {} layouts that do as well on these checks",
            alike + 1
        )
    };
    format!(
        "{lead} {target}, {}, {}, with {ops}: {standing}.",
        resonance_words(c),
        overcorrection_words(c)
    )
}

/// The reason of a candidate ranked just below `above`, lost on `why`.
fn below_reason(c: &Candidate, above: &Candidate, why: Decider) -> String {
    let r = above.rank;
    match why {
        Decider::OverLimit => format!(
            "Below #{r} because {}, which #{r} avoids.",
            resonance_words(c)
        ),
        Decider::NearHarmonic => format!(
            "Below #{r} because it spends {}, which #{r} avoids.",
            resonance_words(c)
        ),
        Decider::WearsOut => format!(
            "Below #{r} because a contactor reaches its rated life in {} years ({} operations a \
             year), under the {} years a design should give.",
            crate::text::years_text(c.years_to_first_contactor_life.unwrap_or(0.0)),
            approx(c.operations_per_year),
            num(SHORT_LIFE_YEARS, 0)
        ),
        Decider::Target if above.meets_target => format!(
            "Below #{r} because it misses the target: billed {} against {}.",
            c.billed_text(),
            c.goal_text()
        ),
        Decider::Target => format!(
            "Below #{r} because it falls further short of the target {}: billed {} against \
             {} for #{r}.",
            c.goal_text(),
            c.billed_text(),
            above.billed_text()
        ),
        Decider::Overcorrected => format!(
            "Below #{r} because it is overcorrected {} of the time (leading beyond {} kvar), #{r} {}.",
            pct(c.overcorrected_share),
            num(c.overcorrection_threshold_kvar, 1),
            pct(above.overcorrected_share)
        ),
        Decider::Operations => format!(
            "Below #{r} on switching: {} operations a year against {}; {}, {}.",
            approx(c.operations_per_year),
            approx(above.operations_per_year),
            check_words(c),
            overcorrection_words(c)
        ),
        Decider::Steps => format!(
            "Below #{r} on hardware: about as many operations a year ({}) but {} steps against {}.",
            approx(c.operations_per_year),
            c.steps,
            above.steps
        ),
        Decider::Total => format!(
            "Below #{r} on size: the same checks, operations and steps, but {} kvar against {} kvar.",
            num(c.total_kvar, 1),
            num(above.total_kvar, 1)
        ),
        Decider::Label => format!("Level with #{r} on every check; listed by label."),
    }
}

/// The target and resonance verdicts in a few words.
fn check_words(c: &Candidate) -> String {
    let t = if c.meets_target {
        format!("meets the target (billed {})", c.billed_text())
    } else {
        format!("misses the target (billed {})", c.billed_text())
    };
    if c.resonance.over_limit || c.resonance.near_harmonic {
        format!("{t}, {}", resonance_words(c))
    } else {
        t
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_significant_figures() {
        assert_eq!(sig2(12_345.0), 12_000.0);
        assert_eq!(sig2(12_600.0), 13_000.0);
        assert_eq!(sig2(0.0), 0.0);
        assert!((sig2(7.26) - 7.3).abs() < 1e-12);
    }
}

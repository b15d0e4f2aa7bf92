//! The trade-off between two objectives: the Pareto front of the settings and the
//! recommendation in plain words.
//!
//! A setting is on the front when no other setting is at least as good on both
//! objectives and better on one. Equal points do not dominate each other, so duplicates
//! are all on the front (or all off it).

use super::outcome::SettingStats;
use crate::text::{approx, count, join_and, num, pct, years_text};
use serde::{Deserialize, Serialize};
use std::cmp::Ordering;

/// The two objectives of the front.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FrontAxes {
    /// Billed PF (maximise) against operations a year (minimise). The default.
    #[default]
    PfOps,
    /// Share of time under target (minimise) against operations a year (minimise).
    UnderOps,
    /// Billed PF (maximise) against years to the first contactor's rated life (maximise).
    PfLife,
}

impl FrontAxes {
    /// Reads `pf-ops`, `under-ops` or `pf-life`.
    pub fn parse(s: &str) -> Result<FrontAxes, String> {
        match s.trim() {
            "pf-ops" => Ok(FrontAxes::PfOps),
            "under-ops" => Ok(FrontAxes::UnderOps),
            "pf-life" => Ok(FrontAxes::PfLife),
            other => Err(format!(
                "`{other}` is not a front; write `pf-ops`, `under-ops` or `pf-life`"
            )),
        }
    }

    /// The name as written on the command line.
    pub fn name(self) -> &'static str {
        match self {
            FrontAxes::PfOps => "pf-ops",
            FrontAxes::UnderOps => "under-ops",
            FrontAxes::PfLife => "pf-life",
        }
    }

    /// The two objectives in words.
    pub fn words(self) -> (&'static str, &'static str) {
        match self {
            FrontAxes::PfOps => (
                "billed PF (higher is better)",
                "operations a year (fewer is better)",
            ),
            FrontAxes::UnderOps => (
                "share of time under target (less is better)",
                "operations a year (fewer is better)",
            ),
            FrontAxes::PfLife => (
                "billed PF (higher is better)",
                "years to the first contactor's rated life (more is better)",
            ),
        }
    }

    /// The setting's point, both coordinates "higher is better" (medians over seeds).
    pub fn point(self, s: &SettingStats) -> (f64, f64) {
        let a = match self {
            FrontAxes::PfOps | FrontAxes::PfLife => s.billed_pf.median,
            FrontAxes::UnderOps => -s.share_under_target.median,
        };
        let b = match self {
            FrontAxes::PfOps | FrontAxes::UnderOps => -s.operations_per_year.median,
            FrontAxes::PfLife => s.years_to_first_life.median,
        };
        (a, b)
    }
}

/// Which points are on the Pareto front, both coordinates maximised. A point with a NaN
/// coordinate is never on it. O(n log n).
pub fn pareto_front(points: &[(f64, f64)]) -> Vec<bool> {
    let mut idx: Vec<usize> = (0..points.len())
        .filter(|&i| !points[i].0.is_nan() && !points[i].1.is_nan())
        .collect();
    // Best first: a descending, then b descending.
    idx.sort_by(|&i, &j| {
        points[j]
            .0
            .total_cmp(&points[i].0)
            .then(points[j].1.total_cmp(&points[i].1))
    });
    let mut on = vec![false; points.len()];
    // The best b among points with a strictly larger a.
    let mut best_before = f64::NEG_INFINITY;
    let mut g = 0;
    while g < idx.len() {
        let a = points[idx[g]].0;
        let mut end = g;
        while end < idx.len() && points[idx[end]].0 == a {
            end += 1;
        }
        // Within a group of equal a, the first has the largest b.
        let group_best = points[idx[g]].1;
        for &i in &idx[g..end] {
            let b = points[i].1;
            // Dominated within the group by a larger b, or by an earlier group with a b
            // at least as large (its a is strictly larger).
            on[i] = b == group_best && b > best_before;
        }
        best_before = best_before.max(group_best);
        g = end;
    }
    on
}

/// The recommendation, decided once, with its sentences.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Recommendation {
    /// The setting recommended (`None` only when no setting has a usable point).
    pub setting: Option<usize>,
    /// True when the recommended setting meets the PF target (median billed PF).
    pub meets_target: bool,
    /// A setting that beats the scenario's own on both objectives, if any was run.
    pub beats_scenario: Option<usize>,
    /// The recommendation in plain words, one sentence a line.
    pub sentences: Vec<String>,
}

/// The words for a setting: `setting 7 (controller.dead_band_kvar = 30)`.
pub fn setting_words(s: &SettingStats) -> String {
    if s.setting == 0 {
        "the scenario's own settings (setting 0)".to_string()
    } else {
        format!("setting {} ({})", s.setting, s.describe())
    }
}

/// A PF with its quadrant, three decimals (a sweep compares settings in the third).
fn pf3(s: &SettingStats) -> String {
    let shown = num(s.billed_pf.median, 3);
    if shown == "1.000" {
        shown
    } else {
        format!("{shown} {}", s.billed_pf_quadrant.word())
    }
}

/// The figures of a setting on both objectives, with their spread over seeds.
pub fn figures(s: &SettingStats, axes: FrontAxes, seeds: u32) -> String {
    let spread = |lo: String, hi: String| {
        if seeds > 1 {
            format!(" ({lo} to {hi} over {seeds} seeds)")
        } else {
            String::new()
        }
    };
    let pf = format!(
        "billed PF {}{}",
        pf3(s),
        spread(num(s.billed_pf.min, 3), num(s.billed_pf.max, 3))
    );
    let under = format!(
        "{} of the time under target{}",
        pct(s.share_under_target.median),
        spread(pct(s.share_under_target.min), pct(s.share_under_target.max))
    );
    let ops = format!(
        "{} operations a year{}",
        approx(s.operations_per_year.median),
        spread(
            approx(s.operations_per_year.min),
            approx(s.operations_per_year.max)
        )
    );
    let life = if s.years_to_first_life.median.is_finite() {
        format!(
            "{} years to the first contactor's rated life{}",
            years_text(s.years_to_first_life.median),
            spread(
                life_text(s.years_to_first_life.min),
                life_text(s.years_to_first_life.max)
            )
        )
    } else {
        "no contactor operates (no rated life reached)".to_string()
    };
    match axes {
        FrontAxes::PfOps => format!("{pf} at {ops}"),
        FrontAxes::UnderOps => format!("{under} ({pf}) at {ops}"),
        FrontAxes::PfLife => format!("{pf}, {life}"),
    }
}

fn life_text(y: f64) -> String {
    if y.is_finite() {
        years_text(y)
    } else {
        "never".to_string()
    }
}

/// Compares on the first objective, then the second (higher better), then the lower index.
fn better(axes: FrontAxes, a: &SettingStats, b: &SettingStats, second_first: bool) -> Ordering {
    let (pa, pb) = (axes.point(a), axes.point(b));
    let (x, y) = if second_first {
        (pa.1.total_cmp(&pb.1), pa.0.total_cmp(&pb.0))
    } else {
        (pa.0.total_cmp(&pb.0), pa.1.total_cmp(&pb.1))
    };
    x.then(y).then(b.setting.cmp(&a.setting))
}

/// How `s` trades against `other` in words: what it gains and what it gives up.
fn trade(axes: FrontAxes, s: &SettingStats, other: &SettingStats) -> String {
    let dpf = s.billed_pf.median - other.billed_pf.median;
    let dunder = s.share_under_target.median - other.share_under_target.median;
    let dops = s.operations_per_year.median - other.operations_per_year.median;
    let first = match axes {
        FrontAxes::PfOps | FrontAxes::PfLife => {
            if dpf.abs() < 0.0005 {
                // A difference that rounds to 0.000 is said as such, not as "0.000 lower".
                format!(
                    "the same billed PF to three decimals ({} against {})",
                    num(s.billed_pf.median, 4),
                    num(other.billed_pf.median, 4)
                )
            } else if dpf < 0.0 {
                format!("{} lower billed PF", num(-dpf, 3))
            } else {
                format!("{} higher billed PF", num(dpf, 3))
            }
        }
        FrontAxes::UnderOps => {
            if dunder > 0.0 {
                format!("{} points more time under target", num(dunder * 100.0, 1))
            } else {
                format!("{} points less time under target", num(-dunder * 100.0, 1))
            }
        }
    };
    let second = match axes {
        FrontAxes::PfOps | FrontAxes::UnderOps => {
            if dops < 0.0 {
                format!("{} fewer operations a year", approx(-dops))
            } else {
                format!("{} more operations a year", approx(dops))
            }
        }
        FrontAxes::PfLife => {
            let (a, b) = (
                s.years_to_first_life.median,
                other.years_to_first_life.median,
            );
            if a.is_finite() && b.is_finite() {
                if a >= b {
                    format!("{} more years of contactor life", years_text(a - b))
                } else {
                    format!("{} fewer years of contactor life", years_text(b - a))
                }
            } else if a.is_finite() {
                "contactor wear where it has none".to_string()
            } else {
                "no contactor wear where it has some".to_string()
            }
        }
    };
    format!("{first} and {second}")
}

/// The recommendation over the settings (`front[i]` tells whether setting i is on the
/// front): among the front settings that meet the target the one best on the second
/// objective (fewest operations, or longest life), else the one best on the first; what
/// it gives up against its neighbours on the front; whether a setting beats the
/// scenario's own on both objectives.
pub fn recommend(stats: &[SettingStats], axes: FrontAxes, seeds: u32) -> Recommendation {
    let front: Vec<&SettingStats> = stats.iter().filter(|s| s.on_front).collect();
    let meeting: Vec<&SettingStats> = front.iter().copied().filter(|s| s.meets_target).collect();
    let (chosen, meets) = if let Some(c) = meeting
        .iter()
        .copied()
        .max_by(|a, b| better(axes, a, b, true))
    {
        (Some(c), true)
    } else {
        (
            front
                .iter()
                .copied()
                .max_by(|a, b| better(axes, a, b, false)),
            false,
        )
    };
    let mut sentences = Vec::new();
    let Some(c) = chosen else {
        return Recommendation {
            setting: None,
            meets_target: false,
            beats_scenario: None,
            sentences: vec![
                "No setting gave a usable result, so there is nothing to recommend.".into(),
            ],
        };
    };
    let goal = c.pf_goal;
    let goal_text = if goal >= 1.0 {
        "1.00".to_string()
    } else {
        format!("{} lag", num(goal, 2))
    };
    let (_, second) = axes.words();
    if meets {
        sentences.push(format!(
            "Recommended: {}. Of the settings on the front that meet the billed-PF goal of \
             {goal_text}, it is the best on {second}: {}.",
            setting_words(c),
            figures(c, axes, seeds)
        ));
    } else {
        sentences.push(format!(
            "Recommended: {}. No setting on the front meets the billed-PF goal of {goal_text}; \
             this one comes closest: {}.",
            setting_words(c),
            figures(c, axes, seeds)
        ));
    }
    // Neighbours on the front, ordered by the first objective.
    let mut ordered = front.clone();
    ordered.sort_by(|a, b| better(axes, a, b, false));
    let pos = ordered
        .iter()
        .position(|s| s.setting == c.setting)
        .unwrap_or(0);
    let mut gives = Vec::new();
    if pos + 1 < ordered.len() {
        let up = ordered[pos + 1];
        if axes.point(up) != axes.point(c) {
            gives.push(format!(
                "against {} it has {}",
                setting_words(up),
                trade(axes, c, up)
            ));
        }
    }
    if pos > 0 {
        let down = ordered[pos - 1];
        if axes.point(down) != axes.point(c) {
            gives.push(format!(
                "against {} it has {}",
                setting_words(down),
                trade(axes, c, down)
            ));
        }
    }
    if gives.is_empty() {
        sentences.push("It is the only distinct point on the front.".to_string());
    } else {
        sentences.push(format!("On the front, {}.", join_and(&gives)));
    }
    // The scenario's own settings.
    let beats = stats.iter().find(|s| s.setting == 0).and_then(|own| {
        let p0 = axes.point(own);
        let beaters: Vec<&SettingStats> = stats
            .iter()
            .filter(|s| s.setting != 0)
            .filter(|s| {
                let p = axes.point(s);
                p.0 > p0.0 && p.1 > p0.1
            })
            .collect();
        let pick = if beaters.iter().any(|s| s.setting == c.setting) {
            Some(c)
        } else {
            beaters
                .iter()
                .copied()
                .max_by(|a, b| better(axes, a, b, true))
        };
        match pick {
            Some(b) => {
                // Billed PFs equal to three decimals are told apart in the fourth, so the
                // sentence never reads as a gain between two equal figures.
                let fourth = if matches!(axes, FrontAxes::PfOps | FrontAxes::PfLife)
                    && pf3(b) == pf3(own)
                {
                    format!(
                        " (billed PF {} against {} to four decimals)",
                        num(b.billed_pf.median, 4),
                        num(own.billed_pf.median, 4)
                    )
                } else {
                    String::new()
                };
                let goal = if b.meets_target && !own.meets_target {
                    format!(
                        " It meets the billed-PF goal of {goal_text}, which the scenario's own \
                         settings miss."
                    )
                } else {
                    String::new()
                };
                sentences.push(format!(
                    "{} beats the scenario's own settings on both objectives: {} against {}{fourth}.{goal}",
                    capital(&setting_words(b)),
                    figures(b, axes, seeds),
                    figures(own, axes, seeds)
                ));
                Some(b.setting)
            }
            None => {
                let n = stats.len() - 1;
                let why = if own.on_front {
                    "the scenario's own point is on the front, so any gain on one objective costs \
                     on the other"
                        .to_string()
                } else {
                    "the settings that do better than it on one objective match or lose on the \
                     other"
                        .to_string()
                };
                sentences.push(format!(
                    "None of the {} settings run beats the scenario's own settings ({}) on both \
                     objectives: {why}.",
                    count(n as u64),
                    figures(own, axes, seeds)
                ));
                None
            }
        }
    });
    if seeds > 1 {
        sentences.push(format!(
            "Figures are medians over {seeds} seeds of the synthetic load, with the range \
             (lowest to highest) in brackets."
        ));
    }
    Recommendation {
        setting: Some(c.setting),
        meets_target: meets,
        beats_scenario: beats,
        sentences,
    }
}

fn capital(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pf::Quadrant;
    use crate::sweep::outcome::Spread;

    #[test]
    fn front_of_a_hand_made_set_with_ties_and_duplicates() {
        // Hand-derived: (PF, −ops) points. (0.97, −100) and (0.95, −50) trade off; the
        // duplicate (0.95, −50) is on the front twice; (0.95, −80) is beaten by
        // (0.95, −50) (same PF, fewer operations); (0.96, −100) by (0.97, −100);
        // (0.99, −300) has the highest PF; (0.90, −50) is beaten by (0.95, −50).
        let pts = [
            (0.97, -100.0),
            (0.95, -50.0),
            (0.95, -50.0),
            (0.95, -80.0),
            (0.96, -100.0),
            (0.99, -300.0),
            (0.90, -50.0),
            (f64::NAN, 0.0),
        ];
        let on = pareto_front(&pts);
        assert_eq!(on, vec![true, true, true, false, false, true, false, false]);
    }

    #[test]
    fn all_equal_points_are_all_on_the_front() {
        assert_eq!(pareto_front(&[(1.0, 1.0); 3]), vec![true; 3]);
        assert!(pareto_front(&[]).is_empty());
    }

    fn stats(setting: usize, pf: f64, ops: f64, on_front: bool) -> SettingStats {
        SettingStats {
            setting,
            keys: vec!["controller.switching_delay_s".into()],
            values: vec![format!("{}", 30 * (setting + 1))],
            runs: 1,
            billed_pf: Spread::of(&[pf]),
            billed_pf_quadrant: Quadrant::Lag,
            pf_goal: 0.95,
            meets_target: pf >= 0.95,
            pf_shortfall: Spread::of(&[(0.95 - pf).max(0.0)]),
            share_under_target: Spread::of(&[0.5]),
            operations_per_year: Spread::of(&[ops]),
            years_to_first_life: Spread::of(&[f64::INFINITY]),
            cost_per_year: None,
            on_front,
        }
    }

    #[test]
    fn a_win_hidden_in_the_fourth_decimal_is_shown_there() {
        // Both billed PFs print as 0.950 to three decimals; the sentence that says one
        // beats the other must show the figures that differ, and that only one meets
        // the 0.95 goal (a billed PF below the goal misses it: common practice).
        let all = [
            stats(0, 0.949_56, 92_100.0, false),
            stats(1, 0.950_06, 29_600.0, true),
        ];
        let r = recommend(&all, FrontAxes::PfOps, 1);
        assert_eq!(r.beats_scenario, Some(1));
        let text = r.sentences.join(" ");
        assert!(
            text.contains("(billed PF 0.9501 against 0.9496 to four decimals)"),
            "{text}"
        );
        assert!(
            text.contains(
                "It meets the billed-PF goal of 0.95 lag, which the scenario's own settings miss."
            ),
            "{text}"
        );
    }
}

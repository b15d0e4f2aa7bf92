//! Settings that are legal but unwise: each check names the scenario key, what was found
//! and why it matters, in plain words. Some checks need only the scenario; others use what
//! a run saw (the largest reactive demand of the load).

use crate::analysis::Context;
use crate::controller::OrderingKind;
use crate::pf::Quadrant;
use crate::scenario::Scenario;
use serde::Serialize;

/// One piece of advice about a setting.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Advice {
    /// The scenario key concerned.
    pub key: String,
    /// What was found and why it matters.
    pub message: String,
}

/// The largest switched step, kvar, when the ordering is not `best-fit`, the steps are
/// unequal and that step is wider than the whole dead band (2B): sequential and rotating
/// ordering close whichever step is next, not the one that fits, so closing it can carry
/// the demand past the far edge of the band and the bank can hunt between it and a
/// smaller step. `None` otherwise.
pub fn step_wider_than_band(sc: &Scenario) -> Option<f64> {
    let c = &sc.controller;
    let smallest = crate::bank::smallest_switched_kvar(&sc.steps);
    let largest = sc
        .steps
        .iter()
        .filter(|s| !s.fixed)
        .map(|s| s.kvar)
        .fold(f64::NEG_INFINITY, f64::max);
    (c.ordering != OrderingKind::BestFit
        && largest.is_finite()
        && largest > 2.0 * c.dead_band_kvar
        && largest > smallest * (1.0 + 1e-9))
        .then_some(largest)
}

/// The key that set the dead band, as the user wrote it; the fraction key when the
/// default applies (the default is a fraction of the smallest step).
fn dead_band_key(sc: &Scenario) -> &'static str {
    sc.dead_band_key
        .unwrap_or(crate::scenario::DEAD_BAND_FRACTION_KEY)
}

fn advice(key: &str, message: String) -> Advice {
    Advice {
        key: key.to_string(),
        message,
    }
}

/// Checks a scenario before a run.
pub fn review_settings(sc: &Scenario) -> Vec<Advice> {
    let mut out = Vec::new();
    let c = &sc.controller;
    let smallest = crate::bank::smallest_switched_kvar(&sc.steps);
    let switched = sc.steps.iter().any(|s| !s.fixed);
    if switched && c.dead_band_kvar < 0.5 * smallest {
        out.push(advice(
            dead_band_key(sc),
            format!(
                "the dead band ±{:.1} kvar is less than half the smallest switched step ({:.1} kvar): one operation moves the demand by a whole step, past the far edge of the band, so the bank can hunt; 0.65 × the step ({:.1} kvar) is the usual choice",
                c.dead_band_kvar,
                smallest,
                0.65 * smallest
            ),
        ));
    }
    // Without a stated discharge time of the capacitors, the usual discharge device of
    // IEC 60831-1 is assumed: down to 75 V within 3 min (from memory).
    let (dev, stated) = match sc.capacitor_discharge_s {
        Some(d) => (d, true),
        None => (crate::bank::IEC_DISCHARGE_S, false),
    };
    if switched && c.discharge_time_s < dev {
        let whose = if stated {
            format!(
                "the {:.0} s the capacitors' discharge devices need (controller.capacitor_discharge_s)",
                dev
            )
        } else {
            format!(
                "the {:.0} s that the usual discharge device of IEC 60831-1 takes to bring a \
                 capacitor down to 75 V (set controller.capacitor_discharge_s if the bank's \
                 devices are faster)",
                dev
            )
        };
        out.push(advice(
            "controller.discharge_time_s",
            format!(
                "the discharge time {:.0} s is shorter than {whose}: a step could be reclosed while still charged, with a severe inrush and overvoltage",
                c.discharge_time_s
            ),
        ));
    }
    if let Some(largest) = step_wider_than_band(sc) {
        out.push(advice(
            "controller.ordering",
            format!(
                "the steps are unequal ({:.1} to {:.1} kvar) and {} ordering may close the {:.1} kvar step where a smaller one would do; it is wider than the whole dead band (2 × {:.1} kvar), so the bank can overshoot and hunt: best-fit ordering picks the step that fits, or a dead band of at least half the largest step ({:.1} kvar) stops it",
                smallest,
                largest,
                c.ordering.name(),
                largest,
                c.dead_band_kvar,
                0.5 * largest
            ),
        ));
    }
    if c.averaging_s > 0.0 && c.connect_delay_s < c.averaging_s {
        out.push(advice(
            "controller.switching_delay_s",
            format!(
                "the switching delay {:.0} s is shorter than the averaging window {:.0} s: the controller can operate again before the averaged measurement has seen the effect of the last operation, and overshoot",
                c.connect_delay_s, c.averaging_s
            ),
        ));
    }
    if switched && c.connect_delay_s > 0.0 && sc.dt_s > c.connect_delay_s {
        out.push(advice(
            "run.time_step_s",
            format!(
                "the time step {} s is longer than the switching delay {:.0} s, so the delay cannot be resolved: operations come one per interval",
                sc.dt_s, c.connect_delay_s
            ),
        ));
    }
    if c.target.quadrant == Quadrant::Lead && c.target.pf < 1.0 {
        out.push(advice(
            "controller.target_pf",
            format!(
                "the target {} is leading: the bank will keep the site capacitive, which most tariffs do not reward and which raises the bus voltage",
                c.target
            ),
        ));
    }
    out
}

/// Checks a scenario against what a run saw.
pub fn review_run(ctx: &Context<'_>) -> Vec<Advice> {
    let sc = ctx.scenario();
    let r = ctx.result;
    let mut out = Vec::new();
    let bank: f64 = sc.steps.iter().map(|s| s.kvar).sum();
    let fixed: f64 = sc.steps.iter().filter(|s| s.fixed).map(|s| s.kvar).sum();
    let max_q = r.metrics.load.max_q_kvar;
    if bank > max_q && max_q >= 0.0 {
        out.push(advice(
            "steps",
            format!(
                "the bank ({bank:.0} kvar) is larger than the largest reactive demand of the load in this run ({max_q:.0} kvar): the top steps are never needed here and can only overcorrect"
            ),
        ));
    }
    if fixed > 0.0 && fixed > max_q.max(0.0) * 0.5 {
        out.push(advice(
            "steps",
            format!(
                "the fixed steps ({fixed:.0} kvar) exceed half the largest reactive demand ({max_q:.0} kvar): at light load they alone can make the site lead"
            ),
        ));
    }
    out
}

/// Both reviews, settings first.
pub fn review(ctx: &Context<'_>) -> Vec<Advice> {
    let mut v = review_settings(ctx.scenario());
    v.extend(review_run(ctx));
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    fn sc(extra: &str) -> Scenario {
        Scenario::from_str(
            &format!("[[steps]]\nkvar = 50\ncount = 3\n[load.synthetic]\n{extra}"),
            Path::new("a.toml"),
        )
        .unwrap()
    }

    #[test]
    fn narrow_dead_band_is_flagged() {
        // Common practice: below 0.5 × the smallest step the controller hunts.
        // The advice names the key the user wrote.
        let a = review_settings(&sc("[controller]\ndead_band_fraction = 0.4\n"));
        assert!(
            a.iter().any(|x| x.key == "controller.dead_band_fraction"),
            "{a:?}"
        );
        let a = review_settings(&sc("[controller]\ndead_band_kvar = 10\n"));
        assert!(
            a.iter().any(|x| x.key == "controller.dead_band_kvar"),
            "{a:?}"
        );
        assert!(review_settings(&sc("")).is_empty());
    }

    #[test]
    fn discharge_and_averaging_checks() {
        let a = review_settings(&sc("[controller]\ndischarge_time_s = 30\ncapacitor_discharge_s = 60\naveraging_s = 60\nswitching_delay_s = 20\n"));
        let keys: Vec<&str> = a.iter().map(|x| x.key.as_str()).collect();
        assert!(keys.contains(&"controller.discharge_time_s"));
        assert!(keys.contains(&"controller.switching_delay_s"));
    }

    #[test]
    fn short_discharge_time_is_flagged_without_a_stated_device() {
        // IEC 60831-1: the discharge device brings a capacitor down to 75 V within 3 min
        // (from memory), so a 5 s reclose can find it still charged.
        let a = review_settings(&sc("[controller]\ndischarge_time_s = 5\n"));
        let d = a
            .iter()
            .find(|x| x.key == "controller.discharge_time_s")
            .expect("discharge advice");
        assert!(d.message.contains("IEC 60831-1"), "{}", d.message);
        // A faster device stated in the scenario lifts it.
        let a = review_settings(&sc(
            "[controller]\ndischarge_time_s = 5\ncapacitor_discharge_s = 3\n",
        ));
        assert!(a.iter().all(|x| x.key != "controller.discharge_time_s"));
    }

    #[test]
    fn unequal_steps_with_fixed_order_are_flagged() {
        // 25 + 5 × 50 kvar with the usual dead band of 0.65 × the smallest step (16.25 kvar,
        // common practice): closing a 50 kvar step moves the demand by 50 kvar, more than
        // the whole band of 32.5 kvar, so sequential ordering can overshoot and hunt.
        let text = |ordering: &str| {
            format!(
                "[[steps]]\nkvar = 25\n[[steps]]\nkvar = 50\ncount = 5\n[controller]\n\
                 ordering = \"{ordering}\"\ndischarge_time_s = 180\n[load.synthetic]\n"
            )
        };
        let parse = |t: String| Scenario::from_str(&t, Path::new("a.toml")).unwrap();
        let a = review_settings(&parse(text("sequential")));
        assert!(a.iter().any(|x| x.key == "controller.ordering"), "{a:?}");
        let a = review_settings(&parse(text("best-fit")));
        assert!(a.iter().all(|x| x.key != "controller.ordering"), "{a:?}");
    }
}

//! Settings that are legal but unwise: each check names the scenario key, what was found
//! and why it matters, in plain words. Some checks need only the scenario; others use what
//! a run saw (the largest reactive demand of the load).

use crate::analysis::Context;
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
            "controller.dead_band_kvar",
            format!(
                "the dead band ±{:.1} kvar is less than half the smallest switched step ({:.1} kvar): one operation moves the demand by a whole step, past the far edge of the band, so the bank can hunt; 0.65 × the step ({:.1} kvar) is the usual choice",
                c.dead_band_kvar,
                smallest,
                0.65 * smallest
            ),
        ));
    }
    if let Some(dev) = sc.capacitor_discharge_s {
        if c.discharge_time_s < dev {
            out.push(advice(
                "controller.discharge_time_s",
                format!(
                    "the discharge time {:.0} s is shorter than the {:.0} s the capacitors' discharge devices need: a step could be reclosed while still charged, with a severe inrush and overvoltage",
                    c.discharge_time_s, dev
                ),
            ));
        }
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
        let a = review_settings(&sc("[controller]\ndead_band_fraction = 0.4\n"));
        assert!(a.iter().any(|x| x.key == "controller.dead_band_kvar"));
        assert!(review_settings(&sc("")).is_empty());
    }

    #[test]
    fn discharge_and_averaging_checks() {
        let a = review_settings(&sc("[controller]\ndischarge_time_s = 30\ncapacitor_discharge_s = 60\naveraging_s = 60\nswitching_delay_s = 20\n"));
        let keys: Vec<&str> = a.iter().map(|x| x.key.as_str()).collect();
        assert!(keys.contains(&"controller.discharge_time_s"));
        assert!(keys.contains(&"controller.switching_delay_s"));
    }
}

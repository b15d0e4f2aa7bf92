//! Findings: what a run means, in plain words, ranked most serious first.
//!
//! Each check looks at one part of the result (billed PF, contactor wear, overcorrection,
//! hunting, resonance, bus voltage, protections, injected faults) and, where there is
//! something to say, writes one sentence an engineer would put in a commissioning or
//! design note, with every figure in its unit and PF with its quadrant. Findings are
//! ranked by [`Severity`] and then by how far the figure is from acceptable. The text and
//! JSON reports both print this list, so it is worded once.
//!
//! Thresholds used for the severity (our own engineering choices, written here so that a
//! reader can weigh them): contactor life within 1 year is critical, within 5 years a
//! warning and within 10 years a note. Harmonics: the worst bank state is the one with the
//! largest hours a year × severity, the severity being the square of the largest of its
//! harmonic voltages, THD and step currents and voltages over their limits (≥ 1: a limit
//! is exceeded; squared because heating grows with the square); it is critical when it resonates near a harmonic of the load and either
//! exceeds a limit or lasts at least 1 % of the run, or when a capacitor limit is exceeded;
//! a warning when another limit is exceeded or any state resonates near a harmonic; a note
//! from 0.8 of a limit. A detuned step whose capacitors are rated below U/(1 − p) is a
//! warning. An estimated THD at or above the limit in another state that lasts 1 % of the
//! run is a warning, and from 5/8 of the limit a note; hunting of 10 cycles per day or more is a warning;
//! overcorrection is a warning from 1 % of the run time or a worst leading kvar of twice
//! the threshold; a bus voltage above 110 % of nominal is a warning and below 90 % a note.

use crate::analysis::{Context, StateResonance};
use crate::bank::FaultKind;
use crate::metrics::OvercorrectionCause;
use crate::pf::Quadrant;
use crate::text::{
    approx, count, deciding, duration, harmonic_name, join_and, num, pct, pct_vs_limit, pf_vs,
    steps_label, trip_word, years_text,
};
use crate::timebase::{DAY_S, WEEKDAYS};
use serde::Serialize;

/// How much a finding matters, most serious first.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// Act before commissioning: risk to equipment or a life far too short.
    Critical,
    /// Costs money or wear; worth changing the settings or the design.
    Warning,
    /// Worth knowing; no immediate action.
    Note,
    /// For the record: the run met its goal on this point.
    Info,
}

impl Severity {
    /// The word used in reports.
    pub fn word(self) -> &'static str {
        match self {
            Severity::Critical => "critical",
            Severity::Warning => "warning",
            Severity::Note => "note",
            Severity::Info => "info",
        }
    }
}

/// One finding of a run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Finding {
    /// How much it matters.
    pub severity: Severity,
    /// What part of the result it is about: `pf`, `wear`, `overcorrection`, `hunting`,
    /// `resonance`, `capacitor`, `voltage`, `supply`, `protection`, `fault`, `phase` or
    /// `wiring`.
    pub topic: &'static str,
    /// The finding, one or two sentences.
    pub text: String,
    /// What to consider doing, if anything.
    pub advice: Option<String>,
    /// The advice touches hardware, so the safety caution applies.
    pub hardware: bool,
    /// Rank inside a severity: larger is worse.
    #[serde(skip)]
    score: f64,
}

impl Finding {
    fn new(severity: Severity, topic: &'static str, score: f64, text: String) -> Self {
        Finding {
            severity,
            topic,
            text,
            advice: None,
            hardware: false,
            score,
        }
    }

    fn advise(mut self, advice: impl Into<String>, hardware: bool) -> Self {
        self.advice = Some(advice.into());
        self.hardware = hardware;
        self
    }
}

/// All findings of a run, most serious first.
pub(crate) fn findings(ctx: &Context<'_>) -> Vec<Finding> {
    let mut out = Vec::new();
    plausibility(ctx, &mut out);
    pf(ctx, &mut out);
    wear(ctx, &mut out);
    overcorrection(ctx, &mut out);
    phases(ctx, &mut out);
    wiring(ctx, &mut out);
    hunting(ctx, &mut out);
    resonance(ctx, &mut out);
    voltage(ctx, &mut out);
    protection(ctx, &mut out);
    faults(ctx, &mut out);
    // A stable sort keeps the order of the checks above for equal ranks.
    out.sort_by(|a, b| {
        a.severity
            .cmp(&b.severity)
            .then(b.score.total_cmp(&a.score))
    });
    out
}

/// A note on extrapolated rates when the run is too short for them to mean much.
fn extrapolation_note(duration_s: f64) -> String {
    if duration_s < DAY_S {
        format!(
            " (extrapolated from a {} run; simulate at least a week for a rate you can plan with)",
            duration(duration_s)
        )
    } else {
        String::new()
    }
}

fn pf(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let m = &ctx.result.metrics;
    let p = &m.pf;
    let target = ctx.scenario().controller.target;
    let target_text = target.to_string();
    // The billed PF comes from the inductive register, so it is a lagging figure and falls
    // short whatever the capacitive register holds.
    let goal = ctx.billed_pf.goal;
    let below = ctx.billed_pf.below_target;
    let billed = pf_vs(p.energy_pf, Quadrant::Lag, goal);
    let under = pct(p.share_under_target);
    let registers = format!(
        " (inductive register {} kvarh against {} kWh imported{})",
        num(p.kvarh_inductive, 0),
        num(p.kwh_import, 0),
        p.tan_phi
            .map(|t| format!(", tan φ {}", num(t, 3)))
            .unwrap_or_default()
    );
    let mut windows = String::new();
    if p.billing.len() > 1 {
        let short: Vec<_> = p.billing.iter().filter(|w| w.energy_pf < goal).collect();
        if let Some(worst) = short
            .iter()
            .min_by(|a, b| a.energy_pf.total_cmp(&b.energy_pf))
        {
            let cal = ctx.study.plan.calendar;
            windows = format!(
                " {} of {} billing windows fall short; the lowest is {} (from {}).",
                short.len(),
                p.billing.len(),
                pf_vs(worst.energy_pf, Quadrant::Lag, goal),
                cal.datetime(worst.start_s).format("%Y-%m-%d"),
            );
        }
    }
    // Capacitive energy is worth a word beside the billed PF, which counts inductive energy
    // only; long overcorrection has its own finding.
    let cap_tan = p.tan_phi_capacitive.unwrap_or(0.0);
    let leading = if p.share_leading >= 0.1 || cap_tan >= 0.1 {
        format!(
            " The capacitive register holds {} kvarh{} and the supply leads {} of the time, \
             which a tariff that bills capacitive energy would count.",
            num(p.kvarh_capacitive, 0),
            p.tan_phi_capacitive
                .map(|t| format!(" (tan φ {})", num(t, 3)))
                .unwrap_or_default(),
            pct(p.share_leading),
        )
    } else {
        String::new()
    };
    if below {
        let f = Finding::new(
            Severity::Warning,
            "pf",
            goal - p.energy_pf,
            format!(
                "Billed PF {billed}{registers} is below the {target_text} target; {under} of \
                 the time under target.{windows}{leading}"
            ),
        );
        let c = &ctx.scenario().controller;
        let full = full_bank_share(ctx);
        let advice = if full >= 0.2 {
            format!(
                "The bank runs with every switched step on {} of the time: it is too small \
                 for this load; more switched kvar is needed.",
                pct(full)
            )
        } else {
            format!(
                "The PF settles anywhere within the dead band (±{} kvar) around the target; \
                 a narrower dead band or a slightly higher target PF brings the billed PF onto \
                 the target, at the cost of more operations.",
                num(c.dead_band_kvar, 1)
            )
        };
        out.push(f.advise(advice, false));
    } else {
        let word = if windows.is_empty() {
            "meets"
        } else {
            "meets over the run"
        };
        let severity = if leading.is_empty() || m.overcorrection.episodes > 0 {
            Severity::Info
        } else {
            Severity::Note
        };
        out.push(Finding::new(
            severity,
            "pf",
            p.share_leading,
            format!(
                "Billed PF {billed}{registers} {word} the {target_text} target; {under} of the \
                 time under target.{windows}{leading}"
            ),
        ));
    }
}

/// The billed PF a target asks for. The billed PF counts inductive energy only, so for a
/// lagging target it must reach the target PF; for a unity or leading target any inductive
/// energy is a shortfall from unity.
pub fn billed_goal(target: crate::pf::PfTarget) -> f64 {
    if target.quadrant == Quadrant::Lag && target.pf < 1.0 {
        target.pf
    } else {
        1.0
    }
}

/// Share of run time with every switched step connected.
fn full_bank_share(ctx: &Context<'_>) -> f64 {
    let m = &ctx.result.metrics;
    let switched: Vec<usize> = m.wear.iter().filter(|w| !w.fixed).map(|w| w.step).collect();
    if switched.is_empty() || m.run.duration_s <= 0.0 {
        return 0.0;
    }
    let t: f64 = m
        .states
        .iter()
        .filter(|s| switched.iter().all(|n| s.steps.contains(n)))
        .map(|s| s.time_s)
        .sum();
    t / m.run.duration_s
}

fn wear(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let m = &ctx.result.metrics;
    let mut lives: Vec<_> = m
        .wear
        .iter()
        .filter_map(|w| w.years_to_rated_life.map(|y| (y, w)))
        .collect();
    lives.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.step.cmp(&b.1.step)));
    let any_switched = m.wear.iter().any(|w| !w.fixed);
    let Some(&(years, w)) = lives.first() else {
        if any_switched {
            out.push(Finding::new(
                Severity::Info,
                "wear",
                0.0,
                "No step operated during the run, so no contactor wears.".to_string(),
            ));
        }
        return;
    };
    let note = extrapolation_note(m.run.duration_s);
    if years >= 10.0 {
        out.push(Finding::new(
            Severity::Info,
            "wear",
            1.0 / years,
            format!(
                "No contactor reaches its rated life within 10 years at this rate; the earliest \
                 is step {} in {} years at {} operations/year{note}.",
                w.step,
                years_text(years),
                approx(w.operations_per_year)
            ),
        ));
        return;
    }
    let severity = if years < 1.0 {
        Severity::Critical
    } else if years < 5.0 {
        Severity::Warning
    } else {
        Severity::Note
    };
    let mut text = format!(
        "Step {} reaches its rated contactor life ({} operations) in {} years at {} \
         operations/year{note}.",
        w.step,
        count(w.rated_operations.round() as u64),
        years_text(years),
        approx(w.operations_per_year),
    );
    let next: Vec<_> = lives[1..].iter().filter(|(y, _)| *y < 10.0).collect();
    if !next.is_empty() {
        let shown: Vec<_> = next.iter().take(4).collect();
        let steps: Vec<String> = shown.iter().map(|(_, w)| w.step.to_string()).collect();
        let ys: Vec<String> = shown.iter().map(|(y, _)| years_text(*y)).collect();
        let more = if next.len() > shown.len() {
            format!(" and {} more within 10 years", next.len() - shown.len())
        } else {
            String::new()
        };
        text.push_str(&format!(
            " Step{} {} follow{} in {} years{more}.",
            if shown.len() > 1 { "s" } else { "" },
            join_and(&steps),
            if shown.len() > 1 { "" } else { "s" },
            join_and(&ys),
        ));
    }
    let c = &ctx.scenario().controller;
    let mut advice = String::new();
    if m.switching.hunting_cycles > 0 {
        advice.push_str("Stop the hunting first (see that finding). ");
    }
    if c.ordering.name() == "sequential" && uneven_equal_steps(ctx) {
        advice.push_str("Rotating ordering would share the operations among equal steps. ");
    }
    advice.push_str(&format!(
        "A longer switching delay (now {}) or a wider dead band (now ±{} kvar) cuts operations; \
         plan contactor replacement before the rated life, with contactors rated for \
         capacitor duty.",
        duration(c.connect_delay_s),
        num(c.dead_band_kvar, 1)
    ));
    out.push(Finding::new(severity, "wear", 1.0 / years, text).advise(advice, true));
}

/// True when equal switched steps wear very unevenly (the busiest has more than twice the
/// operations of the least busy of the same size).
fn uneven_equal_steps(ctx: &Context<'_>) -> bool {
    let steps = &ctx.scenario().steps;
    let wear = &ctx.result.metrics.wear;
    for (i, a) in steps.iter().enumerate() {
        if a.fixed {
            continue;
        }
        for (j, b) in steps.iter().enumerate() {
            if b.fixed || i == j || (a.kvar - b.kvar).abs() > 1e-9 {
                continue;
            }
            let (oa, ob) = (wear[i].operations, wear[j].operations);
            if oa > 2 * ob.max(1) {
                return true;
            }
        }
    }
    false
}

/// The cause of an overcorrection in words.
pub fn cause_words(c: OvercorrectionCause) -> &'static str {
    match c {
        OvercorrectionCause::Export => "export of active power (on-site generation)",
        OvercorrectionCause::FixedSteps => "fixed steps at light load",
        OvercorrectionCause::StepNotOpened => {
            "a step the controller wanted to open but could not yet (disconnect delay or operation cap)"
        }
        OvercorrectionCause::NotSeenByController => {
            "leading power the controller did not act on (dead band, averaging or single-phase measurement)"
        }
    }
}

fn overcorrection(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let m = &ctx.result.metrics;
    let o = &m.overcorrection;
    if o.episodes == 0 {
        return;
    }
    let share = if m.run.duration_s > 0.0 {
        o.total_s / m.run.duration_s
    } else {
        0.0
    };
    let severity = if share >= 0.01 || o.worst_leading_kvar >= 2.0 * o.threshold_kvar {
        Severity::Warning
    } else {
        Severity::Note
    };
    let mut text = format!(
        "Overcorrected {} in {} episode{}",
        duration(o.total_s),
        count(o.episodes),
        if o.episodes == 1 { "" } else { "s" }
    );
    let (day, day_s) =
        o.by_weekday_s.iter().enumerate().fold(
            (0, 0.0),
            |best, (i, &s)| if s > best.1 { (i, s) } else { best },
        );
    if o.total_s > 0.0 && day_s > 0.5 * o.total_s && m.run.duration_s >= 2.0 * DAY_S {
        text.push_str(&format!(", mostly on {}", WEEKDAYS[day]));
    }
    if o.episodes > 1 {
        text.push_str(&format!("; longest {}", duration(o.longest_s)));
    }
    text.push_str(&format!(
        "; worst {} kvar leading",
        num(o.worst_leading_kvar, 0)
    ));
    if let Some(c) = o.dominant_cause {
        text.push_str(&format!("; cause: {}", cause_words(c)));
    }
    text.push('.');
    let c = &ctx.scenario().controller;
    let f = Finding::new(severity, "overcorrection", share, text);
    let f = match o.dominant_cause {
        Some(OvercorrectionCause::FixedSteps) => f.advise(
            "Keep the fixed kvar below the reactive power of the lightest load (for example, put \
             a fixed step under the controller).",
            true,
        ),
        Some(OvercorrectionCause::StepNotOpened) => f.advise(
            format!(
                "A shorter disconnect delay (now {}) lets the controller open steps sooner.",
                duration(c.disconnect_delay_s)
            ),
            false,
        ),
        Some(OvercorrectionCause::Export) => f.advise(
            "Opening the steps while the site exports (the export protection) avoids it.",
            false,
        ),
        Some(OvercorrectionCause::NotSeenByController) => f.advise(
            format!(
                "Check the dead band (now ±{} kvar), the averaging ({}) and the measurement mode.",
                num(c.dead_band_kvar, 1),
                if c.averaging_s > 0.0 {
                    duration(c.averaging_s)
                } else {
                    "none".to_string()
                }
            ),
            false,
        ),
        None => f,
    };
    out.push(f);
}

/// What a phase hides behind the three-phase figures: a phase overcorrected for at least
/// twice the three-phase episode time (and at least the minimum episode length), or a
/// phase whose own registers bill below the goal while the three-phase figure meets it.
/// The worst phase is named: the one with the most overcorrected time, or the lowest
/// billed PF.
fn phases(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let m = &ctx.result.metrics;
    if m.phases.len() != 3 || m.run.duration_s <= 0.0 {
        return;
    }
    let o3 = &m.overcorrection;
    let worst = m.phases.iter().max_by(|a, b| {
        a.overcorrection
            .total_s
            .total_cmp(&b.overcorrection.total_s)
    });
    if let Some(w) = worst {
        let po = &w.overcorrection;
        if po.episodes > 0 && po.total_s >= 2.0 * o3.total_s && po.total_s >= o3.min_duration_s {
            let share = po.total_s / m.run.duration_s;
            let severity = if share >= 0.01 {
                Severity::Warning
            } else {
                Severity::Note
            };
            let three = if o3.episodes == 0 {
                "while the three-phase sum was never overcorrected".to_string()
            } else {
                format!(
                    "while the three-phase sum was overcorrected only {}",
                    duration(o3.total_s)
                )
            };
            let text = format!(
                "Phase {} was overcorrected {} in {} episode{} (worst {} kvar leading on that \
                 phase, {} of the time leading) {three}: the phase's own PF is worse than the \
                 three-phase figure shows.",
                w.phase,
                duration(po.total_s),
                count(po.episodes),
                if po.episodes == 1 { "" } else { "s" },
                num(po.worst_leading_kvar, 1),
                pct(w.share_leading),
            );
            let advice = if ctx.scenario().controller.per_phase {
                // Per-phase control is already on: advising it again would mislead.
                format!(
                    "Per-phase control is already on, so the steps serving phase {} are \
                     too coarse for its light load (or three-phase steps, switched on the \
                     sum, lead it): give the phase a smaller single-phase step, widen its \
                     dead band (`controller.phase_dead_band_kvar`), or move single-phase \
                     loads to even out the phases.",
                    w.phase
                )
            } else {
                "Unbalanced load: correct the phases on their own (single-phase steps \
                 under per-phase control, `controller.measurement = \"per-phase\"`), or \
                 move single-phase loads to even out the phases."
                    .to_string()
            };
            out.push(Finding::new(severity, "phase", share, text).advise(advice, true));
        }
    }
    let goal = ctx.billed_pf.goal;
    if !ctx.billed_pf.below_target {
        let low = m
            .phases
            .iter()
            .min_by(|a, b| a.energy_pf.total_cmp(&b.energy_pf));
        if let Some(w) = low.filter(|w| w.energy_pf < goal) {
            let text = format!(
                "Phase {} on its own registers bills {} while the three-phase figure meets \
                 the {} target ({}); it was under target {} of the time.",
                w.phase,
                pf_vs(w.energy_pf, w.energy_pf_quadrant, goal),
                ctx.scenario().controller.target,
                pf_vs(m.pf.energy_pf, m.pf.energy_pf_quadrant, goal),
                pct(w.share_under_target),
            );
            out.push(Finding::new(
                Severity::Note,
                "phase",
                goal - w.energy_pf,
                text,
            ));
        }
    }
}

/// A what-if wiring of the measurement: what the controller then does, in plain words.
fn wiring(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let c = &ctx.scenario().controller;
    let w = c.wiring();
    if w.as_assumed() {
        return;
    }
    let s = crate::analysis::wiring::symptoms(ctx.study, ctx.result);
    let m = &ctx.result.metrics;
    let text = format!(
        "What-if wiring of the {} measurement: {}. With it the controller {} (billed PF {}, \
         {} operations).",
        c.measurement_label(),
        w.label(),
        crate::analysis::wiring::symptom_words(&s),
        pf_vs(m.pf.energy_pf, m.pf.energy_pf_quadrant, ctx.billed_pf.goal),
        count(m.switching.total_operations),
    );
    out.push(
        Finding::new(Severity::Critical, "wiring", 1.0, text).advise(
            "At commissioning, check that each current transformer sits on the line the \
             controller expects, with its polarity (P1 towards the supply), and that the \
             voltage input is the pair the controller is set for; most controllers show \
             the measured PF and kW per channel, which a clamp meter confirms.",
            true,
        ),
    );
}

fn hunting(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let m = &ctx.result.metrics;
    let s = &m.switching;
    if s.hunting_cycles == 0 {
        return;
    }
    let per_day = if m.run.duration_s > 0.0 {
        s.hunting_cycles as f64 * DAY_S / m.run.duration_s
    } else {
        0.0
    };
    let severity = if per_day >= 10.0 {
        Severity::Warning
    } else {
        Severity::Note
    };
    let mut by_step: Vec<_> = s.per_step.iter().filter(|p| p.hunting_cycles > 0).collect();
    by_step.sort_by(|a, b| {
        b.hunting_cycles
            .cmp(&a.hunting_cycles)
            .then(a.step.cmp(&b.step))
    });
    let detail: Vec<String> = by_step
        .iter()
        .take(3)
        .map(|p| format!("step {}: {}", p.step, count(p.hunting_cycles)))
        .collect();
    let mut text = format!(
        "The bank hunts: {} cycle{} ({}) in {}",
        count(s.hunting_cycles),
        if s.hunting_cycles == 1 { "" } else { "s" },
        detail.join(", "),
        duration(m.run.duration_s),
    );
    if m.run.duration_s >= DAY_S {
        text.push_str(&format!(", about {} per day", approx(per_day)));
    }
    text.push('.');
    let c = &ctx.scenario().controller;
    let smallest = ctx.smallest_switched_kvar();
    let fraction = if smallest > 0.0 {
        c.dead_band_kvar / smallest
    } else {
        0.0
    };
    let wide = crate::analysis::advice::step_wider_than_band(ctx.scenario());
    let advice = if let (true, Some(largest)) = (fraction >= 0.5, wide) {
        // The band is wide enough for the smallest step but not for the largest one that a
        // fixed order may pick.
        format!(
            "The dead band (±{} kvar) suits the smallest step, but the {} kvar steps are wider \
             than the whole band and {} ordering may pick one where a smaller step would do: \
             best-fit ordering picks the step that fits, or a dead band of at least ±{} kvar \
             (half the largest step) stops the overshoot; a longer switching delay (now {}) \
             also slows it.",
            num(c.dead_band_kvar, 1),
            num(largest, 1),
            c.ordering.name(),
            num(0.5 * largest, 1),
            duration(c.connect_delay_s),
        )
    } else {
        format!(
            "Widen the dead band (now ±{} kvar, {} × the smallest switched step; below about \
             0.5 × the step one operation overshoots the band) or lengthen the switching \
             delay (now {}).",
            num(c.dead_band_kvar, 1),
            num(fraction, 2),
            duration(c.connect_delay_s),
        )
    };
    out.push(Finding::new(severity, "hunting", per_day, text).advise(advice, false));
}

fn resonance(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let r = &ctx.resonance;
    capacitor_ratings(ctx, out);
    if ctx.scenario().spectrum.orders.is_empty() {
        let lowest = r
            .states
            .iter()
            .filter_map(|s| s.order)
            .min_by(f64::total_cmp);
        if let Some(h) = lowest {
            out.push(Finding::new(
                Severity::Info,
                "resonance",
                0.0,
                format!(
                    "The scenario gives no load harmonics, so resonance is not checked \
                     against any; the lowest resonant order reached is {}.",
                    num(h, 1)
                ),
            ));
        }
        return;
    }
    let worst = ctx.resonance.worst_state();
    thd(ctx, worst, out);
    let Some(w) = worst else { return };
    out.push(worst_state_finding(ctx, w));
}

/// "5th-harmonic voltage 24.3 % (limit 5 %)".
fn voltage_words(order: f64, v_pct: f64, limit: Option<f64>) -> String {
    let name = harmonic_name(order);
    let short = name.strip_suffix(" harmonic").unwrap_or(&name);
    match limit {
        Some(l) => format!("{short}-harmonic voltage {}", pct_vs_limit(v_pct, l, 1)),
        None => format!("{short}-harmonic voltage {} %", num(v_pct, 1)),
    }
}

fn worst_state_finding(ctx: &Context<'_>, w: &StateResonance) -> Finding {
    let r = &ctx.resonance;
    let run_s = ctx.result.metrics.run.duration_s.max(1e-9);
    let warning = r.warnings.iter().find(|x| x.steps == w.steps);
    let share = w.time_s / run_s;
    let mut text = format!(
        "Worst harmonic state: step{} {} ({} kvar), about {} h a year ({} of the run)",
        if w.steps.len() == 1 { "" } else { "s" },
        steps_label(&w.steps),
        num(w.kvar, 0),
        approx(w.hours_per_year),
        pct(share),
    );
    match (warning, w.order) {
        (Some(wr), _) => {
            let h = harmonic_name(wr.near_harmonic);
            text.push_str(&format!(
                ". It resonates at order {}, next to the {h} of the load, which it amplifies \
                 {} times",
                num(wr.order, 1),
                num(wr.amplification, 1)
            ));
        }
        (None, Some(o)) => {
            let near = w
                .nearest_harmonic
                .map(|h| format!(" (nearest harmonic of the load: the {})", harmonic_name(h)))
                .unwrap_or_default();
            text.push_str(&format!(". It resonates at order {}{near}", num(o, 1)));
        }
        (None, None) => text.push_str(". No parallel resonance lies inside orders 1 to 50"),
    }
    let shown = warning
        .and_then(|wr| w.harmonics.iter().find(|h| h.order == wr.near_harmonic))
        .or_else(|| {
            w.harmonics.iter().max_by(|a, b| {
                let ka = a.limit_pct.map_or(0.0, |l| a.v_pct / l);
                let kb = b.limit_pct.map_or(0.0, |l| b.v_pct / l);
                ka.total_cmp(&kb)
            })
        });
    text.push_str("; estimated ");
    if let Some(h) = shown {
        text.push_str(&voltage_words(h.order, h.v_pct, h.limit_pct));
        text.push_str(" and ");
    }
    text.push_str(&format!(
        "THD_V {} % (limit {} %, {})",
        deciding(w.thd_pct, w.thd_limit_pct, 1),
        num(w.thd_limit_pct, 1),
        r.voltage_limits
    ));
    // The capacitors: every limit they exceed, in the standard's words; else the most
    // loaded step's current and voltage for the record.
    let caps: Vec<_> = w
        .breaches
        .iter()
        .filter(|b| b.step.is_some())
        .copied()
        .collect();
    let over = crate::analysis::resonance::breach_lines(&caps);
    if !over.is_empty() {
        text.push_str("; ");
        text.push_str(&join_and(&over));
    } else if let Some(st) = w
        .step_stress
        .iter()
        .max_by(|a, b| a.limit_ratio.total_cmp(&b.limit_ratio))
    {
        text.push_str(&format!(
            "; step {} current {} × rated (limit {} ×, {}), capacitor voltage {} V rms on a {} V \
             rating",
            st.step,
            deciding(st.current_ratio, st.current_limit, 2),
            num(st.current_limit, 2),
            r.capacitor_limits,
            num(st.voltage_v, 0),
            num(st.rated_voltage_v, 0)
        ));
    }
    text.push('.');
    let others: Vec<String> = r
        .warnings
        .iter()
        .filter(|x| x.steps != w.steps)
        .take(3)
        .map(|x| {
            format!(
                "{} (order {}, near the {}, about {} h a year, THD_V {} %)",
                steps_label(&x.steps),
                num(x.order, 1),
                harmonic_name(x.near_harmonic),
                approx(x.hours_per_year),
                num(x.thd_pct, 1)
            )
        })
        .collect();
    let n_others = r.warnings.iter().filter(|x| x.steps != w.steps).count();
    if !others.is_empty() {
        text.push_str(&format!(" Also near a harmonic: {}", others.join("; ")));
        if n_others > others.len() {
            text.push_str(&format!(
                "; and {} more (see the resonance section)",
                n_others - others.len()
            ));
        }
        text.push('.');
    }
    let step_over = w.breaches.iter().any(|b| b.step.is_some());
    let exceeded = !w.breaches.is_empty();
    let severity = if (warning.is_some() && (exceeded || share >= 0.01)) || step_over {
        Severity::Critical
    } else if exceeded || warning.is_some() || n_others > 0 {
        Severity::Warning
    } else if w.limit_ratio >= 0.8 {
        Severity::Note
    } else {
        Severity::Info
    };
    if severity == Severity::Info {
        text.push_str(" Every state reached stays within the harmonic and capacitor limits.");
        return Finding::new(severity, "resonance", 0.0, text);
    }
    let advice = detuning_advice(ctx);
    Finding::new(severity, "resonance", w.hours_per_year * w.severity, text).advise(advice, true)
}

/// What to do about a resonance: detune (with the order the full bank would then have),
/// or check the existing detuning.
fn detuning_advice(ctx: &Context<'_>) -> String {
    let sc = ctx.scenario();
    let hm = ctx.model;
    let lowest = hm.lowest_harmonic().unwrap_or(5.0);
    if sc.steps.iter().all(|s| s.detuning.is_some()) {
        return format!(
            "Check the detuning ratio of the steps against the harmonics present (the tuning \
             order 1/sqrt(p) must lie below the {}, the lowest in the load), and avoid the \
             resonating states.",
            harmonic_name(lowest)
        );
    }
    // The usual ratio that tunes below the lowest harmonic with a margin: 7 % (3.78) below a
    // 5th, 14 % (2.67) below a 3rd (common practice).
    let p = if lowest > 4.5 { 0.07 } else { 0.14 };
    let detuned = hm.with_detuning(p);
    let all = hm.all_mask();
    let full = detuned.resonance_order(all);
    let u = sc.supply.nominal_voltage_v;
    let mixed = sc.steps.iter().any(|s| s.detuning.is_some());
    let mut text = String::new();
    if mixed {
        text.push_str(
            "Plain steps beside detuned ones resonate with the detuned steps' reactors as well \
             as with the supply: detune every step. ",
        );
    }
    text.push_str(&format!(
        "Detuned steps (a series reactor on each step that tunes it below the lowest harmonic \
         present) move the resonance out of the way: with {} % on every step (same kvar), the \
         full bank would resonate at order {}, below the {}",
        num(p * 100.0, 0),
        full.map_or("n/a".to_string(), |o| num(o, 1)),
        harmonic_name(lowest),
    ));
    text.push_str(&format!(
        "; its capacitors then see U/(1 − p) = {} V and need a higher rating (e.g. {} V). \
         `bankstep resonance` compares 5.67 %, 7 % and 14 % state by state.",
        num(u / (1.0 - p), 0),
        num(
            crate::harmonics::limits::default_rated_voltage(u, Some(p)),
            0
        )
    ));
    text
}

/// Detuned steps whose capacitors are rated below the voltage the reactor puts on them.
fn capacitor_ratings(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let hm = ctx.model;
    let u_n = ctx.scenario().supply.nominal_voltage_v;
    for (i, s) in ctx.scenario().steps.iter().enumerate() {
        let Some(p) = s.detuning else { continue };
        let u_conn = s.connection_voltage_v(u_n);
        let u_c = u_conn / (1.0 - p);
        let rated = hm.rated_voltage_v(i);
        if rated >= u_c * (1.0 - 1e-9) {
            continue;
        }
        out.push(
            Finding::new(
                Severity::Warning,
                "capacitor",
                u_c / rated,
                format!(
                    "Step {}'s capacitors are rated {} V but see {} V at the fundamental behind \
                     the {} % detuning reactor (U/(1 − p)), {} % of their rating before any \
                     harmonic.",
                    i + 1,
                    num(rated, 0),
                    num(u_c, 0),
                    num(p * 100.0, 2),
                    num(100.0 * u_c / rated, 0)
                ),
            )
            .advise(
                format!(
                    "Use capacitors rated at least {} V for this step.",
                    num(
                        crate::harmonics::limits::default_rated_voltage(u_conn, Some(p)),
                        0
                    )
                ),
                true,
            ),
        );
    }
}

/// Estimated voltage distortion in the states where the bank spends real time, other than
/// the worst state and the states near a harmonic (those have their own finding).
fn thd(ctx: &Context<'_>, worst: Option<&StateResonance>, out: &mut Vec<Finding>) {
    let r = &ctx.resonance;
    let run_s = ctx.result.metrics.run.duration_s.max(1e-9);
    let pick = r
        .states
        .iter()
        .filter(|s| s.time_s / run_s >= 0.01)
        .filter(|s| !r.warnings.iter().any(|w| w.steps == s.steps))
        .filter(|s| worst.is_none_or(|w| w.steps != s.steps))
        // On equal THD the state held longest is the one worth naming.
        .max_by(|a, b| {
            (a.thd_pct / a.thd_limit_pct)
                .total_cmp(&(b.thd_pct / b.thd_limit_pct))
                .then(a.hours_per_year.total_cmp(&b.hours_per_year))
        });
    let Some(s) = pick else { return };
    let severity = if s.thd_pct >= s.thd_limit_pct {
        Severity::Warning
    } else if s.thd_pct >= 0.625 * s.thd_limit_pct {
        Severity::Note
    } else {
        return;
    };
    out.push(Finding::new(
        severity,
        "resonance",
        s.hours_per_year * s.thd_pct / s.thd_limit_pct,
        format!(
            "The estimated bus voltage THD reaches {} {} (about {} h a year, {} of the run); the \
             estimate runs the harmonic load at its rating{}, so it errs high.",
            pct_vs_limit(s.thd_pct, s.thd_limit_pct, 1),
            match s.steps.len() {
                0 => "with no step connected".to_string(),
                1 => format!("with step {} connected", s.steps[0]),
                _ => format!("with steps {} connected", steps_label(&s.steps)),
            },
            approx(s.hours_per_year),
            pct(s.time_s / run_s),
            if r.damping_kw > 0.0 {
                ""
            } else {
                " and neglects the load's own damping"
            }
        ),
    ));
}

fn voltage(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let m = &ctx.result.metrics;
    let v = &m.voltage;
    let u_n = ctx.scenario().supply.nominal_voltage_v;
    if v.max_v > 1.1 * u_n {
        out.push(
            Finding::new(
                Severity::Warning,
                "voltage",
                v.max_v / u_n,
                format!(
                    "The bus voltage reached {} V ({} % of the {} V nominal) and was above 110 % \
                     for {}.",
                    num(v.max_v, 0),
                    num(100.0 * v.max_v / u_n, 1),
                    num(u_n, 0),
                    duration(v.above_110pct_s),
                ),
            )
            .advise(
                "Check the transformer tap and the steps left on at light load; an overvoltage \
                 protection setting opens steps one by one.",
                true,
            ),
        );
    }
    if v.min_v > 0.0 && v.min_v < 0.9 * u_n {
        out.push(Finding::new(
            Severity::Note,
            "voltage",
            u_n / v.min_v,
            format!(
                "The bus voltage fell to {} V ({} % of the {} V nominal).",
                num(v.min_v, 0),
                num(100.0 * v.min_v / u_n, 1),
                num(u_n, 0),
            ),
        ));
    }
    let nc = ctx.result.nonconverged_intervals;
    if nc > 0 {
        out.push(
            Finding::new(
                Severity::Warning,
                "supply",
                nc as f64,
                format!(
                    "The bus voltage could not be solved in {} interval{}: the load is beyond \
                     what the supply can carry there.",
                    count(nc),
                    if nc == 1 { "" } else { "s" }
                ),
            )
            .advise("Check the transformer rating and the load profile.", false),
        );
    }
}

/// A load this many times the transformer rating is taken for a units mistake.
const LOAD_BEYOND_TRANSFORMER: f64 = 3.0;
/// A load above this share of the short-circuit power at the bus is taken for a units
/// mistake where there is no transformer.
const LOAD_BEYOND_SHORT_CIRCUIT: f64 = 0.3;

/// Loads and banks far beyond what the supply could plausibly carry: most often a units
/// mistake (a profile in W and var under kW and kvar headers reads 1,000 times too large).
fn plausibility(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let sc = ctx.scenario();
    let l = &ctx.result.metrics.load;
    let p_peak = l.max_p_kw.abs().max(l.min_p_kw.abs());
    let s_peak = p_peak.hypot(l.max_q_kvar.max(0.0));
    let (what, rating) = match (sc.supply.transformer, sc.supply.short_circuit_kva()) {
        (Some(t), _) => (
            format!("the {} kVA transformer", num(t.rated_kva, 0)),
            t.rated_kva * LOAD_BEYOND_TRANSFORMER,
        ),
        (None, s) if s.is_finite() => (
            format!(
                "the supply ({} kVA short-circuit power at the bus)",
                num(s, 0)
            ),
            s * LOAD_BEYOND_SHORT_CIRCUIT,
        ),
        _ => return,
    };
    if s_peak > rating {
        out.push(
            Finding::new(
                Severity::Critical,
                "supply",
                s_peak / rating,
                format!(
                    "The load peaks at about {} kVA ({} kW, {} kvar), far beyond {what}; the \
                     results of this run do not describe a real site.",
                    num(s_peak, 0),
                    num(p_peak, 0),
                    num(l.max_q_kvar, 0)
                ),
            )
            .advise(
                "Check the units of the load profile: a file in W and var under kW and kvar \
                 headers reads 1,000 times too large. Check the supply settings too.",
                false,
            ),
        );
    }
    let bank: f64 = sc.steps.iter().map(|s| s.kvar).sum();
    if let Some(t) = sc.supply.transformer {
        if bank > t.rated_kva {
            out.push(
                Finding::new(
                    Severity::Critical,
                    "supply",
                    bank / t.rated_kva,
                    format!(
                        "The bank ({} kvar) is larger than the {} kVA transformer that feeds \
                         it; a bank is normally a fraction of the transformer rating, so this \
                         is most likely a units or typing mistake.",
                        num(bank, 0),
                        num(t.rated_kva, 0)
                    ),
                )
                .advise(
                    "Check steps.kvar (kvar per step at the nominal voltage) and the \
                     transformer's rated_kva.",
                    false,
                ),
            );
        }
    }
}

fn protection(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    let t = &ctx.result.metrics.switching.trips;
    let kinds = [
        (t.overvoltage, crate::controller::Trip::Overvoltage),
        (t.loss_of_current, crate::controller::Trip::LossOfCurrent),
        (t.export, crate::controller::Trip::Export),
        (t.distortion, crate::controller::Trip::Distortion),
    ];
    let total: u64 = kinds.iter().map(|k| k.0).sum();
    if total == 0 {
        return;
    }
    let parts: Vec<String> = kinds
        .iter()
        .filter(|k| k.0 > 0)
        .map(|k| format!("{} {}", trip_word(k.1), count(k.0)))
        .collect();
    out.push(Finding::new(
        Severity::Note,
        "protection",
        total as f64,
        format!(
            "Protections opened steps {} time{} ({}).",
            count(total),
            if total == 1 { "" } else { "s" },
            parts.join(", ")
        ),
    ));
}

fn faults(ctx: &Context<'_>, out: &mut Vec<Finding>) {
    for (i, s) in ctx.scenario().steps.iter().enumerate() {
        let Some(f) = s.fault else { continue };
        let what = match f.kind {
            FaultKind::Open => "fails open (delivers nothing)".to_string(),
            FaultKind::CapacitanceLoss(x) => format!("loses {} of its capacitance", pct(x)),
            FaultKind::StuckClosed => "has a contactor stuck closed (always connected)".to_string(),
        };
        let when = if f.from_s > 0.0 {
            format!(" from {} into the run", duration(f.from_s))
        } else {
            " from the start".to_string()
        };
        out.push(Finding::new(
            Severity::Info,
            "fault",
            0.0,
            format!(
                "Step {} {what}{when} (fault injected in the scenario); {}, so the results \
                 above include its effect.",
                i + 1,
                if ctx.scenario().controller.detection.is_some() {
                    "the controller's fault detection is on (the wear plan says when it alarms)"
                } else {
                    "the controller does not know and keeps operating it"
                }
            ),
        ));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::{ResonanceReport, ResonanceWarning};
    use crate::engine::{Quiet, RunResult};
    use crate::scenario::Scenario;
    use crate::study::Study;
    use std::path::Path;

    /// The findings of `r`, with the harmonic assessment edited by `edit` first.
    fn judge(st: &Study, r: &RunResult, edit: impl FnOnce(&mut ResonanceReport)) -> Vec<Finding> {
        let model = st.harmonic_model();
        let mut resonance = crate::analysis::resonance::assess(st, &model, &r.metrics);
        edit(&mut resonance);
        let goal = billed_goal(st.scenario.controller.target);
        findings(&Context {
            study: st,
            result: r,
            model: &model,
            resonance: &resonance,
            billed_pf: crate::analysis::BilledPf {
                goal,
                below_target: r.metrics.pf.energy_pf < goal,
            },
        })
    }

    fn study() -> Study {
        let s = Scenario::from_str(
            "[[steps]]\nkvar = 50\ncount = 4\n[load.synthetic]\n[run]\nduration_s = 600\n",
            Path::new("site.toml"),
        )
        .unwrap();
        Study::prepare(s).unwrap()
    }

    #[test]
    fn ranks_the_serious_first_in_plain_words() {
        let mut st = study();
        // A load spectrum, so that resonance is checked (ideal six-pulse, read).
        st.scenario.spectrum.orders = vec![(5.0, 20.0), (7.0, 14.3)];
        st.scenario.spectrum.reference_kva = 100.0;
        let mut r = st.run(&mut Quiet).unwrap();
        r.metrics.run.duration_s = 7.0 * DAY_S;
        let w = &mut r.metrics.wear[2];
        w.operations = 9_150;
        w.operations_per_year = 47_600.0;
        w.years_to_rated_life = Some(100_000.0 / 47_600.0);
        r.metrics.switching.hunting_cycles = 112;
        r.metrics.switching.per_step[1].hunting_cycles = 80;
        r.metrics.switching.per_step[2].hunting_cycles = 32;
        // Invented figures: 31 h of a 7-day run is 1,616 h a year.
        let hours = 31.0 / (7.0 * 24.0) * 8760.0;
        let state = StateResonance {
            steps: vec![1, 2, 3],
            kvar: 150.0,
            order: Some(4.9),
            frequency_hz: Some(245.0),
            peak_order: Some(4.88),
            peak_impedance_ohm: Some(0.5),
            nearest_harmonic: Some(5.0),
            time_s: 31.0 * 3600.0,
            hours_per_year: hours,
            thd_pct: 4.1,
            thd_limit_pct: 8.0,
            harmonics: vec![crate::harmonics::HarmonicVoltage {
                order: 5.0,
                current_pct: 20.0,
                impedance_ohm: 0.5,
                amplification: 9.0,
                v_pct: 3.2,
                limit_pct: Some(5.0),
            }],
            step_stress: Vec::new(),
            max_hours_per_day: 24.0,
            near_harmonic: Some(5.0),
            breaches: Vec::new(),
            limit_ratio: 0.64,
            severity: 0.4096,
        };
        let warning = ResonanceWarning {
            steps: vec![1, 2, 3],
            order: 4.9,
            near_harmonic: 5.0,
            time_s: 31.0 * 3600.0,
            hours_per_year: hours,
            v_h_pct: 3.2,
            v_h_limit_pct: Some(5.0),
            amplification: 9.0,
            thd_pct: 4.1,
            thd_limit_pct: 8.0,
            severity: 0.64,
        };
        let f = judge(&st, &r, |res| {
            res.states.push(state);
            res.warnings.push(warning);
        });
        assert_eq!(f[0].topic, "resonance");
        assert_eq!(f[0].severity, Severity::Critical);
        assert!(
            f[0].text.starts_with(
                "Worst harmonic state: steps 1+2+3 (150 kvar), about 1,620 h a year (18 % of \
                 the run). It resonates at order 4.9, next to the 5th harmonic of the load, \
                 which it amplifies 9.0 times; estimated 5th-harmonic voltage 3.2 % (limit \
                 5.0 %) and THD_V 4.1 % (limit 8.0 %"
            ),
            "{}",
            f[0].text
        );
        assert!(f[0].hardware);
        let wear = f.iter().find(|x| x.topic == "wear").unwrap();
        assert_eq!(wear.severity, Severity::Warning);
        assert_eq!(
            wear.text,
            "Step 3 reaches its rated contactor life (100,000 operations) in 2.1 years at \
             47,600 operations/year."
        );
        let hunt = f.iter().find(|x| x.topic == "hunting").unwrap();
        assert!(
            hunt.text
                .starts_with("The bank hunts: 112 cycles (step 2: 80, step 3: 32)"),
            "{}",
            hunt.text
        );
        // Ranked: severities never go back up.
        assert!(f.windows(2).all(|p| p[0].severity <= p[1].severity));
    }

    #[test]
    fn shortfall_of_billed_pf_is_a_warning() {
        let st = study();
        let mut r = st.run(&mut Quiet).unwrap();
        // Registers of 100 kWh and 45.56 kvarh inductive: tan φ 0.4556, billed PF
        // 1/sqrt(1 + 0.4556²) = 0.910.
        let p = &mut r.metrics.pf;
        p.kwh_import = 100.0;
        p.kvarh_inductive = 45.56;
        p.kvarh_capacitive = 0.0;
        p.share_leading = 0.0;
        p.energy_pf = 1.0 / (1.0f64 + 0.4556 * 0.4556).sqrt();
        p.tan_phi = Some(0.4556);
        p.tan_phi_capacitive = Some(0.0);
        p.energy_pf_quadrant = Quadrant::Lag;
        p.share_under_target = 0.38;
        let f = judge(&st, &r, |_| {});
        let pf = f.iter().find(|x| x.topic == "pf").unwrap();
        assert_eq!(pf.severity, Severity::Warning);
        assert_eq!(
            pf.text,
            "Billed PF 0.91 lag (inductive register 46 kvarh against 100 kWh imported, tan φ \
             0.456) is below the 0.95 lag target; 38 % of the time under target."
        );
    }

    #[test]
    fn overcorrection_names_day_and_cause() {
        let st = study();
        let mut r = st.run(&mut Quiet).unwrap();
        r.metrics.run.duration_s = 7.0 * DAY_S;
        let o = &mut r.metrics.overcorrection;
        o.episodes = 3;
        o.total_s = 41.0 * 60.0;
        o.longest_s = 20.0 * 60.0;
        o.worst_leading_kvar = 62.0;
        o.dominant_cause = Some(OvercorrectionCause::FixedSteps);
        o.by_weekday_s[6] = 30.0 * 60.0;
        o.by_weekday_s[5] = 11.0 * 60.0;
        let f = judge(&st, &r, |_| {});
        let oc = f.iter().find(|x| x.topic == "overcorrection").unwrap();
        assert_eq!(
            oc.text,
            "Overcorrected 41 min in 3 episodes, mostly on Sundays; longest 20 min; worst 62 \
             kvar leading; cause: fixed steps at light load."
        );
        assert!(oc.hardware);
    }
}

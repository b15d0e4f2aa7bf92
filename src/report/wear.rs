//! The wear plan as text and JSON: the "Wear plan" section of every summary, the `wear_plan`
//! object of the simulate JSON, and the output of `bankstep wear`.
//!
//! It renders a [`WearPlan`] as the analysis made it; nothing is judged here.

use crate::analysis::maintenance::{PlanOptions, WearPlan};
use crate::report::{
    approx, count, duration, num, pct, table, wrap_plain, Provenance, ReportError, Tool,
    HARDWARE_CAUTION, TOOL,
};
use crate::scenario::Scenario;
use serde::Serialize;
use std::io::Write;

fn heading(t: &mut String, title: &str) {
    t.push('\n');
    t.push_str(title);
    t.push('\n');
    t.push_str(&"-".repeat(title.chars().count()));
    t.push('\n');
}

fn para(t: &mut String, text: &str) {
    wrap_plain(t, "  ", text);
}

fn sub(t: &mut String, title: &str) {
    t.push('\n');
    t.push_str("  ");
    t.push_str(title);
    t.push('\n');
}

/// A date or `beyond 100 years`.
fn date_or(d: &Option<String>) -> String {
    d.clone().unwrap_or_else(|| "beyond 100 years".to_string())
}

/// Appends the "Wear plan" section of `plan` (or a line saying it was not made) to `t`.
pub fn section(t: &mut String, sc: &Scenario, plan: Option<&WearPlan>) {
    let Some(p) = plan else {
        heading(t, "Wear plan");
        para(
            t,
            "Not made for this report (the caller ran no wear plan); `bankstep wear` makes it.",
        );
        return;
    };
    heading(t, &format!("Wear plan (as of {})", p.as_of));
    if p.orderings.is_empty() && p.ageing.is_none() {
        para(
            t,
            "Made from this run alone. `bankstep wear` (or `simulate --full-wear-plan`) adds \
             the other step orderings, a spread over seeds, the capacitor-ageing projection \
             and the cost of a failed step, each from further runs on the same profile.",
        );
    }
    steps(t, sc, p);
    orderings(t, p);
    inrush(t, p);
    ageing(t, p);
    faults(t, p);
    replacements(t, p);
    t.push('\n');
    wrap_plain(t, "  ", HARDWARE_CAUTION);
}

fn steps(t: &mut String, sc: &Scenario, p: &WearPlan) {
    let c = &p.calendar;
    let y = &c.year_days;
    para(
        t,
        &format!(
            "Operations a year by the calendar: each step's operations per weekday, \
             Saturday, Sunday and holiday in the run, times the {} weekdays, {} Saturdays, \
             {} Sundays and {} holidays of the 365 days from {} (the run covered {} \
             weekdays, {} Saturdays, {} Sundays and {} holidays, in days).",
            num(y.weekday, 0),
            num(y.saturday, 0),
            num(y.sunday, 0),
            num(y.holiday, 0),
            p.as_of,
            num(c.run_days.weekday, 2),
            num(c.run_days.saturday, 2),
            num(c.run_days.sunday, 2),
            num(c.run_days.holiday, 2),
        ),
    );
    if !c.holidays_in_run {
        para(
            t,
            "The synthetic generator follows its shift pattern and does not know holidays, \
             so the run's days are typed by weekday; a holiday takes the rate of a rest day \
             of the pattern.",
        );
    }
    for b in &c.borrowed {
        let from = match b.from {
            Some(f) => format!("the {} rate", f.name()),
            None => "the mean rate of all the run's days".to_string(),
        };
        para(
            t,
            &format!(
                "The run has no {} in it: {}s take {from}.",
                b.day_type.name(),
                b.day_type.name()
            ),
        );
    }
    let seeds = p.seeds.len() > 1;
    let mut rows = Vec::new();
    for s in &p.steps {
        if s.fixed {
            continue;
        }
        let d = &s.operations_per_day;
        let mut row = vec![
            s.step.to_string(),
            count(s.operations_so_far.round() as u64),
            count(s.operations_in_run),
            approx(d.weekday),
            approx(d.saturday),
            approx(d.sunday),
            approx(d.holiday),
            approx(s.operations_per_year),
            approx(s.operations_per_year_flat),
            count(s.rated_operations.round() as u64),
            date_or(&s.rated_life_date),
        ];
        if seeds {
            row.push(match &s.rated_life_range {
                Some([a, b]) => format!("{a} to {b}"),
                None => "beyond 100 years for a seed".to_string(),
            });
        }
        rows.push(row);
    }
    t.push('\n');
    let mut headers = vec![
        "step",
        "ops so far",
        "ops in run",
        "/weekday",
        "/Saturday",
        "/Sunday",
        "/holiday",
        "ops/year",
        "(day x 365)",
        "rated ops",
        "rated life reached",
    ];
    if seeds {
        headers.push("over the seeds");
    }
    table(t, "  ", &headers, "rrrrrrrrrrll", &rows);
    if seeds {
        para(
            t,
            &format!(
                "Seeds {} of the synthetic load give the range of each date.",
                p.seeds
                    .iter()
                    .map(|s| s.to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        );
    }
    let fixed: Vec<String> = p
        .steps
        .iter()
        .filter(|s| s.fixed)
        .map(|s| s.step.to_string())
        .collect();
    if !fixed.is_empty() {
        para(
            t,
            &format!(
                "Fixed step{} {} never switch{}.",
                if fixed.len() == 1 { "" } else { "s" },
                fixed.join(", "),
                if fixed.len() == 1 { "es" } else { "" }
            ),
        );
    }
    let _ = sc;
}

fn orderings(t: &mut String, p: &WearPlan) {
    if p.orderings.is_empty() {
        return;
    }
    sub(t, "Step ordering on the same profile");
    let rows: Vec<Vec<String>> = p
        .orderings
        .iter()
        .map(|o| {
            vec![
                format!("{}{}", o.ordering, if o.current { " (set)" } else { "" }),
                format!("{} {}", num(o.billed_pf, 3), o.billed_pf_quadrant.word()),
                approx(o.operations_per_year),
                match o.most_worn_step {
                    Some(s) => format!("{s} ({})", approx(o.most_worn_operations_per_year)),
                    None => "none operates".to_string(),
                },
                o.max_over_min
                    .map(|r| num(r, 2))
                    .unwrap_or_else(|| "a step idle".to_string()),
                match (&o.first_rated_life_step, &o.first_rated_life_date) {
                    (Some(s), Some(d)) => format!("step {s}, {d}"),
                    _ => "beyond 100 years".to_string(),
                },
            ]
        })
        .collect();
    table(
        t,
        "  ",
        &[
            "ordering",
            "billed PF",
            "ops/year",
            "most worn (ops/year)",
            "max/min",
            "first rated life",
        ],
        "lrrlrl",
        &rows,
    );
    let cur = p.orderings.iter().find(|o| o.current);
    match (p.better_ordering, cur) {
        (Some(b), Some(c)) => {
            if let Some(o) = p.orderings.iter().find(|o| o.ordering == b) {
                para(
                    t,
                    &format!(
                        "Changing the ordering to {b} would move the first contactor \
                         replacement from {} to {} with a billed PF of {} {} (now {} {}).",
                        date_or(&c.first_rated_life_date),
                        date_or(&o.first_rated_life_date),
                        num(o.billed_pf, 3),
                        o.billed_pf_quadrant.word(),
                        num(c.billed_pf, 3),
                        c.billed_pf_quadrant.word()
                    ),
                );
            }
        }
        _ => para(
            t,
            "No other ordering puts the first contactor replacement later without a lower \
             billed PF on this profile.",
        ),
    }
}

fn inrush(t: &mut String, p: &WearPlan) {
    let i = &p.inrush;
    sub(t, "Closing inrush");
    if i.steps.is_empty() {
        para(t, "No step closed in the run.");
        return;
    }
    para(
        t,
        &format!(
            "Worst closing of each step in the run: back-to-back onto the steps already on \
             through {} µH between steps (IEEE Std C37.012 form), or from the supply's \
             short-circuit power when none is on (that inductance again with an infinite \
             supply); a detuned step's own reactor is in the \
             loop. Limits: 100 x rated current for the capacitors (IEC 60831-1), the \
             contactor's stated peak where given.",
            num(i.inductance_uh, 1)
        ),
    );
    let rows: Vec<Vec<String>> = i
        .steps
        .iter()
        .map(|s| {
            vec![
                s.step.to_string(),
                count(s.closings),
                format!("{} A", num(s.worst_peak_a, 0)),
                num(s.peak_multiple, 0),
                format!("{} Hz", num(s.worst_frequency_hz, 0)),
                s.worst_with_steps_on.clone(),
                s.contactor_peak_a
                    .map(|a| format!("{} A", num(a, 0)))
                    .unwrap_or_else(|| "not given".to_string()),
                s.damping_ohm
                    .map(|r| format!("{} ohm", num(r, 1)))
                    .unwrap_or_else(|| "none".to_string()),
                count(s.closings_over_limit),
            ]
        })
        .collect();
    table(
        t,
        "  ",
        &[
            "step",
            "closings",
            "worst peak",
            "x I_N",
            "frequency",
            "steps on before",
            "contactor peak",
            "damping",
            "over a limit",
        ],
        "rrrrrlrrr",
        &rows,
    );
    for s in &i.steps {
        if s.over_capacitor_limit || s.over_contactor_rating {
            let mut what = Vec::new();
            if s.over_capacitor_limit {
                what.push(format!(
                    "100 x its rated current ({} A)",
                    num(s.capacitor_limit_a, 0)
                ));
            }
            if s.over_contactor_rating {
                what.push(format!(
                    "its contactor's peak rating ({} A)",
                    num(s.contactor_peak_a.unwrap_or(0.0), 0)
                ));
            }
            para(
                t,
                &format!(
                    "Warning: step {} closes with up to {} A, above {}, on {} of {} \
                     closings. Capacitor-duty contactors with damping resistors or an \
                     inrush reactor limit it.",
                    s.step,
                    num(s.worst_peak_a, 0),
                    what.join(" and "),
                    count(s.closings_over_limit),
                    count(s.closings)
                ),
            );
        }
    }
}

fn ageing(t: &mut String, p: &WearPlan) {
    let Some(a) = &p.ageing else { return };
    sub(t, "Capacitor ageing");
    para(
        t,
        &format!(
            "Each step at (1 {} {} %) x (1 - {} %)^age of its capacitance, age from its \
             installation date; one run a year on the same profile.",
            if a.tolerance_pct < 0.0 { "-" } else { "+" },
            num(a.tolerance_pct.abs(), 1),
            num(a.loss_pct_per_year, 2)
        ),
    );
    let rows: Vec<Vec<String>> = a
        .years
        .iter()
        .map(|y| {
            vec![
                y.year.to_string(),
                y.date.clone(),
                format!("{} kvar", num(y.bank_kvar, 1)),
                format!("{} {}", num(y.billed_pf, 3), y.billed_pf_quadrant.word()),
                if y.below_target {
                    "below goal"
                } else {
                    "meets goal"
                }
                .to_string(),
            ]
        })
        .collect();
    table(
        t,
        "  ",
        &["year", "date", "bank delivers", "billed PF", ""],
        "rlrrl",
        &rows,
    );
    match a.first_year_below_target {
        Some(_) if a.nominal_below_target => para(
            t,
            &format!(
                "The bank misses the goal of {} lag even at nominal capacitance (billed PF \
                 {} lag): ageing is not the cause (see the findings).",
                num(a.goal, 2),
                num(a.nominal_billed_pf, 3)
            ),
        ),
        Some(0) => para(
            t,
            &format!(
                "Already on the study date the capacitance lost since installation brings \
                 the billed PF below the goal of {} lag (at nominal capacitance it is {} lag).",
                num(a.goal, 2),
                num(a.nominal_billed_pf, 3)
            ),
        ),
        Some(n) => {
            let y = &a.years.iter().find(|y| y.year == n).map(|y| y.date.clone());
            para(
                t,
                &format!(
                    "The billed PF first falls below the goal of {} lag in year {n} ({}).",
                    num(a.goal, 2),
                    y.clone().unwrap_or_default()
                ),
            )
        }
        None => para(
            t,
            &format!(
                "The billed PF stays at or above the goal of {} lag through year {}.",
                num(a.goal, 2),
                a.years.last().map_or(0, |y| y.year)
            ),
        ),
    }
}

fn faults(t: &mut String, p: &WearPlan) {
    let Some(f) = &p.faults else { return };
    sub(t, "Faults");
    para(
        t,
        &format!(
            "With the fault{} the billed PF is {} {}; without any fault, on the same \
             profile, {} {}. The steps without a fault made {} operations with the \
             fault{} and {} without ({}).",
            if f.faults.len() == 1 { "" } else { "s" },
            num(f.billed_pf_with, 3),
            f.billed_pf_with_quadrant.word(),
            num(f.billed_pf_without, 3),
            f.billed_pf_without_quadrant.word(),
            count(f.other_operations_with),
            if f.faults.len() == 1 { "" } else { "s" },
            count(f.other_operations_without),
            {
                let d = f.other_operations_with as i64 - f.other_operations_without as i64;
                if d >= 0 {
                    format!("{} more", count(d as u64))
                } else {
                    format!("{} fewer", count(d.unsigned_abs()))
                }
            }
        ),
    );
    let how = if f.detection_configured {
        "The controller's fault detection (on in the scenario"
    } else {
        "The controller's fault detection is off in the scenario; with it on at the defaults"
    };
    for x in &f.faults {
        let what = match x.kind {
            "open" => "fails open".to_string(),
            "stuck-closed" => "sticks closed".to_string(),
            _ => format!(
                "loses {} of its capacitance",
                pct(x.fraction.unwrap_or(0.0))
            ),
        };
        let detected =
            match (&x.detected_after_s, &x.detected_at) {
                (Some(s), Some(at)) => format!(
                "would alarm {} after the fault starts ({at}), after {} operation{} of the step",
                duration(*s),
                count(x.operations_until_detection),
                if x.operations_until_detection == 1 { "" } else { "s" }
            ),
                _ => format!(
                    "does not alarm in the run ({} operation{} of the step after the fault)",
                    count(x.operations_until_detection),
                    if x.operations_until_detection == 1 {
                        ""
                    } else {
                        "s"
                    }
                ),
            };
        para(
            t,
            &format!(
                "Step {} {what} from {} ({} fault). {how}, tolerance {} %, {} mismatched \
                 operation{} in a row{} it {detected}.",
                x.step,
                x.from,
                if x.what_if { "what-if" } else { "scenario" },
                num(f.detection_tolerance_pct, 0),
                f.detection_operations,
                if f.detection_operations == 1 { "" } else { "s" },
                if f.detection_configured { ")" } else { "," },
            ),
        );
    }
    if !f.false_alarms.is_empty() {
        let list: Vec<String> = f
            .false_alarms
            .iter()
            .map(|(n, at)| format!("step {n} at {at}"))
            .collect();
        para(
            t,
            &format!(
                "The detection also alarmed on {} without a fault (the load changed in the \
                 interval of an operation) and took {} out of service: on this load, \
                 more mismatched operations in a row or a wider tolerance would be needed.",
                list.join(", "),
                if f.false_alarms.len() == 1 {
                    "that step"
                } else {
                    "those steps"
                }
            ),
        );
    }
}

fn replacements(t: &mut String, p: &WearPlan) {
    sub(t, "Replacement plan");
    if p.replacements.is_empty() {
        para(t, "Nothing falls due within 100 years on these figures.");
        return;
    }
    let seeds = p.replacements.iter().any(|r| r.earliest.is_some());
    let rows: Vec<Vec<String>> = p
        .replacements
        .iter()
        .map(|r| {
            let mut row = vec![
                date_or(&r.date),
                r.step
                    .map(|s| s.to_string())
                    .unwrap_or_else(|| "all".to_string()),
                r.part.to_string(),
                r.reason.clone(),
            ];
            if seeds {
                row.push(match (&r.earliest, &r.latest) {
                    (Some(a), Some(b)) => format!("{a} to {b}"),
                    _ => String::new(),
                });
            }
            row
        })
        .collect();
    let mut headers = vec!["date", "step", "part", "reason"];
    if seeds {
        headers.push("over the seeds");
    }
    table(t, "  ", &headers, "lrlll", &rows);
}

/// The JSON of `bankstep wear`.
#[derive(Debug, Serialize)]
struct WearDocument<'a> {
    tool: Tool,
    provenance: Provenance,
    wear_plan: &'a WearPlan,
}

/// Writes `plan` as the JSON document of `bankstep wear`: `tool`, `provenance`, `wear_plan`.
pub fn write_json(
    out: &mut dyn Write,
    sc: &Scenario,
    profile_sha256: Option<&str>,
    plan: &WearPlan,
) -> Result<(), ReportError> {
    super::write_json(
        out,
        &WearDocument {
            tool: TOOL,
            provenance: Provenance::new(sc, profile_sha256),
            wear_plan: plan,
        },
    )
}

/// Writes the text of `bankstep wear`: a header line and the wear-plan section.
pub fn write_text(
    out: &mut dyn Write,
    sc: &Scenario,
    plan: &WearPlan,
    opts: &PlanOptions,
) -> Result<(), ReportError> {
    let mut t = format!(
        "bankstep {}: wear plan of \"{}\"\n",
        env!("CARGO_PKG_VERSION"),
        sc.name
    );
    if let Some(w) = opts.what_if {
        t.push_str(&format!(
            "What-if: step {} {} from {} into the run.\n",
            w.step,
            crate::analysis::maintenance::fault_kind_name(w.fault.kind),
            duration(w.fault.from_s)
        ));
    }
    section(&mut t, sc, Some(plan));
    out.write_all(t.as_bytes())?;
    out.flush()?;
    Ok(())
}

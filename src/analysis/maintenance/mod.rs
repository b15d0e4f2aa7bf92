//! The wear plan: what the maintenance planner needs of a study, decided once.
//!
//! [`plan`] (or [`plan_from`], which reuses a run already made with a [`WearObserver`])
//! takes a study and:
//!
//! - extrapolates each step's operations to a year by the calendar ([`calendar`]): the
//!   run's operations per weekday, Saturday, Sunday and holiday times the days of each
//!   type in the year after the study date, and walks the calendar from the study date
//!   and the step's counter (`operations_so_far`) to the date its contactor reaches its
//!   rated electrical life;
//! - runs the other step orderings (sequential, rotating, best-fit) on the same prepared
//!   profile and says what each gives (operations a year, the most worn step, the spread
//!   across steps, the first contactor to reach its life, the billed PF);
//! - for a synthetic load, runs a few more seeds (`maintenance.seeds`) and gives each
//!   date's range;
//! - works out the closing inrush of every closing the run made ([`inrush`]) and keeps
//!   the worst per step against 100 × rated current and the contactor's peak rating;
//! - projects the capacitors' ageing ([`ageing`]): a run per year with each step at
//!   (1 + tolerance)·(1 − loss)^age of its capacitance, and the year the billed PF first
//!   falls below target;
//! - for injected faults (the scenario's, or a what-if one), compares the run with a run
//!   without any fault (billed PF, operations of the other steps) and says when the
//!   controller's detection alarms (with the scenario's settings, or the defaults when
//!   the scenario has none);
//! - lists the replacements by date.
//!
//! All extra runs share the study's prepared profile (`Study::with_profile`) and run in
//! parallel with rayon; results are collected in a fixed order, so the plan is the same
//! for any number of threads.

pub mod ageing;
pub mod calendar;
pub mod inrush;
pub mod observer;

pub use observer::{WearLog, WearObserver};

use crate::bank::{Fault, FaultKind};
use crate::controller::{DetectionParams, OrderingKind};
use crate::engine::RunResult;
use crate::error::RunError;
use crate::pf::Quadrant;
use crate::scenario::{LoadSpec, Scenario};
use crate::study::Study;
use calendar::{Borrowing, DayType};
use chrono::{Months, NaiveDate};
use rayon::prelude::*;
use serde::Serialize;

/// Longest a date is looked for, days (100 years).
const MAX_DAYS: u32 = 36_525;

/// A fault to try on one step on top of the scenario's own.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WhatIf {
    /// Step number, from 1.
    pub step: usize,
    /// The fault.
    pub fault: Fault,
}

/// What the plan runs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlanOptions {
    /// A what-if fault, if any.
    pub what_if: Option<WhatIf>,
    /// Run the alternatives (other orderings, seeds, ageing, fault comparison); false
    /// keeps the plan to the study's own run.
    pub alternatives: bool,
}

impl Default for PlanOptions {
    fn default() -> Self {
        PlanOptions {
            what_if: None,
            alternatives: true,
        }
    }
}

/// Operations per day of each day type.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PerDayType {
    /// Monday to Friday.
    pub weekday: f64,
    /// Saturday.
    pub saturday: f64,
    /// Sunday.
    pub sunday: f64,
    /// Holiday.
    pub holiday: f64,
}

impl From<[f64; 4]> for PerDayType {
    fn from(a: [f64; 4]) -> Self {
        PerDayType {
            weekday: a[0],
            saturday: a[1],
            sunday: a[2],
            holiday: a[3],
        }
    }
}

/// A day type that took another's rate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Borrowed {
    /// The type the run did not contain.
    pub day_type: DayType,
    /// The type whose rate it took; `None`: the mean over all days of the run.
    pub from: Option<DayType>,
}

/// The calendar of the extrapolation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CalendarPlan {
    /// Days of each type the run covered.
    pub run_days: PerDayType,
    /// Days of each type in the 365 days from the study date.
    pub year_days: PerDayType,
    /// Day types the run did not contain, and what they took.
    pub borrowed: Vec<Borrowed>,
    /// Holidays were typed in the run (a CSV profile) or not (the generator ignores them).
    pub holidays_in_run: bool,
}

/// One step's wear.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StepPlan {
    /// Step number, from 1.
    pub step: usize,
    /// A fixed step (never operated).
    pub fixed: bool,
    /// Contactor's rated electrical life, operations.
    pub rated_operations: f64,
    /// The counter on the study date.
    pub operations_so_far: f64,
    /// The capacitors' installation date.
    pub installed: String,
    /// Operations in the run.
    pub operations_in_run: u64,
    /// Operations per day of each type.
    pub operations_per_day: PerDayType,
    /// Operations a year by the calendar.
    pub operations_per_year: f64,
    /// Operations a year as the run's daily mean × 365, for comparison.
    pub operations_per_year_flat: f64,
    /// Date the contactor reaches its rated life (null: beyond 100 years or never).
    pub rated_life_date: Option<String>,
    /// Years from the study date to that date.
    pub years_to_rated_life: Option<f64>,
    /// Earliest and latest of that date over the seeds (synthetic load; null for a CSV
    /// profile or when a seed never reaches it).
    pub rated_life_range: Option<[String; 2]>,
    /// Capacitance on the study date by the ageing settings, % of nominal.
    pub capacitance_pct: f64,
    /// Date the capacitance falls to the replacement level (null: no loss set).
    pub capacitor_due: Option<String>,
}

/// What one ordering gives.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OrderingPlan {
    /// Its scenario name.
    pub ordering: &'static str,
    /// The scenario's own ordering.
    pub current: bool,
    /// Billed PF.
    pub billed_pf: f64,
    /// Its quadrant.
    pub billed_pf_quadrant: Quadrant,
    /// Operations a year of all steps, by the calendar.
    pub operations_per_year: f64,
    /// The step with the most operations a year.
    pub most_worn_step: Option<usize>,
    /// Its operations a year.
    pub most_worn_operations_per_year: f64,
    /// Most over fewest operations a year across the switched steps (null when a
    /// switched step never operates).
    pub max_over_min: Option<f64>,
    /// The first contactor to reach its rated life: step and date.
    pub first_rated_life_step: Option<usize>,
    /// Its date.
    pub first_rated_life_date: Option<String>,
}

/// The worst closing of one step.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InrushStep {
    /// Step number, from 1.
    pub step: usize,
    /// Closings in the run.
    pub closings: u64,
    /// Worst peak current, A.
    pub worst_peak_a: f64,
    /// Its frequency, Hz.
    pub worst_frequency_hz: f64,
    /// The steps connected before that closing (`none`: an isolated closing).
    pub worst_with_steps_on: String,
    /// Rated rms current, A.
    pub rated_current_a: f64,
    /// Worst peak over rated current.
    pub peak_multiple: f64,
    /// 100 × rated current, A (IEC 60831-1, from memory).
    pub capacitor_limit_a: f64,
    /// The contactor's stated peak making current, A.
    pub contactor_peak_a: Option<f64>,
    /// Damping resistors, Ω.
    pub damping_ohm: Option<f64>,
    /// Closings above the capacitor limit or the contactor rating.
    pub closings_over_limit: u64,
    /// The worst peak is above 100 × rated current.
    pub over_capacitor_limit: bool,
    /// The worst peak is above the contactor's rating.
    pub over_contactor_rating: bool,
}

/// The inrush of the run's closings.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InrushPlan {
    /// Inductance between steps, µH.
    pub inductance_uh: f64,
    /// Per switched step that closed.
    pub steps: Vec<InrushStep>,
}

/// One year of the ageing projection.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgeYear {
    /// Years after the study date.
    pub year: u32,
    /// Its date.
    pub date: String,
    /// Capacitance the bank delivers at U_n, kvar.
    pub bank_kvar: f64,
    /// Billed PF with the aged steps.
    pub billed_pf: f64,
    /// Its quadrant.
    pub billed_pf_quadrant: Quadrant,
    /// Below the billed goal.
    pub below_target: bool,
}

/// The ageing projection.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgeingPlan {
    /// Capacitance lost per year, %.
    pub loss_pct_per_year: f64,
    /// Capacitance as delivered, % off nominal.
    pub tolerance_pct: f64,
    /// The billed PF the target asks for.
    pub goal: f64,
    /// Billed PF of the scenario's own run, every step at its nominal capacitance.
    pub nominal_billed_pf: f64,
    /// That run misses the goal (so ageing is not what makes the bank miss it).
    pub nominal_below_target: bool,
    /// Year by year.
    pub years: Vec<AgeYear>,
    /// First year below the goal.
    pub first_year_below_target: Option<u32>,
}

/// One injected fault.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FaultInfo {
    /// Step number, from 1.
    pub step: usize,
    /// `open`, `capacitance-loss` or `stuck-closed`.
    pub kind: &'static str,
    /// Capacitance lost, for `capacitance-loss`.
    pub fraction: Option<f64>,
    /// Start, s after the start of the run.
    pub from_s: f64,
    /// Start, date and time.
    pub from: String,
    /// Given on the command line rather than in the scenario.
    pub what_if: bool,
    /// Time from the fault's start to the detection's alarm, s (null: no alarm in the
    /// run).
    pub detected_after_s: Option<f64>,
    /// Date and time of the alarm.
    pub detected_at: Option<String>,
    /// Operations of the step from the fault's start to the alarm (or the end of the
    /// run).
    pub operations_until_detection: u64,
}

/// What the injected faults cost.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FaultPlan {
    /// The scenario has the detection on (else the alarms are those of the default
    /// settings, in a run of their own).
    pub detection_configured: bool,
    /// Detection tolerance, % of the step's kvar.
    pub detection_tolerance_pct: f64,
    /// Mismatched operations before the alarm.
    pub detection_operations: u32,
    /// Billed PF with the faults.
    pub billed_pf_with: f64,
    /// Its quadrant.
    pub billed_pf_with_quadrant: Quadrant,
    /// Billed PF without any fault.
    pub billed_pf_without: f64,
    /// Its quadrant.
    pub billed_pf_without_quadrant: Quadrant,
    /// Operations of the steps without a fault, with the faults.
    pub other_operations_with: u64,
    /// The same without any fault.
    pub other_operations_without: u64,
    /// The faults.
    pub faults: Vec<FaultInfo>,
    /// Alarms of the detection on a step with no fault at that time (a load change in
    /// the interval of an operation): step number and date and time. Each took a healthy
    /// step out of service for the rest of that run.
    pub false_alarms: Vec<(usize, String)>,
}

/// One line of the replacement plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Replacement {
    /// Step number (null: the whole bank).
    pub step: Option<usize>,
    /// What to replace or fit.
    pub part: &'static str,
    /// Why.
    pub reason: String,
    /// Projected date (null: beyond the horizon).
    pub date: Option<String>,
    /// Earliest over the seeds.
    pub earliest: Option<String>,
    /// Latest over the seeds.
    pub latest: Option<String>,
}

/// The wear plan of a study.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WearPlan {
    /// The study date.
    pub as_of: String,
    /// The calendar of the extrapolation.
    pub calendar: CalendarPlan,
    /// Seeds run (synthetic load), the scenario's first.
    pub seeds: Vec<u64>,
    /// Per step.
    pub steps: Vec<StepPlan>,
    /// Every ordering on the same profile (empty without alternatives).
    pub orderings: Vec<OrderingPlan>,
    /// Another ordering that puts the first contactor replacement later without a lower
    /// billed PF (below the goal, or below the scenario's own where that misses it); the
    /// latest such, ties to the fewer operations of the most worn step. `None`: none does.
    pub better_ordering: Option<&'static str>,
    /// Closing inrush.
    pub inrush: InrushPlan,
    /// Ageing projection (null without alternatives).
    pub ageing: Option<AgeingPlan>,
    /// Injected faults (null when there are none).
    pub faults: Option<FaultPlan>,
    /// Replacements by date.
    pub replacements: Vec<Replacement>,
}

/// Runs `study` with a [`WearObserver`] and makes its plan.
pub fn plan(study: &Study, opts: &PlanOptions) -> Result<WearPlan, RunError> {
    let mut obs = WearObserver::new(study);
    let result = study.run(&mut obs)?;
    plan_from(study, &result, obs.log(), opts)
}

/// Makes the plan of `study` from a run of it already made with a [`WearObserver`].
pub fn plan_from(
    study: &Study,
    result: &RunResult,
    log: &WearLog,
    opts: &PlanOptions,
) -> Result<WearPlan, RunError> {
    let sc = &study.scenario;
    let m = &sc.maintenance;
    let as_of = m
        .as_of
        .unwrap_or_else(|| study.plan.calendar.datetime(study.plan.t_first_s).date());
    let how = match &sc.load {
        LoadSpec::Synthetic(cfg) => Borrowing::Shifts(cfg.shifts.days.parse().unwrap_or([true; 7])),
        LoadSpec::Csv { .. } => Borrowing::Profile,
    };
    let holidays_in_run = study.csv().is_some();
    let run_days = run_days(study, holidays_in_run);
    let year_days = calendar::days_of_each_type(as_of, 365, m).map(f64::from);

    // The scenario with the what-if fault.
    let mut faulted = sc.clone();
    if let Some(w) = opts.what_if {
        if let Some(s) = faulted.steps.get_mut(w.step.wrapping_sub(1)) {
            s.fault = Some(w.fault);
        }
    }
    let has_faults = faulted.steps.iter().any(|s| s.fault.is_some());

    // The extra runs, in a fixed order.
    let mut jobs: Vec<Job> = Vec::new();
    if opts.alternatives {
        for k in [
            OrderingKind::Sequential,
            OrderingKind::Rotating,
            OrderingKind::BestFit,
        ] {
            if k != sc.controller.ordering {
                jobs.push(Job::Ordering(k));
            }
        }
        if matches!(sc.load, LoadSpec::Synthetic(_)) {
            for i in 1..m.seeds as u64 {
                jobs.push(Job::Seed(sc.seed.wrapping_add(i)));
            }
        }
        for y in 0..=m.projection_years {
            jobs.push(Job::Age(y));
        }
        if has_faults {
            if opts.what_if.is_some() {
                jobs.push(Job::WithFault);
            }
            jobs.push(Job::NoFault);
            if sc.controller.detection.is_none() {
                jobs.push(Job::Detect);
            }
        }
    }
    let runs: Vec<(Job, RunResult, WearLog)> = jobs
        .into_par_iter()
        .map(|job| {
            let variant = job.scenario(sc, &faulted, as_of);
            let st = Study::with_profile(variant, study.profile.clone())?;
            let mut obs = WearObserver::new(&st);
            let r = st.run(&mut obs)?;
            Ok((job, r, obs.into_log()))
        })
        .collect::<Result<_, RunError>>()?;
    let find = |j: Job| {
        runs.iter()
            .find(|(k, _, _)| *k == j)
            .map(|(_, r, l)| (r, l))
    };

    let day_rates = |log: &WearLog| -> Vec<[f64; 4]> {
        log.ops
            .iter()
            .map(|o| calendar::rates(o.map(|x| x as f64), run_days, how).0)
            .collect()
    };
    let life_dates = |rates: &[[f64; 4]]| -> Vec<Option<NaiveDate>> {
        sc.steps
            .iter()
            .zip(rates)
            .zip(&m.steps)
            .map(|((s, r), rec)| {
                if s.fixed {
                    return None;
                }
                calendar::date_reached(
                    as_of,
                    s.rated_operations - rec.operations_so_far,
                    *r,
                    m,
                    MAX_DAYS,
                )
            })
            .collect()
    };
    let per_year = |r: &[f64; 4]| -> f64 { (0..4).map(|i| r[i] * year_days[i]).sum() };

    // Borrowed day types (the same for every step).
    let (_, from) = calendar::rates([0.0; 4], run_days, how);
    let borrowed: Vec<Borrowed> = DayType::ALL
        .into_iter()
        .filter(|t| run_days[t.index()] <= 1e-9)
        .map(|t| Borrowed {
            day_type: t,
            from: from[t.index()],
        })
        .collect();

    let base_rates = day_rates(log);
    let base_dates = life_dates(&base_rates);
    let mut seeds = vec![sc.seed];
    let mut seed_dates: Vec<Vec<Option<NaiveDate>>> = vec![base_dates.clone()];
    for (job, _, l) in &runs {
        if let Job::Seed(s) = job {
            seeds.push(*s);
            seed_dates.push(life_dates(&day_rates(l)));
        }
    }
    if !matches!(sc.load, LoadSpec::Synthetic(_)) {
        seeds.clear();
    }
    let range_of = |i: usize| -> Option<[NaiveDate; 2]> {
        if seed_dates.len() < 2 {
            return None;
        }
        let all: Option<Vec<NaiveDate>> = seed_dates.iter().map(|d| d[i]).collect();
        let all = all?;
        Some([*all.iter().min()?, *all.iter().max()?])
    };
    let duration_days = result.metrics.run.duration_s / crate::timebase::DAY_S;
    let steps: Vec<StepPlan> = sc
        .steps
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let rec = m.steps[i];
            let installed = rec.installed.unwrap_or(as_of);
            let ops: u64 = log.ops[i].iter().sum();
            let age0 = ageing::years_between(installed, as_of);
            StepPlan {
                step: i + 1,
                fixed: s.fixed,
                rated_operations: s.rated_operations,
                operations_so_far: rec.operations_so_far,
                installed: installed.to_string(),
                operations_in_run: ops,
                operations_per_day: base_rates[i].into(),
                operations_per_year: per_year(&base_rates[i]),
                operations_per_year_flat: if duration_days > 0.0 {
                    ops as f64 / duration_days * 365.0
                } else {
                    0.0
                },
                rated_life_date: base_dates[i].map(|d| d.to_string()),
                years_to_rated_life: base_dates[i].map(|d| (d - as_of).num_days() as f64 / 365.0),
                rated_life_range: if s.fixed {
                    None
                } else {
                    range_of(i).map(|r| r.map(|d| d.to_string()))
                },
                capacitance_pct: 100.0 * ageing::factor(age0, m.loss_per_year, m.tolerance),
                capacitor_due: ageing::due_date(installed, m).map(|d| d.to_string()),
            }
        })
        .collect();

    // Orderings: the scenario's own from the base run, the others from theirs.
    let mut orderings = Vec::new();
    if opts.alternatives {
        for k in [
            OrderingKind::Sequential,
            OrderingKind::Rotating,
            OrderingKind::BestFit,
        ] {
            let (r, l) = if k == sc.controller.ordering {
                (result, log)
            } else {
                match find(Job::Ordering(k)) {
                    Some(x) => x,
                    None => continue,
                }
            };
            let rates = day_rates(l);
            let dates = life_dates(&rates);
            orderings.push(ordering_plan(
                k,
                k == sc.controller.ordering,
                r,
                sc,
                &rates,
                &dates,
                per_year,
            ));
        }
    }

    let better_ordering = better_ordering(
        &orderings,
        super::findings::billed_goal(sc.controller.target),
    );
    let inrush = inrush_plan(sc, log);

    let ageing = opts.alternatives.then(|| {
        let goal = super::findings::billed_goal(sc.controller.target);
        let years: Vec<AgeYear> = (0..=m.projection_years)
            .filter_map(|y| {
                let (r, _) = find(Job::Age(y))?;
                let date = ageing::year_date(as_of, y);
                Some(AgeYear {
                    year: y,
                    date: date.to_string(),
                    bank_kvar: ageing::aged_steps(sc, as_of, y)
                        .iter()
                        .map(|s| s.kvar * s.health(f64::INFINITY))
                        .sum(),
                    billed_pf: r.metrics.pf.energy_pf,
                    billed_pf_quadrant: r.metrics.pf.energy_pf_quadrant,
                    below_target: r.metrics.pf.energy_pf < goal,
                })
            })
            .collect();
        AgeingPlan {
            loss_pct_per_year: m.loss_per_year * 100.0,
            tolerance_pct: m.tolerance * 100.0,
            goal,
            nominal_billed_pf: result.metrics.pf.energy_pf,
            nominal_below_target: result.metrics.pf.energy_pf < goal,
            first_year_below_target: years.iter().find(|y| y.below_target).map(|y| y.year),
            years,
        }
    });

    let faults = if has_faults && opts.alternatives {
        let with = if opts.what_if.is_some() {
            find(Job::WithFault)
        } else {
            Some((result, log))
        };
        let without = find(Job::NoFault);
        let detect = if sc.controller.detection.is_some() {
            with.map(|w| w.1)
        } else {
            find(Job::Detect).map(|d| d.1)
        };
        match (with, without, detect) {
            (Some(w), Some(wo), Some(dl)) => Some(fault_plan(study, &faulted, opts, w, wo.0, dl)),
            _ => None,
        }
    } else {
        None
    };

    let replacements = replacements(
        sc,
        &steps,
        &seed_dates,
        &inrush,
        ageing.as_ref(),
        faults.as_ref(),
        as_of,
    );
    Ok(WearPlan {
        as_of: as_of.to_string(),
        calendar: CalendarPlan {
            run_days: run_days.into(),
            year_days: year_days.into(),
            borrowed,
            holidays_in_run,
        },
        seeds,
        steps,
        orderings,
        better_ordering,
        inrush,
        ageing,
        faults,
        replacements,
    })
}

/// An extra run of the plan.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Job {
    /// Another ordering.
    Ordering(OrderingKind),
    /// Another seed of the synthetic load.
    Seed(u64),
    /// The bank aged to this many years after the study date.
    Age(u32),
    /// With the what-if fault.
    WithFault,
    /// Without any fault.
    NoFault,
    /// With the faults and the default detection.
    Detect,
}

impl Job {
    fn scenario(self, sc: &Scenario, faulted: &Scenario, as_of: NaiveDate) -> Scenario {
        let mut v = sc.clone();
        match self {
            Job::Ordering(k) => v.controller.ordering = k,
            Job::Seed(s) => v.seed = s,
            Job::Age(y) => v.steps = ageing::aged_steps(sc, as_of, y),
            Job::WithFault => v = faulted.clone(),
            Job::NoFault => {
                for s in &mut v.steps {
                    s.fault = None;
                }
            }
            Job::Detect => {
                v = faulted.clone();
                v.controller.detection = Some(DetectionParams::default());
            }
        }
        v
    }
}

/// Days of each type the run covers (fractions of a day count).
fn run_days(study: &Study, holidays: bool) -> [f64; 4] {
    let p = &study.plan;
    let cal = p.calendar;
    let m = &study.scenario.maintenance;
    let mut out = [0.0; 4];
    let (t0, t1) = (p.t_first_s, p.t_first_s + p.duration_s());
    let mut t = t0;
    while t < t1 {
        let day_end = t - cal.second_of_day(t) + crate::timebase::DAY_S;
        let end = day_end.min(t1);
        let ty = DayType::of(cal.datetime(t).date(), m, holidays);
        out[ty.index()] += (end - t) / crate::timebase::DAY_S;
        if end <= t {
            break;
        }
        t = end;
    }
    out
}

fn ordering_plan(
    k: OrderingKind,
    current: bool,
    r: &RunResult,
    sc: &Scenario,
    rates: &[[f64; 4]],
    dates: &[Option<NaiveDate>],
    per_year: impl Fn(&[f64; 4]) -> f64,
) -> OrderingPlan {
    let yearly: Vec<f64> = rates.iter().map(&per_year).collect();
    let switched: Vec<usize> = (0..sc.steps.len())
        .filter(|&i| !sc.steps[i].fixed)
        .collect();
    let most = switched
        .iter()
        .copied()
        .reduce(|a, b| if yearly[b] > yearly[a] { b } else { a });
    let min = switched
        .iter()
        .map(|&i| yearly[i])
        .fold(f64::INFINITY, f64::min);
    let max = switched.iter().map(|&i| yearly[i]).fold(0.0, f64::max);
    let first = (0..dates.len())
        .filter_map(|i| dates[i].map(|d| (d, i)))
        .min();
    OrderingPlan {
        ordering: k.name(),
        current,
        billed_pf: r.metrics.pf.energy_pf,
        billed_pf_quadrant: r.metrics.pf.energy_pf_quadrant,
        operations_per_year: yearly.iter().sum(),
        most_worn_step: most.filter(|&i| yearly[i] > 0.0).map(|i| i + 1),
        most_worn_operations_per_year: max,
        max_over_min: (min > 0.0 && min.is_finite()).then(|| max / min),
        first_rated_life_step: first.map(|(_, i)| i + 1),
        first_rated_life_date: first.map(|(d, _)| d.to_string()),
    }
}

fn better_ordering(list: &[OrderingPlan], goal: f64) -> Option<&'static str> {
    let cur = list.iter().find(|o| o.current)?;
    // A later date is better; no date at all (not within 100 years) is best.
    let key = |o: &OrderingPlan| {
        (
            o.first_rated_life_date.is_none(),
            o.first_rated_life_date.clone(),
        )
    };
    let floor = goal.min(cur.billed_pf) - 1e-3;
    list.iter()
        .filter(|o| !o.current && o.billed_pf >= floor && key(o) > key(cur))
        .max_by(|a, b| {
            key(a).cmp(&key(b)).then(
                b.most_worn_operations_per_year
                    .total_cmp(&a.most_worn_operations_per_year),
            )
        })
        .map(|o| o.ordering)
}

fn inrush_plan(sc: &Scenario, log: &WearLog) -> InrushPlan {
    let m = &sc.maintenance;
    let c = inrush::Circuit {
        u_n_v: sc.supply.nominal_voltage_v,
        f_hz: sc.supply.frequency_hz,
        s_sc_kva: sc.supply.short_circuit_kva(),
        l_between_h: m.inductance_uh * 1e-6,
    };
    let mut out: Vec<InrushStep> = Vec::new();
    for (&(i, bits), &n) in &log.closings {
        let on = crate::bank::BankState::from_bits(bits);
        let rec = m.steps[i];
        let case = inrush::closing(&sc.steps, i, on.iter().map(|s| s - 1), &c, rec.damping_ohm);
        let rated = inrush::rated_current_a(&sc.steps[i], c.u_n_v);
        let cap_limit = inrush::CAPACITOR_PEAK_MULTIPLE * rated;
        let over = case.peak_a > cap_limit || rec.contactor_peak_a.is_some_and(|p| case.peak_a > p);
        let entry = match out.iter_mut().find(|e| e.step == i + 1) {
            Some(e) => e,
            None => {
                out.push(InrushStep {
                    step: i + 1,
                    closings: 0,
                    worst_peak_a: -1.0,
                    worst_frequency_hz: 0.0,
                    worst_with_steps_on: String::new(),
                    rated_current_a: rated,
                    peak_multiple: 0.0,
                    capacitor_limit_a: cap_limit,
                    contactor_peak_a: rec.contactor_peak_a,
                    damping_ohm: rec.damping_ohm,
                    closings_over_limit: 0,
                    over_capacitor_limit: false,
                    over_contactor_rating: false,
                });
                out.last_mut().expect("just pushed")
            }
        };
        entry.closings += n;
        if over {
            entry.closings_over_limit += n;
        }
        if case.peak_a > entry.worst_peak_a {
            entry.worst_peak_a = case.peak_a;
            entry.worst_frequency_hz = case.frequency_hz;
            entry.worst_with_steps_on = on.label();
        }
    }
    for e in &mut out {
        e.peak_multiple = e.worst_peak_a / e.rated_current_a;
        e.over_capacitor_limit = e.worst_peak_a > e.capacitor_limit_a;
        e.over_contactor_rating = e.contactor_peak_a.is_some_and(|p| e.worst_peak_a > p);
    }
    out.sort_by_key(|e| e.step);
    InrushPlan {
        inductance_uh: m.inductance_uh,
        steps: out,
    }
}

fn fault_plan(
    study: &Study,
    faulted: &Scenario,
    opts: &PlanOptions,
    with: (&RunResult, &WearLog),
    without: &RunResult,
    detect: &WearLog,
) -> FaultPlan {
    let sc = &study.scenario;
    let params = sc.controller.detection.unwrap_or_default();
    let cal = study.plan.calendar;
    let t0 = study.plan.t_first_s;
    let healthy: Vec<usize> = (0..faulted.steps.len())
        .filter(|&i| faulted.steps[i].fault.is_none())
        .collect();
    let other = |r: &RunResult| -> u64 {
        r.metrics
            .switching
            .per_step
            .iter()
            .filter(|s| healthy.contains(&(s.step - 1)))
            .map(|s| s.operations)
            .sum()
    };
    let faults = faulted
        .steps
        .iter()
        .enumerate()
        .filter_map(|(i, s)| s.fault.map(|f| (i, f)))
        .map(|(i, f)| {
            let alarm = detect
                .alarms
                .iter()
                .find(|a| a.0 == i + 1 && a.1 >= f.from_s)
                .map(|a| a.1);
            let what_if = opts.what_if.is_some_and(|w| w.step == i + 1);
            FaultInfo {
                step: i + 1,
                kind: fault_kind_name(f.kind),
                fraction: match f.kind {
                    FaultKind::CapacitanceLoss(x) => Some(x),
                    _ => None,
                },
                from_s: f.from_s,
                from: cal
                    .datetime(t0 + f.from_s)
                    .format("%Y-%m-%d %H:%M")
                    .to_string(),
                what_if,
                detected_after_s: alarm.map(|a| a - f.from_s),
                detected_at: alarm
                    .map(|a| cal.datetime(t0 + a).format("%Y-%m-%d %H:%M:%S").to_string()),
                operations_until_detection: detect.ops_after_fault[i],
            }
        })
        .collect();
    FaultPlan {
        detection_configured: sc.controller.detection.is_some(),
        detection_tolerance_pct: params.tolerance * 100.0,
        detection_operations: params.operations,
        billed_pf_with: with.0.metrics.pf.energy_pf,
        billed_pf_with_quadrant: with.0.metrics.pf.energy_pf_quadrant,
        billed_pf_without: without.metrics.pf.energy_pf,
        billed_pf_without_quadrant: without.metrics.pf.energy_pf_quadrant,
        other_operations_with: other(with.0),
        other_operations_without: other(without),
        faults,
        false_alarms: detect
            .alarms
            .iter()
            .filter(|(n, t)| {
                faulted
                    .steps
                    .get(n - 1)
                    .and_then(|s| s.fault)
                    .is_none_or(|f| *t < f.from_s)
            })
            .map(|&(n, t)| {
                (
                    n,
                    cal.datetime(t0 + t).format("%Y-%m-%d %H:%M:%S").to_string(),
                )
            })
            .collect(),
    }
}

/// The scenario name of a fault kind.
pub fn fault_kind_name(k: FaultKind) -> &'static str {
    match k {
        FaultKind::Open => "open",
        FaultKind::CapacitanceLoss(_) => "capacitance-loss",
        FaultKind::StuckClosed => "stuck-closed",
    }
}

fn replacements(
    sc: &Scenario,
    steps: &[StepPlan],
    seed_dates: &[Vec<Option<NaiveDate>>],
    inrush: &InrushPlan,
    ageing: Option<&AgeingPlan>,
    faults: Option<&FaultPlan>,
    as_of: NaiveDate,
) -> Vec<Replacement> {
    let m = &sc.maintenance;
    let mut out = Vec::new();
    let now = Some(as_of.to_string());
    if let Some(f) = faults {
        for x in &f.faults {
            let (part, what) = match x.kind {
                "stuck-closed" => ("contactor", "contacts stuck closed".to_string()),
                "open" => ("step (fuses, capacitors)", "delivers nothing".to_string()),
                _ => (
                    "capacitors",
                    format!(
                        "lost {} of their capacitance",
                        crate::text::pct(x.fraction.unwrap_or(0.0))
                    ),
                ),
            };
            out.push(Replacement {
                step: Some(x.step),
                part,
                reason: format!(
                    "{what} ({} fault from {})",
                    if x.what_if { "what-if" } else { "scenario" },
                    x.from
                ),
                date: Some(x.from.chars().take(10).collect()),
                earliest: None,
                latest: None,
            });
        }
    }
    for e in &inrush.steps {
        if e.over_contactor_rating {
            out.push(Replacement {
                step: Some(e.step),
                part: "contactor (capacitor duty)",
                reason: format!(
                    "closing peak {} A above its rating of {} A",
                    crate::text::num(e.worst_peak_a, 0),
                    crate::text::num(e.contactor_peak_a.unwrap_or(0.0), 0)
                ),
                date: now.clone(),
                earliest: None,
                latest: None,
            });
        } else if e.over_capacitor_limit {
            out.push(Replacement {
                step: Some(e.step),
                part: "inrush damping (resistors or reactor)",
                reason: format!(
                    "closing peak {} A is {} × rated current, above 100 ×",
                    crate::text::num(e.worst_peak_a, 0),
                    crate::text::num(e.peak_multiple, 0)
                ),
                date: now.clone(),
                earliest: None,
                latest: None,
            });
        }
    }
    for (i, s) in steps.iter().enumerate() {
        if s.fixed {
            continue;
        }
        let range: Option<[NaiveDate; 2]> = if seed_dates.len() > 1 {
            let all: Option<Vec<NaiveDate>> = seed_dates.iter().map(|d| d[i]).collect();
            all.and_then(|a| Some([*a.iter().min()?, *a.iter().max()?]))
        } else {
            None
        };
        if s.rated_life_date.is_some() || range.is_some() {
            out.push(Replacement {
                step: Some(s.step),
                part: "contactor",
                reason: format!(
                    "rated life of {} operations at about {} a year",
                    crate::text::count(s.rated_operations.round() as u64),
                    crate::text::count(s.operations_per_year.round() as u64)
                ),
                date: s.rated_life_date.clone(),
                earliest: range.map(|r| r[0].to_string()),
                latest: range.map(|r| r[1].to_string()),
            });
        }
    }
    for s in steps {
        if let Some(d) = &s.capacitor_due {
            out.push(Replacement {
                step: Some(s.step),
                part: "capacitors",
                reason: format!(
                    "capacitance {} below nominal at {} a year",
                    crate::text::pct(m.replace_loss),
                    crate::text::pct(m.loss_per_year)
                ),
                date: Some(d.clone()),
                earliest: None,
                latest: None,
            });
        }
    }
    if let Some(a) = ageing {
        // Only a fall below the goal that ageing brings: a bank short of it even at nominal
        // capacitance needs another remedy, which the findings name.
        if let Some(y) = a
            .years
            .iter()
            .find(|y| y.below_target && !a.nominal_below_target)
        {
            out.push(Replacement {
                step: None,
                part: "capacitors (the bank)",
                reason: format!(
                    "aged bank gives a billed PF of {} {}, below the goal of {}",
                    crate::text::num(y.billed_pf, 3),
                    y.billed_pf_quadrant.word(),
                    crate::text::num(a.goal, 2)
                ),
                date: Some(y.date.clone()),
                earliest: None,
                latest: None,
            });
        }
    }
    // By date (none last), then step.
    out.sort_by(|a, b| {
        (a.date.is_none(), &a.date, a.step.unwrap_or(usize::MAX)).cmp(&(
            b.date.is_none(),
            &b.date,
            b.step.unwrap_or(usize::MAX),
        ))
    });
    out
}

/// The date `years` years after `d` (the last day of February for 29 February).
pub(crate) fn add_years(d: NaiveDate, years: u32) -> NaiveDate {
    d.checked_add_months(Months::new(12 * years)).unwrap_or(d)
}

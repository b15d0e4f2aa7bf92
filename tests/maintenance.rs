//! The wear plan against outside sources and hand-derived cases: closing inrush (IEEE Std
//! C37.012 back-to-back form, the usual isolated-step estimate), step orderings on a load
//! stepping between levels, a failed step and the controller's detection, capacitor
//! ageing, and the calendar extrapolation with a shift pattern and holidays.

use bankstep::analysis::maintenance::{self, inrush, PlanOptions, WearPlan};
use bankstep::bank::StepSpec;
use bankstep::engine::Quiet;
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::path::Path;

/// A study of `toml` in a temporary folder holding `load.csv` with `rows` (time s, three-phase
/// P kW, three-phase Q kvar, shared equally by the phases).
fn csv_study(dir: &Path, toml: &str, rows: &[(f64, f64, f64)]) -> Study {
    let mut csv = String::from("time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n");
    for &(t, p, q) in rows {
        let (p, q) = (p / 3.0, q / 3.0);
        csv.push_str(&format!("{t},{p},{q},{p},{q},{p},{q}\n"));
    }
    std::fs::write(dir.join("load.csv"), csv).unwrap();
    let sc = Scenario::from_str(toml, &dir.join("site.toml")).unwrap();
    Study::prepare(sc).unwrap()
}

/// Levels of Q (kvar) held an hour each, at P = 100 kW, then one more row so the last
/// level lasts its hour.
fn hourly(levels: &[f64]) -> Vec<(f64, f64, f64)> {
    let mut rows: Vec<(f64, f64, f64)> = levels
        .iter()
        .enumerate()
        .map(|(i, &q)| (i as f64 * 3600.0, 100.0, q))
        .collect();
    let last = *levels.last().unwrap();
    rows.push((levels.len() as f64 * 3600.0, 100.0, last));
    rows
}

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

fn circuit(l_uh: f64, s_sc_kva: f64) -> inrush::Circuit {
    inrush::Circuit {
        u_n_v: 400.0,
        f_hz: 50.0,
        s_sc_kva,
        l_between_h: l_uh * 1e-6,
    }
}

// Back-to-back closing, IEEE Std C37.012 form (from memory):
// Î = sqrt(2/3)·U·sqrt(C_eq/L), f = 1/(2π·sqrt(L·C_eq)), C_eq = C1·C2/(C1 + C2).
// Worked by hand for 50 kvar steps at 400 V, 50 Hz and L = 5 µH:
// C = Q/(ω·U²) = 50 000/(314.159·160 000) = 994.72 µF per phase (star equivalent).
// One step on: C_eq = 497.36 µF; sqrt(497.36/5) = 9.9736; Î = 0.816497·400·9.9736 = 3 257 A;
//   f = 1/(2π·sqrt(5e-6·497.36e-6)) = 1/(2π·4.9868e-5) = 3 191 Hz.
// Three steps on: C2 = 2 984.2 µF, C_eq = 994.72·2 984.2/3 978.9 = 746.04 µF;
//   sqrt(746.04/5) = 12.215; Î = 326.60·12.215 = 3 989 A; f = 1/(2π·6.1075e-5) = 2 606 Hz.
#[test]
fn back_to_back_inrush_worked_by_hand() {
    let steps = vec![StepSpec::plain(50.0); 4];
    let c = circuit(5.0, f64::INFINITY);
    let one = inrush::closing(&steps, 1, [0usize].into_iter(), &c, None);
    assert!(rel(one.peak_a, 3257.0) < 1e-3, "{one:?}");
    assert!(rel(one.frequency_hz, 3191.0) < 1e-3, "{one:?}");
    let three = inrush::closing(&steps, 3, [0usize, 1, 2].into_iter(), &c, None);
    assert!(rel(three.peak_a, 3989.0) < 1e-3, "{three:?}");
    assert!(rel(three.frequency_hz, 2606.0) < 1e-3, "{three:?}");
    // The same from the formula's own function.
    let cap = inrush::capacitance_f(50.0, 400.0, 50.0);
    assert!(rel(cap, 994.72e-6) < 1e-4);
    let f = inrush::back_to_back(400.0, cap, 3.0 * cap, 5e-6);
    assert!(rel(f.peak_a, 3989.0) < 1e-3);
    // Rated current 50 000/(sqrt(3)·400) = 72.17 A: 3 989 A is 55 × I_N, inside the
    // 100 × of IEC 60831-1 (from memory).
    let i_n = inrush::rated_current_a(&steps[0], 400.0);
    assert!(rel(i_n, 72.17) < 1e-3);
    assert!(three.peak_a < inrush::CAPACITOR_PEAK_MULTIPLE * i_n);
}

// Isolated step from the supply (common practice, from memory): Î ≈ sqrt(2)·I_N·sqrt(S_sc/Q),
// f = f1·sqrt(S_sc/Q). By hand: 1000 kVA at u_k 6 % on an infinite grid gives
// S_sc = 16 667 kVA; Q = 50 kvar, I_N = 72.17 A, sqrt(16 667/50) = 18.257;
// Î = 1.41421·72.17·18.257 = 1 863 A; f = 50·18.257 = 913 Hz.
#[test]
fn isolated_step_inrush_worked_by_hand() {
    let steps = vec![StepSpec::plain(50.0)];
    let case = inrush::closing(&steps, 0, std::iter::empty(), &circuit(5.0, 16_666.7), None);
    assert!(rel(case.peak_a, 1863.0) < 1e-3, "{case:?}");
    assert!(rel(case.frequency_hz, 913.0) < 1e-3, "{case:?}");
}

// A detuned step's reactor limits its own inrush: 7 % on a 50 kvar step is
// L_r = p/(ω²·C) = 0.07/(98 696·994.72e-6) = 713 µH, so against one plain step on
// through 5 µH the loop holds 718 µH: Î = 326.60·sqrt(497.36/718) = 272 A (hand arithmetic).
#[test]
fn detuned_step_inrush_is_limited_by_its_reactor() {
    let mut detuned = StepSpec::plain(50.0);
    detuned.detuning = Some(0.07);
    let steps = vec![StepSpec::plain(50.0), detuned];
    let case = inrush::closing(
        &steps,
        1,
        [0usize].into_iter(),
        &circuit(5.0, f64::INFINITY),
        None,
    );
    assert!(rel(case.peak_a, 272.0) < 5e-3, "{case:?}");
}

const LEVELS_BANK: &str = r#"
[[steps]]
kvar = 50
count = 4
[controller]
target_pf = 1.0
switching_delay_s = 30
discharge_time_s = 60
ordering = "sequential"
[load]
csv = "load.csv"
[run]
start = "2026-01-05T00:00:00"
[maintenance]
projection_years = 0
"#;

// A load stepping between levels, worked by hand (target 1.0, so the demand is Q; dead
// band 0.65 × 50 = 32.5 kvar): Q cycles 50, 0, 100, 0 kvar, an hour each, four times.
// Sequential closes the lowest free step and opens the highest: a cycle is close 1, open
// 1, close 1 and 2, open 2 and 1, so step 1 makes 4 operations a cycle, step 2 makes 2,
// steps 3 and 4 none (16, 8, 0, 0 in the run). Rotating closes the step off longest and
// opens the step on longest, so its 3 closings a cycle go round the four steps in turn:
// over four cycles each step closes 3 times and opens 3 times, a max/min ratio of
// exactly 1 (common practice: rotation evens the wear of equal steps).
#[test]
fn rotating_spreads_wear_and_sequential_loads_the_first_step() {
    let dir = tempfile::tempdir().unwrap();
    let levels: Vec<f64> = [50.0, 0.0, 100.0, 0.0].repeat(4);
    let st = csv_study(dir.path(), LEVELS_BANK, &hourly(&levels));
    let plan: WearPlan = maintenance::plan(&st, &PlanOptions::default()).unwrap();
    let ops: Vec<u64> = plan.steps.iter().map(|s| s.operations_in_run).collect();
    assert_eq!(ops, vec![16, 8, 0, 0]);
    let seq = plan
        .orderings
        .iter()
        .find(|o| o.ordering == "sequential")
        .unwrap();
    assert!(seq.current);
    assert_eq!(seq.most_worn_step, Some(1));
    assert_eq!(seq.max_over_min, None, "steps 3 and 4 never operate");
    // Step 1 carries 16 of the 24 operations.
    assert!(
        rel(
            seq.most_worn_operations_per_year / seq.operations_per_year,
            16.0 / 24.0
        ) < 1e-12
    );
    let rot = plan
        .orderings
        .iter()
        .find(|o| o.ordering == "rotating")
        .unwrap();
    assert!((rot.max_over_min.unwrap() - 1.0).abs() < 1e-12, "{rot:?}");
    assert!(rel(rot.operations_per_year, seq.operations_per_year) < 1e-12);
    // The same billed PF: the steps are equal, only which one switches changes.
    assert!((rot.billed_pf - seq.billed_pf).abs() < 1e-12);
    // Rotating puts the first contactor replacement later (step 1 wears at 16 against 6
    // operations in the run), at no cost in PF, so the plan names a better ordering.
    assert!(
        rot.first_rated_life_date > seq.first_rated_life_date,
        "{rot:?} {seq:?}"
    );
    assert!(plan.better_ordering.is_some_and(|o| o != "sequential"));
}

const FAILED_BANK: &str = r#"
[[steps]]
kvar = 50
count = 4
[steps.fault]
kind = "open"
[controller]
target_pf = 1.0
switching_delay_s = 30
discharge_time_s = 60
ordering = "rotating"
[controller.detection]
tolerance_pct = 50
operations = 2
[load]
csv = "load.csv"
[run]
start = "2026-01-05T00:00:00"
[maintenance]
projection_years = 0
"#;

// Step 1 fails open from the start (the `[steps.fault]` table applies to the four steps of
// the table, so the test gives it to step 1 alone below). Q is 200 kvar for an hour, then
// 0, four times, at P = 100 kW. By hand: rotating closes 1, 2, 3, 4 at 30, 60, 90 and 120 s;
// step 1's closing changes the measured Q by 0 instead of −50 kvar (mismatch 1). At
// 3600 s the measured Q is −150 kvar and the controller opens the step on longest, step 1,
// at 3630 s: again no change instead of +50 kvar, the second mismatch in a row, so the
// check in the next interval alarms (run time 3631 s) after 2 operations of the step, as
// the setting states. From then on the bank works with steps 2 to 4, as a bank without
// step 1 would; only the first hour differs (steps close 30 s later), so the PF lost to
// the fault matches the PF lost by removing the step to within a few per cent.
#[test]
fn a_failed_step_is_detected_and_costs_what_removing_it_costs() {
    let dir = tempfile::tempdir().unwrap();
    let levels: Vec<f64> = [200.0, 0.0].repeat(4);
    let rows = hourly(&levels);
    // The fault on step 1 only: step 1 a table of its own.
    let one_faulty = FAILED_BANK.replace(
        "[[steps]]\nkvar = 50\ncount = 4\n[steps.fault]\nkind = \"open\"\n",
        "[[steps]]\nkvar = 50\n[steps.fault]\nkind = \"open\"\n[[steps]]\nkvar = 50\ncount = 3\n",
    );
    assert_ne!(one_faulty, FAILED_BANK);
    let st = csv_study(dir.path(), &one_faulty, &rows);
    let plan = maintenance::plan(&st, &PlanOptions::default()).unwrap();
    let f = plan.faults.as_ref().expect("a fault plan");
    assert!(f.detection_configured);
    let x = &f.faults[0];
    assert_eq!(x.step, 1);
    assert_eq!(x.operations_until_detection, 2);
    assert_eq!(x.detected_after_s, Some(3631.0));
    assert!(f.false_alarms.is_empty(), "{:?}", f.false_alarms);

    // The same bank without step 1.
    let removed_text =
        FAILED_BANK.replace("count = 4\n[steps.fault]\nkind = \"open\"\n", "count = 3\n");
    let removed = csv_study(dir.path(), &removed_text, &rows);
    let r = removed.run(&mut Quiet).unwrap();
    let pf_removed = r.metrics.pf.energy_pf;
    let loss_fault = f.billed_pf_without - f.billed_pf_with;
    let loss_removed = f.billed_pf_without - pf_removed;
    assert!(
        loss_removed > 0.005,
        "removing a step must cost PF here: {loss_removed}"
    );
    assert!(
        (loss_fault - loss_removed).abs() < 0.05 * loss_removed,
        "fault {loss_fault}, removed {loss_removed}"
    );
}

// Ageing (arithmetic): a capacitor losing x = 2 % of its capacitance a year delivers
// (1 − x)^n of its kvar after n years at constant voltage (Q = ω·C·U²). One fixed 100 kvar
// step on a stiff supply (constant voltage), installed on the study date, under a steady
// 100 kW, 150 kvar load: the supply carries Q_n = 150 − 100·0.98^n kvar, so the billed PF of
// year n is 100/sqrt(100² + Q_n²). Year 5: 0.98^5 = 0.903921, Q = 59.608 kvar, PF = 0.85898.
#[test]
fn ageing_delivers_one_minus_x_to_the_n() {
    let dir = tempfile::tempdir().unwrap();
    let toml = r#"
[[steps]]
kvar = 100
fixed = true
[controller]
target_pf = "0.95 lag"
[load]
csv = "load.csv"
[run]
start = "2026-01-05T00:00:00"
[maintenance]
as_of = "2026-01-05"
capacitance_loss_pct_per_year = 2
projection_years = 5
"#;
    let st = csv_study(
        dir.path(),
        toml,
        &[(0.0, 100.0, 150.0), (3600.0, 100.0, 150.0)],
    );
    let plan = maintenance::plan(&st, &PlanOptions::default()).unwrap();
    let a = plan.ageing.as_ref().unwrap();
    assert_eq!(a.years.len(), 6);
    for y in &a.years {
        let share = 0.98f64.powi(y.year as i32);
        assert!(rel(y.bank_kvar, 100.0 * share) < 1e-12, "{y:?}");
        let q = 150.0 - 100.0 * share;
        let pf = 100.0 / (100.0f64 * 100.0 + q * q).sqrt();
        assert!((y.billed_pf - pf).abs() < 1e-9, "{y:?} against {pf}");
    }
    assert!((a.years[5].billed_pf - 0.85898).abs() < 1e-5);
    // 0.95 lag is met while Q ≤ 100·tan(acos 0.95) = 32.87 kvar: never here (Q_0 = 50).
    assert_eq!(a.first_year_below_target, Some(0));
}

// The calendar with a shift pattern: machines cycling every 10 min during a 06:00-14:00
// shift on Monday to Friday make the steps switch on working days only (the base load is
// the same at all hours and days, so the weekend is steady). A week from Monday
// 2026-01-05: all operations fall on the five weekdays. The year from the study date has
// 261 weekdays (52 weeks and a Monday, counted on a calendar), less 5 holidays on
// weekdays (Good Friday 2026-04-03, Easter Monday 2026-04-06, 1 May, 25 December, all on
// weekdays in 2026, and 1 January 2027, a Friday): 256. Holidays are rest days in the
// pattern and the run's Sundays had no operations, so they add none. Yearly operations
// = ops/5 × 256, while day × 365 gives ops/7 × 365: a ratio of 51.2/52.142857 = 0.98192.
#[test]
fn shift_calendar_differs_from_day_times_365_by_the_weekday_share() {
    let toml = r#"
[[steps]]
kvar = 20
count = 4
[controller]
switching_delay_s = 10
discharge_time_s = 60
[load.synthetic]
[load.synthetic.base]
kw = 60
pf = 0.9
[load.synthetic.shifts]
days = "mon-fri"
hours = ["06:00-14:00"]
[[load.synthetic.machines]]
units = 1
kw = 60
pf = 0.7
runs = "shifts"
cycle = "fixed"
on_s = 600
off_s = 600
[run]
duration_days = 7
time_step_s = 5
start = "2026-01-05T00:00:00"
[maintenance]
holidays = ["2026-04-03", "2026-04-06", "05-01", "12-25", "01-01"]
projection_years = 0
seeds = 1
"#;
    let sc = Scenario::from_str(toml, Path::new("site.toml")).unwrap();
    let st = Study::prepare(sc).unwrap();
    let plan = maintenance::plan(
        &st,
        &PlanOptions {
            alternatives: false,
            ..PlanOptions::default()
        },
    )
    .unwrap();
    assert_eq!(plan.calendar.year_days.weekday, 256.0);
    assert_eq!(plan.calendar.year_days.holiday, 5.0);
    let busy = plan.steps.iter().find(|s| s.operations_in_run > 0).unwrap();
    let n = busy.operations_in_run as f64;
    assert_eq!(busy.operations_per_day.saturday, 0.0);
    assert_eq!(busy.operations_per_day.sunday, 0.0);
    assert_eq!(busy.operations_per_day.holiday, 0.0);
    assert!(rel(busy.operations_per_year, n / 5.0 * 256.0) < 1e-12);
    assert!(rel(busy.operations_per_year_flat, n / 7.0 * 365.0) < 1e-12);
    assert!((busy.operations_per_year / busy.operations_per_year_flat - 0.98192).abs() < 1e-5);
}

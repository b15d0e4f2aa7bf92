//! Capacitor ageing: the capacitance a step has left after some years, and the bank of a
//! projection year.
//!
//! A capacitor delivered at (1 + t) of its nominal capacitance (t the manufacturing
//! tolerance, `maintenance.capacitance_tolerance_pct`) that loses a fraction x of its
//! capacitance a year (`capacitance_loss_pct_per_year`) has (1 + t)·(1 − x)^a of it after a
//! years, and at a constant voltage delivers that share of its kvar (Q = ω·C·U²). Age is
//! counted from each step's `installed` date (the study date when none is given); a
//! projection year n is the study date plus n calendar years.
//!
//! In a projection run an aged step is a capacitance loss from the start of the run, on
//! top of a capacitance-loss fault the scenario already gives it; the controller still
//! knows only the nominal kvar. A step that fails open or is stuck closed keeps its fault.

use super::add_years;
use crate::bank::{Fault, FaultKind, StepSpec};
use crate::scenario::{Maintenance, Scenario};
use chrono::NaiveDate;

/// Days in a year of ageing (the mean calendar year).
const DAYS_PER_YEAR: f64 = 365.25;

/// Share of nominal capacitance after `age_years` (negative ages count as 0).
pub fn factor(age_years: f64, loss_per_year: f64, tolerance: f64) -> f64 {
    (1.0 + tolerance) * (1.0 - loss_per_year).powf(age_years.max(0.0))
}

/// Years from `from` to `to` (negative when `to` is earlier).
pub fn years_between(from: NaiveDate, to: NaiveDate) -> f64 {
    (to - from).num_days() as f64 / DAYS_PER_YEAR
}

/// The date of projection year `n`: the study date plus n calendar years.
pub fn year_date(as_of: NaiveDate, n: u32) -> NaiveDate {
    add_years(as_of, n)
}

/// The date a capacitor installed on `installed` falls to the replacement level
/// (1 − `replace_loss` of nominal): age a = ln((1 − L)/(1 + t))/ln(1 − x). `None` with no
/// loss set.
pub fn due_date(installed: NaiveDate, m: &Maintenance) -> Option<NaiveDate> {
    if m.loss_per_year <= 0.0 {
        return None;
    }
    let a = ((1.0 - m.replace_loss) / (1.0 + m.tolerance)).ln() / (1.0 - m.loss_per_year).ln();
    let days = (a.max(0.0) * DAYS_PER_YEAR).round();
    if days > 1e6 {
        return None;
    }
    installed.checked_add_signed(chrono::TimeDelta::days(days as i64))
}

/// The steps of `sc` aged to projection year `n` after `as_of`.
pub fn aged_steps(sc: &Scenario, as_of: NaiveDate, n: u32) -> Vec<StepSpec> {
    let m = &sc.maintenance;
    sc.steps
        .iter()
        .zip(&m.steps)
        .map(|(s, rec)| {
            let installed = rec.installed.unwrap_or(as_of);
            let age = f64::from(n) + years_between(installed, as_of);
            let f = factor(age, m.loss_per_year, m.tolerance);
            let mut s = s.clone();
            let kind = match s.fault.map(|x| x.kind) {
                None => Some(FaultKind::CapacitanceLoss(1.0 - f)),
                Some(FaultKind::CapacitanceLoss(x)) => {
                    Some(FaultKind::CapacitanceLoss(1.0 - (1.0 - x) * f))
                }
                Some(_) => None,
            };
            if let Some(kind) = kind {
                let from_s = s.fault.map_or(0.0, |x| x.from_s);
                // A capacitance-loss fault that starts later keeps its start; ageing
                // alone acts from the start of the run.
                if s.fault.is_none() && f == 1.0 {
                    return s;
                }
                s.fault = Some(Fault { kind, from_s });
            }
            s
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    // (1 − 0.02)^5 = 0.9039207968 (arithmetic); a 5 % low tolerance multiplies by 0.95.
    #[test]
    fn factor_compounds_yearly() {
        assert!((factor(5.0, 0.02, 0.0) - 0.903_920_796_8).abs() < 1e-9);
        assert!((factor(5.0, 0.02, -0.05) - 0.95 * 0.903_920_796_8).abs() < 1e-9);
        assert_eq!(factor(-3.0, 0.02, 0.0), 1.0);
    }

    // 10 % lost at 1 % a year: a = ln 0.9 / ln 0.99 = 10.483 years = 3829 days after
    // installation (arithmetic).
    #[test]
    fn due_date_by_the_loss_rate() {
        let m = Maintenance {
            as_of: None,
            holidays: vec![],
            loss_per_year: 0.01,
            tolerance: 0.0,
            replace_loss: 0.1,
            projection_years: 0,
            seeds: 1,
            inductance_uh: 5.0,
            steps: vec![],
        };
        let d0 = NaiveDate::from_ymd_opt(2020, 1, 1).unwrap();
        let due = due_date(d0, &m).unwrap();
        assert_eq!((due - d0).num_days(), 3829);
    }
}

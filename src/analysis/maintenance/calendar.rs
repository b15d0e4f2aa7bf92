//! Day types and the calendar extrapolation of operations.
//!
//! Every day is a weekday (Monday to Friday), a Saturday, a Sunday or a holiday (a date
//! of `maintenance.holidays`, whatever its weekday). A run's operations are counted per
//! day type and divided by the days of that type the run covered (fractions of a day
//! count), giving operations per day of each type; a year is then the sum over the types
//! of that rate times the days of the type in the year (the 365 days from the study
//! date, holidays counted from the list).
//!
//! In the run itself, a CSV profile's days take their type from the profile's own dates,
//! holidays included. The synthetic generator does not know holidays (it follows its
//! shift pattern), so its days are typed by weekday alone.
//!
//! A day type the run does not contain (a run shorter than a week, or a run with no
//! holiday) borrows the rate of one it does contain:
//!
//! - for a synthetic load, a type whose days are working days in the shift pattern
//!   borrows from an observed type of working days, and a type of rest days from an
//!   observed type of rest days (Sunday first, then Saturday, then holidays, then
//!   weekdays). Holidays count as rest days unless the pattern works every day of the
//!   week;
//! - for a CSV profile, Saturday, Sunday and holiday borrow from each other (Sunday for a
//!   holiday, then Saturday);
//! - failing that, the type takes the mean rate over all the days of the run (so a run of
//!   weekdays alone extrapolates every day as a weekday, which overstates a plant that
//!   rests at weekends; the plan lists every borrowed type).

use crate::scenario::Maintenance;
use chrono::{Datelike, NaiveDate, Weekday};
use serde::Serialize;

/// A kind of day.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DayType {
    /// Monday to Friday, not a holiday.
    Weekday,
    /// Saturday, not a holiday.
    Saturday,
    /// Sunday, not a holiday.
    Sunday,
    /// A date of the holiday list.
    Holiday,
}

impl DayType {
    /// All types, in index order.
    pub const ALL: [DayType; 4] = [
        DayType::Weekday,
        DayType::Saturday,
        DayType::Sunday,
        DayType::Holiday,
    ];

    /// Index 0 to 3.
    pub fn index(self) -> usize {
        self as usize
    }

    /// The type's name in reports.
    pub fn name(self) -> &'static str {
        match self {
            DayType::Weekday => "weekday",
            DayType::Saturday => "Saturday",
            DayType::Sunday => "Sunday",
            DayType::Holiday => "holiday",
        }
    }

    /// The type of a date; holidays are looked up in `m` when `holidays` is true.
    pub fn of(date: NaiveDate, m: &Maintenance, holidays: bool) -> DayType {
        if holidays && m.is_holiday(date) {
            return DayType::Holiday;
        }
        match date.weekday() {
            Weekday::Sat => DayType::Saturday,
            Weekday::Sun => DayType::Sunday,
            _ => DayType::Weekday,
        }
    }
}

/// Days of each type in the `days` days from `from` (that day included).
pub fn days_of_each_type(from: NaiveDate, days: u32, m: &Maintenance) -> [u32; 4] {
    let mut n = [0; 4];
    let mut d = from;
    for _ in 0..days {
        n[DayType::of(d, m, true).index()] += 1;
        d = d.succ_opt().unwrap_or(d);
    }
    n
}

/// What a day type is, for borrowing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Borrowing {
    /// A CSV profile: Saturday, Sunday and holiday borrow from each other.
    Profile,
    /// A synthetic load with these working days (Monday first).
    Shifts([bool; 7]),
}

/// Operations per day of each type, from the operations counted per type and the days of
/// each type covered, with the types that had to borrow: `(rates, borrowed_from)`, where
/// `borrowed_from[t]` is the type whose rate type `t` took (`None`: its own, or the mean of
/// the run when no type fits, see [`mean_rate`]).
pub fn rates(ops: [f64; 4], days: [f64; 4], how: Borrowing) -> ([f64; 4], [Option<DayType>; 4]) {
    let seen = |t: DayType| days[t.index()] > 1e-9;
    let own = |t: DayType| ops[t.index()] / days[t.index()];
    let mut out = [0.0; 4];
    let mut from = [None; 4];
    for t in DayType::ALL {
        if seen(t) {
            out[t.index()] = own(t);
            continue;
        }
        let candidates: Vec<DayType> = match how {
            Borrowing::Profile => match t {
                DayType::Weekday => vec![],
                DayType::Saturday => vec![DayType::Sunday, DayType::Holiday],
                DayType::Sunday => vec![DayType::Holiday, DayType::Saturday],
                DayType::Holiday => vec![DayType::Sunday, DayType::Saturday],
            },
            Borrowing::Shifts(work) => {
                let working = |t: DayType| match t {
                    DayType::Weekday => work[..5].iter().any(|&w| w),
                    DayType::Saturday => work[5],
                    DayType::Sunday => work[6],
                    DayType::Holiday => work.iter().all(|&w| w),
                };
                let order = if working(t) {
                    [
                        DayType::Weekday,
                        DayType::Saturday,
                        DayType::Sunday,
                        DayType::Holiday,
                    ]
                } else {
                    [
                        DayType::Sunday,
                        DayType::Saturday,
                        DayType::Holiday,
                        DayType::Weekday,
                    ]
                };
                order
                    .into_iter()
                    .filter(|&c| c != t && working(c) == working(t))
                    .collect()
            }
        };
        match candidates.into_iter().find(|&c| seen(c)) {
            Some(c) => {
                out[t.index()] = own(c);
                from[t.index()] = Some(c);
            }
            None => out[t.index()] = mean_rate(ops, days),
        }
    }
    (out, from)
}

/// Operations per day over all the days of the run.
pub fn mean_rate(ops: [f64; 4], days: [f64; 4]) -> f64 {
    let d: f64 = days.iter().sum();
    if d > 0.0 {
        ops.iter().sum::<f64>() / d
    } else {
        0.0
    }
}

/// The first date on which `remaining` operations have been made at `rate[type]` per day,
/// walking the calendar day by day from `from`; `None` when that takes more than
/// `max_days` (or never happens). A counter already at or past its end gives `from`.
pub fn date_reached(
    from: NaiveDate,
    remaining: f64,
    rate: [f64; 4],
    m: &Maintenance,
    max_days: u32,
) -> Option<NaiveDate> {
    if remaining <= 0.0 {
        return Some(from);
    }
    if rate.iter().all(|&r| r <= 0.0) {
        return None;
    }
    let mut left = remaining;
    let mut d = from;
    for _ in 0..max_days {
        left -= rate[DayType::of(d, m, true).index()];
        if left <= 0.0 {
            return Some(d);
        }
        d = d.succ_opt()?;
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::maintenance::Holiday;

    fn maint(holidays: Vec<Holiday>) -> Maintenance {
        Maintenance {
            as_of: None,
            holidays,
            loss_per_year: 0.0,
            tolerance: 0.0,
            replace_loss: 0.1,
            projection_years: 0,
            seeds: 1,
            inductance_uh: 5.0,
            steps: vec![],
        }
    }

    // 365 days from Monday 2026-01-05 are 52 whole weeks (to Sunday 2027-01-03) and
    // Monday 2027-01-04: 261 weekdays, 52 Saturdays, 52 Sundays (counted on a calendar).
    // Two holidays, 25 December (a Friday in 2026) and 1 January (a Friday in 2027), take
    // two weekdays.
    #[test]
    fn a_year_of_day_types_counted_by_hand() {
        let from = NaiveDate::from_ymd_opt(2026, 1, 5).unwrap();
        assert_eq!(
            days_of_each_type(from, 365, &maint(vec![])),
            [261, 52, 52, 0]
        );
        let m = maint(vec![
            Holiday::Yearly { month: 12, day: 25 },
            Holiday::Yearly { month: 1, day: 1 },
        ]);
        assert_eq!(days_of_each_type(from, 365, &m), [259, 52, 52, 2]);
    }

    // A run of Monday to Wednesday with a mon-fri pattern: Saturday and Sunday are rest
    // days with no rest day seen, so they take the run's mean; with a Sunday seen, the
    // Saturday and the holidays borrow from it.
    #[test]
    fn missing_types_borrow_by_the_shift_pattern() {
        let work = [true, true, true, true, true, false, false];
        let (r, from) = rates(
            [30.0, 0.0, 0.0, 0.0],
            [3.0, 0.0, 0.0, 0.0],
            Borrowing::Shifts(work),
        );
        assert_eq!(r, [10.0, 10.0, 10.0, 10.0]);
        assert_eq!(from, [None; 4]);
        let (r, from) = rates(
            [50.0, 0.0, 2.0, 0.0],
            [5.0, 0.0, 1.0, 0.0],
            Borrowing::Shifts(work),
        );
        assert_eq!(r, [10.0, 2.0, 2.0, 2.0]);
        assert_eq!(from[1], Some(DayType::Sunday));
        assert_eq!(from[3], Some(DayType::Sunday));
    }

    #[test]
    fn life_date_walks_the_calendar() {
        // 10 operations a weekday, none at weekends, 25 left from Friday 2026-01-09:
        // Fri 10 (15 left), Mon 12th 10 (5 left), Tue 13th reaches it.
        let from = NaiveDate::from_ymd_opt(2026, 1, 9).unwrap();
        let d = date_reached(from, 25.0, [10.0, 0.0, 0.0, 0.0], &maint(vec![]), 1000);
        assert_eq!(d, NaiveDate::from_ymd_opt(2026, 1, 13));
        assert_eq!(
            date_reached(from, 0.0, [0.0; 4], &maint(vec![]), 10),
            Some(from)
        );
        assert_eq!(date_reached(from, 1.0, [0.0; 4], &maint(vec![]), 10), None);
    }
}

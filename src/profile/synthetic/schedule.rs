//! Weekly schedules as step functions of the time of day, looked up only when a boundary
//! is crossed.
//!
//! A [`WeekTable`] holds, for each weekday, the day as segments `[start, next start)` in
//! seconds of the day, each with a small state number (0/1 for a gate, or a base-load
//! level). A [`Clock`] keeps the state in force and the run time of its next change, so
//! that the per-sample loop only compares two numbers.

use crate::timebase::{Calendar, DAY_S};

/// Times within this many seconds before a boundary count as past it, so that rounding
/// in epoch arithmetic can never leave a boundary unreached.
const EDGE_TOL_S: f64 = 1e-5;

/// A step function of (weekday, second of day) with small integer states.
#[derive(Debug, Clone)]
pub(crate) struct WeekTable {
    /// Per weekday (Monday = 0), segments (start second, state), sorted, the first at 0,
    /// neighbours always in different states.
    days: [Vec<(f64, u8)>; 7],
    /// The state when it is the same all week, for a clock that never has to look.
    constant: Option<u8>,
}

/// Merges and sorts half-open intervals in place.
fn merge(v: &mut Vec<(f64, f64)>) {
    v.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(v.len());
    for &(a, b) in v.iter() {
        match out.last_mut() {
            Some(last) if a <= last.1 => last.1 = last.1.max(b),
            _ => out.push((a, b)),
        }
    }
    *v = out;
}

/// The on-intervals of each weekday for daily windows on the given days. A window whose
/// end is at or before its start runs past midnight into the next day.
pub(crate) fn week_intervals(days: &[bool; 7], windows: &[(f64, f64)]) -> [Vec<(f64, f64)>; 7] {
    let mut on: [Vec<(f64, f64)>; 7] = Default::default();
    for (d, _) in days.iter().enumerate().filter(|(_, w)| **w) {
        for &(a, b) in windows {
            if b > a {
                on[d].push((a, b.min(DAY_S)));
            } else {
                on[d].push((a, DAY_S));
                if b > 0.0 {
                    on[(d + 1) % 7].push((0.0, b));
                }
            }
        }
    }
    for v in on.iter_mut() {
        merge(v);
    }
    on
}

impl WeekTable {
    /// Builds a table from per-day segments that must start at 0 and be sorted; equal
    /// neighbours are merged.
    fn from_segments(raw: [Vec<(f64, u8)>; 7]) -> Self {
        let mut days: [Vec<(f64, u8)>; 7] = Default::default();
        for (d, segs) in raw.into_iter().enumerate() {
            for (s, st) in segs {
                // A later segment at the same start replaces the earlier one.
                if days[d].last().is_some_and(|&(ls, _)| ls == s) {
                    days[d].pop();
                }
                if days[d].last().map(|x| x.1) != Some(st) {
                    days[d].push((s, st));
                }
            }
            if days[d].is_empty() {
                days[d].push((0.0, 0));
            }
        }
        let first = days[0][0].1;
        let constant = days
            .iter()
            .all(|d| d.len() == 1 && d[0].1 == first)
            .then_some(first);
        WeekTable { days, constant }
    }

    /// A table that is always in one state.
    pub(crate) fn constant(state: u8) -> Self {
        Self::from_segments(std::array::from_fn(|_| vec![(0.0, state)]))
    }

    /// A table with state `inside` on the given intervals and, elsewhere, the state
    /// `outside[weekday]`.
    pub(crate) fn from_intervals(on: &[Vec<(f64, f64)>; 7], inside: u8, outside: [u8; 7]) -> Self {
        let raw = std::array::from_fn(|d| {
            let mut segs = vec![(0.0, outside[d])];
            for &(a, b) in &on[d] {
                segs.push((a, inside));
                if b < DAY_S {
                    segs.push((b, outside[d]));
                }
            }
            segs
        });
        Self::from_segments(raw)
    }

    /// A gate: 1 inside the intervals, 0 elsewhere.
    pub(crate) fn gate(on: &[Vec<(f64, f64)>; 7]) -> Self {
        Self::from_intervals(on, 1, [0; 7])
    }

    /// The state at run time `t` and the run time of the next change, always later than
    /// `t` (infinite for a constant table). A change at midnight may lead to the same state.
    pub(crate) fn locate(&self, cal: &Calendar, t: f64) -> (u8, f64) {
        if let Some(s) = self.constant {
            return (s, f64::INFINITY);
        }
        let e = cal.epoch(t) + EDGE_TOL_S;
        let day = (e / DAY_S).floor();
        let sod = e - day * DAY_S;
        let weekday = (day as i64 + 3).rem_euclid(7) as usize;
        let segs = &self.days[weekday];
        let i = segs.partition_point(|&(s, _)| s <= sod).max(1) - 1;
        let state = segs[i].1;
        let next_sod = segs.get(i + 1).map_or(DAY_S, |&(s, _)| s);
        let day_start = day * DAY_S - cal.offset_s;
        let next = (day_start + next_sod).max(t + EDGE_TOL_S);
        (state, next)
    }
}

/// A [`WeekTable`] with its current state cached until the next change.
#[derive(Debug, Clone)]
pub(crate) struct Clock {
    table: WeekTable,
    /// State in force.
    pub(crate) state: u8,
    /// Run time at which the state may change next.
    pub(crate) next: f64,
}

impl Clock {
    /// A clock set to run time `t`.
    pub(crate) fn new(table: WeekTable, cal: &Calendar, t: f64) -> Self {
        let (state, next) = table.locate(cal, t);
        Clock { table, state, next }
    }

    /// Moves the clock to run time `t`.
    #[inline]
    pub(crate) fn set(&mut self, cal: &Calendar, t: f64) {
        let (state, next) = self.table.locate(cal, t);
        self.state = state;
        self.next = next;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::timebase::parse_start;

    fn monday() -> Calendar {
        // 2026-03-02 is a Monday.
        Calendar::elapsed_from(parse_start("2026-03-02").unwrap())
    }

    #[test]
    fn gate_with_night_shift_over_midnight() {
        let days = [true, true, true, true, true, false, false];
        let on = week_intervals(&days, &[(22.0 * 3600.0, 6.0 * 3600.0)]);
        let t = WeekTable::gate(&on);
        let cal = monday();
        let h = 3600.0;
        // Monday 00:00–06:00 is off: Sunday is not a working day.
        assert_eq!(t.locate(&cal, 3.0 * h), (0, 22.0 * h));
        // The next look is at midnight, where the state may carry on.
        assert_eq!(t.locate(&cal, 22.0 * h), (1, DAY_S));
        assert_eq!(t.locate(&cal, DAY_S), (1, 30.0 * h));
        // Friday's night shift runs into Saturday morning.
        let sat = 5.0 * DAY_S;
        assert_eq!(t.locate(&cal, sat + 5.0 * h).0, 1);
        assert_eq!(t.locate(&cal, sat + 6.0 * h).0, 0);
        assert_eq!(t.locate(&cal, sat + 23.0 * h).0, 0);
    }

    #[test]
    fn levels_and_constant() {
        let days = [true, true, true, true, true, false, false];
        let on = week_intervals(&days, &[(6.0 * 3600.0, 14.0 * 3600.0)]);
        let t = WeekTable::from_intervals(&on, 0, [1, 1, 1, 1, 1, 2, 2]);
        let cal = monday();
        assert_eq!(t.locate(&cal, 7.0 * 3600.0), (0, 14.0 * 3600.0));
        assert_eq!(t.locate(&cal, 15.0 * 3600.0), (1, DAY_S));
        assert_eq!(t.locate(&cal, 5.5 * DAY_S).0, 2);
        let c = WeekTable::constant(1);
        assert_eq!(c.locate(&cal, 123.0), (1, f64::INFINITY));
        // Windows covering the whole day everywhere give a constant table.
        let all = week_intervals(&[true; 7], &[(0.0, DAY_S)]);
        assert_eq!(WeekTable::gate(&all).constant, Some(1));
    }

    #[test]
    fn next_change_always_moves_forward() {
        let on = week_intervals(&[true; 7], &[(3600.0, 7200.0)]);
        let t = WeekTable::gate(&on);
        let cal = monday();
        let mut x = 0.0;
        for _ in 0..100 {
            let (_, n) = t.locate(&cal, x);
            assert!(n > x);
            x = n;
        }
        // Three looks a day: 01:00, 02:00 and midnight.
        assert!(x >= 33.0 * DAY_S);
    }
}

//! The engine observer of the wear plan: operations per step and day type, the closings
//! of each step by the steps already connected (for the inrush), and the fault
//! detection's alarms. It needs only the intervals with an operation, so it lets the
//! engine add identical intervals as blocks (`wants_every_interval` is false).

use super::calendar::DayType;
use crate::bank::BankState;
use crate::engine::{IntervalRecord, Observer};
use crate::error::RunError;
use crate::scenario::Maintenance;
use crate::study::Study;
use crate::timebase::Calendar;
use std::collections::BTreeMap;

/// What the wear plan keeps of one run.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct WearLog {
    /// Operations (closings and openings, trips included) per step index and day type.
    pub ops: Vec<[u64; 4]>,
    /// Closings per (step index, bits of the state connected just before).
    pub closings: BTreeMap<(usize, u64), u64>,
    /// Alarms of the fault detection: (step number, run time of the alarm, s after the
    /// start of the run).
    pub alarms: Vec<(usize, f64)>,
    /// Operations of each step from the start of its injected fault (if any) until the
    /// detection alarmed on it (or the end of the run).
    pub ops_after_fault: Vec<u64>,
}

/// Collects a [`WearLog`] while a run goes.
#[derive(Debug, Clone)]
pub struct WearObserver {
    log: WearLog,
    calendar: Calendar,
    maintenance: Maintenance,
    /// Type holidays in the run (a CSV profile) or not (the generator does not know them).
    holidays_in_run: bool,
    dt_s: f64,
    t_first_s: f64,
    fault_from_s: Vec<Option<f64>>,
    alarmed: BankState,
    /// The latest day seen and its type (the calendar is only asked once a day).
    day: (i64, DayType),
}

impl WearObserver {
    /// An observer for a run of `study`.
    pub fn new(study: &Study) -> Self {
        let sc = &study.scenario;
        let n = sc.steps.len();
        WearObserver {
            log: WearLog {
                ops: vec![[0; 4]; n],
                ops_after_fault: vec![0; n],
                ..WearLog::default()
            },
            calendar: study.plan.calendar,
            maintenance: sc.maintenance.clone(),
            holidays_in_run: study.csv().is_some(),
            dt_s: study.plan.dt_s,
            t_first_s: study.plan.t_first_s,
            fault_from_s: sc.steps.iter().map(|s| s.fault.map(|f| f.from_s)).collect(),
            alarmed: BankState::EMPTY,
            day: (i64::MIN, DayType::Weekday),
        }
    }

    /// The log collected so far.
    pub fn log(&self) -> &WearLog {
        &self.log
    }

    /// The log, ending the observer.
    pub fn into_log(self) -> WearLog {
        self.log
    }

    fn day_type(&mut self, t_s: f64) -> DayType {
        let day = (self.calendar.epoch(t_s) / crate::timebase::DAY_S).floor() as i64;
        if day != self.day.0 {
            let date = self.calendar.datetime(t_s).date();
            self.day = (
                day,
                DayType::of(date, &self.maintenance, self.holidays_in_run),
            );
        }
        self.day.1
    }
}

impl Observer for WearObserver {
    fn wants_every_interval(&self) -> bool {
        false
    }

    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        let d = r.decision;
        let ops = d.closed.or(d.opened);
        if ops.is_empty() && d.alarm.is_empty() {
            return Ok(());
        }
        // Operations take effect at t_{k+1}.
        let t_next = r.t_s + self.dt_s;
        let run_s = t_next - self.t_first_s;
        let ty = self.day_type(t_next);
        // The alarm first: the opening it makes is not an operation before detection.
        for n in d.alarm {
            self.alarmed = self.alarmed.with(n);
            self.log.alarms.push((n, run_s));
        }
        for n in ops {
            self.log.ops[n - 1][ty.index()] += 1;
            if self.fault_from_s[n - 1].is_some_and(|f| run_s > f) && !self.alarmed.contains(n) {
                self.log.ops_after_fault[n - 1] += 1;
            }
        }
        for n in d.closed {
            *self.log.closings.entry((n - 1, r.mask.bits())).or_insert(0) += 1;
        }
        Ok(())
    }
}

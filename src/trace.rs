//! The bounded trace: an engine [`Observer`] that keeps what the report's figures draw of
//! a run, in memory that does not grow with the run's length.
//!
//! The run's intervals fall into a fixed number of time buckets, one per pixel column or
//! so. Each bucket keeps the lowest and the highest value of every drawn quantity
//! (never a sample of them, so an extreme is never lost), the number of intervals, the
//! intervals spent in overcorrection episodes, and per step the intervals it was
//! connected. A bucket starts one interval wide; when the run reaches past the last
//! bucket, neighbouring buckets merge pairwise and every bucket becomes twice as wide, so
//! whatever the run's length there are between half of [`TraceSettings::buckets`] and all
//! of them in use.
//!
//! Beside the buckets, a calendar grid of mean supply power per hour of the day and per
//! day feeds the heat map; days merge pairwise in the same way past
//! [`TraceSettings::days`] columns.
//!
//! The trace asks for no interval to be stepped alone
//! ([`Observer::wants_every_interval`] is false): a block of identical intervals is added
//! as a count. Overcorrection is judged as the run's metrics judge it (the supply more
//! leading than allowed by more than the threshold; episodes at least the minimum length),
//! so the shaded time adds up to the run's `overcorrection.total_s`.

use crate::engine::{IntervalRecord, Observer};
use crate::error::RunError;
use crate::pf::pf_of;
use crate::study::Study;
use crate::timebase::{Calendar, DAY_S};

/// How much the trace keeps.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TraceSettings {
    /// Most time buckets kept (between half and all of them are in use), at least 2.
    /// Default 1024.
    pub buckets: usize,
    /// Most day columns of the heat map (between half and all of them in use once the
    /// run is longer), at least 2. Default 400.
    pub days: usize,
}

impl Default for TraceSettings {
    fn default() -> Self {
        TraceSettings {
            buckets: 1024,
            days: 400,
        }
    }
}

/// Lowest and highest value seen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Range {
    /// Lowest value.
    pub lo: f64,
    /// Highest value.
    pub hi: f64,
}

impl Range {
    /// Nothing seen yet.
    pub const EMPTY: Range = Range {
        lo: f64::INFINITY,
        hi: f64::NEG_INFINITY,
    };

    /// True when nothing was seen.
    pub fn is_empty(&self) -> bool {
        self.lo > self.hi
    }

    #[inline]
    fn add(&mut self, x: f64) {
        if x < self.lo {
            self.lo = x;
        }
        if x > self.hi {
            self.hi = x;
        }
    }

    fn merge(&mut self, o: &Range) {
        self.lo = self.lo.min(o.lo);
        self.hi = self.hi.max(o.hi);
    }
}

/// One time bucket of the trace.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bucket {
    /// Intervals recorded in the bucket.
    pub intervals: u64,
    /// Supply power factor on the signed scale of [`pf_scale`]: the PF for a lagging
    /// supply, 2 − PF for a leading one (so 1 is unity, 0.9 lag is 0.9, 0.9 lead is 1.1).
    pub pf: Range,
    /// Supply active power, kW (> 0 import).
    pub p_kw: Range,
    /// Supply reactive power, kvar (load convention, > 0 lagging).
    pub q_kvar: Range,
    /// The lowest supply reactive power (the most leading) of the overcorrection episodes
    /// that reach into the bucket, kvar; +∞ when none does. An episode spanning several
    /// buckets gives its lowest value to each of them, so the lowest over all buckets is
    /// the run's worst episode exactly.
    pub episode_q_min: f64,
    /// The controller's demand ΔQ, kvar (> 0: it wants more capacitance).
    pub demand_kvar: Range,
    /// Reactive power of the load, kvar.
    pub load_q_kvar: Range,
    /// Reactive power the bank would have to deliver to put the supply exactly on the
    /// target: Q_supply + Q_bank − P·tan φ_t, kvar.
    pub needed_kvar: Range,
    /// Reactive power delivered by the connected steps, kvar.
    pub bank_kvar: Range,
    /// Sum over the bucket's intervals of the delivered kvar (for the mean), kvar.
    pub bank_sum: f64,
    /// Sum over the bucket's intervals of the needed kvar (for the mean), kvar.
    pub needed_sum: f64,
    /// Intervals of the bucket inside an overcorrection episode.
    pub overcorrected: u64,
}

impl Bucket {
    const EMPTY: Bucket = Bucket {
        intervals: 0,
        pf: Range::EMPTY,
        p_kw: Range::EMPTY,
        q_kvar: Range::EMPTY,
        episode_q_min: f64::INFINITY,
        demand_kvar: Range::EMPTY,
        load_q_kvar: Range::EMPTY,
        needed_kvar: Range::EMPTY,
        bank_kvar: Range::EMPTY,
        bank_sum: 0.0,
        needed_sum: 0.0,
        overcorrected: 0,
    };

    fn merge(&mut self, o: &Bucket) {
        self.intervals += o.intervals;
        self.pf.merge(&o.pf);
        self.p_kw.merge(&o.p_kw);
        self.q_kvar.merge(&o.q_kvar);
        self.episode_q_min = self.episode_q_min.min(o.episode_q_min);
        self.demand_kvar.merge(&o.demand_kvar);
        self.load_q_kvar.merge(&o.load_q_kvar);
        self.needed_kvar.merge(&o.needed_kvar);
        self.bank_kvar.merge(&o.bank_kvar);
        self.bank_sum += o.bank_sum;
        self.needed_sum += o.needed_sum;
        self.overcorrected += o.overcorrected;
    }
}

/// One cell of the heat map: the supply's power summed over the intervals of one hour of
/// the day on one day (or group of days).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct HourCell {
    /// Sum of the supply active power over the intervals, kW.
    pub p_sum: f64,
    /// Sum of the supply reactive power over the intervals, kvar.
    pub q_sum: f64,
    /// Intervals recorded.
    pub intervals: u64,
}

impl HourCell {
    /// The PF of the cell's mean power on the signed scale of [`pf_scale`], or `None`
    /// when the cell saw no interval.
    pub fn pf_scale(&self) -> Option<f64> {
        (self.intervals > 0).then(|| pf_scale(self.p_sum, self.q_sum))
    }
}

/// A power factor on one signed scale: PF for Q ≥ 0 (lagging), 2 − PF for Q < 0
/// (leading). 1 is unity; below 1 lagging, above 1 leading.
#[inline]
pub fn pf_scale(p_kw: f64, q_kvar: f64) -> f64 {
    let pf = pf_of(p_kw, q_kvar);
    if q_kvar < 0.0 {
        2.0 - pf
    } else {
        pf
    }
}

/// The bounded trace of one run (see the module documentation).
#[derive(Debug, Clone)]
pub struct Trace {
    settings: TraceSettings,
    steps: usize,
    dt_s: f64,
    t_first_s: f64,
    calendar: Calendar,
    tan_t: f64,
    threshold_kvar: f64,
    min_episode: u64,
    /// Intervals per bucket.
    width: u64,
    buckets: Vec<Bucket>,
    /// Intervals each step was on, bucket-major (`steps` entries per bucket).
    on: Vec<u64>,
    /// Intervals recorded so far (the next interval's index).
    seen: u64,
    /// Start and length of the run of overcorrected intervals going on.
    run_start: u64,
    run_len: u64,
    run_q_min: f64,
    /// Heat map: first local day number, days per column, cells column-major (24 each).
    first_day: i64,
    days_per_column: i64,
    cells: Vec<HourCell>,
    episodes: u64,
}

impl Trace {
    /// A trace of a run of `study` with the default settings.
    pub fn new(study: &Study) -> Trace {
        Trace::with_settings(study, TraceSettings::default())
    }

    /// A trace of a run of `study` keeping at most `settings.buckets` buckets and
    /// `settings.days` day columns.
    pub fn with_settings(study: &Study, settings: TraceSettings) -> Trace {
        let sc = &study.scenario;
        let plan = &study.plan;
        let settings = TraceSettings {
            buckets: settings.buckets.max(2),
            days: settings.days.max(2),
        };
        let steps = sc.steps.len();
        let first_day = (plan.calendar.epoch(plan.t_first_s) / DAY_S).floor() as i64;
        Trace {
            settings,
            steps,
            dt_s: plan.dt_s,
            t_first_s: plan.t_first_s,
            calendar: plan.calendar,
            tan_t: sc.controller.target.tan_phi(),
            threshold_kvar: sc.overcorrection_threshold_kvar,
            min_episode: (sc.overcorrection_min_s / plan.dt_s - 1e-9).ceil().max(1.0) as u64,
            width: 1,
            buckets: Vec::with_capacity(settings.buckets),
            on: Vec::with_capacity(settings.buckets * steps),
            seen: 0,
            run_start: 0,
            run_len: 0,
            run_q_min: f64::INFINITY,
            first_day,
            days_per_column: 1,
            cells: Vec::with_capacity(settings.days * 24),
            episodes: 0,
        }
    }

    /// Closes an overcorrection run still open at the end. Call once after the run; the
    /// figures read a finished trace.
    pub fn finish(&mut self) {
        self.close_run();
    }

    /// The buckets in use, in time order.
    pub fn buckets(&self) -> &[Bucket] {
        &self.buckets
    }

    /// Intervals per bucket (a power of two).
    pub fn bucket_intervals(&self) -> u64 {
        self.width
    }

    /// Length of one interval, s.
    pub fn dt_s(&self) -> f64 {
        self.dt_s
    }

    /// Start of the first interval, s (profile time base).
    pub fn t_first_s(&self) -> f64 {
        self.t_first_s
    }

    /// Intervals recorded.
    pub fn intervals(&self) -> u64 {
        self.seen
    }

    /// Number of steps (rows of the step raster).
    pub fn steps(&self) -> usize {
        self.steps
    }

    /// Start of bucket `i`, s (profile time base).
    pub fn bucket_start_s(&self, i: usize) -> f64 {
        self.t_first_s + (i as u64 * self.width) as f64 * self.dt_s
    }

    /// Share of bucket `i`'s intervals during which step `step` (numbered from 1) was
    /// connected, 0..1.
    pub fn on_share(&self, i: usize, step: usize) -> f64 {
        let b = &self.buckets[i];
        if b.intervals == 0 || step == 0 || step > self.steps {
            return 0.0;
        }
        self.on[i * self.steps + step - 1] as f64 / b.intervals as f64
    }

    /// Overcorrection episodes found (as the run's metrics count them).
    pub fn episodes(&self) -> u64 {
        self.episodes
    }

    /// The calendar of the run.
    pub fn calendar(&self) -> Calendar {
        self.calendar
    }

    /// The heat map: local day number (days since 1970-01-01 on the run's wall clock) of
    /// the first column, days per column, and the cells column by column, 24 hours each.
    pub fn hours(&self) -> (i64, i64, &[HourCell]) {
        (self.first_day, self.days_per_column, &self.cells)
    }

    /// Bytes the trace holds on the heap (its buckets, step counts and heat map), which
    /// never exceeds what [`Trace::capacity_bytes`] promises.
    pub fn heap_bytes(&self) -> usize {
        self.buckets.capacity() * std::mem::size_of::<Bucket>()
            + self.on.capacity() * std::mem::size_of::<u64>()
            + self.cells.capacity() * std::mem::size_of::<HourCell>()
    }

    /// The most bytes a trace with these settings and `steps` steps can hold, whatever
    /// the run's length.
    pub fn capacity_bytes(settings: TraceSettings, steps: usize) -> usize {
        settings.buckets * (std::mem::size_of::<Bucket>() + steps * std::mem::size_of::<u64>())
            + settings.days * 24 * std::mem::size_of::<HourCell>()
    }

    /// Makes every bucket twice as wide, merging neighbours.
    fn coarsen(&mut self) {
        let n = self.buckets.len();
        let s = self.steps;
        for i in 0..n.div_ceil(2) {
            let mut b = self.buckets[2 * i];
            if 2 * i + 1 < n {
                let o = self.buckets[2 * i + 1];
                b.merge(&o);
            }
            self.buckets[i] = b;
            for j in 0..s {
                let mut x = self.on[2 * i * s + j];
                if 2 * i + 1 < n {
                    x += self.on[(2 * i + 1) * s + j];
                }
                self.on[i * s + j] = x;
            }
        }
        self.buckets.truncate(n.div_ceil(2));
        self.on.truncate(n.div_ceil(2) * s);
        self.width *= 2;
    }

    /// The bucket of interval `k`, made ready.
    fn bucket_of(&mut self, k: u64) -> usize {
        while k / self.width >= self.settings.buckets as u64 {
            self.coarsen();
        }
        let i = (k / self.width) as usize;
        while self.buckets.len() <= i {
            self.buckets.push(Bucket::EMPTY);
            self.on.extend(std::iter::repeat_n(0, self.steps));
        }
        i
    }

    /// Adds `m` identical intervals starting at interval `k` with the values of `r`.
    fn add(&mut self, r: &IntervalRecord<'_>, k: u64, m: u64, v: &Values) {
        let mut j = k;
        let end = k + m;
        while j < end {
            let i = self.bucket_of(j);
            let upto = ((i as u64 + 1) * self.width).min(end);
            let c = upto - j;
            let b = &mut self.buckets[i];
            b.intervals += c;
            b.pf.add(v.pf);
            b.p_kw.add(v.p);
            b.q_kvar.add(v.q);
            b.demand_kvar.add(r.decision.demand_kvar);
            b.load_q_kvar.add(v.load_q);
            b.needed_kvar.add(v.needed);
            b.bank_kvar.add(v.bank);
            b.bank_sum += v.bank * c as f64;
            b.needed_sum += v.needed * c as f64;
            for n in r.mask {
                if n <= self.steps {
                    self.on[i * self.steps + n - 1] += c;
                }
            }
            j = upto;
        }
        self.add_hours(k, m, v.p, v.q);
    }

    /// Adds `m` intervals from interval `k` to the heat map, split at hour boundaries.
    fn add_hours(&mut self, k: u64, m: u64, p: f64, q: f64) {
        let mut j = k;
        let end = k + m;
        while j < end {
            let t = self.t_first_s + j as f64 * self.dt_s;
            let e = self.calendar.epoch(t);
            let day = (e / DAY_S).floor() as i64;
            let sod = self.calendar.second_of_day(t);
            let hour = ((sod / 3600.0).floor() as usize).min(23);
            // The first interval starting in the next hour.
            let next_hour = t + (3600.0 * (hour as f64 + 1.0) - sod);
            let j_next = ((next_hour - self.t_first_s) / self.dt_s - 1e-9).ceil();
            let upto = if j_next.is_finite() && j_next > j as f64 {
                (j_next as u64).min(end)
            } else {
                j + 1
            };
            let c = upto - j;
            let col = self.column_of(day);
            if let Some(cell) = self.cells.get_mut(col * 24 + hour) {
                cell.p_sum += p * c as f64;
                cell.q_sum += q * c as f64;
                cell.intervals += c;
            }
            j = upto;
        }
    }

    /// The heat-map column of local day `day`, made ready.
    fn column_of(&mut self, day: i64) -> usize {
        let d = (day - self.first_day).max(0);
        while d / self.days_per_column >= self.settings.days as i64 {
            let cols = self.cells.len() / 24;
            let half = cols.div_ceil(2);
            for c in 0..half {
                for h in 0..24 {
                    let mut x = self.cells[2 * c * 24 + h];
                    if 2 * c + 1 < cols {
                        let o = self.cells[(2 * c + 1) * 24 + h];
                        x.p_sum += o.p_sum;
                        x.q_sum += o.q_sum;
                        x.intervals += o.intervals;
                    }
                    self.cells[c * 24 + h] = x;
                }
            }
            self.cells.truncate(half * 24);
            self.days_per_column *= 2;
        }
        let col = (d / self.days_per_column) as usize;
        if self.cells.len() < (col + 1) * 24 {
            self.cells.resize((col + 1) * 24, HourCell::default());
        }
        col
    }

    /// True when the supply is more leading than allowed (the metrics' rule).
    #[inline]
    fn overcorrected(&self, p: f64, q: f64) -> bool {
        let limit = if self.tan_t < 0.0 {
            p.abs() * self.tan_t - self.threshold_kvar
        } else {
            -self.threshold_kvar
        };
        q < limit
    }

    /// Marks the run of overcorrected intervals going on as an episode when it is long
    /// enough, and ends it.
    fn close_run(&mut self) {
        if self.run_len >= self.min_episode && self.run_len > 0 {
            self.episodes += 1;
            let (mut j, end) = (self.run_start, self.run_start + self.run_len);
            while j < end {
                let i = self.bucket_of(j);
                let upto = ((i as u64 + 1) * self.width).min(end);
                let b = &mut self.buckets[i];
                b.overcorrected += upto - j;
                b.episode_q_min = b.episode_q_min.min(self.run_q_min);
                j = upto;
            }
        }
        self.run_len = 0;
        self.run_q_min = f64::INFINITY;
    }

    fn record(&mut self, r: &IntervalRecord<'_>, k: u64, m: u64) {
        let v = Values::of(r, self.tan_t);
        if self.overcorrected(v.p, v.q) {
            if self.run_len == 0 {
                self.run_start = k;
            }
            self.run_len += m;
            self.run_q_min = self.run_q_min.min(v.q);
        } else if self.run_len > 0 {
            self.close_run();
        }
        self.add(r, k, m, &v);
        self.seen = k + m;
    }
}

/// The drawn quantities of one interval.
struct Values {
    p: f64,
    q: f64,
    pf: f64,
    load_q: f64,
    bank: f64,
    needed: f64,
}

impl Values {
    #[inline]
    fn of(r: &IntervalRecord<'_>, tan_t: f64) -> Values {
        let (mut p, mut q, mut bank) = (0.0, 0.0, 0.0);
        for ph in r.phases {
            p += ph.p_kw;
            q += ph.q_kvar;
            bank += ph.q_bank_kvar;
        }
        Values {
            p,
            q,
            pf: pf_scale(p, q),
            load_q: r.load.q_total(),
            bank,
            needed: q + bank - p.abs() * tan_t,
        }
    }
}

impl Observer for Trace {
    fn wants_every_interval(&self) -> bool {
        false
    }

    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        self.record(r, r.k, 1);
        Ok(())
    }

    fn block(&mut self, r: &IntervalRecord<'_>, n: u64) -> Result<(), RunError> {
        self.record(r, r.k + 1, n);
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Both, Quiet};
    use crate::scenario::Scenario;
    use crate::study::Stepping;
    use std::path::Path;

    fn study(extra: &str) -> Study {
        let sc = Scenario::from_str(
            &format!(
                "[study]\nname = \"t\"\n[[steps]]\nkvar = 25\ncount = 4\n[load.synthetic]\n\
                 [run]\n{extra}\n"
            ),
            Path::new("t.toml"),
        )
        .unwrap();
        Study::prepare(sc).unwrap()
    }

    // The trace keeps the run's own extremes of the load's reactive power and its
    // overcorrection time, with small buckets (many merges) and large ones, and with
    // event-driven stepping and stepping every interval.
    #[test]
    fn extremes_and_overcorrection_survive_merging() {
        let mut st = study("duration_s = 172800\ntime_step_s = 10");
        for stepping in [Stepping::Events, Stepping::EveryInterval] {
            st.plan.stepping = stepping;
            for buckets in [2, 7, 64, 100_000] {
                let mut tr = Trace::with_settings(&st, TraceSettings { buckets, days: 2 });
                let r = st.run(&mut tr).unwrap();
                tr.finish();
                assert!(tr.buckets().len() <= buckets.max(2));
                let n: u64 = tr.buckets().iter().map(|b| b.intervals).sum();
                assert_eq!(n, r.metrics.run.samples);
                let hi = tr
                    .buckets()
                    .iter()
                    .map(|b| b.load_q_kvar.hi)
                    .fold(f64::NEG_INFINITY, f64::max);
                assert_eq!(hi, r.metrics.load.max_q_kvar);
                let over: u64 = tr.buckets().iter().map(|b| b.overcorrected).sum();
                let over_s = over as f64 * st.plan.dt_s;
                assert!(
                    (over_s - r.metrics.overcorrection.total_s).abs() < 1e-6,
                    "{over_s} vs {}",
                    r.metrics.overcorrection.total_s
                );
                assert_eq!(tr.episodes(), r.metrics.overcorrection.episodes);
                let worst = tr
                    .buckets()
                    .iter()
                    .map(|b| -b.episode_q_min)
                    .fold(0.0, f64::max);
                assert_eq!(worst, r.metrics.overcorrection.worst_leading_kvar);
                let (_, per_col, cells) = tr.hours();
                let h: u64 = cells.iter().map(|c| c.intervals).sum();
                assert_eq!(h, r.metrics.run.samples);
                assert!(cells.len() / 24 <= 2 && per_col >= 1);
            }
        }
    }

    // Memory stays within its bound whatever the run's length.
    #[test]
    fn memory_is_bounded() {
        let st = study("duration_s = 864000\ntime_step_s = 1");
        let set = TraceSettings {
            buckets: 256,
            days: 4,
        };
        let mut tr = Trace::with_settings(&st, set);
        st.run(&mut tr).unwrap();
        assert!(tr.heap_bytes() <= Trace::capacity_bytes(set, 4));
        assert!(tr.buckets().len() <= 256 && tr.buckets().len() > 128);
        assert_eq!(tr.hours().2.len(), 24 * 3, "10 days in columns of 4 days");
    }

    #[test]
    fn signed_pf_scale() {
        // 0.8 lag and 0.8 lead from a 3-4-5 triangle (hand-derived).
        assert!((pf_scale(80.0, 60.0) - 0.8).abs() < 1e-12);
        assert!((pf_scale(80.0, -60.0) - 1.2).abs() < 1e-12);
        assert_eq!(pf_scale(0.0, 0.0), 1.0);
    }

    #[test]
    fn quiet_and_trace_side_by_side() {
        let st = study("duration_s = 3600");
        let mut tr = Trace::new(&st);
        let mut q = Quiet;
        let both = Both(&mut tr, &mut q);
        assert!(!both.wants_every_interval());
    }
}

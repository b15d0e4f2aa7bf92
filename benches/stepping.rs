//! Stepping benchmark: what logger data costs when it is stepped finer than it was
//! logged. One year of 15-minute rows (35,040) at Δt = 1 s (31,536,000 intervals) through
//! a 12-step bank, once with event stepping (blocks of identical intervals) and once
//! interval by interval; then 1 s data that changes every interval, both ways, for the
//! cost per interval when no block is possible. The rows come from an in-memory source
//! that implements `LoadSource::unchanged_until`. Run with `cargo bench --bench stepping`.

use bankstep::engine::{IntervalRecord, Observer, Quiet};
use bankstep::error::ProfileError;
use bankstep::error::RunError;
use bankstep::profile::{LoadSample, LoadSource};
use bankstep::scenario::Scenario;
use bankstep::study::{Stepping, Study};
use std::path::Path;
use std::time::Instant;

/// The site: supply, the 12-step bank and the controller settings.
const SITE: &str = include_str!("site_12_steps.toml");

/// The rest of the scenario, after the site.
const SCENARIO: &str = r#"
[run]
duration_days = __DAYS__
time_step_s = 1
[load.synthetic]
"#;

/// Rows of a logger held for `per_row` intervals each.
struct Rows {
    rows: Vec<LoadSample>,
    per_row: u64,
    /// The first interval after the latest row sampled.
    row_end: u64,
}

impl Rows {
    /// A plant-like load: two shifts on weekdays, a light night and weekend, and a
    /// repeatable wobble from a small hash of the row number. `row_s` is the logging
    /// interval, s.
    fn new(n_rows: u64, row_s: f64, per_row: u64) -> Rows {
        let rows = (0..n_rows)
            .map(|i| {
                let t = i as f64 * row_s;
                let day = (t / 86_400.0) as u64;
                let hour = (t % 86_400.0) / 3600.0;
                let weekday = day % 7 < 5;
                let base = match (weekday, (6.0..22.0).contains(&hour)) {
                    (true, true) => 700.0,
                    (true, false) => 250.0,
                    (false, _) => 150.0,
                };
                let h = (i.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 40) as f64 / (1u64 << 24) as f64;
                let p = base * (0.8 + 0.4 * h);
                let q = p * (0.45 + 0.3 * h);
                LoadSample {
                    p_kw: [p / 3.0; 3],
                    q_kvar: [q / 3.0; 3],
                }
            })
            .collect();
        Rows {
            rows,
            per_row,
            row_end: 0,
        }
    }
}

impl LoadSource for Rows {
    #[inline]
    fn sample(&mut self, k: u64, _t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let row = k / self.per_row;
        *out = self.rows[row as usize];
        self.row_end = (row + 1) * self.per_row;
        Ok(())
    }

    #[inline]
    fn unchanged_until(&self, k: u64) -> u64 {
        self.row_end.max(k + 1)
    }
}

fn study(days: f64, stepping: Stepping) -> Study {
    let text = format!("{SITE}{SCENARIO}").replace("__DAYS__", &days.to_string());
    let sc = Scenario::from_str(&text, Path::new("stepping-bench.toml")).expect("scenario");
    let mut st = Study::prepare(sc).expect("study");
    st.plan.stepping = stepping;
    st
}

/// Counts the intervals the engine steps on its own; allows blocks.
#[derive(Default)]
struct Count(u64);

impl Observer for Count {
    fn wants_every_interval(&self) -> bool {
        false
    }

    #[inline]
    fn interval(&mut self, _r: &IntervalRecord<'_>) -> Result<(), RunError> {
        self.0 += 1;
        Ok(())
    }
}

/// Best engine time of `reps` runs, s, the operations and the intervals stepped on their
/// own in the last run.
fn time(st: &Study, rows: &mut Rows, reps: usize) -> (f64, u64, u64) {
    time_with::<Count>(st, rows, reps, |c| c.0)
}

/// As [`time`] with any observer; `alone` reads the count from it.
fn time_with<O: Observer + Default>(
    st: &Study,
    rows: &mut Rows,
    reps: usize,
    alone_of: impl Fn(&O) -> u64,
) -> (f64, u64, u64) {
    let mut best = f64::INFINITY;
    let mut ops = 0;
    let mut alone = 0;
    for _ in 0..reps {
        let mut obs = O::default();
        let t = Instant::now();
        let r = st.run_on(rows, &mut obs).expect("run");
        best = best.min(t.elapsed().as_secs_f64());
        ops = r.metrics.switching.total_operations;
        alone = alone_of(&obs);
    }
    (best, ops, alone)
}

fn main() {
    if std::env::var("BANKSTEP_BENCH_ONLY").is_err() {
        year_of_15_min_rows();
    }
    one_s_rows();
}

/// One year of 15-minute rows at 1 s.
fn year_of_15_min_rows() {
    let year = 365.0;
    let n = (year * 86_400.0) as u64;
    let mut rows = Rows::new(n / 900, 900.0, 900);
    let events = study(year, Stepping::Events);
    let every = study(year, Stepping::EveryInterval);
    let (t_ev, ops_ev, alone) = time(&events, &mut rows, 5);
    let (t_all, ops_all, _) = time(&every, &mut rows, 1);
    assert_eq!(ops_ev, ops_all, "both ways make the same operations");
    println!(
        "15-min rows, 1 year at 1 s ({n} intervals, {} rows, {ops_ev} operations, {alone} intervals stepped alone): events {:.4} s ({:.2} ns/interval), every interval {:.3} s ({:.2} ns/interval), {:.0}x",
        n / 900,
        t_ev,
        t_ev * 1e9 / n as f64,
        t_all,
        t_all * 1e9 / n as f64,
        t_all / t_ev
    );
}

/// 1 s data changing every interval: no block is possible.
fn one_s_rows() {
    let days: f64 = std::env::var("BANKSTEP_BENCH_DAYS")
        .ok()
        .and_then(|d| d.parse().ok())
        .unwrap_or(28.0);
    let n = (days * 86_400.0) as u64;
    let mut rows = Rows::new(n, 1.0, 1);
    let events = study(days, Stepping::Events);
    let every = study(days, Stepping::EveryInterval);
    let (t_ev, _, _) = time_with::<Quiet>(&events, &mut rows, 3, |_| 0);
    let (t_all, _, _) = time_with::<Quiet>(&every, &mut rows, 3, |_| 0);
    println!(
        "1 s rows, {days} days ({n} intervals): events {:.2} ns/interval, every interval {:.2} ns/interval",
        t_ev * 1e9 / n as f64,
        t_all * 1e9 / n as f64
    );
}

//! Whole runs over CSV profiles: coverage by sample-and-hold, registers, ISO calendars.

use bankstep::engine::Quiet;
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::io::Write;

fn study_in(dir: &tempfile::TempDir, scenario: &str, csv: &str) -> Study {
    std::fs::File::create(dir.path().join("p.csv"))
        .unwrap()
        .write_all(csv.as_bytes())
        .unwrap();
    let path = dir.path().join("s.toml");
    std::fs::write(&path, scenario).unwrap();
    Study::prepare(Scenario::from_file(&path).unwrap()).unwrap()
}

const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

// N evenly spaced rows cover N spacings; each interval takes the last row with time ≤ t_k
// (sample-and-hold). Three rows 60 s apart cover 180 s: 180 one-second intervals, and the
// registers are the rows' powers times 60 s each (definition of the kWh register).
#[test]
fn csv_rows_hold_for_their_spacing() {
    let dir = tempfile::tempdir().unwrap();
    let csv = format!(
        "{HEADER}0,100,60,100,60,100,60\n60,100,40,100,40,100,40\n120,50,-30,50,-30,50,-30\n"
    );
    let st = study_in(&dir, "[[steps]]\nkvar = 25\ncount = 6\n[controller]\nswitching_delay_s = 86400\n[load]\ncsv = \"p.csv\"\n", &csv);
    assert_eq!(st.plan.intervals, 180);
    let r = st.run(&mut Quiet).unwrap();
    let pf = &r.metrics.pf;
    assert!((pf.kwh_import - (300.0 + 300.0 + 150.0) / 60.0).abs() < 1e-9);
    assert!((pf.kvarh_inductive - (180.0 + 120.0) / 60.0).abs() < 1e-9);
    assert!((pf.kvarh_capacitive - 90.0 / 60.0).abs() < 1e-9);
    assert!((pf.share_leading - 1.0 / 3.0).abs() < 1e-12);
}

// ISO 8601 times put the run on the calendar: a profile that crosses midnight at the end
// of a month is billed in two calendar months when the run is long enough, and weekdays
// come from the timestamps (2026-03-01 is a Sunday, calendar fact).
#[test]
fn iso_profile_uses_its_own_calendar() {
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from(HEADER);
    // Hourly rows from 2026-02-01 to 2026-03-06.
    let start = chrono::NaiveDate::from_ymd_opt(2026, 2, 1)
        .unwrap()
        .and_hms_opt(0, 0, 0)
        .unwrap();
    for h in 0..(33 * 24) {
        let t = start + chrono::Duration::hours(h);
        csv += &format!("{},100,50,100,50,100,50\n", t.format("%Y-%m-%dT%H:%M:%S"));
    }
    let st = study_in(
        &dir,
        "[[steps]]\nkvar = 50\ncount = 4\n[run]\ntime_step_s = 60\n[load]\ncsv = \"p.csv\"\n",
        &csv,
    );
    let r = st.run(&mut Quiet).unwrap();
    assert_eq!(r.metrics.pf.billing.len(), 2);
    let feb = &r.metrics.pf.billing[0];
    assert!((feb.end_s - feb.start_s - 28.0 * 86_400.0).abs() < 1e-6);
    assert_eq!(st.plan.calendar.weekday(feb.end_s), 6);
}

// A run longer than the profile is refused with the file named.
#[test]
fn run_longer_than_profile_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("p.csv"),
        format!("{HEADER}0,1,1,1,1,1,1\n10,1,1,1,1,1,1\n"),
    )
    .unwrap();
    let path = dir.path().join("s.toml");
    std::fs::write(
        &path,
        "[[steps]]\nkvar = 5\n[load]\ncsv = \"p.csv\"\n[run]\nduration_s = 100\n",
    )
    .unwrap();
    let e = Study::prepare(Scenario::from_file(&path).unwrap())
        .unwrap_err()
        .to_string();
    assert!(e.contains("p.csv") && e.contains("covers only 20 s"), "{e}");
}

// A profile written in local time with its offset keeps its own calendar: rows at
// 2026-03-01T23:00+01:00 are Sunday 23:00 locally (1 March 2026 is a Sunday), though the
// same instant is 22:00 UTC; the row an hour later, 00:00+01:00 on 2 March, is Monday,
// while in UTC it would still be Sunday 23:00. The study's calendar, which bills months and
// counts weekdays, must read the local day.
#[test]
fn offset_timestamps_put_the_run_on_the_local_calendar() {
    let dir = tempfile::tempdir().unwrap();
    let csv = format!(
        "{HEADER}2026-03-01T23:00:00+01:00,10,5,10,5,10,5\n\
         2026-03-02T00:00:00+01:00,10,5,10,5,10,5\n"
    );
    let st = study_in(
        &dir,
        "[[steps]]\nkvar = 25\n[load]\ncsv = \"p.csv\"\n[run]\ntime_step_s = 60\n",
        &csv,
    );
    let cal = st.plan.calendar;
    let t0 = st.plan.t_first_s;
    // Weekday 6 is Sunday and 0 Monday (the calendar counts from Monday).
    assert_eq!(cal.weekday(t0), 6);
    assert_eq!(cal.second_of_day(t0), 23.0 * 3600.0);
    assert_eq!(cal.weekday(t0 + 3600.0), 0);
    assert_eq!(
        cal.datetime(t0 + 3600.0)
            .format("%Y-%m-%d %H:%M")
            .to_string(),
        "2026-03-02 00:00"
    );
}

//! The calendar of a profile with ISO 8601 timestamps follows the profile's own local
//! time: the offset written on its first timestamp. The time line stays the real elapsed
//! seconds between the instants. Weekdays are calendar facts (2026-03-01 is a Sunday,
//! 2026-03-02 a Monday, 2026-10-25 a Sunday); epoch seconds are worked out by hand in the
//! comments (2026-01-01T00:00:00Z is day 20 454 after 1970-01-01: 56 years of 365 days
//! plus 14 leap days, 1972 … 2024).

use bankstep::profile::csv::{scan_bytes, CsvOptions, CsvScan};
use bankstep::timebase::{parse_start, Calendar, TimeKind, DAY_S};

const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

/// Scans rows at the given times, every value 1.
fn scan_times(times: &[&str]) -> CsvScan {
    let mut text = HEADER.to_string();
    for t in times {
        text.push_str(&format!("{t},1,1,1,1,1,1\n"));
    }
    scan_bytes("cal.csv", text.into_bytes(), &CsvOptions::default()).expect("scan")
}

/// 2026-03-02T00:00:00Z: 20 454 days to 2026-01-01, plus 31 (January) + 28 (February)
/// + 1 days, × 86 400 s.
const MAR_2_UTC: f64 = 1_772_409_600.0;

#[test]
fn sunday_half_past_eleven_at_plus_one_is_still_sunday() {
    let sc = scan_times(&[
        "2026-03-01T23:30:00+01:00",
        "2026-03-01T23:45:00+01:00",
        "2026-03-02T00:00:00+01:00",
        "2026-03-02T00:15:00+01:00",
    ]);
    assert_eq!(sc.time_kind, TimeKind::Absolute);
    assert_eq!(sc.utc_offset_s, Some(3600));
    // The time line is the instants: 2026-03-01T22:30:00Z = MAR_2_UTC − 5400 s.
    assert_eq!(sc.t_first_s, MAR_2_UTC - 5400.0);
    assert_eq!(sc.median_spacing_s, 900.0);
    let cal = sc.calendar(parse_start("2000-01-01").unwrap());
    assert_eq!(cal.weekday(sc.t_first_s), 6, "Sunday");
    // 23:30 local is 84 600 s after midnight (in UTC it would be 22:30, 81 000 s).
    assert_eq!(cal.second_of_day(sc.t_first_s), 84_600.0);
    // Local midnight starts Monday, although in UTC it is still Sunday 23:00.
    let midnight = sc.t_first_s + 1800.0;
    assert_eq!(cal.weekday(midnight), 0, "Monday");
    assert_eq!(cal.second_of_day(midnight), 0.0);
    assert_eq!(Calendar::absolute().weekday(midnight), 6, "Sunday in UTC");
}

#[test]
fn a_weekday_that_would_flip_in_utc_keeps_its_local_day() {
    // 20:00 on Sunday at −05:00 is 01:00 on Monday in UTC.
    let sc = scan_times(&["2026-03-01T20:00:00-05:00", "2026-03-01T20:15:00-05:00"]);
    assert_eq!(sc.utc_offset_s, Some(-18_000));
    // 2026-03-02T01:00:00Z.
    assert_eq!(sc.t_first_s, MAR_2_UTC + 3600.0);
    let cal = sc.calendar(parse_start("2000-01-01").unwrap());
    assert_eq!(cal.weekday(sc.t_first_s), 6, "Sunday");
    assert_eq!(cal.second_of_day(sc.t_first_s), 72_000.0);
    assert_eq!(
        Calendar::absolute().weekday(sc.t_first_s),
        0,
        "Monday in UTC"
    );
}

#[test]
fn a_month_starts_at_local_midnight_at_plus_two() {
    let sc = scan_times(&[
        "2026-06-30T23:00:00+02:00",
        "2026-06-30T23:30:00+02:00",
        "2026-07-01T00:00:00+02:00",
        "2026-07-01T00:30:00+02:00",
        "2026-07-01T01:00:00+02:00",
    ]);
    assert_eq!(sc.utc_offset_s, Some(7200));
    let cal = sc.calendar(parse_start("2000-01-01").unwrap());
    // 2026-07-01T00:00:00Z: 20 454 days to 2026-01-01, plus 181 days (January to June),
    // × 86 400 s = 1 782 864 000 s; local midnight at +02:00 is two hours earlier.
    let july_local_midnight = 1_782_864_000.0 - 7200.0;
    assert_eq!(
        cal.month_starts(sc.t_first_s, sc.end_s),
        vec![july_local_midnight]
    );
    assert_eq!(
        cal.datetime(july_local_midnight).to_string(),
        "2026-07-01 00:00:00"
    );
    // Read in UTC, the month would start two hours later, after this profile's end.
    assert!(Calendar::absolute()
        .month_starts(sc.t_first_s, sc.end_s)
        .is_empty());
}

#[test]
fn an_offset_change_keeps_the_time_line_exact_and_the_first_offset_for_the_calendar() {
    // Clocks set back on Sunday 2026-10-25 at 03:00+02:00 → 02:00+01:00: the wall-clock
    // times repeat, but the instants run on at 30 min (00:00Z, 00:30Z, 01:00Z, 01:30Z).
    let sc = scan_times(&[
        "2026-10-25T02:00:00+02:00",
        "2026-10-25T02:30:00+02:00",
        "2026-10-25T02:00:00+01:00",
        "2026-10-25T02:30:00+01:00",
    ]);
    assert_eq!(sc.rows_used, 4);
    assert_eq!(sc.defect_counts.total(), 0);
    assert_eq!((sc.median_spacing_s, sc.max_spacing_s), (1800.0, 1800.0));
    assert_eq!(sc.t_last_s - sc.t_first_s, 3.0 * 1800.0);
    // The calendar keeps +02:00: the last row, 01:30Z, reads 03:30 (12 600 s).
    assert_eq!(sc.utc_offset_s, Some(7200));
    let cal = sc.calendar(parse_start("2000-01-01").unwrap());
    assert_eq!(cal.second_of_day(sc.t_last_s), 12_600.0);
    assert_eq!(cal.weekday(sc.t_last_s), 6, "Sunday");
}

#[test]
fn naive_times_and_utc_keep_the_calendar_as_written() {
    let sc = scan_times(&["2026-03-01T23:30:00", "2026-03-01T23:45:00"]);
    assert_eq!(sc.utc_offset_s, None);
    let cal = sc.calendar(parse_start("2000-01-01").unwrap());
    assert_eq!(cal, Calendar::absolute());
    assert_eq!(cal.second_of_day(sc.t_first_s), 84_600.0);
    let sc = scan_times(&["2026-03-01T23:30:00Z", "2026-03-01T23:45:00Z"]);
    assert_eq!(sc.utc_offset_s, Some(0));
    assert_eq!(
        sc.calendar(parse_start("2000-01-01").unwrap()),
        Calendar::absolute()
    );
}

#[test]
fn elapsed_times_take_the_calendar_from_the_start() {
    let sc = scan_times(&["0", "900"]);
    assert_eq!(sc.utc_offset_s, None);
    let start = parse_start("2026-03-02").unwrap();
    let cal = sc.calendar(start);
    assert_eq!(cal, Calendar::elapsed_from(start));
    assert_eq!(cal.weekday(DAY_S - 1.0), 0, "Monday");
}

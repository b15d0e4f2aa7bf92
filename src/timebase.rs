//! Time bases: how simulation time (seconds) maps onto the calendar.
//!
//! A run's time values are seconds in the profile's own base: elapsed seconds for a
//! synthetic profile or a CSV with an elapsed `time` column, or seconds since the Unix
//! epoch for a CSV with ISO 8601 timestamps. [`Calendar`] adds the offset that turns
//! either into "local epoch seconds": seconds since 1970-01-01T00:00:00 on the site's
//! wall clock, so that weekdays, hours of the day and calendar months can be found with
//! integer arithmetic inside the per-sample loop, in the site's local time.
//!
//! ISO 8601 timestamps and local time:
//!
//! - A timestamp with a UTC offset (`2026-03-02T08:00:00+01:00`, or `Z`) is read as the
//!   exact instant, so run time is real elapsed seconds, monotonic even where the offset
//!   changes (a daylight-saving change). The calendar uses the offset written on the
//!   profile's first timestamp for the whole run ([`Calendar::absolute_local`]): weekdays,
//!   seconds of the day and month starts are those of the profile's own local time. Where
//!   the offset changes within the file, the calendar keeps the first offset, so after
//!   the change local hours read one hour off (e.g. 08:00+02:00 in summer then shows as
//!   07:00 on a profile that starts in winter at +01:00); the time axis, and so every
//!   duration, stays exact.
//! - A timestamp without an offset is naive local time and is taken as it stands (as if
//!   it were UTC, with offset 0), with no daylight-saving correction.

use chrono::{DateTime, Datelike, FixedOffset, NaiveDate, NaiveDateTime, TimeZone, Utc};

/// Seconds in a day.
pub const DAY_S: f64 = 86_400.0;
/// Seconds in the year used for extrapolation (365 days).
pub const YEAR_S: f64 = 365.0 * DAY_S;
/// Hours in the year used for extrapolation (365 days), h.
pub const HOURS_PER_YEAR: f64 = 8760.0;

/// What the numbers in a time column mean.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeKind {
    /// Elapsed seconds from an arbitrary origin; the calendar comes from `run.start`.
    Elapsed,
    /// Seconds since 1970-01-01T00:00:00Z, from ISO 8601 timestamps.
    Absolute,
}

/// Maps run time onto the calendar.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Calendar {
    /// Added to a run time to get local epoch seconds (seconds since
    /// 1970-01-01T00:00:00 on the wall clock the calendar follows), s.
    pub offset_s: f64,
    /// What the run's time values are.
    pub kind: TimeKind,
}

impl Calendar {
    /// Calendar for elapsed time, elapsed 0 falling on `start`.
    pub fn elapsed_from(start: NaiveDateTime) -> Self {
        Calendar {
            offset_s: start.and_utc().timestamp() as f64,
            kind: TimeKind::Elapsed,
        }
    }

    /// Calendar for absolute (epoch) time read from naive timestamps or timestamps in
    /// UTC: the calendar is that of the times as written.
    pub fn absolute() -> Self {
        Calendar::absolute_local(0)
    }

    /// Calendar for absolute (epoch) time in a local time `utc_offset_s` seconds east of
    /// UTC (+3600 for `+01:00`, −18 000 for `-05:00`): weekdays, seconds of the day and
    /// month starts are those of that local time, while run times stay exact instants.
    pub fn absolute_local(utc_offset_s: i32) -> Self {
        Calendar {
            offset_s: f64::from(utc_offset_s),
            kind: TimeKind::Absolute,
        }
    }

    /// Local epoch seconds of a run time.
    #[inline]
    pub fn epoch(&self, t_s: f64) -> f64 {
        t_s + self.offset_s
    }

    /// Day of the week, 0 = Monday … 6 = Sunday.
    #[inline]
    pub fn weekday(&self, t_s: f64) -> usize {
        // 1970-01-01 was a Thursday (index 3).
        let day = (self.epoch(t_s) / DAY_S).floor() as i64;
        (day + 3).rem_euclid(7) as usize
    }

    /// Seconds since midnight, 0 ≤ s < 86 400.
    #[inline]
    pub fn second_of_day(&self, t_s: f64) -> f64 {
        let e = self.epoch(t_s);
        // Whole seconds from 1 up (the usual case) in integers: the remainder is exact
        // either way, so this gives the bits `rem_euclid` gives, without its `fmod`.
        if (1.0..9.0e15).contains(&e) && e == e.trunc() {
            return ((e as u64) % 86_400) as f64;
        }
        e.rem_euclid(DAY_S)
    }

    /// Local calendar date and time of a run time (not for the per-sample loop).
    pub fn datetime(&self, t_s: f64) -> NaiveDateTime {
        let e = self.epoch(t_s);
        let secs = e.floor() as i64;
        let nanos = ((e - e.floor()) * 1e9).round().min(999_999_999.0) as u32;
        DateTime::from_timestamp(secs, nanos)
            .map(|d| d.naive_utc())
            .unwrap_or_default()
    }

    /// Run times of the calendar-month starts strictly inside (t_from, t_to).
    pub fn month_starts(&self, t_from: f64, t_to: f64) -> Vec<f64> {
        let mut out = Vec::new();
        let first = self.datetime(t_from);
        let (mut y, mut m) = (first.year(), first.month());
        loop {
            if m == 12 {
                y += 1;
                m = 1;
            } else {
                m += 1;
            }
            let Some(d) = NaiveDate::from_ymd_opt(y, m, 1) else {
                break;
            };
            let epoch = d
                .and_hms_opt(0, 0, 0)
                .unwrap_or_default()
                .and_utc()
                .timestamp() as f64;
            let t = epoch - self.offset_s;
            if t >= t_to {
                break;
            }
            if t > t_from {
                out.push(t);
            }
        }
        out
    }
}

/// Weekday names, Monday first, for reports.
pub const WEEKDAYS: [&str; 7] = [
    "Mondays",
    "Tuesdays",
    "Wednesdays",
    "Thursdays",
    "Fridays",
    "Saturdays",
    "Sundays",
];

/// Parses an ISO 8601 date-time into epoch seconds. Accepts `2026-03-02T08:00:00`,
/// a space instead of `T`, fractional seconds, and a `Z` or `±hh:mm` offset. A time with no
/// offset is taken as it stands (naive local time, no daylight-saving correction).
pub fn parse_iso8601(text: &str) -> Option<f64> {
    parse_iso8601_offset(text).map(|(t, _)| t)
}

/// Parses an ISO 8601 date-time like [`parse_iso8601`], and also returns its UTC offset
/// in seconds east of UTC (`Some(3600)` for `+01:00`, `Some(0)` for `Z`), or `None` for a
/// time written without an offset.
pub fn parse_iso8601_offset(text: &str) -> Option<(f64, Option<i32>)> {
    let s = text.trim();
    let fixed = |d: DateTime<FixedOffset>| {
        (
            d.timestamp() as f64 + f64::from(d.timestamp_subsec_nanos()) * 1e-9,
            Some(d.offset().local_minus_utc()),
        )
    };
    if let Ok(d) = DateTime::parse_from_rfc3339(s) {
        return Some(fixed(d));
    }
    for fmt in [
        "%Y-%m-%dT%H:%M:%S%.f",
        "%Y-%m-%d %H:%M:%S%.f",
        "%Y-%m-%dT%H:%M",
        "%Y-%m-%d %H:%M",
    ] {
        if let Ok(d) = NaiveDateTime::parse_from_str(s, fmt) {
            let u = Utc.from_utc_datetime(&d);
            return Some((
                u.timestamp() as f64 + f64::from(u.timestamp_subsec_nanos()) * 1e-9,
                None,
            ));
        }
    }
    for fmt in [
        "%Y-%m-%dT%H:%M:%S%.f%z",
        "%Y-%m-%d %H:%M:%S%.f%z",
        "%Y-%m-%d %H:%M:%S%#z",
    ] {
        if let Ok(d) = DateTime::parse_from_str(s, fmt) {
            return Some(fixed(d));
        }
    }
    None
}

/// Parses a calendar start such as `2026-03-02T00:00:00` or `2026-03-02`.
pub fn parse_start(text: &str) -> Option<NaiveDateTime> {
    if let Some(e) = parse_iso8601(text) {
        return DateTime::from_timestamp(e.floor() as i64, 0).map(|d| d.naive_utc());
    }
    NaiveDate::parse_from_str(text.trim(), "%Y-%m-%d")
        .ok()
        .and_then(|d| d.and_hms_opt(0, 0, 0))
}

#[cfg(test)]
mod tests {
    use super::*;

    // The second of the day is the standard library's `rem_euclid` (the reference), bit
    // for bit, whether it takes the whole-second path or not: whole and fractional
    // seconds, zero of either sign, negative times, day boundaries and huge values.
    #[test]
    fn second_of_day_is_rem_euclid_bit_for_bit() {
        let mut ts = vec![
            0.0, -0.0, 0.5, 1.0, -1.0, 86_399.0, 86_400.0, 86_401.0, -86_400.0,
        ];
        ts.extend([1.7e9, 1.7e9 + 0.25, 8.99e15, 9.0e15, 1e17, -1.7e9, 1e-300]);
        for i in 0..5000u64 {
            let x = (i.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 20) as f64;
            ts.extend([x, x + 0.1, -x, x * 86_400.0, x / 7.0]);
        }
        for offset in [0, 3600, -18_000] {
            let c = Calendar::absolute_local(offset);
            for &t in &ts {
                let want = c.epoch(t).rem_euclid(DAY_S);
                assert_eq!(c.second_of_day(t).to_bits(), want.to_bits(), "t = {t}");
            }
        }
    }

    #[test]
    fn weekdays_and_months() {
        // 2026-03-02 is a Monday (calendar fact).
        let c = Calendar::elapsed_from(parse_start("2026-03-02").unwrap());
        assert_eq!(c.weekday(0.0), 0);
        assert_eq!(c.weekday(6.0 * DAY_S + 10.0), 6);
        assert_eq!(c.second_of_day(3600.0 * 25.0), 3600.0);
        // March has 31 days, so April starts 30 days after 2 March.
        let m = c.month_starts(0.0, 60.0 * DAY_S);
        assert_eq!(
            m,
            vec![30.0 * DAY_S, 61.0 * DAY_S]
                .into_iter()
                .filter(|t| *t < 60.0 * DAY_S)
                .collect::<Vec<_>>()
        );
    }

    #[test]
    fn iso_forms() {
        let a = parse_iso8601("2026-03-02T08:00:00Z").unwrap();
        assert_eq!(parse_iso8601("2026-03-02 08:00:00").unwrap(), a);
        assert_eq!(parse_iso8601("2026-03-02T09:00:00+01:00").unwrap(), a);
        assert_eq!(parse_iso8601("2026-03-02T08:00:00.5").unwrap(), a + 0.5);
        assert!(parse_iso8601("yesterday").is_none());
    }

    #[test]
    fn offsets_are_returned_east_of_utc() {
        let (t, off) = parse_iso8601_offset("2026-03-02T09:00:00+01:00").unwrap();
        assert_eq!(
            (t, off),
            (parse_iso8601("2026-03-02T08:00:00Z").unwrap(), Some(3600))
        );
        assert_eq!(
            parse_iso8601_offset("2026-03-02 03:00:00-0500").unwrap().1,
            Some(-18_000)
        );
        assert_eq!(
            parse_iso8601_offset("2026-03-02T08:00:00Z").unwrap().1,
            Some(0)
        );
        assert_eq!(parse_iso8601_offset("2026-03-02T08:00:00").unwrap().1, None);
        // 00:30 on Monday 2026-03-02 at +01:00 is 23:30 on Sunday in UTC.
        let t = parse_iso8601("2026-03-02T00:30:00+01:00").unwrap();
        assert_eq!(Calendar::absolute_local(3600).weekday(t), 0);
        assert_eq!(Calendar::absolute_local(3600).second_of_day(t), 1800.0);
        assert_eq!(Calendar::absolute().weekday(t), 6);
    }
}

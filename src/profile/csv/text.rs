//! Text for messages: field text in quotes (shortened when long), seconds without
//! needless decimals, and times as the profile gives them (seconds or date-times).

use crate::timebase::TimeKind;

/// Longest field text quoted in a message, characters.
const MAX_QUOTED_CHARS: usize = 40;

/// Field text in double quotes, shortened if long.
pub(super) fn quoted(bytes: &[u8]) -> String {
    quoted_str(&String::from_utf8_lossy(bytes))
}

/// Text in double quotes, shortened if long.
pub(super) fn quoted_str(s: &str) -> String {
    if s.chars().count() > MAX_QUOTED_CHARS {
        let short: String = s.chars().take(MAX_QUOTED_CHARS).collect();
        format!("\"{short}...\"")
    } else {
        format!("\"{s}\"")
    }
}

/// Seconds for messages: whole numbers without decimals, others to 1 µs.
pub(super) fn fmt_secs(t: f64) -> String {
    if !t.is_finite() {
        return format!("{t}");
    }
    if t == t.trunc() && t.abs() < 1e15 {
        return format!("{t:.0}");
    }
    let s = format!("{t:.6}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// A time for messages: `3600 s` (elapsed) or `2026-03-02T08:00:00` (absolute, from
/// epoch seconds; offsets have been applied, so times given with an offset show in UTC).
pub(super) fn fmt_time(kind: TimeKind, t: f64) -> String {
    match kind {
        TimeKind::Elapsed => format!("{} s", fmt_secs(t)),
        TimeKind::Absolute => {
            if !t.is_finite() {
                return format!("{t}");
            }
            let secs = t.floor();
            let nanos = ((t - secs) * 1e9).round().min(999_999_999.0) as u32;
            match chrono::DateTime::from_timestamp(secs as i64, nanos) {
                Some(d) if nanos == 0 => d.format("%Y-%m-%dT%H:%M:%S").to_string(),
                Some(d) => d.format("%Y-%m-%dT%H:%M:%S%.6f").to_string(),
                None => format!("{} s (epoch)", fmt_secs(t)),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fmt_helpers() {
        assert_eq!(fmt_secs(3600.0), "3600");
        assert_eq!(fmt_secs(0.1 + 0.2), "0.3");
        assert_eq!(fmt_secs(1.5), "1.5");
        assert_eq!(
            fmt_time(TimeKind::Absolute, 1_772_438_400.0),
            "2026-03-02T08:00:00"
        );
    }
}

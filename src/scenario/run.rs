//! Validation of `[run]`: run length (in one of three units), time step, calendar start
//! and seed.

use super::check::range_open;
use super::schema::RunSection;
use crate::error::FieldError;
use crate::timebase::parse_start;
use chrono::NaiveDateTime;

/// What `[run]` gives.
pub(super) struct RunSettings {
    /// Requested run length, s, if any.
    pub duration_s: Option<f64>,
    /// Time step, s.
    pub dt_s: f64,
    /// Calendar of elapsed time 0.
    pub start: NaiveDateTime,
    /// Seed of the synthetic generator.
    pub seed: u64,
}

/// The run settings these keys describe.
pub(super) fn run(r: &RunSection) -> Result<RunSettings, FieldError> {
    let dt_s = range_open(
        "run.time_step_s",
        r.time_step_s.unwrap_or(1.0),
        0.0,
        3600.0,
        "s",
    )?;
    let duration_s = match (r.duration_s, r.duration_h, r.duration_days) {
        (None, None, None) => None,
        (Some(x), None, None) => Some(range_open("run.duration_s", x, 0.0, 3.2e9, "s")?),
        (None, Some(x), None) => Some(range_open("run.duration_h", x, 0.0, 8.9e5, "h")? * 3600.0),
        (None, None, Some(x)) => {
            Some(range_open("run.duration_days", x, 0.0, 36_600.0, "days")? * 86_400.0)
        }
        _ => {
            return Err(FieldError::new(
                "run.duration_s",
                "give one of `duration_s`, `duration_h`, `duration_days`",
            ))
        }
    };
    if let Some(d) = duration_s {
        if d < dt_s {
            return Err(FieldError::new(
                "run.duration_s",
                format!("{d} s is shorter than one time step ({dt_s} s)"),
            ));
        }
        if d / dt_s > 1e10 {
            return Err(FieldError::new(
                "run.time_step_s",
                format!("{dt_s} s makes more than 10^10 intervals for a {d} s run"),
            ));
        }
    }
    let start_text = r.start.as_deref().unwrap_or("2026-01-05T00:00:00");
    let start = parse_start(start_text).ok_or_else(|| {
        FieldError::new(
            "run.start",
            format!(
                "`{start_text}` is not a date-time; write e.g. `2026-03-02T00:00:00` or \
                 `2026-03-02`"
            ),
        )
    })?;
    Ok(RunSettings {
        duration_s,
        dt_s,
        start,
        seed: r.seed.unwrap_or(1),
    })
}

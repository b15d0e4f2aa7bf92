//! Range checks shared by the validation modules: each names the dotted key, the value
//! with its unit and the allowed range, so that every scenario error reads the same way.

use crate::error::FieldError;

/// A value with its unit, e.g. `400 V`, or the bare value for a ratio.
pub(super) fn with_unit(x: f64, unit: &str) -> String {
    if unit.is_empty() {
        format!("{x}")
    } else {
        format!("{x} {unit}")
    }
}

/// Checks `lo ≤ x ≤ hi` (and finiteness), naming key, range and unit.
pub(super) fn range(key: &str, x: f64, lo: f64, hi: f64, unit: &str) -> Result<f64, FieldError> {
    if x.is_finite() && x >= lo && x <= hi {
        Ok(x)
    } else {
        Err(FieldError::new(
            key,
            format!(
                "{} is outside the allowed range {lo} to {}",
                with_unit(x, unit),
                with_unit(hi, unit)
            ),
        ))
    }
}

/// Checks `lo < x ≤ hi` (and finiteness), naming key, range and unit.
pub(super) fn range_open(
    key: &str,
    x: f64,
    lo: f64,
    hi: f64,
    unit: &str,
) -> Result<f64, FieldError> {
    if x.is_finite() && x > lo && x <= hi {
        Ok(x)
    } else {
        Err(FieldError::new(
            key,
            format!(
                "{} is outside the allowed range: more than {lo} and at most {}",
                with_unit(x, unit),
                with_unit(hi, unit)
            ),
        ))
    }
}

/// Index 0, 1 or 2 of a phase written `a`/`b`/`c` (or `L1`/`L2`/`L3`).
pub(super) fn phase_index(key: &str, s: &str) -> Result<usize, FieldError> {
    match s.trim().to_ascii_lowercase().as_str() {
        "a" | "l1" => Ok(0),
        "b" | "l2" => Ok(1),
        "c" | "l3" => Ok(2),
        other => Err(FieldError::new(
            key,
            format!("`{other}` is not a phase; write `a`, `b` or `c`"),
        )),
    }
}

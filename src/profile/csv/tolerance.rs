//! How closely times are compared: the tolerance under which a row counts as "at or
//! before" a grid time, and the 1 µs resolution at which spacings between rows are
//! measured (for the median, for gaps, and for the gap test while sampling).

/// Base time tolerance, s: a row at time t counts as "at or before" t_k when
/// t ≤ t_k + tolerance, so that float grids such as 0.1·k do not miss a row.
pub const TIME_TOL_S: f64 = 1e-9;

/// Time tolerance at time `t_s`, s: [`TIME_TOL_S`], widened to a few units in the last
/// place for large times (epoch seconds), where 1 ns is below the resolution of an f64.
#[inline]
pub fn time_tolerance(t_s: f64) -> f64 {
    TIME_TOL_S.max(t_s.abs() * 4.0 * f64::EPSILON)
}

/// A spacing in whole microseconds (saturating for absurd values).
#[inline]
pub(super) fn spacing_key(dt_s: f64) -> i64 {
    (dt_s * 1e6).round() as i64
}

/// True when a spacing of `dt_s` is longer than `threshold_us`, compared at 1 µs as the
/// scan compares them.
#[inline]
pub(super) fn is_gap(dt_s: f64, threshold_us: f64) -> bool {
    spacing_key(dt_s) as f64 > threshold_us
}

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

/// On the grid t_j = `t_first_s` + j·`dt_s`: the first interval j after `k` at which a
/// source that has sampled interval k sees the next row, the row at `t_next_s` (a row
/// counts from the first grid time t_j with `t_next_s` ≤ t_j + tolerance, as the
/// sources compare). Grid times are computed as the engine computes them. `k + 1` when
/// the grid or the time is not usable.
pub(super) fn first_interval_reaching(t_first_s: f64, dt_s: f64, k: u64, t_next_s: f64) -> u64 {
    let reaches = |j: u64| {
        let t = t_first_s + j as f64 * dt_s;
        t_next_s <= t + time_tolerance(t)
    };
    if !(dt_s > 0.0 && dt_s.is_finite() && t_first_s.is_finite() && t_next_s.is_finite()) {
        return k + 1;
    }
    let guess = ((t_next_s - t_first_s) / dt_s).ceil();
    let mut j = if guess > (k + 1) as f64 && guess < 1e15 {
        guess as u64
    } else if guess >= 1e15 {
        return u64::MAX;
    } else {
        k + 1
    };
    // The guess may be off by one either way through rounding and the tolerance.
    while j > k + 1 && reaches(j - 1) {
        j -= 1;
    }
    while !reaches(j) {
        j += 1;
    }
    j
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_first_grid_time_that_reaches_a_row() {
        // Rows 10 s apart on a 1-s grid from 0: the row at 10 s is seen from j = 10.
        assert_eq!(first_interval_reaching(0.0, 1.0, 3, 10.0), 10);
        // A grid of 0.1 s: 0.1·30 is 3.0000000000000004 in binary, and 0.1·29 falls short;
        // the row at 3 s is seen at j = 30 (within the tolerance either way).
        assert_eq!(first_interval_reaching(0.0, 0.1, 0, 3.0), 30);
        // A row between grid times is seen at the next one.
        assert_eq!(first_interval_reaching(0.0, 1.0, 0, 2.5), 3);
        // Never before k + 1.
        assert_eq!(first_interval_reaching(0.0, 1.0, 7, 2.0), 8);
        // The same answer as stepping the grid one interval at a time.
        for (t0, dt, t_next) in [
            (5.0, 0.3, 17.9),
            (1.7e9, 0.25, 1.7e9 + 3.0),
            (0.0, 0.7, 7.0),
        ] {
            let mut j = 1u64;
            loop {
                let t = t0 + j as f64 * dt;
                if t_next <= t + time_tolerance(t) {
                    break;
                }
                j += 1;
            }
            assert_eq!(first_interval_reaching(t0, dt, 0, t_next), j);
        }
    }
}

//! The spacing statistics of pass 1: a histogram of the spacings between used rows, in
//! whole microseconds, bounded in size, from which the median spacing comes.

use std::collections::BTreeMap;

/// Most distinct spacings kept at full (1 µs) resolution; beyond this the histogram
/// coarsens tenfold at a time, so that its memory stays bounded.
const MAX_SPACING_BINS: usize = 1 << 16;

/// Histogram of spacings in µs, with a run-length front so that the common case (the
/// same spacing again) does not touch the map. Exact while there are at most
/// [`MAX_SPACING_BINS`] distinct spacings; beyond that the bins widen tenfold at a time.
#[derive(Debug)]
pub(super) struct Spacings {
    hist: BTreeMap<i64, u64>,
    /// Bin width, µs.
    res_us: i64,
    run_key: i64,
    run_len: u64,
    n: u64,
    pub(super) min_us: i64,
    pub(super) max_us: i64,
}

impl Default for Spacings {
    fn default() -> Self {
        Spacings {
            hist: BTreeMap::new(),
            res_us: 1,
            run_key: 0,
            run_len: 0,
            n: 0,
            min_us: i64::MAX,
            max_us: i64::MIN,
        }
    }
}

impl Spacings {
    #[inline]
    pub(super) fn add(&mut self, key: i64) {
        self.n += 1;
        self.min_us = self.min_us.min(key);
        self.max_us = self.max_us.max(key);
        if self.run_len > 0 && key == self.run_key {
            self.run_len += 1;
        } else {
            self.flush();
            self.run_key = key;
            self.run_len = 1;
        }
    }

    /// [`Spacings::add`] of the same key as the last one added.
    #[inline(always)]
    pub(super) fn add_again(&mut self) {
        self.n += 1;
        self.run_len += 1;
    }

    fn bin(&self, key: i64) -> i64 {
        key.div_euclid(self.res_us)
    }

    pub(super) fn flush(&mut self) {
        if self.run_len > 0 {
            let b = self.bin(self.run_key);
            *self.hist.entry(b).or_insert(0) += self.run_len;
            self.run_len = 0;
            if self.hist.len() > MAX_SPACING_BINS {
                self.coarsen();
            }
        }
    }

    /// Widens the bins tenfold.
    fn coarsen(&mut self) {
        let old = std::mem::take(&mut self.hist);
        for (b, c) in old {
            *self.hist.entry(b.div_euclid(10)).or_insert(0) += c;
        }
        self.res_us = self.res_us.saturating_mul(10);
    }

    /// Median of the spacings, µs (mean of the two middle ones for an even count; a bin
    /// stands for its middle when the bins are wider than 1 µs). Call after `flush`.
    pub(super) fn median_us(&self) -> f64 {
        let n = self.n;
        if n == 0 {
            return 0.0;
        }
        let (lo, hi) = ((n - 1) / 2, n / 2);
        let (mut a, mut b) = (None, None);
        let mut seen = 0;
        for (&key, &count) in &self.hist {
            seen += count;
            if a.is_none() && seen > lo {
                a = Some(key);
            }
            if seen > hi {
                b = Some(key);
                break;
            }
        }
        let value = |bin: i64| {
            if self.res_us == 1 {
                bin as f64
            } else {
                (bin as f64 + 0.5) * self.res_us as f64
            }
        };
        match (a, b) {
            (Some(a), Some(b)) => (value(a) + value(b)) / 2.0,
            _ => 0.0,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn median_of_histogram() {
        let mut s = Spacings::default();
        for k in [10, 10, 30, 20, 10, 40] {
            s.add(k);
        }
        s.flush();
        // Sorted: 10 10 10 20 30 40 → median (10 + 20) / 2.
        assert_eq!(s.median_us(), 15.0);
        assert_eq!((s.min_us, s.max_us), (10, 40));
        let mut s = Spacings::default();
        for k in [5, 1, 9] {
            s.add(k);
        }
        s.flush();
        assert_eq!(s.median_us(), 5.0);
    }

    #[test]
    fn histogram_memory_is_bounded() {
        let mut s = Spacings::default();
        for k in 0..(3 * MAX_SPACING_BINS as i64) {
            s.add(1_000_000 + k);
        }
        s.flush();
        assert!(s.hist.len() <= MAX_SPACING_BINS);
        assert!(s.res_us > 1);
        // The spacings are 1 s + 0 … 196 607 µs, median about 1.098 s.
        let m = s.median_us();
        assert!((m - 1_098_303.5).abs() < 10.0, "{m}");
    }
}

//! Invariants of the designer, on random inputs: the recommended total covers the share
//! of time asked for and no smaller level does; the energy-weighted figure grows with the
//! coverage; the levels a layout reaches run from 0 to its total.

use bankstep::design::layout::{Family, Layout};
use bankstep::design::need::{CurveBuilder, DurationCurve};
use proptest::prelude::*;

proptest! {
    #[test]
    fn quantile_covers_the_share_and_no_lower_level_does(
        pieces in prop::collection::vec((0.0f64..500.0, 1.0f64..3600.0), 1..60),
        coverage in 0.01f64..1.0,
    ) {
        let c = DurationCurve::from_pieces(pieces.iter().copied());
        let q = c.quantile(coverage);
        let total = c.total_s();
        let covered: f64 = pieces.iter().filter(|p| p.0 <= q).map(|p| p.1).sum();
        prop_assert!(covered >= coverage * total * (1.0 - 1e-9));
        // The next lower level present covers less than asked.
        if let Some(lower) = pieces.iter().map(|p| p.0).filter(|&k| k < q).reduce(f64::max) {
            let below: f64 = pieces.iter().filter(|p| p.0 <= lower).map(|p| p.1).sum();
            prop_assert!(below < coverage * total * (1.0 + 1e-9));
        }
        prop_assert!(q <= c.max_kvar());
    }

    #[test]
    fn energy_figure_grows_with_coverage_and_delivers_it(
        pieces in prop::collection::vec((0.0f64..500.0, 1.0f64..3600.0), 1..60),
        a in 0.0f64..1.0,
        b in 0.0f64..1.0,
    ) {
        let c = DurationCurve::from_pieces(pieces.iter().copied());
        let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
        let (qa, qb) = (c.energy_quantile(lo), c.energy_quantile(hi));
        prop_assert!(qa <= qb + 1e-9);
        prop_assert!(qb <= c.max_kvar() + 1e-9);
        // A bank of qb delivers the share asked for: Σ min(k, Q)·s = hi · Σ k·s.
        let need: f64 = pieces.iter().map(|p| p.0 * p.1).sum();
        let delivered: f64 = pieces.iter().map(|p| p.0.min(qb) * p.1).sum();
        prop_assert!((delivered - hi * need).abs() <= 1e-6 * need.max(1.0));
    }

    #[test]
    fn rounding_keeps_time_and_errs_high(
        pieces in prop::collection::vec((0.0f64..500.0, 1.0f64..100.0), 20..200),
    ) {
        let mut b = CurveBuilder::with_capacity_limit(16);
        for &(k, s) in &pieces {
            b.add(k, s);
        }
        let c = b.finish();
        let total: f64 = pieces.iter().map(|p| p.1).sum();
        prop_assert!((c.total_s() - total).abs() <= 1e-9 * total);
        let exact = DurationCurve::from_pieces(pieces.iter().copied());
        for cov in [0.5, 0.9, 0.95, 1.0] {
            prop_assert!(c.quantile(cov) >= exact.quantile(cov) - 1e-9);
        }
    }

    #[test]
    fn reachable_levels_run_from_zero_to_the_total(
        sizes in prop::collection::vec(prop::sample::select(vec![5.0, 10.0, 12.5, 25.0, 50.0]), 2..8),
        detuned in any::<bool>(),
    ) {
        let p = if detuned { 0.07 } else { 0.0 };
        let l = Layout::new(Family::Equal, sizes.clone(), p, 400.0);
        let r = l.reachable_kvar();
        prop_assert_eq!(r[0], 0.0);
        prop_assert!((r.last().unwrap() - l.total_kvar).abs() < 1e-9);
        prop_assert!(r.len() <= 1 << sizes.len());
        prop_assert!(r.windows(2).all(|w| w[0] < w[1]));
    }
}

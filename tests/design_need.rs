//! The kvar a site needs, from its load profile: the recommended total at a coverage is
//! the quantile of the time-weighted duration curve, checked against values worked out
//! by hand with the kW-multiplier relation Q = P·(tan φ1 − tan φ2) of IEEE Std 141.

use bankstep::design::need::{self, kvar_needed};
use bankstep::pf::{tan_phi_of, PfTarget};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::io::Write;
use std::path::Path;

/// Writes a CSV profile of hourly (or `spacing_s`) rows, each a balanced three-phase load
/// given by its total P (kW) and PF (lagging), and a scenario reading it.
fn study(dir: &Path, rows: &[(f64, f64)], spacing_s: f64, target: &str) -> Study {
    let csv = dir.join("load.csv");
    let mut f = std::fs::File::create(&csv).unwrap();
    writeln!(f, "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar").unwrap();
    for (i, &(p, pf)) in rows.iter().enumerate() {
        let q = p * tan_phi_of(pf);
        let (pp, qq) = (p / 3.0, q / 3.0);
        writeln!(f, "{},{pp},{qq},{pp},{qq},{pp},{qq}", i as f64 * spacing_s).unwrap();
    }
    let text = format!(
        "[[steps]]\nkvar = 50\ncount = 4\n[controller]\ntarget_pf = \"{target}\"\n\
         [load]\ncsv = \"load.csv\"\n[run]\ntime_step_s = 1\n"
    );
    let path = dir.join("site.toml");
    std::fs::write(&path, &text).unwrap();
    Study::prepare(Scenario::from_file(&path).unwrap()).unwrap()
}

// IEEE Std 141 (Red Book), kW multiplier table, from memory for the table: the multiplier
// tan φ1 − tan φ2 printed to three decimals. Exact values 0.80→0.95: 0.42132,
// 0.70→0.95: 0.69152, 0.85→0.95: 0.29106, 0.80→1.00: 0.75000, 0.90→0.95: 0.15564.
#[test]
fn kw_multipliers_match_the_table() {
    for (from, to, m) in [
        (0.80, 0.95, 0.421),
        (0.70, 0.95, 0.692),
        (0.85, 0.95, 0.291),
        (0.80, 1.00, 0.750),
        (0.90, 0.95, 0.156),
    ] {
        let target = PfTarget::lag(to).tan_phi();
        let need = kvar_needed(1.0, tan_phi_of(from), target);
        assert!((need - m).abs() < 1e-3, "{from}→{to}: {need} against {m}");
    }
}

// A constant 300 kW load at PF 0.80 lag for a day of 15-minute rows, target 0.95 lag.
// By hand: Q_c = 300 × 0.42132 (IEEE Std 141 kW multiplier, 0.80→0.95) = 126.40 kvar at
// every instant, so every coverage gives it, the maximum too, and the energy-weighted
// figure at 95 % is 0.95 × 126.40 = 120.08 kvar (a bank of Q delivers min(Q_c, Q) each
// instant). The 96 rows hold for 86 400 one-second intervals, and the need is read from
// each row once.
#[test]
fn constant_load_needs_its_multiplier_times_p() {
    let dir = tempfile::tempdir().unwrap();
    let rows = vec![(300.0, 0.80); 96];
    let st = study(dir.path(), &rows, 900.0, "0.95 lag");
    let n = need::measure(&st, 0.95, &mut |_, _| {}).unwrap();
    let by_table = 300.0 * 0.421; // the table's rounded multiplier
    assert!(
        (n.recommended_kvar - by_table).abs() < 300.0 * 1e-3,
        "{n:?}"
    );
    assert!((n.recommended_kvar - 126.396).abs() < 1e-2);
    assert_eq!(n.max_kvar, n.recommended_kvar);
    assert!((n.energy_weighted_kvar - 0.95 * n.recommended_kvar).abs() < 1e-9);
    assert!((n.duration_s - 86_400.0).abs() < 1e-6);
    assert_eq!(n.samples_read, 96);
    assert_eq!(n.share_no_need, 0.0);
}

// Two levels, hourly rows for 10 h, target 0.95 lag (worked by hand, multipliers of
// IEEE Std 141's kW multiplier table):
// - 8 h at 100 kW, PF 0.85: Q_c = 100 × 0.29106 = 29.106 kvar;
// - 2 h at 300 kW, PF 0.70: Q_c = 300 × 0.69152 = 207.456 kvar.
// The need is at most 29.106 kvar for 80 % of the time, so coverage 0.80 (and 0.75) gives
// 29.106 kvar and coverage 0.95 gives 207.456 kvar. Energy-weighted at 95 %: per hour of
// the run 0.8 × 29.106 + 0.2 × 207.456 = 64.776 kvarh; a bank of Q between the levels
// delivers 0.8 × 29.106 + 0.2·Q, which reaches 0.95 × 64.776 = 61.537 at Q = 191.26 kvar.
#[test]
fn two_level_load_takes_the_quantile_of_the_duration_curve() {
    let dir = tempfile::tempdir().unwrap();
    let mut rows = vec![(100.0, 0.85); 10];
    rows[3] = (300.0, 0.70);
    rows[7] = (300.0, 0.70);
    let st = study(dir.path(), &rows, 3600.0, "0.95 lag");
    let low = 100.0 * 0.29106;
    let high = 300.0 * 0.69152;
    let n95 = need::measure(&st, 0.95, &mut |_, _| {}).unwrap();
    assert!(
        (n95.recommended_kvar - high).abs() < 1e-3 * 300.0,
        "{n95:?}"
    );
    assert!((n95.max_kvar - high).abs() < 1e-3 * 300.0);
    assert!((n95.energy_weighted_kvar - 191.26).abs() < 0.05, "{n95:?}");
    assert!((n95.kvarh_needed - (8.0 * low + 2.0 * high)).abs() < 0.05);
    assert_eq!(n95.samples_read, 10);
    for c in [0.75, 0.80] {
        let n = need::measure(&st, c, &mut |_, _| {}).unwrap();
        assert!(
            (n.recommended_kvar - low).abs() < 1e-3 * 100.0,
            "{c}: {n:?}"
        );
    }
    // The curve for figures starts at the largest need and ends at the smallest.
    assert!((n95.curve[0].kvar - high).abs() < 0.5);
    assert!((n95.curve.last().unwrap().kvar - low).abs() < 0.5);
}

// Leading and exporting rows need nothing and count as time needing 0 kvar (worked by
// hand): 6 h at 100 kW PF 0.80 lag (Q_c = 42.132 kvar), 2 h leading at 100 kW with
// Q = −20 kvar, 2 h exporting 50 kW. The need is 0 for 40 % of the time, so coverage 0.40
// needs nothing and coverage 0.41 needs 42.132 kvar.
#[test]
fn leading_and_exporting_time_counts_as_no_need() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("load.csv");
    let mut f = std::fs::File::create(&csv).unwrap();
    writeln!(f, "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar").unwrap();
    let q80 = 100.0 * tan_phi_of(0.80) / 3.0;
    let rows: Vec<(f64, f64)> = (0..10)
        .map(|i| match i {
            2 | 3 => (100.0 / 3.0, -20.0 / 3.0),
            6 | 7 => (-50.0 / 3.0, 10.0),
            _ => (100.0 / 3.0, q80),
        })
        .collect();
    for (i, (p, q)) in rows.iter().enumerate() {
        writeln!(f, "{},{p},{q},{p},{q},{p},{q}", i * 3600).unwrap();
    }
    drop(f);
    let path = dir.path().join("site.toml");
    std::fs::write(
        &path,
        "[[steps]]\nkvar = 25\ncount = 2\n[load]\ncsv = \"load.csv\"\n",
    )
    .unwrap();
    let st = Study::prepare(Scenario::from_file(&path).unwrap()).unwrap();
    let n = need::measure(&st, 0.40, &mut |_, _| {}).unwrap();
    assert_eq!(n.recommended_kvar, 0.0);
    assert!((n.share_no_need - 0.4).abs() < 1e-12);
    assert!((n.share_export - 0.2).abs() < 1e-12);
    assert!((n.share_leading_load - 0.2).abs() < 1e-12);
    let n = need::measure(&st, 0.41, &mut |_, _| {}).unwrap();
    assert!((n.recommended_kvar - 42.132).abs() < 1e-2, "{n:?}");
}

//! Hand-derived controller cases: staircase loads whose operation times and counts were
//! worked out on paper from the setting semantics (demand ΔQ = Q_m − P_m·tan φ_t, strict
//! dead band, consecutive-interval switching delay, discharge lockout, step orderings).
//! The bus is stiff (no transformer, infinite grid), so every step delivers its nominal
//! kvar and the arithmetic stays exact.

mod common;
use common::{op, record_with, Pieces};

/// Four 25 kvar steps, target 1.0, T_sw = 10 s, T_d = 60 s, Δt = 1 s, 400 s.
fn four_equal(ordering: &str) -> String {
    format!(
        r#"
[[steps]]
kvar = 25
count = 4
[controller]
target_pf = 1.0
switching_delay_s = 10
discharge_time_s = 60
ordering = "{ordering}"
[load.synthetic]
[run]
duration_s = 400
"#
    )
}

/// Q = 60 kvar to 100 s, 10 kvar to 300 s, then 80 kvar; P = 100 kW.
fn staircase() -> Pieces {
    Pieces(vec![
        (0.0, 100.0, 60.0),
        (100.0, 100.0, 10.0),
        (300.0, 100.0, 80.0),
    ])
}

// Worked on paper: dead band 0.65 × 25 = 16.25 kvar (default, common practice).
// ΔQ 60 → close at t=10 (10 consecutive wishes from k=0), ΔQ 35 → close at 20, ΔQ 10 in
// band. At 100 s ΔQ = 10 − 50 = −40 → open at 110; ΔQ −15 in band. At 300 s ΔQ 55 →
// close at 310 (step 2 off since 110, 200 s ≥ T_d), ΔQ 30 → close at 320, ΔQ 5.
#[test]
fn sequential_staircase() {
    let (r, rec) = record_with(&four_equal("sequential"), staircase());
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 1, true),
            op(20.0, 2, true),
            op(110.0, 2, false),
            op(310.0, 2, true),
            op(320.0, 3, true)
        ]
    );
    assert_eq!(r.metrics.switching.total_operations, 5);
    assert_eq!(rec.masks.last().unwrap().numbers(), vec![1, 2, 3]);
}

// Rotating: first in, first out. Opening at 110 takes step 1 (on since 10, longest);
// closing at 310 takes step 3 (off since 0) before step 1 (off since 110).
#[test]
fn rotating_staircase() {
    let (_, rec) = record_with(&four_equal("rotating"), staircase());
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 1, true),
            op(20.0, 2, true),
            op(110.0, 1, false),
            op(310.0, 3, true),
            op(320.0, 4, true)
        ]
    );
}

// Best-fit with equal steps: residuals tie, so fewer operations wins, then the lower
// number. At 310 step 1 (2 operations) loses to step 3 (none); at 320 to step 4.
#[test]
fn best_fit_staircase_equal_steps() {
    let (_, rec) = record_with(&four_equal("best-fit"), staircase());
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 1, true),
            op(20.0, 2, true),
            op(110.0, 1, false),
            op(310.0, 3, true),
            op(320.0, 4, true)
        ]
    );
}

/// Steps of 10, 20 and 40 kvar, target 1.0, T_sw 10 s, T_d 60 s; dead band 6.5 kvar.
fn binary(ordering: &str) -> String {
    format!(
        r#"
[[steps]]
kvar = 10
[[steps]]
kvar = 20
[[steps]]
kvar = 40
[controller]
target_pf = 1.0
switching_delay_s = 10
discharge_time_s = 60
ordering = "{ordering}"
[load.synthetic]
[run]
duration_s = 300
"#
    )
}

/// Q = 55 kvar to 100 s, 25 kvar to 200 s, then 70 kvar; P = 100 kW.
fn staircase_b() -> Pieces {
    Pieces(vec![
        (0.0, 100.0, 55.0),
        (100.0, 100.0, 25.0),
        (200.0, 100.0, 70.0),
    ])
}

// Best-fit, on paper: ΔQ 55 → the 40 leaves 15 (best) at t=10; ΔQ 15 → 10 and 20 both
// leave 5: tie, no operations yet, lower number: step 1 at 20. At 100 s ΔQ = −25: opening
// step 1 or step 3 both leave 15; both have one operation; lower number: step 1 at 110.
// ΔQ −15: opening step 3 would leave +25, no reduction, so no operation (best-fit checks).
// At 200 s ΔQ 30: step 2 leaves 10 (step 1 leaves 20) → 210; ΔQ 10 → step 1 at 220.
#[test]
fn best_fit_binary_steps() {
    let (r, rec) = record_with(&binary("best-fit"), staircase_b());
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 3, true),
            op(20.0, 1, true),
            op(110.0, 1, false),
            op(210.0, 2, true),
            op(220.0, 1, true)
        ]
    );
    let per: Vec<u64> = r
        .metrics
        .switching
        .per_step
        .iter()
        .map(|s| s.operations)
        .collect();
    assert_eq!(per, vec![3, 1, 1]);
    // The demand stuck at −15 kvar from 110 s to 200 s is outside the band but irreducible.
    assert!((rec.demand[150] + 15.0).abs() < 1e-9);
}

// Sequential does not check that an operation helps, and it overshoots: 10 → 20 → 40
// (ΔQ −15 at 30 s) → opens step 3 at 40 (ΔQ +25). Step 3 is then in lockout until 100 s;
// the connect wish keeps counting, so it closes at exactly 100 s (t_close − t_open = 60 =
// T_d). The load step at 100 s gives ΔQ = 25 − 70 = −45: open step 3 at 110 (ΔQ −5). At
// 200 s ΔQ 40: close step 3 at 210 (ΔQ 0).
// Hunting window 10 × T_sw = 100 s: step 3's operations at 30, 40, 100, 110, 210 make four
// consecutive pairs no further apart than 100 s, so four cycles.
#[test]
fn sequential_binary_steps_lockout_and_hunting() {
    let (r, rec) = record_with(&binary("sequential"), staircase_b());
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 1, true),
            op(20.0, 2, true),
            op(30.0, 3, true),
            op(40.0, 3, false),
            op(100.0, 3, true),
            op(110.0, 3, false),
            op(210.0, 3, true)
        ]
    );
    assert_eq!(r.metrics.switching.total_operations, 7);
    assert_eq!(r.metrics.switching.hunting_cycles, 4);
    let s3 = &r.metrics.switching.per_step[2];
    assert_eq!(
        (s3.step, s3.closings, s3.openings, s3.hunting_cycles),
        (3, 3, 2, 4)
    );
}

// Rotating on the binary bank, on paper: closes 1, 2, 3 at 10, 20, 30 (ΔQ −15); opens
// step 1 (on since 10, longest) at 40: steps 2 + 3 = 60 kvar, ΔQ −5. At 100 s ΔQ = 25 − 60
// = −35: opens step 2 (on since 20) at 110, ΔQ −15, then step 3 at 120, ΔQ +25. Closes
// step 1 (off since 40, longest) at 130, ΔQ 15. The wish holds from 130 s but steps 2 and
// 3 are in lockout until 170 s and 180 s; the count keeps running, so step 2 (off longest)
// closes at 170, ΔQ −5. At 200 s ΔQ = 70 − 30 = 40: step 3 closes at 210, ΔQ 0.
#[test]
fn rotating_binary_steps() {
    let (r, rec) = record_with(&binary("rotating"), staircase_b());
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 1, true),
            op(20.0, 2, true),
            op(30.0, 3, true),
            op(40.0, 1, false),
            op(110.0, 2, false),
            op(120.0, 3, false),
            op(130.0, 1, true),
            op(170.0, 2, true),
            op(210.0, 3, true)
        ]
    );
    assert_eq!(r.metrics.switching.total_operations, 9);
}

/// One 25 kvar step sitting half a step from the target, with a chosen dead band.
fn half_step(dead_band_fraction: f64) -> String {
    format!(
        r#"
[[steps]]
kvar = 25
[controller]
target_pf = 1.0
dead_band_fraction = {dead_band_fraction}
switching_delay_s = 10
discharge_time_s = 30
[load.synthetic]
[run]
duration_s = 3600
"#
    )
}

// Common practice: a dead band below half the smallest step hunts, because one operation
// moves ΔQ by a full step; at 0.65 of a step it does not. With Q = 13 kvar, ΔQ is +13 with
// the step open and −12 with it closed: both outside ±10 (0.4 × 25) but inside ±16.25.
#[test]
fn dead_band_below_half_a_step_hunts() {
    let load = || Pieces(vec![(0.0, 100.0, 13.0)]);
    let (narrow, rec) = record_with(&half_step(0.4), load());
    assert!(
        narrow.metrics.switching.hunting_cycles > 50,
        "{}",
        narrow.metrics.switching.hunting_cycles
    );
    // Lockout never broken: every closing at least T_d = 30 s after the previous opening.
    let mut last_open = f64::NEG_INFINITY;
    for o in &rec.ops {
        if o.close {
            assert!(o.t - last_open >= 30.0 - 1e-9);
        } else {
            last_open = o.t;
        }
    }
    let (wide, _) = record_with(&half_step(0.65), load());
    assert_eq!(wide.metrics.switching.total_operations, 0);
    assert_eq!(wide.metrics.switching.hunting_cycles, 0);
}

// The wish test is strict: ΔQ exactly equal to the dead band is no wish.
#[test]
fn demand_equal_to_dead_band_is_no_wish() {
    let toml = r#"
[[steps]]
kvar = 20
[controller]
target_pf = 1.0
dead_band_kvar = 12
switching_delay_s = 5
[load.synthetic]
[run]
duration_s = 100
"#;
    let (r, _) = record_with(toml, Pieces(vec![(0.0, 50.0, 12.0)]));
    assert_eq!(r.metrics.switching.total_operations, 0);
    let (r, _) = record_with(toml, Pieces(vec![(0.0, 50.0, 12.001)]));
    assert_eq!(r.metrics.switching.total_operations, 1);
}

/// Four 25 kvar steps, target 1.0, T_sw 5 s, with extra controller lines.
fn four_fast(extra: &str) -> String {
    format!(
        r#"
[[steps]]
kvar = 25
count = 4
[controller]
target_pf = 1.0
switching_delay_s = 5
{extra}
[load.synthetic]
[run]
duration_s = 200
"#
    )
}

// A 10 s averaging window with a 5 s delay, on paper (Q steps from 0 to 60 kvar at 50 s,
// P = 100 kW, dead band 16.25 kvar): the average first exceeds the band at k = 52
// (3 × 60 / 10 = 18), so step 1 closes at 57. The average still holds the old 60 kvar
// samples, so step 2 closes at 62 and step 3 at 67 (average 22.5 kvar at k = 66 although
// the supply is at 10 kvar): the averaging lag overshoots to −15 kvar, inside the band.
#[test]
fn averaging_window_lags_and_overshoots() {
    let (_, rec) = record_with(
        &four_fast("averaging_s = 10"),
        Pieces(vec![(0.0, 100.0, 0.0), (50.0, 100.0, 60.0)]),
    );
    assert_eq!(
        rec.ops,
        vec![op(57.0, 1, true), op(62.0, 2, true), op(67.0, 3, true)]
    );
    assert!((rec.q[199] + 15.0).abs() < 1e-9);
}

// Single-phase measurement on phase a assumes balance and multiplies by 3: a load whose
// reactive power is all on phase b is invisible to it, so nothing switches, while a
// three-phase measurement sees 60 kvar and closes two steps.
#[test]
fn single_phase_measurement_misses_other_phases() {
    use bankstep::profile::LoadSample;
    let one_phase = || {
        common::Listed(vec![
            LoadSample {
                p_kw: [30.0, 40.0, 30.0],
                q_kvar: [0.0, 60.0, 0.0],
            };
            200
        ])
    };
    let (r, _) = record_with(
        &four_fast("measurement = \"single-phase\"\nmeasurement_phase = \"a\""),
        one_phase(),
    );
    assert_eq!(r.metrics.switching.total_operations, 0);
    let (r, _) = record_with(&four_fast(""), one_phase());
    assert_eq!(r.metrics.switching.total_operations, 2);
}

// Overcorrection episodes, on paper: a fixed 50 kvar step with 20 kvar of load leaves the
// supply 30 kvar leading, beyond the default threshold (the smallest switched step,
// 25 kvar, strict) for 300 s: one episode, caused by the fixed step at light load. A
// second leading spell of 30 s is shorter than the 60 s minimum and does not count. The
// run starts on Monday 2026-01-05 (the default calendar), so the time falls on a Monday.
#[test]
fn overcorrection_by_fixed_step() {
    let toml = r#"
[[steps]]
kvar = 50
fixed = true
[[steps]]
kvar = 25
count = 4
[controller]
target_pf = 1.0
switching_delay_s = 60
[load.synthetic]
[run]
duration_s = 600
"#;
    let load = Pieces(vec![
        (0.0, 100.0, 20.0),
        (300.0, 100.0, 80.0),
        (330.0, 100.0, 20.0),
        (360.0, 100.0, 80.0),
    ]);
    let (r, rec) = record_with(toml, load);
    let o = &r.metrics.overcorrection;
    assert_eq!((o.episodes, o.total_s, o.longest_s), (1, 300.0, 300.0));
    assert!((o.worst_leading_kvar - 30.0).abs() < 1e-9);
    assert_eq!(
        o.dominant_cause,
        Some(bankstep::metrics::OvercorrectionCause::FixedSteps)
    );
    assert_eq!(o.by_weekday_s[0], 300.0);
    assert_eq!(rec.ops, vec![op(420.0, 2, true)]);
    // Fixed steps never appear among the switched steps but do in the wear list.
    assert_eq!(r.metrics.switching.per_step.len(), 4);
    assert_eq!(r.metrics.wear.len(), 5);
    assert!(r.metrics.wear[0].fixed && r.metrics.wear[0].years_to_rated_life.is_none());
    assert!((r.metrics.wear[0].energized_h - 600.0 / 3600.0).abs() < 1e-12);
}

// An episode still open at the end of the run counts.
#[test]
fn overcorrection_open_at_the_end_counts() {
    let toml = r#"
[[steps]]
kvar = 50
fixed = true
[[steps]]
kvar = 25
[load.synthetic]
[run]
duration_s = 120
"#;
    let (r, _) = record_with(toml, Pieces(vec![(0.0, 100.0, 60.0), (40.0, 100.0, 10.0)]));
    let o = &r.metrics.overcorrection;
    assert_eq!((o.episodes, o.total_s), (1, 80.0));
}

/// Four 50 kvar steps, target 0.95 lag, T_sw 10 s, T_d 60 s, 300 s, with an export mode
/// and an ordering. Dead band 0.65 × 50 = 32.5 kvar (default, common practice).
fn exporting(mode: &str, ordering: &str) -> String {
    format!(
        r#"
[[steps]]
kvar = 50
count = 4
[controller]
target_pf = "0.95 lag"
switching_delay_s = 10
discharge_time_s = 60
export_mode = "{mode}"
ordering = "{ordering}"
[load.synthetic]
[run]
duration_s = 300
"#
    )
}

// tan φ_t for 0.95 lag = sqrt(1 − 0.95²) / 0.95 = 0.3287 (common practice, also in the
// tariff table of src/pf.rs). Every case starts with 200 kW / 120 kvar imported: ΔQ =
// 120 − 200 × 0.3287 = 54.3 kvar > 32.5, so step 1 closes at 10 s and leaves ΔQ = 4.3 kvar,
// inside the band. From 100 s the load moves to the quadrant under test (supply figures
// include step 1's 50 kvar):
//
// - import, inductive (200 kW, 120 kvar unchanged): nothing more, in every mode.
// - import, capacitive (200 kW, load 20 kvar, supply −30 kvar): ΔQ = −30 − 65.7 = −95.7
//   → step 1 opens at 110 s in every mode (the export mode plays no part while P > 0).
// - export, inductive (−150 kW, load 150 kvar, supply 100 kvar drawn from the grid):
//   absolute: ΔQ = 100 − 150 × 0.3287 = 50.7 > 32.5 → step 2 closes at 110 s, ΔQ 0.7.
//   (On the signed P the demand would be 100 + 49.3 = 149.3 and three steps would close,
//   driving the site leading.) hold: no operation. open: step 1 opens at 110 s.
// - export, capacitive (−150 kW, load 0 kvar, supply −50 kvar): absolute: ΔQ = −50 −
//   49.3 = −99.3 → step 1 opens at 110 s; then ΔQ = −49.3 with nothing left to open.
//   (On the signed P: −50 + 49.3 = −0.7, in band, and the step would stay in.) hold: no
//   operation. open: step 1 opens at 110 s.
#[test]
fn export_modes_in_each_quadrant() {
    let start = (0.0, 200.0, 120.0);
    let quadrants = [
        ("import, inductive", (100.0, 200.0, 120.0)),
        ("import, capacitive", (100.0, 200.0, 20.0)),
        ("export, inductive", (100.0, -150.0, 150.0)),
        ("export, capacitive", (100.0, -150.0, 0.0)),
    ];
    let c1 = op(10.0, 1, true);
    let expected = |quadrant: &str, mode: &str| match (quadrant, mode) {
        ("import, inductive", _) => vec![c1],
        ("import, capacitive", _) => vec![c1, op(110.0, 1, false)],
        ("export, inductive", "absolute") => vec![c1, op(110.0, 2, true)],
        (_, "hold") => vec![c1],
        _ => vec![c1, op(110.0, 1, false)],
    };
    for mode in ["absolute", "hold", "open"] {
        for ordering in ["sequential", "best-fit"] {
            for (name, piece) in quadrants {
                let (_, rec) = record_with(&exporting(mode, ordering), Pieces(vec![start, piece]));
                assert_eq!(
                    rec.ops,
                    expected(name, mode),
                    "{name}, export_mode = {mode}, {ordering}"
                );
            }
        }
    }
}

// 150 kW exported at Q = 0 with no step in: under `absolute` ΔQ = 0 − 150 × 0.3287 =
// −49.3 kvar, nothing to close (and nothing on to open); the bank never adds capacitors
// because P went negative. No mode switches anything.
#[test]
fn export_at_unity_closes_nothing() {
    for mode in ["absolute", "hold", "open"] {
        let (r, rec) = record_with(
            &exporting(mode, "sequential"),
            Pieces(vec![(0.0, -150.0, 0.0)]),
        );
        assert_eq!(r.metrics.switching.total_operations, 0, "{mode}");
        assert!((rec.demand[0] + 49.30).abs() < 0.01, "{}", rec.demand[0]);
    }
}

//! Hand-derived cases for the controller's protections: export release (in every export
//! mode), cap on operations per hour, overvoltage trips one step per delay.

mod common;
use common::{op, record_with, Pieces};

// Export release with a 5 s delay, on paper: Q = 60 kvar at P = 100 kW closes steps 1 and
// 2 at 10 s and 20 s (ΔQ 60 → 35 → 10, dead band 16.25 kvar). From 100 s the site exports
// 50 kW: the condition holds in intervals 100…104, so both steps open together at 105 s.
// The connect wish persists (ΔQ = 60 kvar) but closing is blocked while exporting.
// The export protection is a trip with its own delay and acts whatever the controller's
// export mode: under `absolute` the demand at unity target is unchanged by the sign of P
// (ΔQ = 10 kvar, in band); under `open` the controller's own openings would wait for the
// 10 s disconnect delay (110 s), so the 5 s trip comes first; under `hold` the controller
// does nothing. In each mode both steps open together at 105 s.
#[test]
fn export_opens_all_steps_after_its_delay() {
    for mode in ["absolute", "hold", "open"] {
        export_trip(mode);
    }
}

fn export_trip(mode: &str) {
    let toml = format!(
        r#"
[[steps]]
kvar = 25
count = 4
[controller]
target_pf = 1.0
switching_delay_s = 10
export_mode = "{mode}"
[controller.protection]
trip_on_export = true
export_delay_s = 5
[load.synthetic]
[run]
duration_s = 300
"#
    );
    let (r, rec) = record_with(
        &toml,
        Pieces(vec![(0.0, 100.0, 60.0), (100.0, -50.0, 60.0)]),
    );
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 1, true),
            op(20.0, 2, true),
            op(105.0, 1, false),
            op(105.0, 2, false)
        ],
        "export_mode = {mode}"
    );
    assert_eq!(r.metrics.switching.trips.export, 1);
}

// A cap of two operations per hour: closings wanted at 10, 20 and 30 s (Q = 80 kvar needs
// three 25 kvar steps). The third must wait until the first leaves the 3600 s window:
// an operation at t is allowed when the oldest of the last two is at or before t − 3600,
// so at 3610 s.
#[test]
fn cap_on_operations_per_hour() {
    let toml = r#"
[[steps]]
kvar = 25
count = 4
[controller]
target_pf = 1.0
switching_delay_s = 10
[controller.protection]
max_operations_per_hour = 2
[load.synthetic]
[run]
duration_s = 4000
"#;
    let (_, rec) = record_with(toml, Pieces(vec![(0.0, 100.0, 80.0)]));
    assert_eq!(
        rec.ops,
        vec![op(10.0, 1, true), op(20.0, 2, true), op(3610.0, 3, true)]
    );
}

// Overvoltage: the trip opens one step (the largest; equal steps go to the lowest number)
// once the bus has stayed above the level for the delay, and no step closes while the
// voltage is above it. Every trip is preceded by at least 5 s above 430 V.
#[test]
fn overvoltage_trips_one_step_per_delay() {
    let toml = r#"
[supply]
source_voltage_pu = 1.08
[supply.transformer]
rated_kva = 1000
impedance_pct = 6
x_over_r = 10
[[steps]]
kvar = 100
count = 3
[controller]
target_pf = 1.0
switching_delay_s = 10
discharge_time_s = 60
[controller.protection]
overvoltage_v = 430
overvoltage_delay_s = 5
[load.synthetic]
[run]
duration_s = 600
"#;
    let (r, rec) = record_with(toml, Pieces(vec![(0.0, 10.0, 300.0)]));
    assert!(r.metrics.switching.trips.overvoltage >= 1);
    // The highest-voltage interval is above the level; find every opening and check the
    // five intervals before it were above 430 V on the highest phase (balanced here).
    let mut trips = 0;
    for o in rec.ops.iter().filter(|o| !o.close) {
        let k = o.t as usize;
        assert!(
            rec.u_ll[k - 5..k].iter().all(|u| *u > 430.0),
            "opening at {} without 5 s above 430 V",
            o.t
        );
        trips += 1;
    }
    assert_eq!(trips as u64, r.metrics.switching.trips.overvoltage);
    // No closing happens while the bus is above the level.
    for o in rec.ops.iter().filter(|o| o.close) {
        assert!(rec.u_ll[o.t as usize - 1] <= 430.0);
    }
    // The first trip takes step 1: all steps are equal, and ties go to the lower number.
    assert_eq!(rec.ops.iter().find(|o| !o.close).unwrap().step, 1);
}

// Overvoltage, on paper. Supply: no-load bus 1.09 × 400 = 436 V behind a 1000 kVA, 6 %,
// X/R 10 transformer: X = 0.06 × 400² / 1 MVA × 10/√101 = 0.00955 Ω, R = X/10. Bus
// voltage ≈ E − (R·P + X·Q)/U with Q the supply's reactive power (common practice, the
// usual voltage-drop estimate); a step delivers 100 kvar × (U/400)².
// - 0 to 100 s: load 10 kW, 330 kvar. No step: U ≈ 436 − 0.00955 × 330 000 / 429 = 428.6 V.
//   Dead band 65 kvar, T_sw 10 s: steps close at 10, 20 and 30 s (ΔQ 330, about 214, about
//   95 kvar; then about −27, in band). The bus stays below 440 V (about 436.6 V at the end).
// - From 100 s: load 10 kW, 0 kvar. Three steps: Q ≈ −3 × 100 × (444/400)² = −369 kvar,
//   U ≈ 436 + 0.00955 × 369 000 / 444 = 443.9 V > 440 V. The level holds in intervals 100 to
//   104 (five intervals of 1 s = the 5 s delay), so one step opens at 105 s: the largest,
//   all equal, so the lowest number, step 1. The trip timer restarts from zero.
// - Two steps: Q ≈ −243 kvar, U ≈ 436 + 0.00955 × 243 000 / 441 = 441.3 V > 440 V: step 2
//   opens at 110 s. One step: Q ≈ −120 kvar, U ≈ 438.6 V < 440 V: no further trip.
// The controller's own disconnect wish (ΔQ = −369 kvar) waits for its 1000 s disconnect
// delay and never acts inside the 300 s run.
#[test]
fn overvoltage_opens_one_step_per_delay_by_hand() {
    let toml = r#"
[supply]
source_voltage_pu = 1.09
[supply.transformer]
rated_kva = 1000
impedance_pct = 6
x_over_r = 10
[[steps]]
kvar = 100
count = 3
[controller]
target_pf = 1.0
switching_delay_s = 10
disconnect_delay_s = 1000
discharge_time_s = 60
[controller.protection]
overvoltage_v = 440
overvoltage_delay_s = 5
[load.synthetic]
[run]
duration_s = 300
"#;
    let (r, rec) = record_with(toml, Pieces(vec![(0.0, 10.0, 330.0), (100.0, 10.0, 0.0)]));
    assert_eq!(
        rec.ops,
        vec![
            op(10.0, 1, true),
            op(20.0, 2, true),
            op(30.0, 3, true),
            op(105.0, 1, false),
            op(110.0, 2, false)
        ]
    );
    assert_eq!(r.metrics.switching.trips.overvoltage, 2);
    for (k, u) in [(0, 428.6), (100, 443.9), (105, 441.3), (110, 438.6)] {
        assert!(
            (rec.u_ll[k] - u).abs() < 0.3,
            "interval {k}: {} V",
            rec.u_ll[k]
        );
    }
}

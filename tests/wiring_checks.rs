//! Miswired measurements against hand derivations, and `simulate --wiring-check`.
//!
//! The bus is stiff (no transformer, infinite grid), so the bus voltages are the balanced
//! set V_a = V∠0°, V_b = V∠−120°, V_c = V∠+120° whatever the load, and the controller's
//! reading follows from the phasor diagram alone (U_ab = √3·V∠30°, U_bc = √3·V∠−90°,
//! U_ca = √3·V∠150°; common practice).

mod common;
use assert_cmd::Command;
use bankstep::profile::LoadSample;
use common::{assess_with, record_with, Listed};

/// A constant load: every phase 30 kW, phase a 20 kvar, b and c 6 kvar.
fn load() -> Listed {
    Listed(vec![
        LoadSample {
            p_kw: [30.0; 3],
            q_kvar: [20.0, 6.0, 6.0],
        };
        600
    ])
}

fn text(measurement: &str, wiring: &str) -> String {
    format!(
        r#"
[[steps]]
kvar = 15
count = 4
[controller]
target_pf = "0.95 lag"
switching_delay_s = 10
discharge_time_s = 60
{measurement}
{wiring}
[load.synthetic]
[run]
duration_s = 600
"#
    )
}

/// tan φ of 0.95 lag, sqrt(1 − 0.95²)/0.95 = 0.328684 (common practice).
fn tan_t() -> f64 {
    (1.0f64 - 0.95 * 0.95).sqrt() / 0.95
}

// A current transformer on phase a with its polarity reversed, worked by hand: the
// controller computes 3·U_an·conj(−I_a) = −3·S_a = −90 kW − j60 kvar. It reads an export
// of 90 kW and a leading load; under the default `absolute` export mode its demand is
// Q − |P|·tan φ_t = −60 − 90·0.328684 = −89.58 kvar: it wants to disconnect and, with
// nothing connected, never switches. The site then runs uncorrected: P = 90 kW,
// Q = 32 kvar, PF = 90/sqrt(90² + 32²) = 0.9422 lag.
#[test]
fn a_reversed_current_transformer_never_switches() {
    let m = "measurement = \"single-phase\"";
    let (r, rec) = record_with(&text(m, "[controller.wiring]\nreversed = true"), load());
    let d0 = -60.0 - 90.0 * tan_t();
    assert!((rec.demand[0] - d0).abs() < 1e-9, "{}", rec.demand[0]);
    assert_eq!(r.metrics.switching.total_operations, 0);
    let pf = 90.0 / (90.0f64 * 90.0 + 32.0 * 32.0).sqrt();
    assert!((r.metrics.pf.energy_pf - pf).abs() < 1e-9);
    let (_, a) = assess_with(&text(m, "[controller.wiring]\nreversed = true"), load());
    let f = a
        .findings
        .iter()
        .find(|f| f.topic == "wiring")
        .expect("wiring finding");
    assert!(f.text.contains("I_a reversed with U_an"), "{}", f.text);
    assert!(f.text.contains("never switches"), "{}", f.text);
}

// The controller is set for I_a with U_bc (it turns the reading by the −90° offset:
// c = V_a/U_bc = (1/√3)∠+90°), but the voltage input is wired to U_ca = √3·V∠150°. It
// computes 3·c·U_ca·conj(I_a) = 3·(1∠240°)·S_a, worked by hand:
// (30 + j20)(−0.5 − j0.866025) = (−15 + 17.3205) + j(−25.9808 − 10) = 2.3205 − j35.9808,
// so P = 6.9615 kW, Q = −107.9423 kvar, demand = −107.9423 − 6.9615·0.328684 = −110.230:
// it believes the site leads and never switches.
// Wired to U_ab = √3·V∠30° instead, the factor is 1∠120°:
// (30 + j20)(−0.5 + j0.866025) = (−15 − 17.3205) + j(25.9808 − 10) = −32.3205 + j15.9808,
// so P = −96.9615 kW (an export), Q = 47.9423 kvar and, under `absolute`, demand =
// 47.9423 − 96.9615·0.328684 = 16.0726 kvar: it closes a step after the delay although
// the three-phase demand is only 2.42 kvar (inside the 9.75 kvar dead band).
#[test]
fn another_voltage_pair_turns_the_reading() {
    let m = "measurement = \"single-phase\"\nmeasurement_voltage = \"bc\"";
    let (r, rec) = record_with(&text(m, ""), load());
    // Wired as assumed on a balanced bus the line-to-line input reads the phase exactly.
    assert!((rec.demand[0] - (60.0 - 90.0 * tan_t())).abs() < 1e-9);
    assert!(r.metrics.switching.total_operations >= 2);

    let (r, rec) = record_with(&text(m, "[controller.wiring]\nvoltage = \"ca\""), load());
    let (p, q) = (3.0 * 2.320_508_075_688_77, 3.0 * -35.980_762_113_533_16);
    assert!(
        (rec.demand[0] - (q - p * tan_t())).abs() < 1e-9,
        "{}",
        rec.demand[0]
    );
    assert!((rec.demand[0] - -110.230).abs() < 1e-3);
    assert_eq!(r.metrics.switching.total_operations, 0);

    let (_, rec) = record_with(&text(m, "[controller.wiring]\nvoltage = \"ab\""), load());
    let (p, q): (f64, f64) = (3.0 * -32.320_508_075_688_77, 3.0 * 15.980_762_113_533_16);
    assert!((rec.demand[0] - (q - p.abs() * tan_t())).abs() < 1e-9);
    assert!((rec.demand[0] - 16.0726).abs() < 1e-3);
    assert_eq!(rec.ops[0].t, 10.0);
    assert!(rec.ops[0].close);
}

// Three current transformers with phase a's reversed, worked by hand: the controller
// sums −S_a + S_b + S_c = (−30 + 30 + 30) + j(−20 + 6 + 6) = 30 kW − j8 kvar, demand
// −8 − 30·0.328684 = −17.86 kvar: it never closes a step.
#[test]
fn one_reversed_channel_of_three() {
    let m = "measurement = \"three-phase\"";
    let (r, rec) = record_with(&text(m, "[controller.wiring]\nreversed = \"a\""), load());
    assert!((rec.demand[0] - (-8.0 - 30.0 * tan_t())).abs() < 1e-9);
    assert_eq!(r.metrics.switching.total_operations, 0);
}

#[test]
fn wiring_keys_are_checked() {
    let err = |m: &str, w: &str| {
        bankstep::scenario::Scenario::from_str(&text(m, w), std::path::Path::new("t.toml"))
            .unwrap_err()
            .to_string()
    };
    let three = "measurement = \"three-phase\"";
    let single = "measurement = \"single-phase\"";
    assert!(
        err(three, "[controller.wiring]\ncurrent = \"aab\"").contains("controller.wiring.current")
    );
    assert!(
        err(three, "[controller.wiring]\nreversed = true").contains("controller.wiring.reversed")
    );
    assert!(
        err(three, "[controller.wiring]\nvoltage = \"bc\"").contains("controller.wiring.voltage")
    );
    assert!(err(single, "[controller.wiring]\nvoltage = \"bc\"").contains("line to neutral"));
    assert!(
        err(single, "[controller.wiring]\nreversed = \"a\"").contains("controller.wiring.reversed")
    );
}

// `simulate --wiring-check` on the bundled cold store prints the table: the assumed
// wiring first, then the nine miswirings of three current transformers, each with a
// billed PF and its quadrant and a symptom in words.
#[test]
fn simulate_prints_the_wiring_table() {
    let out = Command::cargo_bin("bankstep")
        .unwrap()
        .args([
            "simulate",
            "scenarios/cold-store.toml",
            "--wiring-check",
            "--quiet",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let table = &text[text.find("Wiring check").expect("a wiring check")..];
    let rows: Vec<&str> = table
        .lines()
        .skip_while(|l| !l.trim_start().starts_with("wiring"))
        .skip(1)
        .collect();
    assert_eq!(rows.len(), 10, "{table}");
    assert!(rows[0].trim_start().starts_with("as assumed"));
    assert!(rows
        .iter()
        .all(|r| r.contains(" lag ") || r.contains(" lead ")));
    assert!(rows
        .iter()
        .any(|r| r.contains("reversed on a, b and c") && r.contains("never switches")));
    assert!(rows.iter().any(|r| r.contains("switches every step in")));
}

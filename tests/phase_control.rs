//! Per-phase figures and measurement modes against hand derivations: a balanced load is
//! seen the same in every mode, an unbalanced one is multiplied by 3 by a single-phase
//! controller, per-phase control follows each phase, and the bundled cold store shows a
//! phase overcorrected behind a three-phase figure that looks fine.
//!
//! The bus is stiff (no transformer, infinite grid) unless said otherwise, so every step
//! delivers its nominal kvar and the arithmetic stays exact.

mod common;
use bankstep::engine::Quiet;
use bankstep::profile::LoadSample;
use bankstep::scenario::Scenario;
use bankstep::study::{Stepping, Study};
use common::{record_with, Listed};
use std::path::Path;

/// Constant per-phase load: P and Q of phases a, b and c.
fn constant(p: [f64; 3], q: [f64; 3], n: usize) -> Listed {
    Listed(vec![LoadSample { p_kw: p, q_kvar: q }; n])
}

fn bank_text(measurement: &str) -> String {
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
[load.synthetic]
[run]
duration_s = 600
"#
    )
}

// tan φ_t of 0.95 lag = sqrt(1 − 0.95²)/0.95 = 0.328684 (common practice). A load of
// a: 30 kW + j20 kvar, b and c: 30 kW + j6 kvar. Worked by hand:
// - three-phase sum: Q = 32, P = 90, demand = 32 − 90·0.328684 = 2.4184 kvar;
// - one current transformer on a, × 3: Q = 60, P = 90, demand = 60 − 29.5816 = 30.4184;
// - on b: Q = 18, demand = 18 − 29.5816 = −11.5816.
#[test]
fn a_single_phase_controller_multiplies_its_phase_by_three() {
    let tan = (1.0f64 - 0.95 * 0.95).sqrt() / 0.95;
    assert!((tan - 0.328_684).abs() < 1e-6);
    let load = || constant([30.0; 3], [20.0, 6.0, 6.0], 600);
    let cases = [
        ("measurement = \"three-phase\"", 32.0 - 90.0 * tan),
        (
            "measurement = \"single-phase\"\nmeasurement_phase = \"a\"",
            60.0 - 90.0 * tan,
        ),
        (
            "measurement = \"single-phase\"\nmeasurement_phase = \"b\"",
            18.0 - 90.0 * tan,
        ),
    ];
    for (m, demand) in cases {
        let (_, rec) = record_with(&bank_text(m), load());
        assert!(
            (rec.demand[0] - demand).abs() < 1e-9,
            "{m}: {} against {demand}",
            rec.demand[0]
        );
    }
    // With phase a measured the controller believes it needs 30.4 kvar: with a dead band
    // of 0.65 × 15 = 9.75 kvar it closes two 15 kvar steps (30.4 → 15.4 → 0.4), which
    // leaves phases b and c leading by 10 − 6 = 4 kvar each from t = 20 s (with one step
    // in, 5 kvar a phase, they still lag by 1 kvar).
    let (r, rec) = record_with(
        &bank_text("measurement = \"single-phase\"\nmeasurement_phase = \"a\""),
        load(),
    );
    assert_eq!(r.metrics.switching.total_operations, 2);
    assert_eq!(rec.masks.last().unwrap().numbers(), vec![1, 2]);
    let b = &r.metrics.phases[1];
    assert_eq!(b.phase, "b");
    assert!(
        (b.share_leading - (600.0 - 20.0) / 600.0).abs() < 1e-12,
        "{} {:?}",
        b.share_leading,
        rec.ops
    );
}

/// A balanced varying load: phases equal, P and Q changing every minute.
fn balanced_varying(n: usize) -> Listed {
    Listed(
        (0..n)
            .map(|k| {
                let m = (k / 60) as f64;
                let p = 30.0 + 10.0 * (m * 0.7).sin();
                let q = 15.0 + 12.0 * (m * 1.3).cos();
                LoadSample {
                    p_kw: [p; 3],
                    q_kvar: [q; 3],
                }
            })
            .collect(),
    )
}

// A balanced load on a balanced bank looks the same to every measurement: the three-phase
// sum, three times any one phase with its own line-to-neutral voltage or with a
// line-to-line pair (the controller turning it back by its offset), and per-phase
// control (whose three-phase part reads three times the phase that needs least, here
// any phase). The runs must agree: the same operations and energies within 1e-9
// (the line-to-line reading goes through phasors and may differ in the last digits).
#[test]
fn a_balanced_load_is_the_same_in_every_mode() {
    let text = |m: &str| {
        format!(
            r#"
[supply.transformer]
rated_kva = 400
impedance_pct = 5
[[steps]]
kvar = 15
count = 6
[controller]
switching_delay_s = 20
discharge_time_s = 60
{m}
[load.synthetic]
[run]
duration_s = 3600
"#
        )
    };
    let modes = [
        "measurement = \"three-phase\"",
        "measurement = \"single-phase\"\nmeasurement_phase = \"c\"",
        "measurement = \"single-phase\"\nmeasurement_voltage = \"bc\"",
        "measurement = \"single-phase\"\nmeasurement_phase = \"b\"\nmeasurement_voltage = \"ab\"",
        "measurement = \"per-phase\"",
    ];
    let (reference, _) = record_with(&text(modes[0]), balanced_varying(3600));
    assert!(reference.metrics.switching.total_operations > 4);
    for m in &modes[1..] {
        let (r, _) = record_with(&text(m), balanced_varying(3600));
        let (a, b) = (&reference.metrics, &r.metrics);
        assert_eq!(
            a.switching.total_operations, b.switching.total_operations,
            "{m}"
        );
        assert_eq!(a.states, b.states, "{m}");
        let close = |x: f64, y: f64| (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1.0);
        assert!(close(a.pf.kvarh_inductive, b.pf.kvarh_inductive), "{m}");
        assert!(close(a.pf.kvarh_capacitive, b.pf.kvarh_capacitive), "{m}");
    }
}

// Per-phase control, worked by hand on a constant load on a stiff bus, dead band 3 kvar
// per phase (set), 9.75 kvar for the three-phase steps (0.65 × 15), target 0.95 lag
// (tan φ_t = 0.328684). Load: a 30 kW + j30 kvar, b 30 kW + j20 kvar, c 30 kW + j8 kvar.
// Demands per phase: a 20.14, b 10.14, c −1.86 kvar. The three-phase part reads 3 × c:
// −5.58, inside its band: no three-phase step. Phase a (two 10 kvar steps on a) closes
// both (20.14 → 10.14 → 0.14, each beyond 3 kvar after the 10 s delay); phase b closes one
// (10.14 → 0.14); phase c has nothing to do. Three operations; no phase leads.
#[test]
fn per_phase_control_follows_each_phase() {
    let text = r#"
[[steps]]
kvar = 15
count = 2
[[steps]]
kvar = 10
count = 2
phase = "a"
[[steps]]
kvar = 10
count = 2
phase = "b"
[controller]
target_pf = "0.95 lag"
measurement = "per-phase"
phase_dead_band_kvar = 3
switching_delay_s = 10
discharge_time_s = 60
[load.synthetic]
[run]
duration_s = 300
"#;
    let (r, rec) = record_with(text, constant([30.0; 3], [30.0, 20.0, 8.0], 300));
    assert_eq!(rec.masks.last().unwrap().numbers(), vec![3, 4, 5]);
    assert_eq!(r.metrics.switching.total_operations, 3);
    // Phase a's two steps close 10 s apart (the delay restarts after an operation);
    // phase b's closes in the same interval as a's first.
    assert_eq!(rec.ops.len(), 3);
    assert_eq!(
        (rec.ops[0].t, rec.ops[1].t, rec.ops[2].t),
        (10.0, 10.0, 20.0)
    );
    for p in &r.metrics.phases {
        assert_eq!(p.share_leading, 0.0, "phase {}", p.phase);
    }
    // Under the three-phase sum the same bank closes three-phase steps: the sum's demand
    // is 58 − 90·0.328684 = 28.42 kvar, so two 15 kvar steps go in (28.42 → 13.42 → −1.58)
    // and phase c, needing −1.86 kvar, gets 10 kvar more: it leads by 2 kvar.
    let sum = text.replace(
        "measurement = \"per-phase\"\nphase_dead_band_kvar = 3\n",
        "",
    );
    let (r3, rec3) = record_with(&sum, constant([30.0; 3], [30.0, 20.0, 8.0], 300));
    assert_eq!(rec3.masks.last().unwrap().numbers(), vec![1, 2]);
    assert_eq!(r3.metrics.switching.total_operations, 2);
    assert!(r3.metrics.phases[2].share_leading > 0.9);
}

fn cold_store(replace: Option<(&str, &str)>) -> Study {
    cold_store_with(replace, "")
}

/// The assessment's finding on a phase (topic `phase`); the run must have one.
fn phase_finding(st: &Study, r: &bankstep::engine::RunResult) -> bankstep::analysis::Finding {
    let a = bankstep::analysis::assess(st, r);
    a.findings
        .into_iter()
        .find(|f| f.topic == "phase")
        .expect("a phase finding")
}

/// The cold store with one text replaced and `extra` (tables) appended.
fn cold_store_with(replace: Option<(&str, &str)>, extra: &str) -> Study {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/cold-store.toml");
    let mut text = std::fs::read_to_string(&path).unwrap();
    if let Some((a, b)) = replace {
        assert!(text.contains(a));
        text = text.replace(a, b);
    }
    text.push_str(extra);
    Study::prepare(Scenario::from_str(&text, &path).unwrap()).unwrap()
}

// The bundled cold store: under one three-phase controller phase c is overcorrected for
// hours while the three-phase sum never is, and the findings name phase c; per-phase
// control removes the phase's overcorrection and brings the billed PF onto the target.
#[test]
fn the_cold_store_hides_a_leading_phase_and_per_phase_control_fixes_it() {
    let st = cold_store(None);
    let r = st.run(&mut Quiet).unwrap();
    let m = &r.metrics;
    assert_eq!(m.overcorrection.episodes, 0);
    let c = &m.phases[2];
    assert!(
        c.overcorrection.total_s > 3600.0,
        "{}",
        c.overcorrection.total_s
    );
    let f = phase_finding(&st, &r);
    assert!(
        f.text.starts_with("Phase c was overcorrected"),
        "{}",
        f.text
    );
    assert!(f.text.contains("three-phase sum was never overcorrected"));
    // The wiring symptoms say the same: one phase overcorrects, the supply does not.
    let sy = bankstep::analysis::wiring::symptoms(&st, &r);
    assert!(sy.contains(&bankstep::analysis::wiring::Symptom::OvercorrectsPhase));
    assert!(!sy.contains(&bankstep::analysis::wiring::Symptom::Overcorrects));

    let pp = cold_store(Some((
        "measurement = \"three-phase\"",
        "measurement = \"per-phase\"",
    )));
    let r = pp.run(&mut Quiet).unwrap();
    for p in &r.metrics.phases {
        assert_eq!(p.overcorrection.episodes, 0, "phase {}", p.phase);
    }
    let a = bankstep::analysis::assess(&pp, &r);
    assert!(!a.billed_pf.below_target, "{}", r.metrics.pf.energy_pf);
    assert!(a.findings.iter().all(|f| f.topic != "phase"));
}

// Per-phase control and a miswired measurement step through blocks of identical
// intervals exactly as interval by interval (the phases' parts each promise their quiet
// stretch; the phasor reading depends only on the sample and the bank).
#[test]
fn per_phase_and_miswired_runs_step_over_blocks_exactly() {
    let a = "measurement = \"three-phase\"";
    for (b, extra) in [
        ("measurement = \"per-phase\"", ""),
        (
            "measurement = \"single-phase\"\nmeasurement_voltage = \"bc\"",
            "\n[controller.wiring]\nvoltage = \"ca\"\n",
        ),
        (a, "\n[controller.wiring]\nreversed = \"c\"\n"),
    ] {
        let ev = cold_store_with(Some((a, b)), extra);
        let mut every = cold_store_with(Some((a, b)), extra);
        every.plan.stepping = Stepping::EveryInterval;
        let r1 = ev.run(&mut Quiet).unwrap();
        let r2 = every.run(&mut Quiet).unwrap();
        assert_eq!(r1.metrics.switching, r2.metrics.switching, "{b}");
        assert_eq!(r1.metrics.states.len(), r2.metrics.states.len(), "{b}");
        for (x, y) in r1.metrics.phases.iter().zip(&r2.metrics.phases) {
            assert_eq!(x.overcorrection, y.overcorrection, "{b}");
            let rel = (x.kvarh_inductive - y.kvarh_inductive).abs() / x.kvarh_inductive.max(1e-300);
            assert!(rel < 1e-9, "{b}");
        }
    }
}

#[test]
fn per_phase_keys_are_checked() {
    let bad = |extra: &str| {
        let t = format!(
            "[[steps]]\nkvar = 10\n[controller]\n{extra}\n[load.synthetic]\n[run]\nduration_s = 60\n"
        );
        Scenario::from_str(&t, Path::new("t.toml"))
            .unwrap_err()
            .to_string()
    };
    assert!(bad("phase_dead_band_kvar = 2").contains("controller.phase_dead_band_kvar"));
    assert!(bad("measurement_voltage = \"bc\"").contains("controller.measurement_voltage"));
    assert!(
        bad("measurement = \"single-phase\"\nmeasurement_voltage = \"bb\"")
            .contains("controller.measurement_voltage")
    );
    assert!(
        bad("measurement = \"per-phase\"\n[controller.detection]").contains("controller.detection")
    );
}

// Under per-phase control a phase can still be overcorrected when its own step is coarse
// for its light load; the finding must then not advise per-phase control again. Worked by
// hand: tan φ_t of 0.95 lag = 0.328684 (common practice). Phase c draws 1 kW + j6 kvar for
// 100 s: its demand 6 − 0.33 = 5.67 kvar is beyond its dead band of 5.5 kvar, so its 5 kvar
// step closes after the 10 s delay. From 100 s phase c draws 1 kW + j0: with the step in
// it leads by 5 kvar, past its threshold of 3/3 = 1 kvar, while its demand −5.33 kvar stays
// inside the dead band, so the step stays in and phase c is overcorrected from 100 s to the
// end (500 s). The three-phase sum, 6 + 6 − 5 = 7 kvar lagging, never leads.
#[test]
fn a_phase_still_leading_under_per_phase_control_gets_other_advice() {
    let text = r#"
[[steps]]
kvar = 5
phase = "c"
[controller]
target_pf = "0.95 lag"
measurement = "per-phase"
phase_dead_band_kvar = 5.5
switching_delay_s = 10
discharge_time_s = 60
[report]
overcorrection_threshold_kvar = 3
[load.synthetic]
[run]
duration_s = 600
"#;
    let mut samples = vec![
        LoadSample {
            p_kw: [30.0, 30.0, 1.0],
            q_kvar: [6.0, 6.0, 6.0],
        };
        100
    ];
    samples.extend(vec![
        LoadSample {
            p_kw: [30.0, 30.0, 1.0],
            q_kvar: [6.0, 6.0, 0.0],
        };
        500
    ]);
    let st = common::study(text);
    let r = st.run_on(&mut Listed(samples), &mut Quiet).unwrap();
    let m = &r.metrics;
    assert_eq!(m.switching.total_operations, 1);
    assert_eq!(m.overcorrection.episodes, 0);
    let c = &m.phases[2];
    assert_eq!(c.overcorrection.episodes, 1);
    assert!(
        (c.overcorrection.total_s - 500.0).abs() < 1e-9,
        "{}",
        c.overcorrection.total_s
    );
    let f = phase_finding(&st, &r);
    assert!(
        f.text.starts_with("Phase c was overcorrected"),
        "{}",
        f.text
    );
    let advice = f.advice.as_deref().unwrap_or("");
    assert!(
        advice.starts_with("Per-phase control is already on"),
        "{advice}"
    );
    assert!(!advice.contains("measurement = \"per-phase\""), "{advice}");
}

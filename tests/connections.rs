//! How the bank's steps are connected: delta and earthed-star three-phase steps, and
//! single-phase steps line to line, on the per-phase bus and on the coupled bus, against
//! calculations made by hand from the circuit (nalgebra complex matrices).

mod common;
use bankstep::profile::LoadSample;
use common::{run_with, Listed};
use nalgebra::{Matrix3, Vector3};
use num_complex::Complex64;

const U_N: f64 = 400.0;
const F_HZ: f64 = 50.0;
/// The runs: 10 intervals of 60 s, so an energy register holds P·600/3600 kWh.
const HOURS: f64 = 600.0 / 3600.0;

/// A site with the steps in `steps` (TOML `[[steps]]` tables) on the bus `bus`.
fn site(bus: &str, steps: &str) -> String {
    format!(
        r#"
[supply]
nominal_voltage_v = 400
grid_short_circuit_mva = 20
grid_x_over_r = 10
{bus}
[supply.transformer]
rated_kva = 250
impedance_pct = 6
x_over_r = 5
{winding}
{steps}
[report]
unbalance = true
[load.synthetic]
[run]
duration_s = 600
time_step_s = 60
"#,
        bus = if bus.is_empty() {
            ""
        } else {
            "bus = \"coupled\""
        },
        winding = bus,
    )
}

fn constant(p: [f64; 3], q: [f64; 3]) -> Listed {
    Listed(vec![LoadSample { p_kw: p, q_kvar: q }; 10])
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs())
}

/// A fixed step of `kvar` with the extra keys `keys`.
fn fixed(kvar: f64, keys: &str) -> String {
    format!("[[steps]]\nkvar = {kvar}\nfixed = true\n{keys}\n")
}

// Delta–star equivalence for a balanced load (common practice): a delta of Z_Δ per branch
// draws from a balanced set what a star of Z_Y = Z_Δ/3 draws, and an earthed star on a
// balanced bus carries no neutral current. So a delta step and an earthed-star step of the
// same kvar give the same bus on the coupled solver, and both give the per-phase closed
// form (which knows no connection), to rounding.
#[test]
fn delta_and_star_steps_agree_on_a_balanced_bus() {
    let load = || constant([60.0; 3], [35.0; 3]);
    let delta = run_with(&site("winding = \"Dyn\"", &fixed(30.0, "")), load());
    let star = run_with(
        &site("winding = \"Dyn\"", &fixed(30.0, "connection = \"star\"")),
        load(),
    );
    let closed = run_with(&site("", &fixed(30.0, "connection = \"star\"")), load());
    for r in [&star, &closed] {
        assert!(close(
            delta.metrics.voltage.min_v,
            r.metrics.voltage.min_v,
            1e-9
        ));
        assert!(close(
            delta.metrics.voltage.max_v,
            r.metrics.voltage.max_v,
            1e-9
        ));
        assert!(close(
            delta.metrics.pf.kvarh_inductive,
            r.metrics.pf.kvarh_inductive,
            1e-9
        ));
        for ph in 0..3 {
            let (a, b) = (&delta.metrics.phases[ph], &r.metrics.phases[ph]);
            // A delta on a balanced bus moves no P between the phases.
            assert!(close(a.kwh_import, 60.0 * HOURS, 1e-9), "{}", a.kwh_import);
            assert!(close(a.kwh_import, b.kwh_import, 1e-9));
            assert!(close(a.kvarh_inductive, b.kvarh_inductive, 1e-9));
        }
    }
    assert!(delta.metrics.unbalance.as_ref().unwrap().u2_max_pct < 1e-9);
}

/// The bus of `site(coupled Dyn)` with capacitors `caps` (each: the nodes it joins, 3 for
/// the neutral, and its capacitance in F) and the constant-power load `p`, `q` per phase
/// (kW, kvar), solved as nodal equations: (Y_s + Y_C)·V = Y_s·E − I_load(V), where
/// Y_s = Z_abc⁻¹ (the supply as a Norton source) and Y_C is stamped element by element
/// from the capacitors, iterated on the load current until it settles. Returns the phase
/// voltages and the supply currents.
fn nodal(
    caps: &[(usize, usize, f64)],
    p: [f64; 3],
    q: [f64; 3],
) -> ([Complex64; 3], [Complex64; 3]) {
    let split = |z: f64, xr: f64| {
        let res = z / (1.0 + xr * xr).sqrt();
        Complex64::new(res, res * xr)
    };
    // Z0 = Z_T, Z1 = Z_T + Z_grid (a Dyn transformer: its delta blocks the grid's zero
    // sequence), magnitudes u_k·U²/S_T and U²/S_sc split by their X/R (common practice);
    // Z_abc = T·diag(Z0, Z1, Z1)·T⁻¹ with the Fortescue matrix T.
    let z_t = split(0.06 * U_N * U_N / 250e3, 5.0);
    let z_g = split(U_N * U_N / 20e6, 10.0);
    let a = Complex64::from_polar(1.0, 120f64.to_radians());
    let one = Complex64::new(1.0, 0.0);
    let t = Matrix3::new(one, one, one, one, a * a, a, one, a, a * a);
    let zs = Matrix3::from_diagonal(&Vector3::new(z_t, z_t + z_g, z_t + z_g));
    let z = t * zs * t.try_inverse().expect("T is invertible");
    let y_s = z.try_inverse().expect("Z_abc is invertible");
    let w = 2.0 * std::f64::consts::PI * F_HZ;
    // Stamp each capacitor: +jωC on its nodes' diagonal places, −jωC across; a node 3 is
    // the earthed neutral (left out of the matrix).
    let mut y_c = Matrix3::<Complex64>::zeros();
    for &(i, j, c) in caps {
        let y = Complex64::new(0.0, w * c);
        for (m, n) in [(i, j), (j, i)] {
            if m < 3 {
                y_c[(m, m)] += y;
                if n < 3 {
                    y_c[(m, n)] -= y;
                }
            }
        }
    }
    let e_abs = U_N / 3f64.sqrt();
    let e = Vector3::new(
        Complex64::from_polar(e_abs, 0.0),
        Complex64::from_polar(e_abs, -120f64.to_radians()),
        Complex64::from_polar(e_abs, 120f64.to_radians()),
    );
    let s = Vector3::from_fn(|x, _| Complex64::new(p[x] * 1e3, q[x] * 1e3));
    let lu = (y_s + y_c).lu();
    let mut v = e;
    for _ in 0..500 {
        let i_load = Vector3::from_fn(|x, _| (s[x] / v[x]).conj());
        v = lu.solve(&(y_s * e - i_load)).expect("solvable");
    }
    let i_load = Vector3::from_fn(|x, _| (s[x] / v[x]).conj());
    let i_sup = i_load + y_c * v;
    ([v[0], v[1], v[2]], [i_sup[0], i_sup[1], i_sup[2]])
}

/// Capacitance of a capacitor giving `kvar` at `u_v` across it: Q = U²·ωC (common
/// practice), F.
fn capacitance(kvar: f64, u_v: f64) -> f64 {
    kvar * 1e3 / (u_v * u_v * 2.0 * std::f64::consts::PI * F_HZ)
}

// An unbalanced load on a Dyn transformer with every kind of step fixed on: 30 kvar in
// delta (three capacitors of 10 kvar at U between the lines), 15 kvar in earthed star
// (three of 5 kvar at U/√3 to the neutral), 12 kvar line to line between c and a, 5 kvar
// line to neutral on b. Each capacitance from Q = U²·ωC at the voltage across it (common
// practice), stamped into nodal equations built by hand; the run's lowest and highest
// voltages, voltage unbalance and each phase's active and reactive energy must agree
// with that circuit's (S_x = V_x·conj(I_x), circuit theory, common practice).
#[test]
fn every_connection_on_an_unbalanced_bus_matches_a_nodal_calculation() {
    let steps = [
        fixed(30.0, ""),
        fixed(15.0, "connection = \"star\""),
        fixed(12.0, "phase = \"ac\""),
        fixed(5.0, "phase = \"b\""),
    ]
    .concat();
    let p = [80.0, 20.0, 45.0];
    let q = [50.0, 5.0, 30.0];
    let r = run_with(&site("winding = \"Dyn\"", &steps), constant(p, q));

    let u_ph = U_N / 3f64.sqrt();
    let mut caps = Vec::new();
    for (i, j) in [(0, 1), (1, 2), (2, 0)] {
        caps.push((i, j, capacitance(10.0, U_N)));
    }
    for x in 0..3 {
        caps.push((x, 3, capacitance(5.0, u_ph)));
    }
    caps.push((2, 0, capacitance(12.0, U_N)));
    caps.push((1, 3, capacitance(5.0, u_ph)));
    let (v, i) = nodal(&caps, p, q);

    let mags: Vec<f64> = v.iter().map(|x| x.norm() * 3f64.sqrt()).collect();
    let lo = mags.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = mags.iter().cloned().fold(0.0, f64::max);
    let m = &r.metrics;
    assert!(
        close(m.voltage.min_v, lo, 1e-9),
        "{} against {lo}",
        m.voltage.min_v
    );
    assert!(
        close(m.voltage.max_v, hi, 1e-9),
        "{} against {hi}",
        m.voltage.max_v
    );
    let u2 = bankstep::unbalance::unbalance(v).unwrap();
    let got = m.unbalance.as_ref().unwrap().u2_max_pct / 100.0;
    assert!(close(got, u2, 1e-8), "{got} against {u2}");
    let mut q_total = 0.0;
    for x in 0..3 {
        let s = v[x] * i[x].conj() * 1e-3;
        let ph = &m.phases[x];
        assert!(
            close(ph.kwh_import, s.re * HOURS, 1e-9),
            "phase {x}: {} against {}",
            ph.kwh_import,
            s.re * HOURS
        );
        let q_reg = ph.kvarh_inductive - ph.kvarh_capacitive;
        assert!(
            close(q_reg, s.im * HOURS, 1e-9),
            "phase {x}: {q_reg} against {}",
            s.im * HOURS
        );
        q_total += s.im;
    }
    // The steps are lossless: the three-phase P is the load's, and the three-phase Q
    // register is the phases' sum.
    assert!(close(m.pf.kwh_import, (p[0] + p[1] + p[2]) * HOURS, 1e-12));
    let q_reg = m.pf.kvarh_inductive - m.pf.kvarh_capacitive;
    assert!(
        close(q_reg, q_total * HOURS, 1e-9),
        "{q_reg} against {}",
        q_total * HOURS
    );
    // The delta and the step between c and a move P between the phases: phase c's
    // supply P is not its load's.
    assert!((m.phases[2].kwh_import - p[2] * HOURS).abs() > 1e-3);
}

// The earthed star carries zero-sequence current and the delta does not: on an unbalanced
// bus (zero-sequence voltage present through the Dyn transformer's Z0 ≠ Z1) the two give
// different voltages, and an earthed star on the coupled bus is what the coupled solver
// took every three-phase step for before steps had a connection.
#[test]
fn star_and_delta_differ_on_an_unbalanced_bus() {
    let load = || constant([80.0, 20.0, 45.0], [50.0, 5.0, 30.0]);
    let delta = run_with(&site("winding = \"Dyn\"", &fixed(60.0, "")), load());
    let star = run_with(
        &site("winding = \"Dyn\"", &fixed(60.0, "connection = \"star\"")),
        load(),
    );
    let u2 = |r: &bankstep::engine::RunResult| r.metrics.unbalance.as_ref().unwrap().u2_max_pct;
    assert!((u2(&delta) - u2(&star)).abs() > 1e-6 * u2(&delta));
}

// A step of 30 kvar between a and b on a stiff bus, with a balanced load of 50 kW and
// 20 kvar a phase. The line-to-line split (S_x = V_x·conj(I), S_y = V_y·conj(−I) with
// I = jB·(V_x − V_y), B = Q/U², circuit theory, common practice): each phase Q/2 = 15 kvar
// and P −Q/(2√3) on a, +Q/(2√3) on b, as a line-to-line load's split has it.
#[test]
fn a_line_to_line_step_on_the_per_phase_bus_splits_its_kvar() {
    let toml = format!(
        "[supply]\nnominal_voltage_v = 400\n{}[load.synthetic]\n[run]\nduration_s = 600\n\
         time_step_s = 60\n",
        fixed(30.0, "phase = \"ba\"")
    );
    let r = run_with(&toml, constant([50.0; 3], [20.0; 3]));
    let e_abs = U_N / 3f64.sqrt();
    let v: Vec<Complex64> = [0.0, -120.0, 120.0]
        .iter()
        .map(|d: &f64| Complex64::from_polar(e_abs, d.to_radians()))
        .collect();
    let b = 30e3 / (U_N * U_N);
    let i = Complex64::new(0.0, b) * (v[0] - v[1]);
    let s_bank = [v[0] * i.conj(), -v[1] * i.conj(), Complex64::default()];
    for (x, s_x) in s_bank.iter().enumerate() {
        let s = Complex64::new(50e3, 20e3) + s_x;
        let ph = &r.metrics.phases[x];
        assert!(
            close(ph.kwh_import, s.re * 1e-3 * HOURS, 1e-9),
            "phase {x}: {}",
            ph.kwh_import
        );
        assert!(
            close(ph.kvarh_inductive, s.im * 1e-3 * HOURS, 1e-9),
            "phase {x}"
        );
    }
    // The numbers: 5 kvar left on a and b, −8.66 kW on a and +8.66 kW on b.
    assert!(close(
        r.metrics.phases[0].kvarh_inductive,
        5.0 * HOURS,
        1e-9
    ));
    let shift = 30.0 / (2.0 * 3f64.sqrt());
    assert!(close(
        r.metrics.phases[0].kwh_import,
        (50.0 - shift) * HOURS,
        1e-9
    ));
    assert!(close(
        r.metrics.phases[1].kwh_import,
        (50.0 + shift) * HOURS,
        1e-9
    ));
    assert!(close(r.metrics.pf.kvarh_inductive, 30.0 * HOURS, 1e-9));
}

// Per-phase control with a step line to line on each of ab and bc, and reactive load on a
// and b only (a load between a and b, say): the ab pair needs 2 × (20 − 20·tan φ_t) =
// 26.9 kvar, so its 10 kvar step closes; the bc pair reads phase c, which needs nothing,
// so its step stays open (worked by hand from the rule in the module docs of
// `controller::per_phase`). A three-phase controller, reading the sum (40 − 60·tan φ_t =
// 20.3 kvar), closes both and pushes phase c leading.
#[test]
fn per_phase_control_switches_a_line_to_line_step_by_its_pair() {
    let toml = |measurement: &str| {
        format!(
            "[supply]\nnominal_voltage_v = 400\n\
             [[steps]]\nkvar = 10\nphase = \"ab\"\n[[steps]]\nkvar = 10\nphase = \"bc\"\n\
             [controller]\ntarget_pf = \"0.95 lag\"\nmeasurement = \"{measurement}\"\n\
             switching_delay_s = 60\n[load.synthetic]\n[run]\nduration_s = 3600\n\
             time_step_s = 60\n"
        )
    };
    let load = || {
        Listed(vec![
            LoadSample {
                p_kw: [20.0; 3],
                q_kvar: [20.0, 20.0, 0.0]
            };
            60
        ])
    };
    let per_phase = run_with(&toml("per-phase"), load());
    let ops =
        |r: &bankstep::engine::RunResult, n: usize| r.metrics.switching.per_step[n - 1].closings;
    assert_eq!(ops(&per_phase, 1), 1);
    assert_eq!(ops(&per_phase, 2), 0);
    assert_eq!(per_phase.metrics.phases[2].kvarh_capacitive, 0.0);
    let summed = run_with(&toml("three-phase"), load());
    assert_eq!((ops(&summed, 1), ops(&summed, 2)), (1, 1));
    assert!(summed.metrics.phases[2].kvarh_capacitive > 0.0);
}

#[test]
fn connection_keys_are_checked() {
    let err = |steps: &str| {
        bankstep::scenario::Scenario::from_str(
            &format!("{steps}[load.synthetic]\n"),
            std::path::Path::new("t.toml"),
        )
        .unwrap_err()
        .to_string()
    };
    let e = err("[[steps]]\nkvar = 10\nconnection = \"wye\"\n");
    assert!(e.contains("[[steps]] table 1 (step 1).connection"), "{e}");
    assert!(e.contains("`delta`") && e.contains("`star`"), "{e}");
    let e = err("[[steps]]\nkvar = 10\nphase = \"ab\"\nconnection = \"star\"\n");
    assert!(
        e.contains("(step 1).connection") && e.contains("single-phase"),
        "{e}"
    );
    let e = err("[[steps]]\nkvar = 10\nphase = \"ad\"\n");
    assert!(
        e.contains("(step 1).phase") && e.contains("`ab`, `bc` or `ca`"),
        "{e}"
    );
    let ok = |steps: &str| {
        bankstep::scenario::Scenario::from_str(
            &format!("{steps}[load.synthetic]\n"),
            std::path::Path::new("t.toml"),
        )
        .expect("valid")
    };
    use bankstep::bank::StepPhase;
    for (w, want) in [
        ("phase = \"ab\"", StepPhase::Line(0)),
        ("phase = \"BA\"", StepPhase::Line(0)),
        ("phase = \"cb\"", StepPhase::Line(1)),
        ("phase = \"ac\"", StepPhase::Line(2)),
        ("connection = \"star\"", StepPhase::Star),
        ("phase = \"abc\"\nconnection = \"delta\"", StepPhase::Three),
        ("", StepPhase::Three),
    ] {
        let sc = ok(&format!("[[steps]]\nkvar = 10\n{w}\n"));
        assert_eq!(sc.steps[0].phase, want, "{w}");
    }
    // A step line to line is given at U line to line: 50 kvar rated at 440 V delivers
    // 50·(400/440)² = 41.32 kvar at 400 V (Q = U²·ωC, common practice), not the
    // 50·(231/440)² a step line to neutral would.
    let sc = ok("[[steps]]\nrated_kvar = 50\nrated_voltage_v = 440\nphase = \"bc\"\n");
    assert!((sc.steps[0].kvar - 50.0 * (400.0f64 / 440.0).powi(2)).abs() < 1e-9);
}

/// A load held in stretches, which promises each stretch to the engine so that it steps
/// over them in blocks.
struct Held(Vec<LoadSample>);

impl bankstep::profile::LoadSource for Held {
    fn sample(
        &mut self,
        k: u64,
        _t_s: f64,
        out: &mut LoadSample,
    ) -> Result<(), bankstep::error::ProfileError> {
        *out = self.0[k as usize];
        Ok(())
    }

    fn unchanged_until(&self, k: u64) -> u64 {
        let k = k as usize;
        let mut j = k + 1;
        while j < self.0.len() && self.0[j] == self.0[k] {
            j += 1;
        }
        j as u64
    }
}

/// Numbers equal to 1e-9 relative (blocks add a count × a value where stepping adds the
/// value again and again), everything else exactly.
fn same(a: &serde_json::Value, b: &serde_json::Value) -> bool {
    use serde_json::Value;
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1e-9)
        }
        (Value::Array(x), Value::Array(y)) => {
            x.len() == y.len() && x.iter().zip(y).all(|(x, y)| same(x, y))
        }
        (Value::Object(x), Value::Object(y)) => {
            x.len() == y.len() && x.iter().all(|(k, v)| y.get(k).is_some_and(|w| same(v, w)))
        }
        _ => a == b,
    }
}

// Stepping over blocks of identical intervals must give what stepping every interval
// gives (the engine's rule), with every connection in the bank, per-pair control and
// both buses: an unbalanced load held in stretches of 1 to 40 intervals.
#[test]
fn blocks_give_what_every_interval_gives_with_every_connection() {
    let steps = "[[steps]]\nkvar = 15\ncount = 2\n[[steps]]\nkvar = 10\nconnection = \"star\"\n\
                 [[steps]]\nkvar = 8\nphase = \"ab\"\ncount = 2\n[[steps]]\nkvar = 6\n\
                 phase = \"ca\"\n[[steps]]\nkvar = 5\nphase = \"b\"\n[[steps]]\nkvar = 4\n\
                 phase = \"bc\"\nfixed = true\n\
                 [controller]\nmeasurement = \"per-phase\"\nswitching_delay_s = 20\n";
    let mut samples = Vec::new();
    let mut x = 7u64;
    while samples.len() < 3000 {
        // A small linear congruential sequence: lengths and loads that repeat the same
        // way on every run.
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let r = |shift: u32| ((x >> shift) & 0xff) as f64 / 255.0;
        let s = LoadSample {
            p_kw: [30.0 + 40.0 * r(8), 10.0 + 30.0 * r(16), 20.0 + 30.0 * r(24)],
            q_kvar: [5.0 + 30.0 * r(32), 25.0 * r(40), 20.0 * r(48) - 5.0],
        };
        let len = 1 + (x >> 56) as usize % 40;
        samples.extend(std::iter::repeat_n(s, len));
    }
    samples.truncate(3000);
    for bus in ["", "winding = \"Dyn\""] {
        let toml = site(bus, steps)
            .replace("duration_s = 600", "duration_s = 30000")
            .replace("time_step_s = 60", "time_step_s = 10");
        let study = common::study(&toml);
        let run = |stepping| {
            let mut st = study.clone();
            st.plan.stepping = stepping;
            let r = st
                .run_on(&mut Held(samples.clone()), &mut bankstep::engine::Quiet)
                .expect("run");
            serde_json::to_value(&r).expect("json")
        };
        let every = run(bankstep::study::Stepping::EveryInterval);
        let events = run(bankstep::study::Stepping::Events);
        assert!(same(&every, &events), "bus {bus:?}");
        let ops = every["switching"]["total_operations"].as_u64().unwrap();
        assert!(ops > 10, "bus {bus:?}: {ops} operations");
    }
}

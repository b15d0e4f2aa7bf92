//! Unbalance over a run against independent calculations: a single-phase load behind a
//! transformer solved by a plain nodal iteration in the test, and a balanced load.

mod common;
use bankstep::profile::LoadSample;
use bankstep::unbalance::unbalance;
use common::{run_with, Listed};
use num_complex::Complex64;

const SITE: &str = r#"
[supply]
nominal_voltage_v = 400
[supply.transformer]
rated_kva = 100
impedance_pct = 6
x_over_r = 4
[[steps]]
kvar = 10
[controller]
switching_delay_s = 86400
[report]
unbalance = true
[load.synthetic]
[run]
duration_s = 1800
time_step_s = 10
"#;

fn constant(p: [f64; 3], q: [f64; 3]) -> Listed {
    Listed(vec![LoadSample { p_kw: p, q_kvar: q }; 180])
}

// 30 kW + j10 kvar on phase a alone, the step never closing (its delay is longer than the
// run). Independent nodal calculation: the transformer's impedance per phase is
// Z = u_k·U²/S_T = 0.06·400²/100 000 = 0.096 Ω, split by X/R = 4 into R = Z/√17 and
// X = 4R (the usual split, common practice); E = 400/√3 V at 0°, −120°, +120°. Phase a:
// iterate V ← E − Z·conj(S/V) from V = E until it settles (a load this light converges
// in a few dozen steps); phases b and c carry no current, so V_b = E_b and V_c = E_c.
// Their sequence components give u2 = |V2|/|V1|; the supply currents (I_a, 0, 0) split
// into equal thirds (the V = (1, 0, 0) case of Fortescue), so |I2|/|I1| = 100 %.
#[test]
fn a_single_phase_load_against_a_nodal_iteration() {
    let r = run_with(SITE, constant([30.0, 0.0, 0.0], [10.0, 0.0, 0.0]));
    let u = r.metrics.unbalance.as_ref().expect("unbalance measured");

    let z_abs = 0.06 * 400.0 * 400.0 / 100_000.0;
    let res = z_abs / 17f64.sqrt();
    let z = Complex64::new(res, 4.0 * res);
    let e = 400.0 / 3f64.sqrt();
    let e_ph = [0.0f64, -120.0, 120.0].map(|d| Complex64::from_polar(e, d.to_radians()));
    let s = Complex64::new(30e3, 10e3);
    let mut v = e_ph[0];
    for _ in 0..200 {
        v = e_ph[0] - z * (s / v).conj();
    }
    let u2 = unbalance([v, e_ph[1], e_ph[2]]).unwrap();
    assert!(u2 > 0.005, "{u2}");
    assert!(
        (u.u2_max_pct / 100.0 - u2).abs() < 1e-9 * u2,
        "{} against {}",
        u.u2_max_pct / 100.0,
        u2
    );
    assert!((u.u2_mean_pct / 100.0 - u2).abs() < 1e-9 * u2);
    assert!((u.i2_max_pct - 100.0).abs() < 1e-9);
    // One week, three 10-minute values (the run starts on a clock boundary), all equal.
    assert_eq!(u.weeks.len(), 1);
    assert_eq!(u.weeks[0].values, 3);
    assert!((u.weeks[0].u2_p95_pct / 100.0 - u2).abs() < 1e-9 * u2);
    // The voltage the metrics saw on phase a is the nodal one too.
    let p_a = &r.metrics.phases[0];
    assert!((p_a.kwh_import - 30.0 * 0.5).abs() < 1e-9);
    // IEEE Std 1459-2010 with one phase loaded (four-wire), worked by hand: S_V = S_A =
    // |S_a| = 31.62 kVA; I_n = −I_a, so I_e = sqrt((I² + I²)/3) = I·sqrt(2/3), and
    // V_e = sqrt((3·(Va² + Vb² + Vc²) + Vab² + Vbc² + Vca²)/18) from the nodal voltages,
    // so S_e = 3·V_e·I·sqrt(2/3), about √6 = 2.45 times |S_a|: the effective PF is far
    // below the vector one.
    let h = 0.5;
    assert!((u.kvah_vector / h - s.norm() / 1e3).abs() < 1e-6);
    assert!((u.kvah_arithmetic - u.kvah_vector).abs() < 1e-9 * u.kvah_vector);
    let vs = [v, e_ph[1], e_ph[2]];
    let i = (s / v).conj().norm();
    let ln2: f64 = vs.iter().map(|x| x.norm_sqr()).sum();
    let ll2 = (vs[0] - vs[1]).norm_sqr() + (vs[1] - vs[2]).norm_sqr() + (vs[2] - vs[0]).norm_sqr();
    let ve = ((3.0 * ln2 + ll2) / 18.0).sqrt();
    let se = 3.0 * ve * i * (2.0f64 / 3.0).sqrt() / 1e3;
    assert!(
        (u.kvah_effective / h - se).abs() < 1e-9 * se,
        "{} against {se}",
        u.kvah_effective / h
    );
    assert!((se / (s.norm() / 1e3) - 6f64.sqrt()).abs() < 0.1);
}

// A balanced load on a balanced supply has no unbalance, and the three apparent powers of
// IEEE Std 1459-2010 coincide (V_e = V, I_e = I, no neutral current).
#[test]
fn a_balanced_load_is_balanced() {
    let r = run_with(SITE, constant([20.0; 3], [8.0; 3]));
    let u = r.metrics.unbalance.as_ref().unwrap();
    assert!(u.u2_max_pct < 1e-10 && u.i2_max_pct < 1e-10);
    assert!((u.kvah_arithmetic - u.kvah_vector).abs() < 1e-9 * u.kvah_vector);
    assert!((u.kvah_effective - u.kvah_vector).abs() < 1e-9 * u.kvah_vector);
    let pf = 60.0 / (60.0f64 * 60.0 + 24.0 * 24.0).sqrt();
    assert!((u.pf_vector - pf).abs() < 1e-9);
    // Without the key nothing is measured.
    let r = run_with(
        &SITE.replace("unbalance = true", "unbalance = false"),
        constant([20.0; 3], [8.0; 3]),
    );
    assert!(r.metrics.unbalance.is_none());
}

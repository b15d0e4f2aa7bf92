//! The coupled bus (`supply.bus = "coupled"`) against the per-phase closed form for a
//! balanced load, and against an independent nodal calculation (nalgebra matrices, the
//! phase impedance built from the sequence impedances by the Fortescue transformation)
//! for an unbalanced one.

mod common;
use bankstep::profile::LoadSample;
use common::{run_with, Listed};
use nalgebra::{Matrix3, Vector3};
use num_complex::Complex64;

fn site(bus: &str) -> String {
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
[[steps]]
kvar = 20
phase = "a"
fixed = true
[[steps]]
kvar = 30
fixed = true
connection = "star"
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
        winding = bus
    )
}

fn constant(p: [f64; 3], q: [f64; 3]) -> Listed {
    Listed(vec![LoadSample { p_kw: p, q_kvar: q }; 10])
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs())
}

// A balanced load with a balanced bank draws no zero-sequence current, so the coupling
// through Z0 ≠ Z1 changes nothing: the coupled bus gives the per-phase closed form's
// voltages and energies.
#[test]
fn a_balanced_load_matches_the_closed_form() {
    let per_phase = site("").replace("[[steps]]\nkvar = 20\nphase = \"a\"\nfixed = true\n", "");
    let coupled = site("winding = \"Dyn\"")
        .replace("[[steps]]\nkvar = 20\nphase = \"a\"\nfixed = true\n", "");
    let load = || constant([60.0; 3], [35.0; 3]);
    let a = run_with(&per_phase, load());
    let b = run_with(&coupled, load());
    assert!(close(a.metrics.voltage.min_v, b.metrics.voltage.min_v));
    assert!(close(a.metrics.voltage.max_v, b.metrics.voltage.max_v));
    assert!(close(
        a.metrics.pf.kvarh_inductive,
        b.metrics.pf.kvarh_inductive
    ));
    assert!(b.metrics.unbalance.as_ref().unwrap().u2_max_pct < 1e-9);
    assert_eq!(b.nonconverged_intervals, 0);
}

// An unbalanced load (and a single-phase step on a) on a Dyn transformer behind a
// 20 MVA grid, solved independently: Z_abc = T·diag(Z0, Z1, Z1)·T⁻¹ with the Fortescue
// matrix T = [[1, 1, 1], [1, a², a], [1, a, a²]] (nalgebra's inverse), Z0 = Z_T and
// Z1 = Z_T + Z_grid, magnitudes u_k·U²/S_T and U²/S_sc split by their X/R (common
// practice); the bus voltages from V ← E − Z_abc·(conj(S/V) + jB·V), iterated from E.
// The run's lowest and highest phase voltages and its voltage unbalance must agree.
#[test]
fn an_unbalanced_load_matches_an_independent_nodal_calculation() {
    let p = [80.0, 20.0, 45.0];
    let q = [50.0, 5.0, 30.0];
    let r = run_with(&site("winding = \"Dyn\""), constant(p, q));

    let u_n: f64 = 400.0;
    let split = |z: f64, xr: f64| {
        let res = z / (1.0 + xr * xr).sqrt();
        Complex64::new(res, res * xr)
    };
    let z_t = split(0.06 * u_n * u_n / 250e3, 5.0);
    let z_g = split(u_n * u_n / 20e6, 10.0);
    let (z0, z1) = (z_t, z_t + z_g);
    let a = Complex64::from_polar(1.0, 120f64.to_radians());
    let one = Complex64::new(1.0, 0.0);
    let t = Matrix3::new(one, one, one, one, a * a, a, one, a, a * a);
    let zs = Matrix3::from_diagonal(&Vector3::new(z0, z1, z1));
    let z = t * zs * t.try_inverse().expect("T is invertible");
    let e_abs = u_n / 3f64.sqrt();
    let e = Vector3::new(
        Complex64::from_polar(e_abs, 0.0),
        Complex64::from_polar(e_abs, -120f64.to_radians()),
        Complex64::from_polar(e_abs, 120f64.to_radians()),
    );
    // Susceptances: 20 kvar on phase a alone, 30 kvar three-phase in earthed star (10 kvar
    // a phase, line to neutral), at the nominal phase voltage. (Delta steps are checked in
    // tests/connections.rs.)
    let u_ln2 = e_abs * e_abs;
    let b = [(20e3 + 10e3) / u_ln2, 10e3 / u_ln2, 10e3 / u_ln2];
    let s: Vec<Complex64> = (0..3)
        .map(|x| Complex64::new(p[x] * 1e3, q[x] * 1e3))
        .collect();
    let mut v = e;
    for _ in 0..500 {
        let i = Vector3::from_fn(|x, _| (s[x] / v[x]).conj() + Complex64::new(0.0, b[x]) * v[x]);
        v = e - z * i;
    }
    let mags: Vec<f64> = v.iter().map(|x| x.norm() * 3f64.sqrt()).collect();
    let lo = mags.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = mags.iter().cloned().fold(0.0, f64::max);
    assert!(
        close(r.metrics.voltage.min_v, lo),
        "{} against {lo}",
        r.metrics.voltage.min_v
    );
    assert!(
        close(r.metrics.voltage.max_v, hi),
        "{} against {hi}",
        r.metrics.voltage.max_v
    );
    let u2 = bankstep::unbalance::unbalance([v[0], v[1], v[2]]).unwrap();
    let got = r.metrics.unbalance.as_ref().unwrap().u2_max_pct / 100.0;
    assert!((got - u2).abs() < 1e-9 * u2, "{got} against {u2}");
    // The coupling shows: the per-phase model, blind to Z0 ≠ Z1, gives another unbalance.
    let uncoupled = run_with(&site(""), constant(p, q));
    let u2_uncoupled = uncoupled.metrics.unbalance.as_ref().unwrap().u2_max_pct / 100.0;
    assert!((u2_uncoupled - u2).abs() > 1e-4 * u2);
}

#[test]
fn bus_keys_are_checked() {
    let err = |t: &str| {
        bankstep::scenario::Scenario::from_str(t, std::path::Path::new("t.toml"))
            .unwrap_err()
            .to_string()
    };
    assert!(
        err(&site("winding = \"Dyn\"").replace("bus = \"coupled\"", "bus = \"joint\""))
            .contains("supply.bus")
    );
    assert!(err(&site("winding = \"Yzn\"")).contains("supply.transformer.winding"));
    assert!(
        err(&site("").replace("x_over_r = 5\n", "x_over_r = 5\nwinding = \"Dyn\"\n"))
            .contains("only meaningful")
    );
}

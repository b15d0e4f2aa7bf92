//! Checks of the harmonic model against published formulas, hand calculations and an
//! independent nodal solution of the same circuit, and of the resonance warnings of whole
//! runs (the bundled pumping station, the distortion protection).

mod common;
use bankstep::harmonics::scan::{peaks, ScanGrid, Scanner};
use bankstep::harmonics::{thd_pct, HarmonicModel, SpectrumPreset};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use common::{study, Pieces};
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;
use std::path::Path;

/// The harmonic model of a scenario given as TOML text.
fn model(toml: &str) -> HarmonicModel {
    study(toml).harmonic_model()
}

/// A site: 1000 kVA transformer at u_k 6 %, X/R 8, on an infinite grid, with `steps`
/// (TOML `[[steps]]` entries) and `harmonics` (the `[harmonics]` body).
fn site(steps: &str, harmonics: &str) -> String {
    format!(
        r#"
[supply]
nominal_voltage_v = 400
[supply.transformer]
rated_kva = 1000
impedance_pct = 6
x_over_r = 8
{steps}
[harmonics]
{harmonics}
[load.synthetic]
[run]
duration_s = 60
"#
    )
}

/// Order of the minimum of |Z(h)| in [a, b] by golden section (a series resonance).
fn minimum(m: &HarmonicModel, mask: u64, mut a: f64, mut b: f64) -> f64 {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..200 {
        let c = b - g * (b - a);
        let d = a + g * (b - a);
        if m.impedance(mask, c).norm() < m.impedance(mask, d).norm() {
            b = d;
        } else {
            a = c;
        }
    }
    0.5 * (a + b)
}

// Parallel resonance h_r = sqrt(S_sc/Q_c) (IEEE Std 519 / IEEE Std 1531 estimate, from
// memory; REFERENCES.md worked example: 1000 kVA, u_k 6 %, 300 kvar, infinite grid →
// 7.454). The impedance scan finds the peak within 1 % here (the supply resistance moves it
// slightly; stated tolerance).
#[test]
fn scan_peak_of_the_reference_example() {
    let m = model(&site("[[steps]]\nkvar = 300\n", ""));
    assert!((m.plain_order(1).unwrap() - 7.454).abs() < 1e-3);
    let p = peaks(&m, 1, &ScanGrid::default());
    assert_eq!(p.len(), 1);
    assert!((p[0].order - 7.454).abs() / 7.454 < 0.01, "{}", p[0].order);
    // f_r = 7.454 × 50 Hz = 372.7 Hz (REFERENCES.md).
    assert!((m.plain_order(1).unwrap() * 50.0 - 372.7).abs() < 0.1);
}

// The scan peak against sqrt(S_sc/Q_c) over transformer sizes 250 to 2500 kVA, u_k 4 to
// 8 %, a finite grid, and banks of 5 to 45 % of the transformer rating (IEEE Std 519
// estimate, from memory). Stated tolerance 2 %: the supply resistance (R·sqrt(h)) lowers
// the peak by roughly 1/(2·Q²), and S_sc adds impedance magnitudes where the resonance
// depends on the reactances only.
#[test]
fn scan_peak_matches_the_estimate_over_sizes() {
    for &(kva, uk, xr, grid) in &[
        (250.0f64, 4.0f64, 4.0f64, None::<f64>),
        (630.0, 6.0, 6.0, Some(150.0)),
        (1000.0, 6.0, 8.0, Some(250.0)),
        (1600.0, 6.0, 10.0, None),
        (2500.0, 8.0, 12.0, Some(500.0)),
    ] {
        for share in [0.05, 0.15, 0.3, 0.45] {
            let q = (kva * share).round();
            let grid_line = grid.map_or(String::new(), |g| format!("grid_short_circuit_mva = {g}"));
            let toml = format!(
                "[supply]\n{grid_line}\n[supply.transformer]\nrated_kva = {kva}\nimpedance_pct = \
                 {uk}\nx_over_r = {xr}\n[[steps]]\nkvar = {q}\n[load.synthetic]\n[run]\n\
                 duration_s = 60\n"
            );
            let m = model(&toml);
            let est = m.plain_order(1).unwrap();
            let s_sc = 1.0 / (grid.map_or(0.0, |g| 1.0 / (g * 1e3)) + uk / 100.0 / kva);
            assert!((est - (s_sc / q).sqrt()).abs() < 1e-9);
            let p = peaks(&m, 1, &ScanGrid::default());
            let h = p[0].order;
            assert!(
                (h - est).abs() / est < 0.02,
                "{kva} kVA {uk} % X/R {xr}, {q} kvar: scan {h}, estimate {est}"
            );
        }
    }
}

// Detuned steps (REFERENCES.md, read in public worked calculations; practice): tuning
// order 1/sqrt(p) = 4.20, 3.78, 2.67 for p = 5.67 %, 7 %, 14 %; capacitor voltage
// U/(1 − p) = 424, 430, 465 V at 400 V; the series resonance of the step is where the bus
// impedance dips to nearly zero.
#[test]
fn detuned_step_tuning_and_capacitor_voltage() {
    for &(p, tuning, u_c) in &[(5.67, 4.20, 424.0), (7.0, 3.78, 430.0), (14.0, 2.67, 465.0)] {
        let m = model(&site(
            &format!("[[steps]]\nkvar = 100\ndetuning_pct = {p}\n"),
            "preset = \"six-pulse\"\nreference_kva = 100",
        ));
        let t = m.tuning_order(0).unwrap();
        assert!((t - tuning).abs() < 0.005, "{p} %: {t}");
        let dip = minimum(&m, 1, t - 0.5, t + 0.5);
        assert!(
            (dip - 1.0 / (p / 100.0f64).sqrt()).abs() < 1e-6,
            "{p} %: {dip}"
        );
        assert!(m.impedance(1, dip).norm() < 1e-6 * m.supply_impedance(dip).norm());
        let st = m.state(1);
        let s = &st.steps[0];
        assert!(
            (s.fundamental_voltage_v - u_c).abs() < 0.5,
            "{p} %: {}",
            s.fundamental_voltage_v
        );
        // The parallel resonance with the supply lies below the tuning order (common
        // practice: that is what detuning is for).
        let h_r = st.order.unwrap();
        assert!(h_r < t && h_r > 1.0, "{p} %: {h_r}");
    }
}

// Output of a detuned step: Q = Q_R·(U/U_R)²/(1 − p) for capacitors rated Q_R at U_R
// (REFERENCES.md, read): 50 kvar capacitors rated 440 V behind a 7 % reactor deliver
// 50 × (400/440)² / 0.93 = 44.43 kvar at 400 V. The model, given that effective kvar and
// the 440 V rating, must find the 50 kvar, 440 V capacitor again (rated current
// 50 000/(sqrt(3)·440) = 65.61 A) and deliver 44.43 kvar at the fundamental.
#[test]
fn detuned_step_output_follows_the_rating() {
    let q = 50.0 * (400.0f64 / 440.0).powi(2) / 0.93;
    assert!((q - 44.43).abs() < 0.01);
    let m = model(&site(
        &format!("[[steps]]\nkvar = {q}\ndetuning_pct = 7\ncapacitor_rated_voltage_v = 440\n"),
        "",
    ));
    // Q = U²·B(1): the delivered kvar at U_n.
    let delivered = 400.0 * 400.0 * m.step_susceptance(0, 1.0) / 1e3;
    assert!((delivered - q).abs() < 1e-9);
    let s = &m.state(1).steps[0];
    assert!((s.rated_current_a - 50_000.0 / (3f64.sqrt() * 440.0)).abs() < 1e-9);
    assert!((3f64.sqrt() * 440.0 * s.rated_current_a - 50_000.0).abs() < 1e-6);
}

// Parallel resonance of detuned banks with the supply stays below the tuning order over a
// range of bank sizes and for every state (common practice), and moves below the 5th.
#[test]
fn detuned_banks_resonate_below_tuning() {
    for p in [5.67, 7.0, 14.0] {
        let m = model(&site(
            &format!("[[steps]]\nkvar = 50\ncount = 6\ndetuning_pct = {p}\n"),
            "",
        ));
        let t = 1.0 / (p / 100.0f64).sqrt();
        let sc = Scanner::new(m.clone(), ScanGrid::default());
        for (mask, pk) in sc.scan_all(0, 0b11_1111) {
            if mask == 0 {
                assert!(pk.is_empty());
                continue;
            }
            assert_eq!(pk.len(), 1, "{p} %, state {mask:b}");
            assert!(
                pk[0].order < t && pk[0].order < 5.0,
                "{p} %: {}",
                pk[0].order
            );
        }
    }
}

// THD of a known spectrum by hand (IEEE Std 519 definition, read): ideal six-pulse
// currents 1/h for h = 5 … 25 give THD_I = sqrt(Σ 1/h²) = sqrt(0.0843099) = 29.04 %.
// With no step and an almost purely inductive supply (X/R = 100), |Z(h)| = h·X, so every
// harmonic voltage is X·I_1: here X = 0.0096 Ω × 100/sqrt(10001) = 0.0095995 Ω and
// I_1 = 100 kVA/(sqrt(3)·400 V) = 144.34 A give 1.3856 V, 0.6000 % of 230.94 V, and
// THD_V = 0.6000 % × sqrt(8) = 1.697 %.
#[test]
fn thd_of_six_pulse_currents_by_hand() {
    let o = SpectrumPreset::SixPulse.orders();
    let i: Vec<f64> = o.iter().map(|x| x.1 / 100.0).collect();
    assert!((thd_pct(1.0, &i) - 29.036).abs() < 1e-3);
    let m = model(
        &site(
            "[[steps]]\nkvar = 50\n",
            "preset = \"six-pulse\"\nreference_kva = 100",
        )
        .replace("x_over_r = 8", "x_over_r = 100"),
    );
    let st = m.state(0);
    for h in &st.harmonics {
        assert!((h.v_pct - 0.6000).abs() < 1e-3, "h{}: {}", h.order, h.v_pct);
    }
    assert!(
        (st.thd_pct - 0.6 * 8f64.sqrt()).abs() < 2e-3,
        "{}",
        st.thd_pct
    );
}

// Network cross-check: the bus harmonic voltages of the model equal a direct nodal
// solution Y·V = I (nalgebra, complex LU) of the same circuit, built here from the
// scenario's own numbers: node 1 behind the grid impedance, the transformer from node 1 to
// the bus (node 2), the capacitor branches (one plain, two detuned) and the damping
// resistance from the bus to neutral, and the harmonic current injected at the bus. Both
// use R(h) = R·sqrt(h) and X(h) = h·X (the model's stated frequency dependence).
#[test]
fn bus_voltages_match_a_nodal_solution() {
    let toml = r#"
[supply]
nominal_voltage_v = 400
grid_short_circuit_mva = 250
grid_x_over_r = 10
[supply.transformer]
rated_kva = 1000
impedance_pct = 6
x_over_r = 8
[[steps]]
kvar = 100
[[steps]]
kvar = 50
detuning_pct = 7
[[steps]]
kvar = 50
detuning_pct = 14
[harmonics]
preset = "six-pulse"
reference_kva = 200
damping_kw = 100
[load.synthetic]
[run]
duration_s = 60
"#;
    let m = model(toml);
    let u: f64 = 400.0;
    let split = |z_abs: f64, xr: f64| {
        let r = z_abs / (1.0 + xr * xr).sqrt();
        (r, r * xr)
    };
    // |Z_grid| = U²/S_sc,grid; |Z_T| = u_k·U²/S_T (definitions, read).
    let (rg, xg) = split(u * u / 250e6, 10.0);
    let (rt, xt) = split(0.06 * u * u / 1e6, 8.0);
    let x_c = |q: f64, p: f64| u * u / (q * 1e3 * (1.0 - p));
    let branches = [
        (x_c(100.0, 0.0), 0.0),
        (x_c(50.0, 0.07), 0.07),
        (x_c(50.0, 0.14), 0.14),
    ];
    let g_damp = 100e3 / (u * u);
    let i_ref = 200e3 / (3f64.sqrt() * u);
    for mask in 0u64..8 {
        let st = m.state(mask);
        for hv in &st.harmonics {
            let h = hv.order;
            let zg = Complex64::new(rg * h.sqrt(), xg * h);
            let zt = Complex64::new(rt * h.sqrt(), xt * h);
            let mut y_bus = zt.inv() + Complex64::new(g_damp, 0.0);
            for (i, &(xc, p)) in branches.iter().enumerate() {
                if mask & (1 << i) != 0 {
                    y_bus += Complex64::new(0.0, h * p * xc - xc / h).inv();
                }
            }
            let y =
                DMatrix::from_row_slice(2, 2, &[zg.inv() + zt.inv(), -zt.inv(), -zt.inv(), y_bus]);
            let i_h = i_ref * hv.current_pct / 100.0;
            let rhs = DVector::from_vec(vec![Complex64::new(0.0, 0.0), Complex64::new(i_h, 0.0)]);
            let v = y.lu().solve(&rhs).expect("the nodal matrix is regular");
            let v_pct = 100.0 * v[1].norm() / (u / 3f64.sqrt());
            assert!(
                (v_pct - hv.v_pct).abs() <= 1e-9 * v_pct.max(1.0),
                "state {mask:b}, h{h}: nodal {v_pct}, model {}",
                hv.v_pct
            );
        }
    }
}

// The bundled pumping station (drives, six-pulse): the run names the states that resonate
// near the 5th or 7th, with hours a year (the run's share of time × 8760 h) and an
// estimated THD_V; and detuning every step at 7 % moves every state's resonance below the
// 5th (its tuning order 3.78, REFERENCES.md).
#[test]
fn pumping_station_warns_near_the_7th_and_detuning_cures_it() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/pumping-station.toml");
    let st = Study::prepare(Scenario::from_file(&path).unwrap()).unwrap();
    let raw = st.run(&mut bankstep::engine::Quiet).unwrap();
    let run_s = raw.metrics.run.duration_s;
    let r = bankstep::analysis::assess(&st, &raw);
    let near: Vec<_> = r
        .resonance
        .warnings
        .iter()
        .filter(|w| w.near_harmonic == 5.0 || w.near_harmonic == 7.0)
        .collect();
    assert!(!near.is_empty(), "{:?}", r.resonance.warnings);
    for w in &near {
        assert!((w.hours_per_year - w.time_s / run_s * 8760.0).abs() < 1e-9);
        assert!(w.thd_pct > w.v_h_pct * 0.99 && w.thd_pct > 0.0);
        assert!((w.order - w.near_harmonic).abs() <= 0.5);
    }
    let hm = st.harmonic_model();
    let detuned = hm.with_detuning(0.07);
    let sc = Scanner::new(detuned, ScanGrid::default());
    for (_, pk) in sc.scan_all(0, hm.all_mask()) {
        assert!(pk.iter().all(|p| p.order < 5.0));
    }
}

// The distortion protection of the controller opens the bank when the estimated THD of
// the state it is in stays above its limit for the delay (domain contract, section 4),
// using the per-state THD of the harmonic model. Site as the pumping station: four 50 kvar
// steps resonate near the 7th (THD about 24 %), three or fewer stay under 10 % except step
// 1 alone for one switching delay (30 s, shorter than the 60 s THD delay).
#[test]
fn distortion_protection_trips_on_the_resonating_state() {
    let toml = r#"
[supply]
grid_short_circuit_mva = 150
[supply.transformer]
rated_kva = 630
impedance_pct = 6
x_over_r = 6
[[steps]]
kvar = 50
count = 6
[controller]
target_pf = "0.98 lag"
switching_delay_s = 30
discharge_time_s = 60
[controller.protection]
thd_limit_pct = 10
[harmonics]
preset = "six-pulse"
reference_kva = 150
[load.synthetic]
[run]
duration_s = 1800
"#;
    let load = || Pieces(vec![(0.0, 400.0, 280.0)]);
    let (raw, r) = common::assess_with(toml, load());
    assert!(raw.metrics.switching.trips.distortion >= 1);
    let (raw_free, free) = common::assess_with(&toml.replace("thd_limit_pct = 10\n", ""), load());
    assert_eq!(raw_free.metrics.switching.trips.distortion, 0);
    let time_in = |res: &bankstep::analysis::Assessment| {
        res.resonance
            .states
            .iter()
            .filter(|s| s.thd_pct > 10.0 && s.steps.len() > 1)
            .map(|s| s.time_s)
            .sum::<f64>()
    };
    assert!(
        time_in(&r) < 0.5 * time_in(&free),
        "{} vs {}",
        time_in(&r),
        time_in(&free)
    );
}

// Capacitor limits (IEC 60831-1: 1.30 × rated current, from memory; IEEE Std 18: 135 %,
// read): the same state is judged against the chosen standard.
#[test]
fn capacitor_limits_follow_the_chosen_standard() {
    let steps = "[[steps]]\nkvar = 50\ncount = 4\n";
    let h = "preset = \"six-pulse\"\nreference_kva = 150";
    let iec = model(&site(steps, h));
    let ieee = model(&site(
        steps,
        &format!("{h}\ncapacitor_limits = \"ieee-18\""),
    ));
    let a = &iec.state(0b1111).steps[0];
    let b = &ieee.state(0b1111).steps[0];
    assert_eq!(a.current_limit, 1.30);
    assert_eq!(b.current_limit, 1.35);
    assert_eq!(b.peak_limit, Some(1.20));
    assert!((a.current_ratio - b.current_ratio).abs() < 1e-12);
    // EN 50160 levels (from memory): 7th 5 %, THD 8 %.
    let en = model(&site(steps, &format!("{h}\nvoltage_limits = \"en-50160\"")));
    let s = en.state(0b1111);
    let h7 = s.harmonics.iter().find(|x| x.order == 7.0).unwrap();
    assert_eq!(h7.limit_pct, Some(5.0));
    assert_eq!(s.thd_limit_pct, 8.0);
}

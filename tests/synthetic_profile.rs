//! Behaviour of the synthetic load generator as a scenario author sees it: the
//! `[load.synthetic]` table, validation messages, and the load it produces.

use bankstep::pf::tan_phi_of;
use bankstep::profile::synthetic::{SyntheticConfig, SyntheticProfile};
use bankstep::profile::{LoadSample, LoadSource};
use bankstep::timebase::{parse_start, Calendar, DAY_S};
use serde::Deserialize;

const H: f64 = 3600.0;

/// 2026-03-02 is a Monday, so run time 0 is Monday 00:00.
fn monday() -> Calendar {
    Calendar::elapsed_from(parse_start("2026-03-02").unwrap())
}

fn cfg(text: &str) -> SyntheticConfig {
    let c: SyntheticConfig = toml::from_str(text).unwrap();
    c.validate("load.synthetic").unwrap();
    c
}

/// Runs a profile for `duration_s` at `dt_s` from Monday 00:00 and returns every sample
/// with its start time.
fn run(c: &SyntheticConfig, seed: u64, dt_s: f64, duration_s: f64) -> Vec<(f64, LoadSample)> {
    let mut p = SyntheticProfile::new(c, seed, monday(), 0.0, dt_s);
    let n = (duration_s / dt_s).round() as u64;
    let mut out = Vec::with_capacity(n as usize);
    let mut s = LoadSample::default();
    for k in 0..n {
        let t = k as f64 * dt_s;
        p.sample(k, t, &mut s).unwrap();
        out.push((t, s));
    }
    out
}

/// Mean three-phase P over the samples, kW.
fn mean_p(v: &[(f64, LoadSample)]) -> f64 {
    v.iter().map(|(_, s)| s.p_total()).sum::<f64>() / v.len() as f64
}

/// A plant as a scenario author might describe it.
const PLANT: &str = r#"
noise_percent = 0.8

[base]
kw = 140
pf = 0.88
night_kw = 60
weekend_kw = 35

[shifts]
days = "mon-fri"
hours = ["06:00-14:00", "14:00-22:00"]

[[machines]]
name = "air compressors"
units = 3
kw = 30
pf = 0.82
on_s = 900
off_s = 600

[[machines]]
name = "cooling pumps"
units = 4
kw = 11
pf = 0.85
runs = "shifts"
cycle = "fixed"
on_s = 1200
off_s = 1800

[[machines]]
name = "extraction fans"
units = 2
kw = 7.5
pf = 0.8
phase = "b"
runs = "window"
window = "07:00-19:00"
window_days = "mon-sat"
off_s = 0

[[welders]]
name = "spot welders"
units = 3
kw = 35
pf = 0.55
phase = "ab"
burst_s = 2
pause_s = 8

[[pv]]
peak_kw = 120
sunrise_h = 6.5
sunset_h = 19.5

[pv.clouds]
clear_s = 1200
shade_s = 240
depth = 0.6
"#;

#[test]
fn scenario_table_parses_inside_a_scenario() {
    #[derive(Deserialize)]
    struct Load {
        synthetic: SyntheticConfig,
    }
    #[derive(Deserialize)]
    struct Scenario {
        load: Load,
    }
    let text = PLANT
        .replace("[base]", "[load.synthetic.base]")
        .replace("[shifts]", "[load.synthetic.shifts]")
        .replace("[[machines]]", "[[load.synthetic.machines]]")
        .replace("[[welders]]", "[[load.synthetic.welders]]")
        .replace("[[pv]]", "[[load.synthetic.pv]]")
        .replace("[pv.clouds]", "[load.synthetic.pv.clouds]")
        .replace("noise_percent", "[load.synthetic]\nnoise_percent");
    let s: Scenario = toml::from_str(&text).unwrap();
    s.load.synthetic.validate("load.synthetic").unwrap();
    assert_eq!(s.load.synthetic, cfg(PLANT));
    assert_eq!(s.load.synthetic.machines.len(), 3);
    assert_eq!(s.load.synthetic.pv[0].clouds.as_ref().unwrap().depth, 0.6);
}

#[test]
fn empty_table_is_a_steady_default_load() {
    let c = cfg("");
    assert_eq!(c, SyntheticConfig::default());
    let v = run(&c, 1, 60.0, DAY_S);
    for (_, s) in &v {
        assert!((s.p_total() - 100.0).abs() < 1e-9);
        assert!((s.q_total() - 100.0 * tan_phi_of(0.85)).abs() < 1e-9);
    }
}

#[test]
fn serialises_and_reads_back() {
    let c = cfg(PLANT);
    let text = toml::to_string(&c).unwrap();
    let back: SyntheticConfig = toml::from_str(&text).unwrap();
    assert_eq!(back, c);
}

#[test]
fn unknown_keys_and_bad_words_are_rejected_when_read() {
    assert!(toml::from_str::<SyntheticConfig>("[base]\nkva = 10").is_err());
    assert!(toml::from_str::<SyntheticConfig>("[[machines]]\nphase = \"d\"").is_err());
    assert!(toml::from_str::<SyntheticConfig>("[[machines]]\nruns = \"sometimes\"").is_err());
}

#[test]
fn validation_names_the_key_and_the_range() {
    let c: SyntheticConfig = toml::from_str(
        r#"
[[machines]]
kw = 10
[[machines]]
kw = 10
pf = 1.3
"#,
    )
    .unwrap();
    let e = c.validate("load.synthetic").unwrap_err();
    assert_eq!(e.key, "load.synthetic.machines[1].pf");
    assert_eq!(e.message, "power factor 1.3 is outside 0.05 to 1.0");

    let c: SyntheticConfig = toml::from_str("[[welders]]\nkw = -4").unwrap();
    let e = c.validate("load.synthetic").unwrap_err();
    assert_eq!(e.key, "load.synthetic.welders[0].kw");
    assert_eq!(e.message, "power -4.0 kW is outside 0.0 to 100000.0 kW");

    let c: SyntheticConfig = toml::from_str("[shifts]\ndays = \"mon-fry\"").unwrap();
    let e = c.validate("load.synthetic").unwrap_err();
    assert_eq!(e.key, "load.synthetic.shifts.days");
    assert!(
        e.message.contains("`fry` is not a weekday"),
        "{}",
        e.message
    );

    let c: SyntheticConfig = toml::from_str("[[machines]]\non_s = 0").unwrap();
    let e = c.validate("load.synthetic").unwrap_err();
    assert_eq!(e.key, "load.synthetic.machines[0].on_s");
    assert!(e.message.contains("0.1 to 10000000.0 s"), "{}", e.message);

    let c: SyntheticConfig = toml::from_str("[[pv]]\n[pv.clouds]\ndepth = 2").unwrap();
    let e = c.validate("load.synthetic").unwrap_err();
    assert_eq!(e.key, "load.synthetic.pv[0].clouds.depth");
    assert!(e.message.contains("0.0 to 1.0"), "{}", e.message);
}

#[test]
fn same_seed_same_samples_other_seed_other_samples() {
    let c = cfg(PLANT);
    let a = run(&c, 42, 1.0, 2.0 * DAY_S);
    let b = run(&c, 42, 1.0, 2.0 * DAY_S);
    let bits = |v: &[(f64, LoadSample)]| -> Vec<u64> {
        v.iter()
            .flat_map(|(_, s)| s.p_kw.iter().chain(s.q_kvar.iter()).map(|x| x.to_bits()))
            .collect()
    };
    assert_eq!(bits(&a), bits(&b));
    let c2 = run(&c, 43, 1.0, 2.0 * DAY_S);
    let differing = a
        .iter()
        .zip(&c2)
        .filter(|((_, x), (_, y))| x.p_kw != y.p_kw)
        .count();
    assert!(differing > a.len() / 2, "{differing} of {}", a.len());
}

#[test]
fn fixed_half_duty_gives_half_power_in_the_long_run() {
    let c = cfg(r#"
[base]
kw = 0
[[machines]]
units = 4
kw = 10
pf = 0.8
cycle = "fixed"
on_s = 300
off_s = 300
"#);
    let m = mean_p(&run(&c, 5, 10.0, 10.0 * DAY_S));
    assert!((m - 20.0).abs() < 0.01 * 20.0, "mean {m} kW");
}

#[test]
fn random_half_duty_gives_half_power_in_the_long_run() {
    let c = cfg(r#"
[base]
kw = 0
[[machines]]
units = 10
kw = 10
pf = 0.8
on_s = 600
off_s = 600
"#);
    let v = run(&c, 11, 30.0, 30.0 * DAY_S);
    let m = mean_p(&v);
    // Ten units of 600 s spells over 30 days: the mean's spread is about 0.25 %.
    assert!((m - 50.0).abs() < 0.02 * 50.0, "mean {m} kW");
    // Units switch independently: the group is sometimes partly on.
    let partial = v
        .iter()
        .filter(|(_, s)| s.p_total() > 1.0 && s.p_total() < 99.0)
        .count();
    assert!(partial > v.len() * 9 / 10);
}

#[test]
fn a_machine_group_alone_has_its_configured_power_factor() {
    let c = cfg(r#"
[base]
kw = 0
[[machines]]
units = 3
kw = 22
pf = 0.82
on_s = 400
off_s = 200
"#);
    let tan = tan_phi_of(0.82);
    let mut some_on = 0;
    for (_, s) in run(&c, 3, 1.0, DAY_S) {
        let (p, q) = (s.p_total(), s.q_total());
        assert!(p >= 0.0);
        assert!((q - p * tan).abs() <= 1e-9 * p.max(1.0));
        for i in 0..3 {
            assert!((s.q_kvar[i] - s.p_kw[i] * tan).abs() <= 1e-9 * p.max(1.0));
        }
        some_on += usize::from(p > 0.0);
    }
    assert!(some_on > 0);
}

#[test]
fn single_phase_machines_load_only_their_phase() {
    for (phase, i) in [("a", 0), ("b", 1), ("c", 2)] {
        let c = cfg(&format!(
            "[base]\nkw = 0\n[[machines]]\nunits = 2\nkw = 5\npf = 0.7\nphase = \"{phase}\"\n"
        ));
        let v = run(&c, 8, 5.0, DAY_S);
        let mut seen = 0.0f64;
        for (_, s) in &v {
            for j in 0..3 {
                if j != i {
                    assert_eq!((s.p_kw[j], s.q_kvar[j]), (0.0, 0.0));
                }
            }
            seen = seen.max(s.p_kw[i]);
        }
        assert!((seen - 10.0).abs() < 1e-9, "phase {phase}: peak {seen}");
    }
}

#[test]
fn line_to_line_welders_load_two_phases_with_the_configured_totals() {
    let c = cfg(r#"
[base]
kw = 0
[[welders]]
units = 2
kw = 40
pf = 0.6
phase = "bc"
runs = "always"
"#);
    let tan = tan_phi_of(0.6);
    let mut bursts = 0;
    for (_, s) in run(&c, 4, 0.5, 4.0 * H) {
        assert_eq!((s.p_kw[0], s.q_kvar[0]), (0.0, 0.0));
        assert!((s.q_total() - s.p_total() * tan).abs() < 1e-9 * s.p_total().max(1.0));
        if s.p_total() > 0.0 {
            bursts += 1;
            // The two phases see different power factors (one leads by 30°, one lags).
            assert!(s.p_kw[1] > s.p_kw[2]);
        }
    }
    assert!(bursts > 100);
}

#[test]
fn shift_only_group_is_off_outside_shifts_and_at_weekends() {
    let c = cfg(r#"
[base]
kw = 0
[shifts]
days = "mon-fri"
hours = ["06:00-14:00", "14:00-22:00"]
[[machines]]
units = 2
kw = 15
pf = 0.9
runs = "shifts"
off_s = 0
"#);
    for (t, s) in run(&c, 2, 60.0, 7.0 * DAY_S) {
        let day = (t / DAY_S).floor() as usize; // 0 = Monday
        let hour = (t % DAY_S) / H;
        let in_shift = day < 5 && (6.0..22.0).contains(&hour);
        let want = if in_shift { 30.0 } else { 0.0 };
        assert!((s.p_total() - want).abs() < 1e-9, "day {day} hour {hour}");
    }
}

#[test]
fn night_shift_runs_past_midnight_into_saturday() {
    let c = cfg(r#"
[base]
kw = 0
[shifts]
days = "mon-fri"
hours = ["22:00-06:00"]
[[machines]]
kw = 10
runs = "shifts"
off_s = 0
"#);
    let v = run(&c, 1, 300.0, 7.0 * DAY_S);
    let at = |t: f64| v[(t / 300.0) as usize].1.p_total();
    assert_eq!(at(3.0 * H), 0.0); // Monday 03:00: Sunday has no shift.
    assert_eq!(at(23.0 * H), 10.0); // Monday 23:00.
    assert_eq!(at(DAY_S + 5.0 * H), 10.0); // Tuesday 05:00.
    assert_eq!(at(5.0 * DAY_S + 5.0 * H), 10.0); // Saturday 05:00, Friday's shift.
    assert_eq!(at(5.0 * DAY_S + 23.0 * H), 0.0); // Saturday 23:00.
}

#[test]
fn base_load_levels_follow_shifts_nights_and_weekends() {
    let c = cfg(r#"
[base]
kw = 120
pf = 0.9
night_kw = 50
weekend_kw = 30
phase_shares = [0.5, 0.3, 0.2]
"#);
    let v = run(&c, 1, 60.0, 7.0 * DAY_S);
    let at = |t: f64| v[(t / 60.0) as usize].1;
    assert!((at(10.0 * H).p_total() - 120.0).abs() < 1e-9); // Monday, in shift.
    assert!((at(23.0 * H).p_total() - 50.0).abs() < 1e-9); // Monday night.
    assert!((at(5.0 * DAY_S + 10.0 * H).p_total() - 30.0).abs() < 1e-9); // Saturday.
    let s = at(10.0 * H);
    assert!((s.p_kw[0] - 60.0).abs() < 1e-9 && (s.p_kw[2] - 24.0).abs() < 1e-9);
}

#[test]
fn a_window_boundary_inside_an_interval_is_prorated() {
    let c = cfg(r#"
[base]
kw = 0
[[machines]]
kw = 9
runs = "window"
window = "07:10-16:00"
off_s = 0
"#);
    let v = run(&c, 1, 900.0, DAY_S);
    // 07:00–07:15 has 5 minutes of running: a third of the interval.
    let s = v[(7.0 * H / 900.0) as usize].1.p_total();
    assert!((s - 3.0).abs() < 1e-9, "{s}");
    assert!((v[(8.0 * H / 900.0) as usize].1.p_total() - 9.0).abs() < 1e-9);
    assert_eq!(v[(6.0 * H / 900.0) as usize].1.p_total(), 0.0);
}

#[test]
fn pv_reduces_p_at_noon_and_is_absent_at_night() {
    let c = cfg(r#"
[base]
kw = 100
pf = 0.9
[[pv]]
peak_kw = 60
sunrise_h = 6
sunset_h = 18
"#);
    let v = run(&c, 1, 60.0, DAY_S);
    let at = |t: f64| v[(t / 60.0) as usize].1;
    for (t, s) in &v {
        let hour = t / H;
        if !(6.0..18.0).contains(&hour) {
            assert!((s.p_total() - 100.0).abs() < 1e-9, "hour {hour}");
        } else {
            assert!(s.p_total() <= 100.0 + 1e-9);
        }
        // Unity PF by default: PV leaves Q alone.
        assert!((s.q_total() - 100.0 * tan_phi_of(0.9)).abs() < 1e-9);
    }
    // The interval 12:00–12:01 is centred 30 s after solar noon.
    assert!((at(12.0 * H).p_total() - 40.0).abs() < 1e-3);
    let morning = 100.0 - at(9.0 * H).p_total();
    assert!(morning > 20.0 && morning < 40.0, "{morning}");
}

#[test]
fn enough_pv_pushes_site_p_negative() {
    let c = cfg(r#"
[base]
kw = 50
[[pv]]
peak_kw = 200
"#);
    let v = run(&c, 1, 300.0, DAY_S);
    let noon = v[(13.0 * H / 300.0) as usize].1.p_total();
    assert!(noon < -100.0, "{noon}");
    assert!(v.iter().any(|(_, s)| s.p_total() < 0.0));
    assert!(v.iter().any(|(_, s)| s.p_total() > 0.0));
}

#[test]
fn clouds_only_ever_dim_the_pv() {
    let clear = cfg("[base]\nkw = 0\n[[pv]]\npeak_kw = 100\n");
    let cloudy = cfg(
        "[base]\nkw = 0\n[[pv]]\npeak_kw = 100\n[pv.clouds]\nclear_s = 900\nshade_s = 300\ndepth = 0.5\n",
    );
    let a = run(&clear, 1, 10.0, 3.0 * DAY_S);
    let b = run(&cloudy, 1, 10.0, 3.0 * DAY_S);
    let mut dimmed = 0;
    for ((_, x), (_, y)) in a.iter().zip(&b) {
        let (gx, gy) = (-x.p_total(), -y.p_total());
        assert!(gy <= gx + 1e-9 && gy >= 0.5 * gx - 1e-9);
        dimmed += usize::from(gy < gx - 1e-6);
    }
    assert!(dimmed > 1000, "{dimmed}");
}

#[test]
fn pv_inverter_reactive_power_follows_its_setting() {
    for (word, sign) in [("absorb", 1.0), ("supply", -1.0)] {
        let c = cfg(&format!(
            "[base]\nkw = 0\n[[pv]]\npeak_kw = 100\npf = 0.9\nreactive = \"{word}\"\n"
        ));
        let s = run(&c, 1, 60.0, DAY_S)[(13.0 * H / 60.0) as usize].1;
        assert!(s.p_total() < -90.0);
        assert!((s.q_total() - sign * -s.p_total() * tan_phi_of(0.9)).abs() < 1e-9);
    }
}

#[test]
fn without_noise_the_load_is_smooth_and_with_noise_it_is_not() {
    let quiet = cfg("[base]\nkw = 90\npf = 0.85\n[[pv]]\npeak_kw = 30\n");
    let v = run(&quiet, 1, 1.0, DAY_S);
    for w in v.windows(2) {
        // PV moves at most 30 kW × π / 14 h per second.
        assert!((w[1].1.p_kw[0] - w[0].1.p_kw[0]).abs() < 1e-3);
        assert_eq!(w[1].1.q_kvar[2], w[0].1.q_kvar[2]);
    }
    let noisy = cfg("noise_percent = 2\n[base]\nkw = 90\npf = 0.85\n");
    let v = run(&noisy, 1, 1.0, 6.0 * H);
    let x: Vec<f64> = v.iter().map(|(_, s)| s.p_kw[1] / 30.0 - 1.0).collect();
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    let sd = (x.iter().map(|e| (e - mean).powi(2)).sum::<f64>() / x.len() as f64).sqrt();
    assert!(
        mean.abs() < 0.001 && (sd - 0.02).abs() < 0.001,
        "mean {mean} sd {sd}"
    );
}

/// Energy over a day must not depend on Δt: switching events are drawn independently of
/// the sampling and integrated exactly, so bursts shorter than Δt count in full.
#[test]
fn energy_is_the_same_at_half_a_second_and_a_minute() {
    let mut c = cfg(PLANT);
    c.noise_percent = 0.0;
    c.pv.clear();
    let energy = |dt: f64| -> [f64; 6] {
        let mut e = [0.0; 6];
        for (_, s) in run(&c, 77, dt, DAY_S) {
            for i in 0..3 {
                e[i] += s.p_kw[i] * dt;
                e[i + 3] += s.q_kvar[i] * dt;
            }
        }
        e
    };
    let (a, b, c15) = (energy(0.5), energy(60.0), energy(900.0));
    for i in 0..6 {
        assert!(
            (a[i] - b[i]).abs() < 1e-9 * a[i].abs().max(1.0),
            "{i}: {a:?} {b:?}"
        );
        assert!(
            (a[i] - c15[i]).abs() < 1e-9 * a[i].abs().max(1.0),
            "{i}: {a:?} {c15:?}"
        );
    }
    // With PV the day curve is taken at each interval's midpoint: nearly the same.
    let mut c = cfg(PLANT);
    c.noise_percent = 0.0;
    c.pv[0].clouds = None;
    let e = |dt: f64| {
        run(&c, 77, dt, DAY_S)
            .iter()
            .map(|(_, s)| s.p_total() * dt)
            .sum::<f64>()
    };
    let (x, y) = (e(0.5), e(60.0));
    assert!((x - y).abs() < 1e-6 * x.abs(), "{x} {y}");
}

#[test]
fn short_bursts_count_in_expectation_at_coarse_steps() {
    let c = cfg(r#"
[base]
kw = 0
[[welders]]
units = 5
kw = 30
burst_s = 1.5
pause_s = 13.5
runs = "always"
"#);
    // Duty 1.5 / 15 = 10 %: 5 × 30 kW × 0.1 = 15 kW on average.
    for dt in [0.5, 60.0, 900.0] {
        let m = mean_p(&run(&c, 21, dt, 5.0 * DAY_S));
        assert!((m - 15.0).abs() < 0.03 * 15.0, "dt {dt}: {m}");
    }
}

#[test]
fn adding_a_part_leaves_the_others_realisation_alone() {
    let one = cfg("[base]\nkw = 0\n[[machines]]\nunits = 3\nphase = \"a\"\n");
    let two = cfg(
        "[base]\nkw = 0\n[[machines]]\nunits = 3\nphase = \"a\"\n[[welders]]\nphase = \"c\"\nruns = \"always\"\n",
    );
    let a = run(&one, 9, 1.0, 6.0 * H);
    let b = run(&two, 9, 1.0, 6.0 * H);
    assert!(a
        .iter()
        .zip(&b)
        .all(|((_, x), (_, y))| x.p_kw[0] == y.p_kw[0]));
    assert!(b.iter().any(|(_, s)| s.p_kw[2] > 0.0));
}

#[test]
fn samples_stay_finite_over_a_long_run_at_a_late_start() {
    let c = cfg(PLANT);
    let start = 200.0 * DAY_S + 1234.5;
    let mut p = SyntheticProfile::new(&c, 3, monday(), start, 15.0);
    let mut s = LoadSample::default();
    for k in 0..(40.0 * DAY_S / 15.0) as u64 {
        p.sample(k, start + k as f64 * 15.0, &mut s).unwrap();
        assert!(s.p_total().is_finite() && s.q_total().is_finite());
        assert!(s.q_total() > 0.0);
    }
}

/// The example in the module documentation must stay a valid scenario table.
#[test]
fn documented_example_parses_and_validates() {
    #[derive(Deserialize)]
    struct Load {
        synthetic: SyntheticConfig,
    }
    #[derive(Deserialize)]
    struct Scenario {
        load: Load,
    }
    let src = include_str!("../src/profile/synthetic.rs");
    let block: String = src
        .lines()
        .skip_while(|l| !l.starts_with("//! ```toml"))
        .skip(1)
        .take_while(|l| !l.starts_with("//! ```"))
        .map(|l| format!("{}\n", l.trim_start_matches("//!").trim_start()))
        .collect();
    assert!(block.contains("[[load.synthetic.machines]]"));
    let s: Scenario = toml::from_str(&block).unwrap();
    let c = s.load.synthetic;
    c.validate("load.synthetic").unwrap();
    assert_eq!(c.machines[0].units, 3);
    assert_eq!(c.welders[0].burst_s, 1.5);
    assert!(c.pv[0].clouds.is_some());
    // It produces a plausible week.
    let v = run(&c, 1, 60.0, 7.0 * DAY_S);
    assert!(v.iter().all(|(_, s)| s.q_total() > 0.0));
    assert!(v.iter().any(|(_, s)| s.p_total() < 60.0));
}

#[test]
fn unequal_duty_cycles_give_their_share_of_power() {
    // Running 200 s of every 800 s: a quarter of 6 × 8 kW = 12 kW on average.
    for cycle in ["random", "fixed"] {
        let c = cfg(&format!(
            "[base]\nkw = 0\n[[machines]]\nunits = 6\nkw = 8\ncycle = \"{cycle}\"\non_s = 200\noff_s = 600\n"
        ));
        let m = mean_p(&run(&c, 13, 20.0, 20.0 * DAY_S));
        assert!((m - 12.0).abs() < 0.02 * 12.0, "{cycle}: {m}");
    }
}

/// Samples every interval of `c` at `dt_s` from `t_first_s` and, after each, asks the
/// generator for its promise (`unchanged_until`).
fn run_with_promises(
    c: &SyntheticConfig,
    seed: u64,
    t_first_s: f64,
    dt_s: f64,
    n: u64,
) -> (Vec<LoadSample>, Vec<u64>) {
    let mut p = SyntheticProfile::new(c, seed, monday(), t_first_s, dt_s);
    let mut s = LoadSample::default();
    let (mut samples, mut promises) = (Vec::new(), Vec::new());
    for k in 0..n {
        p.sample(k, t_first_s + k as f64 * dt_s, &mut s).unwrap();
        samples.push(s);
        promises.push(p.unchanged_until(k));
    }
    (samples, promises)
}

/// The bit patterns of a sample, so that a promise is checked bit for bit.
fn bits(s: &LoadSample) -> [u64; 6] {
    std::array::from_fn(|i| {
        if i < 3 {
            s.p_kw[i].to_bits()
        } else {
            s.q_kvar[i - 3].to_bits()
        }
    })
}

/// A shift-level base load and nothing else: between the level changes the generator
/// promises long runs of the same sample, and a caller that steps over them (as the
/// engine may) still gets the right energy. Independent count: Monday to Friday have
/// 16 h of shifts (06:00–22:00) at 300 kW and 8 h at 120 kW; Saturday and Sunday 48 h at
/// 60 kW, so one week holds 5 × (16 × 300 + 8 × 120) + 48 × 60 = 31,680 kWh.
#[test]
fn a_steady_base_load_is_promised_unchanged_between_level_changes() {
    let c = cfg(r#"
        [base]
        kw = 300
        night_kw = 120
        weekend_kw = 60
        "#);
    let mut p = SyntheticProfile::new(&c, 3, monday(), 0.0, 1.0);
    let n = (7.0 * DAY_S) as u64;
    let mut s = LoadSample::default();
    let (mut k, mut calls, mut kwh) = (0u64, 0u32, 0.0);
    while k < n {
        p.sample(k, k as f64, &mut s).unwrap();
        let next = p.unchanged_until(k).min(n);
        assert!(next > k);
        kwh += s.p_total() * (next - k) as f64 / 3600.0;
        calls += 1;
        k = next;
    }
    assert!((kwh - 31_680.0).abs() < 1e-6, "{kwh}");
    // Two level changes on each working day and a look at every midnight: a few dozen
    // samples, not 604,800.
    assert!(calls < 60, "{calls} samples taken");
}

mod promises {
    use super::*;
    use bankstep::profile::synthetic::{
        BaseLoad, Clouds, DayList, DutyCycle, MachineGroup, Phase, PvArray, RunWhen, ShiftPattern,
        WelderGroup,
    };
    use proptest::prelude::*;

    const PHASES: [Phase; 7] = [
        Phase::Abc,
        Phase::A,
        Phase::B,
        Phase::C,
        Phase::Ab,
        Phase::Bc,
        Phase::Ca,
    ];
    const RUNS: [RunWhen; 3] = [RunWhen::Always, RunWhen::Shifts, RunWhen::Window];

    fn window(a: u32, len: u32) -> String {
        format!("{:02}:00-{:02}:00", a % 24, (a + len) % 24)
    }

    prop_compose! {
        fn machine()(units in 1u32..5, kw in 1.0f64..80.0, phase in 0usize..7,
                     runs in 0usize..3, w in 0u32..24, wl in 1u32..20, fixed in any::<bool>(),
                     on_s in 20.0f64..5000.0, off_s in prop_oneof![Just(0.0), 20.0f64..5000.0])
                    -> MachineGroup {
            MachineGroup {
                units, kw, phase: PHASES[phase], runs: RUNS[runs], window: window(w, wl),
                cycle: if fixed { DutyCycle::Fixed } else { DutyCycle::Random },
                on_s, off_s, ..MachineGroup::default()
            }
        }
    }

    prop_compose! {
        fn welder()(units in 1u32..4, kw in 1.0f64..50.0, runs in 0usize..3,
                    w in 0u32..24, wl in 1u32..20, burst_s in 0.5f64..5.0,
                    pause_s in 2.0f64..60.0) -> WelderGroup {
            WelderGroup {
                units, kw, runs: RUNS[runs], window: window(w, wl), window_days:
                DayList::Text("mon-fri".into()), burst_s, pause_s, ..WelderGroup::default()
            }
        }
    }

    prop_compose! {
        fn pv()(peak_kw in 0.0f64..200.0, rise in 4.0f64..9.0, len in 6.0f64..15.0,
                clouds in any::<bool>(), clear_s in 60.0f64..3000.0,
                shade_s in 30.0f64..1000.0, depth in 0.0f64..1.0) -> PvArray {
            PvArray {
                peak_kw, sunrise_h: rise, sunset_h: (rise + len).min(24.0),
                clouds: clouds.then_some(Clouds { clear_s, shade_s, depth }),
                ..PvArray::default()
            }
        }
    }

    prop_compose! {
        fn config()(kw in 0.0f64..400.0, night in 0.0f64..400.0, weekend in 0.0f64..400.0,
                    s0 in 0u32..24, sl in 1u32..20, machines in proptest::collection::vec(machine(), 0..3),
                    welders in proptest::collection::vec(welder(), 0..2),
                    pv in proptest::collection::vec(pv(), 0..2)) -> SyntheticConfig {
            SyntheticConfig {
                noise_percent: 0.0,
                base: BaseLoad { kw, night_kw: Some(night), weekend_kw: Some(weekend),
                                 ..BaseLoad::default() },
                shifts: ShiftPattern { hours: vec![window(s0, sl)], ..ShiftPattern::default() },
                machines, welders, pv,
            }
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(24))]

        /// Without noise, every interval the generator promises unchanged gets, when
        /// sampled, exactly the promised sample; and a caller that steps over the
        /// promised runs gets the same samples where it asks as one that asks for every
        /// interval.
        #[test]
        fn promised_intervals_repeat_the_sample_bit_for_bit(
            c in config(), seed in any::<u64>(), dt_pick in 0usize..5, start_h in 0u32..168,
        ) {
            c.validate("load.synthetic").unwrap();
            let dt = [1.0, 2.5, 15.0, 60.0, 900.0][dt_pick];
            // About 12,000 intervals, from a whole hour of the week.
            let n = 12_000u64;
            let t_first = f64::from(start_h) * H;
            let (samples, promises) = run_with_promises(&c, seed, t_first, dt, n);
            // The first later interval whose sample differs from each interval's.
            let n_us = n as usize;
            let mut next_diff = vec![n; n_us];
            for j in (0..n_us - 1).rev() {
                next_diff[j] = if bits(&samples[j + 1]) != bits(&samples[j]) {
                    j as u64 + 1
                } else {
                    next_diff[j + 1]
                };
            }
            for k in 0..n_us {
                prop_assert!(promises[k] > k as u64);
                prop_assert!(promises[k].min(n) <= next_diff[k],
                    "interval {} promised unchanged up to {}, but {} differs",
                    k, promises[k], next_diff[k]);
            }
            let mut p = SyntheticProfile::new(&c, seed, monday(), t_first, dt);
            let mut s = LoadSample::default();
            let mut k = 0u64;
            while k < n {
                p.sample(k, t_first + k as f64 * dt, &mut s).unwrap();
                prop_assert_eq!(bits(&s), bits(&samples[k as usize]), "interval {}", k);
                k = p.unchanged_until(k);
            }
        }
    }
}

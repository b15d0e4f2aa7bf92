//! End-to-end tests of the `bankstep` command line: the summary on standard output, the
//! JSON report's promised keys (README, "JSON report"), the time-series CSV, exit
//! codes and error messages for bad input, and the help text.

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;
use std::path::{Path, PathBuf};
use tempfile::TempDir;

/// A minimal scenario with the synthetic load at its defaults (its fields will grow).
const MINIMAL: &str =
    "[[steps]]\nkvar = 50\ncount = 4\n[load.synthetic]\n[run]\nduration_s = 600\n";

fn bankstep() -> Command {
    Command::cargo_bin("bankstep").expect("the bankstep binary is built")
}

fn scenario(dir: &TempDir, name: &str, text: &str) -> PathBuf {
    let p = dir.path().join(name);
    std::fs::write(&p, text).expect("write the scenario");
    p
}

// A constant load of 100 kW and 75 kvar for one hour with a 25 kvar fixed step on a stiff
// bus: the supply draws 50 kvar, so the registers hold E_P = 100 kWh and E_Q,ind = 50 kvarh,
// and the billed PF is E_P / sqrt(E_P² + E_Q²) = 100 / sqrt(100² + 50²) = 0.894 (energy PF
// as tariffs bill it, common practice), below a 0.95 lag target; tan φ = 50 / 100 = 0.500.
#[test]
fn simulate_prints_registers_and_billed_pf_worked_by_hand() {
    let dir = TempDir::new().unwrap();
    // Two rows half an hour apart; the last holds for the median spacing, so they cover 1 h.
    std::fs::write(
        dir.path().join("load.csv"),
        "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n\
         0,33.333333333333336,25,33.333333333333336,25,33.333333333333336,25\n\
         1800,33.333333333333336,25,33.333333333333336,25,33.333333333333336,25\n",
    )
    .unwrap();
    let sc = scenario(
        &dir,
        "site.toml",
        "[[steps]]\nkvar = 25\nfixed = true\n[controller]\ntarget_pf = \"0.95 lag\"\n\
         [load]\ncsv = \"load.csv\"\n[run]\ntime_step_s = 60\n",
    );
    let out = bankstep()
        .arg("simulate")
        .arg(&sc)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    let line = |label: &str| {
        text.lines()
            .find(|l| l.trim_start().starts_with(label))
            .unwrap_or_else(|| panic!("no `{label}` line in:\n{text}"))
            .to_string()
    };
    assert!(
        line("Billed PF").contains("0.89 lag, below the 0.95 lag target"),
        "{text}"
    );
    assert!(line("Active import").contains("100.0 kWh"), "{text}");
    assert!(line("Reactive inductive").contains("50.0 kvarh"), "{text}");
    assert!(line("Reactive capacitive").contains("0.0 kvarh"), "{text}");
    assert!(line("tan φ").contains("0.500 inductive"), "{text}");
    for section in [
        "Top findings",
        "PF and energy",
        "Switching",
        "Resonance",
        "Wear",
    ] {
        assert!(text.contains(section), "no `{section}` in:\n{text}");
    }
    assert!(text.contains("site.toml"));
}

/// Looks up a dotted path such as `wear.per_step` in a JSON value.
fn at<'a>(v: &'a Value, path: &str) -> &'a Value {
    path.split('.').fold(v, |v, k| &v[k])
}

#[test]
fn json_report_has_every_promised_key() {
    let dir = TempDir::new().unwrap();
    let sc = scenario(
        &dir,
        "site.toml",
        &format!("{MINIMAL}[[steps]]\nkvar = 20\nfixed = true\n"),
    );
    let json = dir.path().join("out.json");
    bankstep()
        .arg("simulate")
        .arg(&sc)
        .arg("--json")
        .arg(&json)
        .arg("--quiet")
        .assert()
        .success();
    let v: Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();

    for key in [
        "run.samples",
        "run.duration_s",
        "run.time_step_s",
        "pf.energy_pf",
        "pf.kwh_import",
        "pf.kwh_export",
        "pf.kvarh_inductive",
        "pf.kvarh_capacitive",
        "pf.share_under_target",
        "pf.share_leading",
        "switching.total_operations",
        "switching.hunting_cycles",
        "overcorrection.episodes",
        "overcorrection.total_s",
        "overcorrection.longest_s",
        "overcorrection.worst_leading_kvar",
    ] {
        assert!(
            at(&v, key).is_number(),
            "`{key}` is not a number: {}",
            at(&v, key)
        );
    }
    assert_eq!(at(&v, "run.samples"), 600);
    let pf = at(&v, "pf.energy_pf").as_f64().unwrap();
    assert!((0.0..=1.0).contains(&pf));
    for key in ["pf.share_under_target", "pf.share_leading"] {
        let x = at(&v, key).as_f64().unwrap();
        assert!((0.0..=1.0).contains(&x), "{key} = {x}");
    }
    for key in ["pf.kvarh_inductive", "pf.kvarh_capacitive"] {
        assert!(at(&v, key).as_f64().unwrap() >= 0.0, "{key}");
    }
    let quadrant = at(&v, "pf.energy_pf_quadrant").as_str().unwrap();
    assert!(quadrant == "lag" || quadrant == "lead", "{quadrant}");

    // One entry per switched step, numbered from 1.
    let per_step = at(&v, "switching.per_step").as_array().unwrap();
    assert_eq!(per_step.len(), 4);
    for (i, s) in per_step.iter().enumerate() {
        assert_eq!(s["step"].as_u64(), Some(i as u64 + 1));
        for k in ["operations", "closings", "openings"] {
            assert!(s[k].is_u64(), "switching.per_step[{i}].{k}");
        }
    }

    // Every bank state reached has its steps, order (null if none) and time.
    let states = at(&v, "resonance.states").as_array().unwrap();
    assert!(!states.is_empty());
    for s in states {
        assert!(s["steps"].is_array());
        assert!(s["order"].is_number() || s["order"].is_null());
        assert!(s["time_s"].is_number());
    }
    for w in at(&v, "resonance.warnings").as_array().unwrap() {
        assert!(w["steps"].is_array());
        for k in ["order", "near_harmonic", "time_s"] {
            assert!(w[k].is_number(), "resonance.warnings[].{k}");
        }
    }

    // One entry per step, the fixed one too; null years where a step never operates.
    let wear = at(&v, "wear.per_step").as_array().unwrap();
    assert_eq!(wear.len(), 5);
    for (i, w) in wear.iter().enumerate() {
        assert_eq!(w["step"].as_u64(), Some(i as u64 + 1));
        assert!(w["operations_per_year"].is_number());
        assert!(w["energized_h"].is_number());
        let y = &w["years_to_rated_life"];
        if w["operations"].as_u64() == Some(0) {
            assert!(y.is_null(), "wear.per_step[{i}].years_to_rated_life = {y}");
        } else {
            assert!(y.is_number());
        }
    }
    assert!(wear[4]["years_to_rated_life"].is_null());

    assert_eq!(at(&v, "tool.name"), "bankstep");
    assert_eq!(at(&v, "tool.version"), env!("CARGO_PKG_VERSION"));
    assert_eq!(at(&v, "study.scenario"), "site.toml");
    assert!(at(&v, "study.seed").is_u64());
    assert!(at(&v, "study.ordering").is_string());
    assert!(at(&v, "study.target").is_string());
}

#[test]
fn json_to_stdout_is_reproducible_and_alone() {
    let dir = TempDir::new().unwrap();
    let sc = scenario(&dir, "site.toml", MINIMAL);
    let run = || {
        bankstep()
            .args(["simulate", "--json", "-", "--quiet"])
            .arg(&sc)
            .assert()
            .success()
            .get_output()
            .stdout
            .clone()
    };
    let a = run();
    let b = run();
    assert_eq!(a, b, "two runs of one scenario differ");
    let v: Value = serde_json::from_slice(&a).expect("stdout is one JSON object");
    assert!(v.is_object());
}

fn timeseries(dir: &TempDir, sc: &Path, extra: &[&str]) -> Vec<String> {
    let csv = dir.path().join("ts.csv");
    bankstep()
        .arg("simulate")
        .arg(sc)
        .arg("--timeseries")
        .arg(&csv)
        .args(extra)
        .arg("--quiet")
        .assert()
        .success();
    std::fs::read_to_string(&csv)
        .unwrap()
        .lines()
        .map(str::to_owned)
        .collect()
}

#[test]
fn timeseries_has_a_row_per_interval_and_decimates() {
    let dir = TempDir::new().unwrap();
    let sc = scenario(&dir, "site.toml", MINIMAL);
    let lines = timeseries(&dir, &sc, &[]);
    assert!(lines[0].starts_with(
        "time_s,p_kw,q_kvar,pf,pf_quadrant,u_bus_v,demand_kvar,bank_kvar,steps_on,operation,"
    ));
    assert!(lines[0].ends_with(",u_a_v,u_b_v,u_c_v"), "{}", lines[0]);
    assert_eq!(lines.len() - 1, 600);
    let first: Vec<&str> = lines[1].split(',').collect();
    assert_eq!(first.len(), 25, "{}", lines[1]);
    // The phases' active powers add up to the three-phase figure (within the rounding of
    // three printed decimals).
    let p3: f64 = first[1].parse().unwrap();
    let sum: f64 = first[10..13]
        .iter()
        .map(|x| x.parse::<f64>().unwrap())
        .sum();
    assert!((p3 - sum).abs() < 2e-3, "{p3} vs {sum}");
    assert_eq!(first[0], "0");
    assert!(first[4] == "lag" || first[4] == "lead");
    let pf: f64 = first[3].parse().unwrap();
    assert!((0.0..=1.0).contains(&pf));
    assert_eq!(lines[600].split(',').next(), Some("599"));

    let lines = timeseries(&dir, &sc, &["--every", "10"]);
    assert_eq!(lines.len() - 1, 60);
    assert_eq!(lines[2].split(',').next(), Some("10"));
}

#[test]
fn bad_scenario_exits_2_naming_file_and_key() {
    let dir = TempDir::new().unwrap();
    let sc = scenario(
        &dir,
        "bad.toml",
        &MINIMAL.replace("kvar = 50", "kvar = -50"),
    );
    bankstep()
        .arg("simulate")
        .arg(&sc)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("bad.toml"))
        .stderr(predicate::str::contains(
            "[[steps]] table 1 (steps 1 to 4).kvar",
        ));
}

#[test]
fn missing_scenario_exits_2_naming_it() {
    let dir = TempDir::new().unwrap();
    let missing = dir.path().join("nowhere.toml");
    bankstep()
        .arg("simulate")
        .arg(&missing)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("nowhere.toml"));
}

#[test]
fn unwritable_output_exits_1() {
    let dir = TempDir::new().unwrap();
    let sc = scenario(&dir, "site.toml", MINIMAL);
    let bad = dir.path().join("no-such-dir").join("out.json");
    bankstep()
        .arg("simulate")
        .arg(&sc)
        .arg("--json")
        .arg(&bad)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("out.json"));
}

#[test]
fn every_needs_timeseries_and_a_positive_n() {
    let dir = TempDir::new().unwrap();
    let sc = scenario(&dir, "site.toml", MINIMAL);
    bankstep()
        .arg("simulate")
        .arg(&sc)
        .args(["--every", "10"])
        .assert()
        .code(2);
    bankstep()
        .arg("simulate")
        .arg(&sc)
        .args(["--timeseries", "x.csv", "--every", "0"])
        .current_dir(dir.path())
        .assert()
        .code(2)
        .stderr(predicate::str::contains("must be at least 1"))
        .stderr(predicate::str::contains("18446744073709551615").not());
}

#[test]
fn help_teaches_the_subcommand_and_an_example() {
    bankstep()
        .arg("--help")
        .assert()
        .success()
        .stdout(predicate::str::contains("simulate"))
        .stdout(predicate::str::contains("Example"))
        .stdout(predicate::str::contains(
            "Caution: bankstep is a planning aid",
        ))
        .stdout(predicate::str::contains("Exit codes"));
    bankstep()
        .args(["simulate", "--help"])
        .assert()
        .success()
        .stdout(predicate::str::contains("bankstep simulate site.toml"))
        .stdout(predicate::str::contains("--every"))
        .stdout(predicate::str::contains("kvar"))
        .stdout(predicate::str::contains("Capacitors hold their charge"))
        .stdout(predicate::str::contains("Exit codes"));
}

/// The bundled pumping station (six plain 50 kvar steps, six-pulse drives).
fn pumping_station() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/pumping-station.toml")
}

#[test]
fn simulate_names_resonating_states_with_hours_a_year() {
    let dir = TempDir::new().unwrap();
    let json = dir.path().join("ps.json");
    let out = bankstep()
        .arg("simulate")
        .arg(pumping_station())
        .arg("--json")
        .arg(&json)
        .arg("--quiet")
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    // The summary leads with the worst harmonic state, in plain words.
    let top = text.split("Top findings").nth(1).unwrap();
    let first = top
        .lines()
        .find(|l| l.trim_start().starts_with("1."))
        .unwrap();
    assert!(first.contains("Worst harmonic state"), "{text}");
    assert!(text.contains("near the 7th harmonic") && text.contains("h a year"));
    assert!(text.contains("THD_V") && text.contains("Caution: capacitors hold"));
    let v: Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    let run_s = at(&v, "run.duration_s").as_f64().unwrap();
    let warnings = at(&v, "resonance.warnings").as_array().unwrap();
    assert!(!warnings.is_empty());
    for w in warnings {
        assert!(w["steps"].is_array());
        for k in [
            "order",
            "near_harmonic",
            "time_s",
            "hours_per_year",
            "thd_pct",
        ] {
            assert!(w[k].is_number(), "resonance.warnings[].{k}");
        }
        // Hours a year: the run's share of time extrapolated to 8760 h.
        let h = w["time_s"].as_f64().unwrap() / run_s * 8760.0;
        assert!((w["hours_per_year"].as_f64().unwrap() - h).abs() < 1e-6);
    }
    let states = at(&v, "resonance.states").as_array().unwrap();
    assert!(states
        .iter()
        .any(|s| s["step_stress"].as_array().is_some_and(|a| !a.is_empty())));
}

#[test]
fn resonance_shows_detuning_moving_the_peak_below_the_5th() {
    let out = bankstep()
        .arg("resonance")
        .arg(pumping_station())
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    assert!(text.contains("What detuning would do"), "{text}");
    assert!(text.contains("all below the 5th harmonic?"), "{text}");
    let row = |p: &str| {
        text.lines()
            .find(|l| l.trim_start().starts_with(p))
            .unwrap_or_else(|| panic!("no `{p}` row in\n{text}"))
            .to_string()
    };
    assert!(row("as built").trim_end().ends_with("no"));
    for p in ["5.67 %", "7.00 %", "14.00 %"] {
        assert!(row(p).trim_end().ends_with("yes"), "{}", row(p));
    }
    // Tuning orders 1/sqrt(p) of a detuned step: 4.20, 3.78, 2.67 for 5.67 %, 7 % and 14 %
    // (common practice; the formula read in public worked calculations).
    assert!(row("7.00 %").contains("3.78"));
    assert!(text.contains("near h7"));
}

#[test]
fn resonance_writes_csv_curves_and_json() {
    let dir = TempDir::new().unwrap();
    let csv = dir.path().join("z.csv");
    let json = dir.path().join("z.json");
    bankstep()
        .arg("resonance")
        .arg(pumping_station())
        .args(["--states", "1+2,1+2+3+4", "--quiet", "--curves"])
        .arg("--csv")
        .arg(&csv)
        .arg("--json")
        .arg(&json)
        .assert()
        .success();
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "h,supply_only_ohm,z_1+2_ohm,z_1+2+3+4_ohm"
    );
    // Orders 1 to 50 by 0.01: 4,901 rows.
    assert_eq!(lines.clone().count(), 4901);
    assert!(lines.next().unwrap().starts_with("1.00,"));
    let v: Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    let states = v["states"].as_array().unwrap();
    assert_eq!(states.len(), 2);
    // Short-circuit power at the bus, 1/S_sc = 1/S_sc,grid + u_k/S_T (IEC 60909-style
    // addition of impedances, common practice): 150 MVA grid, 630 kVA at 6 % → 9,813 kVA;
    // 200 kvar on it resonates at sqrt(S_sc/Q_c) = sqrt(9813/200) = 7.005 (IEEE Std 519
    // estimate, from memory).
    let s_sc = 1.0 / (1.0 / 150_000.0 + 0.06 / 630.0);
    assert!((v["supply"]["short_circuit_kva"].as_f64().unwrap() - s_sc).abs() < 1e-6);
    let order = states[1]["order"].as_f64().unwrap();
    assert!((order - 7.0047).abs() < 1e-4, "{order}");
    assert!((order - (s_sc / 200.0).sqrt()).abs() < 1e-9);
    assert_eq!(states[1]["near_harmonic"], 7.0);
    for d in v["detuning"].as_array().unwrap() {
        assert!(d["full_bank_order"].as_f64().unwrap() < 5.0);
    }
    assert_eq!(v["curves"]["h"].as_array().unwrap().len(), 4901);
    assert_eq!(
        v["curves"]["states"][0]["impedance_ohm"]
            .as_array()
            .unwrap()
            .len(),
        4901
    );
}

#[test]
fn resonance_bad_states_exit_2() {
    bankstep()
        .arg("resonance")
        .arg(pumping_station())
        .args(["--states", "1+9"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("steps 1 to 6"));
    bankstep()
        .arg("resonance")
        .arg(pumping_station())
        .args(["--resolution", "0"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("resolution"));
}

#[test]
fn resonance_help_teaches_units_example_and_exit_codes() {
    bankstep()
        .args(["resonance", "--help"])
        .assert()
        .success()
        .stdout(
            predicate::str::contains("Exit codes")
                .and(predicate::str::contains(
                    "bankstep resonance site.toml --states 1+2,1+2+3",
                ))
                .and(predicate::str::contains("sqrt(S_sc/Q_c)"))
                .and(predicate::str::contains("ohm"))
                .and(predicate::str::contains("U/(1 - p)")),
        );
}

// What the reader did with defective rows is stated in the summary and in the JSON report.
#[test]
fn profile_defects_are_reported() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("p.csv"),
        "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n0,100,60,100,60,100,60\n60,100,NaN,100,40,100,40\n120,50,30,50,30,50,30\n180,50,30,50,30,50,30\n",
    )
    .unwrap();
    let sc = dir.path().join("s.toml");
    std::fs::write(&sc, "[[steps]]\nkvar = 25\ncount = 4\n[load]\ncsv = \"p.csv\"\n[load.defects]\nnot_finite = \"hold\"\n").unwrap();
    let out = assert_cmd::Command::cargo_bin("bankstep")
        .unwrap()
        .arg("simulate")
        .arg(&sc)
        .arg("--quiet")
        .assert()
        .success();
    let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(
        text.contains("Load profile")
            && text.contains("not_finite: 1 row")
            && text.contains("line 3"),
        "{text}"
    );
    let out = assert_cmd::Command::cargo_bin("bankstep")
        .unwrap()
        .args(["simulate", "--quiet", "--json", "-"])
        .arg(&sc)
        .assert()
        .success();
    let v: serde_json::Value = serde_json::from_slice(&out.get_output().stdout).unwrap();
    assert_eq!(v["profile"]["rows_held"], 1);
    assert_eq!(v["profile"]["kinds"][0]["kind"], "not_finite");
}

// Both JSON outputs start with the same `tool` and `provenance` objects, and the scenario
// hash is the SHA-256 of the file's bytes (checked with the sha2 crate, a general-purpose
// implementation of FIPS 180-4).
#[test]
fn simulate_and_resonance_json_carry_the_same_provenance() {
    use sha2::{Digest, Sha256};
    let dir = TempDir::new().unwrap();
    let sim = dir.path().join("sim.json");
    let res = dir.path().join("res.json");
    bankstep()
        .arg("simulate")
        .arg(pumping_station())
        .args(["--quiet", "--json"])
        .arg(&sim)
        .assert()
        .success();
    bankstep()
        .arg("resonance")
        .arg(pumping_station())
        .args(["--quiet", "--states", "reached", "--json"])
        .arg(&res)
        .assert()
        .success();
    let bytes = std::fs::read(pumping_station()).unwrap();
    let want: String = Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    let csv = std::fs::read(pumping_station().with_file_name("pumping-station-day.csv")).unwrap();
    let want_csv: String = Sha256::digest(&csv)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    for path in [&sim, &res] {
        let text = std::fs::read_to_string(path).unwrap();
        let v: Value = serde_json::from_str(&text).unwrap();
        // Top-level keys in file order: `tool`, then `provenance`, before anything else.
        let tool = text.find("\n  \"tool\": {").expect("top-level tool");
        let prov = text
            .find("\n  \"provenance\": {")
            .expect("top-level provenance");
        let first_other = text.find("\n  \"scenario\"").or(text.find("\n  \"study\""));
        assert!(
            tool < prov && first_other.is_none_or(|o| prov < o),
            "{}",
            path.display()
        );
        assert_eq!(v["provenance"]["scenario_sha256"], want.as_str());
        assert_eq!(v["provenance"]["profile_sha256"], want_csv.as_str());
        assert_eq!(
            v["provenance"]["seed"],
            v["provenance"]["seed"].as_u64().unwrap()
        );
        assert!(!text.contains("-0.0"), "{}", path.display());
    }
}

//! End-to-end tests of `bankstep design`: the recommendation and its reasons on a bundled
//! scenario, the recommended total of a hand-worked constant load, the JSON and CSV
//! outputs, and bad options.

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;
use std::path::{Path, PathBuf};
use tempfile::TempDir;

fn bankstep() -> Command {
    Command::cargo_bin("bankstep").expect("the bankstep binary is built")
}

fn bundled(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios")
        .join(name)
}

// The bundled pumping station (staged pumps on drives, 0.98 lag target): the design
// recommends a layout, says why, and why each other one stands below the one above it,
// with the usual cautions.
#[test]
fn design_recommends_a_layout_with_its_reasons() {
    bankstep()
        .args(["design", "--quiet", "--max-layouts", "4"])
        .arg(bundled("pumping-station.toml"))
        .assert()
        .success()
        .stdout(predicate::str::contains("Recommended total"))
        .stdout(predicate::str::contains("1. "))
        .stdout(predicate::str::contains("Recommended: it meets the target"))
        .stdout(predicate::str::contains("Below #1"))
        .stdout(predicate::str::contains(
            "Best settings: controller.ordering",
        ))
        .stdout(predicate::str::contains("lag"))
        .stdout(predicate::str::contains("discharge"))
        .stdout(predicate::str::contains("U/(1 − p)"))
        .stdout(predicate::str::contains("licensed practice"));
}

/// A day of 15-minute rows of a constant balanced load: 300 kW at PF 0.80 lag.
fn constant_site(dir: &TempDir) -> PathBuf {
    let mut csv = String::from("time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n");
    for i in 0..96 {
        csv.push_str(&format!("{},100,75,100,75,100,75\n", i * 900));
    }
    std::fs::write(dir.path().join("load.csv"), csv).unwrap();
    let p = dir.path().join("site.toml");
    std::fs::write(
        &p,
        "[[steps]]\nkvar = 50\ncount = 2\n[controller]\ntarget_pf = \"0.95 lag\"\n\
         [load]\ncsv = \"load.csv\"\n",
    )
    .unwrap();
    p
}

// 300 kW at 0.80 lag to 0.95 lag: Q = 300 × 0.42132 = 126.4 kvar (IEEE Std 141, kW
// multiplier table, from memory for the table), at every instant. With 25 and 50 kvar
// steps, up to 6 of them and plain steps only, the band 126.4 to 164.3 kvar holds 3 × 50
// and 6 × 25 (150 kvar each; 25 + 2 × 50 = 125 falls short, 25 + 3 × 50 = 175 and
// 25 + 50 + 100 exceed it), worked out by hand from the families.
#[test]
fn constant_load_gets_its_multiplier_and_the_layouts_in_the_band() {
    let dir = TempDir::new().unwrap();
    let sc = constant_site(&dir);
    let json = dir.path().join("design.json");
    let csv = dir.path().join("design.csv");
    bankstep()
        .args(["design", "--quiet", "--sizes", "25,50", "--max-steps", "6"])
        .args(["--detuning", "0", "--json"])
        .arg(&json)
        .arg("--csv")
        .arg(&csv)
        .arg(&sc)
        .assert()
        .success()
        .stdout(predicate::str::contains("Recommended total  126.4 kvar"));
    let v: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let r = v["need"]["recommended_kvar"].as_f64().unwrap();
    assert!((r - 300.0 * 0.421).abs() < 0.3, "{r}");
    assert_eq!(v["tool"]["name"], "bankstep");
    assert!(v["provenance"]["profile_sha256"].is_string());
    assert_eq!(v["need"]["curve"].as_array().unwrap().len(), 201);
    let cands = v["candidates"].as_array().unwrap();
    let mut labels: Vec<&str> = cands.iter().map(|c| c["label"].as_str().unwrap()).collect();
    labels.sort();
    assert_eq!(labels, ["3x50", "6x25"]);
    // 3 × 50 reaches 0, 50, 100, 150 kvar.
    let three = cands.iter().find(|c| c["label"] == "3x50").unwrap();
    let levels: Vec<f64> = three["reachable_kvar"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect();
    assert_eq!(levels, [0.0, 50.0, 100.0, 150.0]);
    let table = std::fs::read_to_string(&csv).unwrap();
    assert_eq!(table.lines().count(), 3, "{table}");
    assert!(table.starts_with("rank,layout,"));
}

#[test]
fn bad_options_exit_2_naming_the_option() {
    let dir = TempDir::new().unwrap();
    let sc = constant_site(&dir);
    for (args, needle) in [
        (vec!["--coverage", "1.5"], "--coverage"),
        (vec!["--max-steps", "1"], "--max-steps"),
        (vec!["--detuning", "25"], "--detuning"),
        (vec!["--sizes", "0,50"], "--sizes"),
    ] {
        bankstep()
            .arg("design")
            .args(&args)
            .arg(&sc)
            .assert()
            .code(2)
            .stderr(predicate::str::contains(needle));
    }
}

#[test]
fn help_teaches_the_method_and_the_cautions() {
    bankstep()
        .args(["design", "--help"])
        .assert()
        .success()
        .stdout(predicate::str::contains("duration curve"))
        .stdout(predicate::str::contains("100 to 130 %"))
        .stdout(predicate::str::contains("Q_R * (U/U_R)^2 / (1 - p)"))
        .stdout(predicate::str::contains("licensed practice"));
}

// Results are the same for any number of threads (the runs are independent and collected
// in order; the ranking is a total order).
#[test]
fn design_is_the_same_on_one_and_two_threads() {
    let dir = TempDir::new().unwrap();
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let json = dir.path().join(format!("d{threads}.json"));
        bankstep()
            .args([
                "--threads",
                threads,
                "design",
                "--quiet",
                "--max-layouts",
                "3",
            ])
            .arg("--json")
            .arg(&json)
            .arg(bundled("pumping-station.toml"))
            .assert()
            .success();
        outs.push(std::fs::read(&json).unwrap());
    }
    assert_eq!(outs[0], outs[1]);
}

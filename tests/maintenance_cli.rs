//! `bankstep wear` and the wear plan of `simulate` through the command line.

use assert_cmd::Command;
use predicates::prelude::*;

/// A short synthetic site: six hours at 5 s, four 25 kvar steps, recorded counters.
const SITE: &str = r#"
[[steps]]
kvar = 25
count = 4
rated_operations = 20000
operations_so_far = [15000, 9000, 3000, 0]
installed = "2019-05-01"
contactor_peak_a = 1500
[controller]
switching_delay_s = 10
discharge_time_s = 30
[load.synthetic]
noise_percent = 2
[load.synthetic.base]
kw = 60
pf = 0.8
[[load.synthetic.machines]]
units = 3
kw = 20
pf = 0.7
cycle = "random"
on_s = 300
off_s = 300
[run]
duration_h = 6
time_step_s = 5
start = "2026-03-02T00:00:00"
[maintenance]
as_of = "2026-03-02"
projection_years = 2
seeds = 2
"#;

fn site() -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("site.toml");
    std::fs::write(&path, SITE).unwrap();
    (dir, path)
}

// The wear command prints the plan with its dated replacements and, with a what-if open
// step, the fault section; the JSON carries the same plan.
#[test]
fn wear_prints_a_dated_plan_and_a_what_if_fault() {
    let (_d, path) = site();
    Command::cargo_bin("bankstep")
        .unwrap()
        .args([
            "wear",
            path.to_str().unwrap(),
            "--fail-step",
            "2",
            "--from-h",
            "1",
        ])
        .assert()
        .success()
        .stdout(predicate::str::contains("Wear plan (as of 2026-03-02)"))
        .stdout(predicate::str::contains("Replacement plan"))
        .stdout(predicate::str::contains(
            "Step 2 fails open from 2026-03-02 01:00",
        ))
        .stdout(predicate::str::contains(
            "Step ordering on the same profile",
        ))
        .stdout(predicate::str::contains("Caution"));
    let out = Command::cargo_bin("bankstep")
        .unwrap()
        .args(["wear", path.to_str().unwrap(), "--json", "-", "--quiet"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let plan = &v["wear_plan"];
    assert_eq!(plan["as_of"], "2026-03-02");
    assert_eq!(plan["steps"][0]["operations_so_far"], 15000.0);
    assert_eq!(plan["steps"][0]["installed"], "2019-05-01");
    assert_eq!(plan["seeds"].as_array().unwrap().len(), 2);
    assert_eq!(plan["orderings"].as_array().unwrap().len(), 3);
    assert!(!plan["replacements"].as_array().unwrap().is_empty());
    assert_eq!(v["tool"]["name"], "bankstep");
}

#[test]
fn wear_refuses_a_step_outside_the_bank() {
    let (_d, path) = site();
    Command::cargo_bin("bankstep")
        .unwrap()
        .args(["wear", path.to_str().unwrap(), "--fail-step", "9"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--fail-step 9: the bank has steps 1 to 4",
        ));
    Command::cargo_bin("bankstep")
        .unwrap()
        .args([
            "wear",
            path.to_str().unwrap(),
            "--fail-step",
            "1",
            "--fail-kind",
            "capacitance-loss",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("needs --fraction"));
}

// The simulate summary ends with the wear plan, and with --full-wear-plan its JSON has
// `wear_plan` with the ageing projection beside the keys it always had.
#[test]
fn simulate_carries_the_wear_plan() {
    let (_d, path) = site();
    Command::cargo_bin("bankstep")
        .unwrap()
        .args(["simulate", path.to_str().unwrap()])
        .assert()
        .success()
        .stdout(predicate::str::contains("Wear plan (as of 2026-03-02)"))
        .stdout(predicate::str::contains("Closing inrush"));
    let out = Command::cargo_bin("bankstep")
        .unwrap()
        .args([
            "simulate",
            path.to_str().unwrap(),
            "--full-wear-plan",
            "--json",
            "-",
            "--quiet",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(v["wear"]["per_step"].is_array());
    assert_eq!(v["wear_plan"]["steps"].as_array().unwrap().len(), 4);
    assert!(v["wear_plan"]["ageing"]["years"].is_array());
}

// A scenario key of the maintenance section out of range names the key and the range.
#[test]
fn maintenance_keys_are_checked() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.toml");
    std::fs::write(
        &path,
        SITE.replace(
            "projection_years = 2",
            "projection_years = 2\ncapacitance_loss_pct_per_year = 40",
        ),
    )
    .unwrap();
    Command::cargo_bin("bankstep")
        .unwrap()
        .args(["wear", path.to_str().unwrap()])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "maintenance.capacitance_loss_pct_per_year",
        ));
    std::fs::write(
        &path,
        SITE.replace(
            "operations_so_far = [15000, 9000, 3000, 0]",
            "operations_so_far = [1, 2]",
        ),
    )
    .unwrap();
    Command::cargo_bin("bankstep")
        .unwrap()
        .args(["wear", path.to_str().unwrap()])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("operations_so_far"));
}

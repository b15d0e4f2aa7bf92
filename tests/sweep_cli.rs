//! The `sweep` and `merge` commands as a user runs them: help, outputs, shards merged to
//! the same bytes, and errors that name what is wrong.

use assert_cmd::Command;
use predicates::str::contains;

fn bankstep() -> Command {
    Command::cargo_bin("bankstep").unwrap()
}

/// The workshop cut to two hours, written beside the test's other files.
fn scenario(dir: &std::path::Path) -> std::path::PathBuf {
    let t = std::fs::read_to_string("scenarios/welding-workshop.toml")
        .unwrap()
        .replace("duration_days = 7", "duration_h = 2");
    let p = dir.join("workshop.toml");
    std::fs::write(&p, t).unwrap();
    p
}

const VARY: [&str; 4] = [
    "--vary",
    "controller.switching_delay_s=5,30",
    "--vary",
    "controller.ordering=sequential,rotating",
];

#[test]
fn help_teaches_with_an_example() {
    bankstep()
        .args(["sweep", "--help"])
        .assert()
        .success()
        .stdout(contains(
            "bankstep sweep site.toml --vary controller.dead_band_kvar=10:60:10",
        ))
        .stdout(contains("--shard"))
        .stdout(contains("Caution"));
}

#[test]
fn summary_shows_the_front_and_the_recommendation() {
    let dir = tempfile::tempdir().unwrap();
    let sc = scenario(dir.path());
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(VARY)
        .arg("--quiet")
        .assert()
        .success()
        .stdout(contains("Pareto front"))
        .stdout(contains("Recommendation"))
        .stdout(contains(" lag"))
        .stdout(contains("operations a year"));
}

#[test]
fn shards_merge_to_the_same_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let sc = scenario(dir.path());
    let d = dir.path();
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(VARY)
        .arg("--csv")
        .arg(d.join("all.csv"))
        .arg("--json")
        .arg(d.join("all.json"))
        .arg("--quiet")
        .assert()
        .success();
    for k in 1..=3 {
        bankstep()
            .arg("sweep")
            .arg(&sc)
            .args(VARY)
            .args(["--shard", &format!("{k}/3"), "--json"])
            .arg(d.join(format!("s{k}.json")))
            .arg("--quiet")
            .assert()
            .success();
    }
    bankstep()
        .arg("merge")
        .args((1..=3).map(|k| d.join(format!("s{k}.json"))))
        .arg("--csv")
        .arg(d.join("m.csv"))
        .arg("--json")
        .arg(d.join("m.json"))
        .arg("--quiet")
        .assert()
        .success();
    let read = |n: &str| std::fs::read(d.join(n)).unwrap();
    assert_eq!(read("all.csv"), read("m.csv"));
    assert_eq!(read("all.json"), read("m.json"));
    let csv = String::from_utf8(read("all.csv")).unwrap();
    assert_eq!(csv.lines().count(), 1 + 5);
    assert!(csv.lines().next().unwrap().ends_with(",front"));
    // A shard missing: the merge says which runs.
    bankstep()
        .arg("merge")
        .arg(d.join("s1.json"))
        .arg(d.join("s3.json"))
        .assert()
        .code(2)
        .stderr(contains("runs are missing"));
}

#[test]
fn bad_input_names_the_key() {
    let dir = tempfile::tempdir().unwrap();
    let sc = scenario(dir.path());
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(["--vary", "controller.dead_band_kvr=3"])
        .assert()
        .code(2)
        .stderr(contains("controller.dead_band_kvr"));
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(["--vary", "controller.switching_delay_s=1:5:0"])
        .assert()
        .code(2)
        .stderr(contains("cannot be 0"));
    bankstep()
        .arg("sweep")
        .arg(&sc)
        .args(["--vary", "controller.switching_delay_s=5", "--shard", "4/3"])
        .args(["--json", "x.json"])
        .assert()
        .code(2)
        .stderr(contains("1 ≤ K ≤ N"));
}

//! Reproducibility: the same scenario and seed give a byte-identical JSON report; another
//! seed gives another synthetic load.

use bankstep::engine::Quiet;
use bankstep::report::json::JsonReport;
use bankstep::report::{ReportContext, ReportWriter};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::path::Path;

fn report(seed: u64) -> Vec<u8> {
    let text = std::fs::read_to_string("scenarios/compressor-plant.toml")
        .unwrap()
        .replace("duration_days = 14", "duration_days = 2")
        .replace("seed = 11", &format!("seed = {seed}"));
    let sc = Scenario::from_str(&text, Path::new("scenarios/compressor-plant.toml")).unwrap();
    let study = Study::prepare(sc).unwrap();
    let r = study.run(&mut Quiet).unwrap();
    let a = bankstep::analysis::assess(&study, &r);
    let mut out = Vec::new();
    JsonReport
        .write(&ReportContext::new(&study, &r, &a), &mut out)
        .unwrap();
    out
}

#[test]
fn same_seed_same_bytes() {
    let a = report(11);
    assert_eq!(a, report(11));
    assert_ne!(a, report(12));
}

// The states of a run are solved in parallel; the report must not depend on the number of
// threads.
#[test]
fn one_and_two_threads_give_the_same_bytes() {
    let pool = |n| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
    };
    let one = pool(1).install(|| report(11));
    let two = pool(2).install(|| report(11));
    assert_eq!(one, two);
}

// The same through the command line: `--threads 1` and `--threads 2` write the same JSON.
#[test]
fn cli_thread_count_does_not_change_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let mut outs = Vec::new();
    for n in ["1", "2"] {
        let path = dir.path().join(format!("r{n}.json"));
        assert_cmd::Command::cargo_bin("bankstep")
            .unwrap()
            .args([
                "--threads",
                n,
                "simulate",
                "scenarios/pumping-station.toml",
                "--quiet",
                "--json",
            ])
            .arg(&path)
            .assert()
            .success();
        outs.push(std::fs::read(&path).unwrap());
    }
    assert_eq!(outs[0], outs[1]);
}

//! Whole-sweep checks: a sweep's row is the single run of that setting, whatever the
//! threads and the shard split; override errors name the key.

use bankstep::analysis;
use bankstep::engine::Quiet;
use bankstep::scenario::{Override, Scenario};
use bankstep::study::Study;
use bankstep::sweep::{merge, FrontAxes, Shard, Sweep, SweepSpec, Variation};
use std::path::Path;

/// The welding workshop, cut to one day at 1 s (a short bundled scenario).
fn text() -> String {
    let t = std::fs::read_to_string("scenarios/welding-workshop.toml").unwrap();
    t.replace("duration_days = 7", "duration_days = 1")
}

fn path() -> &'static Path {
    Path::new("scenarios/welding-workshop.toml")
}

fn spec() -> SweepSpec {
    SweepSpec {
        variations: vec![
            Variation::parse("controller.switching_delay_s=5,30").unwrap(),
            Variation::parse("controller.ordering=sequential,rotating").unwrap(),
        ],
        seeds: 1,
    }
}

fn pool(n: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build()
        .unwrap()
}

#[test]
fn a_row_is_the_single_run_of_its_setting() {
    let sw = Sweep::new(&text(), path(), &spec(), FrontAxes::PfOps).unwrap();
    assert_eq!(sw.run_count(), 5);
    let one = pool(1).install(|| sw.run_all(&|_, _| {})).unwrap();
    let two = pool(2).install(|| sw.run_all(&|_, _| {})).unwrap();
    assert_eq!(one, two);
    // Setting 4 is the last of the product: delay 30 s, rotating (first key slowest).
    let row = &one.rows[4];
    assert_eq!(row.values, vec!["30", "\"rotating\""]);
    let sc = Scenario::from_str_with(
        &text(),
        path(),
        &[
            Override::new("controller.switching_delay_s", toml::Value::Integer(30)),
            Override::new(
                "controller.ordering",
                toml::Value::String("rotating".into()),
            ),
        ],
    )
    .unwrap();
    let study = Study::prepare(sc).unwrap();
    let r = study.run(&mut Quiet).unwrap();
    let a = analysis::assess(&study, &r);
    assert_eq!(row.billed_pf, r.metrics.pf.energy_pf);
    assert_eq!(row.operations, r.metrics.switching.total_operations);
    assert_eq!(row.operations_per_year, r.metrics.switching.per_year);
    assert_eq!(row.share_under_target, r.metrics.pf.share_under_target);
    assert_eq!(row.hunting_cycles, r.metrics.switching.hunting_cycles);
    assert_eq!(row.pf_goal, a.billed_pf.goal);
    // The reference row is the scenario as written.
    let base = Study::prepare(Scenario::from_str(&text(), path()).unwrap()).unwrap();
    let rb = base.run(&mut Quiet).unwrap();
    assert_eq!(one.rows[0].billed_pf, rb.metrics.pf.energy_pf);
    assert_eq!(one.rows[0].values, vec!["5", "\"sequential\""]);
    // A 3-shard split merged gives the same outcome.
    let files: Vec<_> = (1..=3)
        .map(|k| sw.run_shard(Shard::new(k, 3).unwrap(), &|_, _| {}).unwrap())
        .collect();
    let merged = merge(files, &[]).unwrap();
    assert_eq!(merged, one);
}

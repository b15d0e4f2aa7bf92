//! `Study::run`, which has the synthetic generator fill the load on a second thread on
//! a machine with two cores or more, against the same study run on a fresh generator
//! directly (`Study::run_on`): the bundled synthetic scenarios, shortened, give the
//! same result to the bit (every metric, written as JSON, which keeps each number's
//! bits), with blocks and with an observer that needs every interval.

use bankstep::engine::{IntervalRecord, Observer, Quiet};
use bankstep::error::RunError;
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::path::Path;

/// Counts the intervals, one by one.
#[derive(Default)]
struct Every(u64);

impl Observer for Every {
    fn interval(&mut self, _r: &IntervalRecord<'_>) -> Result<(), RunError> {
        self.0 += 1;
        Ok(())
    }
}

/// A bundled scenario over its first `hours`.
fn shortened(name: &str, hours: u32) -> Study {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios")
        .join(format!("{name}.toml"));
    let text = std::fs::read_to_string(&path).expect("scenario file");
    let line = text
        .lines()
        .find(|l| l.starts_with("duration_days"))
        .expect("a duration_days line");
    let text = text.replace(line, &format!("duration_h = {hours}"));
    let sc = Scenario::from_str(&text, &path).expect("scenario");
    Study::prepare(sc).expect("study")
}

#[test]
fn prefetched_runs_of_the_bundled_scenarios_equal_direct_runs() {
    for name in [
        "compressor-plant",
        "welding-workshop",
        "rooftop-solar-office",
        "cold-store",
    ] {
        let study = shortened(name, 5);
        let json = |r: Result<_, RunError>| serde_json::to_string(&r.expect("run")).expect("json");
        let direct = json(study.run_on(&mut study.source().expect("source"), &mut Quiet));
        assert_eq!(json(study.run(&mut Quiet)), direct, "{name}, blocks");
        let mut seen = Every::default();
        let direct = json(study.run_on(&mut study.source().expect("source"), &mut seen));
        assert_eq!(seen.0, study.plan.intervals, "{name}");
        let mut seen = Every::default();
        assert_eq!(json(study.run(&mut seen)), direct, "{name}, every interval");
        assert_eq!(seen.0, study.plan.intervals, "{name}");
    }
}

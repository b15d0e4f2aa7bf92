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

/// The error of a sweep whose one setting is `ov` (as `KEY=VALUE`).
fn override_error(ov: &str) -> String {
    let spec = SweepSpec {
        variations: vec![Variation::parse(ov).unwrap()],
        seeds: 1,
    };
    Sweep::new(&text(), path(), &spec, FrontAxes::PfOps)
        .unwrap_err()
        .to_string()
}

#[test]
fn override_errors_name_the_key_and_the_value() {
    let e = override_error("controller.dead_band_kvr=3");
    assert!(e.contains("controller.dead_band_kvr"), "{e}");
    assert!(e.contains("unknown field"), "{e}");
    let e = override_error("controller.dead_band_kvar=-5");
    assert!(e.contains("controller.dead_band_kvar = -5"), "{e}");
    assert!(e.contains("allowed range"), "{e}");
    let e = override_error("controller.switching_delay_s=fast");
    assert!(e.contains("controller.switching_delay_s = \"fast\""), "{e}");
    let e = override_error("steps=6y50");
    assert!(e.contains("`steps`") && e.contains("6y50"), "{e}");
    let e = override_error("tariff.currency_name=EUR");
    assert!(e.contains("tariff.currency_name"), "{e}");
    // A value where a table stands is refused with both names.
    let e = override_error("controller.ordering.x=1");
    assert!(e.contains("controller.ordering"), "{e}");
}

#[test]
fn step_layout_shorthand_makes_the_bank_it_says() {
    // Hand-derived: `40f+2x25+3x50@7%` is steps 1 (40 kvar, fixed), 2 and 3 (25 kvar),
    // 4 to 6 (50 kvar), all with a 7 % reactor.
    let sc = Scenario::from_str_with(
        &text(),
        path(),
        &[Override::parse("steps=40f+2x25+3x50@7%").unwrap()],
    )
    .unwrap();
    let kvar: Vec<f64> = sc.steps.iter().map(|s| s.kvar).collect();
    assert_eq!(kvar, vec![40.0, 25.0, 25.0, 50.0, 50.0, 50.0]);
    assert!(sc.steps[0].fixed && !sc.steps[1].fixed);
    assert!(sc.steps.iter().all(|s| s.detuning == Some(0.07)));
}

#[test]
fn seeds_give_medians_and_ranges_and_are_refused_for_a_csv_profile() {
    let t = text().replace("duration_days = 1", "duration_h = 2");
    let spec = SweepSpec {
        variations: vec![Variation::parse("controller.switching_delay_s=10").unwrap()],
        seeds: 3,
    };
    let sw = Sweep::new(&t, path(), &spec, FrontAxes::PfOps).unwrap();
    let o = sw.run_all(&|_, _| {}).unwrap();
    assert_eq!(o.rows.len(), 6);
    // The scenario's seed is 5: runs 0..3 use seeds 5, 6, 7.
    let seeds: Vec<u64> = o.rows.iter().map(|r| r.seed).collect();
    assert_eq!(seeds, vec![5, 6, 7, 5, 6, 7]);
    let mut pf: Vec<f64> = o.rows[3..].iter().map(|r| r.billed_pf).collect();
    pf.sort_by(f64::total_cmp);
    let s = &o.settings[1].billed_pf;
    assert_eq!((s.min, s.median, s.max), (pf[0], pf[1], pf[2]));
    assert!(o
        .recommendation
        .sentences
        .iter()
        .any(|l| l.contains("over 3 seeds")));

    let csv = Path::new("scenarios/pumping-station.toml");
    let ct = std::fs::read_to_string(csv).unwrap();
    let spec = SweepSpec {
        variations: vec![Variation::parse("controller.switching_delay_s=10").unwrap()],
        seeds: 2,
    };
    let e = Sweep::new(&ct, csv, &spec, FrontAxes::PfOps)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("CSV profile") && e.contains("one realisation"),
        "{e}"
    );
}

#[test]
fn the_profile_is_prepared_once_per_distinct_load() {
    let csv = Path::new("scenarios/pumping-station.toml");
    let ct = std::fs::read_to_string(csv).unwrap();
    let spec = SweepSpec {
        variations: vec![Variation::parse("controller.switching_delay_s=10,20,40").unwrap()],
        seeds: 1,
    };
    let sw = Sweep::new(&ct, csv, &spec, FrontAxes::PfOps).unwrap();
    assert_eq!(sw.profiles().len(), 1);
    let spec = SweepSpec {
        variations: vec![Variation::parse("load.gap_factor=3,5").unwrap()],
        seeds: 1,
    };
    let sw = Sweep::new(&ct, csv, &spec, FrontAxes::PfOps).unwrap();
    // The reference and gap factor 3 (the default) write different [load] tables, so
    // three loads, each prepared once.
    assert_eq!(sw.profiles().len(), 3);
}

#[test]
fn tariff_cost_of_a_hand_case() {
    // A stiff 400 V bus (no transformer, infinite grid), a constant 100 kW + 60 kvar load
    // and a 20 kvar fixed step: the supply sees 100 kW and 40 kvar all day, and the 5 kvar
    // switched step never closes (the 0.90 lag target allows 48.4 kvar). One day, one
    // billing window: 2400 kWh and 960 kvarh inductive. Hand-derived:
    // - tan φ threshold 0.3: 960 − 0.3 × 2400 = 240 kvarh × 0.05 = 12 a day, 4380 a year;
    //   threshold 0.4: 960 − 960 = 0;
    // - PF 100/√(100² + 40²) = 0.92848 against 0.95: (0.95 − 0.92848)/0.01 × 10 a day;
    // - the fixed step is energized 8760 h a year: 8760/100 000 × 1000 = 87.6 a year.
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from("time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n");
    for h in 0..=24 {
        let t = h * 3600;
        csv.push_str(&format!(
            "{t},{p},{q},{p},{q},{p},{q}\n",
            p = 100.0 / 3.0,
            q = 20.0
        ));
    }
    std::fs::write(dir.path().join("load.csv"), csv).unwrap();
    let scen = r#"
[supply]
nominal_voltage_v = 400
[[steps]]
kvar = 20
fixed = true
[[steps]]
kvar = 5
[controller]
target_pf = "0.90 lag"
[load]
csv = "load.csv"
[run]
time_step_s = 60
duration_h = 24
[report]
billing_window = "run"
[tariff]
currency = "EUR"
reactive_price_per_kvarh = 0.05
pf_penalty_per_hundredth = 10
penalty_below_pf = 0.95
contactor_price = 80
capacitor_step_price = 1000
"#;
    let p = dir.path().join("site.toml");
    std::fs::write(&p, scen).unwrap();
    let spec = SweepSpec {
        variations: vec![Variation::parse("tariff.reactive_threshold_tan_phi=0.3,0.4").unwrap()],
        seeds: 1,
    };
    let sw = Sweep::from_file(&p, &spec, FrontAxes::PfOps).unwrap();
    let o = sw.run_all(&|_, _| {}).unwrap();
    let pf = 100.0 / (100.0f64 * 100.0 + 40.0 * 40.0).sqrt();
    let close = |a: f64, b: f64| (a - b).abs() < 1e-6 * b.abs().max(1.0);
    for (row, reactive) in [(&o.rows[1], 4380.0), (&o.rows[2], 0.0)] {
        assert_eq!(row.operations, 0);
        assert!(close(row.billed_pf, pf), "{}", row.billed_pf);
        let c = row.cost.unwrap();
        assert!(close(c.reactive_energy, reactive), "{c:?}");
        assert!(
            close(c.pf_penalty, 365.0 * 10.0 * (0.95 - pf) / 0.01),
            "{c:?}"
        );
        assert!(close(c.capacitors, 87.6), "{c:?}");
        assert_eq!(c.contactors, 0.0);
        assert!(close(
            c.total,
            c.reactive_energy + c.pf_penalty + c.capacitors
        ));
    }
    // The scenario's own threshold is the default tan φ 0.4 (common practice).
    assert!(close(o.rows[0].cost.unwrap().reactive_energy, 0.0));
}

mod merged_shards {
    use super::*;
    use bankstep::sweep::{Outcome, ShardFile};
    use proptest::prelude::*;
    use std::sync::OnceLock;

    /// A small sweep (two hours of the workshop, six settings) and its whole outcome.
    fn whole() -> &'static (Sweep, Outcome) {
        static W: OnceLock<(Sweep, Outcome)> = OnceLock::new();
        W.get_or_init(|| {
            let t = text().replace("duration_days = 1", "duration_h = 2");
            let spec = SweepSpec {
                variations: vec![
                    Variation::parse("controller.switching_delay_s=5,20,60").unwrap(),
                    Variation::parse("controller.dead_band_fraction=0.4,0.9").unwrap(),
                ],
                seeds: 1,
            };
            let sw = Sweep::new(&t, path(), &spec, FrontAxes::PfOps).unwrap();
            let o = sw.run_all(&|_, _| {}).unwrap();
            (sw, o)
        })
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 12, ..ProptestConfig::default() })]
        #[test]
        fn merged_shards_equal_the_whole(n in 1u32..9, threads in 1usize..3, rot in 0usize..8) {
            let (sw, o) = whole();
            let mut files: Vec<ShardFile> = pool(threads).install(|| {
                (1..=n)
                    .map(|k| sw.run_shard(Shard::new(k, n).unwrap(), &|_, _| {}).unwrap())
                    .collect()
            });
            // The files may come in any order.
            let len = files.len();
            files.rotate_left(rot % len);
            // Through the shard file format and back.
            let files: Vec<ShardFile> = files
                .iter()
                .map(|f| {
                    let mut b = Vec::new();
                    bankstep::report::sweep::write_shard(f, &mut b).unwrap();
                    bankstep::report::sweep::read_shard(&b).unwrap()
                })
                .collect();
            let merged = merge(files, &[]).unwrap();
            prop_assert_eq!(&merged, o);
        }
    }
}

//! Engine benchmark: one year at a 1 s step (31,536,000 intervals) with a 12-step bank on
//! a transformer-fed bus, driven by the synthetic generator. Prints ns per interval and
//! the peak resident memory. Run with `cargo bench --bench engine`; set
//! `BANKSTEP_BENCH_DAYS` to shorten it.

use bankstep::engine::Quiet;
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::path::Path;
use std::time::Instant;

const SCENARIO: &str = r#"
[supply]
nominal_voltage_v = 400
grid_short_circuit_mva = 250
[supply.transformer]
rated_kva = 1600
impedance_pct = 6
[[steps]]
kvar = 25
count = 4
[[steps]]
kvar = 50
count = 8
[controller]
target_pf = "0.95 lag"
switching_delay_s = 20
discharge_time_s = 60
ordering = "rotating"
averaging_s = 5
[harmonics]
preset = "six-pulse"
reference_kva = 300
[run]
duration_days = __DAYS__
time_step_s = 1
seed = 7

[load.synthetic]
__SYNTH__
"#;

/// A plant-like generator section; kept in one place so the bench and the docs agree.
const SYNTH: &str = include_str!("synthetic_section.toml");

/// Peak resident set size of this process, kB (Linux).
fn peak_rss_kb() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    s.lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|v| v.parse().ok())
}

fn main() {
    let days: f64 = std::env::var("BANKSTEP_BENCH_DAYS")
        .ok()
        .and_then(|d| d.parse().ok())
        .unwrap_or(365.0);
    let text = SCENARIO
        .replace("__DAYS__", &days.to_string())
        .replace("__SYNTH__", SYNTH);
    let sc = Scenario::from_str(&text, Path::new("bench.toml")).expect("bench scenario");
    let study = Study::prepare(sc).expect("bench study");
    let n = study.plan.intervals;
    let rss_before = peak_rss_kb();
    let t = Instant::now();
    let r = study.run(&mut Quiet).expect("bench run");
    let el = t.elapsed().as_secs_f64();
    println!(
        "engine/year-1s-12-steps: {n} intervals in {el:.3} s = {:.1} ns/interval",
        el * 1e9 / n as f64
    );
    println!(
        "  operations {}, energy PF {:.3} {}, states {}",
        r.metrics.switching.total_operations,
        r.metrics.pf.energy_pf,
        r.metrics.pf.energy_pf_quadrant.word(),
        r.metrics.states.len()
    );
    if let (Some(a), Some(b)) = (rss_before, peak_rss_kb()) {
        println!(
            "  peak RSS {:.1} MB (before run {:.1} MB)",
            b as f64 / 1024.0,
            a as f64 / 1024.0
        );
    }

    // The generator alone, to separate its cost from the engine's.
    let mut src = study.source().expect("source");
    let mut s = bankstep::profile::LoadSample::default();
    let t = Instant::now();
    let mut acc = 0.0;
    for k in 0..n {
        use bankstep::profile::LoadSource;
        src.sample(k, k as f64, &mut s).expect("sample");
        acc += s.p_kw[0];
    }
    let el = t.elapsed().as_secs_f64();
    println!(
        "synthetic generator alone: {:.1} ns/sample (checksum {acc:.0})",
        el * 1e9 / n as f64
    );
}

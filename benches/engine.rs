//! Engine benchmark: one year at a 1 s step (31,536,000 intervals) with a 12-step bank on
//! a transformer-fed bus, driven by the synthetic generator (on a second thread ahead of
//! the engine where the machine has two cores or more, as `Study::run` does). Prints ns
//! per interval and the peak resident memory, then the generator's own cost: ns per
//! sample (and samples per second) with the plant's measurement noise, and without
//! noise, where the generator promises runs of unchanged samples
//! (`LoadSource::unchanged_until`) that a caller may step over. Run with
//! `cargo bench --bench engine`; set `BANKSTEP_BENCH_DAYS` to shorten it and
//! `BANKSTEP_BENCH_PART=engine` or `=generator` to run one part only. Under
//! `taskset -c 0` (one core) no second thread is started.

use bankstep::engine::Quiet;
use bankstep::profile::{LoadSample, LoadSource};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::path::Path;
use std::time::Instant;

mod common;
use common::peak_rss_kb;

/// The site: supply, the 12-step bank and the controller settings.
const SITE: &str = include_str!("site_12_steps.toml");

/// The rest of the scenario, after the site.
const SCENARIO: &str = r#"
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

fn main() {
    let days: f64 = std::env::var("BANKSTEP_BENCH_DAYS")
        .ok()
        .and_then(|d| d.parse().ok())
        .unwrap_or(365.0);
    let part = std::env::var("BANKSTEP_BENCH_PART").unwrap_or_default();
    if part != "generator" {
        engine(days);
    }
    if part != "engine" {
        let plant = study(days, SYNTH);
        generator_every_interval("plant-1s", &plant);
        let quiet_synth = SYNTH.replace("noise_percent = 1.0", "noise_percent = 0");
        assert_ne!(
            quiet_synth, SYNTH,
            "the bench section sets noise_percent = 1.0"
        );
        let quiet = study(days, &quiet_synth);
        generator_every_interval("plant-1s-no-noise", &quiet);
        generator_skipping("plant-1s-no-noise-skipping", &quiet);
    }
}

/// The study of the bench scenario over `days`, with the generator section `synth`.
fn study(days: f64, synth: &str) -> Study {
    let text = format!("{SITE}{SCENARIO}")
        .replace("__DAYS__", &days.to_string())
        .replace("__SYNTH__", synth);
    let sc = Scenario::from_str(&text, Path::new("bench.toml")).expect("bench scenario");
    Study::prepare(sc).expect("bench study")
}

/// The whole run: generator, supply, bank, controller and metrics.
fn engine(days: f64) {
    let study = study(days, SYNTH);
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
}

/// FNV-1a, word by word, over the bit patterns of every sample of the study (untimed),
/// so that two builds of the generator can be compared bit for bit.
fn bits_hash(study: &Study) -> u64 {
    let (n, dt, t0) = (study.plan.intervals, study.plan.dt_s, study.plan.t_first_s);
    let mut src = study.source().expect("source");
    let mut s = LoadSample::default();
    let mut h: u64 = 0xCBF2_9CE4_8422_2325;
    for k in 0..n {
        src.sample(k, t0 + k as f64 * dt, &mut s).expect("sample");
        for x in s.p_kw.iter().chain(&s.q_kvar) {
            h = (h ^ x.to_bits()).wrapping_mul(0x0000_0100_0000_01B3);
        }
    }
    h
}

/// Times of the generator loops are the best of this many runs, as the machine may be
/// shared.
const REPEATS: usize = 3;

/// The generator alone over every interval of the study, one `sample` call each, at the
/// times the engine uses.
fn generator_every_interval(label: &str, study: &Study) {
    let (n, dt, t0) = (study.plan.intervals, study.plan.dt_s, study.plan.t_first_s);
    let mut el = f64::INFINITY;
    let mut acc = 0.0;
    for _ in 0..REPEATS {
        let mut src = study.source().expect("source");
        let mut s = LoadSample::default();
        acc = 0.0;
        let t = Instant::now();
        for k in 0..n {
            src.sample(k, t0 + k as f64 * dt, &mut s).expect("sample");
            acc += s.p_kw[0];
        }
        el = el.min(t.elapsed().as_secs_f64());
    }
    println!(
        "synthetic/{label}: {n} samples in {el:.3} s = {:.1} ns/sample, {:.1} M samples/s \
         (checksum {acc:.0}, bits hash {:016x})",
        el * 1e9 / n as f64,
        n as f64 / el / 1e6,
        bits_hash(study)
    );
}

/// The generator alone, asking only for the intervals where its output may change (as
/// an event-driven engine would); the time is per interval covered.
fn generator_skipping(label: &str, study: &Study) {
    let (n, dt, t0) = (study.plan.intervals, study.plan.dt_s, study.plan.t_first_s);
    let mut el = f64::INFINITY;
    let (mut acc, mut calls) = (0.0, 0u64);
    for _ in 0..REPEATS {
        let mut src = study.source().expect("source");
        let mut s = LoadSample::default();
        (acc, calls) = (0.0, 0);
        let t = Instant::now();
        let mut k = 0;
        while k < n {
            src.sample(k, t0 + k as f64 * dt, &mut s).expect("sample");
            let next = src.unchanged_until(k).min(n);
            acc += s.p_kw[0] * (next - k) as f64;
            calls += 1;
            k = next;
        }
        el = el.min(t.elapsed().as_secs_f64());
    }
    println!(
        "synthetic/{label}: {n} intervals in {el:.3} s = {:.2} ns/interval with {calls} \
         samples taken, one per {:.1} intervals (checksum {acc:.0})",
        el * 1e9 / n as f64,
        n as f64 / calls as f64
    );
}

//! Sweep benchmark: settings × one week at 1 s (604,800 intervals a run) of the 12-step
//! site on one prepared CSV profile (written from the synthetic plant first, so that the
//! runs share a profile held in memory). Times the same runs on 1 and on 2 threads,
//! prints the cost per run, the parallel speed-up, the projected time of 1,000 settings on
//! 2 threads against the 20 s target, and the peak memory against one copy of the profile.
//!
//! Run with `cargo bench --bench sweep`; `BANKSTEP_SWEEP_SETTINGS` (default 16) sets how
//! many settings are timed (1000 for the full case), `BANKSTEP_BENCH_DAYS` (default 7) the
//! run length.

use bankstep::profile::{LoadSample, LoadSource};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use bankstep::sweep::{FrontAxes, Sweep, SweepSpec, Variation};
use std::io::Write;
use std::path::Path;
use std::time::Instant;

mod common;
use common::peak_rss_kb;

const SITE: &str = include_str!("site_12_steps.toml");
const SYNTH: &str = include_str!("synthetic_section.toml");

/// Writes `days` of the synthetic plant at 1 s as a CSV profile.
fn write_profile(path: &Path, days: f64) -> u64 {
    let text = format!(
        "{SITE}\n[run]\nduration_days = {days}\ntime_step_s = 1\nseed = 7\n[load.synthetic]\n{SYNTH}"
    );
    let sc = Scenario::from_str(&text, Path::new("gen.toml")).expect("generator scenario");
    let study = Study::prepare(sc).expect("generator study");
    let mut src = study.source().expect("source");
    let mut s = LoadSample::default();
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).expect("profile file"));
    writeln!(out, "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar").unwrap();
    let n = study.plan.intervals;
    for k in 0..n {
        let t = k as f64;
        src.sample(k, t, &mut s).expect("sample");
        writeln!(
            out,
            "{k},{:.3},{:.3},{:.3},{:.3},{:.3},{:.3}",
            s.p_kw[0], s.q_kvar[0], s.p_kw[1], s.q_kvar[1], s.p_kw[2], s.q_kvar[2]
        )
        .unwrap();
    }
    n
}

fn main() {
    let settings: usize = std::env::var("BANKSTEP_SWEEP_SETTINGS")
        .ok()
        .and_then(|d| d.parse().ok())
        .unwrap_or(16);
    let days: f64 = std::env::var("BANKSTEP_BENCH_DAYS")
        .ok()
        .and_then(|d| d.parse().ok())
        .unwrap_or(7.0);
    let dir = tempfile_dir();
    let csv = dir.join("week.csv");
    let rows = write_profile(&csv, days);
    let scen = dir.join("site.toml");
    std::fs::write(
        &scen,
        format!(
            "{SITE}\n[harmonics]\npreset = \"six-pulse\"\nreference_kva = 300\n[run]\ntime_step_s = 1\n[load]\ncsv = \"week.csv\"\n"
        ),
    )
    .unwrap();
    // A product of at least `settings` settings: dead band × delay × ordering.
    let per = ((settings as f64 / 3.0).sqrt().ceil() as usize).max(1);
    let fr: Vec<String> = (0..per)
        .map(|i| format!("{:.2}", 0.4 + 0.8 * i as f64 / per as f64))
        .collect();
    let dl: Vec<String> = (0..per).map(|i| (5 + 10 * i).to_string()).collect();
    let spec = SweepSpec {
        variations: vec![
            Variation::parse(&format!("controller.dead_band_fraction={}", fr.join(","))).unwrap(),
            Variation::parse(&format!("controller.switching_delay_s={}", dl.join(","))).unwrap(),
            Variation::parse("controller.ordering=sequential,rotating,best-fit").unwrap(),
        ],
        seeds: 1,
    };
    let runs: Vec<usize> = (1..=settings).collect();
    let rss0 = peak_rss_kb();
    let mut times = Vec::new();
    let mut first_rows = None;
    for threads in [1usize, 2] {
        // A fresh sweep each time: the profile is scanned again (not timed) and the
        // resonance cache starts empty.
        let sw = Sweep::from_file(&scen, &spec, FrontAxes::PfOps).expect("sweep");
        assert_eq!(sw.profiles().len(), 1, "one prepared profile");
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        let t = Instant::now();
        let r = pool
            .install(|| sw.run_list(&runs, &|_, _| {}))
            .expect("runs");
        let el = t.elapsed().as_secs_f64();
        times.push(el);
        match &first_rows {
            None => first_rows = Some(r),
            Some(f) => assert_eq!(f, &r, "rows differ between 1 and 2 threads"),
        }
        println!(
            "sweep/{settings}-settings-{days}d-1s on {threads} thread(s): {el:.2} s = {:.3} s a run ({:.1} ns an interval a run); resonance states cached {}",
            el / settings as f64,
            el * 1e9 / settings as f64 / rows as f64,
            sw.cache().len()
        );
        if threads == 1 {
            // The same runs again with every bank state already solved: the engine's share.
            let t = Instant::now();
            pool.install(|| sw.run_list(&runs, &|_, _| {}))
                .expect("runs");
            let warm = t.elapsed().as_secs_f64();
            println!(
                "sweep/{settings}-settings-{days}d-1s on 1 thread, resonance cache warm: {warm:.2} s = {:.3} s a run ({:.1} ns an interval a run)",
                warm / settings as f64,
                warm * 1e9 / settings as f64 / rows as f64
            );
        }
    }
    let speedup = times[0] / times[1];
    println!("  parallel speed-up 1 → 2 threads: {speedup:.2}x (target ≥ 1.8x)");
    println!(
        "  projected 1,000 settings × {days} days at 1 s on 2 threads: {:.1} s (target ≤ 20 s)",
        times[1] / settings as f64 * 1000.0
    );
    let profile_mb = rows as f64 * 56.0 / 1e6;
    if let (Some(a), Some(b)) = (rss0, peak_rss_kb()) {
        println!(
            "  peak RSS {:.1} MB (before the sweeps {:.1} MB); one copy of the profile in memory is {profile_mb:.1} MB ({rows} rows × 56 bytes)",
            b as f64 / 1024.0,
            a as f64 / 1024.0
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// A fresh folder under the system's temporary folder.
fn tempfile_dir() -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("bankstep-sweep-bench-{}", std::process::id()));
    std::fs::create_dir_all(&d).expect("temp folder");
    d
}

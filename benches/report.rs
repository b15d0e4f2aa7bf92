//! Report benchmark: a one-year run at a 1 s step (31,536,000 intervals) on the engine
//! bench's 12-step site and generator, observed by the bounded trace; then the report
//! folder of `simulate --report` written to a temporary folder (six figures as SVG and
//! PNG, drawn one at a time, and `report.html`).
//!
//! Prints the run's time, the trace's heap bytes against the run's peak resident memory,
//! the time to write the report (target: at most 2 s) and the peak resident memory
//! before and after writing it (target: the report adds at most 10 % to the assessed
//! run's peak). Run with `cargo bench --bench report`; set `BANKSTEP_BENCH_DAYS` to
//! shorten it. `BANKSTEP_BENCH_PROBE=1` first draws each figure alone and prints the
//! memory after it (peak, anonymous and file-backed), and `BANKSTEP_BENCH_ONLY=N` with
//! it draws figure N alone and stops: where the report's memory goes.

use bankstep::report::html;
use bankstep::report::ReportContext;
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use bankstep::trace::{Trace, TraceSettings};
use std::path::Path;
use std::time::Instant;

mod common;
use common::peak_rss_kb;

const SITE: &str = include_str!("site_12_steps.toml");
const SYNTH: &str = include_str!("synthetic_section.toml");
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

/// Peak, anonymous and file-backed resident memory of this process, kB (Linux).
fn mem() -> String {
    let s = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    let get = |k: &str| {
        s.lines()
            .find(|l| l.starts_with(k))
            .and_then(|l| l.split_whitespace().nth(1))
            .unwrap_or("?")
            .to_string()
    };
    format!(
        "peak {} kB (now: heap and other anonymous {} kB, file-backed {} kB)",
        get("VmHWM:"),
        get("RssAnon:"),
        get("RssFile:")
    )
}

fn main() {
    let days: f64 = std::env::var("BANKSTEP_BENCH_DAYS")
        .ok()
        .and_then(|d| d.parse().ok())
        .unwrap_or(365.0);
    let text = format!("{SITE}{SCENARIO}")
        .replace("__DAYS__", &days.to_string())
        .replace("__SYNTH__", SYNTH);
    let sc = Scenario::from_str(&text, Path::new("bench.toml")).expect("bench scenario");
    let study = Study::prepare(sc).expect("bench study");
    let n = study.plan.intervals;

    let t = Instant::now();
    let mut trace = Trace::new(&study);
    let result = study.run(&mut trace).expect("run");
    trace.finish();
    let run_s = t.elapsed().as_secs_f64();
    let rss_run = peak_rss_kb();
    let assessment = bankstep::analysis::assess(&study, &result);
    let rss_assessed = peak_rss_kb();
    let ctx = ReportContext::new(&study, &result, &assessment);
    if std::env::var("BANKSTEP_BENCH_PROBE").is_ok() {
        println!("  before the report      {}", mem());
    }

    let dir = std::env::temp_dir().join(format!("bankstep-report-bench-{}", std::process::id()));
    if std::env::var("BANKSTEP_BENCH_PROBE").is_ok() {
        // Each figure alone, with the memory after it: where the report's peak comes from.
        std::fs::create_dir_all(&dir).expect("probe folder");
        let mut i = 0;
        let only: Option<usize> = std::env::var("BANKSTEP_BENCH_ONLY")
            .ok()
            .and_then(|v| v.parse().ok());
        while i < html::SIMULATE_FIGURES.len() {
            if only.is_some_and(|o| o != i) {
                i += 1;
                continue;
            }
            let plot = html::simulate_figure(&ctx, &trace, i)
                .expect("a figure of each index")
                .expect("figure");
            let mut sink = std::io::sink();
            plot.write_files(&dir, Some(&mut sink))
                .expect("figure files");
            println!("  after {:<24} {}", plot.name, mem());
            i += 1;
        }
    }
    if std::env::var("BANKSTEP_BENCH_ONLY").is_ok() {
        return;
    }
    let t = Instant::now();
    let files = html::write_report_dir(&ctx, &trace, &dir).expect("report folder");
    let report_s = t.elapsed().as_secs_f64();
    let rss_report = peak_rss_kb();
    let bytes_written: u64 = files
        .iter()
        .filter_map(|f| std::fs::metadata(f).ok())
        .map(|m| m.len())
        .sum();
    let html_bytes = std::fs::metadata(dir.join(html::HTML_FILE)).map_or(0, |m| m.len());
    let _ = std::fs::remove_dir_all(&dir);

    let bytes = trace.heap_bytes();
    let cap = Trace::capacity_bytes(TraceSettings::default(), study.scenario.steps.len());
    println!("report bench: {days} days at 1 s, {n} intervals, 12 steps");
    println!(
        "  run with the trace:   {run_s:.2} s ({:.1} ns per interval)",
        run_s * 1e9 / n as f64
    );
    println!(
        "  trace:                {} buckets of {} intervals, {} bytes on the heap (at most {} \
         for any run length)",
        trace.buckets().len(),
        trace.bucket_intervals(),
        bytes,
        cap
    );
    if let Some(rss) = rss_run {
        println!(
            "  peak RSS after run:   {rss} kB; the trace is {:.2} % of it",
            100.0 * bytes as f64 / (rss as f64 * 1024.0)
        );
    }
    println!(
        "  report folder:        {report_s:.3} s for 6 figures (SVG + PNG) and report.html \
         (target at most 2 s); {} files, {bytes_written} bytes, report.html {html_bytes} bytes",
        files.len()
    );
    if let (Some(a), Some(b)) = (rss_assessed, rss_report) {
        println!(
            "  peak RSS after report: {b} kB, {:+.1} % over the assessed run's {a} kB (target \
             at most +10 %)",
            100.0 * (b as f64 - a as f64) / a as f64
        );
    }
}

//! Ingest speed and memory of load-profile CSVs.
//!
//! 1. Memory: profiles of 1, 2, 4 and 8 million rows and a whole year at 1 s (31.5 million
//!    rows, about 1.6 GB of text) are generated on the fly by a reader that never touches
//!    the disk, scanned and streamed on the 1-s grid; the peak resident set size of each
//!    length (reset between lengths) shows that memory stays flat as the length doubles.
//! 2. Speed: a one-week, 1-s profile (604 800 rows, elapsed seconds, invented but
//!    plausible per-phase P and Q) is written to a temporary file; the first pass (`scan`)
//!    and a full second pass (`stream` sampled on the 1-s grid) are timed several times
//!    each, with rows/s, ns/row and the peak resident set size. For comparison it also
//!    times `load` into memory and a pass of the memory cursor, and a scan of a shorter
//!    ISO 8601 profile.
//!
//!    The scan is timed four ways: as `scan` does it (fast path, rows kept in memory,
//!    parsing on every thread of rayon's pool), on one thread, on the pool without
//!    keeping the rows, and through the record reader alone (the reading before the fast
//!    path, as a reference).
//! 3. The whole `simulate` command: the one-week profile with a scenario of six 50 kvar
//!    steps on an infinite bus, run as a process of the release binary several times
//!    (wall time), and in process split into preparing the study (reading the CSV) and
//!    running the engine.
//!
//! Run with `cargo bench --bench csv_ingest` (about a minute and a half; set
//! `CSV_INGEST_SKIP_LONG=1` to time parts 2 and 3 only).

use bankstep::profile::csv::{
    scan, scan_source_with, CsvOptions, CsvSource, ScanSettings, BYTES_PER_ROW,
};
use bankstep::profile::{LoadSample, LoadSource};
use std::io::{BufWriter, Read, Write};
use std::path::Path;
use std::time::Instant;

const ROWS: u64 = 7 * 24 * 3600;
const REPS: usize = 5;

/// A small xorshift generator, so the bench needs no extra crates and is reproducible.
struct XorShift(u64);

impl XorShift {
    fn next_f64(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Writes `rows` rows at 1-s spacing. Each phase: a base load with a daily shape, a
/// compressor that cycles every 15 minutes, and noise; Q follows P at about 0.85 lag.
fn write_profile(path: &Path, rows: u64, iso: bool) -> std::io::Result<()> {
    let mut w = BufWriter::with_capacity(1 << 16, std::fs::File::create(path)?);
    writeln!(w, "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar")?;
    let mut rng = XorShift(0x9E37_79B9_7F4A_7C15);
    // 2026-03-02T00:00:00Z, a Monday.
    let epoch0: i64 = 1_772_409_600;
    for t in 0..rows {
        let hour = (t % 86_400) as f64 / 3600.0;
        let shift = if (6.0..22.0).contains(&hour) {
            1.0
        } else {
            0.35
        };
        let compressor = if (t / 450) % 2 == 0 { 18.0 } else { 0.0 };
        if iso {
            let d = chrono::DateTime::from_timestamp(epoch0 + t as i64, 0).unwrap_or_default();
            write!(w, "{}", d.format("%Y-%m-%dT%H:%M:%SZ"))?;
        } else {
            write!(w, "{t}")?;
        }
        for phase in 0..3 {
            let p = 60.0 * shift + compressor + 4.0 * rng.next_f64() + phase as f64 * 3.0;
            let q = p * (0.58 + 0.1 * rng.next_f64());
            write!(w, ",{p:.3},{q:.3}")?;
        }
        writeln!(w)?;
    }
    w.flush()
}

/// A profile generated on the fly: `rows` rows at 1-s spacing, elapsed seconds, with the
/// values cycling through a table of pre-written rows (so that the generator costs little
/// next to the reader).
struct GenReader {
    rows: u64,
    next_row: u64,
    buf: Vec<u8>,
    pos: usize,
    tails: Vec<Vec<u8>>,
}

impl GenReader {
    fn new(rows: u64) -> Self {
        let mut rng = XorShift(0x2545_F491_4F6C_DD1D);
        let tails = (0..4096)
            .map(|i| {
                let shift = if (i / 512) % 2 == 0 { 1.0 } else { 0.35 };
                let mut t = Vec::new();
                for phase in 0..3 {
                    let p = 60.0 * shift + 4.0 * rng.next_f64() + phase as f64 * 3.0;
                    let q = p * (0.58 + 0.1 * rng.next_f64());
                    let _ = write!(t, ",{p:.3},{q:.3}");
                }
                t.push(b'\n');
                t
            })
            .collect();
        let mut buf = Vec::with_capacity(1 << 16);
        buf.extend_from_slice(b"time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n");
        GenReader {
            rows,
            next_row: 0,
            buf,
            pos: 0,
            tails,
        }
    }

    fn refill(&mut self) {
        self.buf.clear();
        self.pos = 0;
        let mut digits = [0u8; 20];
        while self.buf.len() < (1 << 16) - 128 && self.next_row < self.rows {
            let mut t = self.next_row;
            let mut i = digits.len();
            loop {
                i -= 1;
                digits[i] = b'0' + (t % 10) as u8;
                t /= 10;
                if t == 0 {
                    break;
                }
            }
            self.buf.extend_from_slice(&digits[i..]);
            let k = (self.next_row.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 52) as usize;
            self.buf
                .extend_from_slice(&self.tails[k % self.tails.len()]);
            self.next_row += 1;
        }
    }
}

/// Bytes handed out by the last generated reader to finish a pass.
static GENERATED_BYTES: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

impl Read for GenReader {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        if self.pos == self.buf.len() {
            self.refill();
        }
        let n = out.len().min(self.buf.len() - self.pos);
        out[..n].copy_from_slice(&self.buf[self.pos..self.pos + n]);
        self.pos += n;
        GENERATED_BYTES.fetch_add(n as u64, std::sync::atomic::Ordering::Relaxed);
        Ok(n)
    }
}

/// Resets the peak resident set size to the current size (Linux; ignored elsewhere).
fn reset_peak_rss() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

fn current_rss_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmRSS:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// Scans and streams generated profiles of growing length, printing time and peak RSS.
fn memory_flat_as_length_doubles() -> Result<(), Box<dyn std::error::Error>> {
    println!("long profiles generated in memory (no disk): scan, then stream on the 1-s grid");
    let opts = CsvOptions::default();
    for rows in [1_000_000u64, 2_000_000, 4_000_000, 8_000_000, 365 * 86_400] {
        reset_peak_rss();
        GENERATED_BYTES.store(0, std::sync::atomic::Ordering::Relaxed);
        let before = current_rss_kib().unwrap_or(0);
        let src = CsvSource::reader(format!("generated-{rows}.csv"), move || {
            Ok(Box::new(GenReader::new(rows)) as Box<dyn Read + Send>)
        });
        let t0 = Instant::now();
        // Rows are not kept, so that the run streams, as every profile beyond the
        // memory budget does.
        let streaming = ScanSettings {
            keep_bytes: 0,
            ..ScanSettings::default()
        };
        let sc = scan_source_with(&src, &opts, &streaming)?;
        let t_scan = t0.elapsed().as_secs_f64();
        assert_eq!(sc.rows_used, rows);
        let bytes = GENERATED_BYTES.load(std::sync::atomic::Ordering::Relaxed);
        let t1 = Instant::now();
        let mut st = sc.stream()?;
        let mut s = LoadSample::default();
        let mut sum = 0.0;
        for k in 0..rows {
            st.sample(k, k as f64, &mut s)?;
            sum += s.q_total();
        }
        std::hint::black_box(sum);
        let t_stream = t1.elapsed().as_secs_f64();
        println!(
            "  {:>9} rows ({:>6.0} MB of text): scan {:>5.2} s ({:>4.2} M rows/s), stream {:>5.2} s \
             ({:>4.2} M rows/s); RSS before {} KiB, peak {} KiB",
            rows,
            bytes as f64 / 1e6,
            t_scan,
            rows as f64 / t_scan / 1e6,
            t_stream,
            rows as f64 / t_stream / 1e6,
            before,
            peak_rss_kib().unwrap_or(0)
        );
    }
    println!("  (times include generating the text)");
    Ok(())
}

fn peak_rss_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn report(name: &str, rows: u64, secs: &mut [f64]) {
    secs.sort_by(f64::total_cmp);
    let best = secs[0];
    let median = secs[secs.len() / 2];
    println!(
        "{name:<28} best {:>6.1} ms  {:>5.2} M rows/s  {:>6.1} ns/row   median {:>6.1} ms  {:>5.2} M rows/s  {:>6.1} ns/row",
        best * 1e3,
        rows as f64 / best / 1e6,
        best * 1e9 / rows as f64,
        median * 1e3,
        rows as f64 / median / 1e6,
        median * 1e9 / rows as f64,
    );
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    if std::env::var_os("CSV_INGEST_SKIP_LONG").is_none() {
        memory_flat_as_length_doubles()?;
        reset_peak_rss();
    }

    let dir = tempfile::tempdir()?;
    let path = dir.path().join("week_1s.csv");
    write_profile(&path, ROWS, false)?;
    let bytes = std::fs::metadata(&path)?.len();
    println!(
        "profile: {ROWS} rows, {:.1} MB, elapsed seconds; {REPS} repetitions each",
        bytes as f64 / 1e6
    );
    println!(
        "peak RSS after writing: {} KiB",
        peak_rss_kib().unwrap_or(0)
    );

    let opts = CsvOptions::default();
    let mut times = Vec::new();
    let mut sc = scan(&path, &opts)?;
    for _ in 0..REPS {
        let t0 = Instant::now();
        sc = std::hint::black_box(scan(&path, &opts)?);
        times.push(t0.elapsed().as_secs_f64());
    }
    assert_eq!(sc.rows_used, ROWS);
    assert_eq!(sc.end_s, ROWS as f64);
    report(
        &format!("scan ({} threads)", rayon::current_num_threads()),
        ROWS,
        &mut times,
    );
    println!(
        "  rows kept in memory: {} ({} bytes per row, {:.1} MB)",
        sc.memory().map_or(0, |m| m.len()),
        BYTES_PER_ROW,
        sc.memory().map_or(0, |m| m.len()) as f64 * BYTES_PER_ROW as f64 / 1e6
    );
    let file = CsvSource::File(path.clone());
    let variants = [
        (
            "scan, 1 thread",
            ScanSettings {
                threads: Some(1),
                ..ScanSettings::default()
            },
        ),
        (
            "scan, not keeping rows",
            ScanSettings {
                keep_bytes: 0,
                ..ScanSettings::default()
            },
        ),
        (
            "scan, 1 thread, not keeping",
            ScanSettings {
                keep_bytes: 0,
                threads: Some(1),
                ..ScanSettings::default()
            },
        ),
        (
            "scan, record reader only",
            ScanSettings {
                keep_bytes: 0,
                threads: Some(1),
                fast: false,
            },
        ),
    ];
    for (name, settings) in variants {
        let mut times = Vec::new();
        for _ in 0..REPS {
            let t0 = Instant::now();
            let s = std::hint::black_box(scan_source_with(&file, &opts, &settings)?);
            times.push(t0.elapsed().as_secs_f64());
            assert_eq!(s.sha256, sc.sha256);
        }
        report(name, ROWS, &mut times);
    }

    let mut times = Vec::new();
    let mut checksum = 0.0;
    for _ in 0..REPS {
        let t0 = Instant::now();
        let mut st = sc.stream()?;
        let mut s = LoadSample::default();
        let mut sum = 0.0;
        for k in 0..ROWS {
            st.sample(k, sc.t_first_s + k as f64, &mut s)?;
            sum += s.q_total();
        }
        checksum = std::hint::black_box(sum);
        times.push(t0.elapsed().as_secs_f64());
    }
    report("stream (dt = 1 s)", ROWS, &mut times);
    println!(
        "peak RSS after scan + stream: {} KiB",
        peak_rss_kib().unwrap_or(0)
    );

    let mut times = Vec::new();
    let mut mem = sc.load()?;
    for _ in 0..REPS {
        let t0 = Instant::now();
        mem = std::hint::black_box(sc.load()?);
        times.push(t0.elapsed().as_secs_f64());
    }
    report("load into memory", ROWS, &mut times);
    let mut times = Vec::new();
    for _ in 0..REPS {
        let t0 = Instant::now();
        let mut cur = mem.cursor();
        let mut s = LoadSample::default();
        let mut sum = 0.0;
        for k in 0..ROWS {
            cur.sample(k, sc.t_first_s + k as f64, &mut s)?;
            sum += s.q_total();
        }
        assert_eq!(sum, checksum);
        times.push(t0.elapsed().as_secs_f64());
    }
    report("memory cursor (dt = 1 s)", ROWS, &mut times);
    println!("peak RSS after load: {} KiB", peak_rss_kib().unwrap_or(0));

    let iso_rows = 86_400;
    let iso_path = dir.path().join("day_1s_iso.csv");
    write_profile(&iso_path, iso_rows, true)?;
    let mut times = Vec::new();
    for _ in 0..REPS {
        let t0 = Instant::now();
        std::hint::black_box(scan(&iso_path, &opts)?);
        times.push(t0.elapsed().as_secs_f64());
    }
    report("scan, ISO 8601 times", iso_rows, &mut times);

    simulate_week(dir.path(), &path)?;
    Ok(())
}

/// Six 50 kvar steps on an infinite bus (no grid impedance, no transformer), over the
/// one-week profile at Δt = 1 s.
const WEEK_SCENARIO: &str = r#"
[study]
name = "One week at 1 s"

[supply]
nominal_voltage_v = 400
frequency_hz = 50

[[steps]]
kvar = 50
count = 6

[controller]
target_pf = "0.95 lag"
switching_delay_s = 30
discharge_time_s = 60

[load]
csv = "week_1s.csv"

[run]
time_step_s = 1
start = "2026-03-02T00:00:00"
"#;

/// Times `bankstep simulate` on the one-week profile: the release binary as a process,
/// and in process the preparation (reading the CSV) and the engine run apart.
fn simulate_week(dir: &Path, csv: &Path) -> Result<(), Box<dyn std::error::Error>> {
    let scenario = dir.join("week.toml");
    std::fs::write(&scenario, WEEK_SCENARIO)?;
    assert!(csv.starts_with(dir));
    let exe = env!("CARGO_BIN_EXE_bankstep");
    let json = dir.join("week.json");
    let mut times = Vec::new();
    for _ in 0..REPS {
        let t0 = Instant::now();
        let out = std::process::Command::new(exe)
            .arg("simulate")
            .arg(&scenario)
            .arg("--quiet")
            .arg("--json")
            .arg(&json)
            .output()?;
        times.push(t0.elapsed().as_secs_f64());
        if !out.status.success() {
            return Err(
                format!("simulate failed: {}", String::from_utf8_lossy(&out.stderr)).into(),
            );
        }
    }
    report("simulate, whole process", ROWS, &mut times);

    let sc = bankstep::scenario::Scenario::from_file(&scenario)?;
    let (mut prep, mut run) = (Vec::new(), Vec::new());
    for _ in 0..REPS {
        let t0 = Instant::now();
        let study = bankstep::study::Study::prepare(sc.clone())?;
        prep.push(t0.elapsed().as_secs_f64());
        let t1 = Instant::now();
        let r = study.run(&mut bankstep::engine::Quiet)?;
        run.push(t1.elapsed().as_secs_f64());
        std::hint::black_box(r);
    }
    report("  of which: prepare (CSV)", ROWS, &mut prep);
    report("  of which: engine run", ROWS, &mut run);
    Ok(())
}

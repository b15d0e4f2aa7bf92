//! The ways of reading a CSV profile agree: the fast path (blocks of plain lines, on one
//! thread or in parallel pieces) against the record reader alone (the reference), the
//! rows the scan keeps in memory against a stream of the file, and the number of
//! intervals a source promises unchanged against sampling every interval.

use bankstep::error::ProfileError;
use bankstep::profile::csv::{scan_source_with, CsvOptions, CsvScan, CsvSource, ScanSettings};
use bankstep::profile::{DefectPolicy, LoadSample, LoadSource};
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

/// The record reader alone, keeping nothing: how every file was read before the fast path.
fn reference() -> ScanSettings {
    ScanSettings {
        keep_bytes: 0,
        threads: Some(1),
        fast: false,
    }
}

fn fast(threads: usize) -> ScanSettings {
    ScanSettings {
        threads: Some(threads),
        ..ScanSettings::default()
    }
}

/// A profile of `rows` rows at 1 s with defects sprinkled in at random lines: bad
/// numbers, short and long rows, duplicates, backwards times, blank rows, CRLF ends,
/// spaces around numbers, exponents and signs, a gap, and (when `quote`) a quoted field.
fn profile_with_defects(seed: u64, rows: u64, quote: bool) -> Vec<u8> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let mut s = String::from(HEADER);
    let mut t = 0u64;
    for i in 0..rows {
        let p = 50.0 + 20.0 * rng.random::<f64>();
        let q = 0.6 * p;
        let line = format!(
            "{t},{p:.3},{q:.3},{p:.2},{q:.2},{:.1},{:.1}",
            p + 1.0,
            q + 1.0
        );
        match rng.random_range(0..400) {
            0 => s.push_str(&format!("{t},{p:.3},x{q},1,2,3,4\n")),
            1 => s.push_str(&format!("{t},{p:.3}\n")),
            2 => s.push_str(&format!("{line},7\n")),
            3 => {
                s.push_str(&line);
                s.push('\n');
                s.push_str(&line);
                s.push('\n');
            }
            4 => s.push_str(&format!("{},1,1,1,1,1,1\n", t.saturating_sub(5))),
            5 => s.push_str(",,,,,,\n\n"),
            6 => s.push_str(&format!("{line}\r\n")),
            7 => s.push_str(&format!(" {t} , {p:.3} ,{q:.3e},+{p},-{q},1E2,-0\n")),
            8 => t += 30,
            9 => s.push_str(&format!("{t},NaN,1,1,1,1,1\n")),
            10 if quote && i > rows / 2 => s.push_str(&format!("{t},\"{p:.3}\",1,1,1,1,1\n")),
            _ => {
                s.push_str(&line);
                s.push('\n');
            }
        }
        t += 1;
    }
    s.into_bytes()
}

fn skip_everything() -> CsvOptions {
    CsvOptions {
        on_defect: Some(DefectPolicy::Skip),
        ..CsvOptions::default()
    }
}

/// Everything a scan reports, as text, so that two scans can be compared whole.
fn report(sc: &CsvScan) -> String {
    format!(
        "rows {} {} {} {} {} {}; lines {} {}; times {} {} {} {} {} {}; sha {}\n{:?}\n{:?}\n{}",
        sc.rows_read,
        sc.rows_used,
        sc.rows_held,
        sc.rows_interpolated,
        sc.rows_skipped,
        sc.blank_rows,
        sc.first_line,
        sc.last_line,
        sc.t_first_s,
        sc.t_last_s,
        sc.median_spacing_s,
        sc.min_spacing_s,
        sc.max_spacing_s,
        sc.gap_time_s,
        sc.sha256,
        sc.defects,
        sc.defect_counts,
        sc.summary.lines().join("\n"),
    )
}

fn scan_with(data: &[u8], opts: &CsvOptions, s: &ScanSettings) -> Result<CsvScan, ProfileError> {
    scan_source_with(&CsvSource::bytes("paths.csv", data.to_vec()), opts, s)
}

#[test]
fn fast_and_parallel_paths_report_the_same_defects_on_the_same_lines() {
    // Large enough for several 1 MiB blocks, each cut into several pieces.
    for (seed, quote) in [(1, false), (2, false), (3, true)] {
        let data = profile_with_defects(seed, 60_000, quote);
        assert!(data.len() > 2 << 20);
        for opts in [
            skip_everything(),
            CsvOptions {
                on_defect: Some(DefectPolicy::Hold),
                ..CsvOptions::default()
            },
            CsvOptions {
                on_defect: Some(DefectPolicy::Interpolate),
                ..CsvOptions::default()
            },
        ] {
            let want = scan_with(&data, &opts, &reference()).unwrap();
            assert!(want.defect_counts.total() > 300, "{:?}", want.defect_counts);
            for threads in [1, 2, 5] {
                let got = scan_with(&data, &opts, &fast(threads)).unwrap();
                assert_eq!(
                    report(&got),
                    report(&want),
                    "seed {seed}, {threads} threads"
                );
                // The rows kept in one pass are the rows a second reading loads.
                let kept = got.memory().expect("a small profile is kept");
                assert_eq!(**kept, want.load().unwrap(), "seed {seed}");
            }
        }
    }
}

#[test]
fn a_stop_names_the_same_line_and_message_on_every_path() {
    let data = profile_with_defects(4, 40_000, false);
    let want = scan_with(&data, &CsvOptions::default(), &reference()).unwrap_err();
    for threads in [1, 3] {
        let got = scan_with(&data, &CsvOptions::default(), &fast(threads)).unwrap_err();
        match (&got, &want) {
            (
                ProfileError::Row { line, message, .. },
                ProfileError::Row {
                    line: l2,
                    message: m2,
                    ..
                },
            ) => assert_eq!((line, message), (l2, m2)),
            _ => panic!("{got:?} / {want:?}"),
        }
    }
}

#[test]
fn decimal_commas_read_alike_on_every_path() {
    let text = profile_with_defects(5, 20_000, false);
    let text = String::from_utf8(text)
        .unwrap()
        .replace(',', ";")
        .replace('.', ",");
    let opts = CsvOptions {
        delimiter: ';',
        decimal: ',',
        ..skip_everything()
    };
    let want = scan_with(text.as_bytes(), &opts, &reference()).unwrap();
    let got = scan_with(text.as_bytes(), &opts, &fast(2)).unwrap();
    assert_eq!(report(&got), report(&want));
    assert_eq!(**got.memory().unwrap(), want.load().unwrap());
}

#[test]
fn values_read_are_the_standard_librarys() {
    // Reference: the Rust standard library's `str::parse::<f64>` on the same text.
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(6);
    let mut text = String::from(HEADER);
    let mut want = Vec::new();
    for t in 0..30_000 {
        let mut row = [0.0f64; 6];
        text.push_str(&t.to_string());
        for v in &mut row {
            // Up to 19 significant digits, within the ±1e9 kW a value may take.
            let digits = rng.random_range(0..=10u32);
            let width = rng.random_range(1..=digits + 9);
            let m: u64 = rng.random_range(0..10u64.pow(width));
            let sign = ["", "-", "+"][rng.random_range(0..3)];
            let s = match rng.random_range(0..3) {
                0 => format!("{sign}{}", m % 1_000_000_000),
                1 => format!("{sign}{}e{}", m % 100_000, rng.random_range(-8..4)),
                _ => {
                    let w = format!("{m:0>width$}", width = digits as usize + 1);
                    let (a, b) = w.split_at(w.len() - digits as usize);
                    format!("{sign}{a}.{b}")
                }
            };
            *v = s.parse::<f64>().unwrap();
            text.push(',');
            text.push_str(&s);
        }
        text.push('\n');
        want.push(row);
    }
    for threads in [1, 2] {
        let sc = scan_with(text.as_bytes(), &CsvOptions::default(), &fast(threads)).unwrap();
        let m = sc.memory().unwrap();
        assert_eq!(m.len(), want.len());
        for (s, w) in m.samples.iter().zip(&want) {
            let got = [
                s.p_kw[0],
                s.q_kvar[0],
                s.p_kw[1],
                s.q_kvar[1],
                s.p_kw[2],
                s.q_kvar[2],
            ];
            for (g, w) in got.iter().zip(w) {
                assert_eq!(g.to_bits(), w.to_bits(), "{g} vs {w}, {threads} threads");
            }
        }
    }
}

#[test]
fn a_number_that_ends_the_file_is_read_alike_on_every_path() {
    // The last number ends exactly at the end of the source, with and without a final
    // line end, and the last lines take every length from 20 to about 110 bytes, so that
    // the reads of 8, 64 and 128 bytes from the start of a line near the end of the text
    // meet its end at every offset. Reference: the record reader alone.
    for pad in 0..90 {
        for final_lf in [false, true] {
            let mut text = String::from(HEADER);
            for t in 0..40 {
                text.push_str(&format!("{t},1.5,-2.25,3,4.125,5,6.5\n"));
            }
            for t in 40..43 {
                text.push_str(&t.to_string());
                for f in 0..6 {
                    // Spread `pad` extra decimals over the six values (at most 14 each).
                    let decimals = (pad + f) / 6 + usize::from(t == 41);
                    text.push_str(&format!(
                        ",{f}.{}",
                        "37".repeat(decimals).get(..decimals).unwrap_or("")
                    ));
                }
                if t < 42 || final_lf {
                    text.push('\n');
                }
            }
            let want = scan_with(text.as_bytes(), &CsvOptions::default(), &reference()).unwrap();
            for threads in [1, 2] {
                let got =
                    scan_with(text.as_bytes(), &CsvOptions::default(), &fast(threads)).unwrap();
                assert_eq!(
                    report(&got),
                    report(&want),
                    "pad {pad}, final line end {final_lf}"
                );
                assert_eq!(**got.memory().unwrap(), want.load().unwrap(), "pad {pad}");
            }
        }
    }
}

#[test]
fn kept_rows_sample_as_the_stream_does_and_promise_only_what_holds() {
    // Rows every 10 s with a gap of 60 s; hold and interpolate across the gap.
    let mut text = String::from(HEADER);
    for i in 0..200u64 {
        let t = if i < 100 { i * 10 } else { i * 10 + 50 };
        text.push_str(&format!("{t},{i},1,2,3,4,5\n"));
    }
    for gap in [DefectPolicy::Hold, DefectPolicy::Interpolate] {
        let mut opts = CsvOptions::default();
        opts.defects.gap = Some(gap);
        let sc = scan_with(text.as_bytes(), &opts, &ScanSettings::default()).unwrap();
        let mem = sc.memory().unwrap().clone();
        let (t0, dt) = (sc.t_first_s, 0.5);
        let n = ((sc.end_s - t0) / dt) as u64;
        let mut stream = sc.stream().unwrap().on_grid(t0, dt);
        let mut cursor = mem.shared_cursor().on_grid(t0, dt);
        let (mut a, mut b) = (LoadSample::default(), LoadSample::default());
        let mut all = Vec::new();
        for k in 0..n {
            let t = t0 + k as f64 * dt;
            stream.sample(k, t, &mut a).unwrap();
            cursor.sample(k, t, &mut b).unwrap();
            assert_eq!(a, b, "t = {t}");
            assert_eq!(stream.unchanged_until(k), cursor.unchanged_until(k));
            all.push((a, cursor.unchanged_until(k)));
        }
        // Every promise holds, and rows 10 s apart on a 0.5-s grid promise 20 intervals.
        for (k, (s, until)) in all.iter().enumerate() {
            let until = (*until).min(n) as usize;
            assert!(until > k);
            assert!(all[k + 1..until].iter().all(|(x, _)| x == s), "k = {k}");
        }
        assert_eq!(all[0].1, 20);
        let in_gap = all[2000].1; // t = 1000 s, inside the 60-s gap after the row at 990 s
        match gap {
            DefectPolicy::Hold => assert_eq!(in_gap, 2100),
            _ => assert_eq!(in_gap, 2001),
        }
    }
}

#[test]
fn a_profile_over_the_budget_is_not_kept_and_streams() {
    let data = profile_with_defects(7, 5_000, false);
    let tight = ScanSettings {
        keep_bytes: 1000 * bankstep::profile::csv::BYTES_PER_ROW,
        ..ScanSettings::default()
    };
    let sc = scan_with(&data, &skip_everything(), &tight).unwrap();
    assert!(sc.memory().is_none());
    let roomy = scan_with(&data, &skip_everything(), &ScanSettings::default()).unwrap();
    assert_eq!(report(&sc), report(&roomy));
    assert_eq!(sc.load().unwrap(), **roomy.memory().unwrap());
}

//! Integration tests of the load-profile CSV reader against the project's profile rules:
//! sample-and-hold, coverage, header mapping, time kinds and every defect kind with its
//! line number, under both defect policies.

use bankstep::error::ProfileError;
use bankstep::profile::csv::{
    scan, CsvOptions, CsvScan, DefectCounts, DefectKind, MemoryProfile, MAX_DEFECTS_KEPT,
};
use bankstep::profile::{DefectPolicy, LoadSample, LoadSource};
use bankstep::timebase::{parse_iso8601, TimeKind};
use std::io::Write;
use std::path::PathBuf;

const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/profiles")
        .join(name)
}

fn write(text: &str) -> tempfile::NamedTempFile {
    let mut f = tempfile::NamedTempFile::new().expect("temp file");
    f.write_all(text.as_bytes()).expect("write");
    f.flush().expect("flush");
    f
}

/// `on_defect = "stop"`: every kind of row defect stops the scan.
fn stop() -> CsvOptions {
    CsvOptions::all(DefectPolicy::Stop)
}

/// `on_defect = "skip"`: every kind of row defect is left out.
fn skip() -> CsvOptions {
    CsvOptions::all(DefectPolicy::Skip)
}

/// A row at time `t` whose p_a_kw is `id` (to tell rows apart) and other values fixed.
fn row(t: &str, id: f64) -> String {
    format!("{t},{id},0.5,1.1,0.6,1.2,0.7\n")
}

/// A file with the standard header and rows at the given times, ids 1, 2, 3, ...
fn rows_at(times: &[&str]) -> String {
    let mut s = HEADER.to_string();
    for (i, t) in times.iter().enumerate() {
        s.push_str(&row(t, (i + 1) as f64));
    }
    s
}

fn id_at(src: &mut dyn LoadSource, k: u64, t: f64) -> f64 {
    let mut s = LoadSample::default();
    match src.sample(k, t, &mut s) {
        Ok(()) => s.p_kw[0],
        Err(e) => panic!("t = {t}: {e}"),
    }
}

/// The p_a_kw ids seen on the grid t_first + k·dt, for k in 0..n, by the stream and by
/// the memory cursor; asserts they agree and returns them.
fn ids_on_grid(sc: &CsvScan, dt: f64, n: u64) -> Vec<f64> {
    let mut st = sc.stream().expect("stream");
    let mem = sc.load().expect("load");
    let mut cur = mem.cursor();
    let mut out = Vec::new();
    for k in 0..n {
        let t = sc.t_first_s + k as f64 * dt;
        let a = id_at(&mut st, k, t);
        let b = id_at(&mut cur, k, t);
        assert_eq!(a, b, "stream and memory differ at t = {t}");
        out.push(a);
    }
    out
}

fn row_error(r: Result<CsvScan, ProfileError>) -> (u64, String) {
    match r {
        Err(ProfileError::Row { line, message, .. }) => (line, message),
        other => panic!("expected a row error, got {other:?}"),
    }
}

fn file_error(r: Result<CsvScan, ProfileError>) -> String {
    match r {
        Err(ProfileError::File { message, .. }) => message,
        other => panic!("expected a file error, got {other:?}"),
    }
}

// ---------------------------------------------------------------------------------------
// Sample-and-hold and coverage: interval k takes the last sample with time ≤ t_k, and
// the last sample holds for the profile's median spacing.

#[test]
fn finer_grid_holds_each_row() {
    let f = write(&rows_at(&["0", "10", "20"]));
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!(sc.time_kind, TimeKind::Elapsed);
    assert_eq!((sc.t_first_s, sc.t_last_s), (0.0, 20.0));
    assert_eq!(sc.median_spacing_s, 10.0);
    // N evenly spaced rows cover N spacings.
    assert_eq!(sc.end_s, 30.0);
    let ids = ids_on_grid(&sc, 1.0, 30);
    let want: Vec<f64> = (0..30).map(|k| 1.0 + (k / 10) as f64).collect();
    assert_eq!(ids, want);
    // Half-second grid: t = 9.5 is still row 1, t = 10 is row 2.
    let ids = ids_on_grid(&sc, 0.5, 60);
    assert_eq!(ids[19], 1.0);
    assert_eq!(ids[20], 2.0);
    assert_eq!(ids[59], 3.0);
}

#[test]
fn coarser_grid_takes_last_row_at_or_before() {
    let f = write(&rows_at(&["0", "10", "20"]));
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!(ids_on_grid(&sc, 15.0, 2), vec![1.0, 2.0]);
    // Coarse grid over 1-s rows: a 60-s step takes the row at the step's start.
    let times: Vec<String> = (0..600).map(|t| t.to_string()).collect();
    let refs: Vec<&str> = times.iter().map(String::as_str).collect();
    let f = write(&rows_at(&refs));
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!(sc.end_s, 600.0);
    let ids = ids_on_grid(&sc, 60.0, 10);
    let want: Vec<f64> = (0..10).map(|k| (k * 60 + 1) as f64).collect();
    assert_eq!(ids, want);
}

#[test]
fn coverage_errors_name_the_limits() {
    let f = write(&rows_at(&["0", "10", "20"]));
    let sc = scan(f.path(), &stop()).unwrap();
    let mut s = LoadSample::default();

    let mut st = sc.stream().unwrap();
    st.sample(0, 29.0, &mut s).unwrap();
    match st.sample(1, 30.0, &mut s) {
        Err(ProfileError::Coverage { message, .. }) => {
            assert!(
                message.contains("t = 30 s") || message.contains("at 30 s"),
                "{message}"
            );
            assert!(message.contains("ends at 30 s"), "{message}");
            assert!(message.contains("last row at 20 s, line 4"), "{message}");
            assert!(message.contains("median spacing of 10 s"), "{message}");
        }
        other => panic!("{other:?}"),
    }
    let mut st = sc.stream().unwrap();
    match st.sample(0, -1.0, &mut s) {
        Err(ProfileError::Coverage { message, .. }) => {
            assert!(
                message.contains("before the profile's first row"),
                "{message}"
            );
            assert!(message.contains("line 2"), "{message}");
        }
        other => panic!("{other:?}"),
    }
    let mem = sc.load().unwrap();
    let mut cur = mem.cursor();
    assert!(matches!(
        cur.sample(0, 30.0, &mut s),
        Err(ProfileError::Coverage { .. })
    ));
    assert!(matches!(
        cur.sample(0, -0.5, &mut s),
        Err(ProfileError::Coverage { .. })
    ));
    assert!(matches!(
        cur.sample(0, f64::NAN, &mut s),
        Err(ProfileError::Coverage { .. })
    ));
}

#[test]
fn stream_cannot_go_back_but_memory_can() {
    let f = write(&rows_at(&["0", "10", "20"]));
    let sc = scan(f.path(), &stop()).unwrap();
    let mut s = LoadSample::default();
    let mut st = sc.stream().unwrap();
    st.sample(0, 25.0, &mut s).unwrap();
    assert!(matches!(
        st.sample(1, 5.0, &mut s),
        Err(ProfileError::Coverage { .. })
    ));
    let mem = sc.load().unwrap();
    let mut cur = mem.cursor();
    assert_eq!(id_at(&mut cur, 0, 25.0), 3.0);
    assert_eq!(id_at(&mut cur, 1, 5.0), 1.0);
    assert_eq!(id_at(&mut cur, 2, 12.0), 2.0);
}

#[test]
fn irregular_spacing_uses_the_median() {
    // Spacings 1, 2, 1, 6: sorted 1 1 2 6, median (1 + 2) / 2 = 1.5 s.
    let f = write(&rows_at(&["0", "1", "3", "4", "10"]));
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!(sc.median_spacing_s, 1.5);
    assert_eq!(sc.min_spacing_s, 1.0);
    assert_eq!(sc.max_spacing_s, 6.0);
    assert_eq!(sc.end_s, 11.5);
    let ids = ids_on_grid(&sc, 0.5, 23);
    // t = 0, 0.5 → row 1; 1 … 2.5 → row 2; 3, 3.5 → row 3; 4 … 9.5 → row 4; 10, 10.5, 11 → row 5.
    let want: Vec<f64> = (0..23)
        .map(|k| {
            let t = k as f64 * 0.5;
            if t < 1.0 {
                1.0
            } else if t < 3.0 {
                2.0
            } else if t < 4.0 {
                3.0
            } else if t < 10.0 {
                4.0
            } else {
                5.0
            }
        })
        .collect();
    assert_eq!(ids, want);
    // 6 s > 3 × 1.5 s: the jump to t = 10 (line 6) is a gap, held by the row at line 5.
    assert_eq!(sc.defect_counts.gap, 1);
    assert_eq!(sc.defects.len(), 1);
    let g = &sc.defects[0];
    assert_eq!((g.line, g.kind), (6, DefectKind::Gap));
    assert_eq!(sc.gap_time_s, 4.5);
    assert_eq!(sc.rows_skipped, 0);
}

#[test]
fn fractional_grid_meets_rows_despite_rounding() {
    // 0.1·k is not exact in binary floating point; rows written as 0.3, 0.7 etc. must
    // still be taken at their own k.
    let times: Vec<String> = (0..50).map(|i| format!("{}", i as f64 / 10.0)).collect();
    let refs: Vec<&str> = times.iter().map(String::as_str).collect();
    let f = write(&rows_at(&refs));
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!(sc.median_spacing_s, 0.1);
    let ids = ids_on_grid(&sc, 0.1, 50);
    let want: Vec<f64> = (1..=50).map(f64::from).collect();
    assert_eq!(ids, want);
}

// ---------------------------------------------------------------------------------------
// Header mapping.

#[test]
fn extra_and_reordered_columns() {
    let text = "note, Q_C_KVAR ,time,p_c_kw,q_b_kvar,P_B_kW,extra,q_a_kvar,p_a_kw\n\
                a,6,0,5,4,3,x,2,1\n\
                b,60,1,50,40,30,y,20,10\n";
    let f = write(text);
    let sc = scan(f.path(), &stop()).unwrap();
    let mem = sc.load().unwrap();
    assert_eq!(mem.times, vec![0.0, 1.0]);
    assert_eq!(
        mem.samples[0],
        LoadSample {
            p_kw: [1.0, 3.0, 5.0],
            q_kvar: [2.0, 4.0, 6.0]
        }
    );
    assert_eq!(mem.samples[1].q_kvar, [20.0, 40.0, 60.0]);
}

#[test]
fn missing_columns_are_named() {
    let f = write("time,p_a_kw,q_a_kvar,p_b_kw,P_C_KW\n0,1,1,1,1\n");
    let m = file_error(scan(f.path(), &stop()));
    assert!(m.contains("missing columns q_b_kvar, q_c_kvar"), "{m}");
    assert!(
        m.contains("time, p_a_kw, q_a_kvar, p_b_kw, q_b_kvar, p_c_kw, q_c_kvar"),
        "{m}"
    );
    assert!(
        m.contains("found: time, p_a_kw, q_a_kvar, p_b_kw, P_C_KW"),
        "{m}"
    );

    let f = write("time;p_a_kw;q_a_kvar;p_b_kw;q_b_kvar;p_c_kw;q_c_kvar\n0;1;1;1;1;1;1\n");
    let m = file_error(scan(f.path(), &stop()));
    assert!(m.contains("';'"), "{m}");

    let f = write("0,1,1,1,1,1,1\n1,1,1,1,1,1,1\n");
    let m = file_error(scan(f.path(), &stop()));
    assert!(m.contains("looks like data"), "{m}");

    let f = write("time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar,TIME\n");
    let m = file_error(scan(f.path(), &stop()));
    assert!(m.contains("column time appears twice"), "{m}");
    assert!(m.contains("columns 1 and 8"), "{m}");
}

#[test]
fn empty_header_only_and_single_row() {
    let f = write("");
    assert!(file_error(scan(f.path(), &stop())).contains("empty"));
    let f = write(HEADER);
    assert!(file_error(scan(f.path(), &stop())).contains("no data rows"));
    let f = write(&rows_at(&["0"]));
    let m = file_error(scan(f.path(), &stop()));
    assert!(m.contains("at least two rows"), "{m}");
    assert!(m.contains("line 2"), "{m}");
    // Under Skip, a file whose second row is bad has one usable row: still an error.
    let f = write(&format!("{HEADER}{}1,x,1,1,1,1,1\n", row("0", 1.0)));
    assert!(file_error(scan(f.path(), &skip())).contains("at least two rows"));
    let f = write(&format!("{HEADER}1,x,1,1,1,1,1\n"));
    assert!(file_error(scan(f.path(), &skip())).contains("none of the 1 data rows"));
}

#[test]
fn missing_file_is_an_io_error() {
    let r = scan(&fixture("no_such_file.csv"), &stop());
    assert!(matches!(r, Err(ProfileError::Io { .. })));
}

#[test]
fn bad_gap_factor_is_refused() {
    let f = write(&rows_at(&["0", "1"]));
    for g in [0.5, f64::NAN, f64::INFINITY] {
        let opts = CsvOptions {
            gap_factor: g,
            ..CsvOptions::default()
        };
        assert!(file_error(scan(f.path(), &opts)).contains("gap_factor"));
    }
}

// ---------------------------------------------------------------------------------------
// Time kinds.

#[test]
fn iso_timestamps_with_z_offset_and_naive_forms() {
    let sc = scan(&fixture("iso_forms.csv"), &stop()).unwrap();
    assert_eq!(sc.time_kind, TimeKind::Absolute);
    // 2026-03-02T08:00:00Z is 1 772 438 400 s after the Unix epoch (checked with
    // Python's datetime); 09:15+01:00 is 08:15Z; the naive 08:30 is taken as it stands.
    assert_eq!(sc.t_first_s, 1_772_438_400.0);
    assert_eq!(sc.t_last_s, 1_772_438_400.0 + 2700.5);
    assert_eq!(sc.median_spacing_s, 900.0);
    assert_eq!(sc.end_s, sc.t_last_s + 900.0);
    let mem = sc.load().unwrap();
    assert_eq!(
        mem.times,
        vec![
            1_772_438_400.0,
            1_772_438_400.0 + 900.0,
            1_772_438_400.0 + 1800.0,
            1_772_438_400.0 + 2700.5
        ]
    );
    assert_eq!(mem.times[1], parse_iso8601("2026-03-02T08:15:00Z").unwrap());
    // A 60-s grid on epoch seconds: 08:14 → row 1, 08:15 → row 2, 08:45 → row 3 (row 4
    // is at 08:45:00.5), 08:46 → row 4.
    let ids = ids_on_grid(&sc, 60.0, 61);
    assert_eq!(ids[14], 1.0);
    assert_eq!(ids[15], 2.0);
    assert_eq!(ids[45], 3.0);
    assert_eq!(ids[46], 4.0);
    assert_eq!(ids[60], 4.0);
}

#[test]
fn other_time_kind_in_a_later_row_is_malformed() {
    let f = write(&rows_at(&["0", "1", "2026-03-02T08:00:00", "3"]));
    let (line, m) = row_error(scan(f.path(), &stop()));
    assert_eq!(line, 4);
    assert!(
        m.contains("a date-time, but this file's times are elapsed seconds"),
        "{m}"
    );
    assert!(m.contains("line 2"), "{m}");

    let f = write(&rows_at(&[
        "2026-03-02T08:00:00Z",
        "2026-03-02T08:00:01Z",
        "3600",
    ]));
    let (line, m) = row_error(scan(f.path(), &stop()));
    assert_eq!(line, 4);
    assert!(
        m.contains("a number of seconds, but this file's times are ISO 8601"),
        "{m}"
    );

    let f = write(&rows_at(&["0", "1", "yesterday"]));
    let (line, m) = row_error(scan(f.path(), &stop()));
    assert_eq!(line, 4);
    assert_eq!(m, "time is \"yesterday\", not a number of seconds");
}

// ---------------------------------------------------------------------------------------
// Defects, each with its line number.

/// The fixture `defects.csv` has one defect of every kind; see the line comments in
/// the test below (line numbers are those of the file, header = line 1).
#[test]
fn every_defect_kind_under_skip() {
    let sc = scan(&fixture("defects.csv"), &skip()).unwrap();
    let got: Vec<(u64, DefectKind)> = sc.defects.iter().map(|d| (d.line, d.kind)).collect();
    assert_eq!(
        got,
        vec![
            (4, DefectKind::Malformed),            // q_b_kvar "1,5"
            (5, DefectKind::NotFinite),            // p_c_kw NaN
            (7, DefectKind::ConflictingDuplicate), // 120 again after line 6, other values
            (8, DefectKind::Backwards),            // 60 after 120
            (9, DefectKind::ShortRow),             // 3 fields
            (12, DefectKind::Malformed),           // a date-time among elapsed seconds
            (13, DefectKind::Malformed),           // unquoted decimal comma shifts the columns
            (15, DefectKind::Gap),                 // 360 → 1200 s, median 120 s
            (16, DefectKind::TruncatedLastLine),   // no line end, cut short
        ]
    );
    assert_eq!(
        sc.defect_counts,
        DefectCounts {
            malformed: 3,
            not_finite: 1,
            short_row: 1,
            truncated_last_line: 1,
            duplicate: 0,
            conflicting_duplicate: 1,
            backwards: 1,
            gap: 1,
        }
    );
    assert_eq!(sc.defect_counts.rows(), 8);
    assert_eq!(sc.defect_counts.total(), 9);
    assert!(!sc.defects_truncated());
    assert_eq!(sc.rows_read, 14);
    assert_eq!(sc.rows_used, 6);
    assert_eq!(sc.rows_skipped, 8);
    assert_eq!((sc.first_line, sc.last_line), (2, 15));
    // Used times 0, 60, 120, 240, 360, 1200: spacings 60 60 120 120 840, median 120.
    assert_eq!(sc.median_spacing_s, 120.0);
    assert_eq!(sc.end_s, 1320.0);
    assert_eq!(sc.gap_time_s, 720.0);

    let msg = |line: u64| {
        sc.defects
            .iter()
            .find(|d| d.line == line)
            .map(|d| d.to_string())
            .unwrap_or_default()
    };
    assert_eq!(
        msg(4),
        "line 4: q_b_kvar is \"1,5\", not a number; this looks like a decimal comma: use a \
         point as the decimal separator, or set decimal = \",\" under [load]"
    );
    assert_eq!(msg(5), "line 5: p_c_kw is \"NaN\", not a finite number");
    assert!(msg(7).contains("time 120 s repeats the previous row's time (line 6)"));
    assert_eq!(
        msg(8),
        "line 8: time 60 s is earlier than the previous row (120 s, line 6); rows must be in time order"
    );
    assert!(msg(9).contains("the row has 3 fields but the header has 7"));
    assert!(msg(9).contains("p_b_kw, q_b_kvar, p_c_kw, q_c_kvar are missing"));
    assert!(msg(13).contains("the row has 8 fields but the header has 7"));
    assert!(msg(15).contains("gap of 840 s after the row at 360 s (line 14)"));
    assert!(msg(15).contains("3 × the median spacing of 120 s"));

    // The stream skips exactly those rows and holds across the gap.
    let ids = ids_on_grid(&sc, 60.0, 22);
    let mut want = vec![1.0, 2.0, 3.0, 3.0, 7.0, 7.0];
    want.extend([10.0; 14]);
    want.extend([11.0, 11.0]);
    assert_eq!(ids, want);
    let mut st = sc.stream().unwrap();
    let mut s = LoadSample::default();
    assert!(st.sample(0, 1320.0, &mut s).is_err());
}

#[test]
fn first_defect_stops_under_stop() {
    let (line, m) = row_error(scan(&fixture("defects.csv"), &stop()));
    assert_eq!(line, 4);
    assert_eq!(
        m,
        "q_b_kvar is \"1,5\", not a number; this looks like a decimal comma: use a point as \
         the decimal separator, or set decimal = \",\" under [load]"
    );
}

/// Each defect kind alone, after two good rows (so on line 4), under both policies.
#[test]
fn each_defect_kind_alone_with_its_line() {
    let cases: [(&str, DefectKind, &str); 10] = [
        (
            "2,abc,1,1,1,1,1\n",
            DefectKind::Malformed,
            "p_a_kw is \"abc\"",
        ),
        ("2,1,1,,1,1,1\n", DefectKind::Malformed, "p_b_kw is empty"),
        (
            "2,1,1,1,1,1,inf\n",
            DefectKind::NotFinite,
            "q_c_kvar is \"inf\"",
        ),
        (
            "nan,1,1,1,1,1,1\n",
            DefectKind::NotFinite,
            "time is \"nan\"",
        ),
        (
            "2,1,1,1\n",
            DefectKind::ShortRow,
            "q_b_kvar, p_c_kw, q_c_kvar are missing",
        ),
        (
            "1,1,1,1,1,1,1\n",
            DefectKind::ConflictingDuplicate,
            "repeats",
        ),
        (
            "1,2,0.5,1.1,0.6,1.2,0.7\n",
            DefectKind::Duplicate,
            "same values",
        ),
        (
            "0.5,1,1,1,1,1,1\n",
            DefectKind::Backwards,
            "earlier than the previous row",
        ),
        ("2,1,1,1,1,1,1,7\n", DefectKind::Malformed, "8 fields"),
        ("2,1,1,1,1,1", DefectKind::ShortRow, "q_c_kvar is missing"),
    ];
    for (bad, kind, needle) in cases {
        let text = format!("{HEADER}{}{}{bad}", row("0", 1.0), row("1", 2.0));
        let f = write(&text);
        let (line, m) = row_error(scan(f.path(), &stop()));
        assert_eq!(line, 4, "{bad:?}");
        assert!(m.contains(needle), "{bad:?}: {m}");

        let text = format!("{text}\n{}", row("3", 3.0));
        let f = write(&text);
        let sc = scan(f.path(), &skip()).unwrap();
        assert_eq!(sc.defects.len(), 1, "{bad:?}");
        assert_eq!(
            (sc.defects[0].line, sc.defects[0].kind),
            (4, kind),
            "{bad:?}"
        );
        assert_eq!(sc.defect_counts.get(kind), 1);
        assert_eq!((sc.rows_used, sc.rows_skipped), (3, 1), "{bad:?}");
    }
}

#[test]
fn trailing_empty_field_is_not_a_defect() {
    // Some writers end data rows with a comma; an empty extra field carries nothing.
    let f = write(&format!("{HEADER}0,1,1,1,1,1,1,\n1,2,1,1,1,1,1,\n"));
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!(sc.rows_used, 2);
}

#[test]
fn truncated_last_line_is_skipped_by_default() {
    let f = write(&format!(
        "{HEADER}{}{}2,1.5,0.",
        row("0", 1.0),
        row("1", 2.0)
    ));
    let (line, m) = row_error(scan(f.path(), &stop()));
    assert_eq!(line, 4);
    assert!(m.contains("cut short"), "{m}");
    for opts in [skip(), CsvOptions::default()] {
        let sc = scan(f.path(), &opts).unwrap();
        assert_eq!(sc.rows_used, 2);
        assert_eq!(sc.defects[0].kind, DefectKind::TruncatedLastLine);
        assert_eq!(sc.end_s, 2.0);
    }
}

#[test]
fn gaps_warn_but_do_not_stop() {
    // 1-s rows with an hour missing after t = 5.
    let mut times: Vec<String> = (0..=5).map(|t| t.to_string()).collect();
    times.extend((3605..3610).map(|t| t.to_string()));
    let refs: Vec<&str> = times.iter().map(String::as_str).collect();
    let f = write(&rows_at(&refs));
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!(sc.median_spacing_s, 1.0);
    assert_eq!(sc.defect_counts.gap, 1);
    assert_eq!(sc.defect_counts.rows(), 0);
    let g = &sc.defects[0];
    assert_eq!((g.line, g.kind), (8, DefectKind::Gap));
    assert!(g.kind.is_warning());
    assert_eq!(
        g.message,
        "gap of 3600 s after the row at 5 s (line 7), more than 3 × the median spacing of 1 s; \
         that row's load is held across the gap until 3605 s"
    );
    assert_eq!(sc.gap_time_s, 3599.0);
    // Held across the gap.
    let ids = ids_on_grid(&sc, 1.0, 3610);
    assert_eq!(ids[5], 6.0);
    assert_eq!(ids[3604], 6.0);
    assert_eq!(ids[3605], 7.0);
    // A larger gap factor hides it.
    let opts = CsvOptions {
        gap_factor: 5000.0,
        ..CsvOptions::default()
    };
    let sc = scan(f.path(), &opts).unwrap();
    assert_eq!(sc.defect_counts.gap, 0);
    assert_eq!(sc.gap_time_s, 0.0);
}

#[test]
fn gap_lines_are_right_when_rows_were_skipped() {
    // Under Skip the gap pass must re-apply the row rules: the bad row at line 5 is
    // left out, so the gap is measured from line 4 (t = 2) to line 6 (t = 100).
    let text = format!(
        "{HEADER}{}{}{}99,x,1,1,1,1,1\n{}{}{}",
        row("0", 1.0),
        row("1", 2.0),
        row("2", 3.0),
        row("100", 4.0),
        row("101", 5.0),
        row("102", 6.0)
    );
    let f = write(&text);
    let sc = scan(f.path(), &skip()).unwrap();
    let got: Vec<(u64, DefectKind)> = sc.defects.iter().map(|d| (d.line, d.kind)).collect();
    assert_eq!(got, vec![(5, DefectKind::Malformed), (6, DefectKind::Gap)]);
    assert!(sc.defects[1]
        .message
        .contains("gap of 98 s after the row at 2 s (line 4)"));
}

#[test]
fn line_numbers_survive_bom_crlf_blank_lines_and_quoted_breaks() {
    let text = "\u{feff}time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar,note\r\n\
                0,1,1,1,1,1,1,\"two\r\nlines\"\r\n\
                \r\n\
                1,2,1,1,1,1,1,ok\r\n\
                2,x,1,1,1,1,1,ok\r\n";
    let f = write(text);
    let (line, m) = row_error(scan(f.path(), &stop()));
    assert_eq!(line, 6, "{m}");
    let sc = scan(f.path(), &skip()).unwrap();
    assert_eq!((sc.first_line, sc.last_line), (2, 5));
}

#[test]
fn defect_list_is_capped_but_counts_are_exact() {
    let mut text = HEADER.to_string();
    for t in 0..1500 {
        text.push_str(&row(&t.to_string(), 1.0));
        text.push_str(&format!("{t},x,1,1,1,1,1\n")); // duplicate time and bad number
    }
    let f = write(&text);
    let sc = scan(f.path(), &skip()).unwrap();
    assert_eq!(sc.defects.len(), MAX_DEFECTS_KEPT);
    assert_eq!(sc.defect_counts.rows(), 1500);
    assert!(sc.defects_truncated());
    // The first defect is on line 3; they come in line order, every second line.
    assert_eq!(sc.defects[0].line, 3);
    assert_eq!(sc.defects[999].line, 2001);
    assert_eq!(sc.rows_used, 1500);
}

#[test]
fn changed_file_is_noticed() {
    let mut f = write(&rows_at(&["0", "1", "2"]));
    let sc = scan(f.path(), &stop()).unwrap();
    f.write_all(row("3", 4.0).as_bytes()).unwrap();
    f.flush().unwrap();
    match sc.stream() {
        Err(ProfileError::File { message, .. }) => assert!(message.contains("changed")),
        other => panic!("{other:?}"),
    }
}

// ---------------------------------------------------------------------------------------
// MemoryProfile built from parts.

#[test]
fn from_parts_validates() {
    let s = LoadSample::default();
    assert!(MemoryProfile::from_parts(vec![0.0, 1.0], vec![s, s], 2.0).is_ok());
    assert!(MemoryProfile::from_parts(vec![], vec![], 2.0).is_err());
    assert!(MemoryProfile::from_parts(vec![0.0, 1.0], vec![s], 2.0).is_err());
    assert!(MemoryProfile::from_parts(vec![1.0, 1.0], vec![s, s], 2.0).is_err());
    assert!(MemoryProfile::from_parts(vec![0.0, f64::NAN], vec![s, s], 2.0).is_err());
    assert!(MemoryProfile::from_parts(vec![0.0, 1.0], vec![s, s], 1.0).is_err());
    let bad = LoadSample {
        p_kw: [f64::NAN, 0.0, 0.0],
        q_kvar: [0.0; 3],
    };
    assert!(MemoryProfile::from_parts(vec![0.0, 1.0], vec![s, bad], 2.0).is_err());

    let mk = |p: f64| LoadSample {
        p_kw: [p, 0.0, 0.0],
        q_kvar: [0.0; 3],
    };
    let m = MemoryProfile::from_parts(vec![0.0, 5.0, 7.0], vec![mk(1.0), mk(2.0), mk(3.0)], 9.0)
        .unwrap();
    let mut c = m.cursor();
    let got: Vec<f64> = (0..9).map(|k| id_at(&mut c, k, k as f64)).collect();
    assert_eq!(got, vec![1.0, 1.0, 1.0, 1.0, 1.0, 2.0, 2.0, 3.0, 3.0]);
    let mut s = LoadSample::default();
    assert!(c.sample(9, 9.0, &mut s).is_err());
}

// ---------------------------------------------------------------------------------------
// Property: for random valid profiles the stream, the memory cursor and a direct
// reference (the last row with time ≤ t) agree on any grid.

mod prop {
    use super::*;
    use proptest::prelude::*;

    fn profile() -> impl Strategy<Value = (Vec<u32>, Vec<[i32; 6]>)> {
        (2usize..40).prop_flat_map(|n| {
            (
                proptest::collection::vec(1u32..50, n),
                proptest::collection::vec(proptest::array::uniform6(-100_000i32..100_000), n),
            )
        })
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn stream_matches_memory_and_reference(
            (steps, vals) in profile(),
            dt_tenths in 1u32..300,
            t0 in -1000i32..1000,
        ) {
            // Times in tenths of a second from t0, strictly increasing.
            let mut tenths = Vec::with_capacity(steps.len());
            let mut acc = t0 * 10;
            for s in &steps {
                tenths.push(acc);
                acc += *s as i32;
            }
            let times: Vec<f64> = tenths.iter().map(|&x| f64::from(x) / 10.0).collect();
            let samples: Vec<LoadSample> = vals
                .iter()
                .map(|v| LoadSample {
                    p_kw: [f64::from(v[0]) / 1000.0, f64::from(v[2]) / 1000.0, f64::from(v[4]) / 1000.0],
                    q_kvar: [f64::from(v[1]) / 1000.0, f64::from(v[3]) / 1000.0, f64::from(v[5]) / 1000.0],
                })
                .collect();
            let mut text = HEADER.to_string();
            for (t, s) in times.iter().zip(&samples) {
                text.push_str(&format!(
                    "{t},{},{},{},{},{},{}\n",
                    s.p_kw[0], s.q_kvar[0], s.p_kw[1], s.q_kvar[1], s.p_kw[2], s.q_kvar[2]
                ));
            }
            let f = write(&text);
            let sc = scan(f.path(), &stop()).unwrap();
            prop_assert_eq!(sc.rows_used as usize, times.len());
            // The median of the spacings, computed directly.
            let mut sp: Vec<f64> = steps[..steps.len() - 1].iter().map(|&s| f64::from(s)).collect();
            sp.sort_by(f64::total_cmp);
            let m = sp.len();
            let median_tenths = (sp[(m - 1) / 2] + sp[m / 2]) / 2.0;
            prop_assert!((sc.median_spacing_s - median_tenths / 10.0).abs() < 1e-6);
            prop_assert!((sc.end_s - (times[times.len() - 1] + median_tenths / 10.0)).abs() < 1e-6);

            let mem = sc.load().unwrap();
            prop_assert_eq!(&mem.times, &times);
            prop_assert_eq!(&mem.samples, &samples);
            let mut st = sc.stream().unwrap();
            let mut cur = mem.cursor();
            let dt = f64::from(dt_tenths) / 10.0;
            let (mut a, mut b) = (LoadSample::default(), LoadSample::default());
            let mut k = 0u64;
            loop {
                let t = sc.t_first_s + k as f64 * dt;
                if t + 1e-9 >= sc.end_s {
                    prop_assert!(st.sample(k, t, &mut a).is_err());
                    prop_assert!(cur.sample(k, t, &mut b).is_err());
                    break;
                }
                st.sample(k, t, &mut a).unwrap();
                cur.sample(k, t, &mut b).unwrap();
                let i = times.iter().rposition(|&x| x <= t + 1e-9).unwrap();
                prop_assert_eq!(a, samples[i]);
                prop_assert_eq!(b, samples[i]);
                k += 1;
            }
        }
    }
}

#[test]
fn rows_may_omit_trailing_extra_columns() {
    // Only the required columns must be present; a missing trailing `note` is fine.
    let f = write("time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar,note\n0,1,1,1,1,1,1\n1,2,1,1,1,1,1,x\n");
    let sc = scan(f.path(), &stop()).unwrap();
    assert_eq!((sc.rows_used, sc.defect_counts.total()), (2, 0));
}

//! Defect policies of the CSV reader beyond stop and skip: hold and interpolate (rows and
//! gaps), the default policy of each kind, daylight-saving patterns in naive local times,
//! units in headers, decimal commas and delimiters, the defect summary, and the three
//! kinds of source (file, bytes, re-openable reader) giving the same profile.

use bankstep::error::ProfileError;
use bankstep::profile::csv::{
    scan, scan_bytes, scan_source, CsvOptions, CsvScan, CsvSource, DefectAction, DefectKind,
};
use bankstep::profile::{DefectPolicy, LoadSample, LoadSource};
use std::io::Write;

const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

/// A row at time `t` whose p_a_kw is `id` and other values fixed.
fn row(t: &str, id: f64) -> String {
    format!("{t},{id},0.5,1.1,0.6,1.2,0.7\n")
}

/// A row at time `t` with p_a_kw = 99 and a NaN in q_c_kvar.
fn nan_row(t: &str) -> String {
    format!("{t},99,0.5,1.1,0.6,1.2,NaN\n")
}

fn opts(f: impl FnOnce(&mut CsvOptions)) -> CsvOptions {
    let mut o = CsvOptions::default();
    f(&mut o);
    o
}

fn mem_scan(text: &str, o: &CsvOptions) -> Result<CsvScan, ProfileError> {
    scan_bytes("p.csv", text.as_bytes().to_vec(), o)
}

/// p_a_kw on the grid t_first + k·dt for k in 0..n, from the stream and from the memory
/// cursor, which must agree.
fn pa_on_grid(sc: &CsvScan, dt: f64, n: u64) -> Vec<f64> {
    let mut st = sc.stream().expect("stream");
    let mem = sc.load().expect("load");
    let mut cur = mem.cursor();
    let (mut a, mut b) = (LoadSample::default(), LoadSample::default());
    (0..n)
        .map(|k| {
            let t = sc.t_first_s + k as f64 * dt;
            st.sample(k, t, &mut a).expect("stream sample");
            cur.sample(k, t, &mut b).expect("cursor sample");
            assert_eq!(a, b, "stream and memory differ at t = {t}");
            a.p_kw[0]
        })
        .collect()
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
// Hold and interpolate.

#[test]
fn hold_keeps_the_row_time_with_the_previous_values() {
    let text = format!(
        "{HEADER}{}{}{}",
        row("0", 1.0),
        nan_row("10"),
        row("20", 3.0)
    );
    // Default: NaN stops.
    let (line, m) = row_error(mem_scan(&text, &CsvOptions::default()));
    assert_eq!(line, 3);
    assert_eq!(m, "q_c_kvar is \"NaN\", not a finite number");
    let sc = mem_scan(
        &text,
        &opts(|o| o.defects.not_finite = Some(DefectPolicy::Hold)),
    )
    .unwrap();
    assert_eq!((sc.rows_used, sc.rows_held, sc.rows_skipped), (3, 1, 0));
    // The held row keeps its place in the time line: spacing stays 10 s, no gap.
    assert_eq!((sc.median_spacing_s, sc.end_s), (10.0, 30.0));
    assert_eq!(sc.defects[0].action, DefectAction::Held);
    let ids = pa_on_grid(&sc, 1.0, 30);
    assert!(ids[..20].iter().all(|&x| x == 1.0) && ids[20..].iter().all(|&x| x == 3.0));
    // Skip instead: the row is gone, the spacing is 20 s.
    let sc = mem_scan(&text, &CsvOptions::all(DefectPolicy::Skip)).unwrap();
    assert_eq!((sc.rows_used, sc.median_spacing_s), (2, 20.0));
}

#[test]
fn interpolate_fills_runs_of_bad_rows_linearly() {
    // p_a_kw 1 at t = 0 and 3 at t = 20: the rows at 10 and 15 get 2 and 2.5.
    let text = format!(
        "{HEADER}{}{}{}{}{}",
        row("0", 1.0),
        nan_row("10"),
        nan_row("15"),
        row("20", 3.0),
        row("30", 4.0)
    );
    let o = opts(|o| o.on_defect = Some(DefectPolicy::Interpolate));
    let sc = mem_scan(&text, &o).unwrap();
    assert_eq!((sc.rows_used, sc.rows_interpolated), (5, 2));
    let ids = pa_on_grid(&sc, 1.0, 20);
    assert_eq!(ids[9], 1.0);
    assert_eq!(ids[10], 2.0);
    assert_eq!(ids[14], 2.0);
    assert_eq!(ids[15], 2.5);
    assert_eq!(ids[19], 2.5);
    // Every value is interpolated, not only the bad one: q_c_kvar is 0.7 on both sides.
    let mem = sc.load().unwrap();
    assert_eq!(mem.samples[1].q_kvar[2], 0.7);
    let k = &sc.summary.kinds[0];
    assert_eq!(
        (k.kind, k.interpolated, k.affected_s),
        (DefectKind::NotFinite, 2, 10.0)
    );
}

#[test]
fn the_ends_of_the_file_take_the_nearest_good_row() {
    let text = format!(
        "{HEADER}{}{}{}{}",
        nan_row("0"),
        row("10", 2.0),
        row("20", 3.0),
        nan_row("30")
    );
    let o = opts(|o| o.defects.not_finite = Some(DefectPolicy::Interpolate));
    let sc = mem_scan(&text, &o).unwrap();
    assert_eq!((sc.t_first_s, sc.end_s), (0.0, 40.0));
    assert_eq!(pa_on_grid(&sc, 10.0, 4), vec![2.0, 2.0, 3.0, 3.0]);
    // Hold has nothing to hold at the start: that row is left out.
    let o = opts(|o| o.defects.not_finite = Some(DefectPolicy::Hold));
    let sc = mem_scan(&text, &o).unwrap();
    assert_eq!((sc.t_first_s, sc.rows_held, sc.rows_skipped), (10.0, 1, 1));
    assert_eq!(sc.defects[0].action, DefectAction::Skipped);
    assert_eq!(pa_on_grid(&sc, 10.0, 3), vec![2.0, 3.0, 3.0]);
}

#[test]
fn a_file_without_one_good_row_is_refused() {
    let text = format!("{HEADER}{}{}", nan_row("0"), nan_row("10"));
    let o = opts(|o| o.defects.not_finite = Some(DefectPolicy::Interpolate));
    let m = file_error(mem_scan(&text, &o));
    assert!(
        m.contains("none of the 2 data rows has a full set of good values"),
        "{m}"
    );
    assert!(m.contains("line 2"), "{m}");
}

#[test]
fn gaps_hold_by_default_interpolate_or_stop_on_request() {
    // p_a_kw equals the time; 1-s rows with a 10-s gap after t = 3 (line 5 → line 6).
    let mut text = HEADER.to_string();
    for t in [0, 1, 2, 3, 13, 14] {
        text.push_str(&row(&t.to_string(), f64::from(t)));
    }
    let sc = mem_scan(&text, &CsvOptions::default()).unwrap();
    assert_eq!(sc.defects[0].action, DefectAction::Held);
    assert_eq!(pa_on_grid(&sc, 1.0, 15)[8], 3.0);

    let sc = mem_scan(
        &text,
        &opts(|o| o.defects.gap = Some(DefectPolicy::Interpolate)),
    )
    .unwrap();
    assert_eq!(sc.defects[0].action, DefectAction::Interpolated);
    assert!(sc.defects[0]
        .message
        .ends_with("the load is interpolated across the gap between that row and the row at 13 s"));
    let ids = pa_on_grid(&sc, 1.0, 15);
    let want: Vec<f64> = (0..15).map(f64::from).collect();
    assert_eq!(ids, want);
    // Half-second grid inside the gap: linear in time.
    let ids = pa_on_grid(&sc, 0.5, 30);
    assert_eq!(ids[17], 8.5);

    let (line, m) = row_error(mem_scan(
        &text,
        &opts(|o| o.defects.gap = Some(DefectPolicy::Stop)),
    ));
    assert_eq!(line, 6);
    assert!(
        m.starts_with("gap of 10 s after the row at 3 s (line 5)"),
        "{m}"
    );
    assert!(
        m.ends_with("set gap = \"hold\" or \"interpolate\" under [load.defects] to run across it")
    );
}

#[test]
fn interpolation_is_the_same_from_a_file_bytes_and_a_reader() {
    let mut text = HEADER.to_string();
    for t in 0..200 {
        if t % 7 == 3 || t % 7 == 4 {
            text.push_str(&nan_row(&t.to_string()));
        } else {
            text.push_str(&row(&t.to_string(), f64::from(t * t)));
        }
    }
    let o = opts(|o| o.on_defect = Some(DefectPolicy::Interpolate));
    let mut f = tempfile::NamedTempFile::new().unwrap();
    f.write_all(text.as_bytes()).unwrap();
    f.flush().unwrap();
    let a = scan(f.path(), &o).unwrap();
    let b = mem_scan(&text, &o).unwrap();
    let bytes: std::sync::Arc<[u8]> = text.clone().into_bytes().into();
    let c = scan_source(
        &CsvSource::reader("gen.csv", move || {
            Ok(Box::new(std::io::Cursor::new(bytes.clone())) as Box<dyn std::io::Read + Send>)
        }),
        &o,
    )
    .unwrap();
    let ga = pa_on_grid(&a, 1.0, 200);
    assert_eq!(ga, pa_on_grid(&b, 1.0, 200));
    assert_eq!(ga, pa_on_grid(&c, 1.0, 200));
    // Rows 3 and 4 lie between 2 (4 kW) and 5 (25 kW): 11 and 18 kW.
    assert_eq!(&ga[2..6], &[4.0, 11.0, 18.0, 25.0]);
    // t % 7 in {3, 4}: two rows in each of 28 full weeks of rows, and t = 199.
    assert_eq!(a.rows_interpolated, 2 * 28 + 1);
}

// ---------------------------------------------------------------------------------------
// Duplicates and truncated last lines under the defaults.

#[test]
fn exact_duplicates_are_skipped_conflicting_ones_stop() {
    let text = format!(
        "{HEADER}{}{}{}",
        row("0", 1.0),
        row("0", 1.0),
        row("10", 2.0)
    );
    let sc = mem_scan(&text, &CsvOptions::default()).unwrap();
    assert_eq!((sc.rows_used, sc.defect_counts.duplicate), (2, 1));
    assert_eq!(
        sc.defects[0].to_string(),
        "line 3: time 0 s repeats the previous row's time (line 2) with the same values; each \
         time may appear only once"
    );
    // Nothing was lost: an exact repeat affects no profile time.
    assert_eq!(sc.summary.affected_s, 0.0);

    let text = format!(
        "{HEADER}{}{}{}",
        row("0", 1.0),
        row("0", 5.0),
        row("10", 2.0)
    );
    let (line, m) = row_error(mem_scan(&text, &CsvOptions::default()));
    assert_eq!(line, 3);
    assert!(m.contains("with different values"), "{m}");
    let o = opts(|o| o.defects.conflicting_duplicate = Some(DefectPolicy::Skip));
    let sc = mem_scan(&text, &o).unwrap();
    // The first row is kept, but its 10 s are in doubt.
    assert_eq!(pa_on_grid(&sc, 5.0, 2), vec![1.0, 1.0]);
    assert_eq!(sc.summary.kinds[0].affected_s, 10.0);
}

#[test]
fn a_truncated_last_line_is_a_warning_with_its_line() {
    let text = format!("{HEADER}{}{}20,3,0.5,1", row("0", 1.0), row("10", 2.0));
    let sc = mem_scan(&text, &CsvOptions::default()).unwrap();
    let d = &sc.defects[0];
    assert_eq!(
        (d.line, d.kind, d.action),
        (4, DefectKind::TruncatedLastLine, DefectAction::Skipped)
    );
    assert!(d
        .message
        .starts_with("the last line has no line end and seems cut short"));
    // A complete last line without a line end is fine.
    let text = format!("{HEADER}{}{}", row("0", 1.0), row("10", 2.0).trim_end());
    assert_eq!(
        mem_scan(&text, &CsvOptions::default()).unwrap().rows_used,
        2
    );
    // A short row that is not the last line still stops.
    let text = format!("{HEADER}{}20,3\n{}", row("0", 1.0), row("30", 2.0));
    assert_eq!(row_error(mem_scan(&text, &CsvOptions::default())).0, 3);
}

// ---------------------------------------------------------------------------------------
// Daylight-saving changes in naive local times (EU dates: clocks go forward on the last
// Sunday of March, 2026-03-29, and back on the last Sunday of October, 2026-10-25; calendar
// facts).

fn iso_rows(times: &[&str]) -> String {
    let mut s = HEADER.to_string();
    for (i, t) in times.iter().enumerate() {
        s.push_str(&row(t, (i + 1) as f64));
    }
    s
}

#[test]
fn autumn_repeated_hour_is_named() {
    let text = iso_rows(&[
        "2026-10-25T01:30:00",
        "2026-10-25T01:45:00",
        "2026-10-25T02:00:00",
        "2026-10-25T02:15:00",
        "2026-10-25T02:30:00",
        "2026-10-25T02:45:00",
        "2026-10-25T02:00:00", // line 8: clocks back
        "2026-10-25T02:15:00",
        "2026-10-25T02:30:00",
        "2026-10-25T02:45:00", // line 11: same time as line 7
        "2026-10-25T03:00:00",
        "2026-10-25T03:15:00",
    ]);
    let (line, m) = row_error(mem_scan(&text, &CsvOptions::default()));
    assert_eq!(line, 8);
    assert!(
        m.starts_with(
            "time \"2026-10-25T02:00:00\" is 2700 s earlier than the previous row (line 7); rows \
             must be in time order; this looks like a daylight-saving change"
        ),
        "{m}"
    );
    let o = opts(|o| o.on_defect = Some(DefectPolicy::Skip));
    let sc = mem_scan(&text, &o).unwrap();
    let got: Vec<(u64, DefectKind)> = sc.defects.iter().map(|d| (d.line, d.kind)).collect();
    assert_eq!(
        got,
        vec![
            (8, DefectKind::Backwards),
            (9, DefectKind::Backwards),
            (10, DefectKind::Backwards),
            (11, DefectKind::ConflictingDuplicate),
        ]
    );
    assert!(sc.defects[1]
        .message
        .ends_with("part of the hour repeated by the daylight-saving change at line 8"));
    assert!(sc.defects[3]
        .message
        .ends_with("part of the hour repeated by the daylight-saving change at line 8"));
    assert_eq!(sc.summary.daylight_saving_lines, vec![8]);
    // Three backwards rows count one median spacing (900 s) each; the conflicting
    // duplicate puts the 900 s of line 7 in doubt.
    let k: Vec<(DefectKind, f64)> = sc
        .summary
        .kinds
        .iter()
        .map(|k| (k.kind, k.affected_s))
        .collect();
    assert_eq!(
        k,
        vec![
            (DefectKind::ConflictingDuplicate, 900.0),
            (DefectKind::Backwards, 2700.0)
        ]
    );
}

#[test]
fn spring_skipped_hour_is_named_and_offsets_are_not_suspected() {
    let text = iso_rows(&[
        "2026-03-29T01:15:00",
        "2026-03-29T01:30:00",
        "2026-03-29T01:45:00",
        "2026-03-29T03:00:00", // line 5: clocks forward
        "2026-03-29T03:15:00",
        "2026-03-29T03:30:00",
    ]);
    let sc = mem_scan(&text, &CsvOptions::default()).unwrap();
    let g = &sc.defects[0];
    assert_eq!((g.line, g.kind), (5, DefectKind::Gap));
    assert_eq!(
        g.message,
        "gap of 4500 s after the row at 2026-03-29T01:45:00 (line 4), more than 3 × the median \
         spacing of 900 s; that row's load is held across the gap until 2026-03-29T03:00:00; \
         this looks like a daylight-saving change (clocks set forward one hour with times in \
         naive local time), so the profile's time line has an hour that did not happen: give \
         the times with their UTC offset (e.g. +01:00)"
    );
    assert_eq!(sc.summary.daylight_saving_lines, vec![5]);
    assert_eq!(sc.gap_time_s, 3600.0);

    // The same hour missing from times with an offset is a plain gap.
    let text = text
        .replace(":00\n", ":00+01:00\n")
        .replace(":00,", ":00+01:00,");
    let sc = mem_scan(&text, &CsvOptions::default()).unwrap();
    assert!(!sc.defects[0].message.contains("daylight"));
    assert!(sc.summary.daylight_saving_lines.is_empty());
    // And so is a one-hour gap in July.
    let text = iso_rows(&[
        "2026-07-05T01:15:00",
        "2026-07-05T01:30:00",
        "2026-07-05T01:45:00",
        "2026-07-05T03:00:00",
    ]);
    let sc = mem_scan(&text, &CsvOptions::default()).unwrap();
    assert!(!sc.defects[0].message.contains("daylight"));
}

// ---------------------------------------------------------------------------------------
// Units in the header.

#[test]
fn units_in_the_header_are_accepted_and_reported() {
    let text = "Time [s],P_a [kW],q_a_kvar (kvar),P_B_KW,q_b [kVAr],p-c-kw,Q C (kvar),note\n\
                0,1,2,3,4,5,6,x\n10,1,2,3,4,5,6,y\n";
    let sc = mem_scan(text, &CsvOptions::default()).unwrap();
    let cols: Vec<(&str, u64, &str)> = sc
        .columns()
        .iter()
        .map(|c| (c.column, c.field, c.header.as_str()))
        .collect();
    assert_eq!(
        cols,
        vec![
            ("time", 1, "Time [s]"),
            ("p_a_kw", 2, "P_a [kW]"),
            ("q_a_kvar", 3, "q_a_kvar (kvar)"),
            ("p_b_kw", 4, "P_B_KW"),
            ("q_b_kvar", 5, "q_b [kVAr]"),
            ("p_c_kw", 6, "p-c-kw"),
            ("q_c_kvar", 7, "Q C (kvar)"),
        ]
    );
    assert!(sc
        .summary
        .lines()
        .contains(&"column p_a_kw read from field 2 \"P_a [kW]\"".to_string()));
}

#[test]
fn contradicting_units_name_the_column() {
    let h = |first: &str| {
        format!("time,{first},q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n0,1,1,1,1,1,1\n")
    };
    let m = file_error(mem_scan(&h("p_a_w"), &CsvOptions::default()));
    assert_eq!(
        m,
        "column 2 of the header (line 1), \"p_a_w\", gives p_a in W, but the profile must give \
         p_a in kW; convert the values and name the column p_a_kw"
    );
    let m = file_error(mem_scan(&h("p_a_kw [W]"), &CsvOptions::default()));
    assert_eq!(
        m,
        "column 2 of the header (line 1), \"p_a_kw [W]\", gives two units: kW in the name and W \
         in brackets; p_a_kw must be in kW"
    );
    // A column in W beside one in kW is just an extra column.
    let text = "time,p_a_w,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n\
                0,1000,1,1,1,1,1,1\n1,2000,2,1,1,1,1,1\n";
    assert_eq!(
        mem_scan(text, &CsvOptions::default()).unwrap().columns()[1].field,
        3
    );
    let m = file_error(mem_scan(&h("p_a"), &CsvOptions::default()));
    assert!(
        m.contains("column 2 \"p_a\" gives no unit: name it p_a_kw or p_a [kW]"),
        "{m}"
    );
}

// ---------------------------------------------------------------------------------------
// Decimal commas and delimiters.

const SEMI: &str = "time;p_a_kw;q_a_kvar;p_b_kw;q_b_kvar;p_c_kw;q_c_kvar\n\
                    0;1,5;0,5;1;1;1;1\n0,5;2,25;0,5;1;1;1;1\n1;3;0,5;1;1;1;1\n";

#[test]
fn decimal_commas_with_semicolons_when_asked() {
    let o = opts(|o| {
        o.delimiter = ';';
        o.decimal = ',';
    });
    let sc = mem_scan(SEMI, &o).unwrap();
    assert_eq!(sc.median_spacing_s, 0.5);
    assert_eq!(pa_on_grid(&sc, 0.5, 3), vec![1.5, 2.25, 3.0]);
    assert_eq!(
        (sc.summary.delimiter.as_str(), sc.summary.decimal.as_str()),
        (";", ",")
    );
}

#[test]
fn decimal_commas_without_the_option_suggest_it() {
    let m = file_error(mem_scan(SEMI, &CsvOptions::default()));
    assert!(
        m.ends_with(
            "the header seems to use ';' between columns: set delimiter = \";\" under [load] \
             and decimal = \",\" (the numbers seem to use decimal commas)"
        ),
        "{m}"
    );
    let (line, m) = row_error(mem_scan(SEMI, &opts(|o| o.delimiter = ';')));
    assert_eq!(line, 2);
    assert_eq!(
        m,
        "p_a_kw is \"1,5\", not a number; this looks like a decimal comma: use a point as the \
         decimal separator, or set decimal = \",\" under [load]"
    );
    // With decimal commas a point is refused, so 1.234 is never read as 1234 or 1.234.
    let o = opts(|o| {
        o.delimiter = ';';
        o.decimal = ',';
    });
    let (line, m) = row_error(mem_scan(&SEMI.replace("0;1,5", "0;1.234"), &o));
    assert_eq!(line, 2);
    assert!(
        m.contains("with decimal = \",\" a point is not allowed"),
        "{m}"
    );
}

#[test]
fn quoted_decimal_commas_with_comma_delimiters() {
    let text = format!("{HEADER}0,\"1,5\",1,1,1,1,1\n1,\"2,5\",1,1,1,1,1\n");
    let sc = mem_scan(&text, &opts(|o| o.decimal = ',')).unwrap();
    assert_eq!(pa_on_grid(&sc, 1.0, 2), vec![1.5, 2.5]);
}

#[test]
fn units_in_values_get_a_hint() {
    let text = format!("{HEADER}0,1.5 kW,1,1,1,1,1\n");
    let (_, m) = row_error(mem_scan(&text, &CsvOptions::default()));
    assert_eq!(
        m,
        "p_a_kw is \"1.5 kW\", not a number; give plain numbers (units belong in the header, \
         e.g. p_a_kw [kW])"
    );
}

// ---------------------------------------------------------------------------------------
// The summary.

#[test]
fn summary_counts_rows_and_time_per_kind() {
    // 10-s rows; line 4 NaN (held), line 6 malformed (skipped), line 8 an exact repeat.
    let text = format!(
        "{HEADER}{}{}{}{}{}{}{}{}",
        row("0", 1.0),
        row("10", 2.0),
        nan_row("20"),
        row("30", 4.0),
        "40,x,1,1,1,1,1\n",
        row("50", 6.0),
        row("50", 6.0),
        row("60", 7.0)
    );
    let o = opts(|o| {
        o.defects.not_finite = Some(DefectPolicy::Hold);
        o.defects.malformed = Some(DefectPolicy::Skip);
    });
    let sc = mem_scan(&text, &o).unwrap();
    let s = &sc.summary;
    assert_eq!(
        (s.rows_read, s.rows_used, s.rows_held, s.rows_skipped),
        (8, 6, 1, 2)
    );
    let k: Vec<(DefectKind, DefectPolicy, u64, f64, Vec<u64>)> = s
        .kinds
        .iter()
        .map(|k| {
            (
                k.kind,
                k.policy,
                k.count,
                k.affected_s,
                k.first_lines.clone(),
            )
        })
        .collect();
    assert_eq!(
        k,
        vec![
            (DefectKind::Malformed, DefectPolicy::Skip, 1, 10.0, vec![6]),
            (DefectKind::NotFinite, DefectPolicy::Hold, 1, 10.0, vec![4]),
            (DefectKind::Duplicate, DefectPolicy::Skip, 1, 0.0, vec![8]),
        ]
    );
    assert_eq!(s.affected_s, 20.0);
    // Spacings 10 10 10 20 10 → median 10, coverage 0 … 70 s.
    assert!((s.affected_share - 20.0 / 70.0).abs() < 1e-12);
    assert_eq!(
        s.lines(),
        vec![
            "8 data rows read, 6 used (1 held, 0 interpolated), 2 left out; 20 s of profile time \
             affected (28.57 % of the profile)"
                .to_string(),
            "malformed: 1 row, 10 s of profile time, left out (line 6)".to_string(),
            "not_finite: 1 row, 10 s of profile time, held (line 4)".to_string(),
            "duplicate: 1 row, 0 s of profile time, left out (line 8)".to_string(),
        ]
    );
    assert_eq!(
        s.kinds[1].first,
        "line 4: q_c_kvar is \"NaN\", not a finite number"
    );
    let json = serde_json::to_value(s).unwrap();
    assert_eq!(json["kinds"][1]["kind"], "not_finite");
    assert_eq!(json["kinds"][1]["policy"], "hold");
    assert_eq!(json["columns"][0]["column"], "time");
}

// ---------------------------------------------------------------------------------------
// Scenario keys under [load].

#[test]
fn load_keys_become_csv_options() {
    use bankstep::scenario::{LoadSpec, Scenario};
    let text = "[[steps]]\nkvar = 10\n[load]\ncsv = \"p.csv\"\non_defect = \"skip\"\n\
                gap_factor = 5\ndelimiter = \"tab\"\ndecimal = \",\"\n\
                [load.defects]\nnot_finite = \"interpolate\"\ngap = \"interpolate\"\n";
    let s = Scenario::from_str(text, std::path::Path::new("s.toml")).unwrap();
    let LoadSpec::Csv { options: o, .. } = s.load else {
        panic!("expected a CSV load");
    };
    assert_eq!((o.delimiter, o.decimal, o.gap_factor), ('\t', ',', 5.0));
    assert_eq!(o.policy(DefectKind::NotFinite), DefectPolicy::Interpolate);
    assert_eq!(o.policy(DefectKind::Malformed), DefectPolicy::Skip);
    assert_eq!(o.policy(DefectKind::Gap), DefectPolicy::Interpolate);
    // Without any key, each kind has its default.
    let s = Scenario::from_str(
        "[[steps]]\nkvar = 10\n[load]\ncsv = \"p.csv\"\n",
        std::path::Path::new("s.toml"),
    )
    .unwrap();
    let LoadSpec::Csv { options: o, .. } = s.load else {
        panic!("expected a CSV load");
    };
    assert_eq!(o, CsvOptions::default());
}

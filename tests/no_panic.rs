//! No input makes the CSV reader or the scenario parser panic: fixed-seed property tests
//! over random bytes and over random mutations of valid profiles and scenarios (bit
//! flips, deleted, repeated and swapped lines, truncation, inserted commas, NaN, units,
//! quotes and line ends). Every case must give a profile that streams and agrees with its
//! in-memory copy, or a clean error naming the line (CSV, TOML syntax) or the key
//! (scenario values); see `tests/robust/mod.rs` for the checks.
//!
//! About 110 000 cases in all. The seed is fixed so that a run is reproducible; the
//! inputs are small and read from memory, so the suite stays quick in a debug build.

mod robust;

use proptest::prelude::*;
use proptest::strategy::ValueTree;
use proptest::test_runner::{Config, RngAlgorithm, TestCaseError, TestRng, TestRunner};
use robust::{check_csv, check_scenario, options_from};

const SEED: [u8; 16] = *b"bankstep seed 01";

fn runner(cases: u32) -> TestRunner {
    let config = Config {
        cases,
        failure_persistence: None,
        max_shrink_iters: 4096,
        ..Config::default()
    };
    TestRunner::new_with_rng(config, TestRng::from_seed(RngAlgorithm::XorShift, &SEED))
}

/// Runs `cases` cases of `strategy` through `check`, failing with the shrunk input.
fn run<S: Strategy>(cases: u32, strategy: S, check: impl Fn(S::Value) -> Result<(), String>)
where
    S::Value: std::fmt::Debug,
{
    let mut r = runner(cases);
    if let Err(e) = r.run(&strategy, |v| check(v).map_err(TestCaseError::fail)) {
        panic!("{e}");
    }
}

// ---------------------------------------------------------------------------------------
// Valid profiles to start from.

const HEADERS: [&str; 4] = [
    "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar",
    "Time [s],P_a [kW],Q_a [kvar],P_b (kW),Q_b (kvar),P_c_kW,Q_c_kvar",
    "note,q_c_kvar,time,p_c_kw,q_b_kvar,p_b_kw,q_a_kvar,p_a_kw",
    "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar,extra",
];

/// The parameters of a valid profile.
#[derive(Debug, Clone)]
struct Base {
    header: usize,
    iso: bool,
    start: i64,
    steps: Vec<u16>,
    values: Vec<[i32; 6]>,
    crlf: bool,
    final_newline: bool,
}

fn base() -> impl Strategy<Value = Base> {
    (2usize..10).prop_flat_map(|n| {
        (
            0..HEADERS.len(),
            any::<bool>(),
            -100i64..100,
            proptest::collection::vec(1u16..4000, n),
            proptest::collection::vec(proptest::array::uniform6(-50_000i32..50_000), n),
            any::<bool>(),
            any::<bool>(),
        )
            .prop_map(
                |(header, iso, start, steps, values, crlf, final_newline)| Base {
                    header,
                    iso,
                    start,
                    steps,
                    values,
                    crlf,
                    final_newline,
                },
            )
    })
}

/// Writes a valid profile in the dialect of `opts`.
fn render(b: &Base, delimiter: char, decimal: char) -> Vec<u8> {
    let eol = if b.crlf { "\r\n" } else { "\n" };
    let d = delimiter.to_string();
    let mut out = HEADERS[b.header].replace(',', &d);
    out.push_str(eol);
    let num = |x: f64| {
        let s = format!("{x}");
        if decimal == ',' {
            let s = s.replace('.', ",");
            if delimiter == ',' && s.contains(',') {
                return format!("\"{s}\"");
            }
            s
        } else {
            s
        }
    };
    // 2026-03-28T22:00:00 (naive): the rows may run across the spring change.
    let t0 = 1_774_735_200i64 + b.start * 60;
    let mut tenths = b.start * 10;
    for (i, (step, v)) in b.steps.iter().zip(&b.values).enumerate() {
        let time = if b.iso {
            let secs = t0 + tenths / 10;
            let dt = chrono::DateTime::from_timestamp(secs, 0).unwrap_or_default();
            dt.format("%Y-%m-%dT%H:%M:%S").to_string()
        } else {
            num(tenths as f64 / 10.0)
        };
        let vals: Vec<String> = v.iter().map(|&x| num(f64::from(x) / 100.0)).collect();
        let fields: Vec<String> = match b.header {
            2 => vec![
                "n".into(),
                vals[5].clone(),
                time,
                vals[4].clone(),
                vals[3].clone(),
                vals[2].clone(),
                vals[1].clone(),
                vals[0].clone(),
            ],
            h => {
                let mut f = vec![time];
                f.extend(vals);
                if h == 3 && i % 2 == 0 {
                    f.push("x".into());
                }
                f
            }
        };
        out.push_str(&fields.join(&d));
        if i + 1 < b.steps.len() || b.final_newline {
            out.push_str(eol);
        }
        tenths += i64::from(*step) * if b.iso { 10 } else { 1 };
    }
    out.into_bytes()
}

// ---------------------------------------------------------------------------------------
// Mutations.

const TOKENS: [&str; 20] = [
    ",",
    ";",
    "NaN",
    "inf",
    " kW",
    "\"",
    "\n",
    "\r\n",
    "1,5",
    "-",
    "e9",
    "",
    "  ",
    "[W]",
    "\u{feff}",
    "2026-10-25T02:00:00",
    "\t",
    "1e400",
    "0.",
    "x",
];

#[derive(Debug, Clone)]
enum Mutation {
    FlipBit(usize, u8),
    DeleteLine(usize),
    RepeatLine(usize),
    SwapLines(usize, usize),
    Truncate(usize),
    Insert(usize, usize),
    ReplaceField(usize, usize, usize),
}

fn mutation() -> impl Strategy<Value = Mutation> {
    prop_oneof![
        (any::<usize>(), 0u8..8).prop_map(|(p, b)| Mutation::FlipBit(p, b)),
        any::<usize>().prop_map(Mutation::DeleteLine),
        any::<usize>().prop_map(Mutation::RepeatLine),
        (any::<usize>(), any::<usize>()).prop_map(|(a, b)| Mutation::SwapLines(a, b)),
        any::<usize>().prop_map(Mutation::Truncate),
        (any::<usize>(), 0..TOKENS.len()).prop_map(|(p, t)| Mutation::Insert(p, t)),
        (any::<usize>(), 0usize..9, 0..TOKENS.len())
            .prop_map(|(l, f, t)| Mutation::ReplaceField(l, f, t)),
    ]
}

fn split_lines(data: &[u8]) -> Vec<Vec<u8>> {
    data.split_inclusive(|&b| b == b'\n')
        .map(<[u8]>::to_vec)
        .collect()
}

fn apply(data: &mut Vec<u8>, m: &Mutation, delimiter: u8) {
    match *m {
        Mutation::FlipBit(p, bit) => {
            if !data.is_empty() {
                let i = p % data.len();
                data[i] ^= 1 << bit;
            }
        }
        Mutation::Truncate(p) => data.truncate(p % (data.len() + 1)),
        Mutation::Insert(p, t) => {
            let i = p % (data.len() + 1);
            data.splice(i..i, TOKENS[t].bytes());
        }
        Mutation::DeleteLine(_)
        | Mutation::RepeatLine(_)
        | Mutation::SwapLines(..)
        | Mutation::ReplaceField(..) => {
            let mut lines = split_lines(data);
            if lines.is_empty() {
                return;
            }
            let n = lines.len();
            match *m {
                Mutation::DeleteLine(i) => {
                    lines.remove(i % n);
                }
                Mutation::RepeatLine(i) => {
                    let l = lines[i % n].clone();
                    lines.insert(i % n, l);
                }
                Mutation::SwapLines(a, b) => lines.swap(a % n, b % n),
                Mutation::ReplaceField(l, f, t) => {
                    let line = &lines[l % n];
                    let mut fields: Vec<Vec<u8>> = line
                        .split(|&b| b == delimiter)
                        .map(<[u8]>::to_vec)
                        .collect();
                    let k = f % fields.len();
                    let end_nl = fields[k].ends_with(b"\n");
                    fields[k] = TOKENS[t].as_bytes().to_vec();
                    if end_nl {
                        fields[k].push(b'\n');
                    }
                    lines[l % n] = fields.join(&delimiter);
                }
                _ => {}
            }
            *data = lines.concat();
        }
    }
}

// ---------------------------------------------------------------------------------------
// CSV cases.

#[test]
fn csv_random_bytes_never_panic() {
    let bytes = proptest::collection::vec(any::<u8>(), 0..160);
    run(10_000, (bytes, any::<u8>(), any::<u8>()), |(data, a, b)| {
        check_csv(&data, &options_from(a, b)).map(|_| ())
    });
}

/// Bytes drawn from the characters that matter in a profile, after a valid header.
#[test]
fn csv_random_bodies_never_panic() {
    let alphabet: Vec<u8> = b"0123456789.,;-+eE \t\r\n\n\n\"NaNinf:T".to_vec();
    let body = proptest::collection::vec(proptest::sample::select(alphabet), 0..240);
    run(
        30_000,
        (0..HEADERS.len(), body, any::<u8>(), any::<u8>()),
        |(h, body, a, b)| {
            let opts = options_from(a, b);
            let mut data = HEADERS[h]
                .replace(',', &opts.delimiter.to_string())
                .into_bytes();
            data.push(b'\n');
            data.extend(body);
            check_csv(&data, &opts).map(|_| ())
        },
    );
}

#[test]
fn csv_mutations_never_panic() {
    use std::cell::Cell;
    // What the cases reached, so that a generator that stops reaching the deep paths is
    // noticed: scans that succeed, rows held, interpolated and skipped, gaps, errors.
    let (ok, err, held, interpolated, skipped, gaps) = (
        Cell::new(0u32),
        Cell::new(0u32),
        Cell::new(0u32),
        Cell::new(0u32),
        Cell::new(0u32),
        Cell::new(0u32),
    );
    let muts = proptest::collection::vec(mutation(), 0..4);
    run(
        50_000,
        (base(), muts, any::<u8>(), any::<u8>()),
        |(b, muts, oa, ob)| {
            let opts = options_from(oa, ob);
            let mut data = render(&b, opts.delimiter, opts.decimal);
            // Unmutated, the profile must scan.
            if muts.is_empty() {
                let mut strict = opts;
                strict.defects.gap = Some(bankstep::profile::DefectPolicy::Hold);
                return match check_csv(&data, &strict)? {
                    Some(_) => Ok(()),
                    None => Err(format!(
                        "a valid profile did not scan: {}",
                        String::from_utf8_lossy(&data)
                    )),
                };
            }
            for m in &muts {
                apply(&mut data, m, opts.delimiter as u8);
            }
            let outcome = check_csv(&data, &opts).map_err(|e| {
                format!(
                    "{e}\ninput: {:?}\noptions: {opts:?}",
                    String::from_utf8_lossy(&data)
                )
            })?;
            match outcome {
                Some(sc) => {
                    ok.set(ok.get() + 1);
                    let bump = |c: &Cell<u32>, yes: bool| c.set(c.get() + u32::from(yes));
                    bump(&held, sc.rows_held > 0);
                    bump(&interpolated, sc.rows_interpolated > 0);
                    bump(&skipped, sc.rows_skipped > 0);
                    bump(&gaps, sc.defect_counts.gap > 0);
                }
                None => err.set(err.get() + 1),
            }
            Ok(())
        },
    );
    let counts = [&ok, &err, &held, &interpolated, &skipped, &gaps].map(|c| c.get());
    assert!(
        counts.iter().all(|&c| c >= 500),
        "too few cases reach some path: {counts:?}"
    );
}

// ---------------------------------------------------------------------------------------
// Scenario cases.

const SCENARIOS: [&str; 3] = [
    r#"[study]
name = "Press shop"

[supply]
nominal_voltage_v = 400
frequency_hz = 50
grid_short_circuit_mva = 250

[supply.transformer]
rated_kva = 1000
impedance_pct = 6

[[steps]]
kvar = 25
count = 2

[[steps]]
kvar = 50
count = 4
detuning_pct = 7

[controller]
target_pf = "0.95 lag"
switching_delay_s = 30
discharge_time_s = 60
ordering = "rotating"

[load]
csv = "profile.csv"
on_defect = "skip"
gap_factor = 4
delimiter = ";"
decimal = ","

[load.defects]
gap = "interpolate"
not_finite = "hold"
duplicate = "stop"

[harmonics]
preset = "six-pulse"
reference_kva = 200

[run]
time_step_s = 1
duration_h = 24
start = "2026-03-02"
"#,
    r#"[[steps]]
kvar = 50
count = 4
fixed = false

[controller]
target_pf = 0.97
dead_band_fraction = 0.6
measurement = "single-phase"
measurement_phase = "b"

[controller.protection]
overvoltage_v = 440
max_operations_per_hour = 30

[load.synthetic]

[run]
duration_days = 2
seed = 7

[report]
billing_window = "run"
"#,
    r#"[[steps]]
kvar = 10
[[steps]]
kvar = 20
phase = "a"
[[steps]]
kvar = 40
fault = { kind = "capacitance-loss", fraction = 0.3, from_h = 2 }
[load]
csv = "p.csv"
[load.defects]
truncated_last_line = "stop"
backwards = "skip"
"#,
];

const TOML_TOKENS: [&str; 18] = [
    "=",
    "\"",
    "[",
    "]",
    "\n",
    "-1",
    "nan",
    "1e999",
    "inf",
    "\"x\"",
    "{",
    "}",
    ",",
    "#",
    "interpolate",
    "[load.defects]\ngap = \"skip\"\n",
    "0",
    "\"\\u0000\"",
];

#[derive(Debug, Clone)]
enum TomlMutation {
    Line(Mutation),
    Token(usize, usize),
}

#[test]
fn scenario_mutations_never_panic() {
    let m = prop_oneof![
        mutation().prop_map(TomlMutation::Line),
        (any::<usize>(), 0..TOML_TOKENS.len()).prop_map(|(p, t)| TomlMutation::Token(p, t)),
    ];
    run(
        15_000,
        (0..SCENARIOS.len(), proptest::collection::vec(m, 0..4)),
        |(s, muts)| {
            let mut data = SCENARIOS[s].as_bytes().to_vec();
            for m in &muts {
                match m {
                    TomlMutation::Line(m) => apply(&mut data, m, b'='),
                    TomlMutation::Token(p, t) => {
                        let i = p % (data.len() + 1);
                        data.splice(i..i, TOML_TOKENS[*t].bytes());
                    }
                }
            }
            let text = String::from_utf8_lossy(&data);
            if muts.is_empty() {
                return bankstep::scenario::Scenario::from_str(
                    &text,
                    std::path::Path::new("s.toml"),
                )
                .map(|_| ())
                .map_err(|e| format!("a valid scenario was refused: {e}"));
            }
            check_scenario(&text)
        },
    );
}

#[test]
fn scenario_random_bytes_never_panic() {
    let bytes = proptest::collection::vec(any::<u8>(), 0..120);
    run(5_000, bytes, |data| {
        check_scenario(&String::from_utf8_lossy(&data))
    });
}

/// The strategies above must produce what they claim: the first few inputs are shown
/// here, so that a broken generator is noticed (not a property of the reader).
#[test]
fn generators_make_valid_profiles() {
    let mut r = runner(1);
    for (a, b) in [(0u8, 0u8), (5, 0), (2, 0)] {
        let opts = options_from(a, b);
        let tree = base().new_tree(&mut r).unwrap();
        let data = render(&tree.current(), opts.delimiter, opts.decimal);
        let sc = check_csv(&data, &opts)
            .unwrap()
            .unwrap_or_else(|| panic!("{}", String::from_utf8_lossy(&data)));
        assert_eq!(sc.rows_used as usize, tree.current().steps.len());
    }
}

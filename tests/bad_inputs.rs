//! The corpus of malformed profiles and scenarios in `tests/data/bad/`: each file, with
//! the options it is read with, must give exactly the error or the warnings written in
//! `tests/data/bad/expected.toml` (line numbers, keys, defect kinds, actions, messages).
//! Every file in the folder must appear there at least once.
//!
//! To see what each case gives now (for a new case, to be checked by hand before it goes
//! into the manifest): `BANKSTEP_SHOW_BAD=1 cargo test --test bad_inputs -- --nocapture`.

use bankstep::error::{ProfileError, RunError, ScenarioError};
use bankstep::profile::csv::{scan, CsvOptions, CsvScan};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use serde::Deserialize;
use std::collections::BTreeSet;
use std::path::PathBuf;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Manifest {
    csv: Vec<CsvCase>,
    scenario: Vec<ScenarioCase>,
}

/// A profile read with the given options.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct CsvCase {
    file: String,
    #[serde(default)]
    options: CsvOptions,
    error: Option<Expected>,
    #[serde(default)]
    warnings: Vec<Warning>,
    /// Lines of `DefectSummary::lines`, when given.
    summary: Option<Vec<String>>,
}

/// A scenario read and, if valid, prepared as a study (which scans its CSV).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ScenarioCase {
    file: String,
    error: Option<Expected>,
    #[serde(default)]
    warnings: Vec<Warning>,
}

/// An error: a row error (`line` and `message`), a whole-file error (`message`), a
/// scenario key error (`key` and `message`), or a TOML syntax error (`parse`: fragments
/// that the parser's message must contain, e.g. its line and column and its reason).
#[derive(Debug, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
struct Expected {
    line: Option<u64>,
    key: Option<String>,
    message: Option<String>,
    parse: Option<Vec<String>>,
}

/// One entry of the scan's defect list.
#[derive(Debug, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
struct Warning {
    line: u64,
    kind: String,
    action: String,
    message: String,
}

fn dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/data/bad")
}

fn show() -> bool {
    std::env::var_os("BANKSTEP_SHOW_BAD").is_some()
}

fn warnings_of(sc: &CsvScan) -> Vec<Warning> {
    sc.defects
        .iter()
        .map(|d| Warning {
            line: d.line,
            kind: d.kind.name().to_string(),
            action: d.action.name().to_string(),
            message: d.message.clone(),
        })
        .collect()
}

fn profile_error(e: &ProfileError) -> Expected {
    match e {
        ProfileError::Row { line, message, .. } => Expected {
            line: Some(*line),
            key: None,
            message: Some(message.clone()),
            parse: None,
        },
        ProfileError::File { message, .. } | ProfileError::Coverage { message, .. } => Expected {
            line: None,
            key: None,
            message: Some(message.clone()),
            parse: None,
        },
        ProfileError::Io { .. } => panic!("unexpected I/O error: {e}"),
        ProfileError::Sequence { .. } => panic!("unexpected sequence error: {e}"),
    }
}

fn scenario_error(e: &ScenarioError, fragments: Option<&[String]>) -> Expected {
    match e {
        ScenarioError::Invalid { key, message, .. } => Expected {
            line: None,
            key: Some(key.clone()),
            message: Some(message.clone()),
            parse: None,
        },
        ScenarioError::Parse { message, .. } => Expected {
            line: None,
            key: None,
            message: None,
            // Compare only the fragments the manifest gives (the rest is a source snippet).
            parse: Some(match fragments {
                Some(f) if f.iter().all(|x| message.contains(x.as_str())) => f.to_vec(),
                _ => vec![message.clone()],
            }),
        },
        ScenarioError::Io { .. } => panic!("unexpected I/O error: {e}"),
    }
}

fn print_case(file: &str, error: &Option<Expected>, warnings: &[Warning], summary: &[String]) {
    println!("--- {file}");
    if let Some(e) = error {
        println!("error: {e:?}");
    }
    for w in warnings {
        println!("warning: {w:?}");
    }
    for s in summary {
        println!("summary: {s:?}");
    }
}

#[test]
fn every_bad_input_gives_its_expected_message() {
    let text = std::fs::read_to_string(dir().join("expected.toml")).expect("manifest");
    let manifest: Manifest = toml::from_str(&text).expect("manifest parses");
    let mut failures = Vec::new();

    for case in &manifest.csv {
        let (error, warnings, summary) = match scan(&dir().join(&case.file), &case.options) {
            Ok(sc) => (None, warnings_of(&sc), sc.summary.lines()),
            Err(e) => (Some(profile_error(&e)), Vec::new(), Vec::new()),
        };
        if show() {
            print_case(&case.file, &error, &warnings, &summary);
        }
        if error != case.error || warnings != case.warnings {
            failures.push(format!(
                "{} ({:?}):\n  want error {:?}\n  got  error {:?}\n  want warnings {:?}\n  got  \
                 warnings {:?}",
                case.file, case.options, case.error, error, case.warnings, warnings
            ));
        }
        if let Some(want) = &case.summary {
            if *want != summary {
                failures.push(format!(
                    "{}: summary\n  want {want:?}\n  got  {summary:?}",
                    case.file
                ));
            }
        }
    }

    for case in &manifest.scenario {
        let fragments = case.error.as_ref().and_then(|e| e.parse.as_deref());
        let (error, warnings) = match Scenario::from_file(&dir().join(&case.file)) {
            Err(e) => (Some(scenario_error(&e, fragments)), Vec::new()),
            Ok(s) => match Study::prepare(s) {
                Ok(st) => (None, st.csv().map(warnings_of).unwrap_or_default()),
                Err(RunError::Profile(e)) => (Some(profile_error(&e)), Vec::new()),
                Err(e) => panic!("{}: unexpected study error {e}", case.file),
            },
        };
        if show() {
            print_case(&case.file, &error, &warnings, &[]);
        }
        if error != case.error || warnings != case.warnings {
            failures.push(format!(
                "{}:\n  want error {:?}\n  got  error {:?}\n  want warnings {:?}\n  got  \
                 warnings {:?}",
                case.file, case.error, error, case.warnings, warnings
            ));
        }
    }

    // Every file of the corpus is checked.
    let listed: BTreeSet<&str> = manifest
        .csv
        .iter()
        .map(|c| c.file.as_str())
        .chain(manifest.scenario.iter().map(|c| c.file.as_str()))
        .collect();
    for entry in std::fs::read_dir(dir()).expect("corpus folder") {
        let name = entry
            .expect("entry")
            .file_name()
            .to_string_lossy()
            .into_owned();
        if name != "expected.toml" && !listed.contains(name.as_str()) {
            failures.push(format!(
                "{name} is in tests/data/bad but not in expected.toml"
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

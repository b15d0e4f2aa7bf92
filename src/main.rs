//! The `bankstep` command line: a thin shell around the library. It parses the command
//! line (clap), loads and runs a study, shows progress (indicatif), and hands the result
//! to the report writers. It is the only part of the project that knows clap and
//! indicatif; output formats belong to `bankstep::report`.
//!
//! Exit codes:
//!
//! - 0: success;
//! - 1: the run failed, or an output (summary, JSON, time series) could not be written;
//! - 2: bad input: the scenario file (missing, unreadable, invalid TOML, a value out of
//!   range) or the load profile (missing, malformed rows, too short for the run); clap's
//!   own usage errors also exit with 2.

use anyhow::Context;
use bankstep::engine::{IntervalRecord, Observer};
use bankstep::error::RunError;
use bankstep::report::{
    JsonReport, ReportContext, ReportError, ReportWriter, Summary, TimeseriesWriter,
};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use clap::{Args, Parser, Subcommand};
use indicatif::{ProgressBar, ProgressStyle};
use std::fs::File;
use std::io::{BufWriter, IsTerminal};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Runs longer than this many intervals show a progress bar (on a terminal).
const PROGRESS_MIN_INTERVALS: u64 = 2_000_000;

/// The exit-code table of the help texts (a macro so that `concat!` can use it).
macro_rules! exit_codes {
    () => {
        "Exit codes:
  0  success
  1  the run failed, or an output file could not be written
  2  bad input: scenario file (missing, invalid, value out of range) or load profile
     (missing, malformed rows, too short); also command-line usage errors"
    };
}

const TOP_AFTER_HELP: &str = concat!(
    "Example:
  bankstep simulate site.toml --json site.json

Run `bankstep simulate --help` for the options and the time-series columns.

",
    exit_codes!()
);

const SIMULATE_AFTER_HELP: &str = concat!(
    "Time-series columns (--timeseries):
  time_s       start of the interval, in the profile's time base, s
  p_kw         three-phase supply-side active power, kW
  q_kvar       three-phase supply-side reactive power, kvar (> 0 lagging)
  pf           supply-side power factor, 0..1
  pf_quadrant  lag or lead
  u_bus_v      bus voltage, line to line (sqrt(3) x mean phase voltage), V
  demand_kvar  the controller's demand, kvar (> 0: wants more capacitance)
  bank_kvar    reactive power delivered by the connected steps, kvar
  steps_on     connected step numbers, e.g. 1+2+3 (empty if none)
  operation    what the controller did at the end of the interval, e.g. `close 3`,
               `open 2`, `trip export` (takes effect from the next interval)

Examples:
  bankstep simulate site.toml
  bankstep simulate site.toml --json site.json --timeseries site.csv --every 60
  bankstep simulate site.toml --json - --quiet > site.json

",
    exit_codes!()
);

/// Simulates automatic capacitor-bank step control on a site's load.
///
/// A scenario file (TOML) describes the supply, the bank steps, the controller settings
/// and the load (a CSV profile or a synthetic generator). `bankstep` runs the load through
/// the supply, the bank and the controller interval by interval and reports the billed
/// power factor, switching, overcorrection, hunting, resonance, contactor wear and bus
/// voltage.
#[derive(Debug, Parser)]
#[command(name = "bankstep", version, after_help = TOP_AFTER_HELP)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Simulate one scenario and print a summary (ranked findings first).
    ///
    /// Reads the scenario, runs it, and prints a plain-text summary on standard output:
    /// the top findings, then the study, PF and energy, switching, overcorrection,
    /// resonance, wear and voltage sections. Every figure is printed with its unit and
    /// every power factor with its quadrant (lag or lead).
    #[command(after_help = SIMULATE_AFTER_HELP)]
    Simulate(SimulateArgs),
}

/// Options of `bankstep simulate`.
#[derive(Debug, Args)]
struct SimulateArgs {
    /// Scenario file (TOML). A relative CSV profile path inside it is read relative to the
    /// scenario's folder.
    #[arg(value_name = "SCENARIO")]
    scenario: PathBuf,

    /// Also write the machine-readable report (one JSON object) to FILE. Use `-` for
    /// standard output; the text summary is then not printed.
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,

    /// Also write a time series (CSV, one row per interval, units in the column names) to
    /// FILE. See the columns below.
    #[arg(long, value_name = "FILE")]
    timeseries: Option<PathBuf>,

    /// Keep only every N-th interval in the time series (N ≥ 1; 1 keeps every interval, 60
    /// with a 1 s time step gives one row per minute).
    #[arg(
        long,
        value_name = "N",
        default_value_t = 1,
        value_parser = clap::value_parser!(u64).range(1..),
        requires = "timeseries"
    )]
    every: u64,

    /// No progress bar and no notes on standard error (the summary and errors still
    /// appear).
    #[arg(long, short)]
    quiet: bool,
}

/// A failure with the exit code it maps to.
struct Failure {
    code: u8,
    error: anyhow::Error,
}

impl Failure {
    /// Bad input: exit code 2.
    fn input(error: anyhow::Error) -> Self {
        Failure { code: 2, error }
    }

    /// The run or an output failed: exit code 1.
    fn run(error: anyhow::Error) -> Self {
        Failure { code: 1, error }
    }

    /// A report could not be written: exit code 1, or a quiet end if the reader went away.
    fn report(e: ReportError, what: impl FnOnce() -> String) -> Self {
        if e.is_broken_pipe() {
            Failure {
                code: 0,
                error: anyhow::Error::new(e),
            }
        } else {
            Failure::run(anyhow::Error::new(e).context(what()))
        }
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let outcome = match cli.command {
        Command::Simulate(args) => simulate(&args),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) if f.code == 0 => ExitCode::SUCCESS,
        Err(f) => {
            eprintln!("error: {}", message(&f.error));
            ExitCode::from(f.code)
        }
    }
}

/// The error with its causes, `: `-separated, leaving out a cause whose text the message
/// already carries (several library errors quote their source).
fn message(e: &anyhow::Error) -> String {
    let mut text = String::new();
    for cause in e.chain() {
        let part = cause.to_string();
        if text.contains(&part) {
            continue;
        }
        if !text.is_empty() {
            text.push_str(": ");
        }
        text.push_str(&part);
    }
    text
}

/// Observer of a command-line run: the optional time series and the optional progress bar.
struct CliObserver {
    series: Option<TimeseriesWriter<BufWriter<File>>>,
    bar: Option<ProgressBar>,
}

impl Observer for CliObserver {
    #[inline]
    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        match &mut self.series {
            Some(s) => s.interval(r),
            None => Ok(()),
        }
    }

    fn progress(&mut self, done: u64, total: u64) {
        if let Some(bar) = &self.bar {
            bar.set_length(total);
            bar.set_position(done);
        }
    }
}

/// A progress bar on standard error, when it is a terminal and the run is long.
fn progress_bar(intervals: u64, quiet: bool) -> Option<ProgressBar> {
    if quiet || intervals <= PROGRESS_MIN_INTERVALS || !std::io::stderr().is_terminal() {
        return None;
    }
    let bar = ProgressBar::new(intervals);
    let style = ProgressStyle::with_template(
        "simulating [{bar:40}] {percent:>3} % ({human_pos}/{human_len} intervals, {eta} left)",
    )
    .map(|s| s.progress_chars("=> "))
    .unwrap_or_else(|_| ProgressStyle::default_bar());
    bar.set_style(style);
    Some(bar)
}

/// Where the JSON report goes.
fn is_stdout(path: &Path) -> bool {
    path.as_os_str() == "-"
}

fn simulate(args: &SimulateArgs) -> Result<(), Failure> {
    let file = args.scenario.display().to_string();
    let scenario = Scenario::from_file(&args.scenario)
        .context("cannot load the scenario")
        .map_err(Failure::input)?;
    // Preparing the study reads the load profile; anything wrong there is bad input.
    let study = Study::prepare(scenario)
        .with_context(|| format!("cannot prepare the study of {file}"))
        .map_err(Failure::input)?;
    let sim = &study.simulation;

    let series = match &args.timeseries {
        None => None,
        Some(path) => Some(
            TimeseriesWriter::create(path, args.every, sim.dt_s, sim.t_first_s).map_err(|e| {
                Failure::run(
                    anyhow::Error::new(e)
                        .context(format!("cannot create the time series {}", path.display())),
                )
            })?,
        ),
    };
    let mut observer = CliObserver {
        series,
        bar: progress_bar(sim.intervals, args.quiet),
    };
    let result = study.run(&mut observer);
    if let Some(bar) = &observer.bar {
        bar.finish_and_clear();
    }
    let result = result.map_err(|e| {
        let code = match e {
            RunError::Profile(_) => 2,
            RunError::Config(_) => 1,
        };
        Failure {
            code,
            error: anyhow::Error::new(e).context(format!("the run of {file} failed")),
        }
    })?;
    if let (Some(series), Some(path)) = (observer.series.take(), &args.timeseries) {
        let rows = series.rows();
        series.finish().map_err(|e| {
            Failure::report(e, || {
                format!("cannot write the time series {}", path.display())
            })
        })?;
        if !args.quiet {
            eprintln!("time series: {rows} rows written to {}", path.display());
        }
    }

    let ctx = ReportContext::new(&study, &result);
    let mut json_to_stdout = false;
    if let Some(path) = &args.json {
        let what = || format!("cannot write the JSON report {}", path.display());
        if is_stdout(path) {
            json_to_stdout = true;
            let stdout = std::io::stdout();
            let mut out = stdout.lock();
            JsonReport
                .write(&ctx, &mut out)
                .map_err(|e| Failure::report(e, what))?;
        } else {
            let f = File::create(path)
                .with_context(what)
                .map_err(Failure::run)?;
            let mut out = BufWriter::new(f);
            JsonReport
                .write(&ctx, &mut out)
                .map_err(|e| Failure::report(e, what))?;
            if !args.quiet {
                eprintln!("JSON report written to {}", path.display());
            }
        }
    }
    if !json_to_stdout {
        let stdout = std::io::stdout();
        let mut out = stdout.lock();
        Summary
            .write(&ctx, &mut out)
            .map_err(|e| Failure::report(e, || "cannot write the summary".to_string()))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn command_line_is_consistent() {
        Cli::command().debug_assert();
    }

    #[test]
    fn stdout_marker() {
        assert!(is_stdout(Path::new("-")));
        assert!(!is_stdout(Path::new("out.json")));
    }
}

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
use bankstep::analysis::maintenance::{self, PlanOptions, WearObserver, WhatIf};
use bankstep::bank::{BankState, Fault, FaultKind};
use bankstep::engine::{Both, IntervalRecord, Observer};
use bankstep::error::RunError;
use bankstep::harmonics::scan::ScanGrid;
use bankstep::harmonics::survey::{self, Selection, Survey};
use bankstep::report::design as design_report;
use bankstep::report::resonance::{self as resonance_report, ResonanceContext};
use bankstep::report::sweep as sweep_report;
use bankstep::report::wear as wear_report;
use bankstep::report::{html, html_design, html_sweep};
use bankstep::report::{
    JsonReport, ReportContext, ReportError, ReportWriter, Summary, TimeseriesWriter,
};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use bankstep::sweep::{FrontAxes, Outcome, Shard, Sweep, SweepError, SweepSpec, Variation};
use bankstep::trace::Trace;
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

/// The safety caution of the help texts (a macro so that `concat!` can use it).
macro_rules! caution {
    () => {
        "Caution: bankstep is a planning aid, not a safety device. Capacitors hold their charge
after they are switched off: isolate the bank, wait at least the discharge time and verify
with a meter before touching it. Resonance can destroy capacitors, fuses and drives. Work
on steps, reactors or wiring is for qualified persons, to local codes and licensed practice.

"
    };
}

const TOP_AFTER_HELP: &str = concat!(
    "Example:
  bankstep simulate site.toml --json site.json

Run `bankstep simulate --help` for the options and the time-series columns,
`bankstep resonance --help` for the impedance scan and the detuning comparison,
`bankstep sweep --help` for trying many settings on one load profile,
`bankstep design --help` for the total kvar a site needs and the best layout of steps, and
`bankstep wear --help` for the wear plan (dates, orderings, inrush, ageing, faults).

",
    caution!(),
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
  p_a_kw, p_b_kw, p_c_kw         supply-side active power of each phase, kW
  q_a_kvar, q_b_kvar, q_c_kvar   supply-side reactive power of each phase, kvar
  pf_a, pf_b, pf_c               power factor of each phase, 0..1
  pf_a_quadrant, ...             lag or lead, each phase
  u_a_v, u_b_v, u_c_v            bus voltage of each phase, line to neutral, V

Examples:
  bankstep simulate site.toml
  bankstep simulate site.toml --json site.json --timeseries site.csv --every 60
  bankstep simulate site.toml --report site-report
  bankstep simulate site.toml --json - --quiet > site.json

",
    caution!(),
    exit_codes!()
);

const RESONANCE_AFTER_HELP: &str = concat!(
    "What it shows, per bank state (a set of connected steps; fixed steps are always in):
  order    parallel-resonance order of the bank with the supply: sqrt(S_sc/Q_c) for plain
           steps (S_sc the short-circuit power at the bus, kVA; Q_c the kvar connected),
           the peak of the impedance scan for detuned ones; x 50 Hz (or 60) gives f_r
  peak     order of the strongest peak of |Z(h)|, the impedance the load's harmonic
           currents see, ohm per phase; the supply resistance moves it slightly
  xhN      amplification at harmonic N of the load: |Z| with the state over |Z| with no
           step connected (above 1 the bank makes that harmonic worse)
  THD_V    estimated bus voltage THD, %, with the harmonic load at its full rating in
           every state (the estimate assumes the full harmonic load)
  h/year   with --states reached: time in the state extrapolated to a 365-day year
  status   `clear` when no limit is exceeded and no resonance lies near a harmonic;
           `near hN` when a resonance lies within the scenario's tolerance of harmonic N;
           `over ...` with the limits exceeded: V_hN (a harmonic voltage), THD_V, and of a
           step's capacitors I_C (rms current), U_C (rms voltage, judged as held
           continuously), U_C peak, Q_C (kvar); each is detailed under the table

Then \"what detuning would do\": the same kvar per step, every step with a detuning
reactor of ratio p (default 5.67 %, 7 %, 14 %: tuned to orders 4.20, 3.78, 2.67), and the
resonant order of the full bank and of each state, so you see whether the peak moves
below the lowest harmonic of the load. A detuned step's capacitors see U/(1 - p) (430 V
for 7 % at 400 V) and need a rating above it.

CSV (--csv): a column h (harmonic order), supply_only_ohm, then z_<steps>_ohm per state:
|Z(h)| in ohm per phase, one row per order of the scan.
JSON (--json): the states (order, peaks, harmonic voltages, step current and capacitor
voltage against their limits, status, limits exceeded) and the detuning comparison; with
--curves also the impedance curves (large: hundreds of megabytes for 12 steps).

Examples:
  bankstep resonance site.toml
  bankstep resonance site.toml --states 1+2,1+2+3 --csv z.csv
  bankstep resonance site.toml --states reached --json resonance.json
  bankstep resonance site.toml --detuning 7,14 --max-order 25 --resolution 0.005

Caution: capacitors hold their charge after they are switched off; resonance can destroy
capacitors, fuses and drives. Changes to steps, reactors or wiring are for qualified
persons, to local codes and licensed practice.

",
    exit_codes!()
);

const SWEEP_AFTER_HELP: &str = concat!(
    "How it works:
  Each --vary KEY=VALUES names a scenario key (dotted, as in the file) and the values to
  try. The settings are every combination of the values (the first key changes slowest),
  and the scenario's own settings always run too, as setting 0, the reference. Every
  run uses the same load profile, read once.

Values:
  30,40,50          numbers (TOML values; bare words such as rotating are text)
  10:60:10          a range start:stop:step, stop included (10, 20, 30, 40, 50, 60)
  0.3:0.7:0.1       decimal steps do not drift (0.3, 0.4, 0.5, 0.6, 0.7)
  \"0.95 lag\",1.0    quoted text; commas inside quotes, [...] or {...} do not split
  steps=6x50,25+5x50,40f+2x25+5x50,6x50@7%
                    step layouts: COUNTxKVAR terms joined by +, f for a fixed step,
                    @P% for a detuning reactor of ratio P on every step

A grid file (--grid) holds the same in a [vary] table:
  [vary]
  \"controller.dead_band_kvar\" = [10, 20, 30]
  \"controller.switching_delay_s\" = \"10:60:10\"

What it prints:
  The Pareto front of two objectives (--front): pf-ops, billed PF against operations a
  year (default); under-ops, share of time under target against operations a year;
  pf-life, billed PF against years to the first contactor's rated life. A setting is on
  the front when no other setting is at least as good on both and better on one. Then a
  recommendation in plain words: among the front settings that meet the PF target, the
  one with the fewest operations (or longest life), what it gives up against its
  neighbours, and whether any setting beats the scenario's own on both objectives.
  With a [tariff] in the scenario the front is ranked by cost a year.
  --csv: one row per run (setting, seed, billed PF, share under target, operations a
  year, first rated life, hunting, overcorrection, worst resonance state, cost, front).
  --json: the rows, every setting's figures (median and range over seeds), the front,
  the recommendation and the provenance (tool, scenario and profile hashes).

Seeds (--seeds N): with a synthetic load each setting runs N times, run.seed = the
scenario's seed + 0..N-1, and the figures are medians with their range. A CSV profile is
one realisation, so --seeds is refused for it.

Shards (--shard K/N): run only shard K of N (runs whose index mod N is K-1) and write
the rows with a fingerprint to --json; then `bankstep merge` joins the shard files into
exactly the outputs of a single run:
  for k in 1 2 3 4; do
    bankstep sweep site.toml --vary controller.dead_band_kvar=10:60:10 \\
      --shard $k/4 --json shard$k.json --quiet &
  done; wait
  bankstep merge shard*.json --csv sweep.csv --json sweep.json

Report (--report DIR): report.html, one self-contained page (no script, no network;
print it to PDF from a browser) with the recommendation first, the trade-off figure (the
front joined, the recommendation ringed, the scenario's own settings boxed), the front
and settings tables, the keys varied, cost and seeds where they apply and the
provenance; and the figure as sweep-tradeoff.svg and .png.

Examples:
  bankstep sweep site.toml --vary controller.dead_band_kvar=10:60:10 \\
      --vary controller.ordering=sequential,rotating,best-fit --report sweep-report
  bankstep sweep site.toml --vary steps=6x50,3x100,25+5x50 --front pf-life --csv s.csv
  bankstep sweep site.toml --grid grid.toml --seeds 5 --json sweep.json --threads 2

",
    caution!(),
    exit_codes!()
);

const MERGE_AFTER_HELP: &str = concat!(
    "Each shard file is the --json output of `bankstep sweep ... --shard K/N`. The files
must come from the same sweep (same tool version, scenario, load profile, variations,
seeds and front: their fingerprints agree) and hold every run exactly once; the merged
summary, CSV, JSON and report folder (--report DIR) are then byte for byte those of the
sweep run in one go.

Example:
  bankstep merge shard1.json shard2.json shard3.json shard4.json --csv sweep.csv

",
    exit_codes!()
);

const DESIGN_AFTER_HELP: &str = concat!(
    "How it works:
  1. The kvar needed. At each instant of the profile the load needs
     Q_c = Q - P * tan(phi_target) (the three-phase load, kW and kvar) to reach the target
     PF: the kW-multiplier rule P * (tan phi1 - tan phi2). It needs nothing while the site
     exports or is idle (P <= 0), while the load already leads, or while it is at or past
     the target. Weighted by time, these make a duration curve. The recommended total is
     the kvar that covers the need for --coverage of the time (0.95: all but the 5 % of
     the time with the largest need); the largest need and the energy-weighted figure (the
     bank that delivers that share of the kvarh needed) are shown beside it.
  2. Candidate layouts. From the catalogue sizes (--sizes, kvar at the capacitors' rated
     voltage) and 2 to --max-steps switched steps: equal steps (6x50), a half-size first
     step (25+5x50, 1:2:2), binary (25+50+100, 1:2:4) and a small trim step plus equal
     steps (15+5x50). A layout is kept when its effective total lies within 100 to 130 %
     of the recommended total. Each comes plain and behind each --detuning ratio; a
     detuned step uses capacitors of the catalogue size rated at the usual voltage (440 V
     for 7 % at 400 V) and delivers Q_R * (U/U_R)^2 / (1 - p): 50 kvar rated at 440 V
     gives 44.4 kvar at 400 V behind 7 %.
  3. Each layout replaces the scenario's bank and runs with 8 controller settings
     (best-fit or rotating ordering, dead band 0.65 or 0.9 x the smallest step, the
     scenario's switching delay or twice it), on the one profile, in parallel; its best
     settings are those on the trade-off of billed PF against operations a year that meet
     the target with the fewest operations.
  4. Ranking: no state over a harmonic or capacitor limit first, then no resonance near
     a harmonic of the load, then the target met, then overcorrection (leading beyond the
     threshold more than 1 % of the time), then fewer operations a year, fewer steps and
     less kvar. Each candidate gets one sentence on why it stands where it does, and a
     line on its smallest step against the light-load need.

Outputs: the report on standard output; --json FILE the whole design (with the duration
curve `need.curve` and each candidate's reachable kvar levels `candidates[i].reachable_kvar`
for figures); --csv FILE one row per candidate; --report DIR a folder with report.html
(the recommended layout and its reasons, the kvar duration curve with the levels the
best layouts reach, the ranked candidates, cautions, provenance) and the figure as
kvar-duration.svg and .png. `-` writes the JSON or CSV to standard output instead of
the report.

Examples:
  bankstep design site.toml
  bankstep design site.toml --coverage 0.9 --sizes 25,50 --max-steps 6 --detuning 0,7,14
  bankstep design site.toml --json design.json --csv design.csv --threads 2
  bankstep design site.toml --report design-report

",
    caution!(),
    "Detuning reactors raise the capacitor voltage to U/(1 - p): detuned steps need
capacitors rated above it. Confirm a layout with a harmonic study and the makers' data
before ordering it.

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
    /// Worker threads for the parts that run in parallel (default: one per core). Results
    /// are the same for any number.
    #[arg(long, global = true, value_name = "N")]
    threads: Option<usize>,

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
    /// Scan the impedance of bank states and compare detuning ratios.
    ///
    /// For each chosen bank state, scans |Z(h)|, the impedance the load's harmonic
    /// currents see at the bus, over harmonic orders h, finds the parallel-resonance peak
    /// with the supply, and estimates how much each harmonic of the load is amplified and
    /// the bus voltage THD. Then shows what detuning every step would do to the resonance.
    /// The scan needs no load profile, except with `--states reached`, which runs the
    /// simulation first.
    #[command(after_help = RESONANCE_AFTER_HELP)]
    Resonance(ResonanceArgs),
    /// Try many settings of one scenario on its load profile and find the trade-off.
    ///
    /// Runs the scenario once per combination of the values given with --vary (or in a
    /// grid file), plus the scenario's own settings, in parallel on one copy of the load
    /// profile. Prints the Pareto front of billed PF against operations a year (or the
    /// objectives chosen with --front) as a ranked table, and a recommendation in plain
    /// words.
    #[command(after_help = SWEEP_AFTER_HELP)]
    Sweep(SweepArgs),
    /// Join the shard files of a sweep run in parts (--shard K/N) into its outputs.
    #[command(after_help = MERGE_AFTER_HELP)]
    Merge(MergeArgs),
    /// Design a bank: the total kvar the site needs and the best layout of steps.
    ///
    /// Reads the load profile of the scenario, works out the kvar needed to reach the
    /// target PF at each instant and the total that covers it for most of the time, then
    /// simulates candidate step layouts (equal, 1:2:2, binary, a small step plus equal
    /// steps; plain and detuned) with a few controller settings each, checks their
    /// resonance and overcorrection, and ranks them with a reason for each.
    #[command(after_help = DESIGN_AFTER_HELP)]
    Design(DesignArgs),
    /// The wear plan: operations a year by the calendar, dates of rated contactor life,
    /// other orderings, closing inrush, capacitor ageing, faults and replacements.
    ///
    /// Runs the scenario, then the other step orderings, a few more seeds (synthetic
    /// load), one run per year of capacitor ageing, and, where a step has a fault (in the
    /// scenario or given here with --fail-step), a run without it and one with the
    /// controller's fault detection, all on the same load profile and in parallel.
    #[command(after_help = WEAR_AFTER_HELP)]
    Wear(WearArgs),
}

const WEAR_AFTER_HELP: &str = concat!(
    "The scenario's [maintenance] section and the per-step keys operations_so_far,
installed, contactor_peak_a and damping_ohm give the study date, holidays, the bank's
history and the ageing and inrush settings (see the README's key reference).

Examples:
  bankstep wear site.toml
  bankstep wear site.toml --fail-step 4 --from-h 100
  bankstep wear site.toml --fail-step 2 --fail-kind capacitance-loss --fraction 0.3 --json plan.json

",
    caution!(),
    exit_codes!()
);

/// Options of `bankstep wear`.
#[derive(Debug, Args)]
struct WearArgs {
    /// Scenario file (TOML).
    #[arg(value_name = "SCENARIO")]
    scenario: PathBuf,

    /// What if step N (from 1) failed: adds a fault to it on top of the scenario's own.
    #[arg(long, value_name = "N")]
    fail_step: Option<usize>,

    /// The what-if fault: open (delivers nothing), capacitance-loss (with --fraction) or
    /// stuck-closed (the contactor no longer opens).
    #[arg(
        long,
        value_name = "KIND",
        default_value = "open",
        requires = "fail_step"
    )]
    fail_kind: String,

    /// Capacitance lost, for --fail-kind capacitance-loss (more than 0, less than 1).
    #[arg(long, value_name = "F", requires = "fail_step")]
    fraction: Option<f64>,

    /// When the what-if fault starts, hours after the start of the run.
    #[arg(long, value_name = "H", requires = "fail_step", default_value_t = 0.0)]
    from_h: f64,

    /// Make the plan from the scenario's own run alone (no other orderings, seeds, ageing
    /// years or fault comparison).
    #[arg(long)]
    quick: bool,

    /// Write the plan as JSON to FILE (`-`: standard output, instead of the text).
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,

    /// No notes on standard error.
    #[arg(long, short)]
    quiet: bool,
}

/// Options of `bankstep sweep`.
#[derive(Debug, Args)]
struct SweepArgs {
    /// Scenario file (TOML): its own settings are the reference (setting 0).
    #[arg(value_name = "SCENARIO")]
    scenario: PathBuf,

    /// A key and its values, KEY=V1,V2,... or KEY=START:STOP:STEP (repeat for more keys).
    /// With neither --vary nor --grid, the usual controller settings are tried: dead band
    /// 0.5, 0.65, 0.8 and 1.0 x the smallest switched step, switching delay 1/2, 1, 2 and
    /// 4 x the scenario's own, and the three orderings (48 settings).
    #[arg(long, value_name = "KEY=VALUES")]
    vary: Vec<String>,

    /// A grid file with a [vary] table (key = [values] or "start:stop:step"), after the
    /// --vary keys.
    #[arg(long, value_name = "FILE")]
    grid: Option<PathBuf>,

    /// Seeds per setting (synthetic load only): medians and ranges over N runs.
    #[arg(long, value_name = "N", default_value_t = 1)]
    seeds: u32,

    /// The two objectives of the front: pf-ops, under-ops or pf-life.
    #[arg(long, value_name = "FRONT", default_value = "pf-ops", value_parser = parse_front)]
    front: FrontAxes,

    /// Run only shard K of N and write its rows with a fingerprint to --json (then join
    /// the shards with `bankstep merge`).
    #[arg(
        long,
        value_name = "K/N",
        requires = "json",
        conflicts_with_all = ["csv", "report"]
    )]
    shard: Option<String>,

    /// Also write a report folder DIR (created if missing): `report.html`, one
    /// self-contained page with the recommendation, the trade-off figure, the front, every
    /// setting, the keys varied, cost and seeds where they apply and the provenance, and
    /// the figure as SVG and PNG.
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,

    /// Write one row per run (CSV) to FILE (`-`: standard output, instead of the summary).
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,

    /// Write the rows, settings, front, recommendation and provenance (JSON) to FILE; with
    /// --shard, the shard file (`-`: standard output, instead of the summary).
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,

    /// No progress bar and no notes on standard error.
    #[arg(long, short)]
    quiet: bool,
}

/// Options of `bankstep merge`.
#[derive(Debug, Args)]
struct MergeArgs {
    /// Shard files written by `bankstep sweep --shard K/N --json FILE`.
    #[arg(value_name = "SHARD.json", required = true)]
    shards: Vec<PathBuf>,

    /// Write one row per run (CSV) to FILE (`-`: standard output, instead of the summary).
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,

    /// Write the merged JSON to FILE (`-`: standard output, instead of the summary).
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,

    /// Also write the report folder DIR, the same as `sweep --report` writes for the sweep
    /// run in one go.
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,

    /// No notes on standard error.
    #[arg(long, short)]
    quiet: bool,
}

fn parse_front(text: &str) -> Result<FrontAxes, String> {
    FrontAxes::parse(text)
}

/// Parses a comma-separated list of numbers.
fn parse_number(text: &str) -> Result<f64, String> {
    text.trim()
        .parse::<f64>()
        .ok()
        .filter(|x| x.is_finite())
        .ok_or_else(|| format!("`{text}` is not a number"))
}

/// Options of `bankstep design`.
#[derive(Debug, Args)]
struct DesignArgs {
    /// Scenario file (TOML): the supply, the controller's target and delay, the load (CSV
    /// or synthetic) and the harmonics; its own steps are replaced by each candidate.
    #[arg(value_name = "SCENARIO")]
    scenario: PathBuf,

    /// Share of the time the recommended total covers, more than 0 and at most 1.
    #[arg(long, value_name = "SHARE", default_value_t = 0.95)]
    coverage: f64,

    /// Available step sizes, kvar at the capacitors' rated voltage (comma-separated, each
    /// more than 0 and at most 100 000).
    #[arg(
        long,
        value_name = "KVAR,...",
        value_delimiter = ',',
        value_parser = parse_number,
        default_value = "5,10,12.5,15,20,25,30,40,50,60,75,100"
    )]
    sizes: Vec<f64>,

    /// Largest number of switched steps (2 to 64).
    #[arg(long, value_name = "N", default_value_t = 8)]
    max_steps: usize,

    /// Detuning ratios to try, % (comma-separated; 0 for plain steps, at most 20).
    #[arg(
        long,
        value_name = "P,...",
        value_delimiter = ',',
        value_parser = parse_number,
        default_value = "0,7"
    )]
    detuning: Vec<f64>,

    /// Layouts simulated per detuning ratio (the families take turns, least excess over
    /// the recommended total first).
    #[arg(long, value_name = "N", default_value_t = 10)]
    max_layouts: usize,

    /// Also write the whole design as one JSON object to FILE (`-`: standard output,
    /// instead of the report).
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,

    /// Also write one CSV row per candidate to FILE (`-`: standard output, instead of the
    /// report).
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,

    /// Also write a report folder DIR (created if missing): `report.html`, one
    /// self-contained page with the recommended layout and its reasons, the kvar duration
    /// curve with the levels of the best layouts, the ranked candidates, the cautions and
    /// the provenance, and the figure as SVG and PNG.
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,

    /// No progress bar and no notes on standard error.
    #[arg(long, short)]
    quiet: bool,
}

/// Parses `--every N`: a whole number of intervals, at least 1.
fn parse_every(text: &str) -> Result<u64, String> {
    match text.trim().parse::<u64>() {
        Ok(0) => Err("must be at least 1 (1 keeps every interval)".to_string()),
        Ok(n) => Ok(n),
        Err(_) => Err(format!(
            "`{text}` is not a whole number of intervals (1 or more)"
        )),
    }
}

/// Options of `bankstep resonance`.
#[derive(Debug, Args)]
struct ResonanceArgs {
    /// Scenario file (TOML).
    #[arg(value_name = "SCENARIO")]
    scenario: PathBuf,

    /// Which bank states: `all` (every combination of the switched steps, at most 16 of
    /// them), `reached` (the states a simulation of the scenario reaches, with their time),
    /// or a list of step numbers joined by `+` and separated by commas, e.g.
    /// `1+2,1+2+3` (`none` for no switched step). Fixed steps are added to every state.
    #[arg(long, value_name = "STATES", default_value = "all")]
    states: String,

    /// Also write the impedance curves (|Z| in ohm per state, one row per order) as CSV to
    /// FILE. `-` writes to standard output instead of the tables.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,

    /// Also write the whole scan (states, limits exceeded, detuning comparison) as one
    /// JSON object to FILE. `-` writes to standard output instead of the tables.
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,

    /// Put the impedance curves (|Z| in ohm per state at every order of the scan) in the
    /// JSON too. They are large: every state of a 12-step bank at the default resolution is
    /// hundreds of megabytes.
    #[arg(long, requires = "json")]
    curves: bool,

    /// Detuning ratios to compare, % (comma-separated, each more than 0 and at most 20).
    #[arg(
        long,
        value_name = "P,...",
        default_value = "5.67,7,14",
        value_delimiter = ','
    )]
    detuning: Vec<f64>,

    /// Highest harmonic order scanned (more than 1, at most 200).
    #[arg(long, value_name = "ORDER", default_value_t = 50.0)]
    max_order: f64,

    /// Spacing of the scan, orders: 0.0001 to 1, and at most half of (--max-order − 1);
    /// peaks are refined between grid points.
    #[arg(long, value_name = "ORDERS", default_value_t = 0.01)]
    resolution: f64,

    /// No notes on standard error.
    #[arg(long, short)]
    quiet: bool,
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
        value_parser = parse_every,
        requires = "timeseries"
    )]
    every: u64,

    /// Also write a report folder DIR (created if missing): `report.html`, one
    /// self-contained page with the findings, the figures, the settings, the tables and
    /// the provenance (open it in a browser; print it to PDF), and every figure as SVG
    /// and PNG.
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,
    /// Also run every plausible miswiring of the configured measurement (current from
    /// another line, reversed polarity, another voltage pair; for three channels one or
    /// all reversed, rotated or swapped) on the same load, and print a table of what each
    /// does: billed PF, operations, overcorrection and the symptom in words.
    #[arg(long)]
    wiring_check: bool,
    /// Make the summary's wear plan in full: also run the other orderings, more seeds,
    /// the ageing years and the fault comparisons on the same profile (as `bankstep
    /// wear` does). Without it the plan comes from this run alone.
    #[arg(long)]
    full_wear_plan: bool,

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

    /// The engine stopped: a profile defect met while streaming is bad input (exit code
    /// 2), anything else a failed run (exit code 1).
    fn simulation(e: RunError, file: &str) -> Self {
        let code = match e {
            RunError::Profile(_) => 2,
            RunError::Config(_) => 1,
        };
        Failure {
            code,
            error: anyhow::Error::new(e).context(format!("the run of {file} failed")),
        }
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
    if let Some(n) = cli.threads {
        if n == 0 {
            eprintln!("error: --threads must be at least 1");
            return ExitCode::from(2);
        }
        if let Err(e) = rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build_global()
        {
            eprintln!("error: cannot start {n} worker threads: {e}");
            return ExitCode::from(1);
        }
    }
    let outcome = match cli.command {
        Command::Simulate(args) => simulate(&args),
        Command::Resonance(args) => resonance(&args),
        Command::Sweep(args) => sweep(&args),
        Command::Merge(args) => merge(&args),
        Command::Design(args) => design(&args),
        Command::Wear(args) => wear(&args),
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

/// Observer of a command-line run: the optional time series, the optional trace of the
/// figures and the optional progress bar.
struct CliObserver {
    series: Option<TimeseriesWriter<BufWriter<File>>>,
    trace: Option<Trace>,
    bar: Option<ProgressBar>,
}

impl Observer for CliObserver {
    fn wants_every_interval(&self) -> bool {
        self.series.is_some()
    }

    #[inline]
    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        if let Some(t) = &mut self.trace {
            t.interval(r)?;
        }
        match &mut self.series {
            Some(s) => s.interval(r),
            None => Ok(()),
        }
    }

    fn block(&mut self, r: &IntervalRecord<'_>, n: u64) -> Result<(), RunError> {
        match &mut self.trace {
            Some(t) => t.block(r, n),
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
    Some(styled_bar(
        intervals,
        "simulating [{bar:40}] {percent:>3} % ({human_pos}/{human_len} intervals, {eta} left)",
    ))
}

/// A progress bar of `len` steps drawn with the indicatif `template`.
fn styled_bar(len: u64, template: &str) -> ProgressBar {
    let bar = ProgressBar::new(len);
    let style = ProgressStyle::with_template(template)
        .map(|s| s.progress_chars("=> "))
        .unwrap_or_else(|_| ProgressStyle::default_bar());
    bar.set_style(style);
    bar
}

/// Says on standard error where a report folder was written (unless quiet).
fn report_note(files: &[PathBuf], dir: &Path, quiet: bool) {
    if !quiet {
        eprintln!(
            "report: {} and {} figure files written to {}",
            html::HTML_FILE,
            files.len().saturating_sub(1),
            dir.display()
        );
    }
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
    let sim = &study.plan;

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
    let mut both = Both(
        CliObserver {
            series,
            trace: args.report.as_ref().map(|_| Trace::new(&study)),
            bar: progress_bar(sim.intervals, args.quiet),
        },
        WearObserver::new(&study),
    );
    let result = study.run(&mut both);
    let Both(mut observer, wear_log) = both;
    if let Some(bar) = &observer.bar {
        bar.finish_and_clear();
    }
    let result = result.map_err(|e| Failure::simulation(e, &file))?;
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

    let assessment = bankstep::analysis::assess(&study, &result);
    let opts = PlanOptions {
        alternatives: args.full_wear_plan,
        ..PlanOptions::default()
    };
    let plan = maintenance::plan_from(&study, &result, wear_log.log(), &opts)
        .map_err(|e| Failure::simulation(e, &file))?;
    let ctx = ReportContext::new(&study, &result, &assessment).with_wear_plan(&plan);
    if let (Some(mut trace), Some(dir)) = (observer.trace.take(), &args.report) {
        trace.finish();
        let files = html::write_report_dir(&ctx, &trace, dir).map_err(|e| {
            Failure::report(e, || {
                format!("cannot write the report in {}", dir.display())
            })
        })?;
        report_note(&files, dir, args.quiet);
    }
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
    if args.wiring_check {
        let rows = bankstep::analysis::wiring::wiring_check(&study)
            .map_err(|e| Failure::simulation(e, &file))?;
        let what = || "cannot write the wiring check".to_string();
        let written = if json_to_stdout {
            bankstep::report::wiring::write_text(&study, &rows, &mut std::io::stderr().lock())
        } else {
            let mut out = std::io::stdout().lock();
            std::io::Write::write_all(&mut out, b"\n")
                .and_then(|_| bankstep::report::wiring::write_text(&study, &rows, &mut out))
        };
        written.with_context(what).map_err(Failure::run)?;
    }
    Ok(())
}

/// Writes one output of the resonance command to FILE or standard output (`-`).
/// A file a command may write: where (`-`: standard output), what it is, and its writer.
type FileOutput<'a> = (
    Option<&'a Path>,
    &'a str,
    &'a dyn Fn(&mut dyn std::io::Write) -> Result<(), ReportError>,
);

/// Writes the files asked for, then the text report (what it is and its writer) on
/// standard output unless one of the files went there.
fn write_outputs(files: &[FileOutput<'_>], text: FileText<'_>, quiet: bool) -> Result<(), Failure> {
    let mut to_stdout = false;
    for (path, what, write) in files {
        if let Some(path) = path {
            to_stdout |= is_stdout(path);
            write_output(path, what, quiet, |out| write(out))?;
        }
    }
    if !to_stdout {
        write_output(Path::new("-"), text.0, true, |out| (text.1)(out))?;
    }
    Ok(())
}

/// The text report of a command: what it is and its writer.
type FileText<'a> = (
    &'a str,
    &'a dyn Fn(&mut dyn std::io::Write) -> Result<(), ReportError>,
);

fn write_output(
    path: &Path,
    what: &str,
    quiet: bool,
    write: impl FnOnce(&mut dyn std::io::Write) -> Result<(), ReportError>,
) -> Result<(), Failure> {
    let text = || format!("cannot write the {what} {}", path.display());
    if is_stdout(path) {
        let stdout = std::io::stdout();
        let mut out = stdout.lock();
        return write(&mut out).map_err(|e| Failure::report(e, text));
    }
    let f = File::create(path)
        .with_context(text)
        .map_err(Failure::run)?;
    let mut out = BufWriter::new(f);
    write(&mut out).map_err(|e| Failure::report(e, text))?;
    if !quiet {
        eprintln!("{what} written to {}", path.display());
    }
    Ok(())
}

/// The scan grid of `--max-order` and `--resolution`, checked against the ranges their
/// help states: the highest order more than 1 and at most 200; the spacing 0.0001 to 1
/// orders and at most half of (highest order − 1).
fn scan_grid(max_order: f64, resolution: f64) -> Result<ScanGrid, anyhow::Error> {
    if !(max_order.is_finite() && max_order > 1.0 && max_order <= 200.0) {
        anyhow::bail!("--max-order {max_order}: allowed more than 1 and at most 200");
    }
    let top = ((max_order - 1.0) / 2.0).min(1.0);
    if !(resolution.is_finite() && (1e-4..=top).contains(&resolution)) {
        anyhow::bail!(
            "--resolution {resolution}: allowed 0.0001 to 1 orders, and at most half of \
             (--max-order − 1), so 0.0001 to {top} here"
        );
    }
    let grid = ScanGrid {
        to: max_order,
        step: resolution,
        ..ScanGrid::default()
    };
    grid.check()
        .map_err(|m| anyhow::anyhow!("--max-order/--resolution: {m}"))?;
    Ok(grid)
}

fn resonance(args: &ResonanceArgs) -> Result<(), Failure> {
    let file = args.scenario.display().to_string();
    let scenario = Scenario::from_file(&args.scenario)
        .context("cannot load the scenario")
        .map_err(Failure::input)?;
    let grid = scan_grid(args.max_order, args.resolution).map_err(Failure::input)?;
    let mut detunings = Vec::with_capacity(args.detuning.len());
    for &p in &args.detuning {
        if !(p.is_finite() && p > 0.0 && p <= 20.0) {
            return Err(Failure::input(anyhow::anyhow!(
                "--detuning {p}: each ratio must be more than 0 and at most 20 %"
            )));
        }
        detunings.push(p / 100.0);
    }
    let model = scenario.harmonic_model();
    let fixed = BankState::select(&scenario.steps, |s| s.fixed);
    let switched = model.all_mask().minus(fixed);
    let mut run_s = None;
    let mut profile_sha256: Option<String> = None;
    let selection = match args.states.trim() {
        "all" => Selection::All,
        "reached" => {
            let study = Study::prepare(scenario.clone())
                .with_context(|| format!("cannot prepare the study of {file}"))
                .map_err(Failure::input)?;
            let result = study
                .run(&mut bankstep::engine::Quiet)
                .map_err(|e| Failure::simulation(e, &file))?;
            run_s = Some(result.metrics.run.duration_s);
            profile_sha256 = study.profile.sha256().map(str::to_string);
            Selection::Masks(
                result
                    .metrics
                    .states
                    .iter()
                    .map(|s| (s.mask, Some(s.time_s)))
                    .collect(),
            )
        }
        list => Selection::Masks(
            survey::parse_states(list, scenario.steps.len(), fixed)
                .map_err(|m| Failure::input(anyhow::anyhow!("--states: {m}")))?
                .into_iter()
                .map(|m| (m, None))
                .collect(),
        ),
    };
    let sv = Survey::build(&model, fixed, switched, &selection, grid, &detunings)
        .map_err(|m| Failure::input(anyhow::anyhow!("--states: {m}")))?;
    let ctx = ResonanceContext {
        scenario: &scenario,
        survey: &sv,
        run_s,
        profile_sha256: profile_sha256.as_deref(),
        curves: args.curves,
    };
    write_outputs(
        &[
            (args.csv.as_deref(), "impedance curves (CSV)", &|out| {
                resonance_report::write_csv(&ctx, out)
            }),
            (args.json.as_deref(), "resonance scan (JSON)", &|out| {
                resonance_report::write_json(&ctx, out)
            }),
        ],
        ("tables", &|out| resonance_report::write_text(&ctx, out)),
        args.quiet,
    )
}

/// A sweep error with its exit code: a failed run as a run failure (1, or 2 for a profile
/// defect met while streaming), everything else as bad input (2).
fn sweep_failure(e: SweepError) -> Failure {
    match e {
        SweepError::Run {
            source: RunError::Config(_),
            ..
        } => Failure::run(anyhow::anyhow!("{e}")),
        e => Failure::input(anyhow::Error::new(e)),
    }
}

/// A progress bar over the runs of a sweep, on a terminal.
fn sweep_bar(runs: usize, quiet: bool) -> Option<ProgressBar> {
    if quiet || !std::io::stderr().is_terminal() {
        return None;
    }
    Some(styled_bar(
        runs as u64,
        "sweeping [{bar:40}] {pos}/{len} runs ({per_sec}, {eta} left)",
    ))
}

fn sweep(args: &SweepArgs) -> Result<(), Failure> {
    let mut spec = SweepSpec {
        variations: Vec::new(),
        seeds: args.seeds,
    };
    for v in &args.vary {
        spec.variations.push(
            Variation::parse(v)
                .context("--vary")
                .map_err(Failure::input)?,
        );
    }
    if let Some(g) = &args.grid {
        let text = std::fs::read_to_string(g)
            .with_context(|| format!("cannot read the grid file {}", g.display()))
            .map_err(Failure::input)?;
        spec.add_grid(&text, &g.display().to_string())
            .map_err(|e| Failure::input(anyhow::Error::new(e)))?;
    }
    if spec.variations.is_empty() {
        // Nothing given: the usual controller settings around the scenario's own.
        let sc = Scenario::from_file(&args.scenario)
            .map_err(|e| Failure::input(anyhow::Error::new(e)))?;
        let usual = SweepSpec::usual_controller_settings(&sc);
        spec.variations = usual.variations;
    }
    let shard = match &args.shard {
        Some(s) => Some(
            s.parse::<Shard>()
                .map_err(|e| Failure::input(anyhow::Error::new(e)))?,
        ),
        None => None,
    };
    let sw = Sweep::from_file(&args.scenario, &spec, args.front).map_err(sweep_failure)?;
    let runs = match shard {
        Some(sh) => sh.runs(sw.run_count()).len(),
        None => sw.run_count(),
    };
    if !args.quiet {
        eprintln!(
            "{} settings x {} seed(s) = {} runs{}",
            sw.setting_count(),
            sw.seeds,
            sw.run_count(),
            shard.map_or(String::new(), |s| format!(
                "; shard {s} runs {runs} of them"
            ))
        );
    }
    let bar = sweep_bar(runs, args.quiet);
    let progress = |done: u64, _total: u64| {
        if let Some(b) = &bar {
            b.set_position(done);
        }
    };
    if let Some(sh) = shard {
        let file = sw.run_shard(sh, &progress);
        if let Some(b) = &bar {
            b.finish_and_clear();
        }
        let file = file.map_err(sweep_failure)?;
        let path = args.json.as_deref().unwrap_or(Path::new("-"));
        return write_output(path, "shard file (JSON)", args.quiet, |out| {
            sweep_report::write_shard(&file, out)
        });
    }
    let outcome = sw.run_all(&progress);
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let outcome = outcome.map_err(sweep_failure)?;
    write_sweep_outputs(
        &outcome,
        args.csv.as_deref(),
        args.json.as_deref(),
        args.report.as_deref(),
        args.quiet,
    )
}

/// Writes the summary (unless an output goes to standard output), the CSV, the JSON and
/// the report folder.
fn write_sweep_outputs(
    o: &Outcome,
    csv: Option<&Path>,
    json: Option<&Path>,
    report: Option<&Path>,
    quiet: bool,
) -> Result<(), Failure> {
    if let Some(dir) = report {
        let files = html_sweep::write_report_dir(o, dir).map_err(|e| {
            Failure::report(e, || {
                format!("cannot write the report in {}", dir.display())
            })
        })?;
        report_note(&files, dir, quiet);
    }
    write_outputs(
        &[
            (csv, "sweep rows (CSV)", &|out| {
                sweep_report::write_csv(o, out)
            }),
            (json, "sweep report (JSON)", &|out| {
                sweep_report::write_json_report(o, out)
            }),
        ],
        ("summary", &|out| sweep_report::write_summary(o, out)),
        quiet,
    )
}

fn merge(args: &MergeArgs) -> Result<(), Failure> {
    let mut files = Vec::with_capacity(args.shards.len());
    let mut names = Vec::with_capacity(args.shards.len());
    for p in &args.shards {
        let bytes = std::fs::read(p)
            .with_context(|| format!("cannot read the shard file {}", p.display()))
            .map_err(Failure::input)?;
        let f = sweep_report::read_shard(&bytes)
            .with_context(|| format!("{} is not a shard file of bankstep sweep", p.display()))
            .map_err(Failure::input)?;
        files.push(f);
        names.push(p.display().to_string());
    }
    let outcome =
        bankstep::sweep::merge(files, &names).map_err(|e| Failure::input(anyhow::Error::new(e)))?;
    write_sweep_outputs(
        &outcome,
        args.csv.as_deref(),
        args.json.as_deref(),
        args.report.as_deref(),
        args.quiet,
    )
}

/// A progress bar for the stages of a design, on standard error when it is a terminal.
fn design_bar(quiet: bool) -> Option<ProgressBar> {
    if quiet || !std::io::stderr().is_terminal() {
        return None;
    }
    Some(styled_bar(
        1,
        "{msg:>22} [{bar:40}] {percent:>3} % ({eta} left)",
    ))
}

fn design(args: &DesignArgs) -> Result<(), Failure> {
    use bankstep::design::{DesignOptions, Stage};
    let file = args.scenario.display().to_string();
    let text = std::fs::read_to_string(&args.scenario)
        .with_context(|| format!("cannot read the scenario {file}"))
        .map_err(Failure::input)?;
    let opts = DesignOptions {
        coverage: args.coverage,
        sizes_kvar: args.sizes.clone(),
        max_steps: args.max_steps,
        detuning: args.detuning.iter().map(|p| p / 100.0).collect(),
        max_layouts: args.max_layouts,
    }
    .checked()
    .map_err(|e| Failure::input(anyhow::anyhow!("--{}", option_message(&e))))?;
    let bar = design_bar(args.quiet);
    let progress = |stage: Stage, done: u64, total: u64| {
        if let Some(b) = &bar {
            let msg = match stage {
                Stage::Need => "reading the load",
                Stage::Candidates => "running candidates",
                Stage::Checks => "checking the best",
            };
            b.set_message(msg);
            b.set_length(total.max(1));
            b.set_position(done);
        }
    };
    let result = bankstep::design::design(&text, &args.scenario, opts, &progress);
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let d = result.map_err(|e| {
        use bankstep::design::DesignError as E;
        use bankstep::sweep::SweepError as S;
        let code = match &e {
            E::Options(_) | E::Scenario(_) => 2,
            E::Run(RunError::Profile(_)) => 2,
            E::Sweep(S::Scenario(_) | S::Spec { .. }) => 2,
            _ => 1,
        };
        Failure {
            code,
            error: anyhow::Error::new(e).context(format!("cannot design a bank for {file}")),
        }
    })?;
    if let Some(dir) = &args.report {
        let files = html_design::write_report_dir(&d, dir).map_err(|e| {
            Failure::report(e, || {
                format!("cannot write the report in {}", dir.display())
            })
        })?;
        report_note(&files, dir, args.quiet);
    }
    write_outputs(
        &[
            (args.json.as_deref(), "design (JSON)", &|out| {
                design_report::write_json(&d, out)
            }),
            (args.csv.as_deref(), "candidates (CSV)", &|out| {
                design_report::write_csv(&d, out)
            }),
        ],
        ("design report", &|out| design_report::write_text(&d, out)),
        args.quiet,
    )
}

/// The fault `--fail-kind`, `--fraction` and `--from-h` describe.
fn what_if(args: &WearArgs, steps: usize) -> Result<Option<WhatIf>, anyhow::Error> {
    let Some(step) = args.fail_step else {
        return Ok(None);
    };
    if step == 0 || step > steps {
        anyhow::bail!("--fail-step {step}: the bank has steps 1 to {steps}");
    }
    if !(args.from_h.is_finite() && (0.0..=1e7).contains(&args.from_h)) {
        anyhow::bail!("--from-h {}: allowed 0 to 10000000 h", args.from_h);
    }
    let kind = match args.fail_kind.as_str() {
        "open" => FaultKind::Open,
        "stuck-closed" => FaultKind::StuckClosed,
        "capacitance-loss" => match args.fraction {
            Some(x) if x > 0.0 && x < 1.0 => FaultKind::CapacitanceLoss(x),
            Some(x) => anyhow::bail!("--fraction {x}: allowed more than 0 and less than 1"),
            None => anyhow::bail!("--fail-kind capacitance-loss needs --fraction (0 to 1)"),
        },
        other => anyhow::bail!("--fail-kind {other}: write open, capacitance-loss or stuck-closed"),
    };
    if args.fraction.is_some() && !matches!(kind, FaultKind::CapacitanceLoss(_)) {
        anyhow::bail!("--fraction is only for --fail-kind capacitance-loss");
    }
    Ok(Some(WhatIf {
        step,
        fault: Fault {
            kind,
            from_s: args.from_h * 3600.0,
        },
    }))
}

fn wear(args: &WearArgs) -> Result<(), Failure> {
    let file = args.scenario.display().to_string();
    let scenario = Scenario::from_file(&args.scenario)
        .context("cannot load the scenario")
        .map_err(Failure::input)?;
    let what_if = what_if(args, scenario.steps.len()).map_err(Failure::input)?;
    let study = Study::prepare(scenario)
        .with_context(|| format!("cannot prepare the study of {file}"))
        .map_err(Failure::input)?;
    let opts = PlanOptions {
        what_if,
        alternatives: !args.quick,
    };
    let plan = maintenance::plan(&study, &opts).map_err(|e| Failure::simulation(e, &file))?;
    let sc = &study.scenario;
    if let Some(path) = &args.json {
        write_output(path, "wear plan", args.quiet, |out| {
            wear_report::write_json(out, sc, study.profile.sha256(), &plan)
        })?;
    }
    if !args.json.as_deref().is_some_and(is_stdout) {
        let stdout = std::io::stdout();
        let mut out = stdout.lock();
        wear_report::write_text(&mut out, sc, &plan, &opts)
            .map_err(|e| Failure::report(e, || "cannot write the wear plan".to_string()))?;
    }
    Ok(())
}

/// A design option error as the command line names it.
fn option_message(e: &bankstep::design::OptionError) -> String {
    use bankstep::design::OptionError as O;
    match e {
        O::Coverage(_) => format!("coverage: {e}"),
        O::Sizes(_) => format!("sizes: {e}"),
        O::MaxSteps(_) => format!("max-steps: {e}"),
        O::Detuning(_) => format!("detuning: {e}"),
        O::MaxLayouts => format!("max-layouts: {e}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn command_line_is_consistent() {
        Cli::command().debug_assert();
    }

    // The ranges the help of --max-order and --resolution states are the ones checked, and
    // the message names them.
    #[test]
    fn scan_grid_ranges_match_the_help() {
        assert!(scan_grid(50.0, 0.0001).is_ok());
        assert!(scan_grid(50.0, 1.0).is_ok());
        assert!(scan_grid(200.0, 0.01).is_ok());
        for (max_order, resolution) in [(50.0, 1.5), (50.0, 0.00005), (50.0, 0.0), (2.0, 0.6)] {
            let e = scan_grid(max_order, resolution).unwrap_err().to_string();
            assert!(
                e.contains("allowed 0.0001 to 1 orders, and at most half of (--max-order − 1)"),
                "{e}"
            );
        }
        assert!(scan_grid(2.0, 0.5).is_ok());
        let e = scan_grid(1.0, 0.01).unwrap_err().to_string();
        assert!(e.contains("more than 1 and at most 200"), "{e}");
        assert!(scan_grid(201.0, 0.01).is_err());
    }

    #[test]
    fn stdout_marker() {
        assert!(is_stdout(Path::new("-")));
        assert!(!is_stdout(Path::new("out.json")));
    }
}

//! The scenario file: one TOML document describing a study (supply, bank steps,
//! controller settings, load source, harmonic spectrum, run length and time step, seed,
//! report options), its defaults, and its validation.
//!
//! Parsing is serde with unknown keys refused; validation then checks every value against
//! its allowed range and reports the dotted key, the value, the range and the unit. The
//! result is a [`Scenario`]: validated settings, ready for [`crate::study`] to attach a
//! load profile and build a [`crate::engine::Simulation`].

use crate::bank::{Fault, FaultKind, StepPhase, StepSpec, MAX_STEPS};
use crate::controller::{ControllerParams, Measurement, OrderingKind, ProtectionParams};
use crate::error::{FieldError, ScenarioError};
use crate::harmonics::limits::{CapacitorLimits, VoltageLimits};
use crate::harmonics::{HarmonicOptions, Spectrum, SpectrumPreset};
use crate::pf::PfTarget;
use crate::profile::csv::CsvOptions;
use crate::profile::synthetic::SyntheticConfig;
use crate::profile::{DefectPolicies, DefectPolicy};
use crate::supply::{SupplyParams, Transformer};
use crate::timebase::parse_start;
use chrono::NaiveDateTime;
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// The file as written (all optional; defaults applied in validation).
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioFile {
    /// Name and story of the study.
    #[serde(default)]
    pub study: StudySection,
    /// Supply at the bus.
    #[serde(default)]
    pub supply: SupplySection,
    /// Bank steps, in number order.
    #[serde(default)]
    pub steps: Vec<StepSection>,
    /// Controller settings.
    #[serde(default)]
    pub controller: ControllerSection,
    /// Load profile source.
    #[serde(default)]
    pub load: LoadSection,
    /// Harmonic spectrum of the load.
    #[serde(default)]
    pub harmonics: HarmonicsSection,
    /// Run length, step, calendar and seed.
    #[serde(default)]
    pub run: RunSection,
    /// Report options.
    #[serde(default)]
    pub report: ReportSection,
}

/// `[study]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StudySection {
    /// Name of the site or study.
    pub name: Option<String>,
    /// A line or two on the site.
    pub description: Option<String>,
}

/// `[supply]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SupplySection {
    /// U_n line-to-line, V. Default 400.
    pub nominal_voltage_v: Option<f64>,
    /// 50 or 60 Hz. Default 50.
    pub frequency_hz: Option<f64>,
    /// No-load bus voltage, per unit of U_n. Default 1.0.
    pub source_voltage_pu: Option<f64>,
    /// Grid short-circuit power at the transformer primary, MVA. Default: infinite.
    pub grid_short_circuit_mva: Option<f64>,
    /// Grid X/R. Default 10.
    pub grid_x_over_r: Option<f64>,
    /// The transformer feeding the bus. Default: none.
    pub transformer: Option<TransformerSection>,
}

/// `[supply.transformer]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TransformerSection {
    /// Rated power S_T, kVA.
    pub rated_kva: f64,
    /// Short-circuit impedance u_k, %. Default 6 %.
    pub impedance_pct: Option<f64>,
    /// X/R. Default 8.
    pub x_over_r: Option<f64>,
}

/// One `[[steps]]` entry.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StepSection {
    /// Effective output at U_n, kvar.
    pub kvar: f64,
    /// `abc` (three-phase, default) or `a`, `b`, `c` (single-phase, line to neutral).
    pub phase: Option<String>,
    /// Fixed step (on from the start, never switched). Default false.
    pub fixed: Option<bool>,
    /// Detuning reactor ratio p, %. Default: none (plain capacitor).
    pub detuning_pct: Option<f64>,
    /// Rated electrical life of the contactor, operations. Default 100 000.
    pub rated_operations: Option<f64>,
    /// Rated voltage of the step's capacitors, V (line to line; line to neutral for a
    /// single-phase step). Default: U_n for a plain step; for a detuned step the smallest
    /// common rating at or above U/(1 − p), e.g. 440 V for 7 % at 400 V.
    pub capacitor_rated_voltage_v: Option<f64>,
    /// Repeat this step this many times (consecutive numbers). Default 1.
    pub count: Option<u32>,
    /// Fault injection.
    pub fault: Option<FaultSection>,
}

/// `[steps.fault]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FaultSection {
    /// `open` (delivers nothing) or `capacitance-loss`.
    pub kind: String,
    /// Fraction of capacitance lost, for `capacitance-loss` (0 < f < 1).
    pub fraction: Option<f64>,
    /// Start, seconds after the start of the run. Default 0.
    pub from_s: Option<f64>,
    /// Start, hours after the start of the run (instead of `from_s`).
    pub from_h: Option<f64>,
}

/// `[controller]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ControllerSection {
    /// Target PF, e.g. `"0.95 lag"`, `"0.98 lead"`, `1.0`. Default 0.95 lag.
    pub target_pf: Option<PfTarget>,
    /// Dead band half-width, kvar.
    pub dead_band_kvar: Option<f64>,
    /// Dead band half-width as a fraction of the smallest switched step. Default 0.65.
    pub dead_band_fraction: Option<f64>,
    /// Switching delay, s. Default 30.
    pub switching_delay_s: Option<f64>,
    /// Disconnect delay, s. Default: the switching delay.
    pub disconnect_delay_s: Option<f64>,
    /// Discharge time, s. Default 60.
    pub discharge_time_s: Option<f64>,
    /// Time the steps' discharge devices need to bring a capacitor down to a voltage at
    /// which it may be reclosed (maker's figure), s. Optional; only used to check the
    /// discharge time.
    pub capacitor_discharge_s: Option<f64>,
    /// `sequential` (default), `rotating` or `best-fit`.
    pub ordering: Option<OrderingKind>,
    /// `three-phase` (default) or `single-phase`.
    pub measurement: Option<String>,
    /// Phase of a single-phase measurement: `a` (default), `b` or `c`.
    pub measurement_phase: Option<String>,
    /// Averaging window, s. Default 0 (none).
    pub averaging_s: Option<f64>,
    /// Protections.
    #[serde(default)]
    pub protection: ProtectionSection,
}

/// `[controller.protection]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProtectionSection {
    /// Overvoltage level, line-to-line, V.
    pub overvoltage_v: Option<f64>,
    /// Overvoltage delay, s. Default 5.
    pub overvoltage_delay_s: Option<f64>,
    /// Loss-of-current level, A.
    pub min_current_a: Option<f64>,
    /// Loss-of-current delay, s. Default 5.
    pub min_current_delay_s: Option<f64>,
    /// Open all steps on export. Default false.
    pub trip_on_export: Option<bool>,
    /// Export delay, s. Default 5.
    pub export_delay_s: Option<f64>,
    /// Voltage THD limit, %.
    pub thd_limit_pct: Option<f64>,
    /// THD delay, s. Default 60.
    pub thd_delay_s: Option<f64>,
    /// Cap on ordinary operations per hour.
    pub max_operations_per_hour: Option<u32>,
}

/// `[load]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LoadSection {
    /// CSV profile, relative to the scenario file.
    pub csv: Option<PathBuf>,
    /// What to do with every kind of defective CSV row at once: `stop`, `skip`, `hold` or
    /// `interpolate` (kinds that cannot hold or interpolate skip instead; gaps keep their
    /// own policy). Default: none, so each kind takes its default (see `[load.defects]`).
    pub on_defect: Option<DefectPolicy>,
    /// `[load.defects]`: a policy per kind of defect, winning over `on_defect`. Defaults:
    /// `malformed`, `not_finite`, `short_row`, `conflicting_duplicate`, `backwards` stop;
    /// `duplicate` and `truncated_last_line` skip; `gap` holds.
    pub defects: Option<DefectPolicies>,
    /// A spacing longer than this many median spacings is a gap. Default 3 (≥ 1).
    pub gap_factor: Option<f64>,
    /// Column delimiter of the CSV: `","` (default), `";"`, `"\t"` (or `"tab"`), `"|"`.
    pub delimiter: Option<String>,
    /// Decimal mark of the CSV's numbers: `"."` (default) or `","`.
    pub decimal: Option<String>,
    /// Synthetic generator.
    pub synthetic: Option<SyntheticConfig>,
}

impl LoadSection {
    /// The CSV reading options these keys give, validated; errors name the key.
    pub fn csv_options(&self) -> Result<CsvOptions, FieldError> {
        let d = CsvOptions::default();
        let one_char = |key: &str, v: &Option<String>, default: char| match v.as_deref() {
            None => Ok(default),
            Some("tab") | Some("\\t") => Ok('\t'),
            Some(text) => {
                let mut chars = text.chars();
                match (chars.next(), chars.next()) {
                    (Some(c), None) => Ok(c),
                    _ => Err(FieldError::new(
                        key,
                        format!("`{text}` is not a single character"),
                    )),
                }
            }
        };
        let options = CsvOptions {
            on_defect: self.on_defect,
            defects: self.defects.unwrap_or_default(),
            gap_factor: self.gap_factor.unwrap_or(d.gap_factor),
            delimiter: one_char("load.delimiter", &self.delimiter, d.delimiter)?,
            decimal: one_char("load.decimal", &self.decimal, d.decimal)?,
        };
        options
            .check()
            .map_err(|e| FieldError::new(format!("load.{}", e.key), e.message))?;
        Ok(options)
    }

    /// The first CSV-only key that is set, for a scenario without a CSV profile.
    fn csv_only_key(&self) -> Option<&'static str> {
        [
            ("load.on_defect", self.on_defect.is_some()),
            ("load.defects", self.defects.is_some()),
            ("load.gap_factor", self.gap_factor.is_some()),
            ("load.delimiter", self.delimiter.is_some()),
            ("load.decimal", self.decimal.is_some()),
        ]
        .into_iter()
        .find(|(_, set)| *set)
        .map(|(k, _)| k)
    }
}

/// `[harmonics]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HarmonicsSection {
    /// Named spectrum: `six-pulse`, `twelve-pulse` or `single-phase-electronic`.
    pub preset: Option<SpectrumPreset>,
    /// Extra or overriding orders: `[[5, 20.0], [7, 14.3]]` (order, % of fundamental).
    pub orders: Option<Vec<(f64, f64)>>,
    /// Rating of the harmonic-producing load, kVA.
    pub reference_kva: Option<f64>,
    /// Tolerance for resonance warnings, orders. Default 0.5.
    pub resonance_tolerance_orders: Option<f64>,
    /// Harmonic-voltage limits: `ieee-519` (IEEE Std 519-2014 Table 1, default) or
    /// `en-50160`.
    pub voltage_limits: Option<VoltageLimits>,
    /// Capacitor limits: `iec-60831-1` (default) or `ieee-18`.
    pub capacitor_limits: Option<CapacitorLimits>,
    /// Linear resistive load at the bus that damps resonance, kW. Default 0 (none).
    pub damping_kw: Option<f64>,
}

/// `[run]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RunSection {
    /// Run length, s.
    pub duration_s: Option<f64>,
    /// Run length, h.
    pub duration_h: Option<f64>,
    /// Run length, days.
    pub duration_days: Option<f64>,
    /// Time step Δt, s. Default 1.
    pub time_step_s: Option<f64>,
    /// Calendar date-time of elapsed time 0. Default 2026-01-05T00:00:00 (a Monday).
    pub start: Option<String>,
    /// Seed of the synthetic generator. Default 1.
    pub seed: Option<u64>,
}

/// `[report]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReportSection {
    /// `month` (calendar months, default) or `run` (the whole run).
    pub billing_window: Option<String>,
    /// Overcorrection threshold, kvar. Default: the smallest switched step.
    pub overcorrection_threshold_kvar: Option<f64>,
    /// Shortest overcorrection episode, s. Default 60.
    pub overcorrection_min_s: Option<f64>,
    /// Hunting window, s. Default 10 × the switching delay.
    pub hunting_window_s: Option<f64>,
}

/// Where the load comes from.
#[derive(Debug, Clone)]
pub enum LoadSpec {
    /// A CSV profile (absolute or relative to the working directory, already resolved
    /// against the scenario's folder).
    Csv {
        /// The file.
        path: PathBuf,
        /// How to read it: delimiter, decimal mark, defect policies, gap factor.
        options: CsvOptions,
    },
    /// The synthetic generator.
    Synthetic(SyntheticConfig),
}

/// How billing windows are cut.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BillingWindows {
    /// Calendar months (for runs shorter than a month, the whole run).
    Month,
    /// The whole run.
    Run,
}

/// A validated scenario.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// The file it came from.
    pub path: PathBuf,
    /// Study name (the file stem if none).
    pub name: String,
    /// Description, if any.
    pub description: Option<String>,
    /// Supply.
    pub supply: SupplyParams,
    /// Steps in number order.
    pub steps: Vec<StepSpec>,
    /// Controller settings.
    pub controller: ControllerParams,
    /// Load source.
    pub load: LoadSpec,
    /// Load spectrum.
    pub spectrum: Spectrum,
    /// Resonance warning tolerance, orders.
    pub resonance_tolerance: f64,
    /// Harmonic limits and damping.
    pub harmonics: HarmonicOptions,
    /// Requested run length, s (`None`: the whole CSV profile, or 7 days synthetic).
    pub duration_s: Option<f64>,
    /// Time step, s.
    pub dt_s: f64,
    /// Calendar of elapsed time 0.
    pub start: NaiveDateTime,
    /// Seed.
    pub seed: u64,
    /// Billing windows.
    pub billing: BillingWindows,
    /// Overcorrection threshold, kvar.
    pub overcorrection_threshold_kvar: f64,
    /// Minimum episode, s.
    pub overcorrection_min_s: f64,
    /// Hunting window, s.
    pub hunting_window_s: f64,
    /// Discharge-device time of the capacitors, s, if given.
    pub capacitor_discharge_s: Option<f64>,
    /// SHA-256 of the scenario text, lowercase hex, for provenance.
    pub content_sha256: String,
}

/// Lowercase hex SHA-256 of some bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    hex_lower(&Sha256::digest(bytes))
}

/// Lowercase hex of a digest.
pub fn hex_lower(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// A value with its unit, e.g. `400 V`, or the bare value for a ratio.
fn with_unit(x: f64, unit: &str) -> String {
    if unit.is_empty() {
        format!("{x}")
    } else {
        format!("{x} {unit}")
    }
}

/// Checks `lo ≤ x ≤ hi` (and finiteness), naming key, range and unit.
fn range(key: &str, x: f64, lo: f64, hi: f64, unit: &str) -> Result<f64, FieldError> {
    if x.is_finite() && x >= lo && x <= hi {
        Ok(x)
    } else {
        Err(FieldError::new(
            key,
            format!(
                "{} is outside the allowed range {lo} to {}",
                with_unit(x, unit),
                with_unit(hi, unit)
            ),
        ))
    }
}

/// Checks `lo < x ≤ hi`.
fn range_open(key: &str, x: f64, lo: f64, hi: f64, unit: &str) -> Result<f64, FieldError> {
    if x.is_finite() && x > lo && x <= hi {
        Ok(x)
    } else {
        Err(FieldError::new(
            key,
            format!(
                "{} is outside the allowed range: more than {lo} and at most {}",
                with_unit(x, unit),
                with_unit(hi, unit)
            ),
        ))
    }
}

fn phase_index(key: &str, s: &str) -> Result<usize, FieldError> {
    match s.trim().to_ascii_lowercase().as_str() {
        "a" | "l1" => Ok(0),
        "b" | "l2" => Ok(1),
        "c" | "l3" => Ok(2),
        other => Err(FieldError::new(
            key,
            format!("`{other}` is not a phase; write `a`, `b` or `c`"),
        )),
    }
}

impl Scenario {
    /// Reads, parses and validates a scenario file.
    pub fn from_file(path: &Path) -> Result<Scenario, ScenarioError> {
        let text = std::fs::read_to_string(path).map_err(|source| ScenarioError::Io {
            file: path.to_path_buf(),
            source,
        })?;
        Self::from_str(&text, path)
    }

    /// Parses and validates scenario text; `path` names it in errors and anchors a
    /// relative CSV path.
    pub fn from_str(text: &str, path: &Path) -> Result<Scenario, ScenarioError> {
        let file: ScenarioFile = toml::from_str(text).map_err(|e| ScenarioError::Parse {
            file: path.to_path_buf(),
            message: e.to_string().trim_end().to_string(),
        })?;
        let mut sc = Self::validate(file, path).map_err(|e| ScenarioError::from_field(path, e))?;
        sc.content_sha256 = sha256_hex(text.as_bytes());
        Ok(sc)
    }

    fn validate(f: ScenarioFile, path: &Path) -> Result<Scenario, FieldError> {
        let s = &f.supply;
        let u_n = range(
            "supply.nominal_voltage_v",
            s.nominal_voltage_v.unwrap_or(400.0),
            100.0,
            36_000.0,
            "V",
        )?;
        let freq = s.frequency_hz.unwrap_or(50.0);
        if freq != 50.0 && freq != 60.0 {
            return Err(FieldError::new(
                "supply.frequency_hz",
                format!("{freq} Hz: allowed values are 50 and 60 Hz"),
            ));
        }
        let transformer = match &s.transformer {
            None => None,
            Some(t) => Some(Transformer {
                rated_kva: range(
                    "supply.transformer.rated_kva",
                    t.rated_kva,
                    10.0,
                    100_000.0,
                    "kVA",
                )?,
                impedance_pct: range(
                    "supply.transformer.impedance_pct",
                    t.impedance_pct.unwrap_or(6.0),
                    1.0,
                    25.0,
                    "%",
                )?,
                x_over_r: range(
                    "supply.transformer.x_over_r",
                    t.x_over_r.unwrap_or(8.0),
                    0.5,
                    100.0,
                    "",
                )?,
            }),
        };
        let grid = match s.grid_short_circuit_mva {
            None => None,
            Some(g) => {
                Some(range("supply.grid_short_circuit_mva", g, 1.0, 100_000.0, "MVA")? * 1e3)
            }
        };
        let supply = SupplyParams {
            nominal_voltage_v: u_n,
            frequency_hz: freq,
            transformer,
            grid_short_circuit_kva: grid,
            grid_x_over_r: range(
                "supply.grid_x_over_r",
                s.grid_x_over_r.unwrap_or(10.0),
                0.5,
                100.0,
                "",
            )?,
            source_voltage_pu: range(
                "supply.source_voltage_pu",
                s.source_voltage_pu.unwrap_or(1.0),
                0.8,
                1.2,
                "pu",
            )?,
        };

        let mut steps = Vec::new();
        for (i, st) in f.steps.iter().enumerate() {
            let key = |k: &str| format!("steps[{i}].{k}");
            let kvar = range_open(&key("kvar"), st.kvar, 0.0, 100_000.0, "kvar")?;
            let phase = match st.phase.as_deref().map(str::trim) {
                None | Some("abc") | Some("ABC") | Some("3") => StepPhase::Three,
                Some(p) => StepPhase::Single(phase_index(&key("phase"), p).map_err(|e| {
                    FieldError::new(
                        e.key,
                        format!("{}; or `abc` for a three-phase step", e.message),
                    )
                })?),
            };
            let detuning = match st.detuning_pct {
                None => None,
                Some(p) => Some(range_open(&key("detuning_pct"), p, 0.0, 20.0, "%")? / 100.0),
            };
            let rated_operations = range_open(
                &key("rated_operations"),
                st.rated_operations.unwrap_or(100_000.0),
                0.0,
                1e9,
                "operations",
            )?;
            let fault = match &st.fault {
                None => None,
                Some(fs) => {
                    let from = match (fs.from_s, fs.from_h) {
                        (Some(_), Some(_)) => {
                            return Err(FieldError::new(
                                key("fault"),
                                "give `from_s` or `from_h`, not both",
                            ))
                        }
                        (Some(x), None) => range(&key("fault.from_s"), x, 0.0, 1e10, "s")?,
                        (None, Some(h)) => range(&key("fault.from_h"), h, 0.0, 1e7, "h")? * 3600.0,
                        (None, None) => 0.0,
                    };
                    let kind = match fs.kind.as_str() {
                        "open" => FaultKind::Open,
                        "capacitance-loss" => {
                            let x = fs.fraction.ok_or_else(|| {
                                FieldError::new(key("fault.fraction"), "a `capacitance-loss` fault needs `fraction` (more than 0, less than 1)")
                            })?;
                            if !(x > 0.0 && x < 1.0) {
                                return Err(FieldError::new(key("fault.fraction"), format!("{x} is outside the allowed range: more than 0 and less than 1")));
                            }
                            FaultKind::CapacitanceLoss(x)
                        }
                        other => {
                            return Err(FieldError::new(
                                key("fault.kind"),
                                format!(
                                "`{other}` is not a fault kind; write `open` or `capacitance-loss`"
                            ),
                            ))
                        }
                    };
                    Some(Fault { kind, from_s: from })
                }
            };
            let u_conn = match phase {
                StepPhase::Three => u_n,
                StepPhase::Single(_) => u_n / 3f64.sqrt(),
            };
            let capacitor_rated_voltage_v = match st.capacitor_rated_voltage_v {
                None => None,
                Some(v) => Some(range(
                    &key("capacitor_rated_voltage_v"),
                    v,
                    (0.8 * u_conn).round(),
                    (3.0 * u_conn).round(),
                    "V",
                )?),
            };
            let count = st.count.unwrap_or(1);
            if count == 0 || count as usize > MAX_STEPS {
                return Err(FieldError::new(
                    key("count"),
                    format!("{count} is outside the allowed range 1 to {MAX_STEPS}"),
                ));
            }
            for _ in 0..count {
                steps.push(StepSpec {
                    kvar,
                    phase,
                    fixed: st.fixed.unwrap_or(false),
                    detuning,
                    rated_operations,
                    capacitor_rated_voltage_v,
                    fault,
                });
            }
        }
        if steps.is_empty() {
            return Err(FieldError::new(
                "steps",
                "the bank has no steps; add at least one `[[steps]]` entry with `kvar`",
            ));
        }
        if steps.len() > MAX_STEPS {
            return Err(FieldError::new(
                "steps",
                format!("{} steps; at most {MAX_STEPS} are supported", steps.len()),
            ));
        }
        let smallest = crate::bank::smallest_switched_kvar(&steps);

        let c = &f.controller;
        let target = c.target_pf.unwrap_or(PfTarget::lag(0.95));
        let dead_band_kvar = match (c.dead_band_kvar, c.dead_band_fraction) {
            (Some(_), Some(_)) => {
                return Err(FieldError::new(
                    "controller.dead_band_kvar",
                    "give `dead_band_kvar` or `dead_band_fraction`, not both",
                ))
            }
            (Some(b), None) => range("controller.dead_band_kvar", b, 0.0, 100_000.0, "kvar")?,
            (None, fr) => {
                range(
                    "controller.dead_band_fraction",
                    fr.unwrap_or(0.65),
                    0.0,
                    5.0,
                    "× smallest step",
                )? * smallest
            }
        };
        let connect_delay_s = range(
            "controller.switching_delay_s",
            c.switching_delay_s.unwrap_or(30.0),
            0.0,
            86_400.0,
            "s",
        )?;
        let disconnect_delay_s = range(
            "controller.disconnect_delay_s",
            c.disconnect_delay_s.unwrap_or(connect_delay_s),
            0.0,
            86_400.0,
            "s",
        )?;
        let discharge_time_s = range(
            "controller.discharge_time_s",
            c.discharge_time_s.unwrap_or(60.0),
            0.0,
            86_400.0,
            "s",
        )?;
        let measurement = match c.measurement.as_deref().unwrap_or("three-phase") {
            "three-phase" => {
                if c.measurement_phase.is_some() {
                    return Err(FieldError::new(
                        "controller.measurement_phase",
                        "only meaningful with measurement = \"single-phase\"",
                    ));
                }
                Measurement::ThreePhase
            }
            "single-phase" => Measurement::SinglePhase(phase_index(
                "controller.measurement_phase",
                c.measurement_phase.as_deref().unwrap_or("a"),
            )?),
            other => {
                return Err(FieldError::new(
                    "controller.measurement",
                    format!(
                    "`{other}` is not a measurement mode; write `three-phase` or `single-phase`"
                ),
                ))
            }
        };
        let averaging_s = range(
            "controller.averaging_s",
            c.averaging_s.unwrap_or(0.0),
            0.0,
            3600.0,
            "s",
        )?;
        let p = &c.protection;
        let pd = ProtectionParams::default();
        let delay = |k: &str, v: Option<f64>, d: f64| {
            range(
                &format!("controller.protection.{k}"),
                v.unwrap_or(d),
                0.0,
                86_400.0,
                "s",
            )
        };
        let protection = ProtectionParams {
            overvoltage_v: p
                .overvoltage_v
                .map(|v| {
                    range(
                        "controller.protection.overvoltage_v",
                        v,
                        u_n,
                        1.5 * u_n,
                        "V",
                    )
                })
                .transpose()?,
            overvoltage_delay_s: delay(
                "overvoltage_delay_s",
                p.overvoltage_delay_s,
                pd.overvoltage_delay_s,
            )?,
            min_current_a: p
                .min_current_a
                .map(|v| range("controller.protection.min_current_a", v, 0.0, 1e6, "A"))
                .transpose()?,
            min_current_delay_s: delay(
                "min_current_delay_s",
                p.min_current_delay_s,
                pd.min_current_delay_s,
            )?,
            trip_on_export: p.trip_on_export.unwrap_or(false),
            export_delay_s: delay("export_delay_s", p.export_delay_s, pd.export_delay_s)?,
            thd_limit_pct: p
                .thd_limit_pct
                .map(|v| range_open("controller.protection.thd_limit_pct", v, 0.0, 100.0, "%"))
                .transpose()?,
            thd_delay_s: delay("thd_delay_s", p.thd_delay_s, pd.thd_delay_s)?,
            max_operations_per_hour: match p.max_operations_per_hour {
                Some(0) => {
                    return Err(FieldError::new(
                        "controller.protection.max_operations_per_hour",
                        "0 is outside the allowed range 1 to 3600",
                    ))
                }
                Some(x) if x > 3600 => {
                    return Err(FieldError::new(
                        "controller.protection.max_operations_per_hour",
                        format!("{x} is outside the allowed range 1 to 3600"),
                    ))
                }
                x => x,
            },
        };
        let controller = ControllerParams {
            target,
            dead_band_kvar,
            connect_delay_s,
            disconnect_delay_s,
            discharge_time_s,
            ordering: c.ordering.unwrap_or_default(),
            measurement,
            averaging_s,
            protection,
        };

        let load =
            match (&f.load.csv, &f.load.synthetic) {
                (Some(_), Some(_)) => {
                    return Err(FieldError::new(
                        "load",
                        "give `csv` or `[load.synthetic]`, not both",
                    ))
                }
                (None, None) => return Err(FieldError::new(
                    "load",
                    "no load profile; give `csv = \"profile.csv\"` or a `[load.synthetic]` section",
                )),
                (Some(csv), None) => {
                    let base = path.parent().unwrap_or(Path::new(""));
                    LoadSpec::Csv {
                        path: if csv.is_absolute() {
                            csv.clone()
                        } else {
                            base.join(csv)
                        },
                        options: f.load.csv_options()?,
                    }
                }
                (None, Some(cfg)) => {
                    if let Some(key) = f.load.csv_only_key() {
                        return Err(FieldError::new(key, "only meaningful with a CSV profile"));
                    }
                    cfg.validate("load.synthetic")?;
                    LoadSpec::Synthetic(cfg.clone())
                }
            };

        let h = &f.harmonics;
        let mut orders = h.preset.map(SpectrumPreset::orders).unwrap_or_default();
        for (j, &(o, pct)) in h.orders.iter().flatten().enumerate() {
            let key = format!("harmonics.orders[{j}]");
            range(&key, o, 1.5, 100.0, "(harmonic order)")?;
            range(&key, pct, 0.0, 200.0, "% of fundamental")?;
            if let Some(x) = orders.iter_mut().find(|x| x.0 == o) {
                x.1 = pct;
            } else {
                orders.push((o, pct));
            }
        }
        orders.sort_by(|a, b| a.0.total_cmp(&b.0));
        let reference_kva = match h.reference_kva {
            Some(r) => range_open("harmonics.reference_kva", r, 0.0, 1e6, "kVA")?,
            None if !orders.is_empty() => {
                return Err(FieldError::new(
                    "harmonics.reference_kva",
                    "missing: the rating of the harmonic-producing load (kVA) that the percentages refer to",
                ))
            }
            None => 0.0,
        };
        let resonance_tolerance = range(
            "harmonics.resonance_tolerance_orders",
            h.resonance_tolerance_orders.unwrap_or(0.5),
            0.0,
            5.0,
            "orders",
        )?;

        let harmonics = HarmonicOptions {
            voltage_limits: h.voltage_limits.unwrap_or_default(),
            capacitor_limits: h.capacitor_limits.unwrap_or_default(),
            damping_kw: range(
                "harmonics.damping_kw",
                h.damping_kw.unwrap_or(0.0),
                0.0,
                1e6,
                "kW",
            )?,
        };

        let r = &f.run;
        let dt_s = range_open(
            "run.time_step_s",
            r.time_step_s.unwrap_or(1.0),
            0.0,
            3600.0,
            "s",
        )?;
        let duration_s = match (r.duration_s, r.duration_h, r.duration_days) {
            (None, None, None) => None,
            (Some(x), None, None) => Some(range_open("run.duration_s", x, 0.0, 3.2e9, "s")?),
            (None, Some(x), None) => {
                Some(range_open("run.duration_h", x, 0.0, 8.9e5, "h")? * 3600.0)
            }
            (None, None, Some(x)) => {
                Some(range_open("run.duration_days", x, 0.0, 36_600.0, "days")? * 86_400.0)
            }
            _ => {
                return Err(FieldError::new(
                    "run.duration_s",
                    "give one of `duration_s`, `duration_h`, `duration_days`",
                ))
            }
        };
        if let Some(d) = duration_s {
            if d < dt_s {
                return Err(FieldError::new(
                    "run.duration_s",
                    format!("{d} s is shorter than one time step ({dt_s} s)"),
                ));
            }
            if d / dt_s > 1e10 {
                return Err(FieldError::new(
                    "run.time_step_s",
                    format!("{dt_s} s makes more than 10^10 intervals for a {d} s run"),
                ));
            }
        }
        let start_text = r.start.as_deref().unwrap_or("2026-01-05T00:00:00");
        let start = parse_start(start_text).ok_or_else(|| {
            FieldError::new("run.start", format!("`{start_text}` is not a date-time; write e.g. `2026-03-02T00:00:00` or `2026-03-02`"))
        })?;

        let rp = &f.report;
        let billing = match rp.billing_window.as_deref().unwrap_or("month") {
            "month" => BillingWindows::Month,
            "run" => BillingWindows::Run,
            other => {
                return Err(FieldError::new(
                    "report.billing_window",
                    format!("`{other}` is not a billing window; write `month` or `run`"),
                ))
            }
        };
        let overcorrection_threshold_kvar = range(
            "report.overcorrection_threshold_kvar",
            rp.overcorrection_threshold_kvar.unwrap_or(smallest),
            0.0,
            1e6,
            "kvar",
        )?;
        let overcorrection_min_s = range(
            "report.overcorrection_min_s",
            rp.overcorrection_min_s.unwrap_or(60.0),
            0.0,
            1e7,
            "s",
        )?;
        let hunting_window_s = range(
            "report.hunting_window_s",
            rp.hunting_window_s.unwrap_or(10.0 * connect_delay_s),
            0.0,
            1e7,
            "s",
        )?;

        let name = f.study.name.clone().unwrap_or_else(|| {
            path.file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default()
        });
        Ok(Scenario {
            path: path.to_path_buf(),
            name,
            description: f.study.description.clone(),
            supply,
            steps,
            controller,
            load,
            spectrum: Spectrum {
                orders,
                reference_kva,
                preset: h.preset,
            },
            resonance_tolerance,
            harmonics,
            duration_s,
            dt_s,
            start,
            seed: r.seed.unwrap_or(1),
            billing,
            overcorrection_threshold_kvar,
            overcorrection_min_s,
            hunting_window_s,
            capacitor_discharge_s: c
                .capacitor_discharge_s
                .map(|x| range("controller.capacitor_discharge_s", x, 0.0, 3600.0, "s"))
                .transpose()?,
            content_sha256: String::new(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MINIMAL: &str = r#"
[[steps]]
kvar = 50
count = 4
[load.synthetic]
"#;

    fn parse(text: &str) -> Result<Scenario, ScenarioError> {
        Scenario::from_str(text, Path::new("site.toml"))
    }

    #[test]
    fn defaults_fill_a_minimal_file() {
        let s = parse(MINIMAL).unwrap();
        assert_eq!(s.steps.len(), 4);
        // Dead band 0.65 × the smallest switched step (common practice).
        assert!((s.controller.dead_band_kvar - 32.5).abs() < 1e-12);
        assert_eq!(s.controller.target, PfTarget::lag(0.95));
        assert_eq!(s.hunting_window_s, 300.0);
        assert_eq!(s.dt_s, 1.0);
    }

    #[test]
    fn errors_name_file_key_and_range() {
        let e = parse(&MINIMAL.replace("kvar = 50", "kvar = -5"))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("site.toml") && e.contains("steps[0].kvar") && e.contains("kvar"),
            "{e}"
        );
        let e = parse(&format!(
            "{MINIMAL}\n[controller]\ntarget_pf = \"1.3 lag\"\n"
        ))
        .unwrap_err()
        .to_string();
        assert!(e.contains("0.5 to 1.0"), "{e}");
        let e = parse(&format!("{MINIMAL}\n[controller]\nswiching_delay_s = 3\n"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("swiching_delay_s") && e.contains("line"), "{e}");
        let e = parse("[load.synthetic]\n").unwrap_err().to_string();
        assert!(e.contains("`steps`"), "{e}");
    }

    #[test]
    fn harmonic_keys_parse_and_check_their_ranges() {
        let s = parse(&format!(
            "{MINIMAL}[harmonics]\npreset = \"single-phase-electronic\"\nreference_kva = 40\n\
             voltage_limits = \"en-50160\"\ncapacitor_limits = \"ieee-18\"\ndamping_kw = 20\n"
        ))
        .unwrap();
        assert_eq!(s.spectrum.orders[0], (3.0, 81.0));
        assert_eq!(s.harmonics.voltage_limits, VoltageLimits::En50160);
        assert_eq!(s.harmonics.capacitor_limits, CapacitorLimits::Ieee18);
        assert_eq!(s.harmonics.damping_kw, 20.0);
        let e = parse(&MINIMAL.replace(
            "count = 4",
            "count = 4\ndetuning_pct = 7\ncapacitor_rated_voltage_v = 40",
        ))
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("steps[0].capacitor_rated_voltage_v") && e.contains("320 to 1200 V"),
            "{e}"
        );
        let e = parse(&format!("{MINIMAL}[harmonics]\ndamping_kw = -1\n"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("harmonics.damping_kw"), "{e}");
    }

    #[test]
    fn csv_path_is_relative_to_the_scenario() {
        let s = Scenario::from_str(
            "[[steps]]\nkvar = 10\n[load]\ncsv = \"p.csv\"\n",
            Path::new("dir/site.toml"),
        )
        .unwrap();
        match s.load {
            LoadSpec::Csv { path, .. } => assert_eq!(path, Path::new("dir/p.csv")),
            _ => panic!("expected a CSV load"),
        }
    }
}

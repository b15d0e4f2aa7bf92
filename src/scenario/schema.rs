//! The scenario file as written: the serde structures of every TOML section, with unknown
//! keys refused. Every field is optional here (apart from a transformer's `rated_kva`);
//! the validation modules apply the defaults, check ranges and require what a section
//! needs (a step's `kvar` or its catalogue rating).

use crate::controller::{ExportMode, OrderingKind};
use crate::harmonics::limits::{CapacitorLimits, VoltageLimits};
use crate::harmonics::SpectrumPreset;
use crate::profile::synthetic::SyntheticConfig;
use crate::profile::{DefectPolicies, DefectPolicy};
use serde::Deserialize;
use std::path::PathBuf;

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
    /// Prices of reactive energy, a low PF and worn parts (optional).
    #[serde(default)]
    pub tariff: Option<super::tariff::TariffSection>,
    /// Study date, holidays, capacitor ageing and inrush settings of the wear plan
    /// (optional).
    #[serde(default)]
    pub maintenance: Option<super::maintenance::MaintenanceSection>,
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
    /// How the bus is solved: `per-phase` (default, each phase on its own) or `coupled`
    /// (the three phases together through the 3×3 phase impedance).
    pub bus: Option<String>,
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
    /// Winding connection, for a coupled bus: `Dyn` (default) or `YNyn`.
    pub winding: Option<String>,
}

/// One `[[steps]]` entry.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StepSection {
    /// Effective output at U_n, kvar. Give this or the catalogue rating (`rated_kvar`
    /// with `rated_voltage_v`), not both.
    pub kvar: Option<f64>,
    /// Catalogue rating of the step's capacitors: rated output at `rated_voltage_v`, kvar
    /// (instead of `kvar`). The effective output at U_n is then Q_R·(U/U_R)²/(1 − p), with
    /// U the connection voltage and p the detuning ratio (0 for a plain step).
    pub rated_kvar: Option<f64>,
    /// Rated voltage of the capacitors that `rated_kvar` refers to, V (line to line; line
    /// to neutral for a single-phase step line to neutral). Required with `rated_kvar`; it
    /// is also the capacitors' rated voltage for the harmonic limits.
    pub rated_voltage_v: Option<f64>,
    /// `abc` (three-phase, default), `a`, `b`, `c` (single-phase, line to neutral) or
    /// `ab`, `bc`, `ca` (single-phase, line to line; `ba`, `cb`, `ac` the same).
    pub phase: Option<String>,
    /// How a three-phase step is connected: `delta` (default) or `star` (star point
    /// earthed).
    pub connection: Option<String>,
    /// Fixed step (on from the start, never switched). Default false.
    pub fixed: Option<bool>,
    /// Detuning reactor ratio p, %. Default: none (plain capacitor).
    pub detuning_pct: Option<f64>,
    /// Rated electrical life of the contactor, operations. Default 100 000.
    pub rated_operations: Option<f64>,
    /// Rated voltage of the step's capacitors, V (line to line; line to neutral for a
    /// single-phase step line to neutral). Default: U_n for a plain step; for a detuned
    /// step the smallest common rating at or above U/(1 − p), e.g. 440 V for 7 % at 400 V.
    pub capacitor_rated_voltage_v: Option<f64>,
    /// Repeat this step this many times (consecutive numbers). Default 1.
    pub count: Option<u32>,
    /// Fault injection.
    pub fault: Option<FaultSection>,
    /// The contactor's operation counter on the study date (`maintenance.as_of`), one
    /// value or one per step. Default 0.
    pub operations_so_far: Option<super::maintenance::PerStep<f64>>,
    /// Date the capacitors were installed, `YYYY-MM-DD`, one value or one per step.
    /// Default: the study date.
    pub installed: Option<super::maintenance::PerStep<String>>,
    /// The contactor's stated peak making current, A. Default: not stated.
    pub contactor_peak_a: Option<f64>,
    /// Damping resistors of a capacitor-duty contactor, Ω per phase. Default none.
    pub damping_ohm: Option<f64>,
}

/// `[steps.fault]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FaultSection {
    /// `open` (delivers nothing), `capacitance-loss` or `stuck-closed`.
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
    /// Target PF, e.g. `"0.95 lag"`, `"0.98 lead"`, `1.0` (0.5 to 1.0, either quadrant; a
    /// bare number is lagging). Default 0.95 lag. Read as written; the range is checked in
    /// validation so that an out-of-range value is a key error, not a syntax error.
    pub target_pf: Option<TargetPfValue>,
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
    /// `three-phase` (default), `single-phase` or `per-phase`.
    pub measurement: Option<String>,
    /// Phase of a single-phase measurement: `a` (default), `b` or `c`.
    pub measurement_phase: Option<String>,
    /// Voltage input of a single-phase measurement: `an`, `bn`, `cn`, or a line-to-line
    /// pair `ab`, `bc`, `ca`, `ba`, `cb`, `ac`. Default: the measured phase to neutral.
    pub measurement_voltage: Option<String>,
    /// Dead band of each phase's own control under per-phase control, kvar. Default
    /// 0.65 × the phase's smallest switched single-phase step.
    pub phase_dead_band_kvar: Option<f64>,
    /// How the measuring inputs are actually wired (a what-if); absent: as assumed.
    pub wiring: Option<WiringSection>,
    /// Averaging window, s. Default 0 (none).
    pub averaging_s: Option<f64>,
    /// While the site exports (measured P < 0): `absolute` (default; aim at the target on
    /// |P|), `hold` (no operation) or `open` (open every switched step, one per
    /// disconnect delay).
    pub export_mode: Option<ExportMode>,
    /// Protections.
    #[serde(default)]
    pub protection: ProtectionSection,
    /// The controller's own fault detection; present: on.
    pub detection: Option<super::maintenance::DetectionSection>,
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
    /// Harmonic voltage the grid brings by itself, `[[5, 2.0], [7, 1.5]]` (order, % of
    /// U_n, open-circuit at the bus). Default none.
    pub background_pct: Option<Vec<(f64, f64)>>,
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
    /// Measure unbalance: voltage and current unbalance over time and the IEEE Std
    /// 1459-2010 apparent powers. Default false.
    pub unbalance: Option<bool>,
}

/// `[controller.wiring]`: the measuring inputs as actually wired, while the controller
/// keeps the assumption its other keys describe.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct WiringSection {
    /// The line the current transformer actually sits on (single-phase: `a`, `b`, `c`),
    /// or the lines the channels a, b and c actually carry (three-phase and per-phase:
    /// three letters, e.g. `bca`). Default: as assumed.
    pub current: Option<String>,
    /// Reversed current transformers: `true`/`false` for a single-phase measurement, or
    /// the channels reversed (`"a"`, `"ac"`, `"abc"`). Default none.
    pub reversed: Option<ReversedValue>,
    /// The voltage pair actually connected (single-phase only). Default: as assumed.
    pub voltage: Option<String>,
}

/// Reversed polarity as written: a flag, or the channels' letters.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
pub enum ReversedValue {
    /// The one channel of a single-phase measurement reversed, or not.
    Flag(bool),
    /// The channels reversed, by letter.
    Channels(String),
}

/// A target PF as written: a number (`0.97`, `1`) or text (`"0.95 lag"`).
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
pub enum TargetPfValue {
    /// A bare number, read as lagging.
    Number(f64),
    /// Text with an optional `lag` or `lead`.
    Text(String),
}

//! The maintenance settings: the `[maintenance]` section (study date, holidays, capacitor
//! ageing, projection, seeds, inductance between steps), the per-step keys of the bank's
//! history and hardware (`operations_so_far`, `installed`, `contactor_peak_a`,
//! `damping_ohm`) and the controller's fault detection (`[controller.detection]`), with
//! their defaults and ranges.

use super::check::{range, range_open};
use super::schema::StepSection;
use crate::controller::DetectionParams;
use crate::error::FieldError;
use chrono::{Datelike, NaiveDate};
use serde::Deserialize;

/// Default capacitance a capacitor loses per year, % (a planning figure for self-healing
/// metallised polypropylene units, common practice; use the maker's figure or the trend
/// of your own measurements where you have them).
pub const DEFAULT_LOSS_PCT_PER_YEAR: f64 = 0.5;
/// Default capacitance loss at which a capacitor is due for replacement, % of nominal
/// (common practice; check the maker's figure).
pub const DEFAULT_REPLACE_LOSS_PCT: f64 = 10.0;
/// Default years of the ageing projection.
pub const DEFAULT_PROJECTION_YEARS: u32 = 10;
/// Default number of seeds the plan runs a synthetic load with.
pub const DEFAULT_SEEDS: u32 = 3;
/// Default inductance between one step and the steps already connected, µH: a few metres
/// of cable and busbar inside one enclosure at about 0.5 to 1 µH per metre (common
/// practice, from memory).
pub const DEFAULT_INDUCTANCE_UH: f64 = 5.0;

/// `[maintenance]` as written.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MaintenanceSection {
    /// The study date: the day the counters (`operations_so_far`) were read,
    /// `YYYY-MM-DD`. Default: the date of the run's first interval.
    pub as_of: Option<String>,
    /// Public holidays: `YYYY-MM-DD` (that day) or `MM-DD` (that day every year).
    /// Default none.
    pub holidays: Option<Vec<String>>,
    /// Capacitance lost per year, % of the present value. Default 0.5.
    pub capacitance_loss_pct_per_year: Option<f64>,
    /// Capacitance of the units as delivered, % off nominal (IEC 60831-1 allows −5 to
    /// +10, from memory; the low end gives a cautious projection). Default 0.
    pub capacitance_tolerance_pct: Option<f64>,
    /// Capacitance loss at which a capacitor is due for replacement, %. Default 10.
    pub replace_capacitance_loss_pct: Option<f64>,
    /// Years after the study date the ageing projection covers. Default 10.
    pub projection_years: Option<u32>,
    /// Seeds a synthetic load is run with for the spread of the dates. Default 3.
    pub seeds: Option<u32>,
    /// Inductance between a closing step and the steps already connected, µH. Default 5.
    pub inductance_uh: Option<f64>,
}

/// `[controller.detection]` as written: its presence turns the detection on.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DetectionSection {
    /// Largest difference between the measured change in Q after an operation and the
    /// step's nominal kvar that still counts as healthy, % of the step's kvar. Default 50.
    pub tolerance_pct: Option<f64>,
    /// Mismatched operations of one step in a row before the alarm. Default 2.
    pub operations: Option<u32>,
}

/// A per-step key: one value for every step of the table, or one per step.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub enum PerStep<T> {
    /// The same value for every step the table makes.
    One(T),
    /// One value per step the table makes, in number order.
    Each(Vec<T>),
}

/// A public holiday.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Holiday {
    /// One date.
    Date(NaiveDate),
    /// The same month and day every year (a 29 February only in leap years).
    Yearly {
        /// Month, 1 to 12.
        month: u32,
        /// Day of the month.
        day: u32,
    },
}

impl Holiday {
    /// True when `date` is this holiday.
    pub fn matches(self, date: NaiveDate) -> bool {
        match self {
            Holiday::Date(d) => d == date,
            Holiday::Yearly { month, day } => date.month() == month && date.day() == day,
        }
    }
}

/// The history and hardware of one step.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct StepRecord {
    /// The contactor's operation counter on the study date. Default 0.
    pub operations_so_far: f64,
    /// The date the step's capacitors were installed. Default: the study date (new).
    pub installed: Option<NaiveDate>,
    /// The contactor's stated peak making current, A. Default: not stated.
    pub contactor_peak_a: Option<f64>,
    /// Damping resistors of a capacitor-duty contactor (inserted by early-make contacts
    /// while the main contacts close), Ω per phase. Default none.
    pub damping_ohm: Option<f64>,
}

/// Validated maintenance settings.
#[derive(Debug, Clone, PartialEq)]
pub struct Maintenance {
    /// The study date; `None`: the date of the run's first interval.
    pub as_of: Option<NaiveDate>,
    /// Public holidays.
    pub holidays: Vec<Holiday>,
    /// Capacitance lost per year, fraction. Default 0.005.
    pub loss_per_year: f64,
    /// Capacitance as delivered, fraction off nominal. Default 0.
    pub tolerance: f64,
    /// Capacitance loss at which a capacitor is due for replacement, fraction. Default 0.1.
    pub replace_loss: f64,
    /// Years of the ageing projection. Default 10.
    pub projection_years: u32,
    /// Seeds for a synthetic load. Default 3.
    pub seeds: u32,
    /// Inductance between a closing step and the steps already on, µH. Default 5.
    pub inductance_uh: f64,
    /// One record per step, in step order.
    pub steps: Vec<StepRecord>,
}

impl Maintenance {
    /// True when `date` is one of the holidays.
    pub fn is_holiday(&self, date: NaiveDate) -> bool {
        self.holidays.iter().any(|h| h.matches(date))
    }
}

/// Reads a date `YYYY-MM-DD`.
pub fn parse_date(key: &str, text: &str) -> Result<NaiveDate, FieldError> {
    NaiveDate::parse_from_str(text.trim(), "%Y-%m-%d").map_err(|_| {
        FieldError::new(
            key,
            format!("\"{text}\" is not a date; write YYYY-MM-DD, e.g. 2026-03-02"),
        )
    })
}

fn holiday(key: &str, text: &str) -> Result<Holiday, FieldError> {
    let t = text.trim();
    if t.len() == 5 {
        // MM-DD: checked against a leap year so that 02-29 is allowed.
        let d = NaiveDate::parse_from_str(&format!("2024-{t}"), "%Y-%m-%d").map_err(|_| {
            FieldError::new(
                key,
                format!("\"{text}\" is not a holiday; write YYYY-MM-DD or MM-DD (every year)"),
            )
        })?;
        return Ok(Holiday::Yearly {
            month: d.month(),
            day: d.day(),
        });
    }
    parse_date(key, t).map(Holiday::Date).map_err(|_| {
        FieldError::new(
            key,
            format!("\"{text}\" is not a holiday; write YYYY-MM-DD or MM-DD (every year)"),
        )
    })
}

/// Validates `[maintenance]` and the per-step keys of `tables`, which make `n_steps`
/// steps. `label(i, first, count)` names table `i` (from 1) as the step errors do.
pub(super) fn maintenance(
    m: &Option<MaintenanceSection>,
    tables: &[StepSection],
    label: &dyn Fn(usize, usize, u32) -> String,
) -> Result<Maintenance, FieldError> {
    let d = MaintenanceSection::default();
    let m = m.as_ref().unwrap_or(&d);
    let as_of = m
        .as_of
        .as_deref()
        .map(|t| parse_date("maintenance.as_of", t))
        .transpose()?;
    let holidays = m
        .holidays
        .iter()
        .flatten()
        .enumerate()
        .map(|(i, h)| holiday(&format!("maintenance.holidays[{i}]"), h))
        .collect::<Result<Vec<_>, _>>()?;
    let loss = range(
        "maintenance.capacitance_loss_pct_per_year",
        m.capacitance_loss_pct_per_year
            .unwrap_or(DEFAULT_LOSS_PCT_PER_YEAR),
        0.0,
        20.0,
        "%",
    )?;
    let tol = range(
        "maintenance.capacitance_tolerance_pct",
        m.capacitance_tolerance_pct.unwrap_or(0.0),
        -20.0,
        20.0,
        "%",
    )?;
    let replace = range_open(
        "maintenance.replace_capacitance_loss_pct",
        m.replace_capacitance_loss_pct
            .unwrap_or(DEFAULT_REPLACE_LOSS_PCT),
        0.0,
        50.0,
        "%",
    )?;
    let years = m.projection_years.unwrap_or(DEFAULT_PROJECTION_YEARS);
    if years > 50 {
        return Err(FieldError::new(
            "maintenance.projection_years",
            format!("{years} is outside the allowed range 0 to 50 years"),
        ));
    }
    let seeds = m.seeds.unwrap_or(DEFAULT_SEEDS);
    if !(1..=100).contains(&seeds) {
        return Err(FieldError::new(
            "maintenance.seeds",
            format!("{seeds} is outside the allowed range 1 to 100"),
        ));
    }
    let inductance_uh = range_open(
        "maintenance.inductance_uh",
        m.inductance_uh.unwrap_or(DEFAULT_INDUCTANCE_UH),
        0.0,
        10_000.0,
        "µH",
    )?;
    let mut steps = Vec::new();
    for (i, t) in tables.iter().enumerate() {
        let count = t.count.unwrap_or(1);
        let first = steps.len() + 1;
        let key = |k: &str| format!("{}.{k}", label(i + 1, first, count));
        let per = |k: &str, n: usize| -> FieldError {
            FieldError::new(
                key(k),
                format!(
                    "{n} values for the {count} step{} of this table; give one value or \
                     one per step",
                    if count == 1 { "" } else { "s" }
                ),
            )
        };
        let ops: Vec<f64> = match &t.operations_so_far {
            None => vec![0.0; count as usize],
            Some(PerStep::One(x)) => vec![*x; count as usize],
            Some(PerStep::Each(v)) if v.len() == count as usize => v.clone(),
            Some(PerStep::Each(v)) => return Err(per("operations_so_far", v.len())),
        };
        for x in &ops {
            range(&key("operations_so_far"), *x, 0.0, 1e9, "operations")?;
        }
        let installed: Vec<Option<NaiveDate>> = match &t.installed {
            None => vec![None; count as usize],
            Some(PerStep::One(x)) => vec![Some(parse_date(&key("installed"), x)?); count as usize],
            Some(PerStep::Each(v)) if v.len() == count as usize => v
                .iter()
                .map(|x| parse_date(&key("installed"), x).map(Some))
                .collect::<Result<_, _>>()?,
            Some(PerStep::Each(v)) => return Err(per("installed", v.len())),
        };
        let peak = t
            .contactor_peak_a
            .map(|x| range_open(&key("contactor_peak_a"), x, 0.0, 1e6, "A"))
            .transpose()?;
        let damping = t
            .damping_ohm
            .map(|x| range_open(&key("damping_ohm"), x, 0.0, 1000.0, "Ω"))
            .transpose()?;
        for j in 0..count as usize {
            steps.push(StepRecord {
                operations_so_far: ops[j],
                installed: installed[j],
                contactor_peak_a: peak,
                damping_ohm: damping,
            });
        }
    }
    Ok(Maintenance {
        as_of,
        holidays,
        loss_per_year: loss / 100.0,
        tolerance: tol / 100.0,
        replace_loss: replace / 100.0,
        projection_years: years,
        seeds,
        inductance_uh,
        steps,
    })
}

/// Validates `[controller.detection]`: `None` when the table is absent (detection off).
pub(super) fn detection(
    d: &Option<DetectionSection>,
) -> Result<Option<DetectionParams>, FieldError> {
    let Some(d) = d else { return Ok(None) };
    let tol = range_open(
        "controller.detection.tolerance_pct",
        d.tolerance_pct.unwrap_or(50.0),
        0.0,
        100.0,
        "%",
    )?;
    let ops = d.operations.unwrap_or(2);
    if !(1..=100).contains(&ops) {
        return Err(FieldError::new(
            "controller.detection.operations",
            format!("{ops} is outside the allowed range 1 to 100 operations"),
        ));
    }
    Ok(Some(DetectionParams {
        tolerance: tol / 100.0,
        operations: ops,
    }))
}

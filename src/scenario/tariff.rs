//! The optional `[tariff]` section: what reactive energy and a low power factor cost the
//! site, and what the worn parts cost, so that settings can be compared in money a year.
//!
//! Two kinds of charge, each per billing window (see `[report] billing_window`), either or
//! both:
//!
//! - a **reactive-energy charge**: a price per kvarh of inductive energy above
//!   tan φ_threshold × kWh imported in the window (tan φ 0.4, about PF 0.93, is the
//!   default: a threshold many utilities use, common practice);
//! - a **PF penalty**: a price per 0.01 of billed PF below a threshold PF in the window
//!   (pro rata: 0.005 below costs half the price).
//!
//! Parts: the price of a contactor (replaced when its step reaches its rated operations,
//! `[[steps]] rated_operations`) and of a capacitor step (replaced after
//! `capacitor_life_h` energized hours; default 100 000 h, the life makers commonly quote
//! for self-healing polypropylene capacitors at rated conditions, common practice).
//!
//! The cost a year is the charges of the run scaled to a 365-day year plus the parts
//! worn per year × their prices; the sweep works it out (`crate::sweep::cost`).

use super::check::{range, range_open};
use crate::error::FieldError;
use crate::pf::PfTarget;
use serde::Deserialize;

/// Default tan φ threshold of the reactive-energy charge (about PF 0.93 lag; common
/// practice).
pub const DEFAULT_TAN_PHI_THRESHOLD: f64 = 0.4;

/// Default PF below which the PF penalty applies (common practice).
pub const DEFAULT_PENALTY_PF: f64 = 0.95;

/// Default life of a capacitor step, energized hours (common practice).
pub const DEFAULT_CAPACITOR_LIFE_H: f64 = 100_000.0;

/// `[tariff]` as written.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TariffSection {
    /// Name of the currency the prices are in, e.g. `EUR`. Default `EUR`.
    pub currency: Option<String>,
    /// Price of inductive reactive energy above the threshold, currency per kvarh.
    /// Default: no reactive-energy charge.
    pub reactive_price_per_kvarh: Option<f64>,
    /// Threshold of the reactive-energy charge, tan φ (kvarh per kWh). Default 0.4.
    pub reactive_threshold_tan_phi: Option<f64>,
    /// PF penalty, currency per 0.01 of billed PF below `penalty_below_pf`, per billing
    /// window. Default: no PF penalty.
    pub pf_penalty_per_hundredth: Option<f64>,
    /// PF below which the penalty applies (lagging). Default 0.95.
    pub penalty_below_pf: Option<f64>,
    /// Price of a contactor, currency each. Default: not costed.
    pub contactor_price: Option<f64>,
    /// Price of a capacitor step, currency each. Default: not costed.
    pub capacitor_step_price: Option<f64>,
    /// Life of a capacitor step, energized hours. Default 100 000 h.
    pub capacitor_life_h: Option<f64>,
}

/// A validated tariff.
#[derive(Debug, Clone, PartialEq)]
pub struct Tariff {
    /// Currency name. Default `EUR`.
    pub currency: String,
    /// Price per kvarh above the threshold, currency/kvarh (`None`: no such charge).
    pub reactive_price_per_kvarh: Option<f64>,
    /// Threshold of the reactive charge, tan φ. Default 0.4.
    pub reactive_threshold_tan_phi: f64,
    /// Price per 0.01 of PF below `penalty_below_pf`, per billing window (`None`: none).
    pub pf_penalty_per_hundredth: Option<f64>,
    /// PF below which the penalty applies, lagging. Default 0.95.
    pub penalty_below_pf: f64,
    /// Price of a contactor, currency (`None`: not costed).
    pub contactor_price: Option<f64>,
    /// Price of a capacitor step, currency (`None`: not costed).
    pub capacitor_step_price: Option<f64>,
    /// Life of a capacitor step, energized h. Default 100 000 h.
    pub capacitor_life_h: f64,
}

/// Validates `[tariff]`.
pub(super) fn tariff(t: &Option<TariffSection>) -> Result<Option<Tariff>, FieldError> {
    let Some(t) = t else { return Ok(None) };
    let price = |key: &str, v: Option<f64>| -> Result<Option<f64>, FieldError> {
        v.map(|x| range(&format!("tariff.{key}"), x, 0.0, 1e9, "per unit"))
            .transpose()
    };
    let currency = t.currency.clone().unwrap_or_else(|| "EUR".to_string());
    if currency.trim().is_empty() || currency.len() > 16 {
        return Err(FieldError::new(
            "tariff.currency",
            format!("`{currency}` is not a currency name; write 1 to 16 characters, e.g. `EUR`"),
        ));
    }
    let penalty_below_pf = t.penalty_below_pf.unwrap_or(DEFAULT_PENALTY_PF);
    PfTarget::checked(penalty_below_pf, crate::pf::Quadrant::Lag)
        .map_err(|m| FieldError::new("tariff.penalty_below_pf", m))?;
    let tariff = Tariff {
        currency,
        reactive_price_per_kvarh: price("reactive_price_per_kvarh", t.reactive_price_per_kvarh)?,
        reactive_threshold_tan_phi: range(
            "tariff.reactive_threshold_tan_phi",
            t.reactive_threshold_tan_phi
                .unwrap_or(DEFAULT_TAN_PHI_THRESHOLD),
            0.0,
            2.0,
            "",
        )?,
        pf_penalty_per_hundredth: price("pf_penalty_per_hundredth", t.pf_penalty_per_hundredth)?,
        penalty_below_pf,
        contactor_price: price("contactor_price", t.contactor_price)?,
        capacitor_step_price: price("capacitor_step_price", t.capacitor_step_price)?,
        capacitor_life_h: range_open(
            "tariff.capacitor_life_h",
            t.capacitor_life_h.unwrap_or(DEFAULT_CAPACITOR_LIFE_H),
            0.0,
            1e7,
            "h",
        )?,
    };
    Ok(Some(tariff))
}

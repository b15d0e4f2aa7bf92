//! Validation of `[supply]` and `[supply.transformer]`: nominal voltage, frequency, source
//! voltage, grid short-circuit power and X/R, transformer rating and impedance.

use super::check::range;
use super::schema::SupplySection;
use crate::error::FieldError;
use crate::supply::{BusModel, SupplyParams, Transformer, Winding};

/// The supply these keys describe, with defaults applied.
pub(super) fn supply(s: &SupplySection) -> Result<SupplyParams, FieldError> {
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
        Some(g) => Some(range("supply.grid_short_circuit_mva", g, 1.0, 100_000.0, "MVA")? * 1e3),
    };
    Ok(SupplyParams {
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
    })
}

/// How the bus is solved: `supply.bus` and the transformer's `winding`.
pub(super) fn bus(s: &SupplySection) -> Result<BusModel, FieldError> {
    let winding = match s.transformer.as_ref().and_then(|t| t.winding.as_deref()) {
        None => None,
        Some(w) => Some(match w.trim() {
            "Dyn" | "dyn" | "Dyn11" | "Dyn5" | "Dyn1" => Winding::Dyn,
            "YNyn" | "ynyn" | "YNyn0" => Winding::YNyn,
            other => {
                return Err(FieldError::new(
                    "supply.transformer.winding",
                    format!("`{other}` is not a winding connection; write `Dyn` or `YNyn`"),
                ))
            }
        }),
    };
    match s.bus.as_deref().unwrap_or("per-phase") {
        "per-phase" => {
            if winding.is_some() {
                return Err(FieldError::new(
                    "supply.transformer.winding",
                    "only meaningful with supply.bus = \"coupled\"",
                ));
            }
            Ok(BusModel::PerPhase)
        }
        "coupled" => Ok(BusModel::Coupled(winding.unwrap_or_default())),
        other => Err(FieldError::new(
            "supply.bus",
            format!("`{other}` is not a bus model; write `per-phase` or `coupled`"),
        )),
    }
}

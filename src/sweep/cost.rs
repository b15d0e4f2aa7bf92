//! The cost a year of one run under a `[tariff]`: the reactive-energy charge and the PF
//! penalty of each billing window, summed and scaled to a 365-day year, plus the parts
//! worn per year (contactors by operations against their rated life, capacitor steps by
//! energized hours against their life) times their prices.

use crate::metrics::RunMetrics;
use crate::scenario::Tariff;
use crate::timebase::YEAR_S;
use serde::{Deserialize, Serialize};

/// Money a year, in the tariff's currency, by part.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CostPerYear {
    /// Everything below, currency/year.
    pub total: f64,
    /// Reactive-energy charge, currency/year.
    pub reactive_energy: f64,
    /// PF penalty, currency/year.
    pub pf_penalty: f64,
    /// Contactors worn, currency/year.
    pub contactors: f64,
    /// Capacitor steps worn, currency/year.
    pub capacitors: f64,
}

impl CostPerYear {
    /// The cost a year of a run with metrics `m` under tariff `t`.
    pub fn of(t: &Tariff, m: &RunMetrics) -> CostPerYear {
        let run_s = m.run.duration_s;
        let per_year = if run_s > 0.0 { YEAR_S / run_s } else { 0.0 };
        let mut reactive = 0.0;
        let mut penalty = 0.0;
        for w in &m.pf.billing {
            if let Some(price) = t.reactive_price_per_kvarh {
                let allowed = t.reactive_threshold_tan_phi * w.kwh_import.max(0.0);
                reactive += price * (w.kvarh_inductive - allowed).max(0.0);
            }
            if let Some(price) = t.pf_penalty_per_hundredth {
                // The billed PF of a window is a lagging figure (1 with no inductive
                // energy), so a window only pays when it lags below the threshold.
                let short = (t.penalty_below_pf - w.energy_pf).max(0.0);
                penalty += price * short / 0.01;
            }
        }
        let contactors = t.contactor_price.map_or(0.0, |price| {
            m.wear
                .iter()
                .filter(|w| !w.fixed && w.rated_operations > 0.0)
                .map(|w| w.operations_per_year / w.rated_operations * price)
                .sum()
        });
        let capacitors = t.capacitor_step_price.map_or(0.0, |price| {
            m.wear
                .iter()
                .map(|w| w.energized_h * per_year / t.capacitor_life_h * price)
                .sum()
        });
        let reactive_energy = reactive * per_year;
        let pf_penalty = penalty * per_year;
        CostPerYear {
            total: reactive_energy + pf_penalty + contactors + capacitors,
            reactive_energy,
            pf_penalty,
            contactors,
            capacitors,
        }
    }
}

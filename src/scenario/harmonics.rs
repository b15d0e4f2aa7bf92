//! Validation of `[harmonics]`: the load spectrum (preset and extra orders) with the
//! rating it refers to, the resonance warning tolerance, the limits and the damping load.

use super::check::{range, range_open};
use super::schema::HarmonicsSection;
use crate::error::FieldError;
use crate::harmonics::{HarmonicOptions, Spectrum, SpectrumPreset};

/// What `[harmonics]` gives.
pub(super) struct HarmonicSettings {
    /// The load spectrum.
    pub spectrum: Spectrum,
    /// Resonance warning tolerance, orders.
    pub tolerance: f64,
    /// Limits and damping.
    pub options: HarmonicOptions,
    /// The grid's own harmonic voltage: (order, % of U_n).
    pub background_pct: Vec<(f64, f64)>,
}

/// The harmonic settings these keys describe.
pub(super) fn harmonics(h: &HarmonicsSection) -> Result<HarmonicSettings, FieldError> {
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
    let reference_kva =
        match h.reference_kva {
            Some(r) => range_open("harmonics.reference_kva", r, 0.0, 1e6, "kVA")?,
            None if !orders.is_empty() => return Err(FieldError::new(
                "harmonics.reference_kva",
                "missing: the rating of the harmonic-producing load (kVA) that the percentages \
                 refer to",
            )),
            None => 0.0,
        };
    let tolerance = range(
        "harmonics.resonance_tolerance_orders",
        h.resonance_tolerance_orders.unwrap_or(0.5),
        0.0,
        5.0,
        "orders",
    )?;
    let options = HarmonicOptions {
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
    let mut background_pct: Vec<(f64, f64)> = Vec::new();
    for (j, &(o, pct)) in h.background_pct.iter().flatten().enumerate() {
        // Keys count from 1, the way a reader counts the pairs in the list.
        let key = format!("harmonics.background_pct (pair {})", j + 1);
        range(&key, o, 1.5, 100.0, "(harmonic order)")?;
        range(&key, pct, 0.0, 20.0, "% of U_n")?;
        match background_pct.iter_mut().find(|x| x.0 == o) {
            Some(x) => x.1 = pct,
            None => background_pct.push((o, pct)),
        }
    }
    background_pct.sort_by(|a, b| a.0.total_cmp(&b.0));
    Ok(HarmonicSettings {
        background_pct,
        spectrum: Spectrum {
            orders,
            reference_kva,
            preset: h.preset,
        },
        tolerance,
        options,
    })
}

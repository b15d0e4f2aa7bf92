//! The limits a harmonic estimate is compared against: harmonic voltage at the bus
//! (IEEE Std 519-2014 Table 1, or EN 50160 levels) and the limits of a capacitor
//! (IEC 60831-1 or IEEE Std 18), plus the default rated voltage of a step's capacitors.
//!
//! The capacitor's rms voltage limit depends on how long the voltage is held. IEC 60831-1
//! admits 1.00 × U_N continuously and higher levels only for a limited time in every 24 h
//! (see [`IEC_60831_VOLTAGE_LEVELS`]); IEEE Std 18 gives one continuous contingency limit
//! of 110 %. A state is judged by the hours a day it is held
//! ([`CapacitorLimits::admissible_voltage`]); with the hours unknown it is judged as held
//! continuously, the safe side.
//!
//! Where a value comes from and how sure we are is written beside it: **read** (seen in
//! a public text) or **from memory** (recalled; check it against the standard before
//! relying on it).

use serde::{Deserialize, Serialize};

/// Which harmonic-voltage limits the bus is held to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum VoltageLimits {
    /// IEEE Std 519-2014 Table 1, by bus voltage class. The default.
    #[default]
    #[serde(rename = "ieee-519")]
    Ieee519,
    /// EN 50160 (and IEC 61000-2-2) levels for low-voltage supplies.
    #[serde(rename = "en-50160")]
    En50160,
}

impl VoltageLimits {
    /// The name used in reports, e.g. `IEEE Std 519-2014 Table 1`.
    pub fn name(self) -> &'static str {
        match self {
            VoltageLimits::Ieee519 => "IEEE Std 519-2014 Table 1",
            VoltageLimits::En50160 => "EN 50160",
        }
    }

    /// Voltage THD limit for a bus of nominal voltage `u_n_v` (line to line), %.
    pub fn thd_pct(self, u_n_v: f64) -> f64 {
        match self {
            VoltageLimits::Ieee519 => ieee519_class(u_n_v).1,
            // EN 50160: THD 8 % including orders up to 40 (from memory).
            VoltageLimits::En50160 => 8.0,
        }
    }

    /// Limit for one harmonic voltage, % of the nominal voltage; `None` where the table
    /// gives none (EN 50160 above order 25 or between integer orders).
    pub fn individual_pct(self, u_n_v: f64, order: f64) -> Option<f64> {
        match self {
            VoltageLimits::Ieee519 => Some(ieee519_class(u_n_v).0),
            VoltageLimits::En50160 => en50160_individual(order),
        }
    }

    /// How sure the values for this bus voltage are: `read` or `from memory`.
    pub fn provenance(self, u_n_v: f64) -> &'static str {
        match self {
            VoltageLimits::Ieee519 if u_n_v <= 1000.0 => "read",
            _ => "from memory",
        }
    }
}

/// IEEE Std 519-2014 Table 1: (individual harmonic %, THD %) for the bus voltage class.
fn ieee519_class(u_n_v: f64) -> (f64, f64) {
    if u_n_v <= 1_000.0 {
        // V ≤ 1.0 kV: 5.0 % individual, 8.0 % THD (read).
        (5.0, 8.0)
    } else if u_n_v <= 69_000.0 {
        // 1 kV < V ≤ 69 kV: 3.0 % and 5.0 % (from memory).
        (3.0, 5.0)
    } else if u_n_v <= 161_000.0 {
        // 69 kV < V ≤ 161 kV: 1.5 % and 2.5 % (from memory).
        (1.5, 2.5)
    } else {
        // V > 161 kV: 1.0 % and 1.5 % (from memory).
        (1.0, 1.5)
    }
}

/// EN 50160 harmonic voltage levels, % of the nominal voltage (from memory: h5 6 %, h7 5 %,
/// h11 3.5 %, h13 3 % as quoted in public summaries of the standard; the other orders recalled from the same
/// table).
fn en50160_individual(order: f64) -> Option<f64> {
    let r = order.round();
    if (order - r).abs() > 1e-6 || !(2.0..=25.0).contains(&r) {
        return None;
    }
    let n = r as u32;
    Some(match n {
        3 => 5.0,
        5 => 6.0,
        7 => 5.0,
        9 => 1.5,
        11 => 3.5,
        13 => 3.0,
        15 | 21 => 0.5,
        17 => 2.0,
        19 | 23 | 25 => 1.5,
        2 => 2.0,
        4 => 1.0,
        _ if n % 2 == 0 => 0.5,
        _ => return None,
    })
}

/// Which continuous limits the capacitors are held to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum CapacitorLimits {
    /// IEC 60831-1 (low-voltage self-healing capacitors). The default.
    #[default]
    #[serde(rename = "iec-60831-1")]
    Iec60831,
    /// IEEE Std 18 (shunt power capacitors).
    #[serde(rename = "ieee-18")]
    Ieee18,
}

/// Limits of a capacitor, as multiples of its ratings.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CapacitorLimitValues {
    /// Standard the values come from.
    pub standard: &'static str,
    /// Permissible rms current, × rated current.
    pub current: f64,
    /// Permissible rms voltage when held continuously, × rated voltage (IEC 60831-1 1.00,
    /// IEEE Std 18 1.10). Shorter holding times may admit more: see
    /// [`CapacitorLimits::admissible_voltage`].
    pub voltage_rms: f64,
    /// Permissible peak voltage, × the rated voltage's peak (`None`: not checked).
    pub voltage_peak: Option<f64>,
    /// Permissible reactive power, × rated kvar (`None`: not checked).
    pub kvar: Option<f64>,
}

/// IEC 60831-1 admissible voltage levels in service (from memory: the standard's table of
/// admissible voltage levels): (longest holding time in every 24 h, h; level × U_N).
/// 1.00 continuous; 1.10 for 8 h in every 24 h (system voltage regulation and
/// fluctuations); 1.15 for 30 min in every 24 h; 1.20 for 5 min and 1.30 for 1 min (voltage
/// rise at light load). Longest time first; beyond 8 h a day the continuous level applies.
pub const IEC_60831_VOLTAGE_LEVELS: [(f64, f64); 4] = [
    (8.0, 1.10),
    (0.5, 1.15),
    (5.0 / 60.0, 1.20),
    (1.0 / 60.0, 1.30),
];

impl CapacitorLimits {
    /// The standard's name, e.g. `IEC 60831-1`.
    pub fn standard(self) -> &'static str {
        self.values().standard
    }

    /// Permissible rms capacitor voltage, × rated voltage, for a voltage held
    /// `hours_per_day` hours in every 24 h (`None`: held continuously, the safe side when
    /// the time is unknown).
    ///
    /// IEC 60831-1: the level of [`IEC_60831_VOLTAGE_LEVELS`] whose time covers the hours
    /// (1.00 above 8 h a day or with the hours unknown; 1.10 up to 8 h; 1.15 up to 30 min;
    /// 1.20 up to 5 min; 1.30 up to 1 min). IEEE Std 18: 1.10 whatever the time (its
    /// continuous contingency limit; its short-time overvoltage curve is not used). Hours
    /// that are not a number or above 24 count as continuous.
    pub fn admissible_voltage(self, hours_per_day: Option<f64>) -> f64 {
        match self {
            CapacitorLimits::Ieee18 => 1.10,
            CapacitorLimits::Iec60831 => {
                let Some(h) = hours_per_day.filter(|h| !h.is_nan() && *h <= 24.0) else {
                    return 1.00;
                };
                IEC_60831_VOLTAGE_LEVELS
                    .iter()
                    .rev()
                    .find(|(t, _)| h <= *t)
                    .map_or(1.00, |&(_, level)| level)
            }
        }
    }

    /// The holding time that [`CapacitorLimits::admissible_voltage`] read its level for,
    /// in words: `continuous`, `8 h in every 24 h`, `30 min in every 24 h`, `5 min`,
    /// `1 min` (IEEE Std 18: `continuous contingency`).
    pub fn voltage_duration(self, hours_per_day: Option<f64>) -> &'static str {
        match (self, self.admissible_voltage(hours_per_day)) {
            (CapacitorLimits::Ieee18, _) => "continuous contingency",
            (_, l) if l >= 1.30 => "1 min",
            (_, l) if l >= 1.20 => "5 min",
            (_, l) if l >= 1.15 => "30 min in every 24 h",
            (_, l) if l >= 1.10 => "8 h in every 24 h",
            _ => "continuous",
        }
    }

    /// The limit values (the rms voltage limit for a voltage held continuously).
    pub fn values(self) -> CapacitorLimitValues {
        match self {
            // IEC 60831-1: 1.30 × rated current continuous; 1.00 × rated voltage
            // continuous, 1.10 for 8 h in every 24 h (from memory).
            CapacitorLimits::Iec60831 => CapacitorLimitValues {
                standard: "IEC 60831-1",
                current: 1.30,
                voltage_rms: 1.00,
                voltage_peak: None,
                kvar: None,
            },
            // IEEE Std 18 continuous contingency limits: 135 % rms current, 110 % rms
            // voltage, 120 % peak voltage, 135 % kvar (read).
            CapacitorLimits::Ieee18 => CapacitorLimitValues {
                standard: "IEEE Std 18",
                current: 1.35,
                voltage_rms: 1.10,
                voltage_peak: Some(1.20),
                kvar: Some(1.35),
            },
        }
    }
}

/// Common rated voltages of low-voltage power capacitors, V (common practice).
pub const STANDARD_RATINGS_V: [f64; 22] = [
    230.0, 240.0, 250.0, 260.0, 280.0, 300.0, 330.0, 360.0, 400.0, 415.0, 440.0, 460.0, 480.0,
    525.0, 550.0, 600.0, 660.0, 690.0, 720.0, 800.0, 900.0, 1000.0,
];

/// Default rated voltage of a step's capacitors when the scenario gives none, V.
///
/// `u_conn_v` is the voltage the step is connected to (line to line for a three-phase
/// step, line to neutral for a single-phase one). A plain step is rated at that voltage.
/// A detuned step's capacitors see U/(1 − p) at the fundamental, so they get the smallest
/// rating of [`STANDARD_RATINGS_V`] at or above U/(1 − p) (440 V for 5.67 % and 7 % at
/// 400 V, 480 V for 14 %: the usual choice, common practice); above 1000 V, U/(1 − p)
/// rounded up to the next 100 V.
pub fn default_rated_voltage(u_conn_v: f64, detuning: Option<f64>) -> f64 {
    let Some(p) = detuning else {
        return u_conn_v;
    };
    let u_c = u_conn_v / (1.0 - p);
    STANDARD_RATINGS_V
        .iter()
        .copied()
        .find(|&r| r >= u_c * (1.0 - 1e-9))
        .unwrap_or_else(|| (u_c / 100.0 - 1e-9).ceil() * 100.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ieee519_classes() {
        // IEEE Std 519-2014 Table 1, bus ≤ 1 kV: 5 % individual, 8 % THD (read).
        assert_eq!(VoltageLimits::Ieee519.thd_pct(400.0), 8.0);
        assert_eq!(VoltageLimits::Ieee519.individual_pct(400.0, 7.0), Some(5.0));
        assert_eq!(VoltageLimits::Ieee519.provenance(400.0), "read");
        // 1 kV < V ≤ 69 kV: 3 % and 5 % (from memory).
        assert_eq!(VoltageLimits::Ieee519.thd_pct(11_000.0), 5.0);
        assert_eq!(VoltageLimits::Ieee519.provenance(11_000.0), "from memory");
    }

    #[test]
    fn en50160_levels() {
        // EN 50160: h5 6 %, h7 5 %, h11 3.5 %, h13 3 %, THD 8 % (from memory).
        let l = VoltageLimits::En50160;
        assert_eq!(l.individual_pct(400.0, 5.0), Some(6.0));
        assert_eq!(l.individual_pct(400.0, 7.0), Some(5.0));
        assert_eq!(l.individual_pct(400.0, 11.0), Some(3.5));
        assert_eq!(l.individual_pct(400.0, 13.0), Some(3.0));
        assert_eq!(l.individual_pct(400.0, 4.5), None);
        assert_eq!(l.individual_pct(400.0, 29.0), None);
        assert_eq!(l.thd_pct(400.0), 8.0);
    }

    // IEC 60831-1 admissible voltage levels (from memory): 1.00 continuous; 1.10 for 8 h
    // in every 24 h; 1.15 for 30 min in every 24 h; 1.20 for 5 min; 1.30 for 1 min. IEEE
    // Std 18: 110 % continuous contingency (read).
    #[test]
    fn capacitor_voltage_levels_by_holding_time() {
        let iec = CapacitorLimits::Iec60831;
        for (hours, level) in [
            (None, 1.00),
            (Some(24.0), 1.00),
            (Some(8.01), 1.00),
            (Some(8.0), 1.10),
            (Some(0.51), 1.10),
            (Some(0.5), 1.15),
            (Some(0.1), 1.15),
            (Some(5.0 / 60.0), 1.20),
            (Some(2.0 / 60.0), 1.20),
            (Some(1.0 / 60.0), 1.30),
            (Some(f64::NAN), 1.00),
            (Some(30.0), 1.00),
        ] {
            assert_eq!(iec.admissible_voltage(hours), level, "{hours:?} h a day");
        }
        assert_eq!(iec.voltage_duration(None), "continuous");
        assert_eq!(iec.voltage_duration(Some(6.0)), "8 h in every 24 h");
        assert_eq!(iec.voltage_duration(Some(0.25)), "30 min in every 24 h");
        let ieee = CapacitorLimits::Ieee18;
        assert_eq!(ieee.admissible_voltage(None), 1.10);
        assert_eq!(ieee.admissible_voltage(Some(0.01)), 1.10);
        assert_eq!(ieee.voltage_duration(None), "continuous contingency");
    }

    #[test]
    fn default_ratings() {
        // Plain step: rated at the bus voltage (common practice).
        assert_eq!(default_rated_voltage(400.0, None), 400.0);
        // U/(1 − p) at 400 V: 424 V, 430 V, 465 V (read in public worked calculations) → 440, 440, 480 V
        // (common practice).
        assert_eq!(default_rated_voltage(400.0, Some(0.0567)), 440.0);
        assert_eq!(default_rated_voltage(400.0, Some(0.07)), 440.0);
        assert_eq!(default_rated_voltage(400.0, Some(0.14)), 480.0);
        // Above the table: rounded up to 100 V (our choice): 11 kV / 0.93 = 11 828 V.
        assert_eq!(default_rated_voltage(11_000.0, Some(0.07)), 11_900.0);
    }
}

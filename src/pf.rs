//! Power factor: targets with their quadrant, the tan φ arithmetic of correction, and the
//! `0.93 lag` / `0.97 lead` wording used in every human-facing output.
//!
//! Internally the library keeps P and Q and derives PF only for display or for a
//! comparison; PF is not additive.

use serde::{Deserialize, Serialize};
use std::fmt;

/// Which way the current is displaced from the voltage.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Quadrant {
    /// Inductive: Q > 0 (load convention).
    Lag,
    /// Capacitive: Q < 0 (load convention).
    Lead,
}

impl Quadrant {
    /// The word used in reports: `lag` or `lead`.
    pub fn word(self) -> &'static str {
        match self {
            Quadrant::Lag => "lag",
            Quadrant::Lead => "lead",
        }
    }
}

/// A power-factor target such as `0.95 lag`, `0.98 lead` or `1.0`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PfTarget {
    /// |cos φ|, in (0, 1].
    pub pf: f64,
    /// Quadrant of the target; irrelevant when `pf` is 1.
    pub quadrant: Quadrant,
}

impl PfTarget {
    /// Builds a lagging target.
    pub fn lag(pf: f64) -> Self {
        PfTarget {
            pf,
            quadrant: Quadrant::Lag,
        }
    }

    /// Builds a leading target.
    pub fn lead(pf: f64) -> Self {
        PfTarget {
            pf,
            quadrant: Quadrant::Lead,
        }
    }

    /// tan φ_t: positive for a lagging target, negative for a leading one, 0 at unity.
    pub fn tan_phi(&self) -> f64 {
        let t = tan_phi_of(self.pf);
        match self.quadrant {
            Quadrant::Lag => t,
            Quadrant::Lead => -t,
        }
    }

    /// Parses `0.95 lag`, `0.98 lead`, `0.95lag`, `1.0` or `1`. A bare number below 1 is
    /// read as lagging, the usual meaning of a tariff threshold.
    pub fn parse(text: &str) -> Result<Self, String> {
        let (pf, quadrant) = Self::parse_unchecked(text).ok_or_else(|| {
            format!("`{text}` is not a power factor; write e.g. `0.95 lag`, `0.98 lead` or `1.0`")
        })?;
        Self::checked(pf, quadrant).map_err(|m| format!("`{text}`: {m}"))
    }

    /// Reads the number and the quadrant of `0.95 lag`, `0.98 lead` or `1.0` without
    /// checking the range (a bare number is lagging); `None` when the text is not a number
    /// with an optional `lag`/`lead`.
    pub fn parse_unchecked(text: &str) -> Option<(f64, Quadrant)> {
        let t = text.trim().to_ascii_lowercase();
        let (num, quad) = if let Some(n) = t.strip_suffix("lag") {
            (n.trim(), Quadrant::Lag)
        } else if let Some(n) = t.strip_suffix("lead") {
            (n.trim(), Quadrant::Lead)
        } else {
            (t.as_str(), Quadrant::Lag)
        };
        num.parse().ok().map(|pf| (pf, quad))
    }

    /// Validates the range: a target PF must lie in [0.5, 1.0].
    pub fn checked(pf: f64, quadrant: Quadrant) -> Result<Self, String> {
        if !(0.5..=1.0).contains(&pf) {
            return Err(format!(
                "target power factor {pf} is outside the allowed range 0.5 to 1.0"
            ));
        }
        Ok(PfTarget { pf, quadrant })
    }
}

impl fmt::Display for PfTarget {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.pf >= 1.0 {
            write!(f, "1.00")
        } else {
            write!(f, "{:.2} {}", self.pf, self.quadrant.word())
        }
    }
}

impl<'de> Deserialize<'de> for PfTarget {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Raw {
            Num(f64),
            Text(String),
        }
        match Raw::deserialize(d)? {
            Raw::Num(x) => PfTarget::checked(x, Quadrant::Lag).map_err(serde::de::Error::custom),
            Raw::Text(s) => PfTarget::parse(&s).map_err(serde::de::Error::custom),
        }
    }
}

impl Serialize for PfTarget {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&self.to_string())
    }
}

/// tan φ for a given |cos φ| (0 < pf ≤ 1).
pub fn tan_phi_of(pf: f64) -> f64 {
    let pf = pf.clamp(1e-9, 1.0);
    (1.0 - pf * pf).max(0.0).sqrt() / pf
}

/// The power factor a utility bills, worked out from the energy registers of a period.
///
/// The billed figure belongs to the inductive register: energy PF = E_P / sqrt(E_P² +
/// E_Q,ind²), with E_P the active energy imported, so its quadrant is `lag` whenever the
/// inductive register holds anything, and `lead` only when it is empty and the capacitive
/// register is not. The capacitive register gets its own figures beside it, because many
/// tariffs bill capacitive energy separately (often stated as tan φ).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BilledPf {
    /// E_P / sqrt(E_P² + E_Q,ind²), 0..1 (1 with empty registers, 0 with reactive energy
    /// and no active energy imported).
    pub energy_pf: f64,
    /// `lag` when E_Q,ind > 0; `lead` when E_Q,ind = 0 and E_Q,cap > 0; `lag` (shown as
    /// `1.00`) when both are zero.
    pub quadrant: Quadrant,
    /// tan φ = E_Q,ind / E_P as tariffs state it; `None` when E_P = 0.
    pub tan_phi: Option<f64>,
    /// E_Q,cap / E_P; `None` when E_P = 0.
    pub tan_phi_capacitive: Option<f64>,
    /// E_P / sqrt(E_P² + E_Q,cap²), 0..1, leading.
    pub capacitive_pf: f64,
}

impl BilledPf {
    /// Figures of a period from its active import (kWh) and its inductive and capacitive
    /// reactive registers (kvarh, both ≥ 0).
    pub fn from_registers(kwh_import: f64, kvarh_inductive: f64, kvarh_capacitive: f64) -> Self {
        let ratio_pf = |q: f64| {
            if kwh_import > 0.0 {
                kwh_import / kwh_import.hypot(q)
            } else if q > 0.0 {
                0.0
            } else {
                1.0
            }
        };
        let tan = |q: f64| (kwh_import > 0.0).then(|| q / kwh_import);
        BilledPf {
            energy_pf: ratio_pf(kvarh_inductive),
            quadrant: if kvarh_inductive <= 0.0 && kvarh_capacitive > 0.0 {
                Quadrant::Lead
            } else {
                Quadrant::Lag
            },
            tan_phi: tan(kvarh_inductive),
            tan_phi_capacitive: tan(kvarh_capacitive),
            capacitive_pf: ratio_pf(kvarh_capacitive),
        }
    }
}

/// Reactive power (kvar) a capacitor bank must deliver to move a load of `p_kw` from
/// lagging PF `from` to lagging PF `to`: Q_c = P·(tan φ1 − tan φ2).
pub fn kvar_to_correct(p_kw: f64, from: f64, to: f64) -> f64 {
    p_kw * (tan_phi_of(from) - tan_phi_of(to))
}

/// |cos φ| of a (P, Q) pair; 1 when both are zero.
pub fn pf_of(p: f64, q: f64) -> f64 {
    let s = p.hypot(q);
    if s <= 0.0 {
        1.0
    } else {
        p.abs() / s
    }
}

/// Quadrant of a reactive power: lag for Q ≥ 0, lead for Q < 0.
pub fn quadrant_of(q: f64) -> Quadrant {
    if q < 0.0 {
        Quadrant::Lead
    } else {
        Quadrant::Lag
    }
}

/// Formats a PF with its quadrant, e.g. `0.93 lag`. Unity prints as `1.00`.
pub fn format_pf(pf: f64, quadrant: Quadrant) -> String {
    let shown = format!("{pf:.2}");
    if shown == "1.00" {
        shown
    } else {
        format!("{shown} {}", quadrant.word())
    }
}

/// Formats the PF of a (P, Q) pair with its quadrant.
pub fn format_pq(p: f64, q: f64) -> String {
    format_pf(pf_of(p, q), quadrant_of(q))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_targets_in_both_quadrants() {
        assert_eq!(PfTarget::parse("0.95 lag").unwrap(), PfTarget::lag(0.95));
        assert_eq!(PfTarget::parse("0.98 LEAD").unwrap(), PfTarget::lead(0.98));
        assert_eq!(PfTarget::parse("1.0").unwrap().tan_phi(), 0.0);
        assert!(PfTarget::parse("0.95 lag").unwrap().tan_phi() > 0.0);
        assert!(PfTarget::parse("0.95 lead").unwrap().tan_phi() < 0.0);
        assert!(PfTarget::parse("1.2").is_err());
        assert!(PfTarget::parse("abc").is_err());
    }

    // Billing thresholds seen in tariffs, common practice: cos φ 0.9 ↔ tan φ 0.4843,
    // cos φ 0.95 ↔ tan φ 0.3287, tan φ 0.4 ↔ cos φ 0.9285.
    #[test]
    fn tariff_thresholds() {
        assert!((tan_phi_of(0.9) - 0.4843).abs() < 1e-4);
        assert!((tan_phi_of(0.95) - 0.3287).abs() < 1e-4);
        assert!((pf_of(1.0, 0.4) - 0.9285).abs() < 1e-4);
    }

    // A day of 12 h at 100 kW / 60 kvar lagging, then 12 h at 10 kW / 70 kvar leading, no
    // bank (worked by hand): E_P = 1200 + 120 = 1320 kWh, E_Q,ind = 720 kvarh, E_Q,cap =
    // 840 kvarh. Billed PF = 1320 / sqrt(1320² + 720²) = 1320 / 1503.6 = 0.8779 lag (the
    // figure belongs to the inductive register, even though more capacitive energy flowed);
    // tan φ = 720 / 1320 = 0.5455; capacitive: 840 / 1320 = 0.6364 and
    // 1320 / sqrt(1320² + 840²) = 1320 / 1564.6 = 0.8437.
    #[test]
    fn billed_pf_belongs_to_the_inductive_register() {
        let b = BilledPf::from_registers(1320.0, 720.0, 840.0);
        assert!((b.energy_pf - 0.8779).abs() < 1e-4, "{b:?}");
        assert_eq!(b.quadrant, Quadrant::Lag);
        assert!((b.tan_phi.unwrap() - 0.5455).abs() < 1e-4);
        assert!((b.tan_phi_capacitive.unwrap() - 0.6364).abs() < 1e-4);
        assert!((b.capacitive_pf - 0.8437).abs() < 1e-4);
        // Only capacitive energy: the figure is 1 (no inductive energy billed) and the
        // quadrant says lead; with no active import tan φ is undefined.
        let c = BilledPf::from_registers(100.0, 0.0, 30.0);
        assert_eq!((c.energy_pf, c.quadrant), (1.0, Quadrant::Lead));
        assert_eq!(BilledPf::from_registers(0.0, 5.0, 0.0).tan_phi, None);
    }

    #[test]
    fn formats_with_quadrant() {
        assert_eq!(format_pq(100.0, 40.0), "0.93 lag");
        assert_eq!(format_pq(100.0, -25.0), "0.97 lead");
        assert_eq!(format_pq(100.0, 0.0), "1.00");
    }
}

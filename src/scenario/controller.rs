//! Validation of `[controller]` and `[controller.protection]`: target PF, dead band,
//! delays, discharge time, ordering, measurement, averaging, export mode and protections.

use super::check::{phase_index, range, range_open};
use super::schema::{
    ControllerSection, ProtectionSection, ReversedValue, TargetPfValue, WiringSection,
};
use crate::controller::{Channel, ControllerParams, Measurement, ProtectionParams, VoltagePair};
use crate::error::FieldError;
use crate::pf::{PfTarget, Quadrant};

/// Key of the dead band given in kvar.
pub const DEAD_BAND_KVAR_KEY: &str = "controller.dead_band_kvar";
/// Key of the dead band given as a fraction of the smallest switched step.
pub const DEAD_BAND_FRACTION_KEY: &str = "controller.dead_band_fraction";

/// What `[controller]` gives, beyond the controller's own settings.
pub(super) struct ControllerSettings {
    /// The controller's settings.
    pub params: ControllerParams,
    /// The key that set the dead band; `None` when the default applies.
    pub dead_band_key: Option<&'static str>,
    /// Discharge-device time of the capacitors, s, if given.
    pub capacitor_discharge_s: Option<f64>,
}

/// The target PF as written, checked against 0.5 to 1.0 in either quadrant.
fn target(v: Option<&TargetPfValue>) -> Result<PfTarget, FieldError> {
    const KEY: &str = "controller.target_pf";
    const RANGE: &str = "the allowed range 0.5 to 1.0, lagging or leading";
    const FORMS: &str = "write e.g. \"0.95 lag\", \"0.98 lead\" or 1.0 (a bare number is lagging)";
    let (pf, quadrant, shown) = match v {
        None => return Ok(PfTarget::lag(0.95)),
        Some(TargetPfValue::Number(x)) => (*x, Quadrant::Lag, format!("{x}")),
        Some(TargetPfValue::Text(t)) => match PfTarget::parse_unchecked(t) {
            Some((x, q)) => (x, q, format!("\"{t}\"")),
            None => {
                return Err(FieldError::new(
                    KEY,
                    format!("\"{t}\" is not a power factor; {FORMS}, in {RANGE}"),
                ))
            }
        },
    };
    PfTarget::checked(pf, quadrant)
        .map_err(|_| FieldError::new(KEY, format!("{shown} is outside {RANGE}; {FORMS}")))
}

/// The controller these keys describe, for a bus of nominal voltage `u_n` and a bank whose
/// smallest switched step is `smallest` kvar.
pub(super) fn controller(
    c: &ControllerSection,
    u_n: f64,
    smallest: f64,
) -> Result<ControllerSettings, FieldError> {
    let target = target(c.target_pf.as_ref())?;
    let (dead_band_kvar, dead_band_key) = match (c.dead_band_kvar, c.dead_band_fraction) {
        (Some(_), Some(_)) => {
            return Err(FieldError::new(
                DEAD_BAND_KVAR_KEY,
                "give `dead_band_kvar` or `dead_band_fraction`, not both",
            ))
        }
        (Some(b), None) => (
            range(DEAD_BAND_KVAR_KEY, b, 0.0, 100_000.0, "kvar")?,
            Some(DEAD_BAND_KVAR_KEY),
        ),
        (None, fr) => (
            range(
                DEAD_BAND_FRACTION_KEY,
                fr.unwrap_or(0.65),
                0.0,
                5.0,
                "× smallest step",
            )? * smallest,
            fr.map(|_| DEAD_BAND_FRACTION_KEY),
        ),
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
        // The default waits as long as the usual discharge device of IEC 60831-1 takes to
        // bring a capacitor down to 75 V (3 min, from memory), so that default settings
        // never reclose a charged step.
        c.discharge_time_s.unwrap_or(crate::bank::IEC_DISCHARGE_S),
        0.0,
        86_400.0,
        "s",
    )?;
    let measurement = measurement(c)?;
    let per_phase = c.measurement.as_deref() == Some("per-phase");
    let measurement_voltage = match (&c.measurement_voltage, measurement) {
        (None, _) => None,
        (Some(v), Measurement::SinglePhase(_)) => Some(VoltagePair::parse(v).ok_or_else(|| {
            FieldError::new(
                "controller.measurement_voltage",
                format!(
                    "`{v}` is not a voltage input; write `an`, `bn`, `cn` or a pair of lines \
                     such as `bc`"
                ),
            )
        })?),
        (Some(_), _) => {
            return Err(FieldError::new(
                "controller.measurement_voltage",
                "only meaningful with measurement = \"single-phase\"",
            ))
        }
    };
    let phase_dead_band_kvar = match c.phase_dead_band_kvar {
        None => None,
        Some(_) if !per_phase => {
            return Err(FieldError::new(
                "controller.phase_dead_band_kvar",
                "only meaningful with measurement = \"per-phase\"",
            ))
        }
        Some(b) => Some(range(
            "controller.phase_dead_band_kvar",
            b,
            0.0,
            100_000.0,
            "kvar",
        )?),
    };
    let wired = c
        .wiring
        .as_ref()
        .map(|w| wiring(w, measurement, measurement_voltage))
        .transpose()?;
    let averaging_s = range(
        "controller.averaging_s",
        c.averaging_s.unwrap_or(0.0),
        0.0,
        3600.0,
        "s",
    )?;
    let protection = protection(&c.protection, u_n)?;
    Ok(ControllerSettings {
        params: ControllerParams {
            target,
            dead_band_kvar,
            connect_delay_s,
            disconnect_delay_s,
            discharge_time_s,
            ordering: c.ordering.unwrap_or_default(),
            measurement,
            averaging_s,
            export_mode: c.export_mode.unwrap_or_default(),
            protection,
            detection: None,
            measurement_voltage,
            per_phase,
            phase_dead_band_kvar,
            wired,
        },
        dead_band_key,
        capacitor_discharge_s: c
            .capacitor_discharge_s
            .map(|x| range("controller.capacitor_discharge_s", x, 0.0, 3600.0, "s"))
            .transpose()?,
    })
}

/// Measurement mode and phase.
fn measurement(c: &ControllerSection) -> Result<Measurement, FieldError> {
    match c.measurement.as_deref().unwrap_or("three-phase") {
        "three-phase" => {
            if c.measurement_phase.is_some() {
                return Err(FieldError::new(
                    "controller.measurement_phase",
                    "only meaningful with measurement = \"single-phase\"",
                ));
            }
            Ok(Measurement::ThreePhase)
        }
        "per-phase" => {
            if c.measurement_phase.is_some() {
                return Err(FieldError::new(
                    "controller.measurement_phase",
                    "only meaningful with measurement = \"single-phase\"",
                ));
            }
            Ok(Measurement::ThreePhase)
        }
        "single-phase" => Ok(Measurement::SinglePhase(phase_index(
            "controller.measurement_phase",
            c.measurement_phase.as_deref().unwrap_or("a"),
        )?)),
        other => Err(FieldError::new(
            "controller.measurement",
            format!(
                "`{other}` is not a measurement mode; write `three-phase`, `single-phase` or \
                 `per-phase`"
            ),
        )),
    }
}

/// `[controller.wiring]`: the channels as actually wired, starting from the assumption.
fn wiring(
    w: &WiringSection,
    measurement: Measurement,
    voltage: Option<VoltagePair>,
) -> Result<[Channel; 3], FieldError> {
    const KEY: &str = "controller.wiring";
    let mut ch = [Channel::phase(0), Channel::phase(1), Channel::phase(2)];
    match measurement {
        Measurement::SinglePhase(x) => {
            let mut c = Channel {
                current: x,
                reversed: false,
                voltage: voltage.unwrap_or(VoltagePair::Ln(x)),
            };
            if let Some(cur) = &w.current {
                c.current = phase_index(&format!("{KEY}.current"), cur)?;
            }
            match &w.reversed {
                None => {}
                Some(ReversedValue::Flag(b)) => c.reversed = *b,
                Some(ReversedValue::Channels(_)) => {
                    return Err(FieldError::new(
                        format!("{KEY}.reversed"),
                        "write `true` or `false` for a single-phase measurement",
                    ))
                }
            }
            if let Some(v) = &w.voltage {
                let pair = VoltagePair::parse(v).ok_or_else(|| {
                    FieldError::new(
                        format!("{KEY}.voltage"),
                        format!("`{v}` is not a voltage input; write `an`, `bn`, `cn` or a pair of lines such as `bc`"),
                    )
                })?;
                if pair.is_line_to_line() != c.voltage.is_line_to_line() {
                    return Err(FieldError::new(
                        format!("{KEY}.voltage"),
                        format!(
                            "`{v}` is not of the kind the controller's voltage input takes \
                             (`{}`): line to neutral and line to line are not interchanged \
                             by a wiring slip",
                            c.voltage.label()
                        ),
                    ));
                }
                c.voltage = pair;
            }
            ch[0] = c;
        }
        Measurement::ThreePhase => {
            if w.voltage.is_some() {
                return Err(FieldError::new(
                    format!("{KEY}.voltage"),
                    "only meaningful with measurement = \"single-phase\"",
                ));
            }
            if let Some(cur) = &w.current {
                let key = format!("{KEY}.current");
                let letters: Vec<char> = cur.trim().chars().collect();
                let bad = || {
                    FieldError::new(
                        key.clone(),
                        format!(
                            "`{cur}` is not a wiring of three channels; write the lines the \
                             channels a, b and c carry, each once, e.g. `bca`"
                        ),
                    )
                };
                if letters.len() != 3 {
                    return Err(bad());
                }
                let mut seen = [false; 3];
                for (i, l) in letters.iter().enumerate() {
                    let y = phase_index(&key, &l.to_string()).map_err(|_| bad())?;
                    if seen[y] {
                        return Err(bad());
                    }
                    seen[y] = true;
                    ch[i].current = y;
                }
            }
            match &w.reversed {
                None => {}
                Some(ReversedValue::Flag(_)) => {
                    return Err(FieldError::new(
                        format!("{KEY}.reversed"),
                        "name the reversed channels, e.g. \"a\" or \"abc\"",
                    ))
                }
                Some(ReversedValue::Channels(s)) => {
                    for l in s.trim().chars() {
                        let i = phase_index(&format!("{KEY}.reversed"), &l.to_string())?;
                        ch[i].reversed = true;
                    }
                }
            }
        }
    }
    Ok(ch)
}

/// `[controller.protection]`.
fn protection(p: &ProtectionSection, u_n: f64) -> Result<ProtectionParams, FieldError> {
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
    Ok(ProtectionParams {
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
            Some(x) if x == 0 || x > 3600 => {
                return Err(FieldError::new(
                    "controller.protection.max_operations_per_hour",
                    format!("{x} is outside the allowed range 1 to 3600"),
                ))
            }
            x => x,
        },
    })
}

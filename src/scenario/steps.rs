//! Validation of the `[[steps]]` tables: output (effective kvar at U_n, or the
//! capacitors' catalogue rating), phase and connection, detuning, contactor life, capacitor rating,
//! repetition and fault injection.
//!
//! A step's output is given one of two ways. `kvar` is the effective output at U_n, what
//! the step delivers on the bus whatever its parts. `rated_kvar` with `rated_voltage_v` is
//! the catalogue rating of its capacitors, Q_R at U_R; behind a detuning reactor of ratio p
//! the capacitors see U/(1 − p), so the step delivers Q = Q_R·(U/U_R)²/(1 − p) at the
//! connection voltage U (line to line for a three-phase step, star or delta, and for a
//! single-phase step line to line; line to neutral for a single-phase step line to
//! neutral). For example 50 kvar rated at 440 V behind a 7 % reactor on a 400 V
//! bus delivers 50·(400/440)²/0.93 = 44.43 kvar.
//!
//! Steps are numbered from 1 in the order the tables expand (a table with `count = 3`
//! makes three consecutive numbers). Errors name a table the way a user counts it, by its
//! position from 1 among the `[[steps]]` tables, and say which step numbers it makes:
//! `[[steps]] table 2 (steps 3 to 5).kvar`.

use super::check::{phase_index, range, range_open};
use super::schema::{FaultSection, StepSection};
use crate::bank::{Fault, FaultKind, StepPhase, StepSpec, MAX_STEPS};
use crate::error::FieldError;

/// How errors name table `table` (from 1) making steps `first` to `first + count − 1`.
pub(super) fn table_label(table: usize, first: usize, count: u32) -> String {
    if count == 1 {
        format!("[[steps]] table {table} (step {first})")
    } else {
        format!(
            "[[steps]] table {table} (steps {first} to {})",
            first + count as usize - 1
        )
    }
}

/// The steps these tables describe, in number order, for a bus of nominal voltage `u_n`.
pub(super) fn steps(tables: &[StepSection], u_n: f64) -> Result<Vec<StepSpec>, FieldError> {
    let mut steps = Vec::new();
    for (i, st) in tables.iter().enumerate() {
        let first = steps.len() + 1;
        let count = st.count.unwrap_or(1);
        if count == 0 || count as usize > MAX_STEPS {
            return Err(FieldError::new(
                format!("[[steps]] table {}.count", i + 1),
                format!(
                    "{count} is outside the allowed range 1 to {MAX_STEPS} (steps made by this \
                     table, numbered from {first})"
                ),
            ));
        }
        let label = table_label(i + 1, first, count);
        let key = |k: &str| format!("{label}.{k}");
        let spec = step(st, u_n, &key)?;
        for _ in 0..count {
            steps.push(spec.clone());
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
    Ok(steps)
}

/// One table's step; `key` turns a field name into the key errors show.
fn step(st: &StepSection, u_n: f64, key: &dyn Fn(&str) -> String) -> Result<StepSpec, FieldError> {
    let phase = phase(st, key)?;
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
    let fault = st.fault.as_ref().map(|f| fault(f, key)).transpose()?;
    let u_conn = phase.connection_voltage_v(u_n);
    let rated_voltage = |name: &str, v: f64| {
        range(
            &key(name),
            v,
            (0.8 * u_conn).round(),
            (3.0 * u_conn).round(),
            "V",
        )
    };
    let mut capacitor_rated_voltage_v = st
        .capacitor_rated_voltage_v
        .map(|v| rated_voltage("capacitor_rated_voltage_v", v))
        .transpose()?;
    let kvar = match (st.kvar, st.rated_kvar) {
        (Some(_), Some(_)) => {
            return Err(FieldError::new(
                key("rated_kvar"),
                "give `kvar` (the effective output at U_n) or `rated_kvar` with \
                 `rated_voltage_v` (the capacitors' catalogue rating), not both",
            ))
        }
        (None, None) => {
            return Err(FieldError::new(
                key("kvar"),
                "missing: give `kvar` (the effective output at U_n, kvar) or `rated_kvar` \
                 with `rated_voltage_v` (the capacitors' catalogue rating)",
            ))
        }
        (Some(q), None) => {
            if st.rated_voltage_v.is_some() {
                return Err(FieldError::new(
                    key("rated_voltage_v"),
                    "belongs with `rated_kvar` (the catalogue rating); with `kvar` give the \
                     capacitors' rated voltage as `capacitor_rated_voltage_v`",
                ));
            }
            range_open(&key("kvar"), q, 0.0, 100_000.0, "kvar")?
        }
        (None, Some(q_r)) => {
            let q_r = range_open(&key("rated_kvar"), q_r, 0.0, 100_000.0, "kvar")?;
            let u_r = st.rated_voltage_v.ok_or_else(|| {
                FieldError::new(
                    key("rated_voltage_v"),
                    format!(
                        "missing: `rated_kvar` needs the voltage it is rated at, V ({} to {} \
                         here)",
                        (0.8 * u_conn).round(),
                        (3.0 * u_conn).round()
                    ),
                )
            })?;
            if capacitor_rated_voltage_v.is_some() {
                return Err(FieldError::new(
                    key("capacitor_rated_voltage_v"),
                    "`rated_voltage_v` already gives the capacitors' rated voltage; leave \
                     this key out",
                ));
            }
            let u_r = rated_voltage("rated_voltage_v", u_r)?;
            capacitor_rated_voltage_v = Some(u_r);
            let q = effective_kvar(q_r, u_r, u_conn, detuning);
            range_open(
                &key("rated_kvar"),
                q,
                0.0,
                100_000.0,
                "kvar (effective at U_n)",
            )?
        }
    };
    Ok(StepSpec {
        kvar,
        phase,
        fixed: st.fixed.unwrap_or(false),
        detuning,
        rated_operations,
        capacitor_rated_voltage_v,
        fault,
    })
}

/// Effective output at the connection voltage `u_conn_v` of capacitors rated `rated_kvar`
/// at `rated_voltage_v`, behind a detuning reactor of ratio `detuning` (none: plain), kvar:
/// Q = Q_R·(U/U_R)²/(1 − p). The reactor's voltage drop raises the capacitor voltage to
/// U/(1 − p), so the step delivers more than the capacitor's output at U would be.
pub fn effective_kvar(
    rated_kvar: f64,
    rated_voltage_v: f64,
    u_conn_v: f64,
    detuning: Option<f64>,
) -> f64 {
    let p = detuning.unwrap_or(0.0);
    rated_kvar * (u_conn_v / rated_voltage_v).powi(2) / (1.0 - p)
}

/// Where and how a step is connected: `phase` (`abc`, a phase, or a pair of lines) and,
/// for a three-phase step, `connection` (`delta` or `star`).
fn phase(st: &StepSection, key: &dyn Fn(&str) -> String) -> Result<StepPhase, FieldError> {
    const ALLOWED: &str = "write `abc` (three-phase), `a`, `b` or `c` (line to neutral), or \
                           `ab`, `bc` or `ca` (line to line)";
    let written = st.phase.as_deref().map(str::trim);
    let phase = match written.map(str::to_ascii_lowercase).as_deref() {
        None | Some("abc") | Some("3") => StepPhase::Three,
        Some("ab") | Some("ba") => StepPhase::Line(0),
        Some("bc") | Some("cb") => StepPhase::Line(1),
        Some("ca") | Some("ac") => StepPhase::Line(2),
        Some(p) => StepPhase::Single(phase_index(&key("phase"), p).map_err(|_| {
            FieldError::new(
                key("phase"),
                format!(
                    "`{}` is not a phase or a pair of lines; {ALLOWED}",
                    written.unwrap_or(p)
                ),
            )
        })?),
    };
    match st.connection.as_deref().map(str::trim) {
        None => Ok(phase),
        Some(c) if !phase.is_three_phase() => Err(FieldError::new(
            key("connection"),
            format!(
                "`{c}` given for a single-phase step (phase = \"{}\"); `connection` is only \
                 for a three-phase step (`delta` or `star`), leave it out here",
                phase.label()
            ),
        )),
        Some("delta") => Ok(StepPhase::Three),
        Some("star") => Ok(StepPhase::Star),
        Some(other) => Err(FieldError::new(
            key("connection"),
            format!(
                "`{other}` is not a connection of a three-phase step; write `delta` (the \
                 default) or `star` (star point earthed)"
            ),
        )),
    }
}

/// A step's injected fault.
fn fault(fs: &FaultSection, key: &dyn Fn(&str) -> String) -> Result<Fault, FieldError> {
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
                FieldError::new(
                    key("fault.fraction"),
                    "a `capacitance-loss` fault needs `fraction` (more than 0, less than 1)",
                )
            })?;
            if !(x > 0.0 && x < 1.0) {
                return Err(FieldError::new(
                    key("fault.fraction"),
                    format!("{x} is outside the allowed range: more than 0 and less than 1"),
                ));
            }
            FaultKind::CapacitanceLoss(x)
        }
        "stuck-closed" => FaultKind::StuckClosed,
        other => {
            return Err(FieldError::new(
                key("fault.kind"),
                format!(
                    "`{other}` is not a fault kind; write `open`, `capacitance-loss` or \
                     `stuck-closed`"
                ),
            ))
        }
    };
    Ok(Fault { kind, from_s: from })
}

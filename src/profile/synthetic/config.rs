//! The scenario-file shape of the synthetic load (`[load.synthetic]`), its defaults, and
//! its validation with key-and-range error messages.
//!
//! Everything here is plain data: the generator in the parent module turns a validated
//! [`SyntheticConfig`] into a [`super::SyntheticProfile`].

use crate::error::FieldError;
use serde::{Deserialize, Serialize};

/// Largest power accepted for any one load part, kW.
const MAX_KW: f64 = 100_000.0;
/// Smallest power factor accepted.
const MIN_PF: f64 = 0.05;
/// Smallest non-zero on, off, burst or pause time, s. It bounds the number of switching
/// events a unit can make per simulated second.
const MIN_DURATION_S: f64 = 0.1;
/// Largest on, off, burst, pause or cloud time, s (about 116 days).
const MAX_DURATION_S: f64 = 1.0e7;
/// Largest number of units in one group.
const MAX_UNITS: u32 = 10_000;
/// Largest measurement noise, percent.
const MAX_NOISE_PERCENT: f64 = 20.0;

/// The seeded synthetic load generator's settings, embedded in a scenario as
/// `[load.synthetic]`. Every field has a default; an empty table gives a steady 100 kW
/// three-phase base load at 0.85 lag.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SyntheticConfig {
    /// Relative Gaussian measurement noise (one standard deviation) on each phase's P and
    /// Q, percent of the value; 0 to 20. Default 0 (no noise).
    pub noise_percent: f64,
    /// The steady part of the load. Default: 100 kW at 0.85 lag, all hours.
    pub base: BaseLoad,
    /// Working days and shift hours, used by the base load levels and by groups that run
    /// during shifts. Default: Monday to Friday, 06:00–14:00 and 14:00–22:00.
    pub shifts: ShiftPattern,
    /// Groups of identical machines (compressors, pumps, fans, chillers), each unit
    /// switching on and off by itself (`[[load.synthetic.machines]]`). Default: none.
    pub machines: Vec<MachineGroup>,
    /// Groups of fast fluctuating loads such as welders and presses, with second-scale
    /// bursts (`[[load.synthetic.welders]]`). Default: none.
    pub welders: Vec<WelderGroup>,
    /// On-site photovoltaic arrays, which subtract active power and can push the site's P
    /// negative (`[[load.synthetic.pv]]`). Default: none.
    pub pv: Vec<PvArray>,
}

impl Default for SyntheticConfig {
    fn default() -> Self {
        SyntheticConfig {
            noise_percent: 0.0,
            base: BaseLoad::default(),
            shifts: ShiftPattern::default(),
            machines: Vec::new(),
            welders: Vec::new(),
            pv: Vec::new(),
        }
    }
}

/// The steady base load: lighting, offices, small drives, standing losses.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct BaseLoad {
    /// Three-phase active power during shift hours, kW; 0 to 100 000. Default 100. It also
    /// holds outside shifts unless `night_kw` or `weekend_kw` say otherwise.
    pub kw: f64,
    /// Power factor (lagging), 0.05 to 1.0. Default 0.85.
    pub pf: f64,
    /// Three-phase kW on working days outside shift hours; 0 to 100 000. Default: `kw`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub night_kw: Option<f64>,
    /// Three-phase kW on days that are not working days (outside any shift that runs on
    /// from the day before); 0 to 100 000. Default: `night_kw` if given, else `kw`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub weekend_kw: Option<f64>,
    /// Share of the base load on phases a, b and c, each 0 to 1, adding up to 1 (within
    /// 0.001). Default: a third each (balanced).
    pub phase_shares: [f64; 3],
}

impl Default for BaseLoad {
    fn default() -> Self {
        BaseLoad {
            kw: 100.0,
            pf: 0.85,
            night_kw: None,
            weekend_kw: None,
            phase_shares: [1.0 / 3.0; 3],
        }
    }
}

/// A set of weekdays: either one text such as `"mon-fri"`, `"mon,wed,fri"`, `"fri-mon"`
/// or `"all"`, or a list such as `["mon", "tue", "sat"]` whose items may be ranges too.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum DayList {
    /// A comma-separated text of days and ranges.
    Text(String),
    /// A list of days and ranges.
    List(Vec<String>),
}

impl DayList {
    /// Parses the list into flags indexed Monday = 0 … Sunday = 6.
    pub fn parse(&self) -> Result<[bool; 7], String> {
        let mut days = [false; 7];
        let items: Vec<&str> = match self {
            DayList::Text(s) => s.split(',').collect(),
            DayList::List(v) => v.iter().flat_map(|s| s.split(',')).collect(),
        };
        for item in items {
            let item = item.trim().to_ascii_lowercase();
            if item.is_empty() {
                continue;
            }
            if matches!(item.as_str(), "all" | "daily" | "every day") {
                return Ok([true; 7]);
            }
            if let Some((from, to)) = item.split_once('-') {
                let a = weekday_index(from.trim())?;
                let b = weekday_index(to.trim())?;
                let mut d = a;
                loop {
                    days[d] = true;
                    if d == b {
                        break;
                    }
                    d = (d + 1) % 7;
                }
            } else {
                days[weekday_index(&item)?] = true;
            }
        }
        Ok(days)
    }
}

/// Index of a weekday name, Monday = 0; accepts `mon`, `monday`, `Mon`, `tues` and so on.
fn weekday_index(name: &str) -> Result<usize, String> {
    const FULL: [&str; 7] = [
        "monday",
        "tuesday",
        "wednesday",
        "thursday",
        "friday",
        "saturday",
        "sunday",
    ];
    let n = name.to_ascii_lowercase();
    FULL.iter()
        .position(|f| n.len() >= 3 && f.starts_with(n.as_str()))
        .ok_or_else(|| {
            format!(
                "`{name}` is not a weekday; use mon, tue, wed, thu, fri, sat, sun, \
                 a range such as mon-fri, or all"
            )
        })
}

/// Parses a daily time window `"HH:MM-HH:MM"` into seconds of the day (start, end). The
/// end may be `24:00`; an end at or before the start means the window runs past midnight.
pub fn parse_window(text: &str) -> Result<(f64, f64), String> {
    let bad = || {
        format!(
            "`{text}` is not a time window; write start-end in hours and minutes, \
             from 00:00 to 24:00, e.g. \"06:00-14:00\" or \"22:00-06:00\""
        )
    };
    let t = text.trim();
    let (a, b) = t
        .split_once('-')
        .or_else(|| t.split_once('–'))
        .ok_or_else(bad)?;
    let start = parse_clock(a.trim()).ok_or_else(bad)?;
    let end = parse_clock(b.trim()).ok_or_else(bad)?;
    if start >= 86_400.0 {
        return Err(format!(
            "`{text}`: a window cannot start at 24:00; start between 00:00 and 23:59"
        ));
    }
    if start == end {
        return Err(format!(
            "`{text}`: start and end are equal; use 00:00-24:00 for the whole day"
        ));
    }
    Ok((start, end))
}

/// Parses `H`, `HH:MM` or `HH:MM:SS` into seconds of the day, 0 to 86 400.
fn parse_clock(s: &str) -> Option<f64> {
    let mut parts = s.split(':');
    let h: u32 = parts.next()?.trim().parse().ok()?;
    let m: u32 = match parts.next() {
        Some(p) => p.trim().parse().ok()?,
        None => 0,
    };
    let sec: u32 = match parts.next() {
        Some(p) => p.trim().parse().ok()?,
        None => 0,
    };
    if parts.next().is_some() || m >= 60 || sec >= 60 {
        return None;
    }
    let total = h * 3600 + m * 60 + sec;
    (total <= 86_400).then_some(f64::from(total))
}

/// Working days and shift hours of the plant.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ShiftPattern {
    /// Working days, e.g. `"mon-fri"` or `["mon", "tue", "wed"]`. Default `"mon-fri"`.
    pub days: DayList,
    /// Shift periods on each working day, `"HH:MM-HH:MM"`. A period ending at or before
    /// its start runs past midnight and belongs to the day it starts on (a Friday night
    /// shift `"22:00-06:00"` runs into Saturday morning). Default
    /// `["06:00-14:00", "14:00-22:00"]`.
    pub hours: Vec<String>,
}

impl Default for ShiftPattern {
    fn default() -> Self {
        ShiftPattern {
            days: DayList::Text("mon-fri".into()),
            hours: vec!["06:00-14:00".into(), "14:00-22:00".into()],
        }
    }
}

/// How a load is connected.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Phase {
    /// Three-phase balanced: a third on each phase.
    Abc,
    /// Single-phase, line to neutral on phase a.
    A,
    /// Single-phase, line to neutral on phase b.
    B,
    /// Single-phase, line to neutral on phase c.
    C,
    /// Line to line between a and b (`ba` is the same connection).
    #[serde(alias = "ba")]
    Ab,
    /// Line to line between b and c (`cb` is the same connection).
    #[serde(alias = "cb")]
    Bc,
    /// Line to line between c and a (`ac` is the same connection).
    #[serde(alias = "ac")]
    Ca,
}

/// When a group may run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum RunWhen {
    /// At any time.
    Always,
    /// Only during shift hours (see [`ShiftPattern`]).
    Shifts,
    /// Only inside the group's own daily `window` on its `window_days`.
    Window,
}

/// How each unit of a machine group alternates between running and standing.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum DutyCycle {
    /// Run and stand times are drawn from exponential distributions with means `on_s`
    /// and `off_s`; each unit starts in a random state with the long-run odds.
    Random,
    /// Exactly `on_s` running then `off_s` standing, repeating; each unit starts at a
    /// random point of its cycle so the units do not switch together.
    Fixed,
}

/// A group of identical machines, e.g. three compressors.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct MachineGroup {
    /// A name for the group, for the user's own reference. Default empty.
    pub name: String,
    /// Number of units, 0 to 10 000; units switch independently. Default 1.
    pub units: u32,
    /// Active power of one running unit, kW (all phases together); 0 to 100 000.
    /// Default 10.
    pub kw: f64,
    /// Power factor of a running unit (lagging), 0.05 to 1.0. Default 0.8.
    pub pf: f64,
    /// Connection: `abc`, `a`, `b`, `c`, `ab`, `bc` or `ca`. Default `abc`.
    pub phase: Phase,
    /// When the units may run: `always`, `shifts` or `window`. Default `always`.
    pub runs: RunWhen,
    /// Daily window `"HH:MM-HH:MM"` used when `runs = "window"`. Default `"08:00-17:00"`.
    pub window: String,
    /// Days on which the window applies. Default `"all"`.
    pub window_days: DayList,
    /// Duty cycle: `random` (exponential run and stand times) or `fixed`. Default
    /// `random`.
    pub cycle: DutyCycle,
    /// Mean (random) or exact (fixed) running time of a unit, s; 0.1 to 10 000 000.
    /// Default 600.
    pub on_s: f64,
    /// Mean (random) or exact (fixed) standing time of a unit, s; 0 (runs without a
    /// break whenever allowed) or 0.1 to 10 000 000. Default 600.
    pub off_s: f64,
}

impl Default for MachineGroup {
    fn default() -> Self {
        MachineGroup {
            name: String::new(),
            units: 1,
            kw: 10.0,
            pf: 0.8,
            phase: Phase::Abc,
            runs: RunWhen::Always,
            window: "08:00-17:00".into(),
            window_days: DayList::Text("all".into()),
            cycle: DutyCycle::Random,
            on_s: 600.0,
            off_s: 600.0,
        }
    }
}

/// A group of fast fluctuating loads (welders, presses): random bursts of a few seconds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct WelderGroup {
    /// A name for the group, for the user's own reference. Default empty.
    pub name: String,
    /// Number of independent welding sets or presses, 0 to 10 000. Default 1.
    pub units: u32,
    /// Active power of one unit while it welds, kW; 0 to 100 000. Default 20.
    pub kw: f64,
    /// Power factor while welding (lagging), 0.05 to 1.0. Default 0.6.
    pub pf: f64,
    /// Connection: a line-to-line pair `ab`, `bc`, `ca` (the usual welder), a single
    /// phase `a`, `b`, `c`, or `abc`. Default `ab`.
    pub phase: Phase,
    /// When the units may weld: `always`, `shifts` or `window`. Default `shifts`.
    pub runs: RunWhen,
    /// Daily window `"HH:MM-HH:MM"` used when `runs = "window"`. Default `"08:00-17:00"`.
    pub window: String,
    /// Days on which the window applies. Default `"all"`.
    pub window_days: DayList,
    /// Mean length of a burst, s (exponential); 0.1 to 10 000 000. Default 2.
    pub burst_s: f64,
    /// Mean pause between bursts, s (exponential); 0 or 0.1 to 10 000 000. Default 8.
    pub pause_s: f64,
}

impl Default for WelderGroup {
    fn default() -> Self {
        WelderGroup {
            name: String::new(),
            units: 1,
            kw: 20.0,
            pf: 0.6,
            phase: Phase::Ab,
            runs: RunWhen::Shifts,
            window: "08:00-17:00".into(),
            window_days: DayList::Text("all".into()),
            burst_s: 2.0,
            pause_s: 8.0,
        }
    }
}

/// Which way a PV inverter working below unity PF moves reactive power.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum InverterReactive {
    /// The inverter absorbs reactive power (under-excited, as grid codes often ask to
    /// limit voltage rise): it adds inductive Q (Q > 0) to the site.
    Absorb,
    /// The inverter supplies reactive power (over-excited): it adds capacitive Q
    /// (Q < 0) to the site.
    Supply,
}

/// A rooftop PV array.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct PvArray {
    /// Output at solar noon on a clear day, kW (all phases together); 0 to 100 000.
    /// Default 50.
    pub peak_kw: f64,
    /// Hour of sunrise (output starts), 0 to 24. Default 6.
    pub sunrise_h: f64,
    /// Hour of sunset (output ends), after sunrise, 0 to 24. Default 20.
    pub sunset_h: f64,
    /// Inverter power factor, 0.05 to 1.0. Default 1.0 (no reactive power).
    pub pf: f64,
    /// Below unity PF: `absorb` (adds inductive Q) or `supply` (adds capacitive Q).
    /// Default `absorb`.
    pub reactive: InverterReactive,
    /// Connection: `abc`, a single phase, or a line-to-line pair. Default `abc`.
    pub phase: Phase,
    /// Random passing clouds; absent (the default) means a clear sky every day.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub clouds: Option<Clouds>,
}

impl Default for PvArray {
    fn default() -> Self {
        PvArray {
            peak_kw: 50.0,
            sunrise_h: 6.0,
            sunset_h: 20.0,
            pf: 1.0,
            reactive: InverterReactive::Absorb,
            phase: Phase::Abc,
            clouds: None,
        }
    }
}

/// Passing clouds: clear and shaded spells of exponential length.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Clouds {
    /// Mean length of a clear spell, s; 1 to 10 000 000. Default 1800.
    pub clear_s: f64,
    /// Mean length of a shaded spell, s; 1 to 10 000 000. Default 300.
    pub shade_s: f64,
    /// Fraction of the output lost while shaded, 0 to 1. Default 0.7.
    pub depth: f64,
}

impl Default for Clouds {
    fn default() -> Self {
        Clouds {
            clear_s: 1800.0,
            shade_s: 300.0,
            depth: 0.7,
        }
    }
}

/// Checks that `v` lies in `lo..=hi`; the message names the quantity, the value and the
/// allowed range with its unit.
fn check_range(key: String, what: &str, v: f64, lo: f64, hi: f64, unit: &str) -> Check {
    if (lo..=hi).contains(&v) {
        Ok(())
    } else {
        let u = if unit.is_empty() {
            String::new()
        } else {
            format!(" {unit}")
        };
        Err(FieldError::new(
            key,
            format!("{what} {v:?}{u} is outside {lo:?} to {hi:?}{u}"),
        ))
    }
}

type Check = Result<(), FieldError>;

fn check_kw(key: String, v: f64) -> Check {
    check_range(key, "power", v, 0.0, MAX_KW, "kW")
}

fn check_pf(key: String, v: f64) -> Check {
    check_range(key, "power factor", v, MIN_PF, 1.0, "")
}

/// A strictly positive duration (on time, burst).
fn check_on(key: String, what: &str, v: f64) -> Check {
    check_range(key, what, v, MIN_DURATION_S, MAX_DURATION_S, "s")
}

/// A duration that may also be zero (off time, pause).
fn check_off(key: String, what: &str, v: f64) -> Check {
    if v == 0.0 {
        return Ok(());
    }
    check_range(key, what, v, MIN_DURATION_S, MAX_DURATION_S, "s").map_err(|mut e| {
        e.message.push_str(", or 0 for none");
        e
    })
}

fn check_units(key: String, n: u32) -> Check {
    if n > MAX_UNITS {
        return Err(FieldError::new(
            key,
            format!("{n} units is outside 0 to {MAX_UNITS} units"),
        ));
    }
    Ok(())
}

fn check_days(key: String, d: &DayList) -> Check {
    d.parse().map(|_| ()).map_err(|m| FieldError::new(key, m))
}

fn check_window(key: String, w: &str) -> Check {
    parse_window(w)
        .map(|_| ())
        .map_err(|m| FieldError::new(key, m))
}

impl SyntheticConfig {
    /// Checks every field; `prefix` is the dotted key of this table in the scenario, e.g.
    /// `load.synthetic`. The error names the full key, e.g.
    /// `load.synthetic.machines[1].pf`, and states the allowed range and unit. Group
    /// indices count from 0, in file order.
    pub fn validate(&self, prefix: &str) -> Result<(), FieldError> {
        let k = |s: &str| format!("{prefix}.{s}");
        check_range(
            k("noise_percent"),
            "noise",
            self.noise_percent,
            0.0,
            MAX_NOISE_PERCENT,
            "%",
        )?;

        let b = &self.base;
        check_kw(k("base.kw"), b.kw)?;
        check_pf(k("base.pf"), b.pf)?;
        if let Some(v) = b.night_kw {
            check_kw(k("base.night_kw"), v)?;
        }
        if let Some(v) = b.weekend_kw {
            check_kw(k("base.weekend_kw"), v)?;
        }
        for (i, s) in b.phase_shares.iter().enumerate() {
            check_range(
                k(&format!("base.phase_shares[{i}]")),
                "phase share",
                *s,
                0.0,
                1.0,
                "",
            )?;
        }
        let sum: f64 = b.phase_shares.iter().sum();
        if (sum - 1.0).abs() > 1e-3 {
            return Err(FieldError::new(
                k("base.phase_shares"),
                format!("phase shares add up to {sum:?}; they must add up to 1.0"),
            ));
        }

        check_days(k("shifts.days"), &self.shifts.days)?;
        for (i, h) in self.shifts.hours.iter().enumerate() {
            check_window(k(&format!("shifts.hours[{i}]")), h)?;
        }

        for (i, m) in self.machines.iter().enumerate() {
            let g = |s: &str| k(&format!("machines[{i}].{s}"));
            check_units(g("units"), m.units)?;
            check_kw(g("kw"), m.kw)?;
            check_pf(g("pf"), m.pf)?;
            check_window(g("window"), &m.window)?;
            check_days(g("window_days"), &m.window_days)?;
            check_on(g("on_s"), "running time", m.on_s)?;
            check_off(g("off_s"), "standing time", m.off_s)?;
        }

        for (i, w) in self.welders.iter().enumerate() {
            let g = |s: &str| k(&format!("welders[{i}].{s}"));
            check_units(g("units"), w.units)?;
            check_kw(g("kw"), w.kw)?;
            check_pf(g("pf"), w.pf)?;
            check_window(g("window"), &w.window)?;
            check_days(g("window_days"), &w.window_days)?;
            check_on(g("burst_s"), "burst time", w.burst_s)?;
            check_off(g("pause_s"), "pause time", w.pause_s)?;
        }

        for (i, p) in self.pv.iter().enumerate() {
            let g = |s: &str| k(&format!("pv[{i}].{s}"));
            check_kw(g("peak_kw"), p.peak_kw)?;
            check_range(g("sunrise_h"), "sunrise", p.sunrise_h, 0.0, 24.0, "h")?;
            check_range(g("sunset_h"), "sunset", p.sunset_h, 0.0, 24.0, "h")?;
            if p.sunset_h <= p.sunrise_h {
                return Err(FieldError::new(
                    g("sunset_h"),
                    format!(
                        "sunset {:?} h must be later than sunrise {:?} h",
                        p.sunset_h, p.sunrise_h
                    ),
                ));
            }
            check_pf(g("pf"), p.pf)?;
            if let Some(c) = &p.clouds {
                check_range(
                    g("clouds.clear_s"),
                    "clear spell",
                    c.clear_s,
                    1.0,
                    MAX_DURATION_S,
                    "s",
                )?;
                check_range(
                    g("clouds.shade_s"),
                    "shaded spell",
                    c.shade_s,
                    1.0,
                    MAX_DURATION_S,
                    "s",
                )?;
                check_range(g("clouds.depth"), "cloud depth", c.depth, 0.0, 1.0, "")?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn day_lists() {
        let wd = |s: &str| DayList::Text(s.into()).parse().unwrap();
        assert_eq!(wd("mon-fri"), [true, true, true, true, true, false, false]);
        assert_eq!(wd("fri-mon"), [true, false, false, false, true, true, true]);
        assert_eq!(
            wd("Mon, wed,FRIDAY"),
            [true, false, true, false, true, false, false]
        );
        assert_eq!(wd("all"), [true; 7]);
        assert_eq!(wd(""), [false; 7]);
        let l = DayList::List(vec!["mon-wed".into(), "sat".into()]);
        assert_eq!(
            l.parse().unwrap(),
            [true, true, true, false, false, true, false]
        );
        assert!(DayList::Text("mo".into()).parse().is_err());
        assert!(DayList::Text("funday".into()).parse().is_err());
    }

    #[test]
    fn windows() {
        assert_eq!(parse_window("06:00-14:00").unwrap(), (21_600.0, 50_400.0));
        assert_eq!(
            parse_window(" 22:00 - 06:00 ").unwrap(),
            (79_200.0, 21_600.0)
        );
        assert_eq!(parse_window("0-24").unwrap(), (0.0, 86_400.0));
        assert_eq!(
            parse_window("07:30:15–08:00").unwrap(),
            (27_015.0, 28_800.0)
        );
        assert!(parse_window("06:00").is_err());
        assert!(parse_window("06:00-06:00").is_err());
        assert!(parse_window("24:00-06:00").is_err());
        assert!(parse_window("06:61-07:00").is_err());
        assert!(parse_window("25:00-26:00").is_err());
    }

    #[test]
    fn defaults_validate() {
        SyntheticConfig::default()
            .validate("load.synthetic")
            .unwrap();
        let c = SyntheticConfig {
            machines: vec![MachineGroup::default()],
            welders: vec![WelderGroup::default()],
            pv: vec![PvArray {
                clouds: Some(Clouds::default()),
                ..PvArray::default()
            }],
            ..SyntheticConfig::default()
        };
        c.validate("load.synthetic").unwrap();
    }

    #[test]
    fn error_names_key_and_range() {
        let mut machines = vec![MachineGroup::default(), MachineGroup::default()];
        machines[1].pf = 1.3;
        let c = SyntheticConfig {
            machines,
            ..SyntheticConfig::default()
        };
        let e = c.validate("load.synthetic").unwrap_err();
        assert_eq!(e.key, "load.synthetic.machines[1].pf");
        assert_eq!(e.message, "power factor 1.3 is outside 0.05 to 1.0");

        let c = SyntheticConfig {
            welders: vec![WelderGroup {
                pause_s: 0.01,
                ..WelderGroup::default()
            }],
            ..SyntheticConfig::default()
        };
        let e = c.validate("x").unwrap_err();
        assert_eq!(e.key, "x.welders[0].pause_s");
        assert!(e.message.contains("0.1 to 10000000.0 s"), "{}", e.message);
        assert!(e.message.contains("or 0 for none"), "{}", e.message);

        let c = SyntheticConfig {
            base: BaseLoad {
                phase_shares: [0.5, 0.5, 0.5],
                ..BaseLoad::default()
            },
            ..SyntheticConfig::default()
        };
        assert_eq!(c.validate("x").unwrap_err().key, "x.base.phase_shares");

        let c = SyntheticConfig {
            shifts: ShiftPattern {
                hours: vec!["06:00-14:00".into(), "lunch".into()],
                ..ShiftPattern::default()
            },
            ..SyntheticConfig::default()
        };
        assert_eq!(c.validate("x").unwrap_err().key, "x.shifts.hours[1]");

        let c = SyntheticConfig {
            pv: vec![PvArray {
                sunrise_h: 19.0,
                sunset_h: 7.0,
                ..PvArray::default()
            }],
            ..SyntheticConfig::default()
        };
        assert_eq!(c.validate("x").unwrap_err().key, "x.pv[0].sunset_h");

        let c = SyntheticConfig {
            noise_percent: f64::NAN,
            ..SyntheticConfig::default()
        };
        let e = c.validate("x").unwrap_err();
        assert_eq!(e.key, "x.noise_percent");
        assert!(e.message.contains("0.0 to 20.0 %"), "{}", e.message);
    }
}

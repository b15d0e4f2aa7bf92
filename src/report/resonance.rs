//! Outputs of `bankstep resonance`: the text tables (the states, their resonance and
//! amplification, and what detuning would do), the impedance curves as CSV for plotting,
//! and everything as one JSON object.
//!
//! In the text tables, states whose connected steps have the same sizes and detuning
//! (e.g. 1+2 and 3+4 of equal steps) behave alike and share one row; the CSV and JSON
//! keep every state.

use crate::harmonics::scan::{Peak, ScanGrid};
use crate::harmonics::survey::{Survey, SurveyState};
use crate::harmonics::{HarmonicVoltage, StepStress};
use crate::report::{approx, harmonic_name, num, steps_label, ReportError};
use crate::report::{file_name, HARDWARE_CAUTION};
use crate::scenario::Scenario;
use crate::timebase::HOURS_PER_YEAR;
use serde::ser::{SerializeSeq, SerializeStruct};
use serde::{Serialize, Serializer};
use std::io::Write;

/// What a resonance survey was made from: the scenario, the warning tolerance and, for
/// states from a run, the run length.
#[derive(Debug, Clone, Copy)]
pub struct ResonanceContext<'a> {
    /// The scenario surveyed.
    pub scenario: &'a Scenario,
    /// The survey.
    pub survey: &'a Survey,
    /// Length of the run the states came from, s (`None` when not from a run).
    pub run_s: Option<f64>,
}

/// Most rows of a text table.
const MAX_ROWS: usize = 64;

/// Most amplification columns in the text table (the lowest orders of the spectrum).
const MAX_AMPLIFICATION: usize = 4;

/// Key of states that behave alike: the size, detuning and phase of each connected step.
fn likeness(sc: &Scenario, mask: u64) -> Vec<(u64, u64, usize)> {
    let mut k: Vec<(u64, u64, usize)> = sc
        .steps
        .iter()
        .enumerate()
        .filter(|(i, _)| mask & (1u64 << i) != 0)
        .map(|(_, s)| {
            let phase = match s.phase {
                crate::bank::StepPhase::Three => 0,
                crate::bank::StepPhase::Single(p) => 1 + p,
            };
            (s.kvar.to_bits(), s.detuning.unwrap_or(0.0).to_bits(), phase)
        })
        .collect();
    k.sort_unstable();
    k
}

/// Groups of alike states: (index of the first state, indices of all, total time).
fn groups(ctx: &ResonanceContext<'_>) -> Vec<(usize, Vec<usize>, Option<f64>)> {
    let mut keys: Vec<Vec<(u64, u64, usize)>> = Vec::new();
    let mut out: Vec<(usize, Vec<usize>, Option<f64>)> = Vec::new();
    for (i, s) in ctx.survey.states.iter().enumerate() {
        let k = likeness(ctx.scenario, s.mask);
        match keys.iter().position(|x| *x == k) {
            Some(g) => {
                out[g].1.push(i);
                if let (Some(t), Some(x)) = (&mut out[g].2, s.time_s) {
                    *t += x;
                }
            }
            None => {
                keys.push(k);
                out.push((i, vec![i], s.time_s));
            }
        }
    }
    out
}

fn near_word(ctx: &ResonanceContext<'_>, s: &SurveyState) -> String {
    let hm = ctx.survey.scanner.model();
    let tol = ctx.scenario.resonance_tolerance;
    let orders = s
        .harmonics
        .order
        .into_iter()
        .chain(s.harmonics.peaks.iter().map(|p| p.order));
    for o in orders {
        if let Some(h) = hm.near_harmonic(o, tol) {
            return format!("near h{}", num(h, 0));
        }
    }
    if s.harmonics.order.is_none() {
        "-".to_string()
    } else {
        "clear".to_string()
    }
}

/// Writes the text tables.
pub fn write_text(ctx: &ResonanceContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
    let sc = ctx.scenario;
    let sv = ctx.survey;
    let hm = sv.scanner.model();
    let grid = sv.scanner.grid();
    let mut t = String::new();
    t.push_str(&format!(
        "bankstep {}: resonance scan of \"{}\" ({})\n",
        env!("CARGO_PKG_VERSION"),
        sc.name,
        file_name(&sc.path)
    ));
    let s_sc = hm.short_circuit_kva();
    let line = format!(
        "Bus {} V, {} Hz; short-circuit power {}; scan orders {} to {} by {}, peaks refined.",
        num(sc.supply.nominal_voltage_v, 0),
        num(sc.supply.frequency_hz, 0),
        if s_sc.is_finite() {
            format!("{} kVA", num(s_sc, 0))
        } else {
            "infinite (no resonance with the supply)".to_string()
        },
        num(grid.from, 0),
        num(grid.to, 0),
        grid.step
    );
    super::wrap_plain(&mut t, "", &line);
    if sc.spectrum.orders.is_empty() {
        t.push_str("Load harmonics: none given in the scenario.\n");
    } else {
        let list: Vec<String> = sc
            .spectrum
            .orders
            .iter()
            .map(|(h, p)| format!("h{} {} %", num(*h, 0), num(*p, 1)))
            .collect();
        let line = format!(
            "Load harmonics, current in % of the fundamental of {} kVA{}: {}.",
            num(sc.spectrum.reference_kva, 0),
            sc.spectrum
                .preset
                .map(|p| format!(", {} preset: {}", p.name(), p.source()))
                .unwrap_or_default(),
            list.join(", ")
        );
        super::wrap_plain(&mut t, "", &line);
    }
    let line = format!(
        "Limits: bus {}; capacitors {}. Warning tolerance ±{} orders.",
        hm.options.voltage_limits.name(),
        hm.options.capacitor_limits.values().standard,
        num(sc.resonance_tolerance, 2)
    );
    super::wrap_plain(&mut t, "", &line);
    t.push('\n');

    let amp_orders: Vec<f64> = sc
        .spectrum
        .orders
        .iter()
        .map(|x| x.0)
        .take(MAX_AMPLIFICATION)
        .collect();
    let gs = groups(ctx);
    t.push_str(&format!(
        "Bank states ({} state{}; alike states share a row)\n",
        sv.states.len(),
        if sv.states.len() == 1 { "" } else { "s" }
    ));
    let mut head = format!(
        "  {:<20}  {:>6}  {:>6}  {:>6}  {:>5}  {:>7}",
        "steps on", "kvar", "order", "peak", "f Hz", "|Z| ohm"
    );
    for h in &amp_orders {
        head.push_str(&format!("  {:>5}", format!("×h{}", num(*h, 0))));
    }
    head.push_str(&format!("  {:>6}  {:>7}", "THD_V", "status"));
    if ctx.run_s.is_some() {
        head.push_str(&format!("  {:>8}", "h/year"));
    }
    t.push_str(&head);
    t.push('\n');
    for (first, members, time) in gs.iter().take(MAX_ROWS) {
        let s = &sv.states[*first];
        let mut label = steps_label(&s.steps);
        if members.len() > 1 {
            label.push_str(&format!(" (+{} alike)", members.len() - 1));
        }
        let peak = s.harmonics.peaks.first();
        let mut row = format!(
            "  {:<20}  {:>6}  {:>6}  {:>6}  {:>5}  {:>7}",
            label,
            num(s.kvar, 0),
            s.harmonics.order.map_or("none".to_string(), |o| num(o, 2)),
            peak.map_or("-".to_string(), |p| num(p.order, 2)),
            s.harmonics
                .order
                .map_or("-".to_string(), |o| num(o * hm.frequency_hz(), 0)),
            peak.map_or("-".to_string(), |p| num(p.impedance_ohm, 3)),
        );
        for h in &amp_orders {
            let a = s
                .harmonics
                .harmonics
                .iter()
                .find(|x| x.order == *h)
                .map_or(1.0, |x| x.amplification);
            row.push_str(&format!("  {:>5}", num(a, 1)));
        }
        row.push_str(&format!(
            "  {:>6}  {:>7}",
            format!("{} %", num(s.harmonics.thd_pct, 1)),
            near_word(ctx, s)
        ));
        if let Some(run) = ctx.run_s {
            let h = time.map_or(0.0, |x| x / run.max(1e-9) * HOURS_PER_YEAR);
            row.push_str(&format!("  {:>8}", approx(h)));
        }
        t.push_str(&row);
        t.push('\n');
    }
    if gs.len() > MAX_ROWS {
        t.push_str(&format!(
            "  ... and {} more groups (every state is in --csv and --json)\n",
            gs.len() - MAX_ROWS
        ));
    }
    super::wrap_plain(
        &mut t,
        "  ",
        "order: sqrt(S_sc/Q_c) for plain steps, the scan peak otherwise; peak: the strongest \
         peak of |Z(h)|, |Z| its height in ohm per phase; ×hN: |Z| with the state over |Z| \
         without any step at harmonic N (above 1 the bank amplifies it); THD_V: estimated bus \
         voltage THD with the harmonic load at its rating.",
    );
    t.push('\n');

    // What detuning would do.
    let lowest = hm.lowest_harmonic();
    super::wrap_plain(
        &mut t,
        "",
        "What detuning would do (same kvar per step, every step detuned at p; resonance of \
         each state with the supply)",
    );
    t.push_str(&format!(
        "  {:<8}  {:>12}  {:>9}  {:>13}  {:>10}  {}\n",
        "p",
        "tuning order",
        "full bank",
        "highest state",
        "full THD_V",
        lowest.map_or(String::new(), |h| format!(
            "all below the {}?",
            harmonic_name(h)
        ))
    ));
    let all = hm.all_mask();
    let built_highest = sv
        .states
        .iter()
        .filter_map(|s| s.harmonics.order)
        .reduce(f64::max);
    let below = |x: Option<f64>| match (x, lowest) {
        (Some(o), Some(l)) => {
            if o < l {
                "yes"
            } else {
                "no"
            }
        }
        (None, Some(_)) => "no resonance",
        _ => "",
    };
    t.push_str(&format!(
        "  {:<8}  {:>12}  {:>9}  {:>13}  {:>10}  {}\n",
        "as built",
        "-",
        sv.full_bank_order.map_or("none".to_string(), |o| num(o, 2)),
        built_highest.map_or("none".to_string(), |o| num(o, 2)),
        format!("{} %", num(hm.thd_pct(all), 1)),
        below(built_highest)
    ));
    for d in &sv.detuning {
        t.push_str(&format!(
            "  {:<8}  {:>12}  {:>9}  {:>13}  {:>10}  {}\n",
            format!("{} %", num(d.p * 100.0, 2)),
            num(d.tuning_order, 2),
            d.full_bank_order.map_or("none".to_string(), |o| num(o, 2)),
            d.highest_order.map_or("none".to_string(), |o| num(o, 2)),
            format!("{} %", num(d.full_bank_thd_pct, 1)),
            below(d.highest_order)
        ));
    }
    t.push('\n');
    let mut head = format!("  {:<20}  {:>8}", "steps on", "as built");
    for d in &sv.detuning {
        head.push_str(&format!("  {:>8}", format!("{} %", num(d.p * 100.0, 2))));
    }
    t.push_str("  Resonant order per state:\n");
    t.push_str(&head);
    t.push('\n');
    for (first, members, _) in gs.iter().take(MAX_ROWS) {
        let s = &sv.states[*first];
        let mut label = steps_label(&s.steps);
        if members.len() > 1 {
            label.push_str(&format!(" (+{} alike)", members.len() - 1));
        }
        let mut row = format!(
            "  {:<20}  {:>8}",
            label,
            s.harmonics.order.map_or("none".to_string(), |o| num(o, 2))
        );
        for d in &sv.detuning {
            row.push_str(&format!(
                "  {:>8}",
                d.state_orders[*first].map_or("none".to_string(), |o| num(o, 2))
            ));
        }
        t.push_str(&row);
        t.push('\n');
    }
    let u = sc.supply.nominal_voltage_v;
    let volts: Vec<String> = sv
        .detuning
        .iter()
        .map(|d| format!("{} V at {} %", num(u / (1.0 - d.p), 0), num(d.p * 100.0, 2)))
        .collect();
    if !volts.is_empty() {
        t.push('\n');
        super::wrap_plain(
            &mut t,
            "  ",
            &format!(
                "A detuned step's capacitors see U/(1 − p): {}; rate them above it. A detuned \
                 step delivers Q_R·(U/U_R)²/(1 − p) from capacitors rated Q_R at U_R.",
                volts.join(", ")
            ),
        );
    }
    t.push('\n');
    super::wrap_plain(&mut t, "  ", HARDWARE_CAUTION);
    out.write_all(t.as_bytes())?;
    out.flush()?;
    Ok(())
}

/// Writes the impedance curves: a column `h` (harmonic order), a column `supply_only_ohm`
/// (no step connected), then one column of |Z| in ohm per state, named by its steps
/// (`z_1+2_ohm`).
pub fn write_csv(ctx: &ResonanceContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
    let sv = ctx.survey;
    let sc = &sv.scanner;
    let mut line = String::from("h,supply_only_ohm");
    for s in &sv.states {
        line.push_str(&format!(",z_{}_ohm", steps_label(&s.steps)));
    }
    line.push('\n');
    out.write_all(line.as_bytes())?;
    let decimals = decimals_of(sc.grid().step);
    for j in 0..sc.grid().len() {
        line.clear();
        line.push_str(&format!("{:.*}", decimals, sc.grid().order(j)));
        line.push_str(&format!(",{}", sig(sc.impedance_at(j, 0))));
        for s in &sv.states {
            line.push_str(&format!(",{}", sig(sc.impedance_at(j, s.mask))));
        }
        line.push('\n');
        out.write_all(line.as_bytes())?;
    }
    out.flush()?;
    Ok(())
}

/// Decimals that show a grid step exactly (0.01 → 2).
fn decimals_of(step: f64) -> usize {
    (0..=6)
        .find(|&d| {
            let f = 10f64.powi(d as i32);
            ((step * f).round() - step * f).abs() < 1e-9
        })
        .unwrap_or(6)
}

/// A value with 6 significant figures.
fn sig(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return "0".to_string();
    }
    let d = (5 - x.abs().log10().floor() as i32).clamp(0, 12) as usize;
    format!("{x:.d$}")
}

/// One state in the JSON document.
#[derive(Serialize)]
struct StateJson<'a> {
    steps: &'a [usize],
    kvar: f64,
    order: Option<f64>,
    frequency_hz: Option<f64>,
    peaks: &'a [Peak],
    nearest_harmonic: Option<f64>,
    near_harmonic: Option<f64>,
    time_s: Option<f64>,
    hours_per_year: Option<f64>,
    thd_pct: f64,
    thd_limit_pct: f64,
    harmonics: &'a [HarmonicVoltage],
    step_stress: &'a [StepStress],
    limit_ratio: f64,
    severity: f64,
}

#[derive(Serialize)]
struct DetuningStateJson<'a> {
    steps: &'a [usize],
    order: Option<f64>,
}

#[derive(Serialize)]
struct DetuningJson<'a> {
    detuning_pct: f64,
    tuning_order: f64,
    capacitor_voltage_v: f64,
    full_bank_order: Option<f64>,
    highest_order: Option<f64>,
    full_bank_thd_pct: f64,
    states: Vec<DetuningStateJson<'a>>,
}

/// The curves, computed while they are written (so that a large survey is not held in
/// memory twice).
struct Curves<'a>(&'a Survey);

struct Curve<'a>(&'a Survey, u64);

impl Serialize for Curve<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let sc = &self.0.scanner;
        let mut seq = s.serialize_seq(Some(sc.grid().len()))?;
        for j in 0..sc.grid().len() {
            seq.serialize_element(&sc.impedance_at(j, self.1))?;
        }
        seq.end()
    }
}

struct Orders<'a>(&'a ScanGrid);

impl Serialize for Orders<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut seq = s.serialize_seq(Some(self.0.len()))?;
        for j in 0..self.0.len() {
            seq.serialize_element(&self.0.order(j))?;
        }
        seq.end()
    }
}

#[derive(Serialize)]
struct CurveJson<'a> {
    steps: &'a [usize],
    impedance_ohm: Curve<'a>,
}

impl Serialize for Curves<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let sv = self.0;
        let mut st = s.serialize_struct("Curves", 3)?;
        st.serialize_field("h", &Orders(sv.scanner.grid()))?;
        st.serialize_field("supply_only_ohm", &Curve(sv, 0))?;
        let states: Vec<CurveJson<'_>> = sv
            .states
            .iter()
            .map(|x| CurveJson {
                steps: &x.steps,
                impedance_ohm: Curve(sv, x.mask),
            })
            .collect();
        st.serialize_field("states", &states)?;
        st.end()
    }
}

#[derive(Serialize)]
struct Tool {
    name: &'static str,
    version: &'static str,
}

#[derive(Serialize)]
struct SupplyJson {
    nominal_voltage_v: f64,
    frequency_hz: f64,
    short_circuit_kva: Option<f64>,
}

#[derive(Serialize)]
struct Document<'a> {
    tool: Tool,
    scenario: String,
    study: &'a str,
    scenario_sha256: &'a str,
    supply: SupplyJson,
    grid: &'a ScanGrid,
    tolerance_orders: f64,
    voltage_limits: &'static str,
    capacitor_limits: &'static str,
    damping_kw: f64,
    spectrum: Vec<(f64, f64)>,
    full_bank_order: Option<f64>,
    states: Vec<StateJson<'a>>,
    detuning: Vec<DetuningJson<'a>>,
    curves: Curves<'a>,
}

/// Writes the whole survey as one JSON object: the states with their resonance,
/// harmonic voltages and step stress, the detuning comparison, and the curves (`curves.h`
/// and one `impedance_ohm` array per state, ohm).
pub fn write_json(ctx: &ResonanceContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
    let sc = ctx.scenario;
    let sv = ctx.survey;
    let hm = sv.scanner.model();
    let s_sc = hm.short_circuit_kva();
    let tol = sc.resonance_tolerance;
    let states = sv
        .states
        .iter()
        .map(|s| StateJson {
            steps: &s.steps,
            kvar: s.kvar,
            order: s.harmonics.order,
            frequency_hz: s.harmonics.order.map(|o| o * hm.frequency_hz()),
            peaks: &s.harmonics.peaks,
            nearest_harmonic: s.harmonics.order.and_then(|o| hm.nearest_harmonic(o)),
            near_harmonic: s.harmonics.order.and_then(|o| hm.near_harmonic(o, tol)),
            time_s: s.time_s,
            hours_per_year: match (s.time_s, ctx.run_s) {
                (Some(t), Some(r)) => Some(t / r.max(1e-9) * HOURS_PER_YEAR),
                _ => None,
            },
            thd_pct: s.harmonics.thd_pct,
            thd_limit_pct: s.harmonics.thd_limit_pct,
            harmonics: &s.harmonics.harmonics,
            step_stress: &s.harmonics.steps,
            limit_ratio: s.harmonics.limit_ratio,
            severity: s.harmonics.severity,
        })
        .collect();
    let u = sc.supply.nominal_voltage_v;
    let detuning = sv
        .detuning
        .iter()
        .map(|d| DetuningJson {
            detuning_pct: d.p * 100.0,
            tuning_order: d.tuning_order,
            capacitor_voltage_v: u / (1.0 - d.p),
            full_bank_order: d.full_bank_order,
            highest_order: d.highest_order,
            full_bank_thd_pct: d.full_bank_thd_pct,
            states: sv
                .states
                .iter()
                .zip(&d.state_orders)
                .map(|(s, o)| DetuningStateJson {
                    steps: &s.steps,
                    order: *o,
                })
                .collect(),
        })
        .collect();
    let doc = Document {
        tool: Tool {
            name: "bankstep",
            version: env!("CARGO_PKG_VERSION"),
        },
        scenario: file_name(&sc.path),
        study: &sc.name,
        scenario_sha256: &sc.content_sha256,
        supply: SupplyJson {
            nominal_voltage_v: u,
            frequency_hz: sc.supply.frequency_hz,
            short_circuit_kva: s_sc.is_finite().then_some(s_sc),
        },
        grid: sv.scanner.grid(),
        tolerance_orders: tol,
        voltage_limits: hm.options.voltage_limits.name(),
        capacitor_limits: hm.options.capacitor_limits.values().standard,
        damping_kw: hm.options.damping_kw,
        spectrum: sc.spectrum.orders.clone(),
        full_bank_order: sv.full_bank_order,
        states,
        detuning,
        curves: Curves(sv),
    };
    serde_json::to_writer_pretty(&mut *out, &doc)?;
    out.write_all(b"\n")?;
    out.flush()?;
    Ok(())
}

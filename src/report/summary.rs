//! The human-readable summary: ranked findings first, then one section per part of the
//! result (study, PF and energy, switching, overcorrection, resonance, wear, voltage).
//!
//! Every figure carries its unit and every PF its quadrant (`0.93 lag`). Where a finding
//! recommends a change to hardware the safety caution follows the findings, and the
//! resonance section repeats it when a state resonates near a harmonic of the load.

use crate::analysis::findings::cause_words;
use crate::analysis::resonance::breach_lines;
use crate::bank::FaultKind;
use crate::controller::{ExportMode, Measurement};
use crate::metrics::OvercorrectionCause;
use crate::pf::Quadrant;
use crate::report::{
    approx, count, duration, harmonic_name, num, pct, steps_label, table, years_text,
    ReportContext, ReportError, ReportWriter, HARDWARE_CAUTION,
};
use crate::text::{deciding, pct_vs_limit, pf_vs};
use crate::timebase::WEEKDAYS;
use std::io::Write;

/// Width the text is wrapped to, characters.
const WIDTH: usize = 90;
/// Units kept on the line of their number when wrapping.
const UNITS: [&str; 17] = [
    "%", "kvar", "kW", "kVA", "MVA", "kWh", "kvarh", "V", "A", "Hz", "s", "min", "h", "days",
    "years", "ops", "pu",
];
/// Most bank states listed in the resonance table.
const MAX_STATES: usize = 20;

/// The text summary report.
#[derive(Debug, Clone, Copy, Default)]
pub struct Summary;

impl ReportWriter for Summary {
    fn write(&self, ctx: &ReportContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
        let mut t = String::with_capacity(8 * 1024);
        header(ctx, &mut t);
        top_findings(ctx, &mut t);
        settings_to_check(ctx, &mut t);
        profile_defects(ctx, &mut t);
        study(ctx, &mut t);
        pf_energy(ctx, &mut t);
        per_phase(ctx, &mut t);
        unbalance(ctx, &mut t);
        switching(ctx, &mut t);
        overcorrection(ctx, &mut t);
        resonance(ctx, &mut t);
        wear(ctx, &mut t);
        voltage(ctx, &mut t);
        super::wear::section(&mut t, ctx.scenario(), ctx.wear_plan);
        out.write_all(t.as_bytes())?;
        out.flush()?;
        Ok(())
    }
}

/// Wraps `text` to [`WIDTH`], starting with `first` and indenting further lines by `rest`.
///
/// A unit (`%`, `kvar`, `V`, ...) stays on the line of the number before it.
fn wrap(t: &mut String, first: &str, rest: &str, text: &str) {
    let mut atoms: Vec<String> = Vec::new();
    for word in text.split_whitespace() {
        let unit = word.trim_end_matches([',', ';', '.', ')', ':']);
        match atoms.last_mut() {
            Some(last) if UNITS.contains(&unit) => {
                last.push(' ');
                last.push_str(word);
            }
            _ => atoms.push(word.to_string()),
        }
    }
    let mut line = String::from(first);
    let mut empty = true;
    for word in &atoms {
        if !empty && line.chars().count() + 1 + word.chars().count() > WIDTH {
            t.push_str(line.trim_end());
            t.push('\n');
            line = String::from(rest);
            empty = true;
        }
        if !empty {
            line.push(' ');
        }
        line.push_str(word);
        empty = false;
    }
    t.push_str(line.trim_end());
    t.push('\n');
}

fn heading(t: &mut String, title: &str) {
    t.push('\n');
    t.push_str(title);
    t.push('\n');
    t.push_str(&"-".repeat(title.chars().count()));
    t.push('\n');
}

/// A `label  value` line with the labels aligned.
fn field(t: &mut String, label: &str, value: &str) {
    wrap(t, &format!("  {label:<24}"), &" ".repeat(26), value);
}

fn header(ctx: &ReportContext<'_>, t: &mut String) {
    let sc = ctx.scenario();
    let run = &ctx.result.metrics.run;
    let cal = ctx.study.plan.calendar;
    t.push_str(&format!(
        "bankstep {}: study \"{}\" ({})\n",
        env!("CARGO_PKG_VERSION"),
        sc.name,
        ctx.scenario_file()
    ));
    if let Some(d) = &sc.description {
        wrap(t, "", "", d);
    }
    let load = match &sc.load {
        crate::scenario::LoadSpec::Synthetic(_) => format!("synthetic load (seed {})", sc.seed),
        crate::scenario::LoadSpec::Csv { .. } => format!("load profile {}", ctx.load_source()),
    };
    wrap(
        t,
        "",
        "",
        &format!(
            "Simulated {} ({} intervals of {} s) from {}, {load}.",
            duration(run.duration_s),
            count(run.samples),
            num_short(run.time_step_s),
            cal.datetime(run.t_first_s).format("%Y-%m-%d %H:%M"),
        ),
    );
}

/// What the CSV reader found wrong with the profile and what it did about it.
fn profile_defects(ctx: &ReportContext<'_>, t: &mut String) {
    let Some(scan) = ctx.study.csv() else {
        return;
    };
    let s = &scan.summary;
    if s.is_clean() {
        return;
    }
    heading(t, "Load profile");
    for line in s.lines() {
        wrap(t, "  - ", "    ", &line);
    }
}

/// A number with as few decimals as it needs (at most 3).
fn num_short(x: f64) -> String {
    let s = format!("{x:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

/// Settings that are legal but unwise, with the key to change.
fn settings_to_check(ctx: &ReportContext<'_>, t: &mut String) {
    let list = &ctx.assessment.settings_to_check;
    if list.is_empty() {
        return;
    }
    heading(t, "Settings to check");
    for a in list {
        wrap(t, "  - ", "    ", &format!("{}: {}.", a.key, a.message));
    }
}

fn top_findings(ctx: &ReportContext<'_>, t: &mut String) {
    heading(t, "Top findings");
    let list = &ctx.assessment.findings;
    for (i, f) in list.iter().enumerate() {
        let first = format!("{:>3}. ", i + 1);
        wrap(t, &first, "     ", &f.text);
        if let Some(a) = &f.advice {
            wrap(t, "     Suggestion: ", "     ", a);
        }
    }
    // The caution stands in every summary: the reader may act on the bank whatever this
    // run found.
    t.push('\n');
    wrap(t, "  ", "  ", HARDWARE_CAUTION);
}

fn study(ctx: &ReportContext<'_>, t: &mut String) {
    let sc = ctx.scenario();
    let s = &sc.supply;
    heading(t, "Study");
    let mut supply = format!(
        "{} V, {} Hz",
        num(s.nominal_voltage_v, 0),
        num(s.frequency_hz, 0)
    );
    match s.transformer {
        Some(tr) => supply.push_str(&format!(
            "; transformer {} kVA, u_k {} %, X/R {}",
            num(tr.rated_kva, 0),
            num(tr.impedance_pct, 1),
            num(tr.x_over_r, 1)
        )),
        None => supply.push_str("; no transformer"),
    }
    match s.grid_short_circuit_kva {
        Some(g) => supply.push_str(&format!("; grid {} MVA short-circuit", num(g / 1e3, 0))),
        None => supply.push_str("; grid infinite"),
    }
    if (s.source_voltage_pu - 1.0).abs() > 1e-9 {
        supply.push_str(&format!(
            "; no-load voltage {} pu",
            num(s.source_voltage_pu, 3)
        ));
    }
    field(t, "Supply", &supply);
    let s_sc = s.short_circuit_kva();
    field(
        t,
        "Short-circuit power",
        &if s_sc.is_finite() {
            format!("{} kVA at the bus", num(s_sc, 0))
        } else {
            "infinite (stiff bus, voltage fixed at nominal)".to_string()
        },
    );
    let total: f64 = sc.steps.iter().map(|s| s.kvar).sum();
    let fixed: f64 = sc.steps.iter().filter(|s| s.fixed).map(|s| s.kvar).sum();
    field(
        t,
        "Bank",
        &format!(
            "{} step{}, {} kvar ({} kvar switched, {} kvar fixed)",
            sc.steps.len(),
            if sc.steps.len() == 1 { "" } else { "s" },
            num(total, 1),
            num(total - fixed, 1),
            num(fixed, 1)
        ),
    );
    // The phase column is as wide as its longest entry (`abc star`), at least 5.
    let pw = sc
        .steps
        .iter()
        .map(|s| s.phase.describe().len())
        .fold(5, usize::max);
    t.push_str(&format!(
        "    {:>4}  {:>9}  {:<pw$}  {:<8}  {:>9}  {:>16}  {}\n",
        "step", "kvar", "phase", "kind", "detuning", "contactor life", "fault"
    ));
    for (i, st) in sc.steps.iter().enumerate() {
        let phase = st.phase.describe();
        let detuning = st
            .detuning
            .map(|p| format!("{} %", num(p * 100.0, 2)))
            .unwrap_or_else(|| "none".to_string());
        let fault = match st.fault {
            None => "none".to_string(),
            Some(f) => {
                let what = match f.kind {
                    FaultKind::Open => "open".to_string(),
                    FaultKind::CapacitanceLoss(x) => format!("loses {}", pct(x)),
                    FaultKind::StuckClosed => "stuck closed".to_string(),
                };
                format!("{what} from {}", duration(f.from_s))
            }
        };
        t.push_str(&format!(
            "    {:>4}  {:>9}  {:<pw$}  {:<8}  {:>9}  {:>16}  {}\n",
            i + 1,
            num(st.kvar, 1),
            phase,
            if st.fixed { "fixed" } else { "switched" },
            detuning,
            format!("{} ops", count(st.rated_operations.round() as u64)),
            fault
        ));
    }
    let c = &sc.controller;
    let mut measurement = match c.measurement {
        Measurement::SinglePhase(p) if c.measurement_voltage.is_none() => {
            format!("single-phase on phase {}", crate::profile::PHASES[p.min(2)])
        }
        _ => c.measurement_label(),
    };
    let wiring = c.wiring();
    if !wiring.as_assumed() {
        measurement.push_str(&format!(" (wired: {})", wiring.label()));
    }
    field(
        t,
        "Controller",
        &format!(
            "target {}; dead band ±{} kvar; switching delay {} (disconnect {}); discharge time \
             {}; ordering {}; measurement {}; averaging {}; while exporting: {}",
            c.target,
            num(c.dead_band_kvar, 1),
            duration(c.connect_delay_s),
            duration(c.disconnect_delay_s),
            duration(c.discharge_time_s),
            c.ordering.name(),
            measurement,
            if c.averaging_s > 0.0 {
                duration(c.averaging_s)
            } else {
                "none".to_string()
            },
            match c.export_mode {
                ExportMode::Absolute => "corrects toward the target on |P|",
                ExportMode::Hold => "holds the bank",
                ExportMode::Open => "opens the steps",
            }
        ),
    );
    field(t, "Protections", &crate::text::protections(&c.protection));
}

fn pf_energy(ctx: &ReportContext<'_>, t: &mut String) {
    let p = &ctx.result.metrics.pf;
    let verdict = ctx.assessment.billed_pf;
    let goal = verdict.goal;
    heading(t, "PF and energy");
    field(
        t,
        "Billed PF",
        &format!(
            "{}, {} the {} target (from the inductive register)",
            pf_vs(p.energy_pf, Quadrant::Lag, goal),
            if verdict.below_target {
                "below"
            } else {
                "meets"
            },
            p.target
        ),
    );
    if let (Some(ind), Some(cap)) = (p.tan_phi, p.tan_phi_capacitive) {
        field(
            t,
            "tan φ",
            &format!(
                "{} inductive, {} capacitive (kvarh per kWh imported)",
                num(ind, 3),
                num(cap, 3)
            ),
        );
    }
    field(t, "Active import", &format!("{} kWh", num(p.kwh_import, 1)));
    field(t, "Active export", &format!("{} kWh", num(p.kwh_export, 1)));
    field(
        t,
        "Reactive inductive",
        &format!("{} kvarh", num(p.kvarh_inductive, 1)),
    );
    field(
        t,
        "Reactive capacitive",
        &format!("{} kvarh", num(p.kvarh_capacitive, 1)),
    );
    field(t, "Time under target", &pct(p.share_under_target));
    field(t, "Time leading", &pct(p.share_leading));
    let cal = ctx.study.plan.calendar;
    t.push_str("  Billing windows:\n");
    t.push_str(&format!(
        "    {:<16}  {:<16}  {:>9}  {:>12}  {:>16}  {:>16}\n",
        "from", "to", "energy PF", "import kWh", "inductive kvarh", "capacitive kvarh"
    ));
    for w in &p.billing {
        t.push_str(&format!(
            "    {:<16}  {:<16}  {:>9}  {:>12}  {:>16}  {:>16}\n",
            cal.datetime(w.start_s).format("%Y-%m-%d %H:%M").to_string(),
            cal.datetime(w.end_s).format("%Y-%m-%d %H:%M").to_string(),
            pf_vs(w.energy_pf, Quadrant::Lag, goal),
            num(w.kwh_import, 1),
            num(w.kvarh_inductive, 1),
            num(w.kvarh_capacitive, 1)
        ));
    }
}

/// The supply phase by phase: the billed PF of each phase's own registers, its shares of
/// time under target and leading, and its overcorrection episodes.
fn per_phase(ctx: &ReportContext<'_>, t: &mut String) {
    let m = &ctx.result.metrics;
    if m.phases.is_empty() {
        return;
    }
    let goal = ctx.assessment.billed_pf.goal;
    heading(t, "Per phase");
    wrap(
        t,
        "  ",
        "  ",
        &format!(
            "Each phase's own registers at the metering point; a phase counts as \
             overcorrected when it leads by more than {} kvar (a third of the three-phase \
             threshold) for at least {}.",
            num(m.overcorrection.threshold_kvar / 3.0, 1),
            duration(m.overcorrection.min_duration_s)
        ),
    );
    t.push_str(&format!(
        "    {:<5}  {:>9}  {:>12}  {:>15}  {:>16}  {:>12}  {:>8}  {:>8}  {:>14}\n",
        "phase",
        "energy PF",
        "import kWh",
        "inductive kvarh",
        "capacitive kvarh",
        "under target",
        "leading",
        "episodes",
        "overcorrected"
    ));
    for p in &m.phases {
        t.push_str(&format!(
            "    {:<5}  {:>9}  {:>12}  {:>15}  {:>16}  {:>12}  {:>8}  {:>8}  {:>14}\n",
            p.phase,
            pf_vs(p.energy_pf, p.energy_pf_quadrant, goal),
            num(p.kwh_import, 1),
            num(p.kvarh_inductive, 1),
            num(p.kvarh_capacitive, 1),
            pct(p.share_under_target),
            pct(p.share_leading),
            count(p.overcorrection.episodes),
            duration(p.overcorrection.total_s)
        ));
    }
}

/// Voltage and current unbalance and the IEEE Std 1459-2010 apparent powers, when the
/// scenario asks for them.
fn unbalance(ctx: &ReportContext<'_>, t: &mut String) {
    let Some(u) = &ctx.result.metrics.unbalance else {
        return;
    };
    heading(t, "Unbalance");
    field(
        t,
        "Voltage unbalance",
        &format!(
            "{} % mean, {} % highest (|V2|/|V1| of the bus)",
            num(u.u2_mean_pct, 2),
            num(u.u2_max_pct, 2)
        ),
    );
    for w in &u.weeks {
        let cal = ctx.study.plan.calendar;
        field(
            t,
            &format!("  week from {}", cal.datetime(w.start_s).format("%Y-%m-%d")),
            &format!(
                "95th percentile of {} 10-minute values {} % (EN 50160 allows 2 %), highest {} %",
                count(w.values),
                num(w.u2_p95_pct, 2),
                num(w.u2_max_pct, 2)
            ),
        );
    }
    field(
        t,
        "Current unbalance",
        &format!(
            "{} % mean, {} % highest (|I2|/|I1| of the supply)",
            num(u.i2_mean_pct, 1),
            num(u.i2_max_pct, 1)
        ),
    );
    field(
        t,
        "Apparent energy",
        &format!(
            "vector {} kVAh (PF {}), arithmetic {} kVAh (PF {}), effective {} kVAh (PF {}), \
             IEEE Std 1459-2010",
            num(u.kvah_vector, 1),
            num(u.pf_vector, 3),
            num(u.kvah_arithmetic, 1),
            num(u.pf_arithmetic, 3),
            num(u.kvah_effective, 1),
            num(u.pf_effective, 3)
        ),
    );
}

fn switching(ctx: &ReportContext<'_>, t: &mut String) {
    let m = &ctx.result.metrics;
    let s = &m.switching;
    heading(t, "Switching");
    field(
        t,
        "Operations",
        &format!(
            "{} in the run ({} per day, {} per year extrapolated)",
            count(s.total_operations),
            approx(s.per_day),
            approx(s.per_year)
        ),
    );
    field(
        t,
        "Hunting",
        &format!(
            "{} cycle{} (operations of one step no more than {} apart)",
            count(s.hunting_cycles),
            if s.hunting_cycles == 1 { "" } else { "s" },
            duration(s.hunting_window_s)
        ),
    );
    let tr = &s.trips;
    field(
        t,
        "Protection trips",
        &format!(
            "overvoltage {}, loss of current {}, export {}, distortion {}",
            tr.overvoltage, tr.loss_of_current, tr.export, tr.distortion
        ),
    );
    if s.per_step.is_empty() {
        t.push_str("  No switched steps.\n");
        return;
    }
    t.push_str(&format!(
        "    {:>4}  {:>10}  {:>8}  {:>8}  {:>10}  {:>14}\n",
        "step", "operations", "closings", "openings", "per year", "hunting cycles"
    ));
    let wear = &m.wear;
    for p in &s.per_step {
        let per_year = wear
            .iter()
            .find(|w| w.step == p.step)
            .map_or(0.0, |w| w.operations_per_year);
        t.push_str(&format!(
            "    {:>4}  {:>10}  {:>8}  {:>8}  {:>10}  {:>14}\n",
            p.step,
            count(p.operations),
            count(p.closings),
            count(p.openings),
            approx(per_year),
            count(p.hunting_cycles)
        ));
    }
}

fn cause_key(c: OvercorrectionCause) -> String {
    serde_json::to_value(c)
        .ok()
        .and_then(|v| v.as_str().map(str::to_owned))
        .unwrap_or_default()
}

fn overcorrection(ctx: &ReportContext<'_>, t: &mut String) {
    let o = &ctx.result.metrics.overcorrection;
    heading(t, "Overcorrection");
    wrap(
        t,
        "  ",
        "  ",
        &match ctx.scenario().controller.target {
            target if target.quadrant == Quadrant::Lead && target.pf < 1.0 => format!(
                "Episodes: the supply more leading than the {target} target allows, by more \
                 than {} kvar, for at least {}.",
                num(o.threshold_kvar, 1),
                duration(o.min_duration_s)
            ),
            _ => format!(
                "Episodes: the supply leading by more than {} kvar for at least {}.",
                num(o.threshold_kvar, 1),
                duration(o.min_duration_s)
            ),
        },
    );
    field(t, "Episodes", &count(o.episodes));
    if o.episodes == 0 {
        return;
    }
    field(t, "Total time", &duration(o.total_s));
    field(t, "Longest", &duration(o.longest_s));
    field(
        t,
        "Worst",
        &format!("{} kvar leading", num(o.worst_leading_kvar, 1)),
    );
    if let Some(c) = o.dominant_cause {
        field(t, "Main cause", cause_words(c));
    }
    let all = [
        OvercorrectionCause::Export,
        OvercorrectionCause::FixedSteps,
        OvercorrectionCause::StepNotOpened,
        OvercorrectionCause::NotSeenByController,
    ];
    let parts: Vec<String> = all
        .iter()
        .filter_map(|c| {
            let s = o.cause_s.get(&cause_key(*c)).copied().unwrap_or(0.0);
            (s > 0.0).then(|| format!("{} {}", cause_label(*c), duration(s)))
        })
        .collect();
    if !parts.is_empty() {
        field(t, "Time by cause", &parts.join("; "));
    }
    let days: Vec<String> = o
        .by_weekday_s
        .iter()
        .enumerate()
        .filter(|(_, s)| **s > 0.0)
        .map(|(i, s)| format!("{} {}", WEEKDAYS[i], duration(*s)))
        .collect();
    if !days.is_empty() {
        field(t, "Time by weekday", &days.join("; "));
    }
}

fn cause_label(c: OvercorrectionCause) -> &'static str {
    match c {
        OvercorrectionCause::Export => "export",
        OvercorrectionCause::FixedSteps => "fixed steps",
        OvercorrectionCause::StepNotOpened => "step not yet opened",
        OvercorrectionCause::NotSeenByController => "not seen by the controller",
    }
}

fn resonance(ctx: &ReportContext<'_>, t: &mut String) {
    let r = &ctx.assessment.resonance;
    let sc = ctx.scenario();
    heading(t, "Resonance");
    field(
        t,
        "Short-circuit power",
        &match r.short_circuit_kva {
            Some(s) => format!("{} kVA at the bus", num(s, 0)),
            None => "infinite: no parallel resonance with the supply".to_string(),
        },
    );
    let spectrum = &sc.spectrum;
    if spectrum.orders.is_empty() {
        field(t, "Load harmonics", "none given in the scenario");
    } else {
        let list: Vec<String> = spectrum
            .orders
            .iter()
            .map(|(h, p)| {
                let name = harmonic_name(*h);
                let short = name.strip_suffix(" harmonic").unwrap_or(&name);
                format!("{short} {} %", num(*p, 1))
            })
            .collect();
        field(
            t,
            "Load harmonics",
            &format!(
                "{} (current, % of the fundamental current of {} kVA)",
                list.join(", "),
                num(spectrum.reference_kva, 0)
            ),
        );
    }
    if let Some(p) = spectrum.preset {
        field(
            t,
            "Spectrum source",
            &format!("{} preset: {}", p.name(), p.source()),
        );
    }
    field(
        t,
        "Warning tolerance",
        &format!(
            "±{} orders around a harmonic present",
            num(r.tolerance_orders, 2)
        ),
    );
    field(
        t,
        "Limits",
        &format!(
            "bus voltage {}; capacitors {}",
            r.voltage_limits, r.capacitor_limits
        ),
    );
    field(
        t,
        "Model",
        &if r.damping_kw > 0.0 {
            format!(
                "harmonic load at its rating in every state; {} kW resistive load damps it",
                num(r.damping_kw, 0)
            )
        } else {
            "harmonic load at its rating in every state, no load damping (errs high)".to_string()
        },
    );
    let mut rows = Vec::new();
    for s in r.states.iter().take(MAX_STATES) {
        let order = s.order.map_or("none".to_string(), |o| num(o, 2));
        let near = s.nearest_harmonic.map_or("-".to_string(), |h| num(h, 0));
        let worst = s
            .harmonics
            .iter()
            .max_by(|a, b| {
                let ka = a.limit_pct.map_or(0.0, |l| a.v_pct / l);
                let kb = b.limit_pct.map_or(0.0, |l| b.v_pct / l);
                ka.total_cmp(&kb)
            })
            .map_or("-".to_string(), |h| {
                let v = match h.limit_pct {
                    Some(l) => deciding(h.v_pct, l, 1),
                    None => num(h.v_pct, 1),
                };
                format!("h{} {v} %", num(h.order, 0))
            });
        let current = s
            .step_stress
            .iter()
            .max_by(|a, b| a.current_ratio.total_cmp(&b.current_ratio))
            .map_or("-".to_string(), |x| {
                format!("{} ×", deciding(x.current_ratio, x.current_limit, 2))
            });
        rows.push(vec![
            steps_label(&s.steps),
            num(s.kvar, 0),
            order,
            near,
            duration(s.time_s),
            approx(s.hours_per_year),
            worst,
            format!("{} %", deciding(s.thd_pct, s.thd_limit_pct, 1)),
            current,
            s.status(),
        ]);
    }
    table(
        t,
        "    ",
        &[
            "steps on",
            "kvar",
            "order",
            "near",
            "time",
            "h/year",
            "worst harmonic",
            "THD_V",
            "I/I_N",
            "status",
        ],
        "lrrrrrrrrl",
        &rows,
    );
    if r.states.len() > MAX_STATES {
        t.push_str(&format!(
            "    ... and {} more states (all in the JSON report)\n",
            r.states.len() - MAX_STATES
        ));
    }
    wrap(
        t,
        "  ",
        "  ",
        "Order: sqrt(S_sc/Q_c) for plain steps, the impedance-scan peak otherwise; near: the \
         load harmonic nearest to it; h/year: time in the state extrapolated to a 365-day \
         year; I/I_N: the most loaded step's rms current over its rated current; status: \
         `clear`, or the harmonic it resonates near and the limits it exceeds (V_hN a \
         harmonic voltage, THD_V, I_C capacitor current, U_C capacitor voltage, Q_C \
         capacitor kvar).",
    );
    // One line per state with a capacitor limit exceeded (the breaches the analysis
    // found), the most stressed first.
    let mut over: Vec<_> = r
        .states
        .iter()
        .filter_map(|s| {
            let caps: Vec<_> = s
                .breaches
                .iter()
                .filter(|b| b.step.is_some())
                .copied()
                .collect();
            let worst = caps.iter().map(|b| b.ratio()).fold(0.0, f64::max);
            (!caps.is_empty()).then_some((s, caps, worst))
        })
        .collect();
    // Ranked as the worst state is: hours a year × the square of the worst ratio.
    over.sort_by(|a, b| {
        (b.0.hours_per_year * b.2 * b.2).total_cmp(&(a.0.hours_per_year * a.2 * a.2))
    });
    let stressed: Vec<String> = over
        .iter()
        .take(6)
        .map(|(s, caps, _)| {
            format!(
                "state {} (about {} h a year, at most {} in one day): {}",
                steps_label(&s.steps),
                approx(s.hours_per_year),
                duration(s.max_hours_per_day * 3600.0),
                breach_lines(caps).join("; ")
            )
        })
        .collect();
    if !stressed.is_empty() {
        t.push_str(&format!(
            "  Capacitor limits exceeded ({}):\n",
            r.capacitor_limits
        ));
        for line in stressed {
            wrap(t, "    - ", "      ", &format!("{line}."));
        }
    }
    if r.warnings.is_empty() {
        t.push_str("  No state reached resonates near a harmonic present in the load.\n");
        return;
    }
    t.push_str("  Warnings:\n");
    for w in &r.warnings {
        let h = harmonic_name(w.near_harmonic);
        let v_h = match w.v_h_limit_pct {
            Some(l) => pct_vs_limit(w.v_h_pct, l, 1),
            None => format!("{} %", num(w.v_h_pct, 1)),
        };
        wrap(
            t,
            "    - ",
            "      ",
            &format!(
                "state {} resonates at order {}, near the {h}, for {} (about {} h a year); it \
                 amplifies the {h} {} times: estimated {v_h} at the bus, THD_V {}.",
                steps_label(&w.steps),
                num(w.order, 2),
                duration(w.time_s),
                approx(w.hours_per_year),
                num(w.amplification, 1),
                pct_vs_limit(w.thd_pct, w.thd_limit_pct, 1)
            ),
        );
    }
    wrap(t, "  ", "  ", HARDWARE_CAUTION);
}

fn wear(ctx: &ReportContext<'_>, t: &mut String) {
    let m = &ctx.result.metrics;
    heading(t, "Wear");
    t.push_str(&format!(
        "    {:>4}  {:<8}  {:>10}  {:>15}  {:>14}  {:>19}  {:>12}\n",
        "step",
        "kind",
        "operations",
        "operations/year",
        "rated life",
        "years to rated life",
        "energized"
    ));
    for w in &m.wear {
        let years = match w.years_to_rated_life {
            Some(y) => format!("{} years", years_text(y)),
            None if w.fixed => "not switched".to_string(),
            None => "never operated".to_string(),
        };
        t.push_str(&format!(
            "    {:>4}  {:<8}  {:>10}  {:>15}  {:>14}  {:>19}  {:>12}\n",
            w.step,
            if w.fixed { "fixed" } else { "switched" },
            count(w.operations),
            approx(w.operations_per_year),
            format!("{} ops", count(w.rated_operations.round() as u64)),
            years,
            format!("{} h", num(w.energized_h, 1))
        ));
    }
}

fn voltage(ctx: &ReportContext<'_>, t: &mut String) {
    let v = &ctx.result.metrics.voltage;
    let u_n = ctx.scenario().supply.nominal_voltage_v;
    heading(t, "Voltage");
    field(
        t,
        "Bus voltage",
        &format!(
            "min {} V, max {} V line to line ({} % to {} % of the {} V nominal){}",
            num(v.min_v, 1),
            num(v.max_v, 1),
            num(100.0 * v.min_v / u_n, 1),
            num(100.0 * v.max_v / u_n, 1),
            num(u_n, 0),
            if ctx.result.nonconverged_intervals > 0 {
                "; these include intervals the supply could not carry, taken at the limit of \
                 what it can deliver, so they are not real voltages"
            } else {
                ""
            }
        ),
    );
    field(t, "Above 110 %", &duration(v.above_110pct_s));
    let nc = ctx.result.nonconverged_intervals;
    if nc > 0 {
        field(
            t,
            "Not solved",
            &format!(
                "{} of {} intervals (load beyond what the supply can carry)",
                count(nc),
                count(ctx.result.metrics.run.samples)
            ),
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::Quiet;
    use crate::scenario::Scenario;
    use crate::study::Study;
    use std::path::Path;

    #[test]
    fn summary_has_sections_units_and_quadrants() {
        let sc = Scenario::from_str(
            "[study]\nname = \"Test bay\"\n[[steps]]\nkvar = 50\ncount = 4\n[[steps]]\nkvar = 25\n\
             fixed = true\n[load.synthetic]\n[run]\nduration_s = 600\n",
            Path::new("bay.toml"),
        )
        .unwrap();
        let st = Study::prepare(sc).unwrap();
        let r = st.run(&mut Quiet).unwrap();
        let a = crate::analysis::assess(&st, &r);
        let mut out = Vec::new();
        Summary
            .write(&ReportContext::new(&st, &r, &a), &mut out)
            .unwrap();
        let text = String::from_utf8(out).unwrap();
        for s in [
            "Top findings",
            "Study",
            "PF and energy",
            "Switching",
            "Overcorrection",
            "Resonance",
            "Wear",
            "Voltage",
            "kWh",
            "kvarh",
            "target 0.95 lag",
            "\"Test bay\" (bay.toml)",
        ] {
            assert!(text.contains(s), "missing {s:?} in\n{text}");
        }
        assert!(
            text.lines().all(|l| l.chars().count() <= WIDTH + 40),
            "{text}"
        );
    }

    #[test]
    fn wrap_keeps_words_and_indents() {
        let mut t = String::new();
        wrap(&mut t, "  1. ", "     ", &"word ".repeat(40));
        assert!(t.lines().count() > 1);
        assert!(t.lines().all(|l| l.len() <= WIDTH));
        assert!(t.lines().skip(1).all(|l| l.starts_with("     word")));
    }
}

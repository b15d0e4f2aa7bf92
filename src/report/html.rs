//! The HTML report of `simulate --report DIR`: one self-contained `report.html` beside
//! the figures as SVG and PNG files, on the shared page of [`super::html_page`].
//!
//! Order: the findings first (the statements of the summary, from the assessment), the
//! safety caution, the figures, the settings used, the tables (PF and energy, switching,
//! overcorrection, resonance, wear) and the provenance. The figures are drawn one at a
//! time, each written to its files and into the page before the next is drawn.

use crate::analysis::Severity;
use crate::metrics::OvercorrectionCause;
use crate::pf::Quadrant;
use crate::report::figures::{self, escape, FigureError, Plot};
use crate::report::html_page::{self, caution, pairs, table, Page};
use crate::report::{
    approx, count, duration, harmonic_name, num, pct, steps_label, years_text, Provenance,
    ReportContext, ReportError, HARDWARE_CAUTION,
};
use crate::text::{pct_vs_limit, pf_vs};
use crate::trace::Trace;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

pub use crate::report::html_page::HTML_FILE;

/// Most bank states listed in the resonance table.
const MAX_STATES: usize = 20;

/// Names of the figures of a `simulate` report, in the order the page shows them.
pub const SIMULATE_FIGURES: [&str; 6] = [
    "pf-over-time",
    "kvar-needed-delivered",
    "step-states",
    "step-wear",
    "pf-by-hour",
    "impedance-by-state",
];

/// The figure of a `simulate` report at `index` (0 to 5, in [`SIMULATE_FIGURES`] order),
/// ready to draw; `None` past the last.
pub fn simulate_figure<'a>(
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
    index: usize,
) -> Option<Result<Plot<'a>, FigureError>> {
    Some(match index {
        0 => figures::pf_figure(ctx, trace),
        1 => figures::kvar_figure(ctx, trace),
        2 => figures::raster_figure(ctx, trace),
        3 => figures::wear_figure(ctx),
        4 => figures::heatmap_figure(ctx, trace),
        5 => figures::impedance_figure(ctx),
        _ => return None,
    })
}

/// Writes the report folder of a `simulate` run: every figure as `NAME.svg` and
/// `NAME.png`, and [`HTML_FILE`]. Creates the folder if needed. Returns the files
/// written.
pub fn write_report_dir(
    ctx: &ReportContext<'_>,
    trace: &Trace,
    dir: &Path,
) -> Result<Vec<PathBuf>, ReportError> {
    let sc = ctx.scenario();
    let run = &ctx.result.metrics.run;
    let cal = ctx.study.plan.calendar;
    let title = format!("Capacitor bank study: {}", sc.name);
    let mut subs = Vec::new();
    if let Some(d) = &sc.description {
        subs.push(d.clone());
    }
    let load = match &sc.load {
        crate::scenario::LoadSpec::Synthetic(_) => format!("synthetic load (seed {})", sc.seed),
        crate::scenario::LoadSpec::Csv { .. } => format!("load profile {}", ctx.load_source()),
    };
    subs.push(format!(
        "Scenario {}: {} simulated ({} intervals of {} s) from {}, {load}.",
        ctx.scenario_file(),
        duration(run.duration_s),
        count(run.samples),
        short(run.time_step_s),
        cal.datetime(run.t_first_s).format("%Y-%m-%d %H:%M"),
    ));
    html_page::write_report_dir(dir, &title, &subs, |page| {
        findings(ctx, page.html());
        figures_section(ctx, trace, page)?;
        let h = page.html();
        settings(ctx, h);
        pf_energy(ctx, h);
        switching(ctx, h);
        overcorrection(ctx, h);
        resonance(ctx, h);
        wear(ctx, h);
        provenance(ctx, trace, h);
        Ok(())
    })
}

/// A number with as few decimals as it needs (at most 3).
fn short(x: f64) -> String {
    let s = format!("{x:.3}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

fn findings(ctx: &ReportContext<'_>, h: &mut String) {
    h.push_str("<section id=\"findings\">\n<h2>Findings</h2>\n<ol class=\"findings\">\n");
    for f in &ctx.assessment.findings {
        let class = match f.severity {
            Severity::Critical => "critical",
            Severity::Warning => "warning",
            Severity::Note => "note",
            Severity::Info => "info",
        };
        let _ = write!(
            h,
            "<li class=\"{class}\"><span class=\"sev\">{}</span>{}",
            escape(f.severity.word()),
            escape(&f.text)
        );
        if let Some(a) = &f.advice {
            let _ = write!(
                h,
                "<span class=\"advice\"><b>Suggestion:</b> {}</span>",
                escape(a)
            );
        }
        h.push_str("</li>\n");
    }
    h.push_str("</ol>\n");
    caution(h, &[HARDWARE_CAUTION]);
    let list = &ctx.assessment.settings_to_check;
    if !list.is_empty() {
        h.push_str("<h3>Settings to check</h3>\n<ul>\n");
        for a in list {
            let _ = writeln!(
                h,
                "<li><code>{}</code>: {}.</li>",
                escape(&a.key),
                escape(&a.message)
            );
        }
        h.push_str("</ul>\n");
    }
    h.push_str("</section>\n");
}

fn figures_section(
    ctx: &ReportContext<'_>,
    trace: &Trace,
    page: &mut Page<'_>,
) -> Result<(), ReportError> {
    page.html()
        .push_str("<section id=\"figures\" class=\"figures\">\n<h2>Figures</h2>\n");
    let mut i = 0;
    while let Some(plot) = simulate_figure(ctx, trace, i) {
        page.figure(plot)?;
        i += 1;
    }
    page.html().push_str("</section>\n");
    Ok(())
}

fn settings(ctx: &ReportContext<'_>, h: &mut String) {
    let sc = ctx.scenario();
    let s = &sc.supply;
    h.push_str("<section id=\"settings\">\n<h2>Settings used</h2>\n");
    let mut supply = format!(
        "{} V, {} Hz",
        num(s.nominal_voltage_v, 0),
        num(s.frequency_hz, 0)
    );
    match s.transformer {
        Some(tr) => {
            let _ = write!(
                supply,
                "; transformer {} kVA, u_k {} %, X/R {}",
                num(tr.rated_kva, 0),
                num(tr.impedance_pct, 1),
                num(tr.x_over_r, 1)
            );
        }
        None => supply.push_str("; no transformer"),
    }
    match s.grid_short_circuit_kva {
        Some(g) => {
            let _ = write!(supply, "; grid {} MVA short-circuit", num(g / 1e3, 0));
        }
        None => supply.push_str("; grid infinite"),
    }
    let s_sc = s.short_circuit_kva();
    let c = &sc.controller;
    let measurement = c.measurement_label();
    pairs(
        h,
        &[
            ("Supply", supply),
            (
                "Short-circuit power",
                if s_sc.is_finite() {
                    format!("{} kVA at the bus", num(s_sc, 0))
                } else {
                    "infinite (stiff bus)".to_string()
                },
            ),
            ("Target", c.target.to_string()),
            ("Dead band", format!("±{} kvar", num(c.dead_band_kvar, 1))),
            (
                "Switching delay",
                format!(
                    "{} (disconnect {})",
                    duration(c.connect_delay_s),
                    duration(c.disconnect_delay_s)
                ),
            ),
            ("Discharge time", duration(c.discharge_time_s)),
            ("Step ordering", c.ordering.name().to_string()),
            ("Measurement", measurement),
            (
                "Averaging",
                if c.averaging_s > 0.0 {
                    duration(c.averaging_s)
                } else {
                    "none".to_string()
                },
            ),
            ("Protections", crate::text::protections(&c.protection)),
        ],
    );
    h.push_str("<h3>Bank</h3>\n");
    let rows: Vec<Vec<String>> = sc
        .steps
        .iter()
        .enumerate()
        .map(|(i, st)| {
            vec![
                (i + 1).to_string(),
                format!("{} kvar", num(st.kvar, 1)),
                st.phase.describe().to_string(),
                if st.fixed { "fixed" } else { "switched" }.to_string(),
                st.detuning
                    .map(|p| format!("{} %", num(p * 100.0, 2)))
                    .unwrap_or_else(|| "none".to_string()),
                format!("{} ops", count(st.rated_operations.round() as u64)),
            ]
        })
        .collect();
    table(
        h,
        &[
            "step",
            "output",
            "phase",
            "kind",
            "detuning",
            "contactor life",
        ],
        "rrllrr",
        &rows,
    );
    h.push_str("</section>\n");
}

fn pf_energy(ctx: &ReportContext<'_>, h: &mut String) {
    let p = &ctx.result.metrics.pf;
    let verdict = ctx.assessment.billed_pf;
    h.push_str("<section id=\"pf\">\n<h2>PF and energy</h2>\n");
    let mut items = vec![(
        "Billed PF",
        format!(
            "{}, {} the {} target (from the inductive register)",
            pf_vs(p.energy_pf, Quadrant::Lag, verdict.goal),
            if verdict.below_target {
                "below"
            } else {
                "meets"
            },
            p.target
        ),
    )];
    if let (Some(ind), Some(cap)) = (p.tan_phi, p.tan_phi_capacitive) {
        items.push((
            "tan φ",
            format!(
                "{} inductive, {} capacitive (kvarh per kWh imported)",
                num(ind, 3),
                num(cap, 3)
            ),
        ));
    }
    items.extend([
        ("Active import", format!("{} kWh", num(p.kwh_import, 1))),
        ("Active export", format!("{} kWh", num(p.kwh_export, 1))),
        (
            "Reactive inductive",
            format!("{} kvarh", num(p.kvarh_inductive, 1)),
        ),
        (
            "Reactive capacitive",
            format!("{} kvarh", num(p.kvarh_capacitive, 1)),
        ),
        ("Time under target", pct(p.share_under_target)),
        ("Time leading", pct(p.share_leading)),
    ]);
    pairs(h, &items);
    let cal = ctx.study.plan.calendar;
    let rows: Vec<Vec<String>> = p
        .billing
        .iter()
        .map(|w| {
            vec![
                cal.datetime(w.start_s).format("%Y-%m-%d %H:%M").to_string(),
                cal.datetime(w.end_s).format("%Y-%m-%d %H:%M").to_string(),
                pf_vs(w.energy_pf, Quadrant::Lag, verdict.goal),
                format!("{} kWh", num(w.kwh_import, 1)),
                format!("{} kvarh", num(w.kvarh_inductive, 1)),
                format!("{} kvarh", num(w.kvarh_capacitive, 1)),
            ]
        })
        .collect();
    h.push_str("<h3>Billing windows</h3>\n");
    table(
        h,
        &[
            "from",
            "to",
            "energy PF",
            "active import",
            "inductive",
            "capacitive",
        ],
        "llrrrr",
        &rows,
    );
    h.push_str("</section>\n");
}

fn switching(ctx: &ReportContext<'_>, h: &mut String) {
    let m = &ctx.result.metrics;
    let s = &m.switching;
    h.push_str("<section id=\"switching\">\n<h2>Switching</h2>\n");
    let tr = &s.trips;
    pairs(
        h,
        &[
            (
                "Operations",
                format!(
                    "{} in the run ({} per day, {} per year extrapolated)",
                    count(s.total_operations),
                    approx(s.per_day),
                    approx(s.per_year)
                ),
            ),
            (
                "Hunting",
                format!(
                    "{} cycle{} (operations of one step no more than {} apart)",
                    count(s.hunting_cycles),
                    if s.hunting_cycles == 1 { "" } else { "s" },
                    duration(s.hunting_window_s)
                ),
            ),
            (
                "Protection trips",
                format!(
                    "overvoltage {}, loss of current {}, export {}, distortion {}",
                    tr.overvoltage, tr.loss_of_current, tr.export, tr.distortion
                ),
            ),
        ],
    );
    let rows: Vec<Vec<String>> = s
        .per_step
        .iter()
        .map(|p| {
            let per_year = m
                .wear
                .iter()
                .find(|w| w.step == p.step)
                .map_or(0.0, |w| w.operations_per_year);
            vec![
                p.step.to_string(),
                count(p.operations),
                count(p.closings),
                count(p.openings),
                approx(per_year),
                count(p.hunting_cycles),
            ]
        })
        .collect();
    if rows.is_empty() {
        h.push_str("<p>No switched steps.</p>\n");
    } else {
        table(
            h,
            &[
                "step",
                "operations",
                "closings",
                "openings",
                "per year",
                "hunting cycles",
            ],
            "rrrrrr",
            &rows,
        );
    }
    h.push_str("</section>\n");
}

fn cause_label(c: OvercorrectionCause) -> &'static str {
    match c {
        OvercorrectionCause::Export => "export",
        OvercorrectionCause::FixedSteps => "fixed steps",
        OvercorrectionCause::StepNotOpened => "step not yet opened",
        OvercorrectionCause::NotSeenByController => "not seen by the controller",
    }
}

fn overcorrection(ctx: &ReportContext<'_>, h: &mut String) {
    let o = &ctx.result.metrics.overcorrection;
    h.push_str("<section id=\"overcorrection\">\n<h2>Overcorrection</h2>\n");
    let target = ctx.scenario().controller.target;
    let what = if target.quadrant == Quadrant::Lead && target.pf < 1.0 {
        format!(
            "An episode: the supply more leading than the {target} target allows, by more \
             than {} kvar, for at least {}.",
            num(o.threshold_kvar, 1),
            duration(o.min_duration_s)
        )
    } else {
        format!(
            "An episode: the supply leading by more than {} kvar for at least {}.",
            num(o.threshold_kvar, 1),
            duration(o.min_duration_s)
        )
    };
    let _ = writeln!(h, "<p>{}</p>", escape(&what));
    let mut items = vec![("Episodes", count(o.episodes))];
    if o.episodes > 0 {
        items.extend([
            ("Total time", duration(o.total_s)),
            ("Longest", duration(o.longest_s)),
            (
                "Worst",
                format!("{} kvar leading", num(o.worst_leading_kvar, 1)),
            ),
        ]);
        if let Some(c) = o.dominant_cause {
            items.push((
                "Main cause",
                crate::analysis::findings::cause_words(c).to_string(),
            ));
        }
    }
    pairs(h, &items);
    if o.episodes > 0 {
        let all = [
            OvercorrectionCause::Export,
            OvercorrectionCause::FixedSteps,
            OvercorrectionCause::StepNotOpened,
            OvercorrectionCause::NotSeenByController,
        ];
        let rows: Vec<Vec<String>> = all
            .iter()
            .filter_map(|c| {
                let s = o.cause_s.get(c.name()).copied().unwrap_or(0.0);
                (s > 0.0).then(|| vec![cause_label(*c).to_string(), duration(s)])
            })
            .collect();
        if !rows.is_empty() {
            h.push_str("<h3>Time by cause</h3>\n");
            table(h, &["cause", "time"], "lr", &rows);
        }
        let rows: Vec<Vec<String>> = o
            .by_weekday_s
            .iter()
            .enumerate()
            .filter(|(_, s)| **s > 0.0)
            .map(|(i, s)| vec![crate::timebase::WEEKDAYS[i].to_string(), duration(*s)])
            .collect();
        if !rows.is_empty() {
            h.push_str("<h3>Time by weekday</h3>\n");
            table(h, &["weekday", "time"], "lr", &rows);
        }
    }
    h.push_str("</section>\n");
}

fn resonance(ctx: &ReportContext<'_>, h: &mut String) {
    let r = &ctx.assessment.resonance;
    h.push_str("<section id=\"resonance\">\n<h2>Resonance</h2>\n");
    pairs(
        h,
        &[
            (
                "Short-circuit power",
                match r.short_circuit_kva {
                    Some(s) => format!("{} kVA at the bus", num(s, 0)),
                    None => "infinite: no parallel resonance with the supply".to_string(),
                },
            ),
            (
                "Warning tolerance",
                format!(
                    "±{} orders around a harmonic present",
                    num(r.tolerance_orders, 2)
                ),
            ),
            (
                "Limits",
                format!(
                    "bus voltage {}; capacitors {}",
                    r.voltage_limits, r.capacitor_limits
                ),
            ),
            (
                "Model",
                "the harmonic load at its full rating in every state (the estimates err high \
                 at light load)"
                    .to_string(),
            ),
        ],
    );
    let rows: Vec<Vec<String>> = r
        .states
        .iter()
        .take(MAX_STATES)
        .map(|s| {
            vec![
                steps_label(&s.steps),
                format!("{} kvar", num(s.kvar, 0)),
                s.order.map_or("none".to_string(), |o| num(o, 2)),
                s.nearest_harmonic.map_or("-".to_string(), harmonic_name),
                duration(s.time_s),
                format!("{} h", approx(s.hours_per_year)),
                pct_vs_limit(s.thd_pct, s.thd_limit_pct, 1),
                s.status(),
            ]
        })
        .collect();
    table(
        h,
        &[
            "steps on",
            "connected",
            "order",
            "nearest harmonic",
            "time",
            "per year",
            "THD_V",
            "status",
        ],
        "lrrlrrrl",
        &rows,
    );
    if r.states.len() > MAX_STATES {
        let _ = writeln!(
            h,
            "<p>{}</p>",
            escape(&format!(
                "... and {} more states (all in the JSON report).",
                r.states.len() - MAX_STATES
            ))
        );
    }
    if r.warnings.is_empty() {
        h.push_str("<p>No state reached resonates near a harmonic present in the load.</p>\n");
    } else {
        h.push_str("<h3>Warnings</h3>\n<ul>\n");
        for w in &r.warnings {
            let name = harmonic_name(w.near_harmonic);
            let v_h = match w.v_h_limit_pct {
                Some(l) => pct_vs_limit(w.v_h_pct, l, 1),
                None => format!("{} %", num(w.v_h_pct, 1)),
            };
            let _ = writeln!(
                h,
                "<li>{}</li>",
                escape(&format!(
                    "State {} resonates at order {}, near the {name}, for {} (about {} h a \
                     year); it amplifies the {name} {} times: estimated {v_h} at the bus, \
                     THD_V {}.",
                    steps_label(&w.steps),
                    num(w.order, 2),
                    duration(w.time_s),
                    approx(w.hours_per_year),
                    num(w.amplification, 1),
                    pct_vs_limit(w.thd_pct, w.thd_limit_pct, 1)
                ))
            );
        }
        h.push_str("</ul>\n");
    }
    h.push_str("</section>\n");
}

fn wear(ctx: &ReportContext<'_>, h: &mut String) {
    let m = &ctx.result.metrics;
    h.push_str("<section id=\"wear\">\n<h2>Wear</h2>\n");
    let rows: Vec<Vec<String>> = m
        .wear
        .iter()
        .map(|w| {
            let years = match w.years_to_rated_life {
                Some(y) => format!("{} years", years_text(y)),
                None if w.fixed => "not switched".to_string(),
                None => "never operated".to_string(),
            };
            vec![
                w.step.to_string(),
                if w.fixed { "fixed" } else { "switched" }.to_string(),
                count(w.operations),
                approx(w.operations_per_year),
                format!("{} ops", count(w.rated_operations.round() as u64)),
                years,
                format!("{} h", num(w.energized_h, 1)),
            ]
        })
        .collect();
    table(
        h,
        &[
            "step",
            "kind",
            "operations",
            "per year",
            "rated life",
            "years to rated life",
            "energized",
        ],
        "rlrrrrr",
        &rows,
    );
    h.push_str("</section>\n");
}

fn provenance(ctx: &ReportContext<'_>, trace: &Trace, h: &mut String) {
    let sc = ctx.scenario();
    let prov = Provenance::new(sc, ctx.study.profile.sha256());
    let v = serde_json::to_value(&prov).unwrap_or_default();
    let get = |k: &str| -> String {
        match v.get(k) {
            Some(serde_json::Value::String(s)) => s.clone(),
            Some(serde_json::Value::Null) | None => "none (synthetic load)".to_string(),
            Some(x) => x.to_string(),
        }
    };
    let bucket_s = trace.bucket_intervals() as f64 * trace.dt_s();
    html_page::provenance(
        h,
        &[
            ("Tool", format!("bankstep {}", get("tool_version"))),
            ("Scenario file", ctx.scenario_file()),
            ("Scenario SHA-256", get("scenario_sha256")),
            ("Profile SHA-256", get("profile_sha256")),
            ("Seed", get("seed")),
            (
                "Figures over time",
                format!(
                    "each pixel column spans {} of run time, drawn from its lowest to its \
                     highest value ({} columns)",
                    duration(bucket_s),
                    trace.buckets().len()
                ),
            ),
        ],
    );
}

//! The machine-readable report: one pretty-printed JSON object.
//!
//! It carries every key the README's "JSON report" section promises scripts, at its dotted
//! path — `run.*`, `pf.*`, `switching.*`, `overcorrection.*`, `resonance.states[i].*`,
//! `resonance.warnings[i].*`, `wear.per_step[i].*` — after a `tool` object (name and
//! version) and a `provenance` object (hashes and seed), then a `study` object (what was
//! simulated and with which settings), the ranked `findings`, the `settings_to_check`,
//! the bus `voltage` and the count of unsolved intervals.
//!
//! The output is byte-reproducible for a given scenario and version: no run timestamps, no
//! absolute paths (file names only), and only structs, vectors and ordered maps.

use crate::analysis::{Advice, Finding, ResonanceReport};
use crate::metrics::{
    OvercorrectionMetrics, PfMetrics, RunInfo, StepWear, SwitchingMetrics, VoltageMetrics,
};
use crate::report::{Provenance, ReportContext, ReportError, ReportWriter, Tool, TOOL};
use serde::Serialize;
use std::io::Write;

/// The JSON report.
#[derive(Debug, Clone, Copy, Default)]
pub struct JsonReport;

impl ReportWriter for JsonReport {
    fn write(&self, ctx: &ReportContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
        super::write_json(out, &document(ctx))
    }
}

impl JsonReport {
    /// The report as a `serde_json::Value`, for callers that post-process it.
    pub fn value(ctx: &ReportContext<'_>) -> Result<serde_json::Value, ReportError> {
        Ok(serde_json::to_value(document(ctx))?)
    }
}

/// One step of the bank as configured.
#[derive(Debug, Serialize)]
struct StepJson {
    step: usize,
    kvar: f64,
    phase: &'static str,
    /// `delta`, `star`, `line-to-neutral` or `line-to-line`.
    connection: &'static str,
    fixed: bool,
    detuning_pct: Option<f64>,
    rated_operations: f64,
    fault: bool,
}

/// The bank as configured.
#[derive(Debug, Serialize)]
struct BankJson {
    total_kvar: f64,
    switched_kvar: f64,
    fixed_kvar: f64,
    steps: Vec<StepJson>,
}

/// Supply as configured.
#[derive(Debug, Serialize)]
struct SupplyJson {
    nominal_voltage_v: f64,
    frequency_hz: f64,
    short_circuit_kva: Option<f64>,
    /// How the bus is solved: `per-phase`, or `coupled` with the winding (`coupled Dyn`).
    bus: String,
}

/// Controller settings in force.
#[derive(Debug, Serialize)]
struct ControllerJson {
    target: String,
    ordering: &'static str,
    dead_band_kvar: f64,
    switching_delay_s: f64,
    disconnect_delay_s: f64,
    discharge_time_s: f64,
    averaging_s: f64,
    measurement: String,
    export_mode: &'static str,
    /// How the measuring inputs are wired: `as assumed`, or the what-if's wiring.
    wiring: String,
}

/// What was studied.
#[derive(Debug, Serialize)]
struct StudyJson {
    name: String,
    description: Option<String>,
    scenario: String,
    load: String,
    seed: u64,
    start: String,
    ordering: &'static str,
    target: String,
    supply: SupplyJson,
    bank: BankJson,
    controller: ControllerJson,
}

/// Wear, with the per-step list under `per_step`.
#[derive(Debug, Serialize)]
struct WearJson<'a> {
    per_step: &'a [StepWear],
}

/// The whole document, in output order.
#[derive(Debug, Serialize)]
struct Document<'a> {
    tool: Tool,
    provenance: Provenance,
    study: StudyJson,
    run: &'a RunInfo,
    findings: &'a [Finding],
    settings_to_check: &'a [Advice],
    /// For a CSV profile: the rows used and what was done with defective ones.
    profile: Option<&'a crate::profile::csv::DefectSummary>,
    pf: &'a PfMetrics,
    switching: &'a SwitchingMetrics,
    overcorrection: &'a OvercorrectionMetrics,
    resonance: &'a ResonanceReport,
    wear: WearJson<'a>,
    voltage: &'a VoltageMetrics,
    /// Per phase a, b, c.
    phases: &'a [crate::metrics::PhaseMetrics],
    /// Unbalance, when the scenario asks for it (null otherwise).
    unbalance: Option<&'a crate::metrics::UnbalanceMetrics>,
    nonconverged_intervals: u64,
    /// The wear plan, when one was made (null otherwise).
    wear_plan: Option<&'a crate::analysis::maintenance::WearPlan>,
}

fn document<'a>(ctx: &ReportContext<'a>) -> Document<'a> {
    let sc = ctx.scenario();
    let m = &ctx.result.metrics;
    let c = &sc.controller;
    let s_sc = sc.supply.short_circuit_kva();
    let steps: Vec<StepJson> = sc
        .steps
        .iter()
        .enumerate()
        .map(|(i, s)| StepJson {
            step: i + 1,
            kvar: s.kvar,
            phase: s.phase.label(),
            connection: s.phase.connection(),
            fixed: s.fixed,
            detuning_pct: s.detuning.map(|p| p * 100.0),
            rated_operations: s.rated_operations,
            fault: s.fault.is_some(),
        })
        .collect();
    let total: f64 = sc.steps.iter().map(|s| s.kvar).sum();
    let fixed: f64 = sc.steps.iter().filter(|s| s.fixed).map(|s| s.kvar).sum();
    Document {
        tool: TOOL,
        provenance: Provenance::new(sc, ctx.study.profile.sha256()),
        study: StudyJson {
            name: sc.name.clone(),
            description: sc.description.clone(),
            scenario: ctx.scenario_file(),
            load: ctx.load_source(),
            seed: sc.seed,
            start: sc.start.format("%Y-%m-%dT%H:%M:%S").to_string(),
            ordering: c.ordering.name(),
            target: c.target.to_string(),
            supply: SupplyJson {
                nominal_voltage_v: sc.supply.nominal_voltage_v,
                frequency_hz: sc.supply.frequency_hz,
                short_circuit_kva: s_sc.is_finite().then_some(s_sc),
                bus: match sc.bus {
                    crate::supply::BusModel::PerPhase => "per-phase".to_string(),
                    crate::supply::BusModel::Coupled(w) => format!("coupled {}", w.name()),
                },
            },
            bank: BankJson {
                total_kvar: total,
                switched_kvar: total - fixed,
                fixed_kvar: fixed,
                steps,
            },
            controller: ControllerJson {
                target: c.target.to_string(),
                ordering: c.ordering.name(),
                dead_band_kvar: c.dead_band_kvar,
                switching_delay_s: c.connect_delay_s,
                disconnect_delay_s: c.disconnect_delay_s,
                discharge_time_s: c.discharge_time_s,
                averaging_s: c.averaging_s,
                export_mode: c.export_mode.name(),
                measurement: c.measurement_label(),
                wiring: c.wiring().label(),
            },
        },
        run: &m.run,
        findings: &ctx.assessment.findings,
        settings_to_check: &ctx.assessment.settings_to_check,
        profile: ctx.study.csv().map(|c| &c.summary),
        pf: &m.pf,
        switching: &m.switching,
        overcorrection: &m.overcorrection,
        resonance: &ctx.assessment.resonance,
        wear: WearJson { per_step: &m.wear },
        voltage: &m.voltage,
        phases: &m.phases,
        unbalance: m.unbalance.as_ref(),
        nonconverged_intervals: ctx.result.nonconverged_intervals,
        wear_plan: ctx.wear_plan,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::Quiet;
    use crate::scenario::Scenario;
    use crate::study::Study;
    use serde_json::Value;
    use std::path::Path;

    fn render() -> (Vec<u8>, Value) {
        let sc = Scenario::from_str(
            "[[steps]]\nkvar = 50\ncount = 4\n[[steps]]\nkvar = 20\nfixed = true\n\
             [load.synthetic]\n[run]\nduration_s = 600\n",
            Path::new("dir/site.toml"),
        )
        .unwrap();
        let st = Study::prepare(sc).unwrap();
        let r = st.run(&mut Quiet).unwrap();
        let a = crate::analysis::assess(&st, &r);
        let mut out = Vec::new();
        JsonReport
            .write(&ReportContext::new(&st, &r, &a), &mut out)
            .unwrap();
        let v: Value = serde_json::from_slice(&out).unwrap();
        (out, v)
    }

    #[test]
    fn promised_paths_exist() {
        let (_, v) = render();
        assert_eq!(v["run"]["samples"], 600);
        assert!(v["pf"]["energy_pf"].is_number());
        let q = v["pf"]["energy_pf_quadrant"].as_str().unwrap();
        assert!(q == "lag" || q == "lead");
        assert_eq!(v["switching"]["per_step"].as_array().unwrap().len(), 4);
        assert_eq!(v["switching"]["per_step"][0]["step"], 1);
        let wear = v["wear"]["per_step"].as_array().unwrap();
        assert_eq!(wear.len(), 5);
        assert!(wear[4]["years_to_rated_life"].is_null());
        assert!(v["resonance"]["states"].is_array());
        assert!(v["resonance"]["warnings"].is_array());
        assert_eq!(v["tool"]["name"], "bankstep");
        assert_eq!(v["study"]["scenario"], "site.toml");
        assert_eq!(v["study"]["ordering"], "sequential");
        assert_eq!(v["study"]["target"], "0.95 lag");
    }

    #[test]
    fn output_is_reproducible() {
        let (a, _) = render();
        let (b, _) = render();
        assert_eq!(a, b);
    }
}

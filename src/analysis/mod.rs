//! The analysis layer: turns the raw result of a run into one [`Assessment`]: the
//! harmonic assessment of every bank state reached ([`resonance`]), the ranked findings in
//! plain words ([`findings`]) and the settings worth a second look ([`advice`]).
//!
//! Everything a report says about a run is decided here, once; the writers in
//! [`crate::report`] only render an assessment and never rebuild the harmonic model or
//! re-derive a finding. The layer does no I/O.

pub mod advice;
pub mod findings;
pub mod maintenance;
pub mod resonance;
pub mod wiring;

pub use advice::Advice;
pub use findings::{Finding, Severity};
pub use resonance::{ResonanceReport, ResonanceWarning, StateResonance};

use crate::engine::RunResult;
use crate::harmonics::HarmonicModel;
use crate::scenario::Scenario;
use crate::study::Study;
use serde::Serialize;

/// The billed PF against the target, decided once for every line that states it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BilledPf {
    /// The billed PF the target asks for (see [`findings::billed_goal`]).
    pub goal: f64,
    /// True when the billed PF of the run falls short of `goal`.
    pub below_target: bool,
}

/// Everything the analysis concluded about one run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Assessment {
    /// The billed PF against the target.
    pub billed_pf: BilledPf,
    /// Findings, most serious first.
    pub findings: Vec<Finding>,
    /// Legal but unwise settings, with the key concerned and why.
    pub settings_to_check: Vec<Advice>,
    /// The harmonic assessment of every bank state reached.
    pub resonance: ResonanceReport,
}

/// What the checks read: the study, its run, and the parts of the assessment made first.
#[derive(Debug, Clone, Copy)]
pub struct Context<'a> {
    /// The study that was run.
    pub study: &'a Study,
    /// The raw result of its run.
    pub result: &'a RunResult,
    /// The harmonic model of the site.
    pub model: &'a HarmonicModel,
    /// The harmonic assessment of the states reached.
    pub resonance: &'a ResonanceReport,
    /// The billed PF against the target.
    pub billed_pf: BilledPf,
}

impl<'a> Context<'a> {
    /// The settings of the study.
    pub fn scenario(&self) -> &'a Scenario {
        &self.study.scenario
    }

    /// Smallest switched step, kvar (the smallest step of all if none is switched).
    pub fn smallest_switched_kvar(&self) -> f64 {
        crate::bank::smallest_switched_kvar(&self.study.scenario.steps)
    }
}

/// Assesses one run of `study`.
pub fn assess(study: &Study, result: &RunResult) -> Assessment {
    let model = study.harmonic_model();
    let resonance = resonance::assess(study, &model, &result.metrics);
    let goal = findings::billed_goal(study.scenario.controller.target);
    let billed_pf = BilledPf {
        goal,
        below_target: result.metrics.pf.energy_pf < goal,
    };
    let ctx = Context {
        study,
        result,
        model: &model,
        resonance: &resonance,
        billed_pf,
    };
    let findings = findings::findings(&ctx);
    let settings_to_check = advice::review(&ctx);
    Assessment {
        billed_pf,
        findings,
        settings_to_check,
        resonance,
    }
}

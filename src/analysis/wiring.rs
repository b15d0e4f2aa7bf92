//! Wiring of the controller's measurement: what a run shows when the measuring inputs are
//! not wired as the controller assumes (the symptom in words), and the wiring check, which
//! runs every plausible miswiring of the configured measurement on the study's prepared
//! profile and collects one row per wiring.
//!
//! The symptoms, judged on the run alone, in this order (several may apply):
//!
//! - **never switches**: no operation in the run although the bank has switched steps;
//! - **switches every step in**: every switched step connected at least half the time;
//! - **hunts**: 10 hunting cycles a day or more (the hunting finding's warning level);
//! - **overcorrects**: the three-phase supply overcorrected at least 1 % of the time, or
//!   **overcorrects one phase** where only a phase is;
//! - **leaves the billed PF below target**: the billed PF falls short of the target's goal;
//! - otherwise **shows no visible symptom**.

use crate::engine::{Quiet, RunResult};
use crate::error::RunError;
use crate::pf::Quadrant;
use crate::study::Study;
use rayon::prelude::*;
use serde::Serialize;

/// What a run shows of a wiring fault (or of anything else).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Symptom {
    /// No operation although the bank has switched steps.
    NeverSwitches,
    /// Every switched step in at least half the time.
    AllStepsIn,
    /// 10 hunting cycles a day or more.
    Hunts,
    /// The three-phase supply overcorrected at least 1 % of the time.
    Overcorrects,
    /// A phase overcorrected at least 1 % of the time while the three-phase supply is not.
    OvercorrectsPhase,
    /// The billed PF falls short of the target.
    BelowTarget,
    /// None of the above.
    None,
}

impl Symptom {
    /// The symptom in words.
    pub fn words(self) -> &'static str {
        match self {
            Symptom::NeverSwitches => "never switches",
            Symptom::AllStepsIn => "switches every step in",
            Symptom::Hunts => "hunts",
            Symptom::Overcorrects => "overcorrects",
            Symptom::OvercorrectsPhase => "overcorrects one phase",
            Symptom::BelowTarget => "leaves the billed PF below target",
            Symptom::None => "shows no visible symptom",
        }
    }
}

/// The symptoms of a run of `study`, in the order of the module docs; `[None]` when none
/// applies.
pub fn symptoms(study: &Study, result: &RunResult) -> Vec<Symptom> {
    let m = &result.metrics;
    let d = m.run.duration_s;
    let switched: Vec<usize> = m.wear.iter().filter(|w| !w.fixed).map(|w| w.step).collect();
    let mut out = Vec::new();
    if !switched.is_empty() && m.switching.total_operations == 0 {
        out.push(Symptom::NeverSwitches);
    }
    if !switched.is_empty() && d > 0.0 {
        let all_in: f64 = m
            .states
            .iter()
            .filter(|s| switched.iter().all(|n| s.steps.contains(n)))
            .map(|s| s.time_s)
            .sum();
        if all_in >= 0.5 * d {
            out.push(Symptom::AllStepsIn);
        }
    }
    if d > 0.0 && m.switching.hunting_cycles as f64 * 86_400.0 / d >= 10.0 {
        out.push(Symptom::Hunts);
    }
    let worst_phase = m
        .phases
        .iter()
        .map(|p| p.overcorrection.total_s)
        .fold(0.0, f64::max);
    if d > 0.0 && m.overcorrection.total_s >= 0.01 * d {
        out.push(Symptom::Overcorrects);
    } else if d > 0.0 && worst_phase >= 0.01 * d {
        out.push(Symptom::OvercorrectsPhase);
    }
    let goal = crate::analysis::findings::billed_goal(study.scenario.controller.target);
    if m.pf.energy_pf < goal {
        out.push(Symptom::BelowTarget);
    }
    if out.is_empty() {
        out.push(Symptom::None);
    }
    out
}

/// The symptoms joined in words, as what the controller does: `switches every step in
/// and overcorrects`.
pub fn symptom_words(s: &[Symptom]) -> String {
    let words: Vec<String> = s.iter().map(|x| x.words().to_string()).collect();
    crate::text::join_and(&words)
}

/// One wiring of the wiring check and what its run showed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WiringRow {
    /// The wiring in words (`as assumed` for the reference row).
    pub wiring: String,
    /// Billed PF of the run.
    pub billed_pf: f64,
    /// Its quadrant.
    pub billed_pf_quadrant: Quadrant,
    /// Operations in the run.
    pub operations: u64,
    /// Overcorrected time of the three-phase supply, s.
    pub overcorrected_s: f64,
    /// The most overcorrected time of any one phase, s.
    pub worst_phase_overcorrected_s: f64,
    /// The symptoms.
    pub symptoms: Vec<Symptom>,
    /// The symptoms in words.
    pub symptom: String,
}

/// The row of one run.
fn row(study: &Study, wiring: String, r: &RunResult) -> WiringRow {
    let m = &r.metrics;
    let s = symptoms(study, r);
    WiringRow {
        wiring,
        billed_pf: m.pf.energy_pf,
        billed_pf_quadrant: m.pf.energy_pf_quadrant,
        operations: m.switching.total_operations,
        overcorrected_s: m.overcorrection.total_s,
        worst_phase_overcorrected_s: m
            .phases
            .iter()
            .map(|p| p.overcorrection.total_s)
            .fold(0.0, f64::max),
        symptom: symptom_words(&s),
        symptoms: s,
    }
}

/// The wiring check of `study`: its measurement wired as assumed (the first row), then
/// every plausible miswiring of it ([`crate::controller::Wiring::miswirings`]), each run
/// on the study's prepared profile, in parallel; the rows come in that fixed order
/// whatever the thread count. A what-if wiring in the scenario itself is replaced.
pub fn wiring_check(study: &Study) -> Result<Vec<WiringRow>, RunError> {
    let mut base = study.scenario.clone();
    base.controller.wired = None;
    let wiring = base.controller.wiring();
    let mut cases: Vec<Option<[crate::controller::Channel; 3]>> = vec![None];
    cases.extend(wiring.miswirings().into_iter().map(Some));
    cases
        .par_iter()
        .map(|case| {
            let mut sc = base.clone();
            sc.controller.wired = *case;
            let label = sc.controller.wiring().label();
            let st = Study::with_profile(sc, study.profile.clone())?;
            let r = st.run(&mut Quiet)?;
            Ok(row(&st, label, &r))
        })
        .collect()
}

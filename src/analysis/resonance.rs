//! The harmonic assessment of a run: for every bank state the run reached, its resonant
//! order, the estimated harmonic voltages and THD at the bus, the stress on each connected
//! step, the time spent in it, and whether it resonates near a harmonic of the load.
//!
//! The estimate injects the harmonic currents of the load spectrum at `reference_kva` in
//! every state, whatever the load did at the time: it is the estimate at full harmonic
//! load, which errs high at light load.
//!
//! Each state is judged against its limits by [`StateHarmonics::breaches`], with the
//! capacitor voltage judged by the most hours the state was held in one calendar day
//! (IEC 60831-1 admits 1.10 × U_N for 8 h in every 24 h but only 1.00 × U_N continuously);
//! a run shorter than a day cannot tell, so its states are judged as held continuously.

use crate::harmonics::{Breach, HarmonicModel, HarmonicVoltage, StateHarmonics, StepStress};
use crate::metrics::RunMetrics;
use crate::study::Study;
use crate::timebase::HOURS_PER_YEAR;
use serde::Serialize;

/// Resonance of one bank state reached.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StateResonance {
    /// Connected steps.
    pub steps: Vec<usize>,
    /// Nominal kvar connected.
    pub kvar: f64,
    /// Parallel-resonance order: sqrt(S_sc/Q_c) when every connected step is plain, else
    /// the strongest peak of the impedance scan; `null` with nothing connected or a stiff
    /// supply.
    pub order: Option<f64>,
    /// Resonance frequency, Hz.
    pub frequency_hz: Option<f64>,
    /// Order of the strongest peak of the impedance scan (orders 1 to 50 by 0.01,
    /// refined); `null` when there is none inside the scan.
    pub peak_order: Option<f64>,
    /// |Z| at that peak, ohm per phase.
    pub peak_impedance_ohm: Option<f64>,
    /// The order of the load spectrum nearest to `order`, however far (`null` without a
    /// spectrum or a resonance).
    pub nearest_harmonic: Option<f64>,
    /// Time in the state, s.
    pub time_s: f64,
    /// Time in the state extrapolated to a 365-day year (the run's share of time × 8760 h),
    /// h.
    pub hours_per_year: f64,
    /// Estimated voltage THD at the bus in this state, %.
    pub thd_pct: f64,
    /// THD limit of the chosen table, %.
    pub thd_limit_pct: f64,
    /// The bus at each order of the load spectrum.
    pub harmonics: Vec<HarmonicVoltage>,
    /// Current and voltage stress of each connected step.
    pub step_stress: Vec<StepStress>,
    /// Most time held in one calendar day, h (the run's longest day in this state).
    pub max_hours_per_day: f64,
    /// The harmonic of the load the state resonates near (its resonant order or a scan
    /// peak within the tolerance), if any.
    pub near_harmonic: Option<f64>,
    /// Every limit the state exceeds (empty: within every limit).
    pub breaches: Vec<Breach>,
    /// Largest of the harmonic voltages, the THD and the step stresses over their limits
    /// (> 1: a limit is exceeded, and `breaches` says which).
    pub limit_ratio: f64,
    /// Severity: the square of `limit_ratio` (heating grows with the square of current
    /// and voltage); `hours_per_year × severity` ranks the states.
    pub severity: f64,
}

/// A state resonating near a harmonic present in the load.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResonanceWarning {
    /// Connected steps.
    pub steps: Vec<usize>,
    /// Parallel-resonance order.
    pub order: f64,
    /// The harmonic order of the load spectrum it lies near.
    pub near_harmonic: f64,
    /// Time in the state, s.
    pub time_s: f64,
    /// Time in the state extrapolated to a 365-day year, h.
    pub hours_per_year: f64,
    /// Estimated bus voltage at that harmonic, % of U_n.
    pub v_h_pct: f64,
    /// Limit for that harmonic, % (`null` where the chosen table gives none).
    pub v_h_limit_pct: Option<f64>,
    /// |Z| with the bank over |Z| without it at that harmonic.
    pub amplification: f64,
    /// Estimated voltage THD at the bus, %.
    pub thd_pct: f64,
    /// THD limit, %.
    pub thd_limit_pct: f64,
    /// The state's severity (see [`StateResonance::severity`]).
    pub severity: f64,
}

/// Resonance section of a run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResonanceReport {
    /// Short-circuit power at the bus, kVA (`null` if infinite).
    pub short_circuit_kva: Option<f64>,
    /// Tolerance used, orders.
    pub tolerance_orders: f64,
    /// Harmonic-voltage limits used, e.g. `IEEE Std 519-2014 Table 1`.
    pub voltage_limits: &'static str,
    /// Capacitor limits used, e.g. `IEC 60831-1`.
    pub capacitor_limits: &'static str,
    /// Damping load assumed at the bus, kW (0: none, the estimate errs high).
    pub damping_kw: f64,
    /// Every state reached, longest first.
    pub states: Vec<StateResonance>,
    /// States near a harmonic of the load, longest first.
    pub warnings: Vec<ResonanceWarning>,
}

impl ResonanceReport {
    /// The worst state with at least one step connected: the most hours a year ×
    /// severity; on a tie the state with more hours, then the one with fewer steps. The
    /// summary leads with it, and sweeps and designs compare runs by it.
    pub fn worst_state(&self) -> Option<&StateResonance> {
        self.states
            .iter()
            .filter(|s| !s.steps.is_empty())
            .max_by(|a, b| {
                (a.hours_per_year * a.severity)
                    .total_cmp(&(b.hours_per_year * b.severity))
                    .then(a.hours_per_year.total_cmp(&b.hours_per_year))
                    .then(b.steps.len().cmp(&a.steps.len()))
            })
    }
}

/// The state's status in a few words: `clear`, `near h7`, `over THD_V, I_C` or both.
impl StateResonance {
    /// `clear` when nothing is exceeded and no resonance lies near a harmonic present;
    /// else what is wrong, e.g. `near h7; over V_h7, THD_V, I_C`.
    pub fn status(&self) -> String {
        let mut parts = Vec::new();
        if let Some(h) = self.near_harmonic {
            parts.push(format!("near h{}", crate::text::num(h, 0)));
        }
        if !self.breaches.is_empty() {
            let mut kinds: Vec<String> = Vec::new();
            for b in &self.breaches {
                let k = b.kind.short();
                if !kinds.contains(&k) {
                    kinds.push(k);
                }
            }
            parts.push(format!("over {}", kinds.join(", ")));
        }
        if parts.is_empty() {
            "clear".to_string()
        } else {
            parts.join("; ")
        }
    }
}

/// The breaches of one state in words, capacitor breaches that read the same for several
/// steps joined into one (`steps 1, 2 and 3 capacitor rms current 1.987 × rated over the
/// 1.300 × rated limit (IEC 60831-1)`), in the order of the first step of each.
pub fn breach_lines(breaches: &[Breach]) -> Vec<String> {
    let mut groups: Vec<(String, Vec<usize>)> = Vec::new();
    for b in breaches {
        let text = Breach { step: None, ..*b }.to_string();
        match b.step {
            None => groups.push((text, Vec::new())),
            Some(n) => match groups.iter_mut().find(|g| g.0 == text && !g.1.is_empty()) {
                Some(g) => g.1.push(n),
                None => groups.push((text, vec![n])),
            },
        }
    }
    groups
        .into_iter()
        .map(|(text, steps)| match steps.len() {
            0 => text,
            1 => format!("step {} {text}", steps[0]),
            _ => {
                let names: Vec<String> = steps.iter().map(|n| n.to_string()).collect();
                format!("steps {} {text}", crate::text::join_and(&names))
            }
        })
        .collect()
}

/// Hours a day to judge a state's capacitor voltage by: the most it was held in one
/// calendar day, or `None` (continuous, the safe side) when the run is shorter than a day.
fn hours_per_day(run_s: f64, max_day_s: f64) -> Option<f64> {
    (run_s >= crate::timebase::DAY_S).then_some(max_day_s / 3600.0)
}

/// The largest value over limit of a state judged with `breaches`: the largest breach
/// when there is one, else the state's own ratio, which can then be at most 1.
fn judged_ratio(h: &StateHarmonics, breaches: &[Breach]) -> f64 {
    if breaches.is_empty() {
        h.limit_ratio.min(1.0)
    } else {
        breaches
            .iter()
            .map(Breach::ratio)
            .fold(h.limit_ratio.min(1.0), f64::max)
    }
}

/// The resonance section of a run: every state reached, solved once each, with the states
/// near a harmonic of the load.
pub fn assess(study: &Study, hm: &HarmonicModel, m: &RunMetrics) -> ResonanceReport {
    assess_with(study, hm, m, &|mask| hm.state(mask))
}

/// As [`assess`], with each state's harmonics given by `solve` (which must return what
/// `hm.state(mask)` returns; a sweep passes a cache shared across its runs, so that a
/// state of a bank is solved once however many runs reach it).
pub fn assess_with(
    study: &Study,
    hm: &HarmonicModel,
    m: &RunMetrics,
    solve: &(dyn Fn(crate::bank::BankState) -> StateHarmonics + Sync),
) -> ResonanceReport {
    let sc = &study.scenario;
    let f = sc.supply.frequency_hz;
    let run_s = m.run.duration_s.max(1e-9);
    let mut states = Vec::with_capacity(m.states.len());
    let mut warnings = Vec::new();
    // Each state reached appears once here, so each is solved once; the states are
    // independent, so they are solved in parallel, and collected in their order, so
    // the report does not depend on the number of threads.
    let solved: Vec<_> = {
        use rayon::prelude::*;
        m.states.par_iter().map(|st| solve(st.mask)).collect()
    };
    for (st, h) in m.states.iter().zip(solved) {
        let hours_per_year = st.time_s / run_s * HOURS_PER_YEAR;
        // A warning where the resonant order, or any other peak of the scan, lies within
        // the tolerance of a harmonic present; the worst such harmonic is named.
        let near = hm.near_resonance(&h, sc.resonance_tolerance);
        let day_h = hours_per_day(run_s, st.max_day_s);
        let breaches = h.breaches(day_h);
        let limit_ratio = judged_ratio(&h, &breaches);
        let severity = limit_ratio * limit_ratio;
        if let Some(n) = near {
            if let Some(hv) = h.harmonics.iter().find(|x| x.order == n.harmonic) {
                warnings.push(ResonanceWarning {
                    steps: st.steps.clone(),
                    order: n.order,
                    near_harmonic: hv.order,
                    time_s: st.time_s,
                    hours_per_year,
                    v_h_pct: hv.v_pct,
                    v_h_limit_pct: hv.limit_pct,
                    amplification: hv.amplification,
                    thd_pct: h.thd_pct,
                    thd_limit_pct: h.thd_limit_pct,
                    severity,
                });
            }
        }
        let peak = h.peaks.first();
        states.push(StateResonance {
            steps: st.steps.clone(),
            kvar: st.mask.kvar(&sc.steps),
            order: h.order,
            frequency_hz: h.order.map(|o| o * f),
            peak_order: peak.map(|p| p.order),
            peak_impedance_ohm: peak.map(|p| p.impedance_ohm),
            nearest_harmonic: h.order.and_then(|o| hm.nearest_harmonic(o)),
            time_s: st.time_s,
            hours_per_year,
            thd_pct: h.thd_pct,
            thd_limit_pct: h.thd_limit_pct,
            max_hours_per_day: st.max_day_s / 3600.0,
            near_harmonic: near.map(|n| n.harmonic),
            breaches,
            harmonics: h.harmonics,
            step_stress: h.steps,
            limit_ratio,
            severity,
        });
    }
    let s_sc = sc.supply.short_circuit_kva();
    ResonanceReport {
        short_circuit_kva: s_sc.is_finite().then_some(s_sc),
        tolerance_orders: sc.resonance_tolerance,
        voltage_limits: sc.harmonics.voltage_limits.name(),
        capacitor_limits: sc.harmonics.capacitor_limits.values().standard,
        damping_kw: sc.harmonics.damping_kw,
        states,
        warnings,
    }
}

//! The harmonic assessment of a run: for every bank state the run reached, its resonant
//! order, the estimated harmonic voltages and THD at the bus, the stress on each connected
//! step, the time spent in it, and whether it resonates near a harmonic of the load.
//!
//! The estimate injects the harmonic currents of the load spectrum at `reference_kva` in
//! every state, whatever the load did at the time: it is the estimate at full harmonic
//! load, which errs high at light load.

use crate::harmonics::{HarmonicModel, HarmonicVoltage, StepStress};
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
    /// Largest of the harmonic voltages, the THD and the step stresses over their limits
    /// (≥ 1: a limit is exceeded).
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

/// The resonance section of a run: every state reached, solved once each, with the states
/// near a harmonic of the load.
pub fn assess(study: &Study, hm: &HarmonicModel, m: &RunMetrics) -> ResonanceReport {
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
        m.states.par_iter().map(|st| hm.state(st.mask)).collect()
    };
    for (st, h) in m.states.iter().zip(solved) {
        let hours_per_year = st.time_s / run_s * HOURS_PER_YEAR;
        // A warning where the resonant order, or any other peak of the scan, lies within
        // the tolerance of a harmonic present; the worst such harmonic is named.
        let mut best: Option<(f64, &HarmonicVoltage)> = None;
        for order in h.order.into_iter().chain(h.peaks.iter().map(|p| p.order)) {
            let Some(near) = hm.near_harmonic(order, sc.resonance_tolerance) else {
                continue;
            };
            let Some(hv) = h.harmonics.iter().find(|x| x.order == near) else {
                continue;
            };
            if best.is_none_or(|b| hv.v_pct > b.1.v_pct) {
                best = Some((order, hv));
            }
        }
        if let Some((order, hv)) = best {
            warnings.push(ResonanceWarning {
                steps: st.steps.clone(),
                order,
                near_harmonic: hv.order,
                time_s: st.time_s,
                hours_per_year,
                v_h_pct: hv.v_pct,
                v_h_limit_pct: hv.limit_pct,
                amplification: hv.amplification,
                thd_pct: h.thd_pct,
                thd_limit_pct: h.thd_limit_pct,
                severity: h.severity,
            });
        }
        let peak = h.peaks.first();
        states.push(StateResonance {
            steps: st.steps.clone(),
            kvar: crate::bank::BankState::from_bits(st.mask).kvar(&sc.steps),
            order: h.order,
            frequency_hz: h.order.map(|o| o * f),
            peak_order: peak.map(|p| p.order),
            peak_impedance_ohm: peak.map(|p| p.impedance_ohm),
            nearest_harmonic: h.order.and_then(|o| hm.nearest_harmonic(o)),
            time_s: st.time_s,
            hours_per_year,
            thd_pct: h.thd_pct,
            thd_limit_pct: h.thd_limit_pct,
            harmonics: h.harmonics,
            step_stress: h.steps,
            limit_ratio: h.limit_ratio,
            severity: h.severity,
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

//! The time-stepping engine: runs a load profile through the supply, the bank and the
//! controller, interval by interval, and collects the metrics.
//!
//! Order inside interval k (start t_k = t_first + k·Δt): take the load sample; solve the
//! bus with the bank as it stands; record the interval; let the controller read the
//! measurement and make at most one operation; the new state holds from t_{k+1}.
//!
//! The engine does no I/O and allocates nothing inside the loop. A [`Simulation`] is
//! immutable and can serve many runs (sweeps); the per-run state lives on the stack of
//! [`Simulation::run`]. Observers see every interval (time series, progress) and are the
//! only way out of the loop.

use crate::bank::{Bank, StepSpec};
use crate::controller::{Controller, ControllerParams, Decision, Reading};
use crate::error::RunError;
use crate::harmonics::{HarmonicModel, HarmonicOptions, HarmonicVoltage, Spectrum, StepStress};
use crate::metrics::{IntervalObs, MetricParams, RunMetrics};
use crate::profile::{LoadSample, LoadSource};
use crate::supply::{BusSolver, PhaseSolution, SupplyParams};
use crate::timebase::Calendar;
use serde::Serialize;
use std::collections::HashMap;

/// Everything needed to simulate one study; built and validated by the scenario module.
#[derive(Debug, Clone)]
pub struct Simulation {
    /// Supply at the bus.
    pub supply: SupplyParams,
    /// Bank steps in number order.
    pub steps: Vec<StepSpec>,
    /// Controller settings.
    pub controller: ControllerParams,
    /// Metric settings.
    pub metrics: MetricParams,
    /// Load harmonic spectrum.
    pub spectrum: Spectrum,
    /// A resonance within this many orders of a harmonic in the spectrum is a warning.
    /// Default 0.5.
    pub resonance_tolerance: f64,
    /// Harmonic limits and damping. Default IEEE Std 519 and IEC 60831-1 limits, no
    /// damping.
    pub harmonics: HarmonicOptions,
    /// Calendar of the run's time base.
    pub calendar: Calendar,
    /// Start of the first interval, s (profile time base).
    pub t_first_s: f64,
    /// Time step Δt, s.
    pub dt_s: f64,
    /// Number of intervals.
    pub intervals: u64,
}

/// One interval as observers see it.
#[derive(Debug, Clone, Copy)]
pub struct IntervalRecord<'a> {
    /// Interval index k.
    pub k: u64,
    /// Start t_k, s.
    pub t_s: f64,
    /// The load sample.
    pub load: &'a LoadSample,
    /// Per-phase solution at the metering point.
    pub phases: &'a [PhaseSolution; 3],
    /// Connected steps during the interval (mask).
    pub mask: u64,
    /// The controller's decision (operations take effect at t_{k+1}).
    pub decision: &'a Decision,
}

/// Receives every interval. The default methods do nothing and compile away.
pub trait Observer {
    /// Called once per interval, after the controller has decided.
    fn interval(&mut self, _r: &IntervalRecord<'_>) -> Result<(), RunError> {
        Ok(())
    }
    /// Called every few thousand intervals with the number done and the total.
    fn progress(&mut self, _done: u64, _total: u64) {}
}

/// An observer that ignores everything.
#[derive(Debug, Default, Clone, Copy)]
pub struct Quiet;
impl Observer for Quiet {}

/// Hours in a 365-day year, h.
pub const HOURS_PER_YEAR: f64 = 8760.0;

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

/// The result of one run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunResult {
    /// Metrics of the run.
    #[serde(flatten)]
    pub metrics: RunMetrics,
    /// Resonance per state reached.
    pub resonance: ResonanceReport,
    /// Intervals where the bus-voltage iteration did not converge (load beyond what the
    /// supply can carry); nonzero values deserve a look.
    pub nonconverged_intervals: u64,
}

/// How often observers hear about progress, intervals.
const PROGRESS_EVERY: u64 = 1 << 16;

impl Simulation {
    /// The harmonic model of the site.
    pub fn harmonic_model(&self) -> HarmonicModel {
        HarmonicModel::new(
            &self.supply,
            &self.steps,
            self.spectrum.clone(),
            self.harmonics,
        )
    }

    /// Runs the simulation over `source`, telling `observer` about every interval.
    pub fn run<S: LoadSource + ?Sized, O: Observer + ?Sized>(
        &self,
        source: &mut S,
        observer: &mut O,
    ) -> Result<RunResult, RunError> {
        let u_n = self.supply.nominal_voltage_v;
        let dt = self.dt_s;
        let t0 = self.t_first_s;
        let mut bank = Bank::new(self.steps.clone(), u_n);
        let mut solver = BusSolver::new(&self.supply);
        let mut ctl = Controller::new(self.controller, &bank, dt, t0);
        let mut met =
            crate::metrics::Metrics::new(self.metrics.clone(), &bank, self.calendar, u_n, dt, t0);
        let hm = self.harmonic_model();
        let thd_wanted = self.controller.protection.thd_limit_pct.is_some();
        let mut thd_cache: HashMap<u64, f64> =
            HashMap::with_capacity(if thd_wanted { 4096 } else { 0 });
        let mut thd_of = |mask: u64| -> f64 {
            if !thd_wanted {
                return 0.0;
            }
            *thd_cache.entry(mask).or_insert_with(|| hm.thd_pct(mask))
        };

        let mut sample = LoadSample::default();
        solver.set_bank(&bank.susceptance(ctl.mask()));
        let mut b_fixed = bank.susceptance(bank.fixed_mask);
        let mut thd = thd_of(ctl.mask());
        let sqrt3 = 3f64.sqrt();
        let want_current = self.controller.protection.min_current_a.is_some();
        let has_fixed = bank.fixed_mask != 0;
        let n = self.intervals;
        observer.progress(0, n);
        for k in 0..n {
            let t = t0 + k as f64 * dt;
            let t_next = t0 + (k + 1) as f64 * dt;
            if bank.advance_faults(k as f64 * dt) {
                solver.set_bank(&bank.susceptance(ctl.mask()));
                b_fixed = bank.susceptance(bank.fixed_mask);
            }
            source.sample(k, t, &mut sample)?;
            let sol = solver.solve(&sample.p_kw, &sample.q_kvar);
            let mut v_min = sol[0].v_ln;
            let mut v_max = sol[0].v_ln;
            let mut i2_max: f64 = 0.0;
            let mut fixed_q = 0.0;
            let mut reading = Reading {
                thd_pct: thd,
                ..Reading::default()
            };
            for ph in 0..3 {
                let s = &sol[ph];
                if s.v_ln < v_min {
                    v_min = s.v_ln;
                }
                if s.v_ln > v_max {
                    v_max = s.v_ln;
                }
                if want_current {
                    let i2 = (s.p_kw * s.p_kw + s.q_kvar * s.q_kvar) / (s.v_ln * s.v_ln).max(1e-18);
                    if i2 > i2_max {
                        i2_max = i2;
                    }
                }
                if has_fixed {
                    fixed_q += b_fixed[ph] * s.v_ln * s.v_ln * 1e-3;
                }
                reading.p_kw[ph] = s.p_kw;
                reading.q_kvar[ph] = s.q_kvar;
            }
            reading.v_ll_max = v_max * sqrt3;
            reading.current_a = i2_max.sqrt() * 1e3;
            let mask = ctl.mask();
            let d = ctl.decide(&reading, t_next);
            met.record(&IntervalObs {
                t_s: t,
                p_kw: reading.p_kw[0] + reading.p_kw[1] + reading.p_kw[2],
                q_kvar: reading.q_kvar[0] + reading.q_kvar[1] + reading.q_kvar[2],
                load_q_kvar: sample.q_total(),
                load_p_kw: sample.p_total(),
                fixed_q_kvar: fixed_q,
                v_ll_min: v_min * sqrt3,
                v_ll_max: v_max * sqrt3,
                decision: &d,
            });
            observer.interval(&IntervalRecord {
                k,
                t_s: t,
                load: &sample,
                phases: &sol,
                mask,
                decision: &d,
            })?;
            if d.closed | d.opened != 0 {
                met.record_ops(k, &d, t_next);
                solver.set_bank(&bank.susceptance(ctl.mask()));
                thd = thd_of(ctl.mask());
            }
            if (k + 1) % PROGRESS_EVERY == 0 {
                observer.progress(k + 1, n);
            }
        }
        observer.progress(n, n);
        let metrics = met.finish(&bank, ctl.steps());
        let resonance = self.resonance_report(&hm, &bank, &metrics);
        Ok(RunResult {
            metrics,
            resonance,
            nonconverged_intervals: solver.nonconverged,
        })
    }

    fn resonance_report(&self, hm: &HarmonicModel, bank: &Bank, m: &RunMetrics) -> ResonanceReport {
        let f = self.supply.frequency_hz;
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
                let Some(near) = hm.near_harmonic(order, self.resonance_tolerance) else {
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
                kvar: bank.nominal_kvar(st.mask),
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
        let s_sc = self.supply.short_circuit_kva();
        ResonanceReport {
            short_circuit_kva: s_sc.is_finite().then_some(s_sc),
            tolerance_orders: self.resonance_tolerance,
            voltage_limits: self.harmonics.voltage_limits.name(),
            capacitor_limits: self.harmonics.capacitor_limits.values().standard,
            damping_kw: self.harmonics.damping_kw,
            states,
            warnings,
        }
    }
}

//! The time-stepping engine: runs a load profile through the supply, the bank and the
//! controller, interval by interval, and collects the metrics.
//!
//! Order inside interval k (start t_k = t_first + k·Δt): take the load sample; solve the
//! bus with the bank as it stands; record the interval; let the controller read the
//! measurement and make at most one operation; the new state holds from t_{k+1}.
//!
//! The engine does no I/O and allocates nothing inside the loop. It reads the settings
//! ([`Scenario`]) and the time base ([`RunPlan`]) and changes neither, so one set of
//! settings can serve many runs; the per-run state lives on the stack of [`run`]. Observers
//! are the only way out of the loop. The engine judges nothing: what the metrics mean is
//! the business of [`crate::analysis`].
//!
//! # Chunks and lanes
//!
//! The samples come from the source in chunks of up to 256 intervals
//! ([`LoadSource::fill_owned`]: the same samples as interval-by-interval calls, written
//! into the engine's buffer or handed over in one the source made ahead), and the bus is
//! solved ahead of the controller for up to [`LANE`] of them at a time with the bank as
//! it stands ([`BusSolver::solve_lanes`], bit for bit the per-interval solution, in
//! arrays the compiler vectorises). Operations are rare against the interval, so the
//! solutions ahead almost always hold; an operation or a fault cuts the lane back to the
//! interval in hand, and the next interval is solved again with the new bank. Nothing
//! else moves: each interval still takes its sample, its solution, its record and the
//! controller's decision in the order above. The buffers are allocated once, before the
//! first interval. A source error is reported after the intervals before it, as it
//! would be one sample at a time.
//!
//! In the usual run (the controller reads the supply's own P and Q, three-phase or one
//! phase; no per-phase control, unbalance, current protection, coupled bus or step
//! between two lines) the intervals of a solved lane go through a short loop, up to the
//! first operation, the next fault, the end of the run and, with blocks, the chunk's
//! last sample (whose promise the long path asks for): the same steps in the same order,
//! without the long path's buffer, lane and block checks, and with what every interval
//! adds to the metrics ([`crate::metrics::Running`]) held in registers for the stretch.
//! When the lane in hand is used up (or cut back by an operation) inside the chunk, the
//! short loop solves the next one itself, as the long path would. Where the processor has AVX2 the whole loop is compiled
//! for it (chosen at run time): the same operations in the same order, no fused
//! multiply-add, so the same bits.
//!
//! # Blocks of identical intervals
//!
//! While the load sample, the bank state and the controller's inputs stay the same, the
//! intervals are identical: the same bus solution, the same reading, the same decision
//! (no operation) and the same metrics. Logger data at 1 min or 15 min stepped at 1 s is
//! mostly such stretches, so with [`Stepping::Events`] (the default) the engine steps
//! through interval k as usual and then, if k made no operation, adds the identical
//! intervals that follow as one block: the metrics take them as a count
//! ([`Metrics::record_block`]) and the controller moves its counters on
//! ([`crate::controller::Controller::skip`]). The next interval stepped on its own is the block's end,
//! the earliest of:
//!
//! - the next interval whose sample may differ ([`LoadSource::unchanged_until`]);
//! - the end of the run and the next progress report (every [`PROGRESS_EVERY`] intervals);
//! - two intervals before the next fault starts, the next billing window starts or the
//!   next calendar midnight (overcorrection is counted by weekday; the time per bank state
//!   and its `max_day_s` change only with operations, which blocks never hold);
//! - the controller's quiet stretch ([`crate::controller::Controller::quiet_after`]): none while the averaging
//!   window still holds older values, and not past the push that first resums a window
//!   full of one value; otherwise until a protection timer would trip, the
//!   switching timer meets its delay, or (delay met, operation not possible) the cap on
//!   operations per hour or a discharge lockout ends.
//!
//! Every interval that ends a block is stepped on its own, so anything it starts (an
//! operation, a trip, a new sample) happens exactly as interval-by-interval stepping would
//! have it. An episode's minimum length needs no boundary: an episode is judged when it
//! closes, on an interval that is not overcorrected and so not inside its block. The
//! nonconverged count adds the block's intervals when interval k had no bus solution.
//!
//! Intervals stepped on their own inside the source's promise (while the averaging
//! window fills, or while a delay runs out after a block) keep the sample and, unless the
//! bank changed, the bus solution of the interval before: the same inputs give the same
//! solution, so only the controller and the metrics run.
//!
//! Observers that need every interval (time series, recorders in tests) say so with
//! [`Observer::wants_every_interval`] (the default), and then every interval is stepped
//! on its own; [`Stepping::EveryInterval`] forces it for any observer.

use crate::bank::{Bank, BankState, Shunt};
use crate::controller::Measurement;
use crate::controller::{Control, Decision};
use crate::error::RunError;
use crate::metrics::Metrics;
use crate::metrics::{IntervalObs, MetricParams, RunMetrics};
use crate::profile::{LoadSample, LoadSource};
use crate::scenario::Scenario;
use crate::study::{RunPlan, Stepping};
use crate::supply::{BusModel, BusSolver, CoupledSolver, Lanes, PhaseSolution, LANE};
use num_complex::Complex64;
use serde::Serialize;
use std::collections::HashMap;

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
    /// Connected steps during the interval.
    pub mask: BankState,
    /// The controller's decision (operations take effect at t_{k+1}).
    pub decision: &'a Decision,
}

/// Receives the intervals of a run. The default methods do nothing and compile away.
pub trait Observer {
    /// True (the default) when [`Observer::interval`] must see every interval; false lets
    /// the engine add stretches of identical intervals as blocks, reported to
    /// [`Observer::block`] instead. Asked once, before the first interval.
    fn wants_every_interval(&self) -> bool {
        true
    }
    /// Called once per interval stepped on its own, after the controller has decided:
    /// every interval when [`Observer::wants_every_interval`] is true, and otherwise every
    /// interval outside a block (among them every interval with an operation).
    fn interval(&mut self, _r: &IntervalRecord<'_>) -> Result<(), RunError> {
        Ok(())
    }
    /// Called after [`Observer::interval`] of interval `r.k` when the `n` intervals
    /// `r.k + 1 ..= r.k + n` are identical to it (same load, solution, state and
    /// decision, no operation) and were added as one block. Only when
    /// [`Observer::wants_every_interval`] is false.
    fn block(&mut self, _r: &IntervalRecord<'_>, _n: u64) -> Result<(), RunError> {
        Ok(())
    }
    /// Called every few thousand intervals with the number done and the total.
    fn progress(&mut self, _done: u64, _total: u64) {}
}

/// An observer that ignores everything.
#[derive(Debug, Default, Clone, Copy)]
pub struct Quiet;
impl Observer for Quiet {
    fn wants_every_interval(&self) -> bool {
        false
    }
}

/// A borrowed observer observes as its owner does.
impl<O: Observer + ?Sized> Observer for &mut O {
    fn wants_every_interval(&self) -> bool {
        (**self).wants_every_interval()
    }
    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        (**self).interval(r)
    }
    fn block(&mut self, r: &IntervalRecord<'_>, n: u64) -> Result<(), RunError> {
        (**self).block(r, n)
    }
    fn progress(&mut self, done: u64, total: u64) {
        (**self).progress(done, total)
    }
}

/// Two observers as one: each sees everything, in order; the engine adds blocks only
/// when neither needs every interval.
#[derive(Debug)]
pub struct Both<A, B>(pub A, pub B);

impl<A: Observer, B: Observer> Observer for Both<A, B> {
    fn wants_every_interval(&self) -> bool {
        self.0.wants_every_interval() || self.1.wants_every_interval()
    }
    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        self.0.interval(r)?;
        self.1.interval(r)
    }
    fn block(&mut self, r: &IntervalRecord<'_>, n: u64) -> Result<(), RunError> {
        self.0.block(r, n)?;
        self.1.block(r, n)
    }
    fn progress(&mut self, done: u64, total: u64) {
        self.0.progress(done, total);
        self.1.progress(done, total);
    }
}

/// The result of one run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunResult {
    /// Metrics of the run.
    #[serde(flatten)]
    pub metrics: RunMetrics,
    /// Intervals where the bus voltage had no solution (load beyond what the supply can
    /// carry), each counted once; nonzero values deserve a look.
    pub nonconverged_intervals: u64,
}

/// How often observers hear about progress, intervals.
pub const PROGRESS_EVERY: u64 = 1 << 16;

/// Runs the settings `sc` over `source` on the time base `plan`, telling `observer`
/// about the intervals (all of them, or blocks of identical ones when it allows).
pub fn run<S: LoadSource + ?Sized, O: Observer + ?Sized>(
    sc: &Scenario,
    plan: &RunPlan,
    source: &mut S,
    observer: &mut O,
) -> Result<RunResult, RunError> {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor has AVX2, checked just above.
            return unsafe { run_avx2(sc, plan, source, observer) };
        }
    }
    run_body(sc, plan, source, observer)
}

/// [`run`] compiled for AVX2: the same operations in the same order (AVX2 brings no
/// fused multiply-add, which would round differently), four lanes of the metrics at a
/// time.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn run_avx2<S: LoadSource + ?Sized, O: Observer + ?Sized>(
    sc: &Scenario,
    plan: &RunPlan,
    source: &mut S,
    observer: &mut O,
) -> Result<RunResult, RunError> {
    run_body(sc, plan, source, observer)
}

/// The body of [`run`].
#[inline(always)]
fn run_body<S: LoadSource + ?Sized, O: Observer + ?Sized>(
    sc: &Scenario,
    plan: &RunPlan,
    source: &mut S,
    observer: &mut O,
) -> Result<RunResult, RunError> {
    let u_n = sc.supply.nominal_voltage_v;
    let dt = plan.dt_s;
    let t0 = plan.t_first_s;
    let mut bank = Bank::new(sc.steps.clone(), u_n);
    let mut solver = BusSolver::new(&sc.supply);
    // The three phases solved together, when the scenario asks for it; its phasors land
    // in `coupled_v` beside the lanes.
    let mut coupled = match sc.bus {
        BusModel::Coupled(w) => Some(CoupledSolver::new(&sc.supply, w)),
        BusModel::PerPhase => None,
    };
    let mut coupled_v = Box::new([[Complex64::default(); LANE]; 3]);
    let mut ctl = Control::new(sc.controller, &bank, dt, t0);
    let params = MetricParams {
        target: sc.controller.target,
        overcorrection_threshold_kvar: sc.overcorrection_threshold_kvar,
        overcorrection_min_s: sc.overcorrection_min_s,
        hunting_window_s: sc.hunting_window_s,
        billing_starts: plan.billing_starts.clone(),
    };
    let mut met = crate::metrics::Metrics::new(params, &bank, plan.calendar, u_n, dt, t0);
    let want_unbalance = sc.unbalance;
    if want_unbalance {
        met = met.with_unbalance(plan.duration_s());
    }
    // The distortion protection needs the THD of each state the run reaches.
    let hm = sc.harmonic_model();
    let thd_wanted = sc.controller.protection.thd_limit_pct.is_some();
    let mut thd_cache: HashMap<BankState, f64> =
        HashMap::with_capacity(if thd_wanted { 4096 } else { 0 });
    let mut thd_of = |mask: BankState| -> f64 {
        if !thd_wanted {
            return 0.0;
        }
        *thd_cache.entry(mask).or_insert_with(|| hm.thd_pct(mask))
    };

    set_bank(&mut solver, &mut coupled, &bank.susceptance(ctl.mask()));
    let mut b_fixed = bank.susceptance(bank.fixed_mask).per_phase().1;
    let mut thd = thd_of(ctl.mask());
    let want_current = sc.controller.protection.min_current_a.is_some();
    let has_fixed = !bank.fixed_mask.is_empty();
    let measurement = sc.controller.measurement;
    // The measuring inputs: read straight from each phase's P and Q when wired as assumed
    // with line-to-neutral voltages (the usual case, and the only one before per-phase
    // control), else through the bus phasors.
    let wiring = sc.controller.wiring();
    let direct = wiring.is_direct();
    let per_phase = sc.controller.per_phase;
    let n = plan.intervals;
    let blocks = plan.stepping == Stepping::Events && !observer.wants_every_interval();
    // Samples taken ahead from the source: `samples[i]` is interval `buf_k + i`, for
    // i < `buf_len`; `pending` is an error that ended the filling, reported when the
    // intervals before it are done.
    let mut samples = vec![LoadSample::default(); CHUNK];
    let (mut buf_k, mut buf_len) = (0u64, 0usize);
    let mut pending: Option<crate::error::ProfileError> = None;
    // Bus solutions of samples `sol_base ..< sol_base + sol_len`, with the bank as it
    // stands (cut back to the interval in hand when the bank changes).
    let mut lanes = Box::<Lanes>::default();
    let (mut sol_base, mut sol_len) = (0usize, 0usize);
    // With blocks: the interval before which the latest sample holds, by the source's
    // promise (0 once the bank has changed, so that the bus is solved again).
    let mut same_until = 0;
    // The first interval at which a fault starts.
    let mut k_fault = fault_interval(&bank, dt);
    let mut unsolved_n = 0u64;
    observer.progress(0, n);
    let mut k = 0;
    // k as a float, counted along (exact below 2^53, as every interval index is), so that
    // the times are those of `t0 + k as f64 * dt` without converting k each interval.
    let mut kf = 0.0f64;
    // The usual kind of run: the controller reads the supply's own P and Q (three-phase
    // or one phase), and nothing needs the phasors or the current. Its intervals inside a
    // solved lane take the short loop below.
    // Steps between two lines move active power from one phase to the other, which the
    // short loop does not add to the phases' P; such banks take the long path.
    let line_steps = bank
        .steps
        .iter()
        .any(|s| matches!(s.phase, crate::bank::StepPhase::Line(_)));
    let usual = direct
        && !per_phase
        && !want_unbalance
        && !want_current
        && coupled.is_none()
        && !line_steps;
    while k < n {
        // The short loop: the intervals of the lane in hand up to the first operation,
        // before the next fault, the end of the run, and (with blocks) the last sample of
        // the chunk, whose promise the long path asks for. Each interval takes its
        // sample, solution, decision and record in the same order as the long path.
        if usual && k >= same_until && k >= buf_k && k < k_fault {
            let i0 = (k - buf_k) as usize;
            // The lane in hand used up (or cut back by an operation) inside the chunk:
            // the next one is solved here, as the long path would solve it.
            if i0 == sol_base + sol_len && i0 < buf_len {
                (sol_base, sol_len) = solve_lane(
                    &solver,
                    &coupled,
                    &samples[..buf_len],
                    i0,
                    &mut lanes,
                    &mut coupled_v,
                );
            }
            let lane_end = (sol_base + sol_len).min(buf_len.saturating_sub(usize::from(blocks)));
            let i_end = lane_end
                .min((n - buf_k) as usize)
                .min(k_fault.saturating_sub(buf_k).min(usize::MAX as u64) as usize);
            if i0 >= sol_base && i0 < i_end {
                let mut i = i0;
                // The accumulators every interval adds to, held here (in registers) for
                // the stretch and put back after it.
                let mut running = met.running();
                while i < i_end {
                    let t = t0 + kf * dt;
                    let t_next = t0 + (kf + 1.0) * dt;
                    let j = i - sol_base;
                    let sample = &samples[i];
                    let unsolved = lanes.unsolved[j];
                    unsolved_n += unsolved;
                    let (p4, q4) = (lanes.p4[j], lanes.q4[j]);
                    let (p3, q3) = (p4[0], q4[0]);
                    let v_ll_max = lanes.v_ll_max[j];
                    let (p_raw, q_raw) = match measurement {
                        Measurement::ThreePhase => (p3, q3),
                        Measurement::SinglePhase(ph) => (3.0 * sample.p_kw[ph], 3.0 * q4[ph + 1]),
                    };
                    let mask = ctl.mask();
                    let d = ctl.decide_measured(p_raw, q_raw, v_ll_max, 0.0, thd, t_next);
                    let fixed_q = if has_fixed && met.overcorrected(p3, q3) {
                        fixed_output(&b_fixed, &lanes.w, j)
                    } else {
                        0.0
                    };
                    met.record_running(
                        &mut running,
                        &IntervalObs {
                            t_s: t,
                            p_kw: p4,
                            q_kvar: q4,
                            unbalance: None,
                            load_q_kvar: lanes.load_q[j],
                            load_p_kw: p3,
                            fixed_q_kvar: fixed_q,
                            v_ll_min: lanes.v_ll_min[j],
                            v_ll_max,
                            decision: &d,
                        },
                    );
                    observer.interval(&IntervalRecord {
                        k,
                        t_s: t,
                        load: sample,
                        phases: &lanes.phases(j, sample),
                        mask,
                        decision: &d,
                    })?;
                    if (k + 1) % PROGRESS_EVERY == 0 {
                        observer.progress(k + 1, n);
                    }
                    k += 1;
                    kf += 1.0;
                    i += 1;
                    if !d.closed.or(d.opened).is_empty() {
                        met.set_running(running);
                        met.record_ops(k - 1, &d, t_next);
                        set_bank(&mut solver, &mut coupled, &bank.susceptance(ctl.mask()));
                        thd = thd_of(ctl.mask());
                        same_until = 0;
                        // Solutions past this interval were made with the old bank.
                        sol_len = j + 1;
                        running = met.running();
                        break;
                    }
                }
                met.set_running(running);
                continue;
            }
        }
        let t = t0 + kf * dt;
        let t_next = t0 + (kf + 1.0) * dt;
        if k >= k_fault {
            if bank.advance_faults(k as f64 * dt) {
                set_bank(&mut solver, &mut coupled, &bank.susceptance(ctl.mask()));
                b_fixed = bank.susceptance(bank.fixed_mask).per_phase().1;
                same_until = 0;
                // Solutions from this interval on are stale.
                let i = k.wrapping_sub(buf_k) as usize;
                if k >= buf_k && i < buf_len {
                    sol_len = sol_len.min(i.saturating_sub(sol_base));
                }
            }
            k_fault = fault_interval(&bank, dt);
        }
        // The buffer entry of this interval's sample and solution.
        let i = if k < same_until {
            // The same sample on the same bank: the same solution, still in the lanes.
            buf_len - 1
        } else {
            if k >= buf_k + buf_len as u64 {
                if let Some(e) = pending.take() {
                    return Err(e.into());
                }
                let want = (CHUNK as u64).min(n - k) as usize;
                let (got, err) = source.fill_owned(k, t0, dt, &mut samples, want, blocks);
                pending = err;
                if got == 0 {
                    return Err(pending.take().map_or_else(
                        || RunError::Config("the load source gave no sample".into()),
                        RunError::from,
                    ));
                }
                (buf_k, buf_len) = (k, got);
                (sol_base, sol_len) = (0, 0);
            }
            let i = (k - buf_k) as usize;
            if i >= sol_base + sol_len || i < sol_base {
                (sol_base, sol_len) = solve_lane(
                    &solver,
                    &coupled,
                    &samples[..buf_len],
                    i,
                    &mut lanes,
                    &mut coupled_v,
                );
            }
            if blocks && i + 1 == buf_len {
                same_until = source.unchanged_until(k);
            }
            i
        };
        let j = i - sol_base;
        let sample = &samples[i];
        let unsolved = lanes.unsolved[j];
        unsolved_n += unsolved;
        // Each phase's P at the metering point: the load's, plus what steps between two
        // lines take from one phase and give to the other (zero without such steps; the
        // three-phase P is the load's, the steps being lossless).
        let (p4, q4) = (lanes.p4[j], lanes.q4[j]);
        let (p3, q3) = (p4[0], q4[0]);
        let p_ph = [p4[1], p4[2], p4[3]];
        let v_ll_min = lanes.v_ll_min[j];
        let v_ll_max = lanes.v_ll_max[j];
        let current_a = if want_current {
            let mut i2_max: f64 = 0.0;
            for (ph, p) in p_ph.iter().enumerate() {
                let v = lanes.w[ph][j].sqrt();
                let qs = sample.q_kvar[ph] - lanes.q_bank[ph][j];
                let i2 = (p * p + qs * qs) / (v * v).max(1e-18);
                if i2 > i2_max {
                    i2_max = i2;
                }
            }
            i2_max.sqrt() * 1e3
        } else {
            0.0
        };
        let q_ph = [q4[1], q4[2], q4[3]];
        // The bus phasors, when the measurement or the unbalance needs them.
        let phasors = (want_unbalance || !direct).then(|| -> [Complex64; 3] {
            std::array::from_fn(|ph| {
                if coupled.is_some() {
                    coupled_v[ph][j]
                } else {
                    solver.phasor_w(ph, lanes.w[ph][j], sample.p_kw[ph], sample.q_kvar[ph])
                }
            })
        });
        let unbalance = match (&phasors, want_unbalance) {
            (Some(v), true) => Some(unbalance_of(v, &p_ph, &q_ph)),
            _ => None,
        };
        let mask = ctl.mask();
        let d = if direct && !per_phase {
            let (p_raw, q_raw) = match measurement {
                Measurement::ThreePhase => (p3, q3),
                Measurement::SinglePhase(ph) => (
                    3.0 * p_ph[ph],
                    3.0 * (sample.q_kvar[ph] - lanes.q_bank[ph][j]),
                ),
            };
            ctl.decide_measured(p_raw, q_raw, v_ll_max, current_a, thd, t_next)
        } else {
            let (p_ch, q_ch) = if direct {
                (p_ph, q_ph)
            } else {
                let v = phasors.unwrap_or_default();
                let s_ph: [Complex64; 3] =
                    std::array::from_fn(|ph| Complex64::new(p_ph[ph], q_ph[ph]));
                let m = wiring.measure(&v, &s_ph);
                (m.map(|c| c.re), m.map(|c| c.im))
            };
            if per_phase {
                ctl.decide_phases(&p_ch, &q_ch, v_ll_max, current_a, thd, t_next)
            } else if wiring.n == 1 {
                ctl.decide_measured(
                    3.0 * p_ch[0],
                    3.0 * q_ch[0],
                    v_ll_max,
                    current_a,
                    thd,
                    t_next,
                )
            } else {
                let (p_raw, q_raw) = (p_ch[0] + p_ch[1] + p_ch[2], q_ch[0] + q_ch[1] + q_ch[2]);
                ctl.decide_measured(p_raw, q_raw, v_ll_max, current_a, thd, t_next)
            }
        };
        // The fixed steps' output matters only to the cause of an overcorrected interval.
        let fixed_q = if has_fixed && met.overcorrected(p3, q3) {
            fixed_output(&b_fixed, &lanes.w, j)
        } else {
            0.0
        };
        // What the metrics and the observer see of the interval (built again for a block,
        // so that nothing is kept alive across the common path).
        let obs = || IntervalObs {
            t_s: t,
            p_kw: p4,
            q_kvar: q4,
            unbalance,
            load_q_kvar: lanes.load_q[j],
            load_p_kw: p3,
            fixed_q_kvar: fixed_q,
            v_ll_min,
            v_ll_max,
            decision: &d,
        };
        let k_now = k;
        let record = |phases| IntervalRecord {
            k: k_now,
            t_s: t,
            load: sample,
            phases,
            mask,
            decision: &d,
        };
        met.record(&obs());
        let phases = lanes.phases(j, sample);
        observer.interval(&record(&phases))?;
        if (k + 1) % PROGRESS_EVERY == 0 {
            observer.progress(k + 1, n);
        }
        let operated = !d.closed.or(d.opened).is_empty();
        if operated {
            met.record_ops(k, &d, t_next);
            set_bank(&mut solver, &mut coupled, &bank.susceptance(ctl.mask()));
            thd = thd_of(ctl.mask());
            same_until = 0;
            // Solutions past this interval were made with the old bank.
            sol_len = j + 1;
        }
        k += 1;
        kf += 1.0;
        if blocks && !operated && same_until > k {
            let end = block_end(k, n, same_until, t0, dt, &bank, &met, &ctl, t);
            if end > k {
                let m = end - k;
                met.record_block(&obs(), m);
                ctl.skip(m);
                unsolved_n += unsolved * m;
                observer.block(&record(&phases), m)?;
                k = end;
                kf = k as f64;
                if k % PROGRESS_EVERY == 0 {
                    observer.progress(k, n);
                }
            }
        }
    }
    solver.nonconverged += unsolved_n;
    observer.progress(n, n);
    let metrics = met.finish(&bank, ctl.steps());
    Ok(RunResult {
        metrics,
        nonconverged_intervals: solver.nonconverged,
    })
}

/// Solves the bus for the samples from `i` on (up to [`LANE`] of them) with the bank as
/// it stands, into `lanes` (and the coupled bus's phasors into `coupled_v`); returns the
/// lane's first entry and length.
#[inline(always)]
fn solve_lane(
    solver: &BusSolver,
    coupled: &Option<CoupledSolver>,
    samples: &[LoadSample],
    i: usize,
    lanes: &mut Lanes,
    coupled_v: &mut [[Complex64; LANE]; 3],
) -> (usize, usize) {
    let end = samples.len().min(i + LANE);
    match coupled {
        None => solver.solve_lanes(&samples[i..end], lanes),
        Some(c) => c.solve_lanes(&samples[i..end], lanes, coupled_v),
    }
    (i, end - i)
}

/// The unbalance of one interval: the bus voltage phasors `v` (V, line to neutral) and
/// the supply's P and Q per phase (kW, kvar) give the supply currents
/// I_x = conj(S_x/V_x) (kA), their sequence components and the IEEE Std 1459-2010
/// apparent powers of a four-wire system.
fn unbalance_of(v: &[Complex64; 3], p: &[f64; 3], q: &[f64; 3]) -> crate::metrics::UnbalanceObs {
    let i: [Complex64; 3] = std::array::from_fn(|x| (Complex64::new(p[x], q[x]) / v[x]).conj());
    let s = crate::unbalance::apparent_powers(*v, i, true);
    crate::metrics::UnbalanceObs {
        u2: crate::unbalance::unbalance(*v).unwrap_or(0.0),
        i2: crate::unbalance::unbalance(i).unwrap_or(0.0),
        p_kw: s.p,
        s_vector_kva: s.vector,
        s_arithmetic_kva: s.arithmetic,
        s_effective_kva: s.effective,
    }
}

/// The fixed steps' reactive output in lane entry `j`, kvar: susceptances `b_fixed` per
/// phase (S) at the squared bus voltages `w` (V²).
fn fixed_output(b_fixed: &[f64; 3], w: &[[f64; LANE]; 3], j: usize) -> f64 {
    let mut f = 0.0;
    for (b, w) in b_fixed.iter().zip(w) {
        let v = w[j].sqrt();
        f += b * v * v * 1e-3;
    }
    f
}

/// Sets the connected steps' susceptance on the bus solver in use.
fn set_bank(solver: &mut BusSolver, coupled: &mut Option<CoupledSolver>, b: &Shunt) {
    match coupled {
        Some(c) => c.set_bank(b),
        None => solver.set_bank(b),
    }
}

/// Samples taken from the source at a time.
const CHUNK: usize = 256;

/// The first interval k whose run time k·Δt reaches the next fault of `bank` (by the
/// comparison [`Bank::advance_faults`] makes), or `u64::MAX` when none is left.
fn fault_interval(bank: &Bank, dt: f64) -> u64 {
    let Some(f) = bank.next_fault_s() else {
        return u64::MAX;
    };
    let reached = |k: u64| f <= k as f64 * dt;
    let guess = (f / dt).ceil();
    if guess.is_nan() || guess >= 1e18 {
        return u64::MAX;
    }
    let mut k = if guess > 0.0 { guess as u64 } else { 0 };
    while k > 0 && reached(k - 1) {
        k -= 1;
    }
    while !reached(k) {
        k += 1;
    }
    k
}

/// The end (exclusive) of the block of intervals identical to interval `k − 1`, which was
/// just stepped on its own at `t_prev` and made no operation: `k` when there is none. The
/// sample holds until `same_until`. See the module documentation for what ends a block.
#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn block_end(
    k: u64,
    n: u64,
    same_until: u64,
    t0: f64,
    dt: f64,
    bank: &Bank,
    met: &Metrics,
    ctl: &Control,
    t_prev: f64,
) -> u64 {
    if same_until <= k {
        return k;
    }
    let quiet = ctl.quiet_after(t0 + k as f64 * dt);
    if quiet == 0 {
        return k;
    }
    let mut end = n
        .min(same_until)
        .min(k.saturating_add(quiet))
        .min((k / PROGRESS_EVERY + 1) * PROGRESS_EVERY);
    // The first interval whose start may lie within two intervals of `t_s` (profile time)
    // ends the block.
    let before = |t_s: f64| -> u64 {
        let j = ((t_s - t0) / dt).floor() - 2.0;
        if j <= 0.0 {
            0
        } else if j >= u64::MAX as f64 {
            u64::MAX
        } else {
            j as u64
        }
    };
    end = end.min(before(met.next_boundary_s(t_prev)));
    if let Some(f) = bank.next_fault_s() {
        // Faults start in run time (seconds from the first interval).
        end = end.min(before(t0 + f));
    }
    end.max(k)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::ProfileError;
    use crate::study::Study;
    use std::path::{Path, PathBuf};

    /// A steady load that fails at interval `fail_at`, counting the samples asked for.
    struct FailsAt {
        fail_at: u64,
        asked: u64,
    }

    impl LoadSource for FailsAt {
        fn sample(&mut self, k: u64, _t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
            self.asked += 1;
            if k == self.fail_at {
                return Err(ProfileError::Row {
                    file: PathBuf::from("steady.csv"),
                    line: k + 2,
                    message: "made to fail".into(),
                });
            }
            out.p_kw = [30.0; 3];
            out.q_kvar = [20.0; 3];
            Ok(())
        }
    }

    /// Counts the intervals it hears of, one by one.
    #[derive(Default)]
    struct Count(u64);

    impl Observer for Count {
        fn interval(&mut self, _r: &IntervalRecord<'_>) -> Result<(), RunError> {
            self.0 += 1;
            Ok(())
        }
    }

    // Samples are taken from the source in chunks, but an error still comes after every
    // interval before it, as stepping one sample at a time has it: a failure at interval
    // j leaves the observer with exactly j intervals, and no sample past j is asked for.
    // Cases inside the first chunk, on a chunk boundary and past it.
    #[test]
    fn a_source_error_comes_after_the_intervals_before_it() {
        let sc = Scenario::from_str(
            "[[steps]]\nkvar = 25\ncount = 2\n[run]\nduration_days = 1\ntime_step_s = 1\n\
             [load.synthetic]\n",
            Path::new("t.toml"),
        )
        .expect("scenario");
        let study = Study::prepare(sc).expect("study");
        for fail_at in [0, 1, 100, CHUNK as u64 - 1, CHUNK as u64, 300, 1000] {
            let mut src = FailsAt { fail_at, asked: 0 };
            let mut seen = Count::default();
            let r = study.run_on(&mut src, &mut seen);
            match r {
                Err(RunError::Profile(ProfileError::Row { line, .. })) => {
                    assert_eq!(line, fail_at + 2)
                }
                other => panic!("fail at {fail_at}: {other:?}"),
            }
            assert_eq!(seen.0, fail_at, "intervals seen before the error");
            assert_eq!(src.asked, fail_at + 1, "samples asked for");
        }
    }
}

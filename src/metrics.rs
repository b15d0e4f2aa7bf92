//! Run metrics: everything a run reports, accumulated interval by interval without
//! allocating, then finished into a [`RunMetrics`] value that the report writers turn
//! into text or JSON. The three-phase supply's and each phase's registers and shares are
//! kept side by side in four lanes, each summed in interval order; episodes and billing
//! windows are kept out of line, for the intervals that need them.
//!
//! Definitions: energy PF = E_P / sqrt(E_P² + E_Q,ind²) over the import register (the
//! billed figure, see [`BilledPf`]), with tan φ and the capacitive figures beside it; four
//! separate energy registers; shares of run time under target and leading; overcorrection
//! episodes as maximal runs of intervals more leading than allowed by a strict threshold
//! (past zero for a lagging or unity target, past the target for a leading one); one
//! hunting cycle per pair of consecutive operations of one step no further apart than the
//! hunting window; time in each bank state, in all and at most within one calendar day.

use crate::bank::{Bank, BankState};
use crate::controller::{Decision, StepState};
use crate::pf::{BilledPf, PfTarget, Quadrant};
use crate::timebase::{Calendar, DAY_S, YEAR_S};
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::hash::{BuildHasherDefault, Hasher};

/// Settings of the metrics.
#[derive(Debug, Clone, PartialEq)]
pub struct MetricParams {
    /// Target PF, for the share of time under target.
    pub target: PfTarget,
    /// How far past the allowed point the supply must lead to count as overcorrected, kvar
    /// (strict). For a lagging or unity target the interval is overcorrected when
    /// −Q > threshold; for a leading target when Q < |P|·tan φ_t − threshold (more leading
    /// than the target by more than the threshold; tan φ_t < 0). Default: the smallest
    /// switched step.
    pub overcorrection_threshold_kvar: f64,
    /// Shortest run of overcorrected intervals that counts as an episode, s. Default 60 s.
    pub overcorrection_min_s: f64,
    /// Two consecutive operations of one step at most this far apart make a hunting cycle,
    /// s. Default 10 × the switching delay.
    pub hunting_window_s: f64,
    /// Run times at which a new billing window starts (after the first), ascending.
    pub billing_starts: Vec<f64>,
}

/// What the engine tells the metrics about one interval.
#[derive(Debug, Clone, Copy)]
pub struct IntervalObs<'a> {
    /// Start of the interval t_k, s.
    pub t_s: f64,
    /// Supply active power, kW: the three phases together (the phases added in the
    /// order a, b, c), then each phase a, b, c.
    pub p_kw: [f64; 4],
    /// Supply reactive power, kvar, in the order of `p_kw`.
    pub q_kvar: [f64; 4],
    /// Unbalance of the interval, when the run measures it (`report.unbalance`).
    pub unbalance: Option<UnbalanceObs>,
    /// Three-phase load reactive power, kvar.
    pub load_q_kvar: f64,
    /// Three-phase load active power, kW.
    pub load_p_kw: f64,
    /// Reactive power delivered by the fixed steps, kvar.
    pub fixed_q_kvar: f64,
    /// Lowest and highest line-to-line-equivalent bus voltage over the phases, V.
    pub v_ll_min: f64,
    /// See `v_ll_min`.
    pub v_ll_max: f64,
    /// The controller's decision in this interval.
    pub decision: &'a Decision,
}

/// Unbalance of one interval at the metering point.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct UnbalanceObs {
    /// Voltage unbalance |V2|/|V1| of the bus, as a fraction.
    pub u2: f64,
    /// Current unbalance |I2|/|I1| of the supply currents, as a fraction.
    pub i2: f64,
    /// Active power, kW.
    pub p_kw: f64,
    /// IEEE Std 1459-2010 vector apparent power, kVA.
    pub s_vector_kva: f64,
    /// IEEE Std 1459-2010 arithmetic apparent power, kVA.
    pub s_arithmetic_kva: f64,
    /// IEEE Std 1459-2010 effective apparent power (four-wire), kVA.
    pub s_effective_kva: f64,
}

/// The voltage unbalance of one week of the run, as EN 50160 assesses it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnbalanceWeek {
    /// Start of the week, run time, s (the run's start plus whole weeks).
    pub start_s: f64,
    /// 10-minute values in the week.
    pub values: u64,
    /// 95th percentile of the 10-minute values, % (EN 50160: at most 2 % for 95 % of the
    /// 10-minute values of each week, from memory).
    pub u2_p95_pct: f64,
    /// Largest 10-minute value, %.
    pub u2_max_pct: f64,
}

/// Unbalance over the run (`report.unbalance`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnbalanceMetrics {
    /// Largest voltage unbalance of one interval, %.
    pub u2_max_pct: f64,
    /// Mean voltage unbalance over the intervals, %.
    pub u2_mean_pct: f64,
    /// Per week: the 10-minute values (rms of the intervals' u2 in each clock-aligned
    /// 10 minutes) and their 95th percentile.
    pub weeks: Vec<UnbalanceWeek>,
    /// Largest current unbalance |I2|/|I1| of one interval, %.
    pub i2_max_pct: f64,
    /// Mean current unbalance, %.
    pub i2_mean_pct: f64,
    /// Σ P·Δt, kWh (import minus export).
    pub kwh: f64,
    /// Σ S_vector·Δt, kVAh (IEEE Std 1459-2010 vector apparent power).
    pub kvah_vector: f64,
    /// Σ S_arithmetic·Δt, kVAh.
    pub kvah_arithmetic: f64,
    /// Σ S_effective·Δt, kVAh (four-wire definition).
    pub kvah_effective: f64,
    /// kWh / kVAh of each: vector, arithmetic and effective power factor over the run;
    /// 0 with no apparent energy.
    pub pf_vector: f64,
    /// See `pf_vector`.
    pub pf_arithmetic: f64,
    /// See `pf_vector`.
    pub pf_effective: f64,
}

/// Accumulates the unbalance of a run.
#[derive(Debug, Clone)]
struct UnbalanceAcc {
    n: u64,
    u2_max: f64,
    u2_sum: f64,
    i2_max: f64,
    i2_sum: f64,
    kwh: f64,
    kvah: [f64; 3],
    /// The clock-aligned 10-minute window in progress (epoch seconds / 600) and its sums.
    win: i64,
    win_sq: f64,
    win_n: u64,
    /// Closed 10-minute windows: (start, epoch s; rms u2).
    ten_min: Vec<(f64, f64)>,
}

/// Length of the aggregation window of IEC 61000-4-30 for EN 50160 assessments, s.
const TEN_MIN_S: f64 = 600.0;

impl UnbalanceAcc {
    fn new(intervals_hint: f64) -> Self {
        UnbalanceAcc {
            n: 0,
            u2_max: 0.0,
            u2_sum: 0.0,
            i2_max: 0.0,
            i2_sum: 0.0,
            kwh: 0.0,
            kvah: [0.0; 3],
            win: i64::MIN,
            win_sq: 0.0,
            win_n: 0,
            ten_min: Vec::with_capacity(intervals_hint.clamp(0.0, 1e7) as usize + 2),
        }
    }

    fn close_window(&mut self) {
        if self.win_n > 0 {
            let rms = (self.win_sq / self.win_n as f64).sqrt();
            self.ten_min.push((self.win as f64 * TEN_MIN_S, rms));
        }
        self.win_sq = 0.0;
        self.win_n = 0;
    }

    /// Adds `m` intervals of `u` starting at epoch `e` (all in one 10-minute window).
    fn add(&mut self, u: &UnbalanceObs, e: f64, m: u64, h: f64) {
        let w = (e / TEN_MIN_S).floor() as i64;
        if w != self.win {
            self.close_window();
            self.win = w;
        }
        let mf = m as f64;
        self.n += m;
        self.u2_max = self.u2_max.max(u.u2);
        self.i2_max = self.i2_max.max(u.i2);
        self.u2_sum += u.u2 * mf;
        self.i2_sum += u.i2 * mf;
        self.win_sq += u.u2 * u.u2 * mf;
        self.win_n += m;
        self.kwh += u.p_kw * h;
        self.kvah[0] += u.s_vector_kva * h;
        self.kvah[1] += u.s_arithmetic_kva * h;
        self.kvah[2] += u.s_effective_kva * h;
    }

    fn finish(mut self, run_start_epoch: f64, t_first: f64) -> UnbalanceMetrics {
        self.close_window();
        let week = 7.0 * DAY_S;
        let mut weeks: Vec<UnbalanceWeek> = Vec::new();
        let mut values: Vec<f64> = Vec::new();
        let mut current = i64::MIN;
        let flush = |idx: i64, values: &mut Vec<f64>, weeks: &mut Vec<UnbalanceWeek>| {
            if values.is_empty() {
                return;
            }
            values.sort_by(f64::total_cmp);
            let n = values.len();
            // The smallest value with at least 95 % of the values at or below it.
            let rank = ((0.95 * n as f64).ceil() as usize).clamp(1, n);
            weeks.push(UnbalanceWeek {
                start_s: t_first + idx as f64 * week,
                values: n as u64,
                u2_p95_pct: values[rank - 1] * 100.0,
                u2_max_pct: values[n - 1] * 100.0,
            });
            values.clear();
        };
        for &(start, v) in &self.ten_min {
            let idx = ((start - run_start_epoch) / week).floor().max(0.0) as i64;
            if idx != current {
                flush(current, &mut values, &mut weeks);
                current = idx;
            }
            values.push(v);
        }
        flush(current, &mut values, &mut weeks);
        let n = self.n.max(1) as f64;
        let pf = |s: f64| if s > 0.0 { self.kwh / s } else { 0.0 };
        UnbalanceMetrics {
            u2_max_pct: self.u2_max * 100.0,
            u2_mean_pct: self.u2_sum / n * 100.0,
            weeks,
            i2_max_pct: self.i2_max * 100.0,
            i2_mean_pct: self.i2_sum / n * 100.0,
            kwh: self.kwh,
            kvah_vector: self.kvah[0],
            kvah_arithmetic: self.kvah[1],
            kvah_effective: self.kvah[2],
            pf_vector: pf(self.kvah[0]),
            pf_arithmetic: pf(self.kvah[1]),
            pf_effective: pf(self.kvah[2]),
        }
    }
}

/// What dominated an overcorrection episode.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum OvercorrectionCause {
    /// The site was exporting active power.
    Export,
    /// The fixed steps alone overcorrect the light load.
    FixedSteps,
    /// The controller wanted to open a step but could not yet (delay, operation cap).
    StepNotOpened,
    /// The controller saw no need to open (dead band, averaging or single-phase
    /// measurement hid the leading power).
    NotSeenByController,
}

impl OvercorrectionCause {
    /// The snake_case name used as a key in reports.
    pub fn name(self) -> &'static str {
        match self {
            OvercorrectionCause::Export => "export",
            OvercorrectionCause::FixedSteps => "fixed_steps",
            OvercorrectionCause::StepNotOpened => "step_not_opened",
            OvercorrectionCause::NotSeenByController => "not_seen_by_controller",
        }
    }
}

const CAUSES: [OvercorrectionCause; 4] = [
    OvercorrectionCause::Export,
    OvercorrectionCause::FixedSteps,
    OvercorrectionCause::StepNotOpened,
    OvercorrectionCause::NotSeenByController,
];

/// Energy and PF over one billing window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BillingWindow {
    /// Window start, run time, s.
    pub start_s: f64,
    /// Window end, run time, s.
    pub end_s: f64,
    /// Energy PF of the window, E_P / sqrt(E_P² + E_Q,ind²) (the billed figure).
    pub energy_pf: f64,
    /// `lag` whenever the inductive register is non-zero; `lead` only when it is zero and
    /// the capacitive register is not.
    pub energy_pf_quadrant: Quadrant,
    /// tan φ = E_Q,ind / E_P, as tariffs state it; `None` (null) when E_P = 0.
    pub tan_phi: Option<f64>,
    /// E_Q,cap / E_P; `None` (null) when E_P = 0.
    pub tan_phi_capacitive: Option<f64>,
    /// E_P / sqrt(E_P² + E_Q,cap²), a leading PF, 0..1.
    pub capacitive_pf: f64,
    /// Active energy imported, kWh.
    pub kwh_import: f64,
    /// Active energy exported, kWh.
    pub kwh_export: f64,
    /// Inductive reactive energy, kvarh.
    pub kvarh_inductive: f64,
    /// Capacitive reactive energy, kvarh.
    pub kvarh_capacitive: f64,
}

/// What was simulated.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunInfo {
    /// Number of intervals simulated.
    pub samples: u64,
    /// Simulated duration, s.
    pub duration_s: f64,
    /// Time step Δt, s.
    pub time_step_s: f64,
    /// Start of the first interval in the profile's time base, s.
    pub t_first_s: f64,
}

/// PF and energy registers.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PfMetrics {
    /// Energy PF over the run, E_P / sqrt(E_P² + E_Q,ind²) (the billed figure), 0..1.
    pub energy_pf: f64,
    /// `lag` whenever the inductive register is non-zero; `lead` only when it is zero and
    /// the capacitive register is not.
    pub energy_pf_quadrant: Quadrant,
    /// tan φ = E_Q,ind / E_P over the run, as tariffs state it; `None` (null) when E_P = 0.
    pub tan_phi: Option<f64>,
    /// E_Q,cap / E_P over the run; `None` (null) when E_P = 0.
    pub tan_phi_capacitive: Option<f64>,
    /// E_P / sqrt(E_P² + E_Q,cap²) over the run, a leading PF, 0..1.
    pub capacitive_pf: f64,
    /// Active energy imported, kWh.
    pub kwh_import: f64,
    /// Active energy exported, kWh.
    pub kwh_export: f64,
    /// Inductive reactive energy, kvarh (≥ 0).
    pub kvarh_inductive: f64,
    /// Capacitive reactive energy, kvarh (≥ 0).
    pub kvarh_capacitive: f64,
    /// Share of run time with P > 0 and the supply less corrected than the target.
    pub share_under_target: f64,
    /// Share of run time with Q < 0.
    pub share_leading: f64,
    /// The target as written, e.g. `0.95 lag`.
    pub target: String,
    /// Per billing window.
    pub billing: Vec<BillingWindow>,
}

/// Switching counts of one step.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StepSwitching {
    /// Step number (from 1).
    pub step: usize,
    /// Closings plus openings.
    pub operations: u64,
    /// Closings.
    pub closings: u64,
    /// Openings.
    pub openings: u64,
    /// Hunting cycles of this step.
    pub hunting_cycles: u64,
}

/// Protection trips by kind.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct TripCounts {
    /// Overvoltage trips (one step each).
    pub overvoltage: u64,
    /// Loss-of-current trips.
    pub loss_of_current: u64,
    /// Export trips.
    pub export: u64,
    /// Distortion trips.
    pub distortion: u64,
}

/// Switching.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SwitchingMetrics {
    /// Closings plus openings, all steps.
    pub total_operations: u64,
    /// Operations per day of run time.
    pub per_day: f64,
    /// Operations extrapolated to a 365-day year.
    pub per_year: f64,
    /// Hunting cycles, all steps.
    pub hunting_cycles: u64,
    /// Hunting window used, s.
    pub hunting_window_s: f64,
    /// One entry per switched step.
    pub per_step: Vec<StepSwitching>,
    /// Protection trips.
    pub trips: TripCounts,
}

/// Overcorrection episodes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OvercorrectionMetrics {
    /// Number of episodes.
    pub episodes: u64,
    /// Total time in episodes, s.
    pub total_s: f64,
    /// Longest episode, s.
    pub longest_s: f64,
    /// Largest leading |Q| in an episode, kvar.
    pub worst_leading_kvar: f64,
    /// Threshold used, kvar.
    pub threshold_kvar: f64,
    /// Minimum duration used, s.
    pub min_duration_s: f64,
    /// The cause with the most episode time, if any episode.
    pub dominant_cause: Option<OvercorrectionCause>,
    /// Episode time per cause, s.
    pub cause_s: BTreeMap<String, f64>,
    /// Episode time per weekday, Monday first, s.
    pub by_weekday_s: [f64; 7],
}

/// One bank state reached.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StateTime {
    /// Connected steps (numbers), fixed ones included.
    pub steps: Vec<usize>,
    /// The connected steps (serialized as its bits: bit i for step i + 1).
    pub mask: BankState,
    /// Time in the state, s.
    pub time_s: f64,
    /// Largest time spent in the state within any one calendar day (midnight to midnight
    /// of the run's calendar), s. For judging limits stated per 24 h, such as the
    /// capacitor overvoltage allowance of IEC 60831-1 (1.10 × U_N for 8 h in every 24 h).
    pub max_day_s: f64,
}

/// Wear of one step.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StepWear {
    /// Step number.
    pub step: usize,
    /// Fixed step (never switched by the controller).
    pub fixed: bool,
    /// Operations in the run.
    pub operations: u64,
    /// Operations extrapolated to a 365-day year.
    pub operations_per_year: f64,
    /// Rated electrical life of the contactor, operations.
    pub rated_operations: f64,
    /// Years until the rated life is reached at this rate; `None` when it never operates.
    pub years_to_rated_life: Option<f64>,
    /// Hours connected (energized) in the run.
    pub energized_h: f64,
}

/// Bus voltage over the run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VoltageMetrics {
    /// Lowest line-to-line-equivalent bus voltage, V.
    pub min_v: f64,
    /// Highest line-to-line-equivalent bus voltage, V.
    pub max_v: f64,
    /// Time with the bus above 110 % of U_n, s.
    pub above_110pct_s: f64,
}

/// Extremes of the load itself (before correction).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LoadMetrics {
    /// Largest three-phase load reactive power, kvar.
    pub max_q_kvar: f64,
    /// Largest three-phase load active power, kW.
    pub max_p_kw: f64,
    /// Smallest three-phase load active power, kW.
    pub min_p_kw: f64,
}

/// Overcorrection of one phase: maximal runs of intervals in which the phase leads by
/// more than its share of the threshold (one third of the three-phase threshold), judged
/// as the three-phase episodes are (same minimum duration; past zero for a lagging or
/// unity target, past the target for a leading one).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PhaseOvercorrection {
    /// Number of episodes.
    pub episodes: u64,
    /// Total time in episodes, s.
    pub total_s: f64,
    /// Longest episode, s.
    pub longest_s: f64,
    /// Largest leading |Q| of the phase in an episode, kvar.
    pub worst_leading_kvar: f64,
    /// The phase's threshold, kvar: one third of the three-phase threshold.
    pub threshold_kvar: f64,
}

/// What one phase of the supply did over the run: its own registers, billed PF, shares
/// and overcorrection. The three-phase figures are not the sum of these: a phase can
/// lead while the sum lags.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PhaseMetrics {
    /// The phase: `a`, `b` or `c`.
    pub phase: &'static str,
    /// Energy PF of the phase, E_P / sqrt(E_P² + E_Q,ind²) over its own registers, 0..1.
    pub energy_pf: f64,
    /// `lag` whenever the phase's inductive register is non-zero, else `lead` if its
    /// capacitive one is not.
    pub energy_pf_quadrant: Quadrant,
    /// tan φ = E_Q,ind / E_P of the phase; `None` (null) when E_P = 0.
    pub tan_phi: Option<f64>,
    /// E_Q,cap / E_P of the phase; `None` (null) when E_P = 0.
    pub tan_phi_capacitive: Option<f64>,
    /// Active energy imported on the phase, kWh.
    pub kwh_import: f64,
    /// Active energy exported on the phase, kWh.
    pub kwh_export: f64,
    /// Inductive reactive energy of the phase, kvarh.
    pub kvarh_inductive: f64,
    /// Capacitive reactive energy of the phase, kvarh.
    pub kvarh_capacitive: f64,
    /// Share of run time with the phase's P > 0 and Q > P·tan φ_t.
    pub share_under_target: f64,
    /// Share of run time with the phase's Q < 0.
    pub share_leading: f64,
    /// Overcorrection episodes of the phase.
    pub overcorrection: PhaseOvercorrection,
}

/// Everything a run measured (the resonance section is added by the engine).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunMetrics {
    /// What was simulated.
    pub run: RunInfo,
    /// PF and energy.
    pub pf: PfMetrics,
    /// Switching.
    pub switching: SwitchingMetrics,
    /// Overcorrection.
    pub overcorrection: OvercorrectionMetrics,
    /// Bank states reached and time in each.
    pub states: Vec<StateTime>,
    /// Wear per step.
    pub wear: Vec<StepWear>,
    /// Bus voltage.
    pub voltage: VoltageMetrics,
    /// Load extremes.
    pub load: LoadMetrics,
    /// Per phase a, b, c: registers, billed PF, shares and overcorrection.
    pub phases: Vec<PhaseMetrics>,
    /// Unbalance, when the run measures it (`report.unbalance`).
    pub unbalance: Option<UnbalanceMetrics>,
}

#[derive(Debug, Clone, Copy, Default)]
struct Registers {
    kwh_import: f64,
    kwh_export: f64,
    kvarh_ind: f64,
    kvarh_cap: f64,
}

impl Registers {
    fn billed(&self) -> BilledPf {
        BilledPf::from_registers(self.kwh_import, self.kvarh_ind, self.kvarh_cap)
    }
}

/// The supply's four energy registers in four lanes side by side: lane 0 the three-phase
/// supply (the billing window in progress), lanes 1 to 3 phases a, b, c (the whole run).
/// Each lane is a plain sum in interval order, as separate registers would be, so the
/// lanes only let the compiler add them together.
#[derive(Debug, Clone, Copy, Default)]
struct Lanes4 {
    kwh_import: [f64; 4],
    kwh_export: [f64; 4],
    kvarh_ind: [f64; 4],
    kvarh_cap: [f64; 4],
}

impl Lanes4 {
    /// Adds P·h and Q·h of each lane to the register of its sign, without branches: the
    /// register a sign does not belong to adds zero, which leaves it as it is (registers
    /// are never −0). A product that underflows to zero adds zero either way.
    #[inline(always)]
    fn add(&mut self, p: &[f64; 4], q: &[f64; 4], h: f64) {
        for i in 0..4 {
            let (ph, qh) = (p[i] * h, q[i] * h);
            self.kwh_import[i] += if p[i] > 0.0 { ph } else { 0.0 };
            self.kwh_export[i] -= if p[i] < 0.0 { ph } else { 0.0 };
            self.kvarh_ind[i] += if q[i] > 0.0 { qh } else { 0.0 };
            self.kvarh_cap[i] -= if q[i] < 0.0 { qh } else { 0.0 };
        }
    }

    /// The registers of lane `i`.
    fn lane(&self, i: usize) -> Registers {
        Registers {
            kwh_import: self.kwh_import[i],
            kwh_export: self.kwh_export[i],
            kvarh_ind: self.kvarh_ind[i],
            kvarh_cap: self.kvarh_cap[i],
        }
    }

    /// Sets lane `i` back to zero.
    fn clear(&mut self, i: usize) {
        self.kwh_import[i] = 0.0;
        self.kwh_export[i] = 0.0;
        self.kvarh_ind[i] = 0.0;
        self.kvarh_cap[i] = 0.0;
    }
}

/// `x` when it is below `m`, else `m` (a NaN `x` leaves `m`). On x86-64 one SSE2
/// `minsd`, which is this very select: written as plain Rust, the compiler stores the
/// running extreme only when it changes (a masked store), and the next interval's load
/// of it must then wait for that store to reach the cache, a stall of some twenty cycles
/// on every interval.
#[inline(always)]
fn lower(x: f64, m: f64) -> f64 {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_cvtsd_f64, _mm_min_sd, _mm_set_sd};
        // SAFETY: SSE2 is in every x86-64 processor; `minsd x, m` gives x < m ? x : m.
        unsafe { _mm_cvtsd_f64(_mm_min_sd(_mm_set_sd(x), _mm_set_sd(m))) }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        if x < m {
            x
        } else {
            m
        }
    }
}

/// `x` when it is above `m`, else `m` (a NaN `x` leaves `m`); one SSE2 `maxsd` on
/// x86-64, for the reason given at [`lower`].
#[inline(always)]
fn higher(x: f64, m: f64) -> f64 {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_cvtsd_f64, _mm_max_sd, _mm_set_sd};
        // SAFETY: SSE2 is in every x86-64 processor; `maxsd x, m` gives x > m ? x : m.
        unsafe { _mm_cvtsd_f64(_mm_max_sd(_mm_set_sd(x), _mm_set_sd(m))) }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        if x > m {
            x
        } else {
            m
        }
    }
}

/// The lanes `i` with `a[i] < b[i]`, as bits (bit i for lane i; false for a NaN, as `<`
/// is). On x86-64 two SSE2 comparisons and their sign masks (SSE2 is part of every
/// x86-64 processor), where the compiler would otherwise test the lanes one by one.
#[inline(always)]
fn lanes_below(a: &[f64; 4], b: &[f64; 4]) -> u32 {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_cmplt_pd, _mm_loadu_pd, _mm_movemask_pd};
        // SAFETY: SSE2 is in every x86-64 processor, and each load reads two f64 of
        // a four-element array, at offsets 0 and 2.
        unsafe {
            let lo = _mm_cmplt_pd(_mm_loadu_pd(a.as_ptr()), _mm_loadu_pd(b.as_ptr()));
            let hi = _mm_cmplt_pd(
                _mm_loadu_pd(a.as_ptr().add(2)),
                _mm_loadu_pd(b.as_ptr().add(2)),
            );
            (_mm_movemask_pd(lo) | (_mm_movemask_pd(hi) << 2)) as u32
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        let mut bits = 0;
        for i in 0..4 {
            bits |= u32::from(a[i] < b[i]) << i;
        }
        bits
    }
}

/// Hashes a bank state (a small bit set, never chosen by an adversary) with one
/// multiplication per word, where the standard hasher takes a hundred instructions at
/// every operation. The states reported are sorted, so the hasher changes no output.
#[derive(Debug, Default, Clone, Copy)]
struct StateHasher(u64);

impl Hasher for StateHasher {
    fn finish(&self) -> u64 {
        self.0
    }

    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_u64(u64::from(b));
        }
    }

    fn write_u64(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(5) ^ x).wrapping_mul(0x517C_C1B7_2722_0A95);
    }
}

/// Time in one bank state: in all, and per calendar day.
#[derive(Debug, Clone, Copy)]
struct StateAcc {
    /// Intervals in the state.
    n: u64,
    /// Calendar day (days since the epoch) of the latest time in the state.
    day: i64,
    /// Time in the state on that day, s.
    day_s: f64,
    /// Largest time in the state on any earlier day, s.
    max_day_s: f64,
}

impl StateAcc {
    const NEW: StateAcc = StateAcc {
        n: 0,
        day: i64::MIN,
        day_s: 0.0,
        max_day_s: 0.0,
    };

    /// Adds the stretch of epoch time [e0, e1), split at midnights, holding `n` intervals.
    fn add(&mut self, n: u64, e0: f64, e1: f64) {
        self.n += n;
        let mut a = e0;
        while a < e1 {
            let day = (a / DAY_S).floor();
            let b = e1.min((day + 1.0) * DAY_S);
            let day = day as i64;
            if day != self.day {
                self.max_day_s = self.max_day_s.max(self.day_s);
                self.day = day;
                self.day_s = 0.0;
            }
            self.day_s += b - a;
            a = b;
        }
    }

    fn max_day_s(&self) -> f64 {
        self.max_day_s.max(self.day_s)
    }
}

/// The overcorrection episodes of one phase (its registers and shares are lanes 1 to 3
/// of [`Metrics`]' lane accumulators).
#[derive(Debug, Clone, Copy, Default)]
struct PhaseAcc {
    /// Intervals of the open episode (0: none open).
    ep_n: u64,
    ep_worst: f64,
    episodes: u64,
    total_n: u64,
    longest_n: u64,
    worst: f64,
}

impl PhaseAcc {
    /// Closes the open episode, counting it when it lasted `min_n` intervals.
    fn close(&mut self, min_n: u64) {
        if self.ep_n >= min_n {
            self.episodes += 1;
            self.total_n += self.ep_n;
            self.longest_n = self.longest_n.max(self.ep_n);
            self.worst = self.worst.max(self.ep_worst);
        }
        self.ep_n = 0;
        self.ep_worst = 0.0;
    }
}

#[derive(Debug, Clone, Copy, Default)]
struct Episode {
    open: bool,
    intervals: u64,
    worst: f64,
    cause_n: [u64; 4],
    weekday_n: [u64; 7],
}

/// The accumulators that every interval adds to, apart from the rest of [`Metrics`] so
/// that a caller stepping many intervals in a row can hold them in registers: it takes
/// them with [`Metrics::running`], records with [`Metrics::record_running`] and puts
/// them back with [`Metrics::set_running`] (the same additions in the same order as
/// [`Metrics::record`], so the same bits).
#[derive(Debug, Clone, Copy)]
pub struct Running {
    /// Intervals recorded.
    n: u64,
    /// Lane 0: the registers of the billing window in progress; lanes 1 to 3: each
    /// phase's registers over the run.
    win: Lanes4,
    /// Intervals under target (P > 0 and Q > P·tan φ_t) and leading (Q < 0): lane 0 the
    /// three-phase supply, lanes 1 to 3 the phases. Whole numbers (below 2^53, so exact)
    /// kept as floating point beside the registers.
    under_n: [f64; 4],
    lead_n: [f64; 4],
    /// Intervals with the highest phase voltage above 110 % of nominal.
    over_110_n: u64,
    /// Extremes of the bus voltage (line to line, V) and of the load (kvar, kW).
    v_min: f64,
    v_max: f64,
    load_q_max: f64,
    load_p_max: f64,
    load_p_min: f64,
}

impl Default for Running {
    fn default() -> Self {
        Running {
            n: 0,
            win: Lanes4::default(),
            under_n: [0.0; 4],
            lead_n: [0.0; 4],
            over_110_n: 0,
            v_min: f64::INFINITY,
            v_max: 0.0,
            load_q_max: f64::NEG_INFINITY,
            load_p_max: f64::NEG_INFINITY,
            load_p_min: f64::INFINITY,
        }
    }
}

/// Accumulates the metrics of one run. Allocates only in [`Metrics::new`] (and when a
/// bank state is reached for the first time beyond the reserved capacity).
pub struct Metrics {
    p: MetricParams,
    dt: f64,
    h: f64,
    tan_t: f64,
    t_first: f64,
    calendar: Calendar,
    /// The registers of the billing windows closed so far, added up.
    reg: Registers,
    /// What every interval adds to.
    run: Running,
    /// The overcorrection threshold of each lane: the three-phase one, then a third of it
    /// for each phase.
    thr: [f64; 4],
    /// An episode is open, three-phase or of a phase.
    any_open: bool,
    win_start: f64,
    next_bill: usize,
    /// [`Metrics::bill_t`] of `next_bill`.
    next_bill_t: f64,
    billing: Vec<BillingWindow>,
    ep: Episode,
    episodes: u64,
    ep_total_n: u64,
    ep_longest_n: u64,
    ep_worst: f64,
    cause_n: [u64; 4],
    weekday_n: [u64; 7],
    min_ep_n: u64,
    mask: BankState,
    mask_since_k: u64,
    state_n: HashMap<BankState, StateAcc, BuildHasherDefault<StateHasher>>,
    on_since_k: Vec<u64>,
    energized_n: Vec<u64>,
    last_op_t: Vec<f64>,
    hunting: Vec<u64>,
    trips: TripCounts,
    v_110: f64,
    phase: [PhaseAcc; 3],
    unbalance: Option<UnbalanceAcc>,
}

impl Metrics {
    /// Prepares the accumulators for a bank whose fixed steps are on from t_first.
    pub fn new(
        p: MetricParams,
        bank: &Bank,
        calendar: Calendar,
        u_n_v: f64,
        dt_s: f64,
        t_first_s: f64,
    ) -> Self {
        let n_steps = bank.len();
        let states_cap = if n_steps >= 12 { 4096 } else { 1 << n_steps };
        let min_ep_n = (p.overcorrection_min_s / dt_s - 1e-9).ceil().max(1.0) as u64;
        let billing = Vec::with_capacity(p.billing_starts.len() + 1);
        let t = p.overcorrection_threshold_kvar;
        let thr = [t, t / 3.0, t / 3.0, t / 3.0];
        let next_bill_t = p
            .billing_starts
            .first()
            .map_or(f64::INFINITY, |&b| b - 1e-9);
        Metrics {
            tan_t: p.target.tan_phi(),
            p,
            dt: dt_s,
            h: dt_s / 3600.0,
            t_first: t_first_s,
            calendar,
            reg: Registers::default(),
            run: Running::default(),
            thr,
            any_open: false,
            win_start: t_first_s,
            next_bill: 0,
            next_bill_t,
            billing,
            ep: Episode::default(),
            episodes: 0,
            ep_total_n: 0,
            ep_longest_n: 0,
            ep_worst: 0.0,
            cause_n: [0; 4],
            weekday_n: [0; 7],
            min_ep_n,
            mask: bank.fixed_mask,
            mask_since_k: 0,
            state_n: HashMap::with_capacity_and_hasher(states_cap, BuildHasherDefault::default()),
            on_since_k: vec![0; n_steps],
            energized_n: vec![0; n_steps],
            last_op_t: vec![f64::NEG_INFINITY; n_steps],
            hunting: vec![0; n_steps],
            trips: TripCounts::default(),
            v_110: 1.1 * u_n_v,
            phase: [PhaseAcc::default(); 3],
            unbalance: None,
        }
    }

    /// Measures unbalance too, for a run of about `duration_s` (to reserve its
    /// 10-minute values up front). Blocks then also end at each 10-minute boundary of
    /// the calendar.
    pub fn with_unbalance(mut self, duration_s: f64) -> Self {
        self.unbalance = Some(UnbalanceAcc::new(duration_s / TEN_MIN_S));
        self
    }

    /// Records interval k with the bank state as it stood.
    #[inline(always)]
    pub fn record(&mut self, o: &IntervalObs<'_>) {
        let mut r = self.run;
        self.record_running(&mut r, o);
        self.run = r;
    }

    /// The accumulators every interval adds to, for [`Metrics::record_running`].
    #[inline(always)]
    pub fn running(&self) -> Running {
        self.run
    }

    /// Puts back the accumulators taken with [`Metrics::running`].
    #[inline(always)]
    pub fn set_running(&mut self, r: Running) {
        self.run = r;
    }

    /// [`Metrics::record`] with the accumulators `r` (taken with [`Metrics::running`])
    /// held by the caller: the same additions in the same order. Nothing else reads the
    /// accumulators until they are put back with [`Metrics::set_running`].
    #[inline(always)]
    pub fn record_running(&mut self, r: &mut Running, o: &IntervalObs<'_>) {
        r.n += 1;
        if o.t_s >= self.next_bill_t {
            self.run = *r;
            self.next_window(o.t_s);
            *r = self.run;
        }
        let oc = self.add_lanes(r, o, self.h, 1);
        // The extremes, each stored every interval (see `lower`).
        r.v_min = lower(o.v_ll_min, r.v_min);
        r.v_max = higher(o.v_ll_max, r.v_max);
        r.load_q_max = higher(o.load_q_kvar, r.load_q_max);
        r.load_p_max = higher(o.load_p_kw, r.load_p_max);
        r.load_p_min = lower(o.load_p_kw, r.load_p_min);
        if let (Some(acc), Some(u)) = (&mut self.unbalance, &o.unbalance) {
            acc.add(u, self.calendar.epoch(o.t_s), 1, self.h);
        }
        if oc != 0 || self.any_open {
            let cause = if oc & 1 != 0 { self.cause(o) } else { 0 };
            self.episodes(o.t_s, o.q_kvar, oc, cause, 1);
        }
    }

    /// Closes the billing window in progress at `t_s` (out of line: a few times a run).
    #[cold]
    #[inline(never)]
    fn next_window(&mut self, t_s: f64) {
        self.close_window(t_s);
        self.next_bill += 1;
        self.next_bill_t = self.bill_t(self.next_bill);
    }

    /// Adds `m` intervals of `o` (1 for [`Metrics::record`], the block's length for
    /// [`Metrics::record_block`]) to the registers (each `h` hours), the shares and the
    /// time above 110 %, the three-phase supply and the phases side by side. Returns the
    /// lanes in which the interval is overcorrected, as bits (bit 0 the three-phase
    /// supply, bits 1 to 3 the phases).
    #[inline(always)]
    fn add_lanes(&self, r: &mut Running, o: &IntervalObs<'_>, h: f64, m: u64) -> u32 {
        let (p, q) = (&o.p_kw, &o.q_kvar);
        r.win.add(p, q, h);
        let tan_t = self.tan_t;
        // Counted in floating point, exactly (whole numbers below 2^53), and with selects
        // rather than branches, so that the lanes go together as the registers do.
        let mf = m as f64;
        for i in 0..4 {
            let importing = if p[i] > 0.0 { mf } else { 0.0 };
            r.under_n[i] += if q[i] > p[i] * tan_t { importing } else { 0.0 };
            r.lead_n[i] += if q[i] < 0.0 { mf } else { 0.0 };
        }
        let limit: [f64; 4] = if tan_t < 0.0 {
            std::array::from_fn(|i| p[i].abs() * tan_t - self.thr[i])
        } else {
            std::array::from_fn(|i| -self.thr[i])
        };
        if o.v_ll_max > self.v_110 {
            r.over_110_n += m;
        }
        // The overcorrected lanes as bits (one comparison of the four lanes and its mask).
        lanes_below(q, &limit)
    }

    /// The episodes of `m` intervals starting at `t_s` with supply reactive power `q`
    /// (lanes as in [`IntervalObs`]) whose lanes `oc` are overcorrected (bits as
    /// [`Metrics::add_lanes`] returns them; `cause` is the three-phase one when bit 0 is
    /// set), when some lane is or an episode is open (out of line: most intervals are
    /// neither). An open episode of a phase closes on an interval in which that phase is
    /// not overcorrected, which is never inside a block; a block continues the
    /// three-phase episode the interval just recorded opened or continued (its worst
    /// value and weekday already counted).
    #[inline(never)]
    fn episodes(&mut self, t_s: f64, q: [f64; 4], oc: u32, cause: usize, m: u64) {
        let q_all = q;
        for ph in 0..3 {
            let q = q_all[ph + 1];
            let a = &mut self.phase[ph];
            if oc & (2 << ph) != 0 {
                a.ep_n += m;
                if -q > a.ep_worst {
                    a.ep_worst = -q;
                }
            } else if a.ep_n > 0 {
                a.close(self.min_ep_n);
            }
        }
        let cause = (oc & 1 != 0).then_some(cause);
        match cause {
            Some(cause) if m > 1 => {
                self.ep.intervals += m;
                self.ep.cause_n[cause] += m;
                self.ep.weekday_n[self.calendar.weekday(t_s)] += m;
            }
            Some(cause) => {
                if !self.ep.open {
                    self.ep = Episode {
                        open: true,
                        ..Episode::default()
                    };
                }
                self.ep.intervals += 1;
                self.ep.worst = self.ep.worst.max(-q_all[0]);
                self.ep.cause_n[cause] += 1;
                self.ep.weekday_n[self.calendar.weekday(t_s)] += 1;
            }
            None if self.ep.open => self.close_episode(),
            None => {}
        }
        self.any_open = self.ep.open || self.phase.iter().any(|a| a.ep_n > 0);
    }

    /// The time from which [`Metrics::record`] closes billing window `i` (the start of
    /// the next one less 1e-9 s), or +∞ after the last.
    fn bill_t(&self, i: usize) -> f64 {
        self.p
            .billing_starts
            .get(i)
            .map_or(f64::INFINITY, |&b| b - 1e-9)
    }

    /// Whether an interval with supply power `p_kw`, `q_kvar` is overcorrected, so that
    /// [`Metrics::record`] looks at its cause (and the fixed steps' output, which the
    /// caller may leave at 0 otherwise).
    #[inline(always)]
    pub fn overcorrected(&self, p_kw: f64, q_kvar: f64) -> bool {
        q_kvar < self.overcorrection_limit(p_kw)
    }

    /// Reactive power below which an interval is overcorrected: past zero for a lagging or
    /// unity target, past the target for a leading one (tan φ_t < 0).
    #[inline(always)]
    fn overcorrection_limit(&self, p: f64) -> f64 {
        let thr = self.p.overcorrection_threshold_kvar;
        if self.tan_t < 0.0 {
            p.abs() * self.tan_t - thr
        } else {
            -thr
        }
    }

    /// The cause (index into `CAUSES`) of an interval that is overcorrected.
    #[inline(always)]
    fn cause(&self, o: &IntervalObs<'_>) -> usize {
        let limit = self.overcorrection_limit(o.p_kw[0]);
        if o.p_kw[0] < 0.0 {
            0
        } else if o.load_q_kvar - o.fixed_q_kvar < limit {
            1
        } else if o.decision.wish < 0 {
            2
        } else {
            3
        }
    }

    /// The first run time after `t_s` at which [`Metrics::record`] treats an interval
    /// differently for a reason of the clock alone: the start of the next billing window
    /// or the next midnight of the run's calendar (overcorrection by weekday).
    pub fn next_boundary_s(&self, t_s: f64) -> f64 {
        let midnight = t_s + (DAY_S - self.calendar.second_of_day(t_s));
        let mut next = match self.p.billing_starts.get(self.next_bill) {
            Some(&b) => b.min(midnight),
            None => midnight,
        };
        if self.unbalance.is_some() {
            // The next clock-aligned 10-minute boundary (unbalance aggregation).
            let e = self.calendar.epoch(t_s);
            let b = ((e / TEN_MIN_S).floor() + 1.0) * TEN_MIN_S;
            next = next.min(t_s + (b - e));
        }
        next
    }

    /// Records `m` more intervals equal to `o`, the interval just recorded, as `m` calls of
    /// [`Metrics::record`] would (energies summed as one product, so they may differ from
    /// the interval-by-interval sums in the last digits). The caller makes sure that no
    /// interval of the block reaches [`Metrics::next_boundary_s`].
    pub fn record_block(&mut self, o: &IntervalObs<'_>, m: u64) {
        if m == 0 {
            return;
        }
        let mut r = self.run;
        r.n += m;
        let oc = self.add_lanes(&mut r, o, self.h * m as f64, m);
        self.run = r;
        if let (Some(acc), Some(u)) = (&mut self.unbalance, &o.unbalance) {
            // The block lies in the 10-minute window of the interval just recorded.
            acc.add(u, self.calendar.epoch(o.t_s), m, self.h * m as f64);
        }
        // The extremes were taken by the interval just recorded.
        if oc != 0 || self.any_open {
            let cause = if oc & 1 != 0 { self.cause(o) } else { 0 };
            self.episodes(o.t_s, o.q_kvar, oc, cause, m);
        }
    }

    fn close_episode(&mut self) {
        let e = self.ep;
        self.ep.open = false;
        if e.intervals >= self.min_ep_n {
            self.episodes += 1;
            self.ep_total_n += e.intervals;
            self.ep_longest_n = self.ep_longest_n.max(e.intervals);
            self.ep_worst = self.ep_worst.max(e.worst);
            for (a, b) in self.cause_n.iter_mut().zip(e.cause_n) {
                *a += b;
            }
            for (a, b) in self.weekday_n.iter_mut().zip(e.weekday_n) {
                *a += b;
            }
        }
    }

    fn close_window(&mut self, t_end: f64) {
        // The run's registers are the sum of its windows' (one window: the same figures).
        let win = self.run.win.lane(0);
        self.reg.kwh_import += win.kwh_import;
        self.reg.kwh_export += win.kwh_export;
        self.reg.kvarh_ind += win.kvarh_ind;
        self.reg.kvarh_cap += win.kvarh_cap;
        let b = win.billed();
        self.billing.push(BillingWindow {
            start_s: self.win_start,
            end_s: t_end,
            energy_pf: b.energy_pf,
            energy_pf_quadrant: b.quadrant,
            tan_phi: b.tan_phi,
            tan_phi_capacitive: b.tan_phi_capacitive,
            capacitive_pf: b.capacitive_pf,
            kwh_import: win.kwh_import,
            kwh_export: win.kwh_export,
            kvarh_inductive: win.kvarh_ind,
            kvarh_capacitive: win.kvarh_cap,
        });
        self.run.win.clear(0);
        self.win_start = t_end;
    }

    /// Records the operations of interval k, which take effect at t_{k+1} (interval k + 1).
    #[inline]
    pub fn record_ops(&mut self, k: u64, d: &Decision, t_next: f64) {
        let changed = d.closed.or(d.opened);
        if changed.is_empty() {
            return;
        }
        if let Some(t) = d.trip {
            match t {
                crate::controller::Trip::Overvoltage => self.trips.overvoltage += 1,
                crate::controller::Trip::LossOfCurrent => self.trips.loss_of_current += 1,
                crate::controller::Trip::Export => self.trips.export += 1,
                crate::controller::Trip::Distortion => self.trips.distortion += 1,
            }
        }
        let k_next = k + 1;
        self.close_state(k_next);
        for n in changed {
            let i = n - 1;
            if t_next - self.last_op_t[i] <= self.p.hunting_window_s + 1e-9 {
                self.hunting[i] += 1;
            }
            self.last_op_t[i] = t_next;
            if d.closed.contains(n) {
                self.on_since_k[i] = k_next;
            } else {
                self.energized_n[i] += k_next - self.on_since_k[i];
            }
        }
        self.mask = self.mask.or(d.closed).minus(d.opened);
    }

    /// Adds the time of the current bank state from its start to interval `k_end`.
    fn close_state(&mut self, k_end: u64) {
        let e0 = self
            .calendar
            .epoch(self.t_first + self.mask_since_k as f64 * self.dt);
        let e1 = self.calendar.epoch(self.t_first + k_end as f64 * self.dt);
        self.state_n.entry(self.mask).or_insert(StateAcc::NEW).add(
            k_end - self.mask_since_k,
            e0,
            e1,
        );
        self.mask_since_k = k_end;
    }

    /// Finishes the run after `n` intervals and builds the result.
    pub fn finish(mut self, bank: &Bank, steps: &[StepState]) -> RunMetrics {
        let n = self.run.n;
        let dt = self.dt;
        let duration = n as f64 * dt;
        let t_end = self.t_first + duration;
        if self.ep.open {
            self.close_episode();
        }
        let thr_ph = self.p.overcorrection_threshold_kvar / 3.0;
        let phases: Vec<PhaseMetrics> = (0..3)
            .map(|ph| {
                let a = &mut self.phase[ph];
                a.close(self.min_ep_n);
                let reg = self.run.win.lane(ph + 1);
                let b = reg.billed();
                PhaseMetrics {
                    phase: crate::profile::PHASES[ph],
                    energy_pf: b.energy_pf,
                    energy_pf_quadrant: b.quadrant,
                    tan_phi: b.tan_phi,
                    tan_phi_capacitive: b.tan_phi_capacitive,
                    kwh_import: reg.kwh_import,
                    kwh_export: reg.kwh_export,
                    kvarh_inductive: reg.kvarh_ind,
                    kvarh_capacitive: reg.kvarh_cap,
                    share_under_target: if n > 0 {
                        self.run.under_n[ph + 1] / n as f64
                    } else {
                        0.0
                    },
                    share_leading: if n > 0 {
                        self.run.lead_n[ph + 1] / n as f64
                    } else {
                        0.0
                    },
                    overcorrection: PhaseOvercorrection {
                        episodes: a.episodes,
                        total_s: a.total_n as f64 * dt,
                        longest_s: a.longest_n as f64 * dt,
                        worst_leading_kvar: a.worst,
                        threshold_kvar: thr_ph,
                    },
                }
            })
            .collect();
        let unbalance = self.unbalance.take().map(|u| {
            let start = self.calendar.epoch(self.t_first);
            u.finish(start, self.t_first)
        });
        self.close_window(t_end);
        self.close_state(n);
        for s in self.mask {
            self.energized_n[s - 1] += n - self.on_since_k[s - 1];
        }
        let billed = self.reg.billed();
        let share = |c: f64| if n > 0 { c / n as f64 } else { 0.0 };
        let per_year = |ops: u64| {
            if duration > 0.0 {
                ops as f64 * YEAR_S / duration
            } else {
                0.0
            }
        };

        let mut per_step = Vec::new();
        let mut wear = Vec::new();
        let mut total = 0;
        for (i, (spec, st)) in bank.steps.iter().zip(steps).enumerate() {
            let ops = st.operations();
            total += ops;
            if !spec.fixed {
                per_step.push(StepSwitching {
                    step: i + 1,
                    operations: ops,
                    closings: st.closings,
                    openings: st.openings,
                    hunting_cycles: self.hunting[i],
                });
            }
            let opy = per_year(ops);
            wear.push(StepWear {
                step: i + 1,
                fixed: spec.fixed,
                operations: ops,
                operations_per_year: opy,
                rated_operations: spec.rated_operations,
                years_to_rated_life: (ops > 0 && opy > 0.0).then(|| spec.rated_operations / opy),
                energized_h: self.energized_n[i] as f64 * dt / 3600.0,
            });
        }
        let mut states: Vec<StateTime> = self
            .state_n
            .iter()
            .filter(|(_, c)| c.n > 0)
            .map(|(mask, c)| StateTime {
                steps: mask.numbers(),
                mask: *mask,
                time_s: c.n as f64 * dt,
                max_day_s: c.max_day_s(),
            })
            .collect();
        states.sort_by(|a, b| b.time_s.total_cmp(&a.time_s).then(a.mask.cmp(&b.mask)));

        let mut cause_s = BTreeMap::new();
        let mut dominant = None;
        let mut best = 0;
        for (c, nc) in CAUSES.iter().zip(self.cause_n) {
            cause_s.insert(c.name().to_string(), nc as f64 * dt);
            if nc > best {
                best = nc;
                dominant = Some(*c);
            }
        }
        RunMetrics {
            run: RunInfo {
                samples: n,
                duration_s: duration,
                time_step_s: dt,
                t_first_s: self.t_first,
            },
            pf: PfMetrics {
                energy_pf: billed.energy_pf,
                energy_pf_quadrant: billed.quadrant,
                tan_phi: billed.tan_phi,
                tan_phi_capacitive: billed.tan_phi_capacitive,
                capacitive_pf: billed.capacitive_pf,
                kwh_import: self.reg.kwh_import,
                kwh_export: self.reg.kwh_export,
                kvarh_inductive: self.reg.kvarh_ind,
                kvarh_capacitive: self.reg.kvarh_cap,
                share_under_target: share(self.run.under_n[0]),
                share_leading: share(self.run.lead_n[0]),
                target: self.p.target.to_string(),
                billing: self.billing,
            },
            switching: SwitchingMetrics {
                total_operations: total,
                per_day: if duration > 0.0 {
                    total as f64 * 86_400.0 / duration
                } else {
                    0.0
                },
                per_year: per_year(total),
                hunting_cycles: self.hunting.iter().sum(),
                hunting_window_s: self.p.hunting_window_s,
                per_step,
                trips: self.trips,
            },
            overcorrection: OvercorrectionMetrics {
                episodes: self.episodes,
                total_s: self.ep_total_n as f64 * dt,
                longest_s: self.ep_longest_n as f64 * dt,
                worst_leading_kvar: self.ep_worst,
                threshold_kvar: self.p.overcorrection_threshold_kvar,
                min_duration_s: self.p.overcorrection_min_s,
                dominant_cause: dominant,
                cause_s,
                by_weekday_s: self.weekday_n.map(|c| c as f64 * dt),
            },
            states,
            wear,
            voltage: VoltageMetrics {
                min_v: if self.run.v_min.is_finite() {
                    self.run.v_min
                } else {
                    0.0
                },
                max_v: self.run.v_max,
                above_110pct_s: self.run.over_110_n as f64 * dt,
            },
            load: LoadMetrics {
                max_q_kvar: if n > 0 { self.run.load_q_max } else { 0.0 },
                max_p_kw: if n > 0 { self.run.load_p_max } else { 0.0 },
                min_p_kw: if n > 0 { self.run.load_p_min } else { 0.0 },
            },
            phases,
            unbalance,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bank::StepSpec;
    use chrono::NaiveDate;

    // The SSE2 selects against Rust's own comparisons, bit for bit, over values that
    // test their edges: NaN on either side, zeros of both signs, infinities, equal values.
    #[test]
    fn the_vector_selects_are_the_plain_comparisons() {
        let values = [
            f64::NAN,
            -0.0,
            0.0,
            f64::INFINITY,
            f64::NEG_INFINITY,
            1.0,
            -1.0,
            1.0 + f64::EPSILON,
            f64::MIN_POSITIVE,
        ];
        for &x in &values {
            for &m in &values {
                let lo = if x < m { x } else { m };
                let hi = if x > m { x } else { m };
                assert_eq!(lower(x, m).to_bits(), lo.to_bits(), "lower({x}, {m})");
                assert_eq!(higher(x, m).to_bits(), hi.to_bits(), "higher({x}, {m})");
            }
        }
        for a in values.windows(4) {
            for b in values.windows(4).rev() {
                let (a, b): ([f64; 4], [f64; 4]) = (a.try_into().unwrap(), b.try_into().unwrap());
                let mut bits = 0;
                for i in 0..4 {
                    bits |= u32::from(a[i] < b[i]) << i;
                }
                assert_eq!(lanes_below(&a, &b), bits, "{a:?} < {b:?}");
            }
        }
    }

    /// One switched 50 kvar step at 400 V.
    /// The one switched step of these tests, never operated.
    fn idle_step() -> StepState {
        StepState {
            on: false,
            since_s: 0.0,
            last_open_s: f64::NEG_INFINITY,
            closings: 0,
            openings: 0,
        }
    }

    fn bank() -> Bank {
        Bank::new(vec![StepSpec::plain(50.0)], 400.0)
    }

    fn params(target: PfTarget, threshold_kvar: f64) -> MetricParams {
        MetricParams {
            target,
            overcorrection_threshold_kvar: threshold_kvar,
            overcorrection_min_s: 60.0,
            hunting_window_s: 300.0,
            billing_starts: Vec::new(),
        }
    }

    /// Calendar with elapsed 0 at the given hour of Monday 2026-01-05.
    fn calendar(hour: u32) -> Calendar {
        let start = NaiveDate::from_ymd_opt(2026, 1, 5)
            .and_then(|d| d.and_hms_opt(hour, 0, 0))
            .expect("a valid date");
        Calendar::elapsed_from(start)
    }

    /// Records one interval of supply P and Q (the load equal to the supply, no fixed step).
    fn record(m: &mut Metrics, t_s: f64, p_kw: f64, q_kvar: f64) {
        let d = Decision::default();
        m.record(&IntervalObs {
            t_s,
            p_kw: [p_kw, p_kw / 3.0, p_kw / 3.0, p_kw / 3.0],
            q_kvar: [q_kvar, q_kvar / 3.0, q_kvar / 3.0, q_kvar / 3.0],
            unbalance: None,
            load_q_kvar: q_kvar,
            load_p_kw: p_kw,
            fixed_q_kvar: 0.0,
            v_ll_min: 400.0,
            v_ll_max: 400.0,
            decision: &d,
        });
    }

    // 12 h at 100 kW / 60 kvar lagging, then 12 h at 10 kW / 70 kvar leading, no bank in
    // (worked by hand): E_P = 1200 + 120 = 1320 kWh, E_Q,ind = 720 kvarh, E_Q,cap = 840
    // kvarh. The billed PF is 1320 / sqrt(1320² + 720²) = 0.8779, and it is a lagging
    // figure (it comes from the inductive register) although more capacitive energy
    // flowed; tan φ = 720 / 1320 = 0.5455; tan φ capacitive = 840 / 1320 = 0.6364;
    // capacitive PF = 1320 / sqrt(1320² + 840²) = 0.8437.
    #[test]
    fn billed_pf_comes_from_the_inductive_register() {
        let b = bank();
        let mut m = Metrics::new(
            params(PfTarget::lag(0.95), 50.0),
            &b,
            calendar(0),
            400.0,
            3600.0,
            0.0,
        );
        for k in 0..24 {
            let (p, q) = if k < 12 { (100.0, 60.0) } else { (10.0, -70.0) };
            record(&mut m, k as f64 * 3600.0, p, q);
        }
        let r = m.finish(&b, &[idle_step()]);
        let pf = &r.pf;
        assert!((pf.kwh_import - 1320.0).abs() < 1e-9);
        assert!((pf.kvarh_inductive - 720.0).abs() < 1e-9);
        assert!((pf.kvarh_capacitive - 840.0).abs() < 1e-9);
        assert!((pf.energy_pf - 0.8779).abs() < 1e-4, "{}", pf.energy_pf);
        assert_eq!(pf.energy_pf_quadrant, Quadrant::Lag);
        assert!((pf.tan_phi.unwrap() - 0.5455).abs() < 1e-4);
        assert!((pf.tan_phi_capacitive.unwrap() - 0.6364).abs() < 1e-4);
        assert!((pf.capacitive_pf - 0.8437).abs() < 1e-4);
        let w = &pf.billing[0];
        assert_eq!(
            (w.energy_pf, w.energy_pf_quadrant),
            (pf.energy_pf, Quadrant::Lag)
        );
        assert_eq!((w.tan_phi, w.capacitive_pf), (pf.tan_phi, pf.capacitive_pf));
    }

    /// 300 s at 100 kW / −20 kvar, then 300 s at 100 kW / −40 kvar, threshold 10 kvar.
    fn leading_spells(target: PfTarget) -> OvercorrectionMetrics {
        let b = bank();
        let mut m = Metrics::new(params(target, 10.0), &b, calendar(0), 400.0, 1.0, 0.0);
        for k in 0..600 {
            record(&mut m, k as f64, 100.0, if k < 300 { -20.0 } else { -40.0 });
        }
        m.finish(&b, &[idle_step()]).overcorrection
    }

    // With a 0.98 lead target, tan φ_t = −sqrt(1 − 0.98²) / 0.98 = −0.2031 (common
    // practice), so at 100 kW the target is Q = −20.3 kvar and an interval is
    // overcorrected below −20.3 − 10 = −30.3 kvar: the spell at −20 kvar (0.98 lead, on
    // target) is not, the spell at −40 kvar is: one 300 s episode, worst 40 kvar. With a
    // lagging target both spells lead by more than 10 kvar: one 600 s episode.
    #[test]
    fn overcorrection_is_measured_past_a_leading_target() {
        let lead = leading_spells(PfTarget::lead(0.98));
        assert_eq!((lead.episodes, lead.total_s), (1, 300.0));
        assert!((lead.worst_leading_kvar - 40.0).abs() < 1e-12);
        let lag = leading_spells(PfTarget::lag(0.95));
        assert_eq!((lag.episodes, lag.total_s), (1, 600.0));
        let unity = leading_spells(PfTarget::lag(1.0));
        assert_eq!((unity.episodes, unity.total_s), (1, 600.0));
    }

    // The run starts at 12:00 on Monday and lasts 36 h in 600 s intervals. Step 1 closes
    // at 20:00 Monday (run time 8 h), opens at 06:00 Tuesday (18 h) and closes again at
    // 18:00 Tuesday (30 h) until midnight (36 h). Worked by hand against the calendar days:
    // state {1}: Monday 20:00–24:00 = 4 h; Tuesday 00:00–06:00 and 18:00–24:00 = 12 h, so
    // 16 h in all and at most 12 h = 43 200 s in one day. State {}: Monday 12:00–20:00 =
    // 8 h; Tuesday 06:00–18:00 = 12 h; 20 h in all, at most 43 200 s. (Days counted from
    // the run's start instead would give 10 h for state {1}.)
    #[test]
    fn most_time_in_a_state_within_one_calendar_day() {
        let b = bank();
        let dt = 600.0;
        let mut m = Metrics::new(
            params(PfTarget::lag(0.95), 50.0),
            &b,
            calendar(12),
            400.0,
            dt,
            0.0,
        );
        let ops = [(47u64, true), (107, false), (179, true)];
        let step1 = BankState::of_steps(&[1]);
        for k in 0..216u64 {
            record(&mut m, k as f64 * dt, 100.0, 10.0);
            if let Some(&(_, close)) = ops.iter().find(|o| o.0 == k) {
                let d = Decision {
                    closed: if close { step1 } else { BankState::EMPTY },
                    opened: if close { BankState::EMPTY } else { step1 },
                    ..Decision::default()
                };
                m.record_ops(k, &d, (k + 1) as f64 * dt);
            }
        }
        let r = m.finish(
            &b,
            &[StepState {
                on: true,
                since_s: 108_000.0,
                last_open_s: 64_800.0,
                closings: 2,
                openings: 1,
            }],
        );
        let on = r
            .states
            .iter()
            .find(|s| s.mask == step1)
            .expect("state {1}");
        let off = r
            .states
            .iter()
            .find(|s| s.mask.is_empty())
            .expect("state {}");
        assert_eq!((on.time_s, on.max_day_s), (57_600.0, 43_200.0));
        assert_eq!((off.time_s, off.max_day_s), (72_000.0, 43_200.0));
    }
}

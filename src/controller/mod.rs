//! The automatic step controller: demand, dead band, switching and disconnect delays,
//! discharge lockout, step ordering, measurement mode and averaging, behaviour while the
//! site exports, and protections.
//!
//! The controller sees only its measurement (P and Q at the supply side of the bank, so the
//! bank's own output is in it) and the nominal kvar of its steps at U_n; it does not know a
//! step has failed. Each interval it advances its timers by Δt and makes at most one
//! ordinary operation; a protection may open several steps at once. Operations take effect
//! at t_{k+1}, and that time is what the discharge lockout and the wear counters see.
//!
//! Step orderings live one per file behind [`StepOrdering`]; adding one means adding a
//! file, a variant of [`OrderingKind`] and a line in [`OrderingKind::build`].

mod best_fit;
pub mod detect;
pub mod per_phase;
mod rotating;
mod sequential;
pub mod wiring;

pub use best_fit::BestFit;
pub use detect::DetectionParams;
pub use per_phase::Control;
pub use rotating::Rotating;
pub use sequential::Sequential;
pub use wiring::{Channel, VoltagePair, Wiring};

use crate::bank::{Bank, BankState};
use crate::pf::PfTarget;
use serde::{Deserialize, Serialize};

/// Tolerance on time comparisons (delays, discharge time), seconds.
const TIME_EPS_S: f64 = 1e-9;

/// What an ordering sees when it picks a step.
#[derive(Debug, Clone, Copy)]
pub struct Choice<'a> {
    /// Demand ΔQ = Q_m − |P_m|·tan φ_t, kvar (> 0: wants capacitance).
    pub demand_kvar: f64,
    /// The steps that may be operated now (for a closing: switched, off and out of
    /// lockout; for an opening: switched and on). Never empty when an ordering is asked.
    pub candidates: BankState,
    /// Per-step switching state, by index (step number − 1).
    pub steps: &'a [StepState],
    /// Nominal kvar of each step at U_n, by index.
    pub kvar: &'a [f64],
}

/// A rule that chooses which step to operate. One file per ordering.
pub trait StepOrdering: Send + Sync {
    /// The name used in scenarios and reports.
    fn name(&self) -> &'static str;
    /// Number (from 1) of the step to close, one of the candidates, or `None` to make no
    /// operation.
    fn pick_close(&self, c: &Choice<'_>) -> Option<usize>;
    /// Number (from 1) of the step to open, one of the candidates, or `None` to make no
    /// operation.
    fn pick_open(&self, c: &Choice<'_>) -> Option<usize>;
}

/// The orderings a scenario can name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum OrderingKind {
    /// Lowest-numbered first in, last in first out.
    #[default]
    Sequential,
    /// Off longest first in, on longest first out.
    Rotating,
    /// The single operation that lands closest to the target.
    BestFit,
}

impl OrderingKind {
    /// Builds the ordering.
    pub fn build(self) -> Box<dyn StepOrdering> {
        match self {
            OrderingKind::Sequential => Box::new(Sequential),
            OrderingKind::Rotating => Box::new(Rotating),
            OrderingKind::BestFit => Box::new(BestFit),
        }
    }

    /// The scenario name of the ordering.
    pub fn name(self) -> &'static str {
        self.build().name()
    }
}

/// What the controller does while the site exports active power (measured P_m < 0).
///
/// The export protection (`trip_on_export`, [`ProtectionParams`]) is separate and acts in
/// every mode: when enabled it blocks closings while P_m < 0 and, once the export has
/// lasted its own delay, opens every switched step at once.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ExportMode {
    /// Keep aiming at the target on the magnitude of the active power: demand
    /// ΔQ = Q_m − |P_m|·tan φ_t, with the usual dead band and delays. Steps close only for
    /// reactive power drawn from the grid beyond the target, never because P went
    /// negative. The default.
    #[default]
    Absolute,
    /// Leave the bank as it stands: no ordinary operation while exporting (the timers
    /// restart).
    Hold,
    /// Open every switched step: while exporting the controller wants to disconnect as
    /// long as a switched step is on, and opens them one per disconnect delay (ordinary
    /// operations, chosen by the ordering); it closes none.
    Open,
}

impl ExportMode {
    /// The scenario name of the mode.
    pub fn name(self) -> &'static str {
        match self {
            ExportMode::Absolute => "absolute",
            ExportMode::Hold => "hold",
            ExportMode::Open => "open",
        }
    }
}

/// Where the controller's current transformer sits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Measurement {
    /// Sum of the three phases.
    #[default]
    ThreePhase,
    /// One current transformer on phase 0, 1 or 2; the controller assumes balance and
    /// multiplies by 3.
    SinglePhase(usize),
}

/// Optional protections, each with its own delay.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ProtectionParams {
    /// Trip level for the highest line-to-line bus voltage, V. Default none.
    pub overvoltage_v: Option<f64>,
    /// Time above the level before one step is opened (and again per further delay), s.
    /// Default 5 s.
    pub overvoltage_delay_s: f64,
    /// Measured current below which all steps are opened (loss of load current), A.
    /// Default none.
    pub min_current_a: Option<f64>,
    /// Delay of the loss-of-current release, s. Default 5 s.
    pub min_current_delay_s: f64,
    /// Open all steps once the site has exported active power (P_m < 0) for the export
    /// delay, and close none while it exports. A trip, apart from the controller's
    /// [`ExportMode`], which acts on every interval of export. Default false.
    pub trip_on_export: bool,
    /// Delay of the export release, s. Default 5 s.
    pub export_delay_s: f64,
    /// Bus voltage THD above which all steps are opened, %. Default none.
    pub thd_limit_pct: Option<f64>,
    /// Delay of the distortion release, s. Default 60 s.
    pub thd_delay_s: f64,
    /// Most ordinary operations in any 3600 s window. Default none.
    pub max_operations_per_hour: Option<u32>,
}

impl Default for ProtectionParams {
    fn default() -> Self {
        ProtectionParams {
            overvoltage_v: None,
            overvoltage_delay_s: 5.0,
            min_current_a: None,
            min_current_delay_s: 5.0,
            trip_on_export: false,
            export_delay_s: 5.0,
            thd_limit_pct: None,
            thd_delay_s: 60.0,
            max_operations_per_hour: None,
        }
    }
}

/// Controller settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ControllerParams {
    /// Target power factor with its quadrant. Default 0.95 lag.
    pub target: PfTarget,
    /// Dead band half-width B, kvar. Default 0.65 × the smallest switched step.
    pub dead_band_kvar: f64,
    /// Switching delay T_sw for connecting, s. Default 30 s.
    pub connect_delay_s: f64,
    /// Delay for disconnecting, s. Default equal to the switching delay.
    pub disconnect_delay_s: f64,
    /// Discharge time T_d: a step opened at t may close again from t + T_d, s. Default 180 s
    /// (the usual IEC 60831-1 discharge device, [`crate::bank::IEC_DISCHARGE_S`]).
    pub discharge_time_s: f64,
    /// Step ordering. Default `sequential`.
    pub ordering: OrderingKind,
    /// Measurement mode. Default three-phase.
    pub measurement: Measurement,
    /// Averaging window of the measurement, s; 0 for none. Default 0 s.
    pub averaging_s: f64,
    /// What the controller does while the site exports (P_m < 0). Default `absolute`.
    pub export_mode: ExportMode,
    /// Protections. Default none enabled.
    pub protection: ProtectionParams,
    /// The controller's own detection of a faulty step ([`detect`]). Default off.
    pub detection: Option<DetectionParams>,
    /// The voltage input of a single-phase measurement as the controller is set up for
    /// it; `None` (the default): the measured phase's own line to neutral.
    pub measurement_voltage: Option<VoltagePair>,
    /// Per-phase control ([`per_phase`]): the single-phase steps of each phase follow
    /// that phase's own demand, the three-phase steps follow the phase that needs least.
    /// Needs the three-phase measurement. Default false.
    pub per_phase: bool,
    /// Dead band half-width of each phase's own control under per-phase control, kvar of
    /// that phase. `None` (the default): 0.65 × the smallest switched single-phase step
    /// of the phase.
    pub phase_dead_band_kvar: Option<f64>,
    /// How the measuring inputs are actually wired, when not as the controller assumes
    /// (a what-if of commissioning faults); one channel for a single-phase measurement,
    /// three otherwise. Default `None`: as assumed.
    pub wired: Option<[Channel; 3]>,
}

impl ControllerParams {
    /// The measuring channels as assumed and as wired.
    pub fn wiring(&self) -> Wiring {
        let w = match self.measurement {
            Measurement::SinglePhase(x) => Wiring::new(&[Channel {
                current: x,
                reversed: false,
                voltage: self.measurement_voltage.unwrap_or(VoltagePair::Ln(x)),
            }]),
            Measurement::ThreePhase => {
                Wiring::new(&[Channel::phase(0), Channel::phase(1), Channel::phase(2)])
            }
        };
        match self.wired {
            Some(a) => w.wired(&a),
            None => w,
        }
    }

    /// The measurement in words: `three-phase`, `per-phase`, `single-phase a`, or
    /// `single-phase a with U_bc`.
    pub fn measurement_label(&self) -> String {
        match self.measurement {
            Measurement::ThreePhase if self.per_phase => "per-phase".to_string(),
            Measurement::ThreePhase => "three-phase".to_string(),
            Measurement::SinglePhase(p) => {
                let name = crate::profile::PHASES[p.min(2)];
                match self.measurement_voltage {
                    Some(v) if v != VoltagePair::Ln(p) => {
                        format!("single-phase {name} with U_{}", v.label())
                    }
                    _ => format!("single-phase {name}"),
                }
            }
        }
    }
}

/// What the controller reads in one interval.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Reading {
    /// Supply-side active power per phase, kW.
    pub p_kw: [f64; 3],
    /// Supply-side reactive power per phase, kvar.
    pub q_kvar: [f64; 3],
    /// Highest line-to-line-equivalent bus voltage (√3 × highest phase voltage), V.
    pub v_ll_max: f64,
    /// Highest phase current at the metering point, A.
    pub current_a: f64,
    /// Estimated bus voltage THD for the present bank state, %.
    pub thd_pct: f64,
}

/// What the protections read of an interval.
#[derive(Debug, Clone, Copy)]
struct Protected {
    v_ll_max: f64,
    current_a: f64,
    thd_pct: f64,
}

/// Switching state of one step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StepState {
    /// Contactor closed.
    pub on: bool,
    /// Time of the last change of state (t_first at the start), s.
    pub since_s: f64,
    /// Time of the last opening; −∞ if never opened.
    pub last_open_s: f64,
    /// Closings so far.
    pub closings: u64,
    /// Openings so far.
    pub openings: u64,
}

impl StepState {
    /// Closings plus openings.
    pub fn operations(&self) -> u64 {
        self.closings + self.openings
    }
}

/// Which protection opened steps.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Trip {
    /// Bus voltage above the overvoltage level.
    Overvoltage,
    /// Measured current below the loss-of-current level.
    LossOfCurrent,
    /// Site exporting active power.
    Export,
    /// Bus voltage distortion above its limit.
    Distortion,
}

/// What the controller did in one interval.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Decision {
    /// Measured (averaged) active power, kW.
    pub p_m_kw: f64,
    /// Measured (averaged) reactive power, kvar.
    pub q_m_kvar: f64,
    /// Demand ΔQ, kvar: Q_m − P_m·tan φ_t while importing, Q_m − |P_m|·tan φ_t while
    /// exporting (what the `absolute` export mode acts on; under `hold` and `open` the
    /// wish does not follow it during export).
    pub demand_kvar: f64,
    /// +1 connect wanted, −1 disconnect wanted, 0 inside the dead band.
    pub wish: i8,
    /// Steps closed at t_{k+1}.
    pub closed: BankState,
    /// Steps opened at t_{k+1}.
    pub opened: BankState,
    /// A protection that opened steps, if any.
    pub trip: Option<Trip>,
    /// A step the fault detection ([`detect`]) alarmed on and took out of service in
    /// this interval (if its contactor was closed, it is in `opened` too).
    pub alarm: BankState,
}

/// Moving average over a fixed number of intervals; allocates once. P and Q go side by
/// side as pairs (the window and the sums), each summed as it would be alone.
#[derive(Debug, Clone)]
struct Averager {
    /// The window of (P, Q) values.
    w: Vec<[f64; 2]>,
    next: usize,
    filled: usize,
    /// The sums of P and of Q over the window.
    sum: [f64; 2],
    inv_n: f64,
    /// Bits of the latest (P, Q) pushed (0.0 before any).
    last: (u64, u64),
    /// Consecutive pushes of the latest (P, Q), at most the window length.
    same: usize,
    /// The window holds n copies of the latest value and has been resummed since, so
    /// every further push of that value returns exactly the same mean.
    steady: bool,
}

impl Averager {
    fn new(n: usize) -> Self {
        Averager {
            w: vec![[0.0; 2]; n],
            next: 0,
            filled: 0,
            sum: [0.0; 2],
            inv_n: 1.0 / n as f64,
            last: (0, 0),
            same: 0,
            steady: n == 1,
        }
    }

    /// How many more pushes of the latest value return exactly the latest mean
    /// (`u64::MAX`: any number). Once the window holds n copies of the value, a push
    /// replaces a value by itself and leaves the sums as they are, until the push that
    /// completes a round and resums; from then on the resummed sums never change. While
    /// older values are still in the window, every push changes the mean: none.
    #[inline]
    fn quiet(&self) -> u64 {
        let n = self.w.len();
        if self.steady {
            u64::MAX
        } else if self.same >= n {
            (n - 1 - self.next) as u64
        } else {
            0
        }
    }

    /// Pushes the latest value `m` more times, at most [`Averager::quiet`] of them: the
    /// values and the sums stay as they are and only the write position moves.
    #[inline]
    fn skip(&mut self, m: u64) {
        let n = self.w.len();
        if n > 1 {
            self.next = ((self.next as u64 + m % n as u64) % n as u64) as usize;
        }
    }

    #[inline(always)]
    fn push(&mut self, p: f64, q: f64) -> (f64, f64) {
        let n = self.w.len();
        if n == 1 {
            return (p, q);
        }
        if p.to_bits() == self.last.0 && q.to_bits() == self.last.1 {
            if self.same < n {
                self.same += 1;
            }
        } else {
            self.last = (p.to_bits(), q.to_bits());
            self.same = 1;
            self.steady = false;
        }
        let old = self.w[self.next];
        self.sum = [self.sum[0] + (p - old[0]), self.sum[1] + (q - old[1])];
        self.w[self.next] = [p, q];
        self.next += 1;
        if self.next == n {
            // Resum once per window so rounding cannot build up over long runs.
            self.next = 0;
            self.sum = [
                self.w.iter().map(|x| x[0]).sum(),
                self.w.iter().map(|x| x[1]).sum(),
            ];
            // The sums of n equal values do not change when one of them is replaced by
            // itself, and the next resum gives the same sums again.
            self.steady = self.same == n;
        }
        if self.filled < n {
            self.filled += 1;
            let k = self.filled as f64;
            return (self.sum[0] / k, self.sum[1] / k);
        }
        (self.sum[0] * self.inv_n, self.sum[1] * self.inv_n)
    }
}

/// Consecutive-interval timer of a protection.
#[derive(Debug, Clone, Copy, Default)]
struct Timer {
    count: u64,
    /// The condition was present in the latest interval.
    active: bool,
    /// Intervals of a present condition until the timer fires: the smallest count with
    /// count·Δt ≥ delay (within the time tolerance).
    period: u64,
}

/// The smallest number of intervals c ≥ 1 with c·Δt ≥ `delay_s` − [`TIME_EPS_S`], by the
/// same floating-point comparison the timers make.
fn intervals_for(delay_s: f64, dt: f64) -> u64 {
    let met = |c: u64| c as f64 * dt >= delay_s - TIME_EPS_S;
    let guess = ((delay_s - TIME_EPS_S) / dt).ceil();
    let mut c = if guess.is_finite() && guess > 1.0 {
        guess as u64
    } else {
        1
    };
    while c > 1 && met(c - 1) {
        c -= 1;
    }
    while !met(c) {
        c += 1;
    }
    c
}

impl Timer {
    fn new(delay_s: f64, dt: f64) -> Self {
        Timer {
            count: 0,
            active: false,
            period: intervals_for(delay_s, dt),
        }
    }

    /// Intervals after the latest one before the timer fires, given the condition stays
    /// as it is (`u64::MAX`: never).
    #[inline]
    fn quiet(&self) -> u64 {
        if self.active {
            self.period - self.count - 1
        } else {
            u64::MAX
        }
    }

    /// Advances the timer by `m` intervals of an unchanged condition, firing with no
    /// effect whenever it expires (the caller has made sure that a firing changes nothing
    /// else).
    #[inline]
    fn skip(&mut self, m: u64) {
        if self.active {
            self.count = (self.count + m % self.period) % self.period;
        }
    }

    /// Advances the timer; returns true when the condition has held for `delay_s`.
    #[inline]
    fn advance(&mut self, active: bool, dt: f64, delay_s: f64) -> bool {
        self.active = active;
        if !active {
            self.count = 0;
            return false;
        }
        self.count += 1;
        if self.count as f64 * dt >= delay_s - TIME_EPS_S {
            self.count = 0;
            true
        } else {
            false
        }
    }
}

/// The controller: settings plus its own state. The caller owns it and calls
/// [`Controller::decide`] once per interval.
pub struct Controller {
    params: ControllerParams,
    ordering: Box<dyn StepOrdering>,
    kvar: Vec<f64>,
    switched: BankState,
    dt: f64,
    tan_t: f64,
    any_protection: bool,
    steps: Vec<StepState>,
    mask: BankState,
    wish: i8,
    count: u64,
    avg: Averager,
    ov: Timer,
    low: Timer,
    export: Timer,
    thd: Timer,
    op_times: Vec<f64>,
    op_head: usize,
    op_len: usize,
    /// Intervals of an unchanged wish before a connection is attempted.
    connect_n: u64,
    /// Intervals of an unchanged wish before a disconnection is attempted.
    disconnect_n: u64,
    /// A protection condition blocked closings in the latest interval.
    blocked_close: bool,
    /// The fault detection, when enabled.
    detect: Option<detect::Detector>,
}

impl Controller {
    /// Builds a controller for a bank, with every switched step off and every fixed step
    /// on since `t_first_s`.
    pub fn new(params: ControllerParams, bank: &Bank, dt_s: f64, t_first_s: f64) -> Self {
        Self::for_steps(params, bank, dt_s, t_first_s, bank.switched_mask)
    }

    /// A controller that switches only the steps of `own` (others it never operates), as
    /// each part of per-phase control does.
    pub fn for_steps(
        params: ControllerParams,
        bank: &Bank,
        dt_s: f64,
        t_first_s: f64,
        own: BankState,
    ) -> Self {
        let n_avg = ((params.averaging_s / dt_s).round() as usize).max(1);
        let cap = params.protection.max_operations_per_hour.unwrap_or(0) as usize;
        let steps = bank
            .steps
            .iter()
            .map(|s| StepState {
                on: s.fixed,
                since_s: t_first_s,
                last_open_s: f64::NEG_INFINITY,
                closings: 0,
                openings: 0,
            })
            .collect();
        Controller {
            params,
            ordering: params.ordering.build(),
            kvar: bank.steps.iter().map(|s| s.kvar).collect(),
            switched: bank.switched_mask.and(own),
            dt: dt_s,
            tan_t: params.target.tan_phi(),
            any_protection: {
                let p = params.protection;
                p.overvoltage_v.is_some()
                    || p.min_current_a.is_some()
                    || p.trip_on_export
                    || p.thd_limit_pct.is_some()
            },
            steps,
            mask: bank.fixed_mask,
            wish: 0,
            count: 0,
            avg: Averager::new(n_avg),
            ov: Timer::new(params.protection.overvoltage_delay_s, dt_s),
            low: Timer::new(params.protection.min_current_delay_s, dt_s),
            export: Timer::new(params.protection.export_delay_s, dt_s),
            thd: Timer::new(params.protection.thd_delay_s, dt_s),
            op_times: vec![0.0; cap],
            op_head: 0,
            op_len: 0,
            connect_n: intervals_for(params.connect_delay_s, dt_s),
            disconnect_n: intervals_for(params.disconnect_delay_s, dt_s),
            blocked_close: false,
            detect: params
                .detection
                .map(|p| detect::Detector::new(p, bank.steps.len())),
        }
    }

    /// Connected steps, fixed ones included.
    #[inline]
    pub fn mask(&self) -> BankState {
        self.mask
    }

    /// Per-step switching state, by index.
    pub fn steps(&self) -> &[StepState] {
        &self.steps
    }

    /// The settings.
    pub fn params(&self) -> &ControllerParams {
        &self.params
    }

    /// Reads the measurement of interval k, advances the timers by Δt and makes at most
    /// one ordinary operation (or a protection trip). `t_next` is t_{k+1}, the time the
    /// new state takes effect.
    #[inline]
    pub fn decide(&mut self, r: &Reading, t_next: f64) -> Decision {
        let (p_raw, q_raw) = match self.params.measurement {
            Measurement::ThreePhase => (
                r.p_kw[0] + r.p_kw[1] + r.p_kw[2],
                r.q_kvar[0] + r.q_kvar[1] + r.q_kvar[2],
            ),
            Measurement::SinglePhase(ph) => (3.0 * r.p_kw[ph], 3.0 * r.q_kvar[ph]),
        };
        self.decide_measured(p_raw, q_raw, r.v_ll_max, r.current_a, r.thd_pct, t_next)
    }

    /// [`Controller::decide`] for a reading already reduced to what the current
    /// transformer measures: `p_raw` and `q_raw` are the three-phase sums (phases added
    /// in the order a, b, c), or three times the measured phase; the other arguments are
    /// the fields of [`Reading`] of the same names.
    #[inline]
    pub fn decide_measured(
        &mut self,
        p_raw: f64,
        q_raw: f64,
        v_ll_max: f64,
        current_a: f64,
        thd_pct: f64,
        t_next: f64,
    ) -> Decision {
        self.decide_inline(p_raw, q_raw, v_ll_max, current_a, thd_pct, t_next)
    }

    /// [`Controller::decide_measured`], always inlined: for the engine's one-controller
    /// path, where it runs once per interval.
    #[inline(always)]
    pub(crate) fn decide_inline(
        &mut self,
        p_raw: f64,
        q_raw: f64,
        v_ll_max: f64,
        current_a: f64,
        thd_pct: f64,
        t_next: f64,
    ) -> Decision {
        let r = Protected {
            v_ll_max,
            current_a,
            thd_pct,
        };
        let (p_m, q_m) = self.avg.push(p_raw, q_raw);
        let exporting = p_m < 0.0;
        let demand = q_m - p_m.abs() * self.tan_t;
        let b = self.params.dead_band_kvar;
        let wish: i8 = match (exporting, self.params.export_mode) {
            (true, ExportMode::Hold) => 0,
            (true, ExportMode::Open) => -i8::from(!self.mask.and(self.switched).is_empty()),
            _ if demand > b => 1,
            _ if demand < -b => -1,
            _ => 0,
        };
        if wish == 0 {
            self.count = 0;
        } else if wish == self.wish {
            self.count += 1;
        } else {
            self.count = 1;
        }
        self.wish = wish;
        let mut d = Decision {
            p_m_kw: p_m,
            q_m_kvar: q_m,
            demand_kvar: demand,
            wish,
            ..Decision::default()
        };
        if let Some(det) = &mut self.detect {
            if let detect::Verdict::Alarm { step, closed } = det.check(q_raw, &self.kvar) {
                // Out of service: never operated again; opened now if believed closed.
                let one = BankState::EMPTY.with(step);
                self.switched = self.switched.without(step);
                d.alarm = one;
                if closed && self.mask.contains(step) {
                    self.open_mask(one, t_next);
                    self.count = 0;
                    self.record_op(t_next);
                    d.opened = one;
                    return d;
                }
            }
        }

        // Protections first: they may open several steps and block closings.
        let dt = self.dt;
        let on_switched = self.mask.and(self.switched);
        let mut blocked_close = false;
        if self.any_protection {
            let pr = self.params.protection;
            let ov_on = pr.overvoltage_v.is_some_and(|v| r.v_ll_max > v);
            let low_on = pr.min_current_a.is_some_and(|a| r.current_a < a);
            let exp_on = pr.trip_on_export && p_m < 0.0;
            let thd_on = pr.thd_limit_pct.is_some_and(|l| r.thd_pct > l);
            let ov_fire = self.ov.advance(ov_on, dt, pr.overvoltage_delay_s);
            let low_fire = self.low.advance(low_on, dt, pr.min_current_delay_s);
            let exp_fire = self.export.advance(exp_on, dt, pr.export_delay_s);
            let thd_fire = self.thd.advance(thd_on, dt, pr.thd_delay_s);
            let trip_all = if low_fire {
                Some(Trip::LossOfCurrent)
            } else if exp_fire {
                Some(Trip::Export)
            } else if thd_fire {
                Some(Trip::Distortion)
            } else {
                None
            };
            if let Some(t) = trip_all {
                if !on_switched.is_empty() {
                    self.open_mask(on_switched, t_next);
                    self.count = 0;
                    d.opened = on_switched;
                    d.trip = Some(t);
                    return d;
                }
            }
            if let (true, Some(n)) = (ov_fire, self.largest(on_switched)) {
                let one = BankState::EMPTY.with(n);
                self.open_mask(one, t_next);
                self.count = 0;
                d.opened = one;
                d.trip = Some(Trip::Overvoltage);
                return d;
            }
            blocked_close = ov_on || low_on || exp_on || thd_on;
        }
        self.blocked_close = blocked_close;

        if wish == 0 {
            return d;
        }
        // The delay in whole intervals, by the same comparison (count·Δt against the delay
        // less the tolerance, which grows with the count; the count is at least 1 here).
        let needed = if wish > 0 {
            self.connect_n
        } else {
            self.disconnect_n
        };
        if self.count < needed {
            return d;
        }
        if !self.cap_allows(t_next) {
            return d;
        }
        let candidates = if wish > 0 {
            if blocked_close {
                BankState::EMPTY
            } else {
                self.closable(t_next)
            }
        } else {
            on_switched
        };
        if candidates.is_empty() {
            return d;
        }
        // Under the `open` export mode the controller wants every switched step open, so
        // the ordering sees the demand of opening them all: minus their nominal kvar.
        let choice_demand = if exporting && self.params.export_mode == ExportMode::Open {
            -self.nominal_kvar(on_switched)
        } else {
            demand
        };
        let choice = Choice {
            demand_kvar: choice_demand,
            candidates,
            steps: &self.steps,
            kvar: &self.kvar,
        };
        let pick = if wish > 0 {
            self.ordering.pick_close(&choice)
        } else {
            self.ordering.pick_open(&choice)
        };
        let Some(n) = pick.filter(|&n| candidates.contains(n)) else {
            return d;
        };
        let one = BankState::EMPTY.with(n);
        if wish > 0 {
            let s = &mut self.steps[n - 1];
            s.on = true;
            s.since_s = t_next;
            s.closings += 1;
            self.mask = self.mask.or(one);
            d.closed = one;
        } else {
            self.open_mask(one, t_next);
            d.opened = one;
        }
        self.count = 0;
        self.record_op(t_next);
        if let Some(det) = &mut self.detect {
            det.expect(n, wish > 0, q_raw, &self.kvar);
        }
        d
    }

    /// After an interval in which [`Controller::decide`] made no operation: how many of the
    /// following intervals are sure to make none either if they read exactly the same
    /// measurement (`u64::MAX`: as many as there are). `t_next` is the time t_{k+1} at
    /// which the latest interval's decision took effect.
    ///
    /// The answer is 0 while the averaging window still holds older values, and the stretch
    /// ends before the push that resums a window full of one value (the sums may then
    /// change in the last digit). Otherwise a repeated reading gives the same mean, demand
    /// and wish, so the only things that move are the counters and the clock, and the
    /// quiet stretch ends before the first of: a
    /// protection timer expiring while a switched step is on (it would trip), the
    /// switching timer reaching its delay, and, once the delay is met but the operation
    /// could not be made, the cap on operations per hour leaving room or a step leaving
    /// its discharge lockout. Clock events are taken two intervals early, so rounding in
    /// the time of an interval cannot move one into the stretch.
    pub fn quiet_after(&self, t_next: f64) -> u64 {
        let mut quiet = self.avg.quiet();
        if quiet == 0 {
            return 0;
        }
        if self.any_protection && !self.mask.and(self.switched).is_empty() {
            for t in [&self.ov, &self.low, &self.export, &self.thd] {
                quiet = quiet.min(t.quiet());
            }
        }
        if self.wish == 0 {
            return quiet;
        }
        let needed = if self.wish > 0 {
            self.connect_n
        } else {
            self.disconnect_n
        };
        if self.count < needed {
            return quiet.min(needed - self.count - 1);
        }
        // The delay is met and the latest attempt made no operation: only the clock can
        // change that.
        let dt = self.dt;
        let before = |t_event: f64| -> u64 {
            let n = ((t_event - t_next) / dt).floor() - 2.0;
            if n <= 0.0 {
                0
            } else if n >= u64::MAX as f64 {
                u64::MAX
            } else {
                n as u64
            }
        };
        if !self.cap_allows(t_next) && !self.op_times.is_empty() {
            quiet = quiet.min(before(self.op_times[self.op_head] + 3600.0));
        }
        if self.wish > 0 && !self.blocked_close {
            let td = self.params.discharge_time_s;
            for n in self.switched.minus(self.mask) {
                let free_at = self.steps[n - 1].last_open_s + td;
                if t_next - self.steps[n - 1].last_open_s < td - TIME_EPS_S {
                    quiet = quiet.min(before(free_at));
                }
            }
        }
        quiet
    }

    /// Steps over `m` intervals that read the latest measurement again, all of them quiet
    /// by [`Controller::quiet_after`]: the averaging window, the switching timer and the
    /// protection timers move on as `m` calls of [`Controller::decide`] would move them.
    pub fn skip(&mut self, m: u64) {
        self.avg.skip(m);
        if self.wish != 0 {
            self.count += m;
        }
        for t in [&mut self.ov, &mut self.low, &mut self.export, &mut self.thd] {
            t.skip(m);
        }
    }

    /// Switched steps that are off and out of their discharge lockout at `t_close`.
    #[inline]
    fn closable(&self, t_close: f64) -> BankState {
        let td = self.params.discharge_time_s;
        self.switched
            .minus(self.mask)
            .iter()
            .filter(|&n| t_close - self.steps[n - 1].last_open_s >= td - TIME_EPS_S)
            .collect()
    }

    /// Sum of the nominal kvar of the steps in `state`.
    fn nominal_kvar(&self, state: BankState) -> f64 {
        state.iter().map(|n| self.kvar[n - 1]).sum()
    }

    /// Largest step of `state` by nominal kvar, ties to the lower number; `None` when the
    /// state is empty.
    fn largest(&self, state: BankState) -> Option<usize> {
        state.iter().reduce(|best, n| {
            if self.kvar[n - 1] > self.kvar[best - 1] {
                n
            } else {
                best
            }
        })
    }

    fn open_mask(&mut self, state: BankState, t: f64) {
        for n in state {
            let s = &mut self.steps[n - 1];
            s.on = false;
            s.since_s = t;
            s.last_open_s = t;
            s.openings += 1;
        }
        self.mask = self.mask.minus(state);
    }

    /// True when the cap on operations per hour leaves room for one more at `t`.
    fn cap_allows(&self, t: f64) -> bool {
        let cap = self.op_times.len();
        if self.params.protection.max_operations_per_hour.is_none() {
            return true;
        }
        if cap == 0 {
            return false;
        }
        // The oldest of the last `cap` operations must have left the window (t − 3600, t].
        self.op_len < cap || self.op_times[self.op_head] <= t - 3600.0
    }

    fn record_op(&mut self, t: f64) {
        let cap = self.op_times.len();
        if cap == 0 {
            return;
        }
        if self.op_len < cap {
            self.op_times[(self.op_head + self.op_len) % cap] = t;
            self.op_len += 1;
        } else {
            self.op_times[self.op_head] = t;
            self.op_head = (self.op_head + 1) % cap;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // The averager's promise, checked by pushing: after any history, `quiet` further
    // pushes of the latest value return exactly the latest mean, bit for bit. Values of
    // very different sizes make the running sum differ from the resummed one in the last
    // digits, so a promise that reached past the resum would be caught.
    #[test]
    fn averager_quiet_pushes_repeat_the_mean_exactly() {
        let values = [0.1, 1e6 + 0.3, 0.7, 3.3e-3, 250.0, 1e6 / 3.0, 0.1];
        let mut caught_change = false;
        for n in [2usize, 3, 5, 7] {
            for start in 0..values.len() {
                let mut a = Averager::new(n);
                // A varied history, then one value repeated for three windows.
                for i in 0..(start + n) {
                    a.push(values[(start + i) % values.len()], values[i % values.len()]);
                }
                let v = (values[start], values[(start + 1) % values.len()]);
                let mut mean = a.push(v.0, v.1);
                for _ in 0..3 * n {
                    let quiet = a.quiet().min(4 * n as u64);
                    for _ in 0..quiet {
                        let m = a.push(v.0, v.1);
                        assert_eq!(
                            (m.0.to_bits(), m.1.to_bits()),
                            (mean.0.to_bits(), mean.1.to_bits())
                        );
                    }
                    let next = a.push(v.0, v.1);
                    caught_change |= next.0.to_bits() != mean.0.to_bits();
                    mean = next;
                }
                assert_eq!(a.quiet(), u64::MAX, "steady after three windows");
            }
        }
        // The values do make the resum change the mean somewhere.
        assert!(caught_change);
    }

    // Skipping m quiet pushes leaves the averager where m pushes would have left it.
    #[test]
    fn averager_skip_equals_pushes() {
        let mut a = Averager::new(4);
        let mut b = Averager::new(4);
        for x in [1.0, 2.0, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3] {
            a.push(x, -x);
            b.push(x, -x);
        }
        assert_eq!(a.quiet(), u64::MAX);
        for _ in 0..11 {
            a.push(0.3, -0.3);
        }
        b.skip(11);
        assert_eq!((a.next, a.sum), (b.next, b.sum));
        assert_eq!(a.push(5.0, 1.0), b.push(5.0, 1.0));
    }

    // Delays in intervals by the timers' own comparison: 3 s at 0.1 s is 30 intervals
    // although 30 × 0.1 is not exactly 3 in binary (the 1e-9 s tolerance, DEVELOPERS.md);
    // 40 s at 1 s is 40; a zero delay is met by the first interval.
    #[test]
    fn delays_in_intervals() {
        assert_eq!(intervals_for(3.0, 0.1), 30);
        assert_eq!(intervals_for(40.0, 1.0), 40);
        assert_eq!(intervals_for(0.0, 1.0), 1);
        assert_eq!(intervals_for(2.5, 1.0), 3);
    }
}

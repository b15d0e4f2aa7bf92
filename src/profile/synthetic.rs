//! Seeded synthetic load generator: a site's per-phase P and Q built from parts a plant
//! engineer recognises — a base load with shift, night and weekend levels, groups of
//! machines that switch on and off at random or on a fixed cycle, welders with
//! second-scale bursts, rooftop PV with passing clouds, and measurement noise.
//!
//! This module owns the `[load.synthetic]` scenario table ([`SyntheticConfig`] and its
//! parts, validated by [`SyntheticConfig::validate`]) and the generator
//! ([`SyntheticProfile`], a [`LoadSource`]). Load sign convention throughout: P > 0 is
//! import, Q > 0 inductive; PV generation is negative P.
//!
//! # The scenario table
//!
//! Every key has a default; an empty `[load.synthetic]` is a steady 100 kW at 0.85 lag.
//! All figures below are invented for illustration.
//!
//! ```toml
//! [load.synthetic]
//! noise_percent = 0.5              # relative σ on each phase's P and Q, %
//!
//! [load.synthetic.base]
//! kw = 140                         # three-phase, during shifts
//! pf = 0.88                        # lagging
//! night_kw = 60                    # working days outside shifts
//! weekend_kw = 35                  # other days
//! phase_shares = [0.36, 0.32, 0.32]
//!
//! [load.synthetic.shifts]
//! days = "mon-fri"                 # or ["mon", "tue", "sat"], "fri-mon", "all"
//! hours = ["06:00-14:00", "14:00-22:00"]   # "22:00-06:00" runs past midnight
//!
//! [[load.synthetic.machines]]
//! name = "air compressors"
//! units = 3                        # each switches by itself
//! kw = 30                          # per running unit
//! pf = 0.82
//! phase = "abc"                    # or "a", "b", "c", "ab", "bc", "ca"
//! runs = "always"                  # or "shifts", or "window" with window = "07:00-19:00"
//! cycle = "random"                 # exponential spells; "fixed" for an exact cycle
//! on_s = 900                       # mean running time
//! off_s = 600                      # mean standing time; 0 = runs without a break
//!
//! [[load.synthetic.welders]]
//! name = "spot welders"
//! units = 4
//! kw = 40                          # while welding
//! pf = 0.55
//! phase = "ab"                     # line to line
//! runs = "shifts"
//! burst_s = 1.5                    # mean burst
//! pause_s = 12                     # mean pause
//!
//! [[load.synthetic.pv]]
//! peak_kw = 120                    # at solar noon, clear sky
//! sunrise_h = 6.5
//! sunset_h = 19.5
//! pf = 1.0                         # below 1: reactive = "absorb" or "supply"
//!
//! [load.synthetic.pv.clouds]       # optional
//! clear_s = 1800                   # mean clear spell
//! shade_s = 300                    # mean shaded spell
//! depth = 0.7                      # share of output lost while shaded
//! ```
//!
//! # What a sample means
//!
//! Sample k is the **mean load over its interval** [t_k, t_k + Δt). Switching of machine
//! and welder units, shift and window boundaries, base-load level changes and cloud
//! shading are events at exact times, drawn from the seed independently of Δt, and their
//! effect is integrated exactly over the interval: a 1 s weld inside a 15 min interval
//! adds 1/900 of its power to that sample, so energy is right at any Δt. The PV clear-sky
//! curve is taken at the interval's midpoint. Measurement noise is drawn afresh for
//! every sample. Intervals must be asked for in order (the engine does).
//!
//! # Schedules
//!
//! Weekdays and times of day come from the run's [`Calendar`]. A shift belongs to the
//! day it starts on. While a group's gate (always, shifts, or its own window) is shut,
//! its units stand; when the gate opens they start afresh.
//!
//! # Units switching at random
//!
//! Units with exponential run and stand times are simulated as the number of running
//! units, which is then exactly a birth–death process (a unit stops at rate k/on, one
//! starts at rate (n − k)/off): one waiting time and one choice per switching, whatever
//! the number of units, and each gate opening starts the units in the long-run odds.
//! Fixed cycles start each unit at a random point of its cycle.
//!
//! # Line-to-line loads
//!
//! A load S = P + jQ connected between phases x and y (in the order ab, bc, ca) shows
//! on the per-phase meters as S/√3·e^(−j30°) on x and S/√3·e^(+j30°) on y: the totals are
//! the configured P and Q, but the two phases see different power factors, as in the
//! two-wattmeter method.
//!
//! # Reproducibility
//!
//! The same configuration, seed, calendar, start and Δt give bit-identical samples. Each
//! machine group, welder group, cloud process and the noise draw from their own random
//! stream derived from the seed and the part's place in the file, so adding a welder
//! group or resizing the PV does not change when the compressors run, and the switching
//! times do not depend on Δt (only their averaging does).
//!
//! # Speed
//!
//! Per-sample work is a comparison against the next event time when nothing switches;
//! only when an event falls inside the interval are the affected parts integrated.
//! Groups that switch often compared with Δt (welders) are summed every sample with
//! their switchings prepared ahead in small batches; the others are kept in a running
//! sum refreshed only when one of them switches, and groups shut by their gate cost
//! nothing. The PV curve is drawn in straight one-minute pieces and skipped through the
//! night. Noise takes six quantised normal draws from two random numbers, each looked up
//! directly as its factor 1 + σ·x, and spell lengths use a table-based exponential (see
//! `draws`). With noise, `fill` takes each part over a piece of up to 256 samples in
//! turn, adding to every sample in the order `sample` adds the parts and with the same
//! operations (so the samples are the same bits): the running sum as it stands up to its
//! next event; each group summed every sample from one switching to the next, a sample
//! without a switching adding the running units' load worked out once; a single PV array
//! over its night in one step and over runs of samples on one straight piece without a
//! cloud switching; then the noise of the whole chunk, in the order `sample` draws it.
//! Neither allocates.
//!
//! Without noise, a sample that takes the running sum alone (no event inside it, the
//! groups summed every sample shut by their gates, every PV array in its night) repeats
//! until the next event of the running sum, the next gate opening or the next sunrise;
//! [`LoadSource::unchanged_until`] returns the first interval past that run, worked out
//! on the grid t_k = t_first + k·Δt, so that a caller can step over the run.

mod config;
mod draws;
mod schedule;

pub use config::{
    parse_window, BaseLoad, Clouds, DayList, DutyCycle, InverterReactive, MachineGroup, Phase,
    PvArray, RunWhen, ShiftPattern, SyntheticConfig, WelderGroup,
};

use crate::error::ProfileError;
use crate::pf::tan_phi_of;
use crate::profile::{LoadSample, LoadSource};
use crate::timebase::{Calendar, DAY_S};
use draws::{FastExp, NoiseFactors};
use rand::{Rng, RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use schedule::{week_intervals, Clock, WeekTable};

/// Random-stream families, so that parts of different kinds never share a stream.
const STREAM_NOISE: u64 = 1;
const STREAM_MACHINE: u64 = 2;
const STREAM_WELDER: u64 = 3;
const STREAM_CLOUD: u64 = 4;

/// A group whose units are expected to switch more than this many times per interval, all
/// units together, is summed every sample instead of being kept in the running sum.
const FAST_EVENTS_PER_INTERVAL: f64 = 0.05;

/// Base-load levels, as states of the base clock.
const LEVEL_SHIFT: u8 = 0;
const LEVEL_NIGHT: u8 = 1;
const LEVEL_OFF_DAY: u8 = 2;

/// SplitMix64 finaliser, used to spread seeds and stream numbers.
fn mix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The random stream of one part: `family` says its kind and `index` its place in the
/// file among parts of that kind.
fn stream(seed: u64, family: u64, index: usize) -> Xoshiro256PlusPlus {
    let id = (family << 56) ^ (index as u64);
    Xoshiro256PlusPlus::seed_from_u64(mix64(mix64(seed) ^ mix64(id)))
}

/// Per-phase P and Q (`[Pa, Pb, Pc, Qa, Qb, Qc]`) of a load of `p` kW and `q` kvar on a
/// connection. A line-to-line load S = P + jQ between phases x and y (in the order ab,
/// bc, ca) appears on the per-phase meters as S/√3·e^(−j30°) on x and S/√3·e^(+j30°) on
/// y: the totals are P and Q, but the two phases see different power factors, as with
/// the two-wattmeter method.
fn phase_vector(phase: Phase, p: f64, q: f64) -> [f64; 6] {
    let mut v = [0.0; 6];
    let mut put = |i: usize, pp: f64, qq: f64| {
        v[i] += pp;
        v[i + 3] += qq;
    };
    let r = 0.5 / 3f64.sqrt();
    let mut line = |x: usize, y: usize| {
        put(x, 0.5 * p + r * q, 0.5 * q - r * p);
        put(y, 0.5 * p - r * q, 0.5 * q + r * p);
    };
    match phase {
        Phase::Abc => {
            for i in 0..3 {
                v[i] = p / 3.0;
                v[i + 3] = q / 3.0;
            }
        }
        Phase::A => put(0, p, q),
        Phase::B => put(1, p, q),
        Phase::C => put(2, p, q),
        Phase::Ab => line(0, 1),
        Phase::Bc => line(1, 2),
        Phase::Ca => line(2, 0),
    }
    v
}

/// v += a·x for six-component load vectors.
#[inline(always)]
fn axpy(v: &mut [f64; 6], a: f64, x: &[f64; 6]) {
    for (vi, xi) in v.iter_mut().zip(x) {
        *vi += a * xi;
    }
}

/// Intervals `fill` takes together: the parts are walked over a piece of this many
/// samples at a time.
const FILL_PIECE: usize = 256;

/// A sample as the load vector `[Pa, Pb, Pc, Qa, Qb, Qc]`.
#[inline(always)]
fn get(s: &LoadSample) -> [f64; 6] {
    [
        s.p_kw[0],
        s.p_kw[1],
        s.p_kw[2],
        s.q_kvar[0],
        s.q_kvar[1],
        s.q_kvar[2],
    ]
}

/// Writes a load vector `[Pa, Pb, Pc, Qa, Qb, Qc]` into a sample.
#[inline(always)]
fn put(s: &mut LoadSample, v: &[f64; 6]) {
    s.p_kw.copy_from_slice(&v[..3]);
    s.q_kvar.copy_from_slice(&v[3..]);
}

/// Adds a load vector `[Pa, Pb, Pc, Qa, Qb, Qc]` to a sample.
#[inline(always)]
fn add(s: &mut LoadSample, v: &[f64; 6]) {
    for c in 0..3 {
        s.p_kw[c] += v[c];
        s.q_kvar[c] += v[c + 3];
    }
}

/// The smaller of two numbers that are never NaN (a plain `minsd`).
#[inline(always)]
fn fmin(a: f64, b: f64) -> f64 {
    if a < b {
        a
    } else {
        b
    }
}

/// The larger of two numbers that are never NaN (a plain `maxsd`).
#[inline(always)]
fn fmax(a: f64, b: f64) -> f64 {
    if a > b {
        a
    } else {
        b
    }
}

/// Clamps a positive duration from an unvalidated config into a range that cannot hang
/// the generator.
fn sane_on(x: f64) -> f64 {
    if x.is_nan() {
        1.0
    } else {
        x.clamp(1e-3, 1e12)
    }
}

/// Like [`sane_on`] but keeps 0 (and maps anything not positive to 0).
fn sane_off(x: f64) -> f64 {
    if x > 0.0 {
        sane_on(x)
    } else {
        0.0
    }
}

/// A number from an unvalidated config, NaN replaced by `dflt`.
fn finite_or(x: f64, dflt: f64) -> f64 {
    if x.is_finite() {
        x
    } else {
        dflt
    }
}

/// The integer form of the test `u < p` for a uniform number u = m·2⁻⁵³ made, as `rand`
/// makes its `f64`, from the top 53 bits m of a 64-bit draw: u < p exactly when
/// m < ⌈p·2⁵³⌉ (the scaling by a power of two is exact), for any p in [0, 1].
fn stop_threshold(p: f64) -> u64 {
    let scaled = (p.clamp(0.0, 1.0) * (1u64 << 53) as f64).ceil();
    if scaled.is_nan() {
        0
    } else {
        scaled as u64
    }
}

/// Switchings a group draws ahead of time, so that the per-sample test only compares
/// the next prepared time.
const EVENT_BATCH: usize = 32;

/// How the units of a group alternate between running and standing, as one process over
/// the number of running units. It prepares the group's switchings in batches; each is
/// made in O(1), whatever the number of units.
#[derive(Debug, Clone)]
enum Process {
    /// The units never stop: all run whenever the gate is open.
    NonStop,
    /// Independent units with exponential run and stand times. The number running is
    /// then exactly a birth–death process: a unit stops at rate k/on and one starts at
    /// rate (n − k)/off, so one waiting time and one choice per switching suffice.
    Random {
        /// Long-run share of time a unit runs, on/(on + off).
        p_on: f64,
        /// For each number of running units k: 1/λ_k, the mean time to the next
        /// switching, s, with λ_k = k/on + (n − k)/off; and the chance (k/on)/λ_k that
        /// the next switching stops a unit, as a threshold on 53 random bits (see
        /// [`stop_threshold`]).
        per_k: Vec<(f64, u64)>,
        /// Units running and run time after the last prepared switching.
        k: u32,
        t: f64,
        exp: FastExp,
        rng: Xoshiro256PlusPlus,
    },
    /// Exactly `on` running then `off` standing, each unit from its own random point of
    /// the cycle: the switchings of all units repeat every period, so they are kept as
    /// one sorted list of offsets walked in order.
    Fixed {
        on: f64,
        period: f64,
        /// (offset from the cycle origin, +1 starts a unit or −1 stops one), sorted.
        offsets: Vec<(f64, f64)>,
        /// Index in `offsets` of the next switching to prepare.
        ptr: usize,
        /// Run time the offsets count from, and the number of whole periods since.
        origin: f64,
        periods: f64,
        rng: Xoshiro256PlusPlus,
    },
}

impl Process {
    /// Draws the state of `n` units starting afresh at `t`; returns how many run.
    fn start(&mut self, n: u32, t: f64) -> u32 {
        match self {
            Process::NonStop => n,
            Process::Random {
                p_on,
                k,
                t: tk,
                rng,
                ..
            } => {
                // Each unit runs with the long-run probability; spells are memoryless,
                // so no unit is part-way through one.
                let p = *p_on;
                *k = (0..n).filter(|_| rng.random::<f64>() < p).count() as u32;
                *tk = t;
                *k
            }
            Process::Fixed {
                on,
                period,
                offsets,
                ptr,
                origin,
                periods,
                rng,
            } => {
                // A unit at point φ of its cycle (on while φ < on) stops after on − φ
                // (or on + period − φ) and starts after period − φ; both lie in
                // (0, period].
                offsets.clear();
                let mut running = 0;
                for _ in 0..n {
                    let phi = rng.random::<f64>() * *period;
                    let stop = if phi < *on {
                        running += 1;
                        *on - phi
                    } else {
                        *on + *period - phi
                    };
                    offsets.push((*period - phi, 1.0));
                    offsets.push((stop, -1.0));
                }
                offsets.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
                *ptr = 0;
                *origin = t;
                *periods = 0.0;
                running
            }
        }
    }

    /// Prepares the next switchings, as (run time, +1 or −1), after those already
    /// prepared.
    fn prepare(&mut self, out: &mut [(f64, f64); EVENT_BATCH]) {
        match self {
            Process::NonStop => out.fill((f64::INFINITY, 0.0)),
            Process::Random {
                per_k,
                k,
                t,
                exp,
                rng,
                ..
            } => {
                // The state in locals over the batch, so that it stays in registers.
                let (mut r, mut kk, mut tt) = (rng.clone(), *k, *t);
                for slot in out.iter_mut() {
                    let e = exp.draw(&mut r);
                    let (mean_wait, stop_below) = per_k[kk as usize];
                    tt += e * mean_wait;
                    // The same decision as `rng.random::<f64>() < p_stop`, in integers.
                    let stops = (r.next_u64() >> 11) < stop_below;
                    // −1 when a unit stops, +1 when one starts, without a branch.
                    let step = 1 - 2 * i32::from(stops);
                    kk = (kk as i32 + step) as u32;
                    *slot = (tt, f64::from(step));
                }
                (*rng, *k, *t) = (r, kk, tt);
            }
            Process::Fixed {
                period,
                offsets,
                ptr,
                origin,
                periods,
                ..
            } => {
                for slot in out.iter_mut() {
                    let (off, step) = offsets[*ptr];
                    *slot = (*origin + *periods * *period + off, step);
                    *ptr += 1;
                    if *ptr == offsets.len() {
                        *ptr = 0;
                        *periods += 1.0;
                    }
                }
            }
        }
    }
}

/// A group of identical units that switch independently while a gate lets them run.
/// While the gate is shut every unit stands; when it opens each unit starts afresh (in
/// the long-run odds for a random cycle, at a random point of a fixed cycle).
#[derive(Debug, Clone)]
struct Group {
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]` of one running unit.
    unit: [f64; 6],
    /// Units running now (0 while the gate is shut), as a number.
    n_on: f64,
    /// Earliest of the next switching and the gate's next change.
    next_ev: f64,
    /// Prepared switchings; the next one is at `pos`.
    events: [(f64, f64); EVENT_BATCH],
    pos: usize,
    /// When the group may run (state 1) or not (0).
    gate: Clock,
    process: Process,
    /// Number of units.
    n: u32,
    /// Expected switchings per second while running, all units together.
    event_rate: f64,
}

impl Group {
    #[allow(clippy::too_many_arguments)]
    fn new(
        unit: [f64; 6],
        gate: Clock,
        cycle: DutyCycle,
        n: u32,
        on_s: f64,
        off_s: f64,
        rng: Xoshiro256PlusPlus,
        t0: f64,
    ) -> Self {
        let (process, event_rate) = if off_s <= 0.0 || n == 0 {
            (Process::NonStop, 0.0)
        } else {
            let rate = 2.0 * f64::from(n) / (on_s + off_s);
            let p = match cycle {
                DutyCycle::Random => {
                    let lam = |k: u32| f64::from(k) / on_s + f64::from(n - k) / off_s;
                    Process::Random {
                        p_on: on_s / (on_s + off_s),
                        per_k: (0..=n)
                            .map(|k| (1.0 / lam(k), stop_threshold(f64::from(k) / on_s / lam(k))))
                            .collect(),
                        k: 0,
                        t: t0,
                        exp: FastExp::new(),
                        rng,
                    }
                }
                DutyCycle::Fixed => Process::Fixed {
                    on: on_s,
                    period: on_s + off_s,
                    offsets: Vec::with_capacity(2 * n as usize),
                    ptr: 0,
                    origin: t0,
                    periods: 0.0,
                    rng,
                },
            };
            (p, rate)
        };
        let mut g = Group {
            unit,
            n_on: 0.0,
            next_ev: f64::INFINITY,
            events: [(f64::INFINITY, 0.0); EVENT_BATCH],
            pos: 0,
            gate,
            process,
            n,
            event_rate,
        };
        if g.gate.state != 0 {
            g.start_units(t0);
        }
        g.settle();
        g
    }

    /// The gate opens at `t`: every unit starts afresh.
    fn start_units(&mut self, t: f64) {
        self.n_on = f64::from(self.process.start(self.n, t));
        self.process.prepare(&mut self.events);
        self.pos = 0;
    }

    /// The gate shuts: every unit stands.
    fn stop_units(&mut self) {
        self.n_on = 0.0;
        self.events.fill((f64::INFINITY, 0.0));
        self.pos = 0;
    }

    /// Refreshes the cached next event after a change.
    #[inline]
    fn settle(&mut self) {
        self.next_ev = fmin(self.events[self.pos].0, self.gate.next);
    }

    /// Unit-seconds of running over [x, y), making every switching that comes before y.
    #[inline]
    fn run_units(&mut self, x: f64, y: f64) -> f64 {
        let mut integral = self.n_on * (y - x);
        loop {
            let (te, step) = self.events[self.pos];
            if te >= y {
                break;
            }
            integral += step * (y - fmax(te, x));
            self.n_on += step;
            self.pos += 1;
            if self.pos == EVENT_BATCH {
                self.process.prepare(&mut self.events);
                self.pos = 0;
            }
        }
        integral
    }

    /// Mean number of running units over [t0, t1), gate changes included; afterwards the
    /// group stands at t1.
    #[inline(never)]
    fn integrate(&mut self, cal: &Calendar, t0: f64, t1: f64) -> f64 {
        let mut acc = 0.0;
        let mut x = t0;
        loop {
            if self.gate.next <= x {
                let was_open = self.gate.state != 0;
                self.gate.set(cal, x);
                let open = self.gate.state != 0;
                if open && !was_open {
                    self.start_units(x);
                } else if was_open && !open {
                    self.stop_units();
                }
            }
            let y = fmin(self.gate.next, t1);
            acc += self.run_units(x, y);
            if y >= t1 {
                break;
            }
            x = y;
        }
        self.settle();
        acc / (t1 - t0)
    }

    /// Mean number of running units over [t0, t1) for a group summed every sample; Δt
    /// is t1 − t0 and `inv_dt` its inverse. The usual cases (no switching, or one) take
    /// no unpredictable branch.
    #[inline]
    fn mean_every_sample(&mut self, cal: &Calendar, t0: f64, t1: f64, inv_dt: f64) -> f64 {
        if self.gate.next < t1 {
            return self.integrate(cal, t0, t1);
        }
        let start = self.n_on;
        let (te, step) = self.events[self.pos];
        let hit = te < t1;
        let d = if hit { step } else { 0.0 };
        let mut corr = d * (t1 - fmin(fmax(te, t0), t1));
        self.n_on += d;
        self.pos += usize::from(hit);
        if self.pos == EVENT_BATCH {
            self.refill();
        }
        if self.events[self.pos].0 < t1 {
            corr += self.more_switchings(t0, t1);
        }
        start + corr * inv_dt
    }

    /// Prepares the next batch of switchings once the last one is used up (out of line,
    /// so that the per-sample path stays small).
    #[cold]
    #[inline(never)]
    fn refill(&mut self) {
        self.process.prepare(&mut self.events);
        self.pos = 0;
    }

    /// For [`Group::mean_every_sample`]: the unit-seconds over [t0, t1) beyond the
    /// running count, when a second switching falls inside the interval (out of line:
    /// rare at the Δt such groups are summed at).
    #[cold]
    #[inline(never)]
    fn more_switchings(&mut self, t0: f64, t1: f64) -> f64 {
        let before = self.n_on;
        self.run_units(t0, t1) - before * (t1 - t0)
    }
}

/// The base load: a level per clock state.
#[derive(Debug, Clone)]
struct Base {
    clock: Clock,
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]` for the shift, night and off-day levels.
    levels: [[f64; 6]; 3],
}

impl Base {
    /// Mean load over [t0, t1); afterwards the clock stands at t1.
    fn integrate(&mut self, cal: &Calendar, t0: f64, t1: f64) -> [f64; 6] {
        let inv_span = 1.0 / (t1 - t0);
        let mut acc = [0.0; 6];
        let mut x = t0;
        loop {
            if self.clock.next <= x {
                self.clock.set(cal, x);
            }
            let y = fmin(self.clock.next, t1);
            let w = (y - x) * inv_span;
            let lv = &self.levels[usize::from(self.clock.state)];
            for i in 0..6 {
                acc[i] += lv[i] * w;
            }
            if y >= t1 {
                break;
            }
            x = y;
        }
        acc
    }

    /// The level in force.
    #[inline]
    fn steady(&self) -> &[f64; 6] {
        &self.levels[usize::from(self.clock.state)]
    }
}

/// Passing clouds over one PV array: a two-state process like a unit.
#[derive(Debug, Clone)]
struct CloudState {
    shaded: bool,
    next: f64,
    clear_s: f64,
    shade_s: f64,
    depth: f64,
    exp: FastExp,
    rng: Xoshiro256PlusPlus,
}

impl CloudState {
    /// Output factor over [t0, t1): 1 − depth × shaded share of the interval.
    #[inline]
    fn factor(&mut self, t0: f64, t1: f64, inv_dt: f64) -> f64 {
        if self.next >= t1 {
            return if self.shaded { 1.0 - self.depth } else { 1.0 };
        }
        self.switch(t0, t1, inv_dt)
    }

    /// [`CloudState::factor`] for an interval with switchings inside (out of line).
    #[cold]
    #[inline(never)]
    fn switch(&mut self, t0: f64, t1: f64, inv_dt: f64) -> f64 {
        let mut shaded_t = if self.shaded { t1 - t0 } else { 0.0 };
        while self.next < t1 {
            let te = fmax(self.next, t0);
            if self.shaded {
                shaded_t -= t1 - te;
            } else {
                shaded_t += t1 - te;
            }
            self.shaded = !self.shaded;
            let mean = if self.shaded {
                self.shade_s
            } else {
                self.clear_s
            };
            self.next += mean * self.exp.draw(&mut self.rng);
        }
        1.0 - self.depth * (shaded_t * inv_dt).clamp(0.0, 1.0)
    }
}

/// Length of the straight pieces the PV day curve is drawn with, s.
const PV_PIECE_S: f64 = 60.0;

/// One PV array. Its clear-sky day curve is the bell cos²(π·(s − noon)/(sunset −
/// sunrise)) of the second of the day s, zero slope at sunrise and sunset; it is
/// evaluated exactly every `PV_PIECE_S` seconds from sunrise and drawn straight in
/// between (within 1.2e-5 of the peak for any day of 8 h or more).
#[derive(Debug, Clone)]
struct Pv {
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]` at peak output (P negative: generation).
    peak: [f64; 6],
    /// Sunrise, solar noon and sunset, seconds of the day (sunrise infinite for an
    /// array that never sees daylight).
    rise_s: f64,
    noon_s: f64,
    set_s: f64,
    /// 1 / (sunset − sunrise), 1/s.
    inv_len: f64,
    /// The piece of curve in use: run times [from, to), output a + b·(t − from) as a
    /// share of the peak, and whether it is daylight.
    from: f64,
    to: f64,
    a: f64,
    b: f64,
    lit: bool,
    clouds: Option<CloudState>,
}

impl Pv {
    /// The clear-sky output at second of the day `sod`, share of the peak.
    fn bell(&self, sod: f64) -> f64 {
        let c = (std::f64::consts::PI * (sod - self.noon_s) * self.inv_len).cos();
        c * c
    }

    /// Finds the piece of curve holding run time `t`.
    #[cold]
    fn find_piece(&mut self, cal: &Calendar, t: f64) {
        let day = (cal.epoch(t) / DAY_S).floor();
        let day_start = day * DAY_S - cal.offset_s;
        let sod = t - day_start;
        if sod >= self.rise_s && sod < self.set_s {
            let from = self.rise_s + ((sod - self.rise_s) / PV_PIECE_S).floor() * PV_PIECE_S;
            let to = fmin(from + PV_PIECE_S, self.set_s);
            self.from = day_start + from;
            self.to = day_start + to;
            self.a = self.bell(from);
            self.b = (self.bell(to) - self.a) / (to - from);
            self.lit = true;
        } else {
            // Dark until the next sunrise.
            self.from = t;
            self.to = if sod < self.rise_s {
                day_start + self.rise_s
            } else {
                day_start + DAY_S + self.rise_s
            };
            self.a = 0.0;
            self.b = 0.0;
            self.lit = false;
        }
    }
}

/// The seeded synthetic load profile: a [`LoadSource`] built from a validated
/// [`SyntheticConfig`]. See the module documentation for what a sample means.
#[derive(Debug, Clone)]
pub struct SyntheticProfile {
    /// Start of interval 0, s: interval k starts at t_first + k·Δt.
    t_first: f64,
    /// Interval length Δt, s.
    dt: f64,
    inv_dt: f64,
    /// Whether the last sample took anything beyond the running sum (an event inside
    /// it, a group summed every sample, PV in daylight, or noise), so that the next
    /// sample may differ from it.
    last_varied: bool,
    /// Base load plus the groups kept in the running sum, in force now,
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]`.
    steady: [f64; 6],
    /// Earliest run time at which the base level or a group in the running sum may change.
    next_event: f64,
    /// Groups that switch often compared with Δt, summed every sample.
    fast: Vec<Group>,
    /// Run time before which every group in `fast` is shut by its gate (and so
    /// contributes nothing), or −∞.
    fast_idle_until: f64,
    pv: Vec<Pv>,
    /// Run time before which every PV array is in its night, or −∞.
    pv_idle_until: f64,
    /// Whether there is measurement noise (a relative σ above 0).
    noise_on: bool,
    /// The factors 1 + σ·x of the noise draws (all 1 when σ is 0, and then unused).
    noise: NoiseFactors,
    noise_rng: Xoshiro256PlusPlus,
    cal: Calendar,
    base: Base,
    /// Groups kept in the running sum `steady`.
    slow: Vec<Group>,
}

impl SyntheticProfile {
    /// Builds the generator for a validated `cfg`. `seed` fixes every random draw,
    /// `calendar` maps run time to weekdays and hours, `t_first_s` is the start of
    /// interval 0 and `dt_s` the interval length, s. Values that validation would reject
    /// are clamped to harmless ones rather than causing a panic or a hang.
    pub fn new(
        cfg: &SyntheticConfig,
        seed: u64,
        calendar: Calendar,
        t_first_s: f64,
        dt_s: f64,
    ) -> Self {
        let cal = calendar;
        let t0 = finite_or(t_first_s, 0.0);
        let dt = if dt_s.is_finite() && dt_s > 0.0 {
            dt_s
        } else {
            1.0
        };

        // Shifts and the base-load levels.
        let work_days = cfg.shifts.days.parse().unwrap_or([false; 7]);
        let shift_windows: Vec<(f64, f64)> = cfg
            .shifts
            .hours
            .iter()
            .filter_map(|h| parse_window(h).ok())
            .collect();
        let shift_on = week_intervals(&work_days, &shift_windows);
        let b = &cfg.base;
        let tan = tan_phi_of(finite_or(b.pf, 1.0).clamp(0.05, 1.0));
        let kw = finite_or(b.kw, 0.0);
        let night = finite_or(b.night_kw.unwrap_or(kw), 0.0);
        let off_day = finite_or(b.weekend_kw.unwrap_or(night), 0.0);
        let level = |p: f64| {
            let mut v = [0.0; 6];
            for i in 0..3 {
                let s = finite_or(b.phase_shares[i], 1.0 / 3.0);
                v[i] = p * s;
                v[i + 3] = p * s * tan;
            }
            v
        };
        let levels = [level(kw), level(night), level(off_day)];
        let outside = std::array::from_fn(|d| {
            if work_days[d] {
                LEVEL_NIGHT
            } else {
                LEVEL_OFF_DAY
            }
        });
        let base_table = if levels[1] == levels[0] && levels[2] == levels[0] {
            WeekTable::constant(LEVEL_SHIFT)
        } else {
            WeekTable::from_intervals(&shift_on, LEVEL_SHIFT, outside)
        };
        let base = Base {
            clock: Clock::new(base_table, &cal, t0),
            levels,
        };

        // Machine and welder groups, each with its gate.
        let gate_for = |runs: RunWhen, window: &str, days: &DayList| -> Clock {
            let table = match runs {
                RunWhen::Always => WeekTable::constant(1),
                RunWhen::Shifts => WeekTable::gate(&shift_on),
                RunWhen::Window => {
                    let d = days.parse().unwrap_or([false; 7]);
                    let w: Vec<(f64, f64)> = parse_window(window).into_iter().collect();
                    WeekTable::gate(&week_intervals(&d, &w))
                }
            };
            Clock::new(table, &cal, t0)
        };
        let unit_vector = |phase: Phase, kw: f64, pf: f64| {
            let p = finite_or(kw, 0.0);
            let pf = finite_or(pf, 1.0).clamp(0.05, 1.0);
            phase_vector(phase, p, p * tan_phi_of(pf))
        };
        let (mut fast, mut slow) = (Vec::new(), Vec::new());
        let mut place = |g: Group| {
            if g.event_rate * dt > FAST_EVENTS_PER_INTERVAL {
                fast.push(g);
            } else {
                slow.push(g);
            }
        };
        for (g, m) in cfg.machines.iter().enumerate() {
            place(Group::new(
                unit_vector(m.phase, m.kw, m.pf),
                gate_for(m.runs, &m.window, &m.window_days),
                m.cycle,
                m.units,
                sane_on(m.on_s),
                sane_off(m.off_s),
                stream(seed, STREAM_MACHINE, g),
                t0,
            ));
        }
        for (g, w) in cfg.welders.iter().enumerate() {
            place(Group::new(
                unit_vector(w.phase, w.kw, w.pf),
                gate_for(w.runs, &w.window, &w.window_days),
                DutyCycle::Random,
                w.units,
                sane_on(w.burst_s),
                sane_off(w.pause_s),
                stream(seed, STREAM_WELDER, g),
                t0,
            ));
        }

        let pv = cfg
            .pv
            .iter()
            .enumerate()
            .map(|(i, a)| {
                let peak = finite_or(a.peak_kw, 0.0);
                let pf = finite_or(a.pf, 1.0).clamp(0.05, 1.0);
                let q = match a.reactive {
                    InverterReactive::Absorb => peak * tan_phi_of(pf),
                    InverterReactive::Supply => -peak * tan_phi_of(pf),
                };
                let rise_s = finite_or(a.sunrise_h, 6.0).clamp(0.0, 24.0) * 3600.0;
                let set_s = finite_or(a.sunset_h, 20.0).clamp(0.0, 24.0) * 3600.0;
                let clouds = a.clouds.as_ref().map(|c| {
                    let mut rng = stream(seed, STREAM_CLOUD, i);
                    let clear_s = sane_on(c.clear_s);
                    let shade_s = sane_on(c.shade_s);
                    let shaded = rng.random::<f64>() * (clear_s + shade_s) < shade_s;
                    let exp = FastExp::new();
                    let next = t0 + exp.draw(&mut rng) * if shaded { shade_s } else { clear_s };
                    CloudState {
                        shaded,
                        next,
                        clear_s,
                        shade_s,
                        depth: finite_or(c.depth, 0.0).clamp(0.0, 1.0),
                        exp,
                        rng,
                    }
                });
                Pv {
                    // A PV array of no daylight length never produces.
                    peak: if set_s > rise_s {
                        phase_vector(a.phase, -peak, q)
                    } else {
                        [0.0; 6]
                    },
                    rise_s: if set_s > rise_s {
                        rise_s
                    } else {
                        f64::INFINITY
                    },
                    noon_s: 0.5 * (rise_s + set_s),
                    set_s,
                    inv_len: if set_s > rise_s {
                        1.0 / (set_s - rise_s)
                    } else {
                        0.0
                    },
                    from: f64::INFINITY,
                    to: f64::NEG_INFINITY,
                    a: 0.0,
                    b: 0.0,
                    lit: false,
                    clouds,
                }
            })
            .collect();

        let noise_sigma = finite_or(cfg.noise_percent, 0.0).clamp(0.0, 100.0) / 100.0;
        let mut prof = SyntheticProfile {
            t_first: t0,
            dt,
            inv_dt: 1.0 / dt,
            last_varied: true,
            steady: [0.0; 6],
            next_event: f64::INFINITY,
            fast,
            fast_idle_until: f64::NEG_INFINITY,
            pv,
            pv_idle_until: f64::NEG_INFINITY,
            noise_on: noise_sigma > 0.0,
            noise: NoiseFactors::new(noise_sigma),
            noise_rng: stream(seed, STREAM_NOISE, 0),
            cal,
            base,
            slow,
        };
        prof.refresh_steady();
        prof
    }

    /// Whether the generator may promise runs of unchanged samples
    /// ([`LoadSource::unchanged_until`]): only without measurement noise, which varies
    /// every sample.
    pub fn may_hold(&self) -> bool {
        !self.noise_on
    }

    /// Recomputes the running sum and its next event time from the parts in it.
    fn refresh_steady(&mut self) {
        let mut s = *self.base.steady();
        let mut next = self.base.clock.next;
        for g in &self.slow {
            axpy(&mut s, g.n_on, &g.unit);
            next = fmin(next, g.next_ev);
        }
        self.steady = s;
        self.next_event = next;
    }

    /// Adds to `v` the difference between the mean over [t0, t1) and the running sum,
    /// for every part of the running sum with an event inside, and brings those parts
    /// to t1.
    #[inline(never)]
    fn integrate_slow(&mut self, t0: f64, t1: f64, v: &mut [f64; 6]) {
        if self.base.clock.next < t1 {
            let before = *self.base.steady();
            let mean = self.base.integrate(&self.cal, t0, t1);
            for i in 0..6 {
                v[i] += mean[i] - before[i];
            }
        }
        for g in &mut self.slow {
            if g.next_ev < t1 {
                let before = g.n_on;
                let d = g.integrate(&self.cal, t0, t1) - before;
                axpy(v, d, &g.unit);
            }
        }
        self.refresh_steady();
    }

    /// Adds the PV output of [t0, t1) to `v`; an array in daylight marks the sample as
    /// varied.
    #[inline(always)]
    fn add_pv(&mut self, t0: f64, t1: f64, v: &mut [f64; 6]) {
        let tm = t0 + 0.5 * self.dt;
        if tm < self.pv_idle_until {
            return;
        }
        let inv_dt = self.inv_dt;
        let mut dark_until = f64::INFINITY;
        for a in &mut self.pv {
            if !(tm >= a.from && tm < a.to) {
                a.find_piece(&self.cal, tm);
            }
            if a.lit {
                let mut f = a.a + a.b * (tm - a.from);
                // Clouds keep passing at night; their switchings are caught up here,
                // clamped to the interval start, which leaves the same realisation.
                if let Some(c) = &mut a.clouds {
                    f *= c.factor(t0, t1, inv_dt);
                }
                axpy(v, f, &a.peak);
                dark_until = f64::NEG_INFINITY;
                self.last_varied = true;
            } else {
                dark_until = fmin(dark_until, a.to);
            }
        }
        // When every array is dark, nothing to do until the first sunrise.
        self.pv_idle_until = dark_until;
    }

    /// The mean load over [t_s, t_s + Δt) without the measurement noise,
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]`; the parts move on to t_s + Δt.
    #[inline(always)]
    fn clean(&mut self, t_s: f64) -> [f64; 6] {
        let t0 = t_s;
        let t1 = t_s + self.dt;
        let mut v = self.steady;
        // Each part that takes more than the running sum marks the sample as varied.
        self.last_varied = self.noise_on;
        if t1 > self.next_event {
            self.integrate_slow(t0, t1, &mut v);
            self.last_varied = true;
        }
        if t1 > self.fast_idle_until {
            self.add_fast(t0, t1, &mut v);
        }
        if !self.pv.is_empty() {
            self.add_pv(t0, t1, &mut v);
        }
        v
    }

    /// Writes the load without noise of a piece of at most [`FILL_PIECE`] intervals, the
    /// first at index `jf` (as a float), and returns the index after the piece. The parts
    /// are taken one after the other over the whole piece, each sample receiving them in
    /// the order [`SyntheticProfile::clean`] adds them, with the same operations, so the
    /// samples are the same bits; only the bookkeeping is done once per piece.
    fn fill_clean(
        &mut self,
        mut jf: f64,
        t_first_s: f64,
        dt_s: f64,
        piece: &mut [LoadSample],
    ) -> f64 {
        let n = piece.len();
        if n == 0 {
            return jf;
        }
        let dt = self.dt;
        let mut t0s = [0.0; FILL_PIECE];
        // The running sum, taken as it stands up to its next event; a sample with an event
        // inside gets the parts that change integrated.
        let mut i = 0;
        while i < n {
            let (steady, next) = (self.steady, self.next_event);
            while i < n {
                let t0 = t_first_s + jf * dt_s;
                t0s[i] = t0;
                if t0 + dt > next {
                    break;
                }
                jf += 1.0;
                put(&mut piece[i], &steady);
                i += 1;
            }
            if i == n {
                break;
            }
            let t0 = t0s[i];
            jf += 1.0;
            let mut v = self.steady;
            self.integrate_slow(t0, t0 + dt, &mut v);
            put(&mut piece[i], &v);
            i += 1;
        }
        let t0s = &t0s[..n];
        self.add_fast_piece(t0s, piece);
        if !self.pv.is_empty() {
            self.add_pv_piece(t0s, piece);
        }
        jf
    }

    /// Adds the PV output to a piece whose intervals start at `t0s`. With one array,
    /// the intervals in its night are passed over together, and so are those in daylight
    /// that stay on one straight piece of the curve without a cloud switching inside;
    /// each of the others is taken as [`SyntheticProfile::add_pv`] takes it.
    fn add_pv_piece(&mut self, t0s: &[f64], piece: &mut [LoadSample]) {
        let dt = self.dt;
        let half = 0.5 * dt;
        let n = t0s.len();
        let mut i = 0;
        while i < n {
            if self.pv.len() == 1 {
                // Night: nothing to add while the midpoint is before the next sunrise.
                while i < n && t0s[i] + half < self.pv_idle_until {
                    i += 1;
                }
                if i == n {
                    break;
                }
                let a = &self.pv[0];
                let tm = t0s[i] + half;
                if a.lit && tm >= a.from && tm < a.to {
                    let (pa, pb, from, to, peak) = (a.a, a.b, a.from, a.to, a.peak);
                    let (cloud_next, cf) = match &a.clouds {
                        Some(c) => (c.next, if c.shaded { 1.0 - c.depth } else { 1.0 }),
                        None => (f64::INFINITY, 1.0),
                    };
                    let clouds = a.clouds.is_some();
                    let start = i;
                    while i < n {
                        let t0 = t0s[i];
                        let tm = t0 + half;
                        if tm >= to || t0 + dt > cloud_next {
                            break;
                        }
                        let mut f = pa + pb * (tm - from);
                        if clouds {
                            f *= cf;
                        }
                        add(&mut piece[i], &std::array::from_fn(|c| f * peak[c]));
                        i += 1;
                    }
                    if i > start {
                        self.pv_idle_until = f64::NEG_INFINITY;
                        self.last_varied = true;
                        continue;
                    }
                }
            }
            let t0 = t0s[i];
            let mut v = get(&piece[i]);
            self.add_pv(t0, t0 + dt, &mut v);
            put(&mut piece[i], &v);
            i += 1;
        }
    }

    /// Adds the groups summed every sample to a piece whose intervals start at `t0s`. When
    /// no gate changes inside the piece and a group runs (so that every sample takes the
    /// groups), each group is walked from one switching to the next: a sample without a
    /// switching adds the running units' load, worked out once per switching.
    fn add_fast_piece(&mut self, t0s: &[f64], piece: &mut [LoadSample]) {
        let (dt, inv_dt) = (self.dt, self.inv_dt);
        let last_t1 = t0s[t0s.len() - 1] + dt;
        if last_t1 <= self.fast_idle_until {
            return;
        }
        let no_gate_change = self.fast.iter().all(|g| g.gate.next >= last_t1);
        let one_runs = self.fast.iter().any(|g| g.gate.state != 0);
        if !(no_gate_change && one_runs) {
            for (s, &t0) in piece.iter_mut().zip(t0s) {
                let t1 = t0 + dt;
                if t1 > self.fast_idle_until {
                    let mut v = get(s);
                    self.add_fast(t0, t1, &mut v);
                    put(s, &v);
                }
            }
            return;
        }
        let n = t0s.len();
        for g in &mut self.fast {
            let unit = g.unit;
            let scaled = |m: f64| std::array::from_fn::<f64, 6, _>(|c| m * unit[c]);
            let mut nu = scaled(g.n_on);
            let mut i = 0;
            loop {
                // Intervals that end at or before the next switching take the units
                // running now: n_on·unit, as `mean_every_sample` gives n_on exactly then.
                let te = g.events[g.pos].0;
                while i < n && te >= t0s[i] + dt {
                    add(&mut piece[i], &nu);
                    i += 1;
                }
                if i == n {
                    break;
                }
                let t0 = t0s[i];
                let m = g.mean_every_sample(&self.cal, t0, t0 + dt, inv_dt);
                let mut v = get(&piece[i]);
                axpy(&mut v, m, &unit);
                put(&mut piece[i], &v);
                nu = scaled(g.n_on);
                i += 1;
            }
        }
        self.fast_idle_until = self.fast_idle();
    }

    /// Adds the groups summed every sample over [t0, t1) to `v` and marks the sample as
    /// varied.
    #[inline(always)]
    fn add_fast(&mut self, t0: f64, t1: f64, v: &mut [f64; 6]) {
        for g in &mut self.fast {
            self.last_varied = true;
            let m = g.mean_every_sample(&self.cal, t0, t1, self.inv_dt);
            axpy(v, m, &g.unit);
        }
        self.fast_idle_until = self.fast_idle();
    }

    /// Run time before which every group summed every sample is shut by its gate, or −∞.
    #[inline(always)]
    fn fast_idle(&self) -> f64 {
        let mut idle_until = f64::INFINITY;
        for g in &self.fast {
            idle_until = fmin(
                idle_until,
                if g.gate.state == 0 {
                    g.gate.next
                } else {
                    f64::NEG_INFINITY
                },
            );
        }
        idle_until
    }

    /// Whether interval j would take the running sum alone, as the last sample did: it
    /// ends no later than the next event of the running sum and of the groups summed
    /// every sample (shut by their gates), and its midpoint falls in the PV arrays'
    /// night. The times are those of the engine's grid, computed the same way.
    #[inline]
    fn quiet_at(&self, j: u64) -> bool {
        let t0 = self.t_first + j as f64 * self.dt;
        let t1 = t0 + self.dt;
        let tm = t0 + 0.5 * self.dt;
        t1 <= self.next_event
            && t1 <= self.fast_idle_until
            && (self.pv.is_empty() || tm < self.pv_idle_until)
    }
}

impl LoadSource for SyntheticProfile {
    /// Writes the mean load over [t_s, t_s + Δt). Intervals must come in order; `k` is not
    /// used, the time is.
    #[inline]
    fn sample(&mut self, _k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let mut v = self.clean(t_s);
        if self.noise_on {
            let f = self.noise.six(&mut self.noise_rng);
            for (vi, fi) in v.iter_mut().zip(f) {
                *vi *= fi;
            }
        }
        out.p_kw.copy_from_slice(&v[..3]);
        out.q_kvar.copy_from_slice(&v[3..]);
        Ok(())
    }

    /// With measurement noise every sample varies, so nothing is promised and the samples
    /// are written without asking: the load of the whole chunk first, then its noise, in
    /// the order `sample` draws it (the noise has its own random stream, so the samples
    /// are the same bits); otherwise as the default, one `sample` at a time.
    fn fill(
        &mut self,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        out: &mut [LoadSample],
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        // j as a float, counted along: exact, so the times are `t_first_s + j as f64 * dt_s`.
        let mut jf = k as f64;
        if self.noise_on {
            for piece in out.chunks_mut(FILL_PIECE) {
                jf = self.fill_clean(jf, t_first_s, dt_s, piece);
            }
            self.noise.apply(&mut self.noise_rng, out);
            self.last_varied = true;
            return (out.len(), None);
        }
        for (i, s) in out.iter_mut().enumerate() {
            let j = k + i as u64;
            let t_s = t_first_s + jf * dt_s;
            jf += 1.0;
            let v = self.clean(t_s);
            s.p_kw.copy_from_slice(&v[..3]);
            s.q_kvar.copy_from_slice(&v[3..]);
            if stop_at_hold && self.unchanged_until(j) > j + 1 {
                return (i + 1, None);
            }
        }
        (out.len(), None)
    }

    /// After a sample that took the running sum alone (no event inside, no group summed
    /// every sample running, every PV array dark, no noise), every later interval that
    /// again takes the running sum alone repeats it bit for bit; the first that may not
    /// is returned. Otherwise k + 1. Assumes the grid t_k = t_first + k·Δt of the
    /// constructor's arguments, as the engine uses.
    fn unchanged_until(&self, k: u64) -> u64 {
        if self.last_varied || !self.quiet_at(k + 1) {
            return k + 1;
        }
        // The quiet intervals form a run from k + 1 (the interval times grow with the
        // index). No interval past 2^51 is promised: no run is that long, and indices
        // stay exact in floating point below it.
        const CAP: u64 = 1 << 51;
        if k + 1 >= CAP {
            return k + 1;
        }
        // Estimate where the run ends from the bounds, then make sure: `lo` is quiet,
        // and `hi` is not (or is past the cap).
        let mut bound = fmin(self.next_event, self.fast_idle_until) - self.dt;
        if !self.pv.is_empty() {
            bound = fmin(bound, self.pv_idle_until - 0.5 * self.dt);
        }
        let est = ((bound - self.t_first) * self.inv_dt).floor();
        let est = if est >= CAP as f64 {
            CAP
        } else if est > (k + 1) as f64 {
            est as u64
        } else {
            k + 1
        };
        let (mut lo, mut hi) = (k + 1, CAP + 1);
        if self.quiet_at(est) {
            if est == CAP || !self.quiet_at(est + 1) {
                return est + 1;
            }
            lo = est + 1;
        } else {
            // est > k + 1 here, since interval k + 1 is quiet.
            if self.quiet_at(est - 1) {
                return est;
            }
            hi = est - 1;
        }
        while hi - lo > 1 {
            let mid = lo + (hi - lo) / 2;
            if self.quiet_at(mid) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        lo + 1
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::timebase::parse_start;
    use num_complex::Complex64;

    fn monday() -> Calendar {
        // 2026-03-02 is a Monday.
        Calendar::elapsed_from(parse_start("2026-03-02").unwrap())
    }

    /// The line-to-line split must match the phasor calculation S_x = V_x·conj(I),
    /// S_y = V_y·conj(−I) for a load S = V_xy·conj(I) between phases x and y.
    #[test]
    fn line_to_line_split_matches_phasors() {
        let v = [
            Complex64::from_polar(1.0, 0.0),
            Complex64::from_polar(1.0, -2.0 * std::f64::consts::PI / 3.0),
            Complex64::from_polar(1.0, 2.0 * std::f64::consts::PI / 3.0),
        ];
        let s = Complex64::new(30.0, 40.0);
        for (phase, x, y) in [(Phase::Ab, 0, 1), (Phase::Bc, 1, 2), (Phase::Ca, 2, 0)] {
            let i = (s / (v[x] - v[y])).conj();
            let sx = v[x] * i.conj();
            let sy = v[y] * (-i).conj();
            let got = phase_vector(phase, s.re, s.im);
            assert!((got[x] - sx.re).abs() < 1e-9 && (got[x + 3] - sx.im).abs() < 1e-9);
            assert!((got[y] - sy.re).abs() < 1e-9 && (got[y + 3] - sy.im).abs() < 1e-9);
            let z = 3 - x - y;
            assert_eq!((got[z], got[z + 3]), (0.0, 0.0));
        }
    }

    #[test]
    fn three_and_single_phase_split() {
        assert_eq!(
            phase_vector(Phase::Abc, 30.0, 12.0),
            [10.0, 10.0, 10.0, 4.0, 4.0, 4.0]
        );
        assert_eq!(
            phase_vector(Phase::C, 30.0, 12.0),
            [0.0, 0.0, 30.0, 0.0, 0.0, 12.0]
        );
    }

    #[test]
    fn streams_differ_by_part_and_seed() {
        let mut a = stream(1, STREAM_MACHINE, 0);
        let mut b = stream(1, STREAM_MACHINE, 1);
        let mut c = stream(1, STREAM_WELDER, 0);
        let mut d = stream(2, STREAM_MACHINE, 0);
        let x: Vec<u64> = [&mut a, &mut b, &mut c, &mut d]
            .into_iter()
            .map(|r| r.random())
            .collect();
        for i in 0..x.len() {
            for j in i + 1..x.len() {
                assert_ne!(x[i], x[j]);
            }
        }
    }

    #[test]
    fn pv_curve_pieces_follow_the_bell() {
        let cfg = SyntheticConfig {
            base: BaseLoad {
                kw: 0.0,
                ..BaseLoad::default()
            },
            pv: vec![PvArray {
                peak_kw: 100.0,
                sunrise_h: 5.25,
                sunset_h: 13.5,
                ..PvArray::default()
            }],
            ..SyntheticConfig::default()
        };
        let (rise, set) = (5.25 * 3600.0, 13.5 * 3600.0);
        for dt in [1.0, 37.0, 900.0] {
            let mut p = SyntheticProfile::new(&cfg, 1, monday(), 0.0, dt);
            let mut s = LoadSample::default();
            for k in 0..(2.0 * DAY_S / dt) as u64 {
                let t = k as f64 * dt;
                p.sample(k, t, &mut s).unwrap();
                let sod = (t + 0.5 * dt) % DAY_S;
                let exact = if sod > rise && sod < set {
                    let y = (sod - 0.5 * (rise + set)) / (set - rise);
                    100.0 * (std::f64::consts::PI * y).cos().powi(2)
                } else {
                    0.0
                };
                assert!((-s.p_total() - exact).abs() < 1.2e-3, "dt {dt} t {t}");
            }
        }
    }

    /// A fixed cycle runs exactly `on_s` in every `on_s + off_s`, whatever Δt.
    #[test]
    fn fixed_cycle_integrates_exactly() {
        let cfg = SyntheticConfig {
            base: BaseLoad {
                kw: 0.0,
                ..BaseLoad::default()
            },
            machines: vec![MachineGroup {
                units: 1,
                kw: 12.0,
                pf: 1.0,
                cycle: DutyCycle::Fixed,
                on_s: 100.0,
                off_s: 300.0,
                ..MachineGroup::default()
            }],
            ..SyntheticConfig::default()
        };
        for dt in [0.5, 8.0, 400.0] {
            let mut p = SyntheticProfile::new(&cfg, 9, monday(), 0.0, dt);
            let mut s = LoadSample::default();
            let n = (40_000.0 / dt) as u64;
            let mut e = 0.0;
            for k in 0..n {
                p.sample(k, k as f64 * dt, &mut s).unwrap();
                e += s.p_total() * dt;
            }
            // 40 000 s is 100 whole cycles: 100 × 100 s × 12 kW.
            assert!((e - 120_000.0).abs() < 1e-6 * 120_000.0, "dt {dt}: {e}");
        }
    }

    #[test]
    fn unvalidated_values_do_not_hang() {
        let cfg = SyntheticConfig {
            machines: vec![MachineGroup {
                on_s: -5.0,
                off_s: f64::NAN,
                pf: 7.0,
                ..MachineGroup::default()
            }],
            welders: vec![WelderGroup {
                burst_s: 0.0,
                pause_s: -1.0,
                runs: RunWhen::Always,
                ..WelderGroup::default()
            }],
            pv: vec![PvArray {
                sunrise_h: 30.0,
                sunset_h: -3.0,
                ..PvArray::default()
            }],
            ..SyntheticConfig::default()
        };
        let mut p = SyntheticProfile::new(&cfg, 1, monday(), 0.0, f64::NAN);
        let mut s = LoadSample::default();
        for k in 0..1000 {
            p.sample(k, k as f64, &mut s).unwrap();
            assert!(s.p_total().is_finite() && s.q_total().is_finite());
        }
    }
}

//! Seeded synthetic load generator: a site's per-phase P and Q built from parts a plant
//! engineer recognises — a base load with shift, night and weekend levels, groups of
//! machines that switch on and off at random or on a fixed cycle, welders with
//! second-scale bursts, rooftop PV with passing clouds, and measurement noise.
//!
//! This module owns the `[load.synthetic]` scenario table ([`SyntheticConfig`] and its
//! parts, validated by [`SyntheticConfig::validate`]) and the generator
//! ([`SyntheticProfile`], a [`LoadSource`]).
//!
//! # What a sample means
//!
//! Sample k is the **mean load over its interval** [t_k, t_k + Δt). Switching of machine
//! and welder units, shift and window boundaries, base-load level changes and cloud
//! shading are events at exact times, drawn from the seed independently of Δt, and their
//! effect is integrated exactly over the interval: a 1 s weld inside a 15 min interval
//! adds 1/900 of its power to that sample, so energy is right at any Δt. The PV day curve
//! is smooth and is taken at the interval's midpoint. Measurement noise is drawn afresh
//! for every sample.
//!
//! # Reproducibility
//!
//! The same configuration, seed, calendar, start and Δt give bit-identical samples. Every
//! unit, every cloud process and the noise draw from their own random stream derived from
//! the seed and the part's place in the file, so adding a welder group or changing Δt does
//! not change when the compressors run.
//!
//! # Speed
//!
//! Per-sample work is a comparison against the next event time when nothing switches;
//! only when an event falls inside the interval are the affected groups integrated. PV
//! evaluates a short polynomial for its day curve against a cached day start; noise
//! takes six quantised normal draws from two random numbers (see `noise`). Groups that
//! switch often compared with Δt (welders) are summed every sample; the others are kept
//! in a running sum refreshed only when one of them switches. `sample` never allocates.

mod config;
mod noise;
mod schedule;

pub use config::{
    parse_window, BaseLoad, Clouds, DayList, DutyCycle, InverterReactive, MachineGroup, Phase,
    PvArray, RunWhen, ShiftPattern, SyntheticConfig, WelderGroup,
};

use crate::error::ProfileError;
use crate::pf::tan_phi_of;
use crate::profile::{LoadSample, LoadSource};
use crate::timebase::{Calendar, DAY_S};
use noise::FastNormal;
use rand::{Rng, SeedableRng};
use rand_distr::Exp1;
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

/// The random stream of one part: `family` says the kind, `group` and `unit` its place.
fn stream(seed: u64, family: u64, group: usize, unit: usize) -> Xoshiro256PlusPlus {
    let id = (family << 56) ^ ((group as u64) << 28) ^ (unit as u64);
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

/// How a unit alternates between running and standing.
#[derive(Debug, Clone, Copy)]
enum Cycle {
    /// Exponential run and stand times with these means, s.
    Random { on: f64, off: f64 },
    /// Exactly these run and stand times, s.
    Fixed { on: f64, off: f64 },
}

impl Cycle {
    /// Mean run and stand times, s.
    fn times(self) -> (f64, f64) {
        match self {
            Cycle::Random { on, off } | Cycle::Fixed { on, off } => (on, off),
        }
    }

    /// Length of the next spell in the given state, s.
    #[inline]
    fn spell(self, running: bool, rng: &mut Xoshiro256PlusPlus) -> f64 {
        match self {
            Cycle::Random { on, off } => {
                let mean = if running { on } else { off };
                let e: f64 = rng.sample(Exp1);
                mean * e
            }
            Cycle::Fixed { on, off } => {
                if running {
                    on
                } else {
                    off
                }
            }
        }
    }

    /// A unit's state at the start of a run period beginning at `t`, and its first
    /// switching time.
    fn start(self, t: f64, rng: &mut Xoshiro256PlusPlus) -> (bool, f64) {
        let (on, off) = self.times();
        if off <= 0.0 {
            return (true, f64::INFINITY);
        }
        match self {
            Cycle::Random { .. } => {
                // Start in the long-run odds; spells are memoryless, so the rest of the
                // first spell is a full exponential spell.
                let running = rng.random::<f64>() * (on + off) < on;
                (running, t + self.spell(running, rng))
            }
            Cycle::Fixed { .. } => {
                // Start at a random point of the cycle.
                let phase = rng.random::<f64>() * (on + off);
                if phase < on {
                    (true, t + (on - phase))
                } else {
                    (false, t + (on + off - phase))
                }
            }
        }
    }

    /// Expected switchings per second of one unit.
    fn event_rate(self) -> f64 {
        let (on, off) = self.times();
        if off <= 0.0 {
            0.0
        } else {
            2.0 / (on + off)
        }
    }
}

/// One machine or welder unit.
#[derive(Debug, Clone)]
struct Unit {
    /// Whether it runs (or welds) now.
    on: bool,
    /// Run time of its next switching (infinite while it cannot switch).
    next: f64,
    /// Its own random stream.
    rng: Xoshiro256PlusPlus,
}

/// A group of identical units that switch independently while a gate lets them run.
/// While the gate is shut every unit stands; when it opens each unit starts afresh (in
/// the long-run odds for a random cycle, at a random point of a fixed cycle).
#[derive(Debug, Clone)]
struct Group {
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]` of one running unit.
    unit: [f64; 6],
    /// When the group may run (state 1) or not (0).
    gate: Clock,
    cycle: Cycle,
    units: Vec<Unit>,
    /// Units running now (0 while the gate is shut).
    n_on: u32,
    /// Earliest next switching of any unit.
    units_next: f64,
    /// Earliest of `units_next` and the gate's next change.
    next_ev: f64,
    /// `n_on` as a number, for the per-sample sum.
    n_on_f: f64,
}

impl Group {
    fn new(unit: [f64; 6], gate: Clock, cycle: Cycle, units: Vec<Unit>, t0: f64) -> Self {
        let mut g = Group {
            unit,
            gate,
            cycle,
            units,
            n_on: 0,
            units_next: f64::INFINITY,
            next_ev: f64::INFINITY,
            n_on_f: 0.0,
        };
        if g.gate.state != 0 {
            g.start_units(t0);
        }
        g.settle();
        g
    }

    /// The gate opens at `t`: every unit starts afresh.
    fn start_units(&mut self, t: f64) {
        let cycle = self.cycle;
        let mut n_on = 0;
        let mut next = f64::INFINITY;
        for u in &mut self.units {
            let (on, first) = cycle.start(t, &mut u.rng);
            u.on = on;
            u.next = first;
            n_on += u32::from(on);
            next = next.min(first);
        }
        self.n_on = n_on;
        self.units_next = next;
    }

    /// The gate shuts: every unit stands.
    fn stop_units(&mut self) {
        for u in &mut self.units {
            u.on = false;
            u.next = f64::INFINITY;
        }
        self.n_on = 0;
        self.units_next = f64::INFINITY;
    }

    /// Refreshes the cached next event and running count after a change.
    fn settle(&mut self) {
        self.next_ev = self.units_next.min(self.gate.next);
        self.n_on_f = f64::from(self.n_on);
    }

    /// Unit-seconds of running over [x, y), switching every unit whose time comes
    /// before y.
    fn run_units(&mut self, x: f64, y: f64) -> f64 {
        let mut integral = f64::from(self.n_on) * (y - x);
        if self.units_next < y {
            let cycle = self.cycle;
            let mut n_on = self.n_on;
            let mut next = f64::INFINITY;
            for u in &mut self.units {
                while u.next < y {
                    let te = u.next.max(x);
                    if u.on {
                        integral -= y - te;
                        n_on -= 1;
                    } else {
                        integral += y - te;
                        n_on += 1;
                    }
                    u.on = !u.on;
                    u.next += cycle.spell(u.on, &mut u.rng);
                }
                next = next.min(u.next);
            }
            self.n_on = n_on;
            self.units_next = next;
        }
        integral
    }

    /// Mean number of running units over [t0, t1); afterwards the group stands at t1.
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
            let y = self.gate.next.min(t1);
            acc += self.run_units(x, y);
            if y >= t1 {
                break;
            }
            x = y;
        }
        self.settle();
        acc / (t1 - t0)
    }

    /// Mean number of running units over [t0, t1), integrating only when an event falls
    /// inside.
    #[inline]
    fn mean(&mut self, cal: &Calendar, t0: f64, t1: f64) -> f64 {
        if self.next_ev < t1 {
            self.integrate(cal, t0, t1)
        } else {
            self.n_on_f
        }
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
            let y = self.clock.next.min(t1);
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
    rng: Xoshiro256PlusPlus,
}

impl CloudState {
    /// Output factor over [t0, t1): 1 − depth × shaded share of the interval.
    #[inline]
    fn factor(&mut self, t0: f64, t1: f64, inv_dt: f64) -> f64 {
        if self.next >= t1 {
            return if self.shaded { 1.0 - self.depth } else { 1.0 };
        }
        let mut shaded_t = if self.shaded { t1 - t0 } else { 0.0 };
        while self.next < t1 {
            let te = self.next.max(t0);
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
            let e: f64 = self.rng.sample(Exp1);
            self.next += mean * e;
        }
        1.0 - self.depth * (shaded_t * inv_dt).clamp(0.0, 1.0)
    }
}

/// The clear-sky PV day curve cos²(πy) for y = −½ (sunrise) … ½ (sunset), a smooth bell
/// with zero slope at both ends, from a short Taylor polynomial of cos (error below
/// 3e-5 of the peak; at sunrise and sunset it is clamped to 0).
#[inline]
fn pv_bell(y: f64) -> f64 {
    let z = std::f64::consts::PI * y;
    let w = z * z;
    let c = 1.0 + w * (-1.0 / 2.0 + w * (1.0 / 24.0 + w * (-1.0 / 720.0 + w * (1.0 / 40_320.0))));
    let c = c.max(0.0);
    c * c
}

/// One PV array.
#[derive(Debug, Clone)]
struct Pv {
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]` at peak output (P negative: generation).
    peak: [f64; 6],
    /// Solar noon, seconds of the day.
    noon_s: f64,
    /// 1 / (sunset − sunrise), 1/s.
    inv_len: f64,
    clouds: Option<CloudState>,
}

/// The seeded synthetic load profile: a [`LoadSource`] built from a validated
/// [`SyntheticConfig`]. See the module documentation for what a sample means.
#[derive(Debug, Clone)]
pub struct SyntheticProfile {
    /// Interval length Δt, s.
    dt: f64,
    inv_dt: f64,
    /// Base load plus the groups kept in the running sum, in force now,
    /// `[Pa, Pb, Pc, Qa, Qb, Qc]`.
    steady: [f64; 6],
    /// Earliest run time at which the base level or a group in the running sum may change.
    next_event: f64,
    /// Groups that switch often compared with Δt, summed every sample.
    fast: Vec<Group>,
    pv: Vec<Pv>,
    /// Run time of the start and end of the day holding the last PV midpoint.
    day_start: f64,
    day_end: f64,
    /// Relative noise, one standard deviation (0 for none).
    noise_sigma: f64,
    noise: FastNormal,
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
        let units = |family: u64, g: usize, n: u32| -> Vec<Unit> {
            (0..n as usize)
                .map(|u| Unit {
                    on: false,
                    next: f64::INFINITY,
                    rng: stream(seed, family, g, u),
                })
                .collect()
        };
        let (mut fast, mut slow) = (Vec::new(), Vec::new());
        let mut place = |g: Group| {
            let rate = g.cycle.event_rate() * g.units.len() as f64;
            if rate * dt > FAST_EVENTS_PER_INTERVAL {
                fast.push(g);
            } else {
                slow.push(g);
            }
        };
        for (g, m) in cfg.machines.iter().enumerate() {
            let (on, off) = (sane_on(m.on_s), sane_off(m.off_s));
            let cycle = match m.cycle {
                DutyCycle::Random => Cycle::Random { on, off },
                DutyCycle::Fixed => Cycle::Fixed { on, off },
            };
            place(Group::new(
                unit_vector(m.phase, m.kw, m.pf),
                gate_for(m.runs, &m.window, &m.window_days),
                cycle,
                units(STREAM_MACHINE, g, m.units),
                t0,
            ));
        }
        for (g, w) in cfg.welders.iter().enumerate() {
            let cycle = Cycle::Random {
                on: sane_on(w.burst_s),
                off: sane_off(w.pause_s),
            };
            place(Group::new(
                unit_vector(w.phase, w.kw, w.pf),
                gate_for(w.runs, &w.window, &w.window_days),
                cycle,
                units(STREAM_WELDER, g, w.units),
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
                    let mut rng = stream(seed, STREAM_CLOUD, i, 0);
                    let clear_s = sane_on(c.clear_s);
                    let shade_s = sane_on(c.shade_s);
                    let shaded = rng.random::<f64>() * (clear_s + shade_s) < shade_s;
                    let e: f64 = rng.sample(Exp1);
                    let next = t0 + e * if shaded { shade_s } else { clear_s };
                    CloudState {
                        shaded,
                        next,
                        clear_s,
                        shade_s,
                        depth: finite_or(c.depth, 0.0).clamp(0.0, 1.0),
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
                    noon_s: 0.5 * (rise_s + set_s),
                    inv_len: if set_s > rise_s {
                        1.0 / (set_s - rise_s)
                    } else {
                        0.0
                    },
                    clouds,
                }
            })
            .collect();

        let mut prof = SyntheticProfile {
            dt,
            inv_dt: 1.0 / dt,
            steady: [0.0; 6],
            next_event: f64::INFINITY,
            fast,
            pv,
            day_start: f64::INFINITY,
            day_end: f64::NEG_INFINITY,
            noise_sigma: finite_or(cfg.noise_percent, 0.0).clamp(0.0, 100.0) / 100.0,
            noise: FastNormal::new(),
            noise_rng: stream(seed, STREAM_NOISE, 0, 0),
            cal,
            base,
            slow,
        };
        prof.refresh_steady();
        prof
    }

    /// Recomputes the running sum and its next event time from the parts in it.
    fn refresh_steady(&mut self) {
        let mut s = *self.base.steady();
        let mut next = self.base.clock.next;
        for g in &self.slow {
            axpy(&mut s, g.n_on_f, &g.unit);
            next = next.min(g.next_ev);
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
                let before = g.n_on_f;
                let d = g.integrate(&self.cal, t0, t1) - before;
                axpy(v, d, &g.unit);
            }
        }
        self.refresh_steady();
    }

    /// Adds the PV output of [t0, t1) to `v`.
    #[inline]
    fn add_pv(&mut self, t0: f64, t1: f64, v: &mut [f64; 6]) {
        let tm = t0 + 0.5 * self.dt;
        if !(tm >= self.day_start && tm < self.day_end) {
            let day = (self.cal.epoch(tm) / DAY_S).floor();
            self.day_start = day * DAY_S - self.cal.offset_s;
            self.day_end = self.day_start + DAY_S;
        }
        let sod = tm - self.day_start;
        let inv_dt = self.inv_dt;
        for a in &mut self.pv {
            let y = (sod - a.noon_s) * a.inv_len;
            let mut f = if y.abs() < 0.5 { pv_bell(y) } else { 0.0 };
            if let Some(c) = &mut a.clouds {
                f *= c.factor(t0, t1, inv_dt);
            }
            if f > 0.0 {
                axpy(v, f, &a.peak);
            }
        }
    }
}

impl LoadSource for SyntheticProfile {
    /// Writes the mean load over [t_s, t_s + Δt). Intervals must come in order; `k` is not
    /// used, the time is.
    #[inline]
    fn sample(&mut self, _k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let t0 = t_s;
        let t1 = t_s + self.dt;
        let mut v = self.steady;
        if t1 > self.next_event {
            self.integrate_slow(t0, t1, &mut v);
        }
        for g in &mut self.fast {
            let m = g.mean(&self.cal, t0, t1);
            axpy(&mut v, m, &g.unit);
        }
        if !self.pv.is_empty() {
            self.add_pv(t0, t1, &mut v);
        }
        if self.noise_sigma > 0.0 {
            let n = self.noise.six(&mut self.noise_rng);
            for (vi, ni) in v.iter_mut().zip(n) {
                *vi *= 1.0 + self.noise_sigma * ni;
            }
        }
        out.p_kw.copy_from_slice(&v[..3]);
        out.q_kvar.copy_from_slice(&v[3..]);
        Ok(())
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
        let mut a = stream(1, STREAM_MACHINE, 0, 0);
        let mut b = stream(1, STREAM_MACHINE, 0, 1);
        let mut c = stream(1, STREAM_WELDER, 0, 0);
        let mut d = stream(2, STREAM_MACHINE, 0, 0);
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
    fn bell_shape() {
        assert!((pv_bell(0.0) - 1.0).abs() < 1e-12);
        assert!(pv_bell(0.5) < 1e-4 && pv_bell(-0.5) < 1e-4);
        for i in 0..100 {
            let y = -0.5 + i as f64 / 100.0;
            let exact = (std::f64::consts::PI * y).cos().powi(2);
            assert!((pv_bell(y) - exact).abs() < 3e-5);
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

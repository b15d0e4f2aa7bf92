//! The capacitor bank: its steps (size, phase, detuning, fixed or switched, contactor
//! life, injected faults) and the per-phase susceptance of any set of connected steps.
//!
//! A bank state is a [`BankState`], the set of connected steps. Steps are numbered from 1
//! in scenario order, fixed steps included; at most [`MAX_STEPS`].

use serde::{Serialize, Serializer};

/// Time the usual discharge device of IEC 60831-1 takes to bring a capacitor down to 75 V:
/// 3 min (from memory), s.
pub const IEC_DISCHARGE_S: f64 = 180.0;

/// Largest number of steps in one bank (the width of a state mask).
pub const MAX_STEPS: usize = 64;

/// A bank state: the set of connected steps.
///
/// Steps are numbered from 1 in scenario order, fixed steps included; internally bit i
/// stands for step i + 1, so a bank has at most [`MAX_STEPS`] steps. Iteration yields step
/// numbers in ascending order. States order as their bits do (step 1 the lowest bit).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Default)]
pub struct BankState(u64);

impl BankState {
    /// No step connected.
    pub const EMPTY: BankState = BankState(0);

    /// The state whose bit i stands for step i + 1.
    pub const fn from_bits(bits: u64) -> Self {
        BankState(bits)
    }

    /// The bits of the state (bit i: step i + 1).
    pub const fn bits(self) -> u64 {
        self.0
    }

    /// Every one of the first `n` steps.
    pub fn first(n: usize) -> Self {
        if n >= 64 {
            BankState(u64::MAX)
        } else {
            BankState((1u64 << n) - 1)
        }
    }

    /// The state with the given step numbers (from 1).
    pub fn of_steps(numbers: &[usize]) -> Self {
        numbers.iter().copied().collect()
    }

    /// The steps of `steps` (numbered from 1 in their order) for which `keep` is true.
    pub fn select(steps: &[StepSpec], keep: impl Fn(&StepSpec) -> bool) -> Self {
        steps
            .iter()
            .enumerate()
            .filter(|(_, s)| keep(s))
            .map(|(i, _)| i + 1)
            .collect()
    }

    /// True when step `number` (from 1) is connected.
    pub fn contains(self, number: usize) -> bool {
        (1..=MAX_STEPS).contains(&number) && self.0 & (1u64 << (number - 1)) != 0
    }

    /// The state with step `number` (1 to [`MAX_STEPS`]) connected as well.
    pub fn with(self, number: usize) -> Self {
        BankState(self.0 | (1u64 << (number - 1)))
    }

    /// The state with step `number` (1 to [`MAX_STEPS`]) open.
    pub fn without(self, number: usize) -> Self {
        BankState(self.0 & !(1u64 << (number - 1)))
    }

    /// The lowest-numbered connected step, if any.
    pub fn lowest(self) -> Option<usize> {
        (self.0 != 0).then(|| self.0.trailing_zeros() as usize + 1)
    }

    /// The highest-numbered connected step, if any.
    pub fn highest(self) -> Option<usize> {
        (self.0 != 0).then(|| MAX_STEPS - self.0.leading_zeros() as usize)
    }

    /// Number of connected steps.
    pub fn len(self) -> usize {
        self.0.count_ones() as usize
    }

    /// True when no step is connected.
    pub fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// Steps in both states.
    pub fn and(self, other: BankState) -> Self {
        BankState(self.0 & other.0)
    }

    /// Steps in either state.
    pub fn or(self, other: BankState) -> Self {
        BankState(self.0 | other.0)
    }

    /// Steps in `self` but not in `other`.
    pub fn minus(self, other: BankState) -> Self {
        BankState(self.0 & !other.0)
    }

    /// The connected step numbers (from 1), ascending.
    pub fn iter(self) -> StepNumbers {
        StepNumbers(self.0)
    }

    /// The connected step numbers (from 1) as a vector.
    pub fn numbers(self) -> Vec<usize> {
        self.iter().collect()
    }

    /// Nominal kvar at U_n of the connected steps of `steps` (what the controller
    /// believes the state delivers).
    pub fn kvar(self, steps: &[StepSpec]) -> f64 {
        self.iter()
            .filter_map(|n| steps.get(n - 1))
            .fold(0.0, |q, s| q + s.kvar)
    }

    /// The state as people write it: step numbers joined by `+` (`1+2+5`), or `none`.
    pub fn label(self) -> String {
        crate::text::join_steps(self)
    }
}

/// A state serializes as its bits (bit i: step i + 1), the form JSON has always had.
impl Serialize for BankState {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_u64(self.0)
    }
}

impl std::fmt::Display for BankState {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.label())
    }
}

/// Iterator over the step numbers (from 1) of a [`BankState`], ascending.
#[derive(Debug, Clone)]
pub struct StepNumbers(u64);

impl Iterator for StepNumbers {
    type Item = usize;
    #[inline]
    fn next(&mut self) -> Option<usize> {
        if self.0 == 0 {
            return None;
        }
        let i = self.0.trailing_zeros() as usize;
        self.0 &= self.0 - 1;
        Some(i + 1)
    }
}

/// The state with the step numbers (from 1) given.
impl FromIterator<usize> for BankState {
    fn from_iter<I: IntoIterator<Item = usize>>(numbers: I) -> Self {
        numbers.into_iter().fold(Self::EMPTY, Self::with)
    }
}

impl IntoIterator for BankState {
    type Item = usize;
    type IntoIter = StepNumbers;
    fn into_iter(self) -> StepNumbers {
        self.iter()
    }
}

/// Where and how a step is connected.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StepPhase {
    /// A three-phase step connected in delta (the default), its kvar shared equally by
    /// the phases. It has no path to the neutral, so it carries no zero-sequence current.
    Three,
    /// A three-phase step connected in star with its star point earthed (joined to the
    /// bus neutral), its kvar shared equally by the phases; it carries zero-sequence
    /// current.
    Star,
    /// A single-phase step on phase a, b or c (index 0, 1, 2), connected line to neutral.
    Single(usize),
    /// A single-phase step connected line to line: index 0 between a and b, 1 between b
    /// and c, 2 between c and a (the first line of the pair is the index, the second the
    /// next phase).
    Line(usize),
}

/// √3/2.
const HALF_SQRT3: f64 = 0.866_025_403_784_438_6;

impl StepPhase {
    /// The phases the step is connected to, as scenarios and reports write them: `abc` for
    /// a three-phase step (delta or star), `a`, `b` or `c` line to neutral, `ab`, `bc` or
    /// `ca` line to line.
    pub fn label(self) -> &'static str {
        match self {
            StepPhase::Three | StepPhase::Star => "abc",
            StepPhase::Single(p) => crate::profile::PHASES[p.min(2)],
            StepPhase::Line(p) => ["ab", "bc", "ca"][p.min(2)],
        }
    }

    /// The connection in words, as reports and JSON write it: `delta`, `star`,
    /// `line-to-neutral` or `line-to-line`.
    pub fn connection(self) -> &'static str {
        match self {
            StepPhase::Three => "delta",
            StepPhase::Star => "star",
            StepPhase::Single(_) => "line-to-neutral",
            StepPhase::Line(_) => "line-to-line",
        }
    }

    /// The phases and the connection in a few characters for tables: `abc` for a delta
    /// step (the usual one), `abc star` for an earthed star, else [`StepPhase::label`].
    pub fn describe(self) -> &'static str {
        match self {
            StepPhase::Star => "abc star",
            other => other.label(),
        }
    }

    /// True for a three-phase step (delta or star).
    pub fn is_three_phase(self) -> bool {
        matches!(self, StepPhase::Three | StepPhase::Star)
    }

    /// True when the step carries zero-sequence (and so triplen) current: an earthed
    /// star or a step line to neutral. A delta step or a step line to line has no path
    /// to the neutral.
    pub fn carries_zero_sequence(self) -> bool {
        matches!(self, StepPhase::Star | StepPhase::Single(_))
    }

    /// The phases (index 0 to 2) the step is connected to, as a bit set (bit x: phase x).
    pub fn phase_bits(self) -> u8 {
        match self {
            StepPhase::Three | StepPhase::Star => 0b111,
            StepPhase::Single(p) => 1 << p.min(2),
            StepPhase::Line(p) => (1 << p.min(2)) | (1 << ((p.min(2) + 1) % 3)),
        }
    }

    /// Voltage a step connected this way is rated and given at, on a bus at `u_bus_v`
    /// line to line: the line voltage for a three-phase step (a three-phase unit's
    /// nameplate voltage is line to line, star or delta inside) and for a single-phase
    /// step line to line, the phase voltage for a single-phase step line to neutral, V.
    pub fn connection_voltage_v(self, u_bus_v: f64) -> f64 {
        match self {
            StepPhase::Three | StepPhase::Star | StepPhase::Line(_) => u_bus_v,
            StepPhase::Single(_) => u_bus_v / 3f64.sqrt(),
        }
    }

    /// Rms current in each line a step of `kvar` draws at `u_bus_v` line to line, A:
    /// Q/(√3·U) for a three-phase step, Q/U_ph line to neutral, Q/U line to line.
    pub fn line_current_a(self, kvar: f64, u_bus_v: f64) -> f64 {
        match self {
            StepPhase::Three | StepPhase::Star => kvar * 1e3 / (3f64.sqrt() * u_bus_v),
            StepPhase::Single(_) => kvar * 1e3 / (u_bus_v / 3f64.sqrt()),
            StepPhase::Line(_) => kvar * 1e3 / u_bus_v,
        }
    }
}

/// The shunt admittance of a set of connected steps at the fundamental, in the forms the
/// two bus models take. Steps are lossless, so every part is a susceptance (siemens,
/// > 0 capacitive).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Shunt {
    /// Star-equivalent susceptance on each phase of every step except those line to line,
    /// added in step order: what each phase of the per-phase bus sees of them (a delta
    /// step and an earthed star of the same kvar look alike there). S.
    pub phase: [f64; 3],
    /// The part of `phase` connected line to neutral (earthed star steps and single-phase
    /// steps line to neutral), added in step order. S.
    pub earthed: [f64; 3],
    /// The part of `phase` from delta steps, star equivalent on each phase (the same on
    /// every phase); each of the delta's three branches is a third of it. S.
    pub delta: f64,
    /// Susceptance of the single-phase steps line to line between a and b, b and c, c and
    /// a, S.
    pub line: [f64; 3],
}

impl Shunt {
    /// Adds `other` scaled by `health` (the fraction of capacitance delivering).
    fn add_scaled(&mut self, other: &Shunt, health: f64) {
        for x in 0..3 {
            self.phase[x] += other.phase[x] * health;
            self.earthed[x] += other.earthed[x] * health;
            self.line[x] += other.line[x] * health;
        }
        self.delta += other.delta * health;
    }

    /// The admittance each phase of the per-phase bus sees, G + jB (siemens), with the
    /// phase voltages taken as a balanced positive-sequence set: a step of susceptance B
    /// between x and y draws I = jB·(V_x − V_y) = jB·√3·e^(j30°)·V_x, so phase x sees
    /// B·(−√3/2 + j·3/2) and phase y B·(+√3/2 + j·3/2). Its Q is shared half and half and
    /// its P is +Q/(2√3) on y and −Q/(2√3) on x (S_x = V_x·conj(I), S_y = V_y·conj(−I)),
    /// as a line-to-line load's is. Without steps line to line the conductance is zero
    /// and the susceptance is `phase` exactly. Returns (G, B).
    pub fn per_phase(&self) -> ([f64; 3], [f64; 3]) {
        let mut g = [0.0; 3];
        let mut b = self.phase;
        for x in 0..3 {
            // Pair x starts at phase x; pair (x + 2) % 3 ends at it.
            let before = (x + 2) % 3;
            b[x] += 1.5 * (self.line[x] + self.line[before]);
            g[x] = HALF_SQRT3 * (self.line[before] - self.line[x]);
        }
        (g, b)
    }

    /// True when some step is connected line to line.
    pub fn has_line(&self) -> bool {
        self.line.iter().any(|&b| b != 0.0)
    }
}

/// What an injected fault does to a step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FaultKind {
    /// The step delivers nothing even when its contactor is closed (blown fuses, open
    /// contactor pole).
    Open,
    /// The step has lost this fraction of its capacitance (0 < f < 1): ageing, a failed
    /// element.
    CapacitanceLoss(f64),
    /// The contactor's contacts have welded: from the fault time the step stays connected
    /// whatever the controller commands (a step that was open then is taken as closed
    /// from that time).
    StuckClosed,
}

/// A fault that starts at a given time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fault {
    /// The kind of fault.
    pub kind: FaultKind,
    /// Start, seconds after the start of the run.
    pub from_s: f64,
}

/// One step of the bank.
#[derive(Debug, Clone, PartialEq)]
pub struct StepSpec {
    /// Effective reactive output at U_n, kvar (three-phase total, or of its one phase).
    pub kvar: f64,
    /// Three-phase (delta or earthed star) or single-phase (line to neutral or line to
    /// line).
    pub phase: StepPhase,
    /// Fixed steps are on from the start and never switched by the controller.
    pub fixed: bool,
    /// Detuning reactor ratio p = X_L/X_C at the fundamental, as a fraction (0.07 for 7 %).
    pub detuning: Option<f64>,
    /// Rated electrical life of the contactor, operations.
    pub rated_operations: f64,
    /// Rated voltage of the step's capacitors, V (line to line for a three-phase step and
    /// a single-phase step line to line, line to neutral for a single-phase step line to
    /// neutral). `None`: the default of
    /// [`crate::harmonics::limits::default_rated_voltage`] (U_n for a plain step, the next
    /// standard rating above U/(1 − p) for a detuned one).
    pub capacitor_rated_voltage_v: Option<f64>,
    /// Fault injection, if any.
    pub fault: Option<Fault>,
}

/// Smallest switched step, kvar; the smallest step of all if none is switched. This is the
/// step the default dead band and overcorrection threshold are measured against.
pub fn smallest_switched_kvar(steps: &[StepSpec]) -> f64 {
    let pick = |only_switched: bool| {
        steps
            .iter()
            .filter(|s| !only_switched || !s.fixed)
            .map(|s| s.kvar)
            .fold(f64::INFINITY, f64::min)
    };
    let q = pick(true);
    if q.is_finite() {
        q
    } else {
        pick(false)
    }
}

impl StepSpec {
    /// A plain (undetuned) switched three-phase step of `kvar` with a contactor life of
    /// 100 000 operations (the scenario default), no fault and the default capacitor rating.
    pub fn plain(kvar: f64) -> Self {
        StepSpec {
            kvar,
            phase: StepPhase::Three,
            fixed: false,
            detuning: None,
            rated_operations: 100_000.0,
            capacitor_rated_voltage_v: None,
            fault: None,
        }
    }

    /// Nominal admittance at U_n, siemens: a three-phase step Q/3 per phase at U_ln
    /// (B = Q/U_ll² on each phase, star equivalent; a delta's branches a third of that),
    /// a single-phase step line to neutral Q/U_ln² on its phase, one line to line
    /// Q/U_ll² between its two lines.
    pub fn susceptance(&self, u_n_v: f64) -> Shunt {
        let u_ln2 = u_n_v * u_n_v / 3.0;
        let mut y = Shunt::default();
        match self.phase {
            StepPhase::Three => {
                let b = self.kvar * 1e3 / 3.0 / u_ln2;
                y.phase = [b; 3];
                y.delta = b;
            }
            StepPhase::Star => {
                let b = self.kvar * 1e3 / 3.0 / u_ln2;
                y.phase = [b; 3];
                y.earthed = [b; 3];
            }
            StepPhase::Single(p) => {
                y.phase[p] = self.kvar * 1e3 / u_ln2;
                y.earthed[p] = y.phase[p];
            }
            StepPhase::Line(p) => y.line[p] = self.kvar * 1e3 / (u_n_v * u_n_v),
        }
        y
    }

    /// Voltage across the step's connection on a bus at `u_bus_v` line to line, as its
    /// kvar and rated voltage are given: see [`StepPhase::connection_voltage_v`], V.
    pub fn connection_voltage_v(&self, u_bus_v: f64) -> f64 {
        self.phase.connection_voltage_v(u_bus_v)
    }

    /// Fraction of nominal capacitance delivering at run time `elapsed_s`.
    pub fn health(&self, elapsed_s: f64) -> f64 {
        match self.fault {
            Some(f) if elapsed_s >= f.from_s => match f.kind {
                FaultKind::Open => 0.0,
                FaultKind::CapacitanceLoss(x) => 1.0 - x,
                FaultKind::StuckClosed => 1.0,
            },
            _ => 1.0,
        }
    }
}

/// The bank as the engine sees it: steps, their susceptances and health.
#[derive(Debug, Clone)]
pub struct Bank {
    /// The steps in number order (step n is `steps[n - 1]`).
    pub steps: Vec<StepSpec>,
    nominal_b: Vec<Shunt>,
    health: Vec<f64>,
    /// The fixed steps.
    pub fixed_mask: BankState,
    /// The switched steps.
    pub switched_mask: BankState,
    /// Times (elapsed seconds) at which some step's health changes, ascending.
    fault_times: Vec<f64>,
    next_fault: usize,
    /// Steps whose contactor has stuck closed: connected whatever the controller commands.
    stuck: BankState,
}

impl Bank {
    /// Builds a bank for a nominal voltage. `steps.len()` must not exceed [`MAX_STEPS`].
    pub fn new(steps: Vec<StepSpec>, u_n_v: f64) -> Self {
        let nominal_b = steps.iter().map(|s| s.susceptance(u_n_v)).collect();
        let fixed_mask = BankState::select(&steps, |s| s.fixed);
        let switched_mask = BankState::select(&steps, |s| !s.fixed);
        let mut fault_times: Vec<f64> = steps
            .iter()
            .filter_map(|s| s.fault.map(|f| f.from_s))
            .collect();
        fault_times.sort_by(f64::total_cmp);
        let health = vec![1.0; steps.len()];
        let mut bank = Bank {
            steps,
            nominal_b,
            health,
            fixed_mask,
            switched_mask,
            fault_times,
            next_fault: 0,
            stuck: BankState::EMPTY,
        };
        bank.refresh_health(0.0);
        bank
    }

    /// Number of steps.
    pub fn len(&self) -> usize {
        self.steps.len()
    }

    /// True when the bank has no steps.
    pub fn is_empty(&self) -> bool {
        self.steps.is_empty()
    }

    /// Applies faults that start at or before `elapsed_s`; returns true when any step's
    /// health changed (so cached susceptances must be recomputed). Cheap when nothing is due.
    #[inline]
    pub fn advance_faults(&mut self, elapsed_s: f64) -> bool {
        if self.next_fault < self.fault_times.len()
            && self.fault_times[self.next_fault] <= elapsed_s
        {
            self.refresh_health(elapsed_s);
            true
        } else {
            false
        }
    }

    /// Run time of the next fault still to start, s (`None` when every fault has started
    /// or there is none).
    pub fn next_fault_s(&self) -> Option<f64> {
        self.fault_times.get(self.next_fault).copied()
    }

    fn refresh_health(&mut self, elapsed_s: f64) {
        for (h, s) in self.health.iter_mut().zip(&self.steps) {
            *h = s.health(elapsed_s);
        }
        self.stuck = BankState::select(&self.steps, |s| {
            s.fault
                .is_some_and(|f| f.kind == FaultKind::StuckClosed && elapsed_s >= f.from_s)
        });
        while self.next_fault < self.fault_times.len()
            && self.fault_times[self.next_fault] <= elapsed_s
        {
            self.next_fault += 1;
        }
    }

    /// Actual admittance of the connected steps in `state`, with faults (a step stuck
    /// closed is connected whatever `state` says).
    pub fn susceptance(&self, state: BankState) -> Shunt {
        let mut y = Shunt::default();
        for n in state.or(self.stuck) {
            let i = n - 1;
            y.add_scaled(&self.nominal_b[i], self.health[i]);
        }
        y
    }

    /// Nominal kvar at U_n of the steps in `state` (what the controller believes).
    pub fn nominal_kvar(&self, state: BankState) -> f64 {
        state.kvar(&self.steps)
    }

    /// Smallest switched step, kvar; the smallest step of all if none is switched.
    pub fn smallest_switched_kvar(&self) -> f64 {
        smallest_switched_kvar(&self.steps)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn step(kvar: f64) -> StepSpec {
        StepSpec::plain(kvar)
    }

    #[test]
    fn susceptance_gives_rated_kvar_at_nominal_voltage() {
        // Q = 3 · B · U_ln² = B · U_ll² (definition of a star-connected shunt).
        let b = step(50.0).susceptance(400.0);
        assert!((b.phase[0] * 400.0 * 400.0 - 50_000.0).abs() < 1e-6);
        let single = StepSpec {
            phase: StepPhase::Single(1),
            ..step(10.0)
        };
        let bs = single.susceptance(400.0);
        assert_eq!(bs.phase[0], 0.0);
        assert!((bs.phase[1] * 400.0 * 400.0 / 3.0 - 10_000.0).abs() < 1e-6);
    }

    fn with_phase(phase: StepPhase, kvar: f64) -> StepSpec {
        StepSpec {
            phase,
            ..step(kvar)
        }
    }

    // Q of a capacitor is U²·ωC with U the voltage across it (common practice). A delta
    // step's three capacitors see U and give Q/3 each; an earthed star's see U/√3 and give
    // Q/3 each; a step line to line sees U, one line to neutral U/√3. The admittances the
    // bus models take are those ωC, and the delta's star equivalent is three times its
    // branch (Z_Y = Z_Δ/3 for a balanced load, common practice), the star's element.
    #[test]
    fn each_connection_is_its_capacitors_omega_c() {
        let (u, q) = (400.0f64, 60e3);
        let u_ph = u / 3f64.sqrt();
        let delta = with_phase(StepPhase::Three, 60.0).susceptance(u);
        let star = with_phase(StepPhase::Star, 60.0).susceptance(u);
        let line = with_phase(StepPhase::Line(2), 60.0).susceptance(u);
        let single = with_phase(StepPhase::Single(1), 20.0).susceptance(u);
        let close = |a: f64, b: f64| (a - b).abs() < 1e-12 * b;
        assert!(close(delta.delta / 3.0, q / 3.0 / (u * u)));
        assert_eq!(delta.earthed, [0.0; 3]);
        for x in 0..3 {
            assert!(close(star.earthed[x], q / 3.0 / (u_ph * u_ph)));
            assert!(close(delta.phase[x], star.phase[x]));
        }
        assert!(close(line.line[2], q / (u * u)));
        assert_eq!(
            (line.phase, line.line[0], line.line[1]),
            ([0.0; 3], 0.0, 0.0)
        );
        assert!(close(single.earthed[1], 20e3 / (u_ph * u_ph)));
    }

    // A step of susceptance B = Q/U² between x and y on a balanced bus: S_x = V_x·conj(I),
    // S_y = V_y·conj(−I) with I = jB·(V_x − V_y) (circuit theory, common practice), which
    // is what the per-phase admittance G + jB of `Shunt::per_phase` draws, conj(Y)·|V|²:
    // each phase Q/2, and P −Q/(2√3) on x, +Q/(2√3) on y, the split of a line-to-line
    // load. A delta (three such branches) leaves no P and B = Q/U² on every phase.
    #[test]
    fn a_line_to_line_step_splits_like_a_line_to_line_load() {
        use num_complex::Complex64;
        let u = 400.0f64;
        let v: Vec<Complex64> = [0.0f64, -120.0, 120.0]
            .iter()
            .map(|d| Complex64::from_polar(u / 3f64.sqrt(), d.to_radians()))
            .collect();
        for pair in 0..3 {
            let (x, y) = (pair, (pair + 1) % 3);
            let (g, b) = with_phase(StepPhase::Line(pair), 30.0)
                .susceptance(u)
                .per_phase();
            let i = Complex64::new(0.0, 30e3 / (u * u)) * (v[x] - v[y]);
            let mut want = [Complex64::default(); 3];
            want[x] = v[x] * i.conj();
            want[y] = v[y] * (-i).conj();
            for ph in 0..3 {
                let got = Complex64::new(g[ph], -b[ph]) * v[ph].norm_sqr();
                assert!(
                    (got - want[ph]).norm() < 1e-9,
                    "pair {pair} phase {ph}: {got}"
                );
            }
            assert!((want[x].im + 15e3).abs() < 1e-9 && (want[y].im + 15e3).abs() < 1e-9);
            let shift = 30e3 / (2.0 * 3f64.sqrt());
            assert!((want[x].re + shift).abs() < 1e-9 && (want[y].re - shift).abs() < 1e-9);
        }
        let delta = Shunt {
            line: [20e3 / (u * u); 3],
            ..Shunt::default()
        };
        let (g, b) = delta.per_phase();
        for ph in 0..3 {
            assert!(g[ph].abs() < 1e-15);
            assert!((b[ph] * u * u - 60e3).abs() < 1e-9);
        }
    }

    #[test]
    fn faults_take_effect_at_their_time() {
        let mut s = step(50.0);
        s.fault = Some(Fault {
            kind: FaultKind::Open,
            from_s: 100.0,
        });
        let mut bank = Bank::new(vec![s, step(25.0)], 400.0);
        let both = BankState::first(2);
        let full = bank.susceptance(both);
        assert!(!bank.advance_faults(99.0));
        assert!(bank.advance_faults(100.0));
        let after = bank.susceptance(both);
        assert!((after.phase[0] - full.phase[0] / 3.0).abs() < 1e-12);
        assert_eq!(bank.nominal_kvar(both), 75.0);
    }

    #[test]
    fn bank_splits_fixed_and_switched_steps() {
        let fixed = StepSpec {
            fixed: true,
            ..step(10.0)
        };
        let bank = Bank::new(vec![step(25.0), fixed, step(50.0)], 400.0);
        assert_eq!(bank.fixed_mask.numbers(), vec![2]);
        assert_eq!(bank.switched_mask.numbers(), vec![1, 3]);
    }

    #[test]
    fn state_iterates_step_numbers_in_ascending_order() {
        let s = BankState::EMPTY.with(5).with(1).with(3);
        assert_eq!(s.iter().collect::<Vec<_>>(), vec![1, 3, 5]);
        assert_eq!(s.numbers(), vec![1, 3, 5]);
        assert_eq!(s.bits(), 0b10101);
        assert_eq!(BankState::from_bits(0b10101), s);
        assert_eq!(BankState::of_steps(&[5, 3, 1]), s);
        assert_eq!((s.lowest(), s.highest()), (Some(1), Some(5)));
        assert_eq!(
            (BankState::EMPTY.lowest(), BankState::EMPTY.highest()),
            (None, None)
        );
        assert_eq!(BankState::EMPTY.iter().next(), None);
    }

    #[test]
    fn state_label_joins_step_numbers_with_plus() {
        assert_eq!(BankState::of_steps(&[1, 2, 5]).label(), "1+2+5");
        assert_eq!(BankState::of_steps(&[12]).label(), "12");
        assert_eq!(BankState::EMPTY.label(), "none");
        assert_eq!(BankState::of_steps(&[2, 10]).to_string(), "2+10");
    }

    #[test]
    fn state_kvar_adds_the_connected_steps() {
        let steps = [step(25.0), step(50.0), step(100.0)];
        assert_eq!(BankState::of_steps(&[1, 3]).kvar(&steps), 125.0);
        assert_eq!(BankState::EMPTY.kvar(&steps), 0.0);
        // A step number past the bank adds nothing.
        assert_eq!(BankState::of_steps(&[2, 7]).kvar(&steps), 50.0);
    }

    #[test]
    fn first_64_is_every_step() {
        let all = BankState::first(64);
        assert_eq!(all.len(), 64);
        assert_eq!(all.bits(), u64::MAX);
        assert_eq!(all.lowest(), Some(1));
        assert_eq!(all.highest(), Some(64));
        assert!(all.contains(64));
        assert_eq!(BankState::first(3).numbers(), vec![1, 2, 3]);
        assert!(BankState::first(0).is_empty());
    }

    #[test]
    fn with_and_without_add_and_remove_one_step() {
        let s = BankState::of_steps(&[1, 3]);
        assert!(s.with(2).contains(2));
        assert_eq!(s.with(3), s);
        assert_eq!(s.without(1).numbers(), vec![3]);
        assert_eq!(s.without(2), s);
        assert_eq!(s.with(64).without(64), s);
        assert!(!s.contains(0) && !s.contains(65));
    }

    #[test]
    fn set_operations_combine_states() {
        let a = BankState::of_steps(&[1, 2, 3]);
        let b = BankState::of_steps(&[3, 4]);
        assert_eq!(a.and(b).numbers(), vec![3]);
        assert_eq!(a.or(b).numbers(), vec![1, 2, 3, 4]);
        assert_eq!(a.minus(b).numbers(), vec![1, 2]);
    }

    #[test]
    fn state_serializes_as_its_bits() {
        let s = BankState::of_steps(&[1, 3]);
        assert_eq!(serde_json::to_string(&s).unwrap(), "5");
    }
}

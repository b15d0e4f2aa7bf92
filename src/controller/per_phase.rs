//! The controller as the engine drives it: one [`Controller`] for the whole bank, or,
//! under per-phase control, four of them.
//!
//! Per-phase control (`controller.measurement = "per-phase"`, which needs a current
//! transformer on every phase) makes one decision per phase and one for the three-phase
//! steps, each interval:
//!
//! - the switched single-phase steps of phase x follow phase x's own reading (P_x, Q_x,
//!   not multiplied by 3), with the phase dead band (`phase_dead_band_kvar`, default
//!   0.65 × the phase's smallest switched step);
//! - the switched three-phase steps (delta or star) follow the phase that needs least:
//!   the reading of the phase with the smallest demand Q_x − |P_x|·tan φ_t, times 3, with
//!   the bank's dead band. A three-phase step then closes only when every phase needs its
//!   third, and opens as soon as one phase leads beyond the dead band, so it never
//!   overcorrects one phase to help another; the single-phase steps make up each phase's
//!   rest;
//! - the switched steps line to line between x and y, when there are any, follow their
//!   pair by the same rule: the reading of whichever of x and y needs less, times 2 (such
//!   a step puts half its kvar on each of its two phases), with a dead band of 0.65 × the
//!   pair's smallest switched step (2 × `phase_dead_band_kvar` when that is set, the
//!   pair's reading being two phases' worth). It closes only when both its phases need
//!   their half, so it corrects a load between the same two lines (a welder, a
//!   single-phase motor on 400 V) without pushing either phase leading.
//!
//! Each part has its own delays, averaging (of its own reading), protections (all see
//! the same voltage, current and distortion, and each opens only its own steps) and cap
//! on operations per hour, so up to four operations (seven with steps on every pair) can
//! happen in one interval. Fault detection is not available under per-phase control
//! (refused in validation).

use super::{Controller, ControllerParams, Decision, StepState};
use crate::bank::{Bank, BankState, StepPhase};

/// Which part of the control owns a step: the three-phase part, a phase's or a pair's.
const FIXED: usize = usize::MAX;

/// The controller of a run: one part, or under per-phase control four and one for each
/// pair of lines with switched steps between them.
pub struct Control {
    parts: Vec<Controller>,
    /// The part that switches each step (by index); [`FIXED`] for fixed steps.
    owner: Vec<usize>,
    /// Per-step switching state, kept from the owning parts.
    steps: Vec<StepState>,
    tan_t: f64,
    per_phase: bool,
    /// The switched steps of each part.
    own: Vec<BankState>,
    /// The pair (0 ab, 1 bc, 2 ca) of each part after the four first, in order.
    pairs: Vec<usize>,
}

impl Control {
    /// Builds the control for a bank, every switched step off and every fixed step on
    /// since `t_first_s`.
    pub fn new(params: ControllerParams, bank: &Bank, dt_s: f64, t_first_s: f64) -> Self {
        let tan_t = params.target.tan_phi();
        if !params.per_phase {
            let c = Controller::new(params, bank, dt_s, t_first_s);
            let steps = c.steps().to_vec();
            let owner = bank
                .steps
                .iter()
                .map(|s| if s.fixed { FIXED } else { 0 })
                .collect();
            return Control {
                parts: vec![c],
                owner,
                steps,
                tan_t,
                per_phase: false,
                own: vec![bank.switched_mask],
                pairs: Vec::new(),
            };
        }
        let three = BankState::select(&bank.steps, |s| s.phase.is_three_phase());
        let mut parts = vec![Controller::for_steps(params, bank, dt_s, t_first_s, three)];
        let mut owns = vec![three.and(bank.switched_mask)];
        for ph in 0..3 {
            let own = BankState::select(&bank.steps, |s| s.phase == StepPhase::Single(ph));
            owns.push(own.and(bank.switched_mask));
            let mut p = params;
            p.dead_band_kvar = phase_dead_band(&params, bank, own);
            parts.push(Controller::for_steps(p, bank, dt_s, t_first_s, own));
        }
        // A part for each pair of lines with a switched step between them.
        let mut pairs = Vec::new();
        let mut pair_part = [FIXED; 3];
        for (pair, part) in pair_part.iter_mut().enumerate() {
            let own = BankState::select(&bank.steps, |s| s.phase == StepPhase::Line(pair));
            let own = own.and(bank.switched_mask);
            if own.is_empty() {
                continue;
            }
            let mut p = params;
            p.dead_band_kvar = match params.phase_dead_band_kvar {
                Some(b) => 2.0 * b,
                None => phase_dead_band(&params, bank, own),
            };
            *part = parts.len();
            parts.push(Controller::for_steps(p, bank, dt_s, t_first_s, own));
            owns.push(own);
            pairs.push(pair);
        }
        let owner = bank
            .steps
            .iter()
            .map(|s| match (s.fixed, s.phase) {
                (true, _) => FIXED,
                (false, StepPhase::Three | StepPhase::Star) => 0,
                (false, StepPhase::Single(ph)) => 1 + ph.min(2),
                (false, StepPhase::Line(pair)) => pair_part[pair.min(2)],
            })
            .collect();
        let steps = parts[0].steps().to_vec();
        Control {
            parts,
            owner,
            steps,
            tan_t,
            per_phase: true,
            own: owns,
            pairs,
        }
    }

    /// True under per-phase control.
    pub fn per_phase(&self) -> bool {
        self.per_phase
    }

    /// Connected steps, fixed ones included.
    #[inline(always)]
    pub fn mask(&self) -> BankState {
        if self.parts.len() == 1 {
            return self.parts[0].mask();
        }
        self.parts
            .iter()
            .fold(BankState::EMPTY, |m, c| m.or(c.mask()))
    }

    /// Per-step switching state, by index.
    pub fn steps(&self) -> &[StepState] {
        if self.parts.len() == 1 {
            return self.parts[0].steps();
        }
        &self.steps
    }

    /// One controller for the whole bank: see [`Controller::decide_measured`].
    #[inline(always)]
    pub fn decide_measured(
        &mut self,
        p_raw: f64,
        q_raw: f64,
        v_ll_max: f64,
        current_a: f64,
        thd_pct: f64,
        t_next: f64,
    ) -> Decision {
        self.parts[0].decide_inline(p_raw, q_raw, v_ll_max, current_a, thd_pct, t_next)
    }

    /// Per-phase control: `p_kw`, `q_kvar` are what the controller reads on each phase.
    /// The decisions are merged: the steps closed and opened by every part; the measured
    /// P and Q and the demand are the phases' sums; the wish is −1 when any part that
    /// has a step on wishes to disconnect, else +1 when any part wishes to connect; the
    /// trip is the first part's.
    #[allow(clippy::too_many_arguments)]
    pub fn decide_phases(
        &mut self,
        p_kw: &[f64; 3],
        q_kvar: &[f64; 3],
        v_ll_max: f64,
        current_a: f64,
        thd_pct: f64,
        t_next: f64,
    ) -> Decision {
        let demand = |ph: usize| q_kvar[ph] - p_kw[ph].abs() * self.tan_t;
        let mut least = 0;
        for ph in 1..3 {
            if demand(ph) < demand(least) {
                least = ph;
            }
        }
        let d0 = self.parts[0].decide_measured(
            3.0 * p_kw[least],
            3.0 * q_kvar[least],
            v_ll_max,
            current_a,
            thd_pct,
            t_next,
        );
        // A wish to disconnect with nothing of one's own on is no wish at all.
        let wish_of = |part: &Controller, own: BankState, w: i8| {
            if w < 0 && part.mask().and(own).is_empty() {
                0
            } else {
                w
            }
        };
        let w0 = wish_of(&self.parts[0], self.own[0], d0.wish);
        let mut d = Decision {
            p_m_kw: 0.0,
            q_m_kvar: 0.0,
            demand_kvar: 0.0,
            wish: w0,
            closed: d0.closed,
            opened: d0.opened,
            trip: d0.trip,
            alarm: d0.alarm,
        };
        for ph in 0..3 {
            let dp = self.parts[1 + ph]
                .decide_measured(p_kw[ph], q_kvar[ph], v_ll_max, current_a, thd_pct, t_next);
            d.p_m_kw += dp.p_m_kw;
            d.q_m_kvar += dp.q_m_kvar;
            d.demand_kvar += dp.demand_kvar;
            let wp = wish_of(&self.parts[1 + ph], self.own[1 + ph], dp.wish);
            merge(&mut d, &dp, wp);
        }
        for (k, &pair) in self.pairs.iter().enumerate() {
            let (x, y) = (pair, (pair + 1) % 3);
            let least = if demand(y) < demand(x) { y } else { x };
            let part = 4 + k;
            let dp = self.parts[part].decide_measured(
                2.0 * p_kw[least],
                2.0 * q_kvar[least],
                v_ll_max,
                current_a,
                thd_pct,
                t_next,
            );
            let wp = wish_of(&self.parts[part], self.own[part], dp.wish);
            merge(&mut d, &dp, wp);
        }
        let changed = d.closed.or(d.opened).or(d.alarm);
        for n in changed {
            let o = self.owner[n - 1];
            if o != FIXED {
                self.steps[n - 1] = self.parts[o].steps()[n - 1];
            }
        }
        d
    }

    /// The smallest of the parts' [`Controller::quiet_after`].
    pub fn quiet_after(&self, t_next: f64) -> u64 {
        if let [one] = self.parts.as_slice() {
            return one.quiet_after(t_next);
        }
        self.parts
            .iter()
            .map(|c| c.quiet_after(t_next))
            .min()
            .unwrap_or(0)
    }

    /// [`Controller::skip`] on every part.
    pub fn skip(&mut self, m: u64) {
        if let [one] = self.parts.as_mut_slice() {
            one.skip(m);
            return;
        }
        for c in &mut self.parts {
            c.skip(m);
        }
    }
}

/// The dead band of a phase's own control, kvar: the setting, else 0.65 × the smallest
/// switched step of `own` (1 kvar when the phase has none, which then never matters).
fn phase_dead_band(params: &ControllerParams, bank: &Bank, own: BankState) -> f64 {
    if let Some(b) = params.phase_dead_band_kvar {
        return b;
    }
    let smallest = own
        .iter()
        .map(|n| &bank.steps[n - 1])
        .filter(|s| !s.fixed)
        .map(|s| s.kvar)
        .fold(f64::INFINITY, f64::min);
    if smallest.is_finite() {
        0.65 * smallest
    } else {
        1.0
    }
}

/// Merges a part's decision `dp`, whose wish counts as `wish`, into the merged decision
/// `d`: −1 when either wishes to disconnect, else +1 when either wishes to connect; the
/// steps closed, opened and alarmed on by both; the first trip.
fn merge(d: &mut Decision, dp: &Decision, wish: i8) {
    d.wish = match (d.wish, wish) {
        (-1, _) | (_, -1) => -1,
        (1, _) | (_, 1) => 1,
        _ => 0,
    };
    d.closed = d.closed.or(dp.closed);
    d.opened = d.opened.or(dp.opened);
    d.alarm = d.alarm.or(dp.alarm);
    d.trip = d.trip.or(dp.trip);
}

//! Closing inrush of a capacitor step: peak current and frequency.
//!
//! Each step is taken per phase as its star-equivalent capacitance: C = Q/(ω·U²) for a
//! three-phase step (Q the three-phase kvar, U line to line; a delta's branches are C/3
//! each, an earthed star's elements C), C = Q/(ω·U_ph²) on its phase for a single-phase
//! step line to neutral, and C = 1.5·Q/(ω·U²) on each of its two phases for one line to
//! line (its capacitance Q/(ω·U²) between the lines, carrying Q/2 on each phase at U_ph,
//! as [`crate::bank::Shunt::per_phase`] has it; the peak is that of the loop through
//! both lines, the frequency an estimate),
//! uncharged when it closes (the discharge lockout sees to that), switched at the peak of
//! the phase voltage sqrt(2/3)·U_LL (the worst instant).
//!
//! - **Back-to-back** (steps already connected, fixed ones included): the closing step
//!   C1 and the connected steps C2 (in parallel) discharge into each other through the
//!   inductance L between them: Î = sqrt(2/3)·U_LL·sqrt(C_eq/L), C_eq = C1·C2/(C1 + C2),
//!   f = 1/(2π·sqrt(L·C_eq)) (IEEE Std C37.012, from memory). The supply, far more
//!   inductive, is left out.
//! - **Isolated** (nothing connected): the step charges from the supply through its
//!   short-circuit inductance L_s = U²/(ω·S_sc): Î = sqrt(2)·I_N·sqrt(S_sc/Q),
//!   f = f1·sqrt(S_sc/Q) (common practice, from memory). With an infinite supply the
//!   setting L between steps stands in for L_s, so the figure stays finite.
//! - **Detuned steps**: a step's own reactor L_r = p/(ω²·C) lies in the loop and limits
//!   its inrush: L_r of the closing step is added to L; the connected steps' reactors
//!   count in parallel (1/Σ(1/L_r)) when every connected step is detuned, and as nothing
//!   when any connected step is plain (a plain step supplies the current without one).
//! - **Damping resistors** of a capacitor-duty contactor (early-make contacts that put a
//!   resistor R in each phase for the first milliseconds): the closing is taken as the
//!   series R-L-C circuit with the same C and L and R, whose peak follows from its
//!   step response; the second, smaller transient when the main contacts short the
//!   resistors is not modelled. The frequency shown is the circuit's natural frequency
//!   1/(2π·sqrt(L·C)).
//!
//! The limits: capacitors are made to withstand closing peaks up to 100 × their rated
//! rms current (IEC 60831-1, from memory), and a contactor its stated peak making
//! current (`contactor_peak_a`).

use crate::bank::{StepPhase, StepSpec};
use std::f64::consts::PI;

/// The closing peak a capacitor withstands, multiple of its rated rms current (IEC
/// 60831-1, from memory).
pub const CAPACITOR_PEAK_MULTIPLE: f64 = 100.0;

/// Peak current and frequency of one closing.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Inrush {
    /// Peak current, A.
    pub peak_a: f64,
    /// Natural frequency of the transient, Hz.
    pub frequency_hz: f64,
}

/// Star-equivalent capacitance per phase of `q_kvar` (three-phase total) at `u_ll_v`, F:
/// C = Q/(ω·U²).
pub fn capacitance_f(q_kvar: f64, u_ll_v: f64, f_hz: f64) -> f64 {
    q_kvar * 1e3 / (2.0 * PI * f_hz * u_ll_v * u_ll_v)
}

/// Back-to-back closing of C1 onto C2 through L (F, F, H) at `u_ll_v`, undamped:
/// Î = sqrt(2/3)·U·sqrt(C_eq/L), f = 1/(2π·sqrt(L·C_eq)).
pub fn back_to_back(u_ll_v: f64, c1: f64, c2: f64, l_h: f64) -> Inrush {
    let c_eq = c1 * c2 / (c1 + c2);
    series_rlc((2.0f64 / 3.0).sqrt() * u_ll_v, l_h, c_eq, 0.0)
}

/// An isolated step of `q_kvar` closed on a supply of short-circuit power `s_sc_kva`
/// (frequency `f_hz`): Î = sqrt(2)·I_N·sqrt(S_sc/Q), f = f1·sqrt(S_sc/Q).
pub fn isolated(q_kvar: f64, u_ll_v: f64, s_sc_kva: f64, f_hz: f64) -> Inrush {
    let i_n = q_kvar * 1e3 / (3f64.sqrt() * u_ll_v);
    let k = (s_sc_kva / q_kvar).sqrt();
    Inrush {
        peak_a: 2f64.sqrt() * i_n * k,
        frequency_hz: f_hz * k,
    }
}

/// Peak current of a series R-L-C circuit (capacitor uncharged) switched onto a step of
/// `v0` volts, and its natural frequency 1/(2π·sqrt(L·C)).
///
/// With α = R/(2L) and ω0 = 1/sqrt(L·C): underdamped, i = V0/(L·ω_d)·e^(−αt)·sin(ω_d·t)
/// with its peak where tan(ω_d·t) = ω_d/α; critically damped, Î = V0/(L·α·e); overdamped,
/// i = V0/(2Lβ)·(e^(s1·t) − e^(s2·t)), s = −α ± β, peak at t = ln(s2/s1)/(s1 − s2).
/// With R = 0 this is V0·sqrt(C/L).
pub fn series_rlc(v0: f64, l_h: f64, c_f: f64, r_ohm: f64) -> Inrush {
    let w0 = 1.0 / (l_h * c_f).sqrt();
    let alpha = r_ohm / (2.0 * l_h);
    let peak = if alpha < w0 * (1.0 - 1e-9) {
        let wd = (w0 * w0 - alpha * alpha).sqrt();
        let t = wd.atan2(alpha) / wd;
        v0 / (l_h * wd) * (-alpha * t).exp() * (wd * t).sin()
    } else if alpha <= w0 * (1.0 + 1e-9) {
        v0 / (l_h * alpha * std::f64::consts::E)
    } else {
        let beta = (alpha * alpha - w0 * w0).sqrt();
        let (s1, s2) = (-alpha + beta, -alpha - beta);
        let t = (s2 / s1).ln() / (s1 - s2);
        v0 / (2.0 * l_h * beta) * ((s1 * t).exp() - (s2 * t).exp())
    };
    Inrush {
        peak_a: peak,
        frequency_hz: w0 / (2.0 * PI),
    }
}

/// Rated rms current of a step at U_n, A: Q/(sqrt(3)·U) three-phase, Q/U_ph single-phase
/// line to neutral, Q/U line to line ([`StepPhase::line_current_a`]).
pub fn rated_current_a(s: &StepSpec, u_n_v: f64) -> f64 {
    s.phase.line_current_a(s.kvar, u_n_v)
}

/// What a closing depends on besides the steps.
#[derive(Debug, Clone, Copy)]
pub struct Circuit {
    /// U_n line to line, V.
    pub u_n_v: f64,
    /// System frequency, Hz.
    pub f_hz: f64,
    /// Short-circuit power at the bus, kVA (infinite for a stiff supply).
    pub s_sc_kva: f64,
    /// Inductance between the closing step and the steps already connected, H.
    pub l_between_h: f64,
}

/// Capacitance and reactor inductance of a step on phase `ph` (0 to 2): zero for a
/// single-phase step not connected to that phase.
fn per_phase(s: &StepSpec, ph: usize, c: &Circuit) -> (f64, Option<f64>) {
    let cap = match s.phase {
        _ if s.phase.phase_bits() & (1 << ph) == 0 => 0.0,
        StepPhase::Three | StepPhase::Star => capacitance_f(s.kvar, c.u_n_v, c.f_hz),
        StepPhase::Single(_) => capacitance_f(3.0 * s.kvar, c.u_n_v, c.f_hz),
        StepPhase::Line(_) => capacitance_f(1.5 * s.kvar, c.u_n_v, c.f_hz),
    };
    let w = 2.0 * PI * c.f_hz;
    let reactor = s.detuning.filter(|_| cap > 0.0).map(|p| p / (w * w * cap));
    (cap, reactor)
}

/// The worst phase of a closing of `steps[closing]` (index) while the steps of index in
/// `on` are connected, with damping resistors `r_ohm` if any.
pub fn closing(
    steps: &[StepSpec],
    closing: usize,
    on: impl Iterator<Item = usize> + Clone,
    c: &Circuit,
    r_ohm: Option<f64>,
) -> Inrush {
    let v0 = (2.0f64 / 3.0).sqrt() * c.u_n_v;
    let w = 2.0 * PI * c.f_hz;
    let mut worst = Inrush {
        peak_a: 0.0,
        frequency_hz: 0.0,
    };
    for ph in 0..3 {
        let (c1, l1) = per_phase(&steps[closing], ph, c);
        if c1 <= 0.0 {
            continue;
        }
        let mut c2 = 0.0;
        let mut inv_l2 = 0.0;
        let mut any_plain = false;
        for i in on.clone() {
            let (ci, li) = per_phase(&steps[i], ph, c);
            if ci <= 0.0 {
                continue;
            }
            c2 += ci;
            match li {
                Some(l) => inv_l2 += 1.0 / l,
                None => any_plain = true,
            }
        }
        let l1 = l1.unwrap_or(0.0);
        let case = if c2 > 0.0 {
            let l2 = if any_plain { 0.0 } else { 1.0 / inv_l2 };
            let l = c.l_between_h + l1 + l2;
            let c_eq = c1 * c2 / (c1 + c2);
            series_rlc(v0, l, c_eq, r_ohm.unwrap_or(0.0))
        } else {
            let l_s = if c.s_sc_kva.is_finite() {
                c.u_n_v * c.u_n_v / (w * c.s_sc_kva * 1e3)
            } else {
                c.l_between_h
            };
            series_rlc(v0, l_s + l1, c1, r_ohm.unwrap_or(0.0))
        };
        if case.peak_a > worst.peak_a {
            worst = case;
        }
    }
    worst
}

#[cfg(test)]
mod tests {
    use super::*;

    // The general closing of an isolated plain step equals the closed form of
    // `isolated`: sqrt(2/3)·U·sqrt(C/L_s) = sqrt(2/3)·sqrt(Q·S_sc)/U = sqrt(2)·I_N·sqrt(S_sc/Q)
    // (algebra with C = Q/(ωU²) and L_s = U²/(ω·S_sc)).
    #[test]
    fn isolated_closing_matches_the_closed_form() {
        let steps = [StepSpec::plain(50.0)];
        let c = Circuit {
            u_n_v: 400.0,
            f_hz: 50.0,
            s_sc_kva: 16_666.7,
            l_between_h: 5e-6,
        };
        let a = closing(&steps, 0, std::iter::empty(), &c, None);
        let b = isolated(50.0, 400.0, 16_666.7, 50.0);
        assert!((a.peak_a / b.peak_a - 1.0).abs() < 1e-9);
        assert!((a.frequency_hz / b.frequency_hz - 1.0).abs() < 1e-9);
    }

    // A step line to line closing alone: its capacitance C = Q/(ω·U²) between the lines
    // charges through the loop of both lines' supply inductance, 2·L_s, from √2·U, so
    // Î = √2·U·sqrt(C/(2·L_s)) = U·sqrt(C/L_s) (the isolated closing's series L-C circuit
    // applied to that loop, common practice); the star equivalent C = 1.5·Q/(ω·U²) on each
    // phase at sqrt(2/3)·U gives the same peak. Its rated current is Q/U.
    #[test]
    fn a_line_to_line_step_closes_through_the_loop_of_two_lines() {
        let s = StepSpec {
            phase: StepPhase::Line(0),
            ..StepSpec::plain(50.0)
        };
        let c = Circuit {
            u_n_v: 400.0,
            f_hz: 50.0,
            s_sc_kva: 16_666.7,
            l_between_h: 5e-6,
        };
        let w = 2.0 * PI * 50.0;
        let c_ll = 50e3 / (w * 400.0 * 400.0);
        let l_s = 400.0 * 400.0 / (w * 16_666.7e3);
        let want = 2f64.sqrt() * 400.0 * (c_ll / (2.0 * l_s)).sqrt();
        let got = closing(std::slice::from_ref(&s), 0, std::iter::empty(), &c, None);
        assert!((got.peak_a / want - 1.0).abs() < 1e-9, "{}", got.peak_a);
        assert!((rated_current_a(&s, 400.0) - 125.0).abs() < 1e-9);
        // A step line to line between b and c has its star equivalent 1.5·Q/(ω·U²) on
        // phases b and c and nothing on a, so a step between a and b closing onto it
        // meets it on phase b only.
        let other = StepSpec {
            phase: StepPhase::Line(1),
            ..StepSpec::plain(50.0)
        };
        assert_eq!(per_phase(&other, 0, &c).0, 0.0);
        assert!((per_phase(&other, 1, &c).0 - 1.5 * c_ll).abs() < 1e-15);
    }

    // Damping lowers the peak; a resistor of 2·sqrt(L/C) (critical damping) gives
    // V0·sqrt(C/L)/e (from Î = V0/(L·α·e) with α = 1/sqrt(LC)); a heavily overdamped
    // circuit stays below V0/R.
    #[test]
    fn damping_resistor_lowers_the_peak() {
        let (l, c) = (5e-6, 500e-6);
        let free = series_rlc(100.0, l, c, 0.0).peak_a;
        let crit = series_rlc(100.0, l, c, 2.0 * (l / c).sqrt()).peak_a;
        assert!((crit / free - 1.0 / std::f64::consts::E).abs() < 1e-6);
        let over = series_rlc(100.0, l, c, 2.0).peak_a;
        assert!(over < crit && over > 0.0 && over < 100.0 / 2.0);
    }
}

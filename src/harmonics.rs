//! Harmonic resonance of the bank with the supply: the parallel-resonance order of each
//! bank state, the impedance seen by the load's harmonic currents, and an estimate of the
//! harmonic bus voltages and THD.
//!
//! The model is the usual positive-sequence equivalent: the supply is R(h) + j·h·X with
//! R(h) = R·sqrt(h) (a common skin-effect allowance); each connected step is
//! j·(h·X_L − X_C/h), X_L = 0 for a plain step and p·X_C for a step with a detuning reactor
//! of ratio p. The load's harmonic currents are ideal current sources; the load's own
//! damping is neglected, which makes the estimate conservative. Single-phase steps enter
//! with their kvar as if spread over three phases.

use crate::bank::StepSpec;
use num_complex::Complex64;
use serde::{Deserialize, Serialize};

/// Orders scanned for a resonance peak.
const SCAN_FROM: f64 = 1.0;
const SCAN_TO: f64 = 50.0;
const SCAN_STEP: f64 = 0.01;

/// A named load spectrum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum SpectrumPreset {
    /// Ideal six-pulse rectifier: orders 6k ± 1 up to 25, I_h/I_1 = 1/h.
    SixPulse,
    /// Ideal twelve-pulse rectifier: orders 12k ± 1 up to 49, I_h/I_1 = 1/h.
    TwelvePulse,
}

impl SpectrumPreset {
    /// Orders and currents in % of the fundamental.
    pub fn orders(self) -> Vec<(f64, f64)> {
        let (step, top) = match self {
            SpectrumPreset::SixPulse => (6, 25),
            SpectrumPreset::TwelvePulse => (12, 49),
        };
        let mut out = Vec::new();
        let mut k = 1;
        while step * k - 1 <= top {
            for h in [step * k - 1, step * k + 1] {
                if h <= top {
                    out.push((h as f64, 100.0 / h as f64));
                }
            }
            k += 1;
        }
        out
    }
}

/// The harmonic currents the load injects at the bus.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Spectrum {
    /// (order, current in % of the reference fundamental current), orders > 1.
    pub orders: Vec<(f64, f64)>,
    /// Apparent power of the harmonic-producing load whose fundamental current the
    /// percentages refer to, kVA.
    pub reference_kva: f64,
}

/// Harmonic model of one site: supply and bank impedances versus order.
#[derive(Debug, Clone)]
pub struct HarmonicModel {
    u_n: f64,
    z1: Complex64,
    s_sc_kva: f64,
    x_c: Vec<f64>,
    x_l: Vec<f64>,
    plain: Vec<bool>,
    kvar: Vec<f64>,
    /// The load spectrum.
    pub spectrum: Spectrum,
}

/// Resonance and distortion of one bank state.
#[derive(Debug, Clone, PartialEq)]
pub struct StateHarmonics {
    /// Parallel-resonance order with the supply; `None` with no capacitance connected or
    /// an infinitely stiff supply.
    pub order: Option<f64>,
    /// Estimated harmonic voltage per order of the spectrum, % of U_n.
    pub v_h_pct: Vec<(f64, f64)>,
    /// Estimated voltage THD at the bus, %.
    pub thd_pct: f64,
}

impl HarmonicModel {
    /// Builds the model. `z1` is the supply impedance per phase at the fundamental (ohm),
    /// `s_sc_kva` the short-circuit power at the bus.
    pub fn new(
        u_n_v: f64,
        z1: Complex64,
        s_sc_kva: f64,
        steps: &[StepSpec],
        spectrum: Spectrum,
    ) -> Self {
        let u2 = u_n_v * u_n_v;
        let mut x_c = Vec::new();
        let mut x_l = Vec::new();
        for s in steps {
            let p = s.detuning.unwrap_or(0.0);
            // Effective reactance X_C − X_L = X_C·(1 − p) gives the rated kvar at U_n.
            let xc = u2 / (s.kvar * 1e3 * (1.0 - p));
            x_c.push(xc);
            x_l.push(p * xc);
        }
        HarmonicModel {
            u_n: u_n_v,
            z1,
            s_sc_kva,
            x_c,
            x_l,
            plain: steps.iter().map(|s| s.detuning.is_none()).collect(),
            kvar: steps.iter().map(|s| s.kvar).collect(),
            spectrum,
        }
    }

    /// Supply impedance at order h, ohm.
    pub fn supply_impedance(&self, h: f64) -> Complex64 {
        Complex64::new(self.z1.re * h.sqrt(), self.z1.im * h)
    }

    /// Impedance seen by the load at order h with the steps in `mask` connected, ohm.
    pub fn impedance(&self, mask: u64, h: f64) -> Complex64 {
        let zs = self.supply_impedance(h);
        if zs.norm() == 0.0 {
            return zs;
        }
        let mut y = zs.inv();
        let mut m = mask;
        while m != 0 {
            let i = m.trailing_zeros() as usize;
            m &= m - 1;
            let x = h * self.x_l[i] - self.x_c[i] / h;
            if x == 0.0 {
                // A series-tuned branch at its exact tuning order shorts the bus.
                return Complex64::new(0.0, 0.0);
            }
            y += Complex64::new(0.0, x).inv();
        }
        y.inv()
    }

    /// Nominal kvar of the steps in `mask`.
    fn q_c(&self, mask: u64) -> f64 {
        (0..self.kvar.len())
            .filter(|i| mask & (1 << i) != 0)
            .map(|i| self.kvar[i])
            .sum()
    }

    /// Parallel-resonance order of a state: sqrt(S_sc/Q_c) when every connected step is
    /// plain, else the peak of an impedance scan.
    pub fn resonance_order(&self, mask: u64) -> Option<f64> {
        let q_c = self.q_c(mask);
        if q_c <= 0.0 || !self.s_sc_kva.is_finite() {
            return None;
        }
        let all_plain = (0..self.plain.len()).all(|i| mask & (1 << i) == 0 || self.plain[i]);
        if all_plain {
            return Some((self.s_sc_kva / q_c).sqrt());
        }
        self.scan_peak(mask)
    }

    /// Order of the largest |Z(h)| on [1, 50], refined by golden-section search.
    pub fn scan_peak(&self, mask: u64) -> Option<f64> {
        let n = ((SCAN_TO - SCAN_FROM) / SCAN_STEP).round() as usize;
        let mut best = (SCAN_FROM, 0.0);
        for j in 0..=n {
            let h = SCAN_FROM + j as f64 * SCAN_STEP;
            let z = self.impedance(mask, h).norm();
            if z > best.1 {
                best = (h, z);
            }
        }
        let (mut a, mut b) = (
            (best.0 - SCAN_STEP).max(SCAN_FROM),
            (best.0 + SCAN_STEP).min(SCAN_TO),
        );
        let g = (5f64.sqrt() - 1.0) / 2.0;
        for _ in 0..60 {
            let c = b - g * (b - a);
            let d = a + g * (b - a);
            if self.impedance(mask, c).norm() > self.impedance(mask, d).norm() {
                b = d;
            } else {
                a = c;
            }
        }
        let h = 0.5 * (a + b);
        // A peak on the edge of the scan is no resonance inside it.
        (h > SCAN_FROM + SCAN_STEP && h < SCAN_TO - SCAN_STEP).then_some(h)
    }

    /// Resonance order, harmonic voltages and THD for a state.
    pub fn state(&self, mask: u64) -> StateHarmonics {
        let u_ln = self.u_n / 3f64.sqrt();
        let i_ref = self.spectrum.reference_kva * 1e3 / (3f64.sqrt() * self.u_n);
        let mut sum2 = 0.0;
        let mut v_h_pct = Vec::with_capacity(self.spectrum.orders.len());
        for &(h, pct) in &self.spectrum.orders {
            let v = self.impedance(mask, h).norm() * i_ref * pct / 100.0;
            let v_pct = 100.0 * v / u_ln;
            sum2 += v_pct * v_pct;
            v_h_pct.push((h, v_pct));
        }
        StateHarmonics {
            order: self.resonance_order(mask),
            v_h_pct,
            thd_pct: sum2.sqrt(),
        }
    }

    /// The spectrum order nearest to `order`, if any lies within `tolerance` orders.
    pub fn near_harmonic(&self, order: f64, tolerance: f64) -> Option<f64> {
        self.spectrum
            .orders
            .iter()
            .map(|&(h, _)| h)
            .filter(|h| (h - order).abs() <= tolerance)
            .min_by(|a, b| (a - order).abs().total_cmp(&(b - order).abs()))
    }
}

/// THD of a set of harmonic magnitudes relative to the fundamental, %.
pub fn thd_pct(fundamental: f64, harmonics: &[f64]) -> f64 {
    100.0 * harmonics.iter().map(|v| v * v).sum::<f64>().sqrt() / fundamental
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bank::StepPhase;
    use crate::supply::{SupplyParams, Transformer};

    fn step(kvar: f64, detuning: Option<f64>) -> StepSpec {
        StepSpec {
            kvar,
            phase: StepPhase::Three,
            fixed: false,
            detuning,
            rated_operations: 1e5,
            fault: None,
        }
    }

    fn site() -> SupplyParams {
        SupplyParams {
            transformer: Some(Transformer {
                rated_kva: 1000.0,
                impedance_pct: 6.0,
                x_over_r: 8.0,
            }),
            ..SupplyParams::default()
        }
    }

    // Worked example: 1000 kVA, u_k 6 %, 300 kvar on an infinite grid gives
    // h_r = sqrt(S_sc/Q_c) = 7.454 (IEEE Std 519 / IEEE Std 1531 estimate, from memory).
    #[test]
    fn plain_bank_order() {
        let s = site();
        let m = HarmonicModel::new(
            400.0,
            s.impedance_ohm(),
            s.short_circuit_kva(),
            &[step(300.0, None)],
            Spectrum::default(),
        );
        assert!((m.resonance_order(1).unwrap() - 7.454).abs() < 1e-3);
        // The impedance scan of the same circuit peaks at the same order, within the
        // shift that the supply resistance causes (stated tolerance 1 %).
        let scanned = m.scan_peak(1).unwrap();
        assert!(
            (scanned - 7.454).abs() / 7.454 < 0.01,
            "scan peak {scanned}"
        );
    }

    // Ideal six-pulse rectifier currents I_h/I_1 = 1/h at 6k ± 1 (read in public texts).
    #[test]
    fn six_pulse_preset() {
        let o = SpectrumPreset::SixPulse.orders();
        assert_eq!(o[0], (5.0, 20.0));
        assert!((o[1].1 - 14.2857).abs() < 1e-3);
        assert_eq!(
            o.iter().map(|x| x.0).collect::<Vec<_>>(),
            vec![5.0, 7.0, 11.0, 13.0, 17.0, 19.0, 23.0, 25.0]
        );
    }

    // A 7 % detuned bank resonates with the supply below its tuning order
    // 1/sqrt(0.07) = 3.78 (common practice).
    #[test]
    fn detuned_bank_resonates_below_tuning() {
        let s = site();
        let m = HarmonicModel::new(
            400.0,
            s.impedance_ohm(),
            s.short_circuit_kva(),
            &[step(300.0, Some(0.07))],
            Spectrum::default(),
        );
        let h = m.resonance_order(1).unwrap();
        assert!(h < 1.0 / 0.07f64.sqrt(), "{h}");
        // At the tuning order the branch is a series resonance: |Z| dips far below the
        // supply's own impedance there.
        let zt = m.impedance(1, 1.0 / 0.07f64.sqrt()).norm();
        assert!(zt < 0.2 * m.supply_impedance(3.78).norm());
    }
}

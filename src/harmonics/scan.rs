//! Impedance scans: |Z(h)| seen by the load on a fine grid of harmonic orders, and the
//! parallel-resonance peaks found on it.
//!
//! A peak is an interior local maximum of |Z(h)| on the grid (the ends of the grid are
//! not peaks) where the bank raises the impedance above that of the supply alone; each is
//! refined by a golden-section search on the exact impedance between its grid
//! neighbours, so its order is good to far better than the grid step.
//!
//! [`Scanner`] makes scanning many states cheap: it computes each step's susceptance at
//! every grid order once, and [`Scanner::scan_all`] visits every subset of the switched
//! steps in Gray-code order, so that going from one state to the next adds or removes one
//! step's column. Steps are lossless, so the bank's admittance is a real susceptance per
//! order and the work per state is one pass of additions over the grid.

use super::HarmonicModel;
use crate::bank::BankState;
use serde::Serialize;

/// A grid of harmonic orders.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ScanGrid {
    /// First order. Default 1.
    pub from: f64,
    /// Last order. Default 50.
    pub to: f64,
    /// Spacing, orders. Default 0.01.
    pub step: f64,
}

impl Default for ScanGrid {
    fn default() -> Self {
        ScanGrid {
            from: 1.0,
            to: 50.0,
            step: 0.01,
        }
    }
}

impl ScanGrid {
    /// Number of grid points.
    pub fn len(&self) -> usize {
        ((self.to - self.from) / self.step + 1e-9).floor() as usize + 1
    }

    /// True when the grid has no points (never for a checked grid).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The order of grid point j.
    pub fn order(&self, j: usize) -> f64 {
        self.from + j as f64 * self.step
    }

    /// Checks the grid: 1 ≤ from < to ≤ 200 and 0.0001 ≤ step ≤ (to − from)/2, with at
    /// most 10 million points. The message names the allowed ranges.
    pub fn check(&self) -> Result<(), String> {
        let ok_ends = self.from.is_finite()
            && self.to.is_finite()
            && self.from >= 1.0
            && self.to <= 200.0
            && self.from < self.to;
        if !ok_ends {
            return Err(format!(
                "orders {} to {}: the scan must run from an order of at least 1 to a higher \
                 order of at most 200",
                self.from, self.to
            ));
        }
        let ok_step = self.step.is_finite()
            && self.step >= 1e-4
            && self.step <= (self.to - self.from) / 2.0
            && (self.to - self.from) / self.step <= 1e7;
        if !ok_step {
            return Err(format!(
                "resolution {}: allowed 0.0001 to {} orders, and at most 10 million points",
                self.step,
                (self.to - self.from) / 2.0
            ));
        }
        Ok(())
    }
}

/// A parallel-resonance peak of |Z(h)|.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Peak {
    /// Harmonic order of the peak.
    pub order: f64,
    /// |Z| at the peak, ohm per phase.
    pub impedance_ohm: f64,
    /// |Z| at the peak over |Z| of the supply alone at that order.
    pub amplification: f64,
}

/// Golden-section refinement of a maximum of |Z(h)| in [a, b].
fn refine(model: &HarmonicModel, mask: BankState, mut a: f64, mut b: f64) -> f64 {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let z = |h: f64| model.impedance(mask, h).norm();
    let mut c = b - g * (b - a);
    let mut d = a + g * (b - a);
    let (mut zc, mut zd) = (z(c), z(d));
    for _ in 0..50 {
        if zc > zd {
            b = d;
            d = c;
            zd = zc;
            c = b - g * (b - a);
            zc = z(c);
        } else {
            a = c;
            c = d;
            zc = zd;
            d = a + g * (b - a);
            zd = z(d);
        }
        if b - a < 1e-10 {
            break;
        }
    }
    0.5 * (a + b)
}

/// Turns the grid minima of |Y|² into refined peaks, strongest first.
fn finish(model: &HarmonicModel, mask: BankState, grid: &ScanGrid, minima: &[usize]) -> Vec<Peak> {
    let mut out: Vec<Peak> = minima
        .iter()
        .map(|&j| {
            let h = refine(model, mask, grid.order(j - 1), grid.order(j + 1));
            let z = model.impedance(mask, h).norm();
            let z0 = model.impedance_without_bank(h).norm();
            Peak {
                order: h,
                impedance_ohm: z,
                amplification: if z0 > 0.0 { z / z0 } else { 1.0 },
            }
        })
        .collect();
    out.sort_by(|a, b| b.impedance_ohm.total_cmp(&a.impedance_ohm));
    out
}

/// Grid indices of interior local minima of |Y|² (maxima of |Z|) where the bank lowers
/// |Y| below that of the supply alone. `y2(j)` gives (|Y|², |Y_supply|²) at point j.
fn minima(n: usize, mut y2: impl FnMut(usize) -> (f64, f64), out: &mut Vec<usize>) {
    out.clear();
    if n < 3 {
        return;
    }
    let mut prev = y2(0).0;
    let (mut cur, mut cur_ref) = y2(1);
    for j in 1..n - 1 {
        let (next, next_ref) = y2(j + 1);
        if cur < prev && cur <= next && cur < cur_ref {
            out.push(j);
        }
        prev = cur;
        cur = next;
        cur_ref = next_ref;
    }
}

/// Parallel-resonance peaks of one state on a grid, strongest first, computed directly
/// (no precomputed columns; for one or a few states).
pub fn peaks(model: &HarmonicModel, mask: BankState, grid: &ScanGrid) -> Vec<Peak> {
    if model.is_stiff() || mask.and(model.all_mask()).is_empty() {
        return Vec::new();
    }
    let mut found = Vec::new();
    minima(
        grid.len(),
        |j| {
            let h = grid.order(j);
            let y = model.base_admittance(h).unwrap_or_default();
            let b = y.im + model.bank_susceptance(mask, h);
            (y.re * y.re + b * b, y.norm_sqr())
        },
        &mut found,
    );
    finish(model, mask, grid, &found)
}

/// Precomputed scan of one site: the grid, the supply admittance and every step's
/// susceptance at each grid order.
#[derive(Debug, Clone)]
pub struct Scanner {
    model: HarmonicModel,
    grid: ScanGrid,
    /// Supply (and damping) conductance per grid point, siemens.
    g: Vec<f64>,
    /// Supply susceptance per grid point, siemens.
    b0: Vec<f64>,
    /// Step susceptance columns, step-major, siemens.
    cols: Vec<Vec<f64>>,
}

/// Recompute the running susceptance from scratch this often in a Gray-code walk, to keep
/// the rounding of many additions and removals from building up.
const REFRESH_EVERY: u64 = 1024;

impl Scanner {
    /// Precomputes the scan of `model` on `grid` (a checked grid; see [`ScanGrid::check`]).
    pub fn new(model: HarmonicModel, grid: ScanGrid) -> Self {
        let n = grid.len();
        let mut g = Vec::with_capacity(n);
        let mut b0 = Vec::with_capacity(n);
        for j in 0..n {
            let y = model.base_admittance(grid.order(j)).unwrap_or_default();
            g.push(y.re);
            b0.push(y.im);
        }
        let cols = (0..model.len())
            .map(|i| {
                (0..n)
                    .map(|j| model.step_susceptance(i, grid.order(j)))
                    .collect()
            })
            .collect();
        Scanner {
            model,
            grid,
            g,
            b0,
            cols,
        }
    }

    /// The model scanned.
    pub fn model(&self) -> &HarmonicModel {
        &self.model
    }

    /// The grid.
    pub fn grid(&self) -> &ScanGrid {
        &self.grid
    }

    /// |Z| at grid point j with the steps in `mask`, ohm (0 for a stiff bus).
    pub fn impedance_at(&self, j: usize, mask: BankState) -> f64 {
        if self.model.is_stiff() {
            return 0.0;
        }
        let mut b = self.b0[j];
        for n in mask.and(self.model.all_mask()) {
            b += self.cols[n - 1][j];
        }
        1.0 / (self.g[j] * self.g[j] + b * b).sqrt()
    }

    /// |Z(h)| over the grid for one state, ohm.
    pub fn curve(&self, mask: BankState) -> Vec<f64> {
        (0..self.grid.len())
            .map(|j| self.impedance_at(j, mask))
            .collect()
    }

    /// Peaks of one state, strongest first.
    pub fn scan(&self, mask: BankState) -> Vec<Peak> {
        let mask = mask.and(self.model.all_mask());
        let mut b = vec![0.0; self.grid.len()];
        self.fill(mask, &mut b);
        let mut found = Vec::new();
        self.peaks_from(mask, &b, &mut found)
    }

    fn fill(&self, mask: BankState, b: &mut [f64]) {
        b.copy_from_slice(&self.b0);
        for n in mask {
            for (x, c) in b.iter_mut().zip(&self.cols[n - 1]) {
                *x += c;
            }
        }
    }

    fn peaks_from(&self, mask: BankState, b: &[f64], found: &mut Vec<usize>) -> Vec<Peak> {
        if self.model.is_stiff() || mask.is_empty() {
            return Vec::new();
        }
        let (g, b0) = (&self.g, &self.b0);
        minima(
            b.len(),
            |j| {
                let gg = g[j] * g[j];
                (gg + b[j] * b[j], gg + b0[j] * b0[j])
            },
            found,
        );
        finish(&self.model, mask, &self.grid, found)
    }

    /// Peaks of every state made of the steps in `fixed` plus any subset of the steps in
    /// `free`, in Gray-code order (each state differs from the one before by one step).
    /// Returns (state, peaks strongest first) per state; 2^(number of free steps)
    /// entries. At most 24 free steps (16 million states).
    pub fn scan_all(&self, fixed: BankState, free: BankState) -> Vec<(BankState, Vec<Peak>)> {
        let all = self.model.all_mask();
        let fixed = fixed.and(all);
        let free = free.and(all).minus(fixed);
        let numbers = free.numbers();
        let n_states = 1u64 << numbers.len().min(24);
        let mut out = Vec::with_capacity(n_states as usize);
        let mut b = vec![0.0; self.grid.len()];
        let mut found = Vec::new();
        let mut state = fixed;
        self.fill(state, &mut b);
        out.push((state, self.peaks_from(state, &b, &mut found)));
        // Gray code: state k differs from state k − 1 by the free step whose position
        // among the free steps is the number of trailing zeros of k.
        for k in 1..n_states {
            let n = numbers[k.trailing_zeros() as usize];
            let closing = !state.contains(n);
            state = if closing {
                state.with(n)
            } else {
                state.without(n)
            };
            if k % REFRESH_EVERY == 0 {
                self.fill(state, &mut b);
            } else if closing {
                for (x, c) in b.iter_mut().zip(&self.cols[n - 1]) {
                    *x += c;
                }
            } else {
                for (x, c) in b.iter_mut().zip(&self.cols[n - 1]) {
                    *x -= c;
                }
            }
            out.push((state, self.peaks_from(state, &b, &mut found)));
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bank::StepSpec;
    use crate::harmonics::{HarmonicOptions, Spectrum};
    use crate::supply::{SupplyParams, Transformer};

    fn model(kvars: &[(f64, Option<f64>)]) -> HarmonicModel {
        let supply = SupplyParams {
            transformer: Some(Transformer {
                rated_kva: 1000.0,
                impedance_pct: 6.0,
                x_over_r: 8.0,
            }),
            grid_short_circuit_kva: Some(250_000.0),
            ..SupplyParams::default()
        };
        let steps: Vec<StepSpec> = kvars
            .iter()
            .map(|&(kvar, detuning)| StepSpec {
                detuning,
                ..StepSpec::plain(kvar)
            })
            .collect();
        HarmonicModel::new(
            &supply,
            &steps,
            Spectrum::default(),
            HarmonicOptions::default(),
        )
    }

    #[test]
    fn gray_walk_equals_direct_scans() {
        let m = model(&[
            (25.0, None),
            (50.0, None),
            (50.0, Some(0.07)),
            (100.0, Some(0.14)),
            (75.0, None),
        ]);
        let sc = Scanner::new(m.clone(), ScanGrid::default());
        let all = sc.scan_all(BankState::EMPTY, BankState::first(5));
        assert_eq!(all.len(), 32);
        let mut seen: Vec<u64> = all.iter().map(|x| x.0.bits()).collect();
        seen.sort_unstable();
        assert_eq!(seen, (0..32).collect::<Vec<_>>());
        for (state, p) in &all {
            let direct = peaks(&m, *state, &ScanGrid::default());
            assert_eq!(p.len(), direct.len(), "state {state}");
            for (a, b) in p.iter().zip(&direct) {
                assert!((a.order - b.order).abs() < 1e-6, "state {state}");
            }
        }
        assert!(all[0].1.is_empty());
    }

    #[test]
    fn grid_checks_name_the_range() {
        assert!(ScanGrid::default().check().is_ok());
        assert_eq!(ScanGrid::default().len(), 4901);
        let e = ScanGrid {
            step: 0.0,
            ..ScanGrid::default()
        }
        .check()
        .unwrap_err();
        assert!(e.contains("0.0001"), "{e}");
    }
}

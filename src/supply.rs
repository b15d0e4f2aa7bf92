//! The supply: grid and transformer impedance seen from the low-voltage bus, the
//! short-circuit power there, and the per-phase complex solution of the bus voltage.
//!
//! The supply is modelled per phase as a Thevenin source: an ideal EMF (the no-load bus
//! voltage) behind the series impedance of the grid and the transformer. Phases are not
//! mutually coupled, so each phase is solved on its own, in its own angle reference. The
//! load is a constant-power sink (it draws the P and Q of the profile whatever the
//! voltage); connected capacitor steps are shunt admittances, so their output scales with
//! (U/U_n)^2. A step connected line to line appears on each of its two phases as the
//! admittance it presents at balanced voltages ([`crate::bank::Shunt::per_phase`]): half
//! its Q on each, and a P that it takes from one phase and gives to the other. With no
//! transformer and an infinite grid the impedance is zero and the bus voltage is fixed at
//! the EMF.
//!
//! [`CoupledSolver`] solves the three phases together instead, with each step as it is
//! connected.

use crate::bank::Shunt;
use num_complex::Complex64;

/// A transformer between the grid and the bus.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Transformer {
    /// Rated apparent power S_T, kVA.
    pub rated_kva: f64,
    /// Short-circuit impedance u_k, % of rated.
    pub impedance_pct: f64,
    /// Reactance-to-resistance ratio X/R of the short-circuit impedance.
    pub x_over_r: f64,
}

/// Supply parameters at the bus.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SupplyParams {
    /// Nominal voltage U_n, line-to-line, V. Default 400 V.
    pub nominal_voltage_v: f64,
    /// System frequency, Hz (50 or 60). Default 50 Hz.
    pub frequency_hz: f64,
    /// The transformer feeding the bus, if any. Default none.
    pub transformer: Option<Transformer>,
    /// Short-circuit power of the grid at the transformer's primary, kVA; `None` is an
    /// infinite grid. Default infinite.
    pub grid_short_circuit_kva: Option<f64>,
    /// X/R ratio of the grid impedance. Default 10.
    pub grid_x_over_r: f64,
    /// No-load bus voltage as a fraction of U_n (transformer tap, grid voltage). Default 1.0.
    pub source_voltage_pu: f64,
}

impl Default for SupplyParams {
    fn default() -> Self {
        SupplyParams {
            nominal_voltage_v: 400.0,
            frequency_hz: 50.0,
            transformer: None,
            grid_short_circuit_kva: None,
            grid_x_over_r: 10.0,
            source_voltage_pu: 1.0,
        }
    }
}

/// Splits an impedance magnitude into R + jX for a given X/R ratio.
fn split(z_abs: f64, x_over_r: f64) -> Complex64 {
    let r = z_abs / (1.0 + x_over_r * x_over_r).sqrt();
    Complex64::new(r, r * x_over_r)
}

impl SupplyParams {
    /// Short-circuit power at the bus, kVA: 1/S_sc = 1/S_sc,grid + u_k/S_T (the usual
    /// magnitude estimate). Infinite with no transformer and an infinite grid.
    pub fn short_circuit_kva(&self) -> f64 {
        let mut inv = 0.0;
        if let Some(g) = self.grid_short_circuit_kva {
            inv += 1.0 / g;
        }
        if let Some(t) = self.transformer {
            inv += t.impedance_pct / 100.0 / t.rated_kva;
        }
        if inv > 0.0 {
            1.0 / inv
        } else {
            f64::INFINITY
        }
    }

    /// Per-phase (star-equivalent) series impedance of grid plus transformer at the
    /// fundamental, ohm.
    pub fn impedance_ohm(&self) -> Complex64 {
        let u2 = self.nominal_voltage_v * self.nominal_voltage_v;
        let mut z = Complex64::new(0.0, 0.0);
        if let Some(g) = self.grid_short_circuit_kva {
            z += split(u2 / (g * 1e3), self.grid_x_over_r);
        }
        if let Some(t) = self.transformer {
            z += split(
                t.impedance_pct / 100.0 * u2 / (t.rated_kva * 1e3),
                t.x_over_r,
            );
        }
        z
    }

    /// Nominal line-to-neutral voltage, V.
    pub fn nominal_ln_v(&self) -> f64 {
        self.nominal_voltage_v / 3f64.sqrt()
    }
}

/// Solution of one phase of the bus for one interval.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PhaseSolution {
    /// Bus voltage magnitude, line-to-neutral, V.
    pub v_ln: f64,
    /// Active power through the metering point (load plus bank), kW.
    pub p_kw: f64,
    /// Reactive power through the metering point (load minus bank output), kvar.
    pub q_kvar: f64,
    /// Reactive power delivered by the connected steps on this phase, kvar.
    pub q_bank_kvar: f64,
}

/// Thevenin equivalent of one phase as the load sees it, with the connected capacitors
/// folded in: E' = E/(1 + Y·Z), Z' = Z/(1 + Y·Z) with Y = G + jB.
#[derive(Debug, Clone, Copy, Default)]
struct Equivalent {
    g: f64,
    b: f64,
    e2: f64,
    e: Complex64,
    z: Complex64,
}

/// Closed-form per-phase bus-voltage solver for a constant-power load behind a Thevenin
/// source with shunt capacitors.
///
/// With E'·conj(V) = |V|² + Z'·conj(S) and W = |V|², the squared magnitude of both sides
/// gives W² + (2·Re A − |E'|²)·W + |A|² = 0 with A = Z'·conj(S); the operating point is
/// the high-voltage root. No iteration, so the per-interval cost is fixed.
#[derive(Debug, Clone)]
pub struct BusSolver {
    e_ln: f64,
    z: Complex64,
    eq: [Equivalent; 3],
    /// Intervals in which the load exceeded what the supply can carry on at least one
    /// phase (no real solution); the voltage is then taken at the nose of the curve. Each
    /// interval counts once, however many phases have no solution.
    pub nonconverged: u64,
}

impl BusSolver {
    /// Builds a solver for a supply.
    pub fn new(supply: &SupplyParams) -> Self {
        let e_ln = supply.nominal_ln_v() * supply.source_voltage_pu;
        let z = supply.impedance_ohm();
        let mut s = BusSolver {
            e_ln,
            z,
            eq: [Equivalent::default(); 3],
            nonconverged: 0,
        };
        for ph in 0..3 {
            s.fold(ph, 0.0, 0.0);
        }
        s
    }

    fn fold(&mut self, ph: usize, g: f64, b: f64) {
        let d = Complex64::new(1.0, 0.0) + Complex64::new(g, b) * self.z;
        let e = Complex64::new(self.e_ln, 0.0) / d;
        self.eq[ph] = Equivalent {
            g,
            b,
            e2: e.norm_sqr(),
            e,
            z: self.z / d,
        };
    }

    /// Sets the admittance of the connected steps ([`Shunt::per_phase`] on each phase);
    /// call it whenever the bank state or a step's health changes.
    pub fn set_bank(&mut self, y: &Shunt) {
        let (g, b) = y.per_phase();
        for ph in 0..3 {
            if self.eq[ph].b != b[ph] || self.eq[ph].g != g[ph] {
                self.fold(ph, g[ph], b[ph]);
            }
        }
    }

    /// Solves the three phases for a load of `p_kw`/`q_kvar` per phase with the bank set
    /// by [`BusSolver::set_bank`].
    #[inline(always)]
    pub fn solve(&mut self, p_kw: &[f64; 3], q_kvar: &[f64; 3]) -> [PhaseSolution; 3] {
        let mut out = [PhaseSolution::default(); 3];
        let mut unsolved = false;
        for ph in 0..3 {
            let (w, solved) = self.squared_voltage(ph, p_kw[ph] * 1e3, q_kvar[ph] * 1e3);
            unsolved |= !solved;
            let q_bank = self.eq[ph].b * w * 1e-3;
            out[ph] = PhaseSolution {
                v_ln: w.sqrt(),
                p_kw: p_kw[ph] + self.eq[ph].g * w * 1e-3,
                q_kvar: q_kvar[ph] - q_bank,
                q_bank_kvar: q_bank,
            };
        }
        if unsolved {
            self.nonconverged += 1;
        }
        out
    }

    /// |V|² of one phase for a load S = P + jQ (W, var), and whether a real solution
    /// exists (if not, |V|² at the nose of the curve).
    #[inline]
    fn squared_voltage(&self, ph: usize, p: f64, q: f64) -> (f64, bool) {
        let eq = &self.eq[ph];
        // A = Z'·conj(S).
        let a_re = eq.z.re * p + eq.z.im * q;
        let a_im = eq.z.im * p - eq.z.re * q;
        let m = eq.e2 - 2.0 * a_re;
        let disc = m * m - 4.0 * (a_re * a_re + a_im * a_im);
        if disc < 0.0 {
            return ((0.5 * m).max(0.0), false);
        }
        (0.5 * (m + disc.sqrt()), true)
    }

    /// Complex bus voltage of one phase in its own angle reference (for checks and
    /// reports, not the per-sample loop).
    pub fn phasor(&mut self, ph: usize, p_kw: f64, q_kvar: f64) -> Complex64 {
        let (w, _) = self.squared_voltage(ph, p_kw * 1e3, q_kvar * 1e3);
        let a = self.eq[ph].z * Complex64::new(p_kw * 1e3, -q_kvar * 1e3);
        ((Complex64::new(w, 0.0) + a) / self.eq[ph].e).conj()
    }
}

impl BusSolver {
    /// The bus voltage of phase `ph` as a phasor in the common reference (the source's
    /// phase a at 0°, b at −120°, c at +120°), V line to neutral, from its squared
    /// magnitude `w` (as solved) and the phase's load `p_kw`, `q_kvar`. Each phase is
    /// solved in its own reference; its angle there is turned by the phase's nominal angle.
    #[inline]
    pub fn phasor_w(&self, ph: usize, w: f64, p_kw: f64, q_kvar: f64) -> Complex64 {
        let eq = &self.eq[ph];
        let a = eq.z * Complex64::new(p_kw * 1e3, -q_kvar * 1e3);
        let own = ((Complex64::new(w, 0.0) + a) / eq.e).conj();
        own * ROTATION[ph.min(2)]
    }
}

/// e^(j·0°), e^(−j·120°), e^(+j·120°): the nominal angles of phases a, b and c.
pub const ROTATION: [Complex64; 3] = [
    Complex64::new(1.0, 0.0),
    Complex64::new(-0.5, -0.866_025_403_784_438_6),
    Complex64::new(-0.5, 0.866_025_403_784_438_6),
];

/// The transformer's winding connection, as it sets the zero-sequence impedance seen
/// from the low-voltage bus.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Winding {
    /// Delta primary, earthed star secondary (the usual distribution transformer): the
    /// delta blocks the grid's zero-sequence path, so Z0 = Z_T (its short-circuit
    /// impedance, the usual estimate for a core-type unit).
    #[default]
    Dyn,
    /// Earthed star on both sides: the grid's zero-sequence path is in series,
    /// Z0 = Z_T + Z_grid (the grid's Z0 taken equal to its Z1).
    YNyn,
}

impl Winding {
    /// The name used in scenarios: `Dyn` or `YNyn`.
    pub fn name(self) -> &'static str {
        match self {
            Winding::Dyn => "Dyn",
            Winding::YNyn => "YNyn",
        }
    }
}

/// How the bus is solved.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum BusModel {
    /// Each phase on its own in closed form ([`BusSolver`]): no coupling between the
    /// phases (the same impedance for every sequence). The default.
    #[default]
    PerPhase,
    /// The three phases together through the 3×3 phase impedance of grid and
    /// transformer ([`CoupledSolver`]), with the winding's zero-sequence impedance.
    Coupled(Winding),
}

impl SupplyParams {
    /// Zero- and positive-sequence impedance of grid plus transformer seen from the bus,
    /// ohm (the negative sequence equals the positive one). With no transformer both are
    /// the grid's.
    pub fn sequence_impedances(&self, winding: Winding) -> (Complex64, Complex64) {
        let u2 = self.nominal_voltage_v * self.nominal_voltage_v;
        let grid = self
            .grid_short_circuit_kva
            .map_or(Complex64::new(0.0, 0.0), |g| {
                split(u2 / (g * 1e3), self.grid_x_over_r)
            });
        let z1 = self.impedance_ohm();
        let z0 = match (self.transformer, winding) {
            (Some(t), Winding::Dyn) => split(
                t.impedance_pct / 100.0 * u2 / (t.rated_kva * 1e3),
                t.x_over_r,
            ),
            (Some(_), Winding::YNyn) => z1,
            (None, _) => grid,
        };
        (z0, z1)
    }
}

/// The inverse of a 3×3 complex matrix (adjugate over determinant); `None` when singular.
fn inv3(m: &[[Complex64; 3]; 3]) -> Option<[[Complex64; 3]; 3]> {
    let c = |r: usize, k: usize| {
        let (r1, r2) = ((r + 1) % 3, (r + 2) % 3);
        let (k1, k2) = ((k + 1) % 3, (k + 2) % 3);
        m[r1][k1] * m[r2][k2] - m[r1][k2] * m[r2][k1]
    };
    let det = m[0][0] * c(0, 0) + m[0][1] * c(0, 1) + m[0][2] * c(0, 2);
    if det.norm() == 0.0 || !det.is_finite() {
        return None;
    }
    let mut out = [[Complex64::new(0.0, 0.0); 3]; 3];
    for (r, row) in out.iter_mut().enumerate() {
        for (k, x) in row.iter_mut().enumerate() {
            // The adjugate is the transpose of the cofactor matrix.
            *x = c(k, r) / det;
        }
    }
    Some(out)
}

fn mat_vec(m: &[[Complex64; 3]; 3], v: &[Complex64; 3]) -> [Complex64; 3] {
    std::array::from_fn(|r| m[r][0] * v[0] + m[r][1] * v[1] + m[r][2] * v[2])
}

/// The three phases of the bus solved together: source EMFs E (a balanced positive
/// sequence at the no-load voltage) behind the 3×3 phase impedance of grid and
/// transformer, Z_abc = Z1·1 + (Z0 − Z1)/3·J (J all ones: the sequence impedances
/// Z0, Z1 = Z2 turned into phase quantities), the connected steps as their nodal
/// admittance Y_bank (an earthed star or a step line to neutral jB on the diagonal; a
/// delta's branches and a step line to line jB between two lines, +jB on both diagonal
/// places and −jB on both crossed ones), and constant-power loads line to neutral.
///
/// The bus voltages satisfy V = E − Z_abc·(I_load(V) + Y_bank·V), that is
/// V = M·E − M·Z_abc·I_load(V) with M = (1 + Z_abc·Y_bank)⁻¹ (worked out once per bank
/// state), solved by fixed-point iteration from the no-load voltages until no phase moves
/// by more than 1e-12 of E (at most [`CoupledSolver::MAX_ITERATIONS`]; past that, or
/// when a voltage collapses, the interval counts as unsolved). With Z0 = Z1 the phases
/// do not couple and the result is [`BusSolver`]'s.
#[derive(Debug, Clone)]
pub struct CoupledSolver {
    e: [Complex64; 3],
    z: [[Complex64; 3]; 3],
    /// The connected steps: line to neutral on the diagonal (`shunt.earthed`), and
    /// between lines the delta branches plus the steps line to line (`line_b`).
    shunt: Shunt,
    line_b: [f64; 3],
    me: [Complex64; 3],
    mz: [[Complex64; 3]; 3],
    e_abs: f64,
}

impl CoupledSolver {
    /// Iterations allowed before an interval counts as unsolved.
    pub const MAX_ITERATIONS: usize = 200;

    /// A solver for `supply` with the transformer's `winding`.
    pub fn new(supply: &SupplyParams, winding: Winding) -> Self {
        let e_abs = supply.nominal_ln_v() * supply.source_voltage_pu;
        let e = ROTATION.map(|r| r * e_abs);
        let (z0, z1) = supply.sequence_impedances(winding);
        let zs = (z0 + z1 * 2.0) / 3.0;
        let zm = (z0 - z1) / 3.0;
        let z = std::array::from_fn(|r| std::array::from_fn(|k| if r == k { zs } else { zm }));
        let mut s = CoupledSolver {
            e,
            z,
            shunt: Shunt {
                delta: f64::NAN,
                ..Shunt::default()
            },
            line_b: [0.0; 3],
            me: e,
            mz: z,
            e_abs,
        };
        s.set_bank(&Shunt::default());
        s
    }

    /// The phase impedance matrix Z_abc, ohm.
    pub fn impedance_matrix(&self) -> [[Complex64; 3]; 3] {
        self.z
    }

    /// The nodal admittance of the connected steps, Y_bank, siemens (all imaginary).
    pub fn bank_admittance(&self) -> [[Complex64; 3]; 3] {
        let mut y: [[f64; 3]; 3] = std::array::from_fn(|r| {
            std::array::from_fn(|k| if r == k { self.shunt.earthed[r] } else { 0.0 })
        });
        for (pair, &b) in self.line_b.iter().enumerate() {
            let (x, k) = (pair, (pair + 1) % 3);
            y[x][x] += b;
            y[k][k] += b;
            y[x][k] -= b;
            y[k][x] -= b;
        }
        y.map(|row| row.map(|b| Complex64::new(0.0, b)))
    }

    /// Sets the admittance of the connected steps.
    pub fn set_bank(&mut self, shunt: &Shunt) {
        if self.shunt == *shunt {
            return;
        }
        self.shunt = *shunt;
        // A delta's three branches are a third of its star equivalent each.
        self.line_b = std::array::from_fn(|p| shunt.delta / 3.0 + shunt.line[p]);
        let one = Complex64::new(1.0, 0.0);
        let y = self.bank_admittance();
        let a: [[Complex64; 3]; 3] = std::array::from_fn(|r| {
            std::array::from_fn(|k| {
                let zy: Complex64 = (0..3).map(|j| self.z[r][j] * y[j][k]).sum();
                if r == k {
                    one + zy
                } else {
                    zy
                }
            })
        });
        let m = inv3(&a).unwrap_or([[one, Complex64::default(), Complex64::default()]; 3]);
        self.me = mat_vec(&m, &self.e);
        self.mz = std::array::from_fn(|r| {
            std::array::from_fn(|k| {
                m[r][0] * self.z[0][k] + m[r][1] * self.z[1][k] + m[r][2] * self.z[2][k]
            })
        });
    }

    /// The bus voltages (V, line to neutral, in the source's reference) for loads
    /// `p_kw`/`q_kvar` per phase, and whether the iteration settled.
    pub fn solve(&self, p_kw: &[f64; 3], q_kvar: &[f64; 3]) -> ([Complex64; 3], bool) {
        let s: [Complex64; 3] =
            std::array::from_fn(|x| Complex64::new(p_kw[x] * 1e3, q_kvar[x] * 1e3));
        let mut v = self.me;
        let tol = 1e-12 * self.e_abs;
        for _ in 0..Self::MAX_ITERATIONS {
            let i: [Complex64; 3] = std::array::from_fn(|x| (s[x] / v[x]).conj());
            let zi = mat_vec(&self.mz, &i);
            let next: [Complex64; 3] = std::array::from_fn(|x| self.me[x] - zi[x]);
            let moved = (0..3).map(|x| (next[x] - v[x]).norm()).fold(0.0, f64::max);
            v = next;
            if !v
                .iter()
                .all(|x| x.is_finite() && x.norm() > 1e-3 * self.e_abs)
            {
                return (self.me, false);
            }
            if moved <= tol {
                return (v, true);
            }
        }
        (v, false)
    }

    /// Solves `samples` (at most [`LANE`]) into `out` from entry 0, as
    /// [`BusSolver::solve_lanes`] fills it, and the phasors into `v_out`.
    pub fn solve_lanes(
        &self,
        samples: &[crate::profile::LoadSample],
        out: &mut Lanes,
        v_out: &mut [[Complex64; LANE]; 3],
    ) {
        let sqrt3 = 3f64.sqrt();
        for (i, smp) in samples.iter().take(LANE).enumerate() {
            let (v, ok) = self.solve(&smp.p_kw, &smp.q_kvar);
            let mut q3 = 0.0;
            let (mut lo, mut hi) = (f64::INFINITY, 0.0f64);
            // What the steps between lines give and take on each phase:
            // S_x = V_x·conj(I), S_y = V_y·conj(−I) with I = jB·(V_x − V_y).
            let mut s_line = [Complex64::default(); 3];
            for (pair, &b) in self.line_b.iter().enumerate() {
                if b == 0.0 {
                    continue;
                }
                let (x, y) = (pair, (pair + 1) % 3);
                let cur = Complex64::new(0.0, b) * (v[x] - v[y]);
                s_line[x] += v[x] * cur.conj();
                s_line[y] -= v[y] * cur.conj();
            }
            for ph in 0..3 {
                let w = v[ph].norm_sqr();
                out.w[ph][i] = w;
                out.q_bank[ph][i] = self.shunt.earthed[ph] * w * 1e-3 - s_line[ph].im * 1e-3;
                out.p_bank[ph][i] = s_line[ph].re * 1e-3;
                q3 += smp.q_kvar[ph] - out.q_bank[ph][i];
                lo = lo.min(w);
                hi = hi.max(w);
                v_out[ph][i] = v[ph];
            }
            let q_ph: [f64; 3] = std::array::from_fn(|ph| smp.q_kvar[ph] - out.q_bank[ph][i]);
            out.q4[i] = [q3, q_ph[0], q_ph[1], q_ph[2]];
            out.put_load(i, smp);
            out.v_ll_min[i] = lo.sqrt() * sqrt3;
            out.v_ll_max[i] = hi.sqrt() * sqrt3;
            out.unsolved[i] = u64::from(!ok);
        }
    }
}

/// Intervals solved together by [`BusSolver::solve_lanes`].
pub const LANE: usize = 32;

/// The bus solutions of up to [`LANE`] consecutive intervals with one bank state, in
/// arrays (one entry per interval), as [`BusSolver::solve`] would give them one by one.
#[derive(Debug, Clone)]
pub struct Lanes {
    /// |V|² of each phase, V² (line to neutral).
    pub w: [[f64; LANE]; 3],
    /// Reactive power of the connected steps on each phase, kvar.
    pub q_bank: [[f64; LANE]; 3],
    /// Active power the connected steps draw on each phase, kW: zero unless a step is
    /// connected line to line (or, on the coupled bus, in delta), which takes P from one
    /// phase and gives it to another (lossless: the phases add up to zero on the coupled
    /// bus, and on a balanced per-phase bus).
    pub p_bank: [[f64; LANE]; 3],
    /// Active power through the metering point in the metrics' four lanes, kW: the
    /// three-phase P (the load's, the phases added in the order a, b, c; the steps are
    /// lossless), then each phase's load plus `p_bank`.
    pub p4: [[f64; 4]; LANE],
    /// Reactive power through the metering point in the same four lanes, kvar: the
    /// three-phase Q (the phases' load minus bank output, added in the order a, b, c),
    /// then each phase's load minus `q_bank`.
    pub q4: [[f64; 4]; LANE],
    /// The load's own three-phase reactive power (phases added a, b, c), kvar.
    pub load_q: [f64; LANE],
    /// Lowest and highest phase voltage as √3 × V_ln, V.
    pub v_ll_min: [f64; LANE],
    /// See `v_ll_min`.
    pub v_ll_max: [f64; LANE],
    /// 1 where at least one phase had no solution (the nose of the curve was used).
    pub unsolved: [u64; LANE],
}

impl Default for Lanes {
    fn default() -> Self {
        Lanes {
            w: [[0.0; LANE]; 3],
            q_bank: [[0.0; LANE]; 3],
            p_bank: [[0.0; LANE]; 3],
            p4: [[0.0; 4]; LANE],
            q4: [[0.0; 4]; LANE],
            load_q: [0.0; LANE],
            v_ll_min: [0.0; LANE],
            v_ll_max: [0.0; LANE],
            unsolved: [0; LANE],
        }
    }
}

impl Lanes {
    /// Entry `i`'s active power in the metrics' four lanes (`p4`, from its sample and
    /// `p_bank`, which must be in place) and the load's own three-phase Q (`load_q`).
    #[inline(always)]
    fn put_load(&mut self, i: usize, s: &crate::profile::LoadSample) {
        self.p4[i] = [
            s.p_kw[0] + s.p_kw[1] + s.p_kw[2],
            s.p_kw[0] + self.p_bank[0][i],
            s.p_kw[1] + self.p_bank[1][i],
            s.p_kw[2] + self.p_bank[2][i],
        ];
        self.load_q[i] = s.q_kvar[0] + s.q_kvar[1] + s.q_kvar[2];
    }

    /// The solution of entry `i` as [`BusSolver::solve`] gives it, for the load `s`.
    #[inline]
    pub fn phases(&self, i: usize, s: &crate::profile::LoadSample) -> [PhaseSolution; 3] {
        std::array::from_fn(|ph| PhaseSolution {
            v_ln: self.w[ph][i].sqrt(),
            p_kw: s.p_kw[ph] + self.p_bank[ph][i],
            q_kvar: s.q_kvar[ph] - self.q_bank[ph][i],
            q_bank_kvar: self.q_bank[ph][i],
        })
    }
}

impl BusSolver {
    /// Solves the loads `samples` (at most [`LANE`]) with the bank set by
    /// [`BusSolver::set_bank`], into `out` from entry 0. Bit for bit what
    /// [`BusSolver::solve`] gives interval by interval, computed in arrays that the
    /// compiler vectorises (four intervals at a time where the processor has AVX2; no
    /// fused multiply-add, which would round differently); it does not count the
    /// unsolved intervals, which `out` marks.
    #[inline]
    pub fn solve_lanes(&self, samples: &[crate::profile::LoadSample], out: &mut Lanes) {
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx2") {
                // SAFETY: the processor has AVX2, checked just above.
                unsafe { self.solve_lanes_avx2(samples, out) };
                return;
            }
        }
        self.solve_lanes_body(samples, out);
    }

    /// [`BusSolver::solve_lanes`] compiled for AVX2.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn solve_lanes_avx2(&self, samples: &[crate::profile::LoadSample], out: &mut Lanes) {
        self.solve_lanes_body(samples, out);
    }

    #[inline(always)]
    fn solve_lanes_body(&self, samples: &[crate::profile::LoadSample], out: &mut Lanes) {
        let n = samples.len().min(LANE);
        let samples = &samples[..n];
        // The samples' powers, W and var, phase by phase in arrays, so that the solution
        // below runs over contiguous values (four intervals to a vector).
        let mut p_w = [[0.0; LANE]; 3];
        let mut q_var = [[0.0; LANE]; 3];
        for (i, smp) in samples.iter().enumerate() {
            for ph in 0..3 {
                p_w[ph][i] = smp.p_kw[ph] * 1e3;
                q_var[ph][i] = smp.q_kvar[ph] * 1e3;
            }
        }
        // The smallest discriminant over the phases: below 0, some phase has no solution.
        let mut disc_min = [f64::INFINITY; LANE];
        for ph in 0..3 {
            let eq = self.eq[ph];
            let (zr, zi, e2, b, g) = (eq.z.re, eq.z.im, eq.e2, eq.b, eq.g);
            let w_out = &mut out.w[ph][..n];
            let qb_out = &mut out.q_bank[ph][..n];
            let pb_out = &mut out.p_bank[ph][..n];
            let disc_min = &mut disc_min[..n];
            let (p_w, q_var) = (&p_w[ph][..n], &q_var[ph][..n]);
            for i in 0..n {
                let (p, q) = (p_w[i], q_var[i]);
                // The same operations as `squared_voltage`.
                let a_re = zr * p + zi * q;
                let a_im = zi * p - zr * q;
                let m = e2 - 2.0 * a_re;
                let disc = m * m - 4.0 * (a_re * a_re + a_im * a_im);
                let nose = (0.5 * m).max(0.0);
                let high = 0.5 * (m + disc.sqrt());
                let w = if disc < 0.0 { nose } else { high };
                w_out[i] = w;
                qb_out[i] = b * w * 1e-3;
                pb_out[i] = g * w * 1e-3;
                disc_min[i] = if disc < disc_min[i] {
                    disc
                } else {
                    disc_min[i]
                };
            }
        }
        let sqrt3 = 3f64.sqrt();
        for i in 0..n {
            let s = &samples[i];
            let q_ph = [
                s.q_kvar[0] - out.q_bank[0][i],
                s.q_kvar[1] - out.q_bank[1][i],
                s.q_kvar[2] - out.q_bank[2][i],
            ];
            out.q4[i] = [q_ph[0] + q_ph[1] + q_ph[2], q_ph[0], q_ph[1], q_ph[2]];
            out.put_load(i, s);
            let (w0, w1, w2) = (out.w[0][i], out.w[1][i], out.w[2][i]);
            // The square root keeps the order of its arguments, so the extremes of the
            // voltages are the roots of the extremes of their squares.
            let lo = if w1 < w0 { w1 } else { w0 };
            let lo = if w2 < lo { w2 } else { lo };
            let hi = if w1 > w0 { w1 } else { w0 };
            let hi = if w2 > hi { w2 } else { hi };
            out.v_ll_min[i] = lo.sqrt() * sqrt3;
            out.v_ll_max[i] = hi.sqrt() * sqrt3;
            out.unsolved[i] = u64::from(disc_min[i] < 0.0);
        }
    }
}

/// Line-to-line voltage of a balanced system from a line-to-neutral magnitude, V.
#[inline]
pub fn ll_from_ln(v_ln: f64) -> f64 {
    v_ln * 3f64.sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Steps line to neutral of susceptance `b` on each phase.
    fn star(b: [f64; 3]) -> Shunt {
        Shunt {
            phase: b,
            earthed: b,
            ..Shunt::default()
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

    // Short-circuit power of a transformer on an infinite grid, S_sc = S_T/u_k
    // (IEEE Std 141, from memory): 1000 kVA at 6 % gives 16.7 MVA.
    #[test]
    fn short_circuit_of_transformer() {
        assert!((site().short_circuit_kva() - 1000.0 / 0.06).abs() < 1e-6);
        let mut s = site();
        s.grid_short_circuit_kva = Some(250_000.0);
        let expect = 1.0 / (1.0 / 250_000.0 + 0.06 / 1000.0);
        assert!((s.short_circuit_kva() - expect).abs() < 1e-6);
        assert!(SupplyParams::default().short_circuit_kva().is_infinite());
    }

    #[test]
    fn stiff_bus_stays_at_nominal() {
        let mut b = BusSolver::new(&SupplyParams::default());
        b.set_bank(&star([1e-3; 3]));
        let r = b.solve(&[100.0; 3], &[50.0; 3]);
        assert!((r[0].v_ln - 230.940_107_675_850_3).abs() < 1e-9);
    }

    // A 100 kVA, 6 % transformer has S_sc = 100 / 0.06 = 1.67 MVA (IEEE Std 141, from
    // memory); the most power a source can push through its impedance is about S_sc / 2 at
    // the best load angle (maximum power transfer, from memory), some 0.8 MVA here, so
    // 1 MW per phase (3 MW in all) has no real solution on any phase. Five such intervals
    // are five unsolved intervals, not fifteen unsolved phases.
    #[test]
    fn unsolved_intervals_count_once_each() {
        let mut s = site();
        s.transformer = Some(Transformer {
            rated_kva: 100.0,
            impedance_pct: 6.0,
            x_over_r: 8.0,
        });
        let mut b = BusSolver::new(&s);
        for _ in 0..5 {
            b.solve(&[1000.0; 3], &[500.0; 3]);
        }
        assert_eq!(b.nonconverged, 5);
        // One phase beyond the supply is still one interval.
        b.solve(&[1000.0, 1.0, 1.0], &[0.0; 3]);
        assert_eq!(b.nonconverged, 6);
        // A load the supply carries leaves the count alone.
        b.solve(&[10.0; 3], &[5.0; 3]);
        assert_eq!(b.nonconverged, 6);
    }

    // With Z0 = Z1 (no grid, a YNyn transformer: Z0 = Z_T + Z_grid = Z_T = Z1) the phases
    // do not couple: the coupled iteration finds the closed form's voltage on every phase,
    // balanced or not.
    #[test]
    fn coupled_solver_without_coupling_is_the_closed_form() {
        let s = site();
        let mut closed = BusSolver::new(&s);
        let mut coupled = CoupledSolver::new(&s, Winding::YNyn);
        let b = star([2e-3, 1e-3, 0.0]);
        closed.set_bank(&b);
        coupled.set_bank(&b);
        let (p, q) = ([200.0, 50.0, 120.0], [150.0, 10.0, -20.0]);
        let r = closed.solve(&p, &q);
        let (v, ok) = coupled.solve(&p, &q);
        assert!(ok);
        for ph in 0..3 {
            assert!((v[ph].norm() - r[ph].v_ln).abs() < 1e-9, "{ph}");
            let own = closed.phasor_w(ph, r[ph].v_ln * r[ph].v_ln, p[ph], q[ph]);
            assert!((own - v[ph]).norm() < 1e-9, "{ph}: {own} against {}", v[ph]);
        }
    }

    // The phase impedance matrix of sequence impedances Z0, Z1 = Z2 has Z_s = (Z0 + 2Z1)/3
    // on the diagonal and Z_m = (Z0 − Z1)/3 elsewhere (symmetrical components, common
    // practice); a Dyn transformer behind a grid has Z0 = Z_T < Z1 = Z_T + Z_grid.
    #[test]
    fn phase_impedance_of_a_dyn_transformer() {
        let mut s = site();
        s.grid_short_circuit_kva = Some(50_000.0);
        let (z0, z1) = s.sequence_impedances(Winding::Dyn);
        assert!(z0.norm() < z1.norm());
        let z = CoupledSolver::new(&s, Winding::Dyn).impedance_matrix();
        assert!((z[0][0] - (z0 + z1 * 2.0) / 3.0).norm() < 1e-15);
        assert!((z[1][2] - (z0 - z1) / 3.0).norm() < 1e-15);
        let m = [
            [z[0][0], z[0][1], z[0][2]],
            [z[1][0], z[1][1], z[1][2]],
            [z[2][0], z[2][1], z[2][2]],
        ];
        let inv = inv3(&m).unwrap();
        // M·M⁻¹ is the identity.
        let product: Vec<Complex64> = (0..9)
            .map(|rk| (0..3).map(|j| m[rk / 3][j] * inv[j][rk % 3]).sum())
            .collect();
        for (rk, x) in product.iter().enumerate() {
            let want = if rk / 3 == rk % 3 { 1.0 } else { 0.0 };
            assert!((x - want).norm() < 1e-9);
        }
    }

    #[test]
    fn solution_satisfies_the_circuit() {
        let s = site();
        let mut b = BusSolver::new(&s);
        b.set_bank(&star([2e-3; 3]));
        let r = b.solve(&[200.0; 3], &[150.0; 3]);
        // The voltage drop across Z equals Z times the supply current (Kirchhoff).
        let v = b.phasor(0, 200.0, 150.0);
        assert!((v.norm() - r[0].v_ln).abs() < 1e-9);
        let i = (Complex64::new(200e3, 150e3) / v).conj() + Complex64::new(0.0, 2e-3) * v;
        let e = Complex64::new(s.nominal_ln_v(), 0.0);
        assert!((e - s.impedance_ohm() * i - v).norm() < 1e-6);
        assert!(r[0].v_ln < s.nominal_ln_v());
    }
}

//! Unbalance arithmetic: symmetrical components (Fortescue) of three phasors, the
//! voltage unbalance u2 = |V2|/|V1| (the definition of IEC 61000-4-30 and EN 50160), and
//! the apparent powers of IEEE Std 1459-2010 for unbalanced systems (vector, arithmetic
//! and effective) side by side.
//!
//! The engine uses them when a scenario asks for unbalance (`report.unbalance`), on the
//! bus phasors of its per-phase solution (the phases solved on their own, with no
//! coupling between them).
//!
//! With a = 1∠120°:
//! V0 = (Va + Vb + Vc)/3, V1 = (Va + a·Vb + a²·Vc)/3, V2 = (Va + a²·Vb + a·Vc)/3, and back
//! Va = V0 + V1 + V2, Vb = V0 + a²·V1 + a·V2, Vc = V0 + a·V1 + a²·V2.

use num_complex::Complex64;

/// The operator a = 1∠120°.
pub const A: Complex64 = Complex64::new(-0.5, 0.866_025_403_784_438_6);

/// a² = 1∠240°.
pub const A2: Complex64 = Complex64::new(-0.5, -0.866_025_403_784_438_6);

/// Zero, positive and negative sequence components (V0, V1, V2) of the phasors
/// (Va, Vb, Vc).
pub fn fortescue(v: [Complex64; 3]) -> [Complex64; 3] {
    let [a, b, c] = v;
    [
        (a + b + c) / 3.0,
        (a + A * b + A2 * c) / 3.0,
        (a + A2 * b + A * c) / 3.0,
    ]
}

/// The phasors (Va, Vb, Vc) of the sequence components (V0, V1, V2).
pub fn phases(seq: [Complex64; 3]) -> [Complex64; 3] {
    let [z, p, n] = seq;
    [z + p + n, z + A2 * p + A * n, z + A * p + A2 * n]
}

/// Negative-sequence unbalance |V2|/|V1| of three phasors (0 for a balanced set; the
/// voltage unbalance of IEC 61000-4-30 when the phasors are voltages); `None` when the
/// positive sequence is zero.
pub fn unbalance(v: [Complex64; 3]) -> Option<f64> {
    let s = fortescue(v);
    let v1 = s[1].norm();
    (v1 > 0.0).then(|| s[2].norm() / v1)
}

/// Apparent powers of a three-phase system as IEEE Std 1459-2010 defines them for
/// unbalanced loads, in the unit of V·I given.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ApparentPowers {
    /// Active power P = Re Σ V_x·conj(I_x).
    pub p: f64,
    /// Vector apparent power |Σ V_x·conj(I_x)|.
    pub vector: f64,
    /// Arithmetic apparent power Σ |V_x·conj(I_x)|.
    pub arithmetic: f64,
    /// Effective apparent power 3·V_e·I_e.
    pub effective: f64,
}

/// The IEEE Std 1459-2010 apparent powers of line-to-neutral voltages `v` and line
/// currents `i`. With `four_wire` the neutral carries I_n = −(Ia + Ib + Ic),
/// I_e = sqrt((Ia² + Ib² + Ic² + In²)/3) and
/// V_e = sqrt((3·(Va² + Vb² + Vc²) + Vab² + Vbc² + Vca²)/18); three-wire,
/// I_e = sqrt((Ia² + Ib² + Ic²)/3) and V_e = sqrt((Vab² + Vbc² + Vca²)/9).
pub fn apparent_powers(v: [Complex64; 3], i: [Complex64; 3], four_wire: bool) -> ApparentPowers {
    let s: [Complex64; 3] = std::array::from_fn(|x| v[x] * i[x].conj());
    let total = s[0] + s[1] + s[2];
    let i2: f64 = i.iter().map(|x| x.norm_sqr()).sum();
    let ll2 = (v[0] - v[1]).norm_sqr() + (v[1] - v[2]).norm_sqr() + (v[2] - v[0]).norm_sqr();
    let (ie, ve) = if four_wire {
        let i_n = (i[0] + i[1] + i[2]).norm_sqr();
        let ln2: f64 = v.iter().map(|x| x.norm_sqr()).sum();
        (((i2 + i_n) / 3.0).sqrt(), ((3.0 * ln2 + ll2) / 18.0).sqrt())
    } else {
        ((i2 / 3.0).sqrt(), (ll2 / 9.0).sqrt())
    };
    ApparentPowers {
        p: total.re,
        vector: total.norm(),
        arithmetic: s.iter().map(|x| x.norm()).sum(),
        effective: 3.0 * ve * ie,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn polar(m: f64, deg: f64) -> Complex64 {
        Complex64::from_polar(m, deg.to_radians())
    }

    fn close(a: Complex64, b: Complex64) -> bool {
        (a - b).norm() < 1e-12
    }

    // V = (1, 0, 0) has V0 = V1 = V2 = 1/3 (the definition above, worked by hand).
    #[test]
    fn one_phase_alone_splits_in_thirds() {
        let one = Complex64::new(1.0, 0.0);
        let zero = Complex64::new(0.0, 0.0);
        let s = fortescue([one, zero, zero]);
        for x in s {
            assert!(close(x, Complex64::new(1.0 / 3.0, 0.0)), "{x}");
        }
    }

    // A balanced positive-sequence set has V0 = V2 = 0 and V1 = Va.
    #[test]
    fn a_balanced_set_is_positive_sequence_only() {
        let v = [
            polar(230.0, 10.0),
            polar(230.0, -110.0),
            polar(230.0, 130.0),
        ];
        let s = fortescue(v);
        assert!(s[0].norm() < 1e-12 && s[2].norm() < 1e-12);
        assert!(close(s[1], v[0]));
        assert_eq!(unbalance(v).map(|u| u < 1e-15), Some(true));
    }

    // The inverse returns the phases.
    #[test]
    fn the_inverse_returns_the_phases() {
        let v = [polar(231.0, 3.0), polar(207.0, -125.0), polar(240.0, 118.0)];
        let back = phases(fortescue(v));
        for (a, b) in v.iter().zip(back) {
            assert!((a - b).norm() < 1e-9);
        }
    }

    // Unbalance of (230∠0°, 230∠−120°, 207∠120°), worked by hand with the IEC 61000-4-30
    // / EN 50160 definition u2 = |V2|/|V1| (from memory): write Vc = 230∠120° − 23∠120°.
    // The balanced 230 V set is all positive sequence; the deficit −23∠120° on phase c
    // alone adds −23∠120°/3 · (1, a, a²)-weighted terms: to V1 it adds a²·(−23∠120°)/3 =
    // −23∠360°/3 = −7.6667, so V1 = 230 − 7.6667 = 222.333 V; to V2 it adds
    // a·(−23∠120°)/3 = −23∠240°/3, so |V2| = 7.6667 V. u2 = 7.6667/222.333 = 3.448 %.
    #[test]
    fn unbalance_by_hand() {
        let v = [polar(230.0, 0.0), polar(230.0, -120.0), polar(207.0, 120.0)];
        let s = fortescue(v);
        assert!((s[1].norm() - 222.333_333_333).abs() < 1e-6);
        assert!((s[2].norm() - 7.666_666_667).abs() < 1e-6);
        let u2 = unbalance(v).unwrap();
        assert!((u2 - 7.666_666_666_7 / 222.333_333_333_3).abs() < 1e-9);
        assert!((u2 * 100.0 - 3.448).abs() < 1e-3);
    }

    // IEEE Std 1459-2010 on a resistor R between lines a and b of a three-wire system,
    // worked by hand (the standard's own illustration of why the apparent powers differ,
    // from memory): balanced V (line to neutral), I_a = U_ab/R, I_b = −I_a, I_c = 0, with
    // |U_ab| = √3·V and I = √3·V/R. P = 3·V²/R. Vector: S_a + S_b = U_ab·conj(I_a) = P, so
    // S_V = P. Arithmetic: |S_a| + |S_b| = 2·V·I = 2√3·V²/R = (2/√3)·P. Effective:
    // I_e = sqrt(2I²/3), V_e = sqrt(3·3V²/9) = V, S_e = 3·V·I·sqrt(2/3) = √2·P, so the
    // effective PF is 1/√2 = 0.707 although the vector PF is 1.
    #[test]
    fn a_resistor_between_two_lines() {
        let v_ln = 230.0;
        let r = 10.0;
        let v = [polar(v_ln, 0.0), polar(v_ln, -120.0), polar(v_ln, 120.0)];
        let ia = (v[0] - v[1]) / r;
        let i = [ia, -ia, Complex64::new(0.0, 0.0)];
        let s = apparent_powers(v, i, false);
        let p = 3.0 * v_ln * v_ln / r;
        assert!((s.p - p).abs() < 1e-9 * p);
        assert!((s.vector - p).abs() < 1e-9 * p);
        assert!((s.arithmetic - 2.0 / 3f64.sqrt() * p).abs() < 1e-9 * p);
        assert!((s.effective - 2f64.sqrt() * p).abs() < 1e-9 * p);
        // A four-wire system carries no neutral current here (I_a + I_b = 0) and has the
        // same V_e for a balanced set: the same S_e.
        let s4 = apparent_powers(v, i, true);
        assert!((s4.effective - s.effective).abs() < 1e-9 * p);
    }
}

//! Fast random draws: standard-normal numbers for measurement noise and exponential
//! spell lengths for switching units and clouds.
//!
//! A normal draw picks one of 4096 equally likely values: the standard normal quantiles
//! at the midpoints of 4096 equal-probability bins, scaled to unit variance. One 64-bit
//! random number gives five draws. The distribution is the Gaussian quantised to 1/4096
//! in probability (finest near the mean, about 0.0006 σ apart), with the tails cut at
//! about 3.7 σ; for noise on a meter reading that is indistinguishable from an exact
//! Gaussian, at a fraction of the cost.
//!
//! An exponential draw inverts the distribution function −ln(1 − u) through a table of
//! 1024 equal-probability bins with linear interpolation inside a bin (a continuous
//! distribution, exact at the bin edges, mean within 1e-4 of the exact one). The last
//! bin is the exact tail: ln 1024 plus a fresh exponential draw, by memorylessness.

use crate::profile::LoadSample;
use rand::RngCore;
use std::sync::OnceLock;

/// Bits of a table index.
const BITS: u32 = 12;
/// Table size.
const SIZE: usize = 1 << BITS;

/// Bits of an exponential table index.
const EXP_BITS: u32 = 10;
/// Exponential table size.
const EXP_SIZE: usize = 1 << EXP_BITS;

/// The shared exponential table: for each bin i, (value at its lower edge, rise across
/// it), i.e. −ln(1 − i/N) and −ln(1 − (i+1)/N) + ln(1 − i/N).
fn exp_table() -> &'static [(f64, f64); EXP_SIZE] {
    static TABLE: OnceLock<Box<[(f64, f64); EXP_SIZE]>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let q = |i: usize| -(1.0 - i as f64 / EXP_SIZE as f64).ln();
        let mut t = Box::new([(0.0, 0.0); EXP_SIZE]);
        for (i, e) in t.iter_mut().enumerate() {
            let hi = if i + 1 < EXP_SIZE { q(i + 1) } else { q(i) };
            *e = (q(i), hi - q(i));
        }
        t
    })
}

/// A source of exponential numbers of mean 1 (see the module documentation).
#[derive(Clone)]
pub(crate) struct FastExp {
    table: &'static [(f64, f64); EXP_SIZE],
}

impl std::fmt::Debug for FastExp {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("FastExp")
    }
}

impl FastExp {
    pub(crate) fn new() -> Self {
        FastExp { table: exp_table() }
    }

    /// One draw of mean 1.
    #[inline]
    pub(crate) fn draw<R: RngCore>(&self, rng: &mut R) -> f64 {
        let mut base = 0.0;
        loop {
            let x = rng.next_u64();
            let i = (x >> (64 - EXP_BITS)) as usize;
            if i + 1 < EXP_SIZE {
                // 53 bits of the rest give the position inside the bin.
                let frac = (x & ((1u64 << 53) - 1)) as f64 * (1.0 / (1u64 << 53) as f64);
                let (lo, rise) = self.table[i];
                return base + lo + frac * rise;
            }
            // The exact tail beyond ln N: ln N plus a fresh draw.
            base += self.table[i].0;
        }
    }
}

/// The shared quantile table.
fn table() -> &'static [f32; SIZE] {
    static TABLE: OnceLock<Box<[f32; SIZE]>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let q: Vec<f64> = (0..SIZE)
            .map(|i| probit((i as f64 + 0.5) / SIZE as f64))
            .collect();
        let var = q.iter().map(|x| x * x).sum::<f64>() / SIZE as f64;
        let k = 1.0 / var.sqrt();
        let mut t = Box::new([0.0f32; SIZE]);
        for (dst, x) in t.iter_mut().zip(&q) {
            *dst = (x * k) as f32;
        }
        t
    })
}

/// Inverse of the standard normal distribution function (Acklam's rational
/// approximation, relative error below 1.2e-9), for 0 < p < 1.
pub(crate) fn probit(p: f64) -> f64 {
    const A: [f64; 6] = [
        -3.969_683_028_665_376e1,
        2.209_460_984_245_205e2,
        -2.759_285_104_469_687e2,
        1.383_577_518_672_69e2,
        -3.066_479_806_614_716e1,
        2.506_628_277_459_239,
    ];
    const B: [f64; 5] = [
        -5.447_609_879_822_406e1,
        1.615_858_368_580_409e2,
        -1.556_989_798_598_866e2,
        6.680_131_188_771_972e1,
        -1.328_068_155_288_572e1,
    ];
    const C: [f64; 6] = [
        -7.784_894_002_430_293e-3,
        -3.223_964_580_411_365e-1,
        -2.400_758_277_161_838,
        -2.549_732_539_343_734,
        4.374_664_141_464_968,
        2.938_163_982_698_783,
    ];
    const D: [f64; 4] = [
        7.784_695_709_041_462e-3,
        3.224_671_290_700_398e-1,
        2.445_134_137_142_996,
        3.754_408_661_907_416,
    ];
    let tail = |q: f64| {
        (((((C[0] * q + C[1]) * q + C[2]) * q + C[3]) * q + C[4]) * q + C[5])
            / ((((D[0] * q + D[1]) * q + D[2]) * q + D[3]) * q + 1.0)
    };
    const P_LOW: f64 = 0.02425;
    if p < P_LOW {
        tail((-2.0 * p.ln()).sqrt())
    } else if p > 1.0 - P_LOW {
        -tail((-2.0 * (1.0 - p).ln()).sqrt())
    } else {
        let q = p - 0.5;
        let r = q * q;
        (((((A[0] * r + A[1]) * r + A[2]) * r + A[3]) * r + A[4]) * r + A[5]) * q
            / (((((B[0] * r + B[1]) * r + B[2]) * r + B[3]) * r + B[4]) * r + 1.0)
    }
}

/// A source of approximately standard-normal numbers (see the module documentation).
/// The generator uses them through [`NoiseFactors`]; this plain form is the reference
/// the tests check the distribution and the factors against.
#[cfg(test)]
#[derive(Clone)]
pub(crate) struct FastNormal {
    table: &'static [f32; SIZE],
}

#[cfg(test)]
impl std::fmt::Debug for FastNormal {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("FastNormal")
    }
}

#[cfg(test)]
impl FastNormal {
    pub(crate) fn new() -> Self {
        FastNormal { table: table() }
    }

    /// Six draws, for the P and Q of three phases, from two random numbers.
    #[inline]
    pub(crate) fn six<R: RngCore>(&self, rng: &mut R) -> [f64; 6] {
        let a = rng.next_u64();
        let b = rng.next_u64();
        let m = (SIZE - 1) as u64;
        let t = self.table;
        let at = |x: u64, k: u32| f64::from(t[((x >> (k * BITS)) & m) as usize]);
        [at(a, 0), at(a, 1), at(a, 2), at(a, 3), at(a, 4), at(b, 0)]
    }
}

/// Measurement-noise factors 1 + σ·x for normal draws x as [`FastNormal`] makes them:
/// the same table with the factor worked out once per value, so that a sample takes six
/// loads and six products. Each factor is computed exactly as `1.0 + sigma * x` would be
/// per sample, so the results are the same to the bit.
#[derive(Clone)]
pub(crate) struct NoiseFactors {
    table: Box<[f64; SIZE]>,
}

impl std::fmt::Debug for NoiseFactors {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("NoiseFactors")
    }
}

impl NoiseFactors {
    /// The factors for relative noise `sigma` (one standard deviation).
    pub(crate) fn new(sigma: f64) -> Self {
        let mut table = Box::new([1.0; SIZE]);
        for (dst, &x) in table.iter_mut().zip(self::table().iter()) {
            *dst = 1.0 + sigma * f64::from(x);
        }
        NoiseFactors { table }
    }

    /// Six factors, for the P and Q of three phases, from two random numbers: the draws
    /// of [`FastNormal::six`] in the same order.
    #[inline]
    pub(crate) fn six<R: RngCore>(&self, rng: &mut R) -> [f64; 6] {
        let a = rng.next_u64();
        let b = rng.next_u64();
        let m = (SIZE - 1) as u64;
        let t = &self.table;
        let at = |x: u64, k: u32| t[((x >> (k * BITS)) & m) as usize];
        [at(a, 0), at(a, 1), at(a, 2), at(a, 3), at(a, 4), at(b, 0)]
    }

    /// Multiplies each sample of a chunk by its six factors, drawn as [`NoiseFactors::six`]
    /// draws them, sample after sample. The random state is kept in a local copy over the
    /// loop, so that it stays in registers.
    #[inline]
    pub(crate) fn apply<R: RngCore + Clone>(&self, rng: &mut R, out: &mut [LoadSample]) {
        let mut r = rng.clone();
        let m = (SIZE - 1) as u64;
        let t = &*self.table;
        let at = |x: u64, k: u32| t[((x >> (k * BITS)) & m) as usize];
        for s in out.iter_mut() {
            let a = r.next_u64();
            let b = r.next_u64();
            s.p_kw[0] *= at(a, 0);
            s.p_kw[1] *= at(a, 1);
            s.p_kw[2] *= at(a, 2);
            s.q_kvar[0] *= at(a, 3);
            s.q_kvar[1] *= at(a, 4);
            s.q_kvar[2] *= at(b, 0);
        }
        *rng = r;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_xoshiro::Xoshiro256PlusPlus;

    #[test]
    fn exponential_draws_have_the_right_moments() {
        let e = FastExp::new();
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
        let n = 400_000;
        let (mut s1, mut s2, mut over3) = (0.0, 0.0, 0u32);
        for _ in 0..n {
            let x = e.draw(&mut rng);
            assert!(x >= 0.0 && x.is_finite());
            s1 += x;
            s2 += x * x;
            over3 += u32::from(x > 3.0);
        }
        let c = f64::from(n);
        // Mean 1 (spread 0.0016), second moment 2, P(x > 3) = e^-3 = 0.0498.
        assert!((s1 / c - 1.0).abs() < 0.006, "{}", s1 / c);
        assert!((s2 / c - 2.0).abs() < 0.03, "{}", s2 / c);
        assert!((f64::from(over3) / c - 0.0498).abs() < 0.002);
        // The table's own mean (bins of equal probability, linear inside, exact tail).
        let t = exp_table();
        let mean = t[..EXP_SIZE - 1]
            .iter()
            .map(|(lo, rise)| lo + 0.5 * rise)
            .sum::<f64>()
            / EXP_SIZE as f64
            + (t[EXP_SIZE - 1].0 + 1.0) / EXP_SIZE as f64;
        assert!((mean - 1.0).abs() < 1e-4, "{mean}");
    }

    #[test]
    fn noise_factors_are_one_plus_sigma_times_the_draws() {
        let n = FastNormal::new();
        let f = NoiseFactors::new(0.013);
        let mut r1 = Xoshiro256PlusPlus::seed_from_u64(8);
        let mut r2 = r1.clone();
        for _ in 0..10_000 {
            let x = n.six(&mut r1);
            let y = f.six(&mut r2);
            for i in 0..6 {
                assert_eq!((1.0 + 0.013 * x[i]).to_bits(), y[i].to_bits());
            }
        }
    }

    #[test]
    fn probit_known_values() {
        assert!(probit(0.5).abs() < 1e-12);
        assert!((probit(0.975) - 1.959_963_984_540_054).abs() < 1e-8);
        assert!((probit(0.001) + 3.090_232_306_167_813_5).abs() < 1e-8);
    }

    #[test]
    fn table_is_symmetric_with_unit_variance() {
        let t = table();
        for i in 0..SIZE / 2 {
            assert_eq!(t[i], -t[SIZE - 1 - i]);
        }
        let var: f64 = t.iter().map(|&x| f64::from(x).powi(2)).sum::<f64>() / SIZE as f64;
        assert!((var - 1.0).abs() < 1e-6);
        assert!(f64::from(t[SIZE - 1]) > 3.5);
    }

    #[test]
    fn draws_have_gaussian_moments() {
        let n = FastNormal::new();
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(3);
        let (mut s1, mut s2, mut s4, mut within1) = (0.0, 0.0, 0.0, 0u32);
        let count = 200_000;
        for _ in 0..count / 6 {
            for x in n.six(&mut rng) {
                s1 += x;
                s2 += x * x;
                s4 += x.powi(4);
                within1 += u32::from(x.abs() < 1.0);
            }
        }
        let c = (count / 6 * 6) as f64;
        assert!((s1 / c).abs() < 0.01);
        assert!((s2 / c - 1.0).abs() < 0.02);
        // The fourth moment of a Gaussian is 3; the tail cut lowers it only slightly.
        assert!((s4 / c - 3.0).abs() < 0.1, "{}", s4 / c);
        // P(|x| < 1) = 0.6827 for a Gaussian.
        assert!((f64::from(within1) / c - 0.6827).abs() < 0.005);
    }
}

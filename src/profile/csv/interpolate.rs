//! Linear interpolation between two rows' samples: the load across a gap under the gap
//! policy `interpolate`, and the values of a row filled in by interpolation.

use crate::profile::LoadSample;

/// Linear interpolation between two samples at `t` (clamped to [ta, tb]).
#[inline]
pub(super) fn lerp(a: &LoadSample, ta: f64, b: &LoadSample, tb: f64, t: f64) -> LoadSample {
    let span = tb - ta;
    let f = if span > 0.0 {
        ((t - ta) / span).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let mut out = *a;
    for i in 0..3 {
        out.p_kw[i] += (b.p_kw[i] - a.p_kw[i]) * f;
        out.q_kvar[i] += (b.q_kvar[i] - a.q_kvar[i]) * f;
    }
    out
}

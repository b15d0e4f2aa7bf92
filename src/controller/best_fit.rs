//! `best-fit` ordering: of all single operations that reduce |ΔQ| strictly, take the one
//! leaving the smallest |ΔQ|; ties go to the step with fewer operations so far, then to the
//! lower number. The controller decides on nominal kvar at U_n. No operation is made when
//! none reduces |ΔQ|.

use super::{Choice, StepOrdering};

/// Closest-landing switching.
#[derive(Debug, Clone, Copy, Default)]
pub struct BestFit;

/// Two residuals closer than this (kvar) count as a tie.
const TIE_KVAR: f64 = 1e-9;

impl BestFit {
    /// `sign` is −1 for a closing (the step's kvar is taken off ΔQ), +1 for an opening.
    fn pick(c: &Choice<'_>, sign: f64) -> Option<usize> {
        let now = c.demand_kvar.abs();
        let mut best: Option<(usize, f64)> = None;
        let mut m = c.candidates;
        while m != 0 {
            let i = m.trailing_zeros() as usize;
            m &= m - 1;
            let left = (c.demand_kvar + sign * c.kvar[i]).abs();
            if left >= now {
                continue;
            }
            best = match best {
                None => Some((i, left)),
                Some((b, lb)) => {
                    let better = left < lb - TIE_KVAR
                        || ((left - lb).abs() <= TIE_KVAR
                            && c.steps[i].operations() < c.steps[b].operations());
                    if better {
                        Some((i, left))
                    } else {
                        Some((b, lb))
                    }
                }
            };
        }
        best.map(|(i, _)| i)
    }
}

impl StepOrdering for BestFit {
    fn name(&self) -> &'static str {
        "best-fit"
    }

    fn pick_close(&self, c: &Choice<'_>) -> Option<usize> {
        Self::pick(c, -1.0)
    }

    fn pick_open(&self, c: &Choice<'_>) -> Option<usize> {
        Self::pick(c, 1.0)
    }
}

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
        for n in c.candidates {
            let left = (c.demand_kvar + sign * c.kvar[n - 1]).abs();
            if left >= now {
                continue;
            }
            best = match best {
                None => Some((n, left)),
                Some((b, lb)) => {
                    let better = left < lb - TIE_KVAR
                        || ((left - lb).abs() <= TIE_KVAR
                            && c.steps[n - 1].operations() < c.steps[b - 1].operations());
                    if better {
                        Some((n, left))
                    } else {
                        Some((b, lb))
                    }
                }
            };
        }
        best.map(|(n, _)| n)
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

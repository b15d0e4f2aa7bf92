//! `rotating` ordering: connect the available step that has been off longest, disconnect
//! the step that has been on longest (first in, first out). Equal steps then share the
//! wear. Ties go to the lower step number.

use super::{Choice, StepOrdering};

/// First in, first out switching.
#[derive(Debug, Clone, Copy, Default)]
pub struct Rotating;

impl Rotating {
    /// The candidate whose last change is earliest; ties to the lower number.
    fn longest_in_state(c: &Choice<'_>) -> Option<usize> {
        let mut best: Option<usize> = None;
        let mut m = c.candidates;
        while m != 0 {
            let i = m.trailing_zeros() as usize;
            m &= m - 1;
            match best {
                Some(b) if c.steps[i].since_s >= c.steps[b].since_s => {}
                _ => best = Some(i),
            }
        }
        best
    }
}

impl StepOrdering for Rotating {
    fn name(&self) -> &'static str {
        "rotating"
    }

    fn pick_close(&self, c: &Choice<'_>) -> Option<usize> {
        Self::longest_in_state(c)
    }

    fn pick_open(&self, c: &Choice<'_>) -> Option<usize> {
        Self::longest_in_state(c)
    }
}

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
        c.candidates.iter().reduce(|best, n| {
            if c.steps[n - 1].since_s < c.steps[best - 1].since_s {
                n
            } else {
                best
            }
        })
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

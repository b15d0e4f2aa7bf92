//! `sequential` ordering: connect the lowest-numbered available step, disconnect the
//! highest-numbered connected one (last in, first out).

use super::{Choice, StepOrdering};

/// Fixed-order switching, last in first out.
#[derive(Debug, Clone, Copy, Default)]
pub struct Sequential;

impl StepOrdering for Sequential {
    fn name(&self) -> &'static str {
        "sequential"
    }

    fn pick_close(&self, c: &Choice<'_>) -> Option<usize> {
        c.candidates.lowest()
    }

    fn pick_open(&self, c: &Choice<'_>) -> Option<usize> {
        c.candidates.highest()
    }
}

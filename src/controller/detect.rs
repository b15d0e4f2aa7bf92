//! The controller's own detection of a faulty step, an option (`[controller.detection]`).
//!
//! After each ordinary operation of one step the controller compares the change in its
//! raw measured Q (the interval after the operation against the interval that decided
//! it, before any averaging) with what the step should give: a closing should lower Q by
//! the step's nominal kvar, an opening raise it by as much. When the change differs from
//! that by more than the tolerance (a fraction of the step's nominal kvar) on the set
//! number of operations of that step in a row, the controller raises an alarm and takes
//! the step out of service: it is never operated again, and if its contactor is closed
//! the controller opens it at once (the interval's one operation). A step that matches
//! once resets its count.
//!
//! What it can and cannot see: the comparison is made on the nominal kvar at U_n, so a
//! bus voltage 5 % off nominal moves the expected change by about 10 %, inside any
//! sensible tolerance; a load that changes in the same interval as the operation adds to
//! the measured change, which is why more than one mismatched operation is asked for by
//! default. With a single-phase measurement the change is the measured phase × 3, which
//! is right for three-phase steps only (a step line to line between the measured phase
//! and another shows 1.5 × its kvar, one elsewhere nothing); with a three-phase
//! measurement every connection shows its kvar. Protection trips (several steps at once) are not
//! checked.

use crate::bank::BankState;

/// Settings of the detection.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DetectionParams {
    /// Largest difference between the measured change in Q and the step's nominal kvar
    /// that still counts as a healthy operation, as a fraction of the nominal kvar.
    /// Default 0.5 (50 %).
    pub tolerance: f64,
    /// Mismatched operations of one step in a row before the alarm. Default 2.
    pub operations: u32,
}

impl Default for DetectionParams {
    fn default() -> Self {
        DetectionParams {
            tolerance: 0.5,
            operations: 2,
        }
    }
}

/// An operation waiting for its check on the next interval.
#[derive(Debug, Clone, Copy)]
struct Pending {
    /// Step number, from 1.
    step: usize,
    /// The expected change in measured Q, kvar (−kvar for a closing, +kvar for an
    /// opening).
    expected_kvar: f64,
    /// Raw measured Q of the interval that decided the operation, kvar.
    q_before_kvar: f64,
    /// A closing (else an opening).
    closing: bool,
}

/// What the check of the latest operation found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verdict {
    /// Nothing to check, or the step behaved.
    Fine,
    /// The step's mismatches reached the count: alarm. `closed` is true when the
    /// mismatched operation was a closing (so the step's contactor is believed closed).
    Alarm {
        /// Step number, from 1.
        step: usize,
        /// The mismatched operation was a closing.
        closed: bool,
    },
}

/// The detection state of one controller.
#[derive(Debug, Clone)]
pub struct Detector {
    params: DetectionParams,
    pending: Option<Pending>,
    /// Mismatched operations in a row, by step index.
    mismatches: Vec<u32>,
    /// Steps taken out of service so far.
    alarmed: BankState,
}

impl Detector {
    /// A detector for a bank of `steps` steps.
    pub fn new(params: DetectionParams, steps: usize) -> Self {
        Detector {
            params,
            pending: None,
            mismatches: vec![0; steps],
            alarmed: BankState::EMPTY,
        }
    }

    /// Steps taken out of service so far.
    pub fn alarmed(&self) -> BankState {
        self.alarmed
    }

    /// Checks the operation made at the end of the previous interval against the raw
    /// measured Q of this one, kvar.
    #[inline]
    pub fn check(&mut self, q_raw_kvar: f64, kvar: &[f64]) -> Verdict {
        let Some(p) = self.pending.take() else {
            return Verdict::Fine;
        };
        let nominal = kvar[p.step - 1];
        let seen = q_raw_kvar - p.q_before_kvar;
        let i = p.step - 1;
        if (seen - p.expected_kvar).abs() <= self.params.tolerance * nominal {
            self.mismatches[i] = 0;
            return Verdict::Fine;
        }
        self.mismatches[i] += 1;
        if self.mismatches[i] >= self.params.operations.max(1) {
            self.alarmed = self.alarmed.with(p.step);
            Verdict::Alarm {
                step: p.step,
                closed: p.closing,
            }
        } else {
            Verdict::Fine
        }
    }

    /// Notes an ordinary operation of one step, decided on an interval whose raw
    /// measured Q was `q_raw_kvar`; it is checked on the next interval.
    #[inline]
    pub fn expect(&mut self, step: usize, closing: bool, q_raw_kvar: f64, kvar: &[f64]) {
        let q = kvar[step - 1];
        self.pending = Some(Pending {
            step,
            expected_kvar: if closing { -q } else { q },
            q_before_kvar: q_raw_kvar,
            closing,
        });
    }

    /// Forgets the pending check (after a trip that opened several steps).
    #[inline]
    pub fn forget(&mut self) {
        self.pending = None;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // A closing of a 50 kvar step should lower the measured Q by 50 kvar (the step's
    // nominal output, by definition of the setting). Seen: 100 → 50 kvar, a match; seen
    // 100 → 100 kvar (the step delivers nothing), two in a row alarm with the default
    // count of 2.
    #[test]
    fn two_mismatched_closings_alarm() {
        let kvar = [50.0, 50.0];
        let mut d = Detector::new(DetectionParams::default(), 2);
        d.expect(1, true, 100.0, &kvar);
        assert_eq!(d.check(50.0, &kvar), Verdict::Fine);
        d.expect(2, true, 100.0, &kvar);
        assert_eq!(d.check(100.0, &kvar), Verdict::Fine);
        d.expect(2, false, 100.0, &kvar);
        assert_eq!(
            d.check(100.0, &kvar),
            Verdict::Alarm {
                step: 2,
                closed: false
            }
        );
        assert_eq!(d.alarmed().numbers(), vec![2]);
        // Nothing pending: nothing to check.
        assert_eq!(d.check(0.0, &kvar), Verdict::Fine);
    }

    // A match in between resets the count; 40 % short of 50 kvar is inside the 50 %
    // tolerance.
    #[test]
    fn a_match_resets_the_count() {
        let kvar = [50.0];
        let mut d = Detector::new(DetectionParams::default(), 1);
        d.expect(1, true, 100.0, &kvar);
        assert_eq!(d.check(100.0, &kvar), Verdict::Fine);
        d.expect(1, false, 100.0, &kvar);
        assert_eq!(d.check(130.0, &kvar), Verdict::Fine);
        d.expect(1, true, 130.0, &kvar);
        assert_eq!(d.check(130.0, &kvar), Verdict::Fine);
        assert!(d.alarmed().is_empty());
    }
}

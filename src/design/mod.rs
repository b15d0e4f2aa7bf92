//! The step-layout designer: what total kvar a site needs and which layout of switched
//! steps serves its load best.
//!
//! - [`need`]: the kvar needed at each instant to bring the load to the target, as a
//!   time-weighted duration curve, and the recommended total at a coverage.
//! - [`layout`]: candidate layouts of catalogue step sizes (equal, 1:2:2, binary, a small
//!   step plus equal steps), plain and detuned, within a band around the recommended
//!   total.
//! - [`rank`]: each candidate's run at its best settings judged (target, billed PF,
//!   operations, overcorrection, resonance, steps) and ranked, with a reason for each.
//!
//! The library does no printing; `report::design` writes the result.

pub mod layout;
pub mod need;
pub mod rank;

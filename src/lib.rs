//! bankstep: a simulation library for automatic capacitor-bank step control.
//!
//! The library owns the physics and the bookkeeping: scenario parsing and validation
//! ([`scenario`]), load profiles ([`profile`]), the supply and bank model ([`supply`],
//! [`bank`]), the step controller ([`controller`]), the time-stepping engine ([`engine`]),
//! the run metrics ([`metrics`]), the bounded trace of a run that figures draw
//! ([`trace`]), harmonic resonance ([`harmonics`]), the analysis that judges a run
//! ([`analysis`]), sweeps of many settings on one profile ([`sweep`]), the step-layout
//! designer ([`design`]) and the report writers ([`report`]). It never prints and knows nothing
//! of the command line; the `bankstep` binary is a thin shell around it.

pub mod analysis;
pub mod bank;
pub mod controller;
pub mod design;
pub mod engine;
pub mod error;
pub mod harmonics;
pub mod metrics;
pub mod pf;
pub mod profile;
pub mod report;
pub mod scenario;
pub mod study;
pub mod supply;
pub mod sweep;
pub mod text;
pub mod timebase;
pub mod trace;
pub mod unbalance;

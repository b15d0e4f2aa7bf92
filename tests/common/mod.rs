//! Helpers shared by the integration tests: scenario building from TOML text and simple
//! load sources whose values the tests work out by hand.
#![allow(dead_code)]

use bankstep::analysis::Assessment;
use bankstep::bank::BankState;
use bankstep::engine::{IntervalRecord, Observer, Quiet, RunResult};
use bankstep::error::{ProfileError, RunError};
use bankstep::profile::{LoadSample, LoadSource};
use bankstep::scenario::Scenario;
use bankstep::study::Study;
use std::path::Path;

/// A balanced load made of pieces: from each start time on, three-phase P and Q.
pub struct Pieces(pub Vec<(f64, f64, f64)>);

impl LoadSource for Pieces {
    fn sample(&mut self, _k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        let (_, p, q) = self
            .0
            .iter()
            .rev()
            .find(|x| x.0 <= t_s + 1e-9)
            .copied()
            .unwrap_or(self.0[0]);
        out.p_kw = [p / 3.0; 3];
        out.q_kvar = [q / 3.0; 3];
        Ok(())
    }
}

/// A per-interval list of samples.
pub struct Listed(pub Vec<LoadSample>);

impl LoadSource for Listed {
    fn sample(&mut self, k: u64, _t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        *out = self.0[k as usize];
        Ok(())
    }
}

/// One operation seen by the recorder.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Op {
    /// Time the operation takes effect (t_{k+1}), s.
    pub t: f64,
    /// Step number.
    pub step: usize,
    /// True for a closing.
    pub close: bool,
}

/// An expected operation: at `t` (s), step number `step`, closing or opening.
pub fn op(t: f64, step: usize, close: bool) -> Op {
    Op { t, step, close }
}

/// Records operations and per-interval bus voltage and supply Q.
#[derive(Default)]
pub struct Recorder {
    pub ops: Vec<Op>,
    pub u_ll: Vec<f64>,
    pub q: Vec<f64>,
    pub p: Vec<f64>,
    pub demand: Vec<f64>,
    pub masks: Vec<BankState>,
    dt: f64,
}

impl Recorder {
    pub fn new(dt: f64) -> Self {
        Recorder {
            dt,
            ..Recorder::default()
        }
    }
}

impl Observer for Recorder {
    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        let t_next = r.t_s + self.dt;
        for step in r.decision.closed.or(r.decision.opened) {
            self.ops.push(Op {
                t: t_next,
                step,
                close: r.decision.closed.contains(step),
            });
        }
        let v: f64 = r.phases.iter().map(|p| p.v_ln).sum::<f64>() / 3.0;
        self.u_ll.push(v * 3f64.sqrt());
        self.q.push(r.phases.iter().map(|p| p.q_kvar).sum());
        self.p.push(r.phases.iter().map(|p| p.p_kw).sum());
        self.demand.push(r.decision.demand_kvar);
        self.masks.push(r.mask);
        Ok(())
    }
}

/// Parses scenario text (with a `[load.synthetic]` stand-in load) and prepares it.
pub fn study(toml: &str) -> Study {
    let sc = Scenario::from_str(toml, Path::new("test.toml")).expect("valid scenario");
    Study::prepare(sc).expect("prepared study")
}

/// Runs a scenario over a custom source.
pub fn run_with<S: LoadSource>(toml: &str, mut src: S) -> RunResult {
    let st = study(toml);
    st.run_on(&mut src, &mut Quiet).expect("run")
}

/// Runs a scenario over a custom source and assesses the run (resonance, findings).
pub fn assess_with<S: LoadSource>(toml: &str, mut src: S) -> (RunResult, Assessment) {
    let st = study(toml);
    let r = st.run_on(&mut src, &mut Quiet).expect("run");
    let a = bankstep::analysis::assess(&st, &r);
    (r, a)
}

/// Runs a scenario over a custom source, recording every interval.
pub fn record_with<S: LoadSource>(toml: &str, mut src: S) -> (RunResult, Recorder) {
    let st = study(toml);
    let mut rec = Recorder::new(st.plan.dt_s);
    let r = st.run_on(&mut src, &mut rec).expect("run");
    (r, rec)
}

//! Property tests over random profiles and settings: invariants that must hold for every
//! run, whatever the load and the controller settings.

mod common;
use bankstep::bank::BankState;
use bankstep::profile::LoadSample;
use common::{record_with, Listed};
use proptest::prelude::*;

#[derive(Debug, Clone)]
struct Case {
    steps: Vec<(f64, bool)>,
    ordering: &'static str,
    band: f64,
    delay: f64,
    discharge: f64,
    transformer: bool,
    dt: f64,
    cap: Option<u32>,
    load: Vec<(f64, f64)>,
}

fn case() -> impl Strategy<Value = Case> {
    (
        prop::collection::vec((5.0f64..100.0, prop::bool::weighted(0.15)), 1..8),
        prop::sample::select(vec!["sequential", "rotating", "best-fit"]),
        0.2f64..1.2,
        0.0f64..20.0,
        0.0f64..90.0,
        any::<bool>(),
        prop::sample::select(vec![0.5, 1.0, 2.0]),
        prop::option::of(1u32..30),
        prop::collection::vec((-50.0f64..400.0, -60.0f64..350.0), 50..400),
    )
        .prop_map(
            |(steps, ordering, band, delay, discharge, transformer, dt, cap, load)| Case {
                steps,
                ordering,
                band,
                delay,
                discharge,
                transformer,
                dt,
                cap,
                load,
            },
        )
}

impl Case {
    fn toml(&self) -> String {
        let mut s = String::new();
        if self.transformer {
            s += "[supply.transformer]\nrated_kva = 800\nimpedance_pct = 6\n";
        }
        for (kvar, fixed) in &self.steps {
            s += &format!("[[steps]]\nkvar = {kvar}\nfixed = {fixed}\n");
        }
        s += &format!(
            "[controller]\nordering = \"{}\"\ndead_band_fraction = {}\nswitching_delay_s = {}\ndischarge_time_s = {}\n",
            self.ordering, self.band, self.delay, self.discharge
        );
        if let Some(c) = self.cap {
            s += &format!("[controller.protection]\nmax_operations_per_hour = {c}\n");
        }
        // Each random load value holds for 10 intervals.
        let n = self.load.len() * 10;
        s += &format!(
            "[load.synthetic]\n[run]\ntime_step_s = {}\nduration_s = {}\n",
            self.dt,
            n as f64 * self.dt
        );
        s
    }

    fn source(&self) -> Listed {
        let mut v = Vec::new();
        for (i, &(p, q)) in self.load.iter().enumerate() {
            for j in 0..10 {
                // Slight unbalance so per-phase quantities differ.
                let w = [1.0, 0.9 + 0.01 * j as f64, 1.1 - 0.01 * (i % 7) as f64];
                let sw: f64 = w.iter().sum();
                v.push(LoadSample {
                    p_kw: w.map(|x| p * x / sw),
                    q_kvar: w.map(|x| q * x / sw),
                });
            }
        }
        Listed(v)
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 96, ..ProptestConfig::default() })]

    #[test]
    fn run_invariants(c in case()) {
        let toml = c.toml();
        let (r, rec) = record_with(&toml, c.source());
        let m = &r.metrics;

        // Discharge lockout is never broken: a step closes at least T_d after it opened.
        let mut last_open = vec![f64::NEG_INFINITY; c.steps.len()];
        for o in &rec.ops {
            if o.close {
                prop_assert!(o.t - last_open[o.step - 1] >= c.discharge - 1e-6, "step {} closed {} s after opening", o.step, o.t - last_open[o.step - 1]);
                prop_assert!(!c.steps[o.step - 1].1, "a fixed step was switched");
            } else {
                last_open[o.step - 1] = o.t;
            }
        }

        // Per step, the operations seen interval by interval alternate close, open, close,
        // ... (a switched step starts open), and their counts are the ones reported.
        let fixed_mask = c.steps.iter().enumerate().filter(|s| s.1 .1).map(|(i, _)| i + 1).collect::<BankState>();
        let mut final_mask = fixed_mask;
        let mut seen = vec![(0u64, 0u64); c.steps.len()];
        for o in &rec.ops {
            prop_assert_eq!(!final_mask.contains(o.step), o.close, "step {} operated twice the same way at {}", o.step, o.t);
            if o.close {
                final_mask = final_mask.with(o.step);
                seen[o.step - 1].0 += 1;
            } else {
                final_mask = final_mask.without(o.step);
                seen[o.step - 1].1 += 1;
            }
        }
        for s in &m.switching.per_step {
            prop_assert_eq!((s.closings, s.openings), seen[s.step - 1], "step {}", s.step);
        }
        // Closings − openings equals the switched steps left on.
        let closings: u64 = m.switching.per_step.iter().map(|s| s.closings).sum();
        let openings: u64 = m.switching.per_step.iter().map(|s| s.openings).sum();
        prop_assert_eq!(closings - openings, final_mask.minus(fixed_mask).len() as u64);
        prop_assert_eq!(closings + openings, m.switching.total_operations);

        // The four registers against an independent sum over the observed intervals:
        // import Σ P·Δt over P > 0, export Σ −P·Δt over P < 0, inductive Σ Q·Δt over Q > 0,
        // capacitive Σ −Q·Δt over Q < 0; and the billed PF from them.
        let h = c.dt / 3600.0;
        let sum = |v: &[f64], keep: fn(f64) -> bool| v.iter().filter(|x| keep(**x)).map(|x| x.abs()).sum::<f64>() * h;
        let import = sum(&rec.p, |x| x > 0.0);
        let export = sum(&rec.p, |x| x < 0.0);
        let ind = sum(&rec.q, |x| x > 0.0);
        let cap = sum(&rec.q, |x| x < 0.0);
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-9 * (1.0 + b.abs()) * rec.p.len() as f64;
        prop_assert!(close(m.pf.kwh_import, import), "{} vs {import}", m.pf.kwh_import);
        prop_assert!(close(m.pf.kwh_export, export), "{} vs {export}", m.pf.kwh_export);
        prop_assert!(close(m.pf.kvarh_inductive, ind), "{} vs {ind}", m.pf.kvarh_inductive);
        prop_assert!(close(m.pf.kvarh_capacitive, cap), "{} vs {cap}", m.pf.kvarh_capacitive);
        let pf = if import > 0.0 { import / import.hypot(ind) } else if ind > 0.0 { 0.0 } else { 1.0 };
        prop_assert!((m.pf.energy_pf - pf).abs() < 1e-9, "{} vs {pf}", m.pf.energy_pf);
        let lead = ind == 0.0 && cap > 0.0;
        prop_assert_eq!(m.pf.energy_pf_quadrant == bankstep::pf::Quadrant::Lead, lead);

        // The cap on operations per hour is respected by ordinary operations.
        if let Some(cap) = c.cap {
            for (i, o) in rec.ops.iter().enumerate() {
                let in_window = rec.ops[..=i].iter().filter(|x| x.t > o.t - 3600.0).count();
                prop_assert!(in_window as u32 <= cap);
            }
        }

        // Time in each bank state against the masks seen interval by interval, and no state
        // held for longer in one calendar day than in all or than a day.
        let mut by_mask = std::collections::HashMap::<BankState, f64>::new();
        for mask in &rec.masks {
            *by_mask.entry(*mask).or_default() += c.dt;
        }
        prop_assert_eq!(m.states.len(), by_mask.len());
        for st in &m.states {
            prop_assert!((st.time_s - by_mask[&st.mask]).abs() < 1e-6, "state {:?}", st.steps);
            prop_assert!(st.max_day_s <= st.time_s + 1e-6 && st.max_day_s <= 86_400.0 + 1e-6);
        }

        // Overcorrection against an independent count (default target 0.95 lag, so an
        // interval is overcorrected when the supply leads by more than the threshold, the
        // smallest switched step, or the smallest step if all are fixed; episodes of at
        // least 60 s, one still open at the end counting).
        let switched: Vec<f64> = c.steps.iter().filter(|s| !s.1).map(|s| s.0).collect();
        let pool = if switched.is_empty() { c.steps.iter().map(|s| s.0).collect() } else { switched };
        let thr = pool.into_iter().fold(f64::INFINITY, f64::min);
        let min_n = (60.0 / c.dt - 1e-9).ceil() as usize;
        let (mut episodes, mut total, mut run) = (0u64, 0usize, 0usize);
        for q in rec.q.iter().chain(std::iter::once(&0.0)) {
            if -q > thr {
                run += 1;
            } else {
                if run >= min_n {
                    episodes += 1;
                    total += run;
                }
                run = 0;
            }
        }
        prop_assert_eq!(m.overcorrection.episodes, episodes);
        prop_assert!((m.overcorrection.total_s - total as f64 * c.dt).abs() < 1e-6);
    }
}

//! Property tests over random profiles and settings: invariants that must hold for every
//! run, whatever the load and the controller settings.

mod common;
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

        // Closings − openings equals the switched steps left on.
        let fixed_mask: u64 = c.steps.iter().enumerate().filter(|s| s.1 .1).map(|(i, _)| 1u64 << i).sum();
        let mut final_mask = fixed_mask;
        for o in &rec.ops {
            if o.close { final_mask |= 1 << (o.step - 1) } else { final_mask &= !(1 << (o.step - 1)) }
        }
        let closings: u64 = m.switching.per_step.iter().map(|s| s.closings).sum();
        let openings: u64 = m.switching.per_step.iter().map(|s| s.openings).sum();
        prop_assert_eq!(closings - openings, (final_mask & !fixed_mask).count_ones() as u64);
        prop_assert_eq!(closings + openings, m.switching.total_operations);

        // The energy registers add up to ΣP·Δt and ΣQ·Δt.
        let h = c.dt / 3600.0;
        let sp: f64 = rec.p.iter().sum::<f64>() * h;
        let sq: f64 = rec.q.iter().sum::<f64>() * h;
        let tol = 1e-9 * (1.0 + sp.abs() + sq.abs()) * rec.p.len() as f64;
        prop_assert!((m.pf.kwh_import - m.pf.kwh_export - sp).abs() < tol);
        prop_assert!((m.pf.kvarh_inductive - m.pf.kvarh_capacitive - sq).abs() < tol);
        prop_assert!(m.pf.kvarh_inductive >= 0.0 && m.pf.kvarh_capacitive >= 0.0);
        prop_assert!((0.0..=1.0).contains(&m.pf.energy_pf));

        // The cap on operations per hour is respected by ordinary operations.
        if let Some(cap) = c.cap {
            for (i, o) in rec.ops.iter().enumerate() {
                let in_window = rec.ops[..=i].iter().filter(|x| x.t > o.t - 3600.0).count();
                prop_assert!(in_window as u32 <= cap);
            }
        }

        // Time in states adds up to the run; overcorrection time is leading time.
        let state_time: f64 = m.states.iter().map(|s| s.time_s).sum();
        prop_assert!((state_time - m.run.duration_s).abs() < 1e-6);
        prop_assert!(m.overcorrection.total_s <= m.pf.share_leading * m.run.duration_s + 1e-6);

        // The same inputs give the same report, byte for byte.
        let (again, _) = record_with(&toml, c.source());
        prop_assert_eq!(serde_json::to_string(&r).unwrap(), serde_json::to_string(&again).unwrap());
    }
}

//! A source's `fill` against the reference it must equal: one `sample` call per interval,
//! stopping after the first interval whose sample the source promises to hold
//! (`unchanged_until` beyond the next interval). Checked for the in-memory CSV cursors
//! on rows as fine as the grid, coarser rows, irregular rows, fractional grids and gaps
//! held or interpolated, with and without stopping at a promise, in several chunk sizes.

use bankstep::error::ProfileError;
use bankstep::profile::csv::{scan, CsvOptions, CsvScan};
use bankstep::profile::{DefectPolicies, DefectPolicy, LoadSample, LoadSource};
use std::io::Write;
use std::sync::Arc;

const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

fn profile(times: &[f64], opts: &CsvOptions) -> (tempfile::NamedTempFile, CsvScan) {
    let mut text = HEADER.to_string();
    for (i, t) in times.iter().enumerate() {
        let x = (i + 1) as f64;
        text.push_str(&format!("{t},{x},{},1.5,0.25,{},0.75\n", 0.5 * x, 2.0 * x));
    }
    let mut f = tempfile::NamedTempFile::new().expect("temp file");
    f.write_all(text.as_bytes()).expect("write");
    f.flush().expect("flush");
    let sc = scan(f.path(), opts).expect("scan");
    (f, sc)
}

/// What the default `fill` does: `sample` per interval, stopping after a promise.
fn reference(
    src: &mut dyn LoadSource,
    k: u64,
    t0: f64,
    dt: f64,
    out: &mut [LoadSample],
    stop_at_hold: bool,
) -> (usize, Option<ProfileError>) {
    for (i, s) in out.iter_mut().enumerate() {
        let j = k + i as u64;
        if let Err(e) = src.sample(j, t0 + j as f64 * dt, s) {
            return (i, Some(e));
        }
        if stop_at_hold && src.unchanged_until(j) > j + 1 {
            return (i + 1, None);
        }
    }
    (out.len(), None)
}

/// Walks the grid t0 + k·dt over `n` intervals with `fill` on one cursor and the
/// reference on another, chunk by chunk, and asserts the same samples, the same stops,
/// the same promises after each stop and the same errors.
fn same_walk(sc: &CsvScan, dt: f64, n: u64, chunk: usize, stop_at_hold: bool) {
    let mem = Arc::new(sc.load().expect("load"));
    let t0 = sc.t_first_s;
    let mut a = mem.shared_cursor().on_grid(t0, dt);
    let mut b = mem.shared_cursor().on_grid(t0, dt);
    let mut c = mem.cursor().on_grid(t0, dt);
    let (mut fa, mut fb, mut fc) = (
        vec![LoadSample::default(); chunk],
        vec![LoadSample::default(); chunk],
        vec![LoadSample::default(); chunk],
    );
    let mut k = 0;
    while k < n {
        let want = chunk.min((n - k) as usize);
        let (ga, ea) = a.fill(k, t0, dt, &mut fa[..want], stop_at_hold);
        let (gb, eb) = reference(&mut b, k, t0, dt, &mut fb[..want], stop_at_hold);
        let (gc, ec) = c.fill(k, t0, dt, &mut fc[..want], stop_at_hold);
        let ctx = format!("dt {dt}, chunk {chunk}, stop {stop_at_hold}, k {k}");
        assert_eq!((ga, gc), (gb, gb), "{ctx}");
        assert_eq!(fa[..ga], fb[..gb], "{ctx}");
        assert_eq!(fc[..gc], fb[..gb], "{ctx}");
        assert_eq!(ea.is_some(), eb.is_some(), "{ctx}");
        assert_eq!(ec.is_some(), eb.is_some(), "{ctx}");
        if eb.is_some() || gb == 0 {
            return;
        }
        let last = k + gb as u64 - 1;
        let promise = b.unchanged_until(last);
        assert_eq!(a.unchanged_until(last), promise, "{ctx}");
        assert_eq!(c.unchanged_until(last), promise, "{ctx}");
        // Step over the promise as the engine does.
        k = if stop_at_hold {
            promise.max(last + 1)
        } else {
            last + 1
        };
    }
}

fn all_walks(sc: &CsvScan, dts: &[f64], n: u64) {
    for &dt in dts {
        for chunk in [1, 7, 256] {
            for stop in [false, true] {
                same_walk(sc, dt, n, chunk, stop);
            }
        }
    }
}

#[test]
fn fill_equals_one_sample_at_a_time() {
    let opts = CsvOptions::default();
    // Rows every second.
    let fine: Vec<f64> = (0..400).map(f64::from).collect();
    let (_f, sc) = profile(&fine, &opts);
    all_walks(&sc, &[1.0, 0.5, 0.1, 3.0], 420);
    // Rows every 15 minutes stepped at 1 s and finer.
    let coarse: Vec<f64> = (0..6).map(|i| f64::from(i) * 900.0).collect();
    let (_f, sc) = profile(&coarse, &opts);
    all_walks(&sc, &[1.0, 0.25, 7.0], 6000);
    // Irregular rows, and times in tenths that are not exact in binary.
    let odd = [0.0, 1.0, 3.0, 4.0, 4.5, 10.0, 10.1, 10.3, 12.0];
    let (_f, sc) = profile(&odd, &opts);
    all_walks(&sc, &[1.0, 0.1, 0.5, 0.3], 200);
}

#[test]
fn fill_equals_one_sample_at_a_time_across_gaps() {
    // A gap of 20 s among 1 s rows (beyond 3 median spacings), held and interpolated.
    let mut times: Vec<f64> = (0..50).map(f64::from).collect();
    times.extend((70..120).map(f64::from));
    for gap in [DefectPolicy::Hold, DefectPolicy::Interpolate] {
        let opts = CsvOptions {
            defects: DefectPolicies {
                gap: Some(gap),
                ..DefectPolicies::default()
            },
            ..CsvOptions::default()
        };
        let (_f, sc) = profile(&times, &opts);
        all_walks(&sc, &[1.0, 0.5, 2.0], 250);
    }
}

/// A plant-like generator section (invented figures): machines, two welder groups (one
/// running in a window of its own), PV with clouds and, where `__PV2__` is replaced by
/// [`PV2`], a second array.
const PLANT: &str = r#"
[[steps]]
kvar = 50
count = 4
[run]
duration_days = 2
time_step_s = 1
seed = 11
[load.synthetic]
noise_percent = __NOISE__
[load.synthetic.base]
kw = 300
pf = 0.88
night_kw = 120
[load.synthetic.shifts]
days = "mon-fri"
hours = ["06:00-14:00", "14:00-22:00"]
[[load.synthetic.machines]]
units = 4
kw = 90
pf = 0.84
runs = "shifts"
on_s = 900
off_s = 420
[[load.synthetic.welders]]
units = 3
kw = 25
pf = 0.6
phase = "ab"
burst_s = 2
pause_s = 8
[[load.synthetic.welders]]
units = 2
kw = 30
pf = 0.5
runs = "window"
window = "10:00-11:30"
burst_s = 1.5
pause_s = 20
[[load.synthetic.pv]]
peak_kw = 150
[load.synthetic.pv.clouds]
clear_s = 1800
shade_s = 300
__PV2__
"#;

/// The second PV array of [`PLANT`].
const PV2: &str = r#"
[[load.synthetic.pv]]
peak_kw = 40
phase = "b"
sunrise_h = 7.25
sunset_h = 17.5
"#;

// The generator's `fill` gives the bits of one `sample` call per interval, with noise
// (the chunk's load first, then its noise) and without (stopping at its promises), for
// chunks of several sizes (one longer than the pieces `fill` works in) over two days at 1 s.
#[test]
fn generator_fill_equals_one_sample_at_a_time() {
    use bankstep::scenario::Scenario;
    use bankstep::study::Study;
    for (noise, pv2) in [("1.0", PV2), ("1.0", ""), ("0", PV2), ("0", "")] {
        let text = PLANT.replace("__NOISE__", noise).replace("__PV2__", pv2);
        let sc = Scenario::from_str(&text, std::path::Path::new("plant.toml")).expect("scenario");
        let study = Study::prepare(sc).expect("study");
        let (n, dt, t0) = (study.plan.intervals, study.plan.dt_s, study.plan.t_first_s);
        for (chunk, stop) in [
            (1, false),
            (7, false),
            (256, false),
            (256, true),
            (600, false),
        ] {
            let mut a = study.source().expect("source");
            let mut b = study.source().expect("source");
            let mut fa = vec![LoadSample::default(); chunk];
            let mut fb = vec![LoadSample::default(); chunk];
            let mut k = 0;
            while k < n {
                let want = chunk.min((n - k) as usize);
                let (ga, ea) = a.fill(k, t0, dt, &mut fa[..want], stop);
                let (gb, eb) = reference(&mut b, k, t0, dt, &mut fb[..want], stop);
                assert!(ea.is_none() && eb.is_none());
                assert_eq!(ga, gb, "noise {noise}, chunk {chunk}, k {k}");
                for (x, y) in fa[..ga].iter().zip(&fb[..gb]) {
                    for (u, v) in x
                        .p_kw
                        .iter()
                        .chain(&x.q_kvar)
                        .zip(y.p_kw.iter().chain(&y.q_kvar))
                    {
                        assert_eq!(
                            u.to_bits(),
                            v.to_bits(),
                            "noise {noise}, chunk {chunk}, k {k}"
                        );
                    }
                }
                k += gb as u64;
            }
        }
    }
}

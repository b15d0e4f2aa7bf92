//! Whole-run checks of what the analysis says: billed PF against its registers worked by
//! hand, the digits shown near a limit, plausibility warnings and the safety caution.

mod common;
use bankstep::analysis::{assess, Assessment, Severity};
use bankstep::engine::{Quiet, RunResult};
use bankstep::report::{ReportContext, ReportWriter, Summary};
use common::{study, Pieces};

/// Runs `toml` over `load` and returns the raw result, its assessment and the summary text.
fn judge(toml: &str, load: Pieces) -> (RunResult, Assessment, String) {
    let st = study(toml);
    let mut src = load;
    let r = st.run_on(&mut src, &mut Quiet).expect("run");
    let a = assess(&st, &r);
    let mut out = Vec::new();
    Summary
        .write(&ReportContext::new(&st, &r, &a), &mut out)
        .expect("summary");
    (r, a, String::from_utf8(out).expect("utf-8"))
}

/// The text of the first finding on `topic`.
fn finding<'a>(a: &'a Assessment, topic: &str) -> &'a bankstep::analysis::Finding {
    a.findings
        .iter()
        .find(|f| f.topic == topic)
        .unwrap_or_else(|| panic!("no {topic} finding in {:?}", a.findings))
}

// Billed PF from the inductive register, E_P / sqrt(E_P² + E_Q,ind²) (energy PF as utility
// tariffs bill it, common practice). 12 h at 100 kW / 60 kvar lagging, then 12 h at 10 kW /
// 70 kvar leading, with a 1 kvar fixed step on a stiff bus: E_P = 1,320 kWh, E_Q,ind =
// 12 × 59 = 708 kvarh, E_Q,cap = 12 × 71 = 852 kvarh. Billed PF = 1320 / sqrt(1320² + 708²)
// = 0.8812 lag: a shortfall against 0.95 lag, whatever the capacitive register holds.
#[test]
fn lagging_shortfall_is_reported_whatever_the_capacitive_register_holds() {
    let toml = "[[steps]]\nkvar = 1\nfixed = true\n[controller]\ntarget_pf = \"0.95 lag\"\n\
                [load.synthetic]\n[run]\nduration_h = 24\ntime_step_s = 60\n";
    let (r, a, summary) = judge(
        toml,
        Pieces(vec![(0.0, 100.0, 60.0), (12.0 * 3600.0, 10.0, -70.0)]),
    );
    let p = &r.metrics.pf;
    assert!((p.kwh_import - 1320.0).abs() < 1e-6);
    assert!((p.kvarh_inductive - 708.0).abs() < 1e-6);
    assert!((p.kvarh_capacitive - 852.0).abs() < 1e-6);
    let billed = 1320.0 / (1320.0f64 * 1320.0 + 708.0 * 708.0).sqrt();
    assert!((p.energy_pf - billed).abs() < 1e-9);
    let f = finding(&a, "pf");
    assert_eq!(f.severity, Severity::Warning, "{}", f.text);
    assert!(
        f.text.starts_with("Billed PF 0.88 lag") && f.text.contains("below the 0.95 lag target"),
        "{}",
        f.text
    );
    // tan φ = E_Q/E_P as tariffs state it: 708 / 1320 = 0.536; capacitive 852 / 1320 = 0.645.
    assert!(f.text.contains("tan φ 0.536"), "{}", f.text);
    assert!(f.text.contains("852 kvarh (tan φ 0.645)"), "{}", f.text);
    assert!(
        summary.contains("0.88 lag, below the 0.95 lag target"),
        "{summary}"
    );
    assert!(!summary.contains("lead meets"), "{summary}");
}

// A PF of cos φ with tan φ = 0.3300 is 0.94963 (= 1/sqrt(1 + 0.33²)), which rounds to 0.95
// but is below a 0.95 target (tan φ 0.3287, the cos φ 0.95 tariff threshold, common
// practice): the figure must show the digits that decide it, alike in every line.
#[test]
fn a_pf_just_below_target_shows_the_deciding_digits() {
    let toml = "[[steps]]\nkvar = 1\nfixed = true\n[load.synthetic]\n[run]\nduration_h = 1\n\
                time_step_s = 60\n";
    // 1 kvar of the fixed step cancels 1 kvar of the load: supply Q = 33 kvar on 100 kW.
    let (_, a, summary) = judge(toml, Pieces(vec![(0.0, 100.0, 34.0)]));
    let f = finding(&a, "pf");
    assert!(
        f.text.starts_with("Billed PF 0.9496 lag") && f.text.contains("below"),
        "{}",
        f.text
    );
    assert!(
        summary.contains("0.9496 lag, below the 0.95 lag target"),
        "{summary}"
    );
}

// A profile in W under kW headers reads 1,000 times too large: 150,000 "kW" on a 1,250 kVA
// transformer cannot be real, and the summary must say so rather than report it.
#[test]
fn a_load_far_beyond_the_transformer_is_called_out() {
    let toml = "[supply]\n[supply.transformer]\nrated_kva = 1250\nimpedance_pct = 6\n\
                [[steps]]\nkvar = 50\ncount = 4\n[load.synthetic]\n[run]\nduration_h = 1\n\
                time_step_s = 60\n";
    let (r, a, _) = judge(toml, Pieces(vec![(0.0, 150_000.0, 90_000.0)]));
    let f = finding(&a, "supply");
    assert_eq!(f.severity, Severity::Critical);
    assert!(f.text.contains("1,250 kVA transformer"), "{}", f.text);
    assert!(f.advice.as_deref().unwrap_or("").contains("units"));
    // Each unsolved interval counts once: there are 60 intervals.
    assert!(
        r.nonconverged_intervals <= 60,
        "{}",
        r.nonconverged_intervals
    );
}

// A bank larger than the transformer that feeds it is not a real design (banks are a
// fraction of the transformer rating, common practice): 25,000 kvar on 1,250 kVA.
#[test]
fn a_bank_beyond_the_transformer_is_called_out() {
    let toml = "[supply]\n[supply.transformer]\nrated_kva = 1250\nimpedance_pct = 6\n\
                [[steps]]\nkvar = 25000\n[load.synthetic]\n[run]\nduration_h = 1\n\
                time_step_s = 60\n";
    let (_, a, _) = judge(toml, Pieces(vec![(0.0, 800.0, 500.0)]));
    assert!(a
        .findings
        .iter()
        .any(|f| f.topic == "supply" && f.text.contains("25,000 kvar")));
}

// The usual cautions (stored charge, isolation, qualified persons; common practice) stand
// in every summary, also when nothing proposes a hardware change.
#[test]
fn every_summary_carries_the_safety_caution() {
    let toml = "[[steps]]\nkvar = 25\ncount = 2\n[load.synthetic]\n[run]\nduration_h = 1\n\
                time_step_s = 60\n";
    let (_, a, summary) = judge(toml, Pieces(vec![(0.0, 100.0, 30.0)]));
    assert!(a.findings.iter().all(|f| !f.hardware));
    assert!(
        summary.contains("Caution: capacitors hold their charge"),
        "{summary}"
    );
}

//! Steps given by their capacitors' catalogue rating: the effective output at the bus is
//! Q = Q_R·(U/U_R)²/(1 − p), worked by hand; giving both `kvar` and `rated_kvar`, or
//! neither, is an error naming the key.

use bankstep::scenario::Scenario;
use std::path::Path;

fn scenario(steps: &str) -> Result<Scenario, String> {
    let text = format!("[supply]\nnominal_voltage_v = 400\n{steps}\n[load]\ncsv = \"load.csv\"\n");
    Scenario::from_str(&text, Path::new("rating.toml")).map_err(|e| e.to_string())
}

// Detuned step worked by hand (the relation is the usual one of detuned-filter
// calculations, common practice): 50 kvar rated at 440 V behind a 7 % reactor on a 400 V
// bus delivers 50 × (400/440)² / (1 − 0.07) = 50 × 0.826446 / 0.93 = 44.4326 kvar, and its
// capacitors keep their 440 V rating for the harmonic limits.
#[test]
fn detuned_step_delivers_its_rating_scaled_by_voltage_and_reactor() {
    let sc =
        scenario("[[steps]]\nrated_kvar = 50\nrated_voltage_v = 440\ndetuning_pct = 7\ncount = 2")
            .unwrap();
    assert_eq!(sc.steps.len(), 2);
    for s in &sc.steps {
        assert!((s.kvar - 44.4326).abs() < 1e-4, "{}", s.kvar);
        assert_eq!(s.capacitor_rated_voltage_v, Some(440.0));
        assert_eq!(s.detuning, Some(0.07));
    }
}

// Plain step rated at 415 V on a 400 V bus, by hand: 50 × (400/415)² = 46.4508 kvar.
// Single-phase step rated 10 kvar at 230 V line to neutral on a 400 V bus (230.94 V line
// to neutral): 10 × (230.94/230)² = 10.0820 kvar.
#[test]
fn plain_and_single_phase_ratings() {
    let sc = scenario("[[steps]]\nrated_kvar = 50\nrated_voltage_v = 415").unwrap();
    assert!(
        (sc.steps[0].kvar - 46.4508).abs() < 1e-4,
        "{}",
        sc.steps[0].kvar
    );
    let sc = scenario("[[steps]]\nrated_kvar = 10\nrated_voltage_v = 230\nphase = \"a\"").unwrap();
    assert!(
        (sc.steps[0].kvar - 10.0820).abs() < 1e-3,
        "{}",
        sc.steps[0].kvar
    );
}

#[test]
fn both_or_neither_is_an_error_naming_the_key() {
    let e = scenario("[[steps]]\nkvar = 50\nrated_kvar = 50\nrated_voltage_v = 440").unwrap_err();
    assert!(e.contains("[[steps]] table 1 (step 1).rated_kvar"), "{e}");
    assert!(e.contains("not both"), "{e}");
    let e = scenario("[[steps]]\ncount = 2").unwrap_err();
    assert!(e.contains("[[steps]] table 1 (steps 1 to 2).kvar"), "{e}");
    assert!(e.contains("rated_kvar"), "{e}");
    let e = scenario("[[steps]]\nrated_kvar = 50").unwrap_err();
    assert!(e.contains(".rated_voltage_v"), "{e}");
    assert!(e.contains("320 to 1200"), "{e}");
    let e = scenario("[[steps]]\nkvar = 50\nrated_voltage_v = 440").unwrap_err();
    assert!(e.contains(".rated_voltage_v"), "{e}");
    let e = scenario(
        "[[steps]]\nrated_kvar = 50\nrated_voltage_v = 440\ncapacitor_rated_voltage_v = 440",
    )
    .unwrap_err();
    assert!(e.contains(".capacitor_rated_voltage_v"), "{e}");
    let e = scenario("[[steps]]\nrated_kvar = 50\nrated_voltage_v = 100").unwrap_err();
    assert!(e.contains(".rated_voltage_v") && e.contains("320"), "{e}");
}

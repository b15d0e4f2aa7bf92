//! The scenario file: one TOML document describing a study (supply, bank steps,
//! controller settings, load source, harmonic spectrum, run length and time step, seed,
//! report options), its defaults, and its validation.
//!
//! Parsing is serde with unknown keys refused ([`schema`]); validation then checks every
//! value against its allowed range, one module per section, and reports the key, the
//! value, the range and the unit. The result is a [`Scenario`]: validated settings, ready
//! for [`crate::study`] to attach a load profile and hand to [`crate::engine::run`].

mod check;
mod controller;
mod harmonics;
mod load;
pub mod maintenance;
pub mod overrides;
mod report;
mod run;
pub mod schema;
mod steps;
mod supply;
pub mod tariff;

pub use controller::{DEAD_BAND_FRACTION_KEY, DEAD_BAND_KVAR_KEY};
pub use maintenance::Maintenance;
pub use overrides::Override;
pub use schema::{
    ControllerSection, FaultSection, HarmonicsSection, LoadSection, ProtectionSection,
    ReportSection, RunSection, ScenarioFile, StepSection, StudySection, SupplySection,
    TargetPfValue, TransformerSection,
};
pub use steps::effective_kvar;
pub use tariff::{Tariff, TariffSection};

use crate::bank::StepSpec;
use crate::controller::ControllerParams;
use crate::error::{FieldError, ScenarioError};
use crate::harmonics::{HarmonicOptions, Spectrum};
use crate::profile::csv::CsvOptions;
use crate::profile::synthetic::SyntheticConfig;
use crate::supply::SupplyParams;
use chrono::NaiveDateTime;
use std::path::{Path, PathBuf};

/// Where the load comes from.
#[derive(Debug, Clone)]
pub enum LoadSpec {
    /// A CSV profile (absolute or relative to the working directory, already resolved
    /// against the scenario's folder).
    Csv {
        /// The file.
        path: PathBuf,
        /// How to read it: delimiter, decimal mark, defect policies, gap factor.
        options: CsvOptions,
    },
    /// The synthetic generator.
    Synthetic(SyntheticConfig),
}

/// How billing windows are cut.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BillingWindows {
    /// Calendar months (for runs shorter than a month, the whole run).
    Month,
    /// The whole run.
    Run,
}

/// A validated scenario.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// The file it came from.
    pub path: PathBuf,
    /// Study name (the file stem if none).
    pub name: String,
    /// Description, if any.
    pub description: Option<String>,
    /// Supply.
    pub supply: SupplyParams,
    /// How the bus is solved (`supply.bus`, `supply.transformer.winding`). Default
    /// per phase.
    pub bus: crate::supply::BusModel,
    /// Steps in number order.
    pub steps: Vec<StepSpec>,
    /// Controller settings.
    pub controller: ControllerParams,
    /// Load source.
    pub load: LoadSpec,
    /// Load spectrum.
    pub spectrum: Spectrum,
    /// Resonance warning tolerance, orders.
    pub resonance_tolerance: f64,
    /// Harmonic limits and damping.
    pub harmonics: HarmonicOptions,
    /// Harmonic voltage the grid brings by itself: (order, % of U_n, open-circuit at the
    /// bus), ascending. Default none.
    pub background_pct: Vec<(f64, f64)>,
    /// Requested run length, s (`None`: the whole CSV profile, or 7 days synthetic).
    pub duration_s: Option<f64>,
    /// Time step, s.
    pub dt_s: f64,
    /// Calendar of elapsed time 0.
    pub start: NaiveDateTime,
    /// Seed.
    pub seed: u64,
    /// Billing windows.
    pub billing: BillingWindows,
    /// Overcorrection threshold, kvar.
    pub overcorrection_threshold_kvar: f64,
    /// Minimum episode, s.
    pub overcorrection_min_s: f64,
    /// Hunting window, s.
    pub hunting_window_s: f64,
    /// Measure unbalance over the run (`report.unbalance`): voltage and current
    /// unbalance, their weekly 95th percentile, and the IEEE Std 1459-2010 apparent
    /// powers. Default false.
    pub unbalance: bool,
    /// Discharge-device time of the capacitors, s, if given.
    pub capacitor_discharge_s: Option<f64>,
    /// The key the user wrote to set the dead band: [`DEAD_BAND_KVAR_KEY`]
    /// (`controller.dead_band_kvar`) or [`DEAD_BAND_FRACTION_KEY`]
    /// (`controller.dead_band_fraction`); `None` when neither was written and the default
    /// (0.65 × the smallest switched step) applies.
    pub dead_band_key: Option<&'static str>,
    /// Prices of reactive energy, a low PF and worn parts (`[tariff]`); `None` when the
    /// scenario has no tariff.
    pub tariff: Option<Tariff>,
    /// The bank's history (counters, installation dates), capacitor ageing, holidays and
    /// inrush settings of the wear plan (`[maintenance]` and the per-step keys).
    pub maintenance: Maintenance,
    /// SHA-256 of the scenario text, lowercase hex, for provenance.
    pub content_sha256: String,
}

/// Lowercase hex SHA-256 of some bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    hex_lower(&Sha256::digest(bytes))
}

/// Lowercase hex of a digest.
pub fn hex_lower(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

impl Scenario {
    /// The harmonic model of the site these settings describe: supply, steps, load
    /// spectrum, limits, damping and the grid's background distortion. Every part of the
    /// crate that needs the model builds it here.
    pub fn harmonic_model(&self) -> crate::harmonics::HarmonicModel {
        crate::harmonics::HarmonicModel::new(
            &self.supply,
            &self.steps,
            self.spectrum.clone(),
            self.harmonics,
        )
        .with_background(&self.background_pct)
    }
    /// Reads, parses and validates a scenario file.
    pub fn from_file(path: &Path) -> Result<Scenario, ScenarioError> {
        let text = std::fs::read_to_string(path).map_err(|source| ScenarioError::Io {
            file: path.to_path_buf(),
            source,
        })?;
        Self::from_str(&text, path)
    }

    /// Parses and validates scenario text; `path` names it in errors and anchors a
    /// relative CSV path.
    pub fn from_str(text: &str, path: &Path) -> Result<Scenario, ScenarioError> {
        let file: ScenarioFile = toml::from_str(text).map_err(|e| ScenarioError::Parse {
            file: path.to_path_buf(),
            message: e.to_string().trim_end().to_string(),
        })?;
        let mut sc = Self::validate(file, path).map_err(|e| ScenarioError::from_field(path, e))?;
        sc.content_sha256 = sha256_hex(text.as_bytes());
        Ok(sc)
    }

    /// Applies the defaults and checks every section, in file order.
    fn validate(f: ScenarioFile, path: &Path) -> Result<Scenario, FieldError> {
        let supply = supply::supply(&f.supply)?;
        let bus = supply::bus(&f.supply)?;
        let steps = steps::steps(&f.steps, supply.nominal_voltage_v)?;
        let smallest = crate::bank::smallest_switched_kvar(&steps);
        let mut ctl = controller::controller(&f.controller, supply.nominal_voltage_v, smallest)?;
        ctl.params.detection = maintenance::detection(&f.controller.detection)?;
        if ctl.params.per_phase && ctl.params.detection.is_some() {
            return Err(FieldError::new(
                "controller.detection",
                "fault detection is not available with measurement = \"per-phase\"",
            ));
        }
        let maintenance = maintenance::maintenance(&f.maintenance, &f.steps, &steps::table_label)?;
        let load = load::load(&f.load, path)?;
        let harm = harmonics::harmonics(&f.harmonics)?;
        let run = run::run(&f.run)?;
        let rep = report::report(&f.report, smallest, ctl.params.connect_delay_s)?;
        let tariff = tariff::tariff(&f.tariff)?;
        let name = f.study.name.clone().unwrap_or_else(|| {
            path.file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default()
        });
        Ok(Scenario {
            path: path.to_path_buf(),
            name,
            description: f.study.description.clone(),
            supply,
            steps,
            controller: ctl.params,
            load,
            spectrum: harm.spectrum,
            resonance_tolerance: harm.tolerance,
            harmonics: harm.options,
            background_pct: harm.background_pct,
            duration_s: run.duration_s,
            dt_s: run.dt_s,
            start: run.start,
            seed: run.seed,
            billing: rep.billing,
            overcorrection_threshold_kvar: rep.overcorrection_threshold_kvar,
            overcorrection_min_s: rep.overcorrection_min_s,
            hunting_window_s: rep.hunting_window_s,
            unbalance: rep.unbalance,
            bus,
            capacitor_discharge_s: ctl.capacitor_discharge_s,
            dead_band_key: ctl.dead_band_key,
            tariff,
            maintenance,
            content_sha256: String::new(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::harmonics::limits::{CapacitorLimits, VoltageLimits};
    use crate::pf::PfTarget;

    const MINIMAL: &str = r#"
[[steps]]
kvar = 50
count = 4
[load.synthetic]
"#;

    fn parse(text: &str) -> Result<Scenario, ScenarioError> {
        Scenario::from_str(text, Path::new("site.toml"))
    }

    #[test]
    fn defaults_fill_a_minimal_file() {
        let s = parse(MINIMAL).unwrap();
        assert_eq!(s.steps.len(), 4);
        // Dead band 0.65 × the smallest switched step (common practice).
        assert!((s.controller.dead_band_kvar - 32.5).abs() < 1e-12);
        assert_eq!(s.controller.target, PfTarget::lag(0.95));
        assert_eq!(s.hunting_window_s, 300.0);
        assert_eq!(s.dt_s, 1.0);
    }

    #[test]
    fn errors_name_file_key_and_range() {
        let e = parse(&MINIMAL.replace("kvar = 50", "kvar = -5"))
            .unwrap_err()
            .to_string();
        assert_eq!(
            e,
            "site.toml: key `[[steps]] table 1 (steps 1 to 4).kvar`: -5 kvar is outside the \
             allowed range: more than 0 and at most 100000 kvar"
        );
        let e = parse(&format!(
            "{MINIMAL}\n[controller]\ntarget_pf = \"1.3 lag\"\n"
        ))
        .unwrap_err()
        .to_string();
        assert!(e.contains("0.5 to 1.0"), "{e}");
        let e = parse(&format!("{MINIMAL}\n[controller]\nswiching_delay_s = 3\n"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("swiching_delay_s") && e.contains("line"), "{e}");
        let e = parse("[load.synthetic]\n").unwrap_err().to_string();
        assert!(e.contains("`steps`"), "{e}");
    }

    // Steps are counted the way a user counts: tables from 1, and the step numbers a
    // table makes (table 1 makes steps 1 to 4 here, so table 2 is step 5).
    #[test]
    fn step_errors_name_the_table_and_its_step_numbers() {
        let e = parse(&format!("{MINIMAL}[[steps]]\nkvar = 10\nphase = \"x\"\n"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("key `[[steps]] table 2 (step 5).phase`"), "{e}");
        let e = parse(&format!("{MINIMAL}[[steps]]\nkvar = 10\ncount = 0\n"))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("key `[[steps]] table 2.count`: 0 is outside the allowed range 1 to 64"),
            "{e}"
        );
    }

    // A target PF that parses but lies outside 0.5 to 1.0 is a key error naming the file,
    // the key, the value and the range, not a syntax error.
    #[test]
    fn target_pf_out_of_range_is_a_key_error() {
        for (written, shown) in [("1.2", "1.2"), ("\"1.2 lead\"", "\"1.2 lead\"")] {
            let e = parse(&format!("{MINIMAL}[controller]\ntarget_pf = {written}\n")).unwrap_err();
            assert!(matches!(e, ScenarioError::Invalid { .. }), "{e}");
            let e = e.to_string();
            assert!(
                e.starts_with(&format!(
                    "site.toml: key `controller.target_pf`: {shown} is outside the allowed \
                     range 0.5 to 1.0, lagging or leading"
                )),
                "{e}"
            );
            assert!(!e.contains("TOML parse error"), "{e}");
        }
        let e = parse(&format!("{MINIMAL}[controller]\ntarget_pf = \"high\"\n"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("\"high\" is not a power factor"), "{e}");
        let s = parse(&format!(
            "{MINIMAL}[controller]\ntarget_pf = \"0.98 lead\"\n"
        ))
        .unwrap();
        assert_eq!(s.controller.target, PfTarget::lead(0.98));
    }

    #[test]
    fn dead_band_key_records_what_the_user_wrote() {
        assert_eq!(parse(MINIMAL).unwrap().dead_band_key, None);
        let s = parse(&format!("{MINIMAL}[controller]\ndead_band_kvar = 20\n")).unwrap();
        assert_eq!(s.dead_band_key, Some("controller.dead_band_kvar"));
        let s = parse(&format!(
            "{MINIMAL}[controller]\ndead_band_fraction = 0.7\n"
        ))
        .unwrap();
        assert_eq!(s.dead_band_key, Some("controller.dead_band_fraction"));
    }

    #[test]
    fn export_mode_defaults_to_absolute() {
        use crate::controller::ExportMode;
        assert_eq!(
            parse(MINIMAL).unwrap().controller.export_mode,
            ExportMode::Absolute
        );
        let s = parse(&format!("{MINIMAL}[controller]\nexport_mode = \"hold\"\n")).unwrap();
        assert_eq!(s.controller.export_mode, ExportMode::Hold);
        let s = parse(&format!("{MINIMAL}[controller]\nexport_mode = \"open\"\n")).unwrap();
        assert_eq!(s.controller.export_mode, ExportMode::Open);
        assert!(parse(&format!("{MINIMAL}[controller]\nexport_mode = \"keep\"\n")).is_err());
    }

    #[test]
    fn harmonic_keys_parse_and_check_their_ranges() {
        let s = parse(&format!(
            "{MINIMAL}[harmonics]\npreset = \"single-phase-electronic\"\nreference_kva = 40\n\
             voltage_limits = \"en-50160\"\ncapacitor_limits = \"ieee-18\"\ndamping_kw = 20\n"
        ))
        .unwrap();
        assert_eq!(s.spectrum.orders[0], (3.0, 81.0));
        assert_eq!(s.harmonics.voltage_limits, VoltageLimits::En50160);
        assert_eq!(s.harmonics.capacitor_limits, CapacitorLimits::Ieee18);
        assert_eq!(s.harmonics.damping_kw, 20.0);
        let e = parse(&MINIMAL.replace(
            "count = 4",
            "count = 4\ndetuning_pct = 7\ncapacitor_rated_voltage_v = 40",
        ))
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("[[steps]] table 1 (steps 1 to 4).capacitor_rated_voltage_v")
                && e.contains("320 to 1200 V"),
            "{e}"
        );
        let e = parse(&format!("{MINIMAL}[harmonics]\ndamping_kw = -1\n"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("harmonics.damping_kw"), "{e}");
    }

    #[test]
    fn csv_path_is_relative_to_the_scenario() {
        let s = Scenario::from_str(
            "[[steps]]\nkvar = 10\n[load]\ncsv = \"p.csv\"\n",
            Path::new("dir/site.toml"),
        )
        .unwrap();
        match s.load {
            LoadSpec::Csv { path, .. } => assert_eq!(path, Path::new("dir/p.csv")),
            _ => panic!("expected a CSV load"),
        }
    }
}

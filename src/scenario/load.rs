//! Validation of `[load]`: a CSV profile (path relative to the scenario, reading options
//! and defect policies) or the synthetic generator, never both.

use super::schema::LoadSection;
use super::LoadSpec;
use crate::error::FieldError;
use crate::profile::csv::CsvOptions;
use std::path::Path;

impl LoadSection {
    /// The CSV reading options these keys give, validated; errors name the key.
    pub fn csv_options(&self) -> Result<CsvOptions, FieldError> {
        let d = CsvOptions::default();
        let one_char = |key: &str, v: &Option<String>, default: char| match v.as_deref() {
            None => Ok(default),
            Some("tab") | Some("\\t") => Ok('\t'),
            Some(text) => {
                let mut chars = text.chars();
                match (chars.next(), chars.next()) {
                    (Some(c), None) => Ok(c),
                    _ => Err(FieldError::new(
                        key,
                        format!("`{text}` is not a single character"),
                    )),
                }
            }
        };
        let options = CsvOptions {
            on_defect: self.on_defect,
            defects: self.defects.unwrap_or_default(),
            gap_factor: self.gap_factor.unwrap_or(d.gap_factor),
            delimiter: one_char("load.delimiter", &self.delimiter, d.delimiter)?,
            decimal: one_char("load.decimal", &self.decimal, d.decimal)?,
        };
        options
            .check()
            .map_err(|e| FieldError::new(format!("load.{}", e.key), e.message))?;
        Ok(options)
    }

    /// The first CSV-only key that is set, for a scenario without a CSV profile.
    pub(super) fn csv_only_key(&self) -> Option<&'static str> {
        [
            ("load.on_defect", self.on_defect.is_some()),
            ("load.defects", self.defects.is_some()),
            ("load.gap_factor", self.gap_factor.is_some()),
            ("load.delimiter", self.delimiter.is_some()),
            ("load.decimal", self.decimal.is_some()),
        ]
        .into_iter()
        .find(|(_, set)| *set)
        .map(|(k, _)| k)
    }
}

/// The load source these keys give; a relative CSV path is taken from the folder of the
/// scenario at `path`.
pub(super) fn load(l: &LoadSection, path: &Path) -> Result<LoadSpec, FieldError> {
    match (&l.csv, &l.synthetic) {
        (Some(_), Some(_)) => Err(FieldError::new(
            "load",
            "give `csv` or `[load.synthetic]`, not both",
        )),
        (None, None) => Err(FieldError::new(
            "load",
            "no load profile; give `csv = \"profile.csv\"` or a `[load.synthetic]` section",
        )),
        (Some(csv), None) => {
            let base = path.parent().unwrap_or(Path::new(""));
            Ok(LoadSpec::Csv {
                path: if csv.is_absolute() {
                    csv.clone()
                } else {
                    base.join(csv)
                },
                options: l.csv_options()?,
            })
        }
        (None, Some(cfg)) => {
            if let Some(key) = l.csv_only_key() {
                return Err(FieldError::new(key, "only meaningful with a CSV profile"));
            }
            cfg.validate("load.synthetic")?;
            Ok(LoadSpec::Synthetic(cfg.clone()))
        }
    }
}

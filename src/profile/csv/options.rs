//! How to read a profile CSV ([`CsvOptions`]): the defect policies, the gap factor, the
//! column delimiter and the decimal mark, their defaults, the policy in force for each
//! defect kind, and the check of every option against its allowed values.

use super::defect::DefectKind;
use crate::profile::{DefectPolicies, DefectPolicy};
use serde::{Deserialize, Serialize};

/// How to read a profile CSV. Deserializes from e.g. `{ on_defect = "skip",
/// gap_factor = 5.0, defects = { gap = "interpolate" }, delimiter = ";", decimal = "," }`,
/// missing keys taking their defaults.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct CsvOptions {
    /// One policy for every kind of row defect (not for gaps). A kind that cannot hold or
    /// interpolate (duplicates, backwards times, a truncated last line) skips instead.
    /// Default: none, so each kind takes its own default ([`DefectKind::default_policy`]).
    pub on_defect: Option<DefectPolicy>,
    /// Policies for single kinds; these win over `on_defect`. Default: none set.
    pub defects: DefectPolicies,
    /// A spacing between rows longer than this many median spacings is reported as a
    /// gap. Must be finite and ≥ 1. Default 3.
    pub gap_factor: f64,
    /// Column delimiter: `,` (default), `;`, tab or `|`.
    pub delimiter: char,
    /// Decimal mark of the numbers: `.` (default) or `,`. With `,` a point in a number
    /// is refused (no thousands separators).
    pub decimal: char,
}

impl Default for CsvOptions {
    fn default() -> Self {
        CsvOptions {
            on_defect: None,
            defects: DefectPolicies::default(),
            gap_factor: 3.0,
            delimiter: ',',
            decimal: '.',
        }
    }
}

/// An invalid CSV option: its key (relative to `[load]`, e.g. `defects.gap`) and what is
/// allowed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct OptionError {
    /// The key, e.g. `decimal` or `defects.duplicate`.
    pub key: String,
    /// What is wrong and what is allowed.
    pub message: String,
}

/// The per-kind setting of a [`DefectPolicies`].
fn configured(p: &DefectPolicies, kind: DefectKind) -> Option<DefectPolicy> {
    match kind {
        DefectKind::Malformed => p.malformed,
        DefectKind::NotFinite => p.not_finite,
        DefectKind::ShortRow => p.short_row,
        DefectKind::TruncatedLastLine => p.truncated_last_line,
        DefectKind::Duplicate => p.duplicate,
        DefectKind::ConflictingDuplicate => p.conflicting_duplicate,
        DefectKind::Backwards => p.backwards,
        DefectKind::Gap => p.gap,
    }
}

impl CsvOptions {
    /// Options with one policy for every kind of row defect.
    pub fn all(policy: DefectPolicy) -> Self {
        CsvOptions {
            on_defect: Some(policy),
            ..CsvOptions::default()
        }
    }

    /// The policy in force for a kind: its own setting, else `on_defect` (skip where
    /// that policy does not apply to the kind; gaps ignore `on_defect`), else the kind's
    /// default.
    pub fn policy(&self, kind: DefectKind) -> DefectPolicy {
        if let Some(p) = configured(&self.defects, kind) {
            return p;
        }
        match self.on_defect {
            Some(_) if kind == DefectKind::Gap => kind.default_policy(),
            Some(p) if kind.allows(p) => p,
            Some(_) => DefectPolicy::Skip,
            None => kind.default_policy(),
        }
    }

    /// The policy of every kind, by [`DefectKind::index`].
    pub fn policies(&self) -> [DefectPolicy; DefectKind::COUNT] {
        DefectKind::ALL.map(|k| self.policy(k))
    }

    /// Checks every option against its allowed values.
    pub fn check(&self) -> Result<(), OptionError> {
        let err = |key: &str, message: String| {
            Err(OptionError {
                key: key.to_string(),
                message,
            })
        };
        if !(self.gap_factor.is_finite() && self.gap_factor >= 1.0) {
            return err(
                "gap_factor",
                format!(
                    "{} is outside the allowed range: a finite number ≥ 1 (median spacings)",
                    self.gap_factor
                ),
            );
        }
        if !matches!(self.delimiter, ',' | ';' | '\t' | '|') {
            return err(
                "delimiter",
                format!(
                    "{:?} is not an allowed delimiter; write \",\" (the default), \";\", \"\\t\" \
                     (tab) or \"|\"",
                    self.delimiter.to_string()
                ),
            );
        }
        if !matches!(self.decimal, '.' | ',') {
            return err(
                "decimal",
                format!(
                    "{:?} is not an allowed decimal mark; write \".\" (the default) or \",\"",
                    self.decimal.to_string()
                ),
            );
        }
        for kind in DefectKind::ALL {
            if let Some(p) = configured(&self.defects, kind) {
                if !kind.allows(p) {
                    let allowed: Vec<&str> = kind.allowed().iter().map(|p| p.name()).collect();
                    return err(
                        &format!("defects.{}", kind.name()),
                        format!(
                            "`{}` does not apply to {}; allowed: {}",
                            p.name(),
                            kind.plural(),
                            allowed.join(", ")
                        ),
                    );
                }
            }
        }
        Ok(())
    }
}

/// How a delimiter is written in a scenario, for messages.
pub(super) fn delimiter_name(d: char) -> &'static str {
    match d {
        ',' => "\",\"",
        ';' => "\";\"",
        '\t' => "\"\\t\"",
        '|' => "\"|\"",
        _ => "another character",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn options_deserialize_with_defaults() {
        let o: CsvOptions = serde_json::from_str(r#"{"on_defect": "skip"}"#).unwrap();
        assert_eq!(o.on_defect, Some(DefectPolicy::Skip));
        assert_eq!(o.gap_factor, 3.0);
        assert_eq!((o.delimiter, o.decimal), (',', '.'));
        assert!(serde_json::from_str::<CsvOptions>(r#"{"gap": 2}"#).is_err());
        let o: CsvOptions = toml::from_str(
            "delimiter = \";\"\ndecimal = \",\"\n[defects]\ngap = \"interpolate\"\n",
        )
        .unwrap();
        assert_eq!((o.delimiter, o.decimal), (';', ','));
        assert_eq!(o.policy(DefectKind::Gap), DefectPolicy::Interpolate);
    }

    #[test]
    fn policies_resolve_kind_then_all_then_default() {
        let d = CsvOptions::default();
        use DefectKind as K;
        use DefectPolicy as P;
        let want = [
            P::Stop,
            P::Stop,
            P::Stop,
            P::Skip,
            P::Skip,
            P::Stop,
            P::Stop,
            P::Hold,
        ];
        assert_eq!(d.policies(), want);
        // One policy for all: kinds that cannot hold skip; gaps keep their own.
        let all = CsvOptions::all(P::Hold);
        assert_eq!(all.policy(K::NotFinite), P::Hold);
        assert_eq!(all.policy(K::Duplicate), P::Skip);
        assert_eq!(all.policy(K::Gap), P::Hold);
        assert_eq!(
            CsvOptions::all(P::Stop).policy(K::TruncatedLastLine),
            P::Stop
        );
        assert_eq!(CsvOptions::all(P::Stop).policy(K::Gap), P::Hold);
        let mut o = CsvOptions::all(P::Skip);
        o.defects.not_finite = Some(P::Interpolate);
        assert_eq!(o.policy(K::NotFinite), P::Interpolate);
        assert_eq!(o.policy(K::Malformed), P::Skip);
        assert!(o.check().is_ok());
        o.defects.backwards = Some(P::Hold);
        let e = o.check().unwrap_err();
        assert_eq!(e.key, "defects.backwards");
        assert_eq!(
            e.message,
            "`hold` does not apply to rows with backwards times; allowed: stop, skip"
        );
        let o = CsvOptions {
            decimal: ';',
            ..CsvOptions::default()
        };
        assert_eq!(o.check().unwrap_err().key, "decimal");
    }
}

//! Overrides: changing a scenario's settings by dotted key before it is validated, as a
//! sweep does for each of its variations.
//!
//! An [`Override`] is a dotted key (`controller.dead_band_kvar`, `run.seed`,
//! `supply.transformer.rated_kva`, `steps`) and a TOML value (`30`, `"rotating"`, an
//! array, an inline table). [`Scenario::from_str_with`] parses the scenario text into a
//! TOML document, writes each override into it (creating tables on the way, replacing
//! whatever stood there: an array or a table is replaced whole; a key that is another
//! way of giving the same setting, such as `controller.dead_band_kvar` for
//! `controller.dead_band_fraction` or `run.duration_h` for `run.duration_days`, replaces
//! the other, see [`ALTERNATIVES`]), then deserializes and
//! validates the document exactly as a file is. An unknown key is therefore refused by
//! the same rule as in a file, and any error names the override's key and value.
//!
//! # Step-layout shorthand
//!
//! For the `steps` key a string is read as a step layout and expanded to the `[[steps]]`
//! array ([`expand_step_layout`]):
//!
//! - terms joined by `+`; a term is `KVAR` (one step) or `COUNTxKVAR` (that many equal
//!   steps), e.g. `6x50` (six 50 kvar steps), `25+5x50` (a 25 kvar step then five of 50);
//! - a term ending in `f` is fixed (on from the start, never switched): `40f+2x25+5x50`;
//! - `@P%` at the end gives every step a detuning reactor of ratio P %: `6x50@7%`;
//! - every other step field (phase, contactor life, capacitor rating) takes its default.
//!
//! Steps are numbered in the order written, so `40f+2x25` is step 1 (40 kvar fixed),
//! steps 2 and 3 (25 kvar).

use super::{sha256_hex, Scenario, ScenarioFile};
use crate::error::{FieldError, ScenarioError};
use std::fmt;
use std::path::Path;
use toml::{Table, Value};

/// One change to a scenario: a dotted key and the TOML value to write there.
#[derive(Debug, Clone, PartialEq)]
pub struct Override {
    /// Dotted key, e.g. `controller.dead_band_kvar`.
    pub key: String,
    /// The value as TOML (`30`, `"rotating"`, an array, a table).
    pub value: Value,
}

impl Override {
    /// An override of `key` by `value`.
    pub fn new(key: impl Into<String>, value: Value) -> Self {
        Override {
            key: key.into(),
            value,
        }
    }

    /// Parses `KEY = VALUE` (or `KEY=VALUE`): the value is TOML, or a bare word taken as
    /// a string (`controller.ordering=rotating`).
    pub fn parse(text: &str) -> Result<Override, String> {
        let (k, v) = text
            .split_once('=')
            .ok_or_else(|| format!("`{text}` is not KEY=VALUE"))?;
        let key = check_key(k.trim())?;
        Ok(Override::new(key, parse_value(v.trim())))
    }
}

impl fmt::Display for Override {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} = {}", self.key, value_text(&self.value))
    }
}

/// A TOML value written the way it would be in a file, on one line (`30`, `0.5`,
/// `"rotating"`, `[1, 2]`).
pub fn value_text(v: &Value) -> String {
    match v {
        // Floats keep a decimal point so that they read back as floats.
        Value::Float(x) if x.is_finite() && x.fract() == 0.0 && x.abs() < 1e15 => {
            format!("{x:.1}")
        }
        Value::Float(x) => format!("{x}"),
        other => other.to_string(),
    }
}

/// Reads one value as TOML (`30`, `0.5`, `"six"`, `[1, 2]`, `{ kvar = 50 }`, `true`); text
/// that is not a TOML value (`rotating`, `6x50`) is taken as a string.
pub fn parse_value(text: &str) -> Value {
    let t = text.trim();
    let doc = format!("v = {t}");
    match doc.parse::<Table>() {
        Ok(mut table) if table.len() == 1 => table.remove("v").unwrap_or(Value::String(t.into())),
        _ => Value::String(t.to_string()),
    }
}

/// Checks that a key is dotted words (letters, digits, `_`, `-`), with no empty part.
pub fn check_key(key: &str) -> Result<String, String> {
    let ok = !key.is_empty()
        && key.split('.').all(|p| {
            !p.is_empty()
                && p.chars()
                    .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
        });
    if ok {
        Ok(key.to_string())
    } else {
        Err(format!(
            "`{key}` is not a scenario key; write dotted names such as `controller.dead_band_kvar`"
        ))
    }
}

/// Expands a step layout such as `6x50`, `25+5x50`, `40f+2x25+5x50` or `6x50@7%` into the
/// `[[steps]]` array (see the module docs).
pub fn expand_step_layout(text: &str) -> Result<Value, String> {
    let bad = |why: &str| {
        format!(
            "`{text}` is not a step layout ({why}); write e.g. `6x50`, `25+5x50`, \
             `40f+2x25+5x50` or `6x50@7%` (COUNTxKVAR terms joined by `+`, `f` for a fixed \
             step, `@P%` for detuning)"
        )
    };
    let t = text.trim();
    let (body, detuning) = match t.split_once('@') {
        Some((b, d)) => {
            let d = d.trim();
            let p = d.strip_suffix('%').unwrap_or(d).trim();
            let p: f64 = p.parse().map_err(|_| bad("the detuning is not a number"))?;
            (b.trim(), Some(p))
        }
        None => (t, None),
    };
    if body.is_empty() {
        return Err(bad("no steps"));
    }
    let mut out = Vec::new();
    for term in body.split('+') {
        let term = term.trim();
        let (term, fixed) = match term.strip_suffix(['f', 'F']) {
            Some(x) => (x.trim(), true),
            None => (term, false),
        };
        let (count, kvar) = match term.split_once(['x', 'X', '×']) {
            Some((c, k)) => {
                let c: u32 = c
                    .trim()
                    .parse()
                    .map_err(|_| bad(&format!("`{}` is not a step count", c.trim())))?;
                (c, k.trim())
            }
            None => (1, term),
        };
        let kvar: f64 = kvar
            .parse()
            .map_err(|_| bad(&format!("`{kvar}` is not a kvar figure")))?;
        let mut step = Table::new();
        step.insert("kvar".into(), Value::Float(kvar));
        if count != 1 {
            step.insert("count".into(), Value::Integer(i64::from(count)));
        }
        if fixed {
            step.insert("fixed".into(), Value::Boolean(true));
        }
        if let Some(p) = detuning {
            step.insert("detuning_pct".into(), Value::Float(p));
        }
        out.push(Value::Table(step));
    }
    Ok(Value::Array(out))
}

/// Writes `value` at the dotted `key` of `doc`, creating tables on the way. A string for
/// `steps` is expanded as a step layout.
pub fn apply(doc: &mut Table, key: &str, value: &Value) -> Result<(), String> {
    let value = match (key, value) {
        ("steps", Value::String(s)) => expand_step_layout(s)?,
        _ => value.clone(),
    };
    let parts: Vec<&str> = key.split('.').collect();
    let (last, path) = parts.split_last().ok_or("an empty key")?;
    let mut table = doc;
    for (i, part) in path.iter().enumerate() {
        let entry = table
            .entry(part.to_string())
            .or_insert_with(|| Value::Table(Table::new()));
        table = match entry {
            Value::Table(t) => t,
            _ => {
                return Err(format!(
                    "`{}` holds a value, not a table, so it has no key `{}`",
                    parts[..=i].join("."),
                    parts[i + 1..].join(".")
                ))
            }
        };
    }
    // A key that is one of several ways to give the same setting replaces the others, so
    // that `controller.dead_band_kvar` can be varied on a scenario that gives
    // `dead_band_fraction`.
    for group in ALTERNATIVES {
        if let Some(own) = group.iter().find(|k| **k == key) {
            for other in group.iter().filter(|k| *k != own) {
                if let Some(name) = other.rsplit('.').next() {
                    table.remove(name);
                }
            }
        }
    }
    table.insert(last.to_string(), value);
    Ok(())
}

/// Keys that give the same setting in different ways: an override of one removes the
/// others from its table.
pub const ALTERNATIVES: &[&[&str]] = &[
    &["controller.dead_band_kvar", "controller.dead_band_fraction"],
    &["run.duration_s", "run.duration_h", "run.duration_days"],
];

/// The value at a dotted key of a document, if it is there.
pub fn lookup<'a>(doc: &'a Table, key: &str) -> Option<&'a Value> {
    let mut parts = key.split('.');
    let mut v = doc.get(parts.next()?)?;
    for p in parts {
        v = v.as_table()?.get(p)?;
    }
    Some(v)
}

/// A canonical line for the overrides, appended to the text's hash input so that a
/// scenario changed by overrides has its own content hash.
fn overrides_trailer(overrides: &[Override]) -> String {
    let mut s = String::new();
    for o in overrides {
        s.push_str("\n# override ");
        s.push_str(&o.to_string());
    }
    s
}

impl Scenario {
    /// Parses scenario text, applies `overrides` in order to the document, and validates
    /// the result as a file. With no override this is [`Scenario::from_str`]. An error
    /// caused by an override (an unknown key, a wrong type, a value out of range) names
    /// the override's key and value.
    pub fn from_str_with(
        text: &str,
        path: &Path,
        overrides: &[Override],
    ) -> Result<Scenario, ScenarioError> {
        if overrides.is_empty() {
            return Scenario::from_str(text, path);
        }
        let doc: Table = text
            .parse()
            .map_err(|e: toml::de::Error| ScenarioError::Parse {
                file: path.to_path_buf(),
                message: e.to_string().trim_end().to_string(),
            })?;
        // The document as written must be valid by itself, so that an error after the
        // overrides is theirs.
        Scenario::from_document(doc.clone(), path)
            .map_err(|e| ScenarioError::from_field(path, e))?;
        match Scenario::apply_all(&doc, path, overrides) {
            Ok(mut sc) => {
                let mut h = text.to_string();
                h.push_str(&overrides_trailer(overrides));
                sc.content_sha256 = sha256_hex(h.as_bytes());
                Ok(sc)
            }
            Err(e) => Err(Scenario::blame(&doc, path, overrides, e)),
        }
    }

    /// Applies every override and validates.
    fn apply_all(doc: &Table, path: &Path, overrides: &[Override]) -> Result<Scenario, FieldError> {
        let mut doc = doc.clone();
        for o in overrides {
            apply(&mut doc, &o.key, &o.value).map_err(|m| FieldError::new(o.key.clone(), m))?;
        }
        Scenario::from_document(doc, path)
    }

    /// Deserializes and validates a document.
    fn from_document(doc: Table, path: &Path) -> Result<Scenario, FieldError> {
        let file: ScenarioFile = Value::Table(doc).try_into().map_err(|e: toml::de::Error| {
            FieldError::new("", e.message().trim_end().to_string())
        })?;
        Scenario::validate(file, path)
    }

    /// Names the override behind an error: the first that fails on its own, else all of
    /// them (a combination that fails together).
    fn blame(doc: &Table, path: &Path, overrides: &[Override], e: FieldError) -> ScenarioError {
        let culprit = overrides.iter().find_map(|o| {
            Scenario::apply_all(doc, path, std::slice::from_ref(o))
                .err()
                .map(|e| (o, e))
        });
        let (key, message) = match culprit {
            Some((o, e)) => {
                let words = if e.key == o.key {
                    e.message.clone()
                } else {
                    field_words(&e)
                };
                (o.key.clone(), format!("override `{o}`: {words}"))
            }
            None => {
                let all: Vec<String> = overrides.iter().map(|o| format!("`{o}`")).collect();
                (
                    overrides[0].key.clone(),
                    format!(
                        "the overrides {} together: {}",
                        all.join(", "),
                        field_words(&e)
                    ),
                )
            }
        };
        ScenarioError::Invalid {
            file: path.to_path_buf(),
            key,
            message,
        }
    }
}

/// A field error in words, with its own key when it has one.
fn field_words(e: &FieldError) -> String {
    if e.key.is_empty() {
        e.message.clone()
    } else {
        format!("key `{}`: {}", e.key, e.message)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_expands_counts_fixed_and_detuning() {
        // Hand-derived: `40f+2x25+5x50@7%` is one fixed 40 kvar step, two of 25, five of
        // 50, each with a 7 % reactor.
        let v = expand_step_layout("40f+2x25+5x50@7%").unwrap();
        let a = v.as_array().unwrap();
        assert_eq!(a.len(), 3);
        assert_eq!(a[0]["kvar"].as_float(), Some(40.0));
        assert_eq!(a[0]["fixed"].as_bool(), Some(true));
        assert!(a[0].get("count").is_none());
        assert_eq!(a[1]["count"].as_integer(), Some(2));
        assert_eq!(a[2]["count"].as_integer(), Some(5));
        assert_eq!(a[2]["kvar"].as_float(), Some(50.0));
        assert_eq!(a[2]["detuning_pct"].as_float(), Some(7.0));
        assert!(expand_step_layout("6y50").is_err());
        assert!(expand_step_layout("").is_err());
        assert!(expand_step_layout("6x50@seven").is_err());
    }

    #[test]
    fn values_are_toml_or_bare_words() {
        assert_eq!(parse_value("30"), Value::Integer(30));
        assert_eq!(parse_value("0.5"), Value::Float(0.5));
        assert_eq!(parse_value("rotating"), Value::String("rotating".into()));
        assert_eq!(
            parse_value("\"0.95 lag\""),
            Value::String("0.95 lag".into())
        );
        assert_eq!(parse_value("6x50"), Value::String("6x50".into()));
        assert!(parse_value("[1, 2]").is_array());
        assert_eq!(value_text(&Value::Float(30.0)), "30.0");
        assert_eq!(value_text(&Value::String("a".into())), "\"a\"");
    }

    #[test]
    fn apply_creates_tables_and_refuses_a_value_as_table() {
        let mut doc: Table = "[controller]\ndead_band_kvar = 5\n".parse().unwrap();
        apply(
            &mut doc,
            "supply.transformer.rated_kva",
            &Value::Float(630.0),
        )
        .unwrap();
        assert_eq!(
            lookup(&doc, "supply.transformer.rated_kva"),
            Some(&Value::Float(630.0))
        );
        let e = apply(&mut doc, "controller.dead_band_kvar.x", &Value::Integer(1)).unwrap_err();
        assert!(
            e.contains("`controller.dead_band_kvar` holds a value"),
            "{e}"
        );
    }
}

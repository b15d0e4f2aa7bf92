//! What a sweep varies: keys with lists of values ([`Variation`]), read from the command
//! line (`KEY=V1,V2,...`, ranges `start:stop:step`) or from a grid file (a `[vary]`
//! table), and their cartesian product in a fixed order ([`SweepSpec::settings`]).

use super::SweepError;
use crate::scenario::overrides::{check_key, parse_value, value_text};
use crate::scenario::Override;
use std::fmt;
use toml::Value;

/// Largest number of values one range may make.
pub const MAX_RANGE_VALUES: usize = 100_000;

/// Largest number of settings a sweep may make (the product of the value counts).
pub const MAX_SETTINGS: usize = 10_000_000;

/// One key and the values it takes.
#[derive(Debug, Clone, PartialEq)]
pub struct Variation {
    /// Dotted scenario key, e.g. `controller.dead_band_kvar`.
    pub key: String,
    /// The values, in the order given.
    pub values: Vec<Value>,
}

impl Variation {
    /// Parses `KEY=V1,V2,...`. Each value is a TOML value (`30`, `0.5`, `"0.95 lag"`,
    /// `[1, 2]`) or a bare word taken as a string (`rotating`, `6x50`); commas inside
    /// brackets, braces or quotes do not split. An item `start:stop:step` of three numbers
    /// is a range (see [`parse_range`]).
    pub fn parse(text: &str) -> Result<Variation, SweepError> {
        let (k, v) = text.split_once('=').ok_or_else(|| SweepError::Spec {
            what: text.to_string(),
            message: "not KEY=VALUES; write e.g. `controller.dead_band_kvar=10,20,30`".into(),
        })?;
        let key = check_key(k.trim()).map_err(|m| SweepError::Spec {
            what: text.to_string(),
            message: m,
        })?;
        let values = parse_values(v).map_err(|m| SweepError::Spec {
            what: text.to_string(),
            message: m,
        })?;
        Ok(Variation { key, values })
    }
}

impl fmt::Display for Variation {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let vals: Vec<String> = self.values.iter().map(value_text).collect();
        write!(f, "{}=[{}]", self.key, vals.join(", "))
    }
}

/// Splits a value list at the commas that stand outside brackets, braces and quotes.
pub fn split_values(text: &str) -> Result<Vec<String>, String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut depth: i32 = 0;
    let mut quote: Option<char> = None;
    let mut escaped = false;
    for c in text.chars() {
        if let Some(q) = quote {
            cur.push(c);
            if escaped {
                escaped = false;
            } else if c == '\\' && q == '"' {
                escaped = true;
            } else if c == q {
                quote = None;
            }
            continue;
        }
        match c {
            '"' | '\'' => {
                quote = Some(c);
                cur.push(c);
            }
            '[' | '{' => {
                depth += 1;
                cur.push(c);
            }
            ']' | '}' => {
                depth -= 1;
                if depth < 0 {
                    return Err(format!("`{text}` closes a bracket it never opened"));
                }
                cur.push(c);
            }
            ',' if depth == 0 => out.push(std::mem::take(&mut cur)),
            _ => cur.push(c),
        }
    }
    if quote.is_some() {
        return Err(format!("`{text}` leaves a quote open"));
    }
    if depth != 0 {
        return Err(format!("`{text}` leaves a bracket open"));
    }
    out.push(cur);
    Ok(out.into_iter().map(|s| s.trim().to_string()).collect())
}

/// Parses a value list: items split by [`split_values`], each a range or one value.
pub fn parse_values(text: &str) -> Result<Vec<Value>, String> {
    let mut values = Vec::new();
    for item in split_values(text)? {
        if item.is_empty() {
            return Err(format!("`{text}` has an empty value"));
        }
        match parse_range(&item) {
            Some(r) => values.extend(r?),
            None => values.push(parse_value(&item)),
        }
    }
    Ok(values)
}

/// Decimals written in a number (`0.25` → 2, `3` → 0, `1e-3` → `None`: not plain).
fn decimals(text: &str) -> Option<u32> {
    let t = text.trim().trim_start_matches(['-', '+']);
    if t.is_empty() || !t.chars().all(|c| c.is_ascii_digit() || c == '.') {
        return None;
    }
    match t.split_once('.') {
        Some((_, f)) => Some(f.len() as u32),
        None => Some(0),
    }
}

/// Reads `start:stop:step` (three plain decimal numbers). `None` when the text is not
/// three numbers joined by `:`; `Some(Err)` for a range that makes no values or too many.
///
/// The values are start + i × step for i = 0, 1, ... up to and including stop when it
/// lies on the grid (within a millionth of a step): the count is worked out once as an
/// integer and each value is computed from its index in the decimals written, so `0.1`
/// steps do not drift (`0.1:0.5:0.1` gives exactly 0.1, 0.2, 0.3, 0.4, 0.5). All three
/// written as integers give integers.
pub fn parse_range(text: &str) -> Option<Result<Vec<Value>, String>> {
    let parts: Vec<&str> = text.split(':').collect();
    if parts.len() != 3 {
        return None;
    }
    let d: Vec<u32> = parts.iter().map(|p| decimals(p)).collect::<Option<_>>()?;
    let nums: Vec<f64> = parts
        .iter()
        .map(|p| p.trim().parse::<f64>().ok())
        .collect::<Option<_>>()?;
    let (start, stop, step) = (nums[0], nums[1], nums[2]);
    Some(range_values(
        text,
        start,
        stop,
        step,
        d.iter().copied().max().unwrap_or(0),
    ))
}

fn range_values(
    text: &str,
    start: f64,
    stop: f64,
    step: f64,
    dec: u32,
) -> Result<Vec<Value>, String> {
    if step == 0.0 {
        return Err(format!("`{text}`: the step of a range cannot be 0"));
    }
    if (stop - start) * step < 0.0 {
        return Err(format!(
            "`{text}`: a step of {step} never goes from {start} to {stop}"
        ));
    }
    if dec > 9 {
        return Err(format!("`{text}`: at most 9 decimals in a range"));
    }
    let n = ((stop - start) / step + 1e-6).floor();
    if !n.is_finite() || n + 1.0 > MAX_RANGE_VALUES as f64 {
        return Err(format!(
            "`{text}` makes more than {MAX_RANGE_VALUES} values; use a larger step"
        ));
    }
    let n = n as i64;
    let scale = 10f64.powi(dec as i32);
    let s = (start * scale).round();
    let st = (step * scale).round();
    if st == 0.0 {
        return Err(format!("`{text}`: the step rounds to 0"));
    }
    Ok((0..=n)
        .map(|i| {
            let units = s + i as f64 * st;
            if dec == 0 && units.abs() < 9e15 {
                Value::Integer(units as i64)
            } else {
                Value::Float(units / scale)
            }
        })
        .collect())
}

/// A sweep: the keys varied and their values, and how many seeds each setting runs.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepSpec {
    /// The keys and their values; the first key changes slowest in the product.
    pub variations: Vec<Variation>,
    /// Seeds per setting (≥ 1): seed i runs with `run.seed` = the scenario's seed + i.
    pub seeds: u32,
}

impl Default for SweepSpec {
    fn default() -> Self {
        SweepSpec {
            variations: Vec::new(),
            seeds: 1,
        }
    }
}

impl SweepSpec {
    /// The usual controller settings to try when nothing else is given: the dead band at
    /// 0.5, 0.65, 0.8 and 1.0 × the smallest switched step (0.65 is the common default;
    /// below 0.5 one operation overshoots the band), the switching delay at ½, 1, 2 and 4 ×
    /// the scenario's own (never below one time step, whole seconds), and the three
    /// orderings: 48 settings besides the scenario's own.
    pub fn usual_controller_settings(scenario: &crate::scenario::Scenario) -> SweepSpec {
        let d = scenario.controller.connect_delay_s;
        let mut delays: Vec<i64> = Vec::new();
        for m in [0.5, 1.0, 2.0, 4.0] {
            let v = ((d * m).round() as i64)
                .max(scenario.dt_s.ceil() as i64)
                .max(1);
            if !delays.contains(&v) {
                delays.push(v);
            }
        }
        SweepSpec {
            variations: vec![
                Variation {
                    key: "controller.dead_band_fraction".into(),
                    values: [0.5, 0.65, 0.8, 1.0]
                        .into_iter()
                        .map(Value::Float)
                        .collect(),
                },
                Variation {
                    key: "controller.switching_delay_s".into(),
                    values: delays.into_iter().map(Value::Integer).collect(),
                },
                Variation {
                    key: "controller.ordering".into(),
                    values: ["sequential", "rotating", "best-fit"]
                        .into_iter()
                        .map(|o| Value::String(o.into()))
                        .collect(),
                },
            ],
            seeds: 1,
        }
    }

    /// Adds the `[vary]` table of a grid file (`key = [values]` or `key = "start:stop:step"`
    /// or a string of comma-separated values), after the variations already there, in
    /// the file's order.
    pub fn add_grid(&mut self, text: &str, file: &str) -> Result<(), SweepError> {
        let err = |m: String| SweepError::Spec {
            what: file.to_string(),
            message: m,
        };
        let doc: toml::Table = text
            .parse()
            .map_err(|e: toml::de::Error| err(e.to_string().trim_end().to_string()))?;
        for k in doc.keys() {
            if k != "vary" {
                return Err(err(format!(
                    "unknown table `{k}`; a grid file holds one `[vary]` table"
                )));
            }
        }
        let vary = doc
            .get("vary")
            .and_then(Value::as_table)
            .ok_or_else(|| err("no `[vary]` table; write e.g. `[vary]` then `\"controller.dead_band_kvar\" = [10, 20]`".into()))?;
        // The order of the keys as written: TOML tables here are sorted, so find each
        // key's position in the text.
        let mut entries = flatten(vary, "");
        entries.sort_by_key(|(k, _)| position_in(text, k));
        for (key, v) in entries {
            check_key(&key).map_err(&err)?;
            let values = match v {
                Value::Array(a) => a,
                Value::String(s) => match parse_range(&s) {
                    Some(r) => r.map_err(&err)?,
                    None => parse_values(&s).map_err(&err)?,
                },
                other => vec![other],
            };
            if values.is_empty() {
                return Err(err(format!("`{key}` has no values")));
            }
            self.variations.push(Variation { key, values });
        }
        Ok(())
    }

    /// Number of settings in the product (the reference row not counted).
    pub fn product_len(&self) -> usize {
        if self.variations.is_empty() {
            return 0;
        }
        self.variations
            .iter()
            .fold(1usize, |n, v| n.saturating_mul(v.values.len()))
    }

    /// The keys varied, in order.
    pub fn keys(&self) -> Vec<String> {
        self.variations.iter().map(|v| v.key.clone()).collect()
    }

    /// Checks the spec: at least one value per key, each key once, not too many settings.
    pub fn check(&self) -> Result<(), SweepError> {
        for (i, v) in self.variations.iter().enumerate() {
            if v.values.is_empty() {
                return Err(SweepError::Spec {
                    what: v.key.clone(),
                    message: "no values".into(),
                });
            }
            if self.variations[..i].iter().any(|w| w.key == v.key) {
                return Err(SweepError::Spec {
                    what: v.key.clone(),
                    message: "the key is varied twice; give all its values in one --vary".into(),
                });
            }
        }
        if self.seeds == 0 {
            return Err(SweepError::Spec {
                what: "--seeds".into(),
                message: "at least 1 seed".into(),
            });
        }
        if self.product_len() >= MAX_SETTINGS {
            return Err(SweepError::Spec {
                what: "the variations".into(),
                message: format!(
                    "they make {} settings; at most {MAX_SETTINGS} are allowed",
                    self.product_len()
                ),
            });
        }
        Ok(())
    }

    /// The settings of the product, in a fixed order: the first key changes slowest, the
    /// last fastest; each setting is its overrides, one per key.
    pub fn settings(&self) -> Vec<Vec<Override>> {
        let n = self.product_len();
        let mut out = Vec::with_capacity(n);
        for mut i in 0..n {
            let mut ov: Vec<Override> = Vec::with_capacity(self.variations.len());
            for v in self.variations.iter().rev() {
                let len = v.values.len();
                ov.push(Override::new(v.key.clone(), v.values[i % len].clone()));
                i /= len;
            }
            ov.reverse();
            out.push(ov);
        }
        out
    }

    /// The spec in one canonical line (for fingerprints): each key with its values.
    pub fn canonical(&self) -> String {
        let parts: Vec<String> = self.variations.iter().map(|v| v.to_string()).collect();
        parts.join("; ")
    }
}

/// Dotted keys of a table's leaves; a subtable that is not an inline value list is walked
/// (`[vary.controller]` with `dead_band_kvar = [...]` gives `controller.dead_band_kvar`).
fn flatten(t: &toml::Table, prefix: &str) -> Vec<(String, Value)> {
    let mut out = Vec::new();
    for (k, v) in t {
        let key = if prefix.is_empty() {
            k.clone()
        } else {
            format!("{prefix}.{k}")
        };
        match v {
            Value::Table(sub) => out.extend(flatten(sub, &key)),
            other => out.push((key, other.clone())),
        }
    }
    out
}

/// Where a dotted key first appears in the text (quoted or by its last part), for
/// keeping the written order.
fn position_in(text: &str, key: &str) -> usize {
    let quoted = format!("\"{key}\"");
    if let Some(p) = text.find(&quoted) {
        return p;
    }
    if let Some(p) = text.find(key) {
        return p;
    }
    let last = key.rsplit('.').next().unwrap_or(key);
    text.find(last).unwrap_or(usize::MAX)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scenario(controller: &str) -> crate::scenario::Scenario {
        let text = format!(
            "[[steps]]\nkvar = 25\ncount = 4\n[controller]\n{controller}\n[load.synthetic]\n\
             [run]\nduration_h = 1\n"
        );
        crate::scenario::Scenario::from_str(&text, std::path::Path::new("t.toml")).unwrap()
    }

    // The usual grid around a 40 s delay: ½, 1, 2 and 4 × 40 s, four dead bands, three
    // orderings, 48 settings; a 1 s delay cannot be halved below the 1 s time step, so the
    // duplicate is dropped (hand-derived).
    #[test]
    fn usual_settings_surround_the_scenario_own() {
        let spec = SweepSpec::usual_controller_settings(&scenario("switching_delay_s = 40"));
        assert_eq!(spec.product_len(), 48);
        let delays: Vec<i64> = spec.variations[1]
            .values
            .iter()
            .map(|v| v.as_integer().unwrap())
            .collect();
        assert_eq!(delays, vec![20, 40, 80, 160]);
        let spec = SweepSpec::usual_controller_settings(&scenario("switching_delay_s = 1"));
        let delays: Vec<i64> = spec.variations[1]
            .values
            .iter()
            .map(|v| v.as_integer().unwrap())
            .collect();
        assert_eq!(delays, vec![1, 2, 4]);
        assert!(spec.check().is_ok());
    }

    #[test]
    fn ranges_do_not_drift_and_include_stop() {
        // Hand-derived: 0.1 to 0.5 by 0.1 is five values, each the decimal written.
        let v = parse_range("0.1:0.5:0.1").unwrap().unwrap();
        let xs: Vec<f64> = v.iter().map(|x| x.as_float().unwrap()).collect();
        assert_eq!(xs, vec![0.1, 0.2, 0.3, 0.4, 0.5]);
        let v = parse_range("10:30:10").unwrap().unwrap();
        assert_eq!(
            v,
            vec![Value::Integer(10), Value::Integer(20), Value::Integer(30)]
        );
        // A stop off the grid is not passed: 0, 0.25, 0.5 (0.75 > 0.6).
        let v = parse_range("0:0.6:0.25").unwrap().unwrap();
        assert_eq!(v.len(), 3);
        // Downwards.
        let v = parse_range("3:1:-1").unwrap().unwrap();
        assert_eq!(
            v,
            vec![Value::Integer(3), Value::Integer(2), Value::Integer(1)]
        );
        // 0.7 to 1.0 by 0.1 has four values; naive accumulation gives 0.7999999999999999.
        let v = parse_range("0.7:1.0:0.1").unwrap().unwrap();
        assert_eq!(v[1].as_float(), Some(0.8));
        assert_eq!(v.len(), 4);
        assert!(parse_range("1:2:0").unwrap().is_err());
        assert!(parse_range("1:2:-1").unwrap().is_err());
        assert!(parse_range("0:1e9:1").is_none());
        assert!(parse_range("0:1000000:1").unwrap().is_err());
        assert!(parse_range("a:b:c").is_none());
        assert!(parse_range("1:2").is_none());
    }

    #[test]
    fn commas_inside_brackets_and_quotes_do_not_split() {
        let v = split_values(r#"[1, 2], "a,b", {x = 1, y = 2}, 3"#).unwrap();
        assert_eq!(v, vec!["[1, 2]", "\"a,b\"", "{x = 1, y = 2}", "3"]);
        assert!(split_values("[1, 2").is_err());
        assert!(split_values("\"a").is_err());
    }

    #[test]
    fn variation_parses_words_numbers_and_ranges() {
        let v = Variation::parse("controller.ordering=sequential,rotating,best-fit").unwrap();
        assert_eq!(v.values[2], Value::String("best-fit".into()));
        let v = Variation::parse("controller.dead_band_kvar=5,10:20:5").unwrap();
        assert_eq!(v.values.len(), 4);
        assert!(Variation::parse("controller.dead_band_kvar").is_err());
        assert!(Variation::parse("=1,2").is_err());
        assert!(Variation::parse("a..b=1").is_err());
    }

    #[test]
    fn product_first_key_slowest() {
        let spec = SweepSpec {
            variations: vec![
                Variation::parse("a=1,2").unwrap(),
                Variation::parse("b=x,y,z").unwrap(),
            ],
            seeds: 1,
        };
        let s = spec.settings();
        assert_eq!(s.len(), 6);
        let line: Vec<String> = s
            .iter()
            .map(|o| {
                format!(
                    "{}{}",
                    value_text(&o[0].value),
                    o[1].value.as_str().unwrap()
                )
            })
            .collect();
        assert_eq!(line, vec!["1x", "1y", "1z", "2x", "2y", "2z"]);
    }

    #[test]
    fn grid_file_keeps_written_order() {
        let mut spec = SweepSpec::default();
        spec.add_grid(
            "[vary]\n\"controller.switching_delay_s\" = \"10:30:10\"\n\"controller.dead_band_kvar\" = [5, 10]\n",
            "grid.toml",
        )
        .unwrap();
        assert_eq!(
            spec.keys(),
            vec!["controller.switching_delay_s", "controller.dead_band_kvar"]
        );
        assert_eq!(spec.variations[0].values.len(), 3);
        assert!(spec.add_grid("[other]\n", "g").is_err());
    }
}

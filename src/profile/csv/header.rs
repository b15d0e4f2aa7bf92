//! The header row: which field holds each required column.
//!
//! A header cell names a required column when its base name matches, whatever the case,
//! with the unit written as a suffix, in brackets, or both: `p_a_kw`, `P_a_kW`,
//! `p_a_kw [kW]`, `p_a (kW)`, `p_a [kW]` all give phase a's P in kW; `time`, `time [s]`,
//! `time (UTC)` give the time. Spaces and hyphens in a name count as underscores.
//!
//! A cell whose unit contradicts the column's unit is an error naming the column: always
//! when the name and the brackets disagree (`p_a_kw [W]`), and when a wrong-unit column
//! (`p_a_w`, `q_b [var]`, `time [min]`) is the only one for its quantity. A wrong-unit
//! column beside a right one is an extra column and is ignored.

use super::errors::{file_error, read_error};
use super::number::parse_number;
use super::options::{delimiter_name, CsvOptions};
use super::source::RecordReader;
use super::text::quoted_str;
use crate::error::ProfileError;
use serde::Serialize;
use std::path::Path;

/// The required columns, in the order used internally: the time, then P and Q of
/// phases a, b and c.
pub const COLUMNS: [&str; 7] = [
    "time", "p_a_kw", "q_a_kvar", "p_b_kw", "q_b_kvar", "p_c_kw", "q_c_kvar",
];

/// Where one required column was found in the header.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ColumnMatch {
    /// The required column, one of [`COLUMNS`], e.g. `p_a_kw`.
    pub column: &'static str,
    /// 1-based field number in the header.
    pub field: u64,
    /// The header cell as written (trimmed), e.g. `P_a [kW]`.
    pub header: String,
}

/// Where the required columns are.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Columns {
    /// Field index of each of [`COLUMNS`].
    pub(super) idx: [usize; 7],
    /// Fields a row needs: the largest index + 1.
    pub(super) min_fields: usize,
    /// Fields in the header.
    pub(super) header_fields: usize,
}

/// The base names of [`COLUMNS`] (without their unit).
const BASES: [&str; 7] = ["time", "p_a", "q_a", "p_b", "q_b", "p_c", "q_c"];

/// Units accepted for the time column (elapsed seconds, or ISO 8601 date-times).
const TIME_UNITS: [&str; 10] = [
    "s", "sec", "secs", "second", "seconds", "utc", "iso", "iso8601", "iso_8601", "local",
];
/// Time units that are not seconds.
const TIME_WRONG: [&str; 13] = [
    "ms", "us", "µs", "min", "mins", "minute", "minutes", "h", "hr", "hour", "hours", "d", "days",
];
/// Units of power and energy that are not kW or kvar.
const POWER_UNITS: [&str; 16] = [
    "kw", "w", "mw", "gw", "kvar", "var", "mvar", "kva", "va", "mva", "kwh", "wh", "mwh", "kvarh",
    "varh", "a",
];

/// How a header cell relates to one required column.
enum CellMatch {
    /// Not this column.
    No,
    /// This column in the right unit.
    Yes,
    /// This quantity in another unit (given as written).
    WrongUnit(String),
    /// The name and the brackets give different units.
    Contradiction(String, String),
    /// This quantity with no unit at all.
    NoUnit,
}

/// Lower-cased name with spaces and hyphens as underscores.
fn normalise(name: &str) -> String {
    name.trim()
        .chars()
        .map(|c| match c {
            ' ' | '-' => '_',
            c => c.to_ascii_lowercase(),
        })
        .collect()
}

/// Splits `p_a [kW]` / `p_a (kW)` into the name and the unit in brackets.
fn split_brackets(cell: &str) -> (&str, Option<&str>) {
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let Some(body) = cell.strip_suffix(close) {
            if let Some(i) = body.rfind(open) {
                return (body[..i].trim(), Some(body[i + open.len_utf8()..].trim()));
            }
        }
    }
    (cell, None)
}

fn is_unit_word(quantity: usize, u: &str) -> bool {
    if quantity == 0 {
        TIME_UNITS.contains(&u) || TIME_WRONG.contains(&u)
    } else {
        POWER_UNITS.contains(&u)
    }
}

fn right_unit(quantity: usize, u: &str) -> bool {
    match quantity {
        0 => TIME_UNITS.contains(&u),
        c if c % 2 == 1 => u == "kw",
        _ => u == "kvar",
    }
}

/// A header cell split into its lower-cased name and the unit in brackets, if any.
struct Cell {
    name: String,
    bracket: Option<String>,
}

impl Cell {
    fn new(cell: &str) -> Cell {
        let (name, bracket) = split_brackets(cell);
        Cell {
            name: normalise(name),
            bracket: bracket.map(normalise),
        }
    }
}

/// How `cell` relates to required column `quantity` (index into [`COLUMNS`]).
#[cfg(test)]
fn match_cell(cell: &str, quantity: usize) -> CellMatch {
    Cell::new(cell).relation(quantity)
}

impl Cell {
    /// How this cell relates to required column `quantity` (index into [`COLUMNS`]).
    fn relation(&self, quantity: usize) -> CellMatch {
        let name = self.name.as_str();
        let base = BASES[quantity];
        let suffix = if name == base {
            None
        } else if let Some(rest) = name.strip_prefix(base).and_then(|r| r.strip_prefix('_')) {
            if !is_unit_word(quantity, rest) {
                return CellMatch::No;
            }
            Some(rest)
        } else {
            return CellMatch::No;
        };
        // Text in brackets that is not a unit (e.g. `p_a_kw (phase L1)`) is a comment.
        let bracket = self
            .bracket
            .as_deref()
            .filter(|u| is_unit_word(quantity, u));
        let unit = match (suffix, bracket) {
            (Some(s), Some(b)) if s != b => {
                return CellMatch::Contradiction(s.to_string(), b.to_string())
            }
            (Some(u), _) | (None, Some(u)) => u,
            (None, None) if quantity == 0 => return CellMatch::Yes,
            (None, None) => return CellMatch::NoUnit,
        };
        if right_unit(quantity, unit) {
            CellMatch::Yes
        } else {
            CellMatch::WrongUnit(unit.to_string())
        }
    }
}

/// A unit as it is usually written, for messages (`kw` → `kW`).
fn display_unit(u: &str) -> String {
    let known = [
        ("kw", "kW"),
        ("w", "W"),
        ("mw", "MW"),
        ("gw", "GW"),
        ("kva", "kVA"),
        ("va", "VA"),
        ("mva", "MVA"),
        ("mvar", "Mvar"),
        ("kwh", "kWh"),
        ("wh", "Wh"),
        ("mwh", "MWh"),
        ("a", "A"),
    ];
    known
        .iter()
        .find(|(k, _)| *k == u)
        .map_or_else(|| u.to_string(), |(_, d)| d.to_string())
}

/// The unit a column must be in, for messages.
fn wanted_unit(quantity: usize) -> &'static str {
    match quantity {
        0 => "s (or ISO 8601 date-times)",
        c if c % 2 == 1 => "kW",
        _ => "kvar",
    }
}

/// Reads the header and finds the required columns.
pub(super) fn read_header(
    rdr: &mut RecordReader,
    name: &Path,
    opts: &CsvOptions,
) -> Result<(Columns, Vec<ColumnMatch>), ProfileError> {
    let required = COLUMNS.join(", ");
    if !rdr.read().map_err(|e| read_error(name, e))? {
        return Err(file_error(
            name,
            format!("the file is empty; line 1 must be a header row naming the columns {required}"),
        ));
    }
    let line = rdr.record_line;
    let mut idx = [usize::MAX; 7];
    let mut wrong: [Option<(usize, String)>; 7] = Default::default();
    let mut no_unit: [Option<usize>; 7] = [None; 7];
    let cells: Vec<String> = (0..rdr.len)
        .map(|i| String::from_utf8_lossy(rdr.field(i).trim_ascii()).into_owned())
        .collect();
    for (i, cell) in cells.iter().enumerate() {
        let parsed = Cell::new(cell);
        for (c, want) in COLUMNS.iter().enumerate() {
            match parsed.relation(c) {
                CellMatch::No => {}
                CellMatch::Yes => {
                    if idx[c] != usize::MAX {
                        return Err(file_error(
                            name,
                            format!(
                                "column {want} appears twice in the header (line {line}, columns \
                                 {} and {}: {} and {}); keep only one",
                                idx[c] + 1,
                                i + 1,
                                quoted_str(&cells[idx[c]]),
                                quoted_str(cell)
                            ),
                        ));
                    }
                    idx[c] = i;
                }
                CellMatch::WrongUnit(u) => {
                    if wrong[c].is_none() {
                        wrong[c] = Some((i, display_unit(&u)));
                    }
                }
                CellMatch::Contradiction(a, b) => {
                    let (a, b) = (display_unit(&a), display_unit(&b));
                    return Err(file_error(
                        name,
                        format!(
                            "column {} of the header (line {line}), {}, gives two units: {a} in \
                             the name and {b} in brackets; {want} must be in {}",
                            i + 1,
                            quoted_str(cell),
                            wanted_unit(c)
                        ),
                    ));
                }
                CellMatch::NoUnit => {
                    if no_unit[c].is_none() {
                        no_unit[c] = Some(i);
                    }
                }
            }
        }
    }
    // A wrong-unit column is an error only when no column gives that quantity right.
    for c in 0..7 {
        if idx[c] != usize::MAX {
            continue;
        }
        if let Some((i, u)) = &wrong[c] {
            return Err(file_error(
                name,
                format!(
                    "column {} of the header (line {line}), {}, gives {} in {u}, but the \
                     profile must give {} in {}; convert the values and name the column {}",
                    i + 1,
                    quoted_str(&cells[*i]),
                    BASES[c],
                    BASES[c],
                    wanted_unit(c),
                    COLUMNS[c]
                ),
            ));
        }
    }
    let missing: Vec<usize> = (0..7).filter(|&c| idx[c] == usize::MAX).collect();
    if !missing.is_empty() {
        let names: Vec<&str> = missing.iter().map(|&c| COLUMNS[c]).collect();
        let mut found = cells
            .iter()
            .take(12)
            .cloned()
            .collect::<Vec<_>>()
            .join(", ");
        if cells.len() > 12 {
            found.push_str(", ...");
        }
        let mut message = format!(
            "missing column{} {} in the header (line {line}); the header must name all of {} \
             (any order, not case-sensitive, units may follow in brackets; other columns are \
             ignored); found: {}",
            if names.len() == 1 { "" } else { "s" },
            names.join(", "),
            required,
            found
        );
        for &c in &missing {
            if let Some(i) = no_unit[c] {
                message.push_str(&format!(
                    "; column {} {} gives no unit: name it {} or {} [{}]",
                    i + 1,
                    quoted_str(&cells[i]),
                    COLUMNS[c],
                    BASES[c],
                    wanted_unit(c)
                ));
                break;
            }
        }
        message.push_str(&delimiter_hint(rdr, opts, &cells));
        return Err(file_error(name, message));
    }
    let min_fields = idx.iter().max().map_or(0, |m| m + 1);
    let matches = (0..7)
        .map(|c| ColumnMatch {
            column: COLUMNS[c],
            field: idx[c] as u64 + 1,
            header: cells[idx[c]].clone(),
        })
        .collect();
    Ok((
        Columns {
            idx,
            min_fields,
            header_fields: rdr.len,
        },
        matches,
    ))
}

/// A hint for a header that seems to use another delimiter than the one configured, or
/// that looks like data.
fn delimiter_hint(rdr: &mut RecordReader, opts: &CsvOptions, cells: &[String]) -> String {
    let first = cells.first().map(String::as_str).unwrap_or("");
    if cells.len() == 1 {
        for d in [';', '\t', ',', '|'] {
            if d != opts.delimiter && first.contains(d) {
                // Decimal commas usually come with semicolons: look at the next line.
                let mut also = String::new();
                if d == ';' && opts.decimal == '.' && next_record_has_decimal_commas(rdr) {
                    also =
                        " and decimal = \",\" (the numbers seem to use decimal commas)".to_string();
                }
                return format!(
                    "; the header seems to use {} between columns: set delimiter = {} under \
                     [load]{also}",
                    match d {
                        ';' => "';'",
                        '\t' => "tabs",
                        ',' => "','",
                        _ => "'|'",
                    },
                    delimiter_name(d)
                );
            }
        }
    }
    if parse_number(first.trim().as_bytes(), opts.decimal as u8).is_some() {
        return "; the first line looks like data: add a header row".to_string();
    }
    String::new()
}

/// True when the next record, read with the wrong delimiter as one or a few fields,
/// holds digits with a comma between them, as in `0;1,5;0,7`.
fn next_record_has_decimal_commas(rdr: &mut RecordReader) -> bool {
    if !matches!(rdr.read(), Ok(true)) {
        return false;
    }
    (0..rdr.len).any(|i| {
        let f = rdr.field(i);
        f.contains(&b';')
            && f.windows(3)
                .any(|w| w[0].is_ascii_digit() && w[1] == b',' && w[2].is_ascii_digit())
    }) || (rdr.len > 1 && {
        // Read with ',' as the delimiter, `0;1,5` splits into `0;1` and `5`.
        let f = rdr.field(0);
        f.contains(&b';') && f.last().is_some_and(u8::is_ascii_digit)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn yes(cell: &str, c: usize) -> bool {
        matches!(match_cell(cell, c), CellMatch::Yes)
    }

    #[test]
    fn names_with_units_match() {
        for cell in [
            "p_a_kw",
            "P_a_kW",
            "p_a_kw [kW]",
            "p_a_kw (kW)",
            "p_a [kW]",
            "P A (kW)",
            "p-a-kw",
            "p_a_kw (phase L1)",
        ] {
            assert!(yes(cell, 1), "{cell}");
        }
        for cell in ["time", "Time [s]", "time (UTC)", "time_s", "TIME"] {
            assert!(yes(cell, 0), "{cell}");
        }
        assert!(yes("q_c_kvar [kVAr]", 6));
        assert!(matches!(match_cell("p_a_kw_avg", 1), CellMatch::No));
        assert!(matches!(match_cell("p_ab_kw", 1), CellMatch::No));
        assert!(matches!(match_cell("timestamp", 0), CellMatch::No));
    }

    #[test]
    fn contradicting_units_are_found() {
        assert!(matches!(match_cell("p_a_w", 1), CellMatch::WrongUnit(u) if u == "w"));
        assert!(matches!(match_cell("p_a [W]", 1), CellMatch::WrongUnit(_)));
        assert!(matches!(
            match_cell("q_a [var]", 2),
            CellMatch::WrongUnit(_)
        ));
        assert!(matches!(
            match_cell("time [min]", 0),
            CellMatch::WrongUnit(_)
        ));
        assert!(matches!(
            match_cell("p_a_kw [W]", 1),
            CellMatch::Contradiction(a, b) if a == "kw" && b == "w"
        ));
        assert!(matches!(match_cell("p_a", 1), CellMatch::NoUnit));
    }
}

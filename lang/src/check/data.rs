//! Checking of the measured data: `import` and `calibrate` commands.
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/data.rs`. The reader of measured tables lives here too,
//! because the checker reads an existing file's header (so a bad file stops the cell before
//! anything runs, and later statements of the cell know its columns) and the runner reads it
//! again when the statement runs.
//!
//! File format (CSV or whitespace-separated): blank lines and lines starting with `#` are
//! skipped; the first other line is the header, every column with its unit in brackets
//! (`T [K], tau [s], err [s]`; `[]` for a pure number); every further line is one row of
//! numbers. A `# icefield-record: {...}` comment (written by `export`) carries the table's
//! provenance and derived-column expressions back, so `import` of an export round-trips.

use serde::{Deserialize, Serialize};

use super::phrase::phrase_span;
use super::{Checked, Checker, ColumnView, CommandSpec, NameView, View};
use crate::ast::{Arg, ColumnRef, Ident, Opt, Span, Statement, Value};
use crate::diagnostic::{did_you_mean, ErrorKind, Problem};
use crate::units::{self, Dimension};
use crate::workspace::{Column, Provenance, Table};

/// The result name of an unnamed `import`.
pub const DEFAULT_IMPORT_NAME: &str = "last_import";
/// The result name of an unnamed `calibrate`.
pub const DEFAULT_CALIBRATE_NAME: &str = "last_calibrate";
/// The table formats `import` reads.
pub const IMPORT_FORMATS: &[&str] = &["csv", "whitespace"];
/// Options of `calibrate`.
pub const CALIBRATE_OPTIONS: &[&str] = &["tau0", "range"];
/// The comment `export` writes with the machine-readable provenance.
pub const RECORD_COMMENT: &str = "icefield-record:";
/// Larger files are refused (a measured table is small; this also keeps a path to a device
/// such as /dev/zero from hanging the kernel).
pub const MAX_IMPORT_BYTES: u64 = 64 * 1024 * 1024;
/// Units that say "in units of the attempt time τ0" for a simulated relaxation time.
pub const TAU0_UNITS: &[&str] = &["", "τ0", "tau0", "τ₀"];

/// How the cells of a row are separated.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum TableFormat {
    /// Comma-separated, fields may be quoted ("...", with "" for a quote).
    Csv,
    /// Cells separated by spaces or tabs.
    Whitespace,
}

/// `NAME = import "FILE" [, format = csv|whitespace] [, X_error = COLUMN ...]`.
#[derive(Clone, Debug, PartialEq)]
pub struct ImportSpec {
    pub target: String,
    pub path: String,
    /// `None`: detected from the header line (a comma means CSV).
    pub format: Option<TableFormat>,
    /// (value column, error column) pairs given by `X_error = COLUMN` options.
    pub error_columns: Vec<(String, String)>,
}

/// `NAME = calibrate SIM.TAU to LAB.TAU against X [, tau0 = ..., range = [a, b] UNIT]`.
#[derive(Clone, Debug, PartialEq)]
pub struct CalibrateSpec {
    pub target: String,
    /// (table, column) of the simulated relaxation time.
    pub simulated: (String, String),
    /// (table, column) of the measured relaxation time.
    pub measured: (String, String),
    /// The column both are plotted against (each in its own table), usually `T`.
    pub x_column: String,
    /// The attempt time the simulation used, when its τ is given in seconds.
    pub stated_tau0_seconds: Option<f64>,
    /// Only measured points with x in [lo, hi] (values with their unit text).
    pub range: Option<[(f64, String); 2]>,
}

/// A resolved data command.
#[derive(Clone, Debug, PartialEq)]
pub enum DataSpec {
    Import(Box<ImportSpec>),
    Calibrate(Box<CalibrateSpec>),
}

/// What `export` writes in its `# icefield-record:` comment.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ExportRecord {
    pub icefield_version: String,
    pub table: String,
    pub provenance: Option<Provenance>,
    /// (column, expression) of derived columns.
    #[serde(default)]
    pub derived: Vec<(String, String)>,
    #[serde(default)]
    pub exported_in_cell: Option<u64>,
    /// The dynamics rule declared in the model when the table was exported.
    #[serde(default)]
    pub dynamics_declared: Option<String>,
}

/// One column as read from a file.
#[derive(Clone, Debug, PartialEq)]
pub struct FileColumn {
    pub name: String,
    pub unit: String,
    pub values: Vec<f64>,
    /// Where its header entry starts: 1-based line and column (code points) in the file.
    pub line: usize,
    pub column: usize,
}

/// A table file, read but not yet turned into a workspace table.
#[derive(Clone, Debug, PartialEq)]
pub struct MeasuredFile {
    pub format: TableFormat,
    pub header_line: usize,
    pub columns: Vec<FileColumn>,
    /// The file line of each data row.
    pub row_lines: Vec<usize>,
    pub record: Option<ExportRecord>,
    /// Things worth telling the user (unknown unit texts, an unreadable record comment).
    pub notes: Vec<String>,
}

/// An error about a file: its kind and a message that starts `PATH:LINE:COLUMN:`.
#[derive(Clone, Debug, PartialEq)]
pub struct FileError {
    pub kind: ErrorKind,
    pub message: String,
}

/// Whether `name` can be written after `TABLE.` in the language.
fn is_name(name: &str) -> bool {
    let core = name.trim_end_matches('\'');
    let mut chars = core.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
}

/// Splits a CSV line into trimmed fields with the 1-based column (code points) where each
/// starts. Hand-written rather than a CSV crate because every diagnostic names the field's
/// column in the file, which record-level readers do not report.
fn split_csv(line: &str) -> Result<Vec<(String, usize)>, (usize, String)> {
    let chars: Vec<char> = line.chars().collect();
    let mut fields = Vec::new();
    let mut i = 0;
    loop {
        while i < chars.len() && (chars[i] == ' ' || chars[i] == '\t') {
            i += 1;
        }
        let start = i;
        let mut text = String::new();
        if i < chars.len() && chars[i] == '"' {
            i += 1;
            loop {
                match chars.get(i) {
                    None => return Err((start + 1, "a quoted field is never closed".into())),
                    Some('"') if chars.get(i + 1) == Some(&'"') => {
                        text.push('"');
                        i += 2;
                    }
                    Some('"') => {
                        i += 1;
                        break;
                    }
                    Some(&c) => {
                        text.push(c);
                        i += 1;
                    }
                }
            }
            while i < chars.len() && chars[i] != ',' {
                if !chars[i].is_whitespace() {
                    return Err((i + 1, "text after the closing quote of a field".into()));
                }
                i += 1;
            }
        } else {
            while i < chars.len() && chars[i] != ',' {
                text.push(chars[i]);
                i += 1;
            }
            text = text.trim_end().to_string();
        }
        fields.push((text, start + 1));
        if i >= chars.len() {
            break;
        }
        i += 1;
    }
    Ok(fields)
}

/// Whitespace-separated cells with their 1-based columns.
fn split_whitespace(line: &str) -> Vec<(String, usize)> {
    let mut out = Vec::new();
    let mut current: Option<(String, usize)> = None;
    for (index, c) in line.chars().enumerate() {
        if c.is_whitespace() {
            if let Some(cell) = current.take() {
                out.push(cell);
            }
        } else {
            current
                .get_or_insert_with(|| (String::new(), index + 1))
                .0
                .push(c);
        }
    }
    out.extend(current);
    out
}

/// A header entry: name, unit (None if missing) and start column.
type HeaderEntry = (String, Option<String>, usize);

/// Splits `name [unit]` (the unit in brackets; `[]` for a pure number).
fn name_and_unit(field: &str) -> Result<(String, Option<String>), (usize, String)> {
    match field.find('[') {
        None => {
            if field.contains(']') {
                return Err((0, format!("`{field}` has `]` without `[`")));
            }
            Ok((field.trim().to_string(), None))
        }
        Some(open) => {
            let name = field[..open].trim().to_string();
            let rest = &field[open + 1..];
            let Some(close) = rest.find(']') else {
                return Err((
                    field[..open].chars().count(),
                    format!("the unit of `{name}` opens `[` but never closes it"),
                ));
            };
            let after = rest[close + 1..].trim();
            if !after.is_empty() {
                return Err((
                    field[..open + 1 + close + 1].chars().count(),
                    format!("`{after}` after the unit of `{name}`; one column per field"),
                ));
            }
            Ok((name, Some(rest[..close].trim().to_string())))
        }
    }
}

/// The header entries of a whitespace table: `T [K]  tau [s]` or `T[K] tau[s]`.
fn whitespace_header(line: &str) -> Result<Vec<HeaderEntry>, (usize, String)> {
    let chars: Vec<char> = line.chars().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        if chars[i].is_whitespace() {
            i += 1;
            continue;
        }
        let start = i;
        let mut name = String::new();
        while i < chars.len() && !chars[i].is_whitespace() && chars[i] != '[' {
            name.push(chars[i]);
            i += 1;
        }
        let mut j = i;
        while j < chars.len() && chars[j].is_whitespace() {
            j += 1;
        }
        let mut unit = None;
        if j < chars.len() && chars[j] == '[' {
            let open = j;
            let Some(close) = chars[open..].iter().position(|&c| c == ']') else {
                return Err((
                    open + 1,
                    format!("the unit of `{name}` opens `[` but never closes it"),
                ));
            };
            unit = Some(
                chars[open + 1..open + close]
                    .iter()
                    .collect::<String>()
                    .trim()
                    .to_string(),
            );
            i = open + close + 1;
        } else if name.is_empty() {
            return Err((start + 1, "`]` without `[`".to_string()));
        }
        out.push((name, unit, start + 1));
    }
    Ok(out)
}

/// A unit text from a file: letters, digits, spaces and the usual operators; no brackets,
/// commas or quotes.
fn unit_is_well_formed(unit: &str) -> bool {
    unit.chars()
        .all(|c| !c.is_control() && !matches!(c, '[' | ']' | ',' | '"' | '#' | ';'))
}

/// Reads a table file's text. `label` is the path as the user wrote it; every error is
/// `label:line:column: message` (1-based, code points).
pub fn parse_measured(
    label: &str,
    text: &str,
    format: Option<TableFormat>,
) -> Result<MeasuredFile, FileError> {
    let at = |line: usize, column: usize, message: String| FileError {
        kind: ErrorKind::Value,
        message: format!("{label}:{line}:{column}: {message}"),
    };
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut record = None;
    let mut notes = Vec::new();
    let mut header: Option<(usize, TableFormat, Vec<HeaderEntry>, String)> = None;
    let mut rows: Vec<(usize, Vec<(String, usize)>)> = Vec::new();
    for (index, line) in text.lines().enumerate() {
        let number = index + 1;
        let trimmed = line.trim();
        if trimmed.is_empty() {
            continue;
        }
        if let Some(comment) = trimmed.strip_prefix('#') {
            if let Some(json) = comment.trim_start().strip_prefix(RECORD_COMMENT) {
                match serde_json::from_str::<ExportRecord>(json.trim()) {
                    Ok(r) => record = Some(r),
                    Err(error) => notes.push(format!(
                        "{label}:{number}: the `{RECORD_COMMENT}` comment could not be read \
                         ({error}); the table is imported without its provenance"
                    )),
                }
            }
            continue;
        }
        if header.is_none() {
            let format = format.unwrap_or(if line.contains(',') {
                TableFormat::Csv
            } else {
                TableFormat::Whitespace
            });
            let entries = match format {
                TableFormat::Csv => {
                    let fields = split_csv(line).map_err(|(c, m)| at(number, c, m))?;
                    let mut entries = Vec::new();
                    for (field, column) in fields {
                        let (name, unit) = name_and_unit(&field)
                            .map_err(|(offset, m)| at(number, column + offset, m))?;
                        entries.push((name, unit, column));
                    }
                    entries
                }
                TableFormat::Whitespace => {
                    whitespace_header(line).map_err(|(c, m)| at(number, c, m))?
                }
            };
            check_header(&entries, line, number, &at)?;
            header = Some((number, format, entries, line.trim().to_string()));
            continue;
        }
        let format = header.as_ref().map(|h| h.1).unwrap_or(TableFormat::Csv);
        let cells = match format {
            TableFormat::Csv => split_csv(line).map_err(|(c, m)| at(number, c, m))?,
            TableFormat::Whitespace => split_whitespace(line),
        };
        rows.push((number, cells));
    }
    let Some((header_line, format, entries, header_text)) = header else {
        return Err(if text.trim().is_empty() {
            at(1, 1, "the file is empty; a table needs a header line such as `T [K], tau [s]` and rows of numbers".into())
        } else {
            at(1, 1, "the file has only comments; a table needs a header line such as `T [K], tau [s]` and rows of numbers".into())
        });
    };
    if rows.is_empty() {
        return Err(at(
            header_line,
            1,
            format!("the header `{header_text}` is followed by no rows of numbers"),
        ));
    }
    let mut columns: Vec<FileColumn> = entries
        .iter()
        .map(|(name, unit, column)| FileColumn {
            name: name.clone(),
            unit: unit.clone().unwrap_or_default(),
            values: Vec::with_capacity(rows.len()),
            line: header_line,
            column: *column,
        })
        .collect();
    let mut row_lines = Vec::with_capacity(rows.len());
    for (row_index, (number, cells)) in rows.iter().enumerate() {
        let row = row_index + 1;
        if cells.len() != columns.len() {
            let column = cells.get(columns.len()).map(|c| c.1).unwrap_or_else(|| {
                text.lines()
                    .nth(number - 1)
                    .map_or(1, |l| l.chars().count() + 1)
            });
            return Err(at(
                *number,
                column,
                format!(
                    "row {row} has {} cell{} but the header (line {header_line}) has {} columns",
                    cells.len(),
                    if cells.len() == 1 { "" } else { "s" },
                    columns.len()
                ),
            ));
        }
        for ((cell, column), target) in cells.iter().zip(columns.iter_mut()) {
            match cell.trim().parse::<f64>() {
                Ok(value) => target.values.push(value),
                Err(_) => {
                    let shown = if cell.trim().is_empty() {
                        "an empty cell".to_string()
                    } else {
                        format!("`{}`", cell.trim())
                    };
                    return Err(at(
                        *number,
                        *column,
                        format!(
                            "row {row}, column `{}`: {shown} is not a number",
                            target.name
                        ),
                    ));
                }
            }
        }
        row_lines.push(*number);
    }
    for c in &columns {
        if !c.unit.is_empty() && units::lookup(&c.unit).is_none() {
            if let Some(hint) = units::unknown_unit_help(&c.unit) {
                notes.push(format!(
                    "{label}:{}:{}: the unit `{}` of `{}` is kept as text; icefield converts \
                     only the units it knows ({hint})",
                    c.line, c.column, c.unit, c.name
                ));
            }
        }
    }
    Ok(MeasuredFile {
        format,
        header_line,
        columns,
        row_lines,
        record,
        notes,
    })
}

/// Names, units and duplicates of a header line.
fn check_header(
    entries: &[HeaderEntry],
    line: &str,
    number: usize,
    at: &dyn Fn(usize, usize, String) -> FileError,
) -> Result<(), FileError> {
    let unit_error = |line: usize, column: usize, message: String| FileError {
        kind: ErrorKind::Unit,
        ..at(line, column, message)
    };
    for (index, (name, unit, column)) in entries.iter().enumerate() {
        if name.is_empty() {
            return Err(at(
                number,
                *column,
                format!(
                    "column {} of the header `{}` has no name",
                    index + 1,
                    line.trim()
                ),
            ));
        }
        if !is_name(name) {
            let hint = if name.contains('(') {
                "; write the unit in brackets, e.g. `T [K]`"
            } else {
                ""
            };
            return Err(at(
                number,
                *column,
                format!(
                    "`{name}` is not a column name the language can refer to (letters, digits \
                     and `_`, starting with a letter){hint}"
                ),
            ));
        }
        match unit {
            None => {
                return Err(unit_error(
                    number,
                    *column,
                    format!(
                        "column `{name}` has no unit in the header line {number} `{}`; write it \
                         in brackets, e.g. `{name} [s]` (`{name} []` for a pure number)",
                        line.trim()
                    ),
                ))
            }
            Some(unit) if !unit_is_well_formed(unit) => {
                return Err(unit_error(
                    number,
                    *column,
                    format!("the unit `{unit}` of column `{name}` is not a unit text"),
                ))
            }
            Some(_) => {}
        }
        if let Some((_, _, first)) = entries[..index].iter().find(|(n, _, _)| n == name) {
            return Err(at(
                number,
                *column,
                format!("column `{name}` appears twice in the header (first at column {first})"),
            ));
        }
    }
    Ok(())
}

/// Reads and parses a table file; errors name the path and the line:column in the file.
pub fn read_measured(path: &str, format: Option<TableFormat>) -> Result<MeasuredFile, FileError> {
    let io = |message: String| FileError {
        kind: ErrorKind::Runtime,
        message,
    };
    let metadata = std::fs::metadata(path).map_err(|error| io(describe_io(path, &error)))?;
    if !metadata.is_file() {
        return Err(io(format!("{path}: not a regular file")));
    }
    if metadata.len() > MAX_IMPORT_BYTES {
        return Err(io(format!(
            "{path}: {} bytes is more than the {} MB `import` reads",
            metadata.len(),
            MAX_IMPORT_BYTES / (1024 * 1024)
        )));
    }
    let bytes = std::fs::read(path).map_err(|error| io(describe_io(path, &error)))?;
    let text = String::from_utf8(bytes).map_err(|error| {
        let upto = &error.as_bytes()[..error.utf8_error().valid_up_to()];
        let line = upto.iter().filter(|&&b| b == b'\n').count() + 1;
        let column = upto
            .rsplit(|&b| b == b'\n')
            .next()
            .map_or(0, |l| String::from_utf8_lossy(l).chars().count())
            + 1;
        FileError {
            kind: ErrorKind::Value,
            message: format!("{path}:{line}:{column}: the file is not UTF-8 text"),
        }
    })?;
    parse_measured(path, &text, format)
}

fn describe_io(path: &str, error: &std::io::Error) -> String {
    if error.kind() == std::io::ErrorKind::NotFound {
        let here = std::env::current_dir()
            .map(|d| format!(" (relative paths start in {})", d.display()))
            .unwrap_or_default();
        format!("{path}: file not found{here}")
    } else {
        format!("{path}: cannot read the file: {error}")
    }
}

/// Why a file's columns do not fit the statement's error options.
#[derive(Clone, Debug, PartialEq)]
pub struct AssembleError {
    /// Index of the `X_error = COLUMN` pair at fault, if one is.
    pub pair: Option<usize>,
    pub kind: ErrorKind,
    pub message: String,
}

/// Turns a file into a workspace table: `X_error` columns (and the statement's
/// `X_error = COLUMN` pairs) become error bars of `X`, converted to its unit.
pub fn measured_table(
    name: &str,
    path: &str,
    file: &MeasuredFile,
    error_columns: &[(String, String)],
) -> Result<Table, AssembleError> {
    let find = |n: &str| file.columns.iter().position(|c| c.name == n);
    let mut pairs: Vec<(usize, usize)> = Vec::new();
    for (index, (value, error)) in error_columns.iter().enumerate() {
        let fail = |message: String| AssembleError {
            pair: Some(index),
            kind: ErrorKind::Name,
            message,
        };
        let names: Vec<&str> = file.columns.iter().map(|c| c.name.as_str()).collect();
        let missing = |n: &str| {
            let hint = did_you_mean(n, names.iter().copied())
                .map(|h| format!("; {h}"))
                .unwrap_or_default();
            format!(
                "{path}:{}: the header has no column `{n}` (columns: {}){hint}",
                file.header_line,
                names.join(", ")
            )
        };
        let v = find(value).ok_or_else(|| fail(missing(value)))?;
        let e = find(error).ok_or_else(|| fail(missing(error)))?;
        if v == e {
            return Err(fail(format!("`{value}` cannot be its own error bar")));
        }
        if let Some(&(_, used)) = pairs.iter().find(|(_, used)| *used == e) {
            let _ = used;
            return Err(fail(format!(
                "`{error}` is already the error bar of another column"
            )));
        }
        pairs.push((v, e));
    }
    for (e, column) in file.columns.iter().enumerate() {
        if let Some(base) = column.name.strip_suffix("_error") {
            if let Some(v) = find(base) {
                if !pairs.iter().any(|(pv, pe)| *pv == v || *pe == e) {
                    pairs.push((v, e));
                }
            }
        }
    }
    let mut errors: Vec<Option<Vec<f64>>> = vec![None; file.columns.len()];
    for &(v, e) in &pairs {
        let (value, error) = (&file.columns[v], &file.columns[e]);
        let pair = error_columns
            .iter()
            .position(|(a, b)| *a == value.name && *b == error.name);
        let converted =
            convert_values(&error.values, &error.unit, &value.unit).ok_or_else(|| {
                AssembleError {
                    pair,
                    kind: ErrorKind::Unit,
                    message: format!(
                        "{path}:{}:{}: the error column `{}` is in {} but `{}` is in {}; an error \
                     bar needs the unit of its value (or one of the same dimension)",
                        error.line,
                        error.column,
                        error.name,
                        unit_text(&error.unit),
                        value.name,
                        unit_text(&value.unit)
                    ),
                }
            })?;
        if let Some(row) = converted.iter().position(|x| *x < 0.0) {
            return Err(AssembleError {
                pair,
                kind: ErrorKind::Value,
                message: format!(
                    "{path}:{}: row {}, column `{}`: an error bar cannot be negative",
                    file.row_lines[row],
                    row + 1,
                    error.name
                ),
            });
        }
        errors[v] = Some(converted);
    }
    let derived = file
        .record
        .as_ref()
        .map(|r| r.derived.clone())
        .unwrap_or_default();
    let columns = file
        .columns
        .iter()
        .enumerate()
        .filter(|(index, _)| !pairs.iter().any(|(_, e)| e == index))
        .map(|(index, c)| Column {
            name: c.name.clone(),
            unit: c.unit.clone(),
            values: c.values.clone(),
            errors: errors[index].clone(),
            derived_from: derived
                .iter()
                .find(|(n, _)| *n == c.name)
                .map(|(_, e)| e.clone()),
        })
        .collect();
    Ok(Table {
        name: name.to_string(),
        columns,
        // A table without provenance was not simulated here: `plot` draws it as measured
        // points. An icefield export carries its provenance back.
        provenance: file.record.as_ref().and_then(|r| r.provenance.clone()),
    })
}

/// "`s`" or "pure numbers".
pub fn unit_text(unit: &str) -> String {
    if unit.is_empty() {
        "pure numbers".to_string()
    } else {
        format!("`{unit}`")
    }
}

/// `value` written in `from` expressed in `to`: the identity for equal texts, a conversion
/// for two known units of one dimension, `None` otherwise.
pub fn convert_value(value: f64, from: &str, to: &str) -> Option<f64> {
    if from == to {
        return Some(value);
    }
    let (a, b) = (units::lookup(from)?, units::lookup(to)?);
    if a.dimension != b.dimension || a.dimension == Dimension::Dimensionless {
        return None;
    }
    let base = a.convert(value);
    // Dividing by an exact power of ten keeps 1.5 K → 1500 mK exact (as `UnitDef::convert`).
    if b.to_base < 1.0 {
        let inverse = (1.0 / b.to_base).round();
        if ((1.0 / b.to_base) - inverse).abs() <= 1e-9 * inverse {
            return Some(base * inverse);
        }
    }
    Some(base / b.to_base)
}

/// Every value converted (see `convert_value`).
pub fn convert_values(values: &[f64], from: &str, to: &str) -> Option<Vec<f64>> {
    if from == to {
        return Some(values.to_vec());
    }
    convert_value(1.0, from, to)?;
    values.iter().map(|&v| convert_value(v, from, to)).collect()
}

/// Whether values in `a` and `b` can share an axis.
pub fn units_agree(a: &str, b: &str) -> bool {
    convert_value(1.0, a, b).is_some()
}

/// How a simulated τ is read: its values times the returned factor are in units of τ0.
pub fn simulated_tau_factor(unit: &str, stated_tau0_seconds: Option<f64>) -> Result<f64, String> {
    if TAU0_UNITS.contains(&unit) {
        if stated_tau0_seconds.is_some() {
            return Err(
                "the simulated τ is already in units of τ0 (a pure number): `tau0` is only for \
                 a simulated τ given in a time unit"
                    .to_string(),
            );
        }
        return Ok(1.0);
    }
    match units::lookup(unit) {
        Some(def) if def.dimension == Dimension::Time => match stated_tau0_seconds {
            Some(tau0) => Ok(def.convert(1.0) / tau0),
            None => Err(format!(
                "the simulated τ is in `{unit}`: say which attempt time the simulation used, \
                 e.g. `tau0 = 1 µs`, or give it in units of τ0 (a pure number)"
            )),
        },
        _ => Err(format!(
            "the simulated τ is in {}; calibrate needs it in units of τ0 (a pure number) or in \
             a time unit with `tau0 = ...`",
            unit_text(unit)
        )),
    }
}

/// The factor from a measured τ's unit to seconds.
pub fn measured_tau_factor(unit: &str) -> Result<f64, String> {
    match units::lookup(unit) {
        Some(def) if def.dimension == Dimension::Time => Ok(def.convert(1.0)),
        _ => Err(format!(
            "the measured τ is in {}; calibrate needs a time unit (s, ms, µs, ns)",
            unit_text(unit)
        )),
    }
}

impl Checker<'_> {
    pub(super) fn check_data(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let spec = match statement.keyword.name.as_str() {
            "import" => self.check_import(statement, target, args, options, view),
            "calibrate" => self.check_calibrate(statement, target, args, options, view),
            other => {
                self.push(Problem::new(
                    ErrorKind::NotImplemented,
                    statement.keyword.span,
                    format!("`{other}` is not runnable yet"),
                ));
                None
            }
        };
        spec.map(|spec| Checked::Command(CommandSpec::Data(spec)))
    }

    fn check_import(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<DataSpec> {
        let before = self.problems.len();
        let target = match target {
            Some(_) => self.target_name(target),
            None => Some(DEFAULT_IMPORT_NAME.to_string()),
        };
        let path = match args {
            [Arg::Value(Value::Text { text, .. })] => Some(text.clone()),
            _ => {
                let span = phrase_span(args, statement.keyword.span);
                self.push(
                    Problem::new(
                        ErrorKind::Syntax,
                        span,
                        "`import` takes the file as a quoted path",
                    )
                    .with_help("write e.g. `lab = import \"lab/tau.csv\"`"),
                );
                None
            }
        };
        let mut format = None;
        let mut error_columns: Vec<(String, String)> = Vec::new();
        let mut error_spans: Vec<Span> = Vec::new();
        let mut seen: Vec<&str> = Vec::new();
        for option in options {
            let key = option.key.name.as_str();
            if seen.contains(&key) {
                self.push(Problem::new(
                    ErrorKind::Value,
                    option.key.span,
                    format!("option `{key}` is given twice"),
                ));
                continue;
            }
            seen.push(key);
            if key == "format" {
                format = self
                    .word(&option.value, "`format`", IMPORT_FORMATS)
                    .map(|w| {
                        if w == "csv" {
                            TableFormat::Csv
                        } else {
                            TableFormat::Whitespace
                        }
                    });
            } else if let Some(base) = key.strip_suffix("_error").filter(|b| !b.is_empty()) {
                match &option.value {
                    Value::Word(column) => {
                        error_columns.push((base.to_string(), column.name.clone()));
                        error_spans.push(option.span);
                    }
                    other => self.push(
                        Problem::new(
                            ErrorKind::Value,
                            other.span(),
                            format!("`{key}` names the column of the file that holds the error bars of `{base}`"),
                        )
                        .with_help(format!("write e.g. `{key} = err`")),
                    ),
                }
            } else {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        option.key.span,
                        format!("unknown option `{key}` for `import`"),
                    )
                    .with_help(did_you_mean(key, ["format"]).unwrap_or_else(
                        || {
                            "`import` takes `format = csv|whitespace` and `X_error = COLUMN` \
                             (the column holding the error bars of X)"
                                .to_string()
                        },
                    )),
                );
            }
        }
        if self.problems.len() > before {
            return None;
        }
        let (target, path) = (target?, path?);
        // Read the file now if it is there, so a bad file stops the cell before anything
        // runs and later statements know its columns. A file an earlier statement of the
        // cell writes is read when the import runs.
        let columns = if view.written_files.contains(&path) {
            None
        } else {
            let read = match read_measured(&path, format) {
                Err(error) => Err((None, error.kind, error.message)),
                Ok(file) => measured_table(&target, &path, &file, &error_columns)
                    .map_err(|e| (e.pair, e.kind, e.message)),
            };
            match read {
                Ok(table) => Some(table.columns),
                Err((pair, kind, message)) => {
                    let span = pair.map_or(statement.span, |index| error_spans[index]);
                    self.push(Problem::new(kind, span, message));
                    return None;
                }
            }
        };
        match columns {
            Some(columns) => view.set(
                &target,
                NameView::Table(
                    columns
                        .iter()
                        .map(|c| ColumnView {
                            name: c.name.clone(),
                            unit: c.unit.clone(),
                            derived: c.derived_from.is_some(),
                        })
                        .collect(),
                ),
            ),
            None => view.set(&target, NameView::Opaque),
        }
        Some(DataSpec::Import(Box::new(ImportSpec {
            target,
            path,
            format,
            error_columns,
        })))
    }

    fn check_calibrate(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<DataSpec> {
        let before = self.problems.len();
        let target = match target {
            Some(_) => self.target_name(target),
            None => Some(DEFAULT_CALIBRATE_NAME.to_string()),
        };
        let (simulated, measured, x) = match args {
            [Arg::Value(Value::Column(sim)), Arg::Connective(to), Arg::Value(Value::Column(lab)), Arg::Connective(against), Arg::Value(Value::Word(x))]
                if to.name == "to" && against.name == "against" =>
            {
                (sim, lab, x)
            }
            _ => {
                let span = phrase_span(args, statement.keyword.span);
                self.push(
                    Problem::new(
                        ErrorKind::Syntax,
                        span,
                        "`calibrate` reads `calibrate SIM.TAU to LAB.TAU against T`",
                    )
                    .with_help(
                        "write e.g. `cal = calibrate sim.tau to lab.tau against T, tau0 = 1 µs`",
                    ),
                );
                return None;
            }
        };
        let options = self.options(options, CALIBRATE_OPTIONS, "calibrate");
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let tau0 = match find("tau0") {
            Some(o) => self.positive(o, Dimension::Time, "`tau0`").map(Some),
            None => Some(None),
        };
        let range = match find("range") {
            Some(o) => self.range(&o.value).map(Some),
            None => Some(None),
        };
        let sim = self.calibrate_column(simulated, view);
        let lab = self.calibrate_column(measured, view);
        let mut units_known = true;
        for (table, _, _) in [&sim, &lab].into_iter().flatten() {
            if view.is_opaque(table) {
                units_known = false;
                continue;
            }
            self.column_of(table, x, view);
        }
        if let (Some((st, _, su)), Some((lt, _, lu)), Some(tau0)) = (&sim, &lab, &tau0) {
            if !view.is_opaque(st) {
                if let Err(message) = simulated_tau_factor(su, *tau0) {
                    self.push(Problem::new(ErrorKind::Unit, simulated.span, message));
                }
            }
            if !view.is_opaque(lt) {
                if let Err(message) = measured_tau_factor(lu) {
                    self.push(Problem::new(ErrorKind::Unit, measured.span, message));
                }
            }
            if units_known {
                let unit_of = |t: &str| {
                    view.columns(t)
                        .and_then(|c| c.iter().find(|c| c.name == x.name))
                        .map(|c| c.unit.clone())
                };
                if let (Some(a), Some(b)) = (unit_of(st), unit_of(lt)) {
                    if !units_agree(&b, &a) {
                        self.push(Problem::new(
                            ErrorKind::Unit,
                            x.span,
                            format!(
                                "`{st}.{}` is in {} but `{lt}.{}` is in {}: they cannot be compared",
                                x.name,
                                unit_text(&a),
                                x.name,
                                unit_text(&b)
                            ),
                        ));
                    }
                    if let Some(Some([(lo, lo_unit), _])) = &range {
                        if convert_value(*lo, lo_unit, &a).is_none() {
                            let span = find("range").map(|o| o.value.span()).unwrap_or(x.span);
                            self.push(Problem::new(
                                ErrorKind::Unit,
                                span,
                                format!(
                                    "`range` is in {} but `{st}.{}` is in {}",
                                    unit_text(lo_unit),
                                    x.name,
                                    unit_text(&a)
                                ),
                            ));
                        }
                    }
                }
            }
        }
        if self.problems.len() > before {
            return None;
        }
        let (target, sim, lab, tau0, range) = (target?, sim?, lab?, tau0?, range?);
        let x_unit = view
            .columns(&sim.0)
            .and_then(|c| c.iter().find(|c| c.name == x.name))
            .map(|c| c.unit.clone())
            .unwrap_or_default();
        view.set(
            &target,
            NameView::Table(vec![
                ColumnView {
                    name: "tau0".to_string(),
                    unit: "s".to_string(),
                    derived: false,
                },
                ColumnView {
                    name: "reduced_chi_squared".to_string(),
                    unit: String::new(),
                    derived: false,
                },
                ColumnView {
                    name: "points".to_string(),
                    unit: String::new(),
                    derived: false,
                },
            ]),
        );
        view.set(
            &format!("{target}_residuals"),
            NameView::Table(
                [
                    (x.name.as_str(), x_unit.as_str()),
                    ("measured", "s"),
                    ("calibrated", "s"),
                    ("residual", ""),
                ]
                .iter()
                .map(|(n, u)| ColumnView {
                    name: n.to_string(),
                    unit: u.to_string(),
                    derived: false,
                })
                .collect(),
            ),
        );
        view.set(&format!("{target}_plot"), NameView::Figure);
        Some(DataSpec::Calibrate(Box::new(CalibrateSpec {
            target,
            simulated: (sim.0, sim.1),
            measured: (lab.0, lab.1),
            x_column: x.name.clone(),
            stated_tau0_seconds: tau0,
            range,
        })))
    }

    /// A `TABLE.COLUMN` of `calibrate`: (table, column, unit).
    fn calibrate_column(
        &mut self,
        reference: &ColumnRef,
        view: &View,
    ) -> Option<(String, String, String)> {
        let table = reference.table.as_ref()?;
        if !self.table_exists(table, view) {
            return None;
        }
        if view.is_opaque(&table.name) {
            return Some((
                table.name.clone(),
                reference.column.name.clone(),
                String::new(),
            ));
        }
        self.column_of(&table.name, &reference.column, view)
            .map(|unit| (table.name.clone(), reference.column.name.clone(), unit))
    }

    /// `range = [lo, hi] UNIT`.
    fn range(&mut self, value: &Value) -> Option<[(f64, String); 2]> {
        let refuse = |checker: &mut Self, span: Span| {
            checker.push(
                Problem::new(
                    ErrorKind::Value,
                    span,
                    "`range` is two values with a unit, lowest first",
                )
                .with_help("write e.g. `range = [0.5, 2] K`"),
            );
            None
        };
        let Value::List { items, unit, span } = value else {
            return refuse(self, value.span());
        };
        let mut out = Vec::new();
        for item in items {
            let Value::Quantity(q) = item else {
                return refuse(self, item.span());
            };
            let unit = q.unit.as_ref().or(unit.as_ref());
            out.push((
                q.number.value,
                unit.map(|u| u.name.clone()).unwrap_or_default(),
            ));
        }
        match out.as_slice() {
            [a, b]
                if a.0.is_finite()
                    && b.0.is_finite()
                    && convert_value(b.0, &b.1, &a.1).is_some_and(|b| b > a.0) =>
            {
                Some([a.clone(), b.clone()])
            }
            _ => refuse(self, *span),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_fields_keep_their_columns_and_quotes() {
        let fields = split_csv("T [K], \"a, b [s]\" ,3").unwrap();
        assert_eq!(
            fields,
            vec![
                ("T [K]".to_string(), 1),
                ("a, b [s]".to_string(), 8),
                ("3".to_string(), 20)
            ]
        );
        assert!(split_csv("\"open").is_err());
    }

    #[test]
    fn whitespace_headers_take_units_with_spaces() {
        let header = whitespace_header("T [K]  c[J/(mol K)]   n []").unwrap();
        assert_eq!(
            header,
            vec![
                ("T".to_string(), Some("K".to_string()), 1),
                ("c".to_string(), Some("J/(mol K)".to_string()), 8),
                ("n".to_string(), Some(String::new()), 23)
            ]
        );
    }

    #[test]
    fn conversions_between_units_of_one_dimension_are_exact_for_powers_of_ten() {
        assert_eq!(convert_value(1.5, "K", "mK"), Some(1500.0));
        assert_eq!(convert_value(250.0, "ms", "s"), Some(0.25));
        assert_eq!(convert_value(1.0, "s", "K"), None);
        assert_eq!(convert_value(2.0, "k_B", "k_B"), Some(2.0));
        assert_eq!(convert_value(2.0, "k_B", ""), None);
    }
}

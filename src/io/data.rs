//! Data tables for `regionkey apply`: reading a large CSV, TSV or Parquet
//! table with polars (only the columns asked for; codes and periods as
//! text, values as numbers), folding its rows onto the sources of a
//! [`Plan`], and writing the results, the report and the sidecar metadata.
//!
//! The text is read as [`crate::io::table`] reads every table (UTF-8 with or
//! without a byte-order mark, else Windows-1252; NUL bytes and control
//! characters refused; a column found by the same name rule; blank lines
//! skipped), then handed to polars; line numbers in messages are the
//! file's physical lines, after quoted line breaks and CRLF endings too.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use polars::prelude::*;
use rayon::prelude::*;

use crate::core::allocate::{Allocation, Plan, SourceValues};
use crate::error::{Error, Location, Result};
pub use crate::io::output::{csv_field, sha256_file};
use crate::io::output::{fixed, NumberFormat};
use crate::io::table::{
    check_text, decode_owned, detect_delimiter, find_column, is_parquet, read_table_bytes,
    record_lines, ReadOptions, Table,
};
use std::ops::Range;

/// Which columns to read and how.
#[derive(Debug, Clone)]
pub struct DataSpec {
    /// The file.
    pub path: PathBuf,
    /// Field separator; detected from the header line when `None`.
    pub separator: Option<u8>,
    /// The unit code column (or the county part, with `state_column`).
    pub code_column: String,
    /// A state code column to be joined with the county part, if any.
    pub state_column: Option<String>,
    /// The period column, if any.
    pub period_column: Option<String>,
    /// Numeric columns, each read once.
    pub value_columns: Vec<String>,
    /// Texts that mean "no value" besides an empty field.
    pub missing: Vec<String>,
    /// The column where `regionkey match` wrote how each row's code was
    /// found (`match_method`), if the table has one: rows whose code came
    /// from a person's decision are then counted as such.
    pub method_column: Option<String>,
}

/// Column names of a data file, read without reading the rows.
pub fn column_names(spec: &DataSpec) -> Result<Vec<String>> {
    let path = &spec.path;
    let mut head = [0u8; 4];
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, "cannot open input", e))?;
    let n = std::io::Read::read(&mut &file, &mut head)
        .map_err(|e| Error::io(path, "cannot read", e))?;
    if is_parquet(path, &head[..n]) {
        crate::io::guard::parquet::check_file(path)?;
        let mut reader = ParquetReader::new(file);
        let schema = crate::io::guard::catch(|| reader.schema())
            .map_err(|_| parquet_stopped(path))?
            .map_err(|_| parquet_damaged(path))?;
        return Ok(schema.iter_names().map(|n| n.to_string()).collect());
    }
    let line = first_line(path)?;
    let sep = spec.separator.unwrap_or_else(|| detect_delimiter(&line));
    Ok(split_header(&line, sep))
}

fn first_line(path: &Path) -> Result<String> {
    use std::io::BufRead;
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, "cannot open input", e))?;
    let mut line = String::new();
    std::io::BufReader::new(file)
        .read_line(&mut line)
        .map_err(|e| Error::io(path, "cannot read", e))?;
    let line = line
        .strip_prefix('\u{feff}')
        .unwrap_or(&line)
        .trim_end_matches(['\r', '\n'])
        .to_string();
    if line.trim().is_empty() {
        return Err(Error::input(
            Location::file(path),
            "the file is empty; expected a header line and rows",
        ));
    }
    Ok(line)
}

fn split_header(line: &str, sep: u8) -> Vec<String> {
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(sep)
        .has_headers(false)
        .from_reader(line.as_bytes());
    reader
        .records()
        .next()
        .and_then(|r| r.ok())
        .map(|r| r.iter().map(|f| f.trim().to_string()).collect())
        .unwrap_or_default()
}

/// Checks that every column `spec` names is present, before reading rows.
pub fn check_columns(spec: &DataSpec) -> Result<()> {
    resolve_columns(spec).map(|_| ())
}

/// `spec` with each column named as the file names it, found by the one
/// column rule of [`find_column`] (exact, then ignoring case and
/// surrounding spaces), so `--period-column year` reads "Year" and the
/// output keeps the file's "Year". A missing column is an error listing
/// the columns present.
pub fn resolve_columns(spec: &DataSpec) -> Result<DataSpec> {
    let names = column_names(spec)?;
    let find = |name: &String| -> Result<String> {
        find_column(&spec.path, &names, name).map(|i| names[i].clone())
    };
    Ok(DataSpec {
        code_column: find(&spec.code_column)?,
        state_column: spec.state_column.as_ref().map(find).transpose()?,
        period_column: spec.period_column.as_ref().map(find).transpose()?,
        value_columns: spec.value_columns.iter().map(find).collect::<Result<_>>()?,
        method_column: spec.method_column.as_ref().map(find).transpose()?,
        ..spec.clone()
    })
}

/// A data table held as columns.
pub struct DataTable {
    /// The file.
    pub path: PathBuf,
    /// Number of rows.
    pub rows: usize,
    codes: StringChunked,
    states: Option<StringChunked>,
    periods: Option<StringChunked>,
    methods: Option<StringChunked>,
    values: Vec<Float64Chunked>,
    /// The value columns, in the order of [`DataSpec::value_columns`].
    pub value_columns: Vec<String>,
    /// The physical line of each row, when it is not the row number plus
    /// two (quoted line breaks, blank lines).
    lines: Option<Arc<[u64]>>,
    /// Things the user should know (a Latin-1 fallback).
    pub warnings: Vec<String>,
}

impl DataTable {
    /// The physical line of row `row` (0-based; the header is line 1).
    pub fn line(&self, row: usize) -> u64 {
        line_of(&self.lines, row)
    }
}

fn line_of(lines: &Option<Arc<[u64]>>, row: usize) -> u64 {
    match lines {
        Some(l) => l.get(row).copied().unwrap_or(row as u64 + 2),
        None => row as u64 + 2,
    }
}

fn polars_error(path: &Path, e: PolarsError) -> Error {
    Error::input(Location::file(path), format!("cannot read the table: {e}"))
}

/// Reads the columns `spec` names. A value that is not a number is an
/// error naming its line and column.
pub fn read(spec: &DataSpec) -> Result<DataTable> {
    let path = &spec.path;
    let mut head = [0u8; 4];
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, "cannot open input", e))?;
    let n = std::io::Read::read(&mut &file, &mut head)
        .map_err(|e| Error::io(path, "cannot read", e))?;
    let text_columns: Vec<&String> = [
        Some(&spec.code_column),
        spec.state_column.as_ref(),
        spec.period_column.as_ref(),
        spec.method_column.as_ref(),
    ]
    .into_iter()
    .flatten()
    .collect();
    let mut lines: Option<Arc<[u64]>> = None;
    let mut warnings = Vec::new();
    let df = if is_parquet(path, &head[..n]) {
        crate::io::guard::parquet::check_file(path)?;
        read_parquet(spec, file, &text_columns)?
    } else {
        // One decoding for every table: the bytes checked, then UTF-8 or
        // Windows-1252, as io::table reads them.
        let bytes = std::fs::read(path).map_err(|e| Error::io(path, "cannot open input", e))?;
        check_text(path, &bytes, spec.separator)?;
        let (text, _, warning) = decode_owned(path, bytes)?;
        warnings.extend(warning);
        let header = text.lines().next().unwrap_or("");
        let sep = spec.separator.unwrap_or_else(|| detect_delimiter(header));
        // Rows are lines 2, 3, ... unless a quoted field holds a line break
        // or a line is blank: then the lines are counted once.
        let blank = text.contains("\n\n") || text.contains("\n\r\n");
        if text.contains('"') || blank {
            let fields = split_header(header, sep).len();
            lines = Some(record_lines(&text, sep, fields).into());
        }
        // Blank lines are not rows (as for every table regionkey reads).
        let cleaned: std::borrow::Cow<str> = if blank {
            drop_blank_lines(&text).into()
        } else {
            text.as_str().into()
        };
        let fast = match read_csv(spec, sep, &DataType::Float64, cleaned.as_bytes()) {
            Ok(df) => Some(df),
            // A value polars cannot read as a number: read the values as
            // text to find where, and say so.
            Err(_) => match read_csv(spec, sep, &DataType::String, cleaned.as_bytes()) {
                Ok(df) => {
                    let line = |i: usize| line_of(&lines, i);
                    let mut columns: Vec<Column> = text_columns
                        .iter()
                        .map(|n| df.column(n).cloned())
                        .collect::<PolarsResult<_>>()
                        .map_err(|e| polars_error(path, e))?;
                    for name in &spec.value_columns {
                        let c = df.column(name).map_err(|e| polars_error(path, e))?;
                        columns.push(to_numbers(path, name, c, &line)?);
                    }
                    Some(DataFrame::new_infer_height(columns).map_err(|e| polars_error(path, e))?)
                }
                Err(_) => None,
            },
        };
        match fast {
            Some(df) => df,
            // Not readable by the fast path (a ragged row, quoting it reads
            // otherwise, a column it does not find): read by the one table
            // reader, whose errors name the line and column in our words.
            None => {
                let table = read_table_bytes(
                    path,
                    text.as_bytes(),
                    ReadOptions {
                        delimiter: Some(sep),
                    },
                )?;
                lines = Some(table.lines.clone().into());
                from_table(spec, &table, &text_columns)?
            }
        }
    };
    let text = |name: &String| -> Result<StringChunked> {
        let c = df.column(name).map_err(|e| polars_error(path, e))?;
        // Left in the chunks the reader made (folding walks them in order):
        // joining them would copy every column.
        Ok(c.str().map_err(|e| polars_error(path, e))?.clone())
    };
    let mut values = Vec::new();
    for name in &spec.value_columns {
        let c = df.column(name).map_err(|e| polars_error(path, e))?;
        let ca = c.f64().map_err(|e| polars_error(path, e))?.clone();
        // Infinite or NaN values (written "inf", "NaN") are not data.
        if let Some(i) = ca.iter().position(|v| v.is_some_and(|x| !x.is_finite())) {
            return Err(Error::input(
                Location::file(path)
                    .at_line(line_of(&lines, i))
                    .in_column(name),
                "the value is not a finite number; leave the field empty if it is missing",
            ));
        }
        values.push(ca);
    }
    Ok(DataTable {
        path: path.clone(),
        rows: df.height(),
        codes: text(&spec.code_column)?,
        states: spec.state_column.as_ref().map(text).transpose()?,
        periods: spec.period_column.as_ref().map(text).transpose()?,
        methods: spec.method_column.as_ref().map(text).transpose()?,
        values,
        value_columns: spec.value_columns.clone(),
        lines,
        warnings,
    })
}

/// A Parquet file the decoder refused.
fn parquet_damaged(path: &Path) -> Error {
    Error::input(
        Location::file(path),
        "cannot read as Parquet: the file is damaged, truncated or not Parquet",
    )
}

/// A Parquet file on which the decoder panicked (caught by the guard);
/// worded as the table reader words it.
fn parquet_stopped(path: &Path) -> Error {
    Error::input(
        Location::file(path),
        "cannot read as Parquet: the file is damaged (its decoder stopped)",
    )
}

/// Reads the columns `spec` names from a Parquet file already checked by
/// [`crate::io::guard::parquet`]; a panic of the decoder is caught.
fn read_parquet(
    spec: &DataSpec,
    file: std::fs::File,
    text_columns: &[&String],
) -> Result<DataFrame> {
    let path = &spec.path;
    let mut reader = ParquetReader::new(file);
    let names: Vec<String> = crate::io::guard::catch(|| reader.schema())
        .map_err(|_| parquet_stopped(path))?
        .map_err(|_| parquet_damaged(path))?
        .iter_names()
        .map(|n| n.to_string())
        .collect();
    // Each column as the file names it (the one column rule).
    let find = |name: &String| find_column(path, &names, name).map(|i| names[i].clone());
    let file_text: Vec<String> = text_columns
        .iter()
        .map(|n| find(n))
        .collect::<Result<_>>()?;
    let file_values: Vec<String> = spec.value_columns.iter().map(find).collect::<Result<_>>()?;
    let all: Vec<String> = file_text.iter().chain(&file_values).cloned().collect();
    let df = crate::io::guard::catch(|| reader.with_columns(Some(all)).finish())
        .map_err(|_| parquet_stopped(path))?
        .map_err(|_| parquet_damaged(path))?;
    let mut columns = Vec::new();
    for (name, file_name) in text_columns.iter().zip(&file_text) {
        let c = df.column(file_name).map_err(|e| polars_error(path, e))?;
        let c = c.cast(&DataType::String).map_err(|_| {
            Error::input(
                Location::file(path).in_column(file_name.as_str()),
                "cannot read the column as text",
            )
        })?;
        columns.push(c.with_name(name.as_str().into()));
    }
    for (name, file_name) in spec.value_columns.iter().zip(&file_values) {
        let c = df.column(file_name).map_err(|e| polars_error(path, e))?;
        let c = to_numbers(path, file_name, c, &|i| i as u64 + 2)?;
        columns.push(c.with_name(name.as_str().into()));
    }
    DataFrame::new_infer_height(columns).map_err(|e| polars_error(path, e))
}

/// The columns `spec` names, taken from a table the one table reader read:
/// fields empty or equal to a missing marker are missing; a value that is
/// not a number is an error naming its line and column.
fn from_table(spec: &DataSpec, table: &Table, text_columns: &[&String]) -> Result<DataFrame> {
    let missing = |v: &str| v.is_empty() || spec.missing.iter().any(|m| m == v);
    let mut columns = Vec::new();
    for name in text_columns {
        let i = table.column(name)?;
        let ca: StringChunked = table
            .records
            .iter()
            .map(|r| Some(&r[i]).filter(|v| !missing(v)))
            .collect();
        columns.push(ca.with_name(name.as_str().into()).into_column());
    }
    for name in &spec.value_columns {
        let i = table.column(name)?;
        let mut out: Vec<Option<f64>> = Vec::with_capacity(table.len());
        for (row, r) in table.records.iter().enumerate() {
            let v = &r[i];
            if missing(v) || v.trim().is_empty() {
                out.push(None);
                continue;
            }
            match v.trim().parse::<f64>() {
                Ok(x) => out.push(Some(x)),
                Err(_) => {
                    return Err(Error::input(
                        table.location(row, i),
                        format!("{:?} is not a number; leave the field empty if the value is missing, or name the marker with --missing", v.trim()),
                    ))
                }
            }
        }
        columns.push(
            Float64Chunked::from_iter_options(name.as_str().into(), out.into_iter()).into_column(),
        );
    }
    DataFrame::new_infer_height(columns).map_err(|e| polars_error(&spec.path, e))
}

/// `text` without its blank lines (line breaks inside quoted fields kept).
fn drop_blank_lines(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut quoted = false;
    let mut line_empty = true;
    let mut pending_cr = false;
    for c in text.chars() {
        match c {
            '"' => {
                quoted = !quoted;
                line_empty = false;
            }
            '\r' if !quoted => {
                pending_cr = true;
                continue;
            }
            '\n' if !quoted => {
                pending_cr = false;
                if line_empty {
                    continue;
                }
                out.push('\n');
                line_empty = true;
                continue;
            }
            _ => line_empty = false,
        }
        if pending_cr {
            out.push('\r');
            pending_cr = false;
        }
        out.push(c);
    }
    out
}

fn read_csv(
    spec: &DataSpec,
    sep: u8,
    value_type: &DataType,
    text: &[u8],
) -> PolarsResult<DataFrame> {
    let mut fields: Vec<Field> = Vec::new();
    let mut names: Vec<PlSmallStr> = Vec::new();
    for name in [
        Some(&spec.code_column),
        spec.state_column.as_ref(),
        spec.period_column.as_ref(),
        spec.method_column.as_ref(),
    ]
    .into_iter()
    .flatten()
    {
        fields.push(Field::new(name.as_str().into(), DataType::String));
        names.push(name.as_str().into());
    }
    for name in &spec.value_columns {
        fields.push(Field::new(name.as_str().into(), value_type.clone()));
        names.push(name.as_str().into());
    }
    let missing: Vec<PlSmallStr> = spec.missing.iter().map(|m| m.as_str().into()).collect();
    let parse = CsvParseOptions::default()
        .with_separator(sep)
        .with_encoding(CsvEncoding::LossyUtf8)
        .with_null_values((!missing.is_empty()).then_some(NullValues::AllColumns(missing)));
    CsvReadOptions::default()
        .with_has_header(true)
        .with_columns(Some(Arc::from(names)))
        .with_schema_overwrite(Some(Arc::new(Schema::from_iter(fields))))
        .with_parse_options(parse)
        .with_rechunk(false)
        .into_reader_with_file_handle(std::io::Cursor::new(text))
        .finish()
}

/// Casts a column to numbers; the first text that is not a number is an
/// error naming its line and column. Surrounding spaces are allowed.
fn to_numbers(
    path: &Path,
    name: &str,
    column: &Column,
    line: &dyn Fn(usize) -> u64,
) -> Result<Column> {
    if column.dtype().is_primitive_numeric() {
        return column
            .cast(&DataType::Float64)
            .map_err(|e| polars_error(path, e));
    }
    let text = column
        .cast(&DataType::String)
        .map_err(|e| polars_error(path, e))?;
    let text = text.str().map_err(|e| polars_error(path, e))?;
    let mut out: Vec<Option<f64>> = Vec::with_capacity(text.len());
    for (i, v) in text.iter().enumerate() {
        let v = v.map(str::trim).filter(|t| !t.is_empty());
        match v {
            None => out.push(None),
            Some(t) => match t.parse::<f64>() {
                Ok(x) => out.push(Some(x)),
                Err(_) => {
                    return Err(Error::input(
                        Location::file(path).at_line(line(i)).in_column(name),
                        format!("{t:?} is not a number; leave the field empty if the value is missing, or name the marker with --missing"),
                    ))
                }
            },
        }
    }
    Ok(Float64Chunked::from_iter_options(name.into(), out.into_iter()).into_column())
}

/// FNV-1a, for the many short code strings (faster than the default hasher,
/// and no input here is adversarial).
#[derive(Default)]
struct Fnv(u64);

impl Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        let mut h = if self.0 == 0 {
            0xcbf2_9ce4_8422_2325
        } else {
            self.0
        };
        for b in bytes {
            h ^= *b as u64;
            h = h.wrapping_mul(0x0100_0000_01b3);
        }
        self.0 = h;
    }
}

type FastMap<K, V> = HashMap<K, V, BuildHasherDefault<Fnv>>;

/// A raw code as written in the data: state part (with `--state-column`)
/// and code (or county part).
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct RawCode {
    /// The state column's text, if that column is used.
    pub state: Option<String>,
    /// The code column's text.
    pub code: String,
}

/// Each row's distinct code and period, numbered.
pub struct Indexed {
    /// Distinct raw codes, in order of first appearance.
    pub codes: Vec<RawCode>,
    /// Rows and first line of each distinct code.
    pub code_rows: Vec<(u64, u64)>,
    /// Distinct periods, sorted (numerically when all are integers); one
    /// empty period when the table has no period column.
    pub periods: Vec<String>,
    row_code: Vec<u32>,
    row_period: Vec<u32>,
    /// Rows with no code, and the first one's line.
    pub missing_code: (u64, u64),
    /// Rows with no period, and the first one's line.
    pub missing_period: (u64, u64),
}

const NONE: u32 = u32::MAX;

/// Rows whose code came from a person's decision (`match_method` is
/// `decision`), by what the decision gave.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Decided {
    /// Rows a decision matched to no unit (an empty code), and the first
    /// one's line.
    pub none: (u64, u64),
    /// Per distinct code of [`Indexed::codes`]: rows and first line.
    pub by_code: Vec<(u64, u64)>,
    /// Rows with no code that no decision left empty, and the first one's
    /// line (all of [`Indexed::missing_code`] without a method column).
    pub missing_otherwise: (u64, u64),
}

/// The method `regionkey match` writes for a code taken from a decision.
pub const DECIDED: &str = "decision";

impl DataTable {
    /// Numbers each row's code and period (one pass).
    pub fn index(&self) -> Indexed {
        // Codes and periods are numbered independently, one on each core.
        let ((codes, code_rows, row_code, missing_code), (periods, row_period, missing_period)) =
            rayon::join(|| self.index_codes(), || self.index_periods());
        Indexed {
            codes,
            code_rows,
            periods,
            row_code,
            row_period,
            missing_code,
            missing_period,
        }
    }

    /// Distinct codes, their rows and first line, each row's code id, and
    /// the rows with no code.
    #[allow(clippy::type_complexity)]
    fn index_codes(&self) -> (Vec<RawCode>, Vec<(u64, u64)>, Vec<u32>, (u64, u64)) {
        let n = self.rows;
        let mut code_ids: FastMap<(Option<&str>, &str), u32> = FastMap::default();
        let mut codes: Vec<RawCode> = Vec::new();
        let mut code_rows: Vec<(u64, u64)> = Vec::new();
        let mut row_code = Vec::with_capacity(n);
        let mut missing_code = (0u64, 0u64);
        let mut last: Option<((Option<&str>, &str), u32)> = None;
        let states: Box<dyn Iterator<Item = Option<&str>>> = match &self.states {
            Some(s) => Box::new(s.iter()),
            None => Box::new(std::iter::repeat_n(Some(""), n)),
        };
        for (i, (code, state)) in self.codes.iter().zip(states).enumerate() {
            let line = self.line(i);
            let (Some(code), Some(state)) = (code, state) else {
                missing_code.0 += 1;
                if missing_code.1 == 0 {
                    missing_code.1 = line;
                }
                row_code.push(NONE);
                continue;
            };
            let key = (self.states.as_ref().map(|_| state), code);
            let id = match last {
                Some((k, id)) if k == key => id,
                _ => *code_ids.entry(key).or_insert_with(|| {
                    codes.push(RawCode {
                        state: key.0.map(String::from),
                        code: code.to_string(),
                    });
                    code_rows.push((0, line));
                    (codes.len() - 1) as u32
                }),
            };
            last = Some((key, id));
            code_rows[id as usize].0 += 1;
            row_code.push(id);
        }
        (codes, code_rows, row_code, missing_code)
    }

    /// Rows whose code came from a decision, when the table has a method
    /// column (see [`DataSpec::method_column`]).
    pub fn decided(&self, indexed: &Indexed) -> Decided {
        let mut out = Decided {
            none: (0, 0),
            by_code: vec![(0, 0); indexed.codes.len()],
            missing_otherwise: indexed.missing_code,
        };
        let Some(methods) = &self.methods else {
            return out;
        };
        out.missing_otherwise = (0, 0);
        for (i, m) in methods.iter().enumerate() {
            let decided = m.map(str::trim) == Some(DECIDED);
            let slot = match (indexed.row_code[i], decided) {
                (NONE, true) => &mut out.none,
                (NONE, false) => &mut out.missing_otherwise,
                (id, true) => &mut out.by_code[id as usize],
                (_, false) => continue,
            };
            let line = self.line(i);
            slot.0 += 1;
            if slot.1 == 0 {
                slot.1 = line;
            }
        }
        out
    }

    /// Distinct periods (sorted), each row's period id, and the rows with
    /// no period.
    fn index_periods(&self) -> (Vec<String>, Vec<u32>, (u64, u64)) {
        let n = self.rows;
        let mut period_ids: FastMap<&str, u32> = FastMap::default();
        let mut periods: Vec<String> = Vec::new();
        let mut row_period = Vec::with_capacity(n);
        let mut missing_period = (0u64, 0u64);
        match &self.periods {
            None => {
                periods.push(String::new());
                row_period.resize(n, 0);
            }
            Some(col) => {
                let mut last: Option<(&str, u32)> = None;
                for (i, p) in col.iter().enumerate() {
                    let Some(p) = p.map(str::trim).filter(|p| !p.is_empty()) else {
                        missing_period.0 += 1;
                        if missing_period.1 == 0 {
                            missing_period.1 = self.line(i);
                        }
                        row_period.push(NONE);
                        continue;
                    };
                    let id = match last {
                        Some((k, id)) if k == p => id,
                        _ => *period_ids.entry(p).or_insert_with(|| {
                            periods.push(p.to_string());
                            (periods.len() - 1) as u32
                        }),
                    };
                    last = Some((p, id));
                    row_period.push(id);
                }
                // Sort periods (numerically when all are integers) and renumber.
                let mut order: Vec<u32> = (0..periods.len() as u32).collect();
                let numeric: Option<Vec<i64>> =
                    periods.iter().map(|p| p.parse::<i64>().ok()).collect();
                match &numeric {
                    Some(nums) => order.sort_by_key(|&i| nums[i as usize]),
                    None => order.sort_by(|&a, &b| periods[a as usize].cmp(&periods[b as usize])),
                }
                let mut rank = vec![0u32; periods.len()];
                for (r, &i) in order.iter().enumerate() {
                    rank[i as usize] = r as u32;
                }
                for id in row_period.iter_mut().filter(|id| **id != NONE) {
                    *id = rank[*id as usize];
                }
                periods = order.iter().map(|&i| periods[i as usize].clone()).collect();
            }
        }
        (periods, row_period, missing_period)
    }

    /// Adds each row's values into the cell of its source and period.
    /// `source_of[code id]` is the plan's source index for that distinct
    /// code, or `None` (the rows are reported elsewhere).
    pub fn fold(&self, indexed: &Indexed, source_of: &[Option<u32>], sources: usize) -> Folded {
        let periods = indexed.periods.len();
        let mut rows = vec![0u32; periods * sources];
        let mut first = vec![0u32; periods * sources];
        // Each row's cell, or NONE when its code or period is missing or
        // its code is not a source of the plan.
        let mut cells: Vec<u32> = Vec::with_capacity(self.rows);
        for i in 0..self.rows {
            let (c, p) = (indexed.row_code[i], indexed.row_period[i]);
            let source = if c == NONE || p == NONE {
                None
            } else {
                source_of[c as usize]
            };
            let Some(s) = source else {
                cells.push(NONE);
                continue;
            };
            let cell = p as usize * sources + s as usize;
            rows[cell] += 1;
            if rows[cell] == 1 {
                first[cell] = i as u32;
            }
            cells.push(cell as u32);
        }
        // Column by column, in parallel; within a column, rows in order.
        let by_column: Vec<(Vec<f64>, f64, f64)> = self
            .values
            .par_iter()
            .map(|ca| {
                let mut sums = vec![f64::NAN; periods * sources];
                let (mut total, mut left_out) = (0.0, 0.0);
                // Array by array: the values as a slice, nulls from the bitmap.
                let mut row = 0;
                for array in ca.downcast_iter() {
                    let values: &[f64] = array.values();
                    let cells = &cells[row..row + values.len()];
                    let validity = array.validity().filter(|b| b.unset_bits() > 0);
                    for (j, (&v, &cell)) in values.iter().zip(cells).enumerate() {
                        if validity.is_some_and(|b| !b.get_bit(j)) {
                            continue;
                        }
                        total += v;
                        if cell == NONE {
                            left_out += v;
                            continue;
                        }
                        let x = &mut sums[cell as usize];
                        *x = if x.is_nan() { v } else { *x + v };
                    }
                    row += values.len();
                }
                (sums, total, left_out)
            })
            .collect();
        let totals = by_column.iter().map(|c| c.1).collect();
        let left_out = by_column.iter().map(|c| c.2).collect();
        let by_column: Vec<Vec<f64>> = by_column.into_iter().map(|c| c.0).collect();
        let values = SourceValues::from_period_major(periods, sources, &by_column);
        Folded {
            values,
            rows,
            first_row: first,
            sources,
            totals,
            left_out,
            lines: self.lines.clone(),
        }
    }
}

/// Rows folded onto (period, source) cells.
pub struct Folded {
    /// The values.
    pub values: SourceValues,
    /// Rows per cell (period-major).
    pub rows: Vec<u32>,
    /// Index of each cell's first row.
    pub first_row: Vec<u32>,
    sources: usize,
    /// Per value column: the sum of every known value of the table.
    pub totals: Vec<f64>,
    lines: Option<Arc<[u64]>>,
    /// Per value column: the sum of the known values of rows that reach no
    /// source (no code, no period, or a code the plan does not know).
    pub left_out: Vec<f64>,
}

impl Folded {
    /// Rows of a (period, source) cell, and the first row's line.
    pub fn cell(&self, period: usize, source: usize) -> (u32, u64) {
        let i = period * self.sources + source;
        (
            self.rows[i],
            line_of(&self.lines, self.first_row[i] as usize),
        )
    }
}

/// How results are written.
#[derive(Debug, Clone)]
pub struct ResultLayout {
    /// The header: code, code name (if `target_names`), period (if
    /// `with_period`), then per measure its value, its coverage and its
    /// note column (if any).
    pub header: Vec<String>,
    /// Extra constant columns after a measure's coverage (e.g. a mean's
    /// `_weighting`), by measure index: the value written.
    pub notes: Vec<Option<String>>,
    /// Whether to write a period column.
    pub with_period: bool,
    /// Names of target codes (a `code_name` column), if known.
    pub target_names: Option<Vec<String>>,
    /// How values are written.
    pub numbers: NumberFormat,
    /// Field delimiter of the text output (`,` or tab).
    pub delimiter: u8,
    /// When the data hold pooled reports (codes joined by `+`): for each
    /// (target, period) the reports its figures were split from, written
    /// in a last column (empty where none).
    pub pooled_from: Option<std::collections::BTreeMap<(usize, usize), String>>,
}

/// Decimals for coverage.
pub const COVERAGE_DECIMALS: usize = 6;

/// Writes the results as CSV, sorted by (code, period). Targets are
/// allocated a batch at a time by `allocate` (each batch is then handed to
/// `seen`, for summaries), lines formatted in parallel and written in
/// order, so the bytes do not depend on the number of threads and memory
/// stays bounded.
pub fn write_results(
    w: &mut dyn Write,
    plan: &Plan,
    periods: &[String],
    allocate: &(dyn Fn(Range<usize>) -> Allocation + Sync),
    seen: &mut dyn FnMut(&Allocation),
    layout: &ResultLayout,
) -> std::io::Result<()> {
    let d = layout.delimiter;
    writeln!(
        w,
        "{}",
        layout
            .header
            .iter()
            .map(|h| field(h, d))
            .collect::<Vec<_>>()
            .join(std::str::from_utf8(&[d]).unwrap_or(","))
    )?;
    let targets = plan.targets.len();
    // A few targets per buffer, a few buffers per batch: bounded memory,
    // both cores busy.
    let chunk = (20_000 / periods.len().max(1)).clamp(1, 1024);
    const CHUNK_PER_BATCH: usize = 32;
    let batches: Vec<Range<usize>> = (0..targets.div_ceil(chunk))
        .step_by(CHUNK_PER_BATCH)
        .map(|c| c * chunk..((c + CHUNK_PER_BATCH) * chunk).min(targets))
        .collect();
    let period_fields: Vec<std::borrow::Cow<'_, str>> =
        periods.iter().map(|p| field(p, d)).collect();
    // Batches are allocated and formatted on another thread (lines in
    // parallel) while this one writes the previous batch; the buffers go
    // back and forth, so they are allocated once.
    let (full_tx, full_rx) = std::sync::mpsc::sync_channel::<(Allocation, Vec<Vec<u8>>)>(1);
    let (empty_tx, empty_rx) = std::sync::mpsc::channel::<Vec<Vec<u8>>>();
    std::thread::scope(|scope| -> std::io::Result<()> {
        let producer = scope.spawn(move || {
            for range in batches {
                let allocation = allocate(range.clone());
                let mut buffers = empty_rx.try_recv().unwrap_or_default();
                let starts: Vec<usize> = range.clone().step_by(chunk).collect();
                buffers.resize_with(starts.len(), Vec::new);
                buffers
                    .par_iter_mut()
                    .zip(&starts)
                    .for_each(|(buf, &start)| {
                        buf.clear();
                        let end = (start + chunk).min(range.end);
                        format_targets(buf, plan, &period_fields, &allocation, start..end, layout);
                    });
                if full_tx.send((allocation, buffers)).is_err() {
                    // The writer stopped (a write failed): nothing more to do.
                    return;
                }
            }
        });
        let mut result = Ok(());
        for (allocation, buffers) in full_rx.iter() {
            if result.is_ok() {
                result = buffers.iter().try_for_each(|b| w.write_all(b));
                if result.is_ok() {
                    seen(&allocation);
                }
            }
            if result.is_err() {
                break;
            }
            let _ = empty_tx.send(buffers);
        }
        drop(full_rx);
        if let Err(panic) = producer.join() {
            std::panic::resume_unwind(panic);
        }
        result
    })
}

/// Writes the results as Parquet: the same columns and rows as the text
/// output, codes and periods as text, values and coverage as 64-bit floats
/// (an empty estimate as null).
pub fn write_results_parquet(
    w: &mut dyn Write,
    plan: &Plan,
    periods: &[String],
    allocation: &Allocation,
    layout: &ResultLayout,
) -> std::io::Result<()> {
    let rows = plan.targets.len() * periods.len();
    let mut columns: Vec<Column> = Vec::new();
    let mut names = layout.header.iter();
    let mut name = || PlSmallStr::from(names.next().map_or("", |s| s.as_str()));
    let each = |f: &dyn Fn(usize, usize) -> String| -> Vec<String> {
        (0..plan.targets.len())
            .flat_map(|t| (0..periods.len()).map(move |p| (t, p)))
            .map(|(t, p)| f(t, p))
            .collect()
    };
    columns.push(Column::new(name(), each(&|t, _| plan.targets[t].clone())));
    if let Some(n) = &layout.target_names {
        columns.push(Column::new(name(), each(&|t, _| n[t].clone())));
    }
    if layout.with_period {
        columns.push(Column::new(name(), each(&|_, p| periods[p].clone())));
    }
    for (m, note) in layout.notes.iter().enumerate() {
        let mut values: Vec<Option<f64>> = Vec::with_capacity(rows);
        let mut coverage: Vec<f64> = Vec::with_capacity(rows);
        for t in 0..plan.targets.len() {
            for p in 0..periods.len() {
                let e = allocation.get(t, p, m);
                values.push(e.value);
                coverage.push(e.coverage);
            }
        }
        columns.push(Column::new(name(), values));
        columns.push(Column::new(name(), coverage));
        if let Some(note) = note {
            columns.push(Column::new(name(), vec![note.clone(); rows]));
        }
    }
    if let Some(pooled) = &layout.pooled_from {
        columns.push(Column::new(
            name(),
            each(&|t, p| pooled.get(&(t, p)).cloned().unwrap_or_default()),
        ));
    }
    let mut df = DataFrame::new_infer_height(columns).map_err(std::io::Error::other)?;
    ParquetWriter::new(w)
        .finish(&mut df)
        .map_err(std::io::Error::other)?;
    Ok(())
}

/// Formats the result lines of targets `range` (all periods) into `buf`.
fn format_targets(
    buf: &mut Vec<u8>,
    plan: &Plan,
    period_fields: &[std::borrow::Cow<'_, str>],
    allocation: &Allocation,
    range: Range<usize>,
    layout: &ResultLayout,
) {
    let d = layout.delimiter;
    for t in range {
        let code = field(&plan.targets[t], d);
        let name = layout.target_names.as_ref().map(|n| field(&n[t], d));
        for (p, period) in period_fields.iter().enumerate() {
            buf.extend_from_slice(code.as_bytes());
            if let Some(n) = &name {
                buf.push(d);
                buf.extend_from_slice(n.as_bytes());
            }
            if layout.with_period {
                buf.push(d);
                buf.extend_from_slice(period.as_bytes());
            }
            for (m, e) in allocation.row(t, p).iter().enumerate() {
                buf.push(d);
                if let Some(v) = e.value {
                    match layout.numbers {
                        NumberFormat::Significant(digits) => push_significant(buf, v, digits),
                        NumberFormat::Fixed(decimals) => push_fixed(buf, v, decimals),
                    }
                }
                buf.push(d);
                push_fixed(buf, e.coverage, COVERAGE_DECIMALS);
                if let Some(note) = &layout.notes[m] {
                    buf.push(d);
                    buf.extend_from_slice(field(note, d).as_bytes());
                }
            }
            if let Some(pooled) = &layout.pooled_from {
                buf.push(d);
                if let Some(text) = pooled.get(&(t, p)) {
                    buf.extend_from_slice(field(text, d).as_bytes());
                }
            }
            buf.push(b'\n');
        }
    }
}

/// A field quoted for the output's delimiter: the one CSV rule, and for a
/// tab-separated output also a field holding a tab.
fn field(text: &str, delimiter: u8) -> std::borrow::Cow<'_, str> {
    if delimiter == b'\t' && text.contains('\t') && !text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text).into()
    } else {
        csv_field(text)
    }
}

/// Appends `value` with at most `digits` significant digits, the same
/// bytes as [`NumberFormat::Significant`] writes.
fn push_significant(buf: &mut Vec<u8>, value: f64, digits: usize) {
    // Whole numbers (most counts) through the integer printer.
    if digits >= 15 && value.fract() == 0.0 && value.abs() < 1e15 {
        let n = value as i64;
        if n == 0 {
            buf.push(b'0');
        } else {
            push_scaled::<0>(buf, n);
        }
        return;
    }
    buf.extend_from_slice(NumberFormat::Significant(digits).format(value).as_bytes());
}

/// Appends `value` with a fixed number of decimals, the same bytes as
/// [`fixed`] writes. Ordinary values take an integer path (scale, round,
/// print digits); values near a rounding tie, very large values or many
/// decimals take the exact formatter.
fn push_fixed(buf: &mut Vec<u8>, value: f64, decimals: usize) {
    const POW10: [f64; 10] = [1.0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9];
    if decimals < POW10.len() {
        let scaled = value * POW10[decimals];
        if scaled.abs() < 1e12 {
            // Integer part and fraction of `scaled` (exact below 2^52),
            // without calling the C library's trunc and round.
            let whole = scaled as i64;
            let fraction = scaled - whole as f64;
            // Below 1e12 the scaled value is within 2^-12 of the exact
            // product, so unless its fraction is near one half it rounds
            // the same way.
            if (fraction.abs() - 0.5).abs() > 1e-3 {
                let n = if fraction >= 0.5 {
                    whole + 1
                } else if fraction <= -0.5 {
                    whole - 1
                } else {
                    whole
                };
                // One copy per number of decimals, so the divisions are
                // by constants.
                match decimals {
                    0 => push_scaled::<0>(buf, n),
                    1 => push_scaled::<1>(buf, n),
                    2 => push_scaled::<2>(buf, n),
                    3 => push_scaled::<3>(buf, n),
                    4 => push_scaled::<4>(buf, n),
                    5 => push_scaled::<5>(buf, n),
                    6 => push_scaled::<6>(buf, n),
                    7 => push_scaled::<7>(buf, n),
                    8 => push_scaled::<8>(buf, n),
                    _ => push_scaled::<9>(buf, n),
                }
                return;
            }
        }
    }
    buf.extend_from_slice(fixed(value, decimals).as_bytes());
}

/// Appends `n / 10^D` with `D` decimals (D < 10, |n| < 10^13): at most
/// 25 bytes, written in place.
fn push_scaled<const D: usize>(buf: &mut Vec<u8>, n: i64) {
    let unit = 10u64.pow(D as u32);
    let decimals = D;
    const PAIRS: &[u8; 200] = b"0001020304050607080910111213141516171819\
2021222324252627282930313233343536373839\
4041424344454647484950515253545556575859\
6061626364656667686970717273747576777879\
8081828384858687888990919293949596979899";
    let start = buf.len();
    // A fixed-size extension compiles to a few stores; the unused tail is
    // cut off below.
    buf.extend_from_slice(&[b'0'; 32]);
    let out = &mut buf[start..start + 32];
    let mut len = 0;
    if n < 0 {
        out[0] = b'-';
        len = 1;
    }
    let n = n.unsigned_abs();
    let (mut int, mut frac) = (n / unit, n % unit);
    // Integer digits, counted, then written right to left.
    let mut digits = 1;
    let mut x = int;
    while x >= 10 {
        x /= 10;
        digits += 1;
    }
    let mut i = len + digits;
    while int >= 100 {
        let d = (int % 100) as usize * 2;
        int /= 100;
        out[i - 2..i].copy_from_slice(&PAIRS[d..d + 2]);
        i -= 2;
    }
    if int >= 10 {
        let d = int as usize * 2;
        out[i - 2..i].copy_from_slice(&PAIRS[d..d + 2]);
    } else {
        out[i - 1] = b'0' + int as u8;
    }
    len += digits;
    if decimals > 0 {
        out[len] = b'.';
        let mut i = len + 1 + decimals;
        let mut left = decimals;
        while left >= 2 {
            let d = (frac % 100) as usize * 2;
            frac /= 100;
            out[i - 2..i].copy_from_slice(&PAIRS[d..d + 2]);
            i -= 2;
            left -= 2;
        }
        if left == 1 {
            out[i - 1] = b'0' + (frac % 10) as u8;
        }
        len += 1 + decimals;
    }
    buf.truncate(start + len);
}

/// Writes `value` as the report writes a number: fixed, or empty.
pub fn number_or_empty(value: Option<f64>, decimals: usize) -> String {
    value.map_or(String::new(), |v| fixed(v, decimals))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_decimals_in_a_buffer_match_the_shared_formatter() {
        for v in [
            0.0, -0.0, -1e-12, 1.5, -2.25, 123456.789, 1e15, -0.0000004, 0.5, 2.5, 0.0000005, -7.0,
            0.125, 1e300,
        ] {
            for d in [0, 1, 3, 6, 9, 12] {
                let mut buf = b"x,".to_vec();
                push_fixed(&mut buf, v, d);
                assert_eq!(
                    String::from_utf8(buf).unwrap(),
                    format!("x,{}", fixed(v, d)),
                    "{v} {d}"
                );
            }
        }
    }

    proptest::proptest! {
        #[test]
        fn significant_digits_in_a_buffer_match_the_shared_formatter(
            v in proptest::prop_oneof![-1.0e15f64..1.0e15, -1.0f64..1.0, proptest::strategy::Strategy::prop_map(-1000i64..1000, |n| n as f64)],
        ) {
            let mut buf = Vec::new();
            push_significant(&mut buf, v, 15);
            proptest::prop_assert_eq!(String::from_utf8(buf).unwrap(), NumberFormat::default().format(v));
        }

        #[test]
        fn the_fast_path_writes_what_the_exact_formatter_writes(v in -1.0e7f64..1.0e7, d in 0usize..10) {
            let mut buf = Vec::new();
            push_fixed(&mut buf, v, d);
            proptest::prop_assert_eq!(String::from_utf8(buf).unwrap(), fixed(v, d));
        }

        #[test]
        fn large_and_tiny_values_are_written_as_the_exact_formatter_writes(
            v in proptest::prop_oneof![-1.0e13f64..1.0e13, -1.0f64..1.0],
            d in 0usize..12,
        ) {
            let mut buf = b"x".to_vec();
            push_fixed(&mut buf, v, d);
            proptest::prop_assert_eq!(String::from_utf8(buf).unwrap(), format!("x{}", fixed(v, d)));
        }
    }
}

//! Reading input tables: CSV or TSV (delimiter detected or given), UTF-8
//! with or without a byte-order mark, Latin-1 (Windows-1252) fallback with a
//! warning, and Parquet. Every problem names the file, the line and the
//! column.

use std::collections::HashMap;
use std::io::Read;
use std::path::{Path, PathBuf};

use crate::error::{Error, Location, Result};

/// The text encoding an input was read in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Encoding {
    /// UTF-8 (a byte-order mark, if any, removed).
    Utf8,
    /// Not valid UTF-8; read as Windows-1252 (a superset of Latin-1).
    Latin1,
    /// Parquet (typed; text is UTF-8).
    Parquet,
}

/// A table read in full: header names and records of text fields.
#[derive(Debug, Clone)]
pub struct Table {
    /// The file it came from (`-` for standard input).
    pub path: PathBuf,
    /// Column names.
    pub headers: Vec<String>,
    /// Records, each as long as `headers`.
    pub records: Vec<csv::StringRecord>,
    /// 1-based line number of each record in the file (for messages); for
    /// Parquet, the row number + 1 (the header counts as line 1).
    pub lines: Vec<u64>,
    /// The field delimiter (`,` for Parquet, used when writing back).
    pub delimiter: u8,
    /// How the bytes were decoded.
    pub encoding: Encoding,
    /// Things the user should know (encoding fallback).
    pub warnings: Vec<String>,
}

impl Table {
    /// Index of the column named `name` (exact match first, then ignoring
    /// case and surrounding spaces), or an error listing the columns.
    pub fn column(&self, name: &str) -> Result<usize> {
        if let Some(i) = self.headers.iter().position(|h| h == name) {
            return Ok(i);
        }
        let want = name.trim().to_lowercase();
        let hits: Vec<usize> = (0..self.headers.len())
            .filter(|&i| self.headers[i].trim().to_lowercase() == want)
            .collect();
        match hits.as_slice() {
            [i] => Ok(*i),
            _ => Err(Error::MissingColumn {
                path: self.path.clone(),
                column: name.to_string(),
                available: self.headers.join(", "),
            }),
        }
    }

    /// Location of record `row` (0-based) in column `column` (an index).
    pub fn location(&self, row: usize, column: usize) -> Location {
        Location::file(&self.path)
            .at_line(self.lines[row])
            .in_column(&self.headers[column])
    }

    /// Number of records.
    pub fn len(&self) -> usize {
        self.records.len()
    }

    /// True when the table has no records.
    pub fn is_empty(&self) -> bool {
        self.records.is_empty()
    }
}

/// How to read an input table.
#[derive(Debug, Clone, Copy, Default)]
pub struct ReadOptions {
    /// Field delimiter; detected from the header line when `None`.
    pub delimiter: Option<u8>,
}

/// True when the path names a Parquet file (by extension or magic bytes).
pub fn is_parquet(path: &Path, head: &[u8]) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("parquet"))
        || head.starts_with(b"PAR1")
}

/// Reads a whole table from `path` (`-` for standard input).
pub fn read_table(path: &Path, options: ReadOptions) -> Result<Table> {
    let bytes = if path == Path::new("-") {
        let mut buf = Vec::new();
        std::io::stdin()
            .read_to_end(&mut buf)
            .map_err(|e| Error::io(path, "cannot read standard input", e))?;
        buf
    } else {
        std::fs::read(path).map_err(|e| Error::io(path, "cannot open input", e))?
    };
    if is_parquet(path, &bytes) {
        return read_parquet(path, bytes);
    }
    read_delimited(path, &bytes, options)
}

/// Reads a table from bytes already in memory (an embedded file); `path`
/// names it in messages.
pub fn read_table_bytes(path: &Path, bytes: &[u8], options: ReadOptions) -> Result<Table> {
    if is_parquet(path, bytes) {
        return read_parquet(path, bytes.to_vec());
    }
    read_delimited(path, bytes, options)
}

/// Decodes bytes: UTF-8 (BOM removed) or, failing that, Windows-1252 with
/// a warning naming the first undecodable line.
pub fn decode(path: &Path, bytes: &[u8]) -> Result<(String, Encoding, Option<String>)> {
    if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        return Err(Error::input(
            Location::file(path),
            "the file is UTF-16; save it as UTF-8 (or Latin-1) text and try again",
        ));
    }
    let body = bytes.strip_prefix(&[0xEF, 0xBB, 0xBF]).unwrap_or(bytes);
    match std::str::from_utf8(body) {
        Ok(s) => Ok((s.to_string(), Encoding::Utf8, None)),
        Err(e) => {
            let line = 1 + body[..e.valid_up_to()]
                .iter()
                .filter(|&&b| b == b'\n')
                .count();
            if body.contains(&0) {
                return Err(Error::input(
                    Location::file(path).at_line(line as u64),
                    "the file holds NUL bytes and is not a text table (is it a spreadsheet or a compressed file?)",
                ));
            }
            let text: String = body.iter().map(|&b| cp1252(b)).collect();
            let warning = format!(
                "{}: not valid UTF-8 (first at line {line}); read as Latin-1 (Windows-1252). Check names with accents in the output.",
                path.display()
            );
            Ok((text, Encoding::Latin1, Some(warning)))
        }
    }
}

/// Windows-1252 byte to char (Latin-1 with the 0x80..0x9F printable forms).
fn cp1252(b: u8) -> char {
    const HIGH: [char; 32] = [
        '\u{20AC}', '\u{81}', '\u{201A}', '\u{0192}', '\u{201E}', '\u{2026}', '\u{2020}',
        '\u{2021}', '\u{02C6}', '\u{2030}', '\u{0160}', '\u{2039}', '\u{0152}', '\u{8D}',
        '\u{017D}', '\u{8F}', '\u{90}', '\u{2018}', '\u{2019}', '\u{201C}', '\u{201D}', '\u{2022}',
        '\u{2013}', '\u{2014}', '\u{02DC}', '\u{2122}', '\u{0161}', '\u{203A}', '\u{0153}',
        '\u{9D}', '\u{017E}', '\u{0178}',
    ];
    match b {
        0x80..=0x9F => HIGH[(b - 0x80) as usize],
        _ => b as char,
    }
}

/// Picks the delimiter that occurs most in the header line (outside quotes)
/// among comma, tab, semicolon and pipe; comma when none occurs.
pub fn detect_delimiter(text: &str) -> u8 {
    let header = text.lines().next().unwrap_or("");
    let mut counts = [(b',', 0usize), (b'\t', 0), (b';', 0), (b'|', 0)];
    let mut quoted = false;
    for b in header.bytes() {
        if b == b'"' {
            quoted = !quoted;
        } else if !quoted {
            for c in counts.iter_mut() {
                if c.0 == b {
                    c.1 += 1;
                }
            }
        }
    }
    counts
        .iter()
        .filter(|c| c.1 > 0)
        .max_by_key(|c| c.1)
        .map_or(b',', |c| c.0)
}

fn read_delimited(path: &Path, bytes: &[u8], options: ReadOptions) -> Result<Table> {
    let (text, encoding, warning) = decode(path, bytes)?;
    if text.trim().is_empty() {
        return Err(Error::input(
            Location::file(path),
            "the file is empty; expected a header line and rows",
        ));
    }
    let delimiter = options.delimiter.unwrap_or_else(|| detect_delimiter(&text));
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(false)
        .from_reader(text.as_bytes());
    let headers: Vec<String> = reader
        .headers()
        .map_err(|e| csv_error(path, e, &[]))?
        .iter()
        .map(|h| h.trim().to_string())
        .collect();
    check_headers(path, &headers)?;
    let mut records = Vec::new();
    let mut lines = Vec::new();
    let mut record = csv::StringRecord::new();
    loop {
        match reader.read_record(&mut record) {
            Ok(true) => {
                let line = record.position().map_or(0, |p| p.line());
                // A line with nothing on it (e.g. a trailing blank line in a
                // one-column file) is not a row.
                if record.len() == 1 && record[0].is_empty() && headers.len() > 1 {
                    continue;
                }
                records.push(std::mem::take(&mut record));
                lines.push(line);
            }
            Ok(false) => break,
            Err(e) => return Err(csv_error(path, e, &headers)),
        }
    }
    Ok(Table {
        path: path.to_path_buf(),
        headers,
        records,
        lines,
        delimiter,
        encoding,
        warnings: warning.into_iter().collect(),
    })
}

fn check_headers(path: &Path, headers: &[String]) -> Result<()> {
    let mut seen: HashMap<&str, usize> = HashMap::new();
    for (i, h) in headers.iter().enumerate() {
        if let Some(first) = seen.insert(h.as_str(), i) {
            return Err(Error::input(
                Location::file(path).at_line(1).in_column(h),
                format!(
                    "duplicate column name (columns {} and {}); rename one so every column is named once",
                    first + 1,
                    i + 1
                ),
            ));
        }
    }
    Ok(())
}

fn csv_error(path: &Path, e: csv::Error, headers: &[String]) -> Error {
    let line = e.position().map(|p| p.line());
    let mut location = Location::file(path);
    if let Some(l) = line {
        location = location.at_line(l);
    }
    let message = match e.kind() {
        csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => {
            let mut m = format!(
                "ragged row: {len} fields where the header has {expected_len}; check for an unquoted delimiter or a missing field"
            );
            if *len > *expected_len && headers.len() as u64 == *expected_len {
                m.push_str(" (extra fields after the last column)");
            } else if (*len as usize) < headers.len() {
                location = location.in_column(&headers[*len as usize]);
                m.push_str(" (the named column is the first one missing)");
            }
            m
        }
        csv::ErrorKind::Utf8 { .. } => "text that is not valid UTF-8".to_string(),
        _ => e.to_string(),
    };
    Error::input(location, message)
}

fn read_parquet(path: &Path, bytes: Vec<u8>) -> Result<Table> {
    use polars::prelude::*;
    let cursor = std::io::Cursor::new(bytes);
    // The Parquet decoder panics on some damaged files: guard it.
    let df = crate::io::guard::catch(|| ParquetReader::new(cursor).finish())
        .map_err(|_| {
            Error::input(
                Location::file(path),
                "cannot read as Parquet: the file is damaged (its decoder stopped)",
            )
        })?
        .map_err(|_| {
            Error::input(
                Location::file(path),
                "cannot read as Parquet: the file is damaged, truncated or not Parquet",
            )
        })?;
    let headers: Vec<String> = df
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    check_headers(path, &headers)?;
    let height = df.height();
    let mut columns: Vec<Vec<String>> = Vec::with_capacity(headers.len());
    for name in &headers {
        let column = df
            .column(name)
            .and_then(|c| c.cast(&DataType::String))
            .map_err(|e| {
                Error::input(
                    Location::file(path).in_column(name),
                    format!("cannot read the column as text: {e}"),
                )
            })?;
        let strings = column.str().map_err(|e| {
            Error::input(
                Location::file(path).in_column(name),
                format!("cannot read the column as text: {e}"),
            )
        })?;
        columns.push(
            strings
                .downcast_iter()
                .flat_map(|array| array.iter())
                .map(|v| v.unwrap_or("").to_string())
                .collect(),
        );
    }
    let mut records = Vec::with_capacity(height);
    for row in 0..height {
        let mut record = csv::StringRecord::new();
        for column in &columns {
            record.push_field(&column[row]);
        }
        records.push(record);
    }
    Ok(Table {
        path: path.to_path_buf(),
        headers,
        records,
        lines: (2..2 + height as u64).collect(),
        delimiter: b',',
        encoding: Encoding::Parquet,
        warnings: Vec::new(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read_bytes(bytes: &[u8]) -> Result<Table> {
        read_delimited(Path::new("t.csv"), bytes, ReadOptions::default())
    }

    #[test]
    fn a_byte_order_mark_is_not_part_of_the_first_column_name() {
        let t = read_bytes(b"\xEF\xBB\xBFname,state\nCook,IL\n").unwrap();
        assert_eq!(t.headers, ["name", "state"]);
        assert_eq!(t.encoding, Encoding::Utf8);
    }

    #[test]
    fn latin1_bytes_are_decoded_with_a_warning() {
        let t = read_bytes(b"name\nDo\xF1a Ana\n").unwrap();
        assert_eq!(&t.records[0][0], "Do\u{f1}a Ana");
        assert_eq!(t.encoding, Encoding::Latin1);
        assert!(t.warnings[0].contains("line 2"), "{:?}", t.warnings);
    }

    #[test]
    fn tabs_and_semicolons_are_detected() {
        assert_eq!(detect_delimiter("a\tb\tc\n1\t2\t3"), b'\t');
        assert_eq!(detect_delimiter("a;b\n"), b';');
        assert_eq!(detect_delimiter("\"a,b\";c\n"), b';');
        assert_eq!(detect_delimiter("single\n"), b',');
    }

    #[test]
    fn a_ragged_row_names_its_line() {
        let e = read_bytes(b"a,b,c\n1,2,3\n4,5\n").unwrap_err().to_string();
        assert!(e.contains("line 3"), "{e}");
        assert!(e.contains("column \"c\""), "{e}");
    }

    #[test]
    fn duplicate_headers_are_refused() {
        let e = read_bytes(b"name,name\n1,2\n").unwrap_err().to_string();
        assert!(e.contains("duplicate column"), "{e}");
    }

    #[test]
    fn an_empty_file_is_refused() {
        assert!(read_bytes(b"").unwrap_err().to_string().contains("empty"));
        assert!(read_bytes(b"\xEF\xBB\xBF \n")
            .unwrap_err()
            .to_string()
            .contains("empty"));
    }

    #[test]
    fn line_numbers_follow_quoted_newlines() {
        let t = read_bytes(b"a,b\n\"x\ny\",1\nz,2\n").unwrap();
        assert_eq!(t.lines, [2, 4]);
    }

    #[test]
    fn columns_are_found_ignoring_case_and_missing_ones_are_listed() {
        let t = read_bytes(b"County Name,State\nx,y\n").unwrap();
        assert_eq!(t.column("county name").unwrap(), 0);
        let e = t.column("fips").unwrap_err().to_string();
        assert!(e.contains("County Name, State"), "{e}");
    }
}

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
        find_column(&self.path, &self.headers, name)
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

/// The column of `headers` named `name`: an exact match first, then one
/// ignoring case and surrounding spaces; otherwise an error listing the
/// columns. The one rule for every table regionkey reads.
pub fn find_column(path: &Path, headers: &[String], name: &str) -> Result<usize> {
    if let Some(i) = headers.iter().position(|h| h == name) {
        return Ok(i);
    }
    let want = name.trim().to_lowercase();
    let hits: Vec<usize> = (0..headers.len())
        .filter(|&i| headers[i].trim().to_lowercase() == want)
        .collect();
    match hits.as_slice() {
        [i] => Ok(*i),
        _ => Err(Error::MissingColumn {
            path: path.to_path_buf(),
            column: name.to_string(),
            available: headers.join(", "),
        }),
    }
}

/// Refuses text that holds NUL bytes or other control characters (besides
/// tab, line feed and carriage return): the mark of a spreadsheet, a
/// compressed file or a broken export read as text. The error names the
/// line and, when the header can be read, the column.
pub fn check_text(path: &Path, bytes: &[u8], delimiter: Option<u8>) -> Result<()> {
    // UTF-16 text is full of NUL bytes; decoding refuses it by name.
    if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        return Ok(());
    }
    let bad = |b: u8| (b < 0x20 && !matches!(b, b'\t' | b'\n' | b'\r')) || b == 0x7F;
    // A branch-free pass first (most files are clean), then the position.
    let any = bytes
        .chunks(1 << 16)
        .any(|c| c.iter().fold(false, |acc, &b| acc | bad(b)));
    if !any {
        return Ok(());
    }
    let at = bytes.iter().position(|&b| bad(b)).unwrap_or(0);
    let line_start = bytes[..at]
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(0, |i| i + 1);
    let line = 1 + bytes[..at].iter().filter(|&&b| b == b'\n').count() as u64;
    let mut location = Location::file(path).at_line(line);
    // The column: delimiters outside quotes before the byte on its line.
    let header_end = bytes
        .iter()
        .position(|&b| b == b'\n')
        .unwrap_or(bytes.len());
    let header = String::from_utf8_lossy(&bytes[..header_end]);
    let header = header.trim_start_matches('\u{feff}');
    let delimiter = delimiter.unwrap_or_else(|| detect_delimiter(header));
    let mut field = 0usize;
    let mut quoted = false;
    for &b in &bytes[line_start..at] {
        if b == b'"' {
            quoted = !quoted;
        } else if b == delimiter && !quoted {
            field += 1;
        }
    }
    let names: Vec<&str> = header.split(delimiter as char).collect();
    if line > 1 {
        if let Some(name) = names.get(field) {
            location = location.in_column(name.trim().trim_matches('"'));
        }
    }
    let what = if bytes[at] == 0 {
        "a NUL byte".to_string()
    } else {
        format!("the control character 0x{:02X}", bytes[at])
    };
    Err(Error::input(
        location,
        format!("{what}: the file is not a text table (a spreadsheet, a compressed file, or a damaged export?); save it as CSV text and try again"),
    ))
}

/// The physical line (1-based; the header is line 1) of each record of a
/// delimited text, as [`read_table`] numbers them: after quoted line breaks
/// and CRLF endings, lines with nothing on them skipped.
pub fn record_lines(text: &str, delimiter: u8, fields: usize) -> Vec<u64> {
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(true)
        .from_reader(text.as_bytes());
    let mut lines = Vec::new();
    let _ = reader.headers();
    let mut record = csv::StringRecord::new();
    let mut counter = LineCounter::new(text.as_bytes());
    while let Ok(true) = reader.read_record(&mut record) {
        if record.len() == 1 && record[0].is_empty() && fields > 1 {
            continue;
        }
        lines.push(counter.line_at(record.position().map_or(0, |p| p.byte())));
    }
    lines
}

/// Physical line numbers from byte offsets, counting line feeds (so CRLF
/// and quoted line breaks count as the file shows them). Offsets asked for
/// in increasing order cost one pass over the text in all.
pub struct LineCounter<'a> {
    text: &'a [u8],
    byte: usize,
    line: u64,
}

impl<'a> LineCounter<'a> {
    /// A counter at the start of `text` (line 1).
    pub fn new(text: &'a [u8]) -> Self {
        LineCounter {
            text,
            byte: 0,
            line: 1,
        }
    }

    /// The line holding byte `offset`; blank lines before a record are
    /// skipped to the record's first character.
    pub fn line_at(&mut self, offset: u64) -> u64 {
        let mut offset = (offset as usize).min(self.text.len());
        if offset < self.byte {
            self.byte = 0;
            self.line = 1;
        }
        // A record's position may point at the line breaks before it.
        while offset < self.text.len() && matches!(self.text[offset], b'\r' | b'\n') {
            offset += 1;
        }
        self.line += self.text[self.byte..offset]
            .iter()
            .filter(|&&b| b == b'\n')
            .count() as u64;
        self.byte = offset;
        self.line
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

/// [`decode`] taking the bytes: valid UTF-8 is kept without a copy (a
/// byte-order mark removed), anything else decoded as Windows-1252.
pub fn decode_owned(path: &Path, mut bytes: Vec<u8>) -> Result<(String, Encoding, Option<String>)> {
    if bytes.starts_with(&[0xEF, 0xBB, 0xBF]) {
        bytes.drain(..3);
    }
    match String::from_utf8(bytes) {
        Ok(s) => Ok((s, Encoding::Utf8, None)),
        Err(e) => decode(path, e.as_bytes()),
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
    check_text(path, bytes, options.delimiter)?;
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
        .map_err(|e| csv_error(path, e, &[], text.as_bytes()))?
        .iter()
        .map(|h| h.trim().to_string())
        .collect();
    check_headers(path, &headers)?;
    let mut records = Vec::new();
    let mut lines = Vec::new();
    let mut record = csv::StringRecord::new();
    let mut counter = LineCounter::new(text.as_bytes());
    loop {
        match reader.read_record(&mut record) {
            Ok(true) => {
                let line = counter.line_at(record.position().map_or(0, |p| p.byte()));
                // A line with nothing on it (e.g. a trailing blank line in a
                // one-column file) is not a row.
                if record.len() == 1 && record[0].is_empty() && headers.len() > 1 {
                    continue;
                }
                // Each record is allocated once at its exact size; the
                // buffer read into keeps its capacity, so no record grows
                // its buffers field by field (nor keeps the slack a clone
                // of the buffer would).
                let mut exact =
                    csv::StringRecord::with_capacity(record.as_slice().len(), record.len());
                exact.extend(record.iter());
                records.push(exact);
                lines.push(line);
            }
            Ok(false) => break,
            Err(e) => return Err(csv_error(path, e, &headers, text.as_bytes())),
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

fn csv_error(path: &Path, e: csv::Error, headers: &[String], text: &[u8]) -> Error {
    let line = e
        .position()
        .map(|p| LineCounter::new(text).line_at(p.byte()));
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
    // Sizes and counts checked first: some damage makes the decoder abort.
    crate::io::guard::parquet::check_bytes(path, &bytes)?;
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
        let values: Vec<String> = strings
            .downcast_iter()
            .flat_map(|array| array.iter())
            .map(|v| v.unwrap_or("").to_string())
            .collect();
        // A damaged file can decode to columns of different lengths.
        if values.len() != height {
            return Err(Error::input(
                Location::file(path).in_column(name),
                format!(
                    "cannot read as Parquet: the file is damaged (the column has {} values, the table {height} rows)",
                    values.len()
                ),
            ));
        }
        columns.push(values);
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
    fn nul_bytes_and_control_characters_are_refused_naming_line_and_column() {
        let e = read_bytes(b"code,n\nA,1\nB,2\x003\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 3"), "{e}");
        assert!(e.contains("column \"n\""), "{e}");
        assert!(e.contains("NUL"), "{e}");
        let e = read_bytes(b"code,n\nA\x1b,1\n").unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("column \"code\""), "{e}");
        assert!(e.contains("0x1B"), "{e}");
        // Tabs, CR and LF are text.
        assert!(read_bytes(b"code\tn\r\nA\t1\r\n").is_ok());
    }

    #[test]
    fn record_lines_follow_quoted_newlines_crlf_and_blank_lines() {
        let text = "a,b\r\n\"x\r\ny\",1\r\n\r\nz,2\r\n";
        assert_eq!(record_lines(text, b',', 2), [2, 5]);
        let t = read_bytes(text.as_bytes()).unwrap();
        assert_eq!(t.lines, [2, 5]);
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

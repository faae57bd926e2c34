//! A check of a Parquet file's structure before a decoder reads it.
//!
//! A damaged Parquet file can carry sizes and counts that make a decoder
//! ask for an impossible allocation (a negative value count read as
//! 2^64 - 23, a page that claims to inflate to terabytes); the process then
//! aborts, and no panic guard can catch that. So before polars sees a file,
//! this module reads its footer (the `FileMetaData`, Thrift compact
//! protocol) and every page header, and checks each size, offset and count
//! against the file's length and against each other:
//!
//! - the file starts and ends with `PAR1` and the footer length fits;
//! - the schema is one tree whose leaves are the columns of every row
//!   group, and column chunks point to no other file;
//! - row counts are not negative and add up to the file's row count;
//! - each column chunk lies inside the file, before the footer; its pages,
//!   walked one header at a time, fill it exactly; their value counts add
//!   up to the chunk's, which for a column that does not repeat is the row
//!   group's row count;
//! - no page claims to decompress to more than [`MAX_RATIO`] bytes per
//!   stored byte (an uncompressed page to other than its stored size), and
//!   no page claims more values than [`MAX_VALUES_PER_BYTE`] per byte of
//!   its decompressed content.
//!
//! The structures and field numbers are those of the Apache Parquet format
//! specification (`parquet.thrift`, parquet-format 2.x) and the Thrift
//! compact protocol specification; the bounds are this module's own (see
//! each constant). Every error names the file, the row group and the column.

use std::io::{Read, Seek, SeekFrom};
use std::path::Path;

use crate::error::{Error, Location, Result};

/// The largest decompressed size accepted per stored (compressed) byte of a
/// page. The Zstandard format (RFC 8878) reaches about 32,768: an RLE block
/// is a 3-byte header and one byte for up to 128 KiB. Deflate stops near
/// 1,032 (RFC 1951: 258 bytes per copy of at least 2 bits), Snappy and LZ4
/// lower. 65,536 is above all of them.
pub const MAX_RATIO: u64 = 1 << 16;

/// The most values a data page may claim per byte of its decompressed
/// content (at least one byte counted). A run of N missing values takes a
/// few bytes whatever N (RLE definition levels), so real pages can hold far
/// more values than bytes; writers cut pages at some 20,000 rows to 1 Mi
/// rows, a few bytes each. 2^20 per byte is far above that and far below
/// the counts that make a decoder's allocation fail.
pub const MAX_VALUES_PER_BYTE: u64 = 1 << 20;

/// Nesting deeper than this in the footer is refused (real footers nest a
/// handful of levels; a deep one would exhaust the stack of a recursive
/// reader).
const MAX_DEPTH: u32 = 64;

/// Checks a Parquet file held in memory.
pub fn check_bytes(path: &Path, bytes: &[u8]) -> Result<()> {
    check(path, &mut SliceSource(bytes))
}

/// Checks a Parquet file on disk, reading only its footer and page headers.
pub fn check_file(path: &Path) -> Result<()> {
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, "cannot open input", e))?;
    let len = file
        .metadata()
        .map_err(|e| Error::io(path, "cannot read", e))?
        .len();
    check(path, &mut FileSource { file, len })
}

// ---------------------------------------------------------------------------
// Where the bytes come from
// ---------------------------------------------------------------------------

trait Source {
    fn len(&self) -> u64;
    /// `len` bytes at `offset` (the caller keeps within `self.len()`).
    fn read_at(&mut self, offset: u64, len: usize) -> std::io::Result<Vec<u8>>;
}

struct SliceSource<'a>(&'a [u8]);

impl Source for SliceSource<'_> {
    fn len(&self) -> u64 {
        self.0.len() as u64
    }
    fn read_at(&mut self, offset: u64, len: usize) -> std::io::Result<Vec<u8>> {
        let start = offset as usize;
        Ok(self.0[start..start + len].to_vec())
    }
}

struct FileSource {
    file: std::fs::File,
    len: u64,
}

impl Source for FileSource {
    fn len(&self) -> u64 {
        self.len
    }
    fn read_at(&mut self, offset: u64, len: usize) -> std::io::Result<Vec<u8>> {
        self.file.seek(SeekFrom::Start(offset))?;
        let mut buf = vec![0; len];
        self.file.read_exact(&mut buf)?;
        Ok(buf)
    }
}

// ---------------------------------------------------------------------------
// Thrift compact protocol: just enough to walk the footer and page headers
// ---------------------------------------------------------------------------

/// Why a Thrift structure could not be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Fault {
    /// The bytes end inside the structure.
    Short,
    /// A value no writer produces (an unknown type, a varint too long, a
    /// length past the end, nesting too deep, a field of the wrong type).
    Bad(&'static str),
}

type Parse<T> = std::result::Result<T, Fault>;

// Compact protocol type codes.
const T_TRUE: u8 = 1;
const T_FALSE: u8 = 2;
const T_BYTE: u8 = 3;
const T_I16: u8 = 4;
const T_I32: u8 = 5;
const T_I64: u8 = 6;
const T_DOUBLE: u8 = 7;
const T_BINARY: u8 = 8;
const T_LIST: u8 = 9;
const T_SET: u8 = 10;
const T_MAP: u8 = 11;
const T_STRUCT: u8 = 12;

struct Compact<'a> {
    b: &'a [u8],
    p: usize,
    depth: u32,
}

impl<'a> Compact<'a> {
    fn new(b: &'a [u8]) -> Self {
        Compact { b, p: 0, depth: 0 }
    }

    fn remaining(&self) -> usize {
        self.b.len() - self.p
    }

    fn byte(&mut self) -> Parse<u8> {
        let v = *self.b.get(self.p).ok_or(Fault::Short)?;
        self.p += 1;
        Ok(v)
    }

    fn varint(&mut self) -> Parse<u64> {
        let mut v = 0u64;
        for i in 0..10 {
            let b = self.byte()?;
            v |= u64::from(b & 0x7f) << (7 * i);
            if b & 0x80 == 0 {
                return Ok(v);
            }
        }
        Err(Fault::Bad("a number longer than ten bytes"))
    }

    fn zigzag(&mut self) -> Parse<i64> {
        let v = self.varint()?;
        Ok((v >> 1) as i64 ^ -((v & 1) as i64))
    }

    fn take(&mut self, n: usize) -> Parse<&'a [u8]> {
        if n > self.remaining() {
            return Err(Fault::Short);
        }
        let s = &self.b[self.p..self.p + n];
        self.p += n;
        Ok(s)
    }

    fn binary(&mut self) -> Parse<&'a [u8]> {
        let n = self.varint()?;
        let n = usize::try_from(n).map_err(|_| Fault::Short)?;
        self.take(n)
    }

    /// A list or set header: element count (each element takes at least
    /// one byte, so a count above the bytes left is refused) and type.
    fn list_header(&mut self) -> Parse<(usize, u8)> {
        let h = self.byte()?;
        let ty = h & 0x0f;
        let n = if h >> 4 == 15 {
            usize::try_from(self.varint()?).map_err(|_| Fault::Short)?
        } else {
            usize::from(h >> 4)
        };
        if n > self.remaining() {
            return Err(Fault::Short);
        }
        Ok((n, ty))
    }

    fn enter(&mut self) -> Parse<()> {
        self.depth += 1;
        if self.depth > MAX_DEPTH {
            return Err(Fault::Bad("structures nested too deep"));
        }
        Ok(())
    }

    /// Skips one value of compact type `ty`.
    fn skip(&mut self, ty: u8) -> Parse<()> {
        match ty {
            T_TRUE | T_FALSE => Ok(()),
            T_BYTE => self.byte().map(|_| ()),
            T_I16 | T_I32 | T_I64 => self.varint().map(|_| ()),
            T_DOUBLE => self.take(8).map(|_| ()),
            T_BINARY => self.binary().map(|_| ()),
            T_LIST | T_SET => {
                let (n, et) = self.list_header()?;
                self.enter()?;
                for _ in 0..n {
                    // A boolean element is one byte inside a list.
                    if et == T_TRUE || et == T_FALSE {
                        self.byte()?;
                    } else {
                        self.skip(et)?;
                    }
                }
                self.depth -= 1;
                Ok(())
            }
            T_MAP => {
                let n = usize::try_from(self.varint()?).map_err(|_| Fault::Short)?;
                if n == 0 {
                    return Ok(());
                }
                if n > self.remaining() {
                    return Err(Fault::Short);
                }
                let kv = self.byte()?;
                self.enter()?;
                for _ in 0..n {
                    for t in [kv >> 4, kv & 0x0f] {
                        if t == T_TRUE || t == T_FALSE {
                            self.byte()?;
                        } else {
                            self.skip(t)?;
                        }
                    }
                }
                self.depth -= 1;
                Ok(())
            }
            T_STRUCT => self.fields(|_, _, _| Ok(false)),
            _ => Err(Fault::Bad("a value of unknown type")),
        }
    }

    /// Reads a struct's fields up to its stop byte. `each(reader, id, ty)`
    /// reads the field and returns true, or returns false to skip it.
    fn fields(&mut self, mut each: impl FnMut(&mut Self, i16, u8) -> Parse<bool>) -> Parse<()> {
        self.enter()?;
        let mut last: i16 = 0;
        loop {
            let h = self.byte()?;
            if h == 0 {
                break;
            }
            let ty = h & 0x0f;
            let delta = h >> 4;
            let id = if delta == 0 {
                i16::try_from(self.zigzag()?)
                    .map_err(|_| Fault::Bad("a field number out of range"))?
            } else {
                last.checked_add(i16::from(delta))
                    .ok_or(Fault::Bad("a field number out of range"))?
            };
            last = id;
            if !each(self, id, ty)? {
                self.skip(ty)?;
            }
        }
        self.depth -= 1;
        Ok(())
    }

    fn i32_of(&mut self, ty: u8) -> Parse<i64> {
        match ty {
            T_BYTE => Ok(i64::from(self.byte()? as i8)),
            T_I16 | T_I32 => {
                let v = self.zigzag()?;
                if i32::try_from(v).is_err() {
                    return Err(Fault::Bad("a 32-bit number out of range"));
                }
                Ok(v)
            }
            _ => Err(Fault::Bad("a field of the wrong type")),
        }
    }

    fn i64_of(&mut self, ty: u8) -> Parse<i64> {
        match ty {
            T_BYTE | T_I16 | T_I32 => self.i32_of(ty),
            T_I64 => self.zigzag(),
            _ => Err(Fault::Bad("a field of the wrong type")),
        }
    }

    fn bool_of(&mut self, ty: u8) -> Parse<bool> {
        match ty {
            T_TRUE => Ok(true),
            T_FALSE => Ok(false),
            _ => Err(Fault::Bad("a field of the wrong type")),
        }
    }

    fn text_of(&mut self, ty: u8) -> Parse<String> {
        if ty != T_BINARY {
            return Err(Fault::Bad("a field of the wrong type"));
        }
        Ok(String::from_utf8_lossy(self.binary()?).into_owned())
    }

    /// Reads a list of structs, calling `each` on every element.
    fn list_of_structs(
        &mut self,
        ty: u8,
        mut each: impl FnMut(&mut Self) -> Parse<()>,
    ) -> Parse<()> {
        if ty != T_LIST && ty != T_SET {
            return Err(Fault::Bad("a field of the wrong type"));
        }
        let (n, et) = self.list_header()?;
        if n > 0 && et != T_STRUCT {
            return Err(Fault::Bad("a list of the wrong type"));
        }
        for _ in 0..n {
            each(self)?;
        }
        Ok(())
    }

    fn list_of_text(&mut self, ty: u8) -> Parse<Vec<String>> {
        if ty != T_LIST && ty != T_SET {
            return Err(Fault::Bad("a field of the wrong type"));
        }
        let (n, et) = self.list_header()?;
        if n > 0 && et != T_BINARY {
            return Err(Fault::Bad("a list of the wrong type"));
        }
        let mut out = Vec::new();
        for _ in 0..n {
            out.push(String::from_utf8_lossy(self.binary()?).into_owned());
        }
        Ok(out)
    }
}

// ---------------------------------------------------------------------------
// The parts of the footer that are checked
// ---------------------------------------------------------------------------

#[derive(Debug, Default)]
struct SchemaElement {
    name: String,
    /// 0 required, 1 optional, 2 repeated.
    repetition: Option<i64>,
    num_children: Option<i64>,
}

#[derive(Debug, Default)]
struct ColumnMeta {
    physical_type: Option<i64>,
    path: Vec<String>,
    codec: Option<i64>,
    num_values: Option<i64>,
    total_uncompressed: Option<i64>,
    total_compressed: Option<i64>,
    data_page_offset: Option<i64>,
    dictionary_page_offset: Option<i64>,
}

#[derive(Debug, Default)]
struct ColumnChunk {
    file_path: Option<String>,
    meta: Option<ColumnMeta>,
}

#[derive(Debug, Default)]
struct RowGroup {
    columns: Vec<ColumnChunk>,
    num_rows: Option<i64>,
}

#[derive(Debug, Default)]
struct FileMeta {
    schema: Vec<SchemaElement>,
    num_rows: Option<i64>,
    row_groups: Vec<RowGroup>,
    encrypted: bool,
}

fn read_file_meta(c: &mut Compact) -> Parse<FileMeta> {
    let mut m = FileMeta::default();
    c.fields(|c, id, ty| {
        match id {
            2 => c.list_of_structs(ty, |c| {
                let mut e = SchemaElement::default();
                c.fields(|c, id, ty| {
                    match id {
                        3 => {
                            let r = c.i32_of(ty)?;
                            if !(0..=2).contains(&r) {
                                return Err(Fault::Bad("an unknown repetition"));
                            }
                            e.repetition = Some(r);
                        }
                        4 => e.name = c.text_of(ty)?,
                        5 => e.num_children = Some(c.i32_of(ty)?),
                        _ => return Ok(false),
                    }
                    Ok(true)
                })?;
                m.schema.push(e);
                Ok(())
            })?,
            3 => m.num_rows = Some(c.i64_of(ty)?),
            4 => c.list_of_structs(ty, |c| {
                let mut g = RowGroup::default();
                c.fields(|c, id, ty| {
                    match id {
                        1 => c.list_of_structs(ty, |c| {
                            g.columns.push(read_column_chunk(c)?);
                            Ok(())
                        })?,
                        3 => g.num_rows = Some(c.i64_of(ty)?),
                        _ => return Ok(false),
                    }
                    Ok(true)
                })?;
                m.row_groups.push(g);
                Ok(())
            })?,
            8 => {
                m.encrypted = true;
                return Ok(false);
            }
            _ => return Ok(false),
        }
        Ok(true)
    })?;
    Ok(m)
}

fn read_column_chunk(c: &mut Compact) -> Parse<ColumnChunk> {
    let mut chunk = ColumnChunk::default();
    c.fields(|c, id, ty| {
        match id {
            1 => chunk.file_path = Some(c.text_of(ty)?),
            3 => {
                if ty != T_STRUCT {
                    return Err(Fault::Bad("a field of the wrong type"));
                }
                let mut m = ColumnMeta::default();
                c.fields(|c, id, ty| {
                    match id {
                        1 => m.physical_type = Some(c.i32_of(ty)?),
                        3 => m.path = c.list_of_text(ty)?,
                        4 => m.codec = Some(c.i32_of(ty)?),
                        5 => m.num_values = Some(c.i64_of(ty)?),
                        6 => m.total_uncompressed = Some(c.i64_of(ty)?),
                        7 => m.total_compressed = Some(c.i64_of(ty)?),
                        2 => {
                            if ty != T_LIST && ty != T_SET {
                                return Err(Fault::Bad("a field of the wrong type"));
                            }
                            let (n, et) = c.list_header()?;
                            for _ in 0..n {
                                encoding(c.i32_of(et)?)?;
                            }
                        }
                        9 => m.data_page_offset = Some(c.i64_of(ty)?),
                        11 => m.dictionary_page_offset = Some(c.i64_of(ty)?),
                        12 => statistics(c, ty)?,
                        _ => return Ok(false),
                    }
                    Ok(true)
                })?;
                chunk.meta = Some(m);
            }
            _ => return Ok(false),
        }
        Ok(true)
    })?;
    Ok(chunk)
}

#[derive(Debug, Default)]
struct PageHeader {
    /// 0 data, 1 index, 2 dictionary, 3 data (v2).
    page_type: Option<i64>,
    uncompressed: Option<i64>,
    compressed: Option<i64>,
    num_values: Option<i64>,
    /// Data page v2 only.
    num_nulls: Option<i64>,
    num_rows: Option<i64>,
    levels_bytes: i64,
    is_compressed: bool,
}

fn read_page_header(c: &mut Compact) -> Parse<PageHeader> {
    let mut h = PageHeader {
        is_compressed: true,
        ..PageHeader::default()
    };
    c.fields(|c, id, ty| {
        match id {
            1 => h.page_type = Some(c.i32_of(ty)?),
            2 => h.uncompressed = Some(c.i32_of(ty)?),
            3 => h.compressed = Some(c.i32_of(ty)?),
            // Data page (v1): values, encodings of values and levels,
            // statistics. Dictionary page: values, encoding.
            5 | 7 => {
                if ty != T_STRUCT {
                    return Err(Fault::Bad("a field of the wrong type"));
                }
                let data_page = id == 5;
                c.fields(|c, id, ty| {
                    match id {
                        1 => h.num_values = Some(c.i32_of(ty)?),
                        2 => encoding(c.i32_of(ty)?)?,
                        3 | 4 if data_page => encoding(c.i32_of(ty)?)?,
                        5 if data_page => statistics(c, ty)?,
                        _ => return Ok(false),
                    }
                    Ok(true)
                })?;
            }
            8 => {
                if ty != T_STRUCT {
                    return Err(Fault::Bad("a field of the wrong type"));
                }
                c.fields(|c, id, ty| {
                    match id {
                        1 => h.num_values = Some(c.i32_of(ty)?),
                        2 => h.num_nulls = Some(c.i32_of(ty)?),
                        3 => h.num_rows = Some(c.i32_of(ty)?),
                        5 | 6 => {
                            let v = c.i32_of(ty)?;
                            if v < 0 {
                                return Err(Fault::Bad("a negative level length"));
                            }
                            h.levels_bytes += v;
                        }
                        4 => encoding(c.i32_of(ty)?)?,
                        7 => h.is_compressed = c.bool_of(ty)?,
                        8 => statistics(c, ty)?,
                        _ => return Ok(false),
                    }
                    Ok(true)
                })?;
            }
            _ => return Ok(false),
        }
        Ok(true)
    })?;
    Ok(h)
}

/// An encoding of the format's `Encoding` enum that a page may name:
/// PLAIN (0), PLAIN_DICTIONARY (2), RLE (3), BIT_PACKED (4),
/// DELTA_BINARY_PACKED (5), DELTA_LENGTH_BYTE_ARRAY (6), DELTA_BYTE_ARRAY
/// (7), RLE_DICTIONARY (8), BYTE_STREAM_SPLIT (9). Value 1 was never used.
fn encoding(value: i64) -> Parse<()> {
    match value {
        0 | 2..=9 => Ok(()),
        _ => Err(Fault::Bad("an unknown encoding")),
    }
}

/// A `Statistics` struct: skipped, except that its fields 7 and 8
/// (`is_max_value_exact`, `is_min_value_exact`) must be booleans.
fn statistics(c: &mut Compact, ty: u8) -> Parse<()> {
    if ty != T_STRUCT {
        return Err(Fault::Bad("a field of the wrong type"));
    }
    c.fields(|c, id, ty| match id {
        7 | 8 => c.bool_of(ty).map(|_| true),
        _ => Ok(false),
    })
}

// ---------------------------------------------------------------------------
// The checks
// ---------------------------------------------------------------------------

/// A leaf of the schema: its dotted name and whether any level repeats.
struct Leaf {
    name: String,
    repeated: bool,
}

fn damaged(path: &Path, what: impl std::fmt::Display) -> Error {
    Error::input(
        Location::file(path),
        format!(
            "cannot read as Parquet: {what}; the file is damaged or was not written completely"
        ),
    )
}

fn at_chunk(path: &Path, group: usize, column: &str) -> Location {
    Location {
        path: path.to_path_buf(),
        line: Some(group as u64 + 1),
        column: Some(column.to_string()),
        unit: Some("row group"),
    }
}

fn fault_text(f: Fault) -> &'static str {
    match f {
        Fault::Short => "it ends early",
        Fault::Bad(what) => what,
    }
}

fn check(path: &Path, src: &mut dyn Source) -> Result<()> {
    let len = src.len();
    let io = |e| Error::io(path, "cannot read", e);
    if len < 12 {
        return Err(damaged(
            path,
            format!("the file is {len} bytes, shorter than any Parquet file"),
        ));
    }
    let head = src.read_at(0, 4).map_err(io)?;
    let tail = src.read_at(len - 8, 8).map_err(io)?;
    if &tail[4..] == b"PARE" {
        return Err(Error::input(
            Location::file(path),
            "the Parquet file is encrypted; regionkey reads only unencrypted Parquet",
        ));
    }
    if head != b"PAR1" || &tail[4..] != b"PAR1" {
        return Err(damaged(
            path,
            "the file does not begin and end with the Parquet marker PAR1",
        ));
    }
    let meta_len = u64::from(u32::from_le_bytes([tail[0], tail[1], tail[2], tail[3]]));
    if meta_len > len - 12 {
        return Err(damaged(
            path,
            format!("the footer claims {meta_len} bytes in a file of {len}"),
        ));
    }
    let data_end = len - 8 - meta_len;
    let footer = src.read_at(data_end, meta_len as usize).map_err(io)?;
    let meta = read_file_meta(&mut Compact::new(&footer)).map_err(|f| {
        damaged(
            path,
            format!("its footer cannot be read ({})", fault_text(f)),
        )
    })?;
    if meta.encrypted {
        return Err(Error::input(
            Location::file(path),
            "the Parquet file is encrypted; regionkey reads only unencrypted Parquet",
        ));
    }
    let leaves = schema_leaves(path, &meta.schema)?;
    let file_rows = meta
        .num_rows
        .ok_or_else(|| damaged(path, "the footer gives no row count"))?;
    if file_rows < 0 {
        return Err(damaged(path, format!("the footer claims {file_rows} rows")));
    }
    let mut rows_seen: i64 = 0;
    let mut values_seen: u64 = 0;
    for (g, group) in meta.row_groups.iter().enumerate() {
        let rows = group.num_rows.unwrap_or(-1);
        let at_group = || Location {
            path: path.to_path_buf(),
            line: Some(g as u64 + 1),
            column: None,
            unit: Some("row group"),
        };
        if rows < 0 {
            return Err(Error::input(
                at_group(),
                format!(
                    "cannot read as Parquet: the row group claims {rows} rows; the file is damaged"
                ),
            ));
        }
        rows_seen = rows_seen.checked_add(rows).ok_or_else(|| {
            Error::input(
                at_group(),
                "cannot read as Parquet: row counts overflow; the file is damaged",
            )
        })?;
        if group.columns.len() != leaves.len() {
            return Err(Error::input(
                at_group(),
                format!(
                    "cannot read as Parquet: the row group has {} columns where the schema has {}; \
                     the file is damaged",
                    group.columns.len(),
                    leaves.len()
                ),
            ));
        }
        for (chunk, leaf) in group.columns.iter().zip(&leaves) {
            values_seen =
                values_seen.saturating_add(check_chunk(path, src, g, rows, chunk, leaf, data_end)?);
        }
    }
    if rows_seen != file_rows {
        return Err(damaged(
            path,
            format!("the footer claims {file_rows} rows but its row groups hold {rows_seen}"),
        ));
    }
    // However consistent the counts, a file cannot hold more values than
    // its pages could describe.
    if values_seen > len.saturating_mul(MAX_VALUES_PER_BYTE) {
        return Err(damaged(
            path,
            format!("it claims {values_seen} values in {len} bytes"),
        ));
    }
    Ok(())
}

/// The leaves of the schema tree (the columns), in order.
fn schema_leaves(path: &Path, schema: &[SchemaElement]) -> Result<Vec<Leaf>> {
    let bad = |what: String| damaged(path, format!("its schema {what}"));
    let Some(root) = schema.first() else {
        return Err(bad("is empty".into()));
    };
    let mut leaves = Vec::new();
    // (children left, name prefix, repeated above) for each open group.
    let mut open: Vec<(i64, String, bool)> =
        vec![(root.num_children.unwrap_or(0), String::new(), false)];
    if open[0].0 < 0 {
        return Err(bad(format!("claims {} columns", open[0].0)));
    }
    let mut i = 1;
    while let Some(top) = open.last_mut() {
        if top.0 == 0 {
            open.pop();
            continue;
        }
        top.0 -= 1;
        let (prefix, repeated) = (top.1.clone(), top.2);
        let Some(e) = schema.get(i) else {
            return Err(bad(format!(
                "claims more entries than the {} it holds",
                schema.len()
            )));
        };
        i += 1;
        let name = if prefix.is_empty() {
            e.name.clone()
        } else {
            format!("{prefix}.{}", e.name)
        };
        let repeated = repeated || e.repetition == Some(2);
        match e.num_children {
            Some(n) if n < 0 => return Err(bad(format!("gives {name:?} {n} children"))),
            Some(n) if n > 0 => {
                if open.len() as u32 >= MAX_DEPTH {
                    return Err(bad("is nested too deep".into()));
                }
                open.push((n, name, repeated));
            }
            _ => leaves.push(Leaf { name, repeated }),
        }
    }
    if i != schema.len() {
        return Err(bad(format!(
            "holds {} entries where its tree has {i}",
            schema.len()
        )));
    }
    Ok(leaves)
}

/// Checks one column chunk and its pages; returns its value count.
#[allow(clippy::too_many_arguments)]
fn check_chunk(
    path: &Path,
    src: &mut dyn Source,
    group: usize,
    rows: i64,
    chunk: &ColumnChunk,
    leaf: &Leaf,
    data_end: u64,
) -> Result<u64> {
    let loc = || at_chunk(path, group, &leaf.name);
    let refuse = |what: String| {
        Error::input(
            loc(),
            format!(
                "cannot read as Parquet: {what}; the file is damaged or was not written completely"
            ),
        )
    };
    if chunk.file_path.is_some() {
        return Err(Error::input(
            loc(),
            "the column's data is kept in another file; regionkey reads only self-contained Parquet files",
        ));
    }
    let Some(m) = &chunk.meta else {
        return Err(refuse("the column has no description".into()));
    };
    let named = m.path.join(".");
    if named != leaf.name {
        return Err(refuse(format!(
            "the column chunk names {named:?} where the schema has {:?}",
            leaf.name
        )));
    }
    if !matches!(m.physical_type, Some(0..=7)) {
        return Err(refuse(format!("unknown value type {:?}", m.physical_type)));
    }
    let codec = match m.codec {
        Some(c @ 0..=7) => c,
        other => return Err(refuse(format!("unknown compression {other:?}"))),
    };
    let num_values = m.num_values.unwrap_or(-1);
    if num_values < 0 {
        return Err(refuse(format!("the column claims {num_values} values")));
    }
    // A column that does not repeat has one value (or missing value) per
    // row; one that repeats has at least one entry per row.
    if (!leaf.repeated && num_values != rows) || (leaf.repeated && num_values < rows) {
        return Err(refuse(format!(
            "the column claims {num_values} values in a row group of {rows} rows"
        )));
    }
    let compressed = m.total_compressed.unwrap_or(-1);
    let uncompressed = m.total_uncompressed.unwrap_or(-1);
    if compressed < 0 || uncompressed < 0 {
        return Err(refuse(format!(
            "the column claims {compressed} bytes stored and {uncompressed} decompressed"
        )));
    }
    let (compressed, uncompressed) = (compressed as u64, uncompressed as u64);
    if uncompressed > compressed.saturating_mul(MAX_RATIO) {
        return Err(refuse(format!(
            "the column claims {uncompressed} bytes decompressed from {compressed} stored \
             (more than {MAX_RATIO} to 1)"
        )));
    }
    let data_offset = m.data_page_offset.unwrap_or(-1);
    let start = match m.dictionary_page_offset {
        Some(d) if d >= 4 && d < data_offset => d,
        _ => data_offset,
    };
    if start < 4 {
        return Err(refuse(format!(
            "the column's pages start at byte {data_offset}"
        )));
    }
    let start = start as u64;
    let end = start.saturating_add(compressed);
    if end > data_end {
        return Err(refuse(format!(
            "the column claims bytes {start} to {end}, past the end of the data at byte {data_end}"
        )));
    }
    let mut pos = start;
    let mut values: u64 = 0;
    let mut data_pages = 0u64;
    let mut seen_dictionary = false;
    while pos < end {
        let (h, header_len) = read_header_at(src, pos, end).map_err(|e| match e {
            HeaderError::Io(e) => Error::io(path, "cannot read", e),
            HeaderError::Fault(f) => refuse(format!(
                "the page header at byte {pos} cannot be read ({})",
                fault_text(f)
            )),
        })?;
        let at = |what: String| refuse(format!("the page at byte {pos} {what}"));
        let (Some(ty), Some(u), Some(c)) = (h.page_type, h.uncompressed, h.compressed) else {
            return Err(at("gives no type or size".into()));
        };
        if u < 0 || c < 0 {
            return Err(at(format!("claims {c} bytes stored and {u} decompressed")));
        }
        let (u, c) = (u as u64, c as u64);
        let body = pos + header_len as u64;
        if body + c > end {
            return Err(at(format!(
                "claims {c} bytes, past the end of the column at byte {end}"
            )));
        }
        let stored_plain = codec == 0 || (ty == 3 && !h.is_compressed);
        if stored_plain && u != c {
            return Err(at(format!(
                "is not compressed yet claims {u} bytes from {c} stored"
            )));
        }
        if u > c.saturating_mul(MAX_RATIO) {
            return Err(at(format!(
                "claims {u} bytes decompressed from {c} stored (more than {MAX_RATIO} to 1)"
            )));
        }
        let n = h.num_values.unwrap_or(-1);
        match ty {
            0 | 3 => {
                if n < 0 {
                    return Err(at(format!("claims {n} values")));
                }
                let n = n as u64;
                if n > u.max(1).saturating_mul(MAX_VALUES_PER_BYTE) {
                    return Err(at(format!("claims {n} values in {u} bytes")));
                }
                if ty == 3 {
                    let nulls = h.num_nulls.unwrap_or(-1);
                    let page_rows = h.num_rows.unwrap_or(-1);
                    if nulls < 0 || nulls as u64 > n || page_rows < 0 || page_rows as u64 > n {
                        return Err(at(format!(
                            "claims {n} values, {nulls} of them missing, in {page_rows} rows"
                        )));
                    }
                    if h.levels_bytes as u64 > c.min(u) {
                        return Err(at(format!(
                            "claims {} bytes of levels in {c} bytes",
                            h.levels_bytes
                        )));
                    }
                }
                values = values.saturating_add(n);
                data_pages += 1;
            }
            2 => {
                if seen_dictionary || data_pages > 0 {
                    return Err(at("is a second dictionary, or one after the data".into()));
                }
                seen_dictionary = true;
                // Dictionary entries are stored plain: at least one bit each.
                if n < 0 || n as u64 > u.saturating_mul(8) {
                    return Err(at(format!(
                        "claims a dictionary of {n} values in {u} bytes"
                    )));
                }
            }
            1 => return Err(at("is an index page, which no reader uses".into())),
            other => return Err(at(format!("is of unknown type {other}"))),
        }
        pos = body + c;
    }
    if values != num_values as u64 {
        return Err(refuse(format!(
            "the column claims {num_values} values but its pages hold {values}"
        )));
    }
    Ok(values)
}

enum HeaderError {
    Io(std::io::Error),
    Fault(Fault),
}

/// Reads the page header at `pos` (it cannot reach past `end`), growing the
/// window read until the header fits. Returns it and its length in bytes.
fn read_header_at(
    src: &mut dyn Source,
    pos: u64,
    end: u64,
) -> std::result::Result<(PageHeader, usize), HeaderError> {
    let limit = end - pos;
    let mut window: u64 = 256;
    loop {
        let n = window.min(limit);
        let bytes = src.read_at(pos, n as usize).map_err(HeaderError::Io)?;
        let mut c = Compact::new(&bytes);
        match read_page_header(&mut c) {
            Ok(h) => return Ok((h, c.p)),
            Err(Fault::Short) if n < limit => window = window.saturating_mul(4),
            Err(f) => return Err(HeaderError::Fault(f)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn compact_i32(v: i32) -> Vec<u8> {
        let mut z = ((v << 1) ^ (v >> 31)) as u32;
        let mut out = Vec::new();
        loop {
            let b = (z & 0x7f) as u8;
            z >>= 7;
            if z == 0 {
                out.push(b);
                return out;
            }
            out.push(b | 0x80);
        }
    }

    // Thrift compact protocol specification: field header byte = delta << 4
    // | type; i32 as zigzag varint; a struct ends with a 0 byte.
    #[test]
    fn a_page_header_written_by_hand_is_read_back() {
        let mut b = vec![0x15]; // field 1, i32: type
        b.extend(compact_i32(0));
        b.push(0x15); // field 2: uncompressed size
        b.extend(compact_i32(300));
        b.push(0x15); // field 3: compressed size
        b.extend(compact_i32(120));
        b.push(0x2c); // field 5, struct: data page header
        b.push(0x15); // its field 1: num_values
        b.extend(compact_i32(-23));
        b.push(0);
        b.push(0);
        let mut c = Compact::new(&b);
        let h = read_page_header(&mut c).unwrap();
        assert_eq!(c.p, b.len());
        assert_eq!(h.page_type, Some(0));
        assert_eq!(h.uncompressed, Some(300));
        assert_eq!(h.compressed, Some(120));
        assert_eq!(h.num_values, Some(-23));
    }

    #[test]
    fn a_list_longer_than_the_bytes_left_is_refused_before_reading() {
        // A list header claiming 2^31 elements of i32, then nothing.
        let b = [0xf5, 0x80, 0x80, 0x80, 0x80, 0x08];
        let mut c = Compact::new(&b);
        assert_eq!(c.skip(T_LIST), Err(Fault::Short));
    }

    #[test]
    fn deeply_nested_structures_are_refused_without_exhausting_the_stack() {
        // Field 1 of type struct, 100,000 times.
        let b = vec![0x1c; 100_000];
        let mut c = Compact::new(&b);
        assert_eq!(
            c.skip(T_STRUCT),
            Err(Fault::Bad("structures nested too deep"))
        );
    }

    #[test]
    fn a_file_shorter_than_its_markers_is_refused_naming_it() {
        let e = check_bytes(Path::new("x.parquet"), b"PAR1PAR1").unwrap_err();
        assert!(e.to_string().starts_with("x.parquet: "), "{e}");
    }
}

//! ESRI Shapefiles: the .shp with its .dbf, .prj and .cpg beside it (and its
//! .shx, checked when present), or all of them inside a .zip (read in
//! memory, nothing extracted to disk).
//!
//! The readers here are written by hand against the formats' published
//! descriptions: the *ESRI Shapefile Technical Description* (ESRI white
//! paper, July 1998) for the .shp and .shx, and the dBase III file structure
//! (header, 32-byte field descriptors ended by 0x0D, fixed-length records
//! each opening with a deletion flag) for the .dbf. Every count and offset
//! read from a file is checked against the bytes that are really there
//! before it is used, and nothing is allocated from an unchecked size, so a
//! damaged file ends in an error naming the file, the record and the field,
//! never in a crash or a huge allocation.

use std::io::{Cursor, Read};
use std::path::{Path, PathBuf};

use geo::Coord;

use super::{check_coord, lonlat_ok, resolve_keys, Layer, LayerRequest};
use crate::core::overlay::{RawFeature, Ring, RingConvention};
use crate::error::{Error, Location, Result};

/// The largest member of a zip that is read (4 GiB): a declared size above
/// it is refused before anything is allocated.
const MAX_ZIP_MEMBER: u64 = 1 << 32;

/// One file of a Shapefile, as bytes, with the name messages use.
struct Part {
    path: PathBuf,
    bytes: Vec<u8>,
}

/// The files that make one Shapefile.
struct Parts {
    shp: Part,
    shx: Option<Part>,
    dbf: Part,
    prj: Option<Part>,
    cpg: Option<Part>,
}

/// Reads a `.shp` (with its companions) or a `.zip` holding one Shapefile.
///
/// A panic in this reader would be a bug; as a last guard it is turned into
/// an error naming the file rather than ending the program.
pub fn read(path: &Path, req: &LayerRequest) -> Result<Layer> {
    super::guarded(path, || read_unguarded(path, req))
}

/// Reads a Shapefile held in memory: the bytes of its .shp, .shx (if any)
/// and .dbf; `path` names the .shp in messages (the others are named by
/// its stem with their extensions). Used where the files are not on disk
/// (fuzzing, embedded layers).
pub fn read_bytes(
    path: &Path,
    shp: Vec<u8>,
    shx: Option<Vec<u8>>,
    dbf: Vec<u8>,
    req: &LayerRequest,
) -> Result<Layer> {
    let part = |ext: &str, bytes: Vec<u8>| Part {
        path: path.with_extension(ext),
        bytes,
    };
    let parts = Parts {
        shp: part("shp", shp),
        shx: shx.map(|b| part("shx", b)),
        dbf: part("dbf", dbf),
        prj: None,
        cpg: None,
    };
    super::guarded(path, || from_parts(path, parts, req))
}

fn read_unguarded(path: &Path, req: &LayerRequest) -> Result<Layer> {
    let parts = if path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("zip"))
    {
        from_zip(path)?
    } else {
        from_files(path)?
    };
    from_parts(path, parts, req)
}

fn from_parts(path: &Path, parts: Parts, req: &LayerRequest) -> Result<Layer> {
    if let Some(prj) = &parts.prj {
        let text = String::from_utf8_lossy(&prj.bytes);
        if text.trim_start().to_uppercase().starts_with("PROJCS") || text.contains("PROJCRS") {
            let name = text.split('"').nth(1).unwrap_or("unnamed");
            return Err(Error::input(
                Location::file(path).in_column(".prj"),
                format!(
                    "the layer is projected ({name}); only longitude/latitude (NAD83 or WGS84) is \
                     read: reproject it first"
                ),
            ));
        }
    }
    let sha256 = super::sha256_hex(&[
        &parts.shp.bytes,
        &parts.dbf.bytes,
        parts.prj.as_ref().map_or(&[][..], |p| &p.bytes[..]),
    ]);
    let shapes = read_shp(&parts.shp)?;
    if let Some(shx) = &parts.shx {
        check_shx(shx, &parts.shp, &shapes)?;
    }
    let utf8 = parts.cpg.as_ref().is_none_or(|c| {
        let c = String::from_utf8_lossy(&c.bytes).trim().to_uppercase();
        c.is_empty() || c.contains("UTF") || c == "65001"
    });
    let table = read_dbf(&parts.dbf, utf8)?;
    if table.records.len() != shapes.len() {
        return Err(Error::input(
            Location::file(&parts.shp.path),
            format!(
                "the .shp has {} shapes but the .dbf ({}) has {} records; each shape needs its \
                 record: the files are damaged or come from different saves",
                shapes.len(),
                parts.dbf.path.display(),
                table.records.len()
            ),
        ));
    }
    let mut warnings = Vec::new();
    let deleted: Vec<u64> = table
        .records
        .iter()
        .enumerate()
        .filter(|(_, r)| r.deleted)
        .map(|(i, _)| i as u64 + 1)
        .collect();
    if !deleted.is_empty() {
        warnings.push(format!(
            "{}: {} record(s) marked deleted in the .dbf are left out with their shapes: record(s) {}",
            parts.dbf.path.display(),
            deleted.len(),
            numbers(&deleted)
        ));
    }
    // Kept records, numbered by their record number in the files.
    let kept: Vec<usize> = (0..shapes.len())
        .filter(|&i| !table.records[i].deleted)
        .collect();
    let ids = vec![None; kept.len()];
    let numbers_kept: Vec<u64> = kept.iter().map(|&i| i as u64 + 1).collect();
    // The key field's text for each kept record; a value that cannot be read
    // is an error naming the record and the field.
    let key_field = req
        .key
        .as_ref()
        .and_then(|k| table.fields.iter().position(|f| &f.name == k));
    let key_values: Vec<Option<String>> = match key_field {
        Some(k) => kept
            .iter()
            .map(|&i| key_value(&parts.dbf.path, i as u64 + 1, &table, k))
            .collect::<Result<_>>()?,
        None => vec![None; kept.len()],
    };
    let fields: Vec<String> = table.fields.iter().map(|f| f.name.clone()).collect();
    let (keys, key) = resolve_keys(
        &parts.dbf.path,
        req,
        &fields,
        &ids,
        &numbers_kept,
        |i, _| key_values[i].clone(),
    )?;
    let mut features = Vec::with_capacity(kept.len());
    for ((&i, key), number) in kept.iter().zip(keys).zip(numbers_kept) {
        let polygons = match &shapes[i].rings {
            None => Vec::new(),
            Some(rings) => group_rings(rings),
        };
        features.push(RawFeature {
            number,
            key,
            polygons,
        });
    }
    let mut sorted = fields;
    sorted.sort();
    Ok(Layer {
        path: path.to_path_buf(),
        sha256,
        format: "Shapefile",
        object: None,
        key,
        fields: sorted,
        features,
        convention: RingConvention::ExteriorClockwise,
        warnings,
    })
}

/// Record numbers for a message: all of them up to ten, then a count.
fn numbers(n: &[u64]) -> String {
    let shown: Vec<String> = n.iter().take(10).map(u64::to_string).collect();
    if n.len() > 10 {
        format!("{} and {} more", shown.join(", "), n.len() - 10)
    } else {
        shown.join(", ")
    }
}

// ---------------------------------------------------------------------------
// The .shp and .shx (ESRI Shapefile Technical Description, 1998)
// ---------------------------------------------------------------------------

/// The file code every .shp and .shx opens with (big-endian).
const FILE_CODE: i32 = 9994;
/// The main file header is 100 bytes; a record header 8.
const HEADER: usize = 100;

/// One record of the .shp.
struct ShpRecord {
    /// Byte offset of the record header in the .shp.
    offset: usize,
    /// Content length in bytes (without the 8-byte record header).
    length: usize,
    /// The rings with their kind (outer `true`), or `None` for a null shape.
    rings: Option<Vec<(bool, Ring)>>,
}

fn be_i32(b: &[u8], at: usize) -> i32 {
    i32::from_be_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]])
}

fn le_i32(b: &[u8], at: usize) -> i32 {
    i32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]])
}

fn le_f64(b: &[u8], at: usize) -> f64 {
    let mut a = [0u8; 8];
    a.copy_from_slice(&b[at..at + 8]);
    f64::from_le_bytes(a)
}

/// Names of the shape types of the Technical Description.
fn shape_type_name(t: i32) -> Option<&'static str> {
    Some(match t {
        0 => "null shape",
        1 => "Point",
        3 => "PolyLine",
        5 => "Polygon",
        8 => "MultiPoint",
        11 => "PointZ",
        13 => "PolyLineZ",
        15 => "PolygonZ",
        18 => "MultiPointZ",
        21 => "PointM",
        23 => "PolyLineM",
        25 => "PolygonM",
        28 => "MultiPointM",
        31 => "MultiPatch",
        _ => return None,
    })
}

fn is_polygon_type(t: i32) -> bool {
    matches!(t, 5 | 15 | 25)
}

/// Checks a main file header (the same layout in the .shp and the .shx) and
/// returns the file length it declares, in bytes, and the shape type.
fn main_header(part: &Part, what: &str) -> Result<(usize, i32)> {
    let b = &part.bytes;
    let at = || Location::file(&part.path);
    if b.len() < HEADER {
        return Err(Error::input(
            at(),
            format!(
                "the {what} is {} bytes long, shorter than the 100-byte header every {what} opens \
                 with: the file is truncated or not a Shapefile",
                b.len()
            ),
        ));
    }
    let code = be_i32(b, 0);
    if code != FILE_CODE {
        return Err(Error::input(
            at(),
            format!(
                "not a Shapefile {what}: it opens with the number {code} where every {what} has \
                 9994"
            ),
        ));
    }
    let words = be_i32(b, 24);
    let declared = (words as i64) * 2;
    if declared < HEADER as i64 {
        return Err(Error::input(
            at(),
            format!(
                "the {what} header gives a file length of {declared} bytes, less than the \
                 header itself: the file is damaged"
            ),
        ));
    }
    if declared as u64 > b.len() as u64 {
        return Err(Error::input(
            at(),
            format!(
                "the {what} header gives a file length of {declared} bytes but the file has \
                 only {}: it is truncated",
                b.len()
            ),
        ));
    }
    Ok((declared as usize, le_i32(b, 32)))
}

/// Reads every record of a .shp.
fn read_shp(part: &Part) -> Result<Vec<ShpRecord>> {
    let (end, file_type) = main_header(part, ".shp")?;
    let b = &part.bytes[..end];
    match shape_type_name(file_type) {
        None => {
            return Err(Error::input(
                Location::file(&part.path),
                format!(
                    "the .shp header gives shape type {file_type}, which is not a Shapefile \
                     shape type: the file is damaged"
                ),
            ))
        }
        Some(name) if file_type != 0 && !is_polygon_type(file_type) => {
            return Err(Error::input(
                Location::file(&part.path),
                format!("the layer holds {name} shapes; a boundary layer holds polygons"),
            ))
        }
        Some(_) => {}
    }
    let mut records = Vec::new();
    let mut pos = HEADER;
    while pos < end {
        let number = records.len() as u64 + 1;
        let at = || Location::file(&part.path).at_record(number);
        let left = end - pos;
        if left < 8 {
            return Err(Error::input(
                at(),
                format!(
                    "{left} byte(s) at the end of the file where a record header (8 bytes) \
                     belongs: the file is truncated or damaged"
                ),
            ));
        }
        let words = be_i32(b, pos + 4);
        let length = (words as i64) * 2;
        if length < 4 || length as u64 > (left - 8) as u64 {
            return Err(Error::input(
                at(),
                format!(
                    "the record header at byte {pos} gives a content length of {length} bytes, \
                     but {} byte(s) follow it: the file is truncated or damaged",
                    left - 8
                ),
            ));
        }
        let length = length as usize;
        let content = &b[pos + 8..pos + 8 + length];
        let rings = shape_rings(&part.path, number, content, file_type)?;
        records.push(ShpRecord {
            offset: pos,
            length,
            rings,
        });
        pos += 8 + length;
    }
    Ok(records)
}

/// The rings of one record's content (type, box, parts, points), each
/// count checked against the content length before it is used.
fn shape_rings(
    path: &Path,
    number: u64,
    c: &[u8],
    file_type: i32,
) -> Result<Option<Vec<(bool, Ring)>>> {
    let at = |column: &str| Location::file(path).at_record(number).in_column(column);
    let t = le_i32(c, 0);
    if t == 0 {
        return Ok(None);
    }
    if t != file_type {
        let name = shape_type_name(t)
            .map(|n| format!("a {n}"))
            .unwrap_or_else(|| format!("of shape type {t}, which is not a Shapefile type"));
        return Err(Error::input(
            at("shape type"),
            format!(
                "feature {number} is {name}, but the .shp header says the file holds {} shapes; \
                 the file is damaged, or it is not a boundary layer (which holds polygons)",
                shape_type_name(file_type).unwrap_or("other")
            ),
        ));
    }
    // Polygon: type (4), box (32), NumParts (4), NumPoints (4), Parts, Points.
    if c.len() < 44 {
        return Err(Error::input(
            at("content length"),
            format!(
                "the record is {} bytes long, too short for a polygon (at least 44): the file is \
                 damaged",
                c.len()
            ),
        ));
    }
    let parts = le_i32(c, 36);
    let points = le_i32(c, 40);
    if parts < 0 || points < 0 {
        return Err(Error::input(
            at(if parts < 0 { "NumParts" } else { "NumPoints" }),
            format!(
                "the record gives {parts} part(s) and {points} point(s); counts cannot be \
                 negative: the file is damaged"
            ),
        ));
    }
    let (parts, points) = (parts as u64, points as u64);
    let need = 44 + 4 * parts + 16 * points;
    if need > c.len() as u64 {
        return Err(Error::input(
            at("NumPoints"),
            format!(
                "the record gives {parts} part(s) and {points} point(s), {need} bytes, but holds \
                 only {} bytes: the file is damaged",
                c.len()
            ),
        ));
    }
    if parts == 0 && points > 0 {
        return Err(Error::input(
            at("NumParts"),
            format!("the record has {points} point(s) but no part to put them in"),
        ));
    }
    let (parts, points) = (parts as usize, points as usize);
    let mut starts = Vec::with_capacity(parts);
    for k in 0..parts {
        let s = le_i32(c, 44 + 4 * k);
        let previous = starts.last().copied().unwrap_or(0);
        let ok = if k == 0 {
            s == 0
        } else {
            s >= previous as i32 && (s as i64) <= points as i64
        };
        if !ok {
            return Err(Error::input(
                at("Parts"),
                format!(
                    "part {} starts at point {s}; parts start at 0, in order, within the {points} \
                     point(s) of the record: the file is damaged",
                    k + 1
                ),
            ));
        }
        starts.push(s as usize);
    }
    let base = 44 + 4 * parts;
    let mut rings = Vec::with_capacity(parts);
    for k in 0..parts {
        let from = starts[k];
        let to = starts.get(k + 1).copied().unwrap_or(points);
        let mut ring: Ring = Vec::with_capacity(to - from);
        for (v, p) in (from..to).enumerate() {
            let c = Coord {
                x: le_f64(c, base + 16 * p),
                y: le_f64(c, base + 16 * p + 8),
            };
            if !lonlat_ok(c) {
                check_coord(
                    Location::file(path).at_feature(number),
                    &format!("ring {}, vertex {}", k + 1, v + 1),
                    c,
                )?;
            }
            ring.push(c);
        }
        rings.push((is_clockwise(&ring), ring));
    }
    Ok(Some(rings))
}

/// Outer rings of a Shapefile polygon run clockwise (Technical Description,
/// "Polygon"); a ring of zero area counts as outer, so the repair step sees
/// and reports it.
fn is_clockwise(ring: &Ring) -> bool {
    let n = ring.len();
    let mut twice = 0.0;
    for i in 0..n {
        let a = ring[i];
        let b = ring[(i + 1) % n];
        twice += (b.x - a.x) * (b.y + a.y);
    }
    twice >= 0.0
}

/// Checks the .shx index against the records of the .shp: one entry per
/// record, each giving the record's offset and content length.
fn check_shx(shx: &Part, shp: &Part, records: &[ShpRecord]) -> Result<()> {
    let (end, _) = main_header(shx, ".shx")?;
    let body = end - HEADER;
    let hint = "one of the files is damaged or they come from different saves; if the .shp is \
                right, remove the .shx (it is not needed to read the .shp)";
    if !body.is_multiple_of(8) || body / 8 != records.len() {
        return Err(Error::input(
            Location::file(&shx.path),
            format!(
                "the .shx indexes {} record(s) ({body} bytes after its header) but {} has {}: {hint}",
                body as f64 / 8.0,
                shp.path.display(),
                records.len()
            ),
        ));
    }
    for (i, r) in records.iter().enumerate() {
        let at = HEADER + 8 * i;
        let offset = be_i32(&shx.bytes, at) as i64 * 2;
        let length = be_i32(&shx.bytes, at + 4) as i64 * 2;
        if offset != r.offset as i64 || length != r.length as i64 {
            return Err(Error::input(
                Location::file(&shx.path).at_record(i as u64 + 1),
                format!(
                    "the .shx puts the record at byte {offset} with {length} bytes, but in the \
                     .shp it is at byte {} with {} bytes: {hint}",
                    r.offset, r.length
                ),
            ));
        }
    }
    Ok(())
}

/// Each outer ring starts a polygon; a hole joins the outer ring that holds
/// its first point (the last outer ring if none does).
fn group_rings(rings: &[(bool, Ring)]) -> Vec<Vec<Ring>> {
    let mut polys: Vec<Vec<Ring>> = Vec::new();
    let mut holes = Vec::new();
    for (outer, r) in rings {
        if *outer {
            polys.push(vec![r.clone()]);
        } else {
            holes.push(r.clone());
        }
    }
    for h in holes {
        let Some(&p) = h.first() else { continue };
        let k = polys
            .iter()
            .position(|poly| inside(&poly[0], p))
            .or(polys.len().checked_sub(1));
        match k {
            Some(k) => polys[k].push(h),
            // A hole with no outer ring: keep it as a polygon so the repair
            // reports it rather than losing it.
            None => polys.push(vec![h]),
        }
    }
    polys
}

fn inside(ring: &Ring, p: Coord<f64>) -> bool {
    let mut c = false;
    let n = ring.len();
    for i in 0..n {
        let a = ring[i];
        let b = ring[(i + n - 1) % n];
        if (a.y > p.y) != (b.y > p.y) && p.x < (b.x - a.x) * (p.y - a.y) / (b.y - a.y) + a.x {
            c = !c;
        }
    }
    c
}

// ---------------------------------------------------------------------------
// The .dbf (dBase III)
// ---------------------------------------------------------------------------

/// A field descriptor.
struct Field {
    name: String,
    kind: u8,
    offset: usize,
    length: usize,
}

/// A record: where its bytes are and whether it is marked deleted.
struct DbfRecord {
    start: usize,
    deleted: bool,
}

/// A .dbf as read: field descriptors and records (bytes left in place).
struct DbfTable<'a> {
    bytes: &'a [u8],
    fields: Vec<Field>,
    records: Vec<DbfRecord>,
    utf8: bool,
}

fn le_u16(b: &[u8], at: usize) -> u16 {
    u16::from_le_bytes([b[at], b[at + 1]])
}

fn le_u32(b: &[u8], at: usize) -> u32 {
    u32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]])
}

/// Reads the header, field descriptors and record flags of a .dbf; values
/// are decoded only where asked ([`key_value`]).
fn read_dbf(part: &Part, utf8: bool) -> Result<DbfTable<'_>> {
    let b = &part.bytes[..];
    let at = || Location::file(&part.path);
    if b.len() < 32 {
        return Err(Error::input(
            at(),
            format!(
                "the .dbf is {} bytes long, shorter than the 32-byte header every dBase table \
                 opens with: the file is truncated or not a dBase table",
                b.len()
            ),
        ));
    }
    let version = b[0];
    if version == 0x04 || version == 0x8C {
        return Err(Error::input(
            at(),
            "the .dbf is a dBase level 7 table, which is not read; save it as dBase III (the \
             format Shapefiles use)",
        ));
    }
    let count = le_u32(b, 4) as u64;
    let header = le_u16(b, 8) as usize;
    let record_len = le_u16(b, 10) as usize;
    if header < 33 || header > b.len() {
        return Err(Error::input(
            at(),
            format!(
                "the .dbf header gives a header length of {header} bytes, but a header holds at \
                 least 33 and the file has {}: the file is damaged",
                b.len()
            ),
        ));
    }
    let mut fields: Vec<Field> = Vec::new();
    let mut pos = 32;
    let mut offset = 1; // the deletion flag
    loop {
        if pos >= header {
            return Err(Error::input(
                at(),
                format!(
                    "the .dbf field descriptors run past the header ({header} bytes) without the \
                     end mark 0x0D: the file is damaged"
                ),
            ));
        }
        if b[pos] == 0x0D {
            break;
        }
        let number = fields.len() + 1;
        if pos + 32 > header {
            return Err(Error::input(
                at(),
                format!(
                    "field descriptor {number} at byte {pos} runs past the header ({header} \
                     bytes): the file is damaged"
                ),
            ));
        }
        let d = &b[pos..pos + 32];
        let raw = &d[..11];
        let raw = &raw[..raw.iter().position(|&c| c == 0).unwrap_or(11)];
        let name = latin1(raw).trim().to_string();
        if name.is_empty() || name.chars().any(|c| c.is_control()) {
            return Err(Error::input(
                at(),
                format!("field descriptor {number} has no readable name: the file is damaged"),
            ));
        }
        if fields.iter().any(|f| f.name == name) {
            return Err(Error::input(
                at().in_column(&name),
                format!("two fields are named {name:?}; field names must differ"),
            ));
        }
        let length = d[16] as usize;
        if length == 0 {
            return Err(Error::input(
                at().in_column(&name),
                "the field has length 0: the file is damaged",
            ));
        }
        fields.push(Field {
            name,
            kind: d[11],
            offset,
            length,
        });
        offset += length;
        pos += 32;
    }
    if offset > record_len {
        return Err(Error::input(
            at(),
            format!(
                "the .dbf fields take {offset} bytes per record (with the deletion flag), more \
                 than the record length of {record_len} its header gives: the file is damaged"
            ),
        ));
    }
    let need = header as u64 + count * record_len as u64;
    if need > b.len() as u64 {
        return Err(Error::input(
            at(),
            format!(
                "the .dbf header promises {count} record(s) of {record_len} bytes after a \
                 {header}-byte header ({need} bytes) but the file has {}: it is truncated or \
                 damaged",
                b.len()
            ),
        ));
    }
    let mut records = Vec::with_capacity(count as usize);
    for i in 0..count as usize {
        let start = header + i * record_len;
        let deleted = match b[start] {
            b' ' => false,
            b'*' => true,
            other => {
                return Err(Error::input(
                    at().at_record(i as u64 + 1),
                    format!(
                        "the record opens with the byte 0x{other:02X} where a deletion flag \
                         (a space, or * for deleted) belongs: the file is damaged"
                    ),
                ))
            }
        };
        records.push(DbfRecord { start, deleted });
    }
    Ok(DbfTable {
        bytes: b,
        fields,
        records,
        utf8,
    })
}

/// Latin-1: each byte is the character of that number.
fn latin1(b: &[u8]) -> String {
    b.iter().map(|&c| c as char).collect()
}

/// The text of a key value: character fields trimmed; numbers written
/// without a fractional part when they have none; empty gives `None`.
fn key_value(path: &Path, record: u64, t: &DbfTable, field: usize) -> Result<Option<String>> {
    let f = &t.fields[field];
    let start = t.records[record as usize - 1].start + f.offset;
    let raw = &t.bytes[start..start + f.length];
    let at = || Location::file(path).at_record(record).in_column(&f.name);
    let text = || -> String {
        let raw = &raw[..raw.iter().position(|&c| c == 0).unwrap_or(raw.len())];
        match std::str::from_utf8(raw) {
            Ok(s) if t.utf8 => s.trim().to_string(),
            _ => latin1(raw).trim().to_string(),
        }
    };
    let some = |s: String| (!s.is_empty()).then_some(s);
    Ok(match f.kind {
        b'C' | b'D' | b'L' => some(text()),
        b'N' | b'F' => {
            let s = text();
            if s.is_empty() || s.bytes().all(|c| c == b'*' || c == b'?') {
                // Blank, or the overflow mark some writers leave.
                None
            } else {
                let v: f64 = s.parse().map_err(|_| {
                    Error::input(
                        at(),
                        format!("the value {s:?} of this numeric field is not a number"),
                    )
                })?;
                Some(if v.is_finite() && v.fract() == 0.0 && v.abs() < 1e15 {
                    format!("{}", v as i64)
                } else {
                    s
                })
            }
        }
        b'I' | b'+' if f.length == 4 => Some(le_i32(raw, 0).to_string()),
        b'O' | b'B' if f.length == 8 => {
            let v = le_f64(raw, 0);
            Some(if v.is_finite() && v.fract() == 0.0 && v.abs() < 1e15 {
                format!("{}", v as i64)
            } else {
                v.to_string()
            })
        }
        other => {
            return Err(Error::input(
                at(),
                format!(
                    "the field has dBase type {:?} ({} bytes), which cannot hold a key; choose \
                     a character or numeric field",
                    other as char, f.length
                ),
            ))
        }
    })
}

// ---------------------------------------------------------------------------
// Finding the files
// ---------------------------------------------------------------------------

fn from_files(shp: &Path) -> Result<Parts> {
    let read = |p: PathBuf| -> Result<Part> {
        let bytes = std::fs::read(&p).map_err(|e| Error::io(&p, "cannot open layer", e))?;
        Ok(Part { path: p, bytes })
    };
    let sibling = |ext: &str| -> Option<PathBuf> {
        [ext.to_string(), ext.to_uppercase()]
            .iter()
            .map(|e| shp.with_extension(e))
            .find(|p| p.exists())
    };
    let shp_part = read(shp.to_path_buf())?;
    let dbf = sibling("dbf").ok_or_else(|| {
        Error::input(
            Location::file(shp),
            "no .dbf beside the .shp; the attributes are needed for the key",
        )
    })?;
    Ok(Parts {
        shp: shp_part,
        shx: sibling("shx").map(read).transpose()?,
        dbf: read(dbf)?,
        prj: sibling("prj").map(read).transpose()?,
        cpg: sibling("cpg").map(read).transpose()?,
    })
}

/// A zip problem in the project's words.
fn zip_problem(e: &zip::result::ZipError) -> String {
    use zip::result::ZipError;
    match e {
        ZipError::Io(_) | ZipError::InvalidArchive(_) => {
            "its directory or a file header is damaged or missing (a truncated download?)".into()
        }
        ZipError::UnsupportedArchive(what) => {
            format!("it uses a zip feature that is not read ({what}); unpack it and give the .shp")
        }
        ZipError::FileNotFound => "a member it lists is missing".into(),
        ZipError::InvalidPassword => "it is encrypted; unpack it and give the .shp".into(),
        _ => "it is damaged or of a kind not read; unpack it and give the .shp".into(),
    }
}

fn from_zip(path: &Path) -> Result<Parts> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "cannot open layer", e))?;
    let mut zip = zip::ZipArchive::new(Cursor::new(bytes)).map_err(|e| {
        Error::input(
            Location::file(path),
            format!("not a readable zip file: {}", zip_problem(&e)),
        )
    })?;
    let names: Vec<String> = zip.file_names().map(str::to_string).collect();
    let mut shps: Vec<&String> = names
        .iter()
        .filter(|n| n.to_lowercase().ends_with(".shp"))
        .collect();
    shps.sort();
    let shp = match shps.as_slice() {
        [one] => (*one).clone(),
        [] => {
            return Err(Error::input(
                Location::file(path),
                "the zip holds no .shp file",
            ))
        }
        several => {
            return Err(Error::input(
                Location::file(path),
                format!(
                    "the zip holds several Shapefiles ({}); give one zip per layer",
                    several
                        .iter()
                        .map(|s| s.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ))
        }
    };
    let stem = shp[..shp.len() - 4].to_string();
    let mut member = |ext: &str| -> Result<Option<Part>> {
        let want = format!("{stem}.{ext}").to_lowercase();
        let Some(name) = names.iter().find(|n| n.to_lowercase() == want) else {
            return Ok(None);
        };
        let label = path.join(name);
        let damaged = |e: &dyn std::fmt::Display| {
            Error::input(
                Location::file(&label),
                format!("cannot read this member of the zip: {e}"),
            )
        };
        let f = zip.by_name(name).map_err(|e| damaged(&zip_problem(&e)))?;
        let declared = f.size();
        if declared > MAX_ZIP_MEMBER {
            return Err(Error::input(
                Location::file(&label),
                format!(
                    "the zip says this member is {declared} bytes once unpacked, more than the \
                     4 GiB read from a zip; unpack it and give the .shp"
                ),
            ));
        }
        // Read at most one byte more than declared, so a member that
        // unpacks to more than its stated size is caught without reading
        // it all.
        let mut buf = Vec::new();
        f.take(declared + 1).read_to_end(&mut buf).map_err(|_| {
            damaged(&"its packed bytes do not unpack to what the zip recorded (damaged)")
        })?;
        if buf.len() as u64 != declared {
            return Err(damaged(&format!(
                "it unpacks to {} bytes where the zip says {declared} (damaged)",
                buf.len()
            )));
        }
        Ok(Some(Part {
            path: label,
            bytes: buf,
        }))
    };
    let shp_part = member("shp")?.ok_or_else(|| {
        Error::input(
            Location::file(path),
            format!("cannot find {shp} in the zip"),
        )
    })?;
    let dbf = member("dbf")?.ok_or_else(|| {
        Error::input(
            Location::file(path),
            format!("the zip has no {stem}.dbf beside {shp}"),
        )
    })?;
    Ok(Parts {
        shp: shp_part,
        shx: member("shx")?,
        dbf,
        prj: member("prj")?,
        cpg: member("cpg")?,
    })
}

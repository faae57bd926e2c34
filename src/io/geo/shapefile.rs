//! ESRI Shapefiles: the .shp with its .dbf, .prj and .cpg beside it, or all
//! of them inside a .zip (read in memory, nothing extracted to disk).

use std::io::{Cursor, Read};
use std::path::{Path, PathBuf};

use ::shapefile::dbase::{self, FieldValue};
use ::shapefile::{PolygonRing, Shape, ShapeReader};
use geo::Coord;

use super::{check_lonlat, raw_features, resolve_keys, Layer, LayerRequest};
use crate::core::overlay::{Ring, RingConvention};
use crate::error::{Error, Location, Result};

/// The files that make one Shapefile, as bytes.
struct Parts {
    shp: Vec<u8>,
    dbf: Vec<u8>,
    prj: Option<Vec<u8>>,
    cpg: Option<Vec<u8>>,
}

/// Reads a `.shp` (with its companions) or a `.zip` holding one Shapefile.
pub fn read(path: &Path, req: &LayerRequest) -> Result<Layer> {
    let parts = if path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("zip"))
    {
        from_zip(path)?
    } else {
        from_files(path)?
    };
    if let Some(prj) = &parts.prj {
        let text = String::from_utf8_lossy(prj);
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
    let sha256 = super::sha256_hex(&[&parts.shp, &parts.dbf, parts.prj.as_deref().unwrap_or(&[])]);
    let shapes = ShapeReader::new(Cursor::new(&parts.shp[..]))
        .and_then(|r| r.read())
        .map_err(|e| Error::input(Location::file(path), format!("cannot read the .shp: {e}")))?;
    let utf8 = parts.cpg.as_ref().is_none_or(|c| {
        let c = String::from_utf8_lossy(c).trim().to_uppercase();
        c.is_empty() || c.contains("UTF") || c == "65001"
    });
    let mut dbf = if utf8 {
        dbase::Reader::new_with_encoding(Cursor::new(&parts.dbf[..]), dbase::UnicodeLossy)
    } else {
        // Code pages other than UTF-8 are read leniently: codes are ASCII.
        dbase::Reader::new_with_encoding(Cursor::new(&parts.dbf[..]), dbase::UnicodeLossy)
    }
    .map_err(|e| Error::input(Location::file(path), format!("cannot read the .dbf: {e}")))?;
    let mut fields: Vec<String> = dbf.fields().iter().map(|f| f.name().to_string()).collect();
    fields.retain(|f| f != "DeletionFlag");
    let records = dbf.read().map_err(|e| {
        Error::input(
            Location::file(path),
            format!("cannot read the .dbf records: {e}"),
        )
    })?;
    if records.len() != shapes.len() {
        return Err(Error::input(
            Location::file(path),
            format!(
                "the .shp has {} shapes but the .dbf {} records",
                shapes.len(),
                records.len()
            ),
        ));
    }
    let mut polygons = Vec::with_capacity(shapes.len());
    for (i, s) in shapes.into_iter().enumerate() {
        polygons.push(shape_polygons(path, i as u64 + 1, s)?);
    }
    let ids = vec![None; records.len()];
    let (keys, key) = resolve_keys(path, req, &fields, &ids, |i, field| {
        records[i].get(field).and_then(field_text)
    })?;
    let mut sorted = fields.clone();
    sorted.sort();
    let features = raw_features(keys, polygons);
    Ok(Layer {
        path: path.to_path_buf(),
        sha256,
        format: "Shapefile",
        object: None,
        key,
        fields: sorted,
        features,
        convention: RingConvention::ExteriorClockwise,
    })
}

fn field_text(v: &FieldValue) -> Option<String> {
    match v {
        FieldValue::Character(Some(s)) | FieldValue::Memo(s) if !s.trim().is_empty() => {
            Some(s.trim().to_string())
        }
        FieldValue::Numeric(Some(f)) | FieldValue::Double(f) | FieldValue::Currency(f) => {
            Some(if f.fract() == 0.0 {
                format!("{}", *f as i64)
            } else {
                f.to_string()
            })
        }
        FieldValue::Float(Some(f)) => Some(f.to_string()),
        FieldValue::Integer(i) => Some(i.to_string()),
        _ => None,
    }
}

fn from_files(shp: &Path) -> Result<Parts> {
    let read = |p: &PathBuf| std::fs::read(p).map_err(|e| Error::io(p, "cannot open layer", e));
    let sibling = |ext: &str| -> Option<PathBuf> {
        [ext.to_string(), ext.to_uppercase()]
            .iter()
            .map(|e| shp.with_extension(e))
            .find(|p| p.exists())
    };
    let shp_bytes = read(&shp.to_path_buf())?;
    let dbf = sibling("dbf").ok_or_else(|| {
        Error::input(
            Location::file(shp),
            "no .dbf beside the .shp; the attributes are needed for the key",
        )
    })?;
    Ok(Parts {
        shp: shp_bytes,
        dbf: read(&dbf)?,
        prj: sibling("prj").map(|p| read(&p)).transpose()?,
        cpg: sibling("cpg").map(|p| read(&p)).transpose()?,
    })
}

fn from_zip(path: &Path) -> Result<Parts> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "cannot open layer", e))?;
    let mut zip = zip::ZipArchive::new(Cursor::new(bytes)).map_err(|e| {
        Error::input(
            Location::file(path),
            format!("not a readable zip file: {e}"),
        )
    })?;
    let names: Vec<String> = zip.file_names().map(str::to_string).collect();
    let shps: Vec<&String> = names
        .iter()
        .filter(|n| n.to_lowercase().ends_with(".shp"))
        .collect();
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
    let mut member = |ext: &str| -> Result<Option<Vec<u8>>> {
        let want = format!("{stem}.{ext}").to_lowercase();
        let Some(name) = names.iter().find(|n| n.to_lowercase() == want) else {
            return Ok(None);
        };
        let mut f = zip.by_name(name).map_err(|e| {
            Error::input(
                Location::file(path),
                format!("cannot read {name} in the zip: {e}"),
            )
        })?;
        let mut buf = Vec::new();
        f.read_to_end(&mut buf)
            .map_err(|e| Error::io(path, "cannot read the zip", e))?;
        Ok(Some(buf))
    };
    let shp_bytes = member("shp")?.unwrap_or_default();
    let dbf = member("dbf")?.ok_or_else(|| {
        Error::input(
            Location::file(path),
            format!("the zip has no {stem}.dbf beside {shp}"),
        )
    })?;
    Ok(Parts {
        shp: shp_bytes,
        dbf,
        prj: member("prj")?,
        cpg: member("cpg")?,
    })
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

/// Rings of any polygon kind (plain, Z or M), tagged outer (`true`) or
/// inner, as longitude/latitude.
fn tagged_rings<P>(rings: Vec<PolygonRing<P>>, xy: impl Fn(&P) -> (f64, f64)) -> Vec<(bool, Ring)> {
    let coords = |v: &[P]| -> Ring {
        v.iter()
            .map(|q| {
                let (x, y) = xy(q);
                Coord { x, y }
            })
            .collect()
    };
    rings
        .iter()
        .map(|r| match r {
            PolygonRing::Outer(v) => (true, coords(v)),
            PolygonRing::Inner(v) => (false, coords(v)),
        })
        .collect()
}

fn shape_polygons(path: &Path, n: u64, shape: Shape) -> Result<Vec<Vec<Ring>>> {
    let rings: Vec<(bool, Ring)> = match shape {
        Shape::NullShape => return Ok(Vec::new()),
        Shape::Polygon(p) => tagged_rings(p.into_inner(), |q| (q.x, q.y)),
        Shape::PolygonZ(p) => tagged_rings(p.into_inner(), |q| (q.x, q.y)),
        Shape::PolygonM(p) => tagged_rings(p.into_inner(), |q| (q.x, q.y)),
        other => {
            return Err(Error::input(
                Location::file(path).at_line(n),
                format!(
                    "feature {n} is a {}; a boundary layer holds polygons",
                    other.shapetype()
                ),
            ))
        }
    };
    for (_, r) in &rings {
        for &c in r {
            check_lonlat(path, n, c)?;
        }
    }
    // Each outer ring starts a polygon; a hole joins the outer ring that
    // holds its first point (the last outer ring if none does).
    let mut polys: Vec<Vec<Ring>> = Vec::new();
    let mut holes = Vec::new();
    for (outer, r) in rings {
        if outer {
            polys.push(vec![r]);
        } else {
            holes.push(r);
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
    Ok(polys)
}

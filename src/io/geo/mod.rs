//! Boundary layers: GeoJSON, ESRI Shapefile (also inside a .zip, read in
//! memory), TopoJSON (quantized or not), and the built-in US county layers.
//! No GDAL: each format has a small reader here.
//!
//! Every reader returns [`RawFeature`]s with the rings as found, so the
//! repairs (closing rings, dropping collapsed ones, orientation) are done and
//! reported in one place, [`crate::core::overlay::prepare`]. Coordinates must
//! be longitude/latitude (NAD83 or WGS84); a projected layer is an error.

use std::path::{Path, PathBuf};

use geo::Coord;
use serde_json::Value;
use sha2::{Digest, Sha256};

use crate::core::overlay::{RawFeature, Ring, RingConvention};
use crate::error::{Error, Location, Result};

pub mod geojson;
pub mod population;
pub mod shapefile;
pub mod topojson;

/// The built-in layers: name, file bytes.
pub const BUILTIN: [(&str, &[u8]); 2] = [
    (
        "counties-2017",
        include_bytes!("../../../reference/layers/counties-2017.topo.json"),
    ),
    (
        "counties-2023",
        include_bytes!("../../../reference/layers/counties-2023.topo.json"),
    ),
];

/// The TopoJSON object read from the built-in layers.
pub const BUILTIN_OBJECT: &str = "counties";

/// Where a layer's key comes from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Key {
    /// The feature id (GeoJSON/TopoJSON `id`).
    Id,
    /// A property (attribute) by name.
    Field(String),
}

/// What to read.
#[derive(Debug, Clone)]
pub struct LayerRequest {
    /// A path, or `builtin:NAME`.
    pub spec: String,
    /// The key; `None` means the feature id, which only the built-in layers,
    /// GeoJSON and TopoJSON have.
    pub key: Option<String>,
    /// The TopoJSON object, if any.
    pub object: Option<String>,
    /// The option that gave the key, for messages (`--from-key`).
    pub key_option: &'static str,
    /// The option that gives the object, for messages (`--from-object`).
    pub object_option: &'static str,
}

/// A layer as read.
#[derive(Debug, Clone)]
pub struct Layer {
    /// The path, or `builtin:NAME`, for messages.
    pub path: PathBuf,
    /// SHA-256 of the input bytes (of the .shp, .dbf and .prj together for a
    /// Shapefile given by its .shp), lower-case hex.
    pub sha256: String,
    /// The format read.
    pub format: &'static str,
    /// The TopoJSON object read, if any.
    pub object: Option<String>,
    /// The key as used (`id` for the feature id).
    pub key: String,
    /// Attribute names present, sorted.
    pub fields: Vec<String>,
    /// Features in file order.
    pub features: Vec<RawFeature>,
    /// The ring orientation the format uses.
    pub convention: RingConvention,
}

/// Pairs each feature's key with its polygons, numbering features from 1
/// in file order (the number every message uses).
pub fn raw_features(keys: Vec<String>, polygons: Vec<Vec<Vec<Ring>>>) -> Vec<RawFeature> {
    keys.into_iter()
        .zip(polygons)
        .enumerate()
        .map(|(i, (key, polygons))| RawFeature {
            number: i as u64 + 1,
            key,
            polygons,
        })
        .collect()
}

/// Lower-case hex SHA-256 of some byte slices taken together.
pub fn sha256_hex(parts: &[&[u8]]) -> String {
    let mut h = Sha256::new();
    for p in parts {
        h.update(p);
    }
    h.finalize().iter().map(|b| format!("{b:02x}")).collect()
}

/// Reads a layer: the format is chosen by `builtin:` prefix, by extension
/// (`.shp`, `.zip`, `.topojson`, `.geojson`, `.json`) and, for JSON, by the
/// `type` member (`Topology` or `FeatureCollection`).
pub fn read_layer(req: &LayerRequest) -> Result<Layer> {
    if let Some(name) = req.spec.strip_prefix("builtin:") {
        let Some((_, bytes)) = BUILTIN.iter().find(|(n, _)| *n == name) else {
            let names: Vec<String> = BUILTIN
                .iter()
                .map(|(n, _)| format!("builtin:{n}"))
                .collect();
            return Err(Error::Usage(format!(
                "unknown built-in layer {:?}; the built-in layers are: {}",
                req.spec,
                names.join(", ")
            )));
        };
        let mut r = req.clone();
        if r.object.is_none() {
            r.object = Some(BUILTIN_OBJECT.to_string());
        }
        return read_json(Path::new(&req.spec), bytes, &r);
    }
    let path = PathBuf::from(&req.spec);
    let lower = req.spec.to_lowercase();
    if lower.ends_with(".shp") || lower.ends_with(".zip") {
        return shapefile::read(&path, req);
    }
    let bytes = std::fs::read(&path).map_err(|e| Error::io(&path, "cannot open layer", e))?;
    read_json(&path, &bytes, req)
}

fn read_json(path: &Path, bytes: &[u8], req: &LayerRequest) -> Result<Layer> {
    let doc: Value = serde_json::from_slice(bytes).map_err(|e| {
        Error::input(
            Location::file(path).at_line(e.line() as u64),
            format!("not valid JSON: {e}; expected GeoJSON or TopoJSON"),
        )
    })?;
    let sha = sha256_hex(&[bytes]);
    match doc.get("type").and_then(Value::as_str) {
        Some("Topology") => topojson::read(path, &doc, sha, req),
        Some("FeatureCollection") => geojson::read(path, &doc, sha, req),
        other => Err(Error::input(
            Location::file(path),
            format!(
                "the JSON has type {other:?}; expected a GeoJSON FeatureCollection or a TopoJSON Topology"
            ),
        )),
    }
}

/// The key text of a JSON value: strings as they are, integral numbers
/// without decimals. Empty and null give `None`.
pub fn key_text(v: &Value) -> Option<String> {
    match v {
        Value::String(s) if !s.trim().is_empty() => Some(s.trim().to_string()),
        Value::Number(n) => Some(match (n.as_i64(), n.as_f64()) {
            (Some(i), _) => i.to_string(),
            (None, Some(f)) if f.fract() == 0.0 && f.abs() < 1e15 => format!("{}", f as i64),
            _ => n.to_string(),
        }),
        _ => None,
    }
}

/// Checks that a coordinate is a finite longitude/latitude; a layer with
/// metres or feet fails here with a message saying to reproject.
pub fn check_lonlat(path: &Path, feature: u64, c: Coord<f64>) -> Result<()> {
    if !c.x.is_finite() || !c.y.is_finite() {
        return Err(Error::input(
            Location::file(path).at_line(feature),
            format!("feature {feature}: a coordinate is not a finite number"),
        ));
    }
    if c.x.abs() > 540.0 || c.y.abs() > 90.000_001 {
        return Err(Error::input(
            Location::file(path).at_line(feature),
            format!(
                "feature {feature}: coordinate ({}, {}) is not longitude/latitude; the layer looks \
                 projected: reproject it to longitude/latitude (NAD83 or WGS84) first",
                c.x, c.y
            ),
        ));
    }
    Ok(())
}

/// Resolves the key of each feature. `props` gives a feature's properties,
/// `id` its id. Errors: a field no feature has (listing the fields), a
/// feature without a value, no key and no ids.
pub fn resolve_keys(
    path: &Path,
    req: &LayerRequest,
    fields: &[String],
    ids: &[Option<String>],
    values: impl Fn(usize, &str) -> Option<String>,
) -> Result<(Vec<String>, String)> {
    let mut keys = Vec::with_capacity(ids.len());
    match &req.key {
        None => {
            for (i, id) in ids.iter().enumerate() {
                let n = i as u64 + 1;
                match id {
                    Some(k) => keys.push(k.clone()),
                    None => {
                        return Err(Error::input(
                            Location::file(path).at_line(n),
                            format!(
                                "feature {n} has no id; give {} FIELD (the fields are: {})",
                                req.key_option,
                                list(fields)
                            ),
                        ))
                    }
                }
            }
            Ok((keys, "id".to_string()))
        }
        Some(field) => {
            let use_id = !fields.iter().any(|f| f == field) && field == "id";
            if !use_id && !fields.iter().any(|f| f == field) {
                return Err(Error::input(
                    Location::file(path).in_column(field),
                    format!(
                        "no field {field:?} for {}; the fields are: {}",
                        req.key_option,
                        list(fields)
                    ),
                ));
            }
            for (i, id) in ids.iter().enumerate() {
                let n = i as u64 + 1;
                let v = if use_id { id.clone() } else { values(i, field) };
                match v {
                    Some(k) => keys.push(k),
                    None => {
                        return Err(Error::input(
                            Location::file(path).at_line(n).in_column(field),
                            format!("feature {n} has no value in field {field:?}"),
                        ))
                    }
                }
            }
            Ok((keys, field.clone()))
        }
    }
}

fn list(fields: &[String]) -> String {
    if fields.is_empty() {
        "(none)".to_string()
    } else {
        fields.join(", ")
    }
}

/// Parses a JSON position list into a ring, checking each coordinate.
pub fn json_ring(path: &Path, feature: u64, v: &Value) -> Result<Ring> {
    let bad = || {
        Error::input(
            Location::file(path).at_line(feature),
            format!("feature {feature}: a ring is not a list of [longitude, latitude] positions"),
        )
    };
    let arr = v.as_array().ok_or_else(bad)?;
    let mut ring = Vec::with_capacity(arr.len());
    for p in arr {
        let p = p.as_array().ok_or_else(bad)?;
        let (Some(x), Some(y)) = (
            p.first().and_then(Value::as_f64),
            p.get(1).and_then(Value::as_f64),
        ) else {
            return Err(bad());
        };
        let c = Coord { x, y };
        check_lonlat(path, feature, c)?;
        ring.push(c);
    }
    Ok(ring)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn builtin(name: &str) -> Layer {
        read_layer(&LayerRequest {
            spec: format!("builtin:{name}"),
            key: None,
            object: None,
            key_option: "--from-key",
            object_option: "--from-object",
        })
        .unwrap()
    }

    #[test]
    fn the_builtin_county_layers_have_every_county_by_its_code() {
        // Counts from the layer files themselves (3231 and 3233 geometries in
        // the "counties" object), checked with scripts/reference/topo.py.
        let a = builtin("counties-2017");
        let b = builtin("counties-2023");
        assert_eq!(a.features.len(), 3231);
        assert_eq!(b.features.len(), 3233);
        assert!(a.features.iter().any(|f| f.key == "02261"));
        assert!(b.features.iter().any(|f| f.key == "09110"));
        assert_eq!(a.object.as_deref(), Some("counties"));
    }
}

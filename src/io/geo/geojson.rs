//! GeoJSON FeatureCollections of Polygons and MultiPolygons (RFC 7946).

use std::collections::BTreeSet;
use std::path::Path;

use geo::Coord;
use serde_json::Value;

use super::{check_coord, key_text, lonlat_ok, raw_features, resolve_keys, Layer, LayerRequest};
use crate::core::overlay::{Ring, RingConvention};
use crate::error::{Error, Location, Result};

/// Reads a parsed FeatureCollection. A panic inside (a bug) is turned into
/// an error naming the file as a last guard.
pub fn read(path: &Path, doc: &Value, sha256: String, req: &LayerRequest) -> Result<Layer> {
    super::guarded(path, || read_unguarded(path, doc, sha256, req))
}

fn read_unguarded(path: &Path, doc: &Value, sha256: String, req: &LayerRequest) -> Result<Layer> {
    check_crs(path, doc)?;
    let features = doc
        .get("features")
        .and_then(Value::as_array)
        .ok_or_else(|| {
            Error::input(
                Location::file(path),
                "the FeatureCollection has no \"features\" list",
            )
        })?;
    let mut fields = BTreeSet::new();
    let mut ids = Vec::with_capacity(features.len());
    let mut polygons = Vec::with_capacity(features.len());
    for (i, f) in features.iter().enumerate() {
        let n = i as u64 + 1;
        if !f.is_object() {
            return Err(Error::input(
                Location::file(path).at_feature(n),
                "the feature is not a JSON object",
            ));
        }
        if let Some(p) = f.get("properties").and_then(Value::as_object) {
            fields.extend(p.keys().cloned());
        }
        ids.push(f.get("id").and_then(key_text));
        polygons.push(geometry_polygons(
            path,
            n,
            f.get("geometry").unwrap_or(&Value::Null),
        )?);
    }
    let fields: Vec<String> = fields.into_iter().collect();
    let numbers: Vec<u64> = (1..=features.len() as u64).collect();
    let (keys, key) = resolve_keys(path, req, &fields, &ids, &numbers, |i, field| {
        features[i]
            .get("properties")
            .and_then(|p| p.get(field))
            .and_then(key_text)
    })?;
    let features = raw_features(keys, polygons);
    Ok(Layer {
        path: path.to_path_buf(),
        sha256,
        format: "GeoJSON",
        object: None,
        key,
        fields,
        features,
        convention: RingConvention::ExteriorCounterClockwise,
        warnings: Vec::new(),
    })
}

/// A `crs` member (older GeoJSON) naming a projected system is an error.
fn check_crs(path: &Path, doc: &Value) -> Result<()> {
    let name = doc.pointer("/crs/properties/name").and_then(Value::as_str);
    if let Some(name) = name {
        let geographic = [
            "CRS84",
            "CRS83",
            "EPSG::4326",
            "EPSG::4269",
            "EPSG:4326",
            "EPSG:4269",
        ];
        if !geographic.iter().any(|g| name.ends_with(g)) {
            return Err(Error::input(
                Location::file(path),
                format!(
                    "the layer declares the coordinate system {name:?}; only longitude/latitude \
                     (NAD83 or WGS84) is read: reproject it first"
                ),
            ));
        }
    }
    Ok(())
}

/// Parses a JSON position list into a ring, checking each coordinate;
/// `place` says which polygon and ring it is, for messages.
fn json_ring(path: &Path, feature: u64, place: &str, v: &Value) -> Result<Ring> {
    let at = || {
        Location::file(path)
            .at_feature(feature)
            .in_column("geometry")
    };
    let arr = v.as_array().ok_or_else(|| {
        Error::input(
            at(),
            format!("{place} is not a list of [longitude, latitude] positions"),
        )
    })?;
    let mut ring = Vec::with_capacity(arr.len());
    for (k, p) in arr.iter().enumerate() {
        let pair = p.as_array().and_then(|p| {
            Some((
                p.first().and_then(Value::as_f64)?,
                p.get(1).and_then(Value::as_f64)?,
            ))
        });
        let Some((x, y)) = pair else {
            return Err(Error::input(
                at(),
                format!(
                    "{place}, position {}: {} is not a [longitude, latitude] pair of numbers",
                    k + 1,
                    short(p)
                ),
            ));
        };
        let c = Coord { x, y };
        if !lonlat_ok(c) {
            check_coord(at(), &format!("{place}, position {}", k + 1), c)?;
        }
        ring.push(c);
    }
    Ok(ring)
}

/// A JSON value for a message, cut to 40 characters.
fn short(v: &Value) -> String {
    let s = v.to_string();
    if s.chars().count() > 40 {
        format!("{}...", s.chars().take(40).collect::<String>())
    } else {
        s
    }
}

fn geometry_polygons(path: &Path, n: u64, g: &Value) -> Result<Vec<Vec<Ring>>> {
    if g.is_null() {
        return Ok(Vec::new());
    }
    let at = || Location::file(path).at_feature(n).in_column("geometry");
    let kind = g.get("type").and_then(Value::as_str).unwrap_or("");
    let coords = g.get("coordinates").unwrap_or(&Value::Null);
    let rings = |v: &Value, polygon: Option<usize>| -> Result<Vec<Ring>> {
        let name = |r: usize| match polygon {
            Some(p) => format!("polygon {p}, ring {r}"),
            None => format!("ring {r}"),
        };
        v.as_array()
            .ok_or_else(|| {
                Error::input(
                    at(),
                    match polygon {
                        Some(p) => format!("polygon {p} is not a list of rings"),
                        None => "the polygon is not a list of rings".to_string(),
                    },
                )
            })?
            .iter()
            .enumerate()
            .map(|(k, r)| json_ring(path, n, &name(k + 1), r))
            .collect()
    };
    match kind {
        "Polygon" => Ok(vec![rings(coords, None)?]),
        "MultiPolygon" => coords
            .as_array()
            .ok_or_else(|| {
                Error::input(
                    at(),
                    "MultiPolygon coordinates are not a list of polygons",
                )
            })?
            .iter()
            .enumerate()
            .map(|(k, p)| rings(p, Some(k + 1)))
            .collect(),
        other => Err(Error::input(
            at(),
            format!("the feature is a {other:?}; a boundary layer holds Polygon or MultiPolygon features"),
        )),
    }
}

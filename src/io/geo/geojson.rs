//! GeoJSON FeatureCollections of Polygons and MultiPolygons (RFC 7946).

use std::collections::BTreeSet;
use std::path::Path;

use serde_json::Value;

use super::{json_ring, key_text, raw_features, resolve_keys, Layer, LayerRequest};
use crate::core::overlay::{Ring, RingConvention};
use crate::error::{Error, Location, Result};

/// Reads a parsed FeatureCollection.
pub fn read(path: &Path, doc: &Value, sha256: String, req: &LayerRequest) -> Result<Layer> {
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
    let (keys, key) = resolve_keys(path, req, &fields, &ids, |i, field| {
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

fn geometry_polygons(path: &Path, n: u64, g: &Value) -> Result<Vec<Vec<Ring>>> {
    if g.is_null() {
        return Ok(Vec::new());
    }
    let kind = g.get("type").and_then(Value::as_str).unwrap_or("");
    let coords = g.get("coordinates").unwrap_or(&Value::Null);
    let rings = |v: &Value| -> Result<Vec<Ring>> {
        v.as_array()
            .ok_or_else(|| {
                Error::input(
                    Location::file(path).at_line(n),
                    format!("feature {n}: a polygon is not a list of rings"),
                )
            })?
            .iter()
            .map(|r| json_ring(path, n, r))
            .collect()
    };
    match kind {
        "Polygon" => Ok(vec![rings(coords)?]),
        "MultiPolygon" => coords
            .as_array()
            .ok_or_else(|| {
                Error::input(
                    Location::file(path).at_line(n),
                    format!("feature {n}: MultiPolygon coordinates are not a list of polygons"),
                )
            })?
            .iter()
            .map(rings)
            .collect(),
        other => Err(Error::input(
            Location::file(path).at_line(n),
            format!("feature {n} is a {other:?}; a boundary layer holds Polygon or MultiPolygon features"),
        )),
    }
}

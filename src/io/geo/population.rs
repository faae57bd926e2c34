//! Population layers for population weighting: a table of points
//! (longitude, latitude, count), GeoJSON points with a count property, or
//! any polygon layer with a count field (spread over its pieces by area).

use std::path::Path;

use geo::{Coord, MultiPolygon, Polygon};
use serde_json::Value;

use super::{check_lonlat, read_layer, LayerRequest};
use crate::core::overlay::{prepare, PopulationLayer};
use crate::error::{Error, Location, Result};
use crate::io::table::{read_table, ReadOptions};

/// Reads a population layer; `field` names the count column or property.
/// Returns the layer and the SHA-256 of its bytes.
pub fn read(spec: &str, field: &str) -> Result<(PopulationLayer, String)> {
    let path = Path::new(spec);
    let lower = spec.to_lowercase();
    if lower.ends_with(".csv") || lower.ends_with(".tsv") || lower.ends_with(".parquet") {
        return read_points_table(path, field);
    }
    if lower.ends_with(".json") || lower.ends_with(".geojson") {
        let bytes =
            std::fs::read(path).map_err(|e| Error::io(path, "cannot open population layer", e))?;
        let doc: Value = serde_json::from_slice(&bytes)
            .map_err(|e| Error::input(Location::file(path), format!("not valid JSON: {e}")))?;
        let is_points = doc
            .get("features")
            .and_then(Value::as_array)
            .and_then(|f| f.first())
            .and_then(|f| f.pointer("/geometry/type"))
            .and_then(Value::as_str)
            .is_some_and(|t| t == "Point" || t == "MultiPoint");
        if is_points {
            return read_geojson_points(path, &doc, field, super::sha256_hex(&[&bytes]));
        }
    }
    // A polygon layer: read with the ordinary readers, the count as the key.
    let layer = read_layer(&LayerRequest {
        spec: spec.to_string(),
        key: Some(field.to_string()),
        object: None,
        key_option: "--population-field",
        object_option: "--population-object",
    })?;
    let mut counts = Vec::with_capacity(layer.features.len());
    for f in &layer.features {
        let v: f64 = f
            .key
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite() && *v >= 0.0)
            .ok_or_else(|| {
                Error::input(
                    Location::file(&layer.path)
                        .at_line(f.number)
                        .in_column(field),
                    format!(
                        "feature {}: count {:?} is not a non-negative number",
                        f.number, f.key
                    ),
                )
            })?;
        counts.push(v);
    }
    // Repair each polygon on its own (keys here are counts, not codes).
    let mut polys = Vec::with_capacity(counts.len());
    for (f, c) in layer.features.iter().zip(counts) {
        let mut one = f.clone();
        one.key = f.number.to_string();
        let prepared = prepare(std::slice::from_ref(&one), layer.convention);
        let geom: MultiPolygon<f64> = prepared
            .units
            .into_iter()
            .next()
            .map(|u| u.geometry)
            .unwrap_or_else(|| MultiPolygon::<f64>::new(Vec::<Polygon<f64>>::new()));
        polys.push((geom, c));
    }
    Ok((PopulationLayer::Polygons(polys), layer.sha256))
}

fn read_points_table(path: &Path, field: &str) -> Result<(PopulationLayer, String)> {
    let bytes =
        std::fs::read(path).map_err(|e| Error::io(path, "cannot open population layer", e))?;
    let table = read_table(path, ReadOptions::default())?;
    let pick = |names: &[&str]| -> Result<usize> {
        for n in names {
            if let Ok(i) = table.column(n) {
                return Ok(i);
            }
        }
        table.column(names[0])
    };
    let lon = pick(&["lon", "longitude", "lng", "x"])?;
    let lat = pick(&["lat", "latitude", "y"])?;
    let count = table.column(field)?;
    let mut pts = Vec::with_capacity(table.len());
    for (i, r) in table.records.iter().enumerate() {
        let num = |c: usize| -> Result<f64> {
            let t = r[c].trim();
            t.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| Error::input(table.location(i, c), format!("{t:?} is not a number")))
        };
        let c = Coord {
            x: num(lon)?,
            y: num(lat)?,
        };
        super::check_coord(table.location(i, lon), "", c)?;
        let n = num(count)?;
        if n < 0.0 {
            return Err(Error::input(
                table.location(i, count),
                format!("count {n} is negative"),
            ));
        }
        pts.push((c, n));
    }
    Ok((PopulationLayer::Points(pts), super::sha256_hex(&[&bytes])))
}

fn read_geojson_points(
    path: &Path,
    doc: &Value,
    field: &str,
    sha: String,
) -> Result<(PopulationLayer, String)> {
    let features = doc
        .get("features")
        .and_then(Value::as_array)
        .cloned()
        .unwrap_or_default();
    let mut pts = Vec::new();
    for (i, f) in features.iter().enumerate() {
        let n = i as u64 + 1;
        let at = || Location::file(path).at_line(n).in_column(field);
        let count = match f.get("properties").and_then(|p| p.get(field)) {
            Some(Value::Number(x)) => x.as_f64().unwrap_or(f64::NAN),
            Some(Value::String(s)) => s.trim().parse().unwrap_or(f64::NAN),
            _ => {
                return Err(Error::input(
                    at(),
                    format!("feature {n} has no count in field {field:?}"),
                ))
            }
        };
        if !count.is_finite() || count < 0.0 {
            return Err(Error::input(
                at(),
                format!("feature {n}: the count is not a non-negative number"),
            ));
        }
        let g = f.get("geometry").unwrap_or(&Value::Null);
        let coords: Vec<&Value> = match g.get("type").and_then(Value::as_str) {
            Some("Point") => g.get("coordinates").into_iter().collect(),
            Some("MultiPoint") => g
                .get("coordinates")
                .and_then(Value::as_array)
                .map(|a| a.iter().collect())
                .unwrap_or_default(),
            other => {
                return Err(Error::input(
                    Location::file(path).at_line(n),
                    format!(
                        "feature {n} is a {other:?}; a point population layer holds Point features"
                    ),
                ))
            }
        };
        let share = count / coords.len().max(1) as f64;
        for c in coords {
            let (Some(x), Some(y)) = (
                c.get(0).and_then(Value::as_f64),
                c.get(1).and_then(Value::as_f64),
            ) else {
                return Err(Error::input(
                    Location::file(path).at_line(n),
                    format!("feature {n}: a position is not [lon, lat]"),
                ));
            };
            let c = Coord { x, y };
            check_lonlat(path, n, c)?;
            pts.push((c, share));
        }
    }
    Ok((PopulationLayer::Points(pts), sha))
}

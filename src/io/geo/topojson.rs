//! TopoJSON: arcs decoded (delta-encoded when quantized), rings stitched
//! from arcs without repeating the joint vertex, one object chosen.

use std::collections::BTreeSet;
use std::path::Path;

use geo::Coord;
use serde_json::Value;

use super::json_doc::{ArcProblem, Arcs};
use super::{check_coord, key_text, lonlat_ok, raw_features, resolve_keys, Layer, LayerRequest};
use crate::core::overlay::{Ring, RingConvention};
use crate::error::{Error, Location, Result};

fn has_polygons(obj: &Value) -> bool {
    match obj.get("type").and_then(Value::as_str) {
        Some("Polygon" | "MultiPolygon") => true,
        Some("GeometryCollection") => obj
            .get("geometries")
            .and_then(Value::as_array)
            .is_some_and(|g| g.iter().any(has_polygons)),
        _ => false,
    }
}

/// Reads one object of a parsed Topology (`doc` without its arcs, `arcs` as
/// read by [`super::json_doc`]). A panic inside (a bug) is turned into an
/// error naming the file as a last guard.
pub fn read(
    path: &Path,
    doc: &Value,
    arcs: Option<&Arcs>,
    sha256: String,
    req: &LayerRequest,
) -> Result<Layer> {
    super::guarded(path, || read_unguarded(path, doc, arcs, sha256, req))
}

fn read_unguarded(
    path: &Path,
    doc: &Value,
    arcs: Option<&Arcs>,
    sha256: String,
    req: &LayerRequest,
) -> Result<Layer> {
    let objects = doc
        .get("objects")
        .and_then(Value::as_object)
        .ok_or_else(|| Error::input(Location::file(path), "the Topology has no \"objects\""))?;
    let polygon_objects: Vec<&String> = objects
        .iter()
        .filter(|(_, o)| has_polygons(o))
        .map(|(k, _)| k)
        .collect();
    let names = |v: &[&String]| v.iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ");
    let name = match &req.object {
        Some(n) => {
            if !objects.contains_key(n) {
                return Err(Error::input(
                    Location::file(path),
                    format!(
                        "no object {n:?} for {}; the objects with polygons are: {}",
                        req.object_option,
                        names(&polygon_objects)
                    ),
                ));
            }
            n.clone()
        }
        None => match polygon_objects.as_slice() {
            [one] => (*one).clone(),
            [] => {
                return Err(Error::input(
                    Location::file(path),
                    "the Topology has no polygon object",
                ))
            }
            several => {
                return Err(Error::input(
                    Location::file(path),
                    format!(
                        "the Topology has several polygon objects: {}; choose one with {}",
                        names(several),
                        req.object_option
                    ),
                ))
            }
        },
    };
    let arcs = decode_arcs(path, doc, arcs)?;
    let obj = &objects[&name];
    let geometries: Vec<&Value> = match obj.get("type").and_then(Value::as_str) {
        Some("GeometryCollection") => obj
            .get("geometries")
            .and_then(Value::as_array)
            .map(|g| g.iter().collect())
            .ok_or_else(|| {
                Error::input(
                    Location::file(path),
                    format!(
                        "the object {name:?} is a GeometryCollection without a \"geometries\" list"
                    ),
                )
            })?,
        _ => vec![obj],
    };
    let mut fields = BTreeSet::new();
    let mut ids = Vec::with_capacity(geometries.len());
    let mut polygons = Vec::with_capacity(geometries.len());
    for (i, g) in geometries.iter().enumerate() {
        let n = i as u64 + 1;
        if let Some(p) = g.get("properties").and_then(Value::as_object) {
            fields.extend(p.keys().cloned());
        }
        ids.push(g.get("id").and_then(key_text));
        polygons.push(geometry_polygons(path, n, g, &arcs)?);
    }
    let fields: Vec<String> = fields.into_iter().collect();
    let numbers: Vec<u64> = (1..=geometries.len() as u64).collect();
    let (keys, key) = resolve_keys(path, req, &fields, &ids, &numbers, |i, field| {
        geometries[i]
            .get("properties")
            .and_then(|p| p.get(field))
            .and_then(key_text)
    })?;
    let features = raw_features(keys, polygons);
    Ok(Layer {
        path: path.to_path_buf(),
        sha256,
        format: "TopoJSON",
        object: Some(name),
        key,
        fields,
        features,
        convention: RingConvention::ExteriorClockwise,
        warnings: Vec::new(),
    })
}

/// All arcs in longitude/latitude, one after another.
struct Decoded {
    coords: Vec<Coord<f64>>,
    /// Where each arc starts in `coords`; one more entry holds the end.
    starts: Vec<usize>,
}

impl Decoded {
    fn get(&self, k: usize) -> Option<&[Coord<f64>]> {
        let (&a, &b) = (self.starts.get(k)?, self.starts.get(k + 1)?);
        Some(&self.coords[a..b])
    }

    fn len(&self) -> usize {
        self.starts.len().saturating_sub(1)
    }
}

/// Decodes all arcs to longitude/latitude.
fn decode_arcs(path: &Path, doc: &Value, arcs: Option<&Arcs>) -> Result<Decoded> {
    let bad =
        |what: &str| Error::input(Location::file(path), format!("malformed TopoJSON: {what}"));
    let transform = match doc.get("transform") {
        None | Some(Value::Null) => None,
        Some(t) => {
            let pair = |k: &str| -> Result<(f64, f64)> {
                let a = t
                    .get(k)
                    .and_then(Value::as_array)
                    .ok_or_else(|| bad(&format!("the transform has no {k:?} pair")))?;
                match (
                    a.first().and_then(Value::as_f64),
                    a.get(1).and_then(Value::as_f64),
                ) {
                    (Some(x), Some(y)) if x.is_finite() && y.is_finite() => Ok((x, y)),
                    _ => Err(bad(&format!(
                        "the transform's {k:?} is not a pair of finite numbers"
                    ))),
                }
            };
            Some((pair("scale")?, pair("translate")?))
        }
    };
    let arcs = arcs.ok_or_else(|| bad("no \"arcs\" list"))?;
    match &arcs.problem {
        None => {}
        Some(ArcProblem::NotAList) => return Err(bad("no \"arcs\" list")),
        Some(ArcProblem::ArcNotAList(i)) => {
            return Err(Error::input(
                Location::file(path).in_column("arcs"),
                format!("arc {i} is not a list of positions"),
            ))
        }
        Some(ArcProblem::NotAPair(i, k, what)) => {
            return Err(Error::input(
                Location::file(path).in_column("arcs"),
                format!("arc {i}, position {k} is not a pair of numbers (it is {what})"),
            ))
        }
    }
    let mut coords = Vec::with_capacity(arcs.points.len());
    for k in 0..arcs.len() {
        let (mut x, mut y) = (0.0f64, 0.0f64);
        for &[a, b] in arcs.arc(k) {
            match transform {
                Some(((sx, sy), (tx, ty))) => {
                    x += a;
                    y += b;
                    coords.push(Coord {
                        x: x * sx + tx,
                        y: y * sy + ty,
                    });
                }
                None => coords.push(Coord { x: a, y: b }),
            }
        }
    }
    Ok(Decoded {
        coords,
        starts: arcs.starts.clone(),
    })
}

fn ring_from_arcs(path: &Path, n: u64, place: &str, idx: &Value, arcs: &Decoded) -> Result<Ring> {
    let at = || Location::file(path).at_feature(n).in_column("arcs");
    let bad = |what: String| Error::input(at(), format!("{place}: {what}"));
    let list = idx
        .as_array()
        .ok_or_else(|| bad("the ring is not a list of arc indices".into()))?;
    let mut ring: Ring = Vec::new();
    for a in list {
        let i = a
            .as_i64()
            .ok_or_else(|| bad(format!("arc index {} is not an integer", short(a))))?;
        let (k, reversed) = if i >= 0 {
            (i as u64, false)
        } else {
            (!i as u64, true)
        };
        let arc = usize::try_from(k)
            .ok()
            .and_then(|k| arcs.get(k))
            .ok_or_else(|| {
                bad(format!(
                    "arc index {i} is out of range (the Topology has {} arcs)",
                    arcs.len()
                ))
            })?;
        // The message is made only for a coordinate that fails.
        if let Some(p) = arc.iter().position(|&c| !lonlat_ok(c)) {
            check_coord(
                at(),
                &format!("{place}, arc {k}, position {}, after the transform", p + 1),
                arc[p],
            )?;
        }
        let skip = usize::from(!ring.is_empty());
        if reversed {
            ring.extend(arc.iter().rev().skip(skip));
        } else {
            ring.extend(arc.iter().skip(skip));
        }
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

fn geometry_polygons(path: &Path, n: u64, g: &Value, arcs: &Decoded) -> Result<Vec<Vec<Ring>>> {
    let at = || Location::file(path).at_feature(n).in_column("arcs");
    let kind = g.get("type").and_then(Value::as_str);
    let a = g.get("arcs").unwrap_or(&Value::Null);
    let polygon = |p: &Value, number: Option<usize>| -> Result<Vec<Ring>> {
        let name = |r: usize| match number {
            Some(k) => format!("polygon {k}, ring {r}"),
            None => format!("ring {r}"),
        };
        p.as_array()
            .ok_or_else(|| {
                Error::input(
                    at(),
                    match number {
                        Some(k) => format!("polygon {k} is not a list of rings"),
                        None => "the polygon is not a list of rings".to_string(),
                    },
                )
            })?
            .iter()
            .enumerate()
            .map(|(r, ring)| ring_from_arcs(path, n, &name(r + 1), ring, arcs))
            .collect()
    };
    match kind {
        None => Ok(Vec::new()),
        Some("Polygon") => Ok(vec![polygon(a, None)?]),
        Some("MultiPolygon") => a
            .as_array()
            .ok_or_else(|| Error::input(at(), "MultiPolygon arcs are not a list of polygons"))?
            .iter()
            .enumerate()
            .map(|(k, p)| polygon(p, Some(k + 1)))
            .collect(),
        Some(other) => Err(Error::input(
            Location::file(path).at_feature(n),
            format!(
                "the geometry is a {other:?}; a boundary layer holds Polygon or MultiPolygon \
                 geometries"
            ),
        )),
    }
}

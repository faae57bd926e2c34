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

use crate::core::fips::CodeForm;
use crate::core::overlay::{RawFeature, Ring, RingConvention};
use crate::error::{Error, Location, Result};

pub mod geojson;
pub mod json_doc;
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
    /// What the reader wants the user to know (records left out, ...),
    /// each naming the file; see [`Layer::notes`].
    pub warnings: Vec<String>,
}

/// How a layer's keys were read: the code form found in them and how many
/// keys had a lost leading zero (or a spreadsheet tail) repaired.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct KeyReading {
    /// The form detected ([`CodeForm::detect`]).
    pub form: CodeForm,
    /// Keys that were repaired (e.g. 2201 from an integer field -> 02201).
    pub repaired: usize,
}

impl Layer {
    /// Reads every key through the one code parser (`core::fips`): the form
    /// is detected from all keys of the layer, so integer keys of a county
    /// layer get their leading zero back ("1001" -> "01001") and user keys
    /// that are not codes stay as written.
    pub fn normalize_keys(&mut self) -> Result<KeyReading> {
        let form = CodeForm::detect(self.features.iter().map(|f| f.key.as_str()));
        let mut repaired = 0;
        for f in &mut self.features {
            let (code, repairs) = form.read(&f.key).map_err(|e| {
                Error::input(
                    Location::file(&self.path)
                        .at_feature(f.number)
                        .in_column(&self.key),
                    format!("the key {:?} is not a code like the others: {e}", f.key),
                )
            })?;
            if !repairs.is_empty() {
                repaired += 1;
            }
            f.key = code.into_string();
        }
        Ok(KeyReading { form, repaired })
    }
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
    let json_doc::Doc { rest: doc, arcs } =
        json_doc::parse(bytes).map_err(|e| json_error(path, &e))?;
    let sha = sha256_hex(&[bytes]);
    match doc.get("type").and_then(Value::as_str) {
        Some("Topology") => topojson::read(path, &doc, arcs.as_ref(), sha, req),
        Some("FeatureCollection") => geojson::read(path, &doc, sha, req),
        other => Err(Error::input(
            Location::file(path),
            format!(
                "{}; expected a GeoJSON FeatureCollection or a TopoJSON Topology",
                match other {
                    Some(t) => format!("the JSON has the type {t:?}"),
                    None => "the JSON has no \"type\" member".to_string(),
                }
            ),
        )),
    }
}

/// A JSON syntax error in the project's words: where (line and character)
/// and what the parser expected.
fn json_error(path: &Path, e: &serde_json::Error) -> Error {
    use serde_json::error::Category;
    // The parser's own text without its " at line L column C" tail, which
    // the location already gives.
    let text = e.to_string();
    let what = text
        .rsplit_once(" at line ")
        .map_or(text.as_str(), |(w, _)| w)
        .to_string();
    let why = match e.classify() {
        Category::Eof => "the file ends in the middle of the JSON (truncated?)".to_string(),
        Category::Io => "the file cannot be read as text".to_string(),
        Category::Syntax | Category::Data => what,
    };
    Error::input(
        Location::file(path).at_line(e.line() as u64),
        format!(
            "not valid JSON at character {}: {why}; expected GeoJSON or TopoJSON",
            e.column()
        ),
    )
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

/// How far past ±180 / ±90 a coordinate may stray from floating-point
/// rounding (of a TopoJSON transform, say) before it is an error: about
/// 0.1 mm on the ground.
pub const LONLAT_SLACK: f64 = 1e-9;

/// Checks that a coordinate of feature `feature` is a longitude within
/// -180..180 and a latitude within -90..90 (see [`check_coord`]).
pub fn check_lonlat(path: &Path, feature: u64, c: Coord<f64>) -> Result<()> {
    check_coord(Location::file(path).at_feature(feature), "", c)
}

/// True when a coordinate is a longitude within -180..180 and a latitude
/// within -90..90 (within [`LONLAT_SLACK`]): the test of [`check_coord`],
/// for loops that make their message only when it fails.
pub fn lonlat_ok(c: Coord<f64>) -> bool {
    c.x.is_finite()
        && c.x.abs() <= 180.0 + LONLAT_SLACK
        && c.y.is_finite()
        && c.y.abs() <= 90.0 + LONLAT_SLACK
}

/// Checks that a coordinate is a longitude within -180..180 and a latitude
/// within -90..90 (within [`LONLAT_SLACK`]). The error names the location,
/// `detail` (which ring and vertex, say; may be empty) and the coordinate;
/// a layer in metres or feet is told to reproject.
pub fn check_coord(location: Location, detail: &str, c: Coord<f64>) -> Result<()> {
    if lonlat_ok(c) {
        return Ok(());
    }
    let lon_ok = c.x.is_finite() && c.x.abs() <= 180.0 + LONLAT_SLACK;
    let lat_ok = c.y.is_finite() && c.y.abs() <= 90.0 + LONLAT_SLACK;
    let what = match (lon_ok, lat_ok) {
        (false, true) => "its longitude is outside -180..180".to_string(),
        (true, false) => "its latitude is outside -90..90".to_string(),
        _ => "its longitude is outside -180..180 and its latitude outside -90..90".to_string(),
    };
    let hint = if !c.x.is_finite() || !c.y.is_finite() {
        "a coordinate must be a finite number"
    } else if c.x.abs() > 360.0 || c.y.abs() > 180.0 {
        "the layer looks projected (metres or feet): reproject it to longitude/latitude \
         (NAD83 or WGS84) first"
    } else {
        "the file is damaged, or longitude and latitude are swapped or shifted"
    };
    let detail = if detail.is_empty() {
        String::new()
    } else {
        format!("{detail}: ")
    };
    Err(Error::input(
        location,
        format!("{detail}coordinate ({}, {}): {what}; {hint}", c.x, c.y),
    ))
}

/// Runs a layer reader with a last guard: a panic inside it (a bug, or a
/// dependency's) becomes an error naming the file instead of ending the
/// program.
pub fn guarded<T>(path: &Path, read: impl FnOnce() -> Result<T>) -> Result<T> {
    crate::io::guard::catch(read).unwrap_or_else(|what| {
        Err(Error::input(
            Location::file(path),
            format!(
                "the layer could not be read ({what}); the file is damaged or in a form \
                 regionkey does not read"
            ),
        ))
    })
}

/// What to do with several features that carry the same key.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum RepeatedKeys {
    /// Take them together as one unit (their overlap counted once), with a
    /// warning naming each key.
    #[default]
    Merge,
    /// Refuse the layer, naming the first key and its features.
    Refuse,
}

/// A key carried by several features of a layer.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RepeatedKey {
    /// The key.
    pub key: String,
    /// The features (1-based numbers in file order) that carry it.
    pub features: Vec<u64>,
}

impl Layer {
    /// Keys carried by more than one feature, sorted by key.
    pub fn repeated_keys(&self) -> Vec<RepeatedKey> {
        let mut by_key: std::collections::BTreeMap<&str, Vec<u64>> = Default::default();
        for f in &self.features {
            by_key.entry(&f.key).or_default().push(f.number);
        }
        by_key
            .into_iter()
            .filter(|(_, v)| v.len() > 1)
            .map(|(k, features)| RepeatedKey {
                key: k.to_string(),
                features,
            })
            .collect()
    }

    /// The warnings to show about this layer: the reader's own (records
    /// left out, ...) and one line per repeated key (merged), or an error
    /// naming the first repeated key when `repeated` is
    /// [`RepeatedKeys::Refuse`].
    /// `option` names the command's option that refuses, for the message.
    pub fn notes(&self, repeated: RepeatedKeys, option: Option<&str>) -> Result<Vec<String>> {
        let mut out = self.warnings.clone();
        let keys = self.repeated_keys();
        let list = |v: &[u64]| v.iter().map(u64::to_string).collect::<Vec<_>>().join(", ");
        if let (RepeatedKeys::Refuse, Some(first)) = (repeated, keys.first()) {
            return Err(Error::input(
                Location::file(&self.path)
                    .at_feature(first.features[1])
                    .in_column(&self.key),
                format!(
                    "the key {:?} is carried by features {}{}; each unit must have one key{}",
                    first.key,
                    list(&first.features),
                    if keys.len() > 1 {
                        format!(", and {} more key(s) repeat", keys.len() - 1)
                    } else {
                        String::new()
                    },
                    option
                        .map(|o| format!(
                            " (leave out {o} refuse to take them together as one unit)"
                        ))
                        .unwrap_or_default()
                ),
            ));
        }
        const SHOWN: usize = 10;
        for k in keys.iter().take(SHOWN) {
            out.push(format!(
                "{}: the key {:?} ({}) is carried by features {}; they are taken together as \
                 one unit{}",
                self.path.display(),
                k.key,
                self.key,
                list(&k.features),
                option
                    .map(|o| format!(" (give {o} refuse to stop instead)"))
                    .unwrap_or_default()
            ));
        }
        if keys.len() > SHOWN {
            out.push(format!(
                "{}: {} more keys are carried by several features each and taken together \
                 likewise (the metadata's repairs list them all)",
                self.path.display(),
                keys.len() - SHOWN
            ));
        }
        Ok(out)
    }
}

/// Resolves the key of each feature. `ids` gives each feature's id,
/// `numbers` its 1-based number in the file (for messages) and `values(i,
/// field)` the text of a field. Errors: a field no feature has (listing the
/// fields), a feature without a value, no key and no ids.
pub fn resolve_keys(
    path: &Path,
    req: &LayerRequest,
    fields: &[String],
    ids: &[Option<String>],
    numbers: &[u64],
    values: impl Fn(usize, &str) -> Option<String>,
) -> Result<(Vec<String>, String)> {
    if ids.is_empty() {
        return Err(Error::input(
            Location::file(path),
            "the layer holds no features; a boundary layer needs at least one unit",
        ));
    }
    let mut keys = Vec::with_capacity(ids.len());
    match &req.key {
        None => {
            for (i, id) in ids.iter().enumerate() {
                let n = numbers[i];
                match id {
                    Some(k) => keys.push(k.clone()),
                    None => {
                        return Err(Error::input(
                            Location::file(path).at_feature(n),
                            format!(
                                "the feature has no id; give {} FIELD (the fields are: {})",
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
                let n = numbers[i];
                let v = if use_id { id.clone() } else { values(i, field) };
                match v {
                    Some(k) => keys.push(k),
                    None => {
                        return Err(Error::input(
                            Location::file(path).at_feature(n).in_column(field),
                            format!(
                                "the feature has no value in field {field:?}; every feature \
                                 needs its key"
                            ),
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

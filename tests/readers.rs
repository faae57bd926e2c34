//! The boundary-layer readers on valid and damaged input: Shapefiles (and
//! .zip), GeoJSON, TopoJSON.
//!
//! Valid Shapefiles here are written by the `shapefile` crate (0.7, with
//! `dbase` 0.6), an implementation of the ESRI Shapefile Technical
//! Description (1998) and of dBase III independent of regionkey's reader;
//! the byte offsets damaged below are those of that description (main
//! header 100 bytes, record header 8 bytes, Polygon content: type, box,
//! NumParts at 36, NumPoints at 40, Parts at 44) and of the dBase III
//! header (record count at byte 4, header length at 8, record length at 10,
//! field descriptors of 32 bytes from byte 32, each record opening with a
//! deletion flag, a space or `*`).

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;
use regionkey::io::geo::{read_layer, Layer, LayerRequest};
use shapefile::dbase::{FieldName, FieldValue, Record, TableWriterBuilder};
use shapefile::{Point, PolygonRing};

fn rk() -> Command {
    Command::cargo_bin("regionkey").unwrap()
}

fn request(spec: &Path, key: Option<&str>) -> LayerRequest {
    LayerRequest {
        spec: spec.to_string_lossy().to_string(),
        key: key.map(str::to_string),
        object: None,
        key_option: "--from-key",
        object_option: "--from-object",
    }
}

/// A closed ring from corner points.
fn ring(points: &[(f64, f64)]) -> Vec<Point> {
    let mut v: Vec<Point> = points.iter().map(|&(x, y)| Point::new(x, y)).collect();
    v.push(v[0]);
    v
}

/// Writes `zones.shp/.shx/.dbf` with a character key `ZONE` and a numeric
/// `CODE`: zone A is a square with a square hole, zone B two squares, zone
/// C one square. Exteriors run clockwise, holes counter-clockwise, as the
/// Technical Description asks.
fn write_zones(dir: &Path) -> PathBuf {
    let shp = dir.join("zones.shp");
    let builder = TableWriterBuilder::new()
        .add_character_field(FieldName::try_from("ZONE").unwrap(), 8)
        .add_numeric_field(FieldName::try_from("CODE").unwrap(), 10, 0);
    let mut w = shapefile::Writer::from_path(&shp, builder).unwrap();
    let cw = |x0: f64, y0: f64, x1: f64, y1: f64| ring(&[(x0, y0), (x0, y1), (x1, y1), (x1, y0)]);
    let ccw = |x0: f64, y0: f64, x1: f64, y1: f64| ring(&[(x0, y0), (x1, y0), (x1, y1), (x0, y1)]);
    let shapes = [
        (
            "A",
            6037.0,
            vec![
                PolygonRing::Outer(cw(0.0, 0.0, 4.0, 4.0)),
                PolygonRing::Inner(ccw(1.0, 1.0, 2.0, 2.0)),
            ],
        ),
        (
            "B",
            1001.0,
            vec![
                PolygonRing::Outer(cw(10.0, 0.0, 11.0, 1.0)),
                PolygonRing::Outer(cw(12.0, 0.0, 13.0, 1.0)),
            ],
        ),
        (
            "C",
            42.0,
            vec![PolygonRing::Outer(cw(-5.0, -5.0, -4.0, -4.0))],
        ),
    ];
    for (zone, code, rings) in shapes {
        let poly = shapefile::Polygon::with_rings(rings);
        let mut rec = Record::default();
        rec.insert(
            "ZONE".to_string(),
            FieldValue::Character(Some(zone.to_string())),
        );
        rec.insert("CODE".to_string(), FieldValue::Numeric(Some(code)));
        w.write_shape_and_record(&poly, &rec).unwrap();
    }
    drop(w);
    shp
}

fn read(spec: &Path, key: &str) -> regionkey::Result<Layer> {
    read_layer(&request(spec, Some(key)))
}

/// The message of an error, checked to be in the project's own words: no
/// dependency's debug output or I/O wording, and not the last guard that
/// turns a reader panic into an error.
fn message(e: regionkey::Error) -> String {
    let m = e.to_string();
    for foreign in [
        "Error {",
        "kind:",
        "failed to fill whole buffer",
        "record_num",
        "could not be read (",
    ] {
        assert!(!m.contains(foreign), "message in a dependency's words: {m}");
    }
    m
}

#[test]
fn a_shapefile_from_an_independent_writer_reads_back_with_its_keys_rings_and_holes() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let layer = read(&shp, "ZONE").unwrap();
    assert_eq!(layer.format, "Shapefile");
    assert_eq!(layer.fields, ["CODE", "ZONE"]);
    let keys: Vec<&str> = layer.features.iter().map(|f| f.key.as_str()).collect();
    assert_eq!(keys, ["A", "B", "C"]);
    let numbers: Vec<u64> = layer.features.iter().map(|f| f.number).collect();
    assert_eq!(numbers, [1, 2, 3]);
    // A: one polygon with its hole; B: two polygons; C: one.
    let shape: Vec<Vec<usize>> = layer
        .features
        .iter()
        .map(|f| f.polygons.iter().map(|p| p.len()).collect())
        .collect();
    assert_eq!(shape, [vec![2], vec![1, 1], vec![1]]);
    let hole = &layer.features[0].polygons[0][1];
    assert_eq!(hole.len(), 5);
    assert_eq!((hole[2].x, hole[2].y), (2.0, 2.0));
    assert!(layer.warnings.is_empty());
    // A numeric key is read as the integer it holds.
    let by_code = read(&shp, "CODE").unwrap();
    let keys: Vec<&str> = by_code.features.iter().map(|f| f.key.as_str()).collect();
    assert_eq!(keys, ["6037", "1001", "42"]);
}

#[test]
fn every_truncation_of_a_shapefile_part_ends_in_an_error_naming_that_file() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    for ext in ["shp", "shx", "dbf"] {
        let path = shp.with_extension(ext);
        let whole = std::fs::read(&path).unwrap();
        for len in 0..whole.len() {
            std::fs::write(&path, &whole[..len]).unwrap();
            match read(&shp, "ZONE") {
                Ok(_) => {
                    // Only the dBase end-of-file mark (0x1A) may be cut off.
                    assert!(
                        ext == "dbf" && len == whole.len() - 1 && whole[len] == 0x1A,
                        "{ext} cut to {len} of {} bytes was read",
                        whole.len()
                    );
                }
                Err(e) => {
                    let m = message(e);
                    assert!(m.contains(&format!("zones.{ext}")), "{ext} at {len}: {m}");
                }
            }
        }
        std::fs::write(&path, &whole).unwrap();
    }
}

#[test]
fn a_huge_point_count_in_a_record_is_refused_naming_the_record_and_field() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let mut b = std::fs::read(&shp).unwrap();
    // Record 1's content starts at 108; NumPoints at content byte 40.
    b[148..152].copy_from_slice(&i32::MAX.to_le_bytes());
    std::fs::write(&shp, &b).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("zones.shp: record 1"), "{m}");
    assert!(m.contains("NumPoints"), "{m}");
    assert!(m.contains("2147483647 point(s)"), "{m}");
    // A negative part count.
    let mut b2 = std::fs::read(&shp).unwrap();
    b2[148..152].copy_from_slice(&10i32.to_le_bytes());
    b2[144..148].copy_from_slice(&(-3i32).to_le_bytes());
    std::fs::write(&shp, &b2).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("record 1") && m.contains("NumParts"), "{m}");
}

#[test]
fn a_record_length_past_the_end_of_the_shp_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let mut b = std::fs::read(&shp).unwrap();
    // Record 1's content length (16-bit words, big-endian) at byte 104.
    b[104..108].copy_from_slice(&0x4000_0000i32.to_be_bytes());
    std::fs::write(&shp, &b).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("zones.shp: record 1"), "{m}");
    assert!(m.contains("content length of 2147483648 bytes"), "{m}");
}

#[test]
fn a_dbf_header_promising_more_records_than_the_file_holds_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let dbf = shp.with_extension("dbf");
    let mut b = std::fs::read(&dbf).unwrap();
    // 2,000,000,000 records of ~20 bytes: a 40 GB claim in a tiny file.
    b[4..8].copy_from_slice(&2_000_000_000u32.to_le_bytes());
    std::fs::write(&dbf, &b).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("zones.dbf"), "{m}");
    assert!(m.contains("promises 2000000000 record(s)"), "{m}");
}

#[test]
fn a_dbf_record_with_a_broken_deletion_flag_names_the_record() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let dbf = shp.with_extension("dbf");
    let mut b = std::fs::read(&dbf).unwrap();
    let header = u16::from_le_bytes([b[8], b[9]]) as usize;
    let record = u16::from_le_bytes([b[10], b[11]]) as usize;
    b[header + record] = b'#';
    std::fs::write(&dbf, &b).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("zones.dbf: record 2"), "{m}");
    assert!(m.contains("deletion flag"), "{m}");
}

#[test]
fn deleted_dbf_records_are_left_out_with_their_shapes_and_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let dbf = shp.with_extension("dbf");
    let mut b = std::fs::read(&dbf).unwrap();
    let header = u16::from_le_bytes([b[8], b[9]]) as usize;
    let record = u16::from_le_bytes([b[10], b[11]]) as usize;
    b[header + record] = b'*';
    std::fs::write(&dbf, &b).unwrap();
    let layer = read(&shp, "ZONE").unwrap();
    let kept: Vec<(u64, &str)> = layer
        .features
        .iter()
        .map(|f| (f.number, f.key.as_str()))
        .collect();
    assert_eq!(kept, [(1, "A"), (3, "C")]);
    assert_eq!(layer.warnings.len(), 1);
    assert!(
        layer.warnings[0].contains("zones.dbf") && layer.warnings[0].contains("record(s) 2"),
        "{:?}",
        layer.warnings
    );
}

#[test]
fn a_shx_that_disagrees_with_the_shp_names_the_record() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let shx = shp.with_extension("shx");
    let mut b = std::fs::read(&shx).unwrap();
    // Entry 2 (bytes 108..116): offset in 16-bit words.
    b[108..112].copy_from_slice(&9999i32.to_be_bytes());
    std::fs::write(&shx, &b).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("zones.shx: record 2"), "{m}");
    assert!(m.contains("remove the .shx"), "{m}");
    // Without the .shx the .shp alone is read.
    std::fs::remove_file(&shx).unwrap();
    assert_eq!(read(&shp, "ZONE").unwrap().features.len(), 3);
}

#[test]
fn a_shape_of_another_type_and_a_bad_file_code_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let whole = std::fs::read(&shp).unwrap();
    let mut b = whole.clone();
    // Record 2's shape type: record 1 is at 100 with its content length.
    let len1 = i32::from_be_bytes([b[104], b[105], b[106], b[107]]) as usize * 2;
    let at = 100 + 8 + len1 + 8;
    b[at..at + 4].copy_from_slice(&1i32.to_le_bytes());
    std::fs::write(&shp, &b).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("zones.shp: record 2"), "{m}");
    assert!(m.contains("is a Point"), "{m}");
    let mut b = whole.clone();
    b[0..4].copy_from_slice(&1234i32.to_be_bytes());
    std::fs::write(&shp, &b).unwrap();
    let m = message(read(&shp, "ZONE").unwrap_err());
    assert!(m.contains("not a Shapefile .shp"), "{m}");
}

/// Writes the zones into `zones.zip` (members under `zones/`), deflated or
/// stored.
fn zip_zones(dir: &Path, method: zip::CompressionMethod) -> PathBuf {
    let shp = write_zones(dir);
    let zip_path = dir.join("zones.zip");
    let f = std::fs::File::create(&zip_path).unwrap();
    let mut z = zip::ZipWriter::new(f);
    for ext in ["shp", "shx", "dbf"] {
        z.start_file(
            format!("zones/zones.{ext}"),
            zip::write::SimpleFileOptions::default().compression_method(method),
        )
        .unwrap();
        std::io::Write::write_all(&mut z, &std::fs::read(shp.with_extension(ext)).unwrap())
            .unwrap();
    }
    z.finish().unwrap();
    zip_path
}

#[test]
fn every_truncation_of_a_zipped_shapefile_ends_in_an_error_naming_the_zip() {
    let dir = tempfile::tempdir().unwrap();
    let zip_path = zip_zones(dir.path(), zip::CompressionMethod::Deflated);
    let whole = std::fs::read(&zip_path).unwrap();
    assert_eq!(read(&zip_path, "ZONE").unwrap().features.len(), 3);
    for len in 0..whole.len() {
        std::fs::write(&zip_path, &whole[..len]).unwrap();
        let m = message(read(&zip_path, "ZONE").unwrap_err());
        assert!(m.contains("zones.zip"), "cut to {len}: {m}");
    }
}

#[test]
fn damage_inside_a_zip_member_names_the_member() {
    let dir = tempfile::tempdir().unwrap();
    let zip_path = zip_zones(dir.path(), zip::CompressionMethod::Stored);
    let mut b = std::fs::read(&zip_path).unwrap();
    // The .shp member is stored as it is: find its file code (9994,
    // big-endian) and damage it; the zip's checksum no longer agrees.
    let code = 9994i32.to_be_bytes();
    let at = b.windows(4).position(|w| w == code).unwrap();
    b[at] ^= 0xFF;
    std::fs::write(&zip_path, &b).unwrap();
    let m = message(read(&zip_path, "ZONE").unwrap_err());
    assert!(m.contains("zones.zip"), "{m}");
}

// ---------------------------------------------------------------------------
// Coordinates outside longitude/latitude ranges, on the command line
// ---------------------------------------------------------------------------

fn geojson(dir: &Path, second_x: f64) -> PathBuf {
    let p = dir.join("zones.geojson");
    let text = format!(
        r#"{{"type":"FeatureCollection","features":[
{{"type":"Feature","properties":{{"ID":"A"}},"geometry":{{"type":"Polygon","coordinates":[[[0,0],[1,0],[1,1],[0,0]]]}}}},
{{"type":"Feature","properties":{{"ID":"B"}},"geometry":{{"type":"MultiPolygon","coordinates":[[[[2,0],[3,0],[3,1],[2,0]]],[[[4,0],[{second_x},0],[5,1],[4,0]]]]}}}}]}}"#
    );
    std::fs::write(&p, text).unwrap();
    p
}

/// Runs an overlay of `layer` onto itself into `out`, which holds "old".
fn overlay_onto_itself(layer: &Path, out: &Path, key: &str) -> assert_cmd::assert::Assert {
    std::fs::write(out, "old").unwrap();
    rk().arg("overlay")
        .arg(layer)
        .arg(layer)
        .args(["--from-key", key, "--to-key", key, "--output"])
        .arg(out)
        .assert()
}

#[test]
fn a_geojson_vertex_at_longitude_500_is_refused_naming_feature_ring_and_coordinate() {
    let dir = tempfile::tempdir().unwrap();
    let layer = geojson(dir.path(), 500.0);
    let out = dir.path().join("xw.csv");
    overlay_onto_itself(&layer, &out, "ID")
        .code(1)
        .stderr(predicate::str::contains("zones.geojson: feature 2"))
        .stderr(predicate::str::contains("polygon 2, ring 1, position 2"))
        .stderr(predicate::str::contains("(500, 0)"))
        .stderr(predicate::str::contains("longitude is outside -180..180"))
        .stderr(predicate::str::contains("panicked").not());
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "old");
    // 180 itself is a longitude; so is a hair over it from rounding.
    let layer = geojson(dir.path(), 180.0);
    overlay_onto_itself(&layer, &out, "ID").success();
}

#[test]
fn a_topojson_whose_transform_puts_a_vertex_past_the_pole_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("zones.topojson");
    // Quantized: positions are deltas; scale 1, translate (0, 89).
    // Arc 0 goes (0,89) (1,89) (1,91) (0,89): latitude 91 at position 3.
    std::fs::write(
        &p,
        r#"{"type":"Topology","transform":{"scale":[1,1],"translate":[0,89]},
"objects":{"zones":{"type":"GeometryCollection","geometries":[
{"type":"Polygon","properties":{"ID":"A"},"arcs":[[0]]}]}},
"arcs":[[[0,0],[1,0],[0,2],[-1,-2]]]}"#,
    )
    .unwrap();
    let out = dir.path().join("xw.csv");
    overlay_onto_itself(&p, &out, "ID")
        .code(1)
        .stderr(predicate::str::contains("zones.topojson: feature 1"))
        .stderr(predicate::str::contains("arc 0, position 3"))
        .stderr(predicate::str::contains("(1, 91)"))
        .stderr(predicate::str::contains("latitude is outside -90..90"));
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "old");
}

#[test]
fn a_shapefile_vertex_past_the_pole_is_refused_naming_the_record() {
    let dir = tempfile::tempdir().unwrap();
    let shp = write_zones(dir.path());
    let mut b = std::fs::read(&shp).unwrap();
    // Record 1 content at 108; 2 parts; points at 108 + 44 + 8; the y of
    // point 2 is 8 bytes further than its x.
    let y2 = 108 + 44 + 8 + 16 + 8;
    b[y2..y2 + 8].copy_from_slice(&95.5f64.to_le_bytes());
    std::fs::write(&shp, &b).unwrap();
    let out = dir.path().join("xw.csv");
    overlay_onto_itself(&shp, &out, "ZONE")
        .code(1)
        .stderr(predicate::str::contains("zones.shp: feature 1"))
        .stderr(predicate::str::contains("ring 1, vertex 2"))
        .stderr(predicate::str::contains("(0, 95.5)"));
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "old");
}

#[test]
fn a_projected_layer_without_a_prj_is_told_to_reproject() {
    let dir = tempfile::tempdir().unwrap();
    let layer = geojson(dir.path(), 512_345.0);
    let out = dir.path().join("xw.csv");
    overlay_onto_itself(&layer, &out, "ID")
        .code(1)
        .stderr(predicate::str::contains("looks projected"))
        .stderr(predicate::str::contains("reproject"));
}

// ---------------------------------------------------------------------------
// Features that share a key
// ---------------------------------------------------------------------------

fn shared_key_layer(dir: &Path) -> PathBuf {
    let p = dir.join("shared.geojson");
    std::fs::write(
        &p,
        r#"{"type":"FeatureCollection","features":[
{"type":"Feature","properties":{"ID":"A"},"geometry":{"type":"Polygon","coordinates":[[[0,0],[1,0],[1,1],[0,0]]]}},
{"type":"Feature","properties":{"ID":"B"},"geometry":{"type":"Polygon","coordinates":[[[2,0],[3,0],[3,1],[2,0]]]}},
{"type":"Feature","properties":{"ID":"A"},"geometry":{"type":"Polygon","coordinates":[[[4,0],[5,0],[5,1],[4,0]]]}}]}"#,
    )
    .unwrap();
    p
}

#[test]
fn features_sharing_a_key_are_merged_with_a_warning_naming_the_key() {
    let dir = tempfile::tempdir().unwrap();
    let layer = shared_key_layer(dir.path());
    let out = dir.path().join("xw.csv");
    overlay_onto_itself(&layer, &out, "ID")
        .success()
        .stderr(predicate::str::contains("warning: "))
        .stderr(predicate::str::contains(
            "the key \"A\" (ID) is carried by features 1, 3; they are taken together as one unit",
        ));
    // One unit A: its two triangles map onto itself with weight 1.
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(text.contains("\nA,A,1.000000000000,"), "{text}");
    assert_eq!(text.lines().count(), 3, "{text}");
}

#[test]
fn features_sharing_a_key_are_refused_on_request() {
    let dir = tempfile::tempdir().unwrap();
    let layer = shared_key_layer(dir.path());
    let out = dir.path().join("xw.csv");
    std::fs::write(&out, "old").unwrap();
    rk().arg("overlay")
        .arg(&layer)
        .arg(&layer)
        .args([
            "--from-key",
            "ID",
            "--to-key",
            "ID",
            "--repeated-keys",
            "refuse",
        ])
        .arg("--output")
        .arg(&out)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("shared.geojson: feature 3"))
        .stderr(predicate::str::contains(
            "\"A\" is carried by features 1, 3",
        ));
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "old");
}

#[test]
fn a_layer_without_features_is_refused_not_read_as_an_empty_crosswalk() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("empty.geojson");
    std::fs::write(&p, r#"{"type":"FeatureCollection","features":[]}"#).unwrap();
    let out = dir.path().join("xw.csv");
    overlay_onto_itself(&p, &out, "ID")
        .code(1)
        .stderr(predicate::str::contains(
            "empty.geojson: the layer holds no features",
        ));
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "old");
}

// ---------------------------------------------------------------------------
// Crosswalk problems name the file, line and column
// ---------------------------------------------------------------------------

fn two_crosswalks(dir: &Path, xy: &str, yz: &str) -> (PathBuf, PathBuf) {
    let (a, b) = (dir.join("xy.csv"), dir.join("yz.csv"));
    std::fs::write(&a, xy).unwrap();
    std::fs::write(&b, yz).unwrap();
    (a, b)
}

fn chain(a: &Path, b: &Path) -> assert_cmd::assert::Assert {
    rk().arg("chain").arg(a).arg(b).args(["-o", "-"]).assert()
}

#[test]
fn chain_names_the_line_of_a_repeated_pair_in_the_second_crosswalk() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = two_crosswalks(
        dir.path(),
        "from_code,to_code,weight\nA,Y1,1\n",
        "from_code,to_code,weight\nY1,Z,0.5\nY1,Z,0.5\n",
    );
    chain(&a, &b)
        .code(1)
        .stderr(predicate::str::contains(
            "yz.csv: line 3: column \"to_code\"",
        ))
        .stderr(predicate::str::contains("Y1 -> Z is on lines 2, 3"));
}

#[test]
fn chain_names_the_lines_of_a_source_whose_weights_do_not_add_up() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = two_crosswalks(
        dir.path(),
        "from_code,to_code,weight\nB,Y1,1\nA,Y1,0.3\nA,Y1b,0.4\n",
        "from_code,to_code,weight\nY1,Z,1\nY1b,Z,1\n",
    );
    chain(&a, &b)
        .code(1)
        .stderr(predicate::str::contains(
            "xy.csv: line 3: column \"weight\"",
        ))
        .stderr(predicate::str::contains(
            "source A (line(s) 3, 4) add up to 0.7",
        ));
}

#[test]
fn chain_names_the_line_of_a_target_missing_from_the_second_crosswalk() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = two_crosswalks(
        dir.path(),
        "from_code,to_code,weight\nA,Y1,0.5\nA,Y2,0.5\n",
        "from_code,to_code,weight\nY1,Z,1\n",
    );
    chain(&a, &b)
        .code(1)
        .stderr(predicate::str::contains(
            "xy.csv: line 3: column \"to_code\"",
        ))
        .stderr(predicate::str::contains("Y2"))
        .stderr(predicate::str::contains("yz.csv"));
}

#[test]
fn apply_names_the_line_of_a_weight_outside_zero_to_one() {
    let dir = tempfile::tempdir().unwrap();
    let cw = dir.path().join("neg.csv");
    std::fs::write(
        &cw,
        "from_code,to_code,weight\n01001,01003,-0.5\n01001,01005,1.5\n",
    )
    .unwrap();
    let data = dir.path().join("d.csv");
    std::fs::write(&data, "code,n\n01001,10\n").unwrap();
    rk().arg("apply")
        .arg(&data)
        .arg("--crosswalk")
        .arg(&cw)
        .args(["--sum", "n", "-o"])
        .arg(dir.path().join("out.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "neg.csv: line 2: column \"weight\"",
        ))
        .stderr(predicate::str::contains("01001 -> 01003 is -0.5"));
}

// A damaged Parquet file (fixtures/damaged/README.md) whose data page in
// column "basis" claims -23 values: the polars decoder asked for 2^61 bytes
// and the process aborted (exit 134), before any panic guard could act.
// The footer and page headers are now checked before polars reads them.
#[test]
fn a_parquet_file_whose_metadata_claims_an_impossible_size_is_refused() {
    rk().args(["inspect", "fixtures/damaged/parquet-decoder-abort.parquet"])
        .env("RUST_BACKTRACE", "0")
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "parquet-decoder-abort.parquet: row group 1: column \"basis\"",
        ))
        .stderr(predicate::str::contains("claims -23 values"))
        .stderr(predicate::str::contains("panicked").not());
}

// A damaged Parquet file (fixtures/damaged/README.md) that polars, built
// without debug assertions (release), decodes into 5 rows with an empty
// column "from_code": the table reader indexed past the column's end and
// panicked (exit 101). Every column's length is now checked. In a debug
// build a debug assertion inside the polars decoder fires first and the
// panic guard refuses the file; either way it is a located refusal.
#[test]
fn a_parquet_file_that_decodes_to_a_short_column_is_refused() {
    let out = rk()
        .args(["inspect", "fixtures/damaged/parquet-short-column.parquet"])
        .env("RUST_BACKTRACE", "0")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    let said = err.lines().last().unwrap_or_default();
    assert!(
        said.starts_with("regionkey: error: fixtures/damaged/parquet-short-column.parquet: ")
            && (said.contains("column \"from_code\": cannot read as Parquet: the file is damaged (the column has 0 values, the table 5 rows)")
                || said.contains("the file is damaged (its decoder stopped)")),
        "{err}"
    );
}

// The same file as apply's data table: apply reads Parquet through its own
// reader (only the columns it needs), checked the same way.
#[test]
fn apply_refuses_the_damaged_parquet_file_naming_row_group_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let cw = dir.path().join("cw.csv");
    std::fs::write(&cw, "from_code,to_code,weight\n09001,09190,1\n").unwrap();
    rk().args([
        "apply",
        "fixtures/damaged/parquet-decoder-abort.parquet",
        "--crosswalk",
    ])
    .arg(&cw)
    .args(["--code-column", "from_code", "--sum", "weight", "-o"])
    .arg(dir.path().join("out.csv"))
    .env("RUST_BACKTRACE", "0")
    .assert()
    .code(1)
    .stderr(predicate::str::contains(
        "parquet-decoder-abort.parquet: row group 1: column \"basis\"",
    ));
}

// Parquet files written by pyarrow and DuckDB, writers independent of
// regionkey and of polars (fixtures/parquet/README.md): the structure check
// must accept every form they write (row groups, several pages, v1 and v2
// data pages, dictionary and plain, five codecs), and both readers must
// read the values the fixture README describes.
#[test]
fn parquet_files_of_other_writers_pass_the_check_and_read_as_written() {
    use regionkey::io::data::{read, DataSpec};
    use regionkey::io::guard::parquet::check_file;
    use regionkey::io::table::{read_table, ReadOptions};
    let codes = [
        "01001", "", "02261", "6037", "01003", "46113", "09001", "51515",
    ];
    let mut files: Vec<PathBuf> = std::fs::read_dir("fixtures/parquet")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "parquet"))
        .collect();
    files.sort();
    assert_eq!(files.len(), 8, "{files:?}");
    for f in &files {
        check_file(f).unwrap_or_else(|e| panic!("{e}"));
        let t = read_table(f, ReadOptions::default()).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(t.headers, ["code", "year", "count"], "{f:?}");
        assert_eq!(t.len(), 200, "{f:?}");
        for (i, r) in t.records.iter().enumerate() {
            assert_eq!(&r[0], codes[i % 8], "{f:?} row {i}");
            assert_eq!(
                r[1].parse::<i64>().unwrap(),
                2010 + (i as i64) % 14,
                "{f:?} row {i}"
            );
            if i % 17 == 3 {
                assert_eq!(&r[2], "", "{f:?} row {i}");
            } else {
                assert_eq!(
                    r[2].parse::<f64>().unwrap(),
                    i as f64 * 1.5,
                    "{f:?} row {i}"
                );
            }
        }
        let spec = DataSpec {
            path: f.clone(),
            separator: None,
            code_column: "code".into(),
            state_column: None,
            period_column: Some("year".into()),
            value_columns: vec!["count".into()],
            missing: vec!["NA".into()],
            method_column: None,
        };
        let data = read(&spec).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(data.rows, 200, "{f:?}");
        let index = data.index();
        // One row in 8 has no code; 14 distinct years.
        assert_eq!(index.missing_code.0, 25, "{f:?}");
        assert_eq!(index.periods.len(), 14, "{f:?}");
    }
}

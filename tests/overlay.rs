//! The overlay: hand-computable geometries, the real 2017 -> 2023 county
//! change against an independent reference, the R*-tree against brute
//! force, population weighting, and the command line.

use std::collections::BTreeMap;

use assert_cmd::Command;
use geo::algorithm::bool_ops::BooleanOps;
use geo::{Coord, LineString, MultiPolygon, Polygon};
use predicates::prelude::*;
use regionkey::core::crosswalk::Basis;
use regionkey::core::geodesy::WGS84;
use regionkey::core::overlay::{
    candidate_pairs, candidate_pairs_brute_force, overlay, prepare, Options, OverlayResult,
    PopulationLayer, RawFeature, RingConvention, Unit, Weighting,
};
use regionkey::io::geo::{read_layer, LayerRequest};

fn ring(pts: &[(f64, f64)]) -> Vec<Coord<f64>> {
    pts.iter().map(|&(x, y)| Coord { x, y }).collect()
}

fn rect(x0: f64, y0: f64, x1: f64, y1: f64) -> Vec<Coord<f64>> {
    ring(&[(x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0)])
}

/// A feature by hand: code and polygons (rings of coordinates).
type Hand<'a> = (&'a str, Vec<Vec<Vec<Coord<f64>>>>);

fn units(features: Vec<Hand<'_>>) -> Vec<Unit> {
    let raw: Vec<RawFeature> = features
        .into_iter()
        .enumerate()
        .map(|(i, (k, polygons))| RawFeature {
            number: i as u64 + 1,
            key: k.into(),
            polygons,
        })
        .collect();
    prepare(&raw, RingConvention::ExteriorCounterClockwise).units
}

fn run(sources: &[Unit], targets: &[Unit], min_share: f64, weighting: Weighting) -> OverlayResult {
    overlay(
        sources,
        targets,
        &Options {
            min_share,
            weighting,
        },
        &|| {},
    )
}

/// (from, to) -> (weight, target_share)
fn table(r: &OverlayResult) -> BTreeMap<(String, String), (f64, Option<f64>)> {
    r.crosswalk
        .rows
        .iter()
        .map(|w| {
            (
                (w.from_code.clone(), w.to_code.clone().unwrap_or_default()),
                (w.weight, w.target_share),
            )
        })
        .collect()
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

#[test]
fn a_source_straddling_two_targets_splits_by_longitude_span() {
    // Cells between the same parallels have areas proportional to their
    // longitude span (exact on the ellipsoid), so 1° of 4° is 1/4.
    let s = units(vec![("S", vec![vec![rect(0.0, 0.0, 4.0, 1.0)]])]);
    let t = units(vec![
        ("A", vec![vec![rect(0.0, 0.0, 1.0, 1.0)]]),
        ("B", vec![vec![rect(1.0, 0.0, 4.0, 1.0)]]),
    ]);
    let m = table(&run(&s, &t, 0.0, Weighting::Area));
    assert_eq!(m.len(), 2);
    assert!(close(m[&("S".into(), "A".into())].0, 0.25, 1e-12));
    assert!(close(m[&("S".into(), "B".into())].0, 0.75, 1e-12));
    assert!(close(m[&("S".into(), "B".into())].1.unwrap(), 1.0, 1e-9));
}

#[test]
fn a_hole_is_not_counted_in_either_piece() {
    // A 2°x2° square with a centred 1°x1° hole, cut down the middle: by
    // symmetry 1/2 each; each target is half full.
    let s = units(vec![(
        "S",
        vec![vec![rect(0.0, 0.0, 2.0, 2.0), rect(0.5, 0.5, 1.5, 1.5)]],
    )]);
    let t = units(vec![
        ("A", vec![vec![rect(0.0, 0.0, 1.0, 2.0)]]),
        ("B", vec![vec![rect(1.0, 0.0, 2.0, 2.0)]]),
    ]);
    let r = run(&s, &t, 0.0, Weighting::Area);
    let m = table(&r);
    assert!(close(m[&("S".into(), "A".into())].0, 0.5, 1e-12));
    // target share = (cell(0,0,1,2) - cell(0.5,0.5,1,1.5)) / cell(0,0,1,2)
    let full = WGS84.cell_area(0.0, 0.0, 1.0, 2.0);
    let hole = WGS84.cell_area(0.5, 0.5, 1.0, 1.5);
    assert!(close(
        m[&("S".into(), "A".into())].1.unwrap(),
        (full - hole) / full,
        1e-9
    ));
    assert!(close(r.sources[0].area, 2.0 * full - 2.0 * hole, 1e-3));
}

#[test]
fn a_multipolygon_source_lies_wholly_in_one_target() {
    let s = units(vec![(
        "S",
        vec![
            vec![rect(0.0, 0.0, 1.0, 1.0)],
            vec![rect(2.0, 0.0, 3.0, 1.0)],
        ],
    )]);
    let t = units(vec![("T", vec![vec![rect(0.0, 0.0, 3.0, 1.0)]])]);
    let m = table(&run(&s, &t, 0.0, Weighting::Area));
    assert_eq!(m.len(), 1);
    let (w, share) = m[&("S".into(), "T".into())];
    assert!(close(w, 1.0, 1e-12));
    assert!(close(share.unwrap(), 2.0 / 3.0, 1e-9));
}

#[test]
fn a_source_outside_every_target_keeps_its_area_in_a_row_without_target() {
    let s = units(vec![
        ("HALF", vec![vec![rect(0.0, 0.0, 2.0, 1.0)]]),
        ("OUT", vec![vec![rect(20.0, 0.0, 21.0, 1.0)]]),
    ]);
    let t = units(vec![
        ("T", vec![vec![rect(0.0, 0.0, 1.0, 1.0)]]),
        ("LONELY", vec![vec![rect(50.0, 0.0, 51.0, 1.0)]]),
    ]);
    let r = run(&s, &t, 0.0, Weighting::Area);
    let m = table(&r);
    assert!(close(m[&("HALF".into(), "T".into())].0, 0.5, 1e-12));
    assert!(close(m[&("HALF".into(), String::new())].0, 0.5, 1e-12));
    assert!(close(m[&("OUT".into(), String::new())].0, 1.0, 1e-12));
    // a target with no source is reported, not silently absent
    assert_eq!(r.unreached_targets, vec!["LONELY".to_string()]);
}

#[test]
fn slivers_below_min_share_are_dropped_and_the_source_renormalized() {
    // 0.05 % of the source lies in B (1/2000 of the longitude span), and
    // B is a large target, so the piece is a sliver at the default 0.1 %.
    let s = units(vec![("S", vec![vec![rect(0.0, 0.0, 2.0, 1.0)]])]);
    let t = units(vec![
        ("A", vec![vec![rect(0.0, 0.0, 1.999, 1.0)]]),
        ("B", vec![vec![rect(1.999, 0.0, 5.0, 1.0)]]),
    ]);
    let r = run(&s, &t, 0.001, Weighting::Area);
    let m = table(&r);
    assert_eq!(m.len(), 1);
    assert!(close(m[&("S".into(), "A".into())].0, 1.0, 1e-12));
    assert!(close(r.sources[0].dropped_share, 0.0005, 1e-9));
}

#[test]
fn a_fully_covered_sources_pieces_sum_to_its_area_within_1e_9() {
    // Long slanted edges (where geodesic and lon/lat edges differ most) and
    // a zig-zag cut: the lon/lat-edge area of the pieces adds up.
    let source = Polygon::new(
        LineString::from(vec![
            (-120.0, 30.0),
            (-95.0, 33.0),
            (-90.0, 48.0),
            (-118.0, 47.0),
            (-120.0, 30.0),
        ]),
        vec![],
    );
    let cut = [
        (-130.0, 20.0),
        (-107.0, 20.0),
        (-101.0, 36.0),
        (-111.0, 41.0),
        (-99.0, 60.0),
        (-130.0, 60.0),
    ];
    let west = Polygon::new(LineString::from(cut.to_vec()), vec![]);
    let mut east_pts = vec![(-80.0, 20.0), (-80.0, 60.0)];
    east_pts.extend(cut[1..5].iter().rev().copied());
    let east = Polygon::new(LineString::from(east_pts), vec![]);
    let whole = WGS84.polygon_area(&source);
    let pieces = WGS84.multi_polygon_area(&source.intersection(&west))
        + WGS84.multi_polygon_area(&source.intersection(&east));
    assert!(
        ((pieces - whole) / whole).abs() < 1e-9,
        "{pieces} vs {whole}"
    );
}

#[test]
fn population_weights_follow_the_points() {
    let s = units(vec![
        ("S", vec![vec![rect(0.0, 0.0, 2.0, 1.0)]]),
        ("EMPTY", vec![vec![rect(5.0, 0.0, 7.0, 1.0)]]),
    ]);
    let t = units(vec![
        (
            "A",
            vec![vec![rect(0.0, 0.0, 1.0, 1.0), rect(5.0, 0.0, 6.0, 1.0)]],
        ),
        (
            "B",
            vec![vec![rect(1.0, 0.0, 2.0, 1.0), rect(6.0, 0.0, 7.0, 1.0)]],
        ),
    ]);
    let pts = vec![
        (Coord { x: 0.2, y: 0.5 }, 10.0),
        (Coord { x: 0.4, y: 0.5 }, 20.0),
        (Coord { x: 0.9, y: 0.1 }, 30.0),
        (Coord { x: 1.5, y: 0.5 }, 40.0),
        (Coord { x: 30.0, y: 0.5 }, 99.0), // in no source
    ];
    let r = run(
        &s,
        &t,
        0.0,
        Weighting::Population(PopulationLayer::Points(pts)),
    );
    let m = table(&r);
    assert!(close(m[&("S".into(), "A".into())].0, 0.6, 1e-12));
    assert!(close(m[&("S".into(), "B".into())].0, 0.4, 1e-12));
    assert!(r
        .crosswalk
        .rows
        .iter()
        .filter(|w| w.from_code == "S")
        .all(|w| w.basis == Basis::Population));
    // a source with no population falls back to area, and says so
    assert!(close(m[&("EMPTY".into(), "A".into())].0, 0.5, 1e-12));
    assert!(r
        .crosswalk
        .rows
        .iter()
        .filter(|w| w.from_code == "EMPTY")
        .all(|w| w.basis == Basis::AreaFallback));
}

#[test]
fn a_polygon_population_layer_is_spread_by_area() {
    // 300 people evenly over [0,1.5]x[0,1]: 200 in A, 100 in B.
    let s = units(vec![("S", vec![vec![rect(0.0, 0.0, 2.0, 1.0)]])]);
    let t = units(vec![
        ("A", vec![vec![rect(0.0, 0.0, 1.0, 1.0)]]),
        ("B", vec![vec![rect(1.0, 0.0, 2.0, 1.0)]]),
    ]);
    let pop = MultiPolygon::new(vec![Polygon::new(
        LineString::from(rect(0.0, 0.0, 1.5, 1.0)),
        vec![],
    )]);
    let r = run(
        &s,
        &t,
        0.0,
        Weighting::Population(PopulationLayer::Polygons(vec![(pop, 300.0)])),
    );
    let m = table(&r);
    assert!(close(m[&("S".into(), "A".into())].0, 2.0 / 3.0, 1e-9));
    assert!(close(m[&("S".into(), "B".into())].0, 1.0 / 3.0, 1e-9));
}

#[test]
fn repairs_are_reported_and_a_collapsed_feature_is_kept_with_zero_area() {
    let raw = vec![
        // unclosed ring
        RawFeature {
            number: 1,
            key: "OPEN".into(),
            polygons: vec![vec![ring(&[
                (0.0, 0.0),
                (1.0, 0.0),
                (1.0, 1.0),
                (0.0, 1.0),
            ])]],
        },
        // bow-tie (self-intersection)
        RawFeature {
            number: 2,
            key: "BOW".into(),
            polygons: vec![vec![ring(&[
                (0.0, 0.0),
                (1.0, 1.0),
                (1.0, 0.0),
                (0.0, 1.0),
                (0.0, 0.0),
            ])]],
        },
        // two points only
        RawFeature {
            number: 3,
            key: "GONE".into(),
            polygons: vec![vec![ring(&[(0.0, 0.0), (1.0, 1.0), (0.0, 0.0)])]],
        },
    ];
    let p = prepare(&raw, RingConvention::ExteriorCounterClockwise);
    assert_eq!(p.units.len(), 3, "no feature is dropped");
    let by = |k: &str| p.repairs.iter().find(|r| r.key == k).unwrap();
    assert!(by("OPEN").problems.iter().any(|m| m.contains("not closed")));
    assert!(by("BOW")
        .problems
        .iter()
        .any(|m| m.contains("self-intersection")));
    assert!(by("GONE").collapsed);
    let bow = p.units.iter().find(|u| u.key == "BOW").unwrap();
    // the bow-tie keeps both triangles: half the unit cell
    assert!(close(
        bow.area / WGS84.cell_area(0.0, 0.0, 1.0, 1.0),
        0.5,
        1e-4
    ));
    assert_eq!(p.units.iter().find(|u| u.key == "GONE").unwrap().area, 0.0);
}

fn builtin(name: &str) -> Vec<Unit> {
    let l = read_layer(&LayerRequest {
        spec: format!("builtin:{name}"),
        key: None,
        object: None,
        key_option: "--from-key",
        object_option: "--from-object",
    })
    .unwrap();
    prepare(&l.features, l.convention).units
}

#[test]
fn the_rtree_finds_the_same_pairs_as_brute_force_on_the_county_layers() {
    let a = builtin("counties-2017");
    let b = builtin("counties-2023");
    // A slice of sources (including the Aleutians, 02016) keeps it quick.
    let sources: Vec<Unit> = a
        .into_iter()
        .filter(|u| u.key.starts_with("02") || u.key.starts_with("09"))
        .collect();
    let tree = candidate_pairs(&sources, &b);
    let brute = candidate_pairs_brute_force(&sources, &b);
    assert!(tree.len() > sources.len());
    assert_eq!(tree, brute);
}

#[test]
fn connecticut_and_valdez_cordova_match_the_independent_reference() {
    // Reference: fixtures/geometry/reference-weights-ct-ak.csv (shapely +
    // GeographicLib on rings densified to 0.001°, see its README).
    let text = std::fs::read_to_string("fixtures/geometry/reference-weights-ct-ak.csv").unwrap();
    let reference: BTreeMap<(String, String), f64> = text
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            ((f[0].to_string(), f[1].to_string()), f[2].parse().unwrap())
        })
        .collect();
    let sources: Vec<Unit> = builtin("counties-2017")
        .into_iter()
        .filter(|u| u.key.starts_with("09") || u.key == "02261")
        .collect();
    assert_eq!(sources.len(), 9);
    let r = run(&sources, &builtin("counties-2023"), 0.0, Weighting::Area);
    let ours = table(&r);
    let mut compared = 0;
    for (k, w) in &reference {
        if *w < 1e-4 {
            continue;
        }
        let got = ours.get(k).map_or(0.0, |v| v.0);
        assert!(close(got, *w, 1e-6), "{k:?}: {got} vs reference {w}");
        compared += 1;
    }
    for (k, (w, _)) in &ours {
        if *w >= 1e-4 && !k.1.is_empty() {
            assert!(
                reference.contains_key(k),
                "{k:?} ({w}) is not in the reference"
            );
        }
    }
    assert!(compared >= 30, "{compared}");
    // Valdez-Cordova: about 0.2919 / 0.7077
    assert!(close(
        ours[&("02261".into(), "02063".into())].0,
        0.29192,
        1e-5
    ));
    assert!(close(
        ours[&("02261".into(), "02066".into())].0,
        0.70769,
        1e-5
    ));
}

#[test]
fn output_does_not_depend_on_the_number_of_threads() {
    let sources: Vec<Unit> = builtin("counties-2017")
        .into_iter()
        .filter(|u| u.key.starts_with("09"))
        .collect();
    let targets = builtin("counties-2023");
    let go = |n: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap();
        pool.install(|| run(&sources, &targets, 0.001, Weighting::Area).crosswalk)
    };
    assert_eq!(go(1), go(3));
}

// ---------------------------------------------------------------- CLI

fn rk() -> Command {
    Command::cargo_bin("regionkey").unwrap()
}

#[test]
fn regenerating_the_shipped_county_crosswalk_gives_the_same_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("us-counties-2017-2023.csv");
    rk().args([
        "-q",
        "overlay",
        "builtin:counties-2017",
        "builtin:counties-2023",
        "--output",
    ])
    .arg(&out)
    .assert()
    .success();
    let shipped = std::fs::read("crosswalks/us-counties-2017-2023.csv").unwrap();
    assert!(
        std::fs::read(&out).unwrap() == shipped,
        "the crosswalk differs from crosswalks/"
    );
    let meta = std::fs::read("crosswalks/us-counties-2017-2023.csv.json").unwrap();
    assert!(std::fs::read(dir.path().join("us-counties-2017-2023.csv.json")).unwrap() == meta);
}

fn geojson_layer(dir: &std::path::Path) -> std::path::PathBuf {
    let p = dir.join("areas.geojson");
    std::fs::write(
        &p,
        r#"{"type":"FeatureCollection","features":[
 {"type":"Feature","properties":{"GEOID":"A1","NAME":"west"},"geometry":{"type":"Polygon","coordinates":[[[0,0],[1,0],[1,1],[0,1],[0,0]]]}},
 {"type":"Feature","properties":{"GEOID":"B2","NAME":"east"},"geometry":{"type":"MultiPolygon","coordinates":[[[[1,0],[3,0],[3,1],[1,1],[1,0]]]]}}
]}"#,
    )
    .unwrap();
    p
}

#[test]
fn a_geojson_overlay_writes_csv_parquet_and_metadata() {
    let dir = tempfile::tempdir().unwrap();
    let layer = geojson_layer(dir.path());
    let out = dir.path().join("xw.csv");
    rk().args(["-q", "overlay"])
        .arg(&layer)
        .arg(&layer)
        .args(["--from-key", "GEOID", "--to-key", "GEOID", "--output"])
        .arg(&out)
        .assert()
        .success();
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(
        text,
        "from_code,to_code,weight,target_share,basis\n\
         A1,A1,1.000000000000,1.000000000000,area\n\
         B2,B2,1.000000000000,1.000000000000,area\n"
    );
    let meta: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("xw.csv.json")).unwrap()).unwrap();
    assert_eq!(meta["from"]["key"], "GEOID");
    assert_eq!(meta["from"]["sha256"].as_str().unwrap().len(), 64);
    assert!(meta["caution"].as_str().unwrap().contains("estimates"));
    let pq = dir.path().join("xw.parquet");
    rk().args(["-q", "overlay"])
        .arg(&layer)
        .arg(&layer)
        .args(["--from-key", "GEOID", "--to-key", "GEOID", "--output"])
        .arg(&pq)
        .assert()
        .success();
    assert!(std::fs::read(&pq).unwrap().starts_with(b"PAR1"));
    rk().arg("inspect")
        .arg(&pq)
        .assert()
        .success()
        .stdout(predicate::str::contains("one-to-one      2"));
}

#[test]
fn a_missing_layer_is_named_before_any_work() {
    let dir = tempfile::tempdir().unwrap();
    rk().args([
        "overlay",
        "nowhere.geojson",
        "builtin:counties-2023",
        "--output",
    ])
    .arg(dir.path().join("x.csv"))
    .assert()
    .code(1)
    .stderr(predicate::str::contains("nowhere.geojson"));
}

#[test]
fn an_unknown_key_field_lists_the_fields() {
    let dir = tempfile::tempdir().unwrap();
    let layer = geojson_layer(dir.path());
    rk().arg("overlay")
        .arg(&layer)
        .arg("builtin:counties-2023")
        .args(["--from-key", "FIPS", "--output"])
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains("areas.geojson"))
        .stderr(predicate::str::contains("no field \"FIPS\" for --from-key"))
        .stderr(predicate::str::contains("GEOID, NAME"));
}

#[test]
fn a_feature_that_is_not_a_polygon_is_named_by_number() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("pts.geojson");
    std::fs::write(&p, r#"{"type":"FeatureCollection","features":[{"type":"Feature","id":"X","properties":{},"geometry":{"type":"Polygon","coordinates":[[[0,0],[1,0],[1,1],[0,0]]]}},{"type":"Feature","id":"Y","properties":{},"geometry":{"type":"Point","coordinates":[0,0]}}]}"#).unwrap();
    rk().arg("overlay")
        .arg(&p)
        .arg(&p)
        .args(["--output"])
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains("pts.geojson: feature 2"))
        .stderr(predicate::str::contains("is a \"Point\""));
}

#[test]
fn a_projected_shapefile_is_refused_with_a_clear_message() {
    let dir = tempfile::tempdir().unwrap();
    let shp = dir.path().join("tracts.shp");
    std::fs::write(&shp, b"not read: the .prj is checked first").unwrap();
    std::fs::write(dir.path().join("tracts.dbf"), b"").unwrap();
    std::fs::write(
        dir.path().join("tracts.prj"),
        r#"PROJCS["NAD83 / Conus Albers",GEOGCS["NAD83",DATUM["North_American_Datum_1983"]]]"#,
    )
    .unwrap();
    rk().arg("overlay")
        .arg(&shp)
        .arg("builtin:counties-2023")
        .args(["--from-key", "GEOID", "--output"])
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains("tracts.shp"))
        .stderr(predicate::str::contains("projected (NAD83 / Conus Albers)"))
        .stderr(predicate::str::contains("reproject"));
}

#[test]
fn a_topojson_with_several_polygon_objects_asks_which_one() {
    let dir = tempfile::tempdir().unwrap();
    rk().args([
        "overlay",
        "reference/layers/counties-2017.topo.json",
        "builtin:counties-2023",
        "--output",
    ])
    .arg(dir.path().join("x.csv"))
    .assert()
    .code(1)
    .stderr(predicate::str::contains("counties-2017.topo.json"))
    .stderr(
        predicate::str::contains("counties, states, nation")
            .or(predicate::str::contains("counties, nation, states")),
    )
    .stderr(predicate::str::contains("--from-object"));
}

#[test]
fn a_zipped_shapefile_is_read_in_memory() {
    use shapefile::dbase::{FieldName, FieldValue, Record, TableWriterBuilder};
    use shapefile::{Point, PolygonRing};
    let dir = tempfile::tempdir().unwrap();
    let shp = dir.path().join("zones.shp");
    let builder =
        TableWriterBuilder::new().add_character_field(FieldName::try_from("ZONE").unwrap(), 8);
    {
        let mut w = shapefile::Writer::from_path(&shp, builder).unwrap();
        for (name, x0, x1) in [("W", 0.0, 1.0), ("E", 1.0, 3.0)] {
            // Shapefile exteriors run clockwise.
            let ring = vec![
                Point::new(x0, 0.0),
                Point::new(x0, 1.0),
                Point::new(x1, 1.0),
                Point::new(x1, 0.0),
                Point::new(x0, 0.0),
            ];
            let poly = shapefile::Polygon::new(PolygonRing::Outer(ring));
            let mut rec = Record::default();
            rec.insert(
                "ZONE".to_string(),
                FieldValue::Character(Some(name.to_string())),
            );
            w.write_shape_and_record(&poly, &rec).unwrap();
        }
    }
    let zip_path = dir.path().join("zones.zip");
    {
        let f = std::fs::File::create(&zip_path).unwrap();
        let mut z = zip::ZipWriter::new(f);
        for ext in ["shp", "shx", "dbf"] {
            z.start_file(
                format!("zones/zones.{ext}"),
                zip::write::SimpleFileOptions::default(),
            )
            .unwrap();
            std::io::Write::write_all(&mut z, &std::fs::read(shp.with_extension(ext)).unwrap())
                .unwrap();
        }
        z.start_file("zones/zones.prj", zip::write::SimpleFileOptions::default())
            .unwrap();
        std::io::Write::write_all(&mut z, br#"GEOGCS["GCS_WGS_1984",DATUM["D_WGS_1984"]]"#)
            .unwrap();
        z.finish().unwrap();
    }
    let layer = geojson_layer(dir.path());
    let out = dir.path().join("xw.csv");
    rk().args(["-q", "overlay"])
        .arg(&zip_path)
        .arg(&layer)
        .args(["--from-key", "ZONE", "--to-key", "GEOID", "--output"])
        .arg(&out)
        .assert()
        .success();
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(text.contains("E,B2,1.000000000000"), "{text}");
    assert!(text.contains("W,A1,1.000000000000"), "{text}");
    // nothing was extracted beside the zip
    assert!(!dir.path().join("zones").exists());
}

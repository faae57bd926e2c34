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
            weighting,
            ..Options::area(min_share)
        },
        &|_| {},
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

/// Runs the grid validity check and geo's all-pairs check on every feature
/// of a layer; returns how many features are invalid.
fn validity_twins_agree(spec: &str) -> usize {
    use regionkey::core::overlay::validity::{problems, problems_brute_force};
    let l = read_layer(&LayerRequest {
        spec: spec.to_string(),
        key: None,
        object: None,
        key_option: "--from-key",
        object_option: "--from-object",
    })
    .unwrap();
    let mut invalid = 0;
    for f in &l.features {
        let polys: Vec<Polygon<f64>> = f
            .polygons
            .iter()
            .filter_map(|rings| {
                let mut closed: Vec<LineString<f64>> = rings
                    .iter()
                    .map(|r| {
                        let mut ls = LineString::from(r.clone());
                        ls.close();
                        ls
                    })
                    // Rings with fewer than 3 distinct points are
                    // dropped before the check (as `prepare` does).
                    .filter(|ls| {
                        let mut d = ls.0.clone();
                        d.sort_by(|a, b| a.x.total_cmp(&b.x).then(a.y.total_cmp(&b.y)));
                        d.dedup();
                        d.len() >= 3
                    })
                    .collect();
                (!closed.is_empty()).then(|| {
                    let ext = closed.remove(0);
                    Polygon::new(ext, closed)
                })
            })
            .collect();
        let mp = MultiPolygon::new(polys);
        let fast = problems(&mp);
        let slow = problems_brute_force(&mp);
        assert_eq!(
            fast.is_empty(),
            slow.is_empty(),
            "{spec} feature {} ({}): {fast:?} vs {slow:?}",
            f.number,
            f.key
        );
        invalid += usize::from(!fast.is_empty());
    }
    invalid
}

#[test]
fn the_segment_grid_validity_check_agrees_with_geos_all_pairs_check_on_every_county() {
    // Twin check: geo's own validation (all pairs of segments) decides the
    // same valid/invalid verdict for every feature of both built-in layers.
    let invalid = validity_twins_agree("builtin:counties-2017")
        + validity_twins_agree("builtin:counties-2023");
    assert!(invalid > 10, "{invalid}");
}

/// The same twin check on a layer named by RK_TWIN_LAYER (e.g. a densified
/// layer from scripts/bench-overlay/densify.py; slow: geo's check is
/// quadratic). `cargo test --test overlay -- --ignored twin_check_on`.
#[test]
#[ignore]
fn twin_check_on_a_layer_from_the_environment() {
    let spec = std::env::var("RK_TWIN_LAYER").expect("RK_TWIN_LAYER");
    eprintln!("{} invalid features", validity_twins_agree(&spec));
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
    // The shipped file is made from the repository root with
    //   regionkey overlay builtin:counties-2017 builtin:counties-2023 \
    //       --output crosswalks/us-counties-2017-2023.csv
    // and its sidecar records that output path: run the same from a folder
    // of the same shape.
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("crosswalks")).unwrap();
    rk().current_dir(dir.path())
        .args([
            "-q",
            "overlay",
            "builtin:counties-2017",
            "builtin:counties-2023",
            "--output",
            "crosswalks/us-counties-2017-2023.csv",
        ])
        .assert()
        .success();
    let out = dir.path().join("crosswalks/us-counties-2017-2023.csv");
    let shipped = std::fs::read("crosswalks/us-counties-2017-2023.csv").unwrap();
    assert!(
        std::fs::read(&out).unwrap() == shipped,
        "the crosswalk differs from crosswalks/"
    );
    let meta = std::fs::read("crosswalks/us-counties-2017-2023.csv.json").unwrap();
    assert!(
        std::fs::read(dir.path().join("crosswalks/us-counties-2017-2023.csv.json")).unwrap()
            == meta,
        "the sidecar differs from crosswalks/"
    );
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
    assert_eq!(meta["command"], "overlay");
    assert_eq!(meta["inputs"][0]["role"], "from");
    assert_eq!(meta["inputs"][0]["key"], "GEOID");
    assert_eq!(meta["inputs"][0]["sha256"].as_str().unwrap().len(), 64);
    // The sidecar names the SHA-256 of the crosswalk it describes.
    let sha = regionkey::io::output::sha256_file(&out).unwrap();
    assert_eq!(meta["output"]["sha256"], sha.as_str());
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

// ------------------------------------------------ nesting, history, population

/// The shipped crosswalk as (from, to) -> (weight, basis).
fn shipped() -> BTreeMap<(String, String), (f64, String)> {
    let text = std::fs::read_to_string("crosswalks/us-counties-2017-2023.csv").unwrap();
    text.lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                (f[0].to_string(), f[1].to_string()),
                (f[2].parse().unwrap(), f[4].to_string()),
            )
        })
        .collect()
}

#[test]
fn counties_never_cross_a_state_line_in_the_shipped_crosswalk() {
    // A county's first two digits are its state (FIPS 6-4 / INCITS 31: county
    // codes are assigned within states), and counties nest in states: a piece
    // from one state into another is generalization noise of the 1:10m layers.
    let xw = shipped();
    let crossing: Vec<_> = xw
        .keys()
        .filter(|(f, t)| !t.is_empty() && f[..2] != t[..2])
        .collect();
    assert!(crossing.is_empty(), "{crossing:?}");
    // The case that was shipped before: a share of Windham County (09015)
    // and of New London County (09011) in Rhode Island.
    assert!(!xw.contains_key(&("09011".into(), "44009".into())));
    let meta: serde_json::Value = serde_json::from_slice(
        &std::fs::read("crosswalks/us-counties-2017-2023.csv.json").unwrap(),
    )
    .unwrap();
    let dropped = &meta["nesting"]["dropped_by_source"]["09011"]["44009"];
    assert!(
        dropped.as_f64().is_some_and(|w| w > 0.0 && w < 0.01),
        "{dropped}"
    );
    // Weights of every source still sum to 1.
    let mut sums: BTreeMap<&str, f64> = BTreeMap::new();
    for ((f, _), (w, _)) in &xw {
        *sums.entry(f).or_default() += w;
    }
    assert!(sums.values().all(|s| close(*s, 1.0, 1e-9)));
}

#[test]
fn falls_church_collapses_at_1_10m_but_keeps_its_identity_row_from_the_history() {
    // 51610 Falls Church city: in the reference since 1970, no change in the
    // history between 2017 and 2023 (crosswalks/us-county-changes.csv).
    let xw = shipped();
    let row = &xw[&("51610".into(), "51610".into())];
    assert_eq!(row.0, 1.0);
    assert_eq!(row.1, "history");
    let dir = tempfile::tempdir().unwrap();
    rk().args([
        "overlay",
        "builtin:counties-2017",
        "builtin:counties-2023",
        "--output",
    ])
    .arg(dir.path().join("xw.csv"))
    .assert()
    .success()
    .stderr(predicate::str::contains(
        "the change history says 51610 continued unchanged, so it gets the identity row",
    ));
}

fn write(dir: &std::path::Path, name: &str, text: &str) -> std::path::PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn square_layer(
    dir: &std::path::Path,
    name: &str,
    features: &[(&str, [f64; 4])],
) -> std::path::PathBuf {
    let f: Vec<String> = features
        .iter()
        .map(|(k, [x0, y0, x1, y1])| {
            format!(
                r#"{{"type":"Feature","properties":{{"code":"{k}"}},"geometry":{{"type":"Polygon","coordinates":[[[{x0},{y0}],[{x1},{y0}],[{x1},{y1}],[{x0},{y1}],[{x0},{y0}]]]}}}}"#
            )
        })
        .collect();
    write(
        dir,
        name,
        &format!(
            r#"{{"type":"FeatureCollection","features":[{}]}}"#,
            f.join(",")
        ),
    )
}

#[test]
fn units_nesting_in_parents_named_by_code_prefix_drop_pieces_across_parents() {
    // Tracts 11 and 12 of county AA, tract 21 of county BB. The new layer's
    // AA/BB line sits 0.005 degrees east of the old one (generalization):
    // AA11 reaches 0.5 % into BB21 by area.
    let dir = tempfile::tempdir().unwrap();
    let old = square_layer(
        dir.path(),
        "old.geojson",
        &[
            ("AA11", [0.0, 0.0, 1.0, 1.0]),
            ("BB21", [1.0, 0.0, 2.0, 1.0]),
        ],
    );
    let new = square_layer(
        dir.path(),
        "new.geojson",
        &[
            ("AA11", [0.0, 0.0, 0.995, 1.0]),
            ("BB21", [0.995, 0.0, 2.0, 1.0]),
        ],
    );
    let out = dir.path().join("xw.csv");
    let report = dir.path().join("report.csv");
    let go = |extra: &[&str]| {
        rk().args(["overlay"])
            .arg(&old)
            .arg(&new)
            .args(["--from-key", "code", "--to-key", "code", "--min-share", "0"])
            .args(extra)
            .arg("--output")
            .arg(&out)
            .arg("--report")
            .arg(&report)
            .assert()
            .success()
    };
    go(&[]);
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(
        text.contains("AA11,BB21,"),
        "without the option the piece stays: {text}"
    );
    go(&["--parent-digits", "2"]).stderr(predicate::str::contains(
        "1 pieces in 1 sources crossed into another parent unit",
    ));
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(!text.contains("AA11,BB21,"), "{text}");
    assert!(
        text.contains("AA11,AA11,1.000000000000,"),
        "renormalized: {text}"
    );
    let rep = std::fs::read_to_string(&report).unwrap();
    assert!(
        rep.lines()
            .any(|l| l.starts_with("cross-parent,AA11,BB21,0.0050")),
        "{rep}"
    );
    let meta: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("xw.csv.json")).unwrap()).unwrap();
    assert_eq!(meta["options"]["parent_digits"], 2);
    assert!(
        meta["nesting"]["dropped_by_source"]["AA11"]["BB21"]
            .as_f64()
            .unwrap()
            > 0.004
    );
}

#[test]
fn population_points_outside_every_source_and_area_fallbacks_are_counted_and_far_pieces_flagged() {
    // Source S = [0,2]x[0,1] split by targets A (west half) and B (east
    // half); all 90 people of S live in A, so the population weight of
    // S->A is 0.9 against an area weight of 0.5, and of S->B 0.1 against
    // 0.5: both "check". Source E has nobody (falls back to area). Two points with 7
    // people lie outside every source.
    let dir = tempfile::tempdir().unwrap();
    let from = square_layer(
        dir.path(),
        "from.geojson",
        &[("S", [0.0, 0.0, 2.0, 1.0]), ("E", [5.0, 0.0, 6.0, 1.0])],
    );
    let to = square_layer(
        dir.path(),
        "to.geojson",
        &[
            ("A", [0.0, 0.0, 1.0, 1.0]),
            ("B", [1.0, 0.0, 2.0, 1.0]),
            ("C", [5.0, 0.0, 6.0, 1.0]),
        ],
    );
    let pop = write(
        dir.path(),
        "pop.csv",
        "lon,lat,people\n0.5,0.5,90\n1.5,0.5,10\n10,10,3\n-20,5,4\n",
    );
    let out = dir.path().join("xw.csv");
    let report = dir.path().join("report.csv");
    rk().args(["overlay"])
        .arg(&from)
        .arg(&to)
        .args([
            "--from-key",
            "code",
            "--to-key",
            "code",
            "--weight",
            "population",
        ])
        .arg("--population")
        .arg(&pop)
        .args(["--population-field", "people", "--output"])
        .arg(&out)
        .arg("--report")
        .arg(&report)
        .assert()
        .success()
        .stderr(predicate::str::contains(
            "2 population points (count 7) lie outside every source polygon",
        ))
        .stderr(predicate::str::contains(
            "1 sources have no population and fell back to area",
        ))
        .stderr(predicate::str::contains("2 pieces flagged check"));
    let rep = std::fs::read_to_string(&report).unwrap();
    assert!(
        rep.lines().any(|l| l.starts_with("check,S,A,0.9000")),
        "{rep}"
    );
    assert!(
        rep.lines().any(|l| l.starts_with("check,S,B,0.1000")),
        "{rep}"
    );
    assert!(
        rep.lines().any(|l| l.starts_with("area-fallback,E,")),
        "{rep}"
    );
    let meta: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("xw.csv.json")).unwrap()).unwrap();
    assert_eq!(meta["population_checks"]["points_outside_every_source"], 2);
    assert_eq!(meta["population_checks"]["pieces_flagged"], 2);
}

#[test]
fn integer_keys_of_a_county_layer_keep_their_leading_zero() {
    // Numbers in the key field (as written by tools that store GEOIDs as
    // integers): 1001 is county 01001 and 2201 is 02201 (FIPS 6-4 codes
    // have five digits, the first two the state).
    let dir = tempfile::tempdir().unwrap();
    let f: Vec<String> = [(1001, 0.0), (2201, 1.0), (13121, 2.0), (36061, 3.0)]
        .iter()
        .map(|(k, x)| {
            format!(
                r#"{{"type":"Feature","properties":{{"GEOID":{k}}},"geometry":{{"type":"Polygon","coordinates":[[[{x},0],[{x1},0],[{x1},1],[{x},1],[{x},0]]]}}}}"#,
                x1 = x + 1.0
            )
        })
        .collect();
    let layer = write(
        dir.path(),
        "ints.geojson",
        &format!(
            r#"{{"type":"FeatureCollection","features":[{}]}}"#,
            f.join(",")
        ),
    );
    let out = dir.path().join("xw.csv");
    rk().arg("overlay")
        .arg(&layer)
        .arg(&layer)
        .args(["--from-key", "GEOID", "--to-key", "GEOID", "--output"])
        .arg(&out)
        .assert()
        .success()
        .stderr(predicate::str::contains(
            "2 keys of field \"GEOID\" had lost their leading zeros (read as 5-digit county codes)",
        ));
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(text.contains("\n01001,01001,1.000000000000,"), "{text}");
    assert!(text.contains("\n02201,02201,1.000000000000,"), "{text}");
    assert!(!text.contains("\n1001,"), "{text}");
    // What `apply` and `inspect` read back is the same code.
    rk().arg("inspect").arg(&out).assert().success();
}

#[test]
fn a_topojson_arc_position_that_is_not_a_pair_of_numbers_is_named_with_its_arc() {
    // The arcs are read straight into numbers (io::geo::json_doc); a bad
    // position is still reported by arc and position, in our words.
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("bad.topojson");
    std::fs::write(
        &p,
        r#"{"type":"Topology","objects":{"u":{"type":"GeometryCollection","geometries":[{"type":"Polygon","id":"A","arcs":[[0]]}]}},"arcs":[[[0,0],[1,0],[1,"x"],[0,0]]]}"#,
    )
    .unwrap();
    rk().arg("overlay")
        .arg(&p)
        .arg(&p)
        .args(["--output"])
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains("bad.topojson"))
        .stderr(predicate::str::contains(
            "arc 0, position 3 is not a pair of numbers",
        ));
}

#[test]
fn when_both_layers_are_broken_the_source_layers_error_is_shown() {
    // The two layers are read at the same time; the message must not
    // depend on which read finishes first.
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("first.geojson");
    let b = dir.path().join("second.geojson");
    std::fs::write(&a, "{\"type\": \"FeatureCollection\", \"features\": [").unwrap();
    std::fs::write(&b, "not json").unwrap();
    for _ in 0..3 {
        rk().arg("overlay")
            .arg(&a)
            .arg(&b)
            .args(["--output"])
            .arg(dir.path().join("x.csv"))
            .assert()
            .code(1)
            .stderr(predicate::str::contains("first.geojson"))
            .stderr(predicate::str::contains("second.geojson").not());
    }
}

//! Ellipsoidal areas of lon/lat-edged polygons against GeographicLib.
//! Reference values: fixtures/geometry/reference-areas.csv, made by
//! scripts/geometry/reference_areas.py (pyproj 3.7.2 / PROJ 9.5.1, edges
//! densified 20,000-fold in longitude/latitude).

use regionkey::core::geodesy::WGS84;

/// (name, ring, area in m²)
type Reference = (String, Vec<(f64, f64)>, f64);

fn references() -> Vec<Reference> {
    let text = std::fs::read_to_string("fixtures/geometry/reference-areas.csv").unwrap();
    text.lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            let ring = f[1]
                .split(' ')
                .map(|p| {
                    let (x, y) = p.split_once(':').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect();
            (f[0].to_string(), ring, f[2].parse().unwrap())
        })
        .collect()
}

#[test]
fn areas_agree_with_geographiclib_on_densified_rings() {
    let refs = references();
    assert_eq!(refs.len(), 7);
    for (name, ring, want) in refs {
        let got = WGS84.ring_area_signed(&ring);
        let rel = ((got - want) / want).abs();
        // The densified reference itself converges to about 1e-9 on the
        // long slanted edges (the script prints the coarse/fine difference).
        assert!(rel < 5e-9, "{name}: {got} vs {want} (relative {rel:e})");
    }
}

#[test]
fn a_one_degree_cell_at_the_equator_is_about_12308_square_km() {
    // Published-figure check, from memory: a 1°×1° cell at the equator on
    // WGS84 is commonly quoted as about 12,308 km² (GeographicLib above gives
    // 12,308.46 km²).
    let a = WGS84.cell_area(0.0, 0.0, 1.0, 1.0) / 1e6;
    assert!((a - 12_308.46).abs() < 0.01, "{a}");
}

#[test]
fn cells_from_equator_to_pole_sum_to_the_hemisphere() {
    // Closed-form cells are exact; 90 rows of 360 cells make half the
    // WGS84 surface (510,065,621.724 km² in total, reference_areas.py).
    let mut sum = 0.0;
    for row in 0..90 {
        sum += 360.0 * WGS84.cell_area(0.0, row as f64, 1.0, row as f64 + 1.0);
    }
    assert!((sum * 2.0 / 1e6 - 510_065_621.724).abs() < 1e-2, "{sum}");
}

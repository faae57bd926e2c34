//! Areas on the ellipsoid for polygons whose edges are straight in
//! longitude/latitude.
//!
//! The overlay clips polygons in the longitude/latitude plane, so the edges
//! it creates are straight lines in that plane (not geodesics). Measuring
//! every polygon under that same convention makes the pieces of a source
//! add up to the source exactly; a geodesic-edge formula applied to the
//! same vertices would not (errors of tenths of a percent on long,
//! simplified edges).
//!
//! # Method
//!
//! On an ellipsoid of revolution the area element in terms of the authalic
//! latitude β is `R_q² cos β dβ dλ`, so the area between the equator and a
//! curve, per unit of longitude, is `R_q² sin β(φ)`, and
//! `R_q² sin β(φ) = a² q(φ) / 2` with
//!
//! ```text
//! q(φ) = (1 − e²) [ sin φ / (1 − e² sin² φ) + atanh(e sin φ) / e ]
//! ```
//!
//! (Snyder, *Map Projections: A Working Manual*, USGS Professional Paper
//! 1395, 1987, eq. 3-12; from memory). A ring's signed area is then the sum
//! over its edges of `−(a²/2) Δλ · mean(q)` along the edge, where φ varies
//! linearly with λ. The mean is integrated with Gauss–Legendre quadrature
//! (2 nodes on short edges, 4 nodes per piece of at most 0.02 rad of
//! latitude on longer ones), which is exact to rounding for the edges of
//! boundary files. Edges along a meridian contribute nothing; edges along a
//! parallel are exact with one evaluation.
//!
//! Units: degrees in, square metres out. Longitudes are taken as given (no
//! wrapping): an edge from 179° to −179° runs the long way round, exactly
//! as the clipper sees it.

use geo::{LineString, MultiPolygon, Polygon};

/// An ellipsoid of revolution, by semi-major axis and flattening.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ellipsoid {
    /// Semi-major axis in metres.
    pub a: f64,
    /// Flattening.
    pub f: f64,
}

/// The WGS84 ellipsoid (also used for NAD83, whose GRS80 ellipsoid differs
/// from WGS84 by 0.1 mm in the semi-minor axis).
pub const WGS84: Ellipsoid = Ellipsoid {
    a: 6_378_137.0,
    f: 1.0 / 298.257_223_563,
};

// Gauss–Legendre nodes and weights on [0, 1].
const GL2_X: [f64; 2] = [0.211_324_865_405_187_1, 0.788_675_134_594_812_9];
const GL4_X: [f64; 4] = [
    0.069_431_844_202_973_71,
    0.330_009_478_207_571_9,
    0.669_990_521_792_428_1,
    0.930_568_155_797_026_3,
];
const GL4_W: [f64; 4] = [
    0.173_927_422_568_726_93,
    0.326_072_577_431_273_07,
    0.326_072_577_431_273_07,
    0.173_927_422_568_726_93,
];

/// Latitude span (radians) below which an edge uses 2 quadrature nodes.
const SHORT_EDGE: f64 = 2e-3;
/// Largest latitude span (radians) of one 4-node quadrature piece.
const PIECE: f64 = 0.02;

impl Ellipsoid {
    /// Square of the first eccentricity.
    pub fn e2(&self) -> f64 {
        self.f * (2.0 - self.f)
    }

    /// `q(φ)` for a latitude in radians (see the module notes).
    fn q(&self, phi: f64) -> f64 {
        let e2 = self.e2();
        let e = e2.sqrt();
        let s = phi.sin();
        (1.0 - e2) * (s / (1.0 - e2 * s * s) + (e * s).atanh() / e)
    }

    /// Total surface area in square metres (`2π a² q(90°)`).
    pub fn surface_area(&self) -> f64 {
        std::f64::consts::TAU * self.a * self.a * self.q(std::f64::consts::FRAC_PI_2)
    }

    /// Area of the cell between two meridians and two parallels (degrees),
    /// in square metres; exact (closed form).
    pub fn cell_area(&self, lon0: f64, lat0: f64, lon1: f64, lat1: f64) -> f64 {
        let dl = (lon1 - lon0).abs().to_radians();
        let dq = (self.q(lat1.to_radians()) - self.q(lat0.to_radians())).abs();
        self.a * self.a / 2.0 * dl * dq
    }

    /// Mean of `q` along an edge whose latitude runs linearly from `p0` to
    /// `p1` (radians).
    fn mean_q(&self, p0: f64, p1: f64) -> f64 {
        let d = p1 - p0;
        if d == 0.0 {
            return self.q(p0);
        }
        if d.abs() <= SHORT_EDGE {
            return 0.5 * (self.q(p0 + d * GL2_X[0]) + self.q(p0 + d * GL2_X[1]));
        }
        let n = (d.abs() / PIECE).ceil().max(1.0);
        let h = d / n;
        let mut sum = 0.0;
        for k in 0..n as usize {
            let start = p0 + h * k as f64;
            for (x, w) in GL4_X.iter().zip(GL4_W) {
                sum += w * self.q(start + h * x);
            }
        }
        sum / n
    }

    /// Signed area (m²) of a ring given as (longitude, latitude) degrees,
    /// closed or not, edges straight in longitude/latitude: positive when
    /// counter-clockwise (east then north).
    pub fn ring_area_signed(&self, coords: &[(f64, f64)]) -> f64 {
        let n = coords.len();
        if n < 3 {
            return 0.0;
        }
        // Subtracting a constant from q changes nothing for a closed ring
        // (Σ Δλ = 0) but keeps the terms small, so less is lost to rounding.
        let q_ref = self.q(coords[0].1.to_radians());
        let mut sum = 0.0;
        for i in 0..n {
            let (x0, y0) = coords[i];
            let (x1, y1) = coords[(i + 1) % n];
            let dl = (x1 - x0).to_radians();
            if dl == 0.0 {
                continue;
            }
            sum += dl * (self.mean_q(y0.to_radians(), y1.to_radians()) - q_ref);
        }
        -self.a * self.a / 2.0 * sum
    }

    /// Signed area of a ring given as `[longitude, latitude]` pairs, closed
    /// or not (see [`Ellipsoid::ring_area_signed`]).
    pub fn ring_area_signed_xy(&self, c: &[[f64; 2]]) -> f64 {
        let n = c.len();
        if n < 3 {
            return 0.0;
        }
        let q_ref = self.q(c[0][1].to_radians());
        let mut sum = 0.0;
        for i in 0..n {
            let a = c[i];
            let b = c[(i + 1) % n];
            let dl = (b[0] - a[0]).to_radians();
            if dl == 0.0 {
                continue;
            }
            sum += dl * (self.mean_q(a[1].to_radians(), b[1].to_radians()) - q_ref);
        }
        -self.a * self.a / 2.0 * sum
    }

    /// Signed area of a `geo` ring (see [`Ellipsoid::ring_area_signed`]).
    pub fn line_string_area_signed(&self, ring: &LineString<f64>) -> f64 {
        // Avoid an allocation: the same sum over the coordinates in place.
        let c = &ring.0;
        let n = c.len();
        if n < 3 {
            return 0.0;
        }
        let q_ref = self.q(c[0].y.to_radians());
        let mut sum = 0.0;
        for i in 0..n {
            let a = c[i];
            let b = c[(i + 1) % n];
            let dl = (b.x - a.x).to_radians();
            if dl == 0.0 {
                continue;
            }
            sum += dl * (self.mean_q(a.y.to_radians(), b.y.to_radians()) - q_ref);
        }
        -self.a * self.a / 2.0 * sum
    }

    /// Area (m²) of a polygon: the exterior's magnitude minus the holes'
    /// magnitudes, so ring orientation does not matter. Assumes a valid
    /// polygon (holes inside the exterior, not overlapping).
    pub fn polygon_area(&self, polygon: &Polygon<f64>) -> f64 {
        let outer = self.line_string_area_signed(polygon.exterior()).abs();
        let holes: f64 = polygon
            .interiors()
            .iter()
            .map(|r| self.line_string_area_signed(r).abs())
            .sum();
        (outer - holes).max(0.0)
    }

    /// Area (m²) of a multipolygon whose parts do not overlap.
    pub fn multi_polygon_area(&self, mp: &MultiPolygon<f64>) -> f64 {
        mp.0.iter().map(|p| self.polygon_area(p)).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Composite Simpson integration of the same integral with very many
    /// steps: an independent check of the quadrature (not of the formula).
    fn simpson_ring(coords: &[(f64, f64)], steps: usize) -> f64 {
        let e = WGS84;
        let mut sum = 0.0;
        let n = coords.len();
        for i in 0..n {
            let (x0, y0) = coords[i];
            let (x1, y1) = coords[(i + 1) % n];
            let dl = (x1 - x0).to_radians();
            let (p0, p1) = (y0.to_radians(), y1.to_radians());
            let h = 1.0 / steps as f64;
            let mut s = e.q(p0) + e.q(p1);
            for k in 1..steps {
                let w = if k % 2 == 1 { 4.0 } else { 2.0 };
                s += w * e.q(p0 + (p1 - p0) * k as f64 * h);
            }
            sum += dl * s * h / 3.0;
        }
        -e.a * e.a / 2.0 * sum
    }

    #[test]
    fn quadrature_agrees_with_a_fine_simpson_sum_on_long_slanted_edges() {
        let ring = [
            (-120.0, 10.0),
            (-60.0, 70.0),
            (-100.0, 75.0),
            (-130.0, 30.0),
        ];
        let gl = WGS84.ring_area_signed(&ring);
        let simpson = simpson_ring(&ring, 20_000);
        assert!(
            ((gl - simpson) / simpson).abs() < 1e-12,
            "{gl} vs {simpson}"
        );
    }

    #[test]
    fn a_cell_measured_as_a_ring_equals_the_closed_form() {
        let ring = [(10.0, 40.0), (11.0, 40.0), (11.0, 41.0), (10.0, 41.0)];
        let a = WGS84.ring_area_signed(&ring);
        let c = WGS84.cell_area(10.0, 40.0, 11.0, 41.0);
        assert!(((a - c) / c).abs() < 1e-13, "{a} vs {c}");
    }

    #[test]
    fn orientation_gives_the_sign_and_polygon_area_ignores_it() {
        let ccw = [(0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0)];
        let cw: Vec<_> = ccw.iter().rev().copied().collect();
        let a = WGS84.ring_area_signed(&ccw);
        assert!(a > 0.0);
        assert!((WGS84.ring_area_signed(&cw) + a).abs() < 1e-6);
        let p = Polygon::new(LineString::from(cw), vec![]);
        assert!((WGS84.polygon_area(&p) - a).abs() < 1e-6);
    }

    #[test]
    fn the_whole_ellipsoid_is_the_known_wgs84_surface() {
        // 510,065,621.724 km² for WGS84: the closed form printed by
        // scripts/geometry/reference_areas.py (Python, independent code);
        // the figure is also the commonly quoted one (from memory).
        let s = WGS84.surface_area();
        assert!((s / 1e6 - 510_065_621.724).abs() < 1e-3, "{s}");
    }
}

//! Map projections for drawing US maps: Albers equal-area conic on a sphere
//! (Snyder, *Map Projections: A Working Manual*, USGS Professional Paper
//! 1395, 1987, equations 14-1 to 14-4), with the usual layout of Alaska,
//! Hawaii, Puerto Rico and the island areas as insets (common practice for
//! national county maps).
//!
//! Only for pictures: areas and weights are computed on the ellipsoid in
//! [`crate::core::geodesy`], never from projected coordinates.

/// An Albers equal-area conic projection on the unit sphere.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Albers {
    n: f64,
    c: f64,
    rho0: f64,
    lon0: f64,
}

impl Albers {
    /// Standard parallels `lat1`, `lat2`, origin `lat0`, `lon0` (degrees).
    pub fn new(lat1: f64, lat2: f64, lat0: f64, lon0: f64) -> Albers {
        let (p1, p2, p0) = (lat1.to_radians(), lat2.to_radians(), lat0.to_radians());
        let n = (p1.sin() + p2.sin()) / 2.0;
        let c = p1.cos().powi(2) + 2.0 * n * p1.sin();
        let rho0 = (c - 2.0 * n * p0.sin()).sqrt() / n;
        Albers { n, c, rho0, lon0 }
    }

    /// The usual projection for the conterminous US (29.5°N, 45.5°N; origin 23°N 96°W).
    pub fn conus() -> Albers {
        Albers::new(29.5, 45.5, 23.0, -96.0)
    }

    /// Projects (lon, lat) in degrees to (x, y) on the unit sphere, y up.
    pub fn project(&self, lon: f64, lat: f64) -> (f64, f64) {
        let rho = (self.c - 2.0 * self.n * lat.to_radians().sin())
            .max(0.0)
            .sqrt()
            / self.n;
        let theta = self.n * (lon - self.lon0).to_radians();
        (rho * theta.sin(), self.rho0 - rho * theta.cos())
    }
}

/// Where a state's units are drawn: the conterminous map or an inset.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Inset {
    projection: Albers,
    scale: f64,
    dx: f64,
    dy: f64,
    wrap_antimeridian: bool,
}

impl Inset {
    /// The inset for a state FIPS code (two digits).
    pub fn for_state(state: &str) -> Inset {
        let plain = |projection| Inset {
            projection,
            scale: 1.0,
            dx: 0.0,
            dy: 0.0,
            wrap_antimeridian: false,
        };
        match state {
            // Alaska, shrunk and moved below the Southwest.
            "02" => Inset {
                projection: Albers::new(55.0, 65.0, 50.0, -154.0),
                scale: 0.4,
                dx: -0.17,
                dy: 0.0,
                wrap_antimeridian: true,
            },
            // Hawaii, beside Alaska.
            "15" => Inset {
                projection: Albers::new(8.0, 18.0, 13.0, -157.0),
                scale: 1.0,
                dx: -0.11,
                dy: -0.065,
                wrap_antimeridian: false,
            },
            // Puerto Rico and the Virgin Islands, enlarged, off Florida.
            "72" | "78" => Inset {
                projection: Albers::new(17.0, 19.0, 18.0, -66.0),
                scale: 2.0,
                dx: 0.26,
                dy: 0.0,
                wrap_antimeridian: false,
            },
            // Pacific island areas, in a row under Hawaii.
            "60" => Inset {
                projection: Albers::new(-15.0, -13.0, -14.0, -170.0),
                scale: 2.0,
                dx: -0.05,
                dy: 0.02,
                wrap_antimeridian: false,
            },
            "66" => Inset {
                projection: Albers::new(13.0, 14.0, 13.5, 144.8),
                scale: 2.0,
                dx: 0.02,
                dy: 0.02,
                wrap_antimeridian: false,
            },
            "69" => Inset {
                projection: Albers::new(14.0, 20.0, 16.0, 145.7),
                scale: 1.0,
                dx: 0.08,
                dy: 0.02,
                wrap_antimeridian: false,
            },
            _ => plain(Albers::conus()),
        }
    }

    /// Projects (lon, lat) into map coordinates (unit sphere, y up).
    pub fn project(&self, lon: f64, lat: f64) -> (f64, f64) {
        let lon = if self.wrap_antimeridian && lon > 0.0 {
            lon - 360.0
        } else {
            lon
        };
        let (x, y) = self.projection.project(lon, lat);
        if self.scale == 1.0 && self.dx == 0.0 && self.dy == 0.0 {
            return (x, y);
        }
        // Insets are placed relative to a fixed anchor of the conterminous map.
        let (ax, ay) = Albers::conus().project(-112.0, 25.0);
        let (bx, by) = match self.wrap_antimeridian {
            true => (ax, ay),
            false => Albers::conus().project(-100.0, 25.5),
        };
        (
            bx + self.dx + x * self.scale,
            by + self.dy + y * self.scale - 0.04,
        )
    }
}

/// Fits projected points (y up) into a picture box (y down), keeping the
/// aspect ratio: the drawing is as wide as the box allows, or as tall.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Frame {
    x0: f64,
    y1: f64,
    scale: f64,
    margin: f64,
    width: f64,
    height: f64,
}

impl Frame {
    /// The frame that fits `points` into `width` x `height` with `margin`
    /// on every side; `None` without points.
    pub fn fit(points: &[(f64, f64)], width: f64, height: f64, margin: f64) -> Option<Frame> {
        let (mut x0, mut y0, mut x1, mut y1) = (
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        );
        for &(x, y) in points {
            x0 = x0.min(x);
            x1 = x1.max(x);
            y0 = y0.min(y);
            y1 = y1.max(y);
        }
        if !x0.is_finite() || !y0.is_finite() {
            return None;
        }
        let (dx, dy) = ((x1 - x0).max(1e-12), (y1 - y0).max(1e-12));
        let scale = ((width - 2.0 * margin) / dx).min((height - 2.0 * margin) / dy);
        Some(Frame {
            x0,
            y1,
            scale,
            margin,
            width: dx * scale + 2.0 * margin,
            height: dy * scale + 2.0 * margin,
        })
    }

    /// Picture coordinates of a projected point.
    pub fn apply(&self, x: f64, y: f64) -> (f64, f64) {
        (
            self.margin + (x - self.x0) * self.scale,
            self.margin + (self.y1 - y) * self.scale,
        )
    }

    /// Width and height of the drawing.
    pub fn size(&self) -> (f64, f64) {
        (self.width, self.height)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Snyder (1987), p. 292, numerical example for the sphere: R = 1,
    /// φ1 = 29.5°, φ2 = 45.5°, φ0 = 23°, λ0 = -96°; the point 35°N 75°W
    /// projects to x = 0.2952720, y = 0.2416774 (values as recalled from the
    /// handbook; pyproj 3.7.2 with `+proj=aea +R=1 +lat_1=29.5 +lat_2=45.5
    /// +lat_0=23 +lon_0=-96` gives the same to 7 decimals, see
    /// scripts/geometry/albers_check.py).
    #[test]
    fn albers_matches_the_handbook_example() {
        let (x, y) = Albers::conus().project(-75.0, 35.0);
        assert!((x - 0.2952720).abs() < 5e-7, "x = {x}");
        assert!((y - 0.2416774).abs() < 5e-7, "y = {y}");
    }

    #[test]
    fn a_frame_keeps_the_aspect_ratio_and_flips_y() {
        let f = Frame::fit(&[(0.0, 0.0), (2.0, 1.0)], 100.0, 100.0, 0.0).unwrap();
        assert_eq!(f.size(), (100.0, 50.0));
        assert_eq!(f.apply(0.0, 1.0), (0.0, 0.0));
        assert_eq!(f.apply(2.0, 0.0), (100.0, 50.0));
    }

    #[test]
    fn the_origin_projects_to_zero() {
        let (x, y) = Albers::conus().project(-96.0, 23.0);
        assert!(x.abs() < 1e-12 && y.abs() < 1e-12);
    }

    #[test]
    fn aleutian_islands_east_of_the_antimeridian_stay_beside_the_rest_of_alaska() {
        let inset = Inset::for_state("02");
        let (x_west, _) = inset.project(179.0, 52.0);
        let (x_east, _) = inset.project(-179.0, 52.0);
        assert!((x_west - x_east).abs() < 0.01, "{x_west} vs {x_east}");
    }
}

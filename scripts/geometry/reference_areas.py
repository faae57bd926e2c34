"""Reference areas for tests/geodesy.rs, computed with GeographicLib (via
pyproj's Geod) independently of regionkey.

regionkey measures polygons whose edges are straight in longitude/latitude.
GeographicLib measures polygons with geodesic edges, so each edge is first
densified linearly in longitude/latitude (N points per edge); as N grows the
geodesic polygon converges to the lon/lat polygon. The script prints the
value at two densities so the convergence can be seen, and writes the finer
one.

Run:  python3 scripts/geometry/reference_areas.py > fixtures/geometry/reference-areas.csv
Versions used: Python 3.11, pyproj 3.7.2 (PROJ's geodesic module, a C port
of GeographicLib), numpy.
"""
import math
import sys

import numpy as np
import pyproj
from pyproj import Geod

GEOD = Geod(ellps="WGS84")

POLYGONS = {
    # name: ring (lon, lat), counter-clockwise, not closed
    "cell_0_0_1_1": [(0, 0), (1, 0), (1, 1), (0, 1)],
    "cell_10_40_11_41": [(10, 40), (11, 40), (11, 41), (10, 41)],
    "cell_-150_60_-149_61": [(-150, 60), (-149, 60), (-149, 61), (-150, 61)],
    "slanted_quad": [(-120, 10), (-60, 70), (-100, 75), (-130, 30)],
    "colorado_box": [(-109.05, 36.99), (-102.04, 36.99), (-102.04, 41.0), (-109.05, 41.0)],
    "triangle_south": [(20, -35), (30, -20), (15, -10)],
    "long_edge_arctic": [(-170, 60), (-140, 70), (-170, 70)],
}


def densified_area(ring, n):
    lons, lats = [], []
    k = len(ring)
    for i in range(k):
        (x0, y0), (x1, y1) = ring[i], ring[(i + 1) % k]
        t = np.arange(n) / n
        lons.extend(x0 + (x1 - x0) * t)
        lats.extend(y0 + (y1 - y0) * t)
    area, _ = GEOD.polygon_area_perimeter(lons, lats)
    return abs(area)


def main():
    print(f"# pyproj {pyproj.__version__}, PROJ {pyproj.proj_version_str}, numpy {np.__version__}",
          file=sys.stderr)
    # WGS84 surface area, closed form (Snyder 1987 eq. 3-12 with phi = 90 deg)
    a = 6378137.0
    f = 1 / 298.257223563
    e = math.sqrt(f * (2 - f))
    s = 2 * math.pi * a * a * (1 + (1 - e * e) / e * math.atanh(e))
    print(f"# WGS84 surface area (closed form): {s / 1e6:.6f} km2", file=sys.stderr)
    print("name,ring,area_m2")
    for name, ring in POLYGONS.items():
        coarse = densified_area(ring, 2000)
        fine = densified_area(ring, 20000)
        print(f"# {name}: n=2000 {coarse:.3f}  n=20000 {fine:.3f}  rel diff {abs(fine - coarse) / fine:.2e}",
              file=sys.stderr)
        text = " ".join(f"{x}:{y}" for x, y in ring)
        print(f"{name},{text},{fine:.3f}")


if __name__ == "__main__":
    main()

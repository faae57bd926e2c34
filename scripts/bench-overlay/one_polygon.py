"""One large polygon for the overlay benchmark: a wavy ring of N vertices
around (CENTER_LON, CENTER_LAT) with a radius of RADIUS degrees, written as a
GeoJSON FeatureCollection with one feature (property "code" = "BIG").

The default (98.5 W, 38.5 N, 2.5 degrees) covers about a hundred counties of
Kansas, Nebraska, Missouri and Oklahoma.

Run:  python3 scripts/bench-overlay/one_polygon.py N OUT.geojson [CENTER_LON CENTER_LAT RADIUS]
Standard library only; deterministic.
"""
import json
import math
import sys


def main():
    n = int(sys.argv[1])
    out = sys.argv[2]
    lon0 = float(sys.argv[3]) if len(sys.argv) > 3 else -98.5
    lat0 = float(sys.argv[4]) if len(sys.argv) > 4 else 38.5
    radius = float(sys.argv[5]) if len(sys.argv) > 5 else 2.5
    pts = []
    for k in range(n):
        t = 2 * math.pi * k / n
        r = radius * (1 + 0.03 * math.sin(97 * t) + 0.01 * math.sin(1009 * t))
        pts.append([round(lon0 + r * math.cos(t), 7), round(lat0 + r * math.sin(t), 7)])
    pts.append(pts[0])
    doc = {
        "type": "FeatureCollection",
        "features": [
            {
                "type": "Feature",
                "properties": {"code": "BIG"},
                "geometry": {"type": "Polygon", "coordinates": [pts]},
            }
        ],
    }
    with open(out, "w", encoding="utf-8") as f:
        json.dump(doc, f, separators=(",", ":"))


if __name__ == "__main__":
    main()

"""Independent reference weights for the US county overlay 2017 -> 2023.

Independent of regionkey: its own TopoJSON decoder, shapely (GEOS) for
repair (make_valid) and intersection, and GeographicLib (pyproj's Geod) for
areas. Every ring is densified linearly in longitude/latitude to STEP
degrees before measuring, so the geodesic edges follow the lon/lat edges the
overlay cuts along.

weight(s, t) = area(s ∩ t) / area(s), with no sliver removal and no
renormalization: compare with `regionkey overlay ... --min-share 0`.
Where targets overlap inside a source (neighbours overlapping slightly at
three-county junctions), the pieces add up to more than the covered part;
then, by the convention regionkey documents, the pieces are scaled so they
sum to area(s ∩ union of targets) / area(s).

Run:  python3 scripts/geometry/reference_weights.py [STEP] > fixtures/geometry/reference-weights-us-2017-2023.csv
Versions used: Python 3.11, shapely 2.2.0 (GEOS 3.14.1), pyproj 3.7.2 (PROJ 9.5.1), numpy.
Writes pairs with weight >= 1e-5. Takes a few minutes.
"""
import json
import sys

import numpy as np
import pyproj
import shapely
from pyproj import Geod
from shapely.geometry import MultiPolygon, Polygon
from shapely.strtree import STRtree
from shapely.validation import make_valid

GEOD = Geod(ellps="WGS84")
STEP = float(sys.argv[1]) if len(sys.argv) > 1 else 0.001


def decode(path, obj="counties"):
    topo = json.load(open(path, encoding="utf-8"))
    t = topo.get("transform")
    arcs = []
    for arc in topo["arcs"]:
        x = y = 0
        pts = []
        for p in arc:
            if t:
                x += p[0]
                y += p[1]
                pts.append((x * t["scale"][0] + t["translate"][0], y * t["scale"][1] + t["translate"][1]))
            else:
                pts.append((p[0], p[1]))
        arcs.append(pts)

    def ring(idx):
        out = []
        for i in idx:
            a = arcs[i] if i >= 0 else arcs[~i][::-1]
            out.extend(a[1:] if out else a)
        return out

    units = {}
    for g in topo["objects"][obj]["geometries"]:
        polys = [g["arcs"]] if g["type"] == "Polygon" else g["arcs"] if g["type"] == "MultiPolygon" else []
        shapes = []
        for rings in polys:
            rs = [ring(r) for r in rings]
            rs = [r for r in rs if len(set(r)) >= 3]
            if rs:
                shapes.append(Polygon(rs[0], rs[1:]))
        geom = make_valid(MultiPolygon(shapes)) if shapes else None
        if geom is not None:
            geom = shapely.union_all([p for p in getattr(geom, "geoms", [geom])
                                      if p.geom_type in ("Polygon", "MultiPolygon")]) if geom.geom_type == "GeometryCollection" else geom
        units[g["id"]] = geom
    return units


def ring_area(coords):
    c = np.asarray(coords)[:-1]
    nxt = np.roll(c, -1, axis=0)
    lons, lats = [], []
    for (x0, y0), (x1, y1) in zip(c, nxt):
        n = max(1, int(np.ceil(max(abs(x1 - x0), abs(y1 - y0)) / STEP)))
        t = np.arange(n) / n
        lons.append(x0 + (x1 - x0) * t)
        lats.append(y0 + (y1 - y0) * t)
    if not lons:
        return 0.0
    a, _ = GEOD.polygon_area_perimeter(np.concatenate(lons), np.concatenate(lats))
    return abs(a)


def area(g):
    if g is None or g.is_empty:
        return 0.0
    total = 0.0
    for p in getattr(g, "geoms", [g]):
        if p.geom_type == "Polygon":
            total += ring_area(p.exterior.coords) - sum(ring_area(h.coords) for h in p.interiors)
        elif p.geom_type in ("MultiPolygon", "GeometryCollection"):
            total += area(p)
    return total


def main():
    root = sys.argv[2] if len(sys.argv) > 2 else "reference/layers"
    src = decode(f"{root}/counties-2017.topo.json")
    dst = decode(f"{root}/counties-2023.topo.json")
    tkeys = sorted(k for k, g in dst.items() if g is not None and not g.is_empty)
    tree = STRtree([dst[k] for k in tkeys])
    print(f"# shapely {shapely.__version__} GEOS {shapely.geos_version_string} pyproj {pyproj.__version__} step {STEP}",
          file=sys.stderr)
    print("from_code,to_code,weight")
    for s in sorted(src):
        g = src[s]
        if g is None or g.is_empty:
            continue
        a = area(g)
        if a <= 0:
            continue
        rows = []
        cands = sorted(tree.query(g))
        for i in cands:
            inter = g.intersection(dst[tkeys[i]])
            rows.append((tkeys[i], area(inter) / a))
        total = sum(w for _, w in rows)
        if total > 1 + 1e-8 and cands:
            covered = area(g.intersection(shapely.union_all([dst[tkeys[i]] for i in cands]))) / a
            if total - covered > 1e-8:
                rows = [(t, w * covered / total) for t, w in rows]
        for t, w in sorted(r for r in rows if r[1] >= 1e-5):
            print(f"{s},{t},{w:.10f}")


if __name__ == "__main__":
    main()

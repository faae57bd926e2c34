"""An independent area overlay with shapely (GEOS), the peer of the benchmark.

Independent of regionkey: its own TopoJSON decoder, GEOS `make_valid` for
repair, an STR-tree for candidates, GEOS `intersection` for the pieces and
GeographicLib (pyproj's Geod) for areas. It does the whole job regionkey's
overlay does (read both layers, repair, find candidates, clip, measure,
write a crosswalk) so the two can be timed side by side.

weight(s, t) = area(s ∩ t) / area(s), no sliver removal, no
renormalization (compare with `regionkey overlay ... --min-share 0`). Where
targets overlap inside a source the pieces are scaled to sum to
area(s ∩ union of targets) / area(s), as regionkey documents. A last row per
source with an empty to_code holds 1 - covered share.

Areas: Geod on each ring's vertices, i.e. geodesic edges. With DENSIFY
(degrees) every edge is first cut into pieces of at most DENSIFY, so the
geodesic edges follow the edges straight in longitude/latitude that both
tools clip along; the benchmark's layers already have edges of at most a few
thousandths of a degree, where the two conventions differ by far less than
the 1e-6 the weights are compared at (checked by running with and without
DENSIFY; see the script's notes in run.sh).

Run:  python3 scripts/bench-overlay/geos_overlay.py FROM.topo.json TO.topo.json OUT.csv [DENSIFY]
Versions used: Python 3.11, shapely 2.2.0 (GEOS 3.14.1), pyproj 3.7.2, numpy 2.4.
"""
import json
import sys

import numpy as np
import shapely
from pyproj import Geod
from shapely.geometry import MultiPolygon, Polygon
from shapely.strtree import STRtree
from shapely.validation import make_valid

GEOD = Geod(ellps="WGS84")


def decode(path, obj="counties"):
    with open(path, encoding="utf-8") as f:
        topo = json.load(f)
    t = topo.get("transform")
    arcs = []
    for arc in topo["arcs"]:
        a = np.asarray(arc, dtype=float)
        if t:
            a = np.cumsum(a, axis=0) * np.asarray(t["scale"]) + np.asarray(t["translate"])
        arcs.append(a)

    def ring(idx):
        parts = []
        for i in idx:
            a = arcs[i] if i >= 0 else arcs[~i][::-1]
            parts.append(a[1:] if parts else a)
        return np.concatenate(parts) if parts else np.empty((0, 2))

    units = {}
    for g in topo["objects"][obj]["geometries"]:
        polys = [g["arcs"]] if g["type"] == "Polygon" else g["arcs"] if g["type"] == "MultiPolygon" else []
        shapes = []
        for rings in polys:
            rs = [ring(r) for r in rings]
            rs = [r for r in rs if len(np.unique(r, axis=0)) >= 3]
            if rs:
                shapes.append(Polygon(rs[0], rs[1:]))
        geom = None
        if shapes:
            geom = MultiPolygon(shapes)
            if not geom.is_valid:
                geom = make_valid(geom)
                if geom.geom_type == "GeometryCollection":
                    geom = shapely.union_all([p for p in geom.geoms if p.geom_type in ("Polygon", "MultiPolygon")])
        units[str(g["id"])] = geom
    return units


def ring_area(coords, step):
    c = np.asarray(coords)
    if step:
        seg = np.diff(c, axis=0)
        n = np.maximum(1, np.ceil(np.abs(seg).max(axis=1) / step)).astype(int)
        start = np.repeat(c[:-1], n, axis=0)
        frac = np.concatenate([np.arange(k) / k for k in n])
        c = start + np.repeat(seg, n, axis=0) * frac[:, None]
    else:
        c = c[:-1]
    if len(c) < 3:
        return 0.0
    a, _ = GEOD.polygon_area_perimeter(c[:, 0], c[:, 1])
    return abs(a)


def area(g, step):
    if g is None or g.is_empty:
        return 0.0
    total = 0.0
    for p in getattr(g, "geoms", [g]):
        if p.geom_type == "Polygon":
            total += ring_area(p.exterior.coords, step) - sum(ring_area(h.coords, step) for h in p.interiors)
        elif p.geom_type in ("MultiPolygon", "GeometryCollection"):
            total += area(p, step)
    return total


def main():
    src, dst = decode(sys.argv[1]), decode(sys.argv[2])
    step = float(sys.argv[4]) if len(sys.argv) > 4 else 0.0
    tkeys = sorted(k for k, g in dst.items() if g is not None and not g.is_empty)
    tgeoms = [dst[k] for k in tkeys]
    tree = STRtree(tgeoms)
    out = ["from_code,to_code,weight"]
    for s in sorted(src):
        g = src[s]
        a = area(g, step)
        if a <= 0:
            continue
        cands = sorted(tree.query(g))
        rows = []
        for i in cands:
            w = area(g.intersection(tgeoms[i]), step) / a
            if w > 0:
                rows.append((tkeys[i], w))
        total = sum(w for _, w in rows)
        covered = total
        if total > 1 + 1e-8 and cands:
            covered = area(g.intersection(shapely.union_all([tgeoms[i] for i in cands])), step) / a
            if total - covered > 1e-8:
                rows = [(t, w * covered / total) for t, w in rows]
            else:
                covered = total
        for t, w in rows:
            out.append(f"{s},{t},{w:.12f}")
        rest = 1.0 - min(covered, 1.0)
        if rest > 0:
            out.append(f"{s},,{rest:.12f}")
    with open(sys.argv[3], "w", encoding="utf-8") as f:
        f.write("\n".join(out) + "\n")


if __name__ == "__main__":
    main()

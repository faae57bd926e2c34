"""Minimal TopoJSON reader (quantized arcs -> shapely geometries).

Only what the county layers need: Polygon and MultiPolygon geometries
with delta-encoded, quantized arcs.
"""
import json

from shapely.geometry import MultiPolygon, Polygon
from shapely.validation import make_valid


def load(path):
    with open(path, encoding="utf-8") as f:
        return json.load(f)


def _decode_arcs(topo):
    t = topo.get("transform")
    arcs = []
    for arc in topo["arcs"]:
        pts = []
        x = y = 0
        for p in arc:
            if t:
                x += p[0]
                y += p[1]
                pts.append((x * t["scale"][0] + t["translate"][0],
                            y * t["scale"][1] + t["translate"][1]))
            else:
                pts.append((p[0], p[1]))
        arcs.append(pts)
    return arcs


def _ring(arcs, idxs):
    pts = []
    for i in idxs:
        a = arcs[i] if i >= 0 else list(reversed(arcs[~i]))
        if pts:
            a = a[1:]
        pts.extend(a)
    return pts


def geometries(topo, obj="counties"):
    """Yield (id, name, shapely geometry in lon/lat) for one object."""
    arcs = _decode_arcs(topo)
    for g in topo["objects"][obj]["geometries"]:
        if g["type"] == "Polygon":
            polys = [g["arcs"]]
        elif g["type"] == "MultiPolygon":
            polys = g["arcs"]
        else:
            continue
        shapes = []
        for rings in polys:
            rs = [_ring(arcs, r) for r in rings]
            rs = [r for r in rs if len(r) >= 4]
            if rs:
                shapes.append(Polygon(rs[0], rs[1:]))
        geom = make_valid(MultiPolygon(shapes)) if shapes else None
        yield g["id"], g["properties"].get("name", ""), geom

"""Densified copies of the built-in county layers, for the overlay benchmark.

Every edge of every arc is cut into pieces of at most SPACING degrees and
each inserted point is pushed sideways by a small deterministic wiggle (at
most WIGGLE x SPACING), so a 1:10m layer gets the vertex density and the
small irregularities of a large-scale layer (1:500k and finer).

Shared edges stay shared:
- within a layer, because TopoJSON stores a boundary between two units once
  (an arc) and the arc is densified once;
- between the two vintages, because the inserted points depend only on the
  edge itself: its end points are put in a fixed order before the points
  are placed and the wiggle is a hash of that ordered pair, so an edge that
  both vintages have gets the same points in both.
Arc end points (where three units meet) and original vertices never move.

Output: a TopoJSON Topology with one object "counties" (the same ids and
properties as the input), quantized on a 1e-7 degree grid.

Run:  python3 scripts/bench-overlay/densify.py IN.topo.json SPACING OUT.topo.json
Standard library only (Python 3.8+).
"""
import json
import math
import struct
import sys

WIGGLE = 0.05  # largest sideways push, as a share of SPACING
GRID = 1e-7  # quantization step of the output, degrees
MASK = (1 << 64) - 1


def mix(z):
    """splitmix64 finalizer: a well-spread 64-bit hash of an integer."""
    z = (z + 0x9E3779B97F4A7C15) & MASK
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & MASK
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & MASK
    return z ^ (z >> 31)


def bits(v):
    return struct.unpack("<Q", struct.pack("<d", v))[0]


def decode_arcs(topo):
    t = topo.get("transform")
    out = []
    for arc in topo["arcs"]:
        pts = []
        x = y = 0
        for p in arc:
            if t:
                x += p[0]
                y += p[1]
                pts.append((x * t["scale"][0] + t["translate"][0], y * t["scale"][1] + t["translate"][1]))
            else:
                pts.append((float(p[0]), float(p[1])))
        out.append(pts)
    return out


def edge_points(a, b, spacing):
    """Points strictly between a and b, in order from a to b."""
    flip = b < a
    p, q = (b, a) if flip else (a, b)
    dx, dy = q[0] - p[0], q[1] - p[1]
    length = math.hypot(dx, dy)
    n = int(math.ceil(length / spacing - 1e-9))
    if n <= 1:
        return []
    h = mix(bits(p[0]) ^ mix(bits(p[1]) ^ mix(bits(q[0]) ^ mix(bits(q[1])))))
    nx, ny = -dy / length, dx / length
    pts = []
    for k in range(1, n):
        h = mix(h + k)
        w = ((h >> 11) / float(1 << 53) * 2.0 - 1.0) * WIGGLE * spacing
        t = k / n
        pts.append((p[0] + dx * t + nx * w, p[1] + dy * t + ny * w))
    if flip:
        pts.reverse()
    return pts


def densify(arc, spacing):
    out = [arc[0]]
    for a, b in zip(arc, arc[1:]):
        out.extend(edge_points(a, b, spacing))
        out.append(b)
    return out


def main():
    src, spacing, dst = sys.argv[1], float(sys.argv[2]), sys.argv[3]
    with open(src, encoding="utf-8") as f:
        topo = json.load(f)
    arcs = [densify(a, spacing) for a in decode_arcs(topo)]
    # A fixed origin, so a point both vintages share rounds the same way.
    x0, y0 = -180.0, -90.0
    qarcs = []
    for a in arcs:
        q = []
        px = py = 0
        for x, y in a:
            ix, iy = round((x - x0) / GRID), round((y - y0) / GRID)
            q.append([ix - px, iy - py])
            px, py = ix, iy
        qarcs.append(q)
    obj = topo["objects"]["counties"]
    out = {
        "type": "Topology",
        "transform": {"scale": [GRID, GRID], "translate": [x0, y0]},
        "objects": {"counties": obj},
        "arcs": qarcs,
    }
    with open(dst, "w", encoding="utf-8") as f:
        json.dump(out, f, separators=(",", ":"))
    print(f"{dst}: {len(arcs)} arcs, {sum(len(a) for a in arcs)} arc vertices, "
          f"{ring_vertices(obj, arcs)} ring vertices", file=sys.stderr)


def ring_vertices(obj, arcs):
    """Vertices of the features' rings (a shared arc counts once per side)."""
    n = 0
    for g in obj["geometries"]:
        polys = [g["arcs"]] if g["type"] == "Polygon" else g.get("arcs", []) if g["type"] == "MultiPolygon" else []
        for rings in polys:
            for r in rings:
                n += 1 + sum(len(arcs[i if i >= 0 else ~i]) - 1 for i in r)
    return n


if __name__ == "__main__":
    main()

//! Validity of a multipolygon in time near-linear in its vertices.
//!
//! The checks are those of the OGC simple-features rules as geo's
//! `Validation` applies them (its messages are kept), but the search for
//! meeting edges uses a uniform grid over the segments instead of comparing
//! every segment with every other one, and parts are compared only when
//! their boxes meet:
//!
//! - a ring must not meet itself, except where consecutive edges share
//!   their vertex;
//! - two rings (of one polygon or of two parts) must not cross or share a
//!   stretch of boundary; they may touch at points;
//! - each hole lies inside its exterior, holes do not lie inside one
//!   another, and parts do not lie inside one another (outside the holes).
//!
//! Where two rings touch at a point the local picture decides whether they
//! cross there; those (rare) pairs are settled with geo's `relate`, which
//! builds its own index.
//!
//! [`problems_brute_force`] is the all-pairs twin (geo's own validation).

use geo::algorithm::line_intersection::{line_intersection, LineIntersection};
use std::collections::{BTreeMap, BTreeSet};

use geo::coordinate_position::CoordPos;
use geo::dimensions::Dimensions;
use geo::kernels::{Kernel, Orientation, RobustKernel};
use geo::{Coord, Line, LineString, MultiPolygon, Polygon, Relate};

/// One ring of the multipolygon: part index, ring index within the part
/// (0 = exterior), closed coordinates.
struct RingRef<'a> {
    part: usize,
    ring: usize,
    coords: &'a [Coord<f64>],
}

fn ring_name(ring: usize) -> String {
    if ring == 0 {
        "exterior ring".to_string()
    } else {
        format!("interior ring at index {}", ring - 1)
    }
}

/// A grid over segments: cell -> segment ids (CSR layout).
struct Grid {
    x0: f64,
    y0: f64,
    /// Cells per unit of length (the inverse of the cell size).
    per_cell: f64,
    cols: usize,
    rows: usize,
    start: Vec<u32>,
    items: Vec<u32>,
}

/// A segment: ring id and index of its first vertex.
#[derive(Clone, Copy)]
struct Seg {
    ring: u32,
    at: u32,
}

impl Grid {
    fn new(segs: &[Seg], rings: &[RingRef<'_>]) -> Grid {
        let (mut x0, mut y0, mut x1, mut y1) = (f64::MAX, f64::MAX, f64::MIN, f64::MIN);
        for r in rings {
            for c in r.coords {
                x0 = x0.min(c.x);
                y0 = y0.min(c.y);
                x1 = x1.max(c.x);
                y1 = y1.max(c.y);
            }
        }
        let n = segs.len().max(1) as f64;
        let (w, h) = ((x1 - x0).max(1e-12), (y1 - y0).max(1e-12));
        // About one segment per cell on average.
        let cell = (w * h / n).sqrt().max(w / n).max(h / n);
        let cols = ((w / cell).floor() as usize + 1).min(1 << 15);
        let rows = ((h / cell).floor() as usize + 1).min(1 << 15);
        let mut g = Grid {
            x0,
            y0,
            per_cell: 1.0 / cell,
            cols,
            rows,
            start: vec![0; cols * rows + 1],
            items: Vec::new(),
        };
        for s in segs {
            let (a, b) = g.cells_of(line(rings, *s));
            for y in a.1..=b.1 {
                for x in a.0..=b.0 {
                    g.start[y * cols + x + 1] += 1;
                }
            }
        }
        for i in 1..g.start.len() {
            g.start[i] += g.start[i - 1];
        }
        let mut fill = g.start.clone();
        g.items = vec![0; g.start[cols * rows] as usize];
        for (id, s) in segs.iter().enumerate() {
            let (a, b) = g.cells_of(line(rings, *s));
            for y in a.1..=b.1 {
                for x in a.0..=b.0 {
                    let k = &mut fill[y * cols + x];
                    g.items[*k as usize] = id as u32;
                    *k += 1;
                }
            }
        }
        g
    }

    fn cell_of(&self, c: Coord<f64>) -> (usize, usize) {
        // `as usize` truncates, which is the floor for the non-negative
        // offsets here and 0 for anything below; monotonic in the
        // coordinate, so a segment's cells and a box's corner agree.
        let x = (((c.x - self.x0) * self.per_cell) as usize).min(self.cols - 1);
        let y = (((c.y - self.y0) * self.per_cell) as usize).min(self.rows - 1);
        (x, y)
    }

    fn cells_of(&self, l: Line<f64>) -> ((usize, usize), (usize, usize)) {
        let lo = Coord {
            x: l.start.x.min(l.end.x),
            y: l.start.y.min(l.end.y),
        };
        let hi = Coord {
            x: l.start.x.max(l.end.x),
            y: l.start.y.max(l.end.y),
        };
        (self.cell_of(lo), self.cell_of(hi))
    }

    fn cell(&self, x: usize, y: usize) -> &[u32] {
        let k = y * self.cols + x;
        &self.items[self.start[k] as usize..self.start[k + 1] as usize]
    }
}

fn line(rings: &[RingRef<'_>], s: Seg) -> Line<f64> {
    let c = rings[s.ring as usize].coords;
    Line::new(c[s.at as usize], c[s.at as usize + 1])
}

/// How two rings meet.
#[derive(Default, Clone, Copy)]
struct Meeting {
    /// They cross or share a stretch of boundary.
    cross: bool,
    /// They touch at a point (may or may not cross there).
    touch: bool,
}

/// Problems of a multipolygon whose rings are closed, in words (empty when
/// valid). At most a few are listed.
pub fn problems(mp: &MultiPolygon<f64>) -> Vec<String> {
    let mut rings = Vec::new();
    for (p, poly) in mp.0.iter().enumerate() {
        for (r, ls) in std::iter::once(poly.exterior())
            .chain(poly.interiors())
            .enumerate()
        {
            if ls.0.len() >= 2 {
                rings.push(RingRef {
                    part: p,
                    ring: r,
                    coords: &ls.0,
                });
            }
        }
    }
    let mut out = Vec::new();
    let mut segs = Vec::new();
    for (i, r) in rings.iter().enumerate() {
        for k in 0..r.coords.len() - 1 {
            if r.coords[k] != r.coords[k + 1] {
                segs.push(Seg {
                    ring: i as u32,
                    at: k as u32,
                });
            }
        }
    }
    if segs.is_empty() {
        return out;
    }
    let grid = Grid::new(&segs, &rings);
    let mut self_hit = vec![false; rings.len()];
    // Ring pairs (lower id first) that meet, with how.
    let mut meetings: BTreeMap<(u32, u32), Meeting> = BTreeMap::new();
    for cy in 0..grid.rows {
        for cx in 0..grid.cols {
            let ids = grid.cell(cx, cy);
            for (n, &i) in ids.iter().enumerate() {
                let si = segs[i as usize];
                let a = line(&rings, si);
                for &j in &ids[n + 1..] {
                    let sj = segs[j as usize];
                    let b = line(&rings, sj);
                    // Boxes meet?
                    let lo = Coord {
                        x: a.start.x.min(a.end.x).max(b.start.x.min(b.end.x)),
                        y: a.start.y.min(a.end.y).max(b.start.y.min(b.end.y)),
                    };
                    if lo.x > a.start.x.max(a.end.x).min(b.start.x.max(b.end.x))
                        || lo.y > a.start.y.max(a.end.y).min(b.start.y.max(b.end.y))
                    {
                        continue;
                    }
                    // Test each pair once: in the cell holding the low
                    // corner of the boxes' overlap.
                    if grid.cell_of(lo) != (cx, cy) {
                        continue;
                    }
                    if si.ring == sj.ring {
                        if self_hit[si.ring as usize] || a.start == b.end || a.end == b.start {
                            continue;
                        }
                        if line_intersection(a, b).is_some() {
                            self_hit[si.ring as usize] = true;
                        }
                        continue;
                    }
                    let key = (si.ring.min(sj.ring), si.ring.max(sj.ring));
                    let m = meetings.get(&key).copied().unwrap_or_default();
                    if m.cross {
                        continue;
                    }
                    match line_intersection(a, b) {
                        None => {}
                        Some(LineIntersection::Collinear { intersection }) => {
                            let e = meetings.entry(key).or_default();
                            if intersection.start == intersection.end {
                                e.touch = true;
                            } else {
                                e.cross = true;
                            }
                        }
                        Some(LineIntersection::SinglePoint {
                            intersection,
                            is_proper,
                        }) => {
                            let e = meetings.entry(key).or_default();
                            let at_end = intersection == a.start
                                || intersection == a.end
                                || intersection == b.start
                                || intersection == b.end;
                            if is_proper && !at_end {
                                e.cross = true;
                            } else {
                                e.touch = true;
                            }
                        }
                    }
                }
            }
        }
    }
    for (i, r) in rings.iter().enumerate() {
        if self_hit[i] {
            out.push(format!(
                "polygon at index {} is invalid: {} has a self-intersection",
                r.part,
                ring_name(r.ring)
            ));
        }
    }
    let boxes: Vec<[f64; 4]> = rings.iter().map(|r| bbox(r.coords)).collect();
    let mut by_part: Vec<Vec<usize>> = vec![Vec::new(); mp.0.len()];
    for (i, r) in rings.iter().enumerate() {
        by_part[r.part].push(i);
    }
    let exterior_of = |p: usize| by_part[p].first().copied().filter(|&e| rings[e].ring == 0);
    // Rings that cross; rings that touch at points (settled with relate).
    let mut touching_parts: BTreeSet<(usize, usize)> = BTreeSet::new();
    let mut touching_rings: BTreeSet<(usize, usize)> = BTreeSet::new();
    for (&(i, j), m) in &meetings {
        let (i, j) = (i as usize, j as usize);
        let (ri, rj) = (&rings[i], &rings[j]);
        if m.cross {
            out.push(pair_message(ri, rj, "cross or share a stretch of boundary"));
            continue;
        }
        touching_rings.insert((i, j));
        if ri.part != rj.part {
            touching_parts.insert((ri.part.min(rj.part), ri.part.max(rj.part)));
            continue;
        }
        let a = Polygon::new(LineString::from(ri.coords.to_vec()), vec![]);
        let b = Polygon::new(LineString::from(rj.coords.to_vec()), vec![]);
        let im = a.relate(&b);
        let line = im.get(CoordPos::OnBoundary, CoordPos::OnBoundary) == Dimensions::OneDimensional;
        let bad = if ri.ring == 0 {
            !im.is_contains() || line
        } else {
            im.get(CoordPos::Inside, CoordPos::Inside) == Dimensions::TwoDimensional || line
        };
        if bad {
            out.push(pair_message(ri, rj, "overlap"));
        }
    }
    if !out.is_empty() {
        return out;
    }
    for &(p, q) in &touching_parts {
        let im = mp.0[p].relate(&mp.0[q]);
        if im.get(CoordPos::Inside, CoordPos::Inside) == Dimensions::TwoDimensional
            || im.get(CoordPos::OnBoundary, CoordPos::OnBoundary) == Dimensions::OneDimensional
        {
            out.push(format!("polygons at indices {p} and {q} overlap"));
        }
    }
    // Boundaries that do not meet: one vertex tells inside from outside.
    let inside = |a: usize, b: usize| -> bool {
        contains_box(&boxes[b], &boxes[a])
            && point_in_ring(rings[a].coords[0], rings[b].coords) == CoordPos::Inside
    };
    for (p, ids) in by_part.iter().enumerate() {
        let Some(ext) = exterior_of(p) else { continue };
        let holes: Vec<usize> = ids.iter().copied().filter(|&h| h != ext).collect();
        for &h in &holes {
            if !touching_rings.contains(&(ext.min(h), ext.max(h))) && !inside(h, ext) {
                out.push(format!(
                    "polygon at index {p} is invalid: {} is not contained in the exterior ring",
                    ring_name(rings[h].ring)
                ));
            }
        }
        let hb: Vec<[f64; 4]> = holes.iter().map(|&h| boxes[h]).collect();
        for (x, y) in box_pairs(&hb) {
            let (a, b) = (holes[x].min(holes[y]), holes[x].max(holes[y]));
            if !touching_rings.contains(&(a, b)) && (inside(a, b) || inside(b, a)) {
                out.push(pair_message(&rings[a], &rings[b], "overlap"));
            }
        }
    }
    let parts: Vec<usize> = (0..mp.0.len())
        .filter(|&p| exterior_of(p).is_some())
        .collect();
    let pb: Vec<[f64; 4]> = parts
        .iter()
        .filter_map(|&p| exterior_of(p))
        .map(|e| boxes[e])
        .collect();
    for (x, y) in box_pairs(&pb) {
        let (p, q) = (parts[x].min(parts[y]), parts[x].max(parts[y]));
        if touching_parts.contains(&(p, q)) {
            continue;
        }
        let (Some(ep), Some(eq)) = (exterior_of(p), exterior_of(q)) else {
            continue;
        };
        for (inner, outer, op) in [(ep, eq, q), (eq, ep, p)] {
            if inside(inner, outer) && !by_part[op].iter().skip(1).any(|&h| inside(inner, h)) {
                out.push(format!("polygons at indices {p} and {q} overlap"));
            }
        }
    }
    out.dedup();
    out
}

/// Pairs (i < j) of boxes that meet, by a sweep over x.
fn box_pairs(boxes: &[[f64; 4]]) -> Vec<(usize, usize)> {
    let mut order: Vec<usize> = (0..boxes.len()).collect();
    order.sort_by(|&a, &b| boxes[a][0].total_cmp(&boxes[b][0]).then(a.cmp(&b)));
    let mut active: Vec<usize> = Vec::new();
    let mut out = Vec::new();
    for &i in &order {
        active.retain(|&k| boxes[k][2] >= boxes[i][0]);
        for &k in &active {
            if boxes_meet(&boxes[i], &boxes[k]) {
                out.push((i.min(k), i.max(k)));
            }
        }
        active.push(i);
    }
    out.sort_unstable();
    out
}

fn contains_box(outer: &[f64; 4], inner: &[f64; 4]) -> bool {
    outer[0] <= inner[0] && outer[1] <= inner[1] && outer[2] >= inner[2] && outer[3] >= inner[3]
}

/// Where a point lies relative to a closed ring (winding number, exact
/// orientation tests).
pub(crate) fn point_in_ring(p: Coord<f64>, ring: &[Coord<f64>]) -> CoordPos {
    let mut wn = 0i64;
    for w in ring.windows(2) {
        let (a, b) = (w[0], w[1]);
        let o = RobustKernel::orient2d(a, b, p);
        if o == Orientation::Collinear
            && p.x >= a.x.min(b.x)
            && p.x <= a.x.max(b.x)
            && p.y >= a.y.min(b.y)
            && p.y <= a.y.max(b.y)
        {
            return CoordPos::OnBoundary;
        }
        if a.y <= p.y {
            if b.y > p.y && o == Orientation::CounterClockwise {
                wn += 1;
            }
        } else if b.y <= p.y && o == Orientation::Clockwise {
            wn -= 1;
        }
    }
    if wn != 0 {
        CoordPos::Inside
    } else {
        CoordPos::Outside
    }
}

fn pair_message(a: &RingRef<'_>, b: &RingRef<'_>, how: &str) -> String {
    if a.part == b.part {
        format!(
            "polygon at index {} is invalid: {} and {} {how}",
            a.part,
            ring_name(a.ring),
            ring_name(b.ring)
        )
    } else {
        format!(
            "polygons at indices {} and {} {how}",
            a.part.min(b.part),
            a.part.max(b.part)
        )
    }
}

fn bbox(c: &[Coord<f64>]) -> [f64; 4] {
    let mut b = [f64::MAX, f64::MAX, f64::MIN, f64::MIN];
    for p in c {
        b[0] = b[0].min(p.x);
        b[1] = b[1].min(p.y);
        b[2] = b[2].max(p.x);
        b[3] = b[3].max(p.y);
    }
    b
}

fn boxes_meet(a: &[f64; 4], b: &[f64; 4]) -> bool {
    a[0] <= b[2] && b[0] <= a[2] && a[1] <= b[3] && b[1] <= a[3]
}

/// The all-pairs twin: geo's own validation, as messages.
pub fn problems_brute_force(mp: &MultiPolygon<f64>) -> Vec<String> {
    use geo::Validation;
    let mut out = Vec::new();
    mp.visit_validation(Box::new(|e| {
        out.push(e.to_string());
        Ok::<(), ()>(())
    }))
    .ok();
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::{polygon, MultiPolygon};

    fn mp(polys: Vec<Polygon<f64>>) -> MultiPolygon<f64> {
        MultiPolygon::new(polys)
    }

    /// Both checks give the same verdict (geo's validation is the
    /// reference for what is valid).
    fn agree(m: &MultiPolygon<f64>) -> bool {
        let fast = problems(m);
        let slow = problems_brute_force(m);
        assert_eq!(
            fast.is_empty(),
            slow.is_empty(),
            "fast {fast:?} vs geo {slow:?}"
        );
        fast.is_empty()
    }

    #[test]
    fn a_square_with_a_hole_is_valid() {
        let p = polygon!(
            exterior: [(x: 0., y: 0.), (x: 4., y: 0.), (x: 4., y: 4.), (x: 0., y: 4.)],
            interiors: [[(x: 1., y: 1.), (x: 1., y: 2.), (x: 2., y: 2.), (x: 2., y: 1.)]],
        );
        assert!(agree(&mp(vec![p])));
    }

    #[test]
    fn a_bow_tie_is_a_self_intersection() {
        let p = polygon![(x: 0., y: 0.), (x: 2., y: 2.), (x: 2., y: 0.), (x: 0., y: 2.)];
        assert!(!agree(&mp(vec![p])));
    }

    #[test]
    fn a_ring_touching_itself_at_a_vertex_is_invalid() {
        let p = polygon![
            (x: 0., y: 0.), (x: 2., y: 0.), (x: 1., y: 1.), (x: 2., y: 2.),
            (x: 0., y: 2.), (x: 1., y: 1.)
        ];
        assert!(!agree(&mp(vec![p])));
    }

    #[test]
    fn a_hole_outside_its_exterior_is_invalid() {
        let p = polygon!(
            exterior: [(x: 0., y: 0.), (x: 1., y: 0.), (x: 1., y: 1.), (x: 0., y: 1.)],
            interiors: [[(x: 5., y: 5.), (x: 5., y: 6.), (x: 6., y: 6.), (x: 6., y: 5.)]],
        );
        assert!(!agree(&mp(vec![p])));
    }

    #[test]
    fn a_hole_touching_its_exterior_at_a_point_is_valid() {
        let p = polygon!(
            exterior: [(x: 0., y: 0.), (x: 4., y: 0.), (x: 4., y: 4.), (x: 0., y: 4.)],
            interiors: [[(x: 0., y: 2.), (x: 2., y: 3.), (x: 2., y: 1.)]],
        );
        assert!(agree(&mp(vec![p])));
    }

    #[test]
    fn parts_touching_at_a_corner_are_valid_and_overlapping_parts_are_not() {
        let a = polygon![(x: 0., y: 0.), (x: 1., y: 0.), (x: 1., y: 1.), (x: 0., y: 1.)];
        let b = polygon![(x: 1., y: 1.), (x: 2., y: 1.), (x: 2., y: 2.), (x: 1., y: 2.)];
        assert!(agree(&mp(vec![a.clone(), b])));
        let c = polygon![(x: 0.5, y: 0.5), (x: 2., y: 0.5), (x: 2., y: 2.), (x: 0.5, y: 2.)];
        assert!(!agree(&mp(vec![a.clone(), c])));
        // Nested without touching: overlap.
        let d = polygon![(x: 0.2, y: 0.2), (x: 0.4, y: 0.2), (x: 0.4, y: 0.4), (x: 0.2, y: 0.4)];
        assert!(!agree(&mp(vec![a, d])));
    }

    #[test]
    fn an_island_in_a_lake_is_valid_and_parts_sharing_an_edge_are_not() {
        let lake = polygon!(
            exterior: [(x: 0., y: 0.), (x: 10., y: 0.), (x: 10., y: 10.), (x: 0., y: 10.)],
            interiors: [[(x: 2., y: 2.), (x: 2., y: 8.), (x: 8., y: 8.), (x: 8., y: 2.)]],
        );
        let island = polygon![(x: 4., y: 4.), (x: 6., y: 4.), (x: 6., y: 6.), (x: 4., y: 6.)];
        assert!(agree(&mp(vec![lake, island])));
        let a = polygon![(x: 0., y: 0.), (x: 1., y: 0.), (x: 1., y: 1.), (x: 0., y: 1.)];
        let b = polygon![(x: 1., y: 0.), (x: 2., y: 0.), (x: 2., y: 1.), (x: 1., y: 1.)];
        assert!(!agree(&mp(vec![a, b])));
    }

    #[test]
    fn a_long_densified_ring_is_checked_quickly_and_a_crossing_is_found() {
        // 200,000 vertices on a wavy circle: all pairs would be 2e10 tests.
        let n = 200_000;
        let mut pts: Vec<Coord<f64>> = (0..n)
            .map(|k| {
                let t = k as f64 / n as f64 * std::f64::consts::TAU;
                let r = 1.0 + 0.01 * (t * 500.0).sin();
                Coord {
                    x: r * t.cos(),
                    y: r * t.sin(),
                }
            })
            .collect();
        pts.push(pts[0]);
        let ok = mp(vec![Polygon::new(LineString::from(pts.clone()), vec![])]);
        assert!(problems(&ok).is_empty());
        // Swap two vertices far apart: the ring now crosses itself.
        pts.swap(10, 100_010);
        let bad = mp(vec![Polygon::new(LineString::from(pts), vec![])]);
        assert!(!problems(&bad).is_empty());
    }
}

//! Cutting a polygon down to the box where it can meet another one, in time
//! proportional to the vertices near that box.
//!
//! The intersection of two polygons lies inside the intersection `R` of
//! their bounding boxes, so each may be replaced by its part inside `R`
//! before the boolean operation. Two steps do that:
//!
//! 1. **Skipping far runs.** Every ring keeps the boxes of runs of
//!    [`RUN`] consecutive edges. A run whose box lies wholly on the far side
//!    of one of `R`'s four lines is replaced by the straight chord between
//!    its end points (consecutive runs beyond the same line by one chord).
//!    The run and its chord lie in the same half-plane outside `R`, so the
//!    loop they form does not wind around any point of `R`: the ring's
//!    winding number, hence the polygon, is unchanged inside `R`.
//! 2. **Clipping** what is left to `R` (Sutherland–Hodgman against the
//!    four lines; it keeps winding numbers inside `R` and may leave
//!    zero-width edges along `R`'s sides, which a boolean operation
//!    ignores).
//!
//! A 100,000-vertex polygon against a county-sized box thus costs a few
//! thousand box tests and the few hundred vertices near the box.

use std::borrow::Cow;

use geo::{Coord, LineString, Polygon};

/// Edges per run whose box is kept.
pub const RUN: usize = 32;

/// An axis-aligned box: min x, min y, max x, max y.
pub type Bbox = [f64; 4];

/// Boxes of runs of [`RUN`] edges of one ring.
#[derive(Debug, Clone, Default)]
pub struct RingRuns {
    boxes: Vec<Bbox>,
}

/// Run boxes of each ring of a polygon (exterior first) and the polygon's
/// box.
#[derive(Debug, Clone)]
pub struct PolygonRuns {
    /// The polygon's bounding box.
    pub bbox: Bbox,
    rings: Vec<RingRuns>,
}

fn box_of(c: &[Coord<f64>]) -> Bbox {
    let mut b = [f64::MAX, f64::MAX, f64::MIN, f64::MIN];
    for p in c {
        b[0] = b[0].min(p.x);
        b[1] = b[1].min(p.y);
        b[2] = b[2].max(p.x);
        b[3] = b[3].max(p.y);
    }
    b
}

impl RingRuns {
    fn new(ring: &[Coord<f64>]) -> RingRuns {
        let edges = ring.len().saturating_sub(1);
        let boxes = (0..edges)
            .step_by(RUN)
            .map(|lo| box_of(&ring[lo..=(lo + RUN).min(edges)]))
            .collect();
        RingRuns { boxes }
    }
}

impl PolygonRuns {
    /// Indexes a polygon's rings.
    pub fn new(p: &Polygon<f64>) -> PolygonRuns {
        let rings: Vec<RingRuns> = std::iter::once(p.exterior())
            .chain(p.interiors())
            .map(|r| RingRuns::new(&r.0))
            .collect();
        PolygonRuns {
            bbox: box_of(&p.exterior().0),
            rings,
        }
    }
}

/// The intersection of two boxes, if they meet.
pub fn meet(a: &Bbox, b: &Bbox) -> Option<Bbox> {
    let r = [
        a[0].max(b[0]),
        a[1].max(b[1]),
        a[2].min(b[2]),
        a[3].min(b[3]),
    ];
    (r[0] <= r[2] && r[1] <= r[3]).then_some(r)
}

fn contains(outer: &Bbox, inner: &Bbox) -> bool {
    outer[0] <= inner[0] && outer[1] <= inner[1] && outer[2] >= inner[2] && outer[3] >= inner[3]
}

/// Which of `r`'s four lines a box lies wholly beyond, if any.
fn far_side(b: &Bbox, r: &Bbox) -> Option<u8> {
    if b[2] < r[0] {
        Some(0)
    } else if b[0] > r[2] {
        Some(1)
    } else if b[3] < r[1] {
        Some(2)
    } else if b[1] > r[3] {
        Some(3)
    } else {
        None
    }
}

/// Step 1 for one closed ring: far runs become chords.
fn skip_far(ring: &[Coord<f64>], runs: &RingRuns, r: &Bbox, out: &mut Vec<Coord<f64>>) {
    out.clear();
    let edges = ring.len().saturating_sub(1);
    if edges == 0 {
        return;
    }
    out.push(ring[0]);
    let mut beyond: Option<u8> = None;
    for (k, b) in runs.boxes.iter().enumerate() {
        let lo = k * RUN;
        let hi = (lo + RUN).min(edges);
        match far_side(b, r) {
            Some(s) if beyond == Some(s) => {}
            Some(s) => {
                if beyond.is_some() {
                    out.push(ring[lo]);
                }
                beyond = Some(s);
            }
            None => {
                if beyond.take().is_some() {
                    out.push(ring[lo]);
                }
                out.extend_from_slice(&ring[lo + 1..=hi]);
            }
        }
    }
    if beyond.is_some() {
        out.push(ring[edges]);
    }
}

/// Step 2 for one closed ring: Sutherland–Hodgman against `r`. Returns a
/// closed ring, or nothing when fewer than three points are left.
fn clip_ring(ring: &[Coord<f64>], r: &Bbox, buf: &mut Vec<Coord<f64>>) -> Option<LineString<f64>> {
    // Open ring (without the repeated first point).
    let mut cur: Vec<Coord<f64>> = ring[..ring.len().saturating_sub(1)].to_vec();
    for side in 0..4u8 {
        if cur.len() < 3 {
            return None;
        }
        let inside = |p: &Coord<f64>| match side {
            0 => p.x >= r[0],
            1 => p.x <= r[2],
            2 => p.y >= r[1],
            _ => p.y <= r[3],
        };
        let cut = |a: Coord<f64>, b: Coord<f64>| -> Coord<f64> {
            match side {
                0 | 1 => {
                    let x = if side == 0 { r[0] } else { r[2] };
                    let t = (x - a.x) / (b.x - a.x);
                    Coord {
                        x,
                        y: a.y + t * (b.y - a.y),
                    }
                }
                _ => {
                    let y = if side == 2 { r[1] } else { r[3] };
                    let t = (y - a.y) / (b.y - a.y);
                    Coord {
                        x: a.x + t * (b.x - a.x),
                        y,
                    }
                }
            }
        };
        buf.clear();
        let n = cur.len();
        for i in 0..n {
            let s = cur[(i + n - 1) % n];
            let e = cur[i];
            match (inside(&s), inside(&e)) {
                (true, true) => buf.push(e),
                (true, false) => buf.push(cut(s, e)),
                (false, true) => {
                    buf.push(cut(s, e));
                    buf.push(e);
                }
                (false, false) => {}
            }
        }
        std::mem::swap(&mut cur, buf);
    }
    cur.dedup();
    while cur.len() > 1 && cur.first() == cur.last() {
        cur.pop();
    }
    if cur.len() < 3 {
        return None;
    }
    cur.push(cur[0]);
    Some(LineString::new(cur))
}

/// The part of polygon `p` inside box `r` (same point set within `r`), or
/// `None` when nothing is left. When `r` holds the whole polygon, a copy.
pub fn cut_to_box<'a>(
    p: &'a Polygon<f64>,
    runs: &PolygonRuns,
    r: &Bbox,
) -> Option<Cow<'a, Polygon<f64>>> {
    if contains(r, &runs.bbox) {
        return Some(Cow::Borrowed(p));
    }
    let mut far = Vec::new();
    let mut buf = Vec::new();
    // The exterior decides: without it nothing is left.
    let exterior = {
        let ring = p.exterior();
        skip_far(&ring.0, &runs.rings[0], r, &mut far);
        clip_ring(&far, r, &mut buf)?
    };
    let holes: Vec<LineString<f64>> = p
        .interiors()
        .iter()
        .zip(runs.rings.iter().skip(1))
        .filter_map(|(ring, rr)| {
            skip_far(&ring.0, rr, r, &mut far);
            clip_ring(&far, r, &mut buf)
        })
        .collect();
    Some(Cow::Owned(Polygon::new(exterior, holes)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::geodesy::WGS84;
    use geo::algorithm::bool_ops::BooleanOps;

    /// A wavy ring around (0, 0) with `n` vertices, closed.
    fn wavy(n: usize, r0: f64) -> LineString<f64> {
        let mut pts: Vec<Coord<f64>> = (0..n)
            .map(|k| {
                let t = k as f64 / n as f64 * std::f64::consts::TAU;
                let r = r0 * (1.0 + 0.05 * (t * 37.0).sin());
                Coord {
                    x: r * t.cos(),
                    y: r * t.sin(),
                }
            })
            .collect();
        pts.push(pts[0]);
        LineString::new(pts)
    }

    #[test]
    fn cutting_to_a_box_keeps_the_intersection_with_any_other_polygon() {
        // Reference: the intersection of the whole polygons (geo's boolean
        // operations); the cut one must give the same area. The boolean
        // operation snaps to a grid of about 1e-9 of the inputs' extent,
        // so the whole 11-degree polygon is measured to about 1e-9 only.
        let mut hole = wavy(3_000, 1.0).0;
        hole.reverse();
        let big = Polygon::new(wavy(20_000, 5.0), vec![LineString::new(hole)]);
        let runs = PolygonRuns::new(&big);
        for (x, y, w) in [
            (4.0, 0.0, 1.5),
            (0.5, 0.5, 1.0),
            (-5.5, -0.3, 1.2),
            (0.0, 0.0, 12.0),
        ] {
            let small = Polygon::new(
                LineString::from(vec![
                    (x, y),
                    (x + w, y + 0.1),
                    (x + w * 0.8, y + w),
                    (x - 0.2, y + w * 0.7),
                    (x, y),
                ]),
                vec![],
            );
            let sb = box_of(&small.exterior().0);
            let whole = WGS84.multi_polygon_area(&big.intersection(&small));
            let r = meet(&runs.bbox, &sb).unwrap();
            let cut = cut_to_box(&big, &runs, &r).unwrap();
            assert!(cut.exterior().0.len() <= big.exterior().0.len());
            let got = WGS84.multi_polygon_area(&cut.as_ref().intersection(&small));
            assert!(
                (got - whole).abs() <= 1e-8 * whole.max(1.0),
                "box at ({x}, {y}): {got} vs {whole}"
            );
        }
    }

    #[test]
    fn a_ring_around_the_box_becomes_the_box() {
        let ring = wavy(4_000, 10.0);
        let p = Polygon::new(ring, vec![]);
        let runs = PolygonRuns::new(&p);
        let r = [-1.0, -1.0, 1.0, 1.0];
        let cut = cut_to_box(&p, &runs, &r).unwrap();
        assert!(cut.exterior().0.len() < 20, "{}", cut.exterior().0.len());
        let a = WGS84.polygon_area(cut.as_ref());
        let b = WGS84.cell_area(-1.0, -1.0, 1.0, 1.0);
        assert!((a - b).abs() < 1e-6 * b, "{a} vs {b}");
    }
}

//! Boolean operations on polygons through i_overlay, single-threaded.
//!
//! geo's `BooleanOps` drives the same library, but with its parallel sort
//! turned on, which asks the operating system for the number of CPUs on
//! every call (reading cgroup files): on an overlay of many small pieces,
//! already run in parallel over sources, that cost more than the sorting it
//! speeds up. Here each operation runs on the calling thread; the results
//! (OGC-valid polygons, exteriors counter-clockwise) are the same.

use geo::{Coord, LineString, MultiPolygon, Polygon};
use i_overlay::core::fill_rule::FillRule;
use i_overlay::core::overlay_rule::OverlayRule;
use i_overlay::core::solver::Solver;
use i_overlay::float::overlay::{FloatOverlay, OverlayOptions};

use crate::core::geodesy::WGS84;

fn paths<'a>(polys: impl IntoIterator<Item = &'a Polygon<f64>>) -> Vec<Vec<[f64; 2]>> {
    let mut out = Vec::new();
    for p in polys {
        for r in std::iter::once(p.exterior()).chain(p.interiors()) {
            let c = &r.0;
            if c.len() < 4 {
                continue;
            }
            out.push(c[..c.len() - 1].iter().map(|c| [c.x, c.y]).collect());
        }
    }
    out
}

fn ring(path: Vec<[f64; 2]>) -> LineString<f64> {
    let mut v: Vec<Coord<f64>> = path.into_iter().map(|[x, y]| Coord { x, y }).collect();
    if let Some(&first) = v.first() {
        v.push(first);
    }
    LineString::new(v)
}

fn shapes(
    subject: Vec<Vec<[f64; 2]>>,
    clip: Vec<Vec<[f64; 2]>>,
    rule: OverlayRule,
    fill: FillRule,
) -> Vec<Vec<Vec<[f64; 2]>>> {
    let solver = Solver {
        multithreading: None,
        ..Solver::AUTO
    };
    FloatOverlay::with_subj_and_clip_custom(&subject, &clip, OverlayOptions::ogc(), solver)
        .overlay(rule, fill)
}

fn run(
    subject: Vec<Vec<[f64; 2]>>,
    clip: Vec<Vec<[f64; 2]>>,
    rule: OverlayRule,
    fill: FillRule,
) -> MultiPolygon<f64> {
    let shapes = shapes(subject, clip, rule, fill);
    MultiPolygon::new(
        shapes
            .into_iter()
            .filter(|s| !s.is_empty())
            .map(|shape| {
                let mut rings = shape.into_iter().map(ring);
                let ext = rings.next().unwrap_or_else(|| LineString::new(vec![]));
                Polygon::new(ext, rings.collect())
            })
            .collect(),
    )
}

/// `a ∩ b` (even-odd rule, as geo's `intersection`).
pub fn intersection(a: &Polygon<f64>, b: &Polygon<f64>) -> MultiPolygon<f64> {
    run(
        paths([a]),
        paths([b]),
        OverlayRule::Intersect,
        FillRule::EvenOdd,
    )
}

/// The area (m², see `core::geodesy`) of `a ∩ b`, without building the
/// pieces as polygons: the same as measuring [`intersection`].
pub fn intersection_area(a: &Polygon<f64>, b: &Polygon<f64>) -> f64 {
    let found = shapes(
        paths([a]),
        paths([b]),
        OverlayRule::Intersect,
        FillRule::EvenOdd,
    );
    found
        .iter()
        .map(|shape| {
            let mut rings = shape.iter();
            let outer = rings
                .next()
                .map_or(0.0, |r| WGS84.ring_area_signed_xy(r).abs());
            let holes: f64 = rings.map(|r| WGS84.ring_area_signed_xy(r).abs()).sum();
            (outer - holes).max(0.0)
        })
        .sum()
}

/// `a ∩ b` of two multipolygons (even-odd rule).
pub fn intersection_multi(a: &MultiPolygon<f64>, b: &MultiPolygon<f64>) -> MultiPolygon<f64> {
    run(
        paths(&a.0),
        paths(&b.0),
        OverlayRule::Intersect,
        FillRule::EvenOdd,
    )
}

/// `a − b` with the non-zero rule (overlapping parts of `b` count once).
pub fn difference(a: &Polygon<f64>, b: &MultiPolygon<f64>) -> MultiPolygon<f64> {
    run(
        paths([a]),
        paths(&b.0),
        OverlayRule::Difference,
        FillRule::NonZero,
    )
}

/// The union of a multipolygon's own rings with the non-zero rule: the
/// repair of self-intersecting or overlapping rings.
pub fn union_non_zero(a: &MultiPolygon<f64>) -> MultiPolygon<f64> {
    run(
        paths(&a.0),
        Vec::new(),
        OverlayRule::Union,
        FillRule::NonZero,
    )
}

//! Boolean operations on polygons through i_overlay, single-threaded.
//!
//! geo's `BooleanOps` drives the same library, but with its parallel sort
//! turned on, which asks the operating system for the number of CPUs on
//! every call (reading cgroup files): on an overlay of many small pieces,
//! already run in parallel over sources, that cost more than the sorting it
//! speeds up. Here each operation runs on the calling thread; the results
//! (OGC-valid polygons, exteriors counter-clockwise) are the same.

use std::cell::RefCell;

use geo::{Coord, LineString, MultiPolygon, Polygon};
use i_overlay::core::fill_rule::FillRule;
use i_overlay::core::overlay::{IntOverlayOptions, Overlay, ShapeType};
use i_overlay::core::overlay_rule::OverlayRule;
use i_overlay::core::solver::Solver;
use i_overlay::float::overlay::{FloatOverlay, OverlayOptions};
use i_overlay::i_float::adapter::FloatPointAdapter;
use i_overlay::i_float::float::rect::FloatRect;
use i_overlay::i_shape::flat::buffer::FlatContoursBuffer;

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
    FloatOverlay::with_subj_and_clip_custom(&subject, &clip, OverlayOptions::ogc(), single_thread())
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

/// Scratch space of one thread for [`intersection_area`]: the clipper and
/// its output, kept between calls so their buffers are allocated once.
struct AreaScratch {
    overlay: Overlay,
    contours: FlatContoursBuffer,
    ring: Vec<[f64; 2]>,
}

thread_local! {
    static AREA_SCRATCH: RefCell<AreaScratch> = RefCell::new(AreaScratch {
        overlay: Overlay::new_custom(0, IntOverlayOptions::default(), single_thread()),
        contours: FlatContoursBuffer::default(),
        ring: Vec::new(),
    });
}

fn single_thread() -> Solver {
    Solver {
        multithreading: None,
        ..Solver::AUTO
    }
}

fn rings(p: &Polygon<f64>) -> impl Iterator<Item = &[Coord<f64>]> {
    std::iter::once(p.exterior())
        .chain(p.interiors())
        .map(|r| &r.0[..])
        .filter(|c| c.len() >= 4)
}

/// The area (m², see `core::geodesy`) of `a ∩ b`, without building the
/// pieces as polygons: the same as measuring [`intersection`], up to the
/// clipper's grid.
///
/// The clipper is driven on its integer grid (the same grid its float
/// interface would choose: the box of both inputs) and asked for bare
/// contours, outer ones counter-clockwise and holes clockwise, so the
/// signed areas of all contours add up to the area without sorting holes
/// into their shapes.
pub fn intersection_area(a: &Polygon<f64>, b: &Polygon<f64>) -> f64 {
    let mut rect = FloatRect::new(f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for c in rings(a).chain(rings(b)).flatten() {
        rect.min_x = rect.min_x.min(c.x);
        rect.max_x = rect.max_x.max(c.x);
        rect.min_y = rect.min_y.min(c.y);
        rect.max_y = rect.max_y.max(c.y);
    }
    if rect.min_x > rect.max_x {
        return 0.0;
    }
    let adapter = FloatPointAdapter::<[f64; 2], f64>::new(rect);
    AREA_SCRATCH.with(|cell| {
        let mut scratch = cell.borrow_mut();
        let AreaScratch {
            overlay,
            contours,
            ring,
        } = &mut *scratch;
        overlay.clear();
        for (p, kind) in [(a, ShapeType::Subject), (b, ShapeType::Clip)] {
            for r in rings(p) {
                // Without the closing point, which repeats the first.
                let open = &r[..r.len() - 1];
                overlay.add_path_iter(open.iter().map(|c| adapter.float_to_int(&[c.x, c.y])), kind);
            }
        }
        contours.clear_and_reserve(0, 0);
        overlay.overlay_into(OverlayRule::Intersect, FillRule::EvenOdd, contours);
        let mut total = 0.0;
        for range in &contours.ranges {
            ring.clear();
            ring.extend(
                contours.points[range.clone()]
                    .iter()
                    .map(|p| adapter.int_to_float(p)),
            );
            total += WGS84.ring_area_signed_xy(ring);
        }
        total.max(0.0)
    })
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

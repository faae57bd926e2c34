//! Polygon overlay: how much of each source unit lies in each target unit.
//!
//! The steps, each a function here:
//!
//! 1. [`prepare`]: raw rings from a reader become valid multipolygons.
//!    Unclosed rings are closed, rings that collapse (fewer than three
//!    distinct points, or no area) are dropped, rings against the format's
//!    orientation convention are turned, and a feature that is still invalid
//!    (self-intersections, overlapping parts) is repaired by a non-zero
//!    union of its own rings. Every change is reported per feature; a
//!    feature that collapses to nothing stays in the list with zero area.
//!    Valid features are not passed through any boolean operation (a
//!    self-union of valid input only adds micro-slivers from snapping).
//! 2. [`candidate_pairs`]: an R*-tree over the bounding boxes of each
//!    target *part* (a unit like the Aleutians spans nearly every
//!    longitude as a whole, but its parts are small) gives the (source part,
//!    target part) pairs whose boxes meet. [`candidate_pairs_brute_force`]
//!    is its all-pairs twin for tests.
//! 3. [`overlay`]: exact intersections (i_overlay, see [`boolean`]) of the
//!    parts cut down to where their boxes meet (see [`clip`]), in
//!    parallel over sources; results are gathered in source order, so the
//!    output does not depend on the number of threads.
//!
//! Areas use [`crate::core::geodesy`]: the ellipsoidal area of polygons whose
//! edges are straight in longitude/latitude, the same edges the clipper
//! cuts along, so the pieces of a fully covered source sum to its area.

use std::collections::{BTreeMap, BTreeSet};

use geo::{Area, BoundingRect, Coord, Intersects, LineString, MultiPolygon, Point, Polygon};
use rayon::prelude::*;
use rstar::primitives::GeomWithData;
use rstar::{RTree, AABB};

use crate::core::crosswalk::{Basis, Crosswalk, CrosswalkRow};
use crate::core::geodesy::WGS84;

pub mod boolean;
pub mod clip;
pub mod validity;

use clip::PolygonRuns;

/// A ring as read: coordinates (longitude, latitude), closed or not.
pub type Ring = Vec<Coord<f64>>;

/// Which way a format winds exterior rings.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RingConvention {
    /// Exteriors counter-clockwise, holes clockwise (GeoJSON, RFC 7946).
    ExteriorCounterClockwise,
    /// Exteriors clockwise, holes counter-clockwise (Shapefile, TopoJSON).
    ExteriorClockwise,
}

/// A feature as a reader found it.
#[derive(Debug, Clone, PartialEq)]
pub struct RawFeature {
    /// 1-based feature (record) number in its file.
    pub number: u64,
    /// The unit code taken from the key field.
    pub key: String,
    /// Polygons, each an exterior ring followed by its holes.
    pub polygons: Vec<Vec<Ring>>,
}

/// A unit ready for overlay: one code, a valid multipolygon, its area.
#[derive(Debug, Clone)]
pub struct Unit {
    /// The unit code.
    pub key: String,
    /// Feature numbers that made it (several when a code repeats).
    pub features: Vec<u64>,
    /// Valid geometry, exteriors counter-clockwise.
    pub geometry: MultiPolygon<f64>,
    /// Area in square metres (edges straight in longitude/latitude, WGS84).
    pub area: f64,
}

/// What [`prepare`] changed in one feature.
#[derive(Debug, Clone, PartialEq)]
pub struct Repair {
    /// 1-based feature number.
    pub feature: u64,
    /// The unit code.
    pub key: String,
    /// What was wrong, in words.
    pub problems: Vec<String>,
    /// Area after repair divided by the area of the rings as read, minus 1
    /// (0 when nothing changed the area).
    pub area_change: f64,
    /// True when nothing is left of the feature.
    pub collapsed: bool,
}

/// A layer ready for overlay.
#[derive(Debug, Clone, Default)]
pub struct PreparedLayer {
    /// Units sorted by code.
    pub units: Vec<Unit>,
    /// Per-feature repairs, in feature order.
    pub repairs: Vec<Repair>,
}

fn ring_signed_planar(r: &[Coord<f64>]) -> f64 {
    let n = r.len();
    let mut s = 0.0;
    for i in 0..n {
        let a = r[i];
        let b = r[(i + 1) % n];
        s += a.x * b.y - b.x * a.y;
    }
    s / 2.0
}

/// True when all points lie on one line (or coincide).
fn collinear(pts: &[Coord<f64>]) -> bool {
    let Some(&p0) = pts.first() else { return true };
    let Some(&p1) = pts.iter().find(|&&p| p != p0) else {
        return true;
    };
    pts.iter()
        .all(|p| (p1.x - p0.x) * (p.y - p0.y) - (p1.y - p0.y) * (p.x - p0.x) == 0.0)
}

/// Cleans one ring: closes it, removes repeated consecutive points.
/// Returns the closed ring, or `None` if it has no area left.
fn clean_ring(ring: &Ring, problems: &mut Vec<String>, label: &str) -> Option<LineString<f64>> {
    let mut pts: Vec<Coord<f64>> = Vec::with_capacity(ring.len() + 1);
    for &c in ring {
        if pts.last() != Some(&c) {
            pts.push(c);
        }
    }
    if pts.len() > 1 && pts.first() != pts.last() {
        if ring.len() >= 3 {
            problems.push(format!("{label} was not closed; closed it"));
        }
        if let Some(&first) = pts.first() {
            pts.push(first);
        }
    }
    let distinct = pts.len().saturating_sub(1);
    // A ring collapses when its points are on one line; a zero signed area
    // alone is not enough (a bow-tie has two real lobes that cancel).
    if distinct < 3 || collinear(&pts) {
        problems.push(format!(
            "{label} collapsed (fewer than 3 distinct points or no area); dropped it"
        ));
        return None;
    }
    Some(LineString::new(pts))
}

fn orient_ring(ls: LineString<f64>, want_ccw: bool) -> LineString<f64> {
    let ccw = ring_signed_planar(&ls.0) > 0.0;
    if ccw == want_ccw {
        ls
    } else {
        let mut v = ls.0;
        v.reverse();
        LineString::new(v)
    }
}

/// Makes a valid multipolygon from raw polygons, recording problems.
/// Returns it, the area of the rings as read, and whether a repair (a
/// union) changed the rings.
fn repair_feature(
    polygons: &[Vec<Ring>],
    convention: RingConvention,
    problems: &mut Vec<String>,
) -> (MultiPolygon<f64>, f64, bool) {
    let mut parts = Vec::with_capacity(polygons.len());
    let mut raw_area = 0.0;
    let many = polygons.len() > 1;
    for (pi, rings) in polygons.iter().enumerate() {
        let part = if many {
            format!("part {} ", pi + 1)
        } else {
            String::new()
        };
        let mut cleaned: Vec<LineString<f64>> = Vec::with_capacity(rings.len());
        for (ri, ring) in rings.iter().enumerate() {
            let label = if ri == 0 {
                format!("{part}exterior ring")
            } else {
                format!("{part}hole {ri}")
            };
            let Some(ls) = clean_ring(ring, problems, &label) else {
                if ri == 0 {
                    // Without its exterior the holes mean nothing.
                    break;
                }
                continue;
            };
            let ccw = ring_signed_planar(&ls.0) > 0.0;
            let expect_ccw = (ri == 0) == (convention == RingConvention::ExteriorCounterClockwise);
            if ccw != expect_ccw {
                problems.push(format!("{label} had the wrong orientation; turned it"));
            }
            cleaned.push(ls);
        }
        if cleaned.is_empty() {
            continue;
        }
        let mut it = cleaned.into_iter();
        let Some(ext) = it.next() else { continue };
        let ext = orient_ring(ext, true);
        let holes: Vec<_> = it.map(|h| orient_ring(h, false)).collect();
        let p = Polygon::new(ext, holes);
        raw_area += WGS84.polygon_area(&p);
        parts.push(p);
    }
    let mp = MultiPolygon::new(parts);
    if mp.0.is_empty() {
        return (mp, raw_area, false);
    }
    let mut messages = validity::problems(&mp);
    messages.truncate(3);
    if messages.is_empty() {
        return (mp, raw_area, false);
    }
    problems.push(format!(
        "invalid ({}); repaired by a non-zero union of its rings",
        messages.join("; ")
    ));
    let repaired = boolean::union_non_zero(&mp);
    (repaired, raw_area, true)
}

/// Turns raw features into units: repairs each (see the module notes) and
/// joins features that share a code into one unit. Nothing is dropped: a
/// feature that collapses is in `repairs` with `collapsed` set and its unit
/// (if it has no other features) has zero area.
pub fn prepare(features: &[RawFeature], convention: RingConvention) -> PreparedLayer {
    let done: Vec<(MultiPolygon<f64>, Repair, f64)> = features
        .par_iter()
        .map(|f| {
            let mut problems = Vec::new();
            let (mp, raw_area, repaired) = repair_feature(&f.polygons, convention, &mut problems);
            // The rings as read are the geometry unless a repair ran.
            let area = if repaired {
                WGS84.multi_polygon_area(&mp)
            } else {
                raw_area
            };
            let collapsed = mp.0.is_empty() || area <= 0.0;
            if collapsed && !problems.iter().any(|p| p.contains("nothing is left")) {
                problems.push("nothing is left of the feature; it gets no crosswalk rows".into());
            }
            let area_change = if raw_area > 0.0 {
                area / raw_area - 1.0
            } else {
                0.0
            };
            let repair = Repair {
                feature: f.number,
                key: f.key.clone(),
                problems,
                area_change,
                collapsed,
            };
            (mp, repair, area)
        })
        .collect();
    let mut by_key: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
    for (i, f) in features.iter().enumerate() {
        by_key.entry(f.key.as_str()).or_default().push(i);
    }
    let mut geometries = Vec::with_capacity(done.len());
    let mut repairs = Vec::with_capacity(done.len());
    let mut areas = Vec::with_capacity(done.len());
    for (mp, r, a) in done {
        geometries.push(Some(mp));
        repairs.push(r);
        areas.push(a);
    }
    let mut units = Vec::with_capacity(by_key.len());
    for (key, idx) in by_key {
        let mut polys: Vec<Polygon<f64>> = Vec::new();
        for &i in &idx {
            polys.extend(geometries[i].take().into_iter().flat_map(|g| g.0));
        }
        let mut geometry = MultiPolygon::new(polys);
        let mut area = areas[idx[0]];
        if idx.len() > 1 {
            let numbers: Vec<String> = idx
                .iter()
                .map(|&i| features[i].number.to_string())
                .collect();
            let joined = !validity::problems(&geometry).is_empty();
            if joined {
                geometry = boolean::union_non_zero(&geometry);
            }
            area = WGS84.multi_polygon_area(&geometry);
            for &i in &idx {
                repairs[i].problems.push(format!(
                    "code {key} is shared by features {}; taken together as one unit{}",
                    numbers.join(", "),
                    if joined {
                        " (their overlap counted once)"
                    } else {
                        ""
                    }
                ));
            }
        }
        units.push(Unit {
            key: key.to_string(),
            features: idx.iter().map(|&i| features[i].number).collect(),
            geometry,
            area,
        });
    }
    repairs.retain(|r| !r.problems.is_empty());
    PreparedLayer { units, repairs }
}

/// A (source unit, source part, target unit, target part) index tuple.
pub type PartPair = (usize, usize, usize, usize);

fn envelope(p: &Polygon<f64>) -> Option<AABB<[f64; 2]>> {
    p.bounding_rect()
        .map(|r| AABB::from_corners([r.min().x, r.min().y], [r.max().x, r.max().y]))
}

/// R*-tree over the parts of a layer: each entry a part's bounding box with
/// its (unit, part) indices.
pub struct PartTree {
    tree: RTree<PartBox>,
}

/// A part's bounding box with its (unit, part) indices.
type PartBox = GeomWithData<rstar::primitives::Rectangle<[f64; 2]>, (usize, usize)>;

impl PartTree {
    /// Builds the tree over every part of every unit.
    pub fn new(units: &[Unit]) -> PartTree {
        let mut items = Vec::new();
        for (u, unit) in units.iter().enumerate() {
            for (k, p) in unit.geometry.0.iter().enumerate() {
                if let Some(e) = envelope(p) {
                    items.push(GeomWithData::new(
                        rstar::primitives::Rectangle::from_aabb(e),
                        (u, k),
                    ));
                }
            }
        }
        PartTree {
            tree: RTree::bulk_load(items),
        }
    }

    /// (unit, part) of every part whose box meets the polygon's box, sorted.
    pub fn candidates(&self, p: &Polygon<f64>) -> Vec<(usize, usize)> {
        let Some(e) = envelope(p) else {
            return Vec::new();
        };
        let mut v: Vec<(usize, usize)> = self
            .tree
            .locate_in_envelope_intersecting(&e)
            .map(|g| g.data)
            .collect();
        v.sort_unstable();
        v
    }
}

/// All (source part, target part) pairs whose bounding boxes meet, found
/// with an R*-tree; sorted.
pub fn candidate_pairs(sources: &[Unit], targets: &[Unit]) -> Vec<PartPair> {
    let tree = PartTree::new(targets);
    let mut out = Vec::new();
    for (s, unit) in sources.iter().enumerate() {
        for (k, p) in unit.geometry.0.iter().enumerate() {
            out.extend(tree.candidates(p).into_iter().map(|(t, l)| (s, k, t, l)));
        }
    }
    out
}

/// The same pairs by comparing every part with every part (for tests).
pub fn candidate_pairs_brute_force(sources: &[Unit], targets: &[Unit]) -> Vec<PartPair> {
    let mut out = Vec::new();
    for (s, su) in sources.iter().enumerate() {
        for (k, sp) in su.geometry.0.iter().enumerate() {
            let Some(a) = sp.bounding_rect() else {
                continue;
            };
            for (t, tu) in targets.iter().enumerate() {
                for (l, tp) in tu.geometry.0.iter().enumerate() {
                    let Some(b) = tp.bounding_rect() else {
                        continue;
                    };
                    if a.min().x <= b.max().x
                        && b.min().x <= a.max().x
                        && a.min().y <= b.max().y
                        && b.min().y <= a.max().y
                    {
                        out.push((s, k, t, l));
                    }
                }
            }
        }
    }
    out
}

/// Counts to weight by: points with a count, or polygons whose count is
/// spread over their area.
#[derive(Debug, Clone)]
pub enum PopulationLayer {
    /// Points (longitude, latitude) with a count each.
    Points(Vec<(Coord<f64>, f64)>),
    /// Polygons with a count each, spread evenly by area.
    Polygons(Vec<(MultiPolygon<f64>, f64)>),
}

/// How to weight the pieces of a source.
#[derive(Debug, Clone)]
pub enum Weighting {
    /// By area.
    Area,
    /// By population from a layer; sources with none fall back to area.
    Population(PopulationLayer),
}

/// Overlay options.
#[derive(Debug, Clone)]
pub struct Options {
    /// Pieces whose weight and target share are both below this are
    /// slivers from boundary misalignment: dropped and the source
    /// renormalized. The part of a source outside every target is dropped
    /// under the same rule.
    pub min_share: f64,
    /// Area or population weighting.
    pub weighting: Weighting,
    /// Whether units nest in parents, so pieces that cross a parent's
    /// boundary are generalization slivers.
    pub nesting: Nesting,
    /// Codes that the change history says continued unchanged from the
    /// source vintage to the target vintage: when such a unit collapses in
    /// both layers (too small for the layers' scale) it gets an identity
    /// row with basis `history` instead of no row at all.
    pub unchanged: BTreeSet<String>,
}

impl Options {
    /// Area weighting with the default sliver rule, no nesting, no history.
    pub fn area(min_share: f64) -> Options {
        Options {
            min_share,
            weighting: Weighting::Area,
            nesting: Nesting::None,
            unchanged: BTreeSet::new(),
        }
    }
}

/// Whether units nest in parents named by their codes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Nesting {
    /// No rule: pieces may cross any boundary.
    None,
    /// Units nest in parents named by the first N characters of their codes
    /// (2: counties in states; 5: tracts in counties). A piece whose source
    /// and target parents differ is dropped and the source renormalized,
    /// unless such pieces make up half the source or more (then the layers
    /// do not nest as claimed, the pieces are kept and the source is listed
    /// in [`SourceSummary::not_nested`]).
    CodePrefix(usize),
}

impl Nesting {
    fn parent<'a>(&self, code: &'a str) -> Option<&'a str> {
        match *self {
            Nesting::None => None,
            Nesting::CodePrefix(n) => Some(code.get(..n).unwrap_or(code)),
        }
    }
}

/// A population weight departing from the area weight of the same piece by
/// more than this (in share of the source) is flagged "check" in the
/// report: the population layer may be misplaced, sparse, or the piece
/// holds a town on a small area. Our choice (no standard threshold).
pub const POPULATION_CHECK_MARGIN: f64 = 0.25;

/// A piece whose population weight departs from its area weight by more
/// than [`POPULATION_CHECK_MARGIN`].
#[derive(Debug, Clone, PartialEq)]
pub struct PopulationCheck {
    /// Target code.
    pub to: String,
    /// Share of the source's population in the piece (before slivers).
    pub population_weight: f64,
    /// Share of the source's area in the piece.
    pub area_weight: f64,
}

/// Relative size below which a remainder (the part of a source outside
/// every target, or the overlap of targets) is rounding from the clipper's
/// integer grid, not geometry: about 1e-9 of a source's area is seen on
/// the county layers.
pub const NOISE: f64 = 1e-8;

/// The default `min_share`: 0.1 %.
pub const DEFAULT_MIN_SHARE: f64 = 0.001;

/// What happened to one source.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceSummary {
    /// Source code.
    pub key: String,
    /// Source area, m².
    pub area: f64,
    /// Targets it meets before sliver removal.
    pub pieces: usize,
    /// Share (by the source's basis) dropped as slivers.
    pub dropped_share: f64,
    /// Share outside every target, after renormalization (0 if dropped).
    pub uncovered_share: f64,
    /// Share of the source's area covered by more than one target
    /// (overlapping targets); the pieces were scaled so they sum to the
    /// covered area.
    pub overlap_share: f64,
    /// The basis of its rows.
    pub basis: Basis,
    /// Pieces dropped because they cross a parent boundary (see
    /// [`Nesting`]): target code and share of the source.
    pub cross_parent: Vec<(String, f64)>,
    /// True when pieces outside the source's parent make up half of it or
    /// more: they were kept and the nesting claim does not hold here.
    pub not_nested: bool,
    /// Pieces flagged "check" (population weighting only).
    pub checks: Vec<PopulationCheck>,
}

/// Result of an overlay.
#[derive(Debug, Clone)]
pub struct OverlayResult {
    /// The crosswalk, sorted.
    pub crosswalk: Crosswalk,
    /// One summary per source, sorted by code.
    pub sources: Vec<SourceSummary>,
    /// Targets that no source reaches.
    pub unreached_targets: Vec<String>,
    /// Codes that collapsed in both layers and got an identity row from
    /// the change history (see [`Options::unchanged`]).
    pub history_rows: Vec<String>,
    /// Population weighting with points: points (and their total count)
    /// inside no source polygon. They weight nothing.
    pub points_outside: Option<(usize, f64)>,
}

/// Rows, summary, targets hit and population points inside one source.
type SourceOutcome = (Vec<CrosswalkRow>, SourceSummary, Vec<usize>, Vec<usize>);

/// Pieces of one source before weighting.
struct SourcePieces {
    /// (target index, area, geometry if kept)
    pieces: Vec<(usize, f64, Option<MultiPolygon<f64>>)>,
    uncovered: f64,
    uncovered_geometry: Option<MultiPolygon<f64>>,
    overlap: f64,
}

fn intersect_source(
    source: &Unit,
    targets: &[Unit],
    target_runs: &[Vec<PolygonRuns>],
    tree: &PartTree,
    keep: bool,
) -> SourcePieces {
    let mut by_target: BTreeMap<usize, (f64, Vec<Polygon<f64>>)> = BTreeMap::new();
    let mut cands_all: Vec<Vec<(usize, usize)>> = Vec::with_capacity(source.geometry.0.len());
    let source_runs: Vec<PolygonRuns> = source.geometry.0.iter().map(PolygonRuns::new).collect();
    for (sp, sr) in source.geometry.0.iter().zip(&source_runs) {
        let cands = tree.candidates(sp);
        for &(t, l) in &cands {
            let tr = &target_runs[t][l];
            let Some(r) = clip::meet(&sr.bbox, &tr.bbox) else {
                continue;
            };
            let (Some(a), Some(b)) = (
                clip::cut_to_box(sp, sr, &r),
                clip::cut_to_box(&targets[t].geometry.0[l], tr, &r),
            ) else {
                continue;
            };
            if keep {
                let inter = boolean::intersection(a.as_ref(), b.as_ref());
                let a = WGS84.multi_polygon_area(&inter);
                if a > 0.0 {
                    let e = by_target.entry(t).or_default();
                    e.0 += a;
                    e.1.extend(inter.0);
                }
            } else {
                let a = boolean::intersection_area(a.as_ref(), b.as_ref());
                if a > 0.0 {
                    by_target.entry(t).or_default().0 += a;
                }
            }
        }
        cands_all.push(cands);
    }
    let sum: f64 = by_target.values().map(|v| v.0).sum();
    // Targets that do not overlap make the uncovered part the remainder;
    // when the pieces add up to more than the source, targets overlap and
    // the covered part is measured directly.
    let noise = NOISE * source.area;
    let (uncovered, uncovered_geometry, overlap) = if sum > source.area + noise || keep {
        let mut unc = 0.0;
        let mut geoms = Vec::new();
        for ((sp, sr), cands) in source.geometry.0.iter().zip(&source_runs).zip(&cands_all) {
            // The targets cut down to the source part's box (see `clip`).
            let clip = MultiPolygon::new(
                cands
                    .iter()
                    .filter_map(|&(t, l)| {
                        let tr = &target_runs[t][l];
                        let r = clip::meet(&sr.bbox, &tr.bbox)?;
                        clip::cut_to_box(&targets[t].geometry.0[l], tr, &r).map(|c| c.into_owned())
                    })
                    .collect(),
            );
            let rest = boolean::difference(sp, &clip);
            unc += WGS84.multi_polygon_area(&rest);
            if keep {
                geoms.extend(rest.0);
            }
        }
        let unc = if unc < noise { 0.0 } else { unc };
        let covered = (source.area - unc).max(0.0);
        let overlap = sum - covered;
        let overlap = if overlap < noise { 0.0 } else { overlap };
        (unc, keep.then(|| MultiPolygon::new(geoms)), overlap)
    } else {
        let rest = source.area - sum;
        (if rest < noise { 0.0 } else { rest }, None, 0.0)
    };
    let scale = if overlap > 0.0 && sum > 0.0 {
        (sum - overlap) / sum
    } else {
        1.0
    };
    SourcePieces {
        pieces: by_target
            .into_iter()
            .map(|(t, (a, g))| (t, a * scale, keep.then(|| MultiPolygon::new(g))))
            .collect(),
        uncovered,
        uncovered_geometry,
        overlap,
    }
}

/// Population of a population layer inside polygons: points anywhere in
/// them, or polygon counts spread by area of overlap.
struct PopulationIndex<'a> {
    layer: &'a PopulationLayer,
    points: RTree<GeomWithData<[f64; 2], usize>>,
    polys: RTree<GeomWithData<rstar::primitives::Rectangle<[f64; 2]>, usize>>,
    poly_areas: Vec<f64>,
}

impl<'a> PopulationIndex<'a> {
    fn new(layer: &'a PopulationLayer) -> Self {
        match layer {
            PopulationLayer::Points(pts) => PopulationIndex {
                layer,
                points: RTree::bulk_load(
                    pts.iter()
                        .enumerate()
                        .map(|(i, (c, _))| GeomWithData::new([c.x, c.y], i))
                        .collect(),
                ),
                polys: RTree::new(),
                poly_areas: Vec::new(),
            },
            PopulationLayer::Polygons(ps) => {
                let mut items = Vec::new();
                for (i, (mp, _)) in ps.iter().enumerate() {
                    if let Some(r) = mp.bounding_rect() {
                        items.push(GeomWithData::new(
                            rstar::primitives::Rectangle::from_corners(
                                [r.min().x, r.min().y],
                                [r.max().x, r.max().y],
                            ),
                            i,
                        ));
                    }
                }
                PopulationIndex {
                    layer,
                    points: RTree::new(),
                    polys: RTree::bulk_load(items),
                    poly_areas: ps
                        .iter()
                        .map(|(mp, _)| WGS84.multi_polygon_area(mp))
                        .collect(),
                }
            }
        }
    }

    /// Point indices inside (or on) `mp`.
    fn points_in(&self, mp: &MultiPolygon<f64>) -> Vec<usize> {
        let PopulationLayer::Points(pts) = self.layer else {
            return Vec::new();
        };
        let Some(r) = mp.bounding_rect() else {
            return Vec::new();
        };
        let e = AABB::from_corners([r.min().x, r.min().y], [r.max().x, r.max().y]);
        let mut v: Vec<usize> = self
            .points
            .locate_in_envelope(&e)
            .map(|g| g.data)
            .filter(|&i| mp.intersects(&Point(pts[i].0)))
            .collect();
        v.sort_unstable();
        v
    }

    /// Count spread from the polygon layer into `mp`.
    fn spread_in(&self, mp: &MultiPolygon<f64>) -> f64 {
        let PopulationLayer::Polygons(ps) = self.layer else {
            return 0.0;
        };
        let Some(r) = mp.bounding_rect() else {
            return 0.0;
        };
        let e = AABB::from_corners([r.min().x, r.min().y], [r.max().x, r.max().y]);
        let mut idx: Vec<usize> = self
            .polys
            .locate_in_envelope_intersecting(&e)
            .map(|g| g.data)
            .collect();
        idx.sort_unstable();
        let mut total = 0.0;
        for i in idx {
            if self.poly_areas[i] <= 0.0 {
                continue;
            }
            let a = WGS84.multi_polygon_area(&boolean::intersection_multi(mp, &ps[i].0));
            total += ps[i].1 * a / self.poly_areas[i];
        }
        total
    }
}

/// Population of each piece and of the uncovered part of one source. A
/// point on a shared boundary goes to the first piece (by target code) that
/// holds it.
fn population_of_pieces(
    index: &PopulationIndex<'_>,
    source: &Unit,
    pieces: &SourcePieces,
) -> (Vec<f64>, f64, Vec<usize>) {
    match index.layer {
        PopulationLayer::Points(pts) => {
            let mut per = vec![0.0; pieces.pieces.len()];
            let mut unc = 0.0;
            let inside = index.points_in(&source.geometry);
            for &i in &inside {
                let p = Point(pts[i].0);
                let hit = pieces
                    .pieces
                    .iter()
                    .position(|(_, _, g)| g.as_ref().is_some_and(|g| g.intersects(&p)));
                match hit {
                    Some(k) => per[k] += pts[i].1,
                    None => unc += pts[i].1,
                }
            }
            (per, unc, inside)
        }
        PopulationLayer::Polygons(_) => {
            let per = pieces
                .pieces
                .iter()
                .map(|(_, _, g)| g.as_ref().map_or(0.0, |g| index.spread_in(g)))
                .collect();
            let unc = pieces
                .uncovered_geometry
                .as_ref()
                .map_or(0.0, |g| index.spread_in(g));
            (per, unc, Vec::new())
        }
    }
}

/// Builds the crosswalk from `sources` to `targets`. `tick` is called once
/// per source done with the number of rows it made (for a progress bar). Rows: one per (source, target)
/// piece kept, plus a row with no target for the part of a source outside
/// every target. Collapsed sources (zero area) get no rows; they are in the
/// summaries with zero area.
pub fn overlay(
    sources: &[Unit],
    targets: &[Unit],
    options: &Options,
    tick: &(dyn Fn(usize) + Sync),
) -> OverlayResult {
    let tree = PartTree::new(targets);
    let target_runs: Vec<Vec<PolygonRuns>> = targets
        .par_iter()
        .map(|u| u.geometry.0.iter().map(PolygonRuns::new).collect())
        .collect();
    let keep = matches!(options.weighting, Weighting::Population(_));
    let pop_index = match &options.weighting {
        Weighting::Population(layer) => Some(PopulationIndex::new(layer)),
        Weighting::Area => None,
    };
    let target_pop: Option<Vec<f64>> = pop_index.as_ref().map(|ix| {
        targets
            .par_iter()
            .map(|t| match ix.layer {
                PopulationLayer::Points(pts) => {
                    ix.points_in(&t.geometry).iter().map(|&i| pts[i].1).sum()
                }
                PopulationLayer::Polygons(_) => ix.spread_in(&t.geometry),
            })
            .collect()
    });
    let per_source: Vec<SourceOutcome> = sources
        .par_iter()
        .map(|s| {
            let r = source_rows(
                s,
                targets,
                &target_runs,
                &tree,
                keep,
                pop_index.as_ref(),
                target_pop.as_deref(),
                options,
            );
            tick(r.0.len());
            r
        })
        .collect();
    let mut reached = vec![false; targets.len()];
    let mut rows = Vec::new();
    let mut summaries = Vec::with_capacity(per_source.len());
    let mut in_some_source = match &options.weighting {
        Weighting::Population(PopulationLayer::Points(pts)) => vec![false; pts.len()],
        _ => Vec::new(),
    };
    for (r, s, hit, points) in per_source {
        for t in hit {
            reached[t] = true;
        }
        for i in points {
            in_some_source[i] = true;
        }
        rows.extend(r);
        summaries.push(s);
    }
    let points_outside = match &options.weighting {
        Weighting::Population(PopulationLayer::Points(pts)) => {
            let outside = pts
                .iter()
                .zip(&in_some_source)
                .filter(|(_, &inside)| !inside);
            let (n, total) = outside.fold((0, 0.0), |(n, t), (p, _)| (n + 1, t + p.1));
            Some((n, total))
        }
        _ => None,
    };
    // Units too small for both layers that the history says continued.
    let mut history_rows = Vec::new();
    for s in sources.iter().filter(|s| s.area <= 0.0) {
        if !options.unchanged.contains(&s.key) {
            continue;
        }
        let Ok(t) = targets.binary_search_by(|t| t.key.as_str().cmp(&s.key)) else {
            continue;
        };
        if targets[t].area > 0.0 {
            continue;
        }
        reached[t] = true;
        history_rows.push(s.key.clone());
        rows.push(CrosswalkRow {
            from_code: s.key.clone(),
            to_code: Some(s.key.clone()),
            weight: 1.0,
            target_share: Some(1.0),
            basis: Basis::History,
        });
    }
    let unreached_targets = targets
        .iter()
        .zip(&reached)
        .filter(|(_, &r)| !r)
        .map(|(t, _)| t.key.clone())
        .collect();
    let mut crosswalk = Crosswalk { rows };
    crosswalk.sort();
    OverlayResult {
        crosswalk,
        sources: summaries,
        unreached_targets,
        history_rows,
        points_outside,
    }
}

#[allow(clippy::too_many_arguments)]
fn source_rows(
    s: &Unit,
    targets: &[Unit],
    target_runs: &[Vec<PolygonRuns>],
    tree: &PartTree,
    keep: bool,
    pop_index: Option<&PopulationIndex<'_>>,
    target_pop: Option<&[f64]>,
    options: &Options,
) -> SourceOutcome {
    let mut summary = SourceSummary {
        key: s.key.clone(),
        area: s.area,
        pieces: 0,
        dropped_share: 0.0,
        uncovered_share: 0.0,
        overlap_share: 0.0,
        basis: Basis::Area,
        cross_parent: Vec::new(),
        not_nested: false,
        checks: Vec::new(),
    };
    if s.area <= 0.0 {
        return (Vec::new(), summary, Vec::new(), Vec::new());
    }
    let pieces = intersect_source(s, targets, target_runs, tree, keep);
    summary.pieces = pieces.pieces.len();
    summary.overlap_share = pieces.overlap / s.area;
    // (target or None, amount, target share)
    let mut entries: Vec<(Option<usize>, f64, Option<f64>)> = Vec::new();
    let mut basis = Basis::Area;
    let mut points = Vec::new();
    if let (Some(ix), Some(tp)) = (pop_index, target_pop) {
        let (per, unc, inside) = population_of_pieces(ix, s, &pieces);
        points = inside;
        let total: f64 = per.iter().sum::<f64>() + unc;
        if total > 0.0 {
            basis = Basis::Population;
            for ((t, a, _), p) in pieces.pieces.iter().zip(&per) {
                let share = (tp[*t] > 0.0).then(|| p / tp[*t]);
                entries.push((Some(*t), p / total, share));
                let area_weight = a / s.area;
                if (p / total - area_weight).abs() > POPULATION_CHECK_MARGIN {
                    summary.checks.push(PopulationCheck {
                        to: targets[*t].key.clone(),
                        population_weight: p / total,
                        area_weight,
                    });
                }
            }
            entries.push((None, unc / total, None));
        } else {
            basis = Basis::AreaFallback;
        }
    }
    if entries.is_empty() {
        for (t, a, _) in &pieces.pieces {
            let ta = targets[*t].area;
            entries.push((Some(*t), a / s.area, (ta > 0.0).then(|| a / ta)));
        }
        entries.push((None, pieces.uncovered / s.area, None));
    }
    summary.basis = basis;
    let hit: Vec<usize> = entries.iter().filter_map(|e| e.0).collect();
    // Drop pieces across a parent boundary (see `Nesting`).
    if let Some(parent) = options.nesting.parent(&s.key) {
        let crossing = |t: &Option<usize>| {
            t.is_some_and(|t| options.nesting.parent(&targets[t].key) != Some(parent))
        };
        let cross: f64 = entries.iter().filter(|e| crossing(&e.0)).map(|e| e.1).sum();
        if cross >= 0.5 {
            summary.not_nested = true;
        } else if cross > 0.0 {
            summary.cross_parent = entries
                .iter()
                .filter(|e| crossing(&e.0))
                .map(|e| (targets[e.0.unwrap_or_default()].key.clone(), e.1))
                .collect();
            entries.retain(|e| !crossing(&e.0));
        }
    }
    // Drop slivers: small for the source and, when known, for the target.
    let mut dropped = 0.0;
    entries.retain(|(_, w, ts)| {
        let sliver = *w < options.min_share && ts.is_none_or(|v| v < options.min_share);
        if sliver {
            dropped += *w;
        }
        !sliver && *w > 0.0
    });
    let kept: f64 = entries.iter().map(|e| e.1).sum();
    summary.dropped_share = dropped;
    let mut rows = Vec::with_capacity(entries.len());
    for (t, w, ts) in entries {
        let w = if kept > 0.0 { w / kept } else { w };
        if t.is_none() {
            summary.uncovered_share = w;
        }
        rows.push(CrosswalkRow {
            from_code: s.key.clone(),
            to_code: t.map(|t| targets[t].key.clone()),
            weight: w,
            target_share: ts,
            basis,
        });
    }
    (rows, summary, hit, points)
}

/// Planar area of a multipolygon in square degrees (for tests and checks
/// of degenerate geometry; not a measure of land).
pub fn planar_area(mp: &MultiPolygon<f64>) -> f64 {
    mp.unsigned_area()
}

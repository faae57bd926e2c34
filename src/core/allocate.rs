//! Allocation: carrying values of source units onto target units through a
//! crosswalk, with the coverage of each estimate.
//!
//! Three kinds of variables, chosen once per output ([`Measure`]):
//!
//! - **Counts** (extensive: people, dollars, cases): the target gets
//!   `sum over sources s of v(s) * weight(s, t)`, over sources whose value is
//!   known. With full coverage and weights of each source summing to one,
//!   the total over targets equals the total over sources.
//! - **Ratios** of two counts (a rate such as unemployed / labour force):
//!   numerator and denominator are each allocated as counts, over sources
//!   where both are known, and divided at the target. Rates are never
//!   averaged.
//! - **Means** of an intensive variable (a rate with no counts at hand, a
//!   density): a weighted mean over the sources of a target, weighted either
//!   by a weight column allocated as a count (`v(s) * W(s) * weight(s, t)`
//!   over `W(s) * weight(s, t)`), or by `target_share(s, t)`, the fraction of
//!   the target made of that piece of the source.
//!
//! **Coverage** of an estimate is the part of the target made of sources
//! whose value is known: `sum of c(s, t) over known sources` divided by
//! `sum of c(s, t) over the target's sources`, where `c(s, t)` is the
//! crosswalk's `target_share` when it has one, else its `weight`. A source
//! absent from the data for a period, or with an empty value, is not known;
//! missing is never read as zero: a target with no known source gets no value
//! and coverage 0. When a plan mixes sources of two vintages (codes valid in
//! the target vintage, and codes carried from earlier ones; see [`Origin`]),
//! the denominator counts only the origins that have a known source in that
//! period, so a table whose periods use different vintages is measured
//! against the vintage it actually uses.
//!
//! Allocated figures are estimates: they assume a value is spread evenly (by
//! area or by population) within each source unit. Where figures feed legal
//! or funding decisions, official relationship files and local practice
//! take precedence.

use std::collections::BTreeSet;

use rayon::prelude::*;

use crate::core::crosswalk::Crosswalk;

/// Where a source's link into a target comes from, for coverage.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Origin {
    /// The source code belongs to the crosswalk's own source vintage (or,
    /// when carrying to a vintage, is valid in it as it is).
    Direct,
    /// The source code was carried from an earlier vintage (renamed,
    /// absorbed, split, reorganized).
    Carried,
}

/// One link from a source into a target.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Link {
    /// Index into [`Plan::sources`].
    pub source: u32,
    /// Share of the source in the target.
    pub weight: f64,
    /// Share of the target made of this piece, if the crosswalk has it.
    pub target_share: Option<f64>,
    /// Origin of the link (see [`Origin`]).
    pub origin: Origin,
}

impl Link {
    /// The link's part in coverage: `target_share`, else `weight`.
    pub fn coverage_part(&self) -> f64 {
        self.target_share.unwrap_or(self.weight)
    }
}

/// A crosswalk arranged for allocation: sources and targets sorted and
/// numbered, links grouped by target. Rows with no target (the uncovered
/// share of a source) take no part: that share is simply not allocated.
#[derive(Debug, Clone, Default)]
pub struct Plan {
    /// Source codes, sorted, distinct.
    pub sources: Vec<String>,
    /// Target codes, sorted, distinct.
    pub targets: Vec<String>,
    offsets: Vec<usize>,
    links: Vec<Link>,
}

impl Plan {
    /// Arranges `crosswalk`. `extra_targets` are added to the targets even
    /// if no row reaches them (so a unit of the target vintage with no data
    /// is written with coverage 0 rather than left out); `origin` tells
    /// which source codes were carried from an earlier vintage.
    pub fn new(
        crosswalk: &Crosswalk,
        extra_targets: &[String],
        origin: impl Fn(&str) -> Origin,
    ) -> Plan {
        let sources: Vec<String> = crosswalk
            .rows
            .iter()
            .map(|r| r.from_code.clone())
            .collect::<BTreeSet<_>>()
            .into_iter()
            .collect();
        let targets: Vec<String> = crosswalk
            .rows
            .iter()
            .filter_map(|r| r.to_code.clone())
            .chain(extra_targets.iter().cloned())
            .collect::<BTreeSet<_>>()
            .into_iter()
            .collect();
        let mut pairs: Vec<(usize, Link)> = crosswalk
            .rows
            .iter()
            .filter_map(|r| {
                let to = r.to_code.as_ref()?;
                let t = targets.binary_search(to).ok()?;
                let s = sources.binary_search(&r.from_code).ok()?;
                Some((
                    t,
                    Link {
                        source: s as u32,
                        weight: r.weight,
                        target_share: r.target_share,
                        origin: origin(&r.from_code),
                    },
                ))
            })
            .collect();
        pairs.sort_by_key(|(t, l)| (*t, l.source));
        let mut offsets = vec![0usize; targets.len() + 1];
        for (t, _) in &pairs {
            offsets[t + 1] += 1;
        }
        for i in 0..targets.len() {
            offsets[i + 1] += offsets[i];
        }
        Plan {
            sources,
            targets,
            offsets,
            links: pairs.into_iter().map(|(_, l)| l).collect(),
        }
    }

    /// The index of a source code.
    pub fn source_index(&self, code: &str) -> Option<usize> {
        self.sources.binary_search_by(|s| s.as_str().cmp(code)).ok()
    }

    /// The links into target `t` (an index into [`Plan::targets`]), by source.
    pub fn links_of(&self, t: usize) -> &[Link] {
        &self.links[self.offsets[t]..self.offsets[t + 1]]
    }

    /// True when no link has a `target_share`.
    pub fn lacks_target_shares(&self) -> bool {
        self.links.iter().all(|l| l.target_share.is_none())
    }
}

/// Values of the sources, by period and input column. A value is either a
/// finite number or missing (absent from the data, or empty). Held source
/// by source, so the periods of one source lie together (allocation reads
/// them in that order).
#[derive(Debug, Clone)]
pub struct SourceValues {
    periods: usize,
    sources: usize,
    columns: usize,
    // NaN marks a missing value; inputs are finite (checked where read).
    values: Vec<f64>,
}

impl SourceValues {
    /// All missing.
    pub fn new(periods: usize, sources: usize, columns: usize) -> SourceValues {
        SourceValues {
            periods,
            sources,
            columns,
            values: vec![f64::NAN; periods * sources * columns],
        }
    }

    /// From values laid out column by column and, within a column, period
    /// by period (index `period · sources + source`, NaN for missing), as
    /// rows of a table usually come; rearranged source by source in
    /// cache-sized blocks, blocks of sources in parallel.
    pub fn from_period_major(
        periods: usize,
        sources: usize,
        by_column: &[Vec<f64>],
    ) -> SourceValues {
        let columns = by_column.len();
        // Zeroed memory is mapped lazily, so its pages are first touched by
        // the workers that fill them; every value is written below.
        let mut values = vec![0.0; periods * sources * columns];
        const BLOCK: usize = 64;
        let per_source = periods * columns;
        if per_source > 0 {
            values
                .par_chunks_mut(per_source * BLOCK)
                .enumerate()
                .for_each(|(b, out)| {
                    let s0 = b * BLOCK;
                    let n = out.len() / per_source;
                    for p0 in (0..periods).step_by(BLOCK) {
                        for ds in 0..n {
                            let s = s0 + ds;
                            for (c, column) in by_column.iter().enumerate() {
                                for p in p0..(p0 + BLOCK).min(periods) {
                                    out[(ds * periods + p) * columns + c] = column[p * sources + s];
                                }
                            }
                        }
                    }
                });
        }
        SourceValues {
            periods,
            sources,
            columns,
            values,
        }
    }

    /// Number of periods.
    pub fn periods(&self) -> usize {
        self.periods
    }

    /// Number of sources.
    pub fn sources(&self) -> usize {
        self.sources
    }

    fn at(&self, period: usize, source: usize, column: usize) -> usize {
        (source * self.periods + period) * self.columns + column
    }

    /// Adds `value` to the cell (a missing cell becomes `value`); adding is
    /// how duplicate rows of a (source, period) are combined. Non-finite
    /// values are ignored (callers reject them before).
    pub fn add(&mut self, period: usize, source: usize, column: usize, value: f64) {
        if !value.is_finite() {
            return;
        }
        let i = self.at(period, source, column);
        let cell = &mut self.values[i];
        *cell = if cell.is_nan() { value } else { *cell + value };
    }

    /// The value, if known.
    pub fn get(&self, period: usize, source: usize, column: usize) -> Option<f64> {
        let v = self.values[self.at(period, source, column)];
        (!v.is_nan()).then_some(v)
    }
}

/// How a mean is weighted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MeanWeight {
    /// By an input column (index), allocated as a count.
    Column(usize),
    /// By `target_share(s, t)`: each piece counts by the part of the target
    /// it makes up.
    TargetShare,
}

/// What one output variable is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Measure {
    /// An extensive count in input column `0`.
    Count(usize),
    /// A ratio of two counts (input columns).
    Ratio {
        /// Numerator column.
        numerator: usize,
        /// Denominator column.
        denominator: usize,
    },
    /// A weighted mean of an intensive variable.
    Mean {
        /// The variable's column.
        column: usize,
        /// Its weighting.
        weight: MeanWeight,
    },
}

/// What to compute.
#[derive(Debug, Clone, Default)]
pub struct Spec {
    /// Output variables, in output order.
    pub measures: Vec<Measure>,
    /// Estimates whose coverage is below this get no value (0 keeps all).
    pub min_coverage: f64,
}

/// One estimate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    /// The value, or `None` when no source is known, the coverage is below
    /// the minimum, or a denominator is zero.
    pub value: Option<f64>,
    /// Coverage, 0..=1.
    pub coverage: f64,
}

/// The result: an estimate per (target, period, measure), for a range of
/// targets.
#[derive(Debug, Clone)]
pub struct Allocation {
    /// The first target covered (targets are indices into [`Plan::targets`]).
    pub first_target: usize,
    /// Number of targets covered.
    pub targets: usize,
    /// Number of periods.
    pub periods: usize,
    /// Number of measures.
    pub measures: usize,
    estimates: Vec<Estimate>,
    /// (target, period) pairs where sources of both origins were known and
    /// their target shares add up to more than the whole target: the same
    /// territory appears twice in the data (old and new codes in one
    /// period), and their values were added together.
    pub overlaps: Vec<(usize, usize)>,
}

impl Allocation {
    /// The estimate for a target, period and measure (indices).
    pub fn get(&self, target: usize, period: usize, measure: usize) -> Estimate {
        self.estimates
            [((target - self.first_target) * self.periods + period) * self.measures + measure]
    }

    /// The estimates of one target and period, one per measure.
    pub fn row(&self, target: usize, period: usize) -> &[Estimate] {
        let i = ((target - self.first_target) * self.periods + period) * self.measures;
        &self.estimates[i..i + self.measures]
    }
}

/// Running sums for one (target, period, measure).
#[derive(Default, Clone, Copy)]
struct Sums {
    numerator: f64,
    denominator: f64,
    known_part: [f64; 2],
    total_part: [f64; 2],
    active: [bool; 2],
    known_share: f64,
}

fn slot(o: Origin) -> usize {
    match o {
        Origin::Direct => 0,
        Origin::Carried => 1,
    }
}

/// Slack for comparing target shares that should add up to at most one.
const SHARE_SLACK: f64 = 1e-6;

/// Allocates `values` through `plan` as `spec` asks. Deterministic: each
/// target is summed in source order, whatever the number of threads.
pub fn allocate(plan: &Plan, values: &SourceValues, spec: &Spec) -> Allocation {
    allocate_range(plan, values, spec, 0..plan.targets.len())
}

/// [`allocate`] for a range of targets only (so a large result can be
/// computed and written a piece at a time).
pub fn allocate_range(
    plan: &Plan,
    values: &SourceValues,
    spec: &Spec,
    targets: std::ops::Range<usize>,
) -> Allocation {
    let periods = values.periods();
    let m = spec.measures.len();
    let first_target = targets.start;
    let count = targets.len();
    let width = periods * m;
    let mut estimates = vec![
        Estimate {
            value: None,
            coverage: 0.0,
        };
        count * width
    ];
    // Each target fills its own slice of the result; the sums are scratch
    // space reused from target to target (one buffer per worker).
    let per_target: Vec<Vec<usize>> = if width == 0 {
        vec![Vec::new(); count]
    } else {
        estimates
            .par_chunks_mut(width)
            .enumerate()
            .map_init(Vec::new, |sums: &mut Vec<Sums>, (i, out)| {
                let links = plan.links_of(first_target + i);
                // Sums for every (period, measure), filled link by link so
                // each source's periods are read in order.
                sums.clear();
                sums.resize(width, Sums::default());
                for l in links {
                    for p in 0..periods {
                        for (k, measure) in spec.measures.iter().enumerate() {
                            add_link(&mut sums[p * m + k], l, values, p, *measure);
                        }
                    }
                }
                let mut overlaps = Vec::new();
                for p in 0..periods {
                    let mut overlap = false;
                    for (k, measure) in spec.measures.iter().enumerate() {
                        let s = &sums[p * m + k];
                        if s.active[0] && s.active[1] && s.known_share > 1.0 + SHARE_SLACK {
                            overlap = true;
                        }
                        out[p * m + k] = finish(s, *measure, spec.min_coverage);
                    }
                    if overlap {
                        overlaps.push(p);
                    }
                }
                overlaps
            })
            .collect()
    };
    let mut overlaps = Vec::new();
    for (i, o) in per_target.into_iter().enumerate() {
        overlaps.extend(o.into_iter().map(|p| (first_target + i, p)));
    }
    Allocation {
        first_target,
        targets: count,
        periods,
        measures: m,
        estimates,
        overlaps,
    }
}

fn add_link(s: &mut Sums, l: &Link, values: &SourceValues, p: usize, measure: Measure) {
    let o = slot(l.origin);
    let part = l.coverage_part();
    s.total_part[o] += part;
    let src = l.source as usize;
    // (numerator, denominator) contributed by this link, if known.
    let contribution = match measure {
        Measure::Count(c) => values.get(p, src, c).map(|v| (v * l.weight, 0.0)),
        Measure::Ratio {
            numerator,
            denominator,
        } => {
            match (
                values.get(p, src, numerator),
                values.get(p, src, denominator),
            ) {
                (Some(n), Some(d)) => Some((n * l.weight, d * l.weight)),
                _ => None,
            }
        }
        Measure::Mean {
            column,
            weight: MeanWeight::Column(w),
        } => match (values.get(p, src, column), values.get(p, src, w)) {
            (Some(v), Some(wv)) => Some((v * wv * l.weight, wv * l.weight)),
            _ => None,
        },
        // A piece with no target share cannot be weighted by it: it
        // counts as not known for this measure.
        Measure::Mean {
            column,
            weight: MeanWeight::TargetShare,
        } => match (values.get(p, src, column), l.target_share) {
            (Some(v), Some(ts)) => Some((v * ts, ts)),
            _ => None,
        },
    };
    if let Some((n, d)) = contribution {
        s.numerator += n;
        s.denominator += d;
        s.known_part[o] += part;
        s.active[o] = true;
        s.known_share += l.target_share.unwrap_or(0.0);
    }
}

fn finish(s: &Sums, measure: Measure, min_coverage: f64) -> Estimate {
    if !s.active[0] && !s.active[1] {
        return Estimate {
            value: None,
            coverage: 0.0,
        };
    }
    let mut whole = 0.0;
    let mut known = 0.0;
    for o in 0..2 {
        if s.active[o] {
            whole += s.total_part[o];
            known += s.known_part[o];
        }
    }
    let coverage = if whole > 0.0 {
        (known / whole).min(1.0)
    } else {
        0.0
    };
    let value = match measure {
        Measure::Count(_) => Some(s.numerator),
        _ => (s.denominator != 0.0).then(|| s.numerator / s.denominator),
    };
    let value = if coverage < min_coverage { None } else { value };
    Estimate { value, coverage }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::crosswalk::{Basis, CrosswalkRow};
    use proptest::prelude::*;

    fn row(from: &str, to: Option<&str>, weight: f64, target_share: Option<f64>) -> CrosswalkRow {
        CrosswalkRow {
            from_code: from.into(),
            to_code: to.map(String::from),
            weight,
            target_share,
            basis: Basis::Area,
        }
    }

    fn direct(_: &str) -> Origin {
        Origin::Direct
    }

    /// Sources A, B, C; targets X and Y (hand-made, no source):
    /// - A: 60% of A lies in X, making up 75% of X; 40% in Y, 20% of Y.
    /// - B: wholly in Y, making up 80% of Y.
    /// - C: wholly in X, making up 25% of X.
    fn worked_plan() -> Plan {
        let cw = Crosswalk {
            rows: vec![
                row("A", Some("X"), 0.6, Some(0.75)),
                row("A", Some("Y"), 0.4, Some(0.2)),
                row("B", Some("Y"), 1.0, Some(0.8)),
                row("C", Some("X"), 1.0, Some(0.25)),
            ],
        };
        Plan::new(&cw, &[], direct)
    }

    fn values(rows: &[(&str, &[Option<f64>])], plan: &Plan) -> SourceValues {
        let columns = rows.first().map_or(1, |r| r.1.len());
        let mut v = SourceValues::new(1, plan.sources.len(), columns);
        for (code, vals) in rows {
            let s = plan.source_index(code).unwrap();
            for (c, x) in vals.iter().enumerate() {
                if let Some(x) = x {
                    v.add(0, s, c, *x);
                }
            }
        }
        v
    }

    fn target(plan: &Plan, code: &str) -> usize {
        plan.targets.iter().position(|t| t == code).unwrap()
    }

    #[test]
    fn counts_follow_the_weights_and_coverage_is_one_when_all_is_known() {
        let plan = worked_plan();
        // A = 100, B = 50, C = 10.
        let v = values(
            &[
                ("A", &[Some(100.0)]),
                ("B", &[Some(50.0)]),
                ("C", &[Some(10.0)]),
            ],
            &plan,
        );
        let a = allocate(
            &plan,
            &v,
            &Spec {
                measures: vec![Measure::Count(0)],
                min_coverage: 0.0,
            },
        );
        // X = 100 * 0.6 + 10 * 1.0 = 70; Y = 100 * 0.4 + 50 * 1.0 = 90.
        let x = a.get(target(&plan, "X"), 0, 0);
        let y = a.get(target(&plan, "Y"), 0, 0);
        assert!((x.value.unwrap() - 70.0).abs() < 1e-12);
        assert!((y.value.unwrap() - 90.0).abs() < 1e-12);
        // Total 160 = 100 + 50 + 10.
        assert_eq!(x.coverage, 1.0);
        assert_eq!(y.coverage, 1.0);
    }

    #[test]
    fn a_missing_source_lowers_coverage_by_its_target_share_and_is_not_read_as_zero() {
        let plan = worked_plan();
        // C is absent; B's value is empty.
        let v = values(&[("A", &[Some(100.0)]), ("B", &[None])], &plan);
        let spec = Spec {
            measures: vec![Measure::Count(0)],
            min_coverage: 0.0,
        };
        let a = allocate(&plan, &v, &spec);
        // X: known A piece 0.75 of X, unknown C piece 0.25 -> coverage 0.75 / (0.75 + 0.25) = 0.75;
        //    value from A only: 100 * 0.6 = 60.
        let x = a.get(target(&plan, "X"), 0, 0);
        assert!((x.coverage - 0.75).abs() < 1e-12);
        assert!((x.value.unwrap() - 60.0).abs() < 1e-12);
        // Y: known A piece 0.2, unknown B piece 0.8 -> coverage 0.2; value 100 * 0.4 = 40.
        let y = a.get(target(&plan, "Y"), 0, 0);
        assert!((y.coverage - 0.2).abs() < 1e-12);
        assert!((y.value.unwrap() - 40.0).abs() < 1e-12);
        // With --min-coverage 0.5: X (0.75) keeps its value, Y (0.2) loses it.
        let a = allocate(
            &plan,
            &v,
            &Spec {
                min_coverage: 0.5,
                ..spec
            },
        );
        assert_eq!(a.get(target(&plan, "X"), 0, 0).value, Some(60.0));
        let y = a.get(target(&plan, "Y"), 0, 0);
        assert_eq!(y.value, None);
        assert!(
            (y.coverage - 0.2).abs() < 1e-12,
            "coverage is still reported"
        );
    }

    #[test]
    fn a_target_with_no_known_source_has_no_value_and_coverage_zero() {
        let plan = worked_plan();
        let v = values(&[("B", &[Some(50.0)])], &plan);
        let a = allocate(
            &plan,
            &v,
            &Spec {
                measures: vec![Measure::Count(0)],
                min_coverage: 0.0,
            },
        );
        // X is made of A and C, both absent.
        assert_eq!(
            a.get(target(&plan, "X"), 0, 0),
            Estimate {
                value: None,
                coverage: 0.0
            }
        );
    }

    #[test]
    fn without_target_shares_coverage_is_the_known_part_of_the_incoming_weight() {
        let cw = Crosswalk {
            rows: vec![
                row("A", Some("X"), 0.5, None),
                row("B", Some("X"), 1.0, None),
                row("A", Some("Y"), 0.5, None),
            ],
        };
        let plan = Plan::new(&cw, &[], direct);
        let v = values(&[("A", &[Some(8.0)])], &plan);
        let a = allocate(
            &plan,
            &v,
            &Spec {
                measures: vec![Measure::Count(0)],
                min_coverage: 0.0,
            },
        );
        // X receives weight 0.5 from A (known) and 1.0 from B (absent): 0.5 / 1.5 = 1/3.
        let x = a.get(target(&plan, "X"), 0, 0);
        assert!((x.coverage - 1.0 / 3.0).abs() < 1e-12);
        assert_eq!(x.value, Some(4.0));
    }

    #[test]
    fn a_rate_is_rebuilt_from_numerator_and_denominator_not_averaged() {
        // Two sources merging wholly into one target Z:
        //   P: 10 unemployed of a labour force of 100 (rate 10%), Z share 0.5 by area.
        //   Q: 90 unemployed of 300 (rate 30%), Z share 0.5 by area.
        // Rebuilt rate: (10 + 90) / (100 + 300) = 100 / 400 = 0.25.
        // A naive mean of the rates would say (0.10 + 0.30) / 2 = 0.20.
        let cw = Crosswalk {
            rows: vec![
                row("P", Some("Z"), 1.0, Some(0.5)),
                row("Q", Some("Z"), 1.0, Some(0.5)),
            ],
        };
        let plan = Plan::new(&cw, &[], direct);
        let v = values(
            &[
                ("P", &[Some(10.0), Some(100.0), Some(0.10)]),
                ("Q", &[Some(90.0), Some(300.0), Some(0.30)]),
            ],
            &plan,
        );
        let spec = Spec {
            measures: vec![
                Measure::Ratio {
                    numerator: 0,
                    denominator: 1,
                },
                Measure::Mean {
                    column: 2,
                    weight: MeanWeight::TargetShare,
                },
                Measure::Mean {
                    column: 2,
                    weight: MeanWeight::Column(1),
                },
            ],
            min_coverage: 0.0,
        };
        let a = allocate(&plan, &v, &spec);
        let row = a.row(0, 0);
        assert!((row[0].value.unwrap() - 0.25).abs() < 1e-12);
        assert!(
            (row[1].value.unwrap() - 0.20).abs() < 1e-12,
            "area-weighted mean of rates"
        );
        // Weighting the rate by the labour force gives back the rebuilt rate:
        // (0.10 * 100 + 0.30 * 300) / 400 = 100 / 400 = 0.25.
        assert!((row[2].value.unwrap() - 0.25).abs() < 1e-12);
    }

    #[test]
    fn a_ratio_uses_only_sources_where_both_parts_are_known() {
        let cw = Crosswalk {
            rows: vec![
                row("P", Some("Z"), 1.0, Some(0.5)),
                row("Q", Some("Z"), 1.0, Some(0.5)),
            ],
        };
        let plan = Plan::new(&cw, &[], direct);
        // Q's denominator is missing: the rate is P's alone, 10 / 100, coverage 0.5.
        let v = values(
            &[
                ("P", &[Some(10.0), Some(100.0)]),
                ("Q", &[Some(90.0), None]),
            ],
            &plan,
        );
        let a = allocate(
            &plan,
            &v,
            &Spec {
                measures: vec![Measure::Ratio {
                    numerator: 0,
                    denominator: 1,
                }],
                min_coverage: 0.0,
            },
        );
        assert_eq!(
            a.get(0, 0, 0),
            Estimate {
                value: Some(0.1),
                coverage: 0.5
            }
        );
    }

    #[test]
    fn mixed_vintages_are_measured_against_the_vintage_present_in_each_period() {
        // Target R (a new unit) is made of halves of old units O1 and O2 (target
        // shares 0.5 each), and also appears under its own code R (share 1).
        let cw = Crosswalk {
            rows: vec![
                row("O1", Some("R"), 0.4, Some(0.5)),
                row("O2", Some("R"), 0.7, Some(0.5)),
                row("R", Some("R"), 1.0, Some(1.0)),
            ],
        };
        let plan = Plan::new(&cw, &[], |c| {
            if c.starts_with('O') {
                Origin::Carried
            } else {
                Origin::Direct
            }
        });
        let mut v = SourceValues::new(3, plan.sources.len(), 1);
        let (o1, o2, r) = (
            plan.source_index("O1").unwrap(),
            plan.source_index("O2").unwrap(),
            plan.source_index("R").unwrap(),
        );
        // Period 0: old codes only, O2 missing. Period 1: new code only.
        // Period 2: both (the same land twice).
        v.add(0, o1, 0, 10.0);
        v.add(1, r, 0, 7.0);
        v.add(2, r, 0, 7.0);
        v.add(2, o1, 0, 10.0);
        v.add(2, o2, 0, 10.0);
        let a = allocate(
            &plan,
            &v,
            &Spec {
                measures: vec![Measure::Count(0)],
                min_coverage: 0.0,
            },
        );
        // Period 0: only the carried origin is present: 0.5 / (0.5 + 0.5) = 0.5; value 10 * 0.4 = 4.
        assert_eq!(
            a.get(0, 0, 0),
            Estimate {
                value: Some(4.0),
                coverage: 0.5
            }
        );
        // Period 1: only the direct origin: 1 / 1.
        assert_eq!(
            a.get(0, 1, 0),
            Estimate {
                value: Some(7.0),
                coverage: 1.0
            }
        );
        // Period 2: shares add to 2 > 1: reported as an overlap.
        assert_eq!(a.overlaps, vec![(0, 2)]);
    }

    #[test]
    fn the_uncovered_share_is_not_allocated() {
        let cw = Crosswalk {
            rows: vec![
                row("A", Some("X"), 0.9, Some(1.0)),
                row("A", None, 0.1, None),
            ],
        };
        let plan = Plan::new(&cw, &["W".to_string()], direct);
        assert_eq!(plan.targets, ["W", "X"]);
        let v = values(&[("A", &[Some(50.0)])], &plan);
        let a = allocate(
            &plan,
            &v,
            &Spec {
                measures: vec![Measure::Count(0)],
                min_coverage: 0.0,
            },
        );
        // 50 * 0.9 = 45 lands in X; the 5 outside every target is not allocated.
        assert_eq!(a.get(1, 0, 0).value, Some(45.0));
        // W, a target with no source at all, is written with coverage 0.
        assert_eq!(
            a.get(0, 0, 0),
            Estimate {
                value: None,
                coverage: 0.0
            }
        );
    }

    /// A random crosswalk: each source spreads weight 1 over some targets.
    fn crosswalk_strategy() -> impl Strategy<Value = Crosswalk> {
        prop::collection::vec(prop::collection::vec((0usize..5, 0.01f64..1.0), 1..4), 1..8)
            .prop_map(|sources| {
                let mut rows = Vec::new();
                for (s, pieces) in sources.iter().enumerate() {
                    let mut by_target = std::collections::BTreeMap::new();
                    for (t, w) in pieces {
                        *by_target.entry(*t).or_insert(0.0) += w;
                    }
                    let total: f64 = by_target.values().sum();
                    for (t, w) in by_target {
                        rows.push(row(
                            &format!("S{s}"),
                            Some(&format!("T{t}")),
                            w / total,
                            Some(0.3),
                        ));
                    }
                }
                Crosswalk { rows }
            })
    }

    proptest! {
        #[test]
        fn allocation_conserves_the_total_of_known_values(
            cw in crosswalk_strategy(),
            raw in prop::collection::vec(prop::option::of(-1.0e6f64..1.0e6), 8),
        ) {
            let plan = Plan::new(&cw, &[], direct);
            let mut v = SourceValues::new(1, plan.sources.len(), 1);
            let mut expected = 0.0;
            let mut scale = 0.0;
            for (s, x) in raw.iter().take(plan.sources.len()).enumerate() {
                if let Some(x) = *x {
                    v.add(0, s, 0, x);
                    expected += x;
                    scale += x.abs();
                }
            }
            let a = allocate(&plan, &v, &Spec { measures: vec![Measure::Count(0)], min_coverage: 0.0 });
            let total: f64 = (0..plan.targets.len()).filter_map(|t| a.get(t, 0, 0).value).sum();
            prop_assert!((total - expected).abs() <= 1e-9 * scale.max(1.0), "{total} vs {expected}");
            for t in 0..plan.targets.len() {
                let e = a.get(t, 0, 0);
                prop_assert!((0.0..=1.0).contains(&e.coverage));
                prop_assert_eq!(e.value.is_none(), e.coverage == 0.0);
            }
            if raw.iter().take(plan.sources.len()).all(Option::is_some) {
                for t in 0..plan.targets.len() {
                    prop_assert!((a.get(t, 0, 0).coverage - 1.0).abs() < 1e-12);
                }
            }
        }
    }
}

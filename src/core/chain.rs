//! Composing two crosswalks, x->y and y->z, into one, x->z.
//!
//! **Weights.** `weight(x, z) = sum over y of weight(x, y) * weight(y, z)`.
//! This is what allocating twice does: a value of x sent through both
//! tables lands in z with exactly these weights.
//!
//! **Uncovered shares.** The share of x outside every y stays uncovered;
//! the share of a y outside every z, taken in the part of x that went to
//! that y, becomes uncovered share of x: `uncovered(x) = weight(x, none) +
//! sum over y of weight(x, y) * weight(y, none)`. So the weights of each x
//! still add up to one.
//!
//! **Target shares.** With `|a ∩ b|` the measure (area or population) of an
//! intersection, `target_share(x, y) = |x ∩ y| / |y|` and
//! `target_share(y, z) = |y ∩ z| / |z|`. The piece of z made of x is
//! `sum over y of |x ∩ y ∩ z|`, which the two tables do not give. Assuming,
//! as allocation itself does, that x's part of y is spread evenly over y,
//! `|x ∩ y ∩ z| = |x ∩ y| · |y ∩ z| / |y|`, so
//! `target_share(x, z) = sum over y of target_share(x, y) · target_share(y, z)`.
//! It is exact whenever each y lies wholly inside one x or wholly inside one
//! z (then one of the two ratios is the whole of y). When either table lacks
//! a target share on a path, the composed row has none.
//!
//! **Basis.** The composed row takes the basis of the first table's row,
//! unless that is `history` (one to one), in which case it takes the
//! second's.
//!
//! Both tables are checked first ([`check`]): no duplicate (source, target)
//! pairs, weights finite and within 0..=1, and the weights of each source
//! (the uncovered row included) adding up to one within [`WEIGHT_SLACK`].

use std::collections::{BTreeMap, BTreeSet};

use crate::core::crosswalk::{Basis, Crosswalk, CrosswalkRow};

/// How far the weights of a source may stray from one.
pub const WEIGHT_SLACK: f64 = 1e-6;

/// What is wrong with a crosswalk, or with a pair to be composed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ChainError {
    /// A (source, target) pair appears on more than one row.
    #[error(
        "{table}: the pair {from} -> {to} appears on more than one row; each pair must appear once"
    )]
    Duplicate {
        /// Which table ("first" or "second").
        table: &'static str,
        /// Source code.
        from: String,
        /// Target code (empty for the uncovered row).
        to: String,
    },
    /// A weight is not a number within 0..=1.
    #[error("{table}: the weight of {from} -> {to} is {weight}; weights lie within 0..=1")]
    BadWeight {
        /// Which table.
        table: &'static str,
        /// Source code.
        from: String,
        /// Target code.
        to: String,
        /// The weight.
        weight: f64,
    },
    /// The weights of a source do not add up to one.
    #[error("{table}: the weights of source {from} add up to {total:.9}, not 1; add the missing share as a row with an empty to_code (the part outside every target), or rebuild the crosswalk")]
    Unbalanced {
        /// Which table.
        table: &'static str,
        /// Source code.
        from: String,
        /// The sum.
        total: f64,
    },
    /// Targets of the first table that are not sources of the second.
    #[error("{count} target code(s) of the first crosswalk are not source codes of the second, so their share cannot be carried on: {listed}; are the two tables of consecutive vintages (x->y and y->z)?")]
    Unlinked {
        /// How many.
        count: usize,
        /// The first few, comma-separated.
        listed: String,
    },
}

/// Checks a crosswalk: distinct pairs, weights within 0..=1, and the
/// weights of each source adding up to one (within [`WEIGHT_SLACK`]).
pub fn check(table: &'static str, crosswalk: &Crosswalk) -> Result<(), ChainError> {
    let mut seen = BTreeSet::new();
    let mut totals: BTreeMap<&str, f64> = BTreeMap::new();
    for r in &crosswalk.rows {
        let to = r.to_code.clone().unwrap_or_default();
        if !seen.insert((r.from_code.as_str(), r.to_code.as_deref())) {
            return Err(ChainError::Duplicate {
                table,
                from: r.from_code.clone(),
                to,
            });
        }
        if !(0.0..=1.0 + WEIGHT_SLACK).contains(&r.weight) {
            return Err(ChainError::BadWeight {
                table,
                from: r.from_code.clone(),
                to,
                weight: r.weight,
            });
        }
        *totals.entry(r.from_code.as_str()).or_insert(0.0) += r.weight;
    }
    for (from, total) in totals {
        if (total - 1.0).abs() > WEIGHT_SLACK {
            return Err(ChainError::Unbalanced {
                table,
                from: from.to_string(),
                total,
            });
        }
    }
    Ok(())
}

/// A (source, target) pair; no target for the uncovered share.
type Pair<'a> = (&'a str, Option<&'a str>);
/// Weight, target share (if every path has one) and basis of a composed row.
type Composed = (f64, Option<f64>, Basis);

/// Composes `first` (x->y) and `second` (y->z) into x->z, sorted. Both are
/// checked first; every target of `first` must be a source of `second`.
pub fn compose(first: &Crosswalk, second: &Crosswalk) -> Result<Crosswalk, ChainError> {
    check("first", first)?;
    check("second", second)?;
    let mut onward: BTreeMap<&str, Vec<&CrosswalkRow>> = BTreeMap::new();
    for r in &second.rows {
        onward.entry(r.from_code.as_str()).or_default().push(r);
    }
    let unlinked: BTreeSet<&str> = first
        .rows
        .iter()
        .filter_map(|r| r.to_code.as_deref())
        .filter(|y| !onward.contains_key(y))
        .collect();
    if !unlinked.is_empty() {
        let listed: Vec<&str> = unlinked.iter().take(10).copied().collect();
        let more = if unlinked.len() > 10 { ", ..." } else { "" };
        return Err(ChainError::Unlinked {
            count: unlinked.len(),
            listed: format!("{}{more}", listed.join(", ")),
        });
    }
    // (x, z or None) -> (weight, target share if every path has one, basis)
    let mut out: BTreeMap<Pair, Composed> = BTreeMap::new();
    for a in &first.rows {
        let x = a.from_code.as_str();
        let Some(y) = a.to_code.as_deref() else {
            let e = out.entry((x, None)).or_insert((0.0, None, a.basis));
            e.0 += a.weight;
            continue;
        };
        for b in &onward[y] {
            let z = b.to_code.as_deref();
            let basis = if a.basis == Basis::History {
                b.basis
            } else {
                a.basis
            };
            let share = match (z, a.target_share, b.target_share) {
                (Some(_), Some(s1), Some(s2)) => Some(s1 * s2),
                _ => None,
            };
            let e = out.entry((x, z)).or_insert((0.0, Some(0.0), basis));
            e.0 += a.weight * b.weight;
            e.1 = match (e.1, share) {
                (Some(acc), Some(s)) => Some(acc + s),
                _ => None,
            };
        }
    }
    let mut composed = Crosswalk {
        rows: out
            .into_iter()
            .map(|((x, z), (weight, share, basis))| CrosswalkRow {
                from_code: x.to_string(),
                to_code: z.map(String::from),
                weight,
                target_share: z.and(share),
                basis,
            })
            .collect(),
    };
    composed.sort();
    Ok(composed)
}

/// What the sliver rule removed from one source.
#[derive(Debug, Clone, PartialEq)]
pub struct Trimmed {
    /// The source.
    pub from_code: String,
    /// Pieces dropped.
    pub pieces: usize,
    /// The source's share they held, before renormalizing.
    pub share: f64,
}

/// The overlay's sliver rule, for a composed crosswalk: a piece below
/// `min_share` of its source and (when known) of its target is dropped, and
/// the source's remaining weights (its uncovered row included) are scaled
/// back up to one. Composition multiplies small shares into many tiny
/// pairs along generalized boundaries; this removes them as the overlay
/// does. Returns what was dropped, by source.
pub fn drop_slivers(crosswalk: &mut Crosswalk, min_share: f64) -> Vec<Trimmed> {
    let mut out = Vec::new();
    if min_share <= 0.0 {
        return out;
    }
    let rows = std::mem::take(&mut crosswalk.rows);
    let mut by_source: BTreeMap<String, Vec<CrosswalkRow>> = BTreeMap::new();
    for r in rows {
        by_source.entry(r.from_code.clone()).or_default().push(r);
    }
    for (code, mut rows) in by_source {
        let before = rows.len();
        let mut dropped = 0.0;
        rows.retain(|r| {
            let sliver = r.weight < min_share && r.target_share.is_none_or(|v| v < min_share);
            if sliver {
                dropped += r.weight;
            }
            !sliver
        });
        let kept: f64 = rows.iter().map(|r| r.weight).sum();
        if before > rows.len() {
            out.push(Trimmed {
                from_code: code,
                pieces: before - rows.len(),
                share: dropped,
            });
            if kept > 0.0 {
                for r in rows.iter_mut() {
                    r.weight /= kept;
                }
            }
        }
        crosswalk.rows.extend(rows);
    }
    crosswalk.sort();
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(from: &str, to: Option<&str>, weight: f64, target_share: Option<f64>) -> CrosswalkRow {
        CrosswalkRow {
            from_code: from.into(),
            to_code: to.map(String::from),
            weight,
            target_share,
            basis: Basis::Area,
        }
    }

    fn find<'a>(cw: &'a Crosswalk, from: &str, to: Option<&str>) -> &'a CrosswalkRow {
        cw.rows
            .iter()
            .find(|r| r.from_code == from && r.to_code.as_deref() == to)
            .unwrap()
    }

    /// A strip of land cut three ways (areas in hectares, hand-made):
    /// x-layer: X1 = [0, 6), X2 = [6, 10)          (areas 6 and 4)
    /// y-layer: Y1 = [0, 3), Y2 = [3, 8), Y3 = [8, 10) (areas 3, 5, 2)
    /// z-layer: Z1 = [0, 5), Z2 = [5, 10)          (areas 5 and 5)
    /// Y3 lies wholly in X2 and Z2, Y1 wholly in X1 and Z1; Y2 straddles
    /// both cuts, so the composed shares are exact except through Y2.
    fn strip() -> (Crosswalk, Crosswalk) {
        let xy = Crosswalk {
            rows: vec![
                // X1 ∩ Y1 = 3: weight 3/6, target share 3/3.
                row("X1", Some("Y1"), 0.5, Some(1.0)),
                // X1 ∩ Y2 = [3, 6) = 3: weight 3/6, target share 3/5.
                row("X1", Some("Y2"), 0.5, Some(0.6)),
                // X2 ∩ Y2 = [6, 8) = 2: weight 2/4, target share 2/5.
                row("X2", Some("Y2"), 0.5, Some(0.4)),
                // X2 ∩ Y3 = 2: weight 2/4, target share 2/2.
                row("X2", Some("Y3"), 0.5, Some(1.0)),
            ],
        };
        let yz = Crosswalk {
            rows: vec![
                row("Y1", Some("Z1"), 1.0, Some(0.6)), // 3/3, 3/5
                row("Y2", Some("Z1"), 0.4, Some(0.4)), // [3,5) = 2: 2/5, 2/5
                row("Y2", Some("Z2"), 0.6, Some(0.6)), // [5,8) = 3: 3/5, 3/5
                row("Y3", Some("Z2"), 1.0, Some(0.4)), // 2/2, 2/5
            ],
        };
        (xy, yz)
    }

    #[test]
    fn composed_weights_are_the_sum_over_the_middle_layer() {
        let (xy, yz) = strip();
        let xz = compose(&xy, &yz).unwrap();
        // X1 -> Z1 = 0.5 * 1.0 (via Y1) + 0.5 * 0.4 (via Y2) = 0.7
        // (true overlap [0, 5) = 5 of X1's 6 is 0.833: the difference is Y2's
        // uneven split, the estimate's assumption at work).
        assert!((find(&xz, "X1", Some("Z1")).weight - 0.7).abs() < 1e-12);
        // X1 -> Z2 = 0.5 * 0.6 = 0.3
        assert!((find(&xz, "X1", Some("Z2")).weight - 0.3).abs() < 1e-12);
        // X2 -> Z1 = 0.5 * 0.4 = 0.2; X2 -> Z2 = 0.5 * 0.6 + 0.5 * 1.0 = 0.8
        assert!((find(&xz, "X2", Some("Z1")).weight - 0.2).abs() < 1e-12);
        assert!((find(&xz, "X2", Some("Z2")).weight - 0.8).abs() < 1e-12);
        // Target share X1 -> Z1 = 1.0 * 0.6 + 0.6 * 0.4 = 0.84.
        assert!((find(&xz, "X1", Some("Z1")).target_share.unwrap() - 0.84).abs() < 1e-12);
        check("composed", &xz).unwrap();
    }

    #[test]
    fn chaining_equals_the_direct_table_when_the_middle_layer_nests() {
        // Middle layer M nests in both (it is the common refinement):
        // x-layer: A = [0, 4), B = [4, 10); z-layer: P = [0, 7), Q = [7, 10);
        // M1 = [0, 4), M2 = [4, 7), M3 = [7, 10).
        let xm = Crosswalk {
            rows: vec![
                row("A", Some("M1"), 1.0, Some(1.0)),
                row("B", Some("M2"), 0.5, Some(1.0)), // 3 of 6
                row("B", Some("M3"), 0.5, Some(1.0)),
            ],
        };
        let mz = Crosswalk {
            rows: vec![
                row("M1", Some("P"), 1.0, Some(4.0 / 7.0)),
                row("M2", Some("P"), 1.0, Some(3.0 / 7.0)),
                row("M3", Some("Q"), 1.0, Some(1.0)),
            ],
        };
        // The direct x->z table from the intervals:
        // A ∩ P = 4: weight 4/4, share 4/7; B ∩ P = 3: 3/6, 3/7; B ∩ Q = 3: 3/6, 3/3.
        let direct = Crosswalk {
            rows: vec![
                row("A", Some("P"), 1.0, Some(4.0 / 7.0)),
                row("B", Some("P"), 0.5, Some(3.0 / 7.0)),
                row("B", Some("Q"), 0.5, Some(1.0)),
            ],
        };
        let chained = compose(&xm, &mz).unwrap();
        assert_eq!(chained.rows.len(), direct.rows.len());
        for (c, d) in chained.rows.iter().zip(&direct.rows) {
            assert_eq!((&c.from_code, &c.to_code), (&d.from_code, &d.to_code));
            assert!((c.weight - d.weight).abs() < 1e-12);
            assert!((c.target_share.unwrap() - d.target_share.unwrap()).abs() < 1e-12);
        }
    }

    #[test]
    fn uncovered_shares_carry_through_both_steps() {
        // X: 0.8 into Y, 0.2 outside every y. Y: 0.75 into Z, 0.25 outside every z.
        let xy = Crosswalk {
            rows: vec![
                row("X", Some("Y"), 0.8, Some(1.0)),
                row("X", None, 0.2, None),
            ],
        };
        let yz = Crosswalk {
            rows: vec![
                row("Y", Some("Z"), 0.75, Some(1.0)),
                row("Y", None, 0.25, None),
            ],
        };
        let xz = compose(&xy, &yz).unwrap();
        // X -> Z = 0.8 * 0.75 = 0.6; uncovered = 0.2 + 0.8 * 0.25 = 0.4.
        assert!((find(&xz, "X", Some("Z")).weight - 0.6).abs() < 1e-12);
        assert!((find(&xz, "X", None).weight - 0.4).abs() < 1e-12);
        assert_eq!(
            xz.rows.last().unwrap().to_code,
            None,
            "the uncovered row comes last"
        );
    }

    #[test]
    fn a_target_missing_from_the_second_table_is_named() {
        let xy = Crosswalk {
            rows: vec![row("X", Some("Y9"), 1.0, None)],
        };
        let yz = Crosswalk {
            rows: vec![row("Y1", Some("Z"), 1.0, None)],
        };
        let e = compose(&xy, &yz).unwrap_err();
        assert_eq!(
            e,
            ChainError::Unlinked {
                count: 1,
                listed: "Y9".into()
            }
        );
    }

    #[test]
    fn unbalanced_weights_and_duplicate_pairs_are_refused() {
        let bad = Crosswalk {
            rows: vec![row("X", Some("Y"), 0.7, None)],
        };
        assert!(matches!(
            check("first", &bad),
            Err(ChainError::Unbalanced { .. })
        ));
        let dup = Crosswalk {
            rows: vec![
                row("X", Some("Y"), 0.5, None),
                row("X", Some("Y"), 0.5, None),
            ],
        };
        assert!(matches!(
            check("first", &dup),
            Err(ChainError::Duplicate { .. })
        ));
    }

    #[test]
    fn slivers_of_a_composed_crosswalk_are_dropped_and_the_source_renormalized() {
        let mut cw = Crosswalk {
            rows: vec![
                row("A", Some("P"), 0.9995, Some(0.5)),
                // A sliver of A that is also a sliver of Q.
                row("A", Some("Q"), 0.0005, Some(0.0002)),
                // Small for B, but a large part of its target: kept.
                row("B", Some("R"), 0.0005, Some(0.9)),
                row("B", Some("P"), 0.9995, Some(0.5)),
            ],
        };
        let trimmed = drop_slivers(&mut cw, 1e-3);
        assert_eq!(trimmed.len(), 1);
        assert_eq!((trimmed[0].from_code.as_str(), trimmed[0].pieces), ("A", 1));
        assert!((trimmed[0].share - 0.0005).abs() < 1e-15);
        assert_eq!(cw.rows.len(), 3);
        assert_eq!(find(&cw, "A", Some("P")).weight, 1.0);
        assert!(check("chained", &cw).is_ok());
    }
}

//! Groupings of units (a state's health districts, planning regions made of
//! counties): from a membership list (unit -> group, optionally with the
//! share of the unit in the group) a crosswalk each way.
//!
//! - **Units -> groups** (aggregation): a unit's row into its group has
//!   `weight` = the unit's share in the group (1 without shares) and
//!   `target_share` = the part of the group it makes up, by area or
//!   population: `share(u, g) · size(u) / Σ share(v, g) · size(v)`. Applied
//!   with `apply`, a group's figure is the sum of its members with values,
//!   and its coverage is the part of the group (by area or population)
//!   whose members reported. A unit whose shares add up to less than one
//!   keeps the rest in a row with no group.
//! - **Groups -> units** (allocation): a group's row into a member has
//!   `weight` = the member's part of the group (the units -> groups
//!   `target_share`) and `target_share` = the member's share in the group.
//!
//! Rates and means keep their rules through groups: `apply` rebuilds rates
//! from allocated numerators and denominators and weights means, whatever
//! the crosswalk. Allocated figures are estimates: groups -> units assumes
//! a group's figure is spread evenly by area or population over its units.

use std::collections::BTreeMap;

use crate::core::crosswalk::{Basis, Crosswalk, CrosswalkRow};

/// Slack for shares of a unit adding up to at most one.
pub const SHARE_SLACK: f64 = 1e-9;

/// One row of a membership list.
#[derive(Debug, Clone, PartialEq)]
pub struct Member {
    /// The unit's code (as it is in the reference's vintage).
    pub unit: String,
    /// The group's code.
    pub group: String,
    /// The share of the unit in the group (0 < share <= 1), if given.
    pub share: Option<f64>,
    /// The line of the list it came from (for messages).
    pub line: u64,
}

/// Something wrong with a membership list.
#[derive(Debug, Clone, PartialEq)]
pub enum Problem {
    /// A unit listed in several groups without shares for each.
    SeveralGroupsWithoutShares {
        /// The unit.
        unit: String,
        /// Its lines.
        lines: Vec<u64>,
    },
    /// A unit's shares add up to more than one.
    SharesAboveOne {
        /// The unit.
        unit: String,
        /// The total.
        total: f64,
        /// Its lines.
        lines: Vec<u64>,
    },
    /// A share outside (0, 1].
    BadShare {
        /// The line.
        line: u64,
        /// The share.
        share: f64,
    },
    /// The same unit listed twice in one group.
    Duplicate {
        /// The unit.
        unit: String,
        /// The group.
        group: String,
        /// The lines.
        lines: Vec<u64>,
    },
    /// A unit with no size (area or population) to weight by.
    NoSize {
        /// The unit.
        unit: String,
        /// Its first line.
        line: u64,
    },
    /// A group whose members' sizes add up to zero.
    GroupWithoutSize {
        /// The group.
        group: String,
    },
}

impl Problem {
    /// The line the problem is reported at.
    pub fn line(&self) -> Option<u64> {
        match self {
            Problem::SeveralGroupsWithoutShares { lines, .. }
            | Problem::SharesAboveOne { lines, .. }
            | Problem::Duplicate { lines, .. } => lines.last().copied(),
            Problem::BadShare { line, .. } | Problem::NoSize { line, .. } => Some(*line),
            Problem::GroupWithoutSize { .. } => None,
        }
    }

    /// The problem in plain words.
    pub fn message(&self) -> String {
        let lines = |l: &[u64]| l.iter().map(u64::to_string).collect::<Vec<_>>().join(", ");
        match self {
            Problem::SeveralGroupsWithoutShares { unit, lines: l } => format!(
                "unit {unit} is in several groups (lines {}) without a share for each; give each row a share (the part of the unit in that group)",
                lines(l)
            ),
            Problem::SharesAboveOne { unit, total, lines: l } => format!(
                "the shares of unit {unit} add up to {total} (lines {}); they can add up to at most 1",
                lines(l)
            ),
            Problem::BadShare { share, .. } => {
                format!("share {share} is not a fraction above 0 and at most 1")
            }
            Problem::Duplicate { unit, group, lines: l } => format!(
                "unit {unit} is listed twice in group {group} (lines {}); keep one row",
                lines(l)
            ),
            Problem::NoSize { unit, .. } => {
                format!("unit {unit} has no size to weight by (no area in the geometry, or no population)")
            }
            Problem::GroupWithoutSize { group } => {
                format!("the members of group {group} add up to a size of zero; it cannot be weighted")
            }
        }
    }
}

/// One group's summary.
#[derive(Debug, Clone, PartialEq)]
pub struct GroupSummary {
    /// The group's code.
    pub group: String,
    /// Number of member units.
    pub members: usize,
    /// Number of members that lie only partly in the group (share < 1).
    pub partial: usize,
    /// The group's size: the sum of its members' pieces.
    pub size: f64,
}

/// The two crosswalks of a grouping.
#[derive(Debug, Clone, PartialEq)]
pub struct Grouping {
    /// Units -> groups (aggregation).
    pub to_groups: Crosswalk,
    /// Groups -> units (allocation).
    pub to_units: Crosswalk,
    /// One line per group, by group code.
    pub groups: Vec<GroupSummary>,
}

/// Checks a membership list on its own (no sizes): shares in range, a unit
/// in several groups only with shares, shares of a unit adding up to at
/// most one, no unit twice in a group. Problems in line order.
pub fn validate(members: &[Member]) -> Vec<Problem> {
    let mut problems = Vec::new();
    let mut by_unit: BTreeMap<&str, Vec<&Member>> = BTreeMap::new();
    for m in members {
        if let Some(s) = m.share {
            if !(s > 0.0 && s <= 1.0 + SHARE_SLACK) {
                problems.push(Problem::BadShare {
                    line: m.line,
                    share: s,
                });
            }
        }
        by_unit.entry(&m.unit).or_default().push(m);
    }
    for (unit, rows) in &by_unit {
        let mut by_group: BTreeMap<&str, Vec<u64>> = BTreeMap::new();
        for r in rows {
            by_group.entry(&r.group).or_default().push(r.line);
        }
        for (group, lines) in &by_group {
            if lines.len() > 1 {
                problems.push(Problem::Duplicate {
                    unit: unit.to_string(),
                    group: group.to_string(),
                    lines: lines.clone(),
                });
            }
        }
        if by_group.len() > 1 && rows.iter().any(|r| r.share.is_none()) {
            problems.push(Problem::SeveralGroupsWithoutShares {
                unit: unit.to_string(),
                lines: rows.iter().map(|r| r.line).collect(),
            });
            continue;
        }
        let total: f64 = rows.iter().map(|r| r.share.unwrap_or(1.0)).sum();
        if total > 1.0 + SHARE_SLACK {
            problems.push(Problem::SharesAboveOne {
                unit: unit.to_string(),
                total,
                lines: rows.iter().map(|r| r.line).collect(),
            });
        }
    }
    problems.sort_by_key(|p| p.line());
    problems
}

/// Builds both crosswalks, weighting by `size` (a unit's area or
/// population) with `basis` written in each row. The list must pass
/// [`validate`]; units with no size and groups of size zero are problems.
pub fn build(
    members: &[Member],
    size: impl Fn(&str) -> Option<f64>,
    basis: Basis,
) -> Result<Grouping, Vec<Problem>> {
    let mut problems = validate(members);
    let mut sizes: BTreeMap<&str, f64> = BTreeMap::new();
    for m in members {
        if sizes.contains_key(m.unit.as_str()) {
            continue;
        }
        match size(&m.unit) {
            Some(s) if s.is_finite() && s >= 0.0 => {
                sizes.insert(&m.unit, s);
            }
            _ => {
                if !problems
                    .iter()
                    .any(|p| matches!(p, Problem::NoSize { unit, .. } if *unit == m.unit))
                {
                    problems.push(Problem::NoSize {
                        unit: m.unit.clone(),
                        line: m.line,
                    });
                }
            }
        }
    }
    if !problems.is_empty() {
        return Err(problems);
    }
    // Pieces: (group, unit) -> (share, size of the piece).
    let mut groups: BTreeMap<&str, Vec<(&str, f64, f64)>> = BTreeMap::new();
    let mut in_groups: BTreeMap<&str, f64> = BTreeMap::new();
    for m in members {
        let share = m.share.unwrap_or(1.0).min(1.0);
        groups
            .entry(&m.group)
            .or_default()
            .push((&m.unit, share, share * sizes[m.unit.as_str()]));
        *in_groups.entry(&m.unit).or_default() += share;
    }
    let mut to_groups = Crosswalk::default();
    let mut to_units = Crosswalk::default();
    let mut summaries = Vec::new();
    for (group, pieces) in &groups {
        let total: f64 = pieces.iter().map(|p| p.2).sum();
        if total <= 0.0 {
            problems.push(Problem::GroupWithoutSize {
                group: group.to_string(),
            });
            continue;
        }
        for &(unit, share, piece) in pieces {
            let part = piece / total;
            to_groups.rows.push(CrosswalkRow {
                from_code: unit.to_string(),
                to_code: Some(group.to_string()),
                weight: share,
                target_share: Some(part),
                basis,
            });
            to_units.rows.push(CrosswalkRow {
                from_code: group.to_string(),
                to_code: Some(unit.to_string()),
                weight: part,
                target_share: Some(share),
                basis,
            });
        }
        summaries.push(GroupSummary {
            group: group.to_string(),
            members: pieces.len(),
            partial: pieces.iter().filter(|p| p.1 < 1.0).count(),
            size: total,
        });
    }
    if !problems.is_empty() {
        return Err(problems);
    }
    // The part of a unit outside every group.
    for (unit, inside) in in_groups {
        if inside < 1.0 - SHARE_SLACK {
            to_groups.rows.push(CrosswalkRow {
                from_code: unit.to_string(),
                to_code: None,
                weight: 1.0 - inside,
                target_share: None,
                basis,
            });
        }
    }
    to_groups.sort();
    to_units.sort();
    Ok(Grouping {
        to_groups,
        to_units,
        groups: summaries,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::allocate::{allocate, Measure, Origin, Plan, SourceValues, Spec};
    use proptest::prelude::*;

    fn member(unit: &str, group: &str, share: Option<f64>, line: u64) -> Member {
        Member {
            unit: unit.into(),
            group: group.into(),
            share,
            line,
        }
    }

    #[test]
    fn a_unit_in_two_groups_needs_shares() {
        let list = [
            member("A", "G1", None, 2),
            member("A", "G2", None, 3),
            member("B", "G1", None, 4),
        ];
        let p = validate(&list);
        assert_eq!(p.len(), 1, "{p:?}");
        assert!(p[0]
            .message()
            .contains("unit A is in several groups (lines 2, 3)"));
        let list = [
            member("A", "G1", Some(0.6), 2),
            member("A", "G2", Some(0.6), 3),
        ];
        let p = validate(&list);
        assert!(matches!(p[0], Problem::SharesAboveOne { .. }), "{p:?}");
        let list = [member("A", "G1", Some(0.0), 2)];
        assert!(matches!(
            validate(&list)[0],
            Problem::BadShare { line: 2, .. }
        ));
        let list = [member("A", "G1", None, 2), member("A", "G1", None, 5)];
        assert!(matches!(validate(&list)[0], Problem::Duplicate { .. }));
    }

    #[test]
    fn shares_and_parts_follow_the_sizes() {
        // G1 = all of A (size 30) and 0.5 of B (size 20 -> piece 10): 40.
        // G2 = the other half of B: 10.
        let list = [
            member("A", "G1", None, 2),
            member("B", "G1", Some(0.5), 3),
            member("B", "G2", Some(0.5), 4),
        ];
        let sizes: BTreeMap<&str, f64> = [("A", 30.0), ("B", 20.0)].into();
        let g = build(&list, |u| sizes.get(u).copied(), Basis::Area).unwrap();
        let rows: Vec<(&str, &str, f64, f64)> = g
            .to_groups
            .rows
            .iter()
            .map(|r| {
                (
                    r.from_code.as_str(),
                    r.to_code.as_deref().unwrap(),
                    r.weight,
                    r.target_share.unwrap(),
                )
            })
            .collect();
        assert_eq!(
            rows,
            [
                ("A", "G1", 1.0, 0.75),
                ("B", "G1", 0.5, 0.25),
                ("B", "G2", 0.5, 1.0)
            ]
        );
        let back: Vec<(&str, &str, f64, f64)> = g
            .to_units
            .rows
            .iter()
            .map(|r| {
                (
                    r.from_code.as_str(),
                    r.to_code.as_deref().unwrap(),
                    r.weight,
                    r.target_share.unwrap(),
                )
            })
            .collect();
        assert_eq!(
            back,
            [
                ("G1", "A", 0.75, 1.0),
                ("G1", "B", 0.25, 0.5),
                ("G2", "B", 1.0, 0.5)
            ]
        );
        assert_eq!(g.groups[0].size, 40.0);
        assert_eq!(g.groups[0].partial, 1);
    }

    #[test]
    fn the_part_of_a_unit_outside_every_group_is_kept() {
        let list = [member("A", "G1", Some(0.4), 2)];
        let g = build(&list, |_| Some(1.0), Basis::Area).unwrap();
        assert_eq!(g.to_groups.rows.len(), 2);
        let out = &g.to_groups.rows[1];
        assert_eq!(out.to_code, None);
        assert!((out.weight - 0.6).abs() < 1e-12);
    }

    #[test]
    fn a_unit_without_size_is_a_problem() {
        let list = [member("A", "G1", None, 2), member("B", "G1", None, 3)];
        let e = build(&list, |u| (u == "A").then_some(1.0), Basis::Population).unwrap_err();
        assert_eq!(
            e,
            [Problem::NoSize {
                unit: "B".into(),
                line: 3
            }]
        );
    }

    fn run(cw: &Crosswalk, codes: &[String], values: &[f64]) -> BTreeMap<String, f64> {
        let plan = Plan::new(cw, &[], |_| Origin::Direct);
        let mut v = SourceValues::new(1, plan.sources.len(), 1);
        for (c, x) in codes.iter().zip(values) {
            if let Some(s) = plan.source_index(c) {
                v.add(0, s, 0, *x);
            }
        }
        let a = allocate(
            &plan,
            &v,
            &Spec {
                measures: vec![Measure::Count(0)],
                min_coverage: 0.0,
            },
        );
        plan.targets
            .iter()
            .enumerate()
            .filter_map(|(t, code)| a.get(t, 0, 0).value.map(|x| (code.clone(), x)))
            .collect()
    }

    proptest! {
        /// Aggregating then allocating returns the inputs where each group
        /// is one unit; and with several units per group the group totals
        /// are conserved both ways.
        #[test]
        fn aggregating_then_allocating_returns_one_to_one_inputs(
            sizes in prop::collection::vec(0.1f64..1.0e4, 1..12),
            values in prop::collection::vec(-1.0e6f64..1.0e6, 12),
            group_of in prop::collection::vec(0usize..4, 12),
        ) {
            let units: Vec<String> = (0..sizes.len()).map(|i| format!("U{i:02}")).collect();
            let size = |u: &str| units.iter().position(|x| x == u).map(|i| sizes[i]);
            // One to one: group Gi holds Ui alone.
            let list: Vec<Member> = units.iter().enumerate()
                .map(|(i, u)| member(u, &format!("G{i:02}"), None, i as u64 + 2)).collect();
            let g = build(&list, size, Basis::Area).unwrap();
            let vals = &values[..units.len()];
            let grouped = run(&g.to_groups, &units, vals);
            let groups: Vec<String> = grouped.keys().cloned().collect();
            let gv: Vec<f64> = grouped.values().copied().collect();
            let back = run(&g.to_units, &groups, &gv);
            for (u, x) in units.iter().zip(vals) {
                prop_assert!((back[u] - x).abs() <= 1e-9 * x.abs().max(1.0), "{u}: {} vs {x}", back[u]);
            }
            // Many to one: totals are kept both ways.
            let list: Vec<Member> = units.iter().enumerate()
                .map(|(i, u)| member(u, &format!("G{}", group_of[i]), None, i as u64 + 2)).collect();
            let g = build(&list, size, Basis::Area).unwrap();
            let grouped = run(&g.to_groups, &units, vals);
            let total: f64 = vals.iter().sum();
            let scale: f64 = vals.iter().map(|x| x.abs()).sum::<f64>().max(1.0);
            prop_assert!((grouped.values().sum::<f64>() - total).abs() <= 1e-9 * scale);
            let groups: Vec<String> = grouped.keys().cloned().collect();
            let gv: Vec<f64> = grouped.values().copied().collect();
            let back = run(&g.to_units, &groups, &gv);
            prop_assert!((back.values().sum::<f64>() - total).abs() <= 1e-9 * scale);
        }
    }
}

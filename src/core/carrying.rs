//! Carrying a table's codes onto the units of one vintage: the crosswalk
//! that `apply --to-vintage` allocates through, built from the change
//! history, the crosswalk shipped for the latest vintage and a user's own.
//!
//! For each code of the data, in this order:
//! - a row of the user's crosswalk for it: those rows are used as given;
//! - a code valid in the vintage: an identity row (basis `history`);
//! - a code renamed, absorbed or otherwise carried one way: the shipped
//!   weights when they have the code, else one row onto its successor
//!   (target share 1 only when every change was a rename: the same land);
//! - a code divided among several units: the shipped weights, or nothing
//!   (reported as divided without weights: the caller refuses or skips);
//! - a code of no vintage: reported as unknown.
//!
//! The other sources of the weight tables that reach the same targets join
//! the crosswalk as carried sources without data, so the coverage of those
//! targets counts what is missing.

use std::collections::{BTreeMap, BTreeSet};

use crate::core::allocate::{Origin, Plan};
use crate::core::crosswalk::{Basis, Crosswalk, CrosswalkRow};
use crate::core::fips::CodeForm;
use crate::core::history::{carry, Carried};
use crate::core::reference::{ChangeKind, Reference};

/// What happened to one code of the data on its way to the vintage.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum CarryKind {
    /// Weighted by rows of the user's crosswalk.
    FromCrosswalk,
    /// Carried one way (renamed, absorbed, ...) onto a later unit.
    Carried,
    /// Divided among several units, with weights.
    Divided,
    /// Divided among several units, and no crosswalk gives the weights.
    DividedWithoutWeights,
    /// A code of no vintage of the reference.
    UnknownCode,
}

impl CarryKind {
    /// The word used in reports.
    pub fn as_str(self) -> &'static str {
        match self {
            CarryKind::FromCrosswalk => "from-crosswalk",
            CarryKind::Carried => "carried",
            CarryKind::Divided => "divided",
            CarryKind::DividedWithoutWeights => "divided-without-weights",
            CarryKind::UnknownCode => "unknown-code",
        }
    }
}

/// A line for the report about one code of the data.
#[derive(Debug, Clone, PartialEq)]
pub struct CarryNote {
    /// What happened.
    pub kind: CarryKind,
    /// The code (as normalized).
    pub code: String,
    /// Rows of the data with this code.
    pub rows: u64,
    /// Line of the first of them.
    pub first_line: u64,
    /// Plain words.
    pub detail: String,
}

/// The crosswalk that carries each data code onto the units of a vintage.
#[derive(Debug, Clone, Default)]
pub struct Carrying {
    /// The rows, sorted.
    pub crosswalk: Crosswalk,
    /// Sources of the crosswalk that belong to earlier vintages (data codes
    /// carried, and the other sources of the weight tables they reach).
    pub carried: BTreeSet<String>,
    /// A line per data code that was not simply valid in the vintage.
    pub notes: Vec<CarryNote>,
    /// Codes divided among several units with no weights: (code, what
    /// happened and the successors).
    pub unweighted: Vec<(String, String)>,
}

/// The rows a sorted crosswalk has for one source code.
pub fn rows_for<'a>(cw: &'a Crosswalk, code: &str) -> impl Iterator<Item = &'a CrosswalkRow> + 'a {
    let start = cw.rows.partition_point(|r| r.from_code.as_str() < code);
    let code = code.to_string();
    cw.rows[start..]
        .iter()
        .take_while(move |r| r.from_code == code)
}

/// True when every change that carries `code` away is a rename: the unit
/// is the same land, so it makes up the whole of its new code.
fn renamed_only(reference: &Reference, code: &str) -> bool {
    reference
        .changes
        .iter()
        .filter(|c| {
            c.from_code == code
                && c.to_code != code
                && c.kind != ChangeKind::PartTransfer
                && c.kind != ChangeKind::Created
        })
        .all(|c| c.kind == ChangeKind::Renamed)
}

/// Builds the crosswalk that carries `codes` (each with its rows and first
/// line) onto the units of `year`. `user` and `shipped` must be sorted
/// ([`Crosswalk::sort`]); the shipped weights are used for 2023 only (the
/// vintage they reach); `shipped_label` names them in notes.
pub fn carry_codes(
    codes: &BTreeMap<String, (u64, u64)>,
    year: u16,
    reference: &Reference,
    user: Option<&Crosswalk>,
    shipped: Option<&Crosswalk>,
    shipped_label: &str,
) -> Carrying {
    let mut out = Carrying::default();
    // The targets that each weight table's rows reach (user's, shipped),
    // with the data codes that reach them.
    let mut reached_by: [BTreeMap<String, BTreeSet<String>>; 2] = Default::default();
    let take = |reached: &mut BTreeMap<String, BTreeSet<String>>, rows: &[CrosswalkRow]| {
        for r in rows {
            if let Some(t) = &r.to_code {
                reached
                    .entry(t.clone())
                    .or_default()
                    .insert(r.from_code.clone());
            }
        }
    };
    let shipped_rows = |code: &str| -> Vec<CrosswalkRow> {
        if year == 2023 {
            shipped
                .map(|s| rows_for(s, code).cloned().collect())
                .unwrap_or_default()
        } else {
            Vec::new()
        }
    };
    for (code, &(rows, first_line)) in codes {
        let note = |kind: CarryKind, detail: String| CarryNote {
            kind,
            code: code.clone(),
            rows,
            first_line,
            detail,
        };
        let valid_now = reference.unit(code, year).is_some();
        if let Some(user) = user {
            let rows: Vec<CrosswalkRow> = rows_for(user, code).cloned().collect();
            if !rows.is_empty() {
                if !valid_now {
                    out.carried.insert(code.clone());
                }
                out.notes.push(note(
                    CarryKind::FromCrosswalk,
                    format!("{} row(s) of the given crosswalk", rows.len()),
                ));
                take(&mut reached_by[0], &rows);
                out.crosswalk.rows.extend(rows);
                continue;
            }
        }
        match carry(reference, code, year) {
            Carried::Same => out.crosswalk.rows.push(CrosswalkRow {
                from_code: code.clone(),
                to_code: Some(code.clone()),
                weight: 1.0,
                target_share: Some(1.0),
                basis: Basis::History,
            }),
            Carried::To {
                code: to,
                note: what,
            } => {
                out.carried.insert(code.clone());
                let rows = shipped_rows(code);
                if !rows.is_empty() {
                    out.notes.push(note(
                        CarryKind::Carried,
                        format!("carried to {to} ({what}); weights from {shipped_label}"),
                    ));
                    take(&mut reached_by[1], &rows);
                    out.crosswalk.rows.extend(rows);
                    continue;
                }
                let whole = renamed_only(reference, code);
                let detail = if whole {
                    format!("carried one to one to {to} ({what})")
                } else {
                    format!("carried to {to} ({what}); counts are added to {to}; its share of {to} is unknown, so means weighted by target share leave it out")
                };
                out.notes.push(note(CarryKind::Carried, detail));
                out.crosswalk.rows.push(CrosswalkRow {
                    from_code: code.clone(),
                    to_code: Some(to),
                    weight: 1.0,
                    target_share: whole.then_some(1.0),
                    basis: Basis::History,
                });
            }
            Carried::Divided {
                successors,
                note: what,
            } => {
                out.carried.insert(code.clone());
                let rows = shipped_rows(code);
                if rows.is_empty() {
                    out.unweighted.push((
                        code.clone(),
                        format!("{what}; successors {}", successors.join(", ")),
                    ));
                    out.notes.push(note(
                        CarryKind::DividedWithoutWeights,
                        format!("divided among {} ({what}); no weights: rows left out. Give --crosswalk FILE with rows from {code} to the {year} units", successors.join(", ")),
                    ));
                } else {
                    out.notes.push(note(
                        CarryKind::Divided,
                        format!(
                            "divided among {} ({what}); weights from {shipped_label}",
                            successors.join(", ")
                        ),
                    ));
                    take(&mut reached_by[1], &rows);
                    out.crosswalk.rows.extend(rows);
                }
            }
            Carried::Unknown => out.notes.push(note(
                CarryKind::UnknownCode,
                "not a county code of any vintage in the built-in reference; rows left out"
                    .to_string(),
            )),
        }
    }
    // The other pieces of the targets that weighted rows reach: sources of
    // the weight tables with no row in the data. They join the plan as
    // carried sources without values, so the coverage of those targets
    // counts what is missing (a region made mostly of counties absent from
    // the data is not fully covered). A table adds its sources to the
    // targets its own rows reach, and to those the other table's rows
    // reach from codes it also has (the same vintage); not to targets
    // reached only from codes of another vintage: the shipped table's 2017
    // sources beside a user's table from 2000 codes would count the same
    // land twice, once as missing.
    let tables = [user, shipped];
    let wanted_targets: Vec<BTreeSet<String>> = (0..2)
        .map(|i| {
            let Some(table) = tables[i] else {
                return BTreeSet::new();
            };
            let mut t: BTreeSet<String> = reached_by[i].keys().cloned().collect();
            t.extend(
                reached_by[1 - i]
                    .iter()
                    .filter(|(_, from)| from.iter().any(|c| rows_for(table, c).next().is_some()))
                    .map(|(to, _)| to.clone()),
            );
            t
        })
        .collect();
    let present: BTreeSet<String> = out
        .crosswalk
        .rows
        .iter()
        .map(|r| r.from_code.clone())
        .collect();
    let mut extra: Vec<CrosswalkRow> = Vec::new();
    let mut taken: BTreeSet<String> = BTreeSet::new();
    for (table, reached) in tables.iter().zip(&wanted_targets) {
        let Some(table) = table else { continue };
        let wanted: BTreeSet<&str> = table
            .rows
            .iter()
            .filter(|r| r.to_code.as_ref().is_some_and(|t| reached.contains(t)))
            .map(|r| r.from_code.as_str())
            .filter(|c| !present.contains(*c) && !taken.contains(*c))
            .collect();
        for code in wanted {
            out.carried.insert(code.to_string());
            // Only the pieces inside reached targets: a source's pieces
            // elsewhere would add rows for units no data reaches.
            extra.extend(
                rows_for(table, code)
                    .filter(|r| r.to_code.as_ref().is_some_and(|t| reached.contains(t)))
                    .cloned(),
            );
            taken.insert(code.to_string());
        }
    }
    out.crosswalk.rows.extend(extra);
    out.crosswalk.sort();
    out
}

/// Everything `apply --to-vintage` allocates through.
#[derive(Debug, Clone)]
pub struct VintagePlan {
    /// The crosswalk (see [`carry_codes`]).
    pub carrying: Carrying,
    /// The allocation plan: carried sources marked [`Origin::Carried`].
    pub plan: Plan,
    /// The full name of each target of the plan in the vintage.
    pub target_names: Vec<String>,
    /// Codes of the data that were carried (not the other sources of the
    /// weight tables, which hold no data).
    pub carried_codes: usize,
}

/// Carries `codes` onto the units of `year` ([`carry_codes`]) and makes the
/// plan: its targets are the units the codes reach, or every unit of the
/// vintage with `all_units`. A user's crosswalk is read as county codes
/// whatever its look (a short table of four-digit codes is still counties).
pub fn plan_to_vintage(
    codes: &BTreeMap<String, (u64, u64)>,
    year: u16,
    reference: &Reference,
    user: Option<&Crosswalk>,
    shipped: Option<&Crosswalk>,
    shipped_label: &str,
    all_units: bool,
) -> VintagePlan {
    let user = user.map(|cw| {
        let mut cw = cw.clone();
        cw.normalize_codes_as(CodeForm::County, CodeForm::County);
        cw.sort();
        cw
    });
    let carrying = carry_codes(
        codes,
        year,
        reference,
        user.as_ref(),
        shipped,
        shipped_label,
    );
    let mut targets: Vec<String> = if all_units {
        reference.units_in(year).map(|u| u.code.clone()).collect()
    } else {
        Vec::new()
    };
    targets.sort();
    targets.dedup();
    let plan = Plan::new(&carrying.crosswalk, &targets, |code| {
        if carrying.carried.contains(code) {
            Origin::Carried
        } else {
            Origin::Direct
        }
    });
    let target_names = plan
        .targets
        .iter()
        .map(|t| {
            reference
                .unit(t, year)
                .map_or(String::new(), |u| u.full_name())
        })
        .collect();
    let carried_codes = codes
        .keys()
        .filter(|c| carrying.carried.contains(*c))
        .count();
    VintagePlan {
        carrying,
        plan,
        target_names,
        carried_codes,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::reference::{Change, Unit, YearSpan};

    // The changes are those of the Census Bureau's list "Substantial
    // Changes to Counties and County Equivalent Entities: 1970-Present"
    // (recalled from memory, as in crosswalks/us-county-changes.csv):
    // Shannon County SD (46113) renamed Oglala Lakota County (46102) in
    // 2015; Bedford city VA (51515) absorbed by Bedford County (51019) in
    // 2013; Valdez-Cordova Census Area AK (02261) divided into Chugach
    // (02063) and Copper River (02066) in 2019.
    fn unit(code: &str, name: &str, from: u16, to: Option<u16>) -> Unit {
        Unit {
            code: code.into(),
            name: name.into(),
            description: String::new(),
            parent: Some(code[..2].into()),
            valid: YearSpan { from, to },
        }
    }

    fn change(year: u16, kind: ChangeKind, from: &str, to: &str) -> Change {
        Change {
            year,
            kind,
            from_code: from.into(),
            from_name: String::new(),
            to_code: to.into(),
            to_name: String::new(),
            note: format!("{} {year}", kind.as_str()),
            source: "test".into(),
        }
    }

    fn reference() -> Reference {
        Reference {
            label: "test".into(),
            parents: Vec::new(),
            units: vec![
                unit("01001", "Autauga County", 1970, None),
                unit("46113", "Shannon County", 1970, Some(2014)),
                unit("46102", "Oglala Lakota County", 2015, None),
                unit("51515", "Bedford city", 1970, Some(2012)),
                unit("51019", "Bedford County", 1970, None),
                unit("02261", "Valdez-Cordova Census Area", 1980, Some(2018)),
                unit("02063", "Chugach Census Area", 2019, None),
                unit("02066", "Copper River Census Area", 2019, None),
            ],
            changes: vec![
                change(2013, ChangeKind::Absorbed, "51515", "51019"),
                change(2015, ChangeKind::Renamed, "46113", "46102"),
                change(2019, ChangeKind::Split, "02261", "02063"),
                change(2019, ChangeKind::Split, "02261", "02066"),
            ],
            aliases: Vec::new(),
        }
    }

    fn codes(list: &[&str]) -> BTreeMap<String, (u64, u64)> {
        list.iter()
            .enumerate()
            .map(|(i, c)| (c.to_string(), (1, i as u64 + 2)))
            .collect()
    }

    fn row(from: &str, to: &str, weight: f64, share: f64) -> CrosswalkRow {
        CrosswalkRow {
            from_code: from.into(),
            to_code: Some(to.into()),
            weight,
            target_share: Some(share),
            basis: Basis::Area,
        }
    }

    #[test]
    fn a_renamed_county_is_carried_whole_and_a_valid_one_keeps_its_code() {
        let c = carry_codes(
            &codes(&["01001", "46113"]),
            2023,
            &reference(),
            None,
            None,
            "shipped",
        );
        let rows: Vec<(&str, Option<&str>, f64, Option<f64>)> = c
            .crosswalk
            .rows
            .iter()
            .map(|r| {
                (
                    r.from_code.as_str(),
                    r.to_code.as_deref(),
                    r.weight,
                    r.target_share,
                )
            })
            .collect();
        assert_eq!(
            rows,
            vec![
                ("01001", Some("01001"), 1.0, Some(1.0)),
                ("46113", Some("46102"), 1.0, Some(1.0)),
            ]
        );
        assert_eq!(c.carried, BTreeSet::from(["46113".to_string()]));
        assert_eq!(c.notes.len(), 1);
        assert_eq!(c.notes[0].kind, CarryKind::Carried);
        assert!(c.notes[0].detail.contains("carried one to one to 46102"));
    }

    #[test]
    fn an_absorbed_unit_adds_its_counts_but_not_a_target_share() {
        let c = carry_codes(
            &codes(&["51515"]),
            2023,
            &reference(),
            None,
            None,
            "shipped",
        );
        assert_eq!(c.crosswalk.rows.len(), 1);
        assert_eq!(c.crosswalk.rows[0].to_code.as_deref(), Some("51019"));
        // Bedford city is part of Bedford County's land, of unknown share.
        assert_eq!(c.crosswalk.rows[0].target_share, None);
    }

    #[test]
    fn a_divided_unit_without_weights_is_listed_and_gets_no_rows() {
        let c = carry_codes(
            &codes(&["02261"]),
            2023,
            &reference(),
            None,
            None,
            "shipped",
        );
        assert!(c.crosswalk.rows.is_empty());
        assert_eq!(c.unweighted.len(), 1);
        assert!(
            c.unweighted[0].1.contains("02063, 02066"),
            "{:?}",
            c.unweighted
        );
        assert_eq!(c.notes[0].kind, CarryKind::DividedWithoutWeights);
    }

    #[test]
    fn a_divided_unit_takes_the_shipped_weights_and_their_other_sources_join() {
        // Weights invented for the test; 02999 stands for another source of
        // Chugach in the shipped table, absent from the data.
        let mut shipped = Crosswalk {
            rows: vec![
                row("02261", "02063", 0.3, 0.9),
                row("02261", "02066", 0.7, 1.0),
                row("02999", "02063", 1.0, 0.1),
            ],
        };
        shipped.sort();
        let c = carry_codes(
            &codes(&["02261"]),
            2023,
            &reference(),
            None,
            Some(&shipped),
            "shipped",
        );
        assert!(c.unweighted.is_empty());
        assert_eq!(c.notes[0].kind, CarryKind::Divided);
        let from: Vec<&str> = c
            .crosswalk
            .rows
            .iter()
            .map(|r| r.from_code.as_str())
            .collect();
        assert_eq!(from, vec!["02261", "02261", "02999"]);
        assert!(
            c.carried.contains("02999"),
            "a source without data joins as carried"
        );
        // The shipped weights reach 2023 only.
        let c = carry_codes(
            &codes(&["02261"]),
            2020,
            &reference(),
            None,
            Some(&shipped),
            "shipped",
        );
        assert_eq!(c.unweighted.len(), 1);
    }

    #[test]
    fn the_users_rows_come_before_the_history() {
        let mut user = Crosswalk {
            rows: vec![
                row("46113", "46102", 1.0, 1.0),
                row("51515", "51019", 1.0, 0.05),
            ],
        };
        user.sort();
        let c = carry_codes(
            &codes(&["51515"]),
            2023,
            &reference(),
            Some(&user),
            None,
            "shipped",
        );
        assert_eq!(c.notes[0].kind, CarryKind::FromCrosswalk);
        assert_eq!(c.crosswalk.rows.len(), 1);
        assert_eq!(c.crosswalk.rows[0].target_share, Some(0.05));
        // 46113 reaches no target of the data: not added.
        assert!(!c.carried.contains("46113"));
    }

    #[test]
    fn an_unknown_code_is_noted_and_left_out() {
        let c = carry_codes(
            &codes(&["99999"]),
            2023,
            &reference(),
            None,
            None,
            "shipped",
        );
        assert!(c.crosswalk.rows.is_empty());
        assert_eq!(c.notes[0].kind, CarryKind::UnknownCode);
    }

    #[test]
    fn the_plan_to_a_vintage_counts_only_data_codes_as_carried() {
        let mut shipped = Crosswalk {
            rows: vec![
                row("02261", "02063", 0.3, 0.9),
                row("02261", "02066", 0.7, 1.0),
                row("02999", "02063", 1.0, 0.1),
            ],
        };
        shipped.sort();
        let v = plan_to_vintage(
            &codes(&["01001", "02261", "46113"]),
            2023,
            &reference(),
            None,
            Some(&shipped),
            "shipped",
            false,
        );
        // 02261 and 46113 were carried; 02999 joined without data.
        assert_eq!(v.carried_codes, 2);
        assert_eq!(v.plan.targets, vec!["01001", "02063", "02066", "46102"]);
        assert_eq!(
            v.target_names,
            vec![
                "Autauga County",
                "Chugach Census Area",
                "Copper River Census Area",
                "Oglala Lakota County"
            ]
        );
        let all = plan_to_vintage(
            &codes(&["01001"]),
            2023,
            &reference(),
            None,
            None,
            "s",
            true,
        );
        assert_eq!(all.plan.targets.len(), 5, "every unit valid in 2023");
    }
}

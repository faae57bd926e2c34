//! In-memory reference lists that names are matched against: units with
//! codes, names, descriptions, parents and the years they were valid, plus
//! the change history and alternative names. The built-in US reference and
//! a user's own list (`--reference FILE`) are both a [`Reference`].

use std::collections::BTreeMap;

/// An inclusive span of vintage years; `to == None` means still valid.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct YearSpan {
    /// First vintage year the unit exists under this name.
    pub from: u16,
    /// Last vintage year, or `None` if still valid.
    pub to: Option<u16>,
}

impl YearSpan {
    /// A span valid in every year.
    pub const ALWAYS: YearSpan = YearSpan { from: 0, to: None };

    /// True when the unit exists in `year`.
    pub fn contains(&self, year: u16) -> bool {
        self.from <= year && self.to.is_none_or(|to| year <= to)
    }
}

/// A unit that names can be matched to (a county, a state, a district of a
/// user's own list).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Unit {
    /// The code ("06037", "06", or a user's own code).
    pub code: String,
    /// The name without its description ("Los Angeles", "Doña Ana").
    pub name: String,
    /// The legal/statistical description ("County", "Parish", "city"), or
    /// empty when the name is already complete ("District of Columbia").
    pub description: String,
    /// The code of the parent unit (the state), if any.
    pub parent: Option<String>,
    /// Vintage years in which the unit exists under this name.
    pub valid: YearSpan,
}

impl Unit {
    /// Name with description, as official lists write it ("Fairfax city",
    /// "Los Angeles County", "District of Columbia").
    pub fn full_name(&self) -> String {
        if self.description.is_empty() {
            self.name.clone()
        } else {
            format!("{} {}", self.name, self.description)
        }
    }
}

/// A parent unit (a state), with the forms users write it in.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Parent {
    /// The code ("06").
    pub code: String,
    /// The name ("California").
    pub name: String,
    /// A short postal code ("CA"), if any.
    pub short: Option<String>,
    /// Other written forms ("Calif.", "Cal.").
    pub abbreviations: Vec<String>,
    /// `state`, `district` or `territory` for the US; free text otherwise.
    pub kind: String,
}

/// What happened to a unit in the change history.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum ChangeKind {
    /// The same unit took a new name and/or code.
    Renamed,
    /// The unit ceased; its territory went wholly into another.
    Absorbed,
    /// The unit ceased and was divided among several successors.
    Split,
    /// A new unit formed from part of a continuing one.
    Created,
    /// Many-to-many replacement (Connecticut 2022).
    Reorganized,
    /// A part moved between two continuing units.
    PartTransfer,
}

impl ChangeKind {
    /// The word used in the change table.
    pub fn as_str(self) -> &'static str {
        match self {
            ChangeKind::Renamed => "renamed",
            ChangeKind::Absorbed => "absorbed",
            ChangeKind::Split => "split",
            ChangeKind::Created => "created",
            ChangeKind::Reorganized => "reorganized",
            ChangeKind::PartTransfer => "part_transfer",
        }
    }
}

impl std::str::FromStr for ChangeKind {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Ok(match s {
            "renamed" => ChangeKind::Renamed,
            "absorbed" => ChangeKind::Absorbed,
            "split" => ChangeKind::Split,
            "created" => ChangeKind::Created,
            "reorganized" => ChangeKind::Reorganized,
            "part_transfer" => ChangeKind::PartTransfer,
            other => {
                return Err(format!(
                    "unknown change kind {other:?}; expected renamed, absorbed, split, created, reorganized or part_transfer"
                ))
            }
        })
    }
}

/// One row of the change history: `from` became (part of) `to` in `year`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Change {
    /// First vintage year in which the new situation holds.
    pub year: u16,
    /// What happened.
    pub kind: ChangeKind,
    /// Code before.
    pub from_code: String,
    /// Full name before.
    pub from_name: String,
    /// Code after.
    pub to_code: String,
    /// Full name after.
    pub to_name: String,
    /// Plain-words note.
    pub note: String,
    /// Where the fact comes from.
    pub source: String,
}

/// An alternative name of a coextensive unit ("Brooklyn" for Kings County).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Alias {
    /// The unit's code.
    pub code: String,
    /// The alternative name.
    pub alias: String,
    /// Where it comes from.
    pub note: String,
}

/// A complete reference: units, their parents, history and aliases.
#[derive(Debug, Clone, Default)]
pub struct Reference {
    /// Label for messages and metadata ("builtin:us-counties", a file path).
    pub label: String,
    /// Parent units, if the units have parents.
    pub parents: Vec<Parent>,
    /// Units, one per (code, name era).
    pub units: Vec<Unit>,
    /// Change history, in table order.
    pub changes: Vec<Change>,
    /// Alternative names.
    pub aliases: Vec<Alias>,
}

impl Reference {
    /// The latest vintage year any unit mentions (the default vintage).
    pub fn latest_year(&self) -> Option<u16> {
        self.units
            .iter()
            .flat_map(|u| [Some(u.valid.from), u.valid.to])
            .flatten()
            .max()
    }

    /// Units valid in `year`.
    pub fn units_in(&self, year: u16) -> impl Iterator<Item = &Unit> {
        self.units.iter().filter(move |u| u.valid.contains(year))
    }

    /// The unit with `code` valid in `year`, if any.
    pub fn unit(&self, code: &str, year: u16) -> Option<&Unit> {
        self.units
            .iter()
            .find(|u| u.code == code && u.valid.contains(year))
    }

    /// Every era of a code, oldest first.
    pub fn eras(&self, code: &str) -> Vec<&Unit> {
        let mut v: Vec<&Unit> = self.units.iter().filter(|u| u.code == code).collect();
        v.sort_by_key(|u| u.valid.from);
        v
    }

    /// Parents by code.
    pub fn parents_by_code(&self) -> BTreeMap<&str, &Parent> {
        self.parents.iter().map(|p| (p.code.as_str(), p)).collect()
    }

    /// Changes that involve `code` on either side, in year order.
    pub fn changes_of(&self, code: &str) -> Vec<&Change> {
        let mut v: Vec<&Change> = self
            .changes
            .iter()
            .filter(|c| c.from_code == code || c.to_code == code)
            .collect();
        v.sort_by(|a, b| {
            (a.year, &a.from_code, &a.to_code).cmp(&(b.year, &b.from_code, &b.to_code))
        });
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_open_span_contains_every_later_year() {
        let s = YearSpan {
            from: 2015,
            to: None,
        };
        assert!(!s.contains(2014));
        assert!(s.contains(2015));
        assert!(s.contains(2100));
        let closed = YearSpan {
            from: 1970,
            to: Some(2014),
        };
        assert!(closed.contains(2014));
        assert!(!closed.contains(2015));
    }

    #[test]
    fn independent_cities_keep_their_lowercase_description() {
        let u = Unit {
            code: "51600".into(),
            name: "Fairfax".into(),
            description: "city".into(),
            parent: Some("51".into()),
            valid: YearSpan::ALWAYS,
        };
        assert_eq!(u.full_name(), "Fairfax city");
    }
}

//! Carrying codes across vintages through the change history, and telling
//! a unit's story ("lineage") in plain words.
//!
//! Forward (an old code asked for a later vintage): renames and absorptions
//! are followed one to one; a split or reorganization divides the unit
//! among several successors, which needs weights from a crosswalk. Backward
//! (a newer code asked for an earlier vintage): a unit that was renamed maps
//! back one to one; a unit carved out of a single earlier unit lies wholly
//! in it and maps back one to one; a unit formed from several earlier ones
//! (a creation from several, a reorganization) is divided.
//!
//! Created units and part transfers leave the contributing unit in place
//! under the same code: carrying treats such codes as the same unit (common
//! practice; the boundary change is a matter for a weighted crosswalk).

use std::collections::{BTreeSet, VecDeque};

use crate::core::reference::{Change, ChangeKind, Reference, Unit};

/// Where a code lands in the asked vintage.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Carried {
    /// Valid in the asked vintage as it is.
    Same,
    /// Maps one to one onto a single code of the asked vintage.
    To {
        /// The code in the asked vintage.
        code: String,
        /// What happened, in plain words ("renamed 2015; was 02270").
        note: String,
    },
    /// Spread over several codes of the asked vintage: needs weights.
    Divided {
        /// Codes of the asked vintage that share the unit's territory.
        successors: Vec<String>,
        /// What happened, in plain words.
        note: String,
    },
    /// The code is in no vintage of the reference.
    Unknown,
}

fn ceases(kind: ChangeKind) -> bool {
    matches!(
        kind,
        ChangeKind::Renamed | ChangeKind::Absorbed | ChangeKind::Split | ChangeKind::Reorganized
    )
}

/// Carries `code` to the vintage `year` of `reference`.
pub fn carry(reference: &Reference, code: &str, year: u16) -> Carried {
    if reference.unit(code, year).is_some() {
        return Carried::Same;
    }
    let eras = reference.eras(code);
    let Some(first) = eras.first() else {
        return Carried::Unknown;
    };
    if first.valid.from > year {
        walk(reference, code, year, Direction::Backward)
    } else {
        walk(reference, code, year, Direction::Forward)
    }
}

/// Which way through the history a code is carried.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Direction {
    /// From an older code to a later vintage: follow ceasing changes.
    Forward,
    /// From a newer code to an earlier vintage: follow changes back to
    /// their origins.
    Backward,
}

/// Walks the change history from `code` until every path reaches a code
/// valid in `year`. Forward, a unit with several ways on (a split) is
/// divided; backward, a unit with several distinct origins is divided (a
/// unit carved from one earlier unit lies wholly in it).
fn walk(reference: &Reference, code: &str, year: u16, direction: Direction) -> Carried {
    let mut done = BTreeSet::new();
    let mut queue = VecDeque::from([code.to_string()]);
    let mut seen = BTreeSet::new();
    let mut steps: Vec<&Change> = Vec::new();
    let mut divided = false;
    while let Some(c) = queue.pop_front() {
        if !seen.insert(c.clone()) {
            continue;
        }
        if c != code && reference.unit(&c, year).is_some() {
            done.insert(c);
            continue;
        }
        let (next, ends): (Vec<&Change>, BTreeSet<&str>) = match direction {
            Direction::Forward => {
                let next: Vec<&Change> = reference
                    .changes
                    .iter()
                    .filter(|ch| {
                        ch.from_code == c && ch.to_code != c && ceases(ch.kind) && ch.year <= year
                    })
                    .collect();
                let ends = next.iter().map(|ch| ch.to_code.as_str()).collect();
                (next, ends)
            }
            Direction::Backward => {
                let next: Vec<&Change> = reference
                    .changes
                    .iter()
                    .filter(|ch| ch.to_code == c && ch.from_code != c && ch.year > year)
                    .filter(|ch| ch.kind != ChangeKind::PartTransfer)
                    .collect();
                let ends = next.iter().map(|ch| ch.from_code.as_str()).collect();
                (next, ends)
            }
        };
        // A code with no way on is a dead end (a rename in place was caught
        // by the unit lookup above).
        if ends.len() > 1 {
            divided = true;
        }
        for ch in next {
            steps.push(ch);
            queue.push_back(match direction {
                Direction::Forward => ch.to_code.clone(),
                Direction::Backward => ch.from_code.clone(),
            });
        }
    }
    finish(done, steps, divided, direction == Direction::Forward)
}

fn finish(
    done: BTreeSet<String>,
    mut steps: Vec<&Change>,
    divided: bool,
    forward: bool,
) -> Carried {
    if done.is_empty() {
        return Carried::Unknown;
    }
    steps.sort_by_key(|c| (c.year, c.from_code.clone(), c.to_code.clone()));
    steps.dedup();
    let note = steps
        .iter()
        .map(|c| describe(c, forward))
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect::<Vec<_>>()
        .join("; ");
    let successors: Vec<String> = done.into_iter().collect();
    if successors.len() == 1 && !divided {
        Carried::To {
            code: successors.into_iter().next().unwrap_or_default(),
            note,
        }
    } else {
        Carried::Divided { successors, note }
    }
}

/// A change in a few words, seen from the code being carried.
fn describe(c: &Change, forward: bool) -> String {
    let what = match c.kind {
        ChangeKind::Renamed => "renamed",
        ChangeKind::Absorbed => "absorbed",
        ChangeKind::Split => "split",
        ChangeKind::Created => "created",
        ChangeKind::Reorganized => "reorganized",
        ChangeKind::PartTransfer => "part transferred",
    };
    if forward {
        format!("{what} {}; was {}", c.year, c.from_code)
    } else {
        format!("{what} {}; before that part of {}", c.year, c.from_code)
    }
}

/// One line of a unit's story.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LineageEvent {
    /// Vintage year the event takes effect (or the first year of an era).
    pub year: u16,
    /// `era` for a name period, or the change kind.
    pub event: String,
    /// Code concerned.
    pub code: String,
    /// Plain-words description.
    pub text: String,
    /// Source of the fact (empty for eras from the reference list).
    pub source: String,
}

/// The story of `code`: each name era, then each change it took part in,
/// in year order. Empty when the code is unknown.
pub fn lineage(reference: &Reference, code: &str) -> Vec<LineageEvent> {
    let mut out: Vec<LineageEvent> = reference
        .eras(code)
        .into_iter()
        .map(|u: &Unit| LineageEvent {
            year: u.valid.from,
            event: "era".into(),
            code: u.code.clone(),
            text: match u.valid.to {
                Some(to) => format!(
                    "{} ({}) from {} to {}",
                    u.full_name(),
                    u.code,
                    u.valid.from,
                    to
                ),
                None => format!(
                    "{} ({}) from {} to today",
                    u.full_name(),
                    u.code,
                    u.valid.from
                ),
            },
            source: String::new(),
        })
        .collect();
    for c in reference.changes_of(code) {
        let text = match c.kind {
            ChangeKind::Renamed if c.from_code == c.to_code => {
                format!(
                    "{}: {} renamed {} (same code {})",
                    c.year, c.from_name, c.to_name, c.to_code
                )
            }
            ChangeKind::Renamed => format!(
                "{}: {} ({}) renamed {} ({})",
                c.year, c.from_name, c.from_code, c.to_name, c.to_code
            ),
            ChangeKind::Absorbed => format!(
                "{}: {} ({}) absorbed into {} ({})",
                c.year, c.from_name, c.from_code, c.to_name, c.to_code
            ),
            ChangeKind::Split => format!(
                "{}: {} ({}) split; part became {} ({})",
                c.year, c.from_name, c.from_code, c.to_name, c.to_code
            ),
            ChangeKind::Created => format!(
                "{}: {} ({}) created from part of {} ({})",
                c.year, c.to_name, c.to_code, c.from_name, c.from_code
            ),
            ChangeKind::Reorganized => format!(
                "{}: {} ({}) replaced; part went to {} ({})",
                c.year, c.from_name, c.from_code, c.to_name, c.to_code
            ),
            ChangeKind::PartTransfer => format!(
                "{}: part of {} ({}) moved to {} ({})",
                c.year, c.from_name, c.from_code, c.to_name, c.to_code
            ),
        };
        let text = if c.note.is_empty() {
            text
        } else {
            format!("{text}. {}", c.note)
        };
        out.push(LineageEvent {
            year: c.year,
            event: c.kind.as_str().into(),
            code: code.to_string(),
            text,
            source: c.source.clone(),
        });
    }
    out.sort_by(|a, b| {
        (a.year, a.event != "era", &a.text).cmp(&(b.year, b.event != "era", &b.text))
    });
    out
}

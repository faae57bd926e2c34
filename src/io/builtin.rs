//! The built-in US references, embedded in the binary from the files in
//! `reference/us/` and `crosswalks/`, and user reference files.

use std::collections::{BTreeMap, HashMap};
use std::path::Path;
use std::sync::OnceLock;

use serde::Deserialize;

use crate::core::normalize::key;
use crate::core::reference::{Alias, Change, Parent, Reference, Unit, YearSpan};
use crate::error::{Error, Location, Result};
use crate::io::table::{read_table, ReadOptions};

const STATES_CSV: &str = include_str!("../../reference/us/states.csv");
const COUNTIES_CSV: &str = include_str!("../../reference/us/counties.csv");
const ALIASES_CSV: &str = include_str!("../../reference/us/county-aliases.csv");
const CHANGES_CSV: &str = include_str!("../../crosswalks/us-county-changes.csv");

/// The built-in county change table, as shipped in `crosswalks/`.
pub const CHANGES_PATH: &str = "crosswalks/us-county-changes.csv";

#[derive(Deserialize)]
struct StateRow {
    fips: String,
    usps: String,
    name: String,
    kind: String,
    abbreviations: String,
}

#[derive(Deserialize)]
struct CountyRow {
    code: String,
    name: String,
    description: String,
    valid_from: u16,
    valid_to: Option<u16>,
}

#[derive(Deserialize)]
struct ChangeRow {
    year: u16,
    kind: String,
    from_code: String,
    from_name: String,
    to_code: String,
    to_name: String,
    note: String,
    source: String,
}

#[derive(Deserialize)]
struct AliasRow {
    code: String,
    alias: String,
    note: String,
}

fn parse<T: for<'de> Deserialize<'de>>(label: &str, text: &str) -> Result<Vec<T>> {
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let mut out = Vec::new();
    for row in reader.deserialize() {
        let row: T = row.map_err(|e| {
            let line = e.position().map_or(0, |p| p.line());
            Error::input(
                Location::file(label).at_line(line),
                format!("built-in table is malformed: {e}"),
            )
        })?;
        out.push(row);
    }
    Ok(out)
}

fn states() -> Result<Vec<Parent>> {
    let rows: Vec<StateRow> = parse("builtin:reference/us/states.csv", STATES_CSV)?;
    Ok(rows
        .into_iter()
        .map(|r| Parent {
            code: r.fips,
            name: r.name,
            short: Some(r.usps),
            abbreviations: r
                .abbreviations
                .split(';')
                .map(str::trim)
                .filter(|s| !s.is_empty())
                .map(String::from)
                .collect(),
            kind: r.kind,
        })
        .collect())
}

fn changes() -> Result<Vec<Change>> {
    let label = "builtin:crosswalks/us-county-changes.csv";
    let rows: Vec<ChangeRow> = parse(label, CHANGES_CSV)?;
    rows.into_iter()
        .enumerate()
        .map(|(i, r)| {
            let kind = r.kind.parse().map_err(|m: String| {
                Error::input(
                    Location::file(label)
                        .at_line(i as u64 + 2)
                        .in_column("kind"),
                    m,
                )
            })?;
            Ok(Change {
                year: r.year,
                kind,
                from_code: r.from_code,
                from_name: r.from_name,
                to_code: r.to_code,
                to_name: r.to_name,
                note: r.note,
                source: r.source,
            })
        })
        .collect()
}

fn build_states() -> Result<Reference> {
    let parents = states()?;
    let units = parents
        .iter()
        .map(|p| Unit {
            code: p.code.clone(),
            name: p.name.clone(),
            description: String::new(),
            parent: None,
            valid: YearSpan::ALWAYS,
        })
        .collect();
    let mut aliases = Vec::new();
    for p in &parents {
        for a in p.short.iter().chain(&p.abbreviations) {
            aliases.push(Alias {
                code: p.code.clone(),
                alias: a.clone(),
                note: "state abbreviation".into(),
            });
        }
    }
    Ok(Reference {
        label: "builtin:us-states".into(),
        parents: Vec::new(),
        units,
        changes: Vec::new(),
        aliases,
    })
}

fn build_counties() -> Result<Reference> {
    let rows: Vec<CountyRow> = parse("builtin:reference/us/counties.csv", COUNTIES_CSV)?;
    let units = rows
        .into_iter()
        .map(|r| Unit {
            parent: Some(r.code[..2.min(r.code.len())].to_string()),
            code: r.code,
            name: r.name,
            description: r.description,
            valid: YearSpan {
                from: r.valid_from,
                to: r.valid_to,
            },
        })
        .collect();
    let mut aliases: Vec<Alias> =
        parse::<AliasRow>("builtin:reference/us/county-aliases.csv", ALIASES_CSV)?
            .into_iter()
            .map(|r| Alias {
                code: r.code,
                alias: r.alias,
                note: r.note,
            })
            .collect();
    // Named composites ("New York City") are aliases of several codes.
    aliases.extend(crate::io::composites::as_aliases(
        &crate::io::composites::builtin_composites()?,
    ));
    Ok(Reference {
        label: "builtin:us-counties".into(),
        parents: states()?,
        units,
        changes: changes()?,
        aliases,
    })
}

/// The built-in US states and equivalents (DC, PR, island areas), with
/// USPS codes and common abbreviations as aliases.
pub fn us_states() -> Result<&'static Reference> {
    static CELL: OnceLock<std::result::Result<Reference, String>> = OnceLock::new();
    CELL.get_or_init(|| build_states().map_err(|e| e.to_string()))
        .as_ref()
        .map_err(|e| Error::Usage(e.clone()))
}

/// The built-in US counties and equivalents of every vintage from 1970,
/// with states as parents, the change history and alternative names.
pub fn us_counties() -> Result<&'static Reference> {
    static CELL: OnceLock<std::result::Result<Reference, String>> = OnceLock::new();
    CELL.get_or_init(|| build_counties().map_err(|e| e.to_string()))
        .as_ref()
        .map_err(|e| Error::Usage(e.clone()))
}

/// A user's own reference list: columns `code` and `name` (required),
/// `parent` (or `parent_code`), `parent_name`, `description`, `valid_from`,
/// `valid_to` (optional). Lets the same matcher serve places, districts or
/// another country's units.
///
/// A state column is read against the parents' codes and names. When every
/// parent is a US state (written as its name, USPS code or FIPS code), the
/// state column may use any of those forms, and the common abbreviations
/// ("Calif.") too.
pub fn read_reference_file(path: &Path) -> Result<Reference> {
    let table = read_table(path, ReadOptions::default())?;
    let code = table.column("code")?;
    let name = table.column("name")?;
    let optional = |names: &[&str]| names.iter().find_map(|n| table.column(n).ok());
    let parent = optional(&["parent", "parent_code"]);
    let parent_name = optional(&["parent_name"]);
    let description = optional(&["description"]);
    let from = optional(&["valid_from"]);
    let to = optional(&["valid_to"]);
    if parent_name.is_some() && parent.is_none() {
        return Err(Error::input(
            Location::file(path).at_line(1).in_column("parent_name"),
            "a parent_name column needs a parent column (the parent's code) beside it",
        ));
    }
    let year = |row: usize, col: Option<usize>| -> Result<Option<u16>> {
        let Some(c) = col else { return Ok(None) };
        let text = table.records[row][c].trim();
        if text.is_empty() {
            return Ok(None);
        }
        text.parse::<u16>()
            .map(Some)
            .map_err(|_| Error::input(table.location(row, c), format!("{text:?} is not a year")))
    };
    let mut units = Vec::with_capacity(table.len());
    // Parent code -> (name, row where it was first named).
    let mut parents: BTreeMap<String, Option<(String, usize)>> = BTreeMap::new();
    for (i, r) in table.records.iter().enumerate() {
        let c = r[code].trim();
        if c.is_empty() {
            return Err(Error::input(table.location(i, code), "empty code"));
        }
        let p = parent
            .map(|p| r[p].trim().to_string())
            .filter(|p| !p.is_empty());
        if let Some(p) = &p {
            let named = parent_name.map(|n| r[n].trim()).filter(|n| !n.is_empty());
            let slot = parents.entry(p.clone()).or_insert(None);
            match (slot.as_ref(), named) {
                (None, Some(n)) => *slot = Some((n.to_string(), i)),
                (Some((first, row)), Some(n)) if first != n => {
                    return Err(Error::input(
                        table.location(i, parent_name.expect("named")),
                        format!(
                            "parent {p:?} is named {n:?} here but {first:?} on line {}; give each parent one name",
                            table.lines[*row]
                        ),
                    ))
                }
                _ => {}
            }
        }
        units.push(Unit {
            code: c.to_string(),
            name: r[name].trim().to_string(),
            description: description.map_or(String::new(), |d| r[d].trim().to_string()),
            parent: p,
            valid: YearSpan {
                from: year(i, from)?.unwrap_or(0),
                to: year(i, to)?,
            },
        });
    }
    let parents: Vec<(String, Option<String>)> = parents
        .into_iter()
        .map(|(code, named)| (code, named.map(|(n, _)| n)))
        .collect();
    Ok(Reference {
        label: path.display().to_string(),
        parents: user_parents(&parents)?,
        units,
        changes: Vec::new(),
        aliases: Vec::new(),
    })
}

/// The parents of a user's list. When every parent (by code or name) is a
/// US state, each carries the state's name, USPS code, FIPS code and common
/// abbreviations as written forms.
fn user_parents(parents: &[(String, Option<String>)]) -> Result<Vec<Parent>> {
    let us = states()?;
    let mut forms: HashMap<String, usize> = HashMap::new();
    for (i, s) in us.iter().enumerate() {
        let fips_short = s.code.trim_start_matches('0').to_string();
        for f in [&s.code, &s.name, &fips_short]
            .into_iter()
            .chain(&s.short)
            .chain(&s.abbreviations)
        {
            forms.entry(key(f)).or_insert(i);
        }
    }
    // A named parent is a state when its name is one (and its code, if it
    // is a state form too, the same state): region numbers that happen to
    // be FIPS codes do not make a list of French regions American.
    let state_of = |code: &str, name: Option<&String>| {
        let by_code = forms.get(&key(code)).copied();
        match name {
            None => by_code,
            Some(n) => {
                let by_name = forms.get(&key(n)).copied();
                match (by_name, by_code) {
                    (Some(a), Some(b)) if a != b => None,
                    (a, _) => a,
                }
            }
        }
    };
    let found: Vec<Option<usize>> = parents
        .iter()
        .map(|(c, n)| state_of(c, n.as_ref()))
        .collect();
    let all_states = !parents.is_empty() && found.iter().all(Option::is_some);
    Ok(parents
        .iter()
        .zip(found)
        .map(|((code, name), state)| match state.filter(|_| all_states) {
            Some(i) => {
                let s = &us[i];
                let mut abbreviations = vec![
                    s.name.clone(),
                    s.code.clone(),
                    s.code.trim_start_matches('0').to_string(),
                ];
                abbreviations.extend(s.short.iter().cloned());
                abbreviations.extend(s.abbreviations.iter().cloned());
                abbreviations.retain(|a| a != code);
                Parent {
                    code: code.clone(),
                    name: name.clone().unwrap_or_else(|| s.name.clone()),
                    short: s.short.clone(),
                    abbreviations,
                    kind: s.kind.clone(),
                }
            }
            None => Parent {
                code: code.clone(),
                name: name.clone().unwrap_or_else(|| code.clone()),
                short: None,
                abbreviations: Vec::new(),
                kind: String::new(),
            },
        })
        .collect())
}

/// The shipped US county crosswalk from the 2017 to the 2023 vintage (area
/// weights, made by `regionkey overlay` from the built-in layers).
pub const COUNTY_CROSSWALK_2017_2023_PATH: &str = "crosswalks/us-counties-2017-2023.csv";

const COUNTY_CROSSWALK_2017_2023: &[u8] =
    include_bytes!("../../crosswalks/us-counties-2017-2023.csv");

/// The shipped 2017 -> 2023 county crosswalk, rows sorted.
pub fn us_county_crosswalk_2017_2023() -> Result<crate::core::crosswalk::Crosswalk> {
    let label = format!("builtin:{COUNTY_CROSSWALK_2017_2023_PATH}");
    let mut cw =
        crate::io::crosswalk_file::read_csv_bytes(Path::new(&label), COUNTY_CROSSWALK_2017_2023)?;
    cw.sort();
    Ok(cw)
}

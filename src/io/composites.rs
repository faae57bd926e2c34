//! Inputs of composites and groupings: the built-in named composites
//! (`reference/us/composites.csv`), a user's membership lists, and the
//! sizes members are weighted by (areas of the built-in county geometry,
//! or populations from a table the user gives).

use std::collections::BTreeMap;
use std::path::Path;
use std::sync::OnceLock;

use crate::core::composite::{join_codes, NamedComposite, NamedComposites, CODE_SEPARATOR};
use crate::core::fips::CountyFips;
use crate::core::reference::Alias;
use crate::error::{Error, Location, Result};
use crate::io::table::{read_table, ReadOptions, Table};

const COMPOSITES_CSV: &str = include_str!("../../reference/us/composites.csv");

/// The label of the built-in composites table in messages.
pub const COMPOSITES_PATH: &str = "builtin:reference/us/composites.csv";

/// A code as written, normalized when it reads as a county code ("1001"
/// -> 01001); other codes (a user's own) are kept as written.
pub fn county_or_plain(code: &str) -> String {
    let t = code.trim();
    t.parse::<CountyFips>()
        .map(|c| c.to_string())
        .unwrap_or_else(|_| t.to_string())
}

fn split_members(text: &str) -> Vec<String> {
    text.split(CODE_SEPARATOR)
        .map(county_or_plain)
        .filter(|c| !c.is_empty())
        .collect()
}

/// The named composites the trade uses, built in (New York City's five
/// counties), with their sources.
pub fn builtin_composites() -> Result<NamedComposites> {
    let mut reader = csv::Reader::from_reader(COMPOSITES_CSV.as_bytes());
    let mut items = Vec::new();
    for (i, row) in reader.records().enumerate() {
        let row = row.map_err(|e| {
            Error::input(
                Location::file(COMPOSITES_PATH).at_line(i as u64 + 2),
                format!("built-in table is malformed: {e}"),
            )
        })?;
        let field = |k: usize| row.get(k).unwrap_or("").trim().to_string();
        items.push(NamedComposite {
            name: field(0),
            state: Some(field(1)).filter(|s| !s.is_empty()),
            members: split_members(&field(2)),
            source: field(3),
        });
    }
    Ok(NamedComposites::new(items))
}

/// Named composites as aliases of several codes joined by `+`: the form
/// the matcher reads them in (see [`crate::core::composite::from_aliases`]).
pub fn as_aliases(named: &NamedComposites) -> Vec<Alias> {
    named
        .items()
        .iter()
        .map(|c| Alias {
            code: join_codes(&c.members),
            alias: c.name.clone(),
            note: c.source.clone(),
        })
        .collect()
}

/// One row of a membership list (unit -> group, optional share).
#[derive(Debug, Clone, PartialEq)]
pub struct MembershipRow {
    /// The unit's code as written (trimmed).
    pub unit: String,
    /// The group's code or name as written (trimmed).
    pub group: String,
    /// The share of the unit in the group, if the list has shares and the
    /// cell is not empty.
    pub share: Option<f64>,
    /// The state column's text, if the list has one.
    pub state: Option<String>,
    /// The row's line (header = 1).
    pub line: u64,
}

/// Column names of a membership list.
#[derive(Debug, Clone)]
pub struct MembershipColumns {
    /// The unit codes' column.
    pub unit: String,
    /// The groups' column.
    pub group: String,
    /// The shares' column: used when present.
    pub share: String,
}

impl Default for MembershipColumns {
    fn default() -> Self {
        MembershipColumns {
            unit: "unit".into(),
            group: "group".into(),
            share: "share".into(),
        }
    }
}

fn cell(table: &Table, row: usize, col: usize) -> String {
    table.records[row].get(col).unwrap_or("").trim().to_string()
}

/// Reads a membership list: every row with its line. An empty unit or
/// group, or a share that is not a number, is an error naming the line and
/// column.
pub fn read_membership(path: &Path, columns: &MembershipColumns) -> Result<Vec<MembershipRow>> {
    let table = read_table(path, ReadOptions::default())?;
    read_membership_table(&table, columns)
}

fn read_membership_table(table: &Table, columns: &MembershipColumns) -> Result<Vec<MembershipRow>> {
    let unit = table.column(&columns.unit)?;
    let group = table.column(&columns.group)?;
    let share = table.column(&columns.share).ok();
    let state = table.column("state").ok();
    let mut out = Vec::with_capacity(table.len());
    for row in 0..table.len() {
        let u = cell(table, row, unit);
        if u.is_empty() {
            return Err(Error::input(
                table.location(row, unit),
                "empty unit code; every row names a unit and its group",
            ));
        }
        let g = cell(table, row, group);
        if g.is_empty() {
            return Err(Error::input(
                table.location(row, group),
                format!("unit {u} has an empty group"),
            ));
        }
        let s = match share {
            Some(c) => {
                let text = cell(table, row, c);
                if text.is_empty() {
                    None
                } else {
                    let v: f64 = text
                        .parse()
                        .ok()
                        .filter(|v: &f64| v.is_finite())
                        .ok_or_else(|| {
                            Error::input(
                                table.location(row, c),
                                format!("{text:?} is not a share (a fraction such as 0.25)"),
                            )
                        })?;
                    Some(v)
                }
            }
            None => None,
        };
        out.push(MembershipRow {
            unit: u,
            group: g,
            share: s,
            state: state.map(|c| cell(table, row, c)).filter(|s| !s.is_empty()),
            line: table.lines[row],
        });
    }
    Ok(out)
}

/// A user's own composites for `match --composites FILE`: either one row
/// per composite (columns `name` and `members`, the codes joined by `+`,
/// optional `state`), or a membership list (columns `unit` and `group`, the
/// group being the composite's name, optional `state`).
pub fn read_composites_file(path: &Path) -> Result<NamedComposites> {
    let table = read_table(path, ReadOptions::default())?;
    let source = format!("{}", path.display());
    let state = table.column("state").ok();
    let mut items: Vec<NamedComposite> = Vec::new();
    if let Ok(members) = table.column("members") {
        let name = table.column("name")?;
        for row in 0..table.len() {
            let n = cell(&table, row, name);
            let m = split_members(&cell(&table, row, members));
            if n.is_empty() || m.len() < 2 {
                return Err(Error::input(
                    table.location(row, if n.is_empty() { name } else { members }),
                    "a composite needs a name and at least two member codes joined by +",
                ));
            }
            items.push(NamedComposite {
                name: n,
                state: state
                    .map(|c| cell(&table, row, c))
                    .filter(|s| !s.is_empty()),
                members: m,
                source: format!("{source}, line {}", table.lines[row]),
            });
        }
        return Ok(NamedComposites::new(items));
    }
    let rows = read_membership_table(&table, &MembershipColumns::default())?;
    let mut by_group: BTreeMap<(String, Option<String>), (Vec<String>, u64)> = BTreeMap::new();
    for r in rows {
        let e = by_group
            .entry((r.group.clone(), r.state.clone()))
            .or_insert((Vec::new(), r.line));
        e.0.push(county_or_plain(&r.unit));
    }
    for ((name, state), (members, line)) in by_group {
        items.push(NamedComposite {
            name,
            state,
            members,
            source: format!("{source}, from line {line}"),
        });
    }
    Ok(NamedComposites::new(items))
}

/// The built-in layer whose units stand for the counties of `vintage`: the
/// 2023 layer from 2022 on (Connecticut's planning regions), the 2017 layer
/// before.
pub fn builtin_layer_for(vintage: u16) -> &'static str {
    if vintage >= 2022 {
        "builtin:counties-2023"
    } else {
        "builtin:counties-2017"
    }
}

/// Areas (square metres on the WGS84 ellipsoid) of the units of a built-in
/// county layer, by code, computed once. Units the 1:10m generalization
/// collapses have area 0.
pub fn builtin_areas(layer: &str) -> Result<&'static BTreeMap<String, f64>> {
    type Cell = OnceLock<std::result::Result<BTreeMap<String, f64>, String>>;
    static L2017: Cell = OnceLock::new();
    static L2023: Cell = OnceLock::new();
    let cell = match layer {
        "builtin:counties-2017" => &L2017,
        "builtin:counties-2023" => &L2023,
        other => return Err(Error::Usage(format!("no built-in areas for {other}"))),
    };
    cell.get_or_init(|| {
        let req = crate::io::geo::LayerRequest {
            spec: layer.to_string(),
            key: None,
            object: None,
            key_option: "--layer",
            object_option: "--object",
        };
        let l = crate::io::geo::read_layer(&req).map_err(|e| e.to_string())?;
        let prepared = crate::core::overlay::prepare(&l.features, l.convention);
        Ok(prepared
            .units
            .into_iter()
            .map(|u| (u.key, u.area))
            .collect())
    })
    .as_ref()
    .map_err(|e| Error::Usage(e.clone()))
}

/// Sizes from a table: `value_column` by `code_column`, codes normalized
/// as county codes where they read as such. A value that is not a
/// non-negative number, or a code listed twice, is an error naming the
/// line and column.
pub fn read_sizes(
    path: &Path,
    code_column: &str,
    value_column: &str,
) -> Result<BTreeMap<String, f64>> {
    let table = read_table(path, ReadOptions::default())?;
    let code = table.column(code_column)?;
    let value = table.column(value_column)?;
    let mut out: BTreeMap<String, f64> = BTreeMap::new();
    let mut first: BTreeMap<String, u64> = BTreeMap::new();
    for row in 0..table.len() {
        let c = county_or_plain(&cell(&table, row, code));
        if c.is_empty() {
            return Err(Error::input(table.location(row, code), "empty code"));
        }
        let text = cell(&table, row, value);
        let v: f64 = text
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite() && *v >= 0.0)
            .ok_or_else(|| {
                Error::input(
                    table.location(row, value),
                    format!("{text:?} is not a size (a number, 0 or more)"),
                )
            })?;
        if let Some(line) = first.get(&c) {
            return Err(Error::input(
                table.location(row, code),
                format!("code {c} is listed twice (first at line {line}); keep one row"),
            ));
        }
        first.insert(c.clone(), table.lines[row]);
        out.insert(c, v);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_built_in_composites_name_new_york_citys_five_counties() {
        let c = builtin_composites().unwrap();
        let nyc = c
            .items()
            .iter()
            .find(|c| c.name == "New York City")
            .unwrap();
        assert_eq!(nyc.members, ["36005", "36047", "36061", "36081", "36085"]);
        assert!(nyc.source.starts_with("from memory"));
        assert!(c.items().iter().all(|c| !c.source.is_empty()));
    }

    #[test]
    fn a_membership_list_reads_with_lines_and_refuses_bad_shares() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("m.csv");
        std::fs::write(&p, "unit,group,share\n1001,D1,\n01003,D1,0.5\n").unwrap();
        let rows = read_membership(&p, &MembershipColumns::default()).unwrap();
        assert_eq!(rows[0].line, 2);
        assert_eq!(rows[1].share, Some(0.5));
        std::fs::write(&p, "unit,group,share\n1001,D1,half\n").unwrap();
        let e = read_membership(&p, &MembershipColumns::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 2") && e.contains("\"share\"") && e.contains("half"),
            "{e}"
        );
    }
}

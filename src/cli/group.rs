//! `regionkey group MEMBERS.csv`: from a membership list (county -> group,
//! optionally with the share of the county in the group) build a crosswalk
//! each way: counties -> groups (aggregation, with coverage) and groups ->
//! counties (allocation by area or population). Feed either to `apply
//! --crosswalk`.
//!
//! The list is checked first: a county in two groups without shares, shares
//! of a county adding up to more than one, a county twice in a group, a
//! group left with no county of the vintage. Codes of other vintages are
//! carried through the change history (renamed and absorbed one to one; a
//! divided code is an error asking for its successors).

use std::collections::BTreeMap;
use std::io::Write;
use std::path::PathBuf;

use serde_json::json;

use super::{say, warn, Global};
use crate::core::crosswalk::Basis;
use crate::core::fips::CountyFips;
use crate::core::group::{build, Grouping, Member, Problem};
use crate::core::history::{carry, Carried};
use crate::error::{Error, Location, Result};
use crate::io::builtin::us_counties;
use crate::io::composites::{
    builtin_areas, builtin_layer_for, read_membership, read_sizes, MembershipColumns, MembershipRow,
};
use crate::io::crosswalk_file::{sidecar_path, write_csv, write_sidecar, CAUTION};
use crate::io::output::{write_file, Target};

/// What a county's size is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum WeightBy {
    /// Area of the county in the built-in geometry (WGS84 ellipsoid).
    Area,
    /// Population from --population FILE.
    Population,
}

/// Arguments of `regionkey group`.
#[derive(Debug, clap::Args)]
#[command(after_help = "\
The membership list has one row per (county, group): columns unit (a county FIPS code) and
group (the group's code: no spaces, commas or quotes), and optionally share (the part of the
county in that group, 0 < share <= 1; needed for a county in several groups).

--to-groups writes counties -> groups: apply it to county data to get each group's figure;
a group's coverage is the part of the group (by area or population) whose counties reported.
--to-units writes groups -> counties: apply it to group data to spread each group's figure over
its counties by area or population. Spread figures are estimates.

Example:
  regionkey group districts.csv --to-groups county-to-district.csv --to-units district-to-county.csv
  regionkey apply county-data.csv --crosswalk county-to-district.csv --code-column fips --sum cases --output districts.csv")]
pub struct Args {
    /// The membership list (CSV or TSV).
    pub members: PathBuf,

    /// Where to write the counties -> groups crosswalk (CSV, with a .json sidecar).
    #[arg(long, value_name = "FILE")]
    pub to_groups: Option<PathBuf>,

    /// Where to write the groups -> counties crosswalk (CSV, with a .json sidecar).
    #[arg(long, value_name = "FILE")]
    pub to_units: Option<PathBuf>,

    /// Column of the county codes.
    #[arg(long, default_value = "unit", value_name = "COL")]
    pub unit_column: String,

    /// Column of the group codes.
    #[arg(long, default_value = "group", value_name = "COL")]
    pub group_column: String,

    /// Column of the shares (used when present).
    #[arg(long, default_value = "share", value_name = "COL")]
    pub share_column: String,

    /// County vintage the groups are made of; codes of other vintages are carried to it.
    #[arg(long, default_value_t = 2023, value_name = "YEAR")]
    pub vintage: u16,

    /// What weights the counties within a group.
    #[arg(long, value_enum, default_value = "area")]
    pub weight: WeightBy,

    /// Table of populations (with --weight population): columns code and population.
    #[arg(long, value_name = "FILE")]
    pub population: Option<PathBuf>,

    /// Column of --population holding the county codes.
    #[arg(long, default_value = "code", value_name = "COL")]
    pub population_code_column: String,

    /// Column of --population holding the populations.
    #[arg(long, default_value = "population", value_name = "COL")]
    pub population_column: String,
}

/// The checked configuration.
#[derive(Debug, Clone)]
pub struct Config {
    /// The membership list.
    pub members: PathBuf,
    /// Its column names.
    pub columns: MembershipColumns,
    /// Counties -> groups output.
    pub to_groups: Option<PathBuf>,
    /// Groups -> counties output.
    pub to_units: Option<PathBuf>,
    /// The county vintage.
    pub vintage: u16,
    /// Weighting: area, or population from (file, code column, value column).
    pub population: Option<(PathBuf, String, String)>,
}

/// Turns arguments into a checked configuration.
pub fn configure(args: &Args) -> Result<Config> {
    if args.to_groups.is_none() && args.to_units.is_none() {
        return Err(Error::Usage(
            "say what to write: --to-groups FILE (counties -> groups), --to-units FILE (groups -> counties), or both".into(),
        ));
    }
    for p in [&args.to_groups, &args.to_units].into_iter().flatten() {
        Target::File(p.clone()).check_writable()?;
    }
    if args.to_groups.is_some() && args.to_groups == args.to_units {
        return Err(Error::Usage(
            "--to-groups and --to-units name the same file; give each its own".into(),
        ));
    }
    if !args.members.is_file() {
        return Err(Error::io(
            &args.members,
            "cannot open membership list",
            std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
        ));
    }
    let reference = us_counties()?;
    if reference.units_in(args.vintage).next().is_none() {
        return Err(Error::Usage(format!(
            "--vintage {}: the built-in county reference covers 1970-2023",
            args.vintage
        )));
    }
    let population = match (args.weight, &args.population) {
        (WeightBy::Population, None) => {
            return Err(Error::Usage(
                "--weight population needs --population FILE (columns code and population)".into(),
            ))
        }
        (WeightBy::Area, Some(_)) => {
            return Err(Error::Usage(
                "--population is used with --weight population; add it, or drop --population"
                    .into(),
            ))
        }
        (WeightBy::Population, Some(p)) => {
            if !p.is_file() {
                return Err(Error::io(
                    p,
                    "cannot open population table",
                    std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
                ));
            }
            Some((
                p.clone(),
                args.population_code_column.clone(),
                args.population_column.clone(),
            ))
        }
        (WeightBy::Area, None) => None,
    };
    Ok(Config {
        members: args.members.clone(),
        columns: MembershipColumns {
            unit: args.unit_column.clone(),
            group: args.group_column.clone(),
            share: args.share_column.clone(),
        },
        to_groups: args.to_groups.clone(),
        to_units: args.to_units.clone(),
        vintage: args.vintage,
        population,
    })
}

/// A code carried through the change history, or left out.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Note {
    /// The code as written.
    pub code: String,
    /// Its line.
    pub line: u64,
    /// What happened.
    pub detail: String,
}

/// What `group` found and built.
#[derive(Debug, Clone)]
pub struct Report {
    /// Rows of the list.
    pub rows: usize,
    /// The crosswalks and group summaries.
    pub grouping: Grouping,
    /// Codes carried to the vintage.
    pub carried: Vec<Note>,
    /// Rows left out: codes that are no county of any vintage.
    pub left_out: Vec<Note>,
    /// The basis of the weights.
    pub basis: Basis,
}

fn location(config: &Config, line: u64, column: &str) -> Location {
    Location::file(&config.members)
        .at_line(line)
        .in_column(column)
}

/// Reads and checks the list, carries codes, and builds both crosswalks.
pub fn execute(config: &Config) -> Result<Report> {
    let rows = read_membership(&config.members, &config.columns)?;
    let reference = us_counties()?;
    let mut members: Vec<Member> = Vec::with_capacity(rows.len());
    let mut carried = Vec::new();
    let mut left_out = Vec::new();
    let mut groups_seen: BTreeMap<String, u64> = BTreeMap::new();
    for MembershipRow {
        unit,
        group,
        share,
        line,
        ..
    } in &rows
    {
        if group
            .chars()
            .any(|c| c.is_whitespace() || c == ',' || c == '"' || c.is_control())
        {
            return Err(Error::input(
                location(config, *line, &config.columns.group),
                format!("group {group:?} holds a space, comma or quote; crosswalk codes cannot (write it as a code, e.g. {:?})", group.split_whitespace().collect::<Vec<_>>().join("_").replace([',', '"'], "")),
            ));
        }
        groups_seen.entry(group.clone()).or_insert(*line);
        let code: CountyFips = unit.parse().map_err(|e| {
            Error::input(
                location(config, *line, &config.columns.unit),
                format!("{e}; the unit column holds county FIPS codes"),
            )
        })?;
        let code = code.to_string();
        let code = match carry(reference, &code, config.vintage) {
            Carried::Same => code,
            Carried::To { code: to, note } => {
                carried.push(Note {
                    code: unit.clone(),
                    line: *line,
                    detail: format!("carried to {to} ({note})"),
                });
                to
            }
            Carried::Divided { successors, note } => {
                return Err(Error::input(
                    location(config, *line, &config.columns.unit),
                    format!(
                        "county {code} was divided before {} ({note}) among {}; list the successors that belong to group {group} instead (with shares where they are split)",
                        config.vintage,
                        successors.join(", ")
                    ),
                ))
            }
            Carried::Unknown => {
                left_out.push(Note {
                    code: unit.clone(),
                    line: *line,
                    detail: "not a county of any vintage in the built-in reference; row left out"
                        .into(),
                });
                continue;
            }
        };
        members.push(Member {
            unit: code,
            group: group.clone(),
            share: *share,
            line: *line,
        });
    }
    for (group, line) in &groups_seen {
        if !members.iter().any(|m| m.group == *group) {
            return Err(Error::input(
                location(config, *line, &config.columns.group),
                format!("group {group} has no member that is a county of the built-in reference"),
            ));
        }
    }
    let (sizes, basis): (BTreeMap<String, f64>, Basis) = match &config.population {
        None => (
            builtin_areas(builtin_layer_for(config.vintage))?.clone(),
            Basis::Area,
        ),
        Some((path, code, value)) => (read_sizes(path, code, value)?, Basis::Population),
    };
    let grouping = build(
        &members,
        |u| sizes.get(u).copied().filter(|s| *s > 0.0),
        basis,
    )
    .map_err(|problems| problem_error(config, &problems, basis))?;
    Ok(Report {
        rows: rows.len(),
        grouping,
        carried,
        left_out,
        basis,
    })
}

fn problem_error(config: &Config, problems: &[Problem], basis: Basis) -> Error {
    let first = &problems[0];
    let column = match first {
        Problem::BadShare { .. } | Problem::SharesAboveOne { .. } => &config.columns.share,
        Problem::GroupWithoutSize { .. } => &config.columns.group,
        _ => &config.columns.unit,
    };
    let mut message = first.message();
    if matches!(first, Problem::NoSize { .. }) && basis == Basis::Area {
        message.push_str("; at 1:10m the smallest independent cities have no area: weight by population (--weight population --population FILE)");
    }
    if problems.len() > 1 {
        message.push_str(&format!(
            " ({} more problem(s): {})",
            problems.len() - 1,
            problems[1..]
                .iter()
                .take(5)
                .map(|p| match p.line() {
                    Some(l) => format!("line {l}: {}", p.message()),
                    None => p.message(),
                })
                .collect::<Vec<_>>()
                .join("; ")
        ));
    }
    let loc = match first.line() {
        Some(l) => location(config, l, column),
        None => Location::file(&config.members).in_column(column),
    };
    Error::input(loc, message)
}

fn sidecar(config: &Config, report: &Report, direction: &str) -> Result<serde_json::Value> {
    let sha = crate::io::data::sha256_file(&config.members)?;
    let notes = |v: &[Note]| -> Vec<serde_json::Value> {
        v.iter()
            .map(|n| json!({"code": n.code, "line": n.line, "detail": n.detail}))
            .collect()
    };
    Ok(json!({
        "tool": format!("regionkey {}", env!("CARGO_PKG_VERSION")),
        "command": "group",
        "direction": direction,
        "membership": {
            "path": config.members.display().to_string(),
            "sha256": sha,
            "rows": report.rows,
        },
        "vintage": config.vintage,
        "weight": match &config.population {
            None => json!({"basis": "area", "geometry": builtin_layer_for(config.vintage), "area": "WGS84 ellipsoid, edges straight in longitude/latitude"}),
            Some((p, code, value)) => json!({"basis": "population", "path": p.display().to_string(), "code_column": code, "population_column": value}),
        },
        "groups": report.grouping.groups.iter().map(|g| json!({
            "group": g.group, "members": g.members, "partial_members": g.partial,
        })).collect::<Vec<_>>(),
        "carried": notes(&report.carried),
        "left_out": notes(&report.left_out),
        "columns": {
            "from_code": if direction == "units-to-groups" { "county code" } else { "group code" },
            "to_code": if direction == "units-to-groups" { "group code; empty for the part of the county in no group" } else { "county code" },
            "weight": "share of the source in the target",
            "target_share": "share of the target made of this piece (by the basis)",
            "basis": "area or population",
        },
        "caution": CAUTION,
    }))
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = configure(&args)?;
    let report = execute(&config)?;
    for (path, cw, direction) in [
        (
            &config.to_groups,
            &report.grouping.to_groups,
            "units-to-groups",
        ),
        (
            &config.to_units,
            &report.grouping.to_units,
            "groups-to-units",
        ),
    ] {
        let Some(path) = path else { continue };
        write_file(path, |w: &mut dyn Write| write_csv(w, cw))?;
        let meta = sidecar(&config, &report, direction)?;
        write_file(&sidecar_path(path), |w| write_sidecar(w, &meta))?;
    }
    for n in &report.left_out {
        warn(format!(
            "{}: line {}: {} {}",
            config.members.display(),
            n.line,
            n.code,
            n.detail
        ));
    }
    let g = &report.grouping;
    let units: std::collections::BTreeSet<&str> = g
        .to_groups
        .rows
        .iter()
        .map(|r| r.from_code.as_str())
        .collect();
    say(
        global,
        format!(
            "regionkey group: {} rows, {} groups of {} counties (vintage {}), weighted by {}",
            report.rows,
            g.groups.len(),
            units.len(),
            config.vintage,
            report.basis.as_str()
        ),
    );
    let partial: usize = g.groups.iter().map(|x| x.partial).sum();
    if partial > 0 {
        say(
            global,
            format!("  {partial} county pieces lie only partly in their group (shares)"),
        );
    }
    if !report.carried.is_empty() {
        say(
            global,
            format!(
                "  {} code(s) of other vintages carried: {}",
                report.carried.len(),
                report
                    .carried
                    .iter()
                    .map(|n| format!("{} {}", n.code, n.detail))
                    .collect::<Vec<_>>()
                    .join("; ")
            ),
        );
    }
    if !report.left_out.is_empty() {
        say(
            global,
            format!(
                "  {} row(s) left out (not counties of any vintage)",
                report.left_out.len()
            ),
        );
    }
    for p in [&config.to_groups, &config.to_units].into_iter().flatten() {
        say(global, format!("  wrote {}", p.display()));
    }
    say(
        global,
        "  groups -> counties figures are estimates (spread evenly by the basis within each group)",
    );
    Ok(())
}

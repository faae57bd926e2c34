//! `regionkey map DATA`: a picture of what joined and what did not. Each
//! unit of a boundary layer is coloured by whether the table has a row for
//! it and, with `--coverage-column`, how much of it the data covers; the
//! notes list codes of the table that are not on the layer.

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use super::{say, Global};
use crate::core::fips::CountyFips;
use crate::core::overlay::prepare;
use crate::error::{Error, Result};
use crate::io::builtin::us_counties;
use crate::io::geo::{read_layer, LayerRequest};
use crate::io::output::{write_to, Target};
use crate::io::svg::{write_map, Class, Layout, Shape};
use crate::io::table::{read_table, ReadOptions};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The table (CSV, TSV or Parquet), e.g. the output of `match` or `apply`.
    pub data: PathBuf,
    /// Column holding the unit code.
    #[arg(long, default_value = "code", value_name = "COL")]
    pub code_column: String,
    /// Column holding a coverage share (0..1), e.g. `visits_coverage` from `apply`;
    /// a unit is coloured by its lowest coverage over its rows.
    #[arg(long, value_name = "COL")]
    pub coverage_column: Option<String>,
    /// Boundary layer: `builtin:counties-2023`, `builtin:counties-2017`, or a
    /// GeoJSON, TopoJSON or Shapefile.
    #[arg(long, default_value = "builtin:counties-2023", value_name = "LAYER")]
    pub layer: String,
    /// Key field of a layer file (default: the feature id).
    #[arg(long, value_name = "FIELD")]
    pub key: Option<String>,
    /// TopoJSON object of a layer file.
    #[arg(long, value_name = "NAME")]
    pub object: Option<String>,
    /// Draw only the states (first two digits of the codes) that have a row
    /// in the table (built-in US layers).
    #[arg(long = "states-in-data")]
    pub states_in_data_only: bool,
    /// Title written on the map.
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
    /// Where to write the SVG (`-` for standard output).
    #[arg(long, short, value_name = "FILE")]
    pub output: String,
}

/// How a unit stands.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Standing {
    Full,
    Partial,
    NoValue,
    Joined,
    Absent,
}

/// What the map found, for summaries.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct MapCounts {
    /// Units of the layer with at least one row.
    pub joined: usize,
    /// Units of the layer with no row.
    pub absent: usize,
    /// Units whose lowest coverage is below 1 (with a coverage column).
    pub partly_covered: usize,
    /// Codes of the table that are not on the layer.
    pub off_layer: Vec<String>,
    /// Rows with an empty code.
    pub rows_without_code: usize,
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let counts = draw(&args)?;
    say(
        global,
        format!(
            "map: {} units joined, {} with no row{}; {} codes of the table not on the layer; {} rows without a code; written to {}",
            counts.joined,
            counts.absent,
            if args.coverage_column.is_some() {
                format!(", {} partly covered", counts.partly_covered)
            } else {
                String::new()
            },
            counts.off_layer.len(),
            counts.rows_without_code,
            args.output
        ),
    );
    Ok(())
}

/// Draws the map and returns what it found.
pub fn draw(args: &Args) -> Result<MapCounts> {
    let target = Target::parse(&args.output);
    target.check_writable()?;
    let table = read_table(&args.data, ReadOptions::default())?;
    let code_col = table.column(&args.code_column)?;
    let coverage_col = args
        .coverage_column
        .as_deref()
        .map(|c| table.column(c))
        .transpose()?;
    let builtin = args.layer.starts_with("builtin:");

    // Lowest coverage per code (None: no coverage column or empty value).
    let mut rows: BTreeMap<String, Option<f64>> = BTreeMap::new();
    let mut counts = MapCounts::default();
    for (i, r) in table.records.iter().enumerate() {
        let raw = r[code_col].trim();
        if raw.is_empty() {
            counts.rows_without_code += 1;
            continue;
        }
        let code = match (builtin, raw.parse::<CountyFips>()) {
            (true, Ok(c)) => c.to_string(),
            _ => raw.to_string(),
        };
        let coverage = match coverage_col {
            Some(c) => {
                let t = r[c].trim();
                if t.is_empty() {
                    Some(0.0)
                } else {
                    Some(t.parse::<f64>().map_err(|_| {
                        Error::input(
                            table.location(i, c),
                            format!("{t:?} is not a coverage share"),
                        )
                    })?)
                }
            }
            None => None,
        };
        let slot = rows.entry(code).or_insert(coverage);
        if let (Some(old), Some(new)) = (*slot, coverage) {
            *slot = Some(old.min(new));
        }
    }

    let layer = read_layer(&LayerRequest {
        spec: args.layer.clone(),
        key: args.key.clone(),
        object: args.object.clone(),
        key_option: "--key",
        object_option: "--object",
    })?;
    for note in layer.notes(crate::io::geo::RepeatedKeys::Merge, None)? {
        super::warn(note);
    }
    let prepared = prepare(&layer.features, layer.convention);
    let on_layer: BTreeSet<&str> = prepared.units.iter().map(|u| u.key.as_str()).collect();
    counts.off_layer = rows
        .keys()
        .filter(|c| !on_layer.contains(c.as_str()))
        .cloned()
        .collect();

    let names: BTreeMap<&str, String> = if builtin {
        let year = if args.layer.ends_with("2017") {
            2017
        } else {
            2023
        };
        us_counties()?
            .units_in(year)
            .map(|u| (u.code.as_str(), u.full_name()))
            .collect()
    } else {
        BTreeMap::new()
    };
    let classes_for = |s: Standing| -> usize {
        match s {
            Standing::Full | Standing::Joined => 0,
            Standing::Partial => 1,
            Standing::NoValue => 2,
            Standing::Absent => 3,
        }
    };
    let states: BTreeSet<&str> = rows.keys().filter_map(|c| c.get(..2)).collect();
    let mut shapes = Vec::with_capacity(prepared.units.len());
    for u in &prepared.units {
        if args.states_in_data_only && builtin && !states.contains(u.key.get(..2).unwrap_or("")) {
            continue;
        }
        let standing = match rows.get(&u.key) {
            None => Standing::Absent,
            Some(None) => Standing::Joined,
            Some(Some(c)) if *c >= 1.0 - 1e-9 => Standing::Full,
            Some(Some(c)) if *c > 0.0 => Standing::Partial,
            Some(Some(_)) => Standing::NoValue,
        };
        match standing {
            Standing::Absent => counts.absent += 1,
            Standing::Partial | Standing::NoValue => {
                counts.joined += 1;
                counts.partly_covered += 1
            }
            _ => counts.joined += 1,
        }
        let what = match standing {
            Standing::Full => "full coverage".to_string(),
            Standing::Partial => format!(
                "partial coverage (lowest {:.3})",
                rows[&u.key].unwrap_or(0.0)
            ),
            Standing::NoValue => "no known value in some row".to_string(),
            Standing::Joined => "joined".to_string(),
            Standing::Absent => "no row in the table".to_string(),
        };
        let name = names
            .get(u.key.as_str())
            .map(|n| format!(" {n}"))
            .unwrap_or_default();
        shapes.push(Shape {
            code: u.key.clone(),
            title: format!("{}{}: {}", u.key, name, what),
            class: classes_for(standing),
            geometry: &u.geometry,
        });
    }
    let classes = if args.coverage_column.is_some() {
        vec![
            Class {
                label: "joined, full coverage".into(),
                color: "#1b7837".into(),
            },
            Class {
                label: "joined, partial coverage".into(),
                color: "#f1a340".into(),
            },
            Class {
                label: "joined, no known value in some row".into(),
                color: "#b2182b".into(),
            },
            Class {
                label: "no row in the table".into(),
                color: "#d9d9d9".into(),
            },
        ]
    } else {
        vec![
            Class {
                label: "joined".into(),
                color: "#1b7837".into(),
            },
            Class {
                label: "(unused)".into(),
                color: "#f1a340".into(),
            },
            Class {
                label: "(unused)".into(),
                color: "#b2182b".into(),
            },
            Class {
                label: "no row in the table".into(),
                color: "#d9d9d9".into(),
            },
        ]
    };
    let classes: Vec<Class> = classes
        .into_iter()
        .filter(|c| c.label != "(unused)")
        .collect();
    if args.coverage_column.is_none() {
        for s in shapes.iter_mut() {
            if s.class == 3 {
                s.class = 1;
            }
        }
    }
    let mut notes = Vec::new();
    if !counts.off_layer.is_empty() {
        let shown: Vec<&str> = counts
            .off_layer
            .iter()
            .take(12)
            .map(String::as_str)
            .collect();
        notes.push(format!(
            "{} codes of the table are not on this layer: {}{}",
            counts.off_layer.len(),
            shown.join(", "),
            if counts.off_layer.len() > shown.len() {
                ", ..."
            } else {
                ""
            }
        ));
    }
    if counts.rows_without_code > 0 {
        notes.push(format!(
            "{} rows have no code (review or unmatched) and cannot be drawn",
            counts.rows_without_code
        ));
    }
    notes.push(format!(
        "Layer: {}. Source: {}",
        args.layer,
        table.path.display()
    ));
    let title = args
        .title
        .clone()
        .unwrap_or_else(|| format!("What joined: {}", table.path.display()));
    let layout = if builtin {
        Layout::UsInsets
    } else {
        Layout::Plain
    };
    write_to(&target, |w| {
        write_map(w, &shapes, &classes, layout, &title, &notes)
    })?;
    Ok(counts)
}

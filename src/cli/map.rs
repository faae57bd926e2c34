//! `regionkey map DATA`: a picture of what joined, how fully, and (with
//! `--value-column`) the values themselves. Missing is drawn as missing:
//! a unit with no row, a row with no value, and a period with no report are
//! never coloured like a low value or like full coverage. One period
//! (`--period P`), small multiples of several (`--period A,B`), or, with a
//! period column and no `--period`, the worst case over all periods, said
//! in the legend. The legend's counts are the summary's. `--png FILE`
//! renders the same picture as a PNG.

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use super::{say, Global};
use crate::core::audit::sort_periods;
use crate::core::classify::{classify, Classes, Classing};
use crate::core::fips::CountyFips;
use crate::core::overlay::{prepare, PreparedLayer};
use crate::error::{Error, Result};
use crate::io::builtin::us_counties;
use crate::io::geo::{read_layer, LayerRequest};
use crate::io::output::{fixed, write_file, write_to, Target};
use crate::io::svg::{class_counts, write_map, Class, Layout, MapSpec, Panel, Shape};
use crate::io::table::{read_table, ReadOptions};

/// How values are put into classes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum ClassMethod {
    /// About equally many units per class.
    #[default]
    Quantiles,
    /// Classes of equal width between the smallest and largest value.
    Equal,
}

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The table (CSV, TSV or Parquet), e.g. the output of `match` or `apply`.
    pub data: PathBuf,
    /// Column holding the unit code.
    #[arg(long, default_value = "code", value_name = "COL")]
    pub code_column: String,
    /// Column holding a coverage share (0..1), e.g. `visits_coverage` from
    /// `apply`. Without `--value-column` units are coloured by coverage;
    /// with it, estimates below `--low-coverage` are marked with dots.
    #[arg(long, value_name = "COL")]
    pub coverage_column: Option<String>,
    /// Column of values to draw in classes (a value map).
    #[arg(long, value_name = "COL")]
    pub value_column: Option<String>,
    /// How values are classed.
    #[arg(long, value_enum, default_value = "quantiles")]
    pub classes: ClassMethod,
    /// Number of classes (2 to 9).
    #[arg(long, default_value_t = 5, value_name = "K")]
    pub class_count: usize,
    /// Class breaks of your own, increasing (`10,20,50`: four classes, the
    /// upper bound of each class included in it); overrides --classes.
    #[arg(long, value_name = "B1,B2,...", value_delimiter = ',')]
    pub breaks: Vec<f64>,
    /// Estimates whose coverage is below this share are marked with dots.
    #[arg(long, default_value_t = 0.9, value_name = "SHARE")]
    pub low_coverage: f64,
    /// Column holding the period (year).
    #[arg(long, value_name = "COL")]
    pub period_column: Option<String>,
    /// Period(s) to draw: one map, or small multiples of several (`2012,2023`).
    /// Without it and with --period-column, units show their worst case over all periods.
    #[arg(
        long,
        value_name = "P",
        value_delimiter = ',',
        requires = "period_column"
    )]
    pub period: Vec<String>,
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
    /// Label the N largest units drawn.
    #[arg(long, default_value_t = 0, value_name = "N")]
    pub label_largest: usize,
    /// Label these units (codes, comma-separated).
    #[arg(long, value_name = "CODES", value_delimiter = ',')]
    pub label: Vec<String>,
    /// Title written on the map.
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
    /// Source line written under the legend (default: the table and the layer).
    #[arg(long, value_name = "TEXT")]
    pub source: Option<String>,
    /// Also render the map as a PNG here.
    #[arg(long, value_name = "FILE")]
    pub png: Option<PathBuf>,
    /// Where to write the SVG (`-` for standard output).
    #[arg(long, short, value_name = "FILE")]
    pub output: String,
}

impl Default for Args {
    /// The command line's defaults (for callers that build `Args` in code).
    fn default() -> Args {
        Args {
            data: PathBuf::new(),
            code_column: "code".into(),
            coverage_column: None,
            value_column: None,
            classes: ClassMethod::Quantiles,
            class_count: 5,
            breaks: Vec::new(),
            low_coverage: 0.9,
            period_column: None,
            period: Vec::new(),
            layer: "builtin:counties-2023".into(),
            key: None,
            object: None,
            states_in_data_only: false,
            label_largest: 0,
            label: Vec::new(),
            title: None,
            source: None,
            png: None,
            output: String::new(),
        }
    }
}

/// What the map found, for summaries: the legend's classes and counts.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct MapCounts {
    /// Panel headings (one empty heading for a single map).
    pub panels: Vec<String>,
    /// Legend entries: label and count per panel.
    pub classes: Vec<(String, Vec<usize>)>,
    /// Units marked as low-coverage estimates, per panel.
    pub marked: Vec<usize>,
    /// Codes of the table that are not on the layer.
    pub off_layer: Vec<String>,
    /// Rows with an empty code.
    pub rows_without_code: usize,
    /// Rows of periods not drawn.
    pub rows_of_other_periods: usize,
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let counts = draw(&args)?;
    let mut s = format!("map: written to {}", args.output);
    if let Some(png) = &args.png {
        s.push_str(&format!(" and {}", png.display()));
    }
    for (k, panel) in counts.panels.iter().enumerate() {
        let parts: Vec<String> = counts
            .classes
            .iter()
            .map(|(label, n)| format!("{} {label}", n[k]))
            .collect();
        let head = if panel.is_empty() {
            String::new()
        } else {
            format!("{panel}: ")
        };
        s.push_str(&format!("\n  {head}{}", parts.join("; ")));
        if args.value_column.is_some() && args.coverage_column.is_some() {
            s.push_str(&format!(
                "; {} estimates with coverage below {}",
                counts.marked[k], args.low_coverage
            ));
        }
    }
    s.push_str(&format!(
        "\n  {} codes of the table not on the layer; {} rows without a code",
        counts.off_layer.len(),
        counts.rows_without_code
    ));
    if counts.rows_of_other_periods > 0 {
        s.push_str(&format!(
            "; {} rows of other periods not drawn",
            counts.rows_of_other_periods
        ));
    }
    say(global, s);
    Ok(())
}

/// How a unit's rows stand on coverage.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Standing {
    Full,
    Partial,
    SomeMissing,
    NoValue,
}

/// What one unit has in one panel.
#[derive(Debug, Clone, Default)]
struct UnitRows {
    /// Coverage of each row (an empty cell is 0) and of each period with no row.
    coverage: Vec<f64>,
    /// Values of the rows (`None`: empty or a missing-value word).
    values: Vec<(u64, Option<f64>)>,
}

fn is_missing_word(t: &str) -> bool {
    let l = t.trim().to_ascii_lowercase();
    matches!(
        l.as_str(),
        "" | "na" | "n/a" | "nan" | "null" | "none" | "." | "-"
    )
}

/// Colours of a sequential scale: matplotlib's viridis (values at 0, 0.1,
/// ..., 1 as matplotlib 3.9.2 gives them), light for low values, dark for
/// high. Viridis was designed to be read by people with the common
/// colour-vision deficiencies and in grey (van der Walt and Smith, 2015).
const VIRIDIS: [[u8; 3]; 11] = [
    [0x44, 0x01, 0x54],
    [0x48, 0x24, 0x75],
    [0x41, 0x44, 0x87],
    [0x35, 0x5f, 0x8d],
    [0x2a, 0x78, 0x8e],
    [0x21, 0x91, 0x8c],
    [0x22, 0xa8, 0x84],
    [0x44, 0xbf, 0x70],
    [0x7a, 0xd1, 0x51],
    [0xbd, 0xdf, 0x26],
    [0xfd, 0xe7, 0x25],
];

/// `k` colours from light (low) to dark (high), evenly spaced on viridis
/// (interpolated in RGB between its tabulated values).
pub fn sequential(k: usize) -> Vec<String> {
    (0..k)
        .map(|i| {
            let t = if k == 1 {
                0.5
            } else {
                1.0 - i as f64 / (k - 1) as f64
            };
            let x = t * 10.0;
            let lo = (x.floor() as usize).min(9);
            let f = x - lo as f64;
            let c: Vec<u8> = (0..3)
                .map(|j| {
                    let a = VIRIDIS[lo][j] as f64;
                    let b = VIRIDIS[lo + 1][j] as f64;
                    (a + (b - a) * f).round() as u8
                })
                .collect();
            format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
        })
        .collect()
}

// Okabe and Ito's palette ("Color Universal Design", 2008): distinct under
// the common colour-vision deficiencies.
const BLUE: &str = "#0072b2";
const SKY: &str = "#56b4e9";
const ORANGE: &str = "#e69f00";
const VERMILLION: &str = "#d55e00";
const NO_ROW: &str = "#d9d9d9";
const MISSING_HATCH: &str = "#8c8c8c";

fn number(v: f64) -> String {
    let a = v.abs();
    let d = if a >= 1000.0 || v == v.trunc() {
        0
    } else if a >= 10.0 {
        1
    } else if a >= 1.0 {
        2
    } else {
        3
    };
    fixed(v, d)
}

/// Draws the map and returns what it found.
pub fn draw(args: &Args) -> Result<MapCounts> {
    let target = Target::parse(&args.output);
    target.check_writable()?;
    if let Some(p) = &args.png {
        Target::File(p.clone()).check_writable()?;
    }
    if !(2..=9).contains(&args.class_count) && args.breaks.is_empty() {
        return Err(Error::Usage(format!(
            "--class-count {}: use 2 to 9 classes",
            args.class_count
        )));
    }
    let classing = if !args.breaks.is_empty() {
        if args.breaks.len() > 8 {
            return Err(Error::Usage(
                "--breaks: at most 8 breaks (9 classes)".into(),
            ));
        }
        Classing::Breaks(args.breaks.clone())
    } else {
        match args.classes {
            ClassMethod::Quantiles => Classing::Quantiles(args.class_count),
            ClassMethod::Equal => Classing::EqualIntervals(args.class_count),
        }
    };
    let table = read_table(&args.data, ReadOptions::default())?;
    let code_col = table.column(&args.code_column)?;
    let column = |c: &Option<String>| c.as_deref().map(|c| table.column(c)).transpose();
    let coverage_col = column(&args.coverage_column)?;
    let value_col = column(&args.value_column)?;
    let period_col = column(&args.period_column)?;
    let builtin = args.layer.starts_with("builtin:");

    // Which periods make which panel.
    let mut table_periods: Vec<String> = period_col
        .map(|p| {
            table
                .records
                .iter()
                .map(|r| r[p].trim().to_string())
                .collect::<BTreeSet<_>>()
                .into_iter()
                .collect()
        })
        .unwrap_or_default();
    sort_periods(&mut table_periods);
    for p in &args.period {
        if !table_periods.iter().any(|t| t == p.trim()) {
            return Err(Error::Usage(format!(
                "--period {p}: no row of {} has it in column {:?}; its periods are {}",
                table.path.display(),
                args.period_column.as_deref().unwrap_or(""),
                table_periods.join(", ")
            )));
        }
    }
    let worst_case = period_col.is_some() && args.period.is_empty() && table_periods.len() > 1;
    let panels: Vec<String> = if args.period.is_empty() {
        vec![String::new()]
    } else {
        args.period.iter().map(|p| p.trim().to_string()).collect()
    };
    if worst_case && value_col.is_some() {
        return Err(Error::Usage(format!(
            "the table has {} periods in column {:?}: a value map draws one period per map; give --period (one, or several for small multiples)",
            table_periods.len(),
            args.period_column.as_deref().unwrap_or("")
        )));
    }

    let mut counts = MapCounts {
        panels: panels.clone(),
        ..MapCounts::default()
    };
    // panel -> code -> rows; and code -> periods seen (for worst case).
    let mut rows: Vec<BTreeMap<String, UnitRows>> = vec![BTreeMap::new(); panels.len()];
    let mut periods_of: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    let mut codes_in_table: BTreeSet<String> = BTreeSet::new();
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
        codes_in_table.insert(code.clone());
        let period = period_col.map_or(String::new(), |p| r[p].trim().to_string());
        let panel = if args.period.is_empty() {
            0
        } else {
            match panels.iter().position(|p| *p == period) {
                Some(k) => k,
                None => {
                    counts.rows_of_other_periods += 1;
                    continue;
                }
            }
        };
        let coverage = match coverage_col {
            Some(c) => {
                let t = r[c].trim();
                if is_missing_word(t) {
                    Some(0.0)
                } else {
                    match t.parse::<f64>() {
                        Ok(v) if (0.0..=1.0 + 1e-9).contains(&v) => Some(v),
                        _ => {
                            return Err(Error::input(
                                table.location(i, c),
                                format!("{t:?} is not a coverage share (0 to 1)"),
                            ))
                        }
                    }
                }
            }
            None => None,
        };
        let value = match value_col {
            Some(c) => {
                let t = r[c].trim();
                if is_missing_word(t) {
                    None
                } else {
                    Some(t.parse::<f64>().ok().filter(|v| v.is_finite()).ok_or_else(|| {
                        Error::input(
                            table.location(i, c),
                            format!("{t:?} is not a number (an empty cell or NA is a missing value)"),
                        )
                    })?)
                }
            }
            None => None,
        };
        let slot = rows[panel].entry(code.clone()).or_default();
        slot.coverage.extend(coverage);
        slot.values.push((table.lines[i], value));
        periods_of.entry(code).or_default().insert(period);
    }
    // Worst case: a period with no row counts as a period with no value.
    if worst_case && coverage_col.is_some() {
        for (code, u) in rows[0].iter_mut() {
            let seen = periods_of.get(code).map_or(0, BTreeSet::len);
            for _ in seen..table_periods.len() {
                u.coverage.push(0.0);
            }
        }
    }

    let layer = read_layer(&LayerRequest {
        spec: args.layer.clone(),
        key: args.key.clone(),
        object: args.object.clone(),
        key_option: "--key",
        object_option: "--object",
    })?;
    let prepared = prepare(&layer.features, layer.convention);
    let on_layer: BTreeSet<&str> = prepared.units.iter().map(|u| u.key.as_str()).collect();
    counts.off_layer = codes_in_table
        .iter()
        .filter(|c| !on_layer.contains(c.as_str()))
        .cloned()
        .collect();

    let reference = if builtin { Some(us_counties()?) } else { None };
    let year = if args.layer.ends_with("2017") {
        2017
    } else {
        2023
    };
    let names: BTreeMap<&str, (String, String)> = reference
        .map(|r| {
            r.units_in(year)
                .map(|u| (u.code.as_str(), (u.full_name(), u.name.clone())))
                .collect()
        })
        .unwrap_or_default();
    let states: BTreeSet<&str> = codes_in_table.iter().filter_map(|c| c.get(..2)).collect();
    let drawn: Vec<&crate::core::overlay::Unit> = prepared
        .units
        .iter()
        .filter(|u| {
            !(args.states_in_data_only && builtin && !states.contains(u.key.get(..2).unwrap_or("")))
        })
        .collect();

    // Classes and each unit's class per panel.
    let mut value_classes: Option<Classes> = None;
    let (classes, mark_label) = if value_col.is_some() {
        for (k, panel) in rows.iter().enumerate() {
            for (code, u) in panel {
                let known: Vec<&(u64, Option<f64>)> =
                    u.values.iter().filter(|(_, v)| v.is_some()).collect();
                if known.len() > 1 {
                    let lines: Vec<String> = known.iter().map(|(l, _)| l.to_string()).collect();
                    return Err(Error::input(
                        crate::error::Location::file(&table.path)
                            .in_column(args.value_column.as_deref().unwrap_or("")),
                        format!(
                            "{} rows with a value for {code}{} (lines {}): a value map draws one value per unit; choose a period with --period or aggregate first",
                            known.len(),
                            if panels[k].is_empty() { String::new() } else { format!(" in {}", panels[k]) },
                            lines.join(", ")
                        ),
                    ));
                }
            }
        }
        let values: Vec<f64> = rows
            .iter()
            .flat_map(|p| p.iter())
            .filter(|(c, _)| on_layer.contains(c.as_str()))
            .flat_map(|(_, u)| u.values.iter().filter_map(|(_, v)| *v))
            .collect();
        let c = classify(&values, &classing).map_err(|e| Error::Usage(format!("--breaks: {e}")))?;
        let colors = sequential(c.len());
        let mut list: Vec<Class> = (0..c.len())
            .map(|i| {
                let (lo, hi) = c.bounds(i);
                let label = if c.min.is_nan() {
                    "no values".to_string()
                } else if i == 0 {
                    format!("{} to {}", number(lo), number(hi))
                } else {
                    format!("over {} to {}", number(lo), number(hi))
                };
                Class::solid(label, &colors[i])
            })
            .collect();
        list.push(Class::hatched("no value (missing)", MISSING_HATCH));
        list.push(Class::solid("no row in the table", NO_ROW));
        value_classes = Some(c);
        let mark = coverage_col
            .map(|_| format!("estimate with coverage below {} (dots)", args.low_coverage));
        (list, mark)
    } else if coverage_col.is_some() {
        let (some, none) = if worst_case {
            ("no value in some periods", "no value in any period")
        } else {
            ("no value in some rows", "no known value")
        };
        let full = if worst_case {
            "full coverage in every period"
        } else {
            "full coverage"
        };
        (
            vec![
                Class::solid(full, BLUE),
                Class::solid("partial coverage", SKY),
                Class::solid(some, ORANGE),
                Class::hatched(none, VERMILLION),
                Class::solid("no row in the table", NO_ROW),
            ],
            None,
        )
    } else {
        (
            vec![
                Class::solid("joined", BLUE),
                Class::solid("no row in the table", NO_ROW),
            ],
            None,
        )
    };
    let no_row_class = classes.len() - 1;

    let mut drawn_panels: Vec<Panel<'_>> = Vec::with_capacity(panels.len());
    for (k, heading) in panels.iter().enumerate() {
        let mut shapes = Vec::with_capacity(drawn.len());
        for u in &drawn {
            let name = names
                .get(u.key.as_str())
                .map(|(n, _)| format!(" {n}"))
                .unwrap_or_default();
            let (class, marked, what) = match rows[k].get(&u.key) {
                None => (no_row_class, false, "no row in the table".to_string()),
                Some(r) => match (&value_classes, coverage_col) {
                    (Some(c), _) => {
                        let v = r.values.iter().find_map(|(_, v)| *v);
                        let cov = r.coverage.iter().cloned().fold(f64::INFINITY, f64::min);
                        match v {
                            None => (no_row_class - 1, false, "no value (missing)".to_string()),
                            Some(v) => {
                                let low = cov.is_finite() && cov < args.low_coverage;
                                let mut what = format!("value {}", number(v));
                                if cov.is_finite() {
                                    what.push_str(&format!("; coverage {}", fixed(cov, 3)));
                                }
                                (c.class_of(v), low, what)
                            }
                        }
                    }
                    (None, Some(_)) => {
                        let lowest = r.coverage.iter().cloned().fold(f64::INFINITY, f64::min);
                        let any_value = r.coverage.iter().any(|&c| c > 0.0);
                        let standing = if lowest >= 1.0 - 1e-9 {
                            Standing::Full
                        } else if lowest > 0.0 {
                            Standing::Partial
                        } else if any_value {
                            Standing::SomeMissing
                        } else {
                            Standing::NoValue
                        };
                        let i = match standing {
                            Standing::Full => 0,
                            Standing::Partial => 1,
                            Standing::SomeMissing => 2,
                            Standing::NoValue => 3,
                        };
                        let missing = r.coverage.iter().filter(|&&c| c <= 0.0).count();
                        let what = format!(
                            "{} (lowest coverage {}; {} of {} {} with no value)",
                            classes[i].label,
                            fixed(lowest, 3),
                            missing,
                            r.coverage.len(),
                            if worst_case { "periods" } else { "rows" }
                        );
                        (i, false, what)
                    }
                    (None, None) => (0, false, "joined".to_string()),
                },
            };
            shapes.push(Shape {
                code: u.key.clone(),
                title: format!("{}{}: {}", u.key, name, what),
                class,
                marked,
                geometry: &u.geometry,
            });
        }
        drawn_panels.push(Panel {
            title: heading.clone(),
            shapes,
        });
    }
    let per_panel = class_counts(&drawn_panels, classes.len());
    counts.classes = classes
        .iter()
        .enumerate()
        .map(|(i, c)| (c.label.clone(), per_panel.iter().map(|p| p[i]).collect()))
        .collect();
    counts.marked = drawn_panels
        .iter()
        .map(|p| p.shapes.iter().filter(|s| s.marked).count())
        .collect();

    // Labels: chosen units, then the largest drawn.
    let mut labels: Vec<(String, String)> = Vec::new();
    let label_text = |code: &str| {
        names
            .get(code)
            .map(|(_, short)| short.clone())
            .unwrap_or_else(|| code.to_string())
    };
    for code in &args.label {
        let code = match (builtin, code.parse::<CountyFips>()) {
            (true, Ok(c)) => c.to_string(),
            _ => code.trim().to_string(),
        };
        if !on_layer.contains(code.as_str()) {
            return Err(Error::Usage(format!(
                "--label {code}: not a unit of the layer {}",
                args.layer
            )));
        }
        labels.push((code.clone(), label_text(&code)));
    }
    let mut by_area: Vec<&&crate::core::overlay::Unit> = drawn.iter().collect();
    by_area.sort_by(|a, b| b.area.total_cmp(&a.area).then(a.key.cmp(&b.key)));
    for u in by_area.into_iter().take(args.label_largest) {
        if !labels.iter().any(|(c, _)| *c == u.key) {
            labels.push((u.key.clone(), label_text(&u.key)));
        }
    }

    // State outlines over counties (built-in layers).
    let state_layer: Option<PreparedLayer> = if builtin {
        let l = read_layer(&LayerRequest {
            spec: args.layer.clone(),
            key: None,
            object: Some("states".into()),
            key_option: "--key",
            object_option: "--object",
        })?;
        Some(prepare(&l.features, l.convention))
    } else {
        None
    };
    let drawn_states: BTreeSet<&str> = drawn.iter().filter_map(|u| u.key.get(..2)).collect();
    let outlines: Vec<(String, &geo::MultiPolygon<f64>)> = state_layer
        .as_ref()
        .map(|l| {
            l.units
                .iter()
                .filter(|u| drawn_states.contains(u.key.as_str()))
                .map(|u| (format!("{}000", u.key), &u.geometry))
                .collect()
        })
        .unwrap_or_default();

    let mut notes = Vec::new();
    if worst_case {
        notes.push(format!(
            "Worst case over {} periods ({} to {}): each unit is drawn by its lowest coverage; a period with no row counts as no value.",
            table_periods.len(),
            table_periods.first().map_or("", String::as_str),
            table_periods.last().map_or("", String::as_str)
        ));
    }
    if let Some(c) = &value_classes {
        let how = match &classing {
            Classing::Quantiles(k) => format!("{k} quantile classes"),
            Classing::EqualIntervals(k) => format!("{k} classes of equal width"),
            Classing::Breaks(_) => "classes at the given breaks".into(),
        };
        notes.push(format!(
            "{}: {how}{}, each including its upper bound. Missing values are hatched, never the lowest class.",
            args.value_column.as_deref().unwrap_or(""),
            if c.merged { " (equal breaks merged)" } else { "" }
        ));
    }
    if coverage_col.is_some() {
        notes.push("Figures carried across boundaries are estimates: each value is assumed spread evenly by area within its source unit.".into());
    }
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
    let source = args.source.clone().unwrap_or_else(|| {
        format!(
            "Source: {}. Boundaries: {}{}.",
            table.path.display(),
            args.layer,
            if builtin {
                " (Census Bureau cartographic boundaries, 1:10m)"
            } else {
                ""
            }
        )
    });
    let title = args
        .title
        .clone()
        .unwrap_or_else(|| match &args.value_column {
            Some(v) => format!("{v}: {}", table.path.display()),
            None => format!("What joined: {}", table.path.display()),
        });
    let spec = MapSpec {
        title,
        classes,
        mark_label: if value_col.is_some() {
            mark_label
        } else {
            None
        },
        notes,
        source,
        layout: if builtin {
            Layout::UsInsets
        } else {
            Layout::Plain
        },
        outlines,
        labels,
    };
    let mut svg: Vec<u8> = Vec::new();
    write_map(&mut svg, &drawn_panels, &spec)
        .map_err(|e| Error::io(&args.data, "cannot draw the map of", e))?;
    write_to(&target, |w| w.write_all(&svg))?;
    if let Some(png) = &args.png {
        let bytes = crate::io::png::render(&svg).map_err(|e| {
            Error::Usage(format!(
                "{}: cannot render the map as PNG: {e}",
                png.display()
            ))
        })?;
        write_file(png, |w| w.write_all(&bytes))?;
    }
    Ok(counts)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// matplotlib 3.9.2: `[to_hex(colormaps["viridis"](i / 10)) for i in
    /// range(11)]`, read from the lightest end.
    #[test]
    fn the_default_arguments_are_the_command_lines() {
        use clap::Parser;
        let parsed =
            crate::cli::Cli::try_parse_from(["regionkey", "map", "d.csv", "-o", "m.svg"]).unwrap();
        let crate::cli::Command::Map(a) = parsed.command else {
            panic!("not map")
        };
        let d = Args::default();
        assert_eq!(
            (
                a.code_column,
                a.class_count,
                a.low_coverage,
                a.layer,
                a.classes
            ),
            (
                d.code_column,
                d.class_count,
                d.low_coverage,
                d.layer,
                d.classes
            )
        );
    }

    #[test]
    fn the_sequential_scale_runs_from_light_to_dark_on_viridis() {
        let matplotlib = [
            "#440154", "#482475", "#414487", "#355f8d", "#2a788e", "#21918c", "#22a884", "#44bf70",
            "#7ad151", "#bddf26", "#fde725",
        ];
        let mut light_first = matplotlib.to_vec();
        light_first.reverse();
        assert_eq!(sequential(11), light_first);
        assert_eq!(sequential(2), ["#fde725", "#440154"]);
        // The middle of three is viridis at 0.5.
        assert_eq!(sequential(3)[1], "#21918c");
    }
}

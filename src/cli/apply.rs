//! `regionkey apply DATA`: carry a data table onto target units through a
//! crosswalk (or onto a county vintage through the change history), with
//! the coverage of every estimate.
//!
//! Variables: `--sum COL` (counts), `--ratio NAME=NUM/DEN` (a rate rebuilt
//! from its allocated numerator and denominator), `--mean COL[:WEIGHT]` (a
//! weighted mean of an intensive variable: by the WEIGHT column allocated as
//! a count, or without one by the crosswalk's target share). Order
//! statistics (medians, percentiles) cannot be carried by any of these and
//! are refused, and so are rates offered as counts.
//!
//! Every input row is accounted for: allocated, or reported (unmatched or
//! unreadable code, missing code or period, duplicate code and period), and
//! every count balances: what came in is what was allocated, plus the share
//! that lies outside every target, plus what was left out.
//!
//! The library entry is [`execute`]: [`Config::from_args`] checks the
//! arguments (files, columns, options) before the long work, `execute`
//! reads, allocates and writes, and returns a [`Report`] that [`run`]
//! prints.

use std::collections::{BTreeMap, BTreeSet};
use std::io::Write;
use std::path::PathBuf;

use super::{say, warn, Global};
use crate::core::allocate::{allocate_range, Allocation, MeanWeight, Measure, Origin, Plan, Spec};
use crate::core::carrying::plan_to_vintage;
use crate::core::chain::{check, ChainError};
use crate::core::composite;
use crate::core::crosswalk::Crosswalk;
use crate::core::fips::{CodeForm, FipsError};
use crate::error::{Error, Location, Result};
use crate::io::builtin::us_counties;
use crate::io::composites as composites_io;
use crate::io::crosswalk_file;
use crate::io::data::{self, DataSpec, DataTable, Indexed, RawCode, ResultLayout, DECIDED};
use crate::io::output::{
    sidecar_path, write_csv_record, NumberFormat, Sidecar, SidecarInput, Staged, Target, Written,
};

pub use crate::io::output::CAUTION;

/// The county crosswalk shipped with regionkey (2017 -> 2023 counties).
pub const SHIPPED_CROSSWALK: &str = "crosswalks/us-counties-2017-2023.csv";

/// Texts read as "no value" besides an empty field, whatever `--missing`
/// adds (common practice in published tables).
pub const MISSING_MARKERS: [&str; 3] = ["NA", "N/A", "n/a"];

/// Arguments.
#[derive(Debug, Clone, clap::Args)]
#[command(
    after_help = "Output columns: the code column (named as in the data), code_name (with --to-vintage), the period column (named as in the data, with --period-column), then for each variable NAME and NAME_coverage (and NAME_weighting for a mean); an added column whose name the data already uses gets the prefix rk_. Coverage is the part of the target made of sources whose value is known (by target share, else by weight); an estimate with no known source is empty with coverage 0. Values are written with up to 15 significant digits (all a 64-bit number holds reliably; whole numbers without decimals) unless --decimals is given. The output format follows the extension: .csv (comma-separated, whatever the input's delimiter), .tsv, .parquet. A sidecar OUTPUT.json records inputs, options, counts, the SHA-256 of the output and the caution that allocated figures are estimates; all outputs of a run appear together when it finishes."
)]
pub struct Args {
    /// The data table (CSV, TSV or Parquet).
    pub data: PathBuf,
    /// Crosswalk file (from_code,to_code,weight,target_share,basis). Optional with --to-vintage.
    #[arg(long, short)]
    pub crosswalk: Option<PathBuf>,
    /// Carry US county codes onto the counties of this vintage year through
    /// the change history; divided units take weights from --crosswalk or
    /// the shipped 2017 -> 2023 crosswalk.
    #[arg(long, value_name = "YEAR")]
    pub to_vintage: Option<u16>,
    /// Column holding the unit code (with --state-column: the county part).
    #[arg(long, default_value = "code")]
    pub code_column: String,
    /// Column holding the state code, joined with --code-column's county part.
    #[arg(long)]
    pub state_column: Option<String>,
    /// Column holding the period (year, month); results are per period.
    #[arg(long)]
    pub period_column: Option<String>,
    /// Count columns to sum (comma-separated or repeated).
    #[arg(long = "sum", value_name = "COL", value_delimiter = ',')]
    pub sums: Vec<String>,
    /// A ratio rebuilt from two counts: NAME=NUMERATOR/DENOMINATOR (repeatable).
    #[arg(long = "ratio", value_name = "NAME=NUM/DEN")]
    pub ratios: Vec<String>,
    /// A weighted mean: COL:WEIGHT (weighted by the WEIGHT column allocated
    /// as a count) or COL (weighted by the crosswalk's target share). Repeatable.
    #[arg(long = "mean", value_name = "COL[:WEIGHT]")]
    pub means: Vec<String>,
    /// Leave an estimate empty when its coverage is below this (0..=1).
    #[arg(long, default_value_t = 0.0, value_name = "F")]
    pub min_coverage: f64,
    /// Write values with this many decimals (rounded) instead of up to 15
    /// significant digits.
    #[arg(long, value_name = "N")]
    pub decimals: Option<usize>,
    /// Field delimiter of the data (detected from the header line if not given); `tab` for a tab.
    #[arg(long = "delimiter", alias = "separator", value_name = "C")]
    pub separator: Option<String>,
    /// A text meaning "no value" besides an empty field, NA, N/A and n/a (repeatable).
    #[arg(long)]
    pub missing: Vec<String>,
    /// A column whose name looks like an order statistic (median, p50,
    /// percentile) or, for --sum, like a rate (rate, pct, share), but is
    /// not one (repeatable).
    #[arg(long, value_name = "COL")]
    pub allow_name: Vec<String>,
    /// With --to-vintage: write every unit of the vintage, also those no
    /// code of the data reaches (their figures empty, coverage 0).
    #[arg(long, requires = "to_vintage")]
    pub all_units: bool,
    /// With --to-vintage: when a divided unit has no weights, report its rows
    /// and leave them out instead of stopping with an error.
    #[arg(long)]
    pub skip_unweighted: bool,
    /// Where to write the results (.csv, .tsv or .parquet; `-` for CSV on standard output, then no sidecar).
    #[arg(long, short)]
    pub output: String,
    /// Write every reported row (kind, code, period, rows, first_line, detail) here as CSV.
    #[arg(long)]
    pub report: Option<PathBuf>,
    /// Instead of allocating, write to --output the SQL query (duckdb,
    /// spark or ansi) that does the same allocation, coverage and ratios in
    /// a database engine, on the data and the crosswalk as tables. DATA is
    /// read only for its column names.
    #[arg(long, value_name = "DIALECT", requires = "crosswalk", conflicts_with_all = ["to_vintage", "report"])]
    pub emit_sql: Option<String>,
    /// With --emit-sql: the names of the data and crosswalk tables in the engine.
    #[arg(
        long,
        value_name = "DATA,CROSSWALK",
        default_value = "data,crosswalk",
        requires = "emit_sql"
    )]
    pub sql_tables: String,
    /// How a pooled report (a code cell of several codes joined by +, such as
    /// 36005+36047+36061+36081+36085) is split among its members: by area
    /// (the built-in county geometry) or by population (--population FILE).
    #[arg(long, value_enum, default_value = "area", value_name = "BASIS")]
    pub split_by: super::group::WeightBy,
    /// Populations for --split-by population: a table with columns code and population.
    #[arg(long, value_name = "FILE")]
    pub population: Option<PathBuf>,
}

/// A problem or a fact worth a line in the report.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct Finding {
    /// What (`unmatched-code`, `duplicate`, `carried`, `outside`, ...).
    pub kind: &'static str,
    /// The code concerned.
    pub code: String,
    /// The period, if one.
    pub period: String,
    /// Rows concerned.
    pub rows: u64,
    /// Line of the first row concerned, if any.
    pub first_line: Option<u64>,
    /// Plain words.
    pub detail: String,
}

/// The names of outputs that an order statistic could hide behind.
fn looks_like_order_statistic(name: &str) -> bool {
    let n = name.to_lowercase();
    let words: Vec<&str> = n
        .split(|c: char| !c.is_ascii_alphanumeric())
        .filter(|w| !w.is_empty())
        .collect();
    words.iter().any(|w| {
        [
            "median",
            "percentile",
            "quantile",
            "quartile",
            "decile",
            "pctile",
        ]
        .iter()
        .any(|k| w.contains(k))
            || (w.len() >= 2
                && w.len() <= 3
                && w.starts_with('p')
                && w[1..].bytes().all(|b| b.is_ascii_digit()))
            || (w.len() >= 2
                && w.len() <= 3
                && w.starts_with('q')
                && w[1..].bytes().all(|b| b.is_ascii_digit()))
    })
}

/// Names that say a column is a rate or a share, which cannot be summed:
/// rate, pct, percent, per_1000 (per + a number), share, ratio, proportion.
fn looks_like_rate(name: &str) -> bool {
    let n = name.to_lowercase();
    let words: Vec<&str> = n
        .split(|c: char| !c.is_ascii_alphanumeric())
        .filter(|w| !w.is_empty())
        .collect();
    let compact: String = n.chars().filter(|c| c.is_ascii_alphanumeric()).collect();
    words.iter().any(|w| {
        [
            "rate",
            "rates",
            "pct",
            "percent",
            "percentage",
            "share",
            "ratio",
            "proportion",
        ]
        .contains(w)
            || (w.starts_with("per") && w.len() > 3 && w[3..].bytes().all(|b| b.is_ascii_digit()))
    }) || ["rate", "pct", "percent", "ratio", "proportion"]
        .iter()
        .any(|k| compact.ends_with(k) && compact.len() > k.len())
        || compact.contains("per1000")
        || compact.contains("per100k")
        || compact.contains("per100000")
}

/// A checked request for one output variable, by column names.
#[derive(Debug, Clone, PartialEq)]
pub enum Request {
    /// A count column, summed.
    Count(String),
    /// A ratio rebuilt from two count columns.
    Ratio {
        /// The output name.
        name: String,
        /// The numerator column.
        numerator: String,
        /// The denominator column.
        denominator: String,
    },
    /// A weighted mean of an intensive column.
    Mean {
        /// The column.
        column: String,
        /// The weight column, or none for the crosswalk's target share.
        weight: Option<String>,
    },
}

impl Request {
    /// The output name.
    pub fn name(&self) -> &str {
        match self {
            Request::Count(c) => c,
            Request::Ratio { name, .. } => name,
            Request::Mean { column, .. } => column,
        }
    }

    /// The input columns it reads.
    pub fn columns(&self) -> Vec<&str> {
        match self {
            Request::Count(c) => vec![c],
            Request::Ratio {
                numerator,
                denominator,
                ..
            } => vec![numerator, denominator],
            Request::Mean { column, weight } => std::iter::once(column.as_str())
                .chain(weight.as_deref())
                .collect(),
        }
    }
}

fn parse_requests(args: &Args) -> Result<Vec<Request>> {
    let mut out: Vec<Request> = args
        .sums
        .iter()
        .map(|s| Request::Count(s.trim().to_string()))
        .collect();
    for r in &args.ratios {
        let bad = || {
            Error::Usage(format!("--ratio {r:?}: expected NAME=NUMERATOR/DENOMINATOR, e.g. rate=unemployed/labor_force"))
        };
        let (name, rest) = r.split_once('=').ok_or_else(bad)?;
        let (num, den) = rest.split_once('/').ok_or_else(bad)?;
        let (name, num, den) = (name.trim(), num.trim(), den.trim());
        if name.is_empty() || num.is_empty() || den.is_empty() {
            return Err(bad());
        }
        out.push(Request::Ratio {
            name: name.into(),
            numerator: num.into(),
            denominator: den.into(),
        });
    }
    for m in &args.means {
        let (column, weight) = match m.split_once(':') {
            Some((c, w)) => (c.trim(), Some(w.trim())),
            None => (m.trim(), None),
        };
        if column.is_empty() || weight == Some("") {
            return Err(Error::Usage(format!(
                "--mean {m:?}: expected COL or COL:WEIGHT"
            )));
        }
        out.push(Request::Mean {
            column: column.into(),
            weight: weight.map(String::from),
        });
    }
    if out.is_empty() {
        return Err(Error::Usage(
            "nothing to carry: name at least one variable with --sum COL, --ratio NAME=NUM/DEN or --mean COL[:WEIGHT]".into(),
        ));
    }
    let allowed = |c: &str| args.allow_name.iter().any(|a| a == c);
    let mut names = BTreeSet::new();
    for r in &out {
        if !names.insert(r.name().to_string()) {
            return Err(Error::Usage(format!(
                "the output variable {:?} is asked for twice; each name may appear once",
                r.name()
            )));
        }
        for c in std::iter::once(r.name()).chain(r.columns()) {
            if looks_like_order_statistic(c) && !allowed(c) {
                return Err(Error::Usage(format!(
                    "{c:?} looks like an order statistic (a median or percentile). A median of a target cannot be computed from the medians of its pieces: it needs the distribution within each unit. Carry the underlying counts instead (e.g. counts per income band, then recompute the median), or if {c:?} is not an order statistic, say so with --allow-name {c}"
                )));
            }
        }
        if let Request::Count(c) = r {
            if looks_like_rate(c) && !allowed(c) {
                return Err(Error::Usage(format!(
                    "--sum {c}: {c:?} looks like a rate or a share, and rates do not add up (two units at 10 % are not 20 %). Rebuild it from its counts with --ratio {c}=NUMERATOR/DENOMINATOR, or carry it as a weighted mean with --mean {c}:WEIGHT; if {c:?} is a count, say so with --allow-name {c}"
                )));
            }
        }
    }
    Ok(out)
}

fn parse_separator(text: &Option<String>) -> Result<Option<u8>> {
    match text.as_deref() {
        None => Ok(None),
        Some("tab") | Some("\\t") | Some("\t") => Ok(Some(b'\t')),
        Some(s) if s.len() == 1 && s.is_ascii() => Ok(Some(s.as_bytes()[0])),
        Some(s) => Err(Error::Usage(format!(
            "--delimiter {s:?}: give one character, or `tab`"
        ))),
    }
}

/// The form of the results file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OutputFormat {
    /// Comma-separated text.
    Csv,
    /// Tab-separated text.
    Tsv,
    /// Apache Parquet.
    Parquet,
}

impl OutputFormat {
    /// The format a path asks for by its extension: `.csv` (or none, or
    /// standard output) is CSV, `.tsv`/`.tab` TSV, `.parquet` Parquet;
    /// another extension is refused, so a file is never written in a form
    /// its name does not say.
    pub fn from_target(target: &Target) -> Result<OutputFormat> {
        let Target::File(path) = target else {
            return Ok(OutputFormat::Csv);
        };
        let ext = path.extension().map(|e| e.to_string_lossy().to_lowercase());
        match ext.as_deref() {
            None | Some("csv") | Some("txt") => Ok(OutputFormat::Csv),
            Some("tsv") | Some("tab") => Ok(OutputFormat::Tsv),
            Some("parquet") | Some("pq") => Ok(OutputFormat::Parquet),
            Some(other) => Err(Error::Usage(format!(
                "{}: the extension .{other} names no format regionkey writes; use .csv, .tsv or .parquet",
                path.display()
            ))),
        }
    }
}

/// Everything checked before the long work: what [`execute`] runs.
#[derive(Debug, Clone)]
pub struct Config {
    /// The output variables.
    pub requests: Vec<Request>,
    /// The data table and its columns.
    pub data: DataSpec,
    /// A crosswalk (path, rows) given with `--crosswalk`.
    pub crosswalk: Option<(PathBuf, Crosswalk)>,
    /// Carry county codes onto this vintage.
    pub to_vintage: Option<u16>,
    /// Write every unit of the vintage.
    pub all_units: bool,
    /// Leave divided units without weights out instead of stopping.
    pub skip_unweighted: bool,
    /// Estimates below this coverage are left empty.
    pub min_coverage: f64,
    /// How values are written.
    pub numbers: NumberFormat,
    /// Where the results go.
    pub output: Target,
    /// Their format.
    pub format: OutputFormat,
    /// Where the report goes, if anywhere.
    pub report: Option<PathBuf>,
    /// The options as given, for the sidecar.
    pub options: serde_json::Value,
    /// How pooled reports (codes joined by `+`) are split among their members.
    pub split: PooledSplit,
}

/// How a pooled report is split among its members.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum PooledSplit {
    /// By each member's area in the built-in county geometry.
    Area,
    /// By each member's population, from a table (columns code, population).
    Population(PathBuf),
}

impl Config {
    /// Checks the arguments: options, files, columns, output paths, the
    /// crosswalk. Fails in milliseconds on a typo.
    pub fn from_args(args: &Args) -> Result<Config> {
        let requests = parse_requests(args)?;
        if args.crosswalk.is_none() && args.to_vintage.is_none() {
            return Err(Error::Usage(
                "say where the data goes: --crosswalk FILE, or --to-vintage YEAR to carry US county codes through the change history (or both)".into(),
            ));
        }
        if !(0.0..=1.0).contains(&args.min_coverage) {
            return Err(Error::Usage(format!(
                "--min-coverage {}: give a fraction between 0 and 1",
                args.min_coverage
            )));
        }
        let numbers = match args.decimals {
            Some(d) if d > 15 => return Err(Error::Usage("--decimals: at most 15".into())),
            Some(d) => NumberFormat::Fixed(d),
            None => NumberFormat::default(),
        };
        if !args.data.is_file() {
            return Err(Error::io(
                &args.data,
                "cannot open input",
                std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
            ));
        }
        let mut value_columns: Vec<String> = Vec::new();
        for r in &requests {
            for c in r.columns() {
                if !value_columns.iter().any(|v| v == c) {
                    value_columns.push(c.to_string());
                }
            }
        }
        let mut missing: Vec<String> = MISSING_MARKERS.iter().map(|m| m.to_string()).collect();
        for m in &args.missing {
            if !m.is_empty() && !missing.contains(m) {
                missing.push(m.clone());
            }
        }
        let data = DataSpec {
            path: args.data.clone(),
            separator: parse_separator(&args.separator)?,
            code_column: args.code_column.clone(),
            state_column: args.state_column.clone(),
            period_column: args.period_column.clone(),
            value_columns,
            missing,
            method_column: None,
        };
        let mut data = data::resolve_columns(&data)?;
        // The method column of `regionkey match` (prefixed when the input
        // had one of that name), so rows decided by a person are named so.
        let names = data::column_names(&data)?;
        data.method_column = ["rk_match_method", "match_method"]
            .iter()
            .find(|m| names.iter().any(|n| n == *m))
            .map(|m| m.to_string());
        let output = Target::parse(&args.output);
        output.check_writable()?;
        // With --emit-sql the output is the query, whatever its extension.
        let format = match args.emit_sql {
            Some(_) => OutputFormat::Csv,
            None => OutputFormat::from_target(&output)?,
        };
        if let Some(r) = &args.report {
            Target::File(r.clone()).check_writable()?;
            if Target::File(r.clone()) == output {
                return Err(Error::Usage(format!(
                    "{}: given as both the output and the report; name two files",
                    r.display()
                )));
            }
        }
        let crosswalk = match &args.crosswalk {
            Some(p) => {
                let file = crosswalk_file::read_file(p)?;
                match check("crosswalk", &file.crosswalk) {
                    Ok(()) => {}
                    Err(e @ ChainError::Unbalanced { .. }) => warn(format!(
                        "{}; totals will not be conserved",
                        file.locate(p, &e, None)
                    )),
                    Err(e) => return Err(file.locate(p, &e, None)),
                }
                Some((p.clone(), file.crosswalk))
            }
            None => None,
        };
        let has_shares = crosswalk
            .as_ref()
            .is_none_or(|(_, cw)| cw.rows.iter().any(|r| r.target_share.is_some()));
        if !has_shares {
            if let Some(Request::Mean { column, .. }) = requests
                .iter()
                .find(|r| matches!(r, Request::Mean { weight: None, .. }))
            {
                return Err(Error::Usage(format!(
                    "--mean {column}: the crosswalk has no target_share, so the mean cannot be weighted by it; name a weight column (--mean {column}:WEIGHT)"
                )));
            }
        }
        let split =
            match (args.split_by, &args.population) {
                (super::group::WeightBy::Area, None) => PooledSplit::Area,
                (super::group::WeightBy::Area, Some(_)) => return Err(Error::Usage(
                    "--population is used with --split-by population; add it, or drop --population"
                        .into(),
                )),
                (super::group::WeightBy::Population, None) => return Err(Error::Usage(
                    "--split-by population needs --population FILE (columns code and population)"
                        .into(),
                )),
                (super::group::WeightBy::Population, Some(p)) => {
                    if !p.is_file() {
                        return Err(Error::io(
                            p,
                            "cannot open population table",
                            std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
                        ));
                    }
                    PooledSplit::Population(p.clone())
                }
            };
        let options = serde_json::json!({
            "code_column": args.code_column,
            "state_column": args.state_column,
            "period_column": args.period_column,
            "to_vintage": args.to_vintage,
            "sum": args.sums,
            "ratio": args.ratios,
            "mean": args.means,
            "min_coverage": args.min_coverage,
            "decimals": args.decimals,
            "missing": data.missing,
            "all_units": args.all_units,
            "split_by": match &split {
                PooledSplit::Area => "area".to_string(),
                PooledSplit::Population(p) => format!("population ({})", p.display()),
            },
        });
        Ok(Config {
            requests,
            data,
            crosswalk,
            to_vintage: args.to_vintage,
            all_units: args.all_units,
            skip_unweighted: args.skip_unweighted,
            min_coverage: args.min_coverage,
            numbers,
            output,
            format,
            report: args.report.clone(),
            options,
            split,
        })
    }
}

/// Reads a raw code through the one code parser; `Err` says why it cannot
/// be read.
fn normalize(form: CodeForm, raw: &RawCode) -> std::result::Result<String, FipsError> {
    let read = match &raw.state {
        Some(state) => form.read_with_state(state, &raw.code),
        None => form.read(&raw.code),
    };
    read.map(|(c, _)| c.into_string())
}

/// The output header: the data's own names for the code and period
/// columns, then each variable, its coverage and note; an added column
/// whose name is already taken (by a data column kept in the output or a
/// variable) gets the prefix `rk_`, and only that one.
fn output_header(config: &Config, with_names: bool) -> (Vec<String>, Vec<Option<String>>) {
    let data = &config.data;
    // Names the user chose: they stay as they are.
    let mut own: Vec<String> = vec![data.code_column.clone()];
    own.extend(data.period_column.clone());
    own.extend(config.requests.iter().map(|r| r.name().to_string()));
    let added = |name: String, header: &[String]| {
        if own.contains(&name) || header.contains(&name) {
            format!("rk_{name}")
        } else {
            name
        }
    };
    let mut header = vec![data.code_column.clone()];
    if with_names {
        let n = added("code_name".into(), &header);
        header.push(n);
    }
    header.extend(data.period_column.clone());
    let mut notes = Vec::new();
    for r in &config.requests {
        header.push(r.name().to_string());
        let c = added(format!("{}_coverage", r.name()), &header);
        header.push(c);
        match r {
            Request::Mean { column, weight } => {
                let n = added(format!("{column}_weighting"), &header);
                header.push(n);
                notes.push(Some(
                    weight.clone().unwrap_or_else(|| "target_share".into()),
                ));
            }
            _ => notes.push(None),
        }
    }
    (header, notes)
}

/// How one count variable balances: what came in is what was allocated,
/// plus what lies outside every target, plus what was left out.
#[derive(Debug, Clone, PartialEq)]
pub struct Balance {
    /// The variable (a `--sum` column).
    pub variable: String,
    /// The sum of its known values over every row of the data.
    pub input: f64,
    /// The sum of its written estimates.
    pub allocated: f64,
    /// The part of the sources' values that the crosswalk puts outside
    /// every target (rows with an empty `to_code`).
    pub outside: f64,
    /// The values of rows that reached no source (no code or period, a
    /// code the crosswalk does not know, unreadable, without weights).
    pub left_out: f64,
    /// Estimates left empty because their coverage is below `--min-coverage`.
    pub emptied: f64,
    /// The part lost or gained because a source's weights do not add up
    /// to one.
    pub unbalanced: f64,
    /// Per period: (period, value of the sources, part outside every target).
    pub outside_by_period: Vec<(String, f64, f64)>,
}

impl Balance {
    /// The difference between what came in and the parts accounted for; a
    /// rounding error (relative 1e-9 or less) unless something was lost.
    pub fn discrepancy(&self) -> f64 {
        self.input
            - (self.allocated + self.outside + self.left_out + self.emptied + self.unbalanced)
    }
}

/// Counts of estimates by coverage, for one variable.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct CoverageCounts {
    /// Estimates written.
    pub estimates: u64,
    /// With coverage 1.
    pub full: u64,
    /// With coverage between 0 and 1.
    pub partial: u64,
    /// With coverage 0.
    pub none: u64,
}

/// What a run did: the figures behind the summary, the report and the
/// sidecar.
#[derive(Debug, Clone)]
pub struct Report {
    /// Data rows read.
    pub rows: u64,
    /// Rows whose values reached a source of the crosswalk.
    pub rows_allocated: u64,
    /// Target units written.
    pub targets: usize,
    /// Periods written (0 without a period column).
    pub periods: usize,
    /// Codes of the data carried from earlier vintages.
    pub carried: usize,
    /// Rows whose code came from a person's decision (`match_method`
    /// `decision`), and their distinct codes.
    pub decided: (u64, usize),
    /// Rows a decision matched to no unit (left out as decided).
    pub decided_none: u64,
    /// (code, period) cells with more than one row.
    pub duplicates: u64,
    /// Every reported row, sorted.
    pub findings: Vec<Finding>,
    /// Findings per kind: (items, rows).
    pub counts: BTreeMap<&'static str, (u64, u64)>,
    /// Per variable, in output order.
    pub coverage: Vec<(String, CoverageCounts)>,
    /// Per count variable: how it balances.
    pub balances: Vec<Balance>,
    /// What the crosswalk was ("built-in change history to 2023, ...").
    pub crosswalk_label: String,
    /// The results written.
    pub output: Written,
    /// The sidecar written, if any.
    pub sidecar: Option<PathBuf>,
    /// Things the user should know about the input (a Latin-1 fallback).
    pub warnings: Vec<String>,
}

fn finding(
    kind: &'static str,
    code: String,
    rows: u64,
    first_line: u64,
    detail: String,
) -> Finding {
    Finding {
        kind,
        code,
        period: String::new(),
        rows,
        first_line: (first_line > 0).then_some(first_line),
        detail,
    }
}

/// Stops when a named column plainly holds something else: no value of
/// the code column reads as a code of the crosswalk's form (names where
/// codes belong), or no value of the state column is a state (years where
/// states belong). A few bad values are data problems and are reported
/// row by row; a column with (almost) none right is a wrong option.
fn check_column_contents(
    config: &Config,
    indexed: &Indexed,
    form: CodeForm,
    read: &[std::result::Result<String, FipsError>],
) -> Result<()> {
    let rows: u64 = indexed.code_rows.iter().map(|r| r.0).sum();
    if rows == 0 {
        return Ok(());
    }
    let path = &config.data.path;
    let first_bad = |pred: &dyn Fn(usize) -> bool| {
        (0..indexed.codes.len())
            .filter(|&i| pred(i))
            .min_by_key(|&i| indexed.code_rows[i].1)
    };
    if let Some(state_column) = &config.data.state_column {
        let is_state = |i: usize| {
            indexed.codes[i]
                .state
                .as_deref()
                .is_some_and(|s| CodeForm::State.read(s).is_ok())
        };
        let good: u64 = (0..indexed.codes.len())
            .filter(|&i| is_state(i))
            .map(|i| indexed.code_rows[i].0)
            .sum();
        if good * 20 < rows {
            if let Some(i) = first_bad(&|i| !is_state(i)) {
                return Err(Error::input(
                    Location::file(path)
                        .at_line(indexed.code_rows[i].1)
                        .in_column(state_column),
                    format!(
                        "--state-column {state_column}: {good} of {rows} rows hold a state code; the first is {:?}. Name the column that holds state codes (FIPS such as 06 or 6)",
                        indexed.codes[i].state.as_deref().unwrap_or("")
                    ),
                ));
            }
        }
    }
    if form == CodeForm::Plain {
        return Ok(());
    }
    let good: u64 = read
        .iter()
        .zip(&indexed.code_rows)
        .filter(|(r, _)| r.is_ok())
        .map(|(_, c)| c.0)
        .sum();
    if good * 20 < rows {
        if let Some(i) = first_bad(&|i| read[i].is_err()) {
            let why = read[i]
                .as_ref()
                .err()
                .map(|e| e.to_string())
                .unwrap_or_default();
            let what = match form {
                CodeForm::County => "county FIPS codes".to_string(),
                CodeForm::State => "state FIPS codes".to_string(),
                CodeForm::Digits(w) => format!("codes of {w} digits, as in the crosswalk"),
                CodeForm::Plain => "codes".to_string(),
            };
            return Err(Error::input(
                Location::file(path)
                    .at_line(indexed.code_rows[i].1)
                    .in_column(&config.data.code_column),
                format!(
                    "--code-column {}: {good} of {rows} rows hold one of the {what} expected; the first is {:?} ({why}). Name the column that holds the codes (to match names to codes first, use `regionkey match`)",
                    config.data.code_column, indexed.codes[i].code
                ),
            ));
        }
    }
    Ok(())
}

/// Reads, allocates and writes as `config` says; returns what was done.
/// All outputs (results, report, sidecar) appear together at the end; the
/// sidecar, renamed last, names the SHA-256 of the results it describes.
pub fn execute(config: &Config) -> Result<Report> {
    let table = data::read(&config.data)?;
    let indexed = table.index();
    let decided = table.decided(&indexed);
    let mut findings: Vec<Finding> = Vec::new();
    if decided.missing_otherwise.0 > 0 {
        findings.push(finding(
            "missing-code",
            String::new(),
            decided.missing_otherwise.0,
            decided.missing_otherwise.1,
            format!("rows with an empty {}; left out", config.data.code_column),
        ));
    }
    if decided.none.0 > 0 {
        findings.push(finding(
            "decided-none",
            String::new(),
            decided.none.0,
            decided.none.1,
            format!(
                "rows a person's decision matched to no unit (empty {}, {} {DECIDED}); left out as decided",
                config.data.code_column,
                config.data.method_column.as_deref().unwrap_or("match_method")
            ),
        ));
    }
    if indexed.missing_period.0 > 0 {
        findings.push(finding(
            "missing-period",
            String::new(),
            indexed.missing_period.0,
            indexed.missing_period.1,
            "rows with an empty period; left out".into(),
        ));
    }

    // Normalize the distinct codes.
    let form = form_of(config);
    if config.data.state_column.is_some() && form != CodeForm::County {
        return Err(Error::Usage(
            "--state-column joins a state and a county part into a county code, but the crosswalk's codes are not five-digit county codes".into(),
        ));
    }
    // Cells of several codes joined by + are pooled reports (composites).
    let mut composites: Vec<(String, Vec<String>)> = Vec::new();
    let mut pooled_of: Vec<Option<std::result::Result<usize, String>>> =
        vec![None; indexed.codes.len()];
    for (i, raw) in indexed.codes.iter().enumerate() {
        let member = |text: &str| {
            let part = RawCode {
                state: raw.state.clone(),
                code: text.to_string(),
            };
            normalize(form, &part).map_err(|e| e.to_string())
        };
        pooled_of[i] = match composite::parse_code(&raw.code, member) {
            Ok(None) => None,
            Ok(Some(members)) => {
                let code = composite::join_codes(&members);
                let k = match composites.iter().position(|(c, _)| *c == code) {
                    Some(k) => k,
                    None => {
                        composites.push((code, members));
                        composites.len() - 1
                    }
                };
                Some(Ok(k))
            }
            Err(why) => Some(Err(why)),
        };
    }
    let read: Vec<std::result::Result<String, FipsError>> = indexed
        .codes
        .iter()
        .zip(&pooled_of)
        .map(|(raw, pooled)| match pooled {
            Some(Ok(k)) => Ok(composites[*k].0.clone()),
            Some(Err(_)) => Err(FipsError::NotNumeric(raw.code.clone())),
            None => normalize(form, raw),
        })
        .collect();
    check_column_contents(config, &indexed, form, &read)?;
    let normalized: Vec<Option<String>> = read
        .into_iter()
        .zip(indexed.codes.iter().zip(&indexed.code_rows))
        .zip(&pooled_of)
        .map(|((r, (raw, &(rows, first_line))), pooled)| match r {
            Ok(c) => Some(c),
            Err(why) => {
                let why = match pooled {
                    Some(Err(text)) => text.clone(),
                    _ => why.to_string(),
                };
                let written = match &raw.state {
                    Some(s) => format!("{s}|{}", raw.code),
                    None => raw.code.clone(),
                };
                findings.push(finding(
                    "unreadable-code",
                    written,
                    rows,
                    first_line,
                    format!("{why}; rows left out"),
                ));
                None
            }
        })
        .collect();
    let mut by_code: BTreeMap<String, (u64, u64)> = BTreeMap::new();
    for ((n, &(rows, first)), pooled) in normalized.iter().zip(&indexed.code_rows).zip(&pooled_of) {
        // A pooled report reaches the crosswalk through its members.
        let codes: Vec<&String> = match pooled {
            Some(Ok(k)) => composites[*k].1.iter().collect(),
            _ => n.iter().collect(),
        };
        for n in codes {
            let e = by_code.entry(n.clone()).or_insert((0, first));
            e.0 += rows;
            e.1 = e.1.min(first);
        }
    }

    // The crosswalk the plan is built from.
    let (crosswalk, plan, carried, extra_names, crosswalk_label) = match config.to_vintage {
        Some(year) => {
            let reference = us_counties()?;
            if reference.units_in(year).next().is_none() {
                return Err(Error::Usage(format!(
                    "--to-vintage {year}: the built-in reference has no counties for that year"
                )));
            }
            // The shipped crosswalk is embedded in the binary.
            let shipped = if year == 2023 {
                Some(crate::io::builtin::us_county_crosswalk_2017_2023()?)
            } else {
                None
            };
            let v = plan_to_vintage(
                &by_code,
                year,
                reference,
                config.crosswalk.as_ref().map(|(_, cw)| cw),
                shipped.as_ref(),
                SHIPPED_CROSSWALK,
                config.all_units,
            );
            let c = v.carrying;
            if !c.unweighted.is_empty() && !config.skip_unweighted {
                let listed: Vec<String> = c
                    .unweighted
                    .iter()
                    .map(|(code, note)| format!("{code} ({note})"))
                    .collect();
                return Err(Error::Usage(format!(
                    "{} code(s) were divided among several {year} units and no crosswalk gives their weights: {}. Give --crosswalk FILE with rows from each of these codes to the {year} units (from_code,to_code,weight,target_share,basis), or leave their rows out with --skip-unweighted",
                    listed.len(),
                    listed.join("; ")
                )));
            }
            findings.extend(
                c.notes
                    .into_iter()
                    .map(|n| finding(n.kind.as_str(), n.code, n.rows, n.first_line, n.detail)),
            );
            let label = match &config.crosswalk {
                Some((p, _)) => format!(
                    "built-in change history to {year}, {}, {}",
                    p.display(),
                    SHIPPED_CROSSWALK
                ),
                None => format!("built-in change history to {year}, {SHIPPED_CROSSWALK}"),
            };
            (
                c.crosswalk,
                v.plan,
                v.carried_codes,
                Some(v.target_names),
                label,
            )
        }
        None => {
            let (path, cw) = config
                .crosswalk
                .as_ref()
                .ok_or_else(|| Error::Usage("no crosswalk".into()))?;
            (
                cw.clone(),
                Plan::new(cw, &[], |_| Origin::Direct),
                0,
                None,
                path.display().to_string(),
            )
        }
    };

    // Pooled reports: each member's share by area or population.
    let (pooled, refused) = prepare_pooled(config, &composites, &plan)?;
    let mut composite_rows: Vec<(u64, u64)> = vec![(0, u64::MAX); composites.len()];
    for (pooled_k, &(rows, first)) in pooled_of.iter().zip(&indexed.code_rows) {
        if let Some(Ok(k)) = pooled_k {
            composite_rows[*k].0 += rows;
            composite_rows[*k].1 = composite_rows[*k].1.min(first);
        }
    }
    for (code, why) in &refused {
        if let Some(k) = composites.iter().position(|(c, _)| c == code) {
            let (rows, first) = composite_rows[k];
            findings.push(finding(
                "pooled-left-out",
                code.clone(),
                rows,
                first,
                why.clone(),
            ));
        }
    }
    for p in &pooled {
        if let Some(k) = composites.iter().position(|(c, _)| *c == p.code) {
            let (rows, first) = composite_rows[k];
            let shares: Vec<String> = p
                .members
                .iter()
                .map(|&(s, share)| format!("{} {}", plan.sources[s], human(share)))
                .collect();
            findings.push(finding(
                "pooled",
                p.code.clone(),
                rows,
                first,
                format!(
                    "a pooled report split among its members by {} (estimates): {}",
                    p.basis.as_str(),
                    shares.join(", ")
                ),
            ));
        }
    }

    // Codes the plan does not know.
    let mut source_of: Vec<Option<u32>> = Vec::with_capacity(normalized.len());
    let mut unmatched: BTreeMap<String, (u64, u64)> = BTreeMap::new();
    for ((n, &(rows, first)), pooled_k) in normalized.iter().zip(&indexed.code_rows).zip(&pooled_of)
    {
        if let Some(Ok(k)) = pooled_k {
            let j = pooled.iter().position(|p| p.code == composites[*k].0);
            source_of.push(j.map(|j| (plan.sources.len() + j) as u32));
            continue;
        }
        let s = n
            .as_ref()
            .and_then(|c| plan.source_index(c))
            .map(|s| s as u32);
        if let (None, Some(code)) = (s, n) {
            let e = unmatched.entry(code.clone()).or_insert((0, first));
            e.0 += rows;
            e.1 = e.1.min(first);
        }
        source_of.push(s);
    }
    if config.to_vintage.is_none() && !by_code.is_empty() && unmatched.len() == by_code.len() {
        let (code, &(_, line)) = unmatched
            .iter()
            .min_by_key(|(_, (_, l))| *l)
            .expect("not empty");
        return Err(Error::input(
            Location::file(&config.data.path)
                .at_line(line)
                .in_column(&config.data.code_column),
            format!(
                "--code-column {}: no code of the column is a source code of the crosswalk (the first is {code:?}; the crosswalk's are like {:?}). Name the column that holds the codes, or check that the crosswalk starts from the data's units",
                config.data.code_column,
                plan.sources.first().map(String::as_str).unwrap_or("")
            ),
        ));
    }
    let explained: BTreeSet<String> = findings.iter().map(|f| f.code.clone()).collect();
    for (code, (rows, first)) in unmatched {
        if !explained.contains(&code) {
            findings.push(finding(
                "unmatched-code",
                code,
                rows,
                first,
                "not a source code of the crosswalk; rows left out".into(),
            ));
        }
    }
    // Codes taken from a person's decision, once per code as read (after
    // the lines above, which a code's other findings do not hide).
    let mut decided_codes: BTreeMap<String, (u64, u64)> = BTreeMap::new();
    for ((raw, n), &(rows, first)) in indexed.codes.iter().zip(&normalized).zip(&decided.by_code) {
        if rows == 0 {
            continue;
        }
        let code = n.clone().unwrap_or_else(|| raw.code.clone());
        let e = decided_codes.entry(code).or_insert((0, first));
        e.0 += rows;
        e.1 = e.1.min(first);
    }
    let decided_rows: u64 = decided_codes.values().map(|(rows, _)| rows).sum();
    for (code, &(rows, first)) in &decided_codes {
        findings.push(finding(
            "decided",
            code.clone(),
            rows,
            first,
            format!(
                "the code came from a person's decision ({} {DECIDED}); allocated like any other code",
                config.data.method_column.as_deref().unwrap_or("match_method")
            ),
        ));
    }
    let cells = indexed.periods.len() as u64 * (plan.sources.len() + pooled.len()) as u64;
    if cells >= u32::MAX as u64 {
        return Err(Error::Usage(format!(
            "{} periods x {} source codes is too many cells to hold; split the table by period",
            indexed.periods.len(),
            plan.sources.len()
        )));
    }
    let mut folded = table.fold(&indexed, &source_of, plan.sources.len() + pooled.len());
    // Pooled values go to their members: counts split by the shares,
    // values of means (intensive) copied.
    let mut pooled_cells = Vec::new();
    if !pooled.is_empty() {
        let intensive: Vec<bool> = table
            .value_columns
            .iter()
            .map(|c| {
                config
                    .requests
                    .iter()
                    .any(|r| matches!(r, Request::Mean { column, .. } if column == c))
            })
            .collect();
        let (values, cells) =
            composite::spread(&folded.values, plan.sources.len(), &pooled, &intensive);
        folded.values = values;
        for c in cells.iter().filter(|c| c.overlap) {
            findings.push(Finding {
                kind: "pooled-overlap",
                code: plan.sources[c.source].clone(),
                period: indexed.periods[c.period].clone(),
                rows: 0,
                first_line: None,
                detail: format!(
                    "this unit has its own row and a share of the pooled report {} in this period; both were added (the same land counted twice?)",
                    pooled[c.pooled].code
                ),
            });
        }
        pooled_cells = cells;
    }
    let pooled_set: BTreeSet<(usize, usize)> =
        pooled_cells.iter().map(|c| (c.source, c.period)).collect();

    // Duplicates.
    let with_period = config.data.period_column.is_some();
    let mut duplicates = 0u64;
    for p in 0..indexed.periods.len() {
        for (s, code) in plan.sources.iter().enumerate() {
            let (rows, line) = folded.cell(p, s);
            if rows > 1 {
                duplicates += 1;
                findings.push(Finding {
                    kind: "duplicate",
                    code: code.clone(),
                    period: indexed.periods[p].clone(),
                    rows: rows as u64,
                    first_line: Some(line),
                    detail: format!(
                        "{rows} rows for this code and period; their values were added together"
                    ),
                });
            }
        }
    }

    // Allocate.
    let column = |name: &str| {
        table
            .value_columns
            .iter()
            .position(|c| c == name)
            .unwrap_or(0)
    };
    let measures: Vec<Measure> = config
        .requests
        .iter()
        .map(|r| match r {
            Request::Count(c) => Measure::Count(column(c)),
            Request::Ratio {
                numerator,
                denominator,
                ..
            } => Measure::Ratio {
                numerator: column(numerator),
                denominator: column(denominator),
            },
            Request::Mean { column: c, weight } => Measure::Mean {
                column: column(c),
                weight: weight
                    .as_deref()
                    .map_or(MeanWeight::TargetShare, |w| MeanWeight::Column(column(w))),
            },
        })
        .collect();
    let spec = Spec {
        measures,
        min_coverage: config.min_coverage,
    };

    // Write.
    let (mut header, notes) = output_header(config, extra_names.is_some());
    // Beside each figure: the pooled reports it was split from, if any.
    let pooled_from = (!pooled.is_empty()).then(|| {
        if !header.iter().any(|h| h == "pooled_from") {
            header.push("pooled_from".into());
        } else {
            header.push("rk_pooled_from".into());
        }
        composite::pooled_labels(
            plan.targets.len(),
            |t| plan.links_of(t).iter().map(|l| l.source as usize).collect(),
            &pooled_cells,
            &pooled,
        )
    });
    let layout = ResultLayout {
        header,
        notes,
        pooled_from,
        with_period,
        target_names: extra_names,
        numbers: config.numbers,
        delimiter: if config.format == OutputFormat::Tsv {
            b'\t'
        } else {
            b','
        },
    };
    let periods = indexed.periods.len();
    let mut coverage = vec![CoverageCounts::default(); spec.measures.len()];
    let mut written_sums = vec![0.0f64; spec.measures.len()];
    let mut overlaps: Vec<(usize, usize)> = Vec::new();
    // (target, period) estimates with coverage below one, for the report.
    let mut thin = vec![false; plan.targets.len() * periods];
    let run_allocation =
        |targets: std::ops::Range<usize>| allocate_range(&plan, &folded.values, &spec, targets);
    let mut seen = |a: &Allocation| {
        add_coverage(&mut coverage, a);
        for t in a.first_target..a.first_target + a.targets {
            for p in 0..a.periods {
                for (m, e) in a.row(t, p).iter().enumerate() {
                    if let Some(v) = e.value {
                        written_sums[m] += v;
                    }
                    if e.coverage < 1.0 - 1e-9 {
                        thin[t * periods + p] = true;
                    }
                }
            }
        }
        overlaps.extend(a.overlaps.iter().copied());
    };
    let mut staged = Staged::new();
    let written = match config.format {
        OutputFormat::Parquet => {
            let allocation = run_allocation(0..plan.targets.len());
            seen(&allocation);
            staged.stage_target(&config.output, |w| {
                data::write_results_parquet(w, &plan, &indexed.periods, &allocation, &layout)
            })?
        }
        _ => staged.stage_target(&config.output, |w| {
            data::write_results(
                w,
                &plan,
                &indexed.periods,
                &run_allocation,
                &mut seen,
                &layout,
            )
        })?,
    };

    // Absent sources, now that coverage is known: a line says the targets'
    // coverage is lower only where it is.
    let mut targets_of: Vec<Vec<usize>> = vec![Vec::new(); plan.sources.len()];
    for t in 0..plan.targets.len() {
        for l in plan.links_of(t) {
            targets_of[l.source as usize].push(t);
        }
    }
    for (s, code) in plan.sources.iter().enumerate() {
        let absent: Vec<usize> = (0..periods)
            .filter(|&p| folded.cell(p, s).0 == 0 && !pooled_set.contains(&(s, p)))
            .collect();
        if absent.is_empty() {
            continue;
        }
        let lowered = |p: usize| {
            let mut ts: Vec<&str> = targets_of[s]
                .iter()
                .filter(|&&t| thin[t * periods + p])
                .map(|&t| plan.targets[t].as_str())
                .collect();
            ts.dedup();
            ts
        };
        let detail = |ts: Vec<&str>, what: &str| {
            if ts.is_empty() {
                format!(
                    "{what}; the land it covers has data from other codes, so no coverage is lower"
                )
            } else {
                format!("{what}; the coverage of {} is lower", ts.join(", "))
            }
        };
        if absent.len() == periods && periods > 0 {
            let mut ts: Vec<&str> = absent.iter().flat_map(|&p| lowered(p)).collect();
            ts.sort();
            ts.dedup();
            findings.push(Finding {
                kind: "absent-source",
                code: code.clone(),
                period: String::new(),
                rows: 0,
                first_line: None,
                detail: detail(ts, "a source of the crosswalk with no row in the data"),
            });
        } else {
            for p in absent {
                findings.push(Finding {
                    kind: "absent-source",
                    code: code.clone(),
                    period: indexed.periods[p].clone(),
                    rows: 0,
                    first_line: None,
                    detail: detail(lowered(p), "no row for this source in this period"),
                });
            }
        }
    }
    for &(t, p) in &overlaps {
        findings.push(Finding {
            kind: "overlap",
            code: plan.targets[t].clone(),
            period: indexed.periods[p].clone(),
            rows: 0,
            first_line: None,
            detail: "old and new codes of this unit both have values in this period; the same land is counted twice".into(),
        });
    }

    // Balances of the counts.
    let mut to_targets = vec![0.0f64; plan.sources.len()];
    let mut outside_weight = vec![0.0f64; plan.sources.len()];
    for r in &crosswalk.rows {
        let Some(s) = plan.source_index(&r.from_code) else {
            continue;
        };
        match &r.to_code {
            Some(t) if plan.targets.binary_search(t).is_ok() => to_targets[s] += r.weight,
            Some(_) => {}
            None => outside_weight[s] += r.weight,
        }
    }
    let mut balances = Vec::new();
    for (m, r) in config.requests.iter().enumerate() {
        let Request::Count(name) = r else { continue };
        let c = column(name);
        let (mut expected, mut outside, mut unbalanced) = (0.0, 0.0, 0.0);
        let mut by_period = Vec::new();
        for p in 0..periods {
            let (mut in_p, mut out_p) = (0.0, 0.0);
            for s in 0..plan.sources.len() {
                if let Some(v) = folded.values.get(p, s, c) {
                    in_p += v;
                    out_p += v * outside_weight[s];
                    expected += v * to_targets[s];
                    unbalanced += v * (1.0 - to_targets[s] - outside_weight[s]);
                }
            }
            outside += out_p;
            if out_p != 0.0 {
                findings.push(Finding {
                    kind: "outside",
                    code: String::new(),
                    period: indexed.periods[p].clone(),
                    rows: 0,
                    first_line: None,
                    detail: format!(
                        "{name}: {} of {} ({:.2} %) lies outside every target of the crosswalk and is in no output figure",
                        human(out_p),
                        human(in_p),
                        if in_p != 0.0 { 100.0 * out_p / in_p } else { 0.0 }
                    ),
                });
            }
            by_period.push((indexed.periods[p].clone(), in_p, out_p));
        }
        balances.push(Balance {
            variable: name.clone(),
            input: folded.totals[c],
            allocated: written_sums[m],
            outside,
            left_out: folded.left_out[c],
            emptied: expected - written_sums[m],
            unbalanced,
            outside_by_period: by_period,
        });
    }

    findings.sort();
    if let Some(report) = &config.report {
        staged.stage(report, |w| write_report(w, &findings))?;
    }
    let counts = count_findings(&findings);
    let mut report = Report {
        rows: table.rows as u64,
        rows_allocated: (0..periods)
            .flat_map(|p| (0..plan.sources.len() + pooled.len()).map(move |s| (p, s)))
            .map(|(p, s)| folded.cell(p, s).0 as u64)
            .sum(),
        targets: plan.targets.len(),
        periods: if with_period { periods } else { 0 },
        carried,
        decided: (decided_rows, decided_codes.len()),
        decided_none: decided.none.0,
        duplicates,
        findings,
        counts,
        coverage: config
            .requests
            .iter()
            .map(|r| r.name().to_string())
            .zip(coverage)
            .collect(),
        balances,
        crosswalk_label,
        output: written,
        sidecar: None,
        warnings: table.warnings.clone(),
    };
    if let Target::File(path) = &config.output {
        let sidecar = sidecar_path(path);
        let meta = sidecar_record(config, &report)?;
        staged.stage(&sidecar, |w| meta.write(w))?;
        report.sidecar = Some(sidecar);
    }
    staged.commit()?;
    Ok(report)
}

/// The pooled reports of the data prepared for allocation: members'
/// source indices and shares (by area of the built-in county geometry, or
/// by the populations given), and the composites that cannot be split,
/// with the reason.
fn prepare_pooled(
    config: &Config,
    composites: &[(String, Vec<String>)],
    plan: &Plan,
) -> Result<(Vec<composite::Pooled>, composite::Refused)> {
    if composites.is_empty() {
        return Ok((Vec::new(), Vec::new()));
    }
    let (sizes, basis) = match &config.split {
        PooledSplit::Area => {
            // A member's area in the 2023 layer, else in the 2017 one.
            let newer = composites_io::builtin_areas("builtin:counties-2023")?;
            let older = composites_io::builtin_areas("builtin:counties-2017")?;
            let mut sizes = BTreeMap::new();
            for m in composites.iter().flat_map(|(_, m)| m) {
                if let Some(a) = newer.get(m).or_else(|| older.get(m)) {
                    sizes.insert(m.clone(), *a);
                }
            }
            (sizes, composite::SplitBasis::Area)
        }
        PooledSplit::Population(path) => (
            composites_io::read_sizes(path, "code", "population")?,
            composite::SplitBasis::Population,
        ),
    };
    Ok(composite::prepare_pooled(
        composites,
        |m| plan.source_index(m),
        |m| sizes.get(m).copied().filter(|s| *s > 0.0),
        basis,
    ))
}

/// A number for a person to read: ten significant digits at most.
fn human(v: f64) -> String {
    NumberFormat::Significant(10).format(v)
}

/// How the data's codes are read for a crosswalk (as [`execute`] reads them).
fn form_of(config: &Config) -> CodeForm {
    match (&config.crosswalk, config.to_vintage) {
        (_, Some(_)) => CodeForm::County,
        (Some((_, cw)), None) => CodeForm::detect(cw.rows.iter().map(|r| r.from_code.as_str())),
        (None, None) => CodeForm::Plain,
    }
}

/// Writes the query of `--emit-sql`.
fn emit_sql(args: &Args, config: &Config, dialect: &str, global: Global) -> Result<()> {
    if config.data.state_column.is_some() && form_of(config) != CodeForm::County {
        return Err(Error::Usage(
            "--state-column joins a state and a county part into a county code, but the crosswalk's codes are not five-digit county codes".into(),
        ));
    }
    use crate::core::sql;
    let dialect: sql::Dialect = dialect
        .parse()
        .map_err(|e: String| Error::Usage(format!("--emit-sql: {e}")))?;
    let (data_table, crosswalk_table) = args
        .sql_tables
        .split_once(',')
        .map(|(d, c)| (d.trim().to_string(), c.trim().to_string()))
        .filter(|(d, c)| !d.is_empty() && !c.is_empty())
        .ok_or_else(|| {
            Error::Usage(format!(
                "--sql-tables {:?}: give two table names separated by a comma",
                args.sql_tables
            ))
        })?;
    let codes = match form_of(config) {
        CodeForm::County => sql::CodeForm::County,
        CodeForm::State => sql::CodeForm::State,
        CodeForm::Digits(w) => sql::CodeForm::Digits(w),
        CodeForm::Plain => sql::CodeForm::Text,
    };
    let query = sql::Query {
        dialect,
        data_table,
        crosswalk_table,
        crosswalk_has_origin: false,
        code_column: config.data.code_column.clone(),
        state_column: config.data.state_column.clone(),
        period_column: config.data.period_column.clone(),
        codes,
        variables: config
            .requests
            .iter()
            .map(|r| match r {
                Request::Count(c) => sql::Variable::Count(c.clone()),
                Request::Ratio {
                    name,
                    numerator,
                    denominator,
                } => sql::Variable::Ratio {
                    name: name.clone(),
                    numerator: numerator.clone(),
                    denominator: denominator.clone(),
                },
                Request::Mean { column, weight } => sql::Variable::Mean {
                    column: column.clone(),
                    weight: weight.clone(),
                },
            })
            .collect(),
        min_coverage: config.min_coverage,
        columns: output_header(config, false).0,
    };
    let text = query.render();
    crate::io::output::write_to(&config.output, |w| w.write_all(text.as_bytes()))?;
    say(
        global,
        format!(
            "regionkey apply: wrote the {} query; nothing was allocated here",
            dialect.as_str()
        ),
    );
    Ok(())
}

/// Runs the command: arguments, checked configuration, execution, summary.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = Config::from_args(&args)?;
    if let Some(dialect) = &args.emit_sql {
        return emit_sql(&args, &config, dialect, global);
    }
    let report = execute(&config)?;
    print_summary(global, &config, &report);
    Ok(())
}

fn count_findings(findings: &[Finding]) -> BTreeMap<&'static str, (u64, u64)> {
    let mut out: BTreeMap<&'static str, (u64, u64)> = BTreeMap::new();
    for f in findings {
        let e = out.entry(f.kind).or_default();
        e.0 += 1;
        e.1 += f.rows;
    }
    out
}

fn add_coverage(c: &mut [CoverageCounts], a: &Allocation) {
    for (m, c) in c.iter_mut().enumerate() {
        for t in a.first_target..a.first_target + a.targets {
            for p in 0..a.periods {
                let e = a.get(t, p, m);
                c.estimates += 1;
                if e.coverage >= 1.0 - 1e-9 {
                    c.full += 1;
                } else if e.coverage > 0.0 {
                    c.partial += 1;
                } else {
                    c.none += 1;
                }
            }
        }
    }
}

/// The summary lines of a report, as printed on standard error.
pub fn summary_lines(config: &Config, s: &Report) -> Vec<String> {
    let mut out = vec![format!(
        "regionkey apply: {} data rows; {} allocated",
        s.rows, s.rows_allocated
    )];
    for (kind, (n, rows)) in &s.counts {
        if *rows > 0 {
            out.push(format!("  {kind}: {n} ({rows} rows)"));
        } else {
            out.push(format!("  {kind}: {n}"));
        }
    }
    if s.carried > 0 {
        out.push(format!(
            "  codes of the data carried from earlier vintages: {}",
            s.carried
        ));
    }
    for (name, c) in &s.coverage {
        out.push(format!(
            "  {name}: {} estimates; full coverage {}, partial {}, none {}",
            c.estimates, c.full, c.partial, c.none
        ));
    }
    for b in &s.balances {
        let mut line = format!(
            "  {}: in {} = allocated {} + outside every target {} + not allocated {}",
            b.variable,
            human(b.input),
            human(b.allocated),
            human(b.outside),
            human(b.left_out)
        );
        if b.emptied.abs() > 1e-9 * b.input.abs().max(1.0) {
            line.push_str(&format!(
                " + emptied below --min-coverage {}",
                human(b.emptied)
            ));
        }
        if b.unbalanced.abs() > 1e-9 * b.input.abs().max(1.0) {
            line.push_str(&format!(
                " + lost to weights not adding up to 1: {}",
                human(b.unbalanced)
            ));
        }
        out.push(line);
    }
    if let Some(r) = &config.report {
        out.push(format!("  report: {}", r.display()));
    } else if !s.counts.is_empty() {
        out.push("  (write the reported rows with --report FILE)".into());
    }
    out.push(format!("  {CAUTION}"));
    out
}

fn print_summary(global: Global, config: &Config, s: &Report) {
    for w in &s.warnings {
        warn(w);
    }
    for b in &s.balances {
        if b.discrepancy().abs() > 1e-9 * b.input.abs().max(1.0) {
            warn(format!(
                "{}: the parts add up to {} less than came in ({}); please report this",
                b.variable,
                human(b.discrepancy()),
                human(b.input)
            ));
        }
    }
    for line in summary_lines(config, s) {
        say(global, line);
    }
}

fn write_report(w: &mut dyn Write, findings: &[Finding]) -> std::io::Result<()> {
    write_csv_record(
        w,
        &["kind", "code", "period", "rows", "first_line", "detail"],
    )?;
    for f in findings {
        write_csv_record(
            w,
            &[
                f.kind,
                &f.code,
                &f.period,
                &f.rows.to_string(),
                &f.first_line.map_or(String::new(), |l| l.to_string()),
                &f.detail,
            ],
        )?;
    }
    Ok(())
}

fn sidecar_record(config: &Config, s: &Report) -> Result<Sidecar> {
    use serde_json::json;
    let mut meta = Sidecar::new("apply", s.output.clone());
    meta.inputs
        .push(SidecarInput::file("data", &config.data.path, Some(s.rows))?);
    if let Some((p, cw)) = &config.crosswalk {
        meta.inputs.push(SidecarInput::file(
            "crosswalk",
            p,
            Some(cw.rows.len() as u64),
        )?);
    }
    meta.options = config.options.clone();
    let coverage: serde_json::Map<String, serde_json::Value> = s
        .coverage
        .iter()
        .map(|(n, c)| {
            (
                n.clone(),
                json!({"estimates": c.estimates, "full": c.full, "partial": c.partial, "none": c.none}),
            )
        })
        .collect();
    let reported: serde_json::Map<String, serde_json::Value> = s
        .counts
        .iter()
        .map(|(k, (n, rows))| (k.to_string(), json!({"items": n, "rows": rows})))
        .collect();
    let balances: serde_json::Map<String, serde_json::Value> = s
        .balances
        .iter()
        .map(|b| {
            (
                b.variable.clone(),
                json!({
                    "input": b.input,
                    "allocated": b.allocated,
                    "outside_every_target": b.outside,
                    "not_allocated": b.left_out,
                    "emptied_below_min_coverage": b.emptied,
                    "lost_to_unbalanced_weights": b.unbalanced,
                }),
            )
        })
        .collect();
    let d = &mut meta.details;
    d.insert("crosswalk".into(), json!(s.crosswalk_label));
    d.insert(
        "counts".into(),
        json!({
            "data_rows": s.rows,
            "rows_allocated": s.rows_allocated,
            "targets": s.targets,
            "periods": s.periods,
            "codes_carried": s.carried,
            "rows_with_decided_codes": s.decided.0,
            "codes_decided": s.decided.1,
            "rows_decided_none": s.decided_none,
            "duplicate_cells": s.duplicates,
            "reported": reported,
        }),
    );
    d.insert("coverage".into(), json!(coverage));
    d.insert("balance".into(), json!(balances));
    Ok(meta)
}

/// Reads a data table (exposed for tests of the data path).
pub fn read_data(spec: &DataSpec) -> Result<(DataTable, Indexed)> {
    let t = data::read(spec)?;
    let i = t.index();
    Ok((t, i))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn order_statistic_names_are_recognized() {
        for n in [
            "median_income",
            "income_median",
            "p50",
            "hh_p90",
            "percentile_75",
            "q3",
            "MedianAge",
        ] {
            assert!(looks_like_order_statistic(n), "{n}");
        }
        for n in [
            "population",
            "pop2020",
            "unemployed",
            "rate",
            "people",
            "pct_poor",
        ] {
            assert!(!looks_like_order_statistic(n), "{n}");
        }
    }

    #[test]
    fn rate_like_names_are_recognized_and_counts_are_not() {
        for n in [
            "rate",
            "unemployment_rate",
            "pct_poor",
            "poverty pct",
            "percent_uninsured",
            "deaths_per_1000",
            "per100k",
            "share",
            "served_share",
            "sex_ratio",
            "proportion_over_65",
            "UnemploymentRate",
        ] {
            assert!(looks_like_rate(n), "{n}");
        }
        for n in [
            "population",
            "households_served",
            "unemployed",
            "meals",
            "labor_force",
            "persons",
            "operators",
            "shares_outstanding",
            "cases",
        ] {
            assert!(!looks_like_rate(n), "{n}");
        }
    }

    #[test]
    fn codes_with_a_separate_state_part_are_joined() {
        let raw = RawCode {
            state: Some("6".into()),
            code: "37".into(),
        };
        assert_eq!(normalize(CodeForm::County, &raw), Ok("06037".into()));
        let raw = RawCode {
            state: None,
            code: "6037.0".into(),
        };
        assert_eq!(normalize(CodeForm::County, &raw), Ok("06037".into()));
        assert!(normalize(
            CodeForm::County,
            &RawCode {
                state: None,
                code: "abc".into()
            }
        )
        .is_err());
    }
}

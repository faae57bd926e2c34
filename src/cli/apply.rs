//! `regionkey apply DATA`: carry a data table onto target units through a
//! crosswalk (or onto a county vintage through the change history), with
//! the coverage of every estimate.
//!
//! Variables: `--sum COL` (counts), `--ratio NAME=NUM/DEN` (a rate rebuilt
//! from its allocated numerator and denominator), `--mean COL[:WEIGHT]` (a
//! weighted mean of an intensive variable: by the WEIGHT column allocated as
//! a count, or without one by the crosswalk's target share). Order
//! statistics (medians, percentiles) cannot be carried by any of these and
//! are refused.
//!
//! Every input row is accounted for: allocated, or reported (unmatched or
//! unreadable code, missing code or period, duplicate code and period).

use std::collections::{BTreeMap, BTreeSet};
use std::io::Write;
use std::path::{Path, PathBuf};

use super::{say, warn, Global};
use crate::core::allocate::{allocate_range, Allocation, MeanWeight, Measure, Origin, Plan, Spec};
use crate::core::chain::{check, ChainError};
use crate::core::crosswalk::{Basis, Crosswalk, CrosswalkRow};
use crate::core::fips::{CountyFips, StateFips};
use crate::core::history::{carry, Carried};
use crate::core::reference::{ChangeKind, Reference};
use crate::error::{Error, Result};
use crate::io::builtin::us_counties;
use crate::io::crosswalk_file;
use crate::io::data::{self, csv_field, DataSpec, DataTable, Indexed, RawCode, ResultLayout};
use crate::io::output::{write_file, write_to, Target};

/// The caution every output carries.
pub const CAUTION: &str = "Allocated figures are estimates: they assume values are spread evenly by area or by population within each source unit. For legal or funding uses, official relationship files and local practice prevail.";

/// The county crosswalk shipped with regionkey (2017 -> 2023 counties).
pub const SHIPPED_CROSSWALK: &str = "crosswalks/us-counties-2017-2023.csv";

/// Arguments.
#[derive(Debug, clap::Args)]
#[command(
    after_help = "Output columns: code, code_name (with --to-vintage), period (with --period-column), then for each variable NAME and NAME_coverage (and NAME_weighting for a mean). Coverage is the part of the target made of sources whose value is known (by target share, else by weight); an estimate with no known source is empty with coverage 0. A sidecar OUTPUT.json records inputs, options, counts and the caution that allocated figures are estimates."
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
    /// Decimals written for values.
    #[arg(long, default_value_t = 6)]
    pub decimals: usize,
    /// Field delimiter of the data (detected from the header line if not given); `tab` for a tab.
    #[arg(long = "delimiter", alias = "separator", value_name = "C")]
    pub separator: Option<String>,
    /// A text meaning "no value" besides an empty field (repeatable).
    #[arg(long, default_value = "NA")]
    pub missing: Vec<String>,
    /// A column whose name looks like an order statistic (median, p50,
    /// percentile) but is not one (repeatable).
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
    /// Where to write the results (CSV; `-` for standard output, then no sidecar).
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
}

/// A problem or a fact worth a line in the report.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct Finding {
    /// What (`unmatched-code`, `duplicate`, `carried`, ...).
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

/// A checked request for one output variable, by column names.
#[derive(Debug, Clone)]
enum Request {
    Count(String),
    Ratio {
        name: String,
        numerator: String,
        denominator: String,
    },
    Mean {
        column: String,
        weight: Option<String>,
    },
}

impl Request {
    fn name(&self) -> &str {
        match self {
            Request::Count(c) => c,
            Request::Ratio { name, .. } => name,
            Request::Mean { column, .. } => column,
        }
    }

    fn columns(&self) -> Vec<&str> {
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
    let mut names = BTreeSet::new();
    for r in &out {
        if !names.insert(r.name().to_string()) {
            return Err(Error::Usage(format!(
                "the output variable {:?} is asked for twice; each name may appear once",
                r.name()
            )));
        }
        for c in std::iter::once(r.name()).chain(r.columns()) {
            if looks_like_order_statistic(c) && !args.allow_name.iter().any(|a| a == c) {
                return Err(Error::Usage(format!(
                    "{c:?} looks like an order statistic (a median or percentile). A median of a target cannot be computed from the medians of its pieces: it needs the distribution within each unit. Carry the underlying counts instead (e.g. counts per income band, then recompute the median), or if {c:?} is not an order statistic, say so with --allow-name {c}"
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

/// How codes are normalized.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum CodeKind {
    County,
    State,
    Text,
}

/// Everything checked before the long work.
struct Config {
    requests: Vec<Request>,
    data: DataSpec,
    crosswalk: Option<(PathBuf, Crosswalk)>,
    to_vintage: Option<u16>,
    output: Target,
    report: Option<PathBuf>,
}

fn check_args(args: &Args) -> Result<Config> {
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
    if args.decimals > 15 {
        return Err(Error::Usage("--decimals: at most 15".into()));
    }
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
    let data = DataSpec {
        path: args.data.clone(),
        separator: parse_separator(&args.separator)?,
        code_column: args.code_column.clone(),
        state_column: args.state_column.clone(),
        period_column: args.period_column.clone(),
        value_columns,
        missing: args
            .missing
            .iter()
            .filter(|m| !m.is_empty())
            .cloned()
            .collect(),
    };
    data::check_columns(&data)?;
    let output = Target::parse(&args.output);
    output.check_writable()?;
    if let Target::File(p) = &output {
        if p.extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("parquet"))
        {
            return Err(Error::Usage(format!(
                "{}: results are written as CSV; give a .csv name (Parquet output is not built yet)",
                p.display()
            )));
        }
    }
    if let Some(r) = &args.report {
        Target::File(r.clone()).check_writable()?;
    }
    let crosswalk = match &args.crosswalk {
        Some(p) => {
            let cw = crosswalk_file::read_csv(p)?;
            match check("crosswalk", &cw) {
                Ok(()) => {}
                Err(e @ ChainError::Unbalanced { .. }) => warn(format!(
                    "{}: {e}; totals will not be conserved",
                    p.display()
                )),
                Err(e) => return Err(Error::Usage(format!("{}: {e}", p.display()))),
            }
            Some((p.clone(), cw))
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
    Ok(Config {
        requests,
        data,
        crosswalk,
        to_vintage: args.to_vintage,
        output,
        report: args.report.clone(),
    })
}

/// Normalizes a raw code; `Err` says why it cannot be read.
fn normalize(kind: CodeKind, raw: &RawCode) -> std::result::Result<String, String> {
    match (kind, &raw.state) {
        (CodeKind::County, Some(state)) => {
            let st: StateFips = state.parse().map_err(|e| format!("state part: {e}"))?;
            let t = raw.code.trim();
            let t = t.strip_suffix(".0").unwrap_or(t);
            let n: u16 = t
                .parse()
                .ok()
                .filter(|n| (1..=999).contains(n))
                .ok_or_else(|| format!("county part {:?} is not a number 1..999", raw.code))?;
            CountyFips::new(st, n)
                .map(|c| c.to_string())
                .ok_or_else(|| "not a county code".into())
        }
        (CodeKind::County, None) => raw
            .code
            .parse::<CountyFips>()
            .map(|c| c.to_string())
            .map_err(|e| e.to_string()),
        (CodeKind::State, _) => raw
            .code
            .parse::<StateFips>()
            .map(|c| c.to_string())
            .map_err(|e| e.to_string()),
        (CodeKind::Text, _) => Ok(raw.code.trim().to_string()),
    }
}

fn code_kind(cw: &Crosswalk) -> CodeKind {
    let all = |f: &dyn Fn(&str) -> bool| cw.rows.iter().all(|r| f(&r.from_code));
    if all(&|c| c.len() == 5 && c.parse::<CountyFips>().is_ok()) {
        CodeKind::County
    } else if all(&|c| c.len() == 2 && c.parse::<StateFips>().is_ok()) {
        CodeKind::State
    } else {
        CodeKind::Text
    }
}

/// The rows a crosswalk has for one source code.
fn rows_for<'a>(cw: &'a Crosswalk, code: &str) -> impl Iterator<Item = &'a CrosswalkRow> + 'a {
    let start = cw.rows.partition_point(|r| r.from_code.as_str() < code);
    let code = code.to_string();
    cw.rows[start..]
        .iter()
        .take_while(move |r| r.from_code == code)
}

fn sorted(mut cw: Crosswalk) -> Crosswalk {
    cw.sort();
    cw
}

/// The crosswalk that carries each data code onto the counties of `year`.
struct Carrying {
    crosswalk: Crosswalk,
    carried: BTreeSet<String>,
    findings: Vec<Finding>,
    /// Divided codes without weights: (code, note).
    unweighted: Vec<(String, String)>,
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

fn carry_codes(
    codes: &BTreeMap<String, (u64, u64)>,
    year: u16,
    reference: &Reference,
    user: Option<&Crosswalk>,
    shipped: Option<&Crosswalk>,
    shipped_label: &str,
) -> Carrying {
    let mut out = Carrying {
        crosswalk: Crosswalk::default(),
        carried: BTreeSet::new(),
        findings: Vec::new(),
        unweighted: Vec::new(),
    };
    for (code, &(rows, first_line)) in codes {
        let finding = |kind: &'static str, detail: String| Finding {
            kind,
            code: code.clone(),
            period: String::new(),
            rows,
            first_line: Some(first_line),
            detail,
        };
        let valid_now = reference.unit(code, year).is_some();
        if let Some(user) = user {
            let rows: Vec<CrosswalkRow> = rows_for(user, code).cloned().collect();
            if !rows.is_empty() {
                if !valid_now {
                    out.carried.insert(code.clone());
                }
                out.findings.push(finding(
                    "from-crosswalk",
                    format!("{} row(s) of the given crosswalk", rows.len()),
                ));
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
            Carried::To { code: to, note } => {
                out.carried.insert(code.clone());
                let rows: Vec<CrosswalkRow> = if year == 2023 {
                    shipped
                        .map(|s| rows_for(s, code).cloned().collect())
                        .unwrap_or_default()
                } else {
                    Vec::new()
                };
                if !rows.is_empty() {
                    out.findings.push(finding(
                        "carried",
                        format!("carried to {to} ({note}); weights from {shipped_label}"),
                    ));
                    out.crosswalk.rows.extend(rows);
                    continue;
                }
                let whole = renamed_only(reference, code);
                let detail = if whole {
                    format!("carried one to one to {to} ({note})")
                } else {
                    format!("carried to {to} ({note}); counts are added to {to}; its share of {to} is unknown, so means weighted by target share leave it out")
                };
                out.findings.push(finding("carried", detail));
                out.crosswalk.rows.push(CrosswalkRow {
                    from_code: code.clone(),
                    to_code: Some(to),
                    weight: 1.0,
                    target_share: whole.then_some(1.0),
                    basis: Basis::History,
                });
            }
            Carried::Divided { successors, note } => {
                out.carried.insert(code.clone());
                let rows: Vec<CrosswalkRow> = if year == 2023 {
                    shipped
                        .map(|s| rows_for(s, code).cloned().collect())
                        .unwrap_or_default()
                } else {
                    Vec::new()
                };
                if rows.is_empty() {
                    out.unweighted.push((
                        code.clone(),
                        format!("{note}; successors {}", successors.join(", ")),
                    ));
                    out.findings.push(finding(
                        "divided-without-weights",
                        format!("divided among {} ({note}); no weights: rows left out. Give --crosswalk FILE with rows from {code} to the {year} units", successors.join(", ")),
                    ));
                } else {
                    out.findings.push(finding(
                        "divided",
                        format!(
                            "divided among {} ({note}); weights from {shipped_label}",
                            successors.join(", ")
                        ),
                    ));
                    out.crosswalk.rows.extend(rows);
                }
            }
            Carried::Unknown => out.findings.push(finding(
                "unknown-code",
                "not a county code of any vintage in the built-in reference; rows left out"
                    .to_string(),
            )),
        }
    }
    // The other pieces of the targets that weighted rows reach: sources of
    // the weight tables with no row in the data. They join the plan as
    // carried sources without values, so the coverage of those targets
    // counts what is missing (a region made mostly of counties absent from
    // the data is not fully covered).
    let reached: BTreeSet<String> = out
        .crosswalk
        .rows
        .iter()
        .filter(|r| r.basis != Basis::History)
        .filter_map(|r| r.to_code.clone())
        .collect();
    let present: BTreeSet<String> = out
        .crosswalk
        .rows
        .iter()
        .map(|r| r.from_code.clone())
        .collect();
    let mut extra: Vec<CrosswalkRow> = Vec::new();
    let mut taken: BTreeSet<String> = BTreeSet::new();
    for table in [user, if year == 2023 { shipped } else { None }]
        .into_iter()
        .flatten()
    {
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

/// Writes the query of `--emit-sql`.
fn emit_sql(args: &Args, config: &Config, dialect: &str, global: Global) -> Result<()> {
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
    let codes = match config.crosswalk.as_ref().map(|(_, cw)| code_kind(cw)) {
        Some(CodeKind::County) => sql::CodeForm::County,
        Some(CodeKind::State) => sql::CodeForm::State,
        _ => sql::CodeForm::Text,
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
        min_coverage: args.min_coverage,
    };
    let text = query.render();
    write_to(&config.output, |w| w.write_all(text.as_bytes()))?;
    say(
        global,
        format!(
            "regionkey apply: wrote the {} query; nothing was allocated here",
            dialect.as_str()
        ),
    );
    Ok(())
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = check_args(&args)?;
    if let Some(dialect) = &args.emit_sql {
        return emit_sql(&args, &config, dialect, global);
    }
    let table = data::read(&config.data)?;
    let indexed = table.index();
    let mut findings: Vec<Finding> = Vec::new();
    if indexed.missing_code.0 > 0 {
        findings.push(Finding {
            kind: "missing-code",
            code: String::new(),
            period: String::new(),
            rows: indexed.missing_code.0,
            first_line: Some(indexed.missing_code.1),
            detail: format!("rows with an empty {}; left out", config.data.code_column),
        });
    }
    if indexed.missing_period.0 > 0 {
        findings.push(Finding {
            kind: "missing-period",
            code: String::new(),
            period: String::new(),
            rows: indexed.missing_period.0,
            first_line: Some(indexed.missing_period.1),
            detail: "rows with an empty period; left out".into(),
        });
    }

    // Normalize the distinct codes.
    let kind = match (&config.crosswalk, config.to_vintage) {
        (_, Some(_)) => CodeKind::County,
        (Some((_, cw)), None) => code_kind(cw),
        (None, None) => CodeKind::Text,
    };
    if config.data.state_column.is_some() && kind != CodeKind::County {
        return Err(Error::Usage(
            "--state-column joins a state and a county part into a county code, but the crosswalk's codes are not five-digit county codes".into(),
        ));
    }
    let normalized: Vec<Option<String>> = indexed
        .codes
        .iter()
        .zip(&indexed.code_rows)
        .map(|(raw, &(rows, first_line))| match normalize(kind, raw) {
            Ok(c) => Some(c),
            Err(why) => {
                let written = match &raw.state {
                    Some(s) => format!("{s}|{}", raw.code),
                    None => raw.code.clone(),
                };
                findings.push(Finding {
                    kind: "unreadable-code",
                    code: written,
                    period: String::new(),
                    rows,
                    first_line: Some(first_line),
                    detail: format!("{why}; rows left out"),
                });
                None
            }
        })
        .collect();
    let mut by_code: BTreeMap<String, (u64, u64)> = BTreeMap::new();
    for (n, &(rows, first)) in normalized.iter().zip(&indexed.code_rows) {
        if let Some(n) = n {
            let e = by_code.entry(n.clone()).or_insert((0, first));
            e.0 += rows;
            e.1 = e.1.min(first);
        }
    }

    // The crosswalk the plan is built from.
    let (plan, carried, extra_names, crosswalk_label) = match config.to_vintage {
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
            let user = config.crosswalk.as_ref().map(|(_, cw)| sorted(cw.clone()));
            let c = carry_codes(
                &by_code,
                year,
                reference,
                user.as_ref(),
                shipped.as_ref(),
                SHIPPED_CROSSWALK,
            );
            if !c.unweighted.is_empty() && !args.skip_unweighted {
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
            findings.extend(c.findings);
            // Every unit of the vintage with --all-units; otherwise the units
            // the data's codes reach.
            let mut targets: Vec<String> = if args.all_units {
                reference.units_in(year).map(|u| u.code.clone()).collect()
            } else {
                Vec::new()
            };
            targets.sort();
            targets.dedup();
            let carried = c.carried;
            let plan = Plan::new(&c.crosswalk, &targets, |code| {
                if carried.contains(code) {
                    Origin::Carried
                } else {
                    Origin::Direct
                }
            });
            let names: Vec<String> = plan
                .targets
                .iter()
                .map(|t| {
                    reference
                        .unit(t, year)
                        .map_or(String::new(), |u| u.full_name())
                })
                .collect();
            let label = match &config.crosswalk {
                Some((p, _)) => format!(
                    "built-in change history to {year}, {}, {}",
                    p.display(),
                    SHIPPED_CROSSWALK
                ),
                None => format!("built-in change history to {year}, {SHIPPED_CROSSWALK}"),
            };
            (plan, carried.len(), Some(names), label)
        }
        None => {
            let (path, cw) = config
                .crosswalk
                .as_ref()
                .ok_or_else(|| Error::Usage("no crosswalk".into()))?;
            (
                Plan::new(cw, &[], |_| Origin::Direct),
                0,
                None,
                path.display().to_string(),
            )
        }
    };

    // Codes the plan does not know.
    let mut source_of: Vec<Option<u32>> = Vec::with_capacity(normalized.len());
    let mut unmatched: BTreeMap<String, (u64, u64)> = BTreeMap::new();
    for (n, &(rows, first)) in normalized.iter().zip(&indexed.code_rows) {
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
    let explained: BTreeSet<String> = findings.iter().map(|f| f.code.clone()).collect();
    for (code, (rows, first)) in unmatched {
        if !explained.contains(&code) {
            findings.push(Finding {
                kind: "unmatched-code",
                code,
                period: String::new(),
                rows,
                first_line: Some(first),
                detail: "not a source code of the crosswalk; rows left out".into(),
            });
        }
    }
    let cells = indexed.periods.len() as u64 * plan.sources.len() as u64;
    if cells >= u32::MAX as u64 {
        return Err(Error::Usage(format!(
            "{} periods x {} source codes is too many cells to hold; split the table by period",
            indexed.periods.len(),
            plan.sources.len()
        )));
    }
    let folded = table.fold(&indexed, &source_of, plan.sources.len());

    // Duplicates and absent sources.
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
    for (s, code) in plan.sources.iter().enumerate() {
        let absent: Vec<usize> = (0..indexed.periods.len())
            .filter(|&p| folded.cell(p, s).0 == 0)
            .collect();
        if absent.len() == indexed.periods.len() {
            findings.push(Finding {
                kind: "absent-source",
                code: code.clone(),
                period: String::new(),
                rows: 0,
                first_line: None,
                detail: "a source of the crosswalk with no row in the data; its targets' coverage is lower".into(),
            });
        } else {
            for p in absent {
                findings.push(Finding {
                    kind: "absent-source",
                    code: code.clone(),
                    period: indexed.periods[p].clone(),
                    rows: 0,
                    first_line: None,
                    detail: "no row for this source in this period; its targets' coverage is lower"
                        .into(),
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
        min_coverage: args.min_coverage,
    };

    // Write.
    let layout = ResultLayout {
        names: config
            .requests
            .iter()
            .map(|r| r.name().to_string())
            .collect(),
        notes: config
            .requests
            .iter()
            .map(|r| match r {
                Request::Mean { column, weight } => Some((
                    format!("{column}_weighting"),
                    weight.clone().unwrap_or_else(|| "target_share".into()),
                )),
                _ => None,
            })
            .collect(),
        with_period,
        target_names: extra_names,
        decimals: args.decimals,
    };
    let mut coverage = vec![(0u64, 0u64, 0u64, 0u64); spec.measures.len()];
    let mut overlaps: Vec<(usize, usize)> = Vec::new();
    let run_allocation =
        |targets: std::ops::Range<usize>| allocate_range(&plan, &folded.values, &spec, targets);
    let mut seen = |a: &Allocation| {
        add_coverage(&mut coverage, a);
        overlaps.extend(a.overlaps.iter().copied());
    };
    write_to(&config.output, |w| {
        data::write_results(
            w,
            &plan,
            &indexed.periods,
            &run_allocation,
            &mut seen,
            &layout,
        )
    })?;
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
    findings.sort();
    if let Some(report) = &config.report {
        write_file(report, |w| write_report(w, &findings))?;
    }
    let counts = count_findings(&findings);
    let summary = Summary {
        rows: table.rows as u64,
        rows_allocated: (0..indexed.periods.len())
            .flat_map(|p| (0..plan.sources.len()).map(move |s| (p, s)))
            .map(|(p, s)| folded.cell(p, s).0 as u64)
            .sum(),
        targets: plan.targets.len(),
        periods: if with_period {
            indexed.periods.len()
        } else {
            0
        },
        carried,
        duplicates,
        counts,
        coverage,
    };
    if let Target::File(path) = &config.output {
        let sidecar = sidecar_path(path);
        let json = sidecar_json(&args, &config, &crosswalk_label, &summary, &layout)?;
        write_file(&sidecar, |w| w.write_all(json.as_bytes()))?;
    }
    print_summary(global, &config, &summary);
    Ok(())
}

/// Figures for the summary and the sidecar.
struct Summary {
    rows: u64,
    rows_allocated: u64,
    targets: usize,
    periods: usize,
    carried: usize,
    duplicates: u64,
    counts: BTreeMap<&'static str, (u64, u64)>,
    /// Per measure: (estimates, full coverage, partial, none).
    coverage: Vec<(u64, u64, u64, u64)>,
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

fn add_coverage(c: &mut [(u64, u64, u64, u64)], a: &Allocation) {
    for (m, c) in c.iter_mut().enumerate() {
        for t in a.first_target..a.first_target + a.targets {
            for p in 0..a.periods {
                let e = a.get(t, p, m);
                c.0 += 1;
                if e.coverage >= 1.0 - 1e-9 {
                    c.1 += 1;
                } else if e.coverage > 0.0 {
                    c.2 += 1;
                } else {
                    c.3 += 1;
                }
            }
        }
    }
}

fn print_summary(global: Global, config: &Config, s: &Summary) {
    say(
        global,
        format!(
            "regionkey apply: {} data rows; {} allocated",
            s.rows, s.rows_allocated
        ),
    );
    for (kind, (n, rows)) in &s.counts {
        say(global, format!("  {kind}: {n} ({rows} rows)"));
    }
    if s.carried > 0 {
        say(
            global,
            format!("  codes carried from earlier vintages: {}", s.carried),
        );
    }
    for (r, c) in config.requests.iter().zip(&s.coverage) {
        say(
            global,
            format!(
                "  {}: {} estimates; full coverage {}, partial {}, none {}",
                r.name(),
                c.0,
                c.1,
                c.2,
                c.3
            ),
        );
    }
    if let Some(r) = &config.report {
        say(global, format!("  report: {}", r.display()));
    } else if !s.counts.is_empty() {
        say(global, "  (write the reported rows with --report FILE)");
    }
    say(global, format!("  {CAUTION}"));
}

fn write_report(w: &mut dyn Write, findings: &[Finding]) -> std::io::Result<()> {
    writeln!(w, "kind,code,period,rows,first_line,detail")?;
    for f in findings {
        writeln!(
            w,
            "{},{},{},{},{},{}",
            f.kind,
            csv_field(&f.code),
            csv_field(&f.period),
            f.rows,
            f.first_line.map_or(String::new(), |l| l.to_string()),
            csv_field(&f.detail)
        )?;
    }
    Ok(())
}

/// The sidecar of `path`: `path` with `.json` appended.
pub fn sidecar_path(path: &Path) -> PathBuf {
    let mut s = path.as_os_str().to_owned();
    s.push(".json");
    PathBuf::from(s)
}

fn sidecar_json(
    args: &Args,
    config: &Config,
    crosswalk_label: &str,
    s: &Summary,
    layout: &ResultLayout,
) -> Result<String> {
    use serde_json::json;
    let mut inputs = vec![json!({
        "role": "data",
        "path": config.data.path.display().to_string(),
        "sha256": data::sha256_file(&config.data.path)?,
        "rows": s.rows,
    })];
    if let Some((p, cw)) = &config.crosswalk {
        inputs.push(json!({
            "role": "crosswalk",
            "path": p.display().to_string(),
            "sha256": data::sha256_file(p)?,
            "rows": cw.rows.len(),
        }));
    }
    let coverage: serde_json::Map<String, serde_json::Value> = layout
        .names
        .iter()
        .zip(&s.coverage)
        .map(|(n, c)| {
            (
                n.clone(),
                json!({"estimates": c.0, "full": c.1, "partial": c.2, "none": c.3}),
            )
        })
        .collect();
    let reported: serde_json::Map<String, serde_json::Value> = s
        .counts
        .iter()
        .map(|(k, (n, rows))| (k.to_string(), json!({"items": n, "rows": rows})))
        .collect();
    let value = json!({
        "command": "apply",
        "regionkey_version": env!("CARGO_PKG_VERSION"),
        "inputs": inputs,
        "crosswalk": crosswalk_label,
        "options": {
            "code_column": args.code_column,
            "state_column": args.state_column,
            "period_column": args.period_column,
            "to_vintage": args.to_vintage,
            "sum": args.sums,
            "ratio": args.ratios,
            "mean": args.means,
            "min_coverage": args.min_coverage,
            "decimals": args.decimals,
            "missing": args.missing,
        },
        "counts": {
            "data_rows": s.rows,
            "rows_allocated": s.rows_allocated,
            "targets": s.targets,
            "periods": s.periods,
            "codes_carried": s.carried,
            "duplicate_cells": s.duplicates,
            "reported": reported,
        },
        "coverage": coverage,
        "caution": CAUTION,
    });
    serde_json::to_string_pretty(&value)
        .map(|t| t + "\n")
        .map_err(|e| Error::Usage(format!("cannot write metadata: {e}")))
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
    fn codes_with_a_separate_state_part_are_joined() {
        let raw = RawCode {
            state: Some("6".into()),
            code: "37".into(),
        };
        assert_eq!(normalize(CodeKind::County, &raw), Ok("06037".into()));
        let raw = RawCode {
            state: None,
            code: "6037.0".into(),
        };
        assert_eq!(normalize(CodeKind::County, &raw), Ok("06037".into()));
        assert!(normalize(
            CodeKind::County,
            &RawCode {
                state: None,
                code: "abc".into()
            }
        )
        .is_err());
    }
}

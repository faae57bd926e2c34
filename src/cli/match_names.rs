//! `regionkey match`: gives every row of a table a code it can stand behind,
//! says how it got there, and lists what it cannot settle for review.
//!
//! Output: every input row, in input order, with all its columns, plus
//! `code`, `code_name`, `match_status`, `match_method`, `match_score`, `note`
//! and `candidates`. When the input already has a column of one of these
//! names, all seven added columns are prefixed with `rk_` (and if one of
//! those is taken too, the command stops with an error naming the column).

use std::io::Write;
use std::path::{Path, PathBuf};

use rayon::prelude::*;

use super::{say, warn, Global};
pub use crate::core::match_table::ADDED_COLUMNS;
use crate::core::match_table::{
    added_fields, distinct_values, match_columns, states_among, Columns, KeyColumn, Matched,
    Settings, Tally,
};
use crate::core::matcher::{CodeForm, Matcher, Status};
use crate::core::reference::Reference;
use crate::error::{Error, Location, Result};
use crate::io::builtin::{read_reference_file, us_counties, us_states};
use crate::io::composites::{as_aliases, read_composites_file};
use crate::io::output::{write_to, Target};
use crate::io::progress::Progress;
use crate::io::review::{read_decisions, write_review, Decisions};
use crate::io::table::{read_table, ReadOptions, Table};

/// Rows of the matched table written as one block of CSV by one thread.
const WRITE_BLOCK: usize = 8192;

/// Prefix of the added columns when the input already uses one of their names.
pub const COLUMN_PREFIX: &str = "rk_";

/// The latest vintage the built-in references describe (reference/README.md).
pub const BUILTIN_LATEST_VINTAGE: u16 = 2023;

/// What the names are matched to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum LevelArg {
    /// Counties and equivalents (five-digit FIPS codes).
    County,
    /// States and equivalents (two-digit FIPS codes).
    State,
}

/// Arguments of `regionkey match`.
#[derive(Debug, clap::Args)]
#[command(after_help = "\
Every input row appears in the output, in input order. A name the matcher cannot settle gets
match_status `review` (several candidates, or a doubtful one) or `unmatched` (a placeholder, a
city that is not a county equivalent, nothing close). Write them out with --review FILE, fill in
the `chosen_code` column (a code, or `none` to leave a name unmatched), and pass the file back
with --decisions FILE: decisions win on every later run, in the years of their row's `years`
column (empty = every year). --distinct-keys FILE writes one row per distinct (name, state,
year) with its result, a small table to join back where the data lives.")]
pub struct Args {
    /// Input table: CSV, TSV (delimiter detected) or Parquet; `-` reads standard input.
    pub input: PathBuf,

    /// Column holding the place names (or codes).
    #[arg(long, value_name = "COL")]
    pub name_column: String,

    /// Column holding the state: name, postal code, abbreviation or FIPS code.
    #[arg(long, value_name = "COL")]
    pub state_column: Option<String>,

    /// Boundary vintage whose units are matched (default: the latest in the reference).
    #[arg(long, value_name = "YEAR")]
    pub vintage: Option<u16>,

    /// Column holding each row's year: the row is matched against the units
    /// of that vintage (years after the latest vintage use the latest).
    /// Overrides --vintage.
    #[arg(long, value_name = "COL", conflicts_with = "vintage")]
    pub vintage_column: Option<String>,

    /// Match counties (default) or states.
    #[arg(long, value_enum)]
    pub level: Option<LevelArg>,

    /// Your own reference list (columns code, name; optional parent, description,
    /// valid_from, valid_to) instead of the built-in US one.
    #[arg(long, value_name = "FILE")]
    pub reference: Option<PathBuf>,

    /// Your own composites (units reported as one): one row per composite with
    /// `name` and `members` (codes joined by +), or a membership list with
    /// `unit` and `group`; optional `state`. Added to the built-in ones (New York City).
    #[arg(long, value_name = "FILE")]
    pub composites: Option<PathBuf>,

    /// Decisions from an earlier review (a filled-in review file); they win over the matcher.
    #[arg(long, value_name = "FILE")]
    pub decisions: Option<PathBuf>,

    /// Where to write the matched table; `-` is standard output.
    #[arg(long, short, value_name = "FILE", default_value = "-")]
    pub output: String,

    /// Where to write the review list (CSV), one row per distinct name (and
    /// run of years) that needs a decision.
    #[arg(long, value_name = "FILE")]
    pub review: Option<String>,

    /// Where to write one row per distinct (name, state, year) with its
    /// result (CSV): the table to join back where the data lives.
    #[arg(long, value_name = "FILE")]
    pub distinct_keys: Option<String>,

    /// Field delimiter of the input (a single character, or `tab`); detected when absent.
    #[arg(long, value_name = "C", value_parser = parse_delimiter)]
    pub delimiter: Option<u8>,
}

fn parse_delimiter(text: &str) -> std::result::Result<u8, String> {
    match text {
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        t if t.len() == 1 && t.is_ascii() => Ok(t.as_bytes()[0]),
        _ => Err(format!(
            "{text:?} is not a one-character delimiter (or `tab`)"
        )),
    }
}

/// Where the units come from.
pub enum Source {
    /// A built-in reference.
    Builtin(&'static Reference),
    /// The user's own list.
    File(Reference),
}

impl Source {
    /// The reference.
    pub fn get(&self) -> &Reference {
        match self {
            Source::Builtin(r) => r,
            Source::File(r) => r,
        }
    }
}

/// The checked configuration of one run.
pub struct Config {
    /// Input table (`-` for standard input).
    pub input: PathBuf,
    /// Its field delimiter, when given.
    pub delimiter: Option<u8>,
    /// Column of names (or codes).
    pub name_column: String,
    /// Column of states, if any.
    pub state_column: Option<String>,
    /// Column of each row's year, if any.
    pub vintage_column: Option<String>,
    /// What the names are matched against.
    pub source: Source,
    /// How numbers are read, the vintage of rows without a year of their
    /// own, the span of vintages the reference covers.
    pub settings: Settings,
    /// Decisions file, if any.
    pub decisions: Option<PathBuf>,
    /// The matched table.
    pub output: Target,
    /// The review list, if asked for.
    pub review: Option<Target>,
    /// The distinct keys with their results, if asked for.
    pub distinct_keys: Option<Target>,
    /// No progress bar.
    pub quiet: bool,
}

/// What a run did, for the summary.
#[derive(Debug, Clone, Default)]
pub struct Report {
    /// Counts by status and method, names, decisions.
    pub tally: Tally,
    /// Things the user should know (encoding fallback, a state column not used).
    pub warnings: Vec<String>,
    /// True when a review file was written.
    pub review_written: bool,
    /// Rows written to the distinct-keys file, if one was asked for.
    pub distinct_keys: Option<usize>,
}

/// The reference and the settings of a run, checked as the command checks
/// its options: `level` and `reference` exclusive, no state column with
/// `--level state`, a vintage inside the built-in county reference, every
/// member of the user's composites a unit. The command and the Python
/// package both start here.
pub fn prepare(
    level: Option<LevelArg>,
    reference: Option<&Path>,
    composites: Option<&Path>,
    vintage: Option<u16>,
    has_states: bool,
) -> Result<(Source, Settings)> {
    let (source, codes) = match (reference, level) {
        (Some(_), Some(_)) => {
            return Err(Error::Usage(
                "--level chooses a built-in reference; it cannot be combined with --reference"
                    .into(),
            ))
        }
        (Some(path), None) => (Source::File(read_reference_file(path)?), CodeForm::Plain),
        (None, Some(LevelArg::State)) => (Source::Builtin(us_states()?), CodeForm::State),
        (None, _) => (Source::Builtin(us_counties()?), CodeForm::County),
    };
    if codes == CodeForm::State && has_states {
        return Err(Error::Usage(
            "--state-column has no meaning with --level state: the names are the states".into(),
        ));
    }
    let r = source.get();
    // The spans of the built-in reference end or start no later than 2022
    // (no change fell in 2023), so `latest_year` says 2022; the data cover
    // vintage 2023 (reference/README.md).
    let latest = match source {
        Source::Builtin(_) => r.latest_year().unwrap_or(0).max(BUILTIN_LATEST_VINTAGE),
        Source::File(_) => r.latest_year().unwrap_or(0),
    };
    let vintage = vintage.unwrap_or(latest);
    let first = r.units.iter().map(|u| u.valid.from).min().unwrap_or(0);
    if codes == CodeForm::County && (vintage < first || vintage > latest) {
        return Err(Error::Usage(format!(
            "--vintage {vintage}: the built-in county reference covers {first}-{latest}"
        )));
    }
    let source = match composites {
        None => source,
        Some(path) => {
            let named = read_composites_file(path)?;
            let mut r = source.get().clone();
            for c in named.items() {
                if let Some(m) = c.members.iter().find(|m| r.eras(m).is_empty()) {
                    return Err(Error::Usage(format!(
                        "{}: composite {:?} ({}) names {m}, which is no unit of the reference",
                        path.display(),
                        c.name,
                        c.source
                    )));
                }
            }
            r.aliases.extend(as_aliases(&named));
            Source::File(r)
        }
    };
    let settings = Settings {
        codes,
        vintage,
        span: (first, latest),
    };
    Ok((source, settings))
}

/// Turns arguments into a checked configuration: outputs writable and
/// distinct, the reference read, the vintage inside it.
pub fn configure(args: &Args, global: Global) -> Result<Config> {
    let output = Target::parse(&args.output);
    output.check_writable()?;
    let mut others: Vec<(&str, Target)> = Vec::new();
    for (flag, value) in [
        ("--review", &args.review),
        ("--distinct-keys", &args.distinct_keys),
    ] {
        if let Some(v) = value {
            let t = Target::parse(v);
            t.check_writable()?;
            if t == output || others.iter().any(|(_, o)| *o == t) {
                return Err(Error::Usage(format!(
                    "{flag} names the same place as another output; give each output its own file"
                )));
            }
            others.push((flag, t));
        }
    }
    let take = |flag: &str, others: &mut Vec<(&str, Target)>| {
        others
            .iter()
            .position(|(f, _)| *f == flag)
            .map(|i| others.remove(i).1)
    };
    let review = take("--review", &mut others);
    let distinct_keys = take("--distinct-keys", &mut others);
    let (source, settings) = prepare(
        args.level,
        args.reference.as_deref(),
        args.composites.as_deref(),
        args.vintage,
        args.state_column.is_some(),
    )?;
    Ok(Config {
        input: args.input.clone(),
        delimiter: args.delimiter,
        name_column: args.name_column.clone(),
        state_column: args.state_column.clone(),
        vintage_column: args.vintage_column.clone(),
        source,
        settings,
        decisions: args.decisions.clone(),
        output,
        review,
        distinct_keys,
        quiet: global.quiet,
    })
}

/// The names of the added columns for this input.
fn added_columns(table: &Table) -> Result<Vec<String>> {
    let taken = |n: &str| table.headers.iter().any(|h| h == n);
    if !ADDED_COLUMNS.iter().any(|c| taken(c)) {
        return Ok(ADDED_COLUMNS.iter().map(|s| s.to_string()).collect());
    }
    let prefixed: Vec<String> = ADDED_COLUMNS
        .iter()
        .map(|c| format!("{COLUMN_PREFIX}{c}"))
        .collect();
    if let Some(c) = prefixed.iter().find(|c| taken(c)) {
        return Err(Error::input(
            Location::file(&table.path).at_line(1).in_column(c),
            format!(
                "the input already has columns named like the ones match adds ({} and {c}); rename them",
                c.trim_start_matches(COLUMN_PREFIX)
            ),
        ));
    }
    Ok(prefixed)
}

/// Header names (folded: lower case, letters and digits only) that say a
/// column holds states.
const STATE_LIKE: &[&str] = &[
    "state",
    "st",
    "states",
    "statename",
    "stname",
    "stateabbr",
    "stateabbrev",
    "stateabbreviation",
    "statecode",
    "statefips",
    "statefp",
    "stusps",
    "stabbr",
    "usps",
];

/// Further header names that say a column holds the parents of a user's
/// own units.
const PARENT_LIKE: &[&str] = &[
    "parent",
    "parentname",
    "parentcode",
    "province",
    "region",
    "regionname",
    "regioncode",
];

fn folded(header: &str) -> String {
    header
        .chars()
        .filter(char::is_ascii_alphanumeric)
        .collect::<String>()
        .to_ascii_lowercase()
}

/// A column that holds states but was not given as --state-column: a
/// warning saying how to use it (without it a name is accepted only when
/// it is unique in the whole reference).
fn unused_state_columns(
    config: &Config,
    table: &Table,
    matcher: &Matcher<'_>,
    used: &[Option<usize>],
) -> Vec<String> {
    let mut warnings = Vec::new();
    if !matcher.has_parents() || config.settings.codes == CodeForm::State {
        return warnings;
    }
    let user = matches!(config.source, Source::File(_));
    for (col, header) in table.headers.iter().enumerate() {
        let f = folded(header);
        let like = STATE_LIKE.contains(&f.as_str()) || (user && PARENT_LIKE.contains(&f.as_str()));
        if !like || used.contains(&Some(col)) {
            continue;
        }
        let values = distinct_values(table.records.iter().map(|r| &r[col]));
        let states = states_among(matcher, &values);
        if !values.is_empty() && states * 2 >= values.len() {
            warnings.push(format!(
                "{}: column {header:?} holds states but is not used; pass --state-column {header:?} to read each name within its state (without it a name is accepted only when it is unique in the whole reference)",
                table.path.display()
            ));
        }
    }
    warnings
}

/// Runs one match: reads the input and the decisions, matches every
/// distinct (name, state, year), writes the outputs.
pub fn execute(config: &Config) -> Result<Report> {
    let reference = config.source.get();
    let decisions = match &config.decisions {
        Some(path) => read_decisions(path)?,
        None => Decisions::default(),
    };
    let table = read_table(
        &config.input,
        ReadOptions {
            delimiter: config.delimiter,
        },
    )?;
    let mut warnings = table.warnings.clone();
    let name_col = table.column(&config.name_column)?;
    let state_col = config
        .state_column
        .as_deref()
        .map(|c| table.column(c))
        .transpose()?;
    let vintage_col = config
        .vintage_column
        .as_deref()
        .map(|c| table.column(c))
        .transpose()?;
    let added = added_columns(&table)?;
    if state_col.is_none() {
        let matcher = Matcher::new(reference, config.settings.vintage, config.settings.codes);
        warnings.extend(unused_state_columns(
            config,
            &table,
            &matcher,
            &[Some(name_col), vintage_col],
        ));
    }
    let column = |c: usize| -> Vec<&str> { table.records.iter().map(|r| &r[c]).collect() };
    let names = column(name_col);
    let states = state_col.map(column);
    let years = vintage_col.map(column);
    let at = |row: usize, key: KeyColumn| {
        let col = match key {
            KeyColumn::Name => Some(name_col),
            KeyColumn::State => state_col,
            KeyColumn::Year => vintage_col,
        };
        table.location(row, col.unwrap_or(name_col))
    };

    let progress = Progress::new(table.len() as u64, "matching", config.quiet);
    let matched = match_columns(
        reference,
        config.settings,
        Columns {
            names: &names,
            states: states.as_deref(),
            years: years.as_deref(),
        },
        &decisions,
        &at,
        &|n| progress.inc(n),
    )?;
    progress.finish();

    // The added fields of each distinct key, formatted once.
    let fields: Vec<[String; 7]> = matched
        .keys
        .iter()
        .map(|k| added_fields(&k.resolution))
        .collect();
    let writer = || {
        let mut b = csv::WriterBuilder::new();
        b.delimiter(table.delimiter);
        b
    };
    write_to(&config.output, |w: &mut dyn Write| {
        let mut out = writer().from_writer(&mut *w);
        out.write_record(
            table
                .headers
                .iter()
                .map(String::as_str)
                .chain(added.iter().map(String::as_str)),
        )?;
        out.flush()?;
        drop(out);
        // Rows are written as CSV in blocks on every thread, each block by
        // its own writer with the same settings (a record's bytes do not
        // depend on the records before it), and the blocks go out in input
        // order: the same bytes whatever the thread count.
        let rows: Vec<(&csv::StringRecord, &u32)> =
            table.records.iter().zip(&matched.row_key).collect();
        for batch in rows.chunks(WRITE_BLOCK * 16) {
            let blocks: Vec<std::io::Result<Vec<u8>>> = batch
                .par_chunks(WRITE_BLOCK)
                .map(|block| {
                    let mut out = writer().from_writer(Vec::with_capacity(block.len() * 96));
                    for (record, &id) in block {
                        out.write_record(
                            record
                                .iter()
                                .chain(fields[id as usize].iter().map(String::as_str)),
                        )?;
                    }
                    out.into_inner().map_err(|e| e.into_error())
                })
                .collect();
            for block in blocks {
                w.write_all(&block?)?;
            }
        }
        Ok(())
    })?;
    if let Some(target) = &config.review {
        write_review(target, &matched.review)?;
    }
    let distinct_keys = match &config.distinct_keys {
        Some(target) => {
            let key_columns: Vec<&str> = [Some(name_col), state_col, vintage_col]
                .into_iter()
                .flatten()
                .map(|c| table.headers[c].as_str())
                .collect();
            write_distinct_keys(
                target,
                &key_columns,
                state_col.is_some(),
                &added,
                &matched,
                &fields,
            )?;
            Some(matched.keys.len())
        }
        None => None,
    };
    Ok(Report {
        tally: matched.tally(),
        warnings,
        review_written: config.review.is_some(),
        distinct_keys,
    })
}

/// One row per distinct (name, state, year): the key columns under the
/// input's names, the added columns, and how many input rows carry the key.
fn write_distinct_keys(
    target: &Target,
    key_columns: &[&str],
    has_state: bool,
    added: &[String],
    matched: &Matched,
    fields: &[[String; 7]],
) -> Result<()> {
    let rows_column = if key_columns.contains(&"rows") || added.iter().any(|a| a == "rows") {
        format!("{COLUMN_PREFIX}rows")
    } else {
        "rows".to_string()
    };
    write_to(target, |w: &mut dyn Write| {
        let mut out = csv::Writer::from_writer(w);
        let mut header: Vec<&str> = key_columns.to_vec();
        header.extend(added.iter().map(String::as_str));
        header.push(&rows_column);
        out.write_record(&header)?;
        for (k, f) in matched.keys.iter().zip(fields) {
            // Name, then state and year where the input has them.
            let mut row: Vec<String> = vec![k.name.clone()];
            if has_state {
                row.push(k.state.clone());
            }
            if let Some(y) = k.year {
                row.push(y.to_string());
            }
            row.extend(f.iter().cloned());
            row.push(k.rows.to_string());
            out.write_record(&row)?;
        }
        out.flush()?;
        Ok(())
    })
}

/// Runs the command: arguments -> checked configuration -> execute ->
/// summary.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = configure(&args, global)?;
    let report = execute(&config)?;
    for w in &report.warnings {
        warn(w);
    }
    summarize(global, &report);
    Ok(())
}

fn summarize(global: Global, report: &Report) {
    for line in summary_lines(report) {
        say(global, line);
    }
}

/// The run's summary as the command prints it on stderr (the demo quotes it).
pub fn summary_lines(report: &Report) -> Vec<String> {
    let t = &report.tally;
    let n = |s| t.by_status.get(&s).copied().unwrap_or(0);
    let methods: Vec<String> = t
        .by_method
        .iter()
        .map(|(m, c)| format!("{} {c}", m.as_str()))
        .collect();
    let mut lines = vec![
        format!(
            "regionkey match: {} rows, {} distinct names",
            t.rows, t.names
        ),
        format!(
            "  matched   {} ({})",
            n(Status::Matched),
            methods.join(", ")
        ),
        format!("  review    {}", n(Status::Review)),
        format!("  unmatched {}", n(Status::Unmatched)),
    ];
    if t.decisions > 0 {
        lines.push(format!(
            "  decisions used: {} of {}",
            t.decisions_used, t.decisions
        ));
    }
    if let Some(k) = report.distinct_keys {
        lines.push(format!("  distinct keys written: {k}"));
    }
    if t.open > 0 && !report.review_written {
        lines.push(format!(
            "  {} distinct names need a decision; write them out with --review FILE",
            t.open
        ));
    }
    lines
}
